//! Structural comparison of two flattened transistor netlists: a reference (what the spec
//! generates) and an edited one (a netlist a designer changed by hand). Devices are matched by
//! connectivity, not by name, so renamed instances and reordered lines still match; what does
//! not match is reported as removed, added, rewired or retyped devices, and the matched
//! devices whose W or L differ are listed separately.
//!
//! The method is that of layout-versus-schematic comparison by partition refinement (Ebeling
//! and Zajicek, "Validating VLSI circuit layout by wirelist comparison", ICCAD 1983): both
//! netlists are one bipartite graph of devices and nets, and every element carries a colour
//! (a 64-bit hash) that is refined round by round from its neighbours' colours until the
//! partition into colour classes stops splitting.
//!
//! - Start: a top-level port is coloured by its name (the interface is fixed, so ports match
//!   by name) and keeps that colour; every other net by its number of connections; a device
//!   by its kind.
//! - Round: a device's colour becomes a hash of its old colour, its gate net's, the unordered
//!   pair of its drain and source nets' (MOS symmetry) and its bulk net's; then a net's becomes
//!   a hash of its old colour and the multiset of (device colour, terminal role) over its
//!   connections (a sum of mixed hashes, so no sorting). One round is linear in the number of
//!   connections.
//!
//! **Isomorphic netlists.** When the partition is stable, every class must hold as many
//! reference as edited elements. Classes of one each are matched. Larger classes are
//! symmetries (parallel devices, structures nothing distinguishes yet): one pair of each is
//! given a fresh colour ("individualised") and the refinement is run again, until every class
//! is a pair. The resulting one-to-one map is then checked terminal by terminal.
//!
//! **Netlists that differ.** A difference changes the colour of everything within k
//! connections of it after k rounds, so after full refinement it has spread across the whole
//! connected netlist. The matching is then grown instead, with the colours of every round kept
//! as fingerprints of growing neighbourhoods:
//!
//! 1. ports are matched by name;
//! 2. skeleton: from the last round down to round 2, an element whose colour at that round
//!    is held by exactly one unmatched reference and one unmatched edited element is matched
//!    (their neighbourhoods to that depth are identical and unique) if that agrees with what
//!    is matched already;
//! 3. growth: the unmatched devices on each matched net pair become candidate pairs (same
//!    kind, same role at the net), best first: most terminals already matched to each other,
//!    then equal names (only to order candidates connectivity cannot tell apart), then the
//!    deepest round at which their colours agree. A candidate is taken if no terminal
//!    contradicts the matching; its terminals' unmatched nets are matched in turn;
//! 4. when that stalls, a candidate with exactly one contradicting terminal and at least two
//!    agreeing ones is taken as *rewired* on that terminal, and growth resumes;
//! 5. devices still unmatched whose terminals agree (devices on supplies only) are paired;
//!    a reference and an edited device of opposite kinds on the same gate, drain and source
//!    nets are a kind change; what remains is removed (reference only) or added (edited only).

use super::parse::{Device, Flat, Kind};
use std::cmp::Reverse;
use std::collections::{BinaryHeap, HashMap};

/// The result of [`compare`]. Device indices are into `Flat::devices` of the reference
/// (`reference`) or the edited netlist (`edited`); every list is sorted.
#[derive(Debug, Clone, Default)]
pub struct Comparison {
    /// Every device and net matched one-to-one with equal connectivity (sizes may differ:
    /// see `sizes`).
    pub isomorphic: bool,
    /// (reference device, edited device), rewired ones included.
    pub matched: Vec<(u32, u32)>,
    /// Reference devices with no counterpart in the edited netlist.
    pub removed: Vec<u32>,
    /// Edited devices with no counterpart in the reference.
    pub added: Vec<u32>,
    /// Matched devices one of whose terminals goes to another net.
    pub rewired: Vec<Rewired>,
    /// (reference device, edited device) on the same nets with the other channel type.
    pub retyped: Vec<(u32, u32)>,
    /// Matched devices whose W or L differ (relative tolerance 1e-6).
    pub sizes: Vec<SizeDiff>,
    /// Nets of the reference and of the edited netlist left without a counterpart.
    pub unmatched_nets: (usize, usize),
}

/// A matched device with a terminal on another net.
#[derive(Debug, Clone, PartialEq)]
pub struct Rewired {
    pub reference: u32,
    pub edited: u32,
    /// `gate`, `drain/source` or `bulk`.
    pub terminal: &'static str,
    /// The reference net (its name in the reference).
    pub expected_net: String,
    /// The net the edited device has there (its name in the edited netlist).
    pub found_net: String,
    /// The edited net matched to `expected_net`, where its name is another (a renamed
    /// instance, or nets that the comparison found exchanged).
    pub expected_as: Option<String>,
}

/// A matched device whose W or L differs from the reference; sizes in µm.
#[derive(Debug, Clone, PartialEq)]
pub struct SizeDiff {
    pub reference: u32,
    pub edited: u32,
    pub w_ref: f64,
    pub l_ref: f64,
    pub w_edit: f64,
    pub l_edit: f64,
}

impl Comparison {
    /// Number of reported differences in connectivity (sizes not counted).
    pub fn differences(&self) -> usize {
        self.removed.len() + self.added.len() + self.rewired.len() + self.retyped.len()
    }

