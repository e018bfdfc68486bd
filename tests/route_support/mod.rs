//! Random inputs shared by the routing tests: connected devices of every lattice kind and
//! random trees, random Pauli sums, random reference states (singlet pairs included).
#![allow(dead_code)]

use phasewright::device::{lattice, Calibration, Device, NativeSet};
use phasewright::family::Spec;
use phasewright::pauli::{PauliString, PauliSum};
use phasewright::pipeline::{compile_at, Compiled, OptLevel, Target};
use phasewright::route::RouteConfig;
use rand::Rng;
use rand_chacha::ChaCha8Rng;

pub const NATIVE_SETS: [&[&str]; 4] = [
    &["rz", "sx", "x", "cx"],
    &["rz", "sx", "x", "cz"],
    &["rz", "rx", "ry", "cz"],
    &["U", "cx"],
];

/// A random connected device with at least `min_qubits` qubits: line, ring, grid, brick wall
/// or a random tree with a few extra links.
pub fn random_device(kind: u8, min_qubits: usize, native: usize, rng: &mut ChaCha8Rng) -> Device {
    let n = (min_qubits + rng.gen_range(0..4)) as u32;
    let links = match kind % 5 {
        0 => lattice::line(n),
        1 => lattice::ring(n),
        2 => lattice::grid(n.div_ceil(3), 3),
        3 => lattice::brickwall(n.div_ceil(3), 3),
        _ => {
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

pub fn random_hamiltonian(n: usize, terms: usize, rng: &mut ChaCha8Rng) -> PauliSum {
    let mut h = PauliSum::new(n);
    let mask = (1u64 << n) - 1;
    while h.terms.is_empty() {
        for _ in 0..terms {
            let p = PauliString::from_masks(rng.gen::<u64>() & mask, rng.gen::<u64>() & mask);
            if !p.is_identity() {
                h.add(p, rng.gen_range(-1.0..1.0));
            }
        }
    }
    h
}

/// A reference state: random letters, with a singlet pair `ss` sometimes (its CNOT makes the
/// state preparation itself need routing, and the SWAPs back to the plan's layout).
pub fn random_state(n: usize, rng: &mut ChaCha8Rng) -> String {
    let letters = ['0', '1', '+', '-', 'r', 'l'];
    let mut s: Vec<char> = (0..n).map(|_| letters[rng.gen_range(0..6)]).collect();
    if n >= 2 && rng.gen_bool(0.4) {
        let i = rng.gen_range(0..n - 1);
        s[i] = 's';
        s[i + 1] = 's';
    }
    s.into_iter().collect()
}

/// `h` compiled at level 3 on `dev` without the spread control (`RouteConfig::cat` off), the
/// comparison for the campaigns that may keep copies of the ancilla.
pub fn compile_without_copies(h: &PauliSum, name: &str, spec: &Spec, dev: &Device) -> Compiled {
    compile_level3_with(
        h,
        name,
        spec,
        dev,
        RouteConfig {
            cat: false,
            ..RouteConfig::default()
        },
    )
}

/// `h` compiled at level 3 on `dev` with the routing configuration `cfg`.
pub fn compile_level3_with(
    h: &PauliSum,
    name: &str,
    spec: &Spec,
    dev: &Device,
    cfg: RouteConfig,
) -> Compiled {
    let target = Target::Device {
        device: dev,
        config: &cfg,
    };
    compile_at(h, name, spec, &target, OptLevel::MAX).expect("compiles")
}
