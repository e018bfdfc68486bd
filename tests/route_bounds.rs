//! Exact bounds that routing and lowering must meet, and checks on the written OpenQASM 3 text.

use phasewright::circuit::{Circuit, Gate, Qubit};
use phasewright::device::{lattice, Calibration, Device, NativeSet};
use phasewright::formula::{evolution, order_terms, Order, Rotation};
use phasewright::lang::dev::parse_device;
use phasewright::pauli::{Pauli, PauliString, PauliSum};
use phasewright::qasm::{write, Addressing};
use phasewright::route::{
    plan_target, routing_error, to_device, RouteConfig, RouteError, TargetPlan,
};
use phasewright::synth::pauli_rotation_along;

fn two_qubit(c: &Circuit) -> usize {
    c.gates.iter().filter(|g| g.is_two_qubit()).count()
}

fn line_device(n: u32, native: &[&str]) -> Device {
    Device::new(
        "line",
        n as usize,
        &lattice::line(n),
        NativeSet::from_names(native).unwrap(),
        Calibration::default(),
    )
}

/// Nearest-neighbour Heisenberg chain with transverse field: XX + YY + ZZ on (q, q+1), X on q.
fn heisenberg_chain(n: usize) -> PauliSum {
    let mut h = PauliSum::new(n);
    for q in 0..n {
        h.add(PauliString::single(q, Pauli::X), 0.3);
        if q + 1 < n {
            for p in [Pauli::X, Pauli::Y, Pauli::Z] {
                h.add(PauliString::from_factors(&[(q, p), (q + 1, p)]).1, 1.0);
            }
        }
    }
    h
}

/// `exp(-iHt)` by a product formula, without control (no ancilla), measured at the end.
fn plain_evolution(h: &PauliSum, plan: &TargetPlan, steps: usize) -> Circuit {
    let n = h.num_qubits;
    let mut c = Circuit::new(n, n);
    for r in evolution(&order_terms(h), Order::Second, 1.0, steps) {
        c.extend(pauli_rotation_along(&r, None, &plan.ladder(&r)));
    }
    for q in 0..n as Qubit {
        c.push(Gate::Measure(q, q));
    }
    c
}

#[test]
fn nearest_neighbour_chain_on_a_line_with_identity_layout_needs_no_swap() {
    let n = 8;
    let h = heisenberg_chain(n);
    for native in [&["rz", "sx", "x", "cx"][..], &["rz", "rx", "ry", "cz"]] {
        let dev = line_device(n as u32, native);
        let identity: Vec<u32> = (0..n as u32).collect();
        let plan =
            TargetPlan::with_layout(n, phasewright::route::Ancilla::None, &dev, identity.clone())
                .unwrap();
        let logical = plain_evolution(&h, &plan, 3);
        let routed = to_device(&logical, &plan, &dev, &RouteConfig::default()).unwrap();
        assert_eq!(routed.swaps, 0);
        assert_eq!(routed.initial_layout, identity);
        assert_eq!(routed.final_layout, identity);
        assert!(routing_error(&logical, &routed).unwrap() < 1e-9);
        // The layout search finds a layout just as good on its own.
        let searched = plan_target(
            &h,
            phasewright::route::Ancilla::None,
            &dev,
            &RouteConfig::default(),
        )
        .unwrap();
        let logical = plain_evolution(&h, &searched, 3);
        assert_eq!(
            to_device(&logical, &searched, &dev, &RouteConfig::default())
                .unwrap()
                .swaps,
            0
        );
    }
}

#[test]
fn a_swap_costs_three_two_qubit_gates() {
    // cx between the ends of a 3-qubit line: one SWAP (3 native gates) plus the cx itself.
    for native in [
        &["rz", "sx", "x", "cx"][..],
        &["rz", "sx", "x", "cz"],
        &["U", "cx"],
    ] {
        let dev = line_device(3, native);
        let plan =
            TargetPlan::with_layout(3, phasewright::route::Ancilla::None, &dev, vec![0, 1, 2])
                .unwrap();
        let mut c = Circuit::new(3, 0);
        c.extend([Gate::H(0), Gate::Cx(0, 2)]);
        let routed = to_device(&c, &plan, &dev, &RouteConfig::default()).unwrap();
        assert_eq!(routed.swaps, 1);
        assert_eq!(two_qubit(routed.circuit.circuit()), 1 + 3);
        assert!(routing_error(&c, &routed).unwrap() < 1e-12);
    }
}

