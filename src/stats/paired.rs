//! Paired intervals for the mean loss difference of a method against a
//! reference within one task and calibration size.
//!
//! # Protocol and estimand
//! A task's pool is split once into a fixed test set T (m = `test_rows` rows)
//! and a calibration reservoir (M = `reservoir` rows). Repeat r = 0..R−1 draws a
//! calibration sample S_r of n = `size` rows from the reservoir without
//! replacement, fits both methods on S_r and scores them on T. With per-row loss
//! terms ℓ, the row differences are e_{r,i} = ℓ_A(S_r, i) − ℓ_B(S_r, i) and the
//! unit value is d_r = (1/m) Σ_{i∈T} e_{r,i}. The point estimate is d̄ = (1/R) Σ d_r.
//!
//! The estimand of the default interval is the population quantity
//! θ(n) = E_S E_{(s,y)} [ℓ_A(S; s, y) − ℓ_B(S; s, y)]: the expected loss
//! difference over calibration samples S of size n drawn from the population
//! and over new rows (s, y) from the same population.
//!
//! # Intervals
//! All are d̄ ± t_{1−α/2, ν} · se, with s_d² the sample variance of the d_r.
//! * [`IntervalKind::PairedT`]: se² = s_d²/R, ν = R − 1 (Student 1908). It covers
//!   only the mean over draws *given* the reservoir and the test set: it ignores
//!   the test set's sampling error (common to all repeats) and the reservoir's.
//! * [`IntervalKind::CorrectedT`]: the corrected resampled t of Nadeau & Bengio
//!   (2003, Machine Learning 52, eq. for the "corrected resampled t-test"):
//!   se² = s_d² (1/R + n₂/n₁), ν = R − 1. In their protocol each repeat trains on
//!   n₁ rows and tests on n₂ rows; we map n₁ = calibration size n and
//!   n₂ = test rows m, the literal roles of the two sets in a unit.
//! * [`IntervalKind::Decomposed`] (plumbline's own): a sum of three
//!   variance terms, one per source of spread of d̄ around θ(n):
//!   - draws: s_d²/R, the spread of calibration draws within the reservoir;
//!   - reservoir: the reservoir is itself a finite sample, and its own effect
//!     on the fits is common to all repeats. Let ρ = n/M. Write the calibration
//!     effect of a sample through its Hoeffding decomposition (Hoeffding 1948,
//!     Ann. Math. Statist. 19): a component of degree k with population variance
//!     V_k splits, for samples drawn without replacement from a reservoir, into
//!     a reservoir-level part ≈ V_k ρ^k (the same statistic on all M rows) and a
//!     within-reservoir part ≈ V_k (1 − ρ^k), which is what s_d² sees. The
//!     reservoir term is therefore s_d² · ρ^k/(1 − ρ^k).
//!     [`IntervalKind::Decomposed`] takes k = 2: a loss difference of two
//!     consistent fits is a difference of excess risks, which are second order
//!     in the estimation error; components of degree ≥ 2 have ratios ≤
//!     ρ²/(1 − ρ²), so k = 2 is conservative for them. That argument needs a
//!     loss that is smooth at the fitted predictions. When either method made
//!     an extreme prediction in some repeat ([`PairedInput::extreme`]: a row
//!     loss the log-loss clip had to bound, typically an exact 0 or 1 from a
//!     step-function map, whose end blocks are decided by single calibration
//!     rows) the first-order term matters and k = 1 is taken instead; the
//!     coverage study (`benches/coverage/study.rs`) shows both halves of this rule.
//!     Neither half of that rule sees a first-order part that a fit scored
//!     on a loss it does not minimise carries (a maximum-likelihood map scored
//!     on the Brier score, when the map family does not hold the population's
//!     map). Part of such a first-order effect moves with how many positives
//!     the calibration sample drew, and shows across the repeats as a
//!     regression of d_r on the sample's positive count c_r. Without extreme
//!     predictions or rare classes the default therefore splits s_d²: the
//!     share w that this regression explains (the adjusted R² of d_r on c_r,
//!     floored at 0; [`composition_share`]) takes degree 1 and the rest
//!     degree 2, so the reservoir term is
//!     s_d² [w ρ/(1 − ρ) + (1 − w) ρ²/(1 − ρ²)]. The coverage study measured
//!     this rule against the plain degree-2 term (`docs/statistics.md`,
//!     "Choosing the reservoir rule").
//!     [`IntervalKind::DecomposedLinear`] always takes k = 1, the bound over
//!     all degrees, s_d² · n/(M − n). Both grow as n approaches M (draws overlap,
//!     repeats become dependent) and are undefined at n = M.
//!   - test set: the test rows are split into B fixed batches (a pseudo-random
//!     assignment that depends only on m; see [`row_summary`]). Per unit the
//!     engine records the B batch means of e_{r,·}. On the R × B table x_{r,b} a
//!     two-way crossed random-effects analysis of variance (repeats × batches;
//!     Searle, Casella & McCulloch 1992, "Variance Components", ch. 4) gives the
//!     mean squares MS_R, MS_B and MS_E, and (MS_B − MS_E)/(R·B) is an unbiased
//!     estimate of the variance of d̄ due to the test rows alone (truncated at 0).
//!
//!   ν comes from the Welch–Satterthwaite formula (Satterthwaite 1946,
//!   Biometrics Bulletin 2) over the mean squares involved. The degrees of
//!   freedom of each mean square are not taken as those of a normal sample:
//!   a sample variance of n values with excess kurtosis κ has
//!   Var(s²)/σ⁴ = 2/(n − 1) + κ/n (e.g. O'Neill 2014, The American
//!   Statistician 68, "Some useful moment results in sampling problems"), so
//!   its effective degrees of freedom are ν = 2/(2/(n − 1) + κ/n), with κ the
//!   moment estimate from the d_r (for the draws term) or from the B batch
//!   means (for the test term), floored at 0. Per-repeat differences are
//!   often a mixture — most repeats near zero, a few large ones from a
//!   one-class sample, a fallback or an extreme prediction — and the
//!   coverage study showed the normal-theory ν too optimistic there.
//!   Without batch means (a metric that is not a mean of row terms) the test term
//!   is left out and [`Interval::test_term`] is `None`.
//! * [`IntervalKind::DecomposedSkew`] (default): the same standard error and ν,
//!   but not symmetric. Loss differences are often skewed (a method that
//!   occasionally overfits a small sample, a few test rows with a large log-loss
//!   gap), and the studentized mean T = (d̄ − θ)/se of a skewed sample is skewed
//!   the other way, so a symmetric interval misses mostly on one side. Hall
//!   (1992, J. R. Statist. Soc. B 54, "On the removal of skewness by
//!   transformation") removes the first-order skewness with the monotone map
//!   g(T) = T + κT²/3 + κ²T³/27 + κ/6, where κ is the skewness of d̄; the
//!   interval is θ ∈ [d̄ − se·g⁻¹(q), d̄ − se·g⁻¹(−q)] with q the t quantile. We
//!   estimate κ = (κ₃,draws + κ₃,test)/se³ from third cumulants: m₃(d)/R² for
//!   the draws (m₃ the third central moment of the d_r) and m₃(b)/B² for the
//!   test rows (b the B batch means averaged over repeats); the reservoir part
//!   is treated as symmetric. κ = 0 gives the symmetric interval back.
//!
//! Per-repeat wins, ties and losses count d_r < −tol, |d_r| ≤ tol and d_r > tol
//! for a tiny tolerance ([`TIE_TOLERANCE`]); see [`repeat_record`].

