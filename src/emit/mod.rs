//! Views of the one netlist. Rust builds a plain context from the IR; the Tera templates
//! under `templates/` only print it.

pub mod report;
pub mod spice;
pub mod summary;
pub mod vectors;
pub mod verilog;

use crate::error::{Error, Result};
use crate::netlist::Design;
use crate::spec::Spec;
use crate::timing::search::Estimate;
use std::sync::OnceLock;
use tera::Tera;

pub const VERSION: &str = env!("CARGO_PKG_VERSION");

fn tera() -> &'static Tera {
    static T: OnceLock<Tera> = OnceLock::new();
    T.get_or_init(|| {
        let mut t = Tera::default();
        t.autoescape_on(vec![]);
        t.register_filter("circuit_lines", circuit_lines);
        t.add_raw_templates(vec![
            (
                "verilog/design.v",
                include_str!("../../templates/verilog/design.v.tera"),
            ),
            (
                "verilog/testbench.v",
                include_str!("../../templates/verilog/testbench.v.tera"),
            ),
            (
                "spice/cells.sp",
                include_str!("../../templates/spice/cells.sp.tera"),
            ),
            (
                "spice/deck.sp",
                include_str!("../../templates/spice/deck.sp.tera"),
            ),
            (
                "report/structure.svg",
                include_str!("../../templates/report/structure.svg.tera"),
            ),
        ])
        .expect("the built-in templates parse");
        t
    })
}

pub(crate) fn render(template: &str, ctx: &impl serde::Serialize) -> Result<String> {
    let ctx = tera::Context::from_serialize(ctx)
        .map_err(|e| Error::Output(format!("template context for {template}: {e}")))?;
    tera().render(template, &ctx).map_err(|e| {
        let mut msg = e.to_string();
        let mut src = std::error::Error::source(&e);
        while let Some(s) = src {
            msg.push_str(": ");
            msg.push_str(&s.to_string());
            src = s.source();
        }
        Error::Output(format!("rendering {template}: {msg}"))
    })
}

/// Tera filter: every non-blank line of a circuit as an ngspice `circbyline` command, so a
/// deck's `.control` block can build the circuit after reading where the models are.
fn circuit_lines(
    value: &tera::Value,
    _: &std::collections::HashMap<String, tera::Value>,
) -> tera::Result<tera::Value> {
    let text = tera::from_value::<String>(value.clone())?;
    let mut out = String::with_capacity(text.len() + text.len() / 4);
    for line in text.lines().filter(|l| !l.trim().is_empty()) {
        // ngspice substitutes `...` (a shell command) and $variables in control lines: the
        // only substitution a deck may hold is the model folder.
        let rest = line.replace(&format!("${}/", crate::tech::DECK_MODEL_VAR), "");
        if rest.contains(['`', '$']) {
            return Err(tera::Error::msg(format!(
                "a circuit line would be substituted by ngspice: {}",
                line.escape_debug()
            )));
        }
        out.push_str("circbyline ");
        out.push_str(line);
        out.push('\n');
    }
    out.pop();
    Ok(tera::Value::String(out))
}

