//! `buffers: auto` for Manchester chains: restoring-buffer positions chosen by dynamic
//! programming over the timing engine's model.
//!
//! The word's block boundaries are the candidate positions. A segment is the chain from one
//! buffer's input (or cin) to the next buffer's input (or cout); its cost, from the engine, is
//! the arrival at its end minus the arrival at its start with every bit propagating (static:
//! the later of cin rising and falling; dynamic: from clk↑ with cin = 1), measured on the
//! full-width design with buffers exactly at the segment's two ends, so the buffer at its
//! start, the slope it passes on, and the load at its end are the real ones. Segments differ
//! only by length and by whether they start at cin or end at cout, so there are three cost
//! tables of at most width / block lengths each. Then best\[j\] = min over i < j of best\[i\] +
//! cost(i, j) (fewer buffers on a tie) gives the positions that minimise the carry's arrival
//! at cout in the model. In dynamic style a segment may not be longer than the keeper check
//! lets through (`timing::keeper::longest_passing_chain`).
//!
//! For a uniform chain whose segment cost is a·L² + c (an RC ladder and a buffer: a =
//! 0.345·R·C, c = t_buf), the optimum spacing is L = √(c / a) (Rabaey et al. §6.2.3):
//! `tests/passes.rs` checks the DP against it on the engine's own costs.

use crate::error::{Error, Result};
use crate::spec::{AutoBuffers, AutoFanout, Spec, Style};
use crate::timing::engine::Graph;
use crate::timing::search::{In, Pair, Timer};

/// The three cost tables: index k is a segment of (k + 1) × block bits (ps); None where that
/// segment cannot be built.
#[derive(Debug, Clone)]
pub struct Costs {
    pub block: usize,
    /// From cin to the first buffer's input.
    pub first: Vec<Option<f64>>,
    /// From a buffer's input to the next buffer's input.
    pub middle: Vec<Option<f64>>,
    /// From the last buffer's input to cout.
    pub last: Vec<Option<f64>>,
    /// No buffer: cin to cout (the whole word).
    pub only: f64,
}

/// Arrival (ps) of every node over the propagating pairs: static, the later of cin rising
/// and falling with a = all ones, b = 0; dynamic, from clk↑ with cin = 1.
fn arrivals(g: &Graph) -> Result<Vec<f64>> {
    let mut t = Timer::new(g)?;
    let m = crate::emit::vectors::mask(g.width);
    let mut arr = vec![f64::NAN; g.n_nodes()];
    let ins: Vec<(In, In)> = if g.clk.is_some() {
        let all = In {
            a: m,
            b: 0,
            cin: true,
        };
        vec![(all, all)]
    } else {
        let lo = In {
            a: m,
            b: 0,
            cin: false,
        };
        let hi = In { cin: true, ..lo };
        vec![(lo, hi), (hi, lo)]
    };
    for (before, after) in ins {
        t.time(Pair { before, after })?;
        for (x, a) in arr.iter_mut().enumerate() {
            if let Some((ps, _)) = t.last_event(x as u32) {
                if a.is_nan() || ps > *a {
                    *a = ps;
                }
            }
        }
    }
    Ok(arr)
}

/// The node a leaf reads as its input (the gate no device of the same leaf drives).
fn leaf_input(g: &Graph, leaf: &str) -> Option<u32> {
    let li = g.leaf_paths.iter().position(|p| p == leaf)? as u32;
    let devs: Vec<_> = g.devs.iter().filter(|d| d.leaf == li).collect();
    let driven: Vec<u32> = devs.iter().flat_map(|d| [d.a, d.b]).collect();
    devs.iter().map(|d| d.g).find(|x| !driven.contains(x))
}

