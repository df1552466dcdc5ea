//! Row sources for score files: CSV, gzip CSV (name ends in `.gz`), Parquet
//! (name ends in `.parquet` or `.pq`) and CSV on standard input (`-`).
//!
//! Every source yields its rows one at a time as a [`csv::ByteRecord`] of text
//! fields, so the loaders and `plumbline apply` read every format with one code
//! path and in constant memory (a Parquet file is decoded one row group at a
//! time). Parquet values become text as follows: doubles and floats in the
//! shortest form that reads back to the same `f64` (a float column is widened to
//! `f64` exactly), integers in decimal, booleans as `true`/`false`, strings as
//! they are, nulls as the empty field. Nested columns (groups, lists, maps) are
//! rejected with the file and column.
//!
//! CSV input is read through [`Bounded`]: a line or record longer than
//! [`limits::MAX_LINE`] (1 MiB by default) and gzip text longer than
//! [`limits::MAX_DECOMPRESSED`] (16 GiB) are refused with the file and line,
//! so an endless stream (`/dev/zero`) or a gzip bomb never fills memory.

use std::fmt;
use std::fs::File;
use std::io::{BufReader, Read};
use std::path::Path;
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::Arc;

use parquet::file::reader::{FileReader, SerializedFileReader};
use parquet::record::reader::RowIter;
use parquet::record::Field;

use super::scorefile::ScoreFileError;
use crate::limits;

/// Which bound a [`Bounded`] reader hit, carried inside the `io::Error` it
/// returns so the loader can turn it into a located [`ScoreFileError`].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Overrun {
    /// A line (or a record whose quoted field spans lines) longer than `limit`.
    Line { line: u64, limit: u64 },
    /// More than `limit` bytes of decompressed text.
    Decompressed { line: u64, limit: u64 },
}

impl fmt::Display for Overrun {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self {
            Overrun::Line { limit, .. } => write!(f, "line longer than {limit} bytes"),
            Overrun::Decompressed { limit, .. } => {
                write!(f, "more than {limit} bytes of decompressed text")
            }
        }
    }
}

impl std::error::Error for Overrun {}

/// A reader that refuses overlong lines and records and, optionally, more
/// than a set number of bytes in all. Lines are counted from 1. The record
/// count is shared with [`RowSource`], which resets it after each record, so
/// a quoted field running over many short lines is bounded too (to the limit
/// plus one read-ahead buffer).
pub struct Bounded<R> {
    inner: R,
    max_line: u64,
    max_total: Option<u64>,
    line: u64,
    line_bytes: u64,
    total: u64,
    record_bytes: Arc<AtomicU64>,
}

impl<R: Read> Bounded<R> {
    pub fn new(inner: R, max_line: u64, max_total: Option<u64>) -> Self {
        Bounded {
            inner,
            max_line,
            max_total,
            line: 1,
            line_bytes: 0,
            total: 0,
            record_bytes: Arc::new(AtomicU64::new(0)),
        }
    }

    /// The shared count of bytes read since the last reset.
    pub fn record_counter(&self) -> Arc<AtomicU64> {
        Arc::clone(&self.record_bytes)
    }

    fn overrun(o: Overrun) -> std::io::Error {
        std::io::Error::new(std::io::ErrorKind::InvalidData, o)
    }
}

impl<R: Read> Read for Bounded<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = self.inner.read(buf)?;
        let chunk = &buf[..n];
        self.total += n as u64;
        if let Some(max) = self.max_total {
            if self.total > max {
                return Err(Self::overrun(Overrun::Decompressed {
                    line: self.line,
                    limit: max,
                }));
            }
        }
        if self.line_bytes + n as u64 <= self.max_line {
            // No line in this chunk can pass the limit: count only.
            match chunk.iter().rposition(|&b| b == b'\n') {
                None => self.line_bytes += n as u64,
                Some(last) => {
                    self.line += chunk.iter().filter(|&&b| b == b'\n').count() as u64;
                    self.line_bytes = (n - last - 1) as u64;
                }
            }
        } else {
            for (i, seg) in chunk.split(|&b| b == b'\n').enumerate() {
                if i > 0 {
                    self.line += 1;
                    self.line_bytes = 0;
                }
                self.line_bytes += seg.len() as u64;
                if self.line_bytes > self.max_line {
                    return Err(Self::overrun(Overrun::Line {
                        line: self.line,
                        limit: self.max_line,
                    }));
                }
            }
        }
        let rec = self.record_bytes.fetch_add(n as u64, Ordering::Relaxed) + n as u64;
        if rec > self.max_line.saturating_add(1 << 16) {
            return Err(Self::overrun(Overrun::Line {
                line: self.line,
                limit: self.max_line,
            }));
        }
        Ok(n)
    }
}

