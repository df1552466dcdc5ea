//! `plumbline run [SUITE]`: run every unit of a suite (or, with
//! `--shard K/N`, one share of them) into a results folder.

use std::path::{Path, PathBuf};
use std::process::ExitCode;

use anyhow::{bail, Result};

use crate::report::summary;
use crate::results::{now_rfc3339, run_key, settings_of, shown, write_results, Manifest, RunInfo};
use crate::run::shard::{pools_needed, shard_keys, ShardSpec};
use crate::run::{self, journal::Journal, output, RunOptions};
use crate::scale::shard::write_shard;
use crate::suite::{self, Plan, TaskSource};

/// The suite `plumbline run` uses when none is given.
pub const DEFAULT_SUITE: &str = "suites/open-uci.toml";

/// The long help of `plumbline run`.
pub const LONG_ABOUT: &str = "\
Run every unit (task × calibration size × repeat) of a suite in parallel and write the \
results folder: manifest.json, units.csv.gz, timings.csv, paired.csv, thresholds.csv, \
reliability.csv (with reliability_hist.csv and reliability_terms.csv), summary.md, \
index.html, tables.tex and figures/ (learning curves, reliability diagrams, rank and \
threshold charts). Then print the decision: the team default and runner-up, where the \
answer changes with the calibration size, the ranks and the data-size thresholds \
(per-task tables: `plumbline report DIR --task ID`). Open-data tasks first build their \
score pools (cached beside the results folder).

Progress goes to standard error: a bar on a terminal, else a line every 5 seconds \
(units done, elapsed, estimated time left; PLUMBLINE_PROGRESS_SECONDS sets the interval). \
The summary is laid out for COLUMNS columns, else the terminal's width, else 100; bold \
only on a terminal without NO_COLOR (docs/report.md, \"The terminal\").

The folder appears only when complete. Finished units are journaled as they finish: if a \
run is interrupted, the same command resumes it. An existing results folder is kept \
unless --force is given.";

// The arguments of `plumbline run` (also what tests and `verify` pass to
// [`run_suite`]).
#[derive(Debug, Clone, Default, clap::Args)]
pub struct RunArgs {
    /// Suite file [default: suites/open-uci.toml].
    pub suite: Option<PathBuf>,
    /// Results folder [default: results/<suite name>].
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// Worker threads [default: all cores, or RAYON_NUM_THREADS]. Results do not
    /// depend on it.
    #[arg(long, value_name = "N", value_parser = clap::value_parser!(u16).range(1..))]
    pub threads: Option<u16>,
    /// No progress on standard error and no summary on standard output.
    #[arg(long)]
    pub quiet: bool,
    /// Replace an existing results folder; also discard the journal of an
    /// interrupted run that cannot be resumed (edited suite, changed data).
    #[arg(long)]
    pub force: bool,
    /// Run only shard K of N (1 ≤ K ≤ N) into a shard folder
    /// [default folder: results/<suite name>.shard-K-of-N]; join the N
    /// shard folders with `plumbline merge`.
    #[arg(long, value_name = "K/N")]
    pub shard: Option<ShardSpec>,
}

/// `plumbline run`: run the suite, print the summary on standard output
/// (unless `--quiet`), the warnings and one line about the run on standard
/// error.
pub fn run(args: &RunArgs) -> Result<ExitCode> {
    let s = run_suite(args)?;
    if !args.quiet {
        super::say(&s.terminal)?;
    }
    for w in &s.warnings {
        eprint!("{}", super::warning_lines(w));
    }
    eprintln!(
        "{} units ({} resumed) on {} thread{} in {:.1} s → {}",
        s.units,
        s.resumed,
        s.threads,
        if s.threads == 1 { "" } else { "s" },
        s.seconds,
        s.out.display()
    );
    Ok(ExitCode::SUCCESS)
}

/// What a finished run leaves behind, for the caller to print.
pub struct RunSummary {
    pub out: PathBuf,
    pub terminal: String,
    pub units: usize,
    pub resumed: usize,
    pub threads: usize,
    pub warnings: Vec<String>,
    pub seconds: f64,
}

