//! `carrywright simulate`: the views run in Icarus Verilog and ngspice (the reference tools),
//! the results file, and every way a run can end (pass, simulator missing, failed
//! measurement, time-out), each with its exit code and its status in NAME.results.json.

mod common;

use std::path::Path;
use std::process::Command;

struct Sim {
    code: Option<i32>,
    stdout: String,
    stderr: String,
    results: serde_json::Value,
}

fn simulate(dir: &Path, yaml: &str, args: &[&str], path: Option<&str>) -> Sim {
    std::fs::write(dir.join("spec.yaml"), yaml).unwrap();
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_carrywright"));
    cmd.current_dir(dir)
        .args(["simulate", "spec.yaml", "-o", "out"])
        .args(args);
    if let Some(p) = path {
        cmd.env("PATH", p);
    }
    let o = cmd.output().unwrap();
    let name = yaml
        .lines()
        .find_map(|l| l.strip_prefix("name: "))
        .unwrap()
        .trim();
    let file = dir.join("out").join(format!("{name}.results.json"));
    let results = std::fs::read_to_string(&file)
        .map(|t| serde_json::from_str(&t).unwrap())
        .unwrap_or(serde_json::Value::Null);
    Sim {
        code: o.status.code(),
        stdout: String::from_utf8_lossy(&o.stdout).into(),
        stderr: String::from_utf8_lossy(&o.stderr).into(),
        results,
    }
}

const RIPPLE8: &str =
    "name: sr8\nwidth: 8\narchitecture: ripple\ntestbench: {random: 16, load: 10f}\n";

