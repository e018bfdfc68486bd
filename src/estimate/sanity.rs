//! Plausibility checks on measured series and estimated energies, and the signal-loss
//! factors that `estimate --undo-loss` divides out.
//!
//! In: the [`Plan`], series built from counts, energies. Out: warnings (plain sentences that
//! name the row, the bound and the reason) and, for the bit-order check, a count of violated
//! bounds under each reading of the bitstrings. Invariant: every bound here holds for exact
//! data whatever the Hamiltonian and reference state; a check fires only beyond three
//! standard errors of the shot noise, so correct counts trip one by chance rarely.
//!
//! Bounds used (each derived beside its function):
//! - one-norm bound on energies, `|E − c| ≤ Σ_j |c_j|` (triangle inequality on `‖Σ c_j P_j‖`,
//!   `‖P_j‖ = 1`);
//! - `|S_k| ≤ 1` (Cauchy–Schwarz) and `|h_k| = |⟨ψ|(H − c)U|ψ⟩| ≤ Σ|c_j|`;
//! - `|S_k| ≥ 1 − a·Σ|c_j|·k·dt` for a product formula whose step lengths add up to `a·t` in
//!   absolute value (`‖e^{−iθP} − I‖ = 2|sin(θ/2)| ≤ |θ|` and `‖AB − I‖ ≤ ‖A − I‖ + ‖B − I‖`
//!   for unitaries);
//! - the Gram matrix `S_{jk} = ⟨ψ|U^{k−j}|ψ⟩` is positive semidefinite; entry errors `E`
//!   move its eigenvalues by at most `‖E‖₂ ≤ ‖E‖_F` (Weyl's inequality, H. Weyl, Math. Ann. 71,
//!   441 (1912); cited from memory).

use super::counts::CountsFile;
use super::expect::Series;
use super::krylov;
use crate::plan::Plan;
use num_complex::Complex64;

/// Standard errors beyond which a bound counts as violated.
pub const SIGMAS: f64 = 3.0;

/// `[c − Σ|c_j|, c + Σ|c_j|]`: every eigenvalue of `H = c + Σ c_j P_j` lies here, since
/// `‖H − c‖ ≤ Σ|c_j|·‖P_j‖ = Σ|c_j|` (triangle inequality; Pauli strings have norm 1).
pub fn energy_bound(plan: &Plan) -> (f64, f64) {
    let c = plan.hamiltonian.constant;
    let n = plan.hamiltonian.one_norm;
    (c - n, c + n)
}

/// Whether `e` lies outside `bound` (a tiny relative slack absorbs rounding of the bound).
pub fn outside(e: f64, bound: (f64, f64)) -> bool {
    let slack = 1e-9 * (1.0 + bound.0.abs().max(bound.1.abs()));
    !e.is_finite() || e < bound.0 - slack || e > bound.1 + slack
}

/// Sum of the absolute step lengths of one product-formula step over its nominal length:
/// 1 for Lie–Trotter and Strang (forward steps only); `8p − 1` for fourth-order Suzuki with
/// `p = 1/(4 − 4^{1/3})` (four steps of `p` forward, one of `1 − 4p < 0` backward; M. Suzuki,
/// Phys. Lett. A 146, 319 (1990), from memory).
pub fn step_length_factor(order: u32) -> f64 {
    match order {
        1 | 2 => 1.0,
        _ => {
            let p = 1.0 / (4.0 - 4f64.powf(1.0 / 3.0));
            8.0 * p - 1.0
        }
    }
}

/// Smallest eigenvalue of the `K×K` Toeplitz Gram matrix of `s`, and the Weyl noise scale
/// `√(Σ_{jk} σ_{k−j}²)` (Frobenius norm of the standard errors, `σ² = σ_re² + σ_im²`).
pub fn gram_min_eigenvalue(s: &Series) -> (f64, f64) {
    let k = s.len();
    let m = krylov::toeplitz(&s.values, k);
    let m = (&m + m.adjoint()) * Complex64::new(0.5, 0.0);
    let min = m
        .symmetric_eigen()
        .eigenvalues
        .iter()
        .copied()
        .fold(f64::INFINITY, f64::min);
    let var: f64 = (0..k)
        .flat_map(|j| (0..k).map(move |l| j.abs_diff(l)))
        .map(|m| s.std_errors[m].0.powi(2) + s.std_errors[m].1.powi(2))
        .sum();
    (min, var.sqrt())
}

/// Warning when the Gram matrix of `s` is negative beyond `SIGMAS` times its noise scale.
pub fn gram_warning(s: &Series, what: &str) -> Option<String> {
    let (min, noise) = gram_min_eigenvalue(s);
    (min < -SIGMAS * noise).then(|| {
        format!(
            "the Gram matrix S of {what} ({0}×{0}) is not positive semidefinite within noise: \
             smallest eigenvalue {min:.3e} < −{SIGMAS}·{noise:.3e} (−{SIGMAS}× the Frobenius \
             norm of its standard errors, the most shot noise can move an eigenvalue by Weyl's \
             inequality); exact overlaps always give S ⪰ 0, so the counts are inconsistent \
             (wrong bit order, another plan, drift, or readout errors)",
            s.len()
        )
    })
}

