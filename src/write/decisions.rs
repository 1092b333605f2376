//! Decision layers (GeoTIFF): the weighted mean, P10/P50/P90 and threshold probabilities of
//! snowfall and ice accretion, the sensitivity to the track, and the flip distance.
//!
//! The layers are computed by the summarise stage ([`crate::summarise::summary`]); this module
//! converts them to the output units and writes them.

use super::{write_atomic, Kind, WriteError, Written};
use crate::engine::RunResult;
use crate::geotiff::{write_cog, BandSpec, CogOptions, SampleEncoding, WriteOptions};
use crate::render::legend;
use crate::summarise::quantiles::DistributionLayers;
use crate::summarise::scope::{Needs, NotComputed};
use crate::summarise::sensitivity::PER_KM;
use crate::summarise::summary::{PoolWords, Summary};
use crate::units::Units;
use std::path::Path;

/// Settings of the decision layers.
pub struct DecisionSettings<'a> {
    /// Output units.
    pub units: Units,
    /// Snowfall thresholds, output snow units.
    pub snow_thresholds: &'a [f64],
    /// Ice thresholds, output liquid units.
    pub ice_thresholds: &'a [f64],
    /// Dataset metadata for every GeoTIFF.
    pub meta: &'a [(String, String)],
    /// How the descriptions name what the summaries are over.
    pub words: PoolWords,
}

/// One band of a decision raster: its description, values and band metadata.
pub(super) struct Band {
    pub(super) description: String,
    pub(super) data: Vec<f32>,
    pub(super) metadata: Vec<(String, String)>,
}

/// Writes a Float32 cloud-optimised GeoTIFF of `bands` on the run's grid.
pub(super) fn write_bands(
    dir: &Path,
    r: &RunResult,
    meta: &[(String, String)],
    file: &str,
    units: &str,
    description: &str,
    bands: Vec<Band>,
) -> Result<Written, WriteError> {
    let specs: Vec<BandSpec> = bands
        .iter()
        .map(|b| BandSpec {
            data: &b.data,
            description: b.description.clone(),
            metadata: b.metadata.clone(),
        })
        .collect();
    let opts = WriteOptions {
        encoding: SampleEncoding::Float32,
        nodata: super::rasters::NODATA,
        dataset_metadata: meta.to_vec(),
        band_scaling: vec![],
    };
    write_atomic(dir, file, |tmp| {
        // Cloud-optimised like every other layer, so a GIS opens them the same way.
        write_cog(
            tmp,
            r.grid.nx,
            r.grid.ny,
            &r.grid.georef,
            &specs,
            &opts,
            &CogOptions::default(),
        )
        .map(|_| ())
        .map_err(WriteError::from)
    })?;
    Ok(Written {
        file: file.into(),
        kind: Kind::Raster,
        units: units.into(),
        description: description.into(),
        bands: bands.into_iter().map(|b| b.description).collect(),
        sha256: None,
    })
}

/// A band with its units as band metadata.
pub(super) fn one(description: String, data: Vec<f32>, units: &str) -> Band {
    Band {
        description,
        data,
        metadata: vec![("units".into(), units.into())],
    }
}

/// Writes the mean / P10 / P50 / P90 / exceedance family of one quantity.
#[allow(clippy::too_many_arguments)]
fn write_family(
    dir: &Path,
    r: &RunResult,
    meta: &[(String, String)],
    period: &str,
    words: PoolWords,
    stem: &str,
    what: &str,
    unit: &str,
    to_unit: impl Fn(f32) -> f32,
    thresholds: &[f64],
    d: &DistributionLayers,
    out: &mut Vec<Written>,
) -> Result<(), WriteError> {
    let conv = |v: &[f32]| v.iter().map(|x| to_unit(*x)).collect::<Vec<f32>>();
    out.push(write_bands(
        dir,
        r,
        meta,
        &format!("{stem}_mean.tif"),
        unit,
        &format!(
            "{what}: mean over {}, weighted by {}; totals over {period}",
            words.over, words.weighted_by
        ),
        vec![one(
            format!("{what}, weighted mean, totals over {period}"),
            conv(&d.mean),
            unit,
        )],
    )?);
    for (q, layer) in ["p10", "p50", "p90"].iter().zip(&d.quantiles) {
        let pct = &q[1..];
        out.push(write_bands(
            dir,
            r,
            meta,
            &format!("{stem}_{q}.tif"),
            unit,
            &format!("{what}: weighted {pct}th percentile over {} ({pct} % of {} lies at or below it); totals over {period}", words.over, words.weight),
            vec![one(format!("{what}, P{pct}, totals over {period}"), conv(layer), unit)],
        )?);
    }
    let bands = thresholds
        .iter()
        .zip(&d.exceedance)
        .map(|(t, data)| Band {
            description: legend::probability_label(what, *t, unit),
            data: data.clone(),
            metadata: vec![
                ("threshold".into(), legend::threshold_text(*t)),
                ("threshold_units".into(), unit.into()),
                ("units".into(), "1".into()),
            ],
        })
        .collect();
    out.push(write_bands(
        dir,
        r,
        meta,
        &format!("{stem}_exceedance.tif"),
        "1",
        &format!(
            "Probability (0–1, weighted by {}) of each threshold or more of {what} ({} {unit}); one band per threshold; totals over {period}",
            words.weighted_by,
            thresholds.iter().map(|t| legend::threshold_text(*t)).collect::<Vec<_>>().join(", ")
        ),
        bands,
    )?);
    Ok(())
}