use serde::{Deserialize, Serialize};

use super::{mean_var, t_quantile, StatsError};
use crate::split;

/// Which paired interval to compute.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum IntervalKind {
    /// Student's paired t over repeats.
    PairedT,
    /// Nadeau & Bengio's corrected resampled t.
    CorrectedT,
    /// Draws + reservoir + test-set variance decomposition with a second-order
    /// reservoir term, first-order under extreme predictions; symmetric.
    Decomposed,
    /// The same with the first-order (conservative) reservoir term.
    DecomposedLinear,
    /// [`IntervalKind::Decomposed`] with Hall's (1992) skewness-removing
    /// transformation of the studentized mean: asymmetric (default).
    #[default]
    DecomposedSkew,
}

impl IntervalKind {
    pub const ALL: &'static [IntervalKind] = &[
        IntervalKind::PairedT,
        IntervalKind::CorrectedT,
        IntervalKind::Decomposed,
        IntervalKind::DecomposedLinear,
        IntervalKind::DecomposedSkew,
    ];

    pub fn as_str(self) -> &'static str {
        match self {
            IntervalKind::PairedT => "paired-t",
            IntervalKind::CorrectedT => "corrected-t",
            IntervalKind::Decomposed => "decomposed",
            IntervalKind::DecomposedLinear => "decomposed-linear",
            IntervalKind::DecomposedSkew => "decomposed-skew",
        }
    }

    /// The kind named `s` (its suite name), if any.
    pub fn parse(s: &str) -> Option<IntervalKind> {
        IntervalKind::ALL.iter().copied().find(|k| k.as_str() == s)
    }

    /// The Hoeffding degree of the reservoir term: 2 for the decomposed
    /// kinds unless a method made extreme predictions, 1 for
    /// `decomposed-linear` always; `None` for kinds without the term.
    pub fn reservoir_order(self, extreme: bool) -> Option<u32> {
        match self {
            IntervalKind::PairedT | IntervalKind::CorrectedT => None,
            IntervalKind::DecomposedLinear => Some(1),
            IntervalKind::Decomposed | IntervalKind::DecomposedSkew => {
                Some(if extreme { 1 } else { 2 })
            }
        }
    }
}

/// Number of fixed test-row batches whose mean row difference is recorded per unit.
pub const TEST_BATCHES: usize = 20;

/// Column names of [`row_summary`], in order.
pub const ROW_SUMMARY_NAMES: [&str; TEST_BATCHES] = [
    "dbatch00", "dbatch01", "dbatch02", "dbatch03", "dbatch04", "dbatch05", "dbatch06", "dbatch07",
    "dbatch08", "dbatch09", "dbatch10", "dbatch11", "dbatch12", "dbatch13", "dbatch14", "dbatch15",
    "dbatch16", "dbatch17", "dbatch18", "dbatch19",
];

/// Suffix of the per-unit column `<metric>_extreme_rows`: the number of test
/// rows on which a method's row loss reached [`MetricId::extreme_row_loss`].
///
/// [`MetricId::extreme_row_loss`]: crate::metrics::MetricId::extreme_row_loss
pub const EXTREME_ROWS: &str = "extreme_rows";

/// Seed of the fixed assignment of test-row positions to batches.
const BATCH_SEED: u64 = 0x6261_7463_6865_7321;

/// Batch of each test-row position for a test set of `m` rows: a pseudo-random
/// permutation (fixed for a given m) cut into [`TEST_BATCHES`] contiguous runs
/// whose sizes differ by at most one. The permutation guards against pools
/// stored in a meaningful order (for example sorted by label).
pub fn test_batches(m: usize) -> Vec<usize> {
    let mut r = split::rng(split::mix(BATCH_SEED, &[m as u64]));
    let perm = split::sample_indices(m, m, &mut r);
    let mut batch = vec![0usize; m];
    for (j, &pos) in perm.iter().enumerate() {
        batch[pos] = j * TEST_BATCHES / m.max(1);
    }
    batch
}

/// Per-unit summaries of the per-test-row difference vector e (method minus
/// reference, in test-row order): the mean of e over each fixed batch of
/// [`test_batches`], named by [`ROW_SUMMARY_NAMES`]. A batch with no rows (when
/// m < [`TEST_BATCHES`]) is NaN and is ignored by [`interval`].
pub fn row_summary(e: &[f64]) -> Vec<(&'static str, f64)> {
    row_summary_in(&test_batches(e.len()), e)
}

/// [`row_summary`] with the batch assignment `batch` = [`test_batches`]`(e.len())`
/// computed once by the caller (the engine summarises many methods and
/// metrics on the same test set).
pub fn row_summary_in(batch: &[usize], e: &[f64]) -> Vec<(&'static str, f64)> {
    debug_assert_eq!(batch.len(), e.len());
    let mut sum = [0.0f64; TEST_BATCHES];
    let mut count = [0usize; TEST_BATCHES];
    for (&b, &v) in batch.iter().zip(e) {
        sum[b] += v;
        count[b] += 1;
    }
    ROW_SUMMARY_NAMES
        .iter()
        .enumerate()
        .map(|(b, &name)| {
            let v = if count[b] > 0 {
                sum[b] / count[b] as f64
            } else {
                f64::NAN
            };
            (name, v)
        })
        .collect()
}

