//! Timing parameters of a technology, characterised from its own devices in ngspice
//! ([`characterize`]), and the characterised files built into the tool.
//!
//! Every resistance is per µm of device width (kΩ·µm: divide by the width in µm to get kΩ),
//! every capacitance per µm of width (fF/µm). The conditions they hold at (corner,
//! temperature, supply) travel with them: a technology carries its timing only at exactly
//! those conditions.

pub mod characterize;
pub mod drivers;
pub mod engine;
pub mod keeper;
pub mod search;

use crate::tech::Technology;
use serde::{Deserialize, Serialize};

/// Characterised timing parameters (see `characterize` for how each is measured and fitted).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Timing {
    /// Input ramp (0-100 %) of the characterisation circuits, ps.
    pub input_slew_ps: f64,
    /// Widths of the characterised devices, µm (NMOS; PMOS = NMOS × the technology's
    /// pn_ratio), at the technology's minimum length.
    pub n_width_um: f64,
    pub p_width_um: f64,
    /// NMOS pull-down, output falling: effective resistance × width of each device, for a
    /// single device and series stacks of 2 and 3 (equal widths), kΩ·µm.
    pub r_n_fall_kohm_um: [f64; 3],
    /// PMOS pull-up, output rising: likewise, kΩ·µm.
    pub r_p_rise_kohm_um: [f64; 3],
    /// Pass NMOS (gate at VDD) passing a 0 (output falling) and a 1 (rising), kΩ·µm.
    pub r_pass_n_fall_kohm_um: f64,
    pub r_pass_n_rise_kohm_um: f64,
    /// Transmission gate (NMOS of the given width, PMOS pn_ratio wider), falling and
    /// rising, per µm of NMOS width, kΩ·µm.
    pub r_tg_fall_kohm_um: f64,
    pub r_tg_rise_kohm_um: f64,
    /// Gate capacitance per µm of width (charge over a full gate swing, channel ends at
    /// the rail), fF/µm.
    pub c_gate_n_ff_um: f64,
    pub c_gate_p_ff_um: f64,
    /// Drain capacitance of an off device per µm of width (junction and overlap, charge
    /// over a full drain swing), fF/µm.
    pub c_diff_n_ff_um: f64,
    pub c_diff_p_ff_um: f64,
    /// The same for a drain on half of a diffusion shared between two gates in series
    /// ([`crate::tech::End::Shared`]), fF/µm. Absent (older files, technologies without a
    /// diffusion extension): the contacted figure stands in.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub c_diff_shared_n_ff_um: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub c_diff_shared_p_ff_um: Option<f64>,
    /// Gate capacitance per µm of a device with neither channel end at its own rail (a pass
    /// device, a transmission-gate half, the upper devices of a stack): the mean of the gate
    /// charge with the channel's ends at the device's own rail (the channel forms) and at the
    /// other rail (it never does), for data at either value with equal odds, fF/µm. Absent
    /// (older files): the full figure stands in.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub c_gate_pass_n_ff_um: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub c_gate_pass_p_ff_um: Option<f64>,
    /// Fan-out-of-4 inverter delay in a chain of FO4 inverters (mean of rise and fall), ps.
    pub fo4_ps: f64,
    /// Logical effort's τ (slope of inverter delay against electrical fan-out), ps, and the
    /// inverter's parasitic delay in units of τ.
    pub tau_ps: f64,
    pub p_inv: f64,
    /// Transmission gate inside a ladder (fed through another gate, so its source follows a
    /// node that is itself still moving), falling and rising, per µm of NMOS width, kΩ·µm:
    /// fitted on inverter-driven ladders of 4 and 8 gates to the engine's own ladder model.
    /// Absent in older files: the single-gate values stand in.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub r_tg_ladder_fall_kohm_um: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub r_tg_ladder_rise_kohm_um: Option<f64>,
    /// Pass NMOS inside a precharged ladder (fed through another pass device) passing a 0,
    /// per µm of width, kΩ·µm: fitted on inverter-driven, precharged ladders of 4 and 8.
    /// Absent in older files: the single-device value stands in.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub r_pass_ladder_fall_kohm_um: Option<f64>,
    /// Share of the capacitance one pass NMOS further down such a ladder that a node's
    /// crossing sees (the devices ahead conduct only once their source has fallen by a
    /// threshold), 0..1, fitted with `r_pass_ladder_fall_kohm_um`. Absent: 1 (all of it).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub pass_ladder_visible: Option<f64>,
    /// The same share for a transmission gate, falling and rising (a near node of a
    /// transmission-gate ladder crosses before the far nodes' charge has moved), fitted with
    /// `r_tg_ladder_fall/rise_kohm_um`. Absent: 1.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub tg_ladder_visible_fall: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub tg_ladder_visible_rise: Option<f64>,
    /// Input-slope share for a fast input ([`crate::timing::engine::Slope::fast`]): the
    /// delay a stage adds per ps of its input's 10–90 % transition while that is short
    /// against the stage's own step. Fitted on the single-device load sweeps together with
    /// the FO4 (which then sets the slow-input cap). Absent in older files: one share for
    /// both limits, fitted to the FO4 alone.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub slope_fast: Option<f64>,
    /// A stage's output transition (10–90 %) per ps of its step delay, for a fast input:
    /// fitted with `slew_input_share` on an inverter driven by ramps of 40 to 1,280 ps into
    /// 4, 8 and 32 fF. Absent in older files: a single pole's 2.2 × the Elmore delay, the
    /// input's transition not passed on, and the saturating slow-input limit
    /// ([`crate::timing::engine::Slope`]).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub slew_per_step: Option<f64>,
    /// Share of a stage's input transition that its output transition gains (the output
    /// switches while the input is still moving, so its drive is not yet full), 0..1.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub slew_input_share: Option<f64>,
    /// The inverter's switching threshold below mid-supply, as a share of the input's
    /// 10–90 % transition: a falling input reaches it that much later than its 50 % point, a
    /// rising one that much earlier (the delay gains or loses it). Fitted on the same ramps.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub slope_threshold: Option<f64>,
    /// How far the switching threshold moves (as a share of VDD) per unit of the pull-up's
    /// share of the drive, G_p / (G_p + G_n) with G = W / R of the devices an input gates at
    /// each rail: fitted on an inverter with a PMOS three times as wide (a gate skewed to
    /// switch early on a falling input, as a domino stage's reader is). Absent: 0 (every
    /// gate's threshold is the plain inverter's).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub slope_threshold_gain: Option<f64>,
    /// Off-state leakage of an NMOS (gate and source at 0, drain at VDD), nA per µm of width,
    /// for the keeper's holding rule. Absent in older files: the rule is not checked.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub i_off_n_na_um: Option<f64>,
    /// The conditions these values hold at (the file's `conditions:` record).
    #[serde(skip)]
    pub at: At,
}

