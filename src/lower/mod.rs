//! Lowering to a device's native gates: two-qubit translation, one-qubit fusion, cancellation.
//!
//! In: a routed circuit (physical qubits, any IR gate, `swap` allowed) and a [`NativeSet`]. Out:
//! the same unitary, global phase included, written only with native gates, as a plain
//! [`Circuit`] (lowering does not see the coupling graph; the routing passes check its result
//! into a [`crate::route::DeviceCircuit`]). Passes, each a free function:
//!
//! 0. [`slide_through_swaps`]: one-qubit gates between a `swap` and a CNOT on its pair move to
//!    the other side of the swap (on the other qubit), so that the two meet;
//! 1. [`translate_two_qubit`]: `swap` becomes three CNOTs (oriented to cancel against a
//!    neighbouring CNOT on the same pair when there is one); `cx` and `cz` are translated into
//!    each other with Hadamards on the target (`cx = (I⊗H)·cz·(I⊗H)`);
//! 2. [`fuse_and_cancel`], one sweep: every maximal run of one-qubit gates on a qubit becomes
//!    one 2×2 matrix, written back in the native basis by [`euler::decompose`] (identities
//!    vanish, their phase goes to `global_phase`; a run is split where two rotations about
//!    different axes would meet, so each holds the rotations the tableau check reads back);
//!    adjacent inverse pairs (`cx cx`, `cz cz`) vanish when the runs between them are phases,
//!    and the runs they separated fuse again in the same sweep ([`fuse_single_qubit`] is the
//!    fusion alone);
//! 3. [`crate::circuit::cancel::cancel_inverses`] as a check that nothing is left, and
//!    [`cancel_commuting`]: a CNOT (or `cz`) cancels an identical earlier one when everything
//!    between them on its qubits commutes with it; if either removes gates, step 2 runs again.
//!
//! Invariant kept: `unitary(out) = unitary(in)` exactly (to rounding); measurements stay where
//! they were relative to the gates on their qubit.

pub mod euler;
pub mod pairs;
pub mod swapfold;

use crate::circuit::cancel::cancel_inverses;
use crate::circuit::{mat2_adjoint, mat2_mul, Circuit, Gate, Mat2, Qubit};
use crate::device::{Entangler, NativeSet, OneQubitBasis};

/// Writes `cx`, `cz` and `swap` with the native entangler (one-qubit gates are left as they are).
pub fn translate_two_qubit(c: &Circuit, e: Entangler) -> Circuit {
    let mut out = Circuit {
        gates: Vec::with_capacity(c.gates.len() * 2),
        ..Circuit::new(c.num_qubits, c.num_clbits)
    };
    out.global_phase = c.global_phase;
    // Index into `c.gates` of the last input gate touching each qubit.
    let mut last: Vec<Option<usize>> = vec![None; c.num_qubits];
    let push = |out: &mut Circuit, g: Gate| out.gates.push(g);
    let push_cx = |out: &mut Circuit, a: Qubit, b: Qubit| match e {
        Entangler::Cx => push(out, Gate::Cx(a, b)),
        Entangler::Cz => {
            push(out, Gate::H(b));
            push(out, Gate::Cz(a, b));
            push(out, Gate::H(b));
        }
    };
    for (i, g) in c.gates.iter().enumerate() {
        match *g {
            Gate::Cx(a, b) => push_cx(&mut out, a, b),
            Gate::Cz(a, b) => match e {
                Entangler::Cz => push(&mut out, *g),
                Entangler::Cx => {
                    push(&mut out, Gate::H(b));
                    push(&mut out, Gate::Cx(a, b));
                    push(&mut out, Gate::H(b));
                }
            },
            Gate::Swap(a, b) => {
                let (p, q) = swap_orientation(c, i, &last, a, b);
                push_cx(&mut out, p, q);
                push_cx(&mut out, q, p);
                push_cx(&mut out, p, q);
            }
            _ => push(&mut out, *g),
        }
        for q in g.qubits() {
            last[q as usize] = Some(i);
        }
    }
    out
}

/// Moves one-qubit gates across a `swap` (relabelled: a gate on `a` before `swap(a,b)` is the
/// same gate on `b` after it) wherever that leaves the swap directly beside a CNOT on its own
/// pair, so that [`translate_two_qubit`] orients the swap to start or end with that CNOT and
/// the pair cancels: `cx(p,q) · u · swap(p,q)` costs 2 CNOTs instead of 4. This is the usual
/// case of a routed Hadamard test: the ancilla's controlled `rz` ends with `cx(anc, t)`, the
/// basis change of the next rotation sits on `t`, and then the ancilla moves on over `t`.
/// The gates are only relocated, so the unitary is kept exactly; gates on other qubits and
/// measurements never move. Gates never slide onto a side where the swap already touches a
/// CNOT or swap on its own pair (that pair could cancel). Linear in the number of gates.
pub fn slide_through_swaps(c: &Circuit) -> Circuit {
    let n = c.num_qubits;
    // Gates slide only onto a side of the swap where nothing on its pair would cancel with it.
    let mut reversed = c.gates.clone();
    reversed.reverse();
    let mut keep = glued(&reversed, n);
    keep.reverse();
    let mut first = slide_pass(&c.gates, n, &keep);
    let mut keep = glued(&first, n);
    // The same pass on the reversed list moves the gates after a swap to before it, where a
    // CNOT on its pair follows.
    first.reverse();
    keep.reverse();
    let mut gates = slide_pass(&first, n, &keep);
    gates.reverse();
    Circuit {
        num_qubits: c.num_qubits,
        num_clbits: c.num_clbits,
        gates,
        global_phase: c.global_phase,
    }
}

/// For each gate: whether it is a swap that must keep its place against what comes before it,
/// because one-qubit gates slid in there could break a cancellation: the previous gate of more
/// than one qubit on either of its qubits is a swap (a `swap · u · swap` pair cancels when `u`
/// multiplies to a phase), or on both qubits the same CNOT on its pair, nothing between.
fn glued(gates: &[Gate], n: usize) -> Vec<bool> {
    let mut out = vec![false; gates.len()];
    // The last gate of more than one qubit on each qubit, and whether one-qubit gates followed.
    let mut last: Vec<Option<(usize, bool)>> = vec![None; n];
    for (i, g) in gates.iter().enumerate() {
        if g.matrix1().is_some() {
            if let Some((_, between)) = &mut last[g.qubits()[0] as usize] {
                *between = true;
            }
            continue;
        }
        if let Gate::Swap(a, b) = *g {
            let (pa, pb) = (last[a as usize], last[b as usize]);
            let swap_before = [pa, pb]
                .iter()
                .flatten()
                .any(|&(x, _)| matches!(gates[x], Gate::Swap(..)));
            let cx_beside = matches!(
                (pa, pb),
                (Some((x, false)), Some((y, false))) if x == y && on_pair(&gates[x], a, b)
            );
            out[i] = swap_before || cx_beside;
        }
        for q in g.qubits() {
            last[q as usize] = Some((i, false));
        }
    }
    out
}

