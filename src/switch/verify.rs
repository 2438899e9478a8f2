//! `carrywright verify NETLIST.sp --spec SPEC`: the check of a transistor netlist a designer
//! edited by hand. Three parts, each on the edited file as written:
//!
//! 1. **Function**: the switch-level check (`check_flat`) against a + b + cin, as `generate`
//!    runs it on its own output; a wrong or X output names the vector, the output and the
//!    first internal node that went wrong.
//! 2. **Structure**: a comparison with the netlist the spec generates (`compare`: devices
//!    matched by connectivity, not by name), listing removed, added, rewired and retyped
//!    devices and, separately, every W or L that differs from the generated one.
//! 3. **Rules on the edited sizes**: every device at least the technology's `w_min` and
//!    `l_min`, and the keeper ratio rule (common practice: at each node a keeper holds, the
//!    weakest conducting pull-down path, as series W/L, stronger than the keeper), computed
//!    with the edited W and L of the matched devices.
//!
//! Exit 0 when the netlist adds correctly and keeps the rules (structural and size
//! differences are reported, not fatal, unless `strict`), 1 when it does not add or breaks a
//! rule, 2 on a file that cannot be read (the parser's errors, exit 2 through `Error::Input`).

use super::compare::{self, Comparison};
use super::parse::{self, Flat, Kind};
use super::{check_flat, Report};
use crate::error::Result;
use crate::netlist::Design;
use crate::spec::Spec;
use serde::Serialize;
use std::collections::HashMap;

/// How long a check to run.
#[derive(Debug, Clone)]
pub struct Options {
    /// Connectivity differences are failures (exit 1).
    pub strict: bool,
    /// Random vectors above `exhaustive_max` bits (directed vectors are always run).
    pub random: usize,
    /// Widths up to this run every input vector.
    pub exhaustive_max: usize,
}

/// A device whose size differs from the generated one (µm).
#[derive(Debug, Clone, Serialize)]
pub struct Size {
    pub device: String,
    /// The generated device's name where the edited one is named otherwise.
    pub reference: Option<String>,
    pub w_reference: f64,
    pub l_reference: f64,
    pub w: f64,
    pub l: f64,
}

/// A broken rule on the edited sizes.
#[derive(Debug, Clone, Serialize)]
pub struct Broken {
    /// `w_min`, `l_min` or `keeper ratio`.
    pub rule: &'static str,
    pub message: String,
}

/// The ratio rule at one kept node, on the edited and on the generated sizes.
#[derive(Debug, Clone, Serialize)]
pub struct Keeper {
    pub node: String,
    /// W/L of the keeper.
    pub keeper: f64,
    /// Series W/L of the weakest conducting pull-down path (None: no path found).
    pub weakest: Option<f64>,
    /// The same on the generated sizes.
    pub weakest_generated: Option<f64>,
    pub keeper_generated: f64,
    pub passes: bool,
    pub passes_generated: bool,
}

/// The connectivity part of the comparison, for NAME.json-style output.
#[derive(Debug, Clone, Serialize)]
pub struct Structure {
    pub isomorphic: bool,
    pub matched: usize,
    pub removed: usize,
    pub added: usize,
    pub rewired: usize,
    pub retyped: usize,
    pub unmatched_nets: (usize, usize),
    /// One line per difference, then the table of sizes.
    pub lines: Vec<String>,
}

/// Everything `verify` found.
#[derive(Debug, Clone, Serialize)]
pub struct Verdict {
    pub netlist: String,
    pub spec: String,
    pub transistors: usize,
    pub transistors_generated: usize,
    pub switch_level: Report,
    pub structure: Structure,
    pub sizes: Vec<Size>,
    pub keepers: Vec<Keeper>,
    pub broken_rules: Vec<Broken>,
    pub strict: bool,
    pub exit_code: i32,
}

impl Verdict {
    /// Does the edited netlist add (every output right, no X)?
    pub fn adds(&self) -> bool {
        self.switch_level.passed
    }

    fn code(&self) -> i32 {
        let fails = !self.adds()
            || !self.broken_rules.is_empty()
            || (self.strict && !self.structure.isomorphic);
        fails as i32
    }

