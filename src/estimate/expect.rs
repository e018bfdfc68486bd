//! From counts to expectation values with standard errors, and to the time series the
//! estimators need.
//!
//! In: the [`Plan`] and one outcome histogram per circuit. Out: every read's parity
//! expectation `⟨Π_{b∈bits} (−1)^{c_b}⟩` with its standard error, pooled per quantity, and the
//! complex series `S_k = ⟨ψ|U(k·dt)|ψ⟩` and `h_k = ⟨ψ|(H − c)U(k·dt)|ψ⟩`, `k = 0..K`.
//! Invariant: a series is built only when the plan provides every value it needs (S_0 = 1
//! exactly; `h_0` is real), otherwise the error names the missing quantity.
//!
//! Standard error of a parity mean `m` over `n` shots (a binomial proportion in ±1 units):
//! `se = √((1 − m²)/(n − 1))`, the square root of the unbiased sample variance of the ±1
//! values over `n` (any statistics text, e.g. Rice, *Mathematical Statistics and Data
//! Analysis*, 3rd ed. 2007, §7.3). A quantity read by several circuits is the shot-weighted
//! mean `Σ n_i m_i / Σ n_i`, with variance `Σ n_i² se_i² / (Σ n_i)²`. For `h_k` the standard
//! error combines the term errors as if independent (terms measured on the same shots are in
//! fact correlated); the bootstrap, which resamples whole outcomes, is what the energy error
//! bars use.
//!
//! Shifted energy series (Krylov family). A Hadamard-test read of `Re⟨ψ|P_j U|ψ⟩` multiplies
//! the ancilla's random ±1 by the group's value `Σ_j c_j p_j`, so its per-shot spread is about
//! the group's energy `|E_g|`, not its fluctuation: `h_k` inherits noise `≈ |E|/√N`. Each group
//! circuit also measures its ancilla alone (its `ancilla_bit`), an unbiased estimate of `S_k` from the *same
//! shots*. Subtracting `μ_g` times it, with `μ_g = Σ_{j∈g} c_j ⟨ψ|P_j|ψ⟩` the group's energy in
//! the reference state, estimates `⟨ψ|(H − μ)U|ψ⟩ = h_k − μ S_k` (`μ = Σ_g μ_g`) with per-shot
//! spread set by the group's *fluctuation* around `μ_g` (a control variate; e.g. Glasserman,
//! "Monte Carlo Methods in Financial Engineering", 2003, §4.1). The pencil `(h − μS, S)` has the
//! eigenvalues of `(h, S)` shifted by `−μ`, and the noise of `S` enters only multiplied by
//! `E − μ`, which is small when the reference state's energy is near the answer.

use super::counts::CircuitCounts;
use super::EstimateError;
use crate::plan::{Part, Plan, Target};
use num_complex::Complex64;
use std::collections::BTreeMap;

/// A real value with its standard error.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Estimate {
    pub value: f64,
    pub std_error: f64,
}

/// What a read estimates: `part` of the overlap (`term: None`) or of `⟨ψ_s|P_j U|ψ_s⟩`.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub struct Quantity {
    pub state: usize,
    pub k: usize,
    pub term: Option<usize>,
    pub part: Part,
}

impl Quantity {
    pub fn describe(&self) -> String {
        let part = match self.part {
            Part::Re => "Re",
            Part::Im => "Im",
        };
        match self.term {
            None => format!("{part} ⟨ψ_{}|U(k={})|ψ_{}⟩", self.state, self.k, self.state),
            Some(j) => format!(
                "{part} ⟨ψ_{}|P_{j} U(k={})|ψ_{}⟩",
                self.state, self.k, self.state
            ),
        }
    }
}

/// Parity expectation of the bits in `mask` with its standard error.
pub fn parity_expectation(outcomes: &[u128], weights: &[u64], mask: u128) -> (f64, u64) {
    let mut sum: i128 = 0;
    let mut n: u64 = 0;
    for (&o, &w) in outcomes.iter().zip(weights) {
        let sign = if (o & mask).count_ones().is_multiple_of(2) {
            1
        } else {
            -1
        };
        sum += sign * w as i128;
        n += w;
    }
    (sum as f64 / n.max(1) as f64, n)
}

