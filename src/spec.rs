//! The YAML spec: serde types, validation, and errors that name the key path and line.
//!
//! Parsing happens in two steps. serde (with `deny_unknown_fields`) turns the text into
//! raw values and reports type errors with the key path and line; then `validate` checks
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
    /// `buffers: auto`: the positions were chosen by the timing engine (`passes::buffers`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub auto: Option<AutoBuffers>,
    /// `buffers: auto` on a prefix network: the fan-out threshold the engine chose.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub auto_fanout: Option<AutoFanout>,
}

/// How `buffers: auto` chose a prefix network's fan-out buffers, for the reports.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct AutoFanout {
    pub rule: &'static str,
    /// The engine's worst path with the chosen threshold and with no fan-out buffers (ps).
    pub worst_ps: f64,
    pub unbuffered_ps: f64,
    /// Every threshold tried and its worst path: (fanout, ps); 0 stands for none.
    pub tried: Vec<(usize, f64)>,
}

impl Sizing {
    /// The default sizes on a unit width and P/N ratio: keeper 0.1, buffers 2×, every role
    /// multiplier 1, no input limit.
    pub fn with_unit(unit_n: f64, pn_ratio: f64) -> Sizing {
        Sizing {
            unit_n,
            pn_ratio,
            keeper: 0.1,
            buffer: 2.0,
            pass: 1.0,
            generate: 1.0,
            precharge: 1.0,
            output: 1.0,
            carry: 1.0,
            fanout: true,
            taper: 1.0,
            input_cap: None,
            auto: None,
        }
    }
}

/// How `buffers: auto` chose, for the reports.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct AutoBuffers {
    pub rule: &'static str,
    /// The model's cin → cout with the chosen buffers, and with none (None: the unbuffered
    /// chain never completes in the model, its keepers hold it), ps.
    pub cin_cout_ps: f64,
    pub unbuffered_ps: Option<f64>,
    /// Dynamic style: the longest chain the keeper check lets through, where it is shorter
    /// than the word.
    pub longest_segment: Option<usize>,
}

/// How `block: auto` chose, for the reports (the block model's worst arrivals, ps).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct AutoBlocks {
    pub rule: &'static str,
    /// The model's worst arrival (any sum or cout) with the chosen sizes.
    pub worst_ps: f64,
    /// The best uniform block size in the same model, and its worst arrival.
    pub best_uniform_block: usize,
    pub best_uniform_ps: f64,
    /// Dynamic carry-skip: the longest chain the keeper check lets through, where that
    /// limited the sizes.
    pub longest_block: Option<usize>,
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
    /// Role multipliers on the cells' own widths: carry-path pass devices (and dynamic chain
    /// starts), generate/kill devices (and footers) of chain cells, precharge devices, and
    /// the output inverter of every sum.
    pub pass: f64,
    pub generate: f64,
    pub precharge: f64,
    pub output: f64,
    /// Prefix cells (grey, black) as a whole and the full adder's carry half.
    pub carry: f64,
    /// Prefix cells sized by their fan-out (`arch::prefix::size_by_fanout`); off: every grey
    /// and black cell at drive 1.
    pub fanout: bool,
    /// Manchester chains (manchester, carry-skip): the drive of each segment's first chain
    /// cell over its last, 1 (no taper) to 4; the cells between follow a geometric taper,
    /// rounded to the levels of `cells::TAPER_DRIVES` (`arch::manchester::taper_levels`).
    pub taper: f64,
    /// The most capacitance any one input (a, b, cin) may present, farads.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub input_cap: Option<f64>,
    /// `sizing: auto`: what the search chose (`passes::sizing`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub auto: Option<AutoSizing>,
}

/// How `sizing: auto` chose, for the reports.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct AutoSizing {
    pub rule: &'static str,
    /// The engine's worst path and total device width with the default sizes and with the
    /// chosen ones.
    pub default_worst_ps: f64,
    pub worst_ps: f64,
    pub default_width_um: f64,
    pub width_um: f64,
    /// The limits the search kept: total width (µm) and the largest input capacitance (fF).
    pub width_limit_um: f64,
    pub input_cap_limit_ff: f64,
    /// Designs the search estimated.
    pub evaluated: usize,
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
    /// Buffered needs the technology's characterised timing; without it the deck uses
    /// ideal sources (see [`Testbench::buffered`]).
    pub drivers: Drivers,
}

impl Testbench {
    /// The deck drives its inputs through inverter chains (`drivers: buffered`, and the
    /// technology characterised).
    pub fn buffered(&self, t: &crate::tech::Technology) -> bool {
        self.drivers == Drivers::Buffered && t.timing.is_some()
    }
}

