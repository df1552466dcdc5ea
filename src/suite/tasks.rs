//! The `[[task]]` and `[[task_grid]]` tables, turned into [`TaskPlan`]s.
//!
//! A `[[task]]` table is a score-file task (it has `scores`) or an
//! open-data task (it has `data`); which struct it is read into depends on
//! that key, so the table is converted by hand and a problem is reported
//! against `task #N`. A `[[task_grid]]` expands into one open-data task per
//! dataset and model. Every task is then checked the same way (its id, the
//! methods for its score kind, its test set and sizes); a score-file task's
//! file is read and hashed here ([`read_score_file`]), an open-data task only
//! has its dataset's summary and digest looked up (its pool is built by
//! `run::pools::resolve`).

use std::collections::BTreeMap;
use std::ops::Range;
use std::path::{Path, PathBuf};
use std::rc::Rc;

use serde::Deserialize;
use toml::Spanned;

use super::models::Models;
use super::{
    check_name, default_protocol, file_sha256, key_span, quoted, Ctx, MethodEntry, StudyPlan,
    SuiteError, TaskPlan, TaskSource, TestSetRule, TooLarge, RESERVED_TASK_IDS,
};
use crate::calibrate::ScoreKind;
use crate::data::open;
use crate::data::scorefile::{self, LoadedScores, ScoreFileSpec};
use crate::data::{ScorePool, Side};
use crate::models::protocol::Protocol;
use crate::split;

/// A score-file `[[task]]` as written.
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

/// An open-data `[[task]]` as written (or one cell of a grid).
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawOpenTask {
    id: String,
    data: String,
    model: String,
    #[serde(default)]
    protocol: Option<Protocol>,
}

/// A `[[task_grid]]` as written; `data` is a list of ids or `"all"`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawGrid {
    data: toml::Value,
    models: Vec<String>,
    #[serde(default)]
    protocol: Option<Protocol>,
}

/// One task before its checks.
enum Spec {
    File(RawScoreTask),
    Open(RawOpenTask),
}

impl Spec {
    fn id(&self) -> &str {
        match self {
            Spec::File(r) => &r.id,
            Spec::Open(r) => &r.id,
        }
    }
}

/// A task with where it was written: the span of its table and its label
/// (`task #N` or `task_grid #N`).
struct Written {
    spec: Spec,
    span: Range<usize>,
    label: String,
}

/// The open-data folder, listed once when a task first needs it and then
/// shared (not copied per task).
pub(super) struct OpenData {
    pub dir: PathBuf,
    /// The span of the suite's `open_data` key, empty when it has none.
    pub span: Range<usize>,
    tasks: Option<Rc<Vec<open::TaskSummary>>>,
}

impl OpenData {
    /// `open_data` (relative to the suite's folder), or the shipped data
    /// folder beside the suite's folder.
    pub fn new(base: &Path, open_data: Option<&Spanned<String>>) -> OpenData {
        OpenData {
            dir: match open_data {
                Some(p) => base.join(p.get_ref()),
                None => base.join("..").join(open::DEFAULT_DATA_DIR),
            },
            span: open_data.map(|p| p.span()).unwrap_or(0..0),
            tasks: None,
        }
    }

    /// The folder's tasks; an error points at `open_data`, or at `span`
    /// (the table that needed the list) when the suite does not set it.
    fn list(
        &mut self,
        ctx: &Ctx,
        span: Range<usize>,
    ) -> Result<Rc<Vec<open::TaskSummary>>, SuiteError> {
        if let Some(l) = &self.tasks {
            return Ok(l.clone());
        }
        let l = open::list_tasks(&self.dir).map_err(|e| {
            ctx.err(
                if self.span.is_empty() {
                    span
                } else {
                    self.span.clone()
                },
                "open_data",
                format!("{} ({})", e, self.dir.display()),
            )
        })?;
        let l = Rc::new(l);
        self.tasks = Some(l.clone());
        Ok(l)
    }
}

/// What every task is checked against: the suite's other sections.
pub(super) struct TaskRules<'a> {
    /// The suite's folder (score files are relative to it).
    pub base: &'a Path,
    pub seed: u64,
    /// The suite's sizes, ascending, and the `sizes` key as written.
    pub sizes: &'a [usize],
    pub raw_sizes: &'a Spanned<Vec<Spanned<i64>>>,
    pub too_large: TooLarge,
    pub test_set: TestSetRule,
    /// The span of the `[test_set]` table, if the suite has one.
    pub test_set_span: Option<Range<usize>>,
    pub study: Option<&'a StudyPlan>,
    pub methods: &'a [(MethodEntry, Range<usize>)],
    pub models: &'a Models,
}

