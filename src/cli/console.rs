//! What the binary shows a person: a progress bar while it runs and a short summary after.

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use std::io::IsTerminal;
use std::sync::Mutex;
use trackswing::case::Case;
use trackswing::engine::RunResult;
use trackswing::progress::Progress;
use trackswing::write::Outcome;

/// A progress bar on stderr when it is a terminal, shown once a run has lasted
/// [`SHOW_AFTER`]; warnings are kept for the summary.
pub struct Bar {
    bar: Mutex<Option<(ProgressBar, std::time::Instant)>>,
    show: bool,
    warnings: Mutex<Vec<String>>,
}

impl Bar {
    pub fn new(quiet: bool) -> Self {
        Self {
            bar: Mutex::new(None),
            show: !quiet && std::io::stderr().is_terminal(),
            warnings: Mutex::new(Vec::new()),
        }
    }
}

/// Runs shorter than this finish without a bar.
const SHOW_AFTER: std::time::Duration = std::time::Duration::from_millis(1500);

impl Progress for Bar {
    fn start(&self, what: &str, total: u64) {
        if !self.show {
            return;
        }
        // Drawn nowhere until the run has lasted SHOW_AFTER (see `advance`).
        let b = ProgressBar::with_draw_target(Some(total), ProgressDrawTarget::hidden());
        b.set_style(
            ProgressStyle::with_template("{msg:>12} [{bar:30}] {pos}/{len} ({elapsed})")
                .expect("static template")
                .progress_chars("=> "),
        );
        b.set_message(what.to_string());
        *self.bar.lock().expect("bar lock") = Some((b, std::time::Instant::now()));
    }
    fn advance(&self, n: u64) {
        if let Some((b, started)) = self.bar.lock().expect("bar lock").as_ref() {
            b.inc(n);
            if b.is_hidden() && started.elapsed() >= SHOW_AFTER {
                b.set_draw_target(ProgressDrawTarget::stderr());
                b.enable_steady_tick(std::time::Duration::from_millis(250));
            }
        }
    }
    fn finish(&self) {
        if let Some((b, _)) = self.bar.lock().expect("bar lock").take() {
            b.finish_and_clear();
        }
    }
    fn warn(&self, message: &str) {
        self.warnings
            .lock()
            .expect("warnings lock")
            .push(message.to_string());
    }
}

/// "N scenarios × S steps × NX×NY cells in T s (…)": the time split of a run of `computed`
/// scenarios and its evaluation rate.
fn run_line(
    r: &RunResult,
    computed: usize,
    took: std::time::Duration,
    write_s: Option<f64>,
) -> String {
    let evals = (computed * r.valid_times.len() * r.grid.len()) as f64;
    let write = write_s.map_or(String::new(), |w| format!(", write {w:.2} s"));
    format!(
        "{} scenarios × {} steps × {}×{} cells in {:.2} s (waiting for input {:.2} s, shift+diagnose {:.2} s{write}; {:.3e} cell·step·scenario/s)",
        r.scenarios.len(),
        r.valid_times.len(),
        r.grid.nx,
        r.grid.ny,
        took.as_secs_f64(),
        r.timings.read_s,
        r.timings.compute_s,
        evals / r.timings.compute_s.max(1e-9)
    )
}

/// Prints what one shard computed and where its file went.
pub fn shard_summary(
    case: &Case,
    r: &RunResult,
    shard: trackswing::shard::Shard,
    path: &std::path::Path,
    bar: &Bar,
    took: std::time::Duration,
) {
    use std::fmt::Write as _;
    use std::io::Write as _;
    let mut out = String::new();
    let _ = writeln!(out, "trackswing: {}", case.title);
    let held = r.totals.iter().filter(|t| !t.is_empty()).count();
    let _ = writeln!(
        out,
        "shard {}: {held} of {}",
        shard.label(),
        run_line(r, held, took, None)
    );
    for w in bar.warnings.lock().expect("warnings lock").iter() {
        let _ = writeln!(out, "warning: {w}");
    }
    let _ = writeln!(
        out,
        "wrote {} (the totals of these scenarios; `trackswing merge` writes the layers once all {} shards are done)",
        path.display(),
        shard.count
    );
    let _ = writeln!(out, "{}", trackswing::CAUTION);
    let _ = std::io::stdout().lock().write_all(out.as_bytes());
}

/// Prints what one shard of a case with several members or methods computed: a line per
/// member × method part and its file.
pub fn ensemble_shard_summary(
    case: &Case,
    parts: &[trackswing::shard::ensemble::GroupPart],
    shard: trackswing::shard::Shard,
    bar: &Bar,
    took: std::time::Duration,
) {
    use std::fmt::Write as _;
    use std::io::Write as _;
    let mut out = String::new();
    let _ = writeln!(out, "trackswing: {}", case.title);
    for p in parts {
        let held = p.run.totals.iter().filter(|t| !t.is_empty()).count();
        let _ = writeln!(
            out,
            "shard {}, member '{}' with {}: {held} of {} scenarios → {}",
            shard.label(),
            case.inputs.members[p.member].name,
            case.physics.options[p.option].label(),
            p.run.scenarios.len(),
            p.file.display()
        );
    }
    for w in bar.warnings.lock().expect("warnings lock").iter() {
        let _ = writeln!(out, "warning: {w}");
    }
    let _ = writeln!(
        out,
        "took {:.1} s; `trackswing merge` writes the layers once all {} shards are done",
        took.as_secs_f64(),
        shard.count
    );
    let _ = writeln!(out, "{}", trackswing::CAUTION);
    let _ = std::io::stdout().lock().write_all(out.as_bytes());
}