#[test]
fn a_weight_w_rotation_on_all_to_all_costs_two_w_minus_one_cnots() {
    // Nielsen & Chuang (2010) §4.7.3: exp(-iθ P) for a weight-w Pauli string needs 2(w−1) CNOTs.
    let letters = [Pauli::X, Pauli::Y, Pauli::Z];
    for w in 1..=6usize {
        let factors: Vec<(usize, Pauli)> = (0..w).map(|q| (q, letters[(q * 7 + w) % 3])).collect();
        let r = Rotation {
            pauli: PauliString::from_factors(&factors).1,
            theta: 0.37,
        };
        let mut h = PauliSum::new(w);
        h.add(r.pauli.clone(), 1.0);
        let dev = Device::all_to_all(w);
        let plan = plan_target(
            &h,
            phasewright::route::Ancilla::None,
            &dev,
            &RouteConfig::default(),
        )
        .unwrap();
        let mut c = Circuit::new(w, 0);
        c.extend(pauli_rotation_along(&r, None, &plan.ladder(&r)));
        let routed = to_device(&c, &plan, &dev, &RouteConfig::default()).unwrap();
        assert_eq!(routed.swaps, 0);
        assert_eq!(two_qubit(routed.circuit.circuit()), 2 * (w - 1), "w = {w}");
        assert!(routing_error(&c, &routed).unwrap() < 1e-12);
    }
}

#[test]
fn without_the_device_order_the_ladder_root_is_the_support_qubit_nearest_the_ancilla() {
    let dev = parse_device(
        "chip_grid12.dev",
        include_str!("../examples/chip_grid12.dev"),
    )
    .unwrap();
    let h = heisenberg_chain(6);
    let cfg = RouteConfig {
        device_order: false,
        ..RouteConfig::default()
    };
    let plan = plan_target(&h, phasewright::route::Ancilla::Controls, &dev, &cfg).unwrap();
    assert!(plan.order.is_none());
    let anc = plan.initial_layout[6];
    for (p, _) in h.term_list() {
        let r = Rotation {
            pauli: p,
            theta: 0.1,
        };
        let ladder = plan.ladder(&r);
        let root = *ladder.last().unwrap();
        let d = |q: Qubit| dev.distance(plan.initial_layout[q as usize], anc);
        assert!(ladder.iter().all(|&q| d(root) <= d(q)), "{ladder:?}");
        let mut sorted = ladder.clone();
        sorted.sort_unstable();
        assert_eq!(sorted, phasewright::synth::default_ladder(&r));
    }
}

#[test]
fn devices_that_cannot_hold_the_problem_are_refused_with_a_reason() {
    let h = heisenberg_chain(5);
    let small = line_device(5, &["rz", "sx", "cx"]);
    let e = plan_target(
        &h,
        phasewright::route::Ancilla::Controls,
        &small,
        &RouteConfig::default(),
    )
    .unwrap_err();
    assert!(
        matches!(e, RouteError::TooFewQubits { has: 5, .. }),
        "{e:?}"
    );
    let e = e.to_string();
    assert!(e.contains("has 5 qubits; the problem needs 6"), "{e}");
    // Two lines of 4: eight qubits, but no connected part holds six.
    let split = Device::new(
        "split",
        8,
        &[(0, 1), (1, 2), (2, 3), (4, 5), (5, 6), (6, 7)],
        NativeSet::rz_sx_x_cx(),
        Calibration::default(),
    );
    let e = plan_target(
        &h,
        phasewright::route::Ancilla::Controls,
        &split,
        &RouteConfig::default(),
    )
    .unwrap_err();
    assert!(
        matches!(e, RouteError::Disconnected { largest: 4, .. }),
        "{e:?}"
    );
    let e = e.to_string();
    assert!(e.contains("disconnected"), "{e}");
    // A disconnected device whose large part suffices is fine: the layout stays inside it.
    let h3 = heisenberg_chain(3);
    let lopsided = Device::new(
        "lopsided",
        7,
        &[(0, 1), (2, 3), (3, 4), (4, 5), (5, 6)],
        NativeSet::rz_sx_x_cx(),
        Calibration::default(),
    );
    let plan = plan_target(
        &h3,
        phasewright::route::Ancilla::Controls,
        &lopsided,
        &RouteConfig::default(),
    )
    .unwrap();
    assert!(plan.initial_layout.iter().all(|&p| p >= 2));
}

