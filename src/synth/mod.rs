//! Synthesis of Pauli rotations into gates.
//!
//! In: a [`Block`] of [`Rotation`]s `exp(-iθP)` (a piece of a rotation program, in order), an
//! optional control qubit, and optionally the hop distances between the qubits (a coupling
//! graph); a [`Strategy`] turns it into IR gates. Out: gates that implement the block exactly,
//! with no global phase. Every strategy writes each rotation as
//!
//! 1. basis change on every support qubit: `h` for X; `sdg` then `h` for Y (since
//!    `H S† Y S H = Z`); nothing for Z;
//! 2. a CNOT network that leaves the parity of the support on one qubit, the root;
//! 3. `rz(2θ)` on the root (`rz(φ) = e^{-iφZ/2}`, so `e^{-iθZ} = rz(2θ)`), or, under control of
//!    qubit `a`, `rz(θ) · cx(a, root) · rz(−θ) · cx(a, root)`, which is the identity when `a`
//!    is |0⟩ and `rz(2θ)` when it is |1⟩, with no stray phase;
//! 4. the mirror of 2 and 1.
//!
//! The strategies differ in step 2 only:
//! - [`Chain`]: `cx(o₀,o₁) cx(o₁,o₂) …` along an order of the support (ascending, or the order a
//!   device plan gives; the textbook ladder);
//! - [`Tree`]: a balanced binary parity tree: neighbours in the list are paired level by level,
//!   the same `w − 1` CNOTs but `⌈log₂ w⌉` deep instead of `w − 1`; with a coupling graph the
//!   list is first ordered as a greedy nearest-neighbour path, so paired qubits sit close.
//!
//! Cost: `2(w−1)` CNOTs for weight w whatever the tree (Nielsen & Chuang, "Quantum Computation
//! and Quantum Information", 2010, §4.7.3, for the chain; any spanning tree of the support
//! computes the same parity), plus 2 for the control. The basis changes and the parity network
//! need no control: without the `rz` they multiply to the identity.

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
    let network: Vec<(Qubit, Qubit)> = ladder.windows(2).map(|w| (w[0], w[1])).collect();
    pauli_rotation_network(r, control, &network, ladder.last().copied())
}

/// The CNOTs of a balanced parity tree over `order` (root last): neighbours are paired level
/// by level from the end, each pair's first qubit folded into its second, so every level's
/// CNOTs act on distinct qubits and the parity of all of `order` ends on its last element.
pub fn tree_network(order: &[Qubit]) -> Vec<(Qubit, Qubit)> {
    let mut level: Vec<Qubit> = order.to_vec();
    let mut out = Vec::with_capacity(order.len().saturating_sub(1));
    while level.len() > 1 {
        let mut next = Vec::with_capacity(level.len().div_ceil(2));
        // Pair from the end so that the root (last) survives every level.
        let odd = level.len() % 2 == 1;
        if odd {
            next.push(level[0]);
        }
        for pair in level[odd as usize..].chunks(2) {
            out.push((pair[0], pair[1]));
            next.push(pair[1]);
        }
        level = next;
    }
    out
}

/// Gates for `exp(-iθP)` with the parity network `network` (CNOTs in order, leaving the
/// support's parity on `root`), controlled by `control` if given.
pub fn pauli_rotation_network(
    r: &Rotation,
    control: Option<Qubit>,
    network: &[(Qubit, Qubit)],
    root: Option<Qubit>,
) -> Vec<Gate> {
    debug_assert_eq!(network.len() as u32 + 1, r.pauli.weight().max(1));
    let mut out = Vec::new();
    let Some(root) = root else {
        return out;
    };
    basis_change(r, &mut out);
    out.extend(network.iter().map(|&(a, b)| Gate::Cx(a, b)));
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
    out.extend(network.iter().rev().map(|&(a, b)| Gate::Cx(a, b)));
    basis_unchange(r, &mut out);
    out
}

/// Gates for `exp(-iθP)` with the default ladder.
pub fn pauli_rotation(r: &Rotation, control: Option<Qubit>) -> Vec<Gate> {
    pauli_rotation_along(r, control, &default_ladder(r))
}

/// What a [`Strategy`] synthesises: rotations in program order, the control qubit of a
/// Hadamard test if any, and the hop distance between two qubits when the target has a
/// coupling graph (`None`: every pair is coupled).
pub struct Block<'a> {
    pub rotations: &'a [Rotation],
    pub control: Option<Qubit>,
    pub distance: Option<&'a (dyn Fn(Qubit, Qubit) -> u32 + Sync)>,
}

