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
//!   - full commutation: the group keeps the span of its members (`Span`: its members, or once
//!     they outnumber twice the qubit count a basis of them, as symplectic vectors bit sliced
//!     per qubit), and the window's groups sit in a `SpanRing`, which keeps the first 64 held
//!     vectors of every open group side by side per qubit, so a newcomer is tested against 64
//!     groups at once with `2·weight` runs of contiguous word XORs; a group's own span is read
//!     only when that head test passes and it holds more than 64 vectors. A group is closed at
//!     [`GROUP_CAP`] members. The answer is exactly "commutes with every member" (tested
//!     against that definition, letter by letter, in the tests).
//!
//! Cost of the windowed regime: O(m log m) for the sort plus, per string, `2·weight` XORs of
//! `WINDOW` words, at most `WINDOW` span tests of `weight · ⌈h/64⌉` words (`h` held vectors:
//! at most [`GROUP_CAP`] members here) and one insert (setting `weight` bits; on a group past
//! twice the qubit count, an echelon reduction), so linear in the number of terms.
//!
//! Measured (`PHASEWRIGHT_BENCH_QUICK=1 cargo bench --bench grouping`, 2 shared cores): 10⁵
//! strings of weight ≤ 4 on 1,024 qubits, commuting, 0.21–0.27 s at load about 3.8, where the
//! spans kept as echelon bases took 0.64–1.14 s, run for run in the same session (1.53–1.59 s
//! in an earlier session at load about 5), so the "well under a second" is met. The
//! groups there reach ~10³ members on 1,024 qubits, below the lazy limit, so no echelon is
//! built; the echelon inserts took 1.5·10⁶ reductions of 32-word vectors (counted, ~15 per
//! string). The largest item left in the profile is the span test past the head (18% of the
//! bench's samples; 7.6·10⁵ tests, counted), which reads masks of 16 words in the groups'
//! separate allocations. 10⁴ strings on 24 qubits 0.005 s. The price of the window is fewer
//! merges than the exact colouring would find across far-apart groups, which costs gates,
//! never correctness.

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
/// every member exactly when it commutes with every vector of any set spanning the same space.
/// The held vectors are kept transposed ("bit sliced"): per qubit `q`, one bit mask over them
/// for their `x` bit at `q` and one for their `z` bit, all masks in one flat array. Then the
/// products of `p` with all held vectors at once are the XOR, over `q ∈ p.x`, of the `z` masks
/// and, over `q ∈ p.z`, of the `x` masks; `p` commutes with the span when that XOR is zero.
///
/// Which vectors are held. Lazily, every member: no elimination at all, which on wide
/// registers is the right trade (random local strings on 1,024 qubits are nearly all
/// independent, so a basis would be hardly smaller, and the reductions of an echelon insert
/// cost more than the tests they would save). Once the members outnumber twice the qubit
/// count (and 64), a basis is smaller: the masks are then cut, once, to the members that
/// extend the span (`Echelon`, in member order), and from then on a newcomer is held only when
/// it extends the span. One test costs `weight(p) · ⌈h/64⌉` word operations for `h` held
/// vectors: `h` is at most `max(2n, 64) + 1` members, then the rank (at most `2n`, at most `n`
/// for pairwise commuting strings). The held vectors are members themselves, so the masks stay
/// as sparse as the members.
#[derive(Default)]
pub(crate) struct Span {
    /// `None` while the masks hold every member (lazy: no echelon work); built from them, and
    /// the masks then cut to a basis, once the members outnumber [`Span::lazy_limit`].
    echelon: Option<Echelon>,
    /// Vectors held in the masks: every member while lazy, else the basis (the rank).
    rank: usize,
    /// Words per mask: `⌈rank/64⌉`, at least 1.
    stride: usize,
    /// Flat, per qubit `q`: the `x` mask at `[2q·stride, (2q+1)·stride)` (bit `k` set when
    /// held vector `k` has an `x` bit at `q`), then the `z` mask.
    cols: Vec<u64>,
}

