//! The internal checks must pass every correct design and catch broken ones: the
//! bit-parallel logic check against native integer addition, and the structural checks
//! (one driver per net, no unused net) and the keeper check.

use carrywright::cells::{CellKind, Expr};
use carrywright::netlist::Master;
use carrywright::spec::{self, LoadOptions};
use carrywright::{sim, Generated};
use std::path::Path;

fn parse(yaml: &str) -> carrywright::spec::Spec {
    spec::parse(yaml, "test", Path::new("."), &LoadOptions::default())
        .unwrap_or_else(|e| panic!("{e}\n{yaml}"))
}

/// Every buffer placement for small widths, exhaustively checked (2^(2W+1) vectors).
#[test]
fn every_small_design_adds_exhaustively() {
    let mut designs = 0;
    for w in 1..=6usize {
        let y = format!("name: r{w}\nwidth: {w}\narchitecture: ripple\n");
        let r = sim::check(&carrywright::build(&parse(&y)).unwrap(), 1, 0, 12).unwrap();
        assert!(r.exhaustive && r.mismatches == 0, "{y}: {r:?}");
        designs += 1;
        for style in ["static", "dynamic"] {
            for block in 1..=w {
                let boundaries: Vec<usize> = (1..w).filter(|p| p % block == 0).collect();
                // Every subset of the block boundaries as buffer positions.
                for mask in 0..(1u32 << boundaries.len()) {
                    let at: Vec<usize> = boundaries
                        .iter()
                        .enumerate()
                        .filter(|(i, _)| mask >> i & 1 == 1)
                        .map(|(_, p)| *p)
                        .collect();
                    let buffers = if at.is_empty() {
                        "none".to_string()
                    } else {
                        format!("{{at: {at:?}}}")
                    };
                    for inverting in [true, false] {
                        if !inverting && (style == "dynamic" || at.is_empty()) {
                            continue;
                        }
                        let buffers = if inverting {
                            buffers.clone()
                        } else {
                            format!("{{at: {at:?}, inverting: false}}")
                        };
                        let y = format!("name: m{w}\nwidth: {w}\narchitecture: manchester\nstyle: {style}\nblock: {block}\nbuffers: {buffers}\n");
                        let d =
                            carrywright::build(&parse(&y)).unwrap_or_else(|e| panic!("{e}\n{y}"));
                        let r = sim::check(&d, 1, 0, 12).unwrap();
                        assert!(r.exhaustive && r.mismatches == 0, "{y}: {r:?}");
                        assert_eq!(r.vectors, 1u64 << (2 * w + 1));
                        designs += 1;
                    }
                }
            }
        }
    }
    assert!(designs > 100, "only {designs} designs checked");
}

/// Wide designs: directed plus 100,000 random vectors (the `check` command's minimum).
#[test]
fn wide_designs_pass_random_check() {
    for y in [
        "name: r128\nwidth: 128\narchitecture: ripple\n",
        "name: m128\nwidth: 128\narchitecture: manchester\nblock: 4\nbuffers: {every: 8}\n",
        "name: d64\nwidth: 64\narchitecture: manchester\nstyle: dynamic\nblock: 4\nbuffers: {every: 4}\n",
        "name: m45\nwidth: 45\narchitecture: manchester\nblock: 6\nbuffers: {every: 12, inverting: false}\n",
    ] {
        let d = carrywright::build(&parse(y)).unwrap();
        let r = sim::check(&d, 9, sim::RANDOM_MIN, sim::EXHAUSTIVE_MAX).unwrap();
        assert!(!r.exhaustive && r.mismatches == 0 && r.vectors >= 100_000, "{y}: {r:?}");
    }
}

fn generated(yaml: &str) -> Generated {
    carrywright::generate(&parse(yaml)).unwrap()
}

/// A wrong sum function in one cell is caught by the bit-parallel check.
#[test]
fn logic_check_catches_a_wrong_cell_function() {
    let mut d = generated("name: m16\nwidth: 16\narchitecture: manchester\nblock: 4\n").design;
    let sum = d.cells.get_mut(&CellKind::SumInverted).unwrap();
    sum.logic[0].1 = Expr::Xor(vec![Expr::Pin(0), Expr::Pin(1)]);
    let r = sim::check(&d, 1, 1000, 12).unwrap();
    assert!(r.mismatches > 0, "a wrong sum cell passed");
    assert!(sim::check_or_fail(&d, 1, 1000, 12).is_err());
}