/// Everything an interval needs for one (task, size, method, metric).
#[derive(Debug, Clone, Copy)]
pub struct PairedInput<'a> {
    /// d_r, one per repeat.
    pub diffs: &'a [f64],
    /// Per repeat, the values of [`ROW_SUMMARY_NAMES`] in that order (as
    /// written by the engine), or `None` for metrics without row terms.
    pub row_stats: Option<&'a [Vec<f64>]>,
    /// Calibration size n.
    pub size: usize,
    /// Reservoir rows M.
    pub reservoir: usize,
    /// Test rows m.
    pub test_rows: usize,
    /// True when, in some repeat, either method made an extreme prediction
    /// under a loss that is not smooth there (see [`MetricId::extreme_row_loss`]):
    /// [`IntervalKind::Decomposed`] and [`IntervalKind::DecomposedSkew`] then
    /// take the first-order reservoir term.
    ///
    /// [`MetricId::extreme_row_loss`]: crate::metrics::MetricId::extreme_row_loss
    pub extreme: bool,
    /// True when the calibration samples held fewer than
    /// [`crate::analysis::RARE_CLASS_ROWS`] rows of the rarer class on
    /// average: the fitted maps are then far from their large-sample
    /// behaviour, the loss difference is not second order in the estimation
    /// error, and [`IntervalKind::Decomposed`] and
    /// [`IntervalKind::DecomposedSkew`] take the first-order reservoir term
    /// for every metric.
    pub rare_class: bool,
    /// Positives in each repeat's calibration sample (same order as
    /// `diffs`), for the share of the reservoir term that takes degree 1
    /// ([`composition_share`]); `None` leaves the plain degree-2 term.
    pub positives: Option<&'a [f64]>,
}

/// The share of the spread of the per-repeat differences d_r that the
/// calibration samples' positive counts c_r explain: the adjusted R² of the
/// least-squares line of d_r on c_r, 1 − (1 − R²)(R − 1)/(R − 2), floored at 0.
/// It is 0 with fewer than 4 repeats, when the counts or the differences do
/// not vary, or when the lengths differ.
pub fn composition_share(diffs: &[f64], positives: &[f64]) -> f64 {
    let r = diffs.len();
    if r < 4 || positives.len() != r {
        return 0.0;
    }
    let mx = positives.iter().sum::<f64>() / r as f64;
    let my = diffs.iter().sum::<f64>() / r as f64;
    let (mut sxx, mut syy, mut sxy) = (0.0, 0.0, 0.0);
    for (&x, &y) in positives.iter().zip(diffs) {
        sxx += (x - mx) * (x - mx);
        syy += (y - my) * (y - my);
        sxy += (x - mx) * (y - my);
    }
    if !(sxx > 0.0 && syy > 0.0) {
        return 0.0;
    }
    let r2 = sxy * sxy / (sxx * syy);
    let adj = 1.0 - (1.0 - r2) * (r - 1) as f64 / (r - 2) as f64;
    if adj.is_finite() {
        adj.clamp(0.0, 1.0)
    } else {
        0.0
    }
}

/// The reservoir factor f of the decomposed intervals (the reservoir term is
/// s_d² f) for ρ = n/M, the Hoeffding degree `order` and the share `w` of the
/// spread that takes degree 1 when `order` is 2:
/// f = w ρ/(1 − ρ) + (1 − w) ρ²/(1 − ρ²); `order` 1 gives ρ/(1 − ρ).
pub fn reservoir_factor(rho: f64, order: u32, first_order_share: f64) -> f64 {
    let f1 = rho / (1.0 - rho);
    if order <= 1 {
        return f1;
    }
    let f2 = rho * rho / (1.0 - rho * rho);
    let w = first_order_share.clamp(0.0, 1.0);
    if w == 0.0 {
        f2
    } else {
        w * f1 + (1.0 - w) * f2
    }
}

/// The variance terms of a [`IntervalKind::Decomposed`] interval (squared standard errors).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct VarianceParts {
    pub draws: f64,
    pub reservoir: f64,
    /// `None` when no batch means were given.
    pub test: Option<f64>,
    /// Third cumulant of d̄ from the draws and the test rows (the reservoir
    /// part is taken as symmetric), for the skewness-corrected interval.
    pub third: f64,
}

/// A two-sided interval for the mean paired difference.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Interval {
    pub kind: IntervalKind,
    pub mean: f64,
    pub low: f64,
    pub high: f64,
    pub se: f64,
    pub df: f64,
    pub confidence: f64,
    /// The test-set variance term (decomposed interval with batch means only).
    pub test_term: Option<f64>,
    /// The Hoeffding degree k of the reservoir term (decomposed intervals only).
    pub reservoir_order: Option<u32>,
    /// The share of the reservoir term's spread taken at degree 1: 1 when
    /// `reservoir_order` is 1, [`composition_share`] (often 0) when it is 2;
    /// `None` for the t intervals.
    pub first_order_share: Option<f64>,
}

impl Interval {
    /// True when the interval contains `x` (ends included).
    pub fn covers(&self, x: f64) -> bool {
        self.low <= x && x <= self.high
    }

    /// −1 when the interval lies entirely below 0, +1 entirely above, 0 when it covers 0.
    pub fn sign(&self) -> i8 {
        if self.high < 0.0 {
            -1
        } else if self.low > 0.0 {
            1
        } else {
            0
        }
    }
}

/// Column and error mean squares of a two-way table without replication,
/// rows (repeats) × columns (batches).
struct TwoWay {
    ms_cols: f64,
    ms_err: f64,
    /// Third central moment of the column (batch) means, divisor `cols`.
    col_m3: f64,
    /// Excess kurtosis of the column (batch) means, at least 0.
    col_kurtosis: f64,
    rows: usize,
    cols: usize,
}

