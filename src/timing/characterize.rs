//! `carrywright characterize`: measure a technology's own devices in ngspice and fit the
//! timing parameters of [`super::Timing`].
//!
//! One netlist holds every characterisation circuit side by side (so the models are read
//! once: SKY130's library alone costs about 5 s of CPU to load) and one transient runs them
//! all on one thread. Devices are written by [`Technology::device_line`], the same code the
//! SPICE view uses, so prefixes and size units are shared.
//!
//! Method (each choice is also written into the output file's comments):
//! - Switching resistance: a gate of k equal devices in series (k = 1, 2, 3; all gates driven
//!   together by a ramp of the technology's input slew) with one opposite device to set the
//!   starting level, loaded by C = 4, 8, 16, 32 fF. Delay (input 50 % to output 50 %) is fitted
//!   by least squares to d = 0.69·R·C + d0 (Elmore; the 0.69 = ln 2 step-response factor,
//!   Rabaey, Chandrakasan & Nikolić, §6.2.3): R = slope / 0.69. The device's own and internal
//!   node capacitances go into d0, so R is the effective resistance of the stack. Reported as
//!   R × W (kΩ·µm).
//! - Pass NMOS (gate at VDD) and transmission gate: an ideal source ramps one side, the
//!   other side drives the swept load; the same fit.
//! - Capacitances by charge: a source ramps the terminal 0 to VDD (VDD to 0 for PMOS) with the
//!   other terminals at their rail; C = |∫ i dt| / VDD / W over 8 unit devices. The drain
//!   twice when the technology has a diffusion extension: a contacted end, and half of the
//!   diffusion two gates in series share.
//! - Diffusion geometry: every device line carries the extension's areas and perimeters,
//!   each end contacted or shared by [`crate::cells::diffusion_ends`], the rule the cells'
//!   SPICE view uses (a stack's inner nodes are shared).
//! - Logical effort (Sutherland, Sproull & Harris 1999): for h = 1, 2, 3, 4, 6, 8 a chain of
//!   inverters in which each drives h copies of itself; the third stage's mean of rise and
//!   fall delay is fitted to d = τ·h + τ·p_inv. FO4 is that delay at h = 4 (measured, not
//!   the fit); τ·(4 + p_inv) against it shows how straight the line is.

use super::{At, Timing};
use crate::cells::Mos;
use crate::error::{Error, Result};
use crate::spec::{printable, trim_num};
use crate::tech::{End, Models, Technology};
use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::path::Path;

/// Load capacitances swept for the resistance fits, fF.
pub const LOADS_FF: [f64; 4] = [4.0, 8.0, 16.0, 32.0];
/// Electrical fan-outs swept for τ and p_inv.
pub const FANOUTS: [f64; 6] = [1.0, 2.0, 3.0, 4.0, 6.0, 8.0];
/// Transmission-gate ladder lengths for the ladder resistance fit.
pub const LADDERS: [usize; 2] = [4, 8];
/// Input ramps (0–100 %, ps) and loads (fF) of the slow-input sweep: an inverter of the
/// characterised widths driven by an ideal ramp (up at the first edge, down at the second).
pub const RAMPS_PS: [f64; 6] = [50.0, 100.0, 200.0, 400.0, 800.0, 1600.0];
pub const RAMP_LOADS_FF: [f64; 3] = [4.0, 8.0, 32.0];
/// The skewed inverter of the slow-input sweep: its PMOS this many times the characterised
/// width.
pub const SKEW_P: f64 = 3.0;
/// Unit devices in parallel for the charge measurements.
pub const CHARGE_DEVICES: usize = 8;
/// Elmore's step-response factor ln 2 (Rabaey et al. §6.2.3).
pub const LN2: f64 = 0.69;

/// Times of the two input edges and the end of the run, seconds, at span 1.
/// Every delay but the logical-effort chains' rising one is measured at the first edge; the
/// slowest circuit (a 3-PMOS stack into 32 fF) settles within about 0.5 ns at typical. At a
/// low supply and a cold slow corner it may not settle before the second edge (SKY130 ss at
/// 1.62 V and -40 degC): the run is then repeated with every time `SPANS` times as late.
const T0: f64 = 0.2e-9;
const T1: f64 = 2.2e-9;
const TSTOP: f64 = 4.4e-9;
/// The time scales tried in turn until every measurement completes.
const SPANS: [f64; 3] = [1.0, 2.0, 4.0];

/// What a characterisation run produced.
pub struct Characterized {
    pub timing: Timing,
    /// The technology YAML file (comments, conditions, timing).
    pub yaml: String,
    /// CPU time of the ngspice run, seconds (user + system, measured as this process's
    /// children's time).
    pub ngspice_cpu_s: Option<f64>,
    /// Fits: name -> (slope-derived value, intercept ps, worst residual ps).
    pub fits: BTreeMap<String, Fit>,
}

/// A least-squares line.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Fit {
    pub slope: f64,
    pub intercept: f64,
    /// Largest |residual|, same unit as y.
    pub worst: f64,
}

/// Least squares y = slope·x + intercept.
pub fn fit_line(x: &[f64], y: &[f64]) -> Fit {
    let n = x.len() as f64;
    let mx = x.iter().sum::<f64>() / n;
    let my = y.iter().sum::<f64>() / n;
    let sxy: f64 = x.iter().zip(y).map(|(a, b)| (a - mx) * (b - my)).sum();
    let sxx: f64 = x.iter().map(|a| (a - mx) * (a - mx)).sum();
    let slope = sxy / sxx;
    let intercept = my - slope * mx;
    let worst = x
        .iter()
        .zip(y)
        .map(|(a, b)| (b - slope * a - intercept).abs())
        .fold(0.0, f64::max);
    Fit {
        slope,
        intercept,
        worst,
    }
}

/// One device of the characterisation netlist; `ends` forces its diffusion ends (the
/// shared-drain charge circuits), else [`crate::cells::diffusion_ends`] decides.
struct BenchDev {
    name: String,
    d: String,
    g: String,
    s: String,
    pmos: bool,
    w: f64,
    ends: Option<[End; 2]>,
}

/// The characterisation netlist and the names of the measurements it prints.
struct Bench {
    lines: Vec<String>,
    devs: Vec<BenchDev>,
    meas: Vec<String>,
    w_n: f64,
    w_p: f64,
    /// Every edge and window time is this many times [`T0`], [`T1`], [`TSTOP`].
    span: f64,
}

