//! The real worst path: the largest output arrival over input vector pairs, each pair timed
//! by the engine ([`super::engine`]), found by a search over pairs that really occur, and the
//! estimate built from it.
//!
//! The search: the hard transitions (cin, and every a_i and b_i, toggled with every other bit
//! propagating, both edges, with the toggled bit's partner at either value), kill ↔ generate
//! at every bit with the others propagating (this covers the generate/kill patterns at every
//! block boundary of carry-skip, carry-select, lookahead and prefix adders), seeded random
//! pairs (a random walk: the first ones timed, all of them settled for the energy), then a
//! local search that flips single bits of the best pairs while the arrival grows. Because every figure comes from a timed evaluation of a real pair, a path through a
//! multiplexer input that is not selected when it would matter (the ripple through a bypassed
//! carry-skip block) cannot set the worst delay; the topological bound, which ignores that,
//! is reported beside it.

use super::engine::{self, Graph, Sim};
use super::Timing;
use crate::emit::vectors::{mask, Rng};
use crate::error::{Error, Result};
use crate::netlist::Design;
use crate::sim::Evaluator;
use crate::spec::Spec;
use serde::ser::SerializeMap;
use serde::{Serialize, Serializer};
use std::collections::HashSet;

/// One input vector.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub struct In {
    pub a: u128,
    pub b: u128,
    pub cin: bool,
}

/// A vector pair: settled on `before`, then `after` applied at t = 0 (dynamic style:
/// `after` applied in precharge, timed from clk↑).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub struct Pair {
    pub before: In,
    pub after: In,
}

/// How hard to search.
#[derive(Debug, Clone, Copy)]
pub struct Budget {
    /// Random pairs: the pairs energy is averaged over.
    pub random: usize,
    /// How many of them are timed (the first ones; the search also starts from them). The
    /// others are only settled: their zero-delay switching, scaled by the ratio of timed to
    /// zero-delay switching over the timed ones (glitches), gives the energy.
    pub timed: usize,
    /// Pairs the local search starts from.
    pub starts: usize,
    /// Single-bit flips tried from each start.
    pub flips: usize,
    pub seed: u64,
    /// Skip hard pairs whose inputs cannot reach an output within [`PRUNE_SLACK`] of the
    /// worst arrival found so far (by the topological reach, [`engine::bound_and_reach`]).
    pub prune: bool,
}

impl Default for Budget {
    fn default() -> Self {
        Budget {
            random: 64,
            // Against 1,024 timed pairs (GF180MCU typical, 8 to 64 bits, ripple, Kogge-Stone,
            // Sklansky, carry-skip, static and dynamic Manchester; 8 seeds each), 16 timed of
            // 64 put the energy within 1.8-6.1 % rms against 1.4-4.2 % for 64 timed, at 55-70 %
            // of the search's time on 64-bit designs.
            timed: 16,
            // Over 65 designs (every architecture and style, 8 to 32 bits) 2 starts of 32
            // flips found the same worst as 4 of 96 but in one (0.2 % lower), at 58 % of the
            // cost.
            starts: 2,
            flips: 32,
            seed: 1,
            prune: true,
        }
    }
}

/// What one timed pair produced.
#[derive(Debug, Clone)]
pub struct PairTime {
    /// Arrival (ps) of every output that changes value, by output index.
    pub outputs: Vec<Option<f64>>,
    /// Largest of them and its output.
    pub worst: Option<(f64, usize)>,
    /// Switched capacitance of the addition (fF), clock included in dynamic style.
    pub switched_ff: f64,
    /// What a zero-delay evaluation of the same addition switches (glitches left out), fF.
    pub settled_ff: f64,
}

/// Times vector pairs on one graph.
pub struct Timer<'g> {
    pub g: &'g Graph,
    sim: Sim<'g>,
    pub pairs_timed: usize,
}

