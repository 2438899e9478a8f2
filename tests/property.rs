//! A seeded loop over many random specs (architecture, width, block, style, buffers, sizing):
//! each is either refused with a clear one-line error or builds a netlist that passes the
//! bit-parallel check against native integer addition. Never a panic.

use carrywright::emit::vectors::Rng;
use carrywright::spec::{self, LoadOptions, ARCHITECTURES};
use std::path::Path;

fn pick<'a>(rng: &mut Rng, xs: &[&'a str]) -> &'a str {
    xs[(rng.next_u64() % xs.len() as u64) as usize]
}

/// A spec that is meant to be valid: keys chosen to suit the architecture.
fn plausible_spec(rng: &mut Rng) -> String {
    let arch = ARCHITECTURES[(rng.next_u64() % ARCHITECTURES.len() as u64) as usize];
    let width = 1 + rng.next_u64() % 72;
    let block = 1 + rng.next_u64() % width.min(8);
    let mut body = format!("name: q\nwidth: {width}\narchitecture: {}\n", arch.as_str());
    if arch.has_dynamic() && rng.next_u64().is_multiple_of(2) {
        body.push_str("style: dynamic\n");
    }
    if arch != carrywright::spec::Architecture::Ripple {
        body.push_str(&format!("block: {block}\n"));
    }
    if arch == carrywright::spec::Architecture::Manchester
        && width > block
        && rng.next_u64().is_multiple_of(2)
    {
        body.push_str(&format!("buffers: {{every: {block}}}\n"));
    }
    if arch.is_prefix() && rng.next_u64().is_multiple_of(2) {
        body.push_str(&format!(
            "buffers: {{fanout: {}}}\n",
            2 + rng.next_u64() % 4
        ));
    }
    body.push_str("testbench: {random: 8}\n");
    body
}

fn random_spec(rng: &mut Rng) -> String {
    if rng.next_u64() % 5 < 3 {
        return plausible_spec(rng);
    }
    let mut archs: Vec<&str> = ARCHITECTURES.iter().map(|a| a.as_str()).collect();
    archs.push("carry-lookahead-tree");
    let arch = pick(rng, &archs);
    let width = match rng.next_u64() % 10 {
        0 => rng.next_u64() % 200,
        1..=3 => 1 + rng.next_u64() % 8,
        _ => 1 + rng.next_u64() % 70,
    };
    let block = match rng.next_u64() % 6 {
        0 => String::new(),
        1 => "block: sqrt\n".into(),
        2 => format!("block: {}\n", rng.next_u64() % 3),
        _ => format!("block: {}\n", 1 + rng.next_u64() % 9),
    };
    let style = pick(rng, &["", "style: static\n", "style: dynamic\n"]);
    let k = 1 + rng.next_u64() % 12;
    let buffers = match rng.next_u64() % 8 {
        0 => String::new(),
        1 => "buffers: none\n".into(),
        2 => format!("buffers: {{every: {k}}}\n"),
        3 => format!("buffers: {{every: {k}, inverting: false}}\n"),
        4 => format!("buffers: {{at: [{}, {}]}}\n", k, 2 * k),
        5 => format!("buffers: {{fanout: {}}}\n", rng.next_u64() % 6),
        6 => "buffers: auto\n".into(),
        _ => format!("buffers: {{at: [{k}]}}\n"),
    };
    let sizing = match rng.next_u64() % 5 {
        0 => format!(
            "sizing: {{keeper: {}}}\n",
            (rng.next_u64() % 5) as f64 * 0.2
        ),
        1 => format!(
            "sizing: {{unit_n: {}, buffer: {}}}\n",
            0.5 + (rng.next_u64() % 4) as f64,
            1 + rng.next_u64() % 4
        ),
        _ => String::new(),
    };
    format!("name: p\nwidth: {width}\narchitecture: {arch}\n{style}{block}{buffers}{sizing}testbench: {{random: 8}}\n")
}

#[test]
fn random_specs_are_refused_cleanly_or_add_correctly() {
    let mut rng = Rng::new(20261201);
    let (mut refused, mut built) = (0, 0);
    for _ in 0..800 {
        let yaml = random_spec(&mut rng);
        let outcome = std::panic::catch_unwind(|| {
            match spec::parse(&yaml, "prop.yaml", Path::new("."), &LoadOptions::default()) {
                Err(e) => Err(e),
                Ok(s) => {
                    let d = carrywright::build(&s)?;
                    let r = carrywright::sim::check(&d, 3, 512, 6)?;
                    assert_eq!(r.mismatches, 0, "{yaml}: {:?}", r.first_mismatch);
                    Ok(())
                }
            }
        });
        match outcome {
            Err(_) => panic!("panic on spec:\n{yaml}"),
            Ok(Err(e)) => {
                let m = e.to_string();
                assert!(
                    !m.contains('\n') && m.len() > 10,
                    "unclear error for\n{yaml}: {m:?}"
                );
                refused += 1;
            }
            Ok(Ok(())) => built += 1,
        }
    }
    eprintln!("{built} specs built and checked, {refused} refused");
    assert!(
        built > 150 && refused > 100,
        "{built} built, {refused} refused: the generator is not exploring"
    );
}
