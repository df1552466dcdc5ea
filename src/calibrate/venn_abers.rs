//! Inductive Venn–Abers predictors.
//!
//! Math (Vovk & Petej 2014, UAI, "Venn-Abers predictors"): for a test score s,
//! add (s, 0) to the calibration sample, fit isotonic regression (PAV, with tied
//! scores merged as in [`super::isotonic`]) and read the fitted value at s: that
//! is p0(s). Adding (s, 1) instead gives p1(s). Then p0(s) ≤ p1(s), and the pair
//! is a multiprobability prediction that is valid in the Venn sense. For a single
//! probability we merge the pair as p = p1 / (1 − p0 + p1), the minimiser of the
//! worst-case log-loss regret (Vovk, Petej & Fedorova 2015, NeurIPS, "Large-scale
//! probabilistic predictors with and without guarantees of validity", eq. (1)).
//! The mean width p1 − p0 over the test scores is reported as `va_width`.
//!
//! Algorithm (the efficient form of Vovk, Petej & Fedorova 2015, section 2): sort
//! and merge the calibration scores once into k distinct scores with weights w_j
//! and label sums c_j, and form the cumulative-sum diagram (CSD) P_0 = (0, 0),
//! P_j = (Σ_{l≤j} w_l, Σ_{l≤j} c_l). A test score falls in one of 2k + 1 places:
//! below, between or above the distinct scores ("gaps", k + 1 of them) or on one
//! of them ("ties", k). Adding the test point with label y shifts the part of the
//! CSD left of the test point by (−1, −y); the fitted value at the test point is
//! the slope of the greatest convex minorant (GCM) of the shifted diagram over
//! the test point, i.e. the slope of the common lower tangent ("bridge") of the
//! GCM of the prefix P_0 … P_q (shifted) and the GCM of the suffix P_r … P_k,
//! with (q, r) = (j, j) for the gap after distinct score j and (j − 1, j) for a
//! tie with distinct score j. We scan the 2k + 1 places left to right: the prefix
//! GCM grows by the usual stack construction, and the suffix GCM, built once from
//! the right with a stack whose pops are logged, shrinks by undoing that log; the
//! bridge of two convex chains is found by a nested binary search. This gives
//! F0 and F1 at every place in O(k log² k) after the O(n log n) sort, and each
//! test score costs one binary search over the k distinct scores.
//!
//! Exactness: CSD coordinates are integer counts, every comparison is an exact
//! integer cross-product, and each value is one division of two integers, so the
//! result equals the brute-force refit (one PAV per test point) to the last bit.
//!
//! Edge behaviour: one class or no rows → [`FitError`]; a NaN calibration score →
//! [`FitError::Failed`]; a NaN test score predicts NaN. Infinite scores are
//! ordered as usual. Test scores outside the calibration range use the first or
//! last gap, which is the definition (no extrapolation rule is needed).

use super::state::{increasing, probability, MapState, SavedMap};
use super::{
    check_sample, Calibrator, FitError, Fitted, FittedMap, Method, ParamError, ScoreKind, Shape,
};
use serde::{Deserialize, Serialize};

/// The Venn–Abers method (and its calibrator); it takes no parameters.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct VennAbers {}

impl Method for VennAbers {
    fn kind(&self) -> &'static str {
        "venn-abers"
    }
    fn keys(&self) -> &'static [(&'static str, &'static str)] {
        &[]
    }
    fn shape(&self) -> Shape {
        Shape::Flexible
    }
    fn validate(&self, _score_kind: ScoreKind) -> Result<(), ParamError> {
        Ok(())
    }
    fn calibrator(&self, _score_kind: ScoreKind) -> Box<dyn Calibrator> {
        Box::new(VennAbers {})
    }
}

type Pt = (i64, i64);

/// Cross product (b − a) × (c − a); positive for a strict left turn.
fn cross(a: Pt, b: Pt, c: Pt) -> i128 {
    let (abx, aby) = ((b.0 - a.0) as i128, (b.1 - a.1) as i128);
    let (acx, acy) = ((c.0 - a.0) as i128, (c.1 - a.1) as i128);
    abx * acy - aby * acx
}

