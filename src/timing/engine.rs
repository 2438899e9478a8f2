//! The transistor-level timing engine: the one netlist flattened to transistors, partitioned
//! into channel-connected stages, and timed by event-driven evaluation of input vector pairs.
//!
//! Method (published methods only):
//! - Channel-connected stages: nodes joined through a device's source/drain form one stage,
//!   the rails and the top inputs (ideal sources) excluded (switch-level timing analysis:
//!   Ousterhout, "Crystal", 1983; Jouppi, DAC 1983). A whole unbuffered transmission-gate or
//!   pass-NMOS chain with its driver is one stage.
//! - Switch-level values (Bryant, IEEE Trans. Computers C-33(2), 1984): a device conducts
//!   by its gate value; each node takes the value of its strongest conducting path to a
//!   source (strong beats weak, keepers are weak; between equals the lower resistance wins);
//!   a node with no path keeps its charge.
//! - Delay of a node that changes: 0.69 × its Elmore delay (Elmore 1948; Rubinstein, Penfield
//!   & Horowitz, IEEE TCAD 2(3), 1983) in the tree of conducting devices from the winning
//!   source, each device R = r/W from the characterised values by direction and kind (pull-down
//!   NMOS, pull-up PMOS, pass NMOS, transmission gate; series stacks with the characterised
//!   stack values), counting the capacitance of the nodes that switch; a ladder of N pass
//!   devices gives 0.69·R·C·N(N+1)/2 (Rabaey, Chandrakasan & Nikolić, §6.2.3). Then a slope
//!   term (growing with the triggering input's transition time, shifted by the gate's
//!   switching threshold: [`Slope`], [`gate_slope`]) and, where a weaker path opposes the
//!   transition (a keeper), the fight factor 1 / (1 − R_win / R_opp) (the net current is the
//!   difference of the two paths' currents, linearised). A pulse narrower than its own edge,
//!   or turned back by an input that had begun to move before its edge was half way, does
//!   not switch its readers ([`Sim::propagate`]).
//! - Each event remembers the event whose evaluation caused it, so the latest output event
//!   traces back to its input: the critical path with each stage's share.

use super::Timing;
use crate::cells::{CellKind, Dir, Mos, Role};
use crate::error::{Error, Result};
use crate::netlist::Design;
use crate::spec::Spec;
use crate::tech::End;
use std::cmp::{Ordering, Reverse};
use std::collections::{BTreeMap, BinaryHeap, HashMap, VecDeque};

/// Step response 50 % point of a single pole, in time constants (ln 2; Rabaey et al. §6.2.3).
pub const LN2: f64 = 0.69;
/// 10–90 % transition of a single pole, in time constants (ln 9).
pub const SLEW_PER_TAU: f64 = 2.2;
/// Input-slope term: a stage whose input moves in t_in (10–90 %) is slower than its step
/// delay t_step by the harmonic combination of two limits, `fast` · t_in (a fast input: the
/// term grows with the input's transition, whatever the load) and a slow-input limit (a
/// stage switching near mid-supply sees only part of the ramp): `cap` · t_step in the
/// saturating form, `cap` · √(t_in · t_step) with a characterised ramp ([`Ramp`]), whose
/// delay keeps growing with the input's transition as a real gate's does (the square-root
/// growth of Horowitz's slow-ramp limit, "Timing models for MOS circuits", Stanford 1983,
/// from memory). The shares come from the technology's own characterisation
/// ([`slope_share`]); no constant is tuned on adders.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Slope {
    pub fast: f64,
    pub cap: f64,
    pub ramp: Option<Ramp>,
}

/// What the ramp sweep of `characterize` adds to the slope model: output transitions and
/// the switching threshold.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Ramp {
    /// Output 10–90 % per ps of step delay (`slew_per_step`).
    pub slew_per_step: f64,
    /// Share of the input's transition the output's gains (`slew_input_share`).
    pub input_share: f64,
    /// Switching threshold below mid-supply per ps of input transition (`slope_threshold`).
    pub threshold: f64,
}

impl Slope {
    /// The saturating form with one share (no fast share, no ramp).
    pub fn single(k: f64) -> Slope {
        Slope {
            fast: k,
            cap: k,
            ramp: None,
        }
    }

    /// The slow-input limit per unit of `cap`.
    fn slow_unit(&self, t_in: f64, step: f64) -> f64 {
        if self.ramp.is_some() {
            (t_in * step).max(0.0).sqrt()
        } else {
            step
        }
    }

    pub fn term(&self, t_in: f64, step: f64) -> f64 {
        let (a, b) = (self.fast * t_in, self.cap * self.slow_unit(t_in, step));
        if a <= 0.0 || b <= 0.0 {
            return 0.0;
        }
        a * b / (a + b)
    }

    /// The output transition (10–90 %, ps) of a node whose impulse response has the mean
    /// `tau` (its Elmore delay) and the spread `spread` (both equal for a single pole), the
    /// logic devices' share of its step `logic`, triggered by an input moving in `t_in`:
    /// 2.2 × Elmore without a ramp characterisation; else `slew_per_step` × 0.69 × spread
    /// (the characterised transition of a lumped stage per ps of its step delay, the spread
    /// standing for the mean so that a ladder's far node, whose response is narrower than its
    /// delay, is not given the whole delay as its edge: the second-moment spread, Kashyap,
    /// Alpert, Liu & Devgan, IEEE TCAD 2004, from memory), plus `slew_input_share` × t_in
    /// when the input drives the node's logic devices.
    pub fn slew(&self, tau: f64, spread: f64, logic: f64, t_in: f64) -> f64 {
        match self.ramp {
            None => SLEW_PER_TAU * tau,
            Some(r) => {
                let passed = if logic > 0.0 {
                    r.input_share * t_in
                } else {
                    0.0
                };
                r.slew_per_step * LN2 * spread + passed
            }
        }
    }

    /// The transition in a chain of like stages, each driven by the one before (an FO4
    /// chain, a tapered driver), of a stage whose Elmore delay is `tau`.
    pub fn chain_slew(&self, tau: f64) -> f64 {
        match self.ramp {
            None => SLEW_PER_TAU * tau,
            Some(r) => r.slew_per_step * LN2 * tau / (1.0 - r.input_share),
        }
    }
}

pub fn stage_delay(step: f64, t_in: f64, k: Slope) -> f64 {
    if step + t_in <= 0.0 {
        return 0.0;
    }
    step + k.term(t_in, step)
}

/// The delay of a node whose stage is triggered by an input of transition time t_in. The
/// input's slope acts on the devices whose gates it drives, the logic devices of the path
/// (driver, pull-up or pull-down stack), whose share of the step is `logic`; the pass devices
/// and transmission gates beyond them add their RC delay unchanged (their gates are steady).
/// `sense` is +1 for a falling input driving a rising node, −1 for a rising input driving a
/// falling one, 0 otherwise: with a ramp characterisation the switching threshold's offset
/// from mid-supply moves the delay by `threshold` × t_in that way (never below the step).
pub fn node_delay(step: f64, logic: f64, t_in: f64, k: Slope, sense: f64) -> f64 {
    let logic = logic.min(step);
    let shift = match k.ramp {
        Some(r) if logic > 0.0 => sense * r.threshold * t_in,
        _ => 0.0,
    };
    logic + (k.term(t_in, logic) + shift).max(0.0) + (step - logic)
}

/// The sense of a stage's response for [`node_delay`]: +1 input falling and node rising, −1
/// input rising and node falling, 0 otherwise.
pub fn sense(input_rises: bool, node_rises: bool) -> f64 {
    match (input_rises, node_rises) {
        (false, true) => 1.0,
        (true, false) => -1.0,
        _ => 0.0,
    }
}

/// The two-moment step delay of an RC tree node (D2M: ln 2 · m1² / √m2; Alpert, Devgan &
/// Kashyap, "RC delay metrics for performance optimization", IEEE TCAD 20(5), 2001): m1 is
/// the Elmore delay, m2 = Σ_k R_ik · C_k · m1_k. It equals 0.69 · m1 for a single pole, gives
/// the far end of a distributed line 0.38·RC (0.69 × Elmore says 0.35·RC) and the near nodes
/// of a ladder much less than 0.69 × Elmore, which overstates them.
pub fn d2m(m1: f64, m2: f64) -> f64 {
    if m2 > 0.0 {
        LN2 * m1 * m1 / m2.sqrt()
    } else {
        LN2 * m1
    }
}

/// The engine's delay of every node of an unbranched ladder: a driver of resistance `r_drv`
/// (a logic device whose input moves in `t_in`) into node 0, then a gate of `r_first` (node 0
/// to 1) and gates of `r_rest` (each further one); `caps` holds the node capacitances 0..=N,
/// every node switching; each node sees the share `visible` of what lies one gate further
/// ([`Graph::solve`]'s per-target view: the technology's `pass_ladder_visible` or
/// `tg_ladder_visible_*`, 1 without). It is the model
/// [`Graph::solve`] and [`node_delay`] apply to any tree, written out for a ladder:
/// `characterize` fits `r_rest` (and `visible`) with it.
#[allow(clippy::too_many_arguments)]
pub fn ladder_delays(
    r_drv: f64,
    r_first: f64,
    r_rest: f64,
    visible: f64,
    caps: &[f64],
    t_in: f64,
    k: Slope,
    sense: f64,
) -> Vec<f64> {
    let n = caps.len();
    let order: Vec<u32> = (0..n as u32).collect();
    let pred: Vec<(u32, u32)> = (0..n)
        .map(|i| (if i == 0 { NONE } else { i as u32 - 1 }, 0))
        .collect();
    let alpha: Vec<f64> = (0..n).map(|i| if i == 0 { 1.0 } else { visible }).collect();
    let mut rpath = vec![0.0; n];
    let mut acc = 0.0;
    for (i, r) in rpath.iter_mut().enumerate() {
        acc += match i {
            0 => r_drv,
            1 => r_first,
            _ => r_rest,
        };
        *r = acc;
    }
    let (mut d, mut a, mut b) = (vec![0.0; n], vec![0.0; n], vec![0.0; n]);
    let mut m1 = vec![0.0; n];
    visible_sums(
        &order, &pred, &alpha, &rpath, caps, &mut d, &mut a, &mut b, &mut m1,
    );
    let logic = LN2 * r_drv * d[0];
    let cm: Vec<f64> = caps.iter().zip(&m1).map(|(c, t)| c * t).collect();
    let mut m2 = vec![0.0; n];
    visible_sums(
        &order, &pred, &alpha, &rpath, &cm, &mut d, &mut a, &mut b, &mut m2,
    );
    (0..n)
        .map(|i| node_delay(d2m(m1[i], m2[i]), logic, t_in, k, sense))
        .collect()
}

