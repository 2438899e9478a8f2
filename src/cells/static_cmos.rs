//! Static complementary CMOS cells: inverter, buffer, mirror full adder.

use super::expr::*;
use super::{pins, Cell, CellKind, Dir::*, Role, Schematic, Sizes};

/// Inverter sized as a carry-path buffer (`sizing.buffer` unit widths).
pub fn inv(s: &Sizes) -> Cell {
    let mut sch = Schematic::new(s);
    sch.inv("y", "a", "y", s.buffer);
    Cell {
        kind: CellKind::Inv,
        base: "inv",
        summary: "inverter, carry-path buffer strength",
        pins: pins(&[("a", In, false), ("y", Out, false)]),
        logic: vec![(1, not(v(0)))],
        devices: sch.devices,
        care: None,
        clock: None,
        stages: 1,
    }
}

/// Non-inverting buffer: a unit inverter driving a buffer-strength inverter.
pub fn buf(s: &Sizes) -> Cell {
    let mut sch = Schematic::new(s);
    sch.inv("x", "a", "x", 1.0);
    sch.inv("y", "x", "y", s.buffer);
    Cell {
        kind: CellKind::Buf,
        base: "buf",
        summary: "inverter pair (non-inverting buffer)",
        pins: pins(&[("a", In, false), ("y", Out, false)]),
        logic: vec![(1, v(0))],
        devices: sch.devices,
        care: None,
        clock: None,
        stages: 2,
    }
}

/// The mirror full adder (Weste & Harris, CMOS VLSI Design, 4th ed., §11.2): a 24-transistor
/// inverting core whose pull-up network mirrors the pull-down, plus two output inverters.
/// Devices in a series stack of depth k get k unit widths (common practice).
pub fn mirror_full_adder(s: &Sizes) -> Cell {
    let mut sch = Schematic::new(s);
    // Carry core: con = ~(a·b + ci·(a + b)).
    sch.n("c_ci", "con", "ci", "cn1", 2.0 * s.carry, Role::Logic);
    sch.n("c_a1", "cn1", "a", "vss", 2.0 * s.carry, Role::Logic);
    sch.n("c_b1", "cn1", "b", "vss", 2.0 * s.carry, Role::Logic);
    sch.n("c_a2", "con", "a", "cn2", 2.0 * s.carry, Role::Logic);
    sch.n("c_b2", "cn2", "b", "vss", 2.0 * s.carry, Role::Logic);
    sch.p("c_ci", "con", "ci", "cp1", 2.0 * s.carry, Role::Logic);
    sch.p("c_a1", "cp1", "a", "vdd", 2.0 * s.carry, Role::Logic);
    sch.p("c_b1", "cp1", "b", "vdd", 2.0 * s.carry, Role::Logic);
    sch.p("c_a2", "con", "a", "cp2", 2.0 * s.carry, Role::Logic);
    sch.p("c_b2", "cp2", "b", "vdd", 2.0 * s.carry, Role::Logic);
    // Sum core: sn = ~(a·b·ci + con·(a + b + ci)).
    sch.n("s_co", "sn", "con", "sn1", 2.0, Role::Logic);
    sch.n("s_a1", "sn1", "a", "vss", 2.0, Role::Logic);
    sch.n("s_b1", "sn1", "b", "vss", 2.0, Role::Logic);
    sch.n("s_c1", "sn1", "ci", "vss", 2.0, Role::Logic);
    sch.n("s_a2", "sn", "a", "sn2", 3.0, Role::Logic);
    sch.n("s_b2", "sn2", "b", "sn3", 3.0, Role::Logic);
    sch.n("s_c2", "sn3", "ci", "vss", 3.0, Role::Logic);
    sch.p("s_co", "sn", "con", "sp1", 2.0, Role::Logic);
    sch.p("s_a1", "sp1", "a", "vdd", 2.0, Role::Logic);
    sch.p("s_b1", "sp1", "b", "vdd", 2.0, Role::Logic);
    sch.p("s_c1", "sp1", "ci", "vdd", 2.0, Role::Logic);
    sch.p("s_a2", "sn", "a", "sp2", 3.0, Role::Logic);
    sch.p("s_b2", "sp2", "b", "sp3", 3.0, Role::Logic);
    sch.p("s_c2", "sp3", "ci", "vdd", 3.0, Role::Logic);
    // Output inverters restore true polarity.
    sch.inv("co", "con", "co", s.carry);
    sch.inv("s", "sn", "s", s.output);
    let (a, b, ci) = (v(0), v(1), v(2));
    Cell {
        kind: CellKind::FullAdder,
        base: "fa",
        summary: "28-transistor mirror full adder",
        pins: pins(&[
            ("a", In, false),
            ("b", In, false),
            ("ci", In, false),
            ("s", Out, false),
            ("co", Out, false),
        ]),
        logic: vec![
            (3, xor(vec![a.clone(), b.clone(), ci.clone()])),
            (
                4,
                or(vec![
                    and(vec![a.clone(), b.clone()]),
                    and(vec![ci, or(vec![a, b])]),
                ]),
            ),
        ],
        devices: sch.devices,
        care: None,
        clock: None,
        stages: 2,
    }
}

