//! Hadamard tests without a controlled evolution: the proof that |0…0⟩ is an eigenstate of the
//! product formula, its known phase, and the controlled state preparation.
//!
//! In: the term groups of the product formula (`formula::term_groups`, or a target's reordering
//! inside them), a rotation program, a reference state. Out: a verdict (every group keeps
//! |0…0⟩, or the first term that does not and why), the phase `φ₀` with
//! `U|0…0⟩ = e^{−iφ₀}|0…0⟩`, and the gates that prepare the reference state on the ancilla's
//! |1⟩ branch only. Invariant: a circuit built from these pieces leaves exactly the state of
//! the controlled Hadamard test (global phase aside), so every read of the plan means the same
//! in both forms.
//!
//! # The idea
//! (Lu, Bañuls & Cirac, "Algorithms for quantum simulation at finite energies", PRX Quantum 2,
//! 020321 (2021); Russo, Rudinger, Morrison & Baczewski, "Evaluating energy differences on a
//! quantum computer with robust phase estimation", PRL 126, 210501 (2021); both cited from
//! memory.) If `U|0…0⟩ = λ₀|0…0⟩` with `λ₀ = e^{−iφ₀}` known, the ancilla need not control
//! `U`. Write `W` for a controlled preparation: `W|0⟩|0…0⟩ = |0⟩|0…0⟩` and
//! `W|1⟩|χ⟩ = |1⟩V|χ⟩` with `V|0…0⟩ = |ψ⟩`. Then
//!
//! ```text
//!  h(anc)                  (|0⟩|0…0⟩ + |1⟩|0…0⟩)/√2
//!  W                       (|0⟩|0…0⟩ + |1⟩|ψ⟩)/√2
//!  U (no control)          (λ₀|0⟩|0…0⟩ + |1⟩U|ψ⟩)/√2
//!  W†                      (λ₀|0⟩|0…0⟩ + |1⟩V†U|ψ⟩)/√2      (W† fixes |0⟩|0…0⟩ too)
//!  V (no control)          (λ₀|0⟩|ψ⟩ + |1⟩U|ψ⟩)/√2
//!  rz(−φ₀)(anc)            ∝ (|0⟩|ψ⟩ + |1⟩U|ψ⟩)/√2
//! ```
//!
//! which is the state of the controlled Hadamard test (`rz(λ)` multiplies |1⟩ by `e^{iλ}`
//! relative to |0⟩). So `⟨X_anc ⊗ P⟩ = Re⟨ψ|P U|ψ⟩` and `⟨Y_anc ⊗ P⟩ = Im⟨ψ|P U|ψ⟩` hold as
//! before for every `P`: the Krylov family's group parities carry over exactly, for every
//! reference state, because the |0⟩ branch is brought back to |ψ⟩ (by the uncontrolled `V`)
//! before the measurement basis is applied. When only the ancilla is read (overlap and trace
//! families) the final `V` acts on both branches alike and changes nothing, so it is left out.
//!
//! `W` is built from gates in which the ancilla appears only as the control of `cx(anc, q)`;
//! `V` is the same list with each such `cx(anc, q)` replaced by `x(q)`, so `V` equals `W`'s
//! action on the |1⟩ branch by construction, and `W` restricted to the |0⟩ branch keeps
//! |0…0⟩ (checked by the tests below). The control of each step is the *source*: the ancilla,
//! or the last qubit a `1` letter has set, which holds 1 on the |1⟩ branch and 0 on the |0⟩
//! branch just as the ancilla does; so a basis state is a chain `cx(anc, s₁) cx(s₁, s₂) …`
//! through its set bits, and on a device the ancilla meets only the first of them. Per reference letter, `V` is the reflection
//! `n·σ` whose axis `n` bisects +z and the state's Bloch vector, so `V = R X R†` and
//! `W = R · cx(anc, q) · R†` with `R` a rotation taking x to `n`; the singlet `ss` uses a
//! controlled `h`, a controlled `z`, an uncontrolled `cx` (it acts on |00⟩ as the identity)
//! and a controlled `x`. A basis state costs one CNOT per set bit each way.
//!
//! # When |0…0⟩ is an eigenstate
//! Every factor of every formula here is `exp(−i x G)` for a group `G = Σ_{j∈G} c_j P_j` of
//! commuting terms (`formula::term_groups`; merging adjacent rotations, Strang's halves,
//! Suzuki's scalings and a target's reordering inside groups all keep that operator). If
//! `G|0…0⟩ = g|0…0⟩` then `exp(−ixG)|0…0⟩ = e^{−ixg}|0…0⟩` exactly. `P_j|0…0⟩ = i^{|Y_j|}|x_j⟩`
//! with `x_j` the flip mask of `P_j`, so the condition is: in every group, for every non-zero
//! flip mask `x`, `Σ_{j: x_j = x} c_j i^{|Y_j|} = 0` (checked to [`CANCEL_TOLERANCE`] of the
//! group's one-norm), and then `g = Σ` of the group's Z-only coefficients. Hence `φ₀` is the sum
//! of the angles of the program's Z-only rotations ([`zero_phase`]). The condition is
//! sufficient, not necessary; a Hamiltonian it misses is compiled with the controlled
//! evolution.

