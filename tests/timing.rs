//! The timing engine (src/timing/engine.rs, src/timing/search.rs): the square law of
//! unbuffered Manchester segments and linear growth once buffered (Elmore 1948; Rabaey,
//! Chandrakasan & Nikolić, Digital Integrated Circuits, 2nd ed., §6.2.3), the carry-skip false
//! path (Rabaey ch. 11), the worst pair checked by the bit-parallel evaluator, log N growth of
//! prefix adders against N for ripple (Kogge & Stone 1973; Harris 2003) and determinism. The
//! estimate against ngspice is in tests/accuracy.rs.

mod common;

use carrywright::spec::{self, LoadOptions, Spec};
use carrywright::timing::engine::{self, Graph};
use carrywright::timing::search::{self, Budget, In, Pair, Timer};
use carrywright::timing::Timing;
use std::path::Path;

/// The technology's characterised timing (every built-in technology carries it).
fn timing(s: &Spec) -> Timing {
    s.technology
        .timing
        .clone()
        .expect("the built-in technologies carry characterised timing")
}

/// The keys issue 7 §4 asks of `estimate --json`.
const JSON_KEYS: [&str; 9] = [
    "worst_ps",
    "worst_path",
    "worst_vectors",
    "cin_cout_ps",
    "bound_ps",
    "outputs_ps",
    "transistors",
    "gate_area_um2",
    "energy_fj",
];

fn spec_of(yaml: &str) -> Spec {
    spec::parse(yaml, "test-spec", Path::new("."), &LoadOptions::default())
        .unwrap_or_else(|e| panic!("spec refused: {e}\n{yaml}"))
}

fn yaml(name: &str, arch: &str, style: &str, width: usize, block: usize, buffers: &str) -> String {
    format!(
        "name: {name}\nwidth: {width}\narchitecture: {arch}\nstyle: {style}\nblock: {block}\nbuffers: {buffers}\ntechnology: generic\ntestbench: {{random: 0, seed: 1, load: 10f}}\n"
    )
}

/// A small search: the hard transitions always, few random pairs and flips (debug builds).
fn small() -> Budget {
    Budget {
        random: 8,
        timed: 8,
        starts: 2,
        flips: 24,
        seed: 1,
        prune: true,
    }
}

fn est(y: &str) -> (Spec, carrywright::timing::engine::Estimate) {
    let s = spec_of(y);
    let d = carrywright::build(&s).unwrap();
    let e = engine::estimate_with(&s, &d, &timing(&s), small()).unwrap();
    (s, e)
}

/// cin toggled with every bit propagating: the stage delay of the slowest stage on the path
/// to cout (for an unbuffered chain, the whole segment as one RC ladder with its driver).
fn ladder_delay(y: &str) -> (f64, f64) {
    let s = spec_of(y);
    let d = carrywright::build(&s).unwrap();
    let g = Graph::new(&s, &d, &timing(&s)).unwrap();
    let mut t = Timer::new(&g).unwrap();
    let m = carrywright::emit::vectors::mask(s.width);
    let before = In {
        a: m,
        b: 0,
        cin: false,
    };
    let after = In {
        cin: true,
        ..before
    };
    let pt = t.time(Pair { before, after }).unwrap();
    let cout = g.outputs.len() - 1;
    let total = pt.outputs[cout].expect("cout changes");
    let path = t.path(cout);
    let stage = path.iter().map(|p| p.stage_ps).fold(0.0, f64::max);
    (stage, total)
}

