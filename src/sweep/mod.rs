//! `carrywright sweep`: many specs from one base and lists of values, estimated (and
//! simulated) in parallel, collected into `results.csv`, `results.json` and `report.md`, and
//! answered: for each width, the fastest, the smallest and the lowest-energy design, and the
//! smallest that meets a delay target at every listed corner.
//!
//! A sweep file:
//!
//! ```yaml
//! base: acc32.yaml            # a spec file (relative to the sweep file), or a spec inline
//! vary:                       # any of these, each a list; the points are the cross product
//!   width: [16, 32]
//!   architecture: [ripple, kogge-stone, manchester]
//!   style: [static]
//!   block: [4, auto]
//!   buffers: [none, auto]
//!   sizing: [{}, auto]
//!   corner: [typical, ss]     # corner, temp, vdd go into the spec's `conditions:`
//!   temp: [27, 125]
//!   vdd: [3.3]
//!   load: [20f, 50f]          # into `testbench.load`
//! exclude:                    # points matching every key of an entry are dropped
//!   - {architecture: ripple, block: auto}
//! target: {delay: 10n, margin: 10%}
//! ```
//!
//! Every point is a spec of its own, validated as any spec is; one the tool refuses is
//! recorded with its reason, never fatal. A point's result is kept in
//! `DIR/points/HASH.json`, HASH covering the point's spec text, the technology file it
//! names, the tool version and the mode, so a re-run reuses every finished point.

pub mod answer;
pub mod jobs;
pub mod plots;
pub mod report;

use crate::error::{Error, Result};
use crate::spec::{LoadOptions, Spec};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};
use serde_yaml::{Mapping, Value};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicUsize, Ordering};

/// The keys `vary:` accepts, in the order points and columns use.
pub const KEYS: &[&str] = &[
    "width",
    "architecture",
    "style",
    "block",
    "buffers",
    "sizing",
    "corner",
    "temp",
    "vdd",
    "load",
];

/// The keys that set the conditions rather than the design.
pub const CONDITION_KEYS: &[&str] = &["corner", "temp", "vdd"];

/// A parsed sweep file.
#[derive(Debug, Clone)]
pub struct Sweep {
    /// The base spec as a YAML mapping, and the folder its relative paths resolve from.
    pub base: Mapping,
    pub base_dir: PathBuf,
    /// (key, values) in [`KEYS`] order.
    pub vary: Vec<(String, Vec<Value>)>,
    pub exclude: Vec<Mapping>,
    pub target: Option<Target>,
}

