//! The unit table: one row per (task, size, repeat, method), the single source
//! every statistic and report is rebuilt from. Written as `units.csv`.
//!
//! Columns (contract): `task,size,repeat,method,status,` then one column per
//! metric id, then `clipped,positives,reservoir,test_rows`, then any extra
//! columns (method extras such as `va_width`, and per-row summaries used by the
//! interval estimators), in a fixed order. Empty cells mean "not available"
//! (a failed fit, or an extra a method does not report). Numbers are written in
//! the shortest form that reads back to the same `f64`, so a rerun with the same
//! suite and seed is byte-identical.

use std::io::{Read, Write};

use super::status::UnitStatus;
use crate::metrics::MetricId;

/// One row of `units.csv`.
#[derive(Debug, Clone, PartialEq)]
pub struct UnitRow {
    pub task: String,
    pub size: usize,
    pub repeat: usize,
    pub method: String,
    /// `ok`, a `+`-joined list of fit notes (e.g. `separable`),
    /// `fallback:base-rate` (the fit could not be made; the smoothed base
    /// rate was predicted), or under `on_fit_failure = "drop"` `one_class` or
    /// `failed`; written and read back as the same text.
    pub status: UnitStatus,
    /// One value per metric column; `None` when the fit failed.
    pub metrics: Vec<Option<f64>>,
    /// Test predictions changed by the log-loss clip.
    pub clipped: Option<usize>,
    /// Positives in the calibration sample.
    pub positives: usize,
    pub reservoir: usize,
    pub test_rows: usize,
    /// One value per extra column.
    pub extras: Vec<Option<f64>>,
}

impl UnitRow {
    /// True when the row has metric values.
    pub fn has_values(&self) -> bool {
        self.metrics.iter().any(|v| v.is_some())
    }
}

/// The whole table with its column names.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct UnitTable {
    pub metric_names: Vec<String>,
    pub extra_names: Vec<String>,
    pub rows: Vec<UnitRow>,
}