fn two_way(x: &[Vec<f64>], cols: &[usize]) -> TwoWay {
    let r = x.len();
    let c = cols.len();
    let row_mean: Vec<f64> = x
        .iter()
        .map(|row| cols.iter().map(|&b| row[b]).sum::<f64>() / c as f64)
        .collect();
    let col_mean: Vec<f64> = cols
        .iter()
        .map(|&b| x.iter().map(|row| row[b]).sum::<f64>() / r as f64)
        .collect();
    let grand = row_mean.iter().sum::<f64>() / r as f64;
    let ss_cols: f64 = col_mean.iter().map(|m| (m - grand).powi(2)).sum::<f64>() * r as f64;
    let mut ss_err = 0.0;
    for (i, row) in x.iter().enumerate() {
        for (k, &b) in cols.iter().enumerate() {
            ss_err += (row[b] - row_mean[i] - col_mean[k] + grand).powi(2);
        }
    }
    let col_grand = col_mean.iter().sum::<f64>() / c as f64;
    let col_m3 = col_mean
        .iter()
        .map(|m| (m - col_grand).powi(3))
        .sum::<f64>()
        / c as f64;
    TwoWay {
        col_kurtosis: excess_kurtosis(&col_mean),
        col_m3,
        ms_cols: ss_cols / (c - 1) as f64,
        ms_err: ss_err / ((r - 1) * (c - 1)) as f64,
        rows: r,
        cols: c,
    }
}

/// Excess kurtosis of `x` (moment estimator), at least 0.
fn excess_kurtosis(x: &[f64]) -> f64 {
    let n = x.len() as f64;
    let m = x.iter().sum::<f64>() / n;
    let m2 = x.iter().map(|v| (v - m).powi(2)).sum::<f64>() / n;
    let m4 = x.iter().map(|v| (v - m).powi(4)).sum::<f64>() / n;
    if m2 > 0.0 {
        (m4 / (m2 * m2) - 3.0).max(0.0)
    } else {
        0.0
    }
}

/// Degrees of freedom of a sample variance of `n` values with excess
/// kurtosis `kappa`: Var(s²)/σ⁴ = 2/(n − 1) + κ/n, ν = 2σ⁴/Var(s²).
fn kurtosis_df(n: usize, kappa: f64) -> f64 {
    2.0 / (2.0 / (n - 1) as f64 + kappa / n as f64)
}

/// The variance terms of the decomposed interval and their Satterthwaite df;
/// `order` is the Hoeffding degree k of the reservoir term (1 or 2) and
/// `first_order_share` the share taken at degree 1 when it is 2
/// ([`reservoir_factor`]).
pub fn decompose(
    input: &PairedInput,
    order: u32,
    first_order_share: f64,
) -> Result<(VarianceParts, f64), StatsError> {
    check(input)?;
    let r = input.diffs.len();
    let (mean_d, s2) = mean_var(input.diffs);
    if input.size >= input.reservoir {
        return Err(StatsError::SizeNotBelowReservoir {
            size: input.size,
            reservoir: input.reservoir,
        });
    }
    let rho = input.size as f64 / input.reservoir as f64;
    let f = reservoir_factor(rho, order.clamp(1, 2), first_order_share);
    let c1 = 1.0 / r as f64 + f;
    let draws = s2 / r as f64;
    let reservoir = s2 * f;
    let mut test = None;
    // Third cumulant of a mean of R (or B) exchangeable values: m₃/R².
    let m3 = input
        .diffs
        .iter()
        .map(|x| (x - mean_d).powi(3))
        .sum::<f64>()
        / r as f64;
    let mut third = m3 / (r * r) as f64;
    // Satterthwaite: V = Σ c_k MS_k, ν = V² / Σ (c_k MS_k)² / ν_k.
    // Degrees of freedom of each mean square from its values' kurtosis: a
    // heavy-tailed spread is estimated less precisely than a normal one.
    let nu_d = kurtosis_df(r, excess_kurtosis(input.diffs));
    let mut terms: Vec<(f64, f64)> = vec![(c1 * s2, nu_d)];
    if let Some(rows) = input.row_stats {
        if rows.len() != r {
            return Err(StatsError::Shape(format!(
                "{} repeats of differences but {} rows of batch means",
                r,
                rows.len()
            )));
        }
        let width = rows.first().map(|v| v.len()).unwrap_or(0);
        if rows.iter().any(|v| v.len() != width) {
            return Err(StatsError::Shape(
                "rows of batch means differ in length".into(),
            ));
        }
        // Batches with a value in every repeat (empty batches are NaN throughout).
        let cols: Vec<usize> = (0..width)
            .filter(|&b| rows.iter().all(|v| !v[b].is_nan()))
            .collect();
        if rows.iter().any(|v| v.iter().any(|x| x.is_infinite())) {
            return Err(StatsError::NonFinite("batch mean"));
        }
        if cols.len() >= 2 {
            let tw = two_way(rows, &cols);
            let denom = (tw.rows * tw.cols) as f64;
            let t = ((tw.ms_cols - tw.ms_err) / denom).max(0.0);
            test = Some(t);
            if t > 0.0 {
                third += tw.col_m3 / (tw.cols * tw.cols) as f64;
                terms.push((tw.ms_cols / denom, kurtosis_df(tw.cols, tw.col_kurtosis)));
                terms.push((-tw.ms_err / denom, ((tw.rows - 1) * (tw.cols - 1)) as f64));
            }
        }
    }
    let v: f64 = terms.iter().map(|t| t.0).sum();
    let den: f64 = terms.iter().map(|(x, nu)| x * x / nu).sum();
    let df = if v > 0.0 && den > 0.0 {
        (v * v / den).max(1.0)
    } else {
        (r - 1) as f64
    };
    Ok((
        VarianceParts {
            draws,
            reservoir,
            test,
            third,
        },
        df,
    ))
}

fn check(input: &PairedInput) -> Result<(), StatsError> {
    if input.diffs.len() < 2 {
        return Err(StatsError::TooFewRepeats(input.diffs.len()));
    }
    if input.diffs.iter().any(|d| !d.is_finite()) {
        return Err(StatsError::NonFinite("paired difference"));
    }
    Ok(())
}