/// `target:`: a delay every corner of a design must meet with a margin.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct Target {
    pub delay_s: f64,
    /// Fraction (0.1 for `10%`).
    pub margin: f64,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSweep {
    base: Value,
    #[serde(default)]
    vary: Mapping,
    #[serde(default)]
    exclude: Vec<Mapping>,
    #[serde(default)]
    target: Option<RawTarget>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawTarget {
    delay: Value,
    #[serde(default)]
    margin: Option<Value>,
}

fn scalar_text(v: &Value) -> Option<String> {
    match v {
        Value::String(s) => Some(s.clone()),
        Value::Number(n) => Some(n.to_string()),
        _ => None,
    }
}

/// Most points one sweep may have.
pub const MAX_POINTS: usize = 100_000;

impl Sweep {
    /// Read a sweep file. Errors name the key (exit 2).
    pub fn load(path: &Path) -> Result<Sweep> {
        let text = std::fs::read_to_string(path)
            .map_err(|e| Error::Input(format!("{}: {e}", path.display())))?;
        let dir = match path.parent() {
            Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
            _ => PathBuf::from("."),
        };
        Sweep::parse(&text, &path.display().to_string(), &dir)
    }

    pub fn parse(text: &str, label: &str, dir: &Path) -> Result<Sweep> {
        let bad = |key: &str, msg: String| Error::Input(format!("{label}: {key}: {msg}"));
        let de = serde_yaml::Deserializer::from_str(text);
        let raw: RawSweep = serde_path_to_error::deserialize(de).map_err(|e| {
            let path = e.path().to_string();
            bad(
                if path == "." { "sweep" } else { &path },
                e.into_inner().to_string(),
            )
        })?;
        let (base, base_dir) = match &raw.base {
            Value::String(p) => {
                let file = dir.join(p);
                let t = std::fs::read_to_string(&file)
                    .map_err(|e| bad("base", format!("cannot read {}: {e}", file.display())))?;
                let m: Mapping = serde_yaml::from_str(&t)
                    .map_err(|e| bad("base", format!("{}: {e}", file.display())))?;
                let d = match file.parent() {
                    Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
                    _ => PathBuf::from("."),
                };
                (m, d)
            }
            Value::Mapping(m) => (m.clone(), dir.to_path_buf()),
            _ => return Err(bad("base", "expected a spec file's path or a spec".into())),
        };
        let mut vary = vec![];
        for (k, v) in &raw.vary {
            let key = scalar_text(k).unwrap_or_default();
            if !KEYS.contains(&key.as_str()) {
                return Err(bad(
                    &format!("vary.{}", crate::spec::printable(&key)),
                    format!("unknown key; vary takes {}", KEYS.join(", ")),
                ));
            }
            let Value::Sequence(list) = v else {
                return Err(bad(
                    &format!("vary.{key}"),
                    "expected a list of values".into(),
                ));
            };
            if list.is_empty() {
                return Err(bad(&format!("vary.{key}"), "the list is empty".into()));
            }
            vary.push((key, list.clone()));
        }
        vary.sort_by_key(|(k, _)| KEYS.iter().position(|x| x == k));
        for (i, e) in raw.exclude.iter().enumerate() {
            for k in e.keys() {
                let key = scalar_text(k).unwrap_or_default();
                if !KEYS.contains(&key.as_str()) {
                    return Err(bad(
                        &format!("exclude[{i}].{}", crate::spec::printable(&key)),
                        format!("unknown key; exclude rules take {}", KEYS.join(", ")),
                    ));
                }
            }
        }
        let target = match raw.target {
            None => None,
            Some(t) => {
                let d = scalar_text(&t.delay)
                    .ok_or_else(|| bad("target.delay", "expected a time such as 10n".into()))?;
                let delay_s = crate::spec::parse_quantity_text(&d, 's')
                    .map_err(|m| bad("target.delay", m))?;
                if !(delay_s > 0.0 && delay_s < 1e-3) {
                    return Err(bad(
                        "target.delay",
                        format!("must be above 0 and below 1m (seconds), got {d}"),
                    ));
                }
                let margin = match t.margin.as_ref() {
                    None => 0.0,
                    Some(m) => {
                        let text = scalar_text(m).unwrap_or_default();
                        let (num, pct) = match text.strip_suffix('%') {
                            Some(n) => (n.trim().to_string(), true),
                            None => (text.clone(), false),
                        };
                        let x: f64 = num.parse().map_err(|_| {
                            bad(
                                "target.margin",
                                format!(
                                    "expected a fraction or a percentage, got `{}`",
                                    crate::spec::printable(&text)
                                ),
                            )
                        })?;
                        let x = if pct { x / 100.0 } else { x };
                        if !(0.0..=1.0).contains(&x) {
                            return Err(bad(
                                "target.margin",
                                format!("must be between 0 and 100 %, got {text}"),
                            ));
                        }
                        x
                    }
                };
                Some(Target { delay_s, margin })
            }
        };
        let s = Sweep {
            base,
            base_dir,
            vary,
            exclude: raw.exclude,
            target,
        };
        let n: usize = s.vary.iter().map(|(_, v)| v.len()).product();
        if n > MAX_POINTS {
            return Err(bad("vary", format!("{n} points; at most {MAX_POINTS}")));
        }
        Ok(s)
    }

    /// The points in order: each the varied (key, value) pairs, excluded ones dropped.
    pub fn points(&self) -> Vec<Vec<(String, Value)>> {
        let mut out: Vec<Vec<(String, Value)>> = vec![vec![]];
        for (k, vals) in &self.vary {
            out = out
                .into_iter()
                .flat_map(|p| {
                    vals.iter().map(move |v| {
                        let mut q = p.clone();
                        q.push((k.clone(), v.clone()));
                        q
                    })
                })
                .collect();
        }
        out.retain(|p| {
            !self.exclude.iter().any(|rule| {
                rule.iter().all(|(k, v)| {
                    let key = scalar_text(k).unwrap_or_default();
                    p.iter().any(|(pk, pv)| *pk == key && same(pv, v))
                })
            })
        });
        out
    }

    /// The spec text of a point: the base with the point's values set.
    pub fn point_text(&self, point: &[(String, Value)]) -> String {
        let mut m = self.base.clone();
        for (k, v) in point {
            let key = Value::String(k.clone());
            if CONDITION_KEYS.contains(&k.as_str()) || k == "load" {
                let outer = if k == "load" {
                    "testbench"
                } else {
                    "conditions"
                };
                let entry = m
                    .entry(Value::String(outer.into()))
                    .or_insert_with(|| Value::Mapping(Mapping::new()));
                if !entry.is_mapping() {
                    *entry = Value::Mapping(Mapping::new());
                }
                let inner_key = if k == "load" {
                    Value::String("load".into())
                } else {
                    key
                };
                entry
                    .as_mapping_mut()
                    .expect("a mapping")
                    .insert(inner_key, v.clone());
            } else {
                m.insert(key, v.clone());
            }
        }
        serde_yaml::to_string(&m).unwrap_or_default()
    }
}

/// Two YAML values equal as the spec reads them (`4` and `"4"` alike).
fn same(a: &Value, b: &Value) -> bool {
    match (scalar_text(a), scalar_text(b)) {
        (Some(x), Some(y)) => x == y,
        _ => a == b,
    }
}

/// A point's varied values as texts.
pub fn point_values(p: &[(String, Value)]) -> Vec<(String, String)> {
    p.iter().map(|(k, v)| (k.clone(), value_text(v))).collect()
}

/// A value as one short text (flow style), for tables and columns.
pub fn value_text(v: &Value) -> String {
    match v {
        Value::String(s) => s.clone(),
        Value::Number(n) => n.to_string(),
        Value::Bool(b) => b.to_string(),
        Value::Null => "~".into(),
        other => serde_json::to_string(other)
            .unwrap_or_default()
            .replace('"', ""),
    }
}

/// What to do at each point.
#[derive(Debug, Clone)]
pub struct Options {
    pub estimate_only: bool,
    /// Stop after this many points computed (finished ones are kept): a test's interruption.
    pub limit: Option<usize>,
    /// Simulator runs' limit.
    pub timeout: std::time::Duration,
    pub load: LoadOptions,
    pub progress: bool,
}

/// One point's result.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
pub struct PointResult {
    pub index: usize,
    pub hash: String,
    /// The varied values, in [`KEYS`] order.
    pub values: Vec<(String, String)>,
    /// `ok`, `refused` (the spec or the build refused it; `reason` says why), `error`, or a
    /// simulator's status (`wrong`, `failed`, `missing`, `timeout`).
    pub status: String,
    pub reason: Option<String>,
    pub title: Option<String>,
    pub architecture: Option<String>,
    pub width: Option<usize>,
    pub conditions: Option<String>,
    pub worst_ps: Option<f64>,
    pub worst_path: Option<String>,
    pub cin_cout_ps: Option<f64>,
    pub energy_fj: Option<f64>,
    pub gate_area_um2: Option<f64>,
    pub total_width_um: Option<f64>,
    pub transistors: Option<usize>,
    /// ngspice (without `--estimate-only`): the worst path measured, its error against the
    /// estimate, energy per addition over the deck's vectors.
    pub sim_worst_ps: Option<f64>,
    pub sim_error_pct: Option<f64>,
    pub sim_energy_fj: Option<f64>,
    pub sim_wall_s: Option<f64>,
    /// ngspice: the worst path's input and output crossings (s), and its nodes (the columns
    /// of the deck's NAME_path.dat, input first).
    #[serde(default)]
    pub sim_window: Option<(f64, f64)>,
    #[serde(default)]
    pub sim_path: Vec<String>,
    /// ngspice: the carry delay with every bit propagating (cin → cout, or clk↑ → cout), the
    /// later edge; the only delay a deck without an estimate measures.
    #[serde(default)]
    pub sim_carry_ps: Option<f64>,
}

impl PointResult {
    /// A point with its identity and status, no figures yet.
    pub fn new(index: usize, hash: &str, values: Vec<(String, String)>, status: &str) -> Self {
        PointResult {
            index,
            hash: hash.to_string(),
            values,
            status: status.into(),
            reason: None,
            title: None,
            architecture: None,
            width: None,
            conditions: None,
            worst_ps: None,
            worst_path: None,
            cin_cout_ps: None,
            energy_fj: None,
            gate_area_um2: None,
            total_width_um: None,
            transistors: None,
            sim_worst_ps: None,
            sim_error_pct: None,
            sim_energy_fj: None,
            sim_wall_s: None,
            sim_window: None,
            sim_path: vec![],
            sim_carry_ps: None,
        }
    }

    /// The delay the answer ranks by: measured where there is a measurement.
    pub fn delay_ps(&self) -> Option<f64> {
        self.sim_worst_ps.or(self.worst_ps).or(self.sim_carry_ps)
    }
    pub fn ok(&self) -> bool {
        self.status == "ok"
    }
}

/// This build of the tool: a digest of the running executable (read once), so a rebuilt tool
/// never reuses another build's results.
fn build_id() -> &'static str {
    static ID: std::sync::OnceLock<String> = std::sync::OnceLock::new();
    ID.get_or_init(|| {
        use sha2::{Digest, Sha256};
        let bytes = std::env::current_exe()
            .and_then(std::fs::read)
            .unwrap_or_default();
        Sha256::digest(&bytes)
            .iter()
            .take(8)
            .map(|b| format!("{b:02x}"))
            .collect()
    })
}

