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
use phasewright::pauli::{Pauli, PauliString, PauliSum};
use phasewright::plan::*;
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
    let letters: Vec<char> = spec.chars().collect();
    let mut v = DVector::from_element(1, c64(1.0, 0.0));
    let mut q = 0;
    while q < letters.len() {
        let ch = letters[q];
        if ch == 's' {
            // Singlet (|01⟩ − |10⟩)/√2 on qubits (q, q+1), qubit q first, as src/family's
            // state preparation writes it.
            let dim = v.len();
            let mut w = DVector::from_element(4 * dim, c64(0.0, 0.0));
            for i in 0..dim {
                w[i | (1 << (q + 1))] = v[i] * c64(s, 0.0);
                w[i | (1 << q)] = v[i] * c64(-s, 0.0);
            }
            v = w;
            q += 2;
            continue;
        }
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
        q += 1;
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
        part: Some(part),
        state,
        group: None,
        num_qubits: nq + 1,
        num_clbits: nq + 1,
        ancilla_bit: Some(nq as u32),
        reads: Vec::new(),
        costs: Costs::default(),
        final_layout: Vec::new(),
        sha256: None,
        shots: None,
        fanout: None,
        flipped: false,
    }
}

/// Builds an ideal campaign for `h` (family `kind`) with `points` time points `dt` apart.
pub fn campaign(h: &PauliSum, states: &[&str], kind: Kind, dt: f64, points: usize) -> Campaign {
    campaign_formula(h, states, kind, dt, points, None)
}

/// `S(dt/r)^{r·k} ψ` for the product formula phasewright compiles (`formula::evolution` over
/// `formula::order_terms`, the identity coefficient dropped), applied exactly to the state.
pub fn trotter_evolve(
    h: &PauliSum,
    psi: &DVector<Complex64>,
    dt: f64,
    k: usize,
    order: u32,
    steps: usize,
) -> DVector<Complex64> {
    let mut hp = h.clone();
    hp.constant = 0.0;
    let terms = phasewright::formula::order_terms(&hp);
    let prog = phasewright::formula::evolution(
        &terms,
        phasewright::formula::Order::from_number(order).expect("order 1, 2 or 4"),
        k as f64 * dt,
        k * steps,
    );
    let mut st = phasewright::sim::State {
        n: h.num_qubits,
        amps: psi.iter().copied().collect(),
    };
    phasewright::formula::apply_program(&mut st, &prog);
    DVector::from_vec(st.amps)
}

/// As [`campaign`]; with `formula = Some((order, steps_per_dt))` the time evolution is the
/// compiled product formula (see [`trotter_evolve`]) instead of the exact `e^{−iH'kdt}`.
pub fn campaign_formula(
    h: &PauliSum,
    states: &[&str],
    kind: Kind,
    dt: f64,
    points: usize,
    formula: Option<(u32, usize)>,
) -> Campaign {
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
            let phi = match formula {
                None => ex.evolve(&psi, k as f64 * dt),
                Some((order, steps)) => trotter_evolve(h, &psi, dt, k, order, steps),
            };
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
            order: formula.map_or(2, |f| f.0),
            steps_per_dt: formula.map_or(1, |f| f.1),
            dt,
        },
        states: states.iter().map(|s| s.to_string()).collect(),
        seed: None,
        energy_unit: None,
        coefficient_cutoff: None,
        points,
        control: phasewright::family::control::Control::Evolution,
        device: None,
        flip: None,
        shard: None,
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

/// Transverse-field Ising model on an `rows × cols` open grid (qubit `r·cols + c`),
/// `H = −J Σ_⟨ij⟩ Z_i Z_j − h Σ X_i`.
pub fn tfim_grid(rows: usize, cols: usize, j: f64, h: f64) -> PauliSum {
    let n = rows * cols;
    let mut s = PauliSum::new(n);
    for r in 0..rows {
        for c in 0..cols {
            let q = r * cols + c;
            if c + 1 < cols {
                s.add(
                    PauliString::from_factors(&[(q, Pauli::Z), (q + 1, Pauli::Z)]).1,
                    -j,
                );
            }
            if r + 1 < rows {
                s.add(
                    PauliString::from_factors(&[(q, Pauli::Z), (q + cols, Pauli::Z)]).1,
                    -j,
                );
            }
            s.add(PauliString::single(q, Pauli::X), -h);
        }
    }
    s
}

/// Open XXZ chain `H = J Σ (X_i X_{i+1} + Y_i Y_{i+1} + Δ Z_i Z_{i+1})`.
pub fn xxz(n: usize, j: f64, delta: f64) -> PauliSum {
    let mut s = PauliSum::new(n);
    for i in 0..n - 1 {
        for (p, f) in [(Pauli::X, 1.0), (Pauli::Y, 1.0), (Pauli::Z, delta)] {
            s.add(PauliString::from_factors(&[(i, p), (i + 1, p)]).1, j * f);
        }
    }
    s
}

/// An invented random Pauli sum: `terms` strings on `n` qubits with uniformly random letters
/// and coefficients uniform in [−1, 1], from ChaCha8 seed `seed`.
pub fn random_sum(n: usize, terms: usize, seed: u64) -> PauliSum {
    use rand::Rng;
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut s = PauliSum::new(n);
    while s.terms.len() < terms {
        let factors: Vec<(usize, Pauli)> = (0..n)
            .filter_map(|q| match rng.gen_range(0..4) {
                1 => Some((q, Pauli::X)),
                2 => Some((q, Pauli::Y)),
                3 => Some((q, Pauli::Z)),
                _ => None,
            })
            .collect();
        if factors.is_empty() {
            continue;
        }
        s.add(
            PauliString::from_factors(&factors).1,
            rng.gen_range(-1.0..1.0),
        );
    }
    s
}

