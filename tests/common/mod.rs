//! Shared helpers for the tests that run outside tools (Icarus Verilog, Verilator, Yosys,
//! ngspice). A missing tool skips the test with a printed reason, unless
//! CARRYWRIGHT_REQUIRE_TOOLS=1 (set by scripts/test.sh and CI), which turns the skip into a
//! failure.
#![allow(dead_code)]

use carrywright::spec::{self, LoadOptions};
use std::path::{Path, PathBuf};
use std::process::Command;

pub const REQUIRE_ENV: &str = "CARRYWRIGHT_REQUIRE_TOOLS";

fn required() -> bool {
    std::env::var(REQUIRE_ENV)
        .map(|v| v == "1")
        .unwrap_or(false)
}

/// Skip (print why and return false) or fail when a prerequisite is missing.
pub fn prerequisite(ok: bool, what: &str) -> bool {
    if ok {
        return true;
    }
    if required() {
        panic!("{what} is missing and {REQUIRE_ENV}=1 forbids skipping");
    }
    eprintln!("SKIPPED: {what} is missing (install it with scripts/install-tools.sh, or run scripts/test.sh)");
    false
}

/// The tool is an executable file on PATH.
pub fn have(tool: &str) -> bool {
    std::env::var_os("PATH")
        .map(|paths| std::env::split_paths(&paths).any(|d| d.join(tool).is_file()))
        .unwrap_or(false)
}

/// The tools are present (or the test is skipped / failed with a reason).
pub fn tools(list: &[&str]) -> bool {
    list.iter()
        .all(|t| prerequisite(have(t), &format!("`{t}`")))
}

/// The GF180MCU model folder from CARRYWRIGHT_MODEL_DIR, if present.
pub fn model_dir() -> Option<PathBuf> {
    let dir = std::env::var_os("CARRYWRIGHT_MODEL_DIR").map(PathBuf::from);
    let ok = dir
        .as_ref()
        .map(|d| d.join("design.ngspice").is_file() && d.join("sm141064.ngspice").is_file())
        .unwrap_or(false);
    if prerequisite(ok, "the GF180MCU model folder (CARRYWRIGHT_MODEL_DIR)") {
        dir
    } else {
        None
    }
}

/// The SKY130 model folder (`sky130_fd_pr`) from CARRYWRIGHT_SKY130_DIR, if present.
pub fn sky130_dir() -> Option<PathBuf> {
    let dir = std::env::var_os(carrywright::tech::SKY130_DIR_ENV).map(PathBuf::from);
    let ok = dir
        .as_ref()
        .map(|d| d.join("combined_models/sky130.lib.spice").is_file())
        .unwrap_or(false);
    if prerequisite(ok, "the SKY130 model folder (CARRYWRIGHT_SKY130_DIR)") {
        dir
    } else {
        None
    }
}

/// The model folder of a built-in technology (`gf180mcu-3v3` or `sky130-1v8`), if present.
pub fn pdk_dir(technology: &str) -> Option<PathBuf> {
    match technology {
        "gf180mcu-3v3" => model_dir(),
        "sky130-1v8" => sky130_dir(),
        other => panic!("no model folder for technology `{other}`"),
    }
}

/// The lines that read a technology's models, as the generated deck writes them
/// (`Models::deck_lines`: GF180 `.include design.ngspice` and `.lib sm141064.ngspice CORNER`;
/// SKY130 `.param mc_mm_switch=0` and `.lib combined_models/sky130.lib.spice CORNER`), with the
/// model folder the technology was loaded from written out in place of `$cw_models` (a deck of
/// a test runs here only).
pub fn model_lines(t: &carrywright::tech::Technology) -> Vec<String> {
    let var = format!("${}", carrywright::tech::DECK_MODEL_VAR);
    let lines = t.models.deck_lines();
    if !t.models.need_model_dir() {
        return lines;
    }
    let root = t
        .model_root
        .as_ref()
        .unwrap_or_else(|| panic!("technology {} was loaded without its model folder", t.name))
        .to_string_lossy()
        .to_string();
    lines.into_iter().map(|l| l.replace(&var, &root)).collect()
}

/// A hex word as the estimate prints it (`0x00ff`).
pub fn hex(s: &str) -> u128 {
    u128::from_str_radix(s.trim_start_matches("0x"), 16).unwrap()
}