/// slope(a, b) < slope(c, d) for a.x < b.x and c.x < d.x.
fn slope_lt(a: Pt, b: Pt, c: Pt, d: Pt) -> bool {
    let (n1, d1) = ((b.1 - a.1) as i128, (b.0 - a.0) as i128);
    let (n2, d2) = ((d.1 - c.1) as i128, (d.0 - c.0) as i128);
    n1 * d2 < n2 * d1
}

/// Slope of the common lower tangent of the convex chains `left` (shifted by
/// `shift`) and `right`, which lies wholly to the right of the shifted `left`.
/// `right_at(j)` gives the right chain's vertices from left to right.
fn bridge(left: &[Pt], shift: Pt, n_right: usize, right_at: impl Fn(usize) -> Pt) -> f64 {
    let a = |i: usize| (left[i].0 + shift.0, left[i].1 + shift.1);
    // Tangent from a point q to the right chain: the vertex minimising slope(q, B_j).
    let tangent = |q: Pt| -> usize {
        let (mut lo, mut hi) = (0usize, n_right - 1);
        while lo < hi {
            let j = lo + (hi - lo) / 2;
            if slope_lt(right_at(j), right_at(j + 1), q, right_at(j)) {
                lo = j + 1;
            } else {
                hi = j;
            }
        }
        lo
    };
    let m = left.len();
    let (mut lo, mut hi) = (0usize, m - 1);
    while lo < hi {
        let i = lo + (hi - lo) / 2;
        let q = a(i);
        let t = right_at(tangent(q));
        if slope_lt(q, a(i + 1), q, t) {
            lo = i + 1;
        } else {
            hi = i;
        }
    }
    let q = a(lo);
    let t = right_at(tangent(q));
    (t.1 - q.1) as f64 / (t.0 - q.0) as f64
}

/// Distinct calibration scores with F0 and F1 at each of the 2k + 1 places:
/// place 2j is the gap with j distinct scores below, place 2j + 1 the tie with
/// distinct score j (0-based).
#[derive(Debug, Clone, PartialEq)]
pub struct VennAbersTable {
    pub scores: Vec<f64>,
    pub p0: Vec<f64>,
    pub p1: Vec<f64>,
}

impl VennAbersTable {
    /// Build the table from raw calibration pairs.
    pub fn new(scores: &[f64], labels: &[bool]) -> Result<Self, FitError> {
        check_sample(scores, labels)?;
        if scores.iter().any(|s| s.is_nan()) {
            return Err(FitError::Failed(
                "venn-abers: a calibration score is NaN".into(),
            ));
        }
        let mut distinct: Vec<f64> = Vec::new();
        // CSD points P_0 … P_k. -0.0 and 0.0 are one score, as in the
        // comparison used for ties.
        let mut csd: Vec<Pt> = vec![(0, 0)];
        super::score_order::for_each_distinct(
            scores,
            labels,
            super::score_order::KeySort::Auto,
            |s, rows, pos| {
                let prev = *csd.last().unwrap();
                distinct.push(s);
                csd.push((prev.0 + rows as i64, prev.1 + pos as i64));
            },
        );
        let k = distinct.len();

        // Suffix hulls from the right, with a log of what each push popped.
        let mut right: Vec<Pt> = Vec::with_capacity(k + 1);
        let mut popped: Vec<Pt> = Vec::new();
        let mut pops = vec![0usize; k + 1];
        for r in (0..=k).rev() {
            let p = csd[r];
            let mut c = 0;
            while right.len() >= 2 && cross(p, right[right.len() - 1], right[right.len() - 2]) <= 0
            {
                popped.push(right.pop().unwrap());
                c += 1;
            }
            pops[r] = c;
            right.push(p);
        }
        // Undo the push of P_r: the suffix hull then starts at P_{r+1}.
        let mut undo = |r: usize, right: &mut Vec<Pt>| {
            right.pop();
            for _ in 0..pops[r] {
                right.push(popped.pop().unwrap());
            }
        };

        let mut left: Vec<Pt> = vec![csd[0]];
        let mut p0 = Vec::with_capacity(2 * k + 1);
        let mut p1 = Vec::with_capacity(2 * k + 1);
        let place = |left: &[Pt], right: &[Pt], p0: &mut Vec<f64>, p1: &mut Vec<f64>| {
            let n = right.len();
            let at = |j: usize| right[n - 1 - j];
            p0.push(bridge(left, (-1, 0), n, at));
            p1.push(bridge(left, (-1, -1), n, at));
        };
        // Gap 0: prefix {P_0}, suffix from P_0.
        place(&left, &right, &mut p0, &mut p1);
        for (j, &p) in csd.iter().enumerate().skip(1) {
            // Tie with distinct score j: prefix up to P_{j−1}, suffix from P_j.
            undo(j - 1, &mut right);
            place(&left, &right, &mut p0, &mut p1);
            // Gap after distinct score j: prefix up to P_j, suffix from P_j.
            while left.len() >= 2 && cross(left[left.len() - 2], left[left.len() - 1], p) <= 0 {
                left.pop();
            }
            left.push(p);
            place(&left, &right, &mut p0, &mut p1);
        }
        Ok(VennAbersTable {
            scores: distinct,
            p0,
            p1,
        })
    }

