//! Figures as standalone SVG, written by hand so the bytes are reproducible
//! (no fonts embedded, no time stamps, fixed number formatting).
//!
//! - **Learning curves** (`figures/<task>--<metric>.svg`): small multiples, one
//!   panel per method, each with its own readable y range, the paired mean
//!   difference to the reference against the calibration size (log scale),
//!   the interval as a band, the zero line, and the size from which the method
//!   is reliably better than the reference marked.
//! - **Reliability diagrams** (`figures/<task>--reliability.svg`): per method
//!   and calibration size, the CORP curve with its consistency band on a
//!   probability panel and on a log-odds panel (which shows the tails; every
//!   log-odds panel of a figure on one range, [`log_odds_range`], outcome
//!   frequencies of exactly 0 or 1 as open edge marks), the histogram of the
//!   predictions beneath, and the CORP terms of the Brier score (see
//!   [`crate::metrics::reliability`]).
//! - **Rank diagrams** (`figures/ranks--<metric>.svg`): per size, the average
//!   ranks on an axis with the Nemenyi critical difference; methods whose
//!   ranks differ by less than it are joined by a bar (the layout of Demšar
//!   2006, JMLR 7).
//! - **Threshold charts** (`figures/thresholds--<metric>.svg`): per task and
//!   (flexible, parametric) pair, the size from which the flexible method is
//!   reliably better at every larger size tried, with a key to the methods,
//!   the cell colours and the `–` and `?` cells.
//!
//! Every method keeps one colour, marker and dash in every figure
//! ([`style`]; colours from Paul Tol's colour-blind-safe "muted" scheme, each
//! at least 3:1 against white), no two methods sharing both colour and
//! marker; every figure carries a key per method (`<g class="key"
//! data-method="...">`: marker and name). Text is placed to stay inside the
//! canvas and clear of other text by an estimated width of 0.6 × font size
//! per character: headings wrap, labels near a panel edge turn inward, and
//! tick labels carry only the decimals their step needs.

use crate::analysis::{Analysis, ThresholdRow};
use crate::metrics::reliability::{Curve, CurveRecord, LOGIT_RANGE};
use crate::metrics::MetricId;

/// Line and marker colours: Paul Tol's colour-blind-safe "muted" scheme
/// (P. Tol, "Colour Schemes", SRON technical note SRON/EPS/TN/09-002, 2021),
/// without its pale sand (#DDCC77) and pale cyan (#88CCEE), which are too
/// light on white; its teal #44AA99 is darkened to 90% (#3D9989) for the
/// same reason; black last. Every colour has a contrast ratio of at least
/// 3:1 against white (WCAG 2.1, success criterion 1.4.11, checked by a test).
pub const COLOURS: [&str; 8] = [
    "#332288", "#CC6677", "#117733", "#999933", "#AA4499", "#3D9989", "#882255", "#000000",
];

/// Marker shapes, cycled independently of the colours.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Marker {
    Circle,
    Square,
    Triangle,
    Diamond,
    TriangleDown,
}

/// The markers in the order methods take them.
pub const MARKERS: [Marker; 5] = [
    Marker::Circle,
    Marker::Square,
    Marker::Triangle,
    Marker::Diamond,
    Marker::TriangleDown,
];

impl Marker {
    /// The marker's name, written as the class of every marker drawn.
    pub fn name(self) -> &'static str {
        match self {
            Marker::Circle => "circle",
            Marker::Square => "square",
            Marker::Triangle => "triangle",
            Marker::Diamond => "diamond",
            Marker::TriangleDown => "triangle-down",
        }
    }
}

/// Line dashes: solid for the first eight methods, then dashed, then dotted.
const DASHES: [&str; 3] = ["", "6 3", "2 2"];

/// How one method is drawn.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Style {
    pub colour: &'static str,
    pub marker: Marker,
    /// `stroke-dasharray` of the method's lines; empty = solid.
    pub dash: &'static str,
}

/// The style of the method at position `i` in the suite's method list.
/// Colours cycle with period 8 and markers with period 5, so the first 40
/// methods all differ in (colour, marker), and neighbours in the list differ
/// in both; the dash changes with every round of the colours.
pub fn style(i: usize) -> Style {
    Style {
        colour: COLOURS[i % COLOURS.len()],
        marker: MARKERS[i % MARKERS.len()],
        dash: DASHES[(i / COLOURS.len()) % DASHES.len()],
    }
}

/// The style of a method by name; a series outside the suite's method list
/// (the raw scores, `uncalibrated`) is drawn in a grey that no method takes,
/// with squares and a dashed line.
pub fn style_of(a: &Analysis, method: &str) -> Style {
    match a.methods.iter().position(|m| m == method) {
        Some(i) => style(i),
        None => Style {
            colour: "#555555",
            marker: Marker::Square,
            dash: "6 3",
        },
    }
}

pub use super::esc;

fn f(v: f64) -> String {
    let s = format!("{v:.1}");
    if s == "-0.0" {
        "0.0".into()
    } else {
        s
    }
}

/// `x,y` pairs for `points=""` on a half-pixel grid, consecutive repeats
/// (after rounding) dropped: plenty for a line at screen resolution.
fn point_list(pts: impl Iterator<Item = (f64, f64)>) -> String {
    let half = |v: f64| {
        let r = (v * 2.0).round() / 2.0;
        if r == r.trunc() {
            format!("{r:.0}")
        } else {
            format!("{r:.1}")
        }
    };
    let mut out: Vec<String> = Vec::new();
    for (x, y) in pts {
        let p = format!("{},{}", half(x), half(y));
        if out.last() != Some(&p) {
            out.push(p);
        }
    }
    out.join(" ")
}

/// A marker of radius about `r` at (x, y), its shape named in its class
/// (`m-circle`, `m-square`, ...).
fn marker(m: Marker, x: f64, y: f64, r: f64, fill: &str) -> String {
    let class = m.name();
    let poly = |pts: &[(f64, f64)]| {
        let mut d = String::new();
        for (i, (dx, dy)) in pts.iter().enumerate() {
            d.push_str(&format!(
                "{}{} {}",
                if i == 0 { "M" } else { "L" },
                f(x + dx * r),
                f(y + dy * r)
            ));
        }
        format!("<path class=\"m-{class}\" d=\"{d}Z\" fill=\"{fill}\"/>")
    };
    match m {
        Marker::Circle => format!(
            "<circle class=\"m-{class}\" cx=\"{}\" cy=\"{}\" r=\"{}\" fill=\"{fill}\"/>",
            f(x),
            f(y),
            f(r)
        ),
        Marker::Square => format!(
            "<rect class=\"m-{class}\" x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" fill=\"{fill}\"/>",
            f(x - 0.9 * r),
            f(y - 0.9 * r),
            f(1.8 * r),
            f(1.8 * r)
        ),
        Marker::Triangle => poly(&[(0.0, -1.2), (1.1, 0.8), (-1.1, 0.8)]),
        Marker::TriangleDown => poly(&[(0.0, 1.2), (1.1, -0.8), (-1.1, -0.8)]),
        Marker::Diamond => poly(&[(0.0, -1.3), (1.1, 0.0), (0.0, 1.3), (-1.1, 0.0)]),
    }
}

fn dash(s: Style) -> String {
    if s.dash.is_empty() {
        String::new()
    } else {
        format!(" stroke-dasharray=\"{}\"", s.dash)
    }
}

fn open_svg(w: f64, h: f64, label: &str) -> String {
    format!(
        "<svg xmlns=\"http://www.w3.org/2000/svg\" viewBox=\"0 0 {w} {h}\" width=\"{w}\" height=\"{h}\" font-family=\"sans-serif\" font-size=\"11\" role=\"img\" aria-label=\"{}\">\n<rect width=\"{w}\" height=\"{h}\" fill=\"white\"/>\n",
        esc(label)
    )
}

/// "Nice" tick values covering [lo, hi], with their step.
fn ticks(lo: f64, hi: f64, n: usize) -> (Vec<f64>, f64) {
    let span = (hi - lo).abs().max(1e-12);
    let raw = span / n as f64;
    let mag = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 2.5, 5.0, 10.0]
        .iter()
        .map(|m| m * mag)
        .find(|s| span / s <= n as f64)
        .unwrap_or(10.0 * mag);
    let start = (lo / step).ceil() * step;
    let mut out = Vec::new();
    let mut v = start;
    while v <= hi + step * 1e-9 {
        out.push(if v.abs() < step * 1e-9 { 0.0 } else { v });
        v += step;
    }
    (out, step)
}

