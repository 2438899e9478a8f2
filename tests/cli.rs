//! End-to-end tests of the `carrywright` binary: every bad spec is refused with exit code 2
//! and a single `error: ` line that names the key (and its line in the file), without
//! touching the disk; valid specs generate deterministic files, `generate --check` reports
//! exactly the stale files and writes nothing, and `check` runs the logic check.
//!
//! Every test runs the binary inside its own temporary folder, with the spec at
//! `spec.yaml` and the output folder at `out`, so messages and paths are predictable.

use std::collections::BTreeMap;
use std::path::Path;
use std::process::{Command, Output};
use tempfile::TempDir;

/// The valid base spec: 8-bit static Manchester chain in 4-bit blocks, generic technology.
/// Keys appended to it land on line 5.
const BASE: &str = "name: t8\nwidth: 8\narchitecture: manchester\nblock: 4\n";

/// The files one generation writes for a spec named `t8`, sorted.
const T8_FILES: &[&str] = &["t8.json", "t8.sp", "t8.v", "t8_tb.sp", "t8_tb.v"];

/// A temporary folder to run the binary in.
struct Sandbox {
    dir: TempDir,
}

/// What one run of the binary did.
struct Run {
    code: Option<i32>,
    stdout: String,
    stderr: String,
    args: Vec<String>,
}

impl Run {
    /// Everything needed to understand a failing assertion.
    fn describe(&self) -> String {
        format!(
            "carrywright {:?}\n  exit code: {:?}\n  stdout:\n{}\n  stderr:\n{}",
            self.args, self.code, self.stdout, self.stderr
        )
    }
}

impl Sandbox {
    fn new() -> Self {
        Sandbox {
            dir: tempfile::tempdir().expect("create a temporary folder"),
        }
    }

    /// A sandbox holding `spec.yaml` with the given text.
    fn with_spec(text: &str) -> Self {
        let sb = Self::new();
        sb.write("spec.yaml", text);
        sb
    }

    fn path(&self) -> &Path {
        self.dir.path()
    }

    fn write(&self, rel: &str, text: &str) {
        std::fs::write(self.path().join(rel), text).unwrap_or_else(|e| panic!("write {rel}: {e}"));
    }

    fn read(&self, rel: &str) -> Vec<u8> {
        std::fs::read(self.path().join(rel)).unwrap_or_else(|e| panic!("read {rel}: {e}"))
    }

    /// Run the binary in this folder. The model-folder variable is always removed so the
    /// outcome does not depend on the environment the tests run in.
    fn run(&self, args: &[&str]) -> Run {
        self.run_with(args, |_| {})
    }

    fn run_with(&self, args: &[&str], tweak: impl FnOnce(&mut Command)) -> Run {
        let mut cmd = Command::new(env!("CARGO_BIN_EXE_carrywright"));
        cmd.args(args)
            .current_dir(self.path())
            .env_remove("CARRYWRIGHT_MODEL_DIR");
        tweak(&mut cmd);
        let out: Output = cmd.output().expect("run the carrywright binary");
        Run {
            code: out.status.code(),
            stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
            stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
            args: args.iter().map(|s| s.to_string()).collect(),
        }
    }

    /// Every file and folder under the sandbox (relative paths, folders end with `/`).
    fn entries(&self) -> Vec<String> {
        fn walk(root: &Path, dir: &Path, out: &mut Vec<String>) {
            let mut items: Vec<_> = std::fs::read_dir(dir)
                .unwrap_or_else(|e| panic!("list {}: {e}", dir.display()))
                .map(|e| e.expect("read a folder entry").path())
                .collect();
            items.sort();
            for p in items {
                let rel = p.strip_prefix(root).unwrap().to_string_lossy().into_owned();
                if p.is_dir() {
                    out.push(format!("{rel}/"));
                    walk(root, &p, out);
                } else {
                    out.push(rel);
                }
            }
        }
        let mut out = Vec::new();
        walk(self.path(), self.path(), &mut out);
        out
    }

    /// Path and contents of every file under the sandbox.
    fn snapshot(&self) -> BTreeMap<String, Vec<u8>> {
        self.entries()
            .into_iter()
            .filter(|e| !e.ends_with('/'))
            .map(|e| {
                let bytes = self.read(&e);
                (e, bytes)
            })
            .collect()
    }

    /// File names directly inside a folder of the sandbox, sorted.
    fn files_in(&self, rel: &str) -> Vec<String> {
        let mut names: Vec<String> = std::fs::read_dir(self.path().join(rel))
            .unwrap_or_else(|e| panic!("list {rel}: {e}"))
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        names.sort();
        names
    }
}

/// Assert that the run failed with exit code 2 and exactly one `error: ` line on stderr;
/// return that line (without the newline).
fn one_error_line(run: &Run) -> String {
    assert_eq!(
        run.code,
        Some(2),
        "expected exit code 2\n{}",
        run.describe()
    );
    assert!(
        run.stderr.starts_with("error: "),
        "stderr must start with `error: `\n{}",
        run.describe()
    );
    assert!(
        run.stderr.ends_with('\n') && run.stderr.matches('\n').count() == 1,
        "stderr must be exactly one line\n{}",
        run.describe()
    );
    assert!(
        !run.stderr.contains('\r'),
        "stderr must not contain a carriage return\n{}",
        run.describe()
    );
    run.stderr.trim_end_matches('\n').to_string()
}

/// Assert that nothing but `spec.yaml` exists in the sandbox (in particular not `out`).
fn assert_nothing_written(sb: &Sandbox, run: &Run) {
    assert!(
        !sb.path().join("out").exists(),
        "the output folder must not be created\n{}",
        run.describe()
    );
    assert_eq!(
        sb.entries(),
        vec!["spec.yaml".to_string()],
        "no file may be written besides the spec\n{}",
        run.describe()
    );
}

/// Generate from `spec` (text of spec.yaml) with extra arguments and check the refusal:
/// exit 2, one `error: spec.yaml:LINE:COL: KEY: ...` line containing every `needles`
/// string, and nothing written. Returns the error line.
fn refuse_with(spec: &str, extra: &[&str], key: &str, line: usize, needles: &[&str]) -> String {
    let sb = Sandbox::with_spec(spec);
    let mut args = vec!["generate", "spec.yaml", "-o", "out"];
    args.extend_from_slice(extra);
    let run = sb.run(&args);
    let err = one_error_line(&run);
    let prefix = format!("error: spec.yaml:{line}:");
    assert!(
        err.starts_with(&prefix),
        "expected the message to start with `{prefix}` (file and line of `{key}`)\n{}",
        run.describe()
    );
    assert!(
        err.contains(&format!(": {key}: ")),
        "expected the message to name the key path `{key}`\n{}",
        run.describe()
    );
    for n in needles {
        assert!(
            err.contains(n),
            "expected the message to contain `{n}`\n{}",
            run.describe()
        );
    }
    assert_nothing_written(&sb, &run);
    err
}

fn refuse(spec: &str, key: &str, line: usize, needles: &[&str]) -> String {
    refuse_with(spec, &[], key, line, needles)
}

/// The base spec with extra lines appended (they start on line 5).
fn base_plus(extra: &str) -> String {
    format!("{BASE}{extra}")
}

// ---------------------------------------------------------------------------------------
// Refused specs: unknown keys and wrong types
// ---------------------------------------------------------------------------------------

#[test]
fn unknown_top_level_key() {
    refuse(&base_plus("widht: 8\n"), "widht", 5, &["unknown field"]);
}

#[test]
fn unknown_nested_key_flow_style() {
    refuse(
        &base_plus("testbench: {randum: 3}\n"),
        "testbench.randum",
        5,
        &["unknown field", "randum"],
    );
}

#[test]
fn unknown_nested_key_block_style() {
    refuse(
        &base_plus("testbench:\n  seed: 3\n  randum: 3\n"),
        "testbench.randum",
        7,
        &["unknown field"],
    );
}

