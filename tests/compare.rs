//! Structural comparison of a SPICE netlist with the generated one (src/switch/compare.rs):
//! devices matched by connectivity through partition refinement (Ebeling and Zajicek, ICCAD
//! 1983), so renamed instances and reordered lines still match, and hand edits (a deleted
//! device, a changed width, two swapped nets, a changed channel type) are reported as such.

use carrywright::spec::{self, LoadOptions, Spec};
use carrywright::switch::compare::{compare, Comparison};
use carrywright::switch::parse::{flatten, parse, Flat};
use std::path::Path;
use std::time::Instant;

fn spec_of(yaml: &str) -> Spec {
    spec::parse(yaml, "test", Path::new("."), &LoadOptions::default())
        .unwrap_or_else(|e| panic!("{e}\n{yaml}"))
}

/// The SPICE subcircuit file of a spec, as `generate` writes it.
fn sp_text(s: &Spec) -> String {
    let g = carrywright::generate(s).unwrap_or_else(|e| panic!("{e}"));
    let name = format!("{}.sp", s.name);
    g.files.iter().find(|(n, _)| *n == name).unwrap().1.clone()
}

fn flat(s: &Spec, text: &str) -> Flat {
    let net = parse(text, "t.sp", &s.technology).unwrap_or_else(|e| panic!("{e}\n{text}"));
    flatten(&net, &s.name, "t.sp").unwrap_or_else(|e| panic!("{e}"))
}

/// Logical lines: `+` continuations joined to the line they continue.
fn joined(text: &str) -> Vec<String> {
    let mut out: Vec<String> = vec![];
    for l in text.lines() {
        match l.strip_prefix('+') {
            Some(rest) if !out.is_empty() => {
                let last = out.last_mut().unwrap();
                last.push(' ');
                last.push_str(rest.trim());
            }
            _ => out.push(l.to_string()),
        }
    }
    out
}

fn text(lines: &[String]) -> String {
    lines.join("\n") + "\n"
}

/// Indices of the element lines (after `.subckt`, before `.ends`) of subcircuit `name`.
fn body(lines: &[String], name: &str) -> std::ops::Range<usize> {
    let head = format!(".subckt {name} ");
    let start = lines
        .iter()
        .position(|l| l.starts_with(&head))
        .unwrap_or_else(|| panic!("no subckt {name}"));
    let end = start
        + lines[start..]
            .iter()
            .position(|l| l.starts_with(".ends"))
            .unwrap();
    start + 1..end
}

fn is_element(l: &str) -> bool {
    l.starts_with('m') || l.starts_with('x')
}

/// The line of element `elem` in subcircuit `sub`.
fn find(lines: &[String], sub: &str, elem: &str) -> usize {
    body(lines, sub)
        .find(|&i| lines[i].split_whitespace().next() == Some(elem))
        .unwrap_or_else(|| panic!("no {elem} in {sub}"))
}

/// The 1-based line number of element `elem` of subcircuit `sub` in the file as written.
fn raw_line(text: &str, sub: &str, elem: &str) -> usize {
    let mut inside = false;
    for (i, l) in text.lines().enumerate() {
        if l.starts_with(".subckt ") {
            inside = l.split_whitespace().nth(1) == Some(sub);
        } else if inside && l.split_whitespace().next() == Some(elem) {
            return i + 1;
        }
    }
    panic!("no {elem} in {sub}")
}

fn replace_token(line: &str, from: &str, to: &str) -> String {
    line.split_whitespace()
        .map(|t| if t == from { to } else { t })
        .collect::<Vec<_>>()
        .join(" ")
}

