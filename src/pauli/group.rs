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
use std::borrow::Borrow;

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
pub fn colour_groups<S: Borrow<PauliString>>(strings: &[S], how: Compat) -> Vec<Vec<usize>> {
    if strings.len() <= EXACT_COLOURING_MAX {
        welsh_powell(strings, how)
    } else {
        windowed_groups(strings, how)
    }
}

fn welsh_powell<S: Borrow<PauliString>>(strings: &[S], how: Compat) -> Vec<Vec<usize>> {
    let m = strings.len();
    let strings: Vec<&PauliString> = strings.iter().map(Borrow::borrow).collect();
    let mut degree = vec![0usize; m];
    for i in 0..m {
        for j in (i + 1)..m {
            if !compatible(strings[i], strings[j], how) {
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
            .position(|g| g.iter().all(|&j| compatible(strings[i], strings[j], how)));
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
            Some(e) => {
                e.insert(p);
            }
            None => {
                small.add(p);
                if small.is_full() {
                    let Summary::Commuting { members, .. } = &small else {
                        unreachable!("a commuting summary")
                    };
                    let mut e = Echelon::default();
                    members.iter().for_each(|m| {
                        e.insert(m);
                    });
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
pub(crate) struct Echelon {
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
    /// Returns whether the span grew (`p` was independent of it).
    pub(crate) fn insert(&mut self, p: &PauliString) -> bool {
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
                    return true;
                }
            }
        }
        false
    }

    /// True when `p` commutes with the whole span; only `p`'s non-zero words are visited.
    pub(crate) fn commutes_with_all(&self, p: &PauliString) -> bool {
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

/// The span of a set of strings, answering "does `p` commute with every member?" in time
/// proportional to `p`'s weight, whatever the set's size.
///
/// Notation: a string is the symplectic vector `(x|z)`; `p` and `b` commute when
/// `⟨p, b⟩ = |p.x ∧ b.z| + |p.z ∧ b.x|` is even, and `⟨p, ·⟩` is linear, so `p` commutes with
/// every member exactly when it commutes with every vector of a basis of their span
/// (`Echelon` finds which members extend the basis). The basis is kept transposed ("bit
/// sliced"): per qubit `q`, one bit mask over the basis vectors for their `x` bit at `q` and one
/// for their `z` bit, all masks in one flat array. Then the products of `p` with all basis vectors at once are the XOR, over
/// `q ∈ p.x`, of the `z` masks and, over `q ∈ p.z`, of the `x` masks; `p` commutes with the span
/// when that XOR is zero. One test costs `weight(p) · ⌈rank/64⌉` word operations; a set of
/// pairwise commuting strings has rank at most the qubit count. The basis vectors kept in the
/// masks are the members themselves (those that extended the span), so the masks stay as
/// sparse as the members.
#[derive(Default)]
pub(crate) struct Span {
    echelon: Echelon,
    rank: usize,
    /// Words per mask: `⌈rank/64⌉`, at least 1.
    stride: usize,
    /// Flat, per qubit `q`: the `x` mask at `[2q·stride, (2q+1)·stride)` (bit `k` set when
    /// basis vector `k` has an `x` bit at `q`), then the `z` mask.
    cols: Vec<u64>,
}

/// A string's letters as `Span` reads them: the qubits of its `x` bits and of its `z` bits.
pub(crate) struct SpanQuery {
    xs: smallvec::SmallVec<[usize; 8]>,
    zs: smallvec::SmallVec<[usize; 8]>,
}

impl SpanQuery {
    pub(crate) fn new(p: &PauliString) -> SpanQuery {
        SpanQuery {
            xs: p.x.ones().collect(),
            zs: p.z.ones().collect(),
        }
    }
}

impl Span {
    /// Adds `p` to the set.
    pub(crate) fn insert(&mut self, p: &PauliString) {
        if !self.echelon.insert(p) {
            return;
        }
        let k = self.rank;
        self.rank += 1;
        let stride = self.rank.div_ceil(64);
        if stride != self.stride {
            // Widen every mask by one word (a rank step past a multiple of 64).
            let old = self.stride;
            let masks = self.cols.len() / old.max(1);
            let mut cols = vec![0u64; masks * stride];
            for m in 0..masks {
                cols[m * stride..m * stride + old]
                    .copy_from_slice(&self.cols[m * old..(m + 1) * old]);
            }
            self.cols = cols;
            self.stride = stride;
        }
        let top = p.x.ones().chain(p.z.ones()).max().unwrap_or(0);
        if self.cols.len() < 2 * (top + 1) * stride {
            self.cols.resize(2 * (top + 1) * stride, 0);
        }
        let (word, bit) = (k / 64, 1u64 << (k % 64));
        for q in p.x.ones() {
            self.cols[2 * q * stride + word] |= bit;
        }
        for q in p.z.ones() {
            self.cols[(2 * q + 1) * stride + word] |= bit;
        }
    }

    /// True when `p` commutes with every string added so far.
    #[cfg(test)]
    pub(crate) fn commutes_with_all(&self, p: &PauliString) -> bool {
        self.accepts(&SpanQuery::new(p))
    }

    /// [`Span::commutes_with_all`] of the string `query` was made from.
    pub(crate) fn accepts(&self, query: &SpanQuery) -> bool {
        let stride = self.stride;
        let qubits = self.cols.len() / (2 * stride.max(1));
        // An `x` bit of p meets the basis' `z` masks, a `z` bit their `x` masks.
        let mask = |q: usize, z: bool| {
            let at = (2 * q + z as usize) * stride;
            &self.cols[at..at + stride]
        };
        if stride == 1 {
            let mut acc = 0u64;
            for &q in query.xs.iter().filter(|&&q| q < qubits) {
                acc ^= mask(q, true)[0];
            }
            for &q in query.zs.iter().filter(|&&q| q < qubits) {
                acc ^= mask(q, false)[0];
            }
            return acc == 0;
        }
        let mut acc: smallvec::SmallVec<[u64; 4]> = smallvec::smallvec![0; stride];
        for &q in query.xs.iter().filter(|&&q| q < qubits) {
            acc.iter_mut().zip(mask(q, true)).for_each(|(a, c)| *a ^= c);
        }
        for &q in query.zs.iter().filter(|&&q| q < qubits) {
            acc.iter_mut()
                .zip(mask(q, false))
                .for_each(|(a, c)| *a ^= c);
        }
        acc.iter().all(|&a| a == 0)
    }
}

/// The windowed first-fit grouping of the module notes (inputs above
/// [`EXACT_COLOURING_MAX`]); every group is pairwise compatible.
pub fn windowed_groups<S: Borrow<PauliString>>(strings: &[S], how: Compat) -> Vec<Vec<usize>> {
    let strings: Vec<&PauliString> = strings.iter().map(Borrow::borrow).collect();
    let mut order: Vec<usize> = (0..strings.len()).collect();
    order.sort_by_key(|&i| (std::cmp::Reverse(strings[i].weight()), i));
    let mut groups: Vec<(Vec<usize>, Summary)> = Vec::new();
    for i in order {
        let p = strings[i];
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

    /// `Span::commutes_with_all` against its definition, one `commutes_with` per member
    /// (the symplectic criterion of commutation, Nielsen & Chuang, "Quantum Computation and
    /// Quantum Information", 2000, §10.5.1, from memory), on sets of random local strings of
    /// every size up to 300 (ranks past one 64-bit word), commuting and not.
    #[test]
    fn span_test_equals_the_member_by_member_test() {
        let strings = random_local(130, 600, 11);
        for size in [0usize, 1, 5, 70, 300] {
            // A commuting set (greedy) and an arbitrary one.
            let mut commuting: Vec<&PauliString> = Vec::new();
            for p in &strings {
                if commuting.len() < size && commuting.iter().all(|m| m.commutes_with(p)) {
                    commuting.push(p);
                }
            }
            let arbitrary: Vec<&PauliString> = strings.iter().take(size).collect();
            for (is_commuting, set) in [(true, commuting), (false, arbitrary)] {
                let mut span = Span::default();
                set.iter().for_each(|m| span.insert(m));
                let mut agree = (0, 0);
                for p in &strings {
                    let direct = set.iter().all(|m| m.commutes_with(p));
                    assert_eq!(span.commutes_with_all(p), direct, "set of {}", set.len());
                    if direct {
                        agree.0 += 1;
                    } else {
                        agree.1 += 1;
                    }
                }
                // Both answers occur for the non-trivial commuting sets (their own members
                // commute with them), so the check can fail either way.
                if is_commuting && size >= 5 {
                    assert!(agree.0 > 0 && agree.1 > 0, "{agree:?} at size {size}");
                }
            }
        }
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
