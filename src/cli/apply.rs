//! `plumbline apply`: calibrate a score file with a saved map.
//!
//! The score file is streamed row by row (CSV, gzip CSV, Parquet, or CSV on
//! stdin) and written as CSV (gzip when the output name ends in `.gz`, stdout
//! for `-`) with every input column unchanged, in the same order, plus one
//! column of calibrated probabilities (`calibrated` unless `--column` says
//! otherwise). Memory does not grow with the file.
//!
//! Scores outside the fitted range [score_min, score_max] of the map's training
//! summary follow the map's own prediction rule ([`range_rule`]) and are
//! counted in a warning. A score that is not a finite number (or, for
//! probability maps, not in [0, 1]) stops the command with the file, row and
//! value; the output goes through a temporary file beside the target and is
//! renamed into place only when every row is written, so nothing partial is
//! left (with `--out -` rows already written to stdout cannot be taken back).

use std::io::Write;
use std::path::PathBuf;

use anyhow::{bail, Context, Result};

use crate::calibrate::state::MapState;
use crate::data::rows::RowSource;
use crate::data::scorefile::{bad_value, find_column, parse_score};
use crate::mapfile;

#[derive(Debug, Clone, clap::Args)]
pub struct ApplyArgs {
    /// Map file written by `plumbline fit`.
    pub map: PathBuf,
    /// Score file: CSV, gzip CSV (`.gz`), Parquet (`.parquet`, `.pq`), or `-` for CSV on stdin.
    #[arg(long, value_name = "FILE")]
    pub scores: PathBuf,
    /// Output CSV (gzip when the name ends in `.gz`), or `-` for stdout.
    #[arg(long, value_name = "FILE")]
    pub out: PathBuf,
    /// Score column [default: the column the map was fitted on].
    #[arg(long, value_name = "NAME")]
    pub score_column: Option<String>,
    /// Name of the added column of calibrated probabilities.
    #[arg(long, default_value = "calibrated", value_name = "NAME")]
    pub column: String,
}

/// What `apply` did.
#[derive(Debug, Clone, PartialEq)]
pub struct ApplySummary {
    pub rows: u64,
    /// Rows below the fitted range and above it.
    pub below: u64,
    pub above: u64,
    pub score_min: f64,
    pub score_max: f64,
    pub rule: &'static str,
}

impl ApplySummary {
    /// The warning for scores outside the fitted range, if there were any.
    pub fn warning(&self) -> Option<String> {
        let n = self.below + self.above;
        (n > 0).then(|| {
            format!(
                "{n} of {} rows ({:.2}%) have scores outside the fitted range [{}, {}] ({} below, {} above): {}",
                self.rows,
                100.0 * n as f64 / self.rows.max(1) as f64,
                self.score_min,
                self.score_max,
                self.below,
                self.above,
                self.rule
            )
        })
    }
}

/// How a map treats scores outside its fitted range (docs/map-format.md).
pub fn range_rule(state: &MapState) -> &'static str {
    match state {
        MapState::Identity => "the identity map passes them through unchanged",
        MapState::Isotonic { .. } | MapState::CenteredIsotonic { .. } => {
            "the map is flat beyond its ends, so they get the end values (clamped to the fitted range)"
        }
        MapState::Binning { .. } => "they fall into the first or last bin (clamped to the fitted range)",
        MapState::VennAbers { .. } => {
            "they take the pair of the gap below the first or above the last calibration score (clamped to the fitted range)"
        }
        MapState::Spline { .. } => {
            "the spline continues linearly on the log-odds scale with its boundary value and slope (extrapolated)"
        }
        MapState::Constant { .. } => "the map is constant",
        MapState::Platt { .. } | MapState::Beta { .. } | MapState::Temperature { .. } => {
            "the parametric map is evaluated as it is (extrapolated)"
        }
    }
}

/// Shortest text that reads back to the same `f64` (as `Display`, faster).
fn push_float(buf: &mut ryu::Buffer, v: f64) -> &str {
    if v.is_finite() {
        buf.format_finite(v)
    } else if v.is_nan() {
        "NaN"
    } else if v > 0.0 {
        "inf"
    } else {
        "-inf"
    }
}