    /// The place of a test score (see the type's doc); `None` for NaN.
    pub fn place(&self, s: f64) -> Option<usize> {
        if s.is_nan() {
            return None;
        }
        let j = self.scores.partition_point(|&d| d < s);
        if j < self.scores.len() && self.scores[j] == s {
            Some(2 * j + 1)
        } else {
            Some(2 * j)
        }
    }

    /// (p0, p1) for a test score; NaN pair for a NaN score.
    pub fn pair(&self, s: f64) -> (f64, f64) {
        match self.place(s) {
            Some(i) => (self.p0[i], self.p1[i]),
            None => (f64::NAN, f64::NAN),
        }
    }
}

/// Merge a Venn–Abers pair into one probability: p1 / (1 − p0 + p1).
pub fn merge_pair(p0: f64, p1: f64) -> f64 {
    let d = 1.0 - p0 + p1;
    if d > 0.0 {
        (p1 / d).clamp(0.0, 1.0)
    } else {
        p1
    }
}

struct VennAbersMap {
    table: VennAbersTable,
}

impl FittedMap for VennAbersMap {
    fn predict(&self, scores: &[f64], out: &mut [f64]) {
        for (o, &s) in out.iter_mut().zip(scores) {
            let (p0, p1) = self.table.pair(s);
            *o = merge_pair(p0, p1);
        }
    }
    fn state(&self) -> MapState {
        let t = &self.table;
        let gaps = |v: &[f64]| v.iter().step_by(2).copied().collect::<Vec<_>>();
        let ties = |v: &[f64]| v.iter().skip(1).step_by(2).copied().collect::<Vec<_>>();
        MapState::VennAbers(VennAbersState {
            scores: t.scores.clone(),
            gap_p0: gaps(&t.p0),
            gap_p1: gaps(&t.p1),
            tie_p0: ties(&t.p0),
            tie_p1: ties(&t.p1),
        })
    }
    fn extras(&self, test_scores: &[f64]) -> Vec<(&'static str, f64)> {
        let (mut sum, mut n) = (0.0, 0usize);
        for &s in test_scores {
            let (p0, p1) = self.table.pair(s);
            if !p0.is_nan() {
                sum += p1 - p0;
                n += 1;
            }
        }
        let mean = if n > 0 { sum / n as f64 } else { f64::NAN };
        vec![("va_width", mean)]
    }
}

/// The saved Venn–Abers table: the pairs at each gap (below, between, above
/// the distinct calibration scores) and each tie (on a distinct score).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(
    deny_unknown_fields,
    expecting = "struct variant MapState::VennAbers with 5 elements"
)]
pub struct VennAbersState {
    pub scores: Vec<f64>,
    pub gap_p0: Vec<f64>,
    pub gap_p1: Vec<f64>,
    pub tie_p0: Vec<f64>,
    pub tie_p1: Vec<f64>,
}

