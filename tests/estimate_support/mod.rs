//! Test support for the estimators: model Hamiltonians, reference states, and campaigns of
//! ideal Hadamard-test circuits whose outcome distributions are computed exactly from dense
//! eigendecompositions (no circuits, no Trotter error) and sampled with a seeded multinomial.
//!
//! Conventions match plan.json: classical bit q holds system qubit q (measured in the basis of
//! the circuit's term group), bit n holds the Hadamard-test ancilla. For part `re` the ancilla
//! gets `h` before measurement; for part `im`, `sdg` then `h`. After the ancilla rotation the
//! system is in `(ψ + (−1)^a·ph·U|ψ⟩)/2` for ancilla outcome `a`, with `ph = 1` (re) or `−i`
//! (im), so `⟨(−1)^a P⟩ = Re(ph·⟨ψ|P U|ψ⟩)` gives `Re q` or `Im q`.

#![allow(dead_code)]

use nalgebra::{DMatrix, DVector};
use num_complex::Complex64;
use phasewright::estimate::counts::{CircuitCounts, CountsFile};
use phasewright::estimate::resample::multinomial;
use phasewright::family::plan::*;
use phasewright::pauli::{Pauli, PauliString, PauliSum};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;

pub fn c64(re: f64, im: f64) -> Complex64 {
    Complex64::new(re, im)
}

/// Open transverse-field Ising chain `H = −J Σ Z_i Z_{i+1} − h Σ X_i + constant`.
pub fn tfim(n: usize, j: f64, h: f64, constant: f64) -> PauliSum {
    let mut s = PauliSum::new(n);
    for i in 0..n - 1 {
        s.add(
            PauliString::from_factors(&[(i, Pauli::Z), (i + 1, Pauli::Z)]).1,
            -j,
        );
    }
    for i in 0..n {
        s.add(PauliString::single(i, Pauli::X), -h);
    }
    s.constant = constant;
    s
}

/// Open Heisenberg chain `H = J Σ (X_i X_{i+1} + Y_i Y_{i+1} + Z_i Z_{i+1}) + constant`.
pub fn heisenberg(n: usize, j: f64, constant: f64) -> PauliSum {
    let mut s = PauliSum::new(n);
    for i in 0..n - 1 {
        for p in [Pauli::X, Pauli::Y, Pauli::Z] {
            s.add(PauliString::from_factors(&[(i, p), (i + 1, p)]).1, j);
        }
    }
    s.constant = constant;
    s
}

/// A product state from letters `0 1 + - r l`, qubit 0 first (qubit k = bit k of the index).
pub fn product_state(spec: &str) -> DVector<Complex64> {
    let s = std::f64::consts::FRAC_1_SQRT_2;
    let mut v = DVector::from_element(1, c64(1.0, 0.0));
    for (q, ch) in spec.chars().enumerate() {
        let (a0, a1) = match ch {
            '0' => (c64(1.0, 0.0), c64(0.0, 0.0)),
            '1' => (c64(0.0, 0.0), c64(1.0, 0.0)),
            '+' => (c64(s, 0.0), c64(s, 0.0)),
            '-' => (c64(s, 0.0), c64(-s, 0.0)),
            'r' => (c64(s, 0.0), c64(0.0, s)),
            'l' => (c64(s, 0.0), c64(0.0, -s)),
            _ => panic!("bad state letter {ch}"),
        };
        let dim = v.len();
        let mut w = DVector::from_element(2 * dim, c64(0.0, 0.0));
        for i in 0..dim {
            w[i] = v[i] * a0;
            w[i | (1 << q)] = v[i] * a1;
        }
        v = w;
    }
    v
}

/// Dense eigendecomposition of `H' = H − c`, for exact evolution.
pub struct Exact {
    pub n: usize,
    pub h_prime: DMatrix<Complex64>,
    pub values: Vec<f64>,
    pub vectors: DMatrix<Complex64>,
}

impl Exact {
    pub fn new(h: &PauliSum) -> Exact {
        let mut hp = h.clone();
        hp.constant = 0.0;
        let sp = phasewright::sim::exact::spectrum(&hp);
        Exact {
            n: h.num_qubits,
            h_prime: hp.to_dense(),
            values: sp.values,
            vectors: sp.vectors,
        }
    }

    /// `e^{−iH't}|ψ⟩`.
    pub fn evolve(&self, psi: &DVector<Complex64>, t: f64) -> DVector<Complex64> {
        let mut c = self.vectors.adjoint() * psi;
        for (i, e) in self.values.iter().enumerate() {
            c[i] *= Complex64::from_polar(1.0, -e * t);
        }
        &self.vectors * c
    }
}

