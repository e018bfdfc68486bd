//! Trotter bias of quasi-energies: how far the eigenvalues of the compiled product formula's
//! effective Hamiltonian can sit from those of `H`.
//!
//! In: the plan's Hamiltonian, formula order, steps per `dt` and `dt`. Out: a [`TrotterBias`]
//! holding a rigorous bound on the ground-energy shift, and, when the plan is small enough to
//! diagonalise, the shift itself. Invariant: the bound is an upper bound for every eigenvalue
//! (never an estimate), and is reported as infinite when the argument that gives it fails.
//!
//! **Step error.** The compiled step over the commuting term groups `H_1..H_Γ` (formula order,
//! group 1 applied first) is bounded with the commutator scaling of Childs, Su, Tran, Wiebe &
//! Zhu, "Theory of Trotter error with commutator scaling", Phys. Rev. X 11, 011020 (2021)
//! (cited from memory):
//! - order 1: `‖S₁(τ) − e^{−iτH}‖ ≤ (τ²/2) Σ_{γ1} ‖[Σ_{γ2>γ1} H_{γ2}, H_{γ1}]‖`;
//! - order 2: `‖S₂(τ) − e^{−iτH}‖ ≤ (τ³/12) Σ_{γ1} ‖[Σ_{γ3>γ1} H_{γ3}, [Σ_{γ2>γ1} H_{γ2},
//!   H_{γ1}]]‖ + (τ³/24) Σ_{γ1} ‖[H_{γ1}, [H_{γ1}, Σ_{γ2>γ1} H_{γ2}]]‖`;
//! - order 4: Suzuki's step is five Strang steps of lengths `s_i τ` with `Σ s_i = 1`, so by
//!   the triangle inequality `‖S₄(τ) − e^{−iτH}‖ ≤ Σ_i δ₂(|s_i|τ)`. This keeps only the
//!   third-order scaling (rigorous but loose for small τ); the general p-th order bound of the
//!   same paper is not used because we do not trust our memory of its constant.
//!
//! Commutators of Pauli sums are computed exactly (`[P, Q] = 2PQ` when the strings
//! anticommute, else 0) and their operator norm bounded by the one-norm of the coefficients.
//! Over `r` steps per `dt`, `δ = ‖U − e^{−iH dt}‖ ≤ r·δ_step(dt/r)` (telescoping).
//!
//! **From step error to energies.** For unitaries `U`, `V` the eigenvalues can be matched so
//! that each pair lies within `‖U − V‖` on the unit circle (Bhatia & Davis, "A bound for the
//! spectral variation of a unitary operator", Linear Multilinear Algebra 15, 71 (1984); cited
//! from memory); a chord `δ` spans the angle `2·asin(δ/2)`, so every quasi-energy lies within
//! `b = 2·asin(δ/2)/dt` of an eigenvalue of `H` (and the ground quasi-energy within `b` of
//! `E0` while `‖H‖·dt < π`, so no phase wraps). With `δ ≥ 2` the bound is vacuous (infinite).
//!
//! **Computed shift.** Up to [`super::EXACT_MAX_QUBITS`] qubits, `U` is built densely from the
//! same rotation program the circuits apply, its eigenvalues come from a complex Schur
//! decomposition (nalgebra), and the ground quasi-energy is the eigenvalue closest to the
//! Rayleigh value `⟨E0|U|E0⟩` (`E0`: ground state of `H` by dense diagonalisation). Rounding:
//! ≈1e-12 in the phase, i.e. ≈1e-12/dt in energy.

use crate::formula::suzuki_stages;
use crate::formula::{self, Order};
use crate::pauli::{PauliString, PauliSum};
use crate::plan::Plan;
use crate::sim::State;
use nalgebra::DMatrix;
use num_complex::Complex64;
use std::collections::BTreeMap;

