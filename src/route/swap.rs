//! SWAP insertion: make every two-qubit gate act on a coupled pair.
//!
//! In: a logical circuit, an initial layout (logical qubit → physical qubit) and a [`Device`].
//! Out: a physical circuit over `dev.num_qubits` qubits in which every two-qubit gate, `swap`
//! included, acts on a coupled pair; the final layout; the number of SWAPs inserted.
//! Invariant: running the output on the initial placement of a logical state gives the logical
//! circuit's output placed by the final layout (free physical qubits only ever hold |0⟩ moved
//! around by SWAPs). Measurements are terminal on their qubit, so they are emitted at the end, on
//! the physical qubit that holds the measured logical qubit then.
//!
//! ## The method
//!
//! A lookahead heuristic in the family introduced by Li, Ding & Xie, "Tackling the Qubit Mapping
//! Problem for NISQ-Era Quantum Devices", ASPLOS 2019 (the SABRE paper), in our own words:
//!
//! - the *front* is the set of two-qubit gates whose predecessors have all run but whose qubits
//!   are not coupled under the current layout (one-qubit gates and coupled gates run at once);
//! - the *window* holds the next `extended_size` two-qubit gates that follow the front on its
//!   qubits;
//! - each candidate SWAP on a coupling that touches a front qubit is scored by
//!   `max(decay(a), decay(b)) · ( mean_front d + w · mean_window d )`, with `d` the hop distance
//!   between a gate's two qubits after the SWAP; the lowest score wins, ties broken by a seeded
//!   random draw (so the pass is deterministic for a given seed);
//! - optionally, a *hub* qubit (the Hadamard-test ancilla, which meets every rotation) has the
//!   score of its own SWAPs multiplied by a factor below 1, so the ancilla travels to the terms
//!   rather than the terms being dragged out of their places to the ancilla;
//! - `decay` grows by `decay_step` on both qubits of each chosen SWAP and is reset after
//!   `decay_reset` SWAPs or whenever a two-qubit gate runs; it steers successive SWAPs onto
//!   different qubits, so they can run in parallel rather than serialising on one qubit;
//! - a guard: if no two-qubit gate has run for a number of SWAPs that exceeds the device size,
//!   the closest front gate is routed along a shortest path, which always makes progress.
//!
//! Cost: each SWAP scores O(front · degree) candidates over O(front + window) gates.
//! Bidirectional refinement of the initial layout (route the reversed circuit from the final
//! layout; its end is a layout fitted to the circuit's beginning) lives in `route::mod`.

use crate::circuit::{Circuit, Gate, Qubit};
use crate::device::Device;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::cmp::Reverse;
use std::collections::{BTreeSet, BinaryHeap};

/// Parameters of the heuristic (defaults from the paper: window 20, weight 0.5, decay 0.001
/// reset every 5 SWAPs).
#[derive(Clone, Debug)]
pub struct SwapParams {
    pub extended_size: usize,
    pub extended_weight: f64,
    pub decay_step: f64,
    pub decay_reset: usize,
    pub seed: u64,
    /// SWAPs without a two-qubit gate running before the shortest-path guard steps in
    /// (`None`: the device size, at least 8).
    pub stall_limit: Option<usize>,
    /// A logical qubit whose own moves are preferred (score × `hub_factor`).
    pub hub: Option<u32>,
    pub hub_factor: f64,
}

/// The routed circuit (still with `swap` gates), the final layout and the SWAP count.
#[derive(Clone, Debug)]
pub struct SwapOutcome {
    pub circuit: Circuit,
    /// `final_layout[l]` = physical qubit holding logical qubit `l` at the end.
    pub final_layout: Vec<u32>,
    pub swaps: usize,
}

/// A full permutation logical ↔ physical: logical ids past the circuit's qubits are free slots.
struct Layout {
    l2p: Vec<u32>,
    p2l: Vec<u32>,
}

