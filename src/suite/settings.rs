//! The settings tables: `[metric_settings]`, `[decision]` and
//! `[reliability]`.

use std::collections::BTreeSet;

use serde::Deserialize;
use toml::Spanned;

use super::{key_span, Ctx, DecisionPlan, MethodEntry, ReliabilityPlan, SuiteError, MAX_MARGIN};
use crate::metrics::{MetricId, MetricSettings};

/// The `[reliability]` table as written.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawReliability {
    #[serde(default)]
    sizes: Option<Vec<i64>>,
    #[serde(default)]
    methods: Option<Vec<String>>,
    #[serde(default)]
    band_draws: Option<i64>,
    #[serde(default)]
    band_level: Option<f64>,
}

/// The `[decision]` table as written.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawDecision {
    #[serde(default)]
    margin: Option<Spanned<f64>>,
    #[serde(default)]
    absolute_margins: Option<std::collections::BTreeMap<String, Spanned<f64>>>,
    #[serde(default)]
    max_fallback: Option<Spanned<f64>>,
}

/// The `[metric_settings]` table. It stays a generic table in the suite and
/// is converted here, so that a wrong key or type is reported against
/// `metric_settings` (serde's message) and a bad value by
/// [`MetricSettings::validate`] under `metric_settings.<key>`.
pub(super) fn read_metric_settings(
    ctx: &Ctx,
    raw: Option<&Spanned<toml::Table>>,
) -> Result<MetricSettings, SuiteError> {
    let Some(t) = raw else {
        return Ok(MetricSettings::default());
    };
    let s: MetricSettings =
        toml::Value::Table(t.get_ref().clone())
            .try_into()
            .map_err(|e: toml::de::Error| {
                ctx.err(t.span(), "metric_settings", e.message().trim().to_string())
            })?;
    if let Err(e) = s.validate() {
        return Err(ctx.err(
            key_span(ctx.text, &t.span(), e.key),
            &format!("metric_settings.{}", e.key),
            e.to_string(),
        ));
    }
    let several = !s.decision_thresholds.is_empty() || !s.cost_ratios.is_empty();
    if several && t.get_ref().contains_key("decision_threshold") {
        return Err(ctx.err(
            key_span(ctx.text, &t.span(), "decision_threshold"),
            "metric_settings.decision_threshold",
            format!(
                "{}: give either `decision_threshold` (one threshold) or `decision_thresholds` and `cost_ratios` (several), not both",
                s.decision_threshold
            ),
        ));
    }
    Ok(s)
}

/// The suite's metrics with `threshold_cost` and `net_benefit` expanded to one
/// id per operating threshold of `decision_thresholds` and `cost_ratios`
/// (`threshold_cost@0.2`, …, ascending; an id listed already is kept once),
/// and the primary metric checked against that list: with several
/// thresholds it must name one of them.
pub(super) fn expand_thresholds(
    ctx: &Ctx,
    primary_span: std::ops::Range<usize>,
    metrics: Vec<MetricId>,
    primary: MetricId,
    settings: &MetricSettings,
) -> Result<(Vec<MetricId>, MetricId), SuiteError> {
    let cuts = settings.thresholds();
    let mut out: Vec<MetricId> = Vec::new();
    for m in metrics {
        let plain = matches!(m, MetricId::ThresholdCost | MetricId::NetBenefit);
        let ids: Vec<MetricId> = if plain && !cuts.is_empty() {
            cuts.iter().filter_map(|&c| m.at(c)).collect()
        } else {
            vec![m]
        };
        for id in ids {
            if !out.contains(&id) {
                out.push(id);
            }
        }
    }
    if !out.contains(&primary) {
        let listed = out
            .iter()
            .map(|m| m.as_str())
            .collect::<Vec<_>>()
            .join(", ");
        let why = if primary.uses_decision_threshold() && !cuts.is_empty() {
            "is measured at several thresholds here (`decision_thresholds`, `cost_ratios`): name one of them"
        } else {
            "must be one of the suite's metrics"
        };
        return Err(ctx.err(
            primary_span,
            "primary_metric",
            format!("`{primary}` {why} ({listed})"),
        ));
    }
    Ok((out, primary))
}

