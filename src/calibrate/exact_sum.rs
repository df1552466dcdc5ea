//! Order-free sums of many floating-point terms, for the maximum-likelihood
//! fitters (`logistic.rs`, `temperature.rs`): the sum is a function of the
//! multiset of terms alone, bit for bit, so a fit does not depend on the order
//! of the calibration rows, and no sort is needed to make it so.
//!
//! Method: every term x with |x| ≤ 2^β (β fixed for the whole sum, from a bound
//! the caller knows before summing) is split at two fixed grids,
//! q₁ = (x + M₁) − M₁ and q₂ = (r + M₂) − M₂ with r = x − q₁, where
//! M₁ = 1.5·2^(β+l) and M₂ = 1.5·2^(β+2l−53) for chunks of at most 2^l rows
//! (l = [`CHUNK_BITS`]). Because |x| < M₁/2, x + M₁ stays in the binade of M₁,
//! so q₁ is x rounded to a multiple of g₁ = ulp(M₁) = 2^(β+l−52), and r = x − q₁
//! is exact with |r| ≤ g₁/2; likewise q₂ is r rounded to a multiple of
//! g₂ = 2^(β+2l−105). This is the error-free extraction of Demmel & Nguyen
//! (2015, IEEE Trans. Computers 64, "Parallel reproducible summation").
//!
//! Range argument: within a chunk of at most 2^l terms, every partial sum of
//! the q₁ is a multiple of g₁ of magnitude at most 2^l·(2^β + g₁/2) < 2^53·g₁,
//! hence exactly representable: the chunk's f64 additions are exact. Its value
//! divided by g₁ is an integer below 2^53 and is added to an i128 (likewise
//! for q₂ and g₂). The two i128 totals stay below 2^(53+64) for up to 2^64
//! terms; they are combined in units of g₂ (a shift by 53 − l bits, below
//! 2^127 for up to 2^42 terms) and converted to f64 once, correctly rounded.
//! Integer addition is associative, so the result does not depend on the
//! order of the terms or on how they are cut into chunks. Each term loses only
//! its part below g₂/2 (the same for every order), so the sum is exact to
//! n·2^(β+2l−106), about 2^(β−64) for a million terms: far below the rounding
//! of a plain f64 sum whenever the largest term is within 2^20 of the bound
//! (callers check that and sum again with a tighter bound when it is not).
//!
//! Non-finite terms, or terms above the bound, are not summed correctly; the
//! callers bound their terms from the data and report a non-finite result
//! ([`Grid::for_bound`] gives `None` for a bound that is not finite).

/// Rows per chunk: 2^11.
pub const CHUNK_BITS: u32 = 11;
/// Rows per chunk.
pub const CHUNK: usize = 1 << CHUNK_BITS;

/// The two extraction constants of one sum.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Grid {
    m1: f64,
    m2: f64,
    g1: f64,
    g2: f64,
}

/// Smallest β used: keeps M₂ a normal number, so g₂ ≥ 2^-1074 (terms below
/// about 2^-970 keep fewer than 53 bits).
const MIN_EXP: i32 = -991;
/// Largest β: keeps M₁ finite.
const MAX_EXP: i32 = 1000;

/// 2^e for −1074 ≤ e ≤ 1023, exactly.
fn pow2(e: i32) -> f64 {
    if e >= -1022 {
        f64::from_bits(((e + 1023) as u64) << 52)
    } else {
        f64::from_bits(1u64 << (e + 1074))
    }
}

impl Grid {
    /// The grid for terms of magnitude at most `bound` (rounded up to a power
    /// of two). `None` when the bound is not finite or above 2^1000.
    pub fn for_bound(bound: f64) -> Option<Grid> {
        if !bound.is_finite() {
            return None;
        }
        let b = bound.abs();
        // Exponent of the next power of two ≥ b.
        let mut beta = if b < pow2(MIN_EXP) {
            MIN_EXP
        } else {
            let e = ((b.to_bits() >> 52) & 0x7ff) as i32 - 1023;
            if b > pow2(e) {
                e + 1
            } else {
                e
            }
        };
        beta = beta.max(MIN_EXP);
        if beta > MAX_EXP {
            return None;
        }
        let l = CHUNK_BITS as i32;
        Some(Grid {
            m1: 1.5 * pow2(beta + l),
            m2: 1.5 * pow2(beta + 2 * l - 53),
            g1: pow2(beta + l - 52),
            g2: pow2(beta + 2 * l - 105),
        })
    }
}

