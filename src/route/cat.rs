//! Spreading the control: the Hadamard-test ancilla shared with spare device qubits as a cat
//! state, so that controlled rotations meet *a* control next to them instead of waiting for
//! the one ancilla to travel there.
//!
//! In: one product-formula step (a rotation program), a layout of the system qubits and the
//! ancilla on a [`Device`], and the spare (unused) sites next to them. Out: a layout that also
//! places *control copies* on spare sites (logical qubits `n+1 ..= n+c` after the ancilla `n`),
//! the fan-out tree that prepares them, and the step routed so that every controlled `rz` is
//! controlled by whichever copy is nearest ([`route_step`]). Invariant: on every state in which
//! each copy holds the same computational-basis value as the ancilla and every free site holds
//! |0⟩ (what [`fanout`] prepares after the ancilla's `h`), the routed step acts exactly as the
//! ancilla-controlled step does (global phase included), leaves the copies equal to the
//! ancilla and the free sites at |0⟩; [`unfan`] at the step's final layout then returns the
//! copies to |0⟩, so the ancilla alone carries the interference, as in the usual test.
//!
//! ## The idea
//!
//! After `h` on the ancilla, `cx(ancilla, copy)` along a tree of coupled spare sites gives
//! `(|0⟩|0…0⟩ + |1⟩|1…1⟩)/√2` on the ancilla and its copies (a cat, or GHZ, state); a controlled
//! `U` is `|0⟩⟨0| ⊗ 1 + |1⟩⟨1| ⊗ U`, which only reads the control's computational-basis value,
//! so on that state control by any copy is control by the ancilla. Rotations next to different
//! copies run side by side, and none waits for the ancilla to be swapped over. At the end the
//! same tree, leaves first, clears the copies. This is the fan-out (cat-state) parallelisation
//! of controlled operations (Moore & Nilsson, "Parallel quantum computation and quantum codes",
//! SIAM J. Comput. 31, 799 (2001); Høyer & Špalek, "Quantum fan-out is powerful", Theory of
//! Computing 1, 83 (2005); both cited from memory). Copies are spare sites only: a system qubit
//! holds its own state. The cat costs one CNOT per copy each way, once per circuit, so a
//! campaign of `k` steps pays it once per circuit, not per step.
//!
//! ## Routing with several controls
//!
//! [`route_step`] runs the rotations in any order the non-commuting pairs allow (the partial
//! order of `route::sweep`), each time the ready rotation that is cheapest where the qubits now
//! stand (ties to the program order), and synthesises it on the spot: its ladder along a
//! nearest-neighbour chain ending on the root whose control is cheapest, XX + YY pairs together
//! when that is cheaper ([`crate::synth::pair_rotation`]), every two-qubit gate made adjacent by
//! moving one of its qubits one hop at a time. Each controlled `rz` takes the cheapest of:
//!
//! - a control on a coupled site: `rz(θ/2) cx(t, r) rz(−θ/2) cx(t, r)`, 2 CNOTs;
//! - a *temporary copy* on a chain of free sites from a control: each free site set by a CNOT
//!   from the previous one (it holds |0⟩) and cleared again afterwards, `2 + 2k` CNOTs for `k`
//!   sites;
//! - a *bridge* through any qubit `m` coupled to both: `cx(m, r) cx(t, m) cx(m, r)` takes `r`
//!   to `r ⊕ t` (and `m` to `m ⊕ t`) and is its own inverse, so it stands in for `cx(t, r)`
//!   around the diagonal `rz`: 6 CNOTs, nothing moved;
//! - *moving* the nearest control next to the root: two CNOTs per free site it moves into
//!   (`cx(t, f) cx(f, t)` moves a value into a |0⟩ site), a SWAP per occupied one (counted
//!   with a small surcharge when the decision is made, since the qubit it displaces may be
//!   needed where it stood), then 2.
//!
//! Two controls never trade places: one of them is already the nearer.
//!
//! ## Moving the controls as a front
//!
//! Moving one control into a lattice to meet one rotation displaces a system qubit, and
//! the couplings that qubit had are gone for every rotation after it: on a 2D model with the
//! controls on a spare column, the nearest-control rule soon leaves the lattice torn, and
//! later rotations pay SWAPs for couplings the layout had. With [`Policy::Front`],
//! [`route_step_with`] first runs every ready rotation it can run at its *free cost* (its
//! ladder on coupled pairs, a control beside the root: `2(w − 1) + 2` CNOTs for weight `w`),
//! and when none is left it considers *front moves* before paying the cheapest rotation's own
//! way:
//!
//! - per connected part of the system qubits beside the controls, every control exchanged
//!   with a distinct system neighbour in that part (the column steps into the next column
//!   together, which shifts that column over by one and keeps every coupling but those
//!   across the front itself);
//! - every single exchange of a control with a system neighbour.
//!
//! Each candidate is scored by how many rotations would then run at their free cost, their
//! successors in the partial order included as they are released, per CNOT it costs (3 a
//! SWAP); the best is taken if that is fewer CNOTs per rotation than the extra the cheapest
//! ready rotation would pay on its own, otherwise that rotation runs as with
//! [`Policy::Nearest`]. A SWAP right after a controlled `rz` on the same pair is lowered to 2
//! CNOTs (the lowering, `crate::lower`, merges `cx · swap`); [`Policy::FrontMerged`] charges
//! such an exchange 2, which makes moves cheaper and so more frequent. Neither charge wins
//! everywhere (measured: the merged one is better for the Heisenberg lattice below, worse
//! for the Hubbard model on the grid and the heavy hexagon), so the pipeline routes all three
//! policies and keeps what emits fewer two-qubit gates. The controls need not stay connected:
//! the fan-out runs where they start, and its undoing is routed where the step ends. This is
//! the moving-ancilla (hub) schedule of `route::sweep` with the hub widened to a line of
//! copies; sweeping a line of ancilla copies across a 2D lattice is our own reading of the
//! fan-out literature above. On the benchmark's 4 × 4 Heisenberg model with fields on a 4 × 5
//! grid (one spare column), one controlled Strang step goes from 732 CNOTs (two-qubit depth
//! 598) to 651 (depth 339).
//!
//! ## Choosing the copies
//!
//! [`choose_controls`] grows the control set from the ancilla's site over free sites, one site
//! or a path of two at a time, while the step's estimated cost (each rotation's cheapest root
//! and control as above, on the static layout) falls by more than the CNOTs the new copies cost
//! (2 each: fan-out and its undoing); at most [`MAX_COPIES`] copies, so that `verify`'s
//! statevector check (which simulates every touched qubit) stays within reach. The layouts it
//! starts from are those the ordinary search found and exact embeddings of the interaction
//! graph begun at every site of the chip ([`candidate_layouts`]). `route::plan_and_route_cat_step`
//! routes the most promising ones and the pipeline keeps the cat only when the whole campaign
//! it emits has fewer two-qubit gates than the one without (or as many at a lower summed
//! depth); `compile` then says so in a line and in the cost table's `copies` column.
//!
//! Cost: per rotation, one breadth-first search and one Dijkstra search over the chip plus a
//! scan of the ready rotations; with [`Policy::Front`], per stall, a pass over the ready
//! rotations for each candidate move (at most [`FRONT_MAX_ROTATIONS`] rotations); the choice of copies costs a few thousand static estimates
//! (each linear in the rotations) per starting layout. Bounded by [`MAX_ROTATIONS`] and the
//! caller's size limit (`route::EXTRAS_MAX_UNIT`).

use super::embed;

/// Whether [`route_step`] synthesises hopping pairs together.
///
/// `Paired`: a ready XX and YY rotation on the same two qubits (`synth::hopping_pair`) are
/// synthesised together where that is cheaper; `Single`: every rotation on its own.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Hopping {
    /// XX + YY pairs together where cheaper.
    Paired,
    /// Each rotation on its own.
    Single,
}

