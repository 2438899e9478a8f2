//! Manchester carry chain cells in static complementary and dynamic (precharge/evaluate) form,
//! their propagate/generate/kill cells, and the sum cells that read a chain node.
//!
//! Static chain cell (common practice): four transistors a bit, a generate device, a kill
//! device and a propagate transmission gate. Which of generate/kill pulls down depends on the
//! polarity the node holds. Dynamic chain cell (Rabaey et al., Digital Integrated Circuits,
//! 2nd ed., ch. 11; Weste & Harris §11.2; from memory): clocked precharge PMOS, generate NMOS
//! over a clocked evaluate footer, propagate pass NMOS, optional keeper. The keeper is a weak
//! PMOS from the node to VDD whose gate is the node's complement as its reader already makes
//! it (the first inverter of the sum cell, the domino inverter at a block boundary, the cout
//! inverter): the node carries no feedback inverter of its own (pin `kb`).

use super::expr::*;
use super::{
    pins, taper_base, Cell, CellKind, ChainForm, Dir::*, Expr, Role, Schematic, Sizes, TAPER_DRIVES,
};

/// The transmission gate's controls no later than a chain cell's generate and kill controls
/// (two gate delays from a and b): transmission-gate XOR and XNOR (common practice; Weste &
/// Harris, from memory), p = a ? ~b : b and pn = a ? b : ~b, steered by a and its inverse,
/// passing b and its inverse, about one and a half gate delays from a and b. Derived from g
/// and k instead (pn = nand(~k, ~g), p = ~pn), p would come two stages after them and the
/// gate would still pass while generate or kill already drives the node: a fight and a
/// glitch at every change.
fn balanced_p(sch: &mut Schematic) {
    sch.inv("an", "a", "an", 1.0);
    sch.inv("bn", "b", "bn", 1.0);
    sch.tg("p1", "bn", "p", "a", "an", 1.0);
    sch.tg("p0", "b", "p", "an", "a", 1.0);
    sch.tg("q1", "b", "pn", "a", "an", 1.0);
    sch.tg("q0", "bn", "pn", "an", "a", 1.0);
}

/// Propagate/generate/kill for a chain that holds the inverted carry: outputs g (pull the
/// node down), kn = ~kill (its low pulls the node up), p and pn (transmission gate controls),
/// all four two gate delays from a and b.
pub fn pg_inverted(s: &Sizes) -> Cell {
    let mut sch = Schematic::new(s);
    sch.nand2("gn", "a", "b", "gn");
    sch.inv("g", "gn", "g", 1.0);
    sch.nor2("k", "a", "b", "k");
    sch.inv("kn", "k", "kn", 1.0);
    balanced_p(&mut sch);
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
        stages: 2,
    }
}

