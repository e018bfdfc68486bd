//! Exact values of textbook models, computed through phasewright's own Pauli algebra and exact
//! propagator, against closed forms from the literature.

use nalgebra::DMatrix;
use num_complex::Complex64;
use phasewright::pauli::{Pauli, PauliString, PauliSum};
use phasewright::sim::exact::{spectrum, Propagator};
use phasewright::sim::State;

fn string(f: &[(usize, Pauli)]) -> PauliString {
    PauliString::from_factors(f).1
}

/// Open transverse-field Ising chain `H = −J Σ Z_i Z_{i+1} − h Σ X_i`.
fn tfim_open(n: usize, j: f64, h: f64) -> PauliSum {
    let mut s = PauliSum::new(n);
    for i in 0..n - 1 {
        s.add(string(&[(i, Pauli::Z), (i + 1, Pauli::Z)]), -j);
    }
    for i in 0..n {
        s.add(PauliString::single(i, Pauli::X), -h);
    }
    s
}

/// Single-particle energies of the open chain from its Majorana form.
///
/// Pfeuty, "The one-dimensional Ising model with a transverse field", Ann. Phys. 57, 79 (1970),
/// via the Majorana representation (Lieb, Schultz & Mattis, Ann. Phys. 16, 407 (1961)): with
/// `X_i = i γ_{2i−1}γ_{2i}` and `Z_iZ_{i+1} = i γ_{2i}γ_{2i+1}`, `H = (i/4) Σ M_{ab} γ_a γ_b`
/// with `M_{2i−1,2i} = −2h`, `M_{2i,2i+1} = −2J`, and `H = Σ_k ε_k (b_k†b_k − ½)` where the
/// `ε_k ≥ 0` are the singular values of `M` (each appears twice). So `E₀ = −½ Σ ε_k` and the
/// first excited level is `E₀ + min ε_k` (an open chain has no parity-dependent boundary term).
fn tfim_free_fermion_levels(n: usize, j: f64, h: f64) -> (f64, f64) {
    let mut m = DMatrix::<f64>::zeros(2 * n, 2 * n);
    for i in 0..n {
        m[(2 * i, 2 * i + 1)] = -2.0 * h;
        m[(2 * i + 1, 2 * i)] = 2.0 * h;
        if i + 1 < n {
            m[(2 * i + 1, 2 * i + 2)] = -2.0 * j;
            m[(2 * i + 2, 2 * i + 1)] = 2.0 * j;
        }
    }
    let mut sv: Vec<f64> = m.singular_values().iter().copied().collect();
    sv.sort_by(|a, b| a.total_cmp(b));
    let eps: Vec<f64> = sv.chunks(2).map(|p| 0.5 * (p[0] + p[1])).collect();
    let e0 = -0.5 * eps.iter().sum::<f64>();
    (e0, e0 + eps[0])
}

#[test]
fn transverse_field_ising_chain_matches_the_free_fermion_solution() {
    for &(n, j, h) in &[(6usize, 1.0, 0.7), (8, 1.0, 1.0), (7, 0.5, 1.3)] {
        let sp = spectrum(&tfim_open(n, j, h));
        let (e0, e1) = tfim_free_fermion_levels(n, j, h);
        assert!(
            (sp.values[0] - e0).abs() < 1e-10,
            "n={n}: {} vs {e0}",
            sp.values[0]
        );
        assert!(
            (sp.values[1] - e1).abs() < 1e-10,
            "n={n}: {} vs {e1}",
            sp.values[1]
        );
    }
}

/// `Σ_i S_i·S_{i+1}` on a ring, `S = σ/2`.
fn heisenberg_ring(n: usize) -> PauliSum {
    let mut s = PauliSum::new(n);
    for i in 0..n {
        for p in [Pauli::X, Pauli::Y, Pauli::Z] {
            s.add(string(&[(i, p), ((i + 1) % n, p)]), 0.25);
        }
    }
    s
}

