//! Initial layout: where each logical qubit starts on the device.
//!
//! In: the terms of a Pauli sum (whether a Hadamard-test ancilla joins them), one connected
//! component of the coupling graph. Out: candidate layouts `layout[l] = physical qubit`, all
//! distinct and inside the component.
//!
//! The interaction weight `W[i][j]` says how many CNOTs between `i` and `j` a Trotter step is
//! expected to need: a term on support `S` (`|S| = w ≥ 2`) gets a ladder of `w − 1` CNOTs, spread
//! as `2/w` over each of its `w(w−1)/2` pairs; with an ancilla, the term's controlled `rz` meets
//! the ancilla on one support qubit, spread as `1/w` over `S`. A layout costs
//! `Σ_{i<j} W[i][j] · d(layout[i], layout[j])` (hop distance `d`), the quadratic-assignment form
//! of the placement problem. Candidates come from a greedy placement grown around the
//! component's centre (the ancilla, or the most interacting qubit, goes there first) and from
//! seeded random placements, each improved by simulated annealing and then first-improvement
//! local search (moves: a qubit to a free site, or an exchange of two qubits). `route::plan_target` then picks among them by routing.

use crate::device::Device;
use crate::pauli::PauliSum;
use rand::seq::SliceRandom;
use rand::SeedableRng;

/// Row-major `n × n` interaction weights over `h.num_qubits` system qubits plus the ancilla
/// (last) when `ancilla`.
pub fn interaction_weights(h: &PauliSum, ancilla: bool) -> Vec<f64> {
    let n = h.num_qubits + ancilla as usize;
    let mut w = vec![0.0; n * n];
    for p in h.terms.keys() {
        let support = p.support_qubits();
        let k = support.len() as f64;
        for (i, &a) in support.iter().enumerate() {
            for &b in &support[i + 1..] {
                w[a * n + b] += 2.0 / k;
                w[b * n + a] += 2.0 / k;
            }
            if ancilla {
                let anc = n - 1;
                w[a * n + anc] += 1.0 / k;
                w[anc * n + a] += 1.0 / k;
            }
        }
    }
    w
}

/// `Σ_{i<j} W[i][j] · d(layout[i], layout[j])`.
pub fn layout_cost(w: &[f64], layout: &[u32], dev: &Device) -> f64 {
    let n = layout.len();
    let mut c = 0.0;
    for i in 0..n {
        for j in i + 1..n {
            let wij = w[i * n + j];
            if wij != 0.0 {
                c += wij * dev.distance(layout[i], layout[j]) as f64;
            }
        }
    }
    c
}

/// The qubit of `comp` with the smallest total distance to the others (lowest index on ties).
pub fn centre(comp: &[u32], dev: &Device) -> u32 {
    *comp
        .iter()
        .min_by_key(|&&p| {
            let total: u64 = comp.iter().map(|&q| dev.distance(p, q) as u64).sum();
            (total, p)
        })
        .expect("component is not empty")
}

