//! A case of several members and method combinations: every (member, method combination)
//! group is a run of the engine with its own model files, track and methods, on the same
//! scenario axes; the groups' totals are then compared cell by cell.
//!
//! Groups run one after another (member outer, method inner), so memory for the fields stays
//! that of one run; the totals of every group are kept, and the memory check counts them all.
//! The first group's grid is the output grid (the case puts the member `[output] grid` names
//! first). A member on another grid runs on its own grid and its totals are then resampled
//! onto the output grid ([`super::regrid`]); a member whose grid holds no output cell is
//! refused. Members are matched by valid time: one whose steps differ from the primary's
//! covers what it has, and the run says which steps it shares, lacks and adds. With two members
//! or more, each member then runs once more as issued with its low moved onto the members'
//! weighted mean track ([`super::align`]); only its snowfall total is kept.

use super::align::{align_members, Alignment, NotAligned};
use super::regrid::{onto, Remap, CONSERVATION_TOLERANCE};
use super::{budget, fits_in_memory, run, EngineError, RunResult};
use crate::case::Case;
use crate::progress::Progress;
use crate::scenario::scenario_product;

/// One member run with one method combination.
pub struct GroupRun {
    /// Index of the member in the case.
    pub member: usize,
    /// Index of the method combination in the case.
    pub option: usize,
    /// The group's weight in the blend: the member's share of the members' weights × the
    /// combination's weight (the groups' weights add up to 1).
    pub weight: f64,
    /// What the engine computed.
    pub run: RunResult,
}

/// Every group of a case, all on the output grid; the first is the primary (first member —
/// the case's first, or the one `[output] grid` names — with the first combination), whose
/// run the single-run layers describe.
pub struct Ensemble {
    /// The groups, member outer, method combination inner.
    pub groups: Vec<GroupRun>,
    /// The members' runs as issued aligned on their weighted mean track ([`super::align`]), or
    /// why they are not.
    pub alignment: Result<Alignment, NotAligned>,
}

impl Ensemble {
    /// Member `member`'s run as issued: with the first method combination.
    pub fn as_issued(&self, member: usize) -> Option<&RunResult> {
        self.groups
            .iter()
            .find(|g| g.member == member && g.option == 0)
            .map(|g| &g.run)
    }

    /// How many members the groups hold.
    pub fn members(&self) -> usize {
        self.groups.iter().map(|g| g.member + 1).max().unwrap_or(0)
    }
}

/// Runs every group of the case. The later groups' warnings are added to the primary run's,
/// each naming its member and methods.
pub fn run_groups(
    case: &Case,
    threads: usize,
    progress: &dyn Progress,
) -> Result<Ensemble, EngineError> {
    let members = &case.inputs.members;
    let options = &case.physics.options;
    let groups = members.len() * options.len();
    let per_group = scenario_product(&case.axes).len();
    let total = groups * per_group;
    if total > budget::SCENARIOS_REFUSE && !case.force {
        return Err(EngineError::TooManyScenarios {
            count: total,
            limit: budget::SCENARIOS_REFUSE,
            cost: format!(
                "{} members × {} method combinations × {per_group} offset scenarios, each group a run of its own",
                members.len(),
                options.len()
            ),
            advice: "list fewer members, methods or offsets".into(),
        });
    }
    let mut runs: Vec<(usize, usize, RunResult)> = Vec::with_capacity(groups);
    for (mi, m) in members.iter().enumerate() {
        for (oi, o) in options.iter().enumerate() {
            let label = format!("member '{}', methods {}", m.name, o.label());
            let named = Named {
                inner: progress,
                label: &label,
            };
            let r = run(&case.group(mi, oi), threads, &named)?;
            // Every group's totals are kept, on the output grid (or the member's own, until
            // resampled, when larger).
            let n = r.grid.len().max(runs.first().map_or(0, |f| f.2.grid.len()));
            if let Err((need, avail)) = fits_in_memory(n, total) {
                return Err(EngineError::TooBig {
                    need_mib: need >> 20,
                    avail_mib: avail >> 20,
                    scenarios: total,
                    cells: n,
                });
            }
            runs.push((mi, oi, r));
        }
    }
    ensemble_of(case, runs, threads, progress)
}

