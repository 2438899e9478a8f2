//! A switch-level simulator on the model of Bryant (IEEE Trans. Computers C-33(2), 1984):
//! transistors are switches, nodes carry a value (0, 1 or X), signals have strengths, and an
//! isolated node keeps its charge.
//!
//! - **Strengths.** Inputs and supplies are strongest. Each transistor has a strength from its
//!   conductance, W/L (PMOS divided by the technology's hole/electron resistance ratio), with
//!   a series stack through internal nodes (nodes that only join two channels) counted as one
//!   conductance 1/Σ(1/k); conductances are graded in half-octaves. Stored charge is weaker
//!   than any transistor, on two sizes: a node that reaches a gate is larger than one that
//!   only joins channels, so a gate node wins when it shares charge with a stack node.
//! - **Values.** A path's strength is the weakest of its source and its transistors; a node
//!   takes the value of its strongest path. If paths of the strongest level carry 0 and 1 the
//!   node is X (a fight with no winner; in a ratioed stage the pull-down must be graded above
//!   the pull-up it fights). A transistor whose gate is X may or may not conduct: a node is 0
//!   or 1 only if no potential path at least as strong carries the other value.
//! - **Bit-parallel.** Every value is a pair of 64-bit masks (`hi`, `lo`; neither set = X), so
//!   one pass simulates 64 independent vector sequences, one per bit lane.
//! - **Evaluation.** Transistors are grouped into channel-connected components (CCCs: nodes
//!   joined by source/drain, the supplies and inputs being sources, not members). A CCC is
//!   solved for its steady state from its gate values and its stored charge; a changed node
//!   schedules the CCCs it gates. CCCs run in a topological order of the gate graph (a
//!   priority queue), so a CCC normally sees settled inputs: zero-delay, glitch-free.

use super::parse::{Device, Flat, Kind};
use std::cmp::Reverse;

/// A device inside a CCC: gate (global node), channel ends (indices into the CCC's terms).
#[derive(Debug, Clone, Copy)]
struct CDev {
    gate: u32,
    pmos: bool,
    a: u16,
    b: u16,
    level: u8,
}

#[derive(Debug, Clone)]
struct Ccc {
    /// Global ids: the CCC's own nodes first (`n_local`), then the sources its channels reach.
    terms: Vec<u32>,
    n_local: usize,
    /// Charge size per own node: 2 when it reaches a gate, 1 otherwise.
    size: Vec<u8>,
    devs: Vec<CDev>,
    /// Distinct device levels, strongest first.
    levels: Vec<u8>,
    /// A complementary gate's pull-up and pull-down conduction, where the CCC is one.
    gate: Option<Gate>,
}

/// A static complementary gate: one output node (local node 0 after compilation), a PMOS
/// network from vdd and an NMOS network to vss through internal nodes only, every gate driven
/// from outside. Each network is reduced (series: AND, parallel: OR) to a program over its
/// devices' gate values, so a lane where exactly one network may conduct is solved by two
/// conduction functions. Any other lane (a fight, a floating output) falls back to the full
/// solve, so the answer is the same.
#[derive(Debug, Clone)]
struct Gate {
    out: usize,
    up: Vec<Op>,
    down: Vec<Op>,
}

/// A postfix program over device conduction masks.
#[derive(Debug, Clone, Copy)]
enum Op {
    Dev(u16),
    And,
    Or,
}