#[test]
fn a_wrong_final_layout_is_caught_by_the_check() {
    let dev = line_device(4, &["rz", "sx", "x", "cx"]);
    let plan =
        TargetPlan::with_layout(4, phasewright::route::Ancilla::None, &dev, vec![0, 1, 2, 3])
            .unwrap();
    let mut c = Circuit::new(4, 0);
    c.extend([Gate::H(0), Gate::X(3), Gate::Cx(0, 3)]);
    let mut routed = to_device(&c, &plan, &dev, &RouteConfig::default()).unwrap();
    assert!(routed.swaps > 0);
    assert!(routing_error(&c, &routed).unwrap() < 1e-12);
    routed.final_layout = vec![0, 1, 2, 3];
    assert!(routing_error(&c, &routed).unwrap() > 0.1);
}

/// `name args $a, $b;` → (name, [a, b]) for each gate line of a written program.
fn gate_lines(text: &str) -> Vec<(String, Vec<u32>)> {
    text.lines()
        .map(str::trim)
        .filter(|l| !l.is_empty() && !l.starts_with("//"))
        .filter(|l| !l.starts_with("OPENQASM") && !l.starts_with("include"))
        .filter(|l| !l.starts_with("bit") && !l.starts_with("gphase"))
        .map(|l| {
            let l = l.trim_end_matches(';');
            let (lhs, rhs) = match l.split_once('=') {
                Some((_, r)) => ("measure", r.trim().trim_start_matches("measure").trim()),
                None => {
                    let end = l.find(['(', ' ']).unwrap_or(l.len());
                    let rest = &l[end..];
                    let rest = match rest.find(')') {
                        Some(k) if rest.starts_with('(') => &rest[k + 1..],
                        _ => rest,
                    };
                    (&l[..end], rest.trim())
                }
            };
            let qubits = rhs
                .split(',')
                .map(|t| {
                    t.trim()
                        .strip_prefix('$')
                        .unwrap_or_else(|| panic!("physical operand expected in `{l}`"))
                        .parse()
                        .unwrap()
                })
                .collect();
            (lhs.to_string(), qubits)
        })
        .collect()
}

#[test]
fn written_files_use_coupled_pairs_physical_qubits_and_native_gates_only() {
    for (file, src) in [
        (
            "chip_grid12.dev",
            include_str!("../examples/chip_grid12.dev"),
        ),
        ("line8.dev", include_str!("../examples/line8.dev")),
        ("brick16.dev", include_str!("../examples/brick16.dev")),
        ("ring10_u.dev", include_str!("../examples/ring10_u.dev")),
    ] {
        let dev = parse_device(file, src).unwrap();
        let h = heisenberg_chain(5);
        let cfg = RouteConfig::default();
        let plan = plan_target(&h, phasewright::route::Ancilla::Controls, &dev, &cfg).unwrap();
        let anc = 5 as Qubit;
        let mut c = Circuit::new(6, 1);
        c.extend([Gate::H(0), Gate::X(2), Gate::H(anc)]);
        for r in evolution(&order_terms(&h), Order::First, 0.5, 2) {
            c.extend(pauli_rotation_along(&r, Some(anc), &plan.ladder(&r)));
        }
        c.extend([Gate::Sdg(anc), Gate::H(anc), Gate::Measure(anc, 0)]);
        let routed = to_device(&c, &plan, &dev, &cfg).unwrap();
        let text = write(routed.circuit.circuit(), Addressing::Physical, &[]);
        let lines = gate_lines(&text);
        assert!(lines.len() > 10);
        for (name, qs) in &lines {
            if name == "measure" {
                // The ancilla's bit reads the physical qubit that holds the ancilla at the end.
                assert_eq!(qs, &vec![routed.final_layout[5]]);
                continue;
            }
            assert!(
                dev.native.names.contains(name),
                "{file}: `{name}` is not native"
            );
            assert!(qs.iter().all(|&q| (q as usize) < dev.num_qubits));
            if qs.len() == 2 {
                assert!(dev.coupled(qs[0], qs[1]), "{file}: {name} on {qs:?}");
            }
        }
        assert!(routing_error(&c, &routed).unwrap() < 1e-9);
    }
}