    /// One human-readable line per difference (names from the respective netlist), then the
    /// table of size differences.
    pub fn lines(&self, reference: &Flat, edited: &Flat) -> Vec<String> {
        let mut out = vec![];
        for &r in &self.removed {
            out.push(format!("removed: {}", describe(reference, r)));
        }
        for &e in &self.added {
            out.push(format!("added: {}", describe(edited, e)));
        }
        for w in &self.rewired {
            out.push(format!(
                "rewired: {} {} on {}, expected {}{}",
                pair_name(reference, edited, w.reference, w.edited),
                w.terminal,
                w.found_net,
                w.expected_net,
                w.expected_as
                    .as_ref()
                    .map(|n| format!(" (called {n} in the edited netlist)"))
                    .unwrap_or_default()
            ));
        }
        for &(r, e) in &self.retyped {
            let (dr, de) = (&reference.devices[r as usize], &edited.devices[e as usize]);
            out.push(format!(
                "kind changed: {} {} -> {} ({})",
                pair_name(reference, edited, r, e),
                kind_name(dr.kind),
                kind_name(de.kind),
                terminals(edited, de)
            ));
        }
        if self.differences() == 0 && !self.isomorphic {
            out.push(format!(
                "unmatched nets: {} in the reference, {} in the edited netlist",
                self.unmatched_nets.0, self.unmatched_nets.1
            ));
        }
        if !self.sizes.is_empty() {
            let names: Vec<String> = self
                .sizes
                .iter()
                .map(|s| pair_name(reference, edited, s.reference, s.edited))
                .collect();
            let wide = names.iter().map(|n| n.len()).max().unwrap_or(0);
            out.push(format!(
                "sizes that differ ({} devices; µm, reference -> edited):",
                self.sizes.len()
            ));
            for (s, n) in self.sizes.iter().zip(&names) {
                out.push(format!(
                    "{n:<wide$}  w {} -> {}  l {} -> {}",
                    num(s.w_ref),
                    num(s.w_edit),
                    num(s.l_ref),
                    num(s.l_edit)
                ));
            }
        }
        out
    }
}

fn kind_name(k: Kind) -> &'static str {
    match k {
        Kind::N => "nmos",
        Kind::P => "pmos",
    }
}

