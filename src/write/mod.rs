//! Stage 6, write: GeoTIFF rasters, GeoJSON lines and points, the towns table, the manifest.
//!
//! The whole set is written into a staging folder beside the output folder and swapped in at
//! once ([`folder::Staging`]); within it each file is written under a temporary name and renamed
//! when complete, and the manifest is written last. An interrupted run leaves the previous
//! complete set (or nothing), never a half-written layer or a mix of two runs.

pub mod bust;
pub mod decisions;
pub mod folder;
pub mod html;
pub mod isobands;
pub mod lines;
pub mod manifest;
pub mod maps;
pub mod members;
pub mod polygons;
pub mod raster_type;
pub mod rasters;
pub mod report;
pub mod report_members;
pub mod styles;
pub mod towns;
pub mod zones;

use crate::summarise::scope::{Needs, NotComputed};
use crate::summarise::summary::Summary;
use std::io::Write;
use std::path::{Path, PathBuf};

/// Why outputs could not be written.
#[derive(Debug, thiserror::Error)]
pub enum WriteError {
    /// A file or folder could not be written.
    #[error("{path}: cannot write: {source}")]
    Io {
        /// The file or folder.
        path: PathBuf,
        /// The cause.
        source: std::io::Error,
    },
    /// The GeoTIFF encoder failed.
    #[error(transparent)]
    GeoTiff(#[from] crate::geotiff::GeoTiffError),
    /// report.html could not be built.
    #[error(transparent)]
    Report(Box<report::ReportError>),
    /// Contouring failed.
    #[error("contouring the rain–snow line failed: {0}")]
    Contour(String),
    /// The output folder is unusable.
    #[error("{path}: {what}")]
    Folder {
        /// The folder.
        path: PathBuf,
        /// What is wrong.
        what: String,
    },
}

/// What a file is, for the manifest.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Kind {
    /// GeoTIFF.
    Raster,
    /// GeoJSON.
    Vector,
    /// CSV.
    Table,
    /// PNG quicklook.
    Image,
    /// The self-contained HTML report.
    Report,
    /// A GIS style for a raster (QGIS `.qml`, OGC `.sld`).
    Style,
}

/// One written file, for the manifest.
#[derive(Clone, Debug, serde::Serialize)]
pub struct Written {
    /// File name within the output folder.
    pub file: String,
    /// Raster, vector or table.
    pub kind: Kind,
    /// Units of the values (`cm`, `mm`, `1` for fractions, or a list for tables).
    pub units: String,
    /// What it shows.
    pub description: String,
    /// Band descriptions for multi-band rasters.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub bands: Vec<String>,
    /// SHA-256 of the bytes written, for files users edit (the styles): a re-run replaces the
    /// file only while it still has these bytes.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub sha256: Option<String>,
}

/// Writes `bytes` (produced by `fill`) to `dir/name` atomically: a temporary file in the same
/// folder, flushed and synced, then renamed.
pub fn write_atomic(
    dir: &Path,
    name: &str,
    fill: impl FnOnce(&Path) -> Result<(), WriteError>,
) -> Result<PathBuf, WriteError> {
    let final_path = dir.join(name);
    let tmp = dir.join(format!(".{name}.partial"));
    let result = fill(&tmp).and_then(|_| {
        std::fs::File::open(&tmp)
            .and_then(|f| f.sync_all())
            .map_err(|source| WriteError::Io {
                path: tmp.clone(),
                source,
            })?;
        std::fs::rename(&tmp, &final_path).map_err(|source| WriteError::Io {
            path: final_path.clone(),
            source,
        })
    });
    if result.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    result.map(|_| final_path)
}

/// Writes text atomically.
pub fn write_text_atomic(dir: &Path, name: &str, text: &str) -> Result<PathBuf, WriteError> {
    write_atomic(dir, name, |tmp| {
        let mut f = std::fs::File::create(tmp).map_err(|source| WriteError::Io {
            path: tmp.to_path_buf(),
            source,
        })?;
        f.write_all(text.as_bytes())
            .map_err(|source| WriteError::Io {
                path: tmp.to_path_buf(),
                source,
            })
    })
}

