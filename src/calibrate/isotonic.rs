//! Isotonic regression by pool-adjacent-violators (PAV).
//!
//! Math: given calibration pairs (s_i, y_i), find the non-decreasing function m
//! minimising Σ_i (y_i − m(s_i))². Zadrozny & Elkan (2002, KDD, "Transforming
//! classifier scores into accurate multiclass probability estimates") proposed it
//! for calibration; the PAV algorithm is due to Ayer, Brunk, Ewing, Reid &
//! Silverman (1955, Ann. Math. Statist. 26) and runs in O(n) after sorting.
//!
//! Ties: rows with equal scores must get equal fitted values, so tied scores are
//! first merged into one point with weight = count and value = mean label (the
//! "secondary" approach to ties of de Leeuw, 1977; it is what scikit-learn does).
//! Weighted PAV then pools adjacent violators into blocks whose value is the
//! weighted mean label.
//!
//! Prediction rule: the fit is defined at each distinct calibration score. A block
//! covering distinct scores [lo, hi] predicts its value on that interval; between
//! the `hi` of one block and the `lo` of the next the prediction is interpolated
//! linearly; below the smallest and above the largest calibration score it is the
//! end block's value (no extrapolation).
//!
//! Bounded outputs (`pseudo_count = m > 0`; the default m = 0 is the plain fit):
//! PAV values reach exactly 0 or 1 on end blocks, which gives infinite log loss
//! on a test row of the other class. With the calibration base rate π, each block
//! of w rows and k positives is first given m pseudo-rows at rate π, i.e. value
//! v' = (k + mπ)/(w + m) and weight w + m. Per-block shrinkage alone can break
//! monotonicity when weights differ (a heavy block at 0.8 stays near 0.8 while a
//! light block at 0.9 above it falls towards π), so weighted PAV is run again on
//! the (v', w + m) pairs. The result is non-decreasing by construction of PAV, and
//! every value is a weighted mean of values v' ∈ [mπ/(w + m), (w + mπ)/(w + m)],
//! so all outputs lie strictly inside (0, 1) whenever 0 < π < 1. A pooled run of
//! r original blocks has value (Σk + r·mπ)/(Σw + r·m): m pseudo-rows per original
//! PAV block. This is the Bayesian (beta-prior) shrinkage of a binomial rate
//! toward π (common practice; cf. the m-estimate of Cestnik 1990, ECAI), followed
//! by an isotonic projection.

use serde::{Deserialize, Serialize};

use super::score_order::{self, KeySort};
use super::state::{monotone, pseudo, ranges, sig, MapState, SavedMap};
use super::{
    check_pseudo_count, check_sample, Calibrator, FitError, Fitted, FittedMap, Method, ParamError,
    ScoreKind, Shape,
};

/// Isotonic regression's parameters (and its calibrator).
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Isotonic {
    /// Pseudo-rows at the base rate per block (0 = plain PAV; > 0 bounds the
    /// outputs strictly inside (0, 1)).
    #[serde(default)]
    pub pseudo_count: f64,
}

impl Method for Isotonic {
    fn kind(&self) -> &'static str {
        "isotonic"
    }
    fn keys(&self) -> &'static [(&'static str, &'static str)] {
        &[("pseudo_count", "a number >= 0")]
    }
    fn shape(&self) -> Shape {
        Shape::Flexible
    }

    fn predicts_zero_one(&self) -> bool {
        self.pseudo_count == 0.0
    }
    fn validate(&self, _score_kind: ScoreKind) -> Result<(), ParamError> {
        check_pseudo_count(self.pseudo_count)
    }
    fn calibrator(&self, _score_kind: ScoreKind) -> Box<dyn Calibrator> {
        Box::new(self.clone())
    }
}

/// One pooled block of a PAV fit over distinct scores.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Block {
    /// Smallest distinct score in the block.
    pub lo: f64,
    /// Largest distinct score in the block.
    pub hi: f64,
    /// Total weight (number of calibration rows).
    pub weight: f64,
    /// Weighted mean label = the fitted value.
    pub value: f64,
}

/// Sort pairs by score and merge ties: returns (distinct score, weight, sum of labels).
///
/// The sort and the merge are [`score_order::for_each_distinct`]: scores in
/// `f64::total_cmp` order, a run of scores equal under `==` (so −0.0 with 0.0)
/// is one point named by its first score. Weights and label sums are counts,
/// so the order in which tied rows are met does not change the result.
pub fn merge_ties(scores: &[f64], labels: &[bool]) -> Vec<(f64, f64, f64)> {
    let mut out: Vec<(f64, f64, f64)> = Vec::new();
    score_order::for_each_distinct(scores, labels, KeySort::Auto, |x, rows, pos| {
        out.push((x, rows as f64, pos as f64))
    });
    out
}

