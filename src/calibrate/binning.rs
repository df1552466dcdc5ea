//! Histogram binning (Zadrozny & Elkan 2001, ICML, "Obtaining calibrated
//! probability estimates from decision trees and naive Bayesian classifiers").
//!
//! Math: sort the n calibration rows by score and cut them into B bins of (about)
//! equal mass; the calibrated probability of a score is the fraction of positives
//! among the calibration rows of its bin, k_j / n_j. Zadrozny & Elkan used B = 10,
//! which is the default here (`bins`).
//!
//! Bin edges: bin j (j = 0..B−1) nominally holds the rows of rank
//! ⌊j·n/B⌋ … ⌊(j+1)·n/B⌋ − 1 in score order. Ties at an edge: rows with equal
//! scores must share a bin (the map is a function of the score), so a tie group
//! that straddles a nominal edge goes wholly to the lower bin (the edge moves up
//! to the end of the group). Empty bins: when a bin would receive no rows (n < B,
//! or a tie group that swallowed the next nominal edges) it is dropped, so the
//! fit has at most min(B, number of distinct scores) bins, each non-empty.
//!
//! Small bins and bounded outputs: a bin's raw frequency is exactly 0 or 1 when
//! it is pure, which is common for small bins. With `pseudo_count = m > 0` the
//! estimate is (k_j + m·π)/(n_j + m), with π the calibration base rate: m
//! pseudo-rows at rate π (the beta-prior / m-estimate shrinkage, common
//! practice; Cestnik 1990, ECAI). It lies strictly inside (0, 1) when 0 < π < 1.
//! Binning is not a monotone method, so no re-pooling is needed. The default
//! m = 0 is the plain method.
//!
//! Prediction: a test score goes to the bin whose score range [lo_j, hi_j]
//! holds it; in the gap between two bins the dividing point is the midpoint
//! (hi_j + lo_{j+1})/2, with a score equal to the midpoint going to the lower bin;
//! scores below the first bin or above the last take the end bins. A NaN score
//! predicts NaN.

use serde::{Deserialize, Serialize};

use super::isotonic::{base_rate, merge_ties};
use super::state::{probability, pseudo, ranges, sig, MapState, SavedMap};
use super::{
    check_pseudo_count, check_sample, Calibrator, FitError, Fitted, FittedMap, Method, ParamError,
    ScoreKind, Shape,
};

/// Default bin count (Zadrozny & Elkan 2001 used ten bins).
pub const DEFAULT_BINS: usize = 10;

/// The most bins a map may have: at 10,000 equal-mass bins even a
/// million-row calibration sample has only 100 rows per bin, and the bin
/// search of a fit takes time in the number of bins, so a larger count is a
/// mistake (the suite check says so).
pub const MAX_BINS: usize = 10_000;

/// Histogram binning's parameters (and its calibrator).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Binning {
    /// Number of equal-mass bins (default 10).
    #[serde(default = "default_bins")]
    pub bins: usize,
    /// Pseudo-rows at the base rate per bin (0 = raw bin frequencies).
    #[serde(default)]
    pub pseudo_count: f64,
}

fn default_bins() -> usize {
    DEFAULT_BINS
}

impl Default for Binning {
    fn default() -> Self {
        Binning {
            bins: DEFAULT_BINS,
            pseudo_count: 0.0,
        }
    }
}

impl Method for Binning {
    fn kind(&self) -> &'static str {
        "binning"
    }
    fn keys(&self) -> &'static [(&'static str, &'static str)] {
        &[("bins", "1 to 10000"), ("pseudo_count", "a number >= 0")]
    }
    fn shape(&self) -> Shape {
        Shape::Flexible
    }

    fn predicts_zero_one(&self) -> bool {
        self.pseudo_count == 0.0
    }
    fn validate(&self, _score_kind: ScoreKind) -> Result<(), ParamError> {
        if self.bins == 0 || self.bins > MAX_BINS {
            return Err(ParamError::new(
                "bins",
                self.bins,
                "the number of bins must be between 1 and 10000",
            ));
        }
        check_pseudo_count(self.pseudo_count)
    }
    fn calibrator(&self, _score_kind: ScoreKind) -> Box<dyn Calibrator> {
        Box::new(self.clone())
    }
}

/// One bin of a fit.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Bin {
    pub lo: f64,
    pub hi: f64,
    pub rows: f64,
    pub positives: f64,
    pub value: f64,
}

