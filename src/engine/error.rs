//! Why a run failed. Nothing is written when a run fails.

use crate::read::track_finder::FinderError;
use crate::read::{FieldError, SourceError, TownsError, TrackError};
use std::path::PathBuf;

/// Why a run failed. Nothing is written when a run fails.
#[derive(Debug, thiserror::Error)]
pub enum EngineError {
    /// Model fields.
    #[error(transparent)]
    Field(#[from] FieldError),
    /// Model fields from any source.
    #[error(transparent)]
    Source(#[from] SourceError),
    /// Model fields of one time step.
    #[error("step {step}: {source}")]
    StepField {
        /// Step number (1-based).
        step: usize,
        /// What is wrong with its file (boxed: it is large and rare).
        source: Box<SourceError>,
    },
    /// The track could not be found from sea-level pressure.
    #[error("{path}: finding the track: {source}")]
    Finder {
        /// The first model file.
        path: PathBuf,
        /// The cause.
        source: FinderError,
    },
    /// The track.
    #[error(transparent)]
    Track(#[from] TrackError),
    /// The towns.
    #[error(transparent)]
    Towns(#[from] TownsError),
    /// The track does not cover a step.
    #[error("{path}: {what}; the track must cover every step when offsets other than 0 are run")]
    TrackTooShort {
        /// Track file.
        path: PathBuf,
        /// Which step it misses.
        what: String,
    },
    /// The track never enters the grid.
    #[error(
        "{path}: no track position lies inside the grid ({extent}); is the track for this case?"
    )]
    TrackOutsideGrid {
        /// Track file.
        path: PathBuf,
        /// The grid's extent.
        extent: String,
    },
    /// Steps out of order or with different levels.
    #[error("{path}: {what}")]
    Steps {
        /// Step file.
        path: PathBuf,
        /// What is wrong.
        what: String,
    },
    /// The run would not fit in memory.
    #[error("the run needs about {need_mib} MiB ({scenarios} scenarios × {cells} cells) but only {avail_mib} MiB of memory is available; run fewer offsets, a coarser range, or run the case in shards (`run --shard K/N` for K = 1…N, each holding an N-th of the scenarios, then `merge`)")]
    TooBig {
        /// Estimated need, MiB.
        need_mib: u64,
        /// Available, MiB.
        avail_mib: u64,
        /// Scenarios.
        scenarios: usize,
        /// Cells.
        cells: usize,
    },
    /// More scenarios than a run takes without `--force`.
    #[error("{count} scenarios requested, more than the {limit} a run takes without --force: {cost}; {advice}; give --force to run them all anyway")]
    TooManyScenarios {
        /// Scenarios requested.
        count: usize,
        /// The limit.
        limit: usize,
        /// The estimated time and memory, in words.
        cost: String,
        /// What would make it smaller, in words.
        advice: String,
    },
    /// The members of a case cannot be compared cell by cell.
    #[error("{path}: member '{member}': {what}")]
    Members {
        /// The member's first file.
        path: PathBuf,
        /// The member.
        member: String,
        /// What differs from the primary member, and what was expected.
        what: String,
    },
    /// The thread pool could not be built.
    #[error("cannot start {0} worker threads")]
    Threads(usize),
}
