//! `plumbline apply`: calibrate a score file with a saved map.
//!
//! The score file is streamed row by row (CSV, gzip CSV, Parquet, or CSV on
//! stdin) and written as CSV (gzip when the output name ends in `.gz`, stdout
//! for `-`) with every input column unchanged, in the same order, plus one
//! column of calibrated probabilities (`calibrated` unless `--column` says
//! otherwise). Memory does not grow with the file.
//!
//! Scores outside the fitted range [score_min, score_max] of the map's training
//! summary follow the map's own prediction rule
//! ([`crate::calibrate::state::MapState::range_rule`]) and are
//! counted in a warning. A score that is not a finite number (or, for
//! probability maps, not in [0, 1]) stops the command with the file, row and
//! value; a regular output file goes through a staging file beside the target
//! ([`crate::atomic::AtomicFile`]) and is renamed into place only when every row is
//! written, so nothing partial is left.
//!
//! Stdout (`-`), a FIFO or a character device is written in place, streamed,
//! never renamed over (rows already written cannot be taken back); a directory
//! is refused before any work. When the reader of such a pipe goes away (`|
//! head`), the command stops quietly with success, the filter's convention. A
//! failed write (full disk, file-size limit) stops it with the target's name,
//! a non-zero exit and no staging file; the two pipeline stages always finish.

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

use anyhow::{bail, Context, Result};

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
    /// The output was a pipe (stdout or a FIFO) whose reader went away before
    /// every row was written; the command stopped there without an error.
    pub closed: bool,
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

/// Where `--out` points, decided before any work.
enum Target {
    /// `-`: standard output, streamed.
    Stdout,
    /// A FIFO or a character device: opened and written in place, streamed;
    /// never renamed over (it would stop being a FIFO or a device).
    Special,
    /// A regular file or a new name: written through a staging file and
    /// renamed into place when every row is written.
    Regular,
}

impl Target {
    fn of(out: &Path) -> Result<Target> {
        if out.as_os_str() == "-" {
            return Ok(Target::Stdout);
        }
        let shown = out.display();
        let meta = match std::fs::metadata(out) {
            Ok(m) => m,
            // A new file, or one the staging step reports on.
            Err(_) => return Ok(Target::Regular),
        };
        let ft = meta.file_type();
        if ft.is_dir() {
            bail!("{shown}: is a directory; --out needs a file name (e.g. {shown}/calibrated.csv) or - for stdout");
        }
        if ft.is_file() {
            return Ok(Target::Regular);
        }
        #[cfg(unix)]
        {
            use std::os::unix::fs::FileTypeExt;
            if ft.is_fifo() || ft.is_char_device() {
                return Ok(Target::Special);
            }
        }
        bail!("{shown}: not a regular file, FIFO or character device; --out needs a file name or - for stdout")
    }
}

/// Why the pipeline stopped early.
enum Stop {
    /// Writing the output failed (the csv writer's error, as an I/O error).
    Write(std::io::Error),
    /// Reading or checking the input failed (the message names file and row).
    Read(anyhow::Error),
}

fn io_of(e: csv::Error) -> std::io::Error {
    match e.into_kind() {
        csv::ErrorKind::Io(e) => e,
        other => std::io::Error::other(format!("{other:?}")),
    }
}

/// `plumbline apply`: calibrate, then report the rows written (and any
/// out-of-range warning) on standard error; nothing when the reader of a
/// pipe went away (`| head`), a filter's quiet end.
pub fn run(args: &ApplyArgs) -> Result<ExitCode> {
    let s = apply(args)?;
    if s.closed {
        return Ok(ExitCode::SUCCESS);
    }
    if let Some(w) = s.warning() {
        eprint!("{}", super::warning_lines(&w));
    }
    eprintln!("{} rows calibrated → {}", s.rows, args.out.display());
    Ok(ExitCode::SUCCESS)
}