/// Corner, temperature (°C) and supply (V) of a characterisation.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct At {
    pub corner: String,
    pub temp: f64,
    pub vdd: f64,
    /// Not characterised at `temp` but interpolated between the characterisations at these
    /// two temperatures ([`builtin_timing`]).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub between: Option<[f64; 2]>,
    /// Not characterised at `vdd` but interpolated between the characterisations at these two
    /// supplies (V).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub between_vdd: Option<[f64; 2]>,
}

impl At {
    /// " (timing interpolated between 27 and 85 degC)", " (timing interpolated between 2.97
    /// and 3.3 V)" or both ("... degC and between ... V") for an interpolated timing, else "".
    pub fn note(&self) -> String {
        use crate::spec::trim_num;
        let temp = self
            .between
            .map(|[lo, hi]| format!("{} and {} degC", trim_num(lo), trim_num(hi)));
        let vdd = self
            .between_vdd
            .map(|[lo, hi]| format!("{} and {} V", trim_num(lo), trim_num(hi)));
        match (temp, vdd) {
            (Some(t), Some(v)) => format!(" (timing interpolated between {t} and between {v})"),
            (Some(x), None) | (None, Some(x)) => format!(" (timing interpolated between {x})"),
            (None, None) => String::new(),
        }
    }
}