/// The slope shares that make this model's FO4 inverter (the characterised NMOS and PMOS
/// widths, four copies of itself as load, driven by an identical stage) as slow as the
/// characterised `fo4_ps`. With the technology's fast-input share (`slope_fast`) the cap is
/// solved for ([`slope_with_fast`]); without one, or when no cap reproduces the FO4 with it,
/// one share serves both limits (clamped to 0..2). A ramp characterisation (`slew_per_step`,
/// `slew_input_share`, `slope_threshold`) selects the growing slow-input limit and the
/// transitions of [`Slope::slew`].
pub fn slope_share(tm: &Timing) -> Slope {
    if let Some(s) = tm.slope_fast.and_then(|f| slope_with_fast(tm, f)) {
        return s;
    }
    let f = Fo4::of(tm);
    let k = ((tm.fo4_ps - f.step) / f.unit.term(f.t_in, f.step)).clamp(0.0, 2.0);
    Slope {
        ramp: f.unit.ramp,
        ..Slope::single(k)
    }
}

/// The ramp characterisation of a technology, when its file has one.
pub fn ramp_of(tm: &Timing) -> Option<Ramp> {
    Some(Ramp {
        slew_per_step: tm.slew_per_step?,
        input_share: tm.slew_input_share.unwrap_or(0.0),
        threshold: tm.slope_threshold.unwrap_or(0.0),
    })
}

/// The model's FO4 stage: its step delay and its input's transition (ps), what the slope
/// term must add to reach the characterised FO4, and unit shares of the technology's form.
struct Fo4 {
    step: f64,
    t_in: f64,
    extra: f64,
    unit: Slope,
}

impl Fo4 {
    fn of(tm: &Timing) -> Fo4 {
        let (wn, wp) = (tm.n_width_um, tm.p_width_um);
        let c_in = wn * tm.c_gate_n_ff_um + wp * tm.c_gate_p_ff_um;
        let c_self = wn * tm.c_diff_n_ff_um + wp * tm.c_diff_p_ff_um;
        let c = 4.0 * c_in + c_self;
        let tau = 0.5 * (tm.r_n_fall_kohm_um[0] / wn + tm.r_p_rise_kohm_um[0] / wp) * c;
        let unit = Slope {
            ramp: ramp_of(tm),
            ..Slope::single(1.0)
        };
        Fo4 {
            step: LN2 * tau,
            t_in: unit.chain_slew(tau),
            extra: tm.fo4_ps - LN2 * tau,
            unit,
        }
    }

    /// The slow-input limit per unit of cap at the FO4 stage.
    fn slow(&self) -> f64 {
        self.unit.slow_unit(self.t_in, self.step)
    }
}

/// The slope shares with the fast-input share given and the cap solved from the FO4:
/// 1 / (fo4 − step) = 1 / (fast · t_in) + 1 / (cap · slow), slow = step (saturating) or
/// √(t_in · step) (with a ramp characterisation). None when the fast share alone cannot
/// reach the FO4 (no finite cap does).
pub fn slope_with_fast(tm: &Timing, fast: f64) -> Option<Slope> {
    let f = Fo4::of(tm);
    let inv = 1.0 / f.extra - 1.0 / (fast * f.t_in);
    (f.extra > 0.0 && fast > 0.0 && inv > 0.0).then(|| Slope {
        fast,
        cap: 1.0 / (inv * f.slow()),
        ramp: f.unit.ramp,
    })
}

/// The slope shares with the slow-input share `cap` given and the fast one solved from the
/// FO4 (the inverse of [`slope_with_fast`]). None when no fast share reaches the FO4 with it.
pub fn slope_for_cap(tm: &Timing, cap: f64) -> Option<Slope> {
    let f = Fo4::of(tm);
    let inv = 1.0 / f.extra - 1.0 / (cap * f.slow());
    (f.extra > 0.0 && cap > 0.0 && inv > 0.0).then(|| Slope {
        fast: 1.0 / (inv * f.t_in),
        cap,
        ramp: f.unit.ramp,
    })
}

/// The slope shares an edge on node `x` meets in stage `st`: the switching threshold moved
/// from the plain inverter's by the technology's `slope_threshold_gain` times the change in
/// the pull-up's share of the drive, G_p / (G_p + G_n), G = W / R over the devices `x` gates
/// with a channel end at their own rail (a gate skewed to a strong pull-up switches early on
/// a falling input: Rabaey, Chandrakasan & Nikolić §5.3 on the switching threshold, common
/// practice). Where `x` gates devices at only one rail (a clocked foot, a pass device) the
/// plain inverter's threshold stands.
pub fn gate_slope(
    tm: &Timing,
    k: Slope,
    devs: &[Dev],
    kind: &[NodeKind],
    st: &Stage,
    x: u32,
) -> Slope {
    let (Some(mut ramp), Some(gain)) = (k.ramp, tm.slope_threshold_gain) else {
        return k;
    };
    let (rp, rn) = (tm.r_p_rise_kohm_um[0], tm.r_n_fall_kohm_um[0]);
    let (mut gp, mut gn) = (0.0, 0.0);
    for &di in &st.devs {
        let d = &devs[di as usize];
        if d.g != x || d.role == Role::Keeper {
            continue;
        }
        let at = |r: NodeKind| kind[d.a as usize] == r || kind[d.b as usize] == r;
        match d.mos {
            Mos::P if at(NodeKind::Vdd) => gp += d.w / (rp * d.l),
            Mos::N if at(NodeKind::Vss) => gn += d.w / (rn * d.l),
            _ => {}
        }
    }
    if gp <= 0.0 || gn <= 0.0 {
        return k;
    }
    let h0 = {
        let (p, n) = (tm.p_width_um / rp, tm.n_width_um / rn);
        p / (p + n)
    };
    // v = (0.5 − VM) / 0.8 (the threshold's lead on the 50 % point per ps of 10–90 %).
    ramp.threshold -= gain * (gp / (gp + gn) - h0) / 0.8;
    Slope {
        ramp: Some(ramp),
        ..k
    }
}

/// Solves a stage class stores for sharing before it must show use: from then on it keeps
/// storing only while at least one stored solve in four has been used again.
const CLASS_TRIAL: u32 = 64;

/// Largest slow-down a fight may cause (a node that barely wins is reported this much slower
/// than without the opposing path).
pub const FIGHT_MAX: f64 = 5.0;

/// A node whose drive path is this weak against its keeper (R_path / R_keeper) stays put: as a
/// divider it settles at R_path / (R_path + R_keeper) of the swing from the driven rail, which
/// reaches its reader's threshold (mid-supply) when the two are equal.
pub const STALL_RATIO: f64 = 1.0;

const NONE: u32 = u32::MAX;

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum NodeKind {
    Vss,
    Vdd,
    /// A top input (index into `Graph::inputs`): an ideal source.
    Input(usize),
    Inner,
}

#[derive(Debug, Clone)]
pub struct Dev {
    pub mos: Mos,
    pub role: Role,
    pub g: u32,
    pub a: u32,
    pub b: u32,
    pub w: f64,
    pub l: f64,
    pub leaf: u32,
    /// The other half of a transmission gate (same leaf, same two nodes, opposite type).
    pub partner: u32,
}

/// A channel-connected stage: its nodes and the devices whose channel touches them.
#[derive(Debug, Clone, Default)]
pub struct Stage {
    pub nodes: Vec<u32>,
    pub devs: Vec<u32>,
}

/// The transistor view of one netlist.
pub struct Graph {
    pub names: Vec<String>,
    pub cap_ff: Vec<f64>,
    pub kind: Vec<NodeKind>,
    pub devs: Vec<Dev>,
    pub stages: Vec<Stage>,
    pub stage_of: Vec<u32>,
    /// Index of a node inside its stage.
    pub local: Vec<u32>,
    /// Stages whose devices a node gates.
    pub fanout: Vec<Vec<u32>>,
    /// The slope shares a node's edge meets in each of those stages: `slope_k` with the
    /// switching threshold of the devices it gates there ([`gate_slope`]).
    pub fanout_slope: Vec<Vec<Slope>>,
    /// Devices whose channel touches a node: (device, other end).
    pub adj: Vec<Vec<(u32, u32)>>,
    pub inputs: Vec<u32>,
    pub outputs: Vec<u32>,
    pub clk: Option<u32>,
    pub leaf_paths: Vec<String>,
    pub width: usize,
    pub dynamic: bool,
    pub vdd_v: f64,
    /// Input transition 10–90 %, ps: the ideal source's (the technology's `slew`); with the
    /// deck's buffered drivers each input has its own, `input_slews`.
    pub input_slew_ps: f64,
    /// Per node, the transition an input edge starts with (ps); `input_slew_ps` elsewhere.
    pub input_slews: Vec<f64>,
    /// The input-slope shares fitted to the technology's FO4 ([`slope_share`]).
    pub slope_k: Slope,
    pub tm: Timing,
    /// Per stage, the nodes whose values decide its solve (its devices' gates, the top
    /// inputs its channels touch, its own nodes), when there are at most 128 of them: a
    /// solve is a function of these values alone, so a timer caches it by them.
    pub key_nodes: Vec<Option<Vec<u32>>>,
    /// The other way round: for every node, the (stage, bit) places it holds in those keys,
    /// so a simulation keeps every stage's key up to date as nodes change.
    pub key_refs: Vec<Vec<(u32, u8)>>,
    /// Per stage, its class: stages with the same devices, sizes, node capacitances and
    /// wiring in local terms (a bit slice repeated along the adder) solve alike for the same
    /// key, so a timer shares their solves (`stage_classes`). NONE: not cached.
    pub class_of: Vec<u32>,
    /// Position of every device in its stage's `devs` (NONE: in no stage).
    pub dev_pos: Vec<u32>,
    /// Share solves between the stages of a class (on; off only to test that sharing changes
    /// nothing).
    pub share_classes: bool,
    /// The length every resistance was characterised at (the technology's minimum), µm: a
    /// longer device (a keeper) is proportionally weaker.
    pub l_min: f64,
    /// Time every keeper on a drive path as fighting it at once, not only the node's own (the
    /// keeper check's pessimistic model; estimates use the node's own keeper).
    pub all_keepers: bool,
}

