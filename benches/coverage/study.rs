//! Coverage of the paired intervals, measured by simulation on populations
//! whose calibration map is known, with every replicate run through the run
//! engine and the analysis code a suite uses (`run::run_outcomes`,
//! `run::assemble`, `analysis::steps::pair_interval`): what is studied is what
//! runs.
//!
//! # Populations
//! Scores s follow a Kumaraswamy(a, b) distribution on (0, 1) (Kumaraswamy
//! 1980, J. Hydrology 46), chosen because its quantile function is
//! closed-form: F⁻¹(u) = (1 − (1 − u)^{1/b})^{1/a}. Labels are Bernoulli with
//! a known map q(s):
//! - `two-step`: q(s) = lo + (hi − lo)·[σ(k(s − c₁)) + σ(k(s − c₂))]/2, which
//!   no logistic curve in s matches, so Platt scaling is biased and isotonic
//!   regression is not;
//! - `logistic`: q(s) = σ(β·logit(s) + γ): β = 1, γ = 0 is a calibrated
//!   model, β < 1 an over-confident one, β > 1 an under-confident one.
//!
//! # True difference
//! For a fitted map m the exact expected loss over new rows is
//! ∫ [q(s) ℓ(m(s), 1) + (1 − q(s)) ℓ(m(s), 0)] dF(s), computed by the midpoint
//! rule in u = F(s) with G nodes. θ(n) of a pair is the mean over K
//! calibration samples of size n (drawn from the population itself, not from a
//! finite pool) of the difference of the pair's exact expected losses, with
//! its Monte Carlo standard error. A method that cannot fit a sample predicts
//! the smoothed base rate (k + 1)/(n + 2), the engine's default fallback, so
//! the truth is the estimand of a run under `on_fit_failure = "fallback"`.
//! This part uses only the methods' own fit and predict, not the harness's
//! split, draw, engine or interval code, so it can judge them.
//!
//! # Replicates
//! Each replicate draws a finite pool of M + m rows, hands it to a one-task
//! plan (the plan's seed changes per replicate) and runs every unit of the
//! plan through the engine. Every interval kind of every pair is then formed
//! from the unit table exactly as a report forms it. Coverage is the share of
//! replicates whose interval contains θ(n); its binomial standard error is
//! √(c(1 − c)/replicates).

#![allow(dead_code)]

use std::collections::BTreeMap;
use std::path::Path;

use rand_chacha::rand_core::Rng;
use rayon::prelude::*;

use plumbline::analysis::steps::{pair_interval, Cells, PairSource};
use plumbline::analysis::AnalysisSettings;
use plumbline::analysis::CellKey as TableCell;
use plumbline::calibrate::{sigmoid, Calibrator, MethodSpec, ScoreKind};
use plumbline::data::ScorePool;
use plumbline::metrics::{MetricId, MetricSettings};
use plumbline::run::{self, RunOptions};
use plumbline::split;
use plumbline::stats::paired::IntervalKind;
use plumbline::suite::Plan;

/// The true calibration map q(s) = P(y = 1 | s) of a population.
#[derive(Debug, Clone, PartialEq)]
pub enum TruthMap {
    /// lo + (hi − lo)·[σ(k(s − c₁)) + σ(k(s − c₂))]/2.
    TwoStep {
        lo: f64,
        hi: f64,
        steepness: f64,
        steps: [f64; 2],
    },
    /// σ(slope·logit(s) + intercept).
    Logistic { slope: f64, intercept: f64 },
}

/// A synthetic population of (score, label) rows.
#[derive(Debug, Clone, PartialEq)]
pub struct Population {
    pub name: &'static str,
    /// Kumaraswamy shapes (a, b) of the score distribution.
    pub score_a: f64,
    pub score_b: f64,
    pub map: TruthMap,
}

impl Default for Population {
    fn default() -> Self {
        Population::two_step()
    }
}

impl Population {
    /// Kumaraswamy(2, 3) scores under a two-step map no logistic curve fits.
    pub fn two_step() -> Self {
        Population {
            name: "two-step",
            score_a: 2.0,
            score_b: 3.0,
            map: TruthMap::TwoStep {
                lo: 0.05,
                hi: 0.9,
                steepness: 30.0,
                steps: [0.3, 0.6],
            },
        }
    }