/// A suite needs at least one `[[task]]` or `[[task_grid]]` table.
pub(super) fn require_tasks(
    ctx: &Ctx,
    task: &[Spanned<toml::Table>],
    task_grid: &[Spanned<toml::Table>],
) -> Result<(), SuiteError> {
    if task.is_empty() && task_grid.is_empty() {
        return Err(ctx.err(
            0..0,
            "task",
            "the suite lists no [[task]] or [[task_grid]] tables",
        ));
    }
    Ok(())
}

/// Every task of the suite, `[[task]]` tables first and then the cells of
/// each `[[task_grid]]`, checked and planned.
pub(super) fn read_tasks(
    ctx: &Ctx,
    task: &[Spanned<toml::Table>],
    task_grid: &[Spanned<toml::Table>],
    open_data: &mut OpenData,
    rules: &TaskRules,
) -> Result<Vec<TaskPlan>, SuiteError> {
    let mut specs = read_task_tables(ctx, task)?;
    for (i, g) in task_grid.iter().enumerate() {
        specs.extend(expand_grid(ctx, g, i, open_data)?);
    }
    let mut tasks: Vec<TaskPlan> = Vec::new();
    // Task ids in lower case → the id as written, for the duplicate check.
    let mut task_ids: BTreeMap<String, String> = Default::default();
    // Score kinds whose method parameters are already checked: every method
    // is validated once per kind, not once per task.
    let mut validated: Vec<ScoreKind> = Vec::new();
    for Written { spec, span, label } in specs {
        let id = spec.id().to_string();
        let tl = format!("task `{id}`");
        check_task_id(ctx, &id, &span, &label, &mut task_ids)?;
        let score_kind = match &spec {
            Spec::File(r) => r.score_kind,
            Spec::Open(_) => ScoreKind::Probability,
        };
        if !validated.contains(&score_kind) {
            validate_methods(ctx, rules.methods, score_kind, &tl)?;
            validated.push(score_kind);
        }
        let test_set_span = rules.test_set_span.clone().unwrap_or(span.clone());
        let mut plan_task = match spec {
            Spec::File(rt) => score_file_task(ctx, rt, span, &tl, test_set_span, rules)?,
            Spec::Open(ro) => open_task(ctx, ro, span, &tl, test_set_span, open_data, rules)?,
        };
        fit_sizes(ctx, &mut plan_task, &tl, rules)?;
        tasks.push(plan_task);
    }
    Ok(tasks)
}

/// The `[[task]]` tables: a score-file task when the table has `scores`, an
/// open-data task when it has `data`.
fn read_task_tables(ctx: &Ctx, raw: &[Spanned<toml::Table>]) -> Result<Vec<Written>, SuiteError> {
    let mut specs = Vec::new();
    for (i, t) in raw.iter().enumerate() {
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
        specs.push(Written {
            spec,
            span: t.span(),
            label,
        });
    }
    Ok(specs)
}

