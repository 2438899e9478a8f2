//! Parallel-prefix adders (and block carry-lookahead) over one generic prefix graph.
//!
//! Counting convention (Harris, "A Taxonomy of Parallel Prefix Networks", Asilomar 2003): the
//! network has N columns; column 0 holds g0 with cin already folded in (g0' = g0 + p0·cin,
//! one grey cell before the network); the network produces G(i:0) for every i;
//! s_i = p_i ⊕ G(i−1:0), s_0 = p_0 ⊕ cin, cout = G(N−1:0). Prefix cells count the ∘ operators
//! of the network only. A cell whose output is a final G(i:0) is grey, the others black.
//! Levels: the longest path in cells, each cell placed as early as its inputs allow.
//!
//! A family is a function that lists combines in order: `(col, lo_col)` means "the node
//! now held by column `col` ∘ the node now held by column `lo_col`", so (i:k) ∘ (m:j) with
//! m ≥ k − 1 (overlap is allowed: the operator is idempotent) gives (i:j).

use super::top_module;
use crate::cells::{CellKind, Library};
use crate::netlist::{Design, DesignBuilder, Master, Module, NetId};
use crate::spec::Spec;
use serde::Serialize;
use std::collections::BTreeMap;

#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Family {
    KoggeStone,
    BrentKung,
    Sklansky,
    HanCarlson,
    /// Harris's sparse Ladner-Fischer (l = 1): Sklansky on the odd columns, one more row for
    /// the even ones. (Some authors call the Sklansky network itself "Ladner-Fischer".)
    LadnerFischer,
    /// Knowles [2,1,...,1]: Kogge-Stone with lateral fan-out 2 on the last level.
    Knowles,
}

pub const FAMILIES: &[Family] = &[
    Family::KoggeStone,
    Family::BrentKung,
    Family::Sklansky,
    Family::HanCarlson,
    Family::LadnerFischer,
    Family::Knowles,
];

/// One combine as a family lists it: column `col` takes (its node) ∘ (the node of column
/// `lo`), drawn on row `row` of the network (rows give Harris's fan-out count; levels come
/// from placing each cell as early as its inputs allow).
pub type Op = (usize, usize, usize);

fn log2_ceil(m: usize) -> usize {
    (usize::BITS - (m.max(1) - 1).leading_zeros()) as usize
}

/// Kogge-Stone over `cols` (real column indices, least significant first).
fn kogge_stone(cols: &[usize], row: usize, ops: &mut Vec<Op>) -> usize {
    let m = cols.len();
    let l = log2_ceil(m);
    for lvl in 1..=l {
        let d = 1 << (lvl - 1);
        for i in (d..m).rev() {
            ops.push((cols[i], cols[i - d], row + lvl));
        }
    }
    row + l
}

fn sklansky(cols: &[usize], row: usize, ops: &mut Vec<Op>) -> usize {
    let m = cols.len();
    let l = log2_ceil(m);
    for lvl in 1..=l {
        let sh = lvl - 1;
        for i in (0..m).rev() {
            if (i >> sh) & 1 == 1 {
                ops.push((cols[i], cols[((i >> sh) << sh) - 1], row + lvl));
            }
        }
    }
    row + l
}

fn brent_kung(cols: &[usize], row: usize, ops: &mut Vec<Op>) -> usize {
    let m = cols.len();
    let l = log2_ceil(m);
    for lvl in 1..=l {
        let d = 1 << (lvl - 1);
        for i in 0..m {
            if (i + 1) % (2 * d) == 0 {
                ops.push((cols[i], cols[i - d], row + lvl));
            }
        }
    }
    // The down-sweep, drawn on rows L+1 .. 2L-1 as Harris draws it.
    let mut r = row + l;
    for lvl in (1..l).rev() {
        r += 1;
        let d = 1 << (lvl - 1);
        let mut k = 1;
        while k * 2 * d + d - 1 < m {
            ops.push((cols[k * 2 * d + d - 1], cols[k * 2 * d - 1], r));
            k += 1;
        }
    }
    r
}

