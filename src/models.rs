//! Model files a deck will include, read before any deck names them.
//!
//! A deck runs what its included files say, so every file a technology names — and every
//! file those include in turn through `.include` or `.lib FILE SECTION` — is scanned line by
//! line and refused unless it holds only what model files hold: comments, `.model`,
//! `.subckt` … `.ends` (element lines only inside a subcircuit), `.param`, `.func`, `.lib` /
//! `.endl` sections, `.include`, options and conditionals. A `.control` block, a `.end`, an
//! analysis card or a command line outside a subcircuit is refused with the file and line.
//! The scan also collects what the files define — library sections, `.model` names (binned
//! models `NAME.N` count as `NAME`) and subcircuit names — so that a technology's corner
//! section and device names are checked when it is loaded, not inside ngspice.

use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};
use std::sync::{Arc, Mutex, OnceLock};

/// Largest model file read (bytes). The open PDKs' largest single files are a few MB.
pub const MAX_MODEL_FILE: u64 = 256 << 20;
/// Most files one technology may pull in through includes.
pub const MAX_MODEL_FILES: usize = 2000;

/// What one file defines and which files it names.
#[derive(Debug, Default)]
struct FileScan {
    sections: BTreeSet<String>,
    models: BTreeSet<String>,
    subckts: BTreeSet<String>,
    /// Files named by `.include` / `.lib FILE SECTION`, as written (quotes removed).
    refs: Vec<String>,
}

/// What a set of model files defines, over every file they include.
#[derive(Debug, Default)]
pub struct Defined {
    /// Library sections (`.lib NAME`), per canonical file.
    pub sections: BTreeMap<PathBuf, BTreeSet<String>>,
    /// Lower-case `.model` names (bin suffixes removed) and subcircuit names.
    pub devices: BTreeSet<String>,
    /// Every file read, canonical.
    pub files: BTreeSet<PathBuf>,
}

impl Defined {
    /// The section is defined in that file.
    pub fn has_section(&self, file: &Path, section: &str) -> bool {
        let f = file.canonicalize().unwrap_or_else(|_| file.to_path_buf());
        self.sections
            .get(&f)
            .is_some_and(|s| s.contains(&section.to_ascii_lowercase()))
    }
    /// A `.model` or `.subckt` of that name exists (case-insensitive, as SPICE reads it).
    pub fn has_device(&self, name: &str) -> bool {
        self.devices.contains(&name.to_ascii_lowercase())
    }
}

/// Cards a model file may hold (lower case, with the dot).
const ALLOWED_CARDS: &[&str] = &[
    ".model", ".subckt", ".ends", ".param", ".func", ".lib", ".endl", ".include", ".inc",
    ".option", ".options", ".global", ".if", ".elseif", ".else", ".endif", ".title",
];

type Cache = Mutex<BTreeMap<(PathBuf, u64, Option<std::time::SystemTime>), Arc<FileScan>>>;

fn cache() -> &'static Cache {
    static C: OnceLock<Cache> = OnceLock::new();
    C.get_or_init(|| Mutex::new(BTreeMap::new()))
}

/// Shown paths: control characters escaped so a message stays on one line.
pub fn show(p: &Path) -> String {
    p.display()
        .to_string()
        .chars()
        .flat_map(|c| c.escape_debug())
        .collect()
}

fn scan_file(path: &Path) -> Result<Arc<FileScan>, String> {
    let meta = std::fs::metadata(path).map_err(|e| format!("{}: {e}", show(path)))?;
    if !meta.is_file() {
        return Err(format!("{} is not a regular file", show(path)));
    }
    if meta.len() > MAX_MODEL_FILE {
        return Err(format!(
            "{} is larger than {} MiB; not a model file this tool reads",
            show(path),
            MAX_MODEL_FILE >> 20
        ));
    }
    let key = (path.to_path_buf(), meta.len(), meta.modified().ok());
    if let Some(hit) = cache().lock().ok().and_then(|c| c.get(&key).cloned()) {
        return Ok(hit);
    }
    let bytes = std::fs::read(path).map_err(|e| format!("{}: {e}", show(path)))?;
    let text = String::from_utf8_lossy(&bytes);
    let scan = Arc::new(
        scan_text(&text)
            .map_err(|(line, why)| format!("model file {}:{line}: {why}", show(path)))?,
    );
    if let Ok(mut c) = cache().lock() {
        c.insert(key, scan.clone());
    }
    Ok(scan)
}

/// The start of a refused line for a message: at most 24 characters, escaped.
fn excerpt(s: &str) -> String {
    s.chars().take(24).flat_map(|c| c.escape_debug()).collect()
}

fn unquote(w: &str) -> &str {
    w.trim_matches(|c| c == '\'' || c == '"')
}