    /// Kumaraswamy(2, 3) scores that are calibrated: q(s) = s (base rate 0.457).
    pub fn calibrated() -> Self {
        Population {
            name: "calibrated",
            score_a: 2.0,
            score_b: 3.0,
            map: TruthMap::Logistic {
                slope: 1.0,
                intercept: 0.0,
            },
        }
    }

    /// U-shaped Kumaraswamy(0.6, 0.6) scores, twice as far from ½ in log-odds
    /// as the truth: q(s) = σ(logit(s)/2) (base rate 0.51).
    pub fn over_confident() -> Self {
        Population {
            name: "over-confident",
            score_a: 0.6,
            score_b: 0.6,
            map: TruthMap::Logistic {
                slope: 0.5,
                intercept: 0.0,
            },
        }
    }

    /// Kumaraswamy(1.5, 15) scores (mean 0.14) whose truth is twice as far out
    /// in log-odds and lower: q(s) = σ(2·logit(s) − 0.5), base rate 3.0%.
    pub fn rare_under_confident() -> Self {
        Population {
            name: "rare-under-confident",
            score_a: 1.5,
            score_b: 15.0,
            map: TruthMap::Logistic {
                slope: 2.0,
                intercept: -0.5,
            },
        }
    }

    /// Kumaraswamy(0.5, 4) scores (mean 0.067, piled up near 0 with a long
    /// tail) twice as far out in log-odds as the truth and too high:
    /// q(s) = σ(logit(s)/2 − 1.5), base rate 4.5%: a fraud or default model
    /// whose confident scores are not to be trusted.
    pub fn rare_over_confident() -> Self {
        Population {
            name: "rare-over-confident",
            score_a: 0.5,
            score_b: 4.0,
            map: TruthMap::Logistic {
                slope: 0.5,
                intercept: -1.5,
            },
        }
    }

    /// The populations of the published study, in table order.
    pub fn all() -> Vec<Population> {
        vec![
            Population::calibrated(),
            Population::over_confident(),
            Population::rare_under_confident(),
            Population::rare_over_confident(),
            Population::two_step(),
        ]
    }

    /// Score at quantile u.
    pub fn quantile(&self, u: f64) -> f64 {
        (1.0 - (1.0 - u).powf(1.0 / self.score_b)).powf(1.0 / self.score_a)
    }

