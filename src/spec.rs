//! The YAML spec: serde types, validation, and errors that name the key path and line.
//!
//! Parsing happens in two steps. serde (with `deny_unknown_fields`) turns the text into
//! raw values and reports type errors with the key path and line; then [`validate`] checks
//! ranges and cross-key rules. Nothing from the text reaches a netlist unless it passed both:
//! names are plain identifiers, numbers are re-printed by us, never copied.

use crate::error::{Error, Result};
use crate::tech::{self, Technology};
use serde::Deserialize;
use std::path::{Path, PathBuf};

/// Adder architecture named by the `architecture` key.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Architecture {
    Ripple,
    Manchester,
    CarrySkip,
    CarrySelect,
    Lookahead,
    KoggeStone,
    BrentKung,
    Sklansky,
    HanCarlson,
    LadnerFischer,
    Knowles,
}

pub const ARCHITECTURES: &[Architecture] = &[
    Architecture::Ripple,
    Architecture::Manchester,
    Architecture::CarrySkip,
    Architecture::CarrySelect,
    Architecture::Lookahead,
    Architecture::KoggeStone,
    Architecture::BrentKung,
    Architecture::Sklansky,
    Architecture::HanCarlson,
    Architecture::LadnerFischer,
    Architecture::Knowles,
];

impl Architecture {
    pub fn as_str(self) -> &'static str {
        match self {
            Architecture::Ripple => "ripple",
            Architecture::Manchester => "manchester",
            Architecture::CarrySkip => "carry-skip",
            Architecture::CarrySelect => "carry-select",
            Architecture::Lookahead => "lookahead",
            Architecture::KoggeStone => "kogge-stone",
            Architecture::BrentKung => "brent-kung",
            Architecture::Sklansky => "sklansky",
            Architecture::HanCarlson => "han-carlson",
            Architecture::LadnerFischer => "ladner-fischer",
            Architecture::Knowles => "knowles",
        }
    }
    /// The parallel-prefix family, for the prefix architectures.
    pub fn family(self) -> Option<crate::arch::prefix::Family> {
        use crate::arch::prefix::Family as F;
        Some(match self {
            Architecture::KoggeStone => F::KoggeStone,
            Architecture::BrentKung => F::BrentKung,
            Architecture::Sklansky => F::Sklansky,
            Architecture::HanCarlson => F::HanCarlson,
            Architecture::LadnerFischer => F::LadnerFischer,
            Architecture::Knowles => F::Knowles,
            _ => return None,
        })
    }
    /// Built on a prefix graph (the families and block lookahead).
    pub fn is_prefix(self) -> bool {
        self.family().is_some() || self == Architecture::Lookahead
    }
    /// Accepts `style: dynamic`.
    pub fn has_dynamic(self) -> bool {
        matches!(self, Architecture::Manchester | Architecture::CarrySkip)
    }
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Style {
    Static,
    Dynamic,
}

impl Style {
    pub fn as_str(self) -> &'static str {
        match self {
            Style::Static => "static",
            Style::Dynamic => "dynamic",
        }
    }
}

/// Where restoring buffers sit on the carry path.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Buffers {
    /// Bit positions p (0 < p < width, multiples of `block`): a buffer between bit p-1 and bit p.
    pub positions: Vec<usize>,
    /// Static style: an inverter (true) or an inverter pair (false). Dynamic style: always a
    /// domino inverter driving the next block's discharge device.
    pub inverting: bool,
    /// Prefix networks: buffer every node net with more loads than this.
    pub fanout: Option<usize>,
}

/// Device sizes in µm, resolved from the technology defaults and `sizing` overrides.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Sizing {
    /// NMOS width of a unit device (µm).
    pub unit_n: f64,
    /// PMOS width over NMOS width for equal drive.
    pub pn_ratio: f64,
    /// Keeper strength (W/L) as a fraction of a unit NMOS; 0 leaves keepers out.
    pub keeper: f64,
    /// Drive multiplier of carry-path buffers and drivers.
    pub buffer: f64,
}

#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Testbench {
    pub random: usize,
    pub seed: u64,
    /// Load on every output, farads.
    pub load: f64,
    /// Vector period, seconds (None: derived from the design).
    pub period: Option<f64>,
    /// Transient time step, seconds (None: the technology's default).
    pub step: Option<f64>,
}

