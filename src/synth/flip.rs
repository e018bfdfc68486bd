//! The controlled step by a sign flip: a symmetric product formula controlled through one
//! controlled Pauli string `Q` twice, every rotation uncontrolled.
//!
//! In: one step of a symmetric product formula as a rotation program (`formula::step` for
//! orders 2 and 4: it reads the same backwards, a merged middle rotation aside), the control
//! qubit, each rotation's ladder and, on a device, hop distances. Out: gates implementing the
//! controlled step exactly (global phase included), or `None` when the program is not a
//! palindrome or no Pauli string anticommutes with all its rotations. Invariant: only the two
//! controlled `Q`s touch the control; every rotation is written uncontrolled.
//!
//! ## The idea
//!
//! If `Q` is a Pauli string that anticommutes with every string `P_j` of the program, then
//! `Q e^{−iθP_j} Q = e^{+iθP_j}`. A symmetric step in time order reads `t₁ … t_L t_L … t₁`
//! (Strang's and Suzuki's steps are palindromes; Suzuki, J. Math. Phys. 32, 400 (1991)), so
//! with `B = t_L ⋯ t₁` written in time order as `t_L, …, t₁` (the step's second half) and
//! `B⁻¹` as `t₁⁻¹, …, t_L⁻¹`,
//!
//! ```text
//!  CQ · B⁻¹ · CQ · B      (time order)
//! ```
//!
//! acts on the control's |0⟩ branch as `B B⁻¹ = 1` and on its |1⟩ branch as
//! `B · Q B⁻¹ Q = (t_L ⋯ t₁)(t₁ ⋯ t_L)`, which is the step. So the controlled step costs two
//! uncontrolled half-steps plus two controlled `Q`s, instead of a controlled `rz` (two CNOTs,
//! and on a device the control's travel) per rotation. This is the anticommuting-Pauli
//! construction of controlled evolutions used for early fault-tolerant energy estimation
//! (Dong, Lin & Tong, "Ground-state preparation and energy estimation on early
//! fault-tolerant quantum computers via quantum eigenvalue transformation of unitary
//! matrices", PRX Quantum 3, 040305 (2022), for the transverse-field Ising model; cited from
//! memory). `Q` exists exactly when the linear system `⟨Q, P_j⟩ = 1` (symplectic product
//! over GF(2)) is solvable: for instance the transverse-field Ising model on any bipartite
//! lattice (`Q` = `Y` on one sublattice, `Z` on the other), but not a Heisenberg or XXZ edge
//! (`XX · YY ∝ ZZ` forces `⟨Q, ZZ⟩ = 0`) nor a sum holding `Z_i`, `Z_j` and `Z_i Z_j`.
//!
//! A controlled `Q` is `|0⟩⟨0| ⊗ 1 + |1⟩⟨1| ⊗ Q`: each qubit of `Q` turned to `Z` by a
//! one-qubit Clifford, the parity of the support gathered by CNOTs along a tree onto a root,
//! `cz(control, root)`, and all of it undone: `2(w − 1) + 1` two-qubit gates for weight `w`.
//! The tree is a minimum spanning tree of the support by hop distance (on a device, under
//! the plan's layout) grown from the support qubit nearest the control; all-to-all it is a
//! balanced binary tree (depth `⌈log₂ w⌉`).
//!
//! The rotations of a commuting block commute, so each half may write them in any order: in
//! the terms' own order ([`BlockOrder::Given`]) or in layers on disjoint qubits
//! ([`BlockOrder::Layers`]), which puts a chain's bonds in two layers and lowers the depth.
//! The device search tries both (they can route differently where SWAPs are needed), and the
//! plan records the order it kept.
//!
//! ## Signed steps
//!
//! A term that commutes with `Q` cannot be flipped, but it need not be controlled twice
//! either. Write the step in time order as `A` then `B`, `A = t₁ … t_L` and `B = t_L … t₁`
//! with `t_j = exp(−iθ_j P_j)`, and note that `B⁻¹` is `A` with every angle negated. The
//! first segment, between the two controlled `Q`s, has to act as `B⁻¹` on the control's
//! |0⟩ branch and, once conjugated by `Q`, as `A` on |1⟩. A term that anticommutes with `Q`
//! does both uncontrolled, as above. A term that commutes with `Q` must itself turn by
//! `+θ_j` on |0⟩ and by `−θ_j` on |1⟩, which is one rotation about `Z_c P_j`:
//!
//! ```text
//!  exp(+iθ_j Z_c P_j) = |0⟩⟨0| ⊗ exp(+iθ_j P_j) + |1⟩⟨1| ⊗ exp(−iθ_j P_j)
//! ```
//!
//! Its ladder is `P_j`'s with the control joined: two CNOTs more than the uncontrolled
//! rotation, and nothing in the second half. So every symmetric step has a *signed* form
//! ([`Choice::Signed`]) for any string `Q`, the identity included (then there is no controlled
//! `Q` and every rotation of the first half is signed): the |0⟩ branch runs `B B⁻¹ = 1`, the
//! |1⟩ branch `B A`, the step, global phase included. The control's cost per step is two
//! CNOTs per commuting rotation of one half plus the two controlled `Q`s, where controlling
//! every rotation costs two CNOTs per rotation of *both* halves; the `Q` is chosen by
//! [`signed_string`] to anticommute with as many terms as a greedy pass finds. On the 4×4
//! Heisenberg model with fields, `Q` = `Y` on one sublattice and `X` on the other
//! anticommutes with every `XX`, `YY` and field term, and only the 24 `ZZ` bonds ride on the
//! control's sign. The derivation is ours; the identity it rests on is the flip's (Dong, Lin &
//! Tong, above) plus the textbook decomposition of a controlled rotation into `Z_c`-rotations
//! (Nielsen & Chuang, *Quantum Computation and Quantum Information*, 2000, section 4.3; cited
//! from memory).
//!
//! A signed step written again mirrored (`circuit::mirror_gates`, the same operator since its
//! angles are odd in `dt`) puts two uncontrolled halves next to each other, then two signed
//! halves and two controlled `Q`s (which cancel): so steps alternate with their mirror image
//! ([`FlippedParts::mirrored`]) and their edge rotations merge as Strang's do.
//!
//! Cost: solving for `Q` is Gaussian elimination over GF(2), `O(m · (2n)² / 64)` word
//! operations for `m` strings on `n` qubits; the tree is `O(w²)`.

use crate::circuit::{Gate, Qubit};
use crate::formula::{Order, Rotation};
use crate::pauli::{Pauli, PauliString};
use serde::{Deserialize, Serialize};

/// The order in which a flipped step writes the rotations of each commuting block; they
/// commute, so both orders give the same operator, but not the same routing or depth.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum BlockOrder {
    /// The terms' own order.
    #[default]
    Given,
    /// Layers of rotations on disjoint qubits ([`layered`]): a chain's bonds in two layers.
    Layers,
}

/// How a flipped step writes its uncontrolled halves: each commuting block's rotations in
/// `order`, and with `pairs` each half through `synth::Pairs` (hopping pairs such as an XXZ
/// bond's `XX`, `YY` or a Jordan–Wigner hopping term's two halves diagonalised together: 2
/// CNOTs per bond instead of 4), with `groups` through `synth::Groups` (one Clifford network
/// per commuting run, on the all-to-all target), else one ladder per rotation. Every choice
/// gives the same operator; which one routes cheaper on a device is the layout search's to
/// find.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Writing {
    pub order: BlockOrder,
    pub pairs: bool,
    pub groups: bool,
}

impl From<BlockOrder> for Writing {
    fn from(order: BlockOrder) -> Writing {
        Writing {
            order,
            pairs: false,
            groups: false,
        }
    }
}

/// A Pauli string as `(qubit, letter)` pairs, ascending, no identity letters.
pub type FlipString = Vec<(Qubit, Pauli)>;