/// `plumbline run` (with `--shard K/N`: one share of the units into a shard
/// folder: [`crate::run::shard`] plans it, [`crate::scale::shard`] writes it).
pub fn run_suite(args: &RunArgs) -> Result<RunSummary> {
    let suite_file = args
        .suite
        .clone()
        .unwrap_or_else(|| PathBuf::from(DEFAULT_SUITE));
    if !suite_file.exists() {
        bail!(
            "{}: no such suite file (with no SUITE argument, run from the repository root to use the default suite)",
            suite_file.display()
        );
    }
    let threads = args.threads.map(usize::from);
    let t0 = std::time::Instant::now();
    let started = now_rfc3339();
    let mut plan = suite::load(&suite_file)?;
    if args.shard.is_some() && plan.study.is_some() {
        bail!(
            "{}: --shard is not available for a protocol study suite; run it on one machine",
            suite_file.display()
        );
    }
    let out = args.out.clone().unwrap_or_else(|| {
        let name = match args.shard {
            Some(s) => format!("{}.shard-{}-of-{}", plan.name, s.index, s.count),
            None => plan.name.clone(),
        };
        PathBuf::from("results").join(name)
    });
    // Lock and check the folder before the score pools are built (which can
    // take minutes): a second writer or a folder that must not be replaced is
    // refused at once.
    let inputs = run_inputs(&plan, &suite_file);
    let input_refs: Vec<&Path> = inputs.iter().map(PathBuf::as_path).collect();
    let target = output::prepare(&out, args.force, &input_refs, true)?;
    let staging = target.staging().to_path_buf();
    let cache = out
        .parent()
        .map(|p| p.join(".cache").join("pools"))
        .unwrap_or_else(|| PathBuf::from(".cache/pools"));
    let keys = match args.shard {
        Some(s) => shard_keys(&plan, s),
        None => run::unit_keys(&plan),
    };
    let pool_reports = if plan.study.is_some() {
        Vec::new()
    } else {
        let only = args.shard.map(|s| pools_needed(&plan, s, &keys));
        run::pools::resolve_tasks(&mut plan, only.as_ref(), Some(&cache), threads, args.quiet)
            .map_err(anyhow::Error::msg)?
    };
    let key = run_key(&plan, args.shard);
    let (journal, done) = Journal::open(&staging, &key, args.force).map_err(anyhow::Error::msg)?;
    if journal.dropped > 0 && !args.quiet {
        eprintln!(
            "journal: dropped {} torn line(s) at its end (a unit cut short is run again)",
            journal.dropped
        );
    }
    if !done.is_empty() && !args.quiet {
        eprintln!(
            "resuming: {} of {} units already finished in {}",
            done.len(),
            keys.len(),
            staging.display()
        );
    }
    let opts = RunOptions {
        threads,
        quiet: args.quiet,
    };
    if let Some(shard) = args.shard {
        let (units, threads, resumed) =
            run::run_outcomes(&plan, &opts, &keys, done, &|u| journal.append(u))?;
        drop(journal);
        let info = RunInfo {
            suite: &suite_file,
            started,
            t0,
            threads,
            resumed,
            pool_reports,
        };
        let n = units.len();
        write_shard(&staging, &plan, shard, units, &info)?;
        target.commit()?;
        return Ok(RunSummary {
            terminal: String::new(),
            out,
            units: n,
            resumed,
            threads,
            warnings: Vec::new(),
            seconds: t0.elapsed().as_secs_f64(),
        });
    }
    let result = match &plan.study {
        Some(st) => run::study::run_study(&plan, st, &opts, done, &|u| journal.append(u))?,
        None => run::run_keys(&plan, &opts, &keys, done, &|u| journal.append(u))?,
    };
    drop(journal);

    let settings = settings_of(&plan);
    let ctx = summary::ReportContext {
        suite_name: plan.name.clone(),
        suite_file: shown(&suite_file),
        suite_sha256: plan.suite_sha256.clone(),
        seed: Some(plan.seed),
        settings: settings.clone(),
        curves: Vec::new(),
    };
    let (a, ctx) = write_results(&staging, &result, ctx)?;
    let info = RunInfo {
        suite: &suite_file,
        started,
        t0,
        threads: result.threads,
        resumed: result.resumed_units,
        pool_reports,
    };
    Manifest::of_run(&plan, &info, &result.warnings).write(&staging)?;
    target.commit()?;
    Ok(RunSummary {
        terminal: summary::terminal(&a, &ctx),
        out,
        units: plan.unit_count(),
        resumed: result.resumed_units,
        threads: result.threads,
        warnings: result.warnings,
        seconds: t0.elapsed().as_secs_f64(),
    })
}

/// What a run reads: the suite file, its score files and its open-data
/// folder. A results folder holding one of them is never replaced.
fn run_inputs(plan: &Plan, suite_file: &Path) -> Vec<PathBuf> {
    let mut v = vec![suite_file.to_path_buf()];
    for t in &plan.tasks {
        match &t.source {
            TaskSource::ScoreFile(f) => v.push(f.path.clone()),
            TaskSource::Open { data_dir, .. } => v.push(data_dir.clone()),
        }
    }
    v
}
