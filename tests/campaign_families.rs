//! The Krylov and trace campaigns: grouping, reassembly of the Krylov matrices from the emitted
//! circuits, and the statistics of the random-state trace estimator.

use num_complex::Complex64;
use phasewright::check::check_plan;
use phasewright::family::{krylov_groups, random_states, state_prep, RefState, Spec};
use phasewright::formula::{apply_program, evolution, order_terms, Order};
use phasewright::pauli::{Pauli, PauliString, PauliSum};
use phasewright::pipeline::compile;
use phasewright::plan::{Family, Part, Target};
use phasewright::qasm;
use phasewright::sim::exact::Propagator;
use phasewright::sim::State;
use rand::{Rng, SeedableRng};

fn prepared(state: &str) -> State {
    let mut s = State::zero(state.len());
    for g in state_prep(&RefState::parse(state, state.len()).unwrap()) {
        s.apply(&g);
    }
    s
}

/// An invented 6-qubit model: a Heisenberg-like chain with a staggered field and a few
/// longer-range couplings.
fn model6() -> PauliSum {
    let s = |f: &[(usize, Pauli)]| PauliString::from_factors(f).1;
    let mut h = PauliSum::new(6);
    for i in 0..5 {
        for p in [Pauli::X, Pauli::Y, Pauli::Z] {
            h.add(s(&[(i, p), (i + 1, p)]), 0.5 + 0.1 * i as f64);
        }
        h.add(
            PauliString::single(i, Pauli::Z),
            if i % 2 == 0 { 0.3 } else { -0.3 },
        );
    }
    h.add(s(&[(0, Pauli::X), (3, Pauli::Z), (5, Pauli::Y)]), 0.2);
    h.constant = -0.75;
    h
}

#[test]
fn krylov_elements_from_the_circuits_rebuild_s_and_h() {
    let h = model6();
    let state = "01+0r1".to_string();
    let spec = Spec {
        control: phasewright::family::control::Control::Evolution,
        family: Family::Krylov,
        order: Order::Second,
        dt: 0.15,
        points: 4,
        steps_per_dt: 2,
        states: vec![state.clone()],
    };
    let compiled = compile(&h, "model6", &spec).unwrap();
    let circuits: Vec<_> = compiled
        .programs
        .iter()
        .map(|t| qasm::read("c.qasm", t).unwrap().circuit)
        .collect();
    let checks = check_plan(&compiled.plan, &circuits).unwrap();
    // Reassemble S_k and H_k (without the constant) from the simulated reads.
    let k_max = spec.points;
    let mut s_sim = vec![Complex64::new(0.0, 0.0); k_max];
    let mut h_sim = vec![Complex64::new(0.0, 0.0); k_max];
    s_sim[0] = Complex64::new(1.0, 0.0);
    let coeffs: Vec<f64> = h.terms.values().copied().collect();
    // S_k is read from the ancilla of every group circuit at k ≥ 1: average those reads.
    let mut s_reads = vec![[0usize; 2]; k_max];
    for (e, c) in compiled.plan.circuits.iter().zip(&checks) {
        for (rd, rc) in e.reads.iter().zip(&c.reads) {
            let v = if e.part == Some(Part::Re) {
                Complex64::new(rc.simulated, 0.0)
            } else {
                Complex64::new(0.0, rc.simulated)
            };
            match rd.target {
                Target::Overlap => {
                    s_sim[e.k] += v;
                    s_reads[e.k][usize::from(e.part == Some(Part::Im))] += 1;
                }
                Target::Term { term } => h_sim[e.k] += v * coeffs[term],
            }
        }
    }
    for k in 1..k_max {
        let [re, im] = s_reads[k];
        assert!(re > 0 && im > 0, "S_{k} is read");
        s_sim[k] = Complex64::new(s_sim[k].re / re as f64, s_sim[k].im / im as f64);
    }
    // Direct computation: ⟨ψ|H S(dt)^k|ψ⟩ with the ideal product formula, and with e^{-iHt}.
    let psi = prepared(&state);
    let mut h0 = h.clone();
    h0.constant = 0.0;
    let prop = Propagator::new(&h0, &psi);
    let terms = order_terms(&h0);
    let mut worst_ideal: f64 = 0.0;
    let mut worst_exact: f64 = 0.0;
    let mut worst_trotter: f64 = 0.0;
    for k in 0..k_max {
        let t = k as f64 * spec.dt;
        let mut ideal = psi.clone();
        apply_program(
            &mut ideal,
            &evolution(&terms, spec.order, t, k * spec.steps_per_dt),
        );
        let exact = prop.evolve(t);
        let hpsi = State {
            n: 6,
            amps: h0.apply(&psi.amps),
        };
        let (s_i, h_i) = (psi.inner(&ideal), hpsi.inner(&ideal));
        let (s_e, h_e) = (psi.inner(&exact), hpsi.inner(&exact));
        worst_ideal = worst_ideal
            .max((s_sim[k] - s_i).norm())
            .max((h_sim[k] - h_i).norm());
        worst_exact = worst_exact
            .max((s_sim[k] - s_e).norm())
            .max((h_sim[k] - h_e).norm());
        worst_trotter = worst_trotter
            .max((s_i - s_e).norm())
            .max((h_i - h_e).norm());
    }
    assert!(worst_ideal < 1e-9, "ideal product formula: {worst_ideal}");
    // Against exact evolution the difference is the Trotter error itself (plus rounding).
    assert!(
        worst_exact <= worst_trotter + 1e-9,
        "{worst_exact} vs Trotter {worst_trotter}"
    );
    assert!(
        worst_trotter < 0.05,
        "Trotter error unexpectedly large: {worst_trotter}"
    );
}

