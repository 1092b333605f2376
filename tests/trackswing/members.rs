//! Several members and method combinations ([models]): the groups run one by one and are
//! compared cell by cell; the spread splits into members, methods and track by the law of
//! total variance (checked against numpy in tests/ref/check_spread.py, run by CI on the
//! several-member demo).

use super::support::bin;
use std::path::{Path, PathBuf};
use trackswing::geotiff::read_geotiff;

fn demo_grid() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-grid")
}

/// A case over the shipped demo's files with the given `[[member]]` names (each reading the
/// same files) and snow-ratio list.
fn case(dir: &Path, names: &[&str], snow_ratio: &str) -> PathBuf {
    let g = demo_grid();
    let mut text = format!(
        "title = \"two names for one model run (invented demo storm)\"\ntowns = \"{}\"\n",
        g.join("towns.csv").display()
    );
    for n in names {
        text.push_str(&format!(
            "[[member]]\nname = \"{n}\"\nterrain = \"{}\"\nsteps = \"{}\"\ntrack = \"{}\"\n",
            g.join("terrain.tif").display(),
            g.join("fields/step_*.tif").display(),
            g.join("track.csv").display()
        ));
    }
    text.push_str(&format!(
        "[offsets]\ncross_km = \"-40:40:20\"\nalong_km = \"0\"\n[shift]\ncore_radius_km = 400\nouter_radius_km = 1000\n[methods]\nsnow_ratio = \"{snow_ratio}\"\n"
    ));
    let p = dir.join(format!("case-{}.toml", names.len()));
    std::fs::write(&p, text).unwrap();
    p
}

fn run(case: &Path, out: &Path) {
    let o = bin()
        .arg("run")
        .arg(case)
        .arg("--out")
        .arg(out)
        .arg("--quiet")
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
}