/// A CNOT or a swap on the pair `{a, b}`.
fn on_pair(g: &Gate, a: Qubit, b: Qubit) -> bool {
    matches!(*g, Gate::Cx(x, y) | Gate::Swap(x, y) if (x == a && y == b) || (x == b && y == a))
}

fn cx_on_pair(g: &Gate, a: Qubit, b: Qubit) -> bool {
    matches!(*g, Gate::Cx(x, y) if (x == a && y == b) || (x == b && y == a))
}

/// One direction of [`slide_through_swaps`]: the one-qubit gates waiting on the qubits of a
/// swap whose last other gate on both qubits is one CNOT on its pair go past the swap, unless
/// `keep[i]` holds for the swap at `i`.
fn slide_pass(gates: &[Gate], n: usize, keep: &[bool]) -> Vec<Gate> {
    let mut out = Vec::with_capacity(gates.len());
    let mut waiting: Vec<Vec<Gate>> = vec![Vec::new(); n];
    // Index into `out` of the last gate on each qubit that is not a waiting one-qubit gate.
    let mut last: Vec<Option<usize>> = vec![None; n];
    for (i, g) in gates.iter().enumerate() {
        if g.matrix1().is_some() {
            waiting[g.qubits()[0] as usize].push(*g);
            continue;
        }
        if let Gate::Swap(a, b) = *g {
            let (ai, bi) = (a as usize, b as usize);
            let beside = matches!(
                (last[ai], last[bi]),
                (Some(x), Some(y)) if x == y && cx_on_pair(&out[x], a, b)
            );
            if beside && !keep[i] && (!waiting[ai].is_empty() || !waiting[bi].is_empty()) {
                let swap = |q: Qubit| if q == a { b } else { a };
                let on_a = std::mem::take(&mut waiting[ai]);
                let on_b = std::mem::take(&mut waiting[bi]);
                waiting[bi] = on_a.iter().map(|u| u.map_qubits(swap)).collect();
                waiting[ai] = on_b.iter().map(|u| u.map_qubits(swap)).collect();
                last[ai] = Some(out.len());
                last[bi] = Some(out.len());
                out.push(*g);
                continue;
            }
        }
        for q in g.qubits() {
            out.append(&mut waiting[q as usize]);
        }
        for q in g.qubits() {
            last[q as usize] = Some(out.len());
        }
        out.push(*g);
    }
    for w in &mut waiting {
        out.append(w);
    }
    out
}

/// `swap(a,b) = cx(p,q)·cx(q,p)·cx(p,q)` for either orientation; pick the one whose outer CNOTs
/// match the CNOT just before or just after it on the same pair (in the input, so that a CNOT
/// already written as `h cz h` still counts), or failing that, one that only commuting gates
/// separate from it (which [`cancel_commuting`] then removes).
fn swap_orientation(
    c: &Circuit,
    i: usize,
    last: &[Option<usize>],
    a: Qubit,
    b: Qubit,
) -> (Qubit, Qubit) {
    let same_pair = |x: Qubit, y: Qubit| (x == a && y == b) || (x == b && y == a);
    if let (Some(i), Some(j)) = (last[a as usize], last[b as usize]) {
        if i == j {
            if let Gate::Cx(x, y) = c.gates[i] {
                if same_pair(x, y) {
                    return (x, y);
                }
            }
        }
    }
    for g in &c.gates[i + 1..] {
        let qs = g.qubits();
        if qs.contains(&a) || qs.contains(&b) {
            if let Gate::Cx(x, y) = *g {
                if same_pair(x, y) {
                    return (x, y);
                }
            }
            break;
        }
    }
    // A CNOT on the pair that only gates commuting with it separate from the swap (say a
    // ladder's `cx(s, b)` after the ancilla's `cx(a, b)`): `cancel_commuting` removes it
    // against the swap's outer CNOT when that has the same orientation.
    for (x, y) in [(a, b), (b, a)] {
        let p = Gate::Cx(x, y);
        if reaches_through(c.gates[..i].iter().rev(), &p)
            || reaches_through(c.gates[i + 1..].iter(), &p)
        {
            return (x, y);
        }
    }
    (a, b)
}

/// Whether walking `gates` (at most [`COMMUTE_WINDOW`] of them) meets `p` (a `cx`) before any
/// gate on its qubits that does not commute with it.
fn reaches_through<'a>(gates: impl Iterator<Item = &'a Gate>, p: &Gate) -> bool {
    let qs = p.qubits();
    for g in gates.take(COMMUTE_WINDOW) {
        let gq = g.qubits();
        if !gq.iter().any(|q| qs.contains(q)) {
            continue;
        }
        if same_self_inverse(g, p) {
            return true;
        }
        let commutes = match g.matrix1() {
            Some(m) => commutes_with_pauli(&m, role(p, gq[0]).expect("touches p")),
            None => g.is_two_qubit() && two_qubit_commute(g, p),
        };
        if !commutes {
            return false;
        }
    }
    false
}

/// Whether the one-qubit matrix `m` is a Clifford gate (up to a phase): it maps `X` and `Z`
/// to `±X`, `±Y` or `±Z`. Tolerance 1e-9 on the Pauli coefficients.
fn is_clifford(m: &Mat2) -> bool {
    use num_complex::Complex64 as C;
    let (o, i) = (C::new(0.0, 0.0), C::new(1.0, 0.0));
    [[[o, i], [i, o]], [[i, o], [o, -i]]]
        .iter()
        .all(|p: &Mat2| {
            let img = mat2_mul(&mat2_mul(m, p), &mat2_adjoint(m));
            // img = x·X + y·Y + z·Z (Hermitian, traceless).
            let (x, y, z) = (img[0][1].re, -img[0][1].im, img[0][0].re);
            [x, y, z].iter().any(|c| (c.abs() - 1.0).abs() < 1e-9)
        })
}

