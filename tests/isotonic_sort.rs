//! The isotonic fit sorts scores by their order keys (by comparison, or by a
//! radix sort). Whatever sort runs, the fitted map
//! must be bit for bit the one of the plain comparison sort of (score, label)
//! pairs by `f64::total_cmp` followed by the tie merge and PAV: same blocks,
//! same `lo`/`hi` (−0.0 stays −0.0), same weights and values.

use plumbline::calibrate::isotonic::{
    fit_blocks, fit_blocks_with, merge_ties, pav, shrink_blocks, Block, Isotonic,
};
use plumbline::calibrate::score_order::KeySort;

/// Rows in the long samples: several radix digits' worth of buckets.
const LONG: usize = 4_096;
use plumbline::calibrate::state::MapState;
use plumbline::calibrate::Calibrator;
use proptest::prelude::*;

mod common;

/// The points of the comparison-sort fit: sort pairs by `total_cmp`, merge runs
/// of `==` scores under the first score of the run.
fn reference_points(scores: &[f64], labels: &[bool]) -> Vec<(f64, f64, f64)> {
    let mut pairs: Vec<(f64, bool)> = scores.iter().copied().zip(labels.iter().copied()).collect();
    pairs.sort_unstable_by(|a, b| a.0.total_cmp(&b.0));
    let mut out: Vec<(f64, f64, f64)> = Vec::new();
    for (s, l) in pairs {
        let y = if l { 1.0 } else { 0.0 };
        match out.last_mut() {
            Some(last) if last.0 == s => {
                last.1 += 1.0;
                last.2 += y;
            }
            _ => out.push((s, 1.0, y)),
        }
    }
    out
}

fn block_bits(b: &[Block]) -> Vec<[u64; 4]> {
    b.iter()
        .map(|b| {
            [
                b.lo.to_bits(),
                b.hi.to_bits(),
                b.weight.to_bits(),
                b.value.to_bits(),
            ]
        })
        .collect()
}

fn point_bits(p: &[(f64, f64, f64)]) -> Vec<[u64; 3]> {
    p.iter()
        .map(|p| [p.0.to_bits(), p.1.to_bits(), p.2.to_bits()])
        .collect()
}

/// Awkward scores: zeros of both signs, subnormals, the ends of the normal
/// range, 0 and 1, huge values and infinities.
const EXTREMES: &[f64] = &[
    0.0,
    -0.0,
    1.0,
    -1.0,
    5e-324,
    -5e-324,
    1e-310,
    -1e-310,
    f64::MIN_POSITIVE,
    -f64::MIN_POSITIVE,
    1e-300,
    1e300,
    -1e300,
    f64::MAX,
    -f64::MAX,
    f64::INFINITY,
    f64::NEG_INFINITY,
    0.5,
    1.0 - f64::EPSILON / 2.0,
    f64::EPSILON,
];

/// A score: an extreme, one of a few tied values, or any non-NaN double.
fn score() -> impl Strategy<Value = f64> {
    prop_oneof![
        4 => prop::sample::select(EXTREMES),
        4 => (0u8..6).prop_map(|k| k as f64 / 5.0),
        2 => any::<f64>().prop_filter("not NaN", |x| !x.is_nan()),
        2 => 0.0f64..1.0,
    ]
}

/// Rows with both classes, short and long.
fn sample() -> impl Strategy<Value = (Vec<f64>, Vec<bool>)> {
    prop_oneof![
        3 => 2usize..200,
        1 => LONG..(LONG + 600),
    ]
    .prop_flat_map(|n| {
        (
            prop::collection::vec(score(), n),
            prop::collection::vec(any::<bool>(), n),
        )
    })
    .prop_map(|(s, mut y)| {
        y[0] = true;
        y[1] = false;
        (s, y)
    })
}

proptest! {
    // Floor: 96 cases (see tests/common::proptest_cases).
    #![proptest_config(ProptestConfig::with_cases(common::proptest_cases(96)))]

    /// Every key sort gives the comparison sort's points and blocks, bit for bit.
    #[test]
    fn key_sorts_give_the_comparison_fit((s, y) in sample()) {
        let points = reference_points(&s, &y);
        let want = block_bits(&pav(&points));
        prop_assert_eq!(point_bits(&merge_ties(&s, &y)), point_bits(&points));
        for how in [KeySort::Auto, KeySort::Comparison, KeySort::Radix] {
            prop_assert_eq!(&block_bits(&fit_blocks_with(&s, &y, how)), &want, "{:?}", how);
        }
        prop_assert_eq!(block_bits(&fit_blocks(&s, &y)), want);
    }

    /// The fitted isotonic map (with and without pseudo-rows) is the one built
    /// from the comparison-sort blocks.
    #[test]
    fn fitted_map_is_unchanged((s, y) in sample(), m in prop::sample::select(vec![0.0, 1.5])) {
        let fitted = Isotonic { pseudo_count: m }.fit(&s, &y).unwrap();
        let base_rate = y.iter().filter(|&&l| l).count() as f64 / y.len() as f64;
        let want = shrink_blocks(&pav(&reference_points(&s, &y)), m, base_rate);
        let got = match fitted.map.state() {
            MapState::Isotonic(state) => state.blocks,
            _ => unreachable!("an isotonic fit saves isotonic blocks"),
        };
        prop_assert_eq!(block_bits(&got), block_bits(&want));
    }
}

/// A large sample with heavy ties, both zeros, subnormals and infinities.
#[test]
fn large_tied_sample_matches() {
    let n = 50_000;
    let mut h = 0x9E37_79B9_7F4A_7C15u64;
    let mut s = Vec::with_capacity(n);
    let mut y = Vec::with_capacity(n);
    for i in 0..n {
        h ^= h << 13;
        h ^= h >> 7;
        h ^= h << 17;
        s.push(match i % 4 {
            0 => EXTREMES[(h % EXTREMES.len() as u64) as usize],
            1 => (h % 97) as f64 / 96.0,
            _ => (h >> 11) as f64 / (1u64 << 53) as f64,
        });
        y.push((h >> 7) % 3 == 0);
    }
    let want = block_bits(&pav(&reference_points(&s, &y)));
    assert!(want.len() > 1);
    assert_eq!(block_bits(&fit_blocks(&s, &y)), want);
    assert_eq!(block_bits(&fit_blocks_with(&s, &y, KeySort::Radix)), want);
}
