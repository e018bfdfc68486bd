//! Property tests of step reuse on a device (`route::reuse`, `route::campaign`): a campaign whose
//! circuits repeat one routed Trotter step (and its mirror image, or the SWAPs home for order 1)
//! must compute exactly what the ideal product formula computes. For random Hamiltonians on 2–4
//! qubits, random connected devices and native sets, every formula order (1, 2, 4), 1–3 steps
//! per `dt` and the three families (overlap, krylov, trace), each written OpenQASM 3 program is
//! read back, must pass `verify_ir` with the device's coupling and native rules, and, simulated
//! from |0…0⟩, must give the ideal product-formula value of each read to 1e-9 (`check_plan`,
//! the check `phasewright verify` runs). Both assembly paths are covered: whole circuits (the
//! default below `RouteConfig::stitch_min_gates`) and lowered blocks stitched at the junctions
//! (forced here with a threshold of 0 and windows of 1–8 gates). Reference: the formulas are
//! Suzuki's (J. Math. Phys. 32, 400 (1991)); the mirror argument is in `route::reuse`.

use phasewright::check::{check_plan, COMPILE_TOLERANCE};
use phasewright::circuit::verify::{verify_ir, Rules};
use phasewright::device::Device;
use phasewright::family::{random_states, Spec};
use phasewright::formula::Order;
use phasewright::pauli::PauliSum;
use phasewright::pipeline::{compile_for, Target};
use phasewright::plan::Family;
use phasewright::qasm;
use phasewright::route::RouteConfig;
use proptest::prelude::*;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;

mod route_support;
use route_support::{random_device, random_hamiltonian, random_state};

/// Compiles on the device, reads every program back, checks the IR rules and the simulated
/// values against the ideal formula.
fn check_campaign(h: &PauliSum, spec: &Spec, dev: &Device, cfg: &RouteConfig) {
    let target = Target::Device {
        device: dev,
        config: cfg,
    };
    let compiled = compile_for(h, "random", spec, &target).unwrap();
    assert_eq!(compiled.programs.len(), compiled.plan.circuits.len());
    let coupled = |a: u32, b: u32| dev.coupled(a, b);
    let rules = Rules {
        coupled: Some(&coupled),
        native: Some(&dev.native.names),
    };
    let mut read_back = Vec::new();
    for (text, entry) in compiled.programs.iter().zip(&compiled.plan.circuits) {
        let p = qasm::read("c.qasm", text).unwrap();
        assert_eq!(p.addressing, qasm::Addressing::Physical);
        verify_ir(&p.circuit, &rules).unwrap_or_else(|e| panic!("{}: {e}", entry.id));
        read_back.push(p.circuit);
    }
    for c in check_plan(&compiled.plan, &read_back).unwrap() {
        assert!(
            c.compile_error <= COMPILE_TOLERANCE,
            "{}: compile error {} (order {:?}, {} steps per dt, family {:?})",
            c.id,
            c.compile_error,
            spec.order,
            spec.steps_per_dt,
            spec.family
        );
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 48, ..ProptestConfig::default() })]

    #[test]
    fn reused_steps_give_the_ideal_product_formula(
        seed in any::<u64>(),
        n in 2usize..=4,
        terms in 1usize..=6,
        kind in 0u8..5,
        native in 0usize..4,
        order in prop_oneof![Just(Order::First), Just(Order::Second), Just(Order::Fourth)],
        steps_per_dt in 1usize..=3,
        family in prop_oneof![Just(Family::Overlap), Just(Family::Krylov), Just(Family::Trace)],
        stitched in any::<bool>(),
        window in 1usize..=8,
    ) {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let h = random_hamiltonian(n, terms, &mut rng);
        let dev = random_device(kind, n + 1, native, &mut rng);
        let states = match family {
            Family::Trace => random_states(n, 2, seed),
            _ => vec![random_state(n, &mut rng)],
        };
        let spec = Spec { control: phasewright::family::control::Control::Evolution, family, order, dt: 0.3, points: 3, steps_per_dt, states };
        let cfg = RouteConfig {
            seed,
            stitch_min_gates: if stitched { 0 } else { usize::MAX },
            stitch_window: window,
            ..RouteConfig::default()
        };
        check_campaign(&h, &spec, &dev, &cfg);
    }
}

#[test]
fn many_steps_alternate_blocks_correctly_on_both_paths() {
    // Up to 3 × 4 = 12 steps per circuit: both parities of the mirror alternation, and for
    // order 1 many permutations home, on a 6-qubit model (7 with the ancilla).
    let mut rng = ChaCha8Rng::seed_from_u64(77);
    let h = random_hamiltonian(6, 8, &mut rng);
    for (order, kind) in [(Order::First, 2u8), (Order::Second, 3), (Order::Fourth, 4)] {
        let dev = random_device(kind, 7, 1, &mut rng);
        for stitch_min_gates in [usize::MAX, 0] {
            let spec = Spec {
                control: phasewright::family::control::Control::Evolution,
                family: Family::Overlap,
                order,
                dt: 0.2,
                points: 5,
                steps_per_dt: 3,
                states: vec!["0+1r-l".to_string()],
            };
            let cfg = RouteConfig {
                stitch_min_gates,
                stitch_window: 16,
                ..RouteConfig::default()
            };
            check_campaign(&h, &spec, &dev, &cfg);
        }
    }
}
