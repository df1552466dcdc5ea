//! Layout of every figure of the report fixture (`tests/fixtures/report/`):
//! every text lies inside the canvas, no two texts overlap, and no two
//! methods of one figure share both colour and marker.
//!
//! A text's extent is estimated, since no font is embedded: 0.6 × font size
//! per character wide (a generous average for sans-serif faces) and one font
//! size high, of which 0.8 lies above the baseline and 0.2 below; placed by
//! its `text-anchor` (start, middle, end) and turned by its `transform`
//! (`translate(x,y) rotate(a)`, as the threshold chart's column labels are).
//! Two texts must keep [`GAP`] apart: labels that nearly touch (the two axes'
//! labels at a panel's corner) read as one.
//!
//! Every figure (also `plumbline diagnose`'s) must end where its content
//! does: no more than [`EMPTY_MARGIN`] of empty canvas between the bounding
//! box of its drawn content and any edge of the canvas.

use std::collections::BTreeMap;
use std::fs;
use std::path::PathBuf;

use tempfile::TempDir;

mod common;
use common::{bin, copy_dir, files};

/// Width of one character as a share of the font size.
const CHAR_WIDTH: f64 = 0.6;
/// Share of the font size above the baseline (the rest lies below).
const ASCENT: f64 = 0.8;
/// Least distance (px) between two texts' boxes.
const GAP: f64 = 1.5;
/// Most empty canvas (px) between a figure's content and any of its edges.
const EMPTY_MARGIN: f64 = 20.0;

type Pt = (f64, f64);

/// One text element: its content and the four corners of its estimated box.
#[derive(Debug)]
struct TextBox {
    text: String,
    corners: [Pt; 4],
    /// Inside the figure's heading (`<g class="heading">`).
    heading: bool,
}

/// `.name{prop:value;...}` rules of the figure's `<style>` elements.
fn class_rules(doc: &roxmltree::Document) -> BTreeMap<String, BTreeMap<String, String>> {
    let mut out = BTreeMap::new();
    for st in doc.descendants().filter(|n| n.has_tag_name("style")) {
        let css = st.text().unwrap_or("");
        for rule in css.split('}') {
            let Some((sel, body)) = rule.split_once('{') else {
                continue;
            };
            let props = body
                .split(';')
                .filter_map(|p| p.split_once(':'))
                .map(|(k, v)| (k.trim().to_string(), v.trim().to_string()))
                .collect();
            out.insert(sel.trim().trim_start_matches('.').to_string(), props);
        }
    }
    out
}

/// A property of a text: its own attribute, then its class's rule, then the
/// nearest ancestor's attribute.
fn property(
    node: roxmltree::Node,
    rules: &BTreeMap<String, BTreeMap<String, String>>,
    name: &str,
) -> Option<String> {
    if let Some(v) = node.attribute(name) {
        return Some(v.to_string());
    }
    if let Some(class) = node.attribute("class") {
        for c in class.split_whitespace() {
            if let Some(v) = rules.get(c).and_then(|r| r.get(name)) {
                return Some(v.clone());
            }
        }
    }
    node.ancestors()
        .skip(1)
        .find_map(|a| a.attribute(name).map(str::to_string))
}

fn number(s: &str) -> f64 {
    s.trim()
        .trim_end_matches("px")
        .parse()
        .unwrap_or_else(|_| panic!("not a number: {s:?}"))
}

/// `translate(x,y)` and `rotate(a)` (degrees) of a transform attribute,
/// applied as SVG does: rotation first, then translation.
fn transform(t: Option<&str>) -> impl Fn(Pt) -> Pt {
    let (mut tx, mut ty, mut angle) = (0.0, 0.0, 0.0);
    if let Some(t) = t {
        for part in t.split(')').map(str::trim).filter(|p| !p.is_empty()) {
            let (name, args) = part.split_once('(').expect("transform syntax");
            let v: Vec<f64> = args
                .split(|c: char| c == ',' || c.is_whitespace())
                .filter(|a| !a.is_empty())
                .map(number)
                .collect();
            match name.trim() {
                "translate" => {
                    tx = v[0];
                    ty = v.get(1).copied().unwrap_or(0.0);
                }
                "rotate" => angle = v[0].to_radians(),
                other => panic!("transform {other} not understood"),
            }
        }
    }
    move |(x, y)| {
        let (s, c) = angle.sin_cos();
        (x * c - y * s + tx, x * s + y * c + ty)
    }
}

