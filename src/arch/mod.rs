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