/// Equal-mass bins with the tie and empty-bin rules of the module doc.
/// `groups` are sorted distinct scores `(score, rows, positives)` as returned by
/// `merge_ties`. Values are raw frequencies.
pub fn equal_mass_bins(groups: &[(f64, f64, f64)], bins: usize) -> Vec<Bin> {
    let n: f64 = groups.iter().map(|g| g.1).sum();
    let n_rows = n as usize;
    let bins = bins.max(1);
    let mut out: Vec<Bin> = Vec::with_capacity(bins.min(groups.len()));
    // End rank (exclusive) of nominal bin j.
    let end = |j: usize| -> usize { (((j + 1) as u128 * n_rows as u128) / bins as u128) as usize };
    let mut j = 0usize;
    let mut cum = 0usize;
    let mut cur: Option<Bin> = None;
    for &(x, w, k) in groups {
        let b = cur.get_or_insert(Bin {
            lo: x,
            hi: x,
            rows: 0.0,
            positives: 0.0,
            value: 0.0,
        });
        b.hi = x;
        b.rows += w;
        b.positives += k;
        cum += w as usize;
        // Close the bin once it reaches its nominal end; skip nominal edges that
        // this group already passed (those bins would be empty).
        if cum >= end(j) {
            let mut done = cur.take().unwrap();
            done.value = done.positives / done.rows;
            out.push(done);
            while j + 1 < bins && end(j) <= cum {
                j += 1;
            }
        }
    }
    if let Some(mut last) = cur.take() {
        last.value = last.positives / last.rows;
        out.push(last);
    }
    out
}

/// A fitted binning map.
pub struct BinningMap {
    pub bins: Vec<Bin>,
    /// `cuts[j]` divides bin j from bin j+1.
    pub cuts: Vec<f64>,
    pub pseudo_count: f64,
}

impl BinningMap {
    /// The map of fitted bins: cut points at the midpoints between bins.
    pub fn new(bins: Vec<Bin>, pseudo_count: f64) -> Self {
        let cuts: Vec<f64> = bins
            .windows(2)
            .map(|w| w[0].hi / 2.0 + w[1].lo / 2.0)
            .collect();
        BinningMap {
            bins,
            cuts,
            pseudo_count,
        }
    }

    pub fn eval(&self, s: f64) -> f64 {
        if s.is_nan() {
            return f64::NAN;
        }
        let j = self.cuts.partition_point(|&c| c < s);
        self.bins[j].value
    }
}

impl FittedMap for BinningMap {
    fn predict(&self, scores: &[f64], out: &mut [f64]) {
        for (o, &s) in out.iter_mut().zip(scores) {
            *o = self.eval(s);
        }
    }
    fn state(&self) -> MapState {
        MapState::Binning(BinningState {
            pseudo_count: self.pseudo_count,
            bins: self.bins.clone(),
        })
    }
}

/// The saved binning map: its bins.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(
    deny_unknown_fields,
    expecting = "struct variant MapState::Binning with 2 elements"
)]
pub struct BinningState {
    pub pseudo_count: f64,
    pub bins: Vec<Bin>,
}

impl SavedMap for BinningState {
    fn kind(&self) -> &'static str {
        "binning"
    }
    fn summary(&self) -> Vec<String> {
        let (n, lo, hi) = super::state::levels(self.bins.iter().map(|b| b.value));
        vec![format!(
            "{} bins, {n} distinct values from {} to {}, pseudo_count = {}",
            self.bins.len(),
            sig(lo),
            sig(hi),
            sig(self.pseudo_count)
        )]
    }
    fn check(&self) -> Result<(), String> {
        pseudo(self.pseudo_count)?;
        let r: Vec<(f64, f64)> = self.bins.iter().map(|b| (b.lo, b.hi)).collect();
        ranges("bins", &r)?;
        for (i, b) in self.bins.iter().enumerate() {
            probability("bins.value", i, b.value)?;
            if !(b.rows.is_finite() && b.rows > 0.0 && (0.0..=b.rows).contains(&b.positives)) {
                return Err(format!(
                    "bins[{i}]: rows = {} and positives = {} must satisfy 0 <= positives <= rows, rows > 0",
                    b.rows, b.positives
                ));
            }
        }
        Ok(())
    }
    fn restore(&self) -> Box<dyn FittedMap> {
        Box::new(BinningMap::new(self.bins.clone(), self.pseudo_count))
    }
    fn range_rule(&self) -> &'static str {
        "they fall into the first or last bin (clamped to the fitted range)"
    }
}