/// A validated spec. Every field is safe to print into Verilog or SPICE.
#[derive(Debug, Clone)]
pub struct Spec {
    pub name: String,
    pub width: usize,
    pub architecture: Architecture,
    pub style: Style,
    pub block: usize,
    /// Carry-select: the block sizes, least significant first (uniform or square-root).
    pub block_sizes: Option<Vec<usize>>,
    /// How `block` was chosen when the spec said `sqrt`.
    pub block_rule: Option<&'static str>,
    pub buffers: Buffers,
    pub technology: Technology,
    pub sizing: Sizing,
    pub testbench: Testbench,
    /// The spec's label and text, to locate keys in errors found after validation.
    pub source: Option<(String, String)>,
}

pub const MAX_WIDTH: usize = 128;

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSpec {
    name: String,
    width: i64,
    architecture: String,
    #[serde(default)]
    style: Option<Style>,
    #[serde(default)]
    block: Option<serde_yaml::Value>,
    #[serde(default)]
    buffers: Option<serde_yaml::Value>,
    #[serde(default)]
    technology: Option<String>,
    #[serde(default)]
    sizing: Option<RawSizing>,
    #[serde(default)]
    testbench: Option<RawTestbench>,
}

#[derive(Deserialize, Default)]
#[serde(deny_unknown_fields)]
struct RawSizing {
    unit_n: Option<f64>,
    pn_ratio: Option<f64>,
    keeper: Option<f64>,
    buffer: Option<f64>,
}

#[derive(Deserialize, Default)]
#[serde(deny_unknown_fields)]
struct RawTestbench {
    random: Option<i64>,
    seed: Option<u64>,
    load: Option<serde_yaml::Value>,
    period: Option<serde_yaml::Value>,
    step: Option<serde_yaml::Value>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawBuffers {
    every: Option<i64>,
    at: Option<Vec<i64>>,
    inverting: Option<bool>,
    fanout: Option<i64>,
}

/// Where the outside world points us: the model folder for technologies that need one.
#[derive(Debug, Clone, Default)]
pub struct LoadOptions {
    pub model_dir: Option<PathBuf>,
}

/// The text of a YAML source and the label used in its messages.
pub struct Source<'a> {
    pub label: &'a str,
    pub text: &'a str,
}

impl Source<'_> {
    /// An error about `path` (dotted key path), with the line and column of that key when
    /// it can be found in the text.
    pub fn error(&self, path: &str, msg: impl AsRef<str>) -> Error {
        // The key itself, or else the nearest enclosing key that can be found.
        let mut at = None;
        let mut p = path;
        while at.is_none() && !p.is_empty() {
            at = locate(self.text, p);
            p = match p.rfind(['.', '[']) {
                Some(i) => &p[..i],
                None => "",
            };
        }
        match at {
            Some((l, c)) => Error::Input(format!(
                "{}:{}:{}: {}: {}",
                self.label,
                l,
                c,
                path,
                msg.as_ref()
            )),
            None => Error::Input(format!("{}: {}: {}", self.label, path, msg.as_ref())),
        }
    }

    /// Deserialize with serde, turning its error into one line with key path and position.
    pub fn parse<T: serde::de::DeserializeOwned>(&self) -> Result<T> {
        if self.text.trim().is_empty() {
            return Err(Error::Input(format!("{}: the file is empty", self.label)));
        }
        let de = serde_yaml::Deserializer::from_str(self.text);
        serde_path_to_error::deserialize(de).map_err(|e| {
            let path: String = e
                .path()
                .to_string()
                .chars()
                .flat_map(|c| c.escape_debug())
                .collect();
            let inner = e.into_inner();
            let msg = clean_serde_message(&inner.to_string(), &path);
            let shown = if path == "." || path.is_empty() {
                "spec".to_string()
            } else {
                path
            };
            match inner.location() {
                Some(loc) => Error::Input(format!(
                    "{}:{}:{}: {}: {}",
                    self.label,
                    loc.line(),
                    loc.column(),
                    shown,
                    msg
                )),
                None => Error::Input(format!("{}: {}: {}", self.label, shown, msg)),
            }
        })
    }
}

