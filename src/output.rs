//! Writing outputs as a whole: after any failure, interrupt or race, the output folder holds
//! either the complete old set of files or the complete new set (files of other names in it
//! are kept).
//!
//! How (Unix):
//! - **Lock.** An exclusive advisory lock (`flock`) is taken on the folder that will hold the
//!   staging folder: the output folder itself when it exists, else its parent. A second
//!   writer prints `waiting for another carrywright writing DIR` and waits. Every staging
//!   folder inside a folder F is made by a process holding F's lock, so one found there by
//!   the lock's holder belongs to a dead run: it is finished (see the journal) or removed.
//! - **Stage.** Every new file is written and synced into `.carrywright-PID-N/` first, and
//!   every destination is checked (a folder in the way of `NAME.json` is refused) before
//!   anything is replaced.
//! - **Commit.** A new output folder is the staging folder renamed into place (one atomic
//!   rename that never replaces anything). In an existing folder, a journal listing the files
//!   is written into the staging folder, then each old file is moved aside into `old/` and the
//!   new one moved in from `new/`. Any error rolls back to the old set. A run killed by
//!   SIGKILL mid-commit leaves the journal; the next writer finishes that commit (or, if it
//!   cannot, rolls it back) before its own.
//! - **Signals.** SIGINT, SIGTERM and SIGHUP are deferred while writing: the run stops at the
//!   next step, rolls back, removes its staging folder and returns [`Error::Interrupted`]
//!   (exit 128 + signal). A signal that comes after the last step is raised again once the
//!   write is complete. Signals the caller ignores stay ignored.
//! - **Parents.** Missing parent folders of a new output folder are created one by one and
//!   removed again if the write fails.
//! - Files get the usual `0666 & !umask` mode, folders `0777 & !umask`.
//!
//! On a file system without `flock`, writers are not serialised and staging folders left by
//! killed runs are not cleaned up (nothing proves them dead). Signal handlers are process-wide:
//! one process should not run two writes at once from two threads.

use crate::error::{Error, Result};
use std::ffi::OsStr;
use std::fs::{self, File};
use std::io::{self, Write};
use std::os::unix::ffi::OsStrExt;
use std::os::unix::io::AsRawFd;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicI32, AtomicUsize, Ordering};

/// Name prefix of staging folders (and nothing else we write).
const PREFIX: &str = ".carrywright-";
/// The journal inside a staging folder: one file name a line, then `END`.
const JOURNAL: &str = "journal";
const END: &str = "end";

/// Write `files` (name, contents) into `dir` as a whole; see the module documentation.
pub fn write_outputs(dir: &Path, files: &[(String, String)]) -> Result<()> {
    for (name, _) in files {
        check_name(name, &dir.join(name))?;
    }
    let signals = Signals::defer();
    let result = write_in(dir, files);
    signals.restore();
    result
}

/// Write one file whole (same guarantees as [`write_outputs`] with one file).
pub fn write_file(path: &Path, text: &str) -> Result<()> {
    let Some(name) = path.file_name() else {
        return Err(Error::Output(format!(
            "{}: not a file name",
            path.display()
        )));
    };
    let name = name
        .to_str()
        .ok_or_else(|| Error::Output(format!("{}: the file name is not UTF-8", path.display())))?;
    let parent = path.parent().unwrap_or(Path::new(""));
    write_outputs(parent, &[(name.to_string(), text.to_string())])
}

/// Files in `dir` that differ from (or are missing against) what would be generated. A
/// missing `dir` makes every file stale; a `dir` that is not a folder is an error.
pub fn stale_files(dir: &Path, files: &[(String, String)]) -> Result<Vec<String>> {
    match fs::metadata(fs_path(dir)) {
        Ok(m) if !m.is_dir() => return Err(not_a_folder(dir)),
        Ok(_) => {}
        Err(e) if e.kind() == io::ErrorKind::NotFound => {}
        Err(e) => return Err(Error::Output(format!("cannot read {}: {e}", dir.display()))),
    }
    Ok(files
        .iter()
        .filter(|(name, text)| {
            fs::read(fs_path(dir).join(name)).ok().as_deref() != Some(text.as_bytes())
        })
        .map(|(name, _)| name.clone())
        .collect())
}

