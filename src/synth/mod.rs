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
//! Two strategies write several rotations at once instead: [`Pairs`] (an `X…X`/`Y…Y` hopping
//! pair diagonalised by one Clifford) and [`Groups`] (module [`groups`]: each run of
//! consecutive commuting rotations reduced to single-qubit rotations by one greedy Clifford
//! network, only the `rz` controlled, optionally with the frame carried from run to run and
//! undone once at the end of the block).
//!
//! Cost: `2(w−1)` CNOTs for weight w whatever the tree (Nielsen & Chuang, "Quantum Computation
//! and Quantum Information", 2010, §4.7.3, for the chain; any spanning tree of the support
//! computes the same parity), plus 2 for the control. The basis changes and the parity network
//! need no control: without the `rz` they multiply to the identity.

pub mod flip;
pub mod groups;

pub use groups::{Coupled, Groups};

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

/// The support of `r` ascending, inline up to 8 qubits (no allocation for local strings).
fn support_small(r: &Rotation) -> smallvec::SmallVec<[Qubit; 8]> {
    r.pauli.support_iter().map(|q| q as Qubit).collect()
}

/// Basis change that maps the factor on each support qubit to Z (step 1).
pub fn basis_change(r: &Rotation, out: &mut Vec<Gate>) {
    for q in r.pauli.support_iter() {
        let q = q as Qubit;
        match r.pauli.get(q as usize) {
            Pauli::X => out.push(Gate::H(q)),
            Pauli::Y => out.extend([Gate::Sdg(q), Gate::H(q)]),
            _ => {}
        }
    }
}

/// Inverse of [`basis_change`] (step 4).
pub fn basis_unchange(r: &Rotation, out: &mut Vec<Gate>) {
    for &q in support_small(r).iter().rev() {
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
    let mut out = Vec::new();
    pauli_rotation_along_into(r, control, ladder, &mut out);
    out
}

/// [`pauli_rotation_along`] appended to `out` (no allocation of its own for local strings).
pub fn pauli_rotation_along_into(
    r: &Rotation,
    control: Option<Qubit>,
    ladder: &[Qubit],
    out: &mut Vec<Gate>,
) {
    let network: smallvec::SmallVec<[(Qubit, Qubit); 8]> =
        ladder.windows(2).map(|w| (w[0], w[1])).collect();
    pauli_rotation_network_into(r, control, &network, ladder.last().copied(), out)
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
    let mut out = Vec::new();
    pauli_rotation_network_into(r, control, network, root, &mut out);
    out
}

/// [`pauli_rotation_network`] appended to `out`.
pub fn pauli_rotation_network_into(
    r: &Rotation,
    control: Option<Qubit>,
    network: &[(Qubit, Qubit)],
    root: Option<Qubit>,
    out: &mut Vec<Gate>,
) {
    debug_assert_eq!(network.len() as u32 + 1, r.pauli.weight().max(1));
    let Some(root) = root else {
        return;
    };
    basis_change(r, out);
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
    basis_unchange(r, out);
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
            pauli_rotation_along_into(r, block.control, &(self.ladder)(r), out);
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
            pauli_rotation_along_into(r, block.control, &chain, out);
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
            let mut order: Vec<Qubit> = default_ladder(r);
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
            let network: Vec<(Qubit, Qubit)> = if order.len() <= 3 {
                order.windows(2).map(|w| (w[0], w[1])).collect()
            } else {
                tree_network(&order)
            };
            pauli_rotation_network_into(r, block.control, &network, order.last().copied(), out);
        }
    }
}

/// Where two rotations of a block form a hopping pair `exp(−iθ₁ X_a Q X_c) exp(−iθ₂ Y_a Q Y_c)`:
/// both strings carry the same letters `Q` off `a` and `c` (a Jordan–Wigner string, or
/// nothing), and `X X` against `Y Y` on `a, c` (either way round). Returns `(a, c)` with
/// `a < c`, or `None`.
pub fn hopping_pair(
    p: &crate::pauli::PauliString,
    q: &crate::pauli::PauliString,
) -> Option<(Qubit, Qubit)> {
    // Equal supports first: one comparison of the masks rejects almost every pair of a long
    // program without building anything.
    if !p.same_support(q) || p.weight() < 2 || !p.commutes_with(q) {
        return None;
    }
    let (sp, sq) = (p.support_qubits(), q.support_qubits());
    if sp != sq || sp.len() < 2 {
        return None;
    }
    let mut ends = Vec::with_capacity(2);
    for &k in &sp {
        let (a, b) = (p.get(k), q.get(k));
        if a == b {
            continue;
        }
        if !matches!((a, b), (Pauli::X, Pauli::Y) | (Pauli::Y, Pauli::X)) {
            return None;
        }
        ends.push((k, a));
    }
    match ends[..] {
        [(a, la), (c, lc)] if la == lc => Some((a as Qubit, c as Qubit)),
        _ => None,
    }
}

