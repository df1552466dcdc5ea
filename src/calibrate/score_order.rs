//! Sorting calibration scores with their labels and merging tied scores.
//!
//! Isotonic regression, binning, beta's separation check, the spline's tie
//! merge, Venn–Abers and the decomposition metrics all start the same way: sort
//! the (score, label) rows by score and collapse equal scores into one point
//! with a row count and a positive count. On large samples that sort is most of
//! the fit, so it is done here once, as fast as we know how.
//!
//! Order: `f64::total_cmp`, i.e. −∞ < negative numbers < −0.0 < +0.0 < positive
//! numbers < +∞ (NaNs at the ends by sign, by payload). [`order_key`] maps a
//! double to a `u64` whose unsigned order is exactly that order (flip the sign
//! bit of a positive double, every bit of a negative one), so sorting the keys
//! is sorting the scores. Subnormals keep their place (their bit patterns are
//! ordered like any other double of their sign).
//!
//! Ties: a run of scores equal under `==` is one point; that merges −0.0 with
//! +0.0 (they are adjacent in the total order) and leaves each NaN alone (NaN
//! is not equal to itself). The point's score is the first of the run in the
//! total order (−0.0 when both zeros occur). NaN is refused by the file readers
//! and by most methods before a fit; when it does reach here it is ordered as
//! `total_cmp` orders it.
//!
//! Algorithm: the keys of positive rows and of negative rows are written into
//! two halves of one buffer (so no label travels with a key), each half is
//! sorted on its own, and the two sorted halves are merged while counting.
//! Sorting plain `u64` keys instead of (score, label) pairs compared by
//! `total_cmp` halves the isotonic fit's time (docs/performance.md). Two sorts
//! of the keys are available: the standard library's unstable comparison sort
//! (the default) and a least-significant-digit radix sort with 11-bit digits
//! (six passes at most; a pass whose digit is the same for every key is
//! skipped). On the development machine the radix sort was slower than the
//! comparison sort at every size measured, 256 to 1,000,000 rows
//! (docs/bench/fits.txt), so [`KeySort::Auto`] picks the comparison sort; the
//! radix sort is kept, tested to give the same points, for machines where it
//! pays. Both sort the same keys into the same order, so the merged points do
//! not depend on which one ran.

const DIGIT_BITS: u32 = 11;
const BUCKETS: usize = 1 << DIGIT_BITS;
const PASSES: usize = 64usize.div_ceil(DIGIT_BITS as usize);

/// Which sort orders the keys.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum KeySort {
    /// The faster sort as measured (currently the comparison sort).
    Auto,
    /// Always the comparison sort.
    Comparison,
    /// Always the radix sort.
    Radix,
}

/// A `u64` whose unsigned order is the `f64::total_cmp` order of `x`.
#[inline]
pub fn order_key(x: f64) -> u64 {
    let b = x.to_bits();
    // Negative: all bits flipped; positive: only the sign bit.
    b ^ (((b as i64 >> 63) as u64) | (1 << 63))
}

/// The double whose [`order_key`] is `k`.
#[inline]
pub fn from_order_key(k: u64) -> f64 {
    let b = if k >> 63 == 1 { k ^ (1 << 63) } else { !k };
    f64::from_bits(b)
}

/// Sort keys in place with the chosen sort; `scratch` must be as long as `keys`.
fn sort_keys(keys: &mut [u64], scratch: &mut [u64], how: KeySort) {
    let radix = match how {
        KeySort::Auto | KeySort::Comparison => false,
        KeySort::Radix => true,
    };
    if radix {
        radix_sort(keys, scratch);
    } else {
        keys.sort_unstable();
    }
}

/// LSD radix sort of `keys` (ascending), using `scratch` of the same length.
pub fn radix_sort(keys: &mut [u64], scratch: &mut [u64]) {
    let n = keys.len();
    assert_eq!(scratch.len(), n, "radix sort: scratch length");
    if n < 2 {
        return;
    }
    // All digit histograms in one read.
    let mut counts = vec![[0usize; BUCKETS]; PASSES];
    for &k in keys.iter() {
        for (p, c) in counts.iter_mut().enumerate() {
            c[((k >> (p as u32 * DIGIT_BITS)) as usize) & (BUCKETS - 1)] += 1;
        }
    }
    let mut in_keys = true; // the data is in `keys` (else in `scratch`)
    for (p, c) in counts.iter_mut().enumerate() {
        let shift = p as u32 * DIGIT_BITS;
        // Every key has the same digit here: the pass would not move anything.
        if c.contains(&n) {
            continue;
        }
        // Exclusive prefix sums: where each bucket starts.
        let mut start = 0usize;
        for x in c.iter_mut() {
            let here = *x;
            *x = start;
            start += here;
        }
        let (src, dst): (&[u64], &mut [u64]) = if in_keys {
            (&*keys, &mut *scratch)
        } else {
            (&*scratch, &mut *keys)
        };
        for &k in src {
            let d = ((k >> shift) as usize) & (BUCKETS - 1);
            dst[c[d]] = k;
            c[d] += 1;
        }
        in_keys = !in_keys;
    }
    if !in_keys {
        keys.copy_from_slice(scratch);
    }
}

