//! One routed Trotter step, reused for every step of every circuit of a campaign.
//!
//! In: the logical circuit of one product-formula step `S(δ)` (controlled rotations, ancilla
//! last, no measurements), the campaign's [`TargetPlan`] and the [`Device`]. Out: a
//! [`RoutedStep`], two physical circuits (with `swap` gates, not yet lowered) whose alternation
//! implements `S(δ)^r` for any `r`, and the layouts between them; [`super::campaign`] then
//! builds each circuit of the campaign from its own prefix (state preparation), `r` blocks and
//! its suffix (bases, measurements). Invariant: block `i` starts from the layout block `i − 1` ended on,
//! and the first starts from the plan's initial layout `L0`; every block implements `S(δ)`
//! exactly (global phase included) under those layouts.
//!
//! ## The idea
//!
//! Routing `k·R` steps from scratch for every time point `k` repeats the same work `k` times,
//! and routing is the most expensive pass. Notation: a routed circuit `C : L0 → L1` maps a
//! logical state placed by `L0` to its image placed by `L1`.
//!
//! - **Symmetric formulas (orders 2 and 4).** Strang's and Suzuki's steps are palindromes of
//!   rotations (Suzuki, J. Math. Phys. 32, 400 (1991)), so `S(−δ)⁻¹ = S(δ)`; the program
//!   `formula::step` returns may have merged equal neighbours, but each merge moves one
//!   rotation past rotations it commutes with, which is just as valid read backwards, so the
//!   reversed program is still the same operator. Route the step once, `C : L0 → L1`, and take
//!   its [`mirror`]: the gates in reverse order, each Clifford gate inverted, each rotation kept
//!   with its angle. Every angle in `C` is an odd function of `δ` (±θ of one rotation, or a sum
//!   of them after cancellation), so the mirror is `C(−δ)⁻¹ : L1 → L0`, i.e. `S(δ)` again,
//!   SWAPs undone in reverse order. A circuit of `r` steps is `C, mirror(C), C, …`; at every
//!   junction the last rotation of one block meets its own mirror image and the peephole pass
//!   ([`crate::circuit::cancel`]) folds the pair into one controlled rotation.
//! - **Lie–Trotter (order 1)** is not symmetric (the mirror would apply the terms in reverse
//!   order, another operator). The second block is then the SWAPs that take `L1` back to `L0`
//!   ([`permutation_swaps`]) followed by `C` again: `C, P·C, P·C, …`.
//!
//! A circuit's state preparation may hold two-qubit gates (singlet pairs): it is routed from
//! `L0` and, if that moved qubits, followed by the SWAPs back to `L0`, so that every circuit of
//! the campaign starts from the `L0` plan.json records.
//!
//! ## Moving tokens home
//!
//! [`permutation_swaps`] realises a placement change with SWAPs along a breadth-first spanning
//! tree of the coupling graph: vertices are fixed in reverse breadth-first order (each is then
//! a leaf of the tree that remains), by bringing the qubit it should hold along the tree path,
//! or, for a vertex that should hold no logical qubit, the nearest free one. Fixed vertices are
//! never touched again, so it ends in at most `Σ` tree path lengths ≤ `V · tree diameter` SWAPs
//! (the classical leaf-by-leaf argument for token swapping on trees).
//!
//! Cost: one routing of one step per campaign (the layout search's own routing of it is kept,
//! see `route::plan_and_route_step`), plus the SWAPs back after a routed state preparation.

use super::swap::{insert_swaps, Adjacency, SwapOutcome, SwapParams};
use super::TargetPlan;
use crate::circuit::{Circuit, Gate};
use crate::device::Device;

/// The mirror image of a unitary circuit: gates in reverse order, each replaced by the inverse
/// of itself with its angles negated (a Clifford gate by its inverse; `rz`, `rx`, `ry` kept
/// as they are; `U(θ, φ, λ)` by `U(θ, λ, φ)`), the global phase kept like an angle. If every
/// angle of `c` and its global phase are odd functions of a parameter `δ`,
/// `mirror(c) = c(−δ)⁻¹`. Measurements are dropped.
pub fn mirror(c: &Circuit) -> Circuit {
    let gates = c
        .gates
        .iter()
        .rev()
        .filter(|g| !g.is_measure())
        .map(|g| match *g {
            Gate::Rz(..) | Gate::Rx(..) | Gate::Ry(..) => *g,
            Gate::U(q, t, p, l) => Gate::U(q, t, l, p),
            _ => g.inverse().expect("a unitary gate has an inverse"),
        })
        .collect();
    Circuit {
        num_qubits: c.num_qubits,
        num_clbits: 0,
        gates,
        global_phase: c.global_phase,
    }
}

