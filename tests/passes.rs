//! Passes that choose with the timing engine: `buffers: auto`.

use carrywright::cells::CellKind;
use carrywright::passes::buffers;
use carrywright::spec::{self, LoadOptions, Spec};
use std::path::Path;

fn parse(yaml: &str) -> Result<Spec, carrywright::error::Error> {
    spec::parse(yaml, "test", Path::new("."), &LoadOptions::default())
}

fn chain(width: usize, block: usize, style: &str, buffers: &str) -> String {
    format!("name: chain{width}\nwidth: {width}\narchitecture: manchester\nstyle: {style}\nblock: {block}\nbuffers: {buffers}\ntestbench: {{load: 20f}}\n")
}

/// Least-squares fit of y = a·x² + b·x + c (x the segment length in bits), by the normal
/// equations.
fn fit_quadratic(xs: &[f64], ys: &[f64]) -> (f64, f64, f64) {
    let mut m = [[0.0f64; 4]; 3];
    for (&x, &y) in xs.iter().zip(ys) {
        let row = [x * x, x, 1.0];
        for i in 0..3 {
            for j in 0..3 {
                m[i][j] += row[i] * row[j];
            }
            m[i][3] += row[i] * y;
        }
    }
    // Gauss-Jordan elimination.
    for i in 0..3 {
        let p = m[i][i];
        for v in m[i].iter_mut() {
            *v /= p;
        }
        let pivot = m[i];
        for (k, row) in m.iter_mut().enumerate() {
            if k != i {
                let f = row[i];
                for (v, pv) in row.iter_mut().zip(pivot) {
                    *v -= f * pv;
                }
            }
        }
    }
    (m[0][3], m[1][3], m[2][3])
}

/// On a uniform chain (1-bit blocks, so every spacing is a candidate) the engine's segment
/// delay is a·L² + b·L + t_buf (a ladder's 0.345·R·C·L² and its linear part, the buffer), so
/// the delay per bit is minimal at the textbook optimum L = √(t_buf / (0.345·R·C)) (Rabaey,
/// Chandrakasan & Nikolić, 2nd ed., §6.2.3) with 0.345·R·C = a: the DP's spacing is within
/// one bit of it, in both styles. The a the engine's
/// costs show is the model's own 0.345·R·C per bit² within a factor 2 (R: a transmission gate
/// inside a ladder, C: a chain node; the fit also absorbs the driver and the D2M metric).
#[test]
fn dp_spacing_is_the_closed_form_optimum_of_the_models_costs() {
    for (style, width) in [("static", 32usize), ("static", 64), ("dynamic", 32)] {
        let s = parse(&chain(width, 1, style, "none")).unwrap();
        let c = buffers::costs(&s).unwrap();
        let (xs, ys): (Vec<f64>, Vec<f64>) = (1..=8)
            .filter_map(|l| c.middle[l - 1].map(|y| (l as f64, y)))
            .unzip();
        let (a, _b, t_buf) = fit_quadratic(&xs, &ys);
        assert!(a > 0.0 && t_buf > 0.0, "a {a} t_buf {t_buf}");
        let m = (t_buf / a).sqrt();
        let (pos, _) = buffers::best_positions(&c, width, width).unwrap();
        // The spacing the DP settles on inside the word (the ends may differ).
        let gaps: Vec<usize> = pos.windows(2).map(|w| w[1] - w[0]).collect();
        let mut counts = std::collections::BTreeMap::new();
        for g in &gaps {
            *counts.entry(*g).or_insert(0) += 1;
        }
        let spacing = *counts.iter().max_by_key(|(_, n)| **n).unwrap().0 as f64;
        eprintln!("{style} {width} bits: a {a:.2} ps/bit², t_buf {t_buf:.1} ps, closed form {m:.2} bits, DP spacing {spacing} ({pos:?})");
        assert!(
            (spacing - m).abs() <= 1.0,
            "DP spacing {spacing} vs closed form {m:.2}"
        );
        if style == "dynamic" {
            continue;
        }
        // The model's own R and C.
        let tm = s.technology.timing.clone().unwrap();
        let d = carrywright::build(&s).unwrap();
        let g = carrywright::timing::engine::Graph::new(&s, &d, &tm).unwrap();
        let node = g
            .names
            .iter()
            .position(|n| n == "xblk1.ci" || n == "c1_n")
            .unwrap_or_else(|| {
                g.names
                    .iter()
                    .position(|n| n.starts_with("c1"))
                    .expect("a chain node")
            });
        let c_node = g.cap_ff[node];
        let r = 0.5
            * (tm.r_tg_ladder_fall_kohm_um.unwrap_or(tm.r_tg_fall_kohm_um)
                + tm.r_tg_ladder_rise_kohm_um.unwrap_or(tm.r_tg_rise_kohm_um))
            / s.sizing.unit_n;
        let textbook = 0.345 * r * c_node;
        eprintln!("  0.345·R·C from the model: {textbook:.2} ps (R {r:.2} kOhm, C {c_node:.2} fF)");
        assert!(
            a / textbook > 0.5 && a / textbook < 2.0,
            "a {a} vs 0.345RC {textbook}"
        );
    }
}