/// Series-parallel reduction of a network between `from` and `to` (CCC term indices) over
/// `edges` (term, term, device index in the CCC). None if it does not reduce.
fn reduce(mut edges: Vec<(u16, u16, Vec<Op>)>, from: u16, to: u16) -> Option<Vec<Op>> {
    loop {
        if edges.len() == 1 {
            let (a, b, p) = &edges[0];
            return ((*a, *b) == (from, to) || (*a, *b) == (to, from)).then(|| p.clone());
        }
        let mut progress = false;
        // Parallel: two edges between the same pair.
        'par: for i in 0..edges.len() {
            for j in i + 1..edges.len() {
                let (a, b) = (edges[i].0, edges[i].1);
                let (c, d) = (edges[j].0, edges[j].1);
                if (a, b) == (c, d) || (a, b) == (d, c) {
                    let e = edges.swap_remove(j);
                    edges[i].2.extend(e.2);
                    edges[i].2.push(Op::Or);
                    progress = true;
                    break 'par;
                }
            }
        }
        if progress {
            continue;
        }
        // Series: an inner node on exactly two edges.
        let mut nodes: Vec<u16> = edges.iter().flat_map(|e| [e.0, e.1]).collect();
        nodes.sort_unstable();
        nodes.dedup();
        for x in nodes {
            if x == from || x == to {
                continue;
            }
            let on: Vec<usize> = (0..edges.len())
                .filter(|&i| edges[i].0 == x || edges[i].1 == x)
                .collect();
            if on.len() == 2 {
                let e2 = edges.swap_remove(on[1].max(on[0]));
                let e1 = edges.swap_remove(on[0].min(on[1]));
                let other = |e: &(u16, u16, Vec<Op>)| if e.0 == x { e.1 } else { e.0 };
                let (u, v) = (other(&e1), other(&e2));
                let mut p = e1.2;
                p.extend(e2.2);
                p.push(Op::And);
                edges.push((u, v, p));
                progress = true;
                break;
            }
        }
        if !progress {
            return None;
        }
    }
}

/// Most devices in one network of a gate solved by its functions (the program's stack depth
/// is at most this).
const GATE_MAX: usize = 24;

/// Run a network's program: (lanes where it surely conducts, lanes where it may).
fn conduct(prog: &[Op], devs: &[CDev], hi: &[u64], lo: &[u64]) -> (u64, u64) {
    let mut stack = [(0u64, 0u64); GATE_MAX];
    let mut top = 0;
    for op in prog {
        match *op {
            Op::Dev(i) => {
                let d = &devs[i as usize];
                let (h, l) = (hi[d.gate as usize], lo[d.gate as usize]);
                stack[top] = if d.pmos { (l, !h) } else { (h, !l) };
                top += 1;
            }
            Op::And => {
                top -= 1;
                let (b, a) = (stack[top], stack[top - 1]);
                stack[top - 1] = (a.0 & b.0, a.1 & b.1);
            }
            Op::Or => {
                top -= 1;
                let (b, a) = (stack[top], stack[top - 1]);
                stack[top - 1] = (a.0 | b.0, a.1 | b.1);
            }
        }
    }
    stack[0]
}

/// The complementary-gate form of a CCC, if it has one.
fn as_gate(c: &Ccc, vdd: u32, vss: u32) -> Option<Gate> {
    let nl = c.n_local;
    let outs: Vec<usize> = (0..nl).filter(|&k| c.size[k] == 2).collect();
    if outs.len() != 1 {
        return None;
    }
    let out = outs[0];
    let t_vdd = c.terms.iter().position(|&t| t == vdd)? as u16;
    let t_vss = c.terms.iter().position(|&t| t == vss)? as u16;
    let mut up = vec![];
    let mut down = vec![];
    let mut side = vec![0u8; nl]; // 1 pull-up, 2 pull-down
    for (i, d) in c.devs.iter().enumerate() {
        if c.terms[..nl].contains(&d.gate) {
            return None; // gated from inside
        }
        let (rail, list, mark) = if d.pmos {
            (t_vdd, &mut up, 1u8)
        } else {
            (t_vss, &mut down, 2u8)
        };
        for t in [d.a, d.b] {
            let t = t as usize;
            if t < nl {
                if t != out {
                    if side[t] != 0 && side[t] != mark {
                        return None;
                    }
                    side[t] = mark;
                }
            } else if t != rail as usize {
                return None;
            }
        }
        list.push((d.a, d.b, vec![Op::Dev(i as u16)]));
    }
    if up.is_empty() || down.is_empty() || up.len() > GATE_MAX || down.len() > GATE_MAX {
        return None;
    }
    Some(Gate {
        out,
        up: reduce(up, t_vdd, out as u16)?,
        down: reduce(down, t_vss, out as u16)?,
    })
}

