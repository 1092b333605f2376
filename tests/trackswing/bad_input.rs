//! Bad input through the real binary: exit code 3, one message naming the file and what is
//! wrong, and no output written.

use super::support::{bin, rewrite, rewrite_bands, write_case, Synthetic};
use std::path::Path;

/// The run fails with README's exit code: 2 when the message is about a command-line option
/// (the first expected text is the option, `--cross`), 3 for any other bad input.
fn fails_cleanly(case: &Path, args: &[&str], expect: &[&str]) {
    let out_dir = case.parent().unwrap().join("out");
    let o = bin().arg("run").arg(case).args(args).output().unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    let code = if expect.first().is_some_and(|e| e.starts_with("--")) {
        2
    } else {
        3
    };
    assert_eq!(o.status.code(), Some(code), "stderr: {err}");
    for e in expect {
        assert!(err.contains(e), "expected '{e}' in: {err}");
    }
    assert!(
        !out_dir.exists() || std::fs::read_dir(&out_dir).unwrap().next().is_none(),
        "outputs were written"
    );
}

fn case(extra: &str) -> (tempfile::TempDir, std::path::PathBuf) {
    let d = tempfile::tempdir().unwrap();
    let c = write_case(
        d.path(),
        &Synthetic {
            steps: 2,
            ..Default::default()
        },
        extra,
    );
    (d, c)
}

#[test]
fn missing_file() {
    let (d, c) = case("");
    std::fs::remove_file(d.path().join("track.csv")).unwrap();
    fails_cleanly(&c, &[], &["case.toml", "member[0].track", "does not exist"]);
}

#[test]
fn field_missing_for_a_step() {
    let (d, c) = case("");
    rewrite(&d.path().join("f/s_01.tif"), |desc, b| {
        (desc != "relative_humidity@2m").then(|| b.to_vec())
    });
    fails_cleanly(&c, &[], &["s_01.tif", "relative_humidity@2m"]);
}

#[test]
fn step_without_valid_time() {
    let (d, c) = case("");
    std::fs::copy(d.path().join("terrain.tif"), d.path().join("f/s_01.tif")).unwrap();
    fails_cleanly(&c, &[], &["s_01.tif", "valid_time"]);
}

#[test]
fn mismatched_grids() {
    let (d, c) = case("");
    let other = tempfile::tempdir().unwrap();
    write_case(
        other.path(),
        &Synthetic {
            nx: 41,
            steps: 2,
            ..Default::default()
        },
        "",
    );
    std::fs::copy(other.path().join("f/s_01.tif"), d.path().join("f/s_01.tif")).unwrap();
    fails_cleanly(&c, &[], &["s_01.tif", "differs from", "terrain.tif"]);
}

#[test]
fn track_with_one_point() {
    let (d, c) = case("");
    std::fs::write(
        d.path().join("track.csv"),
        "time,lat,lon\n2026-01-14T00:00:00Z,0,11\n",
    )
    .unwrap();
    fails_cleanly(
        &c,
        &["--cross", "-10:10:10"],
        &["track.csv", "at least two"],
    );
}

#[test]
fn track_outside_the_grid() {
    let (d, c) = case("");
    std::fs::write(
        d.path().join("track.csv"),
        "time,lat,lon\n2026-01-14T00:00:00Z,40,-80\n2026-01-15T00:00:00Z,41,-78\n",
    )
    .unwrap();
    fails_cleanly(
        &c,
        &["--cross", "-10:10:10"],
        &["track.csv", "no track position lies inside the grid"],
    );
}

#[test]
fn empty_or_reversed_offsets() {
    let (_d, c) = case("");
    fails_cleanly(
        &c,
        &["--cross", "20:-20:10"],
        &["--cross", "end is before the start"],
    );
    fails_cleanly(&c, &["--along", ","], &["--along", "empty"]);
    fails_cleanly(
        &c,
        &["--cross", "-20:20:0"],
        &["--cross", "step must be positive"],
    );
}

/// An offset at or beyond the taper's outer radius moves nothing near the modelled storm (the
/// shift is centred on the displaced low), so the scenario would repeat the model as issued.
#[test]
fn offsets_beyond_the_outer_radius() {
    let (_d, c) = case("");
    fails_cleanly(
        &c,
        &["--cross", "0,7000"],
        &["--cross", "7000 km", "outer radius (6000 km"],
    );
}

#[test]
fn towns_with_a_bad_row() {
    let (d, c) = case("");
    std::fs::write(
        d.path().join("towns.csv"),
        "name,lat,lon\nA,0.5,11\nB,0.5,east\n",
    )
    .unwrap();
    fails_cleanly(&c, &[], &["towns.csv", "line 3", "'lon' of B"]);
}

