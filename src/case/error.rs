//! Why a case cannot be run.

use std::path::PathBuf;

/// Why a case cannot be run.
#[derive(Debug, thiserror::Error)]
pub enum CaseError {
    /// The case file could not be read.
    #[error("{path}: cannot read the case file: {source}")]
    Io {
        /// The case file.
        path: PathBuf,
        /// The cause.
        source: std::io::Error,
    },
    /// TOML syntax, an unknown key or a value of the wrong type.
    #[error("{path}: {message}")]
    Syntax {
        /// The case file.
        path: PathBuf,
        /// The parser's message, with line and column.
        message: String,
    },
    /// A command-line option has a value that cannot work (exit code 2, a bad command line,
    /// not a bad case file).
    #[error("option '{flag}': {what}")]
    Flag {
        /// The option, e.g. `--units`.
        flag: String,
        /// What is wrong and what was expected.
        what: String,
    },
    /// A setting has a value that cannot work.
    #[error("{path}: '{field}': {what}")]
    Invalid {
        /// The case file (or `command line`).
        path: PathBuf,
        /// The setting, e.g. `offsets.cross_km` or `member[0].steps[3]`.
        field: String,
        /// What is wrong and what was expected.
        what: String,
    },
}
