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
//!   score of its own SWAPs multiplied by a factor below 1 when they lower the bracket above, so
//!   the ancilla travels to the terms rather than the terms being dragged out of their places
//!   to the ancilla. Only SWAPs that improve get the factor: an earlier version gave it to every
//!   ancilla SWAP, and on a large device (mean distances near 10, so 10% of the score outweighs
//!   any single improvement) useless ancilla moves won and the router cycled until the guard
//!   below stepped in (500,000 SWAPs instead of 40,000 for one step of a 1,000-term Hamiltonian
//!   on 127 qubits). With the condition every preferred move strictly lowers the bracket, so
//!   they cannot cycle while the front stands still;
//! - `decay` grows by `decay_step` on both qubits of each chosen SWAP and is reset after
//!   `decay_reset` SWAPs or whenever a two-qubit gate runs; it steers successive SWAPs onto
//!   different qubits, so they can run in parallel rather than serialising on one qubit;
//! - a guard: if no two-qubit gate has run for a number of SWAPs that exceeds the device size,
//!   the closest front gate is routed along a shortest path, which always makes progress.
//!
//! ## Bookkeeping and cost
//!
//! Nothing is rebuilt per SWAP. A qubit belongs to at most one front gate (a front gate is the
//! next gate on both its qubits), so the front is a sorted vector plus a per-qubit index, and
//! after a SWAP only the front gates on its two qubits can have become coupled. Each qubit
//! keeps the list of its two-qubit gates and a cursor to the first one not yet run; the window
//! is the `extended_size` smallest gate indices past those cursors, taken by a k-way merge over
//! the front qubits' lists (the same set the definition above names, without scanning further).
//! A candidate's score changes only through the front and window gates with an end on one of
//! its two sites, so the sums are computed once per SWAP and each candidate adds the change of
//! the gates incident to its sites (a per-site incidence list). Decay is reset by bumping an
//! epoch, not by clearing an array. Candidates are deduplicated by edge stamps, in the order
//! the front meets them.
//!
//! Per SWAP this costs `O(F log F + W + F·δ)` for `F` front gates (at most half the logical
//! qubits), window size `W = extended_size` and device degree `δ`; no step depends on the
//! length of the circuit, so routing is linear in gates plus SWAPs. (The previous version
//! rebuilt ordered sets of window gates and candidates for every SWAP and scored every
//! candidate over the whole front and window: `O(F·δ·(F + W))` with allocator churn; on a
//! 100-qubit, 1,000-term Hadamard test on a 127-qubit heavy hexagon that was most of the
//! compile time.)
//!
//! ## Commuting gates run ahead
//!
//! The front above holds the next gate on each qubit *in the input order*. Two gates that
//! commute may run in either order, and the product formula's networks are full of such
//! pairs: CNOTs that share a control, or a target, and rotations about the axis a CNOT leaves
//! alone on that qubit. With `commute_ahead = w > 0`, whenever the front is blocked the router
//! also looks at the next `w` gates on each qubit of each blocked front gate, and runs any
//! two-qubit gate among them that is coupled now and commutes, on both its qubits, with every
//! gate still waiting before it there. The test is by *role*: on one qubit a gate is
//! `Z`-type (a CNOT's control, a `cz`, a `z`-axis rotation or phase) or `X`-type (a CNOT's
//! target, an `x`-axis rotation), and two gates whose roles agree on every qubit they share
//! commute (each is a sum of terms `P ⊗ A` with `P` diagonal in that qubit's basis). The
//! output is then the input with some gates moved earlier past gates they commute with, so
//! it is the same operator (the argument for traces of a partially commutative monoid
//! already cited in `route::sweep`). A gate that ran ahead stays in its qubits' lists and is
//! passed over when the heads reach it. This is the commutation-aware front of routing by
//! a commutation DAG (in the spirit of Itoko, Raymond, Imamichi & Matsuo, "Optimization of
//! quantum circuit mapping using gate transformation and commutation", Integration 70
//! (2020); cited from memory), restricted to gates already coupled, so it never adds a SWAP
//! itself; it changes which gates the lookahead sees, so a routing can still come out longer,
//! and the layout search routes each candidate both ways and keeps the one with fewer SWAPs
//! (`route::plan_target`). Measured on `benches/fewer_gates.rs` (quick, level 3) with the
//! run-ahead always on, before the search compared both: H4 on a 3×3 grid 2612 → 2336
//! two-qubit gates and LiH on the heavy hexagon 18716 → 17203, but the dense sum on the heavy
//! hexagon 6912 → 8683.
//!
//! Bidirectional refinement of the initial layout (route the reversed circuit from the final
//! layout; its end is a layout fitted to the circuit's beginning) lives in `route::mod`.