impl<'g> Timer<'g> {
    pub fn new(g: &'g Graph) -> Result<Timer<'g>> {
        Ok(Timer {
            g,
            sim: Sim::new(g)?,
            pairs_timed: 0,
        })
    }

    /// Input node values for a vector (clk excluded).
    fn input_changes(&self, v: In) -> Vec<(u32, bool)> {
        let w = self.g.width;
        let mut out = vec![];
        let mut k = 0;
        for &x in &self.g.inputs {
            if Some(x) == self.g.clk {
                continue;
            }
            let bit = if k < w {
                v.a >> k & 1 == 1
            } else if k < 2 * w {
                v.b >> (k - w) & 1 == 1
            } else {
                v.cin
            };
            out.push((x, bit));
            k += 1;
        }
        out
    }

    /// Time one pair. Leaves the simulation's events in place for [`Timer::path`].
    pub fn time(&mut self, p: Pair) -> Result<PairTime> {
        let before = self.input_changes(p.before);
        if let Some(clk) = self.g.clk {
            // Evaluate `before` (precharge, then evaluate).
            let mut pre = before;
            pre.push((clk, false));
            self.sim.apply_untimed(&pre)?;
            self.sim.apply_untimed(&[(clk, true)])?;
        } else {
            self.sim.apply_untimed(&before)?;
        }
        self.time_next(p.after)
    }

    /// Time the pair from the vector the circuit holds now (the `after` of the last pair
    /// timed, or the state [`Timer::time`] settled) to `after`: a random walk times each step
    /// without settling its `before` again. Dynamic style: precharge with `after` applied,
    /// then time from clk↑ (the state before the precharge does not change the timing).
    pub fn time_next(&mut self, after: In) -> Result<PairTime> {
        self.pairs_timed += 1;
        let g = self.g;
        let after = self.input_changes(after);
        let start: Vec<bool>;
        let mut switched = 0.0;
        if let Some(clk) = g.clk {
            let mut pre2 = after;
            pre2.push((clk, false));
            switched += self.sim.apply_untimed(&pre2)?;
            start = self.output_values();
            self.sim.run_timed(&[(clk, true)])?;
            // The clock node charges and discharges once per addition.
            switched += 2.0 * g.cap_ff[clk as usize];
        } else {
            start = self.output_values();
            self.sim.run_timed(&after)?;
        }
        let settled = switched + self.sim.run_settled_ff();
        switched += self.sim.run_switched_ff();
        let mut outputs = vec![None; g.outputs.len()];
        let mut worst: Option<(f64, usize)> = None;
        for (i, &o) in g.outputs.iter().enumerate() {
            let e = self.sim.last[o as usize];
            if e == u32::MAX || self.sim.val[o as usize] == start[i] {
                continue;
            }
            let t = self.sim.events[e as usize].time_ps;
            outputs[i] = Some(t);
            if worst.is_none_or(|(w, _)| t > w) {
                worst = Some((t, i));
            }
        }
        Ok(PairTime {
            outputs,
            worst,
            switched_ff: switched,
            settled_ff: settled,
        })
    }

    /// Apply `after` from the vector the circuit holds now without timing it: what a
    /// zero-delay evaluation switches (fF; dynamic style: precharge with `after` applied, then
    /// evaluate, the clock included).
    pub fn settle_next(&mut self, after: In) -> Result<f64> {
        let g = self.g;
        let after = self.input_changes(after);
        Ok(if let Some(clk) = g.clk {
            let mut pre = after;
            pre.push((clk, false));
            self.sim.apply_untimed(&pre)?
                + self.sim.apply_untimed(&[(clk, true)])?
                + 2.0 * g.cap_ff[clk as usize]
        } else {
            self.sim.apply_untimed(&after)?
        })
    }

    /// The last transition of a node in the latest timed pair: (time ps, value).
    pub fn last_event(&self, x: u32) -> Option<(f64, bool)> {
        let e = self.sim.last[x as usize];
        (e != u32::MAX).then(|| {
            let ev = &self.sim.events[e as usize];
            (ev.time_ps, ev.value)
        })
    }

    /// Output values after the latest timed pair, in port order.
    pub fn output_values(&self) -> Vec<bool> {
        self.g
            .outputs
            .iter()
            .map(|&o| self.sim.val[o as usize])
            .collect()
    }

    /// The critical path of the latest timed pair into output `out`: from the input edge to
    /// the output, one step per node transition.
    pub fn path(&self, out: usize) -> Vec<PathStep> {
        let g = self.g;
        let mut steps = vec![];
        let mut e = self.sim.last[g.outputs[out] as usize];
        while e != u32::MAX {
            let ev = self.sim.events[e as usize];
            let prev_t = if ev.cause == u32::MAX {
                0.0
            } else {
                self.sim.events[ev.cause as usize].time_ps
            };
            let instance = if ev.dev == u32::MAX {
                "(input)".to_string()
            } else {
                g.leaf_paths[g.devs[ev.dev as usize].leaf as usize].clone()
            };
            steps.push(PathStep {
                instance,
                net: g.names[ev.node as usize].clone(),
                edge: if ev.value { "rise" } else { "fall" },
                arrival_ps: round1(ev.time_ps),
                stage_ps: round1(ev.time_ps - prev_t),
            });
            e = ev.cause;
        }
        steps.reverse();
        steps
    }
}

/// One transition on the critical path.
#[derive(Debug, Clone, Serialize)]
pub struct PathStep {
    /// The cell instance whose devices carried the charge.
    pub instance: String,
    pub net: String,
    pub edge: &'static str,
    pub arrival_ps: f64,
    /// This stage's share of the delay.
    pub stage_ps: f64,
}

fn round1(x: f64) -> f64 {
    (x * 10.0).round() / 10.0
}

/// A hard pair and the input bits (0..W a, W..2W b, 2W cin) it varies from its
/// every-bit-propagating base vector.
#[derive(Debug, Clone, Copy)]
pub struct Hard {
    pub pair: Pair,
    pub bits: [usize; 2],
}

/// The candidate pairs of the deterministic part of the search.
pub fn hard_pairs(width: usize) -> Vec<Pair> {
    hard_set(width).into_iter().map(|h| h.pair).collect()
}

fn hard_set(width: usize) -> Vec<Hard> {
    let m = mask(width);
    let alt = 0x5555_5555_5555_5555_5555_5555_5555_5555u128 & m;
    let cin_bit = 2 * width;
    let mut out = vec![];
    // Every bit propagating: a ⊕ b = 1.
    for a in [m, alt] {
        let b = !a & m;
        for cin in [false, true] {
            let before = In { a, b, cin };
            out.push(Hard {
                pair: Pair {
                    before,
                    after: In {
                        cin: !cin,
                        ..before
                    },
                },
                bits: [cin_bit, cin_bit],
            });
        }
        for i in 0..width {
            let bit = 1u128 << i;
            let both = [i, width + i];
            for cin in [false, true] {
                // a_i toggled (b_i at its value and at the other), b_i likewise, both edges.
                for (ta, tb) in [(true, false), (false, true)] {
                    for partner in [false, true] {
                        let mut before = In { a, b, cin };
                        if partner {
                            // flip the partner so the toggled bit goes kill ↔ propagate
                            // instead of propagate ↔ generate
                            if ta {
                                before.b ^= bit;
                            } else {
                                before.a ^= bit;
                            }
                        }
                        let mut after = before;
                        if ta {
                            after.a ^= bit;
                        }
                        if tb {
                            after.b ^= bit;
                        }
                        out.push(Hard {
                            pair: Pair { before, after },
                            bits: both,
                        });
                        out.push(Hard {
                            pair: Pair {
                                before: after,
                                after: before,
                            },
                            bits: both,
                        });
                    }
                }
                // Kill ↔ generate at bit i.
                let mut kill = In { a, b, cin };
                kill.a &= !bit;
                kill.b &= !bit;
                let gen = In {
                    a: kill.a | bit,
                    b: kill.b | bit,
                    cin,
                };
                out.push(Hard {
                    pair: Pair {
                        before: kill,
                        after: gen,
                    },
                    bits: both,
                });
                out.push(Hard {
                    pair: Pair {
                        before: gen,
                        after: kill,
                    },
                    bits: both,
                });
            }
        }
    }
    out
}

/// A hard pair is skipped when the topological reach of the inputs it varies, scaled by the
/// largest share of its reach any hard pair timed so far arrived at and raised by this slack,
/// is still below the worst arrival found so far. The reach is a bound of the same stage
/// delays that ignores sensitisation and takes every stage at its slowest tree, so it
/// overstates the timed arrival by a share that is much the same for every input of one design
/// (20–30 % in a 64-bit Kogge-Stone on GF180MCU); the pairs go in order of falling reach, so
/// the share is learnt on the inputs that matter most. The rule is a search heuristic, not a
/// bound: `tests/timing.rs` checks the pruned search against the one that times every hard
/// pair over every architecture and style. Replayed over the 11 architectures at (width,
/// block) (13, 2), (24, 3), (40, 8), (64, 6), (48, 2) and at 16, 32, 64 bits with block 4
/// (static Manchester buffered every two blocks, 20 fF) on generic, GF180MCU typical and
/// SKY130 tt, it found the worst of the full hard set in every design, timing 4,738 of its
/// 83,380 pairs on GF180MCU where the reach alone (share 1) needed 42,652.
pub const PRUNE_SLACK: f64 = 0.02;

/// Hard pairs always timed before the pruning starts (the two cin pairs first, then those of
/// highest reach), so the share is learnt on more than one pair.
pub const PRUNE_AFTER: usize = 8;

fn random_in(rng: &mut Rng, width: usize) -> In {
    let m = mask(width);
    In {
        a: rng.next_u128() & m,
        b: rng.next_u128() & m,
        cin: rng.next_u64() & 1 == 1,
    }
}

fn flip(v: In, k: usize, width: usize) -> In {
    let mut v = v;
    if k < width {
        v.a ^= 1 << k;
    } else if k < 2 * width {
        v.b ^= 1 << (k - width);
    } else {
        v.cin = !v.cin;
    }
    v
}

/// Result of the search.
pub struct Worst {
    pub pair: Pair,
    pub ps: f64,
    pub output: usize,
    pub path: Vec<PathStep>,
    /// Worst arrival seen at every output over all timed pairs.
    pub profile: Vec<Option<f64>>,
    /// cin → cout with every bit propagating, both edges (ps).
    pub cin_cout_ps: Option<f64>,
    /// Mean switched capacitance over the random pairs, fF.
    pub switched_ff: f64,
    pub pairs_timed: usize,
    /// The topological bound ([`engine::topological_bound`]), ps.
    pub bound_ps: f64,
}

/// Search for the worst pair.
pub fn search(g: &Graph, budget: Budget) -> Result<Worst> {
    let mut t = Timer::new(g)?;
    let w = g.width;
    let nout = g.outputs.len();
    let cout = nout - 1;
    let mut profile: Vec<Option<f64>> = vec![None; nout];
    let mut scored: Vec<(f64, Pair)> = vec![];
    let mut cin_cout: Option<f64> = None;
    let mut record = |pt: &PairTime, p: Pair, scored: &mut Vec<(f64, Pair)>| {
        for (i, o) in pt.outputs.iter().enumerate() {
            if let Some(x) = o {
                if profile[i].is_none_or(|y| *x > y) {
                    profile[i] = Some(*x);
                }
            }
        }
        if let Some((x, _)) = pt.worst {
            scored.push((x, p));
        }
    };
    // Pairs already timed. In dynamic style every node is precharged before clk↑, so the
    // timing depends on `after` alone: pairs with the same `after` are timed once.
    let dynamic = g.clk.is_some();
    let key = |p: &Pair| -> Pair {
        if dynamic {
            Pair {
                before: p.after,
                after: p.after,
            }
        } else {
            *p
        }
    };
    let mut seen: HashSet<Pair> = HashSet::new();
    let mut hard = hard_set(w);
    // Reach of every input bit (a, b, cin order; clk left out).
    let (bound_ps, all_reach) = engine::bound_and_reach(g)?;
    let reach: Vec<f64> = g
        .inputs
        .iter()
        .zip(all_reach)
        .filter(|(&x, _)| Some(x) != g.clk)
        .map(|(_, r)| r)
        .collect();
    let reach_of = |h: &Hard| reach[h.bits[0]].max(reach[h.bits[1]]);
    // The first two pairs (cin toggled with every bit propagating, a all ones) stay first;
    // the others go in order of falling reach, so the pruning can stop early.
    hard[2..].sort_by(|x, y| reach_of(y).total_cmp(&reach_of(x)));
    let mut best = 0.0f64;
    // The largest share of its reach a timed hard pair has reached so far.
    let mut share = 0.0f64;
    for (k, h) in hard.iter().enumerate() {
        let p = &h.pair;
        // Dynamic style times every pair from clk↑, which the reach of the data inputs does
        // not bound: no pruning there.
        if budget.prune
            && !dynamic
            && k >= PRUNE_AFTER
            && reach_of(h) * share * (1.0 + PRUNE_SLACK) < best
        {
            break;
        }
        if !seen.insert(key(p)) {
            continue;
        }
        // Dynamic style: only `after` matters, the state before the precharge is left as is.
        let pt = if dynamic {
            t.time_next(p.after)?
        } else {
            t.time(*p)?
        };
        if k < 2 {
            if let Some(x) = pt.outputs[cout] {
                cin_cout = Some(cin_cout.map_or(x, |y: f64| y.max(x)));
            }
        }
        if let Some((x, _)) = pt.worst {
            best = best.max(x);
            let r = reach_of(h);
            if r > 0.0 {
                share = share.max(x / r);
            }
        }
        record(&pt, *p, &mut scored);
    }
    let mut rng = Rng::new(budget.seed ^ 0x7469_6d69_6e67);
    // Energy: switched capacitance over the random pairs. Glitches are counted on the timed
    // ones; the others are settled at zero delay and scaled by the timed pairs' ratio of all
    // transitions to settled ones (a ratio estimator, Cochran, Sampling Techniques, ch. 6).
    let (mut timed_ff, mut timed_settled, mut settled) = (0.0, 0.0, 0.0);
    // A random walk: each pair starts from the last one's `after`, so only the first is
    // settled from scratch.
    let mut prev = random_in(&mut rng, w);
    for k in 0..budget.random {
        let p = Pair {
            before: prev,
            after: random_in(&mut rng, w),
        };
        if k < budget.timed.max(1) {
            let pt = if k == 0 {
                t.time(p)?
            } else {
                t.time_next(p.after)?
            };
            timed_ff += pt.switched_ff;
            timed_settled += pt.settled_ff;
            settled += pt.settled_ff;
            record(&pt, p, &mut scored);
        } else {
            settled += t.settle_next(p.after)?;
        }
        prev = p.after;
    }
    let switched_ff = if budget.random == 0 {
        0.0
    } else if timed_settled > 0.0 {
        settled * (timed_ff / timed_settled) / budget.random as f64
    } else {
        timed_ff / budget.random.min(budget.timed.max(1)) as f64
    };
    // Best pairs first; ties broken by the pair's order of discovery (stable sort).
    scored.sort_by(|x, y| y.0.total_cmp(&x.0));
    let mut starts: Vec<(f64, Pair)> = vec![];
    for s in &scored {
        if starts.len() >= budget.starts {
            break;
        }
        if !starts.iter().any(|x| x.1 == s.1) {
            starts.push(*s);
        }
    }
    let nbits = 2 * w + 1;
    for st in starts.iter_mut() {
        for _ in 0..budget.flips {
            // Dynamic style: only `after` matters.
            let k = (rng.next_u64() % (2 * nbits) as u64) as usize;
            let k = if dynamic { nbits + k % nbits } else { k };
            let mut p = st.1;
            if k < nbits {
                p.before = flip(p.before, k, w);
            } else {
                p.after = flip(p.after, k - nbits, w);
            }
            if (p.before == p.after && !dynamic) || !seen.insert(key(&p)) {
                continue;
            }
            let pt = if dynamic {
                t.time_next(p.after)?
            } else {
                t.time(p)?
            };
            record(&pt, p, &mut scored);
            if let Some((x, _)) = pt.worst {
                if x > st.0 {
                    *st = (x, p);
                }
            }
        }
    }
    let best = scored
        .iter()
        .fold(None::<(f64, Pair)>, |acc, s| match acc {
            Some(a) if a.0 >= s.0 => Some(a),
            _ => Some(*s),
        })
        .ok_or_else(|| Error::Check("timing: no vector pair changed any output".into()))?;
    let pt = t.time(best.1)?;
    let (ps, output) = pt.worst.expect("the best pair changes an output");
    let path = t.path(output);
    Ok(Worst {
        pair: best.1,
        ps,
        output,
        path,
        profile,
        cin_cout_ps: cin_cout,
        switched_ff,
        pairs_timed: t.pairs_timed,
        bound_ps,
    })
}

/// Does the pair change this output, by the bit-parallel evaluator of the logic view?
/// Static: the output differs between `before` and `after`. Dynamic: it differs between
/// precharge and evaluate of `after`.
pub fn pair_changes_output(design: &Design, p: Pair, out: usize) -> Result<bool> {
    let mut ev = Evaluator::new(design)?;
    let w = ev.width;
    let dynamic = ev.dynamic;
    // Word bit 0: the first state, bit 1: the second.
    let (v0, v1, c0, c1) = if dynamic {
        (p.after, p.after, false, true)
    } else {
        (p.before, p.after, false, false)
    };
    let mut words = vec![];
    if dynamic {
        words.push((c0 as u64) | (c1 as u64) << 1);
    }
    let bit = |x: bool, y: bool| (x as u64) | (y as u64) << 1;
    for i in 0..w {
        words.push(bit(v0.a >> i & 1 == 1, v1.a >> i & 1 == 1));
    }
    for i in 0..w {
        words.push(bit(v0.b >> i & 1 == 1, v1.b >> i & 1 == 1));
    }
    words.push(bit(v0.cin, v1.cin));
    let mut outs = vec![0u64; w + 1];
    ev.eval(&words, &mut outs);
    Ok((outs[out] & 1) != (outs[out] >> 1 & 1))
}

/// Output delays in port order, printed as a JSON object.
#[derive(Debug, Clone)]
pub struct Profile(pub Vec<(String, Option<f64>)>);

impl Serialize for Profile {
    fn serialize<S: Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        let mut m = s.serialize_map(Some(self.0.len()))?;
        for (k, v) in &self.0 {
            m.serialize_entry(k, v)?;
        }
        m.end()
    }
}

