//! Writing outputs under hostile conditions, with the built binary: a folder in the way,
//! concurrent writers, SIGINT / SIGTERM / SIGKILL at every step of a write and at seeded
//! random moments, a dangling symbolic link, a name too long, `describe --svg` modes and
//! messages, `generate --check` on a file.
//!
//! The promise checked everywhere: the output folder holds either the complete old set of
//! files or the complete new set (other files in it kept), and no `.carrywright-*` staging
//! folder survives a failure or an interrupt the process can observe (after SIGKILL, the next
//! writer, or `carrywright::output::recover`, finishes or removes it).
//!
//! Unix only (signals, `/proc`). Every run is bounded; nothing here measures time.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Output, Stdio};
use tempfile::TempDir;

/// Two specs with the same design name (so the same five file names) whose files all differ.
const SPEC_A: &str = "name: t8\nwidth: 8\narchitecture: manchester\nblock: 4\n";
const SPEC_B: &str = "name: t8\nwidth: 8\narchitecture: manchester\nblock: 2\n";
const FILES: &[&str] = &["t8.json", "t8.sp", "t8.v", "t8_tb.sp", "t8_tb.v"];
/// A file of the user's that lives in the output folder and must survive every write.
const MINE: &str = "notes.txt";

type Set = BTreeMap<String, Vec<u8>>;

fn bin() -> Command {
    let mut c = Command::new(env!("CARGO_BIN_EXE_carrywright"));
    c.env_remove("CARRYWRIGHT_MODEL_DIR")
        .env_remove("CARRYWRIGHT_TEST_STOP_AT");
    c
}

/// A temporary folder with `a.yaml`, `b.yaml` and the reference sets each generates.
struct Bench {
    dir: TempDir,
    a: Set,
    b: Set,
}

impl Bench {
    fn new() -> Bench {
        let dir = tempfile::tempdir().expect("create a temporary folder");
        std::fs::write(dir.path().join("a.yaml"), SPEC_A).unwrap();
        std::fs::write(dir.path().join("b.yaml"), SPEC_B).unwrap();
        let mut bench = Bench {
            dir,
            a: Set::new(),
            b: Set::new(),
        };
        for (spec, out) in [("a.yaml", "ref_a"), ("b.yaml", "ref_b")] {
            let run = bench.run(&["generate", spec, "-o", out]);
            assert_eq!(run.status.code(), Some(0), "{}", text(&run));
        }
        bench.a = files_of(&bench.path("ref_a"));
        bench.b = files_of(&bench.path("ref_b"));
        assert_eq!(bench.a.keys().collect::<Vec<_>>(), FILES);
        for f in FILES {
            assert_ne!(bench.a[*f], bench.b[*f], "{f} must differ between A and B");
        }
        bench
    }

    fn path(&self, rel: &str) -> PathBuf {
        self.dir.path().join(rel)
    }

    fn cmd(&self, args: &[&str]) -> Command {
        let mut c = bin();
        c.args(args).current_dir(self.dir.path());
        c
    }

    fn run(&self, args: &[&str]) -> Output {
        self.cmd(args).output().expect("run carrywright")
    }

    /// `rel` holding the old set A (copied from the reference) plus the user's own file.
    fn old_set_in(&self, rel: &str) {
        let dir = self.path(rel);
        let _ = std::fs::remove_dir_all(&dir);
        std::fs::create_dir(&dir).unwrap();
        for (name, bytes) in &self.a {
            std::fs::write(dir.join(name), bytes).unwrap();
        }
        std::fs::write(dir.join(MINE), "mine\n").unwrap();
    }

    /// The set A or B plus the user's file, whichever `rel` holds; panics on anything else.
    fn which_set(&self, rel: &str, context: &str) -> char {
        self.which_set_with(rel, context, true)
    }

    /// As `which_set`; `mine`: whether the user's file is expected.
    fn which_set_with(&self, rel: &str, context: &str, mine: bool) -> char {
        let found = files_of(&self.path(rel));
        for (name, set) in [('A', &self.a), ('B', &self.b)] {
            let mut want = set.clone();
            if mine {
                want.insert(MINE.into(), b"mine\n".to_vec());
            }
            if found == want {
                return name;
            }
        }
        let from = |f: &str, bytes: &Vec<u8>| {
            if self.a.get(f) == Some(bytes) {
                "A"
            } else if self.b.get(f) == Some(bytes) {
                "B"
            } else {
                "neither"
            }
        };
        let listing: Vec<String> = found
            .iter()
            .map(|(f, bytes)| format!("{f} ({})", from(f, bytes)))
            .collect();
        panic!("{context}: {rel} holds a mixed or incomplete set: {listing:?}");
    }

