//! Reading a SPICE subcircuit file back: `.subckt` / `.ends`, MOSFET lines (`M...`, or `X...`
//! for subcircuit devices such as SKY130's), subcircuit instances (`X...`), capacitors (kept
//! only as a count: they carry no logic), comments (`*`, and `;` or `$ ` to the end of a line)
//! and `+` continuation lines. SPICE is case-insensitive: every name is read in lower case.
//!
//! A device is told from an instance by its model: the technology's NMOS or PMOS model name
//! is a transistor, any other name must be a subcircuit the file defines. Sizes are read in
//! µm: a value with an SI suffix (`2u`, `350n`) is converted, a bare number is metres unless the
//! technology writes its sizes without a suffix (subcircuit devices sized in µm).
//!
//! [`flatten`] expands the hierarchy from one top subcircuit into transistors over global net
//! ids, with the names the netlist IR gives them (`xblk1.c3`, `xblk1.xmc2.f`): the same names
//! the logic view's evaluator uses, so a wrong node can be named in both.

use crate::error::{Error, Result};
use crate::tech::Technology;
use std::collections::HashMap;

/// Channel type.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Kind {
    N,
    P,
}

/// One element line of a subcircuit.
#[derive(Debug, Clone, PartialEq)]
pub enum Element {
    /// A transistor: drain, gate, source, bulk; sizes in µm.
    Mos {
        name: String,
        kind: Kind,
        d: String,
        g: String,
        s: String,
        b: String,
        w: f64,
        l: f64,
        line: usize,
    },
    /// An instance of another subcircuit.
    Inst {
        name: String,
        nets: Vec<String>,
        master: String,
        line: usize,
    },
}

/// One `.subckt ... .ends` block.
#[derive(Debug, Clone, PartialEq)]
pub struct Subckt {
    pub name: String,
    pub ports: Vec<String>,
    pub elements: Vec<Element>,
    /// Capacitors (wire loads): counted, not simulated.
    pub capacitors: usize,
    pub line: usize,
}

/// Every subcircuit of a file, in file order.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Netlist {
    pub subckts: Vec<Subckt>,
}

impl Netlist {
    pub fn get(&self, name: &str) -> Option<&Subckt> {
        let lower = name.to_ascii_lowercase();
        self.subckts.iter().find(|s| s.name == lower)
    }
}

/// Logical lines: comments removed, continuations joined; each with its first physical line
/// number (1-based).
fn logical_lines(text: &str) -> Vec<(usize, String)> {
    let mut out: Vec<(usize, String)> = vec![];
    for (i, raw) in text.lines().enumerate() {
        let mut line = raw;
        for cut in [";", "$ "] {
            if let Some(k) = line.find(cut) {
                line = &line[..k];
            }
        }
        let t = line.trim();
        if t.is_empty() || t.starts_with('*') {
            continue;
        }
        if let Some(rest) = t.strip_prefix('+') {
            if let Some(last) = out.last_mut() {
                last.1.push(' ');
                last.1.push_str(rest.trim());
                continue;
            }
        }
        out.push((i + 1, t.to_ascii_lowercase()));
    }
    out
}

/// A size: SI suffix or bare number, to µm (`bare_um`: bare numbers are µm).
fn size_um(v: &str, bare_um: bool) -> Option<f64> {
    let split = v
        .find(|c: char| c.is_ascii_alphabetic() && c != 'e')
        .or_else(|| {
            // `1e-6` keeps its exponent; a trailing letter run after it is a suffix.
            v.rfind(|c: char| c.is_ascii_alphabetic() && c != 'e')
        })
        .unwrap_or(v.len());
    let (num, suffix) = v.split_at(split);
    let x: f64 = num.parse().ok()?;
    // Power of ten from the unit to µm (divisions keep `350n` exactly 0.35).
    let unit = match suffix {
        "" if bare_um => 0,
        "" => 6,
        "meg" => 12,
        "k" => 9,
        _ => match suffix.chars().next()? {
            'm' if !suffix.starts_with("meg") => 3,
            'u' => 0,
            'n' => -3,
            'p' => -6,
            'f' => -9,
            _ => return None,
        },
    };
    let um = if unit >= 0 {
        x * 10f64.powi(unit)
    } else {
        x / 10f64.powi(-unit)
    };
    um.is_finite().then_some(um)
}

fn bad(label: &str, line: usize, msg: impl std::fmt::Display) -> Error {
    Error::Input(format!("{label}:{line}: {msg}"))
}