/// Finish or roll back what killed runs left in `dir` (staging folders and their journals),
/// under the lock. `generate` does this itself before writing; this is for tools and tests.
/// Recovery is idempotent (the journal stays until the change is finished), so it needs no
/// signal handling: a recovery that is itself killed is done again by the next one.
pub fn recover(dir: &Path) -> Result<()> {
    let lock = Lock::take(dir, dir)?;
    clean_dead(dir, &lock)
}

/// `.` for an empty relative path (`-o out` has parent ``).
fn fs_path(p: &Path) -> &Path {
    if p.as_os_str().is_empty() {
        Path::new(".")
    } else {
        p
    }
}

fn not_a_folder(dir: &Path) -> Error {
    Error::Output(format!("{} exists and is not a folder", dir.display()))
}

/// A name we write must be one plain file name.
fn check_name(name: &str, shown: &Path) -> Result<()> {
    if name.is_empty()
        || name == "."
        || name == ".."
        || name.contains('/')
        || name.contains('\0')
        || name.starts_with(PREFIX)
    {
        return Err(Error::Output(format!(
            "{}: not a file name carrywright can write",
            shown.display()
        )));
    }
    Ok(())
}

fn io_err(what: &str, p: &Path, e: io::Error) -> Error {
    Error::Output(format!("{what} {}: {e}", p.display()))
}

// ---------------------------------------------------------------------------------------
// The write itself

/// What is at the output path.
#[derive(PartialEq)]
enum Found {
    Folder,
    Missing,
}

fn look(dir: &Path) -> Result<Found> {
    let p = fs_path(dir);
    let meta = match fs::symlink_metadata(p) {
        Ok(m) => m,
        Err(e) if e.kind() == io::ErrorKind::NotFound => return Ok(Found::Missing),
        Err(e) => return Err(io_err("cannot use", dir, e)),
    };
    if meta.file_type().is_symlink() {
        return match fs::metadata(p) {
            Ok(m) if m.is_dir() => Ok(Found::Folder),
            Ok(_) => Err(not_a_folder(dir)),
            Err(e) if e.kind() == io::ErrorKind::NotFound => {
                let target = fs::read_link(p).unwrap_or_default();
                Err(Error::Output(format!(
                    "{} is a symbolic link to {}, which does not exist; create that folder or remove the link",
                    dir.display(),
                    target.display()
                )))
            }
            Err(e) => Err(io_err("cannot use", dir, e)),
        };
    }
    if meta.is_dir() {
        Ok(Found::Folder)
    } else {
        Err(not_a_folder(dir))
    }
}

fn write_in(dir: &Path, files: &[(String, String)]) -> Result<()> {
    let mut created: Vec<PathBuf> = Vec::new();
    let result = (|| loop {
        match look(dir)? {
            Found::Folder => {
                let lock = Lock::take(dir, dir)?;
                if look(dir)? != Found::Folder {
                    continue;
                }
                return replace_in(dir, files, &lock);
            }
            Found::Missing => {
                let parent = dir.parent().unwrap_or(Path::new(""));
                make_parents(parent, &mut created)?;
                let lock = Lock::take(parent, dir)?;
                if look(dir)? != Found::Missing {
                    continue; // another writer made it meanwhile: replace in it instead
                }
                return create_new(dir, parent, files, &lock);
            }
        }
    })();
    if result.is_err() {
        for p in created.iter().rev() {
            let _ = fs::remove_dir(p);
        }
    }
    result
}

/// Create the missing folders above a new output folder, recording the ones we made.
fn make_parents(parent: &Path, created: &mut Vec<PathBuf>) -> Result<()> {
    let mut missing = Vec::new();
    for a in parent.ancestors() {
        if a.as_os_str().is_empty() || fs::symlink_metadata(a).is_ok() {
            break;
        }
        missing.push(a.to_path_buf());
    }
    for a in missing.into_iter().rev() {
        match fs::create_dir(&a) {
            Ok(()) => created.push(a),
            Err(e) if e.kind() == io::ErrorKind::AlreadyExists && a.is_dir() => {}
            Err(e) => return Err(io_err("cannot create", &a, e)),
        }
    }
    match fs::metadata(fs_path(parent)) {
        Ok(m) if m.is_dir() => Ok(()),
        Ok(_) => Err(not_a_folder(parent)),
        Err(e) => Err(io_err("cannot use", parent, e)),
    }
}

