//! plumbline: the command list and its dispatch. Each command's arguments
//! and its work are in `plumbline::commands`, one file per command.

use std::process::ExitCode;

use clap::{Parser, Subcommand};
use plumbline::commands::{apply, check, diagnose, fit, merge, report, run, simulate, verify};

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
    #[command(long_about = run::LONG_ABOUT)]
    Run(run::RunArgs),
    /// Join the shard folders of a sharded run into one results folder.
    #[command(long_about = merge::LONG_ABOUT)]
    Merge(merge::MergeArgs),
    /// Rerun the suite recorded in a results folder and compare bit for bit.
    #[command(long_about = verify::LONG_ABOUT)]
    Verify(verify::VerifyArgs),
    /// Validate a suite and print the resolved plan without running it.
    Check(check::CheckArgs),
    /// Rebuild every table and figure from a results folder, or print one task's table.
    #[command(long_about = report::LONG_ABOUT)]
    Report(report::ReportArgs),
    /// Fit one method on a score file and save it as a map file.
    Fit(fit::FitArgs),
    /// Calibrate a score file with a map file (adds a column of probabilities).
    Apply(apply::ApplyArgs),
    /// Calibration metrics of one score file with bootstrap intervals.
    Diagnose(diagnose::DiagnoseArgs),
    /// Write the demo score files (an invented courier's late-delivery models with
    /// known true calibration maps).
    Simulate(simulate::SimulateArgs),
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let status = match &cli.command {
        Command::Run(a) => run::run(a),
        Command::Merge(a) => merge::run(a),
        Command::Verify(a) => verify::run(a),
        Command::Check(a) => check::run(a),
        Command::Report(a) => report::run(a),
        Command::Fit(a) => fit::run(a),
        Command::Apply(a) => apply::run(a),
        Command::Diagnose(a) => diagnose::run(a),
        Command::Simulate(a) => simulate::run(a),
    };
    status.unwrap_or_else(|e| {
        eprintln!("error: {e:#}");
        ExitCode::from(2)
    })
}
