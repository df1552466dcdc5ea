//! The Bayesian signed-rank test with a region of practical equivalence
//! (rope), after Benavoli, Corani, Demšar & Zaffalon (2017, JMLR 18, "Time for
//! a change: a tutorial for comparing multiple classifiers through Bayesian
//! analysis", §5; the test itself is Benavoli et al. 2014, ICML, "A Bayesian
//! Wilcoxon signed-rank test based on the Dirichlet process").
//!
//! Input: differences z₁ … zₙ of a loss, method A − method B, one per
//! independent case (for plumbline: one per dataset), and a rope half-width
//! r ≥ 0. Below zero means A is better.
//!
//! * Prior: a Dirichlet process DP(s, δ₀) — strength s (0.5 in the paper and
//!   by default here), all prior mass as one pseudo-observation z₀ = 0.
//! * Posterior: DP(s + n, …), sampled as weights
//!   (w₀, w₁, …, wₙ) ~ Dirichlet(s, 1, …, 1) on {z₀, z₁, …, zₙ}
//!   (Benavoli et al. 2017, eq. 8 and the sampling step after it).
//! * Per posterior sample, the probabilities of the three regions from the
//!   weighted Walsh averages (zᵢ + zⱼ)/2 over all ordered pairs i, j = 0 … n
//!   (the i = j terms included):
//!   θ_left = Σᵢⱼ wᵢwⱼ I(zᵢ + zⱼ < −2r), θ_right = Σᵢⱼ wᵢwⱼ I(zᵢ + zⱼ > 2r),
//!   θ_rope = 1 − θ_left − θ_right (eq. 9). A Walsh average exactly on a
//!   boundary counts one half on each side. With r = 0 there is no rope
//!   region: θ_left = 1 − θ_right, ties at zero split evenly.
//! * Reported: the share of posterior samples in which each region has the
//!   largest θ (ties to the first of left, rope, right), i.e. the posterior
//!   probability that A is better, practically equivalent, or worse — the
//!   quantity the paper reports and the one `baycomp` (Benavoli, Corani &
//!   Demšar's Python package) returns from `SignedRankTest.probs`. The
//!   posterior means of the three θ are kept as well.
//!
//! Sampling: Dirichlet weights as normalised Gamma variates (Gamma(1) is the
//! exponential −ln U; other shapes by Marsaglia & Tsang 2000, ACM TOMS 26, "A
//! simple method for generating gamma variables", with their U^(1/a) boost
//! for shapes below 1), uniforms and normals from ChaCha8 seeded through
//! [`crate::split::rng`]. One sequential stream per call: the result depends
//! on the seed alone, not on the thread count.
//!
//! Cost: the pair counts I(zᵢ + zⱼ < −2r) are fixed by the data, so after
//! sorting they are prefix counts per i, and each posterior sample takes
//! O(n) (prefix sums of the weights) rather than O(n²).

use rand_chacha::rand_core::Rng;
use rand_chacha::ChaCha8Rng;
use serde::Serialize;

use super::StatsError;

/// Prior strength of the pseudo-observation at zero used by Benavoli et al.
/// (2017, §5) and by `baycomp`.
pub const DEFAULT_PRIOR: f64 = 0.5;

/// Posterior samples drawn by default (`baycomp`'s default as well).
pub const DEFAULT_SAMPLES: usize = 50_000;

/// Posterior probabilities of the three regions for A − B.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SignedRank {
    /// Differences (cases) that entered.
    pub n: usize,
    pub rope: f64,
    pub prior: f64,
    pub samples: usize,
    /// Share of posterior samples in which "A − B < −rope" is the most
    /// probable region: A is better.
    pub better: f64,
    /// Share in which "|A − B| ≤ rope" is the most probable region.
    pub equivalent: f64,
    /// Share in which "A − B > rope" is the most probable region: A is worse.
    pub worse: f64,
    /// Posterior means of θ_left, θ_rope, θ_right.
    pub mean_theta: [f64; 3],
}

impl SignedRank {
    /// Monte Carlo standard error of a share `p` estimated from these samples:
    /// √(p(1 − p)/samples).
    pub fn mc_se(&self, p: f64) -> f64 {
        (p * (1.0 - p) / self.samples as f64).sqrt()
    }
}

