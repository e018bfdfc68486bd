//! The top-level error: everything a command can fail with, and the exit status it maps to.
//!
//! In: errors of each layer (diagnostics from the parsers, I/O failures, broken IR invariants).
//! Out: one value rendered once by the binary. Bad input exits with 2, internal failures with 1;
//! a closed stdout (the reader of a pipe stopped early) is a quiet exit with status 0.

use crate::circuit::verify::IrError;
use crate::lang::diag::{render_all, Diagnostic};
use std::fmt;

#[derive(Debug)]
pub enum Error {
    /// Problems in an input file, with positions.
    Input(Vec<Diagnostic>),
    /// A bad command-line value or an input problem without a position in a file.
    Usage {
        message: String,
        hint: Option<String>,
    },
    /// Reading or writing a file failed.
    Io {
        path: String,
        source: std::io::Error,
        reading: bool,
    },
    /// A compiler bug: an IR invariant broke.
    Ir(IrError),
    /// Any other internal failure.
    Internal(String),
    /// stdout was closed by its reader (e.g. `| head -1`): stop quietly, nothing to report.
    BrokenPipe,
}

impl Error {
    pub fn usage(message: impl Into<String>, hint: Option<&str>) -> Error {
        Error::Usage {
            message: message.into(),
            hint: hint.map(str::to_string),
        }
    }

    pub fn input(d: Diagnostic) -> Error {
        Error::Input(vec![d])
    }

    /// 2 for bad input, 1 for internal failure.
    pub fn exit_code(&self) -> u8 {
        match self {
            Error::Input(_) | Error::Usage { .. } => 2,
            Error::Io { reading, .. } => {
                if *reading {
                    2
                } else {
                    1
                }
            }
            Error::Ir(_) | Error::Internal(_) => 1,
            Error::BrokenPipe => 0,
        }
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Error::Input(ds) => write!(f, "{}", render_all(ds)),
            Error::Usage { message, hint } => {
                writeln!(f, "error: {message}")?;
                if let Some(h) = hint {
                    writeln!(f, "hint: {h}")?;
                }
                Ok(())
            }
            Error::Io {
                path,
                source,
                reading,
            } => {
                let verb = if *reading {
                    "cannot read"
                } else {
                    "cannot write"
                };
                writeln!(f, "error: {verb} {path}: {source}")
            }
            Error::Ir(e) => writeln!(
                f,
                "internal error (a phasewright bug, please report it): {e}"
            ),
            Error::Internal(m) => writeln!(f, "internal error: {m}"),
            Error::BrokenPipe => Ok(()),
        }
    }
}

impl std::error::Error for Error {}

impl From<IrError> for Error {
    fn from(e: IrError) -> Error {
        Error::Ir(e)
    }
}

pub type Result<T> = std::result::Result<T, Error>;
