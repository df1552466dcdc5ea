//! Multiclass scoring rules and calibration errors.
//!
//! Notation: n rows, K classes, p_ik the predicted probability of class k in
//! row i (a row-major n×K matrix), y_i ∈ {0..K−1} the label.
//!
//! * Log loss (Good 1952, "Rational decisions", JRSS B 14):
//!   (1/n) Σ_i −ln p_{i,y_i}, natural log, with p_{i,y_i} clipped to
//!   [c, 1 − c] exactly as the binary log loss clips its probability
//!   (`metrics::scoring`), so a confident miss costs −ln c rather than
//!   infinity. For K = 2 this is the binary log loss term for term.
//! * Brier score, Brier's original multi-category definition (Brier 1950,
//!   "Verification of forecasts expressed in terms of probability", Monthly
//!   Weather Review 78): (1/n) Σ_i Σ_k (p_ik − 1[y_i = k])². It lies in
//!   [0, 2]; for K = 2 it is twice the binary Brier score.
//! * Top-label (confidence) ECE (Guo, Pleiss, Sun & Weinberger 2017, ICML,
//!   "On calibration of modern neural networks"): with the confidence
//!   c_i = max_k p_ik, the predicted class ŷ_i = the first k reaching it, and
//!   a_i = 1[ŷ_i = y_i], the binary ECE of (c_i, a_i):
//!   Σ_b (n_b / n) |mean c in b − mean a in b|.
//! * Classwise ECE (Kull, Perelló-Nieto, Kängsepp, Silva Filho, Song & Flach
//!   2019, NeurIPS, "Beyond temperature scaling: obtaining well-calibrated
//!   multi-class probabilities with Dirichlet calibration"): the mean over
//!   the K classes of the binary ECE of (p_ik, 1[y_i = k]).
//!
//! Binning ([`Binning`]) is that of the binary ECE (`metrics::binned`):
//! equal-width bins [j/B, (j+1)/B) with the last closed at 1, or equal-mass
//! bins at the order statistics ⌊j·n/B⌋ that never split tied values (so at
//! most B bins). The top-label ECE is usually given with equal-mass bins
//! here ([`Binning::EqualMass`]); Guo et al. used 15 equal-width bins and
//! Kull et al. 15 equal-width bins per class; either can be asked for.
//!
//! Every function checks its input first ([`check_probabilities`]) and
//! returns a [`MulticlassError`] for bad input instead of a number.

use super::{check_probabilities, MulticlassError};
use crate::metrics::binned::{ece_equal_mass, ece_equal_width};

/// How an ECE groups rows into bins.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Binning {
    /// B bins of equal width on [0, 1].
    EqualWidth,
    /// At most B bins of about n/B rows each, ties kept together.
    EqualMass,
}

/// Multiclass log loss with the observed class's probability clipped to
/// [clip, 1 − clip]; `clip` must be in (0, 0.5).
pub fn log_loss(
    p: &[f64],
    classes: usize,
    labels: &[usize],
    clip: f64,
) -> Result<f64, MulticlassError> {
    let n = check_probabilities(p, classes, labels)?;
    if !(clip > 0.0 && clip < 0.5) {
        return Err(MulticlassError::Failed(format!(
            "log-loss clip {clip} must be in (0, 0.5)"
        )));
    }
    let s: f64 = p
        .chunks_exact(classes)
        .zip(labels)
        .map(|(r, &y)| -r[y].clamp(clip, 1.0 - clip).ln())
        .sum();
    Ok(s / n as f64)
}

/// Brier's multi-category score: mean over rows of Σ_k (p_ik − 1[y_i = k])².
pub fn brier(p: &[f64], classes: usize, labels: &[usize]) -> Result<f64, MulticlassError> {
    let n = check_probabilities(p, classes, labels)?;
    let s: f64 = p
        .chunks_exact(classes)
        .zip(labels)
        .map(|(r, &y)| {
            r.iter()
                .enumerate()
                .map(|(k, &v)| {
                    let d = v - if k == y { 1.0 } else { 0.0 };
                    d * d
                })
                .sum::<f64>()
        })
        .sum();
    Ok(s / n as f64)
}

fn binned_ece(p: &[f64], y: &[bool], bins: usize, binning: Binning) -> f64 {
    match binning {
        Binning::EqualWidth => ece_equal_width(p, y, bins),
        Binning::EqualMass => ece_equal_mass(p, y, bins),
    }
}

fn check_bins(bins: usize) -> Result<(), MulticlassError> {
    if bins == 0 {
        return Err(MulticlassError::Failed(
            "the number of ECE bins must be at least 1".into(),
        ));
    }
    Ok(())
}

/// The confidence max_k p_ik of every row and whether its predicted class
/// (the first class reaching the maximum) is the label.
pub fn confidences(p: &[f64], classes: usize, labels: &[usize]) -> (Vec<f64>, Vec<bool>) {
    p.chunks_exact(classes)
        .zip(labels)
        .map(|(r, &y)| {
            let (mut best, mut top) = (0usize, r[0]);
            for (k, &v) in r.iter().enumerate().skip(1) {
                if v > top {
                    best = k;
                    top = v;
                }
            }
            (top, best == y)
        })
        .unzip()
}

