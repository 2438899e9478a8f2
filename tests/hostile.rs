//! Malformed and hostile specs and technology files, generated from a fixed seed: wrong types,
//! huge and vanishing numbers, deep nesting, control characters, keywords, unicode, alias
//! bombs, tags, duplicate keys, tabs, binary junk, long names, truncation, path tricks in
//! `technology:` and hostile technology files.
//!
//! Each case is either accepted, and then builds a netlist that passes the logic check with
//! outputs free of any injected text, or refused with one line (exit code 2 from the binary)
//! and nothing written. Never a panic. A few thousand cases go through the library (parse,
//! then generate in memory); a few hundred through the binary.

use carrywright::emit::vectors::Rng;
use carrywright::error::Error;
use carrywright::spec::{self, LoadOptions, ARCHITECTURES};
use std::path::Path;
use std::process::Command;

/// Text injected into specs; it is not an identifier, a SPICE word or a number, so it may
/// never reach a generated file.
const MARKER: &str = "~zqx~";
const LIBRARY_CASES: usize = 3000;
const BINARY_CASES: usize = 300;
/// Hostile technology files written beside the specs (`tech_h0.yaml` ...).
const HOSTILE_TECHS: usize = 40;

fn below(rng: &mut Rng, n: usize) -> usize {
    (rng.next_u64() % n as u64) as usize
}

fn pick<T: Copy>(rng: &mut Rng, xs: &[T]) -> T {
    xs[below(rng, xs.len())]
}

/// Values that are wrong in type, size, syntax or intent.
const VALUES: &[&str] = &[
    "[1, 2]",
    "{a: 1}",
    "true",
    "null",
    "~",
    "\"\"",
    "''",
    "-1",
    "0",
    "1e400",
    "-1e400",
    "1e-400",
    "2.5e-324",
    "1e308",
    ".inf",
    "-.inf",
    ".nan",
    "18446744073709551616",
    "-9223372036854775809",
    "99999999999999999999999999999",
    "0x10",
    "0o17",
    "1_000",
    "-0",
    "!!binary aGVsbG8=",
    "!!str 8",
    "!!float 8",
    "!custom 3",
    "!<tag:yaml.org,2002:int> 8",
    "&anchor 4",
    "*nowhere",
    "\"\\0\"",
    "\"\\e[31mred\"",
    "\"a\\nb\"",
    "\"a\\r\\n.control\"",
    "|\n  literal ~zqx~",
    ">\n  folded",
    "\"~zqx~\"",
    "~zqx~",
    "x~zqx~y",
    "\"x\\\"~zqx~\"",
    "1e-14f",
    "1e-300f",
    "10zF",
    "5 n",
    "5nn",
    "\"\\u202e\"",
    "名前",
    "🦀",
    "\u{feff}8",
    "8 # comment ~zqx~",
    "[[[[[[[[",
    "]]]]",
    "{",
    "\"unterminated",
    "'it''s'",
    "@reserved",
    "`backtick`",
    "%directive",
    "- 1",
    "? complex",
    ": colon",
    "=",
    "<<: {width: 8}",
];

/// Keys of a spec, and of its nested mappings.
const TOP_KEYS: &[&str] = &[
    "name",
    "width",
    "architecture",
    "style",
    "block",
    "buffers",
    "technology",
    "sizing",
    "testbench",
    "~zqx~",
    "name ",
    "Name",
];
const NESTED: &[(&str, &[&str])] = &[
    (
        "sizing",
        &["unit_n", "pn_ratio", "keeper", "buffer", "w~zqx~"],
    ),
    (
        "testbench",
        &["random", "seed", "load", "period", "step", "x~zqx~"],
    ),
    ("buffers", &["every", "at", "inverting", "fanout", "~zqx~"]),
];

const NAMES: &[&str] = &[
    "module",
    "a",
    "COUT",
    "vdd",
    "subckt",
    "end",
    "endmodule",
    "tran",
    "_",
    "x y",
    "x;y",
    "ñame",
    "名前",
    "x\u{202e}y",
    "xmc3",
    "c4_n",
    "t8~zqx~",
];

