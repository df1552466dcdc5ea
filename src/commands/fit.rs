//! `plumbline fit`: fit one method on a score file and save the map file.
//!
//! The method is given as a method id of a suite's method table
//! (`--method isotonic-bounded`: the built-in default suite's, or that of
//! `--suite FILE`), or as a kind (`--method isotonic`); either takes further
//! parameters (`--set pseudo_count=1`). Both are read into the same
//! [`MethodSpec`] a suite's method table becomes and checked by the same
//! `MethodSpec::validate`, so the map is fitted by exactly the implementation
//! a benchmark run compares. Before the map
//! file is written it is read back through [`mapfile::from_bytes`] and its
//! predictions on the training scores are compared bit for bit with the fitted
//! map's, so a map that would not reproduce its fit is never saved.

use std::collections::BTreeSet;
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use std::time::Instant;

use anyhow::{bail, Context, Result};
use serde::Deserialize;

use crate::calibrate::{MethodSpec, ScoreKind};
use crate::data::scorefile::{self, Origin, ScoreFileSpec};
use crate::mapfile::{self, FoldSummary, MapContent, Training};
use crate::suite::{self, MethodEntry};

/// The default suite's file, built into the binary so that `fit --method ID`
/// resolves its method ids wherever plumbline runs.
pub const DEFAULT_SUITE_TEXT: &str = include_str!("../../suites/open-uci.toml");

/// Every method kind with its `--set` keys and the values each takes, in the
/// order of [`MethodSpec`] (each method's file declares its keys).
pub fn method_keys() -> Vec<(&'static str, &'static [(&'static str, &'static str)])> {
    MethodSpec::defaults()
        .iter()
        .map(|m| (m.kind(), m.keys()))
        .collect()
}

/// The long help of `--set`: every kind's keys ([`method_keys`]).
fn set_help() -> String {
    let mut s = String::from(
        "A method parameter, as in a suite (repeatable), e.g. `--set pseudo_count=1`; \
         added to (or replacing) those of a suite method id. Keys by method kind \
         (docs/methods.md):",
    );
    for (kind, keys) in method_keys() {
        s.push_str(&format!("\n  {kind}: "));
        if keys.is_empty() {
            s.push_str("no parameters");
        } else {
            let k: Vec<String> = keys.iter().map(|(k, v)| format!("{k} ({v})")).collect();
            s.push_str(&k.join(", "));
        }
    }
    s
}

/// Score kinds on the command line.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum KindArg {
    /// Probabilities in [0, 1].
    Probability,
    /// Real-valued margins (log-odds or any monotone score).
    Margin,
}

impl From<KindArg> for ScoreKind {
    fn from(k: KindArg) -> ScoreKind {
        match k {
            KindArg::Probability => ScoreKind::Probability,
            KindArg::Margin => ScoreKind::Margin,
        }
    }
}

#[derive(Debug, Clone, clap::Args)]
pub struct FitArgs {
    /// Method: an id of the suite's method table (see --suite), e.g.
    /// `isotonic-bounded`, or a method kind as in a suite's `kind` key:
    /// identity, platt, isotonic, beta, binning, temperature,
    /// centered-isotonic, spline, venn-abers. A suite id is looked up first.
    #[arg(long, value_name = "ID")]
    pub method: String,
    /// A method parameter, as in a suite (repeatable), e.g. `--set pseudo_count=1`;
    /// added to (or replacing) those of a suite method id.
    #[arg(long = "set", value_name = "KEY=VALUE", long_help = set_help())]
    pub set: Vec<String>,
    /// Suite file whose `[[method]]` tables give the method ids --method
    /// accepts (only that table is read) [default: the built-in default
    /// suite, suites/open-uci.toml].
    #[arg(long, value_name = "FILE")]
    pub suite: Option<PathBuf>,
    /// Score file: CSV, gzip CSV (`.gz`), Parquet (`.parquet`, `.pq`), or `-` for CSV on stdin.
    #[arg(long, value_name = "FILE")]
    pub scores: PathBuf,
    /// Map file to write (JSON, docs/map-format.md); replaced atomically.
    #[arg(long, value_name = "MAP")]
    pub out: PathBuf,
    /// What the score column holds.
    #[arg(long, value_enum, default_value = "probability")]
    pub score_kind: KindArg,
    /// Score column.
    #[arg(long, default_value = "score", value_name = "NAME")]
    pub score_column: String,
    /// Label column (0/1 or true/false).
    #[arg(long, default_value = "label", value_name = "NAME")]
    pub label_column: String,
    /// Fold column of cross-fitted calibration data (each row's out-of-fold
    /// score came from the model of its fold): checked for more than one fold,
    /// a fold on every row and both classes in every fold.
    #[arg(long, value_name = "NAME")]
    pub fold_column: Option<String>,
}