/// Largest number of terms for which nested commutators are computed exactly (the double
/// commutators cost up to ~terms³ map updates, ≈10⁷ here); beyond it the commutators are
/// bounded by `‖[A, B]‖ ≤ 2‖A‖₁‖B‖₁` (cost linear in the terms, looser).
pub const EXACT_COMMUTATOR_TERMS: usize = 200;

/// What is known about the Trotter shift of the ground energy.
#[derive(Clone, Debug, PartialEq)]
pub struct TrotterBias {
    /// `δ_step` bound for one step of length `dt/r`.
    pub step_bound: f64,
    /// Bound `b` on `|ε_0 − E_0|` (infinite when vacuous).
    pub energy_bound: f64,
    /// `ε_0 − E_0` computed from dense matrices, when the plan is small enough.
    pub computed: Option<f64>,
}

type CSum = BTreeMap<PauliString, Complex64>;

fn to_csum(terms: &[(PauliString, f64)]) -> CSum {
    let mut m = CSum::new();
    for (p, c) in terms {
        *m.entry(p.clone()).or_default() += Complex64::new(*c, 0.0);
    }
    m
}

/// `[A, B]` of two Pauli sums, exactly (zero coefficients dropped).
fn commutator(a: &CSum, b: &CSum) -> CSum {
    let mut out = CSum::new();
    for (p, x) in a {
        for (q, y) in b {
            if p.commutes_with(q) {
                continue;
            }
            let (ph, r) = p.mul(q);
            *out.entry(r).or_default() += ph * x * y * 2.0;
        }
    }
    out.retain(|_, v| v.norm() > 0.0);
    out
}

fn norm1(a: &CSum) -> f64 {
    a.values().map(|v| v.norm()).sum()
}

/// Per-group sums `A_γ = Σ_{γ' > γ} H_{γ'}`.
fn tails(groups: &[CSum]) -> Vec<CSum> {
    let mut out = vec![CSum::new(); groups.len()];
    let mut acc = CSum::new();
    for g in (0..groups.len()).rev() {
        out[g] = acc.clone();
        for (p, v) in &groups[g] {
            *acc.entry(p.clone()).or_default() += v;
        }
    }
    out
}

/// Coefficients `(c₁, c₂)` with `δ₁(τ) ≤ c₁τ²` and `δ₂(τ) ≤ c₂τ³` for the commuting groups.
fn step_coefficients(groups: &[Vec<(PauliString, f64)>]) -> (f64, f64) {
    let total: usize = groups.iter().map(Vec::len).sum();
    coefficients(groups, total <= EXACT_COMMUTATOR_TERMS)
}

fn coefficients(groups: &[Vec<(PauliString, f64)>], exact: bool) -> (f64, f64) {
    let g: Vec<CSum> = groups.iter().map(|x| to_csum(x)).collect();
    let t = tails(&g);
    if !exact {
        let n: Vec<f64> = g.iter().map(norm1).collect();
        let tn: Vec<f64> = t.iter().map(norm1).collect();
        let c1: f64 = (0..g.len()).map(|i| 2.0 * tn[i] * n[i]).sum::<f64>() / 2.0;
        let c2: f64 = (0..g.len())
            .map(|i| 4.0 * tn[i] * tn[i] * n[i] / 12.0 + 4.0 * n[i] * n[i] * tn[i] / 24.0)
            .sum();
        return (c1, c2);
    }
    let mut c1 = 0.0;
    let mut c2 = 0.0;
    for i in 0..g.len() {
        if t[i].is_empty() {
            continue;
        }
        let inner = commutator(&t[i], &g[i]);
        c1 += norm1(&inner) / 2.0;
        c2 += norm1(&commutator(&t[i], &inner)) / 12.0;
        c2 += norm1(&commutator(&g[i], &commutator(&g[i], &t[i]))) / 24.0;
    }
    (c1, c2)
}

/// Bound on `‖S(τ) − e^{−iτH'}‖` for one step of the given order over the commuting groups.
pub fn step_error_bound(groups: &[Vec<(PauliString, f64)>], order: u32, tau: f64) -> f64 {
    let (c1, c2) = step_coefficients(groups);
    match order {
        1 => c1 * tau * tau,
        2 => c2 * tau.powi(3),
        _ => suzuki_stages()
            .iter()
            .map(|s| c2 * (s.abs() * tau).powi(3))
            .sum(),
    }
}

