//! Comparisons of several methods over many tasks, following Demšar (2006,
//! JMLR 7, "Statistical comparisons of classifiers over multiple data sets").
//!
//! Input: one value per (task, method) — for plumbline the mean paired loss of
//! a method at one calibration size — as a matrix `values[task][method]`; lower
//! is better (losses).
//!
//! * Ranks: within each task methods are ranked 1 (best) … k; tied values get
//!   the average of the ranks they span. R_j is method j's average rank.
//! * Friedman (1937, JASA 32): χ²_F = 12N/(k(k+1)) [Σ_j R_j² − k(k+1)²/4] with
//!   k − 1 df (Demšar eq. 1). With ties within tasks we divide by
//!   C = 1 − Σ(t³ − t)/(N(k³ − k)) over tie groups (Conover 1999, "Practical
//!   Nonparametric Statistics", §5.8), which leaves untied data unchanged.
//! * Iman & Davenport (1980, Comm. Statist. A 9): F_F = (N − 1)χ²_F / (N(k − 1) − χ²_F)
//!   with (k − 1, (k − 1)(N − 1)) df (Demšar eq. 2).
//! * Nemenyi (1963) critical difference CD = q_α √(k(k+1)/(6N)) with q_α from
//!   Demšar Table 5(a) (studentized range quantile / √2) for α = 0.05 and 0.10
//!   and k ≤ 10; for more methods or another α, from the range distribution of
//!   k standard normals by quadrature ([`normal_range_cdf`]).
//! * Wilcoxon (1945, Biometrics Bulletin 1) signed-rank test of a method against
//!   the best-ranked one over tasks: ranks of |d| with average ranks for ties;
//!   zero differences are split evenly between R⁺ and R⁻ (Demšar §3.1.3);
//!   T = min(R⁺, R⁻). The p-value is exact (the null distribution of R⁺ by
//!   enumeration) when N ≤ 50 with no zero and no tied |d|; otherwise the normal
//!   approximation z = (R⁺ − N(N+1)/4)/σ with
//!   σ² = N(N+1)(2N+1)/24 − Σ(t³ − t)/48, without continuity correction.
//! * Holm (1979, Scand. J. Statist. 6) step-down adjustment of the k − 1
//!   p-values against the best method.
//! * Counts across tasks of the per-task verdicts (better / equivalent /
//!   undetermined / worse) are kept by the analysis with
//!   [`super::verdict::VerdictCounts`].

use serde::Serialize;
use statrs::distribution::{ChiSquared, ContinuousCDF, FisherSnedecor, Normal};

use super::StatsError;

/// Ranks 1..n of `v` (1 = smallest), ties get their average rank.
pub fn ranks(v: &[f64]) -> Vec<f64> {
    let mut idx: Vec<usize> = (0..v.len()).collect();
    idx.sort_by(|&a, &b| v[a].total_cmp(&v[b]));
    let mut out = vec![0.0; v.len()];
    let mut i = 0;
    while i < idx.len() {
        let mut j = i;
        while j + 1 < idx.len() && v[idx[j + 1]] == v[idx[i]] {
            j += 1;
        }
        let r = (i + j) as f64 / 2.0 + 1.0;
        for &k in &idx[i..=j] {
            out[k] = r;
        }
        i = j + 1;
    }
    out
}

/// Σ (t³ − t) over groups of equal values.
fn tie_sum(v: &[f64]) -> f64 {
    let mut s: Vec<f64> = v.to_vec();
    s.sort_by(|a, b| a.total_cmp(b));
    let mut acc = 0.0;
    let mut i = 0;
    while i < s.len() {
        let mut j = i;
        while j + 1 < s.len() && s[j + 1] == s[i] {
            j += 1;
        }
        let t = (j - i + 1) as f64;
        acc += t * t * t - t;
        i = j + 1;
    }
    acc
}

