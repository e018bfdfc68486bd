//! Two entanglers on one pair that one does the work of: `cx · (A ⊗ B) · cx` written with a
//! single CNOT where the one-qubit gates between allow it.
//!
//! In: a circuit in native gates (one-qubit gates and `cx` or `cz`; measurements allowed) and
//! its [`NativeSet`]. Out: the same unitary, global phase included, with every such pair
//! replaced by one entangler and one-qubit gates (or by one-qubit gates alone), and the number
//! of two-qubit gates saved. Invariant: only the gates of a pair and the one-qubit gates
//! between them on its two qubits are rewritten, in place of the second entangler; gates on
//! other qubits and measurements do not move. Only Clifford one-qubit gates between (products
//! `A`, `B` that map Paulis to Paulis) are rewritten, so every new one-qubit gate is Clifford
//! and a rotation read back by the tableau check is still one rotation about one axis.
//!
//! ## The identities
//!
//! Write `|±⟩⟨±|` for the projectors of `X` and `c` for the first CNOT's control, `t` its
//! target; a `cz` is `(I ⊗ H)·CX·(I ⊗ H)` and a reversed CNOT `(H ⊗ H)·CX·(H ⊗ H)`, so after
//! moving those Hadamards into `A`, `B` and the outer gates every pair reads
//! `CX · (A ⊗ B) · CX`. The CNOT has two forms, by control and by target:
//!
//! ```text
//! CX = |0⟩⟨0| ⊗ I + |1⟩⟨1| ⊗ X = I ⊗ |+⟩⟨+| + Z ⊗ |−⟩⟨−|
//! ```
//!
//! - **By the target** (`B` commutes with `X`, so it passes the second CNOT's target):
//!   `CX (A ⊗ I) CX = (A ⊗ I) · (A†ZA ⊗ |−⟩⟨−| + I ⊗ |+⟩⟨+|) · CX
//!   = (A ⊗ I) · (I ⊗ |+⟩⟨+| + A†ZA·Z ⊗ |−⟩⟨−|)`. When `A†ZA = s·Q'` with `Q' ∈ {X, Y}`
//!   (`A` takes `Z` off the `Z` axis), `A†ZA·Z = c·Q` with `Q` a Pauli (`XZ = −iY`,
//!   `YZ = iX`) and `c = ∓i`, so the middle is a CNOT controlled by `t` in the `X` basis onto
//!   `Q` on `c`, times a phase `diag(1, c)` on `t` in the `X` basis:
//!   `(V ⊗ H) · CX(t → c) · (V† ⊗ H) · (I ⊗ H·diag(1, c)·H)`, with `V X V† = Q` (`V = I` or
//!   `S`). One CNOT, pointing the other way.
//! - **By the control** (`A` commutes with `Z`): symmetrically
//!   `CX (I ⊗ B) CX = (I ⊗ B) · (|0⟩⟨0| ⊗ I + |1⟩⟨1| ⊗ B†XB·X)`, and when `B†XB = s·Q'`
//!   with `Q' ∈ {Y, Z}`, `B†XB·X = c·Q` (`YX = −iZ`, `ZX = iY`):
//!   `(diag(1, c) ⊗ W) · CX · (I ⊗ W†)` with `W X W† = Q` (`W = H` or `S`).
//! - **Both** (`A` commutes with `Z` and `B` with `X`): the CNOTs cancel, `A ⊗ B` remains.
//!
//! Otherwise the pair stays: a two-qubit gate locally equivalent to a CNOT needs one CNOT and
//! the others two or more (Shende, Markov & Bullock, "Minimal universal two-qubit
//! controlled-NOT-based circuits", Phys. Rev. A 69, 062321 (2004), cited from memory), and
//! these two cases are the Clifford pairs that are one CNOT in disguise. Such pairs appear where
//! a basis change of one rotation meets the next rotation's ladder on the same pair (the
//! control-in-frame and hopping-pair forms, and the routed Hadamard test). The projector forms
//! of the CNOT are textbook (Nielsen & Chuang, "Quantum Computation and Quantum Information"
//! (2000), §4.3; from memory).
//!
//! Cost: one pass over the gates, a few 2×2 products per pair whose runs are Clifford;
//! [`merge_entangler_pairs`] rewrites pairs that do not overlap, so the caller repeats it while
//! it finds work (and skips it past [`MERGE_MAX_GATES`]).

