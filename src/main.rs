//! plumbline: CLI definition and glue. The pipeline reads top to bottom:
//! suite → plan → units → statistics → reports (all in the library).

use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Parser, Subcommand};
use plumbline::app;

const ABOUT: &str = "Benchmark probability-calibration methods on your scores and on open data, \
with paired, seeded, reproducible comparisons.";

const LONG_ABOUT: &str = "\
plumbline compares calibration methods (Platt scaling, isotonic regression, ...) the way a \
decision needs: over many calibration-set sizes and repeated seeded draws, every method \
fitted on the same sample and scored on the same test set, with paired confidence intervals.

A suite file (TOML) lists the tasks (score files or open datasets), the sizes, the methods, \
the metrics and the seed. See docs/suite-format.md, or start from suites/open-uci.toml \
(open datasets) or suites/courier-demo.toml (score files).

Typical session:
  plumbline check suites/courier-demo.toml     validate, print the plan and the unit count
  plumbline run suites/courier-demo.toml       run it; results in results/courier-demo/
  plumbline report results/courier-demo        rebuild tables and figures; --task ID for one task
  open results/courier-demo/index.html         the decision first, then ranks, thresholds,
                                               reliability diagrams and per-task detail

From benchmark to production:
  plumbline fit --method beta --scores held_out.csv --out beta.map.json
  plumbline apply beta.map.json --scores new_scores.csv --out calibrated.csv

Many machines: `run --shard K/N` per machine, then `merge`; `verify` reruns a folder.";

#[derive(Parser)]
#[command(name = "plumbline", version, about = ABOUT, long_about = LONG_ABOUT)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Run a suite and write its results folder.
    #[command(long_about = "\
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
unless --force is given.")]
    Run {
        /// Suite file [default: suites/open-uci.toml].
        suite: Option<PathBuf>,
        /// Results folder [default: results/<suite name>].
        #[arg(long, value_name = "DIR")]
        out: Option<PathBuf>,
        /// Worker threads [default: all cores, or RAYON_NUM_THREADS]. Results do not
        /// depend on it.
        #[arg(long, value_name = "N", value_parser = clap::value_parser!(u16).range(1..))]
        threads: Option<u16>,
        /// No progress on standard error and no summary on standard output.
        #[arg(long)]
        quiet: bool,
        /// Replace an existing results folder; also discard the journal of an
        /// interrupted run that cannot be resumed (edited suite, changed data).
        #[arg(long)]
        force: bool,
        /// Run only shard K of N (1 ≤ K ≤ N) into a shard folder
        /// [default folder: results/<suite name>.shard-K-of-N]; join the N
        /// shard folders with `plumbline merge`.
        #[arg(long, value_name = "K/N")]
        shard: Option<plumbline::scale::shard::ShardSpec>,
    },
    #[command(flatten)]
    Scale(plumbline::scale::cli::ScaleCommand),
    /// Validate a suite and print the resolved plan without running it.
    Check {
        /// Suite file.
        suite: PathBuf,
    },
    /// Rebuild every table and figure from a results folder, or print one task's table.
    #[command(long_about = "\
