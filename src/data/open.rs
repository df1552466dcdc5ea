//! Open datasets shipped in `data-open/` and the binary tasks defined on them.
//!
//! `data-open/manifest.toml` lists every dataset (file, SHA-256, row count,
//! class counts, feature names, nominal columns, provenance) and every task
//! (dataset, the explicit list of class values that count as positive, and
//! the expected number of positive rows). Before a file is used its SHA-256,
//! row count, header and per-class counts are checked against the manifest;
//! any mismatch is refused with an error that names the file and both values.
//!
//! Files are gzip-compressed CSV with one header row: the feature columns in
//! order, then the original class column. Numeric columns must parse as finite
//! numbers. A nominal column is coded 0, 1, …, L−1 by the position of its
//! value in the byte-wise sorted list of the L distinct values found in the
//! file. Missing values are not allowed: the shipped datasets have none, and
//! an empty field, `NA` or `?` is refused with the file, line and column.
//!
//! Datasets marked `generated = true` (twonorm) have no file; they are drawn
//! from the manifest's `seed` and row count, so callers treat every task alike.

use std::collections::{BTreeMap, BTreeSet, HashMap};
use std::io::Read;
use std::path::{Path, PathBuf};

use serde::Deserialize;
use sha2::{Digest, Sha256};

use super::{twonorm, Dataset, FeatureKind};

/// Name of the manifest inside a data directory.
pub const MANIFEST_FILE: &str = "manifest.toml";

/// The data directory of a source checkout, relative to its root.
pub const DEFAULT_DATA_DIR: &str = "data-open";

/// Manifest format this loader reads.
pub const MANIFEST_FORMAT: u32 = 1;

#[derive(Debug, thiserror::Error)]
pub enum OpenDataError {
    // The I/O error is part of the message, not a `source`: shown once.
    #[error("cannot read {path}: {error}")]
    Io {
        path: PathBuf,
        error: std::io::Error,
    },
    #[error("manifest {path}: {message}")]
    Manifest { path: PathBuf, message: String },
    #[error("unknown open-data task {id:?}; known tasks: {known}")]
    UnknownTask { id: String, known: String },
    #[error("{file}: SHA-256 is {found}, the manifest expects {expected}; the file is damaged or was changed")]
    Checksum {
        file: PathBuf,
        expected: String,
        found: String,
    },
    #[error("{file}: {found} data rows, the manifest expects {expected}")]
    RowCount {
        file: PathBuf,
        expected: usize,
        found: usize,
    },
    #[error("{file}: class {class:?} has {found} rows, the manifest expects {expected}")]
    ClassCount {
        file: PathBuf,
        class: String,
        expected: usize,
        found: usize,
    },
    #[error("{file}: header is [{found}], the manifest expects [{expected}]")]
    Header {
        file: PathBuf,
        expected: String,
        found: String,
    },
    #[error("{file}: not a readable gzip stream: {message}")]
    Gzip { file: PathBuf, message: String },
    #[error("{file}, line {line}: {message}")]
    Parse {
        file: PathBuf,
        line: u64,
        message: String,
    },
    #[error("{file}, line {line}, column {column:?}: missing value {value:?}; open datasets must be complete")]
    Missing {
        file: PathBuf,
        line: u64,
        column: String,
        value: String,
    },
    #[error("task {task:?}: {found} positive rows, the manifest expects {expected}")]
    Positives {
        task: String,
        expected: usize,
        found: usize,
    },
}

/// The whole manifest.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Manifest {
    pub format: u32,
    #[serde(rename = "dataset", default)]
    pub datasets: Vec<DatasetEntry>,
    #[serde(rename = "task", default)]
    pub tasks: Vec<TaskEntry>,
}

/// One dataset: a shipped file or a generated set.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DatasetEntry {
    pub id: String,
    /// File name inside the data directory (absent when generated).
    pub file: Option<String>,
    /// Lower-case hex SHA-256 of the file (absent when generated).
    pub sha256: Option<String>,
    #[serde(default)]
    pub generated: bool,
    /// Seed of a generated dataset.
    pub seed: Option<u64>,
    pub rows: usize,
    pub original_name: String,
    pub citation: String,
    pub licence: String,
    pub registry: Option<String>,
    pub package: Option<String>,
    pub version: Option<String>,
    /// Path of the source inside the package.
    pub member: Option<String>,
    /// How a shipped file was subsampled from the source, if it was.
    pub subsample: Option<String>,
    pub class_column: String,
    /// Feature column names in file order (all columns but the class).
    #[serde(default)]
    pub features: Vec<String>,
    /// The feature columns that are nominal; the rest are numeric.
    #[serde(default)]
    pub nominal: Vec<String>,
    pub class_counts: BTreeMap<String, usize>,
    pub notes: Option<String>,
}

