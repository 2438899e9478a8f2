//! Passes that choose with the timing engine: `buffers: auto`.

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

/// `auto` belongs to Manchester chains and needs the timing engine: anything else is refused
/// with the key.
#[test]
fn auto_is_refused_where_it_does_not_apply() {
    let ks = parse("name: k\nwidth: 16\narchitecture: kogge-stone\nbuffers: auto\n").unwrap_err();
    assert_eq!(ks.exit_code(), 2);
    assert!(
        ks.to_string()
            .contains("buffers: `auto` places restoring buffers on Manchester chains"),
        "{ks}"
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