/// Greedy placement: the ancilla (or the most interacting qubit) at the centre, then repeatedly
/// the unplaced qubit most tied to the placed ones, on the free site that costs least.
pub fn greedy_layout(w: &[f64], n: usize, comp: &[u32], dev: &Device, ancilla: bool) -> Vec<u32> {
    let c = centre(comp, dev);
    let total = |i: usize| -> f64 { (0..n).map(|j| w[i * n + j]).sum() };
    let first = if ancilla {
        n - 1
    } else {
        (0..n)
            .max_by(|&a, &b| total(a).total_cmp(&total(b)).then(b.cmp(&a)))
            .unwrap_or(0)
    };
    let mut layout = vec![u32::MAX; n];
    let mut free: Vec<u32> = comp.to_vec();
    let place = |i: usize, p: u32, layout: &mut Vec<u32>, free: &mut Vec<u32>| {
        layout[i] = p;
        free.retain(|&f| f != p);
    };
    place(first, c, &mut layout, &mut free);
    for _ in 1..n {
        let tie = |i: usize| -> f64 {
            (0..n)
                .filter(|&j| layout[j] != u32::MAX)
                .map(|j| w[i * n + j])
                .sum()
        };
        let next = (0..n)
            .filter(|&i| layout[i] == u32::MAX)
            .max_by(|&a, &b| {
                tie(a)
                    .total_cmp(&tie(b))
                    .then(total(a).total_cmp(&total(b)))
                    .then(b.cmp(&a))
            })
            .expect("an unplaced qubit remains");
        let site_cost = |p: u32| -> f64 {
            (0..n)
                .filter(|&j| layout[j] != u32::MAX)
                .map(|j| w[next * n + j] * dev.distance(p, layout[j]) as f64)
                .sum()
        };
        let site = *free
            .iter()
            .min_by(|&&a, &&b| {
                site_cost(a)
                    .total_cmp(&site_cost(b))
                    .then(dev.distance(a, c).cmp(&dev.distance(b, c)))
                    .then(a.cmp(&b))
            })
            .expect("the component is large enough");
        place(next, site, &mut layout, &mut free);
    }
    layout
}

/// A uniformly random placement of `n` qubits on `comp`, from `seed`.
pub fn random_layout(n: usize, comp: &[u32], seed: u64) -> Vec<u32> {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    let mut sites = comp.to_vec();
    sites.shuffle(&mut rng);
    sites.truncate(n);
    sites
}

/// First-improvement local search over moves to free sites and exchanges of two qubits.
pub fn improve(w: &[f64], layout: &mut [u32], comp: &[u32], dev: &Device) {
    let n = layout.len();
    // Cost of qubit i sitting at p, against everyone else except `skip`.
    let partial = |layout: &[u32], i: usize, p: u32, skip: usize| -> f64 {
        (0..n)
            .filter(|&j| j != i && j != skip)
            .map(|j| w[i * n + j] * dev.distance(p, layout[j]) as f64)
            .sum()
    };
    for _sweep in 0..100 {
        let mut improved = false;
        for i in 0..n {
            for &p in comp {
                let from = layout[i];
                if p == from {
                    continue;
                }
                match layout.iter().position(|&x| x == p) {
                    None => {
                        let delta = partial(layout, i, p, usize::MAX)
                            - partial(layout, i, from, usize::MAX);
                        if delta < -1e-12 {
                            layout[i] = p;
                            improved = true;
                        }
                    }
                    Some(j) => {
                        // Exchange i and j; the i–j term keeps its distance.
                        let delta = partial(layout, i, p, j) - partial(layout, i, from, j)
                            + partial(layout, j, from, i)
                            - partial(layout, j, p, i);
                        if delta < -1e-12 {
                            layout[i] = p;
                            layout[j] = from;
                            improved = true;
                        }
                    }
                }
            }
        }
        if !improved {
            break;
        }
    }
}

