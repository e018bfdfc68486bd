//! Synthesis of Pauli rotations into gates.
//!
//! In: a [`Rotation`] `exp(-iθP)`, an optional control qubit, and the order in which the CNOT
//! ladder visits the support (its last qubit is the root). Out: IR gates that implement the
//! rotation exactly, with no global phase:
//!
//! 1. basis change on every support qubit: `h` for X; `sdg` then `h` for Y (since
//!    `H S† Y S H = Z`); nothing for Z;
//! 2. a CNOT chain `cx(o₀,o₁) cx(o₁,o₂) …` that leaves the parity of the support on the root;
//! 3. `rz(2θ)` on the root (`rz(φ) = e^{-iφZ/2}`, so `e^{-iθZ} = rz(2θ)`), or, under control of
//!    qubit `a`, `rz(θ) · cx(a, root) · rz(−θ) · cx(a, root)`, which is the identity when `a`
//!    is |0⟩ and `rz(2θ)` when it is |1⟩, with no stray phase;
//! 4. the mirror of 2 and 1.
//!
//! Cost: `2(w−1)` CNOTs for weight w (Nielsen & Chuang, "Quantum Computation and Quantum
//! Information", 2010, §4.7.3), plus 2 for the control. The basis changes and the ladder need no
//! control: without the `rz` they multiply to the identity.

use crate::circuit::{Gate, Qubit};
use crate::formula::Rotation;
use crate::pauli::Pauli;

/// The support of `r` in ascending order: the default ladder order (root = highest qubit).
pub fn default_ladder(r: &Rotation) -> Vec<Qubit> {
    r.pauli
        .support_qubits()
        .into_iter()
        .map(|q| q as Qubit)
        .collect()
}

/// Basis change that maps the factor on each support qubit to Z (step 1).
pub fn basis_change(r: &Rotation, out: &mut Vec<Gate>) {
    for q in default_ladder(r) {
        match r.pauli.get(q as usize) {
            Pauli::X => out.push(Gate::H(q)),
            Pauli::Y => out.extend([Gate::Sdg(q), Gate::H(q)]),
            _ => {}
        }
    }
}

/// Inverse of [`basis_change`] (step 4).
pub fn basis_unchange(r: &Rotation, out: &mut Vec<Gate>) {
    for q in default_ladder(r).into_iter().rev() {
        match r.pauli.get(q as usize) {
            Pauli::X => out.push(Gate::H(q)),
            Pauli::Y => out.extend([Gate::H(q), Gate::S(q)]),
            _ => {}
        }
    }
}

/// Gates for `exp(-iθP)`, controlled by `control` if given, with the CNOT chain visiting
/// `ladder` (a permutation of the support; its last element is the root).
pub fn pauli_rotation_along(r: &Rotation, control: Option<Qubit>, ladder: &[Qubit]) -> Vec<Gate> {
    debug_assert_eq!(ladder.len() as u32, r.pauli.weight());
    let mut out = Vec::new();
    if ladder.is_empty() {
        return out;
    }
    basis_change(r, &mut out);
    for w in ladder.windows(2) {
        out.push(Gate::Cx(w[0], w[1]));
    }
    let root = *ladder.last().expect("non-empty ladder");
    let angle = 2.0 * r.theta;
    match control {
        None => out.push(Gate::Rz(root, angle)),
        Some(a) => out.extend([
            Gate::Rz(root, angle / 2.0),
            Gate::Cx(a, root),
            Gate::Rz(root, -angle / 2.0),
            Gate::Cx(a, root),
        ]),
    }
    for w in ladder.windows(2).rev() {
        out.push(Gate::Cx(w[0], w[1]));
    }
    basis_unchange(r, &mut out);
    out
}

/// Gates for `exp(-iθP)` with the default ladder.
pub fn pauli_rotation(r: &Rotation, control: Option<Qubit>) -> Vec<Gate> {
    pauli_rotation_along(r, control, &default_ladder(r))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::circuit::Circuit;
    use crate::pauli::PauliString;
    use crate::sim::{run, State};
    use num_complex::Complex64;
    use proptest::prelude::*;

    fn rotation_error(r: &Rotation, control: Option<Qubit>, n: usize) -> f64 {
        let mut c = Circuit::new(n, 0);
        c.extend(pauli_rotation(r, control));
        crate::circuit::verify::verify_ir(&c, &Default::default()).unwrap();
        let mut err: f64 = 0.0;
        for b in 0..1usize << n {
            let mut s = State::zero(n);
            s.amps[0] = Complex64::new(0.0, 0.0);
            s.amps[b] = Complex64::new(1.0, 0.0);
            let got = run(&c, s.clone());
            let mut want = s;
            let on = control.is_none_or(|a| (b >> a) & 1 == 1);
            if on {
                want.apply_pauli_rotation(&r.pauli, r.theta);
            }
            for (x, y) in got.amps.iter().zip(&want.amps) {
                err = err.max((x - y).norm());
            }
        }
        err
    }

    proptest! {
        #[test]
        fn rotations_are_exact_with_and_without_control(x in 0u64..16, z in 0u64..16, theta in -3.0f64..3.0) {
            let r = Rotation { pauli: PauliString::from_masks(x, z), theta };
            prop_assume!(!r.pauli.is_identity());
            prop_assert!(rotation_error(&r, None, 4) < 1e-12);
            // Control on qubit 4: identity when off, exact rotation when on, no relative phase.
            prop_assert!(rotation_error(&r, Some(4), 5) < 1e-12);
        }
    }

    #[test]
    fn ladder_costs_two_w_minus_one_cnots() {
        // Nielsen & Chuang (2010) §4.7.3: exp(-iθ Z⊗…⊗Z) on w qubits uses 2(w−1) CNOTs.
        for w in 1..=6u32 {
            let r = Rotation {
                pauli: PauliString::from_masks(0, (1u64 << w) - 1),
                theta: 0.3,
            };
            let cx = pauli_rotation(&r, None)
                .iter()
                .filter(|g| g.is_two_qubit())
                .count();
            assert_eq!(cx as u32, 2 * (w - 1));
            let cx_c = pauli_rotation(&r, Some(10))
                .iter()
                .filter(|g| g.is_two_qubit())
                .count();
            assert_eq!(cx_c as u32, 2 * (w - 1) + 2);
        }
    }

    #[test]
    fn rz_convention_matches_the_openqasm3_definition() {
        // OpenQASM 3 specification, stdgates.inc: rz(λ) = exp(-iλZ/2) = diag(e^{-iλ/2}, e^{iλ/2}).
        // So exp(-iθZ) must come out as rz(2θ) with no further phase.
        let r = Rotation {
            pauli: PauliString::from_masks(0, 1),
            theta: 0.4,
        };
        assert_eq!(pauli_rotation(&r, None), vec![Gate::Rz(0, 0.8)]);
        let m = Gate::Rz(0, 0.8).matrix1().unwrap();
        assert!((m[0][0] - Complex64::from_polar(1.0, -0.4)).norm() < 1e-15);
        assert!((m[1][1] - Complex64::from_polar(1.0, 0.4)).norm() < 1e-15);
    }
}