/// Next power of two ≥ |x| (0 for 0), computed exactly.
pub fn pow2_above(x: f64) -> f64 {
    let x = x.abs();
    if x == 0.0 || !x.is_finite() {
        return x;
    }
    let e = ((x.to_bits() >> 52) & 0x7ff) as i32;
    if e == 0 {
        return f64::MIN_POSITIVE;
    }
    let p = f64::from_bits((e as u64) << 52);
    if p == x {
        p
    } else {
        2.0 * p
    }
}

/// The f64 part of one sum inside a chunk.
#[derive(Debug, Clone, Copy, Default)]
pub struct Lane {
    s1: f64,
    s2: f64,
}

impl Lane {
    /// Add one term (|x| must not exceed the grid's bound).
    #[inline(always)]
    pub fn add(&mut self, x: f64, g: &Grid) {
        let q1 = (x + g.m1) - g.m1;
        let r = x - q1;
        let q2 = (r + g.m2) - g.m2;
        self.s1 += q1;
        self.s2 += q2;
    }

    /// Add a run of terms (at most [`CHUNK`] in the lane before a flush).
    /// Four interleaved partial sums let the compiler use vector registers;
    /// every partial sum is a multiple of the grid below 2^53 of its units,
    /// so the additions are exact in any grouping.
    #[inline]
    pub fn add_slice(&mut self, xs: &[f64], g: &Grid) {
        let (mut a1, mut a2) = ([0.0f64; 4], [0.0f64; 4]);
        let mut quads = xs.chunks_exact(4);
        for c in quads.by_ref() {
            for k in 0..4 {
                let q1 = (c[k] + g.m1) - g.m1;
                let r = c[k] - q1;
                a1[k] += q1;
                a2[k] += (r + g.m2) - g.m2;
            }
        }
        for &x in quads.remainder() {
            self.add(x, g);
        }
        self.s1 += (a1[0] + a1[1]) + (a1[2] + a1[3]);
        self.s2 += (a2[0] + a2[1]) + (a2[2] + a2[3]);
    }

    /// As [`Lane::add_slice`], keeping only the first part q₁ of each term:
    /// still order-free, exact to n·g₁/2 ≈ 2^(l−53) of n times the bound
    /// (about 2^-42 for l = 11), for sums that only steer an iteration.
    #[inline]
    pub fn add_slice_coarse(&mut self, xs: &[f64], g: &Grid) {
        let mut a1 = [0.0f64; 4];
        let mut quads = xs.chunks_exact(4);
        for c in quads.by_ref() {
            for k in 0..4 {
                a1[k] += (c[k] + g.m1) - g.m1;
            }
        }
        for &x in quads.remainder() {
            self.s1 += (x + g.m1) - g.m1;
        }
        self.s1 += (a1[0] + a1[1]) + (a1[2] + a1[3]);
    }
}

/// One sum across chunks, in integers.
#[derive(Debug, Clone, Copy, Default)]
pub struct Total {
    a1: i128,
    a2: i128,
}

impl Total {
    /// Move a chunk's lane into the total (and clear the lane).
    #[inline]
    pub fn flush(&mut self, lane: &mut Lane, g: &Grid) {
        // Both quotients are integers below 2^53 in magnitude (see the range
        // argument), so the conversions are exact.
        self.a1 += (lane.s1 / g.g1) as i64 as i128;
        self.a2 += (lane.s2 / g.g2) as i64 as i128;
        *lane = Lane::default();
    }
    /// Merge another total of the same grid.
    pub fn merge(&mut self, other: &Total) {
        self.a1 += other.a1;
        self.a2 += other.a2;
    }
    /// The sum, correctly rounded from its exact integer form (sums whose
    /// value is subnormal may be rounded twice).
    pub fn value(&self, g: &Grid) -> f64 {
        let units = (self.a1 << (53 - CHUNK_BITS)) + self.a2;
        // One rounding to f64, then a power-of-two scaling, exact unless the
        // result is subnormal.
        units as f64 * g.g2
    }
}