impl Bench {
    fn dev(&mut self, name: &str, d: &str, g: &str, s: &str, pmos: bool, w: f64) {
        self.dev_ends(name, d, g, s, pmos, w, None);
    }
    #[allow(clippy::too_many_arguments)]
    fn dev_ends(
        &mut self,
        name: &str,
        d: &str,
        g: &str,
        s: &str,
        pmos: bool,
        w: f64,
        ends: Option<[End; 2]>,
    ) {
        self.devs.push(BenchDev {
            name: format!("{}_{name}", if pmos { "mp" } else { "mn" }),
            d: d.into(),
            g: g.into(),
            s: s.into(),
            pmos,
            w,
            ends,
        });
    }
    /// The device lines, each channel end contacted or shared by the rule the cells' SPICE
    /// view uses (a stack's inner nodes are shared), nodes with a source or a load outside.
    fn device_lines(&self, t: &Technology) -> Vec<String> {
        let mut outside: std::collections::BTreeSet<&str> = ["vdd", "vss", "0"].into();
        for l in &self.lines {
            if l.starts_with('v') || l.starts_with('c') {
                outside.extend(l.split_whitespace().skip(1).take(2));
            }
        }
        let list: Vec<(Mos, &str, &str, &str)> = self
            .devs
            .iter()
            .map(|d| {
                let mos = if d.pmos { Mos::P } else { Mos::N };
                (mos, d.d.as_str(), d.g.as_str(), d.s.as_str())
            })
            .collect();
        let ends = crate::cells::diffusion_ends(&list, &|n| outside.contains(n));
        self.devs
            .iter()
            .zip(ends)
            .map(|(d, e)| {
                let b = if d.pmos { "vdd" } else { "vss" };
                let e = d.ends.unwrap_or(e);
                t.device_line(&d.name, &d.d, &d.g, &d.s, b, d.pmos, d.w, t.l_min, e)
            })
            .collect()
    }
    fn inv(&mut self, name: &str, a: &str, y: &str) {
        let (wn, wp) = (self.w_n, self.w_p);
        self.dev(name, y, a, "vss", false, wn);
        self.dev(name, y, a, "vdd", true, wp);
    }
    /// A stack of k equal devices from `out` to its rail, every gate on the input (`in` for
    /// NMOS, `inb` for PMOS), one opposite device setting the starting level, a load of
    /// `c_ff`, and the measurement of the edge the stack drives.
    fn stack(&mut self, t: &Technology, out: &str, pmos: bool, k: usize, c_ff: f64) {
        let (input, rail, other_rail, w, w_other) = if pmos {
            ("inb", "vdd", "vss", self.w_p, self.w_n)
        } else {
            ("in", "vss", "vdd", self.w_n, self.w_p)
        };
        self.dev(
            &format!("{out}_start"),
            out,
            input,
            other_rail,
            !pmos,
            w_other,
        );
        let node = |j: usize| {
            if j == 0 {
                out.to_string()
            } else if j == k {
                rail.to_string()
            } else {
                format!("{out}_x{j}")
            }
        };
        for j in 0..k {
            self.dev(
                &format!("{out}_{j}"),
                &node(j),
                input,
                &node(j + 1),
                pmos,
                w,
            );
        }
        self.lines
            .push(format!("c{out} {out} 0 {}f", trim_num(c_ff)));
        let (from_edge, to_edge) = if pmos {
            ("fall", "rise")
        } else {
            ("rise", "fall")
        };
        self.delay(&format!("t_{out}"), input, from_edge, out, to_edge, t.vdd);
    }

    /// `meas` of a delay from `from` (rise or fall) to `to`, both at 50 % VDD.
    #[allow(clippy::too_many_arguments)]
    fn delay(
        &mut self,
        name: &str,
        from: &str,
        from_edge: &str,
        to: &str,
        to_edge: &str,
        vdd: f64,
    ) {
        let h = trim_num(vdd / 2.0);
        self.meas.push(format!(
            "meas tran {name} trig v({from}) val={h} {from_edge}=1 targ v({to}) val={h} {to_edge}=1"
        ));
        self.meas.push(name.to_string());
    }
}

fn pwl(vdd: f64, rising_first: bool, slew: f64, span: f64) -> String {
    let (lo, hi) = if rising_first {
        ("0".to_string(), trim_num(vdd))
    } else {
        (trim_num(vdd), "0".to_string())
    };
    let p = |x: f64| format!("{:.4e}", x);
    format!(
        "pwl(0 {lo} {} {lo} {} {hi} {} {hi} {} {lo})",
        p(span * T0),
        p(span * T0 + slew),
        p(span * T1),
        p(span * T1 + slew)
    )
}