/// Propagate/generate/kill for a chain that holds the true carry: outputs gn = ~generate
/// (its low pulls the node up), k (pulls the node down), p and pn. gn and k are one gate
/// from a and b, p and pn two (one single gate cannot make a ⊕ b from a and b alone).
pub fn pg_true(s: &Sizes) -> Cell {
    let mut sch = Schematic::new(s);
    sch.nand2("gn", "a", "b", "gn");
    sch.nor2("k", "a", "b", "k");
    balanced_p(&mut sch);
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
        stages: 2,
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
/// `level`: the drive of a tapered segment's cell ([`TAPER_DRIVES`]; 0 plain).
pub fn chain_static(s: &Sizes, true_carry: bool, level: u8) -> Cell {
    let mut sch = Schematic::new(s);
    let x = TAPER_DRIVES[level as usize];
    let (g_pin, k_pin) = if true_carry { ("gn", "k") } else { ("g", "kn") };
    if true_carry {
        sch.p("g", "co", "gn", "vdd", s.generate * x, Role::Logic);
        sch.n("k", "co", "k", "vss", s.generate * x, Role::Logic);
    } else {
        sch.n("g", "co", "g", "vss", s.generate * x, Role::Logic);
        sch.p("k", "co", "kn", "vdd", s.generate * x, Role::Logic);
    }
    sch.tg("p", "ci", "co", "p", "pn", s.pass * x);
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
    let form = if true_carry {
        ChainForm::True
    } else {
        ChainForm::Inverted
    };
    Cell {
        kind: form.at(level),
        base: match (level, true_carry) {
            (0, true) => "mcc_t",
            (0, false) => "mcc_i",
            _ => taper_base(form, level),
        },
        summary: match (level, true_carry) {
            (0, true) => "static Manchester carry cell, node holds c",
            (0, false) => "static Manchester carry cell, node holds ~c",
            (_, true) => "static Manchester carry cell of a tapered chain, node holds c",
            (_, false) => "static Manchester carry cell of a tapered chain, node holds ~c",
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

/// Widths (in units) of the high-skew inverter that reads a dynamic node.
pub const SKEW_N: f64 = 0.5;
pub const SKEW_P: f64 = 1.5;

/// Width (units) of a chain's pass device and generate device.
pub const PASS: f64 = 2.0;
/// Width (units) of each device of a chain start's footed pull-down: the start drives the whole
/// segment, so its two-device stack is sized by its depth (2 × PASS) to be no weaker than one
/// pass device (series stacks sized by depth: common practice).
pub const START: f64 = 2.0 * PASS;

fn precharge_and_keeper(sch: &mut Schematic, node: &str, keeper: bool, footer: f64) {
    let pre = 0.5 * sch.sizes.precharge;
    sch.p("pre", node, "clk", "vdd", pre, Role::Precharge);
    sch.n("f", "f", "clk", "vss", footer, Role::Footer);
    if keeper {
        // Gate `kb`: the node's complement, made by the node's reader.
        sch.keeper("keep", node, "kb");
    }
}

/// Dynamic Manchester carry cell: the node holds ~c, precharged high while clk is low; in
/// evaluate a generate discharges it through the footer, a propagate passes the previous node.
/// `level`: the drive of a tapered segment's cell ([`TAPER_DRIVES`]; 0 plain): pass, generate
/// and footer widen, precharge and keeper stay.
pub fn chain_dynamic(s: &Sizes, keeper: bool, level: u8) -> Cell {
    let mut sch = Schematic::new(s);
    let x = TAPER_DRIVES[level as usize];
    precharge_and_keeper(&mut sch, "co", keeper, PASS * s.generate * x);
    sch.n("g", "co", "g", "f", PASS * s.generate * x, Role::Logic);
    sch.n("p", "ci", "p", "co", PASS * s.pass * x, Role::Pass);
    let (clk, ci, g, p) = (v(0), v(1), v(2), v(3));
    let eval = not(or(vec![g.clone(), and(vec![p.clone(), not(ci)])]));
    let mut list = vec![
        ("clk", In, false),
        ("ci", In, true),
        ("g", In, false),
        ("p", In, false),
    ];
    if keeper {
        list.push(("kb", In, false));
    }
    list.push(("co", Out, true));
    let co = list.len() - 1;
    let form = if keeper {
        ChainForm::DynamicKeeper
    } else {
        ChainForm::Dynamic
    };
    Cell {
        kind: form.at(level),
        base: match (level, keeper) {
            (0, true) => "mcc_dk",
            (0, false) => "mcc_d",
            _ => taper_base(form, level),
        },
        summary: match (level, keeper) {
            (0, true) => "dynamic Manchester carry cell with keeper",
            (0, false) => "dynamic Manchester carry cell",
            (_, true) => "dynamic Manchester carry cell of a tapered chain, with keeper",
            (_, false) => "dynamic Manchester carry cell of a tapered chain",
        },
        pins: pins(&list),
        logic: vec![(co, mux(clk, eval, Expr::Const(true)))],
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
    precharge_and_keeper(&mut sch, "co", keeper, START * s.pass);
    sch.n("x", "co", "x", "f", START * s.pass, Role::Logic);
    let (clk, x) = (v(0), v(1));
    let mut list = vec![("clk", In, false), ("x", In, false)];
    if keeper {
        list.push(("kb", In, false));
    }
    list.push(("co", Out, true));
    let co = list.len() - 1;
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
        pins: pins(&list),
        logic: vec![(co, mux(clk, not(x), Expr::Const(true)))],
        devices: sch.devices,
        care: None,
        clock: Some(0),
        stages: 1,
    }
}

/// Sum s = p ⊕ c from a chain node. The node sees one inverter gate only; two transmission
/// gates steered by p pick the restored carry or its complement, and an output inverter drives
/// the load. `true_carry`: the node holds c; otherwise ~c. `tap`: the first inverter's output
/// (the node's complement) is also a pin, `x`, to drive the node's keeper.
pub fn sum(s: &Sizes, true_carry: bool, tap: bool) -> Cell {
    let mut sch = Schematic::new(s);
    if tap {
        // High-skew (common practice after a dynamic node): a wide PMOS and a narrow NMOS
        // move the switching point up, so x rises, and the keeper lets go, early in the
        // node's fall.
        sch.n("x", "x", "ci", "vss", SKEW_N, Role::Logic);
        sch.p("x", "x", "ci", "vdd", SKEW_P, Role::Logic);
    } else {
        sch.inv("x", "ci", "x", 1.0);
    }
    sch.inv("y", "x", "y", 1.0);
    sch.inv("q", "p", "q", 1.0);
    // sn = ~s = p ? c : ~c. With a true node c = y; with an inverted node c = x.
    let (when_p, when_q) = if true_carry { ("y", "x") } else { ("x", "y") };
    sch.tg("a", when_p, "sn", "p", "q", 1.0);
    sch.tg("b", when_q, "sn", "q", "p", 1.0);
    sch.inv("s", "sn", "s", s.output);
    let (p, ci) = (v(0), v(1));
    let f = if true_carry {
        xor(vec![p, ci.clone()])
    } else {
        not(xor(vec![p, ci.clone()]))
    };
    let mut list = vec![("p", In, false), ("ci", In, false), ("s", Out, false)];
    let mut logic = vec![(2, f)];
    if tap {
        list.push(("x", Out, false));
        logic.push((3, not(ci)));
    }
    Cell {
        kind: match (true_carry, tap) {
            (true, _) => CellKind::SumTrue,
            (false, false) => CellKind::SumInverted,
            (false, true) => CellKind::SumInvertedTap,
        },
        base: match (true_carry, tap) {
            (true, _) => "sum_t",
            (false, false) => "sum_i",
            (false, true) => "sum_ik",
        },
        summary: match (true_carry, tap) {
            (true, _) => "sum from a node holding c",
            (false, false) => "sum from a node holding ~c",
            (false, true) => "sum from a node holding ~c, its restored carry out to the keeper",
        },
        pins: pins(&list),
        logic,
        devices: sch.devices,
        care: None,
        clock: None,
        stages: 4,
    }
}
