//! The device model: coupling graph, native gates and calibration.
//!
//! In: a name, a qubit count, undirected couplings, a [`NativeSet`] and a [`Calibration`] (from
//! the `.dev` parser in `lang::dev`, or from code). Out: a [`Device`] that answers what routing,
//! lowering and costing ask: is a pair coupled, how far apart are two qubits, what does a gate
//! cost in error and time. Invariants: physical qubit `k` is node `k` of the petgraph graph;
//! couplings are undirected, without self-loops or duplicates; the all-pairs hop distances are
//! computed once, at construction ([`UNREACHABLE`] between components).
//!
//! Calibration defaults: a gate without an error rate has error 0 and a gate without a time
//! takes 0 ns (the usual treatment of virtual `rz`); a measurement uses the readout error and
//! the time given for `measure`.

pub mod lattice;
pub mod native;

use crate::circuit::{Circuit, Gate};
use crate::plan::Costs;
use petgraph::graph::{NodeIndex, UnGraph};
use rayon::prelude::*;
use std::collections::BTreeMap;

pub use lattice::Link;
pub use native::{Entangler, NativeSet, OneQubitBasis};

/// Distance between qubits in different components.
pub const UNREACHABLE: u32 = u32::MAX;

/// Error rates and gate times. Keys are gate names as in [`NativeSet::names`].
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Calibration {
    /// Default error rate per gate name.
    pub error_rate: BTreeMap<String, f64>,
    /// Error rate of a one-qubit gate on one qubit, overriding the default.
    pub qubit_error_rate: BTreeMap<(String, u32), f64>,
    /// Error rate of a two-qubit gate on one link `(a, b)`, `a < b`, overriding the default.
    pub link_error_rate: BTreeMap<(String, u32, u32), f64>,
    /// Readout (measurement) error rate, default and per qubit.
    pub readout_error_rate: f64,
    pub qubit_readout_error_rate: BTreeMap<u32, f64>,
    /// Duration per gate name in ns; `measure` for readout.
    pub time_ns: BTreeMap<String, f64>,
    /// Coherence time in ns (`coherence`), default and per qubit: a qubit that waits `t`
    /// between its first and last gate keeps its state with probability `exp(−t / T)` in the
    /// success estimate. `None` and no override: idling is free.
    pub coherence_ns: Option<f64>,
    pub qubit_coherence_ns: BTreeMap<u32, f64>,
}

impl Calibration {
    /// The shortest coherence time given, default or per qubit (`None`: no `coherence` line,
    /// so idling is free).
    pub fn shortest_coherence_ns(&self) -> Option<f64> {
        self.coherence_ns
            .into_iter()
            .chain(self.qubit_coherence_ns.values().copied())
            .reduce(f64::min)
    }
}

/// A device: what the compiler needs to know to place, route, lower and cost a circuit.
#[derive(Clone, Debug)]
pub struct Device {
    pub name: String,
    pub num_qubits: usize,
    /// Undirected coupling graph; node `k` is physical qubit `k`.
    pub graph: UnGraph<(), ()>,
    pub native: NativeSet,
    pub calibration: Calibration,
    /// Row-major all-pairs hop distances.
    dist: Vec<u32>,
}

impl Device {
    /// Builds a device; `links` may come in any order and may repeat (self-links are dropped).
    pub fn new(
        name: &str,
        num_qubits: usize,
        links: &[Link],
        native: NativeSet,
        calibration: Calibration,
    ) -> Device {
        let mut graph = UnGraph::<(), ()>::with_capacity(num_qubits, links.len());
        for _ in 0..num_qubits {
            graph.add_node(());
        }
        let mut sorted: Vec<Link> = links
            .iter()
            .filter(|(a, b)| a != b)
            .map(|&(a, b)| (a.min(b), a.max(b)))
            .collect();
        sorted.sort_unstable();
        sorted.dedup();
        for (a, b) in sorted {
            graph.add_edge(NodeIndex::new(a as usize), NodeIndex::new(b as usize), ());
        }
        let dist = all_pairs_hops(&graph);
        Device {
            name: name.to_string(),
            num_qubits,
            graph,
            native,
            calibration,
            dist,
        }
    }