/// Pairs on level 1, `inner` over the odd columns, then the even columns on a last level.
fn odd_even(
    cols: &[usize],
    row: usize,
    ops: &mut Vec<Op>,
    inner: fn(&[usize], usize, &mut Vec<Op>) -> usize,
) -> usize {
    let m = cols.len();
    for i in (1..m).step_by(2) {
        ops.push((cols[i], cols[i - 1], row + 1));
    }
    let odd: Vec<usize> = (1..m).step_by(2).map(|i| cols[i]).collect();
    let r = inner(&odd, row + 1, ops) + 1;
    for i in (2..m).step_by(2) {
        ops.push((cols[i], cols[i - 1], r));
    }
    r
}

fn knowles(cols: &[usize], row: usize, ops: &mut Vec<Op>) -> usize {
    let m = cols.len();
    let l = log2_ceil(m);
    for lvl in 1..l {
        let d = 1 << (lvl - 1);
        for i in (d..m).rev() {
            ops.push((cols[i], cols[i - d], row + lvl));
        }
    }
    if l >= 1 {
        let d = 1 << (l - 1);
        for i in (d..m).rev() {
            // Two neighbouring columns share one (odd) lateral input.
            let lo = if d >= 2 { (i - d) | 1 } else { i - d };
            ops.push((cols[i], cols[lo], row + l));
        }
    }
    row + l
}

/// The combines of a family over the given columns, on rows after `row`; returns the last
/// row used.
pub fn family_ops_from(f: Family, cols: &[usize], row: usize, ops: &mut Vec<Op>) -> usize {
    if cols.len() < 2 {
        return row;
    }
    match f {
        Family::KoggeStone => kogge_stone(cols, row, ops),
        Family::BrentKung => brent_kung(cols, row, ops),
        Family::Sklansky => sklansky(cols, row, ops),
        Family::HanCarlson => odd_even(cols, row, ops, kogge_stone),
        Family::LadnerFischer => odd_even(cols, row, ops, sklansky),
        Family::Knowles => knowles(cols, row, ops),
    }
}

/// The combines of a family over the given columns.
pub fn family_ops(f: Family, cols: &[usize]) -> Vec<Op> {
    let mut ops = vec![];
    family_ops_from(f, cols, 0, &mut ops);
    ops
}

/// Consecutive groups of `k` bits (the last may be shorter): (lo, hi) inclusive.
pub fn groups(n: usize, k: usize) -> Vec<(usize, usize)> {
    (0..n)
        .step_by(k)
        .map(|lo| (lo, (lo + k).min(n) - 1))
        .collect()
}

/// Sparse form (block k > 1): each group's generate/propagate by a short serial chain, the
/// family's tree over the groups' last columns, then one grey cell per remaining bit from the
/// group's incoming carry.
pub fn sparse_ops(f: Family, n: usize, k: usize) -> Vec<Op> {
    if k <= 1 {
        let cols: Vec<usize> = (0..n).collect();
        return family_ops(f, &cols);
    }
    let gs = groups(n, k);
    let mut ops = vec![];
    for &(lo, hi) in &gs {
        for x in lo + 1..=hi {
            ops.push((x, x - 1, x - lo));
        }
    }
    let lasts: Vec<usize> = gs.iter().map(|g| g.1).collect();
    let r = family_ops_from(f, &lasts, k - 1, &mut ops) + 1;
    for &(lo, hi) in gs.iter().skip(1) {
        for x in lo..hi {
            ops.push((x, lo - 1, r));
        }
    }
    ops
}

