//! Shots per circuit from a total budget: equal, or in proportion to each circuit's per-shot
//! standard deviation (Neyman allocation).
//!
//! In: a [`Plan`] and, for every circuit, an outcome distribution (the histogram of a pilot
//! run, or the exact output distribution the simulator predicts), and a total number of
//! shots. Out: the per-shot standard deviation `σ_i` of what each circuit contributes to the
//! estimators ([`per_shot_sd`]), integer shots `n_i` ([`allocate`]), and the summed variance
//! `Σ σ_i²/n_i` of the quantities read ([`summed_variance`]). Invariant: the shots add up to
//! the total exactly, and every circuit gets at least [`floor_shots`] (no quantity is left
//! unmeasured because a pilot happened to see one outcome only).
//!
//! **What is minimised.** Every quantity `estimate` builds its series from (Re and Im of
//! `S_k`; for Krylov plans the shifted `h_k − μS_k`) is a sum over circuits of per-circuit
//! shot means, and each circuit feeds exactly one of them. With `n_i` independent shots of
//! per-shot standard deviation `σ_i`, the variances of those quantities add up to
//! `V(n) = Σ_i σ_i²/n_i`. At a fixed total `Σ n_i = N`, a Lagrange multiplier gives the
//! minimiser `n_i = N·σ_i/Σ_j σ_j`, with `V = (Σ σ_i)²/N`: the optimum allocation of
//! stratified sampling, J. Neyman, "On the two different aspects of the representative
//! method: the method of stratified sampling and the method of purposive selection",
//! J. R. Stat. Soc. 97, 558–625 (1934) (circuits are the strata). Equal shots give
//! `V = M·Σ σ_i²/N` for `M` circuits, never less (Cauchy–Schwarz: `(Σ σ_i)² ≤ M·Σ σ_i²`),
//! equal only when every `σ_i` is the same.
//!
//! **Per-shot standard deviations.** An overlap or trace circuit reads one ±1 parity of mean
//! `m` (Re or Im of `S_k`): `σ = √(1 − m²)`. A Krylov measurement-group circuit contributes
//! `Σ_{j∈g} c_j x_j − μ_g a` per shot (`x_j` the parity of term `j`'s bits, `a` the ancilla's
//! parity, `μ_g = Σ_{j∈g} c_j ⟨x_j⟩` from the group's `k = 0` circuit), the control-variate
//! form `estimate` uses (see `expect`'s module header); `σ` is its standard deviation over
//! the distribution. A circuit with no reads (plain evolution) has nothing to allocate.
//!
//! **Integer shots.** Circuits whose share falls below the floor get the floor and the rest
//! is shared again among the others in proportion to `σ` (Neyman allocation with a lower
//! bound); the real shares are then rounded by largest remainders (ties to the earlier
//! circuit), so the total is met exactly and the result is deterministic.

use super::EstimateError;
use crate::plan::{Family, Part, Plan, Target};
use std::collections::BTreeMap;

/// How shots are shared among circuits.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Rule {
    /// The same number for every circuit (up to one shot, for a total not divisible by M).
    Equal,
    /// Neyman: in proportion to the per-shot standard deviation.
    Spread,
}

/// The smallest share a circuit gets: a tenth of the equal share, and at least 2 shots (the
/// fewest for which a standard error exists). A choice of ours: it bounds how much a pilot
/// that saw a single outcome can starve a circuit.
pub fn floor_shots(total: u64, circuits: usize) -> u64 {
    if circuits == 0 {
        return 0;
    }
    (total / (10 * circuits as u64)).max(2)
}

/// Outcome distribution of one circuit: outcome mask (bit `b` = classical bit `b`) and its
/// weight (a count or a probability; only ratios matter).
pub type Distribution = [(u128, f64)];

fn parity(outcome: u128, mask: u128) -> f64 {
    if (outcome & mask).count_ones().is_multiple_of(2) {
        1.0
    } else {
        -1.0
    }
}

fn mask_of(bits: &[u32]) -> u128 {
    bits.iter()
        .filter(|&&b| b < 128)
        .fold(0u128, |m, &b| m | (1u128 << b))
}

