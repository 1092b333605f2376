//! The layers of a case with several members or method combinations: the snowfall's spread
//! and where it comes from, each member's mean and its run as issued, and with two members or
//! more each member aligned on the members' mean track and the share of their spread that the
//! alignment explains (GeoTIFF, Float32, output snow units or 0–1). Names are fixed, so GIS
//! projects and scripts can rely on them.

use super::decisions::{one, write_bands, Band};
use super::{WriteError, Written};
use crate::case::Case;
use crate::engine::{Ensemble, RunResult};
use crate::summarise::members::{MemberSummary, NO_SPREAD_MM};
use std::path::Path;

/// The files [`write_member_layers`] writes.
pub const FILES: [&str; 5] = [
    "snowfall_spread.tif",
    "snowfall_spread_share.tif",
    "snowfall_member_mean.tif",
    "snowfall_member_baseline.tif",
    "snowfall_by_member_scenario.tif",
];

/// The files of the track-aligned comparison, written when the members are aligned.
pub const ALIGNED_FILES: [&str; 2] = ["snowfall_member_aligned.tif", "track_explains_members.tif"];

/// Writes the spread, its shares, the members' means and baselines, and the stack of every
/// member's, method's and offset's snowfall.
pub fn write_member_layers(
    dir: &Path,
    case: &Case,
    e: &Ensemble,
    m: &MemberSummary,
    meta: &[(String, String)],
    period: &str,
) -> Result<Vec<Written>, WriteError> {
    let units = case.output.units;
    let r = &e.groups[0].run;
    let su = units.snow_unit();
    let to_unit = |v: &[f32]| v.iter().map(|x| units.snow(*x)).collect::<Vec<f32>>();
    let mut meta = meta.to_vec();
    meta.push(("members".into(), m.names.join(",")));
    meta.push((
        "member_weights".into(),
        m.member_weights
            .iter()
            .map(|w| format!("{w:.4}"))
            .collect::<Vec<_>>()
            .join(","),
    ));
    meta.push(("method_options".into(), m.options.join(",")));
    let mut out = Vec::new();
    let sd_names = [
        "total standard deviation over every member, method and offset",
        "between members (the members' weighted means differ)",
        "between methods within a member",
        "within a member and method: the track offsets and the other axes",
    ];
    let bands: Vec<Band> = sd_names
        .iter()
        .zip(&m.spread.sd)
        .map(|(d, v)| one(format!("snowfall σ, {d}"), to_unit(v), su))
        .collect();
    out.push(write_bands(
        dir,
        r,
        &meta,
        FILES[0],
        su,
        &format!("Standard deviation of snowfall over every member, method combination and offset, weighted by member × method × track-error prior (band 1), and the square roots of its three parts by the law of total variance (bands 2–4: between members, between methods within a member, within a member and method); the squares of bands 2–4 add up to the square of band 1; totals over {period}"),
        bands,
    )?);
    let share_names = ["members", "methods", "track and other axes"];
    let bands: Vec<Band> = share_names
        .iter()
        .zip(&m.spread.share)
        .map(|(d, v)| {
            one(
                format!("share of the snowfall variance from {d}"),
                v.clone(),
                "1",
            )
        })
        .collect();
    out.push(write_bands(
        dir,
        r,
        &meta,
        FILES[1],
        "1",
        &format!("Share (0–1) of the snowfall variance between members (band 1), between methods within a member (band 2) and within a member and method, from the track offsets and the other axes (band 3); nodata where every scenario agrees or the coverage rule leaves the cell missing; totals over {period}"),
        bands,
    )?);
    for (file, what, layers) in [
        (
            FILES[2],
            "weighted mean over its method combinations and offsets",
            &m.member_mean,
        ),
        (
            FILES[3],
            "its run as issued (first method combination, offset 0)",
            &m.member_baseline,
        ),
    ] {
        let bands: Vec<Band> = m
            .names
            .iter()
            .zip(layers)
            .map(|(name, v)| {
                let mut b = one(name.clone(), to_unit(v), su);
                b.metadata.push(("member".into(), name.clone()));
                b
            })
            .collect();
        out.push(write_bands(
            dir,
            r,
            &meta,
            file,
            su,
            &format!("Snowfall of each member (one band per member, band description = member name): {what}; totals over {period}"),
            bands,
        )?);
    }
    out.push(write_stack(dir, r, case, e, m, &meta, period)?);
    if let (Ok(a), Some(explains)) = (&e.alignment, &m.track_explains) {
        let bands: Vec<Band> = m
            .names
            .iter()
            .zip(&a.snowfall)
            .map(|(name, v)| {
                let mut b = one(name.clone(), to_unit(v), su);
                b.metadata.push(("member".into(), name.clone()));
                b
            })
            .collect();
        out.push(write_bands(
            dir,
            r,
            &meta,
            ALIGNED_FILES[0],
            su,
            &format!("Snowfall of each member (one band per member, band description = member name): its run as issued (first method combination, offset 0) with its low moved at every step onto the members' weighted mean track (within the shift taper; far field and terrain stay); totals over {period}"),
            bands,
        )?);
        out.push(write_bands(
            dir,
            r,
            &meta,
            ALIGNED_FILES[1],
            "1",
            &format!("Share (0–1) of the variance between the members' runs as issued that goes once their lows are moved onto one track: 1 − Var(aligned)/Var(as issued) over the members, member-weighted, clamped to 0–1; near 1 the members differ in where they put the low, near 0 in the air mass; nodata where the runs as issued agree (σ below {} mm) or a member is missing; totals over {period}", NO_SPREAD_MM),
            vec![one(
                "share of the members' spread explained by their track differences".into(),
                explains.clone(),
                "1",
            )],
        )?);
    }
    Ok(out)
}

/// `snowfall_by_member_scenario.tif`: one band per member, method combination and scenario,
/// with what it is and its weight in the blend as band metadata.
fn write_stack(
    dir: &Path,
    r: &RunResult,
    case: &Case,
    e: &Ensemble,
    m: &MemberSummary,
    meta: &[(String, String)],
    period: &str,
) -> Result<Written, WriteError> {
    let units = case.output.units;
    let su = units.snow_unit();
    let prior = &m.prior_weights;
    let mut bands = Vec::new();
    for g in &e.groups {
        let member = &case.inputs.members[g.member].name;
        let option = &case.physics.options[g.option];
        for (k, (s, t)) in g.run.scenarios.iter().zip(&g.run.totals).enumerate() {
            let data = t.snowfall.iter().map(|x| units.snow(*x)).collect();
            let mut b = one(
                format!(
                    "snowfall, member {member}, {}, {}",
                    option.label(),
                    s.label()
                ),
                data,
                su,
            );
            b.metadata.extend([
                ("member".into(), member.clone()),
                ("precip_type".into(), option.methods.ptype.name().into()),
                ("snow_ratio".into(), option.methods.slr.name().into()),
                ("cross_km".into(), s.cross_km.to_string()),
                ("along_km".into(), s.along_km.to_string()),
                ("timing_h".into(), s.timing_h.to_string()),
                ("intensity".into(), s.intensity.to_string()),
                ("warm_bias_k".into(), s.warm_bias_k.to_string()),
                ("weight".into(), format!("{:e}", g.weight * prior[k])),
            ]);
            bands.push(b);
        }
    }
    write_bands(
        dir,
        r,
        meta,
        FILES[4],
        su,
        &format!("Total snowfall of every member, method combination and scenario, one band per triple (band metadata: member, precip_type, snow_ratio, the offsets, and the band's weight in the blend: member × method × track-error prior, adding up to 1); totals over {period}"),
        bands,
    )
}
