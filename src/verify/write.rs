//! `OUT_DIR/verification/`: the reports scored (`reports.csv`), the reports left out
//! (`skipped.csv`), the scenarios ranked (`scenarios.csv`), the summary (`summary.json`), the
//! heat map of MAE over the offset plane (`mae_offsets.png`) and a manifest of these files.
//!
//! The folder is written as a whole into a staging folder and swapped in
//! ([`crate::write::folder::Staging`]): the run's own files beside it are never touched, and an
//! interrupted verification leaves the previous complete one or none.

use super::assess::{Assessment, EXPECTED_INSIDE, PIT_SEED};
use super::run::FinishedRun;
use super::VerifyError;
use crate::write::towns::spreadsheet_safe;
use crate::write::{folder::Staging, write_atomic, write_text_atomic, Kind, WriteError, Written};
use std::path::{Path, PathBuf};

/// The folder's name inside the run's output folder.
pub const FOLDER: &str = "verification";

fn num(v: f64, decimals: usize) -> String {
    if v.is_finite() {
        format!("{v:.decimals$}")
    } else {
        String::new()
    }
}

/// A CSV in memory.
fn csv_text(dir: &Path, name: &str, rows: &[Vec<String>]) -> Result<String, WriteError> {
    let mut w = csv::Writer::from_writer(Vec::new());
    let err = |e: csv::Error| WriteError::Io {
        path: dir.join(name),
        source: std::io::Error::other(e.to_string()),
    };
    for r in rows {
        w.write_record(r).map_err(err)?;
    }
    let bytes = w.into_inner().map_err(|e| WriteError::Io {
        path: dir.join(name),
        source: std::io::Error::other(e.to_string()),
    })?;
    Ok(String::from_utf8_lossy(&bytes).into_owned())
}

fn reports_rows(run: &FinishedRun, a: &Assessment) -> Vec<Vec<String>> {
    let u = run.units.snow_unit();
    let mut rows = vec![[
        "line",
        "name",
        "lat",
        "lon",
        "type",
        &format!("observed_{u}"),
        &format!("issued_{u}"),
        &format!("mean_{u}"),
        &format!("p10_{u}"),
        &format!("p50_{u}"),
        &format!("p90_{u}"),
        "inside_p10_p90",
        "pit",
        &format!("crps_{u}"),
        "best_scenario_band",
        "best_scenario",
        &format!("best_error_{u}"),
    ]
    .map(String::from)
    .to_vec()];
    for s in &a.scored {
        let r = &s.report;
        let inside = s.quantiles[0] <= s.observed && s.observed <= s.quantiles[2];
        rows.push(vec![
            r.line.to_string(),
            spreadsheet_safe(&r.name),
            format!("{:.5}", r.lat),
            format!("{:.5}", r.lon),
            spreadsheet_safe(&r.kind),
            num(s.observed, 2),
            num(s.issued, 2),
            num(s.mean, 2),
            num(s.quantiles[0], 2),
            num(s.quantiles[1], 2),
            num(s.quantiles[2], 2),
            inside.to_string(),
            num(s.pit, 4),
            num(s.crps, 3),
            (s.best + 1).to_string(),
            spreadsheet_safe(&run.scenarios[s.best].label),
            num(s.best_error, 3),
        ]);
    }
    rows
}

fn skipped_rows(a: &Assessment) -> Vec<Vec<String>> {
    let mut rows = vec![["line", "name", "lat", "lon", "reason"]
        .map(String::from)
        .to_vec()];
    for s in &a.skipped {
        rows.push(vec![
            s.report.line.to_string(),
            spreadsheet_safe(&s.report.name),
            format!("{:.5}", s.report.lat),
            format!("{:.5}", s.report.lon),
            s.reason.clone(),
        ]);
    }
    rows
}

