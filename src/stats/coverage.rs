//! Coverage of the paired intervals, measured by simulation on a population
//! whose calibration map is known.
//!
//! # Population
//! Scores s follow a Kumaraswamy(a, b) distribution on (0, 1) (Kumaraswamy 1980,
//! J. Hydrology 46), chosen because its quantile function is closed-form:
//! F⁻¹(u) = (1 − (1 − u)^{1/b})^{1/a}. Labels are Bernoulli with a known
//! monotone two-step map q(s) = lo + (hi − lo)·[σ(k(s − c₁)) + σ(k(s − c₂))]/2,
//! which no single logistic curve in s matches, so Platt scaling is biased and
//! isotonic regression is not: isotonic loses at small n (variance) and wins at
//! large n (no bias).
//!
//! # True difference
//! For a fitted pair of maps (m_A, m_B) the exact expected loss difference over
//! new rows is ∫ [q(s)(ℓ(m_A(s), 1) − ℓ(m_B(s), 1)) + (1 − q(s))(ℓ(m_A(s), 0) −
//! ℓ(m_B(s), 0))] dF(s), computed by the midpoint rule in u = F(s) with G nodes
//! (the integrand is piecewise smooth in u). θ(n) is the mean of this over K
//! calibration samples of size n drawn from the population (a plain Monte Carlo
//! average, reported with its standard error).
//!
//! # Replicates
//! Each replicate runs the harness protocol: a finite pool of M + m rows,
//! [`split::partition`] into test set and reservoir, R repeats per size drawn by
//! [`split::draw_calibration`], per-unit differences d_r and batch means from
//! [`paired::row_summary`], then every [`IntervalKind`]. Coverage is the share of
//! replicates whose interval contains θ(n); its binomial standard error is
//! √(c(1 − c)/replicates).

use rayon::prelude::*;
use serde::Serialize;

use super::paired::{self, IntervalKind, PairedInput};
use crate::calibrate::{Calibrator, MethodSpec, ScoreKind};
use crate::metrics::{MetricId, MetricSettings};
use crate::split;
use rand_chacha::rand_core::Rng;

/// The synthetic population.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Population {
    /// Kumaraswamy shape a of the score distribution.
    pub score_a: f64,
    /// Kumaraswamy shape b of the score distribution.
    pub score_b: f64,
    /// q(0).
    pub lo: f64,
    /// q(1).
    pub hi: f64,
    /// Steepness k of both steps.
    pub steepness: f64,
    /// Centres c₁, c₂ of the steps.
    pub steps: [f64; 2],
}

impl Default for Population {
    fn default() -> Self {
        Population {
            score_a: 2.0,
            score_b: 3.0,
            lo: 0.05,
            hi: 0.9,
            steepness: 30.0,
            steps: [0.3, 0.6],
        }
    }
}

impl Population {
    /// Score at quantile u.
    pub fn quantile(&self, u: f64) -> f64 {
        (1.0 - (1.0 - u).powf(1.0 / self.score_b)).powf(1.0 / self.score_a)
    }

    /// True P(y = 1 | s).
    pub fn truth(&self, s: f64) -> f64 {
        let k = self.steepness;
        let up = crate::calibrate::sigmoid(k * (s - self.steps[0]))
            + crate::calibrate::sigmoid(k * (s - self.steps[1]));
        self.lo + (self.hi - self.lo) * up / 2.0
    }

    /// n rows (score, label) drawn from the population.
    pub fn draw(&self, rng: &mut rand_chacha::ChaCha8Rng, n: usize) -> (Vec<f64>, Vec<bool>) {
        let mut s = Vec::with_capacity(n);
        let mut y = Vec::with_capacity(n);
        for _ in 0..n {
            let si = self.quantile(unit(rng));
            y.push(unit(rng) < self.truth(si));
            s.push(si);
        }
        (s, y)
    }
}

/// Uniform in [0, 1) with 53 random bits.
fn unit(rng: &mut rand_chacha::ChaCha8Rng) -> f64 {
    (rng.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
}

/// Settings of a coverage study.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CoverageConfig {
    pub seed: u64,
    pub population: Population,
    /// The flexible method A and the reference B; the difference is A − B.
    pub method: MethodSpec,
    pub reference: MethodSpec,
    pub metrics: Vec<MetricId>,
    pub settings: MetricSettings,
    pub reservoir: usize,
    pub test_rows: usize,
    pub sizes: Vec<usize>,
    pub repeats: usize,
    pub replicates: usize,
    /// K: calibration samples per size for the true difference.
    pub truth_samples: usize,
    /// G: quadrature nodes for the exact expected loss of a fitted map.
    pub quadrature: usize,
    pub confidence: f64,
    /// Detect extreme predictions (as the engine does); `false` keeps the
    /// second-order reservoir term of the default interval throughout, to
    /// show what the switch is for.
    pub detect_extreme: bool,
}

