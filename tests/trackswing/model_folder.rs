//! A folder of model files that holds other files too. Regression for [trust] item 7: the
//! README's `trackswing inspect model/` failed on the folder `make-demo --grib2` writes, because
//! it holds the case file, the track and the towns beside the model files' folder.

use super::support::bin;
use std::path::Path;

fn grib2_case(dir: &Path) {
    let o = bin()
        .args([
            "make-demo",
            "--grib2",
            "--nx",
            "24",
            "--ny",
            "18",
            "--steps",
            "3",
            "--out",
        ])
        .arg(dir)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
}

#[test]
fn a_case_folder_is_read_as_its_model_files_and_the_rest_is_named_once() {
    let d = tempfile::tempdir().unwrap();
    let case = d.path().join("case");
    grib2_case(&case);
    // Notes beside the model files, and a sidecar GDAL writes.
    std::fs::write(case.join("fields/README.txt"), "run of 12 UTC\n").unwrap();
    std::fs::write(case.join("fields/step_000.grib2.aux.xml"), "<PAMDataset/>").unwrap();

    let o = bin().arg("inspect").arg(&case).output().unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(o.status.success(), "{err}");
    assert!(String::from_utf8_lossy(&o.stdout).starts_with("3 GRIB2 file(s)"));
    assert_eq!(
        err.lines()
            .filter(|l| l.starts_with("note: skipped"))
            .count(),
        1,
        "{err}"
    );
    assert!(
        err.contains("skipped 5 files in the model folders that are not model output (not GRIB, NetCDF or TIFF by name or content): case.toml, towns.csv, track.csv, README.txt, step_000.grib2.aux.xml"),
        "{err}"
    );

    let out = d.path().join("out");
    let o = bin()
        .arg("run")
        .arg(case.join("fields"))
        .args(["--cross", "0", "--along", "0", "--quiet", "--out"])
        .arg(&out)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let m: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("manifest.json")).unwrap()).unwrap();
    let warnings = m["warnings"].as_array().unwrap();
    assert!(
        warnings.iter().any(|w| w.as_str().unwrap()
            == "skipped 2 files in the model folder that are not model output (not GRIB, NetCDF or TIFF by name or content): README.txt, step_000.grib2.aux.xml"),
        "{warnings:?}"
    );
    // The model files themselves are the run's inputs, nothing else.
    let inputs = m["inputs"].as_array().unwrap();
    assert!(inputs
        .iter()
        .all(|i| !i.to_string().contains("README") && !i.to_string().contains("aux.xml")));
}

#[test]
fn a_folder_without_model_output_names_what_it_holds() {
    let d = tempfile::tempdir().unwrap();
    std::fs::write(d.path().join("notes.txt"), "nothing here").unwrap();
    std::fs::create_dir(d.path().join("a")).unwrap();
    std::fs::create_dir(d.path().join("b")).unwrap();
    let o = bin().arg("inspect").arg(d.path()).output().unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(3), "{err}");
    assert!(
        err.contains("holds no model output (GRIB, NetCDF or TIFF files); its other files: notes.txt; its folders: a/, b/"),
        "{err}"
    );
}