/// Writes `gates` back into `circuit` with the peephole rewrites of [`pairs`] and [`swapfold`]:
/// each `(k, gates)` of `replaced` (ascending `k`) takes the place of gate `k`, gates marked
/// in `dropped` go, and `phase` joins the global phase.
fn splice(
    circuit: &mut Circuit,
    gates: Vec<Gate>,
    replaced: Vec<(usize, Vec<Gate>)>,
    dropped: &[bool],
    phase: f64,
) {
    let mut next = replaced.into_iter().peekable();
    let mut out = Vec::with_capacity(gates.len());
    for (k, g) in gates.into_iter().enumerate() {
        if next.peek().is_some_and(|(at, _)| *at == k) {
            out.extend(next.next().expect("peeked").1);
        } else if !dropped[k] {
            out.push(g);
        }
    }
    circuit.gates = out;
    circuit.global_phase = euler::wrap(circuit.global_phase + phase);
}

/// Whether a pending one-qubit run `p` may absorb the next one-qubit gate `m`: unless both are
/// non-Clifford and do not commute. The fused run is then at most one rotation between
/// Clifford gates, about one axis, which is what the tableau check reads back from a file
/// (`tableau::normal`: it sees rotations, not Euler identities between different axes).
/// Commutation-aware cancellation can bring two rotations about different axes next to each
/// other (an `rz` of one ladder and the `rx` of a field once the CNOT between them cancels);
/// they stay two runs. Tolerance 1e-12 on the commutator's entries.
fn fusable(p: &Mat2, m: &Mat2) -> bool {
    let (pm, mp) = (mat2_mul(p, m), mat2_mul(m, p));
    let commute = (0..2).all(|r| (0..2).all(|c| (pm[r][c] - mp[r][c]).norm() < 1e-12));
    commute || is_clifford(p) || is_clifford(m)
}

/// Fuses every maximal run of one-qubit gates into at most one native sequence, the run split
/// where two rotations about different axes would meet (a run absorbs a rotation only if one of
/// the two is Clifford or they commute).
pub fn fuse_single_qubit(c: &mut Circuit, basis: OneQubitBasis) {
    let mut pending: Vec<Option<Mat2>> = vec![None; c.num_qubits];
    let mut out = Vec::with_capacity(c.gates.len());
    let mut phase = 0.0;
    let flush =
        |q: Qubit, pending: &mut Vec<Option<Mat2>>, out: &mut Vec<Gate>, phase: &mut f64| {
            if let Some(m) = pending[q as usize].take() {
                let (gs, a) = euler::decompose(&m, q, basis);
                out.extend(gs);
                *phase += a;
            }
        };
    for g in c.gates.drain(..) {
        match g.matrix1() {
            Some(m) => {
                let q = g.qubits()[0] as usize;
                if pending[q].as_ref().is_some_and(|p| !fusable(p, &m)) {
                    flush(q as Qubit, &mut pending, &mut out, &mut phase);
                }
                pending[q] = Some(match &pending[q] {
                    Some(p) => mat2_mul(&m, p),
                    None => m,
                });
            }
            None => {
                for q in g.qubits() {
                    flush(q, &mut pending, &mut out, &mut phase);
                }
                out.push(g);
            }
        }
    }
    for q in 0..c.num_qubits as Qubit {
        flush(q, &mut pending, &mut out, &mut phase);
    }
    c.gates = out;
    c.global_phase = euler::wrap(c.global_phase + phase);
}

/// Fusion and cancellation in one pass: every maximal run of one-qubit gates becomes one native
/// sequence (split where two rotations about different axes would meet, as in
/// [`fuse_single_qubit`]), and adjacent inverse two-qubit gates (`cx cx` on the same ordered
/// pair, `cz cz` or `swap swap` on the same pair) vanish when the runs between them on both
/// qubits multiply to a phase. Each qubit keeps a stack of the live gates that touch it; when a pair cancels, the
/// native gates of the runs it separated are taken back off the stacks into the pending run, so
/// that they fuse with what follows and the cascade (`h cz h · h cz h` → nothing) completes in
/// the same sweep. Exact: the unitary, global phase included, is kept to rounding.
///
/// This replaces iterating [`fuse_single_qubit`] and `cancel_inverses` to a fixed point, which
/// on a lowered step of 4.7 million gates needed ~35 sweeps that each removed a few dozen gates
/// (32 s instead of ~1 s).
pub fn fuse_and_cancel(c: &mut Circuit, basis: OneQubitBasis) {
    let n = c.num_qubits;
    let gates = std::mem::take(&mut c.gates);
    let mut live: Vec<Option<Gate>> = Vec::with_capacity(gates.len());
    let mut stacks: Vec<Vec<u32>> = vec![Vec::new(); n];
    let mut pending: Vec<Option<Mat2>> = vec![None; n];
    let mut phase = 0.0;
    let push = |g: Gate, live: &mut Vec<Option<Gate>>, stacks: &mut Vec<Vec<u32>>| {
        for q in g.qubits() {
            stacks[q as usize].push(live.len() as u32);
        }
        live.push(Some(g));
    };
    // The pending run of `q` as native gates and their phase (nothing pending: no gates).
    let decompose_pending = |q: Qubit, pending: &Vec<Option<Mat2>>| -> (Vec<Gate>, f64) {
        match &pending[q as usize] {
            Some(m) => euler::decompose(m, q, basis),
            None => (Vec::new(), 0.0),
        }
    };
    // Takes the one-qubit gates on top of `q`'s stack back into its pending run.
    let unflush = |q: Qubit,
                   live: &mut Vec<Option<Gate>>,
                   stacks: &mut Vec<Vec<u32>>,
                   pending: &mut Vec<Option<Mat2>>| {
        let mut run: Option<Mat2> = None;
        while let Some(&i) = stacks[q as usize].last() {
            let Some(m) = live[i as usize].and_then(|g| g.matrix1()) else {
                break;
            };
            live[i as usize] = None;
            stacks[q as usize].pop();
            // Gates come off latest first: the run is (latest ⋯ earliest).
            run = Some(match run {
                Some(r) => mat2_mul(&r, &m),
                None => m,
            });
        }
        pending[q as usize] = run;
    };
    for g in gates {
        if let Some(m) = g.matrix1() {
            let q = g.qubits()[0] as usize;
            if pending[q].as_ref().is_some_and(|p| !fusable(p, &m)) {
                let (gs, a) = decompose_pending(q as Qubit, &pending);
                pending[q] = None;
                phase += a;
                for h in gs {
                    push(h, &mut live, &mut stacks);
                }
            }
            pending[q] = Some(match &pending[q] {
                Some(p) => mat2_mul(&m, p),
                None => m,
            });
            continue;
        }
        let qs = g.qubits();
        if g.is_two_qubit() {
            let (a, b) = (qs[0], qs[1]);
            let top = match (stacks[a as usize].last(), stacks[b as usize].last()) {
                (Some(&i), Some(&j)) if i == j => live[i as usize],
                _ => None,
            };
            let inverse_pair = top.is_some_and(|p| {
                p.name() == g.name()
                    && (p.qubits() == qs || matches!(g, Gate::Cz(..) | Gate::Swap(..)))
                    && p.inverse() == Some(p)
            });
            let (ga, pa) = decompose_pending(a, &pending);
            let (gb, pb) = decompose_pending(b, &pending);
            pending[a as usize] = None;
            pending[b as usize] = None;
            if inverse_pair && ga.is_empty() && gb.is_empty() {
                let i = *stacks[a as usize].last().expect("checked above");
                live[i as usize] = None;
                stacks[a as usize].pop();
                stacks[b as usize].pop();
                phase += pa + pb;
                unflush(a, &mut live, &mut stacks, &mut pending);
                unflush(b, &mut live, &mut stacks, &mut pending);
                continue;
            }
            phase += pa + pb;
            for h in ga.into_iter().chain(gb) {
                push(h, &mut live, &mut stacks);
            }
        } else {
            for &q in &qs {
                let (gs, a) = decompose_pending(q, &pending);
                pending[q as usize] = None;
                phase += a;
                for h in gs {
                    push(h, &mut live, &mut stacks);
                }
            }
        }
        push(g, &mut live, &mut stacks);
    }
    for q in 0..n as Qubit {
        let (gs, a) = decompose_pending(q, &pending);
        phase += a;
        for h in gs {
            push(h, &mut live, &mut stacks);
        }
    }
    c.gates = live.into_iter().flatten().collect();
    c.global_phase = euler::wrap(c.global_phase + phase);
}

