//! What a run computed, shared by the run in one piece and the merge of shards: the totals per
//! scenario and everything the summaries and writers need beside them.

use super::warnings::{step_gap_warning, warn_about_totals};
use super::Prepared;
use crate::accumulate::Totals;
use crate::case::Case;
use crate::grid::Grid;
use crate::progress::Progress;
use crate::read::{StepLayout, Town, Track};
use crate::scenario::Scenario;
use chrono::{DateTime, Utc};

/// Everything a run computed, ready to summarise and write.
pub struct RunResult {
    /// The grid.
    pub grid: Grid,
    /// Terrain, m.
    pub terrain: Vec<f32>,
    /// Scenarios, in band order; index 0..n.
    pub scenarios: Vec<Scenario>,
    /// Index of the baseline (0, 0) in `scenarios`.
    pub baseline: usize,
    /// Totals per scenario.
    pub totals: Vec<Totals>,
    /// Valid time of every step.
    pub valid_times: Vec<DateTime<Utc>>,
    /// The modelled low centre (lon, lat) at every step, where the track covers it.
    pub centres: Vec<Option<(f64, f64)>>,
    /// Towns.
    pub towns: Vec<Town>,
    /// The track, if the case has one.
    pub track: Option<Track>,
    /// The layout of the step fields (levels found).
    pub layout: StepLayout,
    /// Where the time went.
    pub timings: Timings,
    /// The shard files the totals were merged from (none for a run in one piece).
    pub shards: Vec<ShardUsed>,
    /// What the run warned about, in order: the layers' manifest and report carry them.
    pub warnings: Vec<String>,
    /// The window of the model grid the run read, when the case gives a region.
    pub window: Option<crate::read::region::Window>,
    /// The model run's reference time (its cycle), when the files say.
    pub reference: Option<DateTime<Utc>>,
}

/// What a run (or a merge of shards) computed beside its prepared inputs.
pub struct Computed {
    /// Totals per scenario (empty for the scenarios of other shards).
    pub totals: Vec<Totals>,
    /// Valid time of every step.
    pub valid_times: Vec<DateTime<Utc>>,
    /// The modelled low centre (lon, lat) at every step, where the track covers it.
    pub centres: Vec<Option<(f64, f64)>>,
    /// The layout of the step fields (levels found).
    pub layout: StepLayout,
    /// Where the time went.
    pub timings: Timings,
    /// The shard files the totals were merged from (none for a run in one piece).
    pub shards: Vec<ShardUsed>,
}

impl RunResult {
    /// The one assembly of a result, for the run in one piece and the merge alike: the prepared
    /// inputs and what was computed, after the warnings every run gives about its steps and
    /// totals (reported through `progress`, in that order).
    pub fn assemble(
        case: &Case,
        prepared: Prepared,
        computed: Computed,
        progress: &dyn Progress,
    ) -> Self {
        let Prepared {
            source,
            track,
            towns,
            scenarios,
            baseline,
        } = prepared;
        let statics = source.statics();
        if let Some(w) = step_gap_warning(&computed.valid_times) {
            progress.warn(&w);
        }
        warn_about_totals(
            case,
            &scenarios,
            &computed.totals,
            computed.valid_times.len(),
            statics.grid.len(),
            progress,
        );
        RunResult {
            grid: statics.grid.clone(),
            terrain: statics.terrain.clone(),
            scenarios,
            baseline,
            totals: computed.totals,
            valid_times: computed.valid_times,
            centres: computed.centres,
            towns,
            track,
            layout: computed.layout,
            timings: computed.timings,
            shards: computed.shards,
            warnings: Vec::new(),
            window: source.window().cloned(),
            reference: source.reference_time(),
        }
    }
}

/// A shard file a run's totals came from, for the manifest.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct ShardUsed {
    /// The file as given.
    pub file: String,
    /// Which shard, `K/N`.
    pub shard: String,
    /// CRC-32 of the file's totals, hex.
    pub body_crc32: String,
}

/// Wall time of the engine's stages, seconds.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Timings {
    /// Waiting for the inputs to be read and checked: the first step, any step read ahead of
    /// time for a timing offset, and whatever part of the next step's read the previous step's
    /// scenarios did not cover (steps are read beside the engine).
    pub read_s: f64,
    /// Shifting, diagnosing and accumulating every scenario.
    pub compute_s: f64,
}