/// Weighted PAV on points already sorted by `x` with distinct `x`:
/// `points[j] = (x, weight, weighted sum of y)`.
pub fn pav(points: &[(f64, f64, f64)]) -> Vec<Block> {
    let mut state = PavState::with_capacity(points.len());
    for &(x, w, sy) in points {
        state.push(x, w, sy);
    }
    state.blocks
}

/// The PAV stack: blocks so far and their label sums.
struct PavState {
    blocks: Vec<Block>,
    // Keep the running sum of labels in `value * weight` form to avoid drift.
    sums: Vec<f64>,
}

impl PavState {
    fn with_capacity(n: usize) -> Self {
        PavState {
            blocks: Vec::with_capacity(n),
            sums: Vec::with_capacity(n),
        }
    }

    /// Add the next point (larger `x` than all before) and pool violators.
    fn push(&mut self, x: f64, w: f64, sy: f64) {
        let blocks = &mut self.blocks;
        let sums = &mut self.sums;
        blocks.push(Block {
            lo: x,
            hi: x,
            weight: w,
            value: sy / w,
        });
        sums.push(sy);
        while blocks.len() >= 2 {
            let n = blocks.len();
            if blocks[n - 2].value <= blocks[n - 1].value {
                break;
            }
            let last = blocks.pop().unwrap();
            let last_sum = sums.pop().unwrap();
            let prev = blocks.last_mut().unwrap();
            let prev_sum = sums.last_mut().unwrap();
            prev.hi = last.hi;
            prev.weight += last.weight;
            *prev_sum += last_sum;
            prev.value = *prev_sum / prev.weight;
        }
    }
}

/// Bounded form of a PAV fit (see the module doc): each block gets
/// `pseudo_count` pseudo-rows at `base_rate`, then adjacent violators are pooled
/// again with weights `weight + pseudo_count`. The returned blocks keep the row
/// count in `weight`. With `pseudo_count == 0` the blocks are returned unchanged.
pub fn shrink_blocks(blocks: &[Block], pseudo_count: f64, base_rate: f64) -> Vec<Block> {
    if pseudo_count <= 0.0 {
        return blocks.to_vec();
    }
    let m = pseudo_count;
    // (block, PAV weight, PAV weighted sum)
    let mut out: Vec<(Block, f64, f64)> = Vec::with_capacity(blocks.len());
    for b in blocks {
        let pw = b.weight + m;
        let ps = b.value * b.weight + m * base_rate;
        let mut nb = b.clone();
        nb.value = ps / pw;
        out.push((nb, pw, ps));
        while out.len() >= 2 {
            let n = out.len();
            if out[n - 2].0.value <= out[n - 1].0.value {
                break;
            }
            let (last, lw, ls) = out.pop().unwrap();
            let prev = out.last_mut().unwrap();
            prev.0.hi = last.hi;
            prev.0.weight += last.weight;
            prev.1 += lw;
            prev.2 += ls;
            prev.0.value = prev.2 / prev.1;
        }
    }
    out.into_iter().map(|(b, _, _)| b).collect()
}

/// Fraction of positive labels.
pub fn base_rate(labels: &[bool]) -> f64 {
    labels.iter().filter(|&&l| l).count() as f64 / labels.len() as f64
}

/// A piecewise-linear non-decreasing map through knots (x, v), flat outside.
#[derive(Debug, Clone)]
pub struct StepLinear {
    pub xs: Vec<f64>,
    pub vs: Vec<f64>,
}

impl StepLinear {
    /// Knots at each block's `lo` and `hi` (one knot when they coincide).
    pub fn from_blocks(blocks: &[Block]) -> Self {
        let mut xs = Vec::with_capacity(blocks.len() * 2);
        let mut vs = Vec::with_capacity(blocks.len() * 2);
        for b in blocks {
            xs.push(b.lo);
            vs.push(b.value);
            if b.hi > b.lo {
                xs.push(b.hi);
                vs.push(b.value);
            }
        }
        StepLinear { xs, vs }
    }