/// Generate a spec's files into a fresh temporary folder through the library API.
pub fn generate(
    yaml: &str,
    model_dir: Option<PathBuf>,
) -> (
    tempfile::TempDir,
    carrywright::Generated,
    carrywright::spec::Spec,
) {
    let s = spec::parse(
        yaml,
        "test-spec",
        Path::new("."),
        &LoadOptions { model_dir },
    )
    .unwrap_or_else(|e| panic!("spec refused: {e}\n{yaml}"));
    let g = carrywright::generate(&s).unwrap_or_else(|e| panic!("generate failed: {e}\n{yaml}"));
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out");
    carrywright::write_outputs(&out, &g.files).unwrap();
    (dir, g, s)
}

pub fn run(cmd: &mut Command) -> (bool, String) {
    let o = cmd
        .output()
        .unwrap_or_else(|e| panic!("cannot start {cmd:?}: {e}"));
    let text = format!(
        "{}{}",
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    );
    (o.status.success(), text)
}

/// Icarus Verilog runs the generated self-checking testbench (IEEE 1364-2005).
pub fn icarus(out: &Path, name: &str) -> String {
    let (ok, log) = icarus_run(out, name);
    assert!(ok, "Icarus testbench of {name} failed:\n{log}");
    log
}

/// Compile and run the testbench; (passed, log).
pub fn icarus_run(out: &Path, name: &str) -> (bool, String) {
    let vvp = out.join(format!("{name}.vvp"));
    let (ok, log) = run(Command::new("iverilog")
        .args(["-g2005", "-o"])
        .arg(&vvp)
        .args(["-s", &format!("{name}_tb")])
        .arg(out.join(format!("{name}_tb.v")))
        .arg(out.join(format!("{name}.v"))));
    assert!(ok, "iverilog failed to compile {name}:\n{log}");
    let (ok, log) = run(Command::new("vvp").arg("-n").arg(&vvp));
    let passed = ok && log.contains(&format!("PASS {name}"));
    (passed, log)
}

/// Verilator --lint-only -Wall is clean (EDA-RECIPES: -Wno-DECLFILENAME for multi-module files).
pub fn verilator(out: &Path, name: &str) {
    let (ok, log) = run(Command::new("verilator")
        .args([
            "--lint-only",
            "-Wall",
            "-Wno-DECLFILENAME",
            "--top-module",
            name,
        ])
        .arg(out.join(format!("{name}.v"))));
    assert!(
        ok && !log.contains("%Warning"),
        "Verilator lint of {name} is not clean:\n{log}"
    );
}

/// Yosys proves the netlist equal to `a + b + cin` with IEEE 1364-2005 semantics of `+`.
/// Dynamic designs are proved in evaluate, with clk held high.
pub fn yosys_equiv(out: &Path, name: &str, width: usize, dynamic: bool) {
    let (ok, log) = yosys_prove(out, name, width, dynamic);
    assert!(
        ok,
        "Yosys could not prove {name} equal to a + b + cin:\n{log}"
    );
}

/// Run the Yosys proof; (proved, log).
pub fn yosys_prove(out: &Path, name: &str, width: usize, dynamic: bool) -> (bool, String) {
    let w = width;
    let mut src = format!(
        "module ref_add(a, b, cin, s, cout);\n  input [{m}:0] a;\n  input [{m}:0] b;\n  input cin;\n  output [{m}:0] s;\n  output cout;\n  assign {{cout, s}} = {{1'b0, a}} + {{1'b0, b}} + {{{w}'b0, cin}};\nendmodule\n",
        m = w - 1
    );
    let gate = if dynamic {
        src.push_str(&format!(
            "module eval_add(a, b, cin, s, cout);\n  input [{m}:0] a;\n  input [{m}:0] b;\n  input cin;\n  output [{m}:0] s;\n  output cout;\n  {name} xdut(.clk(1'b1), .a(a), .b(b), .cin(cin), .s(s), .cout(cout));\nendmodule\n",
            m = w - 1
        ));
        "eval_add".to_string()
    } else {
        name.to_string()
    };
    let refv = out.join("ref_add.v");
    std::fs::write(&refv, src).unwrap();
    let script = format!(
        "read_verilog {}; read_verilog {}; proc; equiv_make ref_add {gate} eq; hierarchy -top eq; flatten; equiv_simple; equiv_induct; equiv_status -assert",
        refv.display(),
        out.join(format!("{name}.v")).display()
    );
    run(Command::new("yosys").args(["-q", "-p", &script]))
}