/// A tick label with as few decimals as the step needs (0.02 for a step of
/// 0.01, 0.025 for 0.025, 5 for 5; zero with as many), a true minus sign,
/// and no sign on zero.
fn tick_label(v: f64, step: f64) -> String {
    let mut decimals = 0usize;
    while decimals < 12 {
        let scaled = step * 10f64.powi(decimals as i32);
        if (scaled - scaled.round()).abs() < 1e-6 * scaled.abs().max(1.0) {
            break;
        }
        decimals += 1;
    }
    let s = format!("{v:.decimals$}");
    if s.trim_start_matches('-')
        .chars()
        .all(|c| c == '0' || c == '.')
    {
        return s.trim_start_matches('-').to_string();
    }
    s.replace('-', "−")
}

/// Estimated width of a line of text: 0.6 × font size per character, a
/// generous average for sans-serif faces (no font is embedded, so the exact
/// width is the viewer's); the layout keeps this much room.
fn text_width(text: &str, font_size: f64) -> f64 {
    text.chars().count() as f64 * 0.6 * font_size
}

/// Words of `text` in lines no wider than `width` by [`text_width`]; a
/// word wider than a line on its own (a long file path) is cut into pieces
/// that fit, after a `/`, backslash, `-`, `_` or `.` where the piece has one.
fn wrap(text: &str, font_size: f64, width: f64) -> Vec<String> {
    let mut lines: Vec<String> = Vec::new();
    let mut cur = String::new();
    for word in text.split_whitespace() {
        let next = if cur.is_empty() {
            word.to_string()
        } else {
            format!("{cur} {word}")
        };
        if text_width(&next, font_size) <= width {
            cur = next;
            continue;
        }
        if !cur.is_empty() {
            lines.push(std::mem::take(&mut cur));
        }
        let mut pieces = split_word(word, font_size, width);
        cur = pieces.pop().unwrap_or_default();
        lines.extend(pieces);
    }
    if !cur.is_empty() || lines.is_empty() {
        lines.push(cur);
    }
    lines
}

/// A word in pieces no wider than `width` (at least one character each),
/// each cut after its last `/`, backslash, `-`, `_` or `.` when it has one.
fn split_word(word: &str, font_size: f64, width: f64) -> Vec<String> {
    let per_line = ((width / text_width("x", font_size) + 1e-9).floor() as usize).max(1);
    let mut out = Vec::new();
    let mut rest: Vec<char> = word.chars().collect();
    while rest.len() > per_line {
        let cut = rest[..per_line]
            .iter()
            .rposition(|c| matches!(c, '/' | '\\' | '-' | '_' | '.'))
            .map(|i| i + 1)
            .unwrap_or(per_line);
        out.push(rest[..cut].iter().collect());
        rest.drain(..cut);
    }
    out.push(rest.into_iter().collect());
    out
}

/// The title (bold, 14 px) and notes (grey, 11 px) at the top left of a
/// figure `width` wide, each wrapped to fit, in a `<g class="heading">`;
/// plain text, escaped here.
/// Returns the baseline of the last line written.
fn write_heading(s: &mut String, title: &str, notes: &[String], width: f64) -> f64 {
    s.push_str("<g class=\"heading\">\n");
    let mut y = 18.0;
    for (i, l) in wrap(title, 14.0, width - 20.0).iter().enumerate() {
        if i > 0 {
            y += 17.0;
        }
        s.push_str(&format!(
            "<text x=\"10\" y=\"{}\" font-size=\"14\" font-weight=\"bold\">{}</text>\n",
            f(y),
            esc(l)
        ));
    }
    y += 2.0;
    for note in notes {
        for l in wrap(note, 11.0, width - 20.0) {
            y += 14.0;
            s.push_str(&format!(
                "<text x=\"10\" y=\"{}\" fill=\"#444\">{}</text>\n",
                f(y),
                esc(&l)
            ));
        }
    }
    s.push_str("</g>\n");
    y
}

/// A method's key: its marker, then its name (`label`, plain text) in its
/// colour, grouped and naming the method in `data-method`. The text starts
/// at `x` (or ends there with `end`); the marker sits before the text's
/// start, or after its end.
#[allow(clippy::too_many_arguments)]
fn key(
    method: &str,
    label: &str,
    st: Style,
    x: f64,
    y: f64,
    font_size: f64,
    bold: bool,
    end: bool,
) -> String {
    let mx = if end {
        x + 4.0 + 0.35 * font_size
    } else {
        x - 4.0 - 0.35 * font_size
    };
    format!(
        "<g class=\"key\" data-method=\"{}\">{}<text x=\"{}\" y=\"{}\"{} font-size=\"{font_size}\"{} fill=\"{}\">{}</text></g>",
        esc(method),
        marker(st.marker, mx, y - 0.35 * font_size, 0.3 * font_size, st.colour),
        f(x),
        f(y),
        if end { " text-anchor=\"end\"" } else { "" },
        if bold { " font-weight=\"bold\"" } else { "" },
        st.colour,
        esc(label)
    )
}

/// One method's points of a learning curve: (size, mean, low, high).
type Series<'a> = (&'a String, Vec<(usize, f64, f64, f64)>);

/// Where the learning-curve panels sit: `cols` to a row below the heading
/// (`top`), each with sizes on a log scale from `xmin` over `xspan`.
struct CurveGrid {
    cols: usize,
    top: f64,
    xmin: f64,
    xspan: f64,
}

impl CurveGrid {
    /// Panel width and height.
    const PW: f64 = 170.0;
    const PH: f64 = 110.0;
    /// Left margin and the gaps between panels.
    const ML: f64 = 62.0;
    const GAP_X: f64 = 62.0;
    const GAP_Y: f64 = 48.0;

    /// Left edge of the panel in column `col`.
    fn left(col: usize) -> f64 {
        Self::ML + col as f64 * (Self::PW + Self::GAP_X)
    }

    /// Top-left corner of panel `k`.
    fn corner(&self, k: usize) -> (f64, f64) {
        (
            Self::left(k % self.cols),
            self.top + (k / self.cols) as f64 * (Self::PH + Self::GAP_Y),
        )
    }
}

/// One panel's scales: the calibration size on a log scale across, the
/// difference to the reference (from `lo` to `hi`) up.
struct CurveScale {
    cx: f64,
    cy: f64,
    xmin: f64,
    xspan: f64,
    lo: f64,
    hi: f64,
}

impl CurveScale {
    fn x(&self, n: usize) -> f64 {
        self.cx + ((n as f64).ln() - self.xmin) / self.xspan * CurveGrid::PW
    }

    fn y(&self, v: f64) -> f64 {
        self.cy + (self.hi - v) / (self.hi - self.lo) * CurveGrid::PH
    }
}

/// Learning curves of one task: one panel per method against the reference.
pub fn learning_curves(
    a: &Analysis,
    task: &str,
    metric: MetricId,
    reference: &str,
) -> Option<String> {
    let sizes = a.sizes.get(task)?;
    let (xmin, xmax) = ((*sizes.first()? as f64).ln(), (*sizes.last()? as f64).ln());
    let xspan = if xmax > xmin { xmax - xmin } else { 1.0 };
    let panels = curve_series(a, task, metric, reference);
    if panels.is_empty() {
        return None;
    }
    let cols = 4usize.min(panels.len());
    let rows = panels.len().div_ceil(cols);
    // The canvas ends 10 px right of the rightmost panel or method name.
    let w = panels
        .iter()
        .enumerate()
        .map(|(k, (m, _))| {
            CurveGrid::left(k % cols) + CurveGrid::PW.max(10.0 + text_width(m, 12.0))
        })
        .fold(0.0f64, f64::max)
        + 10.0;
    let w = w.ceil();
    let better = if metric.higher_is_better() {
        "above"
    } else {
        "below"
    };
    let mut s = String::new();
    let last = write_heading(
        &mut s,
        &format!("{task}: mean {metric} of each method − {reference}"),
        &[format!("band: paired interval; {better} the zero line is better; dotted line: size from which the method is reliably better than {reference} at every larger size; each panel has its own vertical scale")],
        w,
    );
    let grid = CurveGrid {
        cols,
        top: last + 21.0,
        xmin,
        xspan,
    };
    let h = grid.top + rows as f64 * (CurveGrid::PH + CurveGrid::GAP_Y) + 10.0;
    s = open_svg(
        w,
        h,
        &format!("{task}: {metric} difference to {reference} by calibration size"),
    ) + &s;
    for (k, series) in panels.iter().enumerate() {
        s.push_str(&curve_panel(a, metric, sizes, series, &grid, k));
    }
    s.push_str(&format!(
        "<text x=\"{}\" y=\"{}\" text-anchor=\"middle\" fill=\"#444\">calibration-set size (log scale)</text>\n",
        f(w / 2.0),
        f(h - 4.0)
    ));
    s.push_str("</svg>\n");
    Some(s)
}