    /// True P(y = 1 | s).
    pub fn truth(&self, s: f64) -> f64 {
        match self.map {
            TruthMap::TwoStep {
                lo,
                hi,
                steepness: k,
                steps,
            } => {
                let up = sigmoid(k * (s - steps[0])) + sigmoid(k * (s - steps[1]));
                lo + (hi - lo) * up / 2.0
            }
            TruthMap::Logistic { slope, intercept } => {
                let s = s.clamp(1e-300, 1.0 - 1e-16);
                sigmoid(slope * (s / (1.0 - s)).ln() + intercept)
            }
        }
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

const TAG_TRUTH: u64 = 0x0074_7275_7468;
const TAG_REPL: u64 = 0x7265_706c;

/// The methods of a study: (id, spec) in suite order.
pub type Methods = Vec<(String, MethodSpec)>;

/// The methods of the shipped default suite (`suites/open-uci.toml`).
pub fn default_suite_methods() -> Methods {
    let text = include_str!("../../suites/open-uci.toml");
    let value: toml::Table = toml::from_str(text).expect("the default suite parses");
    let list = value
        .get("method")
        .and_then(|m| m.as_array())
        .expect("the default suite lists methods");
    list.iter()
        .map(|m| {
            let mut t = m.as_table().expect("a method table").clone();
            let id = t
                .remove("id")
                .and_then(|v| v.as_str().map(str::to_string))
                .expect("a method id");
            let spec: MethodSpec = t.try_into().expect("a valid method spec");
            (id, spec)
        })
        .collect()
}

/// Fit and predict as the engine does: a method that cannot fit predicts the
/// engine's fallback, the smoothed base rate of its sample
/// ([`run::fallback_rate`]).
fn fit_predict(cal: &dyn Calibrator, s: &[f64], y: &[bool], at: &[f64]) -> (Vec<f64>, bool) {
    let mut p = vec![0.0; at.len()];
    match cal.fit(s, y) {
        Ok(f) => {
            f.map.predict(at, &mut p);
            (p, false)
        }
        Err(_) => {
            p.fill(run::fallback_rate(y));
            (p, true)
        }
    }
}

/// How θ(n) is computed: K calibration samples, G quadrature nodes.
#[derive(Debug, Clone, PartialEq)]
pub struct TruthConfig {
    pub seed: u64,
    /// K: calibration samples of size n drawn from the population.
    pub samples: usize,
    /// G: midpoint nodes in the score quantile for the exact expected loss.
    pub quadrature: usize,
}

/// Exact expected losses of every method fitted on K samples of size n:
/// `loss[k][metric][method]`, and the number of fallback fits.
pub struct TruthSamples {
    pub loss: Vec<Vec<Vec<f64>>>,
    pub fallbacks: usize,
}

impl TruthSamples {
    /// θ(n) of method `a` − method `b` for metric index `mi`: mean and
    /// Monte Carlo standard error over the samples.
    pub fn difference(&self, mi: usize, a: usize, b: usize) -> (f64, f64) {
        let x: Vec<f64> = self.loss.iter().map(|l| l[mi][a] - l[mi][b]).collect();
        let k = x.len() as f64;
        let mean = x.iter().sum::<f64>() / k;
        let var = x.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (k - 1.0);
        (mean, (var / k).sqrt())
    }
}

/// The exact expected losses of every method over K calibration samples of
/// size n from `pop`. Parallel over samples; the result does not depend on
/// the thread count.
pub fn truth_samples(
    pop: &Population,
    methods: &[Box<dyn Calibrator>],
    metrics: &[MetricId],
    settings: &MetricSettings,
    n: usize,
    cfg: &TruthConfig,
) -> TruthSamples {
    let g = cfg.quadrature.max(1);
    let nodes: Vec<f64> = (0..g)
        .map(|k| pop.quantile((k as f64 + 0.5) / g as f64))
        .collect();
    let q: Vec<f64> = nodes.iter().map(|&s| pop.truth(s)).collect();
    let per: Vec<(Vec<Vec<f64>>, usize)> = (0..cfg.samples)
        .into_par_iter()
        .map(|k| {
            let mut r = split::rng(split::mix(cfg.seed, &[TAG_TRUTH, n as u64, k as u64]));
            let (s, y) = pop.draw(&mut r, n);
            let mut falls = 0;
            let preds: Vec<Vec<f64>> = methods
                .iter()
                .map(|c| {
                    let (p, fell) = fit_predict(c.as_ref(), &s, &y, &nodes);
                    falls += fell as usize;
                    p
                })
                .collect();
            let loss = metrics
                .iter()
                .map(|&met| {
                    preds
                        .iter()
                        .map(|p| {
                            let mut acc = 0.0;
                            for j in 0..g {
                                acc += q[j] * met.row_term(p[j], true, settings)
                                    + (1.0 - q[j]) * met.row_term(p[j], false, settings);
                            }
                            acc / g as f64
                        })
                        .collect()
                })
                .collect();
            (loss, falls)
        })
        .collect();
    TruthSamples {
        fallbacks: per.iter().map(|p| p.1).sum(),
        loss: per.into_iter().map(|p| p.0).collect(),
    }
}

/// Settings of a coverage study.
#[derive(Debug, Clone)]
pub struct StudyConfig {
    pub seed: u64,
    pub populations: Vec<Population>,
    pub methods: Methods,
    /// Pairs (method, reference) whose difference method − reference is studied.
    pub pairs: Vec<(String, String)>,
    pub metrics: Vec<MetricId>,
    pub reservoir: usize,
    pub test_rows: usize,
    pub sizes: Vec<usize>,
    pub repeats: usize,
    pub replicates: usize,
    pub truth: TruthConfig,
    pub confidence: f64,
    pub kinds: Vec<IntervalKind>,
    /// Keep every replicate's raw interval inputs ([`RawCell`]).
    pub keep_raw: bool,
}

impl StudyConfig {
    /// Every method of the default suite against Platt scaling and against
    /// the identity, on the four populations, at the published sizes.
    pub fn published() -> Self {
        let methods = default_suite_methods();
        let mut pairs = Vec::new();
        for reference in ["platt", "identity"] {
            for (id, _) in &methods {
                if id != reference && !(reference == "identity" && id == "platt") {
                    pairs.push((id.clone(), reference.to_string()));
                }
            }
        }
        // Platt against the identity once, under the identity block.
        pairs.push(("platt".into(), "identity".into()));
        StudyConfig {
            seed: 20_030_052,
            populations: Population::all(),
            methods,
            pairs,
            metrics: vec![MetricId::LogLoss, MetricId::Brier],
            reservoir: 4000,
            test_rows: 2000,
            sizes: vec![50, 100, 200, 500, 1000, 2000],
            repeats: 30,
            replicates: 1000,
            truth: TruthConfig {
                seed: 20_030_052,
                samples: 5000,
                quadrature: 2048,
            },
            confidence: 0.95,
            kinds: IntervalKind::ALL.to_vec(),
            keep_raw: false,
        }
    }
}

/// One replicate's interval for one (population, pair, metric, size, kind).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Draw {
    pub mean: f64,
    pub low: f64,
    pub high: f64,
    pub se: f64,
    pub df: f64,
    pub test_term: f64,
    pub order: u32,
    /// Whether a report marks this interval as approximate (rare class, or
    /// a log-loss comparison with a method that can predict 0 or 1).
    pub approximate: bool,
}

/// Key of a cell: (population, pair, metric, size, kind) indices.
pub type CellKey = (usize, usize, usize, usize, usize);

/// Everything a study produced.
pub struct StudyOutput {
    pub config: StudyConfig,
    /// θ(n) and its standard error per (population, pair, metric, size).
    pub truth: BTreeMap<(usize, usize, usize, usize), (f64, f64)>,
    /// Per cell, one entry per replicate (replicate order).
    pub draws: BTreeMap<CellKey, Vec<Draw>>,
    /// Fallback fits in the truth samples and in the replicates' units.
    pub truth_fallbacks: usize,
    pub unit_fallbacks: usize,
    pub units: usize,
    /// Raw interval inputs per replicate and cell (only with `keep_raw`).
    pub raw: Vec<RawCell>,
}

/// A one-task plan with the study's methods, metrics, sizes and repeats,
/// parsed from a suite text as a user's suite would be (the score file is a
/// placeholder; each replicate replaces the pool).
pub fn template_plan(cfg: &StudyConfig, dir: &Path) -> Result<Plan, String> {
    let pop = Population::calibrated();
    let mut r = split::rng(1);
    let (s, y) = pop.draw(&mut r, cfg.reservoir + cfg.test_rows);
    let mut csv = String::from("score,label\n");
    for (si, yi) in s.iter().zip(&y) {
        csv.push_str(&format!("{si},{}\n", *yi as u8));
    }
    std::fs::write(dir.join("placeholder.csv"), csv).map_err(|e| e.to_string())?;
    let list = |v: Vec<String>| v.join(", ");
    let mut suite = format!(
        "name = \"coverage-study\"\nseed = 1\nrepeats = {}\nsizes = [{}]\nconfidence = {}\n\
         reference = \"platt\"\nmetrics = [{}]\nprimary_metric = \"{}\"\n\n\
         [test_set]\nrows = {}\n\n[reliability]\nsizes = []\n\n",
        cfg.repeats,
        list(cfg.sizes.iter().map(|n| n.to_string()).collect()),
        cfg.confidence,
        list(
            cfg.metrics
                .iter()
                .map(|m| format!("\"{}\"", m.as_str()))
                .collect()
        ),
        cfg.metrics[0].as_str(),
        cfg.test_rows,
    );
    for (id, spec) in &cfg.methods {
        let body = toml::to_string(spec).map_err(|e| e.to_string())?;
        suite.push_str(&format!("[[method]]\nid = \"{id}\"\n{body}\n"));
    }
    suite.push_str(
        "[[task]]\nid = \"pool\"\nscores = \"placeholder.csv\"\nscore_column = \"score\"\n\
         label_column = \"label\"\nscore_kind = \"probability\"\n",
    );
    let path = dir.join("study.toml");
    std::fs::write(&path, &suite).map_err(|e| e.to_string())?;
    plumbline::suite::load(&path).map_err(|e| format!("{e}\n{suite}"))
}

/// The plan of one replicate: a fresh pool of M + m rows from `pop`, split by
/// the plan's own rule under a seed of the replicate.
fn replicate_plan(template: &Plan, cfg: &StudyConfig, pi: usize, rep: usize) -> Plan {
    let mut plan = template.clone();
    plan.seed = split::mix(
        cfg.seed,
        &[
            TAG_REPL,
            split::fnv1a(cfg.populations[pi].name.as_bytes()),
            rep as u64,
        ],
    );
    let mut r = split::rng(plan.seed);
    let n = cfg.reservoir + cfg.test_rows;
    let (s, y) = cfg.populations[pi].draw(&mut r, n);
    let task = &mut plan.tasks[0];
    task.positives = y.iter().filter(|&&v| v).count();
    task.rows = n;
    task.pool = ScorePool {
        scores: s,
        labels: y,
        sides: None,
    };
    let (res, test) = split::partition(n, cfg.test_rows, split::task_seed(plan.seed, &task.id));
    task.reservoir_rows = res.len();
    task.test_rows = test.len();
    task.reservoir = res;
    task.test = test;
    task.sizes = cfg.sizes.clone();
    plan
}

/// One replicate's raw interval inputs for one (pair, metric, size): the
/// per-repeat differences d_r, the per-repeat test-batch mean differences
/// (R × B, row-major), whether either method made an extreme prediction, and
/// the calibration positives per repeat.
#[derive(Debug, Clone)]
pub struct RawCell {
    pub key: (usize, usize, usize, usize),
    pub replicate: usize,
    pub extreme: bool,
    pub diffs: Vec<f64>,
    pub batches: Vec<f64>,
    pub positives: Vec<f64>,
}

type RepOut = (Vec<(CellKey, Draw)>, usize, usize, Vec<RawCell>);

/// Run one replicate through the engine and form every interval.
fn run_replicate(
    template: &Plan,
    cfg: &StudyConfig,
    pi: usize,
    rep: usize,
) -> Result<RepOut, String> {
    let plan = replicate_plan(template, cfg, pi, rep);
    let opts = RunOptions {
        threads: Some(1),
        quiet: true,
    };
    let (units, threads, _) = run::run_outcomes(
        &plan,
        &opts,
        &run::unit_keys(&plan),
        Vec::new(),
        &|_| Ok(()),
    )
    .map_err(|e| e.to_string())?;
    let fallbacks = units
        .iter()
        .flat_map(|u| &u.methods)
        .filter(|m| m.status.is_fallback())
        .count();
    let nunits = units.len();
    let table = run::assemble(&plan, units, threads, 0).table;
    let mut cells: Cells = BTreeMap::new();
    for (i, row) in table.rows.iter().enumerate() {
        cells
            .entry(TableCell::of(row))
            .or_default()
            .insert(row.repeat, i);
    }
    let mut raw = Vec::new();
    if cfg.keep_raw {
        let batch_cols = |method: &str, metric: &str| -> Vec<Option<usize>> {
            plumbline::stats::paired::ROW_SUMMARY_NAMES
                .iter()
                .map(|n| {
                    if method == plan.reference {
                        None
                    } else {
                        table.extra_index(&format!("{metric}_{n}"))
                    }
                })
                .collect()
        };
        for (qi, (a, b)) in cfg.pairs.iter().enumerate() {
            for (mi, met) in cfg.metrics.iter().enumerate() {
                let col = table
                    .metric_index(met.as_str())
                    .ok_or_else(|| format!("no column for {}", met.as_str()))?;
                let extreme_col = table.extra_index(&format!(
                    "{}_{}",
                    met.as_str(),
                    plumbline::stats::paired::EXTREME_ROWS
                ));
                let (ba, bb) = (batch_cols(a, met.as_str()), batch_cols(b, met.as_str()));
                for (si, &size) in cfg.sizes.iter().enumerate() {
                    let key = TableCell::new("pool", size, a);
                    let keyb = TableCell::new("pool", size, b);
                    let (Some(ca), Some(cb)) = (cells.get(&key), cells.get(&keyb)) else {
                        return Err(format!("no units for {a} − {b} at n = {size}"));
                    };
                    let mut cell = RawCell {
                        key: (pi, qi, mi, si),
                        replicate: rep,
                        extreme: false,
                        diffs: Vec::new(),
                        batches: Vec::new(),
                        positives: Vec::new(),
                    };
                    for (r, &i) in ca {
                        let Some(&j) = cb.get(r) else { continue };
                        let (ra, rb) = (&table.rows[i], &table.rows[j]);
                        let (Some(va), Some(vb)) = (ra.metrics[col], rb.metrics[col]) else {
                            continue;
                        };
                        cell.diffs.push(va - vb);
                        cell.positives.push(ra.positives as f64);
                        for (x, y) in ba.iter().zip(&bb) {
                            let get = |c: &Option<usize>, row: &plumbline::run::table::UnitRow| {
                                c.map_or(0.0, |c| row.extras[c].unwrap_or(f64::NAN))
                            };
                            cell.batches.push(get(x, ra) - get(y, rb));
                        }
                        if let Some(c) = extreme_col {
                            cell.extreme |= [ra, rb]
                                .iter()
                                .any(|row| row.extras[c].is_some_and(|v| v > 0.0));
                        }
                    }
                    raw.push(cell);
                }
            }
        }
    }
    let mut out = Vec::new();
    for (ki, &kind) in cfg.kinds.iter().enumerate() {
        let settings = AnalysisSettings {
            reference: plan.reference.clone(),
            primary_metric: cfg.metrics[0].as_str().to_string(),
            confidence: cfg.confidence,
            interval: kind.as_str().to_string(),
            pairs: Vec::new(),
            margin: plumbline::analysis::DEFAULT_MARGIN,
            absolute_margins: Default::default(),
            raw_method: None,
            max_fallback: plumbline::analysis::DEFAULT_MAX_FALLBACK,
            decision_threshold: None,
            zero_one_methods: cfg
                .methods
                .iter()
                .filter(|(_, m)| m.can_predict_zero_one())
                .map(|(id, _)| id.clone())
                .collect(),
        };
        let src = PairSource {
            table: &table,
            cells: &cells,
            settings: &settings,
        };
        for (qi, (a, b)) in cfg.pairs.iter().enumerate() {
            for (mi, met) in cfg.metrics.iter().enumerate() {
                let col = table
                    .metric_index(met.as_str())
                    .ok_or_else(|| format!("no column for {}", met.as_str()))?;
                for (si, &size) in cfg.sizes.iter().enumerate() {
                    let Some(iv) = pair_interval(&src, "pool", size, a, b, *met, col) else {
                        return Err(format!("no interval for {a} − {b} at n = {size}"));
                    };
                    // The report's flags: rows of the rarer class in the
                    // calibration samples (read off the reference's units,
                    // as the analysis does) and the zero-one rule.
                    let minority = cells
                        .get(&TableCell::new("pool", size, b))
                        .map(|c| {
                            let v: Vec<f64> = c
                                .values()
                                .map(|&i| {
                                    let r = &table.rows[i];
                                    r.positives.min(r.size - r.positives) as f64
                                })
                                .collect();
                            v.iter().sum::<f64>() / v.len().max(1) as f64
                        })
                        .unwrap_or(f64::NAN);
                    let approximate = minority < plumbline::analysis::RARE_CLASS_ROWS
                        || plumbline::analysis::zero_one_pair(&settings, *met, a, b);
                    out.push((
                        (pi, qi, mi, si, ki),
                        Draw {
                            mean: iv.mean,
                            low: iv.low,
                            high: iv.high,
                            se: iv.se,
                            df: iv.df,
                            test_term: iv.test_term.unwrap_or(f64::NAN),
                            order: iv.reservoir_order.unwrap_or(0),
                            approximate,
                        },
                    ));
                }
            }
        }
    }
    Ok((out, fallbacks, nunits, raw))
}

/// Run the study; `progress` is told each finished population.
pub fn run_study(cfg: &StudyConfig, progress: &dyn Fn(&str)) -> Result<StudyOutput, String> {
    // Only the methods some pair names (and the plan's reference) are fitted.
    let mut cfg = cfg.clone();
    cfg.methods
        .retain(|(id, _)| id == "platt" || cfg.pairs.iter().any(|(a, b)| a == id || b == id));
    let cfg = &cfg;
    let index = |id: &str| {
        cfg.methods
            .iter()
            .position(|(m, _)| m == id)
            .ok_or_else(|| format!("pair names unknown method `{id}`"))
    };
    let pair_idx: Vec<(usize, usize)> = cfg
        .pairs
        .iter()
        .map(|(a, b)| Ok((index(a)?, index(b)?)))
        .collect::<Result<_, String>>()?;
    let built: Vec<Box<dyn Calibrator>> = cfg
        .methods
        .iter()
        .map(|(_, m)| m.build(ScoreKind::Probability).map_err(|e| e.to_string()))
        .collect::<Result<_, _>>()?;
    let dir = tempfile::TempDir::new().map_err(|e| e.to_string())?;
    let template = template_plan(cfg, dir.path())?;
    let settings = template.metric_settings.clone();
    let mut out = StudyOutput {
        config: cfg.clone(),
        truth: BTreeMap::new(),
        draws: BTreeMap::new(),
        truth_fallbacks: 0,
        unit_fallbacks: 0,
        units: 0,
        raw: Vec::new(),
    };
    for (pi, pop) in cfg.populations.iter().enumerate() {
        for (si, &n) in cfg.sizes.iter().enumerate() {
            let ts = truth_samples(pop, &built, &cfg.metrics, &settings, n, &cfg.truth);
            out.truth_fallbacks += ts.fallbacks;
            for (qi, &(a, b)) in pair_idx.iter().enumerate() {
                for mi in 0..cfg.metrics.len() {
                    out.truth.insert((pi, qi, mi, si), ts.difference(mi, a, b));
                }
            }
        }
        let reps: Vec<RepOut> = (0..cfg.replicates)
            .into_par_iter()
            .map(|rep| run_replicate(&template, cfg, pi, rep))
            .collect::<Result<_, _>>()?;
        for (cells, falls, units, raw) in reps {
            out.raw.extend(raw);
            out.unit_fallbacks += falls;
            out.units += units;
            for (key, d) in cells {
                out.draws.entry(key).or_default().push(d);
            }
        }
        progress(pop.name);
    }
    Ok(out)
}

/// One line of the coverage table.
#[derive(Debug, Clone, PartialEq)]
pub struct CoverageRow {
    pub population: String,
    pub method: String,
    pub reference: String,
    pub metric: MetricId,
    pub size: usize,
    pub kind: IntervalKind,
    pub truth: f64,
    pub truth_se: f64,
    pub replicates: usize,
    pub covered: usize,
    /// Replicates whose interval lies entirely below θ(n).
    pub missed_low: usize,
    /// Replicates whose interval lies entirely above θ(n).
    pub missed_high: usize,
    pub mean_half_width: f64,
    pub bias: f64,
    pub rms_se: f64,
    pub rmse: f64,
    /// Share of replicates whose reservoir term took degree 1.
    pub first_order_share: f64,
    /// Replicates whose interval a report marks as approximate.
    pub approximate: usize,
    /// Covering replicates among the others.
    pub covered_unmarked: usize,
}

impl CoverageRow {
    pub fn coverage(&self) -> f64 {
        self.covered as f64 / self.replicates.max(1) as f64
    }

