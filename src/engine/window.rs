//! The model steps held while the engine runs: read in order, each once (the next one read beside
//! the engine), checked for the same levels and increasing valid times, and forgotten once no
//! later output step, whatever its timing offset, can sample them.

use super::kernel::ScenarioStep;
use super::moisture::LevelMoisture;
use super::wet::WetRows;
use super::EngineError;
use crate::read::fields::StepFields;
use crate::read::source::Source;
use crate::read::StepLayout;
use crate::scenario::{bracket, Scenario, TimeSample};
use crate::shift::StepShift;
use chrono::{DateTime, Duration, Utc};
use std::collections::VecDeque;
use std::path::Path;

/// One held step.
struct Held {
    index: usize,
    fields: StepFields,
    wet: WetRows,
    /// Sub-cloud moisture memos, one per warm bias asked for.
    moisture: Vec<LevelMoisture>,
}

/// The model steps currently held: read in order (each step once), checked for the same levels
/// and increasing valid times, and forgotten once no later output step can sample them.
pub struct StepWindow<'a> {
    source: &'a dyn Source,
    /// Valid time of every step read so far.
    pub times: Vec<DateTime<Utc>>,
    /// Held steps, with their indices and where they have precipitation.
    held: VecDeque<Held>,
    pub(super) layout: Option<StepLayout>,
    /// Memos of forgotten steps, kept for reuse.
    spare: Vec<LevelMoisture>,
    /// Columns of a forgotten step, for the next step read to write into.
    spare_columns: Vec<f32>,
}

impl<'a> StepWindow<'a> {
    /// A window over the steps of `source`.
    pub fn new(source: &'a dyn Source) -> Self {
        Self {
            source,
            times: Vec::new(),
            held: VecDeque::new(),
            layout: None,
            spare: Vec::new(),
            spare_columns: Vec::new(),
        }
    }

    /// The step layout (levels) every step shares.
    pub fn layout(&self) -> &StepLayout {
        self.layout
            .as_ref()
            .expect("the layout is known once a step is read")
    }

    fn read_next(&mut self) -> Result<bool, EngineError> {
        let k = self.times.len();
        if k >= self.source.step_count() {
            return Ok(false);
        }
        let reuse = std::mem::take(&mut self.spare_columns);
        let read = fetch(self.source, k, reuse);
        self.push(k, read)?;
        Ok(true)
    }

    /// The next step to read and a buffer for its columns, when there is one: for a read run
    /// beside the engine ([`fetch`], then [`StepWindow::push`]).
    pub fn next_to_read(&mut self) -> Option<(usize, Vec<f32>)> {
        let k = self.times.len();
        (k < self.source.step_count()).then(|| (k, std::mem::take(&mut self.spare_columns)))
    }

    /// Takes step `k`, read by [`fetch`], as the next step: checked against the steps before
    /// it and held.
    pub fn push(
        &mut self,
        k: usize,
        read: Result<(StepFields, WetRows), EngineError>,
    ) -> Result<(), EngineError> {
        debug_assert_eq!(k, self.times.len(), "steps are taken in order");
        let (step, wet) = read?;
        check_step(&step.path, &step, self.layout.as_ref(), self.times.last())?;
        self.times.push(step.valid);
        self.layout.get_or_insert_with(|| step.layout.clone());
        self.held.push_back(Held {
            index: k,
            fields: step,
            wet,
            moisture: Vec::new(),
        });
        Ok(())
    }

    /// Reads up to and including step `k`.
    pub fn load_through(&mut self, k: usize) -> Result<(), EngineError> {
        while self.times.len() <= k {
            if !self.read_next()? {
                break;
            }
        }
        Ok(())
    }

    /// Where time `t` falls among the model's steps, reading ahead as far as needed; `None`
    /// when it lies outside them.
    pub fn sample(&mut self, t: DateTime<Utc>) -> Result<Option<TimeSample>, EngineError> {
        while self.times.last().is_none_or(|last| *last < t) {
            if !self.read_next()? {
                break;
            }
        }
        Ok(bracket(&self.times, t))
    }

    /// Steps held in memory now.
    pub fn held(&self) -> usize {
        self.held.len()
    }

    /// Drops every step before `k`.
    pub fn forget_before(&mut self, k: usize) {
        while self.held.front().is_some_and(|h| h.index < k) {
            if let Some(h) = self.held.pop_front() {
                self.spare.extend(h.moisture);
                self.spare_columns = h.fields.columns;
            }
        }
        // The next steps need at most as many memos as were just freed; a few spares cover that
        // for one or two warm biases, and more would only hold memory.
        self.spare.truncate(4);
    }

    /// The fields of held step `k`.
    pub fn fields(&self, k: usize) -> &StepFields {
        &self.held_step(k).fields
    }

