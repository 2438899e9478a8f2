//! NAME.json and the size of what `generate` writes: numbers without float noise, blocks
//! explained as half-open ranges, the tool version and a hash of the resolved spec, and output
//! that does not grow with the number of random vectors the Verilog testbench runs.

use carrywright::spec::{self, LoadOptions};
use std::path::Path;

fn parse(yaml: &str) -> carrywright::spec::Spec {
    spec::parse(yaml, "test", Path::new("."), &LoadOptions::default())
        .unwrap_or_else(|e| panic!("{e}\n{yaml}"))
}

fn files(yaml: &str) -> Vec<(String, String)> {
    carrywright::generate(&parse(yaml)).unwrap().files
}

fn summary(yaml: &str) -> (String, serde_json::Value) {
    let (_, text) = files(yaml)
        .into_iter()
        .find(|(n, _)| n.ends_with(".json"))
        .unwrap();
    let v = serde_json::from_str(&text).unwrap();
    (text, v)
}

/// Significant digits of every number written in a JSON text (integers included).
fn number_digits(text: &str) -> Vec<(String, usize)> {
    let mut out = vec![];
    let mut in_string = false;
    let mut prev = ' ';
    let chars: Vec<char> = text.chars().collect();
    let mut i = 0;
    while i < chars.len() {
        let c = chars[i];
        if c == '"' && prev != '\\' {
            in_string = !in_string;
        } else if !in_string && (c.is_ascii_digit() || c == '-') {
            let start = i;
            while i < chars.len() && "0123456789.eE+-".contains(chars[i]) {
                i += 1;
            }
            let tok: String = chars[start..i].iter().collect();
            let mantissa = tok.split(['e', 'E']).next().unwrap();
            let digits = mantissa
                .chars()
                .filter(|c| c.is_ascii_digit())
                .collect::<String>();
            let significant = digits.trim_start_matches('0').len();
            out.push((tok, significant));
            prev = ' ';
            continue;
        }
        prev = c;
        i += 1;
    }
    out
}

/// Quantities given in engineering units (10f, 5n, 20p) and sizes that are not round in
/// binary come out as they were meant (`1e-14`), never as `1.0000000000000002e-14`.
#[test]
fn json_numbers_carry_no_float_noise() {
    let specs = [
        "name: hub_q16\nwidth: 16\narchitecture: manchester\nblock: 4\nbuffers: {every: 8}\nsizing: {unit_n: 1.1, pn_ratio: 2.3, buffer: 3.3}\ntestbench: {load: 10f, period: 5n, step: 20p}\n",
        "name: hub_q24\nwidth: 24\narchitecture: manchester\nstyle: dynamic\nblock: 4\nbuffers: {every: 4}\nsizing: {keeper: 0.07}\ntestbench: {load: 3.3f, period: 7.7n, step: 0.1n}\n",
        "name: hub_q20\nwidth: 20\narchitecture: carry-select\nblock: sqrt\ntestbench: {load: 0.3p}\n",
        "name: hub_q32\nwidth: 32\narchitecture: kogge-stone\nbuffers: {fanout: 3}\n",
    ];
    for y in specs {
        let (text, _) = summary(y);
        let nums = number_digits(&text);
        assert!(nums.len() > 20, "few numbers found in\n{text}");
        for (tok, digits) in nums {
            assert!(
                digits <= 9,
                "{tok} has {digits} significant digits in the summary of\n{y}"
            );
        }
    }
}

/// Blocks are half-open ranges, said so in the file; the tool version and the spec hash are
/// recorded.
#[test]
fn json_explains_blocks_and_records_version_and_hash() {
    let (_, v) = summary("name: hub_b13\nwidth: 13\narchitecture: manchester\nblock: 4\n");
    let blocks = v["blocks"].as_array().unwrap();
    let ranges: Vec<(u64, u64, u64)> = blocks
        .iter()
        .map(|b| {
            (
                b["lo"].as_u64().unwrap(),
                b["hi"].as_u64().unwrap(),
                b["bits"].as_u64().unwrap(),
            )
        })
        .collect();
    assert_eq!(ranges, vec![(0, 4, 4), (4, 8, 4), (8, 12, 4), (12, 13, 1)]);
    assert!(v["blocks_note"].as_str().unwrap().contains("[lo, hi)"));
    assert_eq!(v["tool_version"], env!("CARGO_PKG_VERSION"));
    let hash = v["spec_hash"].as_str().unwrap();
    assert!(
        hash.len() == 7 + 64
            && hash.starts_with("sha256:")
            && hash[7..].chars().all(|c| c.is_ascii_hexdigit()),
        "{hash}"
    );
    assert!(v["spec_hash_covers"].as_str().unwrap().contains("sizing"));
}

