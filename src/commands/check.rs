//! `plumbline check SUITE`: validate a suite and print the resolved plan
//! without running it.

use std::path::PathBuf;
use std::process::ExitCode;

use anyhow::Result;

use crate::suite::{self, Plan, TaskSource};

// The arguments of `plumbline check`.
#[derive(Debug, Clone, clap::Args)]
pub struct CheckArgs {
    /// Suite file.
    pub suite: PathBuf,
}

/// `plumbline check`: the plan on standard output, then `ok`.
pub fn run(args: &CheckArgs) -> Result<ExitCode> {
    let plan = suite::load(&args.suite)?;
    super::say(format_args!(
        "{}ok: the suite is valid",
        describe_plan(&plan)
    ))?;
    Ok(ExitCode::SUCCESS)
}

/// A resolved plan as text (what `plumbline check` prints).
pub fn describe_plan(plan: &Plan) -> String {
    let mut s = String::new();
    s.push_str(&format!(
        "suite `{}` ({})\n",
        plan.name,
        plan.suite_file.display()
    ));
    s.push_str(&format!(
        "  seed {} · {} repeats · confidence {} · interval {} · reference `{}` · primary metric `{}`\n",
        plan.seed, plan.repeats, plan.confidence, plan.interval.as_str(), plan.reference, plan.primary.as_str()
    ));
    let at_threshold = plan.metrics.iter().any(|m| m.uses_decision_threshold());
    s.push_str(&format!(
        "  metrics: {} · log-loss clip {}{}\n",
        plan.metrics
            .iter()
            .map(|m| m.as_str())
            .collect::<Vec<_>>()
            .join(", "),
        plan.metric_settings.log_loss_clip,
        if at_threshold {
            let cuts = plan.metric_settings.thresholds();
            if cuts.is_empty() {
                let t = plan.metric_settings.decision_threshold;
                format!(" · decision threshold {t} (act when p ≥ {t})")
            } else {
                let shown: Vec<String> = cuts.iter().map(|c| c.to_string()).collect();
                format!(
                    " · decision thresholds {} (act when p ≥ t)",
                    shown.join(", ")
                )
            }
        } else {
            String::new()
        }
    ));
    s.push_str(&format!(
        "  methods: {}\n",
        plan.methods
            .iter()
            .map(|m| format!("{} ({})", m.id, m.spec.kind()))
            .collect::<Vec<_>>()
            .join(", ")
    ));
    s.push_str("  tasks:\n");
    for t in &plan.tasks {
        let (src, pinned) = match &t.source {
            TaskSource::ScoreFile(f) => (
                format!("score file {}", f.path.display()),
                if f.split_column.is_some() {
                    " (pinned by the file)"
                } else {
                    ""
                },
            ),
            TaskSource::Open {
                data,
                model_id,
                model,
                protocol,
                ..
            } => (
                format!(
                    "open data `{data}` · model `{model_id}` ({}) · protocol {}",
                    model.kind(),
                    if plan.study.is_some() {
                        "study (all variants)"
                    } else {
                        protocol.kind()
                    }
                ),
                if matches!(
                    protocol,
                    crate::models::protocol::Protocol::CrossFitted { .. }
                ) {
                    " (out-of-fold reservoir)"
                } else {
                    ""
                },
            ),
        };
        s.push_str(&format!(
            "    {:<24} {} rows ({:.1}% positive), {} scores · reservoir {} · test {}{} · {}\n",
            t.id,
            t.rows,
            100.0 * t.positives as f64 / t.rows.max(1) as f64,
            t.score_kind.as_str(),
            t.reservoir_rows,
            t.test_rows,
            pinned,
            src
        ));
        s.push_str(&format!(
            "      sizes {}{}\n",
            t.sizes
                .iter()
                .map(|x| x.to_string())
                .collect::<Vec<_>>()
                .join(", "),
            if t.skipped_sizes.is_empty() {
                String::new()
            } else {
                format!(
                    " (skipped, larger than the reservoir: {})",
                    t.skipped_sizes
                        .iter()
                        .map(|x| x.to_string())
                        .collect::<Vec<_>>()
                        .join(", ")
                )
            }
        ));
    }
    s.push_str(&format!(
        "  {} units × {} methods = {} fits\n",
        plan.unit_count(),
        plan.methods.len(),
        plan.fit_count()
    ));
    s
}