/// Run `plumbline apply`.
pub fn run(args: &ApplyArgs) -> Result<ApplySummary> {
    let loaded = mapfile::load(&args.map)?;
    let content = &loaded.content;
    let map = &loaded.map;
    let kind = content.score_kind;
    let mut src = RowSource::open(&args.scores)?;
    let column = args
        .score_column
        .clone()
        .unwrap_or_else(|| content.training.score_column.clone());
    let role = if args.score_column.is_some() {
        "--score-column".to_string()
    } else {
        "the map's score column; choose another with --score-column".to_string()
    };
    let si = find_column(&src, &column, role)?;
    if src.headers().iter().any(|h| h.trim() == args.column) {
        bail!(
            "{}: already has a column `{}`; name the calibrated column with --column",
            src.path(),
            args.column
        );
    }

    let to_stdout = args.out.as_os_str() == "-";
    let atomic = if to_stdout {
        None
    } else {
        Some(super::AtomicFile::create(&args.out)?)
    };
    let sink = match &atomic {
        None => Sink::Stdout(super::stdout()),
        Some(f) => {
            let w = std::io::BufWriter::with_capacity(1 << 16, f.writer()?);
            if args.out.extension().is_some_and(|e| e == "gz") {
                Sink::Gz(flate2::write::GzEncoder::new(
                    w,
                    flate2::Compression::default(),
                ))
            } else {
                Sink::File(w)
            }
        }
    };
    let out_name = if to_stdout {
        "<stdout>".to_string()
    } else {
        args.out.display().to_string()
    };
    let mut wtr = csv::WriterBuilder::new()
        .buffer_capacity(1 << 16)
        .from_writer(sink);
    let werr = |e: csv::Error| anyhow::anyhow!("{out_name}: cannot write: {e}");
    let mut header = csv::ByteRecord::new();
    for h in src.headers() {
        header.push_field(h.as_bytes());
    }
    header.push_field(args.column.as_bytes());
    wtr.write_byte_record(&header).map_err(werr)?;

    let (lo, hi) = (content.training.score_min, content.training.score_max);
    let mut summary = ApplySummary {
        rows: 0,
        below: 0,
        above: 0,
        score_min: lo,
        score_max: hi,
        rule: range_rule(&content.fitted),
    };
    // Two stages on two threads, batches of rows passed between them: the
    // reader parses the CSV (or decodes Parquet) and the scores; this thread
    // predicts, formats and writes. Batches are recycled, so memory stays at a
    // few batches whatever the file size.
    let (full_tx, full_rx) = std::sync::mpsc::sync_channel::<Result<Batch>>(2);
    let (empty_tx, empty_rx) = std::sync::mpsc::sync_channel::<Batch>(4);
    for _ in 0..3 {
        empty_tx.send(Batch::default()).ok();
    }
    let mut buf = ryu::Buffer::new();
    let written: Result<()> = std::thread::scope(|scope| {
        scope.spawn(move || read_batches(&mut src, si, kind, full_tx, empty_rx));
        for batch in full_rx {
            let mut batch = batch?;
            let n = batch.len;
            batch.out.resize(n, 0.0);
            map.predict(&batch.scores[..n], &mut batch.out[..n]);
            for i in 0..n {
                let s = batch.scores[i];
                summary.below += (s < lo) as u64;
                summary.above += (s > hi) as u64;
                let rec = &mut batch.records[i];
                rec.push_field(push_float(&mut buf, batch.out[i]).as_bytes());
                wtr.write_byte_record(rec).map_err(werr)?;
            }
            summary.rows += n as u64;
            // The reader may have finished already; the rows still queued
            // are written all the same.
            empty_tx.send(batch).ok();
        }
        Ok(())
    });
    written?;
    let sink = wtr
        .into_inner()
        .map_err(|e| anyhow::anyhow!("{out_name}: cannot write: {}", e.error()))?;
    sink.finish()
        .with_context(|| format!("{out_name}: cannot write"))?;
    if let Some(f) = atomic {
        f.commit()?;
    }
    Ok(summary)
}

/// Rows handed from the reader to the writer.
#[derive(Default)]
struct Batch {
    records: Vec<csv::ByteRecord>,
    scores: Vec<f64>,
    out: Vec<f64>,
    len: usize,
}

/// Rows per batch.
const BATCH: usize = 4096;

/// The reader stage: fill recycled batches with rows and parsed scores until
/// the file ends or a row is bad (the error is the last message sent).
fn read_batches(
    src: &mut RowSource,
    si: usize,
    kind: crate::calibrate::ScoreKind,
    full: std::sync::mpsc::SyncSender<Result<Batch>>,
    empty: std::sync::mpsc::Receiver<Batch>,
) {
    let fill = |src: &mut RowSource, b: &mut Batch| -> Result<bool> {
        b.records.resize_with(BATCH, csv::ByteRecord::new);
        b.scores.resize(BATCH, 0.0);
        b.len = 0;
        while b.len < BATCH {
            let rec = &mut b.records[b.len];
            if !src.next_row(rec)? {
                return Ok(false);
            }
            b.scores[b.len] =
                parse_score(&rec[si], kind).map_err(|problem| bad_value(src, rec, si, problem))?;
            b.len += 1;
        }
        Ok(true)
    };
    for mut b in empty {
        match fill(src, &mut b) {
            Ok(more) => {
                if b.len > 0 && full.send(Ok(b)).is_err() {
                    return;
                }
                if !more {
                    return;
                }
            }
            Err(e) => {
                full.send(Err(e)).ok();
                return;
            }
        }
    }
}

type FileOut = std::io::BufWriter<std::fs::File>;

/// Where the output goes.
enum Sink {
    Stdout(std::io::BufWriter<std::io::Stdout>),
    File(FileOut),
    Gz(flate2::write::GzEncoder<FileOut>),
}

impl Write for Sink {
    fn write(&mut self, b: &[u8]) -> std::io::Result<usize> {
        match self {
            Sink::Stdout(w) => w.write(b),
            Sink::File(w) => w.write(b),
            Sink::Gz(w) => w.write(b),
        }
    }
    fn write_all(&mut self, b: &[u8]) -> std::io::Result<()> {
        match self {
            Sink::Stdout(w) => w.write_all(b),
            Sink::File(w) => w.write_all(b),
            Sink::Gz(w) => w.write_all(b),
        }
    }
    fn flush(&mut self) -> std::io::Result<()> {
        match self {
            Sink::Stdout(w) => w.flush(),
            Sink::File(w) => w.flush(),
            Sink::Gz(w) => w.flush(),
        }
    }
}

impl Sink {
    /// Flush everything (ending the gzip stream), surfacing write errors.
    fn finish(self) -> std::io::Result<()> {
        match self {
            Sink::Stdout(mut w) => w.flush(),
            Sink::File(mut w) => w.flush(),
            Sink::Gz(w) => w.finish()?.flush(),
        }
    }
}
