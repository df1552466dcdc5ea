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

use std::fmt;
use std::fs::File;
use std::io::{BufReader, Read};
use std::path::Path;

use parquet::file::reader::{FileReader, SerializedFileReader};
use parquet::record::reader::RowIter;
use parquet::record::Field;

use super::scorefile::ScoreFileError;

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
    Csv(csv::Reader<Box<dyn Read + Send>>),
    Parquet(Box<RowIter<'static>>),
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

fn parquet_err(path: &str, loc: Option<Loc>, e: parquet::errors::ParquetError) -> ScoreFileError {
    ScoreFileError::Parquet {
        path: path.to_string(),
        at: loc.map(|l| l.to_string()).unwrap_or_default(),
        message: e.to_string(),
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
        let reader: Box<dyn Read + Send> = match format {
            Format::Parquet => return Self::open_parquet(path, label),
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
        let mut rdr = csv::ReaderBuilder::new()
            .has_headers(true)
            .flexible(false)
            .buffer_capacity(1 << 16)
            .from_reader(reader);
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
            inner: Inner::Csv(rdr),
            loc: Loc::Line(1),
        })
    }

    fn open_parquet(path: &Path, label: String) -> Result<RowSource, ScoreFileError> {
        let f = File::open(path).map_err(|e| io_err(&label, e))?;
        let reader = SerializedFileReader::new(f).map_err(|e| parquet_err(&label, None, e))?;
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
            inner: Inner::Parquet(Box::new(reader.into_iter())),
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
            Inner::Csv(rdr) => match rdr.read_byte_record(rec) {
                Ok(more) => {
                    if more {
                        self.loc = Loc::Line(rec.position().map(|p| p.line()).unwrap_or(0));
                    }
                    Ok(more)
                }
                Err(e) => Err(super::scorefile::csv_error(&self.path, e)),
            },
            Inner::Parquet(it) => {
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
