//! Statevector kernel throughput against memory bandwidth.
//!
//! Prints, for a 24-qubit state (256 MiB), the time of one Pauli rotation (one pass: read and
//! write every amplitude), the implied bytes moved per second, and the ratio to a plain
//! `copy_from_slice` of the same buffer (read + write, the practical bandwidth ceiling).
//! Run: `cargo bench --bench simulator`.

use num_complex::Complex64;
use phasewright::circuit::Gate;
use phasewright::pauli::PauliString;
use phasewright::sim::State;
use std::time::Instant;

type Kernel = Box<dyn Fn(&mut State)>;

fn best_of<F: FnMut()>(reps: usize, mut f: F) -> f64 {
    (0..reps)
        .map(|_| {
            let t = Instant::now();
            f();
            t.elapsed().as_secs_f64()
        })
        .fold(f64::INFINITY, f64::min)
}

fn main() {
    let n = 24;
    let mut s = State::zero(n);
    s.amps
        .iter_mut()
        .enumerate()
        .for_each(|(i, a)| *a = Complex64::new((i % 7) as f64, 0.5));
    let bytes = (16usize << n) as f64;
    let mut dst = vec![Complex64::new(0.0, 0.0); s.amps.len()];
    let copy = best_of(5, || dst.copy_from_slice(&s.amps));
    let copy_bw = 2.0 * bytes / copy;
    println!("threads: {}", rayon::current_num_threads());
    println!(
        "copy of {} MiB: {:.1} ms, {:.2} GB/s (read + write)",
        bytes as u64 >> 20,
        copy * 1e3,
        copy_bw / 1e9
    );
    let cases: Vec<(&str, Kernel)> = vec![
        (
            "rotation exp(-i0.3 X0 Y7 Z23)",
            Box::new(|s: &mut State| {
                s.apply_pauli_rotation(&PauliString::from_masks(0x81, 0x80_0080), 0.3)
            }),
        ),
        (
            "rotation exp(-i0.3 Z0 Z1 Z2) (diagonal)",
            Box::new(|s: &mut State| {
                s.apply_pauli_rotation(&PauliString::from_masks(0, 0b111), 0.3)
            }),
        ),
        (
            "h on qubit 12",
            Box::new(|s: &mut State| s.apply(&Gate::H(12))),
        ),
        (
            "cx 3 -> 20",
            Box::new(|s: &mut State| s.apply(&Gate::Cx(3, 20))),
        ),
    ];
    println!(
        "{:<42} {:>10} {:>10} {:>14}",
        "kernel", "ms", "GB/s", "vs copy"
    );
    for (name, f) in &cases {
        let t = best_of(5, || f(&mut s));
        let bw = 2.0 * bytes / t;
        println!(
            "{:<42} {:>10.1} {:>10.2} {:>13.2}x",
            name,
            t * 1e3,
            bw / 1e9,
            copy_bw / bw
        );
    }
}