impl Graph {
    pub fn new(spec: &Spec, design: &Design, tm: &Timing) -> Result<Graph> {
        let flat = design.flatten();
        let mut names = flat.names.clone();
        let vss = names.len() as u32;
        names.push("vss".into());
        let vdd = names.len() as u32;
        names.push("vdd".into());
        let mut kind = vec![NodeKind::Inner; names.len()];
        kind[vss as usize] = NodeKind::Vss;
        kind[vdd as usize] = NodeKind::Vdd;
        let mut inputs = vec![];
        let mut outputs = vec![];
        let mut clk = None;
        for ((_, dir), &g) in design.top().pin_dirs().iter().zip(&flat.top_ports) {
            match dir {
                Dir::In => {
                    kind[g as usize] = NodeKind::Input(inputs.len());
                    if names[g as usize] == "clk" {
                        clk = Some(g);
                    }
                    inputs.push(g);
                }
                Dir::Out => outputs.push(g),
            }
        }
        let mut devs: Vec<Dev> = vec![];
        let mut leaf_paths = vec![];
        // Each cell's diffusion ends, as the SPICE view prints them.
        let ends_of: BTreeMap<CellKind, Vec<[End; 2]>> = design
            .cells
            .iter()
            .map(|(k, c)| (*k, c.diffusion_ends()))
            .collect();
        let mut dev_ends: Vec<[End; 2]> = vec![];
        for (li, leaf) in flat.leaves.iter().enumerate() {
            leaf_paths.push(leaf.path.clone());
            let cell = &design.cells[&leaf.kind];
            dev_ends.extend(ends_of[&leaf.kind].iter().copied());
            let mut nodes = flat.leaf_nodes(design, li, vss, vdd);
            let first = devs.len();
            for d in &cell.devices {
                let mut node = |n: &str| -> u32 {
                    let (g, new) = nodes.id(n, &mut names);
                    if new {
                        kind.push(NodeKind::Inner);
                    }
                    g
                };
                let (a, b, g) = (node(&d.d), node(&d.s), node(&d.g));
                devs.push(Dev {
                    mos: d.mos,
                    role: d.role,
                    g,
                    a,
                    b,
                    w: d.w,
                    l: d.l,
                    leaf: li as u32,
                    partner: NONE,
                });
            }
            // Transmission gates: an NMOS and a PMOS of this leaf across the same two nodes.
            for i in first..devs.len() {
                for j in first..devs.len() {
                    let (x, y) = (&devs[i], &devs[j]);
                    if i != j
                        && x.mos == Mos::N
                        && y.mos == Mos::P
                        && x.partner == NONE
                        && y.partner == NONE
                        && ((x.a == y.a && x.b == y.b) || (x.a == y.b && x.b == y.a))
                    {
                        devs[i].partner = j as u32;
                        devs[j].partner = i as u32;
                    }
                }
            }
        }
        let n = names.len();
        let is_source = |k: NodeKind| !matches!(k, NodeKind::Inner);
        // Capacitance of every node, fF.
        let mut cap_ff = vec![0.0; n];
        debug_assert_eq!(devs.len(), dev_ends.len());
        for (d, ends) in devs.iter().zip(&dev_ends) {
            // A device with neither channel end at its own rail (a pass device, the upper
            // devices of a stack) forms its channel only when the data lets it: the
            // data-averaged gate figure.
            let rail = match d.mos {
                Mos::N => NodeKind::Vss,
                Mos::P => NodeKind::Vdd,
            };
            let at_rail = kind[d.a as usize] == rail || kind[d.b as usize] == rail;
            let cg = tm.c_gate_ff_um(d.mos, d.role == Role::Pass || !at_rail);
            // Gate capacitance grows with the channel's area (characterised at the minimum
            // length), diffusion with the width alone, per end as contacted or shared.
            cap_ff[d.g as usize] += cg * d.w * d.l / spec.technology.l_min;
            cap_ff[d.a as usize] += tm.c_diff_ff_um(d.mos, ends[0]) * d.w;
            cap_ff[d.b as usize] += tm.c_diff_ff_um(d.mos, ends[1]) * d.w;
        }
        for &o in &outputs {
            cap_ff[o as usize] += spec.testbench.load * 1e15;
        }
        // Wires: the same per-bit capacitance and lengths as the SPICE view's.
        let per_bit_ff = spec.parasitics.wire_per_bit * 1e15;
        if per_bit_ff > 0.0 {
            for (g, span) in flat.wire_spans().into_iter().enumerate() {
                // Rounded as the deck prints it.
                cap_ff[g] += (per_bit_ff * span as f64 * 1e4).round() / 1e4;
            }
        }
        // Each input's edge: an ideal ramp, or what the deck's driver chain gives the pin.
        let ideal_slew = spec.technology.slew * 1e12 * 0.8;
        let mut input_slews = vec![ideal_slew; n];
        if spec.testbench.buffered(&spec.technology) {
            for &x in &inputs {
                input_slews[x as usize] = super::drivers::pin_slew_ps(spec, tm, cap_ff[x as usize]);
            }
        }
        // Channel-connected stages by union-find over source/drain, sources excluded.
        let mut parent: Vec<u32> = (0..n as u32).collect();
        fn find(p: &mut [u32], mut x: u32) -> u32 {
            while p[x as usize] != x {
                p[x as usize] = p[p[x as usize] as usize];
                x = p[x as usize];
            }
            x
        }
        let mut touched = vec![false; n];
        let mut adj: Vec<Vec<(u32, u32)>> = vec![vec![]; n];
        for (i, d) in devs.iter().enumerate() {
            adj[d.a as usize].push((i as u32, d.b));
            adj[d.b as usize].push((i as u32, d.a));
            for x in [d.a, d.b] {
                if !is_source(kind[x as usize]) {
                    touched[x as usize] = true;
                }
            }
            if !is_source(kind[d.a as usize]) && !is_source(kind[d.b as usize]) {
                let (ra, rb) = (find(&mut parent, d.a), find(&mut parent, d.b));
                if ra != rb {
                    parent[ra.max(rb) as usize] = ra.min(rb);
                }
            }
        }
        let mut stage_of = vec![NONE; n];
        let mut local = vec![NONE; n];
        let mut stages: Vec<Stage> = vec![];
        let mut root_stage: HashMap<u32, u32> = HashMap::new();
        for x in 0..n as u32 {
            if !touched[x as usize] {
                continue;
            }
            let r = find(&mut parent, x);
            let s = *root_stage.entry(r).or_insert_with(|| {
                stages.push(Stage::default());
                (stages.len() - 1) as u32
            });
            stage_of[x as usize] = s;
            local[x as usize] = stages[s as usize].nodes.len() as u32;
            stages[s as usize].nodes.push(x);
        }
        for (i, d) in devs.iter().enumerate() {
            let s = if stage_of[d.a as usize] != NONE {
                stage_of[d.a as usize]
            } else {
                stage_of[d.b as usize]
            };
            if s != NONE {
                stages[s as usize].devs.push(i as u32);
            }
        }
        let mut fanout: Vec<Vec<u32>> = vec![vec![]; n];
        for (si, st) in stages.iter().enumerate() {
            for &di in &st.devs {
                let g = devs[di as usize].g as usize;
                if fanout[g].last() != Some(&(si as u32)) && !fanout[g].contains(&(si as u32)) {
                    fanout[g].push(si as u32);
                }
            }
        }
        let slope_k = slope_share(tm);
        let fanout_slope = fanout
            .iter()
            .enumerate()
            .map(|(x, sts)| {
                sts.iter()
                    .map(|&si| {
                        gate_slope(tm, slope_k, &devs, &kind, &stages[si as usize], x as u32)
                    })
                    .collect()
            })
            .collect();
        let width = spec.width;
        let key_nodes = stages
            .iter()
            .map(|st| {
                let mut k: Vec<u32> = st.nodes.clone();
                for &di in &st.devs {
                    let d = &devs[di as usize];
                    k.push(d.g);
                    for x in [d.a, d.b] {
                        if matches!(kind[x as usize], NodeKind::Input(_)) {
                            k.push(x);
                        }
                    }
                }
                k.sort_unstable();
                k.dedup();
                (k.len() <= 128).then_some(k)
            })
            .collect::<Vec<Option<Vec<u32>>>>();
        let mut key_refs = vec![vec![]; names.len()];
        for (st, kn) in key_nodes.iter().enumerate() {
            for (i, &x) in kn.iter().flatten().enumerate() {
                key_refs[x as usize].push((st as u32, i as u8));
            }
        }
        let (class_of, dev_pos) = stage_classes(
            &stages, &key_nodes, &devs, &kind, &cap_ff, &adj, &stage_of, &local,
        );
        Ok(Graph {
            class_of,
            dev_pos,
            share_classes: true,
            names,
            cap_ff,
            kind,
            devs,
            stages,
            stage_of,
            local,
            fanout,
            fanout_slope,
            adj,
            inputs,
            outputs,
            clk,
            leaf_paths,
            width,
            dynamic: design.dynamic,
            vdd_v: spec.technology.vdd,
            // The deck's sources ramp 0–100 % in `slew`; 10–90 % is 0.8 of it.
            input_slew_ps: ideal_slew,
            input_slews,
            slope_k,
            tm: tm.clone(),
            key_nodes,
            key_refs,
            l_min: spec.technology.l_min,
            all_keepers: false,
        })
    }

    /// Does this device conduct with these node values?
    fn on(&self, d: &Dev, val: &[bool]) -> bool {
        match d.mos {
            Mos::N => val[d.g as usize],
            Mos::P => !val[d.g as usize],
        }
    }

    /// The value a source node holds, if the node is a source.
    fn source_value(&self, x: u32, val: &[bool]) -> Option<bool> {
        match self.kind[x as usize] {
            NodeKind::Vss => Some(false),
            NodeKind::Vdd => Some(true),
            NodeKind::Input(_) => Some(val[x as usize]),
            NodeKind::Inner => None,
        }
    }

    /// Resistance (kΩ) of a conducting device (or a whole transmission gate when `tg`)
    /// carrying the node towards `v`, as a stack of `k` like devices.
    fn r_kohm(&self, d: &Dev, v: bool, tg: bool, k: usize) -> f64 {
        self.r_kohm_w(d, v, tg, k) * (d.l / self.l_min).max(1.0)
    }

