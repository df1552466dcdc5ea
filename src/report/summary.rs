//! `summary.md` and the terminal table: per task, each method's mean primary
//! metric and its paired difference to the reference with the interval.

use super::{fmt_diff, fmt_value, Table};
use crate::analysis::{Analysis, AnalysisSettings};
use crate::metrics::MetricId;

/// What the summary says about where the results came from.
#[derive(Debug, Clone)]
pub struct ReportContext {
    pub suite_name: String,
    pub suite_file: String,
    pub suite_sha256: String,
    pub seed: Option<u64>,
    pub settings: AnalysisSettings,
    pub warnings: Vec<String>,
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
    if !ctx.warnings.is_empty() {
        out.push_str("## Warnings\n\n");
        for w in &ctx.warnings {
            out.push_str(&format!("- {w}\n"));
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
