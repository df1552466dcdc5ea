//! Score files: a team's own held-out scores, as CSV with a header row
//! (gzip-compressed when the name ends in `.gz`) or Parquet (`.parquet`,
//! `.pq`); see [`super::rows`].
//!
//! The suite names the score column, the label column (0/1 or true/false), the
//! score kind, and optionally a split column pinning each row to the calibration
//! reservoir (`calibration`) or the test set (`test`) and a column with known true
//! probabilities (only simulated data has one). Every problem is reported with
//! the file, the line, the column and the offending value; nothing panics.

use std::path::PathBuf;

use crate::calibrate::ScoreKind;
use crate::data::rows::{Loc, RowSource};
use crate::data::{ScorePool, Side};

/// Which columns of a score file to read.
#[derive(Debug, Clone, PartialEq)]
pub struct ScoreFileSpec {
    pub path: PathBuf,
    pub score_column: String,
    pub label_column: String,
    pub score_kind: ScoreKind,
    pub split_column: Option<String>,
    pub truth_column: Option<String>,
    /// A column naming each row's fold (cross-fitted calibration data for
    /// `plumbline fit`); see [`check_folds`].
    pub fold_column: Option<String>,
    /// Who named the columns, for messages.
    pub origin: Origin,
}

/// Who named the columns of a score file: a suite (`score_column = ...`) or the
/// command line (`--score-column ...`).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Origin {
    Suite,
    CommandLine,
}

impl Origin {
    /// How a column key is named in messages, e.g. `the suite's score_column`.
    pub fn role(self, key: &str) -> String {
        match self {
            Origin::Suite => format!("the suite's {key}"),
            Origin::CommandLine => format!("--{}", key.replace('_', "-")),
        }
    }
}

/// A problem with a score file.
#[derive(Debug, thiserror::Error)]
pub enum ScoreFileError {
    // The I/O error is part of the message, not a `source`: shown once.
    #[error("{path}: cannot read: {error}")]
    Io { path: String, error: std::io::Error },
    #[error("{path}: the file is empty (no header row)")]
    NoHeader { path: String },
    #[error("{path}: the file has a header but no data rows")]
    NoRows { path: String },
    #[error("{path}: no column named `{column}` ({role}); {detail}")]
    MissingColumn {
        path: String,
        column: String,
        role: String,
        /// Every column the command reads (e.g. "expected columns `score`,
        /// `label`") and what the header holds: its column names (cut and
        /// escaped), or for a file that does not look like CSV only a short
        /// prefix.
        detail: String,
    },
    #[error("{path}: {role} is empty: name a column of the file")]
    EmptyColumnName { path: String, role: String },
    #[error("{path}{at}: column `{column}` (field {field}): {problem}: `{value}`")]
    BadValue {
        path: String,
        at: Loc,
        column: String,
        field: usize,
        value: String,
        problem: String,
    },
    #[error("{path}:{line}: row has {found} fields but the header has {expected}")]
    Ragged {
        path: String,
        line: u64,
        expected: u64,
        found: u64,
    },
    #[error("{path}:{line}: not valid CSV: {message}")]
    Csv {
        path: String,
        line: u64,
        message: String,
    },
    #[error(
        "{path}:{line}: the header names column `{column}` twice (fields {first} and {second})"
    )]
    DuplicateColumn {
        path: String,
        line: u64,
        column: String,
        first: usize,
        second: usize,
    },
    #[error("{path}: every row has label {label}: a calibration comparison needs both classes")]
    OneClass { path: String, label: u8 },
    #[error("{path}{at}: not a readable Parquet file: {message}")]
    Parquet {
        path: String,
        at: String,
        message: String,
    },
    #[error(
        "{path}: column `{column}` is nested (group, list or map); score files need flat columns"
    )]
    Nested { path: String, column: String },
    #[error("{path}: fold column `{column}`: {problem}")]
    Folds {
        path: String,
        column: String,
        problem: String,
    },
    #[error("{path}:{line}: a line or record longer than {limit}: not a score file, or a quoted field that never closes")]
    LineTooLong {
        path: String,
        line: u64,
        limit: String,
    },
    #[error(
        "{path}:{line}: the decompressed text passes {limit}; refused as a possible gzip bomb"
    )]
    Decompressed {
        path: String,
        line: u64,
        limit: String,
    },
    #[error("{path}: {message}")]
    Limit { path: String, message: String },
    #[error("{path}: the split column `{column}` puts no row in the {side}")]
    EmptySide {
        path: String,
        column: String,
        side: &'static str,
    },
}

