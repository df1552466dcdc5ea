//! `plumbline verify DIR [--sample K]`: rerun the suite recorded in a results
//! folder and compare bit for bit ([`crate::scale::verify`]). The full rerun
//! goes through [`super::run::run_suite`], handed to the comparison as a
//! function so that `scale` stays below the commands.

use std::path::{Path, PathBuf};
use std::process::ExitCode;

use anyhow::Result;

use super::run::{run_suite, RunArgs};
use crate::scale::verify::{verify, VerifyOptions};

/// The long help of `plumbline verify`.
pub const LONG_ABOUT: &str = "\
Rerun the suite recorded in DIR/manifest.json (every unit, or a seeded sample of K units) and \
compare: every file present in DIR that a run writes (timings.csv excepted; manifest.json \
without its machine-dependent fields), or with --sample the sampled units' rows of the unit \
table. Lists the first differing units or files.

Exit status: 0 match, 1 mismatch, 2 error (no manifest, suite or data changed since the run, \
another plumbline version).";

// The arguments of `plumbline verify`.
#[derive(Debug, Clone, clap::Args)]
pub struct VerifyArgs {
    /// Results folder (holding manifest.json).
    pub dir: PathBuf,
    /// Rerun only K units drawn at random (needs the unit table in DIR).
    #[arg(long, value_name = "K")]
    pub sample: Option<usize>,
    /// Seed of the sample [default: derived from the suite seed].
    #[arg(long, value_name = "S")]
    pub seed: Option<u64>,
    /// Suite file [default: the path recorded in manifest.json].
    #[arg(long, value_name = "FILE")]
    pub suite: Option<PathBuf>,
    /// Worker threads [default: all cores]. Results do not depend on it.
    #[arg(long, value_name = "N", value_parser = clap::value_parser!(u16).range(1..))]
    pub threads: Option<u16>,
}

/// `plumbline verify`: the comparison's lines on standard output; exit
/// status 0 when everything compared matches, 1 on a mismatch (errors are
/// returned, status 2).
pub fn run(args: &VerifyArgs) -> Result<ExitCode> {
    let rerun = |suite: &Path, out: &Path| -> Result<()> {
        run_suite(&RunArgs {
            suite: Some(suite.to_path_buf()),
            out: Some(out.to_path_buf()),
            threads: args.threads,
            quiet: true,
            force: true,
            shard: None,
        })
        .map(|_| ())
    };
    let r = verify(
        &VerifyOptions {
            dir: args.dir.clone(),
            suite: args.suite.clone(),
            sample: args.sample,
            seed: args.seed,
            threads: args.threads.map(usize::from),
        },
        &rerun,
    )?;
    for l in &r.lines {
        super::say(l)?;
    }
    Ok(if r.matched {
        ExitCode::SUCCESS
    } else {
        ExitCode::from(1)
    })
}
