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
//! this order and `benches/routing.rs` measures the effect. Cost: `O(m² w)` per group of `m`
//! terms of weight `w` for the tour, `O(m³)` per 2-opt sweep on small groups.

use super::TargetPlan;
use crate::circuit::Qubit;
use crate::device::Device;
use crate::formula::term_groups;
use crate::pauli::{PauliString, PauliSum};
use std::collections::BTreeMap;

/// Groups larger than this get the nearest-neighbour tour only (no 2-opt).
pub const TWO_OPT_MAX: usize = 64;

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

/// Nearest-neighbour tour over one group from site `start` (ties to the earlier term), or the
/// group's own order if that walks shorter, then 2-opt reversals while they shorten the walk.
fn group_tour(supports: &[Vec<(u32, Qubit)>], start: u32, dev: &Device) -> Vec<usize> {
    let m = supports.len();
    let mut left: Vec<usize> = (0..m).collect();
    let mut tour = Vec::with_capacity(m);
    let mut pos = start;
    while !left.is_empty() {
        let (k, (_, _, site)) = left
            .iter()
            .enumerate()
            .map(|(k, &t)| (k, nearest(pos, &supports[t], dev)))
            .min_by_key(|&(k, (d, _, _))| (d, k))
            .expect("non-empty");
        tour.push(left.remove(k));
        pos = site;
    }
    let own: Vec<usize> = (0..m).collect();
    let mut best = walk(&tour, supports, start, dev).0;
    let own_length = walk(&own, supports, start, dev).0;
    if own_length < best {
        tour = own;
        best = own_length;
    }
    if m <= TWO_OPT_MAX {
        loop {
            let mut improved = false;
            for i in 0..m {
                for j in i + 1..m {
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
    let layout = &plan.initial_layout;
    let mut pos = start_site(plan);
    let mut terms = Vec::with_capacity(h.terms.len());
    let groups = term_groups(h);
    for group in &groups {
        let supports: Vec<Vec<(u32, Qubit)>> = group.iter().map(|t| sites(&t.0, layout)).collect();
        for t in group_tour(&supports, pos, dev) {
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
