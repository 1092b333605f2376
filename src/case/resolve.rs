//! From the case file as written (plus the command line's overrides) to a checked [`Case`]:
//! one function per section, each error naming the setting (or the flag) and what was expected.

use super::here::Here;
use super::member::{resolve_member, split_ensembles};
use super::prior::resolve_prior;
use super::schema::{
    CaseFile, MethodsFile, OffsetList, OffsetsFile, OutputFile, ShiftFile, WeightsFile,
};
use super::{
    Case, CaseError, Inputs, MethodOption, OutputSettings, Overrides, Physics, SummarySettings,
};
use crate::diagnose::{Methods, PtypeMethod, SlrMethod};
use crate::read::region::{Region, RegionError};
use crate::scenario::{parse_offsets, Axes, OffsetError};
use crate::shift::Taper;
use crate::summarise::coverage::{check_min_coverage, DEFAULT_MIN_COVERAGE};
use crate::summarise::weights::{scenario_weights, TrackPrior};
use crate::units::Units;
use crate::write::raster_type::RasterType;
use std::path::Path;

/// Default core radius, km: the displacement is complete over the low's circulation and
/// precipitation shield close to the centre (a synoptic low's cloud shield spans several hundred
/// km, common practice).
pub const DEFAULT_CORE_KM: f64 = 500.0;
/// Default outer radius, km: beyond this the far field stays as modelled.
pub const DEFAULT_OUTER_KM: f64 = 1500.0;
/// Default lapse rate for the terrain correction, K/km (the standard atmosphere's, ICAO 1993).
pub const DEFAULT_LAPSE_K_PER_KM: f64 = 6.5;
/// Accepted lapse rates, K/km: from isothermal to beyond the dry adiabatic 9.8.
pub const LAPSE_RANGE_K_PER_KM: (f64, f64) = (0.0, 12.0);
/// Default ratio of the `fixed` snow-ratio method (10:1, common practice).
pub const DEFAULT_FIXED_RATIO: f64 = 10.0;
/// Accepted fixed ratios.
pub const FIXED_RATIO_RANGE: (f64, f64) = (1.0, 50.0);
/// Default precipitation-type method.
pub const DEFAULT_PRECIP_TYPE: &str = "energy-area";
/// Default snow-ratio method.
pub const DEFAULT_SNOW_RATIO: &str = "fixed";
/// Default output folder, beside the case file.
pub const DEFAULT_OUT_FOLDER: &str = "trackswing-out";
/// Most thresholds a layer family takes (one band each).
pub const MAX_THRESHOLDS: usize = 16;
/// Accepted timing offsets, hours either way.
pub const TIMING_LIMIT_H: f64 = 48.0;
/// Accepted precipitation factors.
pub const INTENSITY_RANGE: (f64, f64) = (0.05, 5.0);
/// Accepted warm-layer biases, K either way.
pub const WARM_BIAS_LIMIT_K: f64 = 10.0;

/// Resolves a parsed case file with the command line's overrides.
pub(super) fn resolve(path: &Path, file: CaseFile, over: &Overrides) -> Result<Case, CaseError> {
    let here = Here {
        path,
        dir: path.parent().unwrap_or(Path::new(".")),
    };
    if file.member.is_empty() {
        return Err(here.invalid("member", "the case lists no [[member]]".into()));
    }
    let members = file
        .member
        .iter()
        .enumerate()
        .map(|(i, m)| resolve_member(&here, i, m))
        .collect::<Result<Vec<_>, _>>()?;
    let members = split_ensembles(members);
    for (i, m) in members.iter().enumerate() {
        if members[..i].iter().any(|o| o.name == m.name) {
            return Err(here.invalid(
                &format!("member[{i}].name"),
                format!("'{}' names an earlier member too: every member needs its own name (it labels bands, columns and the manifest)", m.name),
            ));
        }
    }
    let members = output_grid_first(&here, members, file.output.grid.as_deref())?;
    let towns = file
        .towns
        .as_deref()
        .map(|t| here.existing("towns", t))
        .transpose()?;
    let region = resolve_region(&here, over, file.region)?;
    let (axes, sources) = resolve_axes(&here, &file.offsets, over)?;
    let only_zero = axes
        .cross_km
        .iter()
        .chain(&axes.along_km)
        .all(|v| *v == 0.0);
    if let Some(i) = members
        .iter()
        .position(|m| m.track.is_none() && !m.find_track && !only_zero)
    {
        return Err(here.invalid(
            &format!("member[{i}].track"),
            "offsets other than 0 need the storm track (a CSV or GeoJSON file, or \"find\" to follow the low in the model's sea-level pressure)".into(),
        ));
    }
    let (taper, lapse) = resolve_shift(&here, &file.shift, &axes, &sources)?;
    let physics = resolve_methods(&here, &file.methods, over, lapse, taper)?;
    let output = resolve_output(&here, &file.output, over)?;
    let summary = resolve_summary(
        &here,
        &file.output,
        &file.weights,
        over,
        &axes,
        output.units,
    )?;
    let output = OutputSettings {
        // The isobands follow the decision thresholds unless the case asks for other bands.
        snowfall_bands: file.output.snowfall_bands.as_ref().map_or_else(
            || summary.snow_thresholds.clone(),
            |_| output.snowfall_bands,
        ),
        ..output
    };
    Ok(Case {
        path: path.to_path_buf(),
        title: file.title,
        inputs: Inputs {
            members,
            towns,
            region,
        },
        axes,
        physics,
        summary,
        output,
        force: over.force,
    })
}