/// One binary task on a dataset.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TaskEntry {
    pub id: String,
    pub dataset: String,
    /// Class values that make a row positive.
    pub positive: Vec<String>,
    /// Expected count of positive rows.
    pub positives: usize,
}

/// A task as `list_tasks` reports it.
#[derive(Debug, Clone, PartialEq)]
pub struct TaskSummary {
    pub id: String,
    pub dataset: String,
    pub rows: usize,
    pub positives: usize,
    pub features: usize,
    pub nominal: usize,
    pub original_name: String,
    pub generated: bool,
}

impl TaskSummary {
    pub fn base_rate(&self) -> f64 {
        self.positives as f64 / self.rows as f64
    }
}

fn manifest_error(path: &Path, message: impl Into<String>) -> OpenDataError {
    OpenDataError::Manifest {
        path: path.to_path_buf(),
        message: message.into(),
    }
}

/// Read and check the manifest of `data_dir`: unique ids, every task's
/// dataset present, every positive class value a known class, nominal columns
/// among the features, files and checksums present for non-generated sets,
/// and each task's expected positives equal to the sum of its classes' counts.
pub fn read_manifest(data_dir: &Path) -> Result<Manifest, OpenDataError> {
    let path = data_dir.join(MANIFEST_FILE);
    let text = std::fs::read_to_string(&path).map_err(|error| OpenDataError::Io {
        path: path.clone(),
        error,
    })?;
    let manifest: Manifest =
        toml::from_str(&text).map_err(|e| manifest_error(&path, e.to_string()))?;
    check_manifest(&path, &manifest)?;
    Ok(manifest)
}

fn check_manifest(path: &Path, m: &Manifest) -> Result<(), OpenDataError> {
    if m.format != MANIFEST_FORMAT {
        return Err(manifest_error(
            path,
            format!(
                "format {} is not supported (this build reads format {MANIFEST_FORMAT})",
                m.format
            ),
        ));
    }
    let mut by_id: HashMap<&str, &DatasetEntry> = HashMap::new();
    for d in &m.datasets {
        if by_id.insert(d.id.as_str(), d).is_some() {
            return Err(manifest_error(
                path,
                format!("dataset {:?} is listed twice", d.id),
            ));
        }
        if d.generated {
            if d.id != "twonorm" {
                return Err(manifest_error(
                    path,
                    format!("dataset {:?}: the only generated dataset is twonorm", d.id),
                ));
            }
            if d.seed.is_none() {
                return Err(manifest_error(
                    path,
                    "dataset \"twonorm\": generated sets need a seed",
                ));
            }
        } else {
            if d.file.is_none() || d.sha256.is_none() {
                return Err(manifest_error(
                    path,
                    format!(
                        "dataset {:?}: a shipped dataset needs file and sha256",
                        d.id
                    ),
                ));
            }
            if d.features.is_empty() {
                return Err(manifest_error(
                    path,
                    format!("dataset {:?}: no features listed", d.id),
                ));
            }
        }
        let features: BTreeSet<&str> = d.features.iter().map(String::as_str).collect();
        if features.len() != d.features.len() {
            return Err(manifest_error(
                path,
                format!("dataset {:?}: a feature name repeats", d.id),
            ));
        }
        if let Some(n) = d.nominal.iter().find(|n| !features.contains(n.as_str())) {
            return Err(manifest_error(
                path,
                format!("dataset {:?}: nominal column {n:?} is not a feature", d.id),
            ));
        }
        let total: usize = d.class_counts.values().sum();
        if total != d.rows {
            return Err(manifest_error(
                path,
                format!(
                    "dataset {:?}: class counts add up to {total}, rows is {}",
                    d.id, d.rows
                ),
            ));
        }
    }
    let mut tasks = BTreeSet::new();
    for t in &m.tasks {
        if !tasks.insert(t.id.as_str()) {
            return Err(manifest_error(
                path,
                format!("task {:?} is listed twice", t.id),
            ));
        }
        let d = by_id.get(t.dataset.as_str()).ok_or_else(|| {
            manifest_error(path, format!("task {:?}: no dataset {:?}", t.id, t.dataset))
        })?;
        if t.positive.is_empty() {
            return Err(manifest_error(
                path,
                format!("task {:?}: empty positive list", t.id),
            ));
        }
        let mut sum = 0;
        for p in &t.positive {
            match d.class_counts.get(p) {
                Some(c) => sum += c,
                None => {
                    return Err(manifest_error(
                        path,
                        format!(
                            "task {:?}: positive class {p:?} is not a class of {:?}",
                            t.id, d.id
                        ),
                    ))
                }
            }
        }
        if sum != t.positives {
            return Err(manifest_error(
                path,
                format!(
                    "task {:?}: positives is {}, its classes count {sum}",
                    t.id, t.positives
                ),
            ));
        }
    }
    Ok(())
}

