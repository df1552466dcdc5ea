//! Tables quoted in the docs are the ones their committed outputs give: the
//! coverage tables of `docs/statistics.md` are regenerated from the committed
//! study output `docs/coverage/table.csv` by `scripts/coverage_markdown.py`,
//! and every line the script prints must appear in the document as printed.
//! A changed table without the doc (or the reverse) fails here.
//!
//! Needs `python3` (standard library only); `.ci/run` installs it when
//! missing.

use std::path::Path;
use std::process::Command;

#[test]
fn coverage_tables_in_the_statistics_doc_match_the_committed_study_output() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let out = Command::new("python3")
        .current_dir(root)
        .args(["scripts/coverage_markdown.py", "docs/coverage/table.csv"])
        .output()
        .expect("python3 is needed to regenerate the docs' coverage tables");
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let generated = String::from_utf8(out.stdout).unwrap();
    let doc = std::fs::read_to_string(root.join("docs/statistics.md")).unwrap();
    let lines: Vec<&str> = generated.lines().filter(|l| !l.trim().is_empty()).collect();
    // The script prints a table per population plus the summaries: far more
    // than a handful of lines, so an empty output cannot pass.
    assert!(lines.len() > 100, "{} lines", lines.len());
    let missing: Vec<&&str> = lines.iter().filter(|l| !doc.contains(**l)).collect();
    assert!(
        missing.is_empty(),
        "docs/statistics.md does not quote these lines of `python3 scripts/coverage_markdown.py docs/coverage/table.csv` ({} of {}); paste the script's output into the doc:\n{}",
        missing.len(),
        lines.len(),
        missing.iter().take(10).map(|l| l.to_string()).collect::<Vec<_>>().join("\n")
    );
}

#[test]
fn reservoir_rule_summary_in_the_statistics_doc_matches_its_committed_output() {
    // docs/coverage/rules.txt is the printed output of
    // scripts/coverage_rules.py on a raw study dump too large to commit; the
    // doc quotes its "rule" headers and its "all" summary lines.
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let out = std::fs::read_to_string(root.join("docs/coverage/rules.txt")).unwrap();
    let doc = std::fs::read_to_string(root.join("docs/statistics.md")).unwrap();
    let quoted: Vec<&str> = out
        .lines()
        .filter(|l| l.starts_with("rule ") || l.starts_with("  all "))
        .collect();
    // Six rules, a header and two summary lines each.
    assert_eq!(quoted.len(), 18, "{quoted:#?}");
    let missing: Vec<&&str> = quoted.iter().filter(|l| !doc.contains(**l)).collect();
    assert!(
        missing.is_empty(),
        "docs/statistics.md does not quote these lines of docs/coverage/rules.txt:\n{}",
        missing
            .iter()
            .map(|l| l.to_string())
            .collect::<Vec<_>>()
            .join("\n")
    );
    // The output records what made it.
    assert!(out.starts_with("command: "), "no command line in rules.txt");
    assert!(out.contains("\nmachine: "), "no machine line in rules.txt");
}
