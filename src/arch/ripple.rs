//! Ripple-carry adder: a chain of mirror full adders, each restoring its carry.

use super::top_module;
use crate::cells::{CellKind, Library};
use crate::netlist::{Design, DesignBuilder};
use crate::spec::Spec;

pub fn build(spec: &Spec, lib: &Library) -> Design {
    let mut d = DesignBuilder::new(&spec.name, lib);
    let fa = d.cell(CellKind::FullAdder);
    let (mut top, t) = top_module(&spec.name, spec.width, false);
    let mut carry = t.cin;
    for i in 0..spec.width {
        let next = if i + 1 == spec.width {
            t.cout
        } else {
            top.net(format!("c{}", i + 1))
        };
        top.inst(
            format!("xfa{i}"),
            fa,
            vec![t.a[i], t.b[i], carry, t.s[i], next],
        );
        carry = next;
    }
    d.finish(top, false)
}
