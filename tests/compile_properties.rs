//! Property: for random Hermitian Pauli sums (≤ 8 qubits), random reference states and every
//! formula order, each emitted OpenQASM 3 file, read back and simulated from |0…0⟩, gives the
//! ideal product-formula value to 1e-9, and the IR passes the verifier.

use phasewright::check::{check_plan, COMPILE_TOLERANCE};
use phasewright::circuit::verify::{verify_ir, Rules};
use phasewright::family::Spec;
use phasewright::formula::Order;
use phasewright::pauli::{PauliString, PauliSum};
use phasewright::pipeline::compile;
use phasewright::plan::Family;
use phasewright::qasm;
use proptest::prelude::*;

fn random_sum(n: usize, seeds: &[(u64, u64, f64)]) -> PauliSum {
    let mask = (1u64 << n) - 1;
    let mut h = PauliSum::new(n);
    for &(x, z, c) in seeds {
        h.add(PauliString::from_masks(x & mask, z & mask), c);
    }
    h
}

fn state_strategy(n: usize) -> impl Strategy<Value = String> {
    proptest::collection::vec(
        prop_oneof![
            Just('0'),
            Just('1'),
            Just('+'),
            Just('-'),
            Just('r'),
            Just('l')
        ],
        n,
    )
    .prop_map(|v| v.into_iter().collect())
}

fn case() -> impl Strategy<Value = (PauliSum, String, Order, usize, f64, Family)> {
    (1usize..=8)
        .prop_flat_map(|n| {
            (
                Just(n),
                proptest::collection::vec((any::<u64>(), any::<u64>(), -2.0f64..2.0), 1..10),
                state_strategy(n),
                prop_oneof![Just(Order::First), Just(Order::Second), Just(Order::Fourth)],
                1usize..3,
                0.05f64..0.6,
                prop_oneof![Just(Family::Overlap), Just(Family::Krylov)],
            )
        })
        .prop_map(|(n, terms, state, order, steps, dt, family)| {
            (random_sum(n, &terms), state, order, steps, dt, family)
        })
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 48, .. ProptestConfig::default() })]

    #[test]
    fn emitted_files_match_the_ideal_product_formula((h, state, order, steps, dt, family) in case()) {
        prop_assume!(!h.terms.is_empty());
        let spec = Spec { control: phasewright::family::control::Control::Evolution, family, order, dt, points: 3, steps_per_dt: steps, states: vec![state] };
        let compiled = compile(&h, "random", &spec).unwrap();
        let mut read_back = Vec::new();
        // The files are the circuits: each is read back and verified.
        for text in &compiled.programs {
            let p = qasm::read("c.qasm", text).unwrap();
            verify_ir(&p.circuit, &Rules::default()).unwrap();
            read_back.push(p.circuit);
        }
        let checks = check_plan(&compiled.plan, &read_back).unwrap();
        prop_assert_eq!(checks.len(), compiled.plan.circuits.len());
        for c in &checks {
            prop_assert!(c.compile_error <= COMPILE_TOLERANCE, "{}: compile error {}", c.id, c.compile_error);
        }
    }
}

/// Past `SCORE_ONCE_MIN` two-qubit gates at the first time point, the later points try only
/// the candidates that point kept, plus the chain, and share one synthesis of the repeated
/// Trotter step (`pipeline::LaterBlocks::periodic`, two points here): the circuits stay exact
/// (simulated against the ideal product formula) and no point emits more two-qubit gates than
/// level 2, which writes every point with chains.
#[test]
fn points_past_the_scoring_size_stay_exact_and_no_worse_than_chains() {
    use phasewright::pipeline::{compile_at, OptLevel, Target, SCORE_ONCE_MIN};
    use rand::{Rng, SeedableRng};
    let n = 9;
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
    let mut h = PauliSum::new(n);
    while h.terms.len() < 40 {
        h.add(
            PauliString::from_masks(rng.gen::<u64>() & 0x1ff, rng.gen::<u64>() & 0x1ff),
            rng.gen_range(-1.0..1.0),
        );
    }
    let spec = Spec {
        control: phasewright::family::control::Control::Evolution,
        family: Family::Overlap,
        order: Order::Second,
        dt: 0.2,
        points: 4,
        steps_per_dt: 70,
        states: vec!["0+1r0-l01".to_string()],
    };
    let best = compile_at(&h, "random", &spec, &Target::AllToAll, OptLevel::MAX).unwrap();
    let chains = compile_at(
        &h,
        "random",
        &spec,
        &Target::AllToAll,
        OptLevel::new(2).unwrap(),
    )
    .unwrap();
    // The points repeat one step (no string of this sum commutes with all the others), so
    // the shared synthesis is the path taken.
    let terms = phasewright::formula::order_terms(&h);
    let formula = phasewright::formula::Formula::new(&terms);
    let step = spec.dt / spec.steps_per_dt as f64;
    let programs: Vec<_> = (1..spec.points)
        .map(|k| formula.evolution_by_step(spec.order, step, k * spec.steps_per_dt))
        .collect();
    let refs: Vec<_> = programs.iter().map(Vec::as_slice).collect();
    let steps: Vec<usize> = (1..spec.points).map(|k| k * spec.steps_per_dt).collect();
    assert!(phasewright::formula::periodic_form(&steps, &refs).is_some());
    let first = best.plan.circuits.iter().find(|c| c.k == 1).unwrap();
    assert!(
        first.costs.two_qubit > SCORE_ONCE_MIN,
        "the case must pass the scoring size: {} two-qubit gates",
        first.costs.two_qubit
    );
    let read_back: Vec<_> = best
        .programs
        .iter()
        .map(|t| qasm::read("c.qasm", t).unwrap().circuit)
        .collect();
    for c in &read_back {
        verify_ir(c, &Rules::default()).unwrap();
    }
    for c in check_plan(&best.plan, &read_back).unwrap() {
        assert!(
            c.compile_error <= COMPILE_TOLERANCE,
            "{}: compile error {}",
            c.id,
            c.compile_error
        );
    }
    for (b, c) in best.plan.circuits.iter().zip(&chains.plan.circuits) {
        assert_eq!(b.id, c.id);
        assert!(
            b.costs.two_qubit <= c.costs.two_qubit,
            "{}: {} two-qubit gates at level 3, {} at level 2",
            b.id,
            b.costs.two_qubit,
            c.costs.two_qubit
        );
    }
}