    /// An ideal all-to-all device with `{rz, sx, x, cx}`, no errors and no gate times.
    pub fn all_to_all(n: usize) -> Device {
        Device::new(
            &format!("all-to-all-{n}"),
            n,
            &lattice::full(n as u32),
            NativeSet::rz_sx_x_cx(),
            Calibration::default(),
        )
    }

    /// True when a two-qubit gate may act on `a` and `b`.
    pub fn coupled(&self, a: u32, b: u32) -> bool {
        self.distance(a, b) == 1
    }

    /// Hop distance in the coupling graph ([`UNREACHABLE`] across components, 0 on the diagonal).
    pub fn distance(&self, a: u32, b: u32) -> u32 {
        let n = self.num_qubits;
        let (a, b) = (a as usize, b as usize);
        if a >= n || b >= n {
            return UNREACHABLE;
        }
        self.dist[a * n + b]
    }

    /// Neighbours of physical qubit `q`, ascending.
    pub fn neighbours(&self, q: u32) -> Vec<u32> {
        let mut v: Vec<u32> = self
            .graph
            .neighbors(NodeIndex::new(q as usize))
            .map(|n| n.index() as u32)
            .collect();
        v.sort_unstable();
        v
    }

    /// The couplings `(a, b)`, `a < b`, ascending.
    pub fn links(&self) -> Vec<Link> {
        let mut v: Vec<Link> = self
            .graph
            .edge_indices()
            .filter_map(|e| self.graph.edge_endpoints(e))
            .map(|(a, b)| {
                let (a, b) = (a.index() as u32, b.index() as u32);
                (a.min(b), a.max(b))
            })
            .collect();
        v.sort_unstable();
        v
    }

    /// Connected components, each ascending, ordered by size (largest first), then by first qubit.
    pub fn components(&self) -> Vec<Vec<u32>> {
        let n = self.num_qubits;
        let mut seen = vec![false; n];
        let mut out = Vec::new();
        for s in 0..n {
            if seen[s] {
                continue;
            }
            let mut comp: Vec<u32> = (0..n as u32)
                .filter(|&q| self.dist[s * n + q as usize] != UNREACHABLE)
                .collect();
            comp.sort_unstable();
            for &q in &comp {
                seen[q as usize] = true;
            }
            out.push(comp);
        }
        out.sort_by(|a, b| b.len().cmp(&a.len()).then(a[0].cmp(&b[0])));
        out
    }

    /// Native gate names in the spelling [`crate::circuit::verify::Rules::native`] expects.
    pub fn native_names(&self) -> Vec<String> {
        self.native.names.clone()
    }

    /// Error rate of one gate occurrence (readout error for a measurement; 0 when not given).
    pub fn gate_error(&self, g: &Gate) -> f64 {
        let cal = &self.calibration;
        let name = g.name().to_string();
        match *g {
            Gate::Measure(q, _) => cal
                .qubit_readout_error_rate
                .get(&q)
                .copied()
                .unwrap_or(cal.readout_error_rate),
            _ if g.is_two_qubit() => {
                let qs = g.qubits();
                let (a, b) = (qs[0].min(qs[1]), qs[0].max(qs[1]));
                cal.link_error_rate
                    .get(&(name.clone(), a, b))
                    .or_else(|| cal.error_rate.get(&name))
                    .copied()
                    .unwrap_or(0.0)
            }
            _ => {
                let q = g.qubits()[0];
                cal.qubit_error_rate
                    .get(&(name.clone(), q))
                    .or_else(|| cal.error_rate.get(&name))
                    .copied()
                    .unwrap_or(0.0)
            }
        }
    }

