//! Exact embeddings of the interaction graph: layouts on which every term's qubits are coupled.
//!
//! In: a Pauli sum (whether a Hadamard-test ancilla joins it), one connected component of the
//! coupling graph. Out: up to [`MAX_LAYOUTS`] layouts `layout[l] = physical qubit` under which
//! every pair of qubits that share a term sits on a coupled pair of sites, the ancilla (last)
//! on a free site beside the embedded qubits; none when no such embedding exists or the search
//! runs out of its budget. `route::plan_target` scores them beside its other candidates, so
//! an embedding is kept only when it routes best.
//!
//! ## The method
//!
//! A subgraph *monomorphism* search (every pattern edge on a device edge; extra device edges
//! are allowed, unlike an induced embedding) by depth-first backtracking in the manner of VF2
//! (Cordella, Foggia, Sansone & Vento, "A (sub)graph isomorphism algorithm for matching large
//! graphs", IEEE TPAMI 26, 1367 (2004)): the pattern's qubits are matched in a fixed order in
//! which each qubit (after the first of its component) has a matched neighbour, so its
//! candidates are the free device neighbours of that neighbour's site, pruned by degree and by
//! adjacency to every matched neighbour. petgraph's VF2 iterator offers no work bound and
//! matches induced subgraphs; on a device of hundreds of qubits a pattern with no embedding can
//! take exponential time, so this search counts its steps and gives up after
//! [`SEARCH_BUDGET`]. Interaction graphs with a higher degree than the device are refused
//! at once (no embedding can exist).
//!
//! The ancilla meets every term, so no site beside an embedding serves it for all; the free
//! sites beside the embedded qubits are each offered (up to [`MAX_LAYOUTS`] layouts in all),
//! and the router's scoring picks among them.

use crate::device::Device;
use crate::pauli::PauliSum;

/// Whether [`embedding_layouts`] also places the ancilla (the last logical qubit) beside the
/// embedding. Whether that ancilla controls the step does not matter here: its site is chosen
/// by the embedding alone.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum AncillaSite {
    /// The layouts place the system qubits only.
    Omitted,
    /// The layouts place the ancilla on a free site beside an embedded qubit.
    Beside,
}

impl AncillaSite {
    /// `Beside` when `placed` (the private search keeps the flag; the public API does not).
    pub(crate) fn when(placed: bool) -> AncillaSite {
        if placed {
            AncillaSite::Beside
        } else {
            AncillaSite::Omitted
        }
    }
}

/// Backtracking steps (candidate sites tried) before the search gives up.
pub const SEARCH_BUDGET: usize = 2_000_000;

/// Most layouts returned.
pub const MAX_LAYOUTS: usize = 6;

/// The interaction graph of `h`: for each qubit, the qubits it shares a term with, ascending.
pub fn interaction_graph(h: &PauliSum) -> Vec<Vec<u32>> {
    let mut adj: Vec<Vec<u32>> = vec![Vec::new(); h.num_qubits];
    for p in h.terms.keys() {
        let s = p.support_qubits();
        for (i, &a) in s.iter().enumerate() {
            for &b in &s[i + 1..] {
                adj[a].push(b as u32);
                adj[b].push(a as u32);
            }
        }
    }
    for row in &mut adj {
        row.sort_unstable();
        row.dedup();
    }
    adj
}

/// Matching order: repeatedly the unmatched qubit with the most matched neighbours (then the
/// highest degree, then the lowest index).
fn match_order(adj: &[Vec<u32>]) -> Vec<usize> {
    let n = adj.len();
    let mut placed = vec![false; n];
    let mut links = vec![0usize; n];
    let mut order = Vec::with_capacity(n);
    for _ in 0..n {
        let next = (0..n)
            .filter(|&i| !placed[i])
            .max_by(|&a, &b| {
                (links[a], adj[a].len())
                    .cmp(&(links[b], adj[b].len()))
                    .then(b.cmp(&a))
            })
            .expect("an unplaced qubit remains");
        placed[next] = true;
        order.push(next);
        for &j in &adj[next] {
            links[j as usize] += 1;
        }
    }
    order
}

