//! `sizing: auto`: the role multipliers and the unit width chosen by a pattern search on the
//! timing engine's worst path.
//!
//! The knobs are the sizing keys a designer could set by hand: `unit_n` (every device),
//! `pass` (carry-path pass devices and chain starts), `generate` (generate/kill devices and
//! footers of chain cells), `output` (the output inverter of every sum), `buffer` (carry-path
//! buffers and multiplexer outputs), `carry` (prefix cells, the full adder's carry half), in
//! dynamic style `precharge`, and on Manchester chains (manchester, carry-skip) `taper` (each
//! segment's chain cells sized progressively, head over tail). Starting from the
//! spec's own sizes (the defaults unless it sets some), each knob in turn is multiplied or
//! divided by a step (1.5, then 1.25, then 1.1), and when that makes the design wider than
//! its limit every device is shrunk (`unit_n`) back within it; a move is kept when the engine's worst path
//! (the worst-pair search on a reduced budget) drops by more than 0.5 ps and the design stays
//! inside its limits:
//!
//! - total device width no more than the starting design's (so the result costs no area);
//! - no input (a, b, cin) above `sizing.input_cap`, or above the starting design's largest
//!   input capacitance when the spec sets none (the adder loads its drivers no more);
//! - every device at least the technology's smallest width; dynamic style: the keeper check
//!   still passes.
//!
//! The chosen sizes are then estimated with the full search; if that is not faster than the
//! starting sizes, the starting sizes stay. A coordinate (pattern) search over a handful of
//! global multipliers and one taper ratio: it finds a better point of this family, not the
//! sizing optimum of every device.

use crate::error::Result;
use crate::spec::{Architecture, AutoSizing, Sizing, Spec, Style};
use crate::timing::search::{estimate_with, Budget, Estimate};

/// The search's figures for one sizing: worst path (ps), total width (µm), largest input
/// capacitance (fF), keeper check passed.
#[derive(Debug, Clone, Copy)]
struct Point {
    worst_ps: f64,
    width_um: f64,
    input_ff: f64,
    keepers_ok: bool,
}

fn largest_input(e: &Estimate) -> f64 {
    e.input_cap_ff
        .0
        .iter()
        .filter(|(n, _)| n != "clk")
        .filter_map(|(_, c)| *c)
        .fold(0.0, f64::max)
}

fn evaluate(spec: &Spec, sizing: &Sizing, budget: Budget) -> Result<(Point, Estimate)> {
    let mut s = spec.clone();
    s.sizing = sizing.clone();
    let d = crate::arch::build(&s);
    // A size the process cannot draw (below w_min) fails like a keeper that fails.
    let drawable = crate::check_sizes(&s, &d).is_ok();
    let keepers_ok = drawable
        && match crate::timing::keeper::check(&s, &d)? {
            Some(r) => r.failure.is_none(),
            None => true,
        };
    let tm = crate::timing::engine::timing_of(&s)?;
    let e = estimate_with(&s, &d, &tm, budget)?;
    Ok((
        Point {
            worst_ps: e.worst_ps,
            width_um: e.total_width_um,
            input_ff: largest_input(&e),
            keepers_ok,
        },
        e,
    ))
}

/// Does the design have Manchester chains to taper?
fn has_chains(spec: &Spec) -> bool {
    matches!(
        spec.architecture,
        Architecture::Manchester | Architecture::CarrySkip
    )
}

/// The knobs: (name, value).
fn knobs(s: &Sizing, dynamic: bool, chains: bool) -> Vec<(&'static str, f64)> {
    let mut v = vec![
        ("unit_n", s.unit_n),
        ("pass", s.pass),
        ("generate", s.generate),
        ("output", s.output),
        ("buffer", s.buffer),
        ("carry", s.carry),
    ];
    if dynamic {
        v.push(("precharge", s.precharge));
    }
    if chains {
        v.push(("taper", s.taper));
    }
    v
}

fn with_knob(s: &Sizing, name: &str, v: f64) -> Sizing {
    let mut s = s.clone();
    match name {
        "unit_n" => s.unit_n = v,
        "pass" => s.pass = v,
        "generate" => s.generate = v,
        "output" => s.output = v,
        "buffer" => s.buffer = v,
        "precharge" => s.precharge = v,
        "carry" => s.carry = v,
        "taper" => s.taper = v,
        _ => unreachable!("no knob {name}"),
    }
    s
}

/// The range each knob may take (as `spec::parse` validates it).
fn range(name: &str, spec: &Spec) -> (f64, f64) {
    match name {
        "unit_n" => (spec.technology.w_min, 100.0),
        "buffer" => (1.0, 32.0),
        "taper" => (1.0, 4.0),
        _ => (0.25, 16.0),
    }
}

/// The search stops after this many estimates (64-bit prefix adders take about 0.1 s each).
pub const MAX_EVALUATIONS: usize = 80;

fn round2(x: f64) -> f64 {
    (x * 100.0).round() / 100.0
}

