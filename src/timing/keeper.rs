//! The keeper check: every keeper of a dynamic design must let the discharge front of its
//! segment through at the technology's worst listed corner, and must hold its node against
//! leakage where nothing drives it.
//!
//! 1. **Fronts, timed.** At the slow corner (the technology's `ss` section at the hottest
//!    temperature it is characterised at, the spec's supply) the timing engine times the
//!    discharge of every segment from clk↑ with every bit propagating and cin = 1, so every
//!    chain node falls. The engine models each node's keeper fighting its drive (a divider
//!    of the drive path against the keeper, released when the node's reader flips; a node
//!    whose drive path is no stronger than its keeper stays put, [`super::engine::STALL_RATIO`]).
//!    A segment passes when every keeper-held node falls and the front, from the segment's
//!    first fall to its last, fits in the evaluate phase: with `testbench.period` the phase
//!    the deck gives (clk high to the 95 % strobe), otherwise the phase the deck's default
//!    period would give at that corner (the estimate there, times the deck's margin), so
//!    without a period the check is that every front completes.
//! 2. **Holding, static.** A keeper that is on must supply at least [`LEAK_MARGIN`] times the
//!    off-state leakage of the NMOS channels on its node at the leakiest corner (`ff`, hot):
//!    I_keeper ≈ 0.75·VDD / R_keeper (a switching resistance stands for about 3/4 of VDD over
//!    the saturation current; Rabaey, Chandrakasan & Nikolić §3.3, from memory) against
//!    Σ W · I_off, the characterised off current per µm (common practice: a keeper holds its
//!    node against leakage with an order of magnitude to spare). Coupling is left to the
//!    reader's noise margin: the check does not model crosstalk.

use super::engine::{Graph, NodeKind};
use super::search::{In, Pair, Timer};
use super::Timing;
use crate::cells::{Mos, Role};
use crate::emit::vectors::mask;
use crate::error::Result;
use crate::netlist::Design;
use crate::spec::{Spec, Style};
use crate::tech::Conditions;
use serde::Serialize;

/// A keeper must supply this many times the leakage of its node.
pub const LEAK_MARGIN: f64 = 10.0;

/// Share of the period the evaluate phase offers up to the strobe (clk high at 50 %, strobe
/// at 95 %), as the deck draws it.
pub const EVALUATE_SHARE: f64 = 0.45;

/// One segment's front at the slow corner.
#[derive(Debug, Clone, Serialize)]
pub struct Front {
    /// The segment's first and last keeper-held nodes (flattened names).
    pub from: String,
    pub to: String,
    pub nodes: usize,
    /// First fall and last fall after clk↑, ps; `stalled` names the first node that never
    /// falls (then `end_ps` is None).
    pub start_ps: f64,
    pub end_ps: Option<f64>,
    pub stalled: Option<String>,
}

impl Front {
    pub fn duration_ps(&self) -> Option<f64> {
        self.end_ps.map(|e| e - self.start_ps)
    }
}

/// One keeper's holding margin at the leaky corner.
#[derive(Debug, Clone, Serialize)]
pub struct Hold {
    pub node: String,
    pub keeper_ua: f64,
    pub leakage_ua: f64,
}

/// The check's result (also reported in NAME.json).
#[derive(Debug, Clone, Serialize)]
pub struct Report {
    /// Where the fronts were timed, e.g. "ss, 125 degC, 3.3 V".
    pub slow_corner: String,
    pub limit_ps: f64,
    /// "testbench.period" or "default period at the slow corner".
    pub limit_from: String,
    pub fronts: Vec<Front>,
    /// Where the holding rule was checked (None: the technology has no leakage figure).
    pub leaky_corner: Option<String>,
    pub holds: Vec<Hold>,
    /// Why the check fails (one line), None when it passes.
    pub failure: Option<String>,
}

/// The timing at the hottest characterised temperature of a corner (at the spec's supply,
/// interpolated between characterised ones where it lies between them), and a label for it.
/// Falls back to the spec's own timing for technologies without that corner.
fn corner_timing(spec: &Spec, corner: &str) -> Option<(Timing, String, Spec)> {
    let t = &spec.technology;
    let hottest = super::builtin_files(&t.name, corner)
        .into_iter()
        .max_by(|a, b| a.at.temp.total_cmp(&b.at.temp));
    let mut s = spec.clone();
    if let Some(tm) = hottest {
        let c = Conditions {
            corner: Some(corner.to_string()),
            temp: Some(tm.at.temp),
            vdd: None,
        };
        if s.technology.apply_conditions(&c).is_ok() {
            if let Some(tm) = s.technology.timing.clone() {
                let label = label_of(&tm);
                return Some((tm, label, s));
            }
        }
    }
    let tm = spec.technology.timing.clone()?;
    let label = format!(
        "{}'s own conditions ({}; it lists no {corner} corner)",
        t.name,
        label_of(&tm)
    );
    Some((tm, label, s))
}