/// Embeddings of `adj` into the sites `comp` of `dev` (see the module essay), at most `limit`.
pub fn embeddings(adj: &[Vec<u32>], comp: &[u32], dev: &Device, limit: usize) -> Vec<Vec<u32>> {
    embeddings_from(adj, comp, dev, limit, None, SEARCH_BUDGET)
}

/// [`embeddings`] with the first qubit of the matching order placed on `first` (if given) and
/// `budget` backtracking steps; `route::cat` begins a few at every site for variety.
pub fn embeddings_from(
    adj: &[Vec<u32>],
    comp: &[u32],
    dev: &Device,
    limit: usize,
    first: Option<u32>,
    budget: usize,
) -> Vec<Vec<u32>> {
    let n = adj.len();
    let mut found = Vec::new();
    if n == 0 || n > comp.len() || limit == 0 {
        return found;
    }
    let mut in_comp = vec![false; dev.num_qubits];
    for &p in comp {
        in_comp[p as usize] = true;
    }
    let neighbours: Vec<Vec<u32>> = (0..dev.num_qubits as u32)
        .map(|p| {
            comp.iter()
                .copied()
                .filter(|&q| in_comp[p as usize] && dev.coupled(p, q))
                .collect()
        })
        .collect();
    let max_dev = neighbours.iter().map(|r| r.len()).max().unwrap_or(0);
    if adj.iter().any(|r| r.len() > max_dev) {
        return found;
    }
    let order = match_order(adj);
    let mut site = vec![u32::MAX; n];
    let mut used = vec![false; dev.num_qubits];
    let mut budget = budget;
    // Iterative depth-first search: per depth, the candidate list and the next index to try.
    let candidates_for = |depth: usize, site: &[u32], used: &[bool]| -> Vec<u32> {
        let q = order[depth];
        let anchor = adj[q].iter().find(|&&j| site[j as usize] != u32::MAX);
        let pool: Vec<u32> = match (anchor, first) {
            (Some(&j), _) => neighbours[site[j as usize] as usize].clone(),
            (None, Some(s)) if depth == 0 => vec![s],
            (None, _) => comp.to_vec(),
        };
        pool.into_iter()
            .filter(|&p| {
                !used[p as usize]
                    && neighbours[p as usize].len() >= adj[q].len()
                    && adj[q].iter().all(|&j| {
                        let s = site[j as usize];
                        s == u32::MAX || dev.coupled(p, s)
                    })
            })
            .collect()
    };
    let mut stack: Vec<(Vec<u32>, usize)> = vec![(candidates_for(0, &site, &used), 0)];
    while !stack.is_empty() {
        let depth = stack.len() - 1;
        let (cands, next) = stack.last_mut().expect("non-empty");
        let q = order[depth];
        if site[q] != u32::MAX {
            used[site[q] as usize] = false;
            site[q] = u32::MAX;
        }
        if *next >= cands.len() || budget == 0 {
            stack.pop();
            if budget == 0 {
                break;
            }
            continue;
        }
        budget -= 1;
        let p = cands[*next];
        *next += 1;
        site[q] = p;
        used[p as usize] = true;
        if depth + 1 == n {
            found.push(site.clone());
            if found.len() >= limit {
                break;
            }
            continue;
        }
        let c = candidates_for(depth + 1, &site, &used);
        stack.push((c, 0));
    }
    found
}

