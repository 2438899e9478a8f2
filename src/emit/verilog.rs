//! Structural Verilog-2005 view and its self-checking testbench.

use super::vectors::Labeled;
use super::{render, title, VERSION};
use crate::cells::{Cell, Dir, Expr};
use crate::error::Result;
use crate::netlist::{Design, Master, Module, NetId};
use crate::spec::Spec;
use serde::Serialize;

#[derive(Serialize)]
struct PortCtx {
    dir: &'static str,
    range: String,
    name: String,
    /// An input the logic does not read (a keeper's gate, used by the transistor view).
    unused: bool,
}

#[derive(Serialize)]
struct AssignCtx {
    lhs: String,
    rhs: String,
}

#[derive(Serialize)]
struct InstCtx {
    master: String,
    name: String,
    conns: Vec<String>,
}

#[derive(Serialize)]
struct ModuleCtx {
    name: String,
    comment: String,
    port_list: String,
    ports: Vec<PortCtx>,
    wires: Vec<String>,
    assigns: Vec<AssignCtx>,
    instances: Vec<InstCtx>,
}

#[derive(Serialize)]
struct DesignCtx {
    title: String,
    version: &'static str,
    name: String,
    modules: Vec<ModuleCtx>,
}

fn dir(d: Dir) -> &'static str {
    match d {
        Dir::In => "input",
        Dir::Out => "output",
    }
}

/// Print a logic function with every compound term in parentheses.
pub fn expr(e: &Expr, pin: &dyn Fn(usize) -> String) -> String {
    match e {
        Expr::Pin(i) => pin(*i),
        Expr::Const(b) => if *b { "1'b1" } else { "1'b0" }.into(),
        Expr::Not(x) => format!("~{}", atom(x, pin)),
        Expr::And(xs) => join(xs, " & ", pin),
        Expr::Or(xs) => join(xs, " | ", pin),
        Expr::Xor(xs) => join(xs, " ^ ", pin),
        Expr::Mux(s, a, b) => format!("{} ? {} : {}", atom(s, pin), atom(a, pin), atom(b, pin)),
    }
}

fn atom(e: &Expr, pin: &dyn Fn(usize) -> String) -> String {
    match e {
        Expr::Pin(_) | Expr::Const(_) | Expr::Not(_) => expr(e, pin),
        _ => format!("({})", expr(e, pin)),
    }
}

fn join(xs: &[Expr], sep: &str, pin: &dyn Fn(usize) -> String) -> String {
    xs.iter()
        .map(|x| atom(x, pin))
        .collect::<Vec<_>>()
        .join(sep)
}

fn cell_module(design: &Design, c: &Cell) -> ModuleCtx {
    let pin = |i: usize| c.pins[i].name.to_string();
    let read = c.read_by_logic();
    ModuleCtx {
        name: format!("{}_{}", design.name, c.base),
        comment: format!(
            "cell {}: {} ({} transistors)",
            c.base,
            c.summary,
            c.devices.len()
        ),
        port_list: c.pins.iter().map(|p| p.name).collect::<Vec<_>>().join(", "),
        ports: c
            .pins
            .iter()
            .zip(read)
            .map(|(p, r)| PortCtx {
                dir: dir(p.dir),
                range: String::new(),
                name: p.name.into(),
                unused: p.dir == Dir::In && !r,
            })
            .collect(),
        wires: vec![],
        assigns: c
            .logic
            .iter()
            .map(|(o, f)| AssignCtx {
                lhs: pin(*o),
                rhs: expr(f, &pin),
            })
            .collect(),
        instances: vec![],
    }
}

/// A net as Verilog names it: bus bits of the top module as `a[3]`.
fn net_ref(m: &Module, id: NetId) -> String {
    let net = &m.nets[id.0 as usize];
    match &net.bus {
        Some((bus, bit)) => format!("{bus}[{bit}]"),
        None => net.name.clone(),
    }
}

fn pin_names(design: &Design, master: Master) -> Vec<String> {
    match master {
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
    }
}

