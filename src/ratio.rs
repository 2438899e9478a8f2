//! The ratio rule (common practice): where a keeper (a weak always-fighting pull-up) holds a
//! node, every pull-down path that must discharge that node is stronger than the keeper,
//! comparing W/L of the keeper with the series W/L (1 / Σ L/W) of the path.
//!
//! Paths are found on the flattened transistors, NMOS only, from the kept node to vss. A path
//! counts only if it can conduct: every device on it needs its gate high, and those gate
//! values must be an input combination each cell is designed for (its `care` set). That rules
//! out, for instance, a path through both the generate and the propagate device of one bit.

use crate::cells::{Mos, Role};
use crate::error::{Error, Result};
use crate::netlist::{Design, Flat};
use crate::spec::{Architecture, Source, Spec, Style};
use std::collections::HashMap;

struct Dev {
    d: u32,
    s: u32,
    /// (leaf, input pin) when the gate is a cell input; internal gates carry no constraint.
    gate_pin: Option<(usize, usize)>,
    mos: Mos,
    role: Role,
    strength: f64,
}

/// Can leaf `leaf` see these required input values and still be inside its care set?
fn feasible(design: &Design, flat: &Flat, leaf: usize, required: &[(usize, bool)]) -> bool {
    let cell = &design.cells[&flat.leaves[leaf].kind];
    let Some(care) = &cell.care else { return true };
    let ins: Vec<usize> = cell.inputs().collect();
    let free: Vec<usize> = ins
        .iter()
        .copied()
        .filter(|i| !required.iter().any(|(p, _)| p == i))
        .collect();
    (0u32..1 << free.len()).any(|combo| {
        care.eval(&|pin| {
            if let Some((_, v)) = required.iter().find(|(p, _)| *p == pin) {
                *v
            } else {
                let k = free.iter().position(|&f| f == pin).unwrap_or(0);
                combo >> k & 1 == 1
            }
        })
    })
}

/// Start of the message of a keeper that its pull-down paths do not overpower (the case
/// [`length_error`] can explain as a spec problem).
pub const RULE_FAILS: &str = "ratio rule: at node";

/// One keeper and the pull-down paths it fights.
#[derive(Debug, Clone)]
pub struct Kept {
    /// Flattened name of the kept node.
    pub node: String,
    /// W/L of the keeper.
    pub keeper: f64,
    /// Series W/L of the weakest conducting NMOS path from the node to vss (None: no path).
    pub weakest: Option<f64>,
    /// The path search gave up (too many paths).
    pub exhausted: bool,
}

impl Kept {
    pub fn passes(&self) -> bool {
        !self.exhausted && self.weakest.is_some_and(|w| w > self.keeper)
    }
}

/// The weakest pull-down path at every node a keeper holds, in the order of the flattened
/// devices.
pub fn survey(design: &Design, flat: &Flat) -> Vec<Kept> {
    let has_keeper = |k: &crate::cells::CellKind| {
        design.cells[k]
            .devices
            .iter()
            .any(|d| d.role == Role::Keeper)
    };
    if !design.cells.keys().any(has_keeper) {
        return vec![];
    }
    let mut names = flat.names.clone();
    let vss = names.len() as u32;
    names.push("vss".into());
    let vdd = names.len() as u32;
    names.push("vdd".into());
    let mut devs: Vec<Dev> = vec![];
    for (li, leaf) in flat.leaves.iter().enumerate() {
        let cell = &design.cells[&leaf.kind];
        let mut nodes = flat.leaf_nodes(design, li, vss, vdd);
        for d in &cell.devices {
            let dn = nodes.id(&d.d, &mut names).0;
            let sn = nodes.id(&d.s, &mut names).0;
            let gate_pin = cell
                .pins
                .iter()
                .position(|p| p.name == d.g && p.dir == crate::cells::Dir::In)
                .map(|p| (li, p));
            devs.push(Dev {
                d: dn,
                s: sn,
                gate_pin,
                mos: d.mos,
                role: d.role,
                strength: d.strength(),
            });
        }
    }
    let mut adj: Vec<Vec<usize>> = vec![vec![]; names.len()];
    for (i, d) in devs.iter().enumerate() {
        if d.mos == Mos::N {
            adj[d.d as usize].push(i);
            adj[d.s as usize].push(i);
        }
    }
    let mut out = vec![];
    for keeper in devs.iter().filter(|d| d.role == Role::Keeper) {
        let mut search = Search {
            design,
            flat,
            devs: &devs,
            adj: &adj,
            vss,
            vdd,
            visited: vec![false; names.len()],
            required: HashMap::new(),
            weakest: None,
            budget: 200_000,
        };
        search.dfs(keeper.d, 0.0);
        out.push(Kept {
            node: names[keeper.d as usize].clone(),
            keeper: keeper.strength,
            weakest: search.weakest,
            exhausted: search.budget == 0,
        });
    }
    out
}