/// Uniform on the open interval (0, 1) from 53 random bits.
fn uniform(rng: &mut ChaCha8Rng) -> f64 {
    ((rng.next_u64() >> 11) as f64 + 0.5) * (1.0 / (1u64 << 53) as f64)
}

/// Standard normal by the Box–Muller transform (one of the pair).
fn normal(rng: &mut ChaCha8Rng) -> f64 {
    let u = uniform(rng);
    let v = uniform(rng);
    (-2.0 * u.ln()).sqrt() * (std::f64::consts::TAU * v).cos()
}

/// Gamma(shape, 1) variate, shape > 0.
fn gamma(shape: f64, rng: &mut ChaCha8Rng) -> f64 {
    if shape == 1.0 {
        return -uniform(rng).ln();
    }
    if shape < 1.0 {
        // Marsaglia & Tsang (2000), §6: Gamma(a) = Gamma(a + 1) · U^(1/a).
        let g = gamma(shape + 1.0, rng);
        return g * uniform(rng).powf(1.0 / shape);
    }
    let d = shape - 1.0 / 3.0;
    let c = 1.0 / (9.0 * d).sqrt();
    loop {
        let x = normal(rng);
        let v = 1.0 + c * x;
        if v <= 0.0 {
            continue;
        }
        let v = v * v * v;
        let u = uniform(rng);
        if u < 1.0 - 0.0331 * x * x * x * x || u.ln() < 0.5 * x * x + d * (1.0 - v + v.ln()) {
            return d * v;
        }
    }
}

/// The pair counts of the observations z (pseudo-observation included) for
/// rope half-width r: for each i, how many j have zᵢ + zⱼ < −2r (`lt`),
/// ≤ −2r (`le`), > 2r (`gt`), ≥ 2r (`ge`). The sum is monotone in zⱼ, so
/// these are prefix (suffix) lengths in the sorted order `order`.
struct PairCounts {
    order: Vec<usize>,
    lt: Vec<usize>,
    le: Vec<usize>,
    gt: Vec<usize>,
    ge: Vec<usize>,
}

impl PairCounts {
    fn new(z: &[f64], rope: f64) -> Self {
        let m = z.len();
        let mut order: Vec<usize> = (0..m).collect();
        order.sort_by(|&a, &b| z[a].total_cmp(&z[b]));
        let two_r = 2.0 * rope;
        let mut c = PairCounts {
            order,
            lt: vec![0; m],
            le: vec![0; m],
            gt: vec![0; m],
            ge: vec![0; m],
        };
        for (i, &zi) in z.iter().enumerate() {
            for &zj in z {
                let s = zi + zj;
                c.lt[i] += (s < -two_r) as usize;
                c.le[i] += (s <= -two_r) as usize;
                c.gt[i] += (s > two_r) as usize;
                c.ge[i] += (s >= two_r) as usize;
            }
        }
        c
    }

    /// (θ_left, θ_right) for weights `w` (summing to 1):
    /// Σᵢ wᵢ · ½(W(first ltᵢ) + W(first leᵢ)) and the mirror on the right,
    /// with W the weight of sorted prefixes; `prefix` is scratch of length
    /// m + 1.
    fn thetas(&self, w: &[f64], prefix: &mut [f64]) -> (f64, f64) {
        let m = w.len();
        prefix[0] = 0.0;
        for k in 0..m {
            prefix[k + 1] = prefix[k] + w[self.order[k]];
        }
        let full = prefix[m];
        let mut left = 0.0;
        let mut right = 0.0;
        for i in 0..m {
            left += w[i] * 0.5 * (prefix[self.lt[i]] + prefix[self.le[i]]);
            right +=
                w[i] * 0.5 * ((full - prefix[m - self.gt[i]]) + (full - prefix[m - self.ge[i]]));
        }
        (left, right)
    }
}

