//! A case of several members and method combinations: every (member, method combination)
//! group is a run of the engine with its own model files, track and methods, on the same
//! scenario axes; the groups' totals are then compared cell by cell.
//!
//! Groups run one after another (member outer, method inner), so memory for the fields stays
//! that of one run; the totals of every group are kept, and the memory check counts them all.
//! With two members or more, each member then runs once more as issued with its low moved onto
//! the members' weighted mean track ([`super::align`]); only its snowfall total is kept.
//! Members must share the primary member's grid: resampling members on other grids onto it is
//! not done, and such a case is refused with the grids named.

use super::align::{align_members, Alignment, NotAligned};
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

/// Every group of a case; the first is the primary (first member, first combination), whose
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
    let mut runs = Vec::with_capacity(groups);
    for (mi, m) in members.iter().enumerate() {
        for (oi, o) in options.iter().enumerate() {
            let label = format!("member '{}', methods {}", m.name, o.label());
            let named = Named {
                inner: progress,
                label: &label,
            };
            let r = run(&case.group(mi, oi), threads, &named)?;
            if let Some((_, _, first)) = runs.first() {
                check_same_grid(first, &r, case, mi)?;
                let n = r.grid.len();
                if let Err((need, avail)) = fits_in_memory(n, total) {
                    return Err(EngineError::TooBig {
                        need_mib: need >> 20,
                        avail_mib: avail >> 20,
                        scenarios: total,
                        cells: n,
                    });
                }
            }
            runs.push((mi, oi, r));
        }
    }
    ensemble_of(case, runs, threads, progress)
}

/// The ensemble of every group's run (member outer, method combination inner, as `(member,
/// combination, run)`), computed here or merged from shards: checks that the members share
/// the primary's grid, weighs the groups, says which members cover another period, and puts
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
    let mut out: Vec<GroupRun> = Vec::with_capacity(runs.len());
    for (mi, oi, mut r) in runs {
        if let Some(first) = out.first() {
            check_same_grid(&first.run, &r, case, mi)?;
            if r.valid_times != first.run.valid_times {
                r.warnings
                    .push(period_warning(&first.run, &r, &members[mi].name));
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

/// Refuses a member whose grid is not the primary member's.
fn check_same_grid(
    primary: &RunResult,
    other: &RunResult,
    case: &Case,
    member: usize,
) -> Result<(), EngineError> {
    if other.grid.nx == primary.grid.nx
        && other.grid.ny == primary.grid.ny
        && other.grid.georef == primary.grid.georef
    {
        return Ok(());
    }
    let m = &case.inputs.members[member];
    Err(EngineError::Members {
        path: m.steps.first().cloned().unwrap_or_else(|| m.terrain.clone()),
        member: m.name.clone(),
        what: format!(
            "its grid ({}×{} cells, {}) is not the primary member's ({}×{} cells, {}); members are compared cell by cell and must come on one grid (regrid it first, e.g. with gdalwarp, or give the same --region)",
            other.grid.nx,
            other.grid.ny,
            other.grid.describe(),
            primary.grid.nx,
            primary.grid.ny,
            primary.grid.describe()
        ),
    })
}

/// A member whose steps differ from the primary's: its totals cover another period.
fn period_warning(primary: &RunResult, other: &RunResult, name: &str) -> String {
    let words = |r: &RunResult| {
        crate::accumulate::period::Period::of(&r.valid_times)
            .map_or_else(|| "no steps".to_string(), |p| p.words())
    };
    format!(
        "member '{name}' has {} steps over {} against the primary member's {} over {}: its totals cover another period, which the spread between members includes",
        other.valid_times.len(),
        words(other),
        primary.valid_times.len(),
        words(primary)
    )
}