/// Every `<text>` of the figure with its estimated box.
fn text_boxes(doc: &roxmltree::Document) -> Vec<TextBox> {
    let rules = class_rules(doc);
    doc.descendants()
        .filter(|n| n.has_tag_name("text"))
        .map(|n| {
            let text: String = n
                .descendants()
                .filter(|d| d.is_text())
                .filter_map(|d| d.text())
                .collect();
            let fs = number(&property(n, &rules, "font-size").expect("font size"));
            let anchor = property(n, &rules, "text-anchor").unwrap_or_else(|| "start".into());
            let x = n.attribute("x").map(number).unwrap_or(0.0);
            let y = n.attribute("y").map(number).unwrap_or(0.0);
            let w = CHAR_WIDTH * fs * text.chars().count() as f64;
            let left = match anchor.as_str() {
                "start" => x,
                "middle" => x - w / 2.0,
                "end" => x - w,
                other => panic!("text-anchor {other}"),
            };
            let (top, bottom) = (y - ASCENT * fs, y + (1.0 - ASCENT) * fs);
            let t = transform(n.attribute("transform"));
            TextBox {
                text,
                heading: n
                    .ancestors()
                    .any(|a| a.attribute("class") == Some("heading")),
                corners: [
                    t((left, top)),
                    t((left + w, top)),
                    t((left + w, bottom)),
                    t((left, bottom)),
                ],
            }
        })
        .collect()
}

/// Whether two convex quadrilaterals overlap or lie closer than [`GAP`]
/// (the separating-axis test on the edge normals of both).
fn overlap(a: &[Pt; 4], b: &[Pt; 4]) -> bool {
    for quad in [a, b] {
        for i in 0..4 {
            let (p, q) = (quad[i], quad[(i + 1) % 4]);
            let axis = (q.1 - p.1, p.0 - q.0);
            let len = (axis.0 * axis.0 + axis.1 * axis.1).sqrt();
            if len == 0.0 {
                continue;
            }
            let proj = |pts: &[Pt; 4]| {
                pts.iter()
                    .map(|v| (v.0 * axis.0 + v.1 * axis.1) / len)
                    .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), d| {
                        (lo.min(d), hi.max(d))
                    })
            };
            let (a0, a1) = proj(a);
            let (b0, b1) = proj(b);
            if a1 + GAP <= b0 || b1 + GAP <= a0 {
                return false;
            }
        }
    }
    true
}

/// The points of an SVG path's `M`, `L`, `H` and `V` commands, absolute
/// or relative (the commands the figures use; `Z` adds no point).
fn path_points(d: &str) -> Vec<Pt> {
    let mut out = Vec::new();
    let (mut x, mut y) = (0.0, 0.0);
    let mut cmd = 'M';
    let mut nums: Vec<f64> = Vec::new();
    let mut flush = |cmd: char, nums: &mut Vec<f64>, x: &mut f64, y: &mut f64| {
        match cmd {
            'M' | 'L' => {
                for p in nums.chunks(2).filter(|p| p.len() == 2) {
                    (*x, *y) = (p[0], p[1]);
                    out.push((*x, *y));
                }
            }
            'm' | 'l' => {
                for p in nums.chunks(2).filter(|p| p.len() == 2) {
                    (*x, *y) = (*x + p[0], *y + p[1]);
                    out.push((*x, *y));
                }
            }
            'H' | 'h' => {
                for &v in nums.iter() {
                    *x = if cmd == 'h' { *x + v } else { v };
                    out.push((*x, *y));
                }
            }
            'V' | 'v' => {
                for &v in nums.iter() {
                    *y = if cmd == 'v' { *y + v } else { v };
                    out.push((*x, *y));
                }
            }
            'Z' | 'z' => {}
            other => panic!("path command {other} not understood"),
        }
        nums.clear();
    };
    let mut num = String::new();
    for c in d.chars().chain(std::iter::once(' ')) {
        if c.is_ascii_digit() || c == '.' || (c == '-' && num.is_empty()) {
            num.push(c);
            continue;
        }
        if !num.is_empty() {
            nums.push(number(&num));
            num.clear();
        }
        if c == '-' {
            num.push(c);
        } else if c.is_ascii_alphabetic() {
            flush(cmd, &mut nums, &mut x, &mut y);
            cmd = c;
        }
    }
    flush(cmd, &mut nums, &mut x, &mut y);
    out
}