/// A validated spec. Every field is safe to print into Verilog or SPICE.
#[derive(Debug, Clone)]
pub struct Spec {
    pub name: String,
    pub width: usize,
    pub architecture: Architecture,
    pub style: Style,
    pub block: usize,
    /// Explicit block sizes, least significant first: carry-select (uniform or square-root)
    /// and `block: auto` (carry-skip, carry-select).
    pub block_sizes: Option<Vec<usize>>,
    /// How `block` was chosen when the spec said `sqrt` or `auto`.
    pub block_rule: Option<&'static str>,
    /// `block: auto`: what the timing engine's block model found (`passes::blocks`).
    pub block_auto: Option<AutoBlocks>,
    pub buffers: Buffers,
    pub technology: Technology,
    pub sizing: Sizing,
    pub parasitics: Parasitics,
    pub testbench: Testbench,
    /// The spec's label and text, to locate keys in errors found after validation.
    pub source: Option<(String, String)>,
}

impl Spec {
    /// Bit ranges [lo, hi) of the blocks, least significant first: the explicit sizes
    /// (carry-select, `block: auto`) or uniform blocks of `block` bits, the last one shorter
    /// when `block` does not divide the width.
    pub fn block_ranges(&self) -> Vec<(usize, usize)> {
        match &self.block_sizes {
            Some(sizes) => ranges_of(sizes),
            None => crate::arch::manchester::blocks(self.width, self.block),
        }
    }
}

/// Bit ranges [lo, hi) of consecutive blocks of the given sizes.
pub fn ranges_of(sizes: &[usize]) -> Vec<(usize, usize)> {
    let mut lo = 0;
    sizes
        .iter()
        .map(|&s| {
            lo += s;
            (lo - s, lo)
        })
        .collect()
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
    /// Corner, temperature and supply (see `tech::Technology::apply_conditions`).
    #[serde(default)]
    conditions: Option<tech::RawConditions>,
    #[serde(default)]
    sizing: Option<SizingKey>,
    #[serde(default)]
    parasitics: Option<RawParasitics>,
    #[serde(default)]
    testbench: Option<RawTestbench>,
}

#[derive(Deserialize, Default)]
#[serde(deny_unknown_fields)]
struct RawSizing {
    mode: Option<String>,
    unit_n: Option<Written>,
    pn_ratio: Option<Written>,
    keeper: Option<Written>,
    buffer: Option<Written>,
    pass: Option<Written>,
    generate: Option<Written>,
    precharge: Option<Written>,
    output: Option<Written>,
    carry: Option<Written>,
    fanout: Option<bool>,
    taper: Option<Written>,
    input_cap: Option<Written>,
}

#[derive(Deserialize, Default)]
#[serde(deny_unknown_fields)]
struct RawParasitics {
    wire_per_bit: Option<Written>,
}

/// Parasitics the netlist carries beyond its devices.
#[derive(Debug, Clone, Default, PartialEq, serde::Serialize)]
pub struct Parasitics {
    /// Wire capacitance per bit pitch (farads): every net gets this times its length in bit
    /// pitches (`netlist::Design::wire_spans`), in the SPICE view and in the timing engine.
    pub wire_per_bit: f64,
}

/// `sizing:` as written: `auto`, or a mapping of sizes.
enum SizingKey {
    Auto,
    Sizes(Box<RawSizing>),
}

impl<'de> Deserialize<'de> for SizingKey {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> std::result::Result<Self, D::Error> {
        struct V;
        impl<'de> serde::de::Visitor<'de> for V {
            type Value = SizingKey;
            fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
                f.write_str("auto or a mapping of sizes")
            }
            fn visit_str<E: serde::de::Error>(self, v: &str) -> std::result::Result<SizingKey, E> {
                if v == "auto" {
                    Ok(SizingKey::Auto)
                } else {
                    Err(E::invalid_value(serde::de::Unexpected::Str(v), &self))
                }
            }
            fn visit_map<M: serde::de::MapAccess<'de>>(
                self,
                m: M,
            ) -> std::result::Result<SizingKey, M::Error> {
                RawSizing::deserialize(serde::de::value::MapAccessDeserializer::new(m))
                    .map(|r| SizingKey::Sizes(Box::new(r)))
            }
        }
        d.deserialize_any(V)
    }
}

/// A number or quantity as written in the spec. Kept as text so that a value the machine
/// cannot hold (`1e-400` would become 0, `1e400` infinity) is refused, not silently changed.
#[derive(Debug, Clone)]
struct Written(String);

