//! Ripple-carry adder: a chain of mirror full adders, each restoring its carry.

use super::{top_module, TopNets};
use crate::cells::{CellKind, Library};
use crate::netlist::{Design, DesignBuilder, Module, NetId};
use crate::spec::Spec;

/// Mirror full adders `xfa<i>` for bits [lo, hi) in the top module, from carry `ci` to `co`.
pub fn chain(
    d: &mut DesignBuilder,
    top: &mut Module,
    t: &TopNets,
    lo: usize,
    hi: usize,
    ci: NetId,
    co: NetId,
) {
    let fa = d.cell(CellKind::FullAdder);
    let mut carry = ci;
    for i in lo..hi {
        let next = if i + 1 == hi {
            co
        } else {
            top.net(format!("c{}", i + 1))
        };
        top.inst_at(
            i,
            format!("xfa{i}"),
            fa,
            vec![t.a[i], t.b[i], carry, t.s[i], next],
        );
        carry = next;
    }
}

pub fn build(spec: &Spec, lib: &Library) -> Design {
    let mut d = DesignBuilder::new(&spec.name, lib);
    let (mut top, t) = top_module(&spec.name, spec.width, false);
    chain(&mut d, &mut top, &t, 0, spec.width, t.cin, t.cout);
    d.finish(top, false)
}