impl SavedMap for VennAbersState {
    fn kind(&self) -> &'static str {
        "venn-abers"
    }
    fn summary(&self) -> Vec<String> {
        vec![format!(
            "{} distinct calibration scores (a probability pair per score and gap)",
            self.scores.len()
        )]
    }
    fn check(&self) -> Result<(), String> {
        increasing("scores", &self.scores)?;
        let k = self.scores.len();
        for (name, v, want) in [
            ("gap_p0", &self.gap_p0, k + 1),
            ("gap_p1", &self.gap_p1, k + 1),
            ("tie_p0", &self.tie_p0, k),
            ("tie_p1", &self.tie_p1, k),
        ] {
            if v.len() != want {
                return Err(format!(
                    "{k} scores need {want} values in {name}, found {}",
                    v.len()
                ));
            }
            for (i, &p) in v.iter().enumerate() {
                probability(name, i, p)?;
            }
        }
        for (name, p0, p1) in [
            ("gap", &self.gap_p0, &self.gap_p1),
            ("tie", &self.tie_p0, &self.tie_p1),
        ] {
            if let Some(i) = (0..p0.len()).find(|&i| p0[i] > p1[i]) {
                return Err(format!(
                    "{name}_p0[{i}] = {} exceeds {name}_p1[{i}] = {}",
                    p0[i], p1[i]
                ));
            }
        }
        Ok(())
    }
    fn restore(&self) -> Box<dyn FittedMap> {
        let interleave = |gap: &[f64], tie: &[f64]| {
            let mut v = Vec::with_capacity(gap.len() + tie.len());
            for (i, &g) in gap.iter().enumerate() {
                v.push(g);
                if let Some(&t) = tie.get(i) {
                    v.push(t);
                }
            }
            v
        };
        Box::new(VennAbersMap {
            table: VennAbersTable {
                p0: interleave(&self.gap_p0, &self.tie_p0),
                p1: interleave(&self.gap_p1, &self.tie_p1),
                scores: self.scores.clone(),
            },
        })
    }
    fn range_rule(&self) -> &'static str {
        "they take the pair of the gap below the first or above the last calibration score (clamped to the fitted range)"
    }
}

impl Calibrator for VennAbers {
    fn kind(&self) -> &'static str {
        "venn-abers"
    }
    fn fit(&self, scores: &[f64], labels: &[bool]) -> Result<Fitted, FitError> {
        let table = VennAbersTable::new(scores, labels)?;
        Ok(Fitted::plain(Box::new(VennAbersMap { table })))
    }
}

