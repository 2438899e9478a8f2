//! Each cell's transistor schematic computes its logic function (switch-level evaluation of
//! the SPICE view's devices against the Verilog view's expressions), and the static cells
//! are fully complementary: every input combination drives every output to a level.

use carrywright::cells::{switch, CellKind, Library, Sizes, ALL_KINDS};
use carrywright::spec::Sizing;
use carrywright::tech;

fn library() -> Library {
    let t = tech::builtin("generic", &Default::default()).unwrap();
    let sizing = Sizing::with_unit(t.unit_n, t.pn_ratio);
    Library::new(Sizes::new(&t, &sizing))
}

#[test]
fn every_cell_schematic_matches_its_logic() {
    let lib = library();
    for &k in ALL_KINDS {
        let cell = lib.cell(k);
        let n = switch::verify(&cell).unwrap_or_else(|e| panic!("{k:?}: {e}"));
        assert!(n > 0, "{k:?}: no input combination was checked");
    }
}

#[test]
fn transistor_counts_match_the_published_forms() {
    let lib = library();
    // Mirror full adder: 28 transistors, 24 in the core plus two output inverters
    // (Weste & Harris, CMOS VLSI Design, 4th ed., §11.2; from memory).
    assert_eq!(lib.cell(CellKind::FullAdder).devices.len(), 28);
    // Static Manchester carry cell: generate device, kill device and a propagate
    // transmission gate, four transistors a bit (common practice).
    assert_eq!(lib.cell(CellKind::ChainInverted).devices.len(), 4);
    assert_eq!(lib.cell(CellKind::ChainTrue).devices.len(), 4);
    // Dynamic carry cell: precharge PMOS, generate NMOS, evaluate footer, pass NMOS
    // (Rabaey et al., Digital Integrated Circuits, 2nd ed., ch. 11; from memory).
    assert_eq!(lib.cell(CellKind::ChainDynamic).devices.len(), 4);
}

#[test]
fn a_miswired_schematic_is_caught() {
    // The switch-level check must be able to fail: swap the generate and kill devices'
    // gates of the static carry cell and it no longer computes the carry.
    let lib = library();
    let mut cell = lib.cell(CellKind::ChainInverted);
    for d in &mut cell.devices {
        if d.name == "mn_g" {
            d.g = "kn".into();
        }
    }
    assert!(switch::verify(&cell).is_err());
}

/// Each role multiplier scales its role's devices and nothing else: `pass` the carry-path
/// pass devices, `output` the sum's output inverter, `carry` a prefix cell as a whole.
#[test]
fn role_multipliers_scale_their_devices_only() {
    let t = tech::builtin("generic", &Default::default()).unwrap();
    let base = Sizing::with_unit(t.unit_n, t.pn_ratio);
    let widths = |s: &Sizing, k: CellKind| -> Vec<(String, f64)> {
        Library::new(Sizes::new(&t, s))
            .cell(k)
            .devices
            .iter()
            .map(|d| (d.name.clone(), d.w))
            .collect()
    };
    type Case = (&'static str, fn(&mut Sizing), CellKind, fn(&str) -> bool);
    let cases: [Case; 3] = [
        (
            "pass",
            |s| s.pass = 2.0,
            CellKind::ChainDynamic,
            |n| n == "mn_p",
        ),
        (
            "output",
            |s| s.output = 2.0,
            CellKind::SumInverted,
            |n| n.ends_with("_s"),
        ),
        ("carry", |s| s.carry = 2.0, CellKind::Grey, |_| true),
    ];
    for (name, set, kind, scaled) in cases {
        let mut s = base.clone();
        set(&mut s);
        let (w0, w1) = (widths(&base, kind), widths(&s, kind));
        let mut changed = 0;
        for ((n, a), (_, b)) in w0.iter().zip(&w1) {
            let want = if scaled(n) { 2.0 * a } else { *a };
            assert!((b - want).abs() < 1e-3, "{name}: {n} {a} -> {b}");
            changed += usize::from(scaled(n));
        }
        assert!(changed > 0, "{name}: no device scaled");
    }
}