#[test]
fn unbuffered_chains_follow_the_square_law() {
    // Elmore delay of an N-stage ladder driven through R_d: 0.69·(R_d·N·C + R·C·N(N+1)/2)
    // (Elmore 1948; Rabaey et al. §6.2.3), plus the fixed delay of the stages around it. Fit
    // t(N) = α + β·N + γ·N(N+1)/2 through segments of 4, 8 and 16 bits: the 12-bit segment
    // must fall on the curve (within 5 %), the square-law term must be positive and carry
    // most of the 16-bit delay, and the ratios of whole segment delays must exceed linear.
    for style in ["static", "dynamic"] {
        let t: Vec<(f64, f64)> = [4usize, 8, 12, 16]
            .iter()
            .map(|&n| {
                // Without a keeper: the ladder alone (a keeper's fight slows long chains more).
                let mut y = yaml("chain", "manchester", style, n, n, "none");
                if style == "dynamic" {
                    y = y.replace("technology:", "sizing: {keeper: 0}\ntechnology:");
                }
                (n as f64, ladder_delay(&y).0)
            })
            .collect();
        let tri = |n: f64| n * (n + 1.0) / 2.0;
        // Solve the 3×3 system for N = 4, 8, 16 (Cramer's rule).
        let rows: Vec<[f64; 4]> = [0, 1, 3]
            .iter()
            .map(|&i| [1.0, t[i].0, tri(t[i].0), t[i].1])
            .collect();
        let det = |m: [[f64; 3]; 3]| {
            m[0][0] * (m[1][1] * m[2][2] - m[1][2] * m[2][1])
                - m[0][1] * (m[1][0] * m[2][2] - m[1][2] * m[2][0])
                + m[0][2] * (m[1][0] * m[2][1] - m[1][1] * m[2][0])
        };
        let col = |k: usize| -> [[f64; 3]; 3] {
            let mut m = [[0.0; 3]; 3];
            for (r, row) in rows.iter().enumerate() {
                for c in 0..3 {
                    m[r][c] = if c == k { row[3] } else { row[c] };
                }
            }
            m
        };
        let base = det([
            [rows[0][0], rows[0][1], rows[0][2]],
            [rows[1][0], rows[1][1], rows[1][2]],
            [rows[2][0], rows[2][1], rows[2][2]],
        ]);
        let (al, be, ga) = (det(col(0)) / base, det(col(1)) / base, det(col(2)) / base);
        let predicted = al + be * 12.0 + ga * tri(12.0);
        let share16 = ga * tri(16.0) / t[3].1;
        println!(
            "{style}: segment delays 4/8/12/16 bits {:.0}/{:.0}/{:.0}/{:.0} ps; fit {al:.0} + {be:.1}·N + {ga:.2}·N(N+1)/2; 12 bits predicted {predicted:.0} ps; square-law share at 16 bits {:.0} %",
            t[0].1, t[1].1, t[2].1, t[3].1, 100.0 * share16
        );
        assert!(ga > 0.0, "{style}: no square-law term");
        assert!(
            (predicted / t[2].1 - 1.0).abs() < 0.05,
            "{style}: the 12-bit segment is off the Elmore curve"
        );
        assert!(
            share16 > 0.5,
            "{style}: the square-law term is only {share16:.2} of 16 bits"
        );
        // Faster than linear growth: 16 bits take more than 4 × the 4-bit segment.
        assert!(
            t[3].1 > 4.0 * t[0].1,
            "{style}: 16-bit segment grows only linearly"
        );
    }
}

#[test]
fn buffered_chains_grow_linearly() {
    // With a buffer every m stages the delay is linear in N (Rabaey et al. §6.2.3, ch. 11):
    // the 32-bit chain's increment over 16 bits is twice the 16-bit increment over 8, within 15 %.
    let t: Vec<f64> = [8usize, 16, 32]
        .iter()
        .map(|&n| ladder_delay(&yaml("chainb", "manchester", "static", n, 4, "{every: 4}")).1)
        .collect();
    let (i1, i2) = (t[1] - t[0], t[2] - t[1]);
    println!(
        "buffered every 4: 8/16/32 bits cin->cout {:.0}/{:.0}/{:.0} ps",
        t[0], t[1], t[2]
    );
    assert!(
        (i2 / (2.0 * i1) - 1.0).abs() < 0.15,
        "increments {i1:.0} and {i2:.0} ps are not linear"
    );
    // And the unbuffered 32-bit chain is slower than the buffered one (square law).
    let u = ladder_delay(&yaml("chainu", "manchester", "static", 32, 32, "none")).1;
    assert!(
        u > 1.5 * t[2],
        "unbuffered {u:.0} ps vs buffered {:.0} ps",
        t[2]
    );
}

