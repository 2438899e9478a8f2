//! carrywright: from a short YAML spec of an adder, one netlist, rendered as structural
//! Verilog and as a transistor-level SPICE deck, each with a testbench, verified before
//! anything is written.
//!
//! ```text
//! spec.yaml -> spec::Spec -> arch::build -> netlist::Design -> emit::{verilog, spice, summary}
//!                                                         \-> sim (bit-parallel logic check)
//! ```
//!
//! # Using the library
//!
//! Load a spec, build and check the netlist, and render every view (the same files
//! `carrywright generate` writes):
//!
//! ```
//! use carrywright::spec::{parse, LoadOptions};
//! use std::path::Path;
//!
//! let yaml = "name: acc8\nwidth: 8\narchitecture: kogge-stone\n";
//! let spec = parse(yaml, "example", Path::new("."), &LoadOptions::default())?;
//! let generated = carrywright::generate(&spec)?;
//! let names: Vec<&str> = generated.files.iter().map(|(n, _)| n.as_str()).collect();
//! assert_eq!(names, ["acc8.v", "acc8_tb.v", "acc8.sp", "acc8_tb.sp", "acc8.json"]);
//! assert!(generated.check.mismatches == 0);
//! # Ok::<(), carrywright::error::Error>(())
//! ```
//!
//! Estimate the worst path with the timing engine (no simulator needed: the built-in
//! technologies carry their characterised timing):
//!
//! ```
//! # use carrywright::spec::{parse, LoadOptions};
//! # use std::path::Path;
//! let yaml = "name: acc16\nwidth: 16\narchitecture: carry-skip\nblock: auto\n";
//! let spec = parse(yaml, "example", Path::new("."), &LoadOptions::default())?;
//! let design = carrywright::build(&spec)?;
//! let e = carrywright::timing::search::estimate(&spec, &design)?;
//! assert!(e.worst_ps > 0.0);
//! println!("{} -> {}: {} ps", e.worst_vectors.from, e.worst_vectors.to, e.worst_ps);
//! # Ok::<(), carrywright::error::Error>(())
//! ```
//!
//! Simulate the written views (Icarus Verilog and ngspice, each optional; a missing
//! simulator is a status in the results, not a panic):
//!
//! ```
//! # use carrywright::spec::{parse, LoadOptions};
//! # use std::path::Path;
//! let spec = parse("name: r4\nwidth: 4\narchitecture: ripple\n", "example", Path::new("."), &LoadOptions::default())?;
//! let g = carrywright::generate(&spec)?;
//! let dir = std::env::temp_dir().join("carrywright-doc-simulate");
//! carrywright::write_outputs(&dir, &g.files)?;
//! let o = carrywright::simulate::Options { ngspice: false, ..Default::default() };
//! let r = carrywright::simulate::simulate(&spec, g.estimate.as_ref(), &dir, &o)?;
//! // Pass where Icarus is installed, `missing` where it is not.
//! println!("{:?}", r.status);
//! # Ok::<(), carrywright::error::Error>(())
//! ```
//!
//! Sweep: a base spec and lists of values, every point estimated in parallel, and the
//! answer per width:
//!
//! ```
//! use carrywright::sweep::{self, Sweep};
//! use std::path::Path;
//! let text = "base: {name: acc, width: 8, architecture: ripple}\nvary:\n  architecture: [ripple, kogge-stone]\n";
//! let s = Sweep::parse(text, "example", Path::new("."))?;
//! let o = sweep::Options {
//!     estimate_only: true,
//!     limit: None,
//!     timeout: std::time::Duration::from_secs(60),
//!     load: Default::default(),
//!     progress: false,
//! };
//! let dir = std::env::temp_dir().join("carrywright-doc-sweep");
//! let outcome = sweep::run(&s, &dir, &o)?;
//! let answer = sweep::answer::answer(&outcome.points, None);
//! let fastest = &outcome.points[answer[0].fastest.unwrap()];
//! assert!(fastest.title.as_deref().unwrap().contains("kogge-stone"));
//! # Ok::<(), carrywright::error::Error>(())
//! ```