pub fn check(design: &Design, flat: &Flat) -> Result<()> {
    for k in survey(design, flat) {
        let node = &k.node;
        if k.exhausted {
            return Err(Error::Check(format!(
                "ratio check: too many pull-down paths at node {node}"
            )));
        }
        match k.weakest {
            None => {
                return Err(Error::Check(format!(
                    "ratio rule: keeper at node {node} has no pull-down path to fight"
                )))
            }
            Some(w) if w <= k.keeper => {
                return Err(Error::Check(format!(
                    "{RULE_FAILS} {node} the weakest pull-down path (W/L {w:.2}) is not stronger than its keeper (W/L {:.2}); shorten the block or lower sizing.keeper",
                    k.keeper
                )))
            }
            Some(_) => {}
        }
    }
    Ok(())
}

struct Search<'a> {
    design: &'a Design,
    flat: &'a Flat,
    devs: &'a [Dev],
    adj: &'a [Vec<usize>],
    vss: u32,
    vdd: u32,
    visited: Vec<bool>,
    /// Gate values the current path needs, per leaf: (pin, value).
    required: HashMap<usize, Vec<(usize, bool)>>,
    weakest: Option<f64>,
    budget: usize,
}

impl Search<'_> {
    fn dfs(&mut self, x: u32, inv_sum: f64) {
        if self.budget == 0 {
            return;
        }
        self.budget -= 1;
        if x == self.vss {
            let s = 1.0 / inv_sum;
            if self.weakest.is_none_or(|w| s < w) {
                self.weakest = Some(s);
            }
            return;
        }
        if x == self.vdd {
            return;
        }
        self.visited[x as usize] = true;
        for &di in &self.adj[x as usize] {
            let d = &self.devs[di];
            let y = if d.d == x { d.s } else { d.d };
            if self.visited[y as usize] {
                continue;
            }
            // The device conducts with its gate high; keep the path only if every cell on it
            // can see the gate values the path needs.
            let pushed = if let Some((leaf, pin)) = d.gate_pin {
                let req = self.required.entry(leaf).or_default();
                if req.iter().any(|&(p, v)| p == pin && !v) {
                    continue;
                }
                req.push((pin, true));
                let ok = feasible(self.design, self.flat, leaf, &self.required[&leaf]);
                if !ok {
                    self.required.get_mut(&leaf).unwrap().pop();
                    continue;
                }
                Some(leaf)
            } else {
                None
            };
            self.dfs(y, inv_sum + 1.0 / d.strength);
            if let Some(leaf) = pushed {
                self.required.get_mut(&leaf).unwrap().pop();
            }
        }
        self.visited[x as usize] = false;
    }
}

/// The unbroken dynamic chains of a spec as bit ranges [lo, hi): a dynamic Manchester chain
/// runs from one buffer (a domino boundary) to the next, a dynamic carry-skip chain restarts
/// at every block. Empty for other designs.
pub fn dynamic_chains(spec: &Spec) -> Vec<(usize, usize)> {
    if spec.style != Style::Dynamic {
        return vec![];
    }
    match spec.architecture {
        Architecture::Manchester => {
            let mut cuts = vec![0];
            cuts.extend(spec.buffers.positions.iter().copied());
            cuts.push(spec.width);
            cuts.windows(2).map(|w| (w[0], w[1])).collect()
        }
        Architecture::CarrySkip => crate::arch::manchester::blocks(spec.width, spec.block),
        _ => vec![],
    }
}

