//! Control-free Hadamard tests on devices: two-qubit gates of the `prep` form against the plain
//! evolution circuit and against the controlled form, and the size of a Krylov campaign that
//! reads `S_k` from its group circuits.
//!
//! For an invented 12-qubit Heisenberg (XXZ at Δ = 1) chain with a field and an invented
//! 6-site Hubbard chain (12 modes, Jordan–Wigner), each with a half-filled basis reference,
//! on a 4×4 grid, a 4×4 brick wall and a 23-qubit heavy hexagon (`bridgedhex 3 7`), it
//! compiles the overlap campaign at K = 2 (one Strang step of dt = 0.1) three ways and prints
//! the two-qubit gates of the real-part circuit at k = 1:
//!
//! - `prep`: `--control prep` (the evolution uncontrolled, the reference prepared on the
//!   ancilla's |1⟩ branch);
//! - `plain`: `--measure evolution` (no ancilla), and the bound
//!   `plain + 6·(set bits of the reference)`; target `prep ≤ 1.1 × bound`;
//! - `ctrl`: `--control evolution` (every rotation controlled); target `prep ≤ 0.5 × ctrl`.
//!
//! Then the circuits of the README's Krylov example (`examples/tfim_chain8.ham`, |+⟩⁸, K = 10,
//! order 4, 2 steps): today's count against the earlier count, which added two overlap-only
//! circuits per k ≥ 1; target at least 30% fewer.
//!
//! Run with `cargo bench --bench control_free`. Deterministic: fixed seeds throughout.

use phasewright::device::{lattice, Calibration, Device, NativeSet};
use phasewright::family::control::Control;
use phasewright::family::Spec;
use phasewright::formula::Order;
use phasewright::pauli::{Pauli, PauliString, PauliSum};
use phasewright::pipeline::{compile_for, Target};
use phasewright::plan::Family;
use phasewright::route::RouteConfig;

fn heisenberg_chain(n: usize) -> PauliSum {
    let mut h = PauliSum::new(n);
    for q in 0..n {
        h.add(PauliString::single(q, Pauli::Z), 0.3);
        if q + 1 < n {
            for p in [Pauli::X, Pauli::Y, Pauli::Z] {
                h.add(PauliString::from_factors(&[(q, p), (q + 1, p)]).1, 1.0);
            }
        }
    }
    h
}

fn hubbard_chain(sites: usize) -> PauliSum {
    let mut text = format!("qubits {}\nencoding jw\n", 2 * sites);
    for s in 0..sites {
        for spin in 0..2 {
            if s + 1 < sites {
                text += &format!(
                    "-1.0 * cr{{{}}} an{{{}}} + h.c.\n",
                    2 * s + spin,
                    2 * (s + 1) + spin
                );
            }
            text += &format!("-2.0 * n{{{}}}\n", 2 * s + spin);
        }
        text += &format!("4.0 * n{{{}}} n{{{}}}\n", 2 * s, 2 * s + 1);
    }
    phasewright::hamiltonian::parse_hamiltonian("hubbard.ham", &text)
        .expect("the benchmark's model reads")
        .sum
}

fn spec(family: Family, control: Control, state: &str, points: usize) -> Spec {
    Spec {
        family,
        control,
        order: Order::Second,
        dt: 0.1,
        points,
        steps_per_dt: 1,
        states: vec![state.to_string()],
    }
}

/// Two-qubit gates of the circuit `id` of the campaign.
fn two_qubit(h: &PauliSum, dev: &Device, s: &Spec, id: &str) -> usize {
    let cfg = RouteConfig::default();
    let c = compile_for(
        h,
        "bench",
        s,
        &Target::Device {
            device: dev,
            config: &cfg,
        },
    )
    .expect("the campaign compiles");
    c.plan
        .circuits
        .iter()
        .find(|e| e.id == id)
        .expect("the circuit exists")
        .costs
        .two_qubit
}

fn main() {
    let hex = lattice::Lattice::new("bridgedhex", &[3, 7]).expect("a heavy hexagon");
    let devices = [
        Device::new(
            "grid16",
            16,
            &lattice::grid(4, 4),
            NativeSet::rz_sx_x_cx(),
            Calibration::default(),
        ),
        Device::new(
            "brick16",
            16,
            &lattice::brickwall(4, 4),
            NativeSet::from_names(&["rz", "rx", "ry", "cz"]).unwrap(),
            Calibration::default(),
        ),
        Device::new(
            "hex",
            hex.qubits() as usize,
            &hex.links(),
            NativeSet::rz_sx_x_cx(),
            Calibration::default(),
        ),
    ];
    let models = [
        ("heisenberg chain 12", heisenberg_chain(12), "010101010101"),
        (
            "hubbard chain 6 (12 modes)",
            hubbard_chain(6),
            "110011001100",
        ),
    ];
    println!(
        "{:<28} {:<8} {:>6} {:>6} {:>7} {:>6} {:>11} {:>10}",
        "model", "device", "prep", "plain", "bound", "ctrl", "prep/bound", "prep/ctrl"
    );
    for (name, h, state) in &models {
        let set_bits = state.chars().filter(|&c| c == '1').count();
        for dev in &devices {
            let prep = two_qubit(
                h,
                dev,
                &spec(Family::Overlap, Control::Prep, state, 2),
                "k01-re",
            );
            let plain = two_qubit(
                h,
                dev,
                &spec(Family::Evolution, Control::Evolution, state, 2),
                "k01-ev",
            );
            let ctrl = two_qubit(
                h,
                dev,
                &spec(Family::Overlap, Control::Evolution, state, 2),
                "k01-re",
            );
            let bound = plain + 6 * set_bits;
            println!(
                "{:<28} {:<8} {:>6} {:>6} {:>7} {:>6} {:>11.3} {:>10.3}",
                name,
                dev.name,
                prep,
                plain,
                bound,
                ctrl,
                prep as f64 / bound as f64,
                prep as f64 / ctrl as f64
            );
        }
    }
    let text =
        std::fs::read_to_string("examples/tfim_chain8.ham").expect("run from the crate root");
    let h = phasewright::hamiltonian::parse_hamiltonian("tfim_chain8.ham", &text)
        .expect("the example reads")
        .sum;
    let s = Spec {
        family: Family::Krylov,
        control: Control::Evolution,
        order: Order::Fourth,
        dt: 0.2,
        points: 10,
        steps_per_dt: 2,
        states: vec!["++++++++".into()],
    };
    let c = phasewright::pipeline::compile(&h, "tfim_chain8.ham", &s).expect("compiles");
    let now = c.plan.circuits.len();
    let before = now + 2 * (s.points - 1);
    println!(
        "\nkrylov, README example (tfim_chain8, K = 10): {now} circuits, before {before} ({:.1}% fewer)",
        100.0 * (before - now) as f64 / before as f64
    );
}
