//! Scheduling by non-commutation: the rotations of one step in any order the non-commuting
//! pairs allow, chosen so that the Hadamard-test ancilla crosses the chip once per step.
//!
//! In: a rotation program (one product-formula step, `formula::step`), the [`TargetPlan`]
//! (initial layout, ancilla) and the [`Device`]. Out: the same rotations in a new order, each
//! with the root of its ladder (the support qubit whose `rz` the ancilla controls), or `None`
//! when the program is too large for the bounded work below. Invariant: the new order is a
//! topological order of the *non-commutation graph* of the program (an arc `i → j` for every
//! `i < j` whose strings anticommute), so the product is exactly the same operator: any two
//! orders with the same relative order on every anticommuting pair are related by swaps of
//! adjacent commuting factors (the standard argument for traces of a partially commutative
//! monoid; Cartier & Foata 1969, from memory).
//!
//! ## The idea
//!
//! Grouping the terms into commuting groups and applying group after group forces the ancilla,
//! which meets every rotation, to sweep the chip once per group and per half-step: about three
//! sweeps per Strang step for an Ising chain (`ZZ/2 · X · ZZ/2`) and five for an XXZ chain.
//! Nothing in the formula asks for that: only anticommuting factors have to keep their order.
//! So the program is read as a partial order and scheduled as a walk: the ancilla's position is
//! modelled by the site of the last root it met (it starts on its own initial site), and among
//! the rotations whose anticommuting predecessors have all run, the next is the one whose
//! support comes closest to that position (ties to the earlier rotation of the program); its
//! root is the support qubit that comes closest. On a chain this is one sweep: `ZZ₀₁/2, X₀,
//! ZZ₁₂/2, X₁, ZZ₀₁/2, ZZ₂₃/2, X₂, ZZ₁₂/2, …`, with the ancilla moving one site per term.
//! This is the commutation-aware scheduling of 2-local Hamiltonians (Lao & Browne, ISCA 2022,
//! on compiling 2-local Hamiltonian simulation) and the block-wise scheduling of Pauli strings
//! (Li, Ding & Xie et al., ASPLOS 2022, on simulation kernels) applied to the
//! ancilla's walk; both citations from memory. `route::plan_target` scores the result against
//! the grouped orders by the two-qubit gates it emits after routing, so it is kept only where
//! it wins.
//!
//! Cost. The graph is built from per-qubit lists (only rotations sharing a qubit can
//! anticommute): `Σ_q |rotations on q|²` string comparisons, held to [`GRAPH_BUDGET`]. The walk
//! scans the ready rotations at each choice, held to [`WALK_BUDGET`] support visits; past it
//! the remaining rotations run in program order among the ready ones (still a topological
//! order). Both bounds are deterministic.

use super::TargetPlan;
use crate::circuit::Qubit;
use crate::device::Device;
use crate::formula::Rotation;
use std::collections::BTreeSet;

/// Most string comparisons spent building the non-commutation graph; past it, no schedule.
pub const GRAPH_BUDGET: usize = 20_000_000;

/// Most support-site visits spent choosing the nearest ready rotation; past it, program order.
pub const WALK_BUDGET: usize = 50_000_000;

/// The rotations of a scheduled step, in order, with the root of each ladder.
#[derive(Clone, Debug, PartialEq)]
pub struct Schedule {
    pub rotations: Vec<Rotation>,
    pub roots: Vec<Qubit>,
}

/// Arcs of the non-commutation graph of `program` (successor lists, in-degrees), or `None`
/// past [`GRAPH_BUDGET`].
pub fn noncommutation_graph(program: &[Rotation]) -> Option<(Vec<Vec<u32>>, Vec<u32>)> {
    let m = program.len();
    let width = program.iter().map(|r| r.pauli.span()).max().unwrap_or(0);
    // The comparisons below add up to `Σ_q C(n_q, 2)` over the rotations `n_q` on each qubit:
    // counted first, so a program past the budget is refused without building anything.
    let mut per_qubit = vec![0usize; width];
    for r in program {
        for q in r.pauli.support_iter() {
            per_qubit[q] += 1;
        }
    }
    let pairs: usize = per_qubit.iter().map(|&c| c * c.saturating_sub(1) / 2).sum();
    if pairs > GRAPH_BUDGET {
        return None;
    }
    let mut on_qubit: Vec<Vec<u32>> = vec![Vec::new(); width];
    let mut succ: Vec<Vec<u32>> = vec![Vec::new(); m];
    let mut indeg = vec![0u32; m];
    let mut stamp = vec![u32::MAX; m];
    let mut spent = 0usize;
    for (j, r) in program.iter().enumerate() {
        let support = r.pauli.support_qubits();
        for &q in &support {
            spent += on_qubit[q].len();
            if spent > GRAPH_BUDGET {
                return None;
            }
            for &i in &on_qubit[q] {
                if stamp[i as usize] != j as u32 {
                    stamp[i as usize] = j as u32;
                    if !program[i as usize].pauli.commutes_with(&r.pauli) {
                        succ[i as usize].push(j as u32);
                        indeg[j] += 1;
                    }
                }
            }
        }
        for &q in &support {
            on_qubit[q].push(j as u32);
        }
    }
    Some((succ, indeg))
}

