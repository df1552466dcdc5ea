//! The summary a team acts on, as one [`Block`] document rendered to
//! `summary.md`, `index.html` and the terminal: the decision first, then the
//! standing caution and the legend, ranks, data-size thresholds, reliability
//! diagrams and the per-task tables.

use super::document::{anchor, legend, Block};
use super::{figures, Decimals, Table};
use crate::analysis::{
    task_parts, Analysis, AnalysisSettings, DecidedBy, Decision, Evidence, Recommendation,
    SizeVerdict, DECISIVE,
};
use crate::metrics::reliability::CurveRecord;
use crate::metrics::MetricId;
use crate::stats::paired::IntervalKind;
use crate::stats::thresholds::Spread;
use crate::stats::verdict::{marks_slashed, Verdict};

/// What the summary says about where the results came from.
#[derive(Debug, Clone)]
pub struct ReportContext {
    pub suite_name: String,
    pub suite_file: String,
    pub suite_sha256: String,
    pub seed: Option<u64>,
    pub settings: AnalysisSettings,
    /// Reliability curves of the folder (`reliability*.csv`).
    pub curves: Vec<CurveRecord>,
}

/// The equivalence margin in force, in words.
pub fn margin_words(s: &AnalysisSettings) -> String {
    let pct = s.margin * 100.0;
    let mut out = format!(
        "{}% of the reference method's mean value of the metric at each task and size (`[decision] margin = {}`)",
        crate::run::table::num(pct),
        crate::run::table::num(s.margin)
    );
    if !s.absolute_margins.is_empty() {
        let abs: Vec<String> = s
            .absolute_margins
            .iter()
            .map(|(m, d)| format!("`{m}` {}", crate::run::table::num(*d)))
            .collect();
        out.push_str(&format!("; absolute margins: {}", abs.join(", ")));
    }
    out
}

/// One table per task for `metric`: rows = methods, columns = sizes.
pub fn task_tables(
    a: &Analysis,
    s: &AnalysisSettings,
    metric: MetricId,
    markdown: bool,
) -> Vec<Table> {
    a.tasks
        .iter()
        .map(|task| task_table(a, s, metric, task, markdown))
        .collect()
}