/// What `fit` did, for the terminal.
#[derive(Debug, Clone)]
pub struct FitSummary {
    /// The method as given to `--method` (a suite id or a kind).
    pub method: String,
    pub content: MapContent,
    pub out: PathBuf,
    /// Wall-clock time of the fit alone (shown, not saved: the map file is
    /// the same bytes for the same inputs and options).
    pub fit_seconds: f64,
}

/// One `KEY=VALUE` as a TOML value: numbers, booleans and quoted strings as
/// TOML reads them, anything else as a plain string (`criterion=bic`).
fn toml_value(raw: &str) -> toml::Value {
    #[derive(Deserialize)]
    struct V {
        v: toml::Value,
    }
    match toml::from_str::<V>(&format!("v = {raw}")) {
        Ok(V { v }) => v,
        Err(_) => toml::Value::String(raw.to_string()),
    }
}

/// The method spec of a method kind (`--method`) and `--set`, checked for
/// `kind` scores.
pub fn method_spec(method: &str, set: &[String], kind: ScoreKind) -> Result<MethodSpec> {
    super::require_name(
        "--method",
        method,
        "give a method kind: identity, platt, isotonic, beta, binning, temperature, centered-isotonic, spline or venn-abers",
    )?;
    let mut table = toml::Table::new();
    table.insert("kind".into(), toml::Value::String(method.to_string()));
    with_set(table, method, set, kind)
}

/// The method table of the suite `--suite` names, or of the built-in default
/// suite, with the name to show for it.
pub fn suite_methods(suite: Option<&Path>) -> Result<(String, Vec<MethodEntry>)> {
    match suite {
        Some(p) => Ok((p.display().to_string(), suite::load_methods(p)?)),
        None => {
            let name = super::run::DEFAULT_SUITE;
            Ok((
                name.to_string(),
                suite::parse_methods(DEFAULT_SUITE_TEXT, name)?,
            ))
        }
    }
}

/// The method kinds as a list in words: `a, b, … or z`.
fn kinds_text() -> String {
    let kinds: Vec<&str> = method_keys().iter().map(|(k, _)| *k).collect();
    match kinds.split_last() {
        Some((last, rest)) if !rest.is_empty() => format!("{} or {last}", rest.join(", ")),
        _ => kinds.join(""),
    }
}

/// The method spec of `--method` and `--set`: `method` is looked up among
/// the ids of `table` (the method table of `suite_name`) first, then among
/// the method kinds; `--set` adds or replaces parameters. Checked for `kind`
/// scores.
pub fn resolve_method(
    method: &str,
    set: &[String],
    kind: ScoreKind,
    suite_name: &str,
    table: &[MethodEntry],
) -> Result<MethodSpec> {
    super::require_name(
        "--method",
        method,
        &format!(
            "give a method id of {suite_name} (e.g. isotonic-bounded) or a method kind: {}",
            kinds_text()
        ),
    )?;
    if let Some(entry) = table.iter().find(|m| m.id == method) {
        let Ok(toml::Value::Table(t)) = toml::Value::try_from(&entry.spec) else {
            bail!("internal error: the method `{method}` of {suite_name} is not a table");
        };
        return with_set(t, method, set, kind);
    }
    let kinds: Vec<&str> = method_keys().iter().map(|(k, _)| *k).collect();
    if kinds.contains(&method) {
        return method_spec(method, set, kind);
    }
    let ids: Vec<&str> = table.iter().map(|m| m.id.as_str()).collect();
    bail!(
        "--method {method}: not a method id of {suite_name} ({}) nor a method kind ({}); --suite FILE looks ids up in another suite",
        ids.join(", "),
        kinds.join(", ")
    )
}

/// A method table (`kind` plus parameters) with the `--set` parameters
/// added, read into a checked [`MethodSpec`].
fn with_set(
    mut table: toml::Table,
    method: &str,
    set: &[String],
    kind: ScoreKind,
) -> Result<MethodSpec> {
    let mut given = BTreeSet::new();
    for s in set {
        let Some((k, v)) = s.split_once('=') else {
            bail!("--set {s}: expected KEY=VALUE");
        };
        let k = k.trim();
        if k.is_empty() || k == "kind" {
            bail!(
                "--set {s}: give the method with --method and its parameters with --set KEY=VALUE"
            );
        }
        if !given.insert(k.to_string()) {
            bail!("--set {s}: `{k}` is set twice");
        }
        table.insert(k.to_string(), toml_value(v.trim()));
    }
    let spec = MethodSpec::deserialize(toml::Value::Table(table))
        .map_err(|e| anyhow::anyhow!("--method {method}: {}", e.message()))?;
    spec.validate(kind)
        .map_err(|e| anyhow::anyhow!("--set {e}"))?;
    Ok(spec)
}