/// Empty canvas on each side of a figure's content, as (top, right,
/// bottom, left) in px: the distance from each canvas edge to the bounding
/// box of every text box, rectangle, line, circle, polyline, polygon and
/// path, leaving out the white background. The heading (`<g
/// class="heading">`) counts on every side but the right, where its lines
/// wrap to whatever width the figure has.
fn empty_margins(svg: &str) -> [f64; 4] {
    let doc = roxmltree::Document::parse(svg).unwrap();
    let root = doc.root_element();
    let (w, h) = (
        number(root.attribute("width").unwrap()),
        number(root.attribute("height").unwrap()),
    );
    // (point, counts on the right)
    let mut pts: Vec<(Pt, bool)> = Vec::new();
    for b in text_boxes(&doc) {
        pts.extend(b.corners.map(|c| (c, !b.heading)));
    }
    let attr = |n: roxmltree::Node, a: &str| n.attribute(a).map(number).unwrap_or(0.0);
    let pairs = |list: &str| -> Vec<Pt> {
        let v: Vec<f64> = list
            .split(|c: char| c == ',' || c.is_whitespace())
            .filter(|a| !a.is_empty())
            .map(number)
            .collect();
        v.chunks(2).map(|p| (p[0], p[1])).collect()
    };
    for n in doc.descendants().filter(|n| n.is_element()) {
        let shape: Vec<Pt> = match n.tag_name().name() {
            "rect" => {
                let (x, y, rw, rh) = (
                    attr(n, "x"),
                    attr(n, "y"),
                    attr(n, "width"),
                    attr(n, "height"),
                );
                if x <= 0.0 && y <= 0.0 && rw >= w && rh >= h {
                    continue; // the background
                }
                vec![(x, y), (x + rw, y + rh)]
            }
            "line" => vec![
                (attr(n, "x1"), attr(n, "y1")),
                (attr(n, "x2"), attr(n, "y2")),
            ],
            "circle" => {
                let (cx, cy, r) = (attr(n, "cx"), attr(n, "cy"), attr(n, "r"));
                vec![(cx - r, cy - r), (cx + r, cy + r)]
            }
            "polyline" | "polygon" => pairs(n.attribute("points").unwrap_or("")),
            "path" => path_points(n.attribute("d").unwrap_or("")),
            _ => continue,
        };
        pts.extend(shape.into_iter().map(|p| (p, true)));
    }
    let top = pts.iter().map(|p| p.0 .1).fold(f64::INFINITY, f64::min);
    let left = pts.iter().map(|p| p.0 .0).fold(f64::INFINITY, f64::min);
    let bottom = pts.iter().map(|p| p.0 .1).fold(f64::NEG_INFINITY, f64::max);
    let right = pts
        .iter()
        .filter(|p| p.1)
        .map(|p| p.0 .0)
        .fold(f64::NEG_INFINITY, f64::max);
    [top, w - right, h - bottom, left]
}

/// The margin faults of a figure: each side with more than
/// [`EMPTY_MARGIN`] of empty canvas.
fn margin_faults(svg: &str) -> Vec<String> {
    let m = empty_margins(svg);
    ["top", "right", "bottom", "left"]
        .iter()
        .zip(m)
        .filter(|(_, e)| *e > EMPTY_MARGIN)
        .map(|(side, e)| format!("{e:.0} px of empty canvas on the {side}"))
        .collect()
}