use super::{euler, is_clifford};
use crate::circuit::{mat2_adjoint, mat2_mul, Circuit, Gate, Mat2, Qubit};
use crate::device::{Entangler, NativeSet};
use num_complex::Complex64;

/// Above this many gates `lower_to_native` skips the pass. Each merge costs the lowering one
/// more round of fusion and cancellation over the whole circuit: on the 100-qubit step of 10³
/// random strings (about 10⁶ gates a piece) the pass saved 0.14% of the two-qubit gates
/// (731,028 → 729,984) and took the compile from 4.85 s to 6.65 s; the benchmark's models,
/// whose steps lower to at most ~10⁵ gates, lose 0–5%.
pub const MERGE_MAX_GATES: usize = 1 << 18;

const NONE: usize = usize::MAX;
/// A qubit whose last entangler was rewritten in this pass: it pairs with nothing more.
const SPENT: usize = usize::MAX - 1;

fn c(re: f64, im: f64) -> Complex64 {
    Complex64::new(re, im)
}

/// The 2×2 identity (shared with [`super::swapfold`]).
pub(super) fn identity() -> Mat2 {
    [[c(1.0, 0.0), c(0.0, 0.0)], [c(0.0, 0.0), c(1.0, 0.0)]]
}

/// The Hadamard matrix (shared with [`super::swapfold`]).
pub(super) fn hadamard() -> Mat2 {
    let r = std::f64::consts::FRAC_1_SQRT_2;
    [[c(r, 0.0), c(r, 0.0)], [c(r, 0.0), c(-r, 0.0)]]
}

fn diag(a: Complex64) -> Mat2 {
    [[c(1.0, 0.0), c(0.0, 0.0)], [c(0.0, 0.0), a]]
}

/// Product of matrices in operator order (`mul(&[a, b, c]) = a·b·c`).
fn mul(ms: &[&Mat2]) -> Mat2 {
    ms.iter().fold(identity(), |p, m| mat2_mul(&p, m))
}

/// `m† P m` for `P = Z` (`z_axis`) or `X`, as real coefficients `(x, y, z)` of `X`, `Y`, `Z`.
fn image(m: &Mat2, z_axis: bool) -> [f64; 3] {
    let p: Mat2 = if z_axis {
        diag(c(-1.0, 0.0))
    } else {
        [[c(0.0, 0.0), c(1.0, 0.0)], [c(1.0, 0.0), c(0.0, 0.0)]]
    };
    let img = mul(&[&mat2_adjoint(m), &p, m]);
    [img[0][1].re, -img[0][1].im, img[0][0].re]
}

/// `±1` when `v` is `±` the unit vector on `axis`, else `None` (tolerance 1e-9).
fn on_axis(v: [f64; 3], axis: usize) -> Option<f64> {
    let off = (0..3).filter(|&k| k != axis).all(|k| v[k].abs() < 1e-9);
    (off && (v[axis].abs() - 1.0).abs() < 1e-9).then(|| v[axis].signum())
}

/// A pair's entangler written as `post · CX(ctl → tgt) · pre`, the one-qubit factors as
/// `[on ctl, on tgt]`, for the control `ctl` chosen by the caller.
fn around_cx(g: &Gate, ctl: Qubit) -> ([Mat2; 2], [Mat2; 2]) {
    let (i, h) = (identity(), hadamard());
    match *g {
        Gate::Cx(x, _) if x == ctl => ([i, i], [i, i]),
        // CX(t → c) = (H ⊗ H)·CX(c → t)·(H ⊗ H).
        Gate::Cx(..) => ([h, h], [h, h]),
        // CZ = (I ⊗ H)·CX·(I ⊗ H), either way round.
        Gate::Cz(..) => ([i, h], [i, h]),
        _ => unreachable!("only entanglers are paired"),
    }
}

/// The gates for `CX(ctl → tgt)` in the native entangler, with one-qubit factors to fold into
/// the neighbours: `(gate, before on tgt, after on tgt)`.
fn native_cx(e: Entangler, ctl: Qubit, tgt: Qubit) -> (Gate, Mat2, Mat2) {
    match e {
        Entangler::Cx => (Gate::Cx(ctl, tgt), identity(), identity()),
        Entangler::Cz => (Gate::Cz(ctl, tgt), hadamard(), hadamard()),
    }
}

