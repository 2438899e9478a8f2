//! The cell library. A cell is defined once, here, with its pins, its logic function (used by
//! the Verilog view and the bit-parallel check) and its sized transistor schematic (used by
//! the SPICE view and the ratio check). Adding a cell is one edit: a [`CellKind`] variant and
//! a constructor in [`static_cmos`] or [`manchester`], wired into [`Library::cell`].

pub mod manchester;
pub mod static_cmos;
pub mod switch;

use crate::spec::Sizing;
use crate::tech::{End, Technology};
use serde::Serialize;
use std::collections::{BTreeMap, BTreeSet};

/// Every cell the generator can place. The order is the order cells are printed in.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
pub enum CellKind {
    /// Static inverter, sized as a carry-path buffer.
    Inv,
    /// Non-inverting buffer: an inverter pair.
    Buf,
    /// 28-transistor mirror full adder.
    FullAdder,
    /// Propagate/generate/kill cell feeding a chain that holds the inverted carry.
    PgInverted,
    /// Propagate/generate/kill cell feeding a chain that holds the true carry.
    PgTrue,
    /// Generate and propagate, g = a·b and p = a ⊕ b (dynamic chains, prefix networks).
    Pg,
    /// Static Manchester carry cell, node holds the inverted carry.
    ChainInverted,
    /// Static Manchester carry cell, node holds the true carry.
    ChainTrue,
    /// Dynamic Manchester carry cell (precharge, footed generate, pass NMOS).
    ChainDynamic,
    /// Dynamic Manchester carry cell with a keeper.
    ChainDynamicKeeper,
    /// Dynamic chain start: precharged node discharged by a true-polarity input.
    DynamicStart,
    /// Dynamic chain start with a keeper.
    DynamicStartKeeper,
    /// Sum cell reading a node that holds the inverted carry.
    SumInverted,
    /// The same, with its first inverter's output (the restored carry) brought out to drive
    /// the node's keeper.
    SumInvertedTap,
    /// Sum cell reading a node that holds the true carry (also the XOR of prefix adders).
    SumTrue,
    /// Grey cell: G = Gh + Ph·Gl (AOI21 and an inverter).
    Grey,
    /// Black cell: G = Gh + Ph·Gl, P = Ph·Pl.
    Black,
    /// Grey and black cells whose output inverters are 2× and 4× wider, for nets with a
    /// heavy load (prefix cells sized by their fan-out, `arch::prefix::size_by_fanout`).
    GreyX2,
    GreyX4,
    BlackX2,
    BlackX4,
    /// A Manchester carry cell of a tapered segment: pass and generate devices (and the
    /// footer, dynamic style) at `TAPER_DRIVES[level]` times their width (`level` 1 to 4;
    /// level 0 is the plain cell). `arch::manchester::taper_levels` picks the levels.
    ChainTapered(ChainForm, u8),
    /// Two-input AND (NAND2 and an inverter).
    And2,
    /// Two-way multiplexer y = s ? d1 : d0 (AOI22 with an inverter on s, output inverter).
    Mux2,
}

/// The four Manchester carry cells: static with the node holding ~c or c, dynamic without and
/// with a keeper.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
pub enum ChainForm {
    Inverted,
    True,
    Dynamic,
    DynamicKeeper,
}

impl ChainForm {
    /// The plain (level 0) cell of this form.
    pub fn plain(self) -> CellKind {
        match self {
            ChainForm::Inverted => CellKind::ChainInverted,
            ChainForm::True => CellKind::ChainTrue,
            ChainForm::Dynamic => CellKind::ChainDynamic,
            ChainForm::DynamicKeeper => CellKind::ChainDynamicKeeper,
        }
    }
    /// The cell of this form at a drive level (0: the plain cell).
    pub fn at(self, level: u8) -> CellKind {
        if level == 0 {
            self.plain()
        } else {
            CellKind::ChainTapered(self, level.min(TAPER_DRIVES.len() as u8 - 1))
        }
    }
}

/// Width multipliers of a tapered chain's cells by level, in about half-octave steps (a
/// segment's head carries the charge of every node after it, its tail only its own).
pub const TAPER_DRIVES: [f64; 5] = [1.0, 1.5, 2.0, 3.0, 4.0];