impl Calibrator for Binning {
    fn kind(&self) -> &'static str {
        "binning"
    }
    fn fit(&self, scores: &[f64], labels: &[bool]) -> Result<Fitted, FitError> {
        check_sample(scores, labels)?;
        if self.bins == 0 || self.bins > MAX_BINS {
            return Err(FitError::Failed(format!(
                "binning: bins must be between 1 and {MAX_BINS}, got {}",
                self.bins
            )));
        }
        if scores.iter().any(|s| s.is_nan()) {
            return Err(FitError::Failed("binning: NaN score".into()));
        }
        let groups = merge_ties(scores, labels);
        let mut bins = equal_mass_bins(&groups, self.bins);
        if self.pseudo_count > 0.0 {
            let pi = base_rate(labels);
            for b in &mut bins {
                b.value = (b.positives + self.pseudo_count * pi) / (b.rows + self.pseudo_count);
            }
        }
        Ok(Fitted::plain(Box::new(BinningMap::new(
            bins,
            self.pseudo_count,
        ))))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn groups(s: &[f64], y: &[bool]) -> Vec<(f64, f64, f64)> {
        merge_ties(s, y)
    }

    /// Derived by hand: 10 distinct rows into 4 bins: nominal ends at ranks
    /// ⌊10/4⌋ = 2, 5, 7, 10 → bin sizes 2, 3, 2, 3.
    #[test]
    fn equal_mass_sizes() {
        let s: Vec<f64> = (0..10).map(|i| i as f64).collect();
        let y: Vec<bool> = (0..10).map(|i| i % 3 == 0).collect();
        let b = equal_mass_bins(&groups(&s, &y), 4);
        let sizes: Vec<f64> = b.iter().map(|b| b.rows).collect();
        assert_eq!(sizes, vec![2.0, 3.0, 2.0, 3.0]);
        // Bin 1 holds scores 2, 3, 4 with labels F, T, F.
        assert!((b[1].value - 1.0 / 3.0).abs() < 1e-15);
    }

    /// Derived by hand: a tie group of 5 rows at score 1 straddles the nominal
    /// edges at ranks 2, 4 and 6 (n = 8, B = 4): it joins bin 0 whole; the
    /// nominal bins of ranks 2..4 and 4..6 would be empty and are dropped.
    #[test]
    fn ties_go_to_lower_bin_and_empty_bins_drop() {
        let s = [0.0, 1.0, 1.0, 1.0, 1.0, 1.0, 2.0, 3.0];
        let y = [false, true, false, true, false, true, false, true];
        let b = equal_mass_bins(&groups(&s, &y), 4);
        let sizes: Vec<f64> = b.iter().map(|b| b.rows).collect();
        assert_eq!(sizes, vec![6.0, 2.0]);
        assert_eq!((b[0].lo, b[0].hi), (0.0, 1.0));
    }

    #[test]
    fn fewer_rows_than_bins() {
        let s = [0.3, 0.1, 0.2];
        let y = [true, false, true];
        let b = equal_mass_bins(&groups(&s, &y), 10);
        assert_eq!(b.len(), 3);
    }

    /// Derived by hand: midpoints divide bins; a score on the midpoint goes low.
    #[test]
    fn prediction_rule() {
        let s = [0.0, 0.1, 0.5, 0.6];
        let y = [false, false, true, true];
        let f = Binning {
            bins: 2,
            pseudo_count: 0.0,
        }
        .fit(&s, &y)
        .unwrap();
        let mut out = [0.0; 4];
        f.map.predict(&[-1.0, 0.3, 0.3000001, 9.0], &mut out);
        assert_eq!(out, [0.0, 0.0, 1.0, 1.0]);
        let g = Binning {
            bins: 2,
            pseudo_count: 2.0,
        }
        .fit(&s, &y)
        .unwrap();
        g.map.predict(&[0.0, 0.6], &mut out[..2]);
        // (0 + 2·0.5)/(2 + 2) = 0.25 and (2 + 1)/4 = 0.75.
        assert_eq!(&out[..2], &[0.25, 0.75]);
    }
}