impl Hopping {
    /// `Paired` when `pairs` (as `RouteConfig::pairs` asks).
    pub(crate) fn when(pairs: bool) -> Hopping {
        if pairs {
            Hopping::Paired
        } else {
            Hopping::Single
        }
    }
}
/// How [`route_step_with`] meets a rotation that no control stands beside.
///
/// `Nearest`: the rotation's own cheapest way (a control moved next to it, a bridge, a
/// temporary copy; see the module essay). `Front`: first the best *front move* (the controls
/// stepping into the system qubits beside them together, see "Moving the controls as a
/// front"), when it lets more rotations run per CNOT than the cheapest single way does.
/// `FrontMerged`: the same, a move's exchange charged 2 CNOTs instead of 3 where it follows a
/// CNOT on its pair (what the lowering makes of it), so moves are taken more readily.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Policy {
    /// Each rotation's cheapest way.
    Nearest,
    /// Front moves where they pay, each exchange charged as a SWAP.
    Front,
    /// Front moves where they pay, an exchange after a CNOT on its pair charged 2.
    FrontMerged,
}

impl Policy {
    /// Whether front moves are considered.
    fn front(self) -> bool {
        self != Policy::Nearest
    }
}

/// Steps with more rotations are not routed with [`Policy::Front`] (each stall scores every
/// candidate move by a pass over the ready rotations).
pub const FRONT_MAX_ROTATIONS: usize = 1024;

use super::sweep::noncommutation_graph;
use crate::circuit::{Circuit, Gate, Qubit};
use crate::device::Device;
use crate::formula::Rotation;
use crate::pauli::PauliSum;
use std::cmp::Reverse;
use std::collections::{BTreeSet, BinaryHeap, VecDeque};

/// Most control copies (besides the ancilla) a layout gets.
pub const MAX_COPIES: usize = 8;

/// Steps with more rotations are not routed with copies.
pub const MAX_ROTATIONS: usize = 4096;

/// Embeddings tried per starting site of the chip by [`candidate_layouts`].
pub const EMBEDDINGS_PER_SITE: usize = 2;

/// Backtracking steps each of those embedding searches may spend.
pub const EMBED_BUDGET_PER_SITE: usize = 20_000;

/// Layouts (with their copies) that [`candidate_layouts`] returns, best estimate first.
pub const SHORTLIST: usize = 6;

/// Starting layouts (besides the bases) whose copies [`candidate_layouts`] grows.
pub const GROWN: usize = 16;

/// Layouts annealed by [`candidate_layouts`] (the best grown ones), and the moves tried on each.
pub const ANNEALED: usize = 3;
pub const ANNEAL_MOVES: usize = 20000;

/// Free sites tried for the ancilla beside each embedding.
pub const ANCILLA_SEEDS: usize = 3;

const FREE: u32 = u32::MAX;
const INF: u32 = u32::MAX / 4;

/// CNOTs of a SWAP, and of moving a value into a free (|0⟩) site.
const SWAP_CNOTS: u32 = 3;
const MOVE_CNOTS: u32 = 2;
/// Surcharge on moving a control through an occupied site when choosing (not emitted): the
/// qubit it displaces may be needed where it stood.
const DISPLACE: u32 = 2;

/// How one controlled `rz` meets a control (see the module essay); sites are physical.
#[derive(Clone, Debug, PartialEq)]
enum Ctl {
    Adjacent {
        t: u32,
    },
    /// `path[0]` a control, then free sites; the last is coupled to the root.
    Temp {
        path: Vec<u32>,
    },
    Bridge {
        m: u32,
        t: u32,
    },
    /// `path[0]` a control, then the sites it moves through; the last is coupled to the root.
    Move {
        path: Vec<u32>,
    },
}

/// A step routed with control copies: physical gates (SWAPs kept), the layout at its end
/// (system qubits, ancilla, copies), and the SWAPs and moves inserted.
#[derive(Clone, Debug)]
pub struct CatRouting {
    pub circuit: Circuit,
    /// Controlled `rz`s by each way of meeting a control: beside one, through temporary
    /// copies, over a bridge, after moving one (see the module essay).
    pub methods: [usize; 4],
    pub final_layout: Vec<u32>,
    pub swaps: usize,
    /// Free sites the step uses as temporary copies (set from a control and cleared again).
    pub temporary_copies: usize,
}

/// The routing state: where every logical qubit stands.
struct Engine<'a> {
    dev: &'a Device,
    nbrs: &'a [Vec<u32>],
    /// System qubits; logical `n..` are the controls (ancilla first).
    n: usize,
    l2p: Vec<u32>,
    p2l: Vec<u32>,
    out: Vec<Gate>,
    swaps: usize,
    /// Two-qubit depth reached on each site (tie-breaks between equal controls).
    depth: Vec<u32>,
    /// Index in `out` of the last gate on each site (`usize::MAX`: none yet).
    last_gate: Vec<usize>,
    /// Free sites used as temporary copies so far.
    temporary: BTreeSet<u32>,
    /// Controlled `rz`s per way (adjacent, temporary, bridge, move).
    methods: [usize; 4],
}