/// Choose the sizes for `sizing: auto` (the spec's other keys resolved). `Err` is a one-line
/// reason for the `sizing` key.
pub fn choose(spec: &Spec) -> std::result::Result<Sizing, String> {
    if spec.technology.timing.is_none() {
        return Err(format!(
            "`auto` needs the timing engine, and {}",
            crate::timing::engine::no_timing(spec)
        ));
    }
    let fail = |e: crate::error::Error| format!("`auto` could not estimate a sizing: {e}");
    let dynamic = spec.style == Style::Dynamic;
    let light = Budget {
        random: 16,
        timed: 16,
        starts: 1,
        flips: 16,
        seed: spec.testbench.seed,
        prune: true,
    };
    let full = Budget {
        seed: spec.testbench.seed,
        ..Budget::default()
    };
    let start = spec.sizing.clone();
    let (p0, _) = evaluate(spec, &start, light).map_err(fail)?;
    if !p0.keepers_ok {
        // The build refuses this design with the keeper check's own message.
        return Ok(start);
    }
    let width_limit = p0.width_um;
    let input_limit = spec
        .sizing
        .input_cap
        .map(|c| c * 1e15)
        .unwrap_or(p0.input_ff);
    let feasible = |p: &Point| {
        p.width_um <= width_limit + 1e-6 && p.input_ff <= input_limit + 1e-6 && p.keepers_ok
    };
    let (mut best, mut bp) = (start.clone(), p0);
    let mut evaluated = 1;
    // Starting sizes that load an input more than input_cap: shrink every device first
    // (an input's capacitance is close to linear in unit_n).
    while bp.input_ff > input_limit + 1e-6 {
        let u = ((best.unit_n * input_limit / bp.input_ff) * 100.0).floor() / 100.0;
        if u < spec.technology.w_min || evaluated > 4 {
            return Err(format!(
                "no unit_n of at least {} um keeps every input within input_cap ({input_limit:.2} fF)",
                spec.technology.w_min
            ));
        }
        best.unit_n = u;
        bp = evaluate(spec, &best, light).map_err(fail)?.0;
        evaluated += 1;
    }
    if !bp.keepers_ok {
        return Err(format!(
            "the sizes that keep every input within input_cap ({input_limit:.2} fF) fail the keeper check or go below w_min; raise input_cap"
        ));
    }
    let chains = has_chains(spec);
    let names: Vec<&str> = knobs(&best, dynamic, chains).iter().map(|k| k.0).collect();
    'search: for step in [1.5, 1.25, 1.1] {
        loop {
            let mut moved = false;
            for &name in &names {
                let (lo, hi) = range(name, spec);
                let v = knobs(&best, dynamic, chains)
                    .iter()
                    .find(|k| k.0 == name)
                    .expect("a knob")
                    .1;
                for f in [step, 1.0 / step] {
                    if evaluated >= MAX_EVALUATIONS {
                        break 'search;
                    }
                    let nv = round2((v * f).clamp(lo, hi));
                    if (nv - v).abs() < 1e-9 {
                        continue;
                    }
                    let mut cand = with_knob(&best, name, nv);
                    let (mut p, _) = evaluate(spec, &cand, light).map_err(fail)?;
                    evaluated += 1;
                    if name != "unit_n" && p.width_um > width_limit + 1e-6 {
                        // Hold the area: shrink every device (unit_n) until the total width
                        // is back within the limit (width is close to linear in unit_n).
                        let (lo, _) = range("unit_n", spec);
                        let u = ((cand.unit_n * width_limit / p.width_um) * 100.0).floor() / 100.0;
                        if u >= lo {
                            cand.unit_n = u;
                            p = evaluate(spec, &cand, light).map_err(fail)?.0;
                            evaluated += 1;
                        }
                    }
                    if feasible(&p) && p.worst_ps < bp.worst_ps - 0.5 {
                        best = cand;
                        bp = p;
                        moved = true;
                        break;
                    }
                }
            }
            if !moved {
                break;
            }
        }
    }
    // The full search decides between the start and the result.
    let (_, e0) = evaluate(spec, &start, full).map_err(fail)?;
    let (pb, eb) = evaluate(spec, &best, full).map_err(fail)?;
    // The start itself stays only where it is within the limits.
    let start_ok = p0.input_ff <= input_limit + 1e-6;
    let keep = feasible(&pb) && (eb.worst_ps < e0.worst_ps || !start_ok);
    let (mut chosen, e) = if keep {
        (best, eb)
    } else {
        (start, e0.clone())
    };
    chosen.auto = Some(AutoSizing {
        rule: if keep {
            "auto: pattern search over unit_n, the role multipliers and (Manchester chains) the taper on the timing engine's worst path, total width and largest input capacitance no more than the starting sizes' (or sizing.input_cap)"
        } else {
            "auto: the pattern search found nothing faster within the limits; the starting sizes stay"
        },
        default_worst_ps: e0.worst_ps,
        worst_ps: e.worst_ps,
        default_width_um: e0.total_width_um,
        width_um: e.total_width_um,
        width_limit_um: width_limit,
        input_cap_limit_ff: (input_limit * 100.0).round() / 100.0,
        evaluated: evaluated + 2,
    });
    Ok(chosen)
}

/// The largest input capacitance of a design (fF) in the engine's model, and the input.
pub fn largest_input_cap(spec: &Spec, design: &crate::netlist::Design) -> Result<(f64, String)> {
    let tm = crate::timing::engine::timing_of(spec)?;
    let g = crate::timing::engine::Graph::new(spec, design, &tm)?;
    let mut out = (0.0, String::new());
    for &x in &g.inputs {
        if Some(x) == g.clk {
            continue;
        }
        let c = g.cap_ff[x as usize];
        if c > out.0 {
            out = (c, g.names[x as usize].clone());
        }
    }
    Ok(out)
}
