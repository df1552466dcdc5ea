//! Decompositions of a score into calibration, discrimination and uncertainty
//! terms.
//!
//! # Murphy decomposition of the Brier score
//! Murphy (1973, J. Applied Meteorology 12, "A new vector partition of the
//! probability score"). Forecasts are grouped into bins: `murphy_bins` = K ≥ 1
//! equal-width bins of [0, 1] (bin k = min(⌊p·K⌋, K − 1), as for the
//! equal-width ECE), or, with `murphy_bins = 0`, one group per distinct
//! forecast value. With n_k rows in group k, mean forecast p̄_k, observed
//! frequency ȳ_k and overall base rate ȳ:
//!
//!   REL = (1/n) Σ_k n_k (p̄_k − ȳ_k)²   (reliability, lower is better)
//!   RES = (1/n) Σ_k n_k (ȳ_k − ȳ)²      (resolution, higher is better)
//!   UNC = ȳ (1 − ȳ)                      (uncertainty, a property of the labels)
//!
//! Identity: when forecasts are constant within each group (always true with
//! `murphy_bins = 0`), Brier = REL − RES + UNC exactly. With wider bins the
//! within-bin variance and covariance terms of Stephenson, Coelho & Jolliffe
//! (2008, Weather and Forecasting 23, "Two extra components in the Brier score
//! decomposition") make up the difference; they are not reported.
//!
//! # CORP decomposition
//! Dimitriadis, Gneiting & Jordan (2021, PNAS 118, "Stable reliability diagrams
//! for probabilistic classifiers"). The test predictions p are recalibrated by
//! isotonic regression of y on p (PAV, ties in p merged first, so the result
//! p̂ is the non-decreasing function of p that minimises every proper score
//! at once). With ȳ the base rate and S the mean score:
//!
//!   MCB = S(p) − S(p̂)   (miscalibration, ≥ 0)
//!   DSC = S(ȳ) − S(p̂)   (discrimination, ≥ 0, higher is better)
//!   UNC = S(ȳ)          (uncertainty)
//!
//! so S(p) = MCB − DSC + UNC holds by construction. S is the Brier score or the
//! log loss. For the log loss, S(p) uses the suite's clip (as the `log_loss`
//! metric does), while S(p̂) and S(ȳ) are exact with 0·ln 0 = 0: p̂ is 0 or 1
//! only on groups whose labels are all 0 or all 1, so they stay finite. Since
//! the clipped p is still a non-decreasing function of p, MCB ≥ 0 still holds.

use super::binned::width_bin;
use super::scoring;
use crate::calibrate::isotonic::{merge_ties, pav};

/// The three Murphy terms.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Murphy {
    pub rel: f64,
    pub res: f64,
    pub unc: f64,
}

/// Murphy decomposition with `bins` equal-width bins, or by distinct forecast
/// value when `bins == 0`. NaN terms on an empty test set.
pub fn murphy(p: &[f64], y: &[bool], bins: usize) -> Murphy {
    let n = p.len().min(y.len());
    if n == 0 {
        return Murphy {
            rel: f64::NAN,
            res: f64::NAN,
            unc: f64::NAN,
        };
    }
    let nf = n as f64;
    let ybar = y[..n].iter().filter(|&&l| l).count() as f64 / nf;
    // Groups as (count, sum p, sum y).
    let groups: Vec<(f64, f64, f64)> = if bins > 0 {
        let mut acc = vec![(0.0, 0.0, 0.0); bins];
        for (&pi, &yi) in p.iter().zip(y) {
            let g = &mut acc[width_bin(pi, bins)];
            g.0 += 1.0;
            g.1 += pi;
            g.2 += if yi { 1.0 } else { 0.0 };
        }
        acc
    } else {
        merge_ties(&p[..n], &y[..n])
            .into_iter()
            .map(|(v, w, sy)| (w, v * w, sy))
            .collect()
    };
    let (mut rel, mut res) = (0.0, 0.0);
    for &(c, sp, sy) in &groups {
        if c > 0.0 {
            let (pk, yk) = (sp / c, sy / c);
            rel += c * (pk - yk) * (pk - yk);
            res += c * (yk - ybar) * (yk - ybar);
        }
    }
    Murphy {
        rel: rel / nf,
        res: res / nf,
        unc: ybar * (1.0 - ybar),
    }
}

