//! The case file: what to read, which offsets to try, which methods to use, where to write.
//!
//! TOML, documented in README.md ("The case file"). Unknown keys are errors, so a misspelt
//! setting never silently falls back to a default. Paths are relative to the case file's folder.
//! A case lists its model runs as `[[member]]` tables; this version runs one member per case.

mod error;
mod files;
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
    /// `--no-dry-air`.
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
    /// The member to run.
    pub member: Member,
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
}

/// How the scenarios are weighed and summarised.
#[derive(Clone, Debug)]
pub struct SummarySettings {
    /// The prior over track offsets.
    pub prior: TrackPrior,
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
        let m = &self.inputs.member;
        let mut v = vec![self.path.clone(), m.terrain.clone()];
        v.extend(m.steps.iter().cloned());
        v.extend(m.track.iter().cloned());
        v.extend(self.inputs.towns.iter().cloned());
        v
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
        let ModelFiles { files, skipped } = expand_model_args(files)?;
        let abs = |p: &Path| -> String {
            std::path::absolute(p)
                .unwrap_or_else(|_| p.to_path_buf())
                .to_string_lossy()
                .into_owned()
        };
        let name = files[0]
            .file_stem()
            .and_then(|s| s.to_str())
            .unwrap_or("model")
            .to_string();
        let file = CaseFile {
            title: format!(
                "model files {}{}",
                files[0].display(),
                if files.len() > 1 {
                    format!(" and {} more", files.len() - 1)
                } else {
                    String::new()
                }
            ),
            towns: towns.map(abs),
            region: None,
            member: vec![MemberFile {
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
            }],
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
        case.path = files[0].clone();
        case.inputs.member.skipped = skipped;
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
        assert!(c.physics.methods.dry_air, "dry air is on by default");
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
        assert_eq!(c.inputs.member.steps.len(), 2);
        assert!(c.inputs.member.steps[0].ends_with("f/s_00.tif"));
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
                along_sigma_km: crate::summarise::weights::EXAMPLE_ALONG_SIGMA_KM
            }
        );
        let load_err = |extra: &str| {
            let (_d, p) = setup(&format!("{GOOD}{extra}"));
            Case::load(&p, &Overrides::default())
                .unwrap_err()
                .to_string()
        };
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
}