/// Sum of `terms` (each at most `bound` in magnitude), order-free.
pub fn sum_bounded(terms: impl Iterator<Item = f64>, bound: f64) -> f64 {
    let Some(g) = Grid::for_bound(bound) else {
        return f64::NAN;
    };
    let mut total = Total::default();
    let mut lane = Lane::default();
    let mut k = 0;
    for x in terms {
        lane.add(x, &g);
        k += 1;
        if k == CHUNK {
            total.flush(&mut lane, &g);
            k = 0;
        }
    }
    total.flush(&mut lane, &g);
    total.value(&g)
}

/// Sum of a slice, order-free (the bound is the largest magnitude).
pub fn sum(xs: &[f64]) -> f64 {
    let bound = xs.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    if xs.iter().any(|x| !x.is_finite()) {
        return xs.iter().sum();
    }
    sum_bounded(xs.iter().copied(), bound)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::split::splitmix64;

    fn unit(h: u64) -> f64 {
        ((h >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }

    /// Integers and small dyadic fractions are summed exactly: the result is
    /// the exact sum (checked in integer arithmetic).
    #[test]
    fn dyadic_terms_sum_exactly() {
        let xs: Vec<f64> = (0..10_000u64)
            .map(|i| ((splitmix64(i) % 2001) as f64 - 1000.0) / 64.0)
            .collect();
        let exact: i64 = xs.iter().map(|x| (x * 64.0) as i64).sum();
        assert_eq!(sum(&xs), exact as f64 / 64.0);
    }

    /// Any permutation, and any cut into chunks, gives the same bits, also
    /// for terms of widely different magnitude and sign, where a plain f64
    /// sum depends on the order.
    #[test]
    fn permutations_give_identical_bits() {
        let n = 5000u64;
        let xs: Vec<f64> = (0..n)
            .map(|i| {
                let m = unit(splitmix64(2 * i)) - 0.5;
                m * 2f64.powi((splitmix64(2 * i + 1) % 80) as i32 - 40)
            })
            .collect();
        let base = sum(&xs);
        let mut rev = xs.clone();
        rev.reverse();
        assert_eq!(sum(&rev).to_bits(), base.to_bits());
        let mut sorted = xs.clone();
        sorted.sort_by(f64::total_cmp);
        assert_eq!(sum(&sorted).to_bits(), base.to_bits());
        // A plain sum does change with the order here (so the check has teeth).
        let plain_a: f64 = xs.iter().sum();
        let plain_b: f64 = sorted.iter().sum();
        assert_ne!(plain_a.to_bits(), plain_b.to_bits());
        // Two totals over halves merged give the same bits.
        let g = Grid::for_bound(1e13).unwrap();
        let half = |part: &[f64]| {
            let (mut t, mut l) = (Total::default(), Lane::default());
            for c in part.chunks(7) {
                for &x in c {
                    l.add(x, &g);
                }
                t.flush(&mut l, &g);
            }
            t
        };
        let mut a = half(&xs[..1234]);
        a.merge(&half(&xs[1234..]));
        assert_eq!(
            a.value(&g).to_bits(),
            sum_bounded(xs.iter().copied(), 1e13).to_bits()
        );
    }

    /// Accuracy: against a compensated (Neumaier) sum of the same terms, far
    /// within the rounding of either.
    #[test]
    fn accurate_to_rounding() {
        let xs: Vec<f64> = (0..100_000u64)
            .map(|i| (unit(splitmix64(i)) - 0.3) * 1e3)
            .collect();
        let (mut s, mut c) = (0.0f64, 0.0f64);
        for &x in &xs {
            let t = s + x;
            c += if s.abs() >= x.abs() {
                (s - t) + x
            } else {
                (x - t) + s
            };
            s = t;
        }
        let want = s + c;
        let got = sum(&xs);
        assert!(
            (got - want).abs() <= 2.0 * f64::EPSILON * want.abs(),
            "{got} vs {want}"
        );
    }

    #[test]
    fn tiny_and_huge_bounds() {
        assert_eq!(sum(&[1e-300, 2e-300]), 1e-300 + 2e-300);
        assert_eq!(sum(&[0.0, 0.0]), 0.0);
        assert!(Grid::for_bound(f64::INFINITY).is_none());
        assert!(Grid::for_bound(1e305).is_none());
        assert!(sum_bounded([1.0].into_iter(), f64::NAN).is_nan());
        assert_eq!(sum(&[1e250, 1e250]), 2e250);
    }
}
