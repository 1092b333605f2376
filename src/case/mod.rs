//! The case file: what to read, which offsets to try, which methods to use, where to write.
//!
//! TOML, documented in README.md ("The case file"). Unknown keys are errors, so a misspelt
//! setting never silently falls back to a default. Paths are relative to the case file's folder.
//! A case lists its model runs as `[[member]]` tables; this version runs one member per case.

mod error;
mod files;
mod here;
mod member;
mod prior;
mod resolve;
pub mod schema;

pub use crate::read::member::{InputFormat, Member};
pub use error::CaseError;
pub use files::{expand_model_args, skipped_summary, ModelFiles};
pub use resolve::*;
pub use schema::{CaseFile, MemberFile};

use crate::diagnose::Methods;
use crate::read::region::Region;
use crate::scenario::Axes;
use crate::shift::Taper;
use crate::summarise::weights::TrackPrior;
use crate::units::Units;
use crate::write::raster_type::RasterType;
use schema::{MethodsFile, OffsetsFile, OutputFile, ShiftFile, StepFiles, WeightsFile};
use std::path::{Path, PathBuf};

/// Settings given on the command line, which win over the case file.
#[derive(Clone, Debug, Default)]
pub struct Overrides {
    /// `--cross`.
    pub cross: Option<String>,
    /// `--along`.
    pub along: Option<String>,
    /// `--out`.
    pub out: Option<PathBuf>,
    /// `--units`.
    pub units: Option<String>,
    /// `--snow-ratio`.
    pub snow_ratio: Option<String>,
    /// `--force`: write into a non-empty output folder trackswing did not write, and run more
    /// scenarios than [`crate::engine::budget::SCENARIOS_REFUSE`].
    pub force: bool,
    /// `--precip-type`.
    pub precip_type: Option<String>,
    /// `--dry-air`: turn the dry-air treatment on whatever the case file says.
    pub dry_air: bool,
    /// `--no-dry-air`: turn it off whatever the case file says.
    pub no_dry_air: bool,
    /// `--timing`.
    pub timing: Option<String>,
    /// `--intensity`.
    pub intensity: Option<String>,
    /// `--warm-bias`.
    pub warm_bias: Option<String>,
    /// `--raster-type`.
    pub raster_type: Option<String>,
    /// `--cross-sigma`, km.
    pub cross_sigma: Option<f64>,
    /// `--along-sigma`, km.
    pub along_sigma: Option<f64>,
    /// `--min-coverage`: least share of the prior's weight with data to summarise a cell.
    pub min_coverage: Option<f64>,
    /// `--report` (and `demo`): write report.html with the set.
    pub report: bool,
    /// `--region W,S,E,N`.
    pub region: Option<String>,
}

/// A case ready to run, in the parts the stages read.
#[derive(Clone, Debug)]
pub struct Case {
    /// The case file.
    pub path: PathBuf,
    /// Title.
    pub title: String,
    /// What to read.
    pub inputs: Inputs,
    /// The scenario axes (track offsets, timing, intensity, warm bias).
    pub axes: Axes,
    /// How the storm is moved and the column diagnosed.
    pub physics: Physics,
    /// How the scenarios are weighed and summarised.
    pub summary: SummarySettings,
    /// Where and how the layers are written.
    pub output: OutputSettings,
    /// Write into a non-empty output folder trackswing did not write, and run more scenarios
    /// than [`crate::engine::budget::SCENARIOS_REFUSE`].
    pub force: bool,
}

/// What a case reads.
#[derive(Clone, Debug)]
pub struct Inputs {
    /// The members (models, cycles or ensemble members), in the case's order except that the
    /// member `[output] grid` names comes first; the first is the primary, whose grid is the
    /// output grid and whose run the single-member layers describe.
    pub members: Vec<Member>,
    /// Towns CSV.
    pub towns: Option<PathBuf>,
    /// The lon/lat box of the model grid to read, and where it was given (`--region`, or the
    /// case file and `region`), for messages.
    pub region: Option<(Region, String)>,
}