impl<'a> Engine<'a> {
    fn new(dev: &'a Device, nbrs: &'a [Vec<u32>], n: usize, layout: &[u32]) -> Engine<'a> {
        let mut p2l = vec![FREE; dev.num_qubits];
        for (l, &p) in layout.iter().enumerate() {
            p2l[p as usize] = l as u32;
        }
        Engine {
            dev,
            nbrs,
            n,
            l2p: layout.to_vec(),
            p2l,
            out: Vec::new(),
            swaps: 0,
            depth: vec![0; dev.num_qubits],
            last_gate: vec![usize::MAX; dev.num_qubits],
            temporary: BTreeSet::new(),
            methods: [0; 4],
        }
    }

    fn is_control(&self, p: u32) -> bool {
        let l = self.p2l[p as usize];
        l != FREE && l as usize >= self.n
    }

    fn is_free(&self, p: u32) -> bool {
        self.p2l[p as usize] == FREE
    }

    fn push(&mut self, g: Gate) {
        if let Gate::Cx(a, b) | Gate::Cz(a, b) | Gate::Swap(a, b) = g {
            debug_assert!(self.dev.coupled(a, b), "{g:?} on an uncoupled pair");
            let d = self.depth[a as usize].max(self.depth[b as usize]) + 1;
            self.depth[a as usize] = d;
            self.depth[b as usize] = d;
        }
        for q in g.qubits() {
            self.last_gate[q as usize] = self.out.len();
        }
        self.out.push(g);
    }

    /// Exchanges the contents of coupled sites `a` and `b`: a SWAP, or two CNOTs when one of
    /// them is free (it holds |0⟩: `cx(a, b) cx(b, a)` moves `a`'s value there and clears `a`).
    fn exchange(&mut self, a: u32, b: u32) {
        let (la, lb) = (self.p2l[a as usize], self.p2l[b as usize]);
        match (la == FREE, lb == FREE) {
            (true, true) => return,
            (false, true) => {
                self.push(Gate::Cx(a, b));
                self.push(Gate::Cx(b, a));
            }
            (true, false) => {
                self.push(Gate::Cx(b, a));
                self.push(Gate::Cx(a, b));
            }
            (false, false) => self.push(Gate::Swap(a.min(b), a.max(b))),
        }
        self.p2l.swap(a as usize, b as usize);
        if la != FREE {
            self.l2p[la as usize] = b;
        }
        if lb != FREE {
            self.l2p[lb as usize] = a;
        }
        self.swaps += 1;
    }

    fn hop_cost(&self, p: u32) -> u32 {
        if self.is_free(p) {
            MOVE_CNOTS
        } else {
            SWAP_CNOTS
        }
    }

    /// Moves logical qubits `a` and `b` together, one hop at a time along shortest paths (the
    /// cheaper hop first: into a free site, then the lower sites).
    fn make_adjacent(&mut self, a: u32, b: u32) {
        loop {
            let (pa, pb) = (self.l2p[a as usize], self.l2p[b as usize]);
            let d = self.dev.distance(pa, pb);
            if d <= 1 {
                return;
            }
            // (cost of the hop, its sites in order) and the hop.
            type Keyed = ((u32, u32, u32), (u32, u32));
            let mut best: Option<Keyed> = None;
            for (from, to) in [(pa, pb), (pb, pa)] {
                for &nb in &self.nbrs[from as usize] {
                    if self.dev.distance(nb, to) + 1 != d {
                        continue;
                    }
                    let key = (self.hop_cost(nb), from.min(nb), from.max(nb));
                    if best.as_ref().is_none_or(|(k, _)| key < *k) {
                        best = Some((key, (from, nb)));
                    }
                }
            }
            let (_, (x, y)) = best.expect("a shortest path exists inside a component");
            self.exchange(x, y);
        }
    }

    /// Sites in a nearest-neighbour chain through `support` (logical) from `root`, root last.
    fn ladder(&self, root: Qubit, support: &[Qubit]) -> Vec<Qubit> {
        let site = |q: Qubit| self.l2p[q as usize];
        let mut chain = vec![root];
        let mut rest: Vec<Qubit> = support.iter().copied().filter(|&q| q != root).collect();
        while !rest.is_empty() {
            let cur = *chain.last().expect("non-empty");
            let (k, _) = rest
                .iter()
                .enumerate()
                .min_by_key(|&(_, &q)| (self.dev.distance(site(cur), site(q)), q))
                .expect("non-empty");
            chain.push(rest.remove(k));
        }
        chain.reverse();
        chain
    }

    /// Estimated CNOTs of the ladder along `chain` and back (SWAPs where a hop is not coupled).
    fn ladder_cost(&self, chain: &[Qubit]) -> u32 {
        chain
            .windows(2)
            .map(|w| {
                let d = self
                    .dev
                    .distance(self.l2p[w[0] as usize], self.l2p[w[1] as usize]);
                2 + SWAP_CNOTS * d.saturating_sub(1)
            })
            .sum()
    }

    /// Per site, the estimated CNOTs of controlling an `rz` there (see [`Engine::control`]),
    /// surcharges included; `INF` where no control can reach.
    fn control_table(&self) -> Vec<u32> {
        let np = self.dev.num_qubits;
        let free_hops = self.free_hops();
        let moves = self.move_costs(&[]);
        (0..np as u32)
            .map(|r| {
                let mut best = INF;
                for &v in &self.nbrs[r as usize] {
                    if self.is_control(v) {
                        return 2;
                    }
                    if self.is_free(v) && free_hops[v as usize].0 < INF {
                        best = best.min(2 + 2 * free_hops[v as usize].0);
                    }
                    if !self.is_free(v) && self.nbrs[v as usize].iter().any(|&t| self.is_control(t))
                    {
                        best = best.min(6);
                    }
                    best = best.min(moves[v as usize].0.saturating_add(2));
                }
                best
            })
            .collect()
    }

    /// Breadth-first over free sites from the controls: per site, the free sites in the chain
    /// from a control to it (itself included) and the previous site.
    fn free_hops(&self) -> Vec<(u32, u32)> {
        let np = self.dev.num_qubits;
        let mut out = vec![(INF, FREE); np];
        let mut queue = VecDeque::new();
        for l in self.n..self.l2p.len() {
            let p = self.l2p[l];
            out[p as usize] = (0, FREE);
            queue.push_back(p);
        }
        while let Some(u) = queue.pop_front() {
            for &v in &self.nbrs[u as usize] {
                if self.is_free(v) && out[v as usize].0 == INF {
                    out[v as usize] = (out[u as usize].0 + 1, u);
                    queue.push_back(v);
                }
            }
        }
        out
    }

    /// Dijkstra from the controls: per site, the CNOTs (with the surcharge for occupied
    /// sites) of moving the nearest control onto it, and the previous site; controls and
    /// `forbid` are not passed through.
    fn move_costs(&self, forbid: &[u32]) -> Vec<(u32, u32)> {
        let np = self.dev.num_qubits;
        let mut out = vec![(INF, FREE); np];
        let mut heap = BinaryHeap::new();
        for l in self.n..self.l2p.len() {
            let p = self.l2p[l];
            out[p as usize] = (0, FREE);
            heap.push(Reverse((0u32, p)));
        }
        while let Some(Reverse((d, u))) = heap.pop() {
            if d > out[u as usize].0 {
                continue;
            }
            for &v in &self.nbrs[u as usize] {
                if self.is_control(v) || forbid.contains(&v) {
                    continue;
                }
                let w = if self.is_free(v) {
                    MOVE_CNOTS
                } else {
                    SWAP_CNOTS + DISPLACE
                };
                let nd = d + w;
                if nd < out[v as usize].0 {
                    out[v as usize] = (nd, u);
                    heap.push(Reverse((nd, v)));
                }
            }
        }
        out
    }

    /// The cheapest way to control an `rz` on site `r` now, with its estimated CNOTs;
    /// `forbid`: sites a moving control must not pass (the rotation's other qubits).
    fn control(&self, r: u32, forbid: &[u32]) -> (u32, Ctl) {
        // Adjacent controls: the least deep one (they then run side by side).
        if let Some(&t) = self.nbrs[r as usize]
            .iter()
            .filter(|&&t| self.is_control(t))
            .min_by_key(|&&t| (self.depth[t as usize], t))
        {
            return (2, Ctl::Adjacent { t });
        }
        let mut best: (u32, Ctl) = (INF, Ctl::Adjacent { t: FREE });
        let free_hops = self.free_hops();
        for &v in &self.nbrs[r as usize] {
            if self.is_free(v) && free_hops[v as usize].0 < INF {
                let cost = 2 + 2 * free_hops[v as usize].0;
                if cost < best.0 {
                    let mut path = vec![v];
                    let mut u = v;
                    while free_hops[u as usize].1 != FREE {
                        u = free_hops[u as usize].1;
                        path.push(u);
                    }
                    path.reverse();
                    best = (cost, Ctl::Temp { path });
                }
            }
        }
        for &m in &self.nbrs[r as usize] {
            if self.is_free(m) || 6 >= best.0 {
                continue;
            }
            if let Some(&t) = self.nbrs[m as usize]
                .iter()
                .filter(|&&t| self.is_control(t))
                .min_by_key(|&&t| (self.depth[t as usize], t))
            {
                best = (6, Ctl::Bridge { m, t });
            }
        }
        let mut forbid = forbid.to_vec();
        forbid.push(r);
        let mut moves = self.move_costs(&forbid);
        if self.nbrs[r as usize]
            .iter()
            .all(|&v| moves[v as usize].0 >= INF)
        {
            // Walled in by the rotation's own qubits: pass them (the moves keep exactness,
            // and the ladder's later gates are made adjacent again).
            moves = self.move_costs(&[r]);
        }
        for &v in &self.nbrs[r as usize] {
            let cost = moves[v as usize].0.saturating_add(2);
            if cost < best.0 {
                let mut path = vec![v];
                let mut u = v;
                while moves[u as usize].1 != FREE {
                    u = moves[u as usize].1;
                    path.push(u);
                }
                path.reverse();
                best = (cost, Ctl::Move { path });
            }
        }
        best
    }

    /// `rz(angle)` on logical qubit `q` controlled by the cat (see the module essay).
    fn controlled_rz(&mut self, q: Qubit, angle: f64, forbid: &[u32]) {
        let r = self.l2p[q as usize];
        let (cost, how) = self.control(r, forbid);
        assert!(
            cost < INF,
            "every site of a component is reachable by some control"
        );
        let (a, b) = (Gate::Rz(r, angle / 2.0), Gate::Rz(r, -angle / 2.0));
        self.methods[match how {
            Ctl::Adjacent { .. } => 0,
            Ctl::Temp { .. } => 1,
            Ctl::Bridge { .. } => 2,
            Ctl::Move { .. } => 3,
        }] += 1;
        match how {
            Ctl::Adjacent { t } => self.extend([a, Gate::Cx(t, r), b, Gate::Cx(t, r)]),
            Ctl::Temp { path } => {
                self.temporary.extend(path[1..].iter().copied());
                for w in path.windows(2) {
                    self.push(Gate::Cx(w[0], w[1]));
                }
                let f = *path.last().expect("non-empty");
                self.extend([a, Gate::Cx(f, r), b, Gate::Cx(f, r)]);
                for w in path.windows(2).rev() {
                    self.push(Gate::Cx(w[0], w[1]));
                }
            }
            Ctl::Bridge { m, t } => {
                let bridge = [Gate::Cx(m, r), Gate::Cx(t, m), Gate::Cx(m, r)];
                self.push(a);
                self.extend(bridge);
                self.push(b);
                self.extend(bridge);
            }
            Ctl::Move { path } => {
                for w in path.windows(2) {
                    self.exchange(w[0], w[1]);
                }
                let t = *path.last().expect("non-empty");
                self.extend([a, Gate::Cx(t, r), b, Gate::Cx(t, r)]);
            }
        }
    }

    fn extend(&mut self, gates: impl IntoIterator<Item = Gate>) {
        for g in gates {
            self.push(g);
        }
    }

    /// Emits the uncontrolled gates of one rotation (or pair) with every `rz` controlled by
    /// the cat: one-qubit gates placed, two-qubit gates made adjacent first.
    fn emit(&mut self, gates: &[Gate], support: &[Qubit]) {
        for g in gates {
            match *g {
                Gate::Rz(q, angle) => {
                    let forbid: Vec<u32> = support
                        .iter()
                        .filter(|&&s| s != q)
                        .map(|&s| self.l2p[s as usize])
                        .collect();
                    self.controlled_rz(q, angle, &forbid);
                }
                Gate::Cx(a, b) | Gate::Cz(a, b) => {
                    self.make_adjacent(a, b);
                    let (pa, pb) = (self.l2p[a as usize], self.l2p[b as usize]);
                    self.push(match g {
                        Gate::Cx(..) => Gate::Cx(pa, pb),
                        _ => Gate::Cz(pa, pb),
                    });
                }
                g => {
                    let g = g.map_qubits(|q| self.l2p[q as usize]);
                    self.push(g);
                }
            }
        }
    }

    /// Estimated CNOTs of rotation `r` alone, and its best root (logical).
    fn estimate(&self, r: &Rotation, table: &[u32]) -> (u32, Qubit) {
        let support = crate::synth::default_ladder(r);
        support
            .iter()
            .map(|&root| {
                let chain = self.ladder(root, &support);
                let c = self.ladder_cost(&chain) + table[self.l2p[root as usize] as usize];
                (c, root)
            })
            .min()
            .expect("rotations are not the identity")
    }

    /// Estimated CNOTs of a hopping pair with ends `(a, c)`.
    fn estimate_pair(&self, r: &Rotation, ends: (Qubit, Qubit), table: &[u32]) -> u32 {
        let (a, c) = ends;
        let site = |q: Qubit| self.l2p[q as usize];
        let string: Vec<Qubit> = crate::synth::default_ladder(r)
            .into_iter()
            .filter(|&q| q != a && q != c)
            .collect();
        let d_ac = self.dev.distance(site(a), site(c));
        let mut cost = 2 + 2 * SWAP_CNOTS * d_ac.saturating_sub(1);
        if let Some(&root) = string.first() {
            let chain = self.ladder(root, &string);
            cost += self.ladder_cost(&chain) + 2;
        }
        cost + table[site(a) as usize] + table[site(c) as usize]
    }
}