/// Where a row sits in its file, for messages: a CSV line (the header is line
/// 1) or a Parquet data row (the first data row is row 1).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Loc {
    Line(u64),
    Row(u64),
}

impl fmt::Display for Loc {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Loc::Line(n) => write!(f, ":{n}"),
            Loc::Row(n) => write!(f, ": row {n}"),
        }
    }
}

/// The on-disk format of a score file, from its name.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Format {
    Csv,
    CsvGz,
    Parquet,
    Stdin,
}

impl Format {
    pub fn of(path: &Path) -> Format {
        if path.as_os_str() == "-" {
            return Format::Stdin;
        }
        match path.extension().and_then(|e| e.to_str()) {
            Some("gz") => Format::CsvGz,
            Some(e) if e.eq_ignore_ascii_case("parquet") || e.eq_ignore_ascii_case("pq") => {
                Format::Parquet
            }
            _ => Format::Csv,
        }
    }
}

enum Inner {
    Csv(csv::Reader<Bounded<Box<dyn Read + Send>>>, Arc<AtomicU64>),
    /// Rows, and the limit on one row's text (as for a CSV record).
    Parquet(Box<RowIter<'static>>, u64),
}

/// An open score file, read row by row.
pub struct RowSource {
    path: String,
    headers: Vec<String>,
    inner: Inner,
    loc: Loc,
}

fn io_err(path: &str, e: std::io::Error) -> ScoreFileError {
    ScoreFileError::Io {
        path: path.to_string(),
        error: e,
    }
}

/// Page codecs this build leaves out (see DEVELOPERS.md, Dependencies).
const CODECS_LEFT_OUT: [&str; 3] = ["zstd", "lz4", "brotli"];

fn parquet_err(path: &str, loc: Option<Loc>, e: parquet::errors::ParquetError) -> ScoreFileError {
    let mut message = e.to_string();
    let lower = message.to_ascii_lowercase();
    if let Some(codec) = CODECS_LEFT_OUT
        .iter()
        .find(|c| lower.contains("disabled feature") && lower.contains(*c))
    {
        message = format!(
            "its pages are {}-compressed, which this plumbline does not read (Snappy, gzip and uncompressed pages only); rewrite the file with Snappy, the pyarrow default (`pyarrow.parquet.write_table(table, path, compression=\"snappy\")`), or as CSV ({message})",
            codec.to_ascii_uppercase()
        );
    }
    ScoreFileError::Parquet {
        path: path.to_string(),
        at: loc.map(|l| l.to_string()).unwrap_or_default(),
        message,
    }
}

/// A header that names a column twice is refused: which one a key means
/// would be a guess. The header is line 1 of a CSV file (for Parquet, the
/// fields are numbered the same way).
fn unique_columns(path: &str, headers: &[String]) -> Result<(), ScoreFileError> {
    let mut seen: std::collections::BTreeMap<&str, usize> = std::collections::BTreeMap::new();
    for (j, h) in headers.iter().enumerate() {
        if let Some(&i) = seen.get(h.trim()) {
            return Err(ScoreFileError::DuplicateColumn {
                path: path.to_string(),
                line: 1,
                column: h.trim().to_string(),
                first: i + 1,
                second: j + 1,
            });
        }
        seen.insert(h.trim(), j);
    }
    Ok(())
}

impl RowSource {
    /// Open a score file by the format its name implies (`-` = CSV on stdin).
    pub fn open(path: &Path) -> Result<RowSource, ScoreFileError> {
        let label = if path.as_os_str() == "-" {
            "<stdin>".to_string()
        } else {
            path.display().to_string()
        };
        let format = Format::of(path);
        let limit = |l: &limits::Limit| {
            l.get().map_err(|message| ScoreFileError::Limit {
                path: label.clone(),
                message,
            })
        };
        let max_line = limit(&limits::MAX_LINE)?;
        let max_total = match format {
            Format::CsvGz => Some(limit(&limits::MAX_DECOMPRESSED)?),
            _ => None,
        };
        let reader: Box<dyn Read + Send> = match format {
            Format::Parquet => {
                let max_group = limit(&limits::MAX_ROW_GROUP)?;
                return Self::open_parquet(path, label, max_line, max_group);
            }
            Format::Stdin => Box::new(BufReader::with_capacity(1 << 16, std::io::stdin())),
            Format::Csv | Format::CsvGz => {
                let f = File::open(path).map_err(|e| io_err(&label, e))?;
                let r = BufReader::with_capacity(1 << 16, f);
                if format == Format::CsvGz {
                    Box::new(flate2::read::MultiGzDecoder::new(r))
                } else {
                    Box::new(r)
                }
            }
        };
        let bounded = Bounded::new(reader, max_line, max_total);
        let record_bytes = bounded.record_counter();
        let mut rdr = csv::ReaderBuilder::new()
            .has_headers(true)
            .flexible(false)
            .buffer_capacity(1 << 16)
            .from_reader(bounded);
        let headers = match rdr.headers() {
            Ok(h) => h.iter().map(|s| s.to_string()).collect::<Vec<_>>(),
            Err(e) => return Err(super::scorefile::csv_error(&label, e)),
        };
        if headers.is_empty() || (headers.len() == 1 && headers[0].trim().is_empty()) {
            return Err(ScoreFileError::NoHeader { path: label });
        }
        unique_columns(&label, &headers)?;
        Ok(RowSource {
            path: label,
            headers,
            inner: Inner::Csv(rdr, record_bytes),
            loc: Loc::Line(1),
        })
    }