    /// Duration of one gate occurrence in ns (`measure` time for a measurement; 0 when not given).
    pub fn gate_time_ns(&self, g: &Gate) -> f64 {
        self.calibration
            .time_ns
            .get(g.name())
            .copied()
            .unwrap_or(0.0)
    }
}

/// Breadth-first search from every node: O(V·(V+E)) work, split over cores by source. The neighbour lists are first copied
/// into one flat array (compressed rows), which walks memory in order instead of following
/// petgraph's per-edge links: on 2048 qubits with 12 000 couplings this is what keeps reading a
/// large `.dev` file fast (`cargo bench --bench device_parse`).
fn all_pairs_hops(g: &UnGraph<(), ()>) -> Vec<u32> {
    let n = g.node_count();
    let mut first = Vec::with_capacity(n + 1);
    let mut adj: Vec<u32> = Vec::with_capacity(2 * g.edge_count());
    for u in 0..n {
        first.push(adj.len());
        adj.extend(g.neighbors(NodeIndex::new(u)).map(|v| v.index() as u32));
    }
    first.push(adj.len());
    let mut dist = vec![UNREACHABLE; n * n];
    if n == 0 {
        return dist;
    }
    // One row per source; rows are independent, so they are filled in parallel (the result
    // does not depend on the number of threads).
    dist.par_chunks_mut(n).enumerate().for_each_init(
        || Vec::with_capacity(n),
        |queue: &mut Vec<u32>, (s, row)| {
            row[s] = 0;
            queue.clear();
            queue.push(s as u32);
            let mut head = 0;
            while head < queue.len() {
                let u = queue[head] as usize;
                head += 1;
                let du = row[u];
                for &v in &adj[first[u]..first[u + 1]] {
                    if row[v as usize] == UNREACHABLE {
                        row[v as usize] = du + 1;
                        queue.push(v);
                    }
                }
            }
        },
    );
    dist
}

/// Costs of a routed, lowered circuit on `dev`, as recorded in plan.json: depth, gate counts,
/// `swaps` (inserted by routing; pass the number from [`crate::route::Routed`]), critical-path
/// duration from the gate times, and `Π (1 − error)` over gates and readouts.
pub fn costs(c: &Circuit, dev: &Device, swaps: usize) -> Costs {
    let model = CostModel::new(dev);
    let mut walk = model.walk(c.num_qubits);
    walk.add(&c.gates);
    walk.finish(swaps)
}

/// Every gate name the IR knows, in the order of [`gate_kind`].
const KIND_NAMES: [&str; 16] = [
    "h", "x", "y", "z", "s", "sdg", "sx", "sxdg", "rz", "rx", "ry", "U", "cx", "cz", "swap",
    "measure",
];

/// Index of a gate's name in [`KIND_NAMES`].
fn gate_kind(g: &Gate) -> usize {
    match g {
        Gate::H(_) => 0,
        Gate::X(_) => 1,
        Gate::Y(_) => 2,
        Gate::Z(_) => 3,
        Gate::S(_) => 4,
        Gate::Sdg(_) => 5,
        Gate::Sx(_) => 6,
        Gate::Sxdg(_) => 7,
        Gate::Rz(..) => 8,
        Gate::Rx(..) => 9,
        Gate::Ry(..) => 10,
        Gate::U(..) => 11,
        Gate::Cx(..) => 12,
        Gate::Cz(..) => 13,
        Gate::Swap(..) => 14,
        Gate::Measure(..) => 15,
    }
}

/// The calibration of a device as tables indexed by gate kind (overrides in hash maps), so that
/// costing a circuit of 10⁸ gates does not look names up in ordered maps of strings. Gives
/// exactly [`Device::gate_error`] and [`Device::gate_time_ns`].
pub struct CostModel {
    error: [f64; 16],
    time_ns: [f64; 16],
    /// Per qubit and one-qubit kind: the error rate, overrides applied (`n × 16`).
    qubit_error: Vec<[f64; 16]>,
    /// Per two-qubit kind with link overrides: a dense `n × n` table (devices up to
    /// [`DENSE_LINKS_MAX`] qubits) or the overrides alone.
    link_error: Vec<(usize, LinkTable)>,
    readout: Vec<f64>,
    readout_default: f64,
    /// Per qubit, `1 / T` of its coherence time in 1/ns (0: idling is free).
    idle_rate: Vec<f64>,
}