/// The deck's output samples: `sample TAG NODE VOLTS` lines, keyed `TAG NODE` (`v3 s0`).
pub fn samples(log: &str) -> std::collections::BTreeMap<String, f64> {
    log.lines()
        .filter_map(|l| {
            let mut w = l.strip_prefix("sample ")?.split_whitespace();
            let (tag, node, v) = (w.next()?, w.next()?, w.next()?);
            Some((format!("{tag} {node}"), v.parse::<f64>().ok()?))
        })
        .collect()
}

/// Values printed by the deck's `print` lines: `name = value`.
pub fn printed(log: &str) -> std::collections::BTreeMap<String, f64> {
    log.lines()
        .filter_map(|l| {
            let (k, v) = l.split_once(" = ")?;
            let k = k.trim();
            if k.contains(' ') {
                return None;
            }
            Some((k.to_string(), v.trim().parse::<f64>().ok()?))
        })
        .collect()
}

/// Run a generated deck in ngspice from another working folder (the deck is
/// self-contained), with `-D cw_samples` so it prints every output sample. The deck finds
/// the model folder through CARRYWRIGHT_MODEL_DIR, inherited from the test's environment.
pub fn ngspice(out: &Path, name: &str) -> (bool, String) {
    ngspice_in(
        out.parent().unwrap(),
        &out.join(format!("{name}_tb.sp")),
        &["-D", "cw_samples"],
    )
}

/// Run a deck from the folder `cwd` with extra ngspice arguments; (exit 0, stdout+stderr).
pub fn ngspice_in(cwd: &Path, deck: &Path, args: &[&str]) -> (bool, String) {
    run(Command::new("ngspice")
        .current_dir(cwd)
        .args(args)
        .arg("-b")
        .arg(deck))
}

/// Every output sample the deck printed matches the expected bit from NAME.json.
pub fn check_deck_levels(out: &Path, name: &str, vdd: f64, log: &str) {
    let values = samples(log);
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join(format!("{name}.json"))).unwrap())
            .unwrap();
    let width = json["width"].as_u64().unwrap() as usize;
    // NAME.json lists exactly the vectors the deck applies, in its order.
    let vectors: Vec<&serde_json::Value> = json["vectors"].as_array().unwrap().iter().collect();
    assert!(vectors.len() >= 7, "the deck applies the directed vectors");
    let parse = |v: &serde_json::Value| {
        u128::from_str_radix(v.as_str().unwrap().trim_start_matches("0x"), 16).unwrap()
    };
    let mut checked = 0;
    for (k, v) in vectors.iter().enumerate() {
        let s = parse(&v["s"]);
        for i in 0..=width {
            let (node, bit) = if i < width {
                (format!("s{i}"), (s >> i) & 1 == 1)
            } else {
                ("cout".to_string(), v["cout"].as_u64().unwrap() == 1)
            };
            let key = format!("v{k} {node}");
            let volts = *values
                .get(&key)
                .unwrap_or_else(|| panic!("{name}: ngspice printed no sample {key}"));
            if bit {
                assert!(
                    volts >= 0.8 * vdd,
                    "{name}: {key} = {volts} V, expected a 1 (>= {} V)",
                    0.8 * vdd
                );
            } else {
                assert!(
                    volts <= 0.2 * vdd,
                    "{name}: {key} = {volts} V, expected a 0 (<= {} V)",
                    0.2 * vdd
                );
            }
            checked += 1;
        }
    }
    assert_eq!(checked, vectors.len() * (width + 1));
}

/// Generate a spec and climb the Verilog part of the ladder: Icarus runs the testbench,
/// Verilator lints clean, Yosys proves a + b + cin.
pub fn climb(yaml: &str) {
    let (dir, g, s) = generate(yaml, None);
    let out = dir.path().join("out");
    icarus(&out, &s.name);
    verilator(&out, &s.name);
    yosys_equiv(&out, &s.name, s.width, g.design.dynamic);
}
