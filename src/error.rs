//! The top-level error: everything a command can fail with, and the exit status it maps to.
//!
//! In: errors of each layer (diagnostics from the parsers, I/O failures, broken IR invariants).
//! Out: one value rendered once by the binary. Bad input exits with 2, internal failures with 1;
//! a closed stdout (the reader of a pipe stopped early) is a quiet exit with status 0.
//!
//! The library layers without source text (`check`, `estimate`, `sim`, `fermion`, `report`,
//! `route`, the plan of `family`, the claims of `tableau`, the native sets of `device`)
//! each have their own error enum implementing [`LayerError`]: every variant says whether it is
//! bad input (with its catalogue code) or a phasewright bug, so the command layer converts it
//! with [`Error::from_layer`] / [`Error::layer_in`] and never picks an exit status itself.

use crate::circuit::verify::IrError;
use crate::diag::Code;
use crate::diag::{render_all, Diagnostic};
use std::fmt;

#[derive(Debug)]
pub enum Error {
    /// Problems in an input file, with positions.
    Input(Vec<Diagnostic>),
    /// A bad command-line value or an input problem without a position in a file.
    Usage {
        code: Code,
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

/// Who a layer's failure is due to, which fixes the exit status.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Blame {
    /// Bad input (a file, a plan, an option): exit 2, reported under this catalogue code.
    Input(Code),
    /// A phasewright bug: exit 1, reported as an internal failure.
    Bug,
}

/// An error of one library layer: its message (`Display`), who is to blame, and perhaps a hint.
pub trait LayerError: fmt::Display {
    fn blame(&self) -> Blame;
    /// How to fix it, when the layer knows.
    fn hint(&self) -> Option<&str> {
        None
    }
}

/// `impl From<$t> for Error` through [`LayerError`], for the layers' error enums.
macro_rules! from_layer {
    ($($t:ty),* $(,)?) => {
        $(impl From<$t> for Error {
            fn from(e: $t) -> Error {
                Error::from_layer(&e)
            }
        })*
    };
}

from_layer!(
    crate::check::CheckError,
    crate::estimate::EstimateError,
    crate::sim::SimError,
    crate::fermion::FermionError,
    crate::report::plot::PlotError,
    crate::route::RouteError,
    crate::plan::PlanError,
    crate::tableau::equiv::ClaimError,
    crate::device::native::NativeError,
);

impl Error {
    /// A layer's error as it is: its message, its blame's code and exit status, its hint.
    pub fn from_layer(e: &dyn LayerError) -> Error {
        Error::layer_in(e, "", None)
    }

    /// A layer's error with context added by the caller: `context` is put before the message
    /// (e.g. the circuit or option it concerns) and `hint`, when given, replaces the layer's.
    /// The code and exit status still come from the layer's [`Blame`].
    pub fn layer_in(e: &dyn LayerError, context: &str, hint: Option<&str>) -> Error {
        let message = format!("{context}{e}");
        match e.blame() {
            Blame::Input(code) => Error::Usage {
                code,
                message,
                hint: hint.or(e.hint()).map(str::to_string),
            },
            Blame::Bug => Error::Internal(message),
        }
    }

    pub fn usage(code: Code, message: impl Into<String>, hint: Option<&str>) -> Error {
        Error::Usage {
            code,
            message: message.into(),
            hint: hint.map(str::to_string),
        }
    }

    pub fn input(d: Diagnostic) -> Error {
        Error::Input(vec![d])
    }