use super::RefState;
use crate::circuit::{Gate, Qubit};
use crate::formula::Rotation;
use crate::pauli::{i_pow, Bits, PauliString};
use num_complex::Complex64;
use std::collections::BTreeMap;

/// How the Hadamard test reaches the evolution.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Control {
    /// The ancilla controls every rotation of `U`.
    Evolution,
    /// The ancilla controls only the state preparation; `U` runs uncontrolled.
    Prep,
}

/// Largest `|Σ c_j i^{|Y_j|}|` over one flip mask, relative to the group's one-norm, that still
/// counts as a cancellation: coefficients read from text agree to the last bit when the model is
/// symmetric, so anything left is rounding; the circuit then errs by at most this much times the
/// evolution time, far below `check::COMPILE_TOLERANCE`.
pub const CANCEL_TOLERANCE: f64 = 1e-13;

/// Why |0…0⟩ is not shown to be an eigenstate: the first term (in formula order) whose flip is
/// not cancelled inside its commuting group.
#[derive(Clone, Debug, PartialEq)]
pub struct NotAnEigenstate {
    /// The term, in sparse text (`X0 X1`).
    pub term: String,
    pub reason: String,
}

impl std::fmt::Display for NotAnEigenstate {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "term `{}`: {}", self.term, self.reason)
    }
}

/// Checks that every group `G` of commuting terms maps |0…0⟩ to a multiple of itself (see the
/// module essay); `groups` in formula order.
pub fn zero_state_check(groups: &[Vec<(PauliString, f64)>]) -> Result<(), NotAnEigenstate> {
    for group in groups {
        let norm: f64 = group.iter().map(|(_, c)| c.abs()).sum();
        // Flip mask → (Σ c_j i^{|Y_j|}, first term with that mask).
        let mut flips: BTreeMap<&Bits, (Complex64, usize)> = BTreeMap::new();
        for (i, (p, c)) in group.iter().enumerate() {
            if p.x.is_empty() {
                continue;
            }
            let e = flips.entry(&p.x).or_insert((Complex64::new(0.0, 0.0), i));
            e.0 += i_pow(p.y_count() as i64) * *c;
        }
        let first_bad = flips
            .values()
            .filter(|(sum, _)| sum.norm() > CANCEL_TOLERANCE * norm)
            .map(|&(_, i)| i)
            .min();
        if let Some(i) = first_bad {
            let p = &group[i].0;
            let flipped: Vec<String> = p.x.ones().map(|q| q.to_string()).collect();
            let partners = group.iter().filter(|(q, _)| q.x == p.x && q != p).count();
            let reason = if partners == 0 {
                format!(
                    "it flips qubit{} {} of |0…0⟩ and no other term of its commuting group flips the same qubits back, so |0…0⟩ is not an eigenstate of the product formula",
                    if flipped.len() == 1 { "" } else { "s" },
                    flipped.join(" ")
                )
            } else {
                format!(
                    "it and the {partners} other term(s) of its commuting group that flip qubits {} do not cancel on |0…0⟩ (their coefficients are not those of a number-conserving pair such as c·(XX + YY)), so |0…0⟩ is not an eigenstate of the product formula",
                    flipped.join(" ")
                )
            };
            return Err(NotAnEigenstate {
                term: p.to_factor_text(),
                reason,
            });
        }
    }
    Ok(())
}

/// `φ₀` with `U|0…0⟩ = e^{−iφ₀}|0…0⟩` for a program that passed [`zero_state_check`]: the sum
/// of the angles of its rotations about Z-only strings (each has eigenvalue +1 on |0…0⟩; the
/// others cancel within their groups).
pub fn zero_phase(program: &[Rotation]) -> f64 {
    program
        .iter()
        .filter(|r| r.pauli.x.is_empty())
        .map(|r| r.theta)
        .sum()
}

