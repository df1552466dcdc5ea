//! Gaps in a unit table that `plumbline report` warns about, because they
//! change what the tables show without any other sign: unit rows missing for
//! some repeats (a table edited or cut short: the comparisons then rest on
//! fewer repeats), and metric values that are NaN (the mean and interval of
//! that cell come out blank).
//!
//! Expected repeats of a (task, size) are `0..repeats` when the manifest
//! records the suite's repeat count, and otherwise every repeat that any
//! method has at that (task, size); expected methods are every method of the
//! table.

use std::collections::{BTreeMap, BTreeSet};

use crate::run::table::UnitTable;

/// At most this many repeats are named per warning.
const LIST: usize = 10;

fn list(v: &[usize]) -> String {
    let mut s: Vec<String> = v.iter().take(LIST).map(|r| r.to_string()).collect();
    if v.len() > LIST {
        s.push(format!("… ({} in all)", v.len()));
    }
    s.join(", ")
}

/// One warning per (task, size, method) with missing unit rows and per
/// (task, size, method, metric) with NaN values, in table order of tasks
/// and sizes.
pub fn table_gaps(table: &UnitTable, repeats: Option<usize>) -> Vec<String> {
    // (task, size) → method → repeats present; first-seen order of tasks.
    let mut order: Vec<(String, usize)> = Vec::new();
    let mut cells: BTreeMap<(String, usize), BTreeMap<String, BTreeSet<usize>>> = BTreeMap::new();
    let mut methods: Vec<String> = Vec::new();
    let mut seen_methods: BTreeSet<String> = BTreeSet::new();
    // (task, size, method, metric index) → repeats with NaN.
    let mut nans: BTreeMap<(String, usize, String, usize), Vec<usize>> = BTreeMap::new();
    for r in &table.rows {
        let k = (r.task.clone(), r.size);
        let e = cells.entry(k.clone()).or_insert_with(|| {
            order.push(k.clone());
            BTreeMap::new()
        });
        e.entry(r.method.clone()).or_default().insert(r.repeat);
        if seen_methods.insert(r.method.clone()) {
            methods.push(r.method.clone());
        }
        for (mi, v) in r.metrics.iter().enumerate() {
            if v.is_some_and(f64::is_nan) {
                nans.entry((r.task.clone(), r.size, r.method.clone(), mi))
                    .or_default()
                    .push(r.repeat);
            }
        }
    }
    let mut out = Vec::new();
    for k in &order {
        let by_method = &cells[k];
        let expected: BTreeSet<usize> = match repeats {
            Some(n) => (0..n).collect(),
            None => by_method.values().flatten().copied().collect(),
        };
        for m in &methods {
            let empty = BTreeSet::new();
            let have = by_method.get(m).unwrap_or(&empty);
            let missing: Vec<usize> = expected.difference(have).copied().collect();
            if !missing.is_empty() {
                out.push(format!(
                    "task `{}`, size {}, method `{m}`: no unit rows for {} of {} repeats (repeat {}); its summaries and comparisons rest on {} repeats",
                    k.0,
                    k.1,
                    missing.len(),
                    expected.len(),
                    list(&missing),
                    have.intersection(&expected).count()
                ));
            }
            for (mi, metric) in table.metric_names.iter().enumerate() {
                if let Some(reps) = nans.get(&(k.0.clone(), k.1, m.clone(), mi)) {
                    let mut reps = reps.clone();
                    reps.sort_unstable();
                    out.push(format!(
                        "task `{}`, size {}, method `{m}`: `{metric}` is NaN in {} repeat(s) (repeat {}); its mean and interval are not defined",
                        k.0,
                        k.1,
                        reps.len(),
                        list(&reps)
                    ));
                }
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::run::table::UnitRow;
    use crate::run::UnitStatus;

    fn row(task: &str, size: usize, repeat: usize, method: &str, v: f64) -> UnitRow {
        UnitRow {
            task: task.into(),
            size,
            repeat,
            method: method.into(),
            status: UnitStatus::Ok,
            metrics: vec![Some(v)],
            clipped: Some(0),
            positives: 1,
            reservoir: 10,
            test_rows: 10,
            extras: Vec::new(),
        }
    }

    #[test]
    fn missing_repeats_and_nans_are_named() {
        let mut rows = Vec::new();
        for rep in 0..3 {
            rows.push(row("t", 50, rep, "a", 0.1));
            if rep != 1 {
                rows.push(row(
                    "t",
                    50,
                    rep,
                    "b",
                    if rep == 2 { f64::NAN } else { 0.2 },
                ));
            }
        }
        let table = UnitTable {
            metric_names: vec!["brier".into()],
            extra_names: Vec::new(),
            rows,
        };
        let w = table_gaps(&table, None);
        assert_eq!(w.len(), 2, "{w:?}");
        assert!(
            w[0].contains(
                "task `t`, size 50, method `b`: no unit rows for 1 of 3 repeats (repeat 1)"
            ),
            "{}",
            w[0]
        );
        assert!(
            w[1].contains("`brier` is NaN in 1 repeat(s) (repeat 2)"),
            "{}",
            w[1]
        );
        // With the manifest's repeat count, repeats beyond the table are missing too.
        let w = table_gaps(&table, Some(4));
        assert!(w[0].contains("method `a`: no unit rows for 1 of 4 repeats (repeat 3)"));
        // A complete table gives no warning.
        let full = UnitTable {
            rows: table
                .rows
                .iter()
                .filter(|r| r.method == "a")
                .cloned()
                .collect(),
            ..table
        };
        assert!(table_gaps(&full, Some(3)).is_empty());
    }
}
