//! The `merge` and `verify` subcommands (flattened into the binary's command
//! list) and their dispatch.

use std::path::PathBuf;

use clap::Subcommand;

use super::merge::{merge, MergeArgs};
use super::verify::{verify, VerifyArgs};

#[derive(Debug, Subcommand)]
pub enum ScaleCommand {
    /// Join the shard folders of a sharded run into one results folder.
    #[command(long_about = "\
Join the folders written by `plumbline run SUITE --shard K/N` for K = 1..N into the results \
folder one machine would have written (byte for byte, except the machine-dependent fields of \
manifest.json and the fit times in timings.csv). Refuses shards of different suites, data, \
plumbline versions or shard counts, a missing or repeated shard, and a missing or repeated \
unit, naming the shard or unit.")]
    Merge {
        /// Shard folders (all N of them, in any order).
        #[arg(required = true, value_name = "SHARD_DIR")]
        shards: Vec<PathBuf>,
        /// Results folder to write.
        #[arg(long, value_name = "DIR")]
        out: PathBuf,
        /// Replace an existing results folder.
        #[arg(long)]
        force: bool,
        /// No table on the terminal.
        #[arg(long)]
        quiet: bool,
    },
    /// Rerun the suite recorded in a results folder and compare bit for bit.
    #[command(long_about = "\
Rerun the suite recorded in DIR/manifest.json (every unit, or a seeded sample of K units) and \
compare: every file present in DIR that a run writes (timings.csv excepted; manifest.json \
without its machine-dependent fields), or with --sample the sampled units' rows of the unit \
table. Lists the first differing units or files.

Exit status: 0 match, 1 mismatch, 2 error (no manifest, suite or data changed since the run, \
another plumbline version).")]
    Verify {
        /// Results folder (holding manifest.json).
        dir: PathBuf,
        /// Rerun only K units drawn at random (needs the unit table in DIR).
        #[arg(long, value_name = "K")]
        sample: Option<usize>,
        /// Seed of the sample [default: derived from the suite seed].
        #[arg(long, value_name = "S")]
        seed: Option<u64>,
        /// Suite file [default: the path recorded in manifest.json].
        #[arg(long, value_name = "FILE")]
        suite: Option<PathBuf>,
        /// Worker threads [default: all cores]. Results do not depend on it.
        #[arg(long, value_name = "N", value_parser = clap::value_parser!(u16).range(1..))]
        threads: Option<u16>,
    },
}

/// Run a [`ScaleCommand`]. A `verify` mismatch exits with status 1 here;
/// errors are returned (the binary exits 2).
pub fn dispatch(cmd: ScaleCommand) -> anyhow::Result<()> {
    match cmd {
        ScaleCommand::Merge {
            shards,
            out,
            force,
            quiet,
        } => {
            let s = merge(&MergeArgs {
                shards,
                out: out.clone(),
                force,
            })?;
            if !quiet {
                println!("{}", s.terminal);
            }
            for w in &s.warnings {
                eprintln!("warning: {w}");
            }
            eprintln!(
                "merged {} units from {} shards → {}",
                s.units,
                s.shards,
                out.display()
            );
        }
        ScaleCommand::Verify {
            dir,
            sample,
            seed,
            suite,
            threads,
        } => {
            let r = verify(&VerifyArgs {
                dir,
                suite,
                sample,
                seed,
                threads: threads.map(usize::from),
            })?;
            for l in &r.lines {
                println!("{l}");
            }
            if !r.matched {
                std::process::exit(1);
            }
        }
    }
    Ok(())
}
