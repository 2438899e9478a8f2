//! `NAME.json`: the machine-readable summary (counts, buffer positions, vectors with expected
//! outputs, measurement conditions).

use super::spice::DeckPlan;
use super::vectors::Labeled;
use super::verilog::TB_EXHAUSTIVE_MAX;
use super::VERSION;
use crate::error::{Error, Result};
use crate::netlist::{Design, Master};
use crate::spec::{Architecture, Spec, Style};
use crate::timing::search::Estimate;
use serde::Serialize;
use std::collections::BTreeMap;

#[derive(Serialize)]
struct VectorOut {
    label: &'static str,
    a: String,
    b: String,
    cin: u8,
    s: String,
    cout: u8,
}

/// A block's bit range, half-open: bits lo, lo + 1, .., hi - 1.
#[derive(Serialize)]
struct BlockOut {
    lo: usize,
    hi: usize,
    bits: usize,
}

#[derive(Serialize)]
pub struct Counts {
    pub transistors: usize,
    pub cells: usize,
    pub cells_by_kind: BTreeMap<String, usize>,
    pub modules: usize,
    /// Longest input-to-output path in gate stages (a pass device counts as one), through
    /// the structure: no input vector need sensitise it, so it is not a delay (a carry-skip
    /// adder counts deeper than ripple though it is faster). Delays come from the timing
    /// engine (`carrywright estimate`).
    pub topological_depth_stages: usize,
    pub topological_depth_note: &'static str,
}

/// What `topological_depth_stages` is, in NAME.json and `describe --json`.
pub const TOPOLOGICAL_DEPTH_NOTE: &str = "longest input-to-output path in gate stages through the structure, sensitisation ignored: a count, not a delay (see carrywright estimate)";

pub fn counts(design: &Design) -> Counts {
    let by_kind = design.cell_counts();
    Counts {
        transistors: design.transistors(Master::Module(design.modules.len() - 1)),
        cells: by_kind.values().sum(),
        cells_by_kind: by_kind
            .iter()
            .map(|(k, n)| (design.cells[k].base.to_string(), *n))
            .collect(),
        modules: design.modules.len(),
        topological_depth_stages: design.logic_depth(),
        topological_depth_note: TOPOLOGICAL_DEPTH_NOTE,
    }
}

#[derive(Serialize)]
struct Summary<'a> {
    generator: String,
    tool_version: &'static str,
    spec_hash: String,
    spec_hash_covers: &'static str,
    name: &'a str,
    title: String,
    width: usize,
    architecture: Architecture,
    style: Style,
    block: Option<usize>,
    #[serde(skip_serializing_if = "Option::is_none")]
    block_rule: Option<&'static str>,
    #[serde(skip_serializing_if = "Option::is_none")]
    block_auto: Option<&'a crate::spec::AutoBlocks>,
    #[serde(skip_serializing_if = "Option::is_none")]
    blocks_note: Option<&'static str>,
    blocks: Vec<BlockOut>,
    #[serde(skip_serializing_if = "Option::is_none")]
    prefix: Option<serde_json::Value>,
    buffers: &'a crate::spec::Buffers,
    technology: serde_json::Value,
    sizing: serde_json::Value,
    counts: &'a Counts,
    /// The timing engine's estimate (`carrywright estimate --json`), or why there is none.
    timing: serde_json::Value,
    /// The keeper check (dynamic designs with keepers): the slow corner, every segment's
    /// discharge front there, the limit, and each keeper's holding margin at the leaky corner.
    #[serde(skip_serializing_if = "Option::is_none")]
    keepers: Option<serde_json::Value>,
    /// The switch-level check of NAME.sp (parsed back, simulated as switches over the logic
    /// check's vectors): vectors, phases, transistors, stages, passed.
    #[serde(skip_serializing_if = "Option::is_none")]
    switch_level: Option<serde_json::Value>,
    /// Every cell's devices with their sizes and roles (each cell is one or more stages).
    cell_sizes: serde_json::Value,
    /// Every ratioed node (a keeper against the pull-down paths it fights): the keeper's W/L,
    /// the weakest conducting path's series W/L and their ratio (a report; the keeper check
    /// decides).
    #[serde(skip_serializing_if = "Vec::is_empty")]
    ratios: Vec<serde_json::Value>,
    verilog_testbench: serde_json::Value,
    spice_deck: serde_json::Value,
    vectors_note: &'static str,
    vectors: Vec<VectorOut>,
}

fn hex(x: u128) -> String {
    format!("0x{x:x}")
}