/// A vector in the report: hex words, as the testbenches print them.
#[derive(Debug, Clone, Serialize)]
pub struct VectorText {
    pub a: String,
    pub b: String,
    pub cin: u8,
}

fn vtext(v: In, width: usize) -> VectorText {
    let digits = width.div_ceil(4);
    VectorText {
        a: format!("0x{:0digits$x}", v.a),
        b: format!("0x{:0digits$x}", v.b),
        cin: v.cin as u8,
    }
}

#[derive(Debug, Clone, Serialize)]
pub struct WorstVectors {
    pub before: VectorText,
    pub after: VectorText,
    /// Inputs that differ between the two vectors.
    pub toggling: Vec<String>,
    /// The input edge the worst path starts from (`clk` in dynamic style).
    pub from: String,
    /// `rise` or `fall`.
    pub from_edge: &'static str,
    pub to: String,
    pub to_edge: &'static str,
    /// The bit-parallel evaluator agrees that the pair changes that output.
    pub checked: bool,
}

/// Everything `carrywright estimate` prints.
#[derive(Debug, Clone, Serialize)]
pub struct Estimate {
    /// The worst pair itself (also printed in `worst_vectors`).
    #[serde(skip)]
    pub pair: Pair,
    pub name: String,
    pub conditions: String,
    pub load_ff: f64,
    pub worst_ps: f64,
    pub worst_path: Vec<PathStep>,
    pub worst_vectors: WorstVectors,
    pub cin_cout_ps: Option<f64>,
    /// Topological bound: the longest stage path, ignoring sensitisation.
    pub bound_ps: f64,
    pub outputs_ps: Profile,
    pub transistors: usize,
    pub gate_area_um2: f64,
    pub total_width_um: f64,
    pub input_cap_ff: Profile,
    pub energy_fj: f64,
    pub stages: usize,
    pub pairs_timed: usize,
}