/// Hopping pairs synthesised together, everything else as [`Chain`] ladders along `ladder`.
///
/// # The idea
/// The two strings of a pair ([`hopping_pair`]) commute and differ only on `a, c`, so one
/// Clifford `D` takes both to single-qubit `Z`s at once and the pair costs two `rz` between
/// `D` and `D†` (simultaneous diagonalisation of a commuting cluster: van den Berg & Temme,
/// "Circuit optimization of Hamiltonian simulation by simultaneous diagonalization of Pauli
/// clusters", Quantum 4, 322 (2020)). Write `P₁ = X_a Q X_c`, `P₂ = Y_a Q Y_c` (the pair
/// with `Y Y` on `P₁` is the same with the angles swapped). Notation as the circuit runs:
///
/// 1. the basis change of `Q` to a `Z` string `Z_S` and a parity chain `N` over `S` ending on
///    its root `b` (as in every ladder: `N⁻¹ Z_b N = Z_S`), so the pair reads
///    `X_a Z_b X_c`, `Y_a Z_b Y_c`;
/// 2. `cz(a, b)` (`cz X_a cz = X_a Z_b`, `Z_b² = 1`): the pair is `X_a X_c`, `Y_a Y_c`;
/// 3. `sx` on `a` and on `c` (`sx Y sx† = Z`, `sx X sx† = X`): `X_a X_c`, `Z_a Z_c`;
/// 4. `cx(a, c)` (`X_a X_c ↦ X_a`, `Z_a Z_c ↦ Z_c`), then `h(a)`: `Z_a`, `Z_c`;
/// 5. `rz(a, 2θ₁)`, `rz(c, 2θ₂)` (each controlled as in a ladder when there is a control),
///    and the mirror of 4 to 1.
///
/// Cost: `2(|S| − 1) + 2 + 2 = 2|S| + 2` CNOTs against `4|S| + 4` for two ladders (2 against
/// 4 without a string, 4 against 8 across one Jordan–Wigner qubit); a control adds two
/// CNOTs per `rz`, as it does per ladder. A pair's second rotation is moved up to the first
/// only past rotations it commutes with, so the product is unchanged. With a coupling graph
/// `a` is the end nearer the string's root, and the root the string qubit nearest `a`.
pub struct Pairs<'a> {
    pub ladder: &'a (dyn Fn(&Rotation) -> Vec<Qubit> + Sync),
}

/// Whether [`Pairs`] finds any pair in `rotations` (a cheap test that lets a caller skip the
/// candidate on programs without hopping terms).
pub fn has_hopping_pairs(rotations: &[Rotation]) -> bool {
    (0..rotations.len()).any(|i| {
        rotations[i + 1..rotations.len().min(i + 1 + PAIR_LOOKAHEAD)]
            .iter()
            .any(|r| hopping_pair(&rotations[i].pauli, &r.pauli).is_some())
    })
}

/// How far ahead [`Pairs`] looks for a rotation's partner (bounds the work on long programs).
pub const PAIR_LOOKAHEAD: usize = 64;