fn scenario_rows(run: &FinishedRun, a: &Assessment) -> Vec<Vec<String>> {
    let u = run.units.snow_unit();
    let several = run.scenarios.iter().any(|s| s.member.is_some());
    let mut head: Vec<String> = [
        "rank",
        "band",
        "cross_km",
        "along_km",
        "timing_h",
        "intensity",
        "warm_bias_k",
    ]
    .map(String::from)
    .to_vec();
    if several {
        head.extend(["member", "precip_type", "snow_ratio"].map(String::from));
    }
    head.extend(
        [
            "weight".to_string(),
            "label".into(),
            "reports".into(),
            format!("mae_{u}"),
            format!("bias_{u}"),
            format!("rmse_{u}"),
        ]
        .to_vec(),
    );
    let mut rows = vec![head];
    for (rank, sc) in a.scenarios.iter().enumerate() {
        let s = &run.scenarios[sc.index];
        let mut row = vec![
            (rank + 1).to_string(),
            (sc.index + 1).to_string(),
            s.cross_km.to_string(),
            s.along_km.to_string(),
            s.timing_h.to_string(),
            s.intensity.to_string(),
            s.warm_bias_k.to_string(),
        ];
        if several {
            for v in [&s.member, &s.precip_type, &s.snow_ratio] {
                row.push(spreadsheet_safe(v.as_deref().unwrap_or("")));
            }
        }
        row.extend([
            format!("{:.6}", s.weight),
            spreadsheet_safe(&s.label),
            sc.n.to_string(),
            num(sc.mae, 3),
            num(sc.bias, 3),
            num(sc.rmse, 3),
        ]);
        rows.push(row);
    }
    rows
}

/// A number for JSON: null when not finite (JSON has no NaN).
fn json_num(v: f64) -> serde_json::Value {
    if v.is_finite() {
        serde_json::json!(v)
    } else {
        serde_json::Value::Null
    }
}

fn scenario_json(run: &FinishedRun, a: &Assessment, k: usize) -> serde_json::Value {
    let s = &run.scenarios[k];
    let sc = a.scenarios.iter().find(|x| x.index == k);
    serde_json::json!({
        "band": k + 1,
        "label": s.label,
        "cross_km": s.cross_km,
        "along_km": s.along_km,
        "timing_h": s.timing_h,
        "intensity": s.intensity,
        "warm_bias_k": s.warm_bias_k,
        "member": s.member,
        "precip_type": s.precip_type,
        "snow_ratio": s.snow_ratio,
        "weight": s.weight,
        "mae": sc.map_or(serde_json::Value::Null, |x| json_num(x.mae)),
        "mae_standard_error": sc.map_or(serde_json::Value::Null, |x| json_num(x.mae_se)),
        "bias": sc.map_or(serde_json::Value::Null, |x| json_num(x.bias)),
    })
}

fn summary_json(run: &FinishedRun, a: &Assessment, run_manifest_sha256: &str) -> String {
    let v = serde_json::json!({
        "trackswing_version": env!("CARGO_PKG_VERSION"),
        "caution": crate::CAUTION,
        "run_manifest_sha256": run_manifest_sha256,
        "snow_units": run.units.snow_unit(),
        "scenario_stack": run.stack_file,
        "reports_scored": a.scored.len(),
        "reports_skipped": a.skipped.len(),
        "mean_crps": json_num(a.mean_crps),
        "mae_as_issued": json_num(a.issued_mae),
        "crps_skill_vs_as_issued": json_num(a.crps_skill),
        "inside_p10_p90": json_num(a.inside_p10_p90),
        "inside_p10_p90_expected": EXPECTED_INSIDE,
        "mean_pit": json_num(a.scored.iter().map(|s| s.pit).sum::<f64>() / a.scored.len() as f64),
        "brier": a.thresholds.iter().map(|t| serde_json::json!({
            "threshold": t.threshold,
            "brier": json_num(t.brier),
            "brier_as_issued": json_num(t.brier_issued),
            "observed_share": json_num(t.observed_share),
        })).collect::<Vec<_>>(),
        "best_scenario": a.best.map(|k| scenario_json(run, a, k)),
        "within_one_standard_error_of_best": a.within_one_se.iter().map(|&k| scenario_json(run, a, k)).collect::<Vec<_>>(),
        "methods": {
            "distribution": if run.scenarios.iter().any(|s| s.member.is_some()) {
                "every member × method × offset pooled into one weighted sample (weight: member × method × track-error prior, from the stack's band metadata); its P10/P50/P90 are the weighted sample's, not the run's mixture of groups, so they can differ slightly from towns.csv"
            } else {
                "the run's scenarios weighted by the track-error prior (manifest.json)"
            },
            "point_rule": crate::write::towns::POINT_RULE,
            "quantiles": "weighted empirical CDF with each scenario at the middle of its step, linear between scenario values (as the run's summaries)",
            "crps": "Σ wᵢ|xᵢ − y| − ½ Σᵢ Σⱼ wᵢ wⱼ |xᵢ − xⱼ| for the weighted scenarios (Gneiting & Raftery 2007, eq. 21); of the run as issued alone it is the absolute error, so the skill is 1 − mean CRPS / MAE as issued",
            "pit": format!("F(y⁻) + u·(F(y) − F(y⁻)) with u uniform on [0, 1) from a PCG-64 generator seeded with {PIT_SEED}, one draw per scored report in the file's order (randomised within ties, Gneiting et al. 2007)"),
            "brier": "mean of (P(X ≥ threshold) − 1{observed ≥ threshold})² over the scored reports (Brier 1950); as issued: probability 1 or 0",
            "best_scenario": "smallest MAE over the scored reports among the scenarios with a value at each; the range is every such scenario whose MAE is at most the best's plus its standard error (the one-standard-error rule, Hastie, Tibshirani & Friedman 2009, §7.10)",
        },
    });
    serde_json::to_string_pretty(&v).expect("the summary serialises") + "\n"
}

