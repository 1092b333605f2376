//! After the storm: the observed storm totals against a finished run's scenarios.
//!
//! Reads the run back from its output folder ([`run`]: manifest and snowfall stacks), reads the
//! reports ([`reports`]), samples every scenario at every report with the towns' rule
//! ([`crate::grid::Grid::bilinear_at`]), scores them ([`scores`]: CRPS, PIT, Brier; [`assess`]:
//! per report, per scenario, overall) and writes `OUT_DIR/verification/` ([`write`], with the
//! heat map of [`heatmap`]). The run's own files are never touched.
//!
//! Decision support for trained forecasters: not an official verification of any forecast.

pub mod assess;
pub mod heatmap;
pub mod reports;
pub mod run;
pub mod score_table;
pub mod scores;
pub mod write;

use std::path::{Path, PathBuf};

/// Why a verification could not be made.
#[derive(Debug, thiserror::Error)]
pub enum VerifyError {
    /// The reports file is wrong at a line and field.
    #[error("{path}: line {line}, field '{field}': {what}")]
    Reports {
        /// The reports file.
        path: PathBuf,
        /// 1-based line (the header is line 1).
        line: usize,
        /// The column, or what of the file.
        field: String,
        /// What is wrong and what was expected.
        what: String,
    },
    /// The reports file cannot be read as CSV at all.
    #[error("{path}: cannot read the reports: {what}")]
    ReportsFile {
        /// The reports file.
        path: PathBuf,
        /// The cause.
        what: String,
    },
    /// No report lies where the run has data.
    #[error("{path}: no report could be scored ({reasons}); are the reports for this run's area?")]
    NothingScored {
        /// The reports file.
        path: PathBuf,
        /// Each reason with its count.
        reasons: String,
    },
    /// A file of the run cannot be read or is not what a run writes.
    #[error("{path}: {what}; is this the output folder of a complete trackswing run?")]
    Run {
        /// The file.
        path: PathBuf,
        /// The cause.
        what: String,
    },
    /// The run's manifest lacks something.
    #[error("{path}: '{field}' is missing or not what a trackswing manifest holds")]
    Manifest {
        /// manifest.json.
        path: PathBuf,
        /// The field.
        field: String,
    },
    /// The verification folder could not be written.
    #[error(transparent)]
    Write(#[from] crate::write::WriteError),
}

/// What a verification found and where it wrote it.
pub struct Verified {
    /// The folder written.
    pub folder: PathBuf,
    /// The scores.
    pub assessment: assess::Assessment,
    /// The run read.
    pub run: run::FinishedRun,
}

/// Verifies the run in `out_dir` against the reports in `reports_file` and writes
/// `out_dir/verification/`.
pub fn verify(out_dir: &Path, reports_file: &Path) -> Result<Verified, VerifyError> {
    let run = run::read_run(out_dir)?;
    let reports = reports::read_reports(reports_file)?;
    let assessment = assess::assess(&run, &reports);
    if assessment.scored.is_empty() {
        let mut reasons: Vec<(String, usize)> = Vec::new();
        for sk in &assessment.skipped {
            match reasons.iter_mut().find(|(r, _)| *r == sk.reason) {
                Some(r) => r.1 += 1,
                None => reasons.push((sk.reason.clone(), 1)),
            }
        }
        return Err(VerifyError::NothingScored {
            path: reports_file.to_path_buf(),
            reasons: reasons
                .iter()
                .map(|(r, n)| format!("{n} {r}"))
                .collect::<Vec<_>>()
                .join("; "),
        });
    }
    let folder = write::write_verification(out_dir, reports_file, &run, &assessment)?;
    Ok(Verified {
        folder,
        assessment,
        run,
    })
}