/// The whole shape of a Hadamard test: what the ancilla controls and, in the control-free
/// form, how its controlled preparation is joined.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Form {
    pub control: Control,
    pub joins: Joins,
}

/// How the controlled preparation joins one set bit of a basis reference to the next.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Joins {
    /// `cx(s, s')` however far apart the two are: one CNOT per set bit (all-to-all).
    Direct,
    /// When only `0` letters lie between them, through those qubits by index: the cascade
    /// `cx(s, s+1) cx(s+1, s+2) … cx(s'−1, s')` sets them all on the |1⟩ branch, then
    /// `cx(s'−2, s'−1) … cx(s, s+1)` clears the ones in between again (each is cleared by its
    /// lower neighbour, still 1), `2g + 1` CNOTs for a gap of `g` qubits, all between index
    /// neighbours. On a device, where the models' index neighbours mostly sit side by side,
    /// this replaces a distant CNOT and the SWAPs there and back (3 CNOTs each). The |0⟩
    /// branch holds 0 on every qubit involved, so nothing happens there.
    Neighbours,
}

/// The controlled preparation `W` of `state` on ancilla `anc` (see the module essay); the
/// letters are those of [`RefState::prep`].
pub fn controlled_prep(state: &RefState, anc: Qubit, joins: Joins) -> Vec<Gate> {
    use std::f64::consts::FRAC_PI_4;
    let letters: Vec<char> = state.as_str().chars().collect();
    let mut out = Vec::new();
    // The source: 1 on the |1⟩ branch, 0 on the |0⟩ branch (see the module essay).
    let mut src = anc;
    // R† · cx(src, q) · R for the reflection about the axis R takes x to.
    let reflect = |src: Qubit, q: Qubit, pre: &[Gate], post: &[Gate], out: &mut Vec<Gate>| {
        out.extend_from_slice(pre);
        out.push(Gate::Cx(src, q));
        out.extend_from_slice(post);
    };
    let mut i = 0;
    while i < letters.len() {
        let q = i as Qubit;
        match letters[i] {
            // x → (x + z)/√2 by ry(−π/4): the reflection is (X + Z)/√2 = H, and H|0⟩ = |+⟩.
            '+' => reflect(
                src,
                q,
                &[Gate::Ry(q, FRAC_PI_4)],
                &[Gate::Ry(q, -FRAC_PI_4)],
                &mut out,
            ),
            // x → (z − x)/√2 by ry(−3π/4): (Z − X)/√2 |0⟩ = |−⟩.
            '-' => reflect(
                src,
                q,
                &[Gate::Ry(q, 3.0 * FRAC_PI_4)],
                &[Gate::Ry(q, -3.0 * FRAC_PI_4)],
                &mut out,
            ),
            // x → (x + z)/√2 → (y + z)/√2 (ry(−π/4), then s): (Y + Z)/√2 |0⟩ = |+i⟩.
            'r' => reflect(
                src,
                q,
                &[Gate::Sdg(q), Gate::Ry(q, FRAC_PI_4)],
                &[Gate::Ry(q, -FRAC_PI_4), Gate::S(q)],
                &mut out,
            ),
            // x → (x + z)/√2 → (z − y)/√2 (ry(−π/4), then sdg): (Z − Y)/√2 |0⟩ = |−i⟩.
            'l' => reflect(
                src,
                q,
                &[Gate::S(q), Gate::Ry(q, FRAC_PI_4)],
                &[Gate::Ry(q, -FRAC_PI_4), Gate::Sdg(q)],
                &mut out,
            ),
            '1' => {
                let gap_is_zeros = src != anc && ((src as usize + 1)..i).all(|j| letters[j] == '0');
                if joins == Joins::Neighbours && gap_is_zeros && q > src + 1 {
                    for j in src..q {
                        out.push(Gate::Cx(j, j + 1));
                    }
                    for j in (src + 1..q).rev() {
                        out.push(Gate::Cx(j - 1, j));
                    }
                } else {
                    out.push(Gate::Cx(src, q));
                }
                src = q;
            }
            's' => {
                // The singlet's h, z, cx(i, i+1), x(i+1), with h, z and x controlled.
                reflect(
                    src,
                    q,
                    &[Gate::Ry(q, FRAC_PI_4)],
                    &[Gate::Ry(q, -FRAC_PI_4)],
                    &mut out,
                );
                out.extend([Gate::H(q), Gate::Cx(src, q), Gate::H(q)]);
                out.extend([Gate::Cx(q, q + 1), Gate::Cx(src, q + 1)]);
                i += 1;
            }
            _ => {}
        }
        i += 1;
    }
    out
}

