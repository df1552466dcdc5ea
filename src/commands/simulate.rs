//! `plumbline simulate`: write the demo score files ([`crate::simulate`]).

use std::path::PathBuf;
use std::process::ExitCode;

use anyhow::{bail, Result};

// The arguments of `plumbline simulate`.
#[derive(Debug, Clone, clap::Args)]
pub struct SimulateArgs {
    /// Folder for the score files.
    #[arg(long, default_value = "suites/courier-data")]
    pub out: PathBuf,
    /// Rows per file.
    #[arg(long, default_value_t = 12_000)]
    pub rows: usize,
    /// Generator seed.
    #[arg(long, default_value_t = 20_261_201)]
    pub seed: u64,
}

/// `plumbline simulate`: the written files' paths on standard output.
pub fn run(args: &SimulateArgs) -> Result<ExitCode> {
    if args.rows < 100 {
        bail!("--rows {}: need at least 100 rows per file", args.rows);
    }
    let names = crate::simulate::write_all(&args.out, args.rows, args.seed)?;
    for n in names {
        super::say(args.out.join(n).display())?;
    }
    Ok(ExitCode::SUCCESS)
}