impl<'de> Deserialize<'de> for Written {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> std::result::Result<Self, D::Error> {
        struct V;
        impl serde::de::Visitor<'_> for V {
            type Value = Written;
            fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
                f.write_str("a number")
            }
            fn visit_str<E: serde::de::Error>(self, v: &str) -> std::result::Result<Written, E> {
                Ok(Written(v.to_string()))
            }
            fn visit_f64<E: serde::de::Error>(self, v: f64) -> std::result::Result<Written, E> {
                Ok(Written(format!("{v:e}")))
            }
            fn visit_i64<E: serde::de::Error>(self, v: i64) -> std::result::Result<Written, E> {
                Ok(Written(v.to_string()))
            }
            fn visit_u64<E: serde::de::Error>(self, v: u64) -> std::result::Result<Written, E> {
                Ok(Written(v.to_string()))
            }
        }
        d.deserialize_str(V)
    }
}

/// Read a plain number as written, refusing one that does not survive as an `f64`.
fn read_number(text: &str) -> std::result::Result<f64, String> {
    let t = text.trim();
    match t.parse::<f64>() {
        Ok(x) if !x.is_finite() => Err(format!("`{}` is not a finite number", printable(t))),
        Ok(x) => {
            check_no_underflow(t, x)?;
            Ok(x)
        }
        Err(_) => Err(format!("`{}` is not a number", printable(t))),
    }
}

/// A written number with a non-zero digit must not have become 0.
fn check_no_underflow(text: &str, x: f64) -> std::result::Result<(), String> {
    let mantissa = text.split(['e', 'E']).next().unwrap_or(text);
    if x == 0.0 && mantissa.chars().any(|c| ('1'..='9').contains(&c)) {
        return Err(format!(
            "`{}` is too small to represent (it would become 0); write 0 if you mean 0",
            printable(text)
        ));
    }
    Ok(())
}

#[derive(Deserialize, Default)]
#[serde(deny_unknown_fields)]
struct RawTestbench {
    random: Option<i64>,
    seed: Option<u64>,
    load: Option<Written>,
    period: Option<Written>,
    step: Option<Written>,
    drivers: Option<Drivers>,
}