/// `buffers: auto` lands on the DP's positions, the design it builds has them, its estimate
/// equals what the DP predicted (the segments are separable within 3 %), it beats no buffers,
/// and in dynamic style no segment is longer than the keeper check lets through.
#[test]
fn auto_positions_build_and_respect_the_keeper_check() {
    for (style, width) in [("static", 32usize), ("dynamic", 32), ("dynamic", 48)] {
        let s = parse(&chain(width, 4, style, "auto")).unwrap();
        let how = s.buffers.auto.clone().expect("auto recorded");
        let pos = &s.buffers.positions;
        assert!(!pos.is_empty(), "{style} {width}: {pos:?}");
        assert!(pos.iter().all(|p| p % 4 == 0 && *p > 0 && *p < width));
        assert!(
            how.unbuffered_ps.is_none_or(|u| how.cin_cout_ps < u),
            "{how:?}"
        );
        let d = carrywright::build(&s).unwrap();
        let e = carrywright::timing::search::estimate(&s, &d).unwrap();
        let cc = e.cin_cout_ps.unwrap();
        assert!(
            (cc / how.cin_cout_ps - 1.0).abs() < 0.03,
            "{style} {width}: DP {} vs estimate {cc}",
            how.cin_cout_ps
        );
        let mut cuts = vec![0];
        cuts.extend(pos);
        cuts.push(width);
        let longest = cuts.windows(2).map(|w| w[1] - w[0]).max().unwrap();
        if let Some(limit) = how.longest_segment {
            assert!(
                longest <= limit,
                "{style} {width}: segment {longest} > keeper limit {limit}"
            );
        }
    }
}

/// `auto` belongs to Manchester chains (and prefix networks' fan-out buffers) and needs the
/// timing engine: anything else is refused with the key.
#[test]
fn auto_is_refused_where_it_does_not_apply() {
    let cs = parse("name: k\nwidth: 16\narchitecture: carry-select\nbuffers: auto\n").unwrap_err();
    assert_eq!(cs.exit_code(), 2);
    assert!(
        cs.to_string()
            .contains("buffers: `auto` places restoring buffers on Manchester chains"),
        "{cs}"
    );
    let short = parse(&chain(4, 4, "static", "auto")).unwrap_err();
    assert!(
        short.to_string().contains("needs a block boundary"),
        "{short}"
    );
    // At conditions the technology is not characterised at, there is no model to choose with.
    let hot = parse("name: h\nwidth: 16\narchitecture: manchester\nblock: 4\nbuffers: auto\nconditions: {temp: 85}\n").unwrap_err();
    assert_eq!(hot.exit_code(), 2);
    assert!(
        hot.to_string()
            .contains("buffers: `auto` needs the timing engine"),
        "{hot}"
    );
}

// ---- block: auto (passes::blocks) ----

use carrywright::passes::blocks;

fn adder(width: usize, arch: &str, style: &str, block: &str, tech: &str) -> String {
    format!("name: add{width}\nwidth: {width}\narchitecture: {arch}\nstyle: {style}\nblock: {block}\ntechnology: {tech}\ntestbench: {{load: 20f}}\n")
}

/// Every composition of `w` into parts of at most `max_k`.
fn compositions(w: usize, max_k: usize) -> Vec<Vec<usize>> {
    if w == 0 {
        return vec![vec![]];
    }
    let mut out = vec![];
    for k in 1..=max_k.min(w) {
        for mut rest in compositions(w - k, max_k) {
            rest.insert(0, k);
            out.push(rest);
        }
    }
    out
}

