//! `index.html`: the summary as one self-contained page (tables plus the
//! figures, referenced from `figures/`), for people who would rather look.

use super::summary::{task_tables, ReportContext};
use crate::analysis::Analysis;

fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
}

pub fn index(a: &Analysis, ctx: &ReportContext, figures: &[String]) -> String {
    let s = &ctx.settings;
    let mut h = String::new();
    h.push_str("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n");
    h.push_str(&format!(
        "<title>plumbline: {}</title>\n",
        esc(&ctx.suite_name)
    ));
    h.push_str(
        "<style>body{font-family:sans-serif;max-width:1100px;margin:2em auto;padding:0 1em;color:#222}\
table{border-collapse:collapse;margin:0.5em 0 0.2em}th,td{border:1px solid #ccc;padding:4px 8px;font-size:13px}\
td{text-align:right;font-variant-numeric:tabular-nums}thead th{background:#f3f3f3}.note{color:#555;font-size:12px}\
.caution{background:#fff4e5;border-left:4px solid #e69f00;padding:0.5em 1em}</style>\n</head>\n<body>\n",
    );
    h.push_str(&format!(
        "<h1>plumbline results: {}</h1>\n",
        esc(&ctx.suite_name)
    ));
    h.push_str(&format!(
        "<p>Suite <code>{}</code> (SHA-256 <code>{}</code>). Reference <code>{}</code>, primary metric <code>{}</code>, {} intervals at {}%.</p>\n",
        esc(&ctx.suite_file),
        esc(&ctx.suite_sha256),
        esc(&s.reference),
        esc(&s.primary_metric),
        esc(&s.interval),
        (s.confidence * 100.0).round()
    ));
    if a.tasks.len() < 5 {
        h.push_str(&format!(
            "<p class=\"caution\">These results rest on {} task(s): too few to choose a default calibrator.</p>\n",
            a.tasks.len()
        ));
    }
    for (task, t) in a
        .tasks
        .iter()
        .zip(task_tables(a, s, &s.primary_metric, false))
    {
        h.push_str(&t.to_html());
        if let Some(f) = figures
            .iter()
            .find(|f| f.starts_with(&format!("figures/{task}--")))
        {
            h.push_str(&format!(
                "<p><img src=\"{}\" alt=\"difference to {} by size for {}\"></p>\n",
                esc(f),
                esc(&s.reference),
                esc(task)
            ));
        }
    }
    h.push_str("</body>\n</html>\n");
    h
}
