//! `summary.md` and the terminal table: per task, each method's mean primary
//! metric and its paired difference to the reference with the interval.

use super::{fmt_diff, fmt_value, Table};
use crate::analysis::{Analysis, AnalysisSettings};
use crate::metrics::MetricId;
use crate::stats::paired::IntervalKind;

/// What the summary says about where the results came from.
#[derive(Debug, Clone)]
pub struct ReportContext {
    pub suite_name: String,
    pub suite_file: String,
    pub suite_sha256: String,
    pub seed: Option<u64>,
    pub settings: AnalysisSettings,
}

fn hib(metric: &str) -> bool {
    MetricId::parse(metric)
        .map(|m| m.higher_is_better())
        .unwrap_or(false)
}

/// One table per task for `metric`: rows = methods, columns = sizes.
pub fn task_tables(a: &Analysis, s: &AnalysisSettings, metric: &str, markdown: bool) -> Vec<Table> {
    let higher = hib(metric);
    let mut out = Vec::new();
    for task in &a.tasks {
        let sizes = &a.sizes[task];
        let mut header = vec!["method".to_string()];
        header.extend(sizes.iter().map(|n| format!("n = {n}")));
        let mut rows = Vec::new();
        for m in &a.methods {
            let mut row = vec![if *m == s.reference {
                format!("{m} (reference)")
            } else {
                m.clone()
            }];
            for &n in sizes {
                let mean = a
                    .summaries
                    .iter()
                    .find(|x| {
                        x.task == *task && x.size == n && x.method == *m && x.metric == metric
                    })
                    .map(|x| x.mean)
                    .unwrap_or(f64::NAN);
                let mut cell = fmt_value(mean);
                if let Some(p) = a.paired.iter().find(|p| {
                    p.task == *task && p.size == n && p.method == *m && p.metric == metric
                }) {
                    let mark = if p.reliably_better(higher) {
                        if markdown {
                            " ↓"
                        } else {
                            " ✓"
                        }
                    } else if p.reliably_worse(higher) {
                        if markdown {
                            " ↑"
                        } else {
                            " ✗"
                        }
                    } else {
                        ""
                    };
                    let diff = format!(
                        "{} [{}, {}]{}",
                        fmt_diff(p.mean_diff),
                        fmt_diff(p.ci_low),
                        fmt_diff(p.ci_high),
                        mark
                    );
                    let diff = if markdown && !mark.is_empty() {
                        format!("**{diff}**")
                    } else {
                        diff
                    };
                    cell = format!("{cell}\n{diff}");
                }
                row.push(cell);
            }
            rows.push(row);
        }
        let pct = (s.confidence * 100.0).round();
        let better = if markdown { "↓ / ↑" } else { "✓ / ✗" };
        let notes = vec![format!(
            "Each cell: mean {metric} over repeats; below it the mean difference to `{}` with its {pct}% {} interval; {better} = reliably better / worse than the reference.",
            s.reference, s.interval
        )];
        out.push(Table {
            title: format!("Task `{task}` — {metric}"),
            header,
            rows,
            notes,
        });
    }
    out
}

/// The terminal report: one table per task for the primary metric.
pub fn terminal(a: &Analysis, s: &AnalysisSettings) -> String {
    let width = comfy_table_width();
    task_tables(a, s, &s.primary_metric, false)
        .iter()
        .map(|t| t.to_terminal(width))
        .collect::<Vec<_>>()
        .join("\n")
}

fn comfy_table_width() -> Option<u16> {
    std::env::var("COLUMNS").ok().and_then(|c| c.parse().ok())
}

/// The Markdown summary.
/// Repeats at which the coverage study of `docs/statistics.md` checked the
/// default interval.
const REPEATS_CHECKED: usize = 30;