impl Timing {
    /// Diffusion capacitance of one channel end of a device, fF per µm of its width.
    pub fn c_diff_ff_um(&self, mos: crate::cells::Mos, end: crate::tech::End) -> f64 {
        use crate::cells::Mos;
        use crate::tech::End;
        match (mos, end) {
            (Mos::N, End::Contacted) => self.c_diff_n_ff_um,
            (Mos::P, End::Contacted) => self.c_diff_p_ff_um,
            (Mos::N, End::Shared) => self.c_diff_shared_n_ff_um.unwrap_or(self.c_diff_n_ff_um),
            (Mos::P, End::Shared) => self.c_diff_shared_p_ff_um.unwrap_or(self.c_diff_p_ff_um),
        }
    }

    /// Gate capacitance of a device, fF per µm of its width at the minimum length: one whose
    /// channel may not form (`floating`: no end at its own rail) takes the data-averaged
    /// figure where the file has one.
    pub fn c_gate_ff_um(&self, mos: crate::cells::Mos, floating: bool) -> f64 {
        use crate::cells::Mos;
        match (mos, floating) {
            (Mos::N, true) => self.c_gate_pass_n_ff_um.unwrap_or(self.c_gate_n_ff_um),
            (Mos::P, true) => self.c_gate_pass_p_ff_um.unwrap_or(self.c_gate_p_ff_um),
            (Mos::N, false) => self.c_gate_n_ff_um,
            (Mos::P, false) => self.c_gate_p_ff_um,
        }
    }

    /// These values were characterised at the technology's present conditions.
    pub fn matches(&self, t: &Technology) -> bool {
        self.at.corner == t.corner
            && (self.at.temp - t.temp).abs() < 1e-9
            && (self.at.vdd - t.vdd).abs() < 1e-9
    }

