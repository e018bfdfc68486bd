//! A 100-qubit Hamiltonian on the 127-qubit heavy-hexagon example device
//! (`examples/hexchip127.dev`): every file written holds only native gates, every two-qubit gate
//! sits on a coupled pair, and the measurements read the physical qubits plan.json's final
//! layout names. Checked on the written files, read back with the OpenQASM 3 reader, for the
//! command line (whole circuits, the default at this size) and for the library with the
//! stitched assembly of `route::campaign` forced; and the bytes do not depend on the number of
//! threads. Too wide to simulate; correctness by simulation is `tests/route_reuse.rs`'s job on
//! small cases.

use assert_cmd::Command;
use phasewright::circuit::verify::{verify_ir, Rules};
use phasewright::circuit::Gate;
use phasewright::device::Device;
use phasewright::family::Spec;
use phasewright::formula::Order;
use phasewright::lang::dev::parse_device;
use phasewright::pipeline::{compile_for, Target};
use phasewright::plan::{Family, Plan};
use phasewright::qasm;
use phasewright::route::RouteConfig;
use rand::{Rng, SeedableRng};
use std::fmt::Write as _;
use std::path::Path;

/// 300 distinct random strings of weight 1–4 on 100 qubits (invented), as `.ham` text.
fn hamiltonian_text() -> String {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(2024);
    let mut seen = std::collections::BTreeSet::new();
    let mut out = String::from("qubits 100\n");
    while seen.len() < 300 {
        let w = rng.gen_range(1..=4usize);
        let mut qs: Vec<usize> = Vec::new();
        while qs.len() < w {
            let q = rng.gen_range(0..100);
            if !qs.contains(&q) {
                qs.push(q);
            }
        }
        qs.sort_unstable();
        let mut line = String::new();
        for q in qs {
            write!(line, " {}{q}", ['X', 'Y', 'Z'][rng.gen_range(0..3)]).unwrap();
        }
        if seen.insert(line.clone()) {
            writeln!(out, "{:.6}{line}", rng.gen_range(-1.0..1.0)).unwrap();
        }
    }
    out
}

fn device() -> Device {
    let src = std::fs::read_to_string("examples/hexchip127.dev").unwrap();
    parse_device("examples/hexchip127.dev", &src).unwrap()
}

/// Reads every file of the campaign in `dir` back and checks it against `dev`.
fn check_written(dir: &Path, dev: &Device) {
    let plan = Plan::from_json(&std::fs::read_to_string(dir.join("plan.json")).unwrap()).unwrap();
    assert_eq!(plan.hamiltonian.num_qubits, 100);
    assert!(plan.circuits.len() >= 4);
    let coupled = |a: u32, b: u32| dev.coupled(a, b);
    let rules = Rules {
        coupled: Some(&coupled),
        native: Some(&dev.native.names),
    };
    for e in &plan.circuits {
        let text = std::fs::read_to_string(dir.join(&e.file)).unwrap();
        let prog = qasm::read(&e.file, &text).unwrap();
        assert_eq!(
            prog.addressing,
            qasm::Addressing::Physical,
            "{}: device files address hardware qubits",
            e.id
        );
        verify_ir(&prog.circuit, &rules).unwrap_or_else(|err| panic!("{}: {err}", e.id));
        let mut two_qubit = 0;
        for g in &prog.circuit.gates {
            // The same rules, spelled out on the gates read back.
            let qs = g.qubits();
            assert!(qs.iter().all(|&q| (q as usize) < dev.num_qubits));
            if g.is_measure() {
                continue;
            }
            assert!(
                dev.native.names.iter().any(|n| n == g.name()),
                "{}: {g:?}",
                e.id
            );
            if g.is_two_qubit() {
                two_qubit += 1;
                assert!(
                    dev.coupled(qs[0], qs[1]),
                    "{}: {g:?} on an uncoupled pair",
                    e.id
                );
            }
        }
        assert_eq!(two_qubit, e.costs.two_qubit, "{}", e.id);
        assert!(
            e.k == 0 || e.costs.swaps > 0,
            "{}: 100 random qubits need SWAPs",
            e.id
        );
        // Bit 0 reads the ancilla (logical qubit 100) where the final layout puts it.
        let ancilla_site = e.final_layout[100];
        assert!(prog.circuit.gates.contains(&Gate::Measure(ancilla_site, 0)));
    }
}

#[test]
fn command_line_files_for_100_qubits_on_127_are_native_and_coupled() {
    let tmp = tempfile::tempdir().unwrap();
    let ham = tmp.path().join("h100.ham");
    std::fs::write(&ham, hamiltonian_text()).unwrap();
    let out = tmp.path().join("out");
    let r = Command::cargo_bin("phasewright")
        .unwrap()
        .arg("compile")
        .arg(&ham)
        .args(["--state", &"0+".repeat(50), "--dt", "0.1", "--points", "3"])
        .args(["--device", "examples/hexchip127.dev", "-o"])
        .arg(&out)
        .output()
        .unwrap();
    assert!(r.status.success(), "{}", String::from_utf8_lossy(&r.stderr));
    check_written(&out, &device());
}

#[test]
fn stitched_files_for_100_qubits_on_127_are_native_and_coupled() {
    let dev = device();
    let h = phasewright::hamiltonian::parse_hamiltonian("h100.ham", &hamiltonian_text())
        .unwrap()
        .sum;
    let spec = Spec {
        control: phasewright::family::control::Control::Evolution,
        family: Family::Overlap,
        order: Order::Second,
        dt: 0.1,
        points: 4,
        steps_per_dt: 1,
        states: vec!["01".repeat(50)],
    };
    let cfg = RouteConfig {
        stitch_min_gates: 0,
        stitch_window: 256,
        layout_trials: 2,
        ..RouteConfig::default()
    };
    let target = Target::Device {
        device: &dev,
        config: &cfg,
    };
    let mut compiled = compile_for(&h, "h100.ham", &spec, &target).unwrap();
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("out");
    phasewright::files::write_campaign(&out, &mut compiled).unwrap();
    check_written(&out, &dev);
}

#[test]
fn device_campaign_bytes_do_not_depend_on_the_thread_count() {
    // Stitched assembly forced (pieces printed in parallel chunks, circuits emitted in
    // parallel): one thread and two must give the same programs and plan, byte for byte.
    let dev = device();
    let h = phasewright::hamiltonian::parse_hamiltonian("h100.ham", &hamiltonian_text())
        .unwrap()
        .sum;
    let spec = Spec {
        control: phasewright::family::control::Control::Evolution,
        family: Family::Overlap,
        order: Order::Fourth,
        dt: 0.1,
        points: 3,
        steps_per_dt: 1,
        states: vec!["+".repeat(100)],
    };
    let cfg = RouteConfig {
        stitch_min_gates: 0,
        stitch_window: 128,
        layout_trials: 1,
        refine_rounds: 0,
        ..RouteConfig::default()
    };
    let run = |threads: usize| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap()
            .install(|| {
                let target = Target::Device {
                    device: &dev,
                    config: &cfg,
                };
                let c = compile_for(&h, "h100.ham", &spec, &target).unwrap();
                (c.programs, c.plan.to_json())
            })
    };
    let (one, two) = (run(1), run(2));
    assert_eq!(one.1, two.1, "plan.json differs");
    assert_eq!(one.0.len(), two.0.len());
    for (a, b) in one.0.iter().zip(&two.0) {
        assert!(a == b, "a program differs between one and two threads");
    }
}
