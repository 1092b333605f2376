//! `report.html`: one self-contained page for a run, built from what the run wrote
//! (manifest.json, the GeoTIFFs, towns_bust.csv and the quicklook PNGs), so it needs no rerun.
//!
//! Self-contained: the maps are inline `data:` URIs, the style and the few lines of script that
//! sort the towns table are inline, and a Content-Security-Policy forbids every network request.
//! Every string from the run (titles, town names, settings) is HTML-escaped.

use super::html::{escape, table, text_of};
use super::write_text_atomic;
use crate::geotiff::read_geotiff;
use base64::Engine;
use serde_json::Value;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// The report's file name.
pub const REPORT: &str = "report.html";

/// The quicklook maps, in the order the report shows them, with what each shows.
pub const MAPS: [(&str, &str); 4] = [
    ("map_baseline.png", "Snowfall as modelled, with the rain–snow line of every track offset (bold: as modelled)."),
    ("map_p90.png", crate::render::legend::P90_CAPTION),
    ("map_range.png", "Largest minus smallest snowfall over all track offsets: where the total depends on the track."),
    ("map_flip_distance.png", "How far the low must shift before the main precipitation type changes or the snowfall halves or doubles."),
];

/// Why the report cannot be written.
#[derive(Debug, thiserror::Error)]
pub enum ReportError {
    /// A file of the run cannot be read.
    #[error(
        "{path}: cannot read ({what}); is this a trackswing output folder from a complete run?"
    )]
    Read {
        /// The file.
        path: PathBuf,
        /// The cause.
        what: String,
    },
    /// The manifest lacks something.
    #[error("{path}: '{field}' is missing or not what a trackswing manifest holds")]
    Manifest {
        /// manifest.json.
        path: PathBuf,
        /// The field.
        field: String,
    },
    /// The report cannot be written.
    #[error(transparent)]
    Write(#[from] super::WriteError),
}

/// Undoes [`super::towns::spreadsheet_safe`] for display: a leading apostrophe before
/// `= + - @`, tab or carriage return was added by the writer.
pub fn undo_spreadsheet_safe(s: &str) -> &str {
    match s.strip_prefix('\'') {
        Some(rest) if rest.starts_with(['=', '+', '-', '@', '\t', '\r']) => rest,
        _ => s,
    }
}

fn read(path: &Path) -> Result<Vec<u8>, ReportError> {
    std::fs::read(path).map_err(|e| ReportError::Read {
        path: path.to_path_buf(),
        what: e.to_string(),
    })
}

/// `s` with its first letter in upper case.
fn upper_first(s: &str) -> String {
    let mut c = s.chars();
    c.next()
        .map_or(String::new(), |f| f.to_uppercase().chain(c).collect())
}

/// Numbers worth a line in the report, read back from the GeoTIFFs.
fn key_numbers(dir: &Path, su: &str) -> Result<Vec<(String, String)>, ReportError> {
    let band = |file: &str, b: usize| -> Result<Vec<f32>, ReportError> {
        let p = dir.join(file);
        let r = read_geotiff(&p).map_err(|e| ReportError::Read {
            path: p.clone(),
            what: e.to_string(),
        })?;
        r.bands.into_iter().nth(b).ok_or(ReportError::Read {
            path: p,
            what: format!("it has no band {}", b + 1),
        })
    };
    let max = |v: &[f32]| {
        v.iter()
            .filter(|x| x.is_finite())
            .fold(f32::NAN, |a, b| if a.is_nan() { *b } else { a.max(*b) })
    };
    let mut out = Vec::new();
    // A several-member case (it writes the spread layers) blends its summaries.
    let blended = dir.join("snowfall_spread.tif").is_file();
    let p90_words = if blended {
        "Largest P90 snowfall over every member, method and track offset (1 in 10 outcomes, by blended weight, gives more)".to_string()
    } else {
        format!(
            "Largest P90 snowfall ({})",
            crate::render::legend::P90_MEANING
        )
    };
    let (baseline_words, swing_words) = if blended {
        (
            "Largest snowfall as the first member models it",
            "Largest swing of snowfall over every member, method and track offset",
        )
    } else {
        (
            "Largest snowfall as modelled",
            "Largest swing of snowfall over the track offsets",
        )
    };
    for (file, words) in [
        ("snowfall_baseline.tif", baseline_words),
        ("snowfall_p90.tif", p90_words.as_str()),
        ("snowfall_range.tif", swing_words),
    ] {
        // A layer the run could not compute is listed under "Not computed", not shown as 0.
        if !dir.join(file).is_file() {
            continue;
        }
        let m = max(&band(file, 0)?);
        out.push((
            words.to_string(),
            if m.is_finite() {
                format!("{m:.1} {su}")
            } else {
                "no data".into()
            },
        ));
    }
    if !dir.join("flip_distance.tif").is_file() {
        return Ok(out);
    }
    let flip = band("flip_distance.tif", 0)?;
    let kind = band("flip_distance.tif", 3)?;
    let known = kind.iter().filter(|k| k.is_finite()).count();
    if known > 0 {
        for km in [25.0f32, 50.0] {
            let n = flip.iter().filter(|d| d.is_finite() && **d <= km).count();
            out.push((
                format!(
                    "Share of the map where a track shift of {km:.0} km or less flips the forecast"
                ),
                format!("{:.0} %", 100.0 * n as f64 / known as f64),
            ));
        }
    }
    Ok(out)
}