/// Set bits up to which [`fanout_prep`] finds the cheapest fan-out tree exactly (the
/// Dreyfus–Wagner table has `2^k` rows); above it a shortest-path heuristic builds it.
pub const FANOUT_EXACT_MAX: usize = 10;

/// Qubits (ancilla included) up to which [`fanout_prep`] searches at all; above it the chain of
/// [`Joins::Neighbours`] is used (the all-pairs table would cost `n²` memory).
pub const FANOUT_MAX_QUBITS: usize = 512;

/// The controlled preparation `W` of a basis state as a *fan-out tree* on a coupling graph
/// (`adjacent(a, b)`: logical qubits `a` and `b` sit on coupled sites), rooted at the ancilla
/// and spanning the set bits, or `None` when `state` has letters other than `0` and `1`, is
/// too large ([`FANOUT_MAX_QUBITS`]), or its set bits cannot be reached through qubits whose
/// letter is `0`.
///
/// # The idea
/// Every tree node other than the root gets `cx(parent, node)` (parents first), so on the |1⟩
/// branch every node holds 1 and on the |0⟩ branch all stay 0 (the ancilla, the root, is the
/// only source). A node whose letter is `0` (a *relay*) is then cleared again by the same
/// CNOT, children before parents, while its parent still holds 1. So a set bit costs one
/// CNOT and a relay two: the cheapest tree is a node-weighted Steiner arborescence (weights 1
/// and 2, the root free), found exactly by the Dreyfus–Wagner recursion (Dreyfus & Wagner,
/// "The Steiner problem in graphs", Networks 1, 195 (1971), from memory) over shortest
/// node-weighted paths, `O(3^k n + 2^k n²)` for `k` set bits, and above
/// [`FANOUT_EXACT_MAX`] set bits by growing the tree from the root along the shortest path to
/// the nearest set bit not yet in it (Takahashi & Matsuyama, "An approximate solution for the
/// Steiner problem in graphs", Math. Japonica 24, 573 (1980), from memory; within twice the
/// optimum). The chain of [`Joins::Neighbours`] is one such tree when index neighbours are
/// coupled, so the exact tree never costs more than it. `W` holds the ancilla only as the
/// control of `cx(anc, q)`, so [`uncontrolled`] gives `V` as for every other preparation.
pub fn fanout_prep(
    state: &RefState,
    anc: Qubit,
    adjacent: &dyn Fn(Qubit, Qubit) -> bool,
) -> Option<Vec<Gate>> {
    let letters: Vec<char> = state.as_str().chars().collect();
    if letters.iter().any(|&c| c != '0' && c != '1') {
        return None;
    }
    let n = letters.len();
    let m = n + 1;
    if m > FANOUT_MAX_QUBITS {
        return None;
    }
    // Node i < n is system qubit i, node n is the ancilla (the root, weight 0).
    let node = |i: usize| if i == n { anc } else { i as Qubit };
    let weight = |i: usize| -> u32 {
        if i == n {
            0
        } else if letters[i] == '1' {
            1
        } else {
            2
        }
    };
    let terminals: Vec<usize> = (0..n).filter(|&i| letters[i] == '1').collect();
    if terminals.is_empty() {
        return Some(Vec::new());
    }
    let neighbours: Vec<Vec<usize>> = (0..m)
        .map(|a| {
            (0..m)
                .filter(|&b| b != a && adjacent(node(a), node(b)))
                .collect()
        })
        .collect();
    // Shortest node-weighted paths from `src` (the source's own weight not counted):
    // Dijkstra with the edge into v costing weight(v).
    let paths = |src: usize| -> (Vec<u32>, Vec<usize>) {
        let mut dist = vec![u32::MAX; m];
        let mut pred = vec![usize::MAX; m];
        let mut heap = std::collections::BinaryHeap::new();
        dist[src] = 0;
        heap.push(std::cmp::Reverse((0u32, src)));
        while let Some(std::cmp::Reverse((d, u))) = heap.pop() {
            if d > dist[u] {
                continue;
            }
            for &v in &neighbours[u] {
                // The ancilla is the root only: never a relay inside the tree.
                if v == n {
                    continue;
                }
                let nd = d + weight(v);
                if nd < dist[v] {
                    dist[v] = nd;
                    pred[v] = u;
                    heap.push(std::cmp::Reverse((nd, v)));
                }
            }
        }
        (dist, pred)
    };
    // Tree edges (parent, child) as a set of child → parent.
    let mut parent: Vec<usize> = vec![usize::MAX; m];
    let add_path = |pred: &[usize], from: usize, to: usize, parent: &mut Vec<usize>| {
        let mut v = to;
        while v != from {
            let u = pred[v];
            if parent[v] == usize::MAX {
                parent[v] = u;
            }
            v = u;
        }
    };
    let k = terminals.len();
    if k <= FANOUT_EXACT_MAX {
        let all: Vec<(Vec<u32>, Vec<usize>)> = (0..m).map(paths).collect();
        const INF: u32 = u32::MAX / 4;
        let d = |a: usize, b: usize| all[a].0[b].min(INF);
        let full = (1usize << k) - 1;
        // s[x][v]: cheapest tree rooted at v spanning the set bits in x (v's weight not
        // counted); merge[x][u] = best split of x into two trees rooted at u.
        let mut s = vec![vec![INF; m]; 1 << k];
        let mut merge = vec![vec![(INF, 0usize); m]; 1 << k];
        let mut via = vec![vec![usize::MAX; m]; 1 << k];
        for (j, &t) in terminals.iter().enumerate() {
            for v in 0..m {
                s[1 << j][v] = d(v, t);
                via[1 << j][v] = t;
            }
        }
        for x in 1..=full {
            if x.count_ones() < 2 {
                continue;
            }
            for u in 0..m {
                let mut best = (INF, 0);
                let mut sub = (x - 1) & x;
                while sub > 0 {
                    // Each unordered split once: the part holding the lowest bit of x.
                    if sub & (x & x.wrapping_neg()) != 0 {
                        let c = s[sub][u].saturating_add(s[x ^ sub][u]);
                        if c < best.0 {
                            best = (c, sub);
                        }
                    }
                    sub = (sub - 1) & x;
                }
                merge[x][u] = best;
            }
            for v in 0..m {
                let mut best = (INF, usize::MAX);
                for (u, &(tree, _)) in merge[x].iter().enumerate() {
                    let c = d(v, u).saturating_add(tree);
                    if c < best.0 {
                        best = (c, u);
                    }
                }
                s[x][v] = best.0;
                via[x][v] = best.1;
            }
        }
        if s[full][n] >= INF {
            return None;
        }
        // Unfold the recursion into paths.
        let mut stack = vec![(full, n)];
        while let Some((x, v)) = stack.pop() {
            let u = via[x][v];
            add_path(&all[v].1, v, u, &mut parent);
            if x.count_ones() >= 2 {
                let sub = merge[x][u].1;
                stack.push((sub, u));
                stack.push((x ^ sub, u));
            }
        }
    } else {
        let mut in_tree = vec![false; m];
        in_tree[n] = true;
        let mut left: Vec<usize> = terminals.clone();
        while !left.is_empty() {
            // Multi-source shortest paths from the tree: a virtual source at distance 0.
            let mut best: Option<(u32, usize, usize, Vec<usize>)> = None;
            let sources: Vec<usize> = (0..m).filter(|&v| in_tree[v]).collect();
            let mut dist = vec![u32::MAX; m];
            let mut pred = vec![usize::MAX; m];
            let mut heap = std::collections::BinaryHeap::new();
            for &v in &sources {
                dist[v] = 0;
                heap.push(std::cmp::Reverse((0u32, v)));
            }
            while let Some(std::cmp::Reverse((dd, u))) = heap.pop() {
                if dd > dist[u] {
                    continue;
                }
                for &v in &neighbours[u] {
                    if v == n || in_tree[v] {
                        continue;
                    }
                    let nd = dd + weight(v);
                    if nd < dist[v] {
                        dist[v] = nd;
                        pred[v] = u;
                        heap.push(std::cmp::Reverse((nd, v)));
                    }
                }
            }
            for (i, &t) in left.iter().enumerate() {
                if dist[t] != u32::MAX && best.as_ref().is_none_or(|b| dist[t] < b.0) {
                    best = Some((dist[t], i, t, pred.clone()));
                }
            }
            let (_, i, t, pred) = best?;
            let mut v = t;
            while !in_tree[v] {
                parent[v] = pred[v];
                in_tree[v] = true;
                v = pred[v];
            }
            left.swap_remove(i);
        }
    }
    // Breadth-first from the root over the tree: parents before children.
    let mut children: Vec<Vec<usize>> = vec![Vec::new(); m];
    for v in 0..m {
        if parent[v] != usize::MAX {
            children[parent[v]].push(v);
        }
    }
    let mut order = Vec::new();
    let mut queue = std::collections::VecDeque::from([n]);
    while let Some(u) = queue.pop_front() {
        for &v in &children[u] {
            order.push(v);
            queue.push_back(v);
        }
    }
    if terminals.iter().any(|t| !order.contains(t)) {
        return None;
    }
    let mut out: Vec<Gate> = order
        .iter()
        .map(|&v| Gate::Cx(node(parent[v]), node(v)))
        .collect();
    out.extend(
        order
            .iter()
            .rev()
            .filter(|&&v| letters[v] == '0')
            .map(|&v| Gate::Cx(node(parent[v]), node(v))),
    );
    Some(out)
}