fn module(design: &Design, m: &Module, is_top: bool) -> ModuleCtx {
    let port_nets: std::collections::HashSet<NetId> = m
        .ports
        .iter()
        .flat_map(|p| p.bits.iter().copied())
        .collect();
    ModuleCtx {
        name: m.name.clone(),
        comment: if is_top {
            format!(
                "top: {} transistors",
                design.transistors(Master::Module(design.modules.len() - 1))
            )
        } else {
            let i = design
                .modules
                .iter()
                .position(|x| x.name == m.name)
                .unwrap_or(0);
            format!(
                "block {}: {} transistors",
                m.name,
                design.transistors(Master::Module(i))
            )
        },
        port_list: m
            .ports
            .iter()
            .map(|p| p.name.clone())
            .collect::<Vec<_>>()
            .join(", "),
        ports: m
            .ports
            .iter()
            .map(|p| PortCtx {
                dir: dir(p.dir),
                range: if p.bus {
                    format!("[{}:0] ", p.bits.len() - 1)
                } else {
                    String::new()
                },
                name: p.name.clone(),
                unused: false,
            })
            .collect(),
        wires: m
            .nets
            .iter()
            .enumerate()
            .filter(|(i, _)| !port_nets.contains(&NetId(*i as u32)))
            .map(|(_, n)| n.name.clone())
            .collect(),
        assigns: vec![],
        instances: m
            .instances
            .iter()
            .map(|inst| InstCtx {
                master: design.master_name(inst.master),
                name: inst.name.clone(),
                conns: pin_names(design, inst.master)
                    .iter()
                    .zip(&inst.conns)
                    .map(|(p, n)| format!(".{p}({})", net_ref(m, *n)))
                    .collect(),
            })
            .collect(),
    }
}

/// `NAME.v`: cells, blocks, top.
pub fn design(spec: &Spec, design: &Design) -> Result<String> {
    let mut modules: Vec<ModuleCtx> = design
        .cells
        .values()
        .map(|c| cell_module(design, c))
        .collect();
    let last = design.modules.len() - 1;
    for (i, m) in design.modules.iter().enumerate() {
        modules.push(module(design, m, i == last));
    }
    render(
        "verilog/design.v",
        &DesignCtx {
            title: title(spec),
            version: VERSION,
            name: spec.name.clone(),
            modules,
        },
    )
}

#[derive(Serialize)]
struct VecCtx {
    a: String,
    b: String,
    cin: String,
    s: String,
    cout: String,
    label: &'static str,
}

#[derive(Serialize)]
struct TbCtx {
    title: String,
    version: &'static str,
    name: String,
    width: usize,
    span: u64,
    dynamic: bool,
    exhaustive: bool,
    /// Directed vectors, with expected outputs.
    directed: Vec<VecCtx>,
    /// The first random vectors, with expected outputs (they also check the generator).
    listed: Vec<VecCtx>,
    listed_count: usize,
    /// Random vectors in all (`testbench.random`), and how many the testbench draws itself.
    random: usize,
    drawn: usize,
    seed: u64,
}

/// Widths up to this get an exhaustive testbench.
pub const TB_EXHAUSTIVE_MAX: usize = 8;

pub fn hex(w: usize, v: u128) -> String {
    format!("{w}'h{v:x}")
}

/// `NAME_tb.v`: the directed vectors and the first random ones of `plan` listed with their
/// expected outputs; the rest of the `testbench.random` vectors drawn in the simulator by the
/// same seeded SplitMix64 (so the file stays small however many there are); every
/// combination up to 8 bits.
pub fn testbench(spec: &Spec, plan: &[Labeled]) -> Result<String> {
    let w = spec.width;
    let exhaustive = w <= TB_EXHAUSTIVE_MAX;
    let n_directed = super::vectors::n_directed(plan);
    let random = spec.testbench.random;
    let listed: Vec<VecCtx> = plan[n_directed..]
        .iter()
        .take(random)
        .map(|l| vec_ctx(w, l))
        .collect();
    render(
        "verilog/testbench.v",
        &TbCtx {
            title: title(spec),
            version: VERSION,
            name: spec.name.clone(),
            width: w,
            span: 1u64 << w.min(32),
            dynamic: spec.style == crate::spec::Style::Dynamic,
            exhaustive,
            directed: plan[..n_directed].iter().map(|l| vec_ctx(w, l)).collect(),
            listed_count: listed.len(),
            drawn: random - listed.len(),
            listed,
            random,
            seed: spec.testbench.seed,
        },
    )
}

fn vec_ctx(w: usize, l: &Labeled) -> VecCtx {
    VecCtx {
        a: hex(w, l.v.a),
        b: hex(w, l.v.b),
        cin: format!("1'b{}", l.v.cin as u8),
        s: hex(w, l.v.s),
        cout: format!("1'b{}", l.v.cout as u8),
        label: l.label,
    }
}