/// Does one unbroken dynamic chain of `len` bits, built as `spec` builds its chains (same
/// architecture, cells, sizing and technology), pass the rule at every keeper?
fn chain_passes(spec: &Spec, len: usize) -> bool {
    let mut one = spec.clone();
    one.width = len;
    one.block = len;
    one.block_sizes = None;
    one.buffers.positions.clear();
    let d = crate::arch::build(&one);
    survey(&d, &d.flatten()).iter().all(Kept::passes)
}

/// The longest unbroken dynamic chain, up to `limit` bits, that passes the rule with this
/// spec's sizing; 0 when even a 1-bit chain fails. A longer chain only adds pass devices in
/// series, so the weakest path only gets weaker: a binary search over the length is exact.
pub fn longest_passing_chain(spec: &Spec, limit: usize) -> usize {
    let (mut lo, mut hi) = (0, limit);
    while lo < hi {
        let mid = (lo + hi).div_ceil(2);
        if chain_passes(spec, mid) {
            lo = mid;
        } else {
            hi = mid - 1;
        }
    }
    lo
}

/// `x` rounded down to two significant digits, printed plainly.
fn floor2(x: f64) -> String {
    if !(x.is_finite() && x > 0.0) {
        return "0".into();
    }
    let scale = 10f64.powi(1 - x.log10().floor() as i32);
    format!("{}", (x * scale).floor() / scale)
}

/// When the rule fails because a dynamic chain of the spec is too long for its keeper, the
/// spec is at fault, not the netlist: an input error (exit 2) naming `buffers`, `block` or
/// `sizing.keeper`, the failing chain, the longest chain that passes at this keeper and the
/// keeper below which this design would pass. None when the failure is something else.
pub fn length_error(spec: &Spec, design: &Design) -> Option<Error> {
    let chains = dynamic_chains(spec);
    let longest = chains.iter().map(|(lo, hi)| hi - lo).max()?;
    let fits = longest_passing_chain(spec, longest);
    let &(lo, hi) = chains.iter().find(|(lo, hi)| hi - lo > fits)?;
    let kept = survey(design, &design.flatten());
    // The keeper scales linearly with sizing.keeper; the paths do not depend on it.
    let keeper_limit = kept
        .iter()
        .filter_map(|k| Some(k.weakest? / k.keeper * spec.sizing.keeper))
        .fold(f64::INFINITY, f64::min);
    let lower = if keeper_limit >= 0.02 {
        format!("lower sizing.keeper below {}", floor2(keeper_limit))
    } else {
        "set sizing.keeper: 0 (no keeper)".to_string()
    };
    let k = spec.sizing.keeper;
    let bits = |n: usize| format!("{n} bit{}", if n == 1 { "" } else { "s" });
    let (n, longest) = (bits(hi - lo), bits(fits));
    let (key, msg) = if fits == 0 {
        (
            "sizing.keeper",
            format!("even a 1-bit dynamic chain fails the keeper ratio rule at sizing.keeper {k}, so no buffer placement helps: {lower}"),
        )
    } else if spec.architecture == Architecture::CarrySkip {
        (
            "block",
            format!("the dynamic chain of the block from bit {lo} to bit {} ({n}) fails the keeper ratio rule at sizing.keeper {k}; the longest that passes is {longest}: use block: {fits} or less, or {lower}", hi - 1),
        )
    } else if spec.block <= fits {
        let every = fits / spec.block * spec.block;
        (
            "buffers",
            format!("the unbuffered dynamic chain from bit {lo} to bit {} ({n}) fails the keeper ratio rule at sizing.keeper {k}; the longest that passes is {longest}: add buffers (e.g. {{every: {every}}}) or {lower}", hi - 1),
        )
    } else {
        (
            "block",
            format!("the unbuffered dynamic chain from bit {lo} to bit {} ({n}) fails the keeper ratio rule at sizing.keeper {k}; the longest that passes is {longest}: use block: {fits} or less with buffers {{every: {fits}}}, or {lower}", hi - 1),
        )
    };
    Some(match &spec.source {
        Some((label, text)) => Source { label, text }.error(key, msg),
        None => Error::Input(format!("{key}: {msg}")),
    })
}