/// `b = 2·asin(δ/2)/dt` for `δ = r·δ_step(dt/r)`; infinite when `δ ≥ 2`.
pub fn energy_bound(step_bound: f64, steps: usize, dt: f64) -> f64 {
    let delta = steps as f64 * step_bound;
    if delta >= 2.0 || !delta.is_finite() {
        f64::INFINITY
    } else {
        2.0 * (delta / 2.0).asin() / dt
    }
}

/// The Trotter bias of the plan's ground energy: bound always, computed shift when small.
pub fn plan_bias(plan: &Plan) -> Result<TrotterBias, super::EstimateError> {
    let mut h = super::plan_hamiltonian(plan)?;
    h.constant = 0.0;
    let order = plan.formula.order;
    let steps = plan.formula.steps_per_dt.max(1);
    let dt = plan.formula.dt;
    let groups = formula::term_groups(&h);
    let step_bound = step_error_bound(&groups, order, dt / steps as f64);
    let energy_bound = energy_bound(step_bound, steps, dt);
    let computed = (h.num_qubits <= super::EXACT_MAX_QUBITS && h.num_qubits > 0)
        .then(|| computed_shift(&h, order, steps, dt))
        .flatten();
    Ok(TrotterBias {
        step_bound,
        energy_bound,
        computed,
    })
}

