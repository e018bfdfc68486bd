//! Grouping throughput. Two figures:
//! 1. 10⁴ random strings on 24 qubits (dense and weight ≤ 4), exact largest-first colouring
//!    (DESIGN.md asks for well under a second);
//! 2. 10⁵ strings of weight ≤ 4 on 1,024 qubits, the windowed regime of `pauli::group`
//!    (the utility-scale issue asks for well under a second), beside the time to sort the same
//!    strings, so the ratio is measured in the same run;
//! 3. `formula::term_groups` (the grouping `compile` runs: the plain colouring beside the one
//!    that keeps flip units whole, windowed by `UNIT_WINDOW`) on 10⁵ strings of weight ≤ 4 on
//!    1,024 qubits and on 10⁴…10⁶ on 120 qubits (the shape of `benches/utility.rs`), with the
//!    time per string, so growth faster than the string count shows in the same run.
//!
//! Run: `cargo bench --bench grouping` (`PHASEWRIGHT_BENCH_QUICK=1` drops the 10⁶ row).

use phasewright::formula::term_groups;
use phasewright::pauli::group::{colour_groups, Compat};
use phasewright::pauli::{Pauli, PauliString, PauliSum};
use rand::{Rng, SeedableRng};
use std::time::Instant;

fn local_strings(n: usize, m: usize, rng: &mut impl Rng) -> Vec<PauliString> {
    (0..m)
        .map(|_| loop {
            let w = rng.gen_range(1..=4);
            let f: Vec<(usize, Pauli)> = (0..w)
                .map(|_| {
                    let p = [Pauli::X, Pauli::Y, Pauli::Z][rng.gen_range(0..3)];
                    (rng.gen_range(0..n), p)
                })
                .collect();
            let p = PauliString::from_factors(&f).1;
            if !p.is_identity() {
                break p;
            }
        })
        .collect()
}

fn main() {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
    let mask = (1u64 << 24) - 1;
    let dense: Vec<PauliString> = (0..10_000)
        .map(|_| loop {
            let p = PauliString::from_masks(rng.gen::<u64>() & mask, rng.gen::<u64>() & mask);
            if !p.is_identity() {
                break p;
            }
        })
        .collect();
    let local = local_strings(24, 10_000, &mut rng);
    let wide = local_strings(1024, 100_000, &mut rng);
    println!("cores: {}", rayon::current_num_threads());
    for (label, strings) in [
        ("10^4 dense on 24 qubits", &dense),
        ("10^4 weight<=4 on 24 qubits", &local),
        ("10^5 weight<=4 on 1024 qubits", &wide),
    ] {
        let t = Instant::now();
        let mut sorted = strings.clone();
        sorted.sort();
        let sort_s = t.elapsed().as_secs_f64();
        for how in [Compat::Commuting, Compat::QubitWise] {
            let t = Instant::now();
            let groups = colour_groups(strings, how);
            let s = t.elapsed().as_secs_f64();
            println!(
                "{label:<32} {how:?}: {} groups in {s:.3} s ({:.1}x the time to sort them)",
                groups.len(),
                s / sort_s
            );
        }
    } // 3. The grouping of `compile` (flip units kept whole), per string.
    let quick = std::env::var_os("PHASEWRIGHT_BENCH_QUICK").is_some();
    let mut rows: Vec<(usize, usize)> = vec![(1024, 100_000)];
    rows.extend([(120, 10_000), (120, 100_000)]);
    if !quick {
        rows.push((120, 1_000_000));
    }
    for (n, m) in rows {
        let strings = if n == 1024 && m == wide.len() {
            wide.clone()
        } else {
            local_strings(n, m, &mut rng)
        };
        let mut h = PauliSum::new(n);
        for p in strings {
            h.add(p, 1.0);
        }
        let terms = h.terms.len();
        let t = Instant::now();
        let groups = term_groups(&h);
        let s = t.elapsed().as_secs_f64();
        println!(
            "term_groups {terms:>8} weight<=4 on {n:>4} qubits: {} groups in {s:.3} s ({:.2} us per term)",
            groups.len(),
            s * 1e6 / terms as f64
        );
    }
}
