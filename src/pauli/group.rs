//! Grouping Pauli strings into mutually commuting sets by greedy graph colouring.
//!
//! In: a list of strings and a compatibility relation (full or qubit-wise commutation). Out: a
//! partition into groups, each a list of indices into the input, in which every pair is
//! compatible. Deterministic: ties break on the input index.
//!
//! Two regimes, because the exact method is quadratic:
//!
//! * up to [`EXACT_COLOURING_MAX`] strings: largest-degree-first colouring of the conflict graph
//!   (Welsh & Powell, "An upper bound for the chromatic number of a graph and its application
//!   to timetabling problems", Comput. J. 1967). O(m²) popcounts to build the degrees, at most
//!   4·10⁶ pairs here; this is the grouping every small campaign has always had.
//! * above it: a windowed first-fit. Strings are taken heaviest first (weight stands in for
//!   the conflict degree: a heavy string anticommutes with more of the others), and each one
//!   tries only the [`WINDOW`] most recently opened groups before opening a new one. A group
//!   answers "is this string compatible with every member?" without visiting its members:
//!   - qubit-wise: the group keeps the union of its members' letters; a string is compatible
//!     when it agrees with that union on their shared support (one pass over the words);
//!   - full commutation: the group indexes its members by qubit, so a newcomer is tested only
//!     against the members that share a qubit with it (disjoint strings commute); a group is
//!     closed at [`GROUP_CAP`] members, which bounds one test by `weight · GROUP_CAP`.
//!
//! Cost of the windowed regime: O(m log m) for the sort plus at most
//! `WINDOW · weight · GROUP_CAP` bit tests per string, so linear in the number of terms; 10⁵
//! strings on 1,024 qubits group in under a second on 2 cores (`cargo bench --bench
//! grouping`). The price is fewer merges than the exact colouring would find across far-apart
//! groups, which costs gates, never correctness.

use super::{Bits, PauliString};
use rustc_hash::FxHashMap as HashMap;

/// Which pairs may share a group.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Compat {
    /// `[P, Q] = 0`.
    Commuting,
    /// Equal letters on every shared qubit (one basis change measures the whole group).
    QubitWise,
}

fn compatible(a: &PauliString, b: &PauliString, how: Compat) -> bool {
    match how {
        Compat::Commuting => a.commutes_with(b),
        Compat::QubitWise => a.qubitwise_commutes_with(b),
    }
}

/// Largest input coloured exactly (largest-degree-first); above it, [`windowed_groups`].
pub const EXACT_COLOURING_MAX: usize = 2048;

/// Groups a string may try before a new one is opened (windowed regime).
pub const WINDOW: usize = 64;

/// Up to this many members a commuting group tests a newcomer against each member directly.
const DIRECT_MAX: usize = 32;

/// Most members of one commuting group in the windowed regime (and of one run of
/// [`commuting_runs`]).
pub const GROUP_CAP: usize = 1024;

/// Partitions `strings` into compatible groups. Groups are returned in order of their first
/// member's colouring step; members inside a group are sorted by input index.
pub fn colour_groups(strings: &[PauliString], how: Compat) -> Vec<Vec<usize>> {
    if strings.len() <= EXACT_COLOURING_MAX {
        welsh_powell(strings, how)
    } else {
        windowed_groups(strings, how)
    }
}

fn welsh_powell(strings: &[PauliString], how: Compat) -> Vec<Vec<usize>> {
    let m = strings.len();
    let mut degree = vec![0usize; m];
    for i in 0..m {
        for j in (i + 1)..m {
            if !compatible(&strings[i], &strings[j], how) {
                degree[i] += 1;
                degree[j] += 1;
            }
        }
    }
    let mut order: Vec<usize> = (0..m).collect();
    order.sort_by(|&a, &b| degree[b].cmp(&degree[a]).then(a.cmp(&b)));
    let mut groups: Vec<Vec<usize>> = Vec::new();
    for &i in &order {
        let slot = groups
            .iter()
            .position(|g| g.iter().all(|&j| compatible(&strings[i], &strings[j], how)));
        match slot {
            Some(k) => groups[k].push(i),
            None => groups.push(vec![i]),
        }
    }
    for g in &mut groups {
        g.sort_unstable();
    }
    groups
}

