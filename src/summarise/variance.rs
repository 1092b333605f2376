//! Where a cell's spread comes from: the weighted variance of its total over every scenario,
//! split by the law of total variance into the part between members (their means differ), the
//! part between methods within a member, and the part within a member and method (the track
//! offsets and the other axes).
//!
//! With normalised weights `w_s`, the overall mean `μ`, member means `μ_m` (weight `W_m`) and
//! member-and-method means `μ_mk` (weight `W_mk`):
//!
//! ```text
//! Σ w_s (x_s − μ)²  =  Σ_m W_m (μ_m − μ)²  +  Σ_mk W_mk (μ_mk − μ_m)²  +  Σ_s w_s (x_s − μ_mk(s))²
//!      total               between members        between methods            within
//! ```
//!
//! (the law of total variance, Var X = E[Var(X | Y)] + Var(E[X | Y]), applied twice: Y the
//! member, then within a member Y the method; the nested-design sum of squares of the analysis
//! of variance). The three parts are each ≥ 0 and add up to the total in exact arithmetic; here
//! in f64, to rounding (tested against the total computed directly, and against numpy in
//! `tests/ref/check_spread.py`).
//!
//! Missing values follow the coverage rule of the other summaries: a cell is decomposed over
//! the scenarios with a value, weights renormalised, when they carry at least `min_coverage` of
//! the weight; otherwise it is missing.

use rayon::prelude::*;

/// A standard deviation below this (mm of snow) is no spread: every scenario agrees (most
/// often, no snow anywhere), and the dominant-source map says so rather than naming a source.
pub const NO_SPREAD_MM: f32 = 0.05;

/// Which member and which method combination a scenario belongs to.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Group {
    /// Member index.
    pub member: usize,
    /// Method-combination index.
    pub method: usize,
}

/// The variance of one cell's total and its three parts (units², e.g. mm²).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Parts {
    /// Weighted variance over every scenario.
    pub total: f64,
    /// Between the members' weighted means.
    pub members: f64,
    /// Between the methods' means within each member.
    pub methods: f64,
    /// Within each member and method: the track offsets and the other axes.
    pub within: f64,
}

impl Parts {
    /// The share (0–1) of the total from members, methods and within; `None` where the total
    /// is zero (every scenario agrees: no spread to attribute).
    pub fn shares(&self) -> Option<[f64; 3]> {
        (self.total > 0.0).then(|| {
            [
                self.members / self.total,
                self.methods / self.total,
                self.within / self.total,
            ]
        })
    }
}

/// The parts of one cell's variance from `(value, weight, group)` of the scenarios with a value
/// (weights need not be normalised); `None` when the weights add up to zero.
pub fn parts(values: &[(f64, f64, Group)]) -> Option<Parts> {
    let total_w: f64 = values.iter().map(|v| v.1).sum();
    if total_w <= 0.0 || values.is_empty() {
        return None;
    }
    // Sums of weight and weighted value per (member, method) pair, found by linear search (a
    // case has a handful of each).
    let mut pairs: Vec<(Group, f64, f64)> = Vec::new();
    for &(x, w, g) in values {
        match pairs.iter_mut().find(|p| p.0 == g) {
            Some(p) => {
                p.1 += w;
                p.2 += w * x;
            }
            None => pairs.push((g, w, w * x)),
        }
    }
    // A pair without weight (its scenarios with data all weigh 0) adds nothing to any part.
    let pair_means: Vec<(Group, f64, f64)> = pairs
        .iter()
        .filter(|p| p.1 > 0.0)
        .map(|&(g, w, wx)| (g, w, wx / w))
        .collect();
    // Each level's mean is the weighted mean of the means below it, and exactly their common
    // value when they agree, so that groups that agree give parts of exactly 0.
    let mut members: Vec<(usize, f64, f64)> = Vec::new();
    for m in pair_means.iter().map(|p| p.0.member) {
        if members.iter().any(|e| e.0 == m) {
            continue;
        }
        let below: Vec<(f64, f64)> = pair_means
            .iter()
            .filter(|p| p.0.member == m)
            .map(|p| (p.1, p.2))
            .collect();
        members.push((m, below.iter().map(|b| b.0).sum(), blend(&below)));
    }
    let mean = blend(&members.iter().map(|e| (e.1, e.2)).collect::<Vec<_>>());
    let member_mean = |m: usize| members.iter().find(|e| e.0 == m).map_or(mean, |e| e.2);
    let pair_mean = |g: Group| pair_means.iter().find(|e| e.0 == g).map_or(mean, |e| e.2);
    let between_members: f64 = members
        .iter()
        .map(|&(_, w, m)| w * (m - mean).powi(2))
        .sum();
    let between_methods: f64 = pair_means
        .iter()
        .map(|&(g, w, m)| w * (m - member_mean(g.member)).powi(2))
        .sum();
    let (total, within) = values.iter().fold((0.0, 0.0), |(t, i), &(x, w, g)| {
        (
            t + w * (x - mean).powi(2),
            i + w * (x - pair_mean(g)).powi(2),
        )
    });
    Some(Parts {
        total: total / total_w,
        members: between_members / total_w,
        methods: between_methods / total_w,
        within: within / total_w,
    })
}

