//! Reference-state quality before any shot is spent: the mean energy `⟨ψ|H|ψ⟩`, the weight
//! `|⟨ψ|E0⟩|²` on the ground state, and the `--state auto` choice.
//!
//! In: a qubit Hamiltonian and a reference-state string (`0 1 + - r l`, `ss` for a singlet).
//! Out: numbers with the method that produced them, or `None` where they cannot be computed
//! (the weight beyond [`WEIGHT_MAX_QUBITS`]). Invariant: nothing here changes the campaign; a
//! low weight only warns, since a Krylov estimate converges to the lowest eigenvalue the
//! reference overlaps, and a reference without ground-state weight cannot see `E0` at all.
//!
//! Weight: up to `sim::exact::DENSE_MAX_QUBITS` by dense diagonalisation (summed over a
//! degenerate ground space, 1e-9 relative); up to [`WEIGHT_MAX_QUBITS`] by Lanczos with full
//! reorthogonalisation (Lanczos, J. Res. Natl. Bur. Stand. 45, 255 (1950); Golub & Van Loan,
//! *Matrix Computations*, 4th ed., §10.1, cited from memory), run twice: from a seeded random
//! vector for `E0`, and from `ψ` itself, whose lowest Ritz vector converges to the normalised
//! projection of `ψ` on the lowest eigenspace it reaches; if that eigenvalue lies above `E0`
//! (ψ lives in another symmetry sector) the weight is 0, else it is `|⟨ψ|v⟩|²`.

use crate::pauli::{Pauli, PauliSum};
use crate::sim::State;
use num_complex::Complex64;
use rand::SeedableRng;

/// Largest register whose ground-state weight is computed (a 2¹⁴ statevector).
pub const WEIGHT_MAX_QUBITS: usize = 14;

/// Weight below which `compile` warns.
pub const LOW_WEIGHT: f64 = 0.05;

/// Largest register for which `--state auto` scans every computational basis state.
pub const EXHAUSTIVE_MAX_QUBITS: usize = 16;

/// Lanczos iterations (a cap; stops early when the Krylov space closes).
const LANCZOS_STEPS: usize = 160;

/// `ψ` as a statevector (the gates of [`crate::family::RefState::prep`] applied to |0…0⟩);
/// `None` when `spec` is not a reference state for `n` qubits.
pub fn state_vector(spec: &str, n: usize) -> Option<State> {
    let gates = crate::family::RefState::parse(spec, n).ok()?.prep();
    let mut st = State::zero(n);
    for g in &gates {
        st.apply(g);
    }
    Some(st)
}

/// Expectation factor of one Pauli letter in a one-qubit Pauli eigenstate letter.
fn letter_value(p: Pauli, letter: char) -> f64 {
    match (p, letter) {
        (Pauli::I, _) => 1.0,
        (Pauli::Z, '0') | (Pauli::X, '+') | (Pauli::Y, 'r') => 1.0,
        (Pauli::Z, '1') | (Pauli::X, '-') | (Pauli::Y, 'l') => -1.0,
        _ => 0.0,
    }
}

/// `⟨ψ|H|ψ⟩` (constant included) for a product of Pauli eigenstates, exactly, at any size.
pub fn product_mean(h: &PauliSum, letters: &[char]) -> f64 {
    h.constant
        + h.terms
            .iter()
            .map(|(p, c)| {
                c * p
                    .support_iter()
                    .map(|q| letter_value(p.get(q), letters[q]))
                    .product::<f64>()
            })
            .sum::<f64>()
}

/// `⟨ψ|H|ψ⟩` (constant included): exact product formula for letter states, statevector for
/// states with singlets (up to 24 qubits); `None` beyond.
pub fn mean_energy(h: &PauliSum, spec: &str) -> Option<f64> {
    let letters: Vec<char> = spec.chars().collect();
    if letters.len() != h.num_qubits {
        return None;
    }
    if !letters.contains(&'s') {
        return Some(product_mean(h, &letters));
    }
    if h.num_qubits > 24 {
        return None;
    }
    let st = state_vector(spec, h.num_qubits)?;
    let hv = h.apply(&st.amps);
    Some(
        st.amps
            .iter()
            .zip(&hv)
            .map(|(a, b)| a.conj() * b)
            .sum::<Complex64>()
            .re,
    )
}

/// Ground-state weight and energy of `ψ`, with the method used.
#[derive(Clone, Debug, PartialEq)]
pub struct Weight {
    pub weight: f64,
    pub ground_energy: f64,
    pub method: &'static str,
}