impl Manifest {
    pub fn task(&self, id: &str) -> Option<&TaskEntry> {
        self.tasks.iter().find(|t| t.id == id)
    }

    pub fn dataset(&self, id: &str) -> Option<&DatasetEntry> {
        self.datasets.iter().find(|d| d.id == id)
    }

    fn task_or_error(&self, id: &str) -> Result<(&TaskEntry, &DatasetEntry), OpenDataError> {
        let task = self.task(id).ok_or_else(|| OpenDataError::UnknownTask {
            id: id.to_string(),
            known: self
                .tasks
                .iter()
                .map(|t| t.id.as_str())
                .collect::<Vec<_>>()
                .join(", "),
        })?;
        // read_manifest checked that the dataset exists.
        let dataset = self
            .dataset(&task.dataset)
            .expect("manifest checked: every task names a listed dataset");
        Ok((task, dataset))
    }
}

/// Every task of the manifest in `data_dir`, in manifest order. Reads the
/// manifest only; files are checked when a task is loaded.
pub fn list_tasks(data_dir: &Path) -> Result<Vec<TaskSummary>, OpenDataError> {
    let m = read_manifest(data_dir)?;
    Ok(m.tasks
        .iter()
        .map(|t| {
            let d = m.dataset(&t.dataset).expect("manifest checked");
            let features = if d.generated {
                twonorm::FEATURES
            } else {
                d.features.len()
            };
            TaskSummary {
                id: t.id.clone(),
                dataset: d.id.clone(),
                rows: d.rows,
                positives: t.positives,
                features,
                nominal: d.nominal.len(),
                original_name: d.original_name.clone(),
                generated: d.generated,
            }
        })
        .collect())
}

/// Lower-case hex of a digest.
fn hex(bytes: &[u8]) -> String {
    use std::fmt::Write;
    let mut s = String::with_capacity(bytes.len() * 2);
    for b in bytes {
        let _ = write!(s, "{b:02x}");
    }
    s
}

/// SHA-256 of a byte string, lower-case hex.
pub fn sha256_hex(bytes: &[u8]) -> String {
    hex(&Sha256::digest(bytes))
}

/// Read a shipped file and check its SHA-256 against the manifest.
fn read_verified(data_dir: &Path, d: &DatasetEntry) -> Result<(PathBuf, Vec<u8>), OpenDataError> {
    let file = data_dir.join(d.file.as_deref().expect("manifest checked"));
    let bytes = std::fs::read(&file).map_err(|error| OpenDataError::Io {
        path: file.clone(),
        error,
    })?;
    let found = sha256_hex(&bytes);
    let expected = d
        .sha256
        .as_deref()
        .expect("manifest checked")
        .to_ascii_lowercase();
    if found != expected {
        return Err(OpenDataError::Checksum {
            file,
            expected,
            found,
        });
    }
    Ok((file, bytes))
}

