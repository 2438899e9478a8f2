//! The Verilog view against outside tools, for every design in the matrix of the foundation:
//! Icarus Verilog runs the generated testbench, Verilator lints the design clean, and Yosys
//! proves it equal to a + b + cin (IEEE Std 1364-2005 semantics of `+`).

mod common;

fn spec(name: &str, width: usize, arch: &str, style: &str, block: usize, buffers: &str) -> String {
    format!(
        "name: {name}\nwidth: {width}\narchitecture: {arch}\nstyle: {style}\nblock: {block}\nbuffers: {buffers}\ntestbench: {{random: 48, seed: 3}}\n"
    )
}

fn matrix(cases: &[String]) {
    if !common::tools(&["iverilog", "vvp", "verilator", "yosys"]) {
        return;
    }
    for c in cases {
        common::climb(c);
    }
}

#[test]
fn ripple_4_to_64() {
    let cases: Vec<String> = [4, 8, 13, 32, 64]
        .iter()
        .map(|&w| format!("name: rip{w}\nwidth: {w}\narchitecture: ripple\ntestbench: {{random: 48, seed: 3}}\n"))
        .collect();
    matrix(&cases);
}

/// Static Manchester: several block sizes, unbuffered, inverting buffers (polarity flips from
/// block to block), inverter pairs, explicit positions, and a short last block (13 bits).
fn static_cases(w: usize) -> Vec<String> {
    let mut v = vec![spec(
        &format!("ms{w}_b4"),
        w,
        "manchester",
        "static",
        4,
        "none",
    )];
    if w > 4 {
        v.push(spec(
            &format!("ms{w}_b4e4"),
            w,
            "manchester",
            "static",
            4,
            "{every: 4}",
        ));
        v.push(spec(
            &format!("ms{w}_b2e4n"),
            w,
            "manchester",
            "static",
            2,
            "{every: 4, inverting: false}",
        ));
        v.push(spec(
            &format!("ms{w}_b3at"),
            w,
            "manchester",
            "static",
            3,
            "{at: [3]}",
        ));
    } else {
        v.push(spec(
            &format!("ms{w}_b2e2"),
            w,
            "manchester",
            "static",
            2,
            "{every: 2}",
        ));
        v.push(spec(
            &format!("ms{w}_b1e1"),
            w,
            "manchester",
            "static",
            1,
            "{every: 1}",
        ));
    }
    if w >= 13 {
        v.push(spec(
            &format!("ms{w}_b5at"),
            w,
            "manchester",
            "static",
            5,
            "{at: [5, 10]}",
        ));
        v.push(spec(
            &format!("ms{w}_b8e8"),
            w,
            "manchester",
            "static",
            8,
            "{every: 8}",
        ));
    }
    v
}

#[test]
fn manchester_static_4_8_13() {
    matrix(
        &[4, 8, 13]
            .iter()
            .flat_map(|&w| static_cases(w))
            .collect::<Vec<_>>(),
    );
}

#[test]
fn manchester_static_32() {
    matrix(&static_cases(32));
}

#[test]
fn manchester_static_64() {
    matrix(&static_cases(64));
}

#[test]
fn manchester_dynamic_4_8_16() {
    let mut cases = vec![];
    for w in [4, 8, 16] {
        // Unbuffered up to 8 bits; 16 bits unbuffered is refused by the keeper check on the
        // generic cards (its front stalls), so it is buffered every 8.
        cases.push(spec(
            &format!("md{w}_b4"),
            w,
            "manchester",
            "dynamic",
            4,
            if w > 8 { "{every: 8}" } else { "none" },
        ));
        cases.push(spec(
            &format!("md{w}_b2e2"),
            w,
            "manchester",
            "dynamic",
            2,
            "{every: 2}",
        ));
        if w > 4 {
            cases.push(spec(
                &format!("md{w}_b4e4"),
                w,
                "manchester",
                "dynamic",
                4,
                "{every: 4}",
            ));
            cases.push(spec(
                &format!("md{w}_b3at"),
                w,
                "manchester",
                "dynamic",
                3,
                "{at: [3, 6]}",
            ));
        }
    }
    // No keeper at all.
    cases.push("name: md8_nokeep\nwidth: 8\narchitecture: manchester\nstyle: dynamic\nblock: 8\nsizing: {keeper: 0}\n".into());
    matrix(&cases);
}

