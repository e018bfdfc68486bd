//! Product formulas: from a Pauli sum to a rotation program `Π_j exp(-i θ_j P_j)`.
//!
//! In: the non-identity terms of a [`PauliSum`], an [`Order`], a total time and a step count.
//! Out: a [`Rotation`] list, applied first to last. Invariants: no identity string appears (the
//! identity term is a global phase, recorded elsewhere and added back at estimation time);
//! adjacent rotations about the same string are merged into one; the term order is
//! deterministic.
//!
//! Formulas (Suzuki, "General theory of fractal path integrals with applications to many-body
//! theories and statistical physics", J. Math. Phys. 32, 400 (1991); Lie–Trotter and Strang are
//! the orders 1 and 2 of the same family):
//! - order 1: `S₁(δ) = Π_j e^{-i c_j P_j δ}`;
//! - order 2: `S₂(δ) = Π_j e^{-i c_j P_j δ/2} · Π_{j reversed} e^{-i c_j P_j δ/2}`;
//! - order 4: `S₄(δ) = S₂(pδ)² S₂((1−4p)δ) S₂(pδ)²`, `p = 1/(4 − 4^{1/3})`.
//!
//! `U(t) ≈ S(t/r)^r`.

use crate::pauli::group::{colour_groups, Compat};
use crate::pauli::{PauliString, PauliSum};
use crate::sim::State;

/// One factor `exp(-i θ P)` of a product formula.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Rotation {
    pub pauli: PauliString,
    pub theta: f64,
}

/// Product-formula order.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub enum Order {
    /// Lie–Trotter.
    First,
    /// Strang (symmetric).
    Second,
    /// Suzuki's fourth-order recursion.
    Fourth,
}

impl Order {
    pub fn from_number(k: u32) -> Option<Order> {
        match k {
            1 => Some(Order::First),
            2 => Some(Order::Second),
            4 => Some(Order::Fourth),
            _ => None,
        }
    }

    pub fn number(self) -> u32 {
        match self {
            Order::First => 1,
            Order::Second => 2,
            Order::Fourth => 4,
        }
    }
}

/// The terms in groups of mutually commuting strings (largest-first colouring), each group in
/// the strings' own (bit-mask) order. Deterministic.
///
/// Any permutation inside a group leaves every formula of this module exactly equal: the
/// factors of one group commute, and Strang and Suzuki apply a group forward then reversed,
/// which is again a product of commuting factors. A target may therefore reorder inside groups
/// (see `route::order_for_device`) but never across them.
pub fn term_groups(h: &PauliSum) -> Vec<Vec<(PauliString, f64)>> {
    let terms = h.term_list();
    let strings: Vec<PauliString> = terms.iter().map(|t| t.0).collect();
    colour_groups(&strings, Compat::Commuting)
        .into_iter()
        .map(|g| g.into_iter().map(|i| terms[i]).collect())
        .collect()
}

/// Orders the terms: the groups of [`term_groups`] one after the other. Deterministic.
pub fn order_terms(h: &PauliSum) -> Vec<(PauliString, f64)> {
    term_groups(h).concat()
}

fn push_merged(out: &mut Vec<Rotation>, r: Rotation) {
    if let Some(last) = out.last_mut() {
        if last.pauli == r.pauli {
            last.theta += r.theta;
            if last.theta == 0.0 {
                out.pop();
            }
            return;
        }
    }
    if r.theta != 0.0 {
        out.push(r);
    }
}

fn strang(terms: &[(PauliString, f64)], dt: f64, out: &mut Vec<Rotation>) {
    for &(p, c) in terms {
        push_merged(
            out,
            Rotation {
                pauli: p,
                theta: c * dt / 2.0,
            },
        );
    }
    for &(p, c) in terms.iter().rev() {
        push_merged(
            out,
            Rotation {
                pauli: p,
                theta: c * dt / 2.0,
            },
        );
    }
}

/// Appends one step `S(dt)` of the given order.
pub fn step(terms: &[(PauliString, f64)], order: Order, dt: f64, out: &mut Vec<Rotation>) {
    match order {
        Order::First => {
            for &(p, c) in terms {
                push_merged(
                    out,
                    Rotation {
                        pauli: p,
                        theta: c * dt,
                    },
                );
            }
        }
        Order::Second => strang(terms, dt, out),
        Order::Fourth => {
            let p = 1.0 / (4.0 - 4f64.powf(1.0 / 3.0));
            for f in [p, p, 1.0 - 4.0 * p, p, p] {
                strang(terms, f * dt, out);
            }
        }
    }
}