/// The gates of one hopping pair (see [`Pairs`]): `first` and `second` with
/// [`hopping_pair`]`(first, second) = Some((a, c))`.
pub fn pair_rotation(
    first: &Rotation,
    second: &Rotation,
    ends: (Qubit, Qubit),
    control: Option<Qubit>,
    distance: Option<&(dyn Fn(Qubit, Qubit) -> u32 + Sync)>,
) -> Vec<Gate> {
    let d = |x: Qubit, y: Qubit| distance.map_or(0, |f| f(x, y));
    let string: Vec<Qubit> = default_ladder(first)
        .into_iter()
        .filter(|&q| q != ends.0 && q != ends.1)
        .collect();
    // The end that meets the string's root: the nearer one (ties: the lower).
    let near = |e: Qubit| string.iter().map(|&q| d(e, q)).min().unwrap_or(0);
    let (a, c) = if near(ends.1) < near(ends.0) {
        (ends.1, ends.0)
    } else {
        ends
    };
    // The angle on Z_a belongs to the XX string, the one on Z_c to the YY string.
    let (theta_xx, theta_yy) = if first.pauli.get(a as usize) == Pauli::X {
        (first.theta, second.theta)
    } else {
        (second.theta, first.theta)
    };
    let mut out = Vec::new();
    // 1. The string to Z, then its parity onto the root nearest a (chain by nearest steps).
    let mut rest = string.clone();
    let mut chain: Vec<Qubit> = Vec::with_capacity(rest.len());
    if let Some(k) = (0..rest.len()).min_by_key(|&k| (d(a, rest[k]), rest[k])) {
        chain.push(rest.remove(k));
        while !rest.is_empty() {
            let cur = *chain.last().expect("non-empty");
            let k = (0..rest.len())
                .min_by_key(|&k| (d(cur, rest[k]), rest[k]))
                .expect("non-empty");
            chain.push(rest.remove(k));
        }
        chain.reverse();
    }
    for &q in &string {
        match first.pauli.get(q as usize) {
            Pauli::X => out.push(Gate::H(q)),
            Pauli::Y => out.extend([Gate::Sdg(q), Gate::H(q)]),
            _ => {}
        }
    }
    let network: Vec<Gate> = chain.windows(2).map(|w| Gate::Cx(w[0], w[1])).collect();
    out.extend(network.iter().copied());
    let root = chain.last().copied();
    // 2–4.
    let clifford = |out: &mut Vec<Gate>| {
        if let Some(b) = root {
            out.push(Gate::Cz(a, b));
        }
        out.extend([Gate::Sx(a), Gate::Sx(c), Gate::Cx(a, c), Gate::H(a)]);
    };
    clifford(&mut out);
    // 5.
    for (q, theta) in [(a, theta_xx), (c, theta_yy)] {
        let angle = 2.0 * theta;
        match control {
            None => out.push(Gate::Rz(q, angle)),
            Some(anc) => out.extend([
                Gate::Rz(q, angle / 2.0),
                Gate::Cx(anc, q),
                Gate::Rz(q, -angle / 2.0),
                Gate::Cx(anc, q),
            ]),
        }
    }
    // sx† = x·sx (sx² = x exactly): `sxdg` is not in stdgates.inc, so the all-to-all files
    // keep to gates the standard library declares (OpenQASM 3 specification, stdgates.inc).
    out.extend([
        Gate::H(a),
        Gate::Cx(a, c),
        Gate::Sx(a),
        Gate::X(a),
        Gate::Sx(c),
        Gate::X(c),
    ]);
    if let Some(b) = root {
        out.push(Gate::Cz(a, b));
    }
    out.extend(network.iter().rev().copied());
    for &q in string.iter().rev() {
        match first.pauli.get(q as usize) {
            Pauli::X => out.push(Gate::H(q)),
            Pauli::Y => out.extend([Gate::H(q), Gate::S(q)]),
            _ => {}
        }
    }
    out
}