const CONTROLS: &[char] = &[
    '\0', '\x07', '\x08', '\x0b', '\x0c', '\r', '\x1b', '\x7f', '\u{85}', '\u{2028}', '\u{feff}',
    '\t',
];

const TECH_PATHS: &[&str] = &[
    "../tech_ok.yaml",
    "/etc/passwd",
    "/dev/zero.yaml",
    "/dev/zero",
    "sub/",
    "sub/.yaml",
    "\"t.yaml\\0\"",
    "${MODEL_DIR}/x.yaml",
    "~/x.yaml",
    "./././tech_ok.yaml",
    "\"te ch.yaml\"",
    "a\\b.yaml",
    "GENERIC",
    "gf180mcu-3v3",
    "\"tech_ok.yaml\\n.control\"",
    "tech_big.yaml",
    "tech_deep.yaml",
    "tech_ok.yaml",
];

/// A spec meant to be valid, small enough to generate quickly in a debug build.
fn base_spec(rng: &mut Rng) -> String {
    let arch = pick(rng, ARCHITECTURES);
    let width = 1 + below(rng, 12);
    let block = 1 + below(rng, width.min(4));
    let mut s = format!(
        "name: wren_h\nwidth: {width}\narchitecture: {}\n",
        arch.as_str()
    );
    if arch.has_dynamic() && below(rng, 2) == 0 {
        s.push_str("style: dynamic\n");
    }
    if arch != carrywright::spec::Architecture::Ripple {
        s.push_str(&format!("block: {block}\n"));
    }
    if below(rng, 3) == 0 {
        s.push_str("technology: tech_ok.yaml\n");
    }
    if below(rng, 3) == 0 {
        s.push_str("sizing: {unit_n: 1.5, pn_ratio: 2}\n");
    }
    s.push_str("testbench: {random: 4, seed: 7}\n");
    s
}

/// Replace the line of top-level `key` (or add one) with `key: value`.
fn set_key(text: &str, key: &str, value: &str) -> String {
    let mut out: String = text
        .lines()
        .filter(|l| !l.starts_with(&format!("{key}:")))
        .map(|l| format!("{l}\n"))
        .collect();
    out.push_str(&format!("{key}: {value}\n"));
    out
}