#[test]
fn grouping_is_no_worse_than_one_term_per_circuit_and_deterministic() {
    // An invented dense 8-qubit Hamiltonian: 60 random strings, fixed seed.
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(2026);
    let mut h = PauliSum::new(8);
    while h.terms.len() < 60 {
        let (x, z) = (rng.gen::<u64>() & 0xff, rng.gen::<u64>() & 0xff);
        h.add(PauliString::from_masks(x, z), rng.gen_range(-1.0..1.0));
    }
    let groups = krylov_groups(&h);
    assert!(groups.len() <= h.terms.len());
    assert!(
        groups.len() < h.terms.len(),
        "grouping found no pair to share a circuit"
    );
    assert_eq!(groups, krylov_groups(&h.clone()));
    // Every term is read exactly once across the groups, and each group is qubit-wise compatible.
    let strings: Vec<PauliString> = h.terms.keys().cloned().collect();
    let mut seen: Vec<usize> = groups.iter().flatten().copied().collect();
    seen.sort_unstable();
    assert_eq!(seen, (0..strings.len()).collect::<Vec<_>>());
    for g in &groups {
        for &a in g {
            for &b in g {
                assert!(strings[a].qubitwise_commutes_with(&strings[b]));
            }
        }
    }
}

/// `⟨φ|U|φ⟩` for the ideal product formula at time t.
fn local_overlap(h: &PauliSum, state: &str, t: f64) -> Complex64 {
    let psi = prepared(state);
    let mut s = psi.clone();
    apply_program(&mut s, &evolution(&order_terms(h), Order::Second, t, 2));
    psi.inner(&s)
}