/// Binomial standard error of a ±1 mean `m` over `n` shots (`1` when `n < 2`: nothing is known).
pub fn parity_std_error(m: f64, n: u64) -> f64 {
    if n < 2 {
        return 1.0;
    }
    ((1.0 - m * m).max(0.0) / (n - 1) as f64).sqrt()
}

struct CircuitReads {
    outcomes: Vec<u128>,
    reads: Vec<(Quantity, u128)>,
    /// For a measurement-group circuit: `(state, k, part, group)` of its ancilla-alone read,
    /// and the mask of the ancilla's classical bit.
    ancilla: Option<(GroupAncilla, u128)>,
}

/// Identifies the ancilla-alone parity of one measurement-group circuit.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub struct GroupAncilla {
    pub state: usize,
    pub k: usize,
    pub part: Part,
    pub group: usize,
}

/// Which quantity each circuit's reads estimate, ready to be evaluated on any histogram
/// with the circuit's outcomes (the measured one, or a bootstrap resample of it).
pub struct ReadTable {
    circuits: Vec<CircuitReads>,
    /// Per-circuit divisor of every parity mean (and its standard error): `1` unless a
    /// signal-loss factor is undone (see [`ReadTable::undo_loss`]).
    scale: Vec<f64>,
}

impl ReadTable {
    pub fn new(plan: &Plan, counts: &[CircuitCounts]) -> ReadTable {
        let circuits = plan
            .circuits
            .iter()
            .zip(counts)
            .map(|(c, cc)| CircuitReads {
                outcomes: cc.outcomes.iter().map(|(o, _)| *o).collect(),
                // An evolution circuit (no part, no ancilla) reads nothing.
                ancilla: c
                    .group
                    .zip(c.part)
                    .zip(c.ancilla_bit.filter(|&b| b < 128))
                    .map(|((group, part), bit)| {
                        let a = GroupAncilla {
                            state: c.state,
                            k: c.k,
                            part,
                            group,
                        };
                        (a, 1u128 << bit)
                    }),
                reads: c
                    .reads
                    .iter()
                    .filter_map(|r| c.part.map(|part| (r, part)))
                    .map(|(r, part)| {
                        let term = match r.target {
                            Target::Overlap => None,
                            Target::Term { term } => Some(term),
                        };
                        let mask = r
                            .bits
                            .iter()
                            .filter(|&&b| (b as usize) < 128)
                            .fold(0u128, |m, &b| m | (1u128 << b));
                        (
                            Quantity {
                                state: c.state,
                                k: c.k,
                                term,
                                part,
                            },
                            mask,
                        )
                    })
                    .collect(),
            })
            .collect();
        let scale = vec![1.0; plan.circuits.len()];
        ReadTable { circuits, scale }
    }

    /// Divides every read of circuit `i` by `factors[i]` (its signal-loss factor, in `(0, 1]`).
    /// Under a global depolarising channel `ρ → Fρ + (1 − F)I/2ⁿ` every parity of a non-empty
    /// set of bits is multiplied by `F` (the maximally mixed state has zero parity), so
    /// dividing by `F` undoes the loss exactly for that model, and the shot noise grows by
    /// `1/F` with it.
    pub fn undo_loss(mut self, factors: &[f64]) -> ReadTable {
        for (s, f) in self.scale.iter_mut().zip(factors) {
            *s = *f;
        }
        self
    }

    /// Evaluates every read on the given histograms (`weights[i]` aligned with circuit i's
    /// outcomes) and pools reads of the same quantity.
    pub fn evaluate(&self, weights: &[Vec<u64>]) -> BTreeMap<Quantity, Estimate> {
        // (Σ n m, Σ n, Σ n² se²)
        let mut acc: BTreeMap<Quantity, (f64, f64, f64)> = BTreeMap::new();
        for ((c, w), f) in self.circuits.iter().zip(weights).zip(&self.scale) {
            for &(q, mask) in &c.reads {
                let (m, n) = parity_expectation(&c.outcomes, w, mask);
                let se = parity_std_error(m, n) / f;
                let m = m / f;
                let nf = n as f64;
                let e = acc.entry(q).or_insert((0.0, 0.0, 0.0));
                e.0 += nf * m;
                e.1 += nf;
                e.2 += nf * nf * se * se;
            }
        }
        acc.into_iter()
            .map(|(q, (snm, sn, sv))| {
                (
                    q,
                    Estimate {
                        value: snm / sn,
                        std_error: sv.sqrt() / sn,
                    },
                )
            })
            .collect()
    }

