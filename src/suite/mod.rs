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
//! [`parse`] only puts the sections together; each section has its own
//! function that takes its TOML value and returns typed values or a located
//! [`SuiteError`]:
//!
//! * `top.rs`: `name`, `seed`, `repeats`, `sizes`, `too_large`,
//!   `on_fit_failure`, `confidence`, `interval`, `metrics`,
//!   `primary_metric`, `[test_set]`, `[protocol_study]`, `reference`;
//! * `interval.rs`: the `confidence` and `interval` checks shared with
//!   `plumbline report` ([`check_confidence`], [`check_interval`]);
//! * `methods.rs`: the `[[method]]` tables ([`load_methods`],
//!   [`parse_methods`]) and `threshold_pairs`;
//! * `models.rs`: the `[[model]]` tables;
//! * `tasks.rs`: `[[task]]` (score-file and open-data tasks), `[[task_grid]]`,
//!   reading and hashing score files, and each task's test set and sizes;
//! * `settings.rs`: `[metric_settings]`, `[decision]`, `[reliability]`.
//!
//! Tables whose message depends on another key (a method or model names
//! itself by its `id`; a task's kind depends on `scores` or `data`) stay
//! generic TOML in `RawSuite` and are converted by hand in their section.
//!
//! The schema is documented for users in `docs/suite-format.md`.

use std::collections::BTreeSet;
use std::path::{Path, PathBuf};

use serde::Deserialize;
use sha2::{Digest, Sha256};
use toml::Spanned;

use crate::calibrate::{MethodSpec, ScoreKind};
use crate::data::scorefile::ScoreFileSpec;
use crate::data::ScorePool;
use crate::metrics::{MetricId, MetricSettings};
use crate::models::{protocol::Protocol, ModelSpec};
use crate::stats::paired::IntervalKind;

mod interval;
mod methods;
mod models;
mod settings;
mod tasks;
mod top;

use settings::{RawDecision, RawReliability};
use top::{RawStudy, RawTestSet};

pub use interval::{check_confidence, check_interval, known_intervals, IntervalSettingError};
pub use methods::{default_pairs, load_methods, parse_methods};

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

/// A suite as written: the top level typed, each section's own table read by
/// its section's function.
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
    /// The paired interval estimator; the manifest records its
    /// [`IntervalKind::as_str`] id.
    pub interval: IntervalKind,
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

