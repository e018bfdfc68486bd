//! Product formulas: from a Pauli sum to a rotation program `Π_j exp(-i θ_j P_j)`.
//!
//! In: the non-identity terms of a [`PauliSum`], an [`Order`], a total time and a step count.
//! Out: a [`Rotation`] list, applied first to last. Invariants: no identity string appears (the
//! identity term is a global phase, recorded elsewhere and added back at estimation time);
//! adjacent rotations about the same string are merged into one; the term order is
//! deterministic.
//!
//! Formulas (Suzuki, "General theory of fractal path integrals with applications to many-body
//! theories and statistical physics", J. Math. Phys. 32, 400 (1991); Lie–Trotter and Strang are
//! the orders 1 and 2 of the same family):
//! - order 1: `S₁(δ) = Π_j e^{-i c_j P_j δ}`;
//! - order 2: `S₂(δ) = Π_j e^{-i c_j P_j δ/2} · Π_{j reversed} e^{-i c_j P_j δ/2}`;
//! - order 4: `S₄(δ) = S₂(pδ)² S₂((1−4p)δ) S₂(pδ)²`, `p = 1/(4 − 4^{1/3})`.
//!
//! `U(t) ≈ S(t/r)^r`.

use crate::pauli::group::{colour_groups, commuting_runs, Compat, SpanQuery, SpanRing};
use crate::pauli::{PauliString, PauliSum};
use crate::sim::State;

/// One factor `exp(-i θ P)` of a product formula.
#[derive(Clone, Debug, PartialEq)]
pub struct Rotation {
    pub pauli: PauliString,
    pub theta: f64,
}

/// Product-formula order.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub enum Order {
    /// Lie–Trotter.
    First,
    /// Strang (symmetric).
    Second,
    /// Suzuki's fourth-order recursion.
    Fourth,
}

/// The stage lengths of Suzuki's fourth-order formula in units of the step: `p, p, 1 − 4p, p, p`
/// with `p = 1/(4 − 4^{1/3})`, each stage a Strang step (Suzuki, Phys. Lett. A 146, 319 (1990)).
pub fn suzuki_stages() -> [f64; 5] {
    let p = 1.0 / (4.0 - 4f64.powf(1.0 / 3.0));
    [p, p, 1.0 - 4.0 * p, p, p]
}

impl Order {
    pub fn from_number(k: u32) -> Option<Order> {
        match k {
            1 => Some(Order::First),
            2 => Some(Order::Second),
            4 => Some(Order::Fourth),
            _ => None,
        }
    }

    pub fn number(self) -> u32 {
        match self {
            Order::First => 1,
            Order::Second => 2,
            Order::Fourth => 4,
        }
    }
}

/// The terms in groups of mutually commuting strings (largest-first colouring), each group in
/// the strings' own (bit-mask) order. Deterministic.
///
/// Any permutation inside a group leaves every formula of this module exactly equal: the
/// factors of one group commute, and Strang and Suzuki apply a group forward then reversed,
/// which is again a product of commuting factors. A target may therefore reorder inside groups
/// (see `route::order_for_device`) but never across them.
///
/// Flip units. Terms that flip the same qubits of a basis state (equal `x` masks, e.g. `X0 X1`
/// and `Y0 Y1`, or the two halves of a Jordan–Wigner hopping term) and commute are kept in one
/// group: only together can they conserve the number of ones, so a formula that splits them
/// breaks that symmetry (and `family::control` could no longer show |0…0⟩ to be an
/// eigenstate). When the plain colouring already keeps every such unit whole it is used as is;
/// otherwise the units are coloured as wholes (`unit_groups`).
pub fn term_groups(h: &PauliSum) -> Vec<Vec<(PauliString, f64)>> {
    let terms = h.term_list();
    let strings: Vec<&PauliString> = terms.iter().map(|t| &t.0).collect();
    let units = flip_units(&strings);
    let groups = if units.is_empty() {
        colour_groups(&strings, Compat::Commuting)
    } else {
        // Both colourings are deterministic and independent: they run side by side, and the
        // plain one is kept when it already keeps every unit whole.
        let (plain, whole) = rayon::join(
            || colour_groups(&strings, Compat::Commuting),
            || unit_groups(&strings, &units),
        );
        if keeps_units(&plain, &units, strings.len()) {
            plain
        } else {
            whole
        }
    };
    groups
        .into_iter()
        .map(|g| g.into_iter().map(|i| terms[i].clone()).collect())
        .collect()
}

/// The flip units of `strings` with more than one member: per non-zero `x` mask, its terms in
/// index order split greedily into mutually commuting sets.
///
/// At most two sets per mask, and a newcomer is tested against one member of each. Two
/// strings with the same `x` mask `a` and `z` masks `b`, `c` commute when the symplectic
/// product `|a ∧ c| + |b ∧ a|` is even, i.e. when `|a ∧ b|` and `|a ∧ c|` have the same parity:
/// commuting is an equivalence relation with two classes on such strings, so a string
/// commutes with every member of a set exactly when it commutes with the first (the
/// symplectic product: Gottesman, "Stabilizer codes and quantum error correction", PhD
/// thesis, Caltech 1997, §3.3, from memory). Cost:
/// `O(m log m)` mask comparisons for the map plus one commutation test per string.
fn flip_units(strings: &[&PauliString]) -> Vec<Vec<usize>> {
    let mut by_mask: std::collections::BTreeMap<&crate::pauli::Bits, Vec<Vec<usize>>> =
        Default::default();
    for (i, p) in strings.iter().enumerate() {
        if p.x.is_empty() {
            continue;
        }
        let sets = by_mask.entry(&p.x).or_default();
        match sets.iter_mut().find(|s| strings[s[0]].commutes_with(p)) {
            Some(s) => s.push(i),
            None => sets.push(vec![i]),
        }
    }
    by_mask
        .into_values()
        .flatten()
        .filter(|u| u.len() > 1)
        .collect()
}

fn keeps_units(groups: &[Vec<usize>], units: &[Vec<usize>], m: usize) -> bool {
    let mut group_of = vec![0usize; m];
    for (g, members) in groups.iter().enumerate() {
        for &i in members {
            group_of[i] = g;
        }
    }
    units
        .iter()
        .all(|u| u.iter().all(|&i| group_of[i] == group_of[u[0]]))
}