/// Routes one step's `program` with control copies from `layout` (system qubits `0..n`, the
/// ancilla `n`, copies after it) on `dev` (see the module essay); [`Hopping::Paired`]:
/// synthesise XX + YY pairs together where cheaper. `None` past [`MAX_ROTATIONS`] or the
/// schedule's bound.
pub fn route_step(
    program: &[Rotation],
    n: usize,
    layout: &[u32],
    dev: &Device,
    hopping: Hopping,
) -> Option<CatRouting> {
    route_step_with(program, n, layout, dev, hopping, Policy::Nearest)
}

/// [`route_step`] with the stall `policy` given; `None` also past [`FRONT_MAX_ROTATIONS`]
/// with a front policy.
pub fn route_step_with(
    program: &[Rotation],
    n: usize,
    layout: &[u32],
    dev: &Device,
    hopping: Hopping,
    policy: Policy,
) -> Option<CatRouting> {
    if program.len() > MAX_ROTATIONS || (policy.front() && program.len() > FRONT_MAX_ROTATIONS) {
        return None;
    }
    let (succ, mut indeg) = noncommutation_graph(program)?;
    let nbrs = neighbour_lists(dev);
    let mut e = Engine::new(dev, &nbrs, n, layout);
    let mut ready: BTreeSet<u32> = (0..program.len() as u32)
        .filter(|&j| indeg[j as usize] == 0)
        .collect();
    // Whether the last pass made a front move: the next one then runs a rotation (a move is
    // made only when some rotation then runs free), which bounds the loop.
    let mut moved = false;
    while !ready.is_empty() {
        let table = e.control_table();
        let (extra, cost, j, root) = ready
            .iter()
            .map(|&j| {
                let r = &program[j as usize];
                let (c, root) = e.estimate(r, &table);
                (c.saturating_sub(free_cost(r)), c, j, root)
            })
            .min_by_key(|&(x, c, j, _)| {
                policy.front().then_some(x).map_or((c, 0, j), |x| (x, c, j))
            })
            .expect("non-empty");
        if policy.front() && extra > 0 && !moved {
            let merged = policy == Policy::FrontMerged;
            if let Some(moves) = e.front_move(program, &succ, &indeg, &ready, extra, merged) {
                for &(f, u) in &moves {
                    e.exchange(f, u);
                }
                moved = true;
                continue;
            }
        }
        moved = false;
        ready.remove(&j);
        let rj = &program[j as usize];
        // A ready partner of an XX + YY pair, if the pair is cheaper together.
        let partner = if hopping == Hopping::Paired {
            ready
                .iter()
                .filter_map(|&k| {
                    let ends = crate::synth::hopping_pair(&rj.pauli, &program[k as usize].pauli)?;
                    let apart = cost + e.estimate(&program[k as usize], &table).0;
                    let together = e.estimate_pair(rj, ends, &table);
                    (together <= apart).then_some((k, ends))
                })
                .next()
        } else {
            None
        };
        let support = crate::synth::default_ladder(rj);
        match partner {
            Some((k, ends)) => {
                ready.remove(&k);
                let l2p = e.l2p.clone();
                let dist = |a: Qubit, b: Qubit| dev.distance(l2p[a as usize], l2p[b as usize]);
                let gates =
                    crate::synth::pair_rotation(rj, &program[k as usize], ends, None, Some(&dist));
                e.emit(&gates, &support);
                release(&succ, j, &mut indeg, &mut ready);
                release(&succ, k, &mut indeg, &mut ready);
            }
            None => {
                let chain = e.ladder(root, &support);
                let gates = crate::synth::pauli_rotation_along(rj, None, &chain);
                e.emit(&gates, &support);
                release(&succ, j, &mut indeg, &mut ready);
            }
        }
    }
    Some(CatRouting {
        circuit: Circuit {
            num_qubits: dev.num_qubits,
            num_clbits: 0,
            gates: e.out,
            global_phase: 0.0,
        },
        final_layout: e.l2p,
        swaps: e.swaps,
        temporary_copies: e.temporary.len(),
        methods: e.methods,
    })
}

/// Rotation `j` has run: each successor whose predecessors have all run becomes ready.
fn release(succ: &[Vec<u32>], j: u32, indeg: &mut [u32], ready: &mut BTreeSet<u32>) {
    for &k in &succ[j as usize] {
        indeg[k as usize] -= 1;
        if indeg[k as usize] == 0 {
            ready.insert(k);
        }
    }
}

/// CNOTs of rotation `r` with nothing moved: its ladder on coupled pairs and a control beside
/// the root.
fn free_cost(r: &Rotation) -> u32 {
    2 * r.pauli.weight().saturating_sub(1) + 2
}