/// `[output] grid`: the member it names moves to the front and becomes the primary member, so
/// the output grid, the towns, the terrain and the single-run layers are all one member's; the
/// others keep their order. A name the case's members do not have is refused, naming them.
fn output_grid_first(
    here: &Here,
    mut members: Vec<super::Member>,
    grid: Option<&str>,
) -> Result<Vec<super::Member>, CaseError> {
    let Some(name) = grid else {
        return Ok(members);
    };
    let Some(k) = members.iter().position(|m| m.name == name) else {
        let names: Vec<String> = members.iter().map(|m| format!("'{}'", m.name)).collect();
        return Err(here.invalid(
            "output.grid",
            format!(
                "'{name}' names no member: expected one of {} (the member whose grid the layers are written on)",
                names.join(", ")
            ),
        ));
    };
    let chosen = members.remove(k);
    members.insert(0, chosen);
    Ok(members)
}

/// `region` (or `--region`, which wins).
fn resolve_region(
    here: &Here,
    over: &Overrides,
    given: Option<[f64; 4]>,
) -> Result<Option<(Region, String)>, CaseError> {
    let bad_region = |e: RegionError| match e {
        RegionError::Bad {
            field, text, what, ..
        } => here.invalid(&field, format!("{text}: {what}")),
        other => here.invalid("region", other.to_string()),
    };
    Ok(match (&over.region, given) {
        (Some(text), _) => Some((
            Region::parse(text, "--region").map_err(bad_region)?,
            "--region".to_string(),
        )),
        (None, Some(edges)) => Some((
            Region::new(edges, "region").map_err(bad_region)?,
            format!("{}: region", here.path.display()),
        )),
        (None, None) => None,
    })
}

/// Where each axis's values came from (`offsets.cross_km` or `--cross`), for errors.
struct AxisSources {
    cross: String,
    along: String,
}

