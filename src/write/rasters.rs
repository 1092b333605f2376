//! GeoTIFF layers: the per-scenario snowfall stack and the single-band summaries.

use super::{write_atomic, Kind, WriteError, Written};
use crate::case::Units;
use crate::engine::RunResult;
use crate::geotiff::{write_geotiff, BandSpec, SampleEncoding, WriteOptions};
use crate::summarise::spread;
use std::path::Path;

/// Nodata value of every Float32 layer.
pub const NODATA: f64 = -9999.0;

struct Layer<'a> {
    file: &'a str,
    units: String,
    description: String,
    data: Vec<f32>,
}

fn write_layer(
    dir: &Path,
    r: &RunResult,
    meta: &[(String, String)],
    l: Layer,
) -> Result<Written, WriteError> {
    let band = BandSpec {
        data: &l.data,
        description: l.description.clone(),
        metadata: vec![("units".into(), l.units.clone())],
    };
    write_one(dir, r, meta, l.file, &[band])?;
    Ok(Written {
        file: l.file.to_string(),
        kind: Kind::Raster,
        units: l.units,
        description: l.description,
        bands: Vec::new(),
    })
}

fn write_one(
    dir: &Path,
    r: &RunResult,
    meta: &[(String, String)],
    file: &str,
    bands: &[BandSpec],
) -> Result<(), WriteError> {
    let opts = WriteOptions {
        encoding: SampleEncoding::Float32,
        nodata: NODATA,
        dataset_metadata: meta.to_vec(),
        band_scaling: vec![],
    };
    write_atomic(dir, file, |tmp| {
        write_geotiff(tmp, r.grid.nx, r.grid.ny, &r.grid.georef, bands, &opts)
            .map_err(WriteError::from)
    })?;
    Ok(())
}

/// Writes every raster layer; returns what was written.
pub fn write_rasters(
    dir: &Path,
    r: &RunResult,
    units: Units,
    meta: &[(String, String)],
) -> Result<Vec<Written>, WriteError> {
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
    write_one(dir, r, meta, file, &bands)?;
    out.push(Written {
        file: file.into(),
        kind: Kind::Raster,
        units: su.into(),
        description: "Storm-total snowfall for every scenario (track offset and any timing, intensity and warm-bias axes), one band per scenario".into(),
        bands: bands.iter().map(|b| b.description.clone()).collect(),
    });

    let base = &r.totals[r.baseline];
    let refs: Vec<&[f32]> = stack.iter().map(|v| v.as_slice()).collect();
    let sp = spread(&refs);
    let layers = [
        ("snowfall_baseline.tif", su, "Storm-total snowfall as modelled (offset 0, 0)", stack[r.baseline].clone()),
        ("snowfall_min.tif", su, "Smallest storm-total snowfall over all track offsets", sp.min),
        ("snowfall_max.tif", su, "Largest storm-total snowfall over all track offsets", sp.max),
        ("snowfall_range.tif", su, "Largest minus smallest snowfall over all track offsets: how much the total depends on track error", sp.range),
        ("liquid_baseline.tif", lu, "Storm-total precipitation (liquid equivalent) as modelled", liquid(&base.liquid)),
        ("snow_fraction_baseline.tif", "1", "Share of the storm's liquid that falls as snow, as modelled (nodata where under 0.1 mm fell)", base.snow_fraction()),
        ("ice_pellets_baseline.tif", lu, "Liquid equivalent falling as ice pellets, as modelled", liquid(&base.ice_pellets)),
        ("freezing_rain_baseline.tif", lu, "Liquid equivalent falling as freezing rain, as modelled", liquid(&base.freezing_rain)),
        ("ice_pellet_fraction_baseline.tif", "1", "Share of the storm's liquid that falls as ice pellets, as modelled", base.ice_pellet_fraction()),
        ("freezing_rain_fraction_baseline.tif", "1", "Share of the storm's liquid that falls as freezing rain, as modelled", base.freezing_rain_fraction()),
        ("ice_pellet_depth_baseline.tif", su, "Ice-pellet accumulation depth as modelled (2.5 × the ice-pellet liquid, common practice)", snow(&base.ice_pellet_depth())),
        ("dry_air_loss_baseline.tif", lu, "Precipitation that left the cloud but evaporated into dry air below it before reaching the ground, as modelled (0 with the dry-air correction off)", liquid(&base.carried)),
        ("ice_accretion_baseline.tif", lu, "Flat-surface ice accretion from freezing rain as modelled (0.72 × the freezing-rain liquid, Sanders & Barjenbruch 2016)", liquid(&base.ice_accretion())),
    ];
    for (file, u, d, data) in layers {
        out.push(write_layer(
            dir,
            r,
            meta,
            Layer {
                file,
                units: u.to_string(),
                description: d.to_string(),
                data,
            },
        )?);
    }
    Ok(out)
}