/// The properties that say which scenario a vector feature belongs to: its index (the band of
/// the per-scenario stack), every axis as a number (`cross_km`, `along_km`, `timing_h`,
/// `intensity`, `warm_bias_k`, so a GIS can filter on each), the label in words and whether it
/// is the model as issued.
pub fn scenario_properties(index: usize, s: &crate::scenario::Scenario) -> geojson::JsonObject {
    let mut props = geojson::JsonObject::new();
    props.insert("scenario".into(), index.into());
    props.insert("cross_km".into(), s.cross_km.into());
    props.insert("along_km".into(), s.along_km.into());
    props.insert("timing_h".into(), s.timing_h.into());
    props.insert("intensity".into(), s.intensity.into());
    props.insert("warm_bias_k".into(), s.warm_bias_k.into());
    props.insert("label".into(), s.label().into());
    props.insert("baseline".into(), s.is_baseline().into());
    props
}

/// The prior in words, for maps and the report.
pub fn prior_words(p: &crate::summarise::weights::TrackPrior) -> String {
    use crate::summarise::weights::TrackPrior;
    match p {
        TrackPrior::Gaussian {
            cross_sigma_km,
            along_sigma_km,
            cross_mean_km,
            along_mean_km,
            basis,
        } => match basis {
            None => format!(
                "Gaussian, σ {cross_sigma_km} km across and {along_sigma_km} km along the track (set σ from your own track-error verification)"
            ),
            Some(basis) => format!(
                "Gaussian, σ {cross_sigma_km} km across and {along_sigma_km} km along the track, centred {cross_mean_km} km across (left of the motion positive) and {along_mean_km} km along (ahead positive) the track as issued: the mean error of past forecasts ({basis})"
            ),
        },
        TrackPrior::Explicit { source, weights } => {
            format!("explicit weights for {} offsets ({source})", weights.len())
        }
    }
}

/// Dataset metadata of every GeoTIFF: version, case, caution and the accumulation period
/// (ISO 8601 interval).
pub fn meta(case: &crate::case::Case, sum: &Summary) -> Vec<(String, String)> {
    let mut meta = vec![
        (
            "trackswing_version".to_string(),
            env!("CARGO_PKG_VERSION").to_string(),
        ),
        ("case_title".to_string(), case.title.clone()),
        ("caution".to_string(), crate::CAUTION.to_string()),
    ];
    if let Some(p) = &sum.period {
        meta.push(("accumulation_period".to_string(), p.iso()));
    }
    meta
}

/// The decision products: weighted layers, sensitivity and flip rasters, the bust-prone towns
/// and the quicklook maps.
fn write_decision_products(
    dir: &Path,
    case: &crate::case::Case,
    r: &crate::engine::RunResult,
    sum: &Summary,
    rain_snow: &[Vec<Vec<[f64; 2]>>],
    skipped: &mut Vec<NotComputed>,
) -> Result<Vec<Written>, WriteError> {
    let mut meta = meta(case, sum);
    meta.push(("track_error_prior".to_string(), prior_words(&sum.prior)));
    let settings = decisions::DecisionSettings {
        units: case.output.units,
        snow_thresholds: &case.summary.snow_thresholds,
        ice_thresholds: &case.summary.ice_thresholds,
        meta: &meta,
        words: sum.words(),
    };
    let (mut files, not) = decisions::write_decision_rasters(dir, r, sum, &settings)?;
    skipped.extend(not);
    // A table of bust scores from a run without track offsets would rank every town 0.
    if let Some(reason) = sum.scope.missing(Needs::Track) {
        for layer in bust::FILES {
            skipped.push(NotComputed {
                layer: layer.into(),
                reason: reason.into(),
            });
        }
    } else {
        files.extend(bust::write_towns_bust(
            dir,
            &sum.ranked,
            &sum.names,
            case.output.units,
            &case.summary.snow_thresholds,
            &case.summary.ice_thresholds,
            sum.members.as_ref(),
        )?);
    }
    let ctx = maps::MapContext {
        title: &case.title,
        units: case.output.units,
        snow_thresholds: &case.summary.snow_thresholds,
        prior_words: prior_words(&sum.prior),
        period: &sum.period_words,
        dominant_source: sum.members.as_ref().map(|m| m.dominant.as_slice()),
        groups: sum
            .members
            .as_ref()
            .map(|m| (m.names.len(), m.options.len())),
    };
    for (file, needs) in maps::NEEDING {
        if let Some(reason) = sum.scope.missing(needs) {
            skipped.push(NotComputed {
                layer: file.into(),
                reason: reason.into(),
            });
        }
    }
    let range = sum.compared().map(|s| s.range.as_slice());
    files.extend(maps::write_maps(
        dir,
        r,
        &ctx,
        sum.decisions.as_ref(),
        range,
        &sum.ranked,
        rain_snow,
    )?);
    Ok(files)
}

