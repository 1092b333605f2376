//! The HTML report: escaping, self-containment, rebuilding from a finished run, and rendering
//! in headless Chromium (Debian's package, installed by .ci/run).

use super::support::{bin, chromium_available, col_lon, decode_png, row_lat, write_front_case};
use std::path::Path;
use std::process::Command;

const NASTY: &str = "<script>alert(1)</script>";

/// Runs a small front case with `--report`; returns the output folder.
fn report_run(dir: &Path) -> std::path::PathBuf {
    let towns = [
        (NASTY, row_lat(12), col_lon(15)),
        ("Ash & Oak", row_lat(16), col_lon(20)),
        ("=SUM(A1)", row_lat(20), col_lon(25)),
    ];
    let case = write_front_case(dir, &towns, "");
    let text = std::fs::read_to_string(&case)
        .unwrap()
        .replace("synthetic test storm", "Test <b>bold</b> storm");
    std::fs::write(&case, text).unwrap();
    let o = bin()
        .arg("run")
        .arg(&case)
        .args(["--cross", "-40:40:20", "--along", "0", "--report", "-q"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    dir.join("out")
}

#[test]
fn every_string_is_escaped_and_nothing_is_fetched() {
    let d = tempfile::tempdir().unwrap();
    let out = report_run(d.path());
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    assert!(
        !html.contains(NASTY),
        "a town name reached the page as markup"
    );
    assert!(html.contains("&lt;script&gt;alert(1)&lt;/script&gt;"));
    assert!(html.contains("Ash &amp; Oak"));
    assert!(html.contains("Test &lt;b&gt;bold&lt;/b&gt; storm") && !html.contains("<b>bold"));
    // The spreadsheet guard of the CSV is undone for display.
    assert!(
        html.contains("<td>=SUM(A1)</td>"),
        "the name shows as given"
    );
    // Self-contained: maps inline, no address to fetch, and a policy forbidding requests.
    assert_eq!(html.matches("src=\"data:image/png;base64,").count(), 4);
    assert!(!html.contains("http:") && !html.contains("https:"));
    assert!(html.contains("Content-Security-Policy") && html.contains("default-src 'none'"));
    assert!(html.contains("not an official forecast or warning"));
    assert!(html.contains("national weather service"));
    // Exactly one script element: the table sorter.
    assert_eq!(html.matches("<script").count(), 1);
}

#[test]
fn report_command_rebuilds_the_same_page_without_a_rerun() {
    let d = tempfile::tempdir().unwrap();
    let out = report_run(d.path());
    let first = std::fs::read(out.join("report.html")).unwrap();
    std::fs::remove_file(out.join("report.html")).unwrap();
    let o = bin().arg("report").arg(&out).output().unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert_eq!(std::fs::read(out.join("report.html")).unwrap(), first);
    // The manifest lists the report once, whether the run or the command wrote it; a run
    // without --report gets the entry from the command.
    let listed = |dir: &Path| {
        let m: serde_json::Value =
            serde_json::from_slice(&std::fs::read(dir.join("manifest.json")).unwrap()).unwrap();
        m["files"]
            .as_array()
            .unwrap()
            .iter()
            .filter(|f| f["file"] == "report.html")
            .count()
    };
    assert_eq!(listed(&out), 1);
    let m: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("manifest.json")).unwrap()).unwrap();
    let mut without = m.clone();
    without["files"]
        .as_array_mut()
        .unwrap()
        .retain(|f| f["file"] != "report.html");
    std::fs::write(
        out.join("manifest.json"),
        serde_json::to_string_pretty(&without).unwrap(),
    )
    .unwrap();
    assert_eq!(listed(&out), 0);
    let o = bin().arg("report").arg(&out).output().unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert_eq!(listed(&out), 1);

    let empty = tempfile::tempdir().unwrap();
    let o = bin().arg("report").arg(empty.path()).output().unwrap();
    assert_eq!(o.status.code(), Some(3));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("manifest.json"), "{err}");
    assert!(!empty.path().join("report.html").exists());
}

fn chromium(args: &[&str], page: &Path) -> std::process::Output {
    let profile = tempfile::tempdir().unwrap();
    Command::new("chromium")
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-quic",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
        ])
        .arg(format!("--user-data-dir={}", profile.path().display()))
        .args(args)
        .arg(format!("file://{}", page.display()))
        .output()
        .unwrap()
}

#[test]
fn report_renders_in_headless_chromium() {
    if !chromium_available() {
        return;
    }
    let d = tempfile::tempdir().unwrap();
    let out = report_run(d.path());
    let page = out.join("report.html");
    let shot = d.path().join("shot.png");
    let o = chromium(
        &[
            &format!("--screenshot={}", shot.display()),
            "--window-size=1200,2000",
        ],
        &page,
    );
    assert!(shot.is_file(), "{}", String::from_utf8_lossy(&o.stderr));
    let (w, h, px, ch) = decode_png(&shot);
    assert_eq!((w, h), (1200, 2000));
    // Not blank: count pixels that differ from the page background (#f6f7f9).
    let background = [0xf6, 0xf7, 0xf9];
    let ink = px
        .chunks(ch)
        .filter(|p| {
            p[..3]
                .iter()
                .zip(background)
                .any(|(a, b)| a.abs_diff(b) > 6)
        })
        .count();
    let share = ink as f64 / (w * h) as f64;
    assert!(
        share > 0.2,
        "only {:.1} % of the screenshot differs from the background",
        100.0 * share
    );

    let o = chromium(&["--dump-dom"], &page);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let dom = String::from_utf8_lossy(&o.stdout);
    let start = dom
        .find("<table id=\"towns\"")
        .expect("towns table in the DOM");
    let body = &dom[start..];
    let body = &body[body.find("<tbody>").unwrap()..body.find("</tbody>").unwrap()];
    assert_eq!(body.matches("<tr>").count(), 3, "one row per town");
    for name in [
        "&lt;script&gt;alert(1)&lt;/script&gt;",
        "Ash &amp; Oak",
        "=SUM(A1)",
    ] {
        assert!(
            body.contains(name),
            "{name} missing from the rendered table"
        );
    }
    // The script did not turn the town name into an element.
    assert!(!dom.contains(NASTY));
}