/// Timed arrivals of the design `spec` builds with buffers at exactly `at`: (arrival at
/// each buffer's input, in `at` order; arrival at cout).
fn timed(spec: &Spec, at: &[usize]) -> Result<(Vec<f64>, f64)> {
    let mut s = spec.clone();
    s.buffers.positions = at.to_vec();
    let d = crate::arch::build(&s);
    let tm = crate::timing::engine::timing_of(&s)?;
    let g = Graph::new(&s, &d, &tm)?;
    let arr = arrivals(&g)?;
    let at_input = |p: usize| -> Result<f64> {
        let x = leaf_input(&g, &format!("xbuf{p}"))
            .ok_or_else(|| Error::Check(format!("buffers: auto: no buffer at bit {p}")))?;
        Ok(arr[x as usize])
    };
    let ins = at
        .iter()
        .map(|&p| at_input(p))
        .collect::<Result<Vec<_>>>()?;
    let cout = *g.outputs.last().expect("cout");
    Ok((ins, arr[cout as usize]))
}

/// The engine's segment costs for this spec (its width, block, style, sizing, technology).
pub fn costs(spec: &Spec) -> Result<Costs> {
    let (w, b) = (spec.width, spec.block);
    let n = w.div_ceil(b);
    let mut c = Costs {
        block: b,
        first: vec![None; n],
        middle: vec![None; n],
        last: vec![None; n],
        only: timed(spec, &[])?.1,
    };
    // Every block boundary outside the measured segment is buffered, so the rest of the word
    // is short segments (a long unbuffered rest could stall its keepers or dominate).
    let bounds: Vec<usize> = (1..n).map(|j| j * b).collect();
    let with = |lo: usize, hi: usize, ends: &[usize]| -> Vec<usize> {
        let mut v: Vec<usize> = bounds
            .iter()
            .copied()
            .filter(|&p| p <= lo || p >= hi)
            .chain(ends.iter().copied())
            .collect();
        v.sort_unstable();
        v.dedup();
        v
    };
    let at = |v: &[usize], p: usize| v.iter().position(|&x| x == p).expect("a buffer there");
    for k in 1..n {
        let len = k * b;
        // cin to a buffer at len.
        let v = with(0, len, &[len]);
        let (ins, _) = timed(spec, &v)?;
        c.first[k - 1] = Some(ins[at(&v, len)]);
        // A buffer at w - len to cout (the last segment may be shorter than a block
        // multiple when block does not divide the width; its start is on a boundary).
        let start = (n - k) * b;
        let v = with(start, w, &[start]);
        let (ins, cout) = timed(spec, &v)?;
        c.last[k - 1] = Some(cout - ins[at(&v, start)]);
        // Between two buffers: one block after cin, then len.
        if b + len < w {
            let v = with(b, b + len, &[b, b + len]);
            let (ins, _) = timed(spec, &v)?;
            c.middle[k - 1] = Some(ins[at(&v, b + len)] - ins[at(&v, b)]);
        }
    }
    Ok(c)
}

/// The positions (bit p: a buffer between bit p-1 and p) minimising cin → cout in the
/// model, with no segment longer than `max_len` bits; and that arrival (ps).
pub fn best_positions(c: &Costs, width: usize, max_len: usize) -> Option<(Vec<usize>, f64)> {
    let b = c.block;
    let n = width.div_ceil(b);
    let pos = |j: usize| (j * b).min(width);
    // best[j]: (arrival at the input of a buffer at pos(j), buffers so far, previous j).
    let mut best: Vec<Option<(f64, usize, usize)>> = vec![None; n + 1];
    best[0] = Some((0.0, 0, 0));
    for j in 1..=n {
        for i in 0..j {
            let Some((t0, nb, _)) = best[i] else { continue };
            let len = pos(j) - pos(i);
            if len > max_len {
                continue;
            }
            let k = len.div_ceil(b) - 1;
            let cost = match (i == 0, j == n) {
                (true, true) => Some(c.only),
                (true, false) => c.first[k],
                (false, true) => c.last[k],
                (false, false) => c.middle[k],
            };
            // A segment the engine could not time through (a stalled node) is no candidate.
            let Some(cost) = cost.filter(|x| x.is_finite()) else {
                continue;
            };
            let cand = (t0 + cost, nb + usize::from(j < n), i);
            let better = match best[j] {
                None => true,
                // Fewer buffers when the arrivals are within 0.1 ps.
                Some((t, m, _)) => cand.0 < t - 0.1 || (cand.0 <= t + 0.1 && cand.1 < m),
            };
            if better {
                best[j] = Some(cand);
            }
        }
    }
    let (t, _, _) = best[n]?;
    let mut out = vec![];
    let mut j = n;
    while j > 0 {
        let (_, _, i) = best[j].expect("on the path");
        if i > 0 {
            out.push(pos(i));
        }
        j = i;
    }
    out.reverse();
    Some((out, t))
}