pub fn summary_md(a: &Analysis, ctx: &ReportContext) -> String {
    let s = &ctx.settings;
    let mut out = String::new();
    out.push_str(&format!("# plumbline results: {}\n\n", ctx.suite_name));
    out.push_str(&format!(
        "Suite `{}` (SHA-256 `{}`){}. Reference method: `{}`; primary metric: `{}`; intervals: {} at {}%.\n\n",
        ctx.suite_file,
        ctx.suite_sha256,
        ctx.seed.map(|x| format!(", seed {x}")).unwrap_or_default(),
        s.reference,
        s.primary_metric,
        s.interval,
        (s.confidence * 100.0).round()
    ));
    out.push_str(&format!(
        "{} task(s), {} method(s). Every method in a unit was fitted on the same calibration sample and scored on the same test set, so the differences are paired.\n\n",
        a.tasks.len(),
        a.methods.len()
    ));
    if a.tasks.len() < 5 {
        out.push_str(&format!(
            "**Caution:** these results rest on {} task(s). Rankings of calibration methods change with the data set, the base model and the calibration size; do not adopt a default from so few tasks.\n\n",
            a.tasks.len()
        ));
    }
    let log_loss: Vec<&crate::analysis::Paired> =
        a.paired.iter().filter(|p| p.metric == "log_loss").collect();
    let wide = log_loss
        .iter()
        .filter(|p| p.reservoir_order == Some(1))
        .count();
    let kind = IntervalKind::parse(&s.interval);
    // Only kinds whose reservoir degree depends on extreme predictions switch.
    let switches = kind.is_some_and(|k| k.reservoir_order(false) != k.reservoir_order(true));
    if wide > 0 && switches {
        out.push_str(&format!(
            "The default interval took its wider first-order reservoir term for {wide} of {} log-loss comparisons, where a method gave the observed class a probability at or below the log-loss clip (an exact 0 or 1) on some test row; see `docs/statistics.md`.\n\n",
            log_loss.len()
        ));
    }
    if kind == Some(IntervalKind::default()) {
        out.push_str("The intervals' coverage was checked by simulation on one synthetic population for five method pairs against Platt scaling: 90.9–97.5% for a nominal 95%, narrowest (about 91%) for Venn–Abers at 50–200 calibration rows; see `docs/statistics.md`.\n\n");
    }
    let few: Vec<usize> = a
        .paired
        .iter()
        .map(|p| p.repeats)
        .filter(|&r| r < REPEATS_CHECKED)
        .collect();
    if let (Some(r), true) = (few.iter().min(), kind == Some(IntervalKind::default())) {
        out.push_str(&format!(
            "**Note on intervals:** {} of {} comparisons rest on fewer than {REPEATS_CHECKED} repeats (as few as {r}; failed or one-class fits leave gaps). The coverage study of `docs/statistics.md` checked the default interval at {REPEATS_CHECKED} repeats and, against plain isotonic regression (which makes extreme log-loss predictions), at 10 (93.0–94.3% for log loss, nominal 95%); with fewer repeats the skewness of the differences is poorly estimated and coverage is unchecked.\n\n",
            few.len(),
            a.paired.len()
        ));
    }
    if s.reference.starts_with("cross-fitted-") {
        out.push_str(&format!(
            "This is a protocol study. The compared \"methods\" are ways of getting calibration data at an equal labelled budget n: `held-out-f` keeps a fraction f of the n rows away from the base model and calibrates on its scores there; `{}` trains on all n rows and calibrates on out-of-fold scores. Each task is a dataset, a base model and a calibrator (`task@calibrator`). A difference below zero means the held-out variant beats cross-fitting.\n\n",
            s.reference
        ));
    }
    out.push_str(&decision_md(a, s));
    out.push_str(&across_md(a, s));
    out.push_str(&thresholds_md(a));
    out.push_str("## Results per task\n\n");
    for t in task_tables(a, s, &s.primary_metric, true) {
        out.push_str(&t.to_markdown());
        out.push('\n');
    }
    out.push_str("## Unit status\n\n");
    if a.status_counts.is_empty() {
        out.push_str("Every fit finished with status `ok`.\n\n");
    } else {
        out.push_str("Units whose status was not `ok` (a `separable` Platt or beta fit returned its documented fallback; `one_class` samples have no metric values and are left out of the paired differences):\n\n");
        out.push_str(
            "| task | size | method | status | units |\n| --- | ---: | --- | --- | ---: |\n",
        );
        for ((task, size, method), counts) in &a.status_counts {
            for (status, n) in counts {
                out.push_str(&format!(
                    "| {task} | {size} | {method} | {status} | {n} |\n"
                ));
            }
        }
        out.push('\n');
    }
    out.push_str("## Reproduce\n\n");
    out.push_str(&format!(
        "Run `plumbline run {}` with the same suite file (check its SHA-256 above) to get byte-identical `units.csv`, `paired.csv` and `summary.md`; `plumbline report <folder>` rebuilds the tables from `units.csv`.\n",
        ctx.suite_file
    ));
    out
}