/// Cell names of the tapered chain cells: [form][level - 1].
const TAPER_BASES: [[&str; 4]; 4] = [
    ["mcc_i_x15", "mcc_i_x2", "mcc_i_x3", "mcc_i_x4"],
    ["mcc_t_x15", "mcc_t_x2", "mcc_t_x3", "mcc_t_x4"],
    ["mcc_d_x15", "mcc_d_x2", "mcc_d_x3", "mcc_d_x4"],
    ["mcc_dk_x15", "mcc_dk_x2", "mcc_dk_x3", "mcc_dk_x4"],
];

/// The name of a chain cell of this form and level.
pub fn taper_base(form: ChainForm, level: u8) -> &'static str {
    TAPER_BASES[form as usize][level as usize - 1]
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Dir {
    In,
    Out,
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Pin {
    pub name: &'static str,
    pub dir: Dir,
    /// A pass-transistor chain node: both ways at transistor level, one way in the logic view.
    pub chain: bool,
}

/// A logic function over a cell's pins (indices into `Cell::pins`).
#[derive(Debug, Clone, PartialEq)]
pub enum Expr {
    Pin(usize),
    Const(bool),
    Not(Box<Expr>),
    And(Vec<Expr>),
    Or(Vec<Expr>),
    Xor(Vec<Expr>),
    /// `sel ? one : zero`
    Mux(Box<Expr>, Box<Expr>, Box<Expr>),
}

impl Expr {
    pub fn eval(&self, v: &dyn Fn(usize) -> bool) -> bool {
        match self {
            Expr::Pin(i) => v(*i),
            Expr::Const(b) => *b,
            Expr::Not(e) => !e.eval(v),
            Expr::And(es) => es.iter().all(|e| e.eval(v)),
            Expr::Or(es) => es.iter().any(|e| e.eval(v)),
            Expr::Xor(es) => es.iter().fold(false, |acc, e| acc ^ e.eval(v)),
            Expr::Mux(s, a, b) => {
                if s.eval(v) {
                    a.eval(v)
                } else {
                    b.eval(v)
                }
            }
        }
    }
    /// Pins this expression reads.
    pub fn pins(&self, out: &mut Vec<usize>) {
        match self {
            Expr::Pin(i) => out.push(*i),
            Expr::Const(_) => {}
            Expr::Not(e) => e.pins(out),
            Expr::And(es) | Expr::Or(es) | Expr::Xor(es) => es.iter().for_each(|e| e.pins(out)),
            Expr::Mux(s, a, b) => {
                s.pins(out);
                a.pins(out);
                b.pins(out);
            }
        }
    }
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Mos {
    N,
    P,
}

/// What a device does in its stage; the ratio check looks for keepers.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Role {
    Logic,
    Pass,
    Precharge,
    Footer,
    Keeper,
}

/// One MOSFET. Node names are pin names, `vdd`, `vss`, or cell-internal nodes.
/// The body ties to `vss` (NMOS) or `vdd` (PMOS).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Device {
    pub name: String,
    pub mos: Mos,
    pub d: String,
    pub g: String,
    pub s: String,
    /// Width and length, µm.
    pub w: f64,
    pub l: f64,
    pub role: Role,
}

impl Device {
    pub fn strength(&self) -> f64 {
        self.w / self.l
    }
}

#[derive(Debug, Clone, PartialEq)]
pub struct Cell {
    pub kind: CellKind,
    /// Short name; the views print it as `<design>_<base>`.
    pub base: &'static str,
    pub summary: &'static str,
    pub pins: Vec<Pin>,
    /// (output pin, function of the inputs).
    pub logic: Vec<(usize, Expr)>,
    pub devices: Vec<Device>,
    /// Input combinations the cell is designed for (e.g. `g` and `p` never both high);
    /// the switch-level self-check of the cell skips the others. `None`: all combinations.
    pub care: Option<Expr>,
    /// Dynamic cells: the pin that clocks precharge (low) and evaluate (high).
    pub clock: Option<usize>,
    /// Gate stages from an input to an output (a pass device counts as one), for the logic
    /// depth the reports give.
    pub stages: usize,
}