/// Give instance `inst` of subcircuit `parent` its own copy of its master (`MASTER_own`), so
/// an edit of the copy touches that instance only.
fn isolate(lines: &mut Vec<String>, parent: &str, inst: &str) -> String {
    let i = find(lines, parent, inst);
    let master = lines[i].split_whitespace().last().unwrap().to_string();
    let own = format!("{master}_own");
    lines[i] = replace_token(&lines[i], &master, &own);
    let b = body(lines, &master);
    let mut copy = vec![format!(
        ".subckt {own} {}",
        lines[b.start - 1]
            .split_whitespace()
            .skip(2)
            .collect::<Vec<_>>()
            .join(" ")
    )];
    copy.extend(lines[b.clone()].iter().cloned());
    copy.push(format!(".ends {own}"));
    let at = b.end + 1;
    lines.splice(at..at, copy);
    own
}

fn show(what: &str, c: &Comparison, r: &Flat, e: &Flat) {
    eprintln!(
        "{what}: isomorphic {}, {} matched, {} differences",
        c.isomorphic,
        c.matched.len(),
        c.differences()
    );
    for l in c.lines(r, e) {
        eprintln!("  {l}");
    }
}

fn names(f: &Flat, v: &[u32]) -> Vec<String> {
    v.iter()
        .map(|&x| f.devices[x as usize].name.clone())
        .collect()
}

const M8: &str = "name: m8\nwidth: 8\narchitecture: manchester\nstyle: dynamic\nblock: 4\n";
const K16: &str = "name: k16\nwidth: 16\narchitecture: kogge-stone\n";
const S4: &str = "name: s4\nwidth: 4\narchitecture: manchester\nstyle: static\nblock: 4\n";

fn assert_identical(c: &Comparison, r: &Flat, what: &str) {
    assert!(c.isomorphic, "{what}: {:?}", c.lines(r, r));
    assert_eq!(c.differences(), 0, "{what}");
    assert!(c.sizes.is_empty(), "{what}");
    assert_eq!(c.matched.len(), r.devices.len(), "{what}");
}

#[test]
fn a_netlist_matches_itself() {
    for yaml in [M8, K16, S4] {
        let s = spec_of(yaml);
        let t = sp_text(&s);
        let r = flat(&s, &t);
        let c = compare(&r, &r);
        assert_identical(&c, &r, &s.name);
        // Matched by connectivity, which here is also by name.
        for &(a, b) in &c.matched {
            assert_eq!(r.devices[a as usize].name, r.devices[b as usize].name);
        }
    }
}

/// Instance lines of the top reversed and renamed, the device lines of one cell shuffled:
/// still the same circuit.
#[test]
fn reordered_and_renamed_netlists_are_isomorphic() {
    for (yaml, cell) in [(M8, "m8_sum_ik"), (K16, "k16_black"), (S4, "s4_pg_i")] {
        let s = spec_of(yaml);
        let t = sp_text(&s);
        let mut lines = joined(&t);
        rename_top(&mut lines, &s.name);
        let cb = body(&lines, cell);
        let mut dev: Vec<String> = lines[cb.clone()].to_vec();
        // A fixed shuffle: odd lines first, then even ones, each reversed.
        let (odd, even): (Vec<_>, Vec<_>) =
            dev.drain(..).enumerate().partition(|(i, _)| i % 2 == 1);
        let shuffled: Vec<String> = odd
            .into_iter()
            .rev()
            .chain(even.into_iter().rev())
            .map(|(_, l)| l)
            .collect();
        lines.splice(cb, shuffled);
        let edited = text(&lines);
        assert_ne!(edited, t);
        let (r, e) = (flat(&s, &t), flat(&s, &edited));
        let c = compare(&r, &e);
        show(&s.name, &c, &r, &e);
        assert!(c.isomorphic, "{}", s.name);
        assert_eq!(c.differences(), 0);
        assert!(c.sizes.is_empty());
        assert_eq!(c.matched.len(), r.devices.len());
        // Each device is matched to its renamed self.
        for &(a, b) in &c.matched {
            let (na, nb) = (&r.devices[a as usize].name, &e.devices[b as usize].name);
            assert_eq!(
                na.split_once('.').map(|x| x.1),
                nb.split_once('.').map(|x| x.1)
            );
        }
    }
}

