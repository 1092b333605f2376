//! Which scenarios a shard computes. Apart from the shard file code so that the engine can take
//! a shard without depending on the file format or the merge.

/// Which scenarios a run computes: shard `index` (0-based) of `count` takes the scenarios whose
/// position in [`crate::scenario::scenario_product`]'s order leaves remainder `index` when divided by `count`.
/// Interleaved rather than in blocks, so shards get offsets from across the whole range and take
/// about the same time. Scenarios share nothing, so the shards' totals put side by side are the
/// totals of one run, bit for bit ([`crate::shard`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Shard {
    /// 0-based.
    pub index: usize,
    /// Number of shards, at least 1.
    pub count: usize,
}

impl Shard {
    /// Parses `K/N` (1 ≤ K ≤ N, as a batch scheduler's array index counts).
    ///
    /// ```
    /// use trackswing::shard::Shard;
    /// assert_eq!(Shard::parse("2/3"), Some(Shard { index: 1, count: 3 }));
    /// assert_eq!(Shard::parse("0/3"), None);
    /// assert_eq!(Shard::parse("4/3"), None);
    /// ```
    pub fn parse(text: &str) -> Option<Shard> {
        let (k, n) = text.trim().split_once('/')?;
        let (k, n): (usize, usize) = (k.trim().parse().ok()?, n.trim().parse().ok()?);
        (1..=n).contains(&k).then_some(Shard {
            index: k - 1,
            count: n,
        })
    }

    /// True when scenario `i` belongs to this shard.
    pub fn holds(&self, i: usize) -> bool {
        i % self.count == self.index
    }

    /// `K/N`, 1-based.
    pub fn label(&self) -> String {
        format!("{}/{}", self.index + 1, self.count)
    }
}