/// The layout faults of one figure: texts outside the canvas, overlapping
/// texts, methods whose key is drawn in two styles or shares colour and
/// marker with another method's.
fn faults(svg: &str) -> Vec<String> {
    let doc = roxmltree::Document::parse(svg).unwrap();
    let root = doc.root_element();
    let (w, h) = (
        number(root.attribute("width").unwrap()),
        number(root.attribute("height").unwrap()),
    );
    let mut out = Vec::new();
    let boxes = text_boxes(&doc);
    for b in &boxes {
        if b.corners
            .iter()
            .any(|&(x, y)| x < 0.0 || y < 0.0 || x > w || y > h)
        {
            out.push(format!(
                "text {:?} outside the {w}×{h} canvas: {:?}",
                b.text, b.corners
            ));
        }
    }
    for i in 0..boxes.len() {
        for j in 0..i {
            if overlap(&boxes[i].corners, &boxes[j].corners) {
                out.push(format!(
                    "texts {:?} and {:?} overlap or lie closer than {GAP} px",
                    boxes[j].text, boxes[i].text
                ));
            }
        }
    }
    // Method keys: `<g class="key" data-method="...">` holding a marker
    // whose class names its shape (`m-circle`, ...) and whose fill is the
    // method's colour.
    let mut styles: BTreeMap<String, Vec<(String, String)>> = BTreeMap::new();
    for g in doc
        .descendants()
        .filter(|n| n.has_tag_name("g") && n.attribute("class") == Some("key"))
    {
        let method = g.attribute("data-method").expect("key names its method");
        let mk = g
            .descendants()
            .find(|n| n.attribute("class").is_some_and(|c| c.starts_with("m-")))
            .unwrap_or_else(|| panic!("key of {method} without a marker"));
        let style = (
            mk.attribute("fill").unwrap().to_string(),
            mk.attribute("class").unwrap()[2..].to_string(),
        );
        let seen = styles.entry(method.to_string()).or_default();
        if !seen.contains(&style) {
            seen.push(style);
        }
    }
    if styles.is_empty() {
        out.push("no method key".into());
    }
    for (m, s) in &styles {
        if s.len() > 1 {
            out.push(format!("{m} drawn in several styles: {s:?}"));
        }
    }
    let list: Vec<_> = styles.iter().collect();
    for i in 0..list.len() {
        for j in 0..i {
            if list[i].1[0] == list[j].1[0] {
                out.push(format!(
                    "{} and {} share colour and marker {:?}",
                    list[j].0, list[i].0, list[i].1[0]
                ));
            }
        }
    }
    out
}

#[test]
fn every_figure_keeps_its_texts_apart_and_its_methods_distinct() {
    let tmp = TempDir::new().unwrap();
    let dir = tmp.path().join("folder");
    let root = PathBuf::from(env!("CARGO_MANIFEST_DIR"));
    copy_dir(&root.join("tests/fixtures/report/folder"), &dir);
    bin()
        .args(["report", dir.to_str().unwrap()])
        .assert()
        .success();
    let figs = files(&dir.join("figures"));
    // Learning curves and reliability diagrams for three tasks, rank
    // diagrams and threshold charts for log loss and Brier score.
    assert_eq!(figs.len(), 10, "{figs:?}");
    let mut all = Vec::new();
    for f in &figs {
        let svg = fs::read_to_string(dir.join("figures").join(f)).unwrap();
        all.extend(faults(&svg).into_iter().map(|e| format!("{f}: {e}")));
        all.extend(margin_faults(&svg).into_iter().map(|e| format!("{f}: {e}")));
    }
    assert!(all.is_empty(), "{} faults:\n{}", all.len(), all.join("\n"));
}

/// `plumbline diagnose` draws its figure with the same code: on a score
/// file with a long path (a heading wider than the figure), two columns and
/// scores of exactly 0 and 1, its texts stay inside the canvas and apart,
/// and the canvas ends where the content does.
#[test]
fn the_diagnose_figure_keeps_its_texts_inside_and_apart() {
    let tmp = TempDir::new().unwrap();
    let dir = tmp
        .path()
        .join("scores-of-a-model-on-its-held-out-validation-rows");
    fs::create_dir(&dir).unwrap();
    let file = dir.join("predictions_with_labels_for_the_calibration_check.csv");
    let mut csv = String::from("score,label,other\n");
    let mut x = 11u64;
    for i in 0..400 {
        let q = common::uniform(&mut x);
        let y = common::uniform(&mut x) < q;
        // Exact 0 and 1 at the ends: outcome log-odds ∓∞ on the panels.
        let s = match i % 40 {
            0 => 0.0,
            1 => 1.0,
            _ => 1.0 / (1.0 + (-1.8 * (q / (1.0 - q)).ln()).exp()),
        };
        let y = match i % 40 {
            0 => false,
            1 => true,
            _ => y,
        };
        csv.push_str(&format!("{s:.6},{},{q:.6}\n", y as u8));
    }
    fs::write(&file, csv).unwrap();
    let out = tmp.path().join("out");
    bin()
        .arg("diagnose")
        .arg(&file)
        .arg("--out")
        .arg(&out)
        .args(["--bootstrap", "20", "--compare", "other"])
        .assert()
        .success();
    let svg = fs::read_to_string(out.join("reliability.svg")).unwrap();
    let mut all = faults(&svg);
    all.extend(margin_faults(&svg));
    assert!(all.is_empty(), "{} faults:\n{}", all.len(), all.join("\n"));
    assert!(svg.contains("class=\"inf\""), "no edge mark drawn");
    assert!(svg.contains("95% consistency band"), "{svg}");
}