fn fmt_p(p: f64) -> String {
    if !p.is_finite() {
        "–".into()
    } else if p < 0.001 {
        "< 0.001".into()
    } else {
        format!("{p:.3}")
    }
}

/// The recommendation, with its evidence and caveats.
fn decision_md(a: &Analysis, s: &AnalysisSettings) -> String {
    let mut out = String::from("## Decision\n\n");
    let ok: Vec<_> = a
        .across
        .iter()
        .filter_map(|r| r.result.as_ref().ok().map(|x| (r, x)))
        .collect();
    if ok.is_empty() {
        out.push_str("Too few tasks share a calibration size for a comparison across tasks (it needs at least two tasks with every method).\n\n");
        return out;
    }
    let mut wins: std::collections::BTreeMap<&str, usize> = std::collections::BTreeMap::new();
    for (r, x) in &ok {
        *wins.entry(r.methods[x.best].as_str()).or_default() += 1;
    }
    let (top, n_top) = wins
        .iter()
        .max_by_key(|(_, n)| **n)
        .map(|(m, n)| (*m, *n))
        .unwrap_or(("", 0));
    let tally = {
        let mut w: Vec<_> = wins.iter().collect();
        w.sort_by(|a, b| b.1.cmp(a.1).then(a.0.cmp(b.0)));
        w.iter()
            .map(|(m, n)| format!("`{m}` {n}"))
            .collect::<Vec<_>>()
            .join(", ")
    };
    if 2 * n_top > ok.len() {
        out.push_str(&format!(
            "By average rank of mean `{}` across tasks, `{top}` ranks first at {n_top} of {} calibration sizes (first places: {tally}):\n\n",
            s.primary_metric,
            ok.len()
        ));
    } else {
        out.push_str(&format!(
            "No method ranks first (by average rank of mean `{}` across tasks) at a majority of the {} calibration sizes — the best choice depends on how much calibration data there is (first places: {tally}):\n\n",
            s.primary_metric,
            ok.len()
        ));
    }
    for (r, x) in &ok {
        let tied: Vec<&str> = x
            .versus_best
            .iter()
            .filter(|v| !v.differs)
            .map(|v| r.methods[v.method].as_str())
            .collect();
        out.push_str(&format!(
            "- n = {}: best `{}` over {} task(s){}.\n",
            r.size,
            r.methods[x.best],
            r.tasks.len(),
            if tied.is_empty() {
                "; every other method is reliably worse (Holm-corrected Wilcoxon, α = 0.05)"
                    .to_string()
            } else {
                format!(
                    "; not distinguishable from it (Holm-corrected Wilcoxon, α = 0.05): {}",
                    tied.iter()
                        .map(|m| format!("`{m}`"))
                        .collect::<Vec<_>>()
                        .join(", ")
                )
            }
        ));
    }
    let max_tasks = ok.iter().map(|(r, _)| r.tasks.len()).max().unwrap_or(0);
    out.push('\n');
    if max_tasks < 10 {
        out.push_str(&format!(
            "**Read with care:** at most {max_tasks} task(s) enter any size. Tests across so few tasks have little power, and tasks that share a dataset (one dataset under several base models) are not independent evidence; treat this as a hypothesis to check on your own data, not as a settled default.\n\n"
        ));
    } else {
        out.push_str("Tasks that share a dataset (one dataset under several base models) are not independent evidence; the tests across tasks treat them as if they were, so their p-values are optimistic.\n\n");
    }
    out
}