/// Block carry-lookahead: within each `k`-bit group every (i:lo) in parallel (a Sklansky tree
/// inside the group), the group carries rippling from group to group — or, with more than
/// four groups, a second lookahead level over groups of `k` groups — and every remaining bit
/// from its group's incoming carry.
pub fn lookahead_ops(n: usize, k: usize) -> (Vec<Op>, usize) {
    let gs = groups(n, k.max(1));
    let mut ops = vec![];
    let mut row = 0;
    for &(lo, hi) in &gs {
        let cols: Vec<usize> = (lo..=hi).collect();
        row = row.max(sklansky(&cols, 0, &mut ops));
    }
    let lasts: Vec<usize> = gs.iter().map(|g| g.1).collect();
    let two_level = gs.len() > 4 && k >= 2;
    if two_level {
        let supers: Vec<&[usize]> = lasts.chunks(k).collect();
        let base = row;
        for s in &supers {
            row = row.max(sklansky(s, base, &mut ops));
        }
        for w in 1..supers.len() {
            row += 1;
            ops.push((
                *supers[w].last().unwrap(),
                *supers[w - 1].last().unwrap(),
                row,
            ));
        }
        row += 1;
        for w in 1..supers.len() {
            let carry_in = *supers[w - 1].last().unwrap();
            for &c in &supers[w][..supers[w].len() - 1] {
                ops.push((c, carry_in, row));
            }
        }
    } else {
        for m in 1..lasts.len() {
            row += 1;
            ops.push((lasts[m], lasts[m - 1], row));
        }
    }
    row += 1;
    for &(lo, hi) in gs.iter().skip(1) {
        for x in lo..hi {
            ops.push((x, lo - 1, row));
        }
    }
    (ops, if two_level { 2 } else { 1 })
}

/// A node of the graph: the span (hi:lo) of bits whose group G/P it holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Node {
    pub hi: usize,
    pub lo: usize,
    pub level: usize,
}

/// One ∘ cell: node `out` = node `hi_in` ∘ node `lo_in`.
#[derive(Debug, Clone, Copy)]
pub struct Cell {
    pub out: usize,
    pub hi_in: usize,
    pub lo_in: usize,
    pub grey: bool,
    /// Row of the network as the family draws it.
    pub row: usize,
}

/// A prefix graph over `n` columns, built by applying combines in order.
#[derive(Debug, Clone)]
pub struct Graph {
    pub n: usize,
    pub nodes: Vec<Node>,
    pub cells: Vec<Cell>,
    /// Node each column holds now.
    pub current: Vec<usize>,
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Stats {
    pub cells: usize,
    pub black: usize,
    pub grey: usize,
    pub levels: usize,
    /// Largest number of cells one node feeds laterally on one row of the network as the
    /// family draws it, plus one for the wire that continues down its own column (Harris's
    /// count).
    pub max_fanout: usize,
}

impl Graph {
    pub fn new(n: usize) -> Graph {
        Graph {
            n,
            nodes: (0..n)
                .map(|i| Node {
                    hi: i,
                    lo: i,
                    level: 0,
                })
                .collect(),
            cells: vec![],
            current: (0..n).collect(),
        }
    }

    /// Build from a list of combines, refusing a gap between the two spans.
    pub fn build(n: usize, ops: &[Op]) -> Result<Graph, String> {
        let mut g = Graph::new(n);
        for &(c, l, r) in ops {
            g.combine(c, l, r)?;
        }
        Ok(g)
    }

