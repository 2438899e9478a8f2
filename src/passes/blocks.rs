//! `block: auto` for carry-skip and carry-select: block sizes chosen by dynamic programming
//! over a block model measured with the timing engine.
//!
//! Both adders are a row of blocks; the carry reaches block j's carry-in either from a
//! generate inside an earlier block or by passing blocks (skipping them, or steering their
//! multiplexers). A block of k bits is described by four arrivals, all from the timing
//! engine on full-width designs built with blocks of that size (so the cells, loads and
//! slopes are the real ones):
//!
//! - `carry_gen`: its carry-out after its lowest bit starts (generate) or stops (kill) a
//!   carry while the other bits propagate and its carry-in holds (from the input edge, or
//!   from clk↑ in dynamic style);
//! - `sum_gen`: its top sum bit on the same pairs;
//! - `carry_ci`, `sum_ci`: its carry-out and top sum after its carry-in, every bit
//!   propagating (arrival minus the carry-in's arrival).
//!
//! The first block (its carry-in is cin), the last (its carry-out is cout, with the spec's
//! load) and a whole-word block have tables of their own. Then, with `a` the worst arrival at
//! a block's carry-in and `t` the worst arrival so far at any output,
//!
//! ```text
//! a' = max(a + carry_ci(k), carry_gen(k)),   t' = max(t, a + sum_ci(k), sum_gen(k))
//! ```
//!
//! (and cout's a' at the last block), which is the single-level carry-skip model of
//! Oklobdzija & Barnes (ARITH-7, 1985) and Guyot, Hochet & Muller (IEEE Trans. Computers
//! C-36(10), 1987) and the carry-select one (Rabaey et al., ch. 11), with the engine's
//! figures in place of unit delays. The dynamic programme over the bit position keeps, at
//! every position, the states no other state beats in both `a` and `t`, which makes it exact
//! for the model: `tests/passes.rs` checks it against every composition of small widths.
//! In dynamic carry-skip no block may be longer than the keeper check lets through.

use crate::error::Result;
use crate::spec::{Architecture, AutoBlocks, Spec, Style};
use crate::timing::engine::Graph;
use crate::timing::search::{In, Pair, Timer};

/// The four arrivals of a block (ps), see the module notes.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Block {
    pub carry_gen: f64,
    pub sum_gen: f64,
    pub carry_ci: f64,
    pub sum_ci: f64,
}

/// Where a block sits in the word.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Place {
    First,
    Middle,
    Last,
    /// One block over the whole word.
    Only,
}

/// The block tables: index k − 1 is a block of k bits; None where it was not measured.
#[derive(Debug, Clone)]
pub struct Costs {
    pub width: usize,
    pub first: Vec<Option<Block>>,
    pub middle: Vec<Option<Block>>,
    pub last: Vec<Option<Block>>,
    pub only: Option<Block>,
}

impl Costs {
    pub fn get(&self, place: Place, k: usize) -> Option<Block> {
        match place {
            Place::Only => self.only.filter(|_| k == self.width),
            Place::First => self.first.get(k - 1).copied().flatten(),
            Place::Middle => self.middle.get(k - 1).copied().flatten(),
            Place::Last => self.last.get(k - 1).copied().flatten(),
        }
    }

    /// The largest block measured.
    pub fn max_block(&self) -> usize {
        self.first.len()
    }
}

fn place(lo: usize, hi: usize, width: usize) -> Place {
    match (lo == 0, hi == width) {
        (true, true) => Place::Only,
        (true, false) => Place::First,
        (false, true) => Place::Last,
        (false, false) => Place::Middle,
    }
}

/// One block of the model: (a, t) → (a', t').
pub fn step(b: Block, p: Place, a: f64, t: f64) -> (f64, f64) {
    let a2 = (a + b.carry_ci).max(b.carry_gen);
    let mut t2 = t.max(a + b.sum_ci).max(b.sum_gen);
    if matches!(p, Place::Last | Place::Only) {
        t2 = t2.max(a2);
    }
    (a2, t2)
}

/// The model's worst arrival (ps) for these block sizes; None if a block is not in the
/// tables.
pub fn model_worst(c: &Costs, sizes: &[usize]) -> Option<f64> {
    let (mut a, mut t) = (0.0, 0.0);
    for (lo, hi) in crate::spec::ranges_of(sizes) {
        let p = place(lo, hi, c.width);
        (a, t) = step(c.get(p, hi - lo)?, p, a, t);
    }
    Some(t)
}