/// Each method's paired differences to the reference on one task, by size;
/// methods without a finite one are left out.
fn curve_series<'a>(
    a: &'a Analysis,
    task: &str,
    metric: MetricId,
    reference: &str,
) -> Vec<Series<'a>> {
    a.methods
        .iter()
        .filter(|m| *m != reference)
        .map(|m| {
            let pts = a
                .paired
                .iter()
                .filter(|p| {
                    p.task == task
                        && p.metric == metric
                        && &p.method == m
                        && p.mean_diff.is_finite()
                })
                .map(|p| (p.size, p.mean_diff, p.ci_low, p.ci_high))
                .collect::<Vec<_>>();
            (m, pts)
        })
        .filter(|(_, p)| !p.is_empty())
        .collect()
}

/// The vertical range of one panel: zero and every finite mean and bound,
/// padded by 8%.
fn curve_range(pts: &[(usize, f64, f64, f64)]) -> (f64, f64) {
    let (mut lo, mut hi) = (0.0f64, 0.0f64);
    for &(_, d, l, u) in pts {
        for v in [d, l, u] {
            if v.is_finite() {
                lo = lo.min(v);
                hi = hi.max(v);
            }
        }
    }
    let pad = (hi - lo).max(1e-9) * 0.08;
    (lo - pad, hi + pad)
}

/// One method's panel `k`: key, frame, axes, zero line, the curve with its
/// band, and the size from which it is reliably better.
fn curve_panel(
    a: &Analysis,
    metric: MetricId,
    sizes: &[usize],
    (m, pts): &Series,
    grid: &CurveGrid,
    k: usize,
) -> String {
    let (pw, ph) = (CurveGrid::PW, CurveGrid::PH);
    let st = style_of(a, m);
    let (cx, cy) = grid.corner(k);
    let (lo, hi) = curve_range(pts);
    let sc = CurveScale {
        cx,
        cy,
        xmin: grid.xmin,
        xspan: grid.xspan,
        lo,
        hi,
    };
    let mut s = String::new();
    s.push_str("<g>");
    s.push_str(&key(m, m, st, cx + 10.0, cy - 6.0, 12.0, true, false));
    s.push('\n');
    s.push_str(&format!(
        "<rect x=\"{}\" y=\"{}\" width=\"{pw}\" height=\"{ph}\" fill=\"#fafafa\" stroke=\"#bbb\"/>\n",
        f(cx),
        f(cy)
    ));
    let (tick_values, step) = ticks(lo, hi, 4);
    for t in tick_values {
        s.push_str(&format!(
            "<text x=\"{}\" y=\"{}\" text-anchor=\"end\" font-size=\"9\">{}</text>\n",
            f(cx - 3.0),
            f(sc.y(t) + 3.0),
            esc(&tick_label(t, step))
        ));
    }
    for &n in sizes {
        s.push_str(&format!(
            "<text x=\"{}\" y=\"{}\" text-anchor=\"middle\" font-size=\"9\">{n}</text>\n",
            f(sc.x(n)),
            f(cy + ph + 13.0)
        ));
    }
    s.push_str(&format!(
        "<line x1=\"{}\" x2=\"{}\" y1=\"{}\" y2=\"{}\" stroke=\"#333\"/>\n",
        f(cx),
        f(cx + pw),
        f(sc.y(0.0)),
        f(sc.y(0.0))
    ));
    s.push_str(&curve_line(pts, st, &sc));
    if let Some(n) = better_from(pts, metric.higher_is_better()) {
        s.push_str(&better_from_mark(n, &sc));
    }
    s.push_str("</g>\n");
    s
}

/// A curve's interval band, its line and its markers.
fn curve_line(pts: &[(usize, f64, f64, f64)], st: Style, sc: &CurveScale) -> String {
    let mut s = String::new();
    let ok: Vec<_> = pts
        .iter()
        .filter(|p| p.2.is_finite() && p.3.is_finite())
        .collect();
    if !ok.is_empty() {
        let band = point_list(
            ok.iter()
                .map(|p| (sc.x(p.0), sc.y(p.3)))
                .chain(ok.iter().rev().map(|p| (sc.x(p.0), sc.y(p.2)))),
        );
        s.push_str(&format!(
            "<polygon points=\"{band}\" fill=\"{}\" fill-opacity=\"0.2\"/>\n",
            st.colour
        ));
    }
    let line = point_list(pts.iter().map(|p| (sc.x(p.0), sc.y(p.1))));
    s.push_str(&format!(
        "<polyline points=\"{line}\" fill=\"none\" stroke=\"{}\" stroke-width=\"1.8\"{}/>\n",
        st.colour,
        dash(st)
    ));
    for p in pts {
        s.push_str(&marker(st.marker, sc.x(p.0), sc.y(p.1), 2.8, st.colour));
    }
    s.push('\n');
    s
}

/// The smallest size from which the interval is better than the reference
/// at every larger size of the curve.
fn better_from(pts: &[(usize, f64, f64, f64)], hib: bool) -> Option<usize> {
    let mut from = None;
    for p in pts.iter().rev() {
        let better = if hib { p.2 > 0.0 } else { p.3 < 0.0 };
        if better {
            from = Some(p.0);
        } else {
            break;
        }
    }
    from
}

/// The dotted line at the size `n` from which the method is reliably better,
/// with its label.
fn better_from_mark(n: usize, sc: &CurveScale) -> String {
    let (cx, cy, pw, ph) = (sc.cx, sc.cy, CurveGrid::PW, CurveGrid::PH);
    // The label goes right of the line when it fits inside the
    // panel, else left of it, else as far right as fits.
    let label = format!("better from {n}");
    let lw = text_width(&label, 9.0);
    let xn = sc.x(n);
    let (tx, anchor) = if xn + 2.0 + lw <= cx + pw - 2.0 {
        (xn + 2.0, "start")
    } else if xn - 2.0 - lw >= cx + 2.0 {
        (xn - 2.0, "end")
    } else {
        ((cx + pw - 2.0 - lw).max(cx + 2.0), "start")
    };
    format!(
        "<line x1=\"{}\" x2=\"{}\" y1=\"{}\" y2=\"{}\" stroke=\"#333\" stroke-dasharray=\"2 2\"/><text x=\"{}\" y=\"{}\" font-size=\"9\" text-anchor=\"{anchor}\">{label}</text>\n",
        f(xn),
        f(xn),
        f(cy),
        f(cy + ph),
        f(tx),
        f(cy + 10.0)
    )
}

fn logit(p: f64) -> f64 {
    let p = p.clamp(1e-300, 1.0);
    (p.ln() - (-p).ln_1p()).clamp(-LOGIT_RANGE, LOGIT_RANGE)
}

/// The range ±R shared by every log-odds panel of one figure: the smallest
/// even whole number of at least 4 that holds the log-odds of every curve
/// point's prediction, outcome frequency and band end in `curves`, at most
/// [`LOGIT_RANGE`]. Values of exactly 0 or 1 (log-odds ∓∞) do not widen it:
/// they are drawn as edge marks.
pub fn log_odds_range<'a>(curves: impl IntoIterator<Item = &'a Curve>) -> f64 {
    let mut m: f64 = 4.0;
    for c in curves {
        for p in &c.points {
            for v in [p.x, p.y, p.low, p.high] {
                if v > 0.0 && v < 1.0 {
                    m = m.max(logit(v).abs());
                }
            }
        }
    }
    ((m / 2.0 - 1e-9).ceil() * 2.0).clamp(4.0, LOGIT_RANGE)
}

/// Whether a probability has infinite log-odds: `Some(false)` for 0 (−∞),
/// `Some(true)` for 1 (+∞), `None` in between.
fn infinite(v: f64) -> Option<bool> {
    if v <= 0.0 {
        Some(false)
    } else if v >= 1.0 {
        Some(true)
    } else {
        None
    }
}

/// An open triangle in the series' colour on a panel edge at (x, y),
/// pointing outward along (dx, dy) (a unit step along one axis): the mark of
/// a value at infinite log-odds.
fn edge_mark(x: f64, y: f64, dx: f64, dy: f64, colour: &str) -> String {
    let (tip, base, half) = (4.5, 3.0, 3.5);
    let (nx, ny) = (-dy, dx);
    format!(
        "<path class=\"inf\" d=\"M{} {}L{} {}L{} {}Z\" fill=\"#fff\" stroke=\"{colour}\" stroke-width=\"1.2\"/>",
        f(x + dx * tip),
        f(y + dy * tip),
        f(x - dx * base + nx * half),
        f(y - dy * base + ny * half),
        f(x - dx * base - nx * half),
        f(y - dy * base - ny * half)
    )
}

