//! Bit-parallel evaluator of the logic view: 64 vectors per u64 word. The flattened netlist is
//! compiled once into a straight list of word operations in evaluation order, then checked
//! against native integer addition.

use crate::cells::{Dir, Expr};
use crate::emit::vectors::{self, Vector};
use crate::error::{Error, Result};
use crate::netlist::Design;

#[derive(Debug, Clone, Copy)]
enum Op {
    Not(u32, u32),
    And(u32, u32, u32),
    Or(u32, u32, u32),
    Xor(u32, u32, u32),
    /// d = s ? a : b
    Mux(u32, u32, u32, u32),
    Const(u32, u64),
}

impl Op {
    fn dest(&self) -> u32 {
        match *self {
            Op::Not(d, _) | Op::And(d, _, _) | Op::Or(d, _, _) | Op::Xor(d, _, _) => d,
            Op::Mux(d, _, _, _) | Op::Const(d, _) => d,
        }
    }
    fn set_dest(&mut self, new: u32) {
        match self {
            Op::Not(d, _) | Op::And(d, _, _) | Op::Or(d, _, _) | Op::Xor(d, _, _) => *d = new,
            Op::Mux(d, _, _, _) | Op::Const(d, _) => *d = new,
        }
    }
}

/// A compiled netlist.
pub struct Evaluator {
    ops: Vec<Op>,
    values: Vec<u64>,
    inputs: Vec<u32>,
    outputs: Vec<u32>,
    pub width: usize,
    pub dynamic: bool,
    /// Flattened net names (as `netlist::Flat` names them), indexed by net id.
    pub names: Vec<String>,
    /// Nets in the order the evaluator computes them (cell outputs, leaves in order).
    pub computed: Vec<u32>,
}

impl Evaluator {
    pub fn new(design: &Design) -> Result<Evaluator> {
        let flat = design.flatten();
        let order = flat.order(design)?;
        let mut values_len = flat.names.len() as u32;
        let mut ops = Vec::new();
        let mut computed = Vec::new();
        for &li in &order {
            let leaf = &flat.leaves[li];
            let cell = &design.cells[&leaf.kind];
            for (out, f) in &cell.logic {
                let first_temp = values_len;
                let r = compile(f, &leaf.nets, &mut ops, &mut values_len);
                let dest = leaf.nets[*out];
                computed.push(dest);
                // The last op produced the result into a fresh temporary: write the output
                // net directly. Otherwise (the function is a bare pin) copy it.
                match ops.last_mut() {
                    Some(op) if r >= first_temp && op.dest() == r => op.set_dest(dest),
                    _ => ops.push(Op::And(dest, r, r)),
                }
            }
        }
        let top = design.top();
        let dirs = top.pin_dirs();
        let mut inputs = vec![];
        let mut outputs = vec![];
        for ((_, dir), &g) in dirs.iter().zip(&flat.top_ports) {
            match dir {
                Dir::In => inputs.push(g),
                Dir::Out => outputs.push(g),
            }
        }
        let width = top
            .ports
            .iter()
            .find(|p| p.name == "a")
            .map_or(0, |p| p.bits.len());
        Ok(Evaluator {
            ops,
            values: vec![0; values_len as usize],
            inputs,
            outputs,
            width,
            dynamic: design.dynamic,
            names: flat.names,
            computed,
        })
    }

    /// Evaluate one word of vectors: `inputs` holds one word per top input bit in port order
    /// (`[clk] a.. b.. cin`); returns one word per output bit (`s.. cout`).
    pub fn eval(&mut self, inputs: &[u64], outputs: &mut [u64]) {
        for (&net, &w) in self.inputs.iter().zip(inputs) {
            self.values[net as usize] = w;
        }
        let v = &mut self.values;
        for op in &self.ops {
            match *op {
                Op::Not(d, a) => v[d as usize] = !v[a as usize],
                Op::And(d, a, b) => v[d as usize] = v[a as usize] & v[b as usize],
                Op::Or(d, a, b) => v[d as usize] = v[a as usize] | v[b as usize],
                Op::Xor(d, a, b) => v[d as usize] = v[a as usize] ^ v[b as usize],
                Op::Mux(d, s, a, b) => {
                    let s = v[s as usize];
                    v[d as usize] = (s & v[a as usize]) | (!s & v[b as usize]);
                }
                Op::Const(d, c) => v[d as usize] = c,
            }
        }
        for (o, &net) in outputs.iter_mut().zip(&self.outputs) {
            *o = self.values[net as usize];
        }
    }

    /// A net's word after the last [`Evaluator::eval`].
    pub fn net(&self, id: u32) -> u64 {
        self.values[id as usize]
    }

    pub fn n_ops(&self) -> usize {
        self.ops.len()
    }
}