/// The schedule of `program` for `plan` on `dev` (see the module essay), or `None` when the
/// graph would exceed [`GRAPH_BUDGET`]. Deterministic.
pub fn schedule(program: &[Rotation], plan: &TargetPlan, dev: &Device) -> Option<Schedule> {
    let (succ, mut indeg) = noncommutation_graph(program)?;
    let layout = &plan.initial_layout;
    let sites: Vec<Vec<(u32, Qubit)>> = program
        .iter()
        .map(|r| {
            r.pauli
                .support_qubits()
                .into_iter()
                .map(|q| (layout[q], q as Qubit))
                .collect()
        })
        .collect();
    let mut pos = match plan.ancilla {
        Some(a) => layout[a as usize],
        None => layout.first().copied().unwrap_or(0),
    };
    let mut ready: BTreeSet<u32> = (0..program.len() as u32)
        .filter(|&j| indeg[j as usize] == 0)
        .collect();
    let mut spent = 0usize;
    let mut out = Schedule {
        rotations: Vec::with_capacity(program.len()),
        roots: Vec::with_capacity(program.len()),
    };
    // The support qubit of rotation `j` nearest to `pos`: (distance, qubit, site).
    let nearest = |j: u32, pos: u32| -> (u32, Qubit, u32) {
        sites[j as usize]
            .iter()
            .map(|&(site, q)| (dev.distance(pos, site), q, site))
            .min()
            .expect("rotations are not the identity")
    };
    while let Some(&first) = ready.iter().next() {
        let pick = if spent > WALK_BUDGET {
            first
        } else {
            let mut best = (u32::MAX, first);
            for &j in &ready {
                spent += sites[j as usize].len();
                let d = nearest(j, pos).0;
                if d < best.0 {
                    best = (d, j);
                    if d == 0 {
                        break;
                    }
                }
            }
            best.1
        };
        ready.remove(&pick);
        let (_, root, site) = nearest(pick, pos);
        pos = site;
        out.rotations.push(program[pick as usize].clone());
        out.roots.push(root);
        for &k in &succ[pick as usize] {
            indeg[k as usize] -= 1;
            if indeg[k as usize] == 0 {
                ready.insert(k);
            }
        }
    }
    debug_assert_eq!(out.rotations.len(), program.len(), "the graph is acyclic");
    Some(out)
}

/// Qubits on which `a` and `b` carry the same non-identity Pauli.
fn agreement(a: &crate::pauli::PauliString, b: &crate::pauli::PauliString) -> u32 {
    // Word by word: on `a`'s support, the letters agree where neither mask differs.
    let word = |v: &[u64], i: usize| v.get(i).copied().unwrap_or(0);
    let (ax, az, bx, bz) = (a.x.words(), a.z.words(), b.x.words(), b.z.words());
    (0..ax.len().max(az.len()))
        .map(|i| {
            let support = word(ax, i) | word(az, i);
            let differ = (word(ax, i) ^ word(bx, i)) | (word(az, i) ^ word(bz, i));
            (support & !differ).count_ones()
        })
        .sum()
}

/// Work limit of [`schedule_in_layers`]: rotations visited while layering.
pub const LAYER_BUDGET: usize = 20_000_000;