/// The same resolved spec gives the same hash whatever the YAML looks like (block or flow
/// style, comments, key order, defaults written out or not, `10f` or `1e-14`); any changed
/// value gives another hash.
#[test]
fn spec_hash_follows_the_values_not_the_formatting() {
    let hash = |y: &str| carrywright::emit::summary::spec_hash(&parse(y));
    let base = hash("name: hub_h16\nwidth: 16\narchitecture: manchester\nblock: 4\nbuffers: {every: 8}\ntestbench: {load: 10f}\n");
    let same = [
        "# the Wren hub accumulator\narchitecture: manchester   # chain\nwidth: 16\nname: hub_h16\nbuffers:\n  every: 8\nblock: 4\ntestbench:\n  load: 1e-14\n",
        "name: hub_h16\nwidth: 16\narchitecture: manchester\nstyle: static\nblock: 4\nbuffers: {every: 8, inverting: true}\ntechnology: generic\nsizing: {unit_n: 1.0, pn_ratio: 2.5, buffer: 2.0}\ntestbench: {random: 64, seed: 1, load: 0.01p}\n",
        "name: hub_h16\nwidth: 16\narchitecture: manchester\nblock: 4\nbuffers: {at: [8]}\ntestbench: {load: 10f}\n",
    ];
    for y in same {
        assert_eq!(hash(y), base, "{y}");
    }
    let different = [
        "name: hub_h17\nwidth: 16\narchitecture: manchester\nblock: 4\nbuffers: {every: 8}\ntestbench: {load: 10f}\n",
        "name: hub_h16\nwidth: 16\narchitecture: manchester\nblock: 4\nbuffers: {every: 4}\ntestbench: {load: 10f}\n",
        "name: hub_h16\nwidth: 16\narchitecture: manchester\nblock: 4\nbuffers: {every: 8, inverting: false}\ntestbench: {load: 10f}\n",
        "name: hub_h16\nwidth: 16\narchitecture: manchester\nblock: 2\nbuffers: {every: 8}\ntestbench: {load: 10f}\n",
        "name: hub_h16\nwidth: 16\narchitecture: manchester\nblock: 4\nbuffers: {every: 8}\ntestbench: {load: 11f}\n",
        "name: hub_h16\nwidth: 16\narchitecture: manchester\nblock: 4\nbuffers: {every: 8}\ntestbench: {load: 10f, seed: 2}\n",
        "name: hub_h16\nwidth: 16\narchitecture: manchester\nblock: 4\nbuffers: {every: 8}\ntestbench: {load: 10f, random: 65}\n",
        "name: hub_h16\nwidth: 16\narchitecture: manchester\nblock: 4\nbuffers: {every: 8}\nsizing: {unit_n: 1.2}\ntestbench: {load: 10f}\n",
        "name: hub_h16\nwidth: 16\narchitecture: manchester\nstyle: dynamic\nblock: 4\nbuffers: {every: 8}\ntestbench: {load: 10f}\n",
        "name: hub_h16\nwidth: 16\narchitecture: carry-skip\nblock: 4\ntestbench: {load: 10f}\n",
        // The conditions a deck runs at are part of what it is.
        "name: hub_h16\nwidth: 16\narchitecture: manchester\nblock: 4\nbuffers: {every: 8}\ntechnology: gf180mcu-3v3\ntestbench: {load: 10f}\n",
        "name: hub_h16\nwidth: 16\narchitecture: manchester\nblock: 4\nbuffers: {every: 8}\ntechnology: gf180mcu-3v3\nconditions: {corner: ss}\ntestbench: {load: 10f}\n",
        "name: hub_h16\nwidth: 16\narchitecture: manchester\nblock: 4\nbuffers: {every: 8}\ntechnology: gf180mcu-3v3\nconditions: {temp: 85}\ntestbench: {load: 10f}\n",
    ];
    let mut seen = vec![base.clone()];
    for y in different {
        let h = hash(y);
        assert!(!seen.contains(&h), "{y} hashes like another spec");
        seen.push(h);
    }
}

/// A million random vectors is a testbench setting, not a reason to write a quarter of a
/// gigabyte: the Verilog testbench draws them in the simulator, NAME.json lists only the
/// deck's vectors, so the output is the same size as with a few random vectors.
#[test]
fn a_million_random_vectors_do_not_grow_the_output() {
    let yaml = |n: usize| {
        format!("name: hub_r32\nwidth: 32\narchitecture: manchester\nblock: 4\nbuffers: {{every: 8}}\ntestbench: {{random: {n}, seed: 7}}\n")
    };
    let bytes = |fs: &[(String, String)]| fs.iter().map(|(_, t)| t.len()).sum::<usize>();
    let many = files(&yaml(1_000_000));
    let few = files(&yaml(100));
    let (b_many, b_few) = (bytes(&many), bytes(&few));
    assert!(
        b_many < 150_000 && b_many.abs_diff(b_few) < 200,
        "{b_many} bytes with 1000000 random vectors, {b_few} with 100"
    );
    let (_, v) = summary(&yaml(1_000_000));
    // 7 directed, the timing engine's worst pair (static style: before and after), 8 random.
    assert_eq!(v["vectors"].as_array().unwrap().len(), 7 + 2 + 8);
    assert_eq!(v["verilog_testbench"]["random_vectors"], 1_000_000);
    assert_eq!(
        v["verilog_testbench"]["random_drawn_in_testbench"],
        1_000_000 - 8
    );
    assert_eq!(v["spice_deck"]["vectors"], 17);
}