/// Scan one file's text. Errors carry the 1-based line.
fn scan_text(text: &str) -> Result<FileScan, (usize, String)> {
    let mut out = FileScan::default();
    let mut depth = 0usize; // .subckt nesting
    for (i, raw) in text.lines().enumerate() {
        let line = raw.trim_start();
        let n = i + 1;
        let Some(first) = line.chars().next() else {
            continue;
        };
        if matches!(first, '*' | '+' | ';') || line.starts_with("//") {
            continue;
        }
        let words: Vec<&str> = line.split_whitespace().collect();
        let head = words[0].to_ascii_lowercase();
        if first == '.' {
            if !ALLOWED_CARDS.contains(&head.as_str()) {
                return Err((
                    n,
                    format!(
                        "`{}` is not allowed in a model file (only .model, .subckt/.ends, .param, .func, .lib/.endl, .include, .option and .if cards, comments and subcircuit bodies)",
                        excerpt(words[0])
                    ),
                ));
            }
            match head.as_str() {
                ".subckt" => {
                    depth += 1;
                    if let Some(name) = words.get(1) {
                        out.subckts.insert(name.to_ascii_lowercase());
                    }
                }
                ".ends" => depth = depth.saturating_sub(1),
                ".model" => {
                    if let Some(name) = words.get(1) {
                        let name = name.to_ascii_lowercase();
                        // Binned models: NAME.0, NAME.1, ... are all NAME to the netlist.
                        let base = match name.rsplit_once('.') {
                            Some((b, bin))
                                if !bin.is_empty() && bin.bytes().all(|c| c.is_ascii_digit()) =>
                            {
                                b.to_string()
                            }
                            _ => name.clone(),
                        };
                        out.models.insert(base);
                        out.models.insert(name);
                    }
                }
                ".lib" => match words.len() {
                    2 => {
                        out.sections.insert(unquote(words[1]).to_ascii_lowercase());
                    }
                    n if n >= 3 => out.refs.push(unquote(words[1]).to_string()),
                    _ => {}
                },
                ".include" | ".inc" => {
                    if let Some(f) = words.get(1) {
                        out.refs.push(unquote(f).to_string());
                    }
                }
                _ => {}
            }
            continue;
        }
        if first.is_ascii_alphabetic() && depth > 0 {
            continue; // an element line inside a subcircuit
        }
        return Err((
            n,
            format!(
                "`{}` is not something a model file holds (element and command lines belong inside .subckt)",
                excerpt(line)
            ),
        ));
    }
    Ok(out)
}

/// Scan the files and everything they include. `Err` is one line naming the file and line.
pub fn scan(files: &[PathBuf]) -> Result<Defined, String> {
    let mut defined = Defined::default();
    let mut todo: Vec<PathBuf> = files.to_vec();
    while let Some(p) = todo.pop() {
        let canon = p
            .canonicalize()
            .map_err(|e| format!("model file {}: {e}", show(&p)))?;
        if !defined.files.insert(canon.clone()) {
            continue;
        }
        if defined.files.len() > MAX_MODEL_FILES {
            return Err(format!(
                "the model files include more than {MAX_MODEL_FILES} files"
            ));
        }
        let s = scan_file(&canon)?;
        defined
            .sections
            .entry(canon.clone())
            .or_default()
            .extend(s.sections.iter().cloned());
        defined.devices.extend(s.models.iter().cloned());
        defined.devices.extend(s.subckts.iter().cloned());
        let dir = canon.parent().unwrap_or(Path::new("/"));
        for r in &s.refs {
            let next = dir.join(r);
            if !next.is_file() {
                return Err(format!(
                    "model file {} includes {}, which is not a file",
                    show(&canon),
                    show(Path::new(r))
                ));
            }
            todo.push(next);
        }
    }
    Ok(defined)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn control_block_is_refused_with_its_line() {
        let e = scan_text("* models\n.model n1 nmos level=1\n.control\nshell touch x\n.endc\n")
            .unwrap_err();
        assert_eq!(e.0, 3);
        assert!(e.1.contains(".control"), "{}", e.1);
    }

    #[test]
    fn top_level_element_or_command_is_refused() {
        let e = scan_text(".model n1 nmos\nshell touch x\n").unwrap_err();
        assert_eq!(e.0, 2);
        let e = scan_text("root:x:0:0:root:/root:/bin/bash\n").unwrap_err();
        assert_eq!(e.0, 1);
        let e = scan_text(".model n1 nmos\n.end\n").unwrap_err();
        assert_eq!(e.0, 2);
    }

    #[test]
    fn model_file_shapes_are_accepted_and_collected() {
        let s = scan_text(
            "* c\n.LIB typical\n .lib 'self.lib' nmos_t\n.ENDL typical\n.lib nmos_t\n.model  nmos_3p3.0  nmos\n+ level=54\n.endl\n.subckt dev d g s b w=1u\n m0 d g s b nmos_3p3 w=w\n.ends\n",
        )
        .unwrap();
        assert!(s.sections.contains("typical") && s.sections.contains("nmos_t"));
        assert!(s.models.contains("nmos_3p3") && s.models.contains("nmos_3p3.0"));
        assert!(s.subckts.contains("dev"));
        assert_eq!(s.refs, vec!["self.lib".to_string()]);
    }
}
