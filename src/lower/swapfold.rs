//! A SWAP beside an entangler on its own pair: four two-qubit gates where two do the work.
//!
//! In: a circuit in native gates (one-qubit gates and `cx` or `cz`; measurements allowed), as
//! the schedule leaves it, and its [`NativeSet`]. Out: the same unitary, global phase
//! included, in which every *window* of four consecutive entanglers on one pair (only
//! one-qubit gates on the pair's two qubits between them) whose last three or first three,
//! with the one-qubit gates inside, make a SWAP up to one-qubit gates, is written with two
//! entanglers; and the number of two-qubit gates saved. Invariant: only the window's gates
//! are rewritten, in place of its last gate; gates on other qubits and measurements do not
//! move. Each rewrite is checked against the window's 4×4 unitary before it is kept.
//!
//! ## Where the pattern comes from
//!
//! A routed SWAP is lowered to three CNOTs, and `lower::slide_through_swaps` orients it so
//! that its outer CNOT cancels a CNOT on the same pair beside it. The depth schedule
//! (`circuit::schedule::shallower`) runs after the lowering: it moves gates that commute with
//! an entangler out from between it and a SWAP, so `cx(a, b) · rz(θ)_b · swap(a, b)` appears
//! only then (in the written H4 campaign on a 3×3 grid, 17 such windows in 1475 two-qubit
//! gates), with a rotation between that keeps the CNOTs from cancelling.
//!
//! ## The identity
//!
//! Write `S` for the three entanglers with the one-qubit gates inside them. If
//! `SWAP · S = P ⊗ Q` (a product: `S` is a SWAP up to the one-qubit gates `P`, `Q` before it),
//! and `A ⊗ B` are the one-qubit gates between `S` and the fourth entangler `E`, then, since
//! `SWAP · (X ⊗ Y) = (Y ⊗ X) · SWAP`,
//!
//! ```text
//! S · (A ⊗ B) · E = (QB ⊗ PA) · SWAP · E        (E first, then S)
//! E · (A ⊗ B) · S = E · SWAP · (BP ⊗ AQ)        (S first, then E)
//! ```
//!
//! and `SWAP · CX(c→t) = CX(c→t) · CX(t→c)`, `CX(c→t) · SWAP = CX(t→c) · CX(c→t)` (write the
//! SWAP as three CNOTs starting or ending with `CX(c→t)`; two cancel), while for
//! `CZ = (I ⊗ H) · CX(a→b) · (I ⊗ H)` the Hadamards pass the SWAP onto the other qubit. Two
//! CNOTs, so two entanglers of the native set, for four. This is the textbook CNOT form of the
//! SWAP (Nielsen & Chuang, "Quantum Computation and Quantum Information" (2000), Fig. 1.7;
//! from memory); that a CNOT followed by a SWAP needs two CNOTs and no fewer follows from the
//! two-qubit CNOT counts of Shende, Markov & Bullock, Phys. Rev. A 69, 062321 (2004) (cited
//! from memory).
//!
//! `P ⊗ Q` is read off the 4×4 matrix `N = SWAP · S` by its operator-Schmidt form: `N` is a
//! product exactly when its 2×2 blocks are multiples of one matrix. The rewrite's own unitary
//! is then compared with the window's (tolerance [`TOLERANCE`], global phase included); a
//! mismatch keeps the window as it is.
//!
//! Cost: one pass; a 4×4 product per window of four entanglers on one pair, which after the
//! lowering's cancellations are rare.

use super::pairs::{hadamard, identity};
use super::{euler, is_clifford};
use crate::circuit::{mat2_mul, Circuit, Gate, Mat2, Qubit};
use crate::device::{Entangler, NativeSet};
use num_complex::Complex64;

/// Largest entry difference between a window and its rewrite that still counts as equal.
pub const TOLERANCE: f64 = 1e-10;

const NONE: usize = usize::MAX;

type Mat4 = [[Complex64; 4]; 4];

/// An open block of one pair: the pair, the gates in it (entanglers on the pair, one-qubit
/// gates on its qubits since the first) and the positions of the entanglers among them.
type Block = ((Qubit, Qubit), Vec<usize>, Vec<usize>);