/// serde_yaml's message without its own position suffix, its own copy of the key path, or
/// our internal type names, on one line.
fn clean_serde_message(raw: &str, path: &str) -> String {
    let mut msg = raw.to_string();
    if let Some(i) = msg.find(" at line ") {
        msg.truncate(i);
    }
    if let Some((head, rest)) = msg.split_once(": ") {
        if !head.contains(' ') && (path.starts_with(head) || head == ".") {
            msg = rest.to_string();
        }
    }
    for (rust, plain) in [
        ("expected i64", "expected an integer"),
        ("expected u64", "expected a non-negative integer"),
        ("expected f64", "expected a number"),
    ] {
        msg = msg.replace(rust, plain);
    }
    for raw_type in [
        "RawSpec",
        "RawSizing",
        "RawTestbench",
        "RawBuffers",
        "RawTech",
        "RawLib",
    ] {
        msg = msg.replace(&format!("struct {raw_type}"), "a mapping of keys");
    }
    msg.chars()
        .map(|c| if c.is_control() { ' ' } else { c })
        .collect()
}

/// Find the line and column of a dotted key path in YAML text (block or flow style).
/// A best-effort scan used for validation messages; serde's own errors carry exact positions.
pub fn locate(text: &str, path: &str) -> Option<(usize, usize)> {
    let lines: Vec<&str> = text.lines().collect();
    let mut start = 0usize;
    let mut parent_indent: Option<usize> = None;
    let mut found = None;
    for key in path.split('.') {
        let key = key.split('[').next().unwrap_or(key);
        let mut hit = None;
        // Flow style on the parent's own line: `buffers: {every: 3}`.
        if let Some((pl, _)) = found {
            let line: &str = lines[pl - 1];
            if let Some(col) = find_key(line, key, true) {
                hit = Some((pl, col));
            }
        }
        if hit.is_none() {
            for (i, line) in lines.iter().enumerate().skip(start) {
                let indent = line.len() - line.trim_start().len();
                let t = line.trim_start();
                if t.is_empty() || t.starts_with('#') {
                    continue;
                }
                if let Some(pi) = parent_indent {
                    if indent <= pi && i >= start {
                        break;
                    }
                } else if indent != 0 {
                    continue;
                }
                if t.starts_with(&format!("{key}:")) || t.starts_with(&format!("{key} :")) {
                    hit = Some((i + 1, indent + 1));
                    break;
                }
            }
        }
        let (l, c) = hit?;
        let line = lines[l - 1];
        parent_indent = Some(line.len() - line.trim_start().len());
        start = l;
        found = Some((l, c));
    }
    found
}

fn find_key(line: &str, key: &str, inside_flow: bool) -> Option<usize> {
    let brace = line.find('{')?;
    let _ = inside_flow;
    let pat = format!("{key}:");
    line[brace..].find(&pat).map(|i| brace + i + 1)
}

/// Parse a spec file from disk.
pub fn load(path: &Path, opts: &LoadOptions) -> Result<Spec> {
    let label = path.display().to_string();
    let text = std::fs::read_to_string(path)
        .map_err(|e| Error::Input(format!("{label}: cannot read the spec: {e}")))?;
    let base = path.parent().unwrap_or(Path::new("."));
    parse(&text, &label, base, opts)
}

/// Parse and validate spec text. `base` resolves a relative technology file path.
pub fn parse(text: &str, label: &str, base: &Path, opts: &LoadOptions) -> Result<Spec> {
    let src = Source { label, text };
    let raw: RawSpec = src.parse()?;
    validate(raw, &src, base, opts)
}