    /// Every value is a finite positive number (p_inv may be zero or slightly negative
    /// only if a fit says so; it is checked finite). `Err((key, message))`.
    pub fn check(&self) -> std::result::Result<(), (String, String)> {
        let mut named: Vec<(&str, f64)> = vec![
            ("input_slew_ps", self.input_slew_ps),
            ("n_width_um", self.n_width_um),
            ("p_width_um", self.p_width_um),
            ("r_pass_n_fall_kohm_um", self.r_pass_n_fall_kohm_um),
            ("r_pass_n_rise_kohm_um", self.r_pass_n_rise_kohm_um),
            ("r_tg_fall_kohm_um", self.r_tg_fall_kohm_um),
            ("r_tg_rise_kohm_um", self.r_tg_rise_kohm_um),
            ("c_gate_n_ff_um", self.c_gate_n_ff_um),
            ("c_gate_p_ff_um", self.c_gate_p_ff_um),
            ("c_diff_n_ff_um", self.c_diff_n_ff_um),
            ("c_diff_p_ff_um", self.c_diff_p_ff_um),
            ("fo4_ps", self.fo4_ps),
            ("tau_ps", self.tau_ps),
        ];
        if let Some(v) = self.r_tg_ladder_fall_kohm_um {
            named.push(("r_tg_ladder_fall_kohm_um", v));
        }
        if let Some(v) = self.r_tg_ladder_rise_kohm_um {
            named.push(("r_tg_ladder_rise_kohm_um", v));
        }
        if let Some(v) = self.r_pass_ladder_fall_kohm_um {
            named.push(("r_pass_ladder_fall_kohm_um", v));
        }
        if let Some(v) = self.c_diff_shared_n_ff_um {
            named.push(("c_diff_shared_n_ff_um", v));
        }
        if let Some(v) = self.c_diff_shared_p_ff_um {
            named.push(("c_diff_shared_p_ff_um", v));
        }
        if let Some(v) = self.slope_fast {
            named.push(("slope_fast", v));
        }
        if let Some(v) = self.slew_per_step {
            named.push(("slew_per_step", v));
        }
        for (k, v) in [
            ("slew_input_share", self.slew_input_share),
            ("slope_threshold", self.slope_threshold),
        ] {
            if let Some(v) = v {
                if !(v.is_finite() && v.abs() < 1.0) {
                    return Err((
                        format!("timing.{k}"),
                        format!("must be a share between -1 and 1, got {v}"),
                    ));
                }
            }
        }
        if let Some(v) = self.slope_threshold_gain {
            if !(0.0..=1.0).contains(&v) {
                return Err((
                    "timing.slope_threshold_gain".into(),
                    format!("must be between 0 and 1, got {v}"),
                ));
            }
        }
        if let Some(v) = self.c_gate_pass_n_ff_um {
            named.push(("c_gate_pass_n_ff_um", v));
        }
        if let Some(v) = self.c_gate_pass_p_ff_um {
            named.push(("c_gate_pass_p_ff_um", v));
        }
        for (k, v) in [
            ("pass_ladder_visible", self.pass_ladder_visible),
            ("tg_ladder_visible_fall", self.tg_ladder_visible_fall),
            ("tg_ladder_visible_rise", self.tg_ladder_visible_rise),
        ] {
            if let Some(v) = v {
                if !(0.0..=1.0).contains(&v) {
                    return Err((k.into(), format!("must be between 0 and 1, got {v}")));
                }
            }
        }
        for (i, v) in self.r_n_fall_kohm_um.iter().enumerate() {
            named.push((
                [
                    "r_n_fall_kohm_um[0]",
                    "r_n_fall_kohm_um[1]",
                    "r_n_fall_kohm_um[2]",
                ][i],
                *v,
            ));
        }
        for (i, v) in self.r_p_rise_kohm_um.iter().enumerate() {
            named.push((
                [
                    "r_p_rise_kohm_um[0]",
                    "r_p_rise_kohm_um[1]",
                    "r_p_rise_kohm_um[2]",
                ][i],
                *v,
            ));
        }
        for (k, v) in named {
            if !(v.is_finite() && v > 0.0 && v < 1e6) {
                return Err((
                    format!("timing.{k}"),
                    format!("must be a positive number, got {v}"),
                ));
            }
        }
        if !self.p_inv.is_finite() || self.p_inv.abs() > 100.0 {
            return Err((
                "timing.p_inv".into(),
                format!("must be a number of modest size, got {}", self.p_inv),
            ));
        }
        Ok(())
    }
}

/// The `conditions:` and `timing:` blocks of a characterised technology file (other keys
/// are read by [`crate::tech::load_file`]).
#[derive(Deserialize)]
struct TimingFile {
    conditions: At,
    timing: Timing,
}

/// Read the conditions and timing of a characterised file's text.
pub fn parse_timing(text: &str) -> std::result::Result<Timing, String> {
    let f: TimingFile = serde_yaml::from_str(text).map_err(|e| e.to_string())?;
    let mut t = f.timing;
    t.at = f.conditions;
    t.check().map_err(|(k, m)| format!("{k}: {m}"))?;
    Ok(t)
}

/// The built-in files, one line a technology and corner: (technology, corner, file stem:
/// [suffixes]) gives one entry (technology, corner, text of `configs/technologies/STEM
/// SUFFIX.yaml`) a suffix. Suffixes: `-m40` and `-125` for -40 and 125 degC (none: 27),
/// `-2v97` for a supply of 2.97 V (none: nominal).
macro_rules! builtin_files {
    ($($name:literal, $corner:literal, $stem:literal: [$($suffix:literal),*];)*) => {
        &[$($((
            $name,
            $corner,
            include_str!(concat!("../../configs/technologies/", $stem, $suffix, ".yaml")),
        ),)*)*]
    };
}