/// A carry-out driver of the wrong polarity (buffer instead of inverter) is caught, in a
/// design wide enough that only directed and random vectors run.
#[test]
fn logic_check_catches_a_wrong_polarity() {
    let mut d = generated(
        "name: m32\nwidth: 32\narchitecture: manchester\nblock: 4\nbuffers: {every: 8}\n",
    )
    .design;
    d.cells.entry(CellKind::Buf).or_insert_with(|| {
        let lib = carrywright::cells::Library::new(carrywright::cells::Sizes::new(
            &carrywright::tech::builtin("generic", &Default::default()).unwrap(),
            &parse("name: x\nwidth: 4\narchitecture: ripple\n").sizing,
        ));
        lib.cell(CellKind::Buf)
    });
    let top = d.modules.last_mut().unwrap();
    let xcout = top
        .instances
        .iter_mut()
        .find(|i| i.name == "xcout")
        .unwrap();
    xcout.master = Master::Cell(if xcout.master == Master::Cell(CellKind::Inv) {
        CellKind::Buf
    } else {
        CellKind::Inv
    });
    d.check().unwrap();
    let r = sim::check(&d, 1, 5000, 12).unwrap();
    assert!(!r.exhaustive && r.mismatches > 0, "{r:?}");
    assert!(r.first_mismatch.unwrap().contains("cout="));
}

/// Two drivers on one net, and a net nobody reads, are structural errors.
#[test]
fn structural_check_catches_bad_wiring() {
    let d = generated("name: m8\nwidth: 8\narchitecture: manchester\nblock: 4\n").design;
    let mut two = d.clone();
    let top = two.modules.last_mut().unwrap();
    // Drive the carry-in node from the first block's carry-out too.
    let co = top
        .instances
        .iter()
        .find(|i| i.name == "xblk0")
        .unwrap()
        .conns
        .last()
        .copied()
        .unwrap();
    let cin_inv = top.instances.iter_mut().find(|i| i.name == "xcin").unwrap();
    cin_inv.conns[1] = co;
    let err = two.check().unwrap_err().to_string();
    assert!(
        err.contains("drivers") || err.contains("never used"),
        "{err}"
    );

    let mut unused = d.clone();
    unused.modules.last_mut().unwrap().net("dangling");
    let err = unused.check().unwrap_err().to_string();
    assert!(err.contains("dangling"), "{err}");
}

/// The length a keeper refusal promises ("the longest that passes is N bits").
fn longest_in(m: &str) -> usize {
    m.split("the longest that passes is ")
        .nth(1)
        .and_then(|r| r.split(' ').next())
        .and_then(|n| n.parse().ok())
        .unwrap_or_else(|| panic!("no length in {m}"))
}

/// The keeper check (src/timing/keeper.rs): a dynamic chain whose discharge front its
/// keepers stall at the slow corner is a spec problem: exit 2, one line naming the key to
/// change and the longest chain that passes, found by the check itself. The longest it
/// promises is exact: that many bits pass, one more fails, and the suggested `every` is a
/// multiple of the block that builds. (Measured in ngspice on GF180MCU at typical and at ss,
/// 125 °C, a 32-bit unbuffered chain at keeper 0.1 never lets cout rise in the deck's
/// evaluate phase while 16 bits at 0.2 and 32 bits at 0.05 pass: the closing note's grid.)
#[test]
fn keeper_check_refuses_a_stalled_chain_and_names_the_longest_that_passes() {
    // `buffers: none` spelled out: with no buffers key such a chain gets the buffers
    // `buffers: auto` would choose (below).
    let spec = |w: usize, block: usize, extra: &str| {
        let none = if extra.contains("buffers") {
            ""
        } else {
            "buffers: none\n"
        };
        parse(&format!(
            "name: d\nwidth: {w}\narchitecture: manchester\nstyle: dynamic\nblock: {block}\n{extra}{none}"
        ))
    };
    let err = carrywright::build(&spec(40, 1, "")).unwrap_err();
    assert_eq!(err.exit_code(), 2, "{err}");
    let m = err.to_string();
    assert!(!m.contains('\n'), "{m}");
    assert!(
        m.starts_with("test:6:1: buffers: the unbuffered dynamic chain from bit 0 to bit 39 (40 bits) fails the keeper check at sizing.keeper 0.1 ("),
        "{m}"
    );
    // No buffers key: the same chain is buffered as `auto` would, says so, and passes.
    let default = parse("name: d\nwidth: 40\narchitecture: manchester\nstyle: dynamic\nblock: 1\n");
    let how = default.buffers.auto.clone().expect("buffers chosen");
    assert_eq!(how.rule, carrywright::spec::DEFAULT_DYNAMIC_BUFFERS_RULE);
    assert!(!default.buffers.positions.is_empty());
    carrywright::build(&default).unwrap();
    assert!(m.contains("stalls at"), "{m}");
    let fits = longest_in(&m);
    assert!((2..40).contains(&fits), "{m}");
    carrywright::build(&spec(fits, fits, "")).unwrap();
    let over = carrywright::build(&spec(fits + 1, fits + 1, "")).unwrap_err();
    assert_eq!(over.exit_code(), 2, "{over}");
    // With 4-bit blocks the suggestion is the largest multiple of 4 that fits, and it builds.
    let m4 = carrywright::build(&spec(40, 4, ""))
        .unwrap_err()
        .to_string();
    let every = fits / 4 * 4;
    assert!(
        m4.contains(&format!("(e.g. {{every: {every}}} or auto)")),
        "{m4}"
    );
    carrywright::build(&spec(40, 4, &format!("buffers: {{every: {every}}}\n"))).unwrap();
    // A block longer than what fits: the key is `block`, with the line of the key.
    let mb = carrywright::build(&spec(
        2 * fits + 4,
        fits + 2,
        &format!("buffers: {{every: {}}}\n", fits + 2),
    ))
    .unwrap_err()
    .to_string();
    assert!(
        mb.starts_with("test:5:1: block: the unbuffered dynamic chain from bit 0 to bit "),
        "{mb}"
    );
    // A weaker keeper lets a longer chain through; no keeper, any length.
    carrywright::build(&spec(fits + 1, fits + 1, "sizing: {keeper: 0.05}\n")).unwrap();
    carrywright::build(&spec(40, 40, "sizing: {keeper: 0}\n")).unwrap();
    // Carry-skip restarts its dynamic chain at every block: the key is `block`.
    let skip = parse(&format!(
        "name: k\nwidth: {}\narchitecture: carry-skip\nstyle: dynamic\nblock: {}\n",
        2 * (fits + 2),
        fits + 2
    ));
    let e = carrywright::build(&skip).unwrap_err();
    assert_eq!(e.exit_code(), 2, "{e}");
    assert!(e.to_string().starts_with("test:5:1: block: "), "{e}");
}