/// A way to turn a block of rotations into gates (see the module header). Implementations
/// must be exact: the gates equal `Π exp(-iθ_j P_j)` (controlled, if asked) with no phase.
pub trait Strategy: Sync {
    fn synthesize(&self, block: &Block, out: &mut Vec<Gate>);
}

/// The textbook ladder: a CNOT chain per rotation along the order `ladder` gives (a
/// permutation of the support, root last).
pub struct Chain<'a> {
    pub ladder: &'a (dyn Fn(&Rotation) -> Vec<Qubit> + Sync),
}

impl Strategy for Chain<'_> {
    fn synthesize(&self, block: &Block, out: &mut Vec<Gate>) {
        for r in block.rotations {
            out.extend(pauli_rotation_along(r, block.control, &(self.ladder)(r)));
        }
    }
}

/// Chains that start where the rotation agrees with the one before it: the longest prefix of
/// the previous chain whose qubits carry the same Pauli in this rotation comes first, in the
/// same order, then the qubits on which the next rotation agrees with this one, then the rest
/// of the support, each ascending. Between the two rotations the basis
/// changes on the shared qubits cancel, and then the CNOTs of that common prefix (the previous
/// chain's mirror ends with them, this chain begins with them): `2(k − 1)` CNOTs fewer for a
/// shared prefix of `k` qubits, e.g. the Z string of `X Z…Z X` followed by `Y Z…Z Y`
/// (Hastings, Wecker, Bauer & Troyer, QIC 15, 1 (2015), from memory). Exact like every chain:
/// any order of the support computes its parity.
pub struct Sharing;

impl Strategy for Sharing {
    fn synthesize(&self, block: &Block, out: &mut Vec<Gate>) {
        let mut prev: Option<(&Rotation, Vec<Qubit>)> = None;
        for (i, r) in block.rotations.iter().enumerate() {
            let mut chain: Vec<Qubit> = Vec::with_capacity(r.pauli.weight() as usize);
            if let Some((p, pchain)) = &prev {
                for &q in pchain {
                    let letter = r.pauli.get(q as usize);
                    if letter == Pauli::I || letter != p.pauli.get(q as usize) {
                        break;
                    }
                    chain.push(q);
                }
            }
            // Then what the next rotation agrees on (so that it can start there), then the
            // rest, ascending.
            let next = block.rotations.get(i + 1);
            let support = default_ladder(r);
            for agrees in [true, false] {
                for &q in &support {
                    let shared =
                        next.is_some_and(|n| n.pauli.get(q as usize) == r.pauli.get(q as usize));
                    if shared == agrees && !chain.contains(&q) {
                        chain.push(q);
                    }
                }
            }
            out.extend(pauli_rotation_along(r, block.control, &chain));
            prev = Some((r, chain));
        }
    }
}

/// Balanced parity trees ([`tree_network`]) from weight 4 (below it a chain is as shallow);
/// with a coupling graph the support is first put in greedy nearest-neighbour order from its
/// highest qubit, so that paired qubits sit close.
pub struct Tree;

impl Strategy for Tree {
    fn synthesize(&self, block: &Block, out: &mut Vec<Gate>) {
        for r in block.rotations {
            let mut order = default_ladder(r);
            if let (Some(d), true) = (block.distance, order.len() > 2) {
                let mut path = vec![order.pop().expect("weight above 2")];
                while !order.is_empty() {
                    let cur = *path.last().expect("non-empty");
                    let (k, _) = order
                        .iter()
                        .enumerate()
                        .min_by_key(|&(_, &q)| (d(cur, q), q))
                        .expect("non-empty");
                    path.push(order.remove(k));
                }
                path.reverse();
                order = path;
            }
            // Up to weight 3 a chain is as shallow as any tree (depth w − 1 ≤ ⌈log₂ w⌉ + 1
            // only from w = 4 does the tree win), so the chain is kept there.
            let network = if order.len() <= 3 {
                order.windows(2).map(|w| (w[0], w[1])).collect()
            } else {
                tree_network(&order)
            };
            out.extend(pauli_rotation_network(
                r,
                block.control,
                &network,
                order.last().copied(),
            ));
        }
    }
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