/// The outside checks can fail: one wrong sum cell (XNOR turned into XOR) makes the Icarus
/// testbench stop with $fatal and the Yosys proof fail.
#[test]
fn broken_verilog_is_caught_by_icarus_and_yosys() {
    if !common::tools(&["iverilog", "vvp", "yosys"]) {
        return;
    }
    let (dir, _g, s) = common::generate(&spec("brk8", 8, "manchester", "static", 4, "none"), None);
    let out = dir.path().join("out");
    icarus_catches(
        &out,
        &s.name,
        "brk8.v",
        ("assign s = ~(p ^ ci);", "assign s = p ^ ci;"),
        "expected",
    );
    let (proved, log) = common::yosys_prove(&out, &s.name, 8, false);
    assert!(!proved, "Yosys proved a broken adder:\n{log}");
}

/// Random vectors past the listed ones are drawn in the simulator by the testbench's copy of
/// SplitMix64 (Steele, Lea & Flood, OOPSLA 2014): Icarus runs them all at 13 and 128 bits
/// (the widest word, the largest seed), the count it reports is directed + random, and a
/// testbench whose generator differs from carrywright's stops at the first listed vector.
#[test]
fn testbench_draws_its_random_vectors_like_carrywright() {
    if !common::tools(&["iverilog", "vvp"]) {
        return;
    }
    for yaml in [
        "name: hub_rnd13\nwidth: 13\narchitecture: manchester\nstyle: dynamic\nblock: 4\nbuffers: {every: 4}\ntestbench: {random: 700, seed: 5}\n",
        "name: hub_rnd128\nwidth: 128\narchitecture: sklansky\ntestbench: {random: 300, seed: 18446744073709551615}\n",
    ] {
        let (dir, _g, s) = common::generate(yaml, None);
        let out = dir.path().join("out");
        let log = common::icarus(&out, &s.name);
        // 7 directed, the engine's worst pair (after alone in dynamic style), the random ones.
        let pair = if s.style.as_str() == "dynamic" { 1 } else { 2 };
        let want = format!(
            "PASS {}: {} vectors",
            s.name,
            7 + pair + s.testbench.random
        );
        assert!(log.contains(&want), "expected `{want}` in:\n{log}");

        icarus_catches(
            &out,
            &s.name,
            &format!("{}_tb.v", s.name),
            ("64'h94d049bb133111eb", "64'h94d049bb133111ed"),
            "random vector 0: this generator drew",
        );
    }
}

/// Both files carry a timescale (Icarus wants it in every file or in none) and keep implicit
/// nets out with `default_nettype none`, restored to `wire` at the end of each file (common
/// practice, so files read after them are not affected).
#[test]
fn both_files_set_timescale_and_nettype() {
    let s = carrywright::spec::parse(
        "name: hub_ts8\nwidth: 8\narchitecture: ripple\n",
        "t",
        std::path::Path::new("."),
        &Default::default(),
    )
    .unwrap();
    for (name, text) in carrywright::generate(&s).unwrap().files {
        if name.ends_with(".v") {
            assert!(
                text.starts_with("`timescale 1ns/1ps\n`default_nettype none\n"),
                "{name}"
            );
            assert!(text.ends_with("`default_nettype wire\n"), "{name}");
        }
    }
}

/// Edit one generated file (`from` -> `to`, which must occur) and check that the Icarus run
/// then fails with `expect` in its log.
fn icarus_catches(
    out: &std::path::Path,
    name: &str,
    file: &str,
    (from, to): (&str, &str),
    expect: &str,
) {
    let path = out.join(file);
    let text = std::fs::read_to_string(&path).unwrap();
    assert!(text.contains(from), "`{from}` is not in {file}");
    std::fs::write(&path, text.replace(from, to)).unwrap();
    let (passed, log) = common::icarus_run(out, name);
    assert!(
        !passed && log.contains(expect),
        "Icarus passed after `{from}` became `{to}` in {file}:\n{log}"
    );
}
