//! Device-aware term order: inside each commuting group, a sweep that keeps the ancilla's walk
//! short.
//!
//! In: a Pauli sum, a [`TargetPlan`] (its initial layout) and the [`Device`]. Out: the terms of
//! [`term_groups`] with the groups in their fixed order and each group permuted, plus the root
//! (the support qubit whose `rz` the ancilla controls) chosen for each term. Invariant: the
//! output is a permutation *inside* groups only, so every product formula built from it equals,
//! as an operator, the one built from `formula::order_terms` (the factors of one group commute;
//! Strang and Suzuki apply a group forward then reversed, again a product of commuting factors).
//!
//! ## The idea
//!
//! In a Hadamard test the ancilla meets every rotation: its controlled `rz` needs the ancilla
//! next to the rotation's root. With the default (bit-mask) order consecutive rotations sit
//! anywhere on the chip, so the ancilla (or the terms) is dragged back and forth. Here the
//! ancilla's position is modelled by the site of the last root it met (it starts on its own
//! initial site); the next term is the one whose support comes closest to that position, and its
//! root is the support qubit that comes closest (a nearest-neighbour tour, then 2-opt segment
//! reversals while they shorten the walk, for groups of at most [`TWO_OPT_MAX`] terms). Each
//! group's tour starts where the previous one ended; the reversed half of a Strang step walks
//! the same path backwards, so the transitions between groups cost the same in both halves.
//!
//! Distances are hop distances between initial sites. Routing moves qubits, so this is a model
//! of the walk, not its exact length; `route::plan_target` scores layouts on circuits built from
//! this order and `benches/routing.rs` measures the effect.
//!
//! Cost. The nearest-neighbour tour walks the device outwards from the current site, ring by
//! ring, over per-site lists of the terms with support there, so a group of `m` terms of weight
//! `w` costs `O(m·(w + V))` on `V` sites instead of the `O(m² w)` of comparing every remaining
//! term (the choice is the same). 2-opt costs `O(m³)` walk steps per sweep and runs only on
//! groups of at most [`TWO_OPT_MAX`] terms, under a total budget of [`TWO_OPT_BUDGET`] walk
//! steps per order: a Hamiltonian of 10⁵ terms in many small groups would otherwise spend
//! minutes there. Both bounds are deterministic.

use super::TargetPlan;
use crate::circuit::Qubit;
use crate::device::Device;
use crate::formula::term_groups;
use crate::pauli::{PauliString, PauliSum};
use std::collections::BTreeMap;

/// Groups larger than this get the nearest-neighbour tour only (no 2-opt).
pub const TWO_OPT_MAX: usize = 64;

/// Term visits (one per term of each walk evaluated) that 2-opt may spend over all groups of
/// one order; past it the remaining groups keep their nearest-neighbour tours.
pub const TWO_OPT_BUDGET: usize = 20_000_000;

/// The term order and the root of each term's ladder (logical qubit, one of its support).
#[derive(Clone, Debug, Default, PartialEq)]
pub struct DeviceOrder {
    pub terms: Vec<(PauliString, f64)>,
    pub roots: BTreeMap<PauliString, Qubit>,
}

/// A term's support as (physical site, logical qubit), ascending by logical qubit.
fn sites(p: &PauliString, layout: &[u32]) -> Vec<(u32, Qubit)> {
    p.support_qubits()
        .into_iter()
        .map(|q| (layout[q], q as Qubit))
        .collect()
}

/// The support qubit nearest to site `pos`: (hop distance, logical qubit, its site). Ties go to
/// the lower logical qubit.
fn nearest(pos: u32, support: &[(u32, Qubit)], dev: &Device) -> (u32, Qubit, u32) {
    support
        .iter()
        .map(|&(site, q)| (dev.distance(pos, site), q, site))
        .min()
        .expect("non-identity terms have a support")
}

/// The walk length of visiting `tour` (indices into `supports`) from site `start`, and the site
/// it ends on.
fn walk(tour: &[usize], supports: &[Vec<(u32, Qubit)>], start: u32, dev: &Device) -> (u64, u32) {
    let mut pos = start;
    let mut length = 0u64;
    for &t in tour {
        let (d, _, site) = nearest(pos, &supports[t], dev);
        length += d as u64;
        pos = site;
    }
    (length, pos)
}

/// Sites of the device by hop distance from each site (ties by site number): the rings the
/// nearest-neighbour search walks outwards.
struct Rings {
    n: usize,
    by_distance: Vec<u32>,
}

impl Rings {
    fn new(dev: &Device) -> Rings {
        let n = dev.num_qubits;
        let mut by_distance = Vec::with_capacity(n * n);
        for p in 0..n as u32 {
            let mut row: Vec<u32> = (0..n as u32).collect();
            row.sort_by_key(|&q| (dev.distance(p, q), q));
            by_distance.extend(row);
        }
        Rings { n, by_distance }
    }

    fn from(&self, p: u32) -> &[u32] {
        &self.by_distance[p as usize * self.n..(p as usize + 1) * self.n]
    }
}