/// One reliability panel: curve, band and diagonal in a square; with
/// `log_odds = Some(r)` both axes are on the log-odds scale over [−r, r], and
/// curve points at an outcome frequency (or prediction) of exactly 0 or 1
/// are drawn as [`edge_mark`]s with no line to them. Returns the SVG
/// fragment.
fn reliability_panel(
    c: &crate::metrics::reliability::Curve,
    st: Style,
    x0: f64,
    y0: f64,
    side: f64,
    log_odds: Option<f64>,
) -> String {
    let r = log_odds.unwrap_or(1.0);
    let lo_scale = log_odds.is_some();
    let tr = |v: f64| if lo_scale { logit(v).clamp(-r, r) } else { v };
    let (lo, hi) = if lo_scale { (-r, r) } else { (0.0, 1.0) };
    let px = |v: f64| x0 + (tr(v) - lo) / (hi - lo) * side;
    let py = |v: f64| y0 + side - (tr(v) - lo) / (hi - lo) * side;
    let mut s = format!(
        "<g class=\"{}\"><rect x=\"{}\" y=\"{}\" width=\"{side}\" height=\"{side}\" fill=\"#fcfcfc\" stroke=\"#bbb\"/>",
        if lo_scale { "panel-lo" } else { "panel-p" },
        f(x0),
        f(y0)
    );
    // Ticks: (position on the panel's own scale, label).
    let tick_values: Vec<(f64, String)> = if lo_scale {
        let step = if r > 6.0 { 4.0 } else { 2.0 };
        let mut v = Vec::new();
        let mut t = -(r / step).floor() * step;
        while t <= r + 1e-9 {
            v.push((t, tick_label(t, step)));
            t += step;
        }
        v
    } else {
        [0.0, 0.5, 1.0]
            .iter()
            .map(|&t| (t, format!("{t}")))
            .collect()
    };
    let at = |t: f64| (t - lo) / (hi - lo) * side;
    for (t, label) in &tick_values {
        s.push_str(&format!(
            "<text x=\"{}\" y=\"{}\" class=\"tm\">{label}</text>",
            f(x0 + at(*t)),
            f(y0 + side + 11.0)
        ));
        // The bottom-left corner is labelled once, by the horizontal axis.
        if (t - lo).abs() > 1e-9 {
            s.push_str(&format!(
                "<text x=\"{}\" y=\"{}\" class=\"te\">{label}</text>",
                f(x0 - 3.0),
                f(y0 + side - at(*t) + 2.5)
            ));
        }
    }
    // Diagonal.
    s.push_str(&format!(
        "<line x1=\"{}\" y1=\"{}\" x2=\"{}\" y2=\"{}\" stroke=\"#999\" stroke-dasharray=\"3 2\"/>",
        f(x0),
        f(y0 + side),
        f(x0 + side),
        f(y0)
    ));
    let pts: Vec<_> = c
        .points
        .iter()
        .filter(|p| p.low.is_finite() && p.high.is_finite())
        .collect();
    if !pts.is_empty() {
        let band = point_list(
            pts.iter()
                .map(|p| (px(p.x), py(p.high)))
                .chain(pts.iter().rev().map(|p| (px(p.x), py(p.low)))),
        );
        s.push_str(&format!(
            "<polygon points=\"{band}\" fill=\"#8a8a8a\" fill-opacity=\"0.25\"/>"
        ));
    }
    // The curve: runs of finite points as lines; on the log-odds scale the
    // points at ∓∞ break the line and get an edge mark each.
    let finite = |p: &&crate::metrics::reliability::CurvePoint| {
        !lo_scale || (infinite(p.x).is_none() && infinite(p.y).is_none())
    };
    let mut runs: Vec<Vec<(f64, f64)>> = vec![Vec::new()];
    let mut marks: Vec<String> = Vec::new();
    for p in &c.points {
        if finite(&p) {
            runs.last_mut().expect("a run").push((px(p.x), py(p.y)));
            continue;
        }
        if !runs.last().expect("a run").is_empty() {
            runs.push(Vec::new());
        }
        let m = match (infinite(p.y), infinite(p.x)) {
            (Some(up), _) => edge_mark(
                px(p.x),
                if up { y0 } else { y0 + side },
                0.0,
                if up { -1.0 } else { 1.0 },
                st.colour,
            ),
            (None, Some(right)) => edge_mark(
                if right { x0 + side } else { x0 },
                py(p.y),
                if right { 1.0 } else { -1.0 },
                0.0,
                st.colour,
            ),
            (None, None) => unreachable!("a point off the finite scale"),
        };
        if !marks.contains(&m) {
            marks.push(m);
        }
    }
    for run in runs.iter().filter(|r| !r.is_empty()) {
        if run.len() == 1 {
            s.push_str(&format!(
                "<circle cx=\"{}\" cy=\"{}\" r=\"1.6\" fill=\"{}\"/>",
                f(run[0].0),
                f(run[0].1),
                st.colour
            ));
        } else {
            s.push_str(&format!(
                "<polyline points=\"{}\" fill=\"none\" stroke=\"{}\" stroke-width=\"1.8\"{}/>",
                point_list(run.iter().copied()),
                st.colour,
                dash(st)
            ));
        }
    }
    for m in &marks {
        s.push_str(m);
    }
    // Histogram beneath.
    let hist = if lo_scale { &c.hist_logit } else { &c.hist_p };
    let bins = hist.len().max(1);
    let top = hist.iter().copied().max().unwrap_or(0).max(1) as f64;
    let (hy, hh) = (y0 + side + 13.0, 22.0);
    let mut d = String::new();
    for (b, &n) in hist.iter().enumerate() {
        if n == 0 {
            continue;
        }
        let (bl, bh) = if lo_scale {
            let l = b as f64 - LOGIT_RANGE;
            (l.max(-r), (l + 1.0).min(r))
        } else {
            (b as f64 / bins as f64, (b + 1) as f64 / bins as f64)
        };
        if bh <= bl {
            continue;
        }
        let xa = x0 + (bl - lo) / (hi - lo) * side;
        let xb = x0 + (bh - lo) / (hi - lo) * side;
        let hgt = (n as f64 / top).sqrt() * hh;
        d.push_str(&format!(
            "M{} {}h{}v{}h{}Z",
            f(xa),
            f(hy + hh),
            f(xb - xa),
            f(-hgt),
            f(xa - xb)
        ));
    }
    s.push_str(&format!(
        "<path d=\"{d}\" fill=\"{}\" fill-opacity=\"0.55\"/></g>",
        st.colour
    ));
    s
}

/// The reliability figure of one task: rows = series (uncalibrated scores and
/// methods), columns = calibration sizes, each with a probability panel and a
/// log-odds panel; `confidence` is the level of the report's intervals.
/// `None` when the folder has no curves for the task.
pub fn reliability_figure(
    a: &Analysis,
    task: &str,
    curves: &[CurveRecord],
    confidence: f64,
) -> Option<String> {
    let mine: Vec<&CurveRecord> = curves.iter().filter(|c| c.task == task).collect();
    let first = mine.first()?;
    let heading = format!(
        "{}: reliability on the test set ({} rows), repeat {}",
        task, first.curve.test_rows, first.repeat
    );
    Some(reliability_grid(
        task,
        &heading,
        &mine,
        |m| style_of(a, m),
        |n| format!("calibration size n = {n}"),
        confidence,
    ))
}

/// A level as a percentage with the decimals it needs (95%, 99.5%).
fn percent(level: f64) -> String {
    let v = (level * 1000.0).round() / 10.0;
    if v == v.trunc() {
        format!("{v:.0}%")
    } else {
        format!("{v:.1}%")
    }
}

