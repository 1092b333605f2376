//! GeoTIFF layers: the per-scenario snowfall stack and the single-band summaries, as
//! cloud-optimised GeoTIFFs (internal 256×256 tiles, overviews) on the input grid and its CRS.
//!
//! Float32 layers use nodata −9999. Int16 layers store `round(value / scale)` with a scale chosen
//! per band from its largest magnitude (a 1-2-5 step, so that the largest value uses at most
//! 32 000 of the 32 767 steps), recorded as GDAL's band scale (offset 0), nodata −32768.

use super::raster_type::RasterType;
use super::{write_atomic, Kind, WriteError, Written};
use crate::engine::RunResult;
use crate::geotiff::{write_cog, BandSpec, CogOptions, SampleEncoding, WriteOptions};
use crate::summarise::Spread;
use crate::units::Units;
use std::path::Path;

/// Nodata value of every Float32 layer.
pub const NODATA: f64 = -9999.0;

/// How the rasters are stored.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RasterSettings {
    /// Output units.
    pub units: Units,
    /// Float32 or scaled Int16.
    pub raster_type: RasterType,
}

/// The Int16 scale for values up to `max_abs` in magnitude: the smallest 1, 2 or 5 × 10^k with
/// `max_abs / scale ≤ 32 000`; 1e-4 for an empty or all-zero band.
///
/// ```
/// use trackswing::write::rasters::int16_scale;
/// assert_eq!(int16_scale(1.0), 5e-5);     // fractions: 20 000 steps over 0–1
/// assert_eq!(int16_scale(120.0), 0.005);  // 120 cm in 24 000 steps
/// assert_eq!(int16_scale(0.0), 1e-4);
/// ```
pub fn int16_scale(max_abs: f64) -> f64 {
    if !(max_abs.is_finite() && max_abs > 0.0) {
        return 1e-4;
    }
    let need = max_abs / 32_000.0;
    let mut decade = 10f64.powf(need.log10().floor());
    loop {
        for m in [1.0, 2.0, 5.0] {
            // Decimal powers are inexact in binary: round the candidate to 12 significant
            // digits so that the recorded scale reads as 0.005, not 0.005000000000000001.
            let s: f64 = format!("{:.12e}", m * decade).parse().unwrap_or(m * decade);
            if s >= need {
                return s;
            }
        }
        decade *= 10.0;
    }
}

fn encoding_for(settings: &RasterSettings, bands: &[BandSpec]) -> WriteOptions {
    match settings.raster_type {
        RasterType::Float32 => WriteOptions {
            encoding: SampleEncoding::Float32,
            nodata: NODATA,
            dataset_metadata: Vec::new(),
            band_scaling: Vec::new(),
        },
        RasterType::Int16 => {
            let scaling: Vec<(f64, f64)> = bands
                .iter()
                .map(|b| {
                    let m = b
                        .data
                        .iter()
                        .filter(|v| v.is_finite())
                        .fold(0f64, |m, v| m.max(f64::from(v.abs())));
                    (int16_scale(m), 0.0)
                })
                .collect();
            WriteOptions {
                encoding: SampleEncoding::Int16Scaled {
                    scale: scaling[0].0,
                    offset: 0.0,
                },
                nodata: NODATA,
                dataset_metadata: Vec::new(),
                band_scaling: scaling,
            }
        }
    }
}

fn write_one(
    dir: &Path,
    r: &RunResult,
    settings: &RasterSettings,
    meta: &[(String, String)],
    file: &str,
    bands: &[BandSpec],
) -> Result<(), WriteError> {
    let opts = WriteOptions {
        dataset_metadata: meta.to_vec(),
        ..encoding_for(settings, bands)
    };
    write_atomic(dir, file, |tmp| {
        write_cog(
            tmp,
            r.grid.nx,
            r.grid.ny,
            &r.grid.georef,
            bands,
            &opts,
            &CogOptions::default(),
        )
        .map(|_| ())
        .map_err(WriteError::from)
    })?;
    Ok(())
}

