//! Suite files: the TOML that says what to compare, parsed into a validated
//! [`Plan`] before any work starts.
//!
//! Parsing goes in two steps, in the spirit of checked parameters: the raw TOML
//! is read into structs that reject unknown keys and wrong types (the TOML
//! parser reports the line and column), then every cross-field rule is checked
//! (reference method in the method list, primary metric among the metrics,
//! sizes within each task's reservoir, unique ids) with the line of the
//! offending key in the message. Score files are read and validated here too, so
//! `plumbline check` catches bad data before a run.
//!
//! The schema is documented for users in `docs/suite-format.md`.

use std::collections::BTreeSet;
use std::path::{Path, PathBuf};

use serde::Deserialize;
use sha2::{Digest, Sha256};
use toml::Spanned;

use crate::calibrate::{MethodSpec, ScoreKind};
use crate::data::open;
use crate::data::scorefile::{self, ScoreFileSpec};
use crate::data::{ScorePool, Side};
use crate::metrics::{MetricId, MetricSettings};
use crate::models::{protocol::Protocol, ModelSpec};
use crate::split;
use crate::stats::paired::IntervalKind;

/// A problem with a suite, located in its file: `FILE:LINE:COLUMN: KEY:
/// MESSAGE`. A problem with the file as a whole (it cannot be read, it is
/// too large, it is not UTF-8) has `line` 0 and no key, and reads `FILE:
/// MESSAGE`, without a position.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub struct SuiteError {
    pub file: String,
    /// 1-based; 0 for the whole file.
    pub line: usize,
    pub column: usize,
    pub key: String,
    pub message: String,
}

impl std::fmt::Display for SuiteError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        if self.line == 0 {
            write!(f, "{}: {}", self.file, self.message)
        } else {
            write!(
                f,
                "{}:{}:{}: {}: {}",
                self.file, self.line, self.column, self.key, self.message
            )
        }
    }
}

impl SuiteError {
    /// A problem with the whole file (no position).
    fn whole_file(file: &str, message: String) -> SuiteError {
        SuiteError {
            file: file.to_string(),
            line: 0,
            column: 0,
            key: String::new(),
            message,
        }
    }
}

/// Where a byte offset sits in a text: 1-based line and column.
pub fn line_col(text: &str, offset: usize) -> (usize, usize) {
    let offset = offset.min(text.len());
    let before = &text[..offset];
    let line = before.matches('\n').count() + 1;
    let col = before.rfind('\n').map(|i| offset - i).unwrap_or(offset + 1);
    (line, col)
}

struct Ctx<'a> {
    file: String,
    text: &'a str,
}

