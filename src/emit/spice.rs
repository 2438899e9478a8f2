//! Transistor-level SPICE view (`NAME.sp`, subcircuits only) and the runnable ngspice deck
//! (`NAME_tb.sp`: models, supplies, stimulus, `.tran`, and a `.control` block that measures
//! the worst-case carry delay and supply power, samples every output and exits non-zero on
//! a failed measurement or a wrong level).

use super::vectors::{Labeled, WORST_CASE_FALL, WORST_CASE_RISE};
use super::{render, title, wrap, VERSION};
use crate::cells::Mos;
use crate::error::{Error, Result};
use crate::netlist::{Design, Master};
use crate::spec::{fmt_si, trim_num, Architecture, Spec, Style};
use crate::tech::End;
use crate::timing::search::Estimate;
use serde::Serialize;

const LINE: usize = 78;

#[derive(Serialize)]
struct CellCtx {
    name: String,
    comment: String,
    pins: String,
    devices: Vec<String>,
}

#[derive(Serialize)]
struct InstCtx {
    lines: Vec<String>,
}

#[derive(Serialize)]
struct ModuleCtx {
    name: String,
    comment: String,
    pins: Vec<String>,
    instances: Vec<InstCtx>,
    /// Wire capacitors (`parasitics.wire_per_bit`), one line each.
    wires: Vec<String>,
}

#[derive(Serialize)]
struct SubcktCtx {
    title: String,
    version: &'static str,
    name: String,
    origin: String,
    nmos: String,
    pmos: String,
    width: usize,
    dynamic: bool,
    cells: Vec<CellCtx>,
    modules: Vec<ModuleCtx>,
}

/// Pin names of a master in connection order, plus the supplies.
fn pin_words(design: &Design, master: Master) -> Vec<String> {
    let mut out: Vec<String> = match master {
        Master::Cell(k) => design.cells[&k]
            .pins
            .iter()
            .map(|p| p.name.to_string())
            .collect(),
        Master::Module(i) => {
            let m = &design.modules[i];
            m.pin_dirs()
                .iter()
                .map(|(id, _)| m.net_name(*id).to_string())
                .collect()
        }
    };
    out.push("vdd".into());
    out.push("vss".into());
    out
}

/// `NAME.sp`.
pub fn subcircuits(spec: &Spec, design: &Design) -> Result<String> {
    let tech = &spec.technology;
    let cells = design
        .cells
        .values()
        .map(|c| CellCtx {
            name: format!("{}_{}", design.name, c.base),
            comment: format!(
                "cell {}: {} ({} transistors)",
                c.base,
                c.summary,
                c.devices.len()
            ),
            pins: c.pins.iter().map(|p| p.name).collect::<Vec<_>>().join(" "),
            devices: c
                .devices
                .iter()
                .zip(c.diffusion_ends())
                .map(|(d, ends)| {
                    let (bulk, pmos) = match d.mos {
                        Mos::N => ("vss", false),
                        Mos::P => ("vdd", true),
                    };
                    tech.device_line(&d.name, &d.d, &d.g, &d.s, bulk, pmos, d.w, d.l, ends)
                })
                .collect(),
        })
        .collect();
    let last = design.modules.len() - 1;
    let per_bit_ff = spec.parasitics.wire_per_bit * 1e15;
    let spans = if per_bit_ff > 0.0 {
        design.wire_spans()
    } else {
        Default::default()
    };
    let modules = design
        .modules
        .iter()
        .enumerate()
        .map(|(i, m)| {
            let mut words = vec![m.name.clone()];
            words.extend(pin_words(design, Master::Module(i)));
            let mut pins = wrap(&words[1..], LINE - m.name.len() - 9);
            if pins.is_empty() {
                pins.push(String::new());
            }
            ModuleCtx {
                name: m.name.clone(),
                comment: format!(
                    "{} {}: {} transistors",
                    if i == last { "top" } else { "block" },
                    m.name,
                    design.transistors(Master::Module(i))
                ),
                pins,
                wires: spans
                    .range((i, crate::netlist::NetId(0))..=(i, crate::netlist::NetId(u32::MAX)))
                    .map(|(&(_, id), &span)| {
                        let net = m.net_name(id);
                        let c =
                            crate::spec::trim_num((per_bit_ff * span as f64 * 1e4).round() / 1e4);
                        format!("cw_{net} {net} vss {c}f")
                    })
                    .collect(),
                instances: m
                    .instances
                    .iter()
                    .map(|inst| {
                        let mut w = vec![inst.name.clone()];
                        w.extend(inst.conns.iter().map(|c| m.net_name(*c).to_string()));
                        w.push("vdd".into());
                        w.push("vss".into());
                        w.push(design.master_name(inst.master));
                        InstCtx {
                            lines: wrap(&w, LINE),
                        }
                    })
                    .collect(),
            }
        })
        .collect();
    render(
        "spice/cells.sp",
        &SubcktCtx {
            title: title(spec),
            version: VERSION,
            name: spec.name.clone(),
            origin: tech.origin.clone(),
            nmos: tech.nmos.clone(),
            pmos: tech.pmos.clone(),
            width: spec.width,
            dynamic: design.dynamic,
            cells,
            modules,
        },
    )
}