/// Bounds the series `s` (and `h`, the series `⟨ψ|(H − c)U|ψ⟩`) violate beyond noise, as
/// short descriptions.
pub fn series_violations(plan: &Plan, s: &Series, h: Option<&Series>, what: &str) -> Vec<String> {
    let n = plan.hamiltonian.one_norm;
    let dt = plan.formula.dt;
    let a = step_length_factor(plan.formula.order);
    let mut out = Vec::new();
    for k in 1..s.len() {
        let (sr, si) = s.std_errors[k];
        let se = (sr * sr + si * si).sqrt();
        let mag = s.values[k].norm();
        if mag > 1.0 + SIGMAS * se {
            out.push(format!("{what}: |S_{k}| = {mag:.3} > 1"));
        }
        let floor = 1.0 - a * n * k as f64 * dt;
        if floor > 0.0 && mag < floor - SIGMAS * se {
            out.push(format!(
                "{what}: |S_{k}| = {mag:.3} < 1 − a·Σ|c_j|·k·dt = {floor:.3}"
            ));
        }
    }
    if let Some(h) = h {
        for k in 0..h.len() {
            let (sr, si) = h.std_errors[k];
            let se = (sr * sr + si * si).sqrt();
            let mag = h.values[k].norm();
            if mag > n + SIGMAS * se {
                out.push(format!("{what}: |h_{k}| = {mag:.3} > Σ|c_j| = {n:.3}"));
            }
        }
    }
    if s.len() > 1 {
        let (min, noise) = gram_min_eigenvalue(s);
        if min < -SIGMAS * noise {
            out.push(format!("{what}: S has eigenvalue {min:.3e}"));
        }
    }
    out
}

/// The same counts read with the other bit-order convention: every outcome mask reversed
/// within its circuit's bit count.
pub fn reversed(counts: &CountsFile) -> CountsFile {
    let mut out = counts.clone();
    for c in &mut out.circuits {
        let n = c.num_bits;
        for (mask, _) in &mut c.outcomes {
            let mut r = 0u128;
            for b in 0..n {
                if (*mask >> b) & 1 == 1 {
                    r |= 1u128 << (n - 1 - b);
                }
            }
            *mask = r;
        }
        c.outcomes.sort_by_key(|(m, _)| *m);
    }
    out.bit_order = match counts.bit_order {
        super::counts::BitOrder::First => super::counts::BitOrder::Last,
        super::counts::BitOrder::Last => super::counts::BitOrder::First,
    };
    out
}

/// Per-circuit signal-loss factors from the calibrated success probabilities recorded in the
/// plan's costs (`compile --device`). Errors name the first circuit without one.
pub fn calibrated_loss(plan: &Plan) -> Result<Vec<f64>, super::EstimateError> {
    plan.circuits
        .iter()
        .map(|c| match c.costs.success_probability {
            Some(f) if f.is_finite() && f > 0.0 && f <= 1.0 => Ok(f),
            found => Err(super::EstimateError::NoCalibration {
                circuit: c.id.clone(),
                found,
            }),
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn suzuki_step_lengths_add_up_to_about_2_32() {
        // p = 1/(4 − 4^{1/3}) ≈ 0.41449 (Suzuki 1990, from memory): 4p + |1 − 4p| ≈ 2.3159.
        assert!((step_length_factor(4) - 2.3159).abs() < 1e-3);
        assert_eq!(step_length_factor(2), 1.0);
    }

    #[test]
    fn gram_of_a_negative_definite_series_is_flagged() {
        // S_1 = 2: [[1, 2], [2, 1]] has eigenvalues 3 and −1.
        let s = Series {
            values: vec![Complex64::new(1.0, 0.0), Complex64::new(2.0, 0.0)],
            std_errors: vec![(0.0, 0.0), (0.01, 0.01)],
        };
        let (min, noise) = gram_min_eigenvalue(&s);
        assert!((min + 1.0).abs() < 1e-12, "{min}");
        // Frobenius of errors: two off-diagonal entries of σ² = 2e-4 each → √4e-4 = 0.02.
        assert!((noise - 0.02).abs() < 1e-12, "{noise}");
        assert!(gram_warning(&s, "ψ_0").is_some());
        let ok = Series {
            values: vec![Complex64::new(1.0, 0.0), Complex64::new(0.0, 0.9)],
            std_errors: vec![(0.0, 0.0), (0.01, 0.01)],
        };
        assert!(gram_warning(&ok, "ψ_0").is_none());
    }
}
