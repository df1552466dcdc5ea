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
    let primary = s.primary();
    for t in primary
        .map(|m| summary::task_tables(a, s, m, false))
        .unwrap_or_default()
    {
        tex.push_str(&t.to_latex());
        tex.push('\n');
    }
    files.push(("tables.tex".to_string(), tex.into_bytes()));
    let mut figs: Vec<(String, String)> = Vec::new();
    for d in &a.decisions {
        if let Some(svg) = figures::rank_figure(a, d.metric) {
            figs.push((format!("figures/ranks--{}.svg", d.metric), svg));
        }
        if let Some(svg) = figures::threshold_figure(a, d.metric) {
            figs.push((format!("figures/thresholds--{}.svg", d.metric), svg));
        }
    }
    for task in &a.tasks {
        if let Some(m) = primary {
            if let Some(svg) = figures::learning_curves(a, task, m, &s.reference) {
                figs.push((figures::figure_name(task, m), svg));
            }
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

/// The number format of one per-task table (one task × metric): every
/// number in it — means, differences and interval ends — with the same
/// number of decimals, so its columns line up (rule in `docs/report.md`,
/// "Numbers in the per-task tables").
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Decimals(pub usize);

impl Decimals {
    /// Fewest decimals a table gets.
    pub const MIN: usize = 1;
    /// Most decimals a table gets.
    pub const MAX: usize = 5;
    /// A table without a finite, positive interval half-width.
    pub const DEFAULT: Decimals = Decimals(4);

    /// The decimals of a table from the half-widths (hi − lo)/2 of its
    /// intervals: the fewest, between [`Decimals::MIN`] and
    /// [`Decimals::MAX`], at which the narrowest interval's half-width h
    /// shows two significant digits, i.e. h ≥ 10^(1 − d) (0.0213 → 3,
    /// 0.00286 → 4, 0.5 → 2), so that every interval of the table shows its
    /// width to at least two digits (up to the cap). Half-widths that are
    /// not finite or not positive are left out; without one,
    /// [`Decimals::DEFAULT`].
    pub fn for_half_widths(half_widths: impl IntoIterator<Item = f64>) -> Decimals {
        let h = half_widths
            .into_iter()
            .filter(|h| h.is_finite() && *h > 0.0)
            .fold(f64::INFINITY, f64::min);
        if !h.is_finite() {
            return Decimals::DEFAULT;
        }
        // 10^(1 − d) for d = MIN..=MAX, written out so that no power is
        // computed in floating point.
        const FLOORS: [f64; 5] = [1.0, 0.1, 0.01, 0.001, 0.0001];
        let d = (Decimals::MIN..=Decimals::MAX)
            .find(|&d| h >= FLOORS[d - 1])
            .unwrap_or(Decimals::MAX);
        Decimals(d)
    }

    /// A value (a mean), unsigned; `–` when not a number.
    pub fn value(self, v: f64) -> String {
        if v.is_nan() {
            "–".into()
        } else {
            // −0 prints as 0.
            format!("{:.*}", self.0, v + 0.0).replace('-', "−")
        }
    }

    /// A signed difference: `+` or `−` before every value that is not
    /// exactly zero, also when it rounds to zero (`−0.000`); exactly zero
    /// prints unsigned (`0.000`); `–` when not a number.
    pub fn diff(self, v: f64) -> String {
        if v.is_nan() {
            "–".into()
        } else if v == 0.0 {
            format!("{:.*}", self.0, 0.0)
        } else {
            let sign = if v < 0.0 { '−' } else { '+' };
            format!("{sign}{:.*}", self.0, v.abs())
        }
    }
}

#[cfg(test)]
mod tests {
    use super::Decimals;

    /// Hand-computed: the narrowest interval decides, with two significant
    /// digits of its half-width at the fewest decimals d such that
    /// h ≥ 10^(1 − d).
    #[test]
    fn decimals_follow_the_narrowest_half_width() {
        let d = |h: &[f64]| Decimals::for_half_widths(h.iter().copied()).0;
        // 0.0213 ≥ 0.01 = 10^(1 − 3) but < 0.1: 3 decimals ("0.021").
        assert_eq!(d(&[0.0213]), 3);
        // The narrowest, 0.00286 ≥ 0.001: 4 decimals ("0.0029"), the wider
        // ones shown with as many.
        assert_eq!(d(&[0.24, 0.0213, 0.00286]), 4);
        // 0.5 ≥ 0.1: 2 ("0.50"); 3.7 ≥ 1: the floor of 1 ("3.7"); 40: still 1.
        assert_eq!(d(&[0.5, 0.9]), 2);
        assert_eq!(d(&[3.7]), 1);
        assert_eq!(d(&[40.0]), 1);
        // Exactly 10^(1 − d) takes d: 0.01 → 3 ("0.010").
        assert_eq!(d(&[0.01]), 3);
        // Tiny half-widths stop at the cap of 5 ("0.00000" at worst).
        assert_eq!(d(&[0.00002, 0.3]), 5);
        assert_eq!(d(&[1e-12]), 5);
        // NaN and zero widths (a method identical to the reference) are
        // left out; nothing left gives the default 4.
        assert_eq!(d(&[f64::NAN, 0.0, 0.03]), 3);
        assert_eq!(d(&[f64::NAN]), 4);
        assert_eq!(d(&[0.0, 0.0]), 4);
        assert_eq!(d(&[]), 4);
    }

    #[test]
    fn values_and_differences_at_fixed_decimals() {
        let d3 = Decimals(3);
        assert_eq!(d3.value(0.57512), "0.575");
        assert_eq!(d3.value(0.0), "0.000");
        assert_eq!(d3.value(-0.0), "0.000");
        assert_eq!(d3.value(-0.25), "−0.250");
        assert_eq!(d3.value(f64::NAN), "–");
        assert_eq!(d3.diff(0.0213), "+0.021");
        assert_eq!(d3.diff(-0.00849), "−0.008");
        // Rounds to zero: the sign says which side it was on.
        assert_eq!(d3.diff(0.000286), "+0.000");
        assert_eq!(d3.diff(-0.0004), "−0.000");
        // Exactly zero: no sign.
        assert_eq!(d3.diff(0.0), "0.000");
        assert_eq!(d3.diff(-0.0), "0.000");
        assert_eq!(d3.diff(f64::NAN), "–");
        assert_eq!(Decimals(1).diff(12.345), "+12.3");
        assert_eq!(Decimals(5).diff(-0.000286), "−0.00029");
    }
}