pub fn hash_of(text: &str, spec_dir: &Path, estimate_only: bool) -> String {
    use sha2::{Digest, Sha256};
    let mut h = Sha256::new();
    h.update(b"carrywright sweep point 1\n");
    h.update(env!("CARGO_PKG_VERSION").as_bytes());
    h.update(build_id().as_bytes());
    h.update(if estimate_only {
        b"estimate\n"
    } else {
        b"simulate\n"
    });
    h.update(text.as_bytes());
    // A technology named by path: its contents count too.
    if let Ok(m) = serde_yaml::from_str::<Mapping>(text) {
        if let Some(Value::String(t)) = m.get(Value::String("technology".into())) {
            if t.ends_with(".yaml") || t.ends_with(".yml") || t.contains('/') {
                if let Ok(body) = std::fs::read(spec_dir.join(t)) {
                    h.update(&body);
                }
            }
        }
    }
    let d = h.finalize();
    d.iter().take(8).map(|b| format!("{b:02x}")).collect()
}

/// Evaluate one point: its spec text (relative paths from `base_dir`), and where to write its
/// views when it is simulated.
pub fn evaluate(
    text: &str,
    base_dir: &Path,
    index: usize,
    values: Vec<(String, String)>,
    hash: &str,
    views: &Path,
    o: &Options,
) -> PointResult {
    let mut r = PointResult::new(index, hash, values, "ok");
    let label = format!("sweep point {index}");
    let refuse = |mut r: PointResult, e: Error| {
        r.status = if e.exit_code() == 2 {
            "refused"
        } else {
            "error"
        }
        .into();
        r.reason = Some(e.to_string());
        r
    };
    let spec: Spec = match crate::spec::parse(text, &label, base_dir, &o.load) {
        Ok(s) => s,
        Err(e) => return refuse(r, e),
    };
    r.title = Some(crate::emit::title(&spec));
    r.architecture = Some(spec.architecture.as_str().to_string());
    r.width = Some(spec.width);
    let t = &spec.technology;
    r.conditions = Some(format!(
        "{} {} {} degC {} V",
        t.name,
        t.corner,
        crate::spec::trim_num(t.temp),
        crate::spec::trim_num(t.vdd)
    ));
    let design = match crate::build(&spec) {
        Ok(d) => d,
        Err(e) => return refuse(r, e),
    };
    match crate::timing::search::estimate(&spec, &design) {
        Ok(e) => {
            r.worst_ps = Some(e.worst_ps);
            r.worst_path = Some(format!(
                "{} -> {}",
                e.worst_vectors.from, e.worst_vectors.to
            ));
            r.cin_cout_ps = e.cin_cout_ps;
            r.energy_fj = Some(e.energy_fj);
            r.gate_area_um2 = Some(e.gate_area_um2);
            r.total_width_um = Some(e.total_width_um);
            r.transistors = Some(e.transistors);
        }
        // No estimate (no characterised timing at these conditions): with the simulator the
        // point is still measured.
        Err(e) if !o.estimate_only => r.reason = Some(format!("no estimate: {e}")),
        Err(e) => return refuse(r, e),
    }
    if o.estimate_only {
        return r;
    }
    if r.gate_area_um2.is_none() {
        // The sizes without the engine: every device of every leaf cell.
        let (mut n, mut area, mut width) = (0usize, 0.0, 0.0);
        for leaf in design.flatten().leaves {
            for d in &design.cells[&leaf.kind].devices {
                n += 1;
                area += d.w * d.l;
                width += d.w;
            }
        }
        r.transistors = Some(n);
        r.gate_area_um2 = Some((area * 10.0_f64).round() / 10.0);
        r.total_width_um = Some((width * 10.0_f64).round() / 10.0);
    }
    let g = match crate::generate(&spec) {
        Ok(g) => g,
        Err(e) => return refuse(r, e),
    };
    let into = views.to_path_buf();
    // A point's own folder, written by this thread alone: plain writes (the output module's
    // folder lock and signal deferral are for one writer per process).
    let written = std::fs::create_dir_all(&into).and_then(|_| {
        g.files
            .iter()
            .try_for_each(|(name, text)| std::fs::write(into.join(name), text))
    });
    if let Err(e) = written {
        return refuse(r, Error::Output(format!("{}: {e}", into.display())));
    }
    let so = crate::simulate::Options {
        icarus: false,
        ngspice: true,
        timeout: o.timeout,
        ..Default::default()
    };
    match crate::simulate::simulate(&spec, g.estimate.as_ref(), &into, &so) {
        Ok(s) => {
            if let Some(n) = &s.ngspice {
                r.sim_wall_s = Some(n.wall_s);
                r.sim_carry_ps = ["tcarry_rise", "tcarry_fall"]
                    .iter()
                    .filter_map(|k| n.measurements.get(*k).copied())
                    .filter(|&x| x > 0.0)
                    .fold(None, |a: Option<f64>, x| Some(a.map_or(x, |a| a.max(x))))
                    .map(|x| (x * 1e13).round() / 10.0);
                if let (Some(&a), Some(&b)) =
                    (n.measurements.get("tw_from"), n.measurements.get("tw_to"))
                {
                    r.sim_window = Some((a, b));
                }
                if let Some(e) = &g.estimate {
                    r.sim_path = crate::emit::spice::path_nodes(e);
                }
                r.sim_worst_ps = n
                    .measurements
                    .get("tworst")
                    .map(|t| (t * 1e13).round() / 10.0);
                r.sim_energy_fj = n
                    .measurements
                    .get("energy_per_op")
                    .map(|x| (x * 1e16).round() / 10.0);
                if let (Some(m), Some(w)) = (r.sim_worst_ps, r.worst_ps) {
                    r.sim_error_pct = Some(((w / m - 1.0) * 1000.0).round() / 10.0);
                }
                if n.status != crate::simulate::Status::Pass {
                    r.status = serde_json::to_value(n.status)
                        .ok()
                        .and_then(|v| v.as_str().map(String::from))
                        .unwrap_or_else(|| "failed".into());
                    r.reason = n.message.clone();
                }
            }
        }
        Err(e) => return refuse(r, e),
    }
    r
}