impl Default for CoverageConfig {
    fn default() -> Self {
        CoverageConfig {
            seed: 20_030_052,
            population: Population::default(),
            method: MethodSpec::Isotonic { pseudo_count: 0.0 },
            reference: MethodSpec::Platt {
                target_smoothing: false,
            },
            metrics: vec![MetricId::Brier, MetricId::LogLoss],
            settings: MetricSettings::default(),
            reservoir: 2000,
            test_rows: 2000,
            sizes: vec![50, 100, 200, 500, 1000],
            repeats: 30,
            replicates: 1000,
            truth_samples: 20_000,
            quadrature: 4096,
            confidence: 0.95,
            detect_extreme: true,
        }
    }
}

/// One line of the table.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CoverageRow {
    pub metric: MetricId,
    pub size: usize,
    pub kind: IntervalKind,
    /// θ(n) and its Monte Carlo standard error.
    pub truth: f64,
    pub truth_se: f64,
    pub covered: usize,
    /// Replicates whose interval lies entirely below θ(n) (upper end too low).
    pub missed_low: usize,
    /// Replicates whose interval lies entirely above θ(n).
    pub missed_high: usize,
    pub replicates: usize,
    pub coverage: f64,
    pub coverage_se: f64,
    /// Mean half-width of the interval.
    pub mean_half_width: f64,
    /// Mean of d̄ over replicates (compare with `truth` for bias).
    pub mean_estimate: f64,
    /// Root mean square of the interval's standard error.
    pub rms_se: f64,
    /// Root mean square error of d̄ around θ(n): what `rms_se` should match.
    pub rmse: f64,
    /// Mean draws, reservoir and test variance terms of the default
    /// decomposed interval on the same data (the same for every kind).
    pub mean_parts: [f64; 3],
    /// Share of replicates with extreme predictions (either method, any
    /// repeat), where the default interval takes the first-order reservoir term.
    pub extreme_share: f64,
}

/// Result of [`coverage_study`].
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CoverageTable {
    pub config: CoverageConfig,
    pub rows: Vec<CoverageRow>,
    /// Replicate units or truth samples skipped because a fit failed.
    pub failed_fits: usize,
}

