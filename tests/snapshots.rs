//! Snapshots of the generated views for three small designs. A change to any cell, builder
//! or template shows up here as a reviewable diff (`INSTA_UPDATE=always cargo test --test
//! snapshots` rewrites them after review). The designs are verified elsewhere; these pin the
//! exact text users diff against in their own CI.

use carrywright::spec::{self, LoadOptions};
use std::path::Path;

fn files(yaml: &str) -> Vec<(String, String)> {
    let s = spec::parse(yaml, "snapshot", Path::new("."), &LoadOptions::default()).unwrap();
    carrywright::generate(&s).unwrap().files
}

fn snap(yaml: &str, tag: &str) {
    snap_ending(yaml, tag, &[".v", ".sp"]);
}

fn snap_ending(yaml: &str, tag: &str, endings: &[&str]) {
    for (name, text) in files(yaml) {
        if endings.iter().any(|e| name.ends_with(e)) {
            insta::assert_snapshot!(format!("{tag}__{name}"), text);
        }
    }
}

#[test]
fn manchester_static_4() {
    snap("name: ms4\nwidth: 4\narchitecture: manchester\nstyle: static\nblock: 2\nbuffers: {every: 2}\ntestbench: {random: 2}\n", "ms4");
}

#[test]
fn manchester_dynamic_4() {
    snap("name: md4\nwidth: 4\narchitecture: manchester\nstyle: dynamic\nblock: 2\nbuffers: {every: 2}\ntestbench: {random: 2}\n", "md4");
}

/// More random vectors than the deck takes: the testbench lists the first 8 and draws the
/// rest itself, so its text does not grow with `testbench.random`.
#[test]
fn ripple_4_many_random() {
    snap_ending(
        "name: rr4\nwidth: 4\narchitecture: ripple\ntestbench: {random: 100000, seed: 9}\n",
        "rr4",
        &[".v"],
    );
}

#[test]
fn ripple_4() {
    snap(
        "name: rip4\nwidth: 4\narchitecture: ripple\ntestbench: {random: 2}\n",
        "rip4",
    );
}