/// Parse the subcircuits of `text` (`label` names the file in errors). Lines outside any
/// subcircuit other than comments and control cards (`.include`, `.lib`, `.param`, `.end`) are
/// refused: this reads a subcircuit file, not a deck.
pub fn parse(text: &str, label: &str, tech: &Technology) -> Result<Netlist> {
    let nmos = tech.nmos.to_ascii_lowercase();
    let pmos = tech.pmos.to_ascii_lowercase();
    let bare_um = tech.device.size_suffix.is_empty();
    let lines = logical_lines(text);
    // First pass: subcircuit names, so an instance can be told from a device.
    let defined: Vec<String> = lines
        .iter()
        .filter_map(|(_, l)| {
            let mut t = l.split_whitespace();
            (t.next() == Some(".subckt")).then(|| t.next().unwrap_or("").to_string())
        })
        .collect();
    let mut net = Netlist::default();
    let mut open: Option<Subckt> = None;
    for (ln, l) in &lines {
        let toks: Vec<&str> = l.split_whitespace().collect();
        let head = toks[0];
        if head == ".subckt" {
            if let Some(s) = &open {
                return Err(bad(
                    label,
                    *ln,
                    format!(".subckt inside .subckt {} (no .ends)", s.name),
                ));
            }
            let Some(name) = toks.get(1) else {
                return Err(bad(label, *ln, ".subckt without a name"));
            };
            if net.subckts.iter().any(|s| &s.name == name) {
                return Err(bad(label, *ln, format!("subcircuit {name} defined twice")));
            }
            let ports: Vec<String> = toks[2..]
                .iter()
                .take_while(|t| !t.contains('='))
                .map(|t| t.to_string())
                .collect();
            open = Some(Subckt {
                name: name.to_string(),
                ports,
                elements: vec![],
                capacitors: 0,
                line: *ln,
            });
            continue;
        }
        if head == ".ends" {
            match open.take() {
                Some(s) => net.subckts.push(s),
                None => return Err(bad(label, *ln, ".ends without .subckt")),
            }
            continue;
        }
        let Some(sub) = open.as_mut() else {
            if head.starts_with('.') {
                continue; // .include, .lib, .param, .end, .option: not part of the circuit
            }
            return Err(bad(
                label,
                *ln,
                format!(
                    "element {head} outside any .subckt (this reads a subcircuit file such as NAME.sp, not a deck)"
                ),
            ));
        };
        if head.starts_with('.') {
            return Err(bad(
                label,
                *ln,
                format!("control card {head} inside subcircuit {}", sub.name),
            ));
        }
        match head.as_bytes()[0] {
            b'c' => {
                if toks.len() < 4 {
                    return Err(bad(label, *ln, format!("capacitor {head} needs two nodes and a value")));
                }
                sub.capacitors += 1;
            }
            b'm' | b'x' => {
                // Positional fields end at the first `key=value`.
                let pos: Vec<&str> = toks.iter().copied().take_while(|t| !t.contains('=')).collect();
                let params: HashMap<&str, &str> = toks[pos.len()..]
                    .iter()
                    .filter_map(|t| t.split_once('='))
                    .collect();
                let model = *pos.last().unwrap_or(&"");
                let is_mos = model == nmos || model == pmos;
                if is_mos && pos.len() == 6 {
                    let size = |key: &str| -> Result<f64> {
                        let v = params.get(key).ok_or_else(|| {
                            bad(label, *ln, format!("device {head} has no {key}="))
                        })?;
                        size_um(v, bare_um).filter(|x| *x > 0.0).ok_or_else(|| {
                            bad(label, *ln, format!("device {head}: {key}={v} is not a size"))
                        })
                    };
                    sub.elements.push(Element::Mos {
                        name: head.to_string(),
                        kind: if model == nmos { Kind::N } else { Kind::P },
                        d: pos[1].into(),
                        g: pos[2].into(),
                        s: pos[3].into(),
                        b: pos[4].into(),
                        w: size("w")?,
                        l: size("l")?,
                        line: *ln,
                    });
                } else if is_mos {
                    return Err(bad(
                        label,
                        *ln,
                        format!("device {head} needs drain, gate, source and bulk before its model"),
                    ));
                } else if head.starts_with('m') {
                    return Err(bad(
                        label,
                        *ln,
                        format!(
                            "device {head}: model {model} is neither the technology's NMOS ({nmos}) nor its PMOS ({pmos})"
                        ),
                    ));
                } else if defined.iter().any(|d| d == model) {
                    sub.elements.push(Element::Inst {
                        name: head.to_string(),
                        nets: pos[1..pos.len() - 1].iter().map(|s| s.to_string()).collect(),
                        master: model.to_string(),
                        line: *ln,
                    });
                } else {
                    return Err(bad(
                        label,
                        *ln,
                        format!("instance {head}: no subcircuit or device model named {model}"),
                    ));
                }
            }
            _ => {
                return Err(bad(
                    label,
                    *ln,
                    format!(
                        "element {head}: only transistors (M, or X for subcircuit devices), subcircuit instances (X) and capacitors (C) are read"
                    ),
                ))
            }
        }
    }
    if let Some(s) = open {
        return Err(bad(
            label,
            s.line,
            format!("subcircuit {} has no .ends", s.name),
        ));
    }
    Ok(net)
}

