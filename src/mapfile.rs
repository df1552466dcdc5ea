//! Map files: one fitted calibration map saved as JSON by `plumbline fit` and
//! read by `plumbline apply` (schema in docs/map-format.md).
//!
//! The file holds the method as a suite would write it, the score kind, the
//! fitted state ([`MapState`]), the tool version, a training summary and a
//! SHA-256 checksum over the canonical serialisation of everything else:
//! compact JSON with object keys sorted, numbers in the shortest form that
//! reads back to the same value. [`load`] checks, in order: valid JSON, the
//! `format` tag, the schema version (a newer one is refused, never guessed at),
//! the checksum, the typed schema (unknown keys rejected), the method's
//! parameters (the suite's `MethodSpec` checks), and the fitted state
//! ([`MapState::check`]). A map file that fails any check is never used.

use std::path::Path;

use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};

use crate::calibrate::state::MapState;
use crate::calibrate::{FittedMap, MethodSpec, ScoreKind};
use crate::suite::hex;

/// The `format` tag of every map file.
pub const FORMAT: &str = "plumbline-map";
/// The schema version this build writes and the newest it reads.
pub const SCHEMA_VERSION: u64 = 1;

/// What the map was fitted on.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Training {
    /// The score file as named on the command line.
    pub source: String,
    pub score_column: String,
    pub label_column: String,
    pub fold_column: Option<String>,
    pub rows: u64,
    pub positives: u64,
    /// Smallest and largest training score: the fitted range.
    pub score_min: f64,
    pub score_max: f64,
    pub distinct_scores: u64,
    /// Folds and their row counts, for cross-fitted data (`fold_column`).
    pub folds: Option<Vec<FoldSummary>>,
    /// The fit's notes (e.g. `separable`), as in the unit status of a run.
    pub notes: Vec<String>,
    /// SHA-256 (hex) of the score file's bytes as stored; `None` when the
    /// scores came from standard input or another stream that cannot be
    /// read twice. Absent in maps written before it was recorded.
    #[serde(default)]
    pub source_sha256: Option<String>,
    /// Wall-clock time of the fit, kept only in maps written before maps
    /// became byte-identical for the same inputs; never written now.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub fit_seconds: Option<f64>,
}

/// One fold of cross-fitted calibration data.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FoldSummary {
    pub fold: String,
    pub rows: u64,
    pub positives: u64,
}

/// A map file's content (everything but the checksum).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct MapContent {
    pub format: String,
    pub schema_version: u64,
    pub tool_version: String,
    pub method: MethodSpec,
    pub score_kind: ScoreKind,
    pub training: Training,
    pub fitted: MapState,
}

/// A map file that cannot be used.
#[derive(Debug, thiserror::Error)]
pub enum MapFileError {
    // The I/O error is part of the message, not a `source`: shown once.
    #[error("{path}: cannot read the map file: {error}")]
    Io { path: String, error: std::io::Error },
    #[error("{path}: cannot read the map file: {message}")]
    Read { path: String, message: String },
    #[error("{path}: not a valid map file: {message} (truncated or not JSON)")]
    Json { path: String, message: String },
    #[error("{path}: not a plumbline map file (`format` is {found}, expected \"{FORMAT}\")")]
    Format { path: String, found: String },
    #[error("{path}: map schema version {found} is newer than this plumbline {tool} reads (up to {SCHEMA_VERSION}); use a newer plumbline")]
    Newer {
        path: String,
        found: u64,
        tool: &'static str,
    },
    #[error(
        "{path}: `schema_version` is {found}: expected a whole number from 1 to {SCHEMA_VERSION}"
    )]
    BadVersion { path: String, found: String },
    #[error("{path}: checksum mismatch: the content hashes to sha256:{actual} but the file records {recorded}; the map was edited or damaged, refit it with plumbline fit")]
    Checksum {
        path: String,
        actual: String,
        recorded: String,
    },
    #[error("{path}: {message}")]
    Schema { path: String, message: String },
    #[error("{path}: method parameters: {message}")]
    Method { path: String, message: String },
    #[error("{path}: fitted map ({kind}): {message}")]
    State {
        path: String,
        kind: &'static str,
        message: String,
    },
}

/// Canonical text of a JSON value: compact, object keys sorted by their bytes.
pub fn canonical(v: &serde_json::Value, out: &mut String) {
    match v {
        serde_json::Value::Object(m) => {
            let mut keys: Vec<&String> = m.keys().collect();
            keys.sort();
            out.push('{');
            for (i, k) in keys.into_iter().enumerate() {
                if i > 0 {
                    out.push(',');
                }
                out.push_str(&serde_json::Value::String(k.clone()).to_string());
                out.push(':');
                canonical(&m[k], out);
            }
            out.push('}');
        }
        serde_json::Value::Array(a) => {
            out.push('[');
            for (i, x) in a.iter().enumerate() {
                if i > 0 {
                    out.push(',');
                }
                canonical(x, out);
            }
            out.push(']');
        }
        scalar => out.push_str(&scalar.to_string()),
    }
}