/// A digest of everything that decides a task's rows and labels, for cache
/// keys: the task id and positive classes, and the verified file SHA-256 (or,
/// for a generated set, its generator, seed and row count). Verifies the file.
pub fn dataset_digest(data_dir: &Path, task_id: &str) -> Result<String, OpenDataError> {
    let m = read_manifest(data_dir)?;
    let (task, d) = m.task_or_error(task_id)?;
    let mut h = Sha256::new();
    h.update(b"plumbline open task v1\0");
    h.update(task.id.as_bytes());
    h.update(b"\0");
    for p in &task.positive {
        h.update(p.as_bytes());
        h.update(b"\0");
    }
    if d.generated {
        h.update(
            format!(
                "generated {} rows={} seed={}",
                d.id,
                d.rows,
                d.seed.unwrap_or(0)
            )
            .as_bytes(),
        );
    } else {
        let (_, bytes) = read_verified(data_dir, d)?;
        h.update(sha256_hex(&bytes).as_bytes());
    }
    Ok(hex(&h.finalize()))
}

fn is_missing(v: &str) -> bool {
    let t = v.trim();
    t.is_empty() || t == "?" || t.eq_ignore_ascii_case("na") || t.eq_ignore_ascii_case("nan")
}

/// Load one task as a feature table with binary labels, after checking the
/// file's SHA-256, header, row count, per-class counts and the task's
/// positive count against the manifest in `data_dir`.
pub fn load_task(data_dir: &Path, task_id: &str) -> Result<Dataset, OpenDataError> {
    let m = read_manifest(data_dir)?;
    let (task, d) = m.task_or_error(task_id)?;
    let (dataset, classes, file) = if d.generated {
        let seed = d.seed.expect("manifest checked");
        let ds = twonorm::generate(&task.id, d.rows, seed);
        let classes: Vec<String> = ds
            .labels
            .iter()
            .map(|&l| if l { "1" } else { "0" }.to_string())
            .collect();
        (
            ds,
            classes,
            PathBuf::from(format!("generated dataset {}", d.id)),
        )
    } else {
        let (file, bytes) = read_verified(data_dir, d)?;
        let (ds, classes) = parse_table(&file, &bytes, d, &task.id)?;
        (ds, classes, file)
    };
    check_counts(&file, d, &classes)?;
    let positive: BTreeSet<&str> = task.positive.iter().map(String::as_str).collect();
    let labels: Vec<bool> = classes
        .iter()
        .map(|c| positive.contains(c.as_str()))
        .collect();
    let found = labels.iter().filter(|&&l| l).count();
    if found != task.positives {
        return Err(OpenDataError::Positives {
            task: task.id.clone(),
            expected: task.positives,
            found,
        });
    }
    Ok(Dataset { labels, ..dataset })
}

fn check_counts(file: &Path, d: &DatasetEntry, classes: &[String]) -> Result<(), OpenDataError> {
    if classes.len() != d.rows {
        return Err(OpenDataError::RowCount {
            file: file.to_path_buf(),
            expected: d.rows,
            found: classes.len(),
        });
    }
    let mut counts: BTreeMap<&str, usize> = BTreeMap::new();
    for c in classes {
        *counts.entry(c.as_str()).or_default() += 1;
    }
    for (class, &found) in &counts {
        let expected = d.class_counts.get(*class).copied().unwrap_or(0);
        if found != expected {
            return Err(OpenDataError::ClassCount {
                file: file.to_path_buf(),
                class: class.to_string(),
                expected,
                found,
            });
        }
    }
    for (class, &expected) in &d.class_counts {
        if !counts.contains_key(class.as_str()) {
            return Err(OpenDataError::ClassCount {
                file: file.to_path_buf(),
                class: class.clone(),
                expected,
                found: 0,
            });
        }
    }
    Ok(())
}

