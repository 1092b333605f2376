//! The `[[member]]` tables: each member's files, track and weight, and model files holding
//! several ensemble members split into one member each.

use super::files::{expand_model, expand_pattern, ModelFiles};
use super::here::Here;
use super::schema::{MemberFile, StepFiles};
use super::{CaseError, InputFormat, Member};

/// The `i`-th `[[member]]`: GeoTIFF terrain and steps, or model files; its track and weight.
pub(super) fn resolve_member(here: &Here, i: usize, m: &MemberFile) -> Result<Member, CaseError> {
    let at = |key: &str| format!("member[{i}]{key}");
    let weight = m.weight.unwrap_or(1.0);
    if !(weight.is_finite() && weight > 0.0) {
        return Err(here.invalid(
            &at(".weight"),
            format!("{weight}: expected a positive number (1 unless this member counts more or less than the others)"),
        ));
    }
    let find_track = m.track.as_deref() == Some("find");
    let track = match m.track.as_deref() {
        Some("find") | None => None,
        Some(t) => Some(here.existing(&at(".track"), t)?),
    };
    let model_format = match m.format.as_deref() {
        None | Some("grib2") => InputFormat::Model,
        Some("gdal") if cfg!(feature = "gdal") => InputFormat::Gdal,
        Some("gdal") => return Err(here.invalid(
            &at(".format"),
            "\"gdal\" needs a build with GDAL: rebuild with `cargo build --release --features gdal` (needs the system GDAL library, Debian: libgdal-dev)".into(),
        )),
        Some(other) => return Err(here.invalid(
            &at(".format"),
            format!("'{other}': expected \"grib2\" or \"gdal\""),
        )),
    };
    if m.format.is_some() && m.model.is_none() {
        return Err(here.invalid(
            &at(".format"),
            "applies to model files; give model = ... (GeoTIFF terrain and steps are read without it)".into(),
        ));
    }
    match (&m.terrain, &m.steps, &m.model) {
        (Some(terrain), Some(steps), None) => {
            let steps = match steps {
                StepFiles::List(list) => list
                    .iter()
                    .enumerate()
                    .map(|(k, s)| here.existing(&at(&format!(".steps[{k}]")), s))
                    .collect::<Result<Vec<_>, _>>()?,
                StepFiles::Pattern(p) => expand_pattern(here.dir, p)
                    .map_err(|what| here.invalid(&at(".steps"), what))?,
            };
            if steps.is_empty() {
                return Err(here.invalid(&at(".steps"), "no step files listed".into()));
            }
            Ok(Member {
                name: m.name.clone(),
                terrain: here.existing(&at(".terrain"), terrain)?,
                steps,
                skipped: Vec::new(),
                track,
                format: InputFormat::GeoTiff,
                find_track,
                weight,
                perturbation: None,
            })
        }
        (None, None, Some(model)) => {
            let items: Vec<String> = match model {
                StepFiles::Pattern(p) => vec![p.clone()],
                StepFiles::List(l) => l.clone(),
            };
            let mut found = ModelFiles::default();
            for (k, item) in items.iter().enumerate() {
                let field = if items.len() == 1 {
                    at(".model")
                } else {
                    at(&format!(".model[{k}]"))
                };
                found.extend(
                    expand_model(here.dir, item).map_err(|what| here.invalid(&field, what))?,
                );
            }
            Ok(Member {
                name: m.name.clone(),
                terrain: found.files[0].clone(),
                steps: found.files,
                skipped: found.skipped,
                track,
                format: model_format,
                find_track,
                weight,
                perturbation: None,
            })
        }
        _ => Err(here.invalid(
            &at(""),
            "give either terrain and steps (GeoTIFF files) or model (GRIB2 files: a folder, a pattern or a list), not both".into(),
        )),
    }
}

/// Model files holding several ensemble members (GRIB2 templates 4.1/4.11) become one member
/// each, named `NAME-pN` after the perturbation number, sharing the member's weight equally
/// (the `[[member]]` weight is the whole ensemble's). Files that cannot be scanned are left as
/// they are, for the reader to name the problem.
pub(super) fn split_ensembles(members: Vec<Member>) -> Vec<Member> {
    let mut out = Vec::with_capacity(members.len());
    for m in members {
        let grib2 = m.format == InputFormat::Model
            && m.steps.iter().all(|f| {
                matches!(
                    crate::read::source::magic(f),
                    Ok(crate::read::source::Magic::Grib2)
                )
            });
        let found = if grib2 {
            crate::read::grib::perturbations(&m.steps).unwrap_or_default()
        } else {
            Vec::new()
        };
        if found.len() < 2 {
            out.push(m);
            continue;
        }
        let share = m.weight / found.len() as f64;
        for p in found {
            out.push(Member {
                name: format!("{}-p{p}", m.name),
                weight: share,
                perturbation: Some(p),
                ..m.clone()
            });
        }
    }
    out
}