/// A size in µm: at most six decimals, trailing zeros dropped.
fn num(x: f64) -> String {
    let s = format!("{x:.6}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    s.to_string()
}

fn terminals(f: &Flat, d: &Device) -> String {
    let n = |i: u32| f.names[i as usize].as_str();
    format!("d={} g={} s={} b={}", n(d.d), n(d.g), n(d.s), n(d.b))
}

fn describe(f: &Flat, x: u32) -> String {
    let d = &f.devices[x as usize];
    format!(
        "{} ({} w={} l={}, {})",
        d.name,
        kind_name(d.kind),
        num(d.w),
        num(d.l),
        terminals(f, d)
    )
}

/// The edited device's name, with the reference's where it differs.
fn pair_name(reference: &Flat, edited: &Flat, r: u32, e: u32) -> String {
    let (a, b) = (
        &reference.devices[r as usize].name,
        &edited.devices[e as usize].name,
    );
    if a == b {
        b.clone()
    } else {
        format!("{b} (reference {a})")
    }
}

const NONE: u32 = u32::MAX;
/// Nets with more connections than this (supplies, clock) neither seed candidate pairs nor
/// count as evidence for one.
const GLOBAL_DEGREE: u32 = 48;
const ROLE: [u64; 3] = [
    0x6a09_e667_f3bc_c908,
    0xbb67_ae85_84ca_a73b,
    0x3c6e_f372_fe94_f82b,
];
const GATE: usize = 0;
const SD: usize = 1;
const BULK: usize = 2;

/// A 64-bit finaliser (splitmix64).
fn fmix(mut z: u64) -> u64 {
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^ (z >> 31)
}

/// An order-dependent combination of two hashes.
fn mix(a: u64, b: u64) -> u64 {
    fmix(a.rotate_left(23) ^ fmix(b ^ 0x9e37_79b9_7f4a_7c15))
}

fn name_hash(s: &str) -> u64 {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for b in s.bytes() {
        h = (h ^ b as u64).wrapping_mul(0x100_0000_01b3);
    }
    fmix(h)
}

/// Both netlists as one graph: reference devices and nets first, then the edited ones.
struct Joint<'a> {
    flats: [&'a Flat; 2],
    /// Reference device and net counts (the offsets of the edited ones).
    dr: usize,
    nr: usize,
    kind: Vec<Kind>,
    /// Gate, drain, source, bulk (joint net ids).
    term: Vec<[u32; 4]>,
    /// The fixed colour of a top-level port.
    port: Vec<Option<u64>>,
    degree: Vec<u32>,
}

impl<'a> Joint<'a> {
    fn new(r: &'a Flat, e: &'a Flat) -> Self {
        let (dr, nr) = (r.devices.len(), r.names.len());
        let mut j = Joint {
            flats: [r, e],
            dr,
            nr,
            kind: vec![],
            term: vec![],
            port: vec![None; nr + e.names.len()],
            degree: vec![0; nr + e.names.len()],
        };
        for (side, f) in [r, e].into_iter().enumerate() {
            let off = if side == 0 { 0 } else { nr as u32 };
            for d in &f.devices {
                j.kind.push(d.kind);
                let t = [d.g + off, d.d + off, d.s + off, d.b + off];
                for n in t {
                    j.degree[n as usize] += 1;
                }
                j.term.push(t);
            }
            for &p in &f.ports {
                j.port[(p + off) as usize] = Some(name_hash(&f.names[p as usize]));
            }
        }
        j
    }

    fn nets(&self) -> usize {
        self.port.len()
    }

    fn device(&self, x: u32) -> &Device {
        let x = x as usize;
        if x < self.dr {
            &self.flats[0].devices[x]
        } else {
            &self.flats[1].devices[x - self.dr]
        }
    }

    fn net_name(&self, n: u32) -> &str {
        let n = n as usize;
        if n < self.nr {
            &self.flats[0].names[n]
        } else {
            &self.flats[1].names[n - self.nr]
        }
    }
}

/// Colours of every device and net (joint indices).
#[derive(Clone)]
struct Colours {
    dev: Vec<u64>,
    net: Vec<u64>,
}

fn initial(j: &Joint) -> Colours {
    Colours {
        dev: j
            .kind
            .iter()
            .map(|k| fmix(1 + matches!(k, Kind::P) as u64))
            .collect(),
        net: (0..j.nets())
            .map(|n| j.port[n].unwrap_or_else(|| mix(0x004e_4554, j.degree[n] as u64)))
            .collect(),
    }
}

/// One refinement round: devices from their nets, then nets from their devices.
fn round(j: &Joint, c: &mut Colours, acc: &mut Vec<u64>) {
    for (x, t) in j.term.iter().enumerate() {
        let (g, d, s, b) = (
            c.net[t[0] as usize],
            c.net[t[1] as usize],
            c.net[t[2] as usize],
            c.net[t[3] as usize],
        );
        let (lo, hi) = if d <= s { (d, s) } else { (s, d) };
        c.dev[x] = mix(mix(mix(mix(c.dev[x], g), lo), hi), b);
    }
    acc.clear();
    acc.resize(j.nets(), 0);
    for (x, t) in j.term.iter().enumerate() {
        let col = c.dev[x];
        for (i, &n) in t.iter().enumerate() {
            let role = [GATE, SD, SD, BULK][i];
            acc[n as usize] = acc[n as usize].wrapping_add(fmix(col ^ ROLE[role]));
        }
    }
    for (n, col) in c.net.iter_mut().enumerate() {
        if j.port[n].is_none() {
            *col = mix(*col, acc[n]);
        }
    }
}

fn distinct(v: &[u64], scratch: &mut Vec<u64>) -> usize {
    scratch.clear();
    scratch.extend_from_slice(v);
    scratch.sort_unstable();
    scratch.dedup();
    scratch.len()
}

/// Refine until the partition stops splitting. With `history`, the colours after each round
/// that split something are appended (the first entry: the colours as given).
fn refine(j: &Joint, c: &mut Colours, mut history: Option<&mut Vec<Colours>>) {
    let mut scratch = vec![];
    let mut acc = vec![];
    let mut count = distinct(&c.dev, &mut scratch) + distinct(&c.net, &mut scratch);
    if let Some(h) = history.as_deref_mut() {
        h.push(c.clone());
    }
    // Each round that changes the partition splits a class, so this ends within as many
    // rounds as there are elements (the bound only guards against hash collisions).
    for _ in 0..=(c.dev.len() + c.net.len()) {
        round(j, c, &mut acc);
        let n = distinct(&c.dev, &mut scratch) + distinct(&c.net, &mut scratch);
        if n <= count {
            break;
        }
        count = n;
        if let Some(h) = history.as_deref_mut() {
            h.push(c.clone());
        }
    }
}

/// The colour classes of one kind of element: whether every class holds as many reference
/// as edited members, and the classes of more than one pair.
struct Classes {
    balanced: bool,
    pairs: Vec<(u32, u32)>,
    /// (colour, reference members, edited members).
    ambiguous: Vec<(u64, Vec<u32>, Vec<u32>)>,
}

fn classes(col: &[u64], split: usize) -> Classes {
    let mut order: Vec<(u64, u32)> = col
        .iter()
        .enumerate()
        .map(|(i, &c)| (c, i as u32))
        .collect();
    order.sort_unstable();
    let mut out = Classes {
        balanced: true,
        pairs: vec![],
        ambiguous: vec![],
    };
    for run in order.chunk_by(|a, b| a.0 == b.0) {
        let r: Vec<u32> = run
            .iter()
            .filter(|x| (x.1 as usize) < split)
            .map(|x| x.1)
            .collect();
        let e: Vec<u32> = run
            .iter()
            .filter(|x| (x.1 as usize) >= split)
            .map(|x| x.1)
            .collect();
        if r.len() != e.len() {
            out.balanced = false;
            return out;
        }
        if r.len() == 1 {
            out.pairs.push((r[0], e[0]));
        } else {
            out.ambiguous.push((run[0].0, r, e));
        }
    }
    out
}

fn balanced(j: &Joint, c: &Colours) -> bool {
    classes(&c.dev, j.dr).balanced && classes(&c.net, j.nr).balanced
}

/// Joint-index maps (element -> its counterpart) of a complete matching.
struct Mates {
    dev: Vec<u32>,
    net: Vec<u32>,
}

/// Exact matching by refinement and individualisation; `None` when the netlists are not
/// isomorphic (or a symmetry could not be resolved in a few tries).
fn exact(j: &Joint, mut c: Colours) -> Option<Mates> {
    let mut fresh: u64 = 0;
    let mut give = |c: &mut Colours, dev: bool, r: u32, e: u32| {
        fresh += 1;
        let v = if dev { &mut c.dev } else { &mut c.net };
        let col = mix(v[r as usize], fmix(fresh ^ 0x1d1f_0a11));
        v[r as usize] = col;
        v[e as usize] = col;
    };
    loop {
        let dc = classes(&c.dev, j.dr);
        let nc = classes(&c.net, j.nr);
        if !dc.balanced || !nc.balanced {
            return None;
        }
        if dc.ambiguous.is_empty() && nc.ambiguous.is_empty() {
            return verified(j, &dc.pairs, &nc.pairs);
        }
        // All symmetric classes at once (one pair each); if that breaks the balance, one
        // class at a time, trying a few edited members.
        let mut t = c.clone();
        for (_, r, e) in &dc.ambiguous {
            give(&mut t, true, r[0], e[0]);
        }
        for (_, r, e) in &nc.ambiguous {
            give(&mut t, false, r[0], e[0]);
        }
        refine(j, &mut t, None);
        if balanced(j, &t) {
            c = t;
            continue;
        }
        let (dev, (_, r, e)) = match dc.ambiguous.first() {
            Some(a) => (true, a),
            None => (false, &nc.ambiguous[0]),
        };
        let mut done = false;
        for &m in e.iter().take(8) {
            let mut t = c.clone();
            give(&mut t, dev, r[0], m);
            refine(j, &mut t, None);
            if balanced(j, &t) {
                c = t;
                done = true;
                break;
            }
        }
        if !done {
            return None;
        }
    }
}

/// The maps of a class-by-class matching, if it keeps every terminal.
fn verified(j: &Joint, dev: &[(u32, u32)], net: &[(u32, u32)]) -> Option<Mates> {
    let mut m = Mates {
        dev: vec![NONE; j.kind.len()],
        net: vec![NONE; j.nets()],
    };
    for &(r, e) in dev {
        m.dev[r as usize] = e;
        m.dev[e as usize] = r;
    }
    for &(r, e) in net {
        m.net[r as usize] = e;
        m.net[e as usize] = r;
    }
    if m.dev.contains(&NONE) || m.net.contains(&NONE) {
        return None;
    }
    for &(r, e) in dev {
        let (a, b) = (j.term[r as usize], j.term[e as usize]);
        let map = |n: u32| m.net[n as usize];
        let sd =
            (map(a[1]) == b[1] && map(a[2]) == b[2]) || (map(a[1]) == b[2] && map(a[2]) == b[1]);
        if j.kind[r as usize] != j.kind[e as usize] || map(a[0]) != b[0] || map(a[3]) != b[3] || !sd
        {
            return None;
        }
    }
    Some(m)
}

/// How a terminal of a candidate pair stands with the current net matching.
#[derive(Clone, Copy, PartialEq, Eq)]
enum State {
    /// The two nets are matched to each other.
    Agree,
    /// Neither net is matched yet.
    Open,
    /// One of them is matched elsewhere.
    Conflict,
}

/// A candidate device pair against the current matching.
#[derive(Clone, Copy)]
struct Fit {
    conflicts: u8,
    agrees: u8,
    /// Agreeing terminals on nets that are not global.
    evidence: u8,
    /// Drain of one on the source of the other.
    flip: bool,
}

/// Candidate order (larger first): evidence; whether the two are the only unmatched devices
/// of their kind in that role on an agreeing net; equal full names; equal last path
/// components; depth of colour agreement; then lower indices.
type Rank = (u8, bool, bool, bool, u32, Reverse<u32>, Reverse<u32>);
/// A device's kind and terminal nets as matched (the key unmatched devices are grouped by).
type Terminals = (u8, u32, u32, u32, u32);

/// The growing matching of two netlists that are not isomorphic.
struct Grow<'a> {
    j: &'a Joint<'a>,
    hist: &'a [Colours],
    dmate: Vec<u32>,
    nmate: Vec<u32>,
    /// Per net, its connections: (device, role).
    adj: Vec<Vec<(u32, u8)>>,
    global: Vec<bool>,
    heap: BinaryHeap<Rank>,
    /// Candidate pairs with a contradicting terminal, for the rewired pass.
    loose: Vec<(u32, u32)>,
}