/// What [`Span::insert`] did to the masks.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum Held {
    /// The string is held at this index (the masks hold its bits there; earlier bits kept).
    At(usize),
    /// The string lay in the span of a basis: the masks are unchanged.
    No,
    /// The masks were rebuilt (cut to a basis of the members, the string included): every
    /// index may have changed.
    Rebuilt,
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
    /// Qubits with masks (every qubit of every held vector is below it).
    fn qubits(&self) -> usize {
        self.cols.len() / (2 * self.stride.max(1))
    }

    /// Members held lazily before the masks are cut to a basis: past twice the qubit count a
    /// basis (rank at most `2n`, at most `n` for a commuting set) is the smaller.
    fn lazy_limit(&self) -> usize {
        (2 * self.qubits()).max(HEAD)
    }

    /// Holds `p` at index `rank` of the masks.
    fn hold(&mut self, p: &PauliString) -> usize {
        let k = self.rank;
        self.rank += 1;
        let stride = self.rank.div_ceil(64);
        if stride != self.stride {
            // Widen every mask by one word (a step past a multiple of 64).
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
        k
    }

    /// The held vectors, read back from the masks, in index order.
    fn held(&self) -> Vec<PauliString> {
        let mut out = vec![PauliString::default(); self.rank];
        for row in 0..2 * self.qubits() {
            let (q, z) = (row / 2, row % 2 == 1);
            let mask = &self.cols[row * self.stride..(row + 1) * self.stride];
            for (w, &word) in mask.iter().enumerate() {
                let mut word = word;
                while word != 0 {
                    let k = 64 * w + word.trailing_zeros() as usize;
                    word &= word - 1;
                    if z {
                        out[k].z.insert(q);
                    } else {
                        out[k].x.insert(q);
                    }
                }
            }
        }
        out
    }

    /// Adds `p` to the set; see [`Held`]. While lazy every member is held, and the set is
    /// the span of the held vectors either way, so [`Span::accepts`] is exact throughout.
    pub(crate) fn insert(&mut self, p: &PauliString) -> Held {
        if let Some(e) = &mut self.echelon {
            return if e.insert(p) {
                Held::At(self.hold(p))
            } else {
                Held::No
            };
        }
        let k = self.hold(p);
        if self.rank <= self.lazy_limit() {
            return Held::At(k);
        }
        // Cut the masks to the members that extend the span, in their order.
        let members = self.held();
        let mut e = Echelon::default();
        *self = Span::default();
        for m in &members {
            if e.insert(m) {
                self.hold(m);
            }
        }
        self.echelon = Some(e);
        Held::Rebuilt
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

/// Held vectors of a span mirrored in its [`SpanRing`] head word.
const HEAD: usize = 64;

/// Groups tested together by [`SpanRing::first_fit`] (one stack buffer of words).
const CHUNK: usize = 64;

/// The spans of a window of open groups, for first-fit: "which is the oldest open group whose
/// members all commute with these strings?"
///
/// Groups are numbered in the order they were opened; the last `window` of them are open, and
/// group `g` lives in slot `g % window` (a ring: opening a group past the window drops the
/// oldest, whose slot it takes). Each slot keeps its group's [`Span`]. Beside them, the first
/// [`HEAD`] held vectors of every slot (word 0 of each of its span's masks) are kept bit sliced
/// across the slots: per qubit `q` and letter, one row holding one word per slot (bit `k` of a
/// slot's word set when held vector `k` of that group has that letter's bit at `q`), rows one
/// after the other. A string's products with the head vectors of a run of neighbouring slots
/// are then the XOR of a few contiguous row pieces (one per letter of the string), so one test
/// reads `2·weight` sequential runs of words for [`CHUNK`] groups at once, where the spans
/// alone would read scattered words of a different allocation per group. A non-zero head word
/// rejects a group outright (the string anticommutes with one of its members); a zero one
/// accepts it when the span holds at most [`HEAD`] vectors (the head is then all of them), else
/// the group's own span decides. When a span cuts its masks to a basis, its head words are
/// copied again from its masks. The answer is always exactly the span test's.
pub(crate) struct SpanRing {
    window: usize,
    /// Groups opened so far.
    opened: usize,
    /// Per slot, its group's span.
    spans: Vec<Span>,
    /// Slots per row (at least `spans.len()`, at most `window`).
    width: usize,
    /// Qubits with rows (every qubit of every string inserted so far is below it).
    qubits: usize,
    /// Row `2q` (`x` bits at `q`), then row `2q + 1` (`z` bits), each `width` words.
    heads: Vec<u64>,
}

impl SpanRing {
    /// An empty ring whose last `window` groups are open (`usize::MAX`: every group).
    pub(crate) fn new(window: usize) -> SpanRing {
        assert!(window > 0, "a window of at least one group");
        SpanRing {
            window,
            opened: 0,
            spans: Vec::new(),
            width: 0,
            qubits: 0,
            heads: Vec::new(),
        }
    }

    /// The oldest open group.
    fn oldest(&self) -> usize {
        self.opened.saturating_sub(self.window)
    }

    /// Opens a new, empty group and returns its number; the oldest group is closed when the
    /// window was full.
    pub(crate) fn open(&mut self) -> usize {
        let g = self.opened;
        let slot = g % self.window;
        if slot == self.spans.len() {
            self.spans.push(Span::default());
            if slot == self.width {
                self.widen((2 * self.width).max(8).min(self.window));
            }
        } else {
            self.spans[slot] = Span::default();
            let width = self.width;
            for row in 0..2 * self.qubits {
                self.heads[row * width + slot] = 0;
            }
        }
        self.opened += 1;
        g
    }

    /// Lays the rows out again, `width` slots each.
    fn widen(&mut self, width: usize) {
        let old = self.width;
        let mut heads = vec![0u64; 2 * self.qubits * width];
        for row in 0..2 * self.qubits {
            heads[row * width..row * width + old]
                .copy_from_slice(&self.heads[row * old..(row + 1) * old]);
        }
        self.heads = heads;
        self.width = width;
    }

    /// Adds `p` to open group `g`.
    pub(crate) fn insert(&mut self, g: usize, p: &PauliString) {
        assert!(
            (self.oldest()..self.opened).contains(&g),
            "group {g} is not open"
        );
        let slot = g % self.window;
        let k = match self.spans[slot].insert(p) {
            Held::At(k) if k < HEAD => k,
            Held::At(_) | Held::No => return,
            Held::Rebuilt => {
                // The head word of every row is word 0 of the span's mask.
                let span = &self.spans[slot];
                if span.qubits() > self.qubits {
                    self.qubits = span.qubits();
                    self.heads.resize(2 * self.qubits * self.width, 0);
                }
                let (width, stride) = (self.width, span.stride);
                for row in 0..2 * self.qubits {
                    self.heads[row * width + slot] =
                        span.cols.get(row * stride).copied().unwrap_or(0);
                }
                return;
            }
        };
        let top = p.x.ones().chain(p.z.ones()).max().unwrap_or(0);
        if top >= self.qubits {
            self.qubits = top + 1;
            self.heads.resize(2 * self.qubits * self.width, 0);
        }
        let (width, bit) = (self.width, 1u64 << k);
        for q in p.x.ones() {
            self.heads[2 * q * width + slot] |= bit;
        }
        for q in p.z.ones() {
            self.heads[(2 * q + 1) * width + slot] |= bit;
        }
    }

    /// The oldest open group `g` with `eligible(g)` whose members all commute with every
    /// string of `queries`.
    pub(crate) fn first_fit(
        &self,
        queries: &[SpanQuery],
        mut eligible: impl FnMut(usize) -> bool,
    ) -> Option<usize> {
        let width = self.width;
        let mut g0 = self.oldest();
        while g0 < self.opened {
            let s0 = g0 % self.window;
            // A run of neighbouring slots: up to CHUNK, the newest group, or the ring's end.
            let len = CHUNK.min(self.opened - g0).min(self.spans.len() - s0);
            let mut bad = [0u64; CHUNK];
            for query in queries {
                let mut acc = [0u64; CHUNK];
                let acc = &mut acc[..len];
                // An `x` bit of the string meets the groups' `z` rows, a `z` bit their `x`
                // rows.
                let rows = query
                    .xs
                    .iter()
                    .map(|&q| (q, 1))
                    .chain(query.zs.iter().map(|&q| (q, 0)));
                for (q, letter) in rows.filter(|&(q, _)| q < self.qubits) {
                    let at = (2 * q + letter) * width + s0;
                    acc.iter_mut()
                        .zip(&self.heads[at..at + len])
                        .for_each(|(a, h)| *a ^= h);
                }
                bad.iter_mut().zip(acc.iter()).for_each(|(b, a)| *b |= a);
            }
            for (i, &b) in bad[..len].iter().enumerate() {
                let (g, span) = (g0 + i, &self.spans[s0 + i]);
                if b == 0
                    && eligible(g)
                    && (span.rank <= HEAD || queries.iter().all(|q| span.accepts(q)))
                {
                    return Some(g);
                }
            }
            g0 += len;
        }
        None
    }
}

/// The windowed first-fit grouping of the module notes (inputs above
/// [`EXACT_COLOURING_MAX`]); every group is pairwise compatible.
pub fn windowed_groups<S: Borrow<PauliString>>(strings: &[S], how: Compat) -> Vec<Vec<usize>> {
    let strings: Vec<&PauliString> = strings.iter().map(Borrow::borrow).collect();
    let weight: Vec<u32> = strings.iter().map(|p| p.weight()).collect();
    let mut order: Vec<usize> = (0..strings.len()).collect();
    order.sort_unstable_by_key(|&i| (std::cmp::Reverse(weight[i]), i));
    if how == Compat::Commuting {
        return windowed_commuting(&strings, order, WINDOW, GROUP_CAP);
    }
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

/// The commuting case of [`windowed_groups`] (there with [`WINDOW`] and [`GROUP_CAP`]):
/// strings in `order`, each into the oldest of the last `window` groups that has fewer than
/// `cap` members and whose members all commute with it, else into a new group; the window's
/// groups are the spans of a [`SpanRing`].
fn windowed_commuting(
    strings: &[&PauliString],
    order: Vec<usize>,
    window: usize,
    cap: usize,
) -> Vec<Vec<usize>> {
    let mut ring = SpanRing::new(window);
    let mut groups: Vec<Vec<usize>> = Vec::new();
    for i in order {
        let query = [SpanQuery::new(strings[i])];
        let g = match ring.first_fit(&query, |g| groups[g].len() < cap) {
            Some(g) => g,
            None => {
                groups.push(Vec::new());
                ring.open()
            }
        };
        groups[g].push(i);
        ring.insert(g, strings[i]);
    }
    for g in &mut groups {
        g.sort_unstable();
    }
    groups
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
                set.iter().for_each(|m| {
                    span.insert(m);
                });
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

    /// The cut of a lazy span to a basis: mostly-`Z` strings on 24 qubits, a commuting set of
    /// 400 members and an arbitrary one of 400 (both past the lazy limit of 64 held vectors).
    /// Exactly one insert rebuilds the masks; afterwards the held count is the echelon rank,
    /// at most 24 for the commuting set (a commuting set spans an isotropic subspace, of
    /// dimension at most the qubit count: Gottesman, "Stabilizer codes and quantum error
    /// correction", PhD thesis, Caltech 1997, §3.3, from memory) and at most 48 for any set;
    /// and every answer, before and after the cut, is the member-by-member one.
    #[test]
    fn a_span_cut_to_a_basis_gives_the_member_by_member_answer() {
        let n = 24;
        let strings = random_biased(n, 3000, 4, 0.9, 3);
        let mut commuting: Vec<&PauliString> = Vec::new();
        for p in &strings {
            if commuting.len() < 400 && commuting.iter().all(|m| m.commutes_with(p)) {
                commuting.push(p);
            }
        }
        assert_eq!(commuting.len(), 400);
        let arbitrary: Vec<&PauliString> = strings.iter().take(400).collect();
        for (is_commuting, set) in [(true, commuting), (false, arbitrary)] {
            let mut span = Span::default();
            let mut rebuilt = 0;
            for (i, m) in set.iter().enumerate() {
                if span.insert(m) == Held::Rebuilt {
                    rebuilt += 1;
                }
                if i % 50 == 49 {
                    for p in strings.iter().take(300) {
                        let direct = set[..=i].iter().all(|m| m.commutes_with(p));
                        assert_eq!(span.commutes_with_all(p), direct, "after {} members", i + 1);
                    }
                }
            }
            assert_eq!(rebuilt, 1);
            let mut e = Echelon::default();
            let rank = set.iter().filter(|m| e.insert(m)).count();
            assert_eq!(span.rank, rank);
            assert!(rank <= if is_commuting { n } else { 2 * n }, "rank {rank}");
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

    /// Commutation by the letters, qubit by qubit: two Pauli strings commute exactly when the
    /// qubits where both act and their letters differ are even in number (Nielsen & Chuang,
    /// "Quantum Computation and Quantum Information", 2000, §10.5.1, from memory). Reads no
    /// bit mask, so it checks the span and ring arithmetic from outside.
    fn commute_by_letters(a: &PauliString, b: &PauliString, n: usize) -> bool {
        (0..n)
            .filter(|&q| {
                let (p, r) = (a.get(q), b.get(q));
                p != Pauli::I && r != Pauli::I && p != r
            })
            .count()
            % 2
            == 0
    }

    /// The windowed first-fit of [`windowed_commuting`] by its definition: each string in
    /// `order` joins the oldest of the last `window` groups with fewer than `cap` members all
    /// of which commute with it (letter by letter), else a new group.
    fn windowed_first_fit_by_letters(
        strings: &[PauliString],
        n: usize,
        order: &[usize],
        window: usize,
        cap: usize,
    ) -> Vec<Vec<usize>> {
        let mut groups: Vec<Vec<usize>> = Vec::new();
        for &i in order {
            let lo = groups.len().saturating_sub(window);
            let slot = (lo..groups.len()).find(|&g| {
                groups[g].len() < cap
                    && groups[g]
                        .iter()
                        .all(|&j| commute_by_letters(&strings[i], &strings[j], n))
            });
            match slot {
                Some(g) => groups[g].push(i),
                None => groups.push(vec![i]),
            }
        }
        for g in &mut groups {
            g.sort_unstable();
        }
        groups
    }

    /// Random strings of weight 1–`w` on `n` qubits; a letter is `Z` with probability
    /// `z_bias` (so large commuting groups, of rank past 64, occur), else `X` or `Y`.
    fn random_biased(n: usize, m: usize, w: usize, z_bias: f64, seed: u64) -> Vec<PauliString> {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
        let mut out = Vec::new();
        while out.len() < m {
            let f: Vec<(usize, Pauli)> = (0..rng.gen_range(1..=w))
                .map(|_| {
                    let p = if rng.gen_bool(z_bias) {
                        Pauli::Z
                    } else {
                        [Pauli::X, Pauli::Y][rng.gen_range(0..2)]
                    };
                    (rng.gen_range(0..n), p)
                })
                .collect();
            let p = PauliString::from_factors(&f).1;
            if !p.is_identity() {
                out.push(p);
            }
        }
        out
    }

    fn heaviest_first(strings: &[PauliString]) -> Vec<usize> {
        let mut order: Vec<usize> = (0..strings.len()).collect();
        order.sort_by_key(|&i| (std::cmp::Reverse(strings[i].weight()), i));
        order
    }

    /// The grouping of `windowed_groups` at its own window and cap, 3,000 strings on 150
    /// qubits (three words), mostly `Z`: the same groups as the definition, and some group's
    /// span has rank past the 64 head vectors of the ring, so the span fallback is taken.
    #[test]
    fn windowed_commuting_groups_are_the_definitions() {
        let n = 150;
        let strings = random_biased(n, 3000, 4, 0.9, 21);
        assert!(strings.len() > EXACT_COLOURING_MAX);
        let got = windowed_groups(&strings, Compat::Commuting);
        let want = windowed_first_fit_by_letters(
            &strings,
            n,
            &heaviest_first(&strings),
            WINDOW,
            GROUP_CAP,
        );
        assert_eq!(got, want);
        let rank = |g: &Vec<usize>| {
            let mut e = Echelon::default();
            g.iter().filter(|&&i| e.insert(&strings[i])).count()
        };
        assert!(got.iter().any(|g| rank(g) > HEAD), "no group of rank > 64");
        assert!(got.len() > 1);
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig::with_cases(48))]

        /// The span ring's windowed first-fit is the definition's, group for group, on random
        /// strings of widths below one word, past one (70) and past two (130, 200), with
        /// windows and caps small enough to be hit.
        #[test]
        fn span_ring_first_fit_is_the_definitions(
            seed in 0u64..1_000_000,
            n in proptest::sample::select(vec![5usize, 24, 70, 130, 200]),
            m in 1usize..700,
            window in 1usize..40,
            cap in 1usize..400,
            z_bias in proptest::sample::select(vec![0.34f64, 0.8, 0.97]),
        ) {
            let strings = random_biased(n, m, 4, z_bias, seed);
            let refs: Vec<&PauliString> = strings.iter().collect();
            let order = heaviest_first(&strings);
            let got = windowed_commuting(&refs, order.clone(), window, cap);
            let want = windowed_first_fit_by_letters(&strings, n, &order, window, cap);
            proptest::prop_assert_eq!(got, want);
        }
    }
}