    /// The catalogue code of the problem (the first diagnostic's, for input errors).
    pub fn code(&self) -> Option<Code> {
        match self {
            Error::Input(ds) => ds.first().map(|d| d.code),
            Error::Usage { code, .. } => Some(*code),
            Error::Io { .. } => Some(Code::FileAccess),
            Error::Ir(_) | Error::Internal(_) => Some(Code::Internal),
            Error::BrokenPipe => None,
        }
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
            Error::Input(ds) => {
                write!(f, "{}", render_all(ds))?;
                if let Some(d) = ds.first() {
                    writeln!(f, "(`phasewright explain {}` says more)", d.code)?;
                }
                Ok(())
            }
            Error::Usage {
                code,
                message,
                hint,
            } => {
                writeln!(f, "error {code}: {message}")?;
                if let Some(h) = hint {
                    writeln!(f, "hint: {h}")?;
                }
                writeln!(f, "(`phasewright explain {code}` says more)")
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
                let code = Code::FileAccess;
                writeln!(f, "error {code}: {verb} {path}: {source}")?;
                writeln!(f, "(`phasewright explain {code}` says more)")
            }
            Error::Ir(e) => writeln!(
                f,
                "internal error {} (a phasewright bug, please report it): {e}",
                Code::Internal
            ),
            Error::Internal(m) => writeln!(f, "internal error {}: {m}", Code::Internal),
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::check::CheckError;
    use crate::device::native::NativeError;
    use crate::estimate::EstimateError;
    use crate::fermion::FermionError;
    use crate::plan::PlanError;
    use crate::report::plot::PlotError;
    use crate::sim::SimError;
    use crate::tableau::equiv::ClaimError;

    /// (exit status, code, rendered text) of a converted layer error.
    fn shown(e: Error) -> (u8, Option<Code>, String) {
        (e.exit_code(), e.code(), e.to_string())
    }

    #[test]
    fn layer_errors_keep_their_blame_through_the_conversion() {
        let too_wide = SimError::TooWide { qubits: 41 };
        let (exit, code, text) = shown(too_wide.clone().into());
        assert_eq!((exit, code), (2, Some(Code::UsageLimit)));
        assert!(
            text.starts_with("error U401: a 41-qubit statevector"),
            "{text}"
        );

        // Context goes before the message; the code still comes from the layer.
        let check = CheckError::from(too_wide);
        let (exit, code, text) = shown(Error::layer_in(&check, "", Some("a hint")));
        assert_eq!((exit, code), (2, Some(Code::UsageLimit)));
        assert!(text.contains("\nhint: a hint\n"), "{text}");
        let unmeasured = CheckError::UnmeasuredBit {
            circuit: Some("k01-re".into()),
            bit: 3,
        };
        let (exit, code, text) = shown(unmeasured.into());
        assert_eq!((exit, code), (2, Some(Code::QasmPlan)));
        assert!(
            text.contains("k01-re: classical bit 3 is never measured"),
            "{text}"
        );

        let (exit, code, text) = shown(EstimateError::Missing("no k = 3 circuit".into()).into());
        assert_eq!((exit, code), (2, Some(Code::CountsPlan)));
        assert!(
            text.contains("hint: check that the counts answer this plan"),
            "{text}"
        );
        let loss = EstimateError::NoCalibration {
            circuit: "k01-re".into(),
            found: None,
        };
        let (exit, code, text) = shown(Error::layer_in(&loss, "--undo-loss: ", None));
        assert_eq!((exit, code), (2, Some(Code::UsageConflict)));
        assert!(
            text.starts_with("error U201: --undo-loss: circuit `k01-re`"),
            "{text}"
        );
        assert!(
            text.contains("hint: compile the campaign with --device"),
            "{text}"
        );

        let (exit, code, _) = shown(FermionError::Encoding("xy".into()).into());
        assert_eq!((exit, code), (2, Some(Code::UsageOption)));

        // A drawing failure on a well-formed report is phasewright's fault: exit 1.
        let (exit, code, text) = shown(PlotError::Drawing("backend".into()).into());
        assert_eq!((exit, code), (1, Some(Code::Internal)));
        assert!(
            text.starts_with("internal error X101: cannot draw the plot"),
            "{text}"
        );
        let (exit, _, _) = shown(PlotError::Empty("energy").into());
        assert_eq!(exit, 2);

        // The plan, claim and native-set layers: all bad input, each under its own code.
        let term = PlanError::UnreadableTerm {
            term: "Z0 Q1".into(),
            num_qubits: 2,
        };
        let (exit, code, text) = shown(term.clone().into());
        assert_eq!((exit, code), (2, Some(Code::PlanInconsistent)));
        assert!(
            text.starts_with("error P301: plan.json: cannot read term `Z0 Q1` on 2 qubits\n"),
            "{text}"
        );
        let (exit, code, text) = shown(ClaimError::UnknownOrder(3).into());
        assert_eq!((exit, code), (2, Some(Code::PlanSyntax)));
        assert!(
            text.contains("hint: plan.json does not describe a campaign phasewright wrote"),
            "{text}"
        );
        let (exit, code, text) = shown(ClaimError::Hamiltonian(CheckError::from(term)).into());
        assert_eq!((exit, code), (2, Some(Code::PlanSyntax)));
        assert!(
            text.contains(": plan.json: cannot read term `Z0 Q1`"),
            "{text}"
        );
        let (exit, code, text) = shown(NativeError::NoEntangler.into());
        assert_eq!((exit, code), (2, Some(Code::DevDeclare)));
        assert!(text.contains("no entangling gate (cx or cz)"), "{text}");
    }
}