/// The compiled network and its state.
pub struct Network {
    pub names: Vec<String>,
    hi: Vec<u64>,
    lo: Vec<u64>,
    fixed: Vec<bool>,
    cccs: Vec<Ccc>,
    /// CCCs to re-solve when a node changes (gated by it, or a source of their channels).
    readers: Vec<Vec<u32>>,
    /// CCCs in rank order (`order[rank]`), and each CCC's rank.
    order: Vec<u32>,
    rank: Vec<u32>,
    /// Dirty CCCs as a bit set over ranks; `low` is the lowest word that may hold one.
    dirty: Vec<u64>,
    low: usize,
    /// CCC solves since the network was built: all, by a complementary gate's functions,
    /// level by level (a fight).
    pub solves: u64,
    pub gate_solves: u64,
    pub level_solves: u64,
    scratch: Scratch,
}

#[derive(Default)]
struct Scratch {
    /// Per CCC term: reach masks [definite 1, definite 0, potential 1, potential 0].
    r: Vec<[u64; 4]>,
    one: Vec<u64>,
    zero: Vec<u64>,
    /// Per device: (lanes it surely conducts, lanes it may).
    on: Vec<(u64, u64)>,
    saved: Vec<[u64; 4]>,
}

/// A node that did not settle.
#[derive(Debug, Clone)]
pub struct Unsettled {
    pub node: String,
}

/// Level of a conductance (W/L units): half-octave grades, offset so every practical size is
/// positive and above the charge sizes 1 and 2.
fn grade(k: f64) -> u8 {
    let g = (2.0 * k.max(1e-6).log2()).round() + 64.0;
    g.clamp(3.0, 255.0) as u8
}

