//! `carrywright describe`: a short table of what was built, and an SVG of the carry structure
//! (the prefix graph row by row with black and grey cells, or the chain with its blocks,
//! bypasses and buffers). Rust places the shapes; the template prints them.

use super::{render, summary, title};
use crate::arch::prefix::{graph_for, Graph};
use crate::error::Result;
use crate::netlist::Design;
use crate::spec::{Architecture as A, Spec, Style};
use serde::Serialize;
use std::collections::BTreeSet;

/// The human-readable table.
pub fn table(spec: &Spec, design: &Design) -> String {
    let c = summary::counts(design);
    let mut out = format!("{}: {}\n", spec.name, title(spec));
    let row = |out: &mut String, k: &str, v: String| out.push_str(&format!("  {k:<22} {v}\n"));
    row(&mut out, "transistors", c.transistors.to_string());
    row(&mut out, "cells", c.cells.to_string());
    for (k, n) in &c.cells_by_kind {
        row(&mut out, &format!("  {k}"), n.to_string());
    }
    row(
        &mut out,
        "topological depth",
        format!(
            "{} gate stages (structure only, sensitisation ignored: not a delay)",
            c.topological_depth_stages
        ),
    );
    if let Some(a) = &spec.block_auto {
        row(&mut out, "block chosen", a.rule.to_string());
    } else if let Some(rule) = spec.block_rule {
        row(
            &mut out,
            "block chosen",
            format!("{} by {rule}", spec.block),
        );
    }
    if let Some(sizes) = &spec.block_sizes {
        let mut t = itertools::join(sizes, "-");
        if let Some(a) = &spec.block_auto {
            t.push_str(&format!(
                " (the block model's worst {:.1} ps; the best uniform block, {}, {:.1} ps{})",
                a.worst_ps,
                a.best_uniform_block,
                a.best_uniform_ps,
                match a.longest_block {
                    Some(n) => format!("; the keeper check allows {n}-bit blocks"),
                    None => String::new(),
                }
            ));
        }
        row(&mut out, "block sizes", t);
    }
    if !spec.buffers.positions.is_empty() {
        let mut at = itertools::join(&spec.buffers.positions, ",");
        if let Some(a) = &spec.buffers.auto {
            at.push_str(&format!(
                " ({}; the model's cin -> cout {:.1} ps, {} with none{})",
                if a.rule == crate::spec::DEFAULT_DYNAMIC_BUFFERS_RULE {
                    "no buffers key: chosen as buffers: auto, the chain fails the keeper check unbuffered"
                } else {
                    "buffers: auto"
                },
                a.cin_cout_ps,
                match a.unbuffered_ps {
                    Some(x) => format!("{x:.1} ps"),
                    None => "no completion".to_string(),
                },
                match a.longest_segment {
                    Some(n) => format!("; the keeper check allows {n}-bit segments"),
                    None => String::new(),
                }
            ));
        }
        row(&mut out, "buffers at bits", at);
    }
    if let Some(a) = &spec.sizing.auto {
        let z = &spec.sizing;
        let mut knobs = format!(
            "unit_n {} um, pass {}, generate {}, output {}, buffer {}, carry {}",
            z.unit_n, z.pass, z.generate, z.output, z.buffer, z.carry
        );
        if spec.style == Style::Dynamic {
            knobs.push_str(&format!(", precharge {}", z.precharge));
        }
        if !crate::arch::manchester::chain_segments(spec).is_empty() {
            knobs.push_str(&format!(", taper {}", z.taper));
        }
        row(
            &mut out,
            "sizing: auto",
            format!(
                "{knobs}; the engine's worst path {:.1} ps against {:.1} ps for the starting sizes, total width {:.1} um (limit {:.1}), largest input at most {:.2} fF; {} estimates",
                a.worst_ps, a.default_worst_ps, a.width_um, a.width_limit_um, a.input_cap_limit_ff, a.evaluated
            ),
        );
    }
    if spec.sizing.taper > 1.0 {
        // Each distinct segment length once, with its chain cells' drives from the head.
        let mut lengths: Vec<usize> = crate::arch::manchester::chain_segments(spec)
            .iter()
            .map(|&(lo, hi)| hi - lo)
            .collect();
        lengths.sort_unstable();
        lengths.dedup();
        let per: Vec<String> = lengths
            .iter()
            .map(|&n| {
                let drives: Vec<String> =
                    crate::arch::manchester::taper_levels(n, spec.sizing.taper)
                        .iter()
                        .map(|&l| crate::spec::trim_num(crate::cells::TAPER_DRIVES[l as usize]))
                        .collect();
                format!("{n}-bit segment x{}", drives.join(" x"))
            })
            .collect();
        row(
            &mut out,
            "chain taper",
            format!(
                "head/tail {}: pass and generate devices {}",
                spec.sizing.taper,
                per.join("; ")
            ),
        );
    }
    if let Some(p) = &design.prefix {
        row(
            &mut out,
            "prefix cells",
            format!(
                "{} ({} black, {} grey)",
                p.stats.cells, p.stats.black, p.stats.grey
            ),
        );
        row(&mut out, "prefix levels", p.stats.levels.to_string());
        row(
            &mut out,
            "max lateral fan-out",
            p.stats.max_fanout.to_string(),
        );
        row(&mut out, "max net fan-out", p.max_net_fanout.to_string());
        if p.fanout_buffers > 0 {
            row(&mut out, "fan-out buffers", p.fanout_buffers.to_string());
        }
        if p.upsized_cells > 0 {
            row(
                &mut out,
                "sized by fan-out",
                format!("{} cells with 2x or 4x output inverters", p.upsized_cells),
            );
        }
        if let Some(a) = &spec.buffers.auto_fanout {
            row(
                &mut out,
                "buffers: auto",
                format!(
                    "{}; the engine's worst path {:.1} ps, {:.1} ps with no fan-out buffers",
                    match spec.buffers.fanout {
                        Some(f) => format!("buffers above {f} loads"),
                        None => "no fan-out buffers".to_string(),
                    },
                    a.worst_ps,
                    a.unbuffered_ps
                ),
            );
        }
        if let Some(l) = p.lookahead_levels {
            row(&mut out, "lookahead levels", l.to_string());
        }
        out.push_str("  (counts: cin folded into column 0 first; the PG stage, the fold and the sum XORs are not prefix cells)\n");
    }
    out
}

