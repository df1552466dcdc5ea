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

/// The docs that may quote measured figures.
fn docs(root: &Path) -> Vec<String> {
    let mut out: Vec<String> = ["README.md", "DEVELOPERS.md", "results/README.md"]
        .iter()
        .map(|s| s.to_string())
        .collect();
    let mut pages: Vec<String> = std::fs::read_dir(root.join("docs"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.ends_with(".md"))
        .map(|n| format!("docs/{n}"))
        .collect();
    pages.sort();
    out.extend(pages);
    out
}

/// Checks every table or code block of DOC that follows a
/// `<!-- source: FILE -->` marker: FILE exists and, unless it is a file of a
/// published run in `results/`, starts with the `command: ` and `commit: `
/// lines of `scripts/stamped.sh` and records the machine; each number in the
/// table's body (or each line of the code block) appears in FILE. Returns the
/// files the marked blocks quote.
fn check_source_markers(root: &Path, doc_name: &str) -> Vec<String> {
    let doc = std::fs::read_to_string(root.join(doc_name)).unwrap();
    let lines: Vec<&str> = doc.lines().collect();
    let mut checked = Vec::new();
    for (at, line) in lines.iter().enumerate() {
        let Some(rest) = line.trim().strip_prefix("<!-- source: ") else {
            continue;
        };
        let file = rest.trim_end_matches("-->").trim();
        let out = std::fs::read_to_string(root.join(file))
            .unwrap_or_else(|e| panic!("{doc_name} line {}: {file}: {e}", at + 1));
        if !file.starts_with("results/") {
            let mut head = out.lines();
            for stamp in ["command: ", "commit: "] {
                assert!(
                    head.next().is_some_and(|l| l.starts_with(stamp)),
                    "{doc_name} line {}: {file} does not start with its `command: ` and `commit: ` lines: it must record what made it (scripts/stamped.sh)",
                    at + 1
                );
            }
            assert!(
                out.lines().any(|l| l.starts_with("machine: ")),
                "{doc_name} line {}: {file} has no `machine: ` line: it must record what made it (scripts/stamped.sh)",
                at + 1
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
            "{doc_name} line {}: nothing follows the source marker",
            at + 1
        );
        if body[0].starts_with("```") {
            for l in body.iter().skip(1).filter(|l| !l.starts_with("```")) {
                assert!(
                    out.lines().any(|o| o.trim_end() == l.trim_end()),
                    "{doc_name} quotes a line that {file} does not hold:\n{l}"
                );
            }
        } else {
            assert!(
                body[0].starts_with('|'),
                "{doc_name} line {}: {}",
                at + 2,
                body[0]
            );
            // Header and separator rows hold labels, not measurements.
            for l in body.iter().skip(2) {
                for n in numbers(l) {
                    assert!(
                        known.contains(&n),
                        "{doc_name} quotes {n} (row `{l}`), which {file} does not hold"
                    );
                }
            }
        }
        checked.push(file.to_string());
    }
    checked
}

/// Every table or code block of `docs/performance.md` that follows a
/// `<!-- source: FILE -->` marker quotes FILE: each number in the table's
/// body (or each line of the code block) appears in that committed output, and
/// the output records the command, the commit and the machine that made it.
#[test]
fn performance_tables_quote_their_committed_outputs() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let checked = check_source_markers(root, "docs/performance.md");
    // The methods, base-model, fits, default-suite, apply and check tables.
    assert!(checked.len() >= 6, "only {checked:?} are marked");
}

/// The same holds for a marker in any doc: README.md, DEVELOPERS.md,
/// results/README.md and every page of docs/.
#[test]
fn every_source_marker_names_a_stamped_committed_output() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let mut all = Vec::new();
    for doc in docs(root) {
        for file in check_source_markers(root, &doc) {
            all.push(format!("{doc}: {file}"));
        }
    }
    // The six of docs/performance.md and the reservoir-rule block of
    // docs/statistics.md at least.
    assert!(all.len() >= 7, "only {all:?} are marked");
    assert!(
        all.iter()
            .any(|a| a == "docs/statistics.md: docs/coverage/rules.txt"),
        "{all:?}"
    );
}

/// The number written right before each occurrence of `after` in `doc` whose
/// text before the number ends with `before` (thousands separators removed).
fn quoted_before(doc: &str, before: &str, after: &str) -> Vec<String> {
    let mut out = Vec::new();
    for (i, _) in doc.match_indices(after) {
        let head = &doc[..i];
        let start = head
            .trim_end_matches(|c: char| c.is_ascii_digit() || c == ',' || c == '.')
            .len();
        let number = head[start..].trim_matches(|c| c == ',' || c == '.');
        if number.is_empty() || !head[..start].ends_with(before) {
            continue;
        }
        out.push(number.replace(',', ""));
    }
    out
}

/// A figure a doc quotes from a published run's manifest (or its
/// paired.csv): the doc, the text right before and right after the number,
/// the value in the file, and where the value comes from.
struct Quoted {
    doc: &'static str,
    before: &'static str,
    after: &'static str,
    value: f64,
    from: String,
}