/// [`lower_to_native`], then the gates reordered across what they commute with where that
/// lowers the two-qubit depth ([`crate::circuit::schedule::shallower`]), then the entangler
/// and SWAP that the new order brings together on one pair written with two entanglers for
/// four ([`swapfold::fold_swaps`]), then the one-qubit runs that the new order brings
/// together fused ([`fuse_single_qubit`]; an `rz` that passed a CNOT's control meets the `rz`
/// on the other side): what is written out. The two-qubit gates are those of
/// [`lower_to_native`] less the folded ones; their order (and so the depth) and the one-qubit
/// gates between them may differ.
pub fn lower_for_output(c: &Circuit, native: &NativeSet) -> Circuit {
    let mut out = crate::circuit::schedule::shallower(lower_to_native(c, native));
    // Like the pair merge, skipped on the largest blocks: on utility case 1 of
    // `benches/utility_device.rs` (~10⁶ gates a piece) it saved 0.3% of the two-qubit gates
    // (729,984 → 727,736) and took compile ÷ write from 26.5 to 36.2.
    if out.gates.len() <= pairs::MERGE_MAX_GATES {
        swapfold::fold_swaps(&mut out, native);
    }
    fuse_single_qubit(&mut out, native.one_qubit);
    out
}

/// The whole lowering: the slide, translation, then fusion and cancellation ([`fuse_and_cancel`]),
/// then commutation-aware cancellation ([`cancel_commuting`]), then entangler pairs that one
/// CNOT does the work of ([`pairs::merge_entangler_pairs`]); fusion runs again while a
/// cancellation pass still finds work.
pub fn lower_to_native(c: &Circuit, native: &NativeSet) -> Circuit {
    let mut out = translate_two_qubit(&slide_through_swaps(c), native.two_qubit);
    let merge = out.gates.len() <= pairs::MERGE_MAX_GATES;
    loop {
        fuse_and_cancel(&mut out, native.one_qubit);
        let before = out.gates.len();
        cancel_inverses(&mut out);
        cancel_commuting(&mut out);
        if out.gates.len() == before
            && (!merge || pairs::merge_entangler_pairs(&mut out, native) == 0)
        {
            break;
        }
    }
    out
}

/// How far back (in gates on one qubit) [`cancel_commuting`] looks for a partner.
pub const COMMUTE_WINDOW: usize = 48;

/// Whether the one-qubit matrix `m` commutes with `Z` (it is diagonal) or, with `x_type`, with
/// `X` (`m = αI + βX`). Tolerance 1e-12 on the entries.
fn commutes_with_pauli(m: &Mat2, x_type: bool) -> bool {
    const EPS: f64 = 1e-12;
    if x_type {
        (m[0][0] - m[1][1]).norm() < EPS && (m[0][1] - m[1][0]).norm() < EPS
    } else {
        m[0][1].norm() < EPS && m[1][0].norm() < EPS
    }
}

/// The role of qubit `q` in the two-qubit gate `g` (a `cx` or `cz`) for commutation: `Some(false)`
/// when `g` is diagonal on `q` (control of a `cx`, either qubit of a `cz`), `Some(true)` when it
/// is `X`-type there (target of a `cx`), `None` when `g` does not touch `q`.
fn role(g: &Gate, q: Qubit) -> Option<bool> {
    match *g {
        Gate::Cx(c, _) if c == q => Some(false),
        Gate::Cx(_, t) if t == q => Some(true),
        Gate::Cz(a, b) if a == q || b == q => Some(false),
        _ => None,
    }
}

/// Whether the two-qubit gate `h` commutes with `g` (a `cx` or `cz`): on every qubit they
/// share, both are diagonal or both are `X`-type. Two gates that are each block-diagonal in
/// the same basis of every shared qubit commute (each acts on the rest as a function of that
/// qubit's basis label only).
fn two_qubit_commute(h: &Gate, g: &Gate) -> bool {
    let shared: Vec<Qubit> = g
        .qubits()
        .into_iter()
        .filter(|q| h.qubits().contains(q))
        .collect();
    shared.iter().all(|&q| match (role(h, q), role(g, q)) {
        (Some(x), Some(y)) => x == y,
        _ => false,
    })
}