/// The weighted mean of `(weight, value)` pairs; exactly the common value when every value is
/// the same.
fn blend(v: &[(f64, f64)]) -> f64 {
    match v.first() {
        Some(&(_, first)) if v.iter().all(|e| e.1 == first) => first,
        _ => {
            let w: f64 = v.iter().map(|e| e.0).sum();
            v.iter().map(|e| e.0 * e.1).sum::<f64>() / w
        }
    }
}

/// Per-cell layers of the decomposition, as standard deviations (the square root of each part,
/// in the values' units) and shares; NaN where missing (coverage) or, for the shares, where
/// every scenario agrees.
#[derive(Clone, Debug)]
pub struct SpreadLayers {
    /// √total, √members, √methods, √within.
    pub sd: [Vec<f32>; 4],
    /// Shares of the total from members, methods, within.
    pub share: [Vec<f32>; 3],
}

/// The decomposition at every cell: `value(s, i)` is scenario `s`'s total at cell `i` (NaN
/// when missing), `weights` the scenarios' normalised weights and `groups` their member and
/// method; cells summarised over the scenarios with a value where they carry at least
/// `min_coverage` of the weight.
pub fn spread_layers(
    cells: usize,
    weights: &[f64],
    groups: &[Group],
    min_coverage: f64,
    value: impl Fn(usize, usize) -> f32 + Sync,
) -> SpreadLayers {
    const BLOCK: usize = 4096;
    // Cells in parallel blocks; each cell depends on itself only, so the bits do not depend on
    // the thread count.
    let per_cell: Vec<Option<Parts>> = (0..cells)
        .into_par_iter()
        .with_min_len(BLOCK)
        .map_init(Vec::new, |buf: &mut Vec<(f64, f64, Group)>, i| {
            buf.clear();
            let mut carried = 0.0;
            for (s, (&w, &g)) in weights.iter().zip(groups).enumerate() {
                let x = value(s, i);
                if !x.is_nan() {
                    carried += w;
                    buf.push((x as f64, w, g));
                }
            }
            let all: f64 = weights.iter().sum();
            if all <= 0.0 || carried < min_coverage * all - 1e-12 {
                return None;
            }
            parts(buf)
        })
        .collect();
    let layer = |f: &dyn Fn(&Parts) -> f32| -> Vec<f32> {
        per_cell
            .iter()
            .map(|p| p.as_ref().map_or(f32::NAN, f))
            .collect()
    };
    let share = |k: usize| layer(&|p: &Parts| p.shares().map_or(f32::NAN, |s| s[k] as f32));
    SpreadLayers {
        sd: [
            layer(&|p: &Parts| p.total.sqrt() as f32),
            layer(&|p: &Parts| p.members.sqrt() as f32),
            layer(&|p: &Parts| p.methods.sqrt() as f32),
            layer(&|p: &Parts| p.within.sqrt() as f32),
        ],
        share: [share(0), share(1), share(2)],
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn g(member: usize, method: usize) -> Group {
        Group { member, method }
    }

    /// A small deterministic generator (xorshift64*, Vigna 2016), so the random fields are
    /// the same on every run.
    fn rng(seed: u64) -> impl FnMut() -> f64 {
        let mut s = seed;
        move || {
            s ^= s >> 12;
            s ^= s << 25;
            s ^= s >> 27;
            (s.wrapping_mul(0x2545_f491_4f6c_dd1d) >> 11) as f64 / (1u64 << 53) as f64
        }
    }

    #[test]
    fn parts_add_up_to_the_total_on_random_values() {
        let mut r = rng(7);
        for _ in 0..500 {
            let n = 2 + (r() * 40.0) as usize;
            let v: Vec<(f64, f64, Group)> = (0..n)
                .map(|_| {
                    (
                        r() * 300.0,
                        r() + 0.01,
                        g((r() * 3.0) as usize, (r() * 2.0) as usize),
                    )
                })
                .collect();
            let p = parts(&v).unwrap();
            let sum = p.members + p.methods + p.within;
            assert!(
                (sum - p.total).abs() <= 1e-9 * p.total.max(1.0),
                "{p:?}: parts add to {sum}"
            );
            assert!(p.members >= 0.0 && p.methods >= 0.0 && p.within >= 0.0);
            // The total is the plain weighted variance (its definition, computed directly).
            let w: f64 = v.iter().map(|e| e.1).sum();
            let m = v.iter().map(|e| e.0 * e.1).sum::<f64>() / w;
            let var = v.iter().map(|e| e.1 * (e.0 - m).powi(2)).sum::<f64>() / w;
            assert!((var - p.total).abs() <= 1e-9 * var.max(1.0));
        }
    }

    #[test]
    fn identical_members_and_agreeing_methods_have_no_part() {
        // Two members with the same values scenario by scenario: nothing between members.
        let xs = [3.0, 7.0, 12.0, 4.0];
        let mut v = Vec::new();
        for m in 0..2 {
            for (k, x) in xs.iter().enumerate() {
                v.push((*x, 1.0 + k as f64, g(m, 0)));
            }
        }
        let p = parts(&v).unwrap();
        assert_eq!(p.members, 0.0);
        assert_eq!(p.methods, 0.0);
        assert!((p.within - p.total).abs() < 1e-12);
        // Two methods that agree everywhere: nothing between methods.
        let v: Vec<_> = (0..2)
            .flat_map(|k| xs.iter().map(move |x| (*x, 1.0, g(0, k))))
            .collect();
        assert_eq!(parts(&v).unwrap().methods, 0.0);
    }

    #[test]
    fn members_that_differ_by_a_constant_give_the_between_member_part_of_two_points() {
        // Two equally weighted members whose values differ by d everywhere: between-member
        // variance of two points ±d/2 around the mean is d²/4.
        let d = 10.0;
        let v: Vec<_> = [1.0, 2.0, 6.0]
            .iter()
            .flat_map(|x| [(*x, 1.0, g(0, 0)), (*x + d, 1.0, g(1, 0))])
            .collect();
        let p = parts(&v).unwrap();
        assert!((p.members - d * d / 4.0).abs() < 1e-12, "{p:?}");
        assert_eq!(p.shares().map(|s| s[1]), Some(0.0));
    }

    #[test]
    fn layers_follow_the_coverage_rule() {
        // Two scenarios of weight 0.5 each; the second missing at cell 1: coverage 0.5.
        let vals = [[1.0f32, 2.0], [3.0, f32::NAN]];
        let groups = [g(0, 0), g(1, 0)];
        let l = spread_layers(2, &[0.5, 0.5], &groups, 0.9, |s, i| vals[s][i]);
        assert!((l.sd[0][0] - 1.0).abs() < 1e-6 && (l.sd[1][0] - 1.0).abs() < 1e-6);
        assert!(l.sd[0][1].is_nan());
        let l = spread_layers(2, &[0.5, 0.5], &groups, 0.5, |s, i| vals[s][i]);
        assert_eq!(l.sd[0][1], 0.0);
        assert!(l.share[0][1].is_nan(), "no spread: no share");
    }
}