/// The ensemble of every group's run (member outer, method combination inner, as `(member,
/// combination, run)`), computed here or merged from shards: resamples members on other grids
/// onto the primary's, weighs the groups, says which members cover another period, and puts
/// every warning in the primary run's list, the primary's first, then those of the other groups
/// that say something new, named by their group (a warning every member gives is said once).
/// With several members, each is then run once more aligned on their mean track
/// ([`super::align`]), on `threads` threads.
pub fn ensemble_of(
    case: &Case,
    runs: Vec<(usize, usize, RunResult)>,
    threads: usize,
    progress: &dyn Progress,
) -> Result<Ensemble, EngineError> {
    let members = &case.inputs.members;
    let options = &case.physics.options;
    let member_sum: f64 = members.iter().map(|m| m.weight).sum();
    // The mapping of a member onto the output grid is computed on the run's threads, once per
    // member and shared by its method combinations.
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .map_err(|_| EngineError::Threads(threads))?;
    let mut remaps: Vec<Option<Remap>> = (0..members.len()).map(|_| None).collect();
    let mut out: Vec<GroupRun> = Vec::with_capacity(runs.len());
    for (mi, oi, mut r) in runs {
        if let Some(first) = out.first() {
            if !r.grid.same_as(&first.run.grid) {
                let target = &first.run.grid;
                let map =
                    remaps[mi].get_or_insert_with(|| pool.install(|| Remap::new(&r.grid, target)));
                let note = regrid_note(&first.run, &r, map, case, mi)?;
                r = onto(r, target, map);
                r.warnings.push(note);
            }
            if let Some(w) = period_warning(&first.run, &r, case, mi)? {
                r.warnings.push(w);
            }
        }
        out.push(GroupRun {
            member: mi,
            option: oi,
            weight: members[mi].weight / member_sum * options[oi].weight,
            run: r,
        });
    }
    let mut seen: Vec<String> = out[0].run.warnings.clone();
    let mut later = Vec::new();
    for g in out.iter().skip(1) {
        let label = format!(
            "member '{}', methods {}",
            members[g.member].name,
            options[g.option].label()
        );
        for w in &g.run.warnings {
            if !seen.contains(w) {
                seen.push(w.clone());
                later.push(format!("{label}: {w}"));
            }
        }
    }
    out[0].run.warnings.extend(later);
    let mut warnings = std::mem::take(&mut out[0].run.warnings);
    let alignment = align_members(case, &out, threads, progress, &mut warnings)?;
    out[0].run.warnings = warnings;
    Ok(Ensemble {
        groups: out,
        alignment,
    })
}

/// Progress of one group: its bars carry the group's name.
struct Named<'a> {
    inner: &'a dyn Progress,
    label: &'a str,
}

impl Progress for Named<'_> {
    fn start(&self, what: &str, total: u64) {
        self.inner.start(&format!("{}: {what}", self.label), total);
    }
    fn advance(&self, n: u64) {
        self.inner.advance(n);
    }
    fn finish(&self) {
        self.inner.finish();
    }
    fn warn(&self, message: &str) {
        self.inner.warn(&format!("{}: {message}", self.label));
    }
}