impl Network {
    /// Compile `flat`: `sources` are the nodes held from outside (supplies and inputs);
    /// `p_ratio` is how much weaker a PMOS is than an NMOS of the same W/L.
    pub fn new(flat: &Flat, vdd: u32, vss: u32, sources: &[u32], p_ratio: f64) -> Network {
        let n = flat.names.len();
        let mut fixed = vec![false; n];
        fixed[vdd as usize] = true;
        fixed[vss as usize] = true;
        for &s in sources {
            fixed[s as usize] = true;
        }
        // Channel and gate counts per node.
        let mut chans: Vec<Vec<u32>> = vec![vec![]; n];
        let mut gates = vec![0u32; n];
        for (i, d) in flat.devices.iter().enumerate() {
            if d.d != d.s {
                chans[d.d as usize].push(i as u32);
                chans[d.s as usize].push(i as u32);
            }
            gates[d.g as usize] += 1;
        }
        let ports: std::collections::HashSet<u32> = flat.ports.iter().copied().collect();
        let internal = |x: u32| {
            !fixed[x as usize]
                && gates[x as usize] == 0
                && chans[x as usize].len() == 2
                && !ports.contains(&x)
        };
        let conductance = |d: &Device| {
            let k = d.w / d.l;
            if d.kind == Kind::P {
                k / p_ratio
            } else {
                k
            }
        };
        // Series stacks through internal nodes share one conductance.
        let mut level = vec![0u8; flat.devices.len()];
        let mut done = vec![false; flat.devices.len()];
        for start in 0..flat.devices.len() {
            if done[start] {
                continue;
            }
            // Collect the stack: walk both ways through internal nodes.
            let mut stack = vec![start as u32];
            done[start] = true;
            let mut frontier = vec![flat.devices[start].d, flat.devices[start].s];
            while let Some(x) = frontier.pop() {
                if !internal(x) {
                    continue;
                }
                for &o in &chans[x as usize] {
                    if !done[o as usize] {
                        done[o as usize] = true;
                        stack.push(o);
                        let od = &flat.devices[o as usize];
                        frontier.push(if od.d == x { od.s } else { od.d });
                    }
                }
            }
            let r: f64 = stack
                .iter()
                .map(|&i| 1.0 / conductance(&flat.devices[i as usize]))
                .sum();
            let g = grade(1.0 / r);
            for &i in &stack {
                level[i as usize] = g;
            }
        }
        // Channel-connected components over non-source nodes.
        let mut comp = vec![u32::MAX; n];
        let mut cccs: Vec<Ccc> = vec![];
        for startn in 0..n as u32 {
            if fixed[startn as usize] || comp[startn as usize] != u32::MAX {
                continue;
            }
            if chans[startn as usize].is_empty() {
                continue; // a gate-only node (an undriven input would be one): no CCC
            }
            let id = cccs.len() as u32;
            let mut nodes = vec![startn];
            comp[startn as usize] = id;
            let mut k = 0;
            let mut devs_idx: Vec<u32> = vec![];
            while k < nodes.len() {
                let x = nodes[k];
                k += 1;
                for &di in &chans[x as usize] {
                    let d = &flat.devices[di as usize];
                    let y = if d.d == x { d.s } else { d.d };
                    if !devs_idx.contains(&di) {
                        devs_idx.push(di);
                    }
                    if !fixed[y as usize] && comp[y as usize] == u32::MAX {
                        comp[y as usize] = id;
                        nodes.push(y);
                    }
                }
            }
            devs_idx.sort_unstable();
            let n_local = nodes.len();
            let mut terms = nodes.clone();
            let term_of = |x: u32, terms: &mut Vec<u32>| -> u16 {
                match terms.iter().position(|&t| t == x) {
                    Some(p) => p as u16,
                    None => {
                        terms.push(x);
                        (terms.len() - 1) as u16
                    }
                }
            };
            let mut devs: Vec<CDev> = devs_idx
                .iter()
                .map(|&di| {
                    let d = &flat.devices[di as usize];
                    CDev {
                        gate: d.g,
                        pmos: d.kind == Kind::P,
                        a: term_of(d.d, &mut terms),
                        b: term_of(d.s, &mut terms),
                        level: level[di as usize],
                    }
                })
                .collect();
            // Devices touching a source first: one forward pass then mostly settles.
            devs.sort_by_key(|d| {
                Reverse((d.a as usize >= n_local) as u8 + (d.b as usize >= n_local) as u8)
            });
            let size = nodes
                .iter()
                .map(|&x| {
                    if gates[x as usize] > 0 || ports.contains(&x) {
                        2
                    } else {
                        1
                    }
                })
                .collect();
            let mut levels: Vec<u8> = devs.iter().map(|d| d.level).collect();
            levels.sort_unstable_by(|a, b| b.cmp(a));
            levels.dedup();
            let mut c = Ccc {
                terms,
                n_local,
                size,
                devs,
                levels,
                gate: None,
            };
            c.gate = as_gate(&c, vdd, vss);
            cccs.push(c);
        }
        // Readers: CCCs a node gates or feeds as a source.
        let mut readers: Vec<Vec<u32>> = vec![vec![]; n];
        for (ci, c) in cccs.iter().enumerate() {
            for d in &c.devs {
                readers[d.gate as usize].push(ci as u32);
            }
            for &t in &c.terms[c.n_local..] {
                readers[t as usize].push(ci as u32);
            }
        }
        for r in &mut readers {
            r.sort_unstable();
            r.dedup();
        }
        let rank = rank_cccs(&cccs, &comp, &readers);
        let nc = cccs.len();
        let mut order = vec![0u32; nc];
        for (c, &r) in rank.iter().enumerate() {
            order[r as usize] = c as u32;
        }
        let mut net = Network {
            names: flat.names.clone(),
            hi: vec![0; n],
            lo: vec![0; n],
            fixed,
            cccs,
            readers,
            order,
            rank,
            dirty: vec![0; nc.div_ceil(64)],
            low: 0,
            solves: 0,
            gate_solves: 0,
            level_solves: 0,
            scratch: Scratch::default(),
        };
        for c in 0..nc as u32 {
            net.push(c);
        }
        net
    }

