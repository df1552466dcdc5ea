//! The committed coverage table reruns: a few cells of
//! `docs/coverage/table.csv`, one per population, are recomputed at their
//! committed number of replicates through the same study code
//! (`benches/coverage/study.rs`) and must come out as the same CSV line, byte
//! for byte — truth, coverage, misses on each side, widths and errors. A cell
//! depends only on its population, pair, size and the study's seeds, not on
//! which other cells run beside it, so one cell can be rerun alone. Each
//! population's bench output (`docs/coverage/run-<population>.txt`) must
//! record the command, commit and machine it came from.

#[path = "../benches/coverage/study.rs"]
mod study;

use plumbline::metrics::MetricId;
use plumbline::stats::paired::IntervalKind;
use study::{Population, StudyConfig};

const TABLE: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/docs/coverage/table.csv");

/// The cells rerun: population, method, reference, metric, size. Small sizes
/// and cheap maps keep the rerun short; the pairs cover a parametric map
/// against Platt, a step map against the raw scores and the Brier score.
const CELLS: [(&str, &str, &str, MetricId, usize); 5] = [
    ("calibrated", "beta", "platt", MetricId::LogLoss, 100),
    (
        "over-confident",
        "isotonic",
        "identity",
        MetricId::Brier,
        50,
    ),
    (
        "rare-under-confident",
        "temperature",
        "platt",
        MetricId::LogLoss,
        50,
    ),
    (
        "rare-over-confident",
        "identity",
        "platt",
        MetricId::Brier,
        200,
    ),
    ("two-step", "venn-abers", "platt", MetricId::LogLoss, 50),
];

#[test]
fn committed_coverage_cells_rerun_byte_for_byte() {
    let table = std::fs::read_to_string(TABLE).expect("docs/coverage/table.csv is committed");
    let mut lines = table.lines();
    let header = lines.next().expect("a header line");
    let kind = IntervalKind::default();
    for (population, method, reference, metric, size) in CELLS {
        let prefix = format!(
            "{population},{method},{reference},{},{size},{},",
            metric.as_str(),
            kind.as_str()
        );
        let committed: Vec<&str> = table.lines().filter(|l| l.starts_with(&prefix)).collect();
        assert_eq!(committed.len(), 1, "one committed row for {prefix}");
        let committed = committed[0];
        let replicates: usize = committed.split(',').nth(8).unwrap().parse().unwrap();
        assert!(replicates >= 400, "{prefix}: only {replicates} replicates");

        let mut cfg = StudyConfig::published();
        cfg.populations = Population::all()
            .into_iter()
            .filter(|p| p.name == population)
            .collect();
        assert_eq!(cfg.populations.len(), 1, "population {population}");
        cfg.pairs = vec![(method.to_string(), reference.to_string())];
        cfg.metrics = vec![metric];
        cfg.sizes = vec![size];
        cfg.kinds = vec![kind];
        cfg.replicates = replicates;
        let out = study::run_study(&cfg, &|_| {}).expect("the study runs");
        let csv = out.table_csv();
        let mut rerun = csv.lines();
        assert_eq!(rerun.next(), Some(header), "the table's columns changed");
        let rows: Vec<&str> = rerun.collect();
        assert_eq!(rows, vec![committed], "rerun of {prefix}");
    }
}

#[test]
fn every_population_output_is_stamped() {
    let dir = concat!(env!("CARGO_MANIFEST_DIR"), "/docs/coverage");
    for p in Population::all() {
        let path = format!("{dir}/run-{}.txt", p.name);
        let text = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{path}: {e}"));
        let head: Vec<&str> = text.lines().take(5).collect();
        for key in ["command: ", "commit: ", "machine: "] {
            let line = head.iter().find(|l| l.starts_with(key));
            let Some(line) = line else {
                panic!("{path}: no `{key}` line in its first lines")
            };
            assert!(
                !line.contains("uncommitted") && !line.contains("unknown"),
                "{path}: {line}"
            );
        }
        // The stamped command names this population and its replicates.
        let cmd = head.iter().find(|l| l.starts_with("command: ")).unwrap();
        assert!(cmd.contains(p.name), "{path}: {cmd}");
    }
}