/// Friedman and Iman–Davenport tests on one matrix.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Friedman {
    pub tasks: usize,
    pub methods: usize,
    pub avg_ranks: Vec<f64>,
    pub chi2: f64,
    pub chi2_p: f64,
    pub ff: f64,
    pub ff_df1: f64,
    pub ff_df2: f64,
    pub ff_p: f64,
}

fn check_matrix(values: &[Vec<f64>]) -> Result<usize, StatsError> {
    let k = values.first().map(|r| r.len()).unwrap_or(0);
    if values.len() < 2 || k < 2 {
        return Err(StatsError::Shape(format!(
            "need at least 2 tasks and 2 methods, got {} × {}",
            values.len(),
            k
        )));
    }
    if values.iter().any(|r| r.len() != k) {
        return Err(StatsError::Shape(
            "every task needs a value for every method".into(),
        ));
    }
    if values.iter().flatten().any(|x| !x.is_finite()) {
        return Err(StatsError::NonFinite("method value"));
    }
    Ok(k)
}

/// Friedman χ²_F and Iman–Davenport F_F from average ranks alone (no ties).
pub fn friedman_from_ranks(avg_ranks: &[f64], tasks: usize) -> Result<Friedman, StatsError> {
    friedman_core(avg_ranks.to_vec(), tasks, 1.0)
}

fn friedman_core(avg_ranks: Vec<f64>, n: usize, tie_c: f64) -> Result<Friedman, StatsError> {
    let k = avg_ranks.len();
    if k < 2 || n < 2 {
        return Err(StatsError::Shape(
            "the Friedman test needs at least 2 tasks and 2 methods".into(),
        ));
    }
    let (kf, nf) = (k as f64, n as f64);
    let ss: f64 = avg_ranks.iter().map(|r| r * r).sum();
    let mut chi2 = 12.0 * nf / (kf * (kf + 1.0)) * (ss - kf * (kf + 1.0).powi(2) / 4.0);
    if tie_c > 0.0 {
        chi2 /= tie_c;
    }
    let chi2 = chi2.max(0.0);
    fn dist(e: impl std::fmt::Display) -> StatsError {
        StatsError::Distribution(e.to_string())
    }
    let chi2_p = ChiSquared::new(kf - 1.0).map_err(dist)?.sf(chi2);
    let df1 = kf - 1.0;
    let df2 = (kf - 1.0) * (nf - 1.0);
    let den = nf * (kf - 1.0) - chi2;
    let (ff, ff_p) = if den > 1e-12 * nf * kf {
        let ff = (nf - 1.0) * chi2 / den;
        (ff, FisherSnedecor::new(df1, df2).map_err(dist)?.sf(ff))
    } else {
        // All tasks rank the methods identically: the statistic is unbounded.
        (f64::INFINITY, 0.0)
    };
    Ok(Friedman {
        tasks: n,
        methods: k,
        avg_ranks,
        chi2,
        chi2_p,
        ff,
        ff_df1: df1,
        ff_df2: df2,
        ff_p,
    })
}

/// Friedman and Iman–Davenport tests on `values[task][method]` (lower is better).
pub fn friedman(values: &[Vec<f64>]) -> Result<Friedman, StatsError> {
    let k = check_matrix(values)?;
    let n = values.len();
    let mut avg = vec![0.0; k];
    let mut ties = 0.0;
    for row in values {
        for (a, r) in avg.iter_mut().zip(ranks(row)) {
            *a += r / n as f64;
        }
        ties += tie_sum(row);
    }
    let kf = k as f64;
    let c = 1.0 - ties / (n as f64 * (kf * kf * kf - kf));
    friedman_core(avg, n, c)
}

/// Nemenyi q_α for k = 2..10 methods: Demšar (2006) Table 5(a).
const Q_05: [f64; 9] = [
    1.960, 2.343, 2.569, 2.728, 2.850, 2.949, 3.031, 3.102, 3.164,
];
const Q_10: [f64; 9] = [
    1.645, 2.052, 2.291, 2.459, 2.589, 2.693, 2.780, 2.855, 2.920,
];