/// Build the netlist of every characterisation circuit for `t`.
fn bench(t: &Technology, model_lines: &[String], span: f64) -> Bench {
    let vdd = t.vdd;
    let w_n = t.unit_n;
    let w_p = (t.unit_n * t.pn_ratio * 1000.0).round() / 1000.0;
    let mut b = Bench {
        lines: vec![format!("* carrywright characterisation of {}", t.name)],
        devs: vec![],
        meas: vec![],
        w_n,
        w_p,
        span,
    };
    b.lines.extend(model_lines.iter().cloned());
    b.lines.push(format!("vvdd vdd 0 {}", trim_num(vdd)));
    b.lines.push("vvss vss 0 0".into());
    b.lines
        .push(format!("vin in 0 {}", pwl(vdd, true, t.slew, span)));
    b.lines
        .push(format!("vinb inb 0 {}", pwl(vdd, false, t.slew, span)));
    // Stacks: k series devices, all gates on the input, one opposite device for the start.
    for k in 1..=3usize {
        for (li, c) in LOADS_FF.iter().enumerate() {
            // NMOS pull-down: output falling when `in` rises; PMOS pull-up: rising when
            // `inb` falls.
            b.stack(t, &format!("nd{k}_{li}"), false, k, *c);
            b.stack(t, &format!("pu{k}_{li}"), true, k, *c);
        }
    }
    // Pass NMOS and transmission gate between a driven node and the load: passing a 0 from
    // an output at VDD (the side driven by `inb`, which falls) and a 1 from an output at 0
    // (driven by `in`, which rises), each from its own circuit so it starts at the rail.
    for (li, c) in LOADS_FF.iter().enumerate() {
        for kind in ["pn", "tg"] {
            for (edge, src) in [("f", "inb"), ("r", "in")] {
                let out = format!("{kind}{edge}_{li}");
                b.dev(&out, &out, "vdd", src, false, w_n);
                if kind == "tg" {
                    b.dev(&out, &out, "vss", src, true, w_p);
                }
                b.lines.push(format!("c{out} {out} 0 {}f", trim_num(*c)));
                let e = if edge == "f" { "fall" } else { "rise" };
                b.delay(&format!("t_{out}"), src, e, &out, e, vdd);
            }
        }
    }
    // Transmission-gate ladders: an inverter (the characterised widths) driving N gates in
    // series, every ladder node read by an inverter, for the ladder resistance fit.
    for n in LADDERS {
        for (edge, input) in [("f", "in"), ("r", "inb")] {
            let node = |j: usize| format!("lad{n}{edge}_{j}");
            b.inv(&format!("lad{n}{edge}_drv"), input, &node(0));
            for j in 1..=n {
                let tg = format!("lad{n}{edge}_tg{j}");
                b.dev(&tg, &node(j - 1), "vdd", &node(j), false, w_n);
                b.dev(&tg, &node(j - 1), "vss", &node(j), true, w_p);
                b.inv(
                    &format!("lad{n}{edge}_rd{j}"),
                    &node(j),
                    &format!("{}_y", node(j)),
                );
            }
            let (ie, oe) = if edge == "f" {
                ("rise", "fall")
            } else {
                ("fall", "rise")
            };
            for j in 1..=n {
                b.delay(&format!("t_{}", node(j)), input, ie, &node(j), oe, vdd);
            }
        }
    }
    // Pass-NMOS ladders as a dynamic chain has them: an inverter pulls node 0 down into N
    // pass devices (gates at VDD); every node is precharged to VDD by a PMOS that the same
    // rising input turns off, and read by an inverter.
    for n in LADDERS {
        let node = |j: usize| format!("plad{n}_{j}");
        b.inv(&format!("plad{n}_drv"), "in", &node(0));
        let w_n = b.w_n;
        for j in 1..=n {
            b.dev(
                &format!("plad{n}_p{j}"),
                &node(j - 1),
                "vdd",
                &node(j),
                false,
                w_n,
            );
            b.dev(&format!("plad{n}_pre{j}"), &node(j), "in", "vdd", true, w_n);
            b.inv(
                &format!("plad{n}_rd{j}"),
                &node(j),
                &format!("{}_y", node(j)),
            );
        }
        for j in 1..=n {
            b.delay(
                &format!("t_{}", node(j)),
                "in",
                "rise",
                &node(j),
                "fall",
                vdd,
            );
        }
    }
    // Slow inputs: an inverter into each load, driven by ramps from fast to slower than any
    // stage of an adder gives; delay and output transition (10–90 %) of both edges.
    for (ri, ramp) in RAMPS_PS.iter().enumerate() {
        let src = format!("ramp{ri}");
        b.lines.push(format!(
            "v{src} {src} 0 {}",
            pwl(vdd, true, ramp * 1e-12, span)
        ));
        for (li, c) in RAMP_LOADS_FF.iter().enumerate() {
            let out = format!("rmp{ri}_{li}");
            b.inv(&out, &src, &out);
            b.lines.push(format!("c{out} {out} 0 {}f", trim_num(*c)));
            b.delay(&format!("t_{out}_f"), &src, "rise", &out, "fall", vdd);
            b.delay(&format!("t_{out}_r"), &src, "fall", &out, "rise", vdd);
            for (e, edge) in [("f", "fall"), ("r", "rise")] {
                let (a, z) = if e == "f" { (0.9, 0.1) } else { (0.1, 0.9) };
                let name = format!("s_{out}_{e}");
                b.meas.push(format!(
                    "meas tran {name} trig v({out}) val={} {edge}=1 targ v({out}) val={} {edge}=1",
                    trim_num(a * vdd),
                    trim_num(z * vdd)
                ));
                b.meas.push(name);
            }
        }
    }
    // Switching thresholds: an inverter with its input tied to its output settles at its
    // switching threshold VM (common practice), the characterised one and one whose PMOS is
    // SKEW_P times as wide (skewed to switch early on a falling input, as a domino stage's
    // reader is).
    for (name, wp) in [("vm0", b.w_p), ("vmk", SKEW_P * b.w_p)] {
        let node = format!("{name}_x");
        let w_n = b.w_n;
        b.dev(name, &node, &node, "vss", false, w_n);
        b.dev(name, &node, &node, "vdd", true, wp);
        b.meas.push(format!(
            "meas tran {name} find v({node}) at={:.4e}",
            b.span * (T1 - 0.2e-9)
        ));
        b.meas.push(name.to_string());
    }
    // Charge: gate (N from 0 up, P from VDD down) and drain of an off device, the drain a
    // contacted end (an isolated device) and, with a diffusion extension, half of a shared
    // one (the inner node of a series pair).
    // The gate again with drain and source at the other rail (bulk at its own): the channel
    // of a pass device whose ends sit high (NMOS) or low (PMOS) never forms.
    let mut sources = vec![
        ("qgn", "in", false, None, "vss"),
        ("qgp", "inb", true, None, "vdd"),
        ("qgnh", "in", false, None, "vdd"),
        ("qgpl", "inb", true, None, "vss"),
        ("qdn", "in", false, Some(End::Contacted), "vss"),
        ("qdp", "inb", true, Some(End::Contacted), "vdd"),
    ];
    if t.device.diffusion.is_some() {
        sources.push(("qsn", "in", false, Some(End::Shared), "vss"));
        sources.push(("qsp", "inb", true, Some(End::Shared), "vdd"));
    }
    for (q, shape, pmos, drain, rail) in sources {
        let node = format!("{q}_node");
        b.lines.push(format!(
            "v{q} {node} 0 {}",
            pwl(vdd, shape == "in", t.slew, span)
        ));
        for j in 0..CHARGE_DEVICES {
            let w = w_n;
            match drain {
                None => b.dev(&format!("{q}{j}"), rail, &node, rail, pmos, w),
                Some(end) => b.dev_ends(
                    &format!("{q}{j}"),
                    &node,
                    rail,
                    rail,
                    pmos,
                    w,
                    Some([end, End::Contacted]),
                ),
            }
        }
        b.meas.push(format!(
            "meas tran {q} integ i(v{q}) from={:.4e} to={:.4e}",
            b.span * (T0 - 0.05e-9),
            b.span * (T1 - 0.2e-9)
        ));
        b.meas.push(q.to_string());
    }
    // Off-state leakage: CHARGE_DEVICES NMOS of W_n in parallel, gate and source at 0, drain
    // at VDD through a source the current is read from.
    b.lines.push(format!("vlk lk_d 0 {}", trim_num(vdd)));
    b.dev(
        "lk",
        "lk_d",
        "vss",
        "vss",
        false,
        b.w_n * CHARGE_DEVICES as f64,
    );
    b.meas.push(format!(
        "meas tran ilk avg i(vlk) from={:.4e} to={:.4e}",
        b.span * (T0 - 0.05e-9),
        b.span * (T1 - 0.2e-9)
    ));
    b.meas.push("ilk".to_string());
    // Logical effort: for each fan-out h a chain of inverters in which every stage drives
    // the next and h - 1 copies of it, so each timed stage sees the input edge of a stage
    // like itself; the third stage is timed. h = 4 is the FO4 chain.
    for (hi, h) in FANOUTS.iter().enumerate() {
        let mut prev = "in".to_string();
        for st in 1..=5 {
            let next = format!("le{hi}_{st}");
            b.inv(&format!("le{hi}_{st}"), &prev, &next);
            if st > 1 {
                for j in 1..(*h as usize) {
                    b.inv(
                        &format!("le{hi}_{st}_ld{j}"),
                        &prev,
                        &format!("le{hi}_{st}_z{j}"),
                    );
                }
            }
            prev = next;
        }
        // in rises -> stage 1 falls -> stage 2 rises -> stage 3 falls.
        let (a, y) = (format!("le{hi}_2"), format!("le{hi}_3"));
        b.delay(&format!("lf_{hi}"), &a, "rise", &y, "fall", vdd);
        b.delay(&format!("lr_{hi}"), &a, "fall", &y, "rise", vdd);
    }
    b
}

/// The deck ngspice runs (a plain netlist with a control block).
fn deck_text(t: &Technology, b: &Bench) -> String {
    let mut s = String::new();
    for l in b.lines.iter().chain(&b.device_lines(t)) {
        let _ = writeln!(s, "{l}");
    }
    let _ = writeln!(s, ".temp {}", trim_num(t.temp));
    let _ = writeln!(s, ".options noinit");
    let _ = writeln!(s, ".control");
    let _ = writeln!(s, "set num_threads=1");
    let _ = writeln!(s, "save all");
    let _ = writeln!(s, "tran 1p {:.4e} 0 2p", b.span * TSTOP);
    for pair in b.meas.chunks(2) {
        let (cmd, name) = (&pair[0], &pair[1]);
        let _ = writeln!(s, "let {name} = -1e9");
        let _ = writeln!(s, "{cmd}");
        let _ = writeln!(s, "echo \"cw_meas {name} $&{name}\"");
    }
    let _ = writeln!(s, "quit 0");
    let _ = writeln!(s, ".endc");
    let _ = writeln!(s, ".end");
    s
}

/// Model lines with the model folder written out (this netlist is private to the run).
fn local_model_lines(t: &Technology) -> Result<Vec<String>> {
    let lines = t.models.deck_lines();
    if let Models::Files { .. } = &t.models {
        if t.models.need_model_dir() {
            let Some(root) = &t.model_root else {
                return Err(Error::Input(t.models_missing.clone().unwrap_or_else(
                    || format!("technology `{}`: model folder not found", t.name),
                )));
            };
            let root = root.to_string_lossy().to_string();
            let var = format!("${}", crate::tech::DECK_MODEL_VAR);
            return Ok(lines.into_iter().map(|l| l.replace(&var, &root)).collect());
        }
    }
    Ok(lines)
}

/// CPU seconds (user + system) of this process's finished and waited-for children, from
/// `/proc/self/stat` (Linux; None elsewhere). Clock ticks are taken as 100 a second, the
/// Linux default.
fn children_cpu() -> Option<f64> {
    let stat = std::fs::read_to_string("/proc/self/stat").ok()?;
    // Fields after the command name in parentheses; cutime and cstime are fields 16 and 17.
    let rest = &stat[stat.rfind(')')? + 2..];
    let f: Vec<&str> = rest.split_whitespace().collect();
    let cutime: f64 = f.get(13)?.parse().ok()?;
    let cstime: f64 = f.get(14)?.parse().ok()?;
    Some((cutime + cstime) / 100.0)
}