/// A loaded score file.
#[derive(Debug, Clone)]
pub struct LoadedScores {
    pub pool: ScorePool,
    /// Known true probabilities per row, when the file has a truth column.
    pub truth: Option<Vec<f64>>,
    /// Fold index per row (in order of first appearance) and the fold names,
    /// when the spec names a fold column.
    pub folds: Option<(Vec<u32>, Vec<String>)>,
}

/// Parse a label: 0/1 or true/false (any letter case), surrounding spaces allowed.
pub fn parse_label(s: &str) -> Option<bool> {
    let t = s.trim();
    match t {
        "0" => Some(false),
        "1" => Some(true),
        _ if t.eq_ignore_ascii_case("false") => Some(false),
        _ if t.eq_ignore_ascii_case("true") => Some(true),
        _ => None,
    }
}

/// The problem of a probability score outside [0, 1]; each command adds
/// what to do about it in its own terms ([`ScoreFileError::with_range_hint`]).
pub const NOT_A_PROBABILITY: &str = "a probability score must lie in [0, 1]";

impl ScoreFileError {
    /// Add `hint` to the message of a probability score outside [0, 1]
    /// (other errors are returned as they are).
    pub fn with_range_hint(mut self, hint: &str) -> Self {
        if let ScoreFileError::BadValue { problem, .. } = &mut self {
            if problem == NOT_A_PROBABILITY {
                *problem = format!("{NOT_A_PROBABILITY} ({hint})");
            }
        }
        self
    }
}

/// Parse a score field: a finite number, inside [0, 1] for probability scores.
/// `Err` holds the problem for the message.
pub fn parse_score(raw: &[u8], kind: ScoreKind) -> Result<f64, &'static str> {
    let text = std::str::from_utf8(raw).map_err(|_| "not a number")?.trim();
    let s: f64 = text.parse().map_err(|_| "not a number")?;
    if !s.is_finite() {
        return Err("scores must be finite");
    }
    if kind == ScoreKind::Probability && !(0.0..=1.0).contains(&s) {
        return Err(NOT_A_PROBABILITY);
    }
    Ok(s)
}

/// Position of a named column, or the located error.
pub fn find_column(src: &RowSource, name: &str, role: String) -> Result<usize, ScoreFileError> {
    find_column_of(src, name, role, &[name])
}

/// [`find_column`], naming every column the command reads (`expected`) in
/// the message when one is missing.
fn find_column_of(
    src: &RowSource,
    name: &str,
    role: String,
    expected: &[&str],
) -> Result<usize, ScoreFileError> {
    if name.trim().is_empty() {
        return Err(ScoreFileError::EmptyColumnName {
            path: src.path().to_string(),
            role,
        });
    }
    src.headers()
        .iter()
        .position(|h| h.trim() == name)
        .ok_or_else(|| ScoreFileError::MissingColumn {
            path: src.path().to_string(),
            column: name.to_string(),
            role,
            detail: format!(
                "expected column{} {}; {}",
                if expected.len() == 1 { "" } else { "s" },
                expected
                    .iter()
                    .map(|c| crate::limits::quoted_prefix(c.as_bytes(), 40))
                    .collect::<Vec<_>>()
                    .join(", "),
                describe_header(src.headers())
            ),
        })
}

/// At most this many header names are listed in a message.
const LIST_COLUMNS: usize = 30;

/// Whether a header looks like column names: more than one field, or one
/// short field of letters, digits, spaces and `_ - .`. A file that is not a
/// score file (a log, a system file, a binary) usually fails this, and its
/// content is then not echoed.
fn plausible_header(headers: &[String]) -> bool {
    headers.len() > 1
        || headers.iter().all(|h| {
            h.chars().count() <= 64
                && h.chars()
                    .all(|c| c.is_alphanumeric() || matches!(c, '_' | '-' | '.' | ' '))
        })
}