    fn open_parquet(
        path: &Path,
        label: String,
        max_line: u64,
        max_group: u64,
    ) -> Result<RowSource, ScoreFileError> {
        let f = File::open(path).map_err(|e| io_err(&label, e))?;
        let reader = SerializedFileReader::new(f).map_err(|e| parquet_err(&label, None, e))?;
        // A row group is decoded whole: refuse one whose uncompressed size,
        // as the file's metadata states it, passes the limit, before reading.
        let mut first_row = 1u64;
        for (i, g) in reader.metadata().row_groups().iter().enumerate() {
            let bytes = g.total_byte_size().max(0) as u64;
            if bytes > max_group {
                return Err(ScoreFileError::Limit {
                    path: label,
                    message: format!(
                        "row group {i} (rows {first_row}–{}) holds {} uncompressed, more than {}; rewrite the file with smaller row groups (pyarrow: `row_group_size=`) or as CSV",
                        first_row + g.num_rows().max(1) as u64 - 1,
                        limits::human(bytes),
                        limits::MAX_ROW_GROUP.describe(max_group)
                    ),
                });
            }
            first_row += g.num_rows().max(0) as u64;
        }
        let schema = reader.metadata().file_metadata().schema_descr_ptr();
        let mut headers = Vec::new();
        for field in schema.root_schema().get_fields() {
            if field.is_group() {
                return Err(ScoreFileError::Nested {
                    path: label,
                    column: field.name().to_string(),
                });
            }
            headers.push(field.name().to_string());
        }
        if headers.is_empty() {
            return Err(ScoreFileError::NoHeader { path: label });
        }
        unique_columns(&label, &headers)?;
        Ok(RowSource {
            path: label,
            headers,
            inner: Inner::Parquet(Box::new(reader.into_iter()), max_line),
            loc: Loc::Row(0),
        })
    }

    /// The file as named in messages.
    pub fn path(&self) -> &str {
        &self.path
    }

    /// Column names, in order.
    pub fn headers(&self) -> &[String] {
        &self.headers
    }

    /// Where the last row read sits.
    pub fn loc(&self) -> Loc {
        self.loc
    }