/// Greedy qubit-wise commuting groups of term indices (terms in plan order).
pub fn qwc_groups(terms: &[(PauliString, f64)]) -> Vec<Vec<usize>> {
    let mut groups: Vec<Vec<usize>> = Vec::new();
    for (j, (p, _)) in terms.iter().enumerate() {
        match groups
            .iter_mut()
            .find(|g| g.iter().all(|&i| terms[i].0.qubitwise_commutes_with(p)))
        {
            Some(g) => g.push(j),
            None => groups.push(vec![j]),
        }
    }
    groups
}

/// Rotates qubit `q` of `v` by the 2×2 matrix `m` (row-major).
fn apply_1q(v: &mut DVector<Complex64>, q: usize, m: [[Complex64; 2]; 2]) {
    let bit = 1usize << q;
    for i in 0..v.len() {
        if i & bit == 0 {
            let (a, b) = (v[i], v[i | bit]);
            v[i] = m[0][0] * a + m[0][1] * b;
            v[i | bit] = m[1][0] * a + m[1][1] * b;
        }
    }
}

/// Basis change that maps the eigenbasis of the group's letters to the computational basis:
/// `h` for X, `sdg` then `h` for Y.
fn rotate_to_group_basis(v: &mut DVector<Complex64>, n: usize, letters: &[Pauli]) {
    let s = std::f64::consts::FRAC_1_SQRT_2;
    let h = [[c64(s, 0.0), c64(s, 0.0)], [c64(s, 0.0), c64(-s, 0.0)]];
    // h·sdg = (1/√2)[[1, −i], [1, i]]
    let hsdg = [[c64(s, 0.0), c64(0.0, -s)], [c64(s, 0.0), c64(0.0, s)]];
    for (q, letter) in letters.iter().enumerate().take(n) {
        match letter {
            Pauli::X => apply_1q(v, q, h),
            Pauli::Y => apply_1q(v, q, hsdg),
            _ => {}
        }
    }
}

/// One ideal circuit of a synthetic campaign.
pub struct SynthCircuit {
    pub entry: CircuitEntry,
    /// Outcome probabilities over masks `0..2^num_clbits`.
    pub probs: Vec<f64>,
}

/// Kinds of synthetic campaign.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Kind {
    Overlap,
    Krylov,
    Trace,
}

/// A plan and the exact outcome distribution of every circuit.
pub struct Campaign {
    pub plan: Plan,
    pub circuits: Vec<SynthCircuit>,
}

fn entry(id: String, k: usize, dt: f64, part: Part, state: usize, nq: usize) -> CircuitEntry {
    CircuitEntry {
        id: id.clone(),
        file: format!("{id}.qasm"),
        k,
        time: k as f64 * dt,
        part,
        state,
        group: None,
        num_qubits: nq + 1,
        num_clbits: nq + 1,
        ancilla_bit: nq as u32,
        reads: Vec::new(),
        costs: Costs::default(),
        final_layout: Vec::new(),
        sha256: None,
    }
}