/// Choose the positions for `buffers: auto` (the spec's other keys resolved, positions
/// empty). `Err` is a one-line reason for the `buffers` key.
pub fn choose(spec: &Spec) -> std::result::Result<(Vec<usize>, AutoBuffers), String> {
    if spec.technology.timing.is_none() {
        return Err(format!(
            "`auto` needs the timing engine, and {}",
            crate::timing::engine::no_timing(spec)
        ));
    }
    let c = costs(spec).map_err(|e| format!("`auto` could not time the chain: {e}"))?;
    let max_len = if spec.style == Style::Dynamic && spec.sizing.keeper > 0.0 {
        crate::timing::keeper::longest_passing_chain(spec, spec.width)
            .map_err(|e| format!("`auto` could not run the keeper check: {e}"))?
    } else {
        spec.width
    };
    let Some((positions, ps)) = best_positions(&c, spec.width, max_len.max(1)) else {
        return Err(format!(
            "no buffer placement on {}-bit blocks passes the keeper check (the longest chain that passes is {max_len} bits); use a smaller block or lower sizing.keeper",
            spec.block
        ));
    };
    Ok((
        positions,
        AutoBuffers {
            rule: "dynamic programming over block boundaries on the timing engine's segment delays (cin to cout, every bit propagating)",
            cin_cout_ps: (ps * 10.0).round() / 10.0,
            unbuffered_ps: c.only.is_finite().then(|| (c.only * 10.0).round() / 10.0),
            longest_segment: (max_len < spec.width).then_some(max_len),
        },
    ))
}

/// `buffers: auto` on a prefix network: the fan-out threshold F (every net with more than F
/// loads gets a tree of buffers, each driving at most F) with the least worst path in the
/// engine's full estimate, over F = 2, 3, 4, 6, 8, 12, ... below the network's largest net
/// fan-out and no buffers at all; a larger F (fewer buffers) within 0.5 ps wins. All prefix
/// cell inputs present about the same capacitance, so a threshold on loads is a threshold on
/// the net's capacitance: a net gets buffers where its load costs more, in the model, than a
/// buffer stage does. `Err` is a one-line reason for the `buffers` key.
pub fn choose_fanout(spec: &Spec) -> std::result::Result<(Option<usize>, AutoFanout), String> {
    if spec.technology.timing.is_none() {
        return Err(format!(
            "`auto` needs the timing engine, and {}",
            crate::timing::engine::no_timing(spec)
        ));
    }
    let worst = |f: Option<usize>| -> std::result::Result<(f64, usize), String> {
        let mut s = spec.clone();
        s.buffers.fanout = f;
        let d = crate::arch::build(&s);
        let fan = d.prefix.as_ref().map(|p| p.max_net_fanout).unwrap_or(0);
        let e = crate::timing::search::estimate(&s, &d)
            .map_err(|e| format!("`auto` could not time the network: {e}"))?;
        Ok((e.worst_ps, fan))
    };
    let (none_ps, max_fan) = worst(None)?;
    let mut tried = vec![(0, none_ps)];
    let (mut best, mut best_ps) = (None, none_ps);
    let mut candidates: Vec<usize> = vec![2, 3, 4, 6, 8, 12, 16, 24, 32, 48];
    candidates.retain(|&f| f < max_fan);
    // Largest first, so that a tie keeps the fewer buffers.
    for &f in candidates.iter().rev() {
        let (ps, _) = worst(Some(f))?;
        tried.push((f, ps));
        if ps < best_ps - 0.5 {
            best = Some(f);
            best_ps = ps;
        }
    }
    tried.sort_by_key(|t| t.0);
    Ok((
        best,
        AutoFanout {
            rule: "auto: the fan-out threshold with the least worst path in the timing engine (every net with more loads gets a buffer tree)",
            worst_ps: best_ps,
            unbuffered_ps: none_ps,
            tried,
        },
    ))
}