/// The whole sweep's outcome.
#[derive(Debug, Clone, Serialize)]
pub struct Outcome {
    pub points: Vec<PointResult>,
    /// Points computed in this run and reused from an earlier one.
    pub computed: usize,
    pub reused: usize,
    /// Points left for a later run (`--limit`).
    pub left: usize,
    pub wall_s: f64,
    /// Sum of the simulator runs' wall times (0 with `--estimate-only`).
    pub sim_wall_s: f64,
}

impl Outcome {
    /// "N points: X computed in this run, Y reused; T s wall." for the reports.
    pub fn counts_line(&self) -> String {
        format!(
            "{} points: {} computed in this run, {} reused{}; {:.1} s wall{}.",
            self.points.len(),
            self.computed,
            self.reused,
            if self.left > 0 {
                format!(", {} left for a later run", self.left)
            } else {
                String::new()
            },
            self.wall_s,
            if self.sim_wall_s > 0.0 {
                format!(", {:.1} s of ngspice runs", self.sim_wall_s)
            } else {
                String::new()
            }
        )
    }
}

/// What the answer's figures are, and the target, for the reports (plain text).
pub fn figures_note(sweep: &Sweep) -> String {
    let mut s = format!("Delays are the timing engine's worst path (measured in ngspice where the sweep simulated); energy is the engine's per addition at random activity; area is the sum of W·L. A close call is another design at the same conditions within {:.0} % of the fastest's estimate ({:.0} % when both are measured): nearer than the engine can rank them, so measure both.",
        answer::ESTIMATE_CLOSE * 100.0,
        answer::MEASURED_CLOSE * 100.0
    );
    if let Some(t) = sweep.target {
        s.push_str(&format!(
            " Target: {} at every corner listed, with a {:.0} % margin.",
            crate::spec::fmt_si(t.delay_s, 's'),
            t.margin * 100.0
        ));
    }
    s
}

