//! Reports: format the plain structs of [`crate::analysis`] — never compute
//! statistics here. One table model ([`Table`]) serves the terminal (comfy-table)
//! and Markdown; each format only supplies how cells, rows and dividers look.

pub mod csvout;
pub mod document;
pub mod evidence;
pub mod fallback;
pub mod figures;
pub mod html;
pub mod summary;

use crate::analysis::Analysis;
use crate::stats::verdict::Verdict;

/// Escape text for HTML and SVG markup (text and attribute values).
pub fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// Every published file of a results folder except `units.csv.gz`, `timings.csv`
/// and `manifest.json`: (path inside the folder, bytes). The same function
/// serves `plumbline run` and `plumbline report`, so both publish the same files.
pub fn publish(a: &Analysis, ctx: &summary::ReportContext) -> Vec<(String, Vec<u8>)> {
    let s = &ctx.settings;
    let mut files = vec![
        ("paired.csv".to_string(), csvout::paired_csv(a).into_bytes()),
        (
            "summary.md".to_string(),
            summary::summary_md(a, ctx).into_bytes(),
        ),
        (
            "thresholds.csv".to_string(),
            csvout::thresholds_csv(a).into_bytes(),
        ),
    ];
    let (points, hist, terms) = crate::metrics::reliability::to_csv(&ctx.curves);
    files.push(("reliability.csv".to_string(), points.into_bytes()));
    files.push(("reliability_hist.csv".to_string(), hist.into_bytes()));
    files.push(("reliability_terms.csv".to_string(), terms.into_bytes()));
    let mut tex = String::from("% plumbline tables (requires \\usepackage{booktabs})\n");
    for t in summary::task_tables(a, s, &s.primary_metric, false) {
        tex.push_str(&t.to_latex());
        tex.push('\n');
    }
    files.push(("tables.tex".to_string(), tex.into_bytes()));
    let mut figs: Vec<(String, String)> = Vec::new();
    for d in &a.decisions {
        if let Some(svg) = figures::rank_figure(a, &d.metric) {
            figs.push((format!("figures/ranks--{}.svg", d.metric), svg));
        }
        if let Some(svg) = figures::threshold_figure(a, &d.metric) {
            figs.push((format!("figures/thresholds--{}.svg", d.metric), svg));
        }
    }
    for task in &a.tasks {
        if let Some(svg) = figures::learning_curves(a, task, &s.primary_metric, &s.reference) {
            figs.push((figures::figure_name(task, &s.primary_metric), svg));
        }
        if let Some(svg) = figures::reliability_figure(a, task, &ctx.curves, s.confidence) {
            figs.push((figures::reliability_name(task), svg));
        }
    }
    files.push((
        "index.html".to_string(),
        html::index(a, ctx, &figs).into_bytes(),
    ));
    files.extend(figs.into_iter().map(|(n, b)| (n, b.into_bytes())));
    files
}

/// A rectangular table with a title; cells may hold several lines.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Table {
    pub title: String,
    pub header: Vec<String>,
    pub rows: Vec<Vec<String>>,
    /// Notes printed under the table.
    pub notes: Vec<String>,
}

impl Table {
    /// Terminal text laid out for `term`: the one table layout of every
    /// command ([`document::table_terminal`]).
    pub fn to_terminal(&self, term: &document::Term) -> String {
        document::table_terminal(self, term)
    }

    /// GitHub-flavoured Markdown; line breaks inside cells become `<br>`.
    pub fn to_markdown(&self) -> String {
        let esc = |c: &str| c.replace('|', "\\|").replace('\n', "<br>");
        let mut s = String::new();
        if !self.title.is_empty() {
            s.push_str(&format!("**{}**\n\n", self.title));
        }
        s.push_str(&format!(
            "| {} |\n",
            self.header
                .iter()
                .map(|h| esc(h))
                .collect::<Vec<_>>()
                .join(" | ")
        ));
        s.push_str(&format!(
            "|{}|\n",
            self.header
                .iter()
                .enumerate()
                .map(|(i, _)| if i == 0 { " --- " } else { " ---: " })
                .collect::<Vec<_>>()
                .join("|")
        ));
        for r in &self.rows {
            s.push_str(&format!(
                "| {} |\n",
                r.iter().map(|c| esc(c)).collect::<Vec<_>>().join(" | ")
            ));
        }
        if !self.notes.is_empty() {
            s.push('\n');
            for n in &self.notes {
                s.push_str(&format!("{n}\n"));
            }
        }
        s
    }
}

impl Table {
    /// A LaTeX `tabular` with booktabs rules; line breaks inside cells become `; `.
    pub fn to_latex(&self) -> String {
        let esc = |c: &str| {
            c.replace('\\', "\\textbackslash{}")
                .replace('&', "\\&")
                .replace('%', "\\%")
                .replace('_', "\\_")
                .replace('#', "\\#")
                .replace('−', "$-$")
                .replace('✓', Verdict::Better.latex())
                .replace('✗', Verdict::Worse.latex())
                .replace('≈', "$\\approx$")
                .replace('`', "")
                .replace('↓', "$\\downarrow$")
                .replace('↑', "$\\uparrow$")
                .replace('\n', "; ")
        };
        let mut s = String::new();
        s.push_str(&format!("% {}\n", self.title));
        s.push_str(&format!(
            "\\begin{{tabular}}{{l{}}}\n\\toprule\n",
            "r".repeat(self.header.len().saturating_sub(1))
        ));
        s.push_str(&format!(
            "{} \\\\\n\\midrule\n",
            self.header
                .iter()
                .map(|h| esc(h))
                .collect::<Vec<_>>()
                .join(" & ")
        ));
        for r in &self.rows {
            s.push_str(&format!(
                "{} \\\\\n",
                r.iter().map(|c| esc(c)).collect::<Vec<_>>().join(" & ")
            ));
        }
        s.push_str("\\bottomrule\n\\end{tabular}\n");
        s
    }
}

/// A loss value for display: four decimals (enough for log loss and Brier).
pub fn fmt_value(v: f64) -> String {
    if v.is_nan() {
        "–".into()
    } else if v.abs() >= 100.0 {
        format!("{v:.1}")
    } else {
        format!("{v:.4}")
    }
}

/// A signed difference with three significant digits (at least 4 decimals).
pub fn fmt_diff(v: f64) -> String {
    if v.is_nan() {
        return "–".into();
    }
    if v == 0.0 {
        return "0".into();
    }
    let mag = v.abs().log10().floor() as i32;
    let decimals = (2 - mag).clamp(4, 8) as usize;
    let s = format!("{:+.*}", decimals, v);
    s.replace('-', "−")
}