/// The computational basis state of lowest `⟨b|H|b⟩` (exhaustive), as a letter string.
pub fn best_basis_state(h: &PauliSum) -> String {
    let n = h.num_qubits;
    let diag: Vec<(PauliString, f64)> = h
        .term_list()
        .into_iter()
        .filter(|(p, _)| (0..n).all(|q| matches!(p.get(q), Pauli::I | Pauli::Z)))
        .collect();
    let best = (0u64..1 << n)
        .min_by(|&a, &b| {
            let e = |x: u64| {
                diag.iter()
                    .map(|(p, c)| {
                        let odd = (0..n)
                            .filter(|&q| p.get(q) == Pauli::Z && (x >> q) & 1 == 1)
                            .count()
                            % 2;
                        if odd == 1 {
                            -c
                        } else {
                            *c
                        }
                    })
                    .sum::<f64>()
            };
            e(a).total_cmp(&e(b))
        })
        .unwrap();
    (0..n)
        .map(|q| if (best >> q) & 1 == 1 { '1' } else { '0' })
        .collect()
}

/// `|⟨ψ|E0⟩|²` for the ground state of `h` (summed over a degenerate ground space, 1e-9).
pub fn ground_weight(h: &PauliSum, state: &str) -> f64 {
    let sp = phasewright::sim::exact::spectrum(h);
    let psi = product_state(state);
    let e0 = sp.values[0];
    (0..sp.values.len())
        .take_while(|&i| sp.values[i] - e0 < 1e-9)
        .map(|i| sp.vectors.column(i).dotc(&psi).norm_sqr())
        .sum()
}

/// The computational basis state with the largest ground-state weight (a good reference by
/// construction, for the survey; the tool's own `--state auto` cannot know the weights).
pub fn heaviest_basis_state(h: &PauliSum) -> String {
    let sp = phasewright::sim::exact::spectrum(h);
    let n = h.num_qubits;
    let best = (0..1usize << n)
        .max_by(|&a, &b| {
            sp.vectors[(a, 0)]
                .norm_sqr()
                .total_cmp(&sp.vectors[(b, 0)].norm_sqr())
        })
        .unwrap();
    (0..n)
        .map(|q| if (best >> q) & 1 == 1 { '1' } else { '0' })
        .collect()
}

/// The product state over the letters `0 1 + - r l` with the largest ground-state weight,
/// searched exhaustively (6ⁿ states; small `n` only).
pub fn heaviest_product_state(h: &PauliSum) -> String {
    let sp = phasewright::sim::exact::spectrum(h);
    let n = h.num_qubits;
    let letters = ['0', '1', '+', '-', 'r', 'l'];
    let mut best = (String::new(), -1.0);
    for code in 0..6usize.pow(n as u32) {
        let spec: String = (0..n)
            .map(|q| letters[code / 6usize.pow(q as u32) % 6])
            .collect();
        let w = sp.vectors.column(0).dotc(&product_state(&spec)).norm_sqr();
        if w > best.1 {
            best = (spec, w);
        }
    }
    best.0
}

/// `Σ|c_j|·dt` of the survey campaigns.
pub const DT_NORM: f64 = std::f64::consts::PI;

/// Time points of the survey campaigns.
pub const SURVEY_POINTS: usize = 20;

/// One model of the accuracy survey (issue figures): Hamiltonian, reference state, settings.
pub struct Model {
    pub name: &'static str,
    pub h: PauliSum,
    pub state: String,
    pub dt: f64,
    pub order: u32,
    pub steps: usize,
    pub points: usize,
}

/// The eight survey models with good references: 2×3 Ising, XXZ-6, Hubbard-4, random-5,
/// Ising-8, Heisenberg-6, H2 and H4 (integral files from tests/data).
pub fn survey_models() -> Vec<Model> {
    use phasewright::fermion::Encoding;
    use phasewright::files::load_qubit_hamiltonian;
    let root = env!("CARGO_MANIFEST_DIR");
    let load = |p: &str| {
        load_qubit_hamiltonian(
            &std::path::Path::new(root).join(p),
            Some(Encoding::JordanWigner),
        )
        .unwrap_or_else(|e| panic!("{p}: {e}"))
    };
    let (hub, _) = load("examples/hubbard_ring4.ham");
    let (ising8, _) = load("examples/tfim_chain8.ham");
    let (heis6, _) = load("examples/heisenberg_chain6.ham");
    let (h2, h2i) = load("tests/data/h2_sto3g_r1.4.fcidump");
    let (h4, h4i) = load("tests/data/h4_sto3g_r1.0.fcidump");
    let rnd = random_sum(5, 20, 5);
    let hub_state = heaviest_basis_state(&hub);
    let rnd_state = heaviest_product_state(&rnd);
    let m = |name, h: PauliSum, state: String| {
        // dt from the one-norm: Σ|c_j|·dt = π/2 keeps every phase of U within ±π/2 of the
        // reference's mean (the spectral-range bound `budget` uses).
        let dt = DT_NORM / h.one_norm();
        Model {
            name,
            h,
            state,
            dt,
            order: 2,
            steps: 1,
            points: SURVEY_POINTS,
        }
    };
    vec![
        m("ising-2x3", tfim_grid(2, 3, 1.0, 2.0), "++++++".into()),
        m("xxz-6", xxz(6, 1.0, 0.5), "ssssss".into()),
        m("hubbard-4", hub, hub_state),
        m("random-5", rnd, rnd_state),
        m("ising-8", ising8, "++++++++".into()),
        m("heisenberg-6", heis6, "ssssss".into()),
        m("h2", h2, h2i.unwrap().hf_state),
        m("h4", h4, h4i.unwrap().hf_state),
    ]
}