/// Estimated advance of one character in ems (Helvetica or Arial digits and lower case are
/// about 0.5 to 0.56 em, from memory): a box estimated with it holds the real text.
pub const CHAR_EM: f64 = 0.6;
/// The same for bold text.
pub const BOLD_CHAR_EM: f64 = 0.66;

/// Estimated width of a line of text at a font size.
pub fn text_width(text: &str, size: f64, bold: bool) -> f64 {
    let em = if bold { BOLD_CHAR_EM } else { CHAR_EM };
    text.chars().count() as f64 * size * em
}

const MARGIN: f64 = 16.0;
const FONT: f64 = 11.0;
const TITLE_FONT: f64 = 14.0;
/// Lines of the subtitle, the legend and the notes wrap at this width or the drawing's.
const MIN_WRAP: f64 = 620.0;
const INK: &str = "#222222";
const WIRE: &str = "#333333";
const SPAN: &str = "#336699";
const COLUMN: &str = "#bbbbbb";
const BLOCK: &str = "#dde8f3";
const SELECT: &str = "#f3e7c9";
const BUFFER: &str = "#ffcc66";
const BYPASS: &str = "#aa3333";

fn r2(v: f64) -> f64 {
    (v * 100.0).round() / 100.0
}

/// One shape; `kind` picks the SVG element (rect, circle, polygon, polyline).
#[derive(Serialize, Default)]
struct Shape {
    kind: &'static str,
    class: String,
    x: f64,
    y: f64,
    w: f64,
    h: f64,
    rx: f64,
    r: f64,
    points: String,
    fill: &'static str,
    stroke: &'static str,
    width: f64,
    dashed: bool,
    arrow: bool,
    tip: Option<String>,
}