/// Estimate a design with the given timing parameters and search budget.
pub fn estimate_with(
    spec: &Spec,
    design: &Design,
    tm: &Timing,
    budget: Budget,
) -> Result<Estimate> {
    let g = Graph::new(spec, design, tm)?;
    let worst = search(&g, budget)?;
    let bound = worst.bound_ps;
    let (transistors, area, width) = engine::device_totals(&g);
    let out_names: Vec<String> = g
        .outputs
        .iter()
        .map(|&o| g.names[o as usize].clone())
        .collect();
    let in_names: Vec<String> = g
        .inputs
        .iter()
        .map(|&i| g.names[i as usize].clone())
        .collect();
    let checked = pair_changes_output(design, worst.pair, worst.output)?;
    if !checked {
        return Err(Error::Check(format!(
            "timing: the worst pair does not change {} in the logic view (engine and logic disagree)",
            out_names[worst.output]
        )));
    }
    let mut toggling = vec![];
    let a = worst.pair.after;
    // Dynamic style: the pair is `after` precharged, then evaluated from clk↑; the vector
    // before the precharge does not enter the timing, so it is shown as `after` itself.
    let b = if g.clk.is_some() {
        toggling.push("clk".to_string());
        a
    } else {
        worst.pair.before
    };
    for i in 0..spec.width {
        if (a.a ^ b.a) >> i & 1 == 1 {
            toggling.push(format!("a{i}"));
        }
    }
    for i in 0..spec.width {
        if (a.b ^ b.b) >> i & 1 == 1 {
            toggling.push(format!("b{i}"));
        }
    }
    if a.cin != b.cin {
        toggling.push("cin".into());
    }
    let (from, from_edge) = worst
        .path
        .first()
        .map(|s| (s.net.clone(), s.edge))
        .unwrap_or_default();
    let to_edge = worst.path.last().map(|s| s.edge).unwrap_or_default();
    let vdd = g.vdd_v;
    let t = &spec.technology;
    Ok(Estimate {
        pair: worst.pair,
        name: spec.name.clone(),
        conditions: format!(
            "{}, corner {}, {} degC, {} V{}",
            t.name,
            t.corner,
            crate::spec::trim_num(t.temp),
            vdd,
            tm.at.note()
        ),
        load_ff: round1(spec.testbench.load * 1e15),
        worst_ps: round1(worst.ps),
        worst_path: worst.path,
        worst_vectors: WorstVectors {
            before: vtext(b, spec.width),
            after: vtext(a, spec.width),
            toggling,
            from,
            from_edge,
            to: out_names[worst.output].clone(),
            to_edge,
            checked,
        },
        cin_cout_ps: worst.cin_cout_ps.map(round1),
        bound_ps: round1(bound),
        outputs_ps: Profile(
            out_names
                .iter()
                .cloned()
                .zip(worst.profile.iter().map(|x| x.map(round1)))
                .collect(),
        ),
        transistors,
        gate_area_um2: round1(area * 10.0) / 10.0,
        total_width_um: round1(width),
        input_cap_ff: Profile(
            in_names
                .iter()
                .zip(&g.inputs)
                .map(|(n, &x)| (n.clone(), Some(round1(g.cap_ff[x as usize] * 10.0) / 10.0)))
                .collect(),
        ),
        // ½·C·VDD² per transition: fF × V² = fJ.
        energy_fj: round1(0.5 * worst.switched_ff * vdd * vdd),
        stages: g.stages.len(),
        pairs_timed: worst.pairs_timed,
    })
}