impl Engine<'_> {
    /// Whether rotation `r` can run now at [`free_cost`]: some support qubit beside a control
    /// and the ladder to it on coupled pairs.
    fn runs_free(&self, r: &Rotation) -> bool {
        let support = crate::synth::default_ladder(r);
        let w = support.len() as u32;
        support.iter().any(|&root| {
            let site = self.l2p[root as usize];
            self.nbrs[site as usize].iter().any(|&t| self.is_control(t))
                && self.ladder_cost(&self.ladder(root, &support)) == 2 * (w - 1)
        })
    }

    /// How many rotations run free (see [`Engine::runs_free`]) from here, releasing their
    /// successors as they run, with nothing moved.
    fn free_closure(
        &self,
        program: &[Rotation],
        succ: &[Vec<u32>],
        indeg: &[u32],
        ready: &BTreeSet<u32>,
    ) -> usize {
        let mut indeg = indeg.to_vec();
        let mut ready = ready.clone();
        let mut count = 0;
        loop {
            let runnable: Vec<u32> = ready
                .iter()
                .copied()
                .filter(|&j| self.runs_free(&program[j as usize]))
                .collect();
            if runnable.is_empty() {
                return count;
            }
            for j in runnable {
                ready.remove(&j);
                count += 1;
                release(succ, j, &mut indeg, &mut ready);
            }
        }
    }

    /// CNOTs charged for exchanging sites `f` and `u` now: a SWAP's 3, or with `merged` 2
    /// when the last gate on either is a CNOT on that pair (the lowering merges `cx · swap`
    /// into two CNOTs).
    fn swap_cost(&self, f: u32, u: u32, merged: bool) -> usize {
        if !merged {
            return SWAP_CNOTS as usize;
        }
        let last = [f, u]
            .iter()
            .map(|&p| self.last_gate[p as usize])
            .filter(|&i| i != usize::MAX)
            .max()
            .map(|i| &self.out[i]);
        match last {
            Some(&Gate::Cx(a, b)) if (a == f && b == u) || (a == u && b == f) => 2,
            _ => SWAP_CNOTS as usize,
        }
    }

    /// The candidate front moves (see "Moving the controls as a front"): per connected part of
    /// the system qubits beside the controls, every control steps into a distinct system
    /// neighbour in that part (lowest sites first); and every single exchange of a control
    /// with a system neighbour. Pairs `(control site, system site)`.
    fn front_candidates(&self) -> Vec<Vec<(u32, u32)>> {
        let np = self.dev.num_qubits;
        let system = |p: u32| {
            let l = self.p2l[p as usize];
            l != FREE && (l as usize) < self.n
        };
        // Parts: connected components of the system sites (controls and free sites cut).
        let mut part = vec![u32::MAX; np];
        let mut parts = 0u32;
        for p0 in 0..np as u32 {
            if !system(p0) || part[p0 as usize] != u32::MAX {
                continue;
            }
            let mut stack = vec![p0];
            part[p0 as usize] = parts;
            while let Some(u) = stack.pop() {
                for &v in &self.nbrs[u as usize] {
                    if system(v) && part[v as usize] == u32::MAX {
                        part[v as usize] = parts;
                        stack.push(v);
                    }
                }
            }
            parts += 1;
        }
        let controls: Vec<u32> = self.l2p[self.n..].to_vec();
        let mut out: Vec<Vec<(u32, u32)>> = Vec::new();
        let mut beside: Vec<u32> = controls
            .iter()
            .flat_map(|&f| self.nbrs[f as usize].iter().copied())
            .filter(|&u| system(u))
            .map(|u| part[u as usize])
            .collect();
        beside.sort_unstable();
        beside.dedup();
        for s in beside {
            let mut taken: Vec<u32> = Vec::new();
            let mut mv = Vec::new();
            for &f in &controls {
                if let Some(&u) = self.nbrs[f as usize]
                    .iter()
                    .find(|&&u| system(u) && part[u as usize] == s && !taken.contains(&u))
                {
                    taken.push(u);
                    mv.push((f, u));
                }
            }
            if mv.len() > 1 {
                out.push(mv);
            }
        }
        for &f in &controls {
            for &u in self.nbrs[f as usize].iter().filter(|&&u| system(u)) {
                out.push(vec![(f, u)]);
            }
        }
        out
    }

    /// The front move that lets the most rotations run free per CNOT it costs, if that beats
    /// `extra`, the CNOTs above [`free_cost`] of the cheapest ready rotation's own way.
    fn front_move(
        &self,
        program: &[Rotation],
        succ: &[Vec<u32>],
        indeg: &[u32],
        ready: &BTreeSet<u32>,
        extra: u32,
        merged: bool,
    ) -> Option<Vec<(u32, u32)>> {
        // (CNOTs, rotations run: their ratio is compared) and the move.
        type Scored = ((usize, usize), Vec<(u32, u32)>);
        let mut best: Option<Scored> = None;
        for mv in self.front_candidates() {
            let mut after = Engine::new(self.dev, self.nbrs, self.n, &self.l2p);
            for &(f, u) in &mv {
                after.exchange(f, u);
            }
            let count = after.free_closure(program, succ, indeg, ready);
            let cost: usize = mv.iter().map(|&(f, u)| self.swap_cost(f, u, merged)).sum();
            // cost / count < extra, and lower than the best's ratio (compared crosswise).
            let pays = count > 0 && cost < extra as usize * count;
            let better = best
                .as_ref()
                .is_none_or(|((bc, bn), _)| cost * bn < bc * count);
            if pays && better {
                best = Some(((cost, count), mv));
            }
        }
        best.map(|(_, mv)| mv)
    }
}

/// A tree over the controls of `layout` (logical `n..`), rooted at the ancilla `n`: each
/// control joins the tree at the one it is nearest to (hop distance, then lower indices), in
/// the order it joins (Prim's rule). Returned as `(parent, child)` logical pairs, parents
/// first: the fan-out `cx(parent, child)` in this order prepares the cat from the ancilla, and
/// in reverse order clears it ([`fanout`], [`unfan`]).
pub fn control_tree(layout: &[u32], n: usize, dev: &Device) -> Vec<(Qubit, Qubit)> {
    let m = layout.len();
    let mut in_tree = vec![false; m];
    if m <= n + 1 {
        return Vec::new();
    }
    in_tree[n] = true;
    let mut out = Vec::with_capacity(m - n - 1);
    for _ in n + 1..m {
        let (_, p, c) = (n..m)
            .filter(|&p| in_tree[p])
            .flat_map(|p| (n + 1..m).filter(|&c| !in_tree[c]).map(move |c| (p, c)))
            .map(|(p, c)| (dev.distance(layout[p], layout[c]), p, c))
            .min()
            .expect("a control remains");
        in_tree[c] = true;
        out.push((p as Qubit, c as Qubit));
    }
    out
}

/// The fan-out that prepares the copies of `layout` from the ancilla: `cx(parent, child)` along
/// [`control_tree`] (logical qubits).
pub fn fanout(layout: &[u32], n: usize, dev: &Device) -> Vec<Gate> {
    control_tree(layout, n, dev)
        .into_iter()
        .map(|(p, c)| Gate::Cx(p, c))
        .collect()
}

/// The gates that clear the copies of `layout` (the cat's controls where they stand, e.g. after
/// the steps): [`control_tree`] there, leaves first.
pub fn unfan(layout: &[u32], n: usize, dev: &Device) -> Vec<Gate> {
    let mut g = fanout(layout, n, dev);
    g.reverse();
    g
}

/// The step's estimated CNOTs on a static layout with the controls of `layout` (logical `n..`),
/// the copies' fan-out and its undoing included.
fn static_estimate(
    program: &[Rotation],
    n: usize,
    layout: &[u32],
    dev: &Device,
    nbrs: &[Vec<u32>],
) -> u32 {
    let e = Engine::new(dev, nbrs, n, layout);
    let table = e.control_table();
    let copies = (layout.len() - n - 1) as u32;
    program
        .iter()
        .map(|r| e.estimate(r, &table).0)
        .fold(2 * copies, |a, b| a.saturating_add(b))
}

