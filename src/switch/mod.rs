//! Switch-level proof of the transistor view: the SPICE text that is about to be written is
//! parsed back (`parse`), flattened to transistors and simulated as switches (`sim`, after
//! Bryant 1984) over the same vectors as the bit-parallel logic check, and compared with
//! a + b + cin. `compare` matches a netlist's devices with the generated ones by connectivity
//! and `verify` checks a netlist a designer edited by hand.
//!
//! Dynamic designs run two phases per vector, as the deck does: precharge (clk low, the data
//! inputs applied) and evaluate (clk high); outputs are checked in both (precharge: cout = 0,
//! s = a ⊕ b, as the logic check does), and each lane carries its charge from one vector to
//! the next, so a node that is not precharged shows up as a stale or X value.

pub mod compare;
pub mod parse;
pub mod sim;
pub mod verify;

use crate::emit::vectors::Vector;
use crate::error::{Error, Result};
use crate::netlist::Design;
use crate::sim::{expected_words, input_words, Evaluator, Words};
use crate::tech::Technology;
use parse::Flat;
use serde::Serialize;
use std::collections::HashMap;

/// What the switch-level check did (NAME.json `switch_level`).
#[derive(Debug, Clone, Serialize)]
pub struct Report {
    pub vectors: u64,
    pub exhaustive: bool,
    pub passed: bool,
    /// Precharge and evaluate (dynamic) or one phase (static).
    pub phases: usize,
    pub transistors: usize,
    /// Channel-connected components the simulator solves.
    pub stages: usize,
    /// Output bits that were wrong or X, over every vector and phase.
    pub wrong_bits: u64,
    pub first_failure: Option<Failure>,
}

/// The first wrong output: the vector, the phase, the output and what it was, and the first
/// node (in the logic view's evaluation order) whose switch-level value differs from the
/// logic view's.
#[derive(Debug, Clone, Serialize)]
pub struct Failure {
    pub vector: String,
    pub phase: &'static str,
    pub output: String,
    pub got: char,
    pub expected: char,
    pub first_wrong_node: Option<String>,
    pub message: String,
}

/// PMOS strength relative to NMOS of the same W/L: the characterised single-device
/// resistances where the technology has them, else 1/2 (common practice: holes about half
/// as mobile).
pub fn p_ratio(tech: &Technology) -> f64 {
    tech.timing
        .as_ref()
        .map(|t| t.r_p_rise_kohm_um[0] / t.r_n_fall_kohm_um[0])
        .filter(|r| r.is_finite() && *r > 0.0)
        .unwrap_or(2.0)
}

/// The top-level port names of a design of this width (`[clk] a.. b.. cin s.. cout vdd vss`).
pub fn top_ports(width: usize, dynamic: bool) -> Vec<String> {
    let mut v = vec![];
    if dynamic {
        v.push("clk".to_string());
    }
    v.extend((0..width).map(|i| format!("a{i}")));
    v.extend((0..width).map(|i| format!("b{i}")));
    v.push("cin".into());
    v.extend((0..width).map(|i| format!("s{i}")));
    v.push("cout".into());
    v.push("vdd".into());
    v.push("vss".into());
    v
}

fn bit_char(hi: u64, lo: u64, k: usize) -> char {
    match ((hi >> k) & 1, (lo >> k) & 1) {
        (1, _) => '1',
        (_, 1) => '0',
        _ => 'X',
    }
}

/// Parse `text` (the SPICE view of `design`), flatten its top subcircuit and run the check.
pub fn check_text(
    text: &str,
    label: &str,
    design: &Design,
    tech: &Technology,
    seed: u64,
    random: usize,
    exhaustive_max: usize,
) -> Result<Report> {
    let net = parse::parse(text, label, tech)?;
    let flat = parse::flatten(&net, &design.name, label)?;
    check_flat(&flat, design, tech, seed, random, exhaustive_max)
}

/// [`check_text`], a failure turned into an error (exit 1).
pub fn check_or_fail(
    text: &str,
    label: &str,
    design: &Design,
    tech: &Technology,
    seed: u64,
    random: usize,
    exhaustive_max: usize,
) -> Result<Report> {
    let r = check_text(text, label, design, tech, seed, random, exhaustive_max)?;
    match &r.first_failure {
        Some(f) => Err(Error::Check(format!(
            "switch-level check of {label} failed: {} wrong output bits; first: {}",
            r.wrong_bits, f.message
        ))),
        None => Ok(r),
    }
}