/// Commutation-aware cancellation of two-qubit gates: a `cx` (or `cz`) cancels an earlier
/// identical gate when everything between them on its qubits commutes with it, not only when
/// nothing stands between. On the control of a `cx` (and on both qubits of a `cz`) the gates
/// between must be diagonal there (`rz` runs, controls of other CNOTs, `cz`); on the target of
/// a `cx` they must be `X`-type (`sx`/`x`/`rx` runs, targets of other CNOTs). Runs of one-qubit
/// gates are judged by their product, so `rz sx rz` that multiplies to a diagonal matrix
/// counts. This is the gate-cancellation rule of Nam, Ross, Su, Childs & Maslov, "Automated
/// optimization of large quantum circuits with continuous parameters", npj Quantum Inf. 4, 23
/// (2018), Sec. "Gate cancellation" (cited from memory), with the CNOT commutation rules
/// written out above. In a routed Hadamard test it removes, among others, the ancilla's
/// `cx(anc, t)` against the first CNOT of the SWAP that moves the ancilla over `t` when a
/// ladder's `cx(s, t)` sits between (they share only their target, so they commute).
///
/// Exact: `g · M · g = M` whenever `M` commutes with `g` and `g² = 1`, so the unitary (global
/// phase included) is kept. Each search looks back at most [`COMMUTE_WINDOW`] gates on a
/// qubit: linear in gates. Returns the number of gates removed (twice the pairs).
pub fn cancel_commuting(c: &mut Circuit) -> usize {
    let gates = std::mem::take(&mut c.gates);
    let mut live: Vec<Option<Gate>> = Vec::with_capacity(gates.len());
    let mut stacks: Vec<Vec<u32>> = vec![Vec::new(); c.num_qubits];
    let mut removed = 0;
    // Walks back over `q`'s gates from the top; `Some(j)` when the first gate that does not
    // commute with `g` on `q` is `g` itself at `j`, with everything after it commuting; with
    // `stop`, only the gates after `stop` are checked and `Some(stop)` means they all commute.
    let scan = |q: Qubit, g: &Gate, stop: Option<u32>, live: &[Option<Gate>], stack: &[u32]| {
        let x_type = role(g, q).expect("g touches q");
        let mut run: Option<Mat2> = None;
        for &j in stack.iter().rev().take(COMMUTE_WINDOW) {
            if stop.is_some_and(|s| j <= s) {
                break;
            }
            let Some(h) = live[j as usize] else { continue };
            if let Some(m) = h.matrix1() {
                run = Some(match run {
                    Some(r) => mat2_mul(&r, &m),
                    None => m,
                });
                continue;
            }
            if run.take().is_some_and(|r| !commutes_with_pauli(&r, x_type)) {
                return None;
            }
            if stop.is_none() && same_self_inverse(&h, g) {
                return Some(j);
            }
            if !(h.is_two_qubit() && two_qubit_commute(&h, g)) {
                return None;
            }
        }
        match (stop, run) {
            (Some(s), r) if r.is_none_or(|r| commutes_with_pauli(&r, x_type)) => {
                // Only reached when the window covered every gate after `stop`.
                stack
                    .iter()
                    .rev()
                    .take(COMMUTE_WINDOW)
                    .any(|&j| j <= s)
                    .then_some(s)
            }
            _ => None,
        }
    };
    for g in gates {
        if matches!(g, Gate::Cx(..) | Gate::Cz(..)) {
            let qs = g.qubits();
            let (a, b) = (qs[0], qs[1]);
            let hit = scan(a, &g, None, &live, &stacks[a as usize])
                .filter(|&j| scan(b, &g, Some(j), &live, &stacks[b as usize]) == Some(j));
            if let Some(j) = hit {
                live[j as usize] = None;
                removed += 2;
                continue;
            }
        }
        for q in g.qubits() {
            stacks[q as usize].push(live.len() as u32);
        }
        live.push(Some(g));
    }
    c.gates = live.into_iter().flatten().collect();
    removed
}