/// A filled shape outlined in the wire colour.
fn outlined(kind: &'static str, fill: &'static str, tip: Option<String>) -> Shape {
    Shape {
        kind,
        fill,
        stroke: WIRE,
        width: 1.0,
        tip,
        ..Default::default()
    }
}

#[derive(Serialize)]
struct Text {
    class: &'static str,
    x: f64,
    y: f64,
    text: String,
    anchor: &'static str,
    size: f64,
    color: &'static str,
    bold: bool,
}

/// The picture being placed: shapes in drawing order, texts on top, and the extent of
/// everything (texts by their estimated width) so the canvas holds it all.
#[derive(Serialize, Default)]
struct Svg {
    title: String,
    width: f64,
    height: f64,
    shapes: Vec<Shape>,
    texts: Vec<Text>,
    #[serde(skip)]
    right: f64,
    #[serde(skip)]
    bottom: f64,
    /// Shapes placed now belong to the legend.
    #[serde(skip)]
    in_legend: bool,
}

/// The symbols a picture uses; each has one legend entry.
#[derive(Clone, Copy)]
enum Sym {
    Pg,
    Black,
    Grey,
    Xor,
    Column,
    Span,
    Block(&'static str),
    Carry,
    Buffer,
    Inverter,
    Bypass,
}

impl Svg {
    fn reach(&mut self, x: f64, y: f64) {
        self.right = self.right.max(x);
        self.bottom = self.bottom.max(y);
    }

    fn class(&self, class: &str) -> String {
        if self.in_legend {
            format!("legend {class}")
        } else {
            class.to_string()
        }
    }

    fn push(&mut self, mut shape: Shape, class: &str) {
        shape.class = self.class(class);
        self.shapes.push(shape);
    }

    #[allow(clippy::too_many_arguments)]
    fn rect(
        &mut self,
        class: &str,
        x: f64,
        y: f64,
        w: f64,
        h: f64,
        rx: f64,
        fill: &'static str,
        tip: Option<String>,
    ) {
        self.reach(x + w, y + h);
        let shape = Shape {
            x: r2(x),
            y: r2(y),
            w: r2(w),
            h: r2(h),
            rx,
            ..outlined("rect", fill, tip)
        };
        self.push(shape, class);
    }

    fn circle(
        &mut self,
        class: &str,
        x: f64,
        y: f64,
        r: f64,
        fill: &'static str,
        tip: Option<String>,
    ) {
        self.reach(x + r, y + r);
        let shape = Shape {
            x: r2(x),
            y: r2(y),
            r,
            ..outlined("circle", fill, tip)
        };
        self.push(shape, class);
    }

    fn points(&mut self, pts: &[(f64, f64)]) -> String {
        for &(x, y) in pts {
            self.reach(x, y);
        }
        itertools::join(
            pts.iter().map(|&(x, y)| format!("{},{}", r2(x), r2(y))),
            " ",
        )
    }

    fn polygon(
        &mut self,
        class: &str,
        pts: &[(f64, f64)],
        fill: &'static str,
        tip: Option<String>,
    ) {
        let points = self.points(pts);
        let shape = Shape {
            points,
            ..outlined("polygon", fill, tip)
        };
        self.push(shape, class);
    }

    /// A wire through the points; `arrow` puts an arrowhead at the last point.
    fn wire(
        &mut self,
        class: &str,
        pts: &[(f64, f64)],
        stroke: &'static str,
        dashed: bool,
        arrow: bool,
    ) {
        let points = self.points(pts);
        let shape = Shape {
            kind: "polyline",
            points,
            stroke,
            width: if dashed { 1.4 } else { 1.2 },
            dashed,
            arrow,
            ..Default::default()
        };
        self.push(shape, class);
    }