#[test]
fn two_identical_members_have_no_spread_between_them_and_the_single_members_layers() {
    let d = tempfile::tempdir().unwrap();
    let (one, two) = (d.path().join("one"), d.path().join("two"));
    run(&case(d.path(), &["a"], "max-column-temperature"), &one);
    run(&case(d.path(), &["a", "b"], "max-column-temperature"), &two);
    // The primary member's layers are the single member's, byte for byte; so are the
    // summaries that pool both members (a mixture of one distribution with itself is that
    // distribution) and those of their blend at each offset (½a + ½a = a exactly).
    for f in [
        "snowfall_by_scenario.tif",
        "snowfall_baseline.tif",
        "rain_snow_lines.geojson",
        "prior_coverage.tif",
        "snowfall_mean.tif",
        "snowfall_p10.tif",
        "snowfall_p50.tif",
        "snowfall_p90.tif",
        "snowfall_exceedance.tif",
        "snowfall_min.tif",
        "snowfall_max.tif",
        "snowfall_range.tif",
        "ice_accretion_p90.tif",
        "snowfall_sensitivity_cross.tif",
        "flip_distance.tif",
    ] {
        assert_eq!(
            std::fs::read(one.join(f)).unwrap(),
            std::fs::read(two.join(f)).unwrap(),
            "{f}"
        );
    }
    // Between members: exactly 0 wherever the spread has a value; the total is the within
    // part; the members' means and baselines are the same field twice.
    let spread = read_geotiff(&two.join("snowfall_spread.tif")).unwrap();
    // Nodata reads back as NaN.
    let mut cells = 0;
    for i in 0..spread.bands[0].len() {
        if spread.bands[0][i].is_nan() {
            continue;
        }
        cells += 1;
        assert_eq!(spread.bands[1][i], 0.0, "cell {i}");
        assert_eq!(spread.bands[2][i], 0.0, "cell {i}: one method");
        assert_eq!(spread.bands[3][i], spread.bands[0][i], "cell {i}");
    }
    assert!(cells > 5000, "{cells} cells with a spread");
    let base = read_geotiff(&two.join("snowfall_member_baseline.tif")).unwrap();
    assert_eq!(base.bands.len(), 2);
    assert_eq!(base.bands[0], base.bands[1]);
    let single = read_geotiff(&one.join("snowfall_baseline.tif")).unwrap();
    assert_eq!(base.bands[0], single.bands[0]);
    // towns.csv holds every pooled scenario: member a's and b's columns are the single run's.
    let table = |p: &Path| {
        let mut r = csv::Reader::from_path(p).unwrap();
        let h: Vec<String> = r.headers().unwrap().iter().map(String::from).collect();
        let rows: Vec<Vec<String>> = r
            .records()
            .map(|x| x.unwrap().iter().map(String::from).collect())
            .collect();
        (h, rows)
    };
    let (h1, r1) = table(&one.join("towns.csv"));
    let (h2, r2) = table(&two.join("towns.csv"));
    let mut compared = 0;
    for (i, name) in h1.iter().enumerate() {
        let Some(tag) = name.strip_prefix("snow_cm_") else {
            continue;
        };
        for m in ["a", "b"] {
            let j = h2
                .iter()
                .position(|c| *c == format!("snow_cm_{m}_{tag}"))
                .unwrap_or_else(|| panic!("no column for member {m}, {tag}"));
            for (x, y) in r1.iter().zip(&r2) {
                assert_eq!(x[i], y[j], "{name} of member {m}");
                compared += 1;
            }
        }
    }
    assert!(compared >= 2 * 5 * 10, "{compared} values compared");
    // The bust table's pooled numbers are the single run's.
    let (b1, q1) = table(&one.join("towns_bust.csv"));
    let (b2, q2) = table(&two.join("towns_bust.csv"));
    for c in [
        "name",
        "p10_cm",
        "p50_cm",
        "p90_cm",
        "mean_cm",
        "flip_km",
        "bust_score",
    ] {
        let (i, j) = (
            b1.iter().position(|x| x == c).unwrap(),
            b2.iter().position(|x| x == c).unwrap(),
        );
        for (x, y) in q1.iter().zip(&q2) {
            assert_eq!(x[i], y[j], "{c}");
        }
    }
    // One track twice: its mean is that track, nobody moves, and each member aligned is its run
    // as issued, bit for bit; with no spread between the members there is nothing for the
    // track to explain (nodata everywhere).
    let aligned = read_geotiff(&two.join("snowfall_member_aligned.tif")).unwrap();
    assert_eq!(aligned.descriptions, ["a", "b"]);
    for k in 0..2 {
        assert!(
            aligned.bands[k]
                .iter()
                .zip(&base.bands[k])
                .all(|(x, y)| x.to_bits() == y.to_bits() || (x.is_nan() && y.is_nan())),
            "member {k}"
        );
    }
    let explains = read_geotiff(&two.join("track_explains_members.tif")).unwrap();
    assert!(explains.bands[0].iter().all(|v| v.is_nan()));
    let m: serde_json::Value =
        serde_json::from_slice(&std::fs::read(two.join("manifest.json")).unwrap()).unwrap();
    for d in m["ensemble"]["alignment"]["displacement_km"]
        .as_array()
        .unwrap()
    {
        for x in d["east_north_km"].as_array().unwrap() {
            assert_eq!(x, &serde_json::json!([0.0, 0.0]));
        }
    }
    // The towns table says so too.
    let mut r = csv::Reader::from_path(two.join("towns_bust.csv")).unwrap();
    let h = r.headers().unwrap().clone();
    let col = |n: &str| {
        h.iter()
            .position(|c| c == n)
            .unwrap_or_else(|| panic!("{n}"))
    };
    let (sm, sa, sb, te) = (
        col("share_members"),
        col("baseline_cm_a"),
        col("baseline_cm_b"),
        col("track_explains_members"),
    );
    let mut rows = 0;
    for rec in r.records() {
        let rec = rec.unwrap();
        assert_eq!(rec.get(sa), rec.get(sb));
        assert_eq!(rec.get(te), Some(""), "no spread: no share");
        if !rec.get(sm).unwrap().is_empty() {
            assert_eq!(rec.get(sm).unwrap().parse::<f64>().unwrap(), 0.0);
            rows += 1;
        }
    }
    assert!(rows > 10, "{rows} towns with shares");
}