    pub fn combine(&mut self, col: usize, lo_col: usize, row: usize) -> Result<(), String> {
        if col >= self.n || lo_col >= col {
            return Err(format!(
                "combine ({col}, {lo_col}) outside the {}-column graph",
                self.n
            ));
        }
        let (h, l) = (self.current[col], self.current[lo_col]);
        let (hn, ln) = (self.nodes[h], self.nodes[l]);
        if ln.hi + 1 < hn.lo {
            return Err(format!(
                "combine ({}:{}) with ({}:{}) leaves a gap",
                hn.hi, hn.lo, ln.hi, ln.lo
            ));
        }
        if ln.lo >= hn.lo {
            return Err(format!(
                "combine ({}:{}) with ({}:{}) adds nothing",
                hn.hi, hn.lo, ln.hi, ln.lo
            ));
        }
        let node = Node {
            hi: hn.hi,
            lo: ln.lo,
            level: 1 + hn.level.max(ln.level),
        };
        self.nodes.push(node);
        let out = self.nodes.len() - 1;
        self.cells.push(Cell {
            out,
            hi_in: h,
            lo_in: l,
            grey: node.lo == 0,
            row,
        });
        self.current[col] = out;
        Ok(())
    }

    /// Every column ends at (i:0), and each (i:0) is produced exactly once.
    pub fn check_complete(&self) -> Result<(), String> {
        for (i, &c) in self.current.iter().enumerate() {
            let nd = self.nodes[c];
            if nd.hi != i || nd.lo != 0 {
                return Err(format!(
                    "column {i} ends at ({}:{}), not ({i}:0)",
                    nd.hi, nd.lo
                ));
            }
        }
        let mut made = vec![0usize; self.n];
        for c in &self.cells {
            if c.grey {
                made[self.nodes[c.out].hi] += 1;
            }
        }
        for (i, &k) in made.iter().enumerate().skip(1) {
            if k != 1 {
                return Err(format!("({i}:0) is computed {k} times"));
            }
        }
        Ok(())
    }