/// Apply one hostile change to YAML text. `keys` are the top-level keys to aim at.
fn mutate(rng: &mut Rng, text: &str, keys: &[&str]) -> String {
    let mut chars: Vec<char> = text.chars().collect();
    let at = |rng: &mut Rng, n: usize| below(rng, n + 1);
    match below(rng, 18) {
        0 | 1 => {
            let value = pick(rng, VALUES);
            set_key(text, pick(rng, keys), value)
        }
        2 => {
            let (parent, subs) = pick(rng, NESTED);
            let line = format!("{{{}: {}}}", pick(rng, subs), pick(rng, VALUES));
            set_key(text, parent, &line)
        }
        3 => {
            let k = pick(rng, &[5usize, 31, 32, 33, 200, 20_000]);
            let closed = below(rng, 2) == 0;
            let open = if below(rng, 2) == 0 { "[" } else { "{a: " };
            let close = if open == "[" { "]" } else { "}" };
            let v = format!(
                "{}1{}",
                open.repeat(k),
                if closed {
                    close.repeat(k)
                } else {
                    String::new()
                }
            );
            set_key(text, pick(rng, keys), &v)
        }
        4 => {
            let k = pick(rng, &[3usize, 40, 500]);
            let mut v = String::from("\n");
            for i in 1..k {
                v.push_str(&format!("{}k{i}:\n", " ".repeat(i)));
            }
            set_key(text, pick(rng, keys), &v)
        }
        5 => {
            let c = pick(rng, CONTROLS);
            let i = at(rng, chars.len());
            chars.insert(i, c);
            chars.into_iter().collect()
        }
        6 => set_key(text, "name", pick(rng, NAMES)),
        7 => {
            let n = pick(rng, &[49usize, 64, 10_000]);
            set_key(text, "name", &"w".repeat(n))
        }
        8 => {
            // An alias bomb: each level repeats the one before nine times.
            let mut b = String::from("x0: &a0 [lol, lol, lol, lol, lol, lol, lol, lol, lol]\n");
            let levels = 2 + below(rng, 9);
            for i in 1..levels {
                let refs = vec![format!("*a{}", i - 1); 9].join(", ");
                b.push_str(&format!("x{i}: &a{i} [{refs}]\n"));
            }
            let target = format!("*a{}", levels - 1);
            format!("{b}{}", set_key(text, pick(rng, keys), &target))
        }
        9 => {
            let lines: Vec<&str> = text.lines().collect();
            let l = lines[below(rng, lines.len())];
            format!("{text}{l}\n")
        }
        10 => {
            let lines: Vec<&str> = text.lines().collect();
            let i = below(rng, lines.len());
            lines
                .iter()
                .enumerate()
                .map(|(j, l)| {
                    if j == i {
                        format!("\t{l}\n")
                    } else {
                        format!("{l}\n")
                    }
                })
                .collect()
        }
        11 => {
            for _ in 0..1 + below(rng, 16) {
                let i = at(rng, chars.len());
                chars.insert(i, char::from(rng.next_u64() as u8));
            }
            chars.into_iter().collect()
        }
        12 => {
            chars.truncate(below(rng, chars.len().max(1)));
            chars.into_iter().collect()
        }
        13 => {
            let i = at(rng, chars.len());
            let what = pick(rng, &[MARKER, "# ~zqx~\n", "\n~zqx~: 1\n", "\"~zqx~\""]);
            chars.splice(i..i, what.chars());
            chars.into_iter().collect()
        }
        14 => set_key(text, "technology", pick(rng, TECH_PATHS)),
        15 => {
            let t = format!("tech_h{}.yaml", below(rng, HOSTILE_TECHS));
            set_key(text, "technology", &t)
        }
        16 => match below(rng, 4) {
            0 => format!("---\n{text}---\n{text}"),
            1 => format!("\u{feff}{text}"),
            2 => text.replace('\n', "\r\n"),
            _ => format!("%YAML 1.1\n---\n{text}"),
        },
        _ => {
            let mut lines: Vec<&str> = text.lines().collect();
            let i = below(rng, lines.len());
            if below(rng, 2) == 0 {
                lines.remove(i);
            } else {
                let j = below(rng, lines.len());
                lines.swap(i, j);
            }
            lines.iter().map(|l| format!("{l}\n")).collect()
        }
    }
}

/// One hostile spec: a valid base with one to three changes.
fn hostile_spec(rng: &mut Rng) -> String {
    let mut text = base_spec(rng);
    for _ in 0..1 + below(rng, 3) {
        text = mutate(rng, &text, TOP_KEYS);
    }
    text
}

/// A valid technology file whose models are in `dir`/models.lib (absolute, as the deck needs).
fn tech_ok(dir: &Path) -> String {
    format!(
        "name: wren_tech\nvdd: 3.3\nl_min: 0.35\nw_min: 0.5\nnmos: cw_nch\npmos: cw_pch\nunit_n: 1.0\npn_ratio: 2.5\nstep: 20p\ninclude: [\"{}\"]\n",
        dir.join("models.lib").display()
    )
}
const TECH_KEYS: &[&str] = &[
    "name", "vdd", "l_min", "w_min", "nmos", "pmos", "unit_n", "pn_ratio", "step", "include", "lib",
];