/// Colours the terms with every unit of `units` (and every other term on its own) as one
/// vertex: largest conflict degree first (degrees counted below
/// `pauli::group::EXACT_COLOURING_MAX` terms, else index order), each into the first group,
/// among the [`UNIT_WINDOW`] most recently opened ones, whose members it commutes with; a
/// vertex that fits none of them opens a new group. Members inside a group are sorted by
/// index; groups in order of creation. Deterministic.
///
/// The essay. A group answers "does this string commute with every member?" from the span of
/// its members (`pauli::group::Span`: their symplectic vectors, or once they outnumber twice
/// the qubit count a basis of them, kept per qubit as bit masks over the held vectors), in
/// `w · ⌈h/64⌉` word operations for a string of weight `w` and `h` held vectors, however large
/// the group grows: `h` is at most `max(2n, 64) + 1`, and a commuting group's rank at most the
/// qubit count `n`.
///
/// First-fit over *every* group is quadratic: on random weight-≤4 Hamiltonians over 120
/// qubits the groups grow in number with the terms, and the grouping stage measured 12.9 µs
/// per term at 10⁵ terms and 75.9 µs at 10⁶ (`cargo bench --bench utility -- stages`, 2
/// shared cores). So the search is bounded by a window, the heuristic of `pauli::group`'s
/// windowed regime: only the [`UNIT_WINDOW`] most recently opened groups are candidates,
/// tried oldest first; a group that falls out of the window is closed for good (its span is
/// dropped). The cost is then `O(m log m)` for the order plus
/// `O(m · UNIT_WINDOW · w · ⌈n/64⌉)` word operations for `m` terms, linear in the terms.
/// While fewer than [`UNIT_WINDOW`] groups are open every group is in the window, so the
/// result is exactly the unbounded first-fit: every Hamiltonian of the test suite, golden
/// files and README (at most a few thousand terms) stays below the bound. Past it a vertex
/// may open a new group where an old one would have taken it, which costs gates, never
/// correctness: every group is still pairwise commuting and every unit whole.
///
/// The open groups live in a `pauli::group::SpanRing`: beside each group's span, the first 64
/// basis vectors of every open group are kept bit sliced across the groups (per qubit and
/// letter, one word per group, side by side), so a vertex is tested against 64 neighbouring
/// groups at once by XORing a few contiguous runs of words, and a group's own span is read
/// only when that head test passes and its rank exceeds 64. The search is serial and its
/// answer is the span test's, so the groups are those of the member-by-member first-fit and
/// do not depend on the thread count. Measured (`cargo bench --bench grouping`, 2 shared
/// cores at load about 5, `term_groups` with both colourings): 70,741 terms on 120 qubits
/// 6.3–7.4 µs per term, where the per-group spans searched one group at a time (split over
/// the threads past 512 candidates) took 17.9–18.5 µs in the same session; the profile of
/// that search showed it memory-bound, each test touching another group's allocation. With
/// spans that hold their members and cut them to a basis only past twice the qubit count, the
/// same row took 2.19–2.75 µs per term at load about 3.8, where spans kept as echelon bases
/// took 2.84–4.18 µs run for run in the same session (10⁵ strings on 1,024 qubits: 9.8–11.0
/// µs per term, where the echelon bases took 21.4–23.4 µs).
fn unit_groups(strings: &[&PauliString], units: &[Vec<usize>]) -> Vec<Vec<usize>> {
    unit_groups_windowed(strings, units, UNIT_WINDOW)
}

/// Most recently opened groups a vertex of [`unit_groups`] may join. Chosen above the group
/// count of every case in the tests and golden files, so none of them reaches it: the
/// largest, 3,000 random strings on 24 qubits in `unit_colouring_is_member_by_member_first_fit`,
/// opens 524 groups; every Hamiltonian of the integration tests and golden files at most 57.
/// On random weight-≤4 terms over 120 qubits it is first reached between 7·10⁴ terms (589
/// groups) and 5.5·10⁵ (3,465 groups with the window; `cargo bench --bench grouping`).
const UNIT_WINDOW: usize = 1024;

/// [`unit_groups`] with its window (`usize::MAX`: every group, plain first-fit).
fn unit_groups_windowed(
    strings: &[&PauliString],
    units: &[Vec<usize>],
    window: usize,
) -> Vec<Vec<usize>> {
    assert!(window > 0, "a window of at least one group");
    let m = strings.len();
    let mut in_unit = vec![false; m];
    let mut vertices: Vec<Vec<usize>> = units.to_vec();
    for u in units {
        for &i in u {
            in_unit[i] = true;
        }
    }
    vertices.extend((0..m).filter(|&i| !in_unit[i]).map(|i| vec![i]));
    vertices.sort_by_key(|v| v[0]);
    let conflict = |a: &[usize], b: &[usize]| {
        a.iter()
            .any(|&i| b.iter().any(|&j| !strings[i].commutes_with(strings[j])))
    };
    // Exact degrees only on small inputs: at most EXACT_COLOURING_MAX² / 2 vertex pairs, a
    // constant bound; above it every degree is 0 and the order is the index order.
    let mut degree = vec![0usize; vertices.len()];
    if m <= crate::pauli::group::EXACT_COLOURING_MAX {
        for a in 0..vertices.len() {
            for b in a + 1..vertices.len() {
                if conflict(&vertices[a], &vertices[b]) {
                    degree[a] += 1;
                    degree[b] += 1;
                }
            }
        }
    }
    let mut order: Vec<usize> = (0..vertices.len()).collect();
    order.sort_by(|&a, &b| degree[b].cmp(&degree[a]).then(a.cmp(&b)));
    let mut members: Vec<Vec<usize>> = Vec::new();
    // The spans of the open groups: the last `window` of `members`.
    let mut open = SpanRing::new(window);
    for v in order {
        let queries: Vec<SpanQuery> = vertices[v]
            .iter()
            .map(|&i| SpanQuery::new(strings[i]))
            .collect();
        let g = match open.first_fit(&queries, |_| true) {
            Some(g) => g,
            None => {
                members.push(Vec::new());
                open.open()
            }
        };
        for &i in &vertices[v] {
            members[g].push(i);
            open.insert(g, strings[i]);
        }
    }
    for g in &mut members {
        g.sort_unstable();
    }
    members
}

/// Orders the terms: the groups of [`term_groups`] one after the other. Deterministic.
pub fn order_terms(h: &PauliSum) -> Vec<(PauliString, f64)> {
    term_groups(h).concat()
}

/// Longest walk back, in rotations, when a rotation is not merged by the commuting-run
/// shortcut of `Builder::push`.
pub const MERGE_WINDOW: usize = 256;

const NONE: usize = usize::MAX;

