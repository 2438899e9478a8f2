//! The ratio survey (common practice): where a keeper (a weak pull-up) holds a node, the
//! weakest pull-down path that must discharge that node, as series W/L (1 / Σ L/W), beside
//! the keeper's W/L. A report, not a gate: whether keepers work is decided by the timed
//! check in `timing::keeper`, which sees every keeper on the path and the corner.
//!
//! Paths are found on the flattened transistors, NMOS only, from the kept node to vss. A path
//! counts only if it can conduct: every device on it needs its gate high, and those gate
//! values must be an input combination each cell is designed for (its `care` set). That rules
//! out, for instance, a path through both the generate and the propagate device of one bit.

use crate::cells::{Mos, Role};
use crate::netlist::{Design, Flat};
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
    survey_sized(design, flat, &|_| None)
}

/// [`survey`] with per-device sizes: `size(NAME)` for a device's flattened name
/// (`PATH.DEVICE`, as in the SPICE view) gives its W/L instead of the cell's, `Some(0.0)` for
/// a device that is not there (it conducts nothing; a missing keeper is not surveyed).
/// `verify` uses it on the sizes of a hand-edited netlist.
pub fn survey_sized(design: &Design, flat: &Flat, size: &dyn Fn(&str) -> Option<f64>) -> Vec<Kept> {
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
                strength: size(&format!("{}.{}", leaf.path, d.name)).unwrap_or(d.strength()),
            });
        }
    }
    let mut adj: Vec<Vec<usize>> = vec![vec![]; names.len()];
    for (i, d) in devs.iter().enumerate() {
        if d.mos == Mos::N && d.strength > 0.0 {
            adj[d.d as usize].push(i);
            adj[d.s as usize].push(i);
        }
    }
    let mut out = vec![];
    for keeper in devs
        .iter()
        .filter(|d| d.role == Role::Keeper && d.strength > 0.0)
    {
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