    fn leftovers(&self) -> Vec<String> {
        let mut found = Vec::new();
        walk(self.dir.path(), &mut |p| {
            if p.file_name()
                .is_some_and(|n| n.to_string_lossy().starts_with(".carrywright-"))
            {
                found.push(p.display().to_string());
            }
        });
        found
    }

    fn assert_no_leftovers(&self, context: &str) {
        let l = self.leftovers();
        assert!(l.is_empty(), "{context}: staging left behind: {l:?}");
    }
}

fn walk(dir: &Path, f: &mut dyn FnMut(&Path)) {
    for e in std::fs::read_dir(dir).unwrap().flatten() {
        let p = e.path();
        f(&p);
        if e.file_type().unwrap().is_dir() {
            walk(&p, f);
        }
    }
}

/// The regular files directly in a folder (a folder entry maps to `[]` with a `/` suffix).
fn files_of(dir: &Path) -> Set {
    let mut set = Set::new();
    for e in std::fs::read_dir(dir)
        .unwrap_or_else(|e| panic!("list {}: {e}", dir.display()))
        .flatten()
    {
        let name = e.file_name().to_string_lossy().into_owned();
        if e.file_type().unwrap().is_dir() {
            set.insert(format!("{name}/"), Vec::new());
        } else {
            set.insert(name, std::fs::read(e.path()).unwrap());
        }
    }
    set
}

fn text(o: &Output) -> String {
    format!(
        "exit {:?}\nstdout:\n{}\nstderr:\n{}",
        o.status,
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    )
}

/// The run failed with exit 2 and one `error: ` line; return it.
fn one_error(o: &Output) -> String {
    assert_eq!(o.status.code(), Some(2), "{}", text(o));
    let err = String::from_utf8_lossy(&o.stderr).into_owned();
    let lines: Vec<&str> = err.lines().collect();
    assert_eq!(lines.len(), 1, "one line expected\n{}", text(o));
    assert!(lines[0].starts_with("error: "), "{}", text(o));
    for leak in [".carrywright-", "temporary", "persist"] {
        assert!(
            !lines[0].contains(leak),
            "message leaks `{leak}`\n{}",
            text(o)
        );
    }
    lines[0].to_string()
}

fn signal(child: &Child, sig: libc::c_int) {
    // SAFETY: signalling our own child by its id.
    unsafe {
        libc::kill(child.id() as libc::pid_t, sig);
    }
}

/// Wait until the child stops itself (SIGSTOP) or exits; true if it stopped.
fn stopped_or_exited(child: &mut Child) -> bool {
    loop {
        if child.try_wait().unwrap().is_some() {
            return false;
        }
        let stat =
            std::fs::read_to_string(format!("/proc/{}/stat", child.id())).unwrap_or_default();
        // The state is the field after the parenthesised command name.
        if let Some((_, rest)) = stat.rsplit_once(") ") {
            if rest.starts_with('T') {
                return true;
            }
        }
        std::thread::sleep(std::time::Duration::from_millis(2));
    }
}

#[test]
fn a_folder_in_the_way_is_found_before_anything_is_replaced() {
    let bench = Bench::new();
    bench.old_set_in("out");
    std::fs::remove_file(bench.path("out/t8.json")).unwrap();
    std::fs::create_dir_all(bench.path("out/t8.json/inner")).unwrap();
    let before = files_of(&bench.path("out"));
    let run = bench.run(&["generate", "b.yaml", "-o", "out"]);
    let line = one_error(&run);
    assert!(
        line.contains("out/t8.json") && line.contains("folder"),
        "{line}"
    );
    assert_eq!(
        files_of(&bench.path("out")),
        before,
        "nothing may be replaced"
    );
    bench.assert_no_leftovers("folder in the way");
}