/// Builds a rotation program term by term, merging each rotation into an earlier one about the
/// same string when it commutes with every rotation in between (moving it back past them is
/// then exact). This folds the middle group of a Strang step (`G/2 · G/2 = G`) and the groups
/// at step boundaries, so a symmetric formula costs little more than Lie–Trotter.
///
/// Cost. The textbook walk back from the end stops at the first rotation that does not commute
/// with the newcomer, so it costs one commuting run per rotation: quadratic in the size of a
/// large commuting group (a 10⁵-term Ising model has one). Two devices keep it linear:
/// - the terms are split into maximal commuting runs once ([`commuting_runs`]); when the last
///   rotation about the newcomer's string lies inside the program's tail and the whole tail
///   after it belongs to the newcomer's own run, everything in between commutes with it and it
///   merges at once (an index of the last position of every string finds it);
/// - otherwise the walk back is bounded by [`MERGE_WINDOW`] rotations; past it the rotation is
///   appended unmerged, which costs gates, never exactness. The walk could only end on the
///   last rotation about the newcomer's string (the index gives it), so it is not taken at all
///   when the string has not occurred yet or its last rotation lies beyond the window (the
///   first half of every Strang step, and most of the second): it would find nothing.
///
/// On every input whose walks stay inside the window the result equals the textbook walk's.
struct Builder<'a> {
    terms: &'a [(PauliString, f64)],
    /// Equal strings share one id (the index of their first occurrence in `terms`).
    canon: &'a [usize],
    /// The commuting run of every term.
    run: &'a [u32],
    /// The program so far: (term index, angle).
    out: Vec<(usize, f64)>,
    /// Position in `out` of the last rotation about each canonical string, or `NONE`.
    last: Vec<usize>,
    /// Start of the longest suffix of `out` whose terms share the last one's run.
    tail_start: usize,
}

/// What every program over one term list shares: the canonical id of each string and the
/// commuting runs ([`commuting_runs`]), computed once and reused for every time point.
pub struct Formula<'a> {
    terms: &'a [(PauliString, f64)],
    canon: Vec<usize>,
    run: Vec<u32>,
}

impl<'a> Formula<'a> {
    pub fn new(terms: &'a [(PauliString, f64)]) -> Formula<'a> {
        let mut first: rustc_hash::FxHashMap<&PauliString, usize> = Default::default();
        first.reserve(terms.len());
        let canon = terms
            .iter()
            .enumerate()
            .map(|(i, (p, _))| *first.entry(p).or_insert(i))
            .collect();
        Formula {
            terms,
            canon,
            run: commuting_runs(terms.iter().map(|t| &t.0)),
        }
    }

    /// The rotation program for `U(t) ≈ S(t/steps)^steps` (empty for `steps = 0`); the same
    /// as [`evolution`] over this term list.
    pub fn evolution(&self, order: Order, t: f64, steps: usize) -> Vec<Rotation> {
        if steps == 0 {
            return Vec::new();
        }
        self.evolution_by_step(order, t / steps as f64, steps)
    }

    /// The rotation program for `S(dt)^steps`, the step length given itself: the time points of
    /// one campaign (`k·R` steps of `dt / R`) then share bit-identical angles, where
    /// `(k·dt) / (k·R)` may differ from `dt / R` in the last place for some `k` (0.3 / 3 is not
    /// 0.1 in binary floating point), so their programs repeat one step exactly.
    pub fn evolution_by_step(&self, order: Order, dt: f64, steps: usize) -> Vec<Rotation> {
        let mut b = Builder {
            terms: self.terms,
            canon: &self.canon,
            run: &self.run,
            out: Vec::new(),
            last: vec![NONE; self.terms.len()],
            tail_start: 0,
        };
        for _ in 0..steps {
            b.step(order, dt);
        }
        b.finish()
    }
}

impl Builder<'_> {
    fn push(&mut self, t: usize, theta: f64) {
        if theta == 0.0 {
            return;
        }
        let id = self.canon[t];
        let len = self.out.len();
        let li = self.last[id];
        let shortcut = li != NONE
            && (li + 1 == len
                || (self.run[self.out[len - 1].0] == self.run[t] && li + 1 >= self.tail_start));
        // The walk back from the end would stop at the first rotation about the newcomer's
        // string, which is `li` (the last one): it finds `li` exactly when `li` lies inside
        // the window and every rotation after it commutes with the newcomer, and nothing
        // when the string has not occurred or lies beyond the window.
        let found = if shortcut {
            Some(li)
        } else if li == NONE || li + MERGE_WINDOW < len {
            None
        } else {
            let p = &self.terms[t].0;
            self.out[li + 1..]
                .iter()
                .all(|&(q, _)| self.terms[q].0.commutes_with(p))
                .then_some(li)
        };
        match found {
            Some(i) => {
                self.out[i].1 += theta;
                if self.out[i].1 == 0.0 {
                    self.out.remove(i);
                    self.reindex();
                }
            }
            None => {
                if len == 0 || self.run[self.out[len - 1].0] != self.run[t] {
                    self.tail_start = len;
                }
                self.last[id] = len;
                self.out.push((t, theta));
            }
        }
    }

    /// Rebuilds the indexes after a removal (rare: only when angles cancel exactly).
    fn reindex(&mut self) {
        self.last.iter_mut().for_each(|l| *l = NONE);
        self.tail_start = 0;
        for (i, &(t, _)) in self.out.iter().enumerate() {
            self.last[self.canon[t]] = i;
            if i > 0 && self.run[self.out[i - 1].0] != self.run[t] {
                self.tail_start = i;
            }
        }
    }

    fn strang(&mut self, dt: f64) {
        for t in 0..self.terms.len() {
            self.push(t, self.terms[t].1 * dt / 2.0);
        }
        for t in (0..self.terms.len()).rev() {
            self.push(t, self.terms[t].1 * dt / 2.0);
        }
    }

    /// Appends one step `S(dt)` of the given order.
    fn step(&mut self, order: Order, dt: f64) {
        match order {
            Order::First => {
                for t in 0..self.terms.len() {
                    self.push(t, self.terms[t].1 * dt);
                }
            }
            Order::Second => self.strang(dt),
            Order::Fourth => {
                for f in suzuki_stages() {
                    self.strang(f * dt);
                }
            }
        }
    }

    fn finish(self) -> Vec<Rotation> {
        self.out
            .into_iter()
            .map(|(t, theta)| Rotation {
                pauli: self.terms[t].0.clone(),
                theta,
            })
            .collect()
    }
}

/// The time points of one campaign as one program read three ways: `programs[i]` is `head`,
/// then `unit` repeated `repeats[i]` times, then `tail` ([`periodic_form`]).
#[derive(Debug)]
pub struct Periodic<'p> {
    pub head: &'p [Rotation],
    pub unit: &'p [Rotation],
    pub tail: &'p [Rotation],
    pub repeats: Vec<usize>,
}