/// A transistor of the flattened netlist.
#[derive(Debug, Clone, PartialEq)]
pub struct Device {
    /// Hierarchical instance path (`xblk1.xmc2.mn_g`).
    pub name: String,
    pub kind: Kind,
    pub d: u32,
    pub g: u32,
    pub s: u32,
    pub b: u32,
    pub w: f64,
    pub l: f64,
    /// Line of the device in the file.
    pub line: usize,
}

/// Transistors over global nets, from one top subcircuit.
#[derive(Debug, Clone, Default)]
pub struct Flat {
    pub top: String,
    /// Net names: top-level nets by their own name, the others `PATH.NAME`.
    pub names: Vec<String>,
    pub devices: Vec<Device>,
    /// Global nets of the top subcircuit's ports, in port order.
    pub ports: Vec<u32>,
    pub capacitors: usize,
}

impl Flat {
    pub fn net(&self, name: &str) -> Option<u32> {
        self.names.iter().position(|n| n == name).map(|i| i as u32)
    }
}

/// Flatten subcircuit `top` of `net`.
pub fn flatten(net: &Netlist, top: &str, label: &str) -> Result<Flat> {
    let Some(t) = net.get(top) else {
        return Err(Error::Input(format!(
            "{label}: no subcircuit named {top} (the spec's name); the file defines {}",
            net.subckts
                .iter()
                .map(|s| s.name.as_str())
                .collect::<Vec<_>>()
                .join(", ")
        )));
    };
    let mut flat = Flat {
        top: t.name.clone(),
        ..Flat::default()
    };
    let mut local: HashMap<String, u32> = HashMap::new();
    for p in &t.ports {
        if local.contains_key(p) {
            return Err(Error::Input(format!(
                "{label}:{}: port {p} listed twice on {}",
                t.line, t.name
            )));
        }
        let g = flat.names.len() as u32;
        flat.names.push(p.clone());
        local.insert(p.clone(), g);
        flat.ports.push(g);
    }
    expand(
        net,
        t,
        local,
        "",
        &mut flat,
        label,
        &mut vec![t.name.clone()],
    )?;
    Ok(flat)
}

fn expand(
    net: &Netlist,
    sub: &Subckt,
    mut local: HashMap<String, u32>,
    prefix: &str,
    flat: &mut Flat,
    label: &str,
    stack: &mut Vec<String>,
) -> Result<()> {
    flat.capacitors += sub.capacitors;
    let mut id = |n: &str, flat: &mut Flat| -> u32 {
        // The supplies are global: every subcircuit lists them as ports, so they map to the
        // top's; a subcircuit that does not will still find them by name.
        if let Some(&g) = local.get(n) {
            return g;
        }
        let g = flat.names.len() as u32;
        flat.names.push(format!("{prefix}{n}"));
        local.insert(n.to_string(), g);
        g
    };
    for e in &sub.elements {
        match e {
            Element::Mos {
                name,
                kind,
                d,
                g,
                s,
                b,
                w,
                l,
                line,
            } => {
                let dev = Device {
                    name: format!("{prefix}{name}"),
                    kind: *kind,
                    d: id(d, flat),
                    g: id(g, flat),
                    s: id(s, flat),
                    b: id(b, flat),
                    w: *w,
                    l: *l,
                    line: *line,
                };
                flat.devices.push(dev);
            }
            Element::Inst {
                name,
                nets,
                master,
                line,
            } => {
                let m = net.get(master).expect("parse checked the master exists");
                if stack.contains(&m.name) {
                    return Err(Error::Input(format!(
                        "{label}:{line}: instance {name} of {} inside itself",
                        m.name
                    )));
                }
                if nets.len() != m.ports.len() {
                    return Err(Error::Input(format!(
                        "{label}:{line}: instance {name} connects {} nets, subcircuit {} has {} ports",
                        nets.len(),
                        m.name,
                        m.ports.len()
                    )));
                }
                let mut inner = HashMap::new();
                for (p, n) in m.ports.iter().zip(nets) {
                    let g = id(n, flat);
                    inner.insert(p.clone(), g);
                }
                stack.push(m.name.clone());
                expand(
                    net,
                    m,
                    inner,
                    &format!("{prefix}{name}."),
                    flat,
                    label,
                    stack,
                )?;
                stack.pop();
            }
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sizes_read_in_micrometres() {
        assert_eq!(size_um("2u", false), Some(2.0));
        assert_eq!(size_um("350n", false), Some(0.35));
        assert_eq!(size_um("0.5", true), Some(0.5));
        assert!((size_um("1e-6", false).unwrap() - 1.0).abs() < 1e-9);
        assert_eq!(size_um("0.5um", false), Some(0.5));
        assert_eq!(size_um("abc", false), None);
    }
}
