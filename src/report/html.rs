//! `index.html`: the summary document as one self-contained page — inline SVG
//! figures and CSS, no scripts, no network — with a collapsed contents list, the
//! decision on top, a section per dataset with its base models, and stable
//! anchors (`#decision`, `#ranks`, `#thresholds`, `#dataset-<id>`,
//! `#task-<id>`) a wiki page can link to. Prints cleanly.

use super::document::{inline_html, Block};
use super::summary::{document, Detail, ReportContext};
use super::Table;
use crate::analysis::Analysis;

use super::esc;

const STYLE: &str = "body{font-family:system-ui,-apple-system,'Segoe UI',sans-serif;max-width:1180px;margin:0 auto;padding:0 1.2em 3em;color:#1d1d1d;line-height:1.45}\
header{border-bottom:3px solid #0072B2;margin-bottom:1em}\
nav{background:#f4f7fa;border:1px solid #d9e2ea;padding:0.4em 1.2em;margin:1em 0;font-size:14px}\
nav summary{cursor:pointer;font-weight:bold}nav ul{margin:0.2em 0;padding-left:1.2em}nav li{margin:0.1em 0}\
p.lead{font-size:1.15em}p.lead code{font-size:1em;font-weight:bold}strong code{font-size:1em}\
h2{border-bottom:1px solid #ccc;padding-bottom:0.2em;margin-top:2em}\
table{border-collapse:collapse;margin:0.6em 0 0.3em}th,td{border:1px solid #d0d0d0;padding:3px 6px;font-size:13px;vertical-align:top}\
td{text-align:right;font-variant-numeric:tabular-nums;font-size:12px}thead th{background:#eef2f5;font-weight:600}tbody th{text-align:left;font-weight:normal;white-space:nowrap}\
caption{text-align:left;font-weight:bold;padding:0.3em 0}\
.note{color:#555;font-size:12px;margin:0.2em 0 1em}\
.caution{background:#fff6e8;border-left:5px solid #E69F00;padding:0.6em 1em;margin:1.2em 0}\
figure{margin:0.8em 0;overflow-x:auto}figure svg{max-width:100%;height:auto}figcaption{font-size:12px;color:#555}\
.scroll{overflow-x:auto}code{font-family:ui-monospace,'SFMono-Regular',Menlo,Consolas,'Liberation Mono',monospace;font-size:0.92em}\
@media print{nav{display:none}body{max-width:none}h2,h3,h4{break-after:avoid}figure,table{break-inside:avoid}}";

fn table_html(t: &Table) -> String {
    let mut s = String::from("<div class=\"scroll\"><table>\n");
    if !t.title.is_empty() {
        s.push_str(&format!("<caption>{}</caption>\n", inline_html(&t.title)));
    }
    s.push_str("<thead><tr>");
    for h in &t.header {
        s.push_str(&format!("<th>{}</th>", inline_html(h)));
    }
    s.push_str("</tr></thead>\n<tbody>\n");
    for r in &t.rows {
        s.push_str("<tr>");
        for (i, c) in r.iter().enumerate() {
            // Numbers and intervals never break; a cell may break between
            // them (`\u{a0}` glues an interval and its verdict mark).
            let cell = inline_html(&super::document::glue_intervals(c))
                .replace('\u{a0}', "&nbsp;")
                .replace('\n', "<br>");
            if i == 0 {
                s.push_str(&format!("<th>{cell}</th>"));
            } else {
                s.push_str(&format!("<td>{cell}</td>"));
            }
        }
        s.push_str("</tr>\n");
    }
    s.push_str("</tbody>\n</table></div>\n");
    for n in &t.notes {
        s.push_str(&format!("<p class=\"note\">{}</p>\n", inline_html(n)));
    }
    s
}

/// Links `[text](target)` in a paragraph become anchors to the page's own
/// sections when the target is a figure shown on the page.
fn para_html(t: &str, figures: &[(String, String)]) -> String {
    let mut out = String::new();
    let mut rest = t;
    while let Some(i) = rest.find('[') {
        let Some(j) = rest[i..].find("](").map(|j| i + j) else {
            break;
        };
        let Some(k) = rest[j..].find(')').map(|k| j + k) else {
            break;
        };
        out.push_str(&inline_html(&rest[..i]));
        let text = &rest[i + 1..j];
        let target = &rest[j + 2..k];
        let href = if figures.iter().any(|(n, _)| n == target) {
            format!("#{}", fig_id(target))
        } else {
            target.to_string()
        };
        out.push_str(&format!(
            "<a href=\"{}\">{}</a>",
            esc(&href),
            inline_html(text)
        ));
        rest = &rest[k + 1..];
    }
    out.push_str(&inline_html(rest));
    out
}