/// How many places [`periodic_form`] moves the start of the unit back, at most, to find a
/// place where two neighbouring rotations do not commute. From common practice (a small
/// bounded search); past it the first place that fits is kept.
const UNIT_START_TRIES: usize = 64;

/// Finds the repeated step in the programs of several time points of one campaign.
///
/// In: `programs[i]`, the program of `steps[i]` steps of one step length ([`Formula::
/// evolution_by_step`]), `steps` strictly increasing and at least 1. Out: a [`Periodic`]
/// reading of every program, or `None` when they do not repeat one block (fewer than two
/// programs, or merging that is not the same at every seam).
///
/// The formula merges factors only near the seams of neighbouring steps, so between the first
/// and the last seam the program of `n` steps is one block of rotations (about a step long)
/// repeated. With `a` and `b` the two shortest programs, the block starts where `a` and `b`
/// part (their common prefix), moved back (at most `UNIT_START_TRIES` places) to the first
/// place where the rotations on either side do not commute, so a synthesis that works on
/// commuting runs sees the same runs as in the whole program; its length is
/// `(|b| − |a|) / (steps_b − steps_a)`. **Invariant: every program equals its reading
/// rotation for rotation, angles bit for bit**; it is checked here for every program, so a
/// reading is never assumed.
pub fn periodic_form<'p>(steps: &[usize], programs: &[&'p [Rotation]]) -> Option<Periodic<'p>> {
    let same =
        |x: &Rotation, y: &Rotation| x.theta.to_bits() == y.theta.to_bits() && x.pauli == y.pauli;
    if programs.len() < 2 || steps.len() != programs.len() || steps[0] == 0 {
        return None;
    }
    if steps.windows(2).any(|w| w[0] >= w[1]) {
        return None;
    }
    let (a, b) = (programs[0], programs[1]);
    let more = steps[1] - steps[0];
    let extra = b.len().checked_sub(a.len())?;
    if extra == 0 || extra % more != 0 {
        return None;
    }
    let len = extra / more;
    let common = a.iter().zip(b).take_while(|(x, y)| same(x, y)).count();
    // Does `b` read as `a[..s]`, a unit of `len` repeated `more` times, then `a[s..]`?
    let fits = |s: usize| -> bool {
        s <= common
            && (0..extra).all(|j| same(&b[s + j], &b[s + j % len]))
            && a[s..].iter().zip(&b[s + extra..]).all(|(x, y)| same(x, y))
    };
    // The places that fit form an interval ending at `common`: if `s` fits, `s − 1` fits
    // exactly when `b[s−1] = b[s−1+len]` and `a[s−1] = b[s−1+extra]`. So `common` is checked
    // in full once, and the walk down to a boundary costs two comparisons a place.
    let top = common.min(a.len());
    if !fits(top) {
        return None;
    }
    let mut s = top;
    for _ in 0..UNIT_START_TRIES {
        if s == 0 || !b[s - 1].pauli.commutes_with(&b[s].pauli) {
            break;
        }
        if same(&b[s - 1], &b[s - 1 + len]) && same(&a[s - 1], &b[s - 1 + extra]) {
            s -= 1;
        } else {
            s = top;
            break;
        }
    }
    if s > 0 && b[s - 1].pauli.commutes_with(&b[s].pauli) {
        s = top;
    }
    let form = Periodic {
        head: &a[..s],
        unit: &b[s..s + len],
        tail: &a[s..],
        repeats: steps.iter().map(|&n| n - steps[0]).collect(),
    };
    let reads_as = |p: &[Rotation], m: usize| -> bool {
        p.len() == form.head.len() + m * len + form.tail.len()
            && form
                .head
                .iter()
                .chain(form.unit.iter().cycle().take(m * len))
                .chain(form.tail)
                .zip(p)
                .all(|(x, y)| same(x, y))
    };
    programs
        .iter()
        .zip(&form.repeats)
        .all(|(p, &m)| reads_as(p, m))
        .then_some(form)
}

/// One step `S(dt)` of the given order.
pub fn step(terms: &[(PauliString, f64)], order: Order, dt: f64) -> Vec<Rotation> {
    evolution(terms, order, dt, 1)
}

/// The rotation program for `U(t) ≈ S(t/steps)^steps` (empty for `steps = 0`).
pub fn evolution(
    terms: &[(PauliString, f64)],
    order: Order,
    t: f64,
    steps: usize,
) -> Vec<Rotation> {
    if steps == 0 {
        return Vec::new();
    }
    Formula::new(terms).evolution(order, t, steps)
}

/// The textbook expansion of the formula over `terms`: every factor of every step, in term
/// order, nothing merged (the textbook pipeline, `compile --opt 0`). The same operator as `formula::evolution`, which merges
/// only factors that commute past each other.
pub fn textbook_evolution(
    terms: &[(PauliString, f64)],
    order: Order,
    t: f64,
    steps: usize,
) -> Vec<Rotation> {
    let mut out = Vec::new();
    if steps == 0 {
        return out;
    }
    let dt = t / steps as f64;
    let strang = |out: &mut Vec<Rotation>, dt: f64| {
        for (p, c) in terms.iter().chain(terms.iter().rev()) {
            out.push(Rotation {
                pauli: p.clone(),
                theta: c * dt / 2.0,
            });
        }
    };
    for _ in 0..steps {
        match order {
            Order::First => out.extend(terms.iter().map(|(p, c)| Rotation {
                pauli: p.clone(),
                theta: c * dt,
            })),
            Order::Second => strang(&mut out, dt),
            Order::Fourth => {
                for f in suzuki_stages() {
                    strang(&mut out, f * dt);
                }
            }
        }
    }
    out
}