#[test]
fn unknown_key_containing_a_newline_stays_on_one_line() {
    let sb = Sandbox::with_spec(&base_plus("\"wid\\nht\": 8\n"));
    let run = sb.run(&["generate", "spec.yaml", "-o", "out"]);
    let err = one_error_line(&run);
    assert!(err.starts_with("error: spec.yaml:5:"), "{}", run.describe());
    assert_nothing_written(&sb, &run);
}

#[test]
fn unknown_buffers_key_containing_a_newline_stays_on_one_line() {
    let sb = Sandbox::with_spec(&base_plus("buffers: {\"ev\\nery\": 4}\n"));
    let run = sb.run(&["generate", "spec.yaml", "-o", "out"]);
    let err = one_error_line(&run);
    assert!(err.starts_with("error: spec.yaml:5:"), "{}", run.describe());
    assert!(err.contains(": buffers"), "{}", run.describe());
    assert_nothing_written(&sb, &run);
}

#[test]
fn width_of_the_wrong_type() {
    refuse(
        "name: t8\nwidth: eight\narchitecture: manchester\nblock: 4\n",
        "width",
        2,
        &["eight"],
    );
}

// ---------------------------------------------------------------------------------------
// Refused specs: width and block
// ---------------------------------------------------------------------------------------

#[test]
fn width_zero() {
    refuse(
        "name: t8\nwidth: 0\narchitecture: manchester\n",
        "width",
        2,
        &["between 1 and 128", "got 0"],
    );
}

#[test]
fn width_129() {
    refuse(
        "name: t8\nwidth: 129\narchitecture: manchester\n",
        "width",
        2,
        &["between 1 and 128", "got 129"],
    );
}

#[test]
fn width_negative() {
    refuse(
        "name: t8\nwidth: -3\narchitecture: manchester\n",
        "width",
        2,
        &["between 1 and 128", "got -3"],
    );
}

#[test]
fn block_zero() {
    refuse(
        "name: t8\nwidth: 8\narchitecture: manchester\nblock: 0\n",
        "block",
        4,
        &["at least 1"],
    );
}

#[test]
fn block_larger_than_width() {
    refuse(
        "name: t8\nwidth: 8\narchitecture: manchester\nblock: 9\n",
        "block",
        4,
        &["exceeds the width"],
    );
}

// ---------------------------------------------------------------------------------------
// Refused specs: buffers
// ---------------------------------------------------------------------------------------

#[test]
fn buffers_every_not_a_multiple_of_block() {
    refuse(
        &base_plus("buffers: {every: 3}\n"),
        "buffers.every",
        5,
        &["multiple of block", "got 3"],
    );
}

#[test]
fn buffers_at_off_a_block_boundary() {
    refuse(
        &base_plus("buffers: {at: [5]}\n"),
        "buffers.at[0]",
        5,
        &["block boundary"],
    );
}

#[test]
fn buffers_at_past_the_word() {
    refuse(
        "name: t16\nwidth: 16\narchitecture: manchester\nblock: 4\nbuffers: {at: [16]}\n",
        "buffers.at[0]",
        5,
        &["16", "not inside the word"],
    );
}

#[test]
fn buffers_at_duplicate_flow_style() {
    refuse(
        &base_plus("buffers: {at: [4, 4]}\n"),
        "buffers.at[1]",
        5,
        &["given twice"],
    );
}

#[test]
fn buffers_at_duplicate_block_style() {
    refuse(
        &base_plus("buffers:\n  at: [4, 4]\n"),
        "buffers.at[1]",
        6,
        &["given twice"],
    );
}

#[test]
fn buffers_every_and_at_together() {
    refuse(
        &base_plus("buffers: {every: 4, at: [4]}\n"),
        "buffers",
        5,
        &["exactly one of `every` or `at`"],
    );
}

/// `buffers: auto` on a Manchester chain: generated with the positions the engine chose,
/// reported in NAME.json; on an architecture without restoring buffers it is refused.
#[test]
fn buffers_auto_places_buffers_or_is_refused() {
    let sb = Sandbox::with_spec(
        "name: t16\nwidth: 16\narchitecture: manchester\nblock: 4\nbuffers: auto\n",
    );
    let run = sb.run(&["generate", "spec.yaml", "-o", "out"]);
    assert_eq!(run.code, Some(0), "{}", run.describe());
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(sb.dir.path().join("out/t16.json")).unwrap())
            .unwrap();
    let b = &json["buffers"];
    assert!(!b["positions"].as_array().unwrap().is_empty(), "{b}");
    assert!(
        b["auto"]["rule"]
            .as_str()
            .unwrap()
            .contains("dynamic programming"),
        "{b}"
    );
    assert!(
        b["auto"]["cin_cout_ps"].as_f64().unwrap() < b["auto"]["unbuffered_ps"].as_f64().unwrap(),
        "{b}"
    );
    refuse(
        "name: t8\nwidth: 8\narchitecture: ripple\nbuffers: auto\n",
        "buffers",
        4,
        &["auto", "Manchester"],
    );
}

/// `block: auto` on carry-skip: generated with the sizes the engine chose (the blocks in
/// NAME.json sum to the width, `block_auto` says how and against which uniform block) and
/// printed by `describe`; refused (exit 2, key and line) where blocks have no sizes to choose.
#[test]
fn block_auto_chooses_sizes_or_is_refused() {
    let sb = Sandbox::with_spec("name: t24\nwidth: 24\narchitecture: carry-skip\nblock: auto\n");
    let run = sb.run(&["generate", "spec.yaml", "-o", "out"]);
    assert_eq!(run.code, Some(0), "{}", run.describe());
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(sb.dir.path().join("out/t24.json")).unwrap())
            .unwrap();
    let bits: u64 = json["blocks"]
        .as_array()
        .unwrap()
        .iter()
        .map(|b| b["bits"].as_u64().unwrap())
        .sum();
    assert_eq!(bits, 24, "{}", json["blocks"]);
    let a = &json["block_auto"];
    assert!(
        a["rule"].as_str().unwrap().contains("dynamic programming"),
        "{a}"
    );
    assert!(
        a["worst_ps"].as_f64().unwrap() <= a["best_uniform_ps"].as_f64().unwrap(),
        "{a}"
    );
    let d = sb.run(&["describe", "spec.yaml"]);
    assert!(
        d.stdout.contains("block sizes") && d.stdout.contains("best uniform block"),
        "{}",
        d.stdout
    );
    refuse(
        "name: t8\nwidth: 8\narchitecture: ripple\nblock: auto\n",
        "block",
        4,
        &["auto", "carry-skip"],
    );
}

// ---------------------------------------------------------------------------------------
// Refused specs: architecture and style
// ---------------------------------------------------------------------------------------

#[test]
fn ripple_with_dynamic_style() {
    refuse(
        "name: t8\nwidth: 8\narchitecture: ripple\nstyle: dynamic\n",
        "style",
        4,
        &["dynamic"],
    );
}

#[test]
fn ripple_with_buffers() {
    refuse(
        "name: t8\nwidth: 8\narchitecture: ripple\nbuffers: {every: 4}\n",
        "buffers",
        4,
        &["ripple"],
    );
}

#[test]
fn carry_select_refuses_dynamic_style() {
    refuse(
        "name: t8\nwidth: 8\narchitecture: carry-select\nstyle: dynamic\n",
        "style",
        4,
        &["not supported for carry-select"],
    );
}

#[test]
fn prefix_refuses_chain_buffers_and_small_fanout() {
    refuse(
        "name: t8\nwidth: 8\narchitecture: kogge-stone\nbuffers: {every: 4}\n",
        "buffers",
        4,
        &["fanout"],
    );
    refuse(
        "name: t8\nwidth: 8\narchitecture: sklansky\nbuffers: {fanout: 1}\n",
        "buffers.fanout",
        4,
        &["between 2 and 64"],
    );
}

