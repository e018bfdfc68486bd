//! Why routing refused or failed: the one error type of the `route` layer.
//!
//! In: the failures of planning a layout ([`super::plan_target`], [`super::plan_and_route_step`]
//! and its variants), of building a [`super::TargetPlan`] from a given layout, and of checking
//! a routing by simulation ([`super::routing_error`]). Out: a [`RouteError`] whose variant says
//! whose fault it is. The problem not fitting the device (too few qubits, a coupling graph whose
//! connected parts are all too small) and a layout handed in by the caller that the device
//! cannot hold are bad input: exit 2 under `U301` (a check too wide to simulate: `U401`). A
//! layout the search itself built and then refused, or a routing whose measurements moved, is
//! a phasewright bug: exit 1. Invariant: the messages are the ones users have always seen;
//! only the exit status of the bug cases changed (they were reported as bad input before).

use crate::diag::Code;
use crate::error::{Blame, LayerError};
use std::fmt;

/// A routing failure; see the module header for which variants are bad input.
#[derive(Clone, Debug, PartialEq)]
pub enum RouteError {
    /// The device has fewer qubits than the problem needs.
    TooFewQubits {
        device: String,
        /// Qubits of the device.
        has: usize,
        /// Qubits of the Hamiltonian.
        system: usize,
        /// The problem also places the Hadamard-test ancilla.
        ancilla: bool,
    },
    /// The device has enough qubits, but none of the connected parts of its coupling graph does.
    Disconnected {
        device: String,
        /// Qubits of the largest connected part.
        largest: usize,
        system: usize,
        ancilla: bool,
    },
    /// A layout of the wrong length was given for a plan.
    LayoutLength { placed: usize, needed: usize },
    /// A layout with control copies was given that does not even place the system and ancilla.
    TooShortForCopies,
    /// A layout names a physical qubit the device does not have.
    NoSuchQubit { qubit: u32, device: String },
    /// A layout puts two logical qubits on one physical qubit.
    SharedQubit { qubit: u32 },
    /// A layout uses two physical qubits in different connected parts of the coupling graph.
    NotConnected { a: u32, b: u32, device: String },
    /// A layout the search built was refused by [`super::TargetPlan::with_layout`]: a bug.
    Search(Box<RouteError>),
    /// The routed circuit measures other (physical, bit) pairs than the logical one placed by
    /// the final layout: a routing bug.
    MeasurementsDiffer {
        expected: Vec<(u32, u32)>,
        found: Vec<(u32, u32)>,
    },
    /// The routed circuit touches more qubits than [`super::check::MAX_CHECK_QUBITS`].
    TooWideToCheck { qubits: usize },
}

impl RouteError {
    /// The same error, raised on a layout the search built rather than one it was given.
    pub fn in_search(self) -> RouteError {
        match self {
            RouteError::Search(_) => self,
            e => RouteError::Search(Box::new(e)),
        }
    }

    /// How many qubits the problem needs, and what they are, for the two "does not fit"
    /// messages.
    fn needs(system: usize, ancilla: bool) -> (usize, String) {
        if ancilla {
            (
                system + 1,
                format!("{system} qubits of the Hamiltonian plus the Hadamard-test ancilla"),
            )
        } else {
            (system, format!("{system} qubits of the Hamiltonian"))
        }
    }
}