impl Ctx<'_> {
    fn err(
        &self,
        span: std::ops::Range<usize>,
        key: &str,
        message: impl Into<String>,
    ) -> SuiteError {
        let (line, column) = line_col(self.text, span.start);
        SuiteError {
            file: self.file.clone(),
            line,
            column,
            key: key.to_string(),
            message: message.into(),
        }
    }
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSuite {
    name: Spanned<String>,
    seed: Spanned<i64>,
    repeats: Spanned<i64>,
    sizes: Spanned<Vec<Spanned<i64>>>,
    #[serde(default)]
    too_large: Option<Spanned<String>>,
    #[serde(default)]
    on_fit_failure: Option<Spanned<String>>,
    #[serde(default)]
    confidence: Option<Spanned<f64>>,
    #[serde(default)]
    interval: Option<Spanned<String>>,
    #[serde(default)]
    reference: Option<Spanned<String>>,
    #[serde(default)]
    protocol_study: Option<Spanned<RawStudy>>,
    metrics: Spanned<Vec<Spanned<String>>>,
    primary_metric: Spanned<String>,
    #[serde(default)]
    metric_settings: Option<Spanned<toml::Table>>,
    #[serde(default)]
    test_set: Option<Spanned<RawTestSet>>,
    #[serde(default)]
    method: Vec<Spanned<toml::Table>>,
    #[serde(default)]
    threshold_pairs: Option<Spanned<Vec<(String, String)>>>,
    #[serde(default)]
    reliability: Option<Spanned<RawReliability>>,
    #[serde(default)]
    decision: Option<Spanned<RawDecision>>,
    #[serde(default)]
    open_data: Option<Spanned<String>>,
    #[serde(default)]
    model: Vec<Spanned<toml::Table>>,
    #[serde(default)]
    task: Vec<Spanned<toml::Table>>,
    #[serde(default)]
    task_grid: Vec<Spanned<toml::Table>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawStudy {
    test_rows: i64,
    #[serde(default)]
    fractions: Option<Vec<f64>>,
    #[serde(default)]
    folds: Option<i64>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawReliability {
    #[serde(default)]
    sizes: Option<Vec<i64>>,
    #[serde(default)]
    methods: Option<Vec<String>>,
    #[serde(default)]
    band_draws: Option<i64>,
    #[serde(default)]
    band_level: Option<f64>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawDecision {
    #[serde(default)]
    margin: Option<Spanned<f64>>,
    #[serde(default)]
    absolute_margins: Option<std::collections::BTreeMap<String, Spanned<f64>>>,
    #[serde(default)]
    max_fallback: Option<Spanned<f64>>,
}

/// The equivalence margin of the verdicts (the `[decision]` table): a share
/// of the reference method's mean value at each task and size, or an
/// absolute margin per metric.
#[derive(Debug, Clone, PartialEq)]
pub struct DecisionPlan {
    pub margin: f64,
    pub absolute_margins: std::collections::BTreeMap<String, f64>,
    /// Largest share of a method's draws at a size that may fall back to the
    /// base rate for the method to be recommended there.
    pub max_fallback: f64,
}

impl Default for DecisionPlan {
    fn default() -> Self {
        DecisionPlan {
            margin: crate::analysis::DEFAULT_MARGIN,
            absolute_margins: Default::default(),
            max_fallback: crate::analysis::DEFAULT_MAX_FALLBACK,
        }
    }
}

/// Largest relative margin accepted: beyond half the reference's mean, two
/// methods called equivalent could differ by more than either's own loss
/// scale suggests is negligible.
pub const MAX_MARGIN: f64 = 0.5;

/// Which units carry reliability curves (the `[reliability]` table): repeat 0
/// of each task at `sizes` (default: the task's smallest and largest size),
/// for `methods` (default: every method).
#[derive(Debug, Clone, PartialEq)]
pub struct ReliabilityPlan {
    pub sizes: Option<Vec<usize>>,
    pub methods: Vec<String>,
    pub band: crate::metrics::reliability::BandSettings,
}

impl ReliabilityPlan {
    /// The sizes of one task whose repeat 0 carries curves.
    pub fn sizes_for(&self, task_sizes: &[usize]) -> Vec<usize> {
        match &self.sizes {
            Some(s) => task_sizes
                .iter()
                .copied()
                .filter(|n| s.contains(n))
                .collect(),
            None => {
                let mut v: Vec<usize> = task_sizes
                    .first()
                    .into_iter()
                    .chain(task_sizes.last())
                    .copied()
                    .collect();
                v.dedup();
                v
            }
        }
    }
}

/// A protocol study: at each labelled budget N (the suite's `sizes`), held-out
/// calibration with each fraction f against cross-fitting with K folds, all on
/// one fixed test set per dataset.
#[derive(Debug, Clone, PartialEq)]
pub struct StudyPlan {
    pub test_rows: usize,
    pub fractions: Vec<f64>,
    pub folds: usize,
}

impl StudyPlan {
    /// The variant every other one is compared with.
    pub fn reference(&self) -> String {
        format!("cross-fitted-{}", self.folds)
    }
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawOpenTask {
    id: String,
    data: String,
    model: String,
    #[serde(default)]
    protocol: Option<Protocol>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawGrid {
    data: toml::Value,
    models: Vec<String>,
    #[serde(default)]
    protocol: Option<Protocol>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawTestSet {
    #[serde(default)]
    fraction: Option<Spanned<f64>>,
    #[serde(default)]
    rows: Option<Spanned<i64>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawScoreTask {
    id: String,
    scores: String,
    score_column: String,
    label_column: String,
    score_kind: ScoreKind,
    #[serde(default)]
    split_column: Option<String>,
    #[serde(default)]
    truth_column: Option<String>,
}

/// How the fixed test set is chosen when a task does not pin its rows.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum TestSetRule {
    /// This share of the pool's rows (rounded to the nearest row).
    Fraction(f64),
    /// Exactly this many rows.
    Rows(usize),
}

impl TestSetRule {
    pub fn rows(&self, pool: usize) -> usize {
        match *self {
            TestSetRule::Fraction(f) => ((pool as f64) * f).round() as usize,
            TestSetRule::Rows(r) => r,
        }
    }
    pub fn describe(&self) -> String {
        match *self {
            TestSetRule::Fraction(f) => format!("fraction {f}"),
            TestSetRule::Rows(r) => format!("{r} rows"),
        }
    }
}

/// What to do with a calibration size larger than a task's reservoir.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TooLarge {
    /// Reject the suite (the default: a typo in `sizes` should not pass silently).
    Reject,
    /// Skip that size for that task and say so in the plan.
    Skip,
}

/// What a unit does when a method cannot fit its calibration sample (one
/// class, too few distinct scores, a fit that fails): the suite key
/// `on_fit_failure`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum FitFailurePolicy {
    /// Every draw counts: the method predicts the smoothed base rate
    /// (k + 1)/(n + 2) of the calibration sample (k positives of n rows) and
    /// the unit's status is `fallback:base-rate`.
    #[default]
    Fallback,
    /// The unit keeps no values for that method (status `one_class` or
    /// `failed`) and the comparison loses that repeat; the run warns.
    Drop,
    /// The run stops at the first such fit, naming task, size, repeat,
    /// method and reason, and writes no results.
    Stop,
}

impl FitFailurePolicy {
    pub const ALL: [FitFailurePolicy; 3] = [Self::Fallback, Self::Drop, Self::Stop];
    pub fn as_str(self) -> &'static str {
        match self {
            Self::Fallback => "fallback",
            Self::Drop => "drop",
            Self::Stop => "stop",
        }
    }
    pub fn parse(s: &str) -> Option<Self> {
        Self::ALL.into_iter().find(|p| p.as_str() == s)
    }
}

/// A method as used in a run: the suite's id and its checked spec.
#[derive(Debug, Clone, PartialEq)]
pub struct MethodEntry {
    pub id: String,
    pub spec: MethodSpec,
}

/// Where a task's scores come from.
#[derive(Debug, Clone)]
pub enum TaskSource {
    ScoreFile(ScoreFileSpec),
    /// An open dataset task turned into scores by a base model.
    Open {
        data_dir: PathBuf,
        data: String,
        model_id: String,
        model: ModelSpec,
        protocol: Protocol,
    },
}

/// The protocol used when a task names none.
pub fn default_protocol() -> Protocol {
    Protocol::HeldOut {
        train_fraction: 0.5,
    }
}

/// A task ready to run: its pool, partition and sizes.
#[derive(Debug, Clone)]
pub struct TaskPlan {
    pub id: String,
    pub source: TaskSource,
    pub score_kind: ScoreKind,
    /// SHA-256 of the task's input data (the score file's bytes, or the open
    /// dataset's digest).
    pub data_sha256: String,
    /// The scores; empty for an open-data task until its pool is built
    /// (`run::pools::resolve`).
    pub pool: ScorePool,
    /// Rows and positives of the task's data (known before the pool is built).
    pub rows: usize,
    pub positives: usize,
    /// Reservoir and test-set sizes (known before the pool is built).
    pub reservoir_rows: usize,
    pub test_rows: usize,
    pub truth: Option<Vec<f64>>,
    /// Pool row indices of the calibration reservoir, ascending.
    pub reservoir: Vec<usize>,
    /// Pool row indices of the fixed test set, ascending.
    pub test: Vec<usize>,
    /// Calibration sizes run for this task, ascending.
    pub sizes: Vec<usize>,
    /// Sizes of the suite skipped here because they exceed the reservoir.
    pub skipped_sizes: Vec<usize>,
}

/// A validated suite.
#[derive(Debug, Clone)]
pub struct Plan {
    pub suite_file: PathBuf,
    pub suite_sha256: String,
    pub name: String,
    pub seed: u64,
    pub repeats: usize,
    pub confidence: f64,
    pub interval: String,
    pub reference: String,
    pub metrics: Vec<MetricId>,
    pub primary: MetricId,
    pub metric_settings: MetricSettings,
    /// What a unit does when a method cannot fit (`on_fit_failure`).
    pub on_fit_failure: FitFailurePolicy,
    pub test_set: TestSetRule,
    pub methods: Vec<MethodEntry>,
    /// (flexible, parametric) method pairs whose data-size thresholds are reported.
    pub pairs: Vec<(String, String)>,
    /// Set for a protocol study (then `sizes` are labelled budgets).
    pub study: Option<StudyPlan>,
    /// Reliability curves written with the results.
    pub reliability: ReliabilityPlan,
    /// The equivalence margin of the verdicts.
    pub decision: DecisionPlan,
    pub tasks: Vec<TaskPlan>,
}

/// Method kinds that adapt their shape to the data.
pub const FLEXIBLE_KINDS: &[&str] = &[
    "isotonic",
    "centered-isotonic",
    "binning",
    "venn-abers",
    "spline",
];
/// Method kinds with a fixed parametric shape that the threshold pairs use by default.
pub const PARAMETRIC_KINDS: &[&str] = &["platt", "beta"];

/// The most threshold pairs a suite gets by default: the default pairs are
/// every flexible method against every parametric one, a list that grows with
/// the product of the two counts; a suite with more lists its pairs.
pub const MAX_DEFAULT_PAIRS: usize = 10_000;

/// Default threshold pairs: every flexible method against every Platt or beta method.
pub fn default_pairs(methods: &[MethodEntry]) -> Vec<(String, String)> {
    let mut out = Vec::new();
    for f in methods
        .iter()
        .filter(|m| FLEXIBLE_KINDS.contains(&m.spec.kind()))
    {
        for p in methods
            .iter()
            .filter(|m| PARAMETRIC_KINDS.contains(&m.spec.kind()))
        {
            out.push((f.id.clone(), p.id.clone()));
        }
    }
    out
}

impl Plan {
    /// Number of units (task × size × repeat).
    pub fn unit_count(&self) -> usize {
        self.tasks
            .iter()
            .map(|t| t.sizes.len() * self.repeats)
            .sum()
    }
    /// Number of method fits (units × methods).
    pub fn fit_count(&self) -> usize {
        self.unit_count() * self.methods.len()
    }
}

pub const DEFAULT_CONFIDENCE: f64 = 0.95;
pub const DEFAULT_TEST_FRACTION: f64 = 0.3;

/// Read, parse and validate a suite file.
pub fn load(path: &Path) -> Result<Plan, SuiteError> {
    let (text, sha) = read_text(path)?;
    parse(&text, path, sha)
}

/// A suite file's text and the SHA-256 (hex) of its bytes.
fn read_text(path: &Path) -> Result<(String, String), SuiteError> {
    let file = path.display().to_string();
    let bytes = crate::limits::read_bounded(path, &crate::limits::MAX_SUITE)
        .map_err(|e| SuiteError::whole_file(&file, format!("cannot read the suite: {e}")))?;
    let sha = hex(&Sha256::digest(&bytes));
    let text = String::from_utf8(bytes)
        .map_err(|e| SuiteError::whole_file(&file, format!("the suite is not UTF-8 text: {e}")))?;
    Ok((text, sha))
}

/// SHA-256 (hex) of a file's bytes, read in blocks (constant memory). Only
/// regular files: a pipe or device would give other bytes than the ones
/// loaded, or none.
pub fn file_sha256(path: &Path) -> std::io::Result<String> {
    use std::io::Read;
    let mut f = std::fs::File::open(path)?;
    if !f.metadata()?.is_file() {
        return Err(std::io::Error::new(
            std::io::ErrorKind::InvalidInput,
            "not a regular file (a suite's score files are hashed into the results, so they must be files)",
        ));
    }
    let mut h = Sha256::new();
    let mut buf = vec![0u8; 1 << 16];
    loop {
        let n = f.read(&mut buf)?;
        if n == 0 {
            break;
        }
        h.update(&buf[..n]);
    }
    Ok(hex(&h.finalize()))
}

pub fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}

fn toml_err(ctx: &Ctx, e: &toml::de::Error, key_hint: &str) -> SuiteError {
    let span = e.span().unwrap_or(0..0);
    let msg = e.message().trim().to_string();
    // Name the key written on the offending line (or its table header).
    let start = ctx.text[..span.start.min(ctx.text.len())]
        .rfind('\n')
        .map(|i| i + 1)
        .unwrap_or(0);
    let line = ctx.text[start..].lines().next().unwrap_or("").trim();
    let key = if line.starts_with('[') {
        line.to_string()
    } else if let Some((k, _)) = line.split_once('=') {
        k.trim().to_string()
    } else {
        key_hint.to_string()
    };
    ctx.err(span, &key, msg)
}

/// Parse suite text; `path` locates relative data files (and names the file in errors).
pub fn parse(text: &str, path: &Path, sha256: String) -> Result<Plan, SuiteError> {
    let ctx = Ctx {
        file: path.display().to_string(),
        text,
    };
    let raw: RawSuite = toml::from_str(text).map_err(|e| toml_err(&ctx, &e, "(suite)"))?;
    let base = path.parent().map(Path::to_path_buf).unwrap_or_default();

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
    let mut sizes: Vec<usize> = Vec::new();
    let mut seen = BTreeSet::new();
    if raw.sizes.get_ref().is_empty() {
        return Err(ctx.err(
            raw.sizes.span(),
            "sizes",
            "list at least one calibration size",
        ));
    }
    for s in raw.sizes.get_ref() {
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
        Some(c) => {
            let v = *c.get_ref();
            if !(v > 0.5 && v < 1.0) {
                return Err(ctx.err(
                    c.span(),
                    "confidence",
                    format!("{v}: expected a level between 0.5 and 1, e.g. 0.95"),
                ));
            }
            v
        }
    };
    let interval = match &raw.interval {
        None => IntervalKind::default().as_str().to_string(),
        Some(s) => match IntervalKind::parse(s.get_ref()) {
            Some(k) => k.as_str().to_string(),
            None => {
                let known: Vec<_> = IntervalKind::ALL.iter().map(|k| k.as_str()).collect();
                return Err(ctx.err(
                    s.span(),
                    "interval",
                    format!(
                        "`{}`: known interval estimators: {}",
                        s.get_ref(),
                        known.join(", ")
                    ),
                ));
            }
        },
    };

    // Metrics.
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
    let primary = MetricId::parse(raw.primary_metric.get_ref())
        .filter(|m| metrics.contains(m))
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
    let metric_settings = match &raw.metric_settings {
        None => MetricSettings::default(),
        Some(t) => {
            let s: MetricSettings = toml::Value::Table(t.get_ref().clone()).try_into().map_err(
                |e: toml::de::Error| {
                    ctx.err(t.span(), "metric_settings", e.message().trim().to_string())
                },
            )?;
            if let Err(e) = s.validate() {
                return Err(ctx.err(
                    t.span(),
                    &format!("metric_settings.{}", e.key),
                    e.to_string(),
                ));
            }
            s
        }
    };
    let test_set = match &raw.test_set {
        None => TestSetRule::Fraction(DEFAULT_TEST_FRACTION),
        Some(t) => {
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
                    TestSetRule::Fraction(v)
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
                    TestSetRule::Rows(v as usize)
                }
                _ => {
                    return Err(ctx.err(
                        t.span(),
                        "test_set",
                        "give exactly one of `fraction` or `rows`",
                    ))
                }
            }
        }
    };

    // Methods.
    let methods = read_methods(&ctx, &raw.method)?;
    let method_ids: BTreeSet<String> = methods.iter().map(|(m, _)| m.id.clone()).collect();
    let study = match &raw.protocol_study {
        None => None,
        Some(st) => {
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
                return Err(ctx.err(st.span(), "protocol_study.fractions", format!("{fractions:?}: each calibration fraction must lie strictly between 0 and 1")));
            }
            let folds = r.folds.unwrap_or(5);
            if !(2..=50).contains(&folds) {
                return Err(ctx.err(
                    st.span(),
                    "protocol_study.folds",
                    format!("{folds}: need between 2 and 50 folds"),
                ));
            }
            Some(StudyPlan {
                test_rows: r.test_rows as usize,
                fractions,
                folds: folds as usize,
            })
        }
    };
    let reference = match (&raw.reference, &study) {
        (Some(r), Some(st)) => {
            return Err(ctx.err(
                r.span(),
                "reference",
                format!("in a protocol study the reference is the cross-fitted variant (`{}`); remove `reference`", st.reference()),
            ))
        }
        (None, Some(st)) => st.reference(),
        (None, None) => return Err(ctx.err(0..0, "reference", "missing key `reference` (the method paired differences are taken against)")),
        (Some(r), None) => {
            if !method_ids.contains(r.get_ref()) {
                return Err(ctx.err(
                    r.span(),
                    "reference",
                    format!(
                        "`{}` is not one of the suite's methods ({})",
                        r.get_ref(),
                        methods.iter().map(|(e, _)| e.id.as_str()).collect::<Vec<_>>().join(", ")
                    ),
                ));
            }
            r.get_ref().clone()
        }
    };

    let method_entries: Vec<MethodEntry> = methods.iter().map(|(m, _)| m.clone()).collect();
    let pairs = match &raw.threshold_pairs {
        // A protocol study reports no thresholds.
        None if study.is_some() => Vec::new(),
        None => {
            let flexible = method_entries
                .iter()
                .filter(|m| FLEXIBLE_KINDS.contains(&m.spec.kind()))
                .count();
            let parametric = method_entries
                .iter()
                .filter(|m| PARAMETRIC_KINDS.contains(&m.spec.kind()))
                .count();
            if flexible * parametric > MAX_DEFAULT_PAIRS {
                return Err(ctx.err(
                    0..0,
                    "threshold_pairs",
                    format!(
                        "{flexible} flexible and {parametric} Platt or beta methods make {} default threshold pairs (more than {MAX_DEFAULT_PAIRS}); list the pairs to report in `threshold_pairs`",
                        flexible * parametric
                    ),
                ));
            }
            default_pairs(&method_entries)
        }
        Some(p) => {
            for (a, b) in p.get_ref() {
                for id in [a, b] {
                    if !method_ids.contains(id) {
                        return Err(ctx.err(
                            p.span(),
                            "threshold_pairs",
                            format!("`{id}` is not one of the suite's methods"),
                        ));
                    }
                }
                if a == b {
                    return Err(ctx.err(
                        p.span(),
                        "threshold_pairs",
                        format!("[\"{a}\", \"{b}\"] compares a method with itself"),
                    ));
                }
            }
            p.get_ref().clone()
        }
    };

    let reliability = reliability_plan(
        &ctx,
        raw.reliability.as_ref(),
        &method_entries,
        &method_ids,
        confidence,
    )?;
    let decision = decision_plan(&ctx, raw.decision.as_ref(), &metrics)?;

    // Tasks.
    if raw.task.is_empty() && raw.task_grid.is_empty() {
        return Err(ctx.err(
            0..0,
            "task",
            "the suite lists no [[task]] or [[task_grid]] tables",
        ));
    }
    // Models (for open-data tasks).
    let mut models: Vec<(String, ModelSpec)> = Vec::new();
    let mut model_index: std::collections::BTreeMap<String, usize> = Default::default();
    for (i, m) in raw.model.iter().enumerate() {
        let mut table = m.get_ref().clone();
        let label = format!("model #{}", i + 1);
        let id = take_id(&ctx, &mut table, m.span(), &label)?;
        let spec: ModelSpec =
            toml::Value::Table(table)
                .try_into()
                .map_err(|e: toml::de::Error| {
                    ctx.err(
                        m.span(),
                        &format!("model `{id}`"),
                        e.message().trim().to_string(),
                    )
                })?;
        spec.validate()
            .map_err(|e| ctx.err(m.span(), &format!("model `{id}`"), e.to_string()))?;
        if model_index.contains_key(&id) {
            return Err(ctx.err(
                m.span(),
                &format!("model `{id}`"),
                "this id is used by another model",
            ));
        }
        model_index.insert(id.clone(), models.len());
        models.push((id, spec));
    }
    let data_dir = match &raw.open_data {
        Some(p) => base.join(p.get_ref()),
        None => base.join("..").join(open::DEFAULT_DATA_DIR),
    };
    let open_span = raw.open_data.as_ref().map(|p| p.span()).unwrap_or(0..0);

    // Expand [[task]] and [[task_grid]] into one list of specs.
    enum Spec {
        File(RawScoreTask),
        Open(RawOpenTask),
    }
    let mut specs: Vec<(Spec, std::ops::Range<usize>, String)> = Vec::new();
    for (i, t) in raw.task.iter().enumerate() {
        let label = format!("task #{}", i + 1);
        let table = t.get_ref();
        let de_err = |e: toml::de::Error| ctx.err(t.span(), &label, e.message().trim().to_string());
        let spec = if table.contains_key("scores") {
            Spec::File(
                toml::Value::Table(table.clone())
                    .try_into()
                    .map_err(de_err)?,
            )
        } else if table.contains_key("data") {
            Spec::Open(
                toml::Value::Table(table.clone())
                    .try_into()
                    .map_err(de_err)?,
            )
        } else {
            return Err(ctx.err(
                t.span(),
                &label,
                "a task needs `scores` (a score file) or `data` (an open dataset task)",
            ));
        };
        specs.push((spec, t.span(), label));
    }
    // The open-data folder is listed once and shared (not copied per task).
    let mut open_tasks: Option<std::rc::Rc<Vec<open::TaskSummary>>> = None;
    let mut list_open =
        |span: std::ops::Range<usize>| -> Result<std::rc::Rc<Vec<open::TaskSummary>>, SuiteError> {
            if open_tasks.is_none() {
                let l = open::list_tasks(&data_dir).map_err(|e| {
                    ctx.err(
                        if open_span.is_empty() {
                            span.clone()
                        } else {
                            open_span.clone()
                        },
                        "open_data",
                        format!("{} ({})", e, data_dir.display()),
                    )
                })?;
                open_tasks = Some(std::rc::Rc::new(l));
            }
            Ok(open_tasks.clone().unwrap_or_default())
        };
    for (i, g) in raw.task_grid.iter().enumerate() {
        let label = format!("task_grid #{}", i + 1);
        let rg: RawGrid =
            toml::Value::Table(g.get_ref().clone())
                .try_into()
                .map_err(|e: toml::de::Error| {
                    ctx.err(g.span(), &label, e.message().trim().to_string())
                })?;
        let data: Vec<String> = match &rg.data {
            toml::Value::String(s) if s == "all" => {
                list_open(g.span())?.iter().map(|t| t.id.clone()).collect()
            }
            toml::Value::Array(a) => a
                .iter()
                .map(|v| v.as_str().map(str::to_string))
                .collect::<Option<Vec<_>>>()
                .ok_or_else(|| {
                    ctx.err(
                        g.span(),
                        &format!("{label}.data"),
                        "expected a list of open-data task ids or \"all\"",
                    )
                })?,
            _ => {
                return Err(ctx.err(
                    g.span(),
                    &format!("{label}.data"),
                    "expected a list of open-data task ids or \"all\"",
                ))
            }
        };
        for d in &data {
            for m in &rg.models {
                specs.push((
                    Spec::Open(RawOpenTask {
                        id: format!("{d}.{m}"),
                        data: d.clone(),
                        model: m.clone(),
                        protocol: rg.protocol.clone(),
                    }),
                    g.span(),
                    label.clone(),
                ));
            }
        }
    }

    let mut tasks: Vec<TaskPlan> = Vec::new();
    // Task ids in lower case → the id as written, for the duplicate check.
    let mut task_ids: std::collections::BTreeMap<String, String> = Default::default();
    // Score kinds whose method parameters are already checked: every method
    // is validated once per kind, not once per task.
    let mut validated: Vec<ScoreKind> = Vec::new();
    for (spec, span, label) in specs {
        let id = match &spec {
            Spec::File(r) => r.id.clone(),
            Spec::Open(r) => r.id.clone(),
        };
        let tl = format!("task `{id}`");
        // A [[task]]'s own `id` line; a grid's table (its ids are made from
        // `data` and `models`).
        let id_span = if label.starts_with("task #") {
            key_span(ctx.text, &span, "id")
        } else {
            span.clone()
        };
        if let Err(why) = check_name(&id) {
            return Err(ctx.err(
                id_span,
                &format!("{label}.id"),
                format!("{}: {why}", quoted(&id)),
            ));
        }
        if RESERVED_TASK_IDS
            .iter()
            .any(|r| r.eq_ignore_ascii_case(&id))
        {
            return Err(ctx.err(
                id_span,
                &format!("{label}.id"),
                format!(
                    "`{id}` is reserved: the report's figures `figures/{}--<metric>.svg` would be overwritten; choose another task id",
                    id.to_ascii_lowercase()
                ),
            ));
        }
        if let Some(other) = task_ids.get(&id.to_ascii_lowercase()) {
            let why = if *other == id {
                "this id is used by another task".to_string()
            } else {
                format!(
                    "differs from task `{}` only in letter case; their figure files would clash on case-insensitive file systems",
                    other
                )
            };
            return Err(ctx.err(id_span, &format!("{tl}.id"), why));
        }
        task_ids.insert(id.to_ascii_lowercase(), id.clone());
        let score_kind = match &spec {
            Spec::File(r) => r.score_kind,
            Spec::Open(_) => ScoreKind::Probability,
        };
        if !validated.contains(&score_kind) {
            for (m, mspan) in &methods {
                m.spec.validate(score_kind).map_err(|e| {
                    ctx.err(
                        key_span(ctx.text, mspan, &e.key),
                        &format!("method `{}`", m.id),
                        format!("{e} (for {tl}, score_kind = \"{}\")", score_kind.as_str()),
                    )
                })?;
            }
            validated.push(score_kind);
        }
        let test_set_span = raw
            .test_set
            .as_ref()
            .map(|s| s.span())
            .unwrap_or(span.clone());
        let mut plan_task = match spec {
            Spec::File(rt) => {
                if study.is_some() {
                    return Err(ctx.err(span.clone(), &tl, "a protocol study needs open-data tasks (`data` and `model`), not score files"));
                }
                let fpath = base.join(&rt.scores);
                let fspec = ScoreFileSpec {
                    path: fpath.clone(),
                    score_column: rt.score_column.clone(),
                    label_column: rt.label_column.clone(),
                    score_kind: rt.score_kind,
                    split_column: rt.split_column.clone(),
                    truth_column: rt.truth_column.clone(),
                    fold_column: None,
                    origin: scorefile::Origin::Suite,
                };
                // Load first: the reader bounds lines and decompressed size,
                // so an endless or hostile file is refused before it is hashed.
                let loaded = scorefile::load(&fspec)
                    .map_err(|e| ctx.err(span.clone(), &format!("{tl}.scores"), e.to_string()))?;
                let data_sha256 = file_sha256(&fpath).map_err(|e| {
                    ctx.err(
                        span.clone(),
                        &format!("{tl}.scores"),
                        format!("{}: cannot read: {e}", fpath.display()),
                    )
                })?;
                let n = loaded.pool.scores.len();
                let positives = loaded.pool.labels.iter().filter(|&&y| y).count();
                let (reservoir, test) = match &loaded.pool.sides {
                    Some(sides) => {
                        let res = (0..n).filter(|&i| sides[i] == Side::Reservoir).collect();
                        let te = (0..n).filter(|&i| sides[i] == Side::Test).collect();
                        (res, te)
                    }
                    None => {
                        let rows = test_set.rows(n);
                        if rows == 0 || rows >= n {
                            return Err(ctx.err(
                                test_set_span,
                                "test_set",
                                format!(
                                    "{}: gives {rows} test rows for {tl}, which has {n} rows",
                                    test_set.describe()
                                ),
                            ));
                        }
                        split::partition(n, rows, split::task_seed(seed as u64, &rt.id))
                    }
                };
                TaskPlan {
                    id: rt.id.clone(),
                    source: TaskSource::ScoreFile(fspec),
                    score_kind: rt.score_kind,
                    data_sha256,
                    rows: n,
                    positives,
                    reservoir_rows: reservoir.len(),
                    test_rows: test.len(),
                    pool: loaded.pool,
                    truth: loaded.truth,
                    reservoir,
                    test,
                    sizes: Vec::new(),
                    skipped_sizes: Vec::new(),
                }
            }
            Spec::Open(ro) => {
                let list = list_open(span.clone())?;
                let summary = list.iter().find(|t| t.id == ro.data).ok_or_else(|| {
                    ctx.err(
                        span.clone(),
                        &format!("{tl}.data"),
                        format!(
                            "`{}` is not an open-data task in {}; known: {}",
                            ro.data,
                            data_dir.display(),
                            list.iter()
                                .map(|t| t.id.as_str())
                                .collect::<Vec<_>>()
                                .join(", ")
                        ),
                    )
                })?;
                let model = model_index
                    .get(&ro.model)
                    .map(|&i| models[i].1.clone())
                    .ok_or_else(|| {
                        ctx.err(
                            span.clone(),
                            &format!("{tl}.model"),
                            format!(
                                "`{}` is not one of the suite's [[model]] ids ({})",
                                ro.model,
                                models
                                    .iter()
                                    .map(|(m, _)| m.as_str())
                                    .collect::<Vec<_>>()
                                    .join(", ")
                            ),
                        )
                    })?;
                let protocol = ro.protocol.clone().unwrap_or_else(default_protocol);
                protocol
                    .validate()
                    .map_err(|e| ctx.err(span.clone(), &format!("{tl}.protocol"), e.to_string()))?;
                let n = summary.rows;
                if let (Some(_), Some(_)) = (&study, &ro.protocol) {
                    return Err(ctx.err(
                        span.clone(),
                        &format!("{tl}.protocol"),
                        "a protocol study compares the protocols itself; remove `protocol`",
                    ));
                }
                let (reservoir_rows, test_rows) = match (&study, protocol.clone()) {
                    (Some(st), _) => {
                        if st.test_rows + 4 > n {
                            return Err(ctx.err(
                                span.clone(),
                                "protocol_study.test_rows",
                                format!(
                                    "{} test rows leave too few of the {n} rows of {tl}",
                                    st.test_rows
                                ),
                            ));
                        }
                        (n - st.test_rows, st.test_rows)
                    }
                    (None, protocol) => match protocol {
                        Protocol::HeldOut { train_fraction } => {
                            let n_train = (train_fraction * n as f64).round() as usize;
                            let pool_n = n.saturating_sub(n_train);
                            let rows = test_set.rows(pool_n);
                            if rows == 0 || rows >= pool_n {
                                return Err(ctx.err(
                                test_set_span,
                                "test_set",
                                format!("{}: gives {rows} test rows for {tl}, whose held-out pool has {pool_n} rows", test_set.describe()),
                            ));
                            }
                            (pool_n - rows, rows)
                        }
                        Protocol::CrossFitted { train_fraction, .. } => {
                            let n_train = (train_fraction * n as f64).round() as usize;
                            (n_train, n - n_train)
                        }
                    },
                };
                let data_sha256 = open::dataset_digest(&data_dir, &ro.data)
                    .map_err(|e| ctx.err(span.clone(), &format!("{tl}.data"), e.to_string()))?;
                TaskPlan {
                    id: ro.id.clone(),
                    source: TaskSource::Open {
                        data_dir: data_dir.clone(),
                        data: ro.data.clone(),
                        model_id: ro.model.clone(),
                        model,
                        protocol,
                    },
                    score_kind: ScoreKind::Probability,
                    data_sha256,
                    rows: n,
                    positives: summary.positives,
                    reservoir_rows,
                    test_rows,
                    pool: ScorePool {
                        scores: Vec::new(),
                        labels: Vec::new(),
                        sides: None,
                    },
                    truth: None,
                    reservoir: Vec::new(),
                    test: Vec::new(),
                    sizes: Vec::new(),
                    skipped_sizes: Vec::new(),
                }
            }
        };
        let reservoir_len = plan_task.reservoir_rows;
        for &s in &sizes {
            if s <= reservoir_len {
                plan_task.sizes.push(s);
            } else if too_large == TooLarge::Skip {
                plan_task.skipped_sizes.push(s);
            } else {
                let sspan = raw
                    .sizes
                    .get_ref()
                    .iter()
                    .find(|x| *x.get_ref() as usize == s)
                    .map(|x| x.span())
                    .unwrap_or(0..0);
                return Err(ctx.err(
                    sspan,
                    "sizes",
                    format!("{s} is larger than the calibration reservoir of {tl} ({reservoir_len} rows); lower it or set too_large = \"skip\""),
                ));
            }
        }
        if plan_task.sizes.is_empty() {
            return Err(ctx.err(
                raw.sizes.span(),
                "sizes",
                format!("no size fits the reservoir of {tl} ({reservoir_len} rows)"),
            ));
        }
        tasks.push(plan_task);
    }

    let pairs = if study.is_some() { Vec::new() } else { pairs };
    Ok(Plan {
        suite_file: path.to_path_buf(),
        suite_sha256: sha256,
        name,
        seed: seed as u64,
        repeats: repeats as usize,
        confidence,
        interval,
        reference,
        study,
        metrics,
        primary,
        metric_settings,
        on_fit_failure,
        test_set,
        methods: method_entries,
        pairs,
        reliability,
        decision,
        tasks,
    })
}

