//! Shard planning: which units `plumbline run SUITE --shard K/N` runs.
//!
//! Every unit gets an expected cost of `methods × (calibration size + test
//! rows)`: each method fits on the calibration sample and is scored on the
//! task's test set, so a unit's work grows with both. Units are taken in
//! decreasing cost (ties in the plan's unit order) and each goes to the shard
//! with the least cost so far (ties to the lowest index): greedy
//! longest-processing-time scheduling (Graham, "Bounds on multiprocessing
//! timing anomalies", SIAM J. Appl. Math. 17, 1969), within 4/3 of the best
//! possible largest share. Costs are integers, so the assignment is the same
//! on every machine, and it depends only on the tasks' sizes and test rows,
//! the repeats and the method count, which `merge` reads back from the
//! shards' manifests ([`layout`]) to check that no unit is missing. Each shard
//! builds only the score pools its units need ([`pools_needed`]); a task
//! without units is built by shard 1, so the merged manifest lists every
//! pool. Shard folders are written and read in `scale/shard.rs`.

use std::collections::BTreeSet;
use std::fmt;

use crate::suite::Plan;

/// Shard `index` of `count` (1-based, as written on the command line: `K/N`).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct ShardSpec {
    pub index: usize,
    pub count: usize,
}

impl fmt::Display for ShardSpec {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}/{}", self.index, self.count)
    }
}

impl std::str::FromStr for ShardSpec {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, String> {
        let bad = || format!("`{s}`: expected K/N with 1 ≤ K ≤ N, e.g. 2/8");
        let (k, n) = s.split_once('/').ok_or_else(bad)?;
        let index: usize = k.trim().parse().map_err(|_| bad())?;
        let count: usize = n.trim().parse().map_err(|_| bad())?;
        if count == 0 || index == 0 || index > count {
            return Err(bad());
        }
        Ok(ShardSpec { index, count })
    }
}

/// Expected cost of one unit (see the module doc).
pub fn unit_cost(size: usize, methods: usize, test_rows: usize) -> u64 {
    methods as u64 * (size as u64 + test_rows as u64)
}

/// Greedy longest-processing-time assignment: the shard (0-based) of each
/// item, given the items' costs.
pub fn assign(costs: &[u64], count: usize) -> Vec<usize> {
    let mut order: Vec<usize> = (0..costs.len()).collect();
    order.sort_by_key(|&i| (std::cmp::Reverse(costs[i]), i));
    let mut load = vec![0u64; count.max(1)];
    let mut out = vec![0; costs.len()];
    for i in order {
        let (s, _) = load
            .iter()
            .enumerate()
            .min_by_key(|&(s, &l)| (l, s))
            .unwrap_or((0, &0));
        load[s] += costs[i];
        out[i] = s;
    }
    out
}

/// Every unit `(task index, size, repeat)` in plan order with its shard
/// (0-based), from the tasks' (sizes, test rows), the repeats and the method
/// count — all of which a manifest records.
pub fn layout(
    tasks: &[(Vec<usize>, usize)],
    repeats: usize,
    methods: usize,
    count: usize,
) -> Vec<((usize, usize, usize), usize, u64)> {
    let mut keys = Vec::new();
    for (ti, (sizes, test_rows)) in tasks.iter().enumerate() {
        for &size in sizes {
            for r in 0..repeats {
                keys.push(((ti, size, r), unit_cost(size, methods, *test_rows)));
            }
        }
    }
    let costs: Vec<u64> = keys.iter().map(|k| k.1).collect();
    let shards = assign(&costs, count);
    keys.into_iter()
        .zip(shards)
        .map(|((k, c), s)| (k, s, c))
        .collect()
}

fn plan_layout(plan: &Plan, count: usize) -> Vec<((usize, usize, usize), usize, u64)> {
    let tasks: Vec<(Vec<usize>, usize)> = plan
        .tasks
        .iter()
        .map(|t| (t.sizes.clone(), t.test_rows))
        .collect();
    layout(&tasks, plan.repeats, plan.methods.len(), count)
}

/// The units of one shard, in plan order.
pub fn shard_keys(plan: &Plan, spec: ShardSpec) -> Vec<(usize, usize, usize)> {
    plan_layout(plan, spec.count)
        .into_iter()
        .filter(|&(_, s, _)| s + 1 == spec.index)
        .map(|(k, _, _)| k)
        .collect()
}

/// Tasks whose score pool a shard builds: those with units in the shard,
/// and, for shard 1, the tasks without any unit.
pub fn pools_needed(
    plan: &Plan,
    spec: ShardSpec,
    keys: &[(usize, usize, usize)],
) -> BTreeSet<usize> {
    let mut need: BTreeSet<usize> = keys.iter().map(|k| k.0).collect();
    if spec.index == 1 {
        need.extend((0..plan.tasks.len()).filter(|&i| plan.tasks[i].sizes.is_empty()));
    }
    need
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn spec_parses_and_rejects() {
        assert_eq!(
            "2/8".parse::<ShardSpec>(),
            Ok(ShardSpec { index: 2, count: 8 })
        );
        for bad in ["0/4", "5/4", "1/0", "3", "a/b", "1/-2"] {
            assert!(bad.parse::<ShardSpec>().is_err(), "{bad}");
        }
    }

    #[test]
    fn lpt_matches_a_hand_worked_case() {
        // Costs 7,6,5,4,3 on two machines, by hand: 7→A, 6→B, 5→B (11),
        // 4→A (11), 3→A (14): loads 14 and 11.
        assert_eq!(assign(&[7, 6, 5, 4, 3], 2), vec![0, 1, 1, 0, 0]);
        // Equal costs alternate, lowest index first.
        assert_eq!(assign(&[1, 1, 1, 1], 3), vec![0, 1, 2, 0]);
    }

    #[test]
    fn layout_covers_every_unit_once_and_balances_cost() {
        let tasks = vec![
            (vec![50, 100, 200, 400, 800, 1600, 3200], 3600),
            (vec![50, 400], 900),
        ];
        let l = layout(&tasks, 30, 12, 4);
        assert_eq!(l.len(), (7 + 2) * 30);
        let mut load = [0u64; 4];
        for &(_, s, c) in &l {
            load[s] += c;
        }
        let total: u64 = load.iter().sum();
        let max_cost = l.iter().map(|x| x.2).max().unwrap();
        // LPT bound: the largest share exceeds the mean by less than one unit.
        assert!(load.iter().all(|&x| x <= total / 4 + max_cost), "{load:?}");
    }
}