/// Run the sweep into `dir`: every point, in parallel, reusing `dir/points/HASH.json`.
pub fn run(sweep: &Sweep, dir: &Path, o: &Options) -> Result<Outcome> {
    let t0 = std::time::Instant::now();
    let points = sweep.points();
    let cache = dir.join("points");
    std::fs::create_dir_all(&cache)
        .map_err(|e| Error::Output(format!("{}: {e}", cache.display())))?;
    let hashes: Vec<String> = points
        .iter()
        .map(|p| hash_of(&sweep.point_text(p), &sweep.base_dir, o.estimate_only))
        .collect();
    let bar = if o.progress {
        let b = indicatif::ProgressBar::new(points.len() as u64);
        b.set_style(
            indicatif::ProgressStyle::with_template(
                "{bar:30} {pos}/{len} points, {msg} [{elapsed_precise}, {eta} left]",
            )
            .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
        );
        b
    } else {
        indicatif::ProgressBar::hidden()
    };
    let computed = AtomicUsize::new(0);
    let reused = AtomicUsize::new(0);
    let failed = AtomicUsize::new(0);
    let results: Vec<Option<PointResult>> = points
        .par_iter()
        .enumerate()
        .map(|(i, p)| {
            let file = cache.join(format!("{}.json", hashes[i]));
            let cached = std::fs::read_to_string(&file)
                .ok()
                .and_then(|t| serde_json::from_str::<PointResult>(&t).ok())
                .map(|mut r| {
                    r.index = i;
                    r
                });
            let r = match cached {
                Some(r) => {
                    reused.fetch_add(1, Ordering::SeqCst);
                    r
                }
                None => {
                    if let Some(limit) = o.limit {
                        // Claim a slot; past the limit the point is left for a later run.
                        if computed.fetch_add(1, Ordering::SeqCst) >= limit {
                            return None;
                        }
                    } else {
                        computed.fetch_add(1, Ordering::SeqCst);
                    }
                    let r = evaluate(
                        &sweep.point_text(p),
                        &sweep.base_dir,
                        i,
                        point_values(p),
                        &hashes[i],
                        &dir.join("points").join(&hashes[i]),
                        o,
                    );
                    if let Ok(text) = serde_json::to_string_pretty(&r) {
                        // Written whole (a temporary file renamed over it): an interrupted
                        // run never leaves half a result to be read back.
                        let tmp = cache.join(format!(".{}.{i}.tmp", hashes[i]));
                        if std::fs::write(&tmp, text).is_ok() {
                            let _ = std::fs::rename(&tmp, &file);
                        }
                    }
                    r
                }
            };
            if !r.ok() {
                failed.fetch_add(1, Ordering::SeqCst);
            }
            bar.set_message(format!("{} not ok", failed.load(Ordering::SeqCst)));
            bar.inc(1);
            Some(r)
        })
        .collect();
    bar.finish_and_clear();
    let left = results.iter().filter(|r| r.is_none()).count();
    let points: Vec<PointResult> = results.into_iter().flatten().collect();
    let reused = reused.load(Ordering::SeqCst);
    let sim_wall_s = points.iter().filter_map(|p| p.sim_wall_s).sum();
    Ok(Outcome {
        computed: points.len() - reused,
        reused,
        left,
        points,
        wall_s: t0.elapsed().as_secs_f64(),
        sim_wall_s,
    })
}