/// Builds an ideal campaign for `h` (family `kind`) with `points` time points `dt` apart.
pub fn campaign(h: &PauliSum, states: &[&str], kind: Kind, dt: f64, points: usize) -> Campaign {
    let n = h.num_qubits;
    let ex = Exact::new(h);
    let terms = h.term_list();
    let family = match kind {
        Kind::Overlap => Family::Overlap,
        Kind::Krylov => Family::Krylov,
        Kind::Trace => Family::Trace,
    };
    let groups = match kind {
        Kind::Krylov => qwc_groups(&terms),
        _ => vec![Vec::new()],
    };
    let mut circuits = Vec::new();
    for (si, spec) in states.iter().enumerate() {
        let psi = product_state(spec);
        let k0 = if kind == Kind::Krylov { 0 } else { 1 };
        for k in k0..points {
            let phi = ex.evolve(&psi, k as f64 * dt);
            for part in [Part::Re, Part::Im] {
                if k == 0 && part == Part::Im {
                    continue;
                }
                let ph = if part == Part::Re {
                    c64(1.0, 0.0)
                } else {
                    c64(0.0, -1.0)
                };
                for (gi, g) in groups.iter().enumerate() {
                    let mut letters = vec![Pauli::I; n];
                    for &j in g {
                        for (q, l) in letters.iter_mut().enumerate() {
                            let p = terms[j].0.get(q);
                            if p != Pauli::I {
                                *l = p;
                            }
                        }
                    }
                    let pname = if part == Part::Re { "re" } else { "im" };
                    let id = match kind {
                        Kind::Trace => format!("s{si}_k{k:02}_{pname}"),
                        Kind::Krylov => format!("k{k:02}_{pname}_g{gi}"),
                        Kind::Overlap => format!("k{k:02}_{pname}"),
                    };
                    let mut e = entry(id, k, dt, part, si, n);
                    if kind == Kind::Krylov {
                        e.group = Some(gi);
                    }
                    if k > 0 {
                        e.reads.push(Read {
                            target: Target::Overlap,
                            bits: vec![n as u32],
                        });
                    }
                    for &j in g {
                        let mut bits: Vec<u32> = (0..n as u32)
                            .filter(|&q| terms[j].0.get(q as usize) != Pauli::I)
                            .collect();
                        bits.push(n as u32);
                        e.reads.push(Read {
                            target: Target::Term { term: j },
                            bits,
                        });
                    }
                    let mut probs = vec![0.0; 1 << (n + 1)];
                    for a in 0..2usize {
                        let sign = if a == 0 { 1.0 } else { -1.0 };
                        let mut v = (&psi + &phi * (ph * sign)) * c64(0.5, 0.0);
                        rotate_to_group_basis(&mut v, n, &letters);
                        for (i, amp) in v.iter().enumerate() {
                            probs[i | (a << n)] = amp.norm_sqr();
                        }
                    }
                    circuits.push(SynthCircuit { entry: e, probs });
                }
            }
        }
    }
    let plan = Plan {
        format: PLAN_FORMAT.into(),
        family,
        hamiltonian: HamiltonianInfo {
            source: "synthetic.ham".into(),
            num_qubits: n,
            constant: h.constant,
            one_norm: h.one_norm(),
            terms: terms
                .iter()
                .map(|(p, c)| TermInfo {
                    pauli: p.to_factor_text(),
                    coeff: *c,
                })
                .collect(),
        },
        formula: FormulaInfo {
            order: 2,
            steps_per_dt: 1,
            dt,
        },
        states: states.iter().map(|s| s.to_string()).collect(),
        seed: None,
        energy_unit: None,
        coefficient_cutoff: None,
        points,
        device: None,
        circuits: circuits.iter().map(|c| c.entry.clone()).collect(),
    };
    Campaign { plan, circuits }
}

impl Campaign {
    /// Seeded multinomial shots for every circuit.
    pub fn sample(&self, shots: u64, seed: u64) -> CountsFile {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let circuits = self
            .circuits
            .iter()
            .map(|c| {
                let draws = multinomial(&mut rng, shots, &c.probs);
                CircuitCounts {
                    num_bits: c.entry.num_clbits,
                    outcomes: draws
                        .iter()
                        .enumerate()
                        .filter(|(_, &x)| x > 0)
                        .map(|(i, &x)| (i as u128, x))
                        .collect(),
                }
            })
            .collect();
        CountsFile {
            bit_order: phasewright::estimate::counts::BitOrder::First,
            circuits,
        }
    }

    /// Exact read values: every circuit's outcome distribution scaled to a large integer
    /// number of pseudo-shots is not exact, so this gives the probabilities themselves.
    pub fn exact_read(&self, circuit: usize, mask: u128) -> f64 {
        self.circuits[circuit]
            .probs
            .iter()
            .enumerate()
            .map(|(i, p)| {
                if ((i as u128) & mask).count_ones().is_multiple_of(2) {
                    *p
                } else {
                    -*p
                }
            })
            .sum()
    }
}

/// Exact `S_k` and `h_k = ⟨ψ|H' e^{−iH'k dt}|ψ⟩` for `k = 0..points`.
pub fn exact_series(
    h: &PauliSum,
    state: &str,
    dt: f64,
    points: usize,
) -> (Vec<Complex64>, Vec<Complex64>) {
    let ex = Exact::new(h);
    let psi = product_state(state);
    let mut s = Vec::new();
    let mut hk = Vec::new();
    for k in 0..points {
        let phi = ex.evolve(&psi, k as f64 * dt);
        s.push(psi.dotc(&phi));
        hk.push(psi.dotc(&(&ex.h_prime * &phi)));
    }
    (s, hk)
}

/// Exact ground energy of `h` (constant included).
pub fn ground_energy(h: &PauliSum) -> f64 {
    phasewright::sim::exact::spectrum(h).values[0]
}
