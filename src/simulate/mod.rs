//! `carrywright simulate`: write the views, run Icarus Verilog on the Verilog testbench and
//! ngspice on the deck, read back what they report, and put it beside the timing engine's
//! estimate in `NAME.results.json`.
//!
//! Each simulator runs as a child process with its output in a log file next to the views
//! (`NAME.icarus.log`, `NAME.ngspice.log`) and a wall-clock limit; a simulator that is not
//! installed, a run that fails, a measurement that fails, a deck that does not converge and
//! a time-out each end in their own status and exit code ([`exit`]), and the results file
//! is written in every case, marked `partial` when a run did not complete.

pub mod run;

use crate::error::Result;
use crate::spec::Spec;
use serde::Serialize;
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::time::Duration;

/// Exit codes of `simulate` (0: every run passed; 1 and 2 as for every command).
pub mod exit {
    /// A simulator ran and the design's outputs were wrong (Icarus reported a mismatch, or
    /// ngspice saw a wrong logic level).
    pub const WRONG: u8 = 3;
    /// ngspice could not measure (a delay outside its window, no convergence) or a simulator
    /// stopped with an error of its own.
    pub const FAILED: u8 = 4;
    /// A simulator is not installed (not on PATH), or the deck did not find its models.
    pub const MISSING: u8 = 5;
    /// A simulator ran past `--timeout`.
    pub const TIMEOUT: u8 = 6;
}

/// What to run.
#[derive(Debug, Clone)]
pub struct Options {
    pub icarus: bool,
    pub ngspice: bool,
    /// Wall-clock limit for each simulator run.
    pub timeout: Duration,
    /// Programs to run (PATH lookup unless a path): iverilog, vvp, ngspice.
    pub iverilog: PathBuf,
    pub vvp: PathBuf,
    pub ngspice_bin: PathBuf,
    /// ngspice threads per deck (the deck's own default is 1).
    pub threads: Option<usize>,
}

impl Default for Options {
    fn default() -> Self {
        Options {
            icarus: true,
            ngspice: true,
            timeout: Duration::from_secs(3600),
            iverilog: "iverilog".into(),
            vvp: "vvp".into(),
            ngspice_bin: "ngspice".into(),
            threads: None,
        }
    }
}

/// How a simulator run ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Status {
    Pass,
    /// Ran, and found the design wrong.
    Wrong,
    /// Ran, and could not measure or stopped with an error.
    Failed,
    Missing,
    Timeout,
}

impl Status {
    fn exit(self) -> u8 {
        match self {
            Status::Pass => 0,
            Status::Wrong => exit::WRONG,
            Status::Failed => exit::FAILED,
            Status::Missing => exit::MISSING,
            Status::Timeout => exit::TIMEOUT,
        }
    }
}

/// One simulator's run.
#[derive(Debug, Clone, Serialize)]
pub struct ToolRun {
    pub status: Status,
    /// The command lines run (in DIR).
    pub commands: Vec<String>,
    pub exit_code: Option<i32>,
    pub wall_s: f64,
    /// The log file, in DIR.
    pub log: String,
    /// One line on what went wrong, when something did.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub message: Option<String>,
    /// Icarus: the vectors the testbench checked.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub vectors: Option<u64>,
    /// ngspice: every number the deck printed (`tworst`, `tcarry_rise`, `power`, ...), SI
    /// units.
    #[serde(skip_serializing_if = "BTreeMap::is_empty")]
    pub measurements: BTreeMap<String, f64>,
    /// ngspice: every output sample at every strobe: (tag, node, volts).
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub samples: Vec<(String, String, f64)>,
    /// The failure lines the simulator printed.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub failures: Vec<String>,
}

impl ToolRun {
    /// A run that has not happened yet: its commands and log file.
    fn new(commands: Vec<String>, log: String) -> ToolRun {
        ToolRun {
            status: Status::Pass,
            commands,
            exit_code: None,
            wall_s: 0.0,
            log,
            message: None,
            vectors: None,
            measurements: BTreeMap::new(),
            samples: vec![],
            failures: vec![],
        }
    }
}