/// The block sizes (no block longer than `max_k`) with the least worst arrival in the model,
/// fewest blocks on a tie; and that arrival.
pub fn best_sizes(c: &Costs, max_k: usize) -> Option<(Vec<usize>, f64)> {
    struct Node {
        a: f64,
        t: f64,
        k: usize,
        blocks: usize,
        parent: usize,
    }
    let w = c.width;
    let max_k = max_k.min(c.max_block()).min(w);
    let mut nodes = vec![Node {
        a: 0.0,
        t: 0.0,
        k: 0,
        blocks: 0,
        parent: usize::MAX,
    }];
    let mut at: Vec<Vec<usize>> = vec![vec![]; w + 1];
    at[0].push(0);
    for p in 0..w {
        // The states at p that no other state at p beats in both the carry's arrival and
        // the worst output so far (fewer blocks breaks ties).
        let mut here = std::mem::take(&mut at[p]);
        here.sort_by(|&x, &y| {
            let (x, y) = (&nodes[x], &nodes[y]);
            x.a.total_cmp(&y.a)
                .then(x.t.total_cmp(&y.t))
                .then(x.blocks.cmp(&y.blocks))
        });
        let mut front = vec![];
        let mut best_t = f64::INFINITY;
        for id in here {
            if nodes[id].t < best_t {
                best_t = nodes[id].t;
                front.push(id);
            }
        }
        for &id in &front {
            for k in 1..=max_k.min(w - p) {
                let pl = place(p, p + k, w);
                let Some(b) = c.get(pl, k) else { continue };
                let (a, t) = step(b, pl, nodes[id].a, nodes[id].t);
                if !(a.is_finite() && t.is_finite()) {
                    continue;
                }
                let blocks = nodes[id].blocks + 1;
                nodes.push(Node {
                    a,
                    t,
                    k,
                    blocks,
                    parent: id,
                });
                at[p + k].push(nodes.len() - 1);
            }
        }
        at[p] = front;
    }
    let end = at[w].iter().copied().min_by(|&x, &y| {
        let (x, y) = (&nodes[x], &nodes[y]);
        // Within 0.1 ps, fewer blocks.
        if (x.t - y.t).abs() <= 0.1 {
            x.blocks.cmp(&y.blocks).then(x.t.total_cmp(&y.t))
        } else {
            x.t.total_cmp(&y.t)
        }
    })?;
    let t = nodes[end].t;
    let mut sizes = vec![];
    let mut id = end;
    while nodes[id].parent != usize::MAX {
        sizes.push(nodes[id].k);
        id = nodes[id].parent;
    }
    sizes.reverse();
    Some((sizes, t))
}

/// Uniform blocks of k bits, the last one shorter when k does not divide the width.
pub fn uniform(width: usize, k: usize) -> Vec<usize> {
    crate::arch::manchester::blocks(width, k)
        .iter()
        .map(|(l, h)| h - l)
        .collect()
}

/// The node of a net by its flat name.
fn node(g: &Graph, name: &str) -> Option<u32> {
    g.names.iter().position(|n| n == name).map(|x| x as u32)
}

/// The arrivals one design's timed pairs give for its blocks at `which` (block indices).
fn measure(spec: &Spec, sizes: &[usize], which: &[usize]) -> Result<Vec<Option<Block>>> {
    let mut s = spec.clone();
    s.block = sizes.iter().copied().max().unwrap_or(1);
    s.block_sizes = Some(sizes.to_vec());
    let d = crate::arch::build(&s);
    let tm = crate::timing::engine::timing_of(&s)?;
    let g = Graph::new(&s, &d, &tm)?;
    let mut timer = Timer::new(&g)?;
    let w = s.width;
    let m = crate::emit::vectors::mask(w);
    let ranges = crate::spec::ranges_of(sizes);
    let carry_net = |p: usize| -> Option<u32> {
        match p {
            0 => node(&g, "cin"),
            p if p == w => node(&g, "cout"),
            p => node(&g, &format!("c{p}")),
        }
    };
    let sum_net = |i: usize| g.outputs.get(i).copied();
    // The later of the pairs' last transitions at x (0 where x never moves: an input held
    // or set before clk↑).
    let mut latest = |pairs: &[Pair], xs: &[Option<u32>]| -> Result<Vec<Option<f64>>> {
        let mut out: Vec<Option<f64>> = vec![None; xs.len()];
        for &p in pairs {
            timer.time(p)?;
            for (o, x) in out.iter_mut().zip(xs) {
                let Some(x) = *x else { continue };
                if let Some((ps, _)) = timer.last_event(x) {
                    *o = Some(o.map_or(ps, |v: f64| v.max(ps)));
                }
            }
        }
        Ok(out)
    };
    // Every bit propagating, cin rising and falling (dynamic: cin = 1 from clk↑).
    let prop = In {
        a: m,
        b: 0,
        cin: false,
    };
    let ci_pairs: Vec<Pair> = if s.style == Style::Dynamic {
        let after = In { cin: true, ..prop };
        vec![Pair {
            before: after,
            after,
        }]
    } else {
        let hi = In { cin: true, ..prop };
        vec![
            Pair {
                before: prop,
                after: hi,
            },
            Pair {
                before: hi,
                after: prop,
            },
        ]
    };
    let mut nets = vec![];
    for &j in which {
        let (lo, hi) = ranges[j];
        nets.extend([carry_net(lo), carry_net(hi), sum_net(hi - 1)]);
    }
    let along = latest(&ci_pairs, &nets)?;
    let mut out = vec![];
    for (n, &j) in which.iter().enumerate() {
        let (lo, hi) = ranges[j];
        let below = crate::emit::vectors::mask(lo);
        let bits = crate::emit::vectors::mask(hi) & !below;
        // Carry-in 0 (everything below kills), the block propagating; its lowest bit then
        // generates. Carry-in 1 (everything below generates); its lowest bit then kills.
        let zero = In {
            a: bits,
            b: 0,
            cin: false,
        };
        let gen = In { b: 1 << lo, ..zero };
        let one = In {
            a: bits | below,
            b: below,
            cin: true,
        };
        let kill = In {
            a: one.a & !(1 << lo),
            ..one
        };
        let pairs: Vec<Pair> = if s.style == Style::Dynamic {
            vec![Pair {
                before: gen,
                after: gen,
            }]
        } else {
            vec![
                Pair {
                    before: zero,
                    after: gen,
                },
                Pair {
                    before: one,
                    after: kill,
                },
            ]
        };
        let gen_at = latest(&pairs, &[carry_net(hi), sum_net(hi - 1)])?;
        let ci_at = if lo == 0 { Some(0.0) } else { along[3 * n] };
        let b = match (
            gen_at[0],
            gen_at[1],
            ci_at,
            along[3 * n + 1],
            along[3 * n + 2],
        ) {
            (Some(cg), Some(sg), Some(ci), Some(co), Some(st)) => Some(Block {
                carry_gen: cg,
                sum_gen: sg,
                carry_ci: co - ci,
                sum_ci: st - ci,
            }),
            _ => None,
        };
        out.push(b);
    }
    Ok(out)
}

