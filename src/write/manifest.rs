//! `manifest.json`: every file written, with kind, units, description, CRS (EPSG code where there
//! is one, and the PROJ definition) and, for rasters, the storage and band list (the per-scenario
//! stack's bands with their cross- and along-track offsets); the scenarios; the settings; the
//! trackswing version; and a SHA-256 of the case file and every input, so an analyst can tell two
//! runs apart. Written last.

use super::{write_text_atomic, WriteError, Written};
use crate::accumulate::period::Period;
use crate::case::Case;
use crate::engine::RunResult;
use crate::summarise::scope::NotComputed;
use rayon::prelude::*;
use serde::Serialize;
use std::path::Path;

#[derive(Serialize)]
struct Input {
    role: String,
    path: String,
    sha256: String,
}

/// A band of a raster file, with every axis of its scenario for the per-scenario stack.
#[derive(Serialize)]
struct BandEntry {
    /// 1-based, as GDAL numbers bands.
    band: usize,
    description: String,
    #[serde(skip_serializing_if = "Option::is_none", flatten)]
    scenario: Option<BandScenario>,
}

/// The axes of a band's scenario.
#[derive(Serialize)]
struct BandScenario {
    cross_km: f64,
    along_km: f64,
    timing_h: f64,
    intensity: f64,
    warm_bias_k: f64,
}

/// How a file is georeferenced: EPSG code where there is one, and always the PROJ definition.
#[derive(Serialize)]
struct CrsEntry {
    #[serde(skip_serializing_if = "Option::is_none")]
    epsg: Option<u32>,
    proj: String,
}

/// One written file as the manifest lists it.
#[derive(Serialize)]
struct FileEntry<'a> {
    file: &'a str,
    kind: super::Kind,
    units: &'a str,
    description: &'a str,
    crs: CrsEntry,
    #[serde(skip_serializing_if = "Option::is_none")]
    raster: Option<serde_json::Value>,
    #[serde(skip_serializing_if = "Vec::is_empty")]
    bands: Vec<BandEntry>,
    /// SHA-256 of a file users edit (the styles): a re-run replaces it only while unchanged.
    #[serde(skip_serializing_if = "Option::is_none")]
    sha256: Option<&'a str>,
}

#[derive(Serialize)]
struct ScenarioEntry {
    band: usize,
    cross_km: f64,
    along_km: f64,
    timing_h: f64,
    intensity: f64,
    warm_bias_k: f64,
    label: String,
    baseline: bool,
    /// Normalised weight under the track-error prior.
    weight: f64,
}

/// The accumulation period as the manifest gives it.
#[derive(Serialize)]
struct PeriodEntry {
    /// Start of the first step (RFC 3339; null when unknown: a single step).
    start: Option<String>,
    /// Valid time of the last step.
    end: String,
    /// ISO 8601 interval, as in the GeoTIFFs' `accumulation_period`.
    iso8601: String,
    /// Steps summed.
    steps: usize,
    /// In words.
    text: String,
}

/// What the manifest says about the run besides its files.
pub struct About<'a> {
    /// Every warning of the run and the writing.
    pub warnings: &'a [String],
    /// The layers not computed, with the reason.
    pub not_computed: &'a [NotComputed],
    /// The period the totals cover.
    pub period: Option<&'a Period>,
    /// Normalised weight per scenario.
    pub weights: &'a [f64],
    /// The prior the weights come from (at the run's lead time when set from a track-error
    /// verification).
    pub prior: &'a crate::summarise::weights::TrackPrior,
    /// The members aligned on their weighted mean track, when they are.
    pub alignment: Option<&'a crate::engine::align::Alignment>,
    /// Each member's model reference time (its cycle), when its files say; empty for a run of
    /// one member.
    pub references: Vec<Option<chrono::DateTime<chrono::Utc>>>,
}