/// The characterised files built into the tool: (technology, corner, file text). Each was
/// written by `carrywright characterize` and checked in under `configs/technologies/`: every
/// GF180MCU and SKY130 corner at -40, 27 and 125 degC, each at 90, 100 and 110 % of the
/// nominal supply (GF180MCU 2.97, 3.3, 3.63 V; SKY130 1.62, 1.8, 1.98 V), and SKY130 ss at
/// 85 degC too.
pub const BUILTIN_FILES: &[(&str, &str, &str)] = builtin_files! {
    "generic", "none (illustrative cards)", "generic": [""];
    "gf180mcu-3v3", "typical", "gf180mcu-3v3-typical": ["-m40", "", "-125", "-m40-2v97", "-2v97", "-125-2v97", "-m40-3v63", "-3v63", "-125-3v63"];
    "gf180mcu-3v3", "ff", "gf180mcu-3v3-ff": ["-m40", "", "-125", "-m40-2v97", "-2v97", "-125-2v97", "-m40-3v63", "-3v63", "-125-3v63"];
    "gf180mcu-3v3", "ss", "gf180mcu-3v3-ss": ["-m40", "", "-125", "-m40-2v97", "-2v97", "-125-2v97", "-m40-3v63", "-3v63", "-125-3v63"];
    "gf180mcu-3v3", "fs", "gf180mcu-3v3-fs": ["-m40", "", "-125", "-m40-2v97", "-2v97", "-125-2v97", "-m40-3v63", "-3v63", "-125-3v63"];
    "gf180mcu-3v3", "sf", "gf180mcu-3v3-sf": ["-m40", "", "-125", "-m40-2v97", "-2v97", "-125-2v97", "-m40-3v63", "-3v63", "-125-3v63"];
    "sky130-1v8", "tt", "sky130-1v8-tt": ["-m40", "", "-125", "-m40-1v62", "-1v62", "-125-1v62", "-m40-1v98", "-1v98", "-125-1v98"];
    "sky130-1v8", "ff", "sky130-1v8-ff": ["-m40", "", "-125", "-m40-1v62", "-1v62", "-125-1v62", "-m40-1v98", "-1v98", "-125-1v98"];
    "sky130-1v8", "ss", "sky130-1v8-ss": ["-m40", "", "-125", "-m40-1v62", "-1v62", "-125-1v62", "-m40-1v98", "-1v98", "-125-1v98", "-85"];
    "sky130-1v8", "fs", "sky130-1v8-fs": ["-m40", "", "-125", "-m40-1v62", "-1v62", "-125-1v62", "-m40-1v98", "-1v98", "-125-1v98"];
    "sky130-1v8", "sf", "sky130-1v8-sf": ["-m40", "", "-125", "-m40-1v62", "-1v62", "-125-1v62", "-m40-1v98", "-1v98", "-125-1v98"];
};

/// The built-in files of one technology's corner, parsed (once for the whole run: a sweep
/// asks for them at every point).
pub fn builtin_files(name: &str, corner: &str) -> Vec<&'static Timing> {
    static PARSED: std::sync::OnceLock<Vec<(&str, &str, Option<Timing>)>> =
        std::sync::OnceLock::new();
    PARSED
        .get_or_init(|| {
            BUILTIN_FILES
                .iter()
                .map(|(n, c, text)| (*n, *c, parse_timing(text).ok()))
                .collect()
        })
        .iter()
        .filter(|(n, c, _)| *n == name && *c == corner)
        .filter_map(|(_, _, tm)| tm.as_ref())
        .collect()
}