/// The dynamic programme is exact for its block model: on the engine's own tables, no
/// composition of the word (all 2^(w-1) of them, w = 10 and 12) has a smaller worst arrival
/// than the one it returns, and that arrival is the model's figure for its sizes.
#[test]
fn block_dp_is_exact_for_the_block_model() {
    for (arch, style, w) in [
        ("carry-skip", "static", 10usize),
        ("carry-skip", "dynamic", 12),
        ("carry-select", "static", 12),
    ] {
        let s = parse(&adder(w, arch, style, "2", "gf180mcu-3v3")).unwrap();
        let c = blocks::costs(&s, w).unwrap();
        let (sizes, t) = blocks::best_sizes(&c, w).unwrap();
        assert_eq!(sizes.iter().sum::<usize>(), w);
        assert!((blocks::model_worst(&c, &sizes).unwrap() - t).abs() < 1e-6);
        let brute = compositions(w, w)
            .iter()
            .filter_map(|v| blocks::model_worst(&c, v))
            .fold(f64::INFINITY, f64::min);
        assert!(
            (brute - t).abs() < 1e-6,
            "{arch} {style} {w}: DP {t} ps, every composition {brute} ps"
        );
    }
}

/// Variable blocks beat uniform ones: single-level carry-skip with blocks small at both ends
/// and larger in the middle (Oklobdzija & Barnes, ARITH-7, 1985; Guyot, Hochet & Muller,
/// IEEE Trans. Computers C-36(10), 1987), carry-select with growing blocks (Rabaey et al.,
/// ch. 11; from memory). Checked with the full worst-path estimate (not the block model)
/// against every uniform block size and, for carry-select, square-root blocks.
#[test]
fn block_auto_beats_every_uniform_block_in_the_engine() {
    let worst = |yaml: &str| {
        let s = parse(yaml).unwrap();
        let d = carrywright::build(&s).unwrap();
        (
            carrywright::timing::search::estimate(&s, &d)
                .unwrap()
                .worst_ps,
            s,
        )
    };
    for (arch, style, w, tech) in [
        ("carry-skip", "static", 32usize, "gf180mcu-3v3"),
        ("carry-skip", "static", 64, "gf180mcu-3v3"),
        ("carry-skip", "dynamic", 32, "gf180mcu-3v3"),
        ("carry-skip", "static", 32, "sky130-1v8"),
        ("carry-select", "static", 32, "gf180mcu-3v3"),
        ("carry-select", "static", 64, "gf180mcu-3v3"),
    ] {
        let (auto, s) = worst(&adder(w, arch, style, "auto", tech));
        let sizes = s.block_sizes.clone().unwrap();
        assert_eq!(sizes.iter().sum::<usize>(), w);
        let mut others: Vec<(String, f64)> = (2..=8)
            .map(|k| {
                (
                    k.to_string(),
                    worst(&adder(w, arch, style, &k.to_string(), tech)).0,
                )
            })
            .collect();
        if arch == "carry-select" {
            others.push(("sqrt".into(), worst(&adder(w, arch, style, "sqrt", tech)).0));
        }
        for (b, t) in &others {
            assert!(
                auto < *t,
                "{arch} {style} {w} {tech}: auto {sizes:?} {auto} ps, block {b} {t} ps"
            );
        }
        let big = *sizes.iter().max().unwrap();
        if arch == "carry-skip" {
            assert!(
                sizes[0] < big && sizes[sizes.len() - 1] < big,
                "{arch} {w}: {sizes:?} is not small at the ends"
            );
        } else {
            // Carry-select: the last block is the largest.
            assert_eq!(sizes[sizes.len() - 1], big, "{w}: {sizes:?}");
        }
        let a = s.block_auto.as_ref().unwrap();
        assert!(a.worst_ps <= a.best_uniform_ps, "{a:?}");
    }
}

/// `block: auto` only where blocks have sizes to choose.
#[test]
fn block_auto_is_refused_where_it_does_not_apply() {
    let e = parse(&adder(16, "manchester", "static", "auto", "generic")).unwrap_err();
    let m = e.to_string();
    assert!(m.contains("block") && m.contains("carry-skip"), "{m}");
}

// ---- sizing: auto (passes::sizing) ----