impl<'a> Grow<'a> {
    fn new(j: &'a Joint<'a>, hist: &'a [Colours]) -> Self {
        let mut adj = vec![vec![]; j.nets()];
        for (x, t) in j.term.iter().enumerate() {
            for (i, &n) in t.iter().enumerate() {
                adj[n as usize].push((x as u32, [GATE, SD, SD, BULK][i] as u8));
            }
        }
        for a in &mut adj {
            a.dedup();
        }
        Grow {
            j,
            hist,
            dmate: vec![NONE; j.kind.len()],
            nmate: vec![NONE; j.nets()],
            global: j.degree.iter().map(|&d| d > GLOBAL_DEGREE).collect(),
            adj,
            heap: BinaryHeap::new(),
            loose: vec![],
        }
    }

    fn state(&self, a: u32, b: u32) -> State {
        let (ma, mb) = (self.nmate[a as usize], self.nmate[b as usize]);
        if ma == b {
            State::Agree
        } else if ma == NONE && mb == NONE {
            State::Open
        } else {
            State::Conflict
        }
    }

    /// Number of rounds at which two elements' colours agree (colours only split, so the
    /// agreeing rounds are a prefix).
    fn depth(&self, a: u32, b: u32, dev: bool) -> u32 {
        let col = |k: usize, x: u32| {
            let h = &self.hist[k];
            if dev {
                h.dev[x as usize]
            } else {
                h.net[x as usize]
            }
        };
        let (mut lo, mut hi) = (0usize, self.hist.len());
        while lo < hi {
            let mid = (lo + hi) / 2;
            if col(mid, a) == col(mid, b) {
                lo = mid + 1;
            } else {
                hi = mid;
            }
        }
        lo as u32
    }

    fn fit(&self, r: u32, e: u32) -> Fit {
        let (a, b) = (self.j.term[r as usize], self.j.term[e as usize]);
        let count = |pairs: [(u32, u32); 4]| {
            let mut f = Fit {
                conflicts: 0,
                agrees: 0,
                evidence: 0,
                flip: false,
            };
            for (x, y) in pairs {
                match self.state(x, y) {
                    State::Agree => {
                        f.agrees += 1;
                        if !self.global[x as usize] {
                            f.evidence += 1;
                        }
                    }
                    State::Open => {}
                    State::Conflict => f.conflicts += 1,
                }
            }
            f
        };
        let straight = count([(a[0], b[0]), (a[1], b[1]), (a[2], b[2]), (a[3], b[3])]);
        let mut crossed = count([(a[0], b[0]), (a[1], b[2]), (a[2], b[1]), (a[3], b[3])]);
        crossed.flip = true;
        let key = |f: &Fit| (Reverse(f.conflicts), f.agrees);
        match key(&straight).cmp(&key(&crossed)) {
            std::cmp::Ordering::Greater => straight,
            std::cmp::Ordering::Less => crossed,
            std::cmp::Ordering::Equal => {
                // Tie (both open, say): the orientation whose nets' colours agree longer,
                // then equal net names, then as written.
                let d = |x: u32, y: u32| self.depth(x, y, false);
                let s = d(a[1], b[1]) + d(a[2], b[2]);
                let c = d(a[1], b[2]) + d(a[2], b[1]);
                let names = |x: u32, y: u32| (self.j.net_name(x) == self.j.net_name(y)) as u32;
                let sn = names(a[1], b[1]) + names(a[2], b[2]);
                let cn = names(a[1], b[2]) + names(a[2], b[1]);
                if (c, cn) > (s, sn) {
                    crossed
                } else {
                    straight
                }
            }
        }
    }