#[test]
fn a_deleted_device_is_reported_removed() {
    // m8: a cell used once (the chain start's keeper); k16: a copy of the black cell used by
    // one instance.
    type Case<'a> = (
        &'a str,
        Option<(&'a str, &'a str)>,
        &'a str,
        &'a str,
        &'a str,
    );
    let cases: [Case; 3] = [
        (M8, None, "m8_dstart_k", "mp_keep", "xcin.mp_keep"),
        (K16, Some(("k16", "xb9_6")), "", "mn_gn_b", "xb9_6.mn_gn_b"),
        (
            S4,
            Some(("s4_blk4_i", "xsum2")),
            "",
            "mp_a",
            "xblk0.xsum2.mp_a",
        ),
    ];
    for (yaml, iso, cell, dev, full) in cases {
        let s = spec_of(yaml);
        let t = sp_text(&s);
        let mut lines = joined(&t);
        let cell = match iso {
            Some((parent, inst)) => isolate(&mut lines, parent, inst),
            None => cell.to_string(),
        };
        let i = find(&lines, &cell, dev);
        lines.remove(i);
        let (r, e) = (flat(&s, &t), flat(&s, &text(&lines)));
        assert_eq!(e.devices.len() + 1, r.devices.len());
        let c = compare(&r, &e);
        show(&s.name, &c, &r, &e);
        assert!(!c.isomorphic);
        assert_eq!(names(&r, &c.removed), [full], "{}", s.name);
        assert!(c.added.is_empty() && c.rewired.is_empty() && c.retyped.is_empty());
        assert!(c.sizes.is_empty());
        assert_eq!(c.matched.len(), e.devices.len());
    }
}

#[test]
fn a_changed_width_is_a_size_difference_in_every_instance() {
    for (yaml, cell, dev) in [
        (M8, "m8_mcc_dk", "mn_g"),
        (K16, "k16_grey", "mp_gn_a"),
        (S4, "s4_sum_i", "mn_s"),
    ] {
        let s = spec_of(yaml);
        let t = sp_text(&s);
        let mut lines = joined(&t);
        let i = find(&lines, cell, dev);
        let toks: Vec<String> = lines[i]
            .split_whitespace()
            .map(|tk| {
                if tk.starts_with("w=") {
                    "w=0.5u".to_string()
                } else {
                    tk.to_string()
                }
            })
            .collect();
        lines[i] = toks.join(" ");
        let (r, e) = (flat(&s, &t), flat(&s, &text(&lines)));
        // Every instance of the cell: the reference devices from that line.
        let line = raw_line(&t, cell, dev);
        let n = r.devices.iter().filter(|d| d.line == line).count();
        assert!(n > 1, "{cell} is used {n} times");
        let c = compare(&r, &e);
        eprintln!("{}: {cell}.{dev} in {n} instances", s.name);
        for l in c.lines(&r, &e).iter().take(4) {
            eprintln!("  {l}");
        }
        assert!(c.isomorphic, "{}", s.name);
        assert_eq!(c.differences(), 0);
        assert_eq!(c.sizes.len(), n);
        for d in &c.sizes {
            assert!((d.w_edit - 0.5).abs() < 1e-9);
            assert_eq!(r.devices[d.reference as usize].line, line);
            assert_eq!(d.l_ref, d.l_edit);
        }
        let rows = c.lines(&r, &e);
        assert!(
            rows.iter()
                .any(|l| l.contains(" w ") && l.contains("-> 0.5")),
            "{rows:?}"
        );
    }
}

/// Exchange nets `x` and `y` on the line of `inst` in subcircuit `sub`.
fn swap(lines: &mut [String], sub: &str, inst: &str, x: &str, y: &str) {
    let i = find(lines, sub, inst);
    lines[i] = lines[i]
        .split_whitespace()
        .map(|tk| match tk {
            t if t == x => y,
            t if t == y => x,
            t => t,
        })
        .collect::<Vec<_>>()
        .join(" ");
}