#[test]
fn concurrent_writers_into_one_folder_leave_one_complete_set() {
    let bench = Bench::new();
    bench.old_set_in("out");
    let mut seen = BTreeMap::new();
    for pair in 0..24 {
        let (first, second) = if pair % 2 == 0 {
            ("a.yaml", "b.yaml")
        } else {
            ("b.yaml", "a.yaml")
        };
        let spawn = |spec: &str| {
            bench
                .cmd(&["generate", spec, "-o", "out"])
                .stdout(Stdio::null())
                .stderr(Stdio::piped())
                .spawn()
                .unwrap()
        };
        // Every third pair races into a folder that does not exist yet.
        let new_folder = pair % 3 == 0;
        if new_folder {
            std::fs::remove_dir_all(bench.path("out")).unwrap();
        }
        let (x, y) = (spawn(first), spawn(second));
        for child in [x, y] {
            let o = child.wait_with_output().unwrap();
            assert_eq!(o.status.code(), Some(0), "pair {pair}: {}", text(&o));
            let err = String::from_utf8_lossy(&o.stderr);
            assert!(
                err.is_empty() || err.trim() == "waiting for another carrywright writing out",
                "pair {pair}: unexpected stderr {err:?}"
            );
        }
        let set = bench.which_set_with("out", &format!("pair {pair}"), !new_folder);
        *seen.entry(set).or_insert(0) += 1;
        bench.assert_no_leftovers(&format!("pair {pair}"));
        if new_folder {
            std::fs::write(bench.path("out").join(MINE), "mine\n").unwrap();
        }
    }
    println!("final sets over 24 pairs (8 into a new folder): {seen:?}");
}

#[test]
fn a_second_writer_waits_with_a_message_while_the_folder_is_locked() {
    let bench = Bench::new();
    bench.old_set_in("out");
    let folder = std::fs::File::open(bench.path("out")).unwrap();
    // SAFETY: flock on a file we own; released when `folder` is closed.
    assert_eq!(
        unsafe {
            libc::flock(
                std::os::unix::io::AsRawFd::as_raw_fd(&folder),
                libc::LOCK_EX,
            )
        },
        0
    );
    let mut child = bench
        .cmd(&["generate", "b.yaml", "-o", "out"])
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let mut stderr = std::io::BufReader::new(child.stderr.take().unwrap());
    let mut line = String::new();
    std::io::BufRead::read_line(&mut stderr, &mut line).unwrap();
    assert_eq!(line.trim(), "waiting for another carrywright writing out");
    assert!(
        child.try_wait().unwrap().is_none(),
        "it must wait for the lock"
    );
    assert_eq!(bench.which_set("out", "while locked"), 'A');
    drop(folder);
    assert_eq!(child.wait().unwrap().code(), Some(0));
    assert_eq!(bench.which_set("out", "after the lock"), 'B');
    bench.assert_no_leftovers("after waiting");
}

/// Stop a write of B over A at step `k` (the binary's test hook), deliver `sig`, and check
/// the outcome. Returns false once `k` is past the last step.
fn signal_at_step(bench: &Bench, new_folder: bool, k: usize, sig: libc::c_int) -> bool {
    let context = format!(
        "signal {sig} at step {k} into {} folder",
        if new_folder { "a new" } else { "an existing" }
    );
    if new_folder {
        let _ = std::fs::remove_dir_all(bench.path("out"));
    } else {
        bench.old_set_in("out");
    }
    let mut child = bench
        .cmd(&["generate", "b.yaml", "-o", "out"])
        .env("CARRYWRIGHT_TEST_STOP_AT", k.to_string())
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    if !stopped_or_exited(&mut child) {
        let o = child.wait_with_output().unwrap();
        assert_eq!(o.status.code(), Some(0), "{context}: {}", text(&o));
        return false;
    }
    signal(&child, sig);
    signal(&child, libc::SIGCONT);
    let o = child.wait_with_output().unwrap();
    if sig == libc::SIGKILL {
        // Killed without notice: the next writer (here the library's recovery) finishes or
        // removes what it left.
        assert_eq!(o.status.code(), None, "{context}: {}", text(&o));
        let root = if new_folder {
            bench.dir.path().to_path_buf()
        } else {
            bench.path("out")
        };
        carrywright::output::recover(&root).unwrap();
        if new_folder {
            if bench.path("out").exists() {
                assert_eq!(bench.which_set_with("out", &context, false), 'B');
            }
        } else {
            bench.which_set("out", &context);
        }
    } else {
        assert_eq!(o.status.code(), Some(128 + sig), "{context}: {}", text(&o));
        let err = String::from_utf8_lossy(&o.stderr);
        assert!(
            err.contains("error: interrupted by SIG"),
            "{context}: {err}"
        );
        if new_folder {
            assert!(!bench.path("out").exists(), "{context}: out was created");
        } else {
            assert_eq!(
                bench.which_set("out", &context),
                'A',
                "{context}: must roll back"
            );
        }
    }
    bench.assert_no_leftovers(&context);
    true
}