/// `V`: `w` with every `cx(anc, q)` replaced by `x(q)`, i.e. `W`'s action on the |1⟩ branch.
pub fn uncontrolled(w: &[Gate], anc: Qubit) -> Vec<Gate> {
    w.iter()
        .map(|g| match *g {
            Gate::Cx(a, q) if a == anc => Gate::X(q),
            g => g,
        })
        .collect()
}

/// `W†`: the inverse gates in reverse order.
pub fn inverse(w: &[Gate]) -> Vec<Gate> {
    w.iter()
        .rev()
        .map(|g| g.inverse().expect("a preparation has no measurement"))
        .collect()
}

/// The system qubits `W` for `state` couples to the ancilla `anc` directly (the ones the
/// ancilla must reach on a device).
pub fn ancilla_partners(state: &RefState, anc: Qubit) -> Vec<usize> {
    let mut out: Vec<usize> = controlled_prep(state, anc, Joins::Direct)
        .iter()
        .filter_map(|g| match *g {
            Gate::Cx(a, q) if a == anc => Some(q as usize),
            _ => None,
        })
        .collect();
    out.sort_unstable();
    out.dedup();
    out
}

/// Two-qubit gates of `W` (the same for `W†`): one per set bit of a basis state.
pub fn prep_two_qubit(state: &RefState) -> usize {
    controlled_prep(state, state.num_qubits() as Qubit, Joins::Direct)
        .iter()
        .filter(|g| g.is_two_qubit())
        .count()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::circuit::Circuit;
    use crate::family::state_prep;

    /// A test state, checked against its own length.
    fn rs(s: &str) -> RefState {
        RefState::parse(s, s.chars().count()).unwrap()
    }
    use crate::pauli::PauliSum;
    use crate::sim::{run, State};

    /// `W` on every basis state: identity-like on |0⟩|0…0⟩, `V` (the letters' reflections or the
    /// singlet's gates) on the |1⟩ branch, and `V|0…0⟩` equal to `state_prep`'s state up to a
    /// phase.
    #[test]
    fn controlled_prep_acts_only_on_the_one_branch() {
        let states = [
            "0", "1", "+", "-", "r", "l", "ss", "1+0-rl", "0ss1", "r1ss-", "1001", "0100101",
            "10011r1",
        ];
        for (state, joins) in states
            .into_iter()
            .flat_map(|s| [(s, Joins::Direct), (s, Joins::Neighbours)])
        {
            let n = state.len();
            let anc = n as Qubit;
            let w = controlled_prep(&rs(state), anc, joins);
            let mut c = Circuit::new(n + 1, 0);
            c.extend(w.clone());
            // anc = 0: |0…0⟩ stays exactly.
            let out = run(&c, State::zero(n + 1));
            assert!(
                (out.amps[0] - Complex64::new(1.0, 0.0)).norm() < 1e-12,
                "{state}"
            );
            // anc = 1, system |0…0⟩: the reference state up to a global phase.
            let mut s = State::zero(n + 1);
            s.apply(&Gate::X(anc));
            let out = run(&c, s);
            let mut want = State::zero(n + 1);
            for g in state_prep(&rs(state)) {
                want.apply(&g);
            }
            want.apply(&Gate::X(anc));
            assert!((want.inner(&out).norm() - 1.0).abs() < 1e-12, "{state}");
            // On the |1⟩ branch W is V on every system state: compare on random basis inputs.
            let v = uncontrolled(&w, anc);
            for b in 0..1usize << n {
                let mut s = State::zero(n + 1);
                s.amps[0] = Complex64::new(0.0, 0.0);
                s.amps[b | 1 << n] = Complex64::new(1.0, 0.0);
                let got = run(&c, s.clone());
                let mut cv = Circuit::new(n + 1, 0);
                cv.extend(v.clone());
                let want = run(&cv, s);
                assert!((want.inner(&got) - Complex64::new(1.0, 0.0)).norm() < 1e-12);
            }
        }
    }

    /// The cheapest fan-out by brute force: the fewest relays `R` (qubits with letter `0`)
    /// such that the ancilla, the set bits and `R` induce a connected subgraph; then
    /// `set bits + 2|R|` CNOTs (a spanning tree of that subgraph, relays computed and cleared).
    fn brute_force_cost(state: &str, adj: &dyn Fn(Qubit, Qubit) -> bool) -> Option<usize> {
        let n = state.len();
        let ones: Vec<usize> = (0..n).filter(|&i| state.as_bytes()[i] == b'1').collect();
        let zeros: Vec<usize> = (0..n).filter(|&i| state.as_bytes()[i] == b'0').collect();
        let mut best: Option<usize> = None;
        for mask in 0..1usize << zeros.len() {
            let mut nodes: Vec<usize> = ones.clone();
            nodes.extend(
                (0..zeros.len())
                    .filter(|j| mask >> j & 1 == 1)
                    .map(|j| zeros[j]),
            );
            nodes.push(n);
            let mut seen = vec![n];
            let mut k = 0;
            while k < seen.len() {
                let u = seen[k];
                for &v in &nodes {
                    if !seen.contains(&v) && adj(u as Qubit, v as Qubit) {
                        seen.push(v);
                    }
                }
                k += 1;
            }
            if seen.len() == nodes.len() {
                let c = ones.len() + 2 * mask.count_ones() as usize;
                best = Some(best.map_or(c, |b: usize| b.min(c)));
            }
        }
        best
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig::with_cases(64))]
        // Random basis references on random graphs of 7 qubits plus the ancilla: the fan-out
        // prepares the reference on the |1⟩ branch only (as `controlled_prep` must), and the
        // exact search costs what brute force over relay sets finds (Dreyfus & Wagner 1971).
        #[test]
        fn fanout_is_exact_and_cheapest(bits in 0u32..128, edges in proptest::collection::vec(proptest::bool::ANY, 28)) {
            let n = 7;
            let state: String = (0..n).map(|q| if bits >> q & 1 == 1 { '1' } else { '0' }).collect();
            let idx = |a: usize, b: usize| {
                let (a, b) = (a.min(b), a.max(b));
                // Pairs of 8 nodes in order: (0,1), (0,2), …
                (0..a).map(|i| 7 - i).sum::<usize>() + (b - a - 1)
            };
            let adj = |a: Qubit, b: Qubit| a != b && edges[idx(a as usize, b as usize)];
            let got = fanout_prep(&rs(&state), n as Qubit, &adj);
            let want = brute_force_cost(&state, &adj);
            proptest::prop_assert_eq!(got.is_some(), want.is_some());
            let Some(w) = got else { return Ok(()) };
            proptest::prop_assert_eq!(w.iter().filter(|g| g.is_two_qubit()).count(), want.unwrap());
            // Every CNOT on a coupled pair; the ancilla only as a control.
            for g in &w {
                let Gate::Cx(a, b) = *g else { panic!("only CNOTs") };
                proptest::prop_assert!(adj(a, b));
                proptest::prop_assert!(b != n as Qubit);
            }
            let anc = n as Qubit;
            let mut c = Circuit::new(n + 1, 0);
            c.extend(w.clone());
            let out = run(&c, State::zero(n + 1));
            proptest::prop_assert!((out.amps[0] - Complex64::new(1.0, 0.0)).norm() < 1e-12);
            let mut s = State::zero(n + 1);
            s.apply(&Gate::X(anc));
            let out = run(&c, s);
            let mut want = State::zero(n + 1);
            for g in state_prep(&rs(&state)) {
                want.apply(&g);
            }
            want.apply(&Gate::X(anc));
            proptest::prop_assert!((want.inner(&out).norm() - 1.0).abs() < 1e-12);
        }
    }

    #[test]
    fn fanout_beats_the_chain_on_a_grid() {
        // The benchmark's Hubbard reference 110011001100 on a 2×6 ladder (qubits 2s, 2s+1 in
        // column s, the ancilla beside qubit 0): the index chain costs 14 CNOTs (two gaps of
        // two zeros, 2·2 + 1 each, plus 4); the set pairs in columns 0, 2, 4 join through one
        // relay in each of columns 1 and 3. Brute force over relay sets is the reference.
        let state = "110011001100";
        let anc = 12;
        let site = |q: Qubit| -> (i32, i32) {
            if q == anc {
                (-1, 0)
            } else {
                ((q / 2) as i32, (q % 2) as i32)
            }
        };
        let adj = |a: Qubit, b: Qubit| {
            let (x, y) = (site(a), site(b));
            (x.0 - y.0).abs() + (x.1 - y.1).abs() == 1
        };
        let w = fanout_prep(&rs(state), anc, &adj).unwrap();
        let cost = w.iter().filter(|g| g.is_two_qubit()).count();
        assert_eq!(Some(cost), brute_force_cost(state, &adj));
        // 6 set bits and relays at columns 1 and 3 (one qubit each): 6 + 2·2 = 10 < 14.
        assert_eq!(cost, 10);
    }

    #[test]
    fn basis_states_cost_one_cnot_per_set_bit() {
        assert_eq!(prep_two_qubit(&rs("0110100")), 3);
        assert_eq!(prep_two_qubit(&rs("0000")), 0);
        // Joined through the zero in between: 1 + 1 + (2·1 + 1) CNOTs, index neighbours only.
        let w = controlled_prep(&rs("0110100"), 7, Joins::Neighbours);
        assert_eq!(w.iter().filter(|g| g.is_two_qubit()).count(), 5);
        assert!(w.iter().all(|g| match *g {
            Gate::Cx(a, b) => a == 7 || a.abs_diff(b) == 1,
            _ => true,
        }));
    }

    fn h(terms: &[(&str, f64)], n: usize) -> PauliSum {
        let mut h = PauliSum::new(n);
        for (t, c) in terms {
            h.add(PauliString::parse_factor_text(t).unwrap(), *c);
        }
        h
    }

    #[test]
    fn hopping_pairs_keep_zero_and_transverse_fields_do_not() {
        // XX + YY on one bond annihilates |00⟩ (Y|0⟩ = i|1⟩, so YY|00⟩ = −|11⟩ = −XX|00⟩).
        let g = vec![vec![
            (PauliString::parse_factor_text("X0 X1").unwrap(), 0.5),
            (PauliString::parse_factor_text("Y0 Y1").unwrap(), 0.5),
            (PauliString::parse_factor_text("Z0 Z1").unwrap(), 0.2),
        ]];
        assert_eq!(zero_state_check(&g), Ok(()));
        // XX − YY (a pairing term) does not conserve the number of ones.
        let g = vec![vec![
            (PauliString::parse_factor_text("X0 X1").unwrap(), 0.5),
            (PauliString::parse_factor_text("Y0 Y1").unwrap(), -0.5),
        ]];
        let e = zero_state_check(&g).unwrap_err();
        assert_eq!(e.term, "X0 X1");
        // A transverse field: the first X term is named.
        let tfim = h(&[("Z0 Z1", 1.0), ("X0", 0.7), ("X1", 0.7)], 2);
        let e = zero_state_check(&crate::formula::term_groups(&tfim)).unwrap_err();
        assert_eq!(e.term, "X0");
        assert!(e.reason.contains("flips qubit 0"), "{}", e.reason);
    }

    #[test]
    fn zero_phase_matches_the_simulated_eigenvalue() {
        let model = h(
            &[
                ("X0 X1", 0.5),
                ("Y0 Y1", 0.5),
                ("X1 X2", 0.3),
                ("Y1 Y2", 0.3),
                ("Z0 Z1", 0.2),
                ("Z2", -0.4),
            ],
            3,
        );
        let groups = crate::formula::term_groups(&model);
        zero_state_check(&groups).unwrap();
        let terms = groups.concat();
        for order in [
            crate::formula::Order::First,
            crate::formula::Order::Second,
            crate::formula::Order::Fourth,
        ] {
            let prog = crate::formula::evolution(&terms, order, 0.9, 3);
            let mut s = State::zero(3);
            crate::formula::apply_program(&mut s, &prog);
            let want = Complex64::from_polar(1.0, -zero_phase(&prog));
            assert!((s.amps[0] - want).norm() < 1e-12);
        }
    }
}