/// The definition, one PAV refit per test score: (p0, p1) at `s`. For tests and
/// for checking the fast table; O(n log n) per call.
pub fn brute_force_pair(scores: &[f64], labels: &[bool], s: f64) -> (f64, f64) {
    let value_at = |y: bool| {
        let mut sc = scores.to_vec();
        let mut lb = labels.to_vec();
        sc.push(s);
        lb.push(y);
        let blocks = super::isotonic::fit_blocks(&sc, &lb);
        blocks
            .iter()
            .find(|b| b.lo <= s && s <= b.hi)
            .map(|b| b.value)
            .unwrap_or(f64::NAN)
    };
    (value_at(false), value_at(true))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::split::rng;
    use rand_chacha::rand_core::Rng;

    /// Worked by hand from the definition: calibration (1,0), (2,1), (3,0), (4,1).
    /// Test s = 2.5 with label 0: labels 0,1,0,0,1 at 1,2,2.5,3,4; PAV pools
    /// {2,2.5} = 1/2, then {2,2.5,3} = 1/3, so p0 = 1/3. With label 1: labels
    /// 0,1,1,0,1; PAV pools {2.5,3} = 1/2, which {2} = 1 violates, so it pools
    /// {2,2.5,3} = 2/3, and p1 = 2/3.
    #[test]
    fn hand_checked_pair() {
        let s = [1.0, 2.0, 3.0, 4.0];
        let y = [false, true, false, true];
        let t = VennAbersTable::new(&s, &y).unwrap();
        let (p0, p1) = t.pair(2.5);
        assert!((p0 - 1.0 / 3.0).abs() < 1e-15, "{p0}");
        assert!((p1 - 2.0 / 3.0).abs() < 1e-15, "{p1}");
        assert_eq!(brute_force_pair(&s, &y, 2.5), (p0, p1));
        assert!((merge_pair(p0, p1) - (2.0 / 3.0) / (1.0 + 1.0 / 3.0)).abs() < 1e-15);
    }

    fn random_case(seed: u64) -> (Vec<f64>, Vec<bool>, Vec<f64>) {
        let mut r = rng(seed);
        let n = 1 + (r.next_u64() % 30) as usize;
        let grid = 1 + r.next_u64() % 12; // few levels → many ties
        let mut s: Vec<f64> = (0..n).map(|_| (r.next_u64() % grid) as f64).collect();
        let mut y: Vec<bool> = (0..n).map(|_| r.next_u64() % 3 == 0).collect();
        // Both classes present.
        y[0] = true;
        if n == 1 {
            s.push(s[0]);
            y.push(false);
        } else {
            y[n - 1] = false;
        }
        let mut test: Vec<f64> = s.clone(); // equal to calibration scores
        test.extend((0..10).map(|i| -1.5 + i as f64 * (grid as f64 + 2.0) / 9.0)); // gaps, outside
        test.push(-1e9);
        test.push(1e9);
        (s, y, test)
    }

    /// The fast table equals the definition (one PAV refit per test point).
    #[test]
    fn fast_equals_brute_force_on_random_inputs() {
        for seed in 0..400u64 {
            let (s, y, test) = random_case(seed);
            let t = VennAbersTable::new(&s, &y).unwrap();
            for &x in &test {
                let (f0, f1) = t.pair(x);
                let (b0, b1) = brute_force_pair(&s, &y, x);
                assert!(
                    (f0 - b0).abs() <= 1e-12 && (f1 - b1).abs() <= 1e-12,
                    "seed {seed}, s = {x}: fast ({f0}, {f1}) vs brute force ({b0}, {b1})"
                );
                assert!(f0 <= f1, "p0 > p1 at seed {seed}");
            }
        }
    }

    #[test]
    fn edge_cases_return_errors_not_panics() {
        let v = VennAbers {};
        assert_eq!(v.fit(&[], &[]).err(), Some(FitError::Empty));
        assert_eq!(
            v.fit(&[0.1, 0.2], &[false, false]).err(),
            Some(FitError::OneClass {
                positives: 0,
                rows: 2
            })
        );
        assert!(matches!(
            v.fit(&[0.1, f64::NAN], &[true, false]),
            Err(FitError::Failed(_))
        ));
        let f = v
            .fit(
                &[f64::NEG_INFINITY, 0.0, f64::INFINITY],
                &[false, true, true],
            )
            .unwrap();
        let mut out = [0.0; 3];
        f.map.predict(&[f64::NAN, f64::INFINITY, -3.0], &mut out);
        assert!(out[0].is_nan());
        assert!(out[1..].iter().all(|p| (0.0..=1.0).contains(p)));
        let e = f.map.extras(&[0.5, 2.0]);
        assert_eq!(e.len(), 1);
        assert_eq!(e[0].0, "va_width");
        assert!(e[0].1 > 0.0 && e[0].1 <= 1.0);
    }

    /// `va_width` is the mean of p1 − p0 from the definition over the test scores.
    #[test]
    fn width_extra_is_the_mean_interval_width() {
        let (s, y, test) = random_case(5);
        let f = VennAbers {}.fit(&s, &y).unwrap();
        let want = test
            .iter()
            .map(|&x| {
                let (a, b) = brute_force_pair(&s, &y, x);
                b - a
            })
            .sum::<f64>()
            / test.len() as f64;
        let got = f.map.extras(&test);
        assert_eq!(got[0].0, "va_width");
        assert!((got[0].1 - want).abs() < 1e-12, "{} vs {want}", got[0].1);
    }
}