#[allow(clippy::too_many_arguments)]
pub fn json(
    spec: &Spec,
    design: &Design,
    counts: &Counts,
    plan: &[Labeled],
    deck: &DeckPlan,
    timing: std::result::Result<&Estimate, &str>,
    keepers: Option<&crate::timing::keeper::Report>,
    switch: Option<&crate::switch::Report>,
) -> Result<String> {
    let chain = matches!(
        spec.architecture,
        Architecture::Manchester | Architecture::CarrySkip
    );
    let tech = &spec.technology;
    let n_directed = super::vectors::n_directed(plan);
    let mut s = Summary {
        generator: format!("carrywright {VERSION}"),
        tool_version: VERSION,
        spec_hash: spec_hash(spec),
        spec_hash_covers: SPEC_HASH_COVERS,
        name: &spec.name,
        title: super::title(spec),
        width: spec.width,
        architecture: spec.architecture,
        style: spec.style,
        block: (spec.architecture != Architecture::Ripple).then_some(spec.block),
        block_rule: spec.block_rule,
        block_auto: spec.block_auto.as_ref(),
        blocks_note: None,
        blocks: if chain
            || spec.architecture == Architecture::Lookahead
            || spec.block_sizes.is_some()
        {
            spec.block_ranges()
        } else {
            vec![]
        }
        .into_iter()
        .map(|(lo, hi)| BlockOut {
            lo,
            hi,
            bits: hi - lo,
        })
        .collect(),
        prefix: design.prefix.as_ref().map(rounded).transpose()?,
        buffers: &spec.buffers,
        technology: rounded(serde_json::json!({
            "name": tech.name,
            "origin": tech.origin,
            "corner": tech.corner,
            "temp_c": tech.temp,
            "vdd": tech.vdd,
            "l_um": tech.l_min,
            "nmos": tech.nmos,
            "pmos": tech.pmos,
        }))?,
        sizing: rounded(&spec.sizing)?,
        counts,
        timing: match timing {
            Ok(e) => rounded(e)?,
            Err(why) => serde_json::json!({ "none": why }),
        },
        keepers: keepers.map(rounded).transpose()?,
        switch_level: switch.map(rounded).transpose()?,
        cell_sizes: rounded(
            design
                .cells
                .values()
                .map(|c| {
                    serde_json::json!({
                        "cell": c.base,
                        "devices": c.devices.iter().map(|d| serde_json::json!({
                            "name": d.name,
                            "type": d.mos,
                            "w_um": d.w,
                            "l_um": d.l,
                            "role": d.role,
                        })).collect::<Vec<_>>(),
                    })
                })
                .collect::<Vec<_>>(),
        )?,
        ratios: crate::ratio::survey(design, &design.flatten())
            .iter()
            .map(|k| {
                rounded(serde_json::json!({
                    "node": k.node,
                    "keeper_wl": k.keeper,
                    "weakest_path_wl": k.weakest,
                    "path_over_keeper": k.weakest.map(|w| w / k.keeper),
                }))
            })
            .collect::<Result<Vec<_>>>()?,
        verilog_testbench: rounded(serde_json::json!({
            "exhaustive": spec.width <= TB_EXHAUSTIVE_MAX,
            "directed_vectors": n_directed,
            "random_vectors": spec.testbench.random,
            "random_listed": plan.len() - n_directed,
            "random_drawn_in_testbench": spec.testbench.random.saturating_sub(plan.len() - n_directed),
            "seed": spec.testbench.seed,
            "random_generator": "SplitMix64 from seed; random vector: a (128 bits, high word first, cut to the width), b likewise, cin the low bit of the next word",
            "dynamic_phases": spec.style == Style::Dynamic,
        }))?,
        spice_deck: rounded(serde_json::json!({
            "vectors": deck.vectors.len(),
            "period_s": deck.period,
            "period_from_spec": deck.period_from_spec,
            "period_rule": deck.period_rule,
            "step_s": deck.step,
            "tstop_s": deck.tstop,
            "input_slew_s": deck.slew,
            "drivers": deck.drivers,
            "load_f": spec.testbench.load,
            "strobe_fraction": deck.strobe,
            "precharge_strobe_fraction": deck.precharge_strobe,
            "levels": {"one_at_least_v": 0.8 * tech.vdd, "zero_at_most_v": 0.2 * tech.vdd},
            "measures": {
                "tcarry_rise": format!("{} rise to cout rise, vector {}", deck.delay_from, super::vectors::WORST_CASE_RISE),
                "tcarry_fall": if spec.style == Style::Static { serde_json::json!(format!("cin fall to cout fall, vector {}", super::vectors::WORST_CASE_FALL)) } else { serde_json::Value::Null },
                "tworst": deck.worst.as_ref().map(|w| format!(
                    "the timing engine's worst path: {} {} to {} {}, vector {} (estimate {} ps)",
                    w.from, w.from_edge, w.to, w.to_edge, w.vector, w.estimate_ps
                )),
                "power": if spec.style == Style::Dynamic {
                    if deck.drivers.is_some() {
                        "average power from vector 1 to the end, W: the adder's supply plus the clock driver's (vclkd: its chain and the clk node); the data drivers' supply (vdrv) is not counted"
                    } else {
                        "average power from vector 1 to the end, W: the supply's, plus the clock's charging energy as a clock driver on the same supply would draw it"
                    }
                } else {
                    "average supply power from vector 1 to the end, W"
                },
                "clock_energy_per_op": if spec.style == Style::Dynamic { serde_json::json!("the clock's share of energy_per_op, J") } else { serde_json::Value::Null },
                "energy_per_op": "energy per addition, J: the energy of vectors 1 to the last (vector 0 starts from the operating point) divided by their number; over the deck's vectors, mostly directed worst cases, so not the timing estimate's energy_fj at 50 % random activity",
            },
        }))?,
        vectors_note: "the SPICE deck's vectors in order (directed worst cases, then the first random ones); the Verilog testbench applies them too and draws the rest of its random vectors from the seed",
        vectors: deck
            .vectors
            .iter()
            .map(|l| VectorOut {
                label: l.label,
                a: hex(l.v.a),
                b: hex(l.v.b),
                cin: l.v.cin as u8,
                s: hex(l.v.s),
                cout: l.v.cout as u8,
            })
            .collect(),
    };
    if !s.blocks.is_empty() {
        s.blocks_note =
            Some("bit ranges [lo, hi): a block holds bits lo to hi - 1 (bits = hi - lo)");
    }
    let mut out = serde_json::to_string_pretty(&s).map_err(|e| Error::Output(e.to_string()))?;
    out.push('\n');
    Ok(out)
}