/// The rotation program for `U(t) ≈ S(t/steps)^steps` (empty for `steps = 0`).
pub fn evolution(
    terms: &[(PauliString, f64)],
    order: Order,
    t: f64,
    steps: usize,
) -> Vec<Rotation> {
    let mut out = Vec::new();
    if steps == 0 {
        return out;
    }
    let dt = t / steps as f64;
    for _ in 0..steps {
        step(terms, order, dt, &mut out);
    }
    out
}

/// Applies a rotation program to a state exactly (the ideal product-formula evolution).
pub fn apply_program(state: &mut State, program: &[Rotation]) {
    for r in program {
        state.apply_pauli_rotation(&r.pauli, r.theta);
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::pauli::Pauli;

    fn tfim(n: usize, j: f64, g: f64) -> PauliSum {
        let mut h = PauliSum::new(n);
        for q in 0..n - 1 {
            h.add(
                PauliString::from_factors(&[(q, Pauli::Z), (q + 1, Pauli::Z)]).1,
                -j,
            );
        }
        for q in 0..n {
            h.add(PauliString::single(q, Pauli::X), -g);
        }
        h
    }

    /// `‖S(t/r)^r ψ − e^{-iHt} ψ‖` on a generic (entangled, complex) state.
    fn trotter_error(h: &PauliSum, order: Order, t: f64, r: usize) -> f64 {
        let terms = order_terms(h);
        let mut psi = State::zero(h.num_qubits);
        for q in 0..h.num_qubits as u32 {
            psi.apply(&crate::circuit::Gate::U(
                q,
                0.3 + q as f64,
                0.7,
                -0.2 * q as f64,
            ));
        }
        psi.apply_pauli_rotation(&PauliString { x: 0b101, z: 0b011 }, 0.4);
        let mut s = psi.clone();
        apply_program(&mut s, &evolution(&terms, order, t, r));
        let exact = crate::sim::exact::evolve_taylor(h, &psi, t);
        s.amps
            .iter()
            .zip(&exact.amps)
            .map(|(a, b)| (a - b).norm_sqr())
            .sum::<f64>()
            .sqrt()
    }

    #[test]
    fn error_falls_with_the_order_of_the_formula() {
        // Global error of an order-p formula scales as r^{-p} (Suzuki 1991): doubling r divides
        // it by about 2^p. Checked over several r with a loose band around the asymptotic ratio.
        let h = tfim(5, 1.0, 0.8);
        for (order, want) in [
            (Order::First, 2.0),
            (Order::Second, 4.0),
            (Order::Fourth, 16.0),
        ] {
            for r in [4usize, 8, 16] {
                let ratio = trotter_error(&h, order, 1.0, r) / trotter_error(&h, order, 1.0, 2 * r);
                assert!(
                    (ratio / want - 1.0).abs() < 0.25,
                    "{order:?} r={r}: ratio {ratio}"
                );
            }
        }
    }

    #[test]
    fn commuting_terms_are_exact_at_one_step() {
        let mut h = PauliSum::new(3);
        h.add(
            PauliString::from_factors(&[(0, Pauli::Z), (1, Pauli::Z)]).1,
            0.7,
        );
        h.add(
            PauliString::from_factors(&[(1, Pauli::Z), (2, Pauli::Z)]).1,
            -0.4,
        );
        h.add(PauliString::single(2, Pauli::Z), 0.3);
        assert!(trotter_error(&h, Order::First, 2.0, 1) < 1e-14);
    }

    #[test]
    fn strang_steps_merge_their_boundary_rotations() {
        let h = tfim(3, 1.0, 0.5);
        let terms = order_terms(&h);
        let one = evolution(&terms, Order::Second, 1.0, 1).len();
        let three = evolution(&terms, Order::Second, 1.0, 3).len();
        // 2L−1 rotations per step, and one more merge at each of the two step boundaries.
        assert_eq!(one, 2 * terms.len() - 1);
        assert_eq!(three, 3 * (2 * terms.len() - 1) - 2);
    }
}