/// Write a sweep's files into `dir`: results.csv, results.json, report.md, report.html and
/// the plots. Returns the answer and the number of plots.
pub fn write_results(
    sw: &Sweep,
    outcome: &Outcome,
    dir: &Path,
) -> Result<(Vec<answer::Answer>, usize)> {
    let answers = answer::answer(&outcome.points, sw.target);
    let json = serde_json::json!({
        "tool_version": env!("CARGO_PKG_VERSION"),
        "points": outcome.points,
        "computed": outcome.computed,
        "reused": outcome.reused,
        "left": outcome.left,
        "target": sw.target,
        "answer": answers,
    });
    let mut files: Vec<(String, String)> = vec![
        ("results.csv".into(), csv(sw, &outcome.points)),
        (
            "results.json".into(),
            serde_json::to_string_pretty(&json).unwrap_or_default() + "\n",
        ),
        ("report.md".into(), report(sw, outcome, &answers)),
    ];
    let mut plots: Vec<(String, String)> = vec![];
    for (name, svg) in [
        ("delay_vs_width.svg", plots::delay_vs_width(&outcome.points)),
        ("delay_vs_area.svg", plots::delay_vs_area(&outcome.points)),
        ("worst_path_waveforms.svg", waveforms(outcome, dir)),
        (
            "estimate_vs_ngspice.svg",
            plots::estimate_vs_measured(&outcome.points),
        ),
    ] {
        if let Some(svg) = svg {
            plots.push((name.to_string(), svg));
        }
    }
    files.push((
        "report.html".into(),
        report::html(sw, outcome, &answers, &plots),
    ));
    let n = plots.len();
    files.extend(plots);
    crate::write_outputs(dir, &files)?;
    Ok((answers, n))
}