#[test]
fn two_snow_ratio_methods_split_the_spread_and_the_stack_names_every_band() {
    let d = tempfile::tempdir().unwrap();
    let out = d.path().join("out");
    run(&case(d.path(), &["a"], "fixed,growth-zone"), &out);
    let stack = read_geotiff(&out.join("snowfall_by_member_scenario.tif")).unwrap();
    // 1 member × 2 methods × 5 offsets.
    assert_eq!(stack.bands.len(), 10);
    let md = |b: usize, k: &str| -> String {
        stack.band_metadata[b]
            .iter()
            .find(|(key, _)| key == k)
            .map(|(_, v)| v.clone())
            .unwrap_or_default()
    };
    assert_eq!(md(0, "snow_ratio"), "fixed");
    assert_eq!(md(5, "snow_ratio"), "growth-zone");
    assert_eq!(md(9, "member"), "a");
    let w: f64 = (0..10)
        .map(|b| md(b, "weight").parse::<f64>().unwrap())
        .sum();
    assert!((w - 1.0).abs() < 1e-9, "band weights add up to {w}");
    // The growth-zone ratio differs from 10:1 where snow falls: a positive part between
    // methods there; no part between members with one member.
    let spread = read_geotiff(&out.join("snowfall_spread.tif")).unwrap();
    let between_methods = spread.bands[2].iter().filter(|v| **v > 0.1).count();
    assert!(between_methods > 500, "{between_methods} cells");
    assert!(spread.bands[1].iter().all(|v| *v == 0.0 || v.is_nan()));
    // The map of the dominant source is drawn and listed.
    let m: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("manifest.json")).unwrap()).unwrap();
    assert!(m["files"]
        .as_array()
        .unwrap()
        .iter()
        .any(|f| f["file"] == "map_spread_source.png" && f["kind"] == "image"));
    assert!(out.join("map_spread_source.png").is_file());
    // One member: no alignment, and the manifest says why.
    let why: Vec<&str> = m["not_computed"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|n| {
            n["layer"] == "snowfall_member_aligned.tif"
                || n["layer"] == "track_explains_members.tif"
        })
        .map(|n| n["reason"].as_str().unwrap())
        .collect();
    assert_eq!(why.len(), 2);
    assert!(why[0].contains("one member"), "{}", why[0]);
    assert!(!out.join("snowfall_member_aligned.tif").exists());
}

/// Writes the shipped demo's terrain and steps cut to the block of `cols` × `rows` cells from
/// (`col0`, `row0`), as Float32 (the values read from the demo, bit for bit), into `dir`, its
/// grid and the demo's track moved `lon_shift` degrees east and its valid times and track
/// `later_h` hours later.
fn demo_window(
    dir: &Path,
    (col0, row0): (usize, usize),
    (cols, rows): (usize, usize),
    lon_shift: f64,
    later_h: i64,
) {
    let later = |t: &str| {
        (chrono::DateTime::parse_from_rfc3339(t).unwrap() + chrono::Duration::hours(later_h))
            .with_timezone(&chrono::Utc)
            .to_rfc3339_opts(chrono::SecondsFormat::Secs, true)
    };
    use trackswing::geotiff::{write_cog, BandSpec, CogOptions, SampleEncoding, WriteOptions};
    std::fs::create_dir_all(dir.join("fields")).unwrap();
    let g = demo_grid();
    let mut files = vec![(g.join("terrain.tif"), dir.join("terrain.tif"))];
    for e in std::fs::read_dir(g.join("fields")).unwrap() {
        let p = e.unwrap().path();
        files.push((p.clone(), dir.join("fields").join(p.file_name().unwrap())));
    }
    for (from, to) in files {
        let r = read_geotiff(&from).unwrap();
        let cut: Vec<Vec<f32>> = r
            .bands
            .iter()
            .map(|b| {
                (row0..row0 + rows)
                    .flat_map(|row| b[row * r.width + col0..row * r.width + col0 + cols].to_vec())
                    .collect()
            })
            .collect();
        let specs: Vec<BandSpec> = cut
            .iter()
            .zip(&r.descriptions)
            .zip(&r.band_metadata)
            .map(|((data, d), m)| BandSpec {
                data,
                description: d.clone(),
                metadata: m.clone(),
            })
            .collect();
        let mut georef = r.georef;
        let gt = &mut georef.geotransform;
        gt[0] += col0 as f64 * gt[1] + lon_shift;
        gt[3] += row0 as f64 * gt[5];
        let opts = WriteOptions {
            encoding: SampleEncoding::Float32,
            nodata: -9999.0,
            dataset_metadata: r
                .dataset_metadata
                .iter()
                .map(|(k, v)| match k.as_str() {
                    "valid_time" => (k.clone(), later(v)),
                    _ => (k.clone(), v.clone()),
                })
                .collect(),
            band_scaling: vec![],
        };
        write_cog(
            &to,
            cols,
            rows,
            &georef,
            &specs,
            &opts,
            &CogOptions::default(),
        )
        .unwrap();
    }
    let track = std::fs::read_to_string(g.join("track.csv")).unwrap();
    let mut lines = track.lines();
    let mut moved = format!("{}\n", lines.next().unwrap());
    for l in lines {
        let f: Vec<&str> = l.split(',').collect();
        let lon: f64 = f[2].parse().unwrap();
        moved.push_str(&format!(
            "{},{},{:.4},{}\n",
            later(f[0]),
            f[1],
            lon + lon_shift,
            f[3]
        ));
    }
    std::fs::write(dir.join("track.csv"), moved).unwrap();
}

