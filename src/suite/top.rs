//! The top-level keys of a suite: name, seed, repeats, sizes, the policies
//! (`too_large`, `on_fit_failure`), the interval settings, metrics, the test
//! set, the protocol study and the reference method.

use std::collections::BTreeSet;

use serde::Deserialize;
use toml::Spanned;

use super::interval::{self, known_intervals, IntervalSettingError};
use super::{
    check_name, quoted, Ctx, FitFailurePolicy, MethodEntry, RawSuite, StudyPlan, SuiteError,
    TestSetRule, TooLarge, DEFAULT_CONFIDENCE, DEFAULT_TEST_FRACTION,
};
use crate::metrics::MetricId;
use crate::stats::paired::IntervalKind;

/// The `[protocol_study]` table as written.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawStudy {
    test_rows: i64,
    #[serde(default)]
    fractions: Option<Vec<f64>>,
    #[serde(default)]
    folds: Option<i64>,
}

/// The `[test_set]` table as written.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawTestSet {
    #[serde(default)]
    fraction: Option<Spanned<f64>>,
    #[serde(default)]
    rows: Option<Spanned<i64>>,
}

/// The checked scalar keys of the top level.
pub(super) struct Top {
    pub name: String,
    pub seed: u64,
    pub repeats: usize,
    /// Ascending, distinct, each at least 2.
    pub sizes: Vec<usize>,
    pub too_large: TooLarge,
    pub on_fit_failure: FitFailurePolicy,
    pub confidence: f64,
    pub interval: IntervalKind,
    pub metrics: Vec<MetricId>,
    pub primary: MetricId,
}

/// Check `name`, `seed`, `repeats`, `sizes`, `too_large`, `on_fit_failure`,
/// `confidence`, `interval`, `metrics` and `primary_metric`, in that order.
pub(super) fn read_top(ctx: &Ctx, raw: &RawSuite) -> Result<Top, SuiteError> {
    let name = raw.name.get_ref().clone();
    if let Err(why) = check_name(&name) {
        return Err(ctx.err(
            raw.name.span(),
            "name",
            format!(
                "{}: {why} (the suite name is the results folder's name)",
                quoted(&name)
            ),
        ));
    }
    let seed = *raw.seed.get_ref();
    if seed < 0 {
        return Err(ctx.err(
            raw.seed.span(),
            "seed",
            format!("{seed}: the seed must be a non-negative integer"),
        ));
    }
    let repeats = *raw.repeats.get_ref();
    if !(2..=100_000).contains(&repeats) {
        return Err(ctx.err(
            raw.repeats.span(),
            "repeats",
            format!(
                "{repeats}: need between 2 and 100000 repeats (a paired interval needs at least 2)"
            ),
        ));
    }
    let sizes = read_sizes(ctx, &raw.sizes)?;
    let too_large = match &raw.too_large {
        None => TooLarge::Reject,
        Some(s) => match s.get_ref().as_str() {
            "reject" => TooLarge::Reject,
            "skip" => TooLarge::Skip,
            other => {
                return Err(ctx.err(
                    s.span(),
                    "too_large",
                    format!("`{other}`: expected \"reject\" or \"skip\""),
                ))
            }
        },
    };
    let on_fit_failure = match &raw.on_fit_failure {
        None => FitFailurePolicy::default(),
        Some(s) => FitFailurePolicy::parse(s.get_ref()).ok_or_else(|| {
            ctx.err(
                s.span(),
                "on_fit_failure",
                format!(
                    "`{}`: expected \"fallback\", \"drop\" or \"stop\"",
                    s.get_ref()
                ),
            )
        })?,
    };
    let confidence = match &raw.confidence {
        None => DEFAULT_CONFIDENCE,
        Some(c) => interval::check_confidence(*c.get_ref())
            .map_err(|e| ctx.err(c.span(), "confidence", format!("{e}, e.g. 0.95")))?,
    };
    let interval = match &raw.interval {
        None => IntervalKind::default(),
        Some(s) => interval::check_interval(s.get_ref()).map_err(|e| {
            let message = match e {
                IntervalSettingError::Interval(id) => {
                    format!("`{id}`: known interval estimators: {}", known_intervals())
                }
                other => other.to_string(),
            };
            ctx.err(s.span(), "interval", message)
        })?,
    };
    let (metrics, primary) = read_metrics(ctx, raw)?;
    Ok(Top {
        name,
        seed: seed as u64,
        repeats: repeats as usize,
        sizes,
        too_large,
        on_fit_failure,
        confidence,
        interval,
        metrics,
        primary,
    })
}

/// The calibration sizes: at least one, each at least 2, none twice; sorted.
fn read_sizes(ctx: &Ctx, raw: &Spanned<Vec<Spanned<i64>>>) -> Result<Vec<usize>, SuiteError> {
    let mut sizes: Vec<usize> = Vec::new();
    let mut seen = BTreeSet::new();
    if raw.get_ref().is_empty() {
        return Err(ctx.err(raw.span(), "sizes", "list at least one calibration size"));
    }
    for s in raw.get_ref() {
        let v = *s.get_ref();
        if v < 2 {
            return Err(ctx.err(
                s.span(),
                "sizes",
                format!("{v}: a calibration size must be at least 2"),
            ));
        }
        if !seen.insert(v) {
            return Err(ctx.err(s.span(), "sizes", format!("{v} is listed twice")));
        }
        sizes.push(v as usize);
    }
    sizes.sort_unstable();
    Ok(sizes)
}