/// Which blocks of a carry-skip adder have every bit propagating in this vector.
fn bypassed(v: &In, width: usize, block: usize) -> Vec<bool> {
    (0..width.div_ceil(block))
        .map(|k| (k * block..((k + 1) * block).min(width)).all(|i| ((v.a ^ v.b) >> i) & 1 == 1))
        .collect()
}

#[test]
fn carry_skip_worst_path_is_real() {
    // The ripple through a bypassed block is a false path (Rabaey ch. 11): the worst delay a
    // vector pair produces is below the topological bound, and the worst path never leaves a
    // block whose bits all propagate through that block's own chain.
    for (width, block) in [(16usize, 4usize), (32, 4)] {
        let (_, e) = est(&yaml("skip", "carry-skip", "static", width, block, "none"));
        println!(
            "carry-skip {width}/{block}: worst {} ps ({} -> {}), bound {} ps, cin->cout {:?} ps",
            e.worst_ps, e.worst_vectors.from, e.worst_vectors.to, e.bound_ps, e.cin_cout_ps
        );
        assert!(
            e.worst_ps < 0.9 * e.bound_ps,
            "worst {} ps is not below the topological bound {} ps",
            e.worst_ps,
            e.bound_ps
        );
        let after = In {
            a: common::hex(&e.worst_vectors.after.a),
            b: common::hex(&e.worst_vectors.after.b),
            cin: e.worst_vectors.after.cin == 1,
        };
        let byp = bypassed(&after, width, block);
        let block_of = |inst: &str| -> Option<usize> {
            inst.strip_prefix("xblk")?.split('.').next()?.parse().ok()
        };
        for (i, step) in e.worst_path.iter().enumerate() {
            let Some(k) = block_of(&step.instance) else {
                continue;
            };
            let in_chain = step.instance.contains(".xmc");
            if in_chain && byp[k] {
                let leaves = e.worst_path[i + 1..]
                    .iter()
                    .any(|s| block_of(&s.instance).is_some_and(|j| j > k));
                assert!(
                    !leaves,
                    "the worst path ripples through bypassed block {k} ({}) and goes on",
                    step.instance
                );
            }
        }
    }
}

#[test]
fn worst_pair_changes_its_output() {
    // The bit-parallel evaluator of the logic view (src/sim.rs) confirms the pair.
    for (arch, style) in [
        ("ripple", "static"),
        ("manchester", "static"),
        ("manchester", "dynamic"),
        ("carry-select", "static"),
        ("kogge-stone", "static"),
        ("brent-kung", "static"),
        ("carry-skip", "dynamic"),
    ] {
        let y = yaml("wp", arch, style, 8, 4, "none");
        let s = spec_of(&y);
        let d = carrywright::build(&s).unwrap();
        let e = engine::estimate_with(&s, &d, &timing(&s), small()).unwrap();
        assert!(e.worst_vectors.checked);
        let p = Pair {
            before: In {
                a: common::hex(&e.worst_vectors.before.a),
                b: common::hex(&e.worst_vectors.before.b),
                cin: e.worst_vectors.before.cin == 1,
            },
            after: In {
                a: common::hex(&e.worst_vectors.after.a),
                b: common::hex(&e.worst_vectors.after.b),
                cin: e.worst_vectors.after.cin == 1,
            },
        };
        let outs: Vec<&String> = e.outputs_ps.0.iter().map(|(k, _)| k).collect();
        let o = outs.iter().position(|k| **k == e.worst_vectors.to).unwrap();
        assert!(
            search::pair_changes_output(&d, p, o).unwrap(),
            "{arch} {style}"
        );
        // A control: in static style a pair with no input change changes nothing.
        if style == "static" {
            let still = Pair {
                before: p.after,
                after: p.after,
            };
            assert!(!search::pair_changes_output(&d, still, o).unwrap());
        }
        println!(
            "{arch} {style}: worst {} ps {} -> {}, checked by the evaluator",
            e.worst_ps, e.worst_vectors.from, e.worst_vectors.to
        );
    }
}

