//! `trackswing track-error` end to end: synthetic past cases with known Gaussian track errors
//! recover their σ and bias within the written 95 % intervals; a case's
//! `[weights] from_track_error` sets the prior at the run's lead time.

use super::support::{bin, write_case, Synthetic};
use chrono::{Duration, TimeZone, Utc};
use geo::{Destination, Geodesic, Point};
use rand::{RngExt, SeedableRng};
use std::path::Path;
use trackswing::read::track::{Track, TrackPoint};

/// True bias and σ (cross, along) of the synthetic errors in lead-time bin `k` (12 h wide).
fn truth(k: usize) -> ((f64, f64), (f64, f64)) {
    (
        (15.0, 40.0 + 20.0 * k as f64),
        (-25.0, 60.0 + 30.0 * k as f64),
    )
}

fn write_track(path: &Path, points: &[TrackPoint]) {
    let mut s = String::from("time,lat,lon\n");
    for p in points {
        s.push_str(&format!(
            "{},{:.12},{:.12}\n",
            p.time.to_rfc3339(),
            p.lat,
            p.lon
        ));
    }
    std::fs::write(path, s).unwrap();
}

fn csv_rows(path: &Path) -> Vec<std::collections::HashMap<String, String>> {
    let mut r = csv::Reader::from_path(path).unwrap();
    let h = r.headers().unwrap().clone();
    r.records()
        .map(|rec| {
            let rec = rec.unwrap();
            h.iter()
                .map(String::from)
                .zip(rec.iter().map(String::from))
                .collect()
        })
        .collect()
}

#[test]
fn synthetic_cases_recover_sigma_and_bias_within_their_intervals() {
    // Reference: the errors are drawn from normal distributions with the σ and bias of
    // `truth` (seeded; Box–Muller from uniform draws, Box & Muller 1958), and the analysed
    // centre is the forecast centre moved by them with Track::shifted_centre (geodesic, Karney
    // 2013). Every row of track_error.csv must give back its draw. A 95 % interval misses its
    // truth one time in twenty, so of the 20 intervals (5 bins × bias and σ × 2 axes) a few may
    // miss: with independent intervals, 4 or more miss with probability 1.6 % (binomial,
    // n = 20, p = 0.05); a wrong σ or bias makes most of them miss.
    let mut rng = rand::rngs::StdRng::seed_from_u64(2026);
    let mut normal = move || {
        let (u, v): (f64, f64) = (1.0 - rng.random::<f64>(), rng.random::<f64>());
        (-2.0 * u.ln()).sqrt() * (2.0 * std::f64::consts::PI * v).cos()
    };
    let d = tempfile::tempdir().unwrap();
    let t0 = Utc.with_ymd_and_hms(2026, 1, 10, 0, 0, 0).unwrap();
    let (mut forecasts, mut analyses) = (Vec::new(), Vec::new());
    let mut drawn = std::collections::HashMap::new();
    for i in 0..60 {
        let reference = t0 + Duration::hours(24 * i);
        let mut p = Point::new(-100.0 + 5.0 * (i % 7) as f64, 35.0 + (i % 10) as f64);
        let mut points = Vec::new();
        for k in 0..9 {
            points.push(TrackPoint {
                time: reference + Duration::hours(6 * k),
                lat: p.y(),
                lon: p.x(),
            });
            p = Geodesic.destination(p, 30.0 + 7.0 * i as f64 + 3.0 * k as f64, 250_000.0);
        }
        let forecast = Track {
            source: "forecast".into(),
            points,
        };
        let analysed: Vec<TrackPoint> = forecast
            .points
            .iter()
            .enumerate()
            .map(|(k, fp)| {
                let ((bc, sc), (ba, sa)) = truth(k / 2);
                let (c, a) = (bc + sc * normal(), ba + sa * normal());
                drawn.insert((format!("c{i:02}"), 6 * k), (c, a));
                let ((lon, lat), _) = forecast.shifted_centre(fp.time, c, a).unwrap();
                TrackPoint {
                    time: fp.time,
                    lat,
                    lon,
                }
            })
            .collect();
        let (f, a) = (
            d.path().join(format!("c{i:02}.csv")),
            d.path().join(format!("c{i:02}_obs.csv")),
        );
        write_track(&f, &forecast.points);
        write_track(&a, &analysed);
        forecasts.push(f);
        analyses.push(a);
    }
    let out = d.path().join("te");
    let o = bin()
        .arg("track-error")
        .arg("--forecast")
        .args(&forecasts)
        .arg("--analysis")
        .args(&analyses)
        .arg("--out")
        .arg(&out)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let errors = csv_rows(&out.join("track_error.csv"));
    assert_eq!(errors.len(), 60 * 9);
    for e in &errors {
        let v = |c: &str| e[c].parse::<f64>().unwrap();
        let (c, a) = drawn[&(e["case"].clone(), v("lead_h") as usize)];
        assert!(
            (v("cross_km") - c).abs() < 0.1 && (v("along_km") - a).abs() < 0.1,
            "{e:?}: {c} {a}"
        );
    }
    let mut misses: Vec<String> = Vec::new();
    let rows = csv_rows(&out.join("track_error_summary.csv"));
    assert_eq!(rows.len(), 5);
    for (k, row) in rows.iter().enumerate() {
        let v = |c: &str| row[c].parse::<f64>().unwrap();
        assert_eq!(
            (v("lead_from_h"), v("lead_to_h")),
            (12.0 * k as f64, 12.0 * (k + 1) as f64)
        );
        assert_eq!(v("n"), if k < 4 { 120.0 } else { 60.0 });
        let ((bc, sc), (ba, sa)) = truth(k);
        for (axis, bias, sigma) in [("cross", bc, sc), ("along", ba, sa)] {
            let f = |s: &str| v(&format!("{axis}_{s}"));
            eprintln!(
                "bin {k} {axis}: bias {bias} → {:.1} [{:.1}, {:.1}], σ {sigma} → {:.1} [{:.1}, {:.1}]",
                f("bias_km"), f("bias_lo_km"), f("bias_hi_km"), f("sigma_km"), f("sigma_lo_km"), f("sigma_hi_km")
            );
            if !(f("bias_lo_km") <= bias && bias <= f("bias_hi_km")) {
                misses.push(format!("bin {k} {axis} bias"));
            }
            if !(f("sigma_lo_km") <= sigma && sigma <= f("sigma_hi_km")) {
                misses.push(format!("bin {k} {axis} σ"));
            }
        }
    }
    eprintln!("intervals missing their truth: {misses:?}");
    assert!(misses.len() <= 3, "{misses:?}");
}

