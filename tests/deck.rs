//! The deck keeps its promises on any machine: it simulates the netlist it was generated
//! with wherever ngspice is started, carries no path of the machine, loads only model files
//! that were scanned, measures each delay inside its own vector, runs on one thread with a
//! separate largest step, and says little unless asked. Technology files are checked against
//! their model files when loaded. ngspice 39 behaviour relied on here was measured on this
//! machine (shared/EDA-RECIPES.md): it resolves a relative `.include` in the working folder
//! first, and `-D NAME` defines a control variable.

mod common;

use std::path::{Path, PathBuf};
use std::process::Command;

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_carrywright"))
}

/// (exit code, stdout, stderr)
fn run(cmd: &mut Command) -> (i32, String, String) {
    let o = cmd.output().expect("the binary runs");
    (
        o.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&o.stdout).into_owned(),
        String::from_utf8_lossy(&o.stderr).into_owned(),
    )
}

fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

const GEN4: &str =
    "name: wr4\nwidth: 4\narchitecture: manchester\nblock: 4\ntestbench: {random: 0, step: 50p}\n";

/// A hostile NAME.sp in ngspice's working folder is never read: the deck carries its own
/// netlist. Before, `.include NAME.sp` found the working folder's copy first.
#[test]
fn deck_ignores_a_netlist_in_the_working_folder() {
    if !common::tools(&["ngspice"]) {
        return;
    }
    let (dir, _g, s) = common::generate(GEN4, None);
    let out = dir.path().join("out");
    let cwd = dir.path().join("elsewhere");
    std::fs::create_dir(&cwd).unwrap();
    let marker = cwd.join("PWNED");
    write(
        &cwd,
        "wr4.sp",
        &format!(".control\nshell touch {}\n.endc\n", marker.display()),
    );
    write(&cwd, "wr4_tb.sp", ".control\nshell touch PWNED\n.endc\n");
    let (ok, log) = common::ngspice_in(&cwd, &out.join("wr4_tb.sp"), &[]);
    assert!(ok && log.contains("PASS wr4"), "{log}");
    assert!(
        !marker.exists(),
        "the deck ran a file from the working folder"
    );
    assert!(!cwd.join("PWNED").exists());
    assert!(
        !std::fs::read_to_string(out.join("wr4_tb.sp"))
            .unwrap()
            .contains(".include wr4.sp"),
        "{}",
        s.name
    );
}

/// A correct NAME.sp next to a deck whose own netlist is broken must not make it pass.
#[test]
fn deck_simulates_its_own_netlist() {
    if !common::tools(&["ngspice"]) {
        return;
    }
    let (dir, _g, _s) = common::generate(GEN4, None);
    let out = dir.path().join("out");
    let deck = out.join("wr4_tb.sp");
    let text = std::fs::read_to_string(&deck).unwrap();
    // Swap the gate of the sum cells' output inverter to the wrong node.
    let broken = text
        .replace("mn_s s sn vss", "mn_s s x vss")
        .replace("mp_s s sn vdd", "mp_s s x vdd");
    assert_ne!(text, broken);
    std::fs::write(&deck, broken).unwrap();
    // A correct netlist sits in both the deck's folder and the working folder.
    let (ok, log) = common::ngspice_in(&out, &deck, &[]);
    assert!(!ok && log.contains("FAIL"), "a broken deck passed:\n{log}");
}

