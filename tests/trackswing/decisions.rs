//! Decision products end to end: weighted distribution layers against the closed form, the flip
//! distance against the distance to a known rain–snow line, the bust-prone towns table, the
//! quicklook maps.

use super::support::{
    bin, col_lon, decode_png, row_lat, write_case, write_front_case, Synthetic, FRONT_ROW,
};
use std::path::Path;
use trackswing::geotiff::read_geotiff;

fn run(case: &Path, args: &[&str]) {
    let o = bin()
        .arg("run")
        .arg(case)
        .args(args)
        .arg("-q")
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
}

fn band(path: &Path, b: usize) -> Vec<f32> {
    read_geotiff(path).unwrap().bands.swap_remove(b)
}

/// The closed form for three scenarios (values v, weights w): sorted, each at the middle of its
/// weight step p = (w₁/2, w₁ + w₂/2, w₁ + w₂ + w₃/2), linear between, clamped outside.
fn closed_form_quantile(v: [f64; 3], w: [f64; 3], q: f64) -> f64 {
    let mut idx = [0, 1, 2];
    idx.sort_by(|a, b| v[*a].total_cmp(&v[*b]));
    let (a, b, c) = (idx[0], idx[1], idx[2]);
    let p = [w[a] / 2.0, w[a] + w[b] / 2.0, w[a] + w[b] + w[c] / 2.0];
    let x = [v[a], v[b], v[c]];
    if q <= p[0] {
        x[0]
    } else if q <= p[1] {
        x[0] + (q - p[0]) / (p[1] - p[0]) * (x[1] - x[0])
    } else if q <= p[2] {
        x[1] + (q - p[1]) / (p[2] - p[1]) * (x[2] - x[1])
    } else {
        x[2]
    }
}

#[test]
fn three_scenarios_with_explicit_weights_match_the_closed_form() {
    let d = tempfile::tempdir().unwrap();
    let case = write_case(
        d.path(),
        &Synthetic::default(),
        "[weights]\nexplicit = [\n  { cross_km = 20, along_km = 0, weight = 3 },\n  { cross_km = -20, along_km = 0, weight = 2 },\n  { cross_km = 0, along_km = 0, weight = 5 },\n]\n",
    );
    run(&case, &["--cross", "-20,0,20", "--along", "0"]);
    let out = d.path().join("out");
    let m: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("manifest.json")).unwrap()).unwrap();
    let w: Vec<f64> = m["scenarios"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| s["weight"].as_f64().unwrap())
        .collect();
    // Scenario order is cross −20, 0, +20; weights 2, 5, 3 normalised by their sum 10.
    assert_eq!(w, vec![0.2, 0.5, 0.3]);
    let stack = read_geotiff(&out.join("snowfall_by_scenario.tif"))
        .unwrap()
        .bands;
    let mean = band(&out.join("snowfall_mean.tif"), 0);
    let q: Vec<Vec<f32>> = ["p10", "p50", "p90"]
        .iter()
        .map(|p| band(&out.join(format!("snowfall_{p}.tif")), 0))
        .collect();
    let ex = read_geotiff(&out.join("snowfall_exceedance.tif")).unwrap();
    let thresholds = [1.0, 2.0, 5.0, 10.0, 20.0, 50.0];
    assert_eq!(ex.bands.len(), 6);
    assert_eq!(ex.descriptions[2], "P(snowfall ≥ 5 cm)");
    let mut checked = 0;
    let mut interior = 0;
    for i in 0..mean.len() {
        let v = [0, 1, 2].map(|k| stack[k][i] as f64);
        if v.iter().any(|x| x.is_nan()) {
            assert!(mean[i].is_nan() && q[1][i].is_nan() && ex.bands[0][i].is_nan());
            continue;
        }
        let wts = [0.2, 0.5, 0.3];
        let want_mean: f64 = v.iter().zip(wts).map(|(a, b)| a * b).sum();
        let tol = |x: f64| 1e-4 * x.abs().max(1.0);
        assert!(
            (mean[i] as f64 - want_mean).abs() < tol(want_mean),
            "cell {i}"
        );
        for (k, qq) in [0.1, 0.5, 0.9].iter().enumerate() {
            let want = closed_form_quantile(v, wts, *qq);
            assert!(
                (q[k][i] as f64 - want).abs() < tol(want),
                "cell {i} q{qq}: {} vs {want}",
                q[k][i]
            );
        }
        assert!(q[0][i] <= q[1][i] && q[1][i] <= q[2][i], "cell {i}");
        if q[0][i] < q[1][i] && q[1][i] < q[2][i] {
            interior += 1;
        }
        let mut prev = 1.0f32;
        for (b, t) in thresholds.iter().enumerate() {
            let p = ex.bands[b][i];
            assert!((0.0..=1.0).contains(&p) && p <= prev, "cell {i}");
            prev = p;
            if v.iter().all(|x| (x - t).abs() > 1e-3) {
                let want: f64 = v
                    .iter()
                    .zip(wts)
                    .filter(|(x, _)| **x >= *t)
                    .map(|(_, w)| w)
                    .sum();
                assert!(
                    (p as f64 - want).abs() < 1e-6,
                    "cell {i} ≥{t}: {p} vs {want}"
                );
            }
        }
        checked += 1;
    }
    assert!(
        checked > 500 && interior > 50,
        "{checked} cells, {interior} with distinct percentiles"
    );
}