/// The reliability grid behind [`reliability_figure`] (also drawn by
/// `plumbline diagnose`): rows = series in order of first appearance,
/// columns = the records' `size` values, titled by `column`; `heading` is
/// plain text (escaped and wrapped here). `table_level` is the confidence
/// level of the intervals the figure goes with; the caption says when the
/// bands were drawn at another. Every log-odds panel shares one range
/// ([`log_odds_range`]), stated in the caption; the left margin holds the
/// longest series name and the tick labels, and the canvas ends where the
/// last column's content does.
pub fn reliability_grid(
    task: &str,
    heading: &str,
    mine: &[&CurveRecord],
    style: impl Fn(&str) -> Style,
    column: impl Fn(usize) -> String,
    table_level: f64,
) -> String {
    let mut sizes: Vec<usize> = mine.iter().map(|c| c.size).collect();
    sizes.sort_unstable();
    sizes.dedup();
    let mut series: Vec<&str> = Vec::new();
    for c in mine {
        if !series.contains(&c.curve.method.as_str()) {
            series.push(&c.curve.method);
        }
    }
    let range = log_odds_range(mine.iter().map(|c| &c.curve));
    let side = 120.0;
    let gap = 22.0;
    let cell_w = 2.0 * side + 70.0;
    let row_h = side + 72.0;
    // Left margin: the series' key (bold 12 px name and marker), a gap, and
    // the widest tick label (8 px).
    let key_w = series
        .iter()
        .map(|m| text_width(m, 12.0))
        .fold(0.0f64, f64::max);
    let tick_w = text_width(&tick_label(-range, 2.0), 8.0).max(text_width("0.5", 8.0));
    let key_end_gap = 3.0 + tick_w + 17.0;
    let ml = (10.0 + key_w + key_end_gap).ceil();
    let terms = |c: &CurveRecord| {
        (
            format!(
                "Brier {:.4} = MCB {:.4} − DSC {:.4} + UNC {:.4}",
                c.curve.brier, c.curve.mcb, c.curve.dsc, c.curve.unc
            ),
            format!(
                "{} of {} curve points outside the band",
                c.curve.outside,
                c.curve.points.len()
            ),
        )
    };
    // The last column ends with its panels or its widest line of text.
    let last_size = *sizes.last().expect("at least one record");
    let last_w = mine
        .iter()
        .filter(|c| c.size == last_size)
        .flat_map(|c| {
            let (a, b) = terms(c);
            [text_width(&a, 9.0), text_width(&b, 9.0)]
        })
        .fold(2.0 * side + gap, f64::max);
    let w = (ml + (sizes.len() - 1) as f64 * cell_w + last_w + 10.0).ceil();
    let first = mine[0];
    let band_level = first.curve.level;
    let band_note = if (band_level - table_level).abs() < 1e-9 {
        format!(
            "grey: {} consistency band, the level of the intervals ({} label draws under calibration)",
            percent(band_level),
            first.curve.draws
        )
    } else {
        format!(
            "grey: {} consistency band ({} label draws under calibration; the level was set for the bands, the intervals use {})",
            percent(band_level),
            first.curve.draws,
            percent(table_level)
        )
    };
    let mut notes = vec![
        format!("line: CORP curve (isotonic fit of outcome on prediction); {band_note}"),
        format!(
            "left panel: probability scale; right panel: log-odds scale (tails), every log-odds panel on ±{0:.0} (the smallest even range of at least ±4 holding every curve and band value of the figure, at most ±{1:.0}); bars: predictions (square-root height)",
            range, LOGIT_RANGE
        ),
    ];
    let points = || mine.iter().flat_map(|c| c.curve.points.iter());
    if points().any(|p| infinite(p.y).is_some()) {
        notes.push("open triangles on a log-odds panel's edge, pointing out, no line to them: bins where every row was negative or positive (outcome log-odds −∞ at the bottom, +∞ at the top)".to_string());
    }
    if points().any(|p| infinite(p.y).is_none() && infinite(p.x).is_some()) {
        notes.push("open triangles on a log-odds panel's left or right edge: predictions of exactly 0 or 1 (log-odds −∞ or +∞)".to_string());
    }
    let mut s = String::new();
    let last = write_heading(&mut s, heading, &notes, w);
    let mt = last + 30.0;
    let h = mt + series.len() as f64 * row_h + 6.0;
    s = open_svg(w, h, &format!("{task}: reliability diagrams"))
        + "<style>.tm{font-size:8px;fill:#555;text-anchor:middle}.te{font-size:8px;fill:#555;text-anchor:end}</style>\n"
        + &s;
    for (j, &n) in sizes.iter().enumerate() {
        s.push_str(&format!(
            "<text x=\"{}\" y=\"{}\" text-anchor=\"middle\" font-size=\"12\" font-weight=\"bold\">{}</text>\n",
            f(ml + j as f64 * cell_w + side + gap / 2.0),
            f(mt - 6.0),
            esc(&column(n))
        ));
    }
    for (i, m) in series.iter().enumerate() {
        let st = style(m);
        let y0 = mt + i as f64 * row_h + 4.0;
        s.push_str(&key(
            m,
            m,
            st,
            ml - key_end_gap,
            y0 + side / 2.0,
            12.0,
            true,
            true,
        ));
        s.push('\n');
        for (j, &n) in sizes.iter().enumerate() {
            let Some(c) = mine.iter().find(|c| c.size == n && c.curve.method == *m) else {
                continue;
            };
            let x0 = ml + j as f64 * cell_w;
            s.push_str("<g>");
            s.push_str(&reliability_panel(&c.curve, st, x0, y0, side, None));
            s.push_str(&reliability_panel(
                &c.curve,
                st,
                x0 + side + gap,
                y0,
                side,
                Some(range),
            ));
            let (brier, outside) = terms(c);
            s.push_str(&format!(
                "<text x=\"{}\" y=\"{}\" font-size=\"9\">{}</text><text x=\"{}\" y=\"{}\" font-size=\"9\" fill=\"#555\">{}</text>",
                f(x0),
                f(y0 + side + 48.0),
                esc(&brier),
                f(x0),
                f(y0 + side + 59.0),
                esc(&outside)
            ));
            s.push_str("</g>\n");
        }
    }
    s.push_str("</svg>\n");
    s
}

/// Groups of methods whose average ranks lie within `cd` of each other:
/// maximal runs of consecutive methods (in rank order) spanning less than the
/// critical difference, as drawn in Demšar (2006, fig. 1).
pub fn cd_groups(sorted_ranks: &[f64], cd: f64) -> Vec<(usize, usize)> {
    let n = sorted_ranks.len();
    let mut out: Vec<(usize, usize)> = Vec::new();
    for i in 0..n {
        let mut j = i;
        while j + 1 < n && sorted_ranks[j + 1] - sorted_ranks[i] < cd {
            j += 1;
        }
        if j > i && !out.iter().any(|&(a, b)| a <= i && j <= b) {
            out.push((i, j));
        }
    }
    out
}

/// The rank diagram of one metric: one strip per calibration size.
pub fn rank_figure(a: &Analysis, metric: MetricId) -> Option<String> {
    let rows: Vec<_> = a
        .across
        .iter()
        .filter(|r| r.metric == metric)
        .filter_map(|r| r.result.as_ref().ok().map(|x| (r, x)))
        .collect();
    if rows.is_empty() {
        return None;
    }
    let k = rows[0].0.methods.len();
    let half = k.div_ceil(2);
    // The left margin holds the longest "method rank" label (and the size
    // labels above the axis); the right one only what is drawn there.
    let longest = rows[0]
        .0
        .methods
        .iter()
        .map(|m| text_width(&format!("{m} {:.2}", k as f64), 11.0))
        .fold(0.0f64, f64::max);
    let ml = (longest + 24.0).max(230.0).ceil();
    let aw = 440.0;
    let px_of = |rank: f64| ml + (rank - 1.0) / (k as f64 - 1.0).max(1.0) * aw;
    // Methods by average rank, best first; the better half is labelled
    // left of the axis, the rest right of it.
    let order_of = |x: &crate::stats::across::AcrossTasks| {
        let mut order: Vec<usize> = (0..k).collect();
        order.sort_by(|&i, &j| x.friedman.avg_ranks[i].total_cmp(&x.friedman.avg_ranks[j]));
        order
    };
    // Right of the axis only what is drawn there: the labels of the right
    // half (12 px out) and the critical-difference label, then 10 px.
    let right = rows
        .iter()
        .flat_map(|(r, x)| {
            let labels = order_of(x).into_iter().skip(half).map(|mi| {
                let label = format!("{} {:.2}", r.methods[mi], x.friedman.avg_ranks[mi]);
                ml + aw + 12.0 + text_width(&label, 11.0)
            });
            let cd = x.cd_05.map(|cd| {
                let end = (1.0 + cd).min(k as f64);
                px_of(end) + 4.0 + text_width(&cd_label(cd, k), 9.0)
            });
            labels.chain(cd).collect::<Vec<_>>()
        })
        .fold(ml + aw, f64::max);
    let w = (right + 10.0).ceil();
    let strip = 58.0 + 15.0 * half as f64;
    let mut s = String::new();
    let last = write_heading(
        &mut s,
        &format!("Average rank of mean {metric} across tasks (1 = best)"),
        &[
            "thick bars join methods whose average ranks differ by less than the Nemenyi critical difference (CD, α = 0.05)".to_string(),
            "tasks counted as independent (tasks that share a dataset are not): a picture of the field; the decision rests on the dataset-level test".to_string(),
        ],
        w,
    );
    let mt = last + 16.0;
    // Each strip ends some 13 px below its lowest label: the last one's end
    // is the bottom margin.
    let h = mt + strip * rows.len() as f64;
    s = open_svg(
        w,
        h,
        &format!("average ranks by calibration size, {metric}"),
    ) + &s;
    for (ri, (r, x)) in rows.iter().enumerate() {
        let y0 = mt + ri as f64 * strip;
        let order = order_of(x);
        let px = px_of;
        let axis_y = y0 + 28.0;
        s.push_str(&format!(
            "<text x=\"10\" y=\"{}\" font-size=\"12\" font-weight=\"bold\">n = {} ({} tasks)</text>\n",
            f(axis_y - 8.0),
            r.size,
            r.tasks.len()
        ));
        s.push_str(&format!(
            "<line x1=\"{}\" x2=\"{}\" y1=\"{}\" y2=\"{}\" stroke=\"#333\"/>\n",
            f(ml),
            f(ml + aw),
            f(axis_y),
            f(axis_y)
        ));
        for t in 1..=k {
            s.push_str(&format!(
                "<line x1=\"{0}\" x2=\"{0}\" y1=\"{1}\" y2=\"{2}\" stroke=\"#333\"/><text x=\"{0}\" y=\"{3}\" text-anchor=\"middle\" font-size=\"9\">{t}</text>\n",
                f(px(t as f64)),
                f(axis_y - 4.0),
                f(axis_y),
                f(axis_y - 7.0)
            ));
        }
        if let Some(cd) = x.cd_05 {
            let end = (1.0 + cd).min(k as f64);
            s.push_str(&format!(
                "<line x1=\"{}\" x2=\"{}\" y1=\"{}\" y2=\"{}\" stroke=\"#B22222\" stroke-width=\"2\"/><text x=\"{}\" y=\"{}\" font-size=\"9\" fill=\"#B22222\">{}</text>\n",
                f(px(1.0)),
                f(px(end)),
                f(axis_y - 21.0),
                f(axis_y - 21.0),
                f(px(end) + 4.0),
                f(axis_y - 18.0),
                cd_label(cd, k)
            ));
            let sorted: Vec<f64> = order.iter().map(|&i| x.friedman.avg_ranks[i]).collect();
            for (g, &(i, j)) in cd_groups(&sorted, cd).iter().enumerate() {
                let yy = axis_y + 6.0 + 4.0 * (g % 4) as f64;
                s.push_str(&format!(
                    "<line x1=\"{}\" x2=\"{}\" y1=\"{}\" y2=\"{}\" stroke=\"#222\" stroke-width=\"3\"/>\n",
                    f(px(sorted[i]) - 3.0),
                    f(px(sorted[j]) + 3.0),
                    f(yy),
                    f(yy)
                ));
            }
        }
        for (pos, &mi) in order.iter().enumerate() {
            let m = &r.methods[mi];
            let st = style_of(a, m);
            let rank = x.friedman.avg_ranks[mi];
            let xr = px(rank);
            let left = pos < half;
            let line_y = axis_y + 26.0 + 15.0 * if left { pos } else { k - 1 - pos } as f64;
            let xt = if left { ml - 8.0 } else { ml + aw + 8.0 };
            s.push_str(&format!(
                "<g class=\"key\" data-method=\"{}\"><path d=\"M{} {}V{}H{}\" fill=\"none\" stroke=\"{}\" stroke-width=\"1.2\"/>{}<text x=\"{}\" y=\"{}\" text-anchor=\"{}\" fill=\"{}\">{} {rank:.2}</text></g>\n",
                esc(m),
                f(xr),
                f(axis_y),
                f(line_y),
                f(xt),
                st.colour,
                marker(st.marker, xr, axis_y, 3.0, st.colour),
                f(if left { xt - 4.0 } else { xt + 4.0 }),
                f(line_y + 4.0),
                if left { "end" } else { "start" },
                st.colour,
                esc(m)
            ));
        }
    }
    s.push_str("</svg>\n");
    Some(s)
}