/// Largest device whose link overrides are kept as dense `n × n` tables (8 MB per gate kind).
pub const DENSE_LINKS_MAX: usize = 1024;

enum LinkTable {
    Dense(Vec<f64>),
    Sparse(std::collections::HashMap<(u32, u32), f64>),
}

impl CostModel {
    pub fn new(dev: &Device) -> CostModel {
        let cal = &dev.calibration;
        let n = dev.num_qubits;
        let kind_of = |name: &str| KIND_NAMES.iter().position(|&k| k == name);
        let mut error = [0.0; 16];
        let mut time_ns = [0.0; 16];
        for (k, name) in KIND_NAMES.iter().enumerate() {
            error[k] = cal.error_rate.get(*name).copied().unwrap_or(0.0);
            time_ns[k] = cal.time_ns.get(*name).copied().unwrap_or(0.0);
        }
        let mut qubit_error = vec![error; n];
        for ((name, q), &e) in &cal.qubit_error_rate {
            if let (Some(k), Some(row)) = (kind_of(name), qubit_error.get_mut(*q as usize)) {
                row[k] = e;
            }
        }
        let mut link_error: Vec<(usize, LinkTable)> = Vec::new();
        for ((name, a, b), &e) in &cal.link_error_rate {
            let Some(k) = kind_of(name) else { continue };
            let at = match link_error.iter().position(|(kk, _)| *kk == k) {
                Some(i) => i,
                None => {
                    let table = if n <= DENSE_LINKS_MAX {
                        LinkTable::Dense(vec![error[k]; n * n])
                    } else {
                        LinkTable::Sparse(Default::default())
                    };
                    link_error.push((k, table));
                    link_error.len() - 1
                }
            };
            let (a, b) = ((*a).min(*b), (*a).max(*b));
            match &mut link_error[at].1 {
                LinkTable::Dense(t) if (b as usize) < n => t[a as usize * n + b as usize] = e,
                LinkTable::Dense(_) => {}
                LinkTable::Sparse(m) => {
                    m.insert((a, b), e);
                }
            }
        }
        let readout = (0..n as u32)
            .map(|q| {
                cal.qubit_readout_error_rate
                    .get(&q)
                    .copied()
                    .unwrap_or(cal.readout_error_rate)
            })
            .collect();
        let idle_rate = (0..n as u32)
            .map(|q| {
                cal.qubit_coherence_ns
                    .get(&q)
                    .copied()
                    .or(cal.coherence_ns)
                    .map_or(0.0, |t| 1.0 / t)
            })
            .collect();
        CostModel {
            error,
            time_ns,
            qubit_error,
            link_error,
            readout,
            readout_default: cal.readout_error_rate,
            idle_rate,
        }
    }

    /// [`Device::gate_error`].
    pub fn error(&self, g: &Gate) -> f64 {
        let k = gate_kind(g);
        match *g {
            Gate::Measure(q, _) => self
                .readout
                .get(q as usize)
                .copied()
                .unwrap_or(self.readout_default),
            Gate::Cx(a, b) | Gate::Cz(a, b) | Gate::Swap(a, b) => {
                let Some((_, table)) = self.link_error.iter().find(|(kk, _)| *kk == k) else {
                    return self.error[k];
                };
                let (a, b) = (a.min(b), a.max(b));
                match table {
                    LinkTable::Dense(t) => {
                        let n = self.qubit_error.len();
                        t.get(a as usize * n + b as usize)
                            .copied()
                            .unwrap_or(self.error[k])
                    }
                    LinkTable::Sparse(m) => m.get(&(a, b)).copied().unwrap_or(self.error[k]),
                }
            }
            _ => {
                let q = g.qubits()[0] as usize;
                self.qubit_error.get(q).map_or(self.error[k], |row| row[k])
            }
        }
    }

