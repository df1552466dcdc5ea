//! Reports: format the plain structs of [`crate::analysis`] — never compute
//! statistics here. One table model ([`Table`]) serves the terminal (comfy-table)
//! and Markdown; each format only supplies how cells, rows and dividers look.

pub mod csvout;
pub mod summary;

use comfy_table::{presets::UTF8_FULL_CONDENSED, Cell, CellAlignment, ContentArrangement};

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
    /// Terminal rendering with comfy-table.
    pub fn to_terminal(&self, width: Option<u16>) -> String {
        let mut t = comfy_table::Table::new();
        t.load_style(UTF8_FULL_CONDENSED);
        t.set_content_arrangement(ContentArrangement::Dynamic);
        if let Some(w) = width {
            t.set_width(w);
        }
        t.set_header(self.header.iter().map(Cell::new));
        for r in &self.rows {
            t.add_row(r.iter().enumerate().map(|(i, c)| {
                let cell = Cell::new(c);
                if i == 0 {
                    cell
                } else {
                    cell.set_alignment(CellAlignment::Right)
                }
            }));
        }
        let mut s = format!("{}\n{t}\n", self.title);
        for n in &self.notes {
            s.push_str(&format!("  {n}\n"));
        }
        s
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