/// The built-in characterisation of this technology at its present conditions: the file
/// characterised at exactly its corner, temperature and supply, else every value interpolated
/// between the nearest files of that corner on either side: linearly in temperature at a
/// characterised supply, then in supply between the two characterised supplies on either side
/// (none outside the characterised ranges; every PDK corner is characterised at -40, 27 and
/// 125 degC and at 90, 100 and 110 % of its nominal supply). Device resistance and delay are
/// close to linear in temperature over -40..125 degC (common practice: mobility falls about
/// as T^-1.5, a gentle curve over that span). In supply the drive current grows about as
/// (VDD - Vt)^alpha, alpha between 1 and 2 (Sakurai & Newton 1990), so a resistance is mixed
/// as a conductance: a pass NMOS passing a 1, whose drive is VDD - Vt less the level it has
/// reached, changes most (SKY130 tt 36.4, 15.4, 9.2 kOhm um at 1.62, 1.8, 1.98 V; at 1.71 V
/// linear mixing reads 15 % high, the conductance 3.5 % low). `tests/characterize.rs` checks
/// both against characterisations between the grid points (SKY130 ss at 85 degC, GF180MCU
/// typical at 95 % supply).
pub fn builtin_timing(t: &Technology) -> Option<Timing> {
    let files = builtin_files(&t.name, &t.corner);
    let same = |x: f64, y: f64| (x - y).abs() < 1e-9;
    // The nearest values below and above `x` (None when `x` is outside them).
    let bracket = |values: &mut dyn Iterator<Item = f64>, x: f64| {
        let (lo, hi) = values.fold((None::<f64>, None::<f64>), |(lo, hi), v| {
            (
                if v < x && lo.is_none_or(|l| v > l) {
                    Some(v)
                } else {
                    lo
                },
                if v > x && hi.is_none_or(|h| v < h) {
                    Some(v)
                } else {
                    hi
                },
            )
        });
        Some((lo?, hi?))
    };
    // At one characterised supply: exact temperature, else between the two on either side.
    let at_supply = |vdd: f64| -> Option<Timing> {
        let here: Vec<&Timing> = files
            .iter()
            .copied()
            .filter(|tm| same(tm.at.vdd, vdd))
            .collect();
        if let Some(tm) = here.iter().find(|tm| same(tm.at.temp, t.temp)) {
            return Some((*tm).clone());
        }
        let (lo, hi) = bracket(&mut here.iter().map(|tm| tm.at.temp), t.temp)?;
        let at = |temp: f64| here.iter().find(|tm| tm.at.temp == temp).copied();
        interpolate(at(lo)?, at(hi)?, t.temp)
    };
    if files.iter().any(|tm| same(tm.at.vdd, t.vdd)) {
        return at_supply(t.vdd);
    }
    let (lo, hi) = bracket(&mut files.iter().map(|tm| tm.at.vdd), t.vdd)?;
    interpolate_vdd(&at_supply(lo)?, &at_supply(hi)?, t.vdd)
}

/// The temperatures (degC) and supplies (V) the built-in files of a technology's corner span:
/// `([coldest, hottest], [lowest, highest])`, None when none is built in.
pub fn builtin_range(name: &str, corner: &str) -> Option<([f64; 2], [f64; 2])> {
    let files: Vec<&At> = builtin_files(name, corner)
        .into_iter()
        .map(|tm| &tm.at)
        .collect();
    let span = |f: fn(&&At) -> f64| {
        let lo = files.iter().map(f).min_by(f64::total_cmp)?;
        let hi = files.iter().map(f).max_by(f64::total_cmp)?;
        Some([lo, hi])
    };
    Some((span(|a| a.temp)?, span(|a| a.vdd)?))
}

/// How a value is mixed between two characterisations.
#[derive(Clone, Copy)]
enum Mix {
    Linear,
    /// In its logarithm.
    Log,
    /// In its reciprocal (a resistance mixed as a conductance).
    Reciprocal,
}

