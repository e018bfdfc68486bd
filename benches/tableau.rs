//! Tableau-check benchmark: how long the exact equivalence proof takes on a utility-scale
//! campaign, against the time it took to compile it.
//!
//! An invented random local Hamiltonian on 127 qubits: one random one-qubit Pauli term per
//! qubit and one random two-qubit term per coupling of a 128-qubit brick-wall lattice (8 × 16,
//! the hexagonal-like lattice of `device::lattice`; qubit 127 is left for the ancilla), seeded
//! coefficients in [−1, 1]. The overlap campaign at one time point (`k = 1`, real and imaginary
//! parts) with enough Strang steps for about 10^5 Pauli rotations per circuit is compiled
//! all-to-all and, unless `TABLEAU_BENCH_DEVICE=0`, for the 128-qubit brick-wall device with
//! `rz sx x cx` natives. Per target it prints:
//!
//! - `compile s`: wall time of `pipeline::compile_for` (the whole campaign, both circuits);
//! - `rotations`: Pauli rotations per circuit in the program, and rotations met in the file
//!   after quarter turns are split off (two per controlled rotation);
//! - `read s`: reading both files back (`qasm::read`);
//! - `check s`: `tableau::equiv::Claim::check` on both circuits (claim rebuilt, both circuits
//!   canonicalised, normal forms compared), in parallel over circuits as `verify` runs it;
//! - `rot/s`: file rotations per second of `check s`, and `check/compile`;
//!
//! and, per target, where the time of one check goes: canonicalising the file, its normal
//! form, and building the claimed logical circuit with `family::hadamard_test` (the claim is
//! canonicalised too, so a check costs about twice the first two plus the third).
//!
//! Run with `cargo bench --bench tableau`. Deterministic inputs (fixed seeds).

use phasewright::device::{lattice, Calibration, Device, NativeSet};
use phasewright::family::Spec;
use phasewright::formula::{evolution, order_terms, Order};
use phasewright::pauli::{Pauli, PauliString, PauliSum};
use phasewright::pipeline::{compile_for, Target};
use phasewright::plan::Family;
use phasewright::route::RouteConfig;
use phasewright::tableau::equiv::{Claim, Verdict};
use rand::{Rng, SeedableRng};
use rayon::prelude::*;
use std::time::Instant;

const ROWS: u32 = 8;
const COLS: u32 = 16;
const SYSTEM: usize = 127;

fn random_local(seed: u64) -> PauliSum {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    let letters = [Pauli::X, Pauli::Y, Pauli::Z];
    let mut h = PauliSum::new(SYSTEM);
    for q in 0..SYSTEM {
        h.add(
            PauliString::single(q, letters[rng.gen_range(0..3)]),
            rng.gen_range(-1.0..1.0),
        );
    }
    for (a, b) in lattice::brickwall(ROWS, COLS) {
        let (a, b) = (a as usize, b as usize);
        if a < SYSTEM && b < SYSTEM {
            let f = [
                (a, letters[rng.gen_range(0..3)]),
                (b, letters[rng.gen_range(0..3)]),
            ];
            h.add(PauliString::from_factors(&f).1, rng.gen_range(-1.0..1.0));
        }
    }
    h
}

fn main() {
    let h = random_local(127);
    let per_step = evolution(&order_terms(&h), Order::Second, 0.1, 1).len();
    // Strang steps fold at their boundaries: about `per_step − |first group|` per extra step.
    let mut steps = 1usize;
    while evolution(&order_terms(&h), Order::Second, 0.1, steps).len() < 100_000 {
        steps = (steps * 100_000)
            .div_ceil(evolution(&order_terms(&h), Order::Second, 0.1, steps).len())
            .max(steps + 1);
    }
    let program = evolution(&order_terms(&h), Order::Second, 0.1, steps).len();
    println!(
        "random local Hamiltonian: {SYSTEM} qubits, {} terms; Strang, {steps} steps at k = 1 \
         ({per_step} rotations in one step): {program} Pauli rotations per circuit",
        h.terms.len()
    );
    let spec = Spec {
        control: phasewright::family::control::Control::Evolution,
        family: Family::Overlap,
        order: Order::Second,
        dt: 0.1,
        points: 2,
        steps_per_dt: steps,
        states: vec!["0".repeat(SYSTEM)],
    };
    let dev = Device::new(
        "brick128",
        (ROWS * COLS) as usize,
        &lattice::brickwall(ROWS, COLS),
        NativeSet::rz_sx_x_cx(),
        Calibration::default(),
    );
    let cfg = RouteConfig::default();
    let with_device = std::env::var("TABLEAU_BENCH_DEVICE").map_or(true, |v| v != "0");
    let mut targets = vec![("all-to-all", Target::AllToAll)];
    if with_device {
        targets.push((
            "brick-wall 128",
            Target::Device {
                device: &dev,
                config: &cfg,
            },
        ));
    }
    println!(
        "{:<16} {:>10} {:>10} {:>10} {:>8} {:>8} {:>12} {:>14}",
        "target", "compile s", "gates", "rotations", "read s", "check s", "rot/s", "check/compile"
    );
    let mut splits = Vec::new();
    for (label, target) in &targets {
        let t = Instant::now();
        let compiled = compile_for(&h, "bench", &spec, target).expect("compiles");
        let compile_s = t.elapsed().as_secs_f64();
        let t = Instant::now();
        let files: Vec<_> = compiled
            .programs
            .iter()
            .map(|text| phasewright::qasm::read("bench.qasm", text).expect("reads back"))
            .collect();
        let read_s = t.elapsed().as_secs_f64();
        let t = Instant::now();
        let claim = Claim::from_plan(&compiled.plan).expect("plan");
        let rotations: usize = compiled
            .plan
            .circuits
            .par_iter()
            .zip(&files)
            .map(
                |(e, f)| match claim.check(e, &f.circuit).expect("checkable") {
                    Verdict::Equivalent(p) => p.rotations,
                    Verdict::Differs(r) => panic!("{}: {}", e.id, r.message),
                },
            )
            .sum();
        let check_s = t.elapsed().as_secs_f64();
        // Where the time of one check goes (one circuit, one thread).
        let f = &files[0].circuit;
        let t = Instant::now();
        let mut v = Vec::new();
        phasewright::tableau::canonicalise(f, f.num_qubits, &mut |r| v.push(r)).expect("ok");
        let canon_s = t.elapsed().as_secs_f64();
        let t = Instant::now();
        let nf = phasewright::tableau::normal::normal_form(v);
        let normal_s = t.elapsed().as_secs_f64();
        let t = Instant::now();
        let _ = claim
            .logical_circuit(&compiled.plan.circuits[0])
            .expect("ok");
        let claim_s = t.elapsed().as_secs_f64();
        splits.push(format!(
            "{label}: per circuit, canonicalise the file {canon_s:.3} s, its normal form \
             {normal_s:.3} s ({} entries in {} layers), build the claimed logical circuit \
             {claim_s:.3} s",
            nf.len(),
            nf.layers.len()
        ));
        let gates: usize = files.iter().map(|f| f.circuit.gates.len()).sum();
        println!(
            "{label:<16} {compile_s:>10.2} {gates:>10} {rotations:>10} {read_s:>8.2} {check_s:>8.2} {:>12.3e} {:>14.3}",
            rotations as f64 / check_s,
            check_s / compile_s
        );
    }
    for line in splits {
        println!("{line}");
    }
}