/// The timing engine's figures the measurements are compared with.
#[derive(Debug, Clone, Serialize)]
pub struct EstimateOut {
    pub worst_ps: f64,
    pub worst_from: String,
    pub worst_to: String,
    pub cin_cout_ps: Option<f64>,
    pub energy_fj: f64,
}

/// `NAME.results.json`.
#[derive(Debug, Clone, Serialize)]
pub struct Results {
    pub tool_version: &'static str,
    pub name: String,
    pub title: String,
    pub spec_hash: String,
    pub conditions: String,
    /// `pass` when every requested run passed.
    pub status: Status,
    pub exit_code: u8,
    /// Some requested run did not complete (missing, time-out, error): the figures below are
    /// what there is.
    pub partial: bool,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub failure: Option<String>,
    pub estimate: Option<EstimateOut>,
    /// None: switched off.
    pub icarus: Option<ToolRun>,
    pub ngspice: Option<ToolRun>,
    /// Measured against estimated (ps and %), where both exist.
    pub compared: Vec<Compared>,
}

/// One figure estimated and measured.
#[derive(Debug, Clone, Serialize)]
pub struct Compared {
    pub what: String,
    pub estimate_ps: f64,
    pub measured_ps: f64,
    pub error_pct: f64,
}

fn round1(x: f64) -> f64 {
    (x * 10.0).round() / 10.0
}

/// Icarus: compile and run the self-checking testbench.
fn icarus(name: &str, dir: &Path, o: &Options) -> ToolRun {
    let log_name = format!("{name}.icarus.log");
    let log = dir.join(&log_name);
    let vvp_file = format!("{name}.vvp");
    let compile: Vec<String> = vec![
        o.iverilog.display().to_string(),
        "-g2005".into(),
        "-o".into(),
        vvp_file.clone(),
        "-s".into(),
        format!("{name}_tb"),
        format!("{name}_tb.v"),
        format!("{name}.v"),
    ];
    let runv: Vec<String> = vec![o.vvp.display().to_string(), "-n".into(), vvp_file];
    let mut t = ToolRun::new(vec![compile.join(" "), runv.join(" ")], log_name);
    let first = run::run(&compile, dir, &log, o.timeout, false);
    t.wall_s += first.wall_s;
    t.exit_code = first.code;
    if let Some(s) = first.problem("iverilog", o.timeout) {
        t.status = s.0;
        t.message = Some(s.1);
        return t;
    }
    if first.code != Some(0) {
        t.status = Status::Failed;
        t.message = Some("iverilog could not compile the Verilog views (see the log)".into());
        return t;
    }
    let left = o
        .timeout
        .saturating_sub(Duration::from_secs_f64(first.wall_s));
    let second = run::run(&runv, dir, &log, left, true);
    t.wall_s += second.wall_s;
    t.exit_code = second.code;
    if let Some(s) = second.problem("vvp", left) {
        t.status = s.0;
        t.message = Some(s.1);
        return t;
    }
    let text = std::fs::read_to_string(&log).unwrap_or_default();
    let pass = format!("PASS {name}: ");
    t.vectors = text.lines().find_map(|l| {
        l.strip_prefix(&pass)?
            .split_whitespace()
            .next()?
            .parse()
            .ok()
    });
    t.failures = text
        .lines()
        .filter(|l| l.contains("FATAL") || l.contains("ERROR") || l.contains("gives s="))
        .take(20)
        .map(String::from)
        .collect();
    if t.vectors.is_none() || second.code != Some(0) {
        t.status = Status::Wrong;
        t.message = Some(match t.failures.first() {
            Some(f) => format!("the Verilog testbench failed: {}", f.trim()),
            None => "the Verilog testbench did not report PASS (see the log)".into(),
        });
    }
    t
}