/// P(R ≤ r) for the range R of k independent standard normals (the
/// studentized range with infinite degrees of freedom):
/// k ∫ φ(z) [Φ(z) − Φ(z − r)]^(k−1) dz, by composite Simpson on [−9, 9 + r].
pub fn normal_range_cdf(r: f64, k: usize) -> f64 {
    if r <= 0.0 {
        return 0.0;
    }
    let norm = match Normal::new(0.0, 1.0) {
        Ok(n) => n,
        Err(_) => return f64::NAN,
    };
    let (a, b) = (-9.0, 9.0 + r);
    let m = 4000; // even
    let h = (b - a) / m as f64;
    let f = |z: f64| {
        let d = (norm.cdf(z) - norm.cdf(z - r)).max(0.0);
        (-0.5 * z * z).exp() / (2.0 * std::f64::consts::PI).sqrt() * d.powi(k as i32 - 1)
    };
    let mut sum = f(a) + f(b);
    for i in 1..m {
        let z = a + i as f64 * h;
        sum += if i % 2 == 1 { 4.0 * f(z) } else { 2.0 * f(z) };
    }
    (k as f64 * sum * h / 3.0).clamp(0.0, 1.0)
}

/// q_α of the Nemenyi test for `k` methods: the 1 − α quantile of the
/// studentized range with infinite degrees of freedom, divided by √2 (Demšar
/// 2006, section 3.2.2). For α = 0.05 and 0.10 and 2 ≤ k ≤ 10 the value is
/// Demšar's Table 5(a); otherwise it is computed by bisection on
/// [`normal_range_cdf`] (which reproduces that table to its three decimals).
pub fn nemenyi_q(k: usize, alpha: f64) -> Result<f64, StatsError> {
    if k < 2 {
        return Err(StatsError::Shape(format!(
            "the Nemenyi test needs at least 2 methods, got {k}"
        )));
    }
    if !(alpha > 0.0 && alpha < 1.0) {
        return Err(StatsError::Shape(format!(
            "α must lie in (0, 1), got {alpha}"
        )));
    }
    if (2..=10).contains(&k) {
        if (alpha - 0.05).abs() < 1e-12 {
            return Ok(Q_05[k - 2]);
        }
        if (alpha - 0.10).abs() < 1e-12 {
            return Ok(Q_10[k - 2]);
        }
    }
    Ok(nemenyi_q_computed(k, alpha))
}

/// q_α computed from the normal range distribution (see [`nemenyi_q`]).
pub fn nemenyi_q_computed(k: usize, alpha: f64) -> f64 {
    let (mut lo, mut hi) = (0.0f64, 20.0f64);
    for _ in 0..60 {
        let mid = 0.5 * (lo + hi);
        if normal_range_cdf(mid, k) < 1.0 - alpha {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi) / std::f64::consts::SQRT_2
}

/// Nemenyi critical difference of average ranks for k methods over n tasks.
pub fn nemenyi_cd(k: usize, tasks: usize, alpha: f64) -> Result<f64, StatsError> {
    let q = nemenyi_q(k, alpha)?;
    let (kf, nf) = (k as f64, tasks as f64);
    Ok(q * (kf * (kf + 1.0) / (6.0 * nf)).sqrt())
}

/// How a Wilcoxon p-value was obtained.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum PMethod {
    Exact,
    Normal,
}

/// Wilcoxon signed-rank test of paired differences d (two-sided).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Wilcoxon {
    pub n: usize,
    pub r_plus: f64,
    pub r_minus: f64,
    /// T = min(R⁺, R⁻).
    pub t: f64,
    /// z of the normal approximation (also given when the p-value is exact).
    pub z: f64,
    pub p: f64,
    pub method: PMethod,
}

/// Number of subsets of {1..n} with each rank sum 0..=n(n+1)/2.
fn signed_rank_counts(n: usize) -> Vec<f64> {
    let max = n * (n + 1) / 2;
    let mut c = vec![0.0f64; max + 1];
    c[0] = 1.0;
    for r in 1..=n {
        for s in (r..=max).rev() {
            c[s] += c[s - r];
        }
    }
    c
}

