//! Each cell's transistor schematic computes its logic function (switch-level evaluation of
//! the SPICE view's devices against the Verilog view's expressions), and the static cells
//! are fully complementary: every input combination drives every output to a level.

use carrywright::cells::{switch, CellKind, Library, Sizes, ALL_KINDS};
use carrywright::spec::Sizing;
use carrywright::tech;

fn library() -> Library {
    let t = tech::builtin("generic", &Default::default()).unwrap();
    let sizing = Sizing {
        unit_n: t.unit_n,
        pn_ratio: t.pn_ratio,
        keeper: 0.1,
        buffer: 2.0,
    };
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