/// Two machines with the model folder in different places generate byte-identical files,
/// and no generated file names either folder; `generate --check` agrees.
#[test]
fn no_machine_path_in_generated_files() {
    let Some(models) = common::model_dir() else {
        return;
    };
    let tmp = tempfile::tempdir().unwrap();
    let other = tmp.path().join("elsewhere/models");
    std::fs::create_dir_all(&other).unwrap();
    for f in std::fs::read_dir(&models).unwrap() {
        let f = f.unwrap().path();
        std::fs::copy(&f, other.join(f.file_name().unwrap())).unwrap();
    }
    let spec = write(
        tmp.path(),
        "p8.yaml",
        "name: p8\nwidth: 8\narchitecture: manchester\ntechnology: gf180mcu-3v3\n",
    );
    let tech = write(
        tmp.path(),
        "t.yaml",
        "name: t_ss\nvdd: 3.3\nl_min: 0.28\nw_min: 0.22\nnmos: nmos_3p3\npmos: pmos_3p3\nunit_n: 1.0\npn_ratio: 2.0\ninclude: [\"${MODEL_DIR}/design.ngspice\"]\nlib:\n  - {file: \"${MODEL_DIR}/sm141064.ngspice\", section: ss}\n",
    );
    let spec2 = write(
        tmp.path(),
        "q8.yaml",
        &format!(
            "name: q8\nwidth: 8\narchitecture: manchester\ntechnology: {}\n",
            tech.display()
        ),
    );
    for spec in [&spec, &spec2] {
        let a = tmp.path().join("a");
        let b = tmp.path().join("b");
        for (out, dir) in [(&a, &models), (&b, &other)] {
            let (code, _, err) = run(bin()
                .arg("generate")
                .arg(spec)
                .arg("-o")
                .arg(out)
                .env("CARRYWRIGHT_MODEL_DIR", dir));
            assert_eq!(code, 0, "{err}");
        }
        for f in std::fs::read_dir(&a).unwrap() {
            let name = f.unwrap().file_name();
            let x = std::fs::read_to_string(a.join(&name)).unwrap();
            let y = std::fs::read_to_string(b.join(&name)).unwrap();
            assert_eq!(x, y, "{name:?} differs between the two machines");
            for p in [&models, &other, &tmp.path().to_path_buf()] {
                assert!(
                    !x.contains(&*p.to_string_lossy()),
                    "{name:?} names {}",
                    p.display()
                );
            }
        }
        // The other machine finds the first one's files up to date.
        let (code, outp, err) = run(bin()
            .arg("generate")
            .arg(spec)
            .arg("-o")
            .arg(&a)
            .arg("--check")
            .env("CARRYWRIGHT_MODEL_DIR", &other));
        assert_eq!(code, 0, "{outp}{err}");
        std::fs::remove_dir_all(&a).unwrap();
        std::fs::remove_dir_all(&b).unwrap();
    }
}

/// The deck reads the model folder when it runs: from CARRYWRIGHT_MODEL_DIR or `-D
/// cw_models=DIR`, and exits 4 with a clear line when neither is given.
#[test]
fn deck_finds_the_models_when_it_runs() {
    if !common::tools(&["ngspice"]) {
        return;
    }
    let Some(models) = common::model_dir() else {
        return;
    };
    let (dir, _g, _s) = common::generate(
        "name: m4\nwidth: 4\narchitecture: manchester\ntechnology: gf180mcu-3v3\ntestbench: {random: 0, step: 50p}\n",
        Some(models.clone()),
    );
    let deck = dir.path().join("out/m4_tb.sp");
    // Run in the test's folder: the deck writes m4_path.dat where it runs.
    let o = Command::new("ngspice")
        .current_dir(dir.path())
        .arg("-b")
        .arg(&deck)
        .env_remove("CARRYWRIGHT_MODEL_DIR")
        .output()
        .unwrap();
    let log = String::from_utf8_lossy(&o.stdout);
    assert_eq!(o.status.code(), Some(4), "{log}");
    assert!(log.contains("FAIL models"), "{log}");
    let define = format!("cw_models={}", models.display());
    let o = Command::new("ngspice")
        .current_dir(dir.path())
        .args(["-D", &define, "-b"])
        .arg(&deck)
        .env_remove("CARRYWRIGHT_MODEL_DIR")
        .output()
        .unwrap();
    let log = String::from_utf8_lossy(&o.stdout);
    assert!(o.status.success() && log.contains("PASS m4"), "{log}");
}

/// Small model files of our own (level-1 cards) for the technology-file checks.
fn tech_dir() -> tempfile::TempDir {
    let t = tempfile::tempdir().unwrap();
    write(
        t.path(),
        "cards.lib",
        "* corners\n.lib tt\n.model cw_n nmos level=1 vto=0.6 kp=120u\n.model cw_p pmos level=1 vto=-0.7 kp=45u\n.endl tt\n",
    );
    t
}

