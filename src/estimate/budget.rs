//! Planning a campaign from an accuracy target: `dt`, formula order and steps, time points,
//! shots per circuit, before anything is compiled.
//!
//! In: a qubit Hamiltonian, the reference state's ground-state weight when known, and the
//! accuracy wanted (energy units). Out: a [`Budget`] with every choice and the rule behind it.
//! Invariant: the Trotter part uses the same rigorous bound that `estimate` reports
//! ([`super::trotter`]), so a campaign compiled as proposed never has a Trotter bound above
//! its share of the target; the statistical part is an empirical rule, said to be one.
//!
//! Rules (the error budget is split evenly: `σ_stat ≤ a/2`, Trotter standard deviation
//! `b/√3 ≤ a/2`, where `a` is the accuracy):
//! - **dt** from the spectral-range bound `|E − c| ≤ Σ|c_j|` (triangle inequality): with
//!   `dt = π/(2Σ|c_j|)` every eigenphase of the step lies within `π` of any other, the
//!   condition under which the unitary pencil's quasi-energies cannot wrap
//!   ([`super::krylov::unitary_ritz`]);
//! - **order 2, steps r**: the smallest `r` whose commutator-scaling bound (Childs, Su, Tran,
//!   Wiebe & Zhu, PRX 11, 011020 (2021)) gives `b ≤ √3·a/2`; order 2 because our fourth-order
//!   bound keeps only third-order scaling (see `trotter`), so it never asks for fewer steps;
//! - **points K** = [`DEFAULT_POINTS`]: on the eight survey models (benches/trust_survey.rs)
//!   the plateau scan of `estimate` settles by d ≈ 19 at `Σ|c_j|·dt = π`; at half that dt the
//!   same time span needs twice the points, capped at [`MAX_POINTS`];
//! - **shots N**: `σ_stat ≈ A/(w²·dt·√N)` with `A` = [`STAT_CONSTANT`] and `w` the reference's
//!   ground-state weight (0.5 assumed when unknown). `A` is fitted on the survey (10⁶ shots:
//!   `σ_stat·√N·dt` between 0.02 and 0.05 at `w ≈ 0.85–0.99`, 1.4 at `w = 0.24`); an empirical
//!   rule, not a bound. `estimate` reports the real `σ_stat` and warns when the target is
//!   missed.

use super::trotter;
use crate::formula;
use crate::pauli::PauliSum;

/// Time points proposed for `Σ|c_j|·dt = π/2`.
pub const DEFAULT_POINTS: usize = 40;

/// Most time points proposed.
pub const MAX_POINTS: usize = 64;

/// Constant of the shot rule (see the module header).
pub const STAT_CONSTANT: f64 = 0.05;

/// Weight assumed when it cannot be computed.
pub const UNKNOWN_WEIGHT: f64 = 0.5;

/// Most Trotter steps per dt proposed.
pub const MAX_STEPS: usize = 2000;

/// The proposal.
#[derive(Clone, Debug, PartialEq)]
pub struct Budget {
    pub accuracy: f64,
    pub one_norm: f64,
    pub dt: f64,
    pub order: u32,
    pub steps: usize,
    pub points: usize,
    pub shots: u64,
    /// Trotter bound at the proposed steps.
    pub trotter_bound: f64,
    /// Predicted σ_stat at the proposed shots.
    pub sigma_stat: f64,
    pub weight: f64,
    pub weight_known: bool,
    /// Circuits of an overlap campaign (two per point k ≥ 1).
    pub circuits: usize,
    /// Warnings (steps or shots capped).
    pub warnings: Vec<String>,
}

/// Proposes settings for `h` (constant included or not; it does not matter) at `accuracy`.
pub fn propose(h: &PauliSum, accuracy: f64, weight: Option<f64>) -> Budget {
    let norm = h.one_norm();
    let dt = std::f64::consts::FRAC_PI_2 / norm;
    let mut hp = h.clone();
    hp.constant = 0.0;
    let groups = formula::term_groups(&hp);
    let target_b = 3f64.sqrt() * accuracy / 2.0;
    let mut warnings = Vec::new();
    let bound_at = |r: usize| {
        trotter::energy_bound(trotter::step_error_bound(&groups, 2, dt / r as f64), r, dt)
    };
    // The bound falls like 1/r²: start from that estimate and walk up to the first r that meets it.
    let b1 = bound_at(1);
    let mut steps = if b1.is_finite() && b1 > target_b {
        ((b1 / target_b).sqrt().floor() as usize).clamp(1, MAX_STEPS)
    } else {
        1
    };
    while steps < MAX_STEPS && bound_at(steps) > target_b {
        steps += 1;
    }
    let trotter_bound = bound_at(steps);
    if trotter_bound > target_b {
        warnings.push(format!(
            "even {MAX_STEPS} Trotter steps per dt leave a Trotter bound of {trotter_bound:.2e} \
             above the target's share {target_b:.2e}"
        ));
    }
    let (w, known) = match weight {
        Some(w) if w > 0.0 => (w, true),
        Some(_) => {
            warnings.push(
                "the reference state has no ground-state weight: no number of shots reaches \
                 the ground energy; choose another state"
                    .into(),
            );
            (UNKNOWN_WEIGHT, true)
        }
        None => (UNKNOWN_WEIGHT, false),
    };
    let sigma_target = accuracy / 2.0;
    let root_n = STAT_CONSTANT / (w * w * dt * sigma_target);
    let shots = (root_n * root_n).ceil().max(1.0) as u64;
    let points = DEFAULT_POINTS.min(MAX_POINTS);
    Budget {
        accuracy,
        one_norm: norm,
        dt,
        order: 2,
        steps,
        points,
        shots,
        trotter_bound,
        sigma_stat: STAT_CONSTANT / (w * w * dt * (shots as f64).sqrt()),
        weight: w,
        weight_known: known,
        circuits: 2 * (points - 1),
        warnings,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::pauli::{Pauli, PauliString};

    #[test]
    fn proposal_meets_its_own_shares() {
        let mut h = PauliSum::new(3);
        h.add(
            PauliString::from_factors(&[(0, Pauli::Z), (1, Pauli::Z)]).1,
            -1.0,
        );
        h.add(
            PauliString::from_factors(&[(1, Pauli::Z), (2, Pauli::Z)]).1,
            -1.0,
        );
        for q in 0..3 {
            h.add(PauliString::single(q, Pauli::X), -0.8);
        }
        let b = propose(&h, 1e-3, Some(0.8));
        // dt = π/(2·4.4).
        assert!((b.dt - std::f64::consts::PI / 8.8).abs() < 1e-12);
        assert!(b.trotter_bound / 3f64.sqrt() <= 5e-4 + 1e-15);
        // One step fewer would miss the Trotter share (the minimal r is chosen).
        if b.steps > 1 {
            let groups = formula::term_groups(&h);
            let r = b.steps - 1;
            let prev = trotter::energy_bound(
                trotter::step_error_bound(&groups, 2, b.dt / r as f64),
                r,
                b.dt,
            );
            assert!(prev > 3f64.sqrt() * 5e-4);
        }
        assert!(b.sigma_stat <= 5e-4 + 1e-12);
        assert!(b.warnings.is_empty());
    }
}