/// A folder holding the model file, a valid technology file and hostile ones.
fn tech_folder() -> tempfile::TempDir {
    let dir = tempfile::tempdir().expect("create a temporary folder");
    let p = dir.path();
    let w = |name: &str, text: &str| {
        std::fs::write(p.join(name), text).unwrap_or_else(|e| panic!("write {name}: {e}"))
    };
    let ok = tech_ok(p);
    w("models.lib", carrywright::tech::GENERIC_MODELS);
    w("tech_ok.yaml", &ok);
    w("tech_big.yaml", &format!("{ok}# {}\n", "x".repeat(1 << 20)));
    w(
        "tech_deep.yaml",
        &format!("{ok}lib: {}\n", "[".repeat(50_000)),
    );
    std::fs::create_dir(p.join("sub")).unwrap();
    let mut rng = Rng::new(0x7EC4);
    let extra: &[&str] = &[
        "include: [\"/dev/zero\"]",
        "include: [\"models.lib\\n.control\"]",
        "include: [\"${MODEL_DIR}/models.lib\"]",
        "include: [\"../../../../../../etc/passwd\"]",
        "include: [\"~zqx~.lib\"]",
        "lib: [{file: models.lib, section: \"tt\\n.endc\"}]",
        "lib: [{file: models.lib, section: ~zqx~}]",
        "nmos: \"cw_nch\\n.control\"",
        "name: module",
    ];
    for i in 0..HOSTILE_TECHS {
        let text = if i < extra.len() {
            let (k, _) = extra[i].split_once(':').unwrap();
            set_key(&ok, k, extra[i].split_once(": ").unwrap().1)
        } else {
            let mut t = ok.clone();
            for _ in 0..1 + below(&mut rng, 2) {
                t = mutate(&mut rng, &t, TECH_KEYS);
            }
            t
        };
        w(&format!("tech_h{i}.yaml"), &text);
    }
    dir
}

/// What happened to one case.
enum Outcome {
    Accepted,
    Refused,
}

/// The library's verdict on one spec text, with every promise checked. `case` describes the
/// input for assertion messages.
fn judge(text: &str, base: &Path, case: &str) -> Outcome {
    let opts = LoadOptions::default();
    let parsed = std::panic::catch_unwind(|| spec::parse(text, "hostile.yaml", base, &opts))
        .unwrap_or_else(|_| panic!("spec::parse panicked on {case}"));
    let spec = match parsed {
        Err(e) => {
            assert!(
                matches!(e, Error::Input(_)),
                "a refused spec is an input error (exit 2): {e:?}\n{case}"
            );
            assert_one_line(e.message(), case);
            return Outcome::Refused;
        }
        Ok(s) => s,
    };
    let generated = std::panic::catch_unwind(|| carrywright::generate(&spec))
        .unwrap_or_else(|_| panic!("generate panicked on {case}"));
    match generated {
        Ok(g) => {
            assert_eq!(g.check.mismatches, 0, "logic check on {case}");
            for (name, body) in &g.files {
                assert!(
                    !body.contains(MARKER) && !name.contains(MARKER),
                    "injected text reached {name}\n{case}"
                );
                if let Some(c) = body.chars().find(|c| c.is_control() && *c != '\n') {
                    panic!("{name} contains the control character {c:?}\n{case}");
                }
            }
            Outcome::Accepted
        }
        Err(e) => {
            // Input errors found while building (device sizes, name clashes), and the ratio
            // rule that long unbuffered dynamic chains fail by design; never a wrong sum.
            assert!(
                !e.message().contains("logic check failed"),
                "a validated spec built a wrong adder: {e}\n{case}"
            );
            assert_one_line(e.message(), case);
            Outcome::Refused
        }
    }
}

fn assert_one_line(msg: &str, case: &str) {
    assert!(!msg.trim().is_empty(), "an empty message\n{case}");
    assert!(
        !msg.contains(['\n', '\r']),
        "the message is not one line: {msg:?}\n{case}"
    );
}

#[test]
fn hostile_specs_through_the_library() {
    let techs = tech_folder();
    let mut rng = Rng::new(0x4057_11E5);
    let (mut accepted, mut refused) = (0, 0);
    for i in 0..LIBRARY_CASES {
        let text = hostile_spec(&mut rng);
        let case = format!("case {i}: {text:?}");
        match judge(&text, techs.path(), &case) {
            Outcome::Accepted => accepted += 1,
            Outcome::Refused => refused += 1,
        }
    }
    println!("{LIBRARY_CASES} hostile specs: {accepted} accepted and checked, {refused} refused");
    // The generator must exercise both sides, or the loop proves nothing.
    assert!(refused > LIBRARY_CASES / 2, "only {refused} refused");
    assert!(accepted > LIBRARY_CASES / 50, "only {accepted} accepted");
}