/// Parse a gzip CSV file's bytes into a dataset (labels left empty) and the
/// raw class value of every row.
fn parse_table(
    file: &Path,
    gz: &[u8],
    d: &DatasetEntry,
    task_id: &str,
) -> Result<(Dataset, Vec<String>), OpenDataError> {
    let mut text = Vec::new();
    flate2::read::GzDecoder::new(gz)
        .read_to_end(&mut text)
        .map_err(|e| OpenDataError::Gzip {
            file: file.to_path_buf(),
            message: e.to_string(),
        })?;
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(true)
        .flexible(false)
        .from_reader(text.as_slice());
    let parse_err = |line: u64, e: csv::Error| OpenDataError::Parse {
        file: file.to_path_buf(),
        line,
        message: e.to_string(),
    };
    let header: Vec<String> = reader
        .headers()
        .map_err(|e| parse_err(1, e))?
        .iter()
        .map(str::to_string)
        .collect();
    let mut expected: Vec<String> = d.features.clone();
    expected.push(d.class_column.clone());
    if header != expected {
        return Err(OpenDataError::Header {
            file: file.to_path_buf(),
            expected: expected.join(", "),
            found: header.join(", "),
        });
    }
    let p = d.features.len();
    let nominal: BTreeSet<&str> = d.nominal.iter().map(String::as_str).collect();
    let is_nominal: Vec<bool> = d
        .features
        .iter()
        .map(|f| nominal.contains(f.as_str()))
        .collect();
    let mut numeric: Vec<Vec<f64>> = vec![Vec::with_capacity(d.rows); p];
    let mut raw_nominal: Vec<Vec<String>> = vec![Vec::new(); p];
    let mut classes = Vec::with_capacity(d.rows);
    for (i, record) in reader.records().enumerate() {
        let line = i as u64 + 2;
        let record = record.map_err(|e| parse_err(line, e))?;
        for (j, value) in record.iter().enumerate() {
            let column = if j < p {
                &d.features[j]
            } else {
                &d.class_column
            };
            if is_missing(value) {
                return Err(OpenDataError::Missing {
                    file: file.to_path_buf(),
                    line,
                    column: column.clone(),
                    value: value.to_string(),
                });
            }
            if j == p {
                classes.push(value.to_string());
            } else if is_nominal[j] {
                raw_nominal[j].push(value.to_string());
            } else {
                let x: f64 = value.trim().parse().map_err(|_| OpenDataError::Parse {
                    file: file.to_path_buf(),
                    line,
                    message: format!("column {column:?}: {value:?} is not a number"),
                })?;
                if !x.is_finite() {
                    return Err(OpenDataError::Parse {
                        file: file.to_path_buf(),
                        line,
                        message: format!("column {column:?}: {value:?} is not finite"),
                    });
                }
                numeric[j].push(x);
            }
        }
    }
    let mut columns = Vec::with_capacity(p);
    let mut kinds = Vec::with_capacity(p);
    for j in 0..p {
        if is_nominal[j] {
            let (codes, levels) = code_nominal(&raw_nominal[j]);
            columns.push(codes);
            kinds.push(FeatureKind::Categorical { levels });
        } else {
            columns.push(std::mem::take(&mut numeric[j]));
            kinds.push(FeatureKind::Numeric);
        }
    }
    Ok((
        Dataset {
            id: task_id.to_string(),
            names: d.features.clone(),
            columns,
            kinds,
            labels: Vec::new(),
        },
        classes,
    ))
}