/// The largest block the tables cover for a width: about 2·√width (the square-root and
/// variable-block optima stay well below it), at least 4.
pub fn max_block(width: usize) -> usize {
    ((2.0 * (width as f64).sqrt()).ceil() as usize)
        .max(4)
        .min(width)
}

/// The engine's block tables for this spec (its width, architecture, style, sizing,
/// technology), for blocks of 1 to `max_k` bits.
pub fn costs(spec: &Spec, max_k: usize) -> Result<Costs> {
    let w = spec.width;
    let max_k = max_k.min(w);
    let mut c = Costs {
        width: w,
        first: vec![None; max_k],
        middle: vec![None; max_k],
        last: vec![None; max_k],
        only: None,
    };
    for k in 1..=max_k {
        if k == w {
            c.only = measure(spec, &[w], &[0])?[0];
            continue;
        }
        // Uniform from the bottom: the first block, and the second when it is not the last.
        let up = uniform(w, k);
        let mut which = vec![0];
        if up.len() > 2 {
            which.push(1);
        }
        let got = measure(spec, &up, &which)?;
        c.first[k - 1] = got[0];
        c.middle[k - 1] = got.get(1).copied().flatten();
        // The remainder first, so the last block has k bits.
        let mut down = up.clone();
        down.reverse();
        let n = down.len();
        let mut which = vec![n - 1];
        if c.middle[k - 1].is_none() && n > 2 {
            which.push(1);
        }
        let got = measure(spec, &down, &which)?;
        c.last[k - 1] = got[0];
        if let Some(b) = got.get(1).copied().flatten() {
            c.middle[k - 1] = Some(b);
        }
    }
    Ok(c)
}

fn round1(x: f64) -> f64 {
    (x * 10.0).round() / 10.0
}

/// Choose the sizes for `block: auto` (the spec's other keys resolved). `Err` is a one-line
/// reason for the `block` key.
pub fn choose(spec: &Spec) -> std::result::Result<(Vec<usize>, AutoBlocks), String> {
    if spec.technology.timing.is_none() {
        return Err(format!(
            "`auto` needs the timing engine, and {}",
            crate::timing::engine::no_timing(spec)
        ));
    }
    let w = spec.width;
    let mut max_k = max_block(w);
    let mut longest = None;
    if spec.architecture == Architecture::CarrySkip
        && spec.style == Style::Dynamic
        && spec.sizing.keeper > 0.0
    {
        let l = crate::timing::keeper::longest_passing_chain(spec, max_k)
            .map_err(|e| format!("`auto` could not run the keeper check: {e}"))?;
        if l == 0 {
            return Err("no block passes the keeper check; lower sizing.keeper".into());
        }
        if l < max_k {
            longest = Some(l);
        }
        max_k = l;
    }
    let c = costs(spec, max_k).map_err(|e| format!("`auto` could not time the blocks: {e}"))?;
    let Some((sizes, ps)) = best_sizes(&c, max_k) else {
        return Err("`auto` found no block sizes the timing engine could time".into());
    };
    let (ub, ups) = (1..=max_k)
        .filter_map(|k| model_worst(&c, &uniform(w, k)).map(|t| (k, t)))
        .min_by(|x, y| x.1.total_cmp(&y.1))
        .unwrap_or((max_k, f64::NAN));
    Ok((
        sizes,
        AutoBlocks {
            rule: match spec.architecture {
                Architecture::CarrySelect => "auto: carry-select blocks by dynamic programming on the timing engine's block delays",
                _ => "auto: variable carry-skip blocks by dynamic programming on the timing engine's block delays",
            },
            worst_ps: round1(ps),
            best_uniform_block: ub,
            best_uniform_ps: round1(ups),
            longest_block: longest,
        },
    ))
}