pub mod arch;
pub mod cells;
pub mod emit;
pub mod error;
pub mod models;
pub mod netlist;
pub mod output;
pub mod passes;
pub mod ratio;
pub mod schema;
pub mod sim;
pub mod simulate;
pub mod spec;
pub mod sweep;
pub mod switch;
pub mod tech;
pub mod timing;

use error::{Error, Result};
use netlist::Design;
pub use output::{stale_files, write_file, write_outputs};
use spec::Spec;

/// Random vectors the logic check runs inside `generate` (the `check` command runs more).
pub const GENERATE_RANDOM: usize = 16_384;
/// Widths up to this are checked exhaustively inside `generate`.
pub const GENERATE_EXHAUSTIVE_MAX: usize = 8;

/// Build the netlist and run its structural checks.
pub fn build(spec: &Spec) -> Result<Design> {
    build_checked(spec).map(|(design, _)| design)
}

/// [`build`], also returning the keeper check's report (dynamic designs with keepers) so
/// the views and `describe` need not run it again.
pub fn build_checked(spec: &Spec) -> Result<(Design, Option<timing::keeper::Report>)> {
    let design = arch::build(spec);
    check_sizes(spec, &design)?;
    check_name_is_free(spec, &design)?;
    design.check()?;
    // Keepers that fail (a front that stalls or does not fit the evaluate phase at the slow
    // corner, a node they cannot hold against leakage) are a spec problem: exit 2.
    if let (Some(limit), Some(_)) = (spec.sizing.input_cap, &spec.technology.timing) {
        let (c, input) = passes::sizing::largest_input_cap(spec, &design)?;
        if c > limit * 1e15 + 1e-9 {
            let msg = format!(
                "input {input} presents {c:.2} fF in the timing engine's model, above the limit {:.2} fF: lower unit_n or the role multipliers, or use sizing: {{mode: auto}}",
                limit * 1e15
            );
            return Err(match &spec.source {
                Some((label, text)) => spec::Source { label, text }.error("sizing.input_cap", msg),
                None => Error::Input(format!("sizing.input_cap: {msg}")),
            });
        }
    }
    let keepers = timing::keeper::check(spec, &design)?;
    if let Some(why) = keepers.as_ref().and_then(|r| r.failure.as_ref()) {
        return Err(timing::keeper::refusal(spec, why)?);
    }
    Ok((design, keepers))
}

/// Every device is at least the technology's smallest width and length, and of a size a
/// process can draw (bad `sizing` values are input errors, exit 2).
pub fn check_sizes(spec: &Spec, design: &Design) -> Result<()> {
    let t = &spec.technology;
    for cell in design.cells.values() {
        for d in &cell.devices {
            let bad = if !(d.w.is_finite() && d.l.is_finite()) {
                Some("is not a finite size".to_string())
            } else if d.w + 1e-9 < t.w_min {
                Some(format!(
                    "would be {} µm wide, below the technology's w_min {} µm",
                    d.w, t.w_min
                ))
            } else if d.l + 1e-9 < t.l_min {
                Some(format!(
                    "would be {} µm long, below the technology's l_min {} µm",
                    d.l, t.l_min
                ))
            } else if d.w > 1000.0 || d.l > 50.0 * t.l_min {
                Some(format!(
                    "would be {} µm × {} µm, too large to be meant",
                    d.w, d.l
                ))
            } else {
                None
            };
            if let Some(why) = bad {
                return Err(Error::Input(format!(
                    "sizing: device {} of cell {} {why}; change sizing.unit_n, sizing.pn_ratio or sizing.keeper",
                    d.name, cell.base
                )));
            }
        }
    }
    Ok(())
}