/// Grey cell of a prefix network: G = Gh + Ph·Gl, an AOI21 and an inverter. Also the carry
/// operator of lookahead and of the carry-skip bypass in dynamic style.
pub fn grey(s: &Sizes, drive: u8) -> Cell {
    let mut sch = Schematic::scaled(s, s.carry);
    sch.aoi21("gn", "gh", "ph", "gl", "gn");
    sch.inv("g", "gn", "g", drive as f64);
    let (gh, ph, gl) = (v(0), v(1), v(2));
    Cell {
        kind: CellKind::prefix_cell(true, drive),
        base: match drive {
            1 => "grey",
            2 => "grey_x2",
            _ => "grey_x4",
        },
        summary: match drive {
            1 => "grey cell G = Gh + Ph·Gl",
            2 => "grey cell G = Gh + Ph·Gl, output inverter 2x",
            _ => "grey cell G = Gh + Ph·Gl, output inverter 4x",
        },
        pins: pins(&[
            ("gh", In, false),
            ("ph", In, false),
            ("gl", In, false),
            ("g", Out, false),
        ]),
        logic: vec![(3, or(vec![gh, and(vec![ph, gl])]))],
        devices: sch.devices,
        care: None,
        clock: None,
        stages: 2,
    }
}

/// Black cell of a prefix network: G = Gh + Ph·Gl and P = Ph·Pl.
pub fn black(s: &Sizes, drive: u8) -> Cell {
    let mut sch = Schematic::scaled(s, s.carry);
    sch.aoi21("gn", "gh", "ph", "gl", "gn");
    sch.inv("g", "gn", "g", drive as f64);
    sch.nand2("pn", "ph", "pl", "pn");
    sch.inv("p", "pn", "p", drive as f64);
    let (gh, ph, gl, pl) = (v(0), v(1), v(2), v(3));
    Cell {
        kind: CellKind::prefix_cell(false, drive),
        base: match drive {
            1 => "black",
            2 => "black_x2",
            _ => "black_x4",
        },
        summary: match drive {
            1 => "black cell G = Gh + Ph·Gl, P = Ph·Pl",
            2 => "black cell G = Gh + Ph·Gl, P = Ph·Pl, output inverters 2x",
            _ => "black cell G = Gh + Ph·Gl, P = Ph·Pl, output inverters 4x",
        },
        pins: pins(&[
            ("gh", In, false),
            ("ph", In, false),
            ("gl", In, false),
            ("pl", In, false),
            ("g", Out, false),
            ("p", Out, false),
        ]),
        logic: vec![
            (4, or(vec![gh, and(vec![ph.clone(), gl])])),
            (5, and(vec![ph, pl])),
        ],
        devices: sch.devices,
        care: None,
        clock: None,
        stages: 2,
    }
}

/// Two-input AND: NAND2 and an inverter (block propagate of carry-skip).
pub fn and2(s: &Sizes) -> Cell {
    let mut sch = Schematic::new(s);
    sch.nand2("yn", "a", "b", "yn");
    sch.inv("y", "yn", "y", 1.0);
    Cell {
        kind: CellKind::And2,
        base: "and2",
        summary: "two-input AND",
        pins: pins(&[("a", In, false), ("b", In, false), ("y", Out, false)]),
        logic: vec![(2, and(vec![v(0), v(1)]))],
        devices: sch.devices,
        care: None,
        clock: None,
        stages: 2,
    }
}

/// Two-way multiplexer y = s ? d1 : d0: an inverter makes ~s, an AOI22 gives
/// ~(s·d1 + ~s·d0), an output inverter restores (carry-select, carry-skip bypass).
pub fn mux2(s: &Sizes) -> Cell {
    let mut sch = Schematic::new(s);
    sch.inv("sn", "s", "sn", 1.0);
    sch.aoi22("yn", "s", "d1", "sn", "d0", "yn");
    sch.inv("y", "yn", "y", s.buffer);
    Cell {
        kind: CellKind::Mux2,
        base: "mux2",
        summary: "two-way multiplexer y = s ? d1 : d0",
        pins: pins(&[
            ("d0", In, false),
            ("d1", In, false),
            ("s", In, false),
            ("y", Out, false),
        ]),
        logic: vec![(3, mux(v(2), v(1), v(0)))],
        devices: sch.devices,
        care: None,
        clock: None,
        stages: 3,
    }
}