#[test]
fn prefix_grows_like_log_n_and_ripple_like_n() {
    // Kogge-Stone has log2 N levels (Kogge & Stone 1973; Harris 2003): each doubling of the
    // width adds about the same delay. Ripple grows linearly: doubling doubles it.
    let ks: Vec<f64> = [8usize, 16, 32]
        .iter()
        .map(|&w| {
            est(&yaml("ks", "kogge-stone", "static", w, 4, "none"))
                .1
                .worst_ps
        })
        .collect();
    let rc: Vec<f64> = [8usize, 16, 32]
        .iter()
        .map(|&w| {
            est(&yaml("rc", "ripple", "static", w, 4, "none"))
                .1
                .worst_ps
        })
        .collect();
    println!("kogge-stone 8/16/32: {ks:?} ps; ripple 8/16/32: {rc:?} ps");
    let (k1, k2) = (ks[1] - ks[0], ks[2] - ks[1]);
    assert!(k1 > 0.0 && k2 > 0.0, "prefix delay must grow with width");
    // Logarithmic: the increments per doubling stay within a factor 1.6 of each other
    // (fan-out and wire load grow a little), far from the doubling a linear law would give.
    assert!(k2 < 1.6 * k1, "Kogge-Stone increments {k1:.0}, {k2:.0} ps");
    // Linear: 32 bits take 1.7 to 2.3 times 16 bits (the fixed PG and sum stages shrink it).
    let r = rc[2] / rc[1];
    assert!(r > 1.7 && r < 2.3, "ripple 32/16 ratio {r:.2}");
    assert!(
        ks[2] < rc[2] / 2.0,
        "32-bit Kogge-Stone must beat ripple clearly"
    );
}

#[test]
fn estimate_is_deterministic() {
    let y = yaml("det", "carry-select", "static", 16, 4, "none");
    let s = spec_of(&y);
    let d = carrywright::build(&s).unwrap();
    let a = engine::estimate_with(&s, &d, &timing(&s), small()).unwrap();
    let b = engine::estimate_with(&s, &d, &timing(&s), small()).unwrap();
    let ja = search::render(&a, true);
    assert_eq!(ja, search::render(&b, true));
    for key in JSON_KEYS {
        assert!(ja.contains(&format!("\"{key}\"")), "JSON lacks {key}");
    }
}

#[test]
fn switch_level_values_agree_with_the_logic_view() {
    // After every timed pair the engine's output values (switch level, Bryant 1984) equal
    // native integer addition of the `after` vector, for every architecture and style, on
    // seeded random pairs: the transistor view the timing rests on computes the sum.
    use carrywright::emit::vectors::{mask, Rng};
    for arch in carrywright::spec::ARCHITECTURES {
        let styles: &[&str] = if arch.has_dynamic() {
            &["static", "dynamic"]
        } else {
            &["static"]
        };
        for style in styles {
            let w = 12;
            let s = spec_of(&yaml("sv", arch.as_str(), style, w, 4, "none"));
            let d = carrywright::build(&s).unwrap();
            let g = Graph::new(&s, &d, &timing(&s)).unwrap();
            let mut t = Timer::new(&g).unwrap();
            let mut rng = Rng::new(7);
            let m = mask(w);
            let mut r = || In {
                a: rng.next_u128() & m,
                b: rng.next_u128() & m,
                cin: rng.next_u64() & 1 == 1,
            };
            for _ in 0..40 {
                let p = Pair {
                    before: r(),
                    after: r(),
                };
                t.time(p).unwrap();
                let sum = p.after.a + p.after.b + p.after.cin as u128;
                let got = t.output_values();
                for (i, v) in got.iter().enumerate() {
                    assert_eq!(
                        *v,
                        sum >> i & 1 == 1,
                        "{} {style}: output {i} wrong after {p:?}",
                        arch.as_str()
                    );
                }
            }
        }
    }
}