/// Every instance of subcircuit `top` renamed (`xNAME` -> `xqNAME`) and its lines reversed.
fn rename_top(lines: &mut Vec<String>, top: &str) {
    let b = body(lines, top);
    let mut elems: Vec<String> = lines[b.clone()]
        .iter()
        .filter(|l| is_element(l))
        .map(|l| {
            let mut toks: Vec<&str> = l.split_whitespace().collect();
            let renamed = format!("xq{}", &toks[0][1..]);
            toks[0] = &renamed;
            toks.join(" ")
        })
        .collect();
    elems.reverse();
    lines.splice(b, elems);
}

/// The reported rewired devices are devices of `inst` on net `x` or `y`, each rewired from
/// one to the other, and nothing else is reported. (Not necessarily all of them: devices in
/// parallel on the two nets, such as the a and b inputs of a NAND, still match.)
fn check_swap(c: &Comparison, r: &Flat, inst: &str, x: &str, y: &str) {
    assert!(!c.isomorphic);
    let (nx, ny) = (r.net(x).unwrap(), r.net(y).unwrap());
    let on: Vec<u32> = (0..r.devices.len() as u32)
        .filter(|&i| {
            let d = &r.devices[i as usize];
            d.name.starts_with(&format!("{inst}."))
                && [d.g, d.d, d.s].iter().any(|&n| n == nx || n == ny)
        })
        .collect();
    assert!(!c.rewired.is_empty());
    assert_eq!(c.differences(), c.rewired.len(), "only rewired devices");
    // Never a worse explanation than the edit itself (every device of `inst` on x or y).
    assert!(
        c.differences() <= on.len(),
        "{} > {}",
        c.differences(),
        on.len()
    );
    for w in &c.rewired {
        let both = [w.expected_net.as_str(), w.found_net.as_str()];
        assert!(both.iter().all(|n| *n == x || *n == y), "{w:?}");
        if w.expected_as.is_none() {
            // Explained on `inst` itself: its devices, moved from one net to the other.
            assert!(on.contains(&w.reference), "{w:?}");
            assert!(both == [x, y] || both == [y, x], "{w:?}");
        }
    }
}

#[test]
fn swapped_nets_are_rewired_devices() {
    // Two nets of one instance line of the top exchanged.
    let cases = [
        (M8, "xblk1", "a4", "a5", 8),
        (M8, "xblk0", "s1", "s2", 4),
        (M8, "xblk0", "c0_n", "c4_n", 0),
        (K16, "xb9_6", "g7_6", "p7_6", 4),
        (K16, "xpg3", "a3", "b3", 4),
        (K16, "xs5", "p5", "g4_0", 0),
        (S4, "xblk0", "b1", "b2", 20),
    ];
    for (yaml, inst, x, y, n) in cases {
        let s = spec_of(yaml);
        let t = sp_text(&s);
        let mut lines = joined(&t);
        swap(&mut lines, &s.name, inst, x, y);
        let (r, e) = (flat(&s, &t), flat(&s, &text(&lines)));
        let c = compare(&r, &e);
        show(&format!("{} {inst} {x}<->{y}", s.name), &c, &r, &e);
        check_swap(&c, &r, inst, x, y);
        if n > 0 {
            assert_eq!(c.rewired.len(), n);
        }
        // Names are kept, and so is each device's counterpart.
        for w in &c.rewired {
            assert_eq!(
                r.devices[w.reference as usize].name,
                e.devices[w.edited as usize].name
            );
        }
    }
}