fn sized(width: usize, arch: &str, style: &str, extra: &str, sizing: &str) -> String {
    format!("name: sz{width}\nwidth: {width}\narchitecture: {arch}\nstyle: {style}\n{extra}technology: gf180mcu-3v3\nsizing: {sizing}\ntestbench: {{load: 50f}}\n")
}

fn estimate_of(s: &Spec) -> carrywright::timing::search::Estimate {
    let d = carrywright::build(s).unwrap();
    carrywright::timing::search::estimate(s, &d).unwrap()
}

fn largest_input(e: &carrywright::timing::search::Estimate) -> f64 {
    e.input_cap_ff
        .0
        .iter()
        .filter(|(n, _)| n != "clk")
        .filter_map(|(_, c)| *c)
        .fold(0.0, f64::max)
}

/// `sizing: auto` keeps its promises, checked with the full estimate (not the search's own
/// figures): a faster worst path than the default sizes at no more total width and no
/// larger input, for a 50 fF load, at 32 bits in both Manchester styles and for ripple; and
/// with `input_cap` set, no input above it. (Method: logical-effort sizing trades input
/// load for speed, Sutherland, Sproull & Harris 1999; the limits are the issue's.)
#[test]
fn sizing_auto_is_faster_within_its_limits() {
    let every4 = "block: 4\nbuffers: {every: 4}\n";
    for (arch, style, extra) in [
        ("manchester", "static", every4),
        ("manchester", "dynamic", every4),
        ("ripple", "static", ""),
    ] {
        let d = parse(&sized(32, arch, style, extra, "{}")).unwrap();
        let a = parse(&sized(32, arch, style, extra, "auto")).unwrap();
        let (ed, ea) = (estimate_of(&d), estimate_of(&a));
        assert!(
            ea.worst_ps < 0.95 * ed.worst_ps,
            "{arch} {style}: auto {} ps, default {} ps",
            ea.worst_ps,
            ed.worst_ps
        );
        assert!(
            ea.total_width_um <= ed.total_width_um + 0.01,
            "{arch} {style}: width"
        );
        assert!(
            largest_input(&ea) <= largest_input(&ed) + 0.01,
            "{arch} {style}: input"
        );
        let r = a.sizing.auto.as_ref().unwrap();
        assert!((r.worst_ps - ea.worst_ps).abs() < 0.05, "{r:?}");
        assert!((r.default_worst_ps - ed.worst_ps).abs() < 0.05, "{r:?}");
    }
    // An input limit below the default's largest input (24.7 fF for the PG cell's inputs
    // here) is kept.
    let a = parse(&sized(
        16,
        "manchester",
        "static",
        every4,
        "{mode: auto, input_cap: 15f}",
    ))
    .unwrap();
    let ea = estimate_of(&a);
    assert!(largest_input(&ea) <= 15.0 + 0.01, "{}", largest_input(&ea));
}

/// Manual sizes are checked against `sizing.input_cap` too: exit 2 naming the key.
#[test]
fn input_cap_refuses_manual_sizes_that_load_the_inputs_more() {
    let s = parse(&sized(8, "ripple", "static", "", "{input_cap: 5f}")).unwrap();
    let e = carrywright::build(&s).unwrap_err();
    assert_eq!(e.exit_code(), 2, "{e}");
    assert!(e.to_string().contains("sizing.input_cap"), "{e}");
}

/// `buffers: auto` on a prefix network: with every prefix cell at drive 1
/// (`sizing.fanout: false`), Sklansky's high-fan-out nets (N/2 + 1 loads, Harris 2003) cost
/// more than buffer stages, so the engine buffers them and the worst path drops; the chosen
/// threshold is the best of those tried and the figures match the estimate. With the cells
/// sized by their fan-out (the default) the choice may be no buffers; it is never worse than
/// none.
#[test]
fn prefix_buffers_auto_buffers_the_high_fanout_nets() {
    let sized = |b: &str| {
        format!("name: sk64\nwidth: 64\narchitecture: sklansky\ntechnology: gf180mcu-3v3\nbuffers: {b}\ntestbench: {{load: 50f}}\n")
    };
    let (a, n) = (
        parse(&sized("auto")).unwrap(),
        parse(&sized("none")).unwrap(),
    );
    assert!(estimate_of(&a).worst_ps <= estimate_of(&n).worst_ps + 0.05);
    let yaml = |b: &str| format!("{}sizing: {{fanout: false}}\n", sized(b));
    let a = parse(&yaml("auto")).unwrap();
    let n = parse(&yaml("none")).unwrap();
    let how = a.buffers.auto_fanout.clone().unwrap();
    let f = a.buffers.fanout.expect("Sklansky 64 gets fan-out buffers");
    let (ea, en) = (estimate_of(&a), estimate_of(&n));
    assert!(
        ea.worst_ps < 0.9 * en.worst_ps,
        "auto {} ps, none {} ps",
        ea.worst_ps,
        en.worst_ps
    );
    assert!(
        (how.worst_ps - ea.worst_ps).abs() < 0.05 && (how.unbuffered_ps - en.worst_ps).abs() < 0.05
    );
    assert!(how.tried.iter().any(|t| t.0 == f));
    assert!(
        how.tried.iter().all(|t| t.1 >= how.worst_ps),
        "{:?}",
        how.tried
    );
}