/// Significant digits of every non-integer number in `NAME.json`.
pub const JSON_DIGITS: usize = 6;

/// `x` rounded to `digits` significant digits, so that it prints as `1e-14`, not as
/// `1.0000000000000002e-14` (float noise from unit conversions).
pub fn round_sig(x: f64, digits: usize) -> f64 {
    if !x.is_finite() || x == 0.0 {
        return x;
    }
    format!("{x:.prec$e}", prec = digits.max(1) - 1)
        .parse()
        .unwrap_or(x)
}

/// `x` as a JSON value with every float rounded to [`JSON_DIGITS`]. Every part of the summary
/// that can hold a float goes through here.
fn rounded(x: impl Serialize) -> Result<serde_json::Value> {
    let mut v = serde_json::to_value(x).map_err(|e| Error::Output(e.to_string()))?;
    round_floats(&mut v, JSON_DIGITS);
    Ok(v)
}

/// Round every floating-point number in a JSON value (integers stay exact).
pub fn round_floats(v: &mut serde_json::Value, digits: usize) {
    match v {
        serde_json::Value::Number(n) if n.is_f64() => {
            if let Some(r) = n
                .as_f64()
                .map(|x| round_sig(x, digits))
                .and_then(serde_json::Number::from_f64)
            {
                *n = r;
            }
        }
        serde_json::Value::Array(xs) => xs.iter_mut().for_each(|x| round_floats(x, digits)),
        serde_json::Value::Object(m) => m.values_mut().for_each(|x| round_floats(x, digits)),
        _ => {}
    }
}

/// What `spec_hash` covers, as said in `NAME.json`.
pub const SPEC_HASH_COVERS: &str = "sha256 of the validated spec as the tool resolved it (name, width, architecture, style, block and block sizes, buffer positions, sizing, testbench, and the technology's values, corner, temperature and supply, device syntax, diffusion geometry and characterised timing included, except where its model files are; numbers to 12 significant digits), whatever the YAML's formatting";

/// SHA-256 of a canonical form of the validated spec: the resolved values (defaults filled
/// in, quantities in SI units, floats to 12 significant digits so that `10f` and `1e-14` are
/// one value) in a fixed order, so that the same design gives the same hash however the YAML
/// was written. The technology's model files are left out: their location differs from
/// machine to machine.
pub fn spec_hash(spec: &Spec) -> String {
    use sha2::{Digest, Sha256};
    let t = &spec.technology;
    let mut canonical = serde_json::json!({
        "form": "carrywright spec hash 2",
        "name": spec.name,
        "width": spec.width,
        "architecture": spec.architecture,
        "style": spec.style,
        "block": spec.block,
        "block_sizes": spec.block_sizes,
        "block_rule": spec.block_rule,
        "buffers": spec.buffers,
        "sizing": spec.sizing,
        "parasitics": spec.parasitics,
        "testbench": spec.testbench,
        "technology": {
            "name": t.name,
            "corner": t.corner,
            "temp": t.temp,
            "vdd": t.vdd,
            "l_min": t.l_min,
            "w_min": t.w_min,
            "nmos": t.nmos,
            "pmos": t.pmos,
            "unit_n": t.unit_n,
            "pn_ratio": t.pn_ratio,
            "step": t.step,
            "slew": t.slew,
            "origin": t.origin,
            // How device lines are written (prefix, size unit, diffusion geometry) and the
            // characterised timing: both change the deck or the estimate.
            "device": t.device,
            "timing": t.timing,
        },
    });
    round_floats(&mut canonical, 12);
    // Keys come out in a fixed order and floats print exactly (shortest round-trip form).
    let digest = Sha256::digest(canonical.to_string().as_bytes());
    let hex: String = digest.iter().map(|b| format!("{b:02x}")).collect();
    format!("sha256:{hex}")
}