/// Timing of the deck: how long each vector lasts, where the strobes are, what is measured.
#[derive(Debug, Clone, Serialize)]
pub struct DeckPlan {
    /// Vector period, seconds.
    pub period: f64,
    pub period_from_spec: bool,
    /// How the period was chosen, one line for the deck header and NAME.json.
    pub period_rule: String,
    pub step: f64,
    /// Largest internal time step ngspice may take, seconds (separate from the print step).
    pub tmax: f64,
    pub slew: f64,
    pub tstop: f64,
    /// The vectors the deck applies: the directed ones and up to 8 of the random ones.
    #[serde(skip)]
    pub vectors: Vec<Labeled>,
    /// Fraction of the period at which outputs are sampled (evaluate phase in dynamic).
    pub strobe: f64,
    /// Dynamic designs: fraction of the period at which cout is sampled in precharge.
    pub precharge_strobe: Option<f64>,
    pub delay_from: &'static str,
    /// The timing engine's worst path, measured on its vector pair.
    pub worst: Option<WorstMeasure>,
    /// The input and clock drivers (`testbench.drivers: buffered`); None: ideal sources.
    pub drivers: Option<DriverPlan>,
}

/// The deck's driver chains (`timing::drivers`): per input pin, its capacitance and the
/// NMOS width of each stage.
#[derive(Debug, Clone, Serialize)]
pub struct DriverPlan {
    pub rule: &'static str,
    /// (pin, pin capacitance fF, stage NMOS widths µm), in port order (clk first).
    pub chains: Vec<(String, f64, Vec<f64>)>,
    /// Slowest data driver and the clock driver, source edge to the pin's 50 %, seconds.
    pub data_delay: f64,
    pub clock_delay: f64,
}

impl DriverPlan {
    fn new(spec: &Spec, design: &Design) -> Result<Option<DriverPlan>> {
        if !spec.testbench.buffered(&spec.technology) {
            return Ok(None);
        }
        let tm = crate::timing::engine::timing_of(spec)?;
        let g = crate::timing::engine::Graph::new(spec, design, &tm)?;
        let (mut data_delay, mut clock_delay) = (0.0f64, 0.0f64);
        let mut chains = vec![];
        for &x in &g.inputs {
            let c = g.cap_ff[x as usize];
            let d = crate::timing::drivers::delay_ps(spec, &tm, c) * 1e-12;
            if Some(x) == g.clk {
                clock_delay = d;
            } else {
                data_delay = data_delay.max(d);
            }
            chains.push((
                g.names[x as usize].clone(),
                (c * 100.0).round() / 100.0,
                crate::timing::drivers::chain(spec, &tm, c).nmos_um,
            ));
        }
        Ok(Some(DriverPlan {
            rule: "every input through an even chain of inverters tapered from a unit inverter to the pin's capacitance, stage effort at most 4; data drivers on vdrv, the clock driver on vclkd",
            chains,
            data_delay,
            clock_delay,
        }))
    }
}