#[test]
fn estimate_command_prints_json_and_refuses_missing_timing() {
    use std::process::Command;
    let dir = tempfile::tempdir().unwrap();
    let spec = dir.path().join("e.yaml");
    std::fs::write(&spec, yaml("e8", "sklansky", "static", 8, 4, "none")).unwrap();
    let out = Command::new(env!("CARGO_BIN_EXE_carrywright"))
        .args(["estimate", "--json"])
        .arg(&spec)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    for key in JSON_KEYS {
        assert!(v.get(key).is_some(), "JSON lacks {key}");
    }
    let worst = v["worst_ps"].as_f64().unwrap();
    let bound = v["bound_ps"].as_f64().unwrap();
    assert!(
        worst > 0.0 && worst <= bound,
        "worst {worst} ps, bound {bound} ps"
    );
    assert_eq!(v["outputs_ps"].as_object().unwrap().len(), 9);
    // A technology file without a timing block: exit 2 and a line that says what is missing.
    let tech = dir.path().join("t.yaml");
    let example = std::fs::read_to_string("configs/tech_example.yaml").unwrap();
    if example.contains("timing:") {
        return; // the example carries timing; nothing to refuse
    }
    std::fs::write(&tech, &example).unwrap();
    let spec2 = dir.path().join("f.yaml");
    std::fs::write(
        &spec2,
        yaml("f8", "ripple", "static", 8, 4, "none").replace(
            "technology: generic",
            &format!("technology: {}", tech.display()),
        ),
    )
    .unwrap();
    let out = Command::new(env!("CARGO_BIN_EXE_carrywright"))
        .args(["estimate"])
        .arg(&spec2)
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(err.contains("characterised timing"), "{err}");
}

/// `describe` shows the engine's worst path beside the structural count, and labels the
/// count as one: a 32-bit carry-skip adder is structurally deeper than ripple but its real
/// worst path is far shorter (the bypassed ripple is a false path; Rabaey et al. ch. 11).
#[test]
fn describe_labels_the_structural_depth_and_shows_the_worst_path() {
    let dir = tempfile::tempdir().unwrap();
    let mut seen = vec![];
    for (name, body) in [
        ("cs32", "architecture: carry-skip\nblock: 4\n"),
        ("rc32", "architecture: ripple\n"),
    ] {
        let spec = dir.path().join(format!("{name}.yaml"));
        std::fs::write(&spec, format!("name: {name}\nwidth: 32\n{body}")).unwrap();
        let o = std::process::Command::new(env!("CARGO_BIN_EXE_carrywright"))
            .args(["describe", "--json"])
            .arg(&spec)
            .output()
            .unwrap();
        assert!(o.status.success());
        let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
        assert!(v["counts"].get("logic_depth").is_none());
        let depth = v["counts"]["topological_depth_stages"].as_u64().unwrap();
        let worst = v["timing"]["worst_ps"].as_f64().unwrap();
        seen.push((depth, worst));
    }
    let ((d_skip, w_skip), (d_ripple, w_ripple)) = (seen[0], seen[1]);
    assert!(
        d_skip > d_ripple,
        "the structural count is deeper for carry-skip"
    );
    assert!(
        w_skip * 2.0 < w_ripple,
        "carry-skip {w_skip} ps should be far faster than ripple {w_ripple} ps"
    );
}