fn tech_file(dir: &Path, extra: &str, section: &str) -> PathBuf {
    write(
        dir,
        "tech.yaml",
        &format!(
            "name: cw_tech\nvdd: 3.3\nl_min: 0.35\nw_min: 0.5\nnmos: cw_n\npmos: cw_p\nunit_n: 1.0\npn_ratio: 2.5\n{extra}lib:\n  - {{file: \"{}\", section: {section}}}\n",
            dir.join("cards.lib").display()
        ),
    )
}

fn generate_with_tech(dir: &Path, tech: &Path) -> (i32, String, String) {
    let spec = write(
        dir,
        "s.yaml",
        &format!(
            "name: t4\nwidth: 4\narchitecture: manchester\ntechnology: {}\n",
            tech.display()
        ),
    );
    run(bin()
        .arg("generate")
        .arg(&spec)
        .arg("-o")
        .arg(dir.join("out")))
}

fn assert_refused(r: &(i32, String, String), dir: &Path, needles: &[&str]) {
    let (code, _, err) = r;
    assert_eq!(*code, 2, "{err}");
    assert_eq!(err.trim_end().lines().count(), 1, "one line: {err}");
    for n in needles {
        assert!(err.contains(n), "`{n}` not in: {err}");
    }
    assert!(!dir.join("out").exists(), "something was written");
}

#[test]
fn technology_file_with_our_own_cards_is_accepted() {
    let t = tech_dir();
    let tech = tech_file(t.path(), "", "tt");
    let (code, _, err) = generate_with_tech(t.path(), &tech);
    assert_eq!(code, 0, "{err}");
    let deck = std::fs::read_to_string(t.path().join("out/t4_tb.sp")).unwrap();
    assert!(deck.contains("corner tt"), "the header states the corner");
}

/// A corner section the library does not define is refused at load, with key and line.
#[test]
fn technology_corner_that_does_not_exist_is_refused() {
    let t = tech_dir();
    let tech = tech_file(t.path(), "", "sss");
    let r = generate_with_tech(t.path(), &tech);
    assert_refused(
        &r,
        t.path(),
        &["tech.yaml:", "lib[0].section", "`sss`", "defines: tt"],
    );
}

/// A device name no model file defines is refused at load, naming the key.
#[test]
fn technology_device_that_does_not_exist_is_refused() {
    let t = tech_dir();
    let tech = tech_file(t.path(), "", "tt");
    let text = std::fs::read_to_string(&tech)
        .unwrap()
        .replace("nmos: cw_n", "nmos: cw_nx");
    std::fs::write(&tech, text).unwrap();
    let r = generate_with_tech(t.path(), &tech);
    assert_refused(&r, t.path(), &["tech.yaml:5:", "nmos", "`cw_nx`"]);
}

/// Any readable file is not a model file: /etc/passwd is refused with its line.
#[test]
fn technology_including_a_system_file_is_refused() {
    if !Path::new("/etc/passwd").is_file() {
        eprintln!("SKIPPED: no /etc/passwd on this machine");
        return;
    }
    let t = tech_dir();
    let tech = tech_file(t.path(), "include: [/etc/passwd]\n", "tt");
    let r = generate_with_tech(t.path(), &tech);
    assert_refused(&r, t.path(), &["include[0]", "/etc/passwd:1:"]);
}

/// A control block in a model file, or in a file it includes, is refused naming the file
/// and line; nothing runs.
#[test]
fn control_block_in_an_included_model_file_is_refused() {
    let t = tech_dir();
    let inner = write(
        t.path(),
        "inner.inc",
        "* looks like models\n.param x=1\n.control\nshell touch PWNED\n.endc\n",
    );
    write(
        t.path(),
        "outer.inc",
        &format!("* wrapper\n.include '{}'\n", inner.display()),
    );
    let tech = tech_file(
        t.path(),
        &format!("include: [{}]\n", t.path().join("outer.inc").display()),
        "tt",
    );
    let r = generate_with_tech(t.path(), &tech);
    assert_refused(&r, t.path(), &["inner.inc:3:", ".control"]);
    // A relative path would tie the deck to this machine's folders.
    let tech = tech_file(t.path(), "include: [outer.inc]\n", "tt");
    let r = generate_with_tech(t.path(), &tech);
    assert_refused(&r, t.path(), &["include[0]", "relative"]);
}