    pub fn stats(&self) -> Stats {
        let grey = self.cells.iter().filter(|c| c.grey).count();
        let levels = self.nodes.iter().map(|n| n.level).max().unwrap_or(0);
        // (node, row of the using cell) -> lateral uses.
        let mut lateral: BTreeMap<(usize, usize), usize> = BTreeMap::new();
        for c in &self.cells {
            *lateral.entry((c.lo_in, c.row)).or_default() += 1;
        }
        let max_fanout = lateral
            .values()
            .max()
            .map_or(if self.n > 1 { 1 } else { 0 }, |m| m + 1);
        Stats {
            cells: self.cells.len(),
            black: self.cells.len() - grey,
            grey,
            levels,
            max_fanout,
        }
    }
}

/// What the report says about a prefix build.
#[derive(Debug, Clone, Serialize)]
pub struct Report {
    pub family: String,
    /// 1: the dense network; k > 1: the sparse form over k-bit groups.
    pub block: usize,
    #[serde(flatten)]
    pub stats: Stats,
    /// Loads on the busiest net of the built netlist (after fan-out buffers).
    pub max_net_fanout: usize,
    pub fanout_buffers: usize,
    /// Grey and black cells given a 2× or 4× output inverter for their load
    /// ([`size_by_fanout`]).
    pub upsized_cells: usize,
    /// Lookahead only: 1 (groups ripple) or 2 (a second lookahead level).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub lookahead_levels: Option<usize>,
}

/// The graph a spec describes.
pub fn graph_for(spec: &Spec) -> (Graph, Option<usize>) {
    use crate::spec::Architecture as A;
    let (ops, la) = match spec.architecture {
        A::Lookahead => {
            let (o, l) = lookahead_ops(spec.width, spec.block);
            (o, Some(l))
        }
        a => (
            sparse_ops(a.family().expect("a prefix family"), spec.width, spec.block),
            None,
        ),
    };
    let g = Graph::build(spec.width, &ops).expect("the built-in families make valid graphs");
    (g, la)
}

/// Build the netlist of a prefix (or lookahead) adder.
pub fn build(spec: &Spec, lib: &Library) -> (Design, Report) {
    let (graph, la) = graph_for(spec);
    let w = spec.width;
    let mut d = DesignBuilder::new(&spec.name, lib);
    let (mut top, t) = top_module(&spec.name, w, false);
    let pg = d.cell(CellKind::Pg);
    let (grey, black, sum) = (
        d.cell(CellKind::Grey),
        d.cell(CellKind::Black),
        d.cell(CellKind::SumTrue),
    );

    // G and P nets of every node; leaves from the PG cells.
    let mut gnet: Vec<Option<NetId>> = vec![None; graph.nodes.len()];
    let mut pnet: Vec<Option<NetId>> = vec![None; graph.nodes.len()];
    for i in 0..w {
        let (g, p) = (top.net(format!("g{i}")), top.net(format!("p{i}")));
        top.inst_at(i, format!("xpg{i}"), pg, vec![t.a[i], t.b[i], g, p]);
        gnet[i] = Some(g);
        pnet[i] = Some(p);
    }
    let p0 = pnet[0].unwrap();
    // Fold cin into column 0: g0' = g0 + p0·cin.
    let folded = if w == 1 { t.cout } else { top.net("g0_0") };
    top.inst_at(0, "xfold", grey, vec![gnet[0].unwrap(), p0, t.cin, folded]);
    gnet[0] = Some(folded);
    pnet[0] = None;
    for c in &graph.cells {
        let o = graph.nodes[c.out];
        let g = if o.lo == 0 && o.hi == w - 1 {
            t.cout
        } else {
            top.net(format!("g{}_{}", o.hi, o.lo))
        };
        let (gh, ph, gl) = (
            gnet[c.hi_in].unwrap(),
            pnet[c.hi_in].unwrap(),
            gnet[c.lo_in].unwrap(),
        );
        if c.grey {
            top.inst_at(
                o.hi,
                format!("xg{}_{}", o.hi, o.lo),
                grey,
                vec![gh, ph, gl, g],
            );
        } else {
            let p = top.net(format!("p{}_{}", o.hi, o.lo));
            let pl = pnet[c.lo_in].unwrap();
            top.inst_at(
                o.hi,
                format!("xb{}_{}", o.hi, o.lo),
                black,
                vec![gh, ph, gl, pl, g, p],
            );
            pnet[c.out] = Some(p);
        }
        gnet[c.out] = Some(g);
    }
    top.inst_at(0, "xs0", sum, vec![p0, t.cin, t.s[0]]);
    for i in 1..w {
        let carry = gnet[graph.current[i - 1]].unwrap();
        top.inst_at(
            i,
            format!("xs{i}"),
            sum,
            vec![pnet[i].unwrap_or(p0), carry, t.s[i]],
        );
    }
    let buffers = match spec.buffers.fanout {
        Some(f) => insert_fanout_buffers(&mut d, &mut top, f),
        None => 0,
    };
    let upsized = if spec.sizing.fanout {
        size_by_fanout(&mut d, &mut top)
    } else {
        0
    };
    let max_net_fanout = loads(&d, &top).values().map(|v| v.len()).max().unwrap_or(0);
    let report = Report {
        family: spec.architecture.as_str().to_string(),
        block: spec.block,
        stats: graph.stats(),
        max_net_fanout,
        fanout_buffers: buffers,
        upsized_cells: upsized,
        lookahead_levels: la,
    };
    (d.finish(top, false), report)
}

/// Instance input pins reading each net: net -> [(instance, pin)].
fn loads(d: &DesignBuilder, m: &Module) -> BTreeMap<NetId, Vec<(usize, usize)>> {
    let mut out: BTreeMap<NetId, Vec<(usize, usize)>> = BTreeMap::new();
    for (ii, inst) in m.instances.iter().enumerate() {
        if let Master::Cell(k) = inst.master {
            for (pi, (pin, net)) in d.cells[&k].pins.iter().zip(&inst.conns).enumerate() {
                if pin.dir == crate::cells::Dir::In {
                    out.entry(*net).or_default().push((ii, pi));
                }
            }
        }
    }
    out
}

/// Gate width (µm) an input pin of a cell presents: every device its pin drives the gate of.
fn pin_gate_width(cell: &crate::cells::Cell, pin: usize) -> f64 {
    let name = cell.pins[pin].name;
    cell.devices
        .iter()
        .filter(|d| d.g == name)
        .map(|d| d.w)
        .sum()
}

/// Prefix cells sized by their fan-out (logical effort, Sutherland, Sproull & Harris 1999):
/// a grey or black cell is an AOI21 (and a NAND2) followed by an output inverter. For a load
/// of H times the drive-1 inverter's gate width, the two-stage path is fastest with the
/// inverter √(H / g) times wider, g ≈ 2 being the AOI21's logical effort (from memory of the
/// book's tables: (2 + 2) / 3 on the series inputs for a P/N ratio of 2, rounded up); the
/// inputs of the cell, and so the load it puts on its drivers, do not change. The drive is
/// that factor rounded in octaves to 1, 2 or 4 (the cells `GreyX2`, `BlackX4`, ...); loads
/// are the gate widths of every input pin on the cell's output nets (a black cell takes the
/// larger of its G and P loads). Returns the number of cells upsized.
pub fn size_by_fanout(d: &mut DesignBuilder, top: &mut Module) -> usize {
    let load = loads(d, top);
    let mut upsized = 0;
    for ii in 0..top.instances.len() {
        let Master::Cell(k) = top.instances[ii].master else {
            continue;
        };
        let Some((grey, 1)) = k.prefix_drive() else {
            continue;
        };
        let cell = &d.cells[&k];
        // The drive-1 output inverter's gate width: the devices that drive pin g from gn.
        let w1: f64 = cell
            .devices
            .iter()
            .filter(|x| x.d == "g" && x.g == "gn")
            .map(|x| x.w)
            .sum();
        let mut h: f64 = 0.0;
        for (pi, pin) in cell.pins.iter().enumerate() {
            if pin.dir != crate::cells::Dir::Out {
                continue;
            }
            let net = top.instances[ii].conns[pi];
            let w: f64 = load
                .get(&net)
                .into_iter()
                .flatten()
                .map(|&(li, lp)| match top.instances[li].master {
                    Master::Cell(lk) => pin_gate_width(&d.cells[&lk], lp),
                    Master::Module(_) => 0.0,
                })
                .sum();
            h = h.max(w / w1);
        }
        let x = (h / 2.0).sqrt();
        let drive = if x < std::f64::consts::SQRT_2 {
            1
        } else if x < 2.0 * std::f64::consts::SQRT_2 {
            2
        } else {
            4
        };
        if drive > 1 {
            top.instances[ii].master = d.cell(CellKind::prefix_cell(grey, drive));
            upsized += 1;
        }
    }
    upsized
}

/// Give every net with more than `f` loads a tree of buffers, each driving at most `f`.
fn insert_fanout_buffers(d: &mut DesignBuilder, top: &mut Module, f: usize) -> usize {
    let buf = d.cell(CellKind::Buf);
    let mut added = 0;
    loop {
        let over: Vec<(NetId, Vec<(usize, usize)>)> = loads(d, top)
            .into_iter()
            .filter(|(_, l)| l.len() > f)
            .collect();
        if over.is_empty() {
            return added;
        }
        for (net, list) in over {
            let name = top.net_name(net).to_string();
            for (k, chunk) in list.chunks(f).enumerate() {
                let b = top.net(format!("{name}_f{}", added + k));
                for &(ii, pi) in chunk {
                    top.instances[ii].conns[pi] = b;
                }
                // Placed among its loads (the mean of their columns).
                let col = chunk
                    .iter()
                    .map(|&(ii, _)| top.instances[ii].col as usize)
                    .sum::<usize>()
                    / chunk.len();
                top.inst_at(col, format!("xf{}_{}", name, added + k), buf, vec![net, b]);
            }
            added += list.len().div_ceil(f);
        }
    }
}
