//! One document model for every report format. The summary is built once as
//! a list of [`Block`]s — decision first, then the caution and the legend,
//! ranks, thresholds, reliability diagrams and per-task detail — and rendered
//! as Markdown (`summary.md`), HTML (`index.html`) or terminal text, so the
//! formats cannot drift apart. Inline text uses two Markdown marks only:
//! `` `code` `` and `**bold**`.

use super::Table;

/// A piece of a report.
#[derive(Debug, Clone, PartialEq)]
pub enum Block {
    /// Heading level (1–4), text, anchor id.
    Heading(u8, String, String),
    Para(String),
    List(Vec<String>),
    Table(Table),
    /// A figure of the results folder: path, alternative text.
    Figure(String, String),
    /// A standing caution (set apart in every format).
    Caution(String),
}

use crate::stats::verdict::{marks_slashed, Verdict};

/// The legend, worded once: the four verdicts of [`crate::stats::verdict`],
/// with the equivalence margin δ in force.
pub fn legend(margin: &str) -> Vec<String> {
    let [b, e, u, w] = Verdict::ALL.map(|v| (v.mark(), v.words()));
    vec![
        format!("{} **{}**: the paired interval lies entirely on the better side of zero (lower loss, or higher AUC) and reaches beyond the margin δ.", b.0, b.1),
        format!("{} **{}**: the whole interval lies inside [−δ, +δ] — the difference is shown to be smaller than the margin the suite calls negligible (two one-sided tests read off the interval). This holds even when the interval excludes zero.", e.0, e.1),
        format!("{} **{}**: the interval covers zero and reaches beyond −δ or +δ: these repeats can neither tell the methods apart nor show them equivalent. Not evidence that they are equal.", u.0, u.1),
        format!("{} **{}**: the interval lies entirely on the worse side of zero and reaches beyond δ.", w.0, w.1),
        format!("The margin δ: {margin}."),
        format!("Across tasks, counts are given as tasks {} ({}).", Verdict::ALL.map(|v| v.as_str()).join(" / "), marks_slashed()),
    ]
}

/// Anchor-safe form of an id.
pub fn anchor(s: &str) -> String {
    s.chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || c == '-' || c == '_' {
                c.to_ascii_lowercase()
            } else {
                '-'
            }
        })
        .collect()
}

pub fn to_markdown(blocks: &[Block]) -> String {
    let mut s = String::new();
    for b in blocks {
        match b {
            Block::Heading(l, t, _) => {
                s.push_str(&format!("{} {t}\n\n", "#".repeat(*l as usize)));
            }
            Block::Para(t) => s.push_str(&format!("{t}\n\n")),
            Block::List(items) => {
                for i in items {
                    s.push_str(&format!("- {i}\n"));
                }
                s.push('\n');
            }
            Block::Table(t) => {
                s.push_str(&t.to_markdown());
                s.push('\n');
            }
            Block::Figure(p, alt) => s.push_str(&format!("![{alt}]({p})\n\n")),
            Block::Caution(t) => s.push_str(&format!("> **Caution.** {t}\n\n")),
        }
    }
    s
}

use super::esc;

/// Inline Markdown (`code`, **bold**) as HTML.
pub fn inline_html(t: &str) -> String {
    let mut out = String::new();
    let mut code = false;
    let mut bold = false;
    let mut rest = t;
    while !rest.is_empty() {
        if let Some(r) = rest.strip_prefix('`') {
            out.push_str(if code { "</code>" } else { "<code>" });
            code = !code;
            rest = r;
        } else if let (false, Some(r)) = (code, rest.strip_prefix("**")) {
            out.push_str(if bold { "</strong>" } else { "<strong>" });
            bold = !bold;
            rest = r;
        } else {
            let c = rest.chars().next().unwrap_or(' ');
            out.push_str(&esc(&c.to_string()));
            rest = &rest[c.len_utf8()..];
        }
    }
    if code {
        out.push_str("</code>");
    }
    if bold {
        out.push_str("</strong>");
    }
    out
}

/// Inline Markdown stripped for the terminal.
pub fn inline_plain(t: &str) -> String {
    t.replace("**", "").replace('`', "")
}

/// Wrap plain text at `width` columns with `indent` on every line.
pub fn wrap(text: &str, width: usize, first: &str, indent: &str) -> String {
    let mut out = String::new();
    let mut line = String::from(first);
    let mut len = first.chars().count();
    let mut empty = true;
    for w in text.split_whitespace() {
        let wl = w.chars().count();
        if !empty && len + 1 + wl > width {
            out.push_str(line.trim_end());
            out.push('\n');
            line = String::from(indent);
            len = indent.chars().count();
            empty = true;
        }
        if !empty {
            line.push(' ');
            len += 1;
        }
        line.push_str(w);
        len += wl;
        empty = false;
    }
    out.push_str(line.trim_end());
    out.push('\n');
    out
}

/// Terminal text at `width` columns; figures become their paths.
pub fn to_terminal(blocks: &[Block], width: usize) -> String {
    let mut s = String::new();
    for b in blocks {
        match b {
            Block::Heading(l, t, _) => {
                let t = inline_plain(t);
                let under = if *l <= 2 { '═' } else { '─' };
                s.push_str(&format!(
                    "\n{t}\n{}\n",
                    under.to_string().repeat(t.chars().count().min(width))
                ));
            }
            Block::Para(t) => {
                s.push_str(&wrap(&inline_plain(t), width, "", ""));
                s.push('\n');
            }
            Block::List(items) => {
                for i in items {
                    s.push_str(&wrap(&inline_plain(i), width, "  • ", "    "));
                }
                s.push('\n');
            }
            Block::Table(t) => {
                let mut t = t.clone();
                t.title = inline_plain(&t.title);
                for r in t.rows.iter_mut().chain(std::iter::once(&mut t.header)) {
                    for c in r.iter_mut() {
                        *c = inline_plain(c);
                    }
                }
                let notes: Vec<String> = t.notes.iter().map(|n| inline_plain(n)).collect();
                t.notes.clear();
                s.push_str(&t.to_terminal(Some(width as u16)));
                for n in notes {
                    s.push_str(&wrap(&n, width, "  ", "  "));
                }
                s.push('\n');
            }
            Block::Figure(p, _) => s.push_str(&format!("  figure: {p}\n\n")),
            Block::Caution(t) => {
                s.push_str(&wrap(
                    &format!("Caution. {}", inline_plain(t)),
                    width,
                    "! ",
                    "! ",
                ));
                s.push('\n');
            }
        }
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn inline_marks_become_html() {
        assert_eq!(
            inline_html("use `a<b` and **bold** & more"),
            "use <code>a&lt;b</code> and <strong>bold</strong> &amp; more"
        );
    }

    #[test]
    fn wrap_keeps_width() {
        let t = "one two three four five six seven eight nine ten eleven twelve";
        for line in wrap(t, 20, "", "  ").lines() {
            assert!(line.chars().count() <= 20, "{line}");
        }
    }
}