fn zero4() -> Mat4 {
    [[Complex64::new(0.0, 0.0); 4]; 4]
}

fn eye4() -> Mat4 {
    let mut m = zero4();
    for (i, row) in m.iter_mut().enumerate() {
        row[i] = Complex64::new(1.0, 0.0);
    }
    m
}

fn mul4(a: &Mat4, b: &Mat4) -> Mat4 {
    let mut m = zero4();
    for i in 0..4 {
        for j in 0..4 {
            m[i][j] = (0..4).map(|k| a[i][k] * b[k][j]).sum();
        }
    }
    m
}

/// `x ⊗ y`: `x` on the first qubit of the pair (the high bit of the index).
fn kron(x: &Mat2, y: &Mat2) -> Mat4 {
    let mut m = zero4();
    for i in 0..4 {
        for j in 0..4 {
            m[i][j] = x[i / 2][j / 2] * y[i % 2][j % 2];
        }
    }
    m
}

/// The permutation matrix that sends basis index `i` to `p[i]`.
fn permutation(p: [usize; 4]) -> Mat4 {
    let mut m = zero4();
    for (i, &j) in p.iter().enumerate() {
        m[j][i] = Complex64::new(1.0, 0.0);
    }
    m
}

fn swap4() -> Mat4 {
    permutation([0, 2, 1, 3])
}

/// The 4×4 matrix of a gate on the pair `(a, b)`.
fn gate4(g: &Gate, a: Qubit) -> Mat4 {
    let i = identity();
    match *g {
        Gate::Cx(c, _) if c == a => permutation([0, 1, 3, 2]),
        Gate::Cx(..) => permutation([0, 3, 2, 1]),
        Gate::Cz(..) => {
            let mut m = eye4();
            m[3][3] = Complex64::new(-1.0, 0.0);
            m
        }
        _ => {
            let m = g
                .matrix1()
                .expect("only one-qubit gates and entanglers in a window");
            if g.qubits()[0] == a {
                kron(&m, &i)
            } else {
                kron(&i, &m)
            }
        }
    }
}

/// The product of `gates` (first gate rightmost) on the pair `(a, b)`.
fn product4(gates: &[Gate], a: Qubit) -> Mat4 {
    gates.iter().fold(eye4(), |m, g| mul4(&gate4(g, a), &m))
}

/// `(P, Q)` with `n = P ⊗ Q`, or `None` when `n` is not a product of two unitaries.
fn factor(n: &Mat4) -> Option<(Mat2, Mat2)> {
    // Block (k, l) of `n` is `Q[k][l] · P`, with the rows and columns of `P` the high bits.
    let block = |k: usize, l: usize| -> Mat2 {
        let mut m = [[Complex64::new(0.0, 0.0); 2]; 2];
        for (i, row) in m.iter_mut().enumerate() {
            for (j, e) in row.iter_mut().enumerate() {
                *e = n[2 * i + k][2 * j + l];
            }
        }
        m
    };
    let norm = |m: &Mat2| m.iter().flatten().map(|e| e.norm_sqr()).sum::<f64>();
    let (k, l) = (0..4)
        .map(|s| (s / 2, s % 2))
        .max_by(|x, y| norm(&block(x.0, x.1)).total_cmp(&norm(&block(y.0, y.1))))
        .expect("four blocks");
    let big = block(k, l);
    let scale = (norm(&big) / 2.0).sqrt();
    if scale < 1e-6 {
        return None;
    }
    let p = big.map(|row| row.map(|e| e / scale));
    // Q[k'][l'] = ⟨P, block(k', l')⟩ / 2, since tr(P†P) = 2.
    let mut q = [[Complex64::new(0.0, 0.0); 2]; 2];
    for (kk, row) in q.iter_mut().enumerate() {
        for (ll, e) in row.iter_mut().enumerate() {
            let b = block(kk, ll);
            *e = (0..2)
                .flat_map(|i| (0..2).map(move |j| (i, j)))
                .map(|(i, j)| p[i][j].conj() * b[i][j])
                .sum::<Complex64>()
                / 2.0;
        }
    }
    let rebuilt = kron(&p, &q);
    let close = (0..4).all(|i| (0..4).all(|j| (rebuilt[i][j] - n[i][j]).norm() < TOLERANCE));
    close.then_some((p, q))
}