/// The worst path the deck measures: the engine's vector pair is in the deck's vectors.
#[derive(Debug, Clone, Serialize)]
pub struct WorstMeasure {
    /// Index of the vector whose transition is measured (`after`).
    pub vector: usize,
    pub from: String,
    pub from_edge: &'static str,
    pub to: String,
    pub to_edge: &'static str,
    pub estimate_ps: f64,
    /// The nodes along the engine's path, input first (at most [`PATH_NODES`]): the deck
    /// writes their waveforms to NAME_path.dat.
    pub path: Vec<String>,
}

/// Most path nodes whose waveforms the deck writes (the first, the last and evenly spaced
/// ones between).
pub const PATH_NODES: usize = 10;

/// The nodes along an estimate's worst path whose waveforms the deck writes, input first.
pub fn path_nodes(e: &Estimate) -> Vec<String> {
    let mut nets: Vec<String> = vec![];
    for st in &e.worst_path {
        if nets.last() != Some(&st.net) {
            nets.push(st.net.clone());
        }
    }
    if nets.len() > PATH_NODES {
        let n = nets.len();
        nets = (0..PATH_NODES)
            .map(|i| nets[i * (n - 1) / (PATH_NODES - 1)].clone())
            .collect();
    }
    nets
}

/// Random vectors the transistor-level deck adds to the directed ones.
pub const DECK_RANDOM: usize = 8;

/// Most transient points a deck may ask for (`tstop / step`): ngspice allocates its output
/// vectors from this, so a tiny step over a long run exhausts memory before it starts.
pub const MAX_POINTS: f64 = 500_000.0;

/// Cap on the internal time step: a 100 ps cap cut ngspice's CPU time 2.4-3.3x with delays
/// moving under 1 % (measured here, shared/EDA-RECIPES.md); never above a twentieth of a
/// period, never below the print step.
pub const TMAX_CAP: f64 = 100e-12;

impl DeckPlan {
    pub fn new(
        spec: &Spec,
        design: &Design,
        plan: &[Labeled],
        estimate: Option<&Estimate>,
    ) -> Result<DeckPlan> {
        let n_directed = super::vectors::n_directed(plan);
        let take = n_directed + spec.testbench.random.min(DECK_RANDOM);
        let vectors: Vec<Labeled> = plan.iter().take(take).cloned().collect();
        let dynamic = spec.style == Style::Dynamic;
        let drivers = DriverPlan::new(spec, design)?;
        // The drivers delay every pin's edge after its source's: the clock's in dynamic style
        // (inputs wait for clk to fall, evaluation starts when it has risen), the slowest
        // data driver's in static style.
        let lag = drivers
            .as_ref()
            .map_or(0.0, |d| if dynamic { d.clock_delay } else { d.data_delay });
        let (period, period_rule) = match (spec.testbench.period, estimate) {
            (Some(p), _) => (p, "testbench.period".to_string()),
            (None, Some(e)) => period_from_estimate(spec, e, lag),
            (None, None) => match &spec.technology.timing {
                Some(tm) => period_from_bound(spec, design, tm, lag)?,
                None => (
                    default_period(spec),
                    "a rough structural bound (the technology has no characterised timing at these conditions)".to_string(),
                ),
            },
        };
        let worst = match (estimate, super::vectors::worst_index(&vectors)) {
            (Some(e), Some(k)) => Some(WorstMeasure {
                vector: k,
                from: e.worst_vectors.from.clone(),
                from_edge: e.worst_vectors.from_edge,
                to: e.worst_vectors.to.clone(),
                to_edge: e.worst_vectors.to_edge,
                estimate_ps: e.worst_ps,
                path: path_nodes(e),
            }),
            _ => None,
        };
        let step = spec
            .testbench
            .step
            .unwrap_or(spec.technology.step)
            .min(period / 20.0);
        let tstop = period * vectors.len() as f64;
        let points = tstop / step;
        if points > MAX_POINTS {
            return Err(Error::Input(format!(
                "testbench.step: the deck would ask ngspice for {:.0} transient points ({} vectors of {} at a {} step); at most {MAX_POINTS:.0}: raise testbench.step or shorten testbench.period",
                points,
                vectors.len(),
                fmt_si(period, 's'),
                fmt_si(step, 's')
            )));
        }
        Ok(DeckPlan {
            period,
            period_from_spec: spec.testbench.period.is_some(),
            period_rule,
            step,
            tmax: TMAX_CAP.min(period / 20.0).max(step),
            slew: spec.technology.slew,
            tstop,
            vectors,
            strobe: if dynamic { 0.95 } else { 0.9 },
            precharge_strobe: dynamic.then_some(0.45),
            delay_from: if dynamic { "clk" } else { "cin" },
            worst,
            drivers,
        })
    }
}

