//! Shards of a case with several members or method combinations. The unit of work is a group
//! (one member with one method combination, [`crate::engine::run_groups`]), split further by
//! scenario when there are more shards than groups:
//!
//! - with N shards and G groups, N ≤ G: shard K runs every group g with g mod N = K in full
//!   (a shard per member, or per few members: each reads only its members' files);
//! - N > G: shard K runs group K mod G, whose scenarios are interleaved over the shards that
//!   serve it (the shards K' with K' mod G = g), as a run of one member is.
//!
//! Each group's part is an ordinary shard file of that group's run (its key names the member
//! and the methods), `shard-K-of-N-group-G.bin`. The merge sorts the files by group from their
//! headers and assembles each group from its files exactly as a run of one member is
//! ([`super::assemble`]), so the merged layers are those of the run in one piece.

use super::{read_header, run_and_write_as, Shard, ShardError};
use crate::case::Case;
use crate::engine::RunResult;
use crate::progress::Progress;
use std::path::{Path, PathBuf};

/// The part of group `g` (of `groups`, each of `scenarios` scenarios) that shard `shard` runs:
/// `None` when it runs none of it.
///
/// ```
/// use trackswing::shard::{ensemble::group_part, Shard};
/// // 2 shards, 6 groups: shard 1 (index 0) runs groups 0, 2, 4 whole.
/// let s = Shard { index: 0, count: 2 };
/// assert_eq!(group_part(s, 2, 6), Some(Shard { index: 0, count: 1 }));
/// assert_eq!(group_part(s, 1, 6), None);
/// // 8 shards, 3 groups: group 1 is served by shards 2, 5 and 8 (index 1, 4, 7), split in
/// // three; shard 5 runs the second part of it.
/// let s = Shard { index: 4, count: 8 };
/// assert_eq!(group_part(s, 1, 3), Some(Shard { index: 1, count: 3 }));
/// assert_eq!(group_part(s, 0, 3), None);
/// ```
pub fn group_part(shard: Shard, g: usize, groups: usize) -> Option<Shard> {
    let (k, n) = (shard.index, shard.count);
    if n <= groups {
        return (g % n == k).then_some(Shard { index: 0, count: 1 });
    }
    if k % groups != g {
        return None;
    }
    // The shards serving group g: g, g + G, g + 2G, … below N.
    let serving = (n - g).div_ceil(groups);
    Some(Shard {
        index: k / groups,
        count: serving,
    })
}

/// The file of group `g`'s part in shard `shard`.
pub fn file_name(shard: Shard, g: usize) -> String {
    format!(
        "shard-{}-of-{}-group-{}.bin",
        shard.index + 1,
        shard.count,
        g + 1
    )
}

/// One group's part of an ensemble shard.
pub struct GroupPart {
    /// Index of the member in the case.
    pub member: usize,
    /// Index of the method combination in the case.
    pub option: usize,
    /// The run (scenarios outside the part have empty totals).
    pub run: RunResult,
    /// The file written.
    pub file: PathBuf,
}

/// Runs shard `shard` of an ensemble case: every group part it holds, one after another, each
/// written to its own file in `folder`.
pub fn run_and_write_groups(
    case: &Case,
    threads: usize,
    progress: &dyn Progress,
    shard: Shard,
    folder: &Path,
) -> Result<Vec<GroupPart>, ShardError> {
    let (members, options) = (case.inputs.members.len(), case.physics.options.len());
    let groups = members * options;
    let scenarios = crate::scenario::scenario_product(&case.axes).len();
    if shard.count > groups * scenarios {
        return Err(ShardError::Coverage(format!(
            "{} shards for {groups} member × method groups of {scenarios} scenarios each: use at most {} shards",
            shard.count,
            groups * scenarios
        )));
    }
    let mut out = Vec::new();
    for g in 0..groups {
        let Some(part) = group_part(shard, g, groups) else {
            continue;
        };
        if part.index >= scenarios {
            // More shards serve this group than it has scenarios.
            continue;
        }
        let (m, k) = (g / options, g % options);
        let group = case.group(m, k);
        let name = file_name(shard, g);
        let (run, file) = run_and_write_as(&group, threads, progress, part, folder, &name)
            .map_err(|e| in_group(case, m, k, e))?;
        out.push(GroupPart {
            member: m,
            option: k,
            run,
            file,
        });
    }
    if out.is_empty() {
        return Err(ShardError::Coverage(format!(
            "shard {} holds no scenario of any group",
            shard.label()
        )));
    }
    Ok(out)
}