/// A `[[member]]` table reading a demo-like folder.
fn member_table(name: &str, dir: &Path) -> String {
    format!(
        "[[member]]\nname = \"{name}\"\nterrain = \"{0}/terrain.tif\"\nsteps = \"{0}/fields/step_*.tif\"\ntrack = \"{0}/track.csv\"\n",
        dir.display()
    )
}

/// The demo case of member `a` (the shipped demo) and the members given, with `extra` before
/// `[offsets]`.
fn case_with(dir: &Path, members: &[(&str, &Path)], extra: &str) -> PathBuf {
    let p = case(dir, &["a"], "fixed");
    let tables: String = members.iter().map(|(n, d)| member_table(n, d)).collect();
    let text = std::fs::read_to_string(&p)
        .unwrap()
        .replace("[offsets]", &format!("{tables}{extra}[offsets]"));
    std::fs::write(&p, text).unwrap();
    p
}

fn manifest_warnings(out: &Path) -> Vec<String> {
    let m: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("manifest.json")).unwrap()).unwrap();
    m["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|w| w.as_str().unwrap().to_string())
        .collect()
}

#[test]
fn a_member_on_a_window_of_the_grid_matches_the_same_member_on_the_output_grid() {
    // The same model run cut to a block 10 columns east and 8 rows south of the output grid's
    // corner: resampled onto the output grid, each output cell lies in one of its cells, so
    // away from its edges it must give what the whole grid gives (the same computation on the
    // same values; only the cells' coordinates are rounded differently, hence the tolerance).
    let d = tempfile::tempdir().unwrap();
    let w = d.path().join("window");
    let (c0, r0, cols, rows) = (10, 8, 100, 80);
    demo_window(&w, (c0, r0), (cols, rows), 0.0, 0);
    let out = d.path().join("out");
    run(&case_with(d.path(), &[("w", &w)], ""), &out);
    let stack = read_geotiff(&out.join("snowfall_by_member_scenario.tif")).unwrap();
    let nx = stack.width;
    // 2 members × 5 cross-track offsets of up to 40 km (3 to 4 cells); 8 cells keep every
    // source point of a shifted scenario inside the block.
    assert_eq!(stack.bands.len(), 10);
    let margin = 8;
    let (mut compared, mut outside) = (0, 0);
    for k in 0..5 {
        let (a, b) = (&stack.bands[k], &stack.bands[5 + k]);
        for i in 0..a.len() {
            let (col, row) = (i % nx, i / nx);
            let in_block = (c0..c0 + cols).contains(&col) && (r0..r0 + rows).contains(&row);
            if !in_block {
                assert!(
                    b[i].is_nan(),
                    "scenario {k}, cell {i} outside the block: {}",
                    b[i]
                );
                outside += 1;
            } else if (c0 + margin..c0 + cols - margin).contains(&col)
                && (r0 + margin..r0 + rows - margin).contains(&row)
                && !a[i].is_nan()
            {
                assert!(
                    (a[i] - b[i]).abs() <= 1e-4 * a[i].abs().max(1.0),
                    "scenario {k}, cell {i}: {} against {}",
                    b[i],
                    a[i]
                );
                compared += 1;
            }
        }
    }
    assert!(compared > 5 * 5000, "{compared} cells compared");
    assert_eq!(outside, 5 * (128 * 104 - cols * rows));
    let warnings = manifest_warnings(&out);
    assert!(
        warnings
            .iter()
            .any(|w| w.contains("member 'w' is on another grid")
                && w.contains(&format!(
                    "it covers {} of the {} output cells",
                    cols * rows,
                    128 * 104
                ))),
        "{warnings:?}"
    );
}