fn compile(e: &Expr, nets: &[u32], ops: &mut Vec<Op>, next: &mut u32) -> u32 {
    let mut tmp = || {
        *next += 1;
        *next - 1
    };
    match e {
        Expr::Pin(i) => nets[*i],
        Expr::Const(b) => {
            let d = tmp();
            ops.push(Op::Const(d, if *b { !0 } else { 0 }));
            d
        }
        Expr::Not(x) => {
            let a = compile(x, nets, ops, next);
            let d = *next;
            *next += 1;
            ops.push(Op::Not(d, a));
            d
        }
        Expr::And(xs) | Expr::Or(xs) | Expr::Xor(xs) => {
            let mut acc = compile(&xs[0], nets, ops, next);
            for x in &xs[1..] {
                let b = compile(x, nets, ops, next);
                let d = *next;
                *next += 1;
                ops.push(match e {
                    Expr::And(_) => Op::And(d, acc, b),
                    Expr::Or(_) => Op::Or(d, acc, b),
                    _ => Op::Xor(d, acc, b),
                });
                acc = d;
            }
            acc
        }
        Expr::Mux(s, a, b) => {
            let (s, a, b) = (
                compile(s, nets, ops, next),
                compile(a, nets, ops, next),
                compile(b, nets, ops, next),
            );
            let d = *next;
            *next += 1;
            ops.push(Op::Mux(d, s, a, b));
            d
        }
    }
}

/// Transpose a 64×64 bit matrix in place: bit j of row i moves to bit i of row j
/// (the recursive block swap of Warren, Hacker's Delight, §7-3).
pub fn transpose64(m: &mut [u64; 64]) {
    let mut j = 32usize;
    let mut mask: u64 = 0x0000_0000_FFFF_FFFF;
    while j != 0 {
        let mut k = 0usize;
        while k < 64 {
            let t = ((m[k] >> j) ^ m[k + j]) & mask;
            m[k] ^= t << j;
            m[k + j] ^= t;
            k = (k + j + 1) & !j;
        }
        j >>= 1;
        mask ^= mask << j;
    }
}

/// Spread 64 lane values (up to 128 bits each) into `width` bit-words.
fn lanes_to_words(lanes: &[u128; 64], width: usize, out: &mut Vec<u64>) {
    for half in 0..width.div_ceil(64) {
        let mut m = [0u64; 64];
        for (i, l) in lanes.iter().enumerate() {
            m[i] = (l >> (64 * half)) as u64;
        }
        transpose64(&mut m);
        let bits = (width - 64 * half).min(64);
        out.extend_from_slice(&m[..bits]);
    }
}

/// The check's vectors, 64 lanes at a time: exhaustive up to `exhaustive_max` bits, else the
/// directed vectors then `random` seeded random ones. The logic check and the switch-level
/// check of the SPICE view run exactly these.
pub struct Words {
    pub width: usize,
    pub total: u64,
    pub exhaustive: bool,
    directed: Vec<Vector>,
    rng: vectors::Rng,
    i: u64,
    lanes: [Vector; 64],
}

impl Words {
    pub fn new(width: usize, seed: u64, random: usize, exhaustive_max: usize) -> Words {
        let exhaustive = width <= exhaustive_max;
        let directed = if exhaustive {
            vec![]
        } else {
            vectors::directed(width)
        };
        let total: u64 = if exhaustive {
            1u64 << (2 * width + 1)
        } else {
            (directed.len() + random) as u64
        };
        Words {
            width,
            total,
            exhaustive,
            directed,
            rng: vectors::Rng::new(seed),
            i: 0,
            lanes: [Vector::new(0, 0, false, width); 64],
        }
    }

    fn vector_at(&mut self, i: u64) -> Vector {
        let w = self.width;
        if self.exhaustive {
            let mask = vectors::mask(w);
            let cin = i & 1 == 1;
            let a = ((i >> 1) as u128) & mask;
            let b = ((i >> (1 + w)) as u128) & mask;
            Vector::new(a, b, cin, w)
        } else if (i as usize) < self.directed.len() {
            self.directed[i as usize]
        } else {
            vectors::random_vector(&mut self.rng, w)
        }
    }

    /// The next 64 lanes and how many of them are real vectors (the last word is padded by
    /// repeating its first vector).
    pub fn next_word(&mut self) -> Option<([Vector; 64], usize)> {
        if self.i >= self.total {
            return None;
        }
        let n = (self.total - self.i).min(64) as usize;
        for k in 0..64 {
            self.lanes[k] = if k < n {
                self.vector_at(self.i + k as u64)
            } else {
                self.lanes[0]
            };
        }
        self.i += n as u64;
        Some((self.lanes, n))
    }
}