/// For the all-to-all target: `program` with each maximal run of pairwise commuting rotations
/// (`pauli::group::commuting_runs`) reordered into layers of rotations on disjoint qubits,
/// greedily in program order (exactly the same product: the rotations of a run commute).
/// In a Hadamard test every rotation meets the ancilla, so its controlled `rz` waits for the
/// one before; but the CNOT ladders of rotations on disjoint qubits run beside that work, so
/// the two-qubit depth falls towards the ancilla's own two CNOTs per rotation. (An Ising
/// chain's `Z_i Z_{i+1}` run in the order 01, 12, 23, … chains every ladder to the last; in
/// layers 01, 23, 45, … then 12, 34, … it does not.) `None` when nothing moves, or past
/// [`LAYER_BUDGET`].
pub fn schedule_in_layers(program: &[Rotation]) -> Option<Vec<Rotation>> {
    let runs = crate::pauli::group::commuting_runs(program.iter().map(|r| &r.pauli));
    let width = program.iter().map(|r| r.pauli.span()).max().unwrap_or(0);
    // stamp[q] = the layer that last took qubit q (layers numbered from 1 over the program).
    let mut stamp = vec![0usize; width];
    let mut layer = 0usize;
    let mut work = 0usize;
    let mut out = Vec::with_capacity(program.len());
    let mut start = 0;
    while start < program.len() {
        let mut end = start;
        while end < program.len() && runs[end] == runs[start] {
            end += 1;
        }
        let mut left: Vec<usize> = (start..end).collect();
        while !left.is_empty() {
            layer += 1;
            work += left.len();
            if work > LAYER_BUDGET {
                return None;
            }
            let mut rest = Vec::with_capacity(left.len());
            for &i in &left {
                let p = &program[i].pauli;
                if p.support_iter().all(|q| stamp[q] != layer) {
                    p.support_iter().for_each(|q| stamp[q] = layer);
                    out.push(program[i].clone());
                } else {
                    rest.push(i);
                }
            }
            left = rest;
        }
        start = end;
    }
    let moved = out
        .iter()
        .zip(program)
        .any(|(a, b)| a.pauli != b.pauli || a.theta != b.theta);
    moved.then_some(out)
}

/// For the all-to-all target: `program` in a topological order of its non-commutation graph
/// (so exactly the same product, see the module header) chosen greedily so that each rotation
/// agrees with the one before it on as many qubits as possible (same Pauli there): their
/// basis changes cancel, and with ladders that start on the shared qubits
/// (`synth::Sharing`), so do the CNOTs along the shared part. This is the ordering that lets
/// Jordan–Wigner strings cancel between consecutive terms (Hastings, Wecker, Bauer & Troyer,
/// "Improving quantum algorithms for quantum chemistry", QIC 15, 1 (2015), from memory),
/// found here by a greedy walk over the ready rotations rather than by term classes. Ties go
/// to the earlier rotation; `None` past [`GRAPH_BUDGET`]; program order past [`WALK_BUDGET`].
pub fn schedule_by_agreement(program: &[Rotation]) -> Option<Vec<Rotation>> {
    let (succ, mut indeg) = noncommutation_graph(program)?;
    // The ready rotations, and per qubit those of them on it: only a rotation that shares a
    // qubit with the last one can agree with it, so the choice visits those alone. The budget
    // still counts what a scan over every ready rotation would visit (`ready_weight` per
    // choice), so the switch to program order falls where it always did.
    let width = program.iter().map(|r| r.pauli.span()).max().unwrap_or(0);
    let weight: Vec<usize> = program.iter().map(|r| r.pauli.weight() as usize).collect();
    let mut ready: BTreeSet<u32> = BTreeSet::new();
    let mut ready_on: Vec<BTreeSet<u32>> = vec![BTreeSet::new(); width];
    let mut ready_weight = 0usize;
    let make_ready = |j: u32,
                      ready: &mut BTreeSet<u32>,
                      ready_on: &mut Vec<BTreeSet<u32>>,
                      ready_weight: &mut usize| {
        ready.insert(j);
        for q in program[j as usize].pauli.support_iter() {
            ready_on[q].insert(j);
        }
        *ready_weight += weight[j as usize];
    };
    for j in 0..program.len() as u32 {
        if indeg[j as usize] == 0 {
            make_ready(j, &mut ready, &mut ready_on, &mut ready_weight);
        }
    }
    let mut out = Vec::with_capacity(program.len());
    let mut spent = 0usize;
    let mut last: Option<u32> = None;
    while let Some(&first) = ready.iter().next() {
        let pick = match last {
            Some(p) if spent <= WALK_BUDGET => {
                spent += ready_weight;
                // The most agreement, ties to the earlier rotation; none agreeing: the first.
                let mut best = (0u32, first);
                let lp = &program[p as usize].pauli;
                for q in lp.support_iter() {
                    for &j in &ready_on[q] {
                        let a = agreement(lp, &program[j as usize].pauli);
                        if a > best.0 || (a == best.0 && a > 0 && j < best.1) {
                            best = (a, j);
                        }
                    }
                }
                best.1
            }
            _ => first,
        };
        ready.remove(&pick);
        for q in program[pick as usize].pauli.support_iter() {
            ready_on[q].remove(&pick);
        }
        ready_weight -= weight[pick as usize];
        out.push(program[pick as usize].clone());
        last = Some(pick);
        for &k in &succ[pick as usize] {
            indeg[k as usize] -= 1;
            if indeg[k as usize] == 0 {
                make_ready(k, &mut ready, &mut ready_on, &mut ready_weight);
            }
        }
    }
    Some(out)
}