// ------------------------------------------------------------- prefix cells by fan-out

#[path = "common/mod.rs"]
mod common;

fn prefix_spec(arch: &str, width: usize, fanout: bool, tech: &str) -> Spec {
    parse(&format!(
        "name: fo\nwidth: {width}\narchitecture: {arch}\ntechnology: {tech}\nsizing: {{fanout: {fanout}}}\ntestbench: {{random: 4, load: 20f}}\n"
    ))
    .unwrap()
}

/// Gate width (µm) the input pins of every instance present on each top net.
fn load_widths(d: &carrywright::netlist::Design) -> std::collections::HashMap<usize, f64> {
    use carrywright::netlist::Master;
    let mut out = std::collections::HashMap::new();
    for inst in &d.top().instances {
        let Master::Cell(k) = inst.master else {
            continue;
        };
        let cell = &d.cells[&k];
        for (pin, net) in cell.pins.iter().zip(&inst.conns) {
            if pin.dir == carrywright::cells::Dir::In {
                let w: f64 = cell
                    .devices
                    .iter()
                    .filter(|x| x.g == pin.name)
                    .map(|x| x.w)
                    .sum();
                *out.entry(net.0 as usize).or_insert(0.0) += w;
            }
        }
    }
    out
}

/// Prefix cells sized by their fan-out (logical effort, Sutherland, Sproull & Harris 1999):
/// with `sizing.fanout` off every grey and black cell is at drive 1; on, the cells on
/// heavily loaded nets get 2× or 4× output inverters, a cell never has a smaller drive than one
/// with a lighter load, the inputs present the same capacitance (only output inverters grow),
/// and the engine's worst path is shorter for every prefix family, most for Sklansky, whose
/// fan-out doubles with each level.
#[test]
fn prefix_cells_are_sized_by_their_fanout() {
    use carrywright::netlist::Master;
    let mut gains = vec![];
    for arch in ["kogge-stone", "brent-kung", "sklansky", "ladner-fischer"] {
        let off = prefix_spec(arch, 32, false, "generic");
        let on = prefix_spec(arch, 32, true, "generic");
        let (d_off, d_on) = (
            carrywright::build(&off).unwrap(),
            carrywright::build(&on).unwrap(),
        );
        let drive = |d: &carrywright::netlist::Design| -> Vec<(f64, u8)> {
            let loads = load_widths(d);
            d.top()
                .instances
                .iter()
                .filter_map(|i| match i.master {
                    Master::Cell(k) => k.prefix_drive().map(|(_, dr)| {
                        let cell = &d.cells[&k];
                        let load = cell
                            .pins
                            .iter()
                            .zip(&i.conns)
                            .filter(|(p, _)| p.dir == carrywright::cells::Dir::Out)
                            .map(|(_, n)| loads.get(&(n.0 as usize)).copied().unwrap_or(0.0))
                            .fold(0.0, f64::max);
                        (load, dr)
                    }),
                    _ => None,
                })
                .collect()
        };
        assert!(
            drive(&d_off).iter().all(|&(_, dr)| dr == 1),
            "{arch}: fanout off upsized a cell"
        );
        let mut cells = drive(&d_on);
        assert!(
            cells.iter().any(|&(_, dr)| dr > 1),
            "{arch}: no cell upsized"
        );
        cells.sort_by(|a, b| a.0.total_cmp(&b.0));
        for pair in cells.windows(2) {
            assert!(
                pair[0].1 <= pair[1].1,
                "{arch}: a lighter load got a larger drive: {pair:?}"
            );
        }
        let (e_off, e_on) = (
            carrywright::timing::search::estimate(&off, &d_off).unwrap(),
            carrywright::timing::search::estimate(&on, &d_on).unwrap(),
        );
        assert_eq!(
            format!("{:?}", e_off.input_cap_ff.0),
            format!("{:?}", e_on.input_cap_ff.0),
            "{arch}: the inputs must present the same capacitance"
        );
        assert!(
            e_on.worst_ps < e_off.worst_ps,
            "{arch}: {} ps against {} ps",
            e_on.worst_ps,
            e_off.worst_ps
        );
        gains.push((arch, 1.0 - e_on.worst_ps / e_off.worst_ps));
    }
    let best = gains.iter().max_by(|a, b| a.1.total_cmp(&b.1)).unwrap();
    assert_eq!(best.0, "sklansky", "{gains:?}");
}