/// A new output folder: stage everything, then one rename that never replaces anything.
fn create_new(dir: &Path, parent: &Path, files: &[(String, String)], lock: &Lock) -> Result<()> {
    clean_dead(parent, lock)?;
    let steps = Steps::new(dir);
    let mut stage = Stage::make(fs_path(parent), dir, "cannot create")?;
    for (name, text) in files {
        steps.check(&format!("stage {name}"))?;
        write_synced(&stage.path.join(name), text)
            .map_err(|e| io_err("cannot write", &dir.join(name), e))?;
    }
    sync_dir(&stage.path);
    steps.check("commit")?;
    rename_noreplace(&stage.path, fs_path(dir)).map_err(|e| io_err("cannot create", dir, e))?;
    sync_dir(fs_path(parent));
    if let Err(e) = steps.check("finish") {
        // Undo: the folder goes back to being a staging folder, removed on drop.
        if rename_noreplace(fs_path(dir), &stage.path).is_err() {
            stage.keep();
        }
        return Err(e);
    }
    stage.keep();
    Ok(())
}

/// An existing output folder: stage, check the destinations, then the journalled commit.
fn replace_in(dir: &Path, files: &[(String, String)], lock: &Lock) -> Result<()> {
    clean_dead(dir, lock)?;
    if files.is_empty() {
        return Ok(());
    }
    let steps = Steps::new(dir);
    let root = fs_path(dir);
    for (name, _) in files {
        let p = root.join(name);
        match fs::symlink_metadata(&p) {
            Ok(m) if m.is_dir() => {
                return Err(Error::Output(format!(
                    "{} is a folder; move it away or write elsewhere",
                    dir.join(name).display()
                )))
            }
            Ok(m) if !(m.is_file() || m.file_type().is_symlink()) => {
                return Err(Error::Output(format!(
                    "{} is not a regular file; move it away or write elsewhere",
                    dir.join(name).display()
                )))
            }
            Ok(_) => {}
            Err(e) if e.kind() == io::ErrorKind::NotFound => {}
            Err(e) => return Err(io_err("cannot use", &dir.join(name), e)),
        }
    }
    let mut stage = Stage::make(root, dir, "cannot write in")?;
    let (new, old) = (stage.path.join("new"), stage.path.join("old"));
    for d in [&new, &old] {
        fs::create_dir(d).map_err(|e| io_err("cannot write in", dir, e))?;
    }
    for (name, text) in files {
        steps.check(&format!("stage {name}"))?;
        write_synced(&new.join(name), text)
            .map_err(|e| io_err("cannot write", &dir.join(name), e))?;
    }
    let names: Vec<&str> = files.iter().map(|(n, _)| n.as_str()).collect();
    let mut journal = names.join("\n");
    journal.push('\n');
    journal.push_str(END);
    journal.push('\n');
    let part = stage.path.join("journal.part");
    write_synced(&part, &journal)
        .and_then(|()| fs::rename(&part, stage.path.join(JOURNAL)))
        .map_err(|e| io_err("cannot write in", dir, e))?;
    sync_dir(&stage.path);
    steps.check("commit")?;

    let commit = Commit {
        dir: root,
        stage: &stage.path,
        names: names.iter().map(|s| s.to_string()).collect(),
    };
    let forward = commit
        .forward(Some(&steps))
        .and_then(|()| steps.check("finish"));
    if let Err(e) = forward {
        return match commit.back() {
            Ok(()) => Err(e),
            Err(undo) => {
                stage.keep(); // the journal lets the next run finish it
                Err(Error::Output(format!(
                    "{e}; then could not put the old files back ({undo}); the next generate into {} finishes the change",
                    dir.display()
                )))
            }
        };
    }
    let _ = fs::remove_file(stage.path.join(JOURNAL));
    Ok(()) // the staging folder (old files, empty new/) goes on drop
}

/// Moves between the output folder and a staging folder's `new/` and `old/`, each an
/// atomic rename, so the state of every file is known from what exists:
/// `new/NAME` present means the new file is not in place yet.
struct Commit<'a> {
    dir: &'a Path,
    stage: &'a Path,
    names: Vec<String>,
}

