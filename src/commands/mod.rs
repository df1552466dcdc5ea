//! The subcommands, one file each: its clap arguments (`XArgs`) and its
//! `run` function, which does the whole command (printing included) and
//! returns the exit status for the binary. The work behind a command is a
//! library function beside `run` that tests call directly (`run::run_suite`,
//! `report::report_dir`, `check::describe_plan`, `fit::fit`, `apply::apply`,
//! `diagnose::write_folder`) or lives in a module below the commands
//! (`scale::merge`, `scale::verify`). Errors are returned, never turned into a
//! `process::exit` here: the binary prints them and exits with status 2.
//!
//! - [`run`]: run a suite (or one shard of it) into a results folder;
//! - [`check`]: validate a suite and print the plan;
//! - [`report`]: rebuild a results folder's tables and figures;
//! - [`merge`]: join the shard folders of a sharded run;
//! - [`verify`]: rerun a results folder and compare (status 1 on a mismatch);
//! - [`fit`]: fit one method on a score file into a map file;
//! - [`apply`]: calibrate a score file with a map file;
//! - [`diagnose`]: calibration metrics of one score file with intervals;
//! - [`simulate`]: write the demo score files.

pub mod apply;
pub mod check;
pub mod diagnose;
pub mod fit;
pub mod merge;
pub mod report;
pub mod run;
pub mod simulate;
pub mod verify;

use std::io;

use anyhow::{bail, Result};

/// Refuse an empty or blank value of a flag that names something
/// (`--column ''`), naming the flag and the value; `what` says what to give.
pub fn require_name(flag: &str, value: &str, what: &str) -> Result<()> {
    if value.trim().is_empty() {
        bail!(
            "{flag} {}: the name is empty; {what}",
            crate::limits::quoted_prefix(value.as_bytes(), 40)
        );
    }
    Ok(())
}

/// Print `text` and a newline to standard output. A reader that stopped
/// reading (`plumbline check suite.toml | head`) is not an error: the rest is
/// dropped quietly, as `head` asked. Any other write error is returned.
pub fn say(text: impl std::fmt::Display) -> Result<()> {
    use std::io::Write;
    let mut out = io::stdout().lock();
    match writeln!(out, "{text}").and_then(|_| out.flush()) {
        Err(e) if e.kind() == io::ErrorKind::BrokenPipe => Ok(()),
        r => Ok(r?),
    }
}

/// Standard output, buffered, for `--out -`.
pub fn stdout() -> io::BufWriter<io::Stdout> {
    io::BufWriter::with_capacity(1 << 16, io::stdout())
}

/// A warning as lines for standard error: `warning: ` and the text wrapped
/// to the terminal width (`COLUMNS`, else the terminal's, else 100), later
/// lines indented.
pub fn warning_lines(text: &str) -> String {
    let width = crate::report::document::Term::detect().width;
    crate::report::document::wrap(text, width, "warning: ", "  ")
}
