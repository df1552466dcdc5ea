//! Building the score pools of open-data tasks: load the dataset (checksummed),
//! train the task's base model by its protocol, and keep the scores of rows the
//! model did not train on. Pools are cached by content hash (dataset digest,
//! model settings, protocol, seed, tool version), so a rerun does not retrain.
//!
//! Seeds: the base model's split and fitting use `mix(suite seed, dataset id)`,
//! and the pool's test/reservoir partition uses the task seed of the dataset
//! id. Every model on the same dataset therefore trains on the same rows and is
//! tested on the same rows, which keeps comparisons across base models fair.

use std::collections::BTreeMap;
use std::path::Path;

use rayon::prelude::*;

use crate::data::{open, Dataset, Side};
use crate::models::protocol::score_pool;
use crate::split;
use crate::suite::{Plan, TaskSource};

/// What building one pool cost.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct PoolReport {
    pub task: String,
    pub cache_hit: bool,
    pub train_rows: usize,
    pub fit_seconds: f64,
    pub score_seconds: f64,
}

/// Seed of a dataset's base-model split and fit.
pub fn model_seed(suite_seed: u64, data: &str) -> u64 {
    split::mix(suite_seed, &[0x706f_6f6c, split::fnv1a(data.as_bytes())]) // "pool"
}

/// Build the pools of every open-data task of the plan (in parallel).
pub fn resolve(
    plan: &mut Plan,
    cache: Option<&Path>,
    threads: Option<usize>,
    quiet: bool,
) -> Result<Vec<PoolReport>, String> {
    resolve_tasks(plan, None, cache, threads, quiet)
}

/// [`resolve`] for the tasks (indices into `plan.tasks`) in `only`, or all;
/// a shard builds just the pools its units need. Tasks left out keep an
/// empty pool.
pub fn resolve_tasks(
    plan: &mut Plan,
    only: Option<&std::collections::BTreeSet<usize>>,
    cache: Option<&Path>,
    threads: Option<usize>,
    quiet: bool,
) -> Result<Vec<PoolReport>, String> {
    let open_ids: Vec<usize> = (0..plan.tasks.len())
        .filter(|&i| matches!(plan.tasks[i].source, TaskSource::Open { .. }))
        .filter(|i| only.is_none_or(|o| o.contains(i)))
        .collect();
    if open_ids.is_empty() {
        return Ok(Vec::new());
    }
    // Load each dataset once.
    let mut datasets: BTreeMap<String, Dataset> = BTreeMap::new();
    for &i in &open_ids {
        if let TaskSource::Open { data_dir, data, .. } = &plan.tasks[i].source {
            if !datasets.contains_key(data) {
                let d = open::load_task(data_dir, data)
                    .map_err(|e| format!("task `{}`: {e}", plan.tasks[i].id))?;
                datasets.insert(data.clone(), d);
            }
        }
    }
    let pool = super::thread_pool(threads).map_err(|e| e.to_string())?;
    let bar = super::progress::Progress::new(
        open_ids.len() as u64,
        "{spinner} score pools {wide_bar} {pos}/{len} tasks · {elapsed} · {msg}",
        "score pools",
        "tasks",
        quiet,
    );
    let seed = plan.seed;
    let tasks = &plan.tasks;
    let built: Vec<Result<_, String>> = pool.install(|| {
        open_ids
            .par_iter()
            .map(|&i| {
                let t = &tasks[i];
                let TaskSource::Open {
                    data,
                    model,
                    protocol,
                    ..
                } = &t.source
                else {
                    unreachable!()
                };
                let ds = &datasets[data];
                let r = score_pool(ds, model, protocol, model_seed(seed, data), cache)
                    .map_err(|e| format!("task `{}`: {e}", t.id));
                bar.set_message(t.id.clone());
                bar.inc();
                r.map(|(p, info)| (i, p, info))
            })
            .collect()
    });
    bar.finish();
    let mut reports = Vec::new();
    for b in built {
        let (i, p, info) = b?;
        let t = &mut plan.tasks[i];
        let TaskSource::Open { data, .. } = &t.source else {
            continue;
        };
        let n = p.scores.len();
        let (reservoir, test) = match &p.sides {
            Some(sides) => (
                (0..n)
                    .filter(|&k| sides[k] == Side::Reservoir)
                    .collect::<Vec<_>>(),
                (0..n)
                    .filter(|&k| sides[k] == Side::Test)
                    .collect::<Vec<_>>(),
            ),
            None => split::partition(n, plan.test_set.rows(n), split::task_seed(seed, data)),
        };
        if reservoir.len() != t.reservoir_rows || test.len() != t.test_rows {
            return Err(format!(
                "task `{}`: the built pool has a reservoir of {} and a test set of {} rows, but the plan expected {} and {}",
                t.id,
                reservoir.len(),
                test.len(),
                t.reservoir_rows,
                t.test_rows
            ));
        }
        t.pool = p;
        t.reservoir = reservoir;
        t.test = test;
        reports.push(PoolReport {
            task: t.id.clone(),
            cache_hit: info.cache_hit,
            train_rows: info.train_rows,
            fit_seconds: info.fit_seconds,
            score_seconds: info.score_seconds,
        });
    }
    Ok(reports)
}