fn label_of(tm: &Timing) -> String {
    format!(
        "{}, {} degC, {} V",
        tm.at.corner,
        crate::spec::trim_num(tm.at.temp),
        crate::spec::trim_num(tm.at.vdd)
    )
}

/// The node a keeper holds (its channel end that is not the supply).
fn kept_node(g: &Graph, d: &super::engine::Dev) -> u32 {
    if g.kind[d.a as usize] == NodeKind::Inner {
        d.a
    } else {
        d.b
    }
}

/// Does this design have keepers?
pub fn has_keepers(design: &Design) -> bool {
    design
        .cells
        .values()
        .any(|c| c.devices.iter().any(|d| d.role == Role::Keeper))
}

/// Run the check. None: no keepers, or no timing at any corner (nothing to check with).
pub fn check(spec: &Spec, design: &Design) -> Result<Option<Report>> {
    if spec.style != Style::Dynamic || !has_keepers(design) {
        return Ok(None);
    }
    let Some((tm, slow_corner, slow_spec)) = corner_timing(spec, "ss") else {
        return Ok(None);
    };
    let mut g = Graph::new(&slow_spec, design, &tm)?;
    g.all_keepers = true;
    let mut timer = Timer::new(&g)?;
    let all = In {
        a: mask(spec.width),
        b: 0,
        cin: true,
    };
    let pt = timer.time(Pair {
        before: all,
        after: all,
    })?;
    // Keeper-held nodes, grouped by stage (one stage: one unbroken segment).
    let mut by_stage: Vec<(u32, Vec<u32>)> = vec![];
    for d in g.devs.iter().filter(|d| d.role == Role::Keeper) {
        let node = kept_node(&g, d);
        let st = g.stage_of[node as usize];
        match by_stage.iter_mut().find(|(s, _)| *s == st) {
            Some((_, v)) => v.push(node),
            None => by_stage.push((st, vec![node])),
        }
    }
    let fall = |x: u32| -> Option<f64> { timer.last_event(x).and_then(|(t, v)| (!v).then_some(t)) };
    let mut fronts = vec![];
    for (_, nodes) in &by_stage {
        let times: Vec<Option<f64>> = nodes.iter().map(|&x| fall(x)).collect();
        let start = times
            .iter()
            .flatten()
            .copied()
            .fold(f64::INFINITY, f64::min);
        let stalled = nodes
            .iter()
            .zip(&times)
            .find(|(_, t)| t.is_none())
            .map(|(&x, _)| g.names[x as usize].clone());
        let end = if stalled.is_some() {
            None
        } else {
            Some(times.iter().flatten().copied().fold(0.0, f64::max))
        };
        fronts.push(Front {
            from: g.names[nodes[0] as usize].clone(),
            to: g.names[*nodes.last().expect("a stage with a keeper") as usize].clone(),
            nodes: nodes.len(),
            start_ps: if start.is_finite() { start } else { 0.0 },
            end_ps: end,
            stalled,
        });
    }
    let slew_ps = spec.technology.slew * 1e12;
    let (limit_ps, limit_from) = match spec.testbench.period {
        Some(p) => (
            EVALUATE_SHARE * p * 1e12 - slew_ps,
            "the evaluate phase of testbench.period".to_string(),
        ),
        None => {
            // The deck's default period at the slow corner follows its estimate there; the
            // slowest output of this run stands for it.
            let latest = pt.outputs.iter().flatten().copied().fold(0.0, f64::max);
            (
                crate::emit::spice::ESTIMATE_MARGIN * latest + slew_ps,
                "the evaluate phase of the default period at the slow corner".to_string(),
            )
        }
    };
    let mut failure = None;
    for f in &fronts {
        if let Some(n) = &f.stalled {
            failure = Some(format!(
                "at {slow_corner} the discharge front from {} stalls at {n}: its keeper holds it against the drive",
                f.from
            ));
            break;
        }
        if let Some(d) = f.duration_ps() {
            if d > limit_ps {
                failure = Some(format!(
                    "at {slow_corner} the discharge front from {} to {} takes {:.2} ns, beyond {limit_from} ({:.2} ns)",
                    f.from,
                    f.to,
                    d * 1e-3,
                    limit_ps * 1e-3
                ));
                break;
            }
        }
    }
    // Holding against leakage at the leaky corner.
    let mut holds = vec![];
    let mut leaky_corner = None;
    if let Some((ltm, label, lspec)) = corner_timing(spec, "ff") {
        if let Some(i_off) = ltm.i_off_n_na_um {
            leaky_corner = Some(label.clone());
            let lg = Graph::new(&lspec, design, &ltm)?;
            for d in lg.devs.iter().filter(|d| d.role == Role::Keeper) {
                let node = kept_node(&lg, d);
                let r_kohm = ltm.r_p_rise_kohm_um[0] / d.w * (d.l / lg.l_min).max(1.0);
                // mA from V / kΩ; µA below.
                let keeper_ua = 0.75 * lspec.technology.vdd / r_kohm * 1e3;
                let leak_na: f64 = lg.adj[node as usize]
                    .iter()
                    .map(|&(di, _)| &lg.devs[di as usize])
                    .filter(|e| e.mos == Mos::N)
                    .map(|e| e.w * i_off)
                    .sum();
                let h = Hold {
                    node: lg.names[node as usize].clone(),
                    keeper_ua,
                    leakage_ua: leak_na * 1e-3,
                };
                if failure.is_none() && h.keeper_ua < LEAK_MARGIN * h.leakage_ua {
                    failure = Some(format!(
                        "at {label} the keeper at {} supplies {:.3} uA, less than {LEAK_MARGIN} times the {:.4} uA its node leaks",
                        h.node, h.keeper_ua, h.leakage_ua
                    ));
                }
                holds.push(h);
            }
        }
    }
    Ok(Some(Report {
        slow_corner,
        limit_ps,
        limit_from,
        fronts,
        leaky_corner,
        holds,
        failure,
    }))
}

