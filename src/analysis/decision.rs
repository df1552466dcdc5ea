//! The recommendation: one team default under a stated rule, the runner-up,
//! where the answer changes with the calibration size, and how strong the
//! evidence is.
//!
//! Rule (ours, stated in every report): at each calibration size, methods are
//! ranked on each task by their mean loss and the ranks are averaged over the
//! tasks (Demšar 2006); the team default is the method with the lowest mean
//! of these average ranks over the sizes, each size weighing the same; the
//! runner-up is second. Ties go to the method listed first in the suite.

use super::steps::{pair_interval, Cells, PairSource};
use super::{AcrossRow, AnalysisSettings, Margins};
use crate::run::table::UnitTable;
use crate::stats::verdict::{Verdict, VerdictCounts};

/// The verdict at one calibration size.
#[derive(Debug, Clone, PartialEq)]
pub struct SizeVerdict {
    pub size: usize,
    pub tasks: usize,
    /// Lowest average rank at this size.
    pub best: String,
    pub default_rank: f64,
    pub runner_up_rank: Option<f64>,
    /// Methods the Holm-corrected Wilcoxon test cannot tell from the best.
    pub tied_with_best: Vec<String>,
    /// The default is the best or not distinguishable from it.
    pub default_holds: bool,
    /// Nemenyi critical difference at α = 0.05.
    pub cd_05: Option<f64>,
    /// The default's and the runner-up's average ranks differ by more than the CD.
    pub default_vs_runner_up_cd: Option<bool>,
    /// Iman–Davenport p-value.
    pub friedman_p: f64,
    /// Tasks on which the default gets each verdict against the runner-up
    /// (paired interval of the suite's estimator on each task, the task's
    /// equivalence margin).
    pub versus_runner_up: Option<VerdictCounts>,
}

/// The recommendation on one metric.
#[derive(Debug, Clone, PartialEq)]
pub struct Decision {
    pub metric: String,
    /// Every method with its mean average rank over the sizes, best first.
    pub standing: Vec<(String, f64)>,
    pub default: String,
    pub runner_up: Option<String>,
    pub per_size: Vec<SizeVerdict>,
    /// Runs of consecutive sizes with the same best method: (first, last, best).
    pub segments: Vec<(usize, usize, String)>,
    /// Distinct tasks, datasets and base models that enter any size (a task id
    /// `<dataset>.<model>` names both; other ids count as their own dataset).
    pub tasks: usize,
    pub datasets: usize,
    pub models: usize,
}

/// Dataset and base-model parts of a task id `<dataset>.<model>`.
pub fn task_parts(task: &str) -> (&str, Option<&str>) {
    match task.rsplit_once('.') {
        Some((d, m)) if !d.is_empty() && !m.is_empty() => (d, Some(m)),
        _ => (task, None),
    }
}

pub fn decide(
    across: &[AcrossRow],
    table: &UnitTable,
    cells: &Cells,
    margins: &Margins,
    settings: &AnalysisSettings,
    metric: &str,
) -> Option<Decision> {
    let rows: Vec<_> = across
        .iter()
        .filter(|r| r.metric == metric)
        .filter_map(|r| r.result.as_ref().ok().map(|x| (r, x)))
        .collect();
    let (first, _) = rows.first()?;
    let methods = &first.methods;
    let k = methods.len();
    let mut total = vec![0.0; k];
    for (_, x) in &rows {
        for (t, r) in total.iter_mut().zip(&x.friedman.avg_ranks) {
            *t += r;
        }
    }
    let mut standing: Vec<(String, f64)> = methods
        .iter()
        .cloned()
        .zip(total.iter().map(|t| t / rows.len() as f64))
        .collect();
    // Stable sort: ties keep the suite's order.
    standing.sort_by(|a, b| a.1.total_cmp(&b.1));
    let default = standing[0].0.clone();
    let runner_up = standing.get(1).map(|s| s.0.clone());
    let di = methods.iter().position(|m| *m == default)?;
    let ri = runner_up
        .as_ref()
        .and_then(|r| methods.iter().position(|m| m == r));
    let mi = table.metric_index(metric)?;
    let mut per_size = Vec::new();
    for (r, x) in &rows {
        let tied: Vec<String> = x
            .versus_best
            .iter()
            .filter(|v| !v.differs)
            .map(|v| r.methods[v.method].clone())
            .collect();
        let best = r.methods[x.best].clone();
        let versus_runner_up = runner_up.as_ref().map(|ru| {
            let mut rec = VerdictCounts::default();
            for task in &r.tasks {
                let src = PairSource {
                    table,
                    cells,
                    settings,
                };
                if let Some(iv) = pair_interval(&src, task, r.size, &default, ru, metric, mi) {
                    let margin = margins
                        .get(&(task.clone(), r.size, metric.to_string()))
                        .copied()
                        .unwrap_or(f64::NAN);
                    rec.add(Verdict::of_interval(&iv, margin));
                }
            }
            rec
        });
        let dr = x.friedman.avg_ranks[di];
        let rr = ri.map(|i| x.friedman.avg_ranks[i]);
        per_size.push(SizeVerdict {
            size: r.size,
            tasks: r.tasks.len(),
            default_holds: best == default || tied.contains(&default),
            best,
            default_rank: dr,
            runner_up_rank: rr,
            tied_with_best: tied,
            cd_05: x.cd_05,
            default_vs_runner_up_cd: match (x.cd_05, rr) {
                (Some(cd), Some(rr)) => Some((dr - rr).abs() > cd),
                _ => None,
            },
            friedman_p: x.friedman.ff_p,
            versus_runner_up,
        });
    }
    let mut segments: Vec<(usize, usize, String)> = Vec::new();
    for v in &per_size {
        match segments.last_mut() {
            Some(s) if s.2 == v.best => s.1 = v.size,
            _ => segments.push((v.size, v.size, v.best.clone())),
        }
    }
    let mut tasks = std::collections::BTreeSet::new();
    for (r, _) in &rows {
        tasks.extend(r.tasks.iter().map(|t| t.as_str()));
    }
    let datasets: std::collections::BTreeSet<&str> =
        tasks.iter().map(|t| task_parts(t).0).collect();
    let models: std::collections::BTreeSet<&str> =
        tasks.iter().filter_map(|t| task_parts(t).1).collect();
    Some(Decision {
        metric: metric.to_string(),
        standing,
        default,
        runner_up,
        per_size,
        segments,
        tasks: tasks.len(),
        datasets: datasets.len(),
        models: models.len(),
    })
}