    /// Coverage among the replicates a report does not mark approximate
    /// (NaN when it marks them all).
    pub fn coverage_unmarked(&self) -> f64 {
        let n = self.replicates - self.approximate;
        if n == 0 {
            f64::NAN
        } else {
            self.covered_unmarked as f64 / n as f64
        }
    }
}

impl StudyOutput {
    /// The coverage table, one row per cell.
    pub fn rows(&self) -> Vec<CoverageRow> {
        let cfg = &self.config;
        self.draws
            .iter()
            .map(|(&(pi, qi, mi, si, ki), ds)| {
                let (th, th_se) = self.truth[&(pi, qi, mi, si)];
                let c = ds.len().max(1) as f64;
                let mean_est = ds.iter().map(|d| d.mean).sum::<f64>() / c;
                CoverageRow {
                    population: cfg.populations[pi].name.to_string(),
                    method: cfg.pairs[qi].0.clone(),
                    reference: cfg.pairs[qi].1.clone(),
                    metric: cfg.metrics[mi],
                    size: cfg.sizes[si],
                    kind: cfg.kinds[ki],
                    truth: th,
                    truth_se: th_se,
                    replicates: ds.len(),
                    covered: ds.iter().filter(|d| d.low <= th && th <= d.high).count(),
                    missed_low: ds.iter().filter(|d| d.high < th).count(),
                    missed_high: ds.iter().filter(|d| d.low > th).count(),
                    mean_half_width: ds.iter().map(|d| 0.5 * (d.high - d.low)).sum::<f64>() / c,
                    bias: mean_est - th,
                    rms_se: (ds.iter().map(|d| d.se * d.se).sum::<f64>() / c).sqrt(),
                    rmse: (ds.iter().map(|d| (d.mean - th).powi(2)).sum::<f64>() / c).sqrt(),
                    first_order_share: ds.iter().filter(|d| d.order == 1).count() as f64 / c,
                    approximate: ds.iter().filter(|d| d.approximate).count(),
                    covered_unmarked: ds
                        .iter()
                        .filter(|d| !d.approximate && d.low <= th && th <= d.high)
                        .count(),
                }
            })
            .collect()
    }