/// Margin of the default period over the timing engine's worst-path estimate: the estimate
/// was within 15 % of ngspice on the 8- to 32-bit GF180MCU designs measured (the CI bound
/// in the timing tests is 20 %), and the deck's random vectors must also settle; 1.5 leaves
/// room for both.
pub const ESTIMATE_MARGIN: f64 = 1.5;
/// The margin for the embedded `generic` technology: its level-1 cards make pass-device
/// chains up to about 2.1× slower in ngspice than the engine estimates (a 16-bit unbuffered
/// static Manchester chain: cin → cout 3.29 ns measured against 1.54 ns), because the channel
/// charge of the conducting devices, large on those cards, is not in the engine's node
/// capacitance. Its decks get this margin instead.
pub const GENERIC_MARGIN: f64 = 3.0;

fn estimate_margin(spec: &Spec) -> f64 {
    if spec.technology.name == "generic" {
        GENERIC_MARGIN
    } else {
        ESTIMATE_MARGIN
    }
}

/// The default vector period from the timing engine's estimate: the worst path (found over
/// real vector pairs) times [`ESTIMATE_MARGIN`], plus two input slews, must end before the
/// strobe: at 90 % of the period in static style, in the evaluate half before the 95 % strobe
/// in dynamic style. Never longer than the topological-bound rule; rounded up to 0.1 ns.
fn period_from_estimate(spec: &Spec, e: &Estimate, lag: f64) -> (f64, String) {
    let need = |ps: f64, margin: f64| {
        let need = margin * ps * 1e-12 + 2.0 * spec.technology.slew + lag;
        match spec.style {
            Style::Static => need / 0.9,
            Style::Dynamic => need / 0.45,
        }
    };
    let margin = estimate_margin(spec);
    let by_estimate = need(e.worst_ps, margin);
    let by_bound = need(e.bound_ps, PERIOD_MARGIN);
    // The bound caps the period only where the engine is calibrated.
    let (raw, rule) = if by_bound < by_estimate && margin == ESTIMATE_MARGIN {
        (
            by_bound,
            format!(
                "the timing engine's topological bound {:.3} ns x {PERIOD_MARGIN} margin, to the strobe",
                e.bound_ps * 1e-3
            ),
        )
    } else {
        (
            by_estimate,
            format!(
                "the timing engine's worst-path estimate {:.3} ns x {margin} margin, to the strobe",
                e.worst_ps * 1e-3
            ),
        )
    };
    (round_period(spec, raw), rule)
}

/// Round a period up to 0.1 ns, and keep it at least 10 input slews (20 in dynamic style).
fn round_period(spec: &Spec, raw: f64) -> f64 {
    let tenth = 0.1e-9;
    let floor = spec.technology.slew
        * if spec.style == Style::Dynamic {
            20.0
        } else {
            10.0
        };
    ((raw / tenth).ceil() * tenth).max(floor)
}

/// Margin of the default period over the timing engine's topological bound.
pub const PERIOD_MARGIN: f64 = 1.25;

/// The default vector period from the timing engine: its topological bound (the longest
/// stage path from any input to any output, every stage at its slowest, sensitisation
/// ignored: no real transition is slower in the engine's model) times [`PERIOD_MARGIN`] for
/// the model's error (within 15 % of ngspice on the designs measured so far, tests/timing.rs),
/// plus an input slew, must end before the strobe: at 90 % of the period in static style, in
/// the evaluate half before the 95 % strobe in dynamic style. Rounded up to 0.1 ns.
fn period_from_bound(
    spec: &Spec,
    design: &Design,
    tm: &crate::timing::Timing,
    lag: f64,
) -> Result<(f64, String)> {
    let g = crate::timing::engine::Graph::new(spec, design, tm)?;
    let (bound_ps, _) = crate::timing::engine::topological_bound(&g)?;
    let bound = bound_ps * 1e-12;
    let need = PERIOD_MARGIN * bound + 2.0 * spec.technology.slew + lag;
    let raw = match spec.style {
        Style::Static => need / 0.9,
        Style::Dynamic => need / 0.45,
    };
    let period = round_period(spec, raw);
    Ok((
        period,
        format!(
            "the timing engine's topological bound {:.3} ns x {PERIOD_MARGIN} margin, to the strobe",
            bound * 1e9
        ),
    ))
}