#[test]
fn sqrt_block_only_for_skip_and_select() {
    refuse(
        "name: t8\nwidth: 8\narchitecture: manchester\nblock: sqrt\n",
        "block",
        4,
        &["sqrt", "carry-skip"],
    );
}

#[test]
fn describe_prints_prefix_counts_and_writes_svg() {
    let sb = Sandbox::with_spec("name: ks8\nwidth: 8\narchitecture: kogge-stone\n");
    let run = sb.run(&["describe", "spec.yaml", "--svg", "ks8.svg"]);
    assert_eq!(run.code, Some(0), "{}", run.describe());
    // Kogge-Stone, N = 8: 17 prefix cells, 3 levels (Harris 2003).
    assert!(
        run.stdout.contains("17 (10 black, 7 grey)"),
        "{}",
        run.describe()
    );
    let text = String::from_utf8(sb.read("ks8.svg")).unwrap();
    assert!(text.starts_with("<svg") && text.trim_end().ends_with("</svg>"));
    assert_eq!(
        text.matches("<title>black cell (").count(),
        10,
        "one shape per black cell"
    );
}

#[test]
fn unknown_architecture() {
    refuse(
        "name: t8\nwidth: 8\narchitecture: banana-tree\n",
        "architecture",
        3,
        &["unknown architecture", "banana-tree"],
    );
}

// ---------------------------------------------------------------------------------------
// Refused specs: names
// ---------------------------------------------------------------------------------------

/// A spec whose `name` line (line 1) is `name_line`.
fn named(name_line: &str) -> String {
    format!("{name_line}\nwidth: 8\narchitecture: manchester\nblock: 4\n")
}

#[test]
fn name_starting_with_a_digit() {
    refuse(
        &named("name: 9abc"),
        "name",
        1,
        &["9abc", "not a plain identifier"],
    );
}

#[test]
fn name_with_a_dash() {
    refuse(
        &named("name: a-b"),
        "name",
        1,
        &["a-b", "not a plain identifier"],
    );
}

#[test]
fn name_with_a_newline_and_a_control_card() {
    // YAML double quotes turn `\n` into a real newline; the message must stay on one line.
    let err = refuse(
        &named("name: \"x\\n.control\""),
        "name",
        1,
        &["not a plain identifier"],
    );
    assert!(err.contains(".control"), "the name should be shown: {err}");
}

#[test]
fn name_with_a_double_quote() {
    refuse(
        &named("name: 'a\"b'"),
        "name",
        1,
        &["not a plain identifier"],
    );
}

#[test]
fn name_with_a_single_quote() {
    refuse(
        &named("name: \"a'b\""),
        "name",
        1,
        &["not a plain identifier"],
    );
}

#[test]
fn names_that_are_keywords() {
    // Each refusal says which list the name is on.
    for (kw, list) in [
        ("module", "Verilog or SystemVerilog keyword"),
        ("wire", "Verilog or SystemVerilog keyword"),
        ("end", "Verilog or SystemVerilog keyword"),
        ("subckt", "SPICE"),
        ("a", "top module's ports"),
        ("COUT", "top module's ports"),
    ] {
        // The name goes on line 2 here, to check the line is found, not assumed.
        let spec = format!("width: 8\nname: {kw}\narchitecture: manchester\nblock: 4\n");
        refuse(&spec, "name", 2, &[kw, list]);
    }
}

// ---------------------------------------------------------------------------------------
// Refused specs: technology
// ---------------------------------------------------------------------------------------

#[test]
fn gf180_without_a_model_folder() {
    // The sandbox removes CARRYWRIGHT_MODEL_DIR from the child's environment.
    refuse(
        &base_plus("technology: gf180mcu-3v3\n"),
        "technology",
        5,
        &["--model-dir", "CARRYWRIGHT_MODEL_DIR"],
    );
}

#[test]
fn gf180_with_a_model_folder_that_does_not_exist() {
    refuse_with(
        &base_plus("technology: gf180mcu-3v3\n"),
        &["--model-dir", "/nonexistent"],
        "technology",
        5,
        &["/nonexistent"],
    );
}

#[test]
fn technology_file_that_does_not_exist() {
    refuse(
        &base_plus("technology: no-such-tech.yaml\n"),
        "technology",
        5,
        &["no-such-tech.yaml"],
    );
}

#[test]
fn technology_file_that_does_not_exist_is_refused() {
    // The part of the behaviour above that holds today: refused, one line, nothing written.
    let sb = Sandbox::with_spec(&base_plus("technology: no-such-tech.yaml\n"));
    let run = sb.run(&["generate", "spec.yaml", "-o", "out"]);
    let err = one_error_line(&run);
    assert!(err.contains("no-such-tech.yaml"), "{}", run.describe());
    assert_nothing_written(&sb, &run);
}

#[test]
fn technology_path_with_a_quote() {
    // The technology path itself is never printed into a deck (only the model paths it
    // names are, and those are checked); a quote is just part of a file name that is missing.
    refuse(
        &base_plus("technology: \"te'ch.yaml\"\n"),
        "technology",
        5,
        &["not found"],
    );
}

#[test]
fn technology_path_with_a_newline() {
    refuse(
        &base_plus("technology: \"te\\nch.yaml\"\n"),
        "technology",
        5,
        &["control character"],
    );
}

// ---------------------------------------------------------------------------------------
// Refused specs: sizing and testbench
// ---------------------------------------------------------------------------------------

#[test]
fn device_below_the_technology_minimum_width() {
    // 0.25 x 1.0 um PMOS units are below the generic technology's 0.5 um minimum width.
    let sb = Sandbox::with_spec(
        "name: t8\nwidth: 8\narchitecture: ripple\nsizing: {unit_n: 1.0, pn_ratio: 0.25}\n",
    );
    let run = sb.run(&["generate", "spec.yaml", "-o", "out"]);
    let err = one_error_line(&run);
    assert!(
        err.contains("sizing") && err.contains("w_min"),
        "{}",
        run.describe()
    );
    assert_nothing_written(&sb, &run);
}

#[test]
fn name_that_is_also_an_internal_net() {
    let sb = Sandbox::with_spec("name: g1\nwidth: 8\narchitecture: kogge-stone\n");
    let run = sb.run(&["generate", "spec.yaml", "-o", "out"]);
    let err = one_error_line(&run);
    assert!(
        err.contains("name: `g1`") && err.contains("net or instance"),
        "{}",
        run.describe()
    );
    assert_nothing_written(&sb, &run);
}

#[test]
fn systemverilog_keyword_and_port_names_are_refused() {
    for name in ["assert", "inside", "modport", "cin", "cout"] {
        refuse(
            &format!("name: {name}\nwidth: 8\narchitecture: manchester\n"),
            "name",
            1,
            &[name],
        );
    }
}

#[test]
fn tiny_keeper_and_short_dynamic_period() {
    refuse(
        &base_plus("style: dynamic\nsizing: {keeper: 1e-320}\n"),
        "sizing.keeper",
        6,
        &["between 0.02 and 0.9"],
    );
    refuse(
        &base_plus("style: dynamic\ntestbench: {period: 200p}\n"),
        "testbench.period",
        6,
        &["at least"],
    );
}

#[test]
fn type_error_inside_buffers_names_the_sub_key() {
    refuse(
        &base_plus("buffers: {every: x}\n"),
        "buffers.every",
        5,
        &["integer"],
    );
}

#[test]
fn keeper_on_a_static_spec() {
    refuse(
        &base_plus("sizing: {keeper: 0.2}\n"),
        "sizing.keeper",
        5,
        &["static"],
    );
}

#[test]
fn load_that_is_not_a_quantity() {
    refuse(
        &base_plus("testbench: {load: banana}\n"),
        "testbench.load",
        5,
        &["banana"],
    );
}

