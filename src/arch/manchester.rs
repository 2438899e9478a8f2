//! Manchester carry chain adders. The word is cut into blocks of `block` bits; each block is
//! one subcircuit holding an unbroken pass-transistor chain. Blocks meet either directly (the
//! chain runs on through the boundary) or through a restoring buffer where `buffers` asks.
//!
//! Static style: the chain starts holding ~c (an inverter drives ~cin in); an inverting
//! buffer flips the polarity the next block holds, so blocks come in two forms (`_i` holds
//! ~c, `_t` holds c). Dynamic style: every node is precharged and holds ~c; a buffered
//! boundary is a domino inverter whose output discharges the next block's start node.

use super::{top_module, BlockPorts};
use crate::cells::Dir;
use crate::cells::{CellKind, ChainForm, Library, TAPER_DRIVES};
use crate::netlist::{Design, DesignBuilder, Master, Module, NetId};
use crate::spec::{Architecture, Spec};
use std::collections::BTreeMap;

/// Bit ranges [lo, hi) of the blocks; the last one is shorter when `block` does not divide
/// the width.
pub fn blocks(width: usize, block: usize) -> Vec<(usize, usize)> {
    (0..width)
        .step_by(block)
        .map(|lo| (lo, (lo + block).min(width)))
        .collect()
}

/// Carry net name: `c<k>` holds the carry into bit k, `c<k>_n` its complement.
pub fn carry_name(k: usize, true_carry: bool) -> String {
    if true_carry {
        format!("c{k}")
    } else {
        format!("c{k}_n")
    }
}

/// Drive levels (indices into [`TAPER_DRIVES`]) of the chain cells of one segment of `n`
/// cells whose first cell is `taper` times as strong as its last: position j wants
/// taper^((n-1-j)/(n-1)) (progressive sizing: a geometric taper, the head carrying the charge
/// of every node after it), rounded to the nearest level on a log scale. `taper` 1: all 0.
pub fn taper_levels(n: usize, taper: f64) -> Vec<u8> {
    (0..n)
        .map(|j| {
            if n < 2 || taper <= 1.0 {
                return 0;
            }
            let want = taper.ln() * (n - 1 - j) as f64 / (n - 1) as f64;
            (0..TAPER_DRIVES.len())
                .min_by(|&x, &y| {
                    let dx = (TAPER_DRIVES[x].ln() - want).abs();
                    let dy = (TAPER_DRIVES[y].ln() - want).abs();
                    dx.total_cmp(&dy)
                })
                .unwrap_or(0) as u8
        })
        .collect()
}

/// The unbroken chain segments [lo, hi) that `sizing.taper` tapers: from bit 0 or a buffered
/// boundary to the next (manchester), or each block (carry-skip); none for other
/// architectures.
pub fn chain_segments(spec: &Spec) -> Vec<(usize, usize)> {
    match spec.architecture {
        Architecture::Manchester => {
            let mut cuts = vec![0];
            cuts.extend(spec.buffers.positions.iter().copied());
            cuts.push(spec.width);
            cuts.windows(2).map(|c| (c[0], c[1])).collect()
        }
        Architecture::CarrySkip => spec.block_ranges(),
        _ => vec![],
    }
}

/// The drive level of every bit's chain cell, each segment of [`chain_segments`] tapered by
/// `sizing.taper`.
fn bit_levels(spec: &Spec) -> Vec<u8> {
    chain_segments(spec)
        .iter()
        .flat_map(|&(lo, hi)| taper_levels(hi - lo, spec.sizing.taper))
        .collect()
}

