//! Analysis: turns the unit table into plain result structs — per-method
//! summaries and paired comparisons against the reference method — by calling
//! the statistics. Reports only format what this module returns.

use std::collections::BTreeMap;

use crate::metrics::MetricId;
use crate::run::table::UnitTable;

/// Settings the analysis needs (recorded in `manifest.json`, or given to
/// `plumbline report` as flags).
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct AnalysisSettings {
    pub reference: String,
    pub primary_metric: String,
    pub confidence: f64,
    pub interval: String,
}

/// Mean of one metric for one method at one (task, size).
#[derive(Debug, Clone, PartialEq)]
pub struct MethodSummary {
    pub task: String,
    pub size: usize,
    pub method: String,
    pub metric: String,
    /// Units with a value.
    pub n: usize,
    pub mean: f64,
    pub sd: f64,
    /// Units whose status carried a fit note (e.g. `separable`).
    pub noted: usize,
    /// Units with no value (one-class samples, failed fits).
    pub missing: usize,
    /// Mean count of clipped test predictions.
    pub mean_clipped: f64,
}

/// A method against the reference at one (task, size, metric).
#[derive(Debug, Clone, PartialEq)]
pub struct Paired {
    pub task: String,
    pub size: usize,
    pub method: String,
    pub reference: String,
    pub metric: String,
    /// Repeats where both had a value.
    pub repeats: usize,
    pub mean_method: f64,
    pub mean_reference: f64,
    /// Mean of (method − reference).
    pub mean_diff: f64,
    pub ci_low: f64,
    pub ci_high: f64,
    pub se: f64,
    /// Repeats where the method was better / equal / worse than the reference.
    pub wins: usize,
    pub ties: usize,
    pub losses: usize,
    pub interval: String,
    pub confidence: f64,
}

impl Paired {
    /// The interval excludes zero on the method's better side.
    pub fn reliably_better(&self, higher_is_better: bool) -> bool {
        if higher_is_better {
            self.ci_low > 0.0
        } else {
            self.ci_high < 0.0
        }
    }
    pub fn reliably_worse(&self, higher_is_better: bool) -> bool {
        if higher_is_better {
            self.ci_high < 0.0
        } else {
            self.ci_low > 0.0
        }
    }
}

/// Everything the reports show.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Analysis {
    pub tasks: Vec<String>,
    pub methods: Vec<String>,
    pub metrics: Vec<String>,
    pub sizes: BTreeMap<String, Vec<usize>>,
    pub summaries: Vec<MethodSummary>,
    pub paired: Vec<Paired>,
    /// Units per (task, size, method) with each non-`ok` status.
    pub status_counts: BTreeMap<(String, usize, String), BTreeMap<String, usize>>,
}

/// Differences within this tolerance count as ties.
pub const TIE_TOLERANCE: f64 = 1e-12;

fn higher_is_better(metric: &str) -> bool {
    MetricId::parse(metric)
        .map(|m| m.higher_is_better())
        .unwrap_or(false)
}

fn mean_sd(v: &[f64]) -> (f64, f64) {
    let n = v.len() as f64;
    let m = v.iter().sum::<f64>() / n;
    let sd = if v.len() > 1 {
        (v.iter().map(|x| (x - m) * (x - m)).sum::<f64>() / (n - 1.0)).sqrt()
    } else {
        f64::NAN
    };
    (m, sd)
}

/// The paired t interval: mean ± t(1 − α/2, R − 1) · s_d / √R. Treats repeats as
/// independent and the test set as fixed.
pub fn paired_t(diffs: &[f64], confidence: f64) -> (f64, f64, f64) {
    use statrs::distribution::{ContinuousCDF, StudentsT};
    let r = diffs.len();
    let (m, sd) = mean_sd(diffs);
    if r < 2 {
        return (f64::NAN, f64::NAN, f64::NAN);
    }
    let se = sd / (r as f64).sqrt();
    let t = StudentsT::new(0.0, 1.0, (r - 1) as f64)
        .map(|d| d.inverse_cdf(0.5 + confidence / 2.0))
        .unwrap_or(f64::NAN);
    (m - t * se, m + t * se, se)
}