/// Renamed and reordered, then edited: the edit is still found, by connectivity alone (no
/// instance of the top keeps its name).
#[test]
fn edits_are_found_in_a_renamed_netlist() {
    let cases: [(&str, &[&str], &str, &str, &str); 3] = [
        (M8, &["xblk1", "xsum2"], "xblk1", "a6", "b6"),
        (K16, &["xb11_4"], "xb9_6", "g7_6", "p7_6"),
        (S4, &["xblk0", "xmc1"], "xblk0", "b1", "b2"),
    ];
    for (yaml, path, inst, x, y) in cases {
        let s = spec_of(yaml);
        let t = sp_text(&s);
        let r = flat(&s, &t);
        // A device deleted in one instance (its own copy of the masters on the way).
        let mut lines = joined(&t);
        let mut parent = s.name.clone();
        for p in path {
            parent = isolate(&mut lines, &parent, p);
        }
        let b = body(&lines, &parent);
        let i = b.start + lines[b].iter().position(|l| l.starts_with('m')).unwrap();
        let dev = lines[i].split_whitespace().next().unwrap().to_string();
        lines.remove(i);
        rename_top(&mut lines, &s.name);
        let e = flat(&s, &text(&lines));
        let c = compare(&r, &e);
        let full = format!("{}.{dev}", path.join("."));
        show(&format!("{} renamed, {full} deleted", s.name), &c, &r, &e);
        assert_eq!(names(&r, &c.removed), [full]);
        assert_eq!(c.differences(), 1);
        // Two nets swapped.
        let mut lines = joined(&t);
        swap(&mut lines, &s.name, inst, x, y);
        rename_top(&mut lines, &s.name);
        let e = flat(&s, &text(&lines));
        let c = compare(&r, &e);
        show(&format!("{} renamed, {inst} {x}<->{y}", s.name), &c, &r, &e);
        check_swap(&c, &r, inst, x, y);
        // A width changed in every instance of a cell.
        let mut lines = joined(&t);
        let cell = lines
            .iter()
            .filter(|l| l.starts_with(".subckt "))
            .map(|l| l.split_whitespace().nth(1).unwrap().to_string())
            .find(|c| lines[body(&lines, c)].iter().all(|l| l.starts_with('m')))
            .unwrap();
        let i = body(&lines, &cell).start;
        let dev = lines[i].split_whitespace().next().unwrap().to_string();
        lines[i] = lines[i]
            .split_whitespace()
            .map(|tk| if tk.starts_with("w=") { "w=9u" } else { tk })
            .collect::<Vec<_>>()
            .join(" ");
        rename_top(&mut lines, &s.name);
        let e = flat(&s, &text(&lines));
        let c = compare(&r, &e);
        let line = raw_line(&t, &cell, &dev);
        assert!(c.isomorphic);
        assert_eq!(
            c.sizes.len(),
            r.devices.iter().filter(|d| d.line == line).count()
        );
    }
}

#[test]
fn a_pmos_made_nmos_is_reported() {
    for (yaml, cell, dev, full) in [
        (M8, "m8_inv", "mp_y", "xcout.mp_y"),
        (S4, "s4_inv", "mp_y", "xcin.mp_y"),
    ] {
        let s = spec_of(yaml);
        let t = sp_text(&s);
        let mut lines = joined(&t);
        if cell == "s4_inv" {
            // s4_inv is used twice: give xcin its own copy.
            let own = isolate(&mut lines, "s4", "xcin");
            let i = find(&lines, &own, dev);
            lines[i] = replace_token(&lines[i], "cw_pch", "cw_nch");
        } else {
            let i = find(&lines, cell, dev);
            lines[i] = replace_token(&lines[i], "cw_pch", "cw_nch");
        }
        let (r, e) = (flat(&s, &t), flat(&s, &text(&lines)));
        let c = compare(&r, &e);
        show(&s.name, &c, &r, &e);
        assert!(!c.isomorphic);
        let reported: Vec<String> = if c.retyped.is_empty() {
            names(&r, &c.removed)
        } else {
            c.retyped
                .iter()
                .map(|&(a, _)| r.devices[a as usize].name.clone())
                .collect()
        };
        assert_eq!(reported, [full]);
        assert!(c.differences() <= 2);
        assert!(c.lines(&r, &e).iter().any(|l| l.contains(full)));
    }
}