/// Writes every decision raster the run computed; returns what was written and what was not
/// computed (with the reason).
pub fn write_decision_rasters(
    dir: &Path,
    r: &RunResult,
    sum: &Summary,
    s: &DecisionSettings,
) -> Result<(Vec<Written>, Vec<NotComputed>), WriteError> {
    let u = s.units;
    let (su, lu) = (u.snow_unit(), u.liquid_unit());
    let mut out = Vec::new();
    let mut skipped = Vec::new();
    let min = sum.coverage.min;

    let Some(d) = &sum.decisions else {
        // No track offsets: the prior has nothing to weigh, and every layer below is about
        // track error.
        let reason = sum.scope.missing(Needs::Track).unwrap_or_default();
        for layer in [
            "prior_coverage.tif",
            "snowfall_mean.tif",
            "snowfall_p10.tif",
            "snowfall_p50.tif",
            "snowfall_p90.tif",
            "snowfall_exceedance.tif",
            "ice_accretion_mean.tif",
            "ice_accretion_p10.tif",
            "ice_accretion_p50.tif",
            "ice_accretion_p90.tif",
            "ice_accretion_exceedance.tif",
            "snowfall_sensitivity_cross.tif",
            "snowfall_sensitivity_along.tif",
            "flip_distance.tif",
        ] {
            skipped.push(NotComputed {
                layer: layer.into(),
                reason: reason.into(),
            });
        }
        return Ok((out, skipped));
    };

    let share: Vec<f32> = sum.coverage.share.iter().map(|v| *v as f32).collect();
    let what = format!("Share (0–1) of {} carried by the scenarios with a total at each cell (the others took values from beyond the grid edge); the weighted summaries and min/max/range are computed over those scenarios, weights renormalised, where it is at least {min}, and are nodata below", s.words.weight_long);
    let mut band = one("share of the prior's weight with data".into(), share, "1");
    band.metadata.push(("min_coverage".into(), min.to_string()));
    out.push(write_bands(
        dir,
        r,
        s.meta,
        "prior_coverage.tif",
        "1",
        &what,
        vec![band],
    )?);

    let period = sum.period_words.as_str();
    write_family(
        dir,
        r,
        s.meta,
        period,
        s.words,
        "snowfall",
        "snowfall",
        su,
        |v| u.snow(v),
        s.snow_thresholds,
        &d.snow,
        &mut out,
    )?;
    write_family(
        dir,
        r,
        s.meta,
        period,
        s.words,
        "ice_accretion",
        "ice accretion",
        lu,
        |v| u.liquid(v),
        s.ice_thresholds,
        &d.ice,
        &mut out,
    )?;

    let per = format!("{su} per {PER_KM} km");
    for (layer, needs, file, words) in [
        (
            &d.sensitivity_cross,
            Needs::Cross,
            "snowfall_sensitivity_cross.tif",
            "across the track (positive: more snow if the low tracks further left)",
        ),
        (
            &d.sensitivity_along,
            Needs::Along,
            "snowfall_sensitivity_along.tif",
            "along the track (positive: more snow if the low runs ahead)",
        ),
    ] {
        let Some(layer) = layer else {
            skipped.push(NotComputed {
                layer: file.into(),
                reason: sum.scope.missing(needs).unwrap_or_default().into(),
            });
            continue;
        };
        let data = layer.iter().map(|v| u.snow(*v)).collect();
        out.push(write_bands(
            dir,
            r,
            s.meta,
            file,
            &per,
            &format!("Change of snowfall per {PER_KM} km of track shift {}, {words}; totals over {period}", s.words.at_origin),
            vec![one(format!("snowfall change per {PER_KM} km, {words}"), data, &per)],
        )?);
    }

    let flip = &d.flip;
    let km = |d: &str, v: &[f32]| one(d.into(), v.to_vec(), "km");
    let mut kind = one(
        "what flips: 1 dominant type changes, 2 snowfall halves, 3 snowfall doubles, 0 nothing within the offsets run".into(),
        flip.kind.clone(),
        "1",
    );
    kind.metadata.push((
        "codes".into(),
        "0 none within offsets; 1 type change; 2 halves; 3 doubles".into(),
    ));
    out.push(write_bands(
        dir,
        r,
        s.meta,
        "flip_distance.tif",
        "km",
        &format!("Smallest track shift (√(cross² + along²), km) at which the dominant precipitation type{} changes or the snowfall halves or doubles (each floored at 1 cm); band 2/3 give that shift's cross/along offset, band 4 what flips; nodata where nothing flips within the offsets run; totals over {period}", s.words.of_blend),
        vec![
            km("flip distance, km", &flip.distance_km),
            km("cross-track offset of the flip, km (positive left)", &flip.cross_km),
            km("along-track offset of the flip, km (positive ahead)", &flip.along_km),
            kind,
        ],
    )?);
    Ok((out, skipped))
}