/// `|⟨ψ|E0⟩|²`; `None` above [`WEIGHT_MAX_QUBITS`].
pub fn ground_weight(h: &PauliSum, spec: &str) -> Option<Weight> {
    let n = h.num_qubits;
    if n == 0 || n > WEIGHT_MAX_QUBITS {
        return None;
    }
    let psi = state_vector(spec, n)?;
    if n <= crate::sim::exact::DENSE_MAX_QUBITS {
        let sp = crate::sim::exact::spectrum(h);
        let e0 = sp.values[0];
        let tol = 1e-9 * (1.0 + e0.abs());
        let v = nalgebra::DVector::from_vec(psi.amps);
        let weight = (0..sp.values.len())
            .take_while(|&i| sp.values[i] - e0 <= tol)
            .map(|i| sp.vectors.column(i).dotc(&v).norm_sqr())
            .sum();
        return Some(Weight {
            weight,
            ground_energy: e0,
            method: "dense diagonalisation",
        });
    }
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(0x5eed);
    let start = State::random(n, &mut rng);
    let (e0, _) = lanczos_lowest(h, &start.amps);
    let (e_psi, v) = lanczos_lowest(h, &psi.amps);
    let tol = 1e-6 * (1.0 + e0.abs());
    let weight = if e_psi > e0 + tol {
        0.0
    } else {
        psi.amps
            .iter()
            .zip(&v)
            .map(|(a, b)| a.conj() * b)
            .sum::<Complex64>()
            .norm_sqr()
    };
    Some(Weight {
        weight,
        ground_energy: e0.min(e_psi),
        method: "Lanczos from a random vector and from the reference",
    })
}

/// Lowest Ritz value and (normalised) Ritz vector of `h` in the Krylov space of `start`.
fn lanczos_lowest(h: &PauliSum, start: &[Complex64]) -> (f64, Vec<Complex64>) {
    let dot = |a: &[Complex64], b: &[Complex64]| -> Complex64 {
        a.iter().zip(b).map(|(x, y)| x.conj() * y).sum()
    };
    let norm = |a: &[Complex64]| dot(a, a).re.sqrt();
    let mut basis: Vec<Vec<Complex64>> = Vec::new();
    let n0 = norm(start);
    basis.push(start.iter().map(|x| x / n0).collect());
    let mut alpha = Vec::new();
    let mut beta: Vec<f64> = Vec::new();
    for j in 0..LANCZOS_STEPS.min(start.len()) {
        let mut w = h.apply(&basis[j]);
        alpha.push(dot(&basis[j], &w).re);
        // Full reorthogonalisation (twice is enough, Golub & Van Loan §10.1).
        for _ in 0..2 {
            for b in &basis {
                let c = dot(b, &w);
                w.iter_mut().zip(b).for_each(|(x, y)| *x -= c * y);
            }
        }
        let nb = norm(&w);
        if nb < 1e-12 || j + 1 == LANCZOS_STEPS.min(start.len()) {
            break;
        }
        beta.push(nb);
        basis.push(w.iter().map(|x| x / nb).collect());
    }
    let m = alpha.len();
    let t = nalgebra::DMatrix::<f64>::from_fn(m, m, |r, c| {
        if r == c {
            alpha[r]
        } else if r + 1 == c {
            beta[r]
        } else if c + 1 == r {
            beta[c]
        } else {
            0.0
        }
    });
    let eig = t.symmetric_eigen();
    let i0 = (0..m)
        .min_by(|&a, &b| eig.eigenvalues[a].total_cmp(&eig.eigenvalues[b]))
        .unwrap_or(0);
    let mut v = vec![Complex64::new(0.0, 0.0); start.len()];
    for (k, b) in basis.iter().take(m).enumerate() {
        let c = eig.eigenvectors[(k, i0)];
        v.iter_mut().zip(b).for_each(|(x, y)| *x += y * c);
    }
    let nv = norm(&v);
    v.iter_mut().for_each(|x| *x /= nv);
    (eig.eigenvalues[i0], v)
}

/// The state `--state auto` chose and how.
#[derive(Clone, Debug, PartialEq)]
pub struct AutoState {
    pub state: String,
    pub mean_energy: f64,
    pub method: String,
}