/// The design's name must not also be a net or instance name inside it (Verilog would hide
/// one with the other).
fn check_name_is_free(spec: &Spec, design: &Design) -> Result<()> {
    let lower = spec.name.to_ascii_lowercase();
    for m in &design.modules {
        let clash = m.nets.iter().any(|n| n.name.to_ascii_lowercase() == lower)
            || m.instances
                .iter()
                .any(|i| i.name.to_ascii_lowercase() == lower);
        if clash {
            return Err(Error::Input(format!(
                "name: `{}` is also a net or instance name inside module {}; choose another",
                spec.name, m.name
            )));
        }
    }
    Ok(())
}

/// Everything `generate` produces, in memory.
pub struct Generated {
    pub design: Design,
    pub check: sim::CheckReport,
    /// The switch-level check of NAME.sp (also in NAME.json `switch_level`).
    pub switch: Option<switch::Report>,
    /// Transistor and cell counts and the topological depth (also in NAME.json).
    pub counts: emit::summary::Counts,
    /// The timing engine's estimate (also in NAME.json and the deck), where the technology
    /// is characterised at the spec's conditions.
    pub estimate: Option<timing::search::Estimate>,
    /// Why the estimate failed, where the technology is characterised but the engine could
    /// not time the design (`generate` prints it as a warning).
    pub estimate_failed: Option<String>,
    /// (file name, contents), in a fixed order.
    pub files: Vec<(String, String)>,
}

/// Build, check (structure and logic) and render every view. Nothing touches the disk.
pub fn generate(spec: &Spec) -> Result<Generated> {
    // The deck is checked against the model files it will load: without them, no deck.
    if let Some(why) = &spec.technology.models_missing {
        return Err(Error::Input(why.clone()));
    }
    let (design, keepers) = build_checked(spec)?;
    // The three checks are independent and run side by side (rayon::join: inside a sweep they
    // share its thread pool): the logic check, the timing estimate, and the switch-level
    // check of the SPICE text (a pure function of spec and design, compared byte for byte
    // with the text `render_all` is about to write, so what was checked is exactly the file).
    let netlist = emit::spice::subcircuits(spec, &design)?;
    let label = format!("{}.sp", spec.name);
    let run_switch = |text: &str| {
        switch::check_or_fail(
            text,
            &label,
            &design,
            &spec.technology,
            spec.testbench.seed,
            GENERATE_RANDOM,
            GENERATE_EXHAUSTIVE_MAX,
        )
    };
    let ((check, timing), switched) = rayon::join(
        || {
            rayon::join(
                || {
                    sim::check_or_fail(
                        &design,
                        spec.testbench.seed,
                        GENERATE_RANDOM,
                        GENERATE_EXHAUSTIVE_MAX,
                    )
                },
                // The timing engine's estimate, where the technology is characterised at
                // these conditions. An estimate that fails (an engine fault, never bad
                // input) does not stop the views: it is reported in NAME.json and by
                // `generate`, and the deck falls back to the bound rule.
                || match spec.technology.timing {
                    Some(_) => timing::search::estimate(spec, &design)
                        .map_err(|e| format!("the timing estimate failed: {e}")),
                    None => Err(timing::engine::no_timing(spec)),
                },
            )
        },
        || run_switch(&netlist),
    );
    let check = check?;
    let counts = emit::summary::counts(&design);
    let switch_report = std::cell::RefCell::new(None);
    let switch_check = |text: &str| {
        let r = if text == netlist {
            switched.clone()?
        } else {
            run_switch(text)?
        };
        *switch_report.borrow_mut() = Some(r.clone());
        Ok(r)
    };
    let files = emit::render_all(
        spec,
        &design,
        &counts,
        timing.as_ref().map_err(String::as_str),
        keepers.as_ref(),
        Some(&switch_check),
    )?;
    let switch = switch_report.into_inner();
    let (estimate, estimate_failed) = match timing {
        Ok(e) => (Some(e), None),
        Err(why) => (None, spec.technology.timing.is_some().then_some(why)),
    };
    Ok(Generated {
        design,
        check,
        switch,
        counts,
        estimate,
        estimate_failed,
        files,
    })
}