/// One line saying what the design is.
pub fn title(spec: &Spec) -> String {
    use crate::spec::{Architecture as A, Style};
    let mut t = format!(
        "{}-bit {} adder, {} style",
        spec.width,
        spec.architecture.as_str(),
        spec.style.as_str()
    );
    let rule = spec
        .block_rule
        .map(|r| format!(" ({r})"))
        .unwrap_or_default();
    match spec.architecture {
        A::Ripple => {}
        A::Manchester => {
            t.push_str(&format!(", block {}", spec.block));
            if spec.buffers.positions.is_empty() {
                t.push_str(", no buffers");
            } else {
                let kind = if spec.style == Style::Dynamic {
                    "domino boundaries"
                } else if spec.buffers.inverting {
                    "inverting buffers"
                } else {
                    "non-inverting buffers"
                };
                t.push_str(&format!(
                    ", {kind} at bits {}",
                    itertools::join(&spec.buffers.positions, ",")
                ));
            }
        }
        A::CarrySkip => match &spec.block_sizes {
            Some(sizes) => t.push_str(&format!(", blocks {}{rule}", itertools::join(sizes, "-"))),
            None => t.push_str(&format!(", block {}{rule}", spec.block)),
        },
        A::CarrySelect => t.push_str(&format!(
            ", blocks {}{rule}",
            itertools::join(spec.block_sizes.as_deref().unwrap_or(&[]), "-")
        )),
        A::Lookahead => t.push_str(&format!(", {}-bit groups", spec.block)),
        _ => {
            if spec.block > 1 {
                t.push_str(&format!(", sparse over {}-bit groups", spec.block));
            } else {
                t.push_str(", dense");
            }
            if let Some(f) = spec.buffers.fanout {
                t.push_str(&format!(", fan-out buffers above {f}"));
            }
        }
    }
    t
}

/// A check of the SPICE subcircuit text before it is written (the switch-level check).
pub type SpiceCheck<'a> = &'a dyn Fn(&str) -> Result<crate::switch::Report>;

/// Every output file, in memory: (file name, contents).
/// `counts` is the design's [`summary::counts`], computed once by the caller.
/// `timing` is the timing engine's estimate, or why there is none (the technology is not
/// characterised at the spec's conditions, or the estimate failed): its worst pair joins the
/// directed vectors, the deck measures it, and its figures go into NAME.json and the deck
/// header. `check_spice` checks the SPICE subcircuit text before anything else is rendered
/// from it; its report goes into NAME.json `switch_level`.
pub fn render_all(
    spec: &Spec,
    design: &Design,
    counts: &summary::Counts,
    timing: std::result::Result<&Estimate, &str>,
    keepers: Option<&crate::timing::keeper::Report>,
    check_spice: Option<SpiceCheck>,
) -> Result<Vec<(String, String)>> {
    let estimate = timing.ok();
    // Only the vectors the deck uses are materialised; the Verilog testbench draws the other
    // random ones itself from the same seed.
    let listed = spec.testbench.random.min(spice::DECK_RANDOM);
    let worst = estimate.map(|e| {
        let v = |x: crate::timing::search::In| vectors::Vector::new(x.a, x.b, x.cin, spec.width);
        (v(e.pair.before), v(e.pair.after), design.dynamic)
    });
    let plan = vectors::plan(spec.width, listed, spec.testbench.seed, worst);
    let deck = spice::DeckPlan::new(spec, design, &plan, estimate)?;
    let n = &spec.name;
    let netlist = spice::subcircuits(spec, design)?;
    // The SPICE text is checked as it will be written (the deck carries the same text).
    let switch = check_spice.map(|f| f(&netlist)).transpose()?;
    let bench = spice::deck(spec, design, &deck, &netlist)?;
    Ok(vec![
        (format!("{n}.v"), verilog::design(spec, design)?),
        (format!("{n}_tb.v"), verilog::testbench(spec, &plan)?),
        (format!("{n}.sp"), netlist),
        (format!("{n}_tb.sp"), bench),
        (
            format!("{n}.json"),
            summary::json(
                spec,
                design,
                counts,
                &plan,
                &deck,
                timing,
                keepers,
                switch.as_ref(),
            )?,
        ),
    ])
}

/// Wrap words into lines of at most `width` characters (for SPICE continuation lines).
pub(crate) fn wrap<S: AsRef<str>>(words: &[S], width: usize) -> Vec<String> {
    let mut lines: Vec<String> = vec![];
    let mut cur = String::with_capacity(width);
    for w in words {
        let w = w.as_ref();
        if !cur.is_empty() && cur.len() + 1 + w.len() > width {
            lines.push(std::mem::replace(&mut cur, String::with_capacity(width)));
        }
        if !cur.is_empty() {
            cur.push(' ');
        }
        cur.push_str(w);
    }
    if !cur.is_empty() || lines.is_empty() {
        lines.push(cur);
    }
    lines
}