/// ngspice: run the deck with every sample printed.
fn ngspice(spec: &Spec, dir: &Path, o: &Options) -> ToolRun {
    let name = &spec.name;
    let log_name = format!("{name}.ngspice.log");
    let log = dir.join(&log_name);
    let mut cmd: Vec<String> = vec![
        o.ngspice_bin.display().to_string(),
        "-D".into(),
        "cw_samples".into(),
    ];
    if let Some(n) = o.threads {
        cmd.push("-D".into());
        cmd.push(format!("cw_threads={n}"));
    }
    if let Some(root) = &spec.technology.model_root {
        cmd.push("-D".into());
        cmd.push(format!("cw_models={}", root.display()));
    }
    cmd.push("-b".into());
    cmd.push(format!("{name}_tb.sp"));
    let r = run::run(&cmd, dir, &log, o.timeout, false);
    let mut t = ToolRun::new(vec![cmd.join(" ")], log_name);
    t.exit_code = r.code;
    t.wall_s = r.wall_s;
    let text = std::fs::read_to_string(&log).unwrap_or_default();
    for l in text.lines() {
        if let Some(rest) = l.strip_prefix("sample ") {
            let w: Vec<&str> = rest.split_whitespace().collect();
            if let [tag, node, v] = w[..] {
                if let Ok(v) = v.parse() {
                    t.samples.push((tag.to_string(), node.to_string(), v));
                }
            }
        } else if let Some((k, v)) = l.split_once(" = ") {
            let k = k.trim();
            if !k.contains(' ') && !k.is_empty() {
                if let Ok(v) = v.trim().parse::<f64>() {
                    t.measurements.insert(k.to_string(), v);
                }
            }
        } else if l.starts_with("FAIL") {
            t.failures.push(l.to_string());
        }
    }
    if let Some(s) = r.problem("ngspice", o.timeout) {
        t.status = s.0;
        t.message = Some(s.1);
        return t;
    }
    let no_convergence = text.contains("Timestep too small") || text.contains("timestep too small");
    let first_fail = t.failures.first().cloned();
    let (status, message) = match r.code {
        Some(0) => (Status::Pass, None),
        Some(3) => (
            Status::Wrong,
            Some(format!(
                "the deck saw a wrong logic level: {}",
                first_fail.unwrap_or_default()
            )),
        ),
        Some(4) => (
            Status::Missing,
            Some(format!(
                "the deck did not find its models: set {} or pass --model-dir",
                spec.technology.model_env
            )),
        ),
        _ if no_convergence => (
            Status::Failed,
            Some("ngspice did not converge (timestep too small): see the log".into()),
        ),
        Some(2) => (
            Status::Failed,
            Some(format!(
                "a measurement failed: {}",
                first_fail.unwrap_or_default()
            )),
        ),
        c => (
            Status::Failed,
            Some(format!(
                "ngspice stopped with exit code {c:?} (see the log)"
            )),
        ),
    };
    t.status = status;
    t.message = message;
    t
}