    fn r_kohm_w(&self, d: &Dev, v: bool, tg: bool, k: usize) -> f64 {
        let t = &self.tm;
        let k = k.clamp(1, 3) - 1;
        if tg {
            // Per µm of the NMOS half's width (the PMOS half is pn_ratio wider, as characterised).
            let n = match d.mos {
                Mos::N => d.w,
                Mos::P => self.devs[d.partner as usize].w,
            };
            return if v {
                t.r_tg_rise_kohm_um / n
            } else {
                t.r_tg_fall_kohm_um / n
            };
        }
        let pass = d.role == Role::Pass;
        match (d.mos, v) {
            (Mos::N, false) if pass => t.r_pass_n_fall_kohm_um / d.w,
            // The characterised value is the whole stack's R × W of each device: one device
            // of a stack of k carries 1/k of it.
            (Mos::N, false) => t.r_n_fall_kohm_um[k] / d.w / (k + 1) as f64,
            // An NMOS passing a one: the pass-device value whatever its role.
            (Mos::N, true) => t.r_pass_n_rise_kohm_um / d.w,
            (Mos::P, true) => t.r_p_rise_kohm_um[k] / d.w / (k + 1) as f64,
            // A PMOS passing a zero, degraded as an NMOS passing a one is.
            (Mos::P, false) => {
                t.r_p_rise_kohm_um[0] * (t.r_pass_n_rise_kohm_um / t.r_pass_n_fall_kohm_um) / d.w
            }
        }
    }

    /// Resistance (kΩ) of a conducting transmission gate inside a ladder (fed through another
    /// one), carrying the node towards `v`; the single-gate value where the technology has no
    /// ladder value.
    fn r_tg_ladder(&self, d: &Dev, v: bool) -> f64 {
        let t = &self.tm;
        let n = match d.mos {
            Mos::N => d.w,
            Mos::P => self.devs[d.partner as usize].w,
        };
        let per = if v {
            t.r_tg_ladder_rise_kohm_um.unwrap_or(t.r_tg_rise_kohm_um)
        } else {
            t.r_tg_ladder_fall_kohm_um.unwrap_or(t.r_tg_fall_kohm_um)
        };
        per / n
    }

    /// Resistance (kΩ) of a lone pass NMOS inside a precharged ladder (fed through another
    /// one) passing a 0; the single-device value where the technology has no ladder value.
    fn r_pass_ladder(&self, d: &Dev) -> f64 {
        let t = &self.tm;
        t.r_pass_ladder_fall_kohm_um
            .unwrap_or(t.r_pass_n_fall_kohm_um)
            / d.w
            * (d.l / self.l_min).max(1.0)
    }

    /// Share of the downstream beyond device `d` that the node feeding it sees while it
    /// crosses: a lone pass NMOS passing a 0 into precharged nodes conducts only once its
    /// source has fallen by a threshold, so what lies beyond it is partly hidden (the
    /// technology's fitted `pass_ladder_visible`); a transmission gate shows the share fitted
    /// on transmission-gate ladders (`tg_ladder_visible_fall/rise`); every other device shows
    /// all of it.
    fn visibility(&self, d: &Dev, v: bool) -> f64 {
        let t = &self.tm;
        if d.partner != NONE {
            if v {
                t.tg_ladder_visible_rise
            } else {
                t.tg_ladder_visible_fall
            }
            .unwrap_or(1.0)
        } else if !v && d.role == Role::Pass && d.mos == Mos::N {
            t.pass_ladder_visible.unwrap_or(1.0)
        } else {
            1.0
        }
    }

    /// Is device `d`, fed through `parent`, a lone pass NMOS inside a pass ladder passing a 0?
    fn pass_ladder(&self, d: &Dev, parent: Option<&Dev>, v: bool) -> bool {
        !v && d.role == Role::Pass
            && d.mos == Mos::N
            && d.partner == NONE
            && parent.is_some_and(|dp| dp.role == Role::Pass && dp.partner == NONE)
    }

    pub fn n_nodes(&self) -> usize {
        self.names.len()
    }
}

/// The class of every stage (see [`Graph::class_of`]) and every device's position in its
/// stage. A stage's signature lists, in local terms, everything [`Graph::solve`] reads: each
/// node's capacitance; each device's type, role, size, transmission-gate partner and
/// terminals; each node's channel adjacency in order; and the key layout. A terminal is a
/// node of the stage (its local index), a rail, or a key position (a top input or another
/// stage's node, by where it sits in the stage's key); so two stages of one signature, given
/// the same key, solve to the same values on corresponding nodes and devices.
#[allow(clippy::too_many_arguments)]
fn stage_classes(
    stages: &[Stage],
    key_nodes: &[Option<Vec<u32>>],
    devs: &[Dev],
    kind: &[NodeKind],
    cap_ff: &[f64],
    adj: &[Vec<(u32, u32)>],
    stage_of: &[u32],
    local: &[u32],
) -> (Vec<u32>, Vec<u32>) {
    let mut dev_pos = vec![NONE; devs.len()];
    for st in stages {
        for (i, &di) in st.devs.iter().enumerate() {
            dev_pos[di as usize] = i as u32;
        }
    }
    let mut classes: HashMap<Vec<u64>, u32> = HashMap::new();
    let mut class_of = vec![NONE; stages.len()];
    let mut sig: Vec<u64> = vec![];
    for (si, st) in stages.iter().enumerate() {
        let Some(keys) = &key_nodes[si] else { continue };
        let key_pos = |x: u32| keys.binary_search(&x).map(|i| i as u64).unwrap_or(u64::MAX);
        let enc = |x: u32| -> u64 {
            if stage_of[x as usize] == si as u32 {
                local[x as usize] as u64
            } else {
                match kind[x as usize] {
                    NodeKind::Vss => 1 << 40,
                    NodeKind::Vdd => 2 << 40,
                    NodeKind::Input(_) => (3 << 40) | key_pos(x),
                    NodeKind::Inner => (4 << 40) | key_pos(x),
                }
            }
        };
        sig.clear();
        sig.extend([
            st.nodes.len() as u64,
            st.devs.len() as u64,
            keys.len() as u64,
        ]);
        for &x in &st.nodes {
            sig.push(cap_ff[x as usize].to_bits());
        }
        for &di in &st.devs {
            let d = &devs[di as usize];
            sig.extend([
                d.mos as u64 | (d.role as u64) << 8,
                d.w.to_bits(),
                d.l.to_bits(),
                enc(d.g),
                enc(d.a),
                enc(d.b),
            ]);
            if d.partner == NONE {
                sig.push(u64::MAX);
            } else {
                let p = &devs[d.partner as usize];
                let pos = dev_pos[d.partner as usize];
                let same =
                    stage_of[p.a as usize] == si as u32 || stage_of[p.b as usize] == si as u32;
                sig.extend([
                    if same { pos as u64 } else { u64::MAX - 1 },
                    p.w.to_bits(),
                    enc(p.g),
                ]);
            }
        }
        for &x in &st.nodes {
            sig.push(adj[x as usize].len() as u64);
            for &(di, y) in &adj[x as usize] {
                sig.extend([dev_pos[di as usize] as u64, enc(y)]);
            }
        }
        for &x in keys {
            sig.push(enc(x));
        }
        let n = classes.len() as u32;
        class_of[si] = *classes.entry(sig.clone()).or_insert(n);
    }
    (class_of, dev_pos)
}

/// Make `v` hold `m` copies of `x`, reusing its memory.
fn refill<T: Clone>(v: &mut Vec<T>, m: usize, x: T) {
    v.clear();
    v.resize(m, x);
}

/// Path strength: (weak, resistance kΩ); smaller is stronger.
#[derive(Clone, Copy, PartialEq, Debug)]
struct Cost {
    weak: bool,
    r: f64,
}

impl Cost {
    const INF: Cost = Cost {
        weak: true,
        r: f64::INFINITY,
    };
    fn cmp(&self, o: &Cost) -> Ordering {
        self.weak.cmp(&o.weak).then(self.r.total_cmp(&o.r))
    }
}

/// An f64 as a u64 of the same order (IEEE total order), a cheap heap key.
#[inline]
fn time_key(t: f64) -> u64 {
    let b = t.to_bits();
    if b >> 63 == 1 {
        !b
    } else {
        b | 1 << 63
    }
}

/// A heap entry: a path cost (or an event time as `r`) and a node or event index.
#[derive(PartialEq)]
struct HeapItem(Cost, u32);
impl Eq for HeapItem {}
impl PartialOrd for HeapItem {
    fn partial_cmp(&self, o: &Self) -> Option<Ordering> {
        Some(self.cmp(o))
    }
}
impl Ord for HeapItem {
    fn cmp(&self, o: &Self) -> Ordering {
        // Min-heap on cost (or time), then on index for a deterministic order.
        o.0.cmp(&self.0).then(o.1.cmp(&self.1))
    }
}

/// A node of a stage that a solve drives: its value, its delay model and the device that
/// carries the charge into it (for the path report).
#[derive(Debug, Clone, Copy)]
pub struct Driven {
    pub node: u32,
    pub value: bool,
    /// Elmore delay (ps) times the fight factor (2.2 × this is the output slew without a
    /// ramp characterisation).
    pub tau_ps: f64,
    /// Spread of the impulse response (ps): √(2·m2 − m1²), the standard deviation of the
    /// node's response (equal to the Elmore delay for a single pole, smaller at the far end
    /// of a ladder), times the fight factor.
    pub spread_ps: f64,
    /// Step delay (ps, the two-moment metric [`d2m`]) times the fight factor.
    pub step_ps: f64,
    /// The logic devices' share of the step (0.69 × their R × what each charges, ps, fight
    /// included): the part an input's slope acts on ([`node_delay`]).
    pub logic_ps: f64,
    pub dev: u32,
}

/// Scratch space for solving stages (reused to avoid allocation).
#[derive(Default)]
pub struct Scratch {
    dist: [Vec<Cost>; 2],
    pred: [Vec<(u32, u32)>; 2],
    order: [Vec<u32>; 2],
    down: Vec<f64>,
    tau: Vec<f64>,
    rpath: Vec<f64>,
    rdev: Vec<f64>,
    downm: Vec<f64>,
    m2: Vec<f64>,
    tlogic: Vec<f64>,
    /// Share of a child's downstream that its parent's crossing sees through the device
    /// between them (1, or the technology's pass-ladder value for a lone pass NMOS).
    alpha_in: Vec<f64>,
    /// Per-target sums (see [`visible_sums`]): the weighted downstream, then the two root-first
    /// accumulations.
    vis_d: Vec<f64>,
    vis_a: Vec<f64>,
    vis_b: Vec<f64>,
    /// With [`Graph::all_keepers`]: conductance (1/kΩ) of the keepers on each node that hold
    /// it against the drive, and each node's fight ratio over all of them.
    gk: Vec<f64>,
    kratio: Vec<f64>,
    /// Per node, the step delay of the last node its path reaches through a logic device
    /// (the logic devices' own output, where an input's slope acts).
    anchor: Vec<f64>,
    up: Vec<u32>,
    below: Vec<u32>,
    children: Vec<u32>,
    heap: BinaryHeap<HeapItem>,
    out: Vec<Driven>,
}