    #[allow(clippy::too_many_arguments)]
    fn text(
        &mut self,
        class: &'static str,
        x: f64,
        y: f64,
        text: impl Into<String>,
        anchor: &'static str,
        size: f64,
        bold: bool,
    ) {
        let text = text.into();
        let w = text_width(&text, size, bold);
        let x1 = match anchor {
            "start" => x + w,
            "middle" => x + w / 2.0,
            _ => x,
        };
        self.reach(x1, y + 0.25 * size);
        self.texts.push(Text {
            class,
            x: r2(x),
            y: r2(y),
            text: xml_escape(&text),
            anchor,
            size,
            color: INK,
            bold,
        });
    }

    /// Title, then the subtitle wrapped to `wrap`; returns the baseline below them.
    fn header(&mut self, subtitle: &str, wrap: f64) -> f64 {
        let title = self.title.clone();
        self.text("title", MARGIN, 24.0, title, "start", TITLE_FONT, true);
        let mut y = 24.0;
        for line in wrap_words(subtitle, FONT, wrap) {
            y += 16.0;
            self.text("subtitle", MARGIN, y, line, "start", FONT, false);
        }
        y
    }

    /// Lines of plain text wrapped to `wrap`, from baseline `y`; returns the last baseline.
    fn note(&mut self, text: &str, mut y: f64, wrap: f64) -> f64 {
        for line in wrap_words(text, FONT, wrap) {
            self.text("note", MARGIN, y, line, "start", FONT, false);
            y += 16.0;
        }
        y - 16.0
    }

    /// Draw one symbol centred at (x, y).
    fn symbol(&mut self, sym: Sym, x: f64, y: f64, half: f64, tip: Option<String>) {
        match sym {
            Sym::Pg => self.rect(
                "pg",
                x - half,
                y - half,
                2.0 * half,
                2.0 * half,
                0.0,
                "#ffffff",
                tip,
            ),
            Sym::Black => self.rect(
                "black",
                x - half,
                y - half,
                2.0 * half,
                2.0 * half,
                0.0,
                "#111111",
                tip,
            ),
            Sym::Grey => self.circle("grey", x, y, half, "#9a9a9a", tip),
            Sym::Xor => {
                self.circle("xor", x, y, half, "#ffffff", tip);
                let a = half - 2.0;
                self.wire("mark", &[(x - a, y), (x + a, y)], WIRE, false, false);
                self.wire("mark", &[(x, y - a), (x, y + a)], WIRE, false, false);
            }
            Sym::Column => self.wire(
                "column",
                &[(x, y - half), (x, y + half)],
                COLUMN,
                false,
                false,
            ),
            Sym::Span => self.wire(
                "span",
                &[(x + half, y - half), (x - half, y + half)],
                SPAN,
                false,
                false,
            ),
            Sym::Block(fill) => {
                let class = block_class(fill);
                self.rect(class, x - 9.0, y - 6.0, 18.0, 12.0, 2.0, fill, tip)
            }
            Sym::Carry => self.wire(
                "carry",
                &[(x + half + 3.0, y), (x - half - 3.0, y)],
                WIRE,
                false,
                true,
            ),
            Sym::Buffer | Sym::Inverter => {
                // Pointing left, where the carry goes: base at x + 7, tip at x - 9.
                let inverting = matches!(sym, Sym::Inverter);
                let class = if inverting { "inverter" } else { "buffer" };
                self.polygon(
                    class,
                    &[(x - 9.0, y), (x + 7.0, y - 7.0), (x + 7.0, y + 7.0)],
                    BUFFER,
                    tip,
                );
                if inverting {
                    self.circle("bubble", x - 11.5, y, 2.5, "#ffffff", None);
                }
            }
            Sym::Bypass => self.wire(
                "bypass",
                &[
                    (x + half + 3.0, y - 5.0),
                    (x + half + 3.0, y + 5.0),
                    (x - half - 3.0, y + 5.0),
                    (x - half - 3.0, y - 5.0),
                ],
                BYPASS,
                true,
                true,
            ),
        }
    }