/// The header for a message: the number of columns and their names (each cut
/// to 40 characters and escaped, at most 30), or for a header that does not
/// look like column names, only an escaped prefix of 8 characters.
fn describe_header(headers: &[String]) -> String {
    let n = headers.len();
    let plural = if n == 1 { "" } else { "s" };
    if !plausible_header(headers) {
        let first = headers.first().map(String::as_str).unwrap_or("");
        return format!(
            "the header has {n} column{plural} and does not look like CSV column names (it starts {}); is this a score file?",
            crate::limits::quoted_prefix(first.as_bytes(), 8)
        );
    }
    let mut names: Vec<String> = headers
        .iter()
        .take(LIST_COLUMNS)
        .map(|h| crate::limits::quoted_prefix(h.as_bytes(), 40))
        .collect();
    if n > LIST_COLUMNS {
        names.push(format!("… ({} more)", n - LIST_COLUMNS));
    }
    format!("the header has {n} column{plural}: {}", names.join(", "))
}

/// The error for a bad field of the row just read.
pub fn bad_value(
    src: &RowSource,
    rec: &csv::ByteRecord,
    col: usize,
    problem: &str,
) -> ScoreFileError {
    ScoreFileError::BadValue {
        path: src.path().to_string(),
        at: src.loc(),
        column: src.headers()[col].to_string(),
        field: col + 1,
        value: {
            // The field, cut and with control characters escaped (the
            // message adds the backticks).
            let q = crate::limits::quoted_prefix(&rec[col], 80);
            q[1..q.len() - 1].to_string()
        },
        problem: problem.to_string(),
    }
}

/// Read and validate a score file.
pub fn load(spec: &ScoreFileSpec) -> Result<LoadedScores, ScoreFileError> {
    let mut src = RowSource::open(&spec.path)?;
    let path = src.path().to_string();
    let role = |k: &str| spec.origin.role(k);
    let expected: Vec<&str> = [
        Some(spec.score_column.as_str()),
        Some(spec.label_column.as_str()),
        spec.split_column.as_deref(),
        spec.truth_column.as_deref(),
        spec.fold_column.as_deref(),
    ]
    .into_iter()
    .flatten()
    .collect();
    let find = |name: &str, key: &str| find_column_of(&src, name, role(key), &expected);
    let si = find(&spec.score_column, "score_column")?;
    let li = find(&spec.label_column, "label_column")?;
    let optional = |c: &Option<String>, key: &str| c.as_deref().map(|c| find(c, key)).transpose();
    let pi = optional(&spec.split_column, "split_column")?;
    let ti = optional(&spec.truth_column, "truth_column")?;
    let fi = optional(&spec.fold_column, "fold_column")?;

    let mut scores = Vec::new();
    let mut labels = Vec::new();
    let mut sides = pi.map(|_| Vec::new());
    let mut truth = ti.map(|_| Vec::new());
    let mut folds: Option<(Vec<u32>, Vec<String>)> = fi.map(|_| (Vec::new(), Vec::new()));
    let mut fold_index = std::collections::BTreeMap::<Vec<u8>, u32>::new();
    let mut record = csv::ByteRecord::new();
    while src.next_row(&mut record)? {
        let bad = |col: usize, problem: &str| bad_value(&src, &record, col, problem);
        let text = |col: usize| {
            std::str::from_utf8(&record[col])
                .unwrap_or("\u{fffd}")
                .trim()
        };
        let s = parse_score(&record[si], spec.score_kind).map_err(|p| match spec.origin {
            Origin::Suite => {
                bad(si, p).with_range_hint("use score_kind = \"margin\" for other scores")
            }
            // The command names its own flag (or says what it reads).
            Origin::CommandLine => bad(si, p),
        })?;
        let y =
            parse_label(text(li)).ok_or_else(|| bad(li, "a label must be 0/1 or true/false"))?;
        if let (Some(i), Some(v)) = (pi, sides.as_mut()) {
            let side = match text(i) {
                "calibration" => Side::Reservoir,
                "test" => Side::Test,
                _ => return Err(bad(i, "the split column must say `calibration` or `test`")),
            };
            v.push(side);
        }
        if let (Some(i), Some(v)) = (ti, truth.as_mut()) {
            let t: f64 = text(i).parse().map_err(|_| bad(i, "not a number"))?;
            if !(0.0..=1.0).contains(&t) {
                return Err(bad(i, "a true probability must lie in [0, 1]"));
            }
            v.push(t);
        }
        if let (Some(i), Some((idx, names))) = (fi, folds.as_mut()) {
            let key = record[i].trim_ascii();
            if key.is_empty() {
                return Err(bad(i, "every row must name its fold (the field is empty)"));
            }
            let next = fold_index.len() as u32;
            let k = *fold_index.entry(key.to_vec()).or_insert_with(|| {
                names.push(String::from_utf8_lossy(key).into_owned());
                next
            });
            idx.push(k);
        }
        scores.push(s);
        labels.push(y);
    }
    if scores.is_empty() {
        return Err(ScoreFileError::NoRows { path });
    }
    let pos = labels.iter().filter(|&&y| y).count();
    if pos == 0 || pos == labels.len() {
        return Err(ScoreFileError::OneClass {
            path,
            label: if pos == 0 { 0 } else { 1 },
        });
    }
    if let (Some(v), Some(c)) = (&sides, &spec.split_column) {
        for (side, name) in [
            (Side::Reservoir, "calibration reservoir"),
            (Side::Test, "test set"),
        ] {
            if !v.contains(&side) {
                return Err(ScoreFileError::EmptySide {
                    path,
                    column: c.clone(),
                    side: name,
                });
            }
        }
    }
    if let (Some((idx, names)), Some(c)) = (&folds, &spec.fold_column) {
        check_folds(idx, names, &labels).map_err(|problem| ScoreFileError::Folds {
            path: path.clone(),
            column: c.clone(),
            problem,
        })?;
    }
    Ok(LoadedScores {
        pool: ScorePool {
            scores,
            labels,
            sides,
        },
        truth,
        folds,
    })
}