impl Commit<'_> {
    fn paths(&self, name: &str) -> (PathBuf, PathBuf, PathBuf) {
        (
            self.dir.join(name),
            self.stage.join("new").join(name),
            self.stage.join("old").join(name),
        )
    }

    /// Put every new file in place, moving the old one aside first.
    fn forward(&self, steps: Option<&Steps>) -> Result<()> {
        for name in &self.names {
            let (dest, new, old) = self.paths(name);
            if !exists(&new) {
                continue;
            }
            if exists(&dest) && !exists(&old) {
                fs::rename(&dest, &old).map_err(|e| io_err("cannot replace", &dest, e))?;
            }
            if let Some(s) = steps {
                s.check(&format!("replace {name}"))?;
            }
            fs::rename(&new, &dest).map_err(|e| io_err("cannot replace", &dest, e))?;
        }
        sync_dir(self.dir);
        Ok(())
    }

    /// Put every old file back (and take the new ones out).
    fn back(&self) -> Result<()> {
        for name in self.names.iter().rev() {
            let (dest, new, old) = self.paths(name);
            if !exists(&new) && exists(&dest) {
                fs::rename(&dest, &new).map_err(|e| io_err("cannot restore", &dest, e))?;
            }
            if exists(&old) {
                fs::rename(&old, &dest).map_err(|e| io_err("cannot restore", &dest, e))?;
            }
        }
        sync_dir(self.dir);
        Ok(())
    }
}

fn exists(p: &Path) -> bool {
    fs::symlink_metadata(p).is_ok()
}

/// Finish (or else undo) the commits of dead runs in `folder` and remove their staging
/// folders. Only the lock's holder may do this: a live writer would hold the same lock.
fn clean_dead(folder: &Path, lock: &Lock) -> Result<()> {
    if !lock.held {
        return Ok(());
    }
    let root = fs_path(folder);
    let Ok(entries) = fs::read_dir(root) else {
        return Ok(());
    };
    for entry in entries.flatten() {
        let name = entry.file_name();
        if !name.as_bytes().starts_with(PREFIX.as_bytes()) {
            continue;
        }
        let path = entry.path();
        let is_dir = entry.file_type().map(|t| t.is_dir()).unwrap_or(false);
        if !is_dir {
            let _ = fs::remove_file(&path);
            continue;
        }
        if let Some(names) = read_journal(&path.join(JOURNAL)) {
            let commit = Commit {
                dir: root,
                stage: &path,
                names,
            };
            if let Err(e) = commit.forward(None) {
                commit.back().map_err(|_| {
                    Error::Output(format!(
                        "{}: an interrupted earlier write could not be finished ({e}); fix the cause and run again",
                        folder.display()
                    ))
                })?;
            }
            let _ = fs::remove_file(path.join(JOURNAL));
        }
        let _ = fs::remove_dir_all(&path);
    }
    Ok(())
}

/// The file names of a complete journal, or None (no journal: nothing was moved yet).
fn read_journal(p: &Path) -> Option<Vec<String>> {
    let text = fs::read_to_string(p).ok()?;
    let mut lines: Vec<&str> = text.lines().collect();
    if lines.pop() != Some(END) {
        return None;
    }
    let ok = lines.iter().all(|n| check_name(n, Path::new(n)).is_ok());
    ok.then(|| lines.iter().map(|s| s.to_string()).collect())
}

/// A staging folder, removed when dropped unless kept.
struct Stage {
    path: PathBuf,
    remove: bool,
}

impl Stage {
    fn make(inside: &Path, shown: &Path, what: &str) -> Result<Stage> {
        static COUNT: AtomicUsize = AtomicUsize::new(0);
        loop {
            let n = COUNT.fetch_add(1, Ordering::Relaxed);
            let path = inside.join(format!("{PREFIX}{}-{n}", std::process::id()));
            match fs::create_dir(&path) {
                Ok(()) => return Ok(Stage { path, remove: true }),
                Err(e) if e.kind() == io::ErrorKind::AlreadyExists && n < 1000 => continue,
                Err(e) => return Err(io_err(what, shown, e)),
            }
        }
    }
    fn keep(&mut self) {
        self.remove = false;
    }
}

impl Drop for Stage {
    fn drop(&mut self) {
        if self.remove {
            let _ = fs::remove_dir_all(&self.path);
        }
    }
}

/// Write and sync one file (callers name the user's path in errors, never the staging one).
fn write_synced(p: &Path, text: &str) -> io::Result<()> {
    let mut f = File::create(p)?;
    f.write_all(text.as_bytes())?;
    f.sync_all()
}

