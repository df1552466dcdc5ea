//! The "Fallback fits" section of the report document (`summary.md` and
//! `index.html`): how many units of each task, size and method could not be
//! fitted and predicted the fallback of `on_fit_failure = "fallback"` (the
//! smoothed base rate), with the cells where that share is large flagged.

use super::document::Block;
use super::Table;
use crate::analysis::Analysis;

/// A cell is flagged when more than this share of its units used the fallback.
pub const LARGE_SHARE: f64 = 0.10;

/// The section's blocks (none when no unit used a fallback).
pub fn fallback_blocks(a: &Analysis) -> Vec<Block> {
    let cells: Vec<_> = a
        .fallback_counts
        .iter()
        .filter(|(_, &(k, _))| k > 0)
        .collect();
    if cells.is_empty() {
        return Vec::new();
    }
    let large = |k: usize, n: usize| n > 0 && k as f64 > LARGE_SHARE * n as f64;
    let flagged = cells.iter().filter(|(_, &(k, n))| large(k, n)).count();
    let intro = format!(
        "{} (task, size, method) cells had units whose method could not fit its calibration sample (one class, too few distinct scores, or a failed fit) and predicted the smoothed base rate (k + 1)/(n + 2) of the sample instead (status `fallback:base-rate`); those units stay in every comparison. {flagged} cells used the fallback in more than {:.0}% of their units (flagged **large**): there the method's results are partly the base rate's.",
        cells.len(),
        LARGE_SHARE * 100.0
    );
    let mut t = Table {
        title: "Units that predicted the fallback".into(),
        header: [
            "task",
            "size",
            "method",
            "fallback units",
            "units",
            "share",
            "",
        ]
        .iter()
        .map(|s| s.to_string())
        .collect(),
        rows: Vec::new(),
        notes: Vec::new(),
    };
    for (cell, &(k, n)) in cells {
        t.rows.push(vec![
            cell.task.clone(),
            cell.size.to_string(),
            cell.method.clone(),
            k.to_string(),
            n.to_string(),
            format!("{:.0}%", 100.0 * k as f64 / n as f64),
            if large(k, n) {
                "**large**".into()
            } else {
                String::new()
            },
        ]);
    }
    vec![
        Block::Heading(2, "Fallback fits".into(), "fallback".into()),
        Block::Para(intro),
        Block::Table(t),
    ]
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::CellKey;

    #[test]
    fn flags_cells_above_the_share() {
        let mut a = Analysis::default();
        a.fallback_counts
            .insert(CellKey::new("t", 50, "beta"), (4, 30));
        a.fallback_counts
            .insert(CellKey::new("t", 50, "platt"), (3, 30));
        a.fallback_counts
            .insert(CellKey::new("t", 100, "platt"), (0, 30));
        let md = super::super::document::to_markdown(&fallback_blocks(&a));
        assert!(
            md.contains("| t | 50 | beta | 4 | 30 | 13% | **large** |"),
            "{md}"
        );
        assert!(md.contains("| t | 50 | platt | 3 | 30 | 10% |"), "{md}");
        assert!(!md.contains("| 100 |"));
        assert!(md.contains("2 (task, size, method) cells") && md.contains("1 cells used"));
        assert!(fallback_blocks(&Analysis::default()).is_empty());
    }
}