    /// [`Device::gate_time_ns`].
    pub fn time_ns(&self, g: &Gate) -> f64 {
        self.time_ns[gate_kind(g)]
    }

    /// A running cost over `num_qubits` qubits, fed gate lists in program order.
    pub fn walk(&self, num_qubits: usize) -> CostWalk<'_> {
        CostWalk {
            model: self,
            depth: vec![0; num_qubits],
            depth2: vec![0; num_qubits],
            ready_ns: vec![0.0; num_qubits],
            busy_ns: vec![0.0; num_qubits],
            first_ns: vec![f64::NAN; num_qubits],
            longest_depth: 0,
            longest_depth2: 0,
            longest_ns: 0.0,
            two_qubit: 0,
            one_qubit: 0,
            success: 1.0,
        }
    }
}

/// The costs of a circuit given in consecutive pieces: the same figures as [`costs`] on the
/// concatenation (depth and duration are longest paths through per-qubit ready times; the
/// success probability is multiplied piece by piece, so it may differ from [`costs`] in the
/// last bits).
pub struct CostWalk<'a> {
    model: &'a CostModel,
    depth: Vec<u32>,
    /// Per qubit, the two-qubit layer its last two-qubit gate ends on.
    depth2: Vec<u32>,
    ready_ns: Vec<f64>,
    /// Per qubit, the time its own gates take (the rest of the circuit's duration it idles).
    busy_ns: Vec<f64>,
    /// Per qubit, when its first gate starts (`NaN` until it has one).
    first_ns: Vec<f64>,
    longest_depth: u32,
    longest_depth2: u32,
    longest_ns: f64,
    two_qubit: usize,
    one_qubit: usize,
    success: f64,
}

/// Gate counts and `Π (1 − error)` of a gate list: the parts of [`Costs`] that add up (and
/// multiply) piece by piece, so a piece shared by many circuits is tallied once.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Tally {
    pub two_qubit: usize,
    pub one_qubit: usize,
    pub success: f64,
}

impl CostModel {
    /// The [`Tally`] of `gates`.
    pub fn tally(&self, gates: &[Gate]) -> Tally {
        let mut t = Tally {
            two_qubit: 0,
            one_qubit: 0,
            success: 1.0,
        };
        for g in gates {
            match g {
                Gate::Measure(..) => {}
                g if g.is_two_qubit() => t.two_qubit += 1,
                _ => t.one_qubit += 1,
            }
            t.success *= 1.0 - self.error(g);
        }
        t
    }
}

