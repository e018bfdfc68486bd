//! Property tests of routing and lowering: random Hamiltonians × random connected devices ×
//! every supported native set. Each routed circuit must (a) pass `verify_ir` with the device's
//! coupling and native rules, (b) equal its logical circuit by simulation to 1e-9 once the
//! initial and final layouts are applied (global phase included), and (c) stay so after being
//! written as OpenQASM 3 and read back.

use phasewright::circuit::verify::{verify_ir, Rules};
use phasewright::circuit::{Circuit, Gate, Qubit};
use phasewright::device::{lattice, Calibration, Device, NativeSet};
use phasewright::formula::{evolution, Order};
use phasewright::pauli::{PauliString, PauliSum};
use phasewright::route::{
    plan_target, routing_error, to_device, DeviceCircuit, RouteConfig, Routed, TargetPlan,
};
use phasewright::synth::pauli_rotation_along;
use proptest::prelude::*;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

const NATIVE_SETS: [&[&str]; 4] = [
    &["rz", "sx", "x", "cx"],
    &["rz", "sx", "x", "cz"],
    &["rz", "rx", "ry", "cz"],
    &["U", "cx"],
];

/// A random connected device with at least `min_qubits` qubits.
fn random_device(kind: u8, min_qubits: usize, native: usize, rng: &mut ChaCha8Rng) -> Device {
    let n = (min_qubits + rng.gen_range(0..4)) as u32;
    let links = match kind % 5 {
        0 => lattice::line(n),
        1 => lattice::ring(n),
        2 => {
            let cols = rng.gen_range(2..=3u32);
            lattice::grid(n.div_ceil(cols), cols)
        }
        3 => {
            let cols = rng.gen_range(2..=4u32);
            lattice::brickwall(n.div_ceil(cols), cols)
        }
        _ => {
            // A random tree plus a few extra links.
            let mut v: Vec<(u32, u32)> = (1..n).map(|k| (rng.gen_range(0..k), k)).collect();
            for _ in 0..rng.gen_range(0..3) {
                let (a, b) = (rng.gen_range(0..n), rng.gen_range(0..n));
                if a != b {
                    v.push((a, b));
                }
            }
            v
        }
    };
    let size = links.iter().map(|&(a, b)| a.max(b) + 1).max().unwrap_or(1) as usize;
    Device::new(
        "random",
        size.max(n as usize),
        &links,
        NativeSet::from_names(NATIVE_SETS[native]).unwrap(),
        Calibration::default(),
    )
}

fn random_hamiltonian(n: usize, terms: usize, rng: &mut ChaCha8Rng) -> PauliSum {
    let mut h = PauliSum::new(n);
    let mask = (1u64 << n) - 1;
    for _ in 0..terms {
        let p = PauliString::from_masks(rng.gen::<u64>() & mask, rng.gen::<u64>() & mask);
        if !p.is_identity() {
            h.add(p, rng.gen_range(-1.0..1.0));
        }
    }
    h
}

/// The shape of the family's circuits: random product-state preparation, ancilla in |+⟩,
/// controlled rotations along the plan's ladders, ancilla basis change, measurements of the
/// ancilla (bit 0) and, when `measure_system`, of every system qubit after an `h`.
fn hadamard_test(
    h: &PauliSum,
    plan: &TargetPlan,
    measure_system: bool,
    rng: &mut ChaCha8Rng,
) -> Circuit {
    let n = h.num_qubits;
    let anc = n as Qubit;
    let mut c = Circuit::new(n + 1, if measure_system { n + 1 } else { 1 });
    for q in 0..n as Qubit {
        match rng.gen_range(0..4) {
            0 => c.push(Gate::H(q)),
            1 => c.push(Gate::X(q)),
            2 => c.extend([Gate::H(q), Gate::S(q)]),
            _ => {}
        }
    }
    c.push(Gate::H(anc));
    let program = evolution(&plan.terms(h), Order::Second, 0.7, 1);
    for r in &program {
        c.extend(pauli_rotation_along(r, Some(anc), &plan.ladder(r)));
    }
    if rng.gen_bool(0.5) {
        c.push(Gate::H(anc));
    } else {
        c.extend([Gate::Sdg(anc), Gate::H(anc)]);
    }
    c.push(Gate::Measure(anc, 0));
    if measure_system {
        for q in 0..n as Qubit {
            c.extend([Gate::H(q), Gate::Measure(q, q + 1)]);
        }
    }
    c
}

