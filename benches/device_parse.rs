//! `.dev` reader throughput on long coupling lists: 10⁴ `link` lines (distinct, repeated, then
//! cut again), 10⁴ bad `link` lines (one diagnostic each), and the largest heavy-hexagon
//! example. The reader keeps its couplings in an ordered set, so each line costs O(log E); a
//! quadratic pass would show as a hundredfold jump between 10³ and 10⁴ lines.
//! Run: `cargo bench --bench device_parse`.

use phasewright::device::Device;
use phasewright::lang::dev::parse_device;
use rand::{Rng, SeedableRng};
use std::fmt::Write;
use std::time::Instant;

const QUBITS: u32 = 2048;

/// A device with `n` distinct random couplings among 2048 qubits, each on its own `link` line,
/// then the first `cuts` of them removed again.
fn links_file(n: usize, repeat: bool, cuts: usize, bad: bool) -> String {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
    let mut src = format!("qubits {QUBITS}\nnative rz sx x cx\nlattice line {QUBITS}\n");
    let mut seen = std::collections::BTreeSet::new();
    let mut pairs = Vec::new();
    while pairs.len() < n {
        let a = rng.gen_range(0..QUBITS);
        let b = rng.gen_range(0..QUBITS);
        if a.abs_diff(b) > 1 && (repeat || seen.insert((a.min(b), a.max(b)))) {
            pairs.push((a, b));
        }
    }
    for &(a, b) in &pairs {
        // A bad line names a qubit past the end of the device.
        let b = if bad { b + QUBITS } else { b };
        writeln!(src, "link {a} {b}").unwrap();
    }
    for &(a, b) in pairs.iter().take(cuts) {
        writeln!(src, "cut {b} {a}").unwrap();
    }
    src
}

fn time(label: &str, src: &str, reps: u32) {
    let lines = src.lines().count();
    let t = Instant::now();
    let mut outcome = String::new();
    for _ in 0..reps {
        outcome = match parse_device("bench.dev", src) {
            Ok(d) => format!("{} couplings", d.links().len()),
            Err(e) => format!("{} diagnostics", e.len()),
        };
    }
    let per = t.elapsed().as_secs_f64() / reps as f64;
    // The part spent building the device from its couplings (the all-pairs hop table).
    let build = match parse_device("bench.dev", src) {
        Ok(d) => {
            let links = d.links();
            let t = Instant::now();
            for _ in 0..reps {
                std::hint::black_box(Device::new(
                    &d.name,
                    d.num_qubits,
                    &links,
                    d.native.clone(),
                    d.calibration.clone(),
                ));
            }
            format!(
                "(device build {:.2} ms)",
                t.elapsed().as_secs_f64() / reps as f64 * 1e3
            )
        }
        Err(_) => String::new(),
    };
    println!(
        "{label:<32} {lines:>6} lines -> {outcome:<18} {:>8.2} ms {build}",
        per * 1e3
    );
}

fn main() {
    for n in [1_000, 10_000] {
        time(
            &format!("{n} distinct links"),
            &links_file(n, false, 0, false),
            5,
        );
    }
    time(
        "10000 links, repeats allowed",
        &links_file(10_000, true, 0, false),
        5,
    );
    time(
        "10000 links then 5000 cuts",
        &links_file(10_000, false, 5_000, false),
        5,
    );
    for n in [1_000, 10_000] {
        time(
            &format!("{n} links to missing qubits"),
            &links_file(n, false, 0, true),
            3,
        );
    }
    time(
        "lattice line 2048 alone",
        &links_file(0, false, 0, false),
        5,
    );
    time(
        "examples/hexchip433.dev",
        include_str!("../examples/hexchip433.dev"),
        20,
    );
}