#[derive(Serialize)]
struct Manifest<'a> {
    trackswing_version: &'a str,
    caution: &'a str,
    /// What the run and the writing warned about, in order; an empty list when nothing.
    warnings: &'a [String],
    /// The layers the run could not compute, with the reason; an empty list when none.
    not_computed: &'a [NotComputed],
    /// The period the totals cover.
    accumulation_period: Option<PeriodEntry>,
    title: &'a str,
    case_file: String,
    member: &'a str,
    written_utc: String,
    crs: CrsEntry,
    grid: serde_json::Value,
    /// The lon/lat box read (`--region` or the case's `region`), the window of the model grid
    /// that covers it (rows and columns) and the model grid it was cut from.
    #[serde(skip_serializing_if = "Option::is_none")]
    region: Option<&'a crate::read::region::Window>,
    units: crate::units::Units,
    raster_type: crate::write::raster_type::RasterType,
    snowfall_bands: &'a [f64],
    methods: &'a crate::diagnose::Methods,
    taper: &'a crate::shift::Taper,
    steps: Vec<String>,
    scenarios: Vec<ScenarioEntry>,
    files: Vec<FileEntry<'a>>,
    inputs: Vec<Input>,
    /// The shard files the totals were merged from, when the run was computed in shards.
    #[serde(skip_serializing_if = "<[_]>::is_empty")]
    merged_from_shards: &'a [crate::engine::ShardUsed],
    /// With several members or method combinations: every member (name, weight share, track)
    /// and combination (methods, weight); the layers above the member layers describe the
    /// first member with the first combination.
    #[serde(skip_serializing_if = "Option::is_none")]
    ensemble: Option<serde_json::Value>,
    decisions: serde_json::Value,
}

fn sha256_of(path: &Path) -> Result<String, WriteError> {
    crate::shard::sha256_of(path).map_err(|source| WriteError::Io {
        path: path.to_path_buf(),
        source,
    })
}