/// Run ngspice on the characterisation netlist of `t` and fit.
pub fn characterize(t: &Technology) -> Result<Characterized> {
    let models = local_model_lines(t)?;
    let mut cpu_total = 0.0;
    for (k, &span) in SPANS.iter().enumerate() {
        let b = bench(t, &models, span);
        let run = run_bench(t, &b)?;
        cpu_total += run.cpu_s.unwrap_or(0.0);
        let complete = b.meas.chunks(2).all(|m| run.value(&m[1]).is_some());
        if !complete && k + 1 < SPANS.len() {
            continue;
        }
        let need = |name: &str| -> Result<f64> {
            run.value(name).ok_or_else(|| {
                Error::Check(format!(
                    "characterize {}: measurement {name} failed in ngspice (exit {:?}): {}",
                    t.name,
                    run.code,
                    printable(run.first_error())
                ))
            })
        };
        return fit_all(t, &b, &need, run.cpu_s.map(|_| cpu_total));
    }
    unreachable!("the last span returns")
}

/// What one ngspice run of the bench printed.
struct BenchRun {
    /// The measurements by name (-1e9 where ngspice could not take one).
    got: BTreeMap<String, f64>,
    stdout: String,
    stderr: String,
    code: Option<i32>,
    cpu_s: Option<f64>,
}

impl BenchRun {
    /// A measurement ngspice took.
    fn value(&self, name: &str) -> Option<f64> {
        self.got.get(name).copied().filter(|v| *v > -1e8)
    }

    /// ngspice's first line naming an error, for the message of a failed measurement.
    fn first_error(&self) -> &str {
        self.stderr
            .lines()
            .chain(self.stdout.lines())
            .find(|l| l.to_ascii_lowercase().contains("error"))
            .unwrap_or("no error message")
            .trim()
    }
}

/// Run ngspice once on the bench.
fn run_bench(t: &Technology, b: &Bench) -> Result<BenchRun> {
    let deck = deck_text(t, b);
    // The netlist goes to ngspice on its standard input: no file is written, and ngspice
    // runs in the system's temporary folder so it reads nothing from the user's.
    let cpu_before = children_cpu();
    let mut child = std::process::Command::new("ngspice")
        .arg("-b")
        .current_dir(std::env::temp_dir())
        .env("OMP_NUM_THREADS", "1")
        .stdin(std::process::Stdio::piped())
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .map_err(|e| Error::Check(format!("characterize: cannot run ngspice: {e}")))?;
    let mut stdin = child.stdin.take().expect("piped stdin");
    let feeder = std::thread::spawn(move || {
        use std::io::Write;
        let _ = stdin.write_all(deck.as_bytes());
    });
    let out = child
        .wait_with_output()
        .map_err(|e| Error::Check(format!("characterize: ngspice: {e}")))?;
    let _ = feeder.join();
    let stdout = String::from_utf8_lossy(&out.stdout);
    let mut got: BTreeMap<String, f64> = BTreeMap::new();
    let cpu = match (cpu_before, children_cpu()) {
        (Some(a), Some(b)) => Some(b - a),
        _ => None,
    };
    for line in stdout.lines() {
        let w: Vec<&str> = line.split_whitespace().collect();
        if w.len() == 3 && w[0] == "cw_meas" {
            if let Ok(v) = w[2].parse::<f64>() {
                got.insert(w[1].to_string(), v);
            }
        }
    }
    Ok(BenchRun {
        got,
        stdout: stdout.into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
        code: out.status.code(),
        cpu_s: cpu,
    })
}

