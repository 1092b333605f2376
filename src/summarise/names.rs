//! What to call a scenario in tables and sentences. In a run of one member with one method
//! combination a scenario is its offsets (`40 km left`, column tag `c+40_a0`); in a case of
//! several members or methods the summaries pool every group's scenarios, and a pooled
//! scenario is also named by its group (`member 'north', 40 km left`, tag
//! `north_c+40_a0`).

use crate::scenario::Scenario;
use crate::units::Units;

/// Names of the scenarios a summary indexes (a run's, or every group's, group-major).
#[derive(Clone, Debug)]
pub struct ScenarioNames {
    /// The offsets of every indexed scenario.
    scenarios: Vec<Scenario>,
    /// Per group (group-major, `per_group` scenarios each): its words and its tag; empty for
    /// a single run.
    groups: Vec<GroupName>,
    /// Scenarios per group.
    per_group: usize,
}

/// How one group of an ensemble is named.
#[derive(Clone, Debug)]
pub struct GroupName {
    /// Plain words, e.g. `member 'north' with energy-area/growth-zone`.
    pub words: String,
    /// For column names, e.g. `north_growth-zone`.
    pub tag: String,
}

impl ScenarioNames {
    /// A single run's scenarios.
    pub fn single(scenarios: &[Scenario]) -> Self {
        Self {
            scenarios: scenarios.to_vec(),
            groups: Vec::new(),
            per_group: scenarios.len(),
        }
    }

    /// Every group's scenarios (each group runs `scenarios`), group-major.
    pub fn pooled(scenarios: &[Scenario], groups: Vec<GroupName>) -> Self {
        Self {
            scenarios: groups
                .iter()
                .flat_map(|_| scenarios.iter().copied())
                .collect(),
            groups,
            per_group: scenarios.len(),
        }
    }

    /// How many scenarios are indexed.
    pub fn len(&self) -> usize {
        self.scenarios.len()
    }

    /// Whether none is.
    pub fn is_empty(&self) -> bool {
        self.scenarios.is_empty()
    }

    /// Whether the scenarios come from several groups.
    pub fn is_pooled(&self) -> bool {
        !self.groups.is_empty()
    }

    /// The offsets of scenario `k`.
    pub fn scenario(&self, k: usize) -> &Scenario {
        &self.scenarios[k]
    }

    /// Every indexed scenario's offsets.
    pub fn scenarios(&self) -> &[Scenario] {
        &self.scenarios
    }

    /// The group of scenario `k`, if pooled.
    fn group(&self, k: usize) -> Option<&GroupName> {
        self.groups.get(k / self.per_group.max(1))
    }

    /// The words of scenario `k`'s group (`member 'north'`), if pooled.
    pub fn group_words(&self, k: usize) -> Option<&str> {
        self.group(k).map(|g| g.words.as_str())
    }

    /// Plain words: `40 km left` in a single run; `member 'north', 40 km left` (or
    /// `member 'north' as modelled`) when pooled.
    pub fn words(&self, k: usize, units: Units) -> String {
        let s = self.scenarios[k].in_words_in(units);
        match self.group(k) {
            None => s,
            Some(g) if self.scenarios[k].is_baseline() => format!("{} {s}", g.words),
            Some(g) => format!("{}, {s}", g.words),
        }
    }

    /// The column tag: [`Scenario::tag`], prefixed by the group's tag when pooled.
    pub fn tag(&self, k: usize) -> String {
        match self.group(k) {
            None => self.scenarios[k].tag(),
            Some(g) => format!("{}_{}", g.tag, self.scenarios[k].tag()),
        }
    }

    /// A band or table label: [`Scenario::label`], prefixed by the group's words when pooled.
    pub fn label(&self, k: usize) -> String {
        match self.group(k) {
            None => self.scenarios[k].label(),
            Some(g) => format!("{}: {}", g.words, self.scenarios[k].label()),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_single_run_is_named_by_its_offsets_and_a_pool_also_by_group() {
        let sc = [Scenario::BASELINE, Scenario::offset(40.0, 0.0)];
        let one = ScenarioNames::single(&sc);
        assert_eq!(one.words(1, Units::Metric), "40 km left");
        assert_eq!(one.tag(1), "c+40_a0");
        let pool = ScenarioNames::pooled(
            &sc,
            vec![
                GroupName {
                    words: "member 'a'".into(),
                    tag: "a".into(),
                },
                GroupName {
                    words: "member 'b'".into(),
                    tag: "b".into(),
                },
            ],
        );
        assert_eq!(pool.len(), 4);
        assert_eq!(pool.words(2, Units::Metric), "member 'b' as modelled");
        assert_eq!(pool.words(3, Units::Metric), "member 'b', 40 km left");
        assert_eq!(pool.tag(1), "a_c+40_a0");
        assert_eq!(pool.label(3), "member 'b': cross +40 km, along 0 km");
    }
}