/// The built-in GF180MCU technology scans its folder too.
#[test]
fn control_block_in_the_gf180_folder_is_refused() {
    let Some(models) = common::model_dir() else {
        return;
    };
    let t = tempfile::tempdir().unwrap();
    for f in std::fs::read_dir(&models).unwrap() {
        let f = f.unwrap().path();
        std::fs::copy(&f, t.path().join(f.file_name().unwrap())).unwrap();
    }
    let design = t.path().join("design.ngspice");
    let mut text = std::fs::read_to_string(&design).unwrap();
    let line = text.lines().count() + 1;
    text.push_str(".control\nshell touch PWNED\n.endc\n");
    std::fs::write(&design, text).unwrap();
    let spec = write(
        t.path(),
        "s.yaml",
        "name: g4\nwidth: 4\narchitecture: manchester\ntechnology: gf180mcu-3v3\n",
    );
    let r = run(bin()
        .arg("generate")
        .arg(&spec)
        .arg("-o")
        .arg(t.path().join("out"))
        .arg("--model-dir")
        .arg(t.path()));
    assert_refused(
        &r,
        t.path(),
        &[&format!("design.ngspice:{line}:"), "technology"],
    );
}

/// describe and check simulate nothing, so they need no model folder; generate does.
#[test]
fn describe_and_check_need_no_models() {
    let t = tempfile::tempdir().unwrap();
    let spec = write(
        t.path(),
        "s.yaml",
        "name: g8\nwidth: 8\narchitecture: manchester\ntechnology: gf180mcu-3v3\n",
    );
    for cmd in ["describe", "check"] {
        let (code, out, err) = run(bin()
            .arg(cmd)
            .arg(&spec)
            .env_remove("CARRYWRIGHT_MODEL_DIR"));
        assert_eq!(code, 0, "{cmd}: {out}{err}");
    }
    let r = run(bin()
        .arg("generate")
        .arg(&spec)
        .arg("-o")
        .arg(t.path().join("out"))
        .env_remove("CARRYWRIGHT_MODEL_DIR"));
    assert_refused(
        &r,
        t.path(),
        &["s.yaml:4:", "technology", "CARRYWRIGHT_MODEL_DIR"],
    );
}

/// A legal period and step that would make ngspice allocate millions of points are refused
/// naming the key to change.
#[test]
fn too_many_transient_points_are_refused() {
    let t = tempfile::tempdir().unwrap();
    let spec = write(
        t.path(),
        "s.yaml",
        "name: tp\nwidth: 8\narchitecture: manchester\ntestbench: {period: 1u, step: 0.1p}\n",
    );
    let r = run(bin()
        .arg("generate")
        .arg(&spec)
        .arg("-o")
        .arg(t.path().join("out")));
    assert_refused(&r, t.path(), &["testbench.step", "transient points"]);
}

/// The deck states its conditions, runs one thread, caps the internal step separately from
/// the print step and saves only the vectors it reads.
#[test]
fn deck_header_and_simulator_settings() {
    // A 4 ns period: the cap (100 ps) is below a twentieth of it.
    let (dir, _g, _s) = common::generate(
        "name: wr4\nwidth: 4\narchitecture: manchester\nblock: 4\ntestbench: {random: 0, step: 50p, period: 4n}\n",
        None,
    );
    let deck = std::fs::read_to_string(dir.path().join("out/wr4_tb.sp")).unwrap();
    for needle in [
        "corner ",
        "27 degC",
        "VDD 3.3 V",
        "largest internal step 100ps",
    ] {
        assert!(deck.contains(needle), "header lacks {needle}");
    }
    let thread = deck.find("set num_threads=1").expect("one thread");
    assert!(thread < deck.find("\nrun\n").unwrap());
    // 9 vectors of 4 ns: the 7 directed ones and the timing engine's worst pair.
    assert!(deck.contains("circbyline .tran 50p 36n 0 100p"), "{deck}");
    assert!(deck.contains("circbyline .save v(s0)"));
}

