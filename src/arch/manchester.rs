//! Manchester carry chain adders. The word is cut into blocks of `block` bits; each block is
//! one subcircuit holding an unbroken pass-transistor chain. Blocks meet either directly (the
//! chain runs on through the boundary) or through a restoring buffer where `buffers` asks.
//!
//! Static style: the chain starts holding ~c (an inverter drives ~cin in); an inverting
//! buffer flips the polarity the next block holds, so blocks come in two forms (`_i` holds
//! ~c, `_t` holds c). Dynamic style: every node is precharged and holds ~c; a buffered
//! boundary is a domino inverter whose output discharges the next block's start node.

use super::{top_module, BlockPorts};
use crate::cells::{CellKind, Library};
use crate::netlist::{Design, DesignBuilder, Master, Module, NetId};
use crate::spec::Spec;
use std::collections::BTreeMap;

/// Bit ranges [lo, hi) of the blocks; the last one is shorter when `block` does not divide
/// the width.
pub fn blocks(width: usize, block: usize) -> Vec<(usize, usize)> {
    (0..width)
        .step_by(block)
        .map(|lo| (lo, (lo + block).min(width)))
        .collect()
}

/// Carry net name: c<k> holds the carry into bit k, c<k>_n its complement.
pub fn carry_name(k: usize, true_carry: bool) -> String {
    if true_carry {
        format!("c{k}")
    } else {
        format!("c{k}_n")
    }
}

pub fn build(spec: &Spec, lib: &Library, dynamic: bool) -> Design {
    let mut d = DesignBuilder::new(&spec.name, lib);
    let keeper = lib.sizes.keeper.is_some() && dynamic;
    let (mut top, t) = top_module(&spec.name, spec.width, dynamic);
    let mut made: BTreeMap<(usize, bool), Master> = BTreeMap::new();
    let w = spec.width;

    let start = if keeper {
        CellKind::DynamicStartKeeper
    } else {
        CellKind::DynamicStart
    };
    let mut carry = top.net(carry_name(0, false));
    let mut true_carry = false;
    if dynamic {
        let m = d.cell(start);
        top.inst("xcin", m, vec![t.clk.unwrap(), t.cin, carry]);
    } else {
        let m = d.cell(CellKind::Inv);
        top.inst("xcin", m, vec![t.cin, carry]);
    }

    for (k, &(lo, hi)) in blocks(w, spec.block).iter().enumerate() {
        let size = hi - lo;
        let master = *made.entry((size, true_carry)).or_insert_with(|| {
            let m = block_module(&mut d, &spec.name, size, true_carry, dynamic, keeper);
            d.add_module(m)
        });
        let co = top.net(carry_name(hi, true_carry));
        top.inst(format!("xblk{k}"), master, t.block_conns(lo, hi, carry, co));
        carry = co;

        if hi < w && spec.buffers.positions.contains(&hi) {
            if dynamic {
                let c = top.net(carry_name(hi, true));
                let inv = d.cell(CellKind::Inv);
                top.inst(format!("xbuf{hi}"), inv, vec![carry, c]);
                let ns = top.net(format!("c{hi}_ns"));
                let st = d.cell(start);
                top.inst(format!("xdis{hi}"), st, vec![t.clk.unwrap(), c, ns]);
                carry = ns;
            } else if spec.buffers.inverting {
                true_carry = !true_carry;
                let c = top.net(carry_name(hi, true_carry));
                let inv = d.cell(CellKind::Inv);
                top.inst(format!("xbuf{hi}"), inv, vec![carry, c]);
                carry = c;
            } else {
                let c = top.net(format!("{}b", carry_name(hi, true_carry)));
                let buf = d.cell(CellKind::Buf);
                top.inst(format!("xbuf{hi}"), buf, vec![carry, c]);
                carry = c;
            }
        }
    }
    let out = d.cell(if true_carry {
        CellKind::Buf
    } else {
        CellKind::Inv
    });
    top.inst("xcout", out, vec![carry, t.cout]);
    d.finish(top, dynamic)
}

/// One block subcircuit: per bit a PG cell, a chain cell and a sum cell.
fn block_module(
    d: &mut DesignBuilder,
    name: &str,
    size: usize,
    true_carry: bool,
    dynamic: bool,
    keeper: bool,
) -> Module {
    let suffix = if dynamic {
        "d"
    } else if true_carry {
        "t"
    } else {
        "i"
    };
    let mut m = Module::new(format!("{name}_blk{size}_{suffix}"));
    let BlockPorts {
        clk,
        a,
        b,
        ci,
        s,
        co,
    } = BlockPorts::new(&mut m, size, dynamic);

    chain_bits(d, &mut m, clk, &a, &b, ci, &s, Some(co), true_carry, keeper);
    m
}

/// The bits of one unbroken chain inside module `m`: per bit a PG cell, a chain cell and a
/// sum cell, from node `ci` on. The last node is `last` if given, else a new net. Returns the
/// last node and the propagate nets. `clk` set means dynamic style.
#[allow(clippy::too_many_arguments)]
pub fn chain_bits(
    d: &mut DesignBuilder,
    m: &mut Module,
    clk: Option<NetId>,
    a: &[NetId],
    b: &[NetId],
    ci: NetId,
    s: &[NetId],
    last: Option<NetId>,
    true_carry: bool,
    keeper: bool,
) -> (NetId, Vec<NetId>) {
    let size = a.len();
    let (pg, chain, sum) = match (clk.is_some(), true_carry) {
        (true, _) => (
            CellKind::Pg,
            if keeper {
                CellKind::ChainDynamicKeeper
            } else {
                CellKind::ChainDynamic
            },
            CellKind::SumInverted,
        ),
        (false, false) => (
            CellKind::PgInverted,
            CellKind::ChainInverted,
            CellKind::SumInverted,
        ),
        (false, true) => (CellKind::PgTrue, CellKind::ChainTrue, CellKind::SumTrue),
    };
    let (pg, chain, sum) = (d.cell(pg), d.cell(chain), d.cell(sum));
    let mut prev = ci;
    let mut props = vec![];
    for j in 0..size {
        let node = match last {
            Some(l) if j + 1 == size => l,
            _ => m.net(carry_name(j + 1, true_carry)),
        };
        let p = m.net(format!("p{j}"));
        if let Some(clk) = clk {
            let g = m.net(format!("g{j}"));
            m.inst(format!("xpg{j}"), pg, vec![a[j], b[j], g, p]);
            m.inst(format!("xmc{j}"), chain, vec![clk, prev, g, p, node]);
        } else {
            let (gx, kx) = if true_carry {
                (m.net(format!("gn{j}")), m.net(format!("k{j}")))
            } else {
                (m.net(format!("g{j}")), m.net(format!("kn{j}")))
            };
            let pn = m.net(format!("pn{j}"));
            m.inst(format!("xpg{j}"), pg, vec![a[j], b[j], gx, kx, p, pn]);
            m.inst(format!("xmc{j}"), chain, vec![prev, gx, kx, p, pn, node]);
        }
        m.inst(format!("xsum{j}"), sum, vec![p, prev, s[j]]);
        props.push(p);
        prev = node;
    }
    (prev, props)
}