/// Exact two-sided p-value P(min(R⁺, R⁻) ≤ t) for n untied nonzero differences.
pub fn wilcoxon_exact_p(n: usize, t: f64) -> f64 {
    let c = signed_rank_counts(n);
    let total = 2f64.powi(n as i32);
    let lim = t.floor() as usize;
    let tail: f64 = c.iter().take(lim + 1).sum::<f64>() / total;
    (2.0 * tail).min(1.0)
}

/// Largest T whose exact two-sided p-value is ≤ α for n differences (None when
/// even T = 0 is not significant), i.e. the critical value of printed tables.
pub fn wilcoxon_critical(n: usize, alpha: f64) -> Option<usize> {
    let c = signed_rank_counts(n);
    let total = 2f64.powi(n as i32);
    let mut acc = 0.0;
    let mut best = None;
    for (t, &x) in c.iter().enumerate() {
        acc += x;
        if 2.0 * acc / total <= alpha {
            best = Some(t);
        } else {
            break;
        }
    }
    best
}

/// Largest N with an exact p-value.
pub const WILCOXON_EXACT_MAX: usize = 50;

/// Wilcoxon signed-rank test on paired differences `d`.
pub fn wilcoxon(d: &[f64]) -> Result<Wilcoxon, StatsError> {
    if d.is_empty() {
        return Err(StatsError::Shape(
            "the Wilcoxon test needs at least one pair".into(),
        ));
    }
    if d.iter().any(|x| !x.is_finite()) {
        return Err(StatsError::NonFinite("paired difference"));
    }
    let abs: Vec<f64> = d.iter().map(|x| x.abs()).collect();
    let r = ranks(&abs);
    let (mut rp, mut rm) = (0.0, 0.0);
    for (&x, &ri) in d.iter().zip(&r) {
        if x > 0.0 {
            rp += ri;
        } else if x < 0.0 {
            rm += ri;
        } else {
            rp += ri / 2.0;
            rm += ri / 2.0;
        }
    }
    let n = d.len();
    let nf = n as f64;
    let has_zero = d.contains(&0.0);
    let ties = tie_sum(&abs);
    let var = nf * (nf + 1.0) * (2.0 * nf + 1.0) / 24.0 - ties / 48.0;
    let z = if var > 0.0 {
        (rp - nf * (nf + 1.0) / 4.0) / var.sqrt()
    } else {
        0.0
    };
    let t = rp.min(rm);
    let (p, method) = if n <= WILCOXON_EXACT_MAX && !has_zero && ties == 0.0 {
        (wilcoxon_exact_p(n, t), PMethod::Exact)
    } else {
        let norm = Normal::new(0.0, 1.0).map_err(|e| StatsError::Distribution(e.to_string()))?;
        let p = if var > 0.0 {
            (2.0 * norm.cdf(-z.abs())).min(1.0)
        } else {
            1.0
        };
        (p, PMethod::Normal)
    };
    Ok(Wilcoxon {
        n,
        r_plus: rp,
        r_minus: rm,
        t,
        z,
        p,
        method,
    })
}

/// Holm's step-down adjusted p-values, in the input order.
pub fn holm(p: &[f64]) -> Vec<f64> {
    let m = p.len();
    let mut idx: Vec<usize> = (0..m).collect();
    idx.sort_by(|&a, &b| p[a].total_cmp(&p[b]));
    let mut out = vec![0.0; m];
    let mut running: f64 = 0.0;
    for (i, &j) in idx.iter().enumerate() {
        let adj = ((m - i) as f64 * p[j]).min(1.0);
        running = running.max(adj);
        out[j] = running;
    }
    out
}

/// One method tested against the best-ranked one.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct VersusBest {
    pub method: usize,
    pub test: Wilcoxon,
    pub p_holm: f64,
    /// Holm-adjusted p ≤ α.
    pub differs: bool,
}