/// The label of the critical-difference bar of a rank diagram of `k` methods.
fn cd_label(cd: f64, k: usize) -> String {
    let wider = if 1.0 + cd > k as f64 {
        " (wider than the axis)"
    } else {
        ""
    };
    format!("CD {cd:.2}{wider}")
}

/// Sequential blues for sizes on a log scale (light = small).
fn size_colour(frac: f64) -> String {
    let (a, b) = ((222.0, 235.0, 247.0), (8.0, 48.0, 107.0));
    let t = frac.clamp(0.0, 1.0);
    format!(
        "#{:02x}{:02x}{:02x}",
        (a.0 + (b.0 - a.0) * t) as u8,
        (a.1 + (b.1 - a.1) * t) as u8,
        (a.2 + (b.2 - a.2) * t) as u8
    )
}

/// Cell width and row height of the threshold chart.
const CELL_W: f64 = 50.0;
const ROW_H: f64 = 15.0;
/// Width and height of a swatch in the threshold chart's key.
const SWATCH_W: f64 = 36.0;
const SWATCH_H: f64 = 13.0;
/// The title of the threshold chart's cell key.
const COLOUR_TITLE: &str = "cell: size from which better";
/// The cells that hold a symbol: (fill, text, ink, meaning).
const SYMBOLS: [(&str, &str, &str, &str); 2] = [
    ("#f2f2f2", "–", "#666", "not within the sizes tried"),
    ("#ffffff", "?", "#999", "no result"),
];

/// What the threshold chart of one metric shows, and where its parts sit
/// across.
struct ThresholdChart<'a> {
    rows: Vec<&'a ThresholdRow>,
    /// (flexible, parametric) pairs and tasks in order of first appearance.
    pairs: Vec<(&'a str, &'a str)>,
    tasks: Vec<&'a str>,
    /// Methods of the pairs, in order of first appearance, for the key.
    methods: Vec<&'a str>,
    /// The sizes the cell key shows a swatch for: up to six of those tried.
    swatches: Vec<usize>,
    /// Smallest and largest size tried (at least 1).
    smin: f64,
    smax: f64,
    /// Left edge of the cells.
    ml: f64,
    /// Left edge of the key, right of the cells.
    key_x: f64,
    /// Width of the longest column label.
    longest_pair: f64,
}

impl ThresholdChart<'_> {
    /// Where size `n` sits on the colour scale (log, 0 to 1).
    fn frac(&self, n: usize) -> f64 {
        if self.smax > self.smin {
            ((n as f64).ln() - self.smin.ln()) / (self.smax.ln() - self.smin.ln())
        } else {
            0.5
        }
    }

    /// Fill and ink of a cell for size `n`, with its text.
    fn size_cell(&self, n: usize) -> (String, String, &'static str) {
        let fr = self.frac(n);
        (
            size_colour(fr),
            n.to_string(),
            if fr > 0.5 { "#fff" } else { "#000" },
        )
    }
}

/// The threshold chart of one metric: rows = tasks, columns = pairs.
pub fn threshold_figure(a: &Analysis, metric: MetricId) -> Option<String> {
    let c = threshold_chart(a, metric)?;
    // Room above the cells for the column labels, rotated by 55°.
    let (sin, cos) = (55f64.to_radians().sin(), 55f64.to_radians().cos());
    let w = threshold_width(&c, sin, cos);
    let mut s = String::new();
    let last = write_heading(
        &mut s,
        &format!("From which calibration size a flexible method is reliably better ({metric})"),
        &["cell: smallest size tried from which the flexible method beats the parametric one at every larger size; darker = larger; “–” = not within the sizes tried; “?” = no result".to_string()],
        w,
    );
    let mt = (last + 16.0 + c.longest_pair * sin + 10.0 * cos).ceil();
    let key_top = mt + 14.0 * c.methods.len() as f64 + 8.0;
    let key_bottom = key_top + 14.0 + (SWATCH_H + 2.0) * (c.swatches.len() + SYMBOLS.len()) as f64;
    let h = (mt + (ROW_H * c.tasks.len() as f64).max(key_bottom - mt) + 10.0).ceil();
    s = open_svg(w, h, &format!("data-size thresholds, {metric}"))
        + "<style>.c{stroke:#fff}.v{text-anchor:middle;font-size:9px}</style>\n"
        + &s;
    s.push_str(&pair_labels(a, &c, mt));
    for (i, m) in c.methods.iter().enumerate() {
        s.push_str(&key(
            m,
            m,
            style_of(a, m),
            c.key_x + 10.0,
            mt + 11.0 + 14.0 * i as f64,
            10.0,
            false,
            false,
        ));
        s.push('\n');
    }
    s.push_str(&cell_key(&c, key_top));
    s.push_str(&threshold_cells(&c, mt));
    s.push_str("</svg>\n");
    Some(s)
}