/// Estimate with the technology's characterised timing and the default search.
pub fn estimate(spec: &Spec, design: &Design) -> Result<Estimate> {
    let tm = super::engine::timing_of(spec)?;
    let budget = Budget {
        seed: spec.testbench.seed,
        ..Budget::default()
    };
    estimate_with(spec, design, &tm, budget)
}

/// The estimate as `carrywright estimate` prints it: a table, or one JSON object.
pub fn render(e: &Estimate, json: bool) -> String {
    use std::fmt::Write as _;
    if json {
        return serde_json::to_string_pretty(e).expect("an estimate serialises") + "\n";
    }
    let mut o = String::new();
    let v = &e.worst_vectors;
    let _ = writeln!(
        o,
        "{}: timing estimate at {}, {} fF loads",
        e.name, e.conditions, e.load_ff
    );
    let _ = writeln!(
        o,
        "  worst path       {:>9.1} ps   {} -> {} (real: a vector pair produces it)",
        e.worst_ps, v.from, v.to
    );
    let _ = writeln!(
        o,
        "    pair           before a={} b={} cin={}  after a={} b={} cin={}",
        v.before.a, v.before.b, v.before.cin, v.after.a, v.after.b, v.after.cin
    );
    let _ = writeln!(
        o,
        "    toggling       {}   (logic view agrees the pair changes {})",
        v.toggling.join(" "),
        v.to
    );
    for s in &e.worst_path {
        let _ = writeln!(
            o,
            "    {:>9.1} ps  +{:>7.1}  {:<6} {:<24} {}",
            s.arrival_ps, s.stage_ps, s.edge, s.net, s.instance
        );
    }
    match e.cin_cout_ps {
        Some(x) => {
            let _ = writeln!(o, "  cin -> cout      {x:>9.1} ps   every bit propagating");
        }
        None => {
            let _ = writeln!(o, "  cin -> cout      {:>9}      no change", "-");
        }
    }
    let _ = writeln!(
        o,
        "  bound            {:>9.1} ps   topological: longest stage path, ignoring sensitisation",
        e.bound_ps
    );
    let _ = writeln!(
        o,
        "  delay to each output (worst seen over {} pairs):",
        e.pairs_timed
    );
    let mut line = String::from("   ");
    for (k, x) in &e.outputs_ps.0 {
        let cell = match x {
            Some(x) => format!(" {k} {x:.0}"),
            None => format!(" {k} -"),
        };
        if line.len() + cell.len() > 92 {
            let _ = writeln!(o, "{line}");
            line = String::from("   ");
        }
        line.push_str(&cell);
    }
    let _ = writeln!(o, "{line}");
    let _ = writeln!(o, "  transistors      {:>9}", e.transistors);
    let _ = writeln!(
        o,
        "  gate area        {:>9.1} um2  (sum of W*L)",
        e.gate_area_um2
    );
    let _ = writeln!(o, "  total width      {:>9.1} um", e.total_width_um);
    let _ = writeln!(
        o,
        "  energy           {:>9.1} fJ   per addition, 50 % random activity",
        e.energy_fj
    );
    let mut caps: Vec<String> = vec![];
    let mut seen: Vec<(f64, Vec<String>)> = vec![];
    for (k, x) in &e.input_cap_ff.0 {
        let x = x.unwrap_or(0.0);
        match seen.iter_mut().find(|(c, _)| (*c - x).abs() < 1e-9) {
            Some((_, names)) => names.push(k.clone()),
            None => seen.push((x, vec![k.clone()])),
        }
    }
    for (c, names) in seen {
        let who = if names.len() > 3 {
            format!(
                "{} .. {} ({} inputs)",
                names[0],
                names[names.len() - 1],
                names.len()
            )
        } else {
            names.join(" ")
        };
        caps.push(format!("{c:.1} fF: {who}"));
    }
    let _ = writeln!(o, "  input cap        {}", caps.join("; "));
    o
}