/// By default the deck prints its measurements, failures and one summary line; every
/// sample only with `-D cw_samples`.
#[test]
fn deck_output_is_short_unless_asked() {
    if !common::tools(&["ngspice"]) {
        return;
    }
    let (dir, _g, _s) = common::generate(GEN4, None);
    let out = dir.path().join("out");
    let deck = out.join("wr4_tb.sp");
    let (ok, quiet) = common::ngspice_in(&out, &deck, &[]);
    assert!(ok, "{quiet}");
    assert!(
        !quiet.contains("sample ") && !quiet.contains("got ="),
        "{quiet}"
    );
    let pass = quiet.lines().find(|l| l.starts_with("PASS wr4")).unwrap();
    assert!(
        pass.contains("tcarry_rise")
            && pass.contains("tworst")
            && pass.contains("power")
            && pass.contains("J per addition"),
        "{pass}"
    );
    assert!(quiet.lines().count() < 40, "{quiet}");
    let (ok, loud) = common::ngspice_in(&out, &deck, &["-D", "cw_samples"]);
    assert!(ok);
    // 7 directed vectors, the engine's worst pair, 5 outputs each.
    assert_eq!(common::samples(&loud).len(), 9 * 5, "{loud}");
}

/// A carry that arrives after its vector's strobe is a failed measurement, not a delay
/// borrowed from a later vector: a 16-bit unbuffered chain given a period far shorter than
/// its carry delay must exit 2 naming the measurement.
#[test]
fn late_carry_is_a_failed_measurement() {
    if !common::tools(&["ngspice"]) {
        return;
    }
    let (dir, _g, _s) = common::generate(
        "name: late16\nwidth: 16\narchitecture: manchester\nblock: 16\ntestbench: {random: 0, period: 500p, step: 10p}\n",
        None,
    );
    let out = dir.path().join("out");
    let o = Command::new("ngspice")
        .current_dir(&out)
        .arg("-b")
        .arg(out.join("late16_tb.sp"))
        .output()
        .unwrap();
    let log = String::from_utf8_lossy(&o.stdout);
    assert_eq!(o.status.code(), Some(2), "{log}");
    assert!(log.contains("FAIL measurement tcarry"), "{log}");
}

/// The 100 ps cap on the internal step keeps the measured carry delay within 1 % of a run
/// whose every step is at most 5 ps (the reference).
#[test]
fn step_cap_keeps_delays_within_one_percent() {
    if !common::tools(&["ngspice"]) {
        return;
    }
    let Some(models) = common::model_dir() else {
        return;
    };
    let (dir, _g, _s) = common::generate(
        "name: acc8\nwidth: 8\narchitecture: manchester\nblock: 4\nbuffers: {every: 4}\ntechnology: gf180mcu-3v3\ntestbench: {random: 0, load: 10f}\n",
        Some(models),
    );
    let out = dir.path().join("out");
    let deck = out.join("acc8_tb.sp");
    let text = std::fs::read_to_string(&deck).unwrap();
    let tran = text
        .lines()
        .find(|l| l.starts_with("circbyline .tran "))
        .unwrap()
        .to_string();
    let w: Vec<&str> = tran.split_whitespace().collect();
    let reference = format!("circbyline .tran 5ps {} 0 5ps", w[3]);
    let ref_deck = out.join("acc8_ref_tb.sp");
    std::fs::write(&ref_deck, text.replace(&tran, &reference)).unwrap();
    let (ok, fast) = common::ngspice_in(&out, &deck, &[]);
    assert!(ok, "{fast}");
    let (ok, slow) = common::ngspice_in(&out, &ref_deck, &[]);
    assert!(ok, "{slow}");
    let (f, s) = (common::printed(&fast), common::printed(&slow));
    for key in ["tcarry_rise", "tcarry_fall"] {
        let (a, b) = (f[key], s[key]);
        let err = (a - b).abs() / b;
        eprintln!(
            "{key}: capped {a:e} s, 5 ps reference {b:e} s, {:.3} %",
            err * 100.0
        );
        assert!(err < 0.01, "{key}: {a} vs {b}");
    }
}

