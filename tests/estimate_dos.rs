//! Density of states from exact trace values against the broadened exact spectrum.
//!
//! Reference: `ρ_σ(E) = Σ_j N(E; E_j, σ)` over the eigenvalues from full diagonalisation
//! (nalgebra's Hermitian eigensolver via `sim::exact::spectrum`). The estimate must agree to
//! within the quadrature bound derived in `src/estimate/dos.rs` (truncation at |t| ≤ (K−1)dt
//! plus aliasing with period 2π/dt).

mod estimate_support;

use estimate_support::*;
use num_complex::Complex64;
use phasewright::estimate::dos::{broadened_spectrum, energy_grid, DosGrid};
use phasewright::estimate::*;

/// Exact `tr e^{−iH'k dt}/2ⁿ`, `k = 0..points`.
fn exact_trace(values_prime: &[f64], dt: f64, points: usize) -> Vec<Complex64> {
    let n = values_prime.len() as f64;
    (0..points)
        .map(|k| {
            values_prime
                .iter()
                .map(|e| Complex64::from_polar(1.0, -e * k as f64 * dt))
                .sum::<Complex64>()
                / n
        })
        .collect()
}

/// Largest error and the bound at that energy, over the default grid.
fn worst(h: &phasewright::pauli::PauliSum, dt: f64, points: usize, sigma: f64) -> (f64, f64, f64) {
    let ev = ground_spectrum(h);
    let prime: Vec<f64> = ev.iter().map(|e| e - h.constant).collect();
    let g = exact_trace(&prime, dt, points);
    let grid = DosGrid {
        num_qubits: h.num_qubits,
        dt,
        constant: h.constant,
        sigma,
    };
    let mut worst_ratio = 0.0;
    let mut out = (0.0, 0.0, 0.0);
    let mut peak: f64 = 0.0;
    for e in energy_grid(h.constant, h.one_norm(), sigma, dt, 801) {
        let want = broadened_spectrum(&ev, sigma, e);
        peak = peak.max(want);
        let got = grid.density(&g, e);
        let bound = grid.error_bound(points, h.one_norm(), e);
        let err = (got - want).abs();
        assert!(err <= bound, "E = {e}: error {err} above the bound {bound}");
        if err / bound > worst_ratio || out.1 == 0.0 {
            worst_ratio = err / bound;
            out = (err, bound, peak);
        }
    }
    (out.0, out.1, peak)
}

fn ground_spectrum(h: &phasewright::pauli::PauliSum) -> Vec<f64> {
    phasewright::sim::exact::spectrum(h).values
}

#[test]
fn six_qubit_dos_matches_the_broadened_spectrum_within_the_quadrature_bound() {
    // 6-site transverse-field Ising chain with a constant, 40 points, dt = 0.2 (alias-free:
    // 2π/dt = 31.4 exceeds |E − c| + Σ|c_j| everywhere on the grid), default σ = 3.5/(39·dt).
    let h = tfim(6, 1.0, 1.0, 0.6);
    let (dt, k) = (0.2, 40);
    let sigma = dos::default_sigma(k, dt);
    let (err, bound, peak) = worst(&h, dt, k, sigma);
    eprintln!("default σ = {sigma:.4}: worst error {err:.3e}, bound {bound:.3e}, peak {peak:.2}");
    // The bound assumes the worst case |g_k| = 1 (all 2ⁿ levels in phase), so it is a fraction
    // erfc(3.5/√2) ≈ 4.7e-4 of 2ⁿ/(σ√2π) = 57, i.e. 0.33% of this spectrum's peak of 8.05;
    // measured: error 1.9e-3, bound 2.6e-2.
    assert!(bound < 5e-3 * peak, "bound {bound} vs peak {peak}");

    // Below the resolution limit the truncation error is visible and still inside the bound.
    let sigma = 0.25;
    let (err, bound, peak) = worst(&h, dt, k, sigma);
    eprintln!("σ = {sigma}: worst error {err:.3e}, bound {bound:.3e}, peak {peak:.2}");
    assert!(
        err > 1e-3 * peak,
        "the truncation error should be visible at small σ"
    );
}

#[test]
fn heisenberg_six_dos_with_degeneracies() {
    // Open Heisenberg chain, 6 sites: highly degenerate multiplets; dt = 0.25, K = 30.
    let h = heisenberg(6, 1.0, -0.3);
    let (dt, k) = (0.25, 30);
    let (err, bound, peak) = worst(&h, dt, k, dos::default_sigma(k, dt));
    eprintln!("heisenberg: worst error {err:.3e}, bound {bound:.3e}, peak {peak:.2}");
    // Measured: error 3.1e-3, bound 2.5e-2, peak 9.0.
    assert!(bound < 5e-3 * peak);
}

#[test]
fn trace_plan_from_exact_counts_recovers_the_dos_and_integrates_to_2n() {
    // A trace campaign over all 2ⁿ computational basis states is an exact trace; counts at
    // 10¹² pseudo-shots make the reads exact to ≈1e-12.
    let h = tfim(3, 1.0, 0.6, 0.25);
    let states: Vec<String> = (0..8)
        .map(|b| {
            (0..3)
                .map(|q| if b >> q & 1 == 1 { '1' } else { '0' })
                .collect()
        })
        .collect();
    let refs: Vec<&str> = states.iter().map(|s| s.as_str()).collect();
    let (dt, k) = (0.3, 30);
    let camp = campaign(&h, &refs, Kind::Trace, dt, k);
    let counts = phasewright::estimate::counts::CountsFile {
        bit_order: phasewright::estimate::counts::BitOrder::First,
        circuits: camp
            .circuits
            .iter()
            .map(|c| phasewright::estimate::counts::CircuitCounts {
                num_bits: c.entry.num_clbits,
                outcomes: c
                    .probs
                    .iter()
                    .enumerate()
                    .map(|(i, p)| (i as u128, (p * 1e12).round() as u64))
                    .filter(|(_, n)| *n > 0)
                    .collect(),
            })
            .collect(),
    };
    let Analysis::Dos(r) = analyse(&camp.plan, &counts, &Config::default()).unwrap() else {
        panic!("trace plan gives a DOS")
    };
    let exact = r.exact.as_ref().expect("3 qubits are diagonalised");
    for (i, want) in exact.iter().enumerate() {
        // Reads are exact to ≈1e-12 (10¹² pseudo-shots), so the quadrature bound is the budget.
        let tol = r.quadrature_bound[i] + 1e-6;
        let got = r.density[i];
        assert!(
            (got - want).abs() <= tol,
            "E = {}: {got} vs {want}",
            r.energies[i]
        );
    }
    // ∫ρ dE = 2ⁿ = 8 (trapezoid over the grid, which covers every level ± 3σ).
    let de = r.energies[1] - r.energies[0];
    let integral: f64 = r.density.iter().sum::<f64>() * de;
    assert!((integral - 8.0).abs() < 0.05, "∫ρ = {integral}");
    assert!((r.resolution - std::f64::consts::PI / (30.0 * 0.3)).abs() < 1e-15);
}