    pub fn eval(&self, s: f64) -> f64 {
        let n = self.xs.len();
        if s.is_nan() {
            return f64::NAN;
        }
        if s <= self.xs[0] {
            return self.vs[0];
        }
        if s >= self.xs[n - 1] {
            return self.vs[n - 1];
        }
        // First knot strictly greater than s.
        let j = self.xs.partition_point(|&x| x <= s);
        let (x0, x1, v0, v1) = (self.xs[j - 1], self.xs[j], self.vs[j - 1], self.vs[j]);
        if x1 == x0 {
            return v1;
        }
        let mut t = (s - x0) / (x1 - x0);
        if !(x1 - x0).is_finite() {
            // Knots at opposite ends of the double range: their distance
            // overflows (∞/∞ would be NaN), half of it does not.
            t = (s / 2.0 - x0 / 2.0) / (x1 / 2.0 - x0 / 2.0);
        }
        (v0 + t * (v1 - v0)).clamp(v0.min(v1), v0.max(v1))
    }
}

struct IsotonicMap {
    blocks: Vec<Block>,
    curve: StepLinear,
    pseudo_count: f64,
}

impl FittedMap for IsotonicMap {
    fn predict(&self, scores: &[f64], out: &mut [f64]) {
        for (o, &s) in out.iter_mut().zip(scores) {
            *o = self.curve.eval(s).clamp(0.0, 1.0);
        }
    }
    fn state(&self) -> MapState {
        MapState::Isotonic(IsotonicState {
            pseudo_count: self.pseudo_count,
            blocks: self.blocks.clone(),
        })
    }
}

/// The saved isotonic map: its PAV blocks.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(
    deny_unknown_fields,
    expecting = "struct variant MapState::Isotonic with 2 elements"
)]
pub struct IsotonicState {
    pub pseudo_count: f64,
    pub blocks: Vec<Block>,
}

impl SavedMap for IsotonicState {
    fn kind(&self) -> &'static str {
        "isotonic"
    }
    fn summary(&self) -> Vec<String> {
        let (n, lo, hi) = super::state::levels(self.blocks.iter().map(|b| b.value));
        vec![format!(
            "{n} steps ({} blocks) from {} to {}, pseudo_count = {}",
            self.blocks.len(),
            sig(lo),
            sig(hi),
            sig(self.pseudo_count)
        )]
    }
    fn check(&self) -> Result<(), String> {
        pseudo(self.pseudo_count)?;
        let r: Vec<(f64, f64)> = self.blocks.iter().map(|b| (b.lo, b.hi)).collect();
        ranges("blocks", &r)?;
        for (i, b) in self.blocks.iter().enumerate() {
            if !(b.weight.is_finite() && b.weight > 0.0) {
                return Err(format!("blocks[{i}].weight = {} must be above 0", b.weight));
            }
        }
        let v: Vec<f64> = self.blocks.iter().map(|b| b.value).collect();
        monotone("blocks.value", &v)
    }
    fn restore(&self) -> Box<dyn FittedMap> {
        let blocks = self.blocks.clone();
        let curve = StepLinear::from_blocks(&blocks);
        Box::new(IsotonicMap {
            blocks,
            curve,
            pseudo_count: self.pseudo_count,
        })
    }
    fn range_rule(&self) -> &'static str {
        "the map is flat beyond its ends, so they get the end values (clamped to the fitted range)"
    }
}

/// Fit PAV on raw (unsorted, possibly tied) calibration pairs.
///
/// Same result as `pav(&merge_ties(scores, labels))`, but the merged points are
/// streamed into PAV straight from the sort instead of being stored.
pub fn fit_blocks(scores: &[f64], labels: &[bool]) -> Vec<Block> {
    fit_blocks_with(scores, labels, KeySort::Auto)
}

/// [`fit_blocks`] with a chosen key sort (every choice gives the same blocks).
pub fn fit_blocks_with(scores: &[f64], labels: &[bool], how: KeySort) -> Vec<Block> {
    // Blocks are at most as many as distinct scores; the stack rarely gets deep,
    // so reserve little and let it grow.
    let mut state = PavState::with_capacity(1024.min(scores.len()));
    score_order::for_each_distinct(scores, labels, how, |x, rows, pos| {
        state.push(x, rows as f64, pos as f64)
    });
    state.blocks
}