/// The exact inverse of a unitary circuit (reverse order, each gate inverted, phase negated).
pub fn inverse(c: &Circuit) -> Circuit {
    Circuit {
        num_qubits: c.num_qubits,
        num_clbits: 0,
        gates: c
            .gates
            .iter()
            .rev()
            .filter(|g| !g.is_measure())
            .map(|g| g.inverse().expect("a unitary gate has an inverse"))
            .collect(),
        global_phase: -c.global_phase,
    }
}

/// SWAPs (physical pairs, in order, each on a coupling) that move logical qubit `l` from site
/// `from[l]` to site `to[l]` for every `l`; other qubits end anywhere. Every site of `from` and
/// `to` must lie in one connected component of `dev`.
pub fn permutation_swaps(from: &[u32], to: &[u32], dev: &Device) -> Vec<(u32, u32)> {
    assert_eq!(from.len(), to.len(), "two placements of the same qubits");
    let mut swaps = Vec::new();
    if from == to || from.is_empty() {
        return swaps;
    }
    let n_phys = dev.num_qubits;
    let adj = Adjacency::new(dev);
    // Breadth-first spanning tree of the component, from the first qubit's site.
    let root = from[0];
    let mut parent = vec![u32::MAX; n_phys];
    let mut depth = vec![0u32; n_phys];
    let mut order = vec![root];
    parent[root as usize] = root;
    let mut head = 0;
    while head < order.len() {
        let u = order[head];
        head += 1;
        for &(v, _) in adj.of(u) {
            if parent[v as usize] == u32::MAX {
                parent[v as usize] = u;
                depth[v as usize] = depth[u as usize] + 1;
                order.push(v);
            }
        }
    }
    const FREE: u32 = u32::MAX;
    let mut holder = vec![FREE; n_phys]; // logical qubit on each site
    let mut site = from.to_vec(); // site of each logical qubit
    let mut wanted = vec![FREE; n_phys];
    for (l, (&f, &t)) in from.iter().zip(to).enumerate() {
        holder[f as usize] = l as u32;
        wanted[t as usize] = l as u32;
    }
    let mut fixed = vec![false; n_phys];
    let tree_path = |a: u32, b: u32| -> Vec<u32> {
        // Sites from a to b along the tree.
        let (mut x, mut y) = (a, b);
        let (mut up, mut down) = (vec![x], vec![y]);
        while x != y {
            if depth[x as usize] >= depth[y as usize] {
                x = parent[x as usize];
                up.push(x);
            } else {
                y = parent[y as usize];
                down.push(y);
            }
        }
        down.pop(); // the meeting vertex is already the last of `up`
        up.extend(down.into_iter().rev());
        up
    };
    let mut do_swap = |a: u32, b: u32, holder: &mut Vec<u32>, site: &mut Vec<u32>| {
        let (la, lb) = (holder[a as usize], holder[b as usize]);
        holder.swap(a as usize, b as usize);
        if la != FREE {
            site[la as usize] = b;
        }
        if lb != FREE {
            site[lb as usize] = a;
        }
        swaps.push((a, b));
    };
    for &v in order.iter().rev() {
        let source = match wanted[v as usize] {
            FREE if holder[v as usize] == FREE => None,
            FREE => {
                // The nearest free token among the vertices not yet fixed (one exists: the
                // remaining tree has as many free tokens as vertices that want none).
                let mut seen = vec![v];
                let mut visited = vec![false; n_phys];
                visited[v as usize] = true;
                let mut i = 0;
                let mut found = None;
                while i < seen.len() {
                    let u = seen[i];
                    i += 1;
                    if holder[u as usize] == FREE {
                        found = Some(u);
                        break;
                    }
                    for &(w, _) in adj.of(u) {
                        let tree_edge = parent[w as usize] == u || parent[u as usize] == w;
                        if tree_edge && !fixed[w as usize] && !visited[w as usize] {
                            visited[w as usize] = true;
                            seen.push(w);
                        }
                    }
                }
                Some(found.expect("the remaining tree holds a free token"))
            }
            l => Some(site[l as usize]),
        };
        if let Some(s) = source {
            let path = tree_path(s, v);
            for w in path.windows(2) {
                do_swap(w[0], w[1], &mut holder, &mut site);
            }
        }
        fixed[v as usize] = true;
    }
    debug_assert!(site == to, "every qubit reached its site");
    swaps
}

/// A routed step and how its blocks alternate (see the module essay).
#[derive(Clone, Debug)]
pub struct RoutedStep {
    /// `C : start → end`, physical qubits, `swap` gates kept, not lowered.
    pub forward: Circuit,
    /// Symmetric formulas: `mirror(C) : end → start`; order 1: `P·C : end → end`.
    pub back: Circuit,
    pub start: Vec<u32>,
    pub end: Vec<u32>,
    pub symmetric: bool,
}

impl RoutedStep {
    /// Which block implements step `i` (counting from 0): 0 for `forward`, 1 for `back`.
    pub fn block_index(&self, i: usize) -> usize {
        if i == 0 || (self.symmetric && i.is_multiple_of(2)) {
            0
        } else {
            1
        }
    }

