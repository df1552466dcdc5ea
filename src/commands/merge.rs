//! `plumbline merge SHARD_DIR... --out DIR`: join the shard folders of a
//! sharded run into one results folder ([`crate::scale::merge`]).

use std::path::PathBuf;
use std::process::ExitCode;

use anyhow::Result;

use crate::scale::merge::merge;

/// The long help of `plumbline merge`.
pub const LONG_ABOUT: &str = "\
Join the folders written by `plumbline run SUITE --shard K/N` for K = 1..N into the results \
folder one machine would have written (byte for byte, except the machine-dependent fields of \
manifest.json and the fit times in timings.csv). Refuses shards of different suites, data, \
plumbline versions or shard counts, a missing or repeated shard, and a missing or repeated \
unit, naming the shard or unit.";

// The arguments of `plumbline merge`.
#[derive(Debug, Clone, clap::Args)]
pub struct MergeArgs {
    /// Shard folders (all N of them, in any order).
    #[arg(required = true, value_name = "SHARD_DIR")]
    pub shards: Vec<PathBuf>,
    /// Results folder to write.
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
    /// Replace an existing results folder.
    #[arg(long)]
    pub force: bool,
    /// No table on the terminal.
    #[arg(long)]
    pub quiet: bool,
}

/// `plumbline merge`: the summary on standard output (unless `--quiet`),
/// warnings and one line about the merge on standard error.
pub fn run(args: &MergeArgs) -> Result<ExitCode> {
    let s = merge(&args.shards, &args.out, args.force)?;
    if !args.quiet {
        super::say(&s.terminal)?;
    }
    for w in &s.warnings {
        eprintln!("warning: {w}");
    }
    eprintln!(
        "merged {} units from {} shards → {}",
        s.units,
        s.shards,
        args.out.display()
    );
    Ok(ExitCode::SUCCESS)
}