/// The Bayesian signed-rank test with rope half-width `rope` on the
/// differences `diffs` (A − B of a loss, one per independent case), prior
/// strength `prior` at zero, `samples` posterior samples from `seed`.
///
/// Errors (no panic) on fewer than 2 differences, a non-finite difference, a
/// negative or non-finite rope, a prior strength that is not positive and
/// finite, or zero samples.
pub fn signed_rank(
    diffs: &[f64],
    rope: f64,
    prior: f64,
    samples: usize,
    seed: u64,
) -> Result<SignedRank, StatsError> {
    if diffs.len() < 2 {
        return Err(StatsError::Shape(format!(
            "the Bayesian signed-rank test needs at least 2 differences (one per case), got {}",
            diffs.len()
        )));
    }
    if diffs.iter().any(|d| !d.is_finite()) {
        return Err(StatsError::NonFinite("difference of the signed-rank test"));
    }
    if !(rope.is_finite() && rope >= 0.0) {
        return Err(StatsError::Shape(format!(
            "the rope half-width must be finite and 0 or more, got {rope}"
        )));
    }
    if !(prior.is_finite() && prior > 0.0) {
        return Err(StatsError::Shape(format!(
            "the prior strength must be finite and above 0, got {prior}"
        )));
    }
    if samples == 0 {
        return Err(StatsError::Shape(
            "the signed-rank test needs at least 1 posterior sample, got 0".into(),
        ));
    }
    // Observations with the pseudo-observation first.
    let z: Vec<f64> = std::iter::once(0.0).chain(diffs.iter().copied()).collect();
    let m = z.len();
    let counts = PairCounts::new(&z, rope);
    let alpha: Vec<f64> = (0..m).map(|i| if i == 0 { prior } else { 1.0 }).collect();
    let mut rng = crate::split::rng(seed);
    let mut w = vec![0.0; m];
    let mut prefix = vec![0.0; m + 1];
    let mut wins = [0usize; 3];
    let mut theta_sum = [0.0f64; 3];
    for _ in 0..samples {
        let mut total = 0.0;
        for (wi, &a) in w.iter_mut().zip(&alpha) {
            *wi = gamma(a, &mut rng);
            total += *wi;
        }
        for wi in w.iter_mut() {
            *wi /= total;
        }
        let (left, right) = counts.thetas(&w, &mut prefix);
        let theta = if rope > 0.0 {
            [left, 1.0 - left - right, right]
        } else {
            [1.0 - right, 0.0, right]
        };
        let mut best = 0;
        for k in 1..3 {
            if theta[k] > theta[best] {
                best = k;
            }
        }
        wins[best] += 1;
        for k in 0..3 {
            theta_sum[k] += theta[k];
        }
    }
    let s = samples as f64;
    Ok(SignedRank {
        n: diffs.len(),
        rope,
        prior,
        samples,
        better: wins[0] as f64 / s,
        equivalent: wins[1] as f64 / s,
        worse: wins[2] as f64 / s,
        mean_theta: theta_sum.map(|t| t / s),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn run(d: &[f64], rope: f64, seed: u64) -> SignedRank {
        signed_rank(d, rope, DEFAULT_PRIOR, 20_000, seed).unwrap()
    }

    #[test]
    fn far_beyond_the_rope_on_the_better_side_is_better() {
        let d: Vec<f64> = (0..12).map(|i| -1.0 - 0.1 * i as f64).collect();
        let r = run(&d, 0.05, 1);
        assert!(r.better > 0.999, "{r:?}");
        assert!(r.worse < 1e-3);
        // Mirrored: worse.
        let m: Vec<f64> = d.iter().map(|x| -x).collect();
        let r = run(&m, 0.05, 1);
        assert!(r.worse > 0.999, "{r:?}");
    }

    #[test]
    fn all_within_the_rope_is_equivalent() {
        let d = [
            0.01, -0.02, 0.005, 0.0, -0.01, 0.015, 0.02, -0.005, 0.0, 0.01,
        ];
        let r = run(&d, 0.1, 2);
        assert!(r.equivalent > 0.999, "{r:?}");
        // Every Walsh average lies in the rope, so θ_rope = 1 in every sample.
        assert!((r.mean_theta[1] - 1.0).abs() < 1e-12, "{r:?}");
    }

    #[test]
    fn the_same_seed_gives_the_same_answer_and_another_seed_a_close_one() {
        let d = [0.3, -0.1, 0.25, 0.05, -0.2, 0.4, 0.1, 0.0, 0.15, -0.05];
        let a = run(&d, 0.1, 7);
        let b = run(&d, 0.1, 7);
        assert_eq!(a, b);
        let c = run(&d, 0.1, 8);
        assert_ne!(a, c);
        for (x, y) in [
            (a.better, c.better),
            (a.equivalent, c.equivalent),
            (a.worse, c.worse),
        ] {
            let se = (a.mc_se(x).powi(2) + c.mc_se(y).powi(2)).sqrt();
            assert!((x - y).abs() <= 4.0 * se + 1e-12, "{a:?} vs {c:?}");
        }
        assert!((a.better + a.equivalent + a.worse - 1.0).abs() < 1e-12);
    }

    #[test]
    fn too_few_or_bad_inputs_are_errors_not_panics() {
        let e = signed_rank(&[], 0.1, 0.5, 100, 1).unwrap_err();
        assert!(e.to_string().contains("at least 2 differences"), "{e}");
        assert!(e.to_string().contains("got 0"), "{e}");
        let e = signed_rank(&[0.3], 0.1, 0.5, 100, 1).unwrap_err();
        assert!(e.to_string().contains("got 1"), "{e}");
        assert!(signed_rank(&[0.3, f64::NAN], 0.1, 0.5, 100, 1).is_err());
        let e = signed_rank(&[0.3, 0.1], -0.1, 0.5, 100, 1).unwrap_err();
        assert!(e.to_string().contains("rope"), "{e}");
        assert!(signed_rank(&[0.3, 0.1], f64::NAN, 0.5, 100, 1).is_err());
        assert!(signed_rank(&[0.3, 0.1], 0.1, 0.0, 100, 1).is_err());
        assert!(signed_rank(&[0.3, 0.1], 0.1, 0.5, 0, 1).is_err());
    }

    #[test]
    fn the_fast_sums_match_the_direct_double_sum() {
        // θ from prefix counts against Σᵢⱼ wᵢwⱼ H(·) written out, for fixed
        // weights, with ties on the rope boundary and at zero.
        let z = [0.0, -0.3, 0.1, 0.1, -0.1, 0.2, 0.0, 0.5];
        let w = [0.05, 0.2, 0.1, 0.15, 0.1, 0.1, 0.2, 0.1];
        let r2 = 0.2;
        let h = |x: f64| {
            if x > 0.0 {
                1.0
            } else if x == 0.0 {
                0.5
            } else {
                0.0
            }
        };
        let mut left = 0.0;
        let mut right = 0.0;
        for i in 0..z.len() {
            for j in 0..z.len() {
                let s: f64 = z[i] + z[j];
                left += w[i] * w[j] * h(-s - r2);
                right += w[i] * w[j] * h(s - r2);
            }
        }
        // Same weights through the sampler's bookkeeping (r2 = 2r).
        let c = PairCounts::new(&z, r2 / 2.0);
        let mut prefix = vec![0.0; z.len() + 1];
        let (l2, r2b) = c.thetas(&w, &mut prefix);
        assert!((left - l2).abs() < 1e-12, "{left} vs {l2}");
        assert!((right - r2b).abs() < 1e-12, "{right} vs {r2b}");
    }

    #[test]
    fn gamma_variates_have_the_right_mean_and_variance() {
        // Gamma(a, 1): mean a, variance a.
        for a in [0.5, 1.0, 2.5] {
            let mut rng = crate::split::rng(11);
            let n = 200_000;
            let x: Vec<f64> = (0..n).map(|_| gamma(a, &mut rng)).collect();
            let (m, v) = crate::stats::mean_var(&x);
            // 5 standard errors of the mean (√(a/n)) and a loose check on v.
            assert!(
                (m - a).abs() < 5.0 * (a / n as f64).sqrt(),
                "a = {a}: mean {m}"
            );
            assert!((v - a).abs() < 0.05 * a, "a = {a}: variance {v}");
        }
    }
}