/// What a group remembers to test a newcomer without visiting all of its members.
enum Summary {
    /// Union of the members' letters (`x`, `z`) and of their supports.
    QubitWise { x: Bits, z: Bits, support: Bits },
    /// The members, and for every qubit the members that touch it, so a newcomer meets only
    /// the members that share a qubit with it (a local string on a wide register meets few).
    Commuting {
        members: Vec<PauliString>,
        touching: HashMap<usize, Vec<u32>>,
    },
}

impl Summary {
    fn new(how: Compat) -> Summary {
        match how {
            Compat::QubitWise => Summary::QubitWise {
                x: Bits::new(),
                z: Bits::new(),
                support: Bits::new(),
            },
            Compat::Commuting => Summary::Commuting {
                members: Vec::new(),
                touching: HashMap::default(),
            },
        }
    }

    fn len(&self) -> usize {
        match self {
            Summary::QubitWise { .. } => 0,
            Summary::Commuting { members, .. } => members.len(),
        }
    }

    fn accepts(&self, p: &PauliString) -> bool {
        match self {
            Summary::QubitWise { x, z, support } => p.support_iter().all(|q| {
                !support.contains(q)
                    || (x.contains(q) == p.x.contains(q) && z.contains(q) == p.z.contains(q))
            }),
            Summary::Commuting { members, .. } if members.len() <= DIRECT_MAX => {
                members.iter().all(|m| m.commutes_with(p))
            }
            Summary::Commuting { members, touching } => {
                // Only members that share a qubit with p can anticommute with it; the first
                // one that does ends the test (a member on two of p's qubits is tested twice,
                // which is harmless).
                p.support_iter().all(|q| {
                    touching.get(&q).is_none_or(|ids| {
                        ids.iter().all(|&id| members[id as usize].commutes_with(p))
                    })
                })
            }
        }
    }

    fn add(&mut self, p: &PauliString) {
        match self {
            Summary::QubitWise { x, z, support } => {
                x.or_assign(&p.x);
                z.or_assign(&p.z);
                support.or_assign(&p.support());
            }
            Summary::Commuting { members, touching } => {
                let id = members.len() as u32;
                for q in p.support_iter() {
                    touching.entry(q).or_default().push(id);
                }
                members.push(p.clone());
            }
        }
    }

    /// Full: a commuting group stops taking members at [`GROUP_CAP`], which bounds the cost
    /// of one test by `weight · GROUP_CAP`.
    fn is_full(&self) -> bool {
        self.len() >= GROUP_CAP
    }
}

/// Splits a term list into maximal runs of pairwise commuting strings, greedily from the
/// front: `run[i]` is the run of string `i`, non-decreasing from 0.
///
/// Cost: a run is tested like a group (`Summary`) up to [`GROUP_CAP`] members; beyond, it
/// switches to a GF(2) basis of its symplectic vectors in echelon form (`Echelon`), whose
/// rank a commuting set keeps at most `n`, so a test costs at most `n` word-popcounts over
/// the newcomer's words. Linear in the number of terms for a fixed width.
pub fn commuting_runs<'a>(strings: impl Iterator<Item = &'a PauliString>) -> Vec<u32> {
    let mut run = Vec::new();
    let mut id = 0u32;
    let mut small = Summary::new(Compat::Commuting);
    let mut big: Option<Echelon> = None;
    for p in strings {
        let fits = match &big {
            Some(e) => e.commutes_with_all(p),
            None => small.accepts(p),
        };
        if !fits {
            id += 1;
            small = Summary::new(Compat::Commuting);
            big = None;
        }
        match &mut big {
            Some(e) => e.insert(p),
            None => {
                small.add(p);
                if small.is_full() {
                    let Summary::Commuting { members, .. } = &small else {
                        unreachable!("a commuting summary")
                    };
                    let mut e = Echelon::default();
                    members.iter().for_each(|m| e.insert(m));
                    big = Some(e);
                }
            }
        }
        run.push(id);
    }
    run
}