#[test]
fn from_track_error_centres_the_prior_at_the_bias_of_the_run_lead() {
    // Reference: the closed form of the shifted Gaussian. The synthetic case's GeoTIFF steps
    // carry no reference time, so the lead runs from the first step (valid 03 h) to the middle
    // of the period 00–09 h: 1.5 h, bin 0–12 h. Centred at +50 km across with σ 50 km, the
    // offsets −50, 0, 50 weigh e^(−2), e^(−1/2), 1 over their sum.
    let d = tempfile::tempdir().unwrap();
    let case = write_case(
        d.path(),
        &Synthetic {
            steps: 3,
            ..Default::default()
        },
        "[weights]\nfrom_track_error = \"te.csv\"\n",
    );
    let header = trackswing::track_error::files::SUMMARY_HEADER;
    std::fs::write(
        d.path().join("te.csv"),
        format!("{header}\n0,12,10,50,,,50,,,0,,,100,,\n12,24,1,80,,,,,,0,,,,,\n"),
    )
    .unwrap();
    let run = |extra: &[&str]| {
        bin()
            .arg("run")
            .arg(&case)
            .args(["--cross=-50,0,50", "--along=0", "--quiet"])
            .args(extra)
            .output()
            .unwrap()
    };
    let o = run(&[]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let m: serde_json::Value =
        serde_json::from_slice(&std::fs::read(d.path().join("out/manifest.json")).unwrap())
            .unwrap();
    let prior = &m["decisions"]["track_error_prior"];
    assert_eq!(prior["cross_mean_km"], 50.0, "{prior}");
    assert_eq!(prior["cross_sigma_km"], 50.0, "{prior}");
    assert!(
        prior["basis"].as_str().unwrap().contains("bin 0–12 h"),
        "{prior}"
    );
    let e = |x: f64| x.exp();
    let sum = e(-2.0) + e(-0.5) + 1.0;
    for s in m["scenarios"].as_array().unwrap() {
        let c = s["cross_km"].as_f64().unwrap();
        let want = e(-0.5 * ((c - 50.0) / 50.0).powi(2)) / sum;
        assert!((s["weight"].as_f64().unwrap() - want).abs() < 1e-9, "{s}");
    }
    // A lead with no usable bin: exit 3, the file and the lead named, nothing written.
    std::fs::write(
        d.path().join("te.csv"),
        format!("{header}\n24,36,10,50,,,50,,,0,,,100,,\n"),
    )
    .unwrap();
    std::fs::remove_dir_all(d.path().join("out")).unwrap();
    let o = run(&[]);
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(3), "{err}");
    assert!(
        err.contains("te.csv") && err.contains("1.5 h") && err.contains("24–36 h"),
        "{err}"
    );
    assert!(!d.path().join("out/manifest.json").exists());
}

#[test]
fn unpaired_tracks_are_a_usage_error() {
    let d = tempfile::tempdir().unwrap();
    let f = d.path().join("f.csv");
    std::fs::write(
        &f,
        "time,lat,lon\n2026-01-14T00:00:00Z,40,-80\n2026-01-14T06:00:00Z,41,-78\n",
    )
    .unwrap();
    let o = bin()
        .args(["track-error", "--out"])
        .arg(d.path().join("o"))
        .arg("--forecast")
        .args([&f, &f])
        .arg("--analysis")
        .arg(&f)
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains("--analysis") && err.contains("same order"),
        "{err}"
    );
    assert!(!d.path().join("o").exists());
}