/// The default period comes from the timing engine's bound with a margin, so a default deck
/// passes its own level checks: a 64-bit static Manchester chain buffered every 4 bits got a
/// 10 ns period from the old structural formula, shorter than its carry delay, and failed
/// 64 level checks (exit 3).
#[test]
fn default_period_covers_a_64_bit_buffered_chain() {
    if !common::tools(&["ngspice"]) {
        return;
    }
    let Some(models) = common::model_dir() else {
        return;
    };
    let (dir, _g, s) = common::generate(
        "name: acc64\nwidth: 64\narchitecture: manchester\nblock: 4\nbuffers: {every: 4}\ntechnology: gf180mcu-3v3\ntestbench: {random: 0, load: 10f}\n",
        Some(models),
    );
    let out = dir.path().join("out");
    let deck = std::fs::read_to_string(out.join("acc64_tb.sp")).unwrap();
    assert!(deck.contains("Period from the timing engine's"), "{deck}");
    let (ok, log) = common::ngspice(&out, &s.name);
    assert!(ok && log.contains("PASS acc64"), "{log}");
    common::check_deck_levels(&out, &s.name, s.technology.vdd, &log);
    let p = common::printed(&log);
    eprintln!(
        "acc64: tcarry_rise {:e} s, tcarry_fall {:e} s, tworst {:e} s; {}",
        p["tcarry_rise"],
        p["tcarry_fall"],
        p["tworst"],
        deck.lines()
            .find(|l| l.contains("vectors of"))
            .unwrap_or("")
    );
}

/// The deck applies the timing engine's worst vector pair and measures that path (issue 7
/// §4): NAME.json, the deck header and both testbenches carry the pair, and ngspice's
/// measurement of it comes back within 25 % of the estimate (the reference tool; the
/// tighter accuracy figures are in tests/accuracy.rs).
#[test]
fn deck_measures_the_engines_worst_path() {
    let (dir, g, s) = common::generate(
        "name: wk8\nwidth: 8\narchitecture: carry-skip\nblock: 4\ntestbench: {random: 2, load: 10f}\n",
        None,
    );
    let out = dir.path().join("out");
    let e = g.estimate.as_ref().expect("generic is characterised");
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("wk8.json")).unwrap()).unwrap();
    assert_eq!(json["timing"]["worst_ps"].as_f64(), Some(e.worst_ps));
    assert!(json["spice_deck"]["measures"]["tworst"]
        .as_str()
        .unwrap()
        .contains(&e.worst_vectors.to));
    let labels: Vec<&str> = json["vectors"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v["label"].as_str().unwrap())
        .collect();
    let k = labels
        .iter()
        .position(|l| l.starts_with("worst path: after"))
        .expect("the pair is among the deck's vectors");
    assert_eq!(labels[k - 1], "worst path: before");
    // The listed `after` vector is the engine's.
    let after = &json["vectors"][k];
    assert_eq!(
        u128::from_str_radix(after["a"].as_str().unwrap().trim_start_matches("0x"), 16).unwrap(),
        e.pair.after.a
    );
    let tb = std::fs::read_to_string(out.join("wk8_tb.v")).unwrap();
    assert!(tb.contains("worst path: after"), "{tb}");
    let deck = std::fs::read_to_string(out.join("wk8_tb.sp")).unwrap();
    assert!(
        deck.contains("meas tran tw_to when v(") && deck.contains("=last from="),
        "{deck}"
    );
    if !common::tools(&["ngspice"]) {
        return;
    }
    let (ok, log) = common::ngspice(&out, &s.name);
    assert!(ok && log.contains("PASS wk8"), "{log}");
    common::check_deck_levels(&out, &s.name, s.technology.vdd, &log);
    let measured = common::printed(&log)["tworst"] * 1e12;
    let err = e.worst_ps / measured - 1.0;
    eprintln!(
        "wk8: worst path {} -> {}: estimate {:.0} ps, ngspice {measured:.0} ps ({:+.1} %)",
        e.worst_vectors.from,
        e.worst_vectors.to,
        e.worst_ps,
        100.0 * err
    );
    assert!(err.abs() < 0.25, "{err}");
}