#[test]
fn timing_of_a_128_bit_kogge_stone() {
    let s = spec_of("name: k128\nwidth: 128\narchitecture: kogge-stone\n");
    let t = sp_text(&s);
    let r = flat(&s, &t);
    let mut lines = joined(&t);
    let top = body(&lines, "k128");
    lines[top].reverse();
    let e = flat(&s, &text(&lines));
    let t0 = Instant::now();
    let c = compare(&r, &e);
    let iso_ms = t0.elapsed().as_secs_f64() * 1e3;
    assert!(c.isomorphic);
    // A deleted device (a copy of a black cell for one instance) for the other path.
    let inst = lines[body(&lines, "k128")]
        .iter()
        .find(|l| l.contains("k128_black"))
        .map(|l| l.split_whitespace().next().unwrap().to_string())
        .unwrap();
    let own = isolate(&mut lines, "k128", &inst);
    let i = body(&lines, &own).start;
    lines.remove(i);
    let e2 = flat(&s, &text(&lines));
    let t1 = Instant::now();
    let c2 = compare(&r, &e2);
    let diff_ms = t1.elapsed().as_secs_f64() * 1e3;
    eprintln!(
        "k128: {} transistors; isomorphic compare {iso_ms:.1} ms; one device deleted {diff_ms:.1} ms ({} differences)",
        r.devices.len(),
        c2.differences()
    );
    assert_eq!(c2.removed.len(), 1);
}

/// Differences counted by name: devices of equal name compared terminal by terminal (one
/// terminal off: rewired, more: removed and added).
fn name_cost(r: &Flat, e: &Flat) -> usize {
    // Undo rename_top.
    let norm = |s: &str| match s.strip_prefix("xq") {
        Some(t) => format!("x{t}"),
        None => s.to_string(),
    };
    let idx: std::collections::HashMap<String, usize> = e
        .devices
        .iter()
        .enumerate()
        .map(|(i, d)| (norm(&d.name), i))
        .collect();
    let mut cost = 0;
    let mut seen = 0;
    for d in &r.devices {
        let Some(&i) = idx.get(&d.name) else {
            cost += 1;
            continue;
        };
        seen += 1;
        let f = &e.devices[i];
        let n = |fl: &Flat, x: u32| norm(&fl.names[x as usize]);
        let mut off = (n(r, d.g) != n(e, f.g)) as usize + (n(r, d.b) != n(e, f.b)) as usize;
        let st = (n(r, d.d) != n(e, f.d)) as usize + (n(r, d.s) != n(e, f.s)) as usize;
        let cr = (n(r, d.d) != n(e, f.s)) as usize + (n(r, d.s) != n(e, f.d)) as usize;
        off += st.min(cr);
        cost += if off >= 2 { 2 } else { off };
    }
    cost + e.devices.len() - seen
}

