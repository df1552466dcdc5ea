//! Every key a suite may hold is documented in `docs/suite-format.md`.
//!
//! The keys come from the parser itself, not from a list kept beside it: for
//! each section the test writes a small suite with an unknown key
//! `zz_probe` in that section and reads the keys the parser's error says it
//! expected (serde's "expected one of `a`, `b`" list, through the suite's
//! own error). Method and model kinds are found the same way, from the error
//! for an unknown kind. A key, kind or section the document does not name in
//! backticks fails the test.

use std::fs;
use std::path::Path;

use plumbline::suite;

const TOP: &str = r#"name = "keys"
seed = 1
repeats = 2
sizes = [50]
reference = "platt"
metrics = ["log_loss"]
primary_metric = "log_loss"
"#;

const PLATT: &str = "\n[[method]]\nid = \"platt\"\nkind = \"platt\"\n";

/// The parser's error for `text` (the suite must be refused).
fn error_of(text: &str) -> String {
    match suite::parse(text, Path::new("keys.toml"), String::new()) {
        Ok(_) => panic!("the suite was accepted:\n{text}"),
        Err(e) => e.to_string(),
    }
}

/// The backticked names after "expected" in a serde message; empty for
/// "there are no fields".
fn expected_names(msg: &str) -> Vec<String> {
    if msg.contains("there are no fields") {
        return Vec::new();
    }
    let at = msg
        .find("expected")
        .unwrap_or_else(|| panic!("no list of expected names in: {msg}"));
    msg[at..]
        .split('`')
        .skip(1)
        .step_by(2)
        .map(String::from)
        .collect()
}

/// The keys the parser accepts where `section` (a table header and its
/// required lines) is followed by the unknown key.
fn keys_of(prefix: &str, section: &str) -> Vec<String> {
    let text = format!("{prefix}\n{section}\nzz_probe = 1\n");
    let msg = error_of(&text);
    assert!(
        msg.contains("zz_probe"),
        "the probe was not what the parser refused in\n{text}\n→ {msg}"
    );
    expected_names(&msg)
}

/// The kinds the parser knows for a table whose `kind` is `zz`.
fn kinds_of(prefix: &str, section: &str) -> Vec<String> {
    let text = format!("{prefix}\n{section}\nkind = \"zz\"\n");
    let msg = error_of(&text);
    assert!(msg.contains("`zz`"), "{text}\n→ {msg}");
    let names = expected_names(&msg);
    assert!(!names.is_empty(), "{msg}");
    names
}

#[test]
fn every_suite_key_and_kind_is_documented() {
    let doc = fs::read_to_string("docs/suite-format.md").unwrap();
    let mut missing = Vec::new();
    let mut check = |what: &str, names: &[String]| {
        for n in names {
            // A key in backticks; a section also as its table header.
            let named = doc.contains(&format!("`{n}`"))
                || doc.contains(&format!("`[{n}]`"))
                || doc.contains(&format!("`[[{n}]]`"));
            if !named {
                missing.push(format!("{what}: `{n}`"));
            }
        }
    };
    // The top level: its error lists the section names too.
    let top = {
        let msg = error_of(&format!("zz_probe = 1\n{TOP}"));
        expected_names(&msg)
    };
    assert!(top.iter().any(|k| k == "metric_settings"), "{top:?}");
    check("top level", &top);
    for section in [
        "[test_set]",
        "[metric_settings]",
        "[reliability]",
        "[decision]",
        "[protocol_study]",
    ] {
        let keys = keys_of(TOP, section);
        assert!(!keys.is_empty(), "{section}");
        check(section, &keys);
    }
    // Methods: every kind's parameter keys.
    let methods = kinds_of(TOP, "[[method]]\nid = \"m\"");
    assert!(methods.iter().any(|k| k == "isotonic"), "{methods:?}");
    check("method kind", &methods);
    for kind in &methods {
        let keys = keys_of(TOP, &format!("[[method]]\nid = \"m\"\nkind = \"{kind}\""));
        check(&format!("[[method]] kind {kind}"), &keys);
    }
    // Tasks from a score file and from an open dataset, task grids.
    let with_method = format!("{TOP}{PLATT}");
    for (what, section) in [
        (
            "[[task]] from a score file",
            "[[task]]\nid = \"t\"\nscores = \"t.csv\"",
        ),
        (
            "[[task]] from an open dataset",
            "[[task]]\nid = \"t\"\ndata = \"magic\"",
        ),
        ("[[task_grid]]", "[[task_grid]]\ndata = [\"magic\"]"),
    ] {
        let keys = keys_of(&with_method, section);
        assert!(
            keys.iter().any(|k| k == "id" || k == "data"),
            "{what}: {keys:?}"
        );
        check(what, &keys);
    }
    // Base models: every kind's settings.
    let task = format!("{with_method}\n[[task]]\nid = \"t\"\ndata = \"magic\"\n");
    let models = kinds_of(&task, "[[model]]\nid = \"x\"");
    assert!(models.iter().any(|k| k == "logistic"), "{models:?}");
    check("model kind", &models);
    for kind in &models {
        let keys = keys_of(&task, &format!("[[model]]\nid = \"x\"\nkind = \"{kind}\""));
        check(&format!("[[model]] kind {kind}"), &keys);
    }
    assert!(
        missing.is_empty(),
        "keys the parser accepts but docs/suite-format.md does not name:\n{}",
        missing.join("\n")
    );
}

/// The probe itself can fail: a key the document does not name is found.
#[test]
fn an_undocumented_key_would_be_found() {
    let keys = keys_of(TOP, "[decision]");
    assert!(keys.iter().any(|k| k == "margin"), "{keys:?}");
    assert_eq!(
        expected_names("unknown field `x`, expected `fraction` or `rows`"),
        ["fraction", "rows"]
    );
    assert!(expected_names("unknown field `x`, there are no fields").is_empty());
}