#[test]
fn period_of_one_second_is_out_of_range() {
    refuse(
        &base_plus("testbench: {period: 1}\n"),
        "testbench.period",
        5,
        &["between"],
    );
}

// ---------------------------------------------------------------------------------------
// Refused spec files
// ---------------------------------------------------------------------------------------

#[test]
fn empty_spec_file() {
    for text in ["", "\n  \n"] {
        let sb = Sandbox::with_spec(text);
        let run = sb.run(&["generate", "spec.yaml", "-o", "out"]);
        let err = one_error_line(&run);
        assert!(err.starts_with("error: spec.yaml: "), "{}", run.describe());
        assert!(err.contains("empty"), "{}", run.describe());
        assert_nothing_written(&sb, &run);
    }
}

#[test]
fn spec_file_that_does_not_exist() {
    let sb = Sandbox::new();
    let run = sb.run(&["generate", "missing.yaml", "-o", "out"]);
    let err = one_error_line(&run);
    assert!(
        err.starts_with("error: missing.yaml: "),
        "{}",
        run.describe()
    );
    assert!(!sb.path().join("out").exists(), "{}", run.describe());
    assert!(
        sb.entries().is_empty(),
        "{:?}\n{}",
        sb.entries(),
        run.describe()
    );
}

#[test]
fn spec_that_is_not_a_mapping() {
    refuse("- 1\n", "top level", 1, &["sequence"]);
}

// ---------------------------------------------------------------------------------------
// Command-line errors
// ---------------------------------------------------------------------------------------

#[test]
fn no_subcommand_is_a_usage_error() {
    let sb = Sandbox::with_spec(BASE);
    let run = sb.run(&[]);
    let err = one_error_line(&run);
    assert!(err.contains("no command"), "{}", run.describe());
    assert_nothing_written(&sb, &run);
}

#[test]
fn unknown_flag_is_a_usage_error() {
    let sb = Sandbox::with_spec(BASE);
    let run = sb.run(&["generate", "spec.yaml", "-o", "out", "--bogus"]);
    let err = one_error_line(&run);
    assert!(err.contains("--bogus"), "{}", run.describe());
    assert_nothing_written(&sb, &run);
}

#[test]
fn check_with_too_few_random_vectors() {
    let sb = Sandbox::with_spec(BASE);
    let run = sb.run(&["check", "spec.yaml", "--random", "10"]);
    let err = one_error_line(&run);
    assert!(err.contains("--random"), "{}", run.describe());
    assert!(err.contains("10"), "{}", run.describe());
    assert_eq!(
        sb.entries(),
        vec!["spec.yaml".to_string()],
        "{}",
        run.describe()
    );
}

// ---------------------------------------------------------------------------------------
// Valid specs
// ---------------------------------------------------------------------------------------

/// Assert a run succeeded with exit code 0.
fn assert_ok(run: &Run) {
    assert_eq!(run.code, Some(0), "expected success\n{}", run.describe());
}

#[test]
fn generation_is_deterministic_and_writes_exactly_five_files() {
    let sb = Sandbox::with_spec(BASE);
    let a = sb.run(&["generate", "spec.yaml", "-o", "a"]);
    assert_ok(&a);
    let b = sb.run(&["generate", "spec.yaml", "-o", "b"]);
    assert_ok(&b);
    assert_eq!(sb.files_in("a"), T8_FILES, "{}", a.describe());
    assert_eq!(sb.files_in("b"), T8_FILES, "{}", b.describe());
    for f in T8_FILES {
        let (x, y) = (sb.read(&format!("a/{f}")), sb.read(&format!("b/{f}")));
        assert!(!x.is_empty(), "{f} is empty");
        assert!(
            x == y,
            "{f} differs between two generations of the same spec"
        );
    }
    // Nothing else in the sandbox: no leftover temporary folder.
    let mut expected: Vec<String> = vec!["a/".into()];
    expected.extend(T8_FILES.iter().map(|f| format!("a/{f}")));
    expected.push("b/".into());
    expected.extend(T8_FILES.iter().map(|f| format!("b/{f}")));
    expected.push("spec.yaml".into());
    assert_eq!(sb.entries(), expected);
}

#[test]
fn generate_check_reports_exactly_the_stale_files_and_writes_nothing() {
    let sb = Sandbox::with_spec(BASE);
    assert_ok(&sb.run(&["generate", "spec.yaml", "-o", "out"]));

    let fresh = sb.run(&["generate", "spec.yaml", "-o", "out", "--check"]);
    assert_ok(&fresh);
    assert!(fresh.stdout.contains("up to date"), "{}", fresh.describe());

    // One file modified, one deleted.
    let mut v = sb.read("out/t8.v");
    v.extend_from_slice(b"// edited by hand\n");
    std::fs::write(sb.path().join("out/t8.v"), &v).unwrap();
    std::fs::remove_file(sb.path().join("out/t8.json")).unwrap();
    let before = sb.snapshot();

    let stale = sb.run(&["generate", "spec.yaml", "-o", "out", "--check"]);
    assert_eq!(stale.code, Some(1), "{}", stale.describe());
    let listed: Vec<&str> = stale
        .stdout
        .split_once("stale:")
        .unwrap_or_else(|| panic!("no `stale:` in stdout\n{}", stale.describe()))
        .1
        .split_whitespace()
        .collect();
    let mut listed_sorted = listed.clone();
    listed_sorted.sort_unstable();
    assert_eq!(
        listed_sorted,
        vec!["t8.json", "t8.v"],
        "stdout must name exactly the stale files\n{}",
        stale.describe()
    );
    assert_eq!(
        sb.snapshot(),
        before,
        "--check must not change, add or restore any file\n{}",
        stale.describe()
    );
}

#[test]
fn generate_check_on_a_missing_folder_does_not_create_it() {
    let sb = Sandbox::with_spec(BASE);
    let run = sb.run(&["generate", "spec.yaml", "-o", "out", "--check"]);
    assert_eq!(run.code, Some(1), "{}", run.describe());
    for f in T8_FILES {
        assert!(
            run.stdout.contains(f),
            "{f} should be listed\n{}",
            run.describe()
        );
    }
    assert_nothing_written(&sb, &run);
}

#[test]
fn regenerating_replaces_the_files_and_leaves_no_temporary_folder() {
    let sb = Sandbox::with_spec(BASE);
    assert_ok(&sb.run(&["generate", "spec.yaml", "-o", "out"]));
    let original = sb.snapshot();
    sb.write("out/t8.v", "garbage\n");
    sb.write("out/t8_tb.sp", "");

    let again = sb.run(&["generate", "spec.yaml", "-o", "out"]);
    assert_ok(&again);
    assert_eq!(
        sb.snapshot(),
        original,
        "regenerating must restore every file\n{}",
        again.describe()
    );
    let leftovers: Vec<String> = sb
        .entries()
        .into_iter()
        .filter(|e| e.split('/').any(|part| part.starts_with(".carrywright-")))
        .collect();
    assert!(
        leftovers.is_empty(),
        "temporary folders left behind: {leftovers:?}\n{}",
        again.describe()
    );
    let check = sb.run(&["generate", "spec.yaml", "-o", "out", "--check"]);
    assert_ok(&check);
}

#[test]
fn check_on_a_valid_spec_passes() {
    let sb = Sandbox::with_spec(BASE);
    let run = sb.run(&["check", "spec.yaml"]);
    assert_ok(&run);
    assert!(
        run.stdout
            .lines()
            .any(|l| l.contains("logic") && l.contains("ok")),
        "expected a `logic ... ok` line\n{}",
        run.describe()
    );
    assert!(
        !run.stdout.contains("FAILED"),
        "no check may fail\n{}",
        run.describe()
    );
    assert_eq!(
        sb.entries(),
        vec!["spec.yaml".to_string()],
        "{}",
        run.describe()
    );
}