/// Grows the controls of `base` (system qubits and the ancilla, `n + 1` sites) over free sites
/// of `comp` as the module essay says; the layout with its copies appended and its estimate.
pub fn choose_controls(
    program: &[Rotation],
    n: usize,
    base: &[u32],
    comp: &[u32],
    dev: &Device,
) -> (Vec<u32>, u32) {
    choose_with(program, n, base, comp, dev, &neighbour_lists(dev), 0)
}

/// The neighbours of every site of `dev`, ascending.
fn neighbour_lists(dev: &Device) -> Vec<Vec<u32>> {
    (0..dev.num_qubits as u32)
        .map(|p| dev.neighbours(p))
        .collect()
}

fn choose_with(
    program: &[Rotation],
    n: usize,
    base: &[u32],
    comp: &[u32],
    dev: &Device,
    nbrs: &[Vec<u32>],
    min_copies: usize,
) -> (Vec<u32>, u32) {
    let mut layout = base.to_vec();
    let mut best = static_estimate(program, n, &layout, dev, nbrs);
    let mut in_comp = vec![false; dev.num_qubits];
    for &p in comp {
        in_comp[p as usize] = true;
    }
    while layout.len() - n - 1 < MAX_COPIES {
        let mut used = vec![false; dev.num_qubits];
        for &p in &layout {
            used[p as usize] = true;
        }
        let free = |p: u32| in_comp[p as usize] && !used[p as usize];
        // Free sites next to the controls, and paths of two from them.
        let mut options: Vec<Vec<u32>> = Vec::new();
        for &c in &layout[n..] {
            for &u in &nbrs[c as usize] {
                if !free(u) {
                    continue;
                }
                options.push(vec![u]);
                if layout.len() - n < MAX_COPIES {
                    for &v in &nbrs[u as usize] {
                        if free(v) {
                            options.push(vec![u, v]);
                        }
                    }
                }
            }
        }
        options.sort();
        options.dedup();
        let mut pick: Option<(u32, Vec<u32>)> = None;
        for o in options {
            let mut l = layout.clone();
            l.extend(&o);
            let est = static_estimate(program, n, &l, dev, nbrs);
            let wanted = est < best || layout.len() - n - 1 < min_copies;
            if wanted && pick.as_ref().is_none_or(|(b, _)| est < *b) {
                pick = Some((est, o));
            }
        }
        match pick {
            Some((est, o)) => {
                best = est;
                layout.extend(o);
            }
            None => break,
        }
    }
    (layout, best)
}

/// Starting layouts for the copies: `bases` (system qubits and ancilla, as the ordinary layout
/// search found them) and exact embeddings of `h`'s interaction graph begun at every site of
/// `comp` ([`EMBEDDINGS_PER_SITE`] each), the ancilla on each of the free sites beside most
/// system qubits (up to [`ANCILLA_SEEDS`]). They are ranked by the estimate with the ancilla
/// alone, the [`GROWN`] best (and every base) grown by [`choose_controls`]; the [`SHORTLIST`]
/// best estimates, best first (ties to the earlier), each with its estimate.
pub fn candidate_layouts(
    h: &PauliSum,
    program: &[Rotation],
    bases: &[Vec<u32>],
    comp: &[u32],
    dev: &Device,
    min_copies: usize,
) -> Vec<(u32, Vec<u32>)> {
    let n = h.num_qubits;
    let nbrs = neighbour_lists(dev);
    let mut data: Vec<Vec<u32>> = bases.iter().map(|b| b[..n].to_vec()).collect();
    let adj = embed::interaction_graph(h);
    if adj.iter().any(|r| !r.is_empty()) {
        for &s in comp {
            for e in embed::embeddings_from(
                &adj,
                comp,
                dev,
                EMBEDDINGS_PER_SITE,
                Some(s),
                EMBED_BUDGET_PER_SITE,
            ) {
                if !data.contains(&e) {
                    data.push(e);
                }
            }
        }
    }
    let mut starts: Vec<(u32, Vec<u32>)> = Vec::new();
    for d in &data[bases.len()..] {
        let mut used = vec![false; dev.num_qubits];
        for &p in d {
            used[p as usize] = true;
        }
        let mut spare: Vec<(Reverse<usize>, u32)> = comp
            .iter()
            .copied()
            .filter(|&p| !used[p as usize])
            .map(|p| {
                let k = nbrs[p as usize]
                    .iter()
                    .filter(|&&s| used[s as usize])
                    .count();
                (Reverse(k), p)
            })
            .filter(|(k, _)| k.0 > 0)
            .collect();
        spare.sort_unstable();
        for (_, p) in spare.into_iter().take(ANCILLA_SEEDS) {
            let mut l = d.clone();
            l.push(p);
            starts.push((static_estimate(program, n, &l, dev, &nbrs), l));
        }
    }
    starts.sort_by_key(|(est, _)| *est);
    starts.truncate(GROWN);
    let mut scored: Vec<(u32, Vec<u32>)> = bases
        .iter()
        .chain(starts.iter().map(|(_, l)| l))
        .map(|l| {
            let (layout, est) = choose_with(program, n, l, comp, dev, &nbrs, min_copies);
            (est, layout)
        })
        .collect();
    scored.sort_by_key(|(est, _)| *est);
    // The most promising ones, annealed (each keeps its own best).
    let annealed: Vec<(u32, Vec<u32>)> = scored
        .iter()
        .take(ANNEALED)
        .enumerate()
        .map(|(i, (_, l))| anneal(program, n, l, comp, dev, &nbrs, i as u64, min_copies))
        .collect();
    scored.extend(annealed);
    scored.sort_by_key(|(est, _)| *est);
    let mut out: Vec<(u32, Vec<u32>)> = Vec::new();
    for s in scored {
        if !out.iter().any(|o| o.1 == s.1) {
            out.push(s);
        }
        if out.len() >= SHORTLIST {
            break;
        }
    }
    out
}

/// Copies grown from `base` (system qubits `0..n` and the ancilla `n`) so that as many
/// system qubits as possible stand beside a control: the network of `synth::Coupled` carries
/// each string to the nearest qubit coupled to a control, 4 CNOTs a hop, so a qubit beside a
/// control saves that for every string reduced onto it, where a copy costs 2 CNOTs per
/// circuit. Greedy: each time the free site beside the controls (or path of two free sites,
/// counted per copy) that puts the most uncovered system qubits beside a control, lowest
/// sites first on ties, while it covers at least one per copy; at most [`MAX_COPIES`]. The
/// controls stay on a connected set of sites, so the fan-out needs no SWAP.
pub fn covering_copies(base: &[u32], n: usize, comp: &[u32], dev: &Device) -> Vec<u32> {
    let nbrs = neighbour_lists(dev);
    let mut layout = base[..=n].to_vec();
    let mut in_comp = vec![false; dev.num_qubits];
    for &p in comp {
        in_comp[p as usize] = true;
    }
    let mut used = vec![false; dev.num_qubits];
    for &p in &layout {
        used[p as usize] = true;
    }
    let mut covered = vec![false; dev.num_qubits];
    for &p in &nbrs[layout[n] as usize] {
        covered[p as usize] = true;
    }
    let system: Vec<bool> = (0..dev.num_qubits as u32)
        .map(|p| layout[..n].contains(&p))
        .collect();
    let gain = |sites: &[u32], covered: &[bool]| -> usize {
        let mut new: Vec<u32> = sites
            .iter()
            .flat_map(|&f| nbrs[f as usize].iter().copied())
            .filter(|&p| system[p as usize] && !covered[p as usize])
            .collect();
        new.sort_unstable();
        new.dedup();
        new.len()
    };
    while layout.len() - n - 1 < MAX_COPIES {
        let free = |p: u32| in_comp[p as usize] && !used[p as usize];
        let mut best: Option<(usize, usize, Vec<u32>)> = None;
        for &c in &layout[n..] {
            for &u in nbrs[c as usize].iter().filter(|&&u| free(u)) {
                let mut options = vec![vec![u]];
                if layout.len() - n < MAX_COPIES {
                    options.extend(
                        nbrs[u as usize]
                            .iter()
                            .filter(|&&v| free(v))
                            .map(|&v| vec![u, v]),
                    );
                }
                for o in options {
                    let g = gain(&o, &covered);
                    // Most covered per copy (compared as g / len), fewer copies on ties.
                    let better = best.as_ref().is_none_or(|(bg, bl, bo)| {
                        (g * bl, Reverse(o.len()), Reverse(&o))
                            > (bg * o.len(), Reverse(*bl), Reverse(bo))
                    });
                    if g >= o.len() && better {
                        best = Some((g, o.len(), o));
                    }
                }
            }
        }
        let Some((_, _, o)) = best else {
            break;
        };
        for &f in &o {
            used[f as usize] = true;
            for &p in &nbrs[f as usize] {
                covered[p as usize] = true;
            }
        }
        layout.extend(o);
    }
    layout
}