/// What resampling member `member` onto the output grid does, for the warnings; refuses a
/// member whose grid holds no output cell.
fn regrid_note(
    primary: &RunResult,
    other: &RunResult,
    map: &Remap,
    case: &Case,
    member: usize,
) -> Result<String, EngineError> {
    let m = &case.inputs.members[member];
    let p = &case.inputs.members[0].name;
    let n = primary.grid.len();
    let covered = map.covered();
    if covered == 0 {
        return Err(EngineError::Members {
            path: m.steps.first().cloned().unwrap_or_else(|| m.terrain.clone()),
            member: m.name.clone(),
            what: format!(
                "its grid ({}) holds no cell of the output grid (that of member '{p}': {}); members are compared cell by cell on the output grid, so a member must cover part of it",
                other.grid.describe(),
                primary.grid.describe()
            ),
        });
    }
    let missing = if covered < n {
        format!(
            "; it covers {covered} of the {n} output cells, and the other {} are missing for it (the spread there comes from the other members)",
            n - covered
        )
    } else {
        "; it covers every output cell".to_string()
    };
    Ok(format!(
        "member '{}' is on another grid ({}) than the output grid (that of member '{p}': {}): it ran on its own grid and its totals were resampled onto the output grid, amounts conservatively (area-weighted over {k}×{k} parts of each output cell, the area-integral kept within {tol} %), terrain bilinearly, onset from the nearest cell{missing}",
        m.name,
        other.grid.describe(),
        primary.grid.describe(),
        k = map.parts_per_side,
        tol = CONSERVATION_TOLERANCE * 100.0,
    ))
}

/// A member whose steps differ from the primary's, matched by valid time: which steps it
/// shares, which of the primary's it lacks (its totals cover only what it has) and which it
/// adds. Refuses a member whose period does not overlap the primary's: its totals would be of
/// another storm, or of none.
fn period_warning(
    primary: &RunResult,
    other: &RunResult,
    case: &Case,
    member: usize,
) -> Result<Option<String>, EngineError> {
    use crate::accumulate::period::Period;
    if other.valid_times == primary.valid_times {
        return Ok(None);
    }
    let m = &case.inputs.members[member];
    let p = &case.inputs.members[0].name;
    let words = |r: &RunResult| {
        Period::of(&r.valid_times).map_or_else(|| "no steps".to_string(), |p| p.words())
    };
    let shared = other
        .valid_times
        .iter()
        .filter(|t| primary.valid_times.contains(t))
        .count();
    // Periods meet when they share a valid time or their spans overlap.
    let overlap = match (
        Period::of(&primary.valid_times),
        Period::of(&other.valid_times),
    ) {
        (Some(a), Some(b)) => {
            let (a0, b0) = (a.start.unwrap_or(a.end), b.start.unwrap_or(b.end));
            shared > 0 || (b0 < a.end && a0 < b.end)
        }
        _ => false,
    };
    if !overlap {
        return Err(EngineError::Members {
            path: m.steps.first().cloned().unwrap_or_else(|| m.terrain.clone()),
            member: m.name.clone(),
            what: format!(
                "its steps ({}) do not overlap the primary member's ('{p}': {}); members are compared over one storm",
                words(other),
                words(primary)
            ),
        });
    }
    let lacks: Vec<_> = primary
        .valid_times
        .iter()
        .filter(|t| !other.valid_times.contains(t))
        .copied()
        .collect();
    let adds: Vec<_> = other
        .valid_times
        .iter()
        .filter(|t| !primary.valid_times.contains(t))
        .copied()
        .collect();
    let list = |v: &[chrono::DateTime<chrono::Utc>]| match v {
        [] => "none".to_string(),
        [t] => format!("1 (valid {})", t.format("%Y-%m-%d %H:%M UTC")),
        [a, .., b] => format!(
            "{} (valid {} to {})",
            v.len(),
            a.format("%Y-%m-%d %H:%M"),
            b.format("%Y-%m-%d %H:%M UTC")
        ),
    };
    Ok(Some(format!(
        "member '{}' has {} steps over {} against the primary member's ('{p}') {} over {}; matched by valid time, it shares {shared} of the primary's steps, lacks {} and adds {}: its totals cover the steps it has, and the spread between members includes the difference in period",
        m.name,
        other.valid_times.len(),
        words(other),
        primary.valid_times.len(),
        words(primary),
        list(&lacks),
        list(&adds),
    )))
}