fn fit_all(
    t: &Technology,
    b: &Bench,
    need: &dyn Fn(&str) -> Result<f64>,
    cpu: Option<f64>,
) -> Result<Characterized> {
    let loads: Vec<f64> = LOADS_FF.iter().map(|c| c * 1e-15).collect();
    let mut fits = BTreeMap::new();
    // R × W in kΩ·µm from a delay-vs-load fit (delays in s, loads in F).
    let mut fit_r = |key: String, names: Vec<String>, w: f64| -> Result<f64> {
        let d: Vec<f64> = names.iter().map(|n| need(n)).collect::<Result<_>>()?;
        let f = fit_line(&loads, &d);
        let r = f.slope / LN2;
        fits.insert(
            key,
            Fit {
                slope: r * w / 1e3,
                intercept: f.intercept * 1e12,
                worst: f.worst * 1e12,
            },
        );
        Ok(r * w / 1e3)
    };
    let mut r_n = [0.0; 3];
    let mut r_p = [0.0; 3];
    for k in 1..=3 {
        r_n[k - 1] = fit_r(
            format!("r_n_fall[{}]", k - 1),
            (0..LOADS_FF.len())
                .map(|li| format!("t_nd{k}_{li}"))
                .collect(),
            b.w_n,
        )?;
        r_p[k - 1] = fit_r(
            format!("r_p_rise[{}]", k - 1),
            (0..LOADS_FF.len())
                .map(|li| format!("t_pu{k}_{li}"))
                .collect(),
            b.w_p,
        )?;
    }
    let mut pass = BTreeMap::new();
    for kind in ["pn", "tg"] {
        for edge in ["r", "f"] {
            let v = fit_r(
                format!("{kind}_{edge}"),
                (0..LOADS_FF.len())
                    .map(|li| format!("t_{kind}{edge}_{li}"))
                    .collect(),
                b.w_n,
            )?;
            pass.insert((kind, edge), v);
        }
    }
    let per_um = |q: &str| -> Result<f64> {
        let charge = need(q)?.abs();
        Ok(charge / t.vdd / (CHARGE_DEVICES as f64 * b.w_n) * 1e15)
    };
    let (cgn, cgp, cdn, cdp) = (
        per_um("qgn")?,
        per_um("qgp")?,
        per_um("qdn")?,
        per_um("qdp")?,
    );
    let d_le: Vec<f64> = (0..FANOUTS.len())
        .map(|hi| Ok((need(&format!("lr_{hi}"))? + need(&format!("lf_{hi}"))?) / 2.0 * 1e12))
        .collect::<Result<_>>()?;
    let le = fit_line(&FANOUTS, &d_le);
    fits.insert(
        "tau".into(),
        Fit {
            slope: le.slope,
            intercept: le.intercept,
            worst: le.worst,
        },
    );
    let four = FANOUTS
        .iter()
        .position(|h| *h == 4.0)
        .expect("h = 4 is swept");
    let fo4 = d_le[four];
    let r4 = |x: f64| {
        if x == 0.0 || !x.is_finite() {
            return x;
        }
        let mag = 10f64.powf(3.0 - x.abs().log10().floor());
        (x * mag).round() / mag
    };
    let mut timing = Timing {
        input_slew_ps: r4(t.slew * 1e12),
        n_width_um: b.w_n,
        p_width_um: b.w_p,
        r_n_fall_kohm_um: r_n.map(r4),
        r_p_rise_kohm_um: r_p.map(r4),
        r_pass_n_fall_kohm_um: r4(pass[&("pn", "f")]),
        r_pass_n_rise_kohm_um: r4(pass[&("pn", "r")]),
        r_tg_fall_kohm_um: r4(pass[&("tg", "f")]),
        r_tg_rise_kohm_um: r4(pass[&("tg", "r")]),
        c_gate_n_ff_um: r4(cgn),
        c_gate_p_ff_um: r4(cgp),
        c_diff_n_ff_um: r4(cdn),
        c_diff_p_ff_um: r4(cdp),
        c_diff_shared_n_ff_um: if t.device.diffusion.is_some() {
            Some(r4(per_um("qsn")?))
        } else {
            None
        },
        c_diff_shared_p_ff_um: if t.device.diffusion.is_some() {
            Some(r4(per_um("qsp")?))
        } else {
            None
        },
        c_gate_pass_n_ff_um: Some(r4((cgn + per_um("qgnh")?) / 2.0)),
        c_gate_pass_p_ff_um: Some(r4((cgp + per_um("qgpl")?) / 2.0)),
        fo4_ps: r4(fo4),
        tau_ps: r4(le.slope),
        p_inv: r4(le.intercept / le.slope),
        r_tg_ladder_fall_kohm_um: None,
        r_tg_ladder_rise_kohm_um: None,
        r_pass_ladder_fall_kohm_um: None,
        pass_ladder_visible: None,
        tg_ladder_visible_fall: None,
        tg_ladder_visible_rise: None,
        slope_fast: None,
        slew_per_step: None,
        slew_input_share: None,
        slope_threshold: None,
        slope_threshold_gain: None,
        // A to nA per µm of width.
        i_off_n_na_um: Some(r4(
            need("ilk")?.abs() / (CHARGE_DEVICES as f64 * b.w_n) * 1e9
        )),
        at: At {
            corner: t.corner.clone(),
            temp: t.temp,
            vdd: t.vdd,
            between: None,
            between_vdd: None,
        },
    };
    // Slow inputs, part 1: the output transition s = slew_per_step · step + slew_input_share
    // · t_in (step the engine's 0.69·R·(C + C_own) of the inverter, t_in the ramp's 10–90 %),
    // least squares on the relative miss over every ramp, load and edge.
    let own = b.w_n * timing.c_diff_ff_um(Mos::N, End::Contacted)
        + b.w_p * timing.c_diff_ff_um(Mos::P, End::Contacted);
    let mut ramps = vec![];
    for (ri, ramp) in RAMPS_PS.iter().enumerate() {
        for (li, c) in RAMP_LOADS_FF.iter().enumerate() {
            for (e, r, sense) in [
                ("f", timing.r_n_fall_kohm_um[0] / b.w_n, -1.0),
                ("r", timing.r_p_rise_kohm_um[0] / b.w_p, 1.0),
            ] {
                ramps.push(RampPoint {
                    t_in: 0.8 * ramp,
                    step: LN2 * r * (c + own),
                    sense,
                    delay: need(&format!("t_rmp{ri}_{li}_{e}"))? * 1e12,
                    slew: need(&format!("s_rmp{ri}_{li}_{e}"))? * 1e12,
                });
            }
        }
    }
    {
        let (rho, gamma) = fit_two(
            ramps
                .iter()
                .map(|p| (p.step / p.slew, p.t_in / p.slew, 1.0)),
        );
        timing.slew_per_step = Some(r4(rho));
        timing.slew_input_share = Some(r4(gamma.clamp(0.0, 0.9)));
        let worst = ramps.iter().fold(0.0f64, |m, p| {
            m.max(((rho * p.step + gamma * p.t_in) / p.slew - 1.0).abs())
        });
        fits.insert(
            "slew".into(),
            Fit {
                slope: rho,
                intercept: gamma,
                worst: 100.0 * worst,
            },
        );
    }
    // Switching threshold: v = (0.5 − VM / VDD) / 0.8 (the lead of the threshold crossing on
    // the 50 % point per ps of 10–90 % input transition), and how far VM moves per unit of the
    // pull-up's share of the drive, G_p / (G_p + G_n) with G = W / R, from the skewed one.
    {
        let (vm0, vmk) = (need("vm0")? / t.vdd, need("vmk")? / t.vdd);
        timing.slope_threshold = Some(r4((0.5 - vm0) / 0.8));
        let share = |wp: f64| {
            let gp = wp / timing.r_p_rise_kohm_um[0];
            let gn = b.w_n / timing.r_n_fall_kohm_um[0];
            gp / (gp + gn)
        };
        let gain = (vmk - vm0) / (share(SKEW_P * b.w_p) - share(b.w_p));
        timing.slope_threshold_gain = Some(r4(gain.clamp(0.0, 1.0)));
        fits.insert(
            "slope_threshold_gain".into(),
            Fit {
                slope: gain,
                intercept: vm0,
                worst: vmk,
            },
        );
    }
    // Input slope, part 2: the slow-input share fitted on the ramps and the single-device
    // load sweeps (the technology's own input ramp), the fast-input share solved at each so
    // that the model's FO4 equals the measured one, and the switching threshold by least
    // squares at each; the share with the least squared relative miss wins (a grid of 0.01,
    // then golden section around the best).
    {
        let t_in = t.slew * 1e12 * 0.8;
        let mut points = ramps;
        for (r, tag, sense) in [
            (timing.r_n_fall_kohm_um[0] / b.w_n, "nd1", -1.0),
            (timing.r_p_rise_kohm_um[0] / b.w_p, "pu1", 1.0),
        ] {
            for (li, c) in LOADS_FF.iter().enumerate() {
                points.push(RampPoint {
                    t_in,
                    step: LN2 * r * (c + own),
                    sense,
                    delay: need(&format!("t_{tag}_{li}"))? * 1e12,
                    slew: f64::NAN,
                });
            }
        }
        let model = |k: super::engine::Slope, p: &RampPoint| {
            super::engine::node_delay(p.step, p.step, p.t_in, k, p.sense)
        };
        // At one slow-input share: the shares with the threshold fitted, and the misses.
        let at = |cap: f64| -> Option<(super::engine::Slope, Vec<f64>)> {
            let k = super::engine::slope_for_cap(&timing, cap)?;
            let miss = points.iter().map(|p| model(k, p) / p.delay - 1.0).collect();
            Some((k, miss))
        };
        let cost =
            |cap: f64| at(cap).map_or(f64::INFINITY, |(_, m)| m.iter().map(|e| e * e).sum::<f64>());
        let grid = (5..=300)
            .map(|i| i as f64 * 0.01)
            .min_by(|x, y| cost(*x).total_cmp(&cost(*y)))
            .expect("a grid");
        let cap = golden_min((grid - 0.01).max(0.01), grid + 0.01, cost);
        let (k, miss) = at(cap).ok_or_else(|| {
            Error::Check(format!(
                "characterize {}: no input-slope shares reproduce the FO4 of {} ps",
                t.name, timing.fo4_ps
            ))
        })?;
        timing.slope_fast = Some(r4(k.fast));
        let k = super::engine::slope_share(&timing);
        fits.insert(
            "slope".into(),
            Fit {
                slope: k.fast,
                intercept: k.cap,
                worst: 100.0 * miss.iter().fold(0.0f64, |m, e| m.max(e.abs())),
            },
        );
    }
    // Ladder resistance: the engine's own ladder model (driver, first gate at the single
    // value, the rest at R_L; node capacitances from the values above) fitted to the
    // measured arrival at every node beyond the first, both ladders, by golden-section
    // search on the squared error.
    for edge in ["f", "r"] {
        let rising = edge == "r";
        let (wn, wp) = (b.w_n, b.w_p);
        let tg_diff = wn * timing.c_diff_n_ff_um + wp * timing.c_diff_p_ff_um;
        let reader = wn * timing.c_gate_n_ff_um + wp * timing.c_gate_p_ff_um;
        let r_drv = if rising {
            timing.r_p_rise_kohm_um[0] / wp
        } else {
            timing.r_n_fall_kohm_um[0] / wn
        };
        let r_single = if rising {
            timing.r_tg_rise_kohm_um
        } else {
            timing.r_tg_fall_kohm_um
        } / wn;
        let k = super::engine::slope_share(&timing);
        let t_in = t.slew * 1e12 * 0.8;
        let mut data = vec![];
        for n in LADDERS {
            let mut caps = vec![2.0 * tg_diff];
            for j in 1..=n {
                caps.push(if j < n { 2.0 * tg_diff } else { tg_diff } + reader);
            }
            let meas: Vec<f64> = (1..=n)
                .map(|j| need(&format!("t_lad{n}{edge}_{j}")).map(|x| x * 1e12))
                .collect::<Result<_>>()?;
            data.push((caps, meas));
        }
        // The driver's input rises for a falling ladder and falls for a rising one.
        let sense = if rising { 1.0 } else { -1.0 };
        let (r_l, visible, worst) = fit_ladder(&data, r_drv, r_single, t_in, k, sense, true);
        let v = r4(r_l * wn);
        fits.insert(
            format!("tg_ladder_{edge}"),
            Fit {
                slope: v,
                intercept: 0.0,
                worst,
            },
        );
        if rising {
            timing.r_tg_ladder_rise_kohm_um = Some(v);
            timing.tg_ladder_visible_rise = Some(visible);
        } else {
            timing.r_tg_ladder_fall_kohm_um = Some(v);
            timing.tg_ladder_visible_fall = Some(visible);
        }
    }
    {
        // The pass-NMOS ladder, falling: node capacitances as the circuit has them.
        let (wn, wp) = (b.w_n, b.w_p);
        let pass = wn * timing.c_diff_n_ff_um;
        let pre = wn * timing.c_diff_p_ff_um;
        let reader = wn * timing.c_gate_n_ff_um + wp * timing.c_gate_p_ff_um;
        let driver = wn * timing.c_diff_n_ff_um + wp * timing.c_diff_p_ff_um;
        let r_drv = timing.r_n_fall_kohm_um[0] / wn;
        let r_single = timing.r_pass_n_fall_kohm_um / wn;
        let k = super::engine::slope_share(&timing);
        let t_in = t.slew * 1e12 * 0.8;
        let mut data = vec![];
        for n in LADDERS {
            let mut caps = vec![driver + pass];
            for j in 1..=n {
                caps.push(if j < n { 2.0 * pass } else { pass } + pre + reader);
            }
            let meas: Vec<f64> = (1..=n)
                .map(|j| need(&format!("t_plad{n}_{j}")).map(|x| x * 1e12))
                .collect::<Result<_>>()?;
            data.push((caps, meas));
        }
        let (r_l, visible, worst) = fit_ladder(&data, r_drv, r_single, t_in, k, -1.0, true);
        let v = r4(r_l * wn);
        fits.insert(
            "pass_ladder_f".into(),
            Fit {
                slope: v,
                intercept: 0.0,
                worst,
            },
        );
        timing.r_pass_ladder_fall_kohm_um = Some(v);
        timing.pass_ladder_visible = Some(visible);
    }
    timing
        .check()
        .map_err(|(k, m)| Error::Check(format!("characterize {}: fitted {k} {m}", t.name)))?;
    let yaml = render_yaml(t, &timing, &fits, b.span);
    Ok(Characterized {
        timing,
        yaml,
        ngspice_cpu_s: cpu,
        fits,
    })
}