/// One piece of a rewrite before the one-qubit factors are merged and lowered.
enum Piece {
    One(Qubit, Mat2),
    Cnot(Qubit, Qubit),
}

/// `SWAP · E` (`swap_first` false: `E` first, then the SWAP) or `E · SWAP` (`swap_first`:
/// the SWAP first) as CNOTs and Hadamards, in time order.
fn entangler_and_swap(e: &Gate, a: Qubit, b: Qubit, swap_first: bool) -> Vec<Piece> {
    let h = hadamard();
    match (*e, swap_first) {
        // SWAP · CX(c→t) = CX(c→t) · CX(t→c): CX(t→c) runs first.
        (Gate::Cx(c, t), false) => vec![Piece::Cnot(t, c), Piece::Cnot(c, t)],
        // CX(c→t) · SWAP = CX(t→c) · CX(c→t): CX(c→t) runs first.
        (Gate::Cx(c, t), true) => vec![Piece::Cnot(c, t), Piece::Cnot(t, c)],
        // SWAP · CZ = H_a · CX(a→b) · CX(b→a) · H_b.
        (Gate::Cz(..), false) => vec![
            Piece::One(b, h),
            Piece::Cnot(b, a),
            Piece::Cnot(a, b),
            Piece::One(a, h),
        ],
        // CZ · SWAP = H_b · CX(b→a) · CX(a→b) · H_a.
        (Gate::Cz(..), true) => vec![
            Piece::One(a, h),
            Piece::Cnot(a, b),
            Piece::Cnot(b, a),
            Piece::One(b, h),
        ],
        _ => unreachable!("windows hold entanglers only"),
    }
}

/// The native gates of `pieces` (one-qubit factors merged per qubit between entanglers) and
/// the global phase their Euler forms leave.
fn lower_pieces(pieces: Vec<Piece>, native: &NativeSet) -> (Vec<Gate>, f64) {
    let mut out = Vec::new();
    let mut phase = 0.0;
    let mut pending: Vec<(Qubit, Mat2)> = Vec::new();
    let flush = |pending: &mut Vec<(Qubit, Mat2)>, out: &mut Vec<Gate>, phase: &mut f64| {
        for (q, m) in pending.drain(..) {
            let (gs, alpha) = euler::decompose(&m, q, native.one_qubit);
            *phase += alpha;
            out.extend(gs);
        }
    };
    let one = |pending: &mut Vec<(Qubit, Mat2)>, q: Qubit, m: Mat2| match pending
        .iter_mut()
        .find(|(p, _)| *p == q)
    {
        Some((_, old)) => *old = mat2_mul(&m, old),
        None => pending.push((q, m)),
    };
    for piece in pieces {
        match piece {
            Piece::One(q, m) => one(&mut pending, q, m),
            Piece::Cnot(c, t) => match native.two_qubit {
                Entangler::Cx => {
                    flush(&mut pending, &mut out, &mut phase);
                    out.push(Gate::Cx(c, t));
                }
                Entangler::Cz => {
                    one(&mut pending, t, hadamard());
                    flush(&mut pending, &mut out, &mut phase);
                    out.push(Gate::Cz(c, t));
                    one(&mut pending, t, hadamard());
                }
            },
        }
    }
    flush(&mut pending, &mut out, &mut phase);
    (out, phase)
}

/// The product of the one-qubit gates among `gates` that act on `q` (first rightmost), or
/// `None` when the lowering kept them as separate runs: two rotations about different axes,
/// which one gate would write as an Euler product the tableau check cannot read back as two
/// rotations (`lower::fusable`).
fn run_on(gates: &[Gate], q: Qubit) -> Option<Mat2> {
    let mut p: Option<Mat2> = None;
    for g in gates.iter().filter(|g| g.qubits()[0] == q) {
        let m = g.matrix1().expect("one-qubit gates between");
        p = Some(match p {
            Some(p) if !super::fusable(&p, &m) => return None,
            Some(p) => mat2_mul(&m, &p),
            None => m,
        });
    }
    Some(p.unwrap_or_else(identity))
}