fn fig_id(path: &str) -> String {
    format!(
        "fig-{}",
        super::document::anchor(path.trim_start_matches("figures/").trim_end_matches(".svg"))
    )
}

pub fn index(a: &Analysis, ctx: &ReportContext, figures: &[(String, String)]) -> String {
    let blocks = document(a, ctx, Detail::Full);
    let mut h = String::new();
    h.push_str("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n");
    h.push_str(&format!(
        "<title>plumbline: {}</title>\n<style>{STYLE}</style>\n</head>\n<body>\n",
        esc(&ctx.suite_name)
    ));
    // Contents: the level-2 sections, and datasets with their tasks.
    // Collapsed, so the decision opens the first screen however many tasks
    // the suite holds.
    let mut nav =
        String::from("<nav aria-label=\"contents\"><details><summary>Contents</summary>\n<ul>\n");
    let mut open_ds = false;
    let mut open_tasks = false;
    for b in &blocks {
        if let Block::Heading(level, text, id) = b {
            match level {
                2 => {
                    if open_tasks {
                        nav.push_str("</ul></li>\n");
                        open_tasks = false;
                    }
                    if open_ds {
                        nav.push_str("</ul></li>\n");
                        open_ds = false;
                    }
                    nav.push_str(&format!(
                        "<li><a href=\"#{}\">{}</a>",
                        esc(id),
                        inline_html(text)
                    ));
                    if id == "tasks" {
                        nav.push_str("\n<ul>\n");
                        open_ds = true;
                    } else {
                        nav.push_str("</li>\n");
                    }
                }
                3 if open_ds => {
                    if open_tasks {
                        nav.push_str("</ul></li>\n");
                    }
                    nav.push_str(&format!(
                        "<li><a href=\"#{}\">{}</a>: ",
                        esc(id),
                        inline_html(text)
                    ));
                    nav.push_str("<ul style=\"display:inline;padding:0\">");
                    open_tasks = true;
                }
                4 if open_tasks => {
                    let short = text
                        .trim_start_matches("Task `")
                        .trim_end_matches('`')
                        .to_string();
                    let short = crate::analysis::task_parts(&short)
                        .1
                        .map(str::to_string)
                        .unwrap_or(short);
                    nav.push_str(&format!(
                        "<li style=\"display:inline;margin-right:0.6em\"><a href=\"#{}\">{}</a></li>",
                        esc(id),
                        esc(&short)
                    ));
                }
                _ => {}
            }
        }
    }
    if open_tasks {
        nav.push_str("</ul></li>\n");
    }
    if open_ds {
        nav.push_str("</ul></li>\n");
    }
    nav.push_str("</ul>\n</details></nav>\n");
    let mut first_heading = true;
    for b in &blocks {
        match b {
            Block::Heading(level, text, id) => {
                let tag = format!("h{level}");
                if *level == 1 {
                    h.push_str(&format!(
                        "<header><{tag} id=\"{}\">{}</{tag}></header>\n",
                        esc(id),
                        inline_html(text)
                    ));
                } else {
                    if first_heading {
                        h.push_str(&nav);
                        first_heading = false;
                    }
                    h.push_str(&format!(
                        "<{tag} id=\"{}\">{}</{tag}>\n",
                        esc(id),
                        inline_html(text)
                    ));
                }
            }
            // The sentence naming a metric's team default stands out.
            Block::Para(t) if t.starts_with("On `") && t.contains("**team default") => h.push_str(
                &format!("<p class=\"lead\">{}</p>\n", para_html(t, figures)),
            ),
            Block::Para(t) => h.push_str(&format!("<p>{}</p>\n", para_html(t, figures))),
            Block::List(items) => {
                h.push_str("<ul>\n");
                for i in items {
                    h.push_str(&format!("<li>{}</li>\n", inline_html(i)));
                }
                h.push_str("</ul>\n");
            }
            Block::Table(t) => h.push_str(&table_html(t)),
            Block::Figure(path, alt) => {
                if let Some((_, svg)) = figures.iter().find(|(n, _)| n == path) {
                    h.push_str(&format!(
                        "<figure id=\"{}\">\n{}<figcaption>{} (<a href=\"{}\">{}</a>)</figcaption>\n</figure>\n",
                        fig_id(path),
                        svg,
                        esc(alt),
                        esc(path),
                        esc(path)
                    ));
                }
            }
            Block::Caution(t) => h.push_str(&format!(
                "<aside class=\"caution\" id=\"caution\"><strong>Caution.</strong> {}</aside>\n",
                inline_html(t)
            )),
        }
    }
    h.push_str("</body>\n</html>\n");
    h
}
