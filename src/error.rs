//! Errors and their exit codes: 2 for bad input or usage, 1 for a failed check, 128 + signal
//! for a write stopped by a signal.

use std::fmt;

/// Every failure the library reports. The message is one line, ready to print.
#[derive(Debug, Clone, PartialEq)]
pub enum Error {
    /// Bad spec, technology file or command-line value (exit code 2).
    Input(String),
    /// A structural or logic check of a built netlist failed (exit code 1).
    Check(String),
    /// Writing the outputs failed (exit code 2: the destination is unusable).
    Output(String),
    /// A write stopped by this signal number, nothing changed (exit code 128 + signal).
    Interrupted(i32, String),
}

impl Error {
    pub fn exit_code(&self) -> i32 {
        match self {
            Error::Check(_) => 1,
            Error::Input(_) | Error::Output(_) => 2,
            Error::Interrupted(sig, _) => 128 + sig,
        }
    }
    pub fn message(&self) -> &str {
        match self {
            Error::Input(m) | Error::Check(m) | Error::Output(m) | Error::Interrupted(_, m) => m,
        }
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.message())
    }
}

impl std::error::Error for Error {}

pub type Result<T> = std::result::Result<T, Error>;
