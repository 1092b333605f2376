//! A second run into the same folder, as a GIS analyst does after styling the layers, and the
//! warnings a run leaves in its outputs. Regressions for [trust] items 2 (a re-run deleted the
//! user's own files) and 4 (warnings reached only the terminal).

use super::support::bin;
use std::path::Path;

fn demo(out: &Path, extra: &[&str]) -> String {
    let o = bin()
        .arg("demo")
        .arg("--out")
        .arg(out)
        .args(extra)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    String::from_utf8(o.stdout).unwrap()
}

fn manifest_warnings(out: &Path) -> Vec<String> {
    let m: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("manifest.json")).unwrap()).unwrap();
    m["warnings"]
        .as_array()
        .expect("manifest.json has a warnings list")
        .iter()
        .map(|w| w.as_str().unwrap().to_string())
        .collect()
}

/// The `warning:` lines the terminal printed.
fn printed_warnings(text: &str) -> Vec<String> {
    text.lines()
        .filter_map(|l| l.strip_prefix("warning: "))
        .map(String::from)
        .collect()
}

/// HTML's escaping of text (HTML Living Standard §13.1: `&`, `<`, `>`, `"`, `'`).
fn html(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
        .replace('\'', "&#39;")
}

#[test]
fn a_rerun_keeps_the_users_files_and_says_so() {
    let d = tempfile::tempdir().unwrap();
    let out = d.path().join("layers");
    demo(&out, &["--cross=0,20", "--along=0"]);
    let user: [(&str, &[u8]); 5] = [
        (
            "snowfall_range.qml",
            b"<qgis styleCategories=\"Symbology\"/>",
        ),
        ("storm.qgz", b"PK\x03\x04 a GIS project"),
        (
            "snowfall_baseline.tif.aux.xml",
            b"<PAMDataset></PAMDataset>",
        ),
        ("briefing/notes.txt", b"call at 12Z"),
        ("flip_zone.sld", b"<StyledLayerDescriptor/>"),
    ];
    std::fs::create_dir(out.join("briefing")).unwrap();
    for (name, bytes) in user {
        std::fs::write(out.join(name), bytes).unwrap();
    }
    // The second run writes fewer scenarios: the first run's layers are replaced, not mixed.
    let text = demo(&out, &["--cross=0", "--along=0"]);
    for (name, bytes) in user {
        assert_eq!(
            std::fs::read(out.join(name)).unwrap(),
            bytes,
            "{name} changed or vanished"
        );
    }
    let warnings = manifest_warnings(&out);
    let kept = warnings
        .iter()
        .find(|w| w.starts_with("kept 5 entries"))
        .unwrap_or_else(|| panic!("{warnings:?}"));
    assert!(
        kept.contains("storm.qgz") && kept.contains("aux.xml"),
        "{kept}"
    );
    // Item 4: the terminal, the manifest and the report say the same.
    assert_eq!(printed_warnings(&text), warnings);
    let report = std::fs::read_to_string(out.join("report.html")).unwrap();
    let section = report
        .split("<section class=\"warnings\"")
        .nth(1)
        .expect("report.html has a warnings section");
    assert!(section.contains(&html(kept)), "{section}");
    assert!(
        report.find("class=\"warnings\"") < report.find("Key numbers"),
        "the warnings come before the numbers"
    );
}

#[test]
fn run_warnings_reach_the_manifest_and_the_report() {
    let d = tempfile::tempdir().unwrap();
    let out = d.path().join("out");
    // The demo's ±100 km offsets sample beyond the grid edge; timing +48 h leaves 24 of 25
    // steps before the model's first.
    let text = demo(&out, &["--cross=-100,0", "--along=0", "--timing=0,48"]);
    let printed = printed_warnings(&text);
    let warnings = manifest_warnings(&out);
    assert_eq!(printed, warnings);
    assert!(
        warnings.iter().any(|w| w.contains("beyond the grid edge")),
        "{warnings:?}"
    );
    assert!(
        warnings.iter().any(|w| w.starts_with("timing +48 h")),
        "{warnings:?}"
    );
    // `trackswing report` rebuilds the page from the manifest, warnings included.
    std::fs::remove_file(out.join("report.html")).unwrap();
    let o = bin().arg("report").arg(&out).output().unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let report = std::fs::read_to_string(out.join("report.html")).unwrap();
    for w in &warnings {
        assert!(report.contains(&format!("<li>{}</li>", html(w))), "{w}");
    }
}