    /// The report for a terminal: one line per part, then the details.
    pub fn render(&self) -> String {
        let mut o = String::new();
        let sw = &self.switch_level;
        o.push_str(&format!(
            "verify {} against the netlist spec {} generates\n",
            self.netlist, self.spec
        ));
        let how = if sw.exhaustive {
            "exhaustive"
        } else {
            "directed and random"
        };
        let phases = if sw.phases == 2 {
            ", precharge and evaluate"
        } else {
            ""
        };
        match &sw.first_failure {
            None => o.push_str(&format!(
                "  {:<13} ok      {} vectors ({how}{phases}) on {} transistors, as switches\n",
                "function", sw.vectors, self.transistors
            )),
            Some(f) => o.push_str(&format!(
                "  {:<13} FAILED  {} wrong output bits over {} vectors; first: {}\n",
                "function", sw.wrong_bits, sw.vectors, f.message
            )),
        }
        let st = &self.structure;
        if st.isomorphic {
            o.push_str(&format!(
                "  {:<13} same    {} devices matched one to one by connectivity\n",
                "structure", st.matched
            ));
        } else {
            o.push_str(&format!(
                "  {:<13} {}  {} matched; {} removed, {} added, {} rewired, {} of the other kind ({} transistors, generated {})\n",
                "structure",
                if self.strict { "FAILED" } else { "differs" },
                st.matched,
                st.removed,
                st.added,
                st.rewired,
                st.retyped,
                self.transistors,
                self.transistors_generated
            ));
        }
        o.push_str(&format!(
            "  {:<13} {}\n",
            "sizes",
            if self.sizes.is_empty() {
                "same    every matched device has the generated W and L".to_string()
            } else {
                format!("differ  {} devices (table below)", self.sizes.len())
            }
        ));
        let held = self.keepers.len();
        if self.broken_rules.is_empty() {
            o.push_str(&format!(
                "  {:<13} ok      w_min and l_min on every device{}\n",
                "rules",
                if held > 0 {
                    format!("; keeper ratio at {held} kept nodes")
                } else {
                    String::new()
                }
            ));
        } else {
            o.push_str(&format!(
                "  {:<13} FAILED  {} broken\n",
                "rules",
                self.broken_rules.len()
            ));
            for b in self.broken_rules.iter().take(20) {
                o.push_str(&format!("    {}: {}\n", b.rule, b.message));
            }
            if self.broken_rules.len() > 20 {
                o.push_str(&format!("    ... {} more\n", self.broken_rules.len() - 20));
            }
        }
        if !st.lines.is_empty() {
            o.push_str("differences from the generated netlist:\n");
            for l in &st.lines {
                o.push_str(&format!("  {l}\n"));
            }
        }
        o.push_str(&match self.exit_code {
            0 => "result: the netlist adds correctly (exit 0)\n".to_string(),
            _ if !self.adds() => "result: the netlist does not add correctly (exit 1)\n".into(),
            _ if !self.broken_rules.is_empty() => {
                "result: the netlist adds, but breaks the sizing rules above (exit 1)\n".into()
            }
            _ => {
                "result: the netlist adds, but differs in structure and --strict is set (exit 1)\n"
                    .into()
            }
        });
        o
    }
}

/// The name a device has in the logic view's flattening (`PATH.DEVICE`): the SPICE name
/// without the technology's instance prefix on its last part.
fn ir_name<'a>(name: &'a str, prefix: &str) -> std::borrow::Cow<'a, str> {
    match name.rsplit_once('.') {
        Some((path, dev)) if !prefix.is_empty() && dev.starts_with(prefix) => {
            format!("{path}.{}", &dev[prefix.len()..]).into()
        }
        None if !prefix.is_empty() && name.starts_with(prefix) => name[prefix.len()..].into(),
        _ => name.into(),
    }
}

