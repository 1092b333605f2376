//! What `trackswing inspect` prints for GRIB2 files: the fields, levels, valid times, grids
//! (size, projection, extent) found, and which of a case's requirements are met.

use super::catalog::Catalog;
use super::product::{Param, Surface};
use super::source::catalogue;
use super::GribError;
use crate::read::choose::catalogue::short;
use crate::read::choose::Chooser;
use std::collections::BTreeMap;
use std::fmt::Write;
use std::path::PathBuf;

/// The fields of one parameter on one kind of surface.
#[derive(Default)]
struct Group {
    levels: Vec<f64>,
    times: Vec<chrono::DateTime<chrono::Utc>>,
    count: usize,
    problems: Vec<String>,
}

fn level_list(mut v: Vec<f64>, unit: &str, scale: f64) -> String {
    v.sort_by(|a, b| b.total_cmp(a));
    v.dedup();
    v.iter()
        .map(|x| level_text(x / scale))
        .collect::<Vec<_>>()
        .join(", ")
        + unit
}

/// A level value to six significant digits: GRIB2 stores levels as an integer and a decimal
/// scale factor, so 2·10⁻⁶ decodes as 2.0000000000000003e-6 and would print as such.
fn level_text(x: f64) -> String {
    format!("{x:.5e}")
        .parse::<f64>()
        .map_or_else(|_| x.to_string(), |r| r.to_string())
}

/// The name of a fixed-surface type in WMO GRIB2 Code Table 4.5 (WMO-No. 306, Manual on Codes,
/// Vol. I.2), for the types a model file commonly holds; others by number (192–254 are
/// reserved for local use).
fn surface_name(t: u8) -> Option<&'static str> {
    Some(match t {
        2 => "cloud base",
        3 => "cloud top",
        4 => "0 °C isotherm",
        5 => "adiabatic condensation level lifted from the surface",
        6 => "maximum wind level",
        7 => "tropopause",
        8 => "nominal top of the atmosphere",
        102 => "altitude above mean sea level (m)",
        104 => "sigma level",
        105 => "hybrid level",
        106 => "depth below land surface (m)",
        107 => "isentropic level (K)",
        108 => "pressure difference from the ground (Pa)",
        109 => "potential vorticity surface (K m² kg⁻¹ s⁻¹)",
        _ => return None,
    })
}