impl Graph {
    /// Solve one stage at switch level with the present gate values `val`; `proj` holds each
    /// node's projected value (a pending event's value, else its present value). Fills
    /// `sc.out` with every node that has a conducting path to a source.
    pub fn solve(&self, s: u32, val: &[bool], sc: &mut Scratch) {
        let st = &self.stages[s as usize];
        let m = st.nodes.len();
        sc.out.clear();
        for v in 0..2 {
            refill(&mut sc.dist[v], m, Cost::INF);
            refill(&mut sc.pred[v], m, (NONE, NONE));
            sc.order[v].clear();
        }
        for (vi, v) in [false, true].into_iter().enumerate() {
            sc.heap.clear();
            // Seeds: conducting devices from a source holding v.
            for &di in &st.devs {
                let d = &self.devs[di as usize];
                if !self.on(d, val) {
                    continue;
                }
                if d.mos == Mos::P
                    && d.partner != NONE
                    && self.on(&self.devs[d.partner as usize], val)
                {
                    continue; // the NMOS half carries the gate
                }
                let tg = d.partner != NONE && self.on(&self.devs[d.partner as usize], val);
                for (x, y) in [(d.a, d.b), (d.b, d.a)] {
                    if self.source_value(x, val) == Some(v)
                        && self.kind[y as usize] == NodeKind::Inner
                    {
                        let li = self.local[y as usize] as usize;
                        let c = Cost {
                            weak: d.role == Role::Keeper,
                            r: self.r_kohm(d, v, tg, 1),
                        };
                        if c.cmp(&sc.dist[vi][li]) == Ordering::Less {
                            sc.dist[vi][li] = c;
                            sc.pred[vi][li] = (NONE, di);
                            sc.heap.push(HeapItem(c, li as u32));
                        }
                    }
                }
            }
            while let Some(HeapItem(c, li)) = sc.heap.pop() {
                if c.cmp(&sc.dist[vi][li as usize]) == Ordering::Greater {
                    continue;
                }
                if sc.order[vi].last() == Some(&li) {
                    continue;
                }
                sc.order[vi].push(li);
                let x = st.nodes[li as usize];
                for &(di, y) in &self.adj[x as usize] {
                    if self.kind[y as usize] != NodeKind::Inner {
                        continue;
                    }
                    let d = &self.devs[di as usize];
                    if !self.on(d, val) {
                        continue;
                    }
                    let tg = d.partner != NONE && self.on(&self.devs[d.partner as usize], val);
                    if tg && d.mos == Mos::P {
                        continue;
                    }
                    let yl = self.local[y as usize] as usize;
                    let nc = Cost {
                        weak: c.weak || d.role == Role::Keeper,
                        r: c.r + self.r_kohm(d, v, tg, 1),
                    };
                    if nc.cmp(&sc.dist[vi][yl]) == Ordering::Less {
                        sc.dist[vi][yl] = nc;
                        sc.pred[vi][yl] = (li, di);
                        sc.heap.push(HeapItem(nc, yl as u32));
                    }
                }
            }
        }
        // Winners.
        let win = |li: usize, sc: &Scratch| -> Option<bool> {
            let (c0, c1) = (sc.dist[0][li], sc.dist[1][li]);
            match (c0.r.is_finite(), c1.r.is_finite()) {
                (false, false) => None,
                (true, false) => Some(false),
                (false, true) => Some(true),
                (true, true) => Some(c1.cmp(&c0) == Ordering::Less),
            }
        };
        for v in [
            &mut sc.down,
            &mut sc.tau,
            &mut sc.rpath,
            &mut sc.rdev,
            &mut sc.downm,
            &mut sc.m2,
            &mut sc.tlogic,
            &mut sc.alpha_in,
            &mut sc.vis_d,
            &mut sc.vis_a,
            &mut sc.vis_b,
            &mut sc.gk,
            &mut sc.kratio,
            &mut sc.anchor,
        ] {
            refill(v, m, 0.0);
        }
        for v in [&mut sc.up, &mut sc.below, &mut sc.children] {
            refill(v, m, 0);
        }
        for (vi, v) in [false, true].into_iter().enumerate() {
            let order = std::mem::take(&mut sc.order[vi]);
            // Downstream switching capacitance and single-child runs, leaves first.
            for &li in order.iter().rev() {
                let li = li as usize;
                let x = st.nodes[li];
                // Charge still to move: the node is not at v yet (a pending change counts).
                let mine = win(li, sc) == Some(v) && val[x as usize] != v;
                if mine {
                    sc.down[li] += self.cap_ff[x as usize];
                }
                let (p, di) = sc.pred[vi][li];
                sc.alpha_in[li] = self.visibility(&self.devs[di as usize], v);
                if p != NONE {
                    let pl = p as usize;
                    sc.down[pl] += sc.down[li];
                    sc.children[pl] += 1;
                    let logic = self.is_stack_dev(di, val);
                    sc.below[pl] = if logic { sc.below[li] + 1 } else { 0 };
                }
            }
            // Path resistance and Elmore delay, root first.
            for &li in order.iter() {
                let li = li as usize;
                let (p, di) = sc.pred[vi][li];
                let d = &self.devs[di as usize];
                let logic = self.is_stack_dev(di, val);
                let (up_parent, r_parent) = if p == NONE {
                    (0, 0.0)
                } else {
                    let pl = p as usize;
                    (sc.up[pl], sc.rpath[pl])
                };
                sc.up[li] = if logic { up_parent + 1 } else { 0 };
                let below = if sc.children[li] == 1 {
                    sc.below[li]
                } else {
                    0
                };
                let k = if logic {
                    (sc.up[li] + below) as usize
                } else {
                    1
                };
                let tg = d.partner != NONE && self.on(&self.devs[d.partner as usize], val);
                // A transmission gate fed through another one is inside a ladder; so is a
                // lone pass NMOS passing a 0 fed through another one.
                let parent_dev =
                    (p != NONE).then(|| &self.devs[sc.pred[vi][p as usize].1 as usize]);
                let in_ladder = tg
                    && parent_dev.is_some_and(|dp| {
                        dp.partner != NONE && self.on(&self.devs[dp.partner as usize], val)
                    });
                let in_pass_ladder = !tg && self.pass_ladder(d, parent_dev, v);
                let r = if in_ladder {
                    self.r_tg_ladder(d, v)
                } else if in_pass_ladder {
                    self.r_pass_ladder(d)
                } else {
                    self.r_kohm(d, v, tg, k)
                };
                sc.rpath[li] = r_parent + r;
                sc.rdev[li] = r;
            }
            // Elmore delay with every node's own view of what lies ahead (kΩ × fF = ps):
            // m1_j = Σ_k R_common(j, k) · C_k · w_j(k), w = 1 on and behind the path to j.
            for &li in order.iter() {
                let l = li as usize;
                let x = st.nodes[l];
                sc.downm[l] = if win(l, sc) == Some(v) && val[x as usize] != v {
                    self.cap_ff[x as usize]
                } else {
                    0.0
                };
            }
            visible_sums(
                &order,
                &sc.pred[vi],
                &sc.alpha_in,
                &sc.rpath,
                &sc.downm,
                &mut sc.vis_d,
                &mut sc.vis_a,
                &mut sc.vis_b,
                &mut sc.tau,
            );
            // The logic devices' share with the same view.
            for &li in order.iter() {
                let l = li as usize;
                let (p, di) = sc.pred[vi][l];
                let tl_parent = if p == NONE {
                    0.0
                } else {
                    sc.tlogic[p as usize]
                };
                sc.tlogic[l] = tl_parent;
                if self.is_stack_dev(di, val) {
                    sc.tlogic[l] += sc.rdev[l] * sc.vis_d[l];
                }
            }
            // Second moment: m2_j = Σ_k R_common(j, k) · C_k · m1_k · w_j(k).
            for &li in order.iter() {
                let l = li as usize;
                sc.downm[l] *= sc.tau[l];
            }
            visible_sums(
                &order,
                &sc.pred[vi],
                &sc.alpha_in,
                &sc.rpath,
                &sc.downm,
                &mut sc.vis_d,
                &mut sc.vis_a,
                &mut sc.vis_b,
                &mut sc.m2,
            );
            // Every keeper on the path at once (the keeper check's model): a keeper on node k
            // pushes its current through the drive path shared with node j, seen as far as
            // the capacitance is (the devices ahead conduct only partly), so j's level is
            // lifted by Σ_k G_k · R_common(j, k) · w_j(k), in units of the swing.
            let mut keepers = false;
            if self.all_keepers {
                sc.gk[..m].fill(0.0);
                for &di in &st.devs {
                    let d = &self.devs[di as usize];
                    if d.role != Role::Keeper || !self.on(d, val) {
                        continue;
                    }
                    for (x, y) in [(d.a, d.b), (d.b, d.a)] {
                        if self.source_value(x, val) == Some(!v)
                            && self.kind[y as usize] == NodeKind::Inner
                        {
                            sc.gk[self.local[y as usize] as usize] +=
                                1.0 / self.r_kohm(d, !v, false, 1);
                            keepers = true;
                        }
                    }
                }
                if keepers {
                    visible_sums(
                        &order,
                        &sc.pred[vi],
                        &sc.alpha_in,
                        &sc.rpath,
                        &sc.gk,
                        &mut sc.vis_d,
                        &mut sc.vis_a,
                        &mut sc.vis_b,
                        &mut sc.kratio,
                    );
                }
            }
            // With a ramp characterisation an input's slope acts once, on the logic devices'
            // own output: the nodes past it (a ladder the driver feeds) follow that node, so
            // none of them gets a larger logic share than its step.
            if self.slope_k.ramp.is_some() {
                for &li in order.iter() {
                    let l = li as usize;
                    let (p, di) = sc.pred[vi][l];
                    sc.anchor[l] = if p == NONE || self.is_stack_dev(di, val) {
                        d2m(sc.tau[l], sc.m2[l])
                    } else {
                        sc.anchor[p as usize]
                    };
                }
            }
            for &li in order.iter() {
                let l = li as usize;
                if win(l, sc) != Some(v) {
                    continue;
                }
                let x = st.nodes[l];
                let opp = sc.dist[1 - vi][l];
                let mut factor = 1.0;
                if opp.r.is_finite() {
                    // The node against the opposing path that holds it (its keeper): a
                    // divider of the two resistances.
                    let ratio = if keepers && opp.weak {
                        sc.kratio[l]
                    } else {
                        sc.rpath[l] / opp.r
                    };
                    if opp.weak && ratio >= STALL_RATIO && val[x as usize] != v {
                        // The keeper holds the node on its side of the reader's threshold:
                        // the drive stalls and the node does not switch.
                        continue;
                    }
                    factor = if ratio < 1.0 - 1.0 / FIGHT_MAX {
                        1.0 / (1.0 - ratio)
                    } else {
                        FIGHT_MAX
                    };
                }
                let m1 = sc.tau[l];
                sc.out.push(Driven {
                    node: x,
                    value: v,
                    tau_ps: m1 * factor,
                    spread_ps: (2.0 * sc.m2[l] - m1 * m1).max(0.0).sqrt() * factor,
                    step_ps: d2m(m1, sc.m2[l]) * factor,
                    logic_ps: if self.slope_k.ramp.is_some() {
                        (LN2 * sc.tlogic[l]).min(sc.anchor[l]) * factor
                    } else {
                        LN2 * sc.tlogic[l] * factor
                    },
                    dev: sc.pred[vi][l].1,
                });
            }
            // Reset the per-value arrays the next value reuses.
            for &li in order.iter() {
                let l = li as usize;
                sc.down[l] = 0.0;
                sc.downm[l] = 0.0;
                sc.children[l] = 0;
                sc.below[l] = 0;
            }
            sc.order[vi] = order;
        }
    }

