//! One document model for every report format. The summary is built once as
//! a list of [`Block`]s — decision first, then the caution and the legend,
//! ranks, thresholds, reliability diagrams and per-task detail — and rendered
//! as Markdown (`summary.md`), HTML (`index.html`) or terminal text, so the
//! formats cannot drift apart. Inline text uses Markdown marks:
//! `` `code` `` and `**bold**`; the HTML also renders `*emphasis*` and
//! `_emphasis_`.

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

/// Inline Markdown (`code`, **bold**, *emphasis* and _emphasis_) as HTML.
/// A single `*` or `_` opens emphasis only at the start of a word and when a
/// matching mark closes it at the end of a word before the next code span,
/// so ids such as `log_loss` and a lone `*` stay as they are.
pub fn inline_html(t: &str) -> String {
    let mut out = String::new();
    let mut code = false;
    let mut bold = false;
    let mut rest = t;
    let mut prev: Option<char> = None;
    while !rest.is_empty() {
        if let Some(r) = rest.strip_prefix('`') {
            out.push_str(if code { "</code>" } else { "<code>" });
            code = !code;
            rest = r;
            prev = Some('`');
        } else if let (false, Some(r)) = (code, rest.strip_prefix("**")) {
            out.push_str(if bold { "</strong>" } else { "<strong>" });
            bold = !bold;
            rest = r;
            prev = Some('*');
        } else if let Some((inner, after)) = (!code).then(|| emphasis(rest, prev)).flatten() {
            out.push_str(&format!("<em>{}</em>", inline_html(inner)));
            prev = inner.chars().last();
            rest = after;
        } else {
            let c = rest.chars().next().unwrap_or(' ');
            out.push_str(&esc(&c.to_string()));
            rest = &rest[c.len_utf8()..];
            prev = Some(c);
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

/// An emphasis span `*text*` or `_text_` at the start of `rest` (`prev` is
/// the character before it): the text inside and what follows the span.
fn emphasis(rest: &str, prev: Option<char>) -> Option<(&str, &str)> {
    let mark = rest.chars().next().filter(|&c| c == '*' || c == '_')?;
    if rest[1..].starts_with(mark) || prev.is_some_and(|c| c.is_alphanumeric() || c == mark) {
        return None;
    }
    let body = &rest[1..];
    if body.starts_with(char::is_whitespace) {
        return None;
    }
    let end = body.find('`').unwrap_or(body.len());
    let mut from = 0;
    while let Some(i) = body[from..end].find(mark).map(|i| i + from) {
        let before = body[..i].chars().last();
        let after = body[i + 1..].chars().next();
        if i > 0
            && before.is_some_and(|c| !c.is_whitespace())
            && !after.is_some_and(|c| c.is_alphanumeric() || c == mark)
        {
            return Some((&body[..i], &body[i + 1..]));
        }
        from = i + 1;
    }
    None
}

/// Inline Markdown stripped for the terminal.
pub fn inline_plain(t: &str) -> String {
    t.replace("**", "").replace('`', "")
}

/// How terminal text is laid out: its width in columns and whether bold may
/// be shown with escape codes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Term {
    pub width: usize,
    /// Escape codes allowed: standard output is a terminal and `NO_COLOR` is
    /// unset or empty (no-color.org).
    pub color: bool,
}

/// Narrowest layout: below it a table's columns cannot hold an interval.
pub const MIN_WIDTH: usize = 60;
/// Width when neither `COLUMNS` nor a terminal says otherwise.
pub const DEFAULT_WIDTH: usize = 100;

impl Term {
    /// Plain text at `width` columns (no escape codes).
    pub fn plain(width: usize) -> Term {
        Term {
            width: width.max(MIN_WIDTH),
            color: false,
        }
    }

    /// The layout for standard output: the width from `COLUMNS` when it holds
    /// a positive number, else the terminal's width when standard output is a
    /// terminal, else 100 (never below 60); escape codes only on a terminal
    /// and without `NO_COLOR`.
    pub fn detect() -> Term {
        use std::io::IsTerminal;
        let tty = std::io::stdout().is_terminal();
        Term::from_parts(
            tty,
            std::env::var_os("NO_COLOR").as_deref(),
            std::env::var("COLUMNS").ok().as_deref(),
            tty.then(|| terminal_size::terminal_size_of(std::io::stdout()))
                .flatten()
                .map(|(w, _)| w.0 as usize),
        )
    }

    /// The rule of [`Term::detect`] from what it reads: whether standard
    /// output is a terminal, `NO_COLOR`, `COLUMNS` and the terminal's width.
    pub fn from_parts(
        tty: bool,
        no_color: Option<&std::ffi::OsStr>,
        columns: Option<&str>,
        terminal: Option<usize>,
    ) -> Term {
        Term {
            width: detect_width(columns, terminal),
            color: tty && no_color.is_none_or(|v| v.is_empty()),
        }
    }
}

/// The width rule of [`Term::detect`], from `COLUMNS` and the terminal's
/// width (when standard output is one).
pub fn detect_width(columns: Option<&str>, terminal: Option<usize>) -> usize {
    columns
        .and_then(|c| c.trim().parse::<usize>().ok())
        .filter(|&c| c > 0)
        .or(terminal.filter(|&c| c > 0))
        .unwrap_or(DEFAULT_WIDTH)
        .max(MIN_WIDTH)
}

/// Start and end of a bold span in text being laid out: zero columns wide,
/// turned into escape codes (or dropped) once the lines are final.
const BOLD_ON: char = '\u{1}';
const BOLD_OFF: char = '\u{2}';

/// Printed width of laid-out text (bold marks take no room).
fn columns(s: &str) -> usize {
    s.chars().filter(|&c| c != BOLD_ON && c != BOLD_OFF).count()
}

/// Inline Markdown for the terminal: code marks dropped, bold spans kept as
/// zero-width marks when `color`, else dropped.
fn inline_term(t: &str, color: bool) -> String {
    let t = t.replace('`', "");
    if !color {
        return t.replace("**", "");
    }
    let mut out = String::new();
    let mut on = false;
    for (i, part) in t.split("**").enumerate() {
        if i > 0 {
            out.push(if on { BOLD_OFF } else { BOLD_ON });
            on = !on;
        }
        out.push_str(part);
    }
    if on {
        out.push(BOLD_OFF);
    }
    out
}

/// Bold marks as escape codes, closed at each line end and reopened on the
/// next line, so no line leaves the terminal bold.
fn bold_escapes(text: &str) -> String {
    let mut out = String::new();
    let mut on = false;
    for line in text.split_inclusive('\n') {
        let (body, nl) = match line.strip_suffix('\n') {
            Some(b) => (b, "\n"),
            None => (line, ""),
        };
        if on && !body.is_empty() {
            out.push_str(BOLD_SGR);
        }
        for c in body.chars() {
            match c {
                BOLD_ON => {
                    on = true;
                    out.push_str(BOLD_SGR);
                }
                BOLD_OFF => {
                    on = false;
                    out.push_str(RESET_SGR);
                }
                c => out.push(c),
            }
        }
        if on && !body.is_empty() {
            out.push_str(RESET_SGR);
        }
        out.push_str(nl);
    }
    out
}

const BOLD_SGR: &str = "\x1b[1m";
const RESET_SGR: &str = "\x1b[22m";

/// Wrap plain text at `width` columns with `indent` on every line.
pub fn wrap(text: &str, width: usize, first: &str, indent: &str) -> String {
    let mut out = String::new();
    let mut line = String::from(first);
    let mut len = columns(first);
    let mut empty = true;
    for w in text.split_whitespace() {
        let wl = columns(w);
        if !empty && len + 1 + wl > width {
            out.push_str(line.trim_end());
            out.push('\n');
            line = String::from(indent);
            len = columns(indent);
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

/// How the legend of a table's bold cells reads where bold cannot be shown.
const BOLD_KEY: &str = "bold: ";
const PLAIN_KEY: &str = "marked *: ";

/// Spaces inside an interval `[a, b]` and before the verdict mark after it
/// become no-break spaces, so a narrow column breaks a cell between its
/// parts, never inside an interval.
pub(crate) fn glue_intervals(cell: &str) -> String {
    let chars: Vec<char> = cell.chars().collect();
    let mut out = String::new();
    let mut depth = 0usize;
    for (i, &c) in chars.iter().enumerate() {
        match c {
            '[' => depth += 1,
            ']' => depth = depth.saturating_sub(1),
            _ => {}
        }
        let after_interval = i > 0 && chars[i - 1] == ']';
        // The mark after an interval: one or two characters, then the end
        // or a space (`] ✓`, `] ? †`), or the note mark `*` of `diagnose`.
        let mark_follows = || {
            let rest: String = chars[i + 1..].iter().collect();
            let word = rest.split(' ').next().unwrap_or("");
            let core = word.trim_end_matches('*');
            (!core.is_empty() && core.chars().count() <= 2) || word == "*"
        };
        if c == ' ' && (depth > 0 || (after_interval && mark_follows())) {
            out.push('\u{a0}');
        } else {
            out.push(c);
        }
    }
    out
}

/// Width a column needs so that no word of it is broken: its longest word
/// plus the padding.
fn column_floor(cells: &[&str]) -> usize {
    cells
        .iter()
        .flat_map(|c| c.split([' ', '\n']))
        .map(|w| w.chars().count())
        .max()
        .unwrap_or(0)
        + 2
}

/// A table for the terminal: bold cells in bold (or marked `*` without
/// escape codes), the title and notes wrapped, intervals and words never
/// broken. When the columns cannot all fit `term.width` unbroken, the table
/// is split into several, each repeating the first column.
pub fn table_terminal(t: &Table, term: &Term) -> String {
    use comfy_table::{
        presets::UTF8_FULL_CONDENSED, Attribute, Cell, CellAlignment, ColumnConstraint,
        ContentArrangement, Width,
    };
    // Each cell as (text, bold); only a wholly bold cell is shown bold (the
    // marks of a part of a cell repeat what its verdict mark says).
    let cell = |c: &str| -> (String, bool) {
        let t = c.trim();
        let bold =
            t.len() > 4 && t.starts_with("**") && t.ends_with("**") && t.matches("**").count() == 2;
        let text = glue_intervals(&inline_plain(c));
        if bold && !term.color {
            (format!("*{text}"), false)
        } else {
            (text, bold)
        }
    };
    let header: Vec<(String, bool)> = t.header.iter().map(|c| cell(c)).collect();
    let rows: Vec<Vec<(String, bool)>> = t
        .rows
        .iter()
        .map(|r| r.iter().map(|c| cell(c)).collect())
        .collect();
    let ncols = header.len();
    let floors: Vec<usize> = (0..ncols)
        .map(|i| {
            let mut cells: Vec<&str> = vec![header[i].0.as_str()];
            cells.extend(rows.iter().filter_map(|r| r.get(i)).map(|c| c.0.as_str()));
            column_floor(&cells)
        })
        .collect();
    // Column groups: the first column, then as many more as fit unbroken.
    let mut groups: Vec<Vec<usize>> = Vec::new();
    let first = floors.first().copied().unwrap_or(0) + 2;
    let mut used = first;
    for (i, &f) in floors.iter().enumerate().skip(1) {
        // Each further column takes its floor and one border.
        match groups.last_mut() {
            Some(g) if used + f < term.width => {
                g.push(i);
                used += f + 1;
            }
            _ => {
                groups.push(vec![i]);
                used = first + f + 1;
            }
        }
    }
    if groups.is_empty() {
        groups.push(Vec::new());
    }
    let mut s = String::new();
    let title = inline_term(&t.title, term.color);
    let title = if term.color && !title.is_empty() {
        format!("{BOLD_ON}{title}{BOLD_OFF}")
    } else {
        title
    };
    s.push_str(&bold_escapes(&wrap(&title, term.width, "", "")));
    let parts = groups.len();
    for (k, g) in groups.iter().enumerate() {
        let cols: Vec<usize> = std::iter::once(0).chain(g.iter().copied()).collect();
        let mut ct = comfy_table::Table::new();
        ct.load_style(UTF8_FULL_CONDENSED);
        ct.set_content_arrangement(ContentArrangement::Dynamic);
        ct.force_no_tty();
        if term.color {
            ct.enforce_styling();
        }
        ct.set_width(term.width.min(u16::MAX as usize) as u16);
        let make = |(text, bold): &(String, bool), right: bool| {
            let mut c = Cell::new(text);
            if *bold {
                c = c.add_attribute(Attribute::Bold);
            }
            if right {
                c = c.set_alignment(CellAlignment::Right);
            }
            c
        };
        ct.set_header(cols.iter().map(|&i| make(&header[i], false)));
        for r in &rows {
            ct.add_row(cols.iter().map(|&i| {
                r.get(i)
                    .map(|c| make(c, i > 0))
                    .unwrap_or_else(|| Cell::new(""))
            }));
        }
        for (j, &i) in cols.iter().enumerate() {
            if let Some(c) = ct.column_mut(j) {
                c.set_constraint(ColumnConstraint::LowerBoundary(Width::Fixed(
                    floors[i].min(u16::MAX as usize) as u16,
                )));
            }
        }
        if parts > 1 {
            s.push_str(&format!("({} of {parts})\n", k + 1));
        }
        s.push_str(&ct.to_string().replace('\u{a0}', " "));
        s.push('\n');
    }
    for n in &t.notes {
        let n = if term.color {
            n.clone()
        } else {
            n.replace(BOLD_KEY, PLAIN_KEY)
        };
        s.push_str(&bold_escapes(&wrap(
            &inline_term(&n, term.color),
            term.width,
            "  ",
            "  ",
        )));
    }
    s
}

/// Terminal text laid out for `term`; figures become their paths.
pub fn to_terminal(blocks: &[Block], term: &Term) -> String {
    let width = term.width;
    let color = term.color;
    let mut s = String::new();
    for b in blocks {
        match b {
            Block::Heading(l, t, _) => {
                let t = inline_plain(t);
                let under = if *l <= 2 { '═' } else { '─' };
                let text = wrap(&t, width, "", "");
                let longest = text.lines().map(columns).max().unwrap_or(0);
                s.push('\n');
                if color {
                    s.push_str(&bold_escapes(&format!(
                        "{BOLD_ON}{}{BOLD_OFF}",
                        text.trim_end()
                    )));
                    s.push('\n');
                } else {
                    s.push_str(&text);
                }
                s.push_str(&under.to_string().repeat(longest.min(width)));
                s.push('\n');
            }
            Block::Para(t) => {
                s.push_str(&bold_escapes(&wrap(&inline_term(t, color), width, "", "")));
                s.push('\n');
            }
            Block::List(items) => {
                for i in items {
                    s.push_str(&bold_escapes(&wrap(
                        &inline_term(i, color),
                        width,
                        "  • ",
                        "    ",
                    )));
                }
                s.push('\n');
            }
            Block::Table(t) => {
                s.push_str(&table_terminal(t, term));
                s.push('\n');
            }
            Block::Figure(p, _) => s.push_str(&format!("  figure: {p}\n\n")),
            Block::Caution(t) => {
                s.push_str(&bold_escapes(&wrap(
                    &format!("Caution. {}", inline_term(t, color)),
                    width,
                    "! ",
                    "! ",
                )));
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
    fn emphasis_becomes_html_and_ids_stay() {
        assert_eq!(
            inline_html("Per task, *better from* and _worse up to_ on `log_loss`"),
            "Per task, <em>better from</em> and <em>worse up to</em> on <code>log_loss</code>"
        );
        assert_eq!(inline_html("log_loss and a_b_c"), "log_loss and a_b_c");
        assert_eq!(inline_html("marked * here"), "marked * here");
        assert_eq!(inline_html("`_x_`"), "<code>_x_</code>");
    }

    #[test]
    fn escape_codes_only_on_a_terminal_without_no_color() {
        use std::ffi::OsStr;
        assert!(Term::from_parts(true, None, None, Some(120)).color);
        assert!(Term::from_parts(true, Some(OsStr::new("")), None, None).color);
        assert!(!Term::from_parts(true, Some(OsStr::new("1")), None, None).color);
        assert!(!Term::from_parts(false, None, None, None).color);
    }

    #[test]
    fn width_from_columns_then_terminal_then_100() {
        assert_eq!(detect_width(Some("80"), Some(140)), 80);
        assert_eq!(detect_width(None, Some(140)), 140);
        assert_eq!(detect_width(None, None), DEFAULT_WIDTH);
        assert_eq!(detect_width(Some("wide"), None), DEFAULT_WIDTH);
        assert_eq!(detect_width(Some("0"), Some(90)), 90);
        assert_eq!(detect_width(Some("20"), None), MIN_WIDTH);
    }

    fn bold_doc() -> Vec<Block> {
        vec![
            Block::Heading(2, "Ranks".into(), "ranks".into()),
            Block::Para("The **team default** is `beta`.".into()),
            Block::Table(Table {
                title: "Average rank".into(),
                header: vec!["method".into(), "n = 50".into()],
                rows: vec![
                    vec!["`beta`".into(), "**1.00**".into()],
                    vec!["`platt`".into(), "2.00".into()],
                ],
                notes: vec!["bold: best at that size.".into()],
            }),
        ]
    }

    #[test]
    fn bold_is_an_escape_code_on_a_terminal_and_a_marker_elsewhere() {
        let plain = to_terminal(&bold_doc(), &Term::plain(80));
        assert!(!plain.contains('\x1b'), "{plain}");
        assert!(plain.contains("*1.00"), "{plain}");
        assert!(plain.contains("marked *: best at that size"), "{plain}");
        assert!(!plain.contains("bold"), "{plain}");
        let tty = to_terminal(
            &bold_doc(),
            &Term {
                width: 80,
                color: true,
            },
        );
        assert!(tty.contains("\x1b[1mteam default\x1b[22m"), "{tty}");
        assert!(tty.contains("bold: best at that size"), "{tty}");
        assert!(!tty.contains("*1.00"), "{tty}");
        // Every bold span is closed on its own line.
        for l in tty.lines() {
            let resets = l.matches("\x1b[22m").count() + l.matches("\x1b[0m").count();
            assert_eq!(l.matches("\x1b[1m").count(), resets, "{l}");
        }
    }

    #[test]
    fn an_interval_is_glued_to_its_mark_but_not_to_the_next_word() {
        let nb = '\u{a0}';
        assert_eq!(
            glue_intervals("0.1 [−0.2, +0.3] ✓"),
            format!("0.1 [−0.2,{nb}+0.3]{nb}✓")
        );
        assert_eq!(
            glue_intervals("0.1 [-0.2, 0.3] *"),
            format!("0.1 [-0.2,{nb}0.3]{nb}*")
        );
        assert_eq!(
            glue_intervals("[0.1, 0.2] kind"),
            format!("[0.1,{nb}0.2] kind")
        );
    }

    #[test]
    fn intervals_stay_whole_and_wide_tables_split() {
        let cell = "0.5751\n−0.00849 [−0.0356, +0.0122] ?";
        let t = Table {
            title: "Task".into(),
            header: std::iter::once("method".to_string())
                .chain((1..=6).map(|k| format!("n = {}", k * 100)))
                .collect(),
            rows: vec![std::iter::once("centered-isotonic-bounded".to_string())
                .chain((1..=6).map(|_| cell.to_string()))
                .collect()],
            notes: Vec::new(),
        };
        let out = table_terminal(&t, &Term::plain(80));
        assert!(out.contains("(1 of "), "{out}");
        for l in out.lines() {
            assert!(l.chars().count() <= 80, "{l}");
        }
        assert_eq!(out.matches("[−0.0356, +0.0122] ?").count(), 6, "{out}");
        // Each part repeats the method column, whole.
        let parts = out.lines().filter(|l| l.starts_with('(')).count();
        assert!(parts >= 2, "{out}");
        assert_eq!(
            out.matches("centered-isotonic-bounded").count(),
            parts,
            "{out}"
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