/// The same in ngspice (GF180MCU typical, 20 fF; each deck measures its own design's worst
/// pair): a 16-bit Sklansky adder with its prefix cells sized by fan-out is faster than with
/// every cell at drive 1. Measured when this was written: 24.5 % faster at 32 bits, 9 % for
/// Kogge-Stone and 8 % for Brent-Kung at 16.
#[test]
fn fanout_sizing_is_faster_in_ngspice() {
    if !common::tools(&["ngspice"]) {
        return;
    }
    let Some(models) = common::model_dir() else {
        return;
    };
    let mut measured = vec![];
    for fanout in [false, true] {
        let yaml = format!(
            "name: fo16\nwidth: 16\narchitecture: sklansky\ntechnology: gf180mcu-3v3\nsizing: {{fanout: {fanout}}}\ntestbench: {{random: 4, load: 20f}}\n"
        );
        let (dir, _, _) = common::generate(&yaml, Some(models.clone()));
        let (ok, log) = common::ngspice(&dir.path().join("out"), "fo16");
        assert!(ok, "the deck fails:\n{log}");
        let t = common::printed(&log)["tworst"];
        measured.push(t);
    }
    eprintln!(
        "16-bit Sklansky, GF180MCU typical, 20 fF: worst pair {:.1} ps at drive 1, {:.1} ps sized by fan-out",
        measured[0] * 1e12,
        measured[1] * 1e12
    );
    assert!(
        measured[1] < 0.97 * measured[0],
        "fan-out sizing {:.1} ps against {:.1} ps",
        measured[1] * 1e12,
        measured[0] * 1e12
    );
}

// ---- tapered Manchester segments (sizing.taper) ----

/// Progressive sizing of a pass-transistor chain (Rabaey et al., Digital Integrated Circuits,
/// 2nd ed., §6.2.3, from memory): the head of a segment carries the charge of every node after
/// it, so its devices are widest and the drive falls geometrically towards the tail. The
/// levels follow that: non-increasing along a segment, the head at the ratio asked for, the
/// tail plain, and no taper at 1.
#[test]
fn taper_levels_fall_geometrically_from_the_head() {
    use carrywright::arch::manchester::taper_levels;
    use carrywright::cells::TAPER_DRIVES;
    for n in 1..=16 {
        assert!(taper_levels(n, 1.0).iter().all(|&l| l == 0));
        for r in [1.5, 2.0, 3.0, 4.0] {
            let lv = taper_levels(n, r);
            assert_eq!(lv.len(), n);
            assert!(lv.windows(2).all(|w| w[0] >= w[1]), "{n} {r}: {lv:?}");
            if n > 1 {
                assert_eq!(TAPER_DRIVES[lv[0] as usize], r, "{n} {r}: {lv:?}");
                assert_eq!(lv[n - 1], 0, "{n} {r}: {lv:?}");
            }
        }
    }
    assert_eq!(taper_levels(8, 3.0), vec![3, 3, 2, 2, 1, 1, 0, 0]);
}