/// Code nominal values 0..L by their position among the sorted distinct
/// values; returns the codes and L.
pub fn code_nominal(values: &[String]) -> (Vec<f64>, usize) {
    let levels: BTreeSet<&str> = values.iter().map(String::as_str).collect();
    let index: HashMap<&str, usize> = levels.iter().enumerate().map(|(k, v)| (*v, k)).collect();
    let codes = values.iter().map(|v| index[v.as_str()] as f64).collect();
    (codes, levels.len())
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::io::Write;

    fn gz(text: &str) -> Vec<u8> {
        let mut e = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::default());
        e.write_all(text.as_bytes()).unwrap();
        e.finish().unwrap()
    }

    fn entry(features: &[&str], nominal: &[&str], rows: usize) -> DatasetEntry {
        DatasetEntry {
            id: "toy".into(),
            file: Some("toy.csv.gz".into()),
            sha256: Some(String::new()),
            generated: false,
            seed: None,
            rows,
            original_name: "toy".into(),
            citation: "none".into(),
            licence: "none".into(),
            registry: None,
            package: None,
            version: None,
            member: None,
            subsample: None,
            class_column: "class".into(),
            features: features.iter().map(|s| s.to_string()).collect(),
            nominal: nominal.iter().map(|s| s.to_string()).collect(),
            class_counts: BTreeMap::new(),
            notes: None,
        }
    }

    #[test]
    fn nominal_columns_are_coded_by_sorted_level() {
        let d = entry(&["x", "colour"], &["colour"], 4);
        let bytes = gz("x,colour,class\n1.5,red,a\n2,blue,b\n-3,red,a\n4e1,green,b\n");
        let (ds, classes) = parse_table(Path::new("toy.csv.gz"), &bytes, &d, "toy").unwrap();
        assert_eq!(ds.columns[0], vec![1.5, 2.0, -3.0, 40.0]);
        // blue < green < red
        assert_eq!(ds.columns[1], vec![2.0, 0.0, 2.0, 1.0]);
        assert_eq!(ds.kinds[1], FeatureKind::Categorical { levels: 3 });
        assert_eq!(ds.kinds[0], FeatureKind::Numeric);
        assert_eq!(classes, vec!["a", "b", "a", "b"]);
    }

    #[test]
    fn quoted_fields_with_commas_are_one_value() {
        let d = entry(&["kind"], &["kind"], 2);
        let bytes = gz("kind,class\n\"High Income, expensive child\",0\nplain,1\n");
        let (ds, _) = parse_table(Path::new("toy.csv.gz"), &bytes, &d, "toy").unwrap();
        assert_eq!(ds.columns[0], vec![0.0, 1.0]);
    }

    #[test]
    fn missing_values_are_refused_with_their_place() {
        let d = entry(&["x", "y"], &[], 2);
        for bad in ["", "NA", "?"] {
            let bytes = gz(&format!("x,y,class\n1,2,a\n3,{bad},b\n"));
            let err = parse_table(Path::new("toy.csv.gz"), &bytes, &d, "toy").unwrap_err();
            match err {
                OpenDataError::Missing { line, column, .. } => {
                    assert_eq!(line, 3);
                    assert_eq!(column, "y");
                }
                other => panic!("expected a missing-value error, got {other}"),
            }
        }
    }

    #[test]
    fn a_header_other_than_the_manifest_is_refused() {
        let d = entry(&["x", "y"], &[], 1);
        let bytes = gz("y,x,class\n1,2,a\n");
        let err = parse_table(Path::new("toy.csv.gz"), &bytes, &d, "toy").unwrap_err();
        assert!(matches!(err, OpenDataError::Header { .. }), "{err}");
    }

    #[test]
    fn text_in_a_numeric_column_is_refused() {
        let d = entry(&["x"], &[], 1);
        let bytes = gz("x,class\nabc,a\n");
        let err = parse_table(Path::new("toy.csv.gz"), &bytes, &d, "toy").unwrap_err();
        assert!(err.to_string().contains("\"abc\" is not a number"), "{err}");
    }

    #[test]
    fn a_ragged_row_is_refused() {
        let d = entry(&["x"], &[], 1);
        let bytes = gz("x,class\n1,a,extra\n");
        let err = parse_table(Path::new("toy.csv.gz"), &bytes, &d, "toy").unwrap_err();
        assert!(matches!(err, OpenDataError::Parse { .. }), "{err}");
    }

    #[test]
    fn class_counts_are_compared_both_ways() {
        let mut d = entry(&["x"], &[], 3);
        d.class_counts.insert("a".into(), 2);
        d.class_counts.insert("b".into(), 1);
        let classes = |v: &[&str]| v.iter().map(|s| s.to_string()).collect::<Vec<_>>();
        assert!(check_counts(Path::new("f"), &d, &classes(&["a", "b", "a"])).is_ok());
        let err = check_counts(Path::new("f"), &d, &classes(&["a", "b", "b"])).unwrap_err();
        assert!(matches!(err, OpenDataError::ClassCount { .. }), "{err}");
        let err = check_counts(Path::new("f"), &d, &classes(&["a", "a", "a"])).unwrap_err();
        assert!(matches!(err, OpenDataError::ClassCount { .. }), "{err}");
        let err = check_counts(Path::new("f"), &d, &classes(&["a", "b"])).unwrap_err();
        assert!(
            matches!(
                err,
                OpenDataError::RowCount {
                    expected: 3,
                    found: 2,
                    ..
                }
            ),
            "{err}"
        );
    }

    #[test]
    fn sha256_of_a_known_string() {
        // FIPS 180-2, Appendix B.1: SHA-256("abc").
        assert_eq!(
            sha256_hex(b"abc"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
    }
}
