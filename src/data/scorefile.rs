//! Score files: a team's own held-out scores, as CSV (optionally gzip-compressed
//! when the name ends in `.gz`) with a header row.
//!
//! The suite names the score column, the label column (0/1 or true/false), the
//! score kind, and optionally a split column pinning each row to the calibration
//! reservoir (`calibration`) or the test set (`test`) and a column with known true
//! probabilities (only simulated data has one). Every problem is reported with
//! the file, the line, the column and the offending value; nothing panics.

use std::fs::File;
use std::io::{BufReader, Read};
use std::path::{Path, PathBuf};

use crate::calibrate::ScoreKind;
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
}

/// A problem with a score file.
#[derive(Debug, thiserror::Error)]
pub enum ScoreFileError {
    #[error("{path}: cannot read: {source}")]
    Io {
        path: String,
        source: std::io::Error,
    },
    #[error("{path}: the file is empty (no header row)")]
    NoHeader { path: String },
    #[error("{path}: the file has a header but no data rows")]
    NoRows { path: String },
    #[error(
        "{path}: no column named `{column}` (the suite's {role}); the header has: {available}"
    )]
    MissingColumn {
        path: String,
        column: String,
        role: &'static str,
        available: String,
    },
    #[error("{path}:{line}: column `{column}` (field {field}): {problem}: `{value}`")]
    BadValue {
        path: String,
        line: u64,
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
}

fn open(path: &Path) -> Result<Box<dyn Read>, ScoreFileError> {
    let f = File::open(path).map_err(|e| ScoreFileError::Io {
        path: path.display().to_string(),
        source: e,
    })?;
    let r = BufReader::new(f);
    if path.extension().is_some_and(|e| e == "gz") {
        Ok(Box::new(flate2::read::MultiGzDecoder::new(r)))
    } else {
        Ok(Box::new(r))
    }
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

/// Read and validate a score file.
pub fn load(spec: &ScoreFileSpec) -> Result<LoadedScores, ScoreFileError> {
    let path = spec.path.display().to_string();
    let reader = open(&spec.path)?;
    let mut rdr = csv::ReaderBuilder::new()
        .has_headers(true)
        .flexible(false)
        .from_reader(reader);
    let headers = match rdr.headers() {
        Ok(h) => h.clone(),
        Err(e) => return Err(csv_error(&path, e)),
    };
    if headers.is_empty() || (headers.len() == 1 && headers[0].trim().is_empty()) {
        return Err(ScoreFileError::NoHeader { path });
    }
    let header_line = headers.position().map(|p| p.line()).unwrap_or(1);
    let mut seen: std::collections::BTreeMap<&str, usize> = std::collections::BTreeMap::new();
    for (j, h) in headers.iter().enumerate() {
        if let Some(&i) = seen.get(h.trim()) {
            return Err(ScoreFileError::DuplicateColumn {
                path,
                line: header_line,
                column: h.trim().to_string(),
                first: i + 1,
                second: j + 1,
            });
        }
        seen.insert(h.trim(), j);
    }
    let available = headers
        .iter()
        .map(|h| format!("`{h}`"))
        .collect::<Vec<_>>()
        .join(", ");
    let find = |name: &str, role: &'static str| -> Result<usize, ScoreFileError> {
        headers
            .iter()
            .position(|h| h.trim() == name)
            .ok_or_else(|| ScoreFileError::MissingColumn {
                path: path.clone(),
                column: name.to_string(),
                role,
                available: available.clone(),
            })
    };
    let si = find(&spec.score_column, "score_column")?;
    let li = find(&spec.label_column, "label_column")?;
    let pi = spec
        .split_column
        .as_deref()
        .map(|c| find(c, "split_column"))
        .transpose()?;
    let ti = spec
        .truth_column
        .as_deref()
        .map(|c| find(c, "truth_column"))
        .transpose()?;

    let mut scores = Vec::new();
    let mut labels = Vec::new();
    let mut sides = pi.map(|_| Vec::new());
    let mut truth = ti.map(|_| Vec::new());
    let mut record = csv::StringRecord::new();
    loop {
        match rdr.read_record(&mut record) {
            Ok(false) => break,
            Ok(true) => {}
            Err(e) => return Err(csv_error(&path, e)),
        }
        let line = record.position().map(|p| p.line()).unwrap_or(0);
        let bad = |col: usize, problem: &str| ScoreFileError::BadValue {
            path: path.clone(),
            line,
            column: headers[col].to_string(),
            field: col + 1,
            value: record[col].to_string(),
            problem: problem.to_string(),
        };
        let raw = record[si].trim();
        let s: f64 = raw.parse().map_err(|_| bad(si, "not a number"))?;
        if !s.is_finite() {
            return Err(bad(si, "scores must be finite"));
        }
        if spec.score_kind == ScoreKind::Probability && !(0.0..=1.0).contains(&s) {
            return Err(bad(si, "a probability score must lie in [0, 1] (use score_kind = \"margin\" for other scores)"));
        }
        let y =
            parse_label(&record[li]).ok_or_else(|| bad(li, "a label must be 0/1 or true/false"))?;
        if let (Some(i), Some(v)) = (pi, sides.as_mut()) {
            let side = match record[i].trim() {
                "calibration" => Side::Reservoir,
                "test" => Side::Test,
                _ => return Err(bad(i, "the split column must say `calibration` or `test`")),
            };
            v.push(side);
        }
        if let (Some(i), Some(v)) = (ti, truth.as_mut()) {
            let t: f64 = record[i]
                .trim()
                .parse()
                .map_err(|_| bad(i, "not a number"))?;
            if !(0.0..=1.0).contains(&t) {
                return Err(bad(i, "a true probability must lie in [0, 1]"));
            }
            v.push(t);
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
    Ok(LoadedScores {
        pool: ScorePool {
            scores,
            labels,
            sides,
        },
        truth,
    })
}

fn csv_error(path: &str, e: csv::Error) -> ScoreFileError {
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
        csv::ErrorKind::Io(err) => ScoreFileError::Io {
            path: path.to_string(),
            source: std::io::Error::new(err.kind(), err.to_string()),
        },
        _ => ScoreFileError::Csv {
            path: path.to_string(),
            line,
            message: e.to_string(),
        },
    }
}
