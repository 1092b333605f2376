//! Bad input through the real binary: exit code 3, one message naming the file and what is
//! wrong, and no output written.

use super::support::{bin, write_case, Synthetic};
use std::path::Path;

fn fails_cleanly(case: &Path, args: &[&str], expect: &[&str]) {
    let out_dir = case.parent().unwrap().join("out");
    let o = bin().arg("run").arg(case).args(args).output().unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(3), "stderr: {err}");
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

/// Rewrites a GeoTIFF band by band: `f` returns the new values, or `None` to drop the band.
fn rewrite(p: &Path, f: impl Fn(&str, &[f32]) -> Option<Vec<f32>>) {
    use trackswing::geotiff::{
        read_geotiff, write_geotiff, BandSpec, SampleEncoding, WriteOptions,
    };
    let r = read_geotiff(p).unwrap();
    let kept: Vec<(String, Vec<f32>)> = r
        .bands
        .iter()
        .zip(&r.descriptions)
        .filter_map(|(b, desc)| f(desc, b).map(|v| (desc.clone(), v)))
        .collect();
    let specs: Vec<BandSpec> = kept
        .iter()
        .map(|(desc, b)| BandSpec {
            data: b,
            description: desc.clone(),
            metadata: vec![],
        })
        .collect();
    let opts = WriteOptions {
        encoding: SampleEncoding::Float32,
        nodata: -9999.0,
        dataset_metadata: r.dataset_metadata.clone(),
        band_scaling: vec![],
    };
    write_geotiff(p, r.width, r.height, &r.georef, &specs, &opts).unwrap();
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
fn town_outside_the_grid() {
    let (d, c) = case("");
    std::fs::write(d.path().join("towns.csv"), "name,lat,lon\nFar Away,30,11\n").unwrap();
    fails_cleanly(&c, &[], &["towns.csv", "Far Away", "outside the grid"]);
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
