//! Wire capacitance per bit pitch (`parasitics.wire_per_bit`): the SPICE view and the timing
//! engine carry the same wires, measured from the bit columns the builders place cells in.

use carrywright::spec::{self, LoadOptions, Spec};
use carrywright::timing::engine::{timing_of, Graph};
use std::collections::BTreeMap;
use std::path::Path;

fn parse(yaml: &str) -> Spec {
    spec::parse(yaml, "test", Path::new("."), &LoadOptions::default()).unwrap()
}

fn yaml(arch: &str, width: usize, wire: &str) -> String {
    format!("name: w{width}\nwidth: {width}\narchitecture: {arch}\nparasitics: {{wire_per_bit: {wire}}}\ntestbench: {{load: 20f}}\n")
}

/// Every wire capacitor the SPICE view prints, summed per flattened net (the subcircuit's
/// net name prefixed by each instance path that reaches it), against the capacitance the
/// engine adds to the same nodes: equal for every net of every architecture.
#[test]
fn spice_view_and_engine_carry_the_same_wires() {
    for arch in [
        "ripple",
        "manchester",
        "carry-skip",
        "carry-select",
        "kogge-stone",
        "sklansky",
        "lookahead",
    ] {
        let with = parse(&yaml(arch, 16, "0.5f"));
        let without = parse(&yaml(arch, 16, "0"));
        let d = carrywright::build(&with).unwrap();
        let sp = carrywright::emit::spice::subcircuits(&with, &d).unwrap();
        // Wire capacitors by subcircuit: (subckt, net) -> fF.
        let mut by_sub: BTreeMap<(String, String), f64> = BTreeMap::new();
        let mut sub = String::new();
        for line in sp.lines() {
            if let Some(rest) = line.strip_prefix(".subckt ") {
                sub = rest.split_whitespace().next().unwrap().to_string();
            } else if line.starts_with("cw_") {
                let w: Vec<&str> = line.split_whitespace().collect();
                let ff: f64 = w[3].trim_end_matches('f').parse().unwrap();
                by_sub.insert((sub.clone(), w[1].to_string()), ff);
            }
        }
        assert!(!by_sub.is_empty(), "{arch}: no wire capacitors printed");
        // Expand to flattened names through the instance paths of each subcircuit.
        let flat = d.flatten();
        let tm = timing_of(&with).unwrap();
        let g1 = Graph::new(&with, &d, &tm).unwrap();
        let g0 = Graph::new(&without, &carrywright::build(&without).unwrap(), &tm).unwrap();
        let mut printed: BTreeMap<String, f64> = BTreeMap::new();
        for (g, &(m, id)) in flat.owner.iter().enumerate() {
            let module = &d.modules[m];
            if let Some(ff) = by_sub.get(&(module.name.clone(), module.net_name(id).to_string())) {
                printed.insert(flat.names[g].clone(), *ff);
            }
        }
        let mut compared = 0;
        for (x, name) in g1.names.iter().enumerate().take(flat.owner.len()) {
            let added = g1.cap_ff[x] - g0.cap_ff[x];
            let want = printed.get(name).copied().unwrap_or(0.0);
            assert!(
                (added - want).abs() < 1e-6,
                "{arch}: {name}: engine +{added} fF, deck {want} fF"
            );
            compared += usize::from(want > 0.0);
        }
        assert!(compared > 0, "{arch}");
    }
}

/// A chain node between two neighbouring bits is one pitch long. In Kogge-Stone, level l
/// has N − 2^l cells, each reached by a wire of 2^l pitches, so its total wire length grows
/// about as N² (Σ_l (N − 2^l)·2^l); Brent-Kung has N/2^l cells at level l with wires of
/// 2^(l−1) pitches, about (N/2)·log2 N (counted from the graphs' definitions, Kogge & Stone
/// 1973, Brent & Kung 1982; Harris 2003 draws both). With wires the Kogge-Stone worst path
/// grows more.
#[test]
fn wire_lengths_follow_the_structure() {
    let s = parse(&yaml("manchester", 8, "1f"));
    let d = carrywright::build(&s).unwrap();
    let spans = d.wire_spans();
    // Inside a block: the chain node after bit j reaches the next bit's cell: one pitch.
    let block = &d.modules[0];
    let c1 = block
        .nets
        .iter()
        .position(|n| n.name == "c1_n")
        .map(|i| carrywright::netlist::NetId(i as u32));
    assert_eq!(
        c1.and_then(|id| spans.get(&(0, id)).copied()),
        Some(1),
        "{}",
        block.name
    );
    let total = |arch: &str, w: usize| -> u32 {
        let s = parse(&yaml(arch, w, "1f"));
        carrywright::build(&s).unwrap().wire_spans().values().sum()
    };
    let (ks16, ks64) = (total("kogge-stone", 16), total("kogge-stone", 64));
    let (bk16, bk64) = (total("brent-kung", 16), total("brent-kung", 64));
    // 16 -> 64 bits: N² gives 16×, (N/2)·log2 N gives 6× (both plus the PG and sum wires).
    assert!(
        ks64 as f64 / ks16 as f64 > 10.0,
        "Kogge-Stone {ks16} -> {ks64}"
    );
    assert!(
        (bk64 as f64 / bk16 as f64) < 8.0,
        "Brent-Kung {bk16} -> {bk64}"
    );
    assert!(ks64 > 3 * bk64, "Kogge-Stone {ks64}, Brent-Kung {bk64}");
    let worst = |arch: &str, wire: &str| {
        let s = parse(&yaml(arch, 32, wire));
        let d = carrywright::build(&s).unwrap();
        carrywright::timing::search::estimate(&s, &d)
            .unwrap()
            .worst_ps
    };
    let ks = worst("kogge-stone", "1f") / worst("kogge-stone", "0");
    let bk = worst("brent-kung", "1f") / worst("brent-kung", "0");
    assert!(
        ks > bk,
        "with 1 fF per pitch: Kogge-Stone x{ks:.3}, Brent-Kung x{bk:.3}"
    );
}