/// Check the `[decision]` table.
pub(super) fn decision_plan(
    ctx: &Ctx,
    raw: Option<&Spanned<RawDecision>>,
    metrics: &[MetricId],
) -> Result<DecisionPlan, SuiteError> {
    let mut plan = DecisionPlan::default();
    let Some(r) = raw else { return Ok(plan) };
    let r = r.get_ref();
    if let Some(m) = &r.margin {
        let v = *m.get_ref();
        if !(v.is_finite() && (0.0..=MAX_MARGIN).contains(&v)) {
            return Err(ctx.err(
                m.span(),
                "decision.margin",
                format!(
                    "{v}: expected a share of the reference's mean between 0 and {MAX_MARGIN}, e.g. 0.01 for 1%"
                ),
            ));
        }
        plan.margin = v;
    }
    if let Some(m) = &r.max_fallback {
        let v = *m.get_ref();
        if !(v.is_finite() && (0.0..=1.0).contains(&v)) {
            return Err(ctx.err(
                m.span(),
                "decision.max_fallback",
                format!("{v}: expected a share of draws between 0 and 1, e.g. 0.1 for 10%"),
            ));
        }
        plan.max_fallback = v;
    }
    if let Some(a) = &r.absolute_margins {
        for (id, v) in a {
            let key = format!("decision.absolute_margins.{id}");
            let metric = MetricId::parse(id).filter(|m| metrics.contains(m));
            let Some(metric) = metric else {
                return Err(ctx.err(
                    v.span(),
                    &key,
                    format!(
                        "`{id}` is not one of the suite's metrics ({})",
                        metrics
                            .iter()
                            .map(|m| m.as_str())
                            .collect::<Vec<_>>()
                            .join(", ")
                    ),
                ));
            };
            if !crate::analysis::is_compared(metric) {
                return Err(ctx.err(
                    v.span(),
                    &key,
                    format!("`{id}` is descriptive (the same for every method): no margin applies"),
                ));
            }
            let d = *v.get_ref();
            if !(d.is_finite() && d >= 0.0) {
                return Err(ctx.err(
                    v.span(),
                    &key,
                    format!("{d}: expected a margin of 0 or more, in the metric's units"),
                ));
            }
            plan.absolute_margins.insert(id.clone(), d);
        }
    }
    Ok(plan)
}

/// Check the `[reliability]` table. The band's level defaults to the
/// suite's `confidence`, so the figures' bands match the tables' intervals.
pub(super) fn reliability_plan(
    ctx: &Ctx,
    raw: Option<&Spanned<RawReliability>>,
    methods: &[MethodEntry],
    ids: &BTreeSet<String>,
    confidence: f64,
) -> Result<ReliabilityPlan, SuiteError> {
    let all: Vec<String> = methods.iter().map(|m| m.id.clone()).collect();
    let mut plan = ReliabilityPlan {
        sizes: None,
        methods: all.clone(),
        band: crate::metrics::reliability::BandSettings {
            level: confidence,
            ..Default::default()
        },
    };
    let Some(r) = raw else { return Ok(plan) };
    let span = r.span();
    let r = r.get_ref();
    if let Some(s) = &r.sizes {
        let mut v = Vec::new();
        for &n in s {
            if n < 1 {
                return Err(ctx.err(
                    span.clone(),
                    "reliability.sizes",
                    format!("{n}: a calibration size is a positive whole number"),
                ));
            }
            v.push(n as usize);
        }
        plan.sizes = Some(v);
    }
    if let Some(m) = &r.methods {
        for id in m {
            if !ids.contains(id) {
                return Err(ctx.err(
                    span.clone(),
                    "reliability.methods",
                    format!(
                        "`{id}` is not one of the suite's methods ({})",
                        all.join(", ")
                    ),
                ));
            }
        }
        let wanted: BTreeSet<&String> = m.iter().collect();
        plan.methods = all.into_iter().filter(|id| wanted.contains(id)).collect();
    }
    if let Some(d) = r.band_draws {
        if !(10..=10_000).contains(&d) {
            return Err(ctx.err(
                span.clone(),
                "reliability.band_draws",
                format!("{d}: expected 10 to 10000 label draws"),
            ));
        }
        plan.band.draws = d as usize;
    }
    if let Some(l) = r.band_level {
        if !(l > 0.5 && l < 1.0) {
            return Err(ctx.err(
                span,
                "reliability.band_level",
                format!("{l}: expected a level between 0.5 and 1"),
            ));
        }
        plan.band.level = l;
    }
    Ok(plan)
}