    /// The ancilla-alone parity mean of every measurement-group circuit.
    pub fn evaluate_group_ancillas(&self, weights: &[Vec<u64>]) -> BTreeMap<GroupAncilla, f64> {
        self.circuits
            .iter()
            .zip(weights)
            .zip(&self.scale)
            .filter_map(|((c, w), f)| {
                c.ancilla
                    .map(|(a, mask)| (a, parity_expectation(&c.outcomes, w, mask).0 / f))
            })
            .collect()
    }

    /// The measured histograms in the layout [`ReadTable::evaluate`] takes.
    pub fn weights_of(counts: &[CircuitCounts]) -> Vec<Vec<u64>> {
        counts
            .iter()
            .map(|c| c.outcomes.iter().map(|(_, n)| *n).collect())
            .collect()
    }
}

/// A complex time series `x_k`, `k = 0..K`, with the standard errors of its real and
/// imaginary parts.
#[derive(Clone, Debug, PartialEq)]
pub struct Series {
    pub values: Vec<Complex64>,
    pub std_errors: Vec<(f64, f64)>,
}

impl Series {
    pub fn len(&self) -> usize {
        self.values.len()
    }

    pub fn is_empty(&self) -> bool {
        self.values.is_empty()
    }

    /// A series known exactly (no error), e.g. from a simulation.
    pub fn exact(values: Vec<Complex64>) -> Series {
        let n = values.len();
        Series {
            values,
            std_errors: vec![(0.0, 0.0); n],
        }
    }
}

fn need(q: &BTreeMap<Quantity, Estimate>, key: Quantity) -> Result<Estimate, EstimateError> {
    q.get(&key).copied().ok_or_else(|| {
        EstimateError::Missing(format!(
            "the plan has no circuit reading {}; it cannot be estimated",
            key.describe()
        ))
    })
}

/// `S_k = ⟨ψ_s|U(k·dt)|ψ_s⟩` for `k = 0..points`, with `S_0 = 1` exactly.
pub fn overlap_series(
    q: &BTreeMap<Quantity, Estimate>,
    state: usize,
    points: usize,
) -> Result<Series, EstimateError> {
    let mut values = vec![Complex64::new(1.0, 0.0)];
    let mut std_errors = vec![(0.0, 0.0)];
    for k in 1..points {
        let key = |part| Quantity {
            state,
            k,
            term: None,
            part,
        };
        let re = need(q, key(Part::Re))?;
        let im = need(q, key(Part::Im))?;
        values.push(Complex64::new(re.value, im.value));
        std_errors.push((re.std_error, im.std_error));
    }
    Ok(Series { values, std_errors })
}

/// `h_k = Σ_j c_j ⟨ψ|P_j U(k·dt)|ψ⟩ = ⟨ψ|(H − c)U(k·dt)|ψ⟩` for `k = 0..points`; `h_0` is real.
pub fn energy_series(
    q: &BTreeMap<Quantity, Estimate>,
    coeffs: &[f64],
    state: usize,
    points: usize,
) -> Result<Series, EstimateError> {
    let mut values = Vec::with_capacity(points);
    let mut std_errors = Vec::with_capacity(points);
    for k in 0..points {
        let (mut re, mut im, mut vre, mut vim) = (0.0, 0.0, 0.0, 0.0);
        for (j, &c) in coeffs.iter().enumerate() {
            let key = |part| Quantity {
                state,
                k,
                term: Some(j),
                part,
            };
            let r = need(q, key(Part::Re))?;
            re += c * r.value;
            vre += (c * r.std_error).powi(2);
            if k > 0 {
                let i = need(q, key(Part::Im))?;
                im += c * i.value;
                vim += (c * i.std_error).powi(2);
            }
        }
        values.push(Complex64::new(re, im));
        std_errors.push((vre.sqrt(), vim.sqrt()));
    }
    Ok(Series { values, std_errors })
}

