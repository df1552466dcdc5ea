//! Shard folders: `plumbline run SUITE --shard K/N` writes its share of the
//! units (planned by [`crate::run::shard`]) into a shard folder, and
//! `plumbline merge` reads the N folders back.
//!
//! A shard folder holds `manifest.json` (the run's manifest plus a `shard`
//! entry, [`crate::results::ShardRecord`]: index, count, unit count, cost,
//! method and metric order) and `units.jsonl.gz` (the shard's finished units,
//! one JSON record a line, in output order).

use std::io::{BufRead, BufReader, Read, Write};
use std::path::Path;

use anyhow::{Context, Result};

use crate::results::{Manifest, RunInfo, ShardRecord, COST_RULE};
use crate::run::shard::{unit_cost, ShardSpec};
use crate::run::{self, output, UnitOutcome};
use crate::suite::Plan;

/// The units file of a shard folder.
pub const UNITS_FILE: &str = "units.jsonl.gz";

/// gzip without a time stamp or file name, so equal input gives equal bytes.
pub(crate) fn gzip(bytes: &[u8]) -> Result<Vec<u8>> {
    let mut enc = flate2::GzBuilder::new().write(Vec::new(), flate2::Compression::default());
    enc.write_all(bytes)?;
    Ok(enc.finish()?)
}

/// Write a finished shard (manifest and units) into its staging folder.
pub(crate) fn write_shard(
    staging: &Path,
    plan: &Plan,
    spec: ShardSpec,
    mut units: Vec<UnitOutcome>,
    info: &RunInfo,
) -> Result<()> {
    let tasks: Vec<&str> = plan.tasks.iter().map(|t| t.id.as_str()).collect();
    let methods: Vec<&str> = plan.methods.iter().map(|m| m.id.as_str()).collect();
    run::sort_units(&tasks, &methods, &mut units);
    let mut text = String::new();
    for u in &units {
        text.push_str(&serde_json::to_string(u)?);
        text.push('\n');
    }
    output::write_file(staging, UNITS_FILE, &gzip(text.as_bytes())?)?;
    let cost: u64 = units
        .iter()
        .map(|u| {
            let t = plan.tasks.iter().find(|t| t.id == u.task);
            unit_cost(u.size, methods.len(), t.map(|t| t.test_rows).unwrap_or(0))
        })
        .sum();
    let warnings = run::assemble(plan, units.clone(), info.threads, info.resumed).warnings;
    let mut manifest = Manifest::of_run(plan, info, &warnings);
    manifest.shard = Some(ShardRecord {
        index: spec.index,
        count: spec.count,
        units: units.len(),
        cost,
        cost_rule: COST_RULE.to_string(),
        methods: methods.iter().map(|m| m.to_string()).collect(),
        metrics: plan
            .metrics
            .iter()
            .map(|m| m.as_str().to_string())
            .collect(),
    });
    manifest.write(staging)
}

/// Read the units of a shard folder.
pub fn read_units(dir: &Path) -> Result<Vec<UnitOutcome>> {
    let path = dir.join(UNITS_FILE);
    let f =
        std::fs::File::open(&path).with_context(|| format!("cannot open {}", path.display()))?;
    read_unit_lines(flate2::read::GzDecoder::new(f))
        .with_context(|| format!("reading {}", path.display()))
}

fn read_unit_lines<R: Read>(r: R) -> Result<Vec<UnitOutcome>> {
    let mut out = Vec::new();
    for (i, line) in BufReader::new(r).lines().enumerate() {
        let line = line?;
        let u: UnitOutcome = serde_json::from_str(&line)
            .with_context(|| format!("line {}: not a unit record", i + 1))?;
        out.push(u);
    }
    Ok(out)
}
