//! `carrywright describe`: a short table of what was built, and an SVG of the carry structure
//! (the prefix graph row by row with black and grey cells, or the chain with its blocks,
//! bypasses and buffers). Rust places the shapes; the template prints them.

use super::{render, summary, title};
use crate::arch::prefix::graph_for;
use crate::error::Result;
use crate::netlist::Design;
use crate::spec::{Architecture as A, Spec, Style};
use serde::Serialize;

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
    row(&mut out, "logic depth (stages)", c.logic_depth.to_string());
    if let Some(rule) = spec.block_rule {
        row(
            &mut out,
            "block chosen",
            format!("{} by {rule}", spec.block),
        );
    }
    if let Some(sizes) = &spec.block_sizes {
        row(&mut out, "block sizes", itertools::join(sizes, "-"));
    }
    if !spec.buffers.positions.is_empty() {
        row(
            &mut out,
            "buffers at bits",
            itertools::join(&spec.buffers.positions, ","),
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
        if let Some(l) = p.lookahead_levels {
            row(&mut out, "lookahead levels", l.to_string());
        }
        out.push_str("  (counts: cin folded into column 0 first; the PG stage, the fold and the sum XORs are not prefix cells)\n");
    }
    out
}

#[derive(Serialize, Default)]
struct Line {
    x1: f64,
    y1: f64,
    x2: f64,
    y2: f64,
    color: &'static str,
    width: f64,
    dashed: bool,
}

#[derive(Serialize)]
struct Rect {
    x: f64,
    y: f64,
    w: f64,
    h: f64,
    rx: f64,
    fill: &'static str,
    stroke: &'static str,
    tip: String,
}

#[derive(Serialize)]
struct Poly {
    points: String,
    fill: &'static str,
    tip: String,
}

#[derive(Serialize)]
struct Text {
    x: f64,
    y: f64,
    text: String,
    anchor: &'static str,
    color: &'static str,
    size: Option<u32>,
}

#[derive(Serialize, Default)]
struct Svg {
    title: String,
    subtitle: String,
    width: f64,
    height: f64,
    lines: Vec<Line>,
    rects: Vec<Rect>,
    polys: Vec<Poly>,
    texts: Vec<Text>,
}

impl Svg {
    fn text(&mut self, x: f64, y: f64, text: impl Into<String>, anchor: &'static str) {
        self.texts.push(Text {
            x,
            y,
            text: text.into(),
            anchor,
            color: "#222222",
            size: None,
        });
    }
    fn line(&mut self, x1: f64, y1: f64, x2: f64, y2: f64, color: &'static str) {
        self.lines.push(Line {
            x1,
            y1,
            x2,
            y2,
            color,
            width: 1.2,
            dashed: false,
        });
    }
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
    render("report/structure.svg", &s)
}

fn prefix_drawing(spec: &Spec, design: &Design, s: &mut Svg) {
    let (g, _) = graph_for(spec);
    let n = spec.width;
    let rows = g.cells.iter().map(|c| c.row).max().unwrap_or(0);
    let dx = if n > 64 { 14.0 } else { 22.0 };
    let dy = 34.0;
    let (left, top) = (40.0, 80.0);
    let x = |col: usize| left + (n - 1 - col) as f64 * dx + dx / 2.0;
    let y = |row: usize| top + row as f64 * dy;
    s.width = (left * 2.0 + n as f64 * dx).max(700.0);
    s.height = top + (rows + 2) as f64 * dy + 60.0;
    let st = g.stats();
    s.subtitle = format!(
        "{} prefix cells ({} black, {} grey), {} levels, max lateral fan-out {}; rows as drawn, MSB left",
        st.cells, st.black, st.grey, st.levels, st.max_fanout
    );
    // Row of the cell that produced each node (leaves: row 0).
    let mut node_row = vec![0usize; g.nodes.len()];
    for c in &g.cells {
        node_row[c.out] = c.row;
    }
    // Column wires from the PG row down to the sum row.
    for col in 0..n {
        s.lines.push(Line {
            x1: x(col),
            y1: y(0),
            x2: x(col),
            y2: y(rows + 1),
            color: "#bbbbbb",
            width: 1.0,
            dashed: false,
        });
    }
    for c in &g.cells {
        let (hi, lo) = (g.nodes[c.hi_in], g.nodes[c.lo_in]);
        let _ = hi;
        s.line(
            x(lo.hi),
            y(node_row[c.lo_in]),
            x(g.nodes[c.out].hi),
            y(c.row),
            "#336699",
        );
    }
    let half = 7.0;
    for col in 0..n {
        s.rects.push(Rect {
            x: x(col) - half,
            y: y(0) - half,
            w: 2.0 * half,
            h: 2.0 * half,
            rx: 0.0,
            fill: "#ffffff",
            stroke: "#333333",
            tip: format!(
                "bit {col}: generate/propagate{}",
                if col == 0 { ", cin folded in" } else { "" }
            ),
        });
        if n <= 64 || col % 4 == 0 {
            s.text(x(col), y(0) - 12.0, col.to_string(), "middle");
        }
        s.polys.push(Poly {
            points: format!(
                "{},{} {},{} {},{}",
                x(col) - half,
                y(rows + 1) - half,
                x(col) + half,
                y(rows + 1) - half,
                x(col),
                y(rows + 1) + half
            ),
            fill: "#ffffff",
            tip: format!("sum s{col}"),
        });
    }
    for c in &g.cells {
        let o = g.nodes[c.out];
        s.rects.push(Rect {
            x: x(o.hi) - half,
            y: y(c.row) - half,
            w: 2.0 * half,
            h: 2.0 * half,
            rx: if c.grey { 7.0 } else { 0.0 },
            fill: if c.grey { "#9a9a9a" } else { "#111111" },
            stroke: "#111111",
            tip: format!(
                "{} cell ({}:{}), row {}, level {}",
                if c.grey { "grey" } else { "black" },
                o.hi,
                o.lo,
                c.row,
                o.level
            ),
        });
    }
    let legend_y = y(rows + 1) + 36.0;
    s.text(
        left,
        legend_y,
        "square: black cell (G and P)   round grey: grey cell (G only)   triangle: sum XOR",
        "start",
    );
    if let Some(p) = &design.prefix {
        if p.fanout_buffers > 0 {
            s.text(
                left,
                legend_y + 16.0,
                format!(
                    "{} fan-out buffers keep every net at {} loads or fewer (not drawn)",
                    p.fanout_buffers, p.max_net_fanout
                ),
                "start",
            );
        }
    }
}