/// The threshold rows of one metric with their pairs, tasks and methods,
/// the sizes tried, and the chart's left margin and key position; `None`
/// without rows.
fn threshold_chart(a: &Analysis, metric: MetricId) -> Option<ThresholdChart<'_>> {
    let rows: Vec<_> = a.thresholds.iter().filter(|t| t.metric == metric).collect();
    if rows.is_empty() {
        return None;
    }
    let mut pairs: Vec<(&str, &str)> = Vec::new();
    let mut tasks: Vec<&str> = Vec::new();
    for t in &rows {
        if !pairs.contains(&(t.flexible.as_str(), t.parametric.as_str())) {
            pairs.push((&t.flexible, &t.parametric));
        }
        if !tasks.contains(&t.task.as_str()) {
            tasks.push(&t.task);
        }
    }
    let all: Vec<usize> = a.sizes.values().flatten().copied().collect();
    let (smin, smax) = (
        all.iter().copied().min().unwrap_or(1).max(1) as f64,
        all.iter().copied().max().unwrap_or(1).max(1) as f64,
    );
    let mut methods: Vec<&str> = Vec::new();
    for (fl, pa) in &pairs {
        for m in [*fl, *pa] {
            if !methods.contains(&m) {
                methods.push(m);
            }
        }
    }
    let longest_task = tasks
        .iter()
        .map(|t| text_width(t, 10.0))
        .fold(0.0f64, f64::max);
    let ml = (longest_task + 16.0).ceil();
    // The key, right of the cells: the methods, then what a cell's colour
    // and symbols mean, with a swatch for up to six of the sizes tried.
    let key_x = ml + CELL_W * pairs.len() as f64 + 24.0;
    let mut tried: Vec<usize> = all;
    tried.sort_unstable();
    tried.dedup();
    let swatches: Vec<usize> = if tried.len() <= 6 {
        tried.clone()
    } else {
        (0..6).map(|i| tried[i * (tried.len() - 1) / 5]).collect()
    };
    let longest_pair = pairs
        .iter()
        .map(|(fl, pa)| text_width(&format!("{fl} vs {pa}"), 10.0))
        .fold(0.0f64, f64::max);
    Some(ThresholdChart {
        rows,
        pairs,
        tasks,
        methods,
        swatches,
        smin,
        smax,
        ml,
        key_x,
        longest_pair,
    })
}

/// The threshold chart's width: 10 px right of the key or the rotated
/// column labels, whichever reaches further.
fn threshold_width(c: &ThresholdChart, sin: f64, cos: f64) -> f64 {
    let key_x = c.key_x;
    let key_right = c
        .methods
        .iter()
        .map(|m| key_x + 10.0 + text_width(m, 10.0))
        .chain([key_x + text_width(COLOUR_TITLE, 10.0)])
        .chain(
            SYMBOLS
                .iter()
                .map(|(.., l)| key_x + SWATCH_W + 6.0 + text_width(l, 10.0)),
        )
        .fold(0.0f64, f64::max);
    let labels_right =
        c.ml + CELL_W * (c.pairs.len() as f64 - 0.5) + c.longest_pair * cos + 10.0 * sin;
    (key_right.max(labels_right) + 10.0).ceil()
}

/// The column labels ("flexible vs parametric", in the methods' colours),
/// rotated above the cells that start at `mt`.
fn pair_labels(a: &Analysis, c: &ThresholdChart, mt: f64) -> String {
    let mut s = String::new();
    for (j, (fl, pa)) in c.pairs.iter().enumerate() {
        let x = c.ml + CELL_W * j as f64 + CELL_W / 2.0;
        s.push_str(&format!(
            "<text transform=\"translate({},{}) rotate(-55)\" font-size=\"10\"><tspan fill=\"{}\">{}</tspan> vs <tspan fill=\"{}\">{}</tspan></text>\n",
            f(x),
            f(mt - 6.0),
            style_of(a, fl).colour,
            esc(fl),
            style_of(a, pa).colour,
            esc(pa)
        ));
    }
    s
}

/// What the cells mean: a swatch per shown size, then the symbol cells with
/// their meaning, from `key_top` down.
fn cell_key(c: &ThresholdChart, key_top: f64) -> String {
    let (key_x, sw, sh) = (c.key_x, SWATCH_W, SWATCH_H);
    let mut s = format!(
        "<g class=\"cell-key\"><text x=\"{}\" y=\"{}\" font-size=\"10\">{COLOUR_TITLE}</text>",
        f(key_x),
        f(key_top + 10.0)
    );
    let swatch = |i: usize, fill: &str, text: &str, ink: &str| {
        let y = key_top + 14.0 + (sh + 2.0) * i as f64;
        format!(
            "<rect x=\"{}\" y=\"{}\" width=\"{sw}\" height=\"{sh}\" fill=\"{fill}\" stroke=\"#ccc\"/><text x=\"{}\" y=\"{}\" fill=\"{ink}\" class=\"v\">{text}</text>",
            f(key_x),
            f(y),
            f(key_x + sw / 2.0),
            f(y + sh - 3.5)
        )
    };
    for (i, &n) in c.swatches.iter().enumerate() {
        let (fill, text, ink) = c.size_cell(n);
        s.push_str(&swatch(i, &fill, &text, ink));
    }
    for (k, (fill, text, ink, label)) in SYMBOLS.iter().enumerate() {
        let i = c.swatches.len() + k;
        s.push_str(&swatch(i, fill, text, ink));
        s.push_str(&format!(
            "<text x=\"{}\" y=\"{}\" font-size=\"10\">{label}</text>",
            f(key_x + sw + 6.0),
            f(key_top + 14.0 + (sh + 2.0) * i as f64 + sh - 3.0)
        ));
    }
    s.push_str("</g>\n");
    s
}

/// A row per task, starting at `mt`: its name, then a cell per pair with the
/// size from which the flexible method is better, `–` or `?`.
fn threshold_cells(c: &ThresholdChart, mt: f64) -> String {
    let (cw, rh) = (CELL_W, ROW_H);
    let (cwi, rhi) = (cw - 1.0, rh - 1.0);
    let mut s = String::new();
    for (i, task) in c.tasks.iter().enumerate() {
        let y = mt + rh * i as f64;
        s.push_str(&format!(
            "<text x=\"{}\" y=\"{}\" text-anchor=\"end\" font-size=\"10\">{}</text>\n",
            f(c.ml - 6.0),
            f(y + rh - 4.0),
            esc(task)
        ));
        for (j, (fl, pa)) in c.pairs.iter().enumerate() {
            let x = c.ml + cw * j as f64;
            let cell = c
                .rows
                .iter()
                .find(|t| t.task == *task && t.flexible == *fl && t.parametric == *pa);
            let (fill, text, ink) = match cell.map(|t| &t.result) {
                Some(Ok(r)) => match r.better_from {
                    Some(n) => c.size_cell(n),
                    None => ("#f2f2f2".to_string(), "–".to_string(), "#666"),
                },
                _ => ("#ffffff".to_string(), "?".to_string(), "#999"),
            };
            s.push_str(&format!(
                "<rect x=\"{}\" y=\"{}\" width=\"{cwi}\" height=\"{rhi}\" fill=\"{fill}\" class=\"c\"/><text x=\"{}\" y=\"{}\" fill=\"{ink}\" class=\"v\">{text}</text>\n",
                f(x),
                f(y),
                f(x + cw / 2.0),
                f(y + rh - 4.0)
            ));
        }
    }
    s
}

/// File name of a task's learning-curve figure.
pub fn figure_name(task: &str, metric: MetricId) -> String {
    format!("figures/{task}--{metric}.svg")
}