    proptest! {
        #[test]
        fn trees_are_exact_and_shallow(x in 0u64..64, z in 0u64..64, theta in -3.0f64..3.0, ctl in any::<bool>()) {
            let r = Rotation { pauli: PauliString::from_masks(x, z), theta };
            prop_assume!(!r.pauli.is_identity());
            let n = 7;
            let control = ctl.then_some(6);
            let mut gates = Vec::new();
            super::Strategy::synthesize(&Tree, &Block { rotations: std::slice::from_ref(&r), control, distance: None }, &mut gates);
            let mut c = Circuit::new(n, 0);
            c.extend(gates.iter().copied());
            let mut err: f64 = 0.0;
            for b in 0..1usize << n {
                let mut s = State::zero(n);
                s.amps[0] = Complex64::new(0.0, 0.0);
                s.amps[b] = Complex64::new(1.0, 0.0);
                let got = run(&c, s.clone());
                let mut want = s;
                if control.is_none_or(|a| (b >> a) & 1 == 1) {
                    want.apply_pauli_rotation(&r.pauli, r.theta);
                }
                for (x, y) in got.amps.iter().zip(&want.amps) {
                    err = err.max((x - y).norm());
                }
            }
            prop_assert!(err < 1e-12);
            // Same CNOT count as the chain, 2(w−1) (+2 controlled); the parity half of the
            // network is ⌈log₂ w⌉ deep.
            let w = r.pauli.weight() as usize;
            let cx = gates.iter().filter(|g| g.is_two_qubit()).count();
            prop_assert_eq!(cx, 2 * (w - 1) + 2 * ctl as usize);
            let mut half = Circuit::new(n, 0);
            half.extend(tree_network(&default_ladder(&r)).into_iter().map(|(a, b)| Gate::Cx(a, b)));
            let depth = crate::circuit::metrics::counts(&half).depth;
            prop_assert_eq!(depth, (w as f64).log2().ceil() as usize);
            // The synthesised rotation's parity half is no deeper than the chain's w − 1.
            let first_rz = gates.iter().position(|g| matches!(g, Gate::Rz(..))).unwrap();
            let mut net = Circuit::new(n, 0);
            net.extend(gates[..first_rz].iter().copied().filter(|g| g.is_two_qubit()));
            prop_assert!(crate::circuit::metrics::counts(&net).depth < w);
        }
    }

    #[test]
    fn shared_jordan_wigner_strings_cancel_between_neighbours() {
        // X0 Z1 Z2 Z3 X4 then Y0 Z1 Z2 Z3 Y4 (a Jordan–Wigner hopping pair; Hastings, Wecker,
        // Bauer & Troyer 2015): with ladders starting on the shared Z string, its 2 inner
        // CNOTs cancel twice over (4 fewer than 2 × 2(5 − 1) = 16), and the product is exact.
        let a = Rotation {
            pauli: PauliString::parse_factor_text("X0 Z1 Z2 Z3 X4").unwrap(),
            theta: 0.3,
        };
        let b = Rotation {
            pauli: PauliString::parse_factor_text("Y0 Z1 Z2 Z3 Y4").unwrap(),
            theta: -0.7,
        };
        let rotations = [a.clone(), b.clone()];
        let first = Chain {
            ladder: &|r: &Rotation| default_ladder(r),
        };
        let cnots = |s: &dyn super::Strategy| {
            let mut gates = Vec::new();
            s.synthesize(
                &Block {
                    rotations: &rotations,
                    control: None,
                    distance: None,
                },
                &mut gates,
            );
            let mut c = Circuit::new(5, 0);
            c.extend(gates);
            crate::circuit::cancel::cancel_inverses(&mut c);
            let n = c.gates.iter().filter(|g| g.is_two_qubit()).count();
            (n, c)
        };
        let (chain, _) = cnots(&first);
        let (shared, c) = cnots(&Sharing);
        assert_eq!(chain, 16);
        assert_eq!(shared, 12);
        let mut want = crate::sim::State::zero(5);
        for q in 0..5 {
            want.apply(&Gate::U(q, 0.4 + q as f64, 0.3, -0.2));
        }
        let got = run(&c, want.clone());
        want.apply_pauli_rotation(&a.pauli, a.theta);
        want.apply_pauli_rotation(&b.pauli, b.theta);
        got.amps
            .iter()
            .zip(&want.amps)
            .for_each(|(x, y)| assert!((x - y).norm() < 1e-12));
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