    /// `x` is the only unmatched device of its kind on `net` in role `role`.
    fn alone(&self, x: u32, net: u32, role: u8) -> bool {
        self.adj[net as usize].iter().all(|&(y, ry)| {
            y == x
                || ry != role
                || self.dmate[y as usize] != NONE
                || self.j.kind[y as usize] != self.j.kind[x as usize]
        })
    }

    /// The terminal pairs of a candidate in the orientation of `flip`, with their roles.
    fn pairs(&self, r: u32, e: u32, flip: bool) -> [(u32, u32, u8); 4] {
        let (a, b) = (self.j.term[r as usize], self.j.term[e as usize]);
        let (bd, bs) = if flip { (b[2], b[1]) } else { (b[1], b[2]) };
        [
            (a[0], b[0], GATE as u8),
            (a[1], bd, SD as u8),
            (a[2], bs, SD as u8),
            (a[3], b[3], BULK as u8),
        ]
    }

    fn rank(&self, r: u32, e: u32, f: &Fit) -> Rank {
        let (a, b) = (&self.j.device(r).name, &self.j.device(e).name);
        let leaf = |s: &'a str| s.rsplit('.').next().unwrap_or("");
        let unique = self.pairs(r, e, f.flip).iter().any(|&(x, y, role)| {
            !self.global[x as usize]
                && self.state(x, y) == State::Agree
                && self.alone(r, x, role)
                && self.alone(e, y, role)
        });
        (
            f.evidence,
            unique,
            a == b,
            leaf(a) == leaf(b),
            self.depth(r, e, true),
            Reverse(r),
            Reverse(e),
        )
    }

    fn match_net(&mut self, a: u32, b: u32) {
        self.nmate[a as usize] = b;
        self.nmate[b as usize] = a;
        if self.global[a as usize] || self.global[b as usize] {
            return;
        }
        let mut found = vec![];
        for &(x, rx) in &self.adj[a as usize] {
            if self.dmate[x as usize] != NONE {
                continue;
            }
            for &(y, ry) in &self.adj[b as usize] {
                if rx == ry
                    && self.dmate[y as usize] == NONE
                    && self.j.kind[x as usize] == self.j.kind[y as usize]
                {
                    found.push((x, y));
                }
            }
        }
        for (x, y) in found {
            self.offer(x, y);
        }
    }

    fn offer(&mut self, r: u32, e: u32) {
        let f = self.fit(r, e);
        if f.conflicts == 0 {
            let k = self.rank(r, e, &f);
            self.heap.push(k);
        } else {
            self.loose.push((r, e));
        }
    }

    fn accept(&mut self, r: u32, e: u32, flip: bool) {
        self.dmate[r as usize] = e;
        self.dmate[e as usize] = r;
        for (x, y, _) in self.pairs(r, e, flip) {
            if self.nmate[x as usize] == NONE && self.nmate[y as usize] == NONE {
                self.match_net(x, y);
            } else if self.nmate[x as usize] == y && !self.global[x as usize] {
                self.reoffer(x, y);
            }
        }
    }

    /// On a matched net pair, a kind and role now held by one unmatched device on each side:
    /// offer that pair again (its rank has risen).
    fn reoffer(&mut self, a: u32, b: u32) {
        let mut found = vec![];
        for &(x, rx) in &self.adj[a as usize] {
            if self.dmate[x as usize] != NONE || !self.alone(x, a, rx) {
                continue;
            }
            let mut mates = self.adj[b as usize].iter().filter(|&&(y, ry)| {
                ry == rx
                    && self.dmate[y as usize] == NONE
                    && self.j.kind[y as usize] == self.j.kind[x as usize]
            });
            if let (Some(&(y, _)), None) = (mates.next(), mates.next()) {
                found.push((x, y));
            }
        }
        for (x, y) in found {
            self.offer(x, y);
        }
    }

    /// Take consistent candidates, best first, until none is left.
    fn strict(&mut self) -> bool {
        let mut any = false;
        while let Some(k) = self.heap.pop() {
            let (r, e) = (k.5 .0, k.6 .0);
            if self.dmate[r as usize] != NONE || self.dmate[e as usize] != NONE {
                continue;
            }
            let f = self.fit(r, e);
            if f.conflicts > 0 {
                self.loose.push((r, e));
                continue;
            }
            let now = self.rank(r, e, &f);
            if now != k {
                self.heap.push(now);
                continue;
            }
            self.accept(r, e, f.flip);
            any = true;
        }
        any
    }