/// A two-sided interval of the given kind at `confidence` (e.g. 0.95).
pub fn interval(
    kind: IntervalKind,
    input: &PairedInput,
    confidence: f64,
) -> Result<Interval, StatsError> {
    if !(confidence > 0.0 && confidence < 1.0) {
        return Err(StatsError::BadConfidence(confidence));
    }
    check(input)?;
    let r = input.diffs.len();
    let (mean, s2) = mean_var(input.diffs);
    // Skewness of the estimator for the asymmetric interval (0: symmetric).
    let mut skew = 0.0;
    let (var, df, test_term, reservoir_order, first_order_share) = match kind {
        IntervalKind::PairedT => (s2 / r as f64, (r - 1) as f64, None, None, None),
        IntervalKind::CorrectedT => {
            if input.size == 0 {
                return Err(StatsError::Shape("calibration size is 0".into()));
            }
            let ratio = input.test_rows as f64 / input.size as f64;
            (
                s2 * (1.0 / r as f64 + ratio),
                (r - 1) as f64,
                None,
                None,
                None,
            )
        }
        IntervalKind::Decomposed
        | IntervalKind::DecomposedLinear
        | IntervalKind::DecomposedSkew => {
            // The second-order reservoir term needs a loss that is smooth at
            // the fitted predictions; with extreme predictions fall back to
            // the first-order bound.
            let order = kind
                .reservoir_order(input.extreme || input.rare_class)
                .unwrap_or(1);
            // At degree 2, the share of the spread that moves with the
            // samples' positive counts takes degree 1.
            let share = match (order, input.positives) {
                (1, _) => 1.0,
                (_, Some(pos)) => composition_share(input.diffs, pos),
                (_, None) => 0.0,
            };
            let (p, df) = decompose(input, order, share)?;
            let var = p.draws + p.reservoir + p.test.unwrap_or(0.0);
            if kind == IntervalKind::DecomposedSkew && var > 0.0 {
                skew = p.third / var.powf(1.5);
            }
            (var, df, p.test, Some(order), Some(share))
        }
    };
    let se = var.sqrt();
    let q = t_quantile(0.5 + confidence / 2.0, df)?;
    // Below |κ| = 10⁻⁶ the correction is negligible and the closed-form
    // inverse would lose digits to cancellation: keep the symmetric interval.
    let (lo_q, hi_q) = if skew.is_finite() && skew.abs() > 1e-6 {
        (hall_inverse(q, skew), hall_inverse(-q, skew))
    } else {
        (q, -q)
    };
    Ok(Interval {
        kind,
        mean,
        low: mean - lo_q * se,
        high: mean - hi_q * se,
        se,
        df,
        confidence,
        test_term,
        reservoir_order,
        first_order_share,
    })
}

/// Inverse of Hall's (1992) transformation g(T) = T + κT²/3 + κ²T³/27 + κ/6
/// of a studentized mean whose estimator has skewness κ:
/// g(T) = ((1 + aT)³ − 1)/(3a) + κ/6 with a = κ/3, so
/// g⁻¹(x) = (∛(1 + 3a(x − κ/6)) − 1)/a. Monotone for every κ.
fn hall_inverse(x: f64, kappa: f64) -> f64 {
    let a = kappa / 3.0;
    ((1.0 + 3.0 * a * (x - kappa / 6.0)).cbrt() - 1.0) / a
}

/// Absolute tolerance under which a per-repeat difference counts as a tie.
pub const TIE_TOLERANCE: f64 = 1e-12;

/// Wins, ties and losses of a method against the reference.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize)]
pub struct Record {
    pub wins: usize,
    pub ties: usize,
    pub losses: usize,
}

