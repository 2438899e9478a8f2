//! Manchester carry chain cells in static complementary and dynamic (precharge/evaluate) form,
//! their propagate/generate/kill cells, and the sum cells that read a chain node.
//!
//! Static chain cell (common practice): four transistors a bit, a generate device, a kill
//! device and a propagate transmission gate. Which of generate/kill pulls down depends on the
//! polarity the node holds. Dynamic chain cell (Rabaey et al., Digital Integrated Circuits,
//! 2nd ed., ch. 11; Weste & Harris §11.2; from memory): clocked precharge PMOS, generate NMOS
//! over a clocked evaluate footer, propagate pass NMOS, optional keeper.

use super::expr::*;
use super::{pins, Cell, CellKind, Dir::*, Expr, Role, Schematic, Sizes};

/// Propagate/generate/kill for a chain that holds the inverted carry: outputs g (pull the
/// node down), kn = ~kill (its low pulls the node up), p and pn (transmission gate controls).
pub fn pg_inverted(s: &Sizes) -> Cell {
    let mut sch = Schematic::new(s);
    sch.nand2("gn", "a", "b", "gn");
    sch.inv("g", "gn", "g", 1.0);
    sch.nor2("k", "a", "b", "k");
    sch.inv("kn", "k", "kn", 1.0);
    sch.nand2("pn", "kn", "gn", "pn");
    sch.inv("p", "pn", "p", 1.0);
    let (a, b) = (v(0), v(1));
    Cell {
        kind: CellKind::PgInverted,
        base: "pg_i",
        summary: "propagate/generate/kill, inverted-carry chain",
        pins: pins(&[
            ("a", In, false),
            ("b", In, false),
            ("g", Out, false),
            ("kn", Out, false),
            ("p", Out, false),
            ("pn", Out, false),
        ]),
        logic: vec![
            (2, and(vec![a.clone(), b.clone()])),
            (3, or(vec![a.clone(), b.clone()])),
            (4, xor(vec![a.clone(), b.clone()])),
            (5, not(xor(vec![a, b]))),
        ],
        devices: sch.devices,
        care: None,
        clock: None,
        stages: 4,
    }
}

/// Propagate/generate/kill for a chain that holds the true carry: outputs gn = ~generate
/// (its low pulls the node up), k (pulls the node down), p and pn.
pub fn pg_true(s: &Sizes) -> Cell {
    let mut sch = Schematic::new(s);
    sch.nand2("gn", "a", "b", "gn");
    sch.nor2("k", "a", "b", "k");
    sch.inv("kn", "k", "kn", 1.0);
    sch.nand2("pn", "kn", "gn", "pn");
    sch.inv("p", "pn", "p", 1.0);
    let (a, b) = (v(0), v(1));
    Cell {
        kind: CellKind::PgTrue,
        base: "pg_t",
        summary: "propagate/generate/kill, true-carry chain",
        pins: pins(&[
            ("a", In, false),
            ("b", In, false),
            ("gn", Out, false),
            ("k", Out, false),
            ("p", Out, false),
            ("pn", Out, false),
        ]),
        logic: vec![
            (2, not(and(vec![a.clone(), b.clone()]))),
            (3, not(or(vec![a.clone(), b.clone()]))),
            (4, xor(vec![a.clone(), b.clone()])),
            (5, not(xor(vec![a, b]))),
        ],
        devices: sch.devices,
        care: None,
        clock: None,
        stages: 4,
    }
}

/// Generate and propagate: g = a·b, p = ~(kill + g) = a ⊕ b. Feeds dynamic chains and
/// prefix networks.
pub fn pg(s: &Sizes) -> Cell {
    let mut sch = Schematic::new(s);
    sch.nand2("gn", "a", "b", "gn");
    sch.inv("g", "gn", "g", 1.0);
    sch.nor2("k", "a", "b", "k");
    sch.nor2("p", "k", "g", "p");
    let (a, b) = (v(0), v(1));
    Cell {
        kind: CellKind::Pg,
        base: "pg",
        summary: "generate/propagate",
        pins: pins(&[
            ("a", In, false),
            ("b", In, false),
            ("g", Out, false),
            ("p", Out, false),
        ]),
        logic: vec![(2, and(vec![a.clone(), b.clone()])), (3, xor(vec![a, b]))],
        devices: sch.devices,
        care: None,
        clock: None,
        stages: 3,
    }
}

/// Exactly one of generate, propagate, kill, as a PG cell produces them from (a, b).
fn legal_static(g_on: Expr, k_on: Expr, p: Expr, pn: Expr) -> Expr {
    and(vec![
        xor(vec![p.clone(), pn]),
        or(vec![
            and(vec![g_on.clone(), not(k_on.clone()), not(p.clone())]),
            and(vec![not(g_on.clone()), k_on.clone(), not(p.clone())]),
            and(vec![not(g_on), not(k_on), p]),
        ]),
    ])
}