    /// Candidates with exactly one contradicting terminal, best first; true if any was taken.
    fn rewired(&mut self) -> bool {
        let mut c: Vec<(u8, Rank)> = vec![];
        let loose = std::mem::take(&mut self.loose);
        for &(r, e) in &loose {
            if self.dmate[r as usize] != NONE || self.dmate[e as usize] != NONE {
                continue;
            }
            let f = self.fit(r, e);
            if f.conflicts == 1 && f.agrees >= 2 && f.evidence >= 1 {
                c.push((f.conflicts, self.rank(r, e, &f)));
            }
        }
        c.sort_unstable_by(|a, b| a.0.cmp(&b.0).then(b.1.cmp(&a.1)));
        c.dedup();
        let mut any = false;
        for (_, k) in c {
            let (r, e) = (k.5 .0, k.6 .0);
            if self.dmate[r as usize] != NONE || self.dmate[e as usize] != NONE {
                continue;
            }
            let f = self.fit(r, e);
            if f.conflicts == 1 && f.agrees >= 2 && f.evidence >= 1 {
                self.accept(r, e, f.flip);
                any = true;
                // Its open nets are matched now: let consistent growth use them first.
                if !self.heap.is_empty() {
                    break;
                }
            }
        }
        // Keep the rest for the next pass.
        self.loose.extend(
            loose
                .into_iter()
                .filter(|&(r, e)| self.dmate[r as usize] == NONE && self.dmate[e as usize] == NONE),
        );
        any
    }

    /// Unmatched devices grouped by kind and the matched nets on their terminals (open
    /// terminals as wildcards); pairs within a group whose terminals agree are matched.
    fn leftovers(&mut self) -> bool {
        let j = self.j;
        let key = |g: &Self, x: u32, with_kind: bool| {
            let t = j.term[x as usize];
            let side_r = (x as usize) < j.dr;
            // A matched net by its reference id, an open one as NONE.
            let m = |n: u32| match g.nmate[n as usize] {
                NONE => NONE,
                _ if side_r => n,
                mate => mate,
            };
            let (d, s) = (m(t[1]), m(t[2]));
            let (lo, hi) = if d <= s { (d, s) } else { (s, d) };
            (
                if with_kind {
                    j.kind[x as usize] as u8
                } else {
                    0
                },
                m(t[0]),
                lo,
                hi,
                if with_kind { m(t[3]) } else { 0 },
            )
        };
        let mut groups: HashMap<Terminals, (Vec<u32>, Vec<u32>)> = HashMap::new();
        for x in 0..j.kind.len() as u32 {
            if self.dmate[x as usize] != NONE {
                continue;
            }
            let g = groups.entry(key(self, x, true)).or_default();
            if (x as usize) < j.dr {
                g.0.push(x);
            } else {
                g.1.push(x);
            }
        }
        let mut pairs: Vec<(Rank, u32, u32)> = vec![];
        for (r, e) in groups.values() {
            for &x in r {
                for &y in e.iter().take(16) {
                    let f = self.fit(x, y);
                    if f.conflicts == 0 && f.agrees >= 2 {
                        pairs.push((self.rank(x, y, &f), x, y));
                    }
                }
            }
        }
        pairs.sort_unstable_by_key(|p| Reverse(p.0));
        let mut any = false;
        for (_, r, e) in pairs {
            if self.dmate[r as usize] != NONE || self.dmate[e as usize] != NONE {
                continue;
            }
            let f = self.fit(r, e);
            if f.conflicts == 0 && f.agrees >= 2 {
                self.accept(r, e, f.flip);
                any = true;
            }
        }
        any
    }

    /// Grow until nothing more matches: consistent candidates, then rewired ones, then
    /// devices on supplies only.
    fn grow(&mut self) {
        loop {
            self.strict();
            if self.rewired() {
                continue;
            }
            if self.leftovers() {
                continue;
            }
            break;
        }
    }

    /// Terminal pairs of a matched device pair in the orientation that agrees most.
    fn matched_pairs(&self, r: u32, e: u32) -> [(u32, u32, u8); 4] {
        let ok = |x: u32, y: u32| (self.nmate[x as usize] == y) as u8;
        let (a, b) = (self.j.term[r as usize], self.j.term[e as usize]);
        let straight = ok(a[1], b[1]) + ok(a[2], b[2]);
        let crossed = ok(a[1], b[2]) + ok(a[2], b[1]);
        self.pairs(r, e, crossed > straight)
    }

    /// Removed, added and rewired terminals of the current matching.
    fn cost(&self) -> usize {
        let mut c = self.dmate.iter().filter(|&&m| m == NONE).count();
        for r in 0..self.j.dr as u32 {
            let e = self.dmate[r as usize];
            if e != NONE {
                c += self
                    .matched_pairs(r, e)
                    .iter()
                    .filter(|&&(x, y, _)| self.nmate[x as usize] != y)
                    .count();
            }
        }
        c
    }

    /// Re-derive the net matching from the matched devices: a net goes to the net its
    /// devices' counterparts are on most often (ports stay matched by name). A device pair
    /// left with more than one contradicting terminal is unmatched, and the unmatched
    /// devices are offered again. True if the net matching changed.
    fn revote(&mut self, ports: &[(u32, u32)]) -> bool {
        let mut votes: HashMap<(u32, u32), u32> = HashMap::new();
        for r in 0..self.j.dr as u32 {
            let e = self.dmate[r as usize];
            if e == NONE {
                continue;
            }
            for (x, y, _) in self.matched_pairs(r, e) {
                *votes.entry((x, y)).or_default() += 1;
            }
        }
        let mut v: Vec<(u32, bool, bool, u32, u32)> = votes
            .into_iter()
            .map(|((x, y), n)| {
                (
                    n,
                    self.nmate[x as usize] == y,
                    self.j.net_name(x) == self.j.net_name(y),
                    x,
                    y,
                )
            })
            .collect();
        v.sort_unstable_by(|a, b| {
            (b.0, b.1, b.2)
                .cmp(&(a.0, a.1, a.2))
                .then((a.3, a.4).cmp(&(b.3, b.4)))
        });
        let mut next = vec![NONE; self.nmate.len()];
        for &(x, y) in ports {
            next[x as usize] = y;
            next[y as usize] = x;
        }
        for (_, _, _, x, y) in v {
            if next[x as usize] == NONE && next[y as usize] == NONE {
                next[x as usize] = y;
                next[y as usize] = x;
            }
        }
        if next == self.nmate {
            return false;
        }
        self.reset_nets(next, 1);
        true
    }

