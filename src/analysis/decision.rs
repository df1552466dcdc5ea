//! The recommendation: one team default under a stated rule, the runner-up,
//! where the answer changes with the calibration size, and how strong the
//! evidence is.
//!
//! Rule (ours, stated in every report): at each calibration size, methods are
//! ranked on each task by their mean loss and the ranks are averaged over the
//! tasks (Demšar 2006); the team default is the method with the lowest mean
//! of these average ranks over the sizes, each size weighing the same; the
//! runner-up is second. Ties go to the method listed first in the suite.
//!
//! Calibrate at all? When the suite has a method that passes the scores
//! through (kind `identity`, the raw scores), the answer at a size is to keep
//! the raw scores when (a) they are the best-ranked method there or not
//! distinguishable from the best (Holm-corrected Wilcoxon), and (b) no single
//! method is reliably better than them (verdict *better*, paired interval and
//! margin per task) on more than half of the tasks at that size. Both must
//! hold: a rank near the top alone can come from many small losses, and a
//! method that wins on a minority of tasks does not make calibrating the
//! better rule for a team.
//!
//! Fallbacks: a method whose draws at a size fell back to the smoothed base
//! rate (status `fallback:base-rate`) in more than `max_fallback` of all its
//! draws over the tasks there is not recommended at that size; the next
//! method of the standing that stays within the limit is, and the decision
//! says so.

use std::collections::BTreeMap;

use super::steps::{pair_interval, Cells, PairSource};
use super::{AcrossRow, AnalysisSettings, Margins, ThresholdRow};
use crate::run::table::UnitTable;
use crate::stats::thresholds::{summarize, ThresholdSummary, Thresholds};
use crate::stats::verdict::{Verdict, VerdictCounts};

/// What the decision reads.
pub struct DecisionInput<'a> {
    pub across: &'a [AcrossRow],
    pub table: &'a UnitTable,
    pub cells: &'a Cells,
    pub margins: &'a Margins,
    pub settings: &'a AnalysisSettings,
    /// (task, size, method) → (fallback units, units).
    pub fallback_counts: &'a BTreeMap<(String, usize, String), (usize, usize)>,
    /// Every method against the raw scores, per task and decision metric.
    pub raw_thresholds: &'a [ThresholdRow],
}

/// Why a method is recommended at a size.
#[derive(Debug, Clone, PartialEq)]
pub enum Recommendation {
    /// The team default.
    Default,
    /// The raw scores, under the rule of this module.
    KeepRaw,
    /// The default fell back too often; these methods (with their fallback
    /// shares) were passed over, in the standing's order.
    PassedOver(Vec<(String, f64)>),
}

/// Draws that fell back to the base rate.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct FallbackShare {
    pub fallback: usize,
    pub draws: usize,
}

impl FallbackShare {
    pub fn share(&self) -> f64 {
        if self.draws == 0 {
            0.0
        } else {
            self.fallback as f64 / self.draws as f64
        }
    }
}

/// The raw scores against the calibrating methods at one size.
#[derive(Debug, Clone, PartialEq)]
pub struct RawAtSize {
    /// Verdicts of the default against the raw scores over the tasks
    /// (`None` when the raw scores are the default).
    pub default_vs_raw: Option<VerdictCounts>,
    /// Tasks on which at least one method is reliably better than the raw
    /// scores.
    pub any_better: usize,
    /// The method reliably better than the raw scores on the most tasks, and
    /// on how many (first in the standing on ties).
    pub most_better: Option<(String, usize)>,
    /// The raw scores are the best-ranked method or tied with it.
    pub raw_holds: bool,
    /// The rule of this module says keep the raw scores.
    pub keep_raw: bool,
}

/// The verdict at one calibration size.
#[derive(Debug, Clone, PartialEq)]
pub struct SizeVerdict {
    pub size: usize,
    pub tasks: usize,
    /// Distinct datasets behind the tasks ([`task_parts`]).
    pub datasets: usize,
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
    /// The raw scores against the methods (`None` without a raw method).
    pub raw: Option<RawAtSize>,
    /// The default's draws at this size over the tasks, and those that fell
    /// back to the base rate.
    pub default_fallback: FallbackShare,
    /// The task where the largest share of the default's draws fell back.
    pub worst_fallback: Option<(String, FallbackShare)>,
    /// The method recommended at this size, and why.
    pub recommended: String,
    pub why: Recommendation,
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
    /// The raw-score method of the suite, when it has one.
    pub raw: Option<String>,
    /// The fallback limit in force (`[decision] max_fallback`).
    pub max_fallback: f64,
    /// From which size calibrating pays off: per task, the smallest size from
    /// which a method is reliably better than the raw scores at every larger
    /// tested size, summarised over tasks — for any method (`None`), the
    /// default and the runner-up.
    pub pays_from: Vec<(Option<String>, ThresholdSummary)>,
}

/// Dataset and base-model parts of a task id `<dataset>.<model>`.
pub fn task_parts(task: &str) -> (&str, Option<&str>) {
    match task.rsplit_once('.') {
        Some((d, m)) if !d.is_empty() && !m.is_empty() => (d, Some(m)),
        _ => (task, None),
    }
}