/// Build summaries and paired comparisons from the unit table.
pub fn analyse(table: &UnitTable, settings: &AnalysisSettings) -> Analysis {
    let mut tasks: Vec<String> = Vec::new();
    let mut methods: Vec<String> = Vec::new();
    let mut sizes: BTreeMap<String, Vec<usize>> = BTreeMap::new();
    // (task, size, method) -> repeat -> row index
    let mut cells: BTreeMap<(String, usize, String), BTreeMap<usize, usize>> = BTreeMap::new();
    let mut status_counts: BTreeMap<(String, usize, String), BTreeMap<String, usize>> =
        BTreeMap::new();
    for (i, r) in table.rows.iter().enumerate() {
        if !tasks.contains(&r.task) {
            tasks.push(r.task.clone());
        }
        if !methods.contains(&r.method) {
            methods.push(r.method.clone());
        }
        let s = sizes.entry(r.task.clone()).or_default();
        if !s.contains(&r.size) {
            s.push(r.size);
        }
        cells
            .entry((r.task.clone(), r.size, r.method.clone()))
            .or_default()
            .insert(r.repeat, i);
        if r.status != "ok" {
            *status_counts
                .entry((r.task.clone(), r.size, r.method.clone()))
                .or_default()
                .entry(r.status.clone())
                .or_default() += 1;
        }
    }
    for s in sizes.values_mut() {
        s.sort_unstable();
    }
    let mut summaries = Vec::new();
    let mut paired = Vec::new();
    for task in &tasks {
        for &size in &sizes[task] {
            for (mi, metric) in table.metric_names.iter().enumerate() {
                let hib = higher_is_better(metric);
                let reference = cells.get(&(task.clone(), size, settings.reference.clone()));
                for method in &methods {
                    let Some(c) = cells.get(&(task.clone(), size, method.clone())) else {
                        continue;
                    };
                    let vals: Vec<f64> = c
                        .values()
                        .filter_map(|&i| table.rows[i].metrics[mi])
                        .collect();
                    let noted = c
                        .values()
                        .filter(|&&i| {
                            let st = &table.rows[i].status;
                            st != "ok" && table.rows[i].has_values()
                        })
                        .count();
                    let clipped: Vec<f64> = c
                        .values()
                        .filter_map(|&i| table.rows[i].clipped.map(|x| x as f64))
                        .collect();
                    let (mean, sd) = if vals.is_empty() {
                        (f64::NAN, f64::NAN)
                    } else {
                        mean_sd(&vals)
                    };
                    summaries.push(MethodSummary {
                        task: task.clone(),
                        size,
                        method: method.clone(),
                        metric: metric.clone(),
                        n: vals.len(),
                        mean,
                        sd,
                        noted,
                        missing: c.len() - vals.len(),
                        mean_clipped: if clipped.is_empty() {
                            f64::NAN
                        } else {
                            clipped.iter().sum::<f64>() / clipped.len() as f64
                        },
                    });
                    if *method == settings.reference {
                        continue;
                    }
                    let Some(rc) = reference else { continue };
                    let mut dm = Vec::new();
                    let mut dr = Vec::new();
                    for (rep, &i) in c {
                        if let (Some(a), Some(&j)) = (table.rows[i].metrics[mi], rc.get(rep)) {
                            if let Some(b) = table.rows[j].metrics[mi] {
                                dm.push(a);
                                dr.push(b);
                            }
                        }
                    }
                    let diffs: Vec<f64> = dm.iter().zip(&dr).map(|(a, b)| a - b).collect();
                    let (mut wins, mut ties, mut losses) = (0, 0, 0);
                    for &d in &diffs {
                        if d.abs() <= TIE_TOLERANCE {
                            ties += 1;
                        } else if (d < 0.0) != hib {
                            wins += 1;
                        } else {
                            losses += 1;
                        }
                    }
                    let (lo, hi, se) = paired_t(&diffs, settings.confidence);
                    let mean_of = |v: &[f64]| {
                        if v.is_empty() {
                            f64::NAN
                        } else {
                            v.iter().sum::<f64>() / v.len() as f64
                        }
                    };
                    paired.push(Paired {
                        task: task.clone(),
                        size,
                        method: method.clone(),
                        reference: settings.reference.clone(),
                        metric: metric.clone(),
                        repeats: diffs.len(),
                        mean_method: mean_of(&dm),
                        mean_reference: mean_of(&dr),
                        mean_diff: mean_of(&diffs),
                        ci_low: lo,
                        ci_high: hi,
                        se,
                        wins,
                        ties,
                        losses,
                        interval: settings.interval.clone(),
                        confidence: settings.confidence,
                    });
                }
            }
        }
    }
    Analysis {
        tasks,
        methods,
        metrics: table.metric_names.clone(),
        sizes,
        summaries,
        paired,
        status_counts,
    }
}