/// A GF(2) basis of symplectic vectors `(x|z)` in echelon form: each vector's pivot (lowest set
/// position, `z` positions after every `x` position) is distinct, and a stored vector never
/// changes. Commuting with every basis vector is commuting with their whole span (the
/// symplectic form is bilinear).
#[derive(Default)]
struct Echelon {
    basis: Vec<PauliString>,
    by_pivot: HashMap<(bool, usize), usize>,
}

impl Echelon {
    /// Lowest set position: `(false, q)` for an `x` bit, `(true, q)` for a `z` bit.
    fn pivot(p: &PauliString) -> Option<(bool, usize)> {
        match (p.x.first(), p.z.first()) {
            (Some(q), _) => Some((false, q)),
            (None, Some(q)) => Some((true, q)),
            (None, None) => None,
        }
    }

    /// Adds `p`'s vector to the span. Reducing by the vector whose pivot is the newcomer's
    /// lowest position only sets positions above it, so the loop ends within rank steps.
    fn insert(&mut self, p: &PauliString) {
        let mut r = p.clone();
        while let Some(piv) = Echelon::pivot(&r) {
            match self.by_pivot.get(&piv) {
                Some(&k) => {
                    let b = &self.basis[k];
                    r.x.xor_assign(&b.x);
                    r.z.xor_assign(&b.z);
                }
                None => {
                    self.by_pivot.insert(piv, self.basis.len());
                    self.basis.push(r);
                    return;
                }
            }
        }
    }

    /// True when `p` commutes with the whole span; only `p`'s non-zero words are visited.
    fn commutes_with_all(&self, p: &PauliString) -> bool {
        let (px, pz) = (p.x.words(), p.z.words());
        let word = |w: &[u64], i: usize| w.get(i).copied().unwrap_or(0);
        let live: smallvec::SmallVec<[usize; 4]> = (0..px.len().max(pz.len()))
            .filter(|&i| word(px, i) | word(pz, i) != 0)
            .collect();
        self.basis.iter().all(|b| {
            let (bx, bz) = (b.x.words(), b.z.words());
            live.iter()
                .map(|&i| {
                    (word(px, i) & word(bz, i)).count_ones()
                        + (word(pz, i) & word(bx, i)).count_ones()
                })
                .sum::<u32>()
                % 2
                == 0
        })
    }
}

