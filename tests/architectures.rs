//! Every architecture at widths 4, 8, 16, 32, 64 and two odd widths, through the same views
//! and the same outside checks as the foundation: Icarus Verilog runs the generated
//! testbench, Verilator lints the design clean, Yosys proves it equal to a + b + cin
//! (IEEE Std 1364-2005 semantics of `+`). Eight-bit designs of each architecture also run in
//! ngspice with the GF180MCU models (typical corner), every sampled level right and the
//! measurements back.

mod common;

const WIDTHS: &[usize] = &[4, 8, 16, 32, 64, 13, 27];

fn run_arch(arch: &str, extra: &[&str]) {
    if !common::tools(&["iverilog", "vvp", "verilator", "yosys"]) {
        return;
    }
    for &w in WIDTHS {
        for body in std::iter::once(&"").chain(extra.iter()) {
            let name = format!("{}_{w}", arch.replace('-', "_"));
            common::climb(&format!(
                "name: {name}\nwidth: {w}\narchitecture: {arch}\n{body}testbench: {{random: 32, seed: 4}}\n"
            ));
        }
    }
}

#[test]
fn carry_skip() {
    run_arch(
        "carry-skip",
        &["block: sqrt\n", "style: dynamic\nblock: 3\n"],
    );
}

#[test]
fn carry_select() {
    run_arch("carry-select", &["block: sqrt\n"]);
}

#[test]
fn lookahead() {
    // Four-bit groups: 64 bits have 16 groups and take the second lookahead level.
    run_arch("lookahead", &["block: 3\n"]);
}

#[test]
fn kogge_stone() {
    run_arch("kogge-stone", &["block: 4\n", "buffers: {fanout: 2}\n"]);
}

#[test]
fn brent_kung() {
    run_arch("brent-kung", &["block: 2\n"]);
}

#[test]
fn sklansky() {
    run_arch("sklansky", &["buffers: {fanout: 4}\n"]);
}

#[test]
fn han_carlson() {
    run_arch("han-carlson", &["block: 4\n"]);
}

#[test]
fn ladner_fischer() {
    run_arch("ladner-fischer", &["buffers: {fanout: 3}\n"]);
}

#[test]
fn knowles() {
    run_arch("knowles", &["block: 2\n"]);
}

#[test]
fn ngspice_eight_bit_each_architecture_gf180() {
    if !common::tools(&["ngspice"]) {
        return;
    }
    let Some(models) = common::model_dir() else {
        return;
    };
    for body in [
        "architecture: carry-skip\nblock: 4\n",
        "architecture: carry-skip\nstyle: dynamic\nblock: 4\n",
        "architecture: carry-select\nblock: sqrt\n",
        "architecture: lookahead\nblock: 4\n",
        "architecture: kogge-stone\n",
        "architecture: brent-kung\n",
        "architecture: sklansky\n",
        "architecture: han-carlson\n",
        "architecture: ladner-fischer\n",
        "architecture: knowles\nbuffers: {fanout: 3}\n",
    ] {
        let yaml = format!(
            "name: a8\nwidth: 8\n{body}technology: gf180mcu-3v3\ntestbench: {{random: 0, seed: 5, load: 5f, step: 50p}}\n"
        );
        let (dir, _g, s) = common::generate(&yaml, Some(models.clone()));
        let out = dir.path().join("out");
        let (ok, log) = common::ngspice(&out, &s.name);
        assert!(ok && log.contains("PASS a8"), "{body}: deck failed:\n{log}");
        let v = common::printed(&log);
        let t = v.get("tcarry_rise").copied().unwrap_or(-1.0);
        let p = v.get("power").copied().unwrap_or(-1.0);
        assert!(
            t > 0.0 && t < 20e-9 && p > 0.0,
            "{body}: tcarry_rise {t}, power {p}"
        );
        common::check_deck_levels(&out, "a8", 3.3, &log);
    }
}