#[test]
fn a_member_on_a_coarser_grid_runs_and_its_precipitation_is_conserved() {
    // The demo storm on 64 × 52 cells over the same region: each cell holds 2 × 2 of the output
    // grid's. The area-integral of its precipitation on the output grid must be its own within
    // the remap's stated tolerance (the integral of a field does not depend on the grid it is
    // on: mathematical fact).
    use trackswing::case::{Case, Overrides};
    use trackswing::engine::regrid::CONSERVATION_TOLERANCE;
    let d = tempfile::tempdir().unwrap();
    let coarse = d.path().join("coarse");
    let o = bin()
        .args(["make-demo", "--nx", "64", "--ny", "52", "--out"])
        .arg(&coarse)
        .output()
        .unwrap();
    assert!(o.status.success());
    let p = case_with(d.path(), &[("coarse", &coarse)], "");
    let case = Case::load(&p, &Overrides::default()).unwrap();
    let quiet = trackswing::progress::Silent;
    let own = trackswing::engine::run(&case.group(1, 0), 1, &quiet).unwrap();
    let e = trackswing::engine::run_groups(&case, 1, &quiet).unwrap();
    let on_output = &e.groups[1].run;
    assert_eq!(on_output.grid.len(), 128 * 104);
    let integral = |g: &trackswing::grid::Grid, v: &[f32]| -> f64 {
        v.iter()
            .enumerate()
            .map(|(i, x)| *x as f64 * g.cell_area_km2(i))
            .sum()
    };
    let mut checked = 0;
    for (s, (a, b)) in own.totals.iter().zip(&on_output.totals).enumerate() {
        for (what, x, y) in [
            ("liquid", &a.liquid, &b.liquid),
            ("snowfall", &a.snowfall, &b.snowfall),
        ] {
            if x.iter().any(|v| v.is_nan()) {
                continue;
            }
            let (ia, ib) = (integral(&own.grid, x), integral(&on_output.grid, y));
            let err = (ib - ia).abs() / ia;
            assert!(
                err < CONSERVATION_TOLERANCE,
                "scenario {s}, {what}: {ib} against {ia} ({err:.2e})"
            );
            checked += 1;
        }
    }
    assert!(checked >= 2, "{checked} fields compared");
    assert!(
        on_output
            .warnings
            .iter()
            .any(|w| w.contains("covers every output cell")),
        "{:?}",
        on_output.warnings
    );
}

#[test]
fn members_are_matched_by_valid_time_and_one_of_another_storm_is_refused() {
    let d = tempfile::tempdir().unwrap();
    // The demo's first 20 of 25 steps: it covers what it has, and the run says so.
    let g = demo_grid();
    let steps: Vec<String> = (0..20)
        .map(|k| {
            format!(
                "\"{}\"",
                g.join(format!("fields/step_{k:03}.tif")).display()
            )
        })
        .collect();
    let p = case_with(d.path(), &[], "");
    let text = std::fs::read_to_string(&p).unwrap().replace(
        "[offsets]",
        &format!(
            "[[member]]\nname = \"short\"\nterrain = \"{}\"\nsteps = [{}]\ntrack = \"{}\"\n[offsets]",
            g.join("terrain.tif").display(),
            steps.join(", "),
            g.join("track.csv").display()
        ),
    );
    std::fs::write(&p, text).unwrap();
    let out = d.path().join("out");
    run(&p, &out);
    let warnings = manifest_warnings(&out);
    assert!(
        warnings.iter().any(|w| w.contains("member 'short' has 20 steps")
            && w.contains("it shares 20 of the primary's steps, lacks 5 (valid 2026-01-15 04:00 to 2026-01-15 12:00 UTC) and adds none")),
        "{warnings:?}"
    );
    // The same fields 100 hours later (the demo spans 48): no step in common, refused.
    let later = d.path().join("later");
    demo_window(&later, (0, 0), (128, 104), 0.0, 100);
    let out = d.path().join("out-later");
    let o = bin()
        .arg("run")
        .arg(case_with(d.path(), &[("later", &later)], ""))
        .arg("--out")
        .arg(&out)
        .arg("--quiet")
        .output()
        .unwrap();
    let e = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(3), "{e}");
    assert!(
        e.contains("member 'later'") && e.contains("do not overlap the primary member's"),
        "{e}"
    );
    assert!(!out.exists(), "nothing is written");
}

#[test]
fn members_whose_grids_do_not_meet_and_an_unknown_output_grid_are_refused() {
    let d = tempfile::tempdir().unwrap();
    let far = d.path().join("far");
    demo_window(&far, (0, 0), (128, 104), 60.0, 0);
    let out = d.path().join("out");
    let refused = |p: &Path, words: &[&str]| {
        let o = bin()
            .arg("run")
            .arg(p)
            .arg("--out")
            .arg(&out)
            .arg("--quiet")
            .output()
            .unwrap();
        let e = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(3), "{e}");
        for w in words {
            assert!(e.contains(w), "{w}: {e}");
        }
        assert!(!out.exists(), "nothing is written");
    };
    refused(
        &case_with(d.path(), &[("far", &far)], ""),
        &[
            "member 'far'",
            "holds no cell of the output grid",
            "128×104 cells",
        ],
    );
    refused(
        &case_with(d.path(), &[("far", &far)], "[output]\ngrid = \"near\"\n"),
        &["'output.grid'", "'near' names no member", "'a', 'far'"],
    );
}

