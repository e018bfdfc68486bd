//! Routing benchmark: how much routing to a device costs over the all-to-all target.
//!
//! For a fixed invented set of 12-qubit Hamiltonians (a Heisenberg chain with a field, a 3×4
//! transverse-field Ising model, a dense random model of weight-2…4 strings) and 16-qubit
//! devices (line, grid 4×4, brick wall 4×4), it compiles the real-part Hadamard test of two
//! Strang steps (13 logical qubits with the ancilla) and prints, per pair:
//!
//! - `a2a 2q`: two-qubit gates of the circuit on an all-to-all device (same lowering and
//!   cancellation; the term order does not change it);
//! - `ratio`, `swaps` under `default order`: two-qubit gates after routing and lowering ÷
//!   `a2a 2q`, and SWAPs inserted, with the terms in `formula::order_terms` order and each
//!   ladder rooted nearest the ancilla's initial site (`RouteConfig::device_order` off);
//! - `ratio`, `swaps` under `device order`: the same with `RouteConfig::device_order` on (the
//!   default): `plan_target` scores the device-aware order inside each commuting group
//!   (`route::order`; ladders rooted where its walk meets each term, or nearest the ancilla's
//!   initial site) against the default order and keeps the best;
//! - `base`: SWAPs with the lookahead window, the random layout trials and the bidirectional
//!   refinement turned off (one annealed greedy layout, a front-only score; device order), for
//!   scale;
//! - `plain`: the same ratio and SWAPs for the uncontrolled evolution (no ancilla; device order);
//! - `ms`: wall time of `plan_target` + `to_device` for the Hadamard test (device order).
//!
//! Run with `cargo bench --bench routing`. Deterministic: fixed seeds throughout.

use phasewright::circuit::{Circuit, Gate, Qubit};
use phasewright::device::{lattice, Calibration, Device, NativeSet};
use phasewright::formula::{evolution, Order};
use phasewright::pauli::{Pauli, PauliString, PauliSum};
use phasewright::route::{plan_target, to_device, Ancilla, RouteConfig, TargetPlan};
use phasewright::synth::pauli_rotation_along;
use rand::{Rng, SeedableRng};
use std::time::Instant;

fn heisenberg_chain(n: usize) -> PauliSum {
    let mut h = PauliSum::new(n);
    for q in 0..n {
        h.add(PauliString::single(q, Pauli::Z), 0.5);
        if q + 1 < n {
            for p in [Pauli::X, Pauli::Y, Pauli::Z] {
                h.add(PauliString::from_factors(&[(q, p), (q + 1, p)]).1, 1.0);
            }
        }
    }
    h
}

fn ising_2d(rows: usize, cols: usize) -> PauliSum {
    let mut h = PauliSum::new(rows * cols);
    for r in 0..rows {
        for c in 0..cols {
            let q = r * cols + c;
            h.add(PauliString::single(q, Pauli::X), 0.7);
            if c + 1 < cols {
                h.add(
                    PauliString::from_factors(&[(q, Pauli::Z), (q + 1, Pauli::Z)]).1,
                    -1.0,
                );
            }
            if r + 1 < rows {
                h.add(
                    PauliString::from_factors(&[(q, Pauli::Z), (q + cols, Pauli::Z)]).1,
                    -1.0,
                );
            }
        }
    }
    h
}

fn dense_random(n: usize, terms: usize, seed: u64) -> PauliSum {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    let mut h = PauliSum::new(n);
    let letters = [Pauli::X, Pauli::Y, Pauli::Z];
    while h.terms.len() < terms {
        let w = rng.gen_range(2..=4);
        let mut factors = Vec::new();
        while factors.len() < w {
            let q = rng.gen_range(0..n);
            if factors.iter().all(|&(p, _)| p != q) {
                factors.push((q, letters[rng.gen_range(0..3)]));
            }
        }
        h.add(
            PauliString::from_factors(&factors).1,
            rng.gen_range(-1.0..1.0),
        );
    }
    h
}

