//! Centered isotonic regression (CIR; Oron & Flournoy 2017, Statistics in
//! Biopharmaceutical Research 9, "Centered isotonic regression: point and
//! interval estimation for dose–response studies").
//!
//! Math: fit isotonic regression by PAV (ties merged first, as in `isotonic.rs`),
//! then pool adjacent blocks with equal values too (equal within 1e-12, to absorb
//! rounding), so the block values are strictly increasing. Each block of distinct scores x_j with row counts w_j is
//! replaced by a single point at its weighted-mean score x̄ = Σ w_j x_j / Σ w_j
//! with the block's value. The map interpolates linearly between consecutive
//! points and is flat (the end points' values) below the first and above the
//! last point. Inside [x̄_first, x̄_last] it is therefore strictly increasing,
//! unlike the step-like PAV fit, whose flat stretches are an artefact of pooling
//! rather than a property of the true curve. Where PAV pools nothing and the
//! values already increase strictly, every block is one distinct score and CIR
//! equals the isotonic map.
//!
//! Bounded outputs (`pseudo_count = m > 0`): the PAV blocks are shrunk toward the
//! base rate and re-pooled exactly as for `isotonic` (see `isotonic::shrink_blocks`,
//! which keeps the map monotone), before the equal-value pooling and centring;
//! all values then lie strictly inside (0, 1). Default m = 0 (plain CIR).

use super::isotonic::{base_rate, merge_ties, pav, shrink_blocks, StepLinear};
use super::state::{increasing, monotone, pseudo, sig, MapState, SavedMap};
use super::{
    check_pseudo_count, check_sample, Calibrator, FitError, Fitted, FittedMap, Method, ParamError,
    ScoreKind, Shape,
};
use serde::{Deserialize, Serialize};

/// Block values closer than this count as equal. Mathematically equal shrunk
/// values such as (3 + π)/7 and (6 + 2π)/14 can differ in the last bit, and
/// keeping both would leave a numerically flat piece.
pub const EQUAL_TOL: f64 = 1e-12;

/// Centered isotonic regression's parameters (and its calibrator).
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CenteredIsotonic {
    /// Pseudo-rows at the base rate per block (0 = plain CIR).
    #[serde(default)]
    pub pseudo_count: f64,
}

impl Method for CenteredIsotonic {
    fn kind(&self) -> &'static str {
        "centered-isotonic"
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

/// The CIR points (x̄, value), strictly increasing in both coordinates.
pub fn cir_points(groups: &[(f64, f64, f64)], pseudo_count: f64, base_rate: f64) -> StepLinear {
    let blocks = shrink_blocks(&pav(groups), pseudo_count, base_rate);
    let mut xs: Vec<f64> = Vec::with_capacity(blocks.len());
    let mut vs: Vec<f64> = Vec::with_capacity(blocks.len());
    // (lo, hi, Σ w x, Σ w) of the current pooled run.
    let mut gi = 0usize;
    let mut i = 0usize;
    while i < blocks.len() {
        let lo = blocks[i].lo;
        let mut hi = blocks[i].hi;
        let (mut vw, mut w) = (blocks[i].value * blocks[i].weight, blocks[i].weight);
        let mut j = i + 1;
        while j < blocks.len() && blocks[j].value - blocks[i].value <= EQUAL_TOL {
            hi = blocks[j].hi;
            vw += blocks[j].value * blocks[j].weight;
            w += blocks[j].weight;
            j += 1;
        }
        // Equal up to rounding: the row-weighted mean (exact when all are equal).
        let value = if j == i + 1 {
            blocks[i].value
        } else {
            (vw / w).clamp(blocks[i].value, blocks[j - 1].value)
        };
        let (mut swx, mut sw) = (0.0, 0.0);
        while gi < groups.len() && groups[gi].0 <= hi {
            swx += groups[gi].1 * groups[gi].0;
            sw += groups[gi].1;
            gi += 1;
        }
        // Clamp guards the order of the points against rounding in the mean.
        let centre = if sw > 0.0 {
            (swx / sw).clamp(lo, hi)
        } else {
            lo
        };
        xs.push(centre);
        vs.push(value);
        i = j;
    }
    StepLinear { xs, vs }
}

struct CirMap {
    curve: StepLinear,
    pseudo_count: f64,
}

impl FittedMap for CirMap {
    fn predict(&self, scores: &[f64], out: &mut [f64]) {
        for (o, &s) in out.iter_mut().zip(scores) {
            *o = self.curve.eval(s).clamp(0.0, 1.0);
        }
    }
    fn state(&self) -> MapState {
        MapState::CenteredIsotonic(CenteredIsotonicState {
            pseudo_count: self.pseudo_count,
            x: self.curve.xs.clone(),
            value: self.curve.vs.clone(),
        })
    }
}

/// The saved centered isotonic map: its points (x, value).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(
    deny_unknown_fields,
    expecting = "struct variant MapState::CenteredIsotonic with 3 elements"
)]
pub struct CenteredIsotonicState {
    pub pseudo_count: f64,
    pub x: Vec<f64>,
    pub value: Vec<f64>,
}