/// What a pair `CX · (A ⊗ B) · CX` becomes: the one-qubit factors before and after, as
/// `[on c, on t]`, and the single CNOT between them (`Some(true)`: from `t` to `c`;
/// `Some(false)`: from `c` to `t`; `None`: no CNOT at all). `None` when no identity of the
/// module essay applies.
#[allow(clippy::type_complexity)]
fn one_cnot(a: &Mat2, b: &Mat2) -> Option<([Mat2; 2], Option<bool>, [Mat2; 2])> {
    if !is_clifford(a) || !is_clifford(b) {
        return None;
    }
    let (i, h) = (identity(), hadamard());
    let s = diag(c(0.0, 1.0));
    let a_diagonal = on_axis(image(a, true), 2) == Some(1.0);
    let b_x_type = on_axis(image(b, false), 0) == Some(1.0);
    if a_diagonal && b_x_type {
        return Some(([i, i], None, [*a, *b]));
    }
    if b_x_type {
        // A†ZA = s·Q', Q' ∈ {X, Y}: A†ZA·Z = c·Q.
        let z = image(a, true);
        let (v, phase) = if let Some(sign) = on_axis(z, 0) {
            (s, c(0.0, -sign)) // s·X·Z = −is·Y, Y = S X S†
        } else if let Some(sign) = on_axis(z, 1) {
            (i, c(0.0, sign)) // s·Y·Z = is·X
        } else {
            return None;
        };
        // (A ⊗ I)(V ⊗ H) CX(t → c) (V† ⊗ H)(I ⊗ H·D·H)(I ⊗ B); on t before: H·(H D H)·B = D·H·B.
        let before = [mat2_adjoint(&v), mul(&[&diag(phase), &h, b])];
        let after = [mul(&[a, &v]), h];
        return Some((before, Some(true), after));
    }
    if a_diagonal {
        // B†XB = s·Q', Q' ∈ {Y, Z}: B†XB·X = c·Q.
        let x = image(b, false);
        let (w, phase) = if let Some(sign) = on_axis(x, 1) {
            (h, c(0.0, -sign)) // s·Y·X = −is·Z, Z = H X H
        } else if let Some(sign) = on_axis(x, 2) {
            (s, c(0.0, sign)) // s·Z·X = is·Y
        } else {
            return None;
        };
        // (A ⊗ B)(D ⊗ W) CX(c → t) (I ⊗ W†).
        let before = [i, mat2_adjoint(&w)];
        let after = [mul(&[a, &diag(phase)]), mul(&[b, &w])];
        return Some((before, Some(false), after));
    }
    None
}

/// Whether a one-qubit gate is Clifford: a fixed Clifford gate, or a rotation by a multiple of
/// π/2 (tolerance 1e-12 rad); `U` by its matrix.
fn is_clifford_gate(g: &Gate) -> bool {
    let quarter = |a: f64| {
        let k = a / std::f64::consts::FRAC_PI_2;
        (k - k.round()).abs() < 1e-12
    };
    match *g {
        Gate::Rz(_, a) | Gate::Rx(_, a) | Gate::Ry(_, a) => quarter(a),
        Gate::U(..) => g.matrix1().is_some_and(|m| is_clifford(&m)),
        _ => true,
    }
}