#[test]
fn random_state_trace_estimator_is_unbiased_with_the_predicted_spread() {
    // Estimator: X = ⟨φ|U|φ⟩ with φ a product of uniformly drawn single-qubit Pauli eigenstates.
    // Mean: E[|φ⟩⟨φ|] = I/2ⁿ, so E X = tr U / 2ⁿ (Hutchinson, Commun. Stat. Simul. Comput. 19,
    // 433 (1990), with Pauli eigenstates in place of Rademacher vectors).
    // Second moment (derived here): the six eigenstates form a one-qubit 2-design, so
    // E[(|φ⟩⟨φ|)^{⊗2}] = ⊗_i (I + SWAP_i)/6 (d(d+1) = 6 for d = 2), and therefore
    // E|X|² = 6^{-n} Σ_{S ⊆ qubits} ‖tr_{S̄} U‖²_F, the Frobenius norm of U partially traced
    // over the complement of S. Var X = E|X|² − |E X|², and the mean of N states has spread
    // √(Var X / N).
    let n = 3;
    let s = |f: &[(usize, Pauli)]| PauliString::from_factors(f).1;
    let mut h = PauliSum::new(n);
    h.add(s(&[(0, Pauli::Z), (1, Pauli::Z)]), 0.8);
    h.add(s(&[(1, Pauli::X), (2, Pauli::X)]), 0.5);
    h.add(PauliString::single(0, Pauli::X), 0.6);
    h.add(PauliString::single(2, Pauli::Y), -0.4);
    let t = 0.9;
    // The full unitary of the product formula, column by column.
    let dim = 1usize << n;
    let program = evolution(&order_terms(&h), Order::Second, t, 2);
    let mut u = vec![vec![Complex64::new(0.0, 0.0); dim]; dim]; // u[row][col]
    for col in 0..dim {
        let mut v = State::zero(n);
        v.amps[0] = Complex64::new(0.0, 0.0);
        v.amps[col] = Complex64::new(1.0, 0.0);
        apply_program(&mut v, &program);
        for (row, amp) in u.iter_mut().zip(&v.amps) {
            row[col] = *amp;
        }
    }
    let mean_exact: Complex64 = (0..dim).map(|i| u[i][i]).sum::<Complex64>() / dim as f64;
    // Second moment from the partial-trace formula.
    let mut second = 0.0;
    for subset in 0..dim {
        // tr over the complement of `subset`: entries indexed by the subset's bits.
        let comp = !subset & (dim - 1);
        let mut m = std::collections::HashMap::<(usize, usize), Complex64>::new();
        for (row, u_row) in u.iter().enumerate() {
            for (col, entry) in u_row.iter().enumerate() {
                if row & comp == col & comp {
                    *m.entry((row & subset, col & subset)).or_default() += *entry;
                }
            }
        }
        second += m.values().map(|z| z.norm_sqr()).sum::<f64>();
    }
    second /= 6f64.powi(n as i32);
    // Brute force over all 6³ states checks both moments.
    let letters = ['0', '1', '+', '-', 'r', 'l'];
    let all: Vec<String> = (0..216)
        .map(|i| {
            (0..n)
                .map(|q| letters[(i / 6usize.pow(q as u32)) % 6])
                .collect()
        })
        .collect();
    let vals: Vec<Complex64> = all.iter().map(|st| local_overlap(&h, st, t)).collect();
    let bf_mean = vals.iter().sum::<Complex64>() / 216.0;
    let bf_second = vals.iter().map(|z| z.norm_sqr()).sum::<f64>() / 216.0;
    assert!(
        (bf_mean - mean_exact).norm() < 1e-12,
        "{bf_mean} vs {mean_exact}"
    );
    assert!(
        (bf_second - second).abs() < 1e-12,
        "{bf_second} vs {second}"
    );
    let var = second - mean_exact.norm_sqr();
    // Many seeds, N states each: the spread of the estimates matches √(Var/N).
    let per_seed = 16usize;
    let seeds = 400u64;
    let estimates: Vec<Complex64> = (0..seeds)
        .map(|seed| {
            let states = random_states(n, per_seed, seed);
            states
                .iter()
                .map(|st| local_overlap(&h, st, t))
                .sum::<Complex64>()
                / per_seed as f64
        })
        .collect();
    let mean = estimates.iter().sum::<Complex64>() / seeds as f64;
    let spread2 = estimates.iter().map(|z| (z - mean).norm_sqr()).sum::<f64>() / (seeds - 1) as f64;
    let want2 = var / per_seed as f64;
    // Mean within 4 standard errors of the truth; sample variance within ±25% (for 400 draws
    // the relative standard error of a variance is about √(2/399) ≈ 7%, so ±25% is > 3σ).
    assert!(
        (mean - mean_exact).norm() < 4.0 * (want2 / seeds as f64).sqrt(),
        "{mean} vs {mean_exact}"
    );
    assert!(
        (spread2 / want2 - 1.0).abs() < 0.25,
        "spread² {spread2} vs predicted {want2}"
    );
}

#[test]
fn trace_campaign_lists_its_states_and_each_is_exact() {
    let h = model6();
    let states = random_states(6, 4, 11);
    let spec = Spec {
        control: phasewright::family::control::Control::Evolution,
        family: Family::Trace,
        order: Order::First,
        dt: 0.2,
        points: 3,
        steps_per_dt: 1,
        states: states.clone(),
    };
    let compiled = compile(&h, "model6", &spec).unwrap();
    assert_eq!(compiled.plan.states, states);
    assert_eq!(compiled.plan.circuits.len(), 4 * 2 * 2);
    let circuits: Vec<_> = compiled
        .programs
        .iter()
        .map(|t| qasm::read("c.qasm", t).unwrap().circuit)
        .collect();
    let checks = check_plan(&compiled.plan, &circuits).unwrap();
    for c in &checks {
        assert!(c.compile_error < 1e-9, "{}: {}", c.id, c.compile_error);
    }
    let rows = phasewright::check::trace_summary(&compiled.plan, &checks)
        .unwrap()
        .unwrap();
    assert_eq!(rows.len(), 2);
    for r in &rows {
        // Four states: the average is a noisy estimate; it must sit within a few standard errors.
        assert!(
            r.z_score < 5.0,
            "k={}: {} standard errors off",
            r.k,
            r.z_score
        );
        // The ideal trace differs from the exact one only by the (small) Trotter error.
        assert!((r.ideal_re - r.exact_re).abs() < 0.05 && (r.ideal_im - r.exact_im).abs() < 0.05);
    }
    assert_eq!(
        random_states(6, 4, 11),
        states,
        "states depend only on the seed"
    );
}
