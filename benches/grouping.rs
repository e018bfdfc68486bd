//! Grouping throughput: colouring 10⁴ random Pauli strings on 24 qubits into commuting and
//! qubit-wise commuting groups (DESIGN.md asks for well under a second).
//! Run: `cargo bench --bench grouping`.

use phasewright::pauli::group::{colour_groups, Compat};
use phasewright::pauli::PauliString;
use rand::{Rng, SeedableRng};
use std::time::Instant;

fn main() {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
    let mask = (1u64 << 24) - 1;
    for (label, weight) in [
        ("dense (random on 24 qubits)", None),
        ("local (weight ≤ 4)", Some(4u32)),
    ] {
        let strings: Vec<PauliString> = (0..10_000)
            .map(|_| loop {
                let (x, z) = (rng.gen::<u64>() & mask, rng.gen::<u64>() & mask);
                let p = match weight {
                    None => PauliString::from_masks(x, z),
                    Some(w) => {
                        // keep at most w random support qubits
                        let mut keep = 0u64;
                        for _ in 0..w {
                            keep |= 1 << rng.gen_range(0..24);
                        }
                        PauliString::from_masks(x & keep, z & keep)
                    }
                };
                if !p.is_identity() {
                    break p;
                }
            })
            .collect();
        for how in [Compat::Commuting, Compat::QubitWise] {
            let t = Instant::now();
            let groups = colour_groups(&strings, how);
            println!(
                "{label:<30} {how:?}: 10000 strings -> {} groups in {:.3} s",
                groups.len(),
                t.elapsed().as_secs_f64()
            );
        }
    }
}