fn written(file: &str, kind: Kind, units: &str, description: &str) -> Written {
    Written {
        file: file.into(),
        kind,
        units: units.into(),
        description: description.into(),
        bands: Vec::new(),
        sha256: None,
    }
}

/// Writes `out_dir/verification/`; returns its path.
pub fn write_verification(
    out_dir: &Path,
    reports_file: &Path,
    run: &FinishedRun,
    a: &Assessment,
) -> Result<PathBuf, VerifyError> {
    let target = out_dir.join(FOLDER);
    let staging = Staging::begin(&target, &[reports_file.to_path_buf()], false)?;
    match fill(staging.dir(), out_dir, reports_file, run, a) {
        Ok(()) => Ok(staging.commit()?),
        Err(e) => {
            staging.abandon();
            Err(e)
        }
    }
}

fn fill(
    dir: &Path,
    out_dir: &Path,
    reports_file: &Path,
    run: &FinishedRun,
    a: &Assessment,
) -> Result<(), VerifyError> {
    let u = run.units.snow_unit();
    let mut files = vec![
        written("reports.csv", Kind::Table, u, "Every scored report: observed, the run as issued, the scenarios' weighted mean and P10/P50/P90, PIT, CRPS and the scenario closest to it"),
        written("skipped.csv", Kind::Table, "", "The reports left out, with the reason (outside the grid, nodata, too little of the weight with data)"),
        written("scenarios.csv", Kind::Table, u, "Every scenario's MAE, bias (model − observed) and RMSE over the scored reports, best first"),
        written("summary.json", Kind::Table, u, "Mean CRPS and its skill against the run as issued, share inside P10–P90, Brier scores, the best scenario and those within one standard error of it"),
    ];
    for (file, rows) in [
        ("reports.csv", reports_rows(run, a)),
        ("skipped.csv", skipped_rows(a)),
        ("scenarios.csv", scenario_rows(run, a)),
    ] {
        write_text_atomic(dir, file, &csv_text(dir, file, &rows)?)?;
    }
    let run_manifest = out_dir.join(crate::write::folder::MANIFEST);
    let sha = crate::shard::sha256_of(&run_manifest).map_err(|e| VerifyError::Run {
        path: run_manifest,
        what: e.to_string(),
    })?;
    write_text_atomic(dir, "summary.json", &summary_json(run, a, &sha))?;
    if let Some(png) = super::heatmap::mae_heatmap(run, a) {
        write_atomic(dir, super::heatmap::FILE, |tmp| {
            std::fs::write(tmp, png).map_err(|source| WriteError::Io {
                path: tmp.to_path_buf(),
                source,
            })
        })?;
        files.push(written(
            super::heatmap::FILE,
            Kind::Image,
            u,
            super::heatmap::CAPTION,
        ));
    }
    let manifest = serde_json::json!({
        "trackswing_version": env!("CARGO_PKG_VERSION"),
        "caution": crate::CAUTION,
        "reports": reports_file.display().to_string(),
        "reports_sha256": crate::shard::sha256_of(reports_file).map_err(|e| VerifyError::Run {
            path: reports_file.to_path_buf(),
            what: e.to_string(),
        })?,
        "run_manifest_sha256": sha,
        "files": files,
    });
    write_text_atomic(
        dir,
        crate::write::folder::MANIFEST,
        &(serde_json::to_string_pretty(&manifest).expect("the manifest serialises") + "\n"),
    )?;
    Ok(())
}