/// The five bust-prone towns at the top of `towns_bust.csv`, the ranking report.html shows, read
/// back from the file written so that the terminal, the table and the report cannot disagree.
/// Nothing when the run wrote no such table.
fn bust_prone_towns(out: &mut String, dir: &std::path::Path, su: &str) {
    use std::fmt::Write as _;
    let Ok(mut rdr) = csv::Reader::from_path(dir.join("towns_bust.csv")) else {
        return;
    };
    let Ok(header) = rdr.headers().cloned() else {
        return;
    };
    let cols = [
        "name".to_string(),
        format!("baseline_{su}"),
        format!("p10_{su}"),
        format!("p90_{su}"),
        "bust_score".to_string(),
        "flip_direction".to_string(),
        "flip_what".to_string(),
    ];
    let Some(idx) = cols
        .iter()
        .map(|c| header.iter().position(|h| h == c))
        .collect::<Option<Vec<usize>>>()
    else {
        return;
    };
    let rows: Vec<csv::StringRecord> = rdr.records().take(5).flatten().collect();
    if rows.is_empty() {
        return;
    }
    let _ = writeln!(
        out,
        "bust-prone towns, ranked by bust score as in towns_bust.csv and report.html (P90 − P10 spread over the snowfall as modelled, floored at 5 cm; {su}):"
    );
    let _ = writeln!(
        out,
        "  {:<20} {:>9} {:>7} {:>7} {:>6}  first flip",
        "town", "as model", "P10", "P90", "score"
    );
    for r in rows {
        let get = |k: usize| r.get(idx[k]).unwrap_or("");
        let flip = match (get(5), get(6)) {
            ("", "") => "missing data".to_string(),
            ("", what) => what.to_string(),
            (dir, what) => format!("{what} with the low {dir}"),
        };
        let _ = writeln!(
            out,
            "  {:<20} {:>9} {:>7} {:>7} {:>6}  {}",
            get(0),
            get(1),
            get(2),
            get(3),
            get(4),
            flip
        );
    }
}

/// Prints what was written and the bust-prone towns.
pub fn summary(
    case: &Case,
    r: &RunResult,
    outcome: &Outcome,
    (took, write_s): (std::time::Duration, f64),
    merged_from: Option<usize>,
) {
    use std::fmt::Write as _;
    use std::io::Write as _;
    let mut out = String::new();
    let u = case.output.units;
    let _ = writeln!(out, "trackswing: {}", case.title);
    if let Some(shards) = merged_from {
        let _ = writeln!(
            out,
            "{} scenarios × {} steps × {}×{} cells merged from {shards} shard files in {:.2} s (write {:.2} s; the shards' engines took {:.2} s in all)",
            r.scenarios.len(),
            r.valid_times.len(),
            r.grid.nx,
            r.grid.ny,
            took.as_secs_f64(),
            write_s,
            r.timings.read_s + r.timings.compute_s,
        );
    } else {
        let n = r.scenarios.len();
        let _ = writeln!(out, "{}", run_line(r, n, took, Some(write_s)));
    }
    if case.is_ensemble() {
        let (m, k) = (case.inputs.members.len(), case.physics.options.len());
        let _ = writeln!(
            out,
            "{m} member{} × {k} method combination{} × {} offset scenarios = {} scenarios in all; the line above is the first member's with the first methods, the summaries and towns below pool them all",
            if m == 1 { "" } else { "s" },
            if k == 1 { "" } else { "s" },
            r.scenarios.len(),
            m * k * r.scenarios.len()
        );
    }
    if let Some(p) = trackswing::accumulate::period::Period::of(&r.valid_times) {
        let _ = writeln!(out, "totals over {}", p.words());
    }
    // The run's warnings and the writing's, as manifest.json and report.html list them.
    for w in &outcome.warnings {
        let _ = writeln!(out, "warning: {w}");
    }
    // What could not be computed, by reason, as manifest.json and report.html list it.
    let mut reasons: Vec<&str> = Vec::new();
    for n in &outcome.not_computed {
        if !reasons.contains(&n.reason.as_str()) {
            reasons.push(&n.reason);
        }
    }
    for reason in reasons {
        let layers: Vec<&str> = outcome
            .not_computed
            .iter()
            .filter(|n| n.reason == reason)
            .map(|n| n.layer.as_str())
            .collect();
        let _ = writeln!(out, "not computed: {reason}: {}", layers.join(", "));
    }
    let _ = writeln!(out, "layers written to {}:", case.output.out_dir.display());
    for f in &outcome.files {
        let _ = writeln!(out, "  {:<38} {}", f.file, f.description);
    }
    bust_prone_towns(&mut out, &case.output.out_dir, u.snow_unit());
    let _ = writeln!(out, "{}", trackswing::CAUTION);
    // A closed pipe (e.g. `| head`) is not an error worth a panic.
    let _ = std::io::stdout().lock().write_all(out.as_bytes());
}