/// The rewrite of the window `gates` (four entanglers on `(a, b)` and one-qubit gates on the
/// pair between them), or `None` when neither end's three entanglers make a SWAP.
fn rewrite(gates: &[Gate], a: Qubit, b: Qubit, native: &NativeSet) -> Option<(Vec<Gate>, f64)> {
    let ents: Vec<usize> = (0..gates.len())
        .filter(|&i| gates[i].is_two_qubit())
        .collect();
    debug_assert_eq!(ents.len(), 4);
    let window = product4(gates, a);
    // E first (the SWAP's three after it), then the SWAP first (E after it).
    for swap_first in [false, true] {
        let (s, mid, e) = if swap_first {
            (
                &gates[..=ents[2]],
                &gates[ents[2] + 1..ents[3]],
                &gates[ents[3]],
            )
        } else {
            (
                &gates[ents[1]..],
                &gates[ents[0] + 1..ents[1]],
                &gates[ents[0]],
            )
        };
        let Some((p, q)) = factor(&mul4(&swap4(), &product4(s, a))) else {
            continue;
        };
        // Only a SWAP with Clifford gates around it: then the one-qubit gates written below
        // hold the rotations of the runs between, no more, and a rotation read back by the
        // tableau check stays one rotation (a non-Clifford `P` would fuse with a run's
        // rotation into one gate of two rotations about different axes).
        if !is_clifford(&p) || !is_clifford(&q) {
            continue;
        }
        let (Some(ra), Some(rb)) = (run_on(mid, a), run_on(mid, b)) else {
            continue;
        };
        let mut pieces = Vec::new();
        if swap_first {
            pieces.push(Piece::One(a, mat2_mul(&rb, &p)));
            pieces.push(Piece::One(b, mat2_mul(&ra, &q)));
            pieces.extend(entangler_and_swap(e, a, b, true));
        } else {
            pieces.extend(entangler_and_swap(e, a, b, false));
            pieces.push(Piece::One(a, mat2_mul(&q, &rb)));
            pieces.push(Piece::One(b, mat2_mul(&p, &ra)));
        }
        let (out, phase) = lower_pieces(pieces, native);
        let mut got = product4(&out, a);
        let w = Complex64::from_polar(1.0, phase);
        got.iter_mut().flatten().for_each(|e| *e *= w);
        let equal = (0..4).all(|i| (0..4).all(|j| (got[i][j] - window[i][j]).norm() < TOLERANCE));
        if equal {
            return Some((out, phase));
        }
    }
    None
}