/// Tapered chains are still adders (the logic check and the switch-level check of the
/// SPICE text run inside `generate`), carry wider devices than the plain cells, cost width,
/// and are faster in the engine for 8-bit segments in both styles, Manchester and
/// carry-skip (generic technology: no model files needed).
#[test]
fn tapered_chains_add_and_are_faster_in_the_engine() {
    for (arch, style, extra) in [
        ("manchester", "static", "block: 4\nbuffers: {every: 8}\n"),
        ("manchester", "dynamic", "block: 4\nbuffers: {every: 8}\n"),
        ("carry-skip", "static", "block: 8\n"),
        ("carry-skip", "dynamic", "block: 8\n"),
    ] {
        let spec = |taper: &str| {
            parse(&format!(
                "name: tp\nwidth: 32\narchitecture: {arch}\nstyle: {style}\n{extra}sizing: {{taper: {taper}}}\ntestbench: {{load: 20f, random: 64}}\n"
            ))
            .unwrap()
        };
        let (plain, tapered) = (spec("1"), spec("3"));
        carrywright::generate(&tapered).unwrap_or_else(|e| panic!("{arch} {style}: {e}"));
        // Pass-device widths of the chain cells: tapered (level > 0) against plain.
        let pass_widths = |s: &Spec, tapered: bool| -> Vec<f64> {
            let d = carrywright::build(s).unwrap();
            d.cells
                .iter()
                .filter(|(k, c)| {
                    c.base.starts_with("mcc_") && matches!(k, CellKind::ChainTapered(..)) == tapered
                })
                .map(|(_, c)| {
                    c.devices
                        .iter()
                        .find(|x| x.role == carrywright::cells::Role::Pass)
                        .unwrap()
                        .w
                })
                .collect()
        };
        let (wide, unit) = (pass_widths(&tapered, true), pass_widths(&plain, false));
        assert!(
            !wide.is_empty() && !unit.is_empty(),
            "{arch} {style}: {wide:?} {unit:?}"
        );
        assert!(
            wide.iter().all(|&w| w > unit[0]),
            "{arch} {style}: {wide:?} {unit:?}"
        );
        let (ep, et) = (estimate_of(&plain), estimate_of(&tapered));
        assert!(
            et.total_width_um > ep.total_width_um,
            "{arch} {style}: width"
        );
        assert!(
            et.worst_ps < 0.95 * ep.worst_ps,
            "{arch} {style}: tapered {} ps, plain {} ps",
            et.worst_ps,
            ep.worst_ps
        );
    }
    // Only Manchester chains taper.
    let e =
        parse("name: tp\nwidth: 8\narchitecture: kogge-stone\nsizing: {taper: 2}\n").unwrap_err();
    assert_eq!(e.exit_code(), 2);
    assert!(e.to_string().contains("sizing.taper"), "{e}");
    let e =
        parse("name: tp\nwidth: 8\narchitecture: manchester\nsizing: {taper: 5}\n").unwrap_err();
    assert!(
        e.to_string()
            .contains("sizing.taper: must be between 1 and 4"),
        "{e}"
    );
}

/// The same in ngspice (GF180MCU typical, 20 fF; each deck measures its own design's worst
/// pair): a 16-bit static Manchester adder buffered every 8 bits with its segments tapered
/// 3 : 1 is faster than with plain cells. Measured when this was written at 32 bits: static
/// 6258 → 5315 ps, dynamic 4692 → 3594 ps.
#[test]
fn tapering_is_faster_in_ngspice() {
    if !common::tools(&["ngspice"]) {
        return;
    }
    let Some(models) = common::model_dir() else {
        return;
    };
    let mut measured = vec![];
    for taper in [1, 3] {
        let yaml = format!(
            "name: tp16\nwidth: 16\narchitecture: manchester\nblock: 4\nbuffers: {{every: 8}}\ntechnology: gf180mcu-3v3\nsizing: {{taper: {taper}}}\ntestbench: {{random: 4, load: 20f}}\n"
        );
        let (dir, _, _) = common::generate(&yaml, Some(models.clone()));
        let (ok, log) = common::ngspice(&dir.path().join("out"), "tp16");
        assert!(ok, "the deck fails:\n{log}");
        measured.push(common::printed(&log)["tworst"]);
    }
    eprintln!(
        "16-bit static Manchester every 8, GF180MCU typical, 20 fF: worst pair {:.1} ps plain, {:.1} ps tapered 3:1",
        measured[0] * 1e12,
        measured[1] * 1e12
    );
    assert!(
        measured[1] < 0.95 * measured[0],
        "tapered {:.1} ps against {:.1} ps",
        measured[1] * 1e12,
        measured[0] * 1e12
    );
}