/// Sort (score, label) rows by score (`total_cmp` order), merge scores equal
/// under `==`, and call `f(score, rows, positives)` for each merged point in
/// increasing order. `scores` and `labels` must have the same length.
pub fn for_each_distinct(
    scores: &[f64],
    labels: &[bool],
    how: KeySort,
    mut f: impl FnMut(f64, u64, u64),
) {
    assert_eq!(
        scores.len(),
        labels.len(),
        "scores and labels differ in length"
    );
    let n = scores.len();
    if n == 0 {
        return;
    }
    let np = labels.iter().filter(|&&l| l).count();
    // Positives' keys in buf[..np], negatives' in buf[np..].
    let mut buf = vec![0u64; n];
    let (mut ip, mut ineg) = (0usize, np);
    for (&s, &l) in scores.iter().zip(labels) {
        let i = if l { ip } else { ineg };
        buf[i] = order_key(s);
        ip += l as usize;
        ineg += (!l) as usize;
    }
    let mut scratch = vec![0u64; n];
    {
        let (pos, neg) = buf.split_at_mut(np);
        let (sp, sn) = scratch.split_at_mut(np);
        sort_keys(pos, sp, how);
        sort_keys(neg, sn, how);
    }
    drop(scratch);
    let (pos, neg) = buf.split_at(np);
    let nn = neg.len();
    // Merge the two sorted halves, counting runs of equal scores.
    let (mut i, mut j) = (0usize, 0usize);
    let mut x = f64::NAN;
    let (mut rows, mut positives) = (0u64, 0u64);
    for step in 0..n {
        let a = pos.get(i).copied().unwrap_or(u64::MAX);
        let b = neg.get(j).copied().unwrap_or(u64::MAX);
        let take_pos = (i < np) & ((j >= nn) | (a <= b));
        let s = from_order_key(if take_pos { a } else { b });
        i += take_pos as usize;
        j += (!take_pos) as usize;
        if step > 0 && s == x {
            rows += 1;
            positives += take_pos as u64;
        } else {
            if step > 0 {
                f(x, rows, positives);
            }
            x = s;
            rows = 1;
            positives = take_pos as u64;
        }
    }
    f(x, rows, positives);
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The key order is `total_cmp`'s on the awkward doubles.
    #[test]
    fn key_order_matches_total_cmp() {
        let xs = [
            f64::NEG_INFINITY,
            -f64::MAX,
            -1.0,
            -f64::MIN_POSITIVE,
            -5e-324,
            -0.0,
            0.0,
            5e-324,
            2.2e-308,
            f64::MIN_POSITIVE,
            0.5,
            1.0,
            f64::MAX,
            f64::INFINITY,
            f64::NAN,
            -f64::NAN,
        ];
        for &a in &xs {
            assert_eq!(from_order_key(order_key(a)).to_bits(), a.to_bits());
            for &b in &xs {
                assert_eq!(order_key(a).cmp(&order_key(b)), a.total_cmp(&b), "{a} {b}");
            }
        }
    }

    /// Radix and comparison sorts agree, including on keys that differ only in
    /// the top digit and on runs where a digit is constant.
    #[test]
    fn radix_sort_sorts() {
        let mut state = 12345u64;
        let mut keys: Vec<u64> = (0..10_000)
            .map(|i| {
                state = state
                    .wrapping_mul(6364136223846793005)
                    .wrapping_add(1442695040888963407);
                match i % 3 {
                    0 => state,
                    1 => state & 0xFF,
                    _ => state & 0xFFF0_0000_0000_0000,
                }
            })
            .collect();
        let mut want = keys.clone();
        want.sort_unstable();
        let mut scratch = vec![0; keys.len()];
        radix_sort(&mut keys, &mut scratch);
        assert_eq!(keys, want);
    }

    /// Derived by hand: −0.0 and 0.0 are one point named −0.0; NaN rows stay apart.
    #[test]
    fn zeros_merge_nans_do_not() {
        let s = [0.0, 1.0, -0.0, f64::NAN, 1.0, f64::NAN];
        let y = [true, false, false, true, true, false];
        for how in [KeySort::Comparison, KeySort::Radix] {
            let mut got = Vec::new();
            for_each_distinct(&s, &y, how, |x, r, p| got.push((x.to_bits(), r, p)));
            assert_eq!(got.len(), 4);
            assert_eq!(got[0], ((-0.0f64).to_bits(), 2, 1));
            assert_eq!(got[1], (1.0f64.to_bits(), 2, 1));
            assert!(f64::from_bits(got[2].0).is_nan() && got[2].1 == 1);
            assert!(f64::from_bits(got[3].0).is_nan() && got[3].1 == 1);
        }
        let mut none = 0;
        for_each_distinct(&[], &[], KeySort::Auto, |_, _, _| none += 1);
        assert_eq!(none, 0);
    }
}