/// `h` and `g` are the same `cx` (same control and target) or the same `cz` (either order).
fn same_self_inverse(h: &Gate, g: &Gate) -> bool {
    match (*h, *g) {
        (Gate::Cx(a, b), Gate::Cx(c, d)) => a == c && b == d,
        (Gate::Cz(a, b), Gate::Cz(c, d)) => (a == c && b == d) || (a == d && b == c),
        _ => false,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::circuit::verify::{verify_ir, Rules};
    use crate::sim::unitary_distance;

    fn two_qubit_count(c: &Circuit) -> usize {
        c.gates.iter().filter(|g| g.is_two_qubit()).count()
    }

    /// `len` gates on 4 qubits, each drawn by `pick` from a seeded generator and a random
    /// ordered pair of distinct qubits.
    fn random_circuit(
        seed: u64,
        len: usize,
        pick: impl Fn(&mut rand_chacha::ChaCha8Rng, Qubit, Qubit) -> Gate,
    ) -> Circuit {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
        let mut c = Circuit::new(4, 0);
        for _ in 0..len {
            let a = rng.gen_range(0..4u32);
            let b = (a + rng.gen_range(1..4u32)) % 4;
            let g = pick(&mut rng, a, b);
            c.push(g);
        }
        c
    }

    fn sample() -> Circuit {
        let mut c = Circuit::new(3, 0);
        c.extend([
            Gate::H(0),
            Gate::Sdg(1),
            Gate::H(1),
            Gate::Cx(0, 1),
            Gate::Swap(1, 2),
            Gate::Rz(2, 0.4),
            Gate::Cx(2, 1),
            Gate::Cz(0, 1),
            Gate::Y(0),
            Gate::Swap(0, 1),
            Gate::Cx(1, 0),
            Gate::S(2),
            Gate::Sx(2),
            Gate::Ry(1, 0.2),
            Gate::Rx(0, -1.1),
        ]);
        c.global_phase = 0.25;
        c
    }

    #[test]
    fn lowering_keeps_the_unitary_for_every_supported_set() {
        for names in [
            vec!["rz", "sx", "x", "cx"],
            vec!["rz", "sx", "x", "cz"],
            vec!["rz", "rx", "ry", "cz"],
            vec!["U", "cx"],
            vec!["rx", "ry", "cz"],
            vec!["rz", "h", "cx"],
        ] {
            let native = NativeSet::from_names(&names).unwrap();
            let c = sample();
            let low = lower_to_native(&c, &native);
            let rules = Rules {
                coupled: None,
                native: Some(&native.names),
            };
            verify_ir(&low, &rules).unwrap();
            assert!(unitary_distance(&c, &low) < 1e-12, "{names:?}");
        }
    }

    #[test]
    fn a_swap_costs_three_cnots_and_cancels_against_a_neighbour() {
        let native = NativeSet::rz_sx_x_cx();
        let mut c = Circuit::new(2, 0);
        c.push(Gate::Swap(0, 1));
        let low = lower_to_native(&c, &native);
        assert_eq!(low.gates.iter().filter(|g| g.is_two_qubit()).count(), 3);
        // cx(1,0) then swap: the swap is oriented to start with cx(1,0), and the pair cancels.
        let mut c = Circuit::new(2, 0);
        c.extend([Gate::Cx(1, 0), Gate::Swap(0, 1)]);
        let low = lower_to_native(&c, &native);
        assert_eq!(low.gates.iter().filter(|g| g.is_two_qubit()).count(), 2);
        assert!(unitary_distance(&c, &low) < 1e-12);
    }

    #[test]
    fn one_qubit_gates_slide_through_a_swap_to_let_it_meet_its_cnot() {
        // cx(2,1) · (h on 1) · swap(1,2): the h goes to qubit 2 after the swap, the swap
        // starts with cx(2,1) and the pair cancels, 2 CNOTs instead of 4; and the mirror case
        // swap · u · cx on the pair after it.
        for names in [vec!["rz", "sx", "x", "cx"], vec!["rz", "sx", "x", "cz"]] {
            let native = NativeSet::from_names(&names).unwrap();
            // The ancilla's last `cx` on 1, then the next rotation's basis change on 1.
            let head = [Gate::Cx(2, 1), Gate::Rz(1, 0.3), Gate::H(1), Gate::Sx(2)];
            let mut c = Circuit::new(3, 1);
            c.extend(head);
            c.extend([Gate::Cx(0, 2), Gate::Swap(1, 2), Gate::Ry(0, 0.2)]);
            let low = lower_to_native(&c, &native);
            assert!(unitary_distance(&c, &low) < 1e-12, "{names:?}");
            // cx(0,2) sits between: nothing slides, 1 + 1 + 3.
            let count = two_qubit_count;
            assert_eq!(count(&low), 5, "{names:?}");
            let mut c = Circuit::new(3, 1);
            c.extend(head);
            c.extend([Gate::Swap(1, 2), Gate::Ry(0, 0.2), Gate::Measure(2, 0)]);
            let low = lower_to_native(&c, &native);
            assert!(unitary_distance(&c, &low) < 1e-12, "{names:?}");
            assert_eq!(count(&low), 2, "{names:?}");
            assert_eq!(low.measurements(), vec![(2, 0)]);
            let mut c = Circuit::new(2, 0);
            c.extend([
                Gate::Swap(0, 1),
                Gate::S(0),
                Gate::Rx(1, 0.7),
                Gate::Cx(0, 1),
            ]);
            let low = lower_to_native(&c, &native);
            assert!(unitary_distance(&c, &low) < 1e-12, "{names:?}");
            assert_eq!(count(&low), 2, "{names:?}");
        }
    }

    #[test]
    fn sliding_keeps_the_unitary_of_random_circuits() {
        // Random circuits of one-qubit gates, CNOTs and swaps on 4 qubits: the slide only
        // relocates gates, so the unitary is kept (to 1e-12), before and after lowering.
        use rand::Rng;
        let native = NativeSet::rz_sx_x_cx();
        for seed in 0..2000u64 {
            let c = random_circuit(seed, 30, |rng, a, b| match rng.gen_range(0..5) {
                0 => Gate::Cx(a, b),
                1 => Gate::Swap(a, b),
                2 => Gate::H(a),
                3 => Gate::Rz(a, rng.gen_range(-3.0..3.0)),
                _ => Gate::Sx(a),
            });
            let slid = slide_through_swaps(&c);
            assert!(unitary_distance(&c, &slid) < 1e-12, "seed {seed}");
            let low = lower_to_native(&c, &native);
            assert!(unitary_distance(&c, &low) < 1e-12, "seed {seed}");
        }
    }

    #[test]
    fn sliding_never_costs_a_routed_hadamard_test_more() {
        // Controlled rotations of random Pauli strings on 6 qubits plus the ancilla, routed by
        // the lookahead router on a line and a 2×4 grid: lowered with the slide, the step has
        // the same unitary and never more two-qubit gates than lowered without it, and fewer
        // on some. (The slide is a heuristic: on random circuits dense in swaps on one pair it
        // can lose a cancellation; the router does not emit those.)
        use crate::device::{lattice, Calibration, Device};
        use crate::formula::Rotation;
        use crate::pauli::PauliString;
        use crate::route::swap::{insert_swaps, SwapParams};
        use rand::{Rng, SeedableRng};
        let count = two_qubit_count;
        let devices = [
            Device::new(
                "l",
                7,
                &lattice::line(7),
                NativeSet::rz_sx_x_cx(),
                Calibration::default(),
            ),
            Device::new(
                "g",
                8,
                &lattice::grid(2, 4),
                NativeSet::rz_sx_x_cx(),
                Calibration::default(),
            ),
        ];
        let mut fewer = 0;
        for seed in 0..60u64 {
            let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
            let mut c = Circuit::new(7, 0);
            for _ in 0..12 {
                let mut text = Vec::new();
                for q in 0..6 {
                    if rng.gen_bool(0.4) {
                        text.push(format!("{}{q}", ['X', 'Y', 'Z'][rng.gen_range(0..3)]));
                    }
                }
                if text.is_empty() {
                    continue;
                }
                let r = Rotation {
                    pauli: PauliString::parse_factor_text(&text.join(" ")).unwrap(),
                    theta: rng.gen_range(-1.0..1.0),
                };
                let ladder: Vec<Qubit> = r
                    .pauli
                    .support_qubits()
                    .iter()
                    .map(|&q| q as Qubit)
                    .collect();
                c.extend(crate::synth::pauli_rotation_along(&r, Some(6), &ladder));
            }
            for dev in &devices {
                let p = SwapParams {
                    extended_size: 20,
                    extended_weight: 0.5,
                    decay_step: 0.001,
                    decay_reset: 5,
                    seed,
                    stall_limit: None,
                    hub: Some(6),
                    hub_factor: 0.9,
                    commute_ahead: 0,
                };
                let initial: Vec<u32> = (0..7).collect();
                let routed = insert_swaps(&c, &initial, dev, &p).circuit;
                let low = lower_to_native(&routed, &dev.native);
                assert!(unitary_distance(&routed, &low) < 1e-9, "seed {seed}");
                let mut plain = translate_two_qubit(&routed, dev.native.two_qubit);
                fuse_and_cancel(&mut plain, dev.native.one_qubit);
                assert!(count(&low) <= count(&plain), "seed {seed} on {}", dev.name);
                fewer += (count(&low) < count(&plain)) as usize;
            }
        }
        assert!(fewer > 0, "the slide never paid");
    }

    #[test]
    fn cz_target_merges_the_hadamards_of_a_cnot_ladder() {
        // exp(-iθ Z0 Z1 Z2) as cx ladder: with cz natives the inner h·h pairs fuse away.
        let native = NativeSet::from_names(&["rz", "sx", "x", "cz"]).unwrap();
        let mut c = Circuit::new(3, 0);
        c.extend([
            Gate::Cx(0, 1),
            Gate::Cx(1, 2),
            Gate::Rz(2, 0.3),
            Gate::Cx(1, 2),
            Gate::Cx(0, 1),
        ]);
        let low = lower_to_native(&c, &native);
        assert!(unitary_distance(&c, &low) < 1e-12);
        assert_eq!(low.gates.iter().filter(|g| g.is_two_qubit()).count(), 4);
    }

    #[test]
    fn commuting_cnots_cancel_through_what_commutes_with_them() {
        let count = two_qubit_count;
        // Shared target, shared control, a diagonal run on the control, an X-type run on the
        // target: each pair of cx(0,1) goes. cx(a,b)·cx(c,b) = cx(c,b)·cx(a,b) and
        // cx(a,b)·cx(a,c) = cx(a,c)·cx(a,b) (e.g. Nielsen & Chuang, "Quantum Computation and
        // Quantum Information", 2000, Exercise 4.31's circuit identities; from memory).
        for between in [
            vec![Gate::Cx(2, 1)],
            vec![Gate::Cx(0, 2), Gate::Rz(0, 0.3), Gate::S(0)],
            vec![Gate::Sx(1), Gate::Rx(1, -0.4), Gate::Cz(0, 2)],
            vec![Gate::Rz(0, 0.2), Gate::Cx(2, 1), Gate::X(1), Gate::Cx(0, 3)],
        ] {
            let mut c = Circuit::new(4, 0);
            c.push(Gate::Cx(0, 1));
            c.extend(between.iter().copied());
            c.push(Gate::Cx(0, 1));
            let mut d = c.clone();
            let removed = cancel_commuting(&mut d);
            assert_eq!(removed, 2, "{between:?}");
            assert_eq!(count(&d), count(&c) - 2);
            assert!(unitary_distance(&c, &d) < 1e-12, "{between:?}");
        }
        // A run that multiplies to a diagonal matrix counts on the control: sx·sx·sx·sx = 1
        // up to phase is diagonal, though no single sx is.
        let mut c = Circuit::new(2, 0);
        c.extend([
            Gate::Cx(0, 1),
            Gate::Sx(0),
            Gate::Sx(0),
            Gate::Sx(0),
            Gate::Sx(0),
        ]);
        c.push(Gate::Cx(0, 1));
        let mut d = c.clone();
        assert_eq!(cancel_commuting(&mut d), 2);
        assert!(unitary_distance(&c, &d) < 1e-12);
        // Nothing that fails to commute lets a pair through: h or rz on the target, a CNOT
        // from the target, the reversed CNOT, a cz on the target, a measurement.
        for between in [
            vec![Gate::H(1)],
            vec![Gate::Rz(1, 0.3)],
            vec![Gate::Sx(0)],
            vec![Gate::Cx(1, 2)],
            vec![Gate::Cx(2, 0)],
            vec![Gate::Cx(1, 0)],
            vec![Gate::Cz(1, 2)],
            vec![Gate::Measure(1, 0)],
        ] {
            let mut c = Circuit::new(3, 1);
            c.push(Gate::Cx(0, 1));
            c.extend(between.iter().copied());
            c.push(Gate::Cx(0, 1));
            let mut d = c.clone();
            assert_eq!(cancel_commuting(&mut d), 0, "{between:?}");
            assert_eq!(d.gates, c.gates);
        }
        // cz pairs: diagonal gates and other cz on either qubit commute; sx does not.
        let mut c = Circuit::new(3, 0);
        c.extend([
            Gate::Cz(0, 1),
            Gate::Cz(1, 2),
            Gate::Rz(0, 0.1),
            Gate::Cz(1, 0),
        ]);
        let mut d = c.clone();
        assert_eq!(cancel_commuting(&mut d), 2);
        assert_eq!(d.gates, vec![Gate::Cz(1, 2), Gate::Rz(0, 0.1)]);
        let mut c = Circuit::new(2, 0);
        c.extend([Gate::Cz(0, 1), Gate::Sx(1), Gate::Cz(0, 1)]);
        assert_eq!(cancel_commuting(&mut c.clone()), 0);
    }

    #[test]
    fn a_swap_meets_the_ancillas_cnot_past_a_ladder_cnot_on_the_same_target() {
        // The ancilla's cx(2,1), the ladder's cx(0,1) (same target: they commute), then the
        // ancilla moves over 1: the swap is oriented to start with cx(2,1), which then cancels
        // through cx(0,1). 2 + 1 + 3 → 4 CNOTs, with cx and with cz natives.
        for names in [vec!["rz", "sx", "x", "cx"], vec!["rz", "sx", "x", "cz"]] {
            let native = NativeSet::from_names(&names).unwrap();
            let mut c = Circuit::new(3, 0);
            c.extend([
                Gate::H(1),
                Gate::Cx(2, 1),
                Gate::Rz(1, 0.4),
                Gate::Cx(2, 1),
                Gate::Cx(0, 1),
                Gate::Swap(1, 2),
            ]);
            let before = {
                let mut plain = translate_two_qubit(&c, native.two_qubit);
                fuse_and_cancel(&mut plain, native.one_qubit);
                two_qubit_count(&plain)
            };
            let low = lower_to_native(&c, &native);
            assert!(unitary_distance(&c, &low) < 1e-12, "{names:?}");
            let n2 = two_qubit_count(&low);
            assert_eq!(n2, 4, "{names:?}");
            assert!(n2 < before, "{names:?}: {n2} against {before}");
        }
    }

    /// The rotations the tableau check reads from `c` (`tableau::canonicalise`): the residual
    /// angles after splitting off quarter turns (`tableau::split_angle`), ascending by size.
    fn residual_rotations(c: &Circuit) -> Vec<f64> {
        let mut residuals = Vec::new();
        crate::tableau::canonicalise(c, c.num_qubits, &mut |r| {
            let (_, a) = crate::tableau::split_angle(r.angle);
            if a.abs() > 1e-12 {
                residuals.push(a.abs());
            }
        })
        .unwrap();
        residuals.sort_by(f64::total_cmp);
        residuals
    }

    #[test]
    fn one_qubit_runs_keep_rotations_about_different_axes_apart() {
        // rx(0.1) · rz(−0.1) · rx(0.05): fused into one Euler sequence, the run would read back
        // as three rotations of other angles (residuals about 0.033, 0.150, 0.067), which the
        // tableau check cannot match to the three it was built from; kept apart (a run absorbs
        // a rotation only if one of them is Clifford or they commute), the file reads as the
        // same rotations. Three rotations meet this way in the sign-flip step on rz/ry devices
        // once commutation-aware cancellation removes the CNOTs between a field and a ladder.
        for names in [vec!["rz", "sx", "x", "cx"], vec!["rz", "ry", "cz"]] {
            let native = NativeSet::from_names(&names).unwrap();
            let mut c = Circuit::new(1, 0);
            c.extend([Gate::Rx(0, 0.1), Gate::Rz(0, -0.1), Gate::Rx(0, 0.05)]);
            let low = lower_to_native(&c, &native);
            assert!(unitary_distance(&c, &low) < 1e-12, "{names:?}");
            let r = residual_rotations(&low);
            assert_eq!(r.len(), 3, "{names:?}: {:?}", low.gates);
            for (got, want) in r.iter().zip([0.05, 0.1, 0.1]) {
                assert!((got - want).abs() < 1e-12, "{names:?}: {r:?}");
            }
            // A cancellation that joins runs: rz(0.3) on a target, cx, rx(0.2) (X-type there,
            // so it commutes with the cx), cx, rz(0.1). The CNOTs go, and the file still reads
            // as the three rotations.
            let mut c = Circuit::new(2, 0);
            c.extend([
                Gate::Rz(1, 0.3),
                Gate::Cx(0, 1),
                Gate::Rx(1, 0.2),
                Gate::Cx(0, 1),
                Gate::Rz(1, 0.1),
            ]);
            let low = lower_to_native(&c, &native);
            assert!(unitary_distance(&c, &low) < 1e-12, "{names:?}");
            assert_eq!(two_qubit_count(&low), 0, "{names:?}");
            let r = residual_rotations(&low);
            assert_eq!(r.len(), 3, "{names:?}: {:?}", low.gates);
            for (got, want) in r.iter().zip([0.1, 0.2, 0.3]) {
                assert!((got - want).abs() < 1e-12, "{names:?}: {r:?}");
            }
        }
        // Rotations about one axis still merge: rz(0.3) rz(0.2) is one rz.
        let native = NativeSet::from_names(&["rz", "sx", "x", "cx"]).unwrap();
        let mut c = Circuit::new(1, 0);
        c.extend([Gate::Rz(0, 0.3), Gate::Rz(0, 0.2)]);
        assert_eq!(lower_to_native(&c, &native).gates, vec![Gate::Rz(0, 0.5)]);
    }

    #[test]
    fn commutation_aware_cancellation_keeps_random_circuits_exact() {
        // Random circuits dense in CNOTs, cz and one-qubit gates on 4 qubits: the pass keeps
        // the unitary (1e-12) and never adds a gate; lowering with it never emits more
        // two-qubit gates than lowering without it.
        use rand::Rng;
        let count = two_qubit_count;
        let mut removed_any = 0;
        for seed in 0..2000u64 {
            let c = random_circuit(seed, 40, |rng, a, b| match rng.gen_range(0..7) {
                0..=2 => Gate::Cx(a, b),
                3 => Gate::Cz(a, b),
                4 => Gate::Rz(a, rng.gen_range(-3.0..3.0)),
                5 => Gate::Sx(a),
                _ => Gate::Rx(a, rng.gen_range(-3.0..3.0)),
            });
            let mut d = c.clone();
            let removed = cancel_commuting(&mut d);
            assert_eq!(d.gates.len() + removed, c.gates.len(), "seed {seed}");
            assert!(unitary_distance(&c, &d) < 1e-12, "seed {seed}");
            removed_any += (removed > 0) as usize;
            for native in [
                NativeSet::rz_sx_x_cx(),
                NativeSet::from_names(&["rz", "sx", "x", "cz"]).unwrap(),
            ] {
                let low = lower_to_native(&c, &native);
                assert!(unitary_distance(&c, &low) < 1e-12, "seed {seed}");
                let mut plain = translate_two_qubit(&c, native.two_qubit);
                fuse_and_cancel(&mut plain, native.one_qubit);
                assert!(count(&low) <= count(&plain), "seed {seed}");
            }
        }
        assert!(
            removed_any > 100,
            "only {removed_any} circuits had a commuting pair"
        );
    }

    #[test]
    fn the_written_form_is_exact_native_and_fuses_what_the_schedule_brings_together() {
        // Random circuits on 4 qubits for three native sets: what is written keeps the unitary
        // (1e-9, global phase included), passes the native-gate rules, has exactly the
        // two-qubit gates of `lower_to_native` less those `swapfold` reports, and never more
        // one-qubit gates than the schedule and the fold alone leave; on some circuits it has
        // fewer (runs met across a CNOT).
        use crate::circuit::schedule::shallower;
        use rand::Rng;
        let ones = |c: &Circuit| c.gates.len() - two_qubit_count(c);
        let mut fewer = 0;
        let mut folded = 0;
        for seed in 0..600u64 {
            let c = random_circuit(seed, 40, |rng, a, b| match rng.gen_range(0..6) {
                0..=2 => Gate::Cx(a, b),
                3 => Gate::Rz(a, rng.gen_range(-3.0..3.0)),
                4 => Gate::H(a),
                _ => Gate::S(a),
            });
            for names in [
                vec!["rz", "sx", "x", "cx"],
                vec!["rz", "ry", "cz"],
                vec!["rx", "ry", "cx"],
            ] {
                let native = NativeSet::from_names(&names).unwrap();
                let out = lower_for_output(&c, &native);
                let rules = Rules {
                    coupled: None,
                    native: Some(&native.names),
                };
                verify_ir(&out, &rules).unwrap();
                assert!(unitary_distance(&c, &out) < 1e-9, "seed {seed} {names:?}");
                let low = lower_to_native(&c, &native);
                let mut scheduled = shallower(low.clone());
                let saved = swapfold::fold_swaps(&mut scheduled, &native);
                folded += saved;
                assert_eq!(two_qubit_count(&out) + saved, two_qubit_count(&low));
                assert!(ones(&out) <= ones(&scheduled), "seed {seed} {names:?}");
                fewer += (ones(&out) < ones(&scheduled)) as usize;
            }
        }
        // 1373 of the 1800 had fewer when this was written.
        assert!(
            fewer > 100,
            "only {fewer} circuits had runs to fuse after the schedule"
        );
        // Three CNOTs on a pair that make a SWAP occur in random circuits too (44 two-qubit
        // gates folded over the 1800 when the fold was added).
        assert!(folded > 0, "no window folded");
    }
}