/// Mean and variance of a per-shot value over a distribution.
fn moments(dist: &Distribution, value: impl Fn(u128) -> f64) -> (f64, f64) {
    let total: f64 = dist.iter().map(|(_, w)| w).sum();
    if total <= 0.0 {
        return (0.0, 0.0);
    }
    let (mut m1, mut m2) = (0.0, 0.0);
    for &(o, w) in dist {
        let y = value(o);
        m1 += w * y;
        m2 += w * y * y;
    }
    let mean = m1 / total;
    (mean, (m2 / total - mean * mean).max(0.0))
}

/// Per-shot standard deviation of what every circuit contributes (see the module header);
/// `dists[i]` is circuit `i`'s distribution, in plan order. `Err` for a plan without reads.
pub fn per_shot_sd(plan: &Plan, dists: &[Vec<(u128, f64)>]) -> Result<Vec<f64>, EstimateError> {
    if plan.family == Family::Evolution {
        return Err(EstimateError::NothingToAllot);
    }
    let coeffs: Vec<f64> = plan.hamiltonian.terms.iter().map(|t| t.coeff).collect();
    let term_reads = |i: usize| -> Vec<(usize, u128)> {
        plan.circuits[i]
            .reads
            .iter()
            .filter_map(|r| match r.target {
                Target::Term { term } => Some((term, mask_of(&r.bits))),
                Target::Overlap => None,
            })
            .collect()
    };
    // μ_g from each measurement group's k = 0 circuit (state, group) → Σ c_j ⟨x_j⟩.
    let mut mu: BTreeMap<(usize, usize), f64> = BTreeMap::new();
    for (i, e) in plan.circuits.iter().enumerate() {
        if let (Some(g), 0, Some(Part::Re)) = (e.group, e.k, e.part) {
            let m: f64 = term_reads(i)
                .iter()
                .map(|&(j, mask)| {
                    coeffs.get(j).copied().unwrap_or(0.0)
                        * moments(&dists[i], |o| parity(o, mask)).0
                })
                .sum();
            mu.insert((e.state, g), m);
        }
    }
    Ok(plan
        .circuits
        .iter()
        .enumerate()
        .map(|(i, e)| {
            let terms = term_reads(i);
            if terms.is_empty() {
                // One overlap read (overlap and trace plans): σ² = 1 − m².
                let mask = e.reads.first().map(|r| mask_of(&r.bits)).unwrap_or(0);
                return moments(&dists[i], |o| parity(o, mask)).1.sqrt();
            }
            let anc = e.ancilla_bit.map(|b| mask_of(&[b])).unwrap_or(0);
            let mu_g = e
                .group
                .and_then(|g| mu.get(&(e.state, g)).copied())
                .unwrap_or(0.0);
            moments(&dists[i], |o| {
                terms
                    .iter()
                    .map(|&(j, mask)| coeffs.get(j).copied().unwrap_or(0.0) * parity(o, mask))
                    .sum::<f64>()
                    - mu_g * parity(o, anc)
            })
            .1
            .sqrt()
        })
        .collect())
}

/// Integer shots for every circuit, adding up to `total` (see the module header). With
/// [`Rule::Spread`] and every `σ` zero the allocation is equal.
pub fn allocate(total: u64, sd: &[f64], rule: Rule) -> Vec<u64> {
    let m = sd.len();
    if m == 0 {
        return Vec::new();
    }
    let floor = floor_shots(total, m).min(total / m as u64);
    let weights: Vec<f64> = match rule {
        Rule::Equal => vec![1.0; m],
        Rule::Spread if sd.iter().all(|&s| s.is_nan() || s <= 0.0) => vec![1.0; m],
        Rule::Spread => sd.iter().map(|&s| if s > 0.0 { s } else { 0.0 }).collect(),
    };
    // Neyman shares with a lower bound: pin circuits below the floor, share the rest again.
    let mut pinned = vec![false; m];
    let mut share = vec![0.0f64; m];
    loop {
        let free_total = total as f64 - floor as f64 * pinned.iter().filter(|&&p| p).count() as f64;
        let w_free: f64 = (0..m).filter(|&i| !pinned[i]).map(|i| weights[i]).sum();
        let mut changed = false;
        for i in 0..m {
            share[i] = if pinned[i] {
                floor as f64
            } else if w_free > 0.0 {
                free_total * weights[i] / w_free
            } else {
                floor as f64
            };
        }
        for i in 0..m {
            if !pinned[i] && share[i] < floor as f64 {
                pinned[i] = true;
                changed = true;
            }
        }
        if !changed {
            break;
        }
    }
    // Largest remainders.
    let mut n: Vec<u64> = share.iter().map(|s| s.floor().max(0.0) as u64).collect();
    let given: u64 = n.iter().sum();
    let mut rest = total.saturating_sub(given);
    let mut order: Vec<usize> = (0..m).collect();
    order.sort_by(|&a, &b| {
        let fa = share[a] - share[a].floor();
        let fb = share[b] - share[b].floor();
        fb.total_cmp(&fa).then(a.cmp(&b))
    });
    for &i in order.iter().cycle() {
        if rest == 0 {
            break;
        }
        n[i] += 1;
        rest -= 1;
    }
    n
}