    /// A device that counts in a series stack (not a pass device or transmission gate).
    fn is_stack_dev(&self, di: u32, val: &[bool]) -> bool {
        let d = &self.devs[di as usize];
        d.role != Role::Pass && !(d.partner != NONE && self.on(&self.devs[d.partner as usize], val))
    }
}

/// Per-target sums over an RC tree (`order` root first, `pred` parents, `rpath` path
/// resistance): out_j = Σ_k R_common(j, k) · vals_k · w_j(k), where w_j(k) = 1 for k on the
/// path to j or hanging off it, and the product of the `alpha_in` of the devices between j and
/// k for k beyond j. With every alpha 1 it is the plain Elmore sum Σ_{i on path} R_i · (vals
/// below i). Computed in two passes: the weighted downstream D_k = vals_k + Σ_c alpha_c D_c,
/// then out_j = A_j − B_j with A_j = A_p + rpath_j · D_j and B_j = B_p + rpath_p · alpha_j · D_j.
#[allow(clippy::too_many_arguments)]
fn visible_sums(
    order: &[u32],
    pred: &[(u32, u32)],
    alpha_in: &[f64],
    rpath: &[f64],
    vals: &[f64],
    d: &mut [f64],
    a: &mut [f64],
    b: &mut [f64],
    out: &mut [f64],
) {
    for &li in order.iter() {
        d[li as usize] = vals[li as usize];
    }
    for &li in order.iter().rev() {
        let l = li as usize;
        let p = pred[l].0;
        if p != NONE {
            d[p as usize] += alpha_in[l] * d[l];
        }
    }
    for &li in order.iter() {
        let l = li as usize;
        let p = pred[l].0;
        let (ap, bp, rp) = if p == NONE {
            (0.0, 0.0, 0.0)
        } else {
            let p = p as usize;
            (a[p], b[p], rpath[p])
        };
        a[l] = ap + rpath[l] * d[l];
        b[l] = bp + rp * alpha_in[l] * d[l];
        out[l] = a[l] - b[l];
    }
}

/// One node transition of a timed run.
#[derive(Debug, Clone, Copy)]
pub struct Event {
    /// This change takes its node back before its last edge had finished, and called off
    /// what that edge had scheduled ([`Sim::run_timed`]).
    pub filters: bool,
    pub node: u32,
    pub value: bool,
    pub time_ps: f64,
    /// 10–90 % transition time, ps.
    pub slew_ps: f64,
    /// The event whose evaluation scheduled this one (None: an input edge).
    pub cause: u32,
    /// The device that carried the charge (NONE for inputs).
    pub dev: u32,
}

/// The state of a simulation: node values and reusable space.
pub struct Sim<'g> {
    pub g: &'g Graph,
    pub val: Vec<bool>,
    proj: Vec<bool>,
    pending: Vec<u32>,
    sc: Scratch,
    queue: VecDeque<u32>,
    queued: Vec<bool>,
    pub events: Vec<Event>,
    /// Last event of every node in the latest timed run (NONE: none).
    pub last: Vec<u32>,
    /// Capacitance switched by the events applied in the latest timed run (fF).
    switched_ff: f64,
    /// Capacitance of the nodes whose value the latest timed run changed, each counted once:
    /// what a zero-delay run of the same pair switches (fF).
    settled_ff: f64,
    /// Pending events, earliest first, then by event index (a deterministic order).
    heap: BinaryHeap<Reverse<(u64, u32)>>,
    /// Solves already done: (stage, key) -> range in `solved` (see `Graph::key_nodes`).
    cache: HashMap<(u32, u128), (u32, u32), BuildKeyHasher>,
    solved: Vec<Driven>,
    /// Solves shared by a stage class: (class, key) -> range in `canon`, whose entries hold
    /// local node indices and device positions in the stage.
    class_cache: HashMap<(u32, u128), (u32, u32), BuildKeyHasher>,
    canon: Vec<Driven>,
    /// Per class: solves stored for sharing, and shared solves used. A class whose stored
    /// solves are seldom used again (a long chain segment, whose keys rarely repeat in another
    /// segment) stops storing them: [`CLASS_TRIAL`].
    class_use: Vec<(u32, u32)>,
    /// A solve of a stage too large to cache, at the end of `solved` until the next one.
    uncached_from: usize,
    /// Every stage's key: the values of its key nodes, bit i for `key_nodes[st][i]`, kept
    /// up to date by [`Sim::set`].
    keys: Vec<u128>,
    /// Nodes changed by the latest untimed settle, with their value before it.
    touched: Vec<(u32, bool)>,
    seen: Vec<bool>,
}

/// A fast hash for (stage, key) pairs (multiply-rotate over the words; no security need).
#[derive(Default, Clone, Copy)]
pub struct BuildKeyHasher;
#[derive(Default)]
pub struct KeyHasher(u64);
impl std::hash::BuildHasher for BuildKeyHasher {
    type Hasher = KeyHasher;
    fn build_hasher(&self) -> KeyHasher {
        KeyHasher(0)
    }
}
impl std::hash::Hasher for KeyHasher {
    fn write(&mut self, bytes: &[u8]) {
        for &b in bytes {
            self.write_u64(b as u64);
        }
    }
    fn write_u32(&mut self, x: u32) {
        self.write_u64(x as u64);
    }
    fn write_u64(&mut self, x: u64) {
        self.0 = (self.0.rotate_left(23) ^ x).wrapping_mul(0x9e37_79b9_7f4a_7c15);
    }
    fn write_u128(&mut self, x: u128) {
        self.write_u64(x as u64);
        self.write_u64((x >> 64) as u64);
    }
    fn finish(&self) -> u64 {
        self.0 ^ (self.0 >> 29)
    }
}

impl<'g> Sim<'g> {
    /// Solve stage `st` with the present values: the range of `solved` holding the nodes it
    /// drives. Cached by the values of the stage's key nodes.
    fn solve_cached(&mut self, st: u32) -> (usize, usize) {
        let g = self.g;
        self.solved.truncate(self.uncached_from);
        let key = g.key_nodes[st as usize]
            .as_ref()
            .map(|_| self.keys[st as usize]);
        if let Some(key) = key {
            if let Some(&(a, n)) = self.cache.get(&(st, key)) {
                return (a as usize, (a + n) as usize);
            }
        }
        let a = self.solved.len();
        let class = (key.is_some() && g.share_classes).then(|| g.class_of[st as usize]);
        let shared = class.and_then(|c| self.class_cache.get(&(c, key.unwrap())).copied());
        let stage = &g.stages[st as usize];
        if let Some((ca, cn)) = shared {
            self.class_use[class.unwrap() as usize].1 += 1;
            for i in ca..ca + cn {
                let d = self.canon[i as usize];
                self.solved.push(Driven {
                    node: stage.nodes[d.node as usize],
                    dev: stage.devs[d.dev as usize],
                    ..d
                });
            }
        } else {
            let mut sc = std::mem::take(&mut self.sc);
            g.solve(st, &self.val, &mut sc);
            self.solved.extend_from_slice(&sc.out);
            let worth = |u: (u32, u32)| u.0 < CLASS_TRIAL || u.1 * 4 >= u.0;
            if let Some(c) = class.filter(|&c| worth(self.class_use[c as usize])) {
                self.class_use[c as usize].0 += 1;
                let ca = self.canon.len() as u32;
                for d in &sc.out {
                    self.canon.push(Driven {
                        node: g.local[d.node as usize],
                        dev: g.dev_pos[d.dev as usize],
                        ..*d
                    });
                }
                self.class_cache
                    .insert((c, key.unwrap()), (ca, sc.out.len() as u32));
            }
            self.sc = sc;
        }
        let b = self.solved.len();
        if let Some(key) = key {
            self.cache.insert((st, key), (a as u32, (b - a) as u32));
            self.uncached_from = b;
        }
        (a, b)
    }

