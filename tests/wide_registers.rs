//! Wide registers: Pauli strings whose qubit indices sit above 64 and above 128 compile exactly.
//!
//! A small random model (≤ 6 qubits) is placed on qubits `offset..offset+n` of a register of
//! `offset + n` qubits (offsets 0, 60, 120; the last puts every string in the third 64-bit
//! word), compiled on the all-to-all target, read back from its OpenQASM text, compacted onto
//! the qubits it touches and simulated; its ancilla ⟨Z⟩ must equal the ideal product-formula
//! overlap of the small model to 1e-9. Also: the same campaign is byte-identical whatever the
//! offset's word boundary, up to the relabelling, and output does not depend on thread count.

use assert_cmd::Command;
use num_complex::Complex64;
use phasewright::check::parity_expectation;
use phasewright::circuit::verify::{verify_ir, Rules};
use phasewright::circuit::Circuit;
use phasewright::family::{state_prep, RefState, Spec};
use phasewright::formula::{evolution, order_terms, Order};
use phasewright::pauli::{PauliString, PauliSum};
use phasewright::pipeline::compile;
use phasewright::plan::{Family, Part};
use phasewright::qasm;
use phasewright::sim::{run, State};
use proptest::prelude::*;

fn small_sum(n: usize, seeds: &[(u64, u64, f64)]) -> PauliSum {
    let mask = (1u64 << n) - 1;
    let mut h = PauliSum::new(n);
    for &(x, z, c) in seeds {
        h.add(PauliString::from_masks(x & mask, z & mask), c);
    }
    h
}

/// `h` moved up by `offset` qubits inside a register of `offset + n` qubits.
fn placed(h: &PauliSum, offset: usize) -> PauliSum {
    let mut wide = PauliSum::new(h.num_qubits + offset);
    wide.constant = h.constant;
    for (p, c) in &h.terms {
        wide.add(p.shifted_up(offset), *c);
    }
    wide
}

fn prepared(n: usize, state: &str) -> State {
    let mut s = State::zero(n);
    for g in state_prep(&RefState::parse(state, n).expect("valid letters")) {
        s.apply(&g);
    }
    s
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 24, .. ProptestConfig::default() })]

    #[test]
    fn models_placed_high_compile_to_the_small_models_formula(
        n in 1usize..=6,
        seeds in proptest::collection::vec((any::<u64>(), any::<u64>(), -2.0f64..2.0), 1..8),
        letters in proptest::collection::vec(0usize..4, 6),
        offset in prop_oneof![Just(0usize), Just(60), Just(120)],
        order in prop_oneof![Just(Order::First), Just(Order::Second), Just(Order::Fourth)],
    ) {
        let small = small_sum(n, &seeds);
        prop_assume!(!small.terms.is_empty());
        // Letters without a gate-free |0⟩ would touch every idle qubit; keep `0` outside.
        let state_small: String = letters[..n].iter().map(|&i| ['0', '1', '+', 'r'][i]).collect();
        let state_wide = format!("{}{state_small}", "0".repeat(offset));
        let wide = placed(&small, offset);
        let spec = Spec { control: phasewright::family::control::Control::Evolution,
            family: Family::Overlap,
            order,
            dt: 0.3,
            points: 3,
            steps_per_dt: 1,
            states: vec![state_wide],
        };
        let compiled = compile(&wide, "wide.ham", &spec).expect("compiles");
        // The ideal overlap of the small model, with the wide model's term order moved down.
        let terms: Vec<(PauliString, f64)> = order_terms(&wide)
            .into_iter()
            .map(|(p, c)| {
                let down: Vec<usize> = p.support_qubits();
                let mut q = PauliString::IDENTITY;
                for k in down {
                    let f = PauliString::single(k - offset, p.get(k));
                    q = q.mul(&f).1;
                }
                (q, c)
            })
            .collect();
        let psi = prepared(n, &state_small);
        for (entry, text) in compiled.plan.circuits.iter().zip(&compiled.programs) {
            let c: Circuit = qasm::read(&entry.file, text).expect("reads back").circuit;
            verify_ir(&c, &Rules::default()).expect("verifier");
            prop_assert_eq!(c.num_qubits, offset + n + 1);
            let (small_c, map) = c.compacted();
            // The ancilla (last qubit) and the model's qubits are all that is touched.
            prop_assert!(map.iter().all(|&q| q as usize >= offset));
            let out = run(&small_c, State::zero(small_c.num_qubits));
            let got = parity_expectation(&small_c, &out, &[0]).expect("bit 0 measured");
            let mut evolved = psi.clone();
            for r in evolution(&terms, order, entry.time, entry.k) {
                evolved.apply_pauli_rotation(&r.pauli, r.theta);
            }
            let s: Complex64 = psi.inner(&evolved);
            let want = if entry.part == Some(Part::Re) { s.re } else { s.im };
            prop_assert!((got - want).abs() < 1e-9, "{}: {got} vs {want}", entry.id);
        }
    }
}

#[test]
fn output_does_not_depend_on_the_thread_count() {
    let dir = tempfile::tempdir().unwrap();
    let mut outs = Vec::new();
    for threads in ["1", "2", "3"] {
        for device in [None, Some("examples/chip_grid12.dev")] {
            let out = dir.path().join(format!("t{threads}-{}", device.is_some()));
            let mut cmd = Command::cargo_bin("phasewright").unwrap();
            cmd.env("RAYON_NUM_THREADS", threads).args([
                "compile",
                "examples/ising_ring8.ham",
                "--state",
                "0+0+0+0+",
                "--dt",
                "0.2",
                "--points",
                "4",
                "--measure",
                "krylov",
                "-o",
                out.to_str().unwrap(),
            ]);
            if let Some(d) = device {
                cmd.args(["--device", d]);
            }
            cmd.assert().success();
            let mut files: Vec<(String, Vec<u8>)> = std::fs::read_dir(&out)
                .unwrap()
                .map(|e| {
                    let e = e.unwrap();
                    (
                        e.file_name().to_string_lossy().into_owned(),
                        std::fs::read(e.path()).unwrap(),
                    )
                })
                .collect();
            files.sort();
            outs.push((threads, device.is_some(), files));
        }
    }
    for (threads, dev, files) in &outs[2..] {
        let base = &outs[*dev as usize].2;
        assert_eq!(files.len(), base.len());
        for ((name_a, a), (name_b, b)) in files.iter().zip(base) {
            assert_eq!(name_a, name_b);
            assert!(
                a == b,
                "{name_a} differs with {threads} threads (device: {dev})"
            );
        }
    }
}