#[test]
fn a_signal_at_every_step_leaves_the_old_set_or_the_new_one() {
    let bench = Bench::new();
    let cases = [
        (false, libc::SIGINT),
        (false, libc::SIGKILL),
        (true, libc::SIGTERM),
        (true, libc::SIGKILL),
    ];
    for (new_folder, sig) in cases {
        let mut k = 0;
        while signal_at_step(&bench, new_folder, k, sig) {
            k += 1;
            assert!(k < 100, "the write never ends");
        }
        // Five files staged, a commit, five replacements (existing folder), a finish.
        assert!(k >= if new_folder { 7 } else { 12 }, "only {k} steps seen");
    }
    // SIGHUP (a closed terminal) mid-commit is deferred and rolled back the same way.
    assert!(signal_at_step(&bench, false, 8, libc::SIGHUP));
}

/// SplitMix64 (common practice), for seeded delays.
fn splitmix(state: &mut u64) -> u64 {
    *state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
    let mut z = *state;
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// Spin until a `.carrywright-*` entry shows in one of `dirs` or the child exits.
fn wait_for_staging(dirs: &[PathBuf], child: &mut Child) {
    while child.try_wait().unwrap().is_none() {
        let staging = dirs.iter().any(|d| {
            std::fs::read_dir(d).is_ok_and(|mut it| {
                it.any(|e| {
                    e.is_ok_and(|e| e.file_name().to_string_lossy().starts_with(".carrywright-"))
                })
            })
        });
        if staging {
            return;
        }
        std::thread::yield_now();
    }
}

#[test]
fn signals_at_random_moments_leave_the_old_set_or_the_new_one() {
    let bench = Bench::new();
    // How long one run takes here, to spread the signals over its whole life.
    let start = std::time::Instant::now();
    let run = bench.run(&["generate", "b.yaml", "-o", "timing"]);
    assert_eq!(run.status.code(), Some(0), "{}", text(&run));
    let span = start.elapsed().as_micros().max(1000) as u64 * 5 / 4;
    let mut seed = 6_2026;
    let mut outcome: BTreeMap<String, usize> = BTreeMap::new();
    for i in 0..64 {
        let sig = if i % 2 == 0 {
            libc::SIGINT
        } else {
            libc::SIGKILL
        };
        let context = format!("run {i}, signal {sig}");
        bench.old_set_in("out");
        let mut child = bench
            .cmd(&["generate", "b.yaml", "-o", "out"])
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()
            .unwrap();
        // Half the signals at a moment anywhere in the run; half a moment after a staging
        // folder appears (the write has begun: it lasts a few milliseconds).
        let r = splitmix(&mut seed);
        let delay = if i % 4 < 2 {
            r % span
        } else {
            wait_for_staging(&[bench.path("out"), bench.path("")], &mut child);
            r % 3000
        };
        std::thread::sleep(std::time::Duration::from_micros(delay));
        signal(&child, sig);
        let status = child.wait().unwrap();
        if sig == libc::SIGKILL {
            carrywright::output::recover(&bench.path("out")).unwrap();
        }
        let set = bench.which_set("out", &context);
        if sig == libc::SIGINT && status.code() == Some(130) {
            assert_eq!(set, 'A', "{context}: an interrupted write must roll back");
        }
        bench.assert_no_leftovers(&context);
        *outcome
            .entry(format!("{:?} -> {set}", status.code()))
            .or_insert(0) += 1;
    }
    println!("exit code -> set, over 64 runs: {outcome:?}");
}

#[test]
fn the_next_run_finishes_a_write_killed_mid_commit() {
    let bench = Bench::new();
    bench.old_set_in("out");
    // Steps 0-4 stage the files, 5 is the commit, 6.. replace: stop after two replacements.
    let mut child = bench
        .cmd(&["generate", "b.yaml", "-o", "out"])
        .env("CARRYWRIGHT_TEST_STOP_AT", "8")
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    assert!(stopped_or_exited(&mut child));
    signal(&child, libc::SIGKILL);
    child.wait().unwrap();
    assert!(
        !bench.leftovers().is_empty(),
        "the killed run leaves its journal"
    );
    // The next run is a --check-free generate of A: it first finishes B's commit, then
    // writes A; the user's file is kept throughout.
    let run = bench.run(&["generate", "a.yaml", "-o", "out"]);
    assert_eq!(run.status.code(), Some(0), "{}", text(&run));
    assert_eq!(bench.which_set("out", "after the next run"), 'A');
    bench.assert_no_leftovers("after the next run");
}

#[test]
fn a_dangling_symbolic_link_as_output_is_refused_cleanly() {
    let bench = Bench::new();
    std::os::unix::fs::symlink("nowhere", bench.path("out")).unwrap();
    let line = one_error(&bench.run(&["generate", "a.yaml", "-o", "out"]));
    assert!(line.contains("out") && line.contains("nowhere"), "{line}");
    assert!(!bench.path("nowhere").exists());
    assert!(std::fs::symlink_metadata(bench.path("out"))
        .unwrap()
        .file_type()
        .is_symlink());
    bench.assert_no_leftovers("dangling link");
}

#[test]
fn a_failed_new_folder_leaves_no_parent_behind() {
    let bench = Bench::new();
    let long = "x".repeat(300);
    let out = format!("newp/{long}/out");
    let line = one_error(&bench.run(&["generate", "a.yaml", "-o", &out]));
    assert!(line.contains("newp/"), "{line}");
    assert!(!bench.path("newp").exists(), "newp/ was left behind");
    // A parent that existed before stays.
    std::fs::create_dir(bench.path("keep")).unwrap();
    one_error(&bench.run(&["generate", "a.yaml", "-o", &format!("keep/{long}/out")]));
    assert!(bench.path("keep").is_dir());
    bench.assert_no_leftovers("long name");
}

/// The process umask, from /proc (0o022 if unreadable).
fn umask() -> u32 {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|s| {
            s.lines()
                .find_map(|l| l.strip_prefix("Umask:"))
                .and_then(|v| u32::from_str_radix(v.trim(), 8).ok())
        })
        .unwrap_or(0o022)
}

