//! Property tests of the spline and Venn–Abers calibrators: outputs are
//! probabilities, Venn–Abers is monotone with p0 ≤ p1, and neither depends on
//! the order of the calibration rows.

use plumbline::calibrate::spline::{Criterion, Spline};
use plumbline::calibrate::venn_abers::{brute_force_pair, VennAbers, VennAbersTable};
use plumbline::calibrate::{Calibrator, ScoreKind};
use proptest::prelude::*;

mod common;

/// Calibration samples with both classes; scores on a coarse grid so that ties
/// are common.
fn sample() -> impl Strategy<Value = (Vec<f64>, Vec<bool>)> {
    (2usize..60).prop_flat_map(|n| {
        (
            prop::collection::vec((0u32..25).prop_map(|k| k as f64 / 24.0), n),
            prop::collection::vec(any::<bool>(), n),
        )
            .prop_map(|(s, mut y)| {
                y[0] = true;
                let last = y.len() - 1;
                y[last] = false;
                (s, y)
            })
    })
}

fn test_scores() -> Vec<f64> {
    let mut t: Vec<f64> = (0..=60).map(|i| -0.25 + 1.5 * i as f64 / 60.0).collect();
    t.extend((0..25).map(|k| k as f64 / 24.0));
    t.push(0.0);
    t.push(1.0);
    t
}

/// A permutation of 0..n from a seed (Fisher–Yates with a simple LCG).
fn permutation(n: usize, seed: u64) -> Vec<usize> {
    let mut p: Vec<usize> = (0..n).collect();
    let mut x = seed | 1;
    for i in (1..n).rev() {
        x = x
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        let j = ((x >> 33) as usize) % (i + 1);
        p.swap(i, j);
    }
    p
}

fn spline(kind: ScoreKind) -> Spline {
    Spline {
        score_kind: kind,
        intervals: 10,
        lambda: None,
        criterion: Criterion::Aic,
    }
}

proptest! {
    // Floor: 64 cases (each fits a spline by AIC over a penalty grid);
    // `PROPTEST_CASES` may raise it, a lower value is refused.
    #![proptest_config(ProptestConfig::with_cases(common::proptest_cases(64)))]

    #[test]
    fn venn_abers_is_a_monotone_probability((s, y) in sample()) {
        let f = VennAbers {}.fit(&s, &y).unwrap();
        let t = test_scores();
        let mut sorted = t.clone();
        sorted.sort_by(f64::total_cmp);
        let mut out = vec![0.0; sorted.len()];
        f.map.predict(&sorted, &mut out);
        for w in out.windows(2) {
            prop_assert!(w[0] <= w[1], "not monotone: {} then {}", w[0], w[1]);
        }
        prop_assert!(out.iter().all(|p| (0.0..=1.0).contains(p)));
        let table = VennAbersTable::new(&s, &y).unwrap();
        for &x in &t {
            let (p0, p1) = table.pair(x);
            prop_assert!(0.0 <= p0 && p0 <= p1 && p1 <= 1.0);
            // And the fast table is the definition.
            prop_assert_eq!((p0, p1), brute_force_pair(&s, &y, x));
        }
    }

    #[test]
    fn venn_abers_ignores_row_order((s, y) in sample(), seed in any::<u64>()) {
        let perm = permutation(s.len(), seed);
        let s2: Vec<f64> = perm.iter().map(|&i| s[i]).collect();
        let y2: Vec<bool> = perm.iter().map(|&i| y[i]).collect();
        let a = VennAbersTable::new(&s, &y).unwrap();
        let b = VennAbersTable::new(&s2, &y2).unwrap();
        prop_assert_eq!(a, b);
    }

    #[test]
    fn spline_outputs_are_probabilities((s, y) in sample()) {
        // Probability scores include exact 0 and 1 (clipped before the logit).
        let f = match spline(ScoreKind::Probability).fit(&s, &y) {
            Ok(f) => f,
            Err(e) => return Err(TestCaseError::fail(format!("fit failed: {e}"))),
        };
        let t = test_scores();
        let mut out = vec![0.0; t.len()];
        f.map.predict(&t, &mut out);
        prop_assert!(out.iter().all(|p| (0.0..=1.0).contains(p)), "{:?}", out);
    }

    #[test]
    fn spline_ignores_row_order((s, y) in sample(), seed in any::<u64>()) {
        let m: Vec<f64> = s.iter().map(|v| 6.0 * v - 3.0).collect();
        let perm = permutation(m.len(), seed);
        let m2: Vec<f64> = perm.iter().map(|&i| m[i]).collect();
        let y2: Vec<bool> = perm.iter().map(|&i| y[i]).collect();
        let a = spline(ScoreKind::Margin).fit(&m, &y);
        let b = spline(ScoreKind::Margin).fit(&m2, &y2);
        match (a, b) {
            (Ok(a), Ok(b)) => {
                prop_assert_eq!(&a.notes, &b.notes);
                let t: Vec<f64> = (0..=40).map(|i| -4.0 + 0.2 * i as f64).collect();
                let (mut oa, mut ob) = (vec![0.0; t.len()], vec![0.0; t.len()]);
                a.map.predict(&t, &mut oa);
                b.map.predict(&t, &mut ob);
                // Ties are merged after sorting, so the fit sees the same points
                // in the same order: identical to the last bit.
                prop_assert_eq!(oa, ob);
            }
            (Err(a), Err(b)) => prop_assert_eq!(a, b),
            (a, b) => {
                return Err(TestCaseError::fail(format!(
                    "one order failed: {:?} vs {:?}",
                    a.err(),
                    b.err()
                )))
            }
        }
    }
}
