//! The HTML report in a real headless browser (Debian's chromium): the page
//! loads with no console errors and no network requests, every figure has a
//! non-zero rendered size, every contents link resolves to an element of the
//! page, and a screenshot is saved in the test's temporary folder. At 1280 px
//! width the paragraph naming the team default ends inside the first 800 px,
//! the method's name is set no smaller than its label, neither the page nor
//! any table is wider than the window, and the page text (code set aside)
//! holds no Markdown markup (`*word*`, `**word**`, `_word_`, backticks).
//!
//! Ignored by a plain `cargo test` (listed as ignored), because it needs a
//! browser: run it with `cargo test --locked --test browser -- --ignored`, or
//! everything with the documented `cargo test --locked -- --include-ignored`
//! (what `.ci/run` runs after installing chromium). When it runs, a missing
//! browser (none on PATH and no `PLUMBLINE_CHROMIUM`) is a failure, never a
//! silent pass.

use std::fs;
use std::path::{Path, PathBuf};
use std::process::Command as Proc;

use assert_cmd::Command;
use tempfile::TempDir;

mod common;
use common::copy_dir;

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn browser() -> Option<PathBuf> {
    if let Some(p) = std::env::var_os("PLUMBLINE_CHROMIUM") {
        return Some(PathBuf::from(p));
    }
    let path = std::env::var_os("PATH")?;
    for dir in std::env::split_paths(&path) {
        for name in ["chromium", "chromium-browser", "google-chrome"] {
            let p = dir.join(name);
            if p.is_file() {
                return Some(p);
            }
        }
    }
    None
}

fn chromium(exe: &Path, profile: &Path, extra: &[&str], url: &str) -> std::process::Output {
    let mut c = Proc::new(exe);
    c.args([
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-quic",
        "--no-first-run",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        "--allow-file-access-from-files",
        "--enable-logging=stderr",
        "--v=0",
    ]);
    c.arg(format!("--user-data-dir={}", profile.display()));
    c.args(extra).arg(url);
    c.output().expect("cannot start the browser")
}

