//! One child process with a wall-clock limit, its output in a log file.

use super::Status;
use std::path::Path;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

/// How a child ended.
#[derive(Debug)]
pub struct Ran {
    /// Exit code; None when it could not start, was killed, or ended on a signal.
    pub code: Option<i32>,
    pub wall_s: f64,
    /// It could not start because the program was not found.
    pub missing: bool,
    /// It could not start for another reason.
    pub start_error: Option<String>,
    pub timed_out: bool,
    /// Ended on a signal.
    pub signalled: bool,
}

impl Ran {
    /// A run that did not end by itself with an exit code: (status, one-line message).
    pub fn problem(&self, program: &str, limit: Duration) -> Option<(Status, String)> {
        if self.missing {
            return Some((
                Status::Missing,
                format!("{program} is not installed (not found on PATH); scripts/install-tools.sh installs it"),
            ));
        }
        if let Some(e) = &self.start_error {
            return Some((Status::Failed, format!("{program} could not start: {e}")));
        }
        if self.timed_out {
            return Some((
                Status::Timeout,
                format!(
                    "{program} ran past the {} s limit (--timeout) and was stopped",
                    limit.as_secs_f64()
                ),
            ));
        }
        if self.signalled {
            return Some((Status::Failed, format!("{program} was killed by a signal")));
        }
        None
    }
}

/// Run `argv` in `dir`, stdout and stderr appended to `log` (created unless `append`), at
/// most `limit` of wall time; a child past it is killed.
pub fn run(argv: &[String], dir: &Path, log: &Path, limit: Duration, append: bool) -> Ran {
    let t0 = Instant::now();
    let mut ran = Ran {
        code: None,
        wall_s: 0.0,
        missing: false,
        start_error: None,
        timed_out: false,
        signalled: false,
    };
    let file = std::fs::OpenOptions::new()
        .create(true)
        .append(append)
        .write(true)
        .truncate(!append)
        .open(log);
    let (out, err) = match file.and_then(|f| Ok((f.try_clone()?, f))) {
        Ok(p) => p,
        Err(e) => {
            ran.start_error = Some(format!("cannot write {}: {e}", log.display()));
            return ran;
        }
    };
    let child = Command::new(&argv[0])
        .args(&argv[1..])
        .current_dir(dir)
        .stdin(Stdio::null())
        .stdout(Stdio::from(out))
        .stderr(Stdio::from(err))
        .spawn();
    let mut child = match child {
        Ok(c) => c,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
            ran.missing = true;
            return ran;
        }
        Err(e) => {
            ran.start_error = Some(e.to_string());
            return ran;
        }
    };
    loop {
        match child.try_wait() {
            Ok(Some(status)) => {
                ran.code = status.code();
                ran.signalled = status.code().is_none();
                break;
            }
            Ok(None) if t0.elapsed() >= limit => {
                let _ = child.kill();
                let _ = child.wait();
                ran.timed_out = true;
                break;
            }
            Ok(None) => std::thread::sleep(Duration::from_millis(20)),
            Err(e) => {
                ran.start_error = Some(e.to_string());
                let _ = child.kill();
                let _ = child.wait();
                break;
            }
        }
    }
    ran.wall_s = (t0.elapsed().as_secs_f64() * 100.0).round() / 100.0;
    ran
}