/// The worst-path waveforms of the fastest simulated point at the largest width, from its
/// deck's NAME_path.dat.
fn waveforms(o: &Outcome, dir: &Path) -> Option<String> {
    let p = o
        .points
        .iter()
        .filter(|p| p.ok() && p.sim_window.is_some() && !p.sim_path.is_empty())
        .max_by(|a, b| {
            a.width.cmp(&b.width).then(
                b.sim_worst_ps
                    .unwrap_or(f64::MAX)
                    .total_cmp(&a.sim_worst_ps.unwrap_or(f64::MAX)),
            )
        })?;
    let folder = dir.join("points").join(&p.hash);
    let dat = std::fs::read_dir(&folder)
        .ok()?
        .filter_map(|e| e.ok().map(|e| e.path()))
        .find(|f| f.to_string_lossy().ends_with("_path.dat"))?;
    let text = std::fs::read_to_string(dat).ok()?;
    plots::waveforms(&text, &p.sim_path, p.sim_window?, &label(p))
}

/// The CSV columns, units in the header.
pub fn csv(sweep: &Sweep, points: &[PointResult]) -> String {
    let keys: Vec<&str> = sweep.vary.iter().map(|(k, _)| k.as_str()).collect();
    let mut head: Vec<String> = vec!["point".into(), "hash".into()];
    head.extend(keys.iter().map(|k| k.to_string()));
    head.extend(
        [
            "status",
            "title",
            "conditions",
            "worst_ps",
            "worst_path",
            "cin_cout_ps",
            "energy_fJ",
            "gate_area_um2",
            "total_width_um",
            "transistors",
            "sim_worst_ps",
            "sim_error_pct",
            "sim_energy_fJ",
            "sim_carry_ps",
            "reason",
        ]
        .iter()
        .map(|s| s.to_string()),
    );
    let field = |s: &str| {
        if s.contains([',', '"', '\n']) {
            format!("\"{}\"", s.replace('"', "\"\"").replace('\n', " "))
        } else {
            s.to_string()
        }
    };
    let num = |x: Option<f64>| x.map(|v| format!("{v}")).unwrap_or_default();
    let mut out = head.join(",") + "\n";
    for p in points {
        let mut row: Vec<String> = vec![p.index.to_string(), p.hash.clone()];
        for k in &keys {
            row.push(field(
                p.values
                    .iter()
                    .find(|(pk, _)| pk == k)
                    .map(|(_, v)| v.as_str())
                    .unwrap_or(""),
            ));
        }
        row.push(p.status.clone());
        row.push(field(p.title.as_deref().unwrap_or("")));
        row.push(field(p.conditions.as_deref().unwrap_or("")));
        row.push(num(p.worst_ps));
        row.push(field(p.worst_path.as_deref().unwrap_or("")));
        row.push(num(p.cin_cout_ps));
        row.push(num(p.energy_fj));
        row.push(num(p.gate_area_um2));
        row.push(num(p.total_width_um));
        row.push(p.transistors.map(|t| t.to_string()).unwrap_or_default());
        row.push(num(p.sim_worst_ps));
        row.push(num(p.sim_error_pct));
        row.push(num(p.sim_energy_fj));
        row.push(num(p.sim_carry_ps));
        row.push(field(p.reason.as_deref().unwrap_or("")));
        out.push_str(&row.join(","));
        out.push('\n');
    }
    out
}