fn num(x: f64) -> String {
    trim_num(x)
}

/// The technology file: comments stating every choice, the conditions and the timing.
fn render_yaml(t: &Technology, tm: &Timing, fits: &BTreeMap<String, Fit>, span: f64) -> String {
    let mut s = String::new();
    let w = &mut s;
    let loads = LOADS_FF.map(num).join(", ");
    let _ = writeln!(
        w,
        "# carrywright technology file: {} characterised at corner {}, {} degC, VDD {} V.",
        t.name,
        t.corner,
        num(t.temp),
        num(t.vdd)
    );
    let _ = writeln!(
        w,
        "# Written by `carrywright characterize` (carrywright {}); regenerate, do not edit.",
        env!("CARGO_PKG_VERSION")
    );
    let _ = writeln!(w, "# Models: {}.", t.origin);
    let _ = writeln!(w, "# Devices at L = {} um: NMOS W = {} um, PMOS W = {} um (pn_ratio {}); input ramp {} ps (0-100 %).",
        num(t.l_min), num(tm.n_width_um), num(tm.p_width_um), num(t.pn_ratio), num(tm.input_slew_ps));
    let _ = writeln!(w, "# All circuits run in one ngspice transient (one thread, print step 1 ps, internal step <= 2 ps);");
    if span != 1.0 {
        let _ = writeln!(
            w,
            "# the slowest circuits did not settle in the usual window here: every edge and window {}x as late;",
            trim_num(span)
        );
    }
    let _ = writeln!(w, "# delays are input 50 % to output 50 % of VDD.");
    let _ = writeln!(w, "# Resistances: delay fitted by least squares to d = 0.69 R C + d0 over loads C = {loads} fF");
    let _ = writeln!(w, "#   (Elmore; 0.69 = ln 2, Rabaey, Chandrakasan & Nikolic, 2nd ed., 6.2.3); R = slope / 0.69, the");
    let _ = writeln!(
        w,
        "#   devices' own capacitance falls into d0. Written as R x W of each device (kOhm um)."
    );
    let _ = writeln!(w, "#   Stacks: k equal devices in series, every gate driven together, one opposite device sets the");
    let _ = writeln!(w, "#   starting level. Pass NMOS: gate at VDD, an ideal ramp on one side. Transmission gate: NMOS W_n");
    let _ = writeln!(w, "#   and PMOS W_p in parallel, per um of NMOS width.");
    let _ = writeln!(w, "# Capacitances by charge: |integral of i dt| / VDD / W over {CHARGE_DEVICES} devices of W_n; gate: gate ramped");
    let _ = writeln!(w, "#   over the full swing, drain, source and bulk at the rail (a pass device's gate: the mean of that and of");
    let _ = writeln!(
        w,
        "#   drain and source at the other rail); drain: drain ramped, device off."
    );
    if let Some(d) = &t.device.diffusion {
        let _ = writeln!(w, "# Diffusion: {} um contacted past the gate (area W e, perimeter 2 (W + e)); {} um shared between", num(d.contacted_um), num(d.shared_um));
        let _ = writeln!(w, "#   two gates in series (each device W s / 2 and W + s), as the generated decks draw them.");
    }
    let _ = writeln!(
        w,
        "# Logical effort (Sutherland, Sproull & Harris 1999): for h = {} a chain of inverters",
        FANOUTS.map(num).join(", ")
    );
    let _ = writeln!(w, "#   each driving h copies of itself; the third stage's mean of rise and fall delay is fitted to");
    let _ = writeln!(
        w,
        "#   d = tau h + tau p_inv. FO4 is the measured delay at h = 4."
    );
    if tm.slew_per_step.is_some() {
        let _ = writeln!(w, "# Input slope: a stage adds 1 / (1 / (fast t_in) + 1 / (cap sqrt(t_in t_step))) to its step delay,");
        let _ = writeln!(w, "#   plus or minus slope_threshold x t_in (a falling input reaches the switching threshold later,");
        let _ = writeln!(
            w,
            "#   a rising one sooner). Ramps: an inverter driven by ideal ramps of {} ps (0-100 %;",
            RAMPS_PS.map(num).join(", ")
        );
        let _ = writeln!(w, "#   10-90 % = 0.8 of it) into {} fF, both edges. Output transition slew_per_step x t_step +", RAMP_LOADS_FF.map(num).join(", "));
        let _ = writeln!(w, "#   slew_input_share x t_in, least squares on the relative miss. Threshold: (0.5 - VM / VDD) / 0.8,");
        let _ = writeln!(w, "#   VM where an inverter with input tied to output settles; slope_threshold_gain: VM's move per unit");
        let _ = writeln!(w, "#   of the pull-up's drive share Gp / (Gp + Gn) (G = W / R), from one with a {}x PMOS. cap fitted on", num(SKEW_P));
        let _ = writeln!(w, "#   the ramps and the single-device load sweeps with fast solved so the model's FO4 equals the measured one.");
    } else {
        let _ = writeln!(w, "# Input slope: a stage adds 1 / (1 / (fast t_in) + 1 / (cap t_step)) to its step delay; fast is");
        let _ = writeln!(w, "#   fitted to the single-device load sweeps above with cap solved so the model's FO4 equals the");
        let _ = writeln!(w, "#   measured one (both limits of Hedenstierna & Jeppson 1987 / Sakurai & Newton 1990 in form).");
    }
    let _ = writeln!(w, "# Fits (intercept d0 and worst residual, ps):");
    for (k, f) in fits {
        if k == "slew" {
            let _ = writeln!(
                w,
                "#   slew: {:.3} x step + {:.3} x t_in, worst residual {:.1} %",
                f.slope, f.intercept, f.worst
            );
            continue;
        }
        if k == "slope" {
            let threshold = tm.slope_threshold.unwrap_or(0.0);
            let _ = writeln!(
                w,
                "#   slope: fast-input share {:.3} (from the FO4), slow-input share {:.3}, threshold {:.4} x t_in,",
                f.slope, f.intercept, threshold
            );
            let _ = writeln!(
                w,
                "#     worst residual {:.1} % over the ramps and the single-device load sweeps",
                f.worst
            );
            continue;
        }
        if k == "slope_threshold_gain" {
            let _ = writeln!(
                w,
                "#   slope_threshold_gain: {:.3} (VM {:.3} VDD, {:.3} VDD with a {}x PMOS)",
                f.slope,
                f.intercept,
                f.worst,
                num(SKEW_P)
            );
            continue;
        }
        let _ = writeln!(
            w,
            "#   {k}: d0 {:.1}, worst residual {:.2}",
            f.intercept, f.worst
        );
    }
    let _ = writeln!(
        w,
        "#   cross-check: tau (4 + p_inv) = {:.1} ps against the FO4 measured, {} ps.",
        tm.tau_ps * (4.0 + tm.p_inv),
        num(tm.fo4_ps)
    );
    if crate::tech::BUILTIN.contains(&t.name.as_str()) {
        let _ = writeln!(w, "name: {}", file_name_stem(t));
        let _ = writeln!(w, "base: {}", t.name);
        let _ = writeln!(
            w,
            "conditions: {{corner: {}, temp: {}, vdd: {}}}",
            yaml_str(&t.corner),
            num(t.temp),
            num(t.vdd)
        );
    } else {
        file_keys(w, t);
    }
    let _ = writeln!(w, "timing:");
    let _ = writeln!(w, "  input_slew_ps: {}", num(tm.input_slew_ps));
    let _ = writeln!(w, "  n_width_um: {}", num(tm.n_width_um));
    let _ = writeln!(w, "  p_width_um: {}", num(tm.p_width_um));
    let _ = writeln!(
        w,
        "  # single device, stack of 2, stack of 3 (R x W of each device)"
    );
    let _ = writeln!(
        w,
        "  r_n_fall_kohm_um: [{}]",
        tm.r_n_fall_kohm_um.map(num).join(", ")
    );
    let _ = writeln!(
        w,
        "  r_p_rise_kohm_um: [{}]",
        tm.r_p_rise_kohm_um.map(num).join(", ")
    );
    let _ = writeln!(
        w,
        "  r_pass_n_fall_kohm_um: {}   # passing a 0",
        num(tm.r_pass_n_fall_kohm_um)
    );
    let _ = writeln!(
        w,
        "  r_pass_n_rise_kohm_um: {}   # passing a 1 (output stops near VDD - Vt)",
        num(tm.r_pass_n_rise_kohm_um)
    );
    let _ = writeln!(w, "  r_tg_fall_kohm_um: {}", num(tm.r_tg_fall_kohm_um));
    let _ = writeln!(w, "  r_tg_rise_kohm_um: {}", num(tm.r_tg_rise_kohm_um));
    if let (Some(f), Some(r)) = (tm.r_tg_ladder_fall_kohm_um, tm.r_tg_ladder_rise_kohm_um) {
        let _ = writeln!(
            w,
            "  # a transmission gate fed through another one (inside a ladder)"
        );
        let _ = writeln!(w, "  r_tg_ladder_fall_kohm_um: {}", num(f));
        let _ = writeln!(w, "  r_tg_ladder_rise_kohm_um: {}", num(r));
        if let (Some(f), Some(r)) = (tm.tg_ladder_visible_fall, tm.tg_ladder_visible_rise) {
            let _ = writeln!(
                w,
                "  tg_ladder_visible_fall: {}   # share of the next gate's downstream a node sees",
                num(f)
            );
            let _ = writeln!(w, "  tg_ladder_visible_rise: {}", num(r));
        }
    }
    if let Some(f) = tm.r_pass_ladder_fall_kohm_um {
        let _ = writeln!(
            w,
            "  # a pass NMOS fed through another one (inside a precharged chain), passing a 0"
        );
        let _ = writeln!(w, "  r_pass_ladder_fall_kohm_um: {}", num(f));
        if let Some(vis) = tm.pass_ladder_visible {
            let _ = writeln!(
                w,
                "  pass_ladder_visible: {}   # share of the next device's downstream a node sees",
                num(vis)
            );
        }
    }
    for (k, v, what) in [
        (
            "slope_fast",
            tm.slope_fast,
            "input-slope share for a fast input (with the FO4 it sets the slow-input share)",
        ),
        (
            "slew_per_step",
            tm.slew_per_step,
            "output 10-90 % per ps of step delay",
        ),
        (
            "slew_input_share",
            tm.slew_input_share,
            "share of the input's transition the output's gains",
        ),
        (
            "slope_threshold",
            tm.slope_threshold,
            "switching threshold below mid-supply, per ps of input transition",
        ),
        (
            "slope_threshold_gain",
            tm.slope_threshold_gain,
            "threshold's move (share of VDD) per unit of the pull-up's drive share",
        ),
    ] {
        if let Some(v) = v {
            let _ = writeln!(w, "  {k}: {}   # {what}", num(v));
        }
    }
    if let Some(i) = tm.i_off_n_na_um {
        let _ = writeln!(
            w,
            "  i_off_n_na_um: {}   # NMOS off (gate and source at 0, drain at VDD), nA per um",
            num(i)
        );
    }
    let _ = writeln!(w, "  c_gate_n_ff_um: {}", num(tm.c_gate_n_ff_um));
    let _ = writeln!(w, "  c_gate_p_ff_um: {}", num(tm.c_gate_p_ff_um));
    if let (Some(n), Some(p)) = (tm.c_gate_pass_n_ff_um, tm.c_gate_pass_p_ff_um) {
        let _ = writeln!(
            w,
            "  # a pass device's gate: mean of channel ends at its own rail and at the other"
        );
        let _ = writeln!(w, "  c_gate_pass_n_ff_um: {}", num(n));
        let _ = writeln!(w, "  c_gate_pass_p_ff_um: {}", num(p));
    }
    let _ = writeln!(w, "  c_diff_n_ff_um: {}", num(tm.c_diff_n_ff_um));
    let _ = writeln!(w, "  c_diff_p_ff_um: {}", num(tm.c_diff_p_ff_um));
    if let (Some(n), Some(p)) = (tm.c_diff_shared_n_ff_um, tm.c_diff_shared_p_ff_um) {
        let _ = writeln!(
            w,
            "  # a drain on half of the diffusion two gates in series share (no contact)"
        );
        let _ = writeln!(w, "  c_diff_shared_n_ff_um: {}", num(n));
        let _ = writeln!(w, "  c_diff_shared_p_ff_um: {}", num(p));
    }
    let _ = writeln!(w, "  fo4_ps: {}", num(tm.fo4_ps));
    let _ = writeln!(w, "  tau_ps: {}", num(tm.tau_ps));
    let _ = writeln!(w, "  p_inv: {}", num(tm.p_inv));
    s
}