/// One `[[task_grid]]` (the `i`-th, from 0): a task `<data>.<model>` for
/// every dataset of `data` (or every task of the open-data folder for
/// `"all"`) and every model of `models`, datasets outermost.
fn expand_grid(
    ctx: &Ctx,
    g: &Spanned<toml::Table>,
    i: usize,
    open_data: &mut OpenData,
) -> Result<Vec<Written>, SuiteError> {
    let label = format!("task_grid #{}", i + 1);
    let rg: RawGrid = toml::Value::Table(g.get_ref().clone())
        .try_into()
        .map_err(|e: toml::de::Error| ctx.err(g.span(), &label, e.message().trim().to_string()))?;
    let data: Vec<String> = match &rg.data {
        toml::Value::String(s) if s == "all" => open_data
            .list(ctx, g.span())?
            .iter()
            .map(|t| t.id.clone())
            .collect(),
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
    let mut specs = Vec::new();
    for d in &data {
        for m in &rg.models {
            specs.push(Written {
                spec: Spec::Open(RawOpenTask {
                    id: format!("{d}.{m}"),
                    data: d.clone(),
                    model: m.clone(),
                    protocol: rg.protocol.clone(),
                }),
                span: g.span(),
                label: label.clone(),
            });
        }
    }
    Ok(specs)
}

/// A task id: a plain name ([`check_name`]), not reserved, and not the id of
/// an earlier task in any letter case (`seen` maps lower case to as written).
fn check_task_id(
    ctx: &Ctx,
    id: &str,
    span: &Range<usize>,
    label: &str,
    seen: &mut BTreeMap<String, String>,
) -> Result<(), SuiteError> {
    let tl = format!("task `{id}`");
    // A [[task]]'s own `id` line; a grid's table (its ids are made from
    // `data` and `models`).
    let id_span = if label.starts_with("task #") {
        key_span(ctx.text, span, "id")
    } else {
        span.clone()
    };
    if let Err(why) = check_name(id) {
        return Err(ctx.err(
            id_span,
            &format!("{label}.id"),
            format!("{}: {why}", quoted(id)),
        ));
    }
    if RESERVED_TASK_IDS.iter().any(|r| r.eq_ignore_ascii_case(id)) {
        return Err(ctx.err(
            id_span,
            &format!("{label}.id"),
            format!(
                "`{id}` is reserved: the report's figures `figures/{}--<metric>.svg` would be overwritten; choose another task id",
                id.to_ascii_lowercase()
            ),
        ));
    }
    if let Some(other) = seen.get(&id.to_ascii_lowercase()) {
        let why = if other == id {
            "this id is used by another task".to_string()
        } else {
            format!(
                "differs from task `{}` only in letter case; their figure files would clash on case-insensitive file systems",
                other
            )
        };
        return Err(ctx.err(id_span, &format!("{tl}.id"), why));
    }
    seen.insert(id.to_ascii_lowercase(), id.to_string());
    Ok(())
}

/// Every method's parameters for scores of `score_kind`, first met at the
/// task `tl`; an error points at the offending parameter's line.
fn validate_methods(
    ctx: &Ctx,
    methods: &[(MethodEntry, Range<usize>)],
    score_kind: ScoreKind,
    tl: &str,
) -> Result<(), SuiteError> {
    for (m, mspan) in methods {
        m.spec.validate(score_kind).map_err(|e| {
            ctx.err(
                key_span(ctx.text, mspan, &e.key),
                &format!("method `{}`", m.id),
                format!("{e} (for {tl}, score_kind = \"{}\")", score_kind.as_str()),
            )
        })?;
    }
    Ok(())
}

/// Read a task's score file and hash its bytes. Loaded first: the reader
/// bounds lines and decompressed size, so an endless or hostile file is
/// refused before it is hashed. Errors are reported against `<tl>.scores`.
fn read_score_file(
    ctx: &Ctx,
    fspec: &ScoreFileSpec,
    span: &Range<usize>,
    tl: &str,
) -> Result<(LoadedScores, String), SuiteError> {
    let loaded = scorefile::load(fspec)
        .map_err(|e| ctx.err(span.clone(), &format!("{tl}.scores"), e.to_string()))?;
    let data_sha256 = file_sha256(&fspec.path).map_err(|e| {
        ctx.err(
            span.clone(),
            &format!("{tl}.scores"),
            format!("{}: cannot read: {e}", fspec.path.display()),
        )
    })?;
    Ok((loaded, data_sha256))
}

/// A score-file task: its file read and hashed, its rows split into the
/// reservoir and the test set (pinned by the file's split column, or drawn
/// with the task's seed by the suite's test-set rule).
fn score_file_task(
    ctx: &Ctx,
    rt: RawScoreTask,
    span: Range<usize>,
    tl: &str,
    test_set_span: Range<usize>,
    rules: &TaskRules,
) -> Result<TaskPlan, SuiteError> {
    if rules.study.is_some() {
        return Err(ctx.err(
            span,
            tl,
            "a protocol study needs open-data tasks (`data` and `model`), not score files",
        ));
    }
    let fspec = ScoreFileSpec {
        path: rules.base.join(&rt.scores),
        score_column: rt.score_column.clone(),
        label_column: rt.label_column.clone(),
        score_kind: rt.score_kind,
        split_column: rt.split_column.clone(),
        truth_column: rt.truth_column.clone(),
        fold_column: None,
        origin: scorefile::Origin::Suite,
    };
    let (loaded, data_sha256) = read_score_file(ctx, &fspec, &span, tl)?;
    let n = loaded.pool.scores.len();
    let positives = loaded.pool.labels.iter().filter(|&&y| y).count();
    let (reservoir, test) = match &loaded.pool.sides {
        Some(sides) => {
            let res = (0..n).filter(|&i| sides[i] == Side::Reservoir).collect();
            let te = (0..n).filter(|&i| sides[i] == Side::Test).collect();
            (res, te)
        }
        None => {
            let rows = rules.test_set.rows(n);
            if rows == 0 || rows >= n {
                return Err(ctx.err(
                    test_set_span,
                    "test_set",
                    format!(
                        "{}: gives {rows} test rows for {tl}, which has {n} rows",
                        rules.test_set.describe()
                    ),
                ));
            }
            split::partition(n, rows, split::task_seed(rules.seed, &rt.id))
        }
    };
    Ok(TaskPlan {
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
    })
}

/// An open-data task: its dataset among the folder's tasks, its model among
/// the suite's, its protocol checked, and the sizes of its reservoir and
/// test set worked out from the dataset's row count (the pool itself is
/// built later).
fn open_task(
    ctx: &Ctx,
    ro: RawOpenTask,
    span: Range<usize>,
    tl: &str,
    test_set_span: Range<usize>,
    open_data: &mut OpenData,
    rules: &TaskRules,
) -> Result<TaskPlan, SuiteError> {
    let list = open_data.list(ctx, span.clone())?;
    let data_dir = &open_data.dir;
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
    let model = rules.models.get(&ro.model).cloned().ok_or_else(|| {
        ctx.err(
            span.clone(),
            &format!("{tl}.model"),
            format!(
                "`{}` is not one of the suite's [[model]] ids ({})",
                ro.model,
                rules.models.ids()
            ),
        )
    })?;
    let protocol = ro.protocol.clone().unwrap_or_else(default_protocol);
    protocol
        .validate()
        .map_err(|e| ctx.err(span.clone(), &format!("{tl}.protocol"), e.to_string()))?;
    let n = summary.rows;
    if let (Some(_), Some(_)) = (rules.study, &ro.protocol) {
        return Err(ctx.err(
            span,
            &format!("{tl}.protocol"),
            "a protocol study compares the protocols itself; remove `protocol`",
        ));
    }
    let (reservoir_rows, test_rows) = match (rules.study, protocol.clone()) {
        (Some(st), _) => {
            if st.test_rows + 4 > n {
                return Err(ctx.err(
                    span,
                    "protocol_study.test_rows",
                    format!(
                        "{} test rows leave too few of the {n} rows of {tl}",
                        st.test_rows
                    ),
                ));
            }
            (n - st.test_rows, st.test_rows)
        }
        (None, Protocol::HeldOut { train_fraction }) => {
            let n_train = (train_fraction * n as f64).round() as usize;
            let pool_n = n.saturating_sub(n_train);
            let rows = rules.test_set.rows(pool_n);
            if rows == 0 || rows >= pool_n {
                return Err(ctx.err(
                    test_set_span,
                    "test_set",
                    format!(
                        "{}: gives {rows} test rows for {tl}, whose held-out pool has {pool_n} rows",
                        rules.test_set.describe()
                    ),
                ));
            }
            (pool_n - rows, rows)
        }
        (None, Protocol::CrossFitted { train_fraction, .. }) => {
            let n_train = (train_fraction * n as f64).round() as usize;
            (n_train, n - n_train)
        }
    };
    let data_sha256 = open::dataset_digest(data_dir, &ro.data)
        .map_err(|e| ctx.err(span.clone(), &format!("{tl}.data"), e.to_string()))?;
    Ok(TaskPlan {
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
    })
}

/// The suite's sizes that fit the task's reservoir; a larger one is
/// skipped (`too_large = "skip"`) or refused at its place in `sizes`, and a
/// task needs at least one.
fn fit_sizes(
    ctx: &Ctx,
    plan_task: &mut TaskPlan,
    tl: &str,
    rules: &TaskRules,
) -> Result<(), SuiteError> {
    let reservoir_len = plan_task.reservoir_rows;
    for &s in rules.sizes {
        if s <= reservoir_len {
            plan_task.sizes.push(s);
        } else if rules.too_large == TooLarge::Skip {
            plan_task.skipped_sizes.push(s);
        } else {
            let sspan = rules
                .raw_sizes
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
            rules.raw_sizes.span(),
            "sizes",
            format!("no size fits the reservoir of {tl} ({reservoir_len} rows)"),
        ));
    }
    Ok(())
}
