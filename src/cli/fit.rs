//! `plumbline fit`: fit one method on a score file and save the map file.
//!
//! The method is given as a kind (`--method isotonic`) plus parameters
//! (`--set pseudo_count=1`), read into the same [`MethodSpec`] a suite's method
//! table becomes and checked by the same `MethodSpec::validate`, so the map is
//! fitted by exactly the implementation a benchmark run compares. Before the map
//! file is written it is read back through [`mapfile::from_bytes`] and its
//! predictions on the training scores are compared bit for bit with the fitted
//! map's, so a map that would not reproduce its fit is never saved.

use std::path::PathBuf;
use std::time::Instant;

use anyhow::{bail, Context, Result};
use serde::Deserialize;

use crate::calibrate::{MethodSpec, ScoreKind};
use crate::data::scorefile::{self, Origin, ScoreFileSpec};
use crate::mapfile::{self, FoldSummary, MapContent, Training};

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
    /// Method kind, as in a suite's `kind` key: identity, platt, isotonic, beta,
    /// binning, temperature, centered-isotonic, spline, venn-abers.
    #[arg(long, value_name = "ID")]
    pub method: String,
    /// A method parameter, as in a suite (repeatable), e.g. `--set pseudo_count=1`.
    #[arg(long = "set", value_name = "KEY=VALUE")]
    pub set: Vec<String>,
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

/// The method spec of `--method` and `--set`, checked for `kind` scores.
pub fn method_spec(method: &str, set: &[String], kind: ScoreKind) -> Result<MethodSpec> {
    super::require_name(
        "--method",
        method,
        "give a method kind: identity, platt, isotonic, beta, binning, temperature, centered-isotonic, spline or venn-abers",
    )?;
    let mut table = toml::Table::new();
    table.insert("kind".into(), toml::Value::String(method.to_string()));
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
        if table.insert(k.to_string(), toml_value(v.trim())).is_some() {
            bail!("--set {s}: `{k}` is set twice");
        }
    }
    let spec = MethodSpec::deserialize(toml::Value::Table(table))
        .map_err(|e| anyhow::anyhow!("--method {method}: {}", e.message()))?;
    spec.validate(kind)
        .map_err(|e| anyhow::anyhow!("--set {e}"))?;
    Ok(spec)
}

/// Run `plumbline fit`.
pub fn run(args: &FitArgs) -> Result<FitSummary> {
    let kind: ScoreKind = args.score_kind.into();
    let spec = method_spec(&args.method, &args.set, kind)?;
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
    let loaded = scorefile::load(&fspec)?;
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
    super::write_atomic(&args.out, &bytes)?;
    Ok(FitSummary {
        content,
        out: args.out.clone(),
        fit_seconds,
    })
}

/// One line about a written map, for the terminal.
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
    format!(
        "{} fitted on {} rows ({} positive, {} distinct scores in [{}, {}]){folds} in {:.3} s{notes} → {}",
        s.content.method.kind(),
        t.rows,
        t.positives,
        t.distinct_scores,
        t.score_min,
        t.score_max,
        s.fit_seconds,
        s.out.display()
    )
}