/// `[offsets]` and the axis flags (which win): every axis's values, range-checked.
fn resolve_axes(
    here: &Here,
    o: &OffsetsFile,
    over: &Overrides,
) -> Result<(Axes, AxisSources), CaseError> {
    let axis = |field: &str,
                flag: &str,
                neutral: &str,
                cli: &Option<String>,
                case: &Option<OffsetList>| {
        let (text, source) = match (cli, case) {
            (Some(c), _) => (c.clone(), flag.to_string()),
            (None, Some(OffsetList::Text(t))) => (t.clone(), format!("offsets.{field}")),
            (None, Some(OffsetList::Numbers(v))) => (
                v.iter()
                    .map(|x| x.to_string())
                    .collect::<Vec<_>>()
                    .join(","),
                format!("offsets.{field}"),
            ),
            (None, None) => (neutral.to_string(), format!("offsets.{field}")),
        };
        parse_offsets(&text)
            .map_err(|e: OffsetError| here.invalid(&source, e.to_string()))
            .map(|v| (v, source))
    };
    let (cross_km, cross) = axis("cross_km", "--cross", "0", &over.cross, &o.cross_km)?;
    let (along_km, along) = axis("along_km", "--along", "0", &over.along, &o.along_km)?;
    let (timing_h, timing_src) = axis("timing_h", "--timing", "0", &over.timing, &o.timing_h)?;
    let (intensity, intensity_src) = axis(
        "intensity",
        "--intensity",
        "1",
        &over.intensity,
        &o.intensity,
    )?;
    let (warm_bias_k, warm_src) = axis(
        "warm_bias_k",
        "--warm-bias",
        "0",
        &over.warm_bias,
        &o.warm_bias_k,
    )?;
    for (values, source, (lo, hi), what) in [
        (
            &timing_h,
            &timing_src,
            (-TIMING_LIMIT_H, TIMING_LIMIT_H),
            format!("hours (−{TIMING_LIMIT_H}…{TIMING_LIMIT_H})"),
        ),
        (
            &intensity,
            &intensity_src,
            INTENSITY_RANGE,
            format!(
                "a factor on the precipitation ({}…{}; 1 is as modelled)",
                INTENSITY_RANGE.0, INTENSITY_RANGE.1
            ),
        ),
        (
            &warm_bias_k,
            &warm_src,
            (-WARM_BIAS_LIMIT_K, WARM_BIAS_LIMIT_K),
            format!("kelvin (−{WARM_BIAS_LIMIT_K}…{WARM_BIAS_LIMIT_K})"),
        ),
    ] {
        if let Some(v) = values.iter().find(|v| !(lo..=hi).contains(*v)) {
            return Err(here.invalid(
                source,
                format!("{v} is outside the accepted range: expected {what}"),
            ));
        }
    }
    let axes = Axes {
        cross_km,
        along_km,
        timing_h,
        intensity,
        warm_bias_k,
    };
    Ok((axes, AxisSources { cross, along }))
}

/// `[shift]`: the displacement taper (checked against the track offsets) and the lapse rate, K/km.
fn resolve_shift(
    here: &Here,
    shift: &ShiftFile,
    axes: &Axes,
    sources: &AxisSources,
) -> Result<(Taper, f64), CaseError> {
    let core = shift.core_radius_km.unwrap_or(DEFAULT_CORE_KM);
    let outer = shift.outer_radius_km.unwrap_or(DEFAULT_OUTER_KM);
    if !(core >= 0.0 && outer > core && outer.is_finite()) {
        return Err(here.invalid(
            "shift",
            format!("need 0 ≤ core_radius_km < outer_radius_km, got {core} and {outer}"),
        ));
    }
    // The shift is centred on the displaced low and fades out at the outer radius, so an
    // offset beyond that radius moves nothing near the modelled storm: such a scenario would
    // quietly repeat the model as issued.
    for (values, source) in [
        (&axes.cross_km, &sources.cross),
        (&axes.along_km, &sources.along),
    ] {
        if let Some(v) = values.iter().find(|v| v.abs() >= outer) {
            return Err(here.invalid(
                source,
                format!("an offset of {v} km reaches the shift's outer radius ({outer} km, shift.outer_radius_km): the displaced storm would no longer overlap the modelled one; use offsets well inside it (track errors are tens to a few hundred km)"),
            ));
        }
    }
    let lapse = shift.lapse_rate_k_per_km.unwrap_or(DEFAULT_LAPSE_K_PER_KM);
    let (lo, hi) = LAPSE_RANGE_K_PER_KM;
    if !(lo..=hi).contains(&lapse) {
        return Err(here.invalid(
            "shift.lapse_rate_k_per_km",
            format!(
                "{lapse} K/km is outside {lo}…{hi} K/km (the standard atmosphere uses {DEFAULT_LAPSE_K_PER_KM})"
            ),
        ));
    }
    let taper = Taper {
        core_radius_km: core,
        outer_radius_km: outer,
    };
    Ok((taper, lapse))
}