/// The score a CORP decomposition is taken of.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CorpScore {
    Brier,
    /// Log loss; the clip applies to the original predictions only.
    LogLoss,
}

/// The three CORP terms.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Corp {
    pub mcb: f64,
    pub dsc: f64,
    pub unc: f64,
}

/// Total score of a group of `w` rows with `sy` positives all predicted `q`,
/// exact with 0·ln 0 = 0.
fn group_score(score: CorpScore, q: f64, w: f64, sy: f64) -> f64 {
    match score {
        // Σ (q − y)² = sy (1 − q)² + (w − sy) q².
        CorpScore::Brier => sy * (1.0 - q) * (1.0 - q) + (w - sy) * q * q,
        CorpScore::LogLoss => {
            let mut s = 0.0;
            if sy > 0.0 {
                s -= sy * q.ln();
            }
            if w - sy > 0.0 {
                s -= (w - sy) * (-q).ln_1p();
            }
            s
        }
    }
}

/// CORP decomposition of the Brier score or log loss (clip `clip` on `p`).
/// NaN terms on an empty test set.
pub fn corp(p: &[f64], y: &[bool], score: CorpScore, clip: f64) -> Corp {
    let n = p.len().min(y.len());
    if n == 0 {
        return Corp {
            mcb: f64::NAN,
            dsc: f64::NAN,
            unc: f64::NAN,
        };
    }
    let nf = n as f64;
    let s_orig = match score {
        CorpScore::Brier => scoring::brier(&p[..n], &y[..n]),
        CorpScore::LogLoss => scoring::log_loss(&p[..n], &y[..n], clip),
    };
    let points = merge_ties(&p[..n], &y[..n]);
    let blocks = pav(&points);
    // Each block's rows are predicted its value; its label sum is value·weight.
    let s_rc: f64 = blocks
        .iter()
        .map(|b| group_score(score, b.value, b.weight, b.value * b.weight))
        .sum::<f64>()
        / nf;
    let npos = y[..n].iter().filter(|&&l| l).count() as f64;
    let s_unc = group_score(score, npos / nf, nf, npos) / nf;
    Corp {
        mcb: s_orig - s_rc,
        dsc: s_unc - s_rc,
        unc: s_unc,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Identity: distinct-value grouping makes REL − RES + UNC = Brier exactly
    /// (Murphy 1973).
    #[test]
    fn murphy_identity_by_distinct_value() {
        let p = [0.2, 0.2, 0.2, 0.6, 0.6, 0.9, 0.9, 0.9, 0.9];
        let y = [false, true, false, true, false, true, true, true, false];
        let m = murphy(&p, &y, 0);
        let bs = scoring::brier(&p, &y);
        assert!((m.rel - m.res + m.unc - bs).abs() < 1e-15);
        // Same with 10 bins: every bin holds one forecast value.
        let m10 = murphy(&p, &y, 10);
        assert!((m10.rel - m10.res + m10.unc - bs).abs() < 1e-15);
    }

    /// Identity: the CORP terms sum to the score (Dimitriadis et al. 2021, eq. 3).
    #[test]
    fn corp_terms_sum_to_score() {
        let p = [0.1, 0.35, 0.2, 0.8, 0.55, 0.9, 0.4, 0.7];
        let y = [false, true, false, true, false, true, true, false];
        let c = corp(&p, &y, CorpScore::Brier, 1e-6);
        assert!((c.mcb - c.dsc + c.unc - scoring::brier(&p, &y)).abs() < 1e-15);
        assert!(c.mcb >= 0.0 && c.dsc >= 0.0);
        let c = corp(&p, &y, CorpScore::LogLoss, 1e-6);
        assert!((c.mcb - c.dsc + c.unc - scoring::log_loss(&p, &y, 1e-6)).abs() < 1e-14);
        assert!(c.mcb >= 0.0 && c.dsc >= 0.0);
    }
}