/// The checker itself finds what it looks for: a hand-made figure with a
/// text past the right edge, two texts on top of each other (one of them
/// placed by a rotation), and two methods drawn alike.
#[test]
fn the_checker_finds_planted_faults() {
    let svg = r##"<svg xmlns="http://www.w3.org/2000/svg" width="200" height="100" font-size="10">
<text x="190" y="20">past the edge</text>
<text x="10" y="50">abcdef</text>
<text transform="translate(20,52) rotate(-30)">xyz</text>
<text x="10" y="90" text-anchor="end">left</text>
<text x="100" y="90" text-anchor="end">fine</text>
<text x="160" y="60" font-size="8" text-anchor="end">−8</text>
<text x="163" y="68.5" font-size="8" text-anchor="middle">+8</text>
<g class="key" data-method="a"><circle class="m-circle" cx="1" cy="1" r="1" fill="#332288"/></g>
<g class="key" data-method="b"><circle class="m-circle" cx="1" cy="1" r="1" fill="#332288"/></g>
<g class="key" data-method="c"><rect class="m-square" x="1" y="1" width="1" height="1" fill="#332288"/></g>
</svg>"##;
    let f = faults(svg);
    assert!(
        f.iter().any(|e| e.contains("\"past the edge\" outside")),
        "{f:?}"
    );
    assert!(f.iter().any(|e| e.contains("\"left\" outside")), "{f:?}");
    assert!(
        f.iter()
            .any(|e| e.contains("\"abcdef\" and \"xyz\" overlap")),
        "{f:?}"
    );
    assert!(
        f.iter()
            .any(|e| e.contains("a and b share colour and marker")),
        "{f:?}"
    );
    // Two tick labels at a corner, 0.5 px apart: too close.
    assert!(
        f.iter()
            .any(|e| e.contains("\"−8\" and \"+8\" overlap or lie closer")),
        "{f:?}"
    );
    assert_eq!(f.len(), 5, "{f:?}");
    // A figure with 60 px of canvas right of its last text, heading aside;
    // 12 px above the heading's box (baseline 20, ascent 8), 28 px below the
    // text (baseline 70, 2 px below it) and 10 px left of the heading.
    let wide = r##"<svg xmlns="http://www.w3.org/2000/svg" width="200" height="100" font-size="10">
<rect width="200" height="100" fill="white"/>
<g class="heading"><text x="10" y="20">a heading as wide as the whole figure</text></g>
<rect x="10" y="30" width="70" height="20"/><text x="80" y="70">abcdefghij</text>
</svg>"##;
    let m = empty_margins(wide);
    for (got, want) in m.iter().zip([12.0, 60.0, 28.0, 10.0]) {
        assert!((got - want).abs() < 1e-9, "{m:?}");
    }
    assert_eq!(
        margin_faults(wide),
        [
            "60 px of empty canvas on the right",
            "28 px of empty canvas on the bottom"
        ]
    );
    // Lines, circles, polylines and paths count too: a path's `V` and `H`
    // reach 190 and 95, a circle 5 px from the left edge.
    let shapes = r##"<svg xmlns="http://www.w3.org/2000/svg" width="200" height="100" font-size="10">
<rect width="200" height="100" fill="white"/>
<line x1="30" y1="8" x2="60" y2="8"/><circle cx="8" cy="50" r="3"/>
<polyline points="40,40 50,60"/><path d="M100 50V95H190"/><path d="M60 60h20v-10h-20Z"/>
</svg>"##;
    let m = empty_margins(shapes);
    for (got, want) in m.iter().zip([8.0, 10.0, 5.0, 5.0]) {
        assert!((got - want).abs() < 1e-9, "{m:?}");
    }
}