/// `Σ σ_i²/n_i`, the summed variance of the quantities read (infinite when a circuit with
/// `σ > 0` gets no shots).
pub fn summed_variance(sd: &[f64], shots: &[u64]) -> f64 {
    sd.iter()
        .zip(shots)
        .map(|(&s, &n)| {
            if s == 0.0 {
                0.0
            } else if n == 0 {
                f64::INFINITY
            } else {
                s * s / n as f64
            }
        })
        .sum()
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    #[test]
    fn neyman_shares_follow_the_standard_deviations() {
        // σ = (1, 3): shares 1/4 and 3/4 of 4000 (Neyman 1934: n_i ∝ σ_i).
        assert_eq!(allocate(4000, &[1.0, 3.0], Rule::Spread), vec![1000, 3000]);
        assert_eq!(allocate(4001, &[1.0, 1.0], Rule::Equal), vec![2001, 2000]);
        // A circuit with σ = 0 keeps the floor (a tenth of the equal share).
        assert_eq!(allocate(4000, &[0.0, 1.0], Rule::Spread), vec![200, 3800]);
        // Every σ zero: equal.
        assert_eq!(allocate(10, &[0.0, 0.0], Rule::Spread), vec![5, 5]);
    }

    #[test]
    fn variance_of_the_optimum_is_the_square_of_the_summed_deviations() {
        // Without rounding or floor, V = (Σσ)²/N (Neyman 1934); σ = (1, 3), N = 4000: 16/4000.
        let n = allocate(4000, &[1.0, 3.0], Rule::Spread);
        assert!((summed_variance(&[1.0, 3.0], &n) - 16.0 / 4000.0).abs() < 1e-15);
        // Equal shots: M·Σσ²/N = 2·10/4000.
        let e = allocate(4000, &[1.0, 3.0], Rule::Equal);
        assert!((summed_variance(&[1.0, 3.0], &e) - 20.0 / 4000.0).abs() < 1e-15);
    }

    proptest! {
        #[test]
        fn allocation_meets_the_total_and_the_floor_and_never_loses_to_equal(
            sd in proptest::collection::vec(0.0f64..2.0, 1..40),
            total in 10_000u64..1_000_000,
        ) {
            let n = allocate(total, &sd, Rule::Spread);
            prop_assert_eq!(n.iter().sum::<u64>(), total);
            let floor = floor_shots(total, sd.len()).min(total / sd.len() as u64);
            prop_assert!(n.iter().all(|&x| x >= floor));
            let e = allocate(total, &sd, Rule::Equal);
            prop_assert_eq!(e.iter().sum::<u64>(), total);
            // Before rounding the bounded Neyman shares minimise Σσ²/n over shares ≥ floor, a
            // set holding the equal shares. Rounding moves every share by under one shot and
            // every share is ≥ floor (≥ 25 here), so each term σ²/n changes by a factor
            // within floor/(floor − 1) either way: allow that factor for both allocations.
            let v_spread = summed_variance(&sd, &n);
            let v_equal = summed_variance(&sd, &e);
            let f = floor as f64 / (floor as f64 - 1.0);
            prop_assert!(v_spread <= v_equal * f * f + 1e-12,
                "spread {} equal {}", v_spread, v_equal);
        }
    }
}