fn validate(raw: RawSpec, src: &Source, base: &Path, opts: &LoadOptions) -> Result<Spec> {
    check_identifier(&raw.name).map_err(|m| src.error("name", m))?;

    if raw.width < 1 || raw.width > MAX_WIDTH as i64 {
        return Err(src.error(
            "width",
            format!("must be between 1 and {MAX_WIDTH}, got {}", raw.width),
        ));
    }
    let width = raw.width as usize;

    let architecture = match ARCHITECTURES
        .iter()
        .find(|a| a.as_str() == raw.architecture)
    {
        Some(a) => *a,
        None => {
            return Err(src.error(
                "architecture",
                format!(
                    "unknown architecture `{}`; expected one of {}",
                    printable(&raw.architecture),
                    ARCHITECTURES
                        .iter()
                        .map(|a| a.as_str())
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
            ))
        }
    };

    let style = raw.style.unwrap_or(Style::Static);
    if style == Style::Dynamic && !architecture.has_dynamic() {
        return Err(src.error(
            "style",
            format!(
                "`dynamic` is not supported for {}; it applies to manchester and carry-skip",
                architecture.as_str()
            ),
        ));
    }

    let default_block = if architecture.family().is_some() {
        1
    } else {
        width.min(4)
    };
    let mut block_rule = None;
    let mut block_sizes = None;
    let block = match &raw.block {
        None => default_block,
        Some(serde_yaml::Value::String(t)) if t == "sqrt" => match architecture {
            Architecture::CarrySkip => {
                // Single-level carry-skip with equal bypass and carry delays: about sqrt(N/2)
                // bits a block (Rabaey ch. 11; Weste & Harris §11.2; from memory).
                block_rule = Some("sqrt(N/2), the single-level carry-skip optimum");
                ((width as f64 / 2.0).sqrt().round() as usize).clamp(1, width)
            }
            Architecture::CarrySelect => {
                block_rule = Some("square-root blocks M, M, M+1, ...");
                let sizes = crate::arch::select::sizes(width, 0, true);
                let first = sizes[0];
                block_sizes = Some(sizes);
                first
            }
            other => {
                return Err(src.error(
                    "block",
                    format!(
                        "`sqrt` applies to carry-skip and carry-select, not {}",
                        other.as_str()
                    ),
                ))
            }
        },
        Some(serde_yaml::Value::Number(n)) if n.as_i64().is_some() => {
            let b = n.as_i64().unwrap();
            if b < 1 {
                return Err(src.error("block", format!("must be at least 1, got {b}")));
            }
            if b as usize > width {
                return Err(src.error("block", format!("{b} exceeds the width ({width} bits)")));
            }
            b as usize
        }
        Some(_) => {
            return Err(src.error("block", "expected a positive integer or `sqrt`"));
        }
    };
    if architecture == Architecture::CarrySelect && block_sizes.is_none() {
        block_sizes = Some(crate::arch::select::sizes(width, block, false));
    }

    let buffers = parse_buffers(raw.buffers.as_ref(), src, width, block, architecture, style)?;

    let technology = match &raw.technology {
        None => tech::builtin("generic", opts)?,
        Some(t) => {
            if tech::BUILTIN.contains(&t.as_str()) {
                let mut t = tech::builtin(t, opts).map_err(|e| match e {
                    Error::Input(m) => src.error("technology", m),
                    other => other,
                })?;
                // Located here, reported by `generate` (describe and check need no models).
                t.models_missing = t
                    .models_missing
                    .map(|m| src.error("technology", m).to_string());
                t
            } else if t.ends_with(".yaml") || t.ends_with(".yml") {
                if t.chars().any(|c| c.is_control()) {
                    return Err(src.error("technology", "the path contains a control character"));
                }
                let path = base.join(t);
                if !path.is_file() {
                    return Err(src.error(
                        "technology",
                        format!("technology file {} not found", path.display()),
                    ));
                }
                tech::load_file(&path, opts)?
            } else {
                return Err(src.error(
                    "technology",
                    format!(
                        "unknown technology `{}`; expected {} or a path to a technology .yaml file",
                        printable(t),
                        tech::BUILTIN.join(", ")
                    ),
                ));
            }
        }
    };

    let rs = raw.sizing.unwrap_or_default();
    let sizing = Sizing {
        unit_n: rs.unit_n.unwrap_or(technology.unit_n),
        pn_ratio: rs.pn_ratio.unwrap_or(technology.pn_ratio),
        keeper: rs.keeper.unwrap_or(0.1),
        buffer: rs.buffer.unwrap_or(2.0),
    };
    let in_range = |key: &str, v: f64, lo: f64, hi: f64| -> Result<()> {
        if !v.is_finite() || v < lo || v > hi {
            Err(src.error(
                &format!("sizing.{key}"),
                format!("must be between {lo} and {hi}, got {}", short_num(v)),
            ))
        } else {
            Ok(())
        }
    };
    in_range("unit_n", sizing.unit_n, technology.w_min, 100.0)?;
    in_range("pn_ratio", sizing.pn_ratio, 0.25, 8.0)?;
    if sizing.keeper != 0.0 {
        // A keeper as strong as a unit NMOS fights every discharge path to a draw.
        in_range("keeper", sizing.keeper, 0.02, 0.9)?;
    }
    in_range("buffer", sizing.buffer, 1.0, 32.0)?;
    if rs.keeper.is_some() && style == Style::Static {
        return Err(src.error(
            "sizing.keeper",
            "keepers belong to dynamic chains; this spec is static",
        ));
    }

    let rt = raw.testbench.unwrap_or_default();
    let random = rt.random.unwrap_or(64);
    if !(0..=1_000_000).contains(&random) {
        return Err(src.error(
            "testbench.random",
            format!("must be between 0 and 1000000, got {random}"),
        ));
    }
    let quantity = |key: &str, v: &Option<serde_yaml::Value>, unit: char, lo: f64, hi: f64| match v
    {
        None => Ok(None),
        Some(v) => {
            let path = format!("testbench.{key}");
            let x = parse_quantity(v, unit).map_err(|m| src.error(&path, m))?;
            if !(lo..=hi).contains(&x) {
                return Err(src.error(
                    &path,
                    format!(
                        "must be between {} and {}",
                        fmt_si(lo, unit),
                        fmt_si(hi, unit)
                    ),
                ));
            }
            Ok(Some(x))
        }
    };
    let load = quantity("load", &rt.load, 'F', 0.0, 10e-12)?.unwrap_or(10e-15);
    let period = quantity("period", &rt.period, 's', 100e-12, 1e-6)?;
    let step = quantity("step", &rt.step, 's', 0.1e-12, 1e-9)?;
    if let Some(p) = period {
        // Inputs change two slews into a period; a dynamic deck also needs a precharge half.
        let min = technology.slew * if style == Style::Dynamic { 20.0 } else { 10.0 };
        if p < min {
            return Err(src.error(
                "testbench.period",
                format!(
                    "must be at least {} for {} style with this technology's input slew",
                    fmt_si(min, 's'),
                    style.as_str()
                ),
            ));
        }
    }
    if let (Some(p), Some(s)) = (period, step) {
        if s * 20.0 > p {
            return Err(src.error("testbench.step", "must be at most 1/20 of testbench.period"));
        }
    }

    Ok(Spec {
        name: raw.name,
        width,
        architecture,
        style,
        block,
        block_sizes,
        block_rule,
        buffers,
        technology,
        sizing,
        testbench: Testbench {
            random: random as usize,
            seed: rt.seed.unwrap_or(1),
            load,
            period,
            step,
        },
        source: Some((src.label.to_string(), src.text.to_string())),
    })
}

fn parse_buffers(
    v: Option<&serde_yaml::Value>,
    src: &Source,
    width: usize,
    block: usize,
    arch: Architecture,
    style: Style,
) -> Result<Buffers> {
    let none = Buffers {
        positions: vec![],
        inverting: true,
        fanout: None,
    };
    let v = match v {
        None => return Ok(none),
        Some(serde_yaml::Value::String(s)) if s == "none" => return Ok(none),
        Some(serde_yaml::Value::String(s)) if s == "auto" => {
            return Err(src.error(
                "buffers",
                "`auto` needs the timing model, which is not built yet; use none, {every: K}, {at: [..]} or, for prefix networks, {fanout: F}",
            ))
        }
        Some(v @ serde_yaml::Value::Mapping(_)) => v,
        Some(_) => {
            return Err(src.error(
                "buffers",
                "expected none, {every: K}, {at: [bit positions]} or {fanout: F}",
            ))
        }
    };
    let raw: RawBuffers = serde_path_to_error::deserialize(v.clone()).map_err(|e| {
        let inner: String = e
            .path()
            .to_string()
            .chars()
            .flat_map(|c| c.escape_debug())
            .collect();
        let path = if inner.is_empty() || inner == "." {
            "buffers".to_string()
        } else {
            format!("buffers.{inner}")
        };
        src.error(
            &path,
            clean_serde_message(&e.into_inner().to_string(), &path),
        )
    })?;
    match arch {
        Architecture::Ripple => {
            return Err(src.error(
                "buffers",
                "every ripple full adder restores its carry; use buffers: none",
            ))
        }
        Architecture::CarrySkip | Architecture::CarrySelect => {
            return Err(src.error(
                "buffers",
                format!(
                    "{} restores the carry at every block boundary; use buffers: none",
                    arch.as_str()
                ),
            ))
        }
        a if a.is_prefix() => {
            if raw.every.is_some() || raw.at.is_some() || raw.inverting.is_some() {
                return Err(src.error(
                    "buffers",
                    "prefix networks take buffers: none or {fanout: F}",
                ));
            }
            let f = raw.fanout.unwrap_or(0);
            if !(2..=64).contains(&f) {
                return Err(src.error(
                    "buffers.fanout",
                    format!("must be between 2 and 64, got {f}"),
                ));
            }
            return Ok(Buffers {
                fanout: Some(f as usize),
                ..none
            });
        }
        _ => {}
    }
    if raw.fanout.is_some() {
        return Err(src.error(
            "buffers.fanout",
            "fan-out buffers apply to prefix networks; chains take {every: K} or {at: [..]}",
        ));
    }
    let _ = width;
    if raw.inverting.is_some() && style == Style::Dynamic {
        return Err(src.error(
            "buffers.inverting",
            "dynamic chains are always restored by a domino inverter; remove this key",
        ));
    }
    let positions = match (raw.every, raw.at) {
        (Some(_), Some(_)) | (None, None) => {
            return Err(src.error("buffers", "give exactly one of `every` or `at`"))
        }
        (Some(k), None) => {
            if k < 1 || !(k as usize).is_multiple_of(block) {
                return Err(src.error(
                    "buffers.every",
                    format!("must be a positive multiple of block ({block}), got {k}"),
                ));
            }
            let k = k as usize;
            if k >= width {
                return Err(src.error(
                    "buffers.every",
                    format!("{k} leaves no block boundary inside the {width}-bit word"),
                ));
            }
            (1..).map(|i| i * k).take_while(|&p| p < width).collect()
        }
        (None, Some(at)) => {
            if at.is_empty() {
                return Err(src.error(
                    "buffers.at",
                    "give at least one bit position, or write buffers: none",
                ));
            }
            let mut out: Vec<usize> = Vec::new();
            for (i, &p) in at.iter().enumerate() {
                let path = format!("buffers.at[{i}]");
                if p <= 0 || p as usize >= width {
                    return Err(src.error(
                        &path,
                        format!("position {p} is not inside the word (1..{})", width - 1),
                    ));
                }
                if !(p as usize).is_multiple_of(block) {
                    return Err(src.error(
                        &path,
                        format!("position {p} is not on a block boundary (block is {block})"),
                    ));
                }
                if out.contains(&(p as usize)) {
                    return Err(src.error(&path, format!("position {p} is given twice")));
                }
                out.push(p as usize);
            }
            out.sort_unstable();
            out
        }
    };
    Ok(Buffers {
        positions,
        inverting: raw.inverting.unwrap_or(true),
        fanout: None,
    })
}

/// Words a generated name must not be: Verilog-2005 and SystemVerilog keywords, and words
/// that SPICE decks treat specially (ngspice manual; common practice).
const RESERVED: &[&str] = &[
    // IEEE 1364-2005 keywords
    "always",
    "and",
    "assign",
    "automatic",
    "begin",
    "buf",
    "bufif0",
    "bufif1",
    "case",
    "casex",
    "casez",
    "cell",
    "cmos",
    "config",
    "deassign",
    "default",
    "defparam",
    "design",
    "disable",
    "edge",
    "else",
    "end",
    "endcase",
    "endconfig",
    "endfunction",
    "endgenerate",
    "endmodule",
    "endprimitive",
    "endspecify",
    "endtable",
    "endtask",
    "event",
    "for",
    "force",
    "forever",
    "fork",
    "function",
    "generate",
    "genvar",
    "highz0",
    "highz1",
    "if",
    "ifnone",
    "incdir",
    "include",
    "initial",
    "inout",
    "input",
    "instance",
    "integer",
    "join",
    "large",
    "liblist",
    "library",
    "localparam",
    "macromodule",
    "medium",
    "module",
    "nand",
    "negedge",
    "nmos",
    "nor",
    "noshowcancelled",
    "not",
    "notif0",
    "notif1",
    "or",
    "output",
    "parameter",
    "pmos",
    "posedge",
    "primitive",
    "pull0",
    "pull1",
    "pulldown",
    "pullup",
    "pulsestyle_onevent",
    "pulsestyle_ondetect",
    "rcmos",
    "real",
    "realtime",
    "reg",
    "release",
    "repeat",
    "rnmos",
    "rpmos",
    "rtran",
    "rtranif0",
    "rtranif1",
    "scalared",
    "showcancelled",
    "signed",
    "small",
    "specify",
    "specparam",
    "strong0",
    "strong1",
    "supply0",
    "supply1",
    "table",
    "task",
    "time",
    "tran",
    "tranif0",
    "tranif1",
    "tri",
    "tri0",
    "tri1",
    "triand",
    "trior",
    "trireg",
    "unsigned",
    "use",
    "uwire",
    "vectored",
    "wait",
    "wand",
    "weak0",
    "weak1",
    "while",
    "wire",
    "wor",
    "xnor",
    "xor",
    // SystemVerilog words that tools reject as names (common practice)
    "bit",
    "logic",
    "byte",
    "int",
    "shortint",
    "longint",
    "string",
    "class",
    "interface",
    "package",
    "program",
    "property",
    "sequence",
    "type",
    "void",
    "enum",
    "struct",
    "union",
    "typedef",
    "import",
    "export",
    "final",
    "unique",
    "priority",
    "alias",
    "chandle",
    "const",
    "context",
    "cover",
    "dist",
    "do",
    "extends",
    "extern",
    "local",
    "new",
    "null",
    "packed",
    "protected",
    "pure",
    "rand",
    "randc",
    "ref",
    "return",
    "static",
    "super",
    "this",
    "var",
    "virtual",
    "with",
    // The rest of the IEEE 1800-2017 keywords (Verilator reads .v files as SystemVerilog)
    "accept_on",
    "always_comb",
    "always_ff",
    "always_latch",
    "assert",
    "assume",
    "before",
    "bind",
    "bins",
    "binsof",
    "break",
    "checker",
    "clocking",
    "constraint",
    "continue",
    "covergroup",
    "coverpoint",
    "cross",
    "endchecker",
    "endclass",
    "endclocking",
    "endgroup",
    "endinterface",
    "endpackage",
    "endprogram",
    "endproperty",
    "endsequence",
    "eventually",
    "expect",
    "first_match",
    "forkjoin",
    "iff",
    "ignore_bins",
    "illegal_bins",
    "implements",
    "implies",
    "inside",
    "interconnect",
    "intersect",
    "join_any",
    "join_none",
    "let",
    "matches",
    "modport",
    "nettype",
    "nexttime",
    "randcase",
    "randsequence",
    "reject_on",
    "restrict",
    "s_always",
    "s_eventually",
    "s_nexttime",
    "s_until",
    "s_until_with",
    "shortreal",
    "soft",
    "solve",
    "strong",
    "sync_accept_on",
    "sync_reject_on",
    "tagged",
    "throughout",
    "timeprecision",
    "timeunit",
    "unique0",
    "until",
    "until_with",
    "untyped",
    "wait_order",
    "weak",
    "wildcard",
    "within",
    // The top module's own port names (a module may not share a name with its port)
    "a",
    "b",
    "cin",
    "s",
    "cout",
    "clk",
    // SPICE / ngspice words (ngspice manual)
    "subckt",
    "ends",
    "model",
    "control",
    "endc",
    "param",
    "lib",
    "endl",
    "tran",
    "op",
    "dc",
    "ac",
    "meas",
    "measure",
    "print",
    "plot",
    "run",
    "quit",
    "options",
    "option",
    "global",
    "temp",
    "gnd",
    "vdd",
    "vss",
];

/// A name is a plain identifier, not a keyword of either view, short enough for tools.
pub fn check_identifier(name: &str) -> std::result::Result<(), String> {
    let mut chars = name.chars();
    let ok_first = matches!(chars.next(), Some(c) if c.is_ascii_alphabetic() || c == '_');
    if !ok_first || !name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_') {
        return Err(format!(
            "`{}` is not a plain identifier ([A-Za-z_][A-Za-z0-9_]*)",
            printable(name)
        ));
    }
    if name.len() > 48 {
        return Err(format!("`{name}` is longer than 48 characters"));
    }
    if RESERVED.contains(&name.to_ascii_lowercase().as_str()) {
        return Err(format!(
            "`{name}` is a Verilog or SPICE keyword or one of the top module's ports; choose another name"
        ));
    }
    Ok(())
}