/// The keys of a technology file that is not a built-in, as `load_file` reads them.
fn file_keys(w: &mut String, t: &Technology) {
    let var = format!("${}/", crate::tech::DECK_MODEL_VAR);
    let path = |deck: &str| match deck.strip_prefix(&var) {
        Some(rest) => format!("\"${{MODEL_DIR}}/{rest}\""),
        None => format!("\"{deck}\""),
    };
    let _ = writeln!(w, "name: {}", t.name);
    let _ = writeln!(w, "vdd: {}", num(t.vdd_nominal));
    let _ = writeln!(w, "l_min: {}", num(t.l_min));
    let _ = writeln!(w, "w_min: {}", num(t.w_min));
    let _ = writeln!(w, "nmos: {}", t.nmos);
    let _ = writeln!(w, "pmos: {}", t.pmos);
    let _ = writeln!(w, "unit_n: {}", num(t.unit_n));
    let _ = writeln!(w, "pn_ratio: {}", num(t.pn_ratio));
    let _ = writeln!(w, "step: {}", crate::spec::fmt_si(t.step, 's'));
    let _ = writeln!(
        w,
        "device_prefix: {}",
        if t.device.prefix.is_empty() {
            "none"
        } else {
            "x"
        }
    );
    let _ = writeln!(
        w,
        "size_suffix: {}",
        if t.device.size_suffix.is_empty() {
            "none"
        } else {
            "u"
        }
    );
    if let Some(e) = &t.device.diffusion {
        let _ = writeln!(w, "diffusion_um: {}", num(e.contacted_um));
        let _ = writeln!(w, "diffusion_shared_um: {}", num(e.shared_um));
    }
    if let Models::Files { include, lib, .. } = &t.models {
        let inc: Vec<String> = include.iter().map(|f| path(&f.deck)).collect();
        if !inc.is_empty() {
            let _ = writeln!(w, "include: [{}]", inc.join(", "));
        }
        if !lib.is_empty() {
            let _ = writeln!(w, "lib:");
        }
        for (f, sec) in lib {
            let _ = writeln!(w, "  - {{file: {}, section: {sec}}}", path(&f.deck));
        }
    }
    let _ = writeln!(
        w,
        "conditions: {{corner: {}, temp: {}, vdd: {}}}",
        yaml_str(&t.corner),
        num(t.temp),
        num(t.vdd)
    );
}