/// Everything across tasks at one calibration size.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AcrossTasks {
    pub friedman: Friedman,
    /// Nemenyi CD at α = 0.05 and α = 0.10 (None when it cannot be computed).
    pub cd_05: Option<f64>,
    pub cd_10: Option<f64>,
    /// Index of the method with the lowest average rank (first on ties).
    pub best: usize,
    pub versus_best: Vec<VersusBest>,
}

/// Ranks, Friedman/Iman–Davenport, Nemenyi CD and Holm-corrected Wilcoxon tests
/// of every method against the best, on `values[task][method]` (lower is better).
pub fn across_tasks(values: &[Vec<f64>], alpha: f64) -> Result<AcrossTasks, StatsError> {
    let fr = friedman(values)?;
    let k = fr.methods;
    let best = (0..k)
        .min_by(|&a, &b| fr.avg_ranks[a].total_cmp(&fr.avg_ranks[b]))
        .unwrap_or(0);
    let mut tests = Vec::new();
    for j in (0..k).filter(|&j| j != best) {
        let d: Vec<f64> = values.iter().map(|row| row[j] - row[best]).collect();
        tests.push((j, wilcoxon(&d)?));
    }
    let adj = holm(&tests.iter().map(|t| t.1.p).collect::<Vec<_>>());
    let versus_best = tests
        .into_iter()
        .zip(adj)
        .map(|((method, test), p_holm)| VersusBest {
            method,
            test,
            p_holm,
            differs: p_holm <= alpha,
        })
        .collect();
    Ok(AcrossTasks {
        cd_05: nemenyi_cd(k, fr.tasks, 0.05).ok(),
        cd_10: nemenyi_cd(k, fr.tasks, 0.10).ok(),
        friedman: fr,
        best,
        versus_best,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    #[test]
    fn demsar_friedman_worked_example() {
        // Demšar (2006), §3.2.2: average ranks 3.143, 2.000, 2.893, 1.964 of four
        // methods over N = 14 data sets give χ²_F = 9.28 and F_F = 3.69.
        let f = friedman_from_ranks(&[3.143, 2.000, 2.893, 1.964], 14).unwrap();
        assert!((f.chi2 - 9.28).abs() < 0.01, "{}", f.chi2);
        assert!((f.ff - 3.69).abs() < 0.01, "{}", f.ff);
        // Demšar: F(3, 39) critical value at α = 0.05 is 2.85, so F_F rejects.
        assert_eq!((f.ff_df1, f.ff_df2), (3.0, 39.0));
        assert!(f.ff_p < 0.05);
        // Demšar §3.2.2: CD = 2.569 √(4·5/(6·14)) = 1.25 at α = 0.05.
        assert_eq!(nemenyi_q(4, 0.05).unwrap(), 2.569);
        assert!((nemenyi_cd(4, 14, 0.05).unwrap() - 1.25).abs() < 0.005);
        // Outside Table 5(a) the quantile is computed; the computed values are
        // checked against scipy's studentized range in tests/stats_reference.rs.
        assert!(nemenyi_q(11, 0.05).unwrap() > 3.164);
        assert!(nemenyi_q(1, 0.05).is_err());
    }

    /// Demšar (2006) Table 2, C4.5 vs C4.5+m AUC on 14 data sets — from memory,
    /// consistent with the paper's stated R⁺ = 93, R⁻ = 12 (the differences
    /// below are C4.5+m − C4.5, two zero and two tied |d| = 0.005).
    const DEMSAR_DIFFS: [f64; 14] = [
        0.005, -0.008, 0.017, 0.033, 0.006, -0.005, 0.007, 0.0, 0.063, 0.0, 0.022, 0.047, 0.009,
        0.021,
    ];

    #[test]
    fn demsar_wilcoxon_worked_example() {
        let w = wilcoxon(&DEMSAR_DIFFS).unwrap();
        // Demšar §3.1.3: R⁺ = 93, R⁻ = 12, T = 12.
        assert_eq!(w.r_plus, 93.0);
        assert_eq!(w.r_minus, 12.0);
        assert_eq!(w.t, 12.0);
        // Zeros and ties present: normal approximation.
        assert_eq!(w.method, PMethod::Normal);
        // Demšar: the critical value of T for N = 14 at α = 0.05 is 21, and
        // T = 12 < 21 rejects the null hypothesis.
        assert_eq!(wilcoxon_critical(14, 0.05), Some(21));
        assert!(w.t <= 21.0 && w.p < 0.05);
    }

    #[test]
    fn holm_by_hand() {
        // p = (0.01, 0.04, 0.03): sorted 0.01·3 = 0.03, 0.03·2 = 0.06, 0.04·1 → max(0.06, 0.04).
        let a = holm(&[0.01, 0.04, 0.03]);
        assert!((a[0] - 0.03).abs() < 1e-15);
        assert!((a[2] - 0.06).abs() < 1e-15);
        assert!((a[1] - 0.06).abs() < 1e-15);
    }

    #[test]
    fn across_rejects_bad_shapes() {
        assert!(friedman(&[vec![1.0, 2.0]]).is_err());
        assert!(friedman(&[vec![1.0, 2.0], vec![1.0]]).is_err());
        assert!(friedman(&[vec![1.0, f64::NAN], vec![1.0, 2.0]]).is_err());
        assert!(wilcoxon(&[]).is_err());
        // Identical rankings on every task: F_F is unbounded, p = 0.
        let f = friedman(&[vec![1.0, 2.0, 3.0], vec![1.0, 2.0, 3.0]]).unwrap();
        assert!(f.ff.is_infinite() && f.ff_p == 0.0);
    }

    proptest! {
        #[test]
        fn ranks_sum_and_order(v in proptest::collection::vec(-3i32..3, 1..15)) {
            let x: Vec<f64> = v.iter().map(|&a| a as f64).collect();
            let r = ranks(&x);
            let n = x.len() as f64;
            prop_assert!((r.iter().sum::<f64>() - n * (n + 1.0) / 2.0).abs() < 1e-9);
            for i in 0..x.len() {
                for j in 0..x.len() {
                    if x[i] < x[j] { prop_assert!(r[i] < r[j]); }
                    if x[i] == x[j] { prop_assert!(r[i] == r[j]); }
                }
            }
        }

        #[test]
        fn wilcoxon_rank_sums_total(d in proptest::collection::vec(-5i32..5, 1..30)) {
            let x: Vec<f64> = d.iter().map(|&a| a as f64).collect();
            let w = wilcoxon(&x).unwrap();
            let n = x.len() as f64;
            prop_assert!((w.r_plus + w.r_minus - n * (n + 1.0) / 2.0).abs() < 1e-9);
            prop_assert!(w.p >= 0.0 && w.p <= 1.0);
            // Flipping every sign swaps R⁺ and R⁻ and keeps p.
            let neg: Vec<f64> = x.iter().map(|a| -a).collect();
            let v = wilcoxon(&neg).unwrap();
            prop_assert!((v.r_plus - w.r_minus).abs() < 1e-9);
            prop_assert!((v.p - w.p).abs() < 1e-12);
        }
    }

    /// Demšar (2006) Table 5(a), α = 0.05 and 0.10, k = 2..10: the computed
    /// quantiles agree with the published three-decimal values.
    #[test]
    fn computed_nemenyi_q_reproduces_demsar_table() {
        for k in 2..=10 {
            for (alpha, table) in [(0.05, &Q_05), (0.10, &Q_10)] {
                let q = nemenyi_q_computed(k, alpha);
                assert!(
                    (q - table[k - 2]).abs() < 0.0015,
                    "k = {k}, α = {alpha}: {q} vs {}",
                    table[k - 2]
                );
            }
        }
        // Beyond the table: q grows with k.
        let q12 = nemenyi_q(12, 0.05).unwrap();
        assert!(q12 > Q_05[8] && q12 < 3.5, "{q12}");
    }
}
