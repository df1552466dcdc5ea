//! Area under the ROC curve (AUC) with ties counted as half.
//!
//! Math: AUC = P(p₊ > p₋) + ½·P(p₊ = p₋) for a random positive and a random
//! negative row, i.e. the Mann–Whitney U statistic divided by n₊·n₋ (Mann &
//! Whitney 1947, Ann. Math. Statist. 18; Hanley & McNeil 1982, Radiology 143,
//! "The meaning and use of the area under a receiver operating characteristic
//! (ROC) curve"). Computed from mid-ranks of the sorted predictions:
//! U = R₊ − n₊(n₊ + 1)/2 with R₊ the sum of the positives' mid-ranks, O(n log n).
//!
//! Undefined (NaN) when the test set holds only one class.

/// ROC AUC of predictions `p` for labels `y`; NaN with a single class.
pub fn auc(p: &[f64], y: &[bool]) -> f64 {
    let n = p.len().min(y.len());
    let n_pos = y[..n].iter().filter(|&&l| l).count();
    let n_neg = n - n_pos;
    if n_pos == 0 || n_neg == 0 {
        return f64::NAN;
    }
    let mut idx: Vec<u32> = (0..n as u32).collect();
    idx.sort_unstable_by(|&a, &b| p[a as usize].total_cmp(&p[b as usize]));
    // Walk runs of tied predictions; each run's rows share the mid-rank.
    let mut rank_sum_pos = 0.0;
    let mut start = 0;
    while start < n {
        let v = p[idx[start] as usize];
        let mut end = start + 1;
        while end < n && p[idx[end] as usize] == v {
            end += 1;
        }
        let pos_in_run = idx[start..end].iter().filter(|&&i| y[i as usize]).count();
        // Ranks start+1 ..= end; their mean:
        let mid = (start + 1 + end) as f64 / 2.0;
        rank_sum_pos += mid * pos_in_run as f64;
        start = end;
    }
    let np = n_pos as f64;
    (rank_sum_pos - np * (np + 1.0) / 2.0) / (np * n_neg as f64)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Derived by hand: pairs (pos, neg) = (0.8,0.3) win, (0.8,0.5) win,
    /// (0.5,0.3) win, (0.5,0.5) tie → (3 + 0.5)/4.
    #[test]
    fn hand_checked_tie_counts_half() {
        let p = [0.3, 0.5, 0.5, 0.8];
        let y = [false, false, true, true];
        assert!((auc(&p, &y) - 3.5 / 4.0).abs() < 1e-15);
    }

    /// Hanley & McNeil (1982, Radiology 143, Table 1; counts and the published
    /// area 0.893 from memory): 58 normal and 51 abnormal cases rated 1–5 by a
    /// radiologist; normal counts 33, 6, 6, 11, 2 and abnormal 3, 2, 2, 11, 33.
    /// Ties within a rating count half.
    #[test]
    fn hanley_mcneil_rating_example() {
        let normal = [33, 6, 6, 11, 2];
        let abnormal = [3, 2, 2, 11, 33];
        let (mut p, mut y) = (Vec::new(), Vec::new());
        for r in 0..5 {
            for (count, label) in [(normal[r], false), (abnormal[r], true)] {
                p.extend(std::iter::repeat_n((r + 1) as f64, count));
                y.extend(std::iter::repeat_n(label, count));
            }
        }
        assert_eq!(p.len(), 109);
        assert!((auc(&p, &y) - 0.893).abs() < 5e-4);
    }

    #[test]
    fn one_class_is_undefined() {
        assert!(auc(&[0.1, 0.2], &[true, true]).is_nan());
    }
}