use crate::circuit::{Circuit, Gate, Qubit};
use crate::device::Device;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::cmp::Reverse;
use std::collections::{BTreeSet, BinaryHeap};

const NONE: u32 = u32::MAX;

/// The run-ahead window the layout search tries (`SwapParams::commute_ahead`): pending gates
/// searched past a blocked front gate on each of its qubits. On `benches/fewer_gates.rs` 8 and
/// 16 gave the same routings of H4 on a 3×3 grid (349 SWAPs without, 301 with either).
pub const COMMUTE_AHEAD: usize = 8;

/// Steps of more gates than this are routed without the run-ahead second try (it costs one
/// more routing per candidate of the layout search).
pub const COMMUTE_MAX_GATES: usize = 1 << 16;

/// Nor are steps on more system qubits than this: on utility case 1 of
/// `benches/utility_device.rs` (100 qubits, 10³ strings, a step under 2¹⁵ gates) the second
/// try took the compile from 4.89 s to 6.00 s and changed no count; every benchmark case where
/// it pays has at most 20 qubits.
pub const COMMUTE_MAX_QUBITS: usize = 32;

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
    /// Commuting gates run ahead of a blocked front (see the module essay): how many pending
    /// gates past the front each of its qubits is searched for one; 0 turns it off.
    pub commute_ahead: usize,
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
        let mut p2l = vec![NONE; n_phys];
        for (l, &p) in initial.iter().enumerate() {
            p2l[p as usize] = l as u32;
        }
        let mut l2p = initial.to_vec();
        for (p, slot) in p2l.iter_mut().enumerate() {
            if *slot == NONE {
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

/// The coupling graph as compressed rows: neighbours ascending, each with an edge id.
pub(crate) struct Adjacency {
    first: Vec<u32>,
    /// `(neighbour, edge id)`.
    rows: Vec<(u32, u32)>,
    pub(crate) num_edges: usize,
}

impl Adjacency {
    pub(crate) fn new(dev: &Device) -> Adjacency {
        let links = dev.links();
        let mut rows_of: Vec<Vec<(u32, u32)>> = vec![Vec::new(); dev.num_qubits];
        for (e, &(a, b)) in links.iter().enumerate() {
            rows_of[a as usize].push((b, e as u32));
            rows_of[b as usize].push((a, e as u32));
        }
        let mut first = Vec::with_capacity(dev.num_qubits + 1);
        let mut rows = Vec::with_capacity(2 * links.len());
        for mut r in rows_of {
            r.sort_unstable();
            first.push(rows.len() as u32);
            rows.extend(r);
        }
        first.push(rows.len() as u32);
        Adjacency {
            first,
            rows,
            num_edges: links.len(),
        }
    }

    /// `(neighbour, edge id)` of physical qubit `p`, neighbours ascending.
    pub(crate) fn of(&self, p: u32) -> &[(u32, u32)] {
        &self.rows[self.first[p as usize] as usize..self.first[p as usize + 1] as usize]
    }
}

/// The two qubits of a two-qubit gate.
fn pair_of(g: &Gate) -> (u32, u32) {
    match *g {
        Gate::Cx(a, b) | Gate::Cz(a, b) | Gate::Swap(a, b) => (a, b),
        _ => unreachable!("only two-qubit gates have a pair"),
    }
}

/// One front or window gate while a SWAP is chosen: its physical ends and their distance.
#[derive(Clone, Copy)]
struct Scored {
    a: u32,
    b: u32,
    d: u32,
    window: bool,
}

struct Router<'a> {
    dev: &'a Device,
    adj: Adjacency,
    p: &'a SwapParams,
    gates: Vec<Gate>,
    qlist: Vec<Vec<u32>>,
    head: Vec<u32>,
    /// Per logical qubit: its two-qubit gates, and the position of the first not yet run.
    q2list: Vec<Vec<u32>>,
    head2: Vec<u32>,
    done: Vec<bool>,
    /// Blocked two-qubit gates, ascending.
    front: Vec<u32>,
    /// The front gate on each logical qubit, or `NONE`.
    front_of: Vec<u32>,
    heap: BinaryHeap<Reverse<u32>>,
    /// Gates from this index on wait for the ones before it (a cut, see [`insert_swaps_cut`]).
    barrier: u32,
    deferred: Vec<u32>,
    done_count: usize,
    layout: Layout,
    decay: Vec<f64>,
    decay_epoch: Vec<u32>,
    epoch: u32,
    out: Vec<Gate>,
    swaps: usize,
    rng: ChaCha8Rng,
    // Scratch space of `choose_swap`, kept between calls.
    merge: BinaryHeap<Reverse<(u32, u32, u32)>>,
    scored: Vec<Scored>,
    inc_head: Vec<u32>,
    inc_next: Vec<u32>,
    touched: Vec<u32>,
    edge_stamp: Vec<u32>,
    stamp: u32,
    candidates: Vec<(u32, u32)>,
    ties: Vec<(u32, u32)>,
}

impl Router<'_> {
    fn ready(&self, g: u32) -> bool {
        self.gates[g as usize]
            .qubits()
            .iter()
            .all(|&q| self.qlist[q as usize].get(self.head[q as usize] as usize) == Some(&g))
    }

    fn pair(&self, g: u32) -> (u32, u32) {
        let (x, y) = pair_of(&self.gates[g as usize]);
        (self.layout.l2p[x as usize], self.layout.l2p[y as usize])
    }

    fn decay_of(&self, p: u32) -> f64 {
        if self.decay_epoch[p as usize] == self.epoch {
            self.decay[p as usize]
        } else {
            1.0
        }
    }

    fn bump_decay(&mut self, p: u32) {
        let v = self.decay_of(p) + self.p.decay_step;
        self.decay[p as usize] = v;
        self.decay_epoch[p as usize] = self.epoch;
    }

    fn reset_decay(&mut self) {
        self.epoch = self.epoch.wrapping_add(1);
        if self.epoch == u32::MAX {
            // Never reached in practice; keeps stale stamps from matching after a wrap.
            self.decay_epoch.iter_mut().for_each(|e| *e = 0);
            self.epoch = 1;
        }
    }

    /// Runs every gate that can run; returns true if a two-qubit gate ran.
    fn drain(&mut self) -> bool {
        let mut ran_two = false;
        while let Some(Reverse(g)) = self.heap.pop() {
            let gi = g as usize;
            if g >= self.barrier {
                self.deferred.push(g);
                continue;
            }
            if self.done[gi] || !self.ready(g) {
                continue;
            }
            let gate = self.gates[gi];
            if gate.is_two_qubit() {
                let (x, y) = pair_of(&gate);
                if self.front_of[x as usize] == g {
                    continue;
                }
                let (a, b) = self.pair(g);
                if !self.dev.coupled(a, b) {
                    let at = self.front.partition_point(|&f| f < g);
                    self.front.insert(at, g);
                    self.front_of[x as usize] = g;
                    self.front_of[y as usize] = g;
                    continue;
                }
                ran_two = true;
                for q in [x, y] {
                    self.head2[q as usize] += 1;
                    self.pass_done2(q as usize);
                }
            }
            let l2p = &self.layout.l2p;
            self.out.push(gate.map_qubits(|q| l2p[q as usize]));
            self.done[gi] = true;
            self.done_count += 1;
            for q in gate.qubits() {
                let q = q as usize;
                self.head[q] += 1;
                // Gates that ran ahead (`run_ahead`) are passed over.
                while let Some(&next) = self.qlist[q].get(self.head[q] as usize) {
                    if !self.done[next as usize] {
                        self.heap.push(Reverse(next));
                        break;
                    }
                    self.head[q] += 1;
                }
            }
        }
        ran_two
    }

    /// Moves the heads of logical qubit `q` past gates that ran ahead, queueing the new head.
    fn pass_done(&mut self, q: u32) {
        let q = q as usize;
        let mut moved = false;
        while let Some(&h) = self.qlist[q].get(self.head[q] as usize) {
            if !self.done[h as usize] {
                break;
            }
            self.head[q] += 1;
            moved = true;
        }
        if moved {
            if let Some(&h) = self.qlist[q].get(self.head[q] as usize) {
                self.heap.push(Reverse(h));
            }
        }
        self.pass_done2(q);
    }

    /// Moves `head2[q]` past two-qubit gates that ran ahead.
    fn pass_done2(&mut self, q: usize) {
        while self.q2list[q]
            .get(self.head2[q] as usize)
            .is_some_and(|&h| self.done[h as usize])
        {
            self.head2[q] += 1;
        }
    }

    /// The role of `g` on qubit `q` for commutation: `Some(true)` when `g` is diagonal in `Z`
    /// there (a CNOT's control, either qubit of a `cz`, a `z`-axis rotation), `Some(false)`
    /// when it is diagonal in `X` there (a CNOT's target, an `x`-axis rotation), else `None`.
    fn role(g: &Gate, q: u32) -> Option<bool> {
        match *g {
            Gate::Cx(c, _) => Some(c == q),
            Gate::Cz(..) | Gate::Rz(..) | Gate::Z(_) | Gate::S(_) | Gate::Sdg(_) => Some(true),
            Gate::Rx(..) | Gate::X(_) | Gate::Sx(_) | Gate::Sxdg(_) => Some(false),
            _ => None,
        }
    }

    /// Whether `g` (at position `at` in `qlist[q]`) commutes with every gate on `q` that has
    /// not run before it, looking at most `window` gates back from it.
    fn clear_back(&self, g: u32, q: u32, at: usize, window: usize) -> bool {
        let Some(want) = Self::role(&self.gates[g as usize], q) else {
            return false;
        };
        let list = &self.qlist[q as usize];
        let head = self.head[q as usize] as usize;
        if at < head || at - head > window {
            return false;
        }
        list[head..at]
            .iter()
            .all(|&h| self.done[h as usize] || Self::role(&self.gates[h as usize], q) == Some(want))
    }

    /// Runs two-qubit gates that are coupled now and commute with every gate still waiting
    /// before them on both their qubits, found among the `commute_ahead` gates past each
    /// blocked front gate's qubits; returns whether any ran. They leave the heads alone
    /// (`drain` passes over them later), so the front and its lookahead stay as they were.
    fn run_ahead(&mut self) -> bool {
        let window = self.p.commute_ahead;
        if window == 0 {
            return false;
        }
        let mut ran = false;
        for i in 0..self.front.len() {
            let f = self.front[i];
            let (x, y) = pair_of(&self.gates[f as usize]);
            for q in [x, y] {
                let head = self.head[q as usize] as usize;
                let end = (head + 1 + window).min(self.qlist[q as usize].len());
                for at in head + 1..end {
                    let g = self.qlist[q as usize][at];
                    let gate = self.gates[g as usize];
                    if self.done[g as usize] || g >= self.barrier || !gate.is_two_qubit() {
                        continue;
                    }
                    let (gx, gy) = pair_of(&gate);
                    let r = if gx == q { gy } else { gx };
                    let (pa, pb) = self.pair(g);
                    if !self.dev.coupled(pa, pb) || !self.clear_back(g, q, at, window) {
                        continue;
                    }
                    let Ok(at_r) = self.qlist[r as usize].binary_search(&g) else {
                        continue;
                    };
                    if !self.clear_back(g, r, at_r, window) {
                        continue;
                    }
                    let l2p = &self.layout.l2p;
                    self.out.push(gate.map_qubits(|v| l2p[v as usize]));
                    self.done[g as usize] = true;
                    self.done_count += 1;
                    ran = true;
                    // `g` may have been the first waiting gate on `r`: the heads move past it.
                    for v in [q, r] {
                        self.pass_done(v);
                    }
                }
            }
        }
        ran
    }

    /// Moves the front gate on logical qubit `l` back to the ready heap if it became coupled.
    fn release(&mut self, l: u32) {
        let Some(&g) = self.front_of.get(l as usize) else {
            return; // a free slot
        };
        if g == NONE {
            return;
        }
        let (a, b) = self.pair(g);
        if self.dev.coupled(a, b) {
            let (x, y) = pair_of(&self.gates[g as usize]);
            self.front_of[x as usize] = NONE;
            self.front_of[y as usize] = NONE;
            let at = self.front.partition_point(|&f| f < g);
            self.front.remove(at);
            self.heap.push(Reverse(g));
        }
    }

    fn apply_swap(&mut self, a: u32, b: u32) {
        self.out.push(Gate::Swap(a, b));
        self.layout.swap_physical(a, b);
        self.swaps += 1;
        let (la, lb) = (self.layout.p2l[a as usize], self.layout.p2l[b as usize]);
        self.release(la);
        self.release(lb);
    }

    /// Fills `scored` with the front gates, then the window: up to `extended_size` not-yet-run
    /// two-qubit gates that follow the front on its qubits, earliest first.
    fn collect_scored(&mut self) {
        self.scored.clear();
        self.merge.clear();
        for i in 0..self.front.len() {
            let g = self.front[i];
            let (a, b) = self.pair(g);
            self.scored.push(Scored {
                a,
                b,
                d: self.dev.distance(a, b),
                window: false,
            });
            let (x, y) = pair_of(&self.gates[g as usize]);
            for q in [x, y] {
                let pos = self.head2[q as usize] + 1;
                if let Some(&next) = self.q2list[q as usize].get(pos as usize) {
                    self.merge.push(Reverse((next, q, pos)));
                }
            }
        }
        let mut taken = 0;
        let mut last = NONE;
        while taken < self.p.extended_size {
            let Some(Reverse((g, q, pos))) = self.merge.pop() else {
                break;
            };
            if g != last && !self.done[g as usize] {
                last = g;
                taken += 1;
                let (a, b) = self.pair(g);
                self.scored.push(Scored {
                    a,
                    b,
                    d: self.dev.distance(a, b),
                    window: true,
                });
            }
            if let Some(&next) = self.q2list[q as usize].get(pos as usize + 1) {
                self.merge.push(Reverse((next, q, pos + 1)));
            }
        }
    }

    fn choose_swap(&mut self) -> (u32, u32) {
        self.collect_scored();
        let (mut sum_f, mut sum_w, mut n_f, mut n_w) = (0i64, 0i64, 0usize, 0usize);
        // Incidence lists: entry 2i + side of `scored[i]` hangs off its site.
        self.inc_next.clear();
        for (i, s) in self.scored.iter().enumerate() {
            if s.window {
                sum_w += s.d as i64;
                n_w += 1;
            } else {
                sum_f += s.d as i64;
                n_f += 1;
            }
            for (side, p) in [s.a, s.b].into_iter().enumerate() {
                let slot = &mut self.inc_head[p as usize];
                if *slot == NONE {
                    self.touched.push(p);
                }
                self.inc_next.push(*slot);
                *slot = (2 * i + side) as u32;
            }
        }
        // Candidates: couplings at a front site, in the order the front meets them.
        self.stamp = self.stamp.wrapping_add(1);
        if self.stamp == 0 {
            self.edge_stamp.iter_mut().for_each(|s| *s = 0);
            self.stamp = 1;
        }
        self.candidates.clear();
        for s in &self.scored[..n_f] {
            for p in [s.a, s.b] {
                for &(nb, e) in self.adj.of(p) {
                    if self.edge_stamp[e as usize] != self.stamp {
                        self.edge_stamp[e as usize] = self.stamp;
                        self.candidates.push((p.min(nb), p.max(nb)));
                    }
                }
            }
        }
        let dev = self.dev;
        // Change of the (front, window) distance sums if the qubits on sites a and b swap.
        let delta = |a: u32, b: u32| -> (i64, i64) {
            let (mut df, mut dw) = (0i64, 0i64);
            for (from, to) in [(a, b), (b, a)] {
                let mut e = self.inc_head[from as usize];
                while e != NONE {
                    let s = &self.scored[e as usize / 2];
                    let other = if e.is_multiple_of(2) { s.b } else { s.a };
                    if other != to {
                        let change = dev.distance(to, other) as i64 - s.d as i64;
                        if s.window {
                            dw += change;
                        } else {
                            df += change;
                        }
                    }
                    e = self.inc_next[e as usize];
                }
            }
            (df, dw)
        };
        let hub_site = self.p.hub.map(|h| self.layout.l2p[h as usize]);
        let mut best = f64::INFINITY;
        self.ties.clear();
        for &(a, b) in &self.candidates {
            let (df, dw) = delta(a, b);
            let mean = |sum: i64, n: usize| if n == 0 { 0.0 } else { sum as f64 / n as f64 };
            let base = mean(sum_f, n_f) + self.p.extended_weight * mean(sum_w, n_w);
            let change = mean(df, n_f) + self.p.extended_weight * mean(dw, n_w);
            let mut h = self.decay_of(a).max(self.decay_of(b)) * (base + change);
            if change < 0.0 && hub_site.is_some_and(|hp| a == hp || b == hp) {
                h *= self.p.hub_factor;
            }
            if h < best - 1e-12 {
                best = h;
                self.ties.clear();
                self.ties.push((a, b));
            } else if (h - best).abs() <= 1e-12 {
                self.ties.push((a, b));
            }
        }
        for p in self.touched.drain(..) {
            self.inc_head[p as usize] = NONE;
        }
        self.ties[self.rng.gen_range(0..self.ties.len())]
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
                .adj
                .of(cur)
                .iter()
                .map(|&(nb, _)| nb)
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
    insert_swaps_cut(c, initial, dev, p, &[]).0
}

/// Where a cut fell in the routed output: the number of output gates before it, and the layout
/// (logical → physical) there.
#[derive(Clone, Debug, PartialEq)]
pub struct Mark {
    pub at: usize,
    pub layout: Vec<u32>,
}

/// [`insert_swaps`] with *cuts*: ascending indices into `c`'s unitary gates; every gate before a
/// cut runs (with its SWAPs) before any gate after it, so the output splits at the returned
/// [`Mark`]s into circuits that each implement their segment of `c` between the layouts there.
/// The lookahead window still sees past a cut, so routing a segment prepares for the next.
pub fn insert_swaps_cut(
    c: &Circuit,
    initial: &[u32],
    dev: &Device,
    p: &SwapParams,
    cuts: &[usize],
) -> (SwapOutcome, Vec<Mark>) {
    let n_log = c.num_qubits;
    let n_phys = dev.num_qubits;
    let gates: Vec<Gate> = c.unitary_gates().copied().collect();
    let mut qlist = vec![Vec::new(); n_log];
    let mut q2list = vec![Vec::new(); n_log];
    for (i, g) in gates.iter().enumerate() {
        let two = g.is_two_qubit();
        for q in g.qubits() {
            qlist[q as usize].push(i as u32);
            if two {
                q2list[q as usize].push(i as u32);
            }
        }
    }
    let mut heap = BinaryHeap::new();
    for list in &qlist {
        if let Some(&g) = list.first() {
            heap.push(Reverse(g));
        }
    }
    let adj = Adjacency::new(dev);
    let num_edges = adj.num_edges;
    let mut r = Router {
        dev,
        adj,
        p,
        done: vec![false; gates.len()],
        gates,
        qlist,
        head: vec![0; n_log],
        q2list,
        head2: vec![0; n_log],
        front: Vec::new(),
        front_of: vec![NONE; n_log],
        heap,
        barrier: cuts.first().map_or(u32::MAX, |&c| c as u32),
        deferred: Vec::new(),
        done_count: 0,
        layout: Layout::new(&initial[..n_log], n_phys),
        decay: vec![1.0; n_phys],
        decay_epoch: vec![0; n_phys],
        epoch: 1,
        out: Vec::with_capacity(c.gates.len()),
        swaps: 0,
        rng: ChaCha8Rng::seed_from_u64(p.seed),
        merge: BinaryHeap::new(),
        scored: Vec::new(),
        inc_head: vec![NONE; n_phys],
        inc_next: Vec::new(),
        touched: Vec::new(),
        edge_stamp: vec![0; num_edges],
        stamp: 0,
        candidates: Vec::new(),
        ties: Vec::new(),
    };
    let guard = p.stall_limit.unwrap_or(n_phys.max(8));
    let mut since_progress = 0usize;
    let mut since_reset = 0usize;
    let mut marks = Vec::with_capacity(cuts.len());
    r.drain();
    while r.run_ahead() {
        r.drain();
    }
    loop {
        while r.front.is_empty() && marks.len() < cuts.len() && r.done_count == cuts[marks.len()] {
            marks.push(Mark {
                at: r.out.len(),
                layout: r.layout.l2p[..n_log].to_vec(),
            });
            r.barrier = cuts.get(marks.len()).map_or(u32::MAX, |&c| c as u32);
            let waiting = std::mem::take(&mut r.deferred);
            r.heap.extend(waiting.into_iter().map(Reverse));
            r.drain();
            since_progress = 0;
            since_reset = 0;
            r.reset_decay();
        }
        if r.front.is_empty() {
            break;
        }
        if since_progress >= guard {
            r.force_progress();
            since_progress = 0;
        } else {
            let (a, b) = r.choose_swap();
            r.apply_swap(a, b);
            r.bump_decay(a);
            r.bump_decay(b);
            since_progress += 1;
            since_reset += 1;
            if since_reset >= p.decay_reset {
                r.reset_decay();
                since_reset = 0;
            }
        }
        let mut progress = r.drain();
        while r.run_ahead() {
            progress = true;
            r.drain();
        }
        if progress {
            since_progress = 0;
            since_reset = 0;
            r.reset_decay();
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
    debug_assert_eq!(marks.len(), cuts.len(), "every cut was reached");
    (
        SwapOutcome {
            circuit: out,
            final_layout,
            swaps: r.swaps,
        },
        marks,
    )
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
    use crate::route::check::placed_error;

    /// The IR verifier with `dev`'s coupling rule: every two-qubit gate on a coupled pair.
    fn assert_on_coupled_pairs(c: &Circuit, dev: &Device) {
        let coupled = |a: u32, b: u32| dev.coupled(a, b);
        crate::circuit::verify::verify_ir(
            c,
            &crate::circuit::verify::Rules {
                coupled: Some(&coupled),
                native: None,
            },
        )
        .unwrap();
    }

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
            commute_ahead: 0,
        }
    }

    /// `gates` gates drawn by `pick(rng, a, b)` for random distinct qubits `a`, `b`, then
    /// every qubit measured.
    fn drawn_circuit(
        n: u32,
        gates: usize,
        seed: u64,
        pick: impl Fn(&mut ChaCha8Rng, u32, u32) -> Gate,
    ) -> Circuit {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let mut c = Circuit::new(n as usize, n as usize);
        for _ in 0..gates {
            let a = rng.gen_range(0..n);
            let b = (a + rng.gen_range(1..n)) % n;
            let g = pick(&mut rng, a, b);
            c.push(g);
        }
        for q in 0..n {
            c.push(Gate::Measure(q, q));
        }
        c
    }

    fn random_circuit(n: u32, gates: usize, seed: u64) -> Circuit {
        drawn_circuit(n, gates, seed, |rng, a, b| match rng.gen_range(0..4) {
            0 => Gate::H(a),
            1 => Gate::Rz(a, rng.gen_range(-3.0..3.0)),
            2 => Gate::Cz(a, b),
            _ => Gate::Cx(a, b),
        })
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
                assert_on_coupled_pairs(&out.circuit, &dev);
                assert!(
                    placed_error(&c, &out.circuit, &initial, &out.final_layout).unwrap() < 1e-12
                );
            }
        }
    }

    /// Circuits like a product formula's networks: CNOT fans that share a control or a
    /// target, rotations about the axes they leave alone, and a few Hadamards.
    fn commuting_circuit(n: u32, gates: usize, seed: u64) -> Circuit {
        drawn_circuit(n, gates, seed, |rng, a, b| match rng.gen_range(0..10) {
            0 => Gate::H(a),
            1 => Gate::Rz(a, rng.gen_range(-3.0..3.0)),
            2 => Gate::Rx(a, rng.gen_range(-3.0..3.0)),
            3 => Gate::Cz(a, b),
            _ => Gate::Cx(a, b),
        })
    }

    #[test]
    fn gates_that_run_ahead_keep_the_circuit_and_its_cuts() {
        // Random commuting-rich circuits on random connected devices, routed with the
        // run-ahead window on, with and without cuts: every two-qubit gate on a coupled pair,
        // the placed unitary kept (1e-12), every segment between marks exact on its own, and
        // over the cases fewer SWAPs in all than without the window (the gates it runs are
        // coupled already; what it changes is what the front waits for). When written: all
        // 40 routings changed, 960 SWAPs with the window against 1080 without.
        use crate::device::lattice;
        let mut with = 0usize;
        let mut without = 0usize;
        let mut ran_ahead = 0usize;
        for seed in 0..40u64 {
            let mut rng = ChaCha8Rng::seed_from_u64(1000 + seed);
            let (links, n_phys) = match seed % 4 {
                0 => (lattice::grid(3, 3), 9),
                1 => (lattice::line(8), 8),
                2 => (lattice::ring(10), 10),
                _ => (lattice::brickwall(3, 4), 12),
            };
            let dev = Device::new(
                "d",
                n_phys,
                &links,
                NativeSet::rz_sx_x_cx(),
                Calibration::default(),
            );
            let n = rng.gen_range(4..=6u32.min(n_phys as u32));
            let c = commuting_circuit(n, 60, seed);
            let mut sites: Vec<u32> = (0..n_phys as u32).collect();
            for i in (1..sites.len()).rev() {
                sites.swap(i, rng.gen_range(0..=i));
            }
            let initial = &sites[..n as usize];
            let unitary = c.unitary_gates().count();
            let cuts = [unitary / 3, 2 * unitary / 3];
            let mut p = params(None);
            let plain = insert_swaps(&c, initial, &dev, &p);
            p.commute_ahead = COMMUTE_AHEAD;
            let (out, marks) = insert_swaps_cut(&c, initial, &dev, &p, &cuts);
            assert_on_coupled_pairs(&out.circuit, &dev);
            assert!(
                placed_error(&c, &out.circuit, initial, &out.final_layout).unwrap() < 1e-12,
                "seed {seed}"
            );
            // Each segment between marks implements its own slice of the input.
            let unitary_gates: Vec<Gate> = c.unitary_gates().copied().collect();
            let bounds = [0, cuts[0], cuts[1], unitary];
            let unitary_out = out.circuit.gates.iter().filter(|g| !g.is_measure()).count();
            let at = [0, marks[0].at, marks[1].at, unitary_out];
            let layouts = [
                initial.to_vec(),
                marks[0].layout.clone(),
                marks[1].layout.clone(),
                out.final_layout.clone(),
            ];
            for k in 0..3 {
                let mut logical = Circuit::new(n as usize, 0);
                logical.extend(unitary_gates[bounds[k]..bounds[k + 1]].iter().copied());
                let mut physical = Circuit::new(n_phys, 0);
                physical.extend(out.circuit.gates[at[k]..at[k + 1]].iter().copied());
                let err = placed_error(&logical, &physical, &layouts[k], &layouts[k + 1]).unwrap();
                assert!(err < 1e-12, "seed {seed} segment {k}: {err}");
            }
            let two = |c: &Circuit| c.gates.iter().filter(|g| g.is_two_qubit()).count();
            ran_ahead += (out
                .circuit
                .gates
                .iter()
                .zip(plain.circuit.gates.iter())
                .any(|(a, b)| a != b)) as usize;
            with += out.swaps;
            without += plain.swaps;
            assert_eq!(
                two(&out.circuit) - out.swaps,
                two(&plain.circuit) - plain.swaps
            );
        }
        assert!(ran_ahead > 20, "only {ran_ahead} routings changed");
        assert!(
            with < without,
            "{with} SWAPs with the window, {without} without"
        );
    }
}