    /// Read the next row into `rec`; `false` at the end of the file.
    pub fn next_row(&mut self, rec: &mut csv::ByteRecord) -> Result<bool, ScoreFileError> {
        match &mut self.inner {
            Inner::Csv(rdr, record_bytes) => match rdr.read_byte_record(rec) {
                Ok(more) => {
                    record_bytes.store(0, Ordering::Relaxed);
                    if more {
                        self.loc = Loc::Line(rec.position().map(|p| p.line()).unwrap_or(0));
                    }
                    Ok(more)
                }
                Err(e) => Err(super::scorefile::csv_error(&self.path, e)),
            },
            Inner::Parquet(it, max_line) => {
                let Loc::Row(n) = self.loc else {
                    unreachable!("a Parquet source counts rows")
                };
                let at = Loc::Row(n + 1);
                let row = match it.next() {
                    None => return Ok(false),
                    Some(Err(e)) => return Err(parquet_err(&self.path, Some(at), e)),
                    Some(Ok(row)) => row,
                };
                self.loc = at;
                rec.clear();
                let mut text = String::new();
                for (name, field) in row.get_column_iter() {
                    text.clear();
                    field_text(field, &mut text).map_err(|()| ScoreFileError::Nested {
                        path: self.path.clone(),
                        column: name.clone(),
                    })?;
                    rec.push_field(text.as_bytes());
                }
                if rec.as_slice().len() as u64 > *max_line {
                    return Err(ScoreFileError::LineTooLong {
                        path: self.path.clone(),
                        line: n + 1,
                        limit: limits::MAX_LINE.describe(*max_line),
                    });
                }
                Ok(true)
            }
        }
    }
}

/// The text form of a Parquet value (see the module doc); `Err` for nested values.
fn field_text(field: &Field, out: &mut String) -> Result<(), ()> {
    use std::fmt::Write;
    let r = match field {
        Field::Null => Ok(()),
        Field::Bool(b) => write!(out, "{b}"),
        Field::Byte(v) => write!(out, "{v}"),
        Field::Short(v) => write!(out, "{v}"),
        Field::Int(v) => write!(out, "{v}"),
        Field::Long(v) => write!(out, "{v}"),
        Field::UByte(v) => write!(out, "{v}"),
        Field::UShort(v) => write!(out, "{v}"),
        Field::UInt(v) => write!(out, "{v}"),
        Field::ULong(v) => write!(out, "{v}"),
        Field::Float16(v) => write!(out, "{}", f64::from(f32::from(*v))),
        Field::Float(v) => write!(out, "{}", f64::from(*v)),
        Field::Double(v) => write!(out, "{v}"),
        Field::Str(s) => {
            out.push_str(s);
            Ok(())
        }
        Field::Group(_) | Field::ListInternal(_) | Field::MapInternal(_) => return Err(()),
        other => write!(out, "{other}"),
    };
    r.map_err(|_| ())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn codecs_left_out_get_advice() {
        let e =
            parquet::errors::ParquetError::General("Disabled feature at compile time: zstd".into());
        let m = parquet_err("s.parquet", Some(Loc::Row(1)), e).to_string();
        assert!(
            m.starts_with(
                "s.parquet: row 1: not a readable Parquet file: its pages are ZSTD-compressed"
            ),
            "{m}"
        );
        assert!(m.contains("rewrite the file with Snappy"), "{m}");
        let other = parquet::errors::ParquetError::General("bad footer".into());
        let m = parquet_err("s.parquet", None, other).to_string();
        assert!(!m.contains("Snappy"), "{m}");
    }

    #[test]
    fn bounded_reader_counts_lines_and_refuses_long_ones() {
        let text = b"ab\ncdef\ngh".to_vec();
        let mut r = Bounded::new(&text[..], 4, None);
        let mut out = Vec::new();
        r.read_to_end(&mut out).unwrap();
        assert_eq!(out, text);
        let mut r = Bounded::new(&text[..], 3, None);
        let e = r.read_to_end(&mut Vec::new()).unwrap_err();
        let o = e
            .get_ref()
            .and_then(|e| e.downcast_ref::<Overrun>())
            .copied();
        assert_eq!(o, Some(Overrun::Line { line: 2, limit: 3 }));
        let mut r = Bounded::new(&text[..], 100, Some(5));
        let e = r.read_to_end(&mut Vec::new()).unwrap_err();
        let o = e
            .get_ref()
            .and_then(|e| e.downcast_ref::<Overrun>())
            .copied();
        assert!(
            matches!(o, Some(Overrun::Decompressed { limit: 5, .. })),
            "{o:?}"
        );
    }
}
