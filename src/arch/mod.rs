//! Architecture builders: each knows one adder structure and produces the netlist IR.
//! They know nothing about output syntax.

pub mod manchester;
pub mod prefix;
pub mod ripple;
pub mod select;
pub mod skip;

use crate::cells::{Dir, Library, Sizes};
use crate::netlist::{Design, Module, NetId};
use crate::spec::{Architecture, Spec, Style};

/// The top module's ports, in the fixed order `[clk] a b cin s cout`.
pub struct TopNets {
    pub clk: Option<NetId>,
    pub a: Vec<NetId>,
    pub b: Vec<NetId>,
    pub cin: NetId,
    pub s: Vec<NetId>,
    pub cout: NetId,
}

pub fn top_module(name: &str, width: usize, dynamic: bool) -> (Module, TopNets) {
    let mut m = Module::new(name);
    let clk = dynamic.then(|| m.port("clk", Dir::In));
    let a = m.bus("a", Dir::In, width);
    let b = m.bus("b", Dir::In, width);
    let cin = m.port("cin", Dir::In);
    let s = m.bus("s", Dir::Out, width);
    let cout = m.port("cout", Dir::Out);
    (
        m,
        TopNets {
            clk,
            a,
            b,
            cin,
            s,
            cout,
        },
    )
}

impl TopNets {
    /// Connections of a block over bits [lo, hi): `[clk] a.. b.. ci s.. co`, the order of
    /// [`BlockPorts`].
    pub fn block_conns(&self, lo: usize, hi: usize, ci: NetId, co: NetId) -> Vec<NetId> {
        let mut conns = vec![];
        conns.extend(self.clk);
        conns.extend(&self.a[lo..hi]);
        conns.extend(&self.b[lo..hi]);
        conns.push(ci);
        conns.extend(&self.s[lo..hi]);
        conns.push(co);
        conns
    }
}

/// Ports of a block subcircuit, in the order `[clk] a0.. b0.. ci s0.. co`.
pub struct BlockPorts {
    pub clk: Option<NetId>,
    pub a: Vec<NetId>,
    pub b: Vec<NetId>,
    pub ci: NetId,
    pub s: Vec<NetId>,
    pub co: NetId,
}

impl BlockPorts {
    pub fn new(m: &mut Module, size: usize, dynamic: bool) -> BlockPorts {
        let clk = dynamic.then(|| m.port("clk", Dir::In));
        let a = (0..size)
            .map(|j| m.port(&format!("a{j}"), Dir::In))
            .collect();
        let b = (0..size)
            .map(|j| m.port(&format!("b{j}"), Dir::In))
            .collect();
        let ci = m.port("ci", Dir::In);
        let s = (0..size)
            .map(|j| m.port(&format!("s{j}"), Dir::Out))
            .collect();
        let co = m.port("co", Dir::Out);
        BlockPorts {
            clk,
            a,
            b,
            ci,
            s,
            co,
        }
    }
}

/// Build the netlist a spec describes.
pub fn build(spec: &Spec) -> Design {
    let lib = Library::new(Sizes::new(&spec.technology, &spec.sizing));
    let dynamic = spec.style == Style::Dynamic;
    match spec.architecture {
        Architecture::Ripple => ripple::build(spec, &lib),
        Architecture::Manchester => manchester::build(spec, &lib, dynamic),
        Architecture::CarrySkip => skip::build(spec, &lib, dynamic),
        Architecture::CarrySelect => select::build(spec, &lib),
        _ => {
            let (mut d, report) = prefix::build(spec, &lib);
            d.prefix = Some(report);
            d
        }
    }
}