    /// The legend: each symbol drawn and named, wrapped to `wrap`, from baseline `y`; returns
    /// the last baseline.
    fn legend(&mut self, items: &[(Sym, String)], mut y: f64, wrap: f64) -> f64 {
        self.in_legend = true;
        let mut x = MARGIN;
        for (sym, name) in items {
            let w = 30.0 + text_width(name, FONT, false);
            if x > MARGIN && x + w > MARGIN + wrap {
                x = MARGIN;
                y += 22.0;
            }
            self.symbol(*sym, x + 12.0, y - 4.0, 6.0, None);
            self.text("legend", x + 28.0, y, name.clone(), "start", FONT, false);
            x += w + 18.0;
        }
        self.in_legend = false;
        y
    }

    /// Size the canvas to everything placed.
    fn close(&mut self) {
        self.width = (self.right + MARGIN).ceil();
        self.height = (self.bottom + MARGIN).ceil();
    }
}

/// Text lines wrap at the drawing's width, the title's, or `MIN_WRAP`, whichever is widest.
fn wrap_width(s: &Svg, body: f64) -> f64 {
    (body - MARGIN)
        .max(MIN_WRAP)
        .max(text_width(&s.title, TITLE_FONT, true))
}

fn block_class(fill: &str) -> &'static str {
    if fill == SELECT {
        "select-block"
    } else {
        "block"
    }
}

fn xml_escape(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
}

/// Split text into lines no wider than `wrap` (a longer single word keeps its own line).
fn wrap_words(text: &str, size: f64, wrap: f64) -> Vec<String> {
    let mut lines: Vec<String> = vec![];
    let mut line = String::new();
    for word in text.split(' ') {
        let candidate = if line.is_empty() {
            word.to_string()
        } else {
            format!("{line} {word}")
        };
        if !line.is_empty() && text_width(&candidate, size, false) > wrap {
            lines.push(std::mem::take(&mut line));
            line = word.to_string();
        } else {
            line = candidate;
        }
    }
    if !line.is_empty() {
        lines.push(line);
    }
    lines
}

/// The SVG drawing of the carry structure.
pub fn svg(spec: &Spec, design: &Design) -> Result<String> {
    let mut s = Svg {
        title: format!("{}: {}", spec.name, title(spec)),
        ..Default::default()
    };
    if spec.architecture.is_prefix() {
        prefix_drawing(spec, design, &mut s);
    } else {
        chain_drawing(spec, &mut s);
    }
    s.close();
    render("report/structure.svg", &s)
}

/// Where the diagonal of a cell starts: one row above the cell on the column of its lower
/// input, unless that column has moved on to a newer span by then (then at the lower input
/// itself).
fn tap_row(g: &Graph, next_in_column: &[Option<usize>], lo_in: usize, level: usize) -> usize {
    match next_in_column[lo_in] {
        Some(next) if g.nodes[next].level < level => g.nodes[lo_in].level,
        _ => level - 1,
    }
}