/// Verify `text` (the edited netlist, `label` names it in messages) against what `spec`
/// builds (`design`, its reference SPICE text `reference_text`).
pub fn verify(
    text: &str,
    label: &str,
    spec: &Spec,
    design: &Design,
    reference_text: &str,
    opts: &Options,
) -> Result<Verdict> {
    let tech = &spec.technology;
    let edited = parse::flatten(&parse::parse(text, label, tech)?, &design.name, label)?;
    let reference_label = format!("{}.sp (generated)", design.name);
    let reference = parse::flatten(
        &parse::parse(reference_text, &reference_label, tech)?,
        &design.name,
        &reference_label,
    )?;
    let switch_level = check_flat(
        &edited,
        design,
        tech,
        spec.testbench.seed,
        opts.random,
        opts.exhaustive_max,
    )?;
    let cmp = compare::compare(&reference, &edited);
    let sizes = cmp
        .sizes
        .iter()
        .map(|d| {
            let (r, e) = (
                &reference.devices[d.reference as usize].name,
                &edited.devices[d.edited as usize].name,
            );
            Size {
                device: e.clone(),
                reference: (r != e).then(|| r.clone()),
                w_reference: d.w_ref,
                l_reference: d.l_ref,
                w: d.w_edit,
                l: d.l_edit,
            }
        })
        .collect();
    let mut broken_rules = min_sizes(&edited, label, spec);
    let keepers = keeper_ratios(&reference, &edited, &cmp, spec, design);
    for k in keepers.iter().filter(|k| !k.passes && k.passes_generated) {
        broken_rules.push(Broken {
            rule: "keeper ratio",
            message: format!(
                "at {} the weakest pull-down path is W/L {} against the keeper's {} (generated: {} against {}); the pull-down must be the stronger",
                k.node,
                k.weakest.map_or("none".to_string(), fmt_ratio),
                fmt_ratio(k.keeper),
                k.weakest_generated.map_or("none".to_string(), fmt_ratio),
                fmt_ratio(k.keeper_generated)
            ),
        });
    }
    let structure = Structure {
        isomorphic: cmp.isomorphic,
        matched: cmp.matched.len(),
        removed: cmp.removed.len(),
        added: cmp.added.len(),
        rewired: cmp.rewired.len(),
        retyped: cmp.retyped.len(),
        unmatched_nets: cmp.unmatched_nets,
        lines: cmp.lines(&reference, &edited),
    };
    let mut v = Verdict {
        netlist: label.to_string(),
        spec: spec.name.clone(),
        transistors: edited.devices.len(),
        transistors_generated: reference.devices.len(),
        switch_level,
        structure,
        sizes,
        keepers,
        broken_rules,
        strict: opts.strict,
        exit_code: 0,
    };
    v.exit_code = v.code();
    Ok(v)
}

fn fmt_ratio(x: f64) -> String {
    format!("{x:.3}")
}

/// Devices below the technology's minimum width or length, each with its line in the file.
fn min_sizes(edited: &Flat, label: &str, spec: &Spec) -> Vec<Broken> {
    let t = &spec.technology;
    let mut out = vec![];
    for d in &edited.devices {
        let kind = match d.kind {
            Kind::N => "nmos",
            Kind::P => "pmos",
        };
        for (rule, size, min, what) in [
            ("w_min", d.w, t.w_min, "wide"),
            ("l_min", d.l, t.l_min, "long"),
        ] {
            if size + 1e-9 < min {
                out.push(Broken {
                    rule,
                    message: format!(
                        "{label}:{}: {} ({kind}) is {size} µm {what}, below the technology's {rule} {min} µm",
                        d.line, d.name
                    ),
                });
            }
        }
    }
    out
}

/// The keeper ratio rule with the edited sizes of the matched devices (a generated device
/// with no counterpart conducts nothing) beside the rule on the generated sizes. Devices the
/// edit added are not in the logic view's paths and are left out of the rule (they are
/// listed as added).
fn keeper_ratios(
    reference: &Flat,
    edited: &Flat,
    cmp: &Comparison,
    spec: &Spec,
    design: &Design,
) -> Vec<Keeper> {
    let prefix = &spec.technology.device.prefix;
    let mut size: HashMap<String, f64> = reference
        .devices
        .iter()
        .map(|d| (ir_name(&d.name, prefix).into_owned(), 0.0))
        .collect();
    for &(r, e) in &cmp.matched {
        let e = &edited.devices[e as usize];
        size.insert(
            ir_name(&reference.devices[r as usize].name, prefix).into_owned(),
            e.w / e.l,
        );
    }
    let flat = design.flatten();
    let generated = crate::ratio::survey(design, &flat);
    if generated.is_empty() {
        return vec![];
    }
    let edited_kept = crate::ratio::survey_sized(design, &flat, &|n| size.get(n).copied());
    // A keeper the edit removed is not surveyed on the edited sizes.
    let by_node: HashMap<&str, &crate::ratio::Kept> =
        edited_kept.iter().map(|k| (k.node.as_str(), k)).collect();
    generated
        .iter()
        .filter_map(|g| {
            let k = by_node.get(g.node.as_str())?;
            Some(Keeper {
                node: g.node.clone(),
                keeper: k.keeper,
                weakest: k.weakest,
                weakest_generated: g.weakest,
                keeper_generated: g.keeper,
                passes: k.passes(),
                passes_generated: g.passes(),
            })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::ir_name;

    #[test]
    fn instance_prefix_is_dropped_from_the_device_only() {
        assert_eq!(ir_name("xblk0.xmc1.mn_g", ""), "xblk0.xmc1.mn_g");
        assert_eq!(ir_name("xblk0.xmc1.xmn_g", "x"), "xblk0.xmc1.mn_g");
        assert_eq!(ir_name("xmn_g", "x"), "mn_g");
    }
}