/// One word per bit of `a`, of `b`, then cin, for 64 lanes (the evaluator's input order
/// after `clk`).
pub fn input_words(lanes: &[Vector; 64], width: usize, out: &mut Vec<u64>) {
    let mut la = [0u128; 64];
    let mut lb = [0u128; 64];
    let mut cin = 0u64;
    for (k, v) in lanes.iter().enumerate() {
        la[k] = v.a;
        lb[k] = v.b;
        cin |= (v.cin as u64) << k;
    }
    lanes_to_words(&la, width, out);
    lanes_to_words(&lb, width, out);
    out.push(cin);
}

/// One word per bit of the expected sum, then cout.
pub fn expected_words(lanes: &[Vector; 64], width: usize, out: &mut Vec<u64>) {
    let mut ls = [0u128; 64];
    let mut cout = 0u64;
    for (k, v) in lanes.iter().enumerate() {
        ls[k] = v.s;
        cout |= (v.cout as u64) << k;
    }
    lanes_to_words(&ls, width, out);
    out.push(cout);
}

/// Result of a logic check.
#[derive(Debug, Clone, serde::Serialize)]
pub struct CheckReport {
    pub vectors: u64,
    pub exhaustive: bool,
    /// Dynamic designs: the precharge phase (clk low) was checked too.
    pub precharge_checked: bool,
    pub mismatches: u64,
    pub first_mismatch: Option<String>,
}

/// How many vectors the check runs: exhaustive up to this width.
pub const EXHAUSTIVE_MAX: usize = 12;
pub const RANDOM_MIN: usize = 100_000;

/// Check the netlist against native integer addition: exhaustive up to `exhaustive_max`
/// bits, else the directed vectors plus `random` seeded random ones (the `check` command
/// uses 12 bits and at least 100,000). Dynamic designs are checked in
/// evaluate (clk high) against the sum and in precharge (clk low) against cout = 0,
/// s = a ⊕ b.
pub fn check(
    design: &Design,
    seed: u64,
    random: usize,
    exhaustive_max: usize,
) -> Result<CheckReport> {
    let mut ev = Evaluator::new(design)?;
    let w = ev.width;
    let words = Words::new(w, seed, random, exhaustive_max);
    let (total, exhaustive) = (words.total, words.exhaustive);
    let mut report = CheckReport {
        vectors: total,
        exhaustive,
        precharge_checked: ev.dynamic,
        mismatches: 0,
        first_mismatch: None,
    };
    let mut inputs: Vec<u64> = Vec::with_capacity(2 * w + 2);
    let mut outputs = vec![0u64; w + 1];
    let mut expect: Vec<u64> = Vec::with_capacity(w + 1);
    let mut words = words;
    let mut data: Vec<u64> = Vec::with_capacity(2 * w + 1);
    while let Some((lanes, n)) = words.next_word() {
        data.clear();
        input_words(&lanes, w, &mut data);
        let phases: &[bool] = if ev.dynamic { &[false, true] } else { &[true] };
        for &evaluate in phases {
            inputs.clear();
            if ev.dynamic {
                inputs.push(if evaluate { !0 } else { 0 });
            }
            inputs.extend_from_slice(&data);
            ev.eval(&inputs, &mut outputs);
            expect.clear();
            if evaluate {
                expected_words(&lanes, w, &mut expect);
            } else {
                let off = usize::from(ev.dynamic);
                for bit in 0..w {
                    expect.push(inputs[off + bit] ^ inputs[off + w + bit]);
                }
                expect.push(0);
            }
            let mut bad = 0u64;
            for (o, e) in outputs.iter().zip(&expect) {
                bad |= o ^ e;
            }
            if n < 64 {
                bad &= (1u64 << n) - 1;
            }
            if bad != 0 {
                report.mismatches += bad.count_ones() as u64;
                if report.first_mismatch.is_none() {
                    let k = bad.trailing_zeros() as usize;
                    let v = &lanes[k];
                    let got_s = (0..w).fold(0u128, |acc, bit| {
                        acc | (((outputs[bit] >> k) & 1) as u128) << bit
                    });
                    let got_c = (outputs[w] >> k) & 1;
                    report.first_mismatch = Some(format!(
                        "{}: a={:#x} b={:#x} cin={} gives s={:#x} cout={}, expected s={:#x} cout={}",
                        if evaluate { "evaluate" } else { "precharge" },
                        v.a,
                        v.b,
                        v.cin as u8,
                        got_s,
                        got_c,
                        if evaluate { v.s } else { v.a ^ v.b },
                        if evaluate { v.cout as u8 } else { 0 }
                    ));
                }
            }
        }
    }
    Ok(report)
}

/// Run the check and turn mismatches into an error.
pub fn check_or_fail(
    design: &Design,
    seed: u64,
    random: usize,
    exhaustive_max: usize,
) -> Result<CheckReport> {
    let r = check(design, seed, random, exhaustive_max)?;
    if r.mismatches > 0 {
        return Err(Error::Check(format!(
            "logic check failed: {} mismatching output bits; first: {}",
            r.mismatches,
            r.first_mismatch.clone().unwrap_or_default()
        )));
    }
    Ok(r)
}