    pub fn n_cccs(&self) -> usize {
        self.cccs.len()
    }

    fn push(&mut self, c: u32) {
        let r = self.rank[c as usize] as usize;
        self.dirty[r / 64] |= 1 << (r % 64);
        self.low = self.low.min(r / 64);
    }

    /// Hold source node `x` at `value` in every lane (bit set = 1).
    pub fn set(&mut self, x: u32, value: u64) {
        debug_assert!(self.fixed[x as usize]);
        let (h, l) = (value, !value);
        if self.hi[x as usize] != h || self.lo[x as usize] != l {
            self.hi[x as usize] = h;
            self.lo[x as usize] = l;
            for i in 0..self.readers[x as usize].len() {
                let c = self.readers[x as usize][i];
                self.push(c);
            }
        }
    }

    /// Value masks of node `x`: (lanes at 1, lanes at 0); lanes in neither are X.
    pub fn value(&self, x: u32) -> (u64, u64) {
        (self.hi[x as usize], self.lo[x as usize])
    }

    /// Solve dirty CCCs, lowest rank first, until nothing changes; `limit` solves at most.
    pub fn settle(&mut self, limit: u64) -> Result<(), Unsettled> {
        let mut budget = limit;
        while self.low < self.dirty.len() {
            let w = self.dirty[self.low];
            if w == 0 {
                self.low += 1;
                continue;
            }
            let r = self.low * 64 + w.trailing_zeros() as usize;
            self.dirty[self.low] &= w - 1;
            let c = self.order[r];
            if budget == 0 {
                let cc = &self.cccs[c as usize];
                return Err(Unsettled {
                    node: self.names[cc.terms[0] as usize].clone(),
                });
            }
            budget -= 1;
            self.solve(c as usize);
        }
        Ok(())
    }