/// `ε_0 − E_0` for `H'` (no constant) from dense matrices; `None` if the order is unknown or
/// the Schur decomposition fails.
pub fn computed_shift(h: &PauliSum, order: u32, steps: usize, dt: f64) -> Option<f64> {
    let order = Order::from_number(order)?;
    let n = h.num_qubits;
    let dim = 1usize << n;
    let prog = formula::evolution(&formula::order_terms(h), order, dt, steps);
    let mut u = DMatrix::<Complex64>::zeros(dim, dim);
    for col in 0..dim {
        let mut st = State {
            n,
            amps: vec![Complex64::new(0.0, 0.0); dim],
        };
        st.amps[col] = Complex64::new(1.0, 0.0);
        formula::apply_program(&mut st, &prog);
        for (r, a) in st.amps.iter().enumerate() {
            u[(r, col)] = *a;
        }
    }
    let sp = crate::sim::exact::spectrum(h);
    let e0 = sp.values[0];
    let v0 = sp.vectors.column(0);
    let rayleigh = v0.dotc(&(&u * v0));
    let target = rayleigh / rayleigh.norm();
    let lambdas = u.schur().eigenvalues()?;
    let best = lambdas
        .iter()
        .min_by(|a, b| (*a - target).norm().total_cmp(&(*b - target).norm()))?;
    // Quasi-energy nearest E0: e^{−iε dt} = λ, unwrapped around E0.
    let eps = e0 - (best * Complex64::from_polar(1.0, e0 * dt)).arg() / dt;
    Some(eps - e0)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::pauli::Pauli;

    fn two_level() -> PauliSum {
        // H = a Z + b X: exactly solvable, groups {X}, {Z} (one term each).
        let mut h = PauliSum::new(1);
        h.add(PauliString::single(0, Pauli::Z), 0.7);
        h.add(PauliString::single(0, Pauli::X), 0.4);
        h
    }

    #[test]
    fn commutator_of_x_and_z_is_minus_two_i_y() {
        // [X, Z] = XZ − ZX = −2iY (Pauli algebra: XZ = −iY).
        let x = to_csum(&[(PauliString::single(0, Pauli::X), 1.0)]);
        let z = to_csum(&[(PauliString::single(0, Pauli::Z), 1.0)]);
        let c = commutator(&x, &z);
        assert_eq!(c.len(), 1);
        let (p, v) = c.iter().next().unwrap();
        assert_eq!(*p, PauliString::single(0, Pauli::Y));
        assert!((v - Complex64::new(0.0, -2.0)).norm() < 1e-15);
    }

    #[test]
    fn bounds_hold_for_the_actual_step_error_and_shift() {
        // The actual ‖S(τ) − e^{−iτH}‖ of a one-qubit sum (2×2 matrices) must not exceed the
        // commutator bound, and the computed quasi-energy shift must not exceed b.
        let h = two_level();
        let groups = formula::term_groups(&h);
        for order in [1u32, 2, 4] {
            for &(dt, steps) in &[(0.5, 1usize), (0.3, 2), (1.0, 3)] {
                let tau = dt / steps as f64;
                let prog = formula::evolution(
                    &formula::order_terms(&h),
                    Order::from_number(order).unwrap(),
                    tau,
                    1,
                );
                let exact = crate::sim::exact::spectrum(&h);
                let mut worst: f64 = 0.0;
                for col in 0..2 {
                    let mut st = State::zero(1);
                    if col == 1 {
                        st.apply(&crate::circuit::Gate::X(0));
                    }
                    let mut ex = st.clone();
                    formula::apply_program(&mut st, &prog);
                    // e^{−iτH}|col⟩ from the spectrum.
                    let c = exact.vectors.adjoint() * nalgebra::DVector::from_vec(ex.amps.clone());
                    let mut c2 = c.clone();
                    for (i, e) in exact.values.iter().enumerate() {
                        c2[i] *= Complex64::from_polar(1.0, -e * tau);
                    }
                    let v = &exact.vectors * c2;
                    ex.amps = v.iter().copied().collect();
                    let d: f64 = st
                        .amps
                        .iter()
                        .zip(&ex.amps)
                        .map(|(a, b)| (a - b).norm_sqr())
                        .sum::<f64>()
                        .sqrt();
                    worst = worst.max(d);
                }
                let bound = step_error_bound(&groups, order, tau);
                assert!(
                    worst <= bound + 1e-12,
                    "order {order} τ {tau}: {worst} > {bound}"
                );
                let shift = computed_shift(&h, order, steps, dt).unwrap();
                let b = energy_bound(bound, steps, dt);
                assert!(
                    shift.abs() <= b + 1e-9,
                    "order {order}: shift {shift} > {b}"
                );
            }
        }
    }

    #[test]
    fn the_norm_bound_for_many_terms_is_above_the_exact_commutators() {
        // ‖[A, B]‖₁ ≤ 2‖A‖₁‖B‖₁ term by term, so the coarse route can only be looser.
        let mut h = PauliSum::new(3);
        for (f, c) in [
            (&[(0, Pauli::Z), (1, Pauli::Z)][..], -1.0),
            (&[(1, Pauli::Z), (2, Pauli::Z)][..], -0.7),
            (&[(0, Pauli::X)][..], 0.4),
            (&[(1, Pauli::X)][..], 0.5),
            (&[(2, Pauli::Y)][..], -0.3),
        ] {
            h.add(PauliString::from_factors(f).1, c);
        }
        let groups = formula::term_groups(&h);
        let (e1, e2) = coefficients(&groups, true);
        let (c1, c2) = coefficients(&groups, false);
        assert!(e1 > 0.0 && e2 > 0.0);
        assert!(c1 >= e1 - 1e-12 && c2 >= e2 - 1e-12, "{c1} {e1} {c2} {e2}");
    }

    #[test]
    fn commuting_terms_have_no_trotter_bias() {
        let mut h = PauliSum::new(2);
        h.add(
            PauliString::from_factors(&[(0, Pauli::Z), (1, Pauli::Z)]).1,
            1.0,
        );
        h.add(PauliString::single(0, Pauli::Z), 0.5);
        let groups = formula::term_groups(&h);
        assert_eq!(step_error_bound(&groups, 2, 0.4), 0.0);
        assert!(computed_shift(&h, 2, 1, 0.4).unwrap().abs() < 1e-12);
    }
}