/// Whether the controls of `layout` (logical `n..`) sit on a connected set of sites.
fn controls_connected(layout: &[u32], n: usize, dev: &Device) -> bool {
    let ctl = &layout[n..];
    let mut seen = vec![false; ctl.len()];
    seen[0] = true;
    let mut stack = vec![0usize];
    while let Some(i) = stack.pop() {
        for j in 0..ctl.len() {
            if !seen[j] && dev.coupled(ctl[i], ctl[j]) {
                seen[j] = true;
                stack.push(j);
            }
        }
    }
    seen.iter().all(|&s| s)
}

/// Simulated annealing of a whole layout (system qubits, ancilla, copies) against the static
/// estimate: moves exchange two system qubits' sites, move a system qubit or a control to a
/// free site nearby, exchange a system qubit with a control, or add or drop a copy; layouts
/// whose controls are not connected are refused (the fan-out runs on coupled pairs). The
/// temperature falls geometrically from 4 to 0.05 CNOTs over [`ANNEAL_MOVES`] moves (Kirkpatrick,
/// Gelatt & Vecchi, Science 220, 671 (1983)). Deterministic for a given `seed`.
#[allow(clippy::too_many_arguments)]
fn anneal(
    program: &[Rotation],
    n: usize,
    start: &[u32],
    comp: &[u32],
    dev: &Device,
    nbrs: &[Vec<u32>],
    seed: u64,
    min_copies: usize,
) -> (u32, Vec<u32>) {
    use rand::{Rng, SeedableRng};
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(0xca7 ^ seed);
    let mut in_comp = vec![false; dev.num_qubits];
    for &p in comp {
        in_comp[p as usize] = true;
    }
    // Layouts short of `min_copies` copies count as far worse, so the walk finds some.
    let score = |l: &[u32]| {
        let short = (n + 1 + min_copies).saturating_sub(l.len()) as u32;
        static_estimate(program, n, l, dev, nbrs).saturating_add(1000 * short)
    };
    let mut cur = start.to_vec();
    let mut cur_est = score(&cur);
    let mut best = (cur_est, cur.clone());
    // A site within two hops of `p` (in the component).
    let near = |p: u32, rng: &mut rand_chacha::ChaCha8Rng| -> u32 {
        let a = &nbrs[p as usize];
        if a.is_empty() {
            return p;
        }
        let q = a[rng.gen_range(0..a.len())];
        if rng.gen_bool(0.5) {
            return q;
        }
        let b = &nbrs[q as usize];
        b[rng.gen_range(0..b.len())]
    };
    let (t0, t1) = (4.0f64, 0.05f64);
    for step in 0..ANNEAL_MOVES {
        let temp = t0 * (t1 / t0).powf(step as f64 / ANNEAL_MOVES as f64);
        let mut next = cur.clone();
        let m = next.len();
        let holder = |l: &[u32], p: u32| l.iter().position(|&s| s == p);
        match rng.gen_range(0..7) {
            0 if n >= 2 => {
                let (i, j) = (rng.gen_range(0..n), rng.gen_range(0..n));
                next.swap(i, j);
            }
            1 | 2 => {
                // A qubit (system or control) to a site nearby: exchanged with its holder.
                let i = rng.gen_range(0..m);
                let p = near(next[i], &mut rng);
                if !in_comp[p as usize] {
                    continue;
                }
                match holder(&next, p) {
                    Some(j) => next.swap(i, j),
                    None => next[i] = p,
                }
            }
            3 if m - n - 1 < MAX_COPIES => {
                let c = next[rng.gen_range(n..m)];
                let p = near(c, &mut rng);
                if !in_comp[p as usize] || holder(&next, p).is_some() {
                    continue;
                }
                next.push(p);
            }
            4 if m > n + 1 + min_copies => {
                next.remove(rng.gen_range(n + 1..m));
            }
            5 if m - n - 1 < MAX_COPIES => {
                // A system qubit to a free site nearby, a copy where it stood.
                let i = rng.gen_range(0..n);
                let p = near(next[i], &mut rng);
                if !in_comp[p as usize] || holder(&next, p).is_some() {
                    continue;
                }
                next.push(next[i]);
                next[i] = p;
            }
            _ => continue,
        }
        if next == cur || !controls_connected(&next, n, dev) {
            continue;
        }
        let est = score(&next);
        let accept = est <= cur_est
            || rng.gen_bool((-((est - cur_est) as f64) / temp).exp().clamp(0.0, 1.0));
        if accept {
            cur = next;
            cur_est = est;
            if cur_est < best.0 {
                best = (cur_est, cur.clone());
            }
        }
    }
    best
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::device::{lattice, Calibration, NativeSet};
    use crate::pauli::{Pauli, PauliString};
    use crate::route::swap::{insert_swaps, SwapParams};
    use crate::sim::{run, State};
    use num_complex::Complex64;
    use rand::{Rng, SeedableRng};

    /// `h` on the ancilla, the fan-out, the routed step, the undoing of the fan-out where the
    /// step ends (SWAPs inserted if the copies moved apart), against `h` and the step
    /// controlled by the ancilla alone: the same state on the system qubits and the ancilla
    /// (placed by the layouts), |0⟩ everywhere else, to 1e-9.
    fn assert_exact(program: &[Rotation], n: usize, layout: &[u32], dev: &Device) -> CatRouting {
        assert_exact_with(program, n, layout, dev, Policy::Nearest)
    }

    fn assert_exact_with(
        program: &[Rotation],
        n: usize,
        layout: &[u32],
        dev: &Device,
        policy: Policy,
    ) -> CatRouting {
        let routed = route_step_with(program, n, layout, dev, Hopping::Paired, policy).unwrap();
        let np = dev.num_qubits;
        let mut c = Circuit::new(np, 0);
        c.push(Gate::H(layout[n]));
        c.extend(
            fanout(layout, n, dev)
                .into_iter()
                .map(|g| g.map_qubits(|q| layout[q as usize])),
        );
        c.extend(routed.circuit.gates.iter().copied());
        for g in &c.gates {
            if g.is_two_qubit() {
                let q = g.qubits();
                assert!(dev.coupled(q[0], q[1]), "{g:?}");
            }
        }
        let mut undo = Circuit::new(layout.len(), 0);
        undo.extend(unfan(&routed.final_layout, n, dev));
        let params = SwapParams {
            extended_size: 20,
            extended_weight: 0.5,
            decay_step: 0.001,
            decay_reset: 5,
            seed: 1,
            stall_limit: None,
            hub: Some(n as u32),
            hub_factor: 1.0,
            commute_ahead: 0,
        };
        let back = insert_swaps(&undo, &routed.final_layout, dev, &params);
        c.extend(back.circuit.gates.iter().copied());
        let fin = back.final_layout;
        let mut ideal = Circuit::new(n + 1, 0);
        ideal.push(Gate::H(n as u32));
        for r in program {
            ideal.extend(crate::synth::pauli_rotation(r, Some(n as u32)));
        }
        // A non-trivial input on the system qubits: a product state.
        let mut prep = Circuit::new(n + 1, 0);
        for q in 0..n as u32 {
            prep.push(Gate::U(q, 0.4 + 0.3 * q as f64, 0.2, -0.7 * q as f64));
        }
        let mut want_c = prep.clone();
        want_c.extend(ideal.gates);
        let want = run(&want_c, State::zero(n + 1));
        let mut got_c = Circuit::new(np, 0);
        got_c.extend(
            prep.gates
                .iter()
                .map(|g| g.map_qubits(|q| layout[q as usize])),
        );
        got_c.extend(c.gates);
        let got = run(&got_c, State::zero(np));
        let mut overlap = Complex64::new(0.0, 0.0);
        for (b, a) in want.amps.iter().enumerate() {
            let p: usize = (0..=n)
                .filter(|&l| b >> l & 1 == 1)
                .map(|l| 1 << fin[l])
                .sum();
            overlap += a.conj() * got.amps[p];
        }
        assert!(
            (1.0 - overlap.norm()).abs() < 1e-9,
            "overlap {} with layout {layout:?}",
            overlap.norm()
        );
        routed
    }

    #[test]
    fn random_programs_with_random_copies_are_the_controlled_step() {
        // Random programs (weights 1 to 3, some XX + YY pairs) on random layouts of a 3 × 3
        // grid, a brick wall and a line: system qubits, the ancilla and copies anywhere, so
        // every way of meeting a control is taken somewhere.
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(17);
        let devices = [
            (9u32, lattice::grid(3, 3)),
            (8, lattice::brickwall(2, 4)),
            (8, lattice::line(8)),
        ];
        let mut methods = [0usize; 4];
        for trial in 0..60 {
            let (np, links) = &devices[trial % devices.len()];
            let dev = Device::new(
                "d",
                *np as usize,
                links,
                NativeSet::rz_sx_x_cx(),
                Calibration::default(),
            );
            let n = rng.gen_range(2..=4usize);
            let mut program = Vec::new();
            for _ in 0..rng.gen_range(2..10) {
                let w = rng.gen_range(1..=3usize.min(n));
                let mut qs: Vec<usize> = (0..n).collect();
                for i in 0..w {
                    let j = rng.gen_range(i..n);
                    qs.swap(i, j);
                }
                let f: Vec<(usize, Pauli)> = qs[..w]
                    .iter()
                    .map(|&q| (q, [Pauli::X, Pauli::Y, Pauli::Z][rng.gen_range(0..3)]))
                    .collect();
                let theta = rng.gen_range(-1.0..1.0);
                program.push(Rotation {
                    pauli: PauliString::from_factors(&f).1,
                    theta,
                });
                if w == 2 && rng.gen_bool(0.3) {
                    let g: Vec<(usize, Pauli)> = f.iter().map(|&(q, _)| (q, Pauli::Y)).collect();
                    let mut x = f.clone();
                    for e in &mut x {
                        e.1 = Pauli::X;
                    }
                    program.pop();
                    program.push(Rotation {
                        pauli: PauliString::from_factors(&x).1,
                        theta,
                    });
                    program.push(Rotation {
                        pauli: PauliString::from_factors(&g).1,
                        theta: -0.5 * theta,
                    });
                }
            }
            let mut sites: Vec<u32> = (0..*np).collect();
            for i in 0..sites.len() {
                let j = rng.gen_range(i..sites.len());
                sites.swap(i, j);
            }
            // Copies grown from the ancilla over free neighbours (the fan-out's tree).
            let mut layout = sites[..n + 1].to_vec();
            for _ in 0..rng.gen_range(0..=3) {
                let free: Vec<u32> = layout[n..]
                    .iter()
                    .flat_map(|&c| dev.neighbours(c))
                    .filter(|p| !layout.contains(p))
                    .collect();
                if free.is_empty() {
                    break;
                }
                layout.push(free[rng.gen_range(0..free.len())]);
            }
            let r = assert_exact(&program, n, &layout, &dev);
            for (m, k) in methods.iter_mut().zip(r.methods) {
                *m += k;
            }
            assert_exact_with(&program, n, &layout, &dev, Policy::Front);
            assert_exact_with(&program, n, &layout, &dev, Policy::FrontMerged);
        }
        assert!(methods.iter().all(|&m| m > 0), "{methods:?}");
    }

    /// A Heisenberg model with fields on a rows × cols lattice (qubit `r·cols + c`).
    fn heisenberg(rows: usize, cols: usize) -> PauliSum {
        let n = rows * cols;
        let mut h = PauliSum::new(n);
        for r in 0..rows {
            for c in 0..cols {
                let q = r * cols + c;
                let mut nb = Vec::new();
                if c + 1 < cols {
                    nb.push(q + 1);
                }
                if r + 1 < rows {
                    nb.push(q + cols);
                }
                for b in nb {
                    for p in [Pauli::X, Pauli::Y, Pauli::Z] {
                        h.add(PauliString::from_factors(&[(q, p), (b, p)]).1, 1.0);
                    }
                }
                h.add(PauliString::single(q, Pauli::Z), 0.1 * q as f64 - 0.4);
            }
        }
        h
    }

    #[test]
    fn a_column_of_copies_sweeps_a_lattice_as_a_front() {
        // A 3 × 3 Heisenberg lattice on the first three columns of a 3 × 4 grid, the ancilla
        // and two copies on the spare last column (sites 3, 7, 11). Every rotation needs a
        // control beside it; the front policy steps the column of controls through the
        // lattice together, so the lattice's couplings stay whole but for the one column the
        // front stands in, where moving one control at a time tears them apart.
        let dev = Device::new(
            "grid",
            12,
            &lattice::grid(3, 4),
            NativeSet::rz_sx_x_cx(),
            Calibration::default(),
        );
        let h = heisenberg(3, 3);
        let program = crate::formula::step(
            &crate::formula::order_terms(&h),
            crate::formula::Order::Second,
            0.2,
        );
        let n = 9;
        let mut layout: Vec<u32> = (0..3)
            .flat_map(|r| (0..3).map(move |c| 4 * r + c))
            .collect();
        layout.extend([7, 3, 11]);
        let near = assert_exact_with(&program, n, &layout, &dev, Policy::Nearest);
        let two = |c: &CatRouting| c.circuit.gates.iter().filter(|g| g.is_two_qubit()).count();
        for policy in [Policy::Front, Policy::FrontMerged] {
            let front = assert_exact_with(&program, n, &layout, &dev, policy);
            assert!(
                two(&front) < two(&near),
                "{policy:?} {} against nearest {}",
                two(&front),
                two(&near)
            );
            // The front's moves are SWAPs of a control with a system qubit.
            assert!(front.swaps > 0);
        }
    }

    #[test]
    fn copies_are_chosen_where_they_pay() {
        // A 4-site transverse-field Ising ring on the square of sites 1 2 5 4 of a 3 × 3 grid,
        // the ancilla on site 0 beside site 1 only: the chooser adds copies (here on the free
        // sites beside the square) only while each saves more than the 2 CNOTs it costs, and
        // the result is still the controlled step.
        let n = 4;
        let mut h = PauliSum::new(n);
        for q in 0..n {
            h.add(
                PauliString::from_factors(&[(q, Pauli::Z), ((q + 1) % n, Pauli::Z)]).1,
                1.0,
            );
            h.add(PauliString::single(q, Pauli::X), 0.5);
        }
        let dev = Device::new(
            "grid",
            9,
            &lattice::grid(3, 3),
            NativeSet::rz_sx_x_cx(),
            Calibration::default(),
        );
        let program = crate::formula::step(
            &crate::formula::order_terms(&h),
            crate::formula::Order::Second,
            0.2,
        );
        let base = vec![1, 2, 5, 4, 0];
        let comp: Vec<u32> = (0..9).collect();
        let (layout, est) = choose_controls(&program, n, &base, &comp, &dev);
        let alone = static_estimate(&program, n, &base, &dev, &neighbour_lists(&dev));
        assert!(est <= alone);
        assert_eq!(&layout[..n + 1], &base[..]);
        assert!(controls_connected(&layout, n, &dev));
        assert_exact(&program, n, &layout, &dev);
    }
}