/// Top-label (confidence) ECE with at most `bins` bins.
pub fn top_label_ece(
    p: &[f64],
    classes: usize,
    labels: &[usize],
    bins: usize,
    binning: Binning,
) -> Result<f64, MulticlassError> {
    check_probabilities(p, classes, labels)?;
    check_bins(bins)?;
    let (c, a) = confidences(p, classes, labels);
    Ok(binned_ece(&c, &a, bins, binning))
}

/// Classwise ECE: the mean over classes of the one-against-rest ECE with at
/// most `bins` bins per class.
pub fn classwise_ece(
    p: &[f64],
    classes: usize,
    labels: &[usize],
    bins: usize,
    binning: Binning,
) -> Result<f64, MulticlassError> {
    check_probabilities(p, classes, labels)?;
    check_bins(bins)?;
    let mut total = 0.0;
    for k in 0..classes {
        let col: Vec<f64> = p.iter().skip(k).step_by(classes).copied().collect();
        let hit: Vec<bool> = labels.iter().map(|&y| y == k).collect();
        total += binned_ece(&col, &hit, bins, binning);
    }
    Ok(total / classes as f64)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::metrics::scoring;

    /// Rows of three classes, written by hand.
    const P: [f64; 9] = [0.7, 0.2, 0.1, 0.1, 0.3, 0.6, 0.25, 0.5, 0.25];
    const Y: [usize; 3] = [0, 1, 1];

    #[test]
    fn hand_checked_values() {
        // −(ln 0.7 + ln 0.3 + ln 0.5)/3.
        let ll = log_loss(&P, 3, &Y, 1e-6).unwrap();
        assert!((ll - -(0.7f64.ln() + 0.3f64.ln() + 0.5f64.ln()) / 3.0).abs() < 1e-15);
        // (0.09 + 0.04 + 0.01) + (0.01 + 0.49 + 0.36) + (0.0625 + 0.25 + 0.0625) = 1.375.
        let b = brier(&P, 3, &Y).unwrap();
        assert!((b - 1.375 / 3.0).abs() < 1e-15);
        // Confidences 0.7 (right), 0.6 (wrong), 0.5 (right); one equal-mass
        // bin: |0.6 − 2/3|.
        let e = top_label_ece(&P, 3, &Y, 1, Binning::EqualMass).unwrap();
        assert!((e - (1.8f64 / 3.0 - 2.0 / 3.0).abs()).abs() < 1e-15);
        // Three bins of one row each: (0.3 + 0.6 + 0.5)/3.
        let e = top_label_ece(&P, 3, &Y, 3, Binning::EqualMass).unwrap();
        assert!((e - 1.4 / 3.0).abs() < 1e-15);
    }

    #[test]
    fn two_classes_reduce_to_the_binary_metrics() {
        let q = [0.9, 0.2, 0.5, 1e-9, 0.6];
        let y = [true, false, true, true, false];
        let p: Vec<f64> = q.iter().flat_map(|&v| [1.0 - v, v]).collect();
        let l: Vec<usize> = y.iter().map(|&b| b as usize).collect();
        let c = 1e-6;
        let ll = log_loss(&p, 2, &l, c).unwrap();
        assert!((ll - scoring::log_loss(&q, &y, c)).abs() < 1e-15);
        let b = brier(&p, 2, &l).unwrap();
        assert!((b - 2.0 * scoring::brier(&q, &y)).abs() < 1e-14);
    }

    #[test]
    fn clip_bounds_a_confident_miss() {
        let ll = log_loss(&[1.0, 0.0], 2, &[1], 1e-6).unwrap();
        assert!((ll - -(1e-6f64).ln()).abs() < 1e-12);
    }

    #[test]
    fn permuting_classes_changes_nothing() {
        // Class k becomes class perm[k] in the probabilities and the labels.
        let perm = [2, 0, 1];
        let mut q = [0.0; 9];
        for (i, r) in P.chunks(3).enumerate() {
            for k in 0..3 {
                q[3 * i + perm[k]] = r[k];
            }
        }
        let y2: Vec<usize> = Y.iter().map(|&y| perm[y]).collect();
        for (a, b) in [
            (log_loss(&P, 3, &Y, 1e-6), log_loss(&q, 3, &y2, 1e-6)),
            (brier(&P, 3, &Y), brier(&q, 3, &y2)),
            (
                classwise_ece(&P, 3, &Y, 2, Binning::EqualWidth),
                classwise_ece(&q, 3, &y2, 2, Binning::EqualWidth),
            ),
            (
                top_label_ece(&P, 3, &Y, 2, Binning::EqualMass),
                top_label_ece(&q, 3, &y2, 2, Binning::EqualMass),
            ),
        ] {
            assert!((a.unwrap() - b.unwrap()).abs() < 1e-15);
        }
    }

    #[test]
    fn bad_input_is_an_error() {
        assert_eq!(log_loss(&[], 3, &[], 1e-6), Err(MulticlassError::Empty));
        assert!(brier(&P, 3, &[0, 1]).is_err());
        assert!(top_label_ece(&P, 3, &Y, 0, Binning::EqualMass).is_err());
        assert!(classwise_ece(&P, 3, &[0, 1, 3], 10, Binning::EqualWidth).is_err());
        assert!(log_loss(&P, 3, &Y, 0.0).is_err());
        let mut nan = P;
        nan[4] = f64::NAN;
        assert!(matches!(
            brier(&nan, 3, &Y),
            Err(MulticlassError::NotFinite {
                row: 1,
                class: 1,
                ..
            })
        ));
    }
}