/// A device model or library section name as SPICE prints it: a plain word.
pub fn check_spice_word(name: &str) -> std::result::Result<(), String> {
    let mut chars = name.chars();
    let ok_first = matches!(chars.next(), Some(c) if c.is_ascii_alphabetic() || c == '_');
    if !ok_first
        || !name
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || "_.-".contains(c))
        || name.len() > 64
    {
        return Err(format!(
            "`{}` is not a plain SPICE name ([A-Za-z_][A-Za-z0-9_.-]*, at most 64 characters)",
            printable(name)
        ));
    }
    if matches!(
        name.to_ascii_lowercase().as_str(),
        "control" | "endc" | "end" | "ends" | "subckt"
    ) {
        return Err(format!("`{name}` is a SPICE control word"));
    }
    Ok(())
}

/// A path that will be printed into a SPICE deck: no characters that could end a line,
/// open a quote or start a new card.
pub fn check_path_text(p: &str) -> std::result::Result<(), String> {
    if p.is_empty() {
        return Err("the path is empty".into());
    }
    if let Some(c) = p
        .chars()
        .find(|c| c.is_control() || c.is_whitespace() || "\"'`;$*{}".contains(*c))
    {
        return Err(format!(
            "the path contains {:?}, which cannot be written into a SPICE deck safely",
            c
        ));
    }
    if p.to_ascii_lowercase().contains(".control") || p.to_ascii_lowercase().contains(".endc") {
        return Err("the path contains a SPICE control word".into());
    }
    Ok(())
}