#[test]
fn help_names_the_subcommands() {
    let sb = Sandbox::new();
    for args in [&["--help"][..], &["generate", "--help"][..]] {
        let run = sb.run(args);
        assert_ok(&run);
        for word in ["generate", "check"] {
            assert!(
                run.stdout.contains(word),
                "help should mention `{word}`\n{}",
                run.describe()
            );
        }
    }
    assert!(sb.entries().is_empty(), "{:?}", sb.entries());
}

// ---------------------------------------------------------------------------------------
// Hostile input, faults and interface habits (issue 6)
// ---------------------------------------------------------------------------------------

#[test]
fn check_random_beyond_the_bound_is_refused() {
    // 2^64 - 7 used to wrap around to a handful of vectors and pass.
    for n in [
        "18446744073709551609",
        "100000001",
        "-5",
        "lots",
        "99999999999999999999999",
    ] {
        let sb = Sandbox::with_spec(BASE);
        let arg = format!("--random={n}");
        let run = sb.run(&["check", "spec.yaml", &arg]);
        let err = one_error_line(&run);
        assert!(err.contains("--random"), "{}", run.describe());
        assert!(
            err.contains("100000000"),
            "names the bound\n{}",
            run.describe()
        );
        assert!(run.stdout.is_empty(), "{}", run.describe());
    }
}

#[test]
fn missing_argument_and_bad_flag_are_one_line() {
    let sb = Sandbox::with_spec(BASE);
    for args in [
        &["check"][..],
        &["generate", "spec.yaml"][..],
        &["frobnicate"][..],
        &["check", "spec.yaml", "--bo\ngus"][..],
    ] {
        let run = sb.run(args);
        let err = one_error_line(&run);
        assert!(!err.contains("Usage"), "{}", run.describe());
    }
    let run = sb.run(&["check", "spec.yaml", "--bo\ngus"]);
    assert!(
        one_error_line(&run).contains("--bo\\ngus"),
        "the echoed flag is escaped\n{}",
        run.describe()
    );
    assert_nothing_written(&sb, &run);
}

#[test]
fn help_and_version_still_print_and_exit_zero() {
    let sb = Sandbox::new();
    let v = sb.run(&["--version"]);
    assert_ok(&v);
    assert!(v.stdout.starts_with("carrywright "), "{}", v.describe());
    let h = sb.run(&["check", "--help"]);
    assert_ok(&h);
    assert!(h.stdout.contains("--random"), "{}", h.describe());
}

/// Generate from a spec nested too deep: refused with one line at `line`, before the YAML
/// parser runs (it used to take a minute on such a file; no time is asserted here), and
/// nothing written.
fn refuse_too_deep(spec: &str, line: usize) {
    let sb = Sandbox::with_spec(spec);
    let run = sb.run(&["generate", "spec.yaml", "-o", "out"]);
    let err = one_error_line(&run);
    assert!(
        err.starts_with(&format!("error: spec.yaml:{line}:")),
        "{}",
        run.describe()
    );
    assert!(err.contains("nested deeper than 32"), "{}", run.describe());
    assert_nothing_written(&sb, &run);
}

#[test]
fn deeply_nested_flow_spec_is_refused() {
    refuse_too_deep(&format!("{BASE}buffers: {}\n", "[".repeat(200_000)), 5);
}

#[test]
fn deeply_nested_block_mapping_is_refused() {
    let mut spec = String::from(BASE);
    spec.push_str("testbench:\n");
    for i in 1..1000 {
        spec.push_str(&format!("{}k{i}:\n", " ".repeat(i)));
    }
    // testbench is level 1 on line 5; k32 on line 37 is level 33.
    refuse_too_deep(&spec, 37);
}

#[test]
fn deeply_nested_block_sequence_on_one_line_is_refused() {
    refuse_too_deep(&"- ".repeat(100_000), 1);
}

#[test]
fn quotes_do_not_hide_nesting() {
    // A `]` inside a quoted scalar closes nothing.
    refuse_too_deep(&format!("{BASE}buffers: {}\n", "[\"]\", ".repeat(5_000)), 5);
}

#[test]
fn spec_larger_than_one_mib_is_refused() {
    let spec = format!("{BASE}# {}\n", "x".repeat(1 << 20));
    let sb = Sandbox::with_spec(&spec);
    let run = sb.run(&["generate", "spec.yaml", "-o", "out"]);
    let err = one_error_line(&run);
    assert!(err.contains("larger than 1024 KiB"), "{}", run.describe());
    assert_nothing_written(&sb, &run);
}

#[test]
fn spec_that_is_not_utf8_is_refused() {
    let sb = Sandbox::new();
    std::fs::write(sb.path().join("spec.yaml"), b"name: t\xff8\nwidth: 8\n").unwrap();
    let run = sb.run(&["generate", "spec.yaml", "-o", "out"]);
    assert!(one_error_line(&run).contains("UTF-8"), "{}", run.describe());
    assert_nothing_written(&sb, &run);
}

#[test]
fn device_files_and_folders_are_refused_without_reading() {
    // /dev/zero used to be read until memory ran out.
    let sb = Sandbox::with_spec(BASE);
    for path in ["/dev/zero", "/dev/null", "."] {
        if !Path::new(path).exists() {
            println!("SKIPPED: {path} does not exist on this machine");
            continue;
        }
        let run = sb.run(&["generate", path, "-o", "out"]);
        let err = one_error_line(&run);
        assert!(err.contains("not a regular file"), "{}", run.describe());
        assert_nothing_written(&sb, &run);
    }
}

#[test]
fn fifo_spec_is_refused_without_waiting() {
    // A FIFO used to block forever.
    let sb = Sandbox::with_spec(BASE);
    let made = Command::new("mkfifo")
        .arg(sb.path().join("pipe.yaml"))
        .status();
    if !matches!(made, Ok(s) if s.success()) {
        println!("SKIPPED: mkfifo is not available here");
        return;
    }
    let run = sb.run(&["check", "pipe.yaml"]);
    let err = one_error_line(&run);
    assert!(err.starts_with("error: pipe.yaml: "), "{}", run.describe());
    assert!(err.contains("not a regular file"), "{}", run.describe());
}

#[test]
fn newline_in_the_model_folder_stays_on_one_line() {
    let sb = Sandbox::with_spec(&base_plus("technology: gf180mcu-3v3\n"));
    let run = sb.run(&["generate", "spec.yaml", "-o", "out", "--model-dir", "a\nb"]);
    let err = one_error_line(&run);
    assert!(
        err.contains("a\\nb"),
        "the path is escaped\n{}",
        run.describe()
    );
    assert_nothing_written(&sb, &run);
    let env = sb.run_with(&["generate", "spec.yaml", "-o", "out"], |c| {
        c.env("CARRYWRIGHT_MODEL_DIR", "x\r\ny\u{1b}[31m");
    });
    let err = one_error_line(&env);
    assert!(!err.contains('\u{1b}'), "{}", env.describe());
}

#[test]
fn newline_in_the_spec_path_stays_on_one_line() {
    let sb = Sandbox::new();
    let run = sb.run(&["generate", "no\nsuch.yaml", "-o", "out"]);
    let err = one_error_line(&run);
    assert!(
        err.starts_with("error: no\\nsuch.yaml: "),
        "{}",
        run.describe()
    );
}

/// Open `/dev/full` for writing, or say why the test is skipped.
fn dev_full() -> Option<std::fs::File> {
    match std::fs::OpenOptions::new().write(true).open("/dev/full") {
        Ok(f) => Some(f),
        Err(e) => {
            println!("SKIPPED: /dev/full cannot be opened here: {e}");
            None
        }
    }
}