    /// The coverage table as CSV (one row per cell; numbers to 6 significant
    /// digits so the file is stable across platforms' last-bit differences
    /// only where the underlying numbers are).
    pub fn table_csv(&self) -> String {
        let mut s = String::from(
            "population,method,reference,metric,size,interval,truth,truth_se,replicates,covered,missed_low,missed_high,coverage,mean_half_width,bias,rms_se,rmse,first_order_share,approximate,covered_unmarked,coverage_unmarked\n",
        );
        for r in self.rows() {
            s.push_str(&format!(
                "{},{},{},{},{},{},{:.6e},{:.3e},{},{},{},{},{:.4},{:.6e},{:.3e},{:.6e},{:.6e},{:.4},{},{},{:.4}\n",
                r.population,
                r.method,
                r.reference,
                r.metric.as_str(),
                r.size,
                r.kind.as_str(),
                r.truth,
                r.truth_se,
                r.replicates,
                r.covered,
                r.missed_low,
                r.missed_high,
                r.coverage(),
                r.mean_half_width,
                r.bias,
                r.rms_se,
                r.rmse,
                r.first_order_share,
                r.approximate,
                r.covered_unmarked,
                r.coverage_unmarked()
            ));
        }
        s
    }

    /// `population,method,reference,metric,size` of a cell, as the CSV
    /// outputs name it.
    fn cell_label(&self, (pi, qi, mi, si): (usize, usize, usize, usize)) -> String {
        let cfg = &self.config;
        format!(
            "{},{},{},{},{}",
            cfg.populations[pi].name,
            cfg.pairs[qi].0,
            cfg.pairs[qi].1,
            cfg.metrics[mi].as_str(),
            cfg.sizes[si]
        )
    }