/// `report.md`: the answer first, then every point.
pub fn report(sweep: &Sweep, o: &Outcome, answers: &[answer::Answer]) -> String {
    let mut s = String::from("# Sweep report\n\n");
    s.push_str(&format!("{}\n\n", o.counts_line()));
    s.push_str("## Which adder\n\n");
    s.push_str(&figures_note(sweep));
    s.push_str("\n\n");
    s.push_str(&answer::table(sweep, &o.points, answers));
    s.push_str("\n## Every point\n\n| # | point | status | worst | path | area um2 | energy fJ | measured |\n|---|---|---|---|---|---|---|---|\n");
    for p in &o.points {
        s.push_str(&format!(
            "| {} | {} | {} | {} | {} | {} | {} | {} |\n",
            p.index,
            label(p),
            if p.ok() {
                "ok".to_string()
            } else {
                format!(
                    "{}: {}",
                    p.status,
                    p.reason.as_deref().unwrap_or("").replace('|', "/")
                )
            },
            p.worst_ps.map(|x| format!("{x:.1} ps")).unwrap_or_default(),
            p.worst_path.as_deref().unwrap_or(""),
            p.gate_area_um2
                .map(|x| format!("{x:.1}"))
                .unwrap_or_default(),
            p.energy_fj.map(|x| format!("{x:.1}")).unwrap_or_default(),
            p.sim_worst_ps
                .map(|x| format!("{x:.1} ps ({:+.1} %)", p.sim_error_pct.unwrap_or(0.0)))
                .unwrap_or_default(),
        ));
    }
    s
}

/// A point's label from its varied values.
pub fn label(p: &PointResult) -> String {
    if p.values.is_empty() {
        return p.title.clone().unwrap_or_default();
    }
    p.values
        .iter()
        .map(|(k, v)| format!("{k}={v}"))
        .collect::<Vec<_>>()
        .join(" ")
}