/// Every architecture and style (block 4, and Manchester buffered every 4), on `generic` at
/// 8, 13 and 24 bits and on the characterised GF180MCU typical and SKY130 tt files at 16 bits:
/// the pruned search, which skips hard pairs whose inputs cannot reach an output in time by the
/// topological reach scaled by the share of it the timed pairs arrived at, finds the same worst
/// arrival as the search that times every hard pair. (The reach and the share are this
/// engine's own figures and the rule a heuristic; the check is that pruning loses nothing.)
#[test]
fn pruned_search_finds_the_full_search_worst() {
    let mut cases = vec![];
    for a in spec::ARCHITECTURES {
        let arch = a.as_str();
        for style in ["static", "dynamic"] {
            if style == "dynamic" && !a.has_dynamic() {
                continue;
            }
            let buffers = if arch == "manchester" {
                "{every: 4}"
            } else {
                "none"
            };
            for width in [8usize, 13, 24] {
                cases.push(yaml("p", arch, style, width, 4, buffers));
            }
            for tech in ["gf180mcu-3v3", "sky130-1v8"] {
                let y = yaml("p", arch, style, 16, 4, buffers);
                cases.push(y.replace("technology: generic", &format!("technology: {tech}")));
            }
        }
    }
    let mut pruned_total = 0;
    let mut full_total = 0;
    for y in &cases {
        let s = spec_of(y);
        let d = carrywright::build(&s).unwrap();
        let g = Graph::new(&s, &d, &timing(&s)).unwrap();
        let full = search::search(
            &g,
            Budget {
                prune: false,
                ..small()
            },
        )
        .unwrap();
        let pruned = search::search(&g, small()).unwrap();
        assert!(
            (pruned.ps - full.ps).abs() < 1e-9,
            "pruning lost the worst pair: {} ps against {} ps for\n{y}",
            pruned.ps,
            full.ps
        );
        pruned_total += pruned.pairs_timed;
        full_total += full.pairs_timed;
    }
    eprintln!("pairs timed: pruned {pruned_total}, full {full_total}");
    assert!(pruned_total < full_total, "pruning skipped nothing");
}

/// Stages of one class (a bit slice repeated along the adder) share their solves; that must
/// change nothing: every architecture and style, the worst pair's arrival to the bit, its
/// path and the delay to every output equal the search with sharing off. (A check of the
/// engine against itself: the sharing is an optimisation, not a model.)
#[test]
fn shared_stage_solves_change_nothing() {
    for a in spec::ARCHITECTURES {
        let arch = a.as_str();
        for style in ["static", "dynamic"] {
            if style == "dynamic" && !a.has_dynamic() {
                continue;
            }
            let buffers = if arch == "manchester" {
                "{every: 8}"
            } else {
                "none"
            };
            let y = yaml("p", arch, style, 32, 4, buffers);
            let s = spec_of(&y);
            let d = carrywright::build(&s).unwrap();
            let mut g = Graph::new(&s, &d, &timing(&s)).unwrap();
            let classes: std::collections::HashSet<u32> = g
                .class_of
                .iter()
                .copied()
                .filter(|&c| c != u32::MAX)
                .collect();
            assert!(
                classes.len() < g.stages.len(),
                "{arch} {style}: no stage shares a class"
            );
            g.share_classes = false;
            let alone = search::search(&g, small()).unwrap();
            g.share_classes = true;
            let shared = search::search(&g, small()).unwrap();
            assert_eq!(alone.ps.to_bits(), shared.ps.to_bits(), "{arch} {style}");
            assert_eq!(alone.pair, shared.pair, "{arch} {style}");
            assert_eq!(
                format!("{:?}", alone.path),
                format!("{:?}", shared.path),
                "{arch} {style}"
            );
            assert_eq!(
                format!("{:?}", alone.profile),
                format!("{:?}", shared.profile),
                "{arch} {style}"
            );
            assert_eq!(
                alone.switched_ff.to_bits(),
                shared.switched_ff.to_bits(),
                "{arch} {style}"
            );
        }
    }
}