Rebuild paired.csv, thresholds.csv, summary.md, index.html, tables.tex and the figures \
from a results folder's units.csv.gz and reliability*.csv (settings from manifest.json unless \
overridden), then print the decision. It holds the folder's lock while it writes, so it is \
refused while a run or another report writes there. With --task, print that task's table \
and write nothing.")]
    Report {
        /// Results folder (holding units.csv.gz, or units.csv).
        dir: PathBuf,
        /// Print the table of this task (an id from the folder) instead of the summary.
        #[arg(long, value_name = "ID")]
        task: Option<String>,
        /// Reference method: a method id of the folder (an unknown id is
        /// refused with the folder's ids) [default: the one recorded in
        /// manifest.json].
        #[arg(long, value_name = "METHOD_ID")]
        reference: Option<String>,
        /// Metric shown in the tables: one of the folder's metric columns (the
        /// suite's `metrics`) [default: the one recorded in manifest.json].
        #[arg(long, value_name = "METRIC", long_help = app::primary_metric_help())]
        primary_metric: Option<String>,
        /// Confidence level of the intervals [default: as recorded, else 0.95].
        #[arg(long)]
        confidence: Option<f64>,
        /// Interval estimator: paired-t, corrected-t, decomposed,
        /// decomposed-linear or decomposed-skew (docs/statistics.md)
        /// [default: as recorded, else decomposed-skew].
        #[arg(long)]
        interval: Option<String>,
        /// Equivalence margin as a share of the reference method's mean value
        /// at each task and size, e.g. 0.01 (docs/statistics.md)
        /// [default: as recorded, else 0.01].
        #[arg(long)]
        margin: Option<f64>,
        /// Share of a method's draws at a size that may fall back to the base
        /// rate before it is not recommended there, e.g. 0.1 (docs/report.md)
        /// [default: as recorded, else 0.1].
        #[arg(long, value_name = "SHARE")]
        max_fallback: Option<f64>,
    },
    /// Fit one method on a score file and save it as a map file.
    Fit(plumbline::cli::fit::FitArgs),
    /// Calibrate a score file with a map file (adds a column of probabilities).
    Apply(plumbline::cli::apply::ApplyArgs),
    /// Calibration metrics of one score file with bootstrap intervals.
    Diagnose(plumbline::cli::diagnose::DiagnoseArgs),
    /// Write the demo score files (an invented courier's late-delivery models with
    /// known true calibration maps).
    Simulate {
        /// Folder for the score files.
        #[arg(long, default_value = "suites/courier-data")]
        out: PathBuf,
        /// Rows per file.
        #[arg(long, default_value_t = 12_000)]
        rows: usize,
        /// Generator seed.
        #[arg(long, default_value_t = 20_261_201)]
        seed: u64,
    },
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    match dispatch(cli.command) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("error: {e:#}");
            ExitCode::from(2)
        }
    }
}

fn dispatch(cmd: Command) -> anyhow::Result<()> {
    match cmd {
        Command::Scale(c) => plumbline::scale::cli::dispatch(c)?,
        Command::Check { suite } => {
            let plan = app::load_plan(&suite)?;
            print!("{}", app::describe_plan(&plan));
            println!("ok: the suite is valid");
        }
        Command::Run {
            suite,
            out,
            threads,
            quiet,
            force,
            shard,
        } => {
            let suite = suite.unwrap_or_else(|| PathBuf::from(app::DEFAULT_SUITE));
            if !suite.exists() {
                anyhow::bail!(
                    "{}: no such suite file (with no SUITE argument, run from the repository root to use the default suite)",
                    suite.display()
                );
            }
            let args = app::RunArgs {
                suite,
                out,
                threads: threads.map(usize::from),
                quiet,
                force,
                shard,
            };
            let s = app::run_suite(&args)?;
            if !quiet {
                println!("{}", s.terminal);
            }
            for w in &s.warnings {
                eprint!("{}", app::warning_lines(w));
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
        }
        Command::Report {
            dir,
            task,
            reference,
            primary_metric,
            confidence,
            interval,
            margin,
            max_fallback,
        } => {
            let t = app::report_dir(&app::ReportArgs {
                dir,
                reference,
                primary_metric,
                confidence,
                interval,
                margin,
                max_fallback,
                task,
            })?;
            println!("{t}");
        }
        Command::Fit(args) => {
            let s = plumbline::cli::fit::run(&args)?;
            eprintln!("{}", plumbline::cli::fit::describe(&s));
        }
        Command::Apply(args) => {
            let s = plumbline::cli::apply::run(&args)?;
            if s.closed {
                // The reader of a pipe went away (`| head`): a filter's quiet end.
                return Ok(());
            }
            if let Some(w) = s.warning() {
                eprint!("{}", app::warning_lines(&w));
            }
            eprintln!("{} rows calibrated → {}", s.rows, args.out.display());
        }
        Command::Diagnose(args) => {
            let d = plumbline::cli::diagnose::run(&args)?;
            println!("{}", d.terminal());
            eprintln!("{} rows → {}", d.rows, args.out.display());
        }
        Command::Simulate { out, rows, seed } => {
            if rows < 100 {
                anyhow::bail!("--rows {rows}: need at least 100 rows per file");
            }
            let names = plumbline::simulate::write_all(&out, rows, seed)?;
            for n in names {
                println!("{}", out.join(n).display());
            }
        }
    }
    Ok(())
}