#[test]
fn flip_distance_matches_the_distance_to_the_rain_snow_line() {
    let d = tempfile::tempdir().unwrap();
    // A town on a cell centre 4 rows (≈ 44 km) north of the front row, in column 20.
    let town_row = FRONT_ROW - 4;
    let (lat, lon) = (row_lat(town_row), col_lon(20));
    let case = write_front_case(d.path(), &[("North Side", lat, lon)], "");
    run(&case, &["--cross", "-100:100:10", "--along", "0"]);
    let out = d.path().join("out");
    let nx = Synthetic::default().nx;
    // The rain–snow line as modelled, from the snow fraction along column 20 (independent of
    // the flip search): where it crosses 0.5 between two rows, linearly.
    let frac = band(&out.join("snow_fraction_baseline.tif"), 0);
    let col: Vec<f64> = (0..30).map(|r| frac[r * nx + 20] as f64).collect();
    let k = (0..29)
        .find(|&r| col[r] >= 0.5 && col[r + 1] < 0.5)
        .expect("the front must put a rain–snow line in column 20");
    let line_row = k as f64 + (col[k] - 0.5) / (col[k] - col[k + 1]);
    // Rows are 0.1° of latitude; at the equator a degree of latitude is 110.574 km (WGS 84
    // meridional radius, as in trackswing::grid::km_per_degree's doc test).
    let dist_km = (line_row - town_row as f64) * 0.1 * 110.574;
    assert!(dist_km > 20.0 && dist_km < 80.0, "{dist_km}");

    let mut rdr = csv::Reader::from_path(out.join("towns_bust.csv")).unwrap();
    let h = rdr.headers().unwrap().clone();
    let rec = rdr.records().next().unwrap().unwrap();
    let get = |k: &str| {
        rec.get(h.iter().position(|x| x == k).unwrap())
            .unwrap()
            .to_string()
    };
    let flip: f64 = get("flip_km").parse().unwrap();
    assert!(
        (flip - dist_km).abs() <= 10.0 && flip >= dist_km - 2.0,
        "flip at {flip} km, line {dist_km:.1} km away: must be within one 10 km step beyond it"
    );
    assert_eq!(
        get("flip_cross_km").parse::<f64>().unwrap(),
        flip,
        "to the left (north)"
    );
    assert_eq!(get("flip_along_km").parse::<f64>().unwrap(), 0.0);
    assert_eq!(get("flip_direction"), format!("{flip} km left"));
    assert_eq!(get("baseline_type"), "snow");

    // The raster agrees at the town's cell.
    let fl = read_geotiff(&out.join("flip_distance.tif")).unwrap();
    let cell = town_row * nx + 20;
    assert_eq!(fl.bands[0][cell] as f64, flip);
    assert_eq!(fl.bands[1][cell] as f64, flip);
    assert!(
        [1.0, 2.0].contains(&fl.bands[3][cell]),
        "{}",
        fl.bands[3][cell]
    );
    // On the line, moving the low left (north) brings warmer air and less snow.
    let sens = band(&out.join("snowfall_sensitivity_cross.tif"), 0);
    assert!(sens[k * nx + 20] < 0.0, "{}", sens[k * nx + 20]);
    // No along offsets: no along-track sensitivity written ([trust] item 5).
    assert!(!out.join("snowfall_sensitivity_along.tif").exists());
}