#[test]
fn svg_and_generated_files_get_the_usual_mode() {
    use std::os::unix::fs::PermissionsExt;
    let bench = Bench::new();
    let mode = |p: &Path| std::fs::metadata(p).unwrap().permissions().mode() & 0o777;
    let run = bench.run(&["describe", "a.yaml", "--svg", "draw/t8.svg"]);
    assert_eq!(run.status.code(), Some(0), "{}", text(&run));
    // Like any program that creates a file with open(2) (common practice).
    let want = 0o666 & !umask();
    assert_eq!(mode(&bench.path("draw/t8.svg")), want);
    assert_eq!(mode(&bench.path("draw")), 0o777 & !umask());
    assert_eq!(mode(&bench.path("ref_a/t8.v")), want);
    assert_eq!(mode(&bench.path("ref_a")), 0o777 & !umask());
    bench.assert_no_leftovers("svg");
}

#[test]
fn svg_onto_a_folder_gives_a_clean_message() {
    let bench = Bench::new();
    std::fs::create_dir(bench.path("drawings")).unwrap();
    let line = one_error(&bench.run(&["describe", "a.yaml", "--svg", "drawings"]));
    assert!(line.contains("drawings is a folder"), "{line}");
    assert!(files_of(&bench.path("drawings")).is_empty());
    bench.assert_no_leftovers("svg onto a folder");
}

#[test]
fn check_against_a_regular_file_is_an_error() {
    let bench = Bench::new();
    std::fs::write(bench.path("plain"), "x").unwrap();
    let line = one_error(&bench.run(&["generate", "a.yaml", "-o", "plain", "--check"]));
    assert!(
        line.contains("plain") && line.contains("not a folder"),
        "{line}"
    );
}

#[test]
fn an_unusable_destination_is_named_as_given() {
    let bench = Bench::new();
    if !Path::new("/proc/self").exists() {
        println!("SKIPPED: no /proc here");
        return;
    }
    let line = one_error(&bench.run(&["generate", "a.yaml", "-o", "/proc/foo"]));
    assert!(line.contains("/proc/foo"), "{line}");
}