#[test]
fn full_stderr_does_not_panic_or_change_the_exit_code() {
    let Some(full) = dev_full() else { return };
    // A failure: still exit 2, nothing written, no panic (101).
    let sb = Sandbox::with_spec("name: t8\nwidth: 0\narchitecture: manchester\n");
    let err2 = full.try_clone().unwrap();
    let run = sb.run_with(&["generate", "spec.yaml", "-o", "y"], |c| {
        c.stderr(err2);
    });
    assert_eq!(run.code, Some(2), "{}", run.describe());
    assert_nothing_written(&sb, &run);
    // A success with a full stderr and a full stdout.
    let ok = Sandbox::with_spec(BASE);
    let run = ok.run_with(&["generate", "spec.yaml", "-o", "y"], |c| {
        c.stderr(full.try_clone().unwrap());
        c.stdout(full);
    });
    assert_eq!(run.code, Some(0), "{}", run.describe());
    assert_eq!(ok.files_in("y"), T8_FILES);
}

#[test]
fn closed_stdout_does_not_panic() {
    let sb = Sandbox::with_spec(BASE);
    let mut child = Command::new(env!("CARGO_BIN_EXE_carrywright"))
        .args(["describe", "spec.yaml"])
        .current_dir(sb.path())
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .expect("run the binary");
    drop(child.stdout.take());
    let out = child.wait_with_output().expect("wait for the binary");
    assert_eq!(out.status.code(), Some(0), "{:?}", out);
    assert!(out.stderr.is_empty(), "{:?}", out);
}

#[test]
fn duplicate_key_is_reported_at_its_second_line() {
    // It used to be reported at 1:1.
    let err = refuse(
        &base_plus("width: 9\n"),
        "width",
        5,
        &["given twice", "line 2"],
    );
    assert!(err.starts_with("error: spec.yaml:5:1: "), "{err}");
    refuse(
        &base_plus("testbench:\n  seed: 3\n  seed: 4\n"),
        "testbench.seed",
        7,
        &["given twice", "line 6"],
    );
    let err = refuse(
        &base_plus("buffers: {every: 4, every: 4}\n"),
        "buffers.every",
        5,
        &["given twice"],
    );
    assert!(err.starts_with("error: spec.yaml:5:21: "), "{err}");
}

#[test]
fn tab_error_names_the_key_on_its_line() {
    // It used to name the key before the tab (`architecture`).
    let err = refuse(
        "name: t8\nwidth: 8\narchitecture: manchester\n\tblock: 4\n",
        "block",
        4,
        &["syntax error", "tab"],
    );
    assert!(!err.contains("architecture"), "{err}");
}

#[test]
fn unclosed_bracket_is_a_syntax_error_where_it_opens() {
    let err = refuse(
        &base_plus("buffers: {at: [4\n"),
        "buffers",
        5,
        &["syntax error", "`[` is never closed"],
    );
    assert!(err.starts_with("error: spec.yaml:5:15: "), "{err}");
}

#[test]
fn technology_file_that_is_not_a_mapping_is_not_called_a_spec() {
    let sb = Sandbox::with_spec(&base_plus("technology: tech.yaml\n"));
    sb.write("tech.yaml", "- 1\n");
    let run = sb.run(&["generate", "spec.yaml", "-o", "out"]);
    let err = one_error_line(&run);
    assert!(err.starts_with("error: "), "{}", run.describe());
    assert!(
        err.contains("tech.yaml:1:1: top level: "),
        "{}",
        run.describe()
    );
    assert!(!err.contains("spec:"), "{}", run.describe());
}

#[test]
fn keeper_that_underflows_to_zero_is_refused() {
    // 1e-400 used to become 0: a dynamic chain silently without keepers.
    refuse(
        &base_plus("style: dynamic\nsizing: {keeper: 1e-400}\n"),
        "sizing.keeper",
        6,
        &["1e-400", "too small"],
    );
    refuse(
        &base_plus("sizing: {unit_n: 1e400}\n"),
        "sizing.unit_n",
        5,
        &["not a finite number"],
    );
}

#[test]
fn load_that_would_print_as_zero_is_refused() {
    // 1e-14f is 1e-29 F: the JSON said 1e-29 while the deck printed 0f.
    refuse(
        &base_plus("testbench: {load: 1e-14f}\n"),
        "testbench.load",
        5,
        &["1e-14f", "0f"],
    );
    refuse(
        &base_plus("testbench: {load: 1e-400}\n"),
        "testbench.load",
        5,
        &["too small"],
    );
}

#[test]
fn range_errors_show_the_value_read() {
    refuse(
        &base_plus("testbench: {load: 10}\n"),
        "testbench.load",
        5,
        &["between 0 and 10p", "got 10"],
    );
    refuse(
        &base_plus("testbench: {period: 5n, step: 1n}\n"),
        "testbench.step",
        5,
        &["got 1n"],
    );
}

#[test]
fn check_json_is_one_object_with_the_table_facts() {
    let sb = Sandbox::with_spec(BASE);
    let run = sb.run(&["check", "spec.yaml", "--json"]);
    assert_ok(&run);
    assert_eq!(run.stdout.lines().count(), 1, "{}", run.describe());
    let v: serde_json::Value = serde_json::from_str(&run.stdout).expect("valid JSON");
    assert_eq!(v["name"], "t8");
    assert_eq!(v["logic"]["ok"], true);
    // 8 bits: exhaustive, 2^17 vectors (a, b and cin).
    assert_eq!(v["logic"]["vectors"], 1u64 << 17);
    let table = sb.run(&["check", "spec.yaml"]);
    let transistors = v["transistors"].as_u64().unwrap().to_string();
    assert!(
        table
            .stdout
            .lines()
            .any(|l| l.contains("transistors") && l.contains(&transistors)),
        "the table and the JSON agree\n{}",
        table.describe()
    );
}

#[test]
fn describe_json_is_one_object() {
    let sb = Sandbox::with_spec("name: ks8\nwidth: 8\narchitecture: kogge-stone\n");
    let run = sb.run(&["describe", "spec.yaml", "--json"]);
    assert_ok(&run);
    let v: serde_json::Value = serde_json::from_str(&run.stdout).expect("valid JSON");
    // Kogge-Stone, 8 bits: N log2 N - N + 1 = 17 prefix cells, log2 N = 3 levels (Harris 2003).
    assert_eq!(v["prefix"]["cells"], 17, "{}", run.stdout);
    assert_eq!(v["prefix"]["levels"], 3, "{}", run.stdout);
    assert!(v["counts"]["transistors"].as_u64().unwrap() > 0);
}

#[test]
fn quiet_prints_nothing_but_still_writes() {
    let sb = Sandbox::with_spec(BASE);
    let run = sb.run(&["generate", "spec.yaml", "-o", "out", "--quiet"]);
    assert_ok(&run);
    assert!(
        run.stdout.is_empty() && run.stderr.is_empty(),
        "{}",
        run.describe()
    );
    assert_eq!(sb.files_in("out"), T8_FILES);
    let stale = sb.run(&["-q", "generate", "spec.yaml", "-o", "fresh", "--check"]);
    assert_eq!(stale.code, Some(1), "{}", stale.describe());
    assert!(stale.stdout.is_empty(), "{}", stale.describe());
    assert!(
        stale.stderr.contains("stale"),
        "the failure is still said\n{}",
        stale.describe()
    );
}

#[test]
fn several_specs_each_into_their_own_folder() {
    let sb = Sandbox::with_spec(BASE);
    sb.write("b.yaml", "name: wren_b\nwidth: 4\narchitecture: ripple\n");
    let run = sb.run(&["generate", "spec.yaml", "b.yaml", "-o", "out"]);
    assert_ok(&run);
    assert_eq!(sb.files_in("out"), ["t8", "wren_b"]);
    assert_eq!(sb.files_in("out/t8"), T8_FILES);
    // The same bytes as a generation on its own.
    assert_ok(&sb.run(&["generate", "spec.yaml", "-o", "alone"]));
    for f in T8_FILES {
        assert_eq!(
            sb.read(&format!("out/t8/{f}")),
            sb.read(&format!("alone/{f}"))
        );
    }
    let check = sb.run(&["generate", "spec.yaml", "b.yaml", "-o", "out", "--check"]);
    assert_ok(&check);
}