/// Lowest-energy product reference: the best computational basis state (exhaustive up to
/// [`EXHAUSTIVE_MAX_QUBITS`], else single-bit-flip descent from |0…0⟩), then a descent that
/// changes one qubit's letter among `0 1 + - r l` at a time while `⟨ψ|H|ψ⟩` falls (also
/// started from |+…+⟩); the lower of the two descents wins. Deterministic.
pub fn auto_state(h: &PauliSum) -> AutoState {
    let n = h.num_qubits;
    let to_letters = |b: u64| -> Vec<char> {
        (0..n)
            .map(|q| if (b >> q) & 1 == 1 { '1' } else { '0' })
            .collect()
    };
    let (basis, how) = if n <= EXHAUSTIVE_MAX_QUBITS {
        let diag: Vec<(u64, f64)> = h
            .terms
            .iter()
            .filter(|(p, _)| p.support_iter().all(|q| p.get(q) == Pauli::Z))
            .map(|(p, c)| (p.support_iter().fold(0u64, |m, q| m | 1 << q), *c))
            .collect();
        let e = |b: u64| -> f64 {
            diag.iter()
                .map(|(m, c)| {
                    if (b & m).count_ones() % 2 == 1 {
                        -c
                    } else {
                        *c
                    }
                })
                .sum()
        };
        let best = (0u64..1 << n)
            .min_by(|&a, &b| e(a).total_cmp(&e(b)).then(a.cmp(&b)))
            .unwrap_or(0);
        (to_letters(best), "every computational basis state scanned")
    } else {
        (
            descend(h, vec!['0'; n], &['0', '1']),
            "single-bit-flip descent from |0…0⟩ over computational basis states",
        )
    };
    let all = ['0', '1', '+', '-', 'r', 'l'];
    let a = descend(h, basis, &all);
    let b = descend(h, vec!['+'; n], &all);
    let (ea, eb) = (product_mean(h, &a), product_mean(h, &b));
    let (best, e) = if eb < ea - 1e-12 { (b, eb) } else { (a, ea) };
    AutoState {
        state: best.into_iter().collect(),
        mean_energy: e,
        method: format!(
            "lowest ⟨ψ|H|ψ⟩ among product states: {how}, then one-qubit letter changes \
             (0 1 + - r l) while the energy falls, also from |+…+⟩ (a local search: not \
             guaranteed to be the lowest product state)"
        ),
    }
}

/// Coordinate descent over the letters `alphabet` of each qubit.
fn descend(h: &PauliSum, mut s: Vec<char>, alphabet: &[char]) -> Vec<char> {
    let mut e = product_mean(h, &s);
    loop {
        let mut improved = false;
        for q in 0..s.len() {
            let keep = s[q];
            let mut best = (keep, e);
            for &l in alphabet {
                s[q] = l;
                let x = product_mean(h, &s);
                if x < best.1 - 1e-12 {
                    best = (l, x);
                }
            }
            s[q] = best.0;
            if best.0 != keep {
                e = best.1;
                improved = true;
            }
        }
        if !improved {
            return s;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::formula::tests::tfim;

    #[test]
    fn mean_energy_of_product_states_matches_the_statevector() {
        let h = tfim(4, 1.0, 0.6);
        // |0000⟩: every ZZ = +1 → −3J; ⟨X⟩ = 0.
        assert!((mean_energy(&h, "0000").unwrap() + 3.0).abs() < 1e-12);
        // |++++⟩: ⟨X⟩ = 1 each → −4g = −2.4.
        assert!((mean_energy(&h, "++++").unwrap() + 2.4).abs() < 1e-12);
        // A singlet pair has ⟨Z_0 Z_1⟩ = −1 (antiparallel) and ⟨X⟩ = 0.
        let s = mean_energy(&h, "ss00").unwrap();
        // Z0Z1 = −1 → +J; Z1Z2: ⟨Z1⟩ = 0 in the singlet → 0; Z2Z3 = +1 → −J: total 0.
        assert!(s.abs() < 1e-12, "{s}");
    }

    #[test]
    fn lanczos_weight_agrees_with_dense_diagonalisation() {
        // The Lanczos route (used above 10 qubits) against the dense one on 8 qubits.
        let h = tfim(8, 1.0, 0.9);
        let dense = ground_weight(&h, "++++++++").unwrap();
        let psi = state_vector("++++++++", 8).unwrap();
        let (e, v) = lanczos_lowest(&h, &psi.amps);
        let w: f64 = psi
            .amps
            .iter()
            .zip(&v)
            .map(|(a, b)| a.conj() * b)
            .sum::<Complex64>()
            .norm_sqr();
        assert!((e - dense.ground_energy).abs() < 1e-9, "{e}");
        assert!((w - dense.weight).abs() < 1e-6, "{w} vs {}", dense.weight);
        assert!(
            dense.weight > 0.05 && dense.weight < 1.0,
            "{}",
            dense.weight
        );
    }

    #[test]
    fn auto_state_finds_the_ferromagnet_and_the_field_state() {
        // Weak field: an aligned basis state (−(n−1)J) beats |+…+⟩ (−n·g).
        let a = auto_state(&tfim(5, 1.0, 0.2));
        assert!(a.state == "00000" || a.state == "11111", "{}", a.state);
        assert!((a.mean_energy + 4.0).abs() < 1e-12);
        // Strong field: |+…+⟩ with −n·g = −10 beats −4.
        let b = auto_state(&tfim(5, 1.0, 2.0));
        assert_eq!(b.state, "+++++");
        assert!((b.mean_energy + 10.0).abs() < 1e-12);
    }
}