const CHECK: &str = r##"<!DOCTYPE html>
<html><head><meta charset="utf-8"></head><body>
<iframe id="page" src="folder/index.html" style="width:1280px;height:3000px"></iframe>
<script>
document.getElementById('page').addEventListener('load', function () {
  var d = this.contentDocument, w = this.contentWindow, out = {};
  var svgs = d.querySelectorAll('figure svg');
  out.figures = svgs.length;
  out.zero = 0;
  svgs.forEach(function (s) { var r = s.getBoundingClientRect(); if (!(r.width > 0 && r.height > 0)) out.zero++; });
  var links = d.querySelectorAll('nav a[href^="#"]');
  out.links = links.length;
  out.broken = [];
  links.forEach(function (a) { var id = decodeURIComponent(a.getAttribute('href').slice(1)); if (!d.getElementById(id)) out.broken.push(id); });
  out.resources = w.performance.getEntriesByType('resource').length;
  out.firstH2 = (d.querySelector('h2') || {}).id || '';
  // The first screen at 1280 x 800: the paragraph naming the team default,
  // with the contents list grown to what a suite of some fifty tasks lists.
  var list = d.querySelector('nav ul');
  if (list) { var top = list.querySelectorAll(':scope > li'); for (var k = 0; k < 12; k++) top.forEach(function (li) { list.appendChild(li.cloneNode(true)); }); }
  var lead = null;
  d.querySelectorAll('p').forEach(function (p) { if (!lead && p.textContent.indexOf('team default') >= 0) lead = p; });
  out.leadBottom = lead ? lead.getBoundingClientRect().bottom + w.scrollY : -1;
  // The winning method's name against the label beside it.
  var name = lead ? lead.querySelector('code') : null, label = lead ? lead.querySelector('strong') : null;
  out.namePx = name ? parseFloat(w.getComputedStyle(name).fontSize) : 0;
  out.labelPx = label ? parseFloat(w.getComputedStyle(label).fontSize) : 0;
  // No sideways scrolling of the page.
  out.pageWidth = d.documentElement.scrollWidth;
  out.viewWidth = d.documentElement.clientWidth;
  out.wide = [];
  d.querySelectorAll('table').forEach(function (t) { var r = t.getBoundingClientRect(); if (r.right > out.viewWidth + 0.5) out.wide.push((t.caption || {}).textContent || 'table'); });
  // Markdown markup left in the text; code (ids such as log_loss) set aside
  // last, as it changes the page.
  d.querySelectorAll('code').forEach(function (c) { c.textContent = 'CODE'; });
  var text = d.body.innerText;
  out.markup = text.match(/\*\*[^*\s][^*]*\*\*|(^|[^\w*])\*[^*\s]([^*\n]*[^*\s])?\*(?![\w*])|(^|[^\w])_[^_\s]([^_\n]*[^_\s])?_(?!\w)|`/g) || [];
  var pre = document.createElement('pre');
  pre.textContent = 'RESULT ' + JSON.stringify(out) + ' END';
  document.body.appendChild(pre);
});
</script></body></html>
"##;

#[test]
#[ignore = "needs chromium (Debian's `chromium`, or PLUMBLINE_CHROMIUM=path); run with `cargo test --locked --test browser -- --ignored`, or all tests with `cargo test --locked -- --include-ignored` as .ci/run does"]
fn html_report_renders_in_a_headless_browser() {
    let exe = browser().unwrap_or_else(|| {
        panic!(
            "no chromium, chromium-browser or google-chrome on PATH and PLUMBLINE_CHROMIUM unset \
             (install Debian's `chromium`, or set PLUMBLINE_CHROMIUM to the browser)"
        )
    });
    let tmp = TempDir::new().unwrap();
    let folder = tmp.path().join("folder");
    copy_dir(&root().join("tests/fixtures/report/folder"), &folder);
    Command::cargo_bin("plumbline")
        .unwrap()
        .args(["report", folder.to_str().unwrap()])
        .assert()
        .success();
    let figures_on_disk = fs::read_dir(folder.join("figures")).unwrap().count();
    let profile = tmp.path().join("profile");
    // 1. Load the page itself, take a screenshot, collect console messages.
    let index = folder.join("index.html");
    let shot = tmp.path().join("screenshot.png");
    let out = chromium(
        &exe,
        &profile,
        &[
            &format!("--screenshot={}", shot.display()),
            "--window-size=1280,2400",
            "--hide-scrollbars",
        ],
        &format!("file://{}", index.display()),
    );
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(
        shot.is_file() && fs::metadata(&shot).unwrap().len() > 10_000,
        "no screenshot; browser said:\n{stderr}"
    );
    let console: Vec<&str> = stderr.lines().filter(|l| l.contains("CONSOLE")).collect();
    assert!(
        console.is_empty(),
        "console messages:\n{}",
        console.join("\n")
    );
    // 2. Measure the page from a same-folder wrapper.
    let check = tmp.path().join("check.html");
    fs::write(&check, CHECK).unwrap();
    let out = chromium(
        &exe,
        &profile,
        &["--virtual-time-budget=10000", "--dump-dom"],
        &format!("file://{}", check.display()),
    );
    let dom = String::from_utf8_lossy(&out.stdout);
    // The last occurrence: the script's own source holds the marker too.
    let json = (dom.matches("RESULT ").count() > 1)
        .then(|| dom.rsplit("RESULT ").next())
        .flatten()
        .and_then(|r| r.split(" END").next())
        .unwrap_or_else(|| {
            panic!(
                "the check page gave no result; browser said:\n{}",
                String::from_utf8_lossy(&out.stderr)
            )
        });
    let r: serde_json::Value = serde_json::from_str(json).unwrap();
    eprintln!("browser check: {r}; screenshot {}", shot.display());
    assert_eq!(
        r["figures"].as_u64().unwrap() as usize,
        figures_on_disk,
        "{r}"
    );
    assert_eq!(r["zero"], 0, "figures with no rendered size: {r}");
    assert!(r["links"].as_u64().unwrap() >= 8, "{r}");
    assert_eq!(r["broken"].as_array().unwrap().len(), 0, "{r}");
    assert_eq!(r["resources"], 0, "the page loaded outside resources: {r}");
    assert_eq!(r["firstH2"], "decision", "{r}");
    let lead = r["leadBottom"].as_f64().unwrap();
    assert!(
        (0.0..=800.0).contains(&lead),
        "the decision ends at {lead} px, below the first 800 px at 1280 px width: {r}"
    );
    assert!(
        r["namePx"].as_f64().unwrap() >= r["labelPx"].as_f64().unwrap()
            && r["labelPx"].as_f64().unwrap() > 0.0,
        "the team default's name is set smaller than its label: {r}"
    );
    assert!(
        r["pageWidth"].as_f64().unwrap() <= r["viewWidth"].as_f64().unwrap(),
        "the page scrolls sideways at 1280 px: {r}"
    );
    assert_eq!(
        r["wide"].as_array().unwrap().len(),
        0,
        "tables wider than the page: {r}"
    );
    assert_eq!(
        r["markup"].as_array().unwrap().len(),
        0,
        "Markdown markup in the page text: {r}"
    );
}