impl Layout {
    fn new(initial: &[u32], n_phys: usize) -> Layout {
        let mut p2l = vec![u32::MAX; n_phys];
        for (l, &p) in initial.iter().enumerate() {
            p2l[p as usize] = l as u32;
        }
        let mut l2p = initial.to_vec();
        for (p, slot) in p2l.iter_mut().enumerate() {
            if *slot == u32::MAX {
                *slot = l2p.len() as u32;
                l2p.push(p as u32);
            }
        }
        Layout { l2p, p2l }
    }

    fn swap_physical(&mut self, a: u32, b: u32) {
        let (la, lb) = (self.p2l[a as usize], self.p2l[b as usize]);
        self.p2l.swap(a as usize, b as usize);
        self.l2p[la as usize] = b;
        self.l2p[lb as usize] = a;
    }
}

struct Router<'a> {
    dev: &'a Device,
    p: &'a SwapParams,
    gates: Vec<Gate>,
    qlist: Vec<Vec<usize>>,
    head: Vec<usize>,
    done: Vec<bool>,
    front: BTreeSet<usize>,
    heap: BinaryHeap<Reverse<usize>>,
    layout: Layout,
    decay: Vec<f64>,
    out: Vec<Gate>,
    swaps: usize,
    rng: ChaCha8Rng,
}

impl Router<'_> {
    fn ready(&self, g: usize) -> bool {
        self.gates[g]
            .qubits()
            .iter()
            .all(|&q| self.qlist[q as usize].get(self.head[q as usize]) == Some(&g))
    }

    fn pair(&self, g: usize) -> (u32, u32) {
        let qs = self.gates[g].qubits();
        (
            self.layout.l2p[qs[0] as usize],
            self.layout.l2p[qs[1] as usize],
        )
    }

    /// Runs every gate that can run; returns true if a two-qubit gate ran.
    fn drain(&mut self) -> bool {
        let mut ran_two = false;
        while let Some(Reverse(g)) = self.heap.pop() {
            if self.done[g] || self.front.contains(&g) || !self.ready(g) {
                continue;
            }
            let gate = self.gates[g];
            if gate.is_two_qubit() {
                let (a, b) = self.pair(g);
                if !self.dev.coupled(a, b) {
                    self.front.insert(g);
                    continue;
                }
                ran_two = true;
            }
            let l2p = &self.layout.l2p;
            self.out.push(gate.map_qubits(|q| l2p[q as usize]));
            self.done[g] = true;
            for q in gate.qubits() {
                let q = q as usize;
                self.head[q] += 1;
                if let Some(&next) = self.qlist[q].get(self.head[q]) {
                    self.heap.push(Reverse(next));
                }
            }
        }
        ran_two
    }

    /// Moves front gates that became coupled back to the ready heap.
    fn release_front(&mut self) {
        let now: Vec<usize> = self
            .front
            .iter()
            .copied()
            .filter(|&g| {
                let (a, b) = self.pair(g);
                self.dev.coupled(a, b)
            })
            .collect();
        for g in now {
            self.front.remove(&g);
            self.heap.push(Reverse(g));
        }
    }

    fn apply_swap(&mut self, a: u32, b: u32) {
        self.out.push(Gate::Swap(a, b));
        self.layout.swap_physical(a, b);
        self.swaps += 1;
    }

    /// The window: up to `extended_size` not-yet-run two-qubit gates that follow the front on
    /// its qubits, earliest first.
    fn window(&self) -> Vec<usize> {
        let mut set = BTreeSet::new();
        for &g in &self.front {
            for q in self.gates[g].qubits() {
                let list = &self.qlist[q as usize];
                let mut taken = 0;
                for &i in &list[self.head[q as usize] + 1..] {
                    if taken >= self.p.extended_size {
                        break;
                    }
                    if self.gates[i].is_two_qubit() {
                        set.insert(i);
                        taken += 1;
                    }
                }
            }
        }
        set.into_iter().take(self.p.extended_size).collect()
    }

    fn choose_swap(&mut self) -> (u32, u32) {
        let front: Vec<(u32, u32)> = self
            .front
            .iter()
            .map(|&g| {
                let qs = self.gates[g].qubits();
                (qs[0], qs[1])
            })
            .collect();
        let window: Vec<(u32, u32)> = self
            .window()
            .into_iter()
            .map(|g| {
                let qs = self.gates[g].qubits();
                (qs[0], qs[1])
            })
            .collect();
        let mut candidates = BTreeSet::new();
        for &(x, y) in &front {
            for l in [x, y] {
                let p = self.layout.l2p[l as usize];
                for nb in self.dev.neighbours(p) {
                    candidates.insert((p.min(nb), p.max(nb)));
                }
            }
        }
        let l2p = &self.layout.l2p;
        let dev = self.dev;
        let mean = |set: &[(u32, u32)], a: u32, b: u32| -> f64 {
            if set.is_empty() {
                return 0.0;
            }
            let m = |p: u32| {
                if p == a {
                    b
                } else if p == b {
                    a
                } else {
                    p
                }
            };
            let total: f64 = set
                .iter()
                .map(|&(x, y)| dev.distance(m(l2p[x as usize]), m(l2p[y as usize])) as f64)
                .sum();
            total / set.len() as f64
        };
        let mut best = f64::INFINITY;
        let mut ties: Vec<(u32, u32)> = Vec::new();
        for &(a, b) in &candidates {
            let mut h = self.decay[a as usize].max(self.decay[b as usize])
                * (mean(&front, a, b) + self.p.extended_weight * mean(&window, a, b));
            if let Some(hub) = self.p.hub {
                let hp = self.layout.l2p[hub as usize];
                if a == hp || b == hp {
                    h *= self.p.hub_factor;
                }
            }
            if h < best - 1e-12 {
                best = h;
                ties.clear();
                ties.push((a, b));
            } else if (h - best).abs() <= 1e-12 {
                ties.push((a, b));
            }
        }
        ties[self.rng.gen_range(0..ties.len())]
    }

    /// Routes the closest front gate along a shortest path (always makes progress).
    fn force_progress(&mut self) {
        let g = *self
            .front
            .iter()
            .min_by_key(|&&g| {
                let (a, b) = self.pair(g);
                (self.dev.distance(a, b), g)
            })
            .expect("front is not empty");
        let (mut cur, target) = self.pair(g);
        while self.dev.distance(cur, target) > 1 {
            let d = self.dev.distance(cur, target);
            let next = self
                .dev
                .neighbours(cur)
                .into_iter()
                .find(|&nb| self.dev.distance(nb, target) == d - 1)
                .expect("a shortest path exists inside a component");
            self.apply_swap(cur, next);
            cur = next;
        }
    }
}