/// Sync a folder's entries to disk (best effort: some file systems refuse).
fn sync_dir(p: &Path) {
    if let Ok(f) = File::open(p) {
        let _ = f.sync_all();
    }
}

/// Rename that fails instead of replacing an existing destination (even an empty folder).
fn rename_noreplace(from: &Path, to: &Path) -> io::Result<()> {
    #[cfg(any(target_os = "linux", target_os = "android"))]
    {
        let (a, b) = (cstr(from.as_os_str())?, cstr(to.as_os_str())?);
        // SAFETY: both are valid NUL-terminated paths; AT_FDCWD resolves them like rename.
        let r = unsafe {
            libc::renameat2(
                libc::AT_FDCWD,
                a.as_ptr(),
                libc::AT_FDCWD,
                b.as_ptr(),
                libc::RENAME_NOREPLACE,
            )
        };
        if r == 0 {
            return Ok(());
        }
        let e = io::Error::last_os_error();
        match e.raw_os_error() {
            Some(libc::EINVAL) | Some(libc::ENOSYS) => {} // not supported here: fall back
            _ => return Err(e),
        }
    }
    if exists(to) {
        return Err(io::Error::from(io::ErrorKind::AlreadyExists));
    }
    fs::rename(from, to)
}

fn cstr(s: &OsStr) -> io::Result<std::ffi::CString> {
    std::ffi::CString::new(s.as_bytes()).map_err(|_| io::Error::from(io::ErrorKind::InvalidInput))
}

// ---------------------------------------------------------------------------------------
// The lock

/// An exclusive `flock` on a folder, released when dropped.
struct Lock {
    _file: Option<File>,
    held: bool,
}

impl Lock {
    /// Lock `folder`; `shown` is the output path named in the waiting message.
    fn take(folder: &Path, shown: &Path) -> Result<Lock> {
        let file =
            File::open(fs_path(folder)).map_err(|e| io_err("cannot open", fs_path(folder), e))?;
        let fd = file.as_raw_fd();
        // SAFETY: flock on a file descriptor we own.
        if unsafe { libc::flock(fd, libc::LOCK_EX | libc::LOCK_NB) } == 0 {
            return Ok(Lock {
                _file: Some(file),
                held: true,
            });
        }
        let e = io::Error::last_os_error();
        if e.raw_os_error() != Some(libc::EWOULDBLOCK) {
            // No locking on this file system: go on without it.
            return Ok(Lock {
                _file: None,
                held: false,
            });
        }
        if let Some(sig) = take_pending() {
            return Err(interrupted(sig, shown));
        }
        // Never panic on a closed or full stderr.
        let _ = writeln!(
            std::io::stderr(),
            "waiting for another carrywright writing {}",
            crate::spec::shown_path(fs_path(shown))
        );
        loop {
            // SAFETY: as above; blocks until the other writer is done or a signal comes.
            if unsafe { libc::flock(fd, libc::LOCK_EX) } == 0 {
                return Ok(Lock {
                    _file: Some(file),
                    held: true,
                });
            }
            let e = io::Error::last_os_error();
            if e.kind() != io::ErrorKind::Interrupted {
                return Ok(Lock {
                    _file: None,
                    held: false,
                });
            }
            if let Some(sig) = take_pending() {
                return Err(interrupted(sig, shown));
            }
        }
    }
}

// ---------------------------------------------------------------------------------------
// Signals and steps

/// The first deferred signal that arrived, or 0.
static PENDING: AtomicI32 = AtomicI32::new(0);
const DEFERRED: [libc::c_int; 3] = [libc::SIGINT, libc::SIGTERM, libc::SIGHUP];

extern "C" fn note_signal(sig: libc::c_int) {
    let _ = PENDING.compare_exchange(0, sig, Ordering::SeqCst, Ordering::SeqCst);
}

fn take_pending() -> Option<i32> {
    match PENDING.swap(0, Ordering::SeqCst) {
        0 => None,
        s => Some(s),
    }
}

fn interrupted(sig: i32, dir: &Path) -> Error {
    let name = match sig {
        libc::SIGINT => "SIGINT",
        libc::SIGTERM => "SIGTERM",
        libc::SIGHUP => "SIGHUP",
        _ => "a signal",
    };
    Error::Interrupted(
        sig,
        format!(
            "interrupted by {name}; {} was left as it was",
            fs_path(dir).display()
        ),
    )
}