    /// All nodes low, then settled (rails at their values).
    pub fn new(g: &'g Graph) -> Result<Sim<'g>> {
        let n = g.n_nodes();
        let mut val = vec![false; n];
        for (i, k) in g.kind.iter().enumerate() {
            if *k == NodeKind::Vdd {
                val[i] = true;
            }
        }
        let mut s = Sim {
            g,
            proj: val.clone(),
            val,
            pending: vec![NONE; n],
            sc: Scratch::default(),
            queue: VecDeque::new(),
            queued: vec![false; g.stages.len()],
            events: vec![],
            last: vec![NONE; n],
            switched_ff: 0.0,
            settled_ff: 0.0,
            heap: BinaryHeap::new(),
            cache: HashMap::with_hasher(BuildKeyHasher),
            solved: vec![],
            class_cache: HashMap::with_hasher(BuildKeyHasher),
            canon: vec![],
            class_use: vec![
                (0, 0);
                g.class_of
                    .iter()
                    .filter(|&&c| c != NONE)
                    .max()
                    .map_or(0, |&c| c as usize + 1)
            ],
            uncached_from: 0,
            keys: vec![0; g.stages.len()],
            touched: vec![],
            seen: vec![false; n],
        };
        for x in 0..n {
            if s.val[x] {
                for &(st, i) in &g.key_refs[x] {
                    s.keys[st as usize] |= 1u128 << i;
                }
            }
        }
        for st in 0..g.stages.len() as u32 {
            s.enqueue(st);
        }
        s.settle()?;
        for &(x, _) in &s.touched {
            s.seen[x as usize] = false;
        }
        s.touched.clear();
        Ok(s)
    }

    /// Set a node's value, keeping the stage keys it belongs to in step.
    #[inline]
    fn set(&mut self, x: usize, v: bool) {
        self.val[x] = v;
        for &(st, i) in &self.g.key_refs[x] {
            self.keys[st as usize] ^= 1u128 << i;
        }
    }

    fn enqueue(&mut self, st: u32) {
        if !self.queued[st as usize] {
            self.queued[st as usize] = true;
            self.queue.push_back(st);
        }
    }

    /// Set input nodes (untimed) and settle. Returns the switched capacitance, fF.
    pub fn apply_untimed(&mut self, changes: &[(u32, bool)]) -> Result<f64> {
        self.touched.clear();
        for &(x, v) in changes {
            if self.val[x as usize] != v {
                self.note(x as usize);
                self.set(x as usize, v);
                self.proj[x as usize] = v;
                for k in 0..self.g.fanout[x as usize].len() {
                    let st = self.g.fanout[x as usize][k];
                    self.enqueue(st);
                }
            }
        }
        self.settle()?;
        let mut sum = 0.0;
        for &(x, was) in &self.touched {
            self.seen[x as usize] = false;
            if self.val[x as usize] != was && self.g.kind[x as usize] == NodeKind::Inner {
                sum += self.g.cap_ff[x as usize];
            }
        }
        Ok(sum)
    }

    /// Remember a node's value before an untimed settle changes it (once per settle).
    #[inline]
    fn note(&mut self, x: usize) {
        if !self.seen[x] {
            self.seen[x] = true;
            self.touched.push((x as u32, self.val[x]));
        }
    }

    /// Zero-delay settling of every queued stage.
    fn settle(&mut self) -> Result<()> {
        let mut budget = 200 * (self.g.stages.len() + 10);
        while let Some(st) = self.queue.pop_front() {
            self.queued[st as usize] = false;
            budget = budget.checked_sub(1).ok_or_else(|| {
                Error::Check("timing: the circuit does not settle (oscillation?)".into())
            })?;
            let (a, b) = self.solve_cached(st);
            for i in a..b {
                let d = self.solved[i];
                let x = d.node as usize;
                if self.val[x] != d.value {
                    self.note(x);
                    self.set(x, d.value);
                    self.proj[x] = d.value;
                    for k in 0..self.g.fanout[x].len() {
                        let s2 = self.g.fanout[x][k];
                        self.enqueue(s2);
                    }
                }
            }
        }
        Ok(())
    }

    /// Apply input edges at t = 0 and propagate events in time order. `events` and `last`
    /// describe the run afterwards.
    pub fn run_timed(&mut self, changes: &[(u32, bool)]) -> Result<()> {
        let g = self.g;
        // Only the nodes of the previous run's events have a last event to clear.
        for e in &self.events {
            self.last[e.node as usize] = NONE;
        }
        self.events.clear();
        self.heap.clear();
        self.switched_ff = 0.0;
        self.touched.clear();
        for &(x, v) in changes {
            if self.val[x as usize] != v {
                let id = self.events.len() as u32;
                self.events.push(Event {
                    node: x,
                    value: v,
                    time_ps: 0.0,
                    slew_ps: g.input_slews[x as usize],
                    cause: NONE,
                    dev: NONE,
                    filters: false,
                });
                self.pending[x as usize] = id;
                self.proj[x as usize] = v;
                self.heap.push(Reverse((time_key(0.0), id)));
            }
        }
        let limit = event_limit(g);
        while let Some(Reverse((_, id))) = self.heap.pop() {
            let e = self.events[id as usize];
            let t = e.time_ps;
            let x = e.node as usize;
            if self.pending[x] != id {
                continue;
            }
            self.pending[x] = NONE;
            self.note(x);
            self.set(x, e.value);
            self.last[x] = id;
            if g.kind[x] == NodeKind::Inner {
                self.switched_ff += g.cap_ff[x];
            }
            if self.events.len() > limit {
                return Err(Error::Check(
                    "timing: too many events (the circuit oscillates?)".into(),
                ));
            }
            self.propagate(id, t);
        }
        self.settled_ff = 0.0;
        for &(x, was) in &self.touched {
            self.seen[x as usize] = false;
            if self.val[x as usize] != was && g.kind[x as usize] == NodeKind::Inner {
                self.settled_ff += g.cap_ff[x as usize];
            }
        }
        Ok(())
    }

    /// Solve the stages that the node of event `id` gates and schedule every change, each at
    /// the event's time plus its delay and no earlier than `now`.
    ///
    /// A change that takes a node back before its last edge has finished (a pulse narrower
    /// than its own 10–90 % transition, with a ramp characterisation), or that comes from an
    /// input already moving (half its own transition before its 50 % point) before that edge
    /// was half way, does not swing far enough to switch the node's readers (inertial
    /// filtering, common practice in event-driven timing): what that edge scheduled and has
    /// not yet happened is called off at once. (The second case: in an 8-bit Kogge-Stone on
    /// SKY130 ss at 125 degC, a black cell's inner node rose 92 ps after its generate input
    /// fell and fell back 112 ps later, turned back by a propagate input whose 162 ps edge had
    /// begun before that rise was half way; ngspice shows the node peaking at 0.54 V of 1.8,
    /// and the engine's worst path through that pulse read 779 ps against 344 measured.)
    /// Should the change itself be called off later, the readers are solved again from that
    /// edge.
    fn propagate(&mut self, id: u32, now: f64) {
        let g = self.g;
        let e = self.events[id as usize];
        let x = e.node as usize;
        let mut restore = vec![];
        for k in 0..g.fanout[x].len() {
            let st = g.fanout[x][k];
            let slope = g.fanout_slope[x][k];
            let (a, b) = self.solve_cached(st);
            for i in a..b {
                let d = self.solved[i];
                let y = d.node as usize;
                let delay = node_delay(
                    d.step_ps,
                    d.logic_ps,
                    e.slew_ps,
                    slope,
                    sense(e.value, d.value),
                );
                let at = (e.time_ps + delay).max(now);
                let mut filters = false;
                let on_its_way = d.value == self.proj[y];
                if on_its_way {
                    // Already on its way: only an earlier arrival under the new conditions (a
                    // fight ended, a stronger path opened) replaces it.
                    let p = self.pending[y];
                    if p == NONE || at >= self.events[p as usize].time_ps {
                        continue;
                    }
                    filters = self.events[p as usize].filters;
                } else if d.value == self.val[y] {
                    // A pending change is called off.
                    let p = self.pending[y];
                    if p != NONE && self.events[p as usize].filters {
                        restore.push(y);
                    }
                    self.pending[y] = NONE;
                    self.proj[y] = d.value;
                    continue;
                }
                let prev = self.last[y];
                if !filters && g.slope_k.ramp.is_some() && prev != NONE {
                    let p = self.events[prev as usize];
                    // Narrower than the last edge, or turned back by an input that had begun
                    // to move (half its transition before its 50 % point) before that edge
                    // was half way.
                    if at - p.time_ps < p.slew_ps || e.time_ps - 0.5 * e.slew_ps < p.time_ps {
                        filters = true;
                        self.call_off_caused(prev);
                    }
                }
                let nid = self.events.len() as u32;
                self.events.push(Event {
                    node: d.node,
                    value: d.value,
                    time_ps: at,
                    slew_ps: slope.slew(d.tau_ps, d.spread_ps, d.logic_ps, e.slew_ps),
                    cause: id,
                    dev: d.dev,
                    filters,
                });
                self.pending[y] = nid;
                self.proj[y] = d.value;
                self.heap.push(Reverse((time_key(at), nid)));
            }
        }
        // (Bounded like the run itself: an oscillation stops at the event limit there.)
        if self.events.len() > event_limit(g) {
            return;
        }
        for y in restore {
            let l = self.last[y];
            if l != NONE {
                self.propagate(l, now);
            }
        }
    }

    /// Call off every pending change that event `prev` caused.
    fn call_off_caused(&mut self, prev: u32) {
        let g = self.g;
        let x = self.events[prev as usize].node as usize;
        for k in 0..g.fanout[x].len() {
            let st = g.fanout[x][k] as usize;
            for &z in &g.stages[st].nodes {
                let z = z as usize;
                let q = self.pending[z];
                if q != NONE && self.events[q as usize].cause == prev {
                    self.pending[z] = NONE;
                    self.proj[z] = self.val[z];
                }
            }
        }
    }

    /// Switched capacitance of the latest timed run: every transition that happened,
    /// glitches included, called-off changes not (fF).
    pub fn run_switched_ff(&self) -> f64 {
        self.switched_ff
    }

    /// What a zero-delay run of the latest timed pair switches: the nodes whose value it
    /// changed, once each, glitches left out (fF).
    pub fn run_settled_ff(&self) -> f64 {
        self.settled_ff
    }
}

/// Events a timed run may make before it is taken for an oscillation.
fn event_limit(g: &Graph) -> usize {
    200 * (g.n_nodes() + 10)
}

/// Add up the transistor figures: count, gate area ΣW·L (µm²), total width (µm).
pub fn device_totals(g: &Graph) -> (usize, f64, f64) {
    let area = g.devs.iter().map(|d| d.w * d.l).sum();
    let width = g.devs.iter().map(|d| d.w).sum();
    (g.devs.len(), area, width)
}

/// The topological bound: the longest path through the stages, each node timed as if it
/// switched through the slowest tree of its stage (grown from every place the stage meets a
/// rail or an input, all devices conducting, every node of the stage switching), ignoring
/// whether any input vector makes that path happen. Keeper gates are not followed (the
/// feedback loop of a keeper is not a path). Returns (bound ps, arrival per node).
pub fn topological_bound(g: &Graph) -> Result<(f64, Vec<f64>)> {
    let t = Topo::new(g)?;
    Ok((t.bound, t.arrival))
}

/// [`topological_bound`]'s figure and each input's reach: the longest stage path from every
/// top input to any output (ps), in the order of `Graph::inputs` (the bound seen from one
/// input), from one walk of the stage graph. The reach orders and prunes the worst-pair search
/// ([`super::search`]); like the bound it ignores sensitisation.
pub fn bound_and_reach(g: &Graph) -> Result<(f64, Vec<f64>)> {
    let t = Topo::new(g)?;
    // tail[x]: longest path from node x's change to an output.
    let mut tail = vec![f64::NEG_INFINITY; g.n_nodes()];
    for &o in &g.outputs {
        tail[o as usize] = 0.0;
    }
    for &si in t.order.iter().rev() {
        // Entering stage si at time 0 reaches its node x at delay[x], then x's own tail.
        let through = g.stages[si]
            .nodes
            .iter()
            .map(|&x| t.delay[x as usize] + tail[x as usize])
            .fold(f64::NEG_INFINITY, f64::max);
        let st = &g.stages[si];
        // Its gates, and the top inputs its channels reach (a pass device fed by an input).
        let channel_inputs = st.devs.iter().flat_map(|&di| {
            let d = &g.devs[di as usize];
            [d.a, d.b]
                .into_iter()
                .filter(|&x| matches!(g.kind[x as usize], NodeKind::Input(_)))
        });
        for x in t.ins[si].iter().copied().chain(channel_inputs) {
            if tail[x as usize] < through {
                tail[x as usize] = through;
            }
        }
    }
    let reach = g
        .inputs
        .iter()
        .map(|&x| tail[x as usize].max(0.0))
        .collect();
    Ok((t.bound, reach))
}

/// The stage graph in topological order with each node's delay through its stage.
struct Topo {
    bound: f64,
    arrival: Vec<f64>,
    /// Delay from the stage's latest input to this node.
    delay: Vec<f64>,
    /// Stage inputs: gates of its devices except keepers.
    ins: Vec<Vec<u32>>,
    order: Vec<usize>,
}

impl Topo {
    fn new(g: &Graph) -> Result<Topo> {
        let ns = g.stages.len();
        let mut indeg = vec![0usize; ns];
        let mut ins: Vec<Vec<u32>> = vec![vec![]; ns];
        for (si, st) in g.stages.iter().enumerate() {
            for &di in &st.devs {
                let d = &g.devs[di as usize];
                if d.role == Role::Keeper || ins[si].contains(&d.g) {
                    continue;
                }
                ins[si].push(d.g);
            }
        }
        let mut readers: Vec<Vec<u32>> = vec![vec![]; ns];
        for (si, gates) in ins.iter().enumerate() {
            for &x in gates {
                let s = g.stage_of[x as usize];
                if s != NONE && s as usize != si {
                    readers[s as usize].push(si as u32);
                    indeg[si] += 1;
                }
            }
        }
        let mut arrival = vec![0.0f64; g.n_nodes()];
        let mut delay = vec![0.0f64; g.n_nodes()];
        let mut slew = g.input_slews.clone();
        let mut ready: VecDeque<usize> = (0..ns).filter(|&s| indeg[s] == 0).collect();
        let mut order = Vec::with_capacity(ns);
        while let Some(si) = ready.pop_front() {
            order.push(si);
            let (t_in, s_in) = ins[si]
                .iter()
                .map(|&x| (arrival[x as usize], slew[x as usize]))
                .fold((0.0f64, g.input_slew_ps), |acc, (t, s)| {
                    if t > acc.0 {
                        (t, s)
                    } else {
                        acc
                    }
                });
            for (x, (step, logic, tau)) in slowest_taus(g, si) {
                // The slowest sense: the bound takes the threshold's shift that delays.
                let d = node_delay(step, logic, s_in, g.slope_k, 1.0);
                delay[x as usize] = d;
                arrival[x as usize] = t_in + d;
                // The bound takes the widest edge: the Elmore delay as the spread.
                slew[x as usize] = g.slope_k.slew(tau, tau, logic, s_in);
            }
            for &r in &readers[si] {
                indeg[r as usize] -= 1;
                if indeg[r as usize] == 0 {
                    ready.push_back(r as usize);
                }
            }
        }
        if order.len() < ns {
            return Err(Error::Check(
                "timing: the stage graph has a loop other than a keeper's".into(),
            ));
        }
        let bound = g
            .outputs
            .iter()
            .map(|&o| arrival[o as usize])
            .fold(0.0, f64::max);
        Ok(Topo {
            bound,
            arrival,
            delay,
            ins,
            order,
        })
    }
}

/// For every node of a stage, the slowest step (the larger of the two-moment and 0.69 × Elmore
/// figures, with its logic share and Elmore delay) over trees grown breadth-first from
/// each entry (a device from a source) through every device of the stage, both directions.
fn slowest_taus(g: &Graph, si: usize) -> Vec<(u32, (f64, f64, f64))> {
    let st = &g.stages[si];
    let m = st.nodes.len();
    // Per node: (step, logic share, Elmore) of its slowest tree.
    let mut best = vec![(0.0f64, 0.0f64, 0.0f64); m];
    for &di in &st.devs {
        let d = &g.devs[di as usize];
        if d.role == Role::Keeper {
            continue;
        }
        for (x, y) in [(d.a, d.b), (d.b, d.a)] {
            if g.kind[x as usize] == NodeKind::Inner || g.kind[y as usize] != NodeKind::Inner {
                continue;
            }
            for v in [false, true] {
                let pulls_up = d.mos == Mos::P;
                if d.role != Role::Pass && pulls_up != v {
                    continue; // a pull-down does not raise a node, nor a pull-up lower it
                }
                // BFS tree from y over the stage's non-keeper devices.
                let mut pred = vec![(NONE, NONE); m];
                let mut seen = vec![false; m];
                let mut order = vec![];
                let y0 = g.local[y as usize] as usize;
                seen[y0] = true;
                pred[y0] = (NONE, di);
                order.push(y0);
                let mut h = 0;
                while h < order.len() {
                    let li = order[h];
                    h += 1;
                    let node = st.nodes[li];
                    for &(dj, z) in &g.adj[node as usize] {
                        let e = &g.devs[dj as usize];
                        if g.kind[z as usize] != NodeKind::Inner || e.role == Role::Keeper {
                            continue;
                        }
                        if e.mos == Mos::P && e.partner != NONE {
                            continue; // the NMOS half stands for the gate
                        }
                        let zl = g.local[z as usize] as usize;
                        if !seen[zl] {
                            seen[zl] = true;
                            pred[zl] = (li as u32, dj);
                            order.push(zl);
                        }
                    }
                }
                let mut down = vec![0.0; m];
                for &li in order.iter().rev() {
                    down[li] += g.cap_ff[st.nodes[li] as usize];
                    if pred[li].0 != NONE {
                        let p = pred[li].0 as usize;
                        down[p] += down[li];
                    }
                }
                let (mut tau, mut tlogic, mut rdev) = (vec![0.0; m], vec![0.0; m], vec![0.0; m]);
                for &li in &order {
                    let (p, dj) = pred[li];
                    let e = &g.devs[dj as usize];
                    let tg = e.partner != NONE;
                    let in_ladder = tg && p != NONE && {
                        let dp = &g.devs[pred[p as usize].1 as usize];
                        dp.partner != NONE
                    };
                    let parent = (p != NONE).then(|| &g.devs[pred[p as usize].1 as usize]);
                    let r = if in_ladder {
                        g.r_tg_ladder(e, v)
                    } else if g.pass_ladder(e, parent, v) {
                        g.r_pass_ladder(e)
                    } else {
                        g.r_kohm(e, v, tg, 1)
                    };
                    rdev[li] = r;
                    let (tp, lp) = if p == NONE {
                        (0.0, 0.0)
                    } else {
                        (tau[p as usize], tlogic[p as usize])
                    };
                    tau[li] = tp + r * down[li];
                    let logic = e.role != Role::Pass && !tg;
                    tlogic[li] = lp + if logic { r * down[li] } else { 0.0 };
                }
                // Second moment, as in `Graph::solve`.
                let mut downm = vec![0.0; m];
                for &li in order.iter().rev() {
                    downm[li] += g.cap_ff[st.nodes[li] as usize] * tau[li];
                    if pred[li].0 != NONE {
                        let p = pred[li].0 as usize;
                        downm[p] += downm[li];
                    }
                }
                let mut m2 = vec![0.0; m];
                for &li in &order {
                    let p = pred[li].0;
                    let mp = if p == NONE { 0.0 } else { m2[p as usize] };
                    m2[li] = mp + rdev[li] * downm[li];
                    // The bound takes the larger of the two metrics.
                    let step = d2m(tau[li], m2[li]).max(LN2 * tau[li]);
                    if step > best[li].0 {
                        best[li] = (step, LN2 * tlogic[li], tau[li]);
                    }
                }
            }
        }
    }
    st.nodes.iter().copied().zip(best).collect()
}

pub use super::search::{estimate, estimate_with, Budget, Estimate};

/// The technology's characterised timing parameters at its present conditions, or an input
/// error naming what is missing.
pub fn timing_of(spec: &Spec) -> Result<Timing> {
    spec.technology.timing.clone().ok_or_else(|| {
        Error::Input(format!(
            "technology: {}; run `carrywright characterize` and use the file it writes",
            no_timing(spec)
        ))
    })
}

/// Why a spec has no timing: its technology is not characterised at its conditions.
pub fn no_timing(spec: &Spec) -> String {
    use crate::spec::trim_num;
    let t = &spec.technology;
    let covered = match super::builtin_range(&t.name, &t.corner) {
        Some(([t0, t1], [v0, v1])) => format!(
            " (built in for that corner: {} to {} °C, {} to {} V)",
            trim_num(t0),
            trim_num(t1),
            trim_num(v0),
            trim_num(v1)
        ),
        None => String::new(),
    };
    format!(
        "{} has no characterised timing at corner {}, {} °C, {} V{covered}",
        t.name,
        t.corner,
        trim_num(t.temp),
        trim_num(t.vdd)
    )
}