impl SavedMap for CenteredIsotonicState {
    fn kind(&self) -> &'static str {
        "centered-isotonic"
    }
    fn summary(&self) -> Vec<String> {
        let (n, lo, hi) = super::state::levels(self.value.iter().copied());
        vec![format!(
            "{} points, {n} distinct values from {} to {}, pseudo_count = {}",
            self.x.len(),
            sig(lo),
            sig(hi),
            sig(self.pseudo_count)
        )]
    }
    fn check(&self) -> Result<(), String> {
        pseudo(self.pseudo_count)?;
        increasing("x", &self.x)?;
        if self.x.len() != self.value.len() {
            return Err(format!(
                "x has {} points but value has {}",
                self.x.len(),
                self.value.len()
            ));
        }
        monotone("value", &self.value)
    }
    fn restore(&self) -> Box<dyn FittedMap> {
        Box::new(CirMap {
            curve: StepLinear {
                xs: self.x.clone(),
                vs: self.value.clone(),
            },
            pseudo_count: self.pseudo_count,
        })
    }
    fn range_rule(&self) -> &'static str {
        "the map is flat beyond its ends, so they get the end values (clamped to the fitted range)"
    }
}

impl Calibrator for CenteredIsotonic {
    fn kind(&self) -> &'static str {
        "centered-isotonic"
    }
    fn fit(&self, scores: &[f64], labels: &[bool]) -> Result<Fitted, FitError> {
        check_sample(scores, labels)?;
        if scores.iter().any(|s| !s.is_finite()) {
            return Err(FitError::Failed(
                "centered isotonic: non-finite score".into(),
            ));
        }
        let groups = merge_ties(scores, labels);
        let curve = cir_points(&groups, self.pseudo_count, base_rate(labels));
        Ok(Fitted::plain(Box::new(CirMap {
            curve,
            pseudo_count: self.pseudo_count,
        })))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Derived by hand (same sample as the isotonic PAV example): labels
    /// 1,0,1,0,0,1 at scores 1..6 pool to {1..5} = 0.4 and {6} = 1. CIR puts the
    /// first point at the mean score 3 and the second at 6.
    #[test]
    fn hand_checked_cir_example() {
        let s = [1.0, 2.0, 3.0, 4.0, 5.0, 6.0];
        let y = [true, false, true, false, false, true];
        let c = cir_points(&merge_ties(&s, &y), 0.0, 0.5);
        assert_eq!(c.xs, vec![3.0, 6.0]);
        assert!((c.vs[0] - 0.4).abs() < 1e-15);
        // Linear in between: at 4.5, 0.4 + 0.5·0.6 = 0.7; flat below 3.
        assert!((c.eval(4.5) - 0.7).abs() < 1e-12);
        assert!((c.eval(1.0) - 0.4).abs() < 1e-15);
    }

    /// Derived by hand: equal adjacent PAV values (1/2 at x=1 and x=2 with
    /// weights 2 and 4) are pooled into one point at (1·2 + 2·4)/6 = 5/3.
    #[test]
    fn equal_values_are_pooled() {
        let s = [1.0, 1.0, 2.0, 2.0, 2.0, 2.0, 3.0];
        let y = [true, false, true, false, true, false, true];
        let c = cir_points(&merge_ties(&s, &y), 0.0, 0.5);
        assert_eq!(c.xs.len(), 2);
        assert!((c.xs[0] - 5.0 / 3.0).abs() < 1e-15);
        assert_eq!(c.vs, vec![0.5, 1.0]);
    }
}