impl Cell {
    pub fn pin(&self, name: &str) -> usize {
        self.pins
            .iter()
            .position(|p| p.name == name)
            .unwrap_or_else(|| panic!("cell {} has no pin {name}", self.base))
    }
    /// Input pins some logic function reads (a keeper's gate is read by transistors only: it
    /// orders no evaluation and the logic view leaves it unused).
    pub fn read_by_logic(&self) -> Vec<bool> {
        let mut read = vec![false; self.pins.len()];
        let mut used = vec![];
        for (_, f) in &self.logic {
            f.pins(&mut used);
        }
        for i in used {
            read[i] = true;
        }
        read
    }
    /// Each device's (drain, source) diffusion ends ([`diffusion_ends`] over the cell's
    /// devices, with its pins and the rails outside). The SPICE view prints them, the timing
    /// engine gives each end its capacitance from them.
    pub fn diffusion_ends(&self) -> Vec<[End; 2]> {
        let devs: Vec<(Mos, &str, &str, &str)> = self
            .devices
            .iter()
            .map(|d| (d.mos, d.d.as_str(), d.g.as_str(), d.s.as_str()))
            .collect();
        diffusion_ends(&devs, &|n| {
            n == "vdd" || n == "vss" || self.pins.iter().any(|p| p.name == n)
        })
    }
    pub fn inputs(&self) -> impl Iterator<Item = usize> + '_ {
        self.pins
            .iter()
            .enumerate()
            .filter(|(_, p)| p.dir == Dir::In)
            .map(|(i, _)| i)
    }
}

/// The diffusion end (drain, source) of every device in a list of `(type, drain, gate,
/// source)`: a node for which `outside` is false (internal to the cell: no pin, no rail) that
/// joins exactly two channel ends, of two devices of the same type, and no gate, is the
/// uncontacted diffusion a layout shares between two gates in series ([`End::Shared`], each
/// device taking half); every other end is contacted. Computed once per cell (and per
/// characterisation netlist) and read by every view.
pub fn diffusion_ends(
    devices: &[(Mos, &str, &str, &str)],
    outside: &dyn Fn(&str) -> bool,
) -> Vec<[End; 2]> {
    // Per node: channel ends (device index, type), gates.
    let mut ends: BTreeMap<&str, Vec<(usize, Mos)>> = BTreeMap::new();
    let mut gated: BTreeSet<&str> = BTreeSet::new();
    for (i, &(mos, d, g, s)) in devices.iter().enumerate() {
        ends.entry(d).or_default().push((i, mos));
        ends.entry(s).or_default().push((i, mos));
        gated.insert(g);
    }
    let shared = |n: &str| -> bool {
        if outside(n) || gated.contains(n) {
            return false;
        }
        match ends.get(n).map(Vec::as_slice) {
            Some([(i, a), (j, b)]) => i != j && a == b,
            _ => false,
        }
    };
    devices
        .iter()
        .map(|&(_, d, _, s)| {
            let end = |n: &str| {
                if shared(n) {
                    End::Shared
                } else {
                    End::Contacted
                }
            };
            [end(d), end(s)]
        })
        .collect()
}

/// Resolved device sizes for one design (µm).
#[derive(Debug, Clone, PartialEq)]
pub struct Sizes {
    pub l: f64,
    pub w_min: f64,
    /// Unit NMOS and PMOS widths.
    pub n: f64,
    pub p: f64,
    /// Keeper width and length (strength = keeper fraction of a unit NMOS); None: no keeper.
    pub keeper: Option<(f64, f64)>,
    pub buffer: f64,
    /// Role multipliers (`sizing.pass`, `.generate`, `.precharge`, `.output`): carry-path
    /// pass devices and chain starts; generate/kill devices and footers of chain cells;
    /// precharge devices; the output inverter of every sum.
    pub pass: f64,
    pub generate: f64,
    pub precharge: f64,
    pub output: f64,
    /// Prefix cells (grey, black) as a whole and the full adder's carry half.
    pub carry: f64,
}