/// Inserts SWAPs so that every two-qubit gate of `c` acts on a coupled pair of `dev`.
///
/// `initial[l]` is the physical qubit of logical qubit `l` (`initial.len() ≥ c.num_qubits`, all
/// distinct, and every pair of them connected in the coupling graph).
pub fn insert_swaps(c: &Circuit, initial: &[u32], dev: &Device, p: &SwapParams) -> SwapOutcome {
    let n_log = c.num_qubits;
    let n_phys = dev.num_qubits;
    let gates: Vec<Gate> = c.unitary_gates().copied().collect();
    let mut qlist = vec![Vec::new(); n_log];
    for (i, g) in gates.iter().enumerate() {
        for q in g.qubits() {
            qlist[q as usize].push(i);
        }
    }
    let mut heap = BinaryHeap::new();
    for list in &qlist {
        if let Some(&g) = list.first() {
            heap.push(Reverse(g));
        }
    }
    let mut r = Router {
        dev,
        p,
        done: vec![false; gates.len()],
        gates,
        qlist,
        head: vec![0; n_log],
        front: BTreeSet::new(),
        heap,
        layout: Layout::new(&initial[..n_log], n_phys),
        decay: vec![1.0; n_phys],
        out: Vec::new(),
        swaps: 0,
        rng: ChaCha8Rng::seed_from_u64(p.seed),
    };
    let guard = p.stall_limit.unwrap_or(n_phys.max(8));
    let mut since_progress = 0usize;
    let mut since_reset = 0usize;
    r.drain();
    while !r.front.is_empty() {
        if since_progress >= guard {
            r.force_progress();
            since_progress = 0;
        } else {
            let (a, b) = r.choose_swap();
            r.apply_swap(a, b);
            r.decay[a as usize] += p.decay_step;
            r.decay[b as usize] += p.decay_step;
            since_progress += 1;
            since_reset += 1;
            if since_reset >= p.decay_reset {
                r.decay.iter_mut().for_each(|d| *d = 1.0);
                since_reset = 0;
            }
        }
        r.release_front();
        if r.drain() {
            since_progress = 0;
            since_reset = 0;
            r.decay.iter_mut().for_each(|d| *d = 1.0);
        }
    }
    debug_assert!(r.done.iter().all(|&d| d), "every gate was routed");
    let final_layout: Vec<u32> = r.layout.l2p[..n_log].to_vec();
    let mut out = Circuit {
        num_qubits: n_phys,
        num_clbits: c.num_clbits,
        gates: r.out,
        global_phase: c.global_phase,
    };
    for (q, bit) in c.measurements() {
        out.push(Gate::Measure(final_layout[q as usize], bit));
    }
    SwapOutcome {
        circuit: out,
        final_layout,
        swaps: r.swaps,
    }
}