#[test]
fn members_from_model_files_on_the_command_line_and_the_sounding_of_one() {
    let d = tempfile::tempdir().unwrap();
    let g = d.path().join("g");
    let o = bin()
        .args([
            "make-demo",
            "--grib2",
            "--nx",
            "48",
            "--ny",
            "39",
            "--steps",
            "5",
            "--out",
        ])
        .arg(&g)
        .output()
        .unwrap();
    assert!(o.status.success());
    let out = d.path().join("out");
    let o = bin()
        .arg("run")
        .arg(&g)
        .arg("--member")
        .arg(format!("twin={}", g.display()))
        .args([
            "--track",
            "find",
            "--cross=-40:40:40",
            "--along",
            "0",
            "--quiet",
            "--out",
        ])
        .arg(&out)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let m: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("manifest.json")).unwrap()).unwrap();
    let names: Vec<&str> = m["ensemble"]["members"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v["name"].as_str().unwrap())
        .collect();
    assert_eq!(names, ["step_000", "twin"]);
    assert_eq!(m["ensemble"]["members"][1]["weight"], 0.5);
    // A malformed --member is a bad command line.
    let o = bin()
        .arg("run")
        .arg(&g)
        .args(["--member", "no-equals-sign", "--out"])
        .arg(d.path().join("x"))
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("expected NAME=FILES"));

    // `sounding --member` shows the member asked for, and names the members of the case when
    // the name is wrong.
    let dm = d.path().join("dm");
    assert!(bin()
        .args([
            "make-demo",
            "--members",
            "--nx",
            "48",
            "--ny",
            "39",
            "--steps",
            "5",
            "--out"
        ])
        .arg(&dm)
        .status()
        .unwrap()
        .success());
    let town = "--at=47.2,-29.5";
    let o = bin()
        .arg("sounding")
        .arg(dm.join("case.toml"))
        .args([town, "--member", "warm-wet"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(String::from_utf8_lossy(&o.stdout).contains("(member warm-wet)"));
    let o = bin()
        .arg("sounding")
        .arg(dm.join("case.toml"))
        .args([town, "--member", "nope"])
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(2));
    let e = String::from_utf8_lossy(&o.stderr);
    assert!(e.contains("demo, north-track, warm-wet"), "{e}");
}

/// One GRIB2 file's messages made ensemble member `perturbation` of `count`: product template
/// 4.0 becomes 4.1 and 4.8 becomes 4.11 by inserting, after octet 34 of Section 4, the three
/// octets of WMO-No. 306 Vol. I.2 code tables 4.6 (type of ensemble forecast, 3 = positively
/// perturbed), the perturbation number and the number of forecasts in the ensemble; the
/// section's and the message's lengths grow by 3.
fn as_ensemble_member(bytes: &[u8], perturbation: u8, count: u8) -> Vec<u8> {
    let mut out = Vec::new();
    let mut at = 0;
    while at + 16 <= bytes.len() {
        assert_eq!(&bytes[at..at + 4], b"GRIB");
        let total = u64::from_be_bytes(bytes[at + 8..at + 16].try_into().unwrap()) as usize;
        let msg = &bytes[at..at + total];
        let mut m = msg[..16].to_vec();
        let mut s = 16;
        while s < total - 4 {
            let len = u32::from_be_bytes(msg[s..s + 4].try_into().unwrap()) as usize;
            let sect = &msg[s..s + len];
            if sect[4] == 4 {
                let template = u16::from_be_bytes([sect[7], sect[8]]);
                let new = match template {
                    0 => 1u16,
                    8 => 11,
                    other => panic!("template 4.{other}"),
                };
                let mut t = sect[..34].to_vec();
                t[7..9].copy_from_slice(&new.to_be_bytes());
                t.extend([3, perturbation, count]);
                t.extend(&sect[34..]);
                let l = (t.len() as u32).to_be_bytes();
                t[..4].copy_from_slice(&l);
                m.extend(t);
            } else {
                m.extend(sect);
            }
            s += len;
        }
        m.extend(b"7777");
        let l = (m.len() as u64).to_be_bytes();
        m[8..16].copy_from_slice(&l);
        out.extend(m);
        at += total;
    }
    out
}