impl Sizes {
    pub fn new(tech: &Technology, sizing: &Sizing) -> Sizes {
        let l = tech.l_min;
        let keeper = if sizing.keeper > 0.0 {
            // Target W/L = keeper * (unit_n / l). Use the smallest width and a longer channel
            // when that reaches the target; otherwise a short channel and a narrow width.
            let target = sizing.keeper * sizing.unit_n / l;
            let w = tech.w_min;
            let len = w / target;
            if len >= l {
                Some((w, round3(len)))
            } else {
                Some((round3(target * l), l))
            }
        } else {
            None
        };
        Sizes {
            l,
            w_min: tech.w_min,
            n: sizing.unit_n,
            p: round3(sizing.unit_n * sizing.pn_ratio),
            keeper,
            buffer: sizing.buffer,
            pass: sizing.pass,
            generate: sizing.generate,
            precharge: sizing.precharge,
            output: sizing.output,
            carry: sizing.carry,
        }
    }
}

fn round3(x: f64) -> f64 {
    (x * 1000.0).round() / 1000.0
}

/// Builds a transistor schematic with readable device names.
pub struct Schematic<'a> {
    pub sizes: &'a Sizes,
    pub devices: Vec<Device>,
    /// Every width below is multiplied by this (a cell sized as a whole by its role).
    pub scale: f64,
}

impl<'a> Schematic<'a> {
    pub fn new(sizes: &'a Sizes) -> Self {
        Self::scaled(sizes, 1.0)
    }
    pub fn scaled(sizes: &'a Sizes, scale: f64) -> Self {
        Schematic {
            sizes,
            devices: vec![],
            scale,
        }
    }
    #[allow(clippy::too_many_arguments)]
    fn push(
        &mut self,
        name: &str,
        mos: Mos,
        d: &str,
        g: &str,
        s: &str,
        w: f64,
        l: f64,
        role: Role,
    ) {
        let prefix = match mos {
            Mos::N => "mn",
            Mos::P => "mp",
        };
        self.devices.push(Device {
            name: format!("{prefix}_{name}"),
            mos,
            d: d.into(),
            g: g.into(),
            s: s.into(),
            w: round3(w * self.scale),
            l,
            role,
        });
    }
    /// NMOS of `mult` unit widths.
    pub fn n(&mut self, name: &str, d: &str, g: &str, s: &str, mult: f64, role: Role) {
        let (w, l) = (self.sizes.n * mult, self.sizes.l);
        self.push(name, Mos::N, d, g, s, w, l, role);
    }
    /// PMOS of `mult` unit widths.
    pub fn p(&mut self, name: &str, d: &str, g: &str, s: &str, mult: f64, role: Role) {
        let (w, l) = (self.sizes.p * mult, self.sizes.l);
        self.push(name, Mos::P, d, g, s, w, l, role);
    }
    pub fn keeper(&mut self, name: &str, d: &str, g: &str) {
        let (w, l) = self.sizes.keeper.expect("keeper sizes");
        self.push(name, Mos::P, d, g, "vdd", w, l, Role::Keeper);
    }
    pub fn inv(&mut self, name: &str, a: &str, y: &str, mult: f64) {
        self.n(name, y, a, "vss", mult, Role::Logic);
        self.p(name, y, a, "vdd", mult, Role::Logic);
    }
    /// Two-input NAND: series NMOS at twice the unit width (stack sizing, common practice).
    pub fn nand2(&mut self, name: &str, a: &str, b: &str, y: &str) {
        let x = format!("{name}_x");
        self.n(&format!("{name}_a"), y, a, &x, 2.0, Role::Logic);
        self.n(&format!("{name}_b"), &x, b, "vss", 2.0, Role::Logic);
        self.p(&format!("{name}_a"), y, a, "vdd", 1.0, Role::Logic);
        self.p(&format!("{name}_b"), y, b, "vdd", 1.0, Role::Logic);
    }
    /// Two-input NOR: series PMOS at twice the unit width.
    pub fn nor2(&mut self, name: &str, a: &str, b: &str, y: &str) {
        let x = format!("{name}_x");
        self.n(&format!("{name}_a"), y, a, "vss", 1.0, Role::Logic);
        self.n(&format!("{name}_b"), y, b, "vss", 1.0, Role::Logic);
        self.p(&format!("{name}_a"), y, a, &x, 2.0, Role::Logic);
        self.p(&format!("{name}_b"), &x, b, "vdd", 2.0, Role::Logic);
    }
    /// y = ~(a + b·c): a alone, or b and c in series, pull down; the mirror network pulls up.
    pub fn aoi21(&mut self, name: &str, a: &str, b: &str, c: &str, y: &str) {
        let (xn, xp) = (format!("{name}_xn"), format!("{name}_xp"));
        self.n(&format!("{name}_a"), y, a, "vss", 1.0, Role::Logic);
        self.n(&format!("{name}_b"), y, b, &xn, 2.0, Role::Logic);
        self.n(&format!("{name}_c"), &xn, c, "vss", 2.0, Role::Logic);
        self.p(&format!("{name}_a"), &xp, a, "vdd", 2.0, Role::Logic);
        self.p(&format!("{name}_b"), y, b, &xp, 2.0, Role::Logic);
        self.p(&format!("{name}_c"), y, c, &xp, 2.0, Role::Logic);
    }
    /// y = ~(a·b + c·d).
    pub fn aoi22(&mut self, name: &str, a: &str, b: &str, c: &str, d: &str, y: &str) {
        let (x1, x2, xp) = (
            format!("{name}_x1"),
            format!("{name}_x2"),
            format!("{name}_xp"),
        );
        self.n(&format!("{name}_a"), y, a, &x1, 2.0, Role::Logic);
        self.n(&format!("{name}_b"), &x1, b, "vss", 2.0, Role::Logic);
        self.n(&format!("{name}_c"), y, c, &x2, 2.0, Role::Logic);
        self.n(&format!("{name}_d"), &x2, d, "vss", 2.0, Role::Logic);
        self.p(&format!("{name}_a"), &xp, a, "vdd", 2.0, Role::Logic);
        self.p(&format!("{name}_b"), &xp, b, "vdd", 2.0, Role::Logic);
        self.p(&format!("{name}_c"), y, c, &xp, 2.0, Role::Logic);
        self.p(&format!("{name}_d"), y, d, &xp, 2.0, Role::Logic);
    }
    /// Transmission gate between `x` and `y`: NMOS gated by `on`, PMOS by `on_n`.
    pub fn tg(&mut self, name: &str, x: &str, y: &str, on: &str, on_n: &str, mult: f64) {
        self.n(name, x, on, y, mult, Role::Pass);
        self.p(name, x, on_n, y, mult, Role::Pass);
    }
}

