//! In-order SWAP insertion with a travelling hub: the router for swept steps.
//!
//! In: a logical circuit, an initial layout, a [`Device`] and the hub (the Hadamard-test
//! ancilla, if any). Out: a [`SwapOutcome`] like [`super::swap::insert_swaps`]: every two-qubit
//! gate on a coupled pair, the final layout and the SWAP count. Invariant: the gates run in
//! exactly their input order (only SWAPs are inserted), so the output equals the input under
//! the initial and final layouts by construction; measurements, terminal, are emitted at the
//! end on the physical qubit that then holds the measured qubit.
//!
//! ## Why another router
//!
//! A swept step (`route::sweep`) already has the order the ancilla should follow: it meets the
//! rotations one after the other along a walk. The lookahead router reorders freely and scores
//! SWAPs by mean distances over a window; on a chain it moves the ancilla back and forth (it
//! sits between two qubits whose ZZ term comes next, and half of the time the router pushes it
//! the wrong way: 24 SWAPs for one Strang step of a 12-site Ising chain where 12 suffice).
//! Here a blocked gate is made adjacent one SWAP at a time, each SWAP chosen among those that
//! bring its two qubits one hop closer (along any shortest path, from either end) by the
//! distances of the next [`LOOKAHEAD`] two-qubit gates, nearer ones weighted more
//! (`1/(1+j)`); ties prefer moving the hub, then the lower sites. When the ancilla sits between
//! two qubits that must meet, this pushes it on towards its next partners, which is the
//! hand-made sweep. `route::plan_target` scores both routers and keeps the cheaper.
//!
//! Cost: per SWAP, the candidate moves (at most twice the device degree) times the lookahead:
//! linear in gates plus SWAPs.

use super::swap::{Adjacency, SwapOutcome};
use crate::circuit::{Circuit, Gate};
use crate::device::Device;

/// A candidate SWAP's rank: lookahead score, then "does not move the hub", then its sites.
type MoveKey = (f64, bool, u32, u32);

/// Upcoming two-qubit gates that score each SWAP.
pub const LOOKAHEAD: usize = 12;

/// Routes `c` from `initial` in gate order (see the module essay).
pub fn insert_swaps_in_order(
    c: &Circuit,
    initial: &[u32],
    dev: &Device,
    hub: Option<u32>,
) -> SwapOutcome {
    let n_log = c.num_qubits;
    let n_phys = dev.num_qubits;
    let adj = Adjacency::new(dev);
    const FREE: u32 = u32::MAX;
    let mut l2p: Vec<u32> = initial[..n_log].to_vec();
    let mut p2l = vec![FREE; n_phys];
    for (l, &p) in l2p.iter().enumerate() {
        p2l[p as usize] = l as u32;
    }
    let gates: Vec<Gate> = c.unitary_gates().copied().collect();
    let pairs: Vec<(usize, u32, u32)> = gates
        .iter()
        .enumerate()
        .filter_map(|(i, g)| match *g {
            Gate::Cx(a, b) | Gate::Cz(a, b) | Gate::Swap(a, b) => Some((i, a, b)),
            _ => None,
        })
        .collect();
    let mut out = Vec::with_capacity(gates.len() + gates.len() / 4);
    let mut swaps = 0usize;
    let mut next_pair = 0usize;
    let do_swap = |a: u32, b: u32, l2p: &mut Vec<u32>, p2l: &mut Vec<u32>| {
        let (la, lb) = (p2l[a as usize], p2l[b as usize]);
        p2l.swap(a as usize, b as usize);
        if la != FREE {
            l2p[la as usize] = b;
        }
        if lb != FREE {
            l2p[lb as usize] = a;
        }
    };
    for (i, g) in gates.iter().enumerate() {
        if let Gate::Cx(x, y) | Gate::Cz(x, y) | Gate::Swap(x, y) = *g {
            while next_pair < pairs.len() && pairs[next_pair].0 < i {
                next_pair += 1;
            }
            loop {
                let (pa, pb) = (l2p[x as usize], l2p[y as usize]);
                let d = dev.distance(pa, pb);
                if d <= 1 {
                    break;
                }
                // Moves that bring the pair one hop closer, from either end.
                let mut best: Option<(MoveKey, (u32, u32))> = None;
                for (from, to) in [(pa, pb), (pb, pa)] {
                    for &(nb, _) in adj.of(from) {
                        if dev.distance(nb, to) + 1 != d {
                            continue;
                        }
                        do_swap(from, nb, &mut l2p, &mut p2l);
                        let mut score = 0.0;
                        for (j, &(_, a, b)) in
                            pairs[next_pair + 1..].iter().take(LOOKAHEAD).enumerate()
                        {
                            let dist = dev.distance(l2p[a as usize], l2p[b as usize]);
                            score += dist.saturating_sub(1) as f64 / (1.0 + j as f64);
                        }
                        do_swap(from, nb, &mut l2p, &mut p2l);
                        let moves_hub = hub.is_some_and(|h| {
                            let hp = l2p[h as usize];
                            hp == from || hp == nb
                        });
                        let key = (score, !moves_hub, from.min(nb), from.max(nb));
                        if best.as_ref().is_none_or(|(k, _)| {
                            key.0 < k.0 - 1e-12
                                || (key.0 <= k.0 + 1e-12 && (key.1, key.2, key.3) < (k.1, k.2, k.3))
                        }) {
                            best = Some((key, (from, nb)));
                        }
                    }
                }
                let (_, (a, b)) = best.expect("a shortest path exists inside a component");
                do_swap(a, b, &mut l2p, &mut p2l);
                out.push(Gate::Swap(a.min(b), a.max(b)));
                swaps += 1;
            }
        }
        out.push(g.map_qubits(|q| l2p[q as usize]));
    }
    let mut circuit = Circuit {
        num_qubits: n_phys,
        num_clbits: c.num_clbits,
        gates: out,
        global_phase: c.global_phase,
    };
    for (q, bit) in c.measurements() {
        circuit.push(Gate::Measure(l2p[q as usize], bit));
    }
    SwapOutcome {
        circuit,
        final_layout: l2p,
        swaps,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::device::{lattice, Calibration, NativeSet};
    use crate::route::check::placed_error;
    use rand::{Rng, SeedableRng};

    #[test]
    fn in_order_routing_keeps_the_circuit_on_random_devices() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(9);
        for links in [
            lattice::grid(3, 3),
            lattice::line(9),
            lattice::brickwall(3, 3),
        ] {
            let dev = Device::new(
                "d",
                9,
                &links,
                NativeSet::rz_sx_x_cx(),
                Calibration::default(),
            );
            for _ in 0..5 {
                let mut c = Circuit::new(5, 5);
                for _ in 0..30 {
                    let a = rng.gen_range(0..5);
                    let b = (a + rng.gen_range(1..5)) % 5;
                    match rng.gen_range(0..3) {
                        0 => c.push(Gate::H(a)),
                        1 => c.push(Gate::Rz(b, rng.gen_range(-2.0..2.0))),
                        _ => c.push(Gate::Cx(a, b)),
                    }
                }
                for q in 0..5 {
                    c.push(Gate::Measure(q, q));
                }
                let initial = [4, 0, 8, 2, 6];
                let out = insert_swaps_in_order(&c, &initial, &dev, Some(4));
                for g in &out.circuit.gates {
                    if g.is_two_qubit() {
                        let q = g.qubits();
                        assert!(dev.coupled(q[0], q[1]));
                    }
                }
                assert!(
                    placed_error(&c, &out.circuit, &initial, &out.final_layout).unwrap() < 1e-12
                );
            }
        }
    }
}