impl Strategy for Pairs<'_> {
    fn synthesize(&self, block: &Block, out: &mut Vec<Gate>) {
        let rs = block.rotations;
        let mut used = vec![false; rs.len()];
        for i in 0..rs.len() {
            if used[i] {
                continue;
            }
            used[i] = true;
            // The first later partner within `PAIR_LOOKAHEAD` that commutes with everything
            // still in between (rotations already emitted with an earlier pair are not).
            let mut partner = None;
            for j in i + 1..rs.len().min(i + 1 + PAIR_LOOKAHEAD) {
                if used[j] {
                    continue;
                }
                if let Some(ends) = hopping_pair(&rs[i].pauli, &rs[j].pauli) {
                    partner = Some((j, ends));
                    break;
                }
            }
            let partner = partner.filter(|&(j, _)| {
                (i + 1..j).all(|k| used[k] || rs[k].pauli.commutes_with(&rs[j].pauli))
            });
            match partner {
                Some((j, ends)) => {
                    used[j] = true;
                    out.extend(pair_rotation(
                        &rs[i],
                        &rs[j],
                        ends,
                        block.control,
                        block.distance,
                    ));
                }
                None => {
                    pauli_rotation_along_into(&rs[i], block.control, &(self.ladder)(&rs[i]), out)
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::Strategy;
    use super::*;
    use crate::circuit::Circuit;
    use crate::pauli::PauliString;
    use crate::sim::{run, State};
    use num_complex::Complex64;
    use proptest::prelude::*;
    use proptest::strategy::Strategy as _;

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

    /// Exact unitary check of a gate list against a product of (controlled) rotations, on
    /// every basis input.
    fn block_error(
        gates: &[Gate],
        rotations: &[Rotation],
        control: Option<Qubit>,
        n: usize,
    ) -> f64 {
        let mut c = Circuit::new(n, 0);
        c.extend(gates.iter().copied());
        crate::circuit::verify::verify_ir(&c, &Default::default()).unwrap();
        let mut err: f64 = 0.0;
        for b in 0..1usize << n {
            let mut s = State::zero(n);
            s.amps[0] = Complex64::new(0.0, 0.0);
            s.amps[b] = Complex64::new(1.0, 0.0);
            let got = run(&c, s.clone());
            let mut want = s;
            if control.is_none_or(|a| (b >> a) & 1 == 1) {
                for r in rotations {
                    want.apply_pauli_rotation(&r.pauli, r.theta);
                }
            }
            for (x, y) in got.amps.iter().zip(&want.amps) {
                err = err.max((x - y).norm());
            }
        }
        err
    }

    proptest! {
        // Random hopping pairs (X…X / Y…Y on two ends, any shared letters elsewhere) inside
        // random blocks of other rotations: `Pairs` equals the ordered product exactly, with
        // and without control, and a pair with a string of weight s costs 2s + 2 CNOTs
        // (van den Berg & Temme, Quantum 4, 322 (2020): one Clifford for the pair).
        #[test]
        fn hopping_pairs_are_exact_and_cheaper(
            ends in (0u32..5, 0u32..5).prop_filter("two ends", |(a, c)| a != c),
            shared in proptest::collection::vec(0u8..4, 5),
            swap_letters in any::<bool>(),
            others in proptest::collection::vec((0u64..32, 0u64..32, -2.0f64..2.0), 0..3),
            t1 in -2.0f64..2.0, t2 in -2.0f64..2.0, ctl in any::<bool>(),
        ) {
            let (a, c) = ends;
            let mut p1 = PauliString::IDENTITY;
            let mut p2 = PauliString::IDENTITY;
            let mut s = 0usize;
            let mut text1 = String::new();
            let mut text2 = String::new();
            for q in 0..5u32 {
                let (l1, l2) = if q == a || q == c {
                    if swap_letters { ("Y", "X") } else { ("X", "Y") }
                } else {
                    match shared[q as usize] {
                        1 => ("Z", "Z"),
                        2 => ("X", "X"),
                        3 => ("Y", "Y"),
                        _ => continue,
                    }
                };
                if q != a && q != c { s += 1; }
                text1 += &format!("{l1}{q} ");
                text2 += &format!("{l2}{q} ");
            }
            p1 = PauliString::parse_factor_text(text1.trim()).unwrap_or(p1);
            p2 = PauliString::parse_factor_text(text2.trim()).unwrap_or(p2);
            prop_assert_eq!(hopping_pair(&p1, &p2), Some((a.min(c), a.max(c))));
            let r1 = Rotation { pauli: p1, theta: t1 };
            let r2 = Rotation { pauli: p2, theta: t2 };
            // The pair alone: exact, 2s + 2 CNOTs (+ 2 per controlled rz).
            let control = ctl.then_some(5);
            let gates = pair_rotation(&r1, &r2, (a.min(c), a.max(c)), control, None);
            prop_assert!(block_error(&gates, &[r1.clone(), r2.clone()], control, 6) < 1e-12);
            let cx = gates.iter().filter(|g| g.is_two_qubit()).count();
            prop_assert_eq!(cx, 2 * s + 2 + 4 * ctl as usize);
            // In a block: other rotations before, between and after.
            let mut block: Vec<Rotation> = Vec::new();
            let mk = |(x, z, t): (u64, u64, f64)| Rotation { pauli: PauliString::from_masks(x, z), theta: t };
            let mut it = others.into_iter().map(mk).filter(|r| !r.pauli.is_identity());
            block.extend(it.next());
            block.push(r1);
            block.extend(it.next());
            block.push(r2);
            block.extend(it);
            let mut gates = Vec::new();
            let ladder = |r: &Rotation| default_ladder(r);
            Pairs { ladder: &ladder }.synthesize(
                &Block { rotations: &block, control, distance: None },
                &mut gates,
            );
            prop_assert!(block_error(&gates, &block, control, 6) < 1e-12);
        }
    }

    #[test]
    fn a_jordan_wigner_hopping_pair_costs_four_cnots_instead_of_eight() {
        // X0 Z1 X2 + Y0 Z1 Y2 (a hopping term across one mode under Jordan–Wigner): two
        // ladders of weight 3 cost 2·2·(3 − 1) = 8 CNOTs (Nielsen & Chuang 2010, §4.7.3); the
        // pair, one Clifford and two rz, costs 2·1 + 2 = 4.
        let r1 = Rotation {
            pauli: PauliString::parse_factor_text("X0 Z1 X2").unwrap(),
            theta: 0.25,
        };
        let r2 = Rotation {
            pauli: PauliString::parse_factor_text("Y0 Z1 Y2").unwrap(),
            theta: 0.25,
        };
        let block = [r1, r2];
        let mut gates = Vec::new();
        let ladder = |r: &Rotation| default_ladder(r);
        Pairs { ladder: &ladder }.synthesize(
            &Block {
                rotations: &block,
                control: None,
                distance: None,
            },
            &mut gates,
        );
        assert_eq!(gates.iter().filter(|g| g.is_two_qubit()).count(), 4);
        assert!(block_error(&gates, &block, None, 3) < 1e-12);
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