/// The inventory of `files` as text. Structural damage is an error; everything else,
/// including unmet requirements, is reported in the text.
pub fn inspect(files: &[PathBuf]) -> Result<String, GribError> {
    let cat = Catalog::scan(files)?;
    let mut out = String::new();
    let n_fields: usize = cat.entries.len() + cat.skipped.values().sum::<usize>();
    let _ = writeln!(
        out,
        "{} GRIB2 file(s), {} field(s), {} of them with parameters trackswing reads",
        files.len(),
        n_fields,
        cat.entries.len()
    );
    let _ = writeln!(out, "\nGrids:");
    for (i, g) in cat.grids.iter().enumerate() {
        let count = cat.entries.iter().filter(|e| e.grid == Some(i)).count();
        match &g.placement {
            Ok(p) => {
                let (w, s, e, n) = p.grid.lonlat_bounds();
                let span = if p.grid.is_projected() {
                    format!("\n          cell centres span lon {w:.3}…{e:.3}, lat {s:.3}…{n:.3}")
                } else {
                    String::new()
                };
                let _ = writeln!(
                    out,
                    "  grid {}: {} fields; {}{span}",
                    i + 1,
                    count,
                    p.grid.describe()
                );
            }
            Err(e) => {
                let _ = writeln!(out, "  grid {}: {count} fields; cannot be used: {e}", i + 1);
            }
        }
    }
    let mut refs: Vec<_> = cat.entries.iter().map(|e| e.product.reference).collect();
    refs.sort();
    refs.dedup();
    let _ = writeln!(
        out,
        "\nReference times: {}",
        refs.iter()
            .map(|t| short(*t))
            .collect::<Vec<_>>()
            .join(", ")
    );
    let mut valid: Vec<_> = cat.entries.iter().map(|e| e.product.valid).collect();
    valid.sort();
    valid.dedup();
    let _ = writeln!(
        out,
        "Valid times ({}): {}",
        valid.len(),
        valid
            .iter()
            .map(|t| short(*t))
            .collect::<Vec<_>>()
            .join(", ")
    );
    let members = super::source::perturbations_in(&cat);
    if !members.is_empty() {
        let _ = writeln!(
            out,
            "Ensemble members (perturbation numbers of templates 4.1/4.11): {}: {}; a case reads each as a member of its own, never mixed",
            members.len(),
            super::source::numbers_text(&members)
        );
    }
    let _ = writeln!(out, "\nFields (parameter — levels — valid times):");
    // Parameter, surface type, accumulated.
    type Key = (Param, u8, bool);
    let mut groups: BTreeMap<Key, Group> = BTreeMap::new();
    for e in &cat.entries {
        let (kind, value) = match e.product.surface {
            Surface::Ground => (1, 0.0),
            Surface::Isobaric(p) => (100, p),
            Surface::MeanSeaLevel => (101, 0.0),
            Surface::AboveGround(m) => (103, m),
            Surface::Other(t, v) => (t, v),
        };
        let g = groups
            .entry((e.param(), kind, e.product.window_start.is_some()))
            .or_default();
        g.levels.push(value);
        g.times.push(e.product.valid);
        g.count += 1;
        if let Some(p) = &e.problem {
            if !g.problems.contains(p) {
                g.problems.push(p.clone());
            }
        }
    }
    for ((param, kind, acc), g) in groups {
        let Group {
            levels,
            mut times,
            count,
            problems,
        } = g;
        times.sort();
        times.dedup();
        let surface = match kind {
            1 => "at the ground".to_string(),
            100 => format!("isobaric {}", level_list(levels, " hPa", 100.0)),
            101 => "at mean sea level".to_string(),
            103 => format!("{} above ground", level_list(levels, " m", 1.0)),
            t => match surface_name(t) {
                Some(name) => format!("{name} (surface type {t}): {}", level_list(levels, "", 1.0)),
                None => format!("fixed surface type {t}: {}", level_list(levels, "", 1.0)),
            },
        };
        let _ = writeln!(
            out,
            "  {}{} ({}) — {surface} — {} time(s), {count} field(s){}",
            param.name(),
            if acc { " accumulated" } else { "" },
            param.units(),
            times.len(),
            if problems.is_empty() {
                String::new()
            } else {
                format!(" — NOT READABLE: {}", problems.join("; "))
            }
        );
    }
    if !cat.skipped.is_empty() {
        let _ = writeln!(out, "\nNot used:");
        for (why, n) in &cat.skipped {
            let _ = writeln!(out, "  {n} × {why}");
        }
    }
    let _ = writeln!(out, "\nCase requirements:");
    let mark = |ok: bool| if ok { "met    " } else { "MISSING" };
    let chosen = catalogue(&cat).and_then(|(grid, fields)| {
        let steps = Chooser::new(&fields).steps()?;
        Ok((grid, fields, steps))
    });
    let (grid, fields, steps) = match chosen {
        Ok((Some(grid), fields, steps)) => (grid, fields, steps),
        Ok((None, ..)) => unreachable!("steps are isobaric temperatures on the case grid"),
        Err(e) => {
            let _ = writeln!(out, "  {} isobaric temperature: {e}", mark(false));
            return Ok(out);
        }
    };
    let ch = Chooser::new(&fields);
    let _ = writeln!(
        out,
        "  {} case grid: grid {} (the one with the most isobaric temperatures)",
        mark(true),
        grid + 1
    );
    let _ = writeln!(
        out,
        "  {} time steps: {} ({}…{})",
        mark(true),
        steps.len(),
        short(steps[0]),
        short(steps[steps.len() - 1])
    );
    match ch.levels(&steps) {
        Ok((levels, dropped)) => {
            let _ = writeln!(
                out,
                "  {} isobaric levels with temperature, height and humidity at the first step: {}{}",
                mark(true),
                level_list(levels.clone(), " hPa", 100.0),
                if dropped.is_empty() {
                    String::new()
                } else {
                    format!(" (incomplete, not used: {})", dropped.join(", "))
                }
            );
            let mut problems = Vec::new();
            for k in 0..steps.len() {
                if let Err(e) = ch.step(&steps, &levels, k) {
                    problems.push(e.to_string());
                }
            }
            if problems.is_empty() {
                let _ = writeln!(
                    out,
                    "  {} every step has those levels, 2 m temperature and humidity, and precipitation for the step",
                    mark(true)
                );
            } else {
                for p in problems {
                    let _ = writeln!(out, "  {} {p}", mark(false));
                }
            }
        }
        Err(e) => {
            let _ = writeln!(out, "  {} isobaric levels: {e}", mark(false));
        }
    }
    match ch.terrain() {
        Ok(height) => {
            let i = height.field;
            let _ = writeln!(
                out,
                "  {} terrain: {} ({})",
                mark(true),
                cat.entries[i].product.label(),
                cat.origin(&cat.entries[i])
            );
        }
        Err(e) => {
            let _ = writeln!(out, "  {} terrain: {e}", mark(false));
        }
    }
    let with_mslp = steps.iter().filter(|t| ch.mslp(**t).is_some()).count();
    let _ = writeln!(
        out,
        "  {} sea-level pressure for the track finder: at {with_mslp} of {} steps",
        mark(with_mslp == steps.len()),
        steps.len()
    );
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn levels_print_as_the_file_means_them() {
        // A PV surface of 2 PVU is stored as 2 with decimal scale factor 6 and decodes with a
        // rounding tail; the inventory shows the value meant.
        assert_eq!(level_text(2.000_000_000_000_000_3e-6), "0.000002");
        assert_eq!(level_text(-2.000_000_000_000_000_3e-6), "-0.000002");
        assert_eq!(level_text(0.995), "0.995");
        assert_eq!(
            level_list(vec![85_000.0, 100_000.0], " hPa", 100.0),
            "1000, 850 hPa"
        );
        // WMO GRIB2 Code Table 4.5 (from memory): 7 tropopause, 109 potential vorticity surface.
        assert_eq!(surface_name(7), Some("tropopause"));
        assert!(surface_name(109)
            .unwrap()
            .starts_with("potential vorticity"));
        assert_eq!(surface_name(204), None);
    }
}