fn prefix_drawing(spec: &Spec, design: &Design, s: &mut Svg) {
    let (g, lookahead) = graph_for(spec);
    let n = spec.width;
    let st = g.stats();
    let levels = st.levels;
    let wide = n > 64;
    let (dx, dy, half) = if wide {
        (14.0, 28.0, 5.0)
    } else {
        (22.0, 34.0, 7.0)
    };
    let left = MARGIN + text_width("sum", FONT, false) + 12.0;
    let x = |col: usize| left + (n - 1 - col) as f64 * dx + dx / 2.0;
    let body = left + n as f64 * dx + 40.0;
    let wrap = wrap_width(s, body);

    let family_rows: BTreeSet<usize> = g.cells.iter().map(|c| c.row).collect();
    let mut sub = format!(
        "{} prefix cells ({} black, {} grey) on {} levels, one row per level: each cell sits one level below the later of its two inputs. Max lateral fan-out {}",
        st.cells, st.black, st.grey, levels, st.max_fanout
    );
    if family_rows.len() != levels {
        sub.push_str(&format!(
            " (counted on the {} rows of the family's own schedule, which places some cells later than their inputs allow)",
            family_rows.len()
        ));
    }
    match lookahead {
        Some(2) => sub.push_str("; a second lookahead stage over groups of groups"),
        Some(_) => sub.push_str("; the group carries ripple from group to group"),
        None => {}
    }
    sub.push_str(". Bit 0 on the right.");
    let top = s.header(&sub, wrap);

    let y0 = top + 22.0 + half + 14.0;
    let y = |row: usize| y0 + row as f64 * dy;
    let sum_row = levels + 1;

    // Row names.
    s.text("row", MARGIN, y(0) + 4.0, "PG", "start", FONT, false);
    for r in 1..=levels {
        s.text(
            "row",
            MARGIN,
            y(r) + 4.0,
            r.to_string(),
            "start",
            FONT,
            false,
        );
    }
    s.text("row", MARGIN, y(sum_row) + 4.0, "sum", "start", FONT, false);

    // Each column's wire from the PG row down to the sum row: the span the bit holds.
    for col in 0..n {
        s.wire(
            "column",
            &[(x(col), y(0)), (x(col), y(sum_row))],
            COLUMN,
            false,
            false,
        );
    }
    // The node that replaces each node in its column, if any.
    let mut next_in_column: Vec<Option<usize>> = vec![None; g.nodes.len()];
    for c in &g.cells {
        next_in_column[c.hi_in] = Some(c.out);
    }
    for c in &g.cells {
        let (o, lo) = (g.nodes[c.out], g.nodes[c.lo_in]);
        let tap = tap_row(&g, &next_in_column, c.lo_in, o.level);
        s.wire(
            "span",
            &[(x(lo.hi), y(tap)), (x(o.hi), y(o.level))],
            SPAN,
            false,
            false,
        );
    }
    for col in 0..n {
        let tip = format!(
            "bit {col}: generate/propagate{}",
            if col == 0 { ", cin folded into g0" } else { "" }
        );
        s.symbol(Sym::Pg, x(col), y(0), half, Some(tip));
        if !wide || col % 4 == 0 {
            s.text(
                "bit",
                x(col),
                y(0) - half - 6.0,
                col.to_string(),
                "middle",
                FONT,
                false,
            );
        }
        let tip = if col == 0 {
            "sum s0 = p0 XOR cin".to_string()
        } else {
            format!("sum s{col} = p{col} XOR G({}:0)", col - 1)
        };
        s.symbol(Sym::Xor, x(col), y(sum_row), half, Some(tip));
    }
    s.wire(
        "carry",
        &[(x(0) + dx / 2.0 + 22.0, y(0)), (x(0) + half, y(0))],
        WIRE,
        false,
        true,
    );
    s.text(
        "port",
        x(0) + dx / 2.0 + 25.0,
        y(0) + 4.0,
        "cin",
        "start",
        FONT,
        false,
    );
    for c in &g.cells {
        let o = g.nodes[c.out];
        let kind = if c.grey { "grey" } else { "black" };
        let tip = format!(
            "{kind} cell ({}:{}), level {}, family row {}",
            o.hi, o.lo, o.level, c.row
        );
        let sym = if c.grey { Sym::Grey } else { Sym::Black };
        s.symbol(sym, x(o.hi), y(o.level), half, Some(tip));
    }

    let mut items = vec![(
        Sym::Pg,
        "bit generate and propagate (cin folded into bit 0)".to_string(),
    )];
    if st.black > 0 {
        items.push((Sym::Black, "black cell: G and P of a span".into()));
    }
    if st.grey > 0 {
        items.push((
            Sym::Grey,
            "grey cell: G of a span down to bit 0 (a carry)".into(),
        ));
    }
    items.push((Sym::Xor, "sum XOR".into()));
    items.push((Sym::Column, "a bit's span passed down".into()));
    if st.cells > 0 {
        items.push((Sym::Span, "the lower span fed across".into()));
    }
    items.push((Sym::Carry, "carry in".into()));
    let mut last = s.legend(&items, y(sum_row) + half + 28.0, wrap);
    if let Some(p) = &design.prefix {
        if p.fanout_buffers > 0 {
            last = s.note(
                &format!(
                    "{} fan-out buffers keep every net at {} loads or fewer (not drawn).",
                    p.fanout_buffers, p.max_net_fanout
                ),
                last + 20.0,
                wrap,
            );
        }
    }
    s.reach(0.0, last);
}