const STYLE: &str = "
:root { --ink:#1c1e24; --muted:#5c606a; --line:#d8dbe0; --accent:#3d4f9a; --warn:#fff4e0; --warnline:#d08a1e; }
* { box-sizing: border-box; }
body { font-family: system-ui, -apple-system, 'Segoe UI', 'DejaVu Sans', sans-serif; color: var(--ink); margin: 0; background: #f6f7f9; line-height: 1.45; }
header { background: #20263a; color: #fff; padding: 22px 32px; }
header h1 { margin: 0; font-size: 26px; font-weight: 600; }
header p { margin: 4px 0 0; color: #c9cfe0; }
main { max-width: 1240px; margin: 0 auto; padding: 16px 32px 40px; }
section { background: #fff; border: 1px solid var(--line); border-radius: 6px; padding: 16px 22px; margin: 18px 0; }
h2 { font-size: 19px; margin: 0 0 10px; color: var(--accent); }
.caution { background: var(--warn); border-left: 6px solid var(--warnline); }
.warnings { border-left: 6px solid var(--warnline); }
.warnings li { margin: 4px 0; }
figure { margin: 12px 0 22px; }
figure img { width: 100%; height: auto; border: 1px solid var(--line); }
figcaption { color: var(--muted); font-size: 14px; }
table { border-collapse: collapse; width: 100%; font-size: 14px; }
th, td { border-bottom: 1px solid var(--line); padding: 5px 8px; text-align: left; vertical-align: top; }
th { background: #eef0f4; position: sticky; top: 0; }
table.sortable th { cursor: pointer; user-select: none; }
table.sortable th[data-dir=asc]::after { content: ' ▲'; }
table.sortable th[data-dir=desc]::after { content: ' ▼'; }
tbody tr:nth-child(even) { background: #fafbfc; }
dl { display: grid; grid-template-columns: max-content 1fr; gap: 4px 18px; margin: 0; }
dt { font-weight: 600; } dd { margin: 0; overflow-wrap: anywhere; }
.note { color: var(--muted); font-size: 14px; }
details { margin-top: 12px; } summary { cursor: pointer; color: var(--accent); }
";

const SCRIPT: &str = "
document.querySelectorAll('table.sortable').forEach(function (table) {
  table.querySelectorAll('th').forEach(function (th, col) {
    th.addEventListener('click', function () {
      var body = table.tBodies[0];
      var rows = Array.prototype.slice.call(body.rows);
      var asc = th.getAttribute('data-dir') !== 'asc';
      table.querySelectorAll('th').forEach(function (h) { h.removeAttribute('data-dir'); });
      th.setAttribute('data-dir', asc ? 'asc' : 'desc');
      var key = function (r) {
        var t = r.cells[col].textContent.trim();
        var n = parseFloat(t);
        return t === '' ? null : (isNaN(n) || !/^[-+]?[0-9.]/.test(t) ? t.toLowerCase() : n);
      };
      rows.sort(function (a, b) {
        var x = key(a), y = key(b);
        if (x === null || y === null) { return (x === null) - (y === null); }
        if (typeof x !== typeof y) { return typeof x === 'number' ? -1 : 1; }
        return (x < y ? -1 : x > y ? 1 : 0) * (asc ? 1 : -1);
      });
      rows.forEach(function (r) { body.appendChild(r); });
    });
  });
});
";

/// The manifest's entry for the report.
pub fn entry() -> super::Written {
    super::Written {
        file: REPORT.into(),
        kind: super::Kind::Report,
        units: String::new(),
        description: "Self-contained report: maps, bust-prone towns, scenarios, settings".into(),
        bands: Vec::new(),
        sha256: None,
    }
}

/// Writes report.html for a finished run's folder and makes sure its manifest lists it (a run
/// without `--report` did not), rewriting the manifest atomically with the entry added.
pub fn write_report_and_list(dir: &Path) -> Result<PathBuf, ReportError> {
    let path = write_report(dir)?;
    let mpath = dir.join("manifest.json");
    let mut m: Value = serde_json::from_slice(&read(&mpath)?).map_err(|e| ReportError::Read {
        path: mpath.clone(),
        what: e.to_string(),
    })?;
    let files = m
        .get_mut("files")
        .and_then(Value::as_array_mut)
        .ok_or(ReportError::Manifest {
            path: mpath.clone(),
            field: "files".into(),
        })?;
    if !files.iter().any(|f| f["file"] == REPORT) {
        let e = entry();
        files.push(serde_json::json!({
            "file": e.file,
            "kind": e.kind,
            "units": e.units,
            "description": e.description,
            "crs": {
                "epsg": 4326,
                "proj": crate::geotiff::Crs::Wgs84Geographic.proj_string(),
            },
        }));
        let text = serde_json::to_string_pretty(&m).expect("manifest serialises");
        super::write_text_atomic(dir, "manifest.json", &(text + "\n"))
            .map_err(ReportError::Write)?;
    }
    Ok(path)
}

/// Writes `report.html` into the run's folder `dir`; returns its path.
pub fn write_report(dir: &Path) -> Result<PathBuf, ReportError> {
    let mpath = dir.join("manifest.json");
    let m: Value = serde_json::from_slice(&read(&mpath)?).map_err(|e| ReportError::Read {
        path: mpath.clone(),
        what: e.to_string(),
    })?;
    let field = |k: &str| -> Result<&Value, ReportError> {
        m.get(k).ok_or(ReportError::Manifest {
            path: mpath.clone(),
            field: k.into(),
        })
    };
    let title = text_of(field("title")?);
    let units = text_of(field("units")?);
    let su = if units == "us" { "in" } else { "cm" };
    let caution = text_of(field("caution")?);

    let mut h = String::new();
    let _ = write!(
        h,
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\
<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; img-src data:; style-src 'unsafe-inline'; script-src 'unsafe-inline'\">\
<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\
<title>trackswing report: {}</title><style>{STYLE}</style></head><body>\n",
        escape(&title)
    );
    let _ = writeln!(
        h,
        "<header><h1>How much the snowfall depends on the storm track</h1><p>{} · written {} by trackswing {}</p></header><main>",
        escape(&title),
        escape(&text_of(field("written_utc")?)),
        escape(&text_of(field("trackswing_version")?))
    );
    let _ = writeln!(
        h,
        "<section class=\"caution\"><h2>Caution</h2><p><strong>{}</strong></p><p>This page shows how the model's snowfall changes if its storm track is wrong by the offsets listed below. It is decision support for trained forecasters, not an official forecast or warning. For decisions about roads, schools and safety, defer to the national weather service and local emergency management, and check local conditions.</p></section>",
        escape(&caution)
    );
    // What the run warned about, right under the caution: a forecaster reading the numbers
    // below must know first where they are incomplete.
    let warnings: Vec<String> = m
        .get("warnings")
        .and_then(Value::as_array)
        .map(|w| w.iter().map(text_of).collect())
        .unwrap_or_default();
    if !warnings.is_empty() {
        let _ = write!(
            h,
            "<section class=\"warnings\" id=\"warnings\"><h2>Warnings from this run ({})</h2><ul>",
            warnings.len()
        );
        for w in &warnings {
            let _ = write!(h, "<li>{}</li>", escape(w));
        }
        h.push_str("</ul></section>\n");
    }

    // What the run could not compute, by reason: a missing map must not read as "nothing
    // there".
    let not_computed: Vec<(String, String)> = m
        .get("not_computed")
        .and_then(Value::as_array)
        .map(|a| {
            a.iter()
                .map(|e| (text_of(&e["layer"]), text_of(&e["reason"])))
                .collect()
        })
        .unwrap_or_default();
    if !not_computed.is_empty() {
        h.push_str("<section class=\"warnings\" id=\"not-computed\"><h2>Not computed</h2><ul>");
        let mut reasons: Vec<&str> = Vec::new();
        for (_, r) in &not_computed {
            if !reasons.contains(&r.as_str()) {
                reasons.push(r);
            }
        }
        for reason in reasons {
            let layers: Vec<&str> = not_computed
                .iter()
                .filter(|(_, r)| r == reason)
                .map(|(l, _)| l.as_str())
                .collect();
            let _ = write!(
                h,
                "<li><strong>{}</strong>: {}</li>",
                escape(&upper_first(reason)),
                escape(&layers.join(", "))
            );
        }
        h.push_str("</ul></section>\n");
    }
    let not_computed_why = |file: &str| {
        not_computed
            .iter()
            .find(|(l, _)| l == file)
            .map(|(_, r)| r.clone())
    };

    let period = m
        .get("accumulation_period")
        .map(|p| text_of(&p["text"]))
        .unwrap_or_default();
    // A folder written before the period was recorded has none: no row, no caption clause.
    let mut keys: Vec<(String, String)> = Vec::new();
    if !period.is_empty() {
        keys.push(("Period the totals cover".to_string(), period.clone()));
    }
    keys.extend(key_numbers(dir, su)?);
    h.push_str("<section><h2>Key numbers</h2>");
    h.push_str(&table(
        &["What".into(), "Value".into()],
        &keys
            .into_iter()
            .map(|(a, b)| vec![a, b])
            .collect::<Vec<_>>(),
        "key-numbers",
        false,
    ));
    h.push_str("</section>\n");

    h.push_str("<section><h2>Bust-prone towns</h2>");
    if let Some(why) = not_computed_why("towns_bust.csv") {
        let _ = writeln!(h, "<p>Not computed: {}.</p></section>", escape(&why));
    } else {
        h.push_str("<p class=\"note\">Ranked by bust score: the P10–P90 spread as a share of the snowfall as modelled (floored at 5 cm). Click a column heading to sort.</p>\n");
        let cpath = dir.join("towns_bust.csv");
        let csv_bytes = read(&cpath)?;
        let mut rdr = csv::Reader::from_reader(csv_bytes.as_slice());
        let header: Vec<String> = rdr
            .headers()
            .map_err(|e| ReportError::Read {
                path: cpath.clone(),
                what: e.to_string(),
            })?
            .iter()
            .map(String::from)
            .collect();
        let col = |k: &str, label: &str| (k.to_string(), label.to_string());
        let mut shown = vec![
            col("rank", "Rank"),
            col("name", "Town"),
            col("bust_score", "Bust score"),
            col(&format!("baseline_{su}"), &format!("As modelled ({su})")),
            col(&format!("p10_{su}"), &format!("P10 ({su})")),
            col(&format!("p50_{su}"), &format!("P50 ({su})")),
            col(&format!("p90_{su}"), &format!("P90 ({su})")),
            col(&format!("range_{su}"), &format!("Range ({su})")),
            col("flip_km", "Flips within (km)"),
            col("flip_direction", "Flip direction"),
            col("flip_what", "What flips"),
        ];
        // A case of several members or methods: where each town's spread comes from.
        if header.iter().any(|h| h == "share_members") {
            shown.extend([
                col(
                    &format!("sd_total_{su}"),
                    &format!("σ, every member and method ({su})"),
                ),
                col("share_members", "Share from members"),
                col("share_methods", "Share from methods"),
                col("share_track", "Share from track"),
            ]);
        }
        if header.iter().any(|h| h == "track_explains_members") {
            shown.push(col(
                "track_explains_members",
                "Share of the members' difference that is where they put the low",
            ));
        }
        if header.iter().any(|h| h == &format!("cycle_trend_{su}")) {
            shown.push(col(
                &format!("cycle_trend_{su}"),
                &format!("Run to run, first to last cycle ({su})"),
            ));
        }
        shown.push(col("summary", "In words"));
        let idx: Vec<usize> = shown
            .iter()
            .map(|(k, _)| {
                header.iter().position(|h| h == k).ok_or(ReportError::Read {
                    path: cpath.clone(),
                    what: format!("no column '{k}'"),
                })
            })
            .collect::<Result<_, _>>()?;
        let mut rows = Vec::new();
        for (line, rec) in rdr.records().enumerate() {
            let rec = rec.map_err(|e| ReportError::Read {
                path: cpath.clone(),
                what: format!("line {}: {e}", line + 2),
            })?;
            rows.push(
                idx.iter()
                    .map(|&i| undo_spreadsheet_safe(rec.get(i).unwrap_or("")).to_string())
                    .collect::<Vec<_>>(),
            );
        }
        if rows.is_empty() {
            h.push_str("<p>The case lists no towns.</p>");
        }
        h.push_str(&table(
            &shown.iter().map(|s| s.1.clone()).collect::<Vec<_>>(),
            &rows,
            "towns",
            true,
        ));
        h.push_str("</section>\n");
    }

    h.push_str("<section><h2>Maps</h2>\n");
    // A several-member case (it writes the spread layers) blends P90 and range.
    let blended = dir.join("snowfall_spread.tif").is_file();
    for (file, caption) in MAPS {
        let p = dir.join(file);
        if !p.is_file() {
            continue;
        }
        let caption = match file {
            "map_baseline.png" if blended => "Snowfall as the first member models it, with the rain–snow line of every track offset (bold: as modelled).",
            "map_p90.png" if blended => "P90 snowfall over every member, method and track offset: 1 in 10 outcomes, by blended weight, gives more.",
            "map_range.png" if blended => "Largest minus smallest snowfall over every member, method and track offset.",
            _ => caption,
        };
        let caption = if period.is_empty() {
            caption.to_string()
        } else {
            format!("{caption} Totals over {period}.")
        };
        let data = base64::engine::general_purpose::STANDARD.encode(read(&p)?);
        let _ = writeln!(
            h,
            "<figure><img alt=\"{}\" src=\"data:image/png;base64,{data}\"><figcaption>{}</figcaption></figure>",
            escape(&caption),
            escape(&caption)
        );
    }
    h.push_str("</section>\n");

    if let Some(section) = super::report_members::members_section(&m) {
        h.push_str(&section);
    }
    h.push_str("<section><h2>Track offsets (scenarios)</h2><p class=\"note\">Cross-track offsets are positive to the left of the storm's motion, along-track offsets positive ahead of it. Weights are the track-error prior, normalised to add up to 1.</p>\n");
    let scen = field("scenarios")?
        .as_array()
        .ok_or(ReportError::Manifest {
            path: mpath.clone(),
            field: "scenarios".into(),
        })?;
    let srows: Vec<Vec<String>> = scen
        .iter()
        .map(|s| {
            vec![
                text_of(&s["band"]),
                text_of(&s["cross_km"]),
                text_of(&s["along_km"]),
                s["weight"]
                    .as_f64()
                    .map_or(String::new(), |w| format!("{w:.4}")),
                if s["baseline"].as_bool() == Some(true) {
                    "as modelled".into()
                } else {
                    String::new()
                },
            ]
        })
        .collect();
    h.push_str(&table(
        &[
            "Band".into(),
            "Cross-track km".into(),
            "Along-track km".into(),
            "Weight".into(),
            String::new(),
        ],
        &srows,
        "scenarios",
        true,
    ));
    h.push_str("</section>\n");

    h.push_str("<section><h2>Method settings</h2><dl>\n");
    let setting = |h: &mut String, key: &str, v: &Value| {
        let text = match v {
            Value::Array(a) if key == "steps" => format!(
                "{} steps, {} … {}",
                a.len(),
                a.first().map(text_of).unwrap_or_default(),
                a.last().map(text_of).unwrap_or_default()
            ),
            Value::Array(a) => a.iter().map(text_of).collect::<Vec<_>>().join(", "),
            Value::Object(o) => o
                .iter()
                .map(|(k, v)| format!("{k}: {}", text_of(v)))
                .collect::<Vec<_>>()
                .join("; "),
            other => text_of(other),
        };
        let _ = writeln!(h, "<dt>{}</dt><dd>{}</dd>", escape(key), escape(&text));
    };
    for key in [
        "member", "units", "methods", "taper", "crs", "grid", "steps",
    ] {
        if let Some(v) = m.get(key) {
            setting(&mut h, key, v);
        }
    }
    if let Some(Value::Object(d)) = m.get("decisions") {
        for (k, v) in d {
            setting(&mut h, &k.replace('_', " "), v);
        }
    }
    h.push_str("</dl>\n");
    if let Some(inputs) = m.get("inputs").and_then(Value::as_array) {
        let _ = write!(
            h,
            "<details><summary>Inputs ({} files, with SHA-256)</summary><dl>",
            inputs.len()
        );
        for i in inputs {
            let _ = writeln!(
                h,
                "<dt>{}</dt><dd>{} <span class=\"note\">{}</span></dd>",
                escape(&text_of(&i["role"])),
                escape(&text_of(&i["path"])),
                escape(&text_of(&i["sha256"]))
            );
        }
        h.push_str("</dl></details>");
    }
    h.push_str("</section>\n");

    h.push_str("<section><h2>How to read this</h2><ul>\
<li><strong>P10 / P50 / P90</strong>: weighted percentiles of snowfall over the track offsets, each offset weighted by the track-error prior (weighted empirical distribution, linear between scenario values). One outcome in ten is expected below P10 and one in ten above P90 — if the prior matches the real track error.</li>\
");
    let thresholds: Vec<f64> = field("decisions")?["snow_thresholds"]
        .as_array()
        .map(|a| a.iter().filter_map(Value::as_f64).collect())
        .unwrap_or_default();
    let listed: Vec<String> = thresholds
        .iter()
        .map(|t| crate::render::legend::threshold_text(*t))
        .collect();
    let _ = write!(
        h,
        "<li><strong>Threshold probabilities</strong> (snowfall_exceedance.tif; the p_snow_ge_… columns of towns_bust.csv), at this run's thresholds {} {su}: for each, the share of the prior's weight on the scenarios with that much snow or more — for example the {}. The same thresholds are the breaks of the map legends and of the snowfall bands.</li>",
        escape(&listed.join(", ")),
        escape(&crate::render::legend::probability_words(
            "snowfall",
            thresholds.first().copied().unwrap_or(f64::NAN),
            su
        ))
    );
    h.push_str("<li><strong>Flip distance</strong>: the smallest track shift (√(cross² + along²)) at which the main precipitation type changes, or the snowfall halves or doubles (comparing amounts of at least 1 cm).</li>\
<li><strong>Bust score</strong>: (P90 − P10) ÷ the snowfall as modelled (at least 5 cm). 1 means the P10–P90 spread is as wide as the forecast itself.</li>\
<li>The prior's σ should come from your own verification of track error at this lead time; the defaults are examples, not a climatology.</li>\
</ul></section>\n");
    let _ = writeln!(
        h,
        "</main><footer class=\"note\" style=\"padding:0 32px 24px\">{}</footer><script>{SCRIPT}</script></body></html>",
        escape(&caution)
    );
    Ok(write_text_atomic(dir, REPORT, &h)?)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn escaping_and_spreadsheet_undo() {
        assert_eq!(
            escape("<script>alert(1)</script>"),
            "&lt;script&gt;alert(1)&lt;/script&gt;"
        );
        assert_eq!(escape("Ash & Oak"), "Ash &amp; Oak");
        assert_eq!(undo_spreadsheet_safe("'=SUM(A1)"), "=SUM(A1)");
        assert_eq!(undo_spreadsheet_safe("'Tis Cove"), "'Tis Cove");
        assert_eq!(undo_spreadsheet_safe("Plain"), "Plain");
    }
}