/// How the storm is moved and the column diagnosed.
#[derive(Clone, Debug)]
pub struct Physics {
    /// Displacement taper.
    pub taper: Taper,
    /// Methods.
    pub methods: Methods,
    /// The ratio the `fixed` snow-ratio method uses (also when another method runs, for
    /// comparisons such as the sounding view).
    pub fixed_ratio: f64,
    /// Every method combination the case lists, with its weight (adding up to 1); `methods`
    /// is the first.
    pub options: Vec<MethodOption>,
    /// A displacement per valid time that moves the storm in every scenario in place of the
    /// scenario's offsets; set only on the case of a member aligned on the members' mean track
    /// (whose only scenario is the baseline), `None` otherwise.
    pub explicit_shifts: Option<crate::shift::ExplicitShifts>,
}

/// One combination of methods and its weight in the blend.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct MethodOption {
    /// The methods.
    pub methods: Methods,
    /// Its weight (the options' weights add up to 1).
    pub weight: f64,
}

impl MethodOption {
    /// `precip-type/snow-ratio`, e.g. `energy-area/growth-zone`, for labels and band metadata.
    pub fn label(&self) -> String {
        format!("{}/{}", self.methods.ptype.name(), self.methods.slr.name())
    }
}

/// How the scenarios are weighed and summarised.
#[derive(Clone, Debug)]
pub struct SummarySettings {
    /// The prior over track offsets (when `track_error` is set, a stand-in until the run's lead
    /// time is known: the summary uses [`crate::summarise::lead_prior`]).
    pub prior: TrackPrior,
    /// The track-error verification the prior is taken from at the run's lead time.
    pub track_error: Option<crate::summarise::lead_prior::TrackErrorPrior>,
    /// Least share of the prior's weight with data for a cell to be summarised
    /// ([`crate::summarise::coverage`]).
    pub min_coverage: f64,
    /// Snowfall thresholds, output snow units, increasing.
    pub snow_thresholds: Vec<f64>,
    /// Ice-accretion thresholds, output liquid units, increasing.
    pub ice_thresholds: Vec<f64>,
}

/// Where and how the layers are written.
#[derive(Clone, Debug)]
pub struct OutputSettings {
    /// Output folder.
    pub out_dir: PathBuf,
    /// Output units.
    pub units: Units,
    /// Sample type of the GeoTIFF layers.
    pub raster_type: RasterType,
    /// Snowfall isoband thresholds in the output units, increasing (the snowfall thresholds unless
    /// the case gives its own).
    pub snowfall_bands: Vec<f64>,
    /// Write report.html with the set.
    pub report: bool,
}

impl Case {
    /// Reads, checks and resolves a case file with command-line overrides.
    pub fn load(path: &Path, over: &Overrides) -> Result<Self, CaseError> {
        let text = std::fs::read_to_string(path).map_err(|source| CaseError::Io {
            path: path.to_path_buf(),
            source,
        })?;
        let file: CaseFile = toml::from_str(&text).map_err(|e| CaseError::Syntax {
            path: path.to_path_buf(),
            // The parser's message is a snippet over several lines (the line, then a caret under
            // the column): kept as it is, so the caret stays under the column it points at.
            message: format!("\n{}", e.to_string().trim_end()),
        })?;
        resolve::resolve(path, file, over)
    }

    /// Every input file of the run: the case, terrain, steps, track and towns.
    pub fn inputs(&self) -> Vec<PathBuf> {
        let mut v = vec![self.path.clone()];
        for m in &self.inputs.members {
            v.push(m.terrain.clone());
            v.extend(m.steps.iter().cloned());
            v.extend(m.track.iter().cloned());
        }
        v.extend(self.inputs.towns.iter().cloned());
        v
    }

    /// The primary member: the one `[output] grid` names, else the first the case lists.
    pub fn member(&self) -> &Member {
        &self.inputs.members[0]
    }

    /// Whether the case runs more than one member or method combination.
    pub fn is_ensemble(&self) -> bool {
        self.inputs.members.len() > 1 || self.physics.options.len() > 1
    }