/// Applies a rotation program to a state exactly (the ideal product-formula evolution).
pub fn apply_program(state: &mut State, program: &[Rotation]) {
    for r in program {
        state.apply_pauli_rotation(&r.pauli, r.theta);
    }
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use crate::pauli::Pauli;

    /// A transverse-field Ising chain `-j Σ Z_q Z_(q+1) - g Σ X_q` (test model).
    pub(crate) fn tfim(n: usize, j: f64, g: f64) -> PauliSum {
        let mut h = PauliSum::new(n);
        for q in 0..n - 1 {
            h.add(
                PauliString::from_factors(&[(q, Pauli::Z), (q + 1, Pauli::Z)]).1,
                -j,
            );
        }
        for q in 0..n {
            h.add(PauliString::single(q, Pauli::X), -g);
        }
        h
    }

    /// `‖S(t/r)^r ψ − e^{-iHt} ψ‖` on a generic (entangled, complex) state.
    fn trotter_error(h: &PauliSum, order: Order, t: f64, r: usize) -> f64 {
        let terms = order_terms(h);
        let mut psi = State::zero(h.num_qubits);
        for q in 0..h.num_qubits as u32 {
            psi.apply(&crate::circuit::Gate::U(
                q,
                0.3 + q as f64,
                0.7,
                -0.2 * q as f64,
            ));
        }
        psi.apply_pauli_rotation(&PauliString::from_masks(0b101, 0b011), 0.4);
        let mut s = psi.clone();
        apply_program(&mut s, &evolution(&terms, order, t, r));
        let exact = crate::sim::exact::evolve_taylor(h, &psi, t);
        s.amps
            .iter()
            .zip(&exact.amps)
            .map(|(a, b)| (a - b).norm_sqr())
            .sum::<f64>()
            .sqrt()
    }

    #[test]
    fn error_falls_with_the_order_of_the_formula() {
        // Global error of an order-p formula scales as r^{-p} (Suzuki 1991): doubling r divides
        // it by about 2^p. Checked over several r with a loose band around the asymptotic ratio.
        let h = tfim(5, 1.0, 0.8);
        for (order, want) in [
            (Order::First, 2.0),
            (Order::Second, 4.0),
            (Order::Fourth, 16.0),
        ] {
            for r in [4usize, 8, 16] {
                let ratio = trotter_error(&h, order, 1.0, r) / trotter_error(&h, order, 1.0, 2 * r);
                assert!(
                    (ratio / want - 1.0).abs() < 0.25,
                    "{order:?} r={r}: ratio {ratio}"
                );
            }
        }
    }

    #[test]
    fn commuting_terms_are_exact_at_one_step() {
        let mut h = PauliSum::new(3);
        h.add(
            PauliString::from_factors(&[(0, Pauli::Z), (1, Pauli::Z)]).1,
            0.7,
        );
        h.add(
            PauliString::from_factors(&[(1, Pauli::Z), (2, Pauli::Z)]).1,
            -0.4,
        );
        h.add(PauliString::single(2, Pauli::Z), 0.3);
        assert!(trotter_error(&h, Order::First, 2.0, 1) < 1e-14);
    }

    #[test]
    fn strang_steps_fold_commuting_groups_and_keep_the_operator() {
        // With two commuting groups G₁ G₂, r Strang steps are G₁/2 G₂ G₁ G₂ … G₁ G₂ G₁/2:
        // (r+1)|G₁| + r|G₂| rotations instead of r(2L − 1).
        let h = tfim(4, 1.0, 0.5);
        let groups = term_groups(&h);
        assert_eq!(groups.len(), 2);
        let terms = order_terms(&h);
        for r in [1usize, 3] {
            let merged = evolution(&terms, Order::Second, 1.0, r);
            assert_eq!(
                merged.len(),
                (r + 1) * groups[0].len() + r * groups[1].len()
            );
            // The same operator as the textbook expansion without any merging.
            let dt = 1.0 / r as f64;
            let mut naive = Vec::new();
            for _ in 0..r {
                for (p, c) in terms.iter().chain(terms.iter().rev()) {
                    naive.push(Rotation {
                        pauli: p.clone(),
                        theta: c * dt / 2.0,
                    });
                }
            }
            let mut a = State::zero(4);
            for q in 0..4 {
                a.apply(&crate::circuit::Gate::U(q, 0.4 + q as f64, 0.1, 0.9));
            }
            let mut b = a.clone();
            apply_program(&mut a, &merged);
            apply_program(&mut b, &naive);
            let err = a
                .amps
                .iter()
                .zip(&b.amps)
                .map(|(x, y)| (x - y).norm())
                .fold(0.0, f64::max);
            assert!(err < 1e-12, "r={r}: {err}");
        }
    }

    /// The textbook merge: walk back without bound until an equal string (merge) or a
    /// non-commuting one (stop). The builder must agree with it whenever walks fit the window.
    fn textbook(terms: &[(PauliString, f64)], order: Order, t: f64, steps: usize) -> Vec<Rotation> {
        fn push(out: &mut Vec<Rotation>, r: Rotation) {
            if r.theta == 0.0 {
                return;
            }
            for i in (0..out.len()).rev() {
                if out[i].pauli == r.pauli {
                    out[i].theta += r.theta;
                    if out[i].theta == 0.0 {
                        out.remove(i);
                    }
                    return;
                }
                if !out[i].pauli.commutes_with(&r.pauli) {
                    break;
                }
            }
            out.push(r);
        }
        let mut out = Vec::new();
        let dt = t / steps as f64;
        let strang = |out: &mut Vec<Rotation>, dt: f64| {
            for (p, c) in terms.iter().chain(terms.iter().rev()) {
                push(
                    out,
                    Rotation {
                        pauli: p.clone(),
                        theta: c * dt / 2.0,
                    },
                );
            }
        };
        for _ in 0..steps {
            match order {
                Order::First => {
                    for (p, c) in terms {
                        push(
                            &mut out,
                            Rotation {
                                pauli: p.clone(),
                                theta: c * dt,
                            },
                        );
                    }
                }
                Order::Second => strang(&mut out, dt),
                Order::Fourth => {
                    for f in suzuki_stages() {
                        strang(&mut out, f * dt);
                    }
                }
            }
        }
        out
    }

    proptest::proptest! {
        /// Random term lists on 4 qubits (repeated strings and exactly cancelling coefficients
        /// included): the builder's program is the textbook walk's, rotation for rotation,
        /// whenever no walk can reach past `MERGE_WINDOW` (at most that many rotations are
        /// pushed; past it the builder appends unmerged where the unbounded walk may merge).
        #[test]
        fn builder_agrees_with_the_textbook_walk(
            raw in proptest::collection::vec((0u64..16, 0u64..16, -2i32..3), 1..24),
            order in 0usize..3,
            steps in 1usize..4,
        ) {
            let terms: Vec<(PauliString, f64)> = raw
                .iter()
                .map(|&(x, z, c)| (PauliString::from_masks(x, z), c as f64 * 0.5))
                .filter(|(p, _)| !p.is_identity())
                .collect();
            let order = [Order::First, Order::Second, Order::Fourth][order];
            let per_step = match order {
                Order::First => 1,
                Order::Second => 2,
                Order::Fourth => 10,
            };
            proptest::prop_assume!(terms.len() * per_step * steps <= MERGE_WINDOW);
            let got = evolution(&terms, order, 0.7, steps);
            let want = textbook(&terms, order, 0.7, steps);
            proptest::prop_assert_eq!(got, want);
        }
    }

    impl Builder<'_> {
        /// The merge as the builder made it before the walk was skipped: the shortcut, else
        /// a walk back from the end over at most `MERGE_WINDOW` rotations that stops at the
        /// first rotation about the same string (merge) or one that does not commute.
        fn push_walking(&mut self, t: usize, theta: f64) {
            if theta == 0.0 {
                return;
            }
            let id = self.canon[t];
            let len = self.out.len();
            let li = self.last[id];
            let shortcut = li != NONE
                && (li + 1 == len
                    || (self.run[self.out[len - 1].0] == self.run[t] && li + 1 >= self.tail_start));
            let found = if shortcut {
                Some(li)
            } else {
                let p = &self.terms[t].0;
                let mut found = None;
                for i in (len.saturating_sub(MERGE_WINDOW)..len).rev() {
                    let q = self.out[i].0;
                    if self.canon[q] == id {
                        found = Some(i);
                        break;
                    }
                    if !self.terms[q].0.commutes_with(p) {
                        break;
                    }
                }
                found
            };
            match found {
                Some(i) => {
                    self.out[i].1 += theta;
                    if self.out[i].1 == 0.0 {
                        self.out.remove(i);
                        self.reindex();
                    }
                }
                None => {
                    if len == 0 || self.run[self.out[len - 1].0] != self.run[t] {
                        self.tail_start = len;
                    }
                    self.last[id] = len;
                    self.out.push((t, theta));
                }
            }
        }
    }

    /// Strang steps built with [`Builder::push_walking`].
    fn walking_strang(terms: &[(PauliString, f64)], dt: f64, steps: usize) -> Vec<Rotation> {
        let f = Formula::new(terms);
        let mut b = Builder {
            terms,
            canon: &f.canon,
            run: &f.run,
            out: Vec::new(),
            last: vec![NONE; terms.len()],
            tail_start: 0,
        };
        for _ in 0..steps {
            for t in (0..terms.len()).chain((0..terms.len()).rev()) {
                b.push_walking(t, terms[t].1 * dt / 2.0);
            }
        }
        b.finish()
    }

    /// Programs longer than the merge window (where the walk back is cut short): the builder
    /// that skips the walk when the last rotation about a string lies beyond the window, or
    /// when the string has not occurred, gives the walking builder's program rotation for
    /// rotation. Term lists of 300–1,500 random strings on 5–9 qubits with repeats and
    /// cancelling coefficients, in the grouped order compile uses and in raw order.
    #[test]
    fn skipping_hopeless_walks_keeps_the_program() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(5);
        let mut longer = 0;
        for case in 0..12 {
            let n = 5 + case % 5;
            let m = 300 + 100 * case;
            let full = (1u64 << n) - 1;
            let mut terms: Vec<(PauliString, f64)> = (0..m)
                .map(|_| {
                    // Mostly Z strings (long commuting runs), some X/Y.
                    let x = if rng.gen_bool(0.3) {
                        rng.gen_range(0..=full)
                    } else {
                        0
                    };
                    let z = rng.gen_range(0..=full);
                    (
                        PauliString::from_masks(x, z),
                        [0.5, -0.5, 1.0, 0.25][rng.gen_range(0..4)],
                    )
                })
                .filter(|(p, _)| !p.is_identity())
                .collect();
            if case % 2 == 0 {
                let mut h = PauliSum::new(n);
                for (p, c) in &terms {
                    h.add(p.clone(), *c);
                }
                terms = order_terms(&h);
            }
            for steps in [1, 2] {
                let got = Formula::new(&terms).evolution(Order::Second, 0.7, steps);
                let want = walking_strang(&terms, 0.7 / steps as f64, steps);
                assert_eq!(got, want, "case {case}, {steps} steps");
                // A Strang step pushes every term twice, so the programs outgrow the window.
                longer += usize::from(want.len() > MERGE_WINDOW);
            }
        }
        assert!(
            longer > 12,
            "{longer} of 24 programs longer than the window"
        );
    }

    /// First-fit colouring of vertices by the definition: a vertex joins the first group all
    /// of whose members commute with each of its strings.
    fn first_fit_by_members(strings: &[&PauliString], order: &[Vec<usize>]) -> Vec<Vec<usize>> {
        first_fit_by_letters(strings, order, usize::MAX)
    }

    /// Commutation by the letters, qubit by qubit: two Pauli strings commute exactly when the
    /// qubits where both act and their letters differ are even in number (Nielsen & Chuang,
    /// "Quantum Computation and Quantum Information", 2000, §10.5.1, from memory). Reads no
    /// bit mask.
    fn commute_by_letters(a: &PauliString, b: &PauliString) -> bool {
        let n = a
            .support_iter()
            .chain(b.support_iter())
            .max()
            .map_or(0, |q| q + 1);
        (0..n)
            .filter(|&q| {
                let (p, r) = (a.get(q), b.get(q));
                p != Pauli::I && r != Pauli::I && p != r
            })
            .count()
            % 2
            == 0
    }

    /// Windowed first-fit by the definition: a vertex joins the oldest of the last `window`
    /// groups all of whose members commute with each of its strings (letter by letter).
    fn first_fit_by_letters(
        strings: &[&PauliString],
        order: &[Vec<usize>],
        window: usize,
    ) -> Vec<Vec<usize>> {
        let mut groups: Vec<Vec<usize>> = Vec::new();
        for v in order {
            let fits = |g: &Vec<usize>| {
                v.iter().all(|&i| {
                    g.iter()
                        .all(|&j| commute_by_letters(strings[i], strings[j]))
                })
            };
            let lo = groups.len().saturating_sub(window);
            match groups[lo..].iter().position(fits) {
                Some(k) => groups[lo + k].extend(v),
                None => groups.push(v.clone()),
            }
        }
        for g in &mut groups {
            g.sort_unstable();
        }
        groups
    }

    /// Above `EXACT_COLOURING_MAX` terms the unit colouring takes vertices in index order:
    /// its groups (span ring test) are the member-by-member
    /// first-fit's. 3,000 random strings of weight 1–3 on 24 qubits; the flip units come from
    /// `flip_units`, so vertices of many strings occur.
    #[test]
    fn unit_colouring_is_member_by_member_first_fit() {
        let h = random_sum(24, 3000, 3, 9);
        let terms = h.term_list();
        let strings: Vec<&PauliString> = terms.iter().map(|t| &t.0).collect();
        assert!(strings.len() > crate::pauli::group::EXACT_COLOURING_MAX);
        let units = flip_units(&strings);
        assert!(units.iter().any(|u| u.len() > 2));
        let vertices = unit_vertices(strings.len(), &units);
        let want = first_fit_by_members(&strings, &vertices);
        assert!(want.len() > 3);
        assert_eq!(unit_groups(&strings, &units), want);
        assert_eq!(unit_groups_windowed(&strings, &units, usize::MAX), want);
    }

    /// The vertices of the unit colouring in index order (units whole, other terms alone).
    fn unit_vertices(m: usize, units: &[Vec<usize>]) -> Vec<Vec<usize>> {
        let mut in_unit = vec![false; m];
        units.iter().flatten().for_each(|&i| in_unit[i] = true);
        let mut vertices: Vec<Vec<usize>> = units.to_vec();
        vertices.extend((0..m).filter(|&i| !in_unit[i]).map(|i| vec![i]));
        vertices.sort_by_key(|v| v[0]);
        vertices
    }

    /// `groups` partitions `0..m`, every group is pairwise commuting (checked member by
    /// member, not through the span) and every unit lies in one group.
    fn assert_valid_grouping(
        strings: &[&PauliString],
        units: &[Vec<usize>],
        groups: &[Vec<usize>],
    ) {
        let mut seen: Vec<usize> = groups.iter().flatten().copied().collect();
        seen.sort_unstable();
        assert_eq!(seen, (0..strings.len()).collect::<Vec<_>>());
        for g in groups {
            for (k, &a) in g.iter().enumerate() {
                for &b in &g[k + 1..] {
                    assert!(
                        strings[a].commutes_with(strings[b]),
                        "{a} and {b} anticommute"
                    );
                }
            }
        }
        assert!(keeps_units(groups, units, strings.len()));
    }

    /// Random strings of weight 1–`w` on `n` qubits, distinct, as a sum with unit
    /// coefficients.
    fn random_sum(n: usize, m: usize, w: usize, seed: u64) -> PauliSum {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
        let mut h = PauliSum::new(n);
        while h.terms.len() < m {
            let k = rng.gen_range(1..=w);
            let factors: Vec<(usize, Pauli)> = (0..k)
                .map(|_| {
                    (
                        rng.gen_range(0..n),
                        [Pauli::X, Pauli::Y, Pauli::Z][rng.gen_range(0..3)],
                    )
                })
                .collect();
            let mut seen = std::collections::BTreeSet::new();
            if factors.iter().all(|f| seen.insert(f.0)) {
                h.add(PauliString::from_factors(&factors).1, 1.0);
            }
        }
        h
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig::with_cases(64))]

        /// While the groups stay within the window the windowed colouring is the unbounded
        /// first-fit, group for group; with a window smaller than the group count it is still
        /// a valid grouping that keeps every flip unit whole. Random strings on 5 qubits, so
        /// `x` masks repeat and units of two and more occur.
        #[test]
        fn windowed_unit_colouring_is_first_fit_below_the_window(
            seed in 0u64..1_000_000,
            m in 2usize..160,
            slack in 0usize..4,
        ) {
            let h = random_sum(5, m, 3, seed);
            let terms = h.term_list();
            let strings: Vec<&PauliString> = terms.iter().map(|t| &t.0).collect();
            let units = flip_units(&strings);
            let full = unit_groups_windowed(&strings, &units, usize::MAX);
            assert_valid_grouping(&strings, &units, &full);
            let wide = unit_groups_windowed(&strings, &units, full.len() + slack);
            proptest::prop_assert_eq!(&wide, &full);
            let narrow = (full.len() / 2).max(1);
            let small = unit_groups_windowed(&strings, &units, narrow);
            assert_valid_grouping(&strings, &units, &small);
            proptest::prop_assert!(small.len() >= full.len().min(narrow));
        }

        /// The unit colouring (span ring) is the windowed first-fit of the definition, group
        /// for group, on random sums with hopping pairs (`X_a X_b`, `Y_a Y_b`, `X_a Y_b`,
        /// `Y_a X_b`: flip units of two) on widths below one word, past one (70) and past two
        /// (130, 200), with windows small enough to be hit. The vertex order (largest conflict
        /// degree first) is recomputed here letter by letter.
        #[test]
        fn unit_colouring_is_the_windowed_definition_on_wide_registers(
            seed in 0u64..1_000_000,
            n in proptest::sample::select(vec![5usize, 24, 70, 130, 200]),
            m in 2usize..300,
            window in 1usize..30,
        ) {
            use rand::{Rng, SeedableRng};
            let mut h = random_sum(n, m, 4, seed);
            let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed ^ 0x5eed);
            for _ in 0..m / 3 {
                let a = rng.gen_range(0..n - 1);
                let b = rng.gen_range(a + 1..n);
                let c = rng.gen_range(0..n);
                let (x, y) = (Pauli::X, Pauli::Y);
                let pair = [[x, x], [y, y], [x, y], [y, x]][rng.gen_range(0..4)];
                for letters in [pair, [pair[1], pair[0]]] {
                    let mut f = vec![(a, letters[0]), (b, letters[1])];
                    if c != a && c != b && rng.gen_bool(0.3) {
                        f.push((c, Pauli::Z));
                    }
                    h.add(PauliString::from_factors(&f).1, 1.0);
                }
            }
            let terms = h.term_list();
            let strings: Vec<&PauliString> = terms.iter().map(|t| &t.0).collect();
            let units = flip_units(&strings);
            let vertices = unit_vertices(strings.len(), &units);
            let conflict = |a: &[usize], b: &[usize]| {
                a.iter().any(|&i| b.iter().any(|&j| !commute_by_letters(strings[i], strings[j])))
            };
            let mut degree = vec![0usize; vertices.len()];
            for a in 0..vertices.len() {
                for b in a + 1..vertices.len() {
                    if conflict(&vertices[a], &vertices[b]) {
                        degree[a] += 1;
                        degree[b] += 1;
                    }
                }
            }
            let mut order: Vec<usize> = (0..vertices.len()).collect();
            order.sort_by(|&a, &b| degree[b].cmp(&degree[a]).then(a.cmp(&b)));
            let ordered: Vec<Vec<usize>> = order.iter().map(|&v| vertices[v].clone()).collect();
            for w in [window, usize::MAX] {
                let got = unit_groups_windowed(&strings, &units, w);
                proptest::prop_assert_eq!(&got, &first_fit_by_letters(&strings, &ordered, w));
            }
        }

        /// The two-class shortcut of `flip_units` gives the sets of the definition (a string
        /// joins the first set of its mask all of whose members it commutes with).
        #[test]
        fn flip_units_are_the_greedy_commuting_sets(seed in 0u64..1_000_000, m in 2usize..120) {
            let h = random_sum(4, m, 4, seed);
            let terms = h.term_list();
            let strings: Vec<&PauliString> = terms.iter().map(|t| &t.0).collect();
            let mut by_mask: std::collections::BTreeMap<&crate::pauli::Bits, Vec<Vec<usize>>> =
                Default::default();
            for (i, p) in strings.iter().enumerate() {
                if p.x.is_empty() {
                    continue;
                }
                let sets = by_mask.entry(&p.x).or_default();
                match sets
                    .iter_mut()
                    .find(|s| s.iter().all(|&j| strings[j].commutes_with(p)))
                {
                    Some(s) => s.push(i),
                    None => sets.push(vec![i]),
                }
            }
            proptest::prop_assert!(by_mask.values().all(|sets| sets.len() <= 2));
            let want: Vec<Vec<usize>> =
                by_mask.into_values().flatten().filter(|u| u.len() > 1).collect();
            proptest::prop_assert_eq!(flip_units(&strings), want);
        }

        /// The repeated step of several time points: found for every order on random sums
        /// (4 qubits, up to 12 strings), the unit as long as one more step adds, and the
        /// reading applied to a random state gives the state of the textbook expansion
        /// (every factor of every step, nothing merged: Suzuki, J. Math. Phys. 32, 400 (1991),
        /// the product `S(dt)^n` itself) to 1e-12.
        #[test]
        fn the_time_points_read_as_one_repeated_step(
            seed in 0u64..1_000_000,
            m in 1usize..12,
            order in proptest::prop_oneof![
                proptest::strategy::Just(Order::First),
                proptest::strategy::Just(Order::Second),
                proptest::strategy::Just(Order::Fourth)
            ],
            r in 1usize..3,
        ) {
            let h = random_sum(4, m, 3, seed);
            let terms = h.term_list();
            let f = Formula::new(&terms);
            let dt = 0.3;
            let steps: Vec<usize> = [2usize, 3, 4, 7].iter().map(|k| k * r).collect();
            let programs: Vec<Vec<Rotation>> =
                steps.iter().map(|&n| f.evolution_by_step(order, dt, n)).collect();
            let refs: Vec<&[Rotation]> = programs.iter().map(Vec::as_slice).collect();
            // A string that commutes with every other merges with itself across whole steps,
            // so its angle grows with the step count and nothing repeats; otherwise the
            // merging is the same at every seam and the reading must be found.
            let central = terms.iter().any(|(p, _)| terms.iter().all(|(q, _)| p.commutes_with(q)));
            let Some(form) = periodic_form(&steps, &refs) else {
                proptest::prop_assert!(central, "no reading, yet no string commutes with all");
                return Ok(());
            };
            proptest::prop_assert_eq!(
                form.unit.len(),
                (programs[1].len() - programs[0].len()) / r
            );
            proptest::prop_assert_eq!(&form.repeats, &vec![0, r, 2 * r, 5 * r]);
            let psi = State::random(4, &mut <rand_chacha::ChaCha8Rng as rand::SeedableRng>::seed_from_u64(seed));
            for (&n, &m) in steps.iter().zip(&form.repeats) {
                let mut a = psi.clone();
                apply_program(&mut a, form.head);
                for _ in 0..m {
                    apply_program(&mut a, form.unit);
                }
                apply_program(&mut a, form.tail);
                let mut b = psi.clone();
                apply_program(&mut b, &textbook_evolution(&terms, order, dt * n as f64, n));
                let err = a.amps.iter().zip(&b.amps).map(|(x, y)| (x - y).norm()).fold(0.0, f64::max);
                proptest::prop_assert!(err < 1e-12, "{} steps: {}", n, err);
            }
        }
    }

    /// Programs that are not one step repeated have no reading: an angle changed in the middle
    /// of the longer program, or step counts that do not increase.
    #[test]
    fn programs_that_do_not_repeat_have_no_reading() {
        let h = random_sum(4, 8, 3, 5);
        let terms = h.term_list();
        let f = Formula::new(&terms);
        let a = f.evolution_by_step(Order::Second, 0.2, 2);
        let mut b = f.evolution_by_step(Order::Second, 0.2, 3);
        let c = f.evolution_by_step(Order::Second, 0.2, 4);
        assert!(periodic_form(&[2, 3, 4], &[&a, &b, &c]).is_some());
        assert!(periodic_form(&[3, 2], &[&b, &a]).is_none());
        assert!(periodic_form(&[2], &[&a]).is_none());
        let mid = b.len() / 2;
        b[mid].theta *= 1.5;
        assert!(periodic_form(&[2, 3, 4], &[&a, &b, &c]).is_none());
    }

    /// A window of 4 groups on 3,000 random strings (24 qubits, weight 1–3): the window is
    /// hit many times, every group is still pairwise commuting and every unit whole.
    #[test]
    fn a_tiny_window_keeps_groups_commuting_and_units_whole() {
        let h = random_sum(24, 3000, 3, 9);
        let terms = h.term_list();
        let strings: Vec<&PauliString> = terms.iter().map(|t| &t.0).collect();
        let units = flip_units(&strings);
        assert!(units.iter().any(|u| u.len() > 2));
        let full = unit_groups_windowed(&strings, &units, usize::MAX);
        let tiny = unit_groups_windowed(&strings, &units, 4);
        assert_valid_grouping(&strings, &units, &tiny);
        // Far more groups than the window: old groups were closed while terms remained.
        assert!(tiny.len() > 4 * 4, "{} groups", tiny.len());
        assert_ne!(tiny, full);
    }

    /// `term_groups` (both colourings side by side on two threads) gives the same groups on
    /// one thread and on two.
    #[test]
    fn term_groups_do_not_depend_on_the_thread_count() {
        let h = random_sum(24, 6000, 3, 11);
        let on = |threads: usize| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap()
                .install(|| term_groups(&h))
        };
        let one = on(1);
        assert!(one.len() > 1);
        assert_eq!(on(2), one);
    }

    #[test]
    fn a_large_commuting_group_folds_in_linear_time() {
        // 20,000 ZZ terms on 2,000 qubits commute: the Strang middle folds them all, so one
        // step holds every term once (the shortcut, not a 2·10⁸-step walk).
        let terms: Vec<(PauliString, f64)> = (0..20_000usize)
            .map(|k| {
                let (a, b) = (k % 2000, (k / 2000 + 1 + k) % 2000);
                (
                    PauliString::from_factors(&[(a, Pauli::Z), (b, Pauli::Z)]).1,
                    1.0 + k as f64,
                )
            })
            .filter(|(p, _)| !p.is_identity())
            .collect();
        let mut dedup = terms.clone();
        dedup.sort_by(|a, b| a.0.cmp(&b.0));
        dedup.dedup_by(|a, b| a.0 == b.0);
        let program = evolution(&terms, Order::Second, 1.0, 3);
        assert_eq!(program.len(), dedup.len());
    }
}