/// A conservative vector period from a rough delay bound (not a timing model): the square
/// law of the longest unbuffered chain (Elmore; Rabaey et al. 2003, from memory) plus a
/// fixed cost per restoring stage, with margin. Dynamic designs split it into precharge and
/// evaluate halves.
pub fn default_period(spec: &Spec) -> f64 {
    let ns = 1e-9;
    let w = spec.width as f64;
    let t = match spec.architecture {
        Architecture::Ripple => 0.35 * ns * w + 1.0 * ns,
        Architecture::Manchester => {
            let mut cuts = vec![0];
            cuts.extend(&spec.buffers.positions);
            cuts.push(spec.width);
            let longest = cuts
                .windows(2)
                .map(|c| c[1] - c[0])
                .max()
                .unwrap_or(spec.width) as f64;
            0.025 * ns * longest * longest + 0.15 * ns * (cuts.len() - 1) as f64 + 1.0 * ns
        }
        Architecture::CarrySkip => {
            let r = spec.block_ranges();
            let m = r.iter().map(|(l, h)| h - l).max().unwrap_or(spec.width) as f64;
            0.025 * ns * m * m + 0.3 * ns * r.len() as f64 + 1.0 * ns
        }
        Architecture::CarrySelect => {
            let sizes = spec.block_sizes.clone().unwrap_or_default();
            let first = *sizes.first().unwrap_or(&spec.width) as f64;
            let largest = sizes.iter().copied().max().unwrap_or(0) as f64;
            0.35 * ns * first.max(largest) + 0.3 * ns * sizes.len() as f64 + 1.0 * ns
        }
        Architecture::Lookahead => 0.3 * ns * (w / spec.block as f64).ceil() + 2.0 * ns,
        _ => 0.3 * ns * (2.0 * w.log2().ceil() + 2.0 + spec.block as f64) + 1.0 * ns,
    };
    let mut p = (2.5 * t / ns).ceil() * ns;
    if spec.style == Style::Dynamic {
        p *= 2.0;
    }
    p.max(2.0 * ns)
}

/// An element line of the deck split for printing: its first line and its `+`
/// continuation lines.
#[derive(Serialize)]
struct LinesCtx {
    head: String,
    rest: Vec<String>,
}

impl LinesCtx {
    fn new(mut lines: Vec<String>) -> LinesCtx {
        let rest = lines.split_off(1.min(lines.len()));
        LinesCtx {
            head: lines.pop().unwrap_or_default(),
            rest,
        }
    }
}

/// One strobe time: the nodes sampled then and the level each should have.
#[derive(Serialize)]
struct StrobeCtx {
    tag: String,
    note: String,
    at: String,
    /// Node names, space-separated.
    nodes: String,
    /// Expected levels (1 or 0) in the order of `nodes`, space-separated.
    want: String,
}

#[derive(Serialize)]
struct DeckCtx {
    title: String,
    version: &'static str,
    name: String,
    origin: String,
    corner: String,
    temp: String,
    need_model_dir: bool,
    model_env: String,
    netlist: String,
    dynamic: bool,
    vdd: String,
    half_vdd: String,
    hi_level: String,
    lo_level: String,
    load: String,
    slew: String,
    period: String,
    period_rule: String,
    half: String,
    high: String,
    step: String,
    tmax: String,
    tstop: String,
    vector_count: usize,
    strobe_note: String,
    model_lines: Vec<String>,
    sources: Vec<LinesCtx>,
    dut: LinesCtx,
    outputs: Vec<String>,
    save: LinesCtx,
    trig: &'static str,
    rise_td: String,
    fall_td: String,
    rise_vector: usize,
    fall_vector: usize,
    window: String,
    measure_fall: bool,
    delay_note: String,
    strobes: Vec<StrobeCtx>,
    sample_count: usize,
    worst: Option<WorstCtx>,
    estimate_note: Vec<String>,
    /// Driver device lines (empty: ideal sources), the clock source's node, header lines.
    drivers: Vec<String>,
    clk_src: String,
    driver_note: Vec<String>,
}