/// Average ranks, Friedman / Iman–Davenport, Nemenyi CD per size.
fn across_md(a: &Analysis, s: &AnalysisSettings) -> String {
    let mut out = String::from("## Across tasks\n\n");
    if a.across.is_empty() {
        out.push_str("No calibration size has values for every method on any task.\n\n");
        return out;
    }
    out.push_str(&format!(
        "Average rank of each method's mean `{}` over tasks (1 = best; ties share ranks), the Friedman test with the Iman–Davenport F, and the Nemenyi critical difference at α = 0.05 (Demšar 2006). Two methods whose average ranks differ by less than the CD are not distinguishable.\n\n",
        s.primary_metric
    ));
    let methods = &a.methods;
    out.push_str(&format!(
        "| n | tasks | {} | F_F | p | CD 0.05 |\n",
        methods
            .iter()
            .map(|m| format!("`{m}`"))
            .collect::<Vec<_>>()
            .join(" | ")
    ));
    out.push_str(&format!(
        "| ---: | ---: | {} | ---: | ---: | ---: |\n",
        methods
            .iter()
            .map(|_| "---:")
            .collect::<Vec<_>>()
            .join(" | ")
    ));
    for r in &a.across {
        match &r.result {
            Ok(x) => out.push_str(&format!(
                "| {} | {} | {} | {:.2} | {} | {} |\n",
                r.size,
                r.tasks.len(),
                x.friedman
                    .avg_ranks
                    .iter()
                    .enumerate()
                    .map(|(i, v)| if i == x.best {
                        format!("**{v:.2}**")
                    } else {
                        format!("{v:.2}")
                    })
                    .collect::<Vec<_>>()
                    .join(" | "),
                x.friedman.ff,
                fmt_p(x.friedman.ff_p),
                x.cd_05
                    .map(|c| format!("{c:.2}"))
                    .unwrap_or_else(|| "–".into())
            )),
            Err(e) => out.push_str(&format!(
                "| {} | {} | {} | – | – | – |\n",
                r.size,
                r.tasks.len(),
                format!("({e})") + &" | –".repeat(methods.len().saturating_sub(1))
            )),
        }
    }
    out.push_str(&format!(
        "\nWins / ties / losses against `{}` over tasks (a tie is an interval covering zero):\n\n",
        s.reference
    ));
    let others: Vec<&String> = methods.iter().filter(|m| **m != s.reference).collect();
    out.push_str(&format!(
        "| n | {} |\n| ---: | {} |\n",
        others
            .iter()
            .map(|m| format!("`{m}`"))
            .collect::<Vec<_>>()
            .join(" | "),
        others
            .iter()
            .map(|_| "---:")
            .collect::<Vec<_>>()
            .join(" | ")
    ));
    for r in &a.across {
        let cells: Vec<String> = others
            .iter()
            .map(|m| {
                r.vs_reference
                    .iter()
                    .find(|(x, _)| x == *m)
                    .map(|(_, rec)| format!("{}/{}/{}", rec.wins, rec.ties, rec.losses))
                    .unwrap_or_else(|| "–".into())
            })
            .collect();
        out.push_str(&format!("| {} | {} |\n", r.size, cells.join(" | ")));
    }
    out.push('\n');
    out
}

/// The data-size thresholds of flexible against parametric methods.
fn thresholds_md(a: &Analysis) -> String {
    let mut out =
        String::from("## How much calibration data before a flexible method pays off\n\n");
    if a.threshold_summaries.is_empty() {
        out.push_str("No (flexible, parametric) method pair in this suite.\n\n");
        return out;
    }
    out.push_str("Per task, *better from* is the smallest tested size from which the flexible method is reliably better than the parametric one at every larger tested size; *worse up to* is the largest size at which it is reliably worse; the crossover interpolates the mean difference linearly on log size. Medians and ranges over the tasks where each exists; per-task values are in `thresholds.csv`.\n\n");
    out.push_str("| flexible | parametric | tasks | better from: tasks, median [range] | worse up to: tasks, median [range] | crossover: tasks, median [range] |\n| --- | --- | ---: | --- | --- | --- |\n");
    let sp = |x: &Option<crate::stats::thresholds::Spread>| match x {
        Some(s) => format!("{}, {:.0} [{:.0}, {:.0}]", s.tasks, s.median, s.min, s.max),
        None => "0".into(),
    };
    for ((f, p), sum) in &a.threshold_summaries {
        out.push_str(&format!(
            "| `{f}` | `{p}` | {} | {} | {} | {} |\n",
            sum.tasks,
            sp(&sum.better_from),
            sp(&sum.worse_until),
            sp(&sum.crossover)
        ));
    }
    out.push_str("\nA size is only as good as the sizes tested: \"better from 800\" means better at 800 and at every larger size in the sweep, not at 700.\n\n");
    out
}