/// `quoted` agrees with `value` to the decimals it is written with.
fn agrees(quoted: &str, value: f64) -> bool {
    let Ok(q) = quoted.parse::<f64>() else {
        return false;
    };
    let decimals = quoted.split('.').nth(1).map_or(0, |d| d.len()) as i32;
    (q - value).abs() <= 0.5 * 10f64.powi(-decimals) + 1e-12
}

fn manifest(root: &Path, run: &str) -> serde_json::Value {
    let path = root.join(format!("results/{run}/manifest.json"));
    serde_json::from_str(&std::fs::read_to_string(&path).unwrap())
        .unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

/// Facts of a published run, read from its manifest.
struct Run {
    units: f64,
    wall_seconds: f64,
    threads: f64,
    repeats: f64,
    tasks: f64,
    datasets: f64,
    models: f64,
    largest_size: f64,
    tasks_at_largest: f64,
    datasets_at_largest: f64,
}

fn run_facts(m: &serde_json::Value) -> Run {
    let num = |v: &serde_json::Value, what: &str| {
        v.as_f64()
            .unwrap_or_else(|| panic!("manifest.json: `{what}` is not a number"))
    };
    let tasks = m["tasks"].as_array().expect("manifest.json: `tasks`");
    let ids: Vec<(&str, &str)> = tasks
        .iter()
        .map(|t| {
            t["id"]
                .as_str()
                .expect("task id")
                .split_once('.')
                .expect("task id DATASET.MODEL")
        })
        .collect();
    let sizes = |t: &serde_json::Value| -> Vec<f64> {
        t["sizes"]
            .as_array()
            .expect("task sizes")
            .iter()
            .map(|s| s.as_f64().unwrap())
            .collect()
    };
    let largest_size = tasks
        .iter()
        .flat_map(sizes)
        .fold(f64::NEG_INFINITY, f64::max);
    let at_largest: Vec<&str> = tasks
        .iter()
        .zip(&ids)
        .filter(|(t, _)| sizes(t).contains(&largest_size))
        .map(|(_, (d, _))| *d)
        .collect();
    let distinct = |v: Vec<&str>| {
        v.into_iter()
            .collect::<std::collections::BTreeSet<_>>()
            .len() as f64
    };
    Run {
        units: num(&m["units"], "units"),
        wall_seconds: num(&m["wall_seconds"], "wall_seconds"),
        threads: num(&m["threads"], "threads"),
        repeats: num(&m["suite"]["repeats"], "suite.repeats"),
        tasks: tasks.len() as f64,
        datasets: distinct(ids.iter().map(|(d, _)| *d).collect()),
        models: distinct(ids.iter().map(|(_, m)| *m).collect()),
        largest_size,
        tasks_at_largest: at_largest.len() as f64,
        datasets_at_largest: distinct(at_largest),
    }
}

/// Wall times, unit counts and the counts of tasks, datasets, base models and
/// repeats that README.md and docs/findings.md quote from the published runs
/// are the ones their `manifest.json` records (and, for the protocol study's
/// 24 method tasks, its `paired.csv`).
#[test]
fn run_figures_in_the_readme_and_findings_match_the_published_manifests() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let ou = run_facts(&manifest(root, "open-uci"));
    let ps = run_facts(&manifest(root, "protocol-study"));
    let ps_paired =
        std::fs::read_to_string(root.join("results/protocol-study/paired.csv")).unwrap();
    let ps_method_tasks = ps_paired
        .lines()
        .skip(1)
        .filter_map(|l| l.split(',').next())
        .collect::<std::collections::BTreeSet<_>>()
        .len() as f64;
    let ou_m = "results/open-uci/manifest.json";
    let ps_m = "results/protocol-study/manifest.json";
    let q = |doc, before, after, value, from: &str, what: &str| Quoted {
        doc,
        before,
        after,
        value,
        from: format!("{from} ({what})"),
    };
    let checks = [
        // README.md
        q(
            "README.md",
            "calibrators; ",
            " units",
            ou.units,
            ou_m,
            "units",
        ),
        q(
            "README.md",
            "× ",
            " repeats × ",
            ou.repeats,
            ou_m,
            "suite.repeats",
        ),
        q(
            "README.md",
            "`: ",
            " open UCI-derived tasks",
            ou.datasets,
            ou_m,
            "datasets of the task ids",
        ),
        q(
            "README.md",
            "tasks × ",
            " base models × calibration",
            ou.models,
            ou_m,
            "base models of the task ids",
        ),
        q(
            "README.md",
            "across the ",
            " tasks by calibration size",
            ou.tasks,
            ou_m,
            "tasks",
        ),
        q("README.md", "over ", " tasks (", ou.tasks, ou_m, "tasks"),
        q(
            "README.md",
            "tasks (",
            " datasets × logistic",
            ou.datasets,
            ou_m,
            "datasets of the task ids",
        ),
        q(
            "README.md",
            "(",
            " dataset × model pairs",
            ps.tasks,
            ps_m,
            "tasks",
        ),
        q(
            "README.md",
            "`, ",
            " s wall time on ",
            ps.wall_seconds,
            ps_m,
            "wall_seconds",
        ),
        q(
            "README.md",
            "wall time on ",
            " cores by its",
            ps.threads,
            ps_m,
            "threads",
        ),
        // docs/findings.md
        q(
            "docs/findings.md",
            "each run: ",
            " units for `open-uci`",
            ou.units,
            ou_m,
            "units",
        ),
        q(
            "docs/findings.md",
            "and ",
            "\nfor `protocol-study`",
            ps.units,
            ps_m,
            "units",
        ),
        q(
            "docs/findings.md",
            "machine: ",
            " s for `open-uci`",
            ou.wall_seconds,
            ou_m,
            "wall_seconds",
        ),
        q(
            "docs/findings.md",
            "and ",
            " s for `protocol-study`",
            ps.wall_seconds,
            ps_m,
            "wall_seconds",
        ),
        q(
            "docs/findings.md",
            "both on ",
            " threads",
            ou.threads,
            ou_m,
            "threads",
        ),
        q(
            "docs/findings.md",
            "both on ",
            " threads",
            ps.threads,
            ps_m,
            "threads",
        ),
        q(
            "docs/findings.md",
            "The ",
            " tasks are ",
            ou.tasks,
            ou_m,
            "tasks",
        ),
        q(
            "docs/findings.md",
            "tasks are ",
            " datasets × ",
            ou.datasets,
            ou_m,
            "datasets of the task ids",
        ),
        q(
            "docs/findings.md",
            "datasets × ",
            " base models",
            ou.models,
            ou_m,
            "base models of the task ids",
        ),
        q(
            "docs/findings.md",
            "(",
            " tasks at n = ",
            ou.tasks_at_largest,
            ou_m,
            "tasks at the largest size",
        ),
        q(
            "docs/findings.md",
            "tasks at n = ",
            ", `results/open-uci",
            ou.largest_size,
            ou_m,
            "largest size",
        ),
        q(
            "docs/findings.md",
            "with ",
            " datasets at n = ",
            ou.datasets_at_largest,
            ou_m,
            "datasets at the largest size",
        ),
        q(
            "docs/findings.md",
            "the suite's ",
            " repeats",
            ou.repeats,
            ou_m,
            "suite.repeats",
        ),
        q(
            "docs/findings.md",
            "(",
            " tasks), ",
            ps_method_tasks,
            "results/protocol-study/paired.csv",
            "tasks",
        ),
        q(
            "docs/findings.md",
            "tasks), ",
            " repeats",
            ps.repeats,
            ps_m,
            "suite.repeats",
        ),
        q(
            "docs/findings.md",
            "n = 500–",
            " rows",
            ps.largest_size,
            ps_m,
            "largest size",
        ),
        q(
            "docs/findings.md",
            "test, ",
            " datasets; ",
            ps.datasets,
            ps_m,
            "datasets of the task ids",
        ),
        q(
            "docs/findings.md",
            "datasets; ",
            " at n = ",
            ps.datasets_at_largest,
            ps_m,
            "datasets at the largest size",
        ),
    ];
    let mut wrong = Vec::new();
    for c in &checks {
        let doc = std::fs::read_to_string(root.join(c.doc)).unwrap();
        let found = quoted_before(&doc, c.before, c.after);
        if found.is_empty() {
            wrong.push(format!(
                "{}: no figure written as `{}NUMBER{}` (it should be {}, from {})",
                c.doc, c.before, c.after, c.value, c.from
            ));
        }
        for f in found.iter().filter(|f| !agrees(f, c.value)) {
            wrong.push(format!(
                "{} says `{}{f}{}`, but {} holds {}",
                c.doc, c.before, c.after, c.from, c.value
            ));
        }
    }
    assert!(wrong.is_empty(), "{}", wrong.join("\n"));
}

#[test]
fn quoted_figures_are_found_by_their_context() {
    let doc = "1,120 of the 2,948 comparisons; 8,040 units. 118.5 s wall time, 7 units";
    assert_eq!(quoted_before(doc, "; ", " units"), ["8040"]);
    assert_eq!(quoted_before(doc, "", " s wall"), ["118.5"]);
    assert!(agrees("118.5", 118.450486679));
    assert!(!agrees("118.4", 118.450486679));
    assert!(agrees("8040", 8040.0));
    assert!(!agrees("8041", 8040.0));
}

#[test]
fn numbers_are_read_as_written() {
    assert_eq!(
        numbers("| 8,040 | 96,480 | −0.5 ms | x2 | 1.87 ms |"),
        ["8040", "96480", "-0.5", "2", "1.87"]
    );
    assert_eq!(numbers("ratio 2.5, then 3"), ["2.5", "3"]);
}