#[test]
fn an_ensemble_grib2_file_is_split_into_its_members_never_mixed() {
    let d = tempfile::tempdir().unwrap();
    let mut spec = trackswing::demo::DemoSpec::scaled(48, 39, 5, 2, 4);
    let (plain, north, ens) = (
        d.path().join("plain"),
        d.path().join("north"),
        d.path().join("ens"),
    );
    trackswing::demo::grib2_case::write_case_grib2(&plain, &spec).unwrap();
    spec.variant.path_offset_km = (0.0, 80.0);
    trackswing::demo::grib2_case::write_case_grib2(&north, &spec).unwrap();
    std::fs::create_dir_all(&ens).unwrap();
    let mut names: Vec<_> = std::fs::read_dir(plain.join("fields"))
        .unwrap()
        .map(|e| e.unwrap().file_name())
        .collect();
    names.sort();
    for n in &names {
        // Member 1's messages first in every file: what is read must not depend on the order.
        let mut bytes =
            as_ensemble_member(&std::fs::read(north.join("fields").join(n)).unwrap(), 1, 2);
        bytes.extend(as_ensemble_member(
            &std::fs::read(plain.join("fields").join(n)).unwrap(),
            0,
            2,
        ));
        std::fs::write(ens.join(n), bytes).unwrap();
    }
    let files: Vec<PathBuf> = names.iter().map(|n| ens.join(n)).collect();
    // Read as one member, the files are refused, not mixed.
    let e = trackswing::read::grib::GribSource::open(&files, &|_| {})
        .err()
        .unwrap()
        .to_string();
    assert!(
        e.contains("2 ensemble members (perturbation numbers 0, 1)"),
        "{e}"
    );
    assert_eq!(
        trackswing::read::grib::perturbations(&files).unwrap(),
        [0, 1]
    );
    // inspect lists them.
    let o = bin().arg("inspect").arg(&ens).output().unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(String::from_utf8_lossy(&o.stdout)
        .contains("Ensemble members (perturbation numbers of templates 4.1/4.11): 2: 0, 1"));
    // A run splits them into members named by perturbation number; each member's run as
    // issued is the run of its own file, bit for bit.
    let run_zero = |what: &Path, out: &Path| {
        let o = bin()
            .arg("run")
            .arg(what)
            .args(["--cross", "0", "--along", "0", "--quiet", "--out"])
            .arg(out)
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    };
    let (out, out_plain, out_north) =
        (d.path().join("o"), d.path().join("op"), d.path().join("on"));
    run_zero(&ens, &out);
    run_zero(&plain.join("fields"), &out_plain);
    run_zero(&north.join("fields"), &out_north);
    let base = read_geotiff(&out.join("snowfall_member_baseline.tif")).unwrap();
    assert_eq!(base.descriptions, ["step_000-p0", "step_000-p1"]);
    let one = |dir: &Path| {
        read_geotiff(&dir.join("snowfall_baseline.tif"))
            .unwrap()
            .bands[0]
            .clone()
    };
    let (p0, p1) = (one(&out_plain), one(&out_north));
    assert_ne!(p0, p1, "the members differ");
    let same = |a: &[f32], b: &[f32]| {
        a.iter()
            .zip(b)
            .all(|(x, y)| x == y || (x.is_nan() && y.is_nan()))
    };
    assert!(same(&base.bands[0], &p0));
    assert!(same(&base.bands[1], &p1));
    let m: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("manifest.json")).unwrap()).unwrap();
    assert_eq!(m["ensemble"]["members"][1]["weight"], 0.5);
}

/// One GRIB2 file's messages as the same fields from a cycle `hours` earlier: the reference
/// time (Section 1, octets 13–19) moves back and the forecast time (Section 4, octets 19–22,
/// in hours: code table 4.4 unit 1) forward by as much, so every valid time stays (WMO-No. 306
/// Vol. I.2, templates 4.0 and 4.8; the end of a 4.8 interval is an absolute time and stays).
fn from_earlier_cycle(bytes: &[u8], hours: u32) -> Vec<u8> {
    use chrono::{Datelike, TimeZone, Timelike};
    let mut out = bytes.to_vec();
    let mut at = 0;
    while at + 16 <= out.len() {
        let total = u64::from_be_bytes(out[at + 8..at + 16].try_into().unwrap()) as usize;
        let mut s = at + 16;
        while s < at + total - 4 {
            let len = u32::from_be_bytes(out[s..s + 4].try_into().unwrap()) as usize;
            match out[s + 4] {
                1 => {
                    let o = &mut out[s..s + len];
                    let year = u16::from_be_bytes([o[12], o[13]]) as i32;
                    let t = chrono::Utc
                        .with_ymd_and_hms(
                            year,
                            o[14] as u32,
                            o[15] as u32,
                            o[16] as u32,
                            o[17] as u32,
                            o[18] as u32,
                        )
                        .unwrap()
                        - chrono::Duration::hours(hours as i64);
                    o[12..14].copy_from_slice(&(t.year() as u16).to_be_bytes());
                    (o[14], o[15], o[16], o[17], o[18]) = (
                        t.month() as u8,
                        t.day() as u8,
                        t.hour() as u8,
                        t.minute() as u8,
                        t.second() as u8,
                    );
                }
                4 => {
                    let o = &mut out[s..s + len];
                    assert_eq!(o[17], 1, "forecast time in hours");
                    let ft = u32::from_be_bytes(o[18..22].try_into().unwrap()) + hours;
                    o[18..22].copy_from_slice(&ft.to_be_bytes());
                }
                _ => {}
            }
            s += len;
        }
        at += total;
    }
    out
}