    fn solve(&mut self, ci: usize) {
        self.solves += 1;
        let c = &self.cccs[ci];
        if let Some(g) = &c.gate {
            let (pu_on, pu_mb) = conduct(&g.up, &c.devs, &self.hi, &self.lo);
            let (pd_on, pd_mb) = conduct(&g.down, &c.devs, &self.hi, &self.lo);
            if pu_mb ^ pd_mb == !0 {
                // Exactly one network may conduct in every lane: its value where it surely
                // conducts; where it only may, the stored value if it is the same, else X.
                let t = c.terms[g.out] as usize;
                let (oh, ol) = (self.hi[t], self.lo[t]);
                let one = (pu_on | (pu_mb & oh)) & !pd_mb;
                let zero = (pd_on | (pd_mb & ol)) & !pu_mb;
                self.gate_solves += 1;
                let out = g.out;
                self.write(ci, out, one, zero);
                return;
            }
        }
        let s = &mut self.scratch;
        let nt = c.terms.len();
        let nl = c.n_local;
        // Reach per term: [definite 1, definite 0, potential 1, potential 0].
        s.r.clear();
        s.r.resize(nt, [0; 4]);
        for k in nl..nt {
            let t = c.terms[k] as usize;
            let (h, l) = (self.hi[t], self.lo[t]);
            s.r[k] = [h, l, !l, !h];
        }
        s.one.clear();
        s.one.resize(nl, 0);
        s.zero.clear();
        s.zero.resize(nl, 0);
        s.on.clear();
        for d in &c.devs {
            let (h, l) = (self.hi[d.gate as usize], self.lo[d.gate as usize]);
            s.on.push(if d.pmos { (l, !h) } else { (h, !l) });
        }
        // All devices at once: without a potential fight the levels change nothing.
        relax(c, s, 0);
        let mut fight = 0u64;
        for k in 0..nl {
            fight |= s.r[k][2] & s.r[k][3];
        }
        if fight != 0 && c.levels.len() > 1 {
            self.level_solves += 1;
            // Level by level, strongest first; stop once every node a path reaches is decided
            // in every lane, then put back the all-devices reach for the charge step.
            s.saved.clear();
            s.saved.extend_from_slice(&s.r[..nl]);
            s.r[..nl].iter_mut().for_each(|x| *x = [0; 4]);
            for &lv in &c.levels {
                relax(c, s, lv);
                let mut open = 0u64;
                for k in 0..nl {
                    let r = s.r[k];
                    s.one[k] |= r[0] & !r[3];
                    s.zero[k] |= r[1] & !r[2];
                    let reached = s.saved[k][2] | s.saved[k][3];
                    open |= reached & !(s.one[k] | s.zero[k]);
                }
                if open == 0 {
                    break;
                }
            }
            s.r[..nl].copy_from_slice(&s.saved);
        } else {
            for k in 0..nl {
                let r = s.r[k];
                s.one[k] = r[0] & !r[3];
                s.zero[k] = r[1] & !r[2];
            }
        }
        // Stored charge, for nodes no transistor path reaches in some lane ("loose").
        let mut loose = 0u64;
        for k in 0..nl {
            loose |= !(s.r[k][2] | s.r[k][3]);
        }
        if loose != 0 {
            // A loose node can only touch other loose nodes. Where no device joins two of
            // them, each simply keeps its own charge.
            let mut shared = 0u64;
            for (i, d) in c.devs.iter().enumerate() {
                let (a, b) = (d.a as usize, d.b as usize);
                if a < nl && b < nl {
                    let (ra, rb) = (s.r[a], s.r[b]);
                    shared |= s.on[i].1 & !(ra[2] | ra[3]) & !(rb[2] | rb[3]);
                }
            }
            if shared == 0 {
                for k in 0..nl {
                    let t = c.terms[k] as usize;
                    let l = !(s.r[k][2] | s.r[k][3]);
                    s.one[k] |= self.hi[t] & l;
                    s.zero[k] |= self.lo[t] & l;
                }
            } else {
                for size in [2u8, 1] {
                    for k in 0..nl {
                        if c.size[k] >= size {
                            let t = c.terms[k] as usize;
                            let (h, l) = (self.hi[t], self.lo[t]);
                            let r = &mut s.r[k];
                            *r = [r[0] | h, r[1] | l, r[2] | !l, r[3] | !h];
                        }
                    }
                    relax(c, s, 0);
                    for k in 0..nl {
                        let r = s.r[k];
                        s.one[k] |= r[0] & !r[3];
                        s.zero[k] |= r[1] & !r[2];
                    }
                }
            }
        }
        for k in 0..nl {
            let (one, zero) = (self.scratch.one[k], self.scratch.zero[k]);
            self.write(ci, k, one, zero);
        }
    }

    /// Store local node `k` of CCC `ci`; schedule the node's readers if it changed. A CCC
    /// whose own node gates one of its devices (an inverter inside a transmission-gate
    /// network) is solved again.
    fn write(&mut self, ci: usize, k: usize, one: u64, zero: u64) {
        let t = self.cccs[ci].terms[k] as usize;
        if self.hi[t] != one || self.lo[t] != zero {
            self.hi[t] = one;
            self.lo[t] = zero;
            for &r in &self.readers[t] {
                let r = self.rank[r as usize] as usize;
                self.dirty[r / 64] |= 1 << (r % 64);
                self.low = self.low.min(r / 64);
            }
        }
    }

    /// The device behind a CCC's internal index, for messages.
    pub fn device_count(&self) -> usize {
        self.cccs.iter().map(|c| c.devs.len()).sum()
    }
}

