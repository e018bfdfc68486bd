//! The device-aware term order (`route::order`): it only permutes terms inside commuting groups,
//! so the Hadamard-test circuits it gives equal the default ones as unitaries (by simulation, to
//! 1e-9, global phase included), and its modelled ancilla walk is never longer than the default
//! order's. Plus one hand-checked walk on a line.

use phasewright::circuit::{Circuit, Gate, Qubit};
use phasewright::device::{lattice, Calibration, Device, NativeSet};
use phasewright::formula::{evolution, order_terms, term_groups, Order};
use phasewright::pauli::{Pauli, PauliString, PauliSum};
use phasewright::route::order::ancilla_walk;
use phasewright::route::{device_order, plan_target, RouteConfig, TargetPlan};
use phasewright::sim::unitary_distance;
use phasewright::synth::{default_ladder, pauli_rotation_along};
use proptest::prelude::*;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// Random strings, half of them diagonal (Z/I only) so that commuting groups have several
/// members and the order inside them has room to change.
fn random_hamiltonian(n: usize, terms: usize, rng: &mut ChaCha8Rng) -> PauliSum {
    let mut h = PauliSum::new(n);
    let mask = (1u64 << n) - 1;
    for k in 0..terms {
        let z = rng.gen::<u64>() & mask;
        let x = if k % 2 == 0 {
            0
        } else {
            rng.gen::<u64>() & mask
        };
        let p = PauliString::from_masks(x, z);
        if !p.is_identity() {
            h.add(p, rng.gen_range(-1.0..1.0));
        }
    }
    h
}

fn random_device(kind: u8, n: u32) -> Device {
    let links = match kind % 3 {
        0 => lattice::line(n),
        1 => lattice::grid(n.div_ceil(2), 2),
        _ => lattice::brickwall(n.div_ceil(3), 3),
    };
    let size = links.iter().map(|&(a, b)| a.max(b) + 1).max().unwrap_or(1) as usize;
    Device::new(
        "random",
        size.max(n as usize),
        &links,
        NativeSet::rz_sx_x_cx(),
        Calibration::default(),
    )
}

/// `H(anc)`, then the controlled rotations of the formula over `terms`, each along `ladder`.
fn controlled_program(
    n: usize,
    terms: &[(PauliString, f64)],
    order: Order,
    steps: usize,
    ladder: &dyn Fn(&phasewright::formula::Rotation) -> Vec<Qubit>,
) -> Circuit {
    let anc = n as Qubit;
    let mut c = Circuit::new(n + 1, 0);
    c.push(Gate::H(anc));
    for r in evolution(terms, order, 0.9, steps) {
        c.extend(pauli_rotation_along(&r, Some(anc), &ladder(&r)));
    }
    c
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(48))]

    #[test]
    fn the_device_order_gives_the_same_unitary_as_the_default_order(
        seed in any::<u64>(),
        n in 2usize..=4,
        terms in 1usize..=10,
        kind in 0u8..3,
        order in 0usize..3,
        steps in 1usize..=2,
    ) {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let h = random_hamiltonian(n, terms, &mut rng);
        let dev = random_device(kind, n as u32 + 1 + rng.gen_range(0..3));
        let cfg = RouteConfig { seed, ..RouteConfig::default() };
        let order = [Order::First, Order::Second, Order::Fourth][order];
        // The plan `plan_target` chose (any of its order choices), and the walk order forced
        // on the same layout.
        let chosen = plan_target(&h, phasewright::route::Ancilla::Controls, &dev, &cfg).unwrap();
        let walk = TargetPlan::with_layout(n, phasewright::route::Ancilla::Controls, &dev, chosen.initial_layout.clone())
            .unwrap()
            .with_device_order(&h, &dev);
        let default = controlled_program(n, &order_terms(&h), order, steps, &|r| default_ladder(r));
        for plan in [&chosen, &walk] {
            // A permutation inside each commuting group, groups in their fixed order.
            let reordered = plan.terms(&h);
            let mut at = 0;
            for group in term_groups(&h) {
                let mut mine = reordered[at..at + group.len()].to_vec();
                let mut want = group.clone();
                mine.sort_by(|a, b| a.0.cmp(&b.0));
                want.sort_by(|a, b| a.0.cmp(&b.0));
                prop_assert_eq!(mine, want);
                at += group.len();
            }
            prop_assert_eq!(at, reordered.len());

            let device = controlled_program(n, &reordered, order, steps, &|r| plan.ladder(r));
            let d = unitary_distance(&default, &device);
            prop_assert!(d < 1e-9, "unitary distance {}", d);
        }

        let (walk_device, _) = ancilla_walk(&walk.terms(&h), &walk, &dev);
        let (walk_default, _) = ancilla_walk(&order_terms(&h), &walk, &dev);
        prop_assert!(walk_device <= walk_default, "{} > {}", walk_device, walk_default);
    }
}

#[test]
fn a_reversed_chain_is_swept_from_the_ancilla_end() {
    // ZZ on (q, q+1), q = 0..3: one commuting group, default (bit-mask) order Z0Z1, Z1Z2, Z2Z3,
    // Z3Z4. On a line of 6 with the ancilla on site 0 and logical qubit q on site 5 − q, the
    // ancilla's nearest term is Z3Z4 (qubit 4 on site 1, one hop), then each next bond is one
    // hop further: walk 1 + 1 + 1 + 1 = 4, roots 4, 3, 2, 1 (worked by hand; no order walks
    // less, since Z0Z1 lies 4 hops from site 0). The default order starts at the far end: Z0Z1
    // meets qubit 1 on site 4 (4 hops), Z1Z2 meets it there too (0), then 1 + 1: walk 6.
    let n = 5;
    let mut h = PauliSum::new(n);
    let zz = |q: usize| PauliString::from_factors(&[(q, Pauli::Z), (q + 1, Pauli::Z)]).1;
    for q in 0..n - 1 {
        h.add(zz(q), 1.0);
    }
    let dev = Device::new(
        "line6",
        6,
        &lattice::line(6),
        NativeSet::rz_sx_x_cx(),
        Calibration::default(),
    );
    let plan = TargetPlan::with_layout(
        n,
        phasewright::route::Ancilla::Controls,
        &dev,
        vec![5, 4, 3, 2, 1, 0],
    )
    .unwrap();
    let o = device_order(&h, &plan, &dev);
    let strings: Vec<PauliString> = o.terms.iter().map(|t| t.0.clone()).collect();
    assert_eq!(strings, vec![zz(3), zz(2), zz(1), zz(0)]);
    let roots: Vec<Qubit> = strings.iter().map(|p| o.roots[p]).collect();
    assert_eq!(roots, vec![4, 3, 2, 1]);
    assert_eq!(ancilla_walk(&o.terms, &plan, &dev).0, 4);
    assert_eq!(ancilla_walk(&order_terms(&h), &plan, &dev).0, 6);
    // The plan's ladders end on those roots.
    let plan = plan.with_device_order(&h, &dev);
    for (p, root) in strings.iter().zip(roots) {
        let r = phasewright::formula::Rotation {
            pauli: p.clone(),
            theta: 0.1,
        };
        assert_eq!(*plan.ladder(&r).last().unwrap(), root);
    }
}