/// The table of one task for `metric`: rows = methods, columns = sizes.
pub fn task_table(
    a: &Analysis,
    s: &AnalysisSettings,
    metric: MetricId,
    task: &str,
    markdown: bool,
) -> Table {
    let sizes = a.sizes.get(task).map(Vec::as_slice).unwrap_or(&[]);
    let paired = |m: &str, n: usize| {
        a.paired
            .iter()
            .find(|p| p.task == *task && p.size == n && p.method == *m && p.metric == metric)
    };
    let dec = Decimals::for_half_widths(
        a.methods
            .iter()
            .flat_map(|m| sizes.iter().filter_map(move |&n| paired(m, n)))
            .map(|p| (p.ci_high - p.ci_low) / 2.0),
    );
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
                .find(|x| x.task == *task && x.size == n && x.method == *m && x.metric == metric)
                .map(|x| x.mean)
                .unwrap_or(f64::NAN);
            let mut cell = dec.value(mean);
            if let Some(p) = paired(m, n) {
                let diff = format!(
                    "{} [{}, {}] {}{}",
                    dec.diff(p.mean_diff),
                    dec.diff(p.ci_low),
                    dec.diff(p.ci_high),
                    p.verdict.mark(),
                    approximate_marks(p)
                );
                let diff = if markdown && p.verdict != Verdict::Undetermined {
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
    let mut notes = vec![format!(
            "Each cell: mean {metric} over repeats; below it the mean difference to `{}` with its {pct}% {} interval and the verdict against the reference: {}.",
            s.reference,
            s.interval,
            Verdict::ALL
                .map(|v| format!("{} {}", v.mark(), v.words()))
                .join(" / ")
        )];
    if a.paired
        .iter()
        .any(|p| p.task == *task && p.metric == metric && p.rare_class())
    {
        notes.push(RARE_NOTE.to_string());
    }
    if a.paired
        .iter()
        .any(|p| p.task == *task && p.metric == metric && p.zero_one)
    {
        notes.push(ZERO_ONE_NOTE.to_string());
    }
    Table {
        title: format!("Task `{task}` — {metric}"),
        header,
        rows,
        notes,
    }
}

/// The marks after an interval: † for a rare class, ‡ for a log-loss
/// comparison with a method that can predict 0 or 1.
fn approximate_marks(p: &crate::analysis::Paired) -> &'static str {
    match (p.rare_class(), p.zero_one) {
        (true, true) => " †‡",
        (true, false) => " †",
        (false, true) => " ‡",
        (false, false) => "",
    }
}

/// What ‡ means, under every table that has one.
const ZERO_ONE_NOTE: &str = "‡: approximate interval — a method of the comparison can predict a probability of exactly 0 or 1, so its expected log loss hinges on rare test rows that the repeats may not show; in the coverage study such intervals fell short of their nominal level (docs/statistics.md, \"Approximate intervals\"). Compare such methods on the Brier score, or use their bounded variants, when it matters.";

/// What † means, under every table that has one.
const RARE_NOTE: &str = "†: approximate interval — the calibration samples held fewer than 10 rows of the rarer class on average; in the coverage study such intervals fell short of their nominal level far more often (docs/statistics.md, \"Rare classes\").";

/// The standing caution, in every report.
pub const CAUTION: &str = "These results come from benchmark data. They do not replace validating the chosen calibrator on the population where it will be deployed, nor monitoring its calibration after deployment: populations drift, and a map that was right on last year's data can be wrong on this year's. Where calibrated probabilities inform decisions about people — credit, health, insurance, employment, fraud holds and the like — the regulations, local codes and licensed professional practice that apply there govern; this tool's recommendation is evidence for that process, not a substitute for it.";

/// Repeats at which the coverage study of `docs/statistics.md` checked the
/// default interval.
const REPEATS_CHECKED: usize = 30;

/// How much of the document to build.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Detail {
    /// Everything (`summary.md`, `index.html`).
    Full,
    /// Decision, caution, legend, ranks and thresholds (the terminal).
    Brief,
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

fn size_range(a: usize, b: usize) -> String {
    if a == b {
        format!("n = {a}")
    } else {
        format!("n = {a}–{b}")
    }
}

/// Where a spread of tested sizes starts paying off, in words: the median
/// when it is a tested size, else the two tested sizes it lies between (no
/// size between them was tried), and the range when it says more.
fn from_sizes(b: &Spread) -> String {
    if b.min == b.max {
        return format!("n = {:.0} on each", b.min);
    }
    let range = format!("range {:.0}–{:.0}", b.min, b.max);
    if b.median_low == b.median_high {
        format!("a median n = {:.0} ({range})", b.median_low)
    } else if b.min == b.median_low && b.max == b.median_high {
        format!(
            "n = {:.0} on half of them and n = {:.0} on the other half",
            b.median_low, b.median_high
        )
    } else {
        format!(
            "a median between the tested sizes n = {:.0} and n = {:.0} ({range})",
            b.median_low, b.median_high
        )
    }
}

/// The median of a spread of tested sizes for a table cell: the size, or
/// the two tested sizes it lies between.
fn median_cell(b: &Spread) -> String {
    if b.median_low == b.median_high {
        format!("{:.0}", b.median_low)
    } else {
        format!("between {:.0} and {:.0}", b.median_low, b.median_high)
    }
}

/// `m` as a base-model name in text.
fn model_name(m: &str) -> String {
    if m.is_empty() {
        "tasks without a base model".to_string()
    } else {
        format!("`{m}`")
    }
}

/// What is recommended at one size, in words: the method, and the base
/// models that keep the raw scores.
fn recommended_words(d: &Decision, v: &SizeVerdict) -> String {
    if v.recommended.is_empty() {
        return "no method (every one fell back too often)".to_string();
    }
    if Some(&v.recommended) == d.raw.as_ref() {
        return format!("keep the raw scores (`{}`)", v.recommended);
    }
    let raw_for = v.raw.as_ref().map(|r| r.raw_for()).unwrap_or_default();
    if raw_for.is_empty() {
        format!("`{}`", v.recommended)
    } else {
        let list: Vec<String> = raw_for.iter().map(|m| model_name(m)).collect();
        format!(
            "`{}`, but keep the raw scores for {}",
            v.recommended,
            list.join(", ")
        )
    }
}

/// "Calibrate at all?": the recommended method against the raw scores per
/// base model, size by size, and from which size calibrating pays off per
/// task.
fn raw_words(d: &Decision, raw: &str) -> String {
    let keep: Vec<String> = d
        .per_size
        .iter()
        .filter(|v| v.raw.as_ref().is_some_and(|r| r.keep_raw()))
        .map(|v| v.size.to_string())
        .collect();
    // Runs of consecutive sizes that keep the raw scores for the same base
    // models while others calibrate.
    let mut runs: Vec<(usize, usize, String)> = Vec::new();
    for v in &d.per_size {
        let list = v.raw.as_ref().map(|r| r.raw_for()).unwrap_or_default();
        let w = list
            .iter()
            .map(|m| model_name(m))
            .collect::<Vec<_>>()
            .join(", ");
        match runs.last_mut() {
            Some(r) if r.2 == w && !w.is_empty() => r.1 = v.size,
            _ => runs.push((v.size, v.size, w)),
        }
    }
    let partly: Vec<String> = runs
        .into_iter()
        .filter(|r| !r.2.is_empty())
        .map(|(lo, hi, w)| format!("{}: {w}", size_range(lo, hi)))
        .collect();
    let every = if d.models > 1 {
        " for every base model"
    } else {
        ""
    };
    let mut verdict = if keep.is_empty() {
        String::new()
    } else {
        format!("**keep the raw scores at n = {}{every}**", keep.join(", "))
    };
    if !partly.is_empty() {
        if !verdict.is_empty() {
            verdict.push_str("; ");
        }
        verdict.push_str(&format!(
            "**calibrate some base models and keep the raw scores of others** — raw scores kept for {}",
            partly.join("; ")
        ));
    }
    if verdict.is_empty() {
        verdict = "calibrate at every size".to_string();
    }
    let counts: Vec<String> = d
        .per_size
        .iter()
        .filter_map(|v| {
            let r = v.raw.as_ref()?;
            let most = r
                .most_better
                .as_ref()
                .map(|(m, k)| format!(", most `{m}` {k}"))
                .unwrap_or_default();
            Some(format!(
                "n = {}: {}/{}{most}",
                v.size, r.any_better, v.tasks
            ))
        })
        .collect();
    let mut out = format!(
        "**Calibrate at all?** Against the uncalibrated scores `{raw}`: {verdict}. Rule: for each base model separately, keep the raw scores at a size unless the method recommended there is reliably better than them across that model's datasets (Bayesian signed-rank test, P(better) ≥ {DECISIVE}; one dataset: better on its paired interval); a method only equivalent within the margin keeps the raw scores too, since a calibrator is one more fitted map to maintain. Per task, for description: tasks on which some method is reliably better than the raw scores on its paired interval — {}.",
        counts.join("; ")
    );
    let pays: Vec<String> = d
        .pays_from
        .iter()
        .map(|(m, s)| {
            let who = match m {
                None => "some method".to_string(),
                Some(m) => format!("`{m}`"),
            };
            match &s.better_from {
                Some(b) => format!(
                    "{who} on {} of {} tasks, from {}",
                    b.tasks,
                    s.tasks,
                    from_sizes(b)
                ),
                None => format!("{who} on none of {} tasks", s.tasks),
            }
        })
        .collect();
    if !pays.is_empty() {
        out.push_str(&format!(
            " Calibration pays off within the sizes tried (reliably better than the raw scores at a size and at every larger tested size): {}; per task and method in `thresholds.csv` (rows with `parametric` = `{raw}`).",
            pays.join("; ")
        ));
    }
    out
}

/// P(better) / P(equivalent) / P(worse) of a comparison, or how it was
/// decided on one dataset.
pub fn posterior_cell(e: &Evidence) -> String {
    match (&e.decided_by, &e.test.result) {
        (DecidedBy::Intervals, _) => {
            if e.first_better {
                "✓ (1 dataset)".into()
            } else if e.second_better {
                "✗ (1 dataset)".into()
            } else {
                "– (1 dataset)".into()
            }
        }
        (DecidedBy::Datasets, Ok(r)) => {
            let s = format!("{:.2}/{:.2}/{:.2}", r.better, r.equivalent, r.worse);
            if [r.better, r.equivalent, r.worse]
                .iter()
                .any(|&p| p >= DECISIVE)
            {
                format!("**{s}**")
            } else {
                s
            }
        }
        (DecidedBy::Datasets, Err(_)) => "–".into(),
    }
}

/// The decision on one metric as blocks.
fn decision_blocks(d: &Decision, primary: bool, detail: Detail) -> Vec<Block> {
    let mut out = vec![
        Block::Para(headline_words(d, primary)),
        Block::Para(by_size_words(d)),
        Block::Para(default_holds_words(d)),
    ];
    if let Some(raw) = d.raw.as_ref() {
        out.push(Block::Para(raw_words(d, raw)));
    }
    out.extend(passed_over_blocks(d));
    out.push(Block::Table(decision_table(d, detail)));
    if detail == Detail::Full {
        out.extend(super::evidence::versus_blocks(d));
    }
    out.extend(super::evidence::raw_blocks(d, detail == Detail::Brief));
    out
}

/// The team default and the runner-up on one metric, in words.
fn headline_words(d: &Decision, primary: bool) -> String {
    let runner = d
        .runner_up
        .as_ref()
        .map(|r| format!("; runner-up **`{r}`**"))
        .unwrap_or_default();
    format!(
        "{} **team default: `{}`**{}{runner}.",
        if primary {
            format!("On `{}` (the primary metric):", d.metric)
        } else {
            format!("On `{}`:", d.metric)
        },
        d.default,
        if d.raw.as_ref() == Some(&d.default) {
            " (the uncalibrated scores: do not calibrate)"
        } else {
            ""
        }
    )
}

/// What is recommended over runs of sizes with the same words.
fn by_size_words(d: &Decision) -> String {
    let mut acc: Vec<(usize, usize, String)> = Vec::new();
    for v in &d.per_size {
        let w = recommended_words(d, v);
        match acc.last_mut() {
            Some(s) if s.2 == w => s.1 = v.size,
            _ => acc.push((v.size, v.size, w)),
        }
    }
    let parts: Vec<String> = acc
        .into_iter()
        .map(|(lo, hi, w)| format!("{}: {w}", size_range(lo, hi)))
        .collect();
    format!(
        "**Recommended by calibration size** — {}.",
        parts.join("; ")
    )
}

/// At how many sizes the default holds, what beats it where, and the best
/// average rank by size.
fn default_holds_words(d: &Decision) -> String {
    let holds = d.per_size.iter().filter(|v| v.default_holds()).count();
    let beaten: Vec<String> = d
        .per_size
        .iter()
        .filter_map(|v| match &v.why {
            Recommendation::Beaten(b) => Some(format!(
                "n = {}: {}",
                v.size,
                b.iter()
                    .map(|m| format!("`{m}`"))
                    .collect::<Vec<_>>()
                    .join(", ")
            )),
            _ => None,
        })
        .collect();
    let changes: Vec<String> = d
        .segments
        .iter()
        .map(|(lo, hi, m)| format!("{}: `{m}`", size_range(*lo, *hi)))
        .collect();
    // With one dataset the signed-rank test cannot decide and the paired
    // intervals do (see `analysis::decision`); say which.
    let one_dataset = d.per_size.iter().all(|v| v.datasets <= 1);
    let by = if one_dataset {
        "on the paired intervals of its one dataset (better on every task of it)".to_string()
    } else {
        format!("across datasets (Bayesian signed-rank test, P ≥ {DECISIVE})")
    };
    format!(
        "No method is reliably better than `{}` {by} at {holds} of {} sizes{}. Best average rank by calibration size (a picture, not a test) — {}.",
        d.default,
        d.per_size.len(),
        if beaten.is_empty() {
            String::new()
        } else {
            format!("; reliably better than it — {}", beaten.join("; "))
        },
        changes.join("; "),
    )
}

/// One paragraph per size where methods were passed over for fallbacks.
fn passed_over_blocks(d: &Decision) -> Vec<Block> {
    let mut out = Vec::new();
    for v in &d.per_size {
        if let Recommendation::PassedOver(passed) = &v.why {
            let list: Vec<String> = passed
                .iter()
                .map(|(m, sh)| format!("`{m}` {:.1}%", sh * 100.0))
                .collect();
            out.push(Block::Para(format!(
                "**Not recommended at n = {} for fallbacks:** {} of the draws there fell back to the smoothed base rate (status `fallback:base-rate`), more than the limit of {:.0}% (`[decision] max_fallback`); {}.",
                v.size,
                list.join(", "),
                d.max_fallback * 100.0,
                if v.recommended.is_empty() {
                    "no method stays within the limit".to_string()
                } else {
                    format!("`{}` is recommended there instead", v.recommended)
                }
            )));
        }
    }
    out
}

/// The decision table by calibration size; the brief one keeps the columns
/// a decision is read from.
fn decision_table(d: &Decision, detail: Detail) -> Table {
    let ru = d.runner_up.clone().unwrap_or_else(|| "–".into());
    let columns = decision_columns(d);
    let mut t = Table {
        title: format!("Decision by calibration size ({})", d.metric),
        header: columns.iter().map(|c| c.0.clone()).collect(),
        rows: d.per_size.iter().map(|v| decision_row(d, v)).collect(),
        notes: decision_notes(d, &ru),
    };
    if detail == Detail::Brief {
        let keep: Vec<usize> = (0..columns.len()).filter(|&i| columns[i].1).collect();
        let pick = |row: &[String]| keep.iter().map(|&i| row[i].clone()).collect::<Vec<_>>();
        t.header = pick(&t.header);
        t.rows = t.rows.iter().map(|r| pick(r)).collect();
        t.notes = vec![format!(
            "Vs runner-up P(✓/=/✗): the posterior probability that `{}` is better than, practically equivalent to, or worse than `{ru}` (Bayesian signed-rank test, dataset as unit; bold: one reaches {DECISIVE}, which decides). Ranks, per-task counts and the test's full tables are in summary.md.",
            d.default
        )];
    }
    t
}

/// Each column of the decision table with whether the terminal keeps it:
/// the columns a decision is read from; the ranks and per-task counts are
/// in summary.md.
fn decision_columns(d: &Decision) -> Vec<(String, bool)> {
    let mut columns: Vec<(String, bool)> = vec![
        ("n".into(), true),
        ("tasks (datasets)".into(), true),
        ("best rank".into(), false),
        ("rank (default)".into(), false),
        ("rank (runner-up)".into(), false),
        ("vs runner-up P(✓/=/✗)".into(), true),
        (format!("tasks vs runner-up {}", marks_slashed()), false),
    ];
    if d.raw.is_some() {
        columns.push((format!("tasks vs raw {}", marks_slashed()), false));
    }
    columns.push(("default fell back".into(), true));
    columns.push(("recommended".into(), true));
    columns
}

/// The notes under the full decision table; `ru` names the runner-up.
fn decision_notes(d: &Decision, ru: &str) -> Vec<String> {
    let mut notes = vec![format!(
        "Default `{}`, runner-up `{ru}`. Tasks (datasets): tasks with a value for every method at that size, and the datasets they come from. Ranks: average over tasks of each method's rank by mean {} (1 = best) — a picture of the field that treats tasks as independent; it decides nothing. Vs runner-up P(✓/=/✗): the test this decision rests on — the Bayesian signed-rank test with the dataset as unit and the margin as region of practical equivalence (table below): the posterior probability that `{}` is better than, practically equivalent to, or worse than `{ru}`; bold: one reaches {DECISIVE}. With a single dataset it cannot decide, and the dataset's paired interval does (✓ / ✗ when every task of it says so).",
        d.default,
        d.metric,
        d.default,
    ), format!(
        "Tasks vs runner-up {}: a description, not a test across tasks — tasks on which `{}` is {} than `{ru}`, each from that task's paired interval over the repeats read against the task's margin δ (see the legend).",
        marks_slashed(),
        d.default,
        Verdict::ALL.map(|v| v.words()).join(" / ")
    )];
    if let Some(raw) = d.raw.as_ref() {
        notes.push(format!(
            "Tasks vs raw: the same counts for `{}` against the uncalibrated scores `{raw}`. Recommended: the method chosen by the rule; \"keep the raw scores for\" names the base models on which the test does not show it reliably better than the raw scores (the per-model table below).",
            d.default
        ));
    }
    notes.push(format!(
        "Default fell back: share of `{}`'s draws over the tasks at that size that could not be fitted and predicted the smoothed base rate (status `fallback:base-rate`), and the task with the largest share. A method above {:.0}% (`[decision] max_fallback`) is not recommended at that size: at one draw in ten replaced by a constant, its results there are partly the base rate's (the share the Fallback fits section flags as large).",
        d.default,
        d.max_fallback * 100.0
    ));
    notes
}

/// One size's row of the full decision table.
fn decision_row(d: &Decision, v: &SizeVerdict) -> Vec<String> {
    let mut row = vec![
        v.size.to_string(),
        format!("{} ({})", v.tasks, v.datasets),
        format!("`{}`", v.best),
        format!("{:.2}", v.default_rank),
        v.runner_up_rank
            .map(|r| format!("{r:.2}"))
            .unwrap_or_else(|| "–".into()),
        d.runner_up
            .as_ref()
            .and_then(|ru| v.against(ru))
            .map(posterior_cell)
            .unwrap_or_else(|| "–".into()),
        v.versus_runner_up
            .map(|r| r.slashed())
            .unwrap_or_else(|| "–".into()),
    ];
    if d.raw.is_some() {
        row.push(
            v.raw
                .as_ref()
                .and_then(|r| r.default_vs_raw)
                .map(|r| r.slashed())
                .unwrap_or_else(|| "–".into()),
        );
    }
    row.push(match &v.worst_fallback {
        Some((task, w)) => format!(
            "{:.1}%; most {}/{} on `{task}`",
            v.default_fallback.share() * 100.0,
            w.fallback,
            w.draws
        ),
        None => "0%".into(),
    });
    row.push(recommended_cell(d, v));
    row
}

/// The "recommended" cell: the method, why, and the base models that keep
/// the raw scores.
fn recommended_cell(d: &Decision, v: &SizeVerdict) -> String {
    let raw_for = v.raw.as_ref().map(|r| r.raw_for()).unwrap_or_default();
    let raw_note = if raw_for.is_empty() {
        String::new()
    } else {
        format!(
            "; raw for {}",
            raw_for
                .iter()
                .map(|m| model_name(m))
                .collect::<Vec<_>>()
                .join(", ")
        )
    };
    match &v.why {
        Recommendation::Default => format!("`{}`{raw_note}", v.recommended),
        Recommendation::Beaten(_) => {
            format!("`{}` (beats `{}`){raw_note}", v.recommended, d.default)
        }
        Recommendation::KeepRaw => format!("`{}` (raw scores)", v.recommended),
        Recommendation::PassedOver(_) if v.recommended.is_empty() => "none (fallbacks)".into(),
        Recommendation::PassedOver(_) => {
            format!("`{}` (fallbacks){raw_note}", v.recommended)
        }
    }
}

/// The commands that take the primary decision's recommendation to
/// production, with the suite the method ids come from.
fn production_block(d: &Decision, ctx: &ReportContext) -> Vec<Block> {
    // Each calibrating method recommended somewhere, with its sizes.
    let mut picks: Vec<(String, Vec<usize>)> = Vec::new();
    for v in &d.per_size {
        if v.recommended.is_empty() || Some(&v.recommended) == d.raw.as_ref() {
            continue;
        }
        match picks.iter_mut().find(|p| p.0 == v.recommended) {
            Some(p) => p.1.push(v.size),
            None => picks.push((v.recommended.clone(), vec![v.size])),
        }
    }
    if picks.is_empty() {
        return Vec::new();
    }
    let suite = if ctx.suite_file.starts_with('(') {
        String::new()
    } else {
        format!(" --suite {}", ctx.suite_file)
    };
    let lines: Vec<String> = picks
        .iter()
        .map(|(m, sizes)| {
            format!(
                "`plumbline fit --method {m}{suite} --scores LABELLED.csv --score-column SCORE --label-column LABEL --out {m}.map` (recommended at n = {})",
                sizes.iter().map(|n| n.to_string()).collect::<Vec<_>>().join(", ")
            )
        })
        .collect();
    vec![Block::Para(format!(
        "**To production.** Fit the recommended method on your own labelled calibration rows — as many as the size it is recommended at, drawn from the population it will serve — then apply the map to new scores with `plumbline apply {}.map --scores NEW.csv --out CALIBRATED.csv`, and check it with `plumbline diagnose` on held-out labelled rows: {}. Add `--score-kind margin` when the scores are log-odds or another unbounded score. Where the decision keeps the raw scores for a base model, use the scores as they are.",
        picks[0].0,
        lines.join("; ")
    ))]
}

/// The evidence paragraph and the caveats under the decision.
fn evidence_blocks(a: &Analysis, ctx: &ReportContext) -> Vec<Block> {
    let s = &ctx.settings;
    let mut out = Vec::new();
    let Some(d) = a.decisions.first() else {
        return out;
    };
    let models = if d.models > 0 {
        format!(" × {} base models", d.models)
    } else {
        String::new()
    };
    out.push(Block::Para(format!(
        "**How strong the evidence is.** {} tasks from {} datasets{models}, {} methods, every method fitted on the same calibration sample and scored on the same test set in each of the suite's repeats. The rule: at each calibration size, rank the methods on each task by mean loss and average the ranks over tasks (Demšar 2006); the team default has the lowest mean of these average ranks over the sizes, each size weighted by the number of datasets behind it; at each size it is recommended unless a method is reliably better than it across datasets (Bayesian signed-rank test, dataset as unit), it falls back too often, or the raw scores hold for a base model.{}",
        d.tasks,
        d.datasets,
        a.methods.len(),
        if d.datasets < d.tasks {
            format!(" Tasks that share a dataset are not independent evidence: every test the decision rests on counts each of the {} datasets once (the ranks, the Friedman test and the critical differences, which count all {} tasks, are pictures only).", d.datasets, d.tasks)
        } else {
            String::new()
        }
    )));
    if d.datasets < 10 {
        out.push(Block::Para(format!(
            "**Read with care: only {} dataset(s).** Rankings of calibration methods change with the dataset, the base model and the calibration size. Treat this default as a hypothesis to check on your own held-out scores (add them to the suite as score files), not as a settled answer.",
            d.datasets
        )));
    }
    let log_loss: Vec<&crate::analysis::Paired> = a
        .paired
        .iter()
        .filter(|p| p.metric == MetricId::LogLoss)
        .collect();
    let wide = log_loss
        .iter()
        .filter(|p| p.reservoir_order == Some(1) && !p.rare_class())
        .count();
    let kind = IntervalKind::parse(&s.interval);
    let switches = kind.is_some_and(|k| k.reservoir_order(false) != k.reservoir_order(true));
    if wide > 0 && switches {
        out.push(Block::Para(format!(
            "Wider log-loss intervals: in {wide} of {} log-loss comparisons a method predicted exactly 0 or 1 (within the log-loss clip) and was wrong on some test row. A few calibration rows decide where such a method jumps to 0 or 1, so its log loss varies more from one calibration sample to the next, and the interval is widened to allow for that. Why and when: `docs/report.md` (\"Wider log-loss intervals\").",
            log_loss.len()
        )));
    }
    let rare: Vec<&crate::analysis::Paired> = a.paired.iter().filter(|p| p.rare_class()).collect();
    if !rare.is_empty() {
        let cells: std::collections::BTreeSet<(&str, usize)> =
            rare.iter().map(|p| (p.task.as_str(), p.size)).collect();
        let sizes: std::collections::BTreeSet<usize> = rare.iter().map(|p| p.size).collect();
        out.push(Block::Para(format!(
            "**Approximate intervals (†):** {} of {} comparisons, on {} task and size cells (n = {}), rest on calibration samples with fewer than {} rows of the rarer class on average. Their intervals are widened (the fitted maps are then far from their large-sample behaviour), which brought them close to the nominal level in the coverage study, but they remain less reliable than the rest: read their verdicts as approximate. The decision's test across datasets uses the mean differences, not these intervals (`docs/statistics.md`, \"Rare classes\").",
            rare.len(),
            a.paired.len(),
            cells.len(),
            sizes.iter().map(|n| n.to_string()).collect::<Vec<_>>().join(", "),
            crate::analysis::RARE_CLASS_ROWS
        )));
    }
    let zero_one = a.paired.iter().filter(|p| p.zero_one).count();
    if zero_one > 0 {
        let methods: std::collections::BTreeSet<&str> = a
            .paired
            .iter()
            .filter(|p| p.zero_one)
            .flat_map(|p| [p.method.as_str(), p.reference.as_str()])
            .filter(|m| s.zero_one_methods.iter().any(|z| z == m))
            .collect();
        out.push(Block::Para(format!(
            "**Approximate log-loss intervals (‡):** {zero_one} of {} comparisons involve a method that can predict a probability of exactly 0 or 1 ({}). Its expected log loss is driven by rare test rows on which it is certain and wrong, which a run's repeats may not show, so these intervals can fall short of their nominal level (`docs/statistics.md`, \"Approximate intervals\"). Read their log-loss verdicts as approximate; the Brier score, or the bounded variants of these methods, do not have this problem.",
            a.paired.len(),
            methods.iter().map(|m| format!("`{m}`")).collect::<Vec<_>>().join(", ")
        )));
    }
    if kind == Some(IntervalKind::default()) {
        out.push(Block::Para("The intervals' coverage was checked by simulation; where it falls short of the nominal level (small calibration sizes for some method pairs) is stated in `docs/statistics.md`.".into()));
    }
    let few: Vec<usize> = a
        .paired
        .iter()
        .map(|p| p.repeats)
        .filter(|&r| r < REPEATS_CHECKED)
        .collect();
    if let (Some(r), true) = (few.iter().min(), kind == Some(IntervalKind::default())) {
        let most = a.paired.iter().map(|p| p.repeats).max().unwrap_or(0);
        let why = if most < REPEATS_CHECKED {
            format!("the suite runs {most} repeats")
        } else {
            "failed or one-class fits leave gaps, see Unit status".to_string()
        };
        out.push(Block::Para(format!(
            "**Note on intervals:** {} of {} comparisons rest on fewer than {REPEATS_CHECKED} repeats (as few as {r}; {why}). The coverage study checked the default interval at {REPEATS_CHECKED} repeats; with fewer, coverage is unchecked.",
            few.len(),
            a.paired.len()
        )));
    }
    if s.reference.starts_with("cross-fitted-") {
        out.push(Block::Para(format!(
            "This is a protocol study. The compared \"methods\" are ways of getting calibration data at an equal labelled budget n: `held-out-f` keeps a fraction f of the n rows away from the base model and calibrates on its scores there; `{}` trains on all n rows and calibrates on out-of-fold scores. Each task is a dataset, a base model and a calibrator (`task@calibrator`). A difference below zero means the held-out variant beats cross-fitting.",
            s.reference
        )));
    }
    out
}

/// Average-rank tables per decision metric.
fn rank_blocks(a: &Analysis, ctx: &ReportContext, detail: Detail) -> Vec<Block> {
    let s = &ctx.settings;
    let mut out = vec![Block::Heading(
        2,
        "Ranks across tasks".into(),
        "ranks".into(),
    )];
    if a.across.is_empty() {
        out.push(Block::Para(
            "No calibration size has values for every method on two or more tasks.".into(),
        ));
        return out;
    }
    for d in &a.decisions {
        let rows: Vec<_> = a
            .across
            .iter()
            .filter(|r| r.metric == d.metric)
            .filter_map(|r| r.result.as_ref().ok().map(|x| (r, x)))
            .collect();
        let mut t = Table {
            title: format!("Average rank of mean `{}` over tasks (1 = best)", d.metric),
            header: std::iter::once("method".to_string())
                .chain(rows.iter().map(|(r, _)| format!("n = {}", r.size)))
                .chain(std::iter::once("mean".to_string()))
                .collect(),
            rows: Vec::new(),
            notes: Vec::new(),
        };
        for (m, mean) in &d.standing {
            let mut row = vec![format!("`{m}`")];
            for (r, x) in &rows {
                let i = r.methods.iter().position(|x| x == m);
                row.push(match i {
                    Some(i) if i == x.best => format!("**{:.2}**", x.friedman.avg_ranks[i]),
                    Some(i) => format!("{:.2}", x.friedman.avg_ranks[i]),
                    None => "–".into(),
                });
            }
            row.push(format!("{mean:.2}"));
            t.rows.push(row);
        }
        let mut tasks_row = vec!["tasks".to_string()];
        let mut cd_row = vec!["CD (α = 0.05)".to_string()];
        let mut p_row = vec!["Iman–Davenport p".to_string()];
        for (r, x) in &rows {
            tasks_row.push(r.tasks.len().to_string());
            cd_row.push(
                x.cd_05
                    .map(|c| format!("{c:.2}"))
                    .unwrap_or_else(|| "–".into()),
            );
            p_row.push(fmt_p(x.friedman.ff_p));
        }
        for r in [&mut tasks_row, &mut cd_row, &mut p_row] {
            r.push(String::new());
        }
        t.rows.push(tasks_row);
        t.rows.push(cd_row);
        t.rows.push(p_row);
        t.notes.push("Methods in order of the decision rule (mean of the average ranks over sizes); bold: best at that size. Friedman / Iman–Davenport and the Nemenyi CD treat the tasks as independent cases; tasks that share a dataset are not, so these are optimistic (the Bayesian signed-rank table in the decision section takes the dataset as unit).".into());
        out.push(Block::Table(t));
        if detail == Detail::Full {
            out.push(Block::Figure(
                format!("figures/ranks--{}.svg", d.metric),
                format!(
                    "average ranks with Nemenyi critical difference, {} (tasks treated as independent)",
                    d.metric
                ),
            ));
        } else {
            out.push(Block::Figure(
                format!("figures/ranks--{}.svg", d.metric),
                String::new(),
            ));
        }
    }
    if detail == Detail::Full {
        let primary = &s.primary_metric;
        let primary_id = s.primary();
        let others: Vec<&String> = a.methods.iter().filter(|m| **m != s.reference).collect();
        let mut t = Table {
            title: format!(
                "Tasks on which each method is {} against `{}` ({primary})",
                Verdict::ALL
                    .map(|v| format!("{} {}", v.mark(), v.as_str()))
                    .join(" / "),
                s.reference
            ),
            header: std::iter::once("n".to_string())
                .chain(others.iter().map(|m| format!("`{m}`")))
                .collect(),
            rows: Vec::new(),
            notes: Vec::new(),
        };
        for r in a.across.iter().filter(|r| Some(r.metric) == primary_id) {
            let mut row = vec![r.size.to_string()];
            for m in &others {
                row.push(
                    r.vs_reference
                        .iter()
                        .find(|(x, _)| x == *m)
                        .map(|(_, rec)| rec.slashed())
                        .unwrap_or_else(|| "–".into()),
                );
            }
            t.rows.push(row);
        }
        out.push(Block::Table(t));
    }
    out
}

/// The data-size thresholds on every decision metric, side by side.
fn threshold_blocks(a: &Analysis, detail: Detail) -> Vec<Block> {
    let mut out = vec![Block::Heading(
        2,
        "How much calibration data before a flexible method pays off".into(),
        "thresholds".into(),
    )];
    if a.threshold_summaries.is_empty() {
        out.push(Block::Para(
            "No (flexible, parametric) method pair in this suite.".into(),
        ));
        return out;
    }
    out.push(Block::Para(format!("Per task, \"better from\" is the smallest tested size from which the flexible method is reliably better than the parametric one at every larger tested size. Each cell gives the number of tasks where that happens within the sizes tried, out of the tasks compared, and the median size over those tasks{}; per-task values (also \"worse up to\" and the interpolated crossover) are in `thresholds.csv`. A median over an even number of tasks can fall between two tested sizes; the cell then names both (\"between 200 and 500\"), since no size between them was tried. A size is only as good as the sizes tested: \"better from 1000\" means better at 1000 and at every larger size in the sweep, not at 700.",
        if detail == Detail::Full {
            " [smallest, largest]"
        } else {
            " (their range is in summary.md)"
        }
    )));
    let metrics: Vec<MetricId> = a.decisions.iter().map(|d| d.metric).collect();
    let mut pairs: Vec<(String, String)> = Vec::new();
    for (_, p, _) in &a.threshold_summaries {
        if !pairs.contains(p) {
            pairs.push(p.clone());
        }
    }
    let mut t = Table {
        title: if detail == Detail::Full {
            "Better from (tasks within the sizes tried / tasks compared; median [range])".into()
        } else {
            "Better from (tasks within the sizes tried / tasks compared; median; range in summary.md)".into()
        },
        header: std::iter::once("flexible vs parametric".to_string())
            .chain(metrics.iter().map(|m| format!("`{m}`")))
            .collect(),
        rows: Vec::new(),
        notes: Vec::new(),
    };
    for (f, p) in &pairs {
        let mut row = vec![format!("`{f}` vs `{p}`")];
        for m in &metrics {
            let cell = a
                .threshold_summaries
                .iter()
                .find(|(mm, pp, _)| mm == m && pp.0 == *f && pp.1 == *p)
                .map(|(_, _, s)| match &s.better_from {
                    Some(b) if detail == Detail::Full => format!(
                        "{}/{}; {} [{:.0}, {:.0}]",
                        b.tasks,
                        s.tasks,
                        median_cell(b),
                        b.min,
                        b.max
                    ),
                    Some(b) => format!("{}/{}; {}", b.tasks, s.tasks, median_cell(b)),
                    None => format!("0/{}", s.tasks),
                })
                .unwrap_or_else(|| "–".into());
            row.push(cell);
        }
        t.rows.push(row);
    }
    out.push(Block::Table(t));
    if detail == Detail::Full {
        for m in &metrics {
            out.push(Block::Figure(
                format!("figures/thresholds--{m}.svg"),
                format!("data-size thresholds per task and pair, {m}"),
            ));
        }
    }
    out
}

/// Tasks grouped by dataset, in first-seen order.
pub fn datasets(a: &Analysis) -> Vec<(String, Vec<String>)> {
    let mut out: Vec<(String, Vec<String>)> = Vec::new();
    for t in &a.tasks {
        let d = task_parts(t).0.to_string();
        match out.iter_mut().find(|(x, _)| *x == d) {
            Some((_, v)) => v.push(t.clone()),
            None => out.push((d, vec![t.clone()])),
        }
    }
    out
}

/// The per-task section of one task.
pub fn task_blocks(a: &Analysis, ctx: &ReportContext, task: &str) -> Vec<Block> {
    let s = &ctx.settings;
    let mut out = vec![Block::Heading(
        4,
        format!("Task `{task}`"),
        format!("task-{}", anchor(task)),
    )];
    if let Some(primary) = s.primary() {
        if a.tasks.iter().any(|t| t == task) {
            let mut t = task_table(a, s, primary, task, true);
            t.title = format!("`{task}` — mean {primary} by calibration size");
            out.push(Block::Table(t));
        }
        out.push(Block::Figure(
            figures::figure_name(task, primary),
            format!(
                "learning curves of {task}: difference to {} by size",
                s.reference
            ),
        ));
    }
    if ctx.curves.iter().any(|c| c.task == task) {
        out.push(Block::Figure(
            figures::reliability_name(task),
            format!("reliability diagrams of {task}"),
        ));
    }
    out
}

/// The whole summary document.
pub fn document(a: &Analysis, ctx: &ReportContext, detail: Detail) -> Vec<Block> {
    let mut b = preamble_blocks(a, ctx);
    b.extend(decision_section(a, ctx, detail));
    b.extend(evidence_blocks(a, ctx));
    b.push(Block::Caution(CAUTION.into()));
    b.push(Block::Heading(
        2,
        "How to read the marks".into(),
        "legend".into(),
    ));
    b.push(Block::List(legend(&margin_words(&ctx.settings))));
    b.extend(rank_blocks(a, ctx, detail));
    b.extend(threshold_blocks(a, detail));
    if detail == Detail::Brief {
        b.push(Block::Para(format!(
            "Per-task tables: `plumbline report <folder> --task <id>` (tasks: {}). Everything, with figures: `summary.md` and `index.html` in the results folder.",
            a.tasks.len()
        )));
        return b;
    }
    b.extend(reliability_blocks(a, ctx));
    b.extend(per_dataset_blocks(a, ctx));
    b.extend(status_blocks(a));
    b.extend(super::fallback::fallback_blocks(a));
    b.push(Block::Heading(2, "Reproduce".into(), "reproduce".into()));
    b.push(Block::Para(format!(
        "Run `plumbline run {}` with the same suite file (check its SHA-256 above) to get byte-identical `units.csv.gz`, `paired.csv`, `thresholds.csv`, `reliability*.csv`, `summary.md`, `index.html` and figures; `plumbline report <folder>` rebuilds the tables and figures from `units.csv.gz` and the reliability files.",
        ctx.suite_file
    )));
    b
}

/// The title, the suite and settings the results come from, and how the
/// metrics at a threshold score.
fn preamble_blocks(a: &Analysis, ctx: &ReportContext) -> Vec<Block> {
    let s = &ctx.settings;
    let mut b = vec![Block::Heading(
        1,
        format!("plumbline results: {}", ctx.suite_name),
        "top".into(),
    )];
    b.push(Block::Para(format!(
        "Suite `{}` (SHA-256 `{}`){}. Reference method `{}`; primary metric `{}`; {} intervals at {}%; equivalence margin {}% of the reference's mean{}.",
        ctx.suite_file,
        ctx.suite_sha256,
        ctx.seed.map(|x| format!(", seed {x}")).unwrap_or_default(),
        s.reference,
        s.primary_metric,
        s.interval,
        (s.confidence * 100.0).round(),
        crate::run::table::num(s.margin * 100.0),
        if s.absolute_margins.is_empty() {
            ""
        } else {
            " (absolute for some metrics, see the legend)"
        }
    )));
    if let Some(t) = s.decision_threshold {
        b.push(Block::Para(format!(
            "Metrics at a threshold (`threshold_cost`, `net_benefit`) score acting on a prediction when p ≥ {} (`decision_threshold`); see `docs/metrics.md` (\"Decisions at a threshold\").",
            crate::run::table::num(t)
        )));
    }
    let at: Vec<&str> = a
        .metrics
        .iter()
        .filter(|m| matches!(m, MetricId::ThresholdCostAt(_) | MetricId::NetBenefitAt(_)))
        .map(|m| m.as_str())
        .collect();
    if let Some(first) = at.first() {
        b.push(Block::Para(format!(
            "Metrics named `<metric>@t` (here {}) score acting on a prediction when p ≥ t, one column per threshold of `decision_thresholds` and `cost_ratios`; e.g. `{first}`. See `docs/metrics.md` (\"Decisions at a threshold\").",
            at.iter().map(|m| format!("`{m}`")).collect::<Vec<_>>().join(", ")
        )));
    }
    b
}

/// The "Decision" section: every metric's decision, then how to take the
/// primary one to production.
fn decision_section(a: &Analysis, ctx: &ReportContext, detail: Detail) -> Vec<Block> {
    let mut b = vec![Block::Heading(2, "Decision".into(), "decision".into())];
    if a.decisions.is_empty() {
        b.push(Block::Para("Too few tasks share a calibration size for a comparison across tasks (it needs at least two tasks with a value for every method).".into()));
    }
    for (i, d) in a.decisions.iter().enumerate() {
        b.extend(decision_blocks(d, i == 0, detail));
    }
    if let Some(d) = a.decisions.first() {
        b.extend(production_block(d, ctx));
    }
    b
}

/// The "Reliability diagrams" section: what the figures show and a link to
/// each task's.
fn reliability_blocks(a: &Analysis, ctx: &ReportContext) -> Vec<Block> {
    let mut b = vec![Block::Heading(
        2,
        "Reliability diagrams".into(),
        "reliability".into(),
    )];
    if ctx.curves.is_empty() {
        b.push(Block::Para(
            "This folder holds no reliability curves (`reliability.csv`).".into(),
        ));
        return b;
    }
    let shows = reliability_sizes_words(a, ctx);
    b.push(Block::Para(format!(
        "One figure per task, from repeat 0, with a column for each of {shows}: the CORP reliability curve of each method's test predictions (isotonic regression of the outcome on the prediction; Dimitriadis, Gneiting & Jordan 2021) with a consistency band from label draws under the hypothesis of calibration (Bröcker & Smith 2007), on a probability and a log-odds scale, the histogram of predictions beneath, and the CORP decomposition of the Brier score (BS = MCB − DSC + UNC: miscalibration, discrimination, uncertainty). A curve leaving its band shows miscalibration beyond chance. Points are in `reliability.csv`, histograms in `reliability_hist.csv`, terms in `reliability_terms.csv`.",
    )));
    let mut items = Vec::new();
    for t in &a.tasks {
        if ctx.curves.iter().any(|c| &c.task == t) {
            items.push(format!("[`{t}`]({})", figures::reliability_name(t)));
        }
    }
    b.push(Block::Para(items.join(" · ")));
    b
}

/// Which calibration sizes the reliability figures have columns for: each
/// task's figure has a column per size drawn for that task, and tasks that
/// share their sizes are grouped.
fn reliability_sizes_words(a: &Analysis, ctx: &ReportContext) -> String {
    let mut groups: Vec<(Vec<usize>, usize)> = Vec::new();
    for t in &a.tasks {
        let set: std::collections::BTreeSet<usize> = ctx
            .curves
            .iter()
            .filter(|c| &c.task == t)
            .map(|c| c.size)
            .collect();
        if set.is_empty() {
            continue;
        }
        let set: Vec<usize> = set.into_iter().collect();
        match groups.iter_mut().find(|(s, _)| *s == set) {
            Some(g) => g.1 += 1,
            None => groups.push((set, 1)),
        }
    }
    groups.sort_by(|x, y| y.1.cmp(&x.1).then(x.0.cmp(&y.0)));
    let sizes_words = |s: &[usize]| {
        let w: Vec<String> = s.iter().map(|n| n.to_string()).collect();
        format!(
            "{} {}",
            if w.len() == 1 { "size" } else { "sizes" },
            and_list(&w)
        )
    };
    match groups.as_slice() {
        [(s, _)] => format!("calibration {}", sizes_words(s)),
        _ => format!(
            "the calibration sizes drawn for that task — {}",
            groups
                .iter()
                .map(|(s, k)| format!(
                    "{} on {k} {}",
                    sizes_words(s),
                    if *k == 1 { "task" } else { "tasks" }
                ))
                .collect::<Vec<_>>()
                .join("; ")
        ),
    }
}

/// The "Results per dataset" section: each dataset's tasks' tables.
fn per_dataset_blocks(a: &Analysis, ctx: &ReportContext) -> Vec<Block> {
    let mut b = vec![Block::Heading(
        2,
        "Results per dataset".into(),
        "tasks".into(),
    )];
    for (d, tasks) in datasets(a) {
        b.push(Block::Heading(
            3,
            format!("Dataset `{d}`"),
            format!("dataset-{}", anchor(&d)),
        ));
        for t in tasks {
            b.extend(task_blocks(a, ctx, &t));
        }
    }
    b
}

/// The "Unit status" section: units whose status was not `ok`.
fn status_blocks(a: &Analysis) -> Vec<Block> {
    let mut b = vec![Block::Heading(2, "Unit status".into(), "status".into())];
    if a.status_counts.is_empty() {
        b.push(Block::Para("Every fit finished with status `ok`.".into()));
        return b;
    }
    let mut t = Table {
        title: "Units whose status was not `ok`".into(),
        header: vec![
            "task".into(),
            "size".into(),
            "method".into(),
            "status".into(),
            "units".into(),
        ],
        rows: Vec::new(),
        notes: vec!["A `separable` fit used Platt's smoothed targets, its documented fallback; `fallback:base-rate` units could not be fitted and predicted the smoothed base rate, with metric values as usual (see Fallback fits); `one_class` and `failed` units, kept only under `on_fit_failure = \"drop\"`, have no metric values and are left out of the paired differences.".into()],
    };
    for (cell, counts) in &a.status_counts {
        for (status, n) in counts {
            t.rows.push(vec![
                cell.task.clone(),
                cell.size.to_string(),
                cell.method.clone(),
                status.to_string(),
                n.to_string(),
            ]);
        }
    }
    b.push(Block::Table(t));
    b
}

/// `summary.md`.
pub fn summary_md(a: &Analysis, ctx: &ReportContext) -> String {
    super::document::to_markdown(&document(a, ctx, Detail::Full))
}

/// The terminal report: decision, caution, legend, ranks and thresholds.
pub fn terminal(a: &Analysis, ctx: &ReportContext) -> String {
    super::document::to_terminal(
        &document(a, ctx, Detail::Brief),
        &super::document::Term::detect(),
    )
}

/// The terminal table of one task (`plumbline report DIR --task ID`); `None`
/// for an unknown task.
pub fn task_terminal(a: &Analysis, ctx: &ReportContext, task: &str) -> Option<String> {
    if !a.tasks.iter().any(|t| t == task) {
        return None;
    }
    Some(super::document::to_terminal(
        &task_blocks(a, ctx, task),
        &super::document::Term::detect(),
    ))
}

/// Words listed as "a, b and c".
pub(crate) fn and_list(w: &[String]) -> String {
    match w {
        [] => String::new(),
        [one] => one.clone(),
        [init @ .., last] => format!("{} and {last}", init.join(", ")),
    }
}

#[cfg(test)]
mod tests {
    #[test]
    fn sizes_are_listed_with_commas_and_a_final_and() {
        let w = |v: &[&str]| v.iter().map(|s| s.to_string()).collect::<Vec<_>>();
        assert_eq!(
            super::and_list(&w(&["50", "100", "200", "1000", "2000", "5000"])),
            "50, 100, 200, 1000, 2000 and 5000"
        );
        assert_eq!(super::and_list(&w(&["50", "400"])), "50 and 400");
        assert_eq!(super::and_list(&w(&["50"])), "50");
    }

    use super::*;

    fn spread(sizes: &[usize]) -> Spread {
        let per_task: Vec<crate::stats::thresholds::Thresholds> = sizes
            .iter()
            .map(|&n| crate::stats::thresholds::Thresholds {
                better_from: Some(n),
                worse_until: None,
                crossover: None,
            })
            .collect();
        crate::stats::thresholds::summarize(&per_task)
            .better_from
            .unwrap()
    }

    #[test]
    fn medians_are_told_as_tested_sizes() {
        // Four tasks: the median 350 is no tested size; 200 and 500 are.
        let b = spread(&[100, 200, 500, 1000]);
        assert_eq!(
            from_sizes(&b),
            "a median between the tested sizes n = 200 and n = 500 (range 100–1000)"
        );
        assert_eq!(median_cell(&b), "between 200 and 500");
        assert!(!from_sizes(&b).contains("350"));
        let b = spread(&[50, 400]);
        assert_eq!(
            from_sizes(&b),
            "n = 50 on half of them and n = 400 on the other half"
        );
        let b = spread(&[50, 400, 400]);
        assert_eq!(from_sizes(&b), "a median n = 400 (range 50–400)");
        assert_eq!(median_cell(&b), "400");
        assert_eq!(from_sizes(&spread(&[200, 200])), "n = 200 on each");
    }
}