    /// Take `next` as the net matching: device pairs left with more than `tolerate`
    /// contradicting terminals are unmatched, and every unmatched device is offered again
    /// from the matched nets it is on.
    fn reset_nets(&mut self, next: Vec<u32>, tolerate: u8) {
        self.nmate = next;
        for r in 0..self.j.dr as u32 {
            let e = self.dmate[r as usize];
            if e != NONE && self.fit(r, e).conflicts > tolerate {
                self.dmate[r as usize] = NONE;
                self.dmate[e as usize] = NONE;
            }
        }
        self.heap.clear();
        self.loose.clear();
        for r in 0..self.j.dr as u32 {
            if self.dmate[r as usize] != NONE {
                continue;
            }
            let t = self.j.term[r as usize];
            let mut found = vec![];
            for (i, &x) in t.iter().enumerate() {
                let y = self.nmate[x as usize];
                if y == NONE || self.global[x as usize] {
                    continue;
                }
                let role = [GATE, SD, SD, BULK][i] as u8;
                for &(e, re) in &self.adj[y as usize] {
                    if re == role
                        && self.dmate[e as usize] == NONE
                        && self.j.kind[e as usize] == self.j.kind[r as usize]
                    {
                        found.push(e);
                    }
                }
            }
            found.sort_unstable();
            found.dedup();
            for e in found {
                self.offer(r, e);
            }
        }
    }

    /// The net matching by name: every reference net whose name, with its instance path
    /// translated, names an edited net is matched to it; the others stay as they are where
    /// that is still one-to-one. Instance paths are translated level by level: under the
    /// translation of its parent, an instance keeps its name if the edited netlist has that
    /// path, else it goes to the edited path most of its matched devices are in (a renamed
    /// instance).
    fn by_name(&self) -> Vec<u32> {
        // Every proper prefix of a device's instance path (`a`, `a.b` for `a.b.m1`).
        fn prefixes(name: &str) -> impl Iterator<Item = &str> {
            name.char_indices()
                .filter(|c| c.1 == '.')
                .map(move |c| &name[..c.0])
        }
        let mut votes: HashMap<&str, HashMap<&str, u32>> = HashMap::new();
        let mut edited_paths: std::collections::HashSet<&str> = Default::default();
        let mut reference_paths: Vec<&str> = vec![];
        for x in 0..self.j.kind.len() as u32 {
            let name = self.j.device(x).name.as_str();
            if (x as usize) >= self.j.dr {
                edited_paths.extend(prefixes(name));
                continue;
            }
            reference_paths.extend(prefixes(name));
            let e = self.dmate[x as usize];
            if e == NONE {
                continue;
            }
            let other = self.j.device(e).name.as_str();
            if name.matches('.').count() == other.matches('.').count() {
                for (a, b) in prefixes(name).zip(prefixes(other)) {
                    *votes.entry(a).or_default().entry(b).or_default() += 1;
                }
            }
        }
        // Parents before children: shorter paths first.
        reference_paths.sort_unstable_by_key(|p| (p.len(), *p));
        reference_paths.dedup();
        let mut path: HashMap<&str, String> = HashMap::new();
        for p in reference_paths {
            let (parent, leaf) = match p.rfind('.') {
                Some(k) => (path.get(&p[..k]).cloned(), &p[k + 1..]),
                None => (Some(String::new()), p),
            };
            let kept = parent.map(|q| {
                if q.is_empty() {
                    leaf.to_string()
                } else {
                    format!("{q}.{leaf}")
                }
            });
            let to = match kept {
                Some(k) if edited_paths.contains(k.as_str()) => Some(k),
                _ => votes.get(p).and_then(|v| {
                    v.iter()
                        .max_by(|a, b| a.1.cmp(b.1).then(b.0.cmp(a.0)))
                        .map(|(q, _)| q.to_string())
                }),
            };
            if let Some(q) = to {
                path.insert(p, q);
            }
        }
        let nr = self.j.nr;
        let edited: HashMap<&str, u32> = (nr..self.nmate.len())
            .map(|n| (self.j.net_name(n as u32), n as u32))
            .collect();
        let mut next = vec![NONE; self.nmate.len()];
        for x in 0..nr {
            let name = self.j.net_name(x as u32);
            let translated = match name.rfind('.') {
                Some(k) => match path.get(&name[..k]) {
                    Some(p) => format!("{p}{}", &name[k..]),
                    None => name.to_string(),
                },
                None => name.to_string(),
            };
            if let Some(&y) = edited.get(translated.as_str()) {
                if next[y as usize] == NONE {
                    next[x] = y;
                    next[y as usize] = x as u32;
                }
            }
        }
        for x in 0..nr {
            let y = self.nmate[x];
            if y != NONE && next[x] == NONE && next[y as usize] == NONE {
                next[x] = y;
                next[y as usize] = x as u32;
            }
        }
        next
    }

    /// Unmatched devices of opposite kinds on the same gate, drain and source nets.
    fn retyped(&self) -> Vec<(u32, u32)> {
        let j = self.j;
        let mut by: HashMap<(u32, u32, u32), [Vec<u32>; 2]> = HashMap::new();
        for x in 0..j.kind.len() as u32 {
            if self.dmate[x as usize] != NONE {
                continue;
            }
            let t = j.term[x as usize];
            let side = (x as usize) >= j.dr;
            let m = |n: u32| match self.nmate[n as usize] {
                NONE => NONE,
                _ if !side => n,
                mate => mate,
            };
            let (g, d, s) = (m(t[0]), m(t[1]), m(t[2]));
            if g == NONE || d == NONE || s == NONE {
                continue;
            }
            by.entry((g, d.min(s), d.max(s))).or_default()[side as usize].push(x);
        }
        let mut out = vec![];
        for [r, e] in by.values() {
            let mut used = vec![false; e.len()];
            for &x in r {
                if let Some(i) =
                    (0..e.len()).find(|&i| !used[i] && j.kind[e[i] as usize] != j.kind[x as usize])
                {
                    used[i] = true;
                    out.push((x, e[i]));
                }
            }
        }
        out.sort_unstable();
        out
    }
}