/// Per-repeat record for a loss (lower is better): a win is d_r < −tol, a loss
/// d_r > tol, a tie |d_r| ≤ tol. Non-finite differences are not counted.
pub fn repeat_record(diffs: &[f64], tol: f64) -> Record {
    let mut rec = Record::default();
    for &d in diffs.iter().filter(|d| d.is_finite()) {
        if d < -tol {
            rec.wins += 1;
        } else if d > tol {
            rec.losses += 1;
        } else {
            rec.ties += 1;
        }
    }
    rec
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn input<'a>(d: &'a [f64], rows: Option<&'a [Vec<f64>]>) -> PairedInput<'a> {
        PairedInput {
            diffs: d,
            row_stats: rows,
            size: 100,
            reservoir: 1000,
            test_rows: 500,
            extreme: false,
            rare_class: false,
            positives: None,
        }
    }

    #[test]
    fn composition_share_by_hand() {
        // d = (1, 2, 3, 5), c = (0, 1, 2, 3): x̄ = 1.5, ȳ = 2.75, Sxx = 5,
        // Syy = 8.75, Sxy = 6.5; R² = 42.25/43.75 = 0.965714…, adjusted
        // 1 − (1 − R²)·3/2 = 0.948571….
        let d = [1.0, 2.0, 3.0, 5.0];
        let c = [0.0, 1.0, 2.0, 3.0];
        let w = composition_share(&d, &c);
        assert!(
            (w - (1.0 - (1.0 - 42.25 / 43.75) * 1.5)).abs() < 1e-12,
            "{w}"
        );
        // Uncorrelated counts: the adjusted R² is negative, floored at 0.
        assert_eq!(composition_share(&d, &[1.0, 0.0, 0.0, 1.0]), 0.0);
        // Constant counts, too few repeats, mismatched lengths: 0.
        assert_eq!(composition_share(&d, &[2.0; 4]), 0.0);
        assert_eq!(composition_share(&d[..3], &c[..3]), 0.0);
        assert_eq!(composition_share(&d, &c[..3]), 0.0);
    }

    #[test]
    fn reservoir_factor_mixes_the_degrees_by_the_share() {
        // ρ = 0.1: degree 1 gives 1/9, degree 2 gives 0.01/0.99.
        let (f1, f2) = (1.0 / 9.0, 0.01 / 0.99);
        assert!((reservoir_factor(0.1, 1, 0.0) - f1).abs() < 1e-15);
        assert!((reservoir_factor(0.1, 2, 0.0) - f2).abs() < 1e-15);
        assert!((reservoir_factor(0.1, 2, 1.0) - f1).abs() < 1e-15);
        assert!((reservoir_factor(0.1, 2, 0.25) - (0.25 * f1 + 0.75 * f2)).abs() < 1e-15);
        // Through the interval: d = (1, 2, 3, 5) with counts (0, 1, 2, 3),
        // s² = 8.75/3, R = 4, no batch means.
        let d = [1.0, 2.0, 3.0, 5.0];
        let c = [0.0, 1.0, 2.0, 3.0];
        let w = 1.0 - (1.0 - 42.25 / 43.75) * 1.5;
        let s2 = 8.75 / 3.0;
        let plain = input(&d, None);
        let mixed = PairedInput {
            positives: Some(&c),
            ..plain
        };
        let iv = interval(IntervalKind::Decomposed, &mixed, 0.95).unwrap();
        assert_eq!(iv.reservoir_order, Some(2));
        assert!((iv.first_order_share.unwrap() - w).abs() < 1e-12);
        let want = s2 / 4.0 + s2 * (w * f1 + (1.0 - w) * f2);
        assert!((iv.se * iv.se - want).abs() < 1e-12);
        let iv0 = interval(IntervalKind::Decomposed, &plain, 0.95).unwrap();
        assert_eq!(iv0.first_order_share, Some(0.0));
        assert!((iv0.se * iv0.se - (s2 / 4.0 + s2 * f2)).abs() < 1e-12);
        // Extreme predictions take degree 1 whole, whatever the counts.
        let rough = PairedInput {
            extreme: true,
            ..mixed
        };
        let ivx = interval(IntervalKind::Decomposed, &rough, 0.95).unwrap();
        assert_eq!(ivx.first_order_share, Some(1.0));
        assert!((ivx.se * ivx.se - (s2 / 4.0 + s2 * f1)).abs() < 1e-12);
        // The linear kind is degree 1 already; the t intervals ignore counts.
        for k in [IntervalKind::PairedT, IntervalKind::CorrectedT] {
            assert_eq!(
                interval(k, &plain, 0.95).unwrap(),
                interval(k, &mixed, 0.95).unwrap()
            );
        }
    }

    #[test]
    fn extreme_predictions_switch_the_default_to_the_first_order_term() {
        // d = 1..5 (s² = 2.5), n = 100, M = 1000: ρ = 0.1. Without extreme
        // predictions the reservoir term is s² ρ²/(1 − ρ²) = 2.5 · 0.01/0.99;
        // with them it is s² ρ/(1 − ρ) = 2.5/9, exactly the linear interval.
        let d = [1.0, 2.0, 3.0, 4.0, 5.0];
        let smooth = input(&d, None);
        let rough = PairedInput {
            extreme: true,
            ..smooth
        };
        let iv = interval(IntervalKind::Decomposed, &smooth, 0.95).unwrap();
        assert!((iv.se * iv.se - (0.5 + 2.5 * 0.01 / 0.99)).abs() < 1e-12);
        let ivx = interval(IntervalKind::Decomposed, &rough, 0.95).unwrap();
        assert!((ivx.se * ivx.se - (0.5 + 2.5 / 9.0)).abs() < 1e-12);
        let lin = interval(IntervalKind::DecomposedLinear, &smooth, 0.95).unwrap();
        assert_eq!(
            ivx,
            Interval {
                kind: IntervalKind::Decomposed,
                ..lin
            }
        );
        // The other estimators ignore the flag.
        for k in [IntervalKind::PairedT, IntervalKind::CorrectedT] {
            assert_eq!(
                interval(k, &smooth, 0.95).unwrap(),
                interval(k, &rough, 0.95).unwrap()
            );
        }
    }

    #[test]
    fn rare_classes_switch_the_default_to_the_first_order_term() {
        // Same data as above: with few minority rows the default takes
        // s² ρ/(1 − ρ) = 2.5/9 whatever the metric, as with extreme predictions.
        let d = [1.0, 2.0, 3.0, 4.0, 5.0];
        let smooth = input(&d, None);
        let rare = PairedInput {
            rare_class: true,
            ..smooth
        };
        for kind in [IntervalKind::Decomposed, IntervalKind::DecomposedSkew] {
            let iv = interval(kind, &rare, 0.95).unwrap();
            assert_eq!(iv.reservoir_order, Some(1));
            assert!((iv.se * iv.se - (0.5 + 2.5 / 9.0)).abs() < 1e-12);
            assert_eq!(
                interval(kind, &smooth, 0.95).unwrap().reservoir_order,
                Some(2)
            );
        }
        for k in [IntervalKind::PairedT, IntervalKind::CorrectedT] {
            assert_eq!(
                interval(k, &smooth, 0.95).unwrap(),
                interval(k, &rare, 0.95).unwrap()
            );
        }
    }

    #[test]
    fn paired_t_by_hand() {
        // d = 1..5: mean 3, s² = 2.5, se = sqrt(0.5); t(0.975, 4) = 2.776
        // (Abramowitz & Stegun Table 26.10).
        let d = [1.0, 2.0, 3.0, 4.0, 5.0];
        let iv = interval(IntervalKind::PairedT, &input(&d, None), 0.95).unwrap();
        assert!((iv.se - 0.5f64.sqrt()).abs() < 1e-12);
        assert!((iv.high - 3.0 - 2.776 * 0.5f64.sqrt()).abs() < 1e-3);
        // Corrected: se² = 2.5 (1/5 + 500/100).
        let c = interval(IntervalKind::CorrectedT, &input(&d, None), 0.95).unwrap();
        assert!((c.se * c.se - 2.5 * 5.2).abs() < 1e-12);
    }

    #[test]
    fn hall_inverse_inverts_the_transformation() {
        // g(T) = T + κT²/3 + κ²T³/27 + κ/6 (Hall 1992, JRSS B 54, eq. for the
        // studentized mean with a = κ/3); g⁻¹(g(T)) = T for either sign of κ.
        for &kappa in &[-0.8, -0.1, 0.05, 0.4, 1.5] {
            for &t in &[-3.0, -1.0, 0.0, 0.7, 2.5] {
                let g = t + kappa * t * t / 3.0 + kappa * kappa * t * t * t / 27.0 + kappa / 6.0;
                assert!((hall_inverse(g, kappa) - t).abs() < 1e-9, "κ {kappa} T {t}");
            }
        }
    }

    #[test]
    fn skew_interval_is_symmetric_without_skewness_and_stretches_toward_the_tail() {
        // Symmetric differences: third cumulant 0, the same interval as the default.
        let d = [1.0, 2.0, 3.0, 4.0, 5.0];
        let a = interval(IntervalKind::Decomposed, &input(&d, None), 0.95).unwrap();
        let b = interval(IntervalKind::DecomposedSkew, &input(&d, None), 0.95).unwrap();
        assert!((a.low - b.low).abs() < 1e-12 && (a.high - b.high).abs() < 1e-12);
        // A long right tail: the upper end moves out, the lower end in, the
        // standard error is unchanged.
        let d = [0.0, 0.1, 0.0, 0.2, 0.1, 0.0, 3.0, 0.1, 0.0, 0.2];
        let a = interval(IntervalKind::Decomposed, &input(&d, None), 0.95).unwrap();
        let b = interval(IntervalKind::DecomposedSkew, &input(&d, None), 0.95).unwrap();
        assert_eq!(a.se, b.se);
        assert!(b.high > a.high && b.low > a.low, "{a:?} {b:?}");
        assert!(b.high - b.mean > b.mean - b.low);
        // Mirrored data mirror the interval.
        let m: Vec<f64> = d.iter().map(|x| -x).collect();
        let c = interval(IntervalKind::DecomposedSkew, &input(&m, None), 0.95).unwrap();
        assert!((c.low + b.high).abs() < 1e-12 && (c.high + b.low).abs() < 1e-12);
    }

    #[test]
    fn decomposed_without_rows_adds_reservoir_term() {
        let d = [1.0, 2.0, 3.0, 4.0, 5.0];
        let iv = interval(IntervalKind::DecomposedLinear, &input(&d, None), 0.95).unwrap();
        // s² (1/R + n/(M − n)) = 2.5 (0.2 + 100/900).
        assert!((iv.se * iv.se - 2.5 * (0.2 + 100.0 / 900.0)).abs() < 1e-12);
        let q = interval(IntervalKind::Decomposed, &input(&d, None), 0.95).unwrap();
        // s² (1/R + ρ²/(1 − ρ²)) with ρ = 0.1: 2.5 (0.2 + 0.01/0.99).
        assert!((q.se * q.se - 2.5 * (0.2 + 0.01 / 0.99)).abs() < 1e-12);
        assert_eq!(iv.df, 4.0);
        assert!(iv.test_term.is_none());
        let mut bad = input(&d, None);
        bad.size = 1000;
        assert!(matches!(
            interval(IntervalKind::Decomposed, &bad, 0.95),
            Err(StatsError::SizeNotBelowReservoir { .. })
        ));
    }

    #[test]
    fn kurtosis_lowers_the_degrees_of_freedom() {
        // Normal-theory value when κ = 0.
        assert!((kurtosis_df(30, 0.0) - 29.0).abs() < 1e-12);
        // κ = 3 (e.g. a Laplace sample), n = 30: 2/(2/29 + 3/30) = 11.8424…
        assert!((kurtosis_df(30, 3.0) - 2.0 / (2.0 / 29.0 + 0.1)).abs() < 1e-12);
        // Moment estimate by hand: x = (0, 0, 0, 4), mean 1, deviations
        // (−1, −1, −1, 3): m₂ = 12/4 = 3, m₄ = (1 + 1 + 1 + 81)/4 = 21,
        // κ = 21/9 − 3 = −2/3, floored at 0.
        assert_eq!(excess_kurtosis(&[0.0, 0.0, 0.0, 4.0]), 0.0);
        // (0 × 9, 10): mean 1, m₂ = (9 + 81)/10 = 9, m₄ = (9 + 6561)/10 = 657,
        // κ = 657/81 − 3 = 5.111…
        let mut x = vec![0.0; 9];
        x.push(10.0);
        assert!((excess_kurtosis(&x) - (657.0 / 81.0 - 3.0)).abs() < 1e-12);
        // A constant sample has no spread to judge: κ = 0.
        assert_eq!(excess_kurtosis(&[2.0; 5]), 0.0);
    }

    #[test]
    fn one_outlying_repeat_widens_the_interval() {
        // Same mean and variance, one made of a single large repeat: the
        // heavy-tailed one gets fewer degrees of freedom, so a wider interval.
        let mut heavy = vec![0.0; 29];
        heavy.push(1.0);
        let (m, v) = mean_var(&heavy);
        let sd = v.sqrt();
        // A symmetric two-point sample with the same mean and variance.
        let light: Vec<f64> = (0..30)
            .map(|i| m + if i % 2 == 0 { 1.0 } else { -1.0 } * sd * (29.0f64 / 30.0).sqrt())
            .collect();
        let (ml, vl) = mean_var(&light);
        assert!((ml - m).abs() < 1e-12 && (vl - v).abs() < 1e-12);
        let a = interval(IntervalKind::Decomposed, &input(&heavy, None), 0.95).unwrap();
        let b = interval(IntervalKind::Decomposed, &input(&light, None), 0.95).unwrap();
        assert!((a.se - b.se).abs() < 1e-12);
        assert!(a.df < 0.5 * b.df, "{} vs {}", a.df, b.df);
        assert!(a.high - a.low > b.high - b.low);
    }

    #[test]
    fn errors_instead_of_panics() {
        assert!(matches!(
            interval(IntervalKind::PairedT, &input(&[1.0], None), 0.95),
            Err(StatsError::TooFewRepeats(1))
        ));
        assert!(interval(IntervalKind::PairedT, &input(&[1.0, f64::NAN], None), 0.95).is_err());
        assert!(interval(IntervalKind::PairedT, &input(&[1.0, 2.0], None), 1.0).is_err());
        let rows = vec![vec![0.0; 3]];
        assert!(interval(
            IntervalKind::Decomposed,
            &input(&[1.0, 2.0], Some(&rows)),
            0.95
        )
        .is_err());
    }

    #[test]
    fn batches_are_balanced_and_fixed() {
        let b = test_batches(1003);
        let mut count = [0usize; TEST_BATCHES];
        for &x in &b {
            count[x] += 1;
        }
        assert!(count.iter().all(|&c| c == 50 || c == 51), "{count:?}");
        assert_eq!(b, test_batches(1003));
        let s = row_summary(&[1.0, 2.0, 3.0]);
        assert_eq!(s.len(), TEST_BATCHES);
        assert_eq!(
            s.iter().filter(|(_, v)| v.is_nan()).count(),
            TEST_BATCHES - 3
        );
    }

    #[test]
    fn test_term_matches_anova_by_hand() {
        // 3 repeats × 2 batches, x = [[1, 3], [2, 6], [3, 6]] (worked by hand):
        // grand mean 3.5; row means 2, 4, 4.5; column means 2, 5.
        // MS_B = 3·[(2 − 3.5)² + (5 − 3.5)²] / 1 = 13.5.
        // Residuals x − row − col + grand: 0.5, −0.5, −0.5, 0.5, 0, 0 → SS_E = 1,
        // MS_E = 1 / ((3 − 1)(2 − 1)) = 0.5. Test term = (13.5 − 0.5) / (3·2).
        let rows = vec![vec![1.0, 3.0], vec![2.0, 6.0], vec![3.0, 6.0]];
        let d: Vec<f64> = rows.iter().map(|r| (r[0] + r[1]) / 2.0).collect();
        let (p, _) = decompose(&input(&d, Some(&rows)), 2, 0.0).unwrap();
        assert!((p.test.unwrap() - 13.0 / 6.0).abs() < 1e-12, "{p:?}");
    }

    /// Standard normal by Box–Muller (Box & Muller 1958).
    fn normal(r: &mut rand_chacha::ChaCha8Rng) -> f64 {
        use rand_chacha::rand_core::Rng;
        let u1 = ((r.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64;
        let u2 = (r.next_u64() >> 11) as f64 / (1u64 << 53) as f64;
        (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
    }

    #[test]
    fn decomposition_is_unbiased_on_crossed_random_effects() {
        // x_rb = C_r + A_b + AC_rb with known variances (the model the ANOVA
        // assumes, Searle, Casella & McCulloch 1992, ch. 4): the draws and test
        // terms must average to σ_C²/R + σ_AC²/(RB) and σ_A²/B; their sum must
        // match the empirical variance of the grand mean. ρ is tiny so the
        // reservoir term is negligible.
        let (r_n, b_n) = (10usize, TEST_BATCHES);
        let (sc, sa, sac) = (1.0f64, 2.0f64, 1.5f64);
        let mut rng = split::rng(99);
        let sims = 4000;
        let (mut draws, mut test, mut means) = (0.0, 0.0, Vec::with_capacity(sims));
        for _ in 0..sims {
            let a: Vec<f64> = (0..b_n).map(|_| sa * normal(&mut rng)).collect();
            let rows: Vec<Vec<f64>> = (0..r_n)
                .map(|_| {
                    let c = sc * normal(&mut rng);
                    a.iter()
                        .map(|&ab| c + ab + sac * normal(&mut rng))
                        .collect()
                })
                .collect();
            let d: Vec<f64> = rows
                .iter()
                .map(|v| v.iter().sum::<f64>() / b_n as f64)
                .collect();
            let inp = PairedInput {
                diffs: &d,
                row_stats: Some(&rows),
                size: 1,
                reservoir: 1_000_000,
                test_rows: 1000,
                extreme: false,
                rare_class: false,
                positives: None,
            };
            let (p, _) = decompose(&inp, 2, 0.0).unwrap();
            draws += p.draws / sims as f64;
            test += p.test.unwrap() / sims as f64;
            means.push(d.iter().sum::<f64>() / r_n as f64);
        }
        let want_draws = (sc * sc + sac * sac / b_n as f64) / r_n as f64;
        let want_test = sa * sa / b_n as f64;
        assert!(
            (draws / want_draws - 1.0).abs() < 0.05,
            "{draws} vs {want_draws}"
        );
        assert!(
            (test / want_test - 1.0).abs() < 0.05,
            "{test} vs {want_test}"
        );
        let (_, v) = mean_var(&means);
        assert!(
            ((draws + test) / v - 1.0).abs() < 0.08,
            "{} vs {v}",
            draws + test
        );
    }

    proptest! {
        #[test]
        fn intervals_nest_and_shift(d in proptest::collection::vec(-1.0f64..1.0, 2..30), c in -5.0f64..5.0) {
            let plain = interval(IntervalKind::PairedT, &input(&d, None), 0.95).unwrap();
            let corr = interval(IntervalKind::CorrectedT, &input(&d, None), 0.95).unwrap();
            let dec = interval(IntervalKind::Decomposed, &input(&d, None), 0.95).unwrap();
            prop_assert!(plain.low <= plain.mean && plain.mean <= plain.high);
            prop_assert!(corr.se >= plain.se && dec.se >= plain.se);
            // Shifting every difference shifts the interval and keeps its width.
            let shifted: Vec<f64> = d.iter().map(|x| x + c).collect();
            let s = interval(IntervalKind::PairedT, &input(&shifted, None), 0.95).unwrap();
            prop_assert!((s.mean - plain.mean - c).abs() < 1e-9);
            prop_assert!(((s.high - s.low) - (plain.high - plain.low)).abs() < 1e-9);
            let rec = repeat_record(&d, TIE_TOLERANCE);
            prop_assert_eq!(rec.wins + rec.ties + rec.losses, d.len());
        }

        #[test]
        fn test_term_is_invariant_to_repeat_shifts(
            base in proptest::collection::vec(-1.0f64..1.0, 8),
            shift in proptest::collection::vec(-1.0f64..1.0, 4),
        ) {
            // A repeat effect common to all batches changes MS_R only, never the test term.
            let rows: Vec<Vec<f64>> = (0..4).map(|r| base.iter().enumerate().map(|(b, x)| x + 0.1 * ((r * b) % 3) as f64).collect()).collect();
            let moved: Vec<Vec<f64>> = rows.iter().zip(&shift).map(|(row, s)| row.iter().map(|x| x + s).collect()).collect();
            let d1: Vec<f64> = rows.iter().map(|r| r.iter().sum::<f64>() / 8.0).collect();
            let d2: Vec<f64> = moved.iter().map(|r| r.iter().sum::<f64>() / 8.0).collect();
            let (a, _) = decompose(&input(&d1, Some(&rows)), 1, 1.0).unwrap();
            let (b, _) = decompose(&input(&d2, Some(&moved)), 1, 1.0).unwrap();
            prop_assert!((a.test.unwrap() - b.test.unwrap()).abs() < 1e-9);
        }
    }
}