/// What [`write_all`] wrote, and every warning of the run and of the writing (the manifest and
/// report carry the same list).
#[derive(Debug)]
pub struct Outcome {
    /// The files, manifest included.
    pub files: Vec<Written>,
    /// The run's warnings, then the writing's.
    pub warnings: Vec<String>,
    /// The layers the run could not compute, with the reason (also in the manifest).
    pub not_computed: Vec<NotComputed>,
}

/// Writes every layer of a run into `case.output.out_dir`, the manifest last, replacing any previous
/// set as a whole; files of the previous folder that trackswing did not write are kept (see
/// [`folder`]).
pub fn write_all(
    case: &crate::case::Case,
    r: &crate::engine::RunResult,
    sum: &Summary,
) -> Result<Outcome, WriteError> {
    write_set_of(case, r, sum, None)
}

/// Writes every layer of an ensemble: the primary group's as [`write_all`] does, and the
/// layers of where the spread comes from, with the stack of every group's scenarios.
pub fn write_ensemble(
    case: &crate::case::Case,
    e: &crate::engine::Ensemble,
    sum: &Summary,
) -> Result<Outcome, WriteError> {
    write_set_of(case, &e.groups[0].run, sum, Some(e))
}

fn write_set_of(
    case: &crate::case::Case,
    r: &crate::engine::RunResult,
    sum: &Summary,
    ensemble: Option<&crate::engine::Ensemble>,
) -> Result<Outcome, WriteError> {
    let staging = folder::Staging::begin(&case.output.out_dir, &case.inputs(), case.force)?;
    let mut warnings = r.warnings.clone();
    if sum.scope.track() {
        warnings.extend(if sum.names.is_pooled() {
            sum.coverage.warning_of(
                "the blend of members, methods and the track-error prior",
                "the blended weight",
            )
        } else {
            sum.coverage.warning()
        });
    }
    let carried = staging.carried();
    if !carried.is_empty() {
        let sidecars = carried.iter().any(|p| {
            p.file_name()
                .is_some_and(|n| n.to_string_lossy().ends_with(".aux.xml"))
        });
        warnings.push(format!(
            "kept {} {} in {} that trackswing did not write ({}){}",
            carried.len(),
            if carried.len() == 1 { "entry" } else { "entries" },
            case.output.out_dir.display(),
            folder::names(carried),
            if sidecars {
                "; GDAL's .aux.xml sidecars may hold statistics of the previous run's layers: delete them to have GDAL recompute"
            } else {
                ""
            }
        ));
    }
    let theirs: Vec<String> = carried
        .iter()
        .filter_map(|p| p.file_name().map(|n| n.to_string_lossy().into_owned()))
        .collect();
    match write_set(
        staging.dir(),
        case,
        (r, sum, ensemble),
        &theirs,
        &mut warnings,
    ) {
        Ok((files, not_computed)) => {
            staging.commit()?;
            Ok(Outcome {
                files,
                warnings,
                not_computed,
            })
        }
        Err(e) => {
            staging.abandon();
            Err(e)
        }
    }
}

/// What a run computed: its primary run, its summary and, for several members, the ensemble.
type Computed<'a> = (
    &'a crate::engine::RunResult,
    &'a Summary,
    Option<&'a crate::engine::Ensemble>,
);