/// A block's label: its bits, MSB first.
fn block_label(lo: usize, hi: usize) -> String {
    if hi - lo == 1 {
        lo.to_string()
    } else {
        format!("{}..{}", hi - 1, lo)
    }
}

fn chain_drawing(spec: &Spec, s: &mut Svg) {
    let n = spec.width;
    let arch = spec.architecture;
    let dynamic = spec.style == Style::Dynamic;
    let ranges: Vec<(usize, usize)> = match arch {
        A::Ripple => (0..n).map(|i| (i, i + 1)).collect(),
        _ => spec.block_ranges(),
    };
    let buffered = |p: usize| arch == A::Manchester && spec.buffers.positions.contains(&p);
    let inverting = dynamic || spec.buffers.inverting;
    let (buffer_sym, buffer_name) = if dynamic {
        (
            Sym::Inverter,
            "domino inverter (discharges the next block's start node)",
        )
    } else if inverting {
        (
            Sym::Inverter,
            "inverter (restores the carry and flips its polarity)",
        )
    } else {
        (Sym::Buffer, "buffer: an inverter pair")
    };

    // Bit pitch: wide enough that every block's label fits inside its box.
    let base = if n > 64 { 9.0 } else { 16.0 };
    let pitch = ranges.iter().fold(base, |p: f64, &(lo, hi)| {
        let need = (text_width(&block_label(lo, hi), FONT, false) + 10.0) / (hi - lo) as f64;
        p.max(need.ceil())
    });
    let gap = |p: usize| if buffered(p) { 46.0 } else { 24.0 };
    let cout_w = text_width("cout", FONT, false);
    let first = MARGIN + cout_w + 34.0;
    let body: f64 = ranges
        .iter()
        .map(|&(lo, hi)| (hi - lo) as f64 * pitch)
        .sum::<f64>()
        + ranges.iter().skip(1).map(|&(lo, _)| gap(lo)).sum::<f64>();
    let body = first + body + 34.0 + text_width("cin", FONT, false);
    let wrap = wrap_width(s, body);

    let k = ranges.len();
    let blocks = if k == 1 {
        "1 block".to_string()
    } else {
        format!("{k} blocks")
    };
    let mut sub = match arch {
        A::Ripple if n == 1 => "1 mirror full adder.".to_string(),
        A::Ripple => format!(
            "{n} mirror full adders; the carry ripples from bit 0 on the right to bit {} on the left.",
            n - 1
        ),
        A::Manchester => format!(
            "{blocks} of pass-transistor carry chain; the carry flows from bit 0 on the right towards the MSB on the left."
        ),
        A::CarrySkip => format!(
            "{blocks} of Manchester chain, each with a bypass taken when the whole block propagates; bit 0 on the right."
        ),
        A::CarrySelect if k == 1 => "1 block, rippling from cin.".to_string(),
        A::CarrySelect => format!(
            "{blocks}: the first ripples from cin; each later block computes its sums and carry for both carry-ins and the incoming carry picks. Bit 0 on the right."
        ),
        _ => String::new(),
    };
    if arch == A::Manchester && spec.buffers.positions.is_empty() {
        sub.push_str(" No buffers: the chain runs unbroken.");
    }
    let top = s.header(&sub, wrap);

    let (by, bh) = (top + 24.0, 40.0);
    let mid = by + bh / 2.0;
    // cout on the left.
    s.text("port", MARGIN, mid + 4.0, "cout", "start", FONT, false);
    s.wire(
        "carry",
        &[(first, mid), (MARGIN + cout_w + 4.0, mid)],
        WIRE,
        false,
        true,
    );
    let mut xl = first;
    let mut bypass_used = false;
    for (idx, &(lo, hi)) in ranges.iter().enumerate().rev() {
        let w = (hi - lo) as f64 * pitch;
        let xr = xl + w;
        let select = arch == A::CarrySelect && idx > 0;
        let fill = if select { SELECT } else { BLOCK };
        let tip = match arch {
            A::Ripple => format!("bit {lo}: mirror full adder"),
            _ if select => format!(
                "bits {lo}..{}: sums and carry for carry-in 0 and 1, the incoming carry picks",
                hi - 1
            ),
            _ => format!("bits {lo}..{}", hi - 1),
        };
        s.rect(block_class(fill), xl, by, w, bh, 3.0, fill, Some(tip));
        s.text(
            "block-label",
            (xl + xr) / 2.0,
            mid + 4.0,
            block_label(lo, hi),
            "middle",
            FONT,
            false,
        );
        if arch == A::CarrySkip {
            bypass_used = true;
            let (a, b) = (xr + 7.0, xl - 7.0);
            let low = by + bh + 14.0;
            s.wire(
                "bypass",
                &[(a, mid), (a, low), (b, low), (b, mid + 3.0)],
                BYPASS,
                true,
                true,
            );
        }
        // The boundary to the right of this block: the carry into bit `lo`.
        let g = if idx == 0 { 0.0 } else { gap(lo) };
        if idx > 0 {
            let xg = xr + g;
            if buffered(lo) {
                let xm = xr + g / 2.0;
                let tip = format!("{} between bit {} and bit {lo}", buffer_name, lo - 1);
                s.wire("carry", &[(xg, mid), (xm + 7.0, mid)], WIRE, false, false);
                s.symbol(buffer_sym, xm, mid, 7.0, Some(tip));
                let out = if inverting { xm - 14.0 } else { xm - 9.0 };
                s.wire("carry", &[(out, mid), (xr, mid)], WIRE, false, true);
            } else {
                s.wire("carry", &[(xg, mid), (xr, mid)], WIRE, false, true);
            }
        }
        xl = xr + g;
    }
    // cin on the right.
    s.wire("carry", &[(xl + 30.0, mid), (xl, mid)], WIRE, false, true);
    s.text("port", xl + 34.0, mid + 4.0, "cin", "start", FONT, false);

    let mut items = vec![];
    match arch {
        A::Ripple => items.push((
            Sym::Block(BLOCK),
            "mirror full adder, labelled with its bit".to_string(),
        )),
        A::CarrySelect => {
            items.push((
                Sym::Block(BLOCK),
                "first block: ripples from cin".to_string(),
            ));
            if k > 1 {
                items.push((
                    Sym::Block(SELECT),
                    "both carry-ins computed, multiplexers pick".to_string(),
                ));
            }
        }
        A::CarrySkip => items.push((
            Sym::Block(BLOCK),
            "Manchester block with its block propagate (bits MSB..LSB)".to_string(),
        )),
        _ => items.push((
            Sym::Block(BLOCK),
            "pass-transistor chain block (bits MSB..LSB)".to_string(),
        )),
    }
    items.push((Sym::Carry, "carry, towards the MSB".into()));
    if (0..n).any(buffered) {
        items.push((buffer_sym, buffer_name.into()));
    }
    if bypass_used {
        items.push((
            Sym::Bypass,
            "bypass, taken when the block propagates".into(),
        ));
    }
    let bottom = if bypass_used { by + bh + 14.0 } else { by + bh };
    let last = s.legend(&items, bottom + 30.0, wrap);
    s.reach(0.0, last);
}