    fn held_step(&self, k: usize) -> &Held {
        let first = self.held.front().expect("a held step").index;
        &self.held[k - first]
    }

    /// Makes sure held step `k` has a sub-cloud moisture memo for `warm_bias_k` (filled in
    /// parallel on the current rayon pool).
    pub fn prepare_moisture(&mut self, k: usize, warm_bias_k: f64) {
        let first = self.held.front().expect("a held step").index;
        let h = &mut self.held[k - first];
        if !h.moisture.iter().any(|m| m.warm_bias_k == warm_bias_k) {
            let (columns, layout, nx) = (&h.fields.columns, &h.fields.layout, h.wet.nx);
            let (nvar, ip) = (layout.nvar(), layout.precip());
            let wet = |i: usize, j: usize| columns[(j * nx + i) * nvar + ip] != 0.0;
            let cells = columns.len() / nvar;
            let memo = match self.spare.iter().position(|m| m.fits(cells, layout)) {
                Some(i) => {
                    let mut m = self.spare.swap_remove(i);
                    m.fill(columns, layout, nx, warm_bias_k, wet);
                    m
                }
                None => LevelMoisture::new(columns, layout, nx, warm_bias_k, wet),
            };
            h.moisture.push(memo);
        }
    }

    /// Length of step `k` (from the previous valid time; the first step is taken to be as long
    /// as the second).
    fn length(&self, k: usize) -> Option<Duration> {
        crate::accumulate::period::step_length(&self.times, k)
    }

    /// What scenario `s` needs at output step `k` when its fields are sampled at `sample`.
    pub fn scenario_step(
        &self,
        k: usize,
        sample: TimeSample,
        shift: StepShift,
        s: &Scenario,
    ) -> ScenarioStep<'_> {
        // Precipitation is an amount per step: as a rate, times this step's length.
        let ratio = |j: usize| {
            if j == k {
                return 1.0;
            }
            match (self.length(k), self.length(j)) {
                (Some(a), Some(b)) => a.num_milliseconds() as f64 / b.num_milliseconds() as f64,
                _ => 1.0,
            }
        };
        let j = sample.index;
        let next = (sample.next > 0.0).then(|| {
            (
                self.fields(j + 1).columns.as_slice(),
                sample.next as f32,
                s.intensity * ratio(j + 1),
            )
        });
        let held = self.held_step(j);
        let bias = s.warm_bias_k;
        fn memo(h: &Held, bias: f64) -> Option<&LevelMoisture> {
            h.moisture.iter().find(|m| m.warm_bias_k == bias)
        }
        let later = (sample.next > 0.0).then(|| self.held_step(j + 1));
        ScenarioStep {
            shift,
            now: &held.fields.columns,
            now_scale: s.intensity * ratio(j),
            next,
            warm_bias_k: s.warm_bias_k,
            wet: [Some(&held.wet), later.map(|h| &h.wet)],
            moisture: [memo(held, bias), later.and_then(|h| memo(h, bias))],
        }
    }
}

/// Reads step `k` of `source` (its columns into `reuse`) and finds its wet cells: the part of
/// taking a step that can run beside the engine.
pub fn fetch(
    source: &dyn Source,
    k: usize,
    reuse: Vec<f32>,
) -> Result<(StepFields, WetRows), EngineError> {
    let step = source
        .step_reusing(k, reuse)
        .map_err(|e| EngineError::StepField {
            step: k + 1,
            source: Box::new(e),
        })?;
    let nx = source.statics().grid.nx;
    let wet = WetRows::of(&step.columns, step.layout.nvar(), step.layout.precip(), nx);
    Ok((step, wet))
}

fn check_step(
    path: &Path,
    step: &StepFields,
    layout: Option<&StepLayout>,
    previous: Option<&DateTime<Utc>>,
) -> Result<(), EngineError> {
    if let Some(l) = layout {
        if *l != step.layout {
            return Err(EngineError::Steps {
                path: path.to_path_buf(),
                what: format!(
                    "its isobaric levels ({}) differ from the first step's ({}); every step needs the same levels",
                    levels_text(&step.layout),
                    levels_text(l)
                ),
            });
        }
    }
    if let Some(prev) = previous {
        if step.valid <= *prev {
            return Err(EngineError::Steps {
                path: path.to_path_buf(),
                what: format!(
                    "valid_time {} does not come after the previous step's {}; list steps in time order, each once",
                    step.valid.to_rfc3339(),
                    prev.to_rfc3339()
                ),
            });
        }
    }
    Ok(())
}

fn levels_text(l: &StepLayout) -> String {
    l.levels_pa
        .iter()
        .map(|p| format!("{}", p / 100.0))
        .collect::<Vec<_>>()
        .join("/")
        + " hPa"
}