/// Static Manchester carry cell. `true_carry`: the node holds c (generate pulls up through a
/// PMOS gated by gn, kill pulls down); otherwise the node holds ~c (generate pulls down, kill
/// pulls up through a PMOS gated by kn). The transmission gate passes the previous node.
pub fn chain_static(s: &Sizes, true_carry: bool) -> Cell {
    let mut sch = Schematic::new(s);
    let (g_pin, k_pin) = if true_carry { ("gn", "k") } else { ("g", "kn") };
    if true_carry {
        sch.p("g", "co", "gn", "vdd", 1.0, Role::Logic);
        sch.n("k", "co", "k", "vss", 1.0, Role::Logic);
    } else {
        sch.n("g", "co", "g", "vss", 1.0, Role::Logic);
        sch.p("k", "co", "kn", "vdd", 1.0, Role::Logic);
    }
    sch.tg("p", "ci", "co", "p", "pn", 1.0);
    let (ci, gx, kx, p, pn) = (v(0), v(1), v(2), v(3), v(4));
    // Where the gate passes (either device on) the node follows ci; otherwise the
    // generate/kill device sets it. Both forms reduce to ~(gx·kx) on their legal inputs.
    let logic = mux(
        or(vec![p.clone(), not(pn.clone())]),
        ci,
        not(and(vec![gx.clone(), kx.clone()])),
    );
    let care = if true_carry {
        legal_static(not(gx), kx, p, pn)
    } else {
        legal_static(gx, not(kx), p, pn)
    };
    Cell {
        kind: if true_carry {
            CellKind::ChainTrue
        } else {
            CellKind::ChainInverted
        },
        base: if true_carry { "mcc_t" } else { "mcc_i" },
        summary: if true_carry {
            "static Manchester carry cell, node holds c"
        } else {
            "static Manchester carry cell, node holds ~c"
        },
        pins: pins(&[
            ("ci", In, true),
            (g_pin, In, false),
            (k_pin, In, false),
            ("p", In, false),
            ("pn", In, false),
            ("co", Out, true),
        ]),
        logic: vec![(5, logic)],
        devices: sch.devices,
        care: Some(care),
        clock: None,
        stages: 1,
    }
}

fn precharge_and_keeper(sch: &mut Schematic, node: &str, keeper: bool) {
    sch.p("pre", node, "clk", "vdd", 0.5, Role::Precharge);
    sch.n("f", "f", "clk", "vss", 2.0, Role::Footer);
    if keeper {
        sch.inv("kb", node, "kb", 1.0);
        sch.keeper("keep", node, "kb");
    }
}

/// Dynamic Manchester carry cell: the node holds ~c, precharged high while clk is low; in
/// evaluate a generate discharges it through the footer, a propagate passes the previous node.
pub fn chain_dynamic(s: &Sizes, keeper: bool) -> Cell {
    let mut sch = Schematic::new(s);
    precharge_and_keeper(&mut sch, "co", keeper);
    sch.n("g", "co", "g", "f", 2.0, Role::Logic);
    sch.n("p", "ci", "p", "co", 2.0, Role::Pass);
    let (clk, ci, g, p) = (v(0), v(1), v(2), v(3));
    let eval = not(or(vec![g.clone(), and(vec![p.clone(), not(ci)])]));
    Cell {
        kind: if keeper {
            CellKind::ChainDynamicKeeper
        } else {
            CellKind::ChainDynamic
        },
        base: if keeper { "mcc_dk" } else { "mcc_d" },
        summary: if keeper {
            "dynamic Manchester carry cell with keeper"
        } else {
            "dynamic Manchester carry cell"
        },
        pins: pins(&[
            ("clk", In, false),
            ("ci", In, true),
            ("g", In, false),
            ("p", In, false),
            ("co", Out, true),
        ]),
        logic: vec![(4, mux(clk, eval, Expr::Const(true)))],
        devices: sch.devices,
        care: Some(not(and(vec![g, p]))),
        clock: Some(0),
        stages: 1,
    }
}

/// Start of a dynamic chain: a precharged node discharged (footed) when x is high. Takes the
/// carry-in, or the domino inverter's output at a buffered block boundary.
pub fn dynamic_start(s: &Sizes, keeper: bool) -> Cell {
    let mut sch = Schematic::new(s);
    precharge_and_keeper(&mut sch, "co", keeper);
    sch.n("x", "co", "x", "f", 2.0, Role::Logic);
    let (clk, x) = (v(0), v(1));
    Cell {
        kind: if keeper {
            CellKind::DynamicStartKeeper
        } else {
            CellKind::DynamicStart
        },
        base: if keeper { "dstart_k" } else { "dstart" },
        summary: if keeper {
            "dynamic chain start with keeper"
        } else {
            "dynamic chain start"
        },
        pins: pins(&[("clk", In, false), ("x", In, false), ("co", Out, true)]),
        logic: vec![(2, mux(clk, not(x), Expr::Const(true)))],
        devices: sch.devices,
        care: None,
        clock: Some(0),
        stages: 1,
    }
}

/// Sum s = p ⊕ c from a chain node. The node sees one inverter gate only; two transmission
/// gates steered by p pick the restored carry or its complement, and an output inverter drives
/// the load. `true_carry`: the node holds c; otherwise ~c.
pub fn sum(s: &Sizes, true_carry: bool) -> Cell {
    let mut sch = Schematic::new(s);
    sch.inv("x", "ci", "x", 1.0);
    sch.inv("y", "x", "y", 1.0);
    sch.inv("q", "p", "q", 1.0);
    // sn = ~s = p ? c : ~c. With a true node c = y; with an inverted node c = x.
    let (when_p, when_q) = if true_carry { ("y", "x") } else { ("x", "y") };
    sch.tg("a", when_p, "sn", "p", "q", 1.0);
    sch.tg("b", when_q, "sn", "q", "p", 1.0);
    sch.inv("s", "sn", "s", 1.0);
    let (p, ci) = (v(0), v(1));
    let f = if true_carry {
        xor(vec![p, ci])
    } else {
        not(xor(vec![p, ci]))
    };
    Cell {
        kind: if true_carry {
            CellKind::SumTrue
        } else {
            CellKind::SumInverted
        },
        base: if true_carry { "sum_t" } else { "sum_i" },
        summary: if true_carry {
            "sum from a node holding c"
        } else {
            "sum from a node holding ~c"
        },
        pins: pins(&[("p", In, false), ("ci", In, false), ("s", Out, false)]),
        logic: vec![(2, f)],
        devices: sch.devices,
        care: None,
        clock: None,
        stages: 4,
    }
}