/// Calibrate the score file with the map.
///
/// Output to stdout, a FIFO or a character device is streamed in place; when
/// its reader goes away (a closed pipe) the command stops quietly and returns
/// with [`ApplySummary::closed`] set, the filter's convention (`| head`).
pub fn apply(args: &ApplyArgs) -> Result<ApplySummary> {
    super::require_name(
        "--column",
        &args.column,
        "name the added column of calibrated probabilities (default `calibrated`)",
    )?;
    let target = Target::of(&args.out)?;
    crate::atomic::guard_signals();
    let loaded = mapfile::load(&args.map)?;
    let content = &loaded.content;
    let map = loaded.map.as_ref();
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

    let out_name = match target {
        Target::Stdout => "<stdout>".to_string(),
        _ => args.out.display().to_string(),
    };
    let gz = args.out.extension().is_some_and(|e| e == "gz");
    let file_sink = |f: std::fs::File| {
        let w = std::io::BufWriter::with_capacity(1 << 16, f);
        if gz {
            Sink::Gz(flate2::write::GzEncoder::new(
                w,
                flate2::Compression::default(),
            ))
        } else {
            Sink::File(w)
        }
    };
    let mut atomic = None;
    let sink = match target {
        Target::Stdout => Sink::Stdout(super::stdout()),
        Target::Special => file_sink(
            std::fs::OpenOptions::new()
                .write(true)
                .open(&args.out)
                .with_context(|| format!("{out_name}: cannot open for writing"))?,
        ),
        Target::Regular => {
            let f = crate::atomic::AtomicFile::create(&args.out)?;
            let w = f.writer()?;
            atomic = Some(f);
            file_sink(w)
        }
    };
    let streamed = !matches!(target, Target::Regular);
    let mut wtr = csv::WriterBuilder::new()
        .buffer_capacity(1 << 16)
        .from_writer(sink);

    let (lo, hi) = (content.training.score_min, content.training.score_max);
    let mut summary = ApplySummary {
        rows: 0,
        below: 0,
        above: 0,
        score_min: lo,
        score_max: hi,
        rule: content.fitted.range_rule(),
        closed: false,
    };
    let mut header = csv::ByteRecord::new();
    for h in src.headers() {
        header.push_field(h.as_bytes());
    }
    header.push_field(args.column.as_bytes());

    // Two stages on two threads, batches of rows passed between them: the
    // reader parses the CSV (or decodes Parquet) and the scores; this thread
    // predicts, formats and writes. Batches are recycled, so memory stays at a
    // few batches whatever the file size. Each stage owns its ends of both
    // channels, so when either stops (done or failed) the other's next send or
    // receive ends too: the writer stops on a closed `full` channel, the
    // reader on a closed `empty` one or a failed send. The reader is always
    // joined, and the first error is the one reported.
    let (full_tx, full_rx) = std::sync::mpsc::sync_channel::<Result<Batch>>(2);
    let (empty_tx, empty_rx) = std::sync::mpsc::sync_channel::<Batch>(4);
    for _ in 0..3 {
        empty_tx.send(Batch::default()).ok();
    }
    let outcome: std::result::Result<(), Stop> = std::thread::scope(|scope| {
        let reader = scope.spawn(move || read_batches(&mut src, si, kind, full_tx, empty_rx));
        let written = wtr
            .write_byte_record(&header)
            .map_err(|e| Stop::Write(io_of(e)))
            .and_then(|()| write_batches(map, &mut wtr, &mut summary, full_rx, empty_tx));
        let joined = reader.join();
        written?;
        joined.map_err(|_| {
            Stop::Read(anyhow::anyhow!(
                "{}: the reader stopped unexpectedly",
                args.scores.display()
            ))
        })
    });
    let finished = outcome.and_then(|()| {
        wtr.into_inner()
            .map_err(|e| Stop::Write(e.into_error()))?
            .finish()
            .map_err(Stop::Write)
    });
    match finished {
        Ok(()) => {}
        Err(Stop::Write(e)) if streamed && e.kind() == std::io::ErrorKind::BrokenPipe => {
            summary.closed = true;
            return Ok(summary);
        }
        // The staging file goes with `atomic` when this returns.
        Err(Stop::Write(e)) => bail!("{out_name}: cannot write: {e}"),
        Err(Stop::Read(e)) => return Err(e),
    }
    if let Some(f) = atomic {
        f.commit()?;
    }
    Ok(summary)
}

/// The writer stage: predict, format and write every batch the reader sends,
/// handing each batch back for reuse. Returns at the end of the input, at the
/// reader's error or at the first failed write; either way the channel ends it
/// owns are dropped on return, which ends the reader.
fn write_batches<W: Write>(
    map: &dyn crate::calibrate::FittedMap,
    wtr: &mut csv::Writer<W>,
    summary: &mut ApplySummary,
    full: std::sync::mpsc::Receiver<Result<Batch>>,
    empty: std::sync::mpsc::SyncSender<Batch>,
) -> std::result::Result<(), Stop> {
    let (lo, hi) = (summary.score_min, summary.score_max);
    let mut buf = ryu::Buffer::new();
    for batch in full {
        let mut batch = batch.map_err(Stop::Read)?;
        let n = batch.len;
        batch.out.resize(n, 0.0);
        map.predict(&batch.scores[..n], &mut batch.out[..n]);
        for i in 0..n {
            let s = batch.scores[i];
            summary.below += (s < lo) as u64;
            summary.above += (s > hi) as u64;
            let rec = &mut batch.records[i];
            rec.push_field(push_float(&mut buf, batch.out[i]).as_bytes());
            wtr.write_byte_record(rec)
                .map_err(|e| Stop::Write(io_of(e)))?;
        }
        summary.rows += n as u64;
        // The reader may have finished already; the rows still queued are
        // written all the same.
        empty.send(batch).ok();
    }
    Ok(())
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
            b.scores[b.len] = parse_score(&rec[si], kind).map_err(|problem| {
                bad_value(src, rec, si, problem).with_range_hint(
                    "the map was fitted on probabilities; fit one with --score-kind margin for other scores",
                )
            })?;
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
