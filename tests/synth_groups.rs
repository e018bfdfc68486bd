//! Commuting runs synthesised as one Clifford network each (`synth::Groups`) inside a routed
//! Trotter step: for random Pauli sums on 2–5 qubits and random connected devices, the step
//! the router receives (the form `StepForm::groups` asks for, controlled by the Hadamard-test
//! ancilla or not) must equal the ideal Strang product `Π exp(−iθ_j P_j)` to 1e-9 by
//! simulation (Strang, SIAM J. Numer. Anal. 5, 506 (1968), for the formula), pass `verify_ir`,
//! and, routed and lowered to the device's native gates (`route::to_device`, which runs the
//! verifier with the coupling and native rules after each pass), still compute the same
//! circuit (`route::routing_error`).

use phasewright::circuit::verify::{verify_ir, Rules};
use phasewright::formula::{step, Order};
use phasewright::route::{reuse, routing_error, to_device, Ancilla, RouteConfig, TargetPlan};
use phasewright::sim::{run, State};
use proptest::prelude::*;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;

mod route_support;
use route_support::{random_device, random_hamiltonian};

/// The logical Strang step of a random sum on `n` qubits (and the ancilla when `controlled`)
/// in the form `coupled` asks for, on a random device with the identity layout, checked
/// against the ideal step on random states: the product where the control is |1⟩ (or
/// everywhere without one), the identity where it is |0⟩.
fn exact_step(
    seed: u64,
    (n, terms, kind, native): (usize, usize, u8, usize),
    controlled: bool,
    coupled: bool,
) -> Result<
    (
        phasewright::device::Device,
        TargetPlan,
        phasewright::circuit::Circuit,
    ),
    TestCaseError,
> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let h = random_hamiltonian(n, terms, &mut rng);
    let width = n + controlled as usize;
    let dev = random_device(kind, width, native, &mut rng);
    let layout: Vec<u32> = (0..width as u32).collect();
    let mut plan = TargetPlan::with_layout(
        n,
        if controlled {
            Ancilla::Controls
        } else {
            Ancilla::None
        },
        &dev,
        layout,
    )
    .unwrap();
    plan.step_form.groups = true;
    plan.step_form.coupled = coupled;
    let terms = plan.terms(&h);
    let parts = reuse::step_parts_on(&terms, &plan, Order::Second, 0.3, Some(&dev));
    let logical = parts.circuit;
    verify_ir(&logical, &Rules::default()).unwrap();
    let program = step(&terms, Order::Second, 0.3);
    for _ in 0..2 {
        let s = State::random(width, &mut rng);
        let got = run(&logical, s.clone());
        let mut on = s.clone();
        for r in &program {
            on.apply_pauli_rotation(&r.pauli, r.theta);
        }
        for (b, g) in got.amps.iter().enumerate() {
            let want = if controlled && (b >> n) & 1 == 0 {
                s.amps[b]
            } else {
                on.amps[b]
            };
            prop_assert!(
                (g - want).norm() < 1e-9,
                "amplitude {b}: {g} against {want}"
            );
        }
    }
    Ok((dev, plan, logical))
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 48, ..ProptestConfig::default() })]

    #[test]
    fn grouped_steps_are_exact_and_route_onto_the_device(
        seed in any::<u64>(),
        n in 2usize..=5,
        terms in 3usize..=10,
        kind in 0u8..5,
        native in 0usize..4,
        controlled in any::<bool>(),
    ) {
        let (dev, plan, logical) = exact_step(seed, (n, terms, kind, native), controlled, false)?;
        let routed = to_device(&logical, &plan, &dev, &RouteConfig::default()).unwrap();
        prop_assert!(routing_error(&logical, &routed).unwrap() < 1e-9);
    }

    // The coupled form (`synth::Coupled`): the same exactness, and where the placed system
    // qubits induce a connected graph and the ancilla is coupled to one of them, every
    // two-qubit gate of the logical step is on a coupled pair already, so the router inserts
    // no SWAP at all.
    #[test]
    fn coupled_steps_need_no_swaps(
        seed in any::<u64>(),
        n in 2usize..=5,
        terms in 3usize..=10,
        kind in 0u8..5,
        native in 0usize..4,
        controlled in any::<bool>(),
    ) {
        let (dev, plan, logical) = exact_step(seed, (n, terms, kind, native), controlled, true)?;
        // Sites 0..n hold the system (identity layout), site n the ancilla.
        let mut reached = vec![false; n];
        reached[0] = true;
        let mut stack = vec![0u32];
        while let Some(u) = stack.pop() {
            for v in 0..n as u32 {
                if !reached[v as usize] && dev.coupled(u, v) {
                    reached[v as usize] = true;
                    stack.push(v);
                }
            }
        }
        let placed = reached.iter().all(|&r| r)
            && (!controlled || (0..n as u32).any(|q| dev.coupled(q, n as u32)));
        if placed {
            let coupled = |a: u32, b: u32| dev.coupled(a, b);
            verify_ir(&logical, &Rules { coupled: Some(&coupled), native: None }).unwrap();
        }
        let routed = to_device(&logical, &plan, &dev, &RouteConfig::default()).unwrap();
        if placed {
            prop_assert_eq!(routed.swaps, 0);
        }
        prop_assert!(routing_error(&logical, &routed).unwrap() < 1e-9);
    }
}