/// Random deletions and net swaps over every architecture and style (opt-in: about 2 s in
/// release, long in debug): `cargo test --release --test compare -- --ignored`.
#[test]
#[ignore = "long: random edits over every architecture; run with --ignored"]
fn stress() {
    let mut seed: u64 = 12345;
    let mut rnd = |n: usize| {
        seed = seed
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        ((seed >> 33) as usize) % n
    };
    let mut bad = 0;
    for width in [8usize, 13, 32] {
        for a in carrywright::spec::ARCHITECTURES {
            let arch = a.as_str();
            for style in ["static", "dynamic"] {
                if style == "dynamic" && !a.has_dynamic() {
                    continue;
                }
                let yaml = format!("name: t{width}\nwidth: {width}\narchitecture: {arch}\nstyle: {style}\nblock: 4\n{}",
                    if arch == "manchester" && width > 8 { "buffers: {every: 8}\n" } else { "" });
                let s = spec_of(&yaml);
                let t = sp_text(&s);
                let r = flat(&s, &t);
                let t0 = Instant::now();
                let mut lines = joined(&t);
                rename_top(&mut lines, &s.name);
                let e = flat(&s, &text(&lines));
                let c = compare(&r, &e);
                assert!(c.isomorphic, "{arch} {style} {width}");
                let iso = t0.elapsed().as_secs_f64() * 1e3;
                // Random deletions: a random device of the flat netlist, its whole instance path isolated.
                for _ in 0..6 {
                    let d = &r.devices[rnd(r.devices.len())];
                    let parts: Vec<&str> = d.name.split('.').collect();
                    let mut lines = joined(&t);
                    let mut parent = s.name.clone();
                    for p in &parts[..parts.len() - 1] {
                        parent = isolate(&mut lines, &parent, p);
                    }
                    let i = find(&lines, &parent, parts[parts.len() - 1]);
                    lines.remove(i);
                    if rnd(2) == 0 {
                        rename_top(&mut lines, &s.name);
                    }
                    let e = flat(&s, &text(&lines));
                    let c = compare(&r, &e);
                    if names(&r, &c.removed) != [d.name.clone()] || c.differences() != 1 {
                        bad += 1;
                        show(
                            &format!("{arch} {style} {width}: delete {}", d.name),
                            &c,
                            &r,
                            &e,
                        );
                    }
                }
                // Random swaps of two nets on one instance line of the top.
                for _ in 0..6 {
                    let lines0 = joined(&t);
                    let b = body(&lines0, &s.name);
                    let l = &lines0[b.start + rnd(b.len())];
                    let toks: Vec<&str> = l.split_whitespace().collect();
                    let nets: Vec<&str> = toks[1..toks.len() - 1]
                        .iter()
                        .copied()
                        .filter(|n| *n != "vdd" && *n != "vss")
                        .collect();
                    let (x, y) = (nets[rnd(nets.len())], nets[rnd(nets.len())]);
                    if x == y {
                        continue;
                    }
                    let mut lines = lines0.clone();
                    swap(&mut lines, &s.name, toks[0], x, y);
                    let rn = rnd(2) == 0;
                    if rn {
                        rename_top(&mut lines, &s.name);
                    }
                    let e = flat(&s, &text(&lines));
                    let c = compare(&r, &e);
                    let (nx, ny) = (r.net(x).unwrap(), r.net(y).unwrap());
                    let on: Vec<u32> = (0..r.devices.len() as u32)
                        .filter(|&i| {
                            let d = &r.devices[i as usize];
                            d.name.starts_with(&format!("{}.", toks[0]))
                                && [d.g, d.d, d.s].iter().any(|&n| n == nx || n == ny)
                        })
                        .collect();
                    let (ex, ey) = (e.net(x).unwrap(), e.net(y).unwrap());
                    let ok = c.removed.iter().all(|d| on.contains(d))
                        && c.added.iter().all(|&i| {
                            let d = &e.devices[i as usize];
                            [d.g, d.d, d.s].iter().any(|&n| n == ex || n == ey)
                        })
                        && c.retyped.is_empty()
                        && c.rewired.iter().all(|w| {
                            on.contains(&w.reference)
                                && [x, y].contains(&w.expected_net.as_str())
                                && [x, y].contains(&w.found_net.as_str())
                        });
                    let on = on.len();
                    let by_name = name_cost(&r, &e);
                    let faithful = ok;
                    let ok = c.differences() <= by_name && c.retyped.is_empty();
                    if !faithful && ok {
                        show(&format!("(equal cost, other explanation) {arch} {style} {width}: {} {x}<->{y} renamed {rn}", toks[0]), &c, &r, &e);
                    }
                    if !ok {
                        bad += 1;
                        show(&format!("{arch} {style} {width}: {} {x}<->{y} renamed {rn} ({on} devices on them)", toks[0]), &c, &r, &e);
                    }
                }
                eprintln!(
                    "{arch} {style} {width}: {} devices, iso {iso:.1} ms",
                    r.devices.len()
                );
            }
        }
    }
    assert_eq!(bad, 0);
}