/// Both simulators pass on a correct design; the results carry Icarus's vector count, every
/// ngspice sample (one per output per strobe) and the measured worst path beside the estimate.
#[test]
fn simulate_runs_both_simulators_and_compares() {
    if !common::tools(&["ngspice", "iverilog", "vvp"]) {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let r = simulate(dir.path(), RIPPLE8, &[], None);
    assert_eq!(r.code, Some(0), "{}\n{}", r.stdout, r.stderr);
    let j = &r.results;
    assert_eq!(j["status"], "pass");
    assert_eq!(j["partial"], false);
    assert!(j["icarus"]["vectors"].as_u64().unwrap() > 16, "{j}");
    let vectors = serde_json::from_str::<serde_json::Value>(
        &std::fs::read_to_string(dir.path().join("out/sr8.json")).unwrap(),
    )
    .unwrap()["spice_deck"]["vectors"]
        .as_u64()
        .unwrap();
    assert_eq!(
        j["ngspice"]["samples"].as_array().unwrap().len() as u64,
        9 * vectors,
        "one sample per output per strobe"
    );
    let c = &j["compared"][0];
    assert!(c["what"].as_str().unwrap().starts_with("worst path"), "{j}");
    assert!(c["measured_ps"].as_f64().unwrap() > 0.0);
    assert!(
        r.stdout.contains("estimate") && r.stdout.contains("ngspice"),
        "{}",
        r.stdout
    );
}

/// A simulator that is not installed: exit 5, one error line naming it, and the results
/// file still written, partial, with the status `missing`.
#[test]
fn missing_simulator_is_reported_not_fatal() {
    let dir = tempfile::tempdir().unwrap();
    let empty = tempfile::tempdir().unwrap();
    let r = simulate(
        dir.path(),
        RIPPLE8,
        &[],
        Some(empty.path().to_str().unwrap()),
    );
    assert_eq!(r.code, Some(5), "{}\n{}", r.stdout, r.stderr);
    assert!(r.stderr.contains("not installed"), "{}", r.stderr);
    assert_eq!(r.results["status"], "missing");
    assert_eq!(r.results["partial"], true);
    assert_eq!(r.results["icarus"]["status"], "missing");
    assert_eq!(r.results["ngspice"]["status"], "missing");
}

/// A deck whose carry cannot arrive inside its vector (a 500 ps period for a 16-bit
/// unbuffered chain): the measurement fails, exit 4, the results say which.
#[test]
fn failed_measurement_has_its_own_exit_code() {
    if !common::tools(&["ngspice"]) {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let r = simulate(
        dir.path(),
        "name: late16\nwidth: 16\narchitecture: manchester\nblock: 16\ntestbench: {random: 0, period: 500p, step: 10p}\n",
        &["--no-icarus"],
        None,
    );
    assert_eq!(r.code, Some(4), "{}\n{}", r.stdout, r.stderr);
    assert_eq!(r.results["ngspice"]["status"], "failed");
    assert!(
        r.results["ngspice"]["message"]
            .as_str()
            .unwrap()
            .contains("measurement"),
        "{}",
        r.results
    );
    assert!(r.results["icarus"].is_null(), "Icarus was switched off");
}

/// A run past `--timeout` is stopped: exit 6, status `timeout`, partial, and the command
/// returns soon after the limit instead of waiting for the deck.
#[test]
fn time_out_stops_the_simulator() {
    if !common::tools(&["ngspice"]) {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let t0 = std::time::Instant::now();
    let r = simulate(
        dir.path(),
        "name: slow32\nwidth: 32\narchitecture: kogge-stone\ntestbench: {random: 8, step: 1p}\n",
        &["--no-icarus", "--timeout", "0.5"],
        None,
    );
    let took = t0.elapsed().as_secs_f64();
    assert_eq!(r.code, Some(6), "{}\n{}", r.stdout, r.stderr);
    assert_eq!(r.results["ngspice"]["status"], "timeout");
    assert_eq!(r.results["partial"], true);
    assert!(took < 30.0, "took {took} s");
}

/// Corner order holds in measurement: the same design is slower at ss than at the typical
/// corner and faster at ff, in both PDKs (a fact of the process models: the slow and fast
/// sections of GF180MCU's sm141064.ngspice and SKY130's sky130.lib.spice shift the
/// thresholds and mobilities that way).
#[test]
fn corner_order_holds_in_ngspice() {
    if !common::tools(&["ngspice"]) {
        return;
    }
    let (Some(_), Some(_)) = (common::model_dir(), common::sky130_dir()) else {
        return;
    };
    for (tech, typical) in [("gf180mcu-3v3", "typical"), ("sky130-1v8", "tt")] {
        let yaml = format!("name: co8\nwidth: 8\narchitecture: ripple\ntechnology: {tech}\ntestbench: {{random: 0, load: 10f}}\n");
        let mut t = vec![];
        for corner in ["ss", typical, "ff"] {
            let dir = tempfile::tempdir().unwrap();
            let r = simulate(
                dir.path(),
                &yaml,
                &["--no-icarus", "--corner", corner],
                None,
            );
            assert_eq!(
                r.code,
                Some(0),
                "{tech} {corner}: {}\n{}",
                r.stdout,
                r.stderr
            );
            t.push(
                r.results["ngspice"]["measurements"]["tworst"]
                    .as_f64()
                    .unwrap(),
            );
        }
        assert!(
            t[0] > t[1] && t[1] > t[2],
            "{tech}: ss {} s, {typical} {} s, ff {} s",
            t[0],
            t[1],
            t[2]
        );
    }
}

/// The engine's worst path at SKY130's slow corner against ngspice on the same pair: an 8-bit
/// Kogge-Stone at ss, 125 degC (a characterised file) and at ss, 100 degC, 1.71 V (timing
/// interpolated in temperature and supply), 10 fF. Before the pulse filter also dropped
/// pulses turned back by an input already moving, the engine timed a glitch that ngspice
/// shows peaking at 0.54 V (+127 % and +132 %); within 15 % here, the accuracy target of
/// issue 7 §5 (ngspice 39 with the SKY130 models).
#[test]
fn slow_corner_worst_path_matches_ngspice() {
    if !common::tools(&["ngspice"]) {
        return;
    }
    if common::sky130_dir().is_none() {
        return;
    }
    for conditions in [
        "{corner: ss, temp: 125}",
        "{corner: ss, temp: 100, vdd: 1.71}",
    ] {
        let yaml = format!("name: sl8\nwidth: 8\narchitecture: kogge-stone\ntechnology: sky130-1v8\nconditions: {conditions}\ntestbench: {{random: 4, load: 10f}}\n");
        let dir = tempfile::tempdir().unwrap();
        let r = simulate(dir.path(), &yaml, &["--no-icarus"], None);
        assert_eq!(r.code, Some(0), "{conditions}: {}\n{}", r.stdout, r.stderr);
        let est = r.results["estimate"]["worst_ps"].as_f64().unwrap();
        let got = r.results["ngspice"]["measurements"]["tworst"]
            .as_f64()
            .unwrap()
            * 1e12;
        println!("SKY130 {conditions}: estimate {est} ps, ngspice {got:.1} ps");
        assert!(
            (est / got - 1.0).abs() < 0.15,
            "{conditions}: estimate {est} ps, ngspice {got:.1} ps"
        );
    }
}

/// A transient that does not converge: ngspice's own message (from memory of ngspice 39:
/// "doAnalyses: TRAN:  Timestep too small; ... trouble with node ...", then "run simulation(s)
/// aborted", exit status 1) printed by a stand-in `ngspice` on PATH, since a generated deck
/// that really fails to converge cannot be made on purpose. Exit 4, status `failed`, the
/// message says so, and the results file is written and partial.
#[test]
fn a_deck_that_does_not_converge_is_reported() {
    let dir = tempfile::tempdir().unwrap();
    let bin = tempfile::tempdir().unwrap();
    let fake = bin.path().join("ngspice");
    std::fs::write(
        &fake,
        "#!/bin/sh\necho 'doAnalyses: TRAN:  Timestep too small; time = 1.2345e-09, timestep = 1.25e-24: trouble with node \"xblk0.c1_n\"'\necho 'run simulation(s) aborted'\nexit 1\n",
    )
    .unwrap();
    use std::os::unix::fs::PermissionsExt;
    std::fs::set_permissions(&fake, std::fs::Permissions::from_mode(0o755)).unwrap();
    let r = simulate(
        dir.path(),
        RIPPLE8,
        &["--no-icarus"],
        Some(bin.path().to_str().unwrap()),
    );
    assert_eq!(r.code, Some(4), "{}\n{}", r.stdout, r.stderr);
    assert_eq!(r.results["ngspice"]["status"], "failed", "{}", r.results);
    let msg = r.results["ngspice"]["message"].as_str().unwrap();
    assert!(msg.contains("did not converge"), "{msg}");
    assert_eq!(r.results["partial"], true, "{}", r.results);
    assert!(r.stderr.contains("did not converge"), "{}", r.stderr);
}