impl fmt::Display for RouteError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            RouteError::TooFewQubits {
                device,
                has,
                system,
                ancilla,
            } => {
                let (n, with_anc) = RouteError::needs(*system, *ancilla);
                write!(
                    f,
                    "device `{device}` has {has} qubits; the problem needs {n} ({with_anc})"
                )
            }
            RouteError::Disconnected {
                device,
                largest,
                system,
                ancilla,
            } => {
                let (n, with_anc) = RouteError::needs(*system, *ancilla);
                write!(
                    f,
                    "the coupling graph of `{device}` is disconnected and its largest connected \
                     part has {largest} qubits; the problem needs {n} connected qubits \
                     ({with_anc})"
                )
            }
            RouteError::LayoutLength { placed, needed } => {
                write!(
                    f,
                    "the layout places {placed} qubits; the problem has {needed}"
                )
            }
            RouteError::TooShortForCopies => {
                f.write_str("the layout places fewer qubits than the system and ancilla")
            }
            RouteError::NoSuchQubit { qubit, device } => {
                write!(f, "physical qubit {qubit} does not exist on `{device}`")
            }
            RouteError::SharedQubit { qubit } => {
                write!(f, "physical qubit {qubit} holds two logical qubits")
            }
            RouteError::NotConnected { a, b, device } => {
                write!(
                    f,
                    "physical qubits {a} and {b} are not connected on `{device}`"
                )
            }
            RouteError::Search(e) => write!(f, "{e}"),
            RouteError::MeasurementsDiffer { expected, found } => write!(
                f,
                "measurements differ: expected (physical, bit) {expected:?}, found {found:?}"
            ),
            RouteError::TooWideToCheck { qubits } => write!(
                f,
                "the routed circuit touches {qubits} qubits; the check simulates at most {}",
                super::check::MAX_CHECK_QUBITS
            ),
        }
    }
}

impl std::error::Error for RouteError {}

impl LayerError for RouteError {
    fn blame(&self) -> Blame {
        match self {
            RouteError::TooFewQubits { .. }
            | RouteError::Disconnected { .. }
            | RouteError::LayoutLength { .. }
            | RouteError::TooShortForCopies
            | RouteError::NoSuchQubit { .. }
            | RouteError::SharedQubit { .. }
            | RouteError::NotConnected { .. } => Blame::Input(Code::UsageInput),
            RouteError::TooWideToCheck { .. } => Blame::Input(Code::UsageLimit),
            RouteError::Search(_) | RouteError::MeasurementsDiffer { .. } => Blame::Bug,
        }
    }

    fn hint(&self) -> Option<&str> {
        match self {
            RouteError::TooFewQubits { .. } | RouteError::Disconnected { .. } => {
                Some("choose a larger device, or one whose coupling graph is connected")
            }
            _ => None,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::error::Error;

    fn too_small() -> RouteError {
        RouteError::TooFewQubits {
            device: "line4".into(),
            has: 4,
            system: 8,
            ancilla: true,
        }
    }

    #[test]
    fn messages_read_as_before_the_error_type() {
        // The texts users saw when these errors were strings (kept word for word).
        assert_eq!(
            too_small().to_string(),
            "device `line4` has 4 qubits; the problem needs 9 (8 qubits of the Hamiltonian \
             plus the Hadamard-test ancilla)"
        );
        let split = RouteError::Disconnected {
            device: "split".into(),
            largest: 4,
            system: 6,
            ancilla: false,
        };
        assert_eq!(
            split.to_string(),
            "the coupling graph of `split` is disconnected and its largest connected part has 4 \
             qubits; the problem needs 6 connected qubits (6 qubits of the Hamiltonian)"
        );
        // A refused search layout shows the refusal itself.
        let inner = RouteError::SharedQubit { qubit: 3 };
        assert_eq!(
            inner.clone().in_search().in_search(),
            RouteError::Search(Box::new(inner.clone()))
        );
        assert_eq!(
            inner.in_search().to_string(),
            "physical qubit 3 holds two logical qubits"
        );
    }

    #[test]
    fn bad_input_exits_2_and_router_bugs_exit_1() {
        let e = Error::from(too_small());
        assert_eq!((e.exit_code(), e.code()), (2, Some(Code::UsageInput)));
        assert!(
            e.to_string().contains(
                "\nhint: choose a larger device, or one whose coupling graph is connected\n"
            ),
            "{e}"
        );
        let e = Error::from(RouteError::TooWideToCheck { qubits: 30 });
        assert_eq!((e.exit_code(), e.code()), (2, Some(Code::UsageLimit)));
        for bug in [
            RouteError::NotConnected {
                a: 0,
                b: 5,
                device: "split".into(),
            }
            .in_search(),
            RouteError::MeasurementsDiffer {
                expected: vec![(0, 0)],
                found: vec![(1, 0)],
            },
        ] {
            let e = Error::from(bug);
            assert_eq!((e.exit_code(), e.code()), (1, Some(Code::Internal)), "{e}");
            assert!(e.to_string().starts_with("internal error X101: "), "{e}");
        }
    }
}