pub fn build(spec: &Spec, lib: &Library, dynamic: bool) -> Design {
    let mut d = DesignBuilder::new(&spec.name, lib);
    let keeper = lib.sizes.keeper.is_some() && dynamic;
    let (mut top, t) = top_module(&spec.name, spec.width, dynamic);
    let mut made: BTreeMap<(usize, bool, Vec<u8>), Master> = BTreeMap::new();
    let w = spec.width;
    let levels = bit_levels(spec);

    let start = if keeper {
        CellKind::DynamicStartKeeper
    } else {
        CellKind::DynamicStart
    };
    let mut carry = top.net(carry_name(0, false));
    let mut true_carry = false;
    // With keepers: the complement of the node the next block starts from, as that block's
    // first sum cell makes it (it gates the keeper of whoever drives the node).
    let mut carry_r = keeper.then(|| top.net(format!("{}_r", carry_name(0, false))));
    if dynamic {
        let m = d.cell(start);
        let mut conns = vec![t.clk.unwrap(), t.cin];
        conns.extend(carry_r);
        conns.push(carry);
        top.inst_at(0, "xcin", m, conns);
    } else {
        let m = d.cell(CellKind::Inv);
        top.inst_at(0, "xcin", m, vec![t.cin, carry]);
    }

    for (k, &(lo, hi)) in blocks(w, spec.block).iter().enumerate() {
        let size = hi - lo;
        let lv = levels[lo..hi].to_vec();
        let master = *made
            .entry((size, true_carry, lv.clone()))
            .or_insert_with(|| {
                let m = block_module(&mut d, &spec.name, size, true_carry, dynamic, keeper, &lv);
                d.add_module(m)
            });
        let co = top.net(carry_name(hi, true_carry));
        let buffered = hi < w && spec.buffers.positions.contains(&hi);
        // Dynamic with keepers: the complement of co made by co's reader (the domino inverter,
        // the next block's first sum cell, or the cout inverter).
        let restored = (dynamic && buffered).then(|| top.net(carry_name(hi, true)));
        let next_r = (keeper && hi < w).then(|| {
            let ci_name = if buffered {
                format!("c{hi}_ns")
            } else {
                carry_name(hi, false)
            };
            top.net(format!("{ci_name}_r"))
        });
        let mut conns = t.block_conns(lo, hi, carry, co);
        if let Some(r) = carry_r {
            let co_r = match (restored, next_r) {
                (Some(c), _) => c,
                (None, Some(n)) => n,
                (None, None) => t.cout,
            };
            conns.push(co_r);
            conns.push(r);
        }
        top.inst_at(lo, format!("xblk{k}"), master, conns);
        carry = co;

        if buffered {
            if dynamic {
                let c = restored.expect("made above");
                let inv = d.cell(CellKind::Inv);
                top.inst_at(hi - 1, format!("xbuf{hi}"), inv, vec![carry, c]);
                let ns = top.net(format!("c{hi}_ns"));
                let st = d.cell(start);
                let mut conns = vec![t.clk.unwrap(), c];
                conns.extend(next_r);
                conns.push(ns);
                top.inst_at(hi, format!("xdis{hi}"), st, conns);
                carry = ns;
            } else if spec.buffers.inverting {
                true_carry = !true_carry;
                let c = top.net(carry_name(hi, true_carry));
                let inv = d.cell(CellKind::Inv);
                top.inst_at(hi - 1, format!("xbuf{hi}"), inv, vec![carry, c]);
                carry = c;
            } else {
                let c = top.net(format!("{}b", carry_name(hi, true_carry)));
                let buf = d.cell(CellKind::Buf);
                top.inst_at(hi - 1, format!("xbuf{hi}"), buf, vec![carry, c]);
                carry = c;
            }
        }
        carry_r = next_r;
    }
    let out = d.cell(if true_carry {
        CellKind::Buf
    } else {
        CellKind::Inv
    });
    top.inst_at(w - 1, "xcout", out, vec![carry, t.cout]);
    d.finish(top, dynamic)
}