/// Rewrites, in one pass, every pair of entanglers on the same two qubits with only one-qubit
/// gates between them there that one CNOT (or none) does the work of (module essay); returns
/// how many two-qubit gates it removed. The one-qubit gates it writes are native but not
/// fused with their neighbours: run [`super::fuse_and_cancel`] after it.
pub fn merge_entangler_pairs(circuit: &mut Circuit, native: &NativeSet) -> usize {
    let n = circuit.num_qubits;
    let gates = std::mem::take(&mut circuit.gates);
    // The last gate of more than one qubit (or measurement) on each qubit, and the one-qubit
    // gates since.
    let mut last = vec![NONE; n];
    let mut between: Vec<Vec<usize>> = vec![Vec::new(); n];
    // Whether every gate in `between[q]` is Clifford: most runs between two CNOTs of a
    // product formula hold a rotation, and those are skipped without a matrix product.
    let mut clifford = vec![true; n];
    let mut dropped = vec![false; gates.len()];
    let mut replaced: Vec<(usize, Vec<Gate>)> = Vec::new();
    let mut phase = 0.0;
    let mut saved = 0;
    for (k, g) in gates.iter().enumerate() {
        let qs = g.qubits();
        if g.matrix1().is_some() {
            between[qs[0] as usize].push(k);
            clifford[qs[0] as usize] &= is_clifford_gate(g);
            continue;
        }
        let entangler = matches!(g, Gate::Cx(..) | Gate::Cz(..));
        if entangler {
            let (x, y) = (qs[0], qs[1]);
            let j = last[x as usize];
            if j < SPENT
                && j == last[y as usize]
                && clifford[x as usize]
                && clifford[y as usize]
                && matches!(gates[j], Gate::Cx(..) | Gate::Cz(..))
            {
                let ctl = gates[j].qubits()[0];
                let tgt = if ctl == x { y } else { x };
                let (pre_j, post_j) = around_cx(&gates[j], ctl);
                let (pre_k, post_k) = around_cx(g, ctl);
                let run = |q: Qubit| {
                    between[q as usize].iter().fold(identity(), |p, &i| {
                        mat2_mul(&gates[i].matrix1().expect("one-qubit gate"), &p)
                    })
                };
                let a = mul(&[&pre_k[0], &run(ctl), &post_j[0]]);
                let b = mul(&[&pre_k[1], &run(tgt), &post_j[1]]);
                if let Some((before, cnot, after)) = one_cnot(&a, &b) {
                    let (mut before, mut after) = (before, after);
                    before = [mul(&[&before[0], &pre_j[0]]), mul(&[&before[1], &pre_j[1]])];
                    after = [mul(&[&post_k[0], &after[0]]), mul(&[&post_k[1], &after[1]])];
                    let mut out = Vec::new();
                    let mut middle = None;
                    if let Some(reversed) = cnot {
                        let (from, to, slot) = if reversed {
                            (tgt, ctl, 0)
                        } else {
                            (ctl, tgt, 1)
                        };
                        let (gate, pre, post) = native_cx(native.two_qubit, from, to);
                        before[slot] = mul(&[&pre, &before[slot]]);
                        after[slot] = mul(&[&after[slot], &post]);
                        middle = Some(gate);
                    }
                    let mut emit = |m: &Mat2, q: Qubit, out: &mut Vec<Gate>| {
                        let (gs, alpha) = euler::decompose(m, q, native.one_qubit);
                        phase += alpha;
                        out.extend(gs);
                    };
                    emit(&before[0], ctl, &mut out);
                    emit(&before[1], tgt, &mut out);
                    out.extend(middle);
                    emit(&after[0], ctl, &mut out);
                    emit(&after[1], tgt, &mut out);
                    dropped[j] = true;
                    for q in [x, y] {
                        for &i in &between[q as usize] {
                            dropped[i] = true;
                        }
                        between[q as usize].clear();
                        clifford[q as usize] = true;
                        last[q as usize] = SPENT;
                    }
                    replaced.push((k, out));
                    saved += 2 - middle.is_some() as usize;
                    continue;
                }
            }
        }
        for q in qs {
            last[q as usize] = if entangler { k } else { SPENT };
            between[q as usize].clear();
            clifford[q as usize] = true;
        }
    }
    super::splice(circuit, gates, replaced, &dropped, phase);
    saved
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sim::unitary_distance;
    use std::f64::consts::{FRAC_PI_2, PI};

    fn two_qubit(c: &Circuit) -> usize {
        c.gates.iter().filter(|g| g.is_two_qubit()).count()
    }

    #[test]
    fn a_basis_change_between_two_cnots_leaves_one() {
        // The pair as the routed Hadamard test writes it (seen in a written XXZ circuit):
        // cx · (rz(−π/2)·sx on the control, rz(π)·sx·rz(π) on the target) · cx. The target's
        // run is an X rotation and the control's maps Z to ±Y: one CNOT, from the target.
        let native = NativeSet::rz_sx_x_cx();
        let mut c = Circuit::new(3, 0);
        c.extend([
            Gate::Cx(0, 1),
            Gate::Sx(0),
            Gate::Rz(0, -FRAC_PI_2),
            Gate::Rz(1, PI),
            Gate::Rz(2, 0.3),
            Gate::Sx(1),
            Gate::Rz(1, PI),
            Gate::Cx(0, 1),
            Gate::Rz(1, 0.05),
        ]);
        let mut out = c.clone();
        assert_eq!(merge_entangler_pairs(&mut out, &native), 1);
        assert_eq!(two_qubit(&out), 1);
        assert!(out.gates.contains(&Gate::Cx(1, 0)), "{:?}", out.gates);
        assert!(unitary_distance(&c, &out) < 1e-9);
    }

    #[test]
    fn a_hadamard_on_the_target_between_two_cnots_leaves_one_from_the_control() {
        // cx · (s ⊗ h) · cx: S commutes with the control's Z, H†XH = Z, so one CNOT.
        for names in [vec!["rz", "sx", "x", "cx"], vec!["rz", "ry", "cz"]] {
            let native = NativeSet::from_names(&names).unwrap();
            let mut c = Circuit::new(2, 0);
            c.extend([Gate::Cx(0, 1), Gate::S(0), Gate::H(1), Gate::Cx(0, 1)]);
            let c = super::super::translate_two_qubit(&c, native.two_qubit);
            let mut out = c.clone();
            assert_eq!(merge_entangler_pairs(&mut out, &native), 1, "{names:?}");
            assert_eq!(two_qubit(&out), 1);
            assert!(unitary_distance(&c, &out) < 1e-9, "{names:?}");
        }
    }

    #[test]
    fn pairs_that_need_two_cnots_stay() {
        let native = NativeSet::rz_sx_x_cx();
        // H on the control and H on the target: a CNOT-pair that is a genuine two-CNOT gate.
        let mut c = Circuit::new(2, 0);
        c.extend([Gate::Cx(0, 1), Gate::H(0), Gate::H(1), Gate::Cx(0, 1)]);
        assert_eq!(merge_entangler_pairs(&mut c.clone(), &native), 0);
        // A non-Clifford rotation between: never rewritten.
        let mut c = Circuit::new(2, 0);
        c.extend([Gate::Cx(0, 1), Gate::Rx(0, 0.3), Gate::Cx(0, 1)]);
        assert_eq!(merge_entangler_pairs(&mut c.clone(), &native), 0);
        // A measurement between: never rewritten.
        let mut c = Circuit::new(2, 1);
        c.extend([Gate::Cx(0, 1), Gate::Measure(1, 0), Gate::Cx(0, 1)]);
        assert_eq!(merge_entangler_pairs(&mut c.clone(), &native), 0);
    }

    #[test]
    fn random_clifford_pairs_keep_the_unitary_and_lose_what_they_report() {
        // Random circuits of entanglers and one-qubit gates on three qubits, each native set:
        // the unitary is kept (1e-9, global phase included), the two-qubit count falls by the
        // number reported, and some circuits lose gates.
        use rand::{Rng, SeedableRng};
        let mut merged = 0;
        for seed in 0..400u64 {
            let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
            let mut c = Circuit::new(3, 0);
            for _ in 0..30 {
                let a = rng.gen_range(0..3u32);
                let b = (a + rng.gen_range(1..3u32)) % 3;
                c.push(match rng.gen_range(0..9) {
                    0..=2 => Gate::Cx(a, b),
                    3 => Gate::Cz(a, b),
                    4 => Gate::H(a),
                    5 => Gate::S(a),
                    6 => Gate::Sx(a),
                    7 => Gate::Rz(a, FRAC_PI_2 * rng.gen_range(-2..=2) as f64),
                    _ => Gate::Rz(a, rng.gen_range(-3.0..3.0)),
                });
            }
            for names in [vec!["rz", "sx", "x", "cx"], vec!["rz", "ry", "cz"]] {
                let native = NativeSet::from_names(&names).unwrap();
                let mut low = super::super::translate_two_qubit(&c, native.two_qubit);
                super::super::fuse_and_cancel(&mut low, native.one_qubit);
                let mut out = low.clone();
                let saved = merge_entangler_pairs(&mut out, &native);
                assert_eq!(two_qubit(&out) + saved, two_qubit(&low), "seed {seed}");
                assert!(unitary_distance(&low, &out) < 1e-9, "seed {seed} {names:?}");
                let rules = crate::circuit::verify::Rules {
                    coupled: None,
                    native: Some(&native.names),
                };
                crate::circuit::verify::verify_ir(&out, &rules).unwrap();
                merged += saved;
            }
        }
        assert!(merged > 100, "only {merged} gates merged");
    }
}