/// The worst-path measurement as the deck prints it.
#[derive(Serialize)]
struct WorstCtx {
    from: String,
    from_edge: &'static str,
    to: String,
    to_edge: &'static str,
    vector: usize,
    td: String,
    strobe: String,
    estimate: String,
    /// The path's nodes as the deck names them (`xdut.` inside the adder), for wrdata.
    path: Vec<String>,
}

/// A flattened net as the deck names it: a top-level port as it is, anything else inside the
/// adder instance.
fn deck_node(net: &str, design: &Design) -> String {
    let top = design.top();
    if top
        .pin_dirs()
        .iter()
        .any(|(id, _)| top.net_name(*id) == net)
    {
        net.to_string()
    } else {
        format!("xdut.{net}")
    }
}

fn s(x: f64) -> String {
    fmt_si(x, 's')
}

/// `NAME_tb.sp`. `netlist` is the text of `NAME.sp`, which the deck carries inside it.
/// The deck header's lines on the timing engine's estimate.
fn estimate_note(plan: &DeckPlan) -> Vec<String> {
    match &plan.worst {
        Some(w) => vec![
            format!(
                "Timing engine: worst path {} {} -> {} {}, estimated {:.4e} s;",
                w.from,
                w.from_edge,
                w.to,
                w.to_edge,
                w.estimate_ps * 1e-12
            ),
            if plan.precharge_strobe.is_some() {
                format!(
                    "the deck applies its vector (vector {}, evaluated from clk rise) and measures it as tworst.",
                    w.vector
                )
            } else {
                format!(
                    "the deck applies its vector pair (vectors {} and {}) and measures it as tworst.",
                    w.vector - 1,
                    w.vector
                )
            },
        ],
        None => vec![
            "No timing estimate (NAME.json timing.none says why): the period follows the rule above."
                .into(),
        ],
    }
}