/// The most threshold pairs a suite gets by default: the default pairs are
/// every flexible method against every parametric one, a list that grows with
/// the product of the two counts; a suite with more lists its pairs.
pub const MAX_DEFAULT_PAIRS: usize = 10_000;

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
///
/// The sections are checked in a fixed order, so a suite with several
/// problems always reports the same first one: the top-level keys
/// (`top.rs`), `[metric_settings]`, `[test_set]`, the `[[method]]` tables,
/// `[protocol_study]`, `reference`, `threshold_pairs`, `[reliability]`,
/// `[decision]`, then the `[[model]]` tables and the tasks.
pub fn parse(text: &str, path: &Path, sha256: String) -> Result<Plan, SuiteError> {
    let ctx = Ctx {
        file: path.display().to_string(),
        text,
    };
    let raw: RawSuite = toml::from_str(text).map_err(|e| toml_err(&ctx, &e, "(suite)"))?;
    let base = path.parent().map(Path::to_path_buf).unwrap_or_default();

    let top = top::read_top(&ctx, &raw)?;
    let metric_settings = settings::read_metric_settings(&ctx, raw.metric_settings.as_ref())?;
    let (metrics, primary) = settings::expand_thresholds(
        &ctx,
        raw.primary_metric.span(),
        top.metrics,
        top.primary,
        &metric_settings,
    )?;
    let test_set = top::read_test_set(&ctx, raw.test_set.as_ref())?;

    let methods = methods::read_methods(&ctx, &raw.method)?;
    let method_entries: Vec<MethodEntry> = methods.iter().map(|(m, _)| m.clone()).collect();
    let method_ids: BTreeSet<String> = method_entries.iter().map(|m| m.id.clone()).collect();
    let study = top::read_study(&ctx, raw.protocol_study.as_ref())?;
    let reference = top::read_reference(
        &ctx,
        raw.reference.as_ref(),
        study.as_ref(),
        &method_entries,
        &method_ids,
    )?;
    let pairs = methods::read_pairs(
        &ctx,
        raw.threshold_pairs.as_ref(),
        study.is_some(),
        &method_entries,
        &method_ids,
    )?;
    let reliability = settings::reliability_plan(
        &ctx,
        raw.reliability.as_ref(),
        &method_entries,
        &method_ids,
        top.confidence,
    )?;
    let decision = settings::decision_plan(&ctx, raw.decision.as_ref(), &metrics)?;

    tasks::require_tasks(&ctx, &raw.task, &raw.task_grid)?;
    let models = models::read_models(&ctx, &raw.model)?;
    let mut open_data = tasks::OpenData::new(&base, raw.open_data.as_ref());
    let rules = tasks::TaskRules {
        base: &base,
        seed: top.seed,
        sizes: &top.sizes,
        raw_sizes: &raw.sizes,
        too_large: top.too_large,
        test_set,
        test_set_span: raw.test_set.as_ref().map(|s| s.span()),
        study: study.as_ref(),
        methods: &methods,
        models: &models,
    };
    let tasks = tasks::read_tasks(&ctx, &raw.task, &raw.task_grid, &mut open_data, &rules)?;

    // A protocol study reports no thresholds (pairs it lists are checked,
    // then dropped).
    let pairs = if study.is_some() { Vec::new() } else { pairs };
    Ok(Plan {
        suite_file: path.to_path_buf(),
        suite_sha256: sha256,
        name: top.name,
        seed: top.seed,
        repeats: top.repeats,
        confidence: top.confidence,
        interval: top.interval,
        reference,
        study,
        metrics,
        primary,
        metric_settings,
        on_fit_failure: top.on_fit_failure,
        test_set,
        methods: method_entries,
        pairs,
        reliability,
        decision,
        tasks,
    })
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

    /// `[metric_settings] decision_threshold` reaches the plan, defaults to
    /// 0.5, and a value outside (0, 1) is refused naming the file, the key
    /// and the value.
    #[test]
    fn decision_threshold_is_read_and_checked() {
        let dir = tempfile::TempDir::new().unwrap();
        let rows: String = (0..200).map(|i| format!("{},{}\n", i % 7, i % 2)).collect();
        std::fs::write(dir.path().join("a.csv"), format!("s,y\n{rows}")).unwrap();
        let suite = |table: &str| {
            format!(
                "name = \"b\"\nseed = 1\nrepeats = 2\nsizes = [50]\nreference = \"platt\"\n\
                 metrics = [\"threshold_cost\", \"net_benefit\"]\nprimary_metric = \"net_benefit\"\n\n\
                 [test_set]\nrows = 100\n\n[[method]]\nid = \"platt\"\nkind = \"platt\"\n\n\
                 [[task]]\nid = \"a\"\nscores = \"a.csv\"\nscore_column = \"s\"\nlabel_column = \"y\"\nscore_kind = \"margin\"\n{table}"
            )
        };
        let at = dir.path().join("suite.toml");
        let plan = |table: &str| parse(&suite(table), &at, String::new());
        let p = plan("").unwrap();
        assert_eq!(p.metrics, [MetricId::ThresholdCost, MetricId::NetBenefit]);
        assert_eq!(p.metric_settings.decision_threshold, 0.5);
        let p = plan("\n[metric_settings]\ndecision_threshold = 0.15\n").unwrap();
        assert_eq!(p.metric_settings.decision_threshold, 0.15);

        for bad in ["0", "1", "1.5", "-0.2"] {
            let e = plan(&format!(
                "\n[metric_settings]\ndecision_threshold = {bad}\n"
            ))
            .unwrap_err();
            assert_eq!(e.key, "metric_settings.decision_threshold", "{e}");
            let shown = e.to_string();
            assert!(shown.starts_with(&at.display().to_string()), "{shown}");
            let value: f64 = bad.parse().unwrap();
            assert!(
                shown.contains(&format!(
                    "metric_settings.decision_threshold = {value}: must be in (0, 1)"
                )),
                "{shown}"
            );
        }
        let e = plan("\n[metric_settings]\ndecision_threshold = \"high\"\n").unwrap_err();
        assert_eq!(e.key, "metric_settings", "{e}");
    }

    /// `decision_thresholds` and `cost_ratios` expand the metrics at a
    /// threshold into one id per threshold; bad values are refused with key,
    /// value, line and column; the primary metric must name one threshold.
    #[test]
    fn several_thresholds_expand_the_decision_metrics() {
        let dir = tempfile::TempDir::new().unwrap();
        let rows: String = (0..200).map(|i| format!("{},{}\n", i % 7, i % 2)).collect();
        std::fs::write(dir.path().join("a.csv"), format!("s,y\n{rows}")).unwrap();
        let suite = |primary: &str, table: &str| {
            format!(
                "name = \"b\"\nseed = 1\nrepeats = 2\nsizes = [50]\nreference = \"platt\"\n\
                 metrics = [\"brier\", \"threshold_cost\", \"net_benefit\"]\nprimary_metric = \"{primary}\"\n\n\
                 [test_set]\nrows = 100\n\n[[method]]\nid = \"platt\"\nkind = \"platt\"\n\n\
                 [[task]]\nid = \"a\"\nscores = \"a.csv\"\nscore_column = \"s\"\nlabel_column = \"y\"\nscore_kind = \"margin\"\n\n\
                 [metric_settings]\nlog_loss_clip = 1e-6\n{table}"
            )
        };
        let at = dir.path().join("suite.toml");
        let plan = |primary: &str, table: &str| parse(&suite(primary, table), &at, String::new());
        let p = plan(
            "net_benefit@0.2",
            "decision_thresholds = [0.5, 0.2]\ncost_ratios = [1.0, 3.0]\n",
        )
        .unwrap();
        let names: Vec<&str> = p.metrics.iter().map(|m| m.as_str()).collect();
        assert_eq!(
            names,
            [
                "brier",
                "threshold_cost@0.2",
                "threshold_cost@0.5",
                "threshold_cost@0.75",
                "net_benefit@0.2",
                "net_benefit@0.5",
                "net_benefit@0.75",
            ]
        );
        assert_eq!(p.primary.as_str(), "net_benefit@0.2");
        // Without the lists the plain ids stay; an id at a threshold the
        // suite does not measure is not a primary metric.
        let p = plan("brier", "").unwrap();
        assert_eq!(p.metrics[1], MetricId::ThresholdCost);
        let e = plan("net_benefit@0.3", "decision_thresholds = [0.2]\n").unwrap_err();
        assert_eq!(e.key, "primary_metric", "{e}");
        assert!(e.message.contains("net_benefit@0.2"), "{e}");
        let e = plan("threshold_cost", "cost_ratios = [1.0]\n").unwrap_err();
        assert_eq!(e.key, "primary_metric", "{e}");
        assert!(e.message.contains("several thresholds"), "{e}");
        assert!(e.message.contains("threshold_cost@0.5"), "{e}");
        // Bad values: the key, the value, and the line and column of the value.
        let line = suite("brier", "").lines().count() + 1;
        for (table, key, shown) in [
            (
                "decision_thresholds = [0.2, 1.5]",
                "decision_thresholds",
                "1.5",
            ),
            ("cost_ratios = [2.0, -1.0]", "cost_ratios", "-1"),
            ("cost_ratios = [0.0]", "cost_ratios", "0"),
        ] {
            let e = plan("brier", &format!("{table}\n")).unwrap_err();
            assert_eq!(e.key, format!("metric_settings.{key}"), "{e}");
            assert!(
                e.message
                    .contains(&format!("metric_settings.{key} = {shown}: ")),
                "{e}"
            );
            assert_eq!((e.line, e.column), (line, key.len() + 4), "{e}");
        }
        let e = plan(
            "brier",
            "decision_threshold = 0.3\ndecision_thresholds = [0.2]\n",
        )
        .unwrap_err();
        assert_eq!(e.key, "metric_settings.decision_threshold", "{e}");
        assert_eq!(e.line, line, "{e}");
        let e = plan("brier", "decision_thresholds = [\"x\"]\n").unwrap_err();
        assert_eq!(e.key, "metric_settings", "{e}");
    }

    /// `confidence` and `interval` go through the checks `plumbline report`
    /// shares, with the suite's own located messages.
    #[test]
    fn confidence_and_interval_are_checked_where_written() {
        let dir = tempfile::TempDir::new().unwrap();
        let rows: String = (0..200).map(|i| format!("{},{}\n", i % 7, i % 2)).collect();
        std::fs::write(dir.path().join("a.csv"), format!("s,y\n{rows}")).unwrap();
        let suite = |extra: &str| {
            format!(
                "name = \"b\"\nseed = 1\nrepeats = 2\nsizes = [50]\nreference = \"platt\"\n{extra}\
                 metrics = [\"log_loss\"]\nprimary_metric = \"log_loss\"\n\n[test_set]\nrows = 100\n\n\
                 [[method]]\nid = \"platt\"\nkind = \"platt\"\n\n\
                 [[task]]\nid = \"a\"\nscores = \"a.csv\"\nscore_column = \"s\"\nlabel_column = \"y\"\nscore_kind = \"margin\"\n"
            )
        };
        let at = dir.path().join("suite.toml");
        let plan = |extra: &str| parse(&suite(extra), &at, String::new());
        let p = plan("").unwrap();
        assert_eq!(
            (p.confidence, p.interval),
            (DEFAULT_CONFIDENCE, IntervalKind::default())
        );
        for &k in IntervalKind::ALL {
            let p = plan(&format!("interval = \"{}\"\n", k.as_str())).unwrap();
            assert_eq!(p.interval, k);
        }
        assert_eq!(plan("confidence = 0.9\n").unwrap().confidence, 0.9);

        let e = plan("confidence = 1.5\n").unwrap_err();
        assert_eq!((e.line, e.column, e.key.as_str()), (6, 14, "confidence"));
        assert_eq!(
            e.message,
            "1.5: expected a level between 0.5 and 1, e.g. 0.95"
        );
        let e = plan("confidence = 0.5\n").unwrap_err();
        assert_eq!(
            e.message,
            "0.5: expected a level between 0.5 and 1, e.g. 0.95"
        );

        let e = plan("interval = \"bootstrap\"\n").unwrap_err();
        assert_eq!((e.line, e.column, e.key.as_str()), (6, 12, "interval"));
        assert_eq!(
            e.message,
            format!(
                "`bootstrap`: known interval estimators: {}",
                IntervalKind::ALL
                    .iter()
                    .map(|k| k.as_str())
                    .collect::<Vec<_>>()
                    .join(", ")
            )
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