/// Block the deferred signals (SIGINT, SIGTERM, SIGHUP) in the calling thread. The CLI calls
/// it in every worker thread it starts, so only the thread that writes takes them: a signal
/// taken by a worker could otherwise run its handler after the write's steps had looked, or
/// after `restore`, and end the process mid-write.
pub fn block_deferred_signals() {
    deferred_mask(libc::SIG_BLOCK);
}

/// Undo [`block_deferred_signals`] in the calling thread. The CLI blocks the signals before
/// it starts its worker threads, so they start with them blocked (a new thread inherits its
/// creator's mask; blocking them only in the thread's start handler leaves a window in which
/// a busy machine can deliver one to a worker), then unblocks them in the main thread.
pub fn unblock_deferred_signals() {
    deferred_mask(libc::SIG_UNBLOCK);
}

fn deferred_mask(how: libc::c_int) {
    // SAFETY: a plain pthread_sigmask on a zero-initialised, filled-in set.
    unsafe {
        let mut set: libc::sigset_t = std::mem::zeroed();
        libc::sigemptyset(&mut set);
        for sig in DEFERRED {
            libc::sigaddset(&mut set, sig);
        }
        libc::pthread_sigmask(how, &set, std::ptr::null_mut());
    }
}

/// SIGINT, SIGTERM and SIGHUP noted instead of acted on, until `restore`.
struct Signals {
    old: Vec<(libc::c_int, libc::sigaction)>,
}

impl Signals {
    fn defer() -> Signals {
        PENDING.store(0, Ordering::SeqCst);
        let mut old = Vec::new();
        for sig in DEFERRED {
            // SAFETY: plain sigaction calls with zero-initialised structs; the handler only
            // stores into an atomic, which is async-signal-safe.
            unsafe {
                let mut prev: libc::sigaction = std::mem::zeroed();
                if libc::sigaction(sig, std::ptr::null(), &mut prev) != 0
                    || prev.sa_sigaction == libc::SIG_IGN
                {
                    continue; // an ignored signal stays ignored
                }
                let mut act: libc::sigaction = std::mem::zeroed();
                act.sa_sigaction = note_signal as extern "C" fn(libc::c_int) as usize;
                libc::sigemptyset(&mut act.sa_mask);
                act.sa_flags = 0; // no SA_RESTART: a wait for the lock returns EINTR
                if libc::sigaction(sig, &act, std::ptr::null_mut()) == 0 {
                    old.push((sig, prev));
                }
            }
        }
        Signals { old }
    }

    /// Put the previous handlers back and raise a signal that came after the last step.
    fn restore(self) {
        for (sig, prev) in &self.old {
            // SAFETY: restores the disposition saved by `defer`.
            unsafe {
                libc::sigaction(*sig, prev, std::ptr::null_mut());
            }
        }
        if let Some(sig) = take_pending() {
            // SAFETY: raising a signal whose previous disposition is back in place.
            unsafe {
                libc::raise(sig);
            }
        }
    }
}

/// The steps of one write: each checks for a deferred signal. For tests,
/// `CARRYWRIGHT_TEST_STOP_AT=K` stops the process (SIGSTOP) at the K-th step (from 0) after
/// printing `carrywright: stopped before STEP`, so a test can signal it at that exact point.
struct Steps<'a> {
    dir: &'a Path,
    stop_at: Option<usize>,
    count: std::cell::Cell<usize>,
}

impl<'a> Steps<'a> {
    fn new(dir: &'a Path) -> Self {
        Steps {
            dir,
            stop_at: std::env::var("CARRYWRIGHT_TEST_STOP_AT")
                .ok()
                .and_then(|v| v.parse().ok()),
            count: std::cell::Cell::new(0),
        }
    }

    fn check(&self, step: &str) -> Result<()> {
        let k = self.count.get();
        self.count.set(k + 1);
        if self.stop_at == Some(k) {
            let _ = writeln!(std::io::stderr(), "carrywright: stopped before {step}");
            // SAFETY: stops this process until a SIGCONT.
            unsafe {
                libc::raise(libc::SIGSTOP);
            }
        }
        match take_pending() {
            Some(sig) => Err(interrupted(sig, self.dir)),
            None => Ok(()),
        }
    }
}
