//! Switch-level proof of the transistor view (src/switch): every architecture and style, the
//! SPICE text `generate` writes parsed back and simulated as switches (Bryant, IEEE Trans.
//! Computers C-33(2), 1984) against a + b + cin.

use carrywright::spec::{self, LoadOptions, Spec};
use carrywright::switch;
use std::path::Path;
use std::time::Instant;

fn parse(yaml: &str) -> Spec {
    spec::parse(yaml, "test", Path::new("."), &LoadOptions::default())
        .unwrap_or_else(|e| panic!("{e}\n{yaml}"))
}

/// The SPICE subcircuit file of a spec, as `generate` writes it.
fn sp_text(s: &Spec) -> (carrywright::netlist::Design, String) {
    let g = carrywright::generate(s).unwrap_or_else(|e| panic!("{e}"));
    let name = format!("{}.sp", s.name);
    let text = g.files.iter().find(|(n, _)| *n == name).unwrap().1.clone();
    (g.design, text)
}

const ARCHS: &[&str] = &[
    "ripple",
    "manchester",
    "carry-skip",
    "carry-select",
    "lookahead",
    "kogge-stone",
    "brent-kung",
    "sklansky",
    "han-carlson",
    "ladner-fischer",
    "knowles",
];

#[test]
fn every_architecture_adds_at_switch_level() {
    for width in [4usize, 8, 13, 32] {
        for arch in ARCHS {
            for style in ["static", "dynamic"] {
                if style == "dynamic" && !["manchester", "carry-skip"].contains(arch) {
                    continue;
                }
                let s = parse(&format!(
                    "name: t{width}\nwidth: {width}\narchitecture: {arch}\nstyle: {style}\nblock: 4\n{}",
                    if *arch == "manchester" && width > 8 { "buffers: {every: 8}\n" } else { "" }
                ));
                let (d, text) = sp_text(&s);
                let t = Instant::now();
                let r = switch::check_text(&text, "t.sp", &d, &s.technology, 1, 2000, 8)
                    .unwrap_or_else(|e| panic!("{arch} {style} {width}: {e}"));
                eprintln!(
                    "{arch:>14} {style:>7} {width:>3}: {} vectors, {} transistors, {} stages, {:.1} ms",
                    r.vectors,
                    r.transistors,
                    r.stages,
                    t.elapsed().as_secs_f64() * 1e3
                );
                assert!(
                    r.passed,
                    "{arch} {style} {width}: {:?}",
                    r.first_failure.map(|f| f.message)
                );
            }
        }
    }
}