#[derive(Debug, thiserror::Error)]
pub enum CoverageError {
    #[error("invalid coverage settings: {0}")]
    Config(String),
    #[error(transparent)]
    Param(#[from] crate::calibrate::ParamError),
    #[error(transparent)]
    Stats(#[from] super::StatsError),
}

const TAG_TRUTH: u64 = 0x0074_7275_7468;
const TAG_REPL: u64 = 0x7265_706c;

/// How θ(n) is computed: K calibration samples, G quadrature nodes.
#[derive(Debug, Clone, PartialEq)]
pub struct TruthConfig {
    pub seed: u64,
    /// K: calibration samples of size n drawn from the population.
    pub samples: usize,
    /// G: midpoint nodes in the score quantile for the exact expected loss.
    pub quadrature: usize,
}

/// θ(n) for each metric: mean and Monte Carlo standard error.
#[derive(Debug, Clone, PartialEq)]
pub struct Truth {
    pub per_metric: Vec<(f64, f64)>,
    /// Samples skipped because a fit failed.
    pub failed_fits: usize,
}

/// Two methods, built once, fitted side by side.
pub struct Fitters {
    a: Box<dyn Calibrator>,
    b: Box<dyn Calibrator>,
}

impl Fitters {
    /// Method A and reference B for probability scores.
    pub fn new(method: &MethodSpec, reference: &MethodSpec) -> Result<Self, CoverageError> {
        Ok(Fitters {
            a: method.build(ScoreKind::Probability)?,
            b: reference.build(ScoreKind::Probability)?,
        })
    }

    /// Predictions of both methods at `at`, or None when a fit fails.
    fn fit_predict(&self, s: &[f64], y: &[bool], at: &[f64]) -> Option<(Vec<f64>, Vec<f64>)> {
        let fa = self.a.fit(s, y).ok()?;
        let fb = self.b.fit(s, y).ok()?;
        let mut pa = vec![0.0; at.len()];
        let mut pb = vec![0.0; at.len()];
        fa.map.predict(at, &mut pa);
        fb.map.predict(at, &mut pb);
        Some((pa, pb))
    }
}

/// The true expected loss difference θ(n) = E_S E_(s,y)[ℓ(A_S) − ℓ(B_S)] of
/// two methods fitted on calibration samples S of size n from `pop`: the exact
/// expected difference of each fitted pair over the population (midpoint rule
/// in u = F(s)), averaged over K samples. Independent of the harness's split,
/// draw and interval code, so it can judge them. Parallel over samples; the
/// result does not depend on the thread count.
pub fn true_difference(
    pop: &Population,
    fit: &Fitters,
    metrics: &[MetricId],
    settings: &MetricSettings,
    n: usize,
    cfg: &TruthConfig,
) -> Truth {
    let g = cfg.quadrature.max(1);
    let nodes: Vec<f64> = (0..g)
        .map(|k| pop.quantile((k as f64 + 0.5) / g as f64))
        .collect();
    let q: Vec<f64> = nodes.iter().map(|&s| pop.truth(s)).collect();
    let vals: Vec<Option<Vec<f64>>> = (0..cfg.samples)
        .into_par_iter()
        .map(|k| {
            let mut r = split::rng(split::mix(cfg.seed, &[TAG_TRUTH, n as u64, k as u64]));
            let (s, y) = pop.draw(&mut r, n);
            let (pa, pb) = fit.fit_predict(&s, &y, &nodes)?;
            Some(
                metrics
                    .iter()
                    .map(|&met| {
                        let mut acc = 0.0;
                        for j in 0..g {
                            let one = met.row_term(pa[j], true, settings)
                                - met.row_term(pb[j], true, settings);
                            let zero = met.row_term(pa[j], false, settings)
                                - met.row_term(pb[j], false, settings);
                            acc += q[j] * one + (1.0 - q[j]) * zero;
                        }
                        acc / g as f64
                    })
                    .collect(),
            )
        })
        .collect();
    let ok: Vec<&Vec<f64>> = vals.iter().flatten().collect();
    let per_metric = (0..metrics.len())
        .map(|mi| {
            let x: Vec<f64> = ok.iter().map(|v| v[mi]).collect();
            let (mean, var) = super::mean_var(&x);
            (mean, (var / x.len() as f64).sqrt())
        })
        .collect();
    Truth {
        per_metric,
        failed_fits: vals.len() - ok.len(),
    }
}

/// Run the study. Work is spread over the rayon thread pool; results do not
/// depend on the thread count.
pub fn coverage_study(cfg: &CoverageConfig) -> Result<CoverageTable, CoverageError> {
    let m = cfg.test_rows;
    let big_m = cfg.reservoir;
    if cfg.repeats < 2 || cfg.replicates == 0 || cfg.truth_samples < 2 || cfg.quadrature == 0 {
        return Err(CoverageError::Config(
            "need repeats ≥ 2, replicates ≥ 1, truth_samples ≥ 2, quadrature ≥ 1".into(),
        ));
    }
    if cfg.sizes.iter().any(|&n| n < 2 || n >= big_m) || m < 2 || cfg.metrics.is_empty() {
        return Err(CoverageError::Config(
            "every size must lie in 2..reservoir, test_rows ≥ 2, at least one metric".into(),
        ));
    }
    let fit = Fitters::new(&cfg.method, &cfg.reference)?;
    let pop = &cfg.population;
    let g = cfg.quadrature;
    let nm = cfg.metrics.len();

    // θ(n) per (size, metric): mean and standard error over K samples.
    let truth_cfg = TruthConfig {
        seed: cfg.seed,
        samples: cfg.truth_samples,
        quadrature: g,
    };
    let mut truth = Vec::with_capacity(cfg.sizes.len());
    let mut failed = 0usize;
    for &n in &cfg.sizes {
        let t = true_difference(pop, &fit, &cfg.metrics, &cfg.settings, n, &truth_cfg);
        failed += t.failed_fits;
        truth.push(t.per_metric);
    }

    // Replicates of the harness protocol.
    let nk = IntervalKind::ALL.len();
    type Out = Vec<(usize, usize, usize, i8, f64, f64, f64, [f64; 3], bool)>;
    let per_rep: Vec<(Out, usize)> = (0..cfg.replicates)
        .into_par_iter()
        .map(|rep| {
            let pool_seed = split::mix(cfg.seed, &[TAG_REPL, rep as u64]);
            let mut r = split::rng(pool_seed);
            let (s, y) = pop.draw(&mut r, big_m + m);
            let (res, test) = split::partition(big_m + m, m, split::mix(pool_seed, &[1]));
            let ts: Vec<f64> = test.iter().map(|&i| s[i]).collect();
            let ty: Vec<bool> = test.iter().map(|&i| y[i]).collect();
            let batch = paired::test_batches(m);
            let mut out = Vec::new();
            let mut fails = 0;
            for (si, &n) in cfg.sizes.iter().enumerate() {
                let mut diffs = vec![Vec::with_capacity(cfg.repeats); nm];
                let mut rows = vec![Vec::with_capacity(cfg.repeats); nm];
                let mut extreme = vec![false; nm];
                for rr in 0..cfg.repeats {
                    let draw = split::draw_calibration(
                        res.len(),
                        n,
                        split::mix(pool_seed, &[2, n as u64, rr as u64]),
                    );
                    let cs: Vec<f64> = draw.iter().map(|&j| s[res[j]]).collect();
                    let cy: Vec<bool> = draw.iter().map(|&j| y[res[j]]).collect();
                    let Some((pa, pb)) = fit.fit_predict(&cs, &cy, &ts) else {
                        fails += 1;
                        continue;
                    };
                    for (mi, &met) in cfg.metrics.iter().enumerate() {
                        if let Some(limit) = met
                            .extreme_row_loss(&cfg.settings)
                            .filter(|_| cfg.detect_extreme)
                        {
                            extreme[mi] |= (0..m).any(|i| {
                                met.row_term(pa[i], ty[i], &cfg.settings) >= limit
                                    || met.row_term(pb[i], ty[i], &cfg.settings) >= limit
                            });
                        }
                        let e: Vec<f64> = (0..m)
                            .map(|i| {
                                met.row_term(pa[i], ty[i], &cfg.settings)
                                    - met.row_term(pb[i], ty[i], &cfg.settings)
                            })
                            .collect();
                        diffs[mi].push(e.iter().sum::<f64>() / m as f64);
                        rows[mi].push(
                            paired::row_summary_in(&batch, &e)
                                .into_iter()
                                .map(|(_, v)| v)
                                .collect::<Vec<f64>>(),
                        );
                    }
                }
                for mi in 0..nm {
                    let input = PairedInput {
                        diffs: &diffs[mi],
                        row_stats: Some(&rows[mi]),
                        size: n,
                        reservoir: res.len(),
                        test_rows: m,
                        extreme: extreme[mi],
                    };
                    for (ki, &kind) in IntervalKind::ALL.iter().enumerate() {
                        if let Ok(iv) = paired::interval(kind, &input, cfg.confidence) {
                            let th = truth[si][mi].0;
                            let order = if input.extreme { 1 } else { 2 };
                            let parts = match paired::decompose(&input, order) {
                                Ok((p, _)) => [p.draws, p.reservoir, p.test.unwrap_or(0.0)],
                                Err(_) => [f64::NAN; 3],
                            };
                            out.push((
                                si,
                                mi,
                                ki,
                                if iv.high < th {
                                    -1
                                } else if iv.low > th {
                                    1
                                } else {
                                    0
                                },
                                0.5 * (iv.high - iv.low),
                                iv.mean,
                                iv.se,
                                parts,
                                input.extreme,
                            ));
                        }
                    }
                }
            }
            (out, fails)
        })
        .collect();

    let cells = cfg.sizes.len() * nm * nk;
    let mut covered = vec![0usize; cells];
    let mut low = vec![0usize; cells];
    let mut high = vec![0usize; cells];
    let mut count = vec![0usize; cells];
    let mut half = vec![0.0f64; cells];
    let mut est = vec![0.0f64; cells];
    let mut se2 = vec![0.0f64; cells];
    let mut err2 = vec![0.0f64; cells];
    let mut parts = vec![[0.0f64; 3]; cells];
    let mut flagged = vec![0usize; cells];
    for (out, fails) in &per_rep {
        failed += fails;
        for &(si, mi, ki, c, h, e, se, p, x) in out {
            let idx = (mi * cfg.sizes.len() + si) * nk + ki;
            covered[idx] += (c == 0) as usize;
            flagged[idx] += x as usize;
            low[idx] += (c < 0) as usize;
            high[idx] += (c > 0) as usize;
            count[idx] += 1;
            half[idx] += h;
            est[idx] += e;
            se2[idx] += se * se;
            err2[idx] += (e - truth[si][mi].0).powi(2);
            for k in 0..3 {
                parts[idx][k] += p[k];
            }
        }
    }
    let mut rows = Vec::with_capacity(cells);
    for (mi, &metric) in cfg.metrics.iter().enumerate() {
        for (si, &size) in cfg.sizes.iter().enumerate() {
            for (ki, &kind) in IntervalKind::ALL.iter().enumerate() {
                let idx = (mi * cfg.sizes.len() + si) * nk + ki;
                let c = count[idx].max(1) as f64;
                let cov = covered[idx] as f64 / c;
                rows.push(CoverageRow {
                    metric,
                    size,
                    kind,
                    truth: truth[si][mi].0,
                    truth_se: truth[si][mi].1,
                    covered: covered[idx],
                    missed_low: low[idx],
                    missed_high: high[idx],
                    replicates: count[idx],
                    coverage: cov,
                    coverage_se: (cov * (1.0 - cov) / c).sqrt(),
                    mean_half_width: half[idx] / c,
                    mean_estimate: est[idx] / c,
                    rms_se: (se2[idx] / c).sqrt(),
                    rmse: (err2[idx] / c).sqrt(),
                    mean_parts: parts[idx].map(|x| x / c),
                    extreme_share: flagged[idx] as f64 / c,
                });
            }
        }
    }
    Ok(CoverageTable {
        config: cfg.clone(),
        rows,
        failed_fits: failed,
    })
}

impl CoverageTable {
    /// A plain-text table, one line per (metric, size, interval).
    pub fn render(&self) -> String {
        let mut s = String::new();
        s.push_str(&format!(
            "{:<9} {:>6} {:<17} {:>10} {:>9} {:>9} {:>7} {:>6} {:>6} {:>10} {:>10} {:>10} {:>10}\n",
            "metric",
            "size",
            "interval",
            "truth",
            "truth_se",
            "coverage",
            "cov_se",
            "low",
            "high",
            "half_width",
            "bias",
            "rms_se",
            "rmse"
        ));
        for r in &self.rows {
            s.push_str(&format!(
                "{:<9} {:>6} {:<17} {:>10.6} {:>9.6} {:>8.1}% {:>6.1}% {:>5.1}% {:>5.1}% {:>10.6} {:>10.6} {:>10.6} {:>10.6}\n",
                r.metric.as_str(),
                r.size,
                r.kind.as_str(),
                r.truth,
                r.truth_se,
                100.0 * r.coverage,
                100.0 * r.coverage_se,
                100.0 * r.missed_low as f64 / r.replicates.max(1) as f64,
                100.0 * r.missed_high as f64 / r.replicates.max(1) as f64,
                r.mean_half_width,
                r.mean_estimate - r.truth,
                r.rms_se,
                r.rmse
            ));
        }
        s.push_str(
            "\nmean variance terms of the decomposed intervals (draws, reservoir, test) vs rmse², and the share of replicates with extreme predictions\n",
        );
        for r in self
            .rows
            .iter()
            .filter(|r| r.kind == IntervalKind::Decomposed)
        {
            s.push_str(&format!(
                "{:<9} {:>6} draws {:.3e} reservoir {:.3e} test {:.3e} sum {:.3e} rmse² {:.3e} extreme {:.1}%\n",
                r.metric.as_str(),
                r.size,
                r.mean_parts[0],
                r.mean_parts[1],
                r.mean_parts[2],
                r.mean_parts.iter().sum::<f64>(),
                r.rmse * r.rmse,
                100.0 * r.extreme_share
            ));
        }
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn kumaraswamy_quantile_inverts_cdf() {
        // F(s) = 1 − (1 − s^a)^b (Kumaraswamy 1980).
        let p = Population::default();
        for &u in &[0.01, 0.3, 0.5, 0.9] {
            let s = p.quantile(u);
            let f = 1.0 - (1.0 - s.powf(p.score_a)).powf(p.score_b);
            assert!((f - u).abs() < 1e-12);
        }
    }

    #[test]
    fn tiny_study_runs_and_counts_every_cell() {
        let cfg = CoverageConfig {
            sizes: vec![40, 100],
            reservoir: 300,
            test_rows: 200,
            repeats: 3,
            replicates: 4,
            truth_samples: 20,
            quadrature: 64,
            ..CoverageConfig::default()
        };
        let t = coverage_study(&cfg).unwrap();
        assert_eq!(t.rows.len(), 2 * 2 * IntervalKind::ALL.len());
        assert!(t
            .rows
            .iter()
            .all(|r| r.replicates == 4 && r.truth.is_finite()));
        let bad = CoverageConfig {
            sizes: vec![300],
            ..cfg
        };
        assert!(coverage_study(&bad).is_err());
    }
}