/// Simulated annealing over the same moves as [`improve`] (Kirkpatrick, Gelatt & Vecchi,
/// "Optimization by simulated annealing", Science 220, 671 (1983)), seeded, then a final
/// [`improve`]. Geometric cooling from the mean uphill step of a random sample down to 1% of
/// it; about `200 · n · |comp|` moves, capped at 200 000. Keeps the best layout seen.
pub fn anneal(w: &[f64], layout: &mut [u32], comp: &[u32], dev: &Device, seed: u64) {
    use rand::Rng;
    let n = layout.len();
    if n < 2 || comp.len() < 2 {
        return;
    }
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    let partial = |layout: &[u32], i: usize, p: u32, skip: usize| -> f64 {
        (0..n)
            .filter(|&j| j != i && j != skip)
            .map(|j| w[i * n + j] * dev.distance(p, layout[j]) as f64)
            .sum()
    };
    // Delta of moving logical i to site p (exchanging with its holder, if any).
    let delta = |layout: &[u32], i: usize, p: u32| -> (f64, Option<usize>) {
        let from = layout[i];
        match layout.iter().position(|&x| x == p) {
            None => (
                partial(layout, i, p, usize::MAX) - partial(layout, i, from, usize::MAX),
                None,
            ),
            Some(j) => (
                partial(layout, i, p, j) - partial(layout, i, from, j)
                    + partial(layout, j, from, i)
                    - partial(layout, j, p, i),
                Some(j),
            ),
        }
    };
    let mut uphill = 0.0;
    let mut count = 0usize;
    for _ in 0..100 {
        let i = rng.gen_range(0..n);
        let p = comp[rng.gen_range(0..comp.len())];
        if p != layout[i] {
            let (d, _) = delta(layout, i, p);
            if d > 0.0 {
                uphill += d;
                count += 1;
            }
        }
    }
    if count == 0 {
        improve(w, layout, comp, dev);
        return;
    }
    let t0 = uphill / count as f64;
    let steps = (200 * n * comp.len()).min(200_000);
    let cooling = (0.01f64).powf(1.0 / steps as f64);
    let mut t = t0;
    let mut cost = layout_cost(w, layout, dev);
    let mut best = (cost, layout.to_vec());
    for _ in 0..steps {
        let i = rng.gen_range(0..n);
        let p = comp[rng.gen_range(0..comp.len())];
        let from = layout[i];
        if p != from {
            let (d, j) = delta(layout, i, p);
            if d <= 0.0 || rng.gen::<f64>() < (-d / t).exp() {
                layout[i] = p;
                if let Some(j) = j {
                    layout[j] = from;
                }
                cost += d;
                if cost < best.0 - 1e-9 {
                    best = (cost, layout.to_vec());
                }
            }
        }
        t *= cooling;
    }
    layout.copy_from_slice(&best.1);
    improve(w, layout, comp, dev);
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::device::{lattice, Calibration, NativeSet};
    use crate::pauli::{Pauli, PauliString};

    fn chain(n: usize) -> PauliSum {
        let mut h = PauliSum::new(n);
        for q in 0..n - 1 {
            h.add(
                PauliString::from_factors(&[(q, Pauli::Z), (q + 1, Pauli::Z)]).1,
                1.0,
            );
        }
        h
    }

    #[test]
    fn a_chain_on_a_line_is_placed_with_every_pair_adjacent() {
        let dev = Device::new(
            "l",
            8,
            &lattice::line(8),
            NativeSet::rz_sx_x_cx(),
            Calibration::default(),
        );
        let h = chain(6);
        let w = interaction_weights(&h, false);
        let comp: Vec<u32> = (0..8).collect();
        let mut l = greedy_layout(&w, 6, &comp, &dev, false);
        anneal(&w, &mut l, &comp, &dev, 1);
        // Optimal cost: five unit-weight pairs at distance 1.
        assert_eq!(layout_cost(&w, &l, &dev), 5.0);
        for q in 0..5 {
            assert!(dev.coupled(l[q], l[q + 1]), "{l:?}");
        }
    }

    #[test]
    fn weights_sum_to_the_ladder_lengths() {
        let mut h = PauliSum::new(4);
        h.add(
            PauliString::from_factors(&[(0, Pauli::X), (1, Pauli::Y), (3, Pauli::Z)]).1,
            0.5,
        );
        let w = interaction_weights(&h, true);
        let n = 5;
        let pairs: f64 = (0..4)
            .flat_map(|i| (i + 1..4).map(move |j| (i, j)))
            .map(|(i, j)| w[i * n + j])
            .sum();
        assert!((pairs - 2.0).abs() < 1e-12); // w − 1 = 2 CNOTs
        let anc: f64 = (0..4).map(|i| w[i * n + 4]).sum();
        assert!((anc - 1.0).abs() < 1e-12); // one controlled rz
    }
}