/// Layouts for `route::plan_target`: embeddings of `h`'s interaction graph into `comp`, each
/// with the ancilla (with [`AncillaSite::Beside`]) on a free site beside an embedded qubit; at
/// most [`MAX_LAYOUTS`], deterministic.
pub fn embedding_layouts(
    h: &PauliSum,
    ancilla: AncillaSite,
    comp: &[u32],
    dev: &Device,
) -> Vec<Vec<u32>> {
    let adj = interaction_graph(h);
    if adj.iter().all(|r| r.is_empty()) {
        return Vec::new();
    }
    let mut out: Vec<Vec<u32>> = Vec::new();
    for e in embeddings(&adj, comp, dev, MAX_LAYOUTS) {
        if ancilla == AncillaSite::Omitted {
            out.push(e);
            continue;
        }
        let mut used = vec![false; dev.num_qubits];
        for &p in &e {
            used[p as usize] = true;
        }
        // Free sites beside the embedding, fewest embedded neighbours first (the ends of a
        // chain, the edge of a patch), then by site.
        let mut spare: Vec<(usize, u32)> = comp
            .iter()
            .copied()
            .filter(|&p| !used[p as usize])
            .filter_map(|p| {
                let k = e.iter().filter(|&&s| dev.coupled(p, s)).count();
                (k > 0).then_some((k, p))
            })
            .collect();
        spare.sort_unstable();
        for (_, p) in spare.into_iter().take(2) {
            let mut l = e.clone();
            l.push(p);
            if !out.contains(&l) {
                out.push(l);
            }
        }
        if out.len() >= MAX_LAYOUTS {
            break;
        }
    }
    out.truncate(MAX_LAYOUTS);
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::device::{lattice, Calibration, NativeSet};
    use crate::pauli::{Pauli, PauliString};

    fn dev(n: usize, links: &[(u32, u32)]) -> Device {
        Device::new(
            "d",
            n,
            links,
            NativeSet::rz_sx_x_cx(),
            Calibration::default(),
        )
    }

    #[test]
    fn a_shuffled_grid_model_embeds_with_every_edge_coupled() {
        // 3×4 nearest-neighbour model with its qubit labels shuffled, on a 4×4 grid: 17
        // interaction edges, all of which a 3×4 patch of the grid couples.
        let perm = [7usize, 2, 11, 0, 5, 9, 1, 10, 3, 6, 8, 4];
        let mut h = PauliSum::new(12);
        for r in 0..3 {
            for c in 0..4 {
                let q = r * 4 + c;
                if c + 1 < 4 {
                    h.add(
                        PauliString::from_factors(&[(perm[q], Pauli::Z), (perm[q + 1], Pauli::Z)])
                            .1,
                        1.0,
                    );
                }
                if r + 1 < 3 {
                    h.add(
                        PauliString::from_factors(&[(perm[q], Pauli::Z), (perm[q + 4], Pauli::Z)])
                            .1,
                        1.0,
                    );
                }
            }
        }
        let d = dev(16, &lattice::grid(4, 4));
        let comp: Vec<u32> = (0..16).collect();
        let layouts = embedding_layouts(&h, AncillaSite::Beside, &comp, &d);
        assert!(!layouts.is_empty());
        for l in &layouts {
            assert_eq!(l.len(), 13);
            for p in h.terms.keys() {
                let s = p.support_qubits();
                assert!(d.coupled(l[s[0]], l[s[1]]), "{l:?}");
            }
            let anc = l[12];
            assert!(l[..12].iter().any(|&s| d.coupled(anc, s)));
        }
    }

    #[test]
    fn no_embedding_when_the_degree_is_too_high() {
        // A star of 4 leaves cannot sit on a line (degree 2).
        let mut h = PauliSum::new(5);
        for leaf in 1..5 {
            h.add(
                PauliString::from_factors(&[(0, Pauli::Z), (leaf, Pauli::Z)]).1,
                1.0,
            );
        }
        let d = dev(8, &lattice::line(8));
        let comp: Vec<u32> = (0..8).collect();
        assert!(embedding_layouts(&h, AncillaSite::Omitted, &comp, &d).is_empty());
    }
}