#[test]
fn several_specs_nothing_written_if_one_fails() {
    let sb = Sandbox::with_spec(BASE);
    sb.write(
        "bad.yaml",
        "name: wren_bad\nwidth: 0\narchitecture: ripple\n",
    );
    let run = sb.run(&["generate", "spec.yaml", "bad.yaml", "-o", "out"]);
    let err = one_error_line(&run);
    assert!(err.starts_with("error: bad.yaml:2:"), "{}", run.describe());
    assert!(!sb.path().join("out").exists(), "{}", run.describe());
}

#[test]
fn several_specs_with_the_same_name_are_refused() {
    let sb = Sandbox::with_spec(BASE);
    sb.write("again.yaml", BASE);
    let run = sb.run(&["generate", "spec.yaml", "again.yaml", "-o", "out"]);
    let err = one_error_line(&run);
    assert!(err.contains("both named `t8`"), "{}", run.describe());
    assert!(!sb.path().join("out").exists(), "{}", run.describe());
}

#[test]
fn spec_from_standard_input() {
    let sb = Sandbox::with_spec(BASE);
    let stdin = || std::fs::File::open(sb.path().join("spec.yaml")).unwrap();
    let run = sb.run_with(&["generate", "-", "-o", "out"], |c| {
        c.stdin(stdin());
    });
    assert_ok(&run);
    assert_ok(&sb.run(&["generate", "spec.yaml", "-o", "file"]));
    for f in T8_FILES {
        assert_eq!(sb.read(&format!("out/{f}")), sb.read(&format!("file/{f}")));
    }
    // Errors are labelled <stdin>; a relative technology path resolves from the current folder.
    sb.write("bad.yaml", &base_plus("technology: nothere.yaml\n"));
    let run = sb.run_with(&["check", "-"], |c| {
        c.stdin(std::fs::File::open(sb.path().join("bad.yaml")).unwrap());
    });
    let err = one_error_line(&run);
    assert!(
        err.starts_with("error: <stdin>:5:1: technology: "),
        "{}",
        run.describe()
    );
    assert!(err.contains("./nothere.yaml"), "{}", run.describe());
}

#[test]
fn alias_bomb_is_refused_before_it_expands() {
    // Nine levels of nine aliases would expand to 9^9 values.
    let mut spec = String::from("x0: &a0 [w, w, w, w, w, w, w, w, w]\n");
    for i in 1..9 {
        let refs = vec![format!("*a{}", i - 1); 9].join(", ");
        spec.push_str(&format!("x{i}: &a{i} [{refs}]\n"));
    }
    spec.push_str(BASE);
    let sb = Sandbox::with_spec(&spec);
    let run = sb.run(&["generate", "spec.yaml", "-o", "out"]);
    let err = one_error_line(&run);
    assert!(
        err.starts_with("error: spec.yaml:2:10: "),
        "{}",
        run.describe()
    );
    assert!(err.contains("aliases"), "{}", run.describe());
    assert_nothing_written(&sb, &run);
}

#[test]
fn standard_input_only_once() {
    let sb = Sandbox::with_spec(BASE);
    let run = sb.run_with(&["generate", "-", "-", "-o", "out"], |c| {
        c.stdin(std::fs::File::open(sb.path().join("spec.yaml")).unwrap());
    });
    assert!(
        one_error_line(&run).contains("only once"),
        "{}",
        run.describe()
    );
    assert_nothing_written(&sb, &run);
}

#[test]
fn control_character_is_located_on_its_line() {
    // The YAML reader gives a byte offset; it used to be shown as 1:1.
    let err = refuse(
        &base_plus("style: stat\u{1b}[31mic\n"),
        "style",
        5,
        &["syntax error", "control characters"],
    );
    assert!(err.starts_with("error: spec.yaml:5:12: "), "{err}");
}

/// `describe` of a dynamic design with keepers reports the keeper check: where it timed the
/// fronts, the slowest against its limit, and the holding margin; a static design has no
/// such row.
#[test]
fn describe_reports_the_keeper_check() {
    let sb = Sandbox::with_spec("name: d16\nwidth: 16\narchitecture: manchester\nstyle: dynamic\nblock: 4\nbuffers: {every: 4}\n");
    let run = sb.run(&["describe", "spec.yaml"]);
    assert_eq!(run.code, Some(0), "{}", run.describe());
    let row = run
        .stdout
        .lines()
        .find(|l| l.trim_start().starts_with("keeper check"))
        .unwrap_or_else(|| panic!("no keeper row\n{}", run.describe()));
    assert!(
        row.contains("passes at") && row.contains("4 segments"),
        "{row}"
    );
    assert!(
        row.contains("their node's leakage") || row.contains("(limit"),
        "{row}"
    );
    let st = Sandbox::with_spec(BASE);
    let run = st.run(&["describe", "spec.yaml"]);
    assert!(!run.stdout.contains("keeper check"), "{}", run.describe());
}

// ---------------------------------------------------------------- verify

/// A sandbox holding spec.yaml (BASE) and its generated views in `out`.
fn generated() -> (Sandbox, String) {
    let sb = Sandbox::with_spec(BASE);
    let run = sb.run(&["generate", "spec.yaml", "-o", "out"]);
    assert_eq!(run.code, Some(0), "{}", run.describe());
    let sp = String::from_utf8(sb.read("out/t8.sp")).unwrap();
    (sb, sp)
}

/// The lines of subcircuit `sub` in `text` mapped by `f` (None drops a line).
fn map_subckt(text: &str, sub: &str, f: impl Fn(&str) -> Option<String>) -> String {
    let mut inside = false;
    let mut out = vec![];
    for l in text.lines() {
        if l.starts_with(".subckt ") {
            inside = l.split_whitespace().nth(1) == Some(sub);
        }
        let keep = if inside && !l.starts_with('.') && !l.starts_with('*') && !l.is_empty() {
            f(l)
        } else {
            Some(l.to_string())
        };
        out.extend(keep);
        if l.starts_with(".ends") {
            inside = false;
        }
    }
    out.join("\n") + "\n"
}

#[test]
fn verify_accepts_the_generated_netlist_renamed_and_reordered() {
    let (sb, sp) = generated();
    let run = sb.run(&["verify", "out/t8.sp", "--spec", "spec.yaml", "--strict"]);
    assert_eq!(run.code, Some(0), "{}", run.describe());
    assert!(run.stdout.contains("adds correctly"), "{}", run.describe());
    // Instances of the block renamed and its lines reversed: still the same structure.
    let mut lines: Vec<String> = vec![];
    let mut block: Vec<String> = vec![];
    let mut inside = false;
    for l in sp.lines() {
        if l.starts_with(".subckt t8_blk4_i ") {
            inside = true;
            lines.push(l.to_string());
            continue;
        }
        if inside && l.starts_with(".ends") {
            block.reverse();
            lines.append(&mut block);
            inside = false;
        }
        if inside {
            block.push(l.replacen('x', "xr_", 1));
        } else {
            lines.push(l.to_string());
        }
    }
    sb.write("renamed.sp", &(lines.join("\n") + "\n"));
    let run = sb.run(&["verify", "renamed.sp", "--spec", "spec.yaml", "--strict"]);
    assert_eq!(run.code, Some(0), "{}", run.describe());
    assert!(run.stdout.contains("same"), "{}", run.describe());
}