/// The windowed first-fit grouping of the module notes (inputs above
/// [`EXACT_COLOURING_MAX`]); every group is pairwise compatible.
pub fn windowed_groups(strings: &[PauliString], how: Compat) -> Vec<Vec<usize>> {
    let mut order: Vec<usize> = (0..strings.len()).collect();
    order.sort_by_key(|&i| (std::cmp::Reverse(strings[i].weight()), i));
    let mut groups: Vec<(Vec<usize>, Summary)> = Vec::new();
    for i in order {
        let p = &strings[i];
        let lo = groups.len().saturating_sub(WINDOW);
        let slot = (lo..groups.len()).find(|&g| !groups[g].1.is_full() && groups[g].1.accepts(p));
        let g = match slot {
            Some(g) => g,
            None => {
                groups.push((Vec::new(), Summary::new(how)));
                groups.len() - 1
            }
        };
        groups[g].0.push(i);
        groups[g].1.add(p);
    }
    groups
        .into_iter()
        .map(|(mut members, _)| {
            members.sort_unstable();
            members
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::pauli::Pauli;

    #[test]
    fn every_group_is_pairwise_compatible_and_covers_the_input() {
        let s = |f: &[(usize, Pauli)]| PauliString::from_factors(f).1;
        let strings = vec![
            s(&[(0, Pauli::X), (1, Pauli::X)]),
            s(&[(0, Pauli::Z), (1, Pauli::Z)]),
            s(&[(0, Pauli::Y), (1, Pauli::Y)]),
            s(&[(0, Pauli::Z)]),
            s(&[(1, Pauli::X)]),
        ];
        for how in [Compat::Commuting, Compat::QubitWise] {
            let groups = colour_groups(&strings, how);
            let mut seen: Vec<usize> = groups.iter().flatten().copied().collect();
            seen.sort_unstable();
            assert_eq!(seen, vec![0, 1, 2, 3, 4]);
            for g in &groups {
                for &a in g {
                    for &b in g {
                        assert!(compatible(&strings[a], &strings[b], how));
                    }
                }
            }
        }
        // XX, YY, ZZ commute pairwise: one group under full commutation.
        let full = colour_groups(&strings[..3], Compat::Commuting);
        assert_eq!(full, vec![vec![0, 1, 2]]);
    }

    /// Random strings of weight ≤ 4 on `n` qubits (a local Hamiltonian's shape).
    fn random_local(n: usize, m: usize, seed: u64) -> Vec<PauliString> {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
        (0..m)
            .map(|_| {
                let w = rng.gen_range(1..=4);
                let f: Vec<(usize, Pauli)> = (0..w)
                    .map(|_| {
                        let p = [Pauli::X, Pauli::Y, Pauli::Z][rng.gen_range(0..3)];
                        (rng.gen_range(0..n), p)
                    })
                    .collect();
                PauliString::from_factors(&f).1
            })
            .filter(|p| !p.is_identity())
            .collect()
    }

    #[test]
    fn windowed_groups_are_pairwise_compatible_on_wide_registers() {
        // 3,000 strings on 300 qubits: above the exact regime, across several words.
        let strings = random_local(300, 3000, 11);
        assert!(strings.len() > EXACT_COLOURING_MAX);
        for how in [Compat::Commuting, Compat::QubitWise] {
            let groups = colour_groups(&strings, how);
            let mut seen: Vec<usize> = groups.iter().flatten().copied().collect();
            seen.sort_unstable();
            assert_eq!(seen, (0..strings.len()).collect::<Vec<_>>());
            for g in &groups {
                for (k, &a) in g.iter().enumerate() {
                    for &b in &g[k + 1..] {
                        assert!(compatible(&strings[a], &strings[b], how), "{how:?}");
                    }
                }
            }
            // Local strings on many qubits mostly commute: far fewer groups than strings.
            assert!(
                groups.len() * 10 < strings.len(),
                "{how:?}: {}",
                groups.len()
            );
        }
    }

    #[test]
    fn windowed_grouping_of_commuting_strings_is_one_group() {
        // Z strings all commute: one group, whatever the count.
        let strings: Vec<PauliString> = (0..5000)
            .map(|k| {
                PauliString::from_factors(&[(k % 700, Pauli::Z), ((k * 7 + 3) % 700, Pauli::Z)]).1
            })
            .filter(|p| !p.is_identity())
            .collect();
        let groups = windowed_groups(&strings, Compat::Commuting);
        assert_eq!(groups.len(), 5000usize.div_ceil(GROUP_CAP));
    }

    #[test]
    fn commuting_runs_are_maximal_and_pairwise_commuting() {
        // Mostly-commuting local strings on 40 qubits, 3,000 of them: runs pass GROUP_CAP, so
        // both the member index and the echelon basis are exercised.
        let strings = random_local(40, 3000, 5);
        let zs: Vec<PauliString> = strings
            .iter()
            .map(|p| PauliString {
                x: Bits::new(),
                z: p.support(),
            })
            .collect();
        for list in [&strings, &zs] {
            let run = commuting_runs(list.iter());
            assert_eq!(run.len(), list.len());
            let mut start = 0;
            while start < list.len() {
                let end = (start..list.len())
                    .find(|&i| run[i] != run[start])
                    .unwrap_or(list.len());
                for a in start..end {
                    for b in a + 1..end {
                        assert!(list[a].commutes_with(&list[b]));
                    }
                }
                if end < list.len() {
                    assert_eq!(run[end], run[start] + 1);
                    assert!((start..end).any(|a| !list[a].commutes_with(&list[end])));
                }
                start = end;
            }
        }
        // Z strings all commute: one run.
        assert!(commuting_runs(zs.iter()).iter().all(|&r| r == 0));
    }
}