pub fn deck(spec: &Spec, design: &Design, plan: &DeckPlan, netlist: &str) -> Result<String> {
    let tech = &spec.technology;
    let w = spec.width;
    let vdd = tech.vdd;
    let dynamic = design.dynamic;
    let t = plan.period;
    // Inputs change just after the start of each period (after clk has fallen in dynamic,
    // at its pin: the clock driver's delay later).
    let (data_lag, clock_lag) = plan
        .drivers
        .as_ref()
        .map_or((0.0, 0.0), |d| (d.data_delay, d.clock_delay));
    let change = if dynamic {
        2.0 * plan.slew + clock_lag
    } else {
        0.0
    };
    // A source drives its pin directly, or the first stage of the pin's driver.
    let src = |pin: &str| {
        if plan.drivers.is_some() {
            format!("{pin}_src")
        } else {
            pin.to_string()
        }
    };
    // PWL points, shared by every source: the level at 0 (low, high) and, for each vector
    // k, the two points of an input edge as vector k begins (rising, falling).
    let vdd_text = trim_num(vdd);
    let level = |b: bool| if b { vdd_text.as_str() } else { "0" };
    let start = [format!("0 {}", level(false)), format!("0 {}", level(true))];
    let edges: Vec<[[String; 2]; 2]> = (0..plan.vectors.len())
        .map(|k| {
            let t0 = k as f64 * t + change;
            let (begin, end) = (s(t0), s(t0 + plan.slew));
            let edge = |from: bool| {
                [
                    format!("{begin} {}", level(from)),
                    format!("{end} {}", level(!from)),
                ]
            };
            [edge(false), edge(true)]
        })
        .collect();
    let bit = |x: u128, i: usize| (x >> i) & 1 == 1;
    let mut sources = Vec::with_capacity(2 * w + 1);
    let mut add_source = |pin: String, high: &dyn Fn(&Labeled) -> bool| {
        let element = format!("v{pin}");
        let node = src(&pin);
        let mut words: Vec<&str> = vec![&element, &node, "0", "pwl("];
        let mut prev = high(&plan.vectors[0]);
        words.push(&start[prev as usize]);
        for (k, v) in plan.vectors.iter().enumerate().skip(1) {
            let now = high(v);
            if now != prev {
                words.extend(edges[k][prev as usize].iter().map(String::as_str));
                prev = now;
            }
        }
        words.push(")");
        sources.push(LinesCtx::new(wrap(&words, LINE)));
    };
    for i in 0..w {
        add_source(format!("a{i}"), &|v: &Labeled| bit(v.v.a, i));
    }
    for i in 0..w {
        add_source(format!("b{i}"), &|v: &Labeled| bit(v.v.b, i));
    }
    add_source("cin".into(), &|v: &Labeled| v.v.cin);

    let top = design.top();
    let mut dut = vec!["xdut".to_string()];
    dut.extend(
        top.pin_dirs()
            .iter()
            .map(|(id, _)| top.net_name(*id).to_string()),
    );
    dut.push("vdd".into());
    dut.push("vss".into());
    dut.push(spec.name.clone());
    let mut outputs: Vec<String> = (0..w).map(|i| format!("s{i}")).collect();
    outputs.push("cout".into());

    let mut strobes = vec![];
    let mut sample_count = 0;
    for (k, v) in plan.vectors.iter().enumerate() {
        let want: Vec<&str> = (0..=w)
            .map(|i| {
                let one = if i < w { bit(v.v.s, i) } else { v.v.cout };
                if one {
                    "1"
                } else {
                    "0"
                }
            })
            .collect();
        sample_count += outputs.len();
        strobes.push(StrobeCtx {
            tag: format!("v{k}"),
            note: format!("vector {k}: {}", v.label),
            at: s(k as f64 * t + plan.strobe * t),
            nodes: outputs.join(" "),
            want: want.join(" "),
        });
        if let Some(p) = plan.precharge_strobe {
            sample_count += 1;
            strobes.push(StrobeCtx {
                tag: format!("p{k}"),
                note: format!("vector {k}, precharge: cout low"),
                at: s(k as f64 * t + p * t),
                nodes: "cout".into(),
                want: "0".into(),
            });
        }
    }
    let model_lines = tech.models.deck_lines();
    // Start looking a little before the vector begins: a `td` exactly on the input's
    // breakpoint can make ngspice miss the crossing.
    let rise_td = (WORST_CASE_RISE as f64 - 0.05) * t;
    let fall_td = (WORST_CASE_FALL as f64 - 0.05) * t;
    // A delay that ends past its vector's strobe belongs to no vector the deck checks: the
    // window runs from the trigger (inputs change at the period's start, clk rises at its
    // middle) to the strobe.
    let trigger_at = if dynamic {
        t / 2.0 + clock_lag
    } else {
        change + data_lag
    };
    // The driver chains: two devices a stage, on the data or the clock driver's supply.
    let mut driver_lines = vec![];
    if let Some(d) = &plan.drivers {
        for (pin, _, stages) in &d.chains {
            let supply = if pin == "clk" { "vclkd" } else { "vdrv" };
            for (i, &wn) in stages.iter().enumerate() {
                let input = if i == 0 {
                    src(pin)
                } else {
                    format!("{pin}_d{i}")
                };
                let output = if i + 1 == stages.len() {
                    pin.clone()
                } else {
                    format!("{pin}_d{}", i + 1)
                };
                let l = tech.l_min;
                driver_lines.push(tech.device_line(
                    &format!("mn_drv_{pin}_{i}"),
                    &output,
                    &input,
                    "0",
                    "0",
                    false,
                    wn,
                    l,
                    [End::Contacted; 2],
                ));
                driver_lines.push(tech.device_line(
                    &format!("mp_drv_{pin}_{i}"),
                    &output,
                    &input,
                    supply,
                    supply,
                    true,
                    (wn * spec.sizing.pn_ratio * 1000.0).round() / 1000.0,
                    l,
                    [End::Contacted; 2],
                ));
            }
        }
    }
    let window = plan.strobe * t - trigger_at;
    // Only what the control block reads is kept: outputs, the measured input, the supply.
    let mut save = vec![".save".to_string()];
    save.extend(outputs.iter().map(|o| format!("v({o})")));
    save.push(format!("v({})", plan.delay_from));
    if let Some(wm) = &plan.worst {
        for x in [&wm.from, &wm.to] {
            let v = format!("v({x})");
            if !save.contains(&v) {
                save.push(v);
            }
        }
        for x in &wm.path {
            let v = format!("v({})", deck_node(x, design));
            if !save.contains(&v) {
                save.push(v);
            }
        }
    }
    save.push("i(vvdd)".into());
    if dynamic {
        save.push(if plan.drivers.is_some() {
            "i(vvclkd)".into()
        } else {
            "i(vclk)".into()
        });
    }
    let worst = plan.worst.as_ref().map(|wm| {
        // Static: the inputs change at the vector's start; dynamic: timed from clk↑ at its
        // middle. Looked for from a little before either.
        let at = wm.vector as f64 * t + if dynamic { t / 2.0 } else { change };
        WorstCtx {
            from: wm.from.clone(),
            from_edge: wm.from_edge,
            to: wm.to.clone(),
            to_edge: wm.to_edge,
            vector: wm.vector,
            td: s(at - 0.05 * t),
            strobe: s(wm.vector as f64 * t + plan.strobe * t),
            estimate: format!("{:.4e} s", wm.estimate_ps * 1e-12),
            path: wm.path.iter().map(|x| deck_node(x, design)).collect(),
        }
    });
    let ctx = DeckCtx {
        title: title(spec),
        version: VERSION,
        name: spec.name.clone(),
        origin: tech.origin.clone(),
        corner: tech.corner.clone(),
        temp: trim_num(tech.temp),
        need_model_dir: tech.models.need_model_dir(),
        model_env: tech.model_env.clone(),
        netlist: netlist.trim_end().to_string(),
        dynamic,
        vdd: vdd_text.clone(),
        half_vdd: trim_num(vdd / 2.0),
        hi_level: trim_num(0.8 * vdd),
        lo_level: trim_num(0.2 * vdd),
        load: fmt_si(spec.testbench.load, 'F'),
        slew: s(plan.slew),
        period: s(t),
        period_rule: plan.period_rule.clone(),
        half: s(t / 2.0),
        high: s(t / 2.0 - plan.slew),
        step: s(plan.step),
        tmax: s(plan.tmax),
        tstop: s(plan.tstop),
        vector_count: plan.vectors.len(),
        strobe_note: match plan.precharge_strobe {
            Some(p) => format!(
                "{}% of each period (evaluate) and cout at {}% (precharge)",
                trim_num(plan.strobe * 100.0),
                trim_num(p * 100.0)
            ),
            None => format!("{}% of each period", trim_num(plan.strobe * 100.0)),
        },
        model_lines,
        clk_src: src("clk"),
        driver_note: match &plan.drivers {
            Some(d) => vec![
                format!("Drivers: {}.", d.rule),
                format!(
                    "Slowest data driver {:.1} ps{}; times are measured from the pins.",
                    d.data_delay * 1e12,
                    if dynamic {
                        format!(", clock driver {:.1} ps", d.clock_delay * 1e12)
                    } else {
                        String::new()
                    }
                ),
            ],
            None => vec!["Drivers: ideal sources on the pins.".into()],
        },
        drivers: driver_lines,
        sources,
        dut: LinesCtx::new(wrap(&dut, LINE)),
        save: LinesCtx::new(wrap(&save, LINE)),
        outputs,
        trig: plan.delay_from,
        rise_td: s(rise_td),
        fall_td: s(fall_td),
        rise_vector: WORST_CASE_RISE,
        fall_vector: WORST_CASE_FALL,
        window: s(window),
        measure_fall: !dynamic,
        delay_note: if dynamic {
            format!("clk rise to cout rise, all propagate with cin = 1 (vector {WORST_CASE_RISE})")
        } else {
            format!(
                "cin to cout, all propagate (vector {WORST_CASE_RISE} rising, vector {WORST_CASE_FALL} falling)"
            )
        },
        strobes,
        sample_count,
        worst,
        estimate_note: estimate_note(plan),
    };
    render("spice/deck.sp", &ctx)
}