/// The unbroken dynamic chains of a spec as bit ranges [lo, hi): a dynamic Manchester chain
/// runs from one buffer (a domino boundary) to the next, a dynamic carry-skip chain restarts
/// at every block. Empty for other designs.
pub fn dynamic_chains(spec: &Spec) -> Vec<(usize, usize)> {
    if spec.style != Style::Dynamic {
        return vec![];
    }
    crate::arch::manchester::chain_segments(spec)
}

/// Does one unbroken dynamic chain of `len` bits, built as `spec` builds its chains (same
/// architecture, cells, sizing, technology and period), pass the check?
fn chain_passes(spec: &Spec, len: usize) -> Result<bool> {
    let mut one = spec.clone();
    one.width = len;
    one.block = len;
    one.block_sizes = None;
    one.buffers.positions.clear();
    let d = crate::arch::build(&one);
    Ok(check(&one, &d)?.is_none_or(|r| r.failure.is_none()))
}

/// The longest unbroken dynamic chain, up to `limit` bits, that passes with this spec's
/// sizing; 0 when even a 1-bit chain fails. A longer chain only adds pass devices and
/// keepers in series, so its front only gets slower: a binary search over the length.
pub fn longest_passing_chain(spec: &Spec, limit: usize) -> Result<usize> {
    let (mut lo, mut hi) = (0, limit);
    while lo < hi {
        let mid = (lo + hi).div_ceil(2);
        if chain_passes(spec, mid)? {
            lo = mid;
        } else {
            hi = mid - 1;
        }
    }
    Ok(lo)
}

/// The input error (exit 2) for a design whose keepers fail: one line naming the key to
/// change (`buffers`, `block` or `sizing.keeper`), the failing chain, why, and the longest
/// chain that passes.
pub fn refusal(spec: &Spec, why: &str) -> Result<crate::error::Error> {
    use crate::error::Error;
    use crate::spec::{Architecture, Source};
    let chains = dynamic_chains(spec);
    let longest = chains
        .iter()
        .map(|(lo, hi)| hi - lo)
        .max()
        .unwrap_or(spec.width);
    let fits = longest_passing_chain(spec, longest)?;
    let (lo, hi) = chains
        .iter()
        .copied()
        .find(|(lo, hi)| hi - lo > fits)
        .unwrap_or((0, spec.width));
    let k = spec.sizing.keeper;
    let bits = |n: usize| format!("{n} bit{}", if n == 1 { "" } else { "s" });
    let (n, longest) = (bits(hi - lo), bits(fits));
    let lower = "or lower sizing.keeper";
    let (key, msg) = if fits == 0 {
        (
            "sizing.keeper",
            format!("even a 1-bit dynamic chain fails the keeper check at sizing.keeper {k} ({why}), so no buffer placement helps: lower sizing.keeper or set it to 0 (no keeper)"),
        )
    } else if fits >= hi - lo {
        // Every chain is short enough alone: the failure is elsewhere (e.g. holding).
        (
            "sizing.keeper",
            format!("the keepers fail at sizing.keeper {k}: {why}"),
        )
    } else if spec.architecture == Architecture::CarrySkip {
        (
            "block",
            format!("the dynamic chain of the block from bit {lo} to bit {} ({n}) fails the keeper check at sizing.keeper {k} ({why}); the longest that passes is {longest}: use block: {fits} or less, {lower}", hi - 1),
        )
    } else if spec.block <= fits {
        let every = fits / spec.block * spec.block;
        (
            "buffers",
            format!("the unbuffered dynamic chain from bit {lo} to bit {} ({n}) fails the keeper check at sizing.keeper {k} ({why}); the longest that passes is {longest}: add buffers (e.g. {{every: {every}}} or auto) {lower}", hi - 1),
        )
    } else {
        (
            "block",
            format!("the unbuffered dynamic chain from bit {lo} to bit {} ({n}) fails the keeper check at sizing.keeper {k} ({why}); the longest that passes is {longest}: use block: {fits} or less with buffers {{every: {fits}}}, {lower}", hi - 1),
        )
    };
    Ok(match &spec.source {
        Some((label, text)) => Source { label, text }.error(key, msg),
        None => Error::Input(format!("{key}: {msg}")),
    })
}