/// `metrics` (known ids, none twice, at least one) and `primary_metric`
/// (one of them).
fn read_metrics(ctx: &Ctx, raw: &RawSuite) -> Result<(Vec<MetricId>, MetricId), SuiteError> {
    let mut metrics = Vec::new();
    for m in raw.metrics.get_ref() {
        let id = MetricId::parse(m.get_ref()).ok_or_else(|| {
            let known: Vec<_> = MetricId::ALL.iter().map(|m| m.as_str()).collect();
            ctx.err(
                m.span(),
                "metrics",
                format!(
                    "`{}` is not a metric; known: {}",
                    m.get_ref(),
                    known.join(", ")
                ),
            )
        })?;
        if metrics.contains(&id) {
            return Err(ctx.err(
                m.span(),
                "metrics",
                format!("`{}` is listed twice", m.get_ref()),
            ));
        }
        metrics.push(id);
    }
    if metrics.is_empty() {
        return Err(ctx.err(raw.metrics.span(), "metrics", "list at least one metric"));
    }
    // An id at one threshold (`threshold_cost@0.2`) may name a metric that
    // `[metric_settings]` expands from its plain id; `settings::expand_thresholds`
    // checks it against the expanded list.
    let primary = MetricId::parse(raw.primary_metric.get_ref())
        .filter(|m| {
            metrics.contains(m)
                || (m.uses_decision_threshold()
                    && (metrics.contains(&MetricId::ThresholdCost)
                        || metrics.contains(&MetricId::NetBenefit)))
        })
        .ok_or_else(|| {
            ctx.err(
                raw.primary_metric.span(),
                "primary_metric",
                format!(
                    "`{}` must be one of the suite's metrics ({})",
                    raw.primary_metric.get_ref(),
                    metrics
                        .iter()
                        .map(|m| m.as_str())
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
            )
        })?;
    Ok((metrics, primary))
}

/// The `[test_set]` table: exactly one of `fraction` (strictly between 0
/// and 1) or `rows` (at least 1); by default [`DEFAULT_TEST_FRACTION`].
pub(super) fn read_test_set(
    ctx: &Ctx,
    raw: Option<&Spanned<RawTestSet>>,
) -> Result<TestSetRule, SuiteError> {
    let Some(t) = raw else {
        return Ok(TestSetRule::Fraction(DEFAULT_TEST_FRACTION));
    };
    let ts = t.get_ref();
    match (&ts.fraction, &ts.rows) {
        (Some(f), None) => {
            let v = *f.get_ref();
            if !(v > 0.0 && v < 1.0) {
                return Err(ctx.err(
                    f.span(),
                    "test_set.fraction",
                    format!("{v}: expected a share strictly between 0 and 1"),
                ));
            }
            Ok(TestSetRule::Fraction(v))
        }
        (None, Some(r)) => {
            let v = *r.get_ref();
            if v < 1 {
                return Err(ctx.err(
                    r.span(),
                    "test_set.rows",
                    format!("{v}: need at least one test row"),
                ));
            }
            Ok(TestSetRule::Rows(v as usize))
        }
        _ => Err(ctx.err(
            t.span(),
            "test_set",
            "give exactly one of `fraction` or `rows`",
        )),
    }
}

/// The `[protocol_study]` table, if any.
pub(super) fn read_study(
    ctx: &Ctx,
    raw: Option<&Spanned<RawStudy>>,
) -> Result<Option<StudyPlan>, SuiteError> {
    let Some(st) = raw else { return Ok(None) };
    let r = st.get_ref();
    if r.test_rows < 10 {
        return Err(ctx.err(
            st.span(),
            "protocol_study.test_rows",
            format!("{}: need at least 10 test rows", r.test_rows),
        ));
    }
    let fractions = r
        .fractions
        .clone()
        .unwrap_or_else(|| vec![0.05, 0.1, 0.2, 0.3]);
    if fractions.is_empty() || fractions.iter().any(|f| !(*f > 0.0 && *f < 1.0)) {
        return Err(ctx.err(
            st.span(),
            "protocol_study.fractions",
            format!("{fractions:?}: each calibration fraction must lie strictly between 0 and 1"),
        ));
    }
    let folds = r.folds.unwrap_or(5);
    if !(2..=50).contains(&folds) {
        return Err(ctx.err(
            st.span(),
            "protocol_study.folds",
            format!("{folds}: need between 2 and 50 folds"),
        ));
    }
    Ok(Some(StudyPlan {
        test_rows: r.test_rows as usize,
        fractions,
        folds: folds as usize,
    }))
}

/// The `reference` method: one of the suite's methods, or in a protocol
/// study the cross-fitted variant (and then not written).
pub(super) fn read_reference(
    ctx: &Ctx,
    raw: Option<&Spanned<String>>,
    study: Option<&StudyPlan>,
    methods: &[MethodEntry],
    method_ids: &BTreeSet<String>,
) -> Result<String, SuiteError> {
    match (raw, study) {
        (Some(r), Some(st)) => Err(ctx.err(
            r.span(),
            "reference",
            format!(
                "in a protocol study the reference is the cross-fitted variant (`{}`); remove `reference`",
                st.reference()
            ),
        )),
        (None, Some(st)) => Ok(st.reference()),
        (None, None) => Err(ctx.err(
            0..0,
            "reference",
            "missing key `reference` (the method paired differences are taken against)",
        )),
        (Some(r), None) => {
            if !method_ids.contains(r.get_ref()) {
                return Err(ctx.err(
                    r.span(),
                    "reference",
                    format!(
                        "`{}` is not one of the suite's methods ({})",
                        r.get_ref(),
                        methods
                            .iter()
                            .map(|e| e.id.as_str())
                            .collect::<Vec<_>>()
                            .join(", ")
                    ),
                ));
            }
            Ok(r.get_ref().clone())
        }
    }
}