impl CostWalk<'_> {
    /// Adds `gates`, counting and multiplying their errors as it goes.
    pub fn add(&mut self, gates: &[Gate]) {
        let t = self.model.tally(gates);
        self.add_tallied(gates, &t);
    }

    /// Adds `gates` whose [`Tally`] is already known: only depth and duration are walked.
    pub fn add_tallied(&mut self, gates: &[Gate], tally: &Tally) {
        for g in gates {
            let qs = g.qubits();
            let d = 1 + qs
                .iter()
                .map(|&q| self.depth[q as usize])
                .max()
                .unwrap_or(0);
            let took = self.model.time_ns(g);
            let t = took
                + qs.iter()
                    .map(|&q| self.ready_ns[q as usize])
                    .fold(0.0, f64::max);
            for &q in &qs {
                let q = q as usize;
                self.depth[q] = d;
                self.ready_ns[q] = t;
                self.busy_ns[q] += took;
                if self.first_ns[q].is_nan() {
                    self.first_ns[q] = t - took;
                }
            }
            if let [a, b] = qs[..] {
                let d2 = 1 + self.depth2[a as usize].max(self.depth2[b as usize]);
                self.depth2[a as usize] = d2;
                self.depth2[b as usize] = d2;
                self.longest_depth2 = self.longest_depth2.max(d2);
            }
            self.longest_depth = self.longest_depth.max(d);
            self.longest_ns = self.longest_ns.max(t);
        }
        self.two_qubit += tally.two_qubit;
        self.one_qubit += tally.one_qubit;
        self.success *= tally.success;
    }

    /// `Σ (last − first − busy) / T` over the qubits the circuit touches: `first` when the
    /// qubit's first gate starts, `last` when its last gate ends, `busy` the time of its own
    /// gates, `T` its coherence time. `exp(−idle_decay)` is the chance that no qubit decays
    /// while it waits (common practice: each idle qubit treated as an independent exponential
    /// decay, the usual first-order idle term of success estimates; gates carry their own
    /// calibrated error, so their time is not counted again).
    ///
    /// Only the wait between a qubit's first and last gate counts. Before its first gate a
    /// qubit holds |0⟩, which neither relaxes nor dephases. After its last gate nothing it
    /// holds reaches a measured qubit: a channel on one qubit leaves the reduced state of the
    /// others unchanged (no-signalling; Nielsen & Chuang, *Quantum Computation and Quantum
    /// Information*, 2000, §2.4.3, from memory). A measured qubit's window ends with its
    /// `measure`. For a piece of a longer circuit, where every qubit it touches is alive on
    /// both sides, see [`Self::open_idle_decay`].
    pub fn idle_decay(&self) -> f64 {
        self.first_ns
            .iter()
            .zip(&self.ready_ns)
            .zip(&self.busy_ns)
            .zip(&self.model.idle_rate)
            .filter(|(((first, _), _), &rate)| !first.is_nan() && rate > 0.0)
            .map(|(((&first, &last), &busy), &rate)| (last - first - busy).max(0.0) * rate)
            .sum()
    }

    /// `Σ (D − busy) / T` over the qubits the walk touches, `D` the walk's duration: the
    /// idling of a piece cut from the middle of a circuit (a routed Trotter step), where
    /// every qubit it touches holds state from before it until after it, so it waits the
    /// whole piece through.
    pub fn open_idle_decay(&self) -> f64 {
        self.first_ns
            .iter()
            .zip(&self.busy_ns)
            .zip(&self.model.idle_rate)
            .filter(|((first, _), &rate)| !first.is_nan() && rate > 0.0)
            .map(|((_, &busy), &rate)| (self.longest_ns - busy).max(0.0) * rate)
            .sum()
    }

    pub fn finish(&self, swaps: usize) -> Costs {
        Costs {
            depth: self.longest_depth as usize,
            two_qubit_depth: self.longest_depth2 as usize,
            two_qubit: self.two_qubit,
            one_qubit: self.one_qubit,
            swaps,
            control_copies: 0,
            duration_ns: Some(self.longest_ns),
            success_probability: Some(self.success * (-self.idle_decay()).exp()),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn grid_device() -> Device {
        let mut cal = Calibration::default();
        cal.error_rate.insert("cx".into(), 0.01);
        cal.error_rate.insert("sx".into(), 0.001);
        cal.link_error_rate.insert(("cx".into(), 0, 1), 0.05);
        cal.readout_error_rate = 0.02;
        cal.time_ns.insert("cx".into(), 300.0);
        cal.time_ns.insert("sx".into(), 35.0);
        cal.time_ns.insert("measure".into(), 1000.0);
        Device::new("g", 6, &lattice::grid(2, 3), NativeSet::rz_sx_x_cx(), cal)
    }

    /// The idle term by hand: on a line of 4, `cx 0 1`, `cx 1 2`, `cx 0 1` (300 ns each) last
    /// 900 ns. Qubit 0 is busy 0–300 and 600–900, so it waits 300 ns between its gates;
    /// qubit 1 never waits; qubit 2's only gate runs 300–600, and the time before it (in |0⟩)
    /// and after it (never measured) does not count; qubit 3 is untouched. With a 100 µs
    /// default and 50 µs on qubit 2 the decay is 300/100000 = 0.003, so the estimate is
    /// 0.99³ · e^−0.003 (each idle qubit an independent exponential decay, common practice).
    /// As a piece of a longer circuit every touched qubit waits the whole 900 ns less its own
    /// gates: 300/100000 + 600/50000 = 0.015. Without coherence times the estimate is 0.99³.
    #[test]
    fn waiting_qubits_decay_by_their_coherence_times() {
        let mut cal = Calibration::default();
        cal.error_rate.insert("cx".into(), 0.01);
        cal.time_ns.insert("cx".into(), 300.0);
        let plain = Device::new(
            "l",
            4,
            &lattice::line(4),
            NativeSet::rz_sx_x_cx(),
            cal.clone(),
        );
        cal.coherence_ns = Some(100_000.0);
        cal.qubit_coherence_ns.insert(2, 50_000.0);
        let dev = Device::new("l", 4, &lattice::line(4), NativeSet::rz_sx_x_cx(), cal);
        let mut c = Circuit::new(4, 0);
        c.push(Gate::Cx(0, 1));
        c.push(Gate::Cx(1, 2));
        c.push(Gate::Cx(0, 1));
        let model = CostModel::new(&dev);
        let mut walk = model.walk(4);
        walk.add(&c.gates);
        assert!((walk.idle_decay() - 0.003).abs() < 1e-15);
        assert!((walk.open_idle_decay() - 0.015).abs() < 1e-15);
        let p = costs(&c, &dev, 0).success_probability.unwrap();
        assert!(
            (p - 0.99f64.powi(3) * (-0.003f64).exp()).abs() < 1e-15,
            "{p}"
        );
        let p0 = costs(&c, &plain, 0).success_probability.unwrap();
        assert!((p0 - 0.99f64.powi(3)).abs() < 1e-15, "{p0}");
        // Side by side, neither waits.
        let mut side = Circuit::new(4, 0);
        side.push(Gate::Cx(0, 1));
        side.push(Gate::Cx(2, 3));
        let p = costs(&side, &dev, 0).success_probability.unwrap();
        assert!((p - 0.99f64.powi(2)).abs() < 1e-15, "{p}");
    }

    #[test]
    fn distances_on_a_grid_are_manhattan() {
        let d = grid_device();
        for a in 0..6u32 {
            for b in 0..6u32 {
                let (ra, ca) = (a / 3, a % 3);
                let (rb, cb) = (b / 3, b % 3);
                assert_eq!(d.distance(a, b), ra.abs_diff(rb) + ca.abs_diff(cb));
            }
        }
        assert!(d.coupled(1, 4) && d.coupled(4, 1) && !d.coupled(0, 4));
        assert_eq!(d.neighbours(4), vec![1, 3, 5]);
    }

    #[test]
    fn hop_distances_agree_with_petgraph_dijkstra() {
        // Reference: petgraph's Dijkstra with unit weights, on a heavy hexagon with a bridge
        // cut loose (so there are two components and some unreachable pairs).
        let h = lattice::BridgedHex::new(3, 7).unwrap();
        let mut links = h.links();
        let bridge = h.bridges(1).next().unwrap();
        links.retain(|&(a, b)| a != bridge && b != bridge);
        let n = h.qubits() as usize;
        let d = Device::new(
            "h",
            n,
            &links,
            NativeSet::rz_sx_x_cx(),
            Calibration::default(),
        );
        assert_eq!(d.components().len(), 2);
        for a in 0..n {
            let reference = petgraph::algo::dijkstra(&d.graph, NodeIndex::new(a), None, |_| 1u32);
            for b in 0..n {
                let want = reference
                    .get(&NodeIndex::new(b))
                    .copied()
                    .unwrap_or(UNREACHABLE);
                assert_eq!(d.distance(a as u32, b as u32), want, "{a} -> {b}");
            }
        }
    }

    #[test]
    fn a_walk_in_pieces_gives_the_depths_of_the_whole_circuit() {
        // Random gates on the 2×3 grid's pairs, walked in uneven pieces: the depth and the
        // two-qubit depth must equal `circuit::metrics::counts` on the whole circuit.
        use rand::{Rng, SeedableRng};
        let d = grid_device();
        let pairs = [(0, 1), (1, 2), (3, 4), (4, 5), (0, 3), (1, 4), (2, 5)];
        let model = CostModel::new(&d);
        for seed in 0..50u64 {
            let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
            let mut c = Circuit::new(6, 0);
            for _ in 0..60 {
                let (a, b) = pairs[rng.gen_range(0..pairs.len())];
                c.push(match rng.gen_range(0..4) {
                    0 => Gate::Cx(a, b),
                    1 => Gate::Cx(b, a),
                    2 => Gate::Sx(a),
                    _ => Gate::Rz(b, 0.3),
                });
            }
            let mut walk = model.walk(6);
            for piece in c.gates.chunks(7 + seed as usize % 5) {
                walk.add(piece);
            }
            let got = walk.finish(0);
            let want = crate::circuit::metrics::counts(&c);
            assert_eq!(got.depth, want.depth, "seed {seed}");
            assert_eq!(got.two_qubit_depth, want.two_qubit_depth, "seed {seed}");
            assert!(want.two_qubit_depth <= want.two_qubit);
        }
    }

    #[test]
    fn components_are_found_and_ordered() {
        let d = Device::new(
            "x",
            6,
            &[(0, 1), (3, 4), (4, 5)],
            NativeSet::rz_sx_x_cx(),
            Calibration::default(),
        );
        assert_eq!(d.components(), vec![vec![3, 4, 5], vec![0, 1], vec![2]]);
        assert_eq!(d.distance(0, 3), UNREACHABLE);
    }

    #[test]
    fn the_cost_tables_agree_with_the_calibration_lookups() {
        // Every gate kind on every qubit and every pair, with link, qubit and readout
        // overrides: `CostModel` must return exactly what `Device::gate_error` and
        // `Device::gate_time_ns` return.
        let mut d = grid_device();
        d.calibration
            .qubit_error_rate
            .insert(("sx".into(), 4), 0.003);
        d.calibration.qubit_readout_error_rate.insert(5, 0.07);
        d.calibration
            .link_error_rate
            .insert(("swap".into(), 3, 4), 0.2);
        let model = CostModel::new(&d);
        for a in 0..6u32 {
            let mut gates = vec![
                Gate::H(a),
                Gate::X(a),
                Gate::Sx(a),
                Gate::Rz(a, 0.2),
                Gate::U(a, 0.1, 0.2, 0.3),
                Gate::Measure(a, 0),
            ];
            for b in 0..6u32 {
                if a != b {
                    gates.extend([Gate::Cx(a, b), Gate::Cz(a, b), Gate::Swap(a, b)]);
                }
            }
            for g in &gates {
                assert_eq!(model.error(g), d.gate_error(g), "{g:?}");
                assert_eq!(model.time_ns(g), d.gate_time_ns(g), "{g:?}");
            }
        }
    }

    #[test]
    fn costs_use_link_overrides_and_readout() {
        let d = grid_device();
        let mut c = Circuit::new(6, 1);
        c.extend([
            Gate::Sx(0),
            Gate::Cx(0, 1),
            Gate::Cx(1, 2),
            Gate::Rz(2, 0.1),
            Gate::Measure(2, 0),
        ]);
        let k = costs(&c, &d, 0);
        assert_eq!(k.two_qubit, 2);
        assert_eq!(k.duration_ns, Some(35.0 + 300.0 + 300.0 + 0.0 + 1000.0));
        let p = (1.0 - 0.001) * (1.0 - 0.05) * (1.0 - 0.01) * (1.0 - 0.02);
        assert!((k.success_probability.unwrap() - p).abs() < 1e-15);
    }
}