#[test]
fn four_site_heisenberg_ring_levels() {
    // Ground energy −2 for Σ S_i·S_{i+1} on four sites: the textbook diagonalisation by total
    // spin, H = ½[S_tot² − (S_A² + S_B²)] with A, B the two sublattices, gives
    // E = ½[S(S+1) − S_A(S_A+1) − S_B(S_B+1)], lowest at S = 0, S_A = S_B = 1: −2; the first
    // excited level S = 1, S_A = S_B = 1 gives −1, three-fold (same formula).
    let sp = spectrum(&heisenberg_ring(4));
    assert!((sp.values[0] + 2.0).abs() < 1e-12);
    for k in 1..=3 {
        assert!(
            (sp.values[k] + 1.0).abs() < 1e-12,
            "level {k}: {}",
            sp.values[k]
        );
    }
    assert!(sp.values[4] > -1.0 + 1e-6);
}

#[test]
fn two_site_hubbard_model_at_half_filling() {
    // H = −t Σ_σ (c†_{1σ}c_{2σ} + h.c.) + U Σ_i n_{i↑}n_{i↓}; ground energy with two electrons
    // E₀ = U/2 − √((U/2)² + 4t²) (the standard two-site result, e.g. Essler et al., "The
    // One-Dimensional Hubbard Model", CUP 2005, §2.2; quoted from memory).
    // Hand Jordan–Wigner with modes (1↑, 2↑, 1↓, 2↓) → qubits 0..3: neighbouring modes give
    // c†_a c_b + h.c. = (X_a X_b + Y_a Y_b)/2, and n_a = (1 − Z_a)/2.
    for &(t, u) in &[(1.0, 4.0), (0.5, 1.0), (1.0, 0.0)] {
        let mut h = PauliSum::new(4);
        for (a, b) in [(0, 1), (2, 3)] {
            h.add(string(&[(a, Pauli::X), (b, Pauli::X)]), -t / 2.0);
            h.add(string(&[(a, Pauli::Y), (b, Pauli::Y)]), -t / 2.0);
        }
        for (up, down) in [(0, 2), (1, 3)] {
            h.add(PauliString::IDENTITY, u / 4.0);
            h.add(PauliString::single(up, Pauli::Z), -u / 4.0);
            h.add(PauliString::single(down, Pauli::Z), -u / 4.0);
            h.add(string(&[(up, Pauli::Z), (down, Pauli::Z)]), u / 4.0);
        }
        let m = h.to_dense();
        let sector: Vec<usize> = (0..16usize).filter(|b| b.count_ones() == 2).collect();
        let sub = DMatrix::<Complex64>::from_fn(sector.len(), sector.len(), |r, c| {
            m[(sector[r], sector[c])]
        });
        let e0 = sub
            .symmetric_eigen()
            .eigenvalues
            .iter()
            .copied()
            .fold(f64::INFINITY, f64::min);
        let want = u / 2.0 - ((u / 2.0) * (u / 2.0) + 4.0 * t * t).sqrt();
        assert!((e0 - want).abs() < 1e-12, "t={t} U={u}: {e0} vs {want}");
    }
}

#[test]
fn two_spin_overlap_has_the_closed_form() {
    // For H = h(X₀ + X₁) the two spins precess independently and
    // ⟨0|e^{-ihXt}|0⟩ = cos(ht) (two-level dynamics, e.g. Sakurai, "Modern Quantum Mechanics",
    // §2.1), so ⟨00|e^{-iHt}|00⟩ = cos²(ht).
    let mut h = PauliSum::new(2);
    h.add(PauliString::single(0, Pauli::X), 0.6);
    h.add(PauliString::single(1, Pauli::X), 0.6);
    let psi = State::zero(2);
    let prop = Propagator::new(&h, &psi);
    for t in [0.3, 1.1, 2.9] {
        let want = (0.6f64 * t).cos().powi(2);
        assert!((prop.overlap(t) - Complex64::new(want, 0.0)).norm() < 1e-12);
    }
}