fn write_set(
    dir: &Path,
    case: &crate::case::Case,
    (r, sum, ensemble): Computed<'_>,
    theirs: &[String],
    warnings: &mut Vec<String>,
) -> Result<(Vec<Written>, Vec<NotComputed>), WriteError> {
    let meta = meta(case, sum);
    let settings = rasters::RasterSettings {
        units: case.output.units,
        raster_type: case.output.raster_type,
    };
    let mut skipped = Vec::new();
    let compared = sum.compared();
    if let Some(reason) = sum.scope.missing(Needs::Comparison) {
        for layer in [
            "snowfall_min.tif",
            "snowfall_max.tif",
            "snowfall_range.tif",
            "flip_zone.geojson",
            "snowfall_bands_max.geojson",
        ] {
            skipped.push(NotComputed {
                layer: layer.into(),
                reason: reason.into(),
            });
        }
    }
    let mut files = rasters::write_rasters(dir, r, &settings, &meta, compared, &sum.period_words)?;
    let rain_snow = lines::rain_snow_lines(r)?;
    files.push(lines::write_rain_snow_lines(dir, r, &rain_snow)?);
    files.push(zones::write_transition_zones(dir, r)?);
    if let Some(cells) = &sum.type_flips {
        files.push(zones::write_flip_zone(dir, r, cells)?);
    }
    let mut bands = vec![(
        "snowfall_bands_baseline.geojson",
        "the model as issued (offset 0, 0)",
        &r.totals[r.baseline].snowfall,
    )];
    if let Some(sp) = compared {
        bands.push((
            "snowfall_bands_max.geojson",
            "the largest total over the scenarios",
            &sp.max,
        ));
    }
    for (name, what, field) in bands {
        files.push(isobands::write_snowfall_bands(
            dir,
            &r.grid,
            name,
            what,
            field,
            case.output.units,
            &case.output.snowfall_bands,
        )?);
    }
    let group_times = |k: usize| sum.valid_times(k);
    files.extend(towns::write_towns(
        dir,
        &sum.towns,
        &sum.names,
        r.baseline,
        case.output.units,
        &towns::Onsets {
            steps: &sum.onsets,
            valid_times: &group_times,
        },
    )?);
    files.extend(write_decision_products(
        dir,
        case,
        r,
        sum,
        &rain_snow,
        &mut skipped,
    )?);
    if let (Some(m), Some(e)) = (&sum.members, ensemble) {
        files.extend(members::write_member_layers(
            dir,
            case,
            e,
            m,
            &meta,
            &sum.period_words,
        )?);
        if let Err(why) = &e.alignment {
            for layer in members::ALIGNED_FILES {
                skipped.push(NotComputed {
                    layer: layer.into(),
                    reason: why.to_string(),
                });
            }
        }
    }
    // A QGIS and an SLD style beside every raster, with the maps' classes (a user's own style
    // of the same name is kept).
    let (styles, kept) = styles::write_styles(
        dir,
        &files,
        &styles::StyleSettings {
            units: case.output.units,
            snow_thresholds: &case.summary.snow_thresholds,
            ice_thresholds: &case.summary.ice_thresholds,
            far_km: r
                .scenarios
                .iter()
                .map(|s| s.cross_km.hypot(s.along_km))
                .fold(0.0, f64::max),
        },
        theirs,
    )?;
    files.extend(styles);
    if !kept.is_empty() {
        warnings.push(format!(
            "kept your own {} (not written by trackswing) instead of trackswing's style{} of the same name",
            kept.join(", "),
            if kept.len() == 1 { "" } else { "s" }
        ));
    }
    if case.output.report {
        // Listed now, written right after the manifest it is built from.
        files.push(report::entry());
    }
    // The track-risk reason first: it is the one a reader must not miss.
    skipped.sort_by_key(|n| n.reason != crate::summarise::scope::NO_TRACK_OFFSETS);
    let about = manifest::About {
        warnings,
        not_computed: &skipped,
        period: sum.period.as_ref(),
        weights: &sum.weights,
        prior: &sum.prior,
        alignment: ensemble.and_then(|e| e.alignment.as_ref().ok()),
        references: ensemble.map_or_else(Vec::new, |e| {
            (0..e.members())
                .map(|m| e.as_issued(m).and_then(|r| r.reference))
                .collect()
        }),
    };
    manifest::write_manifest(dir, case, r, &files, &about)?;
    let mut all = files;
    all.push(Written {
        file: folder::MANIFEST.into(),
        kind: Kind::Table,
        units: String::new(),
        description: "What was written, from which inputs, with which settings".into(),
        bands: Vec::new(),
        sha256: None,
    });
    if case.output.report {
        // Part of the set (swapped in with it), built from the files just written.
        report::write_report(dir).map_err(|e| WriteError::Report(Box::new(e)))?;
    }
    Ok((all, skipped))
}
