//! The estimate layer's error: why counts and a plan cannot be turned into numbers.
//!
//! In: what a stage of `estimate` found wrong. Out: an [`EstimateError`] whose message is the
//! one shown to the user and whose [`Blame`] fixes the code and exit status. Invariant: every
//! variant is bad input (exit 2) — the estimators run on any plan that `Plan::validate` and
//! the counts reader accept, so nothing here is a phasewright bug.

use crate::diag::Code;
use crate::error::{Blame, LayerError};
use std::fmt;

/// Why `estimate` (or `allot`) cannot go on.
#[derive(Clone, Debug, PartialEq)]
pub enum EstimateError {
    /// A plain time-evolution campaign: its counts are not Hadamard-test reads.
    Evolution,
    /// The plan contradicts itself (no time points, a non-positive `dt`, no states, a term
    /// that does not parse); `Plan::validate` reports these with their place first.
    Plan(String),
    /// The counts and the plan lack a read an estimator needs (a circuit of the series).
    Missing(String),
    /// An option value that cannot be used.
    Option(String),
    /// `--undo-loss` on a circuit without a usable calibrated success probability.
    NoCalibration {
        circuit: String,
        /// The recorded value when there is one (outside `(0, 1]`).
        found: Option<f64>,
    },
    /// `allot` on a campaign whose circuits read nothing.
    NothingToAllot,
    /// A bitstring of a counts file that is not one 0/1 character per classical bit.
    Bitstring(BitstringProblem),
}

/// What is wrong with a bitstring.
#[derive(Clone, Debug, PartialEq)]
pub enum BitstringProblem {
    /// A character other than 0 and 1.
    Character { bits: String, bad: char },
    /// The wrong number of bits for the circuit.
    Length {
        bits: String,
        len: usize,
        expected: usize,
    },
    /// More bits than an outcome mask holds.
    TooLong { max: usize },
}

impl fmt::Display for EstimateError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            EstimateError::Evolution => f.write_str(super::EVOLUTION_REFUSAL),
            EstimateError::Plan(m) | EstimateError::Missing(m) | EstimateError::Option(m) => {
                f.write_str(m)
            }
            EstimateError::NoCalibration {
                circuit,
                found: Some(p),
            } => write!(
                f,
                "circuit `{circuit}` records success probability {p}, not in (0, 1]"
            ),
            EstimateError::NoCalibration {
                circuit,
                found: None,
            } => write!(
                f,
                "circuit `{circuit}` records no calibrated success probability (the plan was \
                 compiled without --device)"
            ),
            EstimateError::NothingToAllot => f.write_str(
                "a plain time-evolution campaign reads nothing: there is no estimator \
                    whose variance an allocation could lower",
            ),
            EstimateError::Bitstring(BitstringProblem::Character { bits, bad }) => write!(
                f,
                "bitstring `{bits}` contains `{bad}`; only 0 and 1 are allowed"
            ),
            EstimateError::Bitstring(BitstringProblem::Length {
                bits,
                len,
                expected,
            }) => write!(f, "bitstring `{bits}` has {len} bits, expected {expected}"),
            EstimateError::Bitstring(BitstringProblem::TooLong { max }) => {
                write!(f, "bitstrings longer than {max} bits are not supported")
            }
        }
    }
}

impl std::error::Error for EstimateError {}

impl From<crate::plan::PlanError> for EstimateError {
    fn from(e: crate::plan::PlanError) -> EstimateError {
        EstimateError::Plan(e.to_string())
    }
}

impl LayerError for EstimateError {
    fn blame(&self) -> Blame {
        Blame::Input(match self {
            EstimateError::Evolution => Code::UsageInput,
            EstimateError::Missing(_) => Code::CountsPlan,
            EstimateError::Plan(_) => Code::PlanInconsistent,
            EstimateError::Option(_) => Code::UsageOption,
            EstimateError::NoCalibration { .. } => Code::UsageConflict,
            EstimateError::NothingToAllot => Code::UsageInput,
            EstimateError::Bitstring(_) => Code::CountsEntry,
        })
    }

    fn hint(&self) -> Option<&str> {
        match self {
            EstimateError::Evolution => Some(
                "use rehearse or your own device runs to sample them; compile --measure overlap, \
                 krylov or trace for estimate",
            ),
            EstimateError::Missing(_) => Some("check that the counts answer this plan"),
            EstimateError::NoCalibration { .. } => {
                Some("compile the campaign with --device D.dev, or drop --undo-loss")
            }
            _ => None,
        }
    }
}