/// `plumbline fit`: fit, print what was fitted to standard error.
pub fn run(args: &FitArgs) -> Result<ExitCode> {
    let s = fit(args)?;
    eprintln!("{}", describe(&s));
    Ok(ExitCode::SUCCESS)
}

/// Fit the method and write the map file.
pub fn fit(args: &FitArgs) -> Result<FitSummary> {
    let kind: ScoreKind = args.score_kind.into();
    let (suite_name, table) = suite_methods(args.suite.as_deref())?;
    let spec = resolve_method(&args.method, &args.set, kind, &suite_name, &table)?;
    let fspec = ScoreFileSpec {
        path: args.scores.clone(),
        score_column: args.score_column.clone(),
        label_column: args.label_column.clone(),
        score_kind: kind,
        split_column: None,
        truth_column: None,
        fold_column: args.fold_column.clone(),
        origin: Origin::CommandLine,
    };
    let loaded = scorefile::load(&fspec)
        .map_err(|e| e.with_range_hint("use --score-kind margin for other scores"))?;
    let (scores, labels) = (&loaded.pool.scores, &loaded.pool.labels);
    let calibrator = spec.build(kind)?;
    let t0 = Instant::now();
    let fitted = calibrator.fit(scores, labels).map_err(|e| {
        anyhow::anyhow!("{}: {} fit failed: {e}", args.scores.display(), spec.kind())
    })?;
    let fit_seconds = t0.elapsed().as_secs_f64();

    let mut sorted = scores.clone();
    sorted.sort_unstable_by(f64::total_cmp);
    let mut distinct = sorted.clone();
    distinct.dedup_by(|a, b| a == b);
    let folds = loaded.folds.as_ref().map(|(idx, names)| {
        let mut f: Vec<FoldSummary> = names
            .iter()
            .map(|n| FoldSummary {
                fold: n.clone(),
                rows: 0,
                positives: 0,
            })
            .collect();
        for (&k, &y) in idx.iter().zip(labels) {
            f[k as usize].rows += 1;
            f[k as usize].positives += y as u64;
        }
        f
    });
    let source = if args.scores.as_os_str() == "-" {
        "<stdin>".to_string()
    } else {
        args.scores.display().to_string()
    };
    // The bytes of a regular file identify the input; a stream (stdin, a
    // pipe) was consumed by the load and is recorded without a hash.
    let source_sha256 = if args.scores.as_os_str() != "-" && args.scores.is_file() {
        Some(
            crate::suite::file_sha256(&args.scores)
                .with_context(|| format!("{}: cannot hash", args.scores.display()))?,
        )
    } else {
        None
    };
    let content = MapContent {
        format: mapfile::FORMAT.into(),
        schema_version: mapfile::SCHEMA_VERSION,
        tool_version: env!("CARGO_PKG_VERSION").into(),
        method: spec,
        score_kind: kind,
        training: Training {
            source,
            score_column: args.score_column.clone(),
            label_column: args.label_column.clone(),
            fold_column: args.fold_column.clone(),
            rows: scores.len() as u64,
            positives: labels.iter().filter(|&&y| y).count() as u64,
            score_min: sorted[0],
            score_max: sorted[sorted.len() - 1],
            distinct_scores: distinct.len() as u64,
            folds,
            notes: fitted.notes.iter().map(|s| s.to_string()).collect(),
            source_sha256,
            fit_seconds: None,
        },
        fitted: fitted.map.state(),
    };
    let bytes = mapfile::to_bytes(&content).map_err(|e| anyhow::anyhow!("{e}"))?;

    // The saved map must predict exactly what the fitted map predicts.
    let reread = mapfile::from_bytes(&args.out.display().to_string(), &bytes)
        .context("the map file just written does not read back")?;
    let mut want = vec![0.0; scores.len()];
    let mut got = vec![0.0; scores.len()];
    fitted.map.predict(scores, &mut want);
    reread.map.predict(scores, &mut got);
    if let Some(i) = (0..want.len()).find(|&i| want[i].to_bits() != got[i].to_bits()) {
        bail!(
            "internal error: the saved {} map predicts {} for score {} where the fitted map predicts {}",
            content.method.kind(),
            got[i],
            scores[i],
            want[i]
        );
    }
    crate::atomic::write_atomic(&args.out, &bytes)?;
    Ok(FitSummary {
        method: args.method.clone(),
        content,
        out: args.out.clone(),
        fit_seconds,
    })
}