    /// Every replicate's interval (for studying other rules offline).
    pub fn draws_csv(&self) -> String {
        let cfg = &self.config;
        let mut s = String::from(
            "population,method,reference,metric,size,interval,replicate,truth,mean,low,high,se,df,test_term,order\n",
        );
        for (&(pi, qi, mi, si, ki), ds) in &self.draws {
            let th = self.truth[&(pi, qi, mi, si)].0;
            for (rep, d) in ds.iter().enumerate() {
                s.push_str(&format!(
                    "{},{},{rep},{th:e},{:e},{:e},{:e},{:e},{:e},{:e},{}\n",
                    self.cell_label((pi, qi, mi, si)),
                    cfg.kinds[ki].as_str(),
                    d.mean,
                    d.low,
                    d.high,
                    d.se,
                    d.df,
                    d.test_term,
                    d.order
                ));
            }
        }
        s
    }
}

impl StudyOutput {
    /// The raw interval inputs: an index CSV (one line per replicate and
    /// cell, with the offset and length in f64 values of its record in the
    /// binary file) and the little-endian f64 records, each d_r (R values),
    /// then the R × B batch table, then the R calibration positives.
    pub fn raw_files(&self) -> (String, Vec<u8>) {
        let mut index = String::from(
            "population,method,reference,metric,size,replicate,truth,extreme,repeats,batches,offset\n",
        );
        let mut bin = Vec::new();
        for c in &self.raw {
            let r = c.diffs.len();
            index.push_str(&format!(
                "{},{},{:e},{},{},{},{}\n",
                self.cell_label(c.key),
                c.replicate,
                self.truth[&c.key].0,
                c.extreme as u8,
                r,
                c.batches.len() / r.max(1),
                bin.len() / 8
            ));
            for v in c.diffs.iter().chain(&c.batches).chain(&c.positives) {
                bin.extend_from_slice(&v.to_le_bytes());
            }
        }
        (index, bin)
    }
}