fn check_routed(logical: &Circuit, routed: &Routed, dev: &Device) {
    let coupled = |a: u32, b: u32| dev.coupled(a, b);
    verify_ir(
        routed.circuit.circuit(),
        &Rules {
            coupled: Some(&coupled),
            native: Some(&dev.native.names),
        },
    )
    .unwrap();
    let err = routing_error(logical, routed).unwrap();
    assert!(err <= 1e-9, "routing error {err}");
    // Written file, read back: the same circuit to the last bit of every angle.
    let text = phasewright::qasm::write(
        routed.circuit.circuit(),
        phasewright::qasm::Addressing::Physical,
        &[],
    );
    let back = phasewright::qasm::read("routed.qasm", &text)
        .unwrap()
        .circuit;
    let reread = Routed {
        circuit: DeviceCircuit::checked(
            Circuit {
                num_qubits: routed.circuit.circuit().num_qubits,
                ..back
            },
            dev,
        )
        .unwrap(),
        ..routed.clone()
    };
    let err = routing_error(logical, &reread).unwrap();
    assert!(err <= 1e-9, "routing error after OpenQASM round trip {err}");
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 40, ..ProptestConfig::default() })]

    #[test]
    fn routed_hadamard_tests_equal_their_logical_circuits(
        seed in any::<u64>(),
        n in 2usize..=4,
        terms in 1usize..=6,
        kind in 0u8..5,
        native in 0usize..4,
        measure_system in any::<bool>(),
    ) {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let h = random_hamiltonian(n, terms, &mut rng);
        let dev = random_device(kind, n + 1, native, &mut rng);
        let cfg = RouteConfig { seed, ..RouteConfig::default() };
        let plan = plan_target(&h, phasewright::route::Ancilla::Controls, &dev, &cfg).unwrap();
        let logical = hadamard_test(&h, &plan, measure_system, &mut rng);
        let routed = to_device(&logical, &plan, &dev, &cfg).unwrap();
        check_routed(&logical, &routed, &dev);
    }

    #[test]
    fn per_circuit_refinement_keeps_equivalence(
        seed in any::<u64>(),
        kind in 0u8..5,
        native in 0usize..4,
    ) {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let h = random_hamiltonian(4, 6, &mut rng);
        let dev = random_device(kind, 5, native, &mut rng);
        let cfg = RouteConfig { seed, refine_per_circuit: true, ..RouteConfig::default() };
        let plan = plan_target(&h, phasewright::route::Ancilla::Controls, &dev, &cfg).unwrap();
        let logical = hadamard_test(&h, &plan, true, &mut rng);
        let routed = to_device(&logical, &plan, &dev, &cfg).unwrap();
        check_routed(&logical, &routed, &dev);
    }
}

#[test]
fn larger_systems_are_checked_on_random_states() {
    // Seven logical qubits (six plus the ancilla): the check switches to random input states.
    let mut rng = ChaCha8Rng::seed_from_u64(11);
    let h = random_hamiltonian(6, 10, &mut rng);
    for (kind, native) in [(2u8, 0usize), (3, 2), (4, 3)] {
        let dev = random_device(kind, 7, native, &mut rng);
        let cfg = RouteConfig::default();
        let plan = plan_target(&h, phasewright::route::Ancilla::Controls, &dev, &cfg).unwrap();
        let logical = hadamard_test(&h, &plan, true, &mut rng);
        let routed = to_device(&logical, &plan, &dev, &cfg).unwrap();
        check_routed(&logical, &routed, &dev);
    }
}

#[test]
fn routing_is_deterministic_for_a_seed() {
    let mut rng = ChaCha8Rng::seed_from_u64(5);
    let h = random_hamiltonian(5, 12, &mut rng);
    let dev = random_device(2, 8, 0, &mut rng);
    let cfg = RouteConfig {
        seed: 42,
        ..RouteConfig::default()
    };
    let plan_a = plan_target(&h, phasewright::route::Ancilla::Controls, &dev, &cfg).unwrap();
    let plan_b = plan_target(&h, phasewright::route::Ancilla::Controls, &dev, &cfg).unwrap();
    assert_eq!(plan_a.initial_layout, plan_b.initial_layout);
    let logical = hadamard_test(&h, &plan_a, false, &mut ChaCha8Rng::seed_from_u64(1));
    let a = to_device(&logical, &plan_a, &dev, &cfg).unwrap();
    let b = to_device(&logical, &plan_b, &dev, &cfg).unwrap();
    assert_eq!(a.circuit, b.circuit);
    assert_eq!(a.final_layout, b.final_layout);
}