/// `sha256:<hex>` of the canonical text of `v`.
pub fn checksum(v: &serde_json::Value) -> String {
    let mut s = String::new();
    canonical(v, &mut s);
    format!("sha256:{}", hex(&Sha256::digest(s.as_bytes())))
}

/// The bytes of a map file for `content` (pretty JSON with the checksum last).
pub fn to_bytes(content: &MapContent) -> Result<Vec<u8>, String> {
    content
        .fitted
        .check()
        .map_err(|e| format!("the fitted map cannot be saved: {e}"))?;
    let v = serde_json::to_value(content).map_err(|e| e.to_string())?;
    let sum = checksum(&v);
    let serde_json::Value::Object(mut m) = v else {
        return Err("map content is not an object".into());
    };
    m.insert("checksum".into(), serde_json::Value::String(sum));
    let mut bytes = serde_json::to_vec_pretty(&m).map_err(|e| e.to_string())?;
    bytes.push(b'\n');
    Ok(bytes)
}

/// A loaded, checked map file.
pub struct LoadedMap {
    pub content: MapContent,
    pub map: Box<dyn FittedMap>,
}

/// Parse and check map-file bytes; `path` names the file in messages.
pub fn from_bytes(path: &str, bytes: &[u8]) -> Result<LoadedMap, MapFileError> {
    let p = || path.to_string();
    let v: serde_json::Value = serde_json::from_slice(bytes).map_err(|e| MapFileError::Json {
        path: p(),
        message: e.to_string(),
    })?;
    let serde_json::Value::Object(mut m) = v else {
        return Err(MapFileError::Json {
            path: p(),
            message: "the top level is not a JSON object".into(),
        });
    };
    match m.get("format") {
        Some(serde_json::Value::String(s)) if s == FORMAT => {}
        other => {
            return Err(MapFileError::Format {
                path: p(),
                found: other.map_or("missing".into(), |v| v.to_string()),
            })
        }
    }
    match m.get("schema_version") {
        Some(serde_json::Value::Number(n)) if n.as_u64().is_some_and(|x| x >= 1) => {
            let found = n.as_u64().unwrap_or(0);
            if found > SCHEMA_VERSION {
                return Err(MapFileError::Newer {
                    path: p(),
                    found,
                    tool: env!("CARGO_PKG_VERSION"),
                });
            }
        }
        other => {
            return Err(MapFileError::BadVersion {
                path: p(),
                found: other.map_or("missing".into(), |v| v.to_string()),
            })
        }
    }
    let recorded = match m.remove("checksum") {
        Some(serde_json::Value::String(s)) => s,
        Some(other) => other.to_string(),
        None => "no checksum".into(),
    };
    let content_value = serde_json::Value::Object(m);
    let actual = checksum(&content_value);
    if actual != recorded {
        return Err(MapFileError::Checksum {
            path: p(),
            actual: actual.trim_start_matches("sha256:").to_string(),
            recorded,
        });
    }
    let content: MapContent =
        serde_json::from_value(content_value).map_err(|e| MapFileError::Schema {
            path: p(),
            message: e.to_string(),
        })?;
    content
        .method
        .validate(content.score_kind)
        .map_err(|e| MapFileError::Method {
            path: p(),
            message: e.to_string(),
        })?;
    if content.fitted.kind() != content.method.kind() {
        return Err(MapFileError::State {
            path: p(),
            kind: content.fitted.kind(),
            message: format!(
                "the fitted map is of kind `{}` but the method is `{}`",
                content.fitted.kind(),
                content.method.kind()
            ),
        });
    }
    let state_kind = content.fitted.score_kind();
    if state_kind.is_some_and(|k| k != content.score_kind) {
        return Err(MapFileError::State {
            path: p(),
            kind: content.fitted.kind(),
            message: format!(
                "the fitted map reads {} scores but the file says score_kind = {}",
                state_kind.map_or("", |k| k.as_str()),
                content.score_kind.as_str()
            ),
        });
    }
    let map = content
        .fitted
        .rebuild()
        .map_err(|message| MapFileError::State {
            path: p(),
            kind: content.fitted.kind(),
            message,
        })?;
    Ok(LoadedMap { content, map })
}

/// Read and check a map file.
pub fn load(path: &Path) -> Result<LoadedMap, MapFileError> {
    let name = path.display().to_string();
    let bytes = crate::limits::read_bounded(path, &crate::limits::MAX_MAP).map_err(|message| {
        MapFileError::Read {
            path: name.clone(),
            message,
        }
    })?;
    from_bytes(&name, &bytes)
}