/// Which string a flipped step uses, and what becomes of the terms that do not anticommute
/// with it.
#[derive(Clone, Copy, Debug)]
pub enum Choice<'a> {
    /// The split of [`flip_split_near`] and its string: the leading groups controlled
    /// rotation by rotation at both ends, the rest flipped.
    Search,
    /// A recorded string for the split of [`flip_split`], checked to anticommute with every
    /// term past the split.
    Given(&'a FlipString),
    /// The signed step with this string (empty: the identity, no controlled `Q` at all):
    /// every term that commutes with it rides on the control's sign in the first half (see
    /// "Signed steps" in the module essay). Any string gives an exact step.
    Signed(&'a FlipString),
}

/// The string of a signed step ([`Choice::Signed`]) over `terms` on qubits `0..n`: a
/// string that anticommutes with as many terms as a greedy pass over them finds (a term joins
/// when the GF(2) system stays solvable with it), the cheapest such string for `control`
/// under `distance` ([`nearest_flip_string`]); empty when no term joins.
///
/// Which terms join depends on the order they are offered in: on a Heisenberg bond, `XX`,
/// `YY` and `ZZ` cannot all join, and the first two offered do. So the pass runs over
/// [`SIGNED_PASSES`] orders, heaviest first in each: the formula's order, then with the
/// diagonal strings (only `Z`s) last, then the terms with more `X` and `Y` letters first,
/// and keeps the pass whose joined terms weigh most (their weights summed: a kept term costs
/// its ladder's travel on a device). Every solution of the joined terms' system commutes
/// with every term left out (a left-out term's equation is a sum of joined ones with
/// right-hand side 0), so the set of flipped terms does not depend on which solution is
/// taken. `O(m · r · (2n + 1) / 64)` word operations per pass for `m` terms and a system of
/// rank `r ≤ 2n`.
pub fn signed_string(
    terms: &[(PauliString, f64)],
    n: usize,
    control: Qubit,
    distance: Option<&(dyn Fn(Qubit, Qubit) -> u32 + Sync)>,
) -> FlipString {
    let usable: Vec<&PauliString> = terms
        .iter()
        .filter(|(p, c)| *c != 0.0 && !p.is_identity() && p.support_iter().all(|q| q < n))
        .map(|(p, _)| p)
        .collect();
    let off_diagonal = |p: &PauliString| p.support_iter().filter(|&q| p.get(q) != Pauli::Z).count();
    let mut best: Option<(u64, Vec<PauliString>)> = None;
    for pass in 0..SIGNED_PASSES {
        let mut order = usable.clone();
        // Stable sorts: ties keep the formula's order.
        match pass {
            0 => order.sort_by_key(|p| std::cmp::Reverse(p.weight())),
            1 => order.sort_by_key(|p| (off_diagonal(p) == 0, std::cmp::Reverse(p.weight()))),
            _ => order.sort_by_key(|p| std::cmp::Reverse((off_diagonal(p), p.weight()))),
        }
        let joined = joined_greedily(&order, n);
        let weight: u64 = joined.iter().map(|p| u64::from(p.weight())).sum();
        if best.as_ref().is_none_or(|(w, _)| weight > *w) {
            best = Some((weight, joined));
        }
    }
    match best {
        Some((_, joined)) if !joined.is_empty() => {
            nearest_flip_string(&joined, n, control, distance).unwrap_or_default()
        }
        _ => Vec::new(),
    }
}

/// Orders [`signed_string`] offers the terms in.
pub const SIGNED_PASSES: usize = 3;

/// The strings of `order` that join a GF(2) system `⟨Q, P⟩ = 1` one by one while it stays
/// solvable (incremental elimination: each new row reduced by the pivots so far).
fn joined_greedily(order: &[&PauliString], n: usize) -> Vec<PauliString> {
    let cols = 2 * n + 1;
    let words = cols.div_ceil(64);
    let get = |row: &[u64], c: usize| row[c / 64] >> (c % 64) & 1 == 1;
    let mut rows: Vec<(usize, Vec<u64>)> = Vec::new();
    let mut joined: Vec<PauliString> = Vec::new();
    for &p in order {
        let mut row = vec![0u64; words];
        for q in p.support_iter() {
            let letter = p.get(q);
            // ⟨Q, P⟩: Q's x-bit (column 2q) meets P's z-bit, Q's z-bit (2q + 1) P's x-bit.
            if matches!(letter, Pauli::Z | Pauli::Y) {
                row[2 * q / 64] |= 1 << (2 * q % 64);
            }
            if matches!(letter, Pauli::X | Pauli::Y) {
                row[(2 * q + 1) / 64] |= 1 << ((2 * q + 1) % 64);
            }
        }
        row[2 * n / 64] |= 1 << (2 * n % 64);
        for (c, b) in &rows {
            if get(&row, *c) {
                for (w, x) in row.iter_mut().zip(b) {
                    *w ^= x;
                }
            }
        }
        match (0..2 * n).find(|&c| get(&row, c)) {
            Some(c) => {
                rows.push((c, row));
                joined.push(p.clone());
            }
            // Every unknown eliminated: consistent when the right-hand side is 0 as well.
            None if !get(&row, 2 * n) => joined.push(p.clone()),
            None => {}
        }
    }
    joined
}

/// A Pauli string that anticommutes with every one of `strings` (on qubits `0..n`), as
/// `(qubit, letter)` pairs ascending, or `None` when there is none (or a string is the
/// identity). Free variables of the GF(2) system are set to 0, so the support is what the
/// pivots need.
pub fn anticommuting_string(strings: &[PauliString], n: usize) -> Option<FlipString> {
    anticommuting_solutions(strings, n).map(|(q, _)| string_of_bits(&q))
}

/// `Q`'s bits (x-bit of qubit `q` at `2q`, z-bit at `2q + 1`) as `(qubit, letter)` pairs.
fn string_of_bits(bits: &[bool]) -> FlipString {
    (0..bits.len() / 2)
        .filter_map(|q| {
            let letter = match (bits[2 * q], bits[2 * q + 1]) {
                (false, false) => return None,
                (true, false) => Pauli::X,
                (true, true) => Pauli::Y,
                (false, true) => Pauli::Z,
            };
            Some((q as Qubit, letter))
        })
        .collect()
}

/// Every solution of [`anticommuting_string`]'s system: the particular one (free variables
/// 0) and a basis of the homogeneous system's solutions (one per free variable), whose sums
/// with it are all the strings that anticommute with every one of `strings` (up to phase).
fn anticommuting_solutions(
    strings: &[PauliString],
    n: usize,
) -> Option<(Vec<bool>, Vec<Vec<bool>>)> {
    if strings.iter().any(|p| p.is_identity()) {
        return None;
    }
    // Unknowns: x-bit of Q on qubit q at column 2q, z-bit at 2q + 1; one extra column for
    // the right-hand side. ⟨Q, P⟩ = Σ_q (Qx_q · Pz_q + Qz_q · Px_q) = 1.
    let cols = 2 * n + 1;
    let words = cols.div_ceil(64);
    let set = |row: &mut [u64], c: usize| row[c / 64] |= 1 << (c % 64);
    let get = |row: &[u64], c: usize| row[c / 64] >> (c % 64) & 1 == 1;
    let mut rows: Vec<Vec<u64>> = Vec::with_capacity(strings.len());
    for p in strings {
        let mut row = vec![0u64; words];
        for q in p.support_iter() {
            if q >= n {
                return None;
            }
            let (x, z) = match p.get(q) {
                Pauli::X => (true, false),
                Pauli::Y => (true, true),
                Pauli::Z => (false, true),
                Pauli::I => (false, false),
            };
            if z {
                set(&mut row, 2 * q);
            }
            if x {
                set(&mut row, 2 * q + 1);
            }
        }
        set(&mut row, 2 * n);
        rows.push(row);
    }
    // Reduced row echelon form.
    let mut pivots: Vec<(usize, usize)> = Vec::new();
    let mut r = 0;
    for c in 0..2 * n {
        let Some(k) = (r..rows.len()).find(|&k| get(&rows[k], c)) else {
            continue;
        };
        rows.swap(r, k);
        let pivot = rows[r].clone();
        for (i, row) in rows.iter_mut().enumerate() {
            if i != r && get(row, c) {
                for (w, p) in row.iter_mut().zip(&pivot) {
                    *w ^= p;
                }
            }
        }
        pivots.push((r, c));
        r += 1;
        if r == rows.len() {
            break;
        }
    }
    // A row 0 = 1 means no solution.
    if rows[r..].iter().any(|row| get(row, 2 * n)) {
        return None;
    }
    let mut bits = vec![false; 2 * n];
    for &(i, c) in &pivots {
        bits[c] = get(&rows[i], 2 * n);
    }
    // Reduced rows hold their pivot and free columns only: a free variable set to 1 sets
    // each pivot variable to its row's entry in that column.
    let mut is_pivot = vec![false; 2 * n];
    for &(_, c) in &pivots {
        is_pivot[c] = true;
    }
    let basis = (0..2 * n)
        .filter(|&f| !is_pivot[f])
        .map(|f| {
            let mut v = vec![false; 2 * n];
            v[f] = true;
            for &(i, c) in &pivots {
                v[c] = get(&rows[i], f);
            }
            v
        })
        .collect();
    Some((bits, basis))
}

/// Most basis vectors [`nearest_flip_string`] combines: `2^FLIP_CHOICE_BITS` candidates.
pub const FLIP_CHOICE_BITS: usize = 8;

/// Among the strings that anticommute with every one of `strings`, the one whose controlled
/// copy is cheapest to gather next to `control` under `distance` (hop distances between
/// logical qubits): the parity tree's edges at `d` hops cost `2 · (3d − 2)` (there and back,
/// a routed CNOT as `d − 1` SWAPs and one CNOT) and the `cz` from the root `3d − 2`. The
/// candidates are the particular solution plus every sum of the first
/// [`FLIP_CHOICE_BITS`] basis vectors of the homogeneous system; ties keep the earlier (the
/// particular solution first). Without `distance`, the particular solution. On a chain the
/// XXZ hopping's `Z` on every other site costs trees of 2-hop edges, and `Y X Y X …` (its
/// product with `X` on every site, which commutes with every hopping term) a chain of 1-hop
/// edges.
pub fn nearest_flip_string(
    strings: &[PauliString],
    n: usize,
    control: Qubit,
    distance: Option<&(dyn Fn(Qubit, Qubit) -> u32 + Sync)>,
) -> Option<FlipString> {
    let (particular, basis) = anticommuting_solutions(strings, n)?;
    let Some(dist) = distance else {
        return Some(string_of_bits(&particular));
    };
    let routed = |d: u32| 3 * u64::from(d.max(1)) - 2;
    let cost = |q: &FlipString| -> Option<u64> {
        let support: Vec<Qubit> = q.iter().map(|&(k, _)| k).collect();
        if support.is_empty() {
            return None;
        }
        let (tree, root) = parity_tree(&support, control, Some(dist));
        let edges: u64 = tree.iter().map(|&(c, p)| 2 * routed(dist(c, p))).sum();
        Some(edges + routed(dist(root, control)))
    };
    let used = basis.len().min(FLIP_CHOICE_BITS);
    let mut best: Option<(u64, FlipString)> = None;
    for mask in 0u32..1 << used {
        let mut bits = particular.clone();
        for (j, v) in basis[..used].iter().enumerate() {
            if mask >> j & 1 == 1 {
                for (b, &x) in bits.iter_mut().zip(v) {
                    *b ^= x;
                }
            }
        }
        let q = string_of_bits(&bits);
        if let Some(c) = cost(&q) {
            if best.as_ref().is_none_or(|(b, _)| c < *b) {
                best = Some((c, q));
            }
        }
    }
    best.map(|(_, q)| q)
}

/// The parity tree of `support` for a controlled `Q`: edges `(child, parent)` with every
/// child's own children listed before it, and the root (the support qubit nearest
/// `control`, ties to the lower qubit). With `distance`, a minimum spanning tree by hop
/// distance grown from the root (Prim; ties to the lower qubit); without, a balanced
/// binary tree over the support in ascending order, root first.
pub fn parity_tree(
    support: &[Qubit],
    control: Qubit,
    distance: Option<&(dyn Fn(Qubit, Qubit) -> u32 + Sync)>,
) -> (Vec<(Qubit, Qubit)>, Qubit) {
    let Some(dist) = distance else {
        let root = support[0];
        // Heap order: the parent of element i is element (i − 1) / 2; deeper elements
        // come later, so listing them backwards puts children first.
        let edges = (1..support.len())
            .rev()
            .map(|i| (support[i], support[(i - 1) / 2]))
            .collect();
        return (edges, root);
    };
    let root = *support
        .iter()
        .min_by_key(|&&q| (dist(q, control), q))
        .expect("a non-empty support");
    // Each waiting qubit keeps its nearest joined qubit as `(distance, parent)`, updated as
    // qubits join: O(|support|²) distance calls in all (a 120-qubit string is gathered once
    // per candidate of `nearest_flip_string`, 256 candidates per search).
    let mut rest: Vec<(Qubit, (u32, Qubit))> = support
        .iter()
        .filter(|&&q| q != root)
        .map(|&q| (q, (dist(q, root), root)))
        .collect();
    let mut added: Vec<(Qubit, Qubit)> = Vec::with_capacity(rest.len());
    while !rest.is_empty() {
        let k = (0..rest.len())
            .min_by_key(|&k| (rest[k].1 .0, rest[k].0))
            .expect("non-empty");
        let (q, (_, parent)) = rest.remove(k);
        added.push((q, parent));
        for (w, near) in rest.iter_mut() {
            let d = dist(*w, q);
            if (d, q) < *near {
                *near = (d, q);
            }
        }
    }
    // A qubit joins after its parent, so the reversed joining order lists children first.
    added.reverse();
    (added, root)
}

/// Gates of `|0⟩⟨0| ⊗ 1 + |1⟩⟨1| ⊗ Q` for `q` (non-empty) along the parity tree `tree`
/// (children first) onto `root`, all Clifford.
pub fn controlled_string(
    q: &[(Qubit, Pauli)],
    control: Qubit,
    tree: &[(Qubit, Qubit)],
    root: Qubit,
    out: &mut Vec<Gate>,
) {
    // U P U† = Z: X by h, Y by sdg then h (S† Y S = X, H X H = Z).
    for &(k, p) in q {
        match p {
            Pauli::X => out.push(Gate::H(k)),
            Pauli::Y => out.extend([Gate::Sdg(k), Gate::H(k)]),
            _ => {}
        }
    }
    out.extend(tree.iter().map(|&(c, p)| Gate::Cx(c, p)));
    out.push(Gate::Cz(control, root));
    out.extend(tree.iter().rev().map(|&(c, p)| Gate::Cx(c, p)));
    for &(k, p) in q {
        match p {
            Pauli::X => out.push(Gate::H(k)),
            Pauli::Y => out.extend([Gate::H(k), Gate::S(k)]),
            _ => {}
        }
    }
}

/// The string `Q` of a flipped step over `terms` on qubits `0..n`: the
/// [`anticommuting_string`] of the terms with a non-zero coefficient; `None` when there is
/// none or it would be the identity (no terms).
pub fn flip_string(terms: &[(PauliString, f64)], n: usize) -> Option<FlipString> {
    let strings: Vec<PauliString> = terms
        .iter()
        .filter(|(_, c)| *c != 0.0)
        .map(|(p, _)| p.clone())
        .collect();
    anticommuting_string(&strings, n).filter(|q| !q.is_empty())
}

/// `Q` as factor text (`Y0 Z1 Y2`, `I` for the identity), as the plan records it.
pub fn flip_text(q: &[(Qubit, Pauli)]) -> String {
    if q.is_empty() {
        return "I".into();
    }
    q.iter()
        .map(|&(k, p)| format!("{}{k}", p.letter()))
        .collect::<Vec<_>>()
        .join(" ")
}

/// The first half `H` of one symmetric step over `groups` commuting groups (in formula
/// order) as blocks `(group, share)`: the group's terms at `share · dt` each, adjacent blocks
/// of one group merged. Strang's step is `G₀/2 … G_{m−1}/2 · G_{m−1}/2 … G₀/2`, Suzuki's the
/// Strang steps of [`crate::formula::suzuki_stages`] one after another; both read the same
/// backwards block for block, so the step is `H` followed by `H` in reverse block order.
/// `None` for a formula that is not symmetric (order 1).
pub fn half_blocks(groups: usize, order: Order) -> Option<Vec<(usize, f64)>> {
    let stages: Vec<f64> = match order {
        Order::First => return None,
        Order::Second => vec![1.0],
        Order::Fourth => crate::formula::suzuki_stages().to_vec(),
    };
    let mut full: Vec<(usize, f64)> = Vec::with_capacity(2 * groups * stages.len());
    for f in stages {
        full.extend((0..groups).map(|g| (g, f / 2.0)));
        full.extend((0..groups).rev().map(|g| (g, f / 2.0)));
    }
    let mut half: Vec<(usize, f64)> = Vec::new();
    for &(g, x) in &full[..full.len() / 2] {
        match half.last_mut() {
            Some((h, y)) if *h == g => *y += x,
            _ => half.push((g, x)),
        }
    }
    Some(half)
}

/// The rotations of one commuting block reordered into layers on disjoint qubits: each
/// layer takes, in the given order, every rotation left whose support shares no qubit with
/// the layer so far (one-qubit rotations occupy nothing). The rotations commute, so the
/// block's operator is unchanged; their ladders then run side by side instead of one after
/// another (a chain's bonds in two layers instead of `n − 1`). This is greedy edge colouring,
/// the usual way of writing a commuting Trotter layer in brickwork form (common practice).
/// It reads supports, not ladders, so a plan's ladders and the default ones order alike.
pub fn layered(mut rest: Vec<Rotation>) -> Vec<Rotation> {
    let mut out = Vec::with_capacity(rest.len());
    while !rest.is_empty() {
        let mut busy: Vec<usize> = Vec::new();
        let mut later = Vec::new();
        for r in rest {
            let l = r.pauli.support_qubits();
            if l.len() < 2 || l.iter().all(|q| !busy.contains(q)) {
                if l.len() >= 2 {
                    busy.extend(l);
                }
                out.push(r);
            } else {
                later.push(r);
            }
        }
        rest = later;
    }
    out
}

/// How a symmetric step over commuting groups of sizes `group_sizes` is flipped: the number
/// `k` of leading groups written as controlled rotations, and the string `Q` that
/// anticommutes with every term of the other groups. `k = 0` (every term flips) when such a
/// `Q` exists for all the terms; else the smallest `k` for which it exists, when the flipped
/// groups hold at least as many terms as the controlled ones ([`PARTIAL_MIN_SHARE`]); `None`
/// otherwise, when the sizes do not cover the terms, or when `Q` would be the identity.
/// Strang's step `G₀/2 … G_{m−1} … G₀/2` keeps the groups `k..m` inside the controlled ones,
/// so the inner part is itself a palindrome that the flip controls exactly.
pub fn flip_split(
    terms: &[(PauliString, f64)],
    group_sizes: &[usize],
    n: usize,
) -> Option<(usize, FlipString)> {
    flip_split_near(terms, group_sizes, n, n as Qubit, None)
}

/// [`flip_split`] with `Q` chosen by [`nearest_flip_string`] for `control` under `distance`
/// (the same `k`: whether a suffix flips does not depend on which string flips it).
pub fn flip_split_near(
    terms: &[(PauliString, f64)],
    group_sizes: &[usize],
    n: usize,
    control: Qubit,
    distance: Option<&(dyn Fn(Qubit, Qubit) -> u32 + Sync)>,
) -> Option<(usize, FlipString)> {
    if group_sizes.iter().sum::<usize>() != terms.len() || group_sizes.contains(&0) {
        return None;
    }
    // `starts[k]`: the first term past the first k groups; the admissible splits leave at
    // least the share flipped.
    let mut starts = vec![0usize];
    for &size in group_sizes {
        starts.push(starts.last().expect("non-empty") + size);
    }
    let admissible = (0..group_sizes.len())
        .take_while(|&k| (terms.len() - starts[k]) as f64 >= PARTIAL_MIN_SHARE * terms.len() as f64)
        .count();
    let solve = |k: usize| {
        let strings: Vec<PauliString> = terms[starts[k]..]
            .iter()
            .filter(|(_, c)| *c != 0.0)
            .map(|(p, _)| p.clone())
            .collect();
        nearest_flip_string(&strings, n, control, distance).filter(|q| !q.is_empty())
    };
    // A split flips when its suffix's system is solvable, and a later split's suffix is a
    // subset of an earlier one's equations: solvable splits are a tail of `0..admissible`, so
    // a binary search finds the first in `O(log m)` eliminations, where trying every split
    // from 0 cost one per group (about 50 on a random sum of 10⁵ strings in 100 groups).
    let (mut lo, mut hi) = (0, admissible);
    let mut found: Option<(usize, FlipString)> = None;
    while lo < hi {
        let mid = (lo + hi) / 2;
        match solve(mid) {
            Some(q) => {
                found = Some((mid, q));
                hi = mid;
            }
            None => lo = mid + 1,
        }
    }
    found
}

/// Least share of a step's terms that a partial flip ([`flip_split`] with `k > 0`) must
/// flip: below it the controlled groups carry the ancilla through most of the step anyway.
/// Chosen, not tuned: half.
pub const PARTIAL_MIN_SHARE: f64 = 0.5;

/// A flipped step in three pieces (gates on the system qubits and the control): with one
/// controlled group (a partial flip with `k = 1`), `lead` and `trail` are that group's
/// controlled rotations at the step's two ends and `merged` the same group at the sum of
/// their angles, which replaces a trail and the next step's lead where two steps meet (the
/// seams of `route::reuse`); otherwise `lead`, `trail` and `merged` are empty and `middle`
/// is the whole step.
#[derive(Clone, Debug)]
pub struct FlippedParts {
    pub lead: Vec<Gate>,
    pub middle: Vec<Gate>,
    pub trail: Vec<Gate>,
    pub merged: Vec<Gate>,
    /// The string `Q` the control meets twice per flipped palindrome.
    pub q: FlipString,
    /// How many leading terms stay controlled rotation by rotation (0 for a whole flip); in a
    /// signed step, how many terms commute with `Q` and ride on the control's sign.
    pub controlled_terms: usize,
    /// The signed form ([`Choice::Signed`]).
    pub signed: bool,
    /// In a signed step, the mirror image of `middle` (`circuit::mirror_gates`: the same
    /// controlled step as an operator), which every second step writes so that the
    /// uncontrolled halves of two steps meet (their edge rotations merge) and so do the
    /// signed halves and the controlled `Q`s (which cancel); else empty.
    pub mirrored: Vec<Gate>,
    /// In a step flipped as one palindrome (no controlled groups, a non-empty `Q`): where in
    /// `middle` the second controlled `Q` begins, so that a router can tell where the qubits
    /// stand when it runs ([`flipped_step_parts`]); else `None`.
    pub second_at: Option<usize>,
}

impl FlippedParts {
    /// The controlled product of `steps` steps: `lead`, `middle`, then (`merged`, `middle`)
    /// per further step, and `trail`; without a controlled group, `middle` `steps` times.
    /// Each step is the controlled step on the control's |1⟩ branch and the identity on |0⟩,
    /// so their product is the controlled `steps`-fold step; a seam's `merged` equals
    /// `trail` then `lead` (the same commuting rotations at the sum of their angles).
    pub fn steps_into(&self, steps: usize, out: &mut Vec<Gate>) {
        if steps == 0 {
            return;
        }
        if !self.mirrored.is_empty() {
            for s in 0..steps {
                out.extend_from_slice(if s % 2 == 0 {
                    &self.middle
                } else {
                    &self.mirrored
                });
            }
            return;
        }
        out.extend_from_slice(&self.lead);
        out.extend_from_slice(&self.middle);
        for _ in 1..steps {
            out.extend_from_slice(&self.merged);
            out.extend_from_slice(&self.middle);
        }
        out.extend_from_slice(&self.trail);
    }
}

/// The controlled step `CQ · H⁻¹ · CQ · H_rev` (see the module essay) of one step of `order`
/// and length `dt` over `terms`, whose consecutive commuting groups have sizes `group_sizes`
/// (`formula::term_groups`, possibly permuted inside groups), each rotation uncontrolled along
/// `ladder(r)`; with the string `Q`. `None` when the formula is not symmetric, the sizes do
/// not cover the terms, or [`flip_split`] finds no split. The |1⟩ branch runs
/// `H · H_rev`, which is `formula::step(terms, order, dt)` as an operator (the same factors,
/// the merges it makes aside), for any order of the terms inside their groups. Each block's
/// rotations are written as `writing` says. [`flipped_step_parts`] in one piece.
#[allow(clippy::too_many_arguments)]
pub fn flipped_step(
    terms: &[(PauliString, f64)],
    group_sizes: &[usize],
    order: Order,
    dt: f64,
    writing: Writing,
    control: Qubit,
    ladder: &(dyn Fn(&Rotation) -> Vec<Qubit> + Sync),
    distance: Option<&(dyn Fn(Qubit, Qubit) -> u32 + Sync)>,
) -> Option<(Vec<Gate>, FlipString)> {
    let p = flipped_step_parts(
        terms,
        group_sizes,
        order,
        dt,
        writing,
        control,
        ladder,
        distance,
        Choice::Search,
        None,
    )?;
    let mut out = Vec::new();
    p.steps_into(1, &mut out);
    Some((out, p.q))
}

/// [`flipped_step`] in pieces ([`FlippedParts`]).
///
/// A partial flip (`k > 0` leading groups controlled) writes each Strang stage
/// `G₀/2 … G_{m−1} … G₀/2` of the step (the step itself for order 2, the five stages of
/// Suzuki's product for order 4) as `C(G₀/2 … G_{k−1}/2) · [CQ · H⁻¹ · CQ · H_rev] ·
/// C(G_{k−1}/2 … G₀/2)`, the outer groups' rotations each controlled along `ladder(r)` (the
/// controlled `rz` of `synth::pauli_rotation_along`) and the bracket the flip of the inner
/// palindrome `G_k/2 … G_{m−1} … G_k/2`: on the |1⟩ branch the stage, on |0⟩ the identity.
/// Where two stages meet, their `G₀` halves are written as one rotation each (they commute,
/// so merging them is exact). The XXZ chain's step (`ZZ` in the first group, the hopping
/// pairs after it) flips so through `Q = Z` on every other site, though no string
/// anticommutes with all its terms.
///
/// With `second`, the second controlled `Q` (in a step flipped as one palindrome) gathers
/// its parity tree under `second` instead of `distance`: the hop distance where the
/// qubits stand after the first half has been routed. The string is chosen under `distance`
/// as before; the tree changes only which CNOTs compute the parity, not the operator.
///
/// Why: on a device the first half moves qubits with SWAPs, so a tree laid out for the
/// initial layout makes the router pull them back before the second `Q` and push them out
/// again after it (the 3×4 Ising model on the heavy hexagon: 16 SWAPs in each half against
/// 14 for the whole uncontrolled step). A tree on the routed layout lets each half route
/// like the uncontrolled step's. This is the parity-tree-on-the-coupling-graph idea
/// (Kissinger & Meijer-van de Griend 2020) applied where the layout has moved.
#[allow(clippy::too_many_arguments)]
pub fn flipped_step_parts(
    terms: &[(PauliString, f64)],
    group_sizes: &[usize],
    order: Order,
    dt: f64,
    writing: Writing,
    control: Qubit,
    ladder: &(dyn Fn(&Rotation) -> Vec<Qubit> + Sync),
    distance: Option<&(dyn Fn(Qubit, Qubit) -> u32 + Sync)>,
    choice: Choice<'_>,
    second: Option<&(dyn Fn(Qubit, Qubit) -> u32 + Sync)>,
) -> Option<FlippedParts> {
    let n = control as usize;
    let (outer, q) = match choice {
        Choice::Search => flip_split_near(terms, group_sizes, n, control, distance)?,
        Choice::Signed(q) => {
            if q.iter().any(|&(k, _)| k as usize >= n) {
                return None;
            }
            (0, q.clone())
        }
        Choice::Given(q) => {
            // A recorded string: it must anticommute with every term past the split.
            let (outer, _) = flip_split(terms, group_sizes, n)?;
            let factors: Vec<(usize, Pauli)> = q.iter().map(|&(k, p)| (k as usize, p)).collect();
            if q.is_empty() || q.iter().any(|&(k, _)| k as usize >= n) {
                return None;
            }
            let (_, string) = PauliString::from_factors(&factors);
            let at: usize = group_sizes[..outer].iter().sum();
            let flips = terms[at..]
                .iter()
                .filter(|(_, c)| *c != 0.0)
                .all(|(p, _)| !p.commutes_with(&string));
            if !flips {
                return None;
            }
            (outer, q.clone())
        }
    };
    let stages: Vec<f64> = match order {
        Order::First => return None,
        Order::Second => vec![1.0],
        Order::Fourth => crate::formula::suzuki_stages().to_vec(),
    };
    let mut starts = vec![0usize];
    for &k in group_sizes {
        starts.push(starts.last().expect("non-empty") + k);
    }
    let rotations = |(g, x): (usize, f64), sign: f64| {
        let rs: Vec<Rotation> = terms[starts[g]..starts[g + 1]]
            .iter()
            .filter(|(_, c)| *c != 0.0)
            .map(move |(p, c)| Rotation {
                pauli: p.clone(),
                theta: sign * c * x * dt,
            })
            .collect();
        match writing.order {
            BlockOrder::Given => rs,
            BlockOrder::Layers => layered(rs),
        }
    };
    let support: Vec<Qubit> = q.iter().map(|&(k, _)| k).collect();
    // The identity string (a signed step's choice where nothing flips) needs no tree.
    let (tree, root) = if support.is_empty() {
        (Vec::new(), control)
    } else {
        parity_tree(&support, control, distance)
    };
    // The second controlled `Q`'s tree: under `second` in a step flipped as one palindrome.
    let (tree2, root2) = match second {
        Some(d) if outer == 0 && !support.is_empty() => parity_tree(&support, control, Some(d)),
        _ => (tree.clone(), root),
    };
    let signed = matches!(choice, Choice::Signed(_));
    let string =
        PauliString::from_factors(&q.iter().map(|&(k, p)| (k as usize, p)).collect::<Vec<_>>()).1;
    // In a signed step, a rotation of the first half whose string commutes with `Q` rides on
    // the control's sign: `exp(−iθ Z_c P)` with the first half's (negated) angle.
    let sign = |mut r: Rotation| {
        if signed && r.pauli.commutes_with(&string) {
            r.pauli.z.insert(control as usize);
        }
        r
    };
    // One flipped palindrome whose first half is `half` (blocks of the groups past `outer`).
    let uncontrolled = |rs: Vec<Rotation>, out: &mut Vec<Gate>| {
        if writing.groups {
            let block = super::Block {
                rotations: &rs,
                control: None,
                distance,
            };
            let groups = super::groups::Groups {
                ladder,
                shared: None,
            };
            super::Strategy::synthesize(&groups, &block, out);
            return;
        }
        if !writing.pairs {
            for r in &rs {
                super::pauli_rotation_along_into(r, None, &ladder(r), out);
            }
            return;
        }
        super::Strategy::synthesize(
            &super::Pairs { ladder },
            &super::Block {
                rotations: &rs,
                control: None,
                distance,
            },
            out,
        );
    };
    // Returns where in `out` the second controlled `Q` begins.
    let flip = |half: &[(usize, f64)], out: &mut Vec<Gate>| -> usize {
        if !q.is_empty() {
            controlled_string(&q, control, &tree, root, out);
        }
        let back: Vec<Rotation> = half
            .iter()
            .flat_map(|&(g, x)| rotations((g + outer, x), -1.0))
            .map(&sign)
            .collect();
        uncontrolled(back, out);
        let at = out.len();
        if !q.is_empty() {
            controlled_string(&q, control, &tree2, root2, out);
        }
        let forth: Vec<Rotation> = half
            .iter()
            .rev()
            .flat_map(|&(g, x)| rotations((g + outer, x), 1.0))
            .collect();
        uncontrolled(forth, out);
        at
    };
    let controlled = |g: usize, x: f64, out: &mut Vec<Gate>| {
        for r in rotations((g, x), 1.0) {
            super::pauli_rotation_along_into(&r, Some(control), &ladder(&r), out);
        }
    };
    let mut parts = FlippedParts {
        lead: Vec::new(),
        middle: Vec::new(),
        trail: Vec::new(),
        merged: Vec::new(),
        q: q.clone(),
        controlled_terms: if signed {
            terms
                .iter()
                .filter(|(p, c)| *c != 0.0 && p.commutes_with(&string))
                .count()
        } else {
            group_sizes[..outer].iter().sum()
        },
        signed,
        mirrored: Vec::new(),
        second_at: None,
    };
    if outer == 0 {
        let at = flip(&half_blocks(group_sizes.len(), order)?, &mut parts.middle);
        parts.second_at = (!q.is_empty()).then_some(at);
        if signed {
            parts.mirrored = crate::circuit::mirror_gates(&parts.middle);
        }
        return Some(parts);
    }
    // The stages as items, a controlled group at a share of dt or an inner palindrome at a
    // stage's factor, neighbouring halves of one group merged.
    enum Item {
        Controlled(usize, f64),
        Inner(f64),
    }
    let mut items: Vec<Item> = Vec::new();
    for &f in &stages {
        for g in 0..outer {
            match items.last_mut() {
                Some(Item::Controlled(h, x)) if *h == g => *x += f / 2.0,
                _ => items.push(Item::Controlled(g, f / 2.0)),
            }
        }
        items.push(Item::Inner(f));
        items.extend((0..outer).rev().map(|g| Item::Controlled(g, f / 2.0)));
    }
    let inner_half = half_blocks(group_sizes.len() - outer, Order::Second)?;
    let edges = outer == 1;
    let last = items.len() - 1;
    for (i, item) in items.iter().enumerate() {
        let out = match i {
            0 if edges => &mut parts.lead,
            _ if edges && i == last => &mut parts.trail,
            _ => &mut parts.middle,
        };
        match *item {
            Item::Controlled(g, x) => controlled(g, x, out),
            Item::Inner(f) => {
                let half: Vec<(usize, f64)> = inner_half.iter().map(|&(g, x)| (g, x * f)).collect();
                flip(&half, out);
            }
        }
    }
    if edges {
        // A seam: the last stage's half of G₀ then the first stage's, which are equal.
        controlled(0, stages[0], &mut parts.merged);
    }
    Some(parts)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::circuit::Circuit;
    use crate::formula::{step, Order};
    use crate::sim::unitary_distance;
    use rand::{Rng, SeedableRng};

    #[test]
    fn the_parity_tree_is_a_minimum_spanning_tree_listed_children_first() {
        // Reference: Kruskal's minimum spanning tree from petgraph
        // (`petgraph::algo::min_spanning_tree`, a general-purpose graph library): every
        // minimum spanning tree of a graph has the same total weight (Cormen, Leiserson,
        // Rivest & Stein, "Introduction to Algorithms", 3rd ed. 2009, §23.1), so the parity
        // tree's summed hop distance must equal Kruskal's. Random supports of 1–40 qubits out of
        // 64, random symmetric distances 1–9 (many ties, so the tie rules are exercised too).
        use petgraph::algo::min_spanning_tree;
        use petgraph::data::FromElements;
        use petgraph::graph::UnGraph;
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(77);
        for case in 0..200 {
            let len = rng.gen_range(1..=40usize);
            let mut support: Vec<Qubit> = Vec::new();
            while support.len() < len {
                let q = rng.gen_range(0..64);
                if !support.contains(&q) {
                    support.push(q);
                }
            }
            let control: Qubit = 64;
            // Symmetric: the distance of a pair is drawn once, for its lower-first order.
            let draws: Vec<u32> = (0..65 * 65).map(|_| rng.gen_range(1..=9)).collect();
            let table = |a: usize, b: usize| match a.cmp(&b) {
                std::cmp::Ordering::Equal => 0,
                std::cmp::Ordering::Less => draws[a * 65 + b],
                std::cmp::Ordering::Greater => draws[b * 65 + a],
            };
            let dist = |a: Qubit, b: Qubit| table(a as usize, b as usize);
            let (tree, root) = parity_tree(&support, control, Some(&dist));
            // The root is the support qubit nearest the control (ties to the lower qubit).
            let nearest = support
                .iter()
                .map(|&q| (dist(q, control), q))
                .min()
                .unwrap();
            assert_eq!(root, nearest.1, "case {case}");
            // Spanning, children first: each child appears once, after its own children and
            // before its parent is used as a child; every edge ends at the root's component.
            assert_eq!(tree.len(), support.len() - 1, "case {case}");
            let mut done: Vec<Qubit> = Vec::new();
            for &(c, p) in &tree {
                assert!(support.contains(&c) && support.contains(&p) && c != root);
                assert!(
                    !done.contains(&c) && !done.contains(&p),
                    "case {case}: order"
                );
                done.push(c);
            }
            let weight: u32 = tree.iter().map(|&(c, p)| dist(c, p)).sum();
            let mut g = UnGraph::<Qubit, u32>::new_undirected();
            let nodes: Vec<_> = support.iter().map(|&q| g.add_node(q)).collect();
            for i in 0..nodes.len() {
                for j in i + 1..nodes.len() {
                    g.add_edge(nodes[i], nodes[j], dist(support[i], support[j]));
                }
            }
            let mst = UnGraph::<Qubit, u32>::from_elements(min_spanning_tree(&g));
            let kruskal: u32 = mst.edge_weights().sum();
            assert_eq!(weight, kruskal, "case {case}: support {support:?}");
        }
    }

    fn string(text: &str) -> PauliString {
        PauliString::parse_factor_text(text).unwrap()
    }

    fn anticommutes(a: &[(Qubit, Pauli)], p: &PauliString) -> bool {
        let (_, q) =
            PauliString::from_factors(&a.iter().map(|&(k, l)| (k as usize, l)).collect::<Vec<_>>());
        !q.commutes_with(p)
    }

    #[test]
    fn the_ising_chain_flips_by_alternating_letters_and_heisenberg_has_no_flip() {
        // Transverse-field Ising chain: ZZ on edges, X on sites. Every edge has one site of
        // each sublattice, so Q alternates Y and Z (or a gauge-equivalent choice).
        let mut strings: Vec<PauliString> = (0..5)
            .map(|i| string(&format!("Z{i} Z{}", i + 1)))
            .collect();
        strings.extend((0..6).map(|i| string(&format!("X{i}"))));
        let q = anticommuting_string(&strings, 6).expect("a bipartite chain flips");
        assert!(strings.iter().all(|p| anticommutes(&q, p)));
        // A Heisenberg edge: XX · YY = −ZZ, so no Q anticommutes with all three.
        let heis = [string("X0 X1"), string("Y0 Y1"), string("Z0 Z1")];
        assert_eq!(anticommuting_string(&heis, 2), None);
        // Z0, Z1 and Z0 Z1 (a molecular sum's shape): none either.
        let zs = [string("Z0"), string("Z1"), string("Z0 Z1")];
        assert_eq!(anticommuting_string(&zs, 2), None);
        // An odd cycle of ZZ with X fields: the triangle has no bipartition.
        let tri = [
            string("Z0 Z1"),
            string("Z1 Z2"),
            string("Z0 Z2"),
            string("X0"),
            string("X1"),
            string("X2"),
        ];
        assert_eq!(anticommuting_string(&tri, 3), None);
    }

    #[test]
    fn solutions_anticommute_with_random_sums() {
        // Random sums of few strings have solutions more often than not: each found Q is
        // checked against every string by the Pauli algebra itself.
        let mut found = 0;
        for seed in 0..300u64 {
            let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
            let n = rng.gen_range(1..7usize);
            let m = rng.gen_range(1..8usize);
            let strings: Vec<PauliString> = (0..m)
                .map(|_| loop {
                    let factors: Vec<(usize, Pauli)> = (0..n)
                        .map(|q| {
                            (
                                q,
                                [Pauli::I, Pauli::X, Pauli::Y, Pauli::Z][rng.gen_range(0..4)],
                            )
                        })
                        .filter(|&(_, p)| p != Pauli::I)
                        .collect();
                    if !factors.is_empty() {
                        break PauliString::from_factors(&factors).1;
                    }
                })
                .collect();
            if let Some(q) = anticommuting_string(&strings, n) {
                found += 1;
                assert!(strings.iter().all(|p| anticommutes(&q, p)), "seed {seed}");
            } else {
                // No solution: brute force over all 4^n strings agrees.
                let exists = (0..4usize.pow(n as u32)).any(|code| {
                    let q: Vec<(Qubit, Pauli)> = (0..n)
                        .map(|k| {
                            (
                                k as Qubit,
                                [Pauli::I, Pauli::X, Pauli::Y, Pauli::Z]
                                    [code / 4usize.pow(k as u32) % 4],
                            )
                        })
                        .filter(|&(_, p)| p != Pauli::I)
                        .collect();
                    strings.iter().all(|p| anticommutes(&q, p))
                });
                assert!(!exists, "seed {seed}: a solution was missed");
            }
        }
        assert!(found > 50, "only {found} of 300 random sums had a flip");
    }

    /// The controlled step written rotation by rotation (the reference).
    fn controlled_reference(program: &[Rotation], n: usize) -> Circuit {
        let mut c = Circuit::new(n + 1, 0);
        for r in program {
            let ladder = crate::synth::default_ladder(r);
            c.extend(crate::synth::pauli_rotation_along(
                r,
                Some(n as Qubit),
                &ladder,
            ));
        }
        c
    }

    /// A sum of `count` random strings on `n` qubits (each qubit's letter drawn with
    /// probability 1/2, then uniformly among X, Y, Z; empty strings skipped), coefficients
    /// uniform in (−1, 1).
    fn random_sum(
        rng: &mut rand_chacha::ChaCha8Rng,
        n: usize,
        count: usize,
    ) -> crate::pauli::PauliSum {
        let mut h = crate::pauli::PauliSum::new(n);
        for _ in 0..count {
            let mut factors: Vec<(usize, Pauli)> = Vec::new();
            for q in 0..n {
                if rng.gen_bool(0.5) {
                    factors.push((q, [Pauli::X, Pauli::Y, Pauli::Z][rng.gen_range(0..3)]));
                }
            }
            if !factors.is_empty() {
                h.add(
                    PauliString::from_factors(&factors).1,
                    rng.gen_range(-1.0..1.0),
                );
            }
        }
        h
    }

    /// The terms of `h` in formula order and the sizes of its commuting groups.
    fn grouped(h: &crate::pauli::PauliSum) -> (Vec<(PauliString, f64)>, Vec<usize>) {
        let groups = crate::formula::term_groups(h);
        (groups.concat(), groups.iter().map(|g| g.len()).collect())
    }

    /// A random sum of 2–7 strings on 2–5 qubits from `seed`, as its formula's terms and
    /// group sizes, with the generator for what the test draws next.
    #[allow(clippy::type_complexity)]
    fn seeded_sum(
        seed: u64,
    ) -> (
        rand_chacha::ChaCha8Rng,
        usize,
        Vec<(PauliString, f64)>,
        Vec<usize>,
    ) {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
        let n = rng.gen_range(2..6usize);
        let count = rng.gen_range(2..8);
        let h = random_sum(&mut rng, n, count);
        let (terms, sizes) = grouped(&h);
        (rng, n, terms, sizes)
    }

    /// Unitary distance between two steps of `parts` and two copies of `reference`.
    fn two_steps_from(parts: &FlippedParts, reference: &Circuit, n: usize) -> f64 {
        let mut c = Circuit::new(n + 1, 0);
        parts.steps_into(2, &mut c.gates);
        let mut two = reference.clone();
        two.extend(reference.gates.iter().copied());
        unitary_distance(&two, &c)
    }

    #[test]
    fn the_flipped_step_is_the_controlled_step() {
        // Random sums with an anticommuting string, Strang and Suzuki steps, the terms also
        // shuffled inside their groups: the flipped step equals the controlled
        // `formula::step`, global phase included, to 1e-12, with and without a distance for
        // the tree.
        use rand::seq::SliceRandom;
        let (mut checked, mut partial) = (0, 0);
        for seed in 0..200u64 {
            let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
            let n = rng.gen_range(2..6usize);
            let count = rng.gen_range(2..7);
            let h = random_sum(&mut rng, n, count);
            let (mut terms, sizes) = grouped(&h);
            if terms.is_empty() {
                continue;
            }
            if rng.gen_bool(0.5) {
                let mut at = 0;
                for &k in &sizes {
                    terms[at..at + k].shuffle(&mut rng);
                    at += k;
                }
            }
            for order in [Order::Second, Order::Fourth] {
                let program = step(&terms, order, 0.37);
                let reference = controlled_reference(&program, n);
                let line = |a: Qubit, b: Qubit| a.abs_diff(b);
                let distances = [None, Some(&line as &(dyn Fn(Qubit, Qubit) -> u32 + Sync))];
                let writings = [BlockOrder::Given, BlockOrder::Layers]
                    .into_iter()
                    .flat_map(|order| {
                        [(false, false), (true, false), (false, true)].map(|(pairs, groups)| {
                            Writing {
                                order,
                                pairs,
                                groups,
                            }
                        })
                    });
                for (distance, writing) in distances
                    .into_iter()
                    .flat_map(|d| writings.clone().map(move |w| (d, w)))
                {
                    let Some((gates, q)) = flipped_step(
                        &terms,
                        &sizes,
                        order,
                        0.37,
                        writing,
                        n as Qubit,
                        &crate::synth::default_ladder,
                        distance,
                    ) else {
                        // No anticommuting string: no flipped step.
                        let strings: Vec<PauliString> =
                            terms.iter().map(|(p, _)| p.clone()).collect();
                        assert!(anticommuting_string(&strings, n).is_none_or(|q| q.is_empty()));
                        continue;
                    };
                    // Every term past the controlled groups anticommutes with Q.
                    // (With a distance the string is chosen by the tree it needs; without,
                    // it is the split's own.)
                    let (k, split_q) = flip_split(&terms, &sizes, n).expect("a split");
                    if distance.is_none() {
                        assert_eq!(split_q, q);
                    }
                    let controlled: usize = sizes[..k].iter().sum();
                    assert!(terms[controlled..].iter().all(|(p, _)| anticommutes(&q, p)));
                    partial += usize::from(k > 0);
                    let mut c = Circuit::new(n + 1, 0);
                    c.extend(gates);
                    let d = unitary_distance(&reference, &c);
                    assert!(d < 1e-12, "seed {seed} {order:?}: {d:e}");
                    checked += 1;
                }
            }
        }
        assert!(checked > 100, "only {checked} cases");
        assert!(partial > 10, "only {partial} partial flips");
    }

    #[test]
    fn a_tracked_second_tree_changes_the_cnots_not_the_step() {
        // Random sums with a whole flip or a signed step, Strang and Suzuki: the second
        // controlled `Q` gathered under another distance (a random relabelling of a line)
        // leaves the step's operator as it was, to 1e-12; the gates before `second_at` are
        // the untracked step's; every CNOT of the second tree joins qubits adjacent under
        // that distance when the support is connected there (here: always, on a line).
        use rand::seq::SliceRandom;
        let mut checked = 0;
        for seed in 0..80u64 {
            let (mut rng, n, terms, sizes) = seeded_sum(5000 + seed);
            if terms.is_empty() {
                continue;
            }
            let line = |a: Qubit, b: Qubit| a.abs_diff(b);
            let mut sites: Vec<Qubit> = (0..=n as Qubit).collect();
            sites.shuffle(&mut rng);
            let moved = |a: Qubit, b: Qubit| sites[a as usize].abs_diff(sites[b as usize]);
            let greedy = signed_string(&terms, n, n as Qubit, Some(&line));
            for order in [Order::Second, Order::Fourth] {
                let reference = controlled_reference(&step(&terms, order, 0.29), n);
                for choice in [Choice::Search, Choice::Signed(&greedy)] {
                    let build = |second: Option<&(dyn Fn(Qubit, Qubit) -> u32 + Sync)>| {
                        flipped_step_parts(
                            &terms,
                            &sizes,
                            order,
                            0.29,
                            BlockOrder::Layers.into(),
                            n as Qubit,
                            &crate::synth::default_ladder,
                            Some(&line),
                            choice,
                            second,
                        )
                    };
                    let (Some(plain), Some(tracked)) = (build(None), build(Some(&moved))) else {
                        continue;
                    };
                    let Some(at) = tracked.second_at else {
                        // Only a step flipped as one palindrome, with a string, has one.
                        assert!(
                            tracked.q.is_empty()
                                || (!tracked.signed && tracked.controlled_terms > 0)
                        );
                        continue;
                    };
                    assert_eq!(plain.second_at, Some(at));
                    assert_eq!(plain.middle[..at], tracked.middle[..at], "seed {seed}");
                    // The second tree: the CNOTs between the second `Q`'s basis changes.
                    let tree: Vec<(Qubit, Qubit)> = tracked.middle[at..]
                        .iter()
                        .take_while(|g| !matches!(g, Gate::Cz(..)))
                        .filter_map(|g| match *g {
                            Gate::Cx(a, b) => Some((a, b)),
                            _ => None,
                        })
                        .collect();
                    assert_eq!(tree.len(), tracked.q.len() - 1, "seed {seed}");
                    let support: Vec<Qubit> = tracked.q.iter().map(|&(k, _)| k).collect();
                    let mut on_sites: Vec<Qubit> =
                        support.iter().map(|&k| sites[k as usize]).collect();
                    on_sites.sort_unstable();
                    if on_sites.windows(2).all(|w| w[1] == w[0] + 1) {
                        assert!(
                            tree.iter().all(|&(a, b)| moved(a, b) == 1),
                            "seed {seed}: {tree:?}"
                        );
                    }
                    for parts in [&plain, &tracked] {
                        let d = two_steps_from(parts, &reference, n);
                        assert!(d < 1e-12, "seed {seed} {order:?}: {d:e}");
                    }
                    checked += 1;
                }
            }
        }
        assert!(checked > 60, "only {checked} cases");
    }

    #[test]
    fn signed_steps_are_the_controlled_step_for_any_string() {
        // Random sums, anticommuting string or not, Strang and Suzuki, terms shuffled inside
        // their groups: the signed step with the greedy string, with none and with a random
        // string equals the controlled `formula::step`, global phase included, to 1e-12, in
        // every writing; its count of kept terms is the number commuting with the string.
        use rand::seq::SliceRandom;
        let mut checked = 0;
        for seed in 0..120u64 {
            let (mut rng, n, mut terms, sizes) = seeded_sum(1000 + seed);
            if terms.is_empty() {
                continue;
            }
            let mut at = 0;
            for &k in &sizes {
                terms[at..at + k].shuffle(&mut rng);
                at += k;
            }
            let random: FlipString = (0..n as Qubit)
                .filter_map(|q| {
                    let letter = [Pauli::I, Pauli::X, Pauli::Y, Pauli::Z][rng.gen_range(0..4)];
                    (letter != Pauli::I).then_some((q, letter))
                })
                .collect();
            let line = |a: Qubit, b: Qubit| a.abs_diff(b);
            let greedy = signed_string(&terms, n, n as Qubit, Some(&line));
            // The greedy string anticommutes with a set that no term left out can join.
            let flipped: Vec<PauliString> = terms
                .iter()
                .filter(|(p, _)| anticommutes(&greedy, p))
                .map(|(p, _)| p.clone())
                .collect();
            for (p, _) in &terms {
                if !anticommutes(&greedy, p) {
                    let mut more = flipped.clone();
                    more.push(p.clone());
                    assert!(anticommuting_string(&more, n).is_none(), "seed {seed}");
                }
            }
            for order in [Order::Second, Order::Fourth] {
                let reference = controlled_reference(&step(&terms, order, 0.37), n);
                for q in [&greedy, &Vec::new(), &random] {
                    for (pairs, groups) in [(false, false), (true, false), (false, true)] {
                        let writing = Writing {
                            order: BlockOrder::Layers,
                            pairs,
                            groups,
                        };
                        let parts = flipped_step_parts(
                            &terms,
                            &sizes,
                            order,
                            0.37,
                            writing,
                            n as Qubit,
                            &crate::synth::default_ladder,
                            Some(&line),
                            Choice::Signed(q),
                            None,
                        )
                        .expect("every symmetric step signs");
                        assert!(parts.signed);
                        let kept = terms.iter().filter(|(p, _)| !anticommutes(q, p)).count();
                        assert_eq!(parts.controlled_terms, kept);
                        let d = two_steps_from(&parts, &reference, n);
                        assert!(d < 1e-12, "seed {seed} {order:?} {q:?}: {d:e}");
                        checked += 1;
                    }
                }
            }
        }
        assert!(checked > 1000, "only {checked} cases");
    }

    #[test]
    fn a_signed_heisenberg_square_pays_the_control_once_per_commuting_term() {
        // 2×2 Heisenberg square with fields (4 bonds × XX, YY, ZZ; Z on each site), Strang.
        // `Q` = Y on one sublattice and X on the other anticommutes with every XX, YY and
        // field and commutes with every ZZ, so the greedy string leaves exactly the 4 ZZ
        // bonds kept. Hand count, ladders, no cancellation across rotations assumed: the
        // plain step writes each of its rotations once per half (a 2-site rotation 2 CNOTs);
        // the signed step adds 2 CNOTs per kept rotation of the first half and two controlled
        // `Q`s of weight 4 (2·3 + 1 = 7 each), where the controlled step adds 2 per rotation
        // of both halves.
        let mut h = crate::pauli::PauliSum::new(4);
        for (a, b) in [(0, 1), (1, 3), (3, 2), (2, 0)] {
            for p in ["X", "Y", "Z"] {
                h.add(string(&format!("{p}{a} {p}{b}")), 1.0);
            }
        }
        for (q, f) in [0.3, -0.7, 0.2, 0.5].into_iter().enumerate() {
            h.add(string(&format!("Z{q}")), f);
        }
        let (terms, sizes) = grouped(&h);
        let q = signed_string(&terms, 4, 4, None);
        assert_eq!(q.len(), 4);
        let kept: Vec<&PauliString> = terms
            .iter()
            .filter(|(p, _)| !anticommutes(&q, p))
            .map(|(p, _)| p)
            .collect();
        assert_eq!(kept.len(), 4);
        assert!(kept.iter().all(|p| p.weight() == 2 && p.x.is_empty()));
        let two = |gates: &[Gate]| gates.iter().filter(|g| g.is_two_qubit()).count();
        let program = step(&terms, Order::Second, 0.2);
        let reference = controlled_reference(&program, 4);
        let parts = |q: &FlipString| {
            flipped_step_parts(
                &terms,
                &sizes,
                Order::Second,
                0.2,
                BlockOrder::Given.into(),
                4,
                &crate::synth::default_ladder,
                None,
                Choice::Signed(q),
                None,
            )
            .expect("signs")
        };
        let (signed, none) = (parts(&q), parts(&Vec::new()));
        // One half of the step: every group once, each two-site rotation 2 CNOTs.
        let half: usize = terms
            .iter()
            .map(|(p, _)| 2 * (p.weight() as usize - 1))
            .sum();
        let kept_in_half = 4;
        assert_eq!(two(&signed.middle), 2 * half + 2 * kept_in_half + 2 * 7);
        assert_eq!(two(&none.middle), 2 * half + 2 * terms.len());
        // The controlled step: its merged middle group written once, every rotation + 2.
        assert_eq!(
            two(&reference.gates),
            program
                .iter()
                .map(|r| 2 * (r.pauli.weight() as usize - 1) + 2)
                .sum::<usize>()
        );
        assert!(two(&signed.middle) < two(&reference.gates));
        for p in [&signed, &none] {
            let mut c = Circuit::new(5, 0);
            c.extend(p.middle.iter().copied());
            assert!(unitary_distance(&reference, &c) < 1e-12);
        }
    }

    #[test]
    fn the_ising_chain_step_costs_two_half_steps_and_two_parities() {
        // 6-site transverse-field Ising chain, Strang: the halves are 5 ZZ rotations each
        // (2 CNOTs apiece), the controlled Q has weight 6: 2·5 + 1 = 11 two-qubit gates.
        let mut h = crate::pauli::PauliSum::new(6);
        for i in 0..5 {
            h.add(string(&format!("Z{i} Z{}", i + 1)), 1.0);
        }
        for i in 0..6 {
            h.add(string(&format!("X{i}")), 0.7);
        }
        let (terms, sizes) = grouped(&h);
        let line = |a: Qubit, b: Qubit| a.abs_diff(b);
        let ladder = &crate::synth::default_ladder;
        let flip = |order, block_order: BlockOrder, distance| {
            flipped_step(
                &terms,
                &sizes,
                order,
                0.1,
                block_order.into(),
                6,
                ladder,
                distance,
            )
        };
        let line = &line as &(dyn Fn(Qubit, Qubit) -> u32 + Sync);
        let (gates, _) =
            flip(Order::Second, BlockOrder::Given, Some(line)).expect("the chain flips");
        let two = gates.iter().filter(|g| g.is_two_qubit()).count();
        assert_eq!(two, 2 * (5 * 2) + 2 * 11);
        // Only the two cz gates touch the control.
        let on_control = gates.iter().filter(|g| g.qubits().contains(&6)).count();
        assert_eq!(on_control, 2);
        // Lie–Trotter is not symmetric: no flipped step.
        assert!(flip(Order::First, BlockOrder::Given, None).is_none());
        // In layers, each half's five bonds take two layers of disjoint pairs, (0,1) (2,3)
        // (4,5) then (1,2) (3,4): the ZZ rotations of the first half, in time order.
        let (gates, _) = flip(Order::Second, BlockOrder::Layers, Some(line)).expect("flips");
        let pairs: Vec<[Qubit; 2]> = gates
            .iter()
            .filter_map(|g| match *g {
                Gate::Cx(a, b) if a.max(b) < 6 => Some([a.min(b), a.max(b)]),
                _ => None,
            })
            .collect();
        // The parity tree's 2·5 CNOTs come first (a chain on the line), then the half.
        let half: Vec<[Qubit; 2]> = pairs[10..20].iter().step_by(2).copied().collect();
        assert_eq!(half, [[0, 1], [2, 3], [4, 5], [1, 2], [3, 4]], "{pairs:?}");
    }

    #[test]
    fn the_xxz_chain_flips_its_hopping_inside_controlled_zz_rotations() {
        // XXZ chain of 6 sites: the first commuting group holds the five ZZ bonds, the other
        // two the hopping pairs XX + YY on alternate bonds. No string anticommutes with all
        // three terms of a bond (XX · YY ∝ ZZ), but Z on every other site anticommutes with
        // every XX and YY: the ZZ group stays controlled, the hopping flips.
        let mut h = crate::pauli::PauliSum::new(6);
        for i in 0..5 {
            for (p, c) in [("X", 1.0), ("Y", 1.0), ("Z", 0.6)] {
                h.add(string(&format!("{p}{i} {p}{}", i + 1)), c);
            }
        }
        let (terms, sizes) = grouped(&h);
        assert_eq!(sizes, [5, 4, 6], "{terms:?}");
        let (k, q) = flip_split(&terms, &sizes, 6).expect("a partial flip");
        assert_eq!(k, 1);
        assert_eq!(flip_text(&q), "Z0 Z2 Z4");
        let ladder = &crate::synth::default_ladder;
        let (gates, _) = flipped_step(
            &terms,
            &sizes,
            Order::Second,
            0.3,
            BlockOrder::Given.into(),
            6,
            ladder,
            None,
        )
        .expect("Strang flips");
        let mut c = Circuit::new(7, 0);
        c.extend(gates.iter().copied());
        let reference = controlled_reference(&step(&terms, Order::Second, 0.3), 6);
        assert!(unitary_distance(&reference, &c) < 1e-12);
        // The control meets the five ZZ rotations at each end of the step (2 CNOTs of a
        // controlled rz apiece) and the two controlled copies of Q (1 cz each): 2·5·2 + 2.
        let on_control = gates.iter().filter(|g| g.qubits().contains(&6)).count();
        assert_eq!(on_control, 22);
        // The halves through `synth::Pairs`: each bond's XX and YY together cost 2 CNOTs
        // where two ladders cost 4 (van den Berg & Temme 2020, as `synth::Pairs` cites):
        // 5 bonds in each of the two halves, 20 fewer, and the same operator.
        let paired = Writing {
            order: BlockOrder::Given,
            pairs: true,
            groups: false,
        };
        let (fewer, _) = flipped_step(&terms, &sizes, Order::Second, 0.3, paired, 6, ladder, None)
            .expect("Strang flips");
        let two = |g: &[Gate]| g.iter().filter(|g| g.is_two_qubit()).count();
        assert_eq!(two(&gates) - two(&fewer), 20);
        let mut c = Circuit::new(7, 0);
        c.extend(fewer.iter().copied());
        assert!(unitary_distance(&reference, &c) < 1e-12);
        // Suzuki's step: each of its five Strang stages flips its hopping inside controlled
        // ZZ halves, neighbouring halves merged (6 controlled ZZ layers, 10 copies of Q).
        let flip4 = flipped_step(
            &terms,
            &sizes,
            Order::Fourth,
            0.3,
            BlockOrder::Given.into(),
            6,
            ladder,
            None,
        );
        let (gates, _) = flip4.expect("Suzuki flips");
        let mut c = Circuit::new(7, 0);
        c.extend(gates.iter().copied());
        let reference = controlled_reference(&step(&terms, Order::Fourth, 0.3), 6);
        assert!(unitary_distance(&reference, &c) < 1e-12);
        let on_control = gates.iter().filter(|g| g.qubits().contains(&6)).count();
        assert_eq!(on_control, 6 * 5 * 2 + 10);
        // In pieces: the ZZ halves at the ends, and the seam's ZZ at twice their angle.
        let parts = flipped_step_parts(
            &terms,
            &sizes,
            Order::Second,
            0.3,
            BlockOrder::Given.into(),
            6,
            ladder,
            None,
            Choice::Search,
            None,
        );
        let parts = parts.expect("Strang flips");
        let meets = |gates: &[Gate]| gates.iter().filter(|g| g.qubits().contains(&6)).count();
        assert_eq!(
            (
                meets(&parts.lead),
                meets(&parts.middle),
                meets(&parts.trail)
            ),
            (10, 2, 10)
        );
        let mut seam = Circuit::new(7, 0);
        seam.extend(parts.merged.iter().copied());
        let mut two = Circuit::new(7, 0);
        two.extend(parts.trail.iter().chain(&parts.lead).copied());
        assert!(unitary_distance(&seam, &two) < 1e-12);
        assert_eq!(parts.controlled_terms, 5);
        // Three steps with merged seams are the controlled product of three steps, and the
        // seams save the control two ZZ layers each: 3 · 22 − 2 · 10 meetings.
        let mut three = Vec::new();
        parts.steps_into(3, &mut three);
        let mut c = Circuit::new(7, 0);
        c.extend(three.iter().copied());
        let program: Vec<Rotation> = (0..3)
            .flat_map(|_| step(&terms, Order::Second, 0.3))
            .collect();
        assert!(unitary_distance(&controlled_reference(&program, 6), &c) < 1e-12);
        assert_eq!(meets(&three), 3 * 22 - 2 * 10);
        let mut none = Vec::new();
        parts.steps_into(0, &mut none);
        assert!(none.is_empty());
        // The hopping alone would not be worth a flip were it less than half the terms.
        let mut mostly_zz = h.clone();
        for i in 0..6 {
            mostly_zz.add(string(&format!("Z{i}")), 0.2);
        }
        let (t2, s2) = grouped(&mostly_zz);
        let controlled: usize = t2
            .iter()
            .filter(|(p, _)| p.to_factor_text().starts_with('Z'))
            .count();
        assert!(controlled * 2 > t2.len(), "{s2:?}");
        assert_eq!(flip_split(&t2, &s2, 6), None, "{s2:?}");
    }

    #[test]
    fn the_string_is_chosen_by_the_tree_it_needs_on_the_layout() {
        // The XXZ chain's hopping on 6 sites of a line, the control beyond site 5: the
        // particular solution Z0 Z2 Z4 gathers its parity over 2-hop edges; a string with
        // a letter on every site (Y X Y X Y X up to the choice of gauge) over 1-hop edges,
        // which costs fewer routed CNOTs (`nearest_flip_string`'s measure).
        let hopping: Vec<PauliString> = (0..5)
            .flat_map(|i| [format!("X{i} X{}", i + 1), format!("Y{i} Y{}", i + 1)])
            .map(|t| string(&t))
            .collect();
        let line = |a: Qubit, b: Qubit| a.abs_diff(b);
        let line = &line as &(dyn Fn(Qubit, Qubit) -> u32 + Sync);
        let plain = nearest_flip_string(&hopping, 6, 6, None).unwrap();
        assert_eq!(flip_text(&plain), "Z0 Z2 Z4");
        let near = nearest_flip_string(&hopping, 6, 6, Some(line)).unwrap();
        assert!(hopping.iter().all(|p| anticommutes(&near, p)), "{near:?}");
        assert_eq!(near.len(), 6, "{}", flip_text(&near));
        let support: Vec<Qubit> = near.iter().map(|&(k, _)| k).collect();
        let (tree, root) = parity_tree(&support, 6, Some(line));
        assert_eq!(root, 5);
        assert!(tree.iter().all(|&(c, p)| line(c, p) == 1), "{tree:?}");
        // Without the hopping's freedom (every site's letter forced) the choice changes
        // nothing: the transverse-field Ising chain keeps its particular solution.
        let mut ising: Vec<PauliString> = (0..5)
            .map(|i| string(&format!("Z{i} Z{}", i + 1)))
            .collect();
        ising.extend((0..6).map(|i| string(&format!("X{i}"))));
        assert_eq!(
            nearest_flip_string(&ising, 6, 6, Some(line)),
            nearest_flip_string(&ising, 6, 6, None)
        );
    }
}