/// File name of a task's reliability figure.
pub fn reliability_name(task: &str) -> String {
    format!("figures/{task}--reliability.svg")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ticks_cover_the_range() {
        let (t, step) = ticks(-0.013, 0.041, 6);
        assert_eq!(step, 0.01);
        assert!(t.first().unwrap() >= &-0.013 && t.last().unwrap() <= &0.041);
        assert!(t.contains(&0.0));
        assert!(t.len() >= 3);
    }

    /// Hand-worked: with CD 1.2, ranks 1.0, 1.5, 2.6, 3.0, 4.5 form the runs
    /// {1.0, 1.5}, {1.5, 2.6}, {2.6, 3.0}; 4.5 stands alone; a run inside a
    /// longer one is not drawn again.
    #[test]
    fn cd_groups_are_maximal_runs() {
        assert_eq!(
            cd_groups(&[1.0, 1.5, 2.6, 3.0, 4.5], 1.2),
            vec![(0, 1), (1, 2), (2, 3)]
        );
        assert_eq!(cd_groups(&[1.0, 1.1, 1.2, 3.0], 0.5), vec![(0, 2)]);
    }

    /// The first 40 methods differ in (colour, marker), and so in the
    /// whole (colour, marker, dash) triple.
    #[test]
    fn colour_and_marker_are_distinct_for_forty_methods() {
        let v: Vec<Style> = (0..40).map(style).collect();
        for i in 0..v.len() {
            for j in 0..i {
                assert_ne!(
                    (v[i].colour, v[i].marker),
                    (v[j].colour, v[j].marker),
                    "{i} and {j}"
                );
            }
        }
    }

    /// WCAG 2.1 contrast ratio against white, (1.05) / (L + 0.05), with the
    /// relative luminance L of the sRGB colour as WCAG 2.1 defines it; the
    /// published worked value: #767676 on white is 4.54:1.
    fn contrast_on_white(hex: &str) -> f64 {
        let c = |i: usize| {
            let v = u8::from_str_radix(&hex[i..i + 2], 16).unwrap() as f64 / 255.0;
            if v <= 0.04045 {
                v / 12.92
            } else {
                ((v + 0.055) / 1.055).powf(2.4)
            }
        };
        let l = 0.2126 * c(1) + 0.7152 * c(3) + 0.0722 * c(5);
        1.05 / (l + 0.05)
    }

    /// Every colour reaches the 3:1 contrast WCAG 2.1 (success criterion
    /// 1.4.11) asks of graphical objects, against the white background.
    #[test]
    fn every_colour_has_contrast_on_white() {
        assert!((contrast_on_white("#767676") - 4.54).abs() < 0.01);
        assert!(contrast_on_white("#F0E442") < 3.0);
        for c in COLOURS {
            assert!(contrast_on_white(c) >= 3.0, "{c}: {}", contrast_on_white(c));
        }
    }

    #[test]
    fn tick_labels_use_the_decimals_the_step_needs() {
        assert_eq!(tick_label(0.02, 0.01), "0.02");
        assert_eq!(tick_label(-0.02, 0.01), "−0.02");
        assert_eq!(tick_label(0.0, 0.01), "0.00");
        assert_eq!(tick_label(-0.0, 0.5), "0.0");
        assert_eq!(tick_label(0.075, 0.025), "0.075");
        assert_eq!(tick_label(-4.0, 2.0), "−4");
        assert_eq!(tick_label(0.0004, 0.0002), "0.0004");
        assert_eq!(tick_label(1000.0, 500.0), "1000");
    }

    #[test]
    fn wrap_keeps_lines_within_the_width() {
        let text = "one two three four five six seven eight nine ten";
        let lines = wrap(text, 10.0, 60.0);
        assert_eq!(lines.join(" "), text);
        for l in &lines {
            assert!(text_width(l, 10.0) <= 60.0, "{l}");
        }
    }

    use crate::metrics::reliability::CurvePoint;

    /// A curve through (x, y) points with a band of x ± 0.05 (clipped to
    /// [0, 1]) at each, drawn at band level `level`.
    fn record(method: &str, size: usize, xy: &[(f64, f64)], level: f64) -> CurveRecord {
        let points = xy
            .iter()
            .map(|&(x, y)| CurvePoint {
                x,
                y,
                low: (x - 0.05).max(0.0),
                high: (x + 0.05).min(1.0),
            })
            .collect();
        CurveRecord {
            task: "t".into(),
            size,
            repeat: 0,
            curve: Curve {
                method: method.into(),
                test_rows: 100,
                points,
                hist_p: vec![1; 20],
                hist_logit: vec![1; 24],
                brier: 0.2,
                mcb: 0.01,
                dsc: 0.05,
                unc: 0.24,
                level,
                draws: 200,
                outside: 0,
            },
        }
    }

    fn grid(records: &[CurveRecord], table_level: f64) -> String {
        let refs: Vec<&CurveRecord> = records.iter().collect();
        reliability_grid(
            "t",
            "t: reliability",
            &refs,
            |m| style(if m == "a" { 0 } else { 1 }),
            |n| format!("n = {n}"),
            table_level,
        )
    }

    /// The caption lines of a figure, joined by spaces.
    fn caption(svg: &str) -> String {
        svg.split("fill=\"#444\">")
            .skip(1)
            .map(|t| &t[..t.find('<').unwrap()])
            .collect::<Vec<_>>()
            .join(" ")
    }

    /// The `<g class="panel-lo">` fragments of a figure.
    fn log_odds_panels(svg: &str) -> Vec<&str> {
        svg.split("<g class=\"panel-lo\">")
            .skip(1)
            .map(|p| &p[..p.find("</g>").unwrap()])
            .collect()
    }

    /// The horizontal-axis tick labels of a panel fragment.
    fn x_ticks(panel: &str) -> Vec<&str> {
        panel
            .split("class=\"tm\">")
            .skip(1)
            .map(|t| &t[..t.find('<').unwrap()])
            .collect()
    }

    /// Log-odds 2.2 (p = 0.9) alone would need ±4, log-odds 6.9 (p = 0.999)
    /// ±8: every panel of the figure takes ±8, and the caption says so.
    #[test]
    fn log_odds_panels_share_one_range() {
        let narrow = [(0.2, 0.25), (0.5, 0.5), (0.9, 0.85)];
        let wide = [(0.01, 0.02), (0.5, 0.5), (0.999, 0.99)];
        let recs = [
            record("a", 50, &narrow, 0.95),
            record("b", 50, &wide, 0.95),
            record("a", 400, &narrow, 0.95),
        ];
        assert_eq!(log_odds_range(recs.iter().map(|r| &r.curve)), 8.0);
        assert_eq!(log_odds_range([&recs[0].curve]), 4.0);
        let svg = grid(&recs, 0.95);
        let panels = log_odds_panels(&svg);
        assert_eq!(panels.len(), 3);
        for p in &panels {
            assert_eq!(x_ticks(p), ["−8", "−4", "0", "4", "8"], "{p}");
        }
        assert!(
            caption(&svg).contains("every log-odds panel on ±8"),
            "{svg}"
        );
    }

    /// The range rule: the smallest even whole number of at least 4 holding
    /// every finite value, capped at 12; 0 and 1 do not widen it.
    #[test]
    fn log_odds_range_follows_its_rule() {
        let r = |xy: &[(f64, f64)]| log_odds_range([&record("a", 1, xy, 0.9).curve]);
        // logit(0.985) = 4.18: ±6.
        assert_eq!(r(&[(0.5, 0.985)]), 6.0);
        // logit(0.95) = 2.94, band to 1.0 (clipped): ±4.
        assert_eq!(r(&[(0.95, 0.95)]), 4.0);
        assert_eq!(r(&[(0.0, 0.0), (1.0, 1.0), (0.5, 0.5)]), 4.0);
        assert_eq!(r(&[(1e-9, 0.5)]), 12.0);
    }

    /// Outcome frequencies of exactly 0 and 1 are open edge marks on the
    /// log-odds panel, with no line to them, explained in the caption; the
    /// probability panel draws them as the real values they are there.
    #[test]
    fn infinite_log_odds_are_edge_marks() {
        let xy = [(0.1, 0.0), (0.2, 0.0), (0.4, 0.3), (0.6, 0.7), (0.9, 1.0)];
        let svg = grid(&[record("a", 50, &xy, 0.95)], 0.95);
        let lo = log_odds_panels(&svg)[0];
        assert_eq!(lo.matches("class=\"inf\"").count(), 3, "{lo}");
        assert!(lo.contains("fill=\"#fff\""));
        // One line, through the two finite points only.
        let line: Vec<&str> = lo.split("<polyline points=\"").skip(1).collect();
        assert_eq!(line.len(), 1, "{lo}");
        let pts = &line[0][..line[0].find('"').unwrap()];
        assert_eq!(pts.split(' ').count(), 2, "{pts}");
        assert!(caption(&svg).contains("bins where every row was negative or positive"));
        // The probability panel keeps one line through all five points.
        let p = svg.split("<g class=\"panel-p\">").nth(1).unwrap();
        let p = &p[..p.find("</g>").unwrap()];
        assert!(!p.contains("class=\"inf\""));
        let pts = p.split("<polyline points=\"").nth(1).unwrap();
        assert_eq!(pts[..pts.find('"').unwrap()].split(' ').count(), 5);
        // Without such points there is neither mark nor caption line.
        let svg = grid(&[record("a", 50, &[(0.3, 0.2), (0.7, 0.8)], 0.95)], 0.95);
        assert!(!svg.contains("class=\"inf\""));
        assert!(!caption(&svg).contains("every row was"));
    }

    /// The caption names the band's level, and says so when the intervals
    /// of the report use another.
    #[test]
    fn band_caption_names_its_level() {
        let xy = [(0.3, 0.2), (0.7, 0.8)];
        let c = caption(&grid(&[record("a", 50, &xy, 0.95)], 0.95));
        assert!(
            c.contains("grey: 95% consistency band, the level of the intervals"),
            "{c}"
        );
        let c = caption(&grid(&[record("a", 50, &xy, 0.9)], 0.95));
        assert!(c.contains("grey: 90% consistency band"), "{c}");
        assert!(c.contains("the intervals use 95%"), "{c}");
        assert_eq!(percent(0.995), "99.5%");
    }

    /// A word longer than a line (a file path) is cut after a separator
    /// where the piece has one, else where the line is full; no piece is
    /// wider than the line and nothing is lost.
    #[test]
    fn wrap_cuts_a_word_longer_than_a_line() {
        let path = "results/some-folder/scores_of_the_validation_rows.csv";
        let lines = wrap(&format!("{path}: reliability"), 10.0, 120.0);
        for l in &lines {
            assert!(text_width(l, 10.0) <= 120.0, "{l:?} in {lines:?}");
        }
        assert_eq!(lines.concat(), format!("{path}:reliability"));
        assert_eq!(
            lines,
            [
                "results/some-folder/",
                "scores_of_the_",
                "validation_rows.csv:",
                "reliability"
            ]
        );
        assert_eq!(wrap("abcdefgh", 10.0, 18.0), ["abc", "def", "gh"]);
    }
}