#[test]
fn hostile_technology_files_through_the_library() {
    let techs = tech_folder();
    let mut refused = 0;
    for i in 0..HOSTILE_TECHS {
        let text =
            format!("name: wren_t\nwidth: 4\narchitecture: ripple\ntechnology: tech_h{i}.yaml\n");
        let body = std::fs::read_to_string(techs.path().join(format!("tech_h{i}.yaml")))
            .unwrap_or_default();
        let case = format!("technology file {i}: {body:?}");
        if let Outcome::Refused = judge(&text, techs.path(), &case) {
            refused += 1;
        }
    }
    for t in ["tech_deep.yaml", "tech_ok.yaml"] {
        let text = format!("name: wren_t\nwidth: 4\narchitecture: ripple\ntechnology: {t}\n");
        let outcome = judge(&text, techs.path(), t);
        assert_eq!(
            matches!(outcome, Outcome::Accepted),
            t == "tech_ok.yaml",
            "{t}"
        );
    }
    assert!(refused > HOSTILE_TECHS / 2, "only {refused} refused");
}

/// Every file under `dir` (relative paths), sorted.
fn listing(dir: &Path) -> Vec<String> {
    let mut out = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            out.push(p.strip_prefix(dir).unwrap().to_string_lossy().into_owned());
            if p.is_dir() {
                stack.push(p);
            }
        }
    }
    out.sort();
    out
}

#[test]
fn hostile_specs_through_the_binary() {
    let techs = tech_folder();
    let dir = techs.path();
    let before = listing(dir);
    let mut rng = Rng::new(0xB1_4A27);
    let (mut accepted, mut refused) = (0, 0);
    for i in 0..BINARY_CASES {
        let mut bytes = hostile_spec(&mut rng).into_bytes();
        if i % 10 == 0 {
            // Raw bytes that are not UTF-8.
            let at = below(&mut rng, bytes.len() + 1);
            bytes.insert(at, 0xC0 | (rng.next_u64() as u8 & 1));
        }
        std::fs::write(dir.join("spec.yaml"), &bytes).unwrap();
        let out = Command::new(env!("CARGO_BIN_EXE_carrywright"))
            .args(["generate", "spec.yaml", "-o", "out"])
            .current_dir(dir)
            .env_remove("CARRYWRIGHT_MODEL_DIR")
            .output()
            .expect("run the binary");
        let stderr = String::from_utf8_lossy(&out.stderr);
        let case = format!(
            "binary case {i}: {:?}\n  exit {:?}\n  stderr: {stderr}",
            String::from_utf8_lossy(&bytes),
            out.status.code()
        );
        match out.status.code() {
            Some(0) => {
                accepted += 1;
                for name in listing(&dir.join("out")) {
                    let body = std::fs::read_to_string(dir.join("out").join(&name)).unwrap();
                    assert!(
                        !body.contains(MARKER),
                        "injected text reached {name}\n{case}"
                    );
                }
                std::fs::remove_dir_all(dir.join("out")).unwrap();
            }
            Some(1 | 2) => {
                refused += 1;
                assert!(stderr.starts_with("error: "), "{case}");
                assert!(
                    stderr.ends_with('\n') && stderr.matches('\n').count() == 1,
                    "one line\n{case}"
                );
                assert!(
                    !stderr.trim_end().chars().any(char::is_control),
                    "control characters are escaped\n{case}"
                );
                // A hostile spec is an input problem (exit 2), never a netlist fault.
                assert_ne!(
                    out.status.code(),
                    Some(1),
                    "exit 1 for a spec\n{case}\n{stderr}"
                );
            }
            other => panic!("exit code {other:?} (a panic is 101)\n{case}"),
        }
        let mut now = listing(dir);
        now.retain(|p| p != "spec.yaml");
        let mut was = before.clone();
        was.retain(|p| p != "spec.yaml");
        assert_eq!(now, was, "nothing written beside the outputs\n{case}");
    }
    println!(
        "{BINARY_CASES} hostile specs through the binary: {accepted} accepted, {refused} refused"
    );
    assert!(refused > BINARY_CASES / 2, "only {refused} refused");
}