/// Terms read by each measurement group, from the plan's group circuits.
pub fn group_terms(plan: &Plan) -> BTreeMap<usize, Vec<usize>> {
    let mut out: BTreeMap<usize, Vec<usize>> = BTreeMap::new();
    for c in plan
        .circuits
        .iter()
        .filter(|c| c.k == 0 && c.part == Some(Part::Re))
    {
        if let Some(g) = c.group {
            let terms = out.entry(g).or_default();
            for r in &c.reads {
                if let Target::Term { term } = r.target {
                    if !terms.contains(&term) {
                        terms.push(term);
                    }
                }
            }
        }
    }
    out
}

/// The control-variate series `h_k − μ S_k` (see the module header) and the shift `μ`.
pub fn shifted_energy_series(
    q: &BTreeMap<Quantity, Estimate>,
    ancillas: &BTreeMap<GroupAncilla, f64>,
    coeffs: &[f64],
    groups: &BTreeMap<usize, Vec<usize>>,
    state: usize,
    points: usize,
) -> Result<(Series, f64), EstimateError> {
    let h = energy_series(q, coeffs, state, points)?;
    let term = |k, j, part| {
        need(
            q,
            Quantity {
                state,
                k,
                term: Some(j),
                part,
            },
        )
    };
    let mut mu_g = BTreeMap::new();
    for (&g, terms) in groups {
        let mut m = 0.0;
        for &j in terms {
            m += coeffs[j] * term(0, j, Part::Re)?.value;
        }
        mu_g.insert(g, m);
    }
    let mu: f64 = mu_g.values().sum();
    let anc = |k, part, group| {
        ancillas
            .get(&GroupAncilla {
                state,
                k,
                part,
                group,
            })
            .copied()
            .ok_or_else(|| {
                EstimateError::Missing(format!("the plan has no group-{group} circuit at k = {k}"))
            })
    };
    let mut values = h.values.clone();
    for (k, v) in values.iter_mut().enumerate() {
        for (&g, &m) in &mu_g {
            let re = anc(k, Part::Re, g)?;
            let im = if k > 0 { anc(k, Part::Im, g)? } else { 0.0 };
            *v -= Complex64::new(re, im) * m;
        }
    }
    Ok((
        Series {
            values,
            std_errors: h.std_errors,
        },
        mu,
    ))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parity_of_listed_bits_only() {
        // Outcomes 0b01 ×3 and 0b11 ×1: bit 0 is set in all; bit 1 in one; both only in one.
        let o = [0b01u128, 0b11];
        let w = [3u64, 1];
        assert_eq!(parity_expectation(&o, &w, 0b01), (-1.0, 4));
        assert_eq!(parity_expectation(&o, &w, 0b10), (0.5, 4));
        assert_eq!(parity_expectation(&o, &w, 0b11), (-0.5, 4));
    }

    #[test]
    fn standard_error_is_the_binomial_one() {
        // m = 0 over 101 shots: sample variance of ±1 values is 101/100, se = √(1/100) = 0.1.
        assert!((parity_std_error(0.0, 101) - 0.1).abs() < 1e-15);
        assert_eq!(parity_std_error(1.0, 50), 0.0);
        assert_eq!(parity_std_error(0.3, 1), 1.0);
    }

    #[test]
    fn pooling_is_shot_weighted() {
        let mut plan = crate::estimate::counts::tests::tiny_plan();
        plan.circuits[1].part = Some(Part::Re);
        // Ancilla is classical bit 2.
        let counts = vec![
            CircuitCounts {
                num_bits: 3,
                outcomes: vec![(0, 75), (0b100, 25)],
            },
            CircuitCounts {
                num_bits: 3,
                outcomes: vec![(0b001, 75), (0b110, 225)],
            },
        ];
        let t = ReadTable::new(&plan, &counts);
        let q = t.evaluate(&ReadTable::weights_of(&counts));
        // Circuit 0: 100 shots at m = 0.5; circuit 1: 300 shots at m = −0.5 → pooled −0.25.
        let e = q.values().next().unwrap();
        assert!((e.value + 0.25).abs() < 1e-15);
        let se0 = parity_std_error(0.5, 100);
        let se1 = parity_std_error(-0.5, 300);
        let want = ((100.0 * se0).powi(2) + (300.0 * se1).powi(2)).sqrt() / 400.0;
        assert!((e.std_error - want).abs() < 1e-15);
    }
}