#[derive(Debug, thiserror::Error)]
pub enum TableError {
    #[error("units.csv:{line}: {message}")]
    Bad { line: u64, message: String },
    #[error("units.csv: {0}")]
    Csv(#[from] csv::Error),
    #[error("units.csv: {0}")]
    Io(#[from] std::io::Error),
}

const FIXED_HEAD: [&str; 5] = ["task", "size", "repeat", "method", "status"];
const FIXED_MID: [&str; 4] = ["clipped", "positives", "reservoir", "test_rows"];

/// Shortest round-trip decimal form of a float (Rust's `Display`).
pub fn num(v: f64) -> String {
    format!("{v}")
}

fn opt(v: Option<f64>) -> String {
    v.map(num).unwrap_or_default()
}

impl UnitTable {
    /// The column of a metric, by id or by its name.
    pub fn metric_index(&self, metric: impl AsRef<str>) -> Option<usize> {
        let name = metric.as_ref();
        self.metric_names.iter().position(|m| m == name)
    }

    /// The metric columns as ids, in column order (every metric column is a
    /// metric id: [`UnitTable::read_csv`] refuses any other).
    pub fn metric_ids(&self) -> Vec<MetricId> {
        self.metric_names
            .iter()
            .filter_map(|n| MetricId::parse(n))
            .collect()
    }
    pub fn extra_index(&self, name: &str) -> Option<usize> {
        self.extra_names.iter().position(|m| m == name)
    }

    pub fn write_csv<W: Write>(&self, w: W) -> Result<(), TableError> {
        let mut wr = csv::WriterBuilder::new()
            .terminator(csv::Terminator::Any(b'\n'))
            .from_writer(w);
        let mut head: Vec<String> = FIXED_HEAD.iter().map(|s| s.to_string()).collect();
        head.extend(self.metric_names.iter().cloned());
        head.extend(FIXED_MID.iter().map(|s| s.to_string()));
        head.extend(self.extra_names.iter().cloned());
        wr.write_record(&head)?;
        for r in &self.rows {
            let mut rec: Vec<String> = vec![
                r.task.clone(),
                r.size.to_string(),
                r.repeat.to_string(),
                r.method.clone(),
                r.status.to_string(),
            ];
            rec.extend(r.metrics.iter().map(|&v| opt(v)));
            rec.push(r.clipped.map(|c| c.to_string()).unwrap_or_default());
            rec.push(r.positives.to_string());
            rec.push(r.reservoir.to_string());
            rec.push(r.test_rows.to_string());
            rec.extend(r.extras.iter().map(|&v| opt(v)));
            wr.write_record(&rec)?;
        }
        wr.flush()?;
        Ok(())
    }

    pub fn read_csv<R: Read>(r: R) -> Result<UnitTable, TableError> {
        let mut rdr = csv::ReaderBuilder::new().has_headers(true).from_reader(r);
        let head: Vec<String> = rdr.headers()?.iter().map(|s| s.to_string()).collect();
        let bad = |line: u64, message: String| TableError::Bad { line, message };
        if head.len() < 9 || head[..5] != FIXED_HEAD {
            return Err(bad(
                1,
                format!("expected a header starting with {}", FIXED_HEAD.join(",")),
            ));
        }
        let mid = head
            .iter()
            .position(|h| h == "clipped")
            .ok_or_else(|| bad(1, "no `clipped` column in the header".into()))?;
        if head.len() < mid + 4 || head[mid..mid + 4] != FIXED_MID {
            return Err(bad(
                1,
                format!("expected {} after the metric columns", FIXED_MID.join(",")),
            ));
        }
        let metric_names = head[5..mid].to_vec();
        if let Some(n) = metric_names.iter().find(|n| MetricId::parse(n).is_none()) {
            return Err(bad(
                1,
                format!("column `{n}` before `clipped` is not a metric id"),
            ));
        }
        let extra_names = head[mid + 4..].to_vec();
        let mut rows = Vec::new();
        for rec in rdr.records() {
            let rec = rec?;
            let line = rec.position().map(|p| p.line()).unwrap_or(0);
            let int = |i: usize| -> Result<usize, TableError> {
                rec[i].parse().map_err(|_| {
                    bad(
                        line,
                        format!("column `{}`: `{}` is not a count", head[i], &rec[i]),
                    )
                })
            };
            let float = |i: usize| -> Result<Option<f64>, TableError> {
                if rec[i].is_empty() {
                    Ok(None)
                } else {
                    rec[i].parse().map(Some).map_err(|_| {
                        bad(
                            line,
                            format!("column `{}`: `{}` is not a number", head[i], &rec[i]),
                        )
                    })
                }
            };
            let metrics = (5..mid).map(float).collect::<Result<Vec<_>, _>>()?;
            let clipped = if rec[mid].is_empty() {
                None
            } else {
                Some(int(mid)?)
            };
            let extras = (mid + 4..head.len())
                .map(float)
                .collect::<Result<Vec<_>, _>>()?;
            rows.push(UnitRow {
                task: rec[0].to_string(),
                size: int(1)?,
                repeat: int(2)?,
                method: rec[3].to_string(),
                status: UnitStatus::parse(&rec[4]),
                metrics,
                clipped,
                positives: int(mid + 1)?,
                reservoir: int(mid + 2)?,
                test_rows: int(mid + 3)?,
                extras,
            });
        }
        Ok(UnitTable {
            metric_names,
            extra_names,
            rows,
        })
    }
}

/// The unit table's file in a results folder: the CSV, gzip-compressed
/// (written without time stamp or file name, so equal tables give equal
/// bytes). `pandas.read_csv("units.csv.gz")` and R's `read.csv("units.csv.gz")`
/// read it in one call.
pub const UNITS_FILE: &str = "units.csv.gz";

/// Names the unit table may have in a results folder, in the order they are
/// looked for (`units.csv`: folders of plumbline before the compressed table).
pub const UNITS_FILES: [&str; 2] = [UNITS_FILE, "units.csv"];

/// The unit table file of a results folder, if it has one.
pub fn units_path(dir: &std::path::Path) -> Option<std::path::PathBuf> {
    UNITS_FILES.iter().map(|n| dir.join(n)).find(|p| p.exists())
}

/// Read a unit table file (`.gz` names are decompressed while reading).
pub fn read_units_file(path: &std::path::Path) -> Result<UnitTable, TableError> {
    let f = std::io::BufReader::new(std::fs::File::open(path)?);
    if path.extension().is_some_and(|e| e == "gz") {
        UnitTable::read_csv(flate2::read::GzDecoder::new(f))
    } else {
        UnitTable::read_csv(f)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn csv_round_trip_is_exact() {
        let t = UnitTable {
            metric_names: vec!["log_loss".into(), "brier".into()],
            extra_names: vec!["va_width".into()],
            rows: vec![UnitRow {
                task: "a".into(),
                size: 50,
                repeat: 3,
                method: "platt".into(),
                status: UnitStatus::Ok,
                metrics: vec![Some(0.1 + 0.2), None],
                clipped: Some(2),
                positives: 11,
                reservoir: 700,
                test_rows: 300,
                extras: vec![None],
            }],
        };
        let mut buf = Vec::new();
        t.write_csv(&mut buf).unwrap();
        let back = UnitTable::read_csv(&buf[..]).unwrap();
        assert_eq!(back, t);
        let mut buf2 = Vec::new();
        back.write_csv(&mut buf2).unwrap();
        assert_eq!(buf, buf2);
    }

    #[test]
    fn every_status_text_is_read_and_written_back_unchanged() {
        // The statuses a run writes, and one this version does not know (a
        // folder of another version or a hand-edited table still loads).
        let mut text = String::from(
            "task,size,repeat,method,status,brier,clipped,positives,reservoir,test_rows\n",
        );
        let statuses = [
            "ok",
            "separable",
            "separable+refit",
            "fallback:base-rate",
            "one_class",
            "failed",
            "retired-note",
        ];
        for (i, st) in statuses.iter().enumerate() {
            text.push_str(&format!("t,20,{i},platt,{st},0.25,0,7,100,50\n"));
        }
        let t = UnitTable::read_csv(text.as_bytes()).unwrap();
        assert_eq!(t.rows[0].status, UnitStatus::Ok);
        assert_eq!(t.rows[3].status, UnitStatus::Fallback);
        assert_eq!(t.rows[4].status, UnitStatus::OneClass);
        assert_eq!(t.rows[5].status, UnitStatus::Failed);
        assert!(matches!(&t.rows[6].status, UnitStatus::Noted(s) if s == "retired-note"));
        let mut buf = Vec::new();
        t.write_csv(&mut buf).unwrap();
        assert_eq!(String::from_utf8(buf).unwrap(), text);
    }

    #[test]
    fn a_column_that_is_no_metric_id_is_refused() {
        let text =
            "task,size,repeat,method,status,log_loss,bogus,clipped,positives,reservoir,test_rows\n";
        let e = UnitTable::read_csv(text.as_bytes())
            .unwrap_err()
            .to_string();
        assert!(e.contains("units.csv:1: column `bogus`"), "{e}");
        let ok =
            "task,size,repeat,method,status,log_loss,brier,clipped,positives,reservoir,test_rows\n";
        let t = UnitTable::read_csv(ok.as_bytes()).unwrap();
        assert_eq!(t.metric_ids(), [MetricId::LogLoss, MetricId::Brier]);
        assert_eq!(t.metric_index(MetricId::Brier), Some(1));
    }
}