    /// The block that implements step `i` (counting from 0).
    pub fn block(&self, i: usize) -> &Circuit {
        if self.block_index(i) == 0 {
            &self.forward
        } else {
            &self.back
        }
    }

    /// The layout after `steps` blocks.
    pub fn layout_after(&self, steps: usize) -> &[u32] {
        if steps == 0 || (self.symmetric && steps.is_multiple_of(2)) {
            &self.start
        } else {
            &self.end
        }
    }
}

/// Routes the logical step `step` (qubits `0..n`, ancilla last) once from the plan's initial
/// layout and builds the block that follows it: its mirror when `symmetric`, else the SWAPs
/// back to the initial layout followed by the step again.
pub fn route_step(
    step: &Circuit,
    plan: &TargetPlan,
    dev: &Device,
    params: &SwapParams,
    symmetric: bool,
) -> RoutedStep {
    let start = &plan.initial_layout[..step.num_qubits];
    step_from_routing(insert_swaps(step, start, dev, params), plan, dev, symmetric)
}

/// [`route_step`] from a routing of the step already made from the plan's initial layout.
pub fn step_from_routing(
    fwd: SwapOutcome,
    plan: &TargetPlan,
    dev: &Device,
    symmetric: bool,
) -> RoutedStep {
    let start = plan.initial_layout[..fwd.final_layout.len()].to_vec();
    let back = if symmetric {
        mirror(&fwd.circuit)
    } else {
        let mut c = Circuit::new(fwd.circuit.num_qubits, 0);
        c.extend(
            permutation_swaps(&fwd.final_layout, &start, dev)
                .into_iter()
                .map(|(a, b)| Gate::Swap(a, b)),
        );
        c.extend(fwd.circuit.gates.iter().copied());
        c
    };
    RoutedStep {
        forward: fwd.circuit,
        back,
        start,
        end: fwd.final_layout,
        symmetric,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::device::{lattice, Calibration, NativeSet};
    use crate::sim::unitary_distance;
    use rand::{Rng, SeedableRng};

    #[test]
    fn permutation_swaps_reach_every_target_on_coupled_pairs() {
        // Random placements of 9 qubits on a 4×4 grid and on a heavy hexagon, both ways round.
        let hex = lattice::BridgedHex::new(3, 7).unwrap();
        for (links, n) in [
            (lattice::grid(4, 4), 16usize),
            (hex.links(), hex.qubits() as usize),
        ] {
            let dev = Device::new(
                "d",
                n,
                &links,
                NativeSet::rz_sx_x_cx(),
                Calibration::default(),
            );
            let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
            for _ in 0..20 {
                let mut sites: Vec<u32> = (0..n as u32).collect();
                let k = 9;
                for i in 0..n {
                    sites.swap(i, rng.gen_range(i..n));
                }
                let from = sites[..k].to_vec();
                for i in 0..n {
                    sites.swap(i, rng.gen_range(i..n));
                }
                let to = sites[..k].to_vec();
                let swaps = permutation_swaps(&from, &to, &dev);
                let mut at = from.clone();
                for &(a, b) in &swaps {
                    assert!(dev.coupled(a, b), "{a}-{b}");
                    for p in at.iter_mut() {
                        if *p == a {
                            *p = b;
                        } else if *p == b {
                            *p = a;
                        }
                    }
                }
                assert_eq!(at, to);
            }
        }
    }

    #[test]
    fn the_mirror_of_a_symmetric_product_is_the_same_operator() {
        // exp(-iθ ZZ) exp(-iφ X) exp(-iθ ZZ) as gates: a palindrome of rotations, so its
        // mirror (reverse order, Cliffords inverted, rz kept) is the same unitary.
        let mut c = Circuit::new(2, 0);
        let zz = |t: f64| [Gate::Cx(0, 1), Gate::Rz(1, t), Gate::Cx(0, 1)];
        c.extend(zz(0.3));
        c.extend([Gate::H(0), Gate::Rz(0, 0.7), Gate::H(0)]);
        c.extend([Gate::S(1), Gate::Swap(0, 1), Gate::Swap(0, 1), Gate::Sdg(1)]);
        c.extend(zz(0.3));
        assert!(unitary_distance(&c, &mirror(&c)) < 1e-12);
        // Not symmetric: the mirror is another operator, the inverse is the inverse.
        let mut d = Circuit::new(2, 0);
        d.extend(zz(0.3));
        d.extend([Gate::H(0), Gate::Rz(0, 0.7), Gate::H(0), Gate::S(1)]);
        assert!(unitary_distance(&d, &mirror(&d)) > 1e-3);
        let mut both = d.clone();
        both.extend(inverse(&d).gates);
        assert!(unitary_distance(&both, &Circuit::new(2, 0)) < 1e-12);
    }
}