/// Rewrites every window of the module essay; returns the two-qubit gates saved (two per
/// window). Windows do not overlap: after a rewrite the pair starts afresh after it.
pub fn fold_swaps(circuit: &mut Circuit, native: &NativeSet) -> usize {
    let n = circuit.num_qubits;
    let gates = std::mem::take(&mut circuit.gates);
    // Per qubit, the open block (an index into `blocks`) of one pair it belongs to.
    let mut block_of = vec![NONE; n];
    // A block: its pair and the gates in it (entanglers on the pair, one-qubit gates on its
    // qubits since the first), with the positions of the entanglers among them.
    let mut blocks: Vec<Block> = Vec::new();
    let mut dropped = vec![false; gates.len()];
    let mut replaced: Vec<(usize, Vec<Gate>)> = Vec::new();
    let mut phase = 0.0;
    let mut saved = 0;
    let close = |q: Qubit, block_of: &mut Vec<usize>, blocks: &[Block]| {
        let bi = block_of[q as usize];
        if bi != NONE {
            let (x, y) = blocks[bi].0;
            block_of[x as usize] = NONE;
            block_of[y as usize] = NONE;
        }
    };
    for (k, g) in gates.iter().enumerate() {
        let qs = g.qubits();
        if g.matrix1().is_some() {
            let bi = block_of[qs[0] as usize];
            if bi != NONE {
                blocks[bi].1.push(k);
            }
            continue;
        }
        if !matches!(g, Gate::Cx(..) | Gate::Cz(..)) {
            for &q in &qs {
                close(q, &mut block_of, &blocks);
            }
            continue;
        }
        let (x, y) = (qs[0], qs[1]);
        let bi = block_of[x as usize];
        if bi == NONE || block_of[y as usize] != bi {
            close(x, &mut block_of, &blocks);
            close(y, &mut block_of, &blocks);
            blocks.push(((x.min(y), x.max(y)), vec![k], vec![0]));
            block_of[x as usize] = blocks.len() - 1;
            block_of[y as usize] = blocks.len() - 1;
            continue;
        }
        let ((a, b), items, ents) = &mut blocks[bi];
        ents.push(items.len());
        items.push(k);
        if ents.len() < 4 {
            continue;
        }
        let from = ents[ents.len() - 4];
        let window: Vec<Gate> = items[from..].iter().map(|&i| gates[i]).collect();
        if let Some((out, alpha)) = rewrite(&window, *a, *b, native) {
            for &i in &items[from..] {
                dropped[i] = true;
            }
            saved += window.iter().filter(|g| g.is_two_qubit()).count()
                - out.iter().filter(|g| g.is_two_qubit()).count();
            phase += alpha;
            replaced.push((k, out));
            let (a, b) = (*a, *b);
            block_of[a as usize] = NONE;
            block_of[b as usize] = NONE;
        }
    }
    super::splice(circuit, gates, replaced, &dropped, phase);
    saved
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sim::unitary_distance;

    fn two_qubit(c: &Circuit) -> usize {
        c.gates.iter().filter(|g| g.is_two_qubit()).count()
    }

    fn lowered(c: &Circuit, native: &NativeSet) -> Circuit {
        let mut low = super::super::translate_two_qubit(c, native.two_qubit);
        super::super::fuse_single_qubit(&mut low, native.one_qubit);
        low
    }

    /// Whether the tableau check reads `a` and `b` as the same rotations and Clifford (what
    /// `verify --method tableau` compares; it reads one rotation per one-qubit run).
    fn same_tableau_form(a: &Circuit, b: &Circuit) -> bool {
        use crate::tableau::{canonicalise_into, normal};
        let form = |c: &Circuit| {
            let mut builder = normal::Builder::new();
            let tail = canonicalise_into(c, c.num_qubits, &mut builder).unwrap();
            (builder.finish(), tail.clifford)
        };
        let ((fa, ca), (fb, cb)) = (form(a), form(b));
        normal::differences(&fa, &fb).is_empty() && ca == cb
    }

    #[test]
    fn a_window_whose_run_holds_two_rotations_stays() {
        // cx(0, 1) · (rz(0.05) then rx(0.07) on 1) · swap(0, 1): the two rotations are about
        // different axes, so the lowering keeps them as two runs; folding would fuse them into
        // one gate the tableau check reads as other rotations. (Seen on a 120-qubit chain on
        // the heavy hexagon, where `verify --method tableau` then refused the campaign.)
        for native in native_sets() {
            let mut c = Circuit::new(2, 0);
            c.extend([
                Gate::Cx(0, 1),
                Gate::Rz(1, 0.05),
                Gate::Rx(1, 0.07),
                Gate::Swap(0, 1),
            ]);
            let low = lowered(&c, &native);
            let mut out = low.clone();
            assert_eq!(fold_swaps(&mut out, &native), 0, "{:?}", native.names);
            // One rotation between folds, and the tableau check still reads it.
            let mut c = Circuit::new(2, 0);
            c.extend([Gate::Cx(0, 1), Gate::Rz(1, 0.05), Gate::Swap(0, 1)]);
            let low = lowered(&c, &native);
            let mut out = low.clone();
            assert_eq!(fold_swaps(&mut out, &native), 2, "{:?}", native.names);
            assert!(same_tableau_form(&low, &out), "{:?}", native.names);
        }
    }

    fn native_sets() -> [NativeSet; 2] {
        [
            NativeSet::from_names(&["rz", "sx", "x", "cx"]).unwrap(),
            NativeSet::from_names(&["rz", "ry", "cz"]).unwrap(),
        ]
    }

    #[test]
    fn a_cnot_a_rotation_and_a_swap_on_one_pair_take_two_entanglers() {
        // The window as the schedule leaves it in a written H4 campaign on a 3×3 grid:
        // cx(2, 5) · rz(θ) on 5 · swap(2, 5), and its mirror image (swap first). A rotation
        // on the CNOT's target keeps the CNOTs from cancelling; the window takes two.
        for native in native_sets() {
            for swap_first in [false, true] {
                let mut c = Circuit::new(3, 0);
                let mut body = vec![Gate::Cx(0, 2), Gate::Rz(2, 0.0078), Gate::Swap(0, 2)];
                if swap_first {
                    body.reverse();
                }
                c.extend([Gate::H(1), Gate::Cx(1, 0)]);
                c.extend(body);
                c.extend([Gate::Rz(0, 0.3), Gate::Cx(0, 1)]);
                let low = lowered(&c, &native);
                assert_eq!(two_qubit(&low), 6, "{:?}", native.names);
                let mut out = low.clone();
                assert_eq!(fold_swaps(&mut out, &native), 2, "{:?}", native.names);
                assert_eq!(two_qubit(&out), 4);
                assert!(
                    unitary_distance(&c, &out) < 1e-9,
                    "{:?} {swap_first}",
                    native.names
                );
                assert!(same_tableau_form(&low, &out), "{:?}", native.names);
                let rules = crate::circuit::verify::Rules {
                    coupled: None,
                    native: Some(&native.names),
                };
                crate::circuit::verify::verify_ir(&out, &rules).unwrap();
            }
        }
    }

    #[test]
    fn windows_without_a_swap_stay() {
        // Four CNOTs on one pair with rotations between, none three of them a SWAP; and a
        // SWAP whose neighbour on the pair is separated by a gate on another pair.
        for native in native_sets() {
            let mut c = Circuit::new(3, 0);
            c.extend([
                Gate::Cx(0, 1),
                Gate::Rz(1, 0.2),
                Gate::Cx(0, 1),
                Gate::Rx(0, 0.4),
                Gate::Cx(1, 0),
                Gate::Rz(0, 0.1),
                Gate::Cx(0, 1),
            ]);
            let mut low = lowered(&c, &native);
            assert_eq!(fold_swaps(&mut low, &native), 0, "{:?}", native.names);
            let mut c = Circuit::new(3, 0);
            c.extend([Gate::Cx(0, 1), Gate::Cx(1, 2), Gate::Swap(0, 1)]);
            let mut low = lowered(&c, &native);
            assert_eq!(fold_swaps(&mut low, &native), 0, "{:?}", native.names);
        }
    }

    #[test]
    fn random_circuits_with_swaps_keep_the_unitary_and_lose_what_they_report() {
        // Random circuits of CNOTs, SWAPs and rotations on three qubits, lowered to each
        // native set: the unitary is kept (1e-9, global phase included), the output is
        // native, the two-qubit count falls by the number reported, and windows are found.
        use rand::{Rng, SeedableRng};
        let mut folded = 0;
        for seed in 0..300u64 {
            let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
            let mut c = Circuit::new(3, 0);
            for _ in 0..24 {
                let a = rng.gen_range(0..3u32);
                let b = (a + rng.gen_range(1..3u32)) % 3;
                c.push(match rng.gen_range(0..9) {
                    0..=2 => Gate::Cx(a, b),
                    3 => Gate::Swap(a, b),
                    4 => Gate::H(a),
                    5 => Gate::Sx(a),
                    6 => Gate::Rx(a, rng.gen_range(-0.3..0.3)),
                    _ => Gate::Rz(a, rng.gen_range(-0.3..0.3)),
                });
            }
            for native in native_sets() {
                let low = lowered(&c, &native);
                let mut out = low.clone();
                let saved = fold_swaps(&mut out, &native);
                assert_eq!(two_qubit(&out) + saved, two_qubit(&low), "seed {seed}");
                assert!(
                    unitary_distance(&low, &out) < 1e-9,
                    "seed {seed} {:?}",
                    native.names
                );
                assert!(
                    same_tableau_form(&low, &out),
                    "seed {seed} {:?}",
                    native.names
                );
                let rules = crate::circuit::verify::Rules {
                    coupled: None,
                    native: Some(&native.names),
                };
                crate::circuit::verify::verify_ir(&out, &rules).unwrap();
                folded += saved;
            }
        }
        assert!(folded > 50, "only {folded} two-qubit gates folded");
    }
}