#[test]
fn unknown_case_key() {
    let (_d, c) = case("colour = \"red\"");
    fails_cleanly(&c, &[], &["case.toml", "unknown field", "colour"]);
}

#[test]
fn temperatures_in_celsius() {
    let (d, c) = case("");
    rewrite(&d.path().join("f/s_00.tif"), |desc, b| {
        Some(if desc == "air_temperature@850hPa" {
            b.iter().map(|v| v - 273.15).collect()
        } else {
            b.to_vec()
        })
    });
    fails_cleanly(&c, &[], &["s_00.tif", "air_temperature@850hPa", "kelvin"]);
}

#[test]
fn humidity_over_100_percent() {
    let (d, c) = case("");
    rewrite(&d.path().join("f/s_00.tif"), |desc, b| {
        Some(if desc == "relative_humidity@700hPa" {
            b.iter().map(|v| v * 1.5).collect()
        } else {
            b.to_vec()
        })
    });
    fails_cleanly(
        &c,
        &[],
        &["s_00.tif", "relative_humidity@700hPa", "percent"],
    );
}

#[test]
fn negative_humidity() {
    let (d, c) = case("");
    rewrite(&d.path().join("f/s_01.tif"), |desc, b| {
        Some(if desc == "relative_humidity@2m" {
            b.iter().map(|v| v - 120.0).collect()
        } else {
            b.to_vec()
        })
    });
    fails_cleanly(&c, &[], &["s_01.tif", "relative_humidity@2m", "percent"]);
}

#[test]
fn truncated_geotiff() {
    let (d, c) = case("");
    let p = d.path().join("f/s_01.tif");
    let bytes = std::fs::read(&p).unwrap();
    std::fs::write(&p, &bytes[..bytes.len() / 2]).unwrap();
    fails_cleanly(&c, &[], &["s_01.tif"]);
}

#[test]
fn a_file_of_the_wrong_kind() {
    let (d, c) = case("");
    std::fs::write(d.path().join("f/s_00.tif"), "time,lat,lon\n").unwrap();
    fails_cleanly(&c, &[], &["s_00.tif", "TIFF"]);
}

#[test]
fn a_duplicated_level() {
    let (d, c) = case("");
    // Append a second band claiming to be the 850 hPa temperature.
    rewrite_bands(&d.path().join("f/s_00.tif"), |mut bands| {
        let i = bands
            .iter()
            .position(|(x, _)| x == "air_temperature@850hPa")
            .unwrap();
        bands.push(bands[i].clone());
        bands
    });
    fails_cleanly(
        &c,
        &[],
        &["s_00.tif", "air_temperature@850hPa", "appear once"],
    );
}

#[test]
fn a_level_missing_at_one_step() {
    let (d, c) = case("");
    rewrite(&d.path().join("f/s_01.tif"), |desc, b| {
        (!desc.ends_with("@700hPa")).then(|| b.to_vec())
    });
    fails_cleanly(&c, &[], &["s_01.tif", "levels", "differ"]);
}

#[test]
fn negative_precipitation() {
    let (d, c) = case("");
    rewrite(&d.path().join("f/s_00.tif"), |desc, b| {
        Some(if desc == "precipitation_amount" {
            b.iter().map(|v| v - 1.0).collect()
        } else {
            b.to_vec()
        })
    });
    fails_cleanly(
        &c,
        &[],
        &["s_00.tif", "precipitation_amount", "not negative"],
    );
}

#[test]
fn non_monotonic_heights() {
    let (d, c) = case("");
    rewrite(&d.path().join("f/s_00.tif"), |desc, b| {
        Some(if desc == "geopotential_height@925hPa" {
            b.iter().map(|v| v - 1000.0).collect()
        } else {
            b.to_vec()
        })
    });
    fails_cleanly(
        &c,
        &[],
        &["s_00.tif", "geopotential_height@925hPa", "increase upward"],
    );
}

#[test]
fn duplicated_or_unordered_track_times() {
    // A repeated time, then a time that goes back: both refused at the line that breaks order.
    for second in ["2026-01-14T00:00:00Z", "2026-01-13T18:00:00Z"] {
        let (d, c) = case("");
        std::fs::write(
            d.path().join("track.csv"),
            format!("time,lat,lon\n2026-01-14T00:00:00Z,0,11\n{second},0,11.5\n2026-01-15T00:00:00Z,0,12\n"),
        )
        .unwrap();
        fails_cleanly(
            &c,
            &["--cross", "-10:10:10"],
            &["track.csv", "line 3", "must increase"],
        );
    }
}