/// A keeper near the drive's strength lets only short chains through: the message names
/// `block` (the block itself is too long) and its suggestion builds.
#[test]
fn keeper_check_suggestion_for_a_strong_keeper_builds() {
    let strong = parse("name: d8\nwidth: 8\narchitecture: manchester\nstyle: dynamic\nblock: 8\nsizing: {keeper: 0.9}\n");
    let err = carrywright::build(&strong).unwrap_err();
    assert_eq!(err.exit_code(), 2, "{err}");
    let m = err.to_string();
    assert!(m.starts_with("test:5:1: block: "), "{m}");
    let fits = longest_in(&m);
    assert!((1..8).contains(&fits), "{m}");
    assert!(
        m.contains(&format!(
            "use block: {fits} or less with buffers {{every: {fits}}}"
        )),
        "{m}"
    );
    carrywright::build(&parse(&format!("name: d8\nwidth: 8\narchitecture: manchester\nstyle: dynamic\nblock: {fits}\nbuffers: {{every: {fits}}}\nsizing: {{keeper: 0.9}}\n"))).unwrap();
}

/// The check's report: every segment of a buffered dynamic chain at the slow corner, each
/// front completing, the holding rule checked at the leaky corner with its margin.
#[test]
fn keeper_report_covers_every_segment() {
    let s = parse("name: d16\nwidth: 16\narchitecture: manchester\nstyle: dynamic\nblock: 4\nbuffers: {every: 4}\ntechnology: gf180mcu-3v3\n");
    let d = carrywright::build(&s).unwrap();
    let r = carrywright::timing::keeper::check(&s, &d)
        .unwrap()
        .expect("a dynamic design with keepers is checked");
    assert!(r.failure.is_none(), "{:?}", r.failure);
    assert!(
        r.slow_corner.starts_with("ss, 125 degC"),
        "{}",
        r.slow_corner
    );
    assert_eq!(
        r.fronts.len(),
        4,
        "one front per 4-bit segment: {:?}",
        r.fronts
    );
    for f in &r.fronts {
        assert!(f.stalled.is_none() && f.end_ps.is_some(), "{f:?}");
        assert!(f.duration_ps().unwrap() > 0.0 && f.duration_ps().unwrap() < r.limit_ps);
    }
    assert!(r
        .leaky_corner
        .as_deref()
        .unwrap_or("")
        .starts_with("ff, 125 degC"));
    assert!(!r.holds.is_empty());
    for h in &r.holds {
        assert!(
            h.keeper_ua >= carrywright::timing::keeper::LEAK_MARGIN * h.leakage_ua,
            "{h:?}"
        );
    }
    // A static design, or a dynamic one without keepers, has nothing to check.
    let st = parse("name: s16\nwidth: 16\narchitecture: manchester\nblock: 4\n");
    let ds = carrywright::build(&st).unwrap();
    assert!(carrywright::timing::keeper::check(&st, &ds)
        .unwrap()
        .is_none());
}

/// Counts follow from the cells: a W-bit ripple adder is W mirror adders of 28 transistors.
#[test]
fn ripple_counts() {
    for w in [4, 13, 64] {
        let g = generated(&format!("name: r\nwidth: {w}\narchitecture: ripple\n"));
        let c = carrywright::emit::summary::counts(&g.design);
        assert_eq!(c.transistors, 28 * w);
        assert_eq!(c.cells, w);
    }
}