/// Spread reach through every device of level ≥ `min` until nothing changes.
fn relax(c: &Ccc, s: &mut Scratch, min: u8) {
    let nl = c.n_local;
    let r = &mut s.r;
    let spread =
        |from: [u64; 4], on: u64, mb: u64| [on & from[0], on & from[1], mb & from[2], mb & from[3]];
    let or = |x: [u64; 4], y: [u64; 4]| [x[0] | y[0], x[1] | y[1], x[2] | y[2], x[3] | y[3]];
    if nl == 1 {
        // One node, every device joining it to a source: a single pass is exact.
        let mut acc = r[0];
        for (d, &(on, mb)) in c.devs.iter().zip(&s.on) {
            if d.level < min {
                continue;
            }
            let src = if d.a == 0 { d.b } else { d.a } as usize;
            acc = or(acc, spread(r[src], on, mb));
        }
        r[0] = acc;
        return;
    }
    loop {
        let mut changed = false;
        for (d, &(on, mb)) in c.devs.iter().zip(&s.on) {
            if d.level < min || mb == 0 {
                continue;
            }
            let (a, b) = (d.a as usize, d.b as usize);
            let (ra, rb) = (r[a], r[b]);
            if b < nl {
                let nb = or(rb, spread(ra, on, mb));
                if nb != rb {
                    r[b] = nb;
                    changed = true;
                }
            }
            if a < nl {
                let na = or(ra, spread(r[b], on, mb));
                if na != ra {
                    r[a] = na;
                    changed = true;
                }
            }
        }
        if !changed {
            break;
        }
    }
}

/// Topological rank of the CCCs in the gate graph (Tarjan's strongly connected components;
/// a feedback loop such as a keeper's gets consecutive ranks).
fn rank_cccs(cccs: &[Ccc], comp: &[u32], readers: &[Vec<u32>]) -> Vec<u32> {
    let nc = cccs.len();
    // Successors: the CCCs each CCC's nodes feed.
    let succ: Vec<Vec<u32>> = cccs
        .iter()
        .enumerate()
        .map(|(ci, c)| {
            let mut v: Vec<u32> = c.terms[..c.n_local]
                .iter()
                .flat_map(|&t| readers[t as usize].iter().copied())
                .filter(|&r| r as usize != ci)
                .collect();
            v.sort_unstable();
            v.dedup();
            v
        })
        .collect();
    let _ = comp;
    // Iterative Tarjan.
    let mut index = vec![u32::MAX; nc];
    let mut low = vec![0u32; nc];
    let mut on_stack = vec![false; nc];
    let mut stack: Vec<u32> = vec![];
    let mut order: Vec<Vec<u32>> = vec![]; // SCCs in reverse topological order
    let mut next = 0u32;
    for root in 0..nc as u32 {
        if index[root as usize] != u32::MAX {
            continue;
        }
        let mut call: Vec<(u32, usize)> = vec![(root, 0)];
        index[root as usize] = next;
        low[root as usize] = next;
        next += 1;
        stack.push(root);
        on_stack[root as usize] = true;
        while let Some(&mut (v, ref mut k)) = call.last_mut() {
            if *k < succ[v as usize].len() {
                let w = succ[v as usize][*k];
                *k += 1;
                if index[w as usize] == u32::MAX {
                    index[w as usize] = next;
                    low[w as usize] = next;
                    next += 1;
                    stack.push(w);
                    on_stack[w as usize] = true;
                    call.push((w, 0));
                } else if on_stack[w as usize] {
                    low[v as usize] = low[v as usize].min(index[w as usize]);
                }
            } else {
                call.pop();
                if let Some(&(u, _)) = call.last() {
                    low[u as usize] = low[u as usize].min(low[v as usize]);
                }
                if low[v as usize] == index[v as usize] {
                    let mut scc = vec![];
                    loop {
                        let w = stack.pop().expect("Tarjan stack");
                        on_stack[w as usize] = false;
                        scc.push(w);
                        if w == v {
                            break;
                        }
                    }
                    scc.sort_unstable();
                    order.push(scc);
                }
            }
        }
    }
    let mut rank = vec![0u32; nc];
    let mut r = 0u32;
    for scc in order.iter().rev() {
        for &c in scc {
            rank[c as usize] = r;
            r += 1;
        }
    }
    rank
}