/// An output folder that cannot be created (the kernel's /proc takes no new folders, even from
/// root): exit code 4 for an output problem, the folder named, nothing written.
#[test]
fn unwritable_output_folder() {
    let (_d, c) = case("");
    let out = "/proc/trackswing-cannot-write-here";
    let o = bin()
        .arg("run")
        .arg(&c)
        .args(["--out", out])
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(4), "{err}");
    assert!(err.contains(out), "{err}");
    assert!(!Path::new(out).exists());
}

#[test]
fn duplicate_town_names() {
    let (d, c) = case("");
    std::fs::write(
        d.path().join("towns.csv"),
        "name,lat,lon\nA,0.5,11\nA,0.6,11.2\n",
    )
    .unwrap();
    fails_cleanly(&c, &[], &["towns.csv", "line 3", "twice"]);
}

#[test]
fn case_value_of_the_wrong_type() {
    let (_d, c) = case("[methods]\nfixed_ratio = \"ten\"");
    fails_cleanly(&c, &[], &["case.toml", "fixed_ratio"]);
}

#[test]
fn output_path_is_a_file() {
    let (d, c) = case("");
    let f = d.path().join("out");
    std::fs::write(&f, b"not a folder").unwrap();
    let o = bin().arg("run").arg(&c).output().unwrap();
    assert_eq!(o.status.code(), Some(4));
    assert!(String::from_utf8_lossy(&o.stderr).contains("not a folder"));
    assert_eq!(std::fs::read(&f).unwrap(), b"not a folder");
}

#[test]
fn missing_cells_stay_nodata_never_zero_snow() {
    let (d, c) = case("");
    // Knock out the 850 hPa temperature in a 4×4 block inside the precipitation.
    let hole = |i: usize| (14..18).contains(&(i / 40)) && (8..12).contains(&(i % 40));
    rewrite(&d.path().join("f/s_00.tif"), |desc, b| {
        Some(if desc == "air_temperature@850hPa" {
            b.iter()
                .enumerate()
                .map(|(i, v)| if hole(i) { f32::NAN } else { *v })
                .collect()
        } else {
            b.to_vec()
        })
    });
    let o = bin()
        .arg("run")
        .arg(&c)
        .args(["--cross", "0"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let r = trackswing::geotiff::read_geotiff(&d.path().join("out/snowfall_baseline.tif")).unwrap();
    let snow = &r.bands[0];
    assert!(
        (0..snow.len())
            .filter(|i| hole(*i))
            .all(|i| snow[i].is_nan()),
        "the hole must be nodata"
    );
    assert!(
        (0..snow.len())
            .filter(|i| !hole(*i))
            .all(|i| snow[i].is_finite()),
        "and only the hole"
    );
}

#[test]
fn offsets_that_push_the_storm_off_the_grid_warn_with_the_share() {
    let (_d, c) = case("");
    let o = bin()
        .arg("run")
        .arg(&c)
        .args(["--cross=-300,0,300"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let text = String::from_utf8_lossy(&o.stdout);
    assert!(
        text.contains("beyond the grid edge") && text.contains("% of the map's cells"),
        "{text}"
    );
}

#[test]
fn heights_error_names_the_step() {
    let (d, c) = case("");
    rewrite(&d.path().join("f/s_01.tif"), |desc, b| {
        Some(if desc == "geopotential_height@700hPa" {
            b.iter().map(|_| 1000.0).collect()
        } else {
            b.to_vec()
        })
    });
    fails_cleanly(
        &c,
        &[],
        &[
            "step 2",
            "s_01.tif",
            "geopotential_height@700hPa",
            "850hPa",
            "increase upward",
        ],
    );
}

#[test]
fn a_level_without_its_humidity() {
    let (d, c) = case("");
    rewrite(&d.path().join("f/s_00.tif"), |desc, b| {
        (desc != "relative_humidity@925hPa").then(|| b.to_vec())
    });
    fails_cleanly(&c, &[], &["step 1", "s_00.tif", "relative_humidity@925hPa"]);
}

#[test]
fn bad_method_and_axis_values() {
    let (_d, c) = case("[methods]\nsnow_ratio = \"heavy\"");
    fails_cleanly(&c, &[], &["methods.snow_ratio", "heavy", "growth-zone"]);
    let (_d, c) = case("[methods]\ndry_air = \"yes\"");
    fails_cleanly(&c, &[], &["case.toml", "dry_air"]);
    let (_d, c) = case("");
    fails_cleanly(&c, &["--warm-bias", "20"], &["--warm-bias", "kelvin"]);
    fails_cleanly(&c, &["--intensity", "-1:1:0.5"], &["--intensity", "factor"]);
}