/// The walk of [`schedule_by_agreement`] as first written: a scan over every ready rotation
/// at each choice. Kept for the test that the indexed walk chooses the same.
#[cfg(test)]
fn schedule_by_agreement_scan(program: &[Rotation]) -> Option<Vec<Rotation>> {
    let (succ, mut indeg) = noncommutation_graph(program)?;
    let mut ready: BTreeSet<u32> = (0..program.len() as u32)
        .filter(|&j| indeg[j as usize] == 0)
        .collect();
    let mut out = Vec::with_capacity(program.len());
    let mut spent = 0usize;
    let mut last: Option<u32> = None;
    while let Some(&first) = ready.iter().next() {
        let pick = match last {
            Some(p) if spent <= WALK_BUDGET => {
                let mut best = (0u32, first);
                for &j in &ready {
                    spent += program[j as usize].pauli.weight() as usize;
                    let a = agreement(&program[p as usize].pauli, &program[j as usize].pauli);
                    if a > best.0 {
                        best = (a, j);
                    }
                }
                best.1
            }
            _ => first,
        };
        ready.remove(&pick);
        out.push(program[pick as usize].clone());
        last = Some(pick);
        for &k in &succ[pick as usize] {
            indeg[k as usize] -= 1;
            if indeg[k as usize] == 0 {
                ready.insert(k);
            }
        }
    }
    Some(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::device::{lattice, Calibration, NativeSet};
    use crate::formula::{order_terms, step, Order};
    use crate::pauli::{Pauli, PauliString, PauliSum};
    use crate::sim::State;
    use rand::{Rng, SeedableRng};

    fn apply(program: &[Rotation], s: &mut State) {
        for r in program {
            s.apply_pauli_rotation(&r.pauli, r.theta);
        }
    }

    #[test]
    fn schedules_are_the_same_operator_on_random_programs() {
        // Any topological order of the non-commutation graph is the same product (see the
        // module header); checked on random 5-qubit programs against the program order.
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(5);
        let dev = Device::new(
            "line",
            6,
            &lattice::line(6),
            NativeSet::rz_sx_x_cx(),
            Calibration::default(),
        );
        for _ in 0..30 {
            let mut h = PauliSum::new(5);
            for _ in 0..rng.gen_range(2..12) {
                let p = PauliString::from_masks(rng.gen_range(0..32), rng.gen_range(0..32));
                if !p.is_identity() {
                    h.add(p, rng.gen_range(-1.0..1.0));
                }
            }
            if h.terms.is_empty() {
                continue;
            }
            let program = step(&order_terms(&h), Order::Second, 0.7);
            let layout: Vec<u32> = vec![3, 0, 5, 1, 4, 2];
            let plan =
                TargetPlan::with_layout(5, crate::route::Ancilla::Controls, &dev, layout).unwrap();
            let s = schedule(&program, &plan, &dev).unwrap();
            assert_eq!(s.rotations.len(), program.len());
            let mut a = State::zero(5);
            for q in 0..5 {
                a.apply(&crate::circuit::Gate::U(q, 0.3 + q as f64, 0.2, 0.9));
            }
            // The largest amplitude difference between the two orders applied to `a`.
            let gap = |x: &[Rotation], y: &[Rotation]| {
                let (mut u, mut v) = (a.clone(), a.clone());
                apply(x, &mut u);
                apply(y, &mut v);
                u.amps
                    .iter()
                    .zip(&v.amps)
                    .map(|(p, q)| (p - q).norm())
                    .fold(0.0, f64::max)
            };
            let err = gap(&program, &s.rotations);
            assert!(err < 1e-12, "{err}");
            // The all-to-all order by agreement is a topological order too: same product.
            let agreeing = schedule_by_agreement(&program).unwrap();
            let err2 = gap(&agreeing, &program);
            assert!(err2 < 1e-12, "{err2}");
            for (r, root) in s.rotations.iter().zip(&s.roots) {
                assert_ne!(
                    r.pauli.get(*root as usize),
                    Pauli::I,
                    "the root is in the support"
                );
            }
            // The layered order is a permutation inside commuting runs: same product.
            if let Some(layered) = schedule_in_layers(&program) {
                assert_eq!(layered.len(), program.len());
                let err3 = gap(&layered, &program);
                assert!(err3 < 1e-12, "{err3}");
            }
        }
    }

    #[test]
    fn an_ising_chain_run_is_layered_even_edges_first() {
        // Z0Z1, Z1Z2, …, Z4Z5 commute: in layers they come as 01 23 45, then 12 34; the X run
        // after them has disjoint supports already and keeps its order.
        let mut h = PauliSum::new(6);
        for i in 0..5 {
            h.add(PauliString::from_masks(0, 0b11 << i), 1.0);
        }
        for i in 0..6 {
            h.add(PauliString::from_masks(1 << i, 0), 0.5);
        }
        let program = step(&order_terms(&h), Order::First, 0.1);
        let layered = schedule_in_layers(&program).unwrap();
        let edges: Vec<Vec<usize>> = layered
            .iter()
            .map(|r| r.pauli.support_qubits())
            .filter(|s| s.len() == 2)
            .collect();
        let want: Vec<Vec<usize>> =
            vec![vec![0, 1], vec![2, 3], vec![4, 5], vec![1, 2], vec![3, 4]];
        assert_eq!(edges, want);
        assert_eq!(layered.len(), program.len());
        // Already layered: nothing moves.
        assert!(schedule_in_layers(&layered).is_none());
    }

    #[test]
    fn an_ising_chain_is_one_sweep() {
        // 6-site transverse-field Ising chain, chain on sites 1..=6 of a 7-qubit line and the
        // ancilla on site 0: the walk meets every rotation within one hop of the last, so the
        // modelled ancilla moves 5 sites in all (one sweep), against 3 sweeps for the groups.
        let n = 6;
        let mut h = PauliSum::new(n);
        for q in 0..n {
            h.add(PauliString::single(q, Pauli::X), 0.6);
            if q + 1 < n {
                h.add(
                    PauliString::from_factors(&[(q, Pauli::Z), (q + 1, Pauli::Z)]).1,
                    1.0,
                );
            }
        }
        let dev = Device::new(
            "line",
            7,
            &lattice::line(7),
            NativeSet::rz_sx_x_cx(),
            Calibration::default(),
        );
        let layout: Vec<u32> = vec![1, 2, 3, 4, 5, 6, 0];
        let plan =
            TargetPlan::with_layout(n, crate::route::Ancilla::Controls, &dev, layout.clone())
                .unwrap();
        let program = step(&order_terms(&h), Order::Second, 0.3);
        let s = schedule(&program, &plan, &dev).unwrap();
        let root_sites: Vec<u32> = s.roots.iter().map(|&q| layout[q as usize]).collect();
        let walked: u32 = root_sites
            .windows(2)
            .map(|w| dev.distance(w[0], w[1]))
            .sum();
        assert_eq!(root_sites[0], 1, "{root_sites:?}");
        assert_eq!(walked, 5, "{root_sites:?}");
    }

    #[test]
    fn the_indexed_agreement_walk_chooses_what_the_full_scan_chooses() {
        // Random local programs on 12 qubits (weights 1–4, repeated strings), one Strang
        // step: the walk over per-qubit ready lists gives the same order as the scan over
        // every ready rotation.
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(17);
        for _ in 0..40 {
            let mut h = PauliSum::new(12);
            for _ in 0..rng.gen_range(5..120) {
                let w = rng.gen_range(1..=4usize);
                let factors: Vec<(usize, Pauli)> = (0..w)
                    .map(|_| {
                        let q = rng.gen_range(0..12);
                        (q, [Pauli::X, Pauli::Y, Pauli::Z][rng.gen_range(0..3)])
                    })
                    .collect();
                let mut seen = std::collections::BTreeSet::new();
                let factors: Vec<(usize, Pauli)> =
                    factors.into_iter().filter(|f| seen.insert(f.0)).collect();
                let (_, p) = PauliString::from_factors(&factors);
                h.add(p, rng.gen_range(-1.0..1.0));
            }
            let program = step(&order_terms(&h), Order::Second, 0.1);
            let fast = schedule_by_agreement(&program).expect("small");
            assert_eq!(Some(fast), schedule_by_agreement_scan(&program));
        }
    }
}
