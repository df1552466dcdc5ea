//! Expected calibration error (ECE) over bins of the predictions.
//!
//! Math: rows are grouped into bins B_1..B_K; with n_k rows in bin k, mean
//! prediction p̄_k and observed frequency ȳ_k,
//!
//!   ECE = Σ_k (n_k / n) · |p̄_k − ȳ_k|,
//!
//! i.e. the absolute gap per bin weighted by the bin's share of the test set
//! (Naeini, Cooper & Hauskrecht 2015, AAAI, "Obtaining well calibrated
//! probabilities using Bayesian binning"; Guo, Pleiss, Sun & Weinberger 2017,
//! ICML, "On calibration of modern neural networks"). Empty bins contribute 0.
//!
//! Equal-width bins (`ece_width`): bin k = min(⌊p·K⌋, K − 1) for p clamped to
//! [0, 1], so bins are [k/K, (k+1)/K) and the last bin is closed at 1.
//!
//! Equal-mass bins (`ece_mass`): sort the predictions; the tentative bin ends are
//! the positions ⌊k·n/K⌋ (k = 1..K−1) of the sorted list. Tied predictions are
//! never split: when a tentative end falls inside a run of equal predictions the
//! end moves forward to the end of that run, and ends that then coincide with
//! or precede the previous end are dropped. So there are at most K bins (fewer
//! with heavy ties, one when every prediction is equal).

/// Equal-width bin of a prediction among `k` bins of [0, 1].
#[inline]
pub fn width_bin(p: f64, k: usize) -> usize {
    let q = if p.is_nan() { 0.0 } else { p.clamp(0.0, 1.0) };
    ((q * k as f64).floor() as usize).min(k - 1)
}

/// ECE with `k` equal-width bins (k ≥ 1).
pub fn ece_equal_width(p: &[f64], y: &[bool], k: usize) -> f64 {
    let k = k.max(1);
    let n = p.len().min(y.len());
    if n == 0 {
        return f64::NAN;
    }
    // (count, sum p, sum y) per bin.
    let mut acc = vec![(0.0f64, 0.0f64, 0.0f64); k];
    for (&pi, &yi) in p.iter().zip(y) {
        let b = &mut acc[width_bin(pi, k)];
        b.0 += 1.0;
        b.1 += pi;
        b.2 += if yi { 1.0 } else { 0.0 };
    }
    let s: f64 = acc.iter().map(|&(_, sp, sy)| (sp - sy).abs()).sum();
    // n_k/n · |sp/n_k − sy/n_k| = |sp − sy| / n.
    s / n as f64
}

/// Bin ends (exclusive, into the sorted order) of equal-mass binning of
/// `sorted` into at most `k` bins without splitting ties.
pub fn mass_bin_ends(sorted: &[f64], k: usize) -> Vec<usize> {
    let n = sorted.len();
    let k = k.max(1);
    let mut ends = Vec::with_capacity(k);
    let mut prev = 0usize;
    for j in 1..k {
        let mut e = j * n / k;
        if e <= prev {
            continue;
        }
        while e < n && sorted[e] == sorted[e - 1] {
            e += 1;
        }
        if e >= n {
            break;
        }
        ends.push(e);
        prev = e;
    }
    if n > 0 {
        ends.push(n);
    }
    ends
}

/// ECE with at most `k` equal-mass bins (ties kept together).
pub fn ece_equal_mass(p: &[f64], y: &[bool], k: usize) -> f64 {
    let n = p.len().min(y.len());
    if n == 0 {
        return f64::NAN;
    }
    let mut rows: Vec<(f64, bool)> = p.iter().copied().zip(y.iter().copied()).collect();
    rows.sort_unstable_by(|a, b| a.0.total_cmp(&b.0));
    let sorted: Vec<f64> = rows.iter().map(|r| r.0).collect();
    let mut start = 0;
    let mut s = 0.0;
    for end in mass_bin_ends(&sorted, k) {
        let (mut sp, mut sy) = (0.0, 0.0);
        for r in &rows[start..end] {
            sp += r.0;
            sy += if r.1 { 1.0 } else { 0.0 };
        }
        s += (sp - sy).abs();
        start = end;
    }
    s / n as f64
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Derived by hand: 2 bins; bin 0 holds 0.1, 0.3 (mean 0.2, freq 0.5),
    /// bin 1 holds 0.6, 0.8 (mean 0.7, freq 1). ECE = ½·0.3 + ½·0.3 = 0.3.
    #[test]
    fn hand_checked_equal_width() {
        let p = [0.1, 0.3, 0.6, 0.8];
        let y = [true, false, true, true];
        assert!((ece_equal_width(&p, &y, 2) - 0.3).abs() < 1e-15);
        assert!((ece_equal_mass(&p, &y, 2) - 0.3).abs() < 1e-15);
    }

    #[test]
    fn ties_are_not_split_across_mass_bins() {
        let s = [0.1, 0.2, 0.2, 0.2, 0.2, 0.9];
        // Tentative ends at 2 and 4 fall inside the run of 0.2: both move to 5.
        assert_eq!(mass_bin_ends(&s, 3), vec![5, 6]);
        assert_eq!(mass_bin_ends(&[0.5; 4], 3), vec![4]);
        assert_eq!(mass_bin_ends(&[0.1, 0.2, 0.3, 0.4], 2), vec![2, 4]);
    }

    #[test]
    fn width_bin_edges() {
        assert_eq!(width_bin(0.0, 10), 0);
        assert_eq!(width_bin(1.0, 10), 9);
        assert_eq!(width_bin(0.95, 10), 9);
        assert_eq!(width_bin(-0.2, 10), 0);
    }
}