/// The circuit's unitary gates in reverse order, measurements dropped: the input of the backward
/// pass of layout refinement (only the order of the two-qubit gates matters there).
pub fn reversed(c: &Circuit) -> Circuit {
    Circuit {
        gates: c
            .gates
            .iter()
            .rev()
            .filter(|g| !g.is_measure())
            .copied()
            .collect(),
        num_clbits: 0,
        ..c.clone()
    }
}

/// Convenience: the qubits a gate list touches, ascending.
pub fn touched(gates: &[Gate]) -> Vec<Qubit> {
    let set: BTreeSet<Qubit> = gates.iter().flat_map(|g| g.qubits()).collect();
    set.into_iter().collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::device::{lattice, Calibration, NativeSet};
    use crate::route::{routing_error, Routed};

    fn params(stall_limit: Option<usize>) -> SwapParams {
        SwapParams {
            extended_size: 20,
            extended_weight: 0.5,
            decay_step: 0.001,
            decay_reset: 5,
            seed: 3,
            stall_limit,
            hub: None,
            hub_factor: 1.0,
        }
    }

    fn random_circuit(n: u32, gates: usize, seed: u64) -> Circuit {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let mut c = Circuit::new(n as usize, n as usize);
        for _ in 0..gates {
            let a = rng.gen_range(0..n);
            let b = (a + rng.gen_range(1..n)) % n;
            match rng.gen_range(0..4) {
                0 => c.push(Gate::H(a)),
                1 => c.push(Gate::Rz(a, rng.gen_range(-3.0..3.0))),
                2 => c.push(Gate::Cz(a, b)),
                _ => c.push(Gate::Cx(a, b)),
            }
        }
        for q in 0..n {
            c.push(Gate::Measure(q, q));
        }
        c
    }

    #[test]
    fn the_shortest_path_guard_alone_also_routes_correctly() {
        // With a stall limit of 0 every blocked front is resolved by the guard.
        let dev = Device::new(
            "grid",
            9,
            &lattice::grid(3, 3),
            NativeSet::rz_sx_x_cx(),
            Calibration::default(),
        );
        for seed in 0..10 {
            let c = random_circuit(5, 40, seed);
            let initial = [4, 0, 8, 2, 6];
            for limit in [Some(0), None] {
                let out = insert_swaps(&c, &initial, &dev, &params(limit));
                let coupled = |a: u32, b: u32| dev.coupled(a, b);
                crate::circuit::verify::verify_ir(
                    &out.circuit,
                    &crate::circuit::verify::Rules {
                        coupled: Some(&coupled),
                        native: None,
                    },
                )
                .unwrap();
                let routed = Routed {
                    circuit: out.circuit,
                    initial_layout: initial.to_vec(),
                    final_layout: out.final_layout,
                    swaps: out.swaps,
                };
                assert!(routing_error(&c, &routed).unwrap() < 1e-12);
            }
        }
    }
}
