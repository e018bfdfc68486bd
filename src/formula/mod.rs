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
#[derive(Clone, Debug, PartialEq)]
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
    let strings: Vec<PauliString> = terms.iter().map(|t| t.0.clone()).collect();
    colour_groups(&strings, Compat::Commuting)
        .into_iter()
        .map(|g| g.into_iter().map(|i| terms[i].clone()).collect())
        .collect()
}

/// Orders the terms: the groups of [`term_groups`] one after the other. Deterministic.
pub fn order_terms(h: &PauliSum) -> Vec<(PauliString, f64)> {
    term_groups(h).concat()
}

/// Appends `r`, merging it into an earlier rotation about the same string when `r` commutes
/// with every rotation in between (moving it back past them is then exact). This folds the
/// middle group of a Strang step (`G/2 · G/2 = G`) and the groups at step boundaries, so a
/// symmetric formula costs little more than Lie–Trotter. The walk back stops at the first
/// rotation that does not commute with `r`, so it costs at most one commuting run.
fn push_merged(out: &mut Vec<Rotation>, r: Rotation) {
    if r.theta == 0.0 {
        return;
    }
    for i in (0..out.len()).rev() {
        if out[i].pauli == r.pauli {
            out[i].theta += r.theta;
            if out[i].theta == 0.0 {
                out.remove(i);
            }
            return;
        }
        if !out[i].pauli.commutes_with(&r.pauli) {
            break;
        }
    }
    out.push(r);
}

fn strang(terms: &[(PauliString, f64)], dt: f64, out: &mut Vec<Rotation>) {
    for (p, c) in terms {
        push_merged(
            out,
            Rotation {
                pauli: p.clone(),
                theta: c * dt / 2.0,
            },
        );
    }
    for (p, c) in terms.iter().rev() {
        push_merged(
            out,
            Rotation {
                pauli: p.clone(),
                theta: c * dt / 2.0,
            },
        );
    }
}

/// Appends one step `S(dt)` of the given order.
pub fn step(terms: &[(PauliString, f64)], order: Order, dt: f64, out: &mut Vec<Rotation>) {
    match order {
        Order::First => {
            for (p, c) in terms {
                push_merged(
                    out,
                    Rotation {
                        pauli: p.clone(),
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
        psi.apply_pauli_rotation(&PauliString::from_masks(0b101, 0b011), 0.4);
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
    fn strang_steps_fold_commuting_groups_and_keep_the_operator() {
        // With two commuting groups G₁ G₂, r Strang steps are G₁/2 G₂ G₁ G₂ … G₁ G₂ G₁/2:
        // (r+1)|G₁| + r|G₂| rotations instead of r(2L − 1).
        let h = tfim(4, 1.0, 0.5);
        let groups = term_groups(&h);
        assert_eq!(groups.len(), 2);
        let terms = order_terms(&h);
        for r in [1usize, 3] {
            let merged = evolution(&terms, Order::Second, 1.0, r);
            assert_eq!(
                merged.len(),
                (r + 1) * groups[0].len() + r * groups[1].len()
            );
            // The same operator as the textbook expansion without any merging.
            let dt = 1.0 / r as f64;
            let mut naive = Vec::new();
            for _ in 0..r {
                for (p, c) in terms.iter().chain(terms.iter().rev()) {
                    naive.push(Rotation {
                        pauli: p.clone(),
                        theta: c * dt / 2.0,
                    });
                }
            }
            let mut a = State::zero(4);
            for q in 0..4 {
                a.apply(&crate::circuit::Gate::U(q, 0.4 + q as f64, 0.1, 0.9));
            }
            let mut b = a.clone();
            apply_program(&mut a, &merged);
            apply_program(&mut b, &naive);
            let err = a
                .amps
                .iter()
                .zip(&b.amps)
                .map(|(x, y)| (x - y).norm())
                .fold(0.0, f64::max);
            assert!(err < 1e-12, "r={r}: {err}");
        }
    }
}