/// Diffusion geometry (`cells::diffusion_ends`): the inner node of a grey cell's AOI21 NMOS
/// stack (`gn_xn`: two NMOS channel ends, no gate, no pin) is one shared, uncontacted region,
/// half to each device (W·s/2, W + s); the output inverter's drains are contacted (W·e,
/// 2(W + e)). The SPICE text prints it and the engine's node capacitance takes the shared
/// figure there and the contacted one elsewhere (generic: e = 0.96 µm, s = 0.53 µm).
#[test]
fn series_stack_shares_its_inner_diffusion_in_the_deck_and_the_engine() {
    let s = spec_of("name: kd4\nwidth: 4\narchitecture: kogge-stone\ntestbench: {random: 2}\n");
    let files = carrywright::generate(&s).unwrap().files;
    let sp = &files.iter().find(|(n, _)| n == "kd4.sp").unwrap().1;
    let grey: Vec<&str> = sp
        .lines()
        .skip_while(|l| !l.starts_with(".subckt kd4_grey "))
        .take_while(|l| !l.starts_with(".ends"))
        .collect();
    let line = |name: &str| {
        *grey
            .iter()
            .find(|l| l.starts_with(&format!("{name} ")))
            .unwrap_or_else(|| panic!("no {name} in\n{}", grey.join("\n")))
    };
    // The stack (W = 2 µm): drain on the output (contacted), source on gn_xn (shared), and
    // the reverse for the lower device.
    assert!(
        line("mn_gn_b").ends_with("w=2u l=0.35u ad=1.92p as=0.53p pd=5.92u ps=2.53u"),
        "{}",
        line("mn_gn_b")
    );
    assert!(
        line("mn_gn_c").ends_with("w=2u l=0.35u ad=0.53p as=1.92p pd=2.53u ps=5.92u"),
        "{}",
        line("mn_gn_c")
    );
    // The inverter: both ends contacted.
    assert!(
        line("mn_g").ends_with("w=1u l=0.35u ad=0.96p as=0.96p pd=3.92u ps=3.92u"),
        "{}",
        line("mn_g")
    );
    assert!(
        line("mp_g").ends_with("w=2.5u l=0.35u ad=2.4p as=2.4p pd=6.92u ps=6.92u"),
        "{}",
        line("mp_g")
    );
    // The engine: raise the shared figure alone, then the contacted one alone, and compare
    // every node's capacitance with the untouched graph's.
    let design = carrywright::build(&s).unwrap();
    let tm = timing(&s);
    let base = Graph::new(&s, &design, &tm).unwrap();
    let delta = 1.0;
    let mut shared = tm.clone();
    shared.c_diff_shared_n_ff_um =
        Some(tm.c_diff_ff_um(carrywright::cells::Mos::N, carrywright::tech::End::Shared) + delta);
    let with_shared = Graph::new(&s, &design, &shared).unwrap();
    let mut contacted = tm.clone();
    contacted.c_diff_shared_n_ff_um =
        Some(tm.c_diff_ff_um(carrywright::cells::Mos::N, carrywright::tech::End::Shared));
    contacted.c_diff_n_ff_um += delta;
    let with_contacted = Graph::new(&s, &design, &contacted).unwrap();
    // The grey and black cells' leaves (their AOI21 has the stack).
    let prefix_leaves: Vec<String> = design
        .flatten()
        .leaves
        .iter()
        .filter(|l| l.kind.prefix_drive().is_some())
        .map(|l| format!("{}.", l.path))
        .collect();
    assert!(!prefix_leaves.is_empty());
    let mut stacks = 0;
    for (i, name) in base.names.iter().enumerate() {
        if !prefix_leaves.iter().any(|p| name.starts_with(p.as_str())) {
            continue;
        }
        let ds = with_shared.cap_ff[i] - base.cap_ff[i];
        let dc = with_contacted.cap_ff[i] - base.cap_ff[i];
        if name.ends_with(".gn_xn") {
            // Two NMOS ends of W = 2 µm, both shared.
            assert!((ds - 4.0 * delta).abs() < 1e-9, "{name}: {ds}");
            assert!(dc.abs() < 1e-9, "{name}: {dc}");
            stacks += 1;
        } else if name.ends_with(".gn") {
            // The AOI's output: NMOS drains of 1 and 2 µm, contacted.
            assert!(ds.abs() < 1e-9, "{name}: {ds}");
            assert!((dc - 3.0 * delta).abs() < 1e-9, "{name}: {dc}");
        }
    }
    assert!(
        stacks > 0,
        "no grey cell stack node among {:?}",
        &base.names[..base.names.len().min(40)]
    );
}