fn chain_drawing(spec: &Spec, s: &mut Svg) {
    let n = spec.width;
    let dx = if n > 64 { 9.0 } else { 16.0 };
    let (left, top) = (70.0, 90.0);
    let x = |bit: usize| left + (n - bit) as f64 * dx;
    s.width = (left * 2.0 + n as f64 * dx + 40.0).max(640.0);
    s.height = 230.0;
    let ranges: Vec<(usize, usize)> = match spec.architecture {
        A::Ripple => (0..n).map(|i| (i, i + 1)).collect(),
        A::CarrySelect => {
            let mut lo = 0;
            spec.block_sizes
                .clone()
                .unwrap_or_default()
                .iter()
                .map(|sz| {
                    lo += sz;
                    (lo - sz, lo)
                })
                .collect()
        }
        _ => crate::arch::manchester::blocks(n, spec.block),
    };
    s.subtitle = match spec.architecture {
        A::Ripple => format!("{n} mirror full adders; the carry ripples right to left (MSB left)"),
        A::Manchester => format!(
            "{} blocks of pass-transistor chain; {}",
            ranges.len(),
            if spec.style == Style::Dynamic {
                "triangles: domino boundaries"
            } else {
                "triangles: restoring buffers"
            }
        ),
        A::CarrySkip => "Manchester blocks; arcs: block-propagate bypasses".into(),
        A::CarrySelect => {
            "first block ripples; later blocks compute both carries, a multiplexer picks".into()
        }
        _ => String::new(),
    };
    let (by, bh) = (top, 44.0);
    for (k, &(lo, hi)) in ranges.iter().enumerate() {
        let (x0, x1) = (x(hi), x(lo));
        let select = spec.architecture == A::CarrySelect && k > 0;
        s.rects.push(Rect {
            x: x0 + 1.0,
            y: by,
            w: x1 - x0 - 2.0,
            h: bh,
            rx: 3.0,
            fill: if select { "#f3e7c9" } else { "#dde8f3" },
            stroke: "#335577",
            tip: format!("bits {lo}..{}", hi - 1),
        });
        if x1 - x0 > 26.0 {
            s.text(
                (x0 + x1) / 2.0,
                by + 18.0,
                format!("{}..{}", hi - 1, lo),
                "middle",
            );
            if select {
                s.text((x0 + x1) / 2.0, by + 34.0, "x2 + mux", "middle");
            }
        }
        if spec.architecture == A::CarrySkip {
            let mid = (x0 + x1) / 2.0;
            s.lines.push(Line {
                x1: x1 - 2.0,
                y1: by + bh + 4.0,
                x2: mid,
                y2: by + bh + 26.0,
                color: "#aa3333",
                width: 1.4,
                dashed: true,
            });
            s.lines.push(Line {
                x1: mid,
                y1: by + bh + 26.0,
                x2: x0 + 2.0,
                y2: by + bh + 4.0,
                color: "#aa3333",
                width: 1.4,
                dashed: true,
            });
        }
    }
    let buffered: Vec<usize> = match spec.architecture {
        A::Manchester => spec.buffers.positions.clone(),
        _ => vec![],
    };
    for p in buffered {
        let bx = x(p);
        s.polys.push(Poly {
            points: format!(
                "{},{} {},{} {},{}",
                bx + 6.0,
                by - 16.0,
                bx - 6.0,
                by - 22.0,
                bx - 6.0,
                by - 10.0
            ),
            fill: "#ffcc66",
            tip: format!("buffer between bit {} and bit {p}", p - 1),
        });
    }
    s.line(x(0) + 20.0, by + bh / 2.0, x(0), by + bh / 2.0, "#333333");
    s.text(x(0) + 22.0, by + bh / 2.0 + 4.0, "cin", "start");
    s.line(x(n), by + bh / 2.0, x(n) - 20.0, by + bh / 2.0, "#333333");
    s.text(x(n) - 22.0, by + bh / 2.0 + 4.0, "cout", "end");
}