/// Nearest-neighbour tour over one group from site `start` (ties to the earlier term), or the
/// group's own order if that walks shorter, then 2-opt reversals while they shorten the walk,
/// for groups of at most [`TWO_OPT_MAX`] terms and while `budget` (term visits) lasts.
///
/// The nearest term is found by walking the sites outwards from the current position, ring by
/// ring, and looking up which unused terms have support there (per-site lists, ascending, with
/// used terms skipped lazily): the same choice as comparing every remaining term, without the
/// `O(m²)` scan over a group of `m` terms.
fn group_tour(
    supports: &[Vec<(u32, Qubit)>],
    start: u32,
    dev: &Device,
    rings: &Rings,
    budget: &mut usize,
) -> Vec<usize> {
    let m = supports.len();
    let mut at_site: Vec<Vec<u32>> = vec![Vec::new(); dev.num_qubits];
    for (t, s) in supports.iter().enumerate() {
        for &(site, _) in s {
            if at_site[site as usize].last() != Some(&(t as u32)) {
                at_site[site as usize].push(t as u32);
            }
        }
    }
    let mut cursor = vec![0usize; dev.num_qubits];
    let mut used = vec![false; m];
    let mut tour = Vec::with_capacity(m);
    let mut pos = start;
    while tour.len() < m {
        let ring = rings.from(pos);
        let mut best: Option<u32> = None;
        let mut best_d = u32::MAX;
        for &site in ring {
            let d = dev.distance(pos, site);
            if d > best_d {
                break;
            }
            let list = &at_site[site as usize];
            let c = &mut cursor[site as usize];
            while *c < list.len() && used[list[*c] as usize] {
                *c += 1;
            }
            if let Some(&t) = list.get(*c) {
                if best.is_none_or(|b| t < b) {
                    best = Some(t);
                    best_d = d;
                }
            }
        }
        let t = best.expect("an unused term has a support site") as usize;
        used[t] = true;
        tour.push(t);
        pos = nearest(pos, &supports[t], dev).2;
    }
    let own: Vec<usize> = (0..m).collect();
    let mut best = walk(&tour, supports, start, dev).0;
    let own_length = walk(&own, supports, start, dev).0;
    if own_length < best {
        tour = own;
        best = own_length;
    }
    if m <= TWO_OPT_MAX {
        'sweeps: loop {
            let mut improved = false;
            for i in 0..m {
                for j in i + 1..m {
                    if *budget < m {
                        break 'sweeps;
                    }
                    *budget -= m;
                    tour[i..=j].reverse();
                    let length = walk(&tour, supports, start, dev).0;
                    if length < best {
                        best = length;
                        improved = true;
                    } else {
                        tour[i..=j].reverse();
                    }
                }
            }
            if !improved {
                break;
            }
        }
    }
    tour
}

/// Where the modelled walk starts: the ancilla's initial site, or logical qubit 0's without one.
fn start_site(plan: &TargetPlan) -> u32 {
    let layout = &plan.initial_layout;
    match plan.ancilla {
        Some(a) => layout[a as usize],
        None => layout.first().copied().unwrap_or(0),
    }
}

/// The modelled walk of the ancilla over `terms` in this order (hop distances between initial
/// sites, each term met at its support qubit nearest the previous meeting site), and the roots
/// it meets the terms at.
pub fn ancilla_walk(
    terms: &[(PauliString, f64)],
    plan: &TargetPlan,
    dev: &Device,
) -> (u64, BTreeMap<PauliString, Qubit>) {
    let mut pos = start_site(plan);
    let mut length = 0u64;
    let mut roots = BTreeMap::new();
    for (p, _) in terms {
        let (d, root, site) = nearest(pos, &sites(p, &plan.initial_layout), dev);
        length += d as u64;
        roots.insert(p.clone(), root);
        pos = site;
    }
    (length, roots)
}

/// The device-aware order of `h`'s terms for `plan` on `dev` (see the module essay), with the
/// roots where the modelled walk meets each term. Never walks longer than
/// `formula::order_terms(h)` under the same model (that order is kept when it does not).
/// Deterministic.
pub fn device_order(h: &PauliSum, plan: &TargetPlan, dev: &Device) -> DeviceOrder {
    device_order_in(&term_groups(h), plan, dev)
}

/// [`device_order`] over the commuting groups of [`term_groups`], computed once by the caller.
pub fn device_order_in(
    groups: &[Vec<(PauliString, f64)>],
    plan: &TargetPlan,
    dev: &Device,
) -> DeviceOrder {
    let layout = &plan.initial_layout;
    let mut pos = start_site(plan);
    let total: usize = groups.iter().map(|g| g.len()).sum();
    let mut terms = Vec::with_capacity(total);
    let rings = Rings::new(dev);
    let mut budget = TWO_OPT_BUDGET;
    for group in groups {
        let supports: Vec<Vec<(u32, Qubit)>> = group.iter().map(|t| sites(&t.0, layout)).collect();
        for t in group_tour(&supports, pos, dev, &rings, &mut budget) {
            pos = nearest(pos, &supports[t], dev).2;
            terms.push(group[t].clone());
        }
    }
    let (length, roots) = ancilla_walk(&terms, plan, dev);
    let default_terms = groups.concat();
    let (default_length, default_roots) = ancilla_walk(&default_terms, plan, dev);
    if default_length < length {
        DeviceOrder {
            terms: default_terms,
            roots: default_roots,
        }
    } else {
        DeviceOrder { terms, roots }
    }
}

/// The terms of [`device_order`] alone.
pub fn order_for_device(h: &PauliSum, plan: &TargetPlan, dev: &Device) -> Vec<(PauliString, f64)> {
    device_order(h, plan, dev).terms
}
