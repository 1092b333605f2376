//! The track-aligned comparison of members ([models] item 5): each member's run as issued with
//! its low moved onto the members' weighted mean track, and the share of the members' spread
//! that the alignment explains.

use super::support::bin;
use std::path::Path;
use trackswing::geotiff::{
    read_geotiff, write_cog, BandSpec, BigTiff, CogOptions, SampleEncoding, WriteOptions,
};

/// Writes `r`'s bands (values as read) to `path` as Float32, with its descriptions and metadata;
/// `each` changes each band's values (given its description) first.
fn rewrite(path: &Path, r: &trackswing::geotiff::Raster, each: impl Fn(&str, &[f32]) -> Vec<f32>) {
    let data: Vec<Vec<f32>> = r
        .bands
        .iter()
        .zip(&r.descriptions)
        .map(|(b, d)| each(d, b))
        .collect();
    let bands: Vec<BandSpec> = data
        .iter()
        .zip(&r.descriptions)
        .zip(&r.band_metadata)
        .map(|((d, desc), md)| BandSpec {
            data: d,
            description: desc.clone(),
            metadata: md.clone(),
        })
        .collect();
    let opts = WriteOptions {
        encoding: SampleEncoding::Float32,
        nodata: -9999.0,
        dataset_metadata: r.dataset_metadata.clone(),
        band_scaling: Vec::new(),
    };
    let layout = CogOptions {
        tile_size: 256,
        overviews: false,
        bigtiff: BigTiff::Auto,
    };
    write_cog(path, r.width, r.height, &r.georef, &bands, &opts, &layout).unwrap();
}