/// One block subcircuit: per bit a PG cell, a chain cell and a sum cell. `levels`: each
/// chain cell's drive level (a tapered block's name ends in them, `_x4321`).
fn block_module(
    d: &mut DesignBuilder,
    name: &str,
    size: usize,
    true_carry: bool,
    dynamic: bool,
    keeper: bool,
    levels: &[u8],
) -> Module {
    let suffix = if dynamic {
        "d"
    } else if true_carry {
        "t"
    } else {
        "i"
    };
    let tapered = if levels.iter().any(|&l| l > 0) {
        let l: String = levels.iter().map(|l| l.to_string()).collect();
        format!("_x{l}")
    } else {
        String::new()
    };
    let mut m = Module::new(format!("{name}_blk{size}_{suffix}{tapered}"));
    let BlockPorts {
        clk,
        a,
        b,
        ci,
        s,
        co,
    } = BlockPorts::new(&mut m, size, dynamic);
    // With keepers: co_r (in) is co's complement as its reader outside makes it, ci_r (out)
    // is ci's complement as this block's first sum cell makes it.
    let taps = keeper.then(|| {
        let last = m.port("co_r", Dir::In);
        let first = m.port("ci_r", Dir::Out);
        Taps { first, last }
    });
    chain_bits(
        d,
        &mut m,
        clk,
        &a,
        &b,
        ci,
        &s,
        Some(co),
        true_carry,
        taps,
        levels,
    );
    m
}

/// Keeper gates of a dynamic chain with keepers: `first` is the complement of the chain's
/// first node `ci` (the first sum cell makes it, for whoever drives `ci`), `last` the
/// complement of its last node (made by that node's reader outside the chain).
#[derive(Debug, Clone, Copy)]
pub struct Taps {
    pub first: NetId,
    pub last: NetId,
}

/// The bits of one unbroken chain inside module `m`: per bit a PG cell, a chain cell and a
/// sum cell, from node `ci` on. The last node is `last` if given, else a new net. Returns the
/// last node and the propagate nets. `clk` set means dynamic style; `taps` set means keepers,
/// each gated by the complement its node's sum cell makes (net `<node>_r`). `levels`: each
/// bit's chain cell drive level ([`taper_levels`]).
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
    taps: Option<Taps>,
    levels: &[u8],
) -> (NetId, Vec<NetId>) {
    let size = a.len();
    let (pg, form, sum) = match (clk.is_some(), true_carry) {
        (true, _) => (
            CellKind::Pg,
            if taps.is_some() {
                ChainForm::DynamicKeeper
            } else {
                ChainForm::Dynamic
            },
            if taps.is_some() {
                CellKind::SumInvertedTap
            } else {
                CellKind::SumInverted
            },
        ),
        (false, false) => (
            CellKind::PgInverted,
            ChainForm::Inverted,
            CellKind::SumInverted,
        ),
        (false, true) => (CellKind::PgTrue, ChainForm::True, CellKind::SumTrue),
    };
    let (pg, sum) = (d.cell(pg), d.cell(sum));
    let mut prev = ci;
    let mut props = vec![];
    // The complement of the node each sum cell reads (`prev`), when there are keepers.
    let mut tap = taps.map(|t| t.first);
    for j in 0..size {
        let chain = d.cell(form.at(levels[j]));
        let node = match last {
            Some(l) if j + 1 == size => l,
            _ => m.net(carry_name(j + 1, true_carry)),
        };
        let p = m.net(format!("p{j}"));
        let next_tap = taps.map(|t| {
            if j + 1 == size {
                t.last
            } else {
                m.net(format!("{}_r", carry_name(j + 1, true_carry)))
            }
        });
        if let Some(clk) = clk {
            let g = m.net(format!("g{j}"));
            m.inst_at(j, format!("xpg{j}"), pg, vec![a[j], b[j], g, p]);
            let mut conns = vec![clk, prev, g, p];
            conns.extend(next_tap);
            conns.push(node);
            m.inst_at(j, format!("xmc{j}"), chain, conns);
        } else {
            let (gx, kx) = if true_carry {
                (m.net(format!("gn{j}")), m.net(format!("k{j}")))
            } else {
                (m.net(format!("g{j}")), m.net(format!("kn{j}")))
            };
            let pn = m.net(format!("pn{j}"));
            m.inst_at(j, format!("xpg{j}"), pg, vec![a[j], b[j], gx, kx, p, pn]);
            m.inst_at(j, format!("xmc{j}"), chain, vec![prev, gx, kx, p, pn, node]);
        }
        let mut conns = vec![p, prev, s[j]];
        conns.extend(tap);
        m.inst_at(j, format!("xsum{j}"), sum, conns);
        props.push(p);
        prev = node;
        tap = next_tap;
    }
    (prev, props)
}