/// Every value of two characterisations mixed linearly, `f` of the way from `lo` to `hi`,
/// leakage in its logarithm and, with `conductance`, every resistance in its reciprocal; the
/// conditions are left as `lo`'s. None when the two do not carry the same keys.
fn mix_timing(lo: &Timing, hi: &Timing, f: f64, conductance: bool) -> Option<Timing> {
    use serde_json::Value;
    let how_of = |key: &str| {
        if key.starts_with("i_off") {
            Mix::Log
        } else if conductance && key.starts_with("r_") && key.ends_with("_kohm_um") {
            Mix::Reciprocal
        } else {
            Mix::Linear
        }
    };
    fn mix(a: &Value, b: &Value, f: f64, how: Mix) -> Option<Value> {
        Some(match (a, b) {
            (Value::Number(x), Value::Number(y)) => {
                let (x, y) = (x.as_f64()?, y.as_f64()?);
                let positive = x > 0.0 && y > 0.0;
                Value::from(match how {
                    Mix::Log if positive => (x.ln() + (y.ln() - x.ln()) * f).exp(),
                    Mix::Reciprocal if positive => 1.0 / (1.0 / x + (1.0 / y - 1.0 / x) * f),
                    _ => x + (y - x) * f,
                })
            }
            (Value::Array(x), Value::Array(y)) if x.len() == y.len() => Value::Array(
                x.iter()
                    .zip(y)
                    .map(|(x, y)| mix(x, y, f, how))
                    .collect::<Option<_>>()?,
            ),
            (x, y) if x == y => x.clone(),
            _ => return None,
        })
    }
    let (Value::Object(a), Value::Object(b)) = (
        serde_json::to_value(lo).ok()?,
        serde_json::to_value(hi).ok()?,
    ) else {
        return None;
    };
    if a.len() != b.len() {
        return None;
    }
    let v: serde_json::Map<String, Value> = a
        .iter()
        .map(|(k, x)| Some((k.clone(), mix(x, b.get(k)?, f, how_of(k))?)))
        .collect::<Option<_>>()?;
    let mut tm: Timing = serde_json::from_value(Value::Object(v)).ok()?;
    tm.at = lo.at.clone();
    Some(tm)
}

/// Every value of two characterisations of one corner and supply, interpolated linearly to
/// `temp` (between theirs; leakage in its logarithm). None when the two do not carry the same
/// keys.
pub fn interpolate(lo: &Timing, hi: &Timing, temp: f64) -> Option<Timing> {
    let mut tm = mix_timing(
        lo,
        hi,
        (temp - lo.at.temp) / (hi.at.temp - lo.at.temp),
        false,
    )?;
    tm.at = At {
        corner: lo.at.corner.clone(),
        temp,
        vdd: lo.at.vdd,
        between: Some([lo.at.temp, hi.at.temp]),
        between_vdd: None,
    };
    tm.check().ok()?;
    Some(tm)
}

/// Every value of two characterisations of one corner and temperature (either may itself be
/// interpolated in temperature), interpolated to the supply `vdd` (between theirs): linearly,
/// resistances as conductances, leakage in its logarithm. None when the two do not carry the same keys or temperature.
pub fn interpolate_vdd(lo: &Timing, hi: &Timing, vdd: f64) -> Option<Timing> {
    if (lo.at.temp - hi.at.temp).abs() > 1e-9 {
        return None;
    }
    let mut tm = mix_timing(lo, hi, (vdd - lo.at.vdd) / (hi.at.vdd - lo.at.vdd), true)?;
    tm.at = At {
        corner: lo.at.corner.clone(),
        temp: lo.at.temp,
        vdd,
        between: lo.at.between.or(hi.at.between),
        between_vdd: Some([lo.at.vdd, hi.at.vdd]),
    };
    tm.check().ok()?;
    Some(tm)
}