/// Re-match nets by majority of their devices while that lowers the count of differences;
/// the best state: (cost, device mates, net mates).
fn improve(g: &mut Grow, ports: &[(u32, u32)]) -> (usize, Vec<u32>, Vec<u32>) {
    let mut best = (g.cost(), g.dmate.clone(), g.nmate.clone());
    for _ in 0..4 {
        if !g.revote(ports) {
            break;
        }
        g.grow();
        let c = g.cost();
        if c >= best.0 {
            break;
        }
        best = (c, g.dmate.clone(), g.nmate.clone());
    }
    best
}

/// Compare `edited` with `reference` (see the module documentation).
pub fn compare(reference: &Flat, edited: &Flat) -> Comparison {
    let j = Joint::new(reference, edited);
    let mut c = initial(&j);
    let mut hist = vec![];
    refine(&j, &mut c, Some(&mut hist));
    if let Some(m) = exact(&j, c) {
        return report(&j, &m.dev, &m.net, vec![]);
    }
    let mut g = Grow::new(&j, &hist);
    // Ports by name.
    let mut by_name: HashMap<&str, u32> = HashMap::new();
    for &p in &edited.ports {
        by_name.insert(edited.names[p as usize].as_str(), p + j.nr as u32);
    }
    let mut ports = vec![];
    for &p in &reference.ports {
        if let Some(&q) = by_name.get(reference.names[p as usize].as_str()) {
            if g.nmate[q as usize] == NONE {
                g.match_net(p, q);
                ports.push((p, q));
            }
        }
    }
    g.grow();
    let mut best = improve(&mut g, &ports);
    (g.dmate, g.nmate) = (best.1.clone(), best.2.clone());
    // Differences can often be explained more than one way (two nets swapped on an instance
    // or on the devices next to it): among explanations with no more differences, the one
    // that keeps the nets' names is reported.
    let next = g.by_name();
    if next != g.nmate {
        g.reset_nets(next, 0);
        g.grow();
        let alt = improve(&mut g, &ports);
        if alt.0 <= best.0 {
            best = alt;
        }
    }
    (g.dmate, g.nmate) = (best.1, best.2);
    let retyped = g.retyped();
    let (dmate, nmate) = (g.dmate.clone(), g.nmate.clone());
    let mut dm = dmate;
    for &(r, e) in &retyped {
        // Reported as a kind change, not as removed and added.
        dm[r as usize] = NONE - 1;
        dm[e as usize] = NONE - 1;
    }
    report(&j, &dm, &nmate, retyped)
}

fn close(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-6 * a.abs().max(b.abs())
}

/// Build the comparison from the device and net maps (joint indices; `NONE - 1` marks a
/// device reported as retyped).
fn report(j: &Joint, dmate: &[u32], nmate: &[u32], retyped: Vec<(u32, u32)>) -> Comparison {
    let dr = j.dr as u32;
    let mut c = Comparison {
        retyped: retyped.into_iter().map(|(r, e)| (r, e - dr)).collect(),
        ..Comparison::default()
    };
    for x in 0..j.kind.len() as u32 {
        let m = dmate[x as usize];
        if x < dr {
            if m == NONE {
                c.removed.push(x);
            } else if m != NONE - 1 {
                c.matched.push((x, m - dr));
            }
        } else if m == NONE {
            c.added.push(x - dr);
        }
    }
    c.matched.sort_unstable();
    for &(r, e) in &c.matched {
        let (a, b) = (j.term[r as usize], j.term[(e + dr) as usize]);
        let ok = |x: u32, y: u32| nmate[x as usize] == y;
        let straight = ok(a[1], b[1]) as u8 + ok(a[2], b[2]) as u8;
        let crossed = ok(a[1], b[2]) as u8 + ok(a[2], b[1]) as u8;
        let (bd, bs) = if crossed > straight {
            (b[2], b[1])
        } else {
            (b[1], b[2])
        };
        for (name, x, y) in [
            ("gate", a[0], b[0]),
            ("drain/source", a[1], bd),
            ("drain/source", a[2], bs),
            ("bulk", a[3], b[3]),
        ] {
            if !ok(x, y) {
                c.rewired.push(Rewired {
                    reference: r,
                    edited: e,
                    terminal: name,
                    expected_net: j.net_name(x).to_string(),
                    found_net: j.net_name(y).to_string(),
                    expected_as: Some(nmate[x as usize])
                        .filter(|&m| m != NONE && j.net_name(m) != j.net_name(x))
                        .map(|m| j.net_name(m).to_string()),
                });
            }
        }
        let (dr_, de) = (j.device(r), j.device(e + dr));
        if !close(dr_.w, de.w) || !close(dr_.l, de.l) {
            c.sizes.push(SizeDiff {
                reference: r,
                edited: e,
                w_ref: dr_.w,
                l_ref: dr_.l,
                w_edit: de.w,
                l_edit: de.l,
            });
        }
    }
    let nr = j.nr;
    c.unmatched_nets = (
        nmate[..nr].iter().filter(|&&m| m == NONE).count(),
        nmate[nr..].iter().filter(|&&m| m == NONE).count(),
    );
    c.isomorphic = c.differences() == 0 && c.unmatched_nets == (0, 0);
    c
}