/// The method as given, with its kind (when the name is a suite id) and
/// every parameter: `isotonic-bounded (isotonic, pseudo_count = 1.0)`.
pub fn method_label(given: &str, spec: &MethodSpec) -> String {
    let mut parts: Vec<String> = Vec::new();
    if given != spec.kind() {
        parts.push(spec.kind().to_string());
    }
    if let Ok(toml::Value::Table(t)) = toml::Value::try_from(spec) {
        parts.extend(
            t.iter()
                .filter(|(k, _)| k.as_str() != "kind")
                .map(|(k, v)| format!("{k} = {v}")),
        );
    }
    if parts.is_empty() {
        given.to_string()
    } else {
        format!("{given} ({})", parts.join(", "))
    }
}

/// About a written map, for the terminal: one line on the fit, then one
/// indented line per fitted parameter ([`MapState::summary`]).
///
/// [`MapState::summary`]: crate::calibrate::state::MapState::summary
pub fn describe(s: &FitSummary) -> String {
    let t = &s.content.training;
    let notes = if t.notes.is_empty() {
        String::new()
    } else {
        format!(" · notes {}", t.notes.join("+"))
    };
    let folds = t
        .folds
        .as_ref()
        .map(|f| format!(" · {} folds", f.len()))
        .unwrap_or_default();
    let mut text = format!(
        "{} fitted on {} rows ({} positive, {} distinct scores in [{}, {}]){folds} in {:.3} s{notes} → {}",
        method_label(&s.method, &s.content.method),
        t.rows,
        t.positives,
        t.distinct_scores,
        t.score_min,
        t.score_max,
        s.fit_seconds,
        s.out.display()
    );
    for line in s.content.fitted.summary() {
        text.push_str("\n  ");
        text.push_str(&line);
    }
    text
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The names a serde error lists after "expected" (in backticks).
    fn expected_names(message: &str) -> BTreeSet<String> {
        let tail = message.split("expected").nth(1).unwrap_or("");
        tail.split('`')
            .skip(1)
            .step_by(2)
            .map(str::to_string)
            .collect()
    }

    /// [`method_keys`] (shown by `fit --help`) is the parameter list of
    /// [`MethodSpec`]: every kind, every key, each key accepted with a value
    /// of the kind described, and no key left out (serde's unknown-field
    /// error lists the keys a kind takes).
    #[test]
    fn method_keys_match_the_method_spec() {
        let e = method_spec("no-such-kind", &[], ScoreKind::Probability)
            .err()
            .unwrap()
            .to_string();
        let kinds: BTreeSet<String> = method_keys().iter().map(|(k, _)| k.to_string()).collect();
        assert_eq!(expected_names(&e), kinds, "{e}");
        let sample = |key: &str| match key {
            "target_smoothing" => "true",
            "pseudo_count" => "1",
            "shape" => "tied",
            "bins" => "5",
            "intervals" => "8",
            "lambda" => "2",
            "criterion" => "bic",
            other => panic!("no sample value for `{other}`"),
        };
        for (kind, keys) in method_keys() {
            for (key, _) in keys {
                let set = vec![format!("{key}={}", sample(key))];
                method_spec(kind, &set, ScoreKind::Margin)
                    .unwrap_or_else(|e| panic!("{kind} {set:?}: {e}"));
            }
            let e = method_spec(kind, &["zz_unknown=1".into()], ScoreKind::Probability)
                .err()
                .unwrap()
                .to_string();
            assert!(e.contains("unknown field `zz_unknown`"), "{kind}: {e}");
            let want: BTreeSet<String> = keys.iter().map(|(k, _)| k.to_string()).collect();
            assert_eq!(expected_names(&e), want, "{kind}: {e}");
        }
        // The long help shows every key.
        let mut cmd = <FitArgs as clap::Args>::augment_args(clap::Command::new("fit"));
        let help = cmd.render_long_help().to_string();
        for (kind, keys) in method_keys() {
            let line = help
                .lines()
                .find(|l| l.trim_start().starts_with(&format!("{kind}: ")))
                .unwrap_or_else(|| panic!("no line for {kind} in {help}"));
            for (key, _) in keys {
                assert!(line.contains(key), "{kind}: {line}");
            }
        }
    }
}