/// Checks on cross-fitted calibration data: more than one fold, and both classes
/// in every fold (a fold of one class means its model was scored on rows it
/// could not have been compared on). Every row naming exactly one fold is
/// checked while reading (an empty fold field is an error).
pub fn check_folds(idx: &[u32], names: &[String], labels: &[bool]) -> Result<(), String> {
    if names.len() < 2 {
        return Err(format!(
            "every row is in fold `{}`: cross-fitted data needs more than one fold",
            names.first().map(String::as_str).unwrap_or("")
        ));
    }
    let mut counts = vec![(0usize, 0usize); names.len()];
    for (&k, &y) in idx.iter().zip(labels) {
        let c = &mut counts[k as usize];
        c.0 += 1;
        c.1 += y as usize;
    }
    for (name, &(rows, pos)) in names.iter().zip(&counts) {
        if pos == 0 || pos == rows {
            return Err(format!(
                "fold `{name}` has {rows} rows, all with label {}: every fold needs both classes",
                if pos == 0 { 0 } else { 1 }
            ));
        }
    }
    Ok(())
}

pub(crate) fn csv_error(path: &str, e: csv::Error) -> ScoreFileError {
    let line = e.position().map(|p| p.line()).unwrap_or(0);
    match e.kind() {
        csv::ErrorKind::UnequalLengths {
            expected_len,
            len,
            pos,
        } => ScoreFileError::Ragged {
            path: path.to_string(),
            line: pos.as_ref().map(|p| p.line()).unwrap_or(line),
            expected: *expected_len,
            found: *len,
        },
        csv::ErrorKind::Io(err) => {
            match err
                .get_ref()
                .and_then(|e| e.downcast_ref::<crate::data::rows::Overrun>())
            {
                Some(&crate::data::rows::Overrun::Line { line, limit }) => {
                    ScoreFileError::LineTooLong {
                        path: path.to_string(),
                        line,
                        limit: crate::limits::MAX_LINE.describe(limit),
                    }
                }
                Some(&crate::data::rows::Overrun::Decompressed { line, limit }) => {
                    ScoreFileError::Decompressed {
                        path: path.to_string(),
                        line,
                        limit: crate::limits::MAX_DECOMPRESSED.describe(limit),
                    }
                }
                None => ScoreFileError::Io {
                    path: path.to_string(),
                    error: std::io::Error::new(err.kind(), err.to_string()),
                },
            }
        }
        _ => ScoreFileError::Csv {
            path: path.to_string(),
            line,
            message: e.to_string(),
        },
    }
}