pub fn decide(input: &DecisionInput, metric: &str) -> Option<Decision> {
    let DecisionInput {
        across,
        table,
        cells,
        margins,
        settings,
        fallback_counts,
        raw_thresholds,
    } = *input;
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
    let raw_method = settings.raw_method.clone().filter(|r| methods.contains(r));
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
        let datasets: std::collections::BTreeSet<&str> =
            r.tasks.iter().map(|t| task_parts(t).0).collect();
        let raw = raw_method.as_ref().map(|raw| {
            // Verdict of each method against the raw scores on each task
            // at this size, read off the raw-score threshold rows.
            let verdict = |m: &str, task: &str| -> Option<Verdict> {
                let row = raw_thresholds.iter().find(|t| {
                    t.metric == metric && t.flexible == m && t.parametric == *raw && t.task == task
                })?;
                let &(_, _, low, high) = row.points.iter().find(|p| p.0 == r.size)?;
                let margin = margins
                    .get(&(task.to_string(), r.size, metric.to_string()))
                    .copied()
                    .unwrap_or(f64::NAN);
                Some(Verdict::of(low, high, margin))
            };
            let default_vs_raw = (default != *raw).then(|| {
                r.tasks
                    .iter()
                    .filter_map(|t| verdict(&default, t))
                    .collect::<VerdictCounts>()
            });
            let others: Vec<&String> = standing
                .iter()
                .map(|s| &s.0)
                .filter(|m| *m != raw)
                .collect();
            let better = |m: &str| {
                r.tasks
                    .iter()
                    .filter(|t| verdict(m, t) == Some(Verdict::Better))
                    .count()
            };
            let any_better = r
                .tasks
                .iter()
                .filter(|t| {
                    others
                        .iter()
                        .any(|m| verdict(m, t) == Some(Verdict::Better))
                })
                .count();
            let mut most_better: Option<(String, usize)> = None;
            for m in &others {
                let k = better(m);
                if most_better.as_ref().is_none_or(|b| k > b.1) {
                    most_better = Some(((*m).clone(), k));
                }
            }
            let raw_holds = r.methods[x.best] == *raw || tied.contains(raw);
            let majority = most_better
                .as_ref()
                .is_some_and(|b| 2 * b.1 > r.tasks.len());
            RawAtSize {
                default_vs_raw,
                any_better,
                most_better,
                raw_holds,
                keep_raw: raw_holds && !majority,
            }
        });
        let share_of = |m: &str| -> FallbackShare {
            let mut f = FallbackShare::default();
            for t in &r.tasks {
                if let Some(&(k, n)) = fallback_counts.get(&(t.clone(), r.size, m.to_string())) {
                    f.fallback += k;
                    f.draws += n;
                }
            }
            f
        };
        let default_fallback = share_of(&default);
        let mut worst_fallback: Option<(String, FallbackShare)> = None;
        for t in &r.tasks {
            if let Some(&(k, n)) = fallback_counts.get(&(t.clone(), r.size, default.clone())) {
                let f = FallbackShare {
                    fallback: k,
                    draws: n,
                };
                if k > 0
                    && worst_fallback
                        .as_ref()
                        .is_none_or(|w| f.share() > w.1.share())
                {
                    worst_fallback = Some((t.clone(), f));
                }
            }
        }
        let too_many = |m: &str| share_of(m).share() > settings.max_fallback;
        let (recommended, why) = if raw.as_ref().is_some_and(|x| x.keep_raw) {
            (
                raw_method.clone().unwrap_or_default(),
                Recommendation::KeepRaw,
            )
        } else if too_many(&default) {
            let mut passed = Vec::new();
            let mut pick = None;
            for (m, _) in &standing {
                if too_many(m) {
                    passed.push((m.clone(), share_of(m).share()));
                } else {
                    pick = Some(m.clone());
                    break;
                }
            }
            match pick {
                Some(m) => (m, Recommendation::PassedOver(passed)),
                // Every method fell back too often: none is recommended.
                None => (String::new(), Recommendation::PassedOver(passed)),
            }
        } else {
            (default.clone(), Recommendation::Default)
        };
        let dr = x.friedman.avg_ranks[di];
        let rr = ri.map(|i| x.friedman.avg_ranks[i]);
        per_size.push(SizeVerdict {
            size: r.size,
            tasks: r.tasks.len(),
            datasets: datasets.len(),
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
            raw,
            default_fallback,
            worst_fallback,
            recommended,
            why,
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
    let pays_from = match &raw_method {
        Some(raw) => {
            let per_task = |m: Option<&String>| -> Vec<Thresholds> {
                let mut by_task: BTreeMap<&str, Option<usize>> = BTreeMap::new();
                for t in raw_thresholds.iter().filter(|t| {
                    t.metric == metric
                        && t.parametric == *raw
                        && m.is_none_or(|m| t.flexible == *m)
                        && tasks.contains(t.task.as_str())
                }) {
                    let Ok(th) = &t.result else { continue };
                    let e = by_task.entry(t.task.as_str()).or_insert(None);
                    if let Some(b) = th.better_from {
                        *e = Some(e.map_or(b, |x| x.min(b)));
                    }
                }
                by_task
                    .into_values()
                    .map(|b| Thresholds {
                        better_from: b,
                        worse_until: None,
                        crossover: None,
                    })
                    .collect()
            };
            let mut out = vec![(None, summarize(&per_task(None)))];
            for m in std::iter::once(&default).chain(runner_up.as_ref()) {
                if m != raw {
                    out.push((Some(m.clone()), summarize(&per_task(Some(m)))));
                }
            }
            out
        }
        None => Vec::new(),
    };
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
        raw: raw_method,
        max_fallback: settings.max_fallback,
        pays_from,
    })
}
