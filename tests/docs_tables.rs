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

/// Numbers of a line: digit runs with an optional decimal part, thousands
/// separators removed ("8,040" and "8040" are the same number), a leading
/// minus kept.
fn numbers(line: &str) -> Vec<String> {
    let mut out = Vec::new();
    let chars: Vec<char> = line.chars().collect();
    let mut i = 0;
    while i < chars.len() {
        if chars[i].is_ascii_digit() {
            let start = i;
            while i < chars.len()
                && (chars[i].is_ascii_digit()
                    || ((chars[i] == ',' || chars[i] == '.')
                        && chars.get(i + 1).is_some_and(|c| c.is_ascii_digit())))
            {
                i += 1;
            }
            let neg = start > 0 && (chars[start - 1] == '-' || chars[start - 1] == '−');
            let n: String = chars[start..i].iter().filter(|c| **c != ',').collect();
            out.push(if neg { format!("-{n}") } else { n });
        } else {
            i += 1;
        }
    }
    out
}

/// Every table or code block of `docs/performance.md` that follows a
/// `<!-- source: FILE -->` marker quotes FILE: each number in the table's
/// body (or each line of the code block) appears in that committed output, and
/// the output records the command, the commit and the machine that made it.
#[test]
fn performance_tables_quote_their_committed_outputs() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let doc = std::fs::read_to_string(root.join("docs/performance.md")).unwrap();
    let lines: Vec<&str> = doc.lines().collect();
    let mut checked = Vec::new();
    for (at, line) in lines.iter().enumerate() {
        let Some(rest) = line.trim().strip_prefix("<!-- source: ") else {
            continue;
        };
        let file = rest.trim_end_matches("-->").trim();
        let out = std::fs::read_to_string(root.join(file))
            .unwrap_or_else(|e| panic!("docs/performance.md line {}: {file}: {e}", at + 1));
        for stamp in ["command: ", "commit: ", "machine: "] {
            assert!(
                out.lines().any(|l| l.starts_with(stamp)),
                "{file} has no `{stamp}` line: it must record what made it (scripts/stamped.sh)"
            );
        }
        let known: std::collections::HashSet<String> = out.lines().flat_map(numbers).collect();
        // The quoted block: the next table or fenced code block.
        let body: Vec<&str> = lines[at + 1..]
            .iter()
            .skip_while(|l| l.trim().is_empty())
            .take_while(|l| !l.trim().is_empty())
            .copied()
            .collect();
        assert!(
            !body.is_empty(),
            "docs/performance.md line {}: nothing follows the source marker",
            at + 1
        );
        if body[0].starts_with("```") {
            for l in body.iter().skip(1).filter(|l| !l.starts_with("```")) {
                assert!(
                    out.lines().any(|o| o.trim_end() == l.trim_end()),
                    "docs/performance.md quotes a line that {file} does not hold:\n{l}"
                );
            }
        } else {
            assert!(body[0].starts_with('|'), "line {}: {}", at + 2, body[0]);
            // Header and separator rows hold labels, not measurements.
            for l in body.iter().skip(2) {
                for n in numbers(l) {
                    assert!(
                        known.contains(&n),
                        "docs/performance.md quotes {n} (row `{l}`), which {file} does not hold"
                    );
                }
            }
        }
        checked.push(file.to_string());
    }
    // The methods, base-model, fits, default-suite, apply and check tables.
    assert!(checked.len() >= 6, "only {checked:?} are marked");
}

#[test]
fn numbers_are_read_as_written() {
    assert_eq!(
        numbers("| 8,040 | 96,480 | −0.5 ms | x2 | 1.87 ms |"),
        ["8040", "96480", "-0.5", "2", "1.87"]
    );
    assert_eq!(numbers("ratio 2.5, then 3"), ["2.5", "3"]);
}