/// Writes `manifest.json` describing `files` (which must already be in place).
pub fn write_manifest(
    dir: &Path,
    case: &Case,
    r: &RunResult,
    files: &[Written],
    about: &About,
) -> Result<(), WriteError> {
    let mut listed: Vec<(String, &Path)> = vec![("case".into(), &case.path)];
    let several = case.inputs.members.len() > 1;
    for m in &case.inputs.members {
        // With several members each file's role names its member.
        let role = |r: &str| {
            if several {
                format!("{r} of {}", m.name)
            } else {
                r.to_string()
            }
        };
        listed.push((role("terrain"), &m.terrain));
        listed.extend(m.steps.iter().map(|s| (role("step"), s.as_path())));
        if let Some(t) = &m.track {
            listed.push((role("track"), t));
        }
    }
    if let Some(t) = &case.inputs.towns {
        listed.push(("towns".into(), t));
    }
    // Step files of a continental case run to gigabytes: hashed in parallel.
    let inputs = listed
        .par_iter()
        .map(|(role, p)| {
            Ok(Input {
                role: role.clone(),
                path: p.display().to_string(),
                sha256: sha256_of(p)?,
            })
        })
        .collect::<Result<Vec<Input>, WriteError>>()?;
    let decisions = serde_json::json!({
        "track_error_prior": about.prior,
        "track_error_prior_note": "σ (or the explicit weights) should come from the user's own verification of track error at this lead time; the defaults are examples, not a climatology",
        "snow_thresholds": &case.summary.snow_thresholds,
        "snow_threshold_units": case.output.units.snow_unit(),
        "ice_thresholds": &case.summary.ice_thresholds,
        "ice_threshold_units": case.output.units.liquid_unit(),
        "ice_accretion": format!("{} × freezing-rain liquid (median flat-surface ratio, Sanders & Barjenbruch 2016)", crate::diagnose::slr::FREEZING_RAIN_ACCRETION_RATIO),
        "min_coverage": case.summary.min_coverage,
        "coverage": "share of the prior's weight carried by the scenarios with a total at a cell (prior_coverage.tif); the weighted summaries and min/max/range use those scenarios, weights renormalised, where it is at least min_coverage, and are nodata below",
        "quantiles": "weighted empirical CDF with each scenario at the middle of its step, linear between scenario values, clamped to the smallest/largest (Hyndman & Fan 1996 definition 5 when weights are equal)",
        "exceedance": "P(X ≥ threshold): the weight of the scenarios at or above the threshold",
        "sensitivity": format!("change per {} km of offset at offset 0: centred difference of the nearest offsets either side, one-sided where only one side was run", crate::summarise::sensitivity::PER_KM),
        "flip": format!("smallest √(cross² + along²) at which the dominant type changes or the snowfall halves or doubles, snowfalls floored at {} mm", crate::summarise::sensitivity::FLIP_FLOOR_MM),
        "bust_score": format!("(P90 − P10) / max(baseline, {} mm of snow)", crate::summarise::bust::SCORE_FLOOR_MM),
    });
    let gt = r.grid.georef.geotransform;
    let grid_crs = || CrsEntry {
        epsg: r.grid.georef.crs.epsg(),
        proj: r.grid.georef.crs.proj_string(),
    };
    let lonlat = || CrsEntry {
        epsg: Some(4326),
        proj: crate::geotiff::Crs::Wgs84Geographic.proj_string(),
    };
    let raster = match case.output.raster_type {
        crate::write::raster_type::RasterType::Float32 => serde_json::json!({
            "layout": "cloud-optimised GeoTIFF (256x256 tiles, overviews)",
            "sample_type": "Float32",
            "nodata": super::rasters::NODATA,
            "compression": "deflate, floating-point predictor",
        }),
        crate::write::raster_type::RasterType::Int16 => serde_json::json!({
            "layout": "cloud-optimised GeoTIFF (256x256 tiles, overviews)",
            "sample_type": "Int16, value = raw x band scale (GDAL scale/offset)",
            "nodata": -32768,
            "compression": "deflate, horizontal predictor",
        }),
    };
    let entries: Vec<FileEntry> = files
        .iter()
        .map(|f| {
            let is_raster = f.kind == super::Kind::Raster;
            let bands = if !is_raster {
                Vec::new()
            } else if f.bands.len() == r.scenarios.len() && f.bands.len() > 1 {
                f.bands
                    .iter()
                    .zip(&r.scenarios)
                    .enumerate()
                    .map(|(i, (d, s))| BandEntry {
                        band: i + 1,
                        description: d.clone(),
                        scenario: Some(BandScenario {
                            cross_km: s.cross_km,
                            along_km: s.along_km,
                            timing_h: s.timing_h,
                            intensity: s.intensity,
                            warm_bias_k: s.warm_bias_k,
                        }),
                    })
                    .collect()
            } else if !f.bands.is_empty() {
                f.bands
                    .iter()
                    .enumerate()
                    .map(|(i, d)| BandEntry {
                        band: i + 1,
                        description: d.clone(),
                        scenario: None,
                    })
                    .collect()
            } else {
                vec![BandEntry {
                    band: 1,
                    description: f.description.clone(),
                    scenario: None,
                }]
            };
            FileEntry {
                file: &f.file,
                kind: f.kind,
                units: &f.units,
                description: &f.description,
                crs: if is_raster { grid_crs() } else { lonlat() },
                raster: is_raster.then(|| raster.clone()),
                bands,
                sha256: f.sha256.as_deref(),
            }
        })
        .collect();
    let m = Manifest {
        trackswing_version: env!("CARGO_PKG_VERSION"),
        caution: crate::CAUTION,
        warnings: about.warnings,
        not_computed: about.not_computed,
        accumulation_period: about.period.map(|p| {
            let f = |t: &chrono::DateTime<chrono::Utc>| {
                t.to_rfc3339_opts(chrono::SecondsFormat::Secs, true)
            };
            PeriodEntry {
                start: p.start.as_ref().map(f),
                end: f(&p.end),
                iso8601: p.iso(),
                steps: p.steps,
                text: p.words(),
            }
        }),
        title: &case.title,
        case_file: case.path.display().to_string(),
        member: &case.member().name,
        written_utc: chrono::Utc::now().to_rfc3339_opts(chrono::SecondsFormat::Secs, true),
        crs: grid_crs(),
        grid: serde_json::json!({"columns": r.grid.nx, "rows": r.grid.ny, "geotransform": gt}),
        region: r.window.as_ref(),
        units: case.output.units,
        raster_type: case.output.raster_type,
        snowfall_bands: &case.output.snowfall_bands,
        methods: &case.physics.methods,
        taper: &case.physics.taper,
        steps: r.valid_times.iter().map(|t| t.to_rfc3339()).collect(),
        scenarios: r
            .scenarios
            .iter()
            .enumerate()
            .map(|(i, s)| ScenarioEntry {
                band: i + 1,
                cross_km: s.cross_km,
                along_km: s.along_km,
                timing_h: s.timing_h,
                intensity: s.intensity,
                warm_bias_k: s.warm_bias_k,
                label: s.label(),
                baseline: s.is_baseline(),
                weight: about.weights[i],
            })
            .collect(),
        files: entries,
        inputs,
        merged_from_shards: &r.shards,
        ensemble: case.is_ensemble().then(|| {
            let sum: f64 = case.inputs.members.iter().map(|m| m.weight).sum();
            serde_json::json!({
                "members": case.inputs.members.iter().enumerate().map(|(k, m)| serde_json::json!({
                    "name": m.name,
                    "reference_utc": about.references.get(k).copied().flatten().map(|t| t.to_rfc3339_opts(chrono::SecondsFormat::Secs, true)),
                    "weight": m.weight / sum,
                    "track": m.track.as_ref().map(|t| t.display().to_string())
                        .or_else(|| m.find_track.then(|| "found from sea-level pressure".to_string())),
                    "files": m.steps.len(),
                })).collect::<Vec<_>>(),
                "method_options": case.physics.options.iter().map(|o| serde_json::json!({
                    "precip_type": o.methods.ptype.name(),
                    "snow_ratio": o.methods.slr.name(),
                    "weight": o.weight,
                })).collect::<Vec<_>>(),
                "primary": "the layers of the run as issued and of each offset (snowfall_baseline and the other baseline layers, snowfall_by_scenario.tif, rain_snow_lines.geojson, transition_zones.geojson, snowfall_bands_baseline.geojson, the maps' lines) are the first member's with the first method combination; the weighted summaries (prior_coverage, mean, P10/P50/P90, exceedance, min/max/range, flip_zone, towns.csv, towns_bust.csv) pool every member, method combination and offset, each weighing member × method × track-error prior; the sensitivity and flip-distance layers and towns_bust.csv's flip and change columns are of the blend (the weighted mean over members and methods at each offset); snowfall_spread*.tif, snowfall_member_*.tif and snowfall_by_member_scenario.tif say where the spread comes from",
                "spread": "law of total variance: total = between members + between methods within a member + within (track offsets and other axes), weighted by member × method × track-error prior",
                "alignment": about.alignment.map(|a| alignment_entry(case, a)),
            })
        }),
        decisions,
    };
    let text = serde_json::to_string_pretty(&m).expect("manifest serialises");
    write_text_atomic(dir, "manifest.json", &(text + "\n"))?;
    Ok(())
}

/// The members' weighted mean track (degrees, to 0.001°) and each member's displacement onto it
/// per step (east and north km, to the metre), for the manifest's ensemble section.
fn alignment_entry(case: &Case, a: &crate::engine::align::Alignment) -> serde_json::Value {
    let round = |x: f64| (x * 1000.0).round() / 1000.0;
    serde_json::json!({
        "what": "each member's run as issued with its low moved at every step onto the members' weighted mean track (mean of the low centres on the sphere, member weights); track_explains_members = 1 − Var(aligned)/Var(as issued) between the members",
        "mean_track": a.times.iter().zip(&a.mean_track).map(|(t, c)| serde_json::json!({
            "valid": t.to_rfc3339(),
            "lon": c.map(|c| round(c.0)),
            "lat": c.map(|c| round(c.1)),
        })).collect::<Vec<_>>(),
        "displacement_km": case.inputs.members.iter().zip(&a.displacements).map(|(m, d)| serde_json::json!({
            "member": m.name,
            "east_north_km": d.iter().map(|x| x.map(|(e, n)| [round(e), round(n)])).collect::<Vec<_>>(),
        })).collect::<Vec<_>>(),
    })
}