/// Check the `[decision]` table.
fn decision_plan(
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
            if !crate::analysis::is_compared(metric.as_str()) {
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
fn reliability_plan(
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

/// The `[[method]]` tables of a suite, each with its id taken and checked and
/// its parameters read into a [`MethodSpec`], with the span of its table.
fn read_methods(
    ctx: &Ctx,
    raw: &[Spanned<toml::Table>],
) -> Result<Vec<(MethodEntry, std::ops::Range<usize>)>, SuiteError> {
    if raw.is_empty() {
        return Err(ctx.err(0..0, "method", "the suite lists no [[method]] tables"));
    }
    let mut methods: Vec<(MethodEntry, std::ops::Range<usize>)> = Vec::new();
    // Ids seen so far, for the duplicate check (a set: suites of many
    // methods are checked in n log n, not by a scan per method).
    let mut method_ids: BTreeSet<String> = BTreeSet::new();
    for (i, m) in raw.iter().enumerate() {
        let mut table = m.get_ref().clone();
        let label = format!("method #{}", i + 1);
        let id = take_id(ctx, &mut table, m.span(), &label)?;
        if !table.contains_key("kind") {
            return Err(ctx.err(
                m.span(),
                &format!("method `{id}`"),
                "missing key `kind` (which method)",
            ));
        }
        let spec: MethodSpec =
            toml::Value::Table(table)
                .try_into()
                .map_err(|e: toml::de::Error| {
                    ctx.err(
                        m.span(),
                        &format!("method `{id}`"),
                        e.message().trim().to_string(),
                    )
                })?;
        if !method_ids.insert(id.clone()) {
            return Err(ctx.err(
                m.span(),
                &format!("method `{id}`"),
                "this id is used by another method",
            ));
        }
        methods.push((MethodEntry { id, spec }, m.span()));
    }
    Ok(methods)
}

/// Only the `[[method]]` tables of a suite file, checked as [`load`] checks
/// them; the rest of the file must be TOML but is not validated (its data
/// are not read). `plumbline fit --suite` names a method by its id here.
pub fn load_methods(path: &Path) -> Result<Vec<MethodEntry>, SuiteError> {
    let (text, _) = read_text(path)?;
    parse_methods(&text, &path.display().to_string())
}

/// [`load_methods`] on suite text; `file` names it in messages.
pub fn parse_methods(text: &str, file: &str) -> Result<Vec<MethodEntry>, SuiteError> {
    #[derive(Deserialize)]
    struct RawMethods {
        #[serde(default)]
        method: Vec<Spanned<toml::Table>>,
    }
    let ctx = Ctx {
        file: file.to_string(),
        text,
    };
    let raw: RawMethods = toml::from_str(text).map_err(|e| toml_err(&ctx, &e, "(suite)"))?;
    Ok(read_methods(&ctx, &raw.method)?
        .into_iter()
        .map(|(m, _)| m)
        .collect())
}

/// Remove and check the `id` key of a `[[method]]` or `[[model]]` table.
fn take_id(
    ctx: &Ctx,
    table: &mut toml::Table,
    span: std::ops::Range<usize>,
    label: &str,
) -> Result<String, SuiteError> {
    let id_span = key_span(ctx.text, &span, "id");
    match table.remove("id") {
        Some(toml::Value::String(s)) => match check_name(&s) {
            Ok(()) => Ok(s),
            Err(why) => Err(ctx.err(
                id_span,
                &format!("{label}.id"),
                format!("{}: {why}", quoted(&s)),
            )),
        },
        Some(v) => Err(ctx.err(
            id_span,
            &format!("{label}.id"),
            format!("{v}: an id is a string"),
        )),
        None => Err(ctx.err(span, label, "missing key `id`")),
    }
}

/// The longest suite name or id.
pub const MAX_NAME_LEN: usize = 64;

/// Task ids that would give a task's figure the name of a report-wide figure
/// (`figures/ranks--<metric>.svg`, `figures/thresholds--<metric>.svg`).
pub const RESERVED_TASK_IDS: [&str; 2] = ["ranks", "thresholds"];

/// The rule for names that become file and folder names (the suite name,
/// task, method and model ids): 1 to [`MAX_NAME_LEN`] ASCII letters, digits,
/// `-`, `_` or `.`, starting with a letter or digit (so never `.`, `..`, a
/// hidden file or something that reads like an option). `Err` says why not.
pub fn check_name(s: &str) -> Result<(), String> {
    const RULE: &str =
        "use 1 to 64 ASCII letters, digits, '-', '_' or '.', starting with a letter or digit";
    if s.is_empty() {
        return Err(format!("empty; {RULE}"));
    }
    let n = s.chars().count();
    if n > MAX_NAME_LEN {
        return Err(format!("{n} characters is too long; {RULE}"));
    }
    if let Some(c) = s
        .chars()
        .find(|c| !(c.is_ascii_alphanumeric() || matches!(c, '-' | '_' | '.')))
    {
        return Err(format!("the character {:?} is not allowed; {RULE}", c));
    }
    if !s.starts_with(|c: char| c.is_ascii_alphanumeric()) {
        return Err(format!("must start with a letter or digit; {RULE}"));
    }
    Ok(())
}

/// Ids are used in file names and CSV cells: keep them plain ([`check_name`]).
pub fn valid_id(s: &str) -> bool {
    check_name(s).is_ok()
}

/// A value for a message: escaped, and cut after 40 characters.
fn quoted(s: &str) -> String {
    let n = s.chars().count();
    if n > 40 {
        let head: String = s.chars().take(40).collect();
        format!("`{}…` ({n} characters)", head.escape_debug())
    } else {
        format!("`{}`", s.escape_debug())
    }
}

/// Where the value of `key = ...` starts in the table whose header or body
/// starts at `span` (so a message points at that line), or `span` itself when
/// it is not found before the next table header.
fn key_span(text: &str, span: &std::ops::Range<usize>, key: &str) -> std::ops::Range<usize> {
    let start = span.start.min(text.len());
    let mut offset = start;
    for (i, line) in text[start..].split_inclusive('\n').enumerate() {
        let trimmed = line.trim_start();
        if i > 0 && trimmed.starts_with('[') {
            break;
        }
        if let Some(rest) = trimmed.strip_prefix(key) {
            let after = rest.trim_start();
            if let Some(value) = after.strip_prefix('=') {
                let pos = offset + line.len() - value.trim_start().len();
                return pos..pos;
            }
        }
        offset += line.len();
    }
    span.clone()
}

#[cfg(test)]
mod tests {

    use super::*;

    /// The consistency band takes the suite's `confidence` unless
    /// `[reliability] band_level` sets its own.
    #[test]
    fn band_level_follows_the_confidence() {
        let suite = |extra: &str, table: &str| {
            format!(
                "name = \"b\"\nseed = 1\nrepeats = 2\nsizes = [50]\nreference = \"platt\"\n{extra}\
                 metrics = [\"log_loss\"]\nprimary_metric = \"log_loss\"\n\n[test_set]\nrows = 100\n\n\
                 [[method]]\nid = \"platt\"\nkind = \"platt\"\n\n\
                 [[task]]\nid = \"a\"\nscores = \"a.csv\"\nscore_column = \"s\"\nlabel_column = \"y\"\nscore_kind = \"margin\"\n{table}"
            )
        };
        let dir = tempfile::TempDir::new().unwrap();
        let rows: String = (0..200).map(|i| format!("{},{}\n", i % 7, i % 2)).collect();
        std::fs::write(dir.path().join("a.csv"), format!("s,y\n{rows}")).unwrap();
        let level = |extra: &str, table: &str| {
            let text = suite(extra, table);
            parse(&text, &dir.path().join("suite.toml"), String::new())
                .unwrap_or_else(|e| panic!("{e}\n{text}"))
                .reliability
                .band
                .level
        };
        assert_eq!(level("", ""), DEFAULT_CONFIDENCE);
        assert_eq!(level("confidence = 0.9\n", ""), 0.9);
        assert_eq!(
            level("confidence = 0.9\n", "\n[reliability]\nband_level = 0.8\n"),
            0.8
        );
    }

    #[test]
    fn line_col_counts_from_one() {
        let t = "a = 1\nbb = 2\n";
        assert_eq!(line_col(t, 0), (1, 1));
        assert_eq!(line_col(t, 6), (2, 1));
        assert_eq!(line_col(t, 8), (2, 3));
    }

    #[test]
    fn names_that_become_paths_are_plain() {
        for ok in ["open-uci", "a", "letter-am.naive-bayes", "x_1", "9lives"] {
            assert_eq!(check_name(ok), Ok(()), "{ok}");
        }
        let long = "x".repeat(MAX_NAME_LEN + 1);
        for bad in [
            "", ".", "..", ".hidden", "-flag", "../../x", "/abs", "a/b", "a\\b", "a\0b", "a b",
            "é", &long,
        ] {
            assert!(check_name(bad).is_err(), "{bad:?} passed");
        }
        assert!(check_name(&"x".repeat(MAX_NAME_LEN)).is_ok());
    }

    #[test]
    fn key_span_finds_the_key_of_its_own_table() {
        let t = "[[task]]\nscores = \"a\"\n  id = \"x\"\n[[task]]\nid = \"y\"\n";
        let s = key_span(t, &(0..8), "id");
        assert_eq!(line_col(t, s.start), (3, 8));
        // Not found before the next header: the table's own span.
        let s = key_span(t, &(0..8), "data");
        assert_eq!(s, 0..8);
        // `ids` is another key.
        let t = "[[model]]\nids = 1\nid = \"m\"\n";
        assert_eq!(line_col(t, key_span(t, &(0..9), "id").start), (3, 6));
    }
}