#[test]
fn successive_cycles_give_the_run_to_run_change_in_time_order() {
    let d = tempfile::tempdir().unwrap();
    let mut spec = trackswing::demo::DemoSpec::scaled(48, 39, 5, 2, 4);
    let (early_src, later) = (d.path().join("early-src"), d.path().join("later"));
    trackswing::demo::grib2_case::write_case_grib2(&early_src, &spec).unwrap();
    spec.variant.warm_k = -1.0;
    spec.variant.wet_factor = 1.3;
    trackswing::demo::grib2_case::write_case_grib2(&later, &spec).unwrap();
    // Both members from the second valid time on: the earlier cycle's first step then has a
    // total since its start, as a real earlier cycle would.
    let early = d.path().join("early");
    let later_fields = d.path().join("later-fields");
    std::fs::create_dir_all(&early).unwrap();
    std::fs::create_dir_all(&later_fields).unwrap();
    for e in std::fs::read_dir(early_src.join("fields")).unwrap() {
        let p = e.unwrap().path();
        let name = p.file_name().unwrap().to_owned();
        if name.to_string_lossy() == "step_000.grib2" {
            continue;
        }
        let b = from_earlier_cycle(&std::fs::read(&p).unwrap(), 6);
        std::fs::write(early.join(&name), b).unwrap();
        std::fs::copy(later.join("fields").join(&name), later_fields.join(&name)).unwrap();
    }
    // The later cycle first on the command line; the towns of the demo.
    let out = d.path().join("out");
    let o = bin()
        .arg("run")
        .arg(&later_fields)
        .arg("--member")
        .arg(format!("early={}", early.display()))
        .arg("--towns")
        .arg(later.join("towns.csv"))
        .args([
            "--track",
            "find",
            "--cross=-20:20:20",
            "--along",
            "0",
            "--quiet",
            "--out",
        ])
        .arg(&out)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let mut r = csv::Reader::from_path(out.join("towns_bust.csv")).unwrap();
    let h = r.headers().unwrap().clone();
    let col = |n: &str| {
        h.iter()
            .position(|c| c == n)
            .unwrap_or_else(|| panic!("{n}"))
    };
    let (trend, b_later, b_early, words) = (
        col("cycle_trend_cm"),
        col("baseline_cm_step_001"),
        col("baseline_cm_early"),
        col("summary"),
    );
    let mut checked = 0;
    for rec in r.records() {
        let rec = rec.unwrap();
        let num = |k: usize| rec.get(k).unwrap().parse::<f64>().ok();
        if let (Some(t), Some(l), Some(e)) = (num(trend), num(b_later), num(b_early)) {
            // Later minus earlier, each rounded to 0.1 cm.
            assert!((t - (l - e)).abs() <= 0.1 + 1e-9, "{t} against {l} − {e}");
            let w = rec.get(words).unwrap();
            assert!(w.contains("over the last 2 cycles (13T06Z "), "{w}");
            if t.abs() >= 0.1 {
                checked += 1;
            }
        }
    }
    assert!(checked >= 3, "{checked} towns with a change");
    // The manifest gives each member's cycle (GRIB2 section 1 reference time): 6 h apart.
    let m: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("manifest.json")).unwrap()).unwrap();
    let cycle = |k: usize| {
        chrono::DateTime::parse_from_rfc3339(
            m["ensemble"]["members"][k]["reference_utc"]
                .as_str()
                .unwrap(),
        )
        .unwrap()
    };
    assert_eq!(cycle(0) - cycle(1), chrono::Duration::hours(6));
}
