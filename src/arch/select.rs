//! Carry-select: the first block ripples from cin; every later block computes its sums and
//! carry for a carry-in of 0 and of 1 (two ripple chains of mirror full adders, the first bit
//! of each from one propagate/generate/kill cell: a·b and a⊕b for 0, a+b and ~(a⊕b) for 1),
//! and multiplexers steered by the incoming carry pick the result.

use super::{top_module, BlockPorts};
use crate::cells::{CellKind, Library};
use crate::netlist::{Design, DesignBuilder, Master, Module};
use crate::spec::Spec;
use std::collections::BTreeMap;

fn select_block(d: &mut DesignBuilder, name: &str, size: usize) -> Module {
    let mut m = Module::new(format!("{name}_sel{size}"));
    let BlockPorts {
        a, b, ci, s, co, ..
    } = BlockPorts::new(&mut m, size, false);
    let (pg, fa, mux) = (
        d.cell(CellKind::PgInverted),
        d.cell(CellKind::FullAdder),
        d.cell(CellKind::Mux2),
    );
    // Bit 0 of both copies from one PG cell: (s, carry) = (p, g) for cin 0, (pn, kn) for cin 1.
    let (g, kn, p, pn) = (m.net("c1_0"), m.net("c1_1"), m.net("s0_0"), m.net("s0_1"));
    m.inst_at(0, "xpg0", pg, vec![a[0], b[0], g, kn, p, pn]);
    let mut sums = [vec![p], vec![pn]];
    let mut carries = [g, kn];
    for j in 1..size {
        for (copy, carry) in carries.iter_mut().enumerate() {
            let sj = m.net(format!("s{j}_{copy}"));
            let cj = m.net(format!("c{}_{copy}", j + 1));
            m.inst_at(
                j,
                format!("xfa{j}_{copy}"),
                fa,
                vec![a[j], b[j], *carry, sj, cj],
            );
            sums[copy].push(sj);
            *carry = cj;
        }
    }
    for j in 0..size {
        m.inst_at(
            j,
            format!("xmux{j}"),
            mux,
            vec![sums[0][j], sums[1][j], ci, s[j]],
        );
    }
    m.inst_at(size - 1, "xmuxc", mux, vec![carries[0], carries[1], ci, co]);
    m
}

/// Block sizes: uniform, or square-root (growing) blocks M, M, M+1, M+2, ... (Rabaey et al.,
/// Digital Integrated Circuits, 2nd ed., ch. 11; from memory) with the last one trimmed to fit.
pub fn sizes(width: usize, block: usize, sqrt: bool) -> Vec<usize> {
    if !sqrt {
        return super::manchester::blocks(width, block)
            .iter()
            .map(|(l, h)| h - l)
            .collect();
    }
    let first = if width >= 4 { 2 } else { 1 };
    let mut out = vec![first.min(width)];
    let mut next = first;
    while out.iter().sum::<usize>() < width {
        let left = width - out.iter().sum::<usize>();
        out.push(next.min(left));
        next += 1;
    }
    out
}

pub fn build(spec: &Spec, lib: &Library) -> Design {
    let mut d = DesignBuilder::new(&spec.name, lib);
    let (mut top, t) = top_module(&spec.name, spec.width, false);
    let sizes = spec
        .block_sizes
        .clone()
        .unwrap_or_else(|| sizes(spec.width, spec.block, false));
    let mut made: BTreeMap<usize, Master> = BTreeMap::new();
    let mut carry = t.cin;
    let mut lo = 0;
    for (k, &size) in sizes.iter().enumerate() {
        let hi = lo + size;
        let co = if hi == spec.width {
            t.cout
        } else {
            top.net(format!("c{hi}"))
        };
        if k == 0 {
            super::ripple::chain(&mut d, &mut top, &t, lo, hi, carry, co);
            carry = co;
        } else {
            let master = *made.entry(size).or_insert_with(|| {
                let m = select_block(&mut d, &spec.name, size);
                d.add_module(m)
            });
            top.inst_at(
                lo,
                format!("xblk{k}"),
                master,
                t.block_conns(lo, hi, carry, co),
            );
            carry = co;
        }
        lo = hi;
    }
    d.finish(top, false)
}