    /// The case for one member and one method combination: what the engine runs.
    pub fn group(&self, member: usize, option: usize) -> Case {
        let mut c = self.clone();
        c.inputs.members = vec![self.inputs.members[member].clone()];
        c.physics.methods = self.physics.options[option].methods;
        c.physics.options = vec![MethodOption {
            methods: c.physics.methods,
            weight: 1.0,
        }];
        c
    }
}

impl Case {
    /// A case for model files given on the command line, with the default methods: `track` is
    /// a track file or `find`; offsets default to 0; outputs go to `--out` or
    /// `./trackswing-out`.
    pub fn from_model_files(
        files: &[PathBuf],
        track: Option<&str>,
        towns: Option<&Path>,
        over: &Overrides,
    ) -> Result<Self, CaseError> {
        Self::from_model_members(&[(None, files.to_vec())], track, towns, over)
    }

    /// A case of several members given on the command line (`--member NAME=FILES`), each a
    /// list of files, folders or patterns; a member without a name is named after its first
    /// file. `track` (a file, or `find`: each member's own low) applies to every member.
    pub fn from_model_members(
        members: &[(Option<String>, Vec<PathBuf>)],
        track: Option<&str>,
        towns: Option<&Path>,
        over: &Overrides,
    ) -> Result<Self, CaseError> {
        let abs = |p: &Path| -> String {
            std::path::absolute(p)
                .unwrap_or_else(|_| p.to_path_buf())
                .to_string_lossy()
                .into_owned()
        };
        let mut found = Vec::new();
        let mut entries = Vec::new();
        for (name, items) in members {
            let ModelFiles { files, skipped } = expand_model_args(items)?;
            let name = name.clone().unwrap_or_else(|| {
                files[0]
                    .file_stem()
                    .and_then(|s| s.to_str())
                    .unwrap_or("model")
                    .to_string()
            });
            entries.push(MemberFile {
                name,
                terrain: None,
                steps: None,
                model: Some(StepFiles::List(files.iter().map(|f| abs(f)).collect())),
                format: None,
                track: track.map(|t| {
                    if t == "find" {
                        t.to_string()
                    } else {
                        abs(Path::new(t))
                    }
                }),
                weight: None,
            });
            found.push((files, skipped));
        }
        let first = &found[0].0;
        let file = CaseFile {
            title: if members.len() > 1 {
                format!(
                    "{} members: {}",
                    entries.len(),
                    entries
                        .iter()
                        .map(|m| m.name.as_str())
                        .collect::<Vec<_>>()
                        .join(", ")
                )
            } else {
                format!(
                    "model files {}{}",
                    first[0].display(),
                    if first.len() > 1 {
                        format!(" and {} more", first.len() - 1)
                    } else {
                        String::new()
                    }
                )
            },
            towns: towns.map(abs),
            region: None,
            member: entries,
            offsets: OffsetsFile::default(),
            shift: ShiftFile::default(),
            methods: MethodsFile::default(),
            output: OutputFile {
                folder: Some(abs(Path::new("trackswing-out"))),
                units: None,
                raster_type: None,
                snowfall_bands: None,
                ..OutputFile::default()
            },
            weights: WeightsFile::default(),
        };
        let mut case = resolve::resolve(Path::new("command line"), file, over)?;
        // No case file exists; the manifest hashes `path`, so it names the first model file.
        case.path = first[0].clone();
        for (m, (_, skipped)) in case.inputs.members.iter_mut().zip(found) {
            m.skipped = skipped;
        }
        Ok(case)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::diagnose::{PtypeMethod, SlrMethod};

    fn setup(case: &str) -> (tempfile::TempDir, PathBuf) {
        let d = tempfile::tempdir().unwrap();
        std::fs::create_dir(d.path().join("f")).unwrap();
        for f in [
            "terrain.tif",
            "f/s_01.tif",
            "f/s_00.tif",
            "track.csv",
            "towns.csv",
        ] {
            std::fs::write(d.path().join(f), b"x").unwrap();
        }
        let p = d.path().join("case.toml");
        std::fs::write(&p, case).unwrap();
        (d, p)
    }

    const GOOD: &str = r#"
title = "unit test"
towns = "towns.csv"
[[member]]
name = "m"
terrain = "terrain.tif"
steps = "f/s_*.tif"
track = "track.csv"
[offsets]
cross_km = "-20:20:10"
along_km = [0, 50]
[methods]
snow_ratio = "max-column-temperature"
"#;

    #[test]
    fn methods_and_axes_from_the_file_and_the_flags() {
        let (_d, p) = setup(
            &GOOD
                .replace(
                    "[methods]",
                    "[methods]\nprecip_type = \"partial-thickness\"\ndry_air = false",
                )
                .replace(
                    "along_km = [0, 50]",
                    "along_km = [0, 50]\ntiming_h = \"-3:3:3\"\nintensity = [0.8, 1.2]",
                ),
        );
        let c = Case::load(&p, &Overrides::default()).unwrap();
        assert_eq!(c.physics.methods.ptype, PtypeMethod::PartialThickness);
        assert!(!c.physics.methods.dry_air);
        assert_eq!(c.axes.timing_h, vec![-3.0, 0.0, 3.0]);
        assert_eq!(c.axes.intensity, vec![0.8, 1.2]);
        assert_eq!(c.axes.warm_bias_k, vec![0.0]);
        assert_eq!(c.axes.product_len(), 5 * 2 * 3 * 2);
        let over = Overrides {
            precip_type: Some("surface-logistic".into()),
            snow_ratio: Some("growth-zone".into()),
            warm_bias: Some("-1,0,1".into()),
            ..Default::default()
        };
        let c = Case::load(&p, &over).unwrap();
        assert_eq!(c.physics.methods.ptype, PtypeMethod::SurfaceLogistic);
        assert_eq!(c.physics.methods.slr, SlrMethod::GrowthZone);
        assert_eq!(c.axes.warm_bias_k, vec![-1.0, 0.0, 1.0]);
        let (_d, p) = setup(GOOD);
        let c = Case::load(&p, &Overrides::default()).unwrap();
        // Off by default: the model's precipitation already lost what evaporated below its
        // cloud (docs/SCIENCE.md §3); `--dry-air` turns it on.
        assert!(!c.physics.methods.dry_air, "dry air is off by default");
        let c = Case::load(
            &p,
            &Overrides {
                dry_air: true,
                ..Default::default()
            },
        )
        .unwrap();
        assert!(c.physics.methods.dry_air);
        let (_d, p) = setup(&GOOD.replace("[methods]", "[methods]\ndry_air = true"));
        assert!(
            Case::load(&p, &Overrides::default())
                .unwrap()
                .physics
                .methods
                .dry_air
        );
        let c = Case::load(
            &p,
            &Overrides {
                no_dry_air: true,
                ..Default::default()
            },
        )
        .unwrap();
        assert!(!c.physics.methods.dry_air);
        for (over, expect) in [
            (
                Overrides {
                    precip_type: Some("thickness".into()),
                    ..Default::default()
                },
                "--precip-type",
            ),
            (
                Overrides {
                    intensity: Some("0".into()),
                    ..Default::default()
                },
                "--intensity",
            ),
            (
                Overrides {
                    timing: Some("-100".into()),
                    ..Default::default()
                },
                "--timing",
            ),
        ] {
            let e = Case::load(&p, &over).unwrap_err().to_string();
            assert!(e.contains(expect), "{e}");
        }
    }

    #[test]
    fn resolves_a_good_case() {
        let (_d, p) = setup(GOOD);
        let c = Case::load(&p, &Overrides::default()).unwrap();
        assert_eq!(c.axes.cross_km, vec![-20.0, -10.0, 0.0, 10.0, 20.0]);
        assert_eq!(c.axes.along_km, vec![0.0, 50.0]);
        assert_eq!(c.member().steps.len(), 2);
        assert!(c.member().steps[0].ends_with("f/s_00.tif"));
        assert_eq!(c.physics.methods.slr, SlrMethod::MaxColumnTemperature);
        assert_eq!(c.physics.taper.core_radius_km, DEFAULT_CORE_KM);
        let over = Overrides {
            cross: Some("0".into()),
            units: Some("us".into()),
            ..Default::default()
        };
        let c = Case::load(&p, &over).unwrap();
        assert_eq!(c.axes.cross_km, vec![0.0]);
        assert_eq!(c.output.units, Units::Us);
    }

    #[test]
    fn weights_and_thresholds() {
        let (_d, p) = setup(GOOD);
        let c = Case::load(&p, &Overrides::default()).unwrap();
        assert_eq!(c.summary.prior, TrackPrior::default());
        assert_eq!(
            c.summary.snow_thresholds,
            vec![1.0, 2.0, 5.0, 10.0, 20.0, 50.0]
        );
        assert_eq!(c.output.snowfall_bands, c.summary.snow_thresholds);
        let over = Overrides {
            units: Some("us".into()),
            cross_sigma: Some(30.0),
            ..Default::default()
        };
        let c = Case::load(&p, &over).unwrap();
        assert_eq!(
            c.summary.snow_thresholds,
            vec![0.5, 1.0, 2.0, 5.0, 10.0, 20.0]
        );
        assert_eq!(
            c.summary.prior,
            TrackPrior::Gaussian {
                cross_sigma_km: 30.0,
                along_sigma_km: crate::summarise::weights::EXAMPLE_ALONG_SIGMA_KM,
                cross_mean_km: 0.0,
                along_mean_km: 0.0,
                basis: None,
            }
        );
        let load_err = |extra: &str| {
            let (_d, p) = setup(&format!("{GOOD}{extra}"));
            Case::load(&p, &Overrides::default())
                .unwrap_err()
                .to_string()
        };
        let e = load_err("[weights]\nfrom_track_error = \"te.csv\"\n");
        assert!(
            e.contains("weights.from_track_error") && e.contains("te.csv"),
            "{e}"
        );
        let e = load_err("[weights]\nfrom_track_error = \"te.csv\"\ncross_sigma_km = 5\n");
        assert!(
            e.contains("from_track_error") && e.contains("not both"),
            "{e}"
        );
        let e = load_err("[weights]\ncross_sigma_km = -5\n");
        assert!(e.contains("'weights'") && e.contains("positive"), "{e}");
        let e = load_err("[weights]\nexplicit = [{ cross_km = 0, along_km = 0, weight = 1 }]\n");
        assert!(
            e.contains("weights.explicit") && e.contains("cross -20 km, along 0 km"),
            "{e}"
        );
        let e = load_err("[output]\nthresholds = [5, 2.5]\n").replace('\n', " ");
        assert!(
            e.contains("output.thresholds") && e.contains("increasing"),
            "{e}"
        );
    }

    #[test]
    fn unknown_keys_and_bad_values_are_errors() {
        let (_d, p) = setup(&GOOD.replace("[offsets]", "[offsets]\ncross = 3"));
        let e = Case::load(&p, &Overrides::default())
            .unwrap_err()
            .to_string();
        assert!(e.contains("unknown field") && e.contains("cross"), "{e}");
        let (_d, p) = setup(&GOOD.replace("\"-20:20:10\"", "\"20:-20:10\""));
        let e = Case::load(&p, &Overrides::default())
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("offsets.cross_km") && e.contains("end is before"),
            "{e}"
        );
        let (_d, p) = setup(&GOOD.replace("track.csv", "nowhere.csv"));
        let e = Case::load(&p, &Overrides::default())
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("member[0].track") && e.contains("does not exist"),
            "{e}"
        );
        let (_d, p) = setup(&GOOD.replace("title = \"unit test\"", "title = 3"));
        let e = Case::load(&p, &Overrides::default())
            .unwrap_err()
            .to_string();
        assert!(e.contains("case.toml") && e.contains("title"), "{e}");
        let (_d, p) = setup(GOOD);
        let over = Overrides {
            along: Some("0:10:0".into()),
            ..Default::default()
        };
        let e = Case::load(&p, &over).unwrap_err().to_string();
        assert!(
            e.contains("--along") && e.contains("step must be positive"),
            "{e}"
        );
    }

    #[test]
    fn several_members_and_method_lists() {
        let two = GOOD.replace(
            "[offsets]",
            "weight = 3\n[[member]]\nname = \"n\"\nterrain = \"terrain.tif\"\nsteps = \"f/s_*.tif\"\ntrack = \"track.csv\"\n[offsets]",
        );
        let two = two.replace(
            "snow_ratio = \"max-column-temperature\"",
            "snow_ratio = \"fixed, growth-zone\"\nprecip_type = \"energy-area,surface-logistic\"\nsnow_ratio_weights = [3, 1]",
        );
        let (_d, p) = setup(&two);
        let c = Case::load(&p, &Overrides::default()).unwrap();
        assert_eq!(c.inputs.members.len(), 2);
        assert_eq!(
            (c.inputs.members[0].weight, c.inputs.members[1].weight),
            (3.0, 1.0)
        );
        assert!(c.is_ensemble());
        // Precipitation type outer, snow ratio inner; weights ½ × ¾, ½ × ¼.
        let labels: Vec<String> = c.physics.options.iter().map(|o| o.label()).collect();
        assert_eq!(
            labels,
            [
                "energy-area/fixed",
                "energy-area/growth-zone",
                "surface-logistic/fixed",
                "surface-logistic/growth-zone"
            ]
        );
        let w: Vec<f64> = c.physics.options.iter().map(|o| o.weight).collect();
        assert_eq!(w, [0.375, 0.125, 0.375, 0.125]);
        assert_eq!(c.physics.methods, c.physics.options[0].methods);
        // The group case runs one member with one combination.
        let g = c.group(1, 3);
        assert_eq!(g.inputs.members.len(), 1);
        assert_eq!(g.member().name, "n");
        assert_eq!(g.physics.methods.ptype, PtypeMethod::SurfaceLogistic);
        assert!(!g.is_ensemble());
        // The files of both members are inputs (the output folder must never replace one).
        assert_eq!(c.inputs().len(), 1 + 2 * 4 + 1);

        for (from, to, field) in [
            ("name = \"n\"", "name = \"m\"", "member[1].name"),
            ("weight = 3", "weight = 0", "member[0].weight"),
            (
                "snow_ratio_weights = [3, 1]",
                "snow_ratio_weights = [1]",
                "methods.snow_ratio_weights",
            ),
            (
                "\"fixed, growth-zone\"",
                "\"fixed,fixed\"",
                "methods.snow_ratio",
            ),
            (
                "\"fixed, growth-zone\"",
                "\"fixed,deep\"",
                "methods.snow_ratio",
            ),
        ] {
            let (_d, p) = setup(&two.replace(from, to));
            let e = Case::load(&p, &Overrides::default())
                .unwrap_err()
                .to_string();
            assert!(e.contains(&format!("'{field}'")), "{to}: {e}");
        }
        let over = Overrides {
            snow_ratio: Some("growth-zone,max-column-temperature".into()),
            ..Overrides::default()
        };
        let (_d, p) = setup(GOOD);
        let c = Case::load(&p, &over).unwrap();
        assert_eq!(c.physics.options.len(), 2);
        assert_eq!(c.physics.methods.slr, SlrMethod::GrowthZone);
    }

    #[test]
    fn the_output_grid_member_becomes_the_primary() {
        let three = GOOD.replace(
            "[offsets]",
            "[[member]]\nname = \"n\"\nterrain = \"terrain.tif\"\nsteps = \"f/s_*.tif\"\ntrack = \"track.csv\"\n[[member]]\nname = \"o\"\nterrain = \"terrain.tif\"\nsteps = \"f/s_*.tif\"\ntrack = \"track.csv\"\n[output]\ngrid = \"o\"\n[offsets]",
        );
        let (_d, p) = setup(&three);
        let c = Case::load(&p, &Overrides::default()).unwrap();
        let names: Vec<&str> = c.inputs.members.iter().map(|m| m.name.as_str()).collect();
        assert_eq!(names, ["o", "m", "n"]);
        assert_eq!(c.member().name, "o");
        let (_d, p) = setup(&three.replace("grid = \"o\"", "grid = \"p\""));
        let e = Case::load(&p, &Overrides::default())
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("'output.grid'")
                && e.contains("'p' names no member")
                && e.contains("'m', 'n', 'o'"),
            "{e}"
        );
    }
}