fn yaml_str(s: &str) -> String {
    if s.chars().all(|c| c.is_ascii_alphanumeric() || c == '_') {
        s.to_string()
    } else {
        format!("\"{}\"", s.replace('"', ""))
    }
}

/// `gf180mcu_3v3_typical`: the technology and corner as one identifier.
fn file_name_stem(t: &Technology) -> String {
    let corner: String = t
        .corner
        .split_whitespace()
        .next()
        .unwrap_or("nominal")
        .chars()
        .filter(|c| c.is_ascii_alphanumeric())
        .collect();
    format!("{}_{}", t.name.replace('-', "_"), corner)
}

/// Options of `carrywright characterize`.
#[derive(Debug, Clone, Default)]
pub struct Options {
    pub technology: String,
    pub corner: Option<String>,
    pub temp: Option<f64>,
    pub vdd: Option<f64>,
    pub model_dir: Option<std::path::PathBuf>,
    pub out: std::path::PathBuf,
}

/// The `characterize` command: load the technology at the asked conditions, characterise,
/// write the file (whole, or nothing). Returns what was written and ngspice's CPU time.
pub fn run(o: &Options) -> Result<Characterized> {
    let lo = crate::spec::LoadOptions {
        model_dir: o.model_dir.clone(),
    };
    let mut t = if crate::tech::BUILTIN.contains(&o.technology.as_str()) {
        crate::tech::builtin(&o.technology, &lo)?
    } else if o.technology.ends_with(".yaml") || o.technology.ends_with(".yml") {
        crate::tech::load_file(Path::new(&o.technology), &lo)?
    } else {
        return Err(Error::Input(format!(
            "--technology: unknown technology `{}`; expected {} or a technology .yaml file",
            printable(&o.technology),
            crate::tech::BUILTIN.join(", ")
        )));
    };
    if let Some(m) = &t.models_missing {
        return Err(Error::Input(format!("--technology: {m}")));
    }
    let c = crate::tech::Conditions {
        corner: o.corner.clone(),
        temp: o.temp,
        vdd: o.vdd,
    };
    t.apply_conditions(&c)
        .map_err(|(k, m)| Error::Input(format!("--{k}: {m}")))?;
    let r = characterize(&t)?;
    crate::write_file(&o.out, &r.yaml)?;
    Ok(r)
}

/// The minimum of a unimodal `f` on [lo, hi] by golden-section search (80 steps).
fn golden_min(mut lo: f64, mut hi: f64, f: impl Fn(f64) -> f64) -> f64 {
    let phi = 0.618_033_988_7;
    for _ in 0..80 {
        let a = hi - phi * (hi - lo);
        let c = lo + phi * (hi - lo);
        if f(a) < f(c) {
            hi = c;
        } else {
            lo = a;
        }
    }
    0.5 * (lo + hi)
}

/// Fit the resistance R_L of the gates beyond the first in a ladder: the engine's own ladder
/// model ([`super::engine::ladder_delays`]: driver `r_drv`, first gate `r_single`, the rest at
/// R_L, node capacitances in `data`) against the measured arrival at every node past the
/// driver, by golden-section search on the squared error. With `with_visible` the share of
/// the next gate's downstream a node sees is fitted too, over 0, 0.05, .., 1 (R_L by
/// golden section at each). Returns R_L (kΩ), that share (1 without) and the worst
/// residual (ps).
fn fit_ladder(
    data: &[(Vec<f64>, Vec<f64>)],
    r_drv: f64,
    r_single: f64,
    t_in: f64,
    k: super::engine::Slope,
    sense: f64,
    with_visible: bool,
) -> (f64, f64, f64) {
    let residuals = |r_l: f64, vis: f64| -> Vec<f64> {
        data.iter()
            .flat_map(|(caps, meas)| {
                let model =
                    super::engine::ladder_delays(r_drv, r_single, r_l, vis, caps, t_in, k, sense);
                (1..meas.len() + 1)
                    .map(|j| model[j] - meas[j - 1])
                    .collect::<Vec<_>>()
            })
            .collect()
    };
    let cost = |r_l: f64, vis: f64| residuals(r_l, vis).iter().map(|e| e * e).sum::<f64>();
    let golden = |vis: f64| golden_min(0.2 * r_single, 8.0 * r_single, |r_l| cost(r_l, vis));
    let shares: Vec<f64> = if with_visible {
        (0..=20).map(|i| i as f64 / 20.0).collect()
    } else {
        vec![1.0]
    };
    let (r_l, vis) = shares
        .iter()
        .map(|&vis| (golden(vis), vis))
        .min_by(|x, y| cost(x.0, x.1).total_cmp(&cost(y.0, y.1)))
        .expect("at least one share");
    let worst = residuals(r_l, vis)
        .iter()
        .fold(0.0f64, |m, e| m.max(e.abs()));
    (r_l, vis, worst)
}

/// One point of the slow-input sweep (ps): the ramp's 10–90 %, the engine's step delay of the
/// inverter, the sense of the edge ([`super::engine::sense`]), and what ngspice measured.
struct RampPoint {
    t_in: f64,
    step: f64,
    sense: f64,
    delay: f64,
    slew: f64,
}

/// Least squares 1 ≈ a·x + b·y over (x, y, weight) rows: the (a, b) that minimise
/// Σ w (a x + b y − 1)² (a relative fit when x and y are divided by the measured value).
fn fit_two(rows: impl Iterator<Item = (f64, f64, f64)>) -> (f64, f64) {
    let (mut sxx, mut sxy, mut syy, mut sx, mut sy) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for (x, y, w) in rows {
        sxx += w * x * x;
        sxy += w * x * y;
        syy += w * y * y;
        sx += w * x;
        sy += w * y;
    }
    let det = sxx * syy - sxy * sxy;
    ((sx * syy - sy * sxy) / det, (sy * sxx - sx * sxy) / det)
}