/// Writes every raster layer; returns what was written.
pub fn write_rasters(
    dir: &Path,
    r: &RunResult,
    settings: &RasterSettings,
    meta: &[(String, String)],
    snow_spread: Option<&Spread>,
    period: &str,
) -> Result<Vec<Written>, WriteError> {
    let units = settings.units;
    let su = units.snow_unit();
    let lu = units.liquid_unit();
    let snow = |v: &[f32]| v.iter().map(|x| units.snow(*x)).collect::<Vec<f32>>();
    let liquid = |v: &[f32]| v.iter().map(|x| units.liquid(*x)).collect::<Vec<f32>>();
    let mut out = Vec::new();

    let stack: Vec<Vec<f32>> = r.totals.iter().map(|t| snow(&t.snowfall)).collect();
    let bands: Vec<BandSpec> = r
        .scenarios
        .iter()
        .zip(&stack)
        .map(|(s, data)| BandSpec {
            data,
            description: format!("snowfall, {}", s.label()),
            metadata: vec![
                ("cross_km".into(), s.cross_km.to_string()),
                ("along_km".into(), s.along_km.to_string()),
                ("timing_h".into(), s.timing_h.to_string()),
                ("intensity".into(), s.intensity.to_string()),
                ("warm_bias_k".into(), s.warm_bias_k.to_string()),
                ("units".into(), su.to_string()),
            ],
        })
        .collect();
    let file = "snowfall_by_scenario.tif";
    write_one(dir, r, settings, meta, file, &bands)?;
    out.push(Written {
        file: file.into(),
        kind: Kind::Raster,
        units: su.into(),
        description: format!("Total snowfall for every scenario (track offset and any timing, intensity and warm-bias axes), one band per scenario; totals over {period}"),
        bands: bands.iter().map(|b| b.description.clone()).collect(),
        sha256: None,
    });

    let base = &r.totals[r.baseline];
    let mut layers = vec![(
        "snowfall_baseline.tif",
        su,
        "Total snowfall as modelled (offset 0, 0)",
        stack[r.baseline].clone(),
    )];
    if let Some(sp) = snow_spread {
        layers.extend([
        ("snowfall_min.tif", su, "Smallest total snowfall over the scenarios with data (nodata where they carry under the minimum share of the prior, see prior_coverage.tif)", snow(&sp.min)),
        ("snowfall_max.tif", su, "Largest total snowfall over the scenarios with data (nodata where they carry under the minimum share of the prior, see prior_coverage.tif)", snow(&sp.max)),
        ("snowfall_range.tif", su, "Largest minus smallest snowfall over the scenarios with data: how much the total depends on track error (nodata where they carry under the minimum share of the prior, see prior_coverage.tif)", snow(&sp.range)),
        ]);
    }
    layers.extend([
        ("liquid_baseline.tif", lu, "Total precipitation (liquid equivalent) as modelled", liquid(&base.liquid)),
        ("snow_fraction_baseline.tif", "1", "Share of the liquid that falls as snow, as modelled (nodata where under 0.1 mm fell)", base.snow_fraction()),
        ("ice_pellets_baseline.tif", lu, "Liquid equivalent falling as ice pellets, as modelled", liquid(&base.ice_pellets)),
        ("freezing_rain_baseline.tif", lu, "Liquid equivalent falling as freezing rain, as modelled", liquid(&base.freezing_rain)),
        ("ice_pellet_fraction_baseline.tif", "1", "Share of the liquid that falls as ice pellets, as modelled", base.ice_pellet_fraction()),
        ("freezing_rain_fraction_baseline.tif", "1", "Share of the liquid that falls as freezing rain, as modelled", base.freezing_rain_fraction()),
        ("ice_pellet_depth_baseline.tif", su, "Ice-pellet accumulation depth as modelled (2.5 × the ice-pellet liquid, common practice)", snow(&base.ice_pellet_depth())),
        ("dry_air_loss_baseline.tif", lu, "Precipitation that left the cloud but evaporated into dry air below it before reaching the ground, as modelled (0 with the dry-air treatment off, the default)", liquid(&base.carried)),
        ("ice_accretion_baseline.tif", lu, "Flat-surface ice accretion from freezing rain as modelled (0.72 × the freezing-rain liquid, Sanders & Barjenbruch 2016)", liquid(&base.ice_accretion())),
    ]);
    for (file, u, description, data) in layers {
        // Every layer here is a total: the period it covers is part of what it is.
        let description = format!("{description}; totals over {period}");
        let band = BandSpec {
            data: &data,
            description: description.to_string(),
            metadata: vec![("units".into(), u.to_string())],
        };
        write_one(dir, r, settings, meta, file, &[band])?;
        out.push(Written {
            file: file.to_string(),
            kind: Kind::Raster,
            units: u.to_string(),
            description: description.to_string(),
            bands: Vec::new(),
            sha256: None,
        });
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn int16_scale_keeps_values_in_range_with_a_round_step() {
        for m in [1e-3, 0.9, 1.0, 3.3, 99.0, 327.0, 1234.5, 5e4] {
            let s = int16_scale(m);
            assert!(m / s <= 32_000.0 + 1e-9, "{m}: {s}");
            assert!(m / s > 32_000.0 / 5.0 - 1e-9, "{m}: {s} wastes precision");
            let digits = format!("{s:e}");
            assert!(
                digits.starts_with('1') || digits.starts_with('2') || digits.starts_with('5'),
                "{s}"
            );
            assert!(digits.split('e').next().unwrap().len() == 1, "{digits}");
        }
    }
}