/// Shorthands for writing logic functions.
pub mod expr {
    use super::Expr;
    pub fn v(i: usize) -> Expr {
        Expr::Pin(i)
    }
    pub fn not(e: Expr) -> Expr {
        Expr::Not(Box::new(e))
    }
    pub fn and(es: Vec<Expr>) -> Expr {
        Expr::And(es)
    }
    pub fn or(es: Vec<Expr>) -> Expr {
        Expr::Or(es)
    }
    pub fn xor(es: Vec<Expr>) -> Expr {
        Expr::Xor(es)
    }
    pub fn mux(s: Expr, one: Expr, zero: Expr) -> Expr {
        Expr::Mux(Box::new(s), Box::new(one), Box::new(zero))
    }
}

/// Pins in a compact form: `pins(&[("a", In), ...])`.
pub fn pins(list: &[(&'static str, Dir, bool)]) -> Vec<Pin> {
    list.iter()
        .map(|&(name, dir, chain)| Pin { name, dir, chain })
        .collect()
}

/// The cells of one design, all built from the same sizes.
pub struct Library {
    pub sizes: Sizes,
}

impl Library {
    pub fn new(sizes: Sizes) -> Self {
        Library { sizes }
    }
    pub fn cell(&self, kind: CellKind) -> Cell {
        let s = &self.sizes;
        match kind {
            CellKind::Inv => static_cmos::inv(s),
            CellKind::Buf => static_cmos::buf(s),
            CellKind::FullAdder => static_cmos::mirror_full_adder(s),
            CellKind::PgInverted => manchester::pg_inverted(s),
            CellKind::PgTrue => manchester::pg_true(s),
            CellKind::Pg => manchester::pg(s),
            CellKind::ChainInverted => manchester::chain_static(s, false, 0),
            CellKind::ChainTrue => manchester::chain_static(s, true, 0),
            CellKind::ChainDynamic => manchester::chain_dynamic(s, false, 0),
            CellKind::ChainDynamicKeeper => manchester::chain_dynamic(s, true, 0),
            CellKind::ChainTapered(form, level) => match form {
                ChainForm::Inverted => manchester::chain_static(s, false, level),
                ChainForm::True => manchester::chain_static(s, true, level),
                ChainForm::Dynamic => manchester::chain_dynamic(s, false, level),
                ChainForm::DynamicKeeper => manchester::chain_dynamic(s, true, level),
            },
            CellKind::DynamicStart => manchester::dynamic_start(s, false),
            CellKind::DynamicStartKeeper => manchester::dynamic_start(s, true),
            CellKind::SumInverted => manchester::sum(s, false, false),
            CellKind::SumInvertedTap => manchester::sum(s, false, true),
            CellKind::SumTrue => manchester::sum(s, true, false),
            CellKind::Grey => static_cmos::grey(s, 1),
            CellKind::Black => static_cmos::black(s, 1),
            CellKind::GreyX2 => static_cmos::grey(s, 2),
            CellKind::GreyX4 => static_cmos::grey(s, 4),
            CellKind::BlackX2 => static_cmos::black(s, 2),
            CellKind::BlackX4 => static_cmos::black(s, 4),
            CellKind::And2 => static_cmos::and2(s),
            CellKind::Mux2 => static_cmos::mux2(s),
        }
    }
}

impl CellKind {
    /// A prefix cell's family (grey: true, black: false) and output drive (1, 2 or 4).
    pub fn prefix_drive(self) -> Option<(bool, u8)> {
        match self {
            CellKind::Grey => Some((true, 1)),
            CellKind::GreyX2 => Some((true, 2)),
            CellKind::GreyX4 => Some((true, 4)),
            CellKind::Black => Some((false, 1)),
            CellKind::BlackX2 => Some((false, 2)),
            CellKind::BlackX4 => Some((false, 4)),
            _ => None,
        }
    }

    /// The prefix cell of this family and drive (1, 2 or 4).
    pub fn prefix_cell(grey: bool, drive: u8) -> CellKind {
        match (grey, drive) {
            (true, 1) => CellKind::Grey,
            (true, 2) => CellKind::GreyX2,
            (true, _) => CellKind::GreyX4,
            (false, 1) => CellKind::Black,
            (false, 2) => CellKind::BlackX2,
            (false, _) => CellKind::BlackX4,
        }
    }
}

/// All kinds, for tests and documentation.
pub const ALL_KINDS: &[CellKind] = &[
    CellKind::Inv,
    CellKind::Buf,
    CellKind::FullAdder,
    CellKind::PgInverted,
    CellKind::PgTrue,
    CellKind::Pg,
    CellKind::ChainInverted,
    CellKind::ChainTrue,
    CellKind::ChainDynamic,
    CellKind::ChainDynamicKeeper,
    CellKind::DynamicStart,
    CellKind::DynamicStartKeeper,
    CellKind::SumInverted,
    CellKind::SumInvertedTap,
    CellKind::SumTrue,
    CellKind::Grey,
    CellKind::Black,
    CellKind::GreyX2,
    CellKind::GreyX4,
    CellKind::BlackX2,
    CellKind::BlackX4,
    CellKind::ChainTapered(ChainForm::Inverted, 1),
    CellKind::ChainTapered(ChainForm::True, 2),
    CellKind::ChainTapered(ChainForm::Dynamic, 3),
    CellKind::ChainTapered(ChainForm::DynamicKeeper, 4),
    CellKind::And2,
    CellKind::Mux2,
];