impl Calibrator for Isotonic {
    fn kind(&self) -> &'static str {
        "isotonic"
    }
    fn fit(&self, scores: &[f64], labels: &[bool]) -> Result<Fitted, FitError> {
        check_sample(scores, labels)?;
        let plain = fit_blocks(scores, labels);
        let blocks = shrink_blocks(&plain, self.pseudo_count, base_rate(labels));
        let curve = StepLinear::from_blocks(&blocks);
        Ok(Fitted::plain(Box::new(IsotonicMap {
            blocks,
            curve,
            pseudo_count: self.pseudo_count,
        })))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Derived by hand: labels 1,0,1,0,0,1 at scores 1..6.
    /// (1) is followed by (0): pool to 0.5 over {1,2}. Then 1 at 3, 0 at 4 pool to
    /// 0.5 over {3,4}; 0 at 5 violates 0.5: pool {3,4,5} = 1/3 which now violates
    /// the block {1,2} = 0.5, so pool {1..5} = 2/5 = 0.4. Then 1 at 6 stays.
    #[test]
    fn hand_checked_pav_example() {
        let s = [1.0, 2.0, 3.0, 4.0, 5.0, 6.0];
        let y = [true, false, true, false, false, true];
        let b = fit_blocks(&s, &y);
        assert_eq!(b.len(), 2);
        assert!((b[0].value - 0.4).abs() < 1e-15);
        assert_eq!((b[0].lo, b[0].hi, b[0].weight), (1.0, 5.0, 5.0));
        assert_eq!((b[1].lo, b[1].hi, b[1].value), (6.0, 6.0, 1.0));
    }

    /// Derived by hand: tied scores share one fitted value.
    #[test]
    fn ties_are_merged_first() {
        let s = [0.2, 0.2, 0.2, 0.7];
        let y = [true, false, false, true];
        let b = fit_blocks(&s, &y);
        assert_eq!(b.len(), 2);
        assert!((b[0].value - 1.0 / 3.0).abs() < 1e-15);
        let curve = StepLinear::from_blocks(&b);
        // Halfway between 0.2 and 0.7: linear between 1/3 and 1.
        assert!((curve.eval(0.45) - (1.0 / 3.0 + 0.5 * (2.0 / 3.0))).abs() < 1e-12);
        assert_eq!(curve.eval(-5.0), 1.0 / 3.0);
        assert_eq!(curve.eval(5.0), 1.0);
    }

    /// Derived by hand: blocks (w=8, k=0) and (w=2, k=2), base rate 0.2, m = 2.
    /// Shrunk: (0 + 0.4)/10 = 0.04 and (2 + 0.4)/4 = 0.6; already monotone.
    #[test]
    fn shrinkage_by_hand() {
        let b = vec![
            Block {
                lo: 0.0,
                hi: 1.0,
                weight: 8.0,
                value: 0.0,
            },
            Block {
                lo: 2.0,
                hi: 2.0,
                weight: 2.0,
                value: 1.0,
            },
        ];
        let s = shrink_blocks(&b, 2.0, 0.2);
        assert!((s[0].value - 0.04).abs() < 1e-15);
        assert!((s[1].value - 0.6).abs() < 1e-15);
    }

    /// Derived by hand: a heavy block at 0.8 (w=100) below a light block at 0.9
    /// (w=1), base rate 0.5, m = 4. Shrunk alone: (80 + 2)/104 = 0.78846… and
    /// (0.9 + 2)/5 = 0.58, a violation; re-pooling gives (82 + 2.9)/109.
    #[test]
    fn shrinkage_repools_violations() {
        let b = vec![
            Block {
                lo: 0.0,
                hi: 1.0,
                weight: 100.0,
                value: 0.8,
            },
            Block {
                lo: 2.0,
                hi: 2.0,
                weight: 1.0,
                value: 0.9,
            },
        ];
        let s = shrink_blocks(&b, 4.0, 0.5);
        assert_eq!(s.len(), 1);
        assert!((s[0].value - 84.9 / 109.0).abs() < 1e-14);
        assert_eq!((s[0].lo, s[0].hi, s[0].weight), (0.0, 2.0, 101.0));
    }

    /// The streamed fit equals PAV on the merged points (ties, -0.0 and 0.0).
    #[test]
    fn streamed_fit_equals_two_step_fit() {
        let s = [0.5, -0.0, 0.0, 0.5, 0.1, 0.9, 0.1, 0.3, 0.9, 0.2];
        let y = [
            true, false, true, false, true, false, false, true, true, false,
        ];
        assert_eq!(fit_blocks(&s, &y), pav(&merge_ties(&s, &y)));
        assert!(fit_blocks(&[], &[]).is_empty());
    }
}
