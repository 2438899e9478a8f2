//! Carry-skip (single level): Manchester blocks of `block` bits, each with a block propagate
//! (the AND of its bits' propagates) that lets the block's carry-in bypass the chain.
//!
//! Static: the block's carry-in (true) drives the chain through an inverter, the chain's end
//! is restored by an inverter, and a multiplexer picks the bypass when the block propagates.
//! Dynamic: every block starts from a footed discharge device driven by its (domino) carry-in,
//! the chain's end passes a domino inverter, and the bypass is an AO21, cout = c_ripple +
//! BP·c_in, which equals the multiplexer (BP implies c_ripple = c_in) and stays monotonic.

use super::manchester::{chain_bits, taper_levels, Taps};
use super::{top_module, BlockPorts};
use crate::cells::{CellKind, Library};
use crate::netlist::{Design, DesignBuilder, Master, Module, NetId};
use crate::spec::Spec;
use std::collections::BTreeMap;

/// AND of all nets through a balanced tree of two-input ANDs; returns the output net.
/// Input k sits in bit column k; each AND sits in the higher column of its pair.
pub fn and_tree(d: &mut DesignBuilder, m: &mut Module, nets: &[NetId], prefix: &str) -> NetId {
    let and2 = d.cell(CellKind::And2);
    let mut level: Vec<(NetId, usize)> = nets.iter().copied().zip(0..).collect();
    let mut n = 0;
    while level.len() > 1 {
        let mut next = vec![];
        for pair in level.chunks(2) {
            if pair.len() == 2 {
                let y = m.net(format!("{prefix}{n}"));
                let col = pair[1].1;
                m.inst_at(
                    col,
                    format!("x{prefix}{n}"),
                    and2,
                    vec![pair[0].0, pair[1].0, y],
                );
                n += 1;
                next.push((y, col));
            } else {
                next.push(pair[0]);
            }
        }
        level = next;
    }
    level[0].0
}

fn skip_block(
    d: &mut DesignBuilder,
    name: &str,
    size: usize,
    dynamic: bool,
    keeper: bool,
    taper: f64,
) -> Module {
    let mut m = Module::new(format!(
        "{name}_skip{size}_{}",
        if dynamic { "d" } else { "s" }
    ));
    let BlockPorts {
        clk,
        a,
        b,
        ci,
        s,
        co,
    } = BlockPorts::new(&mut m, size, dynamic);
    let start = m.net("c0_n");
    // With keepers: the first sum cell's complement of the start node gates the start's
    // keeper; the end inverter's output (cr) gates the last node's.
    let ripple = m.net("cr");
    let taps = (clk.is_some() && keeper).then(|| Taps {
        first: m.net("c0_n_r"),
        last: ripple,
    });
    if let Some(clk) = clk {
        let st = d.cell(if keeper {
            CellKind::DynamicStartKeeper
        } else {
            CellKind::DynamicStart
        });
        let mut conns = vec![clk, ci];
        conns.extend(taps.map(|t| t.first));
        conns.push(start);
        m.inst_at(0, "xstart", st, conns);
    } else {
        let inv = d.cell(CellKind::Inv);
        m.inst_at(0, "xstart", inv, vec![ci, start]);
    }
    // The block's chain is one segment, tapered from its start.
    let levels = taper_levels(size, taper);
    let (end, props) = chain_bits(
        d, &mut m, clk, &a, &b, start, &s, None, false, taps, &levels,
    );
    let inv = d.cell(CellKind::Inv);
    m.inst_at(size - 1, "xend", inv, vec![end, ripple]);
    let bp = if props.len() == 1 {
        props[0]
    } else {
        and_tree(d, &mut m, &props, "bp")
    };
    if dynamic {
        let grey = d.cell(CellKind::Grey);
        m.inst_at(size - 1, "xskip", grey, vec![ripple, bp, ci, co]);
    } else {
        let mux = d.cell(CellKind::Mux2);
        m.inst_at(size - 1, "xskip", mux, vec![ripple, ci, bp, co]);
    }
    m
}

pub fn build(spec: &Spec, lib: &Library, dynamic: bool) -> Design {
    let mut d = DesignBuilder::new(&spec.name, lib);
    let keeper = dynamic && lib.sizes.keeper.is_some();
    let (mut top, t) = top_module(&spec.name, spec.width, dynamic);
    let mut made: BTreeMap<usize, Master> = BTreeMap::new();
    // Dynamic: the carry-in enters as a domino signal (low in precharge) so the bypass stays
    // monotonic.
    let mut carry = if let Some(clk) = t.clk {
        let st = d.cell(if keeper {
            CellKind::DynamicStartKeeper
        } else {
            CellKind::DynamicStart
        });
        let n = top.net("c0_n");
        let c0 = top.net("c0");
        // With a keeper, the inverter's output c0 gates it.
        let mut conns = vec![clk, t.cin];
        if keeper {
            conns.push(c0);
        }
        conns.push(n);
        top.inst_at(0, "xcin", st, conns);
        let inv = d.cell(CellKind::Inv);
        top.inst_at(0, "xcin_inv", inv, vec![n, c0]);
        c0
    } else {
        t.cin
    };
    let blocks = spec.block_ranges();
    for (k, &(lo, hi)) in blocks.iter().enumerate() {
        let size = hi - lo;
        let master = *made.entry(size).or_insert_with(|| {
            let m = skip_block(&mut d, &spec.name, size, dynamic, keeper, spec.sizing.taper);
            d.add_module(m)
        });
        let co = if hi == spec.width {
            t.cout
        } else {
            top.net(format!("c{hi}"))
        };
        top.inst_at(
            lo,
            format!("xblk{k}"),
            master,
            t.block_conns(lo, hi, carry, co),
        );
        carry = co;
    }
    d.finish(top, dynamic)
}