#[test]
fn verify_reports_a_removed_device_and_fails() {
    let (sb, sp) = generated();
    let edited = map_subckt(&sp, "t8_sum_i", |l| {
        (!l.starts_with("mn_s ")).then(|| l.into())
    });
    sb.write("edited.sp", &edited);
    let run = sb.run(&["verify", "edited.sp", "--spec", "spec.yaml"]);
    assert_eq!(run.code, Some(1), "{}", run.describe());
    assert!(run.stdout.contains("FAILED"), "{}", run.describe());
    // One removed device per instance of the sum cell, each named.
    assert_eq!(
        run.stdout.matches("removed: ").count(),
        8,
        "{}",
        run.describe()
    );
    assert!(
        run.stdout
            .contains("removed: xblk0.xsum0.mn_s (nmos w=1 l=0.35"),
        "{}",
        run.describe()
    );
}

#[test]
fn verify_reports_an_added_device_and_fails_only_when_strict() {
    let (sb, sp) = generated();
    // A second inverter pull-down in parallel: the netlist still adds.
    let edited = map_subckt(&sp, "t8_inv", |l| {
        Some(match l.starts_with("mn_y ") {
            true => format!("{l}\nmn_y2{}", &l[4..]),
            false => l.to_string(),
        })
    });
    sb.write("edited.sp", &edited);
    let run = sb.run(&["verify", "edited.sp", "--spec", "spec.yaml"]);
    assert_eq!(run.code, Some(0), "{}", run.describe());
    assert!(
        run.stdout.contains("added: ") && run.stdout.contains("mn_y2"),
        "{}",
        run.describe()
    );
    let run = sb.run(&["verify", "edited.sp", "--spec", "spec.yaml", "--strict"]);
    assert_eq!(run.code, Some(1), "{}", run.describe());
    assert!(run.stdout.contains("--strict"), "{}", run.describe());
}

#[test]
fn verify_json_carries_every_part() {
    let (sb, sp) = generated();
    let edited = map_subckt(&sp, "t8_mcc_i", |l| {
        Some(l.replace(
            "mn_p ci p co vss cw_nch w=1u",
            "mn_p ci p co vss cw_nch w=3u",
        ))
    });
    sb.write("edited.sp", &edited);
    let run = sb.run(&["verify", "edited.sp", "--spec", "spec.yaml", "--json"]);
    assert_eq!(run.code, Some(0), "{}", run.describe());
    let v: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    assert_eq!(v["exit_code"], 0);
    assert_eq!(v["switch_level"]["passed"], true);
    assert_eq!(v["switch_level"]["vectors"], 1u64 << 17);
    assert_eq!(v["structure"]["isomorphic"], true);
    let sizes = v["sizes"].as_array().unwrap();
    assert_eq!(sizes.len(), 8, "one row per instance of the chain cell");
    assert_eq!(sizes[0]["w_reference"], 1.0);
    assert_eq!(sizes[0]["w"], 3.0);
}

#[test]
fn verify_refuses_files_it_cannot_read_with_exit_2() {
    let (sb, sp) = generated();
    let run = sb.run(&["verify", "missing.sp", "--spec", "spec.yaml"]);
    let e = one_error_line(&run);
    assert!(e.contains("missing.sp") && e.contains("cannot read"), "{e}");
    sb.write("stray.sp", &format!("{sp}hello world\n"));
    let run = sb.run(&["verify", "stray.sp", "--spec", "spec.yaml"]);
    let e = one_error_line(&run);
    assert!(e.starts_with("error: stray.sp:"), "{e}");
    sb.write("other.sp", &sp.replace("t8", "u8"));
    let run = sb.run(&["verify", "other.sp", "--spec", "spec.yaml"]);
    let e = one_error_line(&run);
    assert!(e.contains("no subcircuit named t8"), "{e}");
}

/// A technology file on the embedded generic model cards (written to `cards`), with `extra`
/// keys appended.
fn generic_tech_file(cards: &std::path::Path, extra: &str) -> String {
    format!(
        "name: dt\nvdd: 3.3\nl_min: 0.35\nw_min: 0.5\nnmos: cw_nch\npmos: cw_pch\nunit_n: 1.0\npn_ratio: 2.5\ninclude: [\"{}\"]\n{extra}",
        cards.display()
    )
}

/// The diffusion keys of a technology file: in range they reach every device line (the
/// shared length on a stack's inner node), out of range or `diffusion_shared_um` alone are
/// refused with exit 2 naming the key.
#[test]
fn technology_file_diffusion_keys_are_read_and_checked() {
    let sb = Sandbox::with_spec(&base_plus("technology: tech.yaml\n"));
    sb.write("cards.lib", carrywright::tech::GENERIC_MODELS);
    let cards = sb.path().join("cards.lib");
    let tech = |extra: &str| generic_tech_file(&cards, extra);
    sb.write(
        "tech.yaml",
        &tech("diffusion_um: 0.5\ndiffusion_shared_um: 0.3\n"),
    );
    let run = sb.run(&["generate", "spec.yaml", "-o", "out"]);
    assert_ok(&run);
    let sp = String::from_utf8(sb.read("out/t8.sp")).unwrap();
    let dev_lines: Vec<&str> = sp.lines().filter(|l| l.starts_with("mn_")).collect();
    assert!(!dev_lines.is_empty(), "{sp}");
    assert!(dev_lines.iter().all(|l| l.contains(" ad=")), "{sp}");
    // W·e = 0.5 for a 1 µm contacted end; a shared end of a W µm device is W·0.3/2.
    assert!(
        dev_lines
            .iter()
            .any(|l| l.contains("w=1u ") && l.contains("ad=0.5p")),
        "{sp}"
    );
    assert!(
        dev_lines
            .iter()
            .any(|l| l.contains("=0.3p ") || l.contains("=0.15p ")),
        "no shared end in\n{sp}"
    );
    for (extra, key, needle) in [
        (
            "diffusion_um: 0.5\ndiffusion_shared_um: 20\n",
            "diffusion_shared_um",
            "got 20",
        ),
        ("diffusion_um: 0\n", "diffusion_um", "got 0"),
        (
            "diffusion_shared_um: 0.3\n",
            "diffusion_shared_um",
            "needs `diffusion_um`",
        ),
    ] {
        sb.write("tech.yaml", &tech(extra));
        let run = sb.run(&["generate", "spec.yaml", "-o", "out2"]);
        let err = one_error_line(&run);
        assert_eq!(run.code, Some(2), "{}", run.describe());
        assert!(err.contains(&format!("{key}: ")), "{}", run.describe());
        assert!(err.contains(needle), "{}", run.describe());
        assert!(err.contains("tech.yaml:"), "{}", run.describe());
    }
}

/// NAME.json's `spec_hash` says it covers the technology's values: two technology files that
/// differ only in the diffusion geometry (the deck's `ad as pd ps` differ) hash apart, and the
/// same file again hashes alike.
#[test]
fn spec_hash_covers_the_technology_files_diffusion_geometry() {
    let sb = Sandbox::with_spec(&base_plus("technology: tech.yaml\n"));
    sb.write("cards.lib", carrywright::tech::GENERIC_MODELS);
    let cards = sb.path().join("cards.lib");
    let hash_with = |extra: &str, out: &str| -> String {
        sb.write("tech.yaml", &generic_tech_file(&cards, extra));
        let run = sb.run(&["generate", "spec.yaml", "-o", out]);
        assert_ok(&run);
        let v: serde_json::Value =
            serde_json::from_slice(&sb.read(&format!("{out}/t8.json"))).unwrap();
        v["spec_hash"].as_str().unwrap().to_string()
    };
    let a = hash_with("diffusion_um: 0.5\ndiffusion_shared_um: 0.3\n", "o1");
    let b = hash_with("diffusion_um: 0.6\ndiffusion_shared_um: 0.3\n", "o2");
    let none = hash_with("", "o3");
    let again = hash_with("diffusion_um: 0.5\ndiffusion_shared_um: 0.3\n", "o4");
    assert_ne!(a, b, "diffusion_um not in the hash");
    assert_ne!(a, none, "the diffusion extension not in the hash");
    assert_eq!(a, again);
}