/// Merges the files of an ensemble's shards: sorts them by group (member and methods, from
/// their headers), then assembles each group. Returns every group's run, member outer.
pub fn assemble_groups(
    case: &Case,
    progress: &dyn Progress,
    paths: &[PathBuf],
) -> Result<Vec<(usize, usize, RunResult)>, ShardError> {
    let options = &case.physics.options;
    let groups = case.inputs.members.len() * options.len();
    let mut files: Vec<Vec<PathBuf>> = vec![Vec::new(); groups];
    for p in paths {
        let h = read_header(p)?;
        let member = h.run["member"].as_str().unwrap_or_default();
        let methods = &h.run["methods"];
        let g = (0..groups).find(|&g| {
            let (m, k) = (g / options.len(), g % options.len());
            let o = options[k].methods;
            case.inputs.members[m].name == member
                && methods["precip_type"] == o.ptype.name()
                && methods["snow_ratio"] == o.slr.name()
        });
        let Some(g) = g else {
            return Err(ShardError::Mismatch {
                path: p.clone(),
                part: "member or methods".into(),
                detail: format!(
                    "member '{member}' with {}/{} is not a member × method combination of this case",
                    methods["precip_type"].as_str().unwrap_or("?"),
                    methods["snow_ratio"].as_str().unwrap_or("?")
                ),
            });
        };
        files[g].push(p.clone());
    }
    let mut out = Vec::with_capacity(groups);
    for (g, paths) in files.iter().enumerate() {
        let (m, k) = (g / options.len(), g % options.len());
        if paths.is_empty() {
            return Err(ShardError::Coverage(format!(
                "no shard file holds member '{}' with methods {}: a shard that did not run, or a file not given",
                case.inputs.members[m].name,
                options[k].label()
            )));
        }
        let mut r = super::assemble(&case.group(m, k), progress, paths)
            .map_err(|e| in_group(case, m, k, e))?;
        for s in &mut r.shards {
            s.shard = format!(
                "{} of member '{}' with {}",
                s.shard,
                case.inputs.members[m].name,
                options[k].label()
            );
        }
        out.push((m, k, r));
    }
    // The primary run lists every file merged (the manifest's list).
    let all: Vec<_> = out
        .iter_mut()
        .flat_map(|g| std::mem::take(&mut g.2.shards))
        .collect();
    out[0].2.shards = all;
    Ok(out)
}

/// An error of one group's part, naming the group.
fn in_group(case: &Case, m: usize, k: usize, e: ShardError) -> ShardError {
    match e {
        ShardError::Coverage(what) => ShardError::Coverage(format!(
            "member '{}' with methods {}: {what}",
            case.inputs.members[m].name,
            case.physics.options[k].label()
        )),
        e => e,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Every (group, scenario) unit is run by exactly one shard, for any number of shards up
    /// to the number of units.
    #[test]
    fn every_unit_is_in_exactly_one_shard() {
        for groups in 1..7 {
            for scenarios in 1..6 {
                for count in 1..=groups * scenarios {
                    for g in 0..groups {
                        for s in 0..scenarios {
                            let holders = (0..count)
                                .filter(|&index| {
                                    group_part(Shard { index, count }, g, groups)
                                        .is_some_and(|p| p.index < scenarios && p.holds(s))
                                })
                                .count();
                            assert_eq!(
                                holders, 1,
                                "group {g} of {groups}, scenario {s} of {scenarios}, {count} shards"
                            );
                        }
                    }
                }
            }
        }
    }
}