/// Run the requested simulators on views already written into `dir` and collect the
/// results (written by the caller).
pub fn simulate(
    spec: &Spec,
    estimate: Option<&crate::timing::search::Estimate>,
    dir: &Path,
    o: &Options,
) -> Result<Results> {
    let icarus_run = o.icarus.then(|| icarus(&spec.name, dir, o));
    let ngspice_run = o.ngspice.then(|| ngspice(spec, dir, o));
    let runs: Vec<(&str, &ToolRun)> = [
        ("Icarus", icarus_run.as_ref()),
        ("ngspice", ngspice_run.as_ref()),
    ]
    .into_iter()
    .filter_map(|(n, r)| r.map(|r| (n, r)))
    .collect();
    let bad = runs.iter().find(|(_, r)| r.status != Status::Pass);
    let status = bad.map_or(Status::Pass, |(_, r)| r.status);
    let partial = runs
        .iter()
        .any(|(_, r)| matches!(r.status, Status::Missing | Status::Timeout | Status::Failed));
    let t = &spec.technology;
    let est = estimate.map(|e| EstimateOut {
        worst_ps: e.worst_ps,
        worst_from: e.worst_vectors.from.clone(),
        worst_to: e.worst_vectors.to.clone(),
        cin_cout_ps: e.cin_cout_ps,
        energy_fj: e.energy_fj,
    });
    let mut compared = vec![];
    if let (Some(e), Some(n)) = (&est, &ngspice_run) {
        let mut add = |what: String, est_ps: f64, key: &str| {
            if let Some(&m) = n.measurements.get(key) {
                if m > 0.0 {
                    let m_ps = m * 1e12;
                    compared.push(Compared {
                        what,
                        estimate_ps: est_ps,
                        measured_ps: round1(m_ps),
                        error_pct: round1((est_ps / m_ps - 1.0) * 100.0),
                    });
                }
            }
        };
        add(
            format!("worst path {} -> {}", e.worst_from, e.worst_to),
            e.worst_ps,
            "tworst",
        );
        if let Some(c) = e.cin_cout_ps {
            let from = if spec.style == crate::spec::Style::Dynamic {
                "clk"
            } else {
                "cin"
            };
            add(format!("{from} -> cout, rising"), c, "tcarry_rise");
            if spec.style == crate::spec::Style::Static {
                add(format!("{from} -> cout, falling"), c, "tcarry_fall");
            }
        }
    }
    Ok(Results {
        tool_version: env!("CARGO_PKG_VERSION"),
        name: spec.name.clone(),
        title: crate::emit::title(spec),
        spec_hash: crate::emit::summary::spec_hash(spec),
        conditions: format!(
            "{}, corner {}, {} degC, {} V, load {}",
            t.name,
            t.corner,
            crate::spec::trim_num(t.temp),
            crate::spec::trim_num(t.vdd),
            crate::spec::fmt_si(spec.testbench.load, 'F')
        ),
        status,
        exit_code: status.exit(),
        partial,
        failure: bad.and_then(|(n, r)| r.message.as_ref().map(|m| format!("{n}: {m}"))),
        estimate: est,
        icarus: icarus_run,
        ngspice: ngspice_run,
        compared,
    })
}

/// The one-screen summary: estimate and measurement side by side, each run's outcome.
pub fn summary(r: &Results, dir_shown: &str) -> String {
    let mut s = format!(
        "{}: {}\n  conditions       {}\n",
        r.name, r.title, r.conditions
    );
    if !r.compared.is_empty() {
        s.push_str(&format!(
            "  {:<28} {:>11} {:>11} {:>8}\n",
            "", "estimate", "ngspice", "error"
        ));
        for c in &r.compared {
            s.push_str(&format!(
                "  {:<28} {:>8.1} ps {:>8.1} ps {:>+7.1} %\n",
                c.what, c.estimate_ps, c.measured_ps, c.error_pct
            ));
        }
    }
    if let Some(n) = &r.ngspice {
        if let Some(e) = n.measurements.get("energy_per_op") {
            let clock = n
                .measurements
                .get("clock_energy_per_op")
                .map(|c| format!(", clock {:.1} fJ", c * 1e15))
                .unwrap_or_default();
            s.push_str(&format!(
                "  {:<28} {:>11} {:>8.1} fJ   (the deck's vectors{clock})\n",
                "energy per addition",
                r.estimate
                    .as_ref()
                    .map(|e| format!("{:.1} fJ", e.energy_fj))
                    .unwrap_or_default(),
                e * 1e15
            ));
        }
    }
    let line = |tool: &str, t: &ToolRun| {
        let what = match (t.status, tool) {
            (Status::Pass, "Icarus") => format!(
                "PASS, {} vectors",
                t.vectors.map(|v| v.to_string()).unwrap_or_default()
            ),
            (Status::Pass, _) => format!("PASS, {} samples", t.samples.len()),
            (st, _) => format!(
                "{}: {}",
                match st {
                    Status::Wrong => "WRONG",
                    Status::Failed => "FAILED",
                    Status::Missing => "MISSING",
                    Status::Timeout => "TIME-OUT",
                    Status::Pass => "PASS",
                },
                t.message.clone().unwrap_or_default()
            ),
        };
        format!("  {:<16} {what} ({:.1} s, log {})\n", tool, t.wall_s, t.log)
    };
    if let Some(t) = &r.icarus {
        s.push_str(&line("Icarus", t));
    }
    if let Some(t) = &r.ngspice {
        s.push_str(&line("ngspice", t));
    }
    s.push_str(&format!(
        "  wrote {dir_shown}/{}.results.json{}",
        r.name,
        if r.partial { " (partial)" } else { "" }
    ));
    s
}