/// A number for a message: plain when it is of ordinary size, else in exponent form.
fn short_num(v: f64) -> String {
    if v != 0.0 && (v.abs() < 1e-3 || v.abs() >= 1e6) {
        format!("{v:e}")
    } else {
        format!("{v}")
    }
}

/// Show untrusted text in a message on one line.
pub fn printable(s: &str) -> String {
    let mut out: String = s.chars().take(60).flat_map(|c| c.escape_debug()).collect();
    if s.chars().count() > 60 {
        out.push_str("...");
    }
    out
}

/// Parse `10f`, `5n`, `2.5ns`, `1e-14` or a bare number into a value in SI base units.
pub fn parse_quantity(v: &serde_yaml::Value, unit: char) -> std::result::Result<f64, String> {
    let text = match v {
        serde_yaml::Value::Number(n) => {
            return n
                .as_f64()
                .filter(|x| x.is_finite())
                .ok_or_else(|| "not a finite number".to_string())
        }
        serde_yaml::Value::String(s) => s.trim().to_string(),
        _ => return Err("expected a number with an optional suffix such as 10f or 5n".to_string()),
    };
    let lower = text.to_ascii_lowercase();
    let unit_l = unit.to_ascii_lowercase();
    // Drop a trailing unit letter (`5ns`, `10fF`), but read a lone `f` as femto, as SPICE does.
    let scale_letter = |c: Option<char>| matches!(c, Some('f' | 'p' | 'n' | 'u' | 'm'));
    let body = match lower.strip_suffix(unit_l) {
        Some(rest) if !scale_letter(Some(unit_l)) || scale_letter(rest.chars().last()) => rest,
        _ => &lower,
    };
    let (num, scale) = match body.chars().last() {
        Some('f') => (&body[..body.len() - 1], 1e-15),
        Some('p') => (&body[..body.len() - 1], 1e-12),
        Some('n') => (&body[..body.len() - 1], 1e-9),
        Some('u') => (&body[..body.len() - 1], 1e-6),
        Some('m') => (&body[..body.len() - 1], 1e-3),
        _ => (body, 1.0),
    };
    match num.parse::<f64>() {
        Ok(x) if x.is_finite() => Ok(x * scale),
        _ => Err(format!(
            "`{}` is not a quantity such as 10f or 5n",
            printable(&text)
        )),
    }
}

/// Print a value with an SI suffix, e.g. 1e-14 → `10f` (for messages and SPICE cards).
pub fn fmt_si(x: f64, unit: char) -> String {
    let _ = unit;
    if x == 0.0 {
        return "0".into();
    }
    let table = [
        (1e-15, "f"),
        (1e-12, "p"),
        (1e-9, "n"),
        (1e-6, "u"),
        (1e-3, "m"),
        (1.0, ""),
    ];
    let mut best = table[0];
    for t in table {
        if x.abs() >= t.0 * 0.9999999 {
            best = t;
        }
    }
    let v = x / best.0;
    format!("{}{}", trim_num(v), best.1)
}

/// A number printed with at most six significant decimals and no trailing zeros.
pub fn trim_num(v: f64) -> String {
    let s = format!("{:.6}", v);
    let s = s.trim_end_matches('0').trim_end_matches('.');
    if s == "-0" {
        "0".into()
    } else {
        s.to_string()
    }
}
