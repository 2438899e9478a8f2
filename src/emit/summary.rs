//! `NAME.json`: the machine-readable summary (counts, buffer positions, vectors with expected
//! outputs, measurement conditions).

use super::spice::DeckPlan;
use super::vectors::Labeled;
use super::verilog::TB_EXHAUSTIVE_MAX;
use super::VERSION;
use crate::arch::manchester::blocks;
use crate::error::{Error, Result};
use crate::netlist::{Design, Master};
use crate::spec::{Architecture, Spec, Style};
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
    in_spice_deck: bool,
}

#[derive(Serialize)]
pub struct Counts {
    pub transistors: usize,
    pub cells: usize,
    pub cells_by_kind: BTreeMap<String, usize>,
    pub modules: usize,
    /// Longest input-to-output path in gate stages (a pass device counts as one).
    pub logic_depth: usize,
}

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
        logic_depth: design.logic_depth(),
    }
}

#[derive(Serialize)]
struct Summary<'a> {
    generator: String,
    name: &'a str,
    title: String,
    width: usize,
    architecture: Architecture,
    style: Style,
    block: Option<usize>,
    #[serde(skip_serializing_if = "Option::is_none")]
    block_rule: Option<&'static str>,
    blocks: Vec<[usize; 2]>,
    #[serde(skip_serializing_if = "Option::is_none")]
    prefix: Option<&'a crate::arch::prefix::Report>,
    buffers: &'a crate::spec::Buffers,
    technology: serde_json::Value,
    sizing: &'a crate::spec::Sizing,
    counts: &'a Counts,
    verilog_testbench: serde_json::Value,
    spice_deck: serde_json::Value,
    vectors: Vec<VectorOut>,
}

fn hex(x: u128) -> String {
    format!("0x{x:x}")
}

pub fn json(
    spec: &Spec,
    design: &Design,
    counts: &Counts,
    plan: &[Labeled],
    deck: &DeckPlan,
) -> Result<String> {
    let chain = matches!(
        spec.architecture,
        Architecture::Manchester | Architecture::CarrySkip
    );
    let tech = &spec.technology;
    let s = Summary {
        generator: format!("carrywright {VERSION}"),
        name: &spec.name,
        title: super::title(spec),
        width: spec.width,
        architecture: spec.architecture,
        style: spec.style,
        block: (spec.architecture != Architecture::Ripple).then_some(spec.block),
        block_rule: spec.block_rule,
        blocks: if chain || spec.architecture == Architecture::Lookahead {
            blocks(spec.width, spec.block)
                .into_iter()
                .map(|(l, h)| [l, h])
                .collect()
        } else if let Some(sizes) = &spec.block_sizes {
            let mut lo = 0;
            sizes
                .iter()
                .map(|s| {
                    lo += s;
                    [lo - s, lo]
                })
                .collect()
        } else {
            vec![]
        },
        prefix: design.prefix.as_ref(),
        buffers: &spec.buffers,
        technology: serde_json::json!({
            "name": tech.name,
            "origin": tech.origin,
            "vdd": tech.vdd,
            "l_um": tech.l_min,
            "nmos": tech.nmos,
            "pmos": tech.pmos,
        }),
        sizing: &spec.sizing,
        counts,
        verilog_testbench: serde_json::json!({
            "exhaustive": spec.width <= TB_EXHAUSTIVE_MAX,
            "listed_vectors": plan.len(),
            "dynamic_phases": spec.style == Style::Dynamic,
        }),
        spice_deck: serde_json::json!({
            "vectors": deck.vectors.len(),
            "period_s": deck.period,
            "period_from_spec": deck.period_from_spec,
            "step_s": deck.step,
            "tstop_s": deck.tstop,
            "input_slew_s": deck.slew,
            "load_f": spec.testbench.load,
            "strobe_fraction": deck.strobe,
            "precharge_strobe_fraction": deck.precharge_strobe,
            "levels": {"one_at_least_v": 0.8 * tech.vdd, "zero_at_most_v": 0.2 * tech.vdd},
            "measures": {
                "tcarry_rise": format!("{} rise to cout rise, vector {}", deck.delay_from, super::vectors::WORST_CASE_RISE),
                "tcarry_fall": if spec.style == Style::Static { serde_json::json!(format!("cin fall to cout fall, vector {}", super::vectors::WORST_CASE_FALL)) } else { serde_json::Value::Null },
                "power": "average supply power over the whole transient, W",
            },
        }),
        vectors: plan
            .iter()
            .enumerate()
            .map(|(i, l)| VectorOut {
                label: l.label,
                a: hex(l.v.a),
                b: hex(l.v.b),
                cin: l.v.cin as u8,
                s: hex(l.v.s),
                cout: l.v.cout as u8,
                in_spice_deck: i < deck.vectors.len(),
            })
            .collect(),
    };
    let mut out = serde_json::to_string_pretty(&s).map_err(|e| Error::Output(e.to_string()))?;
    out.push('\n');
    Ok(out)
}