/// How the deck drives the adder's inputs and clock.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Drivers {
    /// Through tapered inverter chains on supplies of their own (`timing::drivers`).
    Buffered,
    /// Ideal sources ramping in the technology's `slew`.
    Ideal,
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
    /// The text is first checked for nesting depth and aliases (refused before the YAML
    /// parser sees them); when serde fails, the text is parsed once more without types to
    /// tell a syntax error from a type error.
    pub fn parse<T: serde::de::DeserializeOwned>(&self) -> Result<T> {
        if self.text.trim().is_empty() {
            return Err(Error::Input(format!("{}: the file is empty", self.label)));
        }
        let scan = scan_nesting(self.text);
        if let Some((l, c)) = scan.too_deep {
            return Err(Error::Input(format!(
                "{}:{l}:{c}: mappings and sequences are nested deeper than {MAX_DEPTH} levels here",
                self.label
            )));
        }
        if let Some((l, c)) = scan.alias {
            // Aliases can expand exponentially (a few lines become gigabytes); no spec needs one.
            return Err(Error::Input(format!(
                "{}:{l}:{c}: aliases (`*name`) are not accepted; write the value out",
                self.label
            )));
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
            let raw = inner.to_string();
            let parent = if path == "." { "" } else { path.as_str() };
            if let Some(key) = duplicate_key_name(&raw) {
                return self.duplicate_error(parent, &key);
            }
            // A syntax error is reported as one, not under the key serde was reading.
            let plain = serde_yaml::Deserializer::from_str(self.text);
            if let Err(syntax) = serde::de::IgnoredAny::deserialize(plain) {
                return self.syntax_error(&syntax, &scan);
            }
            let msg = clean_serde_message(&raw, &path);
            let shown = if parent.is_empty() {
                "top level".to_string()
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

    /// A YAML syntax error: where it is, the key written on that line if any, and for a
    /// bracket left open, where it was opened.
    fn syntax_error(&self, e: &serde_yaml::Error, scan: &Nesting) -> Error {
        let key_at = |line: usize| {
            self.text
                .lines()
                .nth(line.saturating_sub(1))
                .and_then(key_on_line)
                .map(|k| format!("{k}: "))
                .unwrap_or_default()
        };
        let raw = e.to_string();
        let mut msg = clean_serde_message(&raw, "");
        if let (Some((l, c, ch)), true) = (scan.unclosed, msg.contains("did not find expected")) {
            return Error::Input(format!(
                "{}:{l}:{c}: {}syntax error: this `{ch}` is never closed",
                self.label,
                key_at(l)
            ));
        }
        // Errors of the YAML reader (control characters, bad encoding) give a byte offset.
        let mut at = e.location().map(|loc| (loc.line(), loc.column()));
        if let Some((head, tail)) = msg.split_once(" at position ") {
            if let Ok(offset) = tail.trim().parse::<usize>() {
                at = Some(line_col(self.text, offset));
                msg = head.to_string();
            }
        }
        match at {
            Some((l, c)) => Error::Input(format!(
                "{}:{l}:{c}: {}syntax error: {msg}",
                self.label,
                key_at(l)
            )),
            None => Error::Input(format!("{}: syntax error: {msg}", self.label)),
        }
    }

    /// A key given twice: reported where it is given the second time.
    fn duplicate_error(&self, parent: &str, key: &str) -> Error {
        let hits = key_occurrences(self.text, parent, key);
        let path = if parent.is_empty() {
            key.to_string()
        } else {
            format!("{parent}.{key}")
        };
        match (hits.first(), hits.get(1)) {
            (Some(first), Some((l, c))) => Error::Input(format!(
                "{}:{l}:{c}: {path}: given twice (first on line {})",
                self.label, first.0
            )),
            _ => self.error(&path, "given twice"),
        }
    }
}

/// Line and column (from 1) of a byte offset in `text`.
fn line_col(text: &str, offset: usize) -> (usize, usize) {
    let mut end = offset.min(text.len());
    while !text.is_char_boundary(end) {
        end -= 1;
    }
    let before = &text[..end];
    let line = before.matches('\n').count() + 1;
    let col = before.chars().rev().take_while(|&c| c != '\n').count() + 1;
    (line, col)
}

/// The key named by serde's duplicate-key message, if that is what it is.
fn duplicate_key_name(msg: &str) -> Option<String> {
    if let Some((_, rest)) = msg.split_once("duplicate field `") {
        return rest.split('`').next().map(printable);
    }
    if let Some((_, rest)) = msg.split_once("duplicate entry with key ") {
        let key = rest.split(" at line ").next().unwrap_or(rest);
        return Some(printable(key.trim_matches('"')));
    }
    None
}

/// The plain key a line starts with (`  - width: 8` gives `width`), if any.
fn key_on_line(line: &str) -> Option<String> {
    let t = line.trim_start_matches([' ', '\t', '-']);
    let (k, _) = t.split_once(':')?;
    let k = k.trim_end();
    (!k.is_empty() && k.chars().all(|c| c.is_ascii_alphanumeric() || c == '_'))
        .then(|| k.to_string())
}

/// Where `key:` is written inside the mapping at dotted `parent` ("" for the top level):
/// block style on its own line, or flow style after `{` or `,`.
fn key_occurrences(text: &str, parent: &str, key: &str) -> Vec<(usize, usize)> {
    let lines: Vec<&str> = text.lines().collect();
    let indent_of = |l: &str| l.len() - l.trim_start().len();
    let (start, parent_indent) = if parent.is_empty() {
        (0, None)
    } else {
        match locate(text, parent) {
            Some((l, _)) => (l - 1, Some(indent_of(lines[l - 1]))),
            None => return vec![],
        }
    };
    let pat = format!("{key}:");
    let mut hits = vec![];
    for (i, line) in lines.iter().enumerate().skip(start) {
        let t = line.trim_start();
        if t.is_empty() || t.starts_with('#') {
            continue;
        }
        let indent = indent_of(line);
        match parent_indent {
            Some(pi) if i > start && indent <= pi => break,
            None if indent != 0 => continue,
            _ => {}
        }
        let own_line = i > start || parent_indent.is_none();
        if own_line && (t.starts_with(&pat) || t.starts_with(&format!("{key} :"))) {
            hits.push((i + 1, indent + 1));
        }
        // Flow style: `{a: 1, a: 2}`.
        let mut from = 0;
        while let Some(j) = line[from..].find(&pat) {
            let at = from + j;
            let before = line[..at].trim_end().chars().last();
            if matches!(before, Some('{' | ',')) {
                hits.push((i + 1, at + 1));
            }
            from = at + pat.len();
        }
    }
    hits
}

/// Largest spec or technology file read: 1 MiB (a real one is well under 4 KiB).
pub const MAX_SOURCE_BYTES: u64 = 1 << 20;

/// Deepest nesting of mappings and sequences accepted (a spec needs 3). The YAML parser
/// takes time growing with the square of the depth, so deeper text is refused before it runs.
pub const MAX_DEPTH: usize = 32;

/// What a quick scan of YAML text found about its nesting.
struct Nesting {
    /// Where the nesting first went deeper than [`MAX_DEPTH`].
    too_deep: Option<(usize, usize)>,
    /// The innermost `[` or `{` still open at the end of the text.
    unclosed: Option<(usize, usize, char)>,
    /// The first alias (`*name`).
    alias: Option<(usize, usize)>,
}

/// Scan YAML text for nesting depth: flow brackets (outside quoted scalars and comments)
/// plus block levels (indentation steps and `- ` / `? ` indicators). Errs on the deep side:
/// a quote the parser would read as plain text only makes the count larger.
fn scan_nesting(text: &str) -> Nesting {
    let mut flow: Vec<(usize, usize, char)> = Vec::new();
    let mut indents: Vec<usize> = Vec::new();
    let mut block = 0usize;
    let mut quote: Option<char> = None;
    let mut comment = false;
    let mut alias = None;
    let mut prev = '\n';
    let (mut line, mut col) = (1usize, 0usize);
    let mut at_line_start = true;
    let bytes: Vec<char> = text.chars().collect();
    let mut i = 0;
    while i < bytes.len() {
        let c = bytes[i];
        col += 1;
        if at_line_start && quote.is_none() && flow.is_empty() {
            // Indentation, then any `- ` or `? ` indicators, each one level deeper.
            let mut j = i;
            while j < bytes.len() && bytes[j] == ' ' {
                j += 1;
            }
            let indent = j - i;
            let mut marks = 0;
            while j + 1 < bytes.len() && matches!(bytes[j], '-' | '?') && bytes[j + 1] == ' ' {
                marks += 1;
                j += 2;
                while j < bytes.len() && bytes[j] == ' ' {
                    j += 1;
                }
            }
            let blank = marks == 0 && (j >= bytes.len() || matches!(bytes[j], '\n' | '\r' | '#'));
            if !blank {
                while indents.last().is_some_and(|&t| t >= indent) {
                    indents.pop();
                }
                indents.push(indent);
                block = indents.len() + marks;
                if block > MAX_DEPTH {
                    return Nesting {
                        too_deep: Some((line, indent + 1)),
                        unclosed: None,
                        alias: None,
                    };
                }
            }
        }
        at_line_start = false;
        if c == '\n' {
            line += 1;
            col = 0;
            comment = false;
            at_line_start = true;
            prev = '\n';
            i += 1;
            continue;
        }
        if comment {
            i += 1;
            continue;
        }
        match quote {
            Some('"') => {
                if c == '\\' {
                    i += 1;
                    col += 1;
                } else if c == '"' {
                    quote = None;
                }
            }
            Some(_) => {
                if c == '\'' {
                    if bytes.get(i + 1) == Some(&'\'') {
                        i += 1;
                        col += 1;
                    } else {
                        quote = None;
                    }
                }
            }
            None => {
                let token_start = prev.is_whitespace() || "[{,:?-".contains(prev);
                match c {
                    '#' if prev.is_whitespace() => comment = true,
                    '"' | '\'' if token_start => quote = Some(c),
                    '*' if token_start && alias.is_none() => alias = Some((line, col)),
                    // Outside flow, a bracket opens one only where a value starts.
                    '[' | '{' if token_start || !flow.is_empty() => {
                        flow.push((line, col, c));
                        if block + flow.len() > MAX_DEPTH {
                            return Nesting {
                                too_deep: Some((line, col)),
                                unclosed: None,
                                alias: None,
                            };
                        }
                    }
                    ']' | '}' => {
                        flow.pop();
                    }
                    _ => {}
                }
            }
        }
        prev = c;
        i += 1;
    }
    Nesting {
        too_deep: None,
        unclosed: flow.last().copied(),
        alias,
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
    let label = shown_path(path);
    let text = read_source(path, "spec")?;
    let base = path.parent().unwrap_or(Path::new("."));
    parse(&text, &label, base, opts)
}

/// Read a spec or technology file (`what` names it in messages): only a regular file, at
/// most [`MAX_SOURCE_BYTES`], UTF-8 text. A FIFO, a device or a folder is refused without
/// being read.
pub fn read_source(path: &Path, what: &str) -> Result<String> {
    read_source_capped(path, what, MAX_SOURCE_BYTES)
}

/// [`read_source`] with another size cap (a netlist is larger than a spec).
pub fn read_source_capped(path: &Path, what: &str, cap: u64) -> Result<String> {
    let label = shown_path(path);
    let cannot = |e: std::io::Error| Error::Input(format!("{label}: cannot read the {what}: {e}"));
    let meta = std::fs::metadata(path).map_err(cannot)?;
    if !meta.is_file() {
        return Err(Error::Input(format!(
            "{label}: the {what} is not a regular file"
        )));
    }
    if meta.len() > cap {
        return Err(too_large(&label, what, cap));
    }
    let file = std::fs::File::open(path).map_err(cannot)?;
    read_capped(file, &label, what, cap)
}

/// Read a spec from standard input, with the same size cap (label `<stdin>`).
pub fn read_stdin(what: &str) -> Result<String> {
    read_capped(std::io::stdin().lock(), STDIN_LABEL, what, MAX_SOURCE_BYTES)
}

/// How standard input is named in messages.
pub const STDIN_LABEL: &str = "<stdin>";

fn too_large(label: &str, what: &str, cap: u64) -> Error {
    Error::Input(format!(
        "{label}: the {what} is larger than {} KiB",
        cap / 1024
    ))
}

fn read_capped(reader: impl std::io::Read, label: &str, what: &str, cap: u64) -> Result<String> {
    use std::io::Read;
    let mut bytes = Vec::new();
    reader
        .take(cap + 1)
        .read_to_end(&mut bytes)
        .map_err(|e| Error::Input(format!("{label}: cannot read the {what}: {e}")))?;
    if bytes.len() as u64 > cap {
        return Err(too_large(label, what, cap));
    }
    String::from_utf8(bytes).map_err(|e| {
        Error::Input(format!(
            "{label}: the {what} is not UTF-8 text (bad byte at offset {})",
            e.utf8_error().valid_up_to()
        ))
    })
}

/// A path for a message: control characters escaped, so it stays on one line.
pub fn shown_path(p: &Path) -> String {
    escape_controls(&p.to_string_lossy())
}

/// Text with its control characters escaped (`\n`, `\u{1b}`), everything else as is.
pub fn escape_controls(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        if c.is_control() {
            out.extend(c.escape_default());
        } else {
            out.push(c);
        }
    }
    out
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
        Some(serde_yaml::Value::String(t)) if t == "auto" => match architecture {
            // Chosen once the rest of the spec is known (`passes::blocks`); until then the
            // closed-form size stands in.
            Architecture::CarrySkip => {
                ((width as f64 / 2.0).sqrt().round() as usize).clamp(1, width)
            }
            Architecture::CarrySelect => width.min(4),
            other => {
                return Err(src.error(
                    "block",
                    format!(
                        "`auto` chooses block sizes for carry-skip and carry-select, not {}",
                        other.as_str()
                    ),
                ))
            }
        },
        Some(_) => {
            return Err(src.error("block", "expected a positive integer, `sqrt` or `auto`"));
        }
    };
    let auto_blocks = matches!(&raw.block, Some(serde_yaml::Value::String(t)) if t == "auto");
    if architecture == Architecture::CarrySelect && block_sizes.is_none() {
        block_sizes = Some(crate::arch::select::sizes(width, block, false));
    }

    let buffers = parse_buffers(raw.buffers.as_ref(), src, width, block, architecture, style)?;
    let auto_buffers = matches!(&raw.buffers, Some(serde_yaml::Value::String(s)) if s == "auto");

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
                        format!("technology file {} not found", shown_path(&path)),
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

    let mut technology = technology;
    if let Some(c) = &raw.conditions {
        technology
            .apply_conditions(&c.to_conditions())
            .map_err(|(k, m)| src.error(&format!("conditions.{k}"), m))?;
    }

    let rs: RawSizing = match raw.sizing {
        None => RawSizing::default(),
        Some(SizingKey::Auto) => RawSizing {
            mode: Some("auto".into()),
            ..RawSizing::default()
        },
        Some(SizingKey::Sizes(r)) => *r,
    };
    let auto_sizing = match rs.mode.as_deref() {
        None | Some("manual") => false,
        Some("auto") => true,
        Some(other) => {
            return Err(src.error(
                "sizing.mode",
                format!("expected auto or manual, got `{}`", printable(other)),
            ))
        }
    };
    let number = |key: &str, v: &Option<Written>, default: f64| -> Result<f64> {
        match v {
            None => Ok(default),
            Some(w) => read_number(&w.0).map_err(|m| src.error(&format!("sizing.{key}"), m)),
        }
    };
    let d = Sizing::with_unit(technology.unit_n, technology.pn_ratio);
    let sizing = Sizing {
        unit_n: number("unit_n", &rs.unit_n, d.unit_n)?,
        pn_ratio: number("pn_ratio", &rs.pn_ratio, d.pn_ratio)?,
        keeper: number("keeper", &rs.keeper, d.keeper)?,
        buffer: number("buffer", &rs.buffer, d.buffer)?,
        pass: number("pass", &rs.pass, d.pass)?,
        generate: number("generate", &rs.generate, d.generate)?,
        precharge: number("precharge", &rs.precharge, d.precharge)?,
        output: number("output", &rs.output, d.output)?,
        carry: number("carry", &rs.carry, d.carry)?,
        fanout: rs.fanout.unwrap_or(d.fanout),
        taper: number("taper", &rs.taper, d.taper)?,
        input_cap: match &rs.input_cap {
            None => None,
            Some(w) => {
                Some(parse_quantity_text(&w.0, 'F').map_err(|m| src.error("sizing.input_cap", m))?)
            }
        },
        auto: None,
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
    for (key, v) in [
        ("pass", sizing.pass),
        ("generate", sizing.generate),
        ("precharge", sizing.precharge),
        ("output", sizing.output),
        ("carry", sizing.carry),
    ] {
        in_range(key, v, 0.25, 16.0)?;
    }
    in_range("taper", sizing.taper, 1.0, 4.0)?;
    if rs.taper.is_some()
        && !matches!(
            architecture,
            Architecture::Manchester | Architecture::CarrySkip
        )
    {
        return Err(src.error(
            "sizing.taper",
            "tapering sizes Manchester chains; use it with manchester or carry-skip",
        ));
    }
    if let Some(c) = sizing.input_cap {
        if !(c > 0.0 && c <= 1e-9) {
            return Err(src.error(
                "sizing.input_cap",
                format!(
                    "must be above 0 and at most 1n (farads), got {}",
                    short_num(c)
                ),
            ));
        }
    }
    if rs.precharge.is_some() && style == Style::Static {
        return Err(src.error(
            "sizing.precharge",
            "precharge devices belong to dynamic chains; this spec is static",
        ));
    }
    if rs.keeper.is_some() && style == Style::Static {
        return Err(src.error(
            "sizing.keeper",
            "keepers belong to dynamic chains; this spec is static",
        ));
    }

    let rp = raw.parasitics.unwrap_or_default();
    let parasitics = Parasitics {
        wire_per_bit: match &rp.wire_per_bit {
            None => 0.0,
            Some(w) => {
                let c = parse_quantity_text(&w.0, 'F')
                    .map_err(|m| src.error("parasitics.wire_per_bit", m))?;
                if !(c == 0.0 || (1e-18..=100e-15).contains(&c)) {
                    return Err(src.error(
                        "parasitics.wire_per_bit",
                        format!(
                            "must be 0 or between 0.001f and 100f (farads), got {}",
                            short_num(c)
                        ),
                    ));
                }
                c
            }
        },
    };

    let rt = raw.testbench.unwrap_or_default();
    let random = rt.random.unwrap_or(64);
    if !(0..=1_000_000).contains(&random) {
        return Err(src.error(
            "testbench.random",
            format!("must be between 0 and 1000000, got {random}"),
        ));
    }
    let quantity = |key: &str, v: &Option<Written>, unit: char, lo: f64, hi: f64| match v {
        None => Ok(None),
        Some(w) => {
            let path = format!("testbench.{key}");
            let x = parse_quantity_text(&w.0, unit).map_err(|m| src.error(&path, m))?;
            let got = printable(w.0.trim());
            if !(lo..=hi).contains(&x) {
                return Err(src.error(
                    &path,
                    format!(
                        "must be between {} and {}, got {got}",
                        fmt_si(lo, unit),
                        fmt_si(hi, unit)
                    ),
                ));
            }
            // The deck prints the value with an SI suffix and six decimals: refuse a value
            // that would print as something else.
            let shown = fmt_si(x, unit);
            let back = parse_quantity_text(&shown, unit).unwrap_or(f64::NAN);
            if (back - x).abs() > 1e-6 * x.abs() {
                return Err(src.error(
                    &path,
                    format!(
                        "{got} would be printed as {shown} in the deck; give 0 or a value with at most six decimals in its SI unit"
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
                    "must be at least {} for {} style with this technology's input slew, got {}",
                    fmt_si(min, 's'),
                    style.as_str(),
                    fmt_si(p, 's')
                ),
            ));
        }
    }
    if let (Some(p), Some(s)) = (period, step) {
        if s * 20.0 > p {
            return Err(src.error(
                "testbench.step",
                format!(
                    "must be at most 1/20 of testbench.period ({}), got {}",
                    fmt_si(p / 20.0, 's'),
                    fmt_si(s, 's')
                ),
            ));
        }
    }

    let mut spec = Spec {
        name: raw.name,
        width,
        architecture,
        style,
        block,
        block_sizes,
        block_rule,
        block_auto: None,
        buffers,
        technology,
        sizing,
        parasitics,
        testbench: Testbench {
            random: random as usize,
            seed: rt.seed.unwrap_or(1),
            load,
            period,
            step,
            drivers: rt.drivers.unwrap_or(Drivers::Buffered),
        },
        source: Some((src.label.to_string(), src.text.to_string())),
    };
    if auto_blocks {
        let (sizes, how) =
            crate::passes::blocks::choose(&spec).map_err(|m| src.error("block", m))?;
        spec.block = match architecture {
            Architecture::CarrySelect => sizes[0],
            _ => sizes.iter().copied().max().unwrap_or(width),
        };
        spec.block_sizes = Some(sizes);
        spec.block_rule = Some(how.rule);
        spec.block_auto = Some(how);
    }
    if auto_buffers && architecture.is_prefix() {
        let (fanout, how) =
            crate::passes::buffers::choose_fanout(&spec).map_err(|m| src.error("buffers", m))?;
        spec.buffers.fanout = fanout;
        spec.buffers.auto_fanout = Some(how);
    } else if auto_buffers {
        let (positions, how) =
            crate::passes::buffers::choose(&spec).map_err(|m| src.error("buffers", m))?;
        spec.buffers.positions = positions;
        spec.buffers.auto = Some(how);
    } else if raw.buffers.is_none() && unbuffered_chain_fails(&spec)? {
        // With no `buffers` key, a dynamic chain the keeper check refuses unbuffered gets the
        // buffers `auto` would choose; an explicit `buffers: none`, or a chain no buffer
        // positions can save (one block too long), is refused by `build` as before.
        if let Ok((positions, mut how)) = crate::passes::buffers::choose(&spec) {
            how.rule = DEFAULT_DYNAMIC_BUFFERS_RULE;
            spec.buffers.positions = positions;
            spec.buffers.auto = Some(how);
        }
    }
    if auto_sizing {
        spec.sizing = crate::passes::sizing::choose(&spec).map_err(|m| src.error("sizing", m))?;
    }
    Ok(spec)
}

/// How the buffers of a dynamic chain without a `buffers` key were chosen, for the reports.
pub const DEFAULT_DYNAMIC_BUFFERS_RULE: &str = "default for a dynamic chain the keeper check refuses unbuffered (no buffers key): as buffers: auto, dynamic programming over block boundaries on the timing engine's segment delays";

/// A dynamic Manchester chain whose unbuffered form fails the keeper check (a front that
/// stalls or does not fit the evaluate phase at the slow corner).
fn unbuffered_chain_fails(spec: &Spec) -> Result<bool> {
    if spec.style != Style::Dynamic
        || spec.architecture != Architecture::Manchester
        || !spec.buffers.positions.is_empty()
    {
        return Ok(false);
    }
    let d = crate::arch::build(spec);
    Ok(crate::timing::keeper::check(spec, &d)?.is_some_and(|r| r.failure.is_some()))
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
        auto: None,
        auto_fanout: None,
    };
    let v = match v {
        None => return Ok(none),
        Some(serde_yaml::Value::String(s)) if s == "none" => return Ok(none),
        Some(serde_yaml::Value::String(s)) if s == "auto" && arch.is_prefix() => {
            // Chosen once the rest of the spec is resolved (see the end of `parse`).
            return Ok(none);
        }
        Some(serde_yaml::Value::String(s)) if s == "auto" => {
            if arch != Architecture::Manchester {
                return Err(src.error(
                    "buffers",
                    format!(
                        "`auto` places restoring buffers on Manchester chains and fan-out buffers in prefix networks; {} takes {}",
                        arch.as_str(),
                        "none"
                    ),
                ));
            }
            if width <= block {
                return Err(src.error(
                    "buffers",
                    format!("`auto` needs a block boundary inside the {width}-bit word (block is {block})"),
                ));
            }
            // Chosen once the rest of the spec is resolved (see the end of `parse`).
            return Ok(none);
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
        auto: None,
        auto_fanout: None,
    })
}

/// Words a generated name must not be: Verilog-2005 and SystemVerilog keywords, and words
/// that SPICE decks treat specially (ngspice manual; common practice).
const VERILOG_KEYWORDS: &[&str] = &[
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
];

/// The top module's own port names (a module may not share a name with its port).
const PORT_NAMES: &[&str] = &["a", "b", "cin", "s", "cout", "clk"];

/// Words that SPICE decks treat specially (ngspice manual).
const SPICE_WORDS: &[&str] = &[
    "subckt", "ends", "model", "control", "endc", "param", "lib", "endl", "tran", "op", "dc", "ac",
    "meas", "measure", "print", "plot", "run", "quit", "options", "option", "global", "temp",
    "gnd", "vdd", "vss",
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
    let lower = name.to_ascii_lowercase();
    for (list, what) in [
        (
            PORT_NAMES,
            "one of the top module's ports (a, b, cin, s, cout, clk)",
        ),
        (VERILOG_KEYWORDS, "a Verilog or SystemVerilog keyword"),
        (SPICE_WORDS, "a word SPICE decks treat specially"),
    ] {
        if list.contains(&lower.as_str()) {
            return Err(format!("`{name}` is {what}; choose another name"));
        }
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
    match v {
        serde_yaml::Value::Number(n) => n
            .as_f64()
            .filter(|x| x.is_finite())
            .ok_or_else(|| "not a finite number".to_string()),
        serde_yaml::Value::String(s) => parse_quantity_text(s, unit),
        _ => Err("expected a number with an optional suffix such as 10f or 5n".to_string()),
    }
}

/// [`parse_quantity`] on the text as written; a value that cannot be held (it would become
/// 0 or infinity) is refused.
pub fn parse_quantity_text(text: &str, unit: char) -> std::result::Result<f64, String> {
    let text = text.trim().to_string();
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
        Ok(x) if x.is_finite() && (x * scale).is_finite() => {
            check_no_underflow(&text, x * scale)?;
            Ok(x * scale)
        }
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
