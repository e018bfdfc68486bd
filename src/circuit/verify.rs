//! The IR verifier. It runs after every pass in tests and debug builds; a failure is a compiler
//! bug, reported with the offending gate.
//!
//! Invariants checked, always:
//! 1. **every qubit index is below `num_qubits`**, and a two-qubit gate names two distinct qubits;
//! 2. **every classical bit is below `num_clbits` and is written at most once**;
//! 3. **measurements are terminal**: no gate touches a qubit after it has been measured;
//! 4. **every angle and the global phase are finite**.
//!
//! Checked when the [`Rules`] ask for them:
//! 5. **every two-qubit gate acts on a coupled pair** (after routing);
//! 6. **only native gate names appear** (after lowering; `measure` is always allowed).

use super::{Circuit, Gate};
use std::fmt;

/// Extra target constraints; `Rules::default()` checks only the structural invariants.
#[derive(Default)]
pub struct Rules<'a> {
    /// `coupled(a, b)` is true when a two-qubit gate may act on physical qubits `a`, `b`.
    pub coupled: Option<&'a dyn Fn(u32, u32) -> bool>,
    /// Allowed gate names (OpenQASM spelling, `U` for the built-in).
    pub native: Option<&'a [String]>,
}

/// A broken invariant: which gate, what is wrong.
#[derive(Clone, Debug, PartialEq)]
pub struct IrError {
    pub index: usize,
    pub gate: Option<Gate>,
    pub message: String,
}

impl fmt::Display for IrError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match &self.gate {
            Some(g) => write!(
                f,
                "IR invariant broken at gate #{} ({:?}): {}",
                self.index, g, self.message
            ),
            None => write!(f, "IR invariant broken: {}", self.message),
        }
    }
}

impl std::error::Error for IrError {}

/// Checks the invariants listed in the module header.
pub fn verify_ir(c: &Circuit, rules: &Rules) -> Result<(), IrError> {
    let fail = |index: usize, gate: Option<Gate>, message: String| {
        Err(IrError {
            index,
            gate,
            message,
        })
    };
    if !c.global_phase.is_finite() {
        return fail(0, None, "global phase is not finite".into());
    }
    verify_gates(c.num_qubits, c.num_clbits, c.gates.iter().copied(), rules)
}

/// The gate invariants of [`verify_ir`] (all but the global phase's) over gates as they come,
/// for a circuit on `num_qubits` qubits and `num_clbits` bits that is not held as a list.
pub fn verify_gates(
    num_qubits: usize,
    num_clbits: usize,
    gates: impl IntoIterator<Item = Gate>,
    rules: &Rules,
) -> Result<(), IrError> {
    let fail = |index: usize, gate: Option<Gate>, message: String| {
        Err(IrError {
            index,
            gate,
            message,
        })
    };
    let mut measured = vec![false; num_qubits];
    let mut written = vec![false; num_clbits];
    for (i, g) in gates.into_iter().enumerate() {
        let g = &g;
        let qs = g.qubits();
        for &q in &qs {
            if q as usize >= num_qubits {
                return fail(
                    i,
                    Some(*g),
                    format!("qubit {q} out of range (circuit has {num_qubits})"),
                );
            }
            if measured[q as usize] {
                return fail(i, Some(*g), format!("qubit {q} used after its measurement"));
            }
        }
        if qs.len() == 2 && qs[0] == qs[1] {
            return fail(i, Some(*g), "two-qubit gate on a single qubit".into());
        }
        if g.params().iter().any(|a| !a.is_finite()) {
            return fail(i, Some(*g), "angle is not finite".into());
        }
        if let Gate::Measure(q, b) = *g {
            if b as usize >= num_clbits {
                return fail(
                    i,
                    Some(*g),
                    format!("bit {b} out of range (circuit has {num_clbits})"),
                );
            }
            if written[b as usize] {
                return fail(i, Some(*g), format!("bit {b} written twice"));
            }
            written[b as usize] = true;
            measured[q as usize] = true;
            continue;
        }
        if let (Some(coupled), true) = (rules.coupled, g.is_two_qubit()) {
            if !coupled(qs[0], qs[1]) {
                return fail(
                    i,
                    Some(*g),
                    format!(
                        "qubits {} and {} are not coupled on the device",
                        qs[0], qs[1]
                    ),
                );
            }
        }
        if let Some(native) = rules.native {
            if !native.iter().any(|n| n == g.name()) {
                return fail(
                    i,
                    Some(*g),
                    format!("`{}` is not a native gate of the target", g.name()),
                );
            }
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn each_invariant_is_detected() {
        let base = Circuit::new(2, 1);
        let bad = |gates: Vec<Gate>| Circuit {
            gates,
            ..base.clone()
        };
        let none = Rules::default();
        assert!(verify_ir(&bad(vec![Gate::H(2)]), &none)
            .unwrap_err()
            .message
            .contains("out of range"));
        assert!(verify_ir(&bad(vec![Gate::Cx(1, 1)]), &none).is_err());
        assert!(verify_ir(&bad(vec![Gate::Measure(0, 1)]), &none).is_err());
        assert!(
            verify_ir(&bad(vec![Gate::Measure(0, 0), Gate::H(0)]), &none)
                .unwrap_err()
                .message
                .contains("after")
        );
        assert!(verify_ir(&bad(vec![Gate::Rz(0, f64::NAN)]), &none).is_err());
        assert!(verify_ir(
            &bad(vec![Gate::H(0), Gate::Cx(0, 1), Gate::Measure(1, 0)]),
            &none
        )
        .is_ok());
        let never = |_: u32, _: u32| false;
        let coupled = Rules {
            coupled: Some(&never),
            native: None,
        };
        assert!(verify_ir(&bad(vec![Gate::Cx(0, 1)]), &coupled).is_err());
        let names = vec!["rz".to_string(), "cx".to_string()];
        let native = Rules {
            coupled: None,
            native: Some(&names),
        };
        assert!(verify_ir(&bad(vec![Gate::H(0)]), &native)
            .unwrap_err()
            .message
            .contains("native"));
        assert!(verify_ir(
            &bad(vec![Gate::Rz(0, 1.0), Gate::Cx(0, 1), Gate::Measure(0, 0)]),
            &native
        )
        .is_ok());
    }
}