fn circuit(h: &PauliSum, plan: &TargetPlan, ancilla: Ancilla) -> Circuit {
    let n = h.num_qubits;
    let anc = ancilla.controls().then_some(n as Qubit);
    let mut c = Circuit::new(n + ancilla.controls() as usize, 1);
    if let Some(a) = anc {
        c.push(Gate::H(a));
    }
    for r in evolution(&plan.terms(h), Order::Second, 0.2, 2) {
        c.extend(pauli_rotation_along(&r, anc, &plan.ladder(&r)));
    }
    if let Some(a) = anc {
        c.extend([Gate::H(a), Gate::Measure(a, 0)]);
    } else {
        c.push(Gate::Measure(0, 0));
    }
    c
}

struct Outcome {
    two_qubit: usize,
    swaps: usize,
}

fn compile(h: &PauliSum, dev: &Device, ancilla: Ancilla, cfg: &RouteConfig) -> Outcome {
    let plan = plan_target(h, ancilla, dev, cfg).expect("device fits");
    let c = circuit(h, &plan, ancilla);
    let r = to_device(&c, &plan, dev, cfg).expect("IR stays valid");
    Outcome {
        two_qubit: r
            .circuit
            .circuit()
            .gates
            .iter()
            .filter(|g| g.is_two_qubit())
            .count(),
        swaps: r.swaps,
    }
}

fn main() {
    let models = [
        ("heisenberg chain 12", heisenberg_chain(12)),
        ("ising 2d 3x4", ising_2d(3, 4)),
        ("dense random 12", dense_random(12, 40, 2024)),
    ];
    let devices = [
        (
            "line 16",
            Device::new(
                "line16",
                16,
                &lattice::line(16),
                NativeSet::rz_sx_x_cx(),
                Calibration::default(),
            ),
        ),
        (
            "grid 4x4",
            Device::new(
                "grid16",
                16,
                &lattice::grid(4, 4),
                NativeSet::rz_sx_x_cx(),
                Calibration::default(),
            ),
        ),
        (
            "brickwall 4x4",
            Device::new(
                "brick16",
                16,
                &lattice::brickwall(4, 4),
                NativeSet::from_names(&["rz", "rx", "ry", "cz"]).unwrap(),
                Calibration::default(),
            ),
        ),
    ];
    let cfg = RouteConfig::default();
    let default_order_cfg = RouteConfig {
        device_order: false,
        ..RouteConfig::default()
    };
    let base_cfg = RouteConfig {
        layout_trials: 1,
        refine_rounds: 0,
        extended_size: 0,
        ..RouteConfig::default()
    };
    println!(
        "{:<35} {:>8} | {:^13} | {:^13} | {:>6} | {:^13} |",
        "", "", "default order", "device order", "", "plain"
    );
    println!(
        "{:<20} {:<14} {:>8} | {:>6} {:>6} | {:>6} {:>6} | {:>6} | {:>6} {:>6} | {:>8}",
        "model",
        "device",
        "a2a 2q",
        "ratio",
        "swaps",
        "ratio",
        "swaps",
        "base",
        "ratio",
        "swaps",
        "ms"
    );
    for (mname, h) in &models {
        let n = h.num_qubits;
        let a2a_ht = compile(
            h,
            &Device::all_to_all(n + 1),
            Ancilla::Controls,
            &default_order_cfg,
        )
        .two_qubit;
        let a2a_plain = compile(h, &Device::all_to_all(n), Ancilla::None, &cfg).two_qubit;
        for (dname, dev) in &devices {
            let t = Instant::now();
            let ht = compile(h, dev, Ancilla::Controls, &cfg);
            let ms = t.elapsed().as_secs_f64() * 1e3;
            let before = compile(h, dev, Ancilla::Controls, &default_order_cfg);
            let base = compile(h, dev, Ancilla::Controls, &base_cfg);
            let plain = compile(h, dev, Ancilla::None, &cfg);
            println!(
                "{:<20} {:<14} {:>8} | {:>6.2} {:>6} | {:>6.2} {:>6} | {:>6} | {:>6.2} {:>6} | {:>8.1}",
                mname,
                dname,
                a2a_ht,
                before.two_qubit as f64 / a2a_ht as f64,
                before.swaps,
                ht.two_qubit as f64 / a2a_ht as f64,
                ht.swaps,
                base.swaps,
                plain.two_qubit as f64 / a2a_plain as f64,
                plain.swaps,
                ms
            );
        }
    }
}