#[test]
fn bust_table_is_ranked_spreadsheet_safe_and_points_agree() {
    let d = tempfile::tempdir().unwrap();
    let towns = [
        ("=HYPERLINK(\"x\")", row_lat(FRONT_ROW - 1), col_lon(10)),
        ("Far North", row_lat(8), col_lon(12)),
        ("-Minus Ford", row_lat(FRONT_ROW + 1), col_lon(25)),
        ("@Quay", row_lat(FRONT_ROW - 3), col_lon(30)),
    ];
    let case = write_front_case(d.path(), &towns, "");
    run(
        &case,
        &[
            "--cross",
            "-60:60:20",
            "--along",
            "-50,0,50",
            "--units",
            "us",
        ],
    );
    let out = d.path().join("out");
    let mut rdr = csv::Reader::from_path(out.join("towns_bust.csv")).unwrap();
    let h = rdr.headers().unwrap().clone();
    assert!(h.iter().any(|c| c == "p90_in") && h.iter().any(|c| c == "p_snow_ge_20in"));
    let col = |k: &str| h.iter().position(|x| x == k).unwrap();
    let rows: Vec<csv::StringRecord> = rdr.records().map(Result::unwrap).collect();
    assert_eq!(rows.len(), 4);
    let scores: Vec<f64> = rows
        .iter()
        .map(|r| r[col("bust_score")].parse().unwrap())
        .collect();
    assert!(scores.windows(2).all(|w| w[0] >= w[1]), "{scores:?}");
    let mut flips = 0;
    for (i, r) in rows.iter().enumerate() {
        assert_eq!(r[col("rank")], (i + 1).to_string());
        let name = &r[col("name")];
        // OWASP CSV-injection guidance: a leading = + - @ is neutralised with an apostrophe.
        assert!(!name.starts_with(['=', '+', '-', '@']), "{name}");
        let p10: f64 = r[col("p10_in")].parse().unwrap();
        let p50: f64 = r[col("p50_in")].parse().unwrap();
        let p90: f64 = r[col("p90_in")].parse().unwrap();
        assert!(p10 <= p50 && p50 <= p90);
        let summary = &r[col("summary")];
        assert!(summary.contains(" in as modelled"), "{summary}");
        // US units: the flip distance also in international miles (1 mi = 1.609344 km), and
        // the distances in words carry their miles.
        if let (Ok(km), Ok(mi)) = (
            r[col("flip_km")].parse::<f64>(),
            r[col("flip_mi")].parse::<f64>(),
        ) {
            assert!((mi - km / 1.609_344).abs() <= 0.051, "{km} km vs {mi} mi");
            assert!(r[col("flip_direction")].contains(" mi) "), "{:?}", r);
            flips += 1;
        }
        assert!(
            !summary.contains(" km ") || summary.contains(" mi)"),
            "{summary}"
        );
    }
    assert!(flips > 0, "no town flips within the offsets");
    let names: Vec<&str> = rows.iter().map(|r| &r[col("name")]).collect();
    assert!(names.contains(&"'=HYPERLINK(\"x\")") && names.contains(&"'-Minus Ford"));
    let gj: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("towns_bust.geojson")).unwrap()).unwrap();
    let f = gj["features"].as_array().unwrap();
    assert_eq!(f.len(), 4);
    assert_eq!(f[0]["properties"]["rank"], 1);
    let raw: Vec<&str> = f
        .iter()
        .map(|x| x["properties"]["name"].as_str().unwrap())
        .collect();
    assert!(
        raw.contains(&"=HYPERLINK(\"x\")"),
        "GeoJSON keeps the name as given: {raw:?}"
    );
    // RFC 7946: positions are [lon, lat].
    let p = &f
        .iter()
        .find(|x| x["properties"]["name"] == "Far North")
        .unwrap()["geometry"];
    assert_eq!(p["coordinates"][0].as_f64().unwrap(), col_lon(12));
    assert_eq!(p["coordinates"][1].as_f64().unwrap(), row_lat(8));
}

#[test]
fn maps_decode_with_the_expected_size_and_are_not_blank() {
    let d = tempfile::tempdir().unwrap();
    let case = write_front_case(d.path(), &[("Mid", row_lat(15), col_lon(20))], "");
    run(&case, &["--cross", "-40:40:20", "--along", "0"]);
    let out = d.path().join("out");
    // The synthetic grid spans 4.0° of longitude and 3.0° of latitude around latitude 0.05°:
    // the panel is min(820/(4·cos 0.05°), 760/3) = 205 px per degree, 820 × 615 px, and the
    // image 1200 × (84 + max(615, 680) + 64) = 1200 × 828 px (layout in src/write/maps.rs).
    for f in [
        "map_baseline.png",
        "map_p90.png",
        "map_range.png",
        "map_flip_distance.png",
    ] {
        let (w, h, px, ch) = decode_png(&out.join(f));
        assert_eq!((w, h), (1200, 828), "{f}");
        let mut colours = std::collections::HashSet::new();
        for p in px.chunks(ch) {
            colours.insert([p[0], p[1], p[2]]);
        }
        assert!(colours.len() > 50, "{f}: only {} colours", colours.len());
    }
    // 13 rows (≈ 144 km) north of the front nothing flips within 40 km: the code band says so
    // (0) while the distance band is nodata.
    let fl = read_geotiff(&out.join("flip_distance.tif")).unwrap();
    let cell = (FRONT_ROW - 13) * Synthetic::default().nx + 20;
    assert_eq!(fl.bands[3][cell], 0.0);
    assert!(fl.bands[0][cell].is_nan());
}