/// Energy per addition counts the clock (issue 7 §4, issue 8 §4): the charge the clock driver
/// draws from its own supply is measured and added to the adder's. Per cycle it must come to
/// (C_clk + C_chain)·VDD (charging a capacitance from a supply draws Q = C·V, common
/// practice), with C_clk the engine's gate and diffusion capacitance on clk and C_chain the
/// driver chain's own stage gates and drains (NAME.json `spice_deck.drivers`), within 30 %
/// (the model's capacitances are linearised; short-circuit current is extra).
#[test]
fn dynamic_energy_counts_the_clock() {
    if !common::tools(&["ngspice"]) {
        return;
    }
    let (dir, g, s) = common::generate(
        "name: wd8\nwidth: 8\narchitecture: manchester\nstyle: dynamic\nblock: 4\nbuffers: {every: 4}\ntestbench: {random: 2, load: 10f}\n",
        None,
    );
    let out = dir.path().join("out");
    let (ok, log) = common::ngspice(&out, &s.name);
    assert!(ok && log.contains("PASS wd8"), "{log}");
    let p = common::printed(&log);
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("wd8.json")).unwrap()).unwrap();
    // Energy is counted over vectors 1 to the last: vector 0 starts from the operating point.
    let n = json["spice_deck"]["vectors"].as_f64().unwrap() - 1.0;
    let vdd = s.technology.vdd;
    let qclk = p["qclk"];
    let qsup = p["qsup"];
    // The printed energy is the supply's plus the clock's.
    let energy = (qclk - qsup) * vdd / n;
    assert!((p["energy_per_op"] / energy - 1.0).abs() < 1e-3, "{log}");
    let graph = carrywright::timing::engine::Graph::new(
        &s,
        &g.design,
        s.technology.timing.as_ref().unwrap(),
    )
    .unwrap();
    let tm = s.technology.timing.as_ref().unwrap();
    let pn = s.sizing.pn_ratio;
    let chain = json["spice_deck"]["drivers"]["chains"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c[0] == "clk")
        .expect("a clock driver");
    let widths: Vec<f64> = chain[2]
        .as_array()
        .unwrap()
        .iter()
        .map(|w| w.as_f64().unwrap())
        .collect();
    let gate = |w: f64| w * (tm.c_gate_n_ff_um + pn * tm.c_gate_p_ff_um);
    let drain = |w: f64| w * (tm.c_diff_n_ff_um + pn * tm.c_diff_p_ff_um);
    let c_chain: f64 = widths.iter().skip(1).map(|&w| gate(w)).sum::<f64>()
        + widths.iter().map(|&w| drain(w)).sum::<f64>();
    let c_clk = graph.cap_ff[graph.clk.unwrap() as usize];
    let want = (c_clk + c_chain) * 1e-15 * vdd;
    let per_cycle = qclk / n;
    eprintln!(
        "wd8: clock charge {per_cycle:e} C per cycle, (C_clk + C_chain)*VDD {want:e} C (C_clk {c_clk:.1} fF, chain {c_chain:.1} fF); clock share of energy {:.1} %",
        100.0 * qclk / (qclk - qsup)
    );
    assert!((per_cycle / want - 1.0).abs() < 0.3);
}

/// The default period covers the embedded `generic` technology too, where the engine is
/// furthest from ngspice: its level-1 cards make a 16-bit unbuffered static Manchester chain
/// about 2.1× slower than estimated, and with the calibrated 1.5 margin this deck failed its
/// own cin → cout window (exit 2). Generic decks get a 3× margin (src/emit/spice.rs).
#[test]
fn default_period_covers_a_generic_unbuffered_chain() {
    if !common::tools(&["ngspice"]) {
        return;
    }
    let (dir, _g, s) = common::generate(
        "name: gen16\nwidth: 16\narchitecture: manchester\nblock: 4\nbuffers: none\ntestbench: {random: 2, load: 10f}\n",
        None,
    );
    let out = dir.path().join("out");
    let (ok, log) = common::ngspice(&out, &s.name);
    assert!(ok && log.contains("PASS gen16"), "{log}");
    common::check_deck_levels(&out, &s.name, s.technology.vdd, &log);
}
