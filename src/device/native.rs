//! Native gate sets: which gate names a device executes, and how phasewright lowers to them.
//!
//! In: gate names as written in a `.dev` file (OpenQASM 3 `stdgates.inc` names, plus the
//! built-in `U`). Out: a [`NativeSet`] that names one single-qubit *basis* (how an arbitrary
//! one-qubit unitary is written with the native gates) and one entangling gate. Invariant: a
//! `NativeSet` always holds a universal subset that the lowering pass can target; anything else
//! is refused with a reason.
//!
//! Universality: `{cx}` or `{cz}` together with any one-qubit set that generates SU(2) is
//! universal (Barenco et al., "Elementary gates for quantum computation", Phys. Rev. A 52, 3457
//! (1995)). One-qubit sets recognised here: `U` alone; `rz` with `sx`, `rx`, `ry` or `h`; `rx`
//! with `ry`. Two rotations about orthogonal axes give every rotation by an Euler decomposition
//! (Nielsen & Chuang 2010, Theorem 4.1); `rz` with `sx` or `h` gives `rx` by conjugation.
//!
//! Errors: a list of names without a target is a [`NativeError`] (no universal one-qubit set, or
//! no entangling gate). The names come from a device file, so both are bad input, reported under
//! `D102` (exit 2); the `.dev` reader adds the place in the file and a hint.

use crate::diag::Code;
use crate::error::{Blame, LayerError};

/// Every gate name of the OpenQASM 3 standard library (`stdgates.inc`, v3.0), plus the built-in
/// `U`. Source: OpenQASM 3 specification, "Standard library" section.
pub const STDGATES: &[&str] = &[
    "p", "x", "y", "z", "h", "s", "sdg", "t", "tdg", "sx", "rx", "ry", "rz", "cx", "cy", "cz",
    "cp", "crx", "cry", "crz", "ch", "cu", "swap", "ccx", "cswap", "CX", "phase", "cphase", "id",
    "u1", "u2", "u3", "U",
];

/// How an arbitrary one-qubit unitary is written with the native gates.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum OneQubitBasis {
    /// One built-in `U(θ, φ, λ)`.
    U,
    /// `rz · sx · rz · sx · rz` (one `sx` or one `x` when the angle allows).
    RzSx { x: bool },
    /// `rz · rx · rz`.
    RzRx,
    /// `rz · ry · rz`.
    RzRy,
    /// `rx · ry · rx`.
    RxRy,
    /// `rz · h · rz · h · rz`.
    RzH,
}

/// The entangling gate.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Entangler {
    Cx,
    Cz,
}

impl Entangler {
    pub fn name(self) -> &'static str {
        match self {
            Entangler::Cx => "cx",
            Entangler::Cz => "cz",
        }
    }
}

/// A device's native gates and the lowering targets chosen from them.
#[derive(Clone, Debug, PartialEq)]
pub struct NativeSet {
    /// Names as the device lists them (`U` for the built-in), sorted, without duplicates.
    pub names: Vec<String>,
    pub one_qubit: OneQubitBasis,
    pub two_qubit: Entangler,
}

/// Is `name` a gate of `stdgates.inc` or the built-in `U`?
pub fn is_standard_gate(name: &str) -> bool {
    STDGATES.contains(&name)
}

/// Number of qubits a standard gate acts on (1, 2 or 3).
pub fn gate_arity(name: &str) -> usize {
    match name {
        "cx" | "cy" | "cz" | "cp" | "crx" | "cry" | "crz" | "ch" | "cu" | "swap" | "CX"
        | "cphase" => 2,
        "ccx" | "cswap" => 3,
        _ => 1,
    }
}

/// Why a list of gate names is not a native set phasewright can target; always bad input.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum NativeError {
    /// No one-qubit basis of those [`NativeSet::from_names`] recognises.
    NotUniversal,
    /// Neither `cx` nor `cz`.
    NoEntangler,
}

impl std::fmt::Display for NativeError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            NativeError::NotUniversal => {
                "the native gates do not form a universal single-qubit set that phasewright can target"
            }
            NativeError::NoEntangler => "the native gates have no entangling gate (cx or cz)",
        })
    }
}

impl std::error::Error for NativeError {}

impl LayerError for NativeError {
    fn blame(&self) -> Blame {
        Blame::Input(Code::DevDeclare)
    }
}

impl NativeSet {
    /// Chooses the lowering targets from a list of standard gate names, or says why it cannot.
    /// Preference when several bases fit: `U`, then `rz`+`sx`, `rz`+`rx`, `rz`+`ry`, `rx`+`ry`,
    /// `rz`+`h`; `cx` before `cz`.
    pub fn from_names(names: &[&str]) -> Result<NativeSet, NativeError> {
        let mut sorted: Vec<String> = names.iter().map(|s| s.to_string()).collect();
        sorted.sort();
        sorted.dedup();
        let has = |n: &str| sorted.iter().any(|s| s == n);
        let one_qubit = if has("U") {
            Some(OneQubitBasis::U)
        } else if has("rz") && has("sx") {
            Some(OneQubitBasis::RzSx { x: has("x") })
        } else if has("rz") && has("rx") {
            Some(OneQubitBasis::RzRx)
        } else if has("rz") && has("ry") {
            Some(OneQubitBasis::RzRy)
        } else if has("rx") && has("ry") {
            Some(OneQubitBasis::RxRy)
        } else if has("rz") && has("h") {
            Some(OneQubitBasis::RzH)
        } else {
            None
        };
        let two_qubit = if has("cx") {
            Some(Entangler::Cx)
        } else if has("cz") {
            Some(Entangler::Cz)
        } else {
            None
        };
        match (one_qubit, two_qubit) {
            (Some(one_qubit), Some(two_qubit)) => Ok(NativeSet {
                names: sorted,
                one_qubit,
                two_qubit,
            }),
            (None, _) => Err(NativeError::NotUniversal),
            (_, None) => Err(NativeError::NoEntangler),
        }
    }

    /// `{rz, sx, x, cx}`, the default of [`crate::device::Device::all_to_all`].
    pub fn rz_sx_x_cx() -> NativeSet {
        NativeSet::from_names(&["rz", "sx", "x", "cx"]).expect("universal")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_four_supported_sets_are_recognised() {
        let a = NativeSet::from_names(&["rz", "sx", "x", "cx"]).unwrap();
        assert_eq!(a.one_qubit, OneQubitBasis::RzSx { x: true });
        assert_eq!(a.two_qubit, Entangler::Cx);
        let b = NativeSet::from_names(&["rz", "sx", "x", "cz"]).unwrap();
        assert_eq!(b.two_qubit, Entangler::Cz);
        let c = NativeSet::from_names(&["rz", "rx", "ry", "cz"]).unwrap();
        assert_eq!(c.one_qubit, OneQubitBasis::RzRx);
        let d = NativeSet::from_names(&["U", "cx"]).unwrap();
        assert_eq!(d.one_qubit, OneQubitBasis::U);
    }

    #[test]
    fn non_universal_sets_are_refused() {
        // {rz, x} generates only rotations about z and the bit flip: not dense in SU(2).
        assert!(NativeSet::from_names(&["rz", "x", "cx"]).is_err());
        // No entangler.
        assert!(NativeSet::from_names(&["rz", "sx"]).is_err());
        // Clifford gates alone are a finite group.
        assert!(NativeSet::from_names(&["h", "s", "cx"]).is_err());
    }
}