/// `v` (rows of `nx`) with every row taken from `k` rows further south: the field moved `k`
/// rows north; the southernmost `k` rows repeat the last row.
fn moved_north(v: &[f32], nx: usize, k: usize) -> Vec<f32> {
    let ny = v.len() / nx;
    (0..ny)
        .flat_map(|r| {
            let from = (r + k).min(ny - 1);
            v[from * nx..(from + 1) * nx].to_vec()
        })
        .collect()
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
fn a_member_moved_k_cells_reproduces_the_other_once_aligned() {
    // Member "moved" is member "issued" with every storm field and its track moved K rows
    // (K × 0.1° of latitude) north. On flat terrain, with a taper core wider than the grid so
    // the whole storm moves, aligning both on their mean track samples the same source points
    // of "issued" in both: what is left is interpolation (the km → cell conversion of the two
    // displacements at each cell, WGS 84 geodesic against the cell's meridian metric, differs
    // by well under 0.01 cell) and f32 rounding in the source index.
    const K: usize = 4;
    let d = tempfile::tempdir().unwrap();
    let demo = d.path().join("demo");
    let o = bin()
        .args([
            "make-demo",
            "--nx",
            "48",
            "--ny",
            "39",
            "--steps",
            "7",
            "--out",
        ])
        .arg(&demo)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    // Flat terrain: a ground-attached field that the storm does not carry would make the
    // moved member differ for reasons other than its track.
    let terrain = read_geotiff(&demo.join("terrain.tif")).unwrap();
    let flat = d.path().join("flat.tif");
    rewrite(&flat, &terrain, |d, b| {
        if d == "surface_altitude" {
            vec![0.0; b.len()]
        } else {
            b.to_vec()
        }
    });
    let nx = terrain.width;
    let ny = terrain.height;
    let dlat = -terrain.georef.geotransform[5];
    let moved = d.path().join("moved");
    std::fs::create_dir_all(&moved).unwrap();
    let mut names: Vec<_> = std::fs::read_dir(demo.join("fields"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .collect();
    names.sort();
    for p in &names {
        let r = read_geotiff(p).unwrap();
        rewrite(&moved.join(p.file_name().unwrap()), &r, |_, b| {
            moved_north(b, nx, K)
        });
    }
    let track = std::fs::read_to_string(demo.join("track.csv")).unwrap();
    let mut lines = track.lines();
    let mut moved_track = format!("{}\n", lines.next().unwrap());
    for l in lines {
        let f: Vec<&str> = l.split(',').collect();
        let lat: f64 = f[1].parse().unwrap();
        moved_track.push_str(&format!(
            "{},{:.10},{},{}\n",
            f[0],
            lat + K as f64 * dlat,
            f[2],
            f[3]
        ));
    }
    std::fs::write(moved.join("track.csv"), moved_track).unwrap();
    let member = |name: &str, steps: &Path, track: &Path| {
        format!(
            "[[member]]\nname = \"{name}\"\nterrain = \"{}\"\nsteps = \"{}\"\ntrack = \"{}\"\n",
            flat.display(),
            steps.display(),
            track.display()
        )
    };
    let case = d.path().join("case.toml");
    std::fs::write(
        &case,
        format!(
            "title = \"one model run and the same moved {K} rows north (invented demo storm)\"\n{}{}[offsets]\ncross_km = \"-20:20:20\"\nalong_km = \"0\"\n[shift]\ncore_radius_km = 20000\nouter_radius_km = 20001\n",
            member("issued", &demo.join("fields/step_*.tif"), &demo.join("track.csv")),
            member("moved", &moved.join("step_*.tif"), &moved.join("track.csv")),
        ),
    )
    .unwrap();
    let out = d.path().join("out");
    run(&case, &out);
    let base = read_geotiff(&out.join("snowfall_member_baseline.tif")).unwrap();
    let aligned = read_geotiff(&out.join("snowfall_member_aligned.tif")).unwrap();
    assert_eq!(aligned.descriptions, ["issued", "moved"]);
    let explains = read_geotiff(&out.join("track_explains_members.tif")).unwrap();
    // Interior: rows whose source points, K/2 rows either side, lie inside both members'
    // own (not repeated) rows, and not the edge columns (a displacement due north has an east
    // part of rounding size, which can put an edge cell's source point just off the grid).
    let interior = (K + 1..ny - K - 1).flat_map(|r| (1..nx - 1).map(move |c| r * nx + c));
    let (mut compared, mut apart, mut worst) = (0, 0, 0.0f32);
    let mut shares = Vec::new();
    for i in interior {
        let (a, b) = (aligned.bands[0][i], aligned.bands[1][i]);
        assert!(!a.is_nan() && !b.is_nan(), "cell {i} is missing");
        compared += 1;
        worst = worst.max((a - b).abs());
        // Stated tolerance: 0.05 cm of snow, or 0.5 % of the total.
        assert!(
            (a - b).abs() <= 0.05 + 0.005 * a.abs().max(b.abs()),
            "cell {i}: aligned {a} cm against {b} cm"
        );
        let (x, y) = (base.bands[0][i], base.bands[1][i]);
        if (x - y).abs() > 1.0 {
            apart += 1;
            shares.push(explains.bands[0][i]);
        }
    }
    // The members as issued differ widely, so agreeing once aligned is not an accident.
    assert!(
        apart > 100,
        "{apart} of {compared} cells differ by over 1 cm as issued"
    );
    // There, the track explains all of their difference.
    let min = shares.iter().cloned().fold(f32::INFINITY, f32::min);
    assert!(
        min >= 0.99,
        "track_explains_members down to {min} (worst difference {worst} cm)"
    );
    // The manifest gives each member's displacement: half of K rows, in opposite directions.
    let m: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("manifest.json")).unwrap()).unwrap();
    let disp = &m["ensemble"]["alignment"]["displacement_km"];
    let half_km = K as f64 * dlat / 2.0 * 111.1;
    for (k, sign) in [(0, 1.0), (1, -1.0)] {
        let north = disp[k]["east_north_km"][0][1].as_f64().unwrap();
        assert!(
            (north - sign * half_km).abs() < 0.01 * half_km,
            "{north} km against {half_km}"
        );
    }
}