/// Run the switch-level check of `flat` against a + b + cin; `design` (the logic view of the
/// same adder) names the first internal node that went wrong.
pub fn check_flat(
    flat: &Flat,
    design: &Design,
    tech: &Technology,
    seed: u64,
    random: usize,
    exhaustive_max: usize,
) -> Result<Report> {
    let dynamic = design.dynamic;
    let mut ev = Evaluator::new(design)?;
    let w = ev.width;
    let port_names: Vec<&str> = flat
        .ports
        .iter()
        .map(|&p| flat.names[p as usize].as_str())
        .collect();
    let want = top_ports(w, dynamic);
    if port_names != want.iter().map(String::as_str).collect::<Vec<_>>() {
        let missing: Vec<&String> = want
            .iter()
            .filter(|p| !port_names.contains(&p.as_str()))
            .collect();
        return Err(Error::Check(format!(
            "the top subcircuit {} has ports {}, expected {}{}",
            flat.top,
            short_list(&port_names),
            short_list(&want.iter().map(String::as_str).collect::<Vec<_>>()),
            if missing.is_empty() {
                String::new()
            } else {
                format!(
                    " (missing {})",
                    missing
                        .iter()
                        .take(4)
                        .map(|s| s.as_str())
                        .collect::<Vec<_>>()
                        .join(", ")
                )
            }
        )));
    }
    let port = |name: &str| flat.ports[want.iter().position(|p| p == name).expect("listed port")];
    let vdd = port("vdd");
    let vss = port("vss");
    let clk = dynamic.then(|| port("clk"));
    let data: Vec<u32> = (0..w)
        .map(|i| port(&format!("a{i}")))
        .chain((0..w).map(|i| port(&format!("b{i}"))))
        .chain([port("cin")])
        .collect();
    let outs: Vec<u32> = (0..w)
        .map(|i| port(&format!("s{i}")))
        .chain([port("cout")])
        .collect();
    let mut sources: Vec<u32> = clk.into_iter().collect();
    sources.extend(&data);
    let mut net = sim::Network::new(flat, vdd, vss, &sources, p_ratio(tech));
    net.set(vdd, !0);
    net.set(vss, 0);
    let limit = 64 * net.n_cccs() as u64 + 10_000;
    let mut words = Words::new(w, seed, random, exhaustive_max);
    let mut report = Report {
        vectors: words.total,
        exhaustive: words.exhaustive,
        passed: true,
        phases: if dynamic { 2 } else { 1 },
        transistors: flat.devices.len(),
        stages: net.n_cccs(),
        wrong_bits: 0,
        first_failure: None,
    };
    let mut inputs: Vec<u64> = Vec::with_capacity(2 * w + 1);
    let mut expect: Vec<u64> = Vec::with_capacity(w + 1);
    let mut by_name: Option<HashMap<&str, u32>> = None;
    while let Some((lanes, n)) = words.next_word() {
        inputs.clear();
        input_words(&lanes, w, &mut inputs);
        let live = if n < 64 { (1u64 << n) - 1 } else { !0 };
        let phases: &[bool] = if dynamic { &[false, true] } else { &[true] };
        for &evaluate in phases {
            if let Some(c) = clk {
                net.set(c, if evaluate { !0 } else { 0 });
            }
            for (&x, &v) in data.iter().zip(&inputs) {
                net.set(x, v);
            }
            let phase = match (dynamic, evaluate) {
                (false, _) => "static",
                (true, false) => "precharge",
                (true, true) => "evaluate",
            };
            if let Err(u) = net.settle(limit) {
                let k = 0;
                return Err(Error::Check(format!(
                    "switch-level check: the circuit does not settle at node {} ({phase}, vector {})",
                    u.node,
                    vector_text(&lanes[k])
                )));
            }
            expect.clear();
            if evaluate {
                expected_words(&lanes, w, &mut expect);
            } else {
                for bit in 0..w {
                    expect.push(inputs[bit] ^ inputs[w + bit]);
                }
                expect.push(0);
            }
            for (oi, (&o, &e)) in outs.iter().zip(&expect).enumerate() {
                let (hi, lo) = net.value(o);
                let bad = !((hi & e) | (lo & !e)) & live;
                if bad == 0 {
                    continue;
                }
                report.passed = false;
                report.wrong_bits += bad.count_ones() as u64;
                if report.first_failure.is_some() {
                    continue;
                }
                let k = bad.trailing_zeros() as usize;
                // The logic view on the same inputs, for the first internal node that differs.
                let mut lin = vec![];
                if let Some(c) = clk {
                    let _ = c;
                    lin.push(if evaluate { !0u64 } else { 0 });
                }
                lin.extend_from_slice(&inputs);
                let mut lout = vec![0u64; w + 1];
                ev.eval(&lin, &mut lout);
                let names = by_name.get_or_insert_with(|| {
                    flat.names
                        .iter()
                        .enumerate()
                        .map(|(i, s)| (s.as_str(), i as u32))
                        .collect()
                });
                let mut first = None;
                for &id in &ev.computed {
                    let nm = ev.names[id as usize].as_str();
                    let Some(&sid) = names.get(nm) else { continue };
                    let (h, l) = net.value(sid);
                    let got = bit_char(h, l, k);
                    let want = if (ev.net(id) >> k) & 1 == 1 { '1' } else { '0' };
                    if got != want {
                        first = Some(format!("{nm} is {got}, the logic view has {want}"));
                        break;
                    }
                }
                let oname = &flat.names[o as usize];
                let got = bit_char(hi, lo, k);
                let expected = if (e >> k) & 1 == 1 { '1' } else { '0' };
                let message = format!(
                    "{phase}, vector {}: {oname} is {got}, expected {expected}{}",
                    vector_text(&lanes[k]),
                    first
                        .as_ref()
                        .map(|f| format!("; first wrong node: {f}"))
                        .unwrap_or_default()
                );
                report.first_failure = Some(Failure {
                    vector: vector_text(&lanes[k]),
                    phase,
                    output: oname.clone(),
                    got,
                    expected,
                    first_wrong_node: first,
                    message,
                });
                let _ = oi;
            }
        }
    }
    if std::env::var_os("CW_SWITCH_STATS").is_some() {
        eprintln!(
            "solves {} (gate {}, levels {}) cccs {} words {}",
            net.solves,
            net.gate_solves,
            net.level_solves,
            net.n_cccs(),
            report.vectors.div_ceil(64)
        );
    }
    Ok(report)
}

fn vector_text(v: &Vector) -> String {
    format!("a={:#x} b={:#x} cin={}", v.a, v.b, v.cin as u8)
}

fn short_list(v: &[&str]) -> String {
    if v.len() <= 8 {
        v.join(" ")
    } else {
        format!(
            "{} .. {} ({} ports)",
            v[..4].join(" "),
            v[v.len() - 3..].join(" "),
            v.len()
        )
    }
}