/// A setting's text: the flag's when given, else the case file's, else the default; with the
/// name to put in errors.
fn chosen<'a>(
    flag: (&'a str, &Option<String>),
    key: (&'a str, &Option<String>),
    default: &str,
) -> (String, &'a str) {
    match (flag.1, key.1) {
        (Some(s), _) => (s.clone(), flag.0),
        (None, Some(s)) => (s.clone(), key.0),
        (None, None) => (default.to_string(), key.0),
    }
}

/// A comma-separated list of method names, each parsed by `parse`; errors name `field`.
fn method_list<T: PartialEq>(
    here: &Here,
    text: &str,
    field: &str,
    names: &str,
    parse: impl Fn(&str) -> Option<T>,
) -> Result<Vec<T>, CaseError> {
    let mut out = Vec::new();
    for name in text.split(',').map(str::trim) {
        let m = parse(name).ok_or_else(|| {
            here.invalid(
                field,
                format!(
                    "'{name}' is not a method; expected {names}, or several separated by commas"
                ),
            )
        })?;
        if out.contains(&m) {
            return Err(here.invalid(field, format!("'{name}' is listed twice")));
        }
        out.push(m);
    }
    Ok(out)
}

/// One weight per method listed (equal when not given), normalised.
fn method_weights(
    here: &Here,
    field: &str,
    given: &Option<Vec<f64>>,
    n: usize,
) -> Result<Vec<f64>, CaseError> {
    let w = given.clone().unwrap_or_else(|| vec![1.0; n]);
    if w.len() != n
        || w.iter().any(|v| !(v.is_finite() && *v >= 0.0))
        || w.iter().sum::<f64>() <= 0.0
    {
        return Err(here.invalid(
            field,
            format!("{w:?}: expected {n} weights ≥ 0, one per method listed, not all 0"),
        ));
    }
    let sum: f64 = w.iter().sum();
    Ok(w.iter().map(|v| v / sum).collect())
}

/// `[methods]` and the method flags: every combination of the listed precipitation-type and
/// snow-ratio methods is a method option (precipitation type outer), weighted by the product
/// of the two methods' weights; the first is the primary.
fn resolve_methods(
    here: &Here,
    m: &MethodsFile,
    over: &Overrides,
    lapse_k_per_km: f64,
    taper: Taper,
) -> Result<Physics, CaseError> {
    let (ptype_text, ptype_field) = chosen(
        ("--precip-type", &over.precip_type),
        ("methods.precip_type", &m.precip_type),
        DEFAULT_PRECIP_TYPE,
    );
    let ptype_names = PtypeMethod::ALL.map(|m| m.name()).join(", ");
    let ptypes = method_list(
        here,
        &ptype_text,
        ptype_field,
        &ptype_names,
        PtypeMethod::parse,
    )?;
    let ratio = m.fixed_ratio.unwrap_or(DEFAULT_FIXED_RATIO);
    let (lo, hi) = FIXED_RATIO_RANGE;
    if !(lo..=hi).contains(&ratio) {
        return Err(here.invalid(
            "methods.fixed_ratio",
            format!("{ratio} is outside {lo}…{hi} ({DEFAULT_FIXED_RATIO} is the usual ratio)"),
        ));
    }
    let (slr_text, slr_field) = chosen(
        ("--snow-ratio", &over.snow_ratio),
        ("methods.snow_ratio", &m.snow_ratio),
        DEFAULT_SNOW_RATIO,
    );
    let slrs = method_list(
        here,
        &slr_text,
        slr_field,
        &SlrMethod::NAMES.join(", "),
        |s| SlrMethod::parse(s, ratio),
    )?;
    let pw = method_weights(
        here,
        "methods.precip_type_weights",
        &m.precip_type_weights,
        ptypes.len(),
    )?;
    let sw = method_weights(
        here,
        "methods.snow_ratio_weights",
        &m.snow_ratio_weights,
        slrs.len(),
    )?;
    // Off unless asked for: the model's surface precipitation already lost what evaporated
    // below its cloud, so "as modelled" is the model's precipitation (docs/SCIENCE.md §3).
    let dry_air = over.dry_air || (!over.no_dry_air && m.dry_air.unwrap_or(false));
    let lapse_rate_k_per_m = lapse_k_per_km / 1000.0;
    let options: Vec<MethodOption> = ptypes
        .iter()
        .zip(&pw)
        .flat_map(|(&ptype, &a)| {
            slrs.iter().zip(&sw).map(move |(&slr, &b)| MethodOption {
                methods: Methods {
                    ptype,
                    slr,
                    lapse_rate_k_per_m,
                    dry_air,
                },
                weight: a * b,
            })
        })
        .collect();
    Ok(Physics {
        taper,
        methods: options[0].methods,
        fixed_ratio: ratio,
        options,
        explicit_shifts: None,
    })
}

/// `[output]` and the output flags: folder, units, raster type and the case's own isobands
/// (`snowfall_bands` is empty when the case gives none; [`resolve`] then uses the thresholds).
fn resolve_output(
    here: &Here,
    o: &OutputFile,
    over: &Overrides,
) -> Result<OutputSettings, CaseError> {
    let (units_text, units_field) = chosen(
        ("--units", &over.units),
        ("output.units", &o.units),
        "metric",
    );
    let units = Units::parse(&units_text).ok_or_else(|| {
        here.invalid(
            units_field,
            format!("'{units_text}': expected metric or us"),
        )
    })?;
    let (type_text, type_field) = chosen(
        ("--raster-type", &over.raster_type),
        ("output.raster_type", &o.raster_type),
        "float32",
    );
    let raster_type = RasterType::parse(&type_text).ok_or_else(|| {
        here.invalid(
            type_field,
            format!("'{type_text}': expected float32 or int16"),
        )
    })?;
    let snowfall_bands = match &o.snowfall_bands {
        None => Vec::new(),
        Some(b) => {
            let increasing = b.windows(2).all(|w| w[0] < w[1]);
            if b.is_empty() || !increasing || b.iter().any(|v| !(v.is_finite() && *v > 0.0)) {
                return Err(here.invalid(
                    "output.snowfall_bands",
                    format!(
                        "{b:?}: expected positive, finite, strictly increasing thresholds in {}",
                        units.snow_unit()
                    ),
                ));
            }
            b.clone()
        }
    };
    let out_dir = match (&over.out, &o.folder) {
        (Some(o), _) => o.clone(),
        (None, Some(f)) => here.dir.join(f),
        (None, None) => here.dir.join(DEFAULT_OUT_FOLDER),
    };
    Ok(OutputSettings {
        out_dir,
        units,
        raster_type,
        snowfall_bands,
        report: over.report,
    })
}

/// The decision thresholds (`[output]`) and `[weights]`: the prior, checked against the run's
/// track offsets, and the minimum coverage.
fn resolve_summary(
    here: &Here,
    o: &OutputFile,
    w: &WeightsFile,
    over: &Overrides,
    axes: &Axes,
    units: Units,
) -> Result<SummarySettings, CaseError> {
    let thresholds = |field: &str, given: &Option<Vec<f64>>, default: Vec<f64>, unit: &str| {
        let t = given.clone().unwrap_or(default);
        let ok = !t.is_empty()
            && t.len() <= MAX_THRESHOLDS
            && t.iter().all(|v| v.is_finite() && *v > 0.0)
            && t.windows(2).all(|w| w[0] < w[1]);
        if ok {
            Ok(t)
        } else {
            Err(here.invalid(
                field,
                format!("{t:?}: expected 1 to {MAX_THRESHOLDS} positive amounts in increasing order, in the output units ({unit})"),
            ))
        }
    };
    let snow_thresholds = thresholds(
        "output.thresholds",
        &o.thresholds,
        crate::render::legend::default_snow_thresholds(units),
        units.snow_unit(),
    )?;
    let ice_thresholds = thresholds(
        "output.ice_thresholds",
        &o.ice_thresholds,
        crate::render::legend::default_ice_thresholds(units),
        units.liquid_unit(),
    )?;
    let (prior, track_error) =
        resolve_prior(here.dir, w, over).map_err(|(field, what)| here.invalid(&field, what))?;
    scenario_weights(
        &prior,
        &crate::scenario::scenario_set(&axes.cross_km, &axes.along_km),
    )
    .map_err(|e| {
        let field = match (&prior, over.cross_sigma.or(over.along_sigma)) {
            (_, Some(_)) => "--cross-sigma/--along-sigma",
            (TrackPrior::Explicit { .. }, _) if w.explicit_file.is_some() => {
                "weights.explicit_file"
            }
            (TrackPrior::Explicit { .. }, _) => "weights.explicit",
            _ => "weights",
        };
        here.invalid(field, e.to_string())
    })?;
    let min_coverage = match (over.min_coverage, w.min_coverage) {
        (Some(v), _) => check_min_coverage(v).map_err(|e| here.invalid("--min-coverage", e))?,
        (None, Some(v)) => {
            check_min_coverage(v).map_err(|e| here.invalid("weights.min_coverage", e))?
        }
        (None, None) => DEFAULT_MIN_COVERAGE,
    };
    Ok(SummarySettings {
        prior,
        track_error,
        min_coverage,
        snow_thresholds,
        ice_thresholds,
    })
}
