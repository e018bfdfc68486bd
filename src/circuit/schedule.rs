//! Commutation-aware scheduling: the same gates in an order with a shorter two-qubit depth.
//!
//! In: any circuit. Out: the same gates, reordered only across gates they commute with, so
//! the unitary is exactly the same (global phase included); [`shallower`] keeps the best of two
//! new orders (first free layer, and critical path first) only when its two-qubit depth (then
//! its depth) is lower. Invariant: two gates that share a
//! qubit and do not commute by the rule below keep their relative order.
//!
//! ## The idea
//!
//! Depth counts layers in gate order: a gate waits for the last gate on each of its qubits.
//! Many of those waits are not needed. On one qubit, gates diagonal in `Z` (`rz`, `z`, `s`,
//! the control of a `cx`, either qubit of a `cz`) commute with each other, and so do gates
//! diagonal in `X` (`x`, `sx`, `rx`, the target of a `cx`); two gates commute when, on every
//! qubit they share, both are of the same kind (each acts on the rest as a function of that
//! qubit's label in the shared basis). In a Hadamard-test step the controlled `rz` of one
//! rotation (`cx` onto its root) and the parity network of the next (`cx` onto the same root)
//! share only a target, so the second need not wait behind the first's other qubit. This is
//! the commutation-aware list scheduling that compilers run on a commutation DAG (Itoko,
//! Raymond, Imamichi & Matsuo, "Optimization of quantum circuit mapping using gate
//! transformation and commutation", Integration 70, 43 (2020), on commutation rules of this
//! kind; from memory), in our own form:
//!
//! - per qubit, the last layer taken by a gate of each kind (`Z`, `X`, anything else);
//! - a gate goes to the first layer after every gate on its qubits it does not commute with
//!   that is also free on all its qubits (a layer holds one gate per qubit);
//! - the gates are then written layer by layer, input order inside a layer.
//!
//! A gate placed in layer `t` passes only gates of layers `≥ t` that came before it, and on a
//! shared qubit those are all of its own kind (a gate of another kind sets the lower bound
//! above it), so each pass is a swap of commuting neighbours and the product is unchanged.
//!
//! First free layer takes the gates in input order, so a gate that starts a long chain can
//! wait behind one that ends a short one on a qubit they share (the ancilla, mostly). The
//! second order ([`by_priority`]) fills each layer with the ready gates that start the longest
//! chains of non-commuting gates first. On a 12-site XXZ chain controlled on a 13-qubit line it
//! took the written two-qubit depth from 246 to 235, and on a 4×4 Heisenberg model on a
//! 17-qubit line from 766 to 733 (measured when it was written).
//!
//! Cost: per gate, at most [`WINDOW`] binary searches in sorted lists of at most `4 · WINDOW`
//! layers per qubit (a newcomer is mostly appended): linear in gates, with memory per qubit,
//! not per gate.

use super::{Circuit, Gate, Qubit};

/// How a gate acts on one of its qubits, for commutation.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Kind {
    /// Diagonal in `Z` on that qubit.
    Z,
    /// Diagonal in `X` on that qubit.
    X,
    /// Neither (or not known to be): commutes with nothing there.
    Other,
}

fn kind(g: &Gate, q: Qubit) -> Kind {
    match *g {
        Gate::Cx(c, _) if c == q => Kind::Z,
        Gate::Cx(..) => Kind::X,
        Gate::Cz(..) | Gate::Rz(..) | Gate::Z(_) | Gate::S(_) | Gate::Sdg(_) => Kind::Z,
        Gate::X(_) | Gate::Sx(_) | Gate::Sxdg(_) | Gate::Rx(..) => Kind::X,
        _ => Kind::Other,
    }
}

/// Layers searched for a free one above a gate's lower bound before it goes after everything
/// on its qubits (see the layering in the module essay).
pub const WINDOW: usize = 64;

/// The layer of each gate under the rules of the module essay.
///
/// Bounded work: a gate looks for a free layer among the [`WINDOW`] above its lower bound,
/// and past them takes the first layer above every one its qubits hold; each qubit remembers
/// only its latest `2 · WINDOW` to `4 · WINDOW` layers taken. (A long run of gates of one kind, such as the
/// ancilla's CNOTs, would otherwise rescan the whole run for each newcomer.) A forgotten
/// layer may be handed out twice on one qubit; both gates are then of one kind there (a
/// gate of another kind would have raised the bound above the first), so they commute and
/// only the depth, never the unitary, is affected.
fn layers(c: &Circuit) -> Vec<u32> {
    // Per qubit: the last layer taken by a gate of each kind (`None`: none yet), and the
    // latest layers taken.
    let mut last: Vec<[Option<usize>; 3]> = vec![[None; 3]; c.num_qubits];
    let mut taken: Vec<Vec<usize>> = vec![Vec::new(); c.num_qubits];
    let mut out = Vec::with_capacity(c.gates.len());
    for g in &c.gates {
        let qs = g.qubits();
        let mut lo = 0;
        for &q in &qs {
            let k = kind(g, q);
            for (i, l) in last[q as usize].iter().enumerate() {
                let same = k != Kind::Other && i == k as usize;
                if let (false, Some(l)) = (same, l) {
                    lo = lo.max(l + 1);
                }
            }
        }
        let busy = |t: usize| {
            qs.iter()
                .any(|&q| taken[q as usize].binary_search(&t).is_ok())
        };
        let t = (lo..lo + WINDOW).find(|&t| !busy(t)).unwrap_or_else(|| {
            qs.iter()
                .filter_map(|&q| taken[q as usize].last().map(|&l| l + 1))
                .max()
                .unwrap_or(lo)
                .max(lo)
        });
        for &q in &qs {
            let k = kind(g, q) as usize;
            let slot = &mut last[q as usize][k];
            *slot = Some(slot.map_or(t, |l| l.max(t)));
            let set = &mut taken[q as usize];
            if let Err(at) = set.binary_search(&t) {
                set.insert(at, t);
            }
            if set.len() > 4 * WINDOW {
                set.drain(..2 * WINDOW);
            }
        }
        out.push(t as u32);
    }
    out
}

/// Gates above which [`by_priority`] is not tried (its memory is per gate, about 30 bytes).
pub const PRIORITY_MAX_GATES: usize = 1 << 22;

/// Ready two-qubit gates looked at and put back, per layer, before [`by_priority`] closes the
/// layer (a long run of gates on one busy qubit would otherwise be rescanned every layer).
const DEFERRALS: usize = 64;

/// What a two-qubit gate weighs in [`tails`] against 1 for a one-qubit gate: about the ratio
/// of their durations on superconducting devices (common practice, from memory), so chains
/// are ranked by two-qubit gates first and one-qubit gates break ties.
const TWO_QUBIT_WEIGHT: u32 = 16;

/// Per gate, the weight of the longest chain of non-commuting gates that starts at it (itself
/// included; [`TWO_QUBIT_WEIGHT`] per two-qubit gate, 1 per other gate): the critical path to
/// the end of the circuit. One backward pass keeps, per qubit and kind, the heaviest such
/// chain among the later gates on that qubit.
fn tails(c: &Circuit) -> Vec<u32> {
    let mut best: Vec<[u32; 3]> = vec![[0; 3]; c.num_qubits];
    let mut out = vec![0u32; c.gates.len()];
    for (i, g) in c.gates.iter().enumerate().rev() {
        let qs = g.qubits();
        let mut after = 0;
        for &q in &qs {
            let k = kind(g, q);
            for (j, &b) in best[q as usize].iter().enumerate() {
                if k == Kind::Other || j != k as usize {
                    after = after.max(b);
                }
            }
        }
        let t = after
            + if g.is_two_qubit() {
                TWO_QUBIT_WEIGHT
            } else {
                1
            };
        for &q in &qs {
            let slot = &mut best[q as usize][kind(g, q) as usize];
            *slot = (*slot).max(t);
        }
        out[i] = t;
    }
    out
}

/// List scheduling with critical-path priority over the commutation DAG: layer by layer, the
/// ready two-qubit gates (every earlier gate on their qubits that they do not commute with
/// already placed) take the layer in order of their critical path (`tails`), heaviest first, one per qubit;
/// one-qubit gates are placed the moment they are ready. This is the classic priority list
/// scheduling of a DAG (Hu, "Parallel sequencing and assembly line problems", Operations
/// Research 9, 841 (1961); the critical-path rule as usually taught, from memory) on the
/// commutation rules of the module essay. Returns the gate indices in the new order; `None`
/// above [`PRIORITY_MAX_GATES`].
///
/// Readiness per qubit: the gates on a qubit form runs of one kind; the gates of the first
/// run holding an unplaced gate are clear there (all of them when its kind is `Z` or `X`, its
/// first only when `Other`), the next run once that one is all placed. A gate is ready when
/// clear on all its qubits. Each gate is placed after every gate on its qubits it does not
/// commute with, so the order is a linear extension of the non-commuting pairs and the
/// product is unchanged (the argument of the module essay).
pub fn by_priority(c: &Circuit) -> Option<Vec<u32>> {
    use std::cmp::Reverse;
    use std::collections::BinaryHeap;
    let n = c.gates.len();
    if n > PRIORITY_MAX_GATES {
        return None;
    }
    let tail = tails(c);
    // Per qubit, its gates in order with their kind there.
    let mut seq: Vec<Vec<(u32, Kind)>> = vec![Vec::new(); c.num_qubits];
    for (i, g) in c.gates.iter().enumerate() {
        for q in g.qubits() {
            seq[q as usize].push((i as u32, kind(g, q)));
        }
    }
    // Per qubit: first unplaced entry, and the end of the entries already made clear.
    let mut front = vec![0usize; c.num_qubits];
    let mut clear_end = vec![0usize; c.num_qubits];
    let mut clear_on = vec![0u8; n];
    let mut placed = vec![false; n];
    let mut order: Vec<u32> = Vec::with_capacity(n);
    let mut heap: BinaryHeap<(u32, Reverse<u32>)> = BinaryHeap::new();
    let mut fresh: Vec<u32> = Vec::new();
    // Advances qubit `q` past placed entries and, when its clear run is used up, clears the
    // next run; gates clear on all their qubits go to `fresh`.
    let advance = |q: usize,
                   front: &mut [usize],
                   clear_end: &mut [usize],
                   clear_on: &mut [u8],
                   placed: &[bool],
                   fresh: &mut Vec<u32>| {
        let s = &seq[q];
        while front[q] < s.len() && placed[s[front[q]].0 as usize] {
            front[q] += 1;
        }
        if front[q] < clear_end[q] || front[q] == s.len() {
            return;
        }
        let k = s[front[q]].1;
        let mut e = front[q];
        loop {
            let (g, _) = s[e];
            clear_on[g as usize] += 1;
            if clear_on[g as usize] as usize == c.gates[g as usize].qubits().len() {
                fresh.push(g);
            }
            e += 1;
            if k == Kind::Other || e == s.len() || s[e].1 != k {
                break;
            }
        }
        clear_end[q] = e;
    };
    for q in 0..c.num_qubits {
        advance(
            q,
            &mut front,
            &mut clear_end,
            &mut clear_on,
            &placed,
            &mut fresh,
        );
    }
    let mut busy = vec![false; c.num_qubits];
    let mut layer: Vec<u32> = Vec::new();
    let mut deferred: Vec<(u32, Reverse<u32>)> = Vec::new();
    loop {
        // One-qubit gates are placed as soon as they are ready; two-qubit ones wait for a layer.
        while let Some(g) = fresh.pop() {
            let gate = &c.gates[g as usize];
            if gate.is_two_qubit() {
                heap.push((tail[g as usize], Reverse(g)));
                continue;
            }
            placed[g as usize] = true;
            order.push(g);
            for q in gate.qubits() {
                advance(
                    q as usize,
                    &mut front,
                    &mut clear_end,
                    &mut clear_on,
                    &placed,
                    &mut fresh,
                );
            }
        }
        if heap.is_empty() {
            break;
        }
        while let Some(top) = heap.pop() {
            let qs = c.gates[top.1 .0 as usize].qubits();
            if qs.iter().any(|&q| busy[q as usize]) {
                deferred.push(top);
                if deferred.len() >= DEFERRALS {
                    break;
                }
                continue;
            }
            for &q in &qs {
                busy[q as usize] = true;
            }
            layer.push(top.1 .0);
        }
        heap.extend(deferred.drain(..));
        for &g in &layer {
            placed[g as usize] = true;
            order.push(g);
        }
        for g in layer.drain(..) {
            for q in c.gates[g as usize].qubits() {
                busy[q as usize] = false;
                advance(
                    q as usize,
                    &mut front,
                    &mut clear_end,
                    &mut clear_on,
                    &placed,
                    &mut fresh,
                );
            }
        }
    }
    debug_assert_eq!(order.len(), n, "every gate placed");
    (order.len() == n).then_some(order)
}

/// The order of [`by_commutation`]: gate indices sorted by (layer, index).
fn order(c: &Circuit) -> Vec<u32> {
    let t = layers(c);
    let mut order: Vec<u32> = (0..c.gates.len() as u32).collect();
    order.sort_unstable_by_key(|&i| (t[i as usize], i));
    order
}

/// The gates of `c` written layer by layer (see the module essay); the same unitary.
pub fn by_commutation(c: &Circuit) -> Circuit {
    let order = order(c);
    Circuit {
        num_qubits: c.num_qubits,
        num_clbits: c.num_clbits,
        gates: order.iter().map(|&i| c.gates[i as usize]).collect(),
        global_phase: c.global_phase,
    }
}

/// (two-qubit depth, depth) of `gates` on `num_qubits` qubits, in the order given
/// ([`crate::circuit::metrics::counts_of`]).
fn depths_of<'a>(num_qubits: usize, gates: impl IntoIterator<Item = &'a Gate>) -> (usize, usize) {
    let k = super::metrics::counts_of(num_qubits, gates.into_iter().copied());
    (k.two_qubit_depth, k.depth)
}

/// (two-qubit depth, depth) of `c` in its gate order.
pub fn depths(c: &Circuit) -> (usize, usize) {
    depths_of(c.num_qubits, &c.gates)
}

/// `c` in the better of the [`by_commutation`] and [`by_priority`] orders when that lowers the
/// two-qubit depth (then the depth), else `c` itself. The new order is scored before it is built and applied in place
/// (cycle by cycle), so a large block is never held twice.
pub fn shallower(mut c: Circuit) -> Circuit {
    let score =
        |order: &[u32]| depths_of(c.num_qubits, order.iter().map(|&i| &c.gates[i as usize]));
    let mut order = order(&c);
    let mut new = score(&order);
    if let Some(p) = by_priority(&c) {
        let d = score(&p);
        if d < new {
            (order, new) = (p, d);
        }
    }
    if new >= depths(&c) {
        return c;
    }
    // Position k takes the gate at order[k]: follow each cycle once, marking done entries.
    const DONE: u32 = u32::MAX;
    for start in 0..order.len() {
        if order[start] == DONE {
            continue;
        }
        let first = c.gates[start];
        let mut k = start;
        loop {
            let from = order[k] as usize;
            order[k] = DONE;
            if from == start {
                c.gates[k] = first;
                break;
            }
            c.gates[k] = c.gates[from];
            k = from;
        }
    }
    c
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sim::unitary_distance;
    use proptest::prelude::*;

    fn reordered(c: &Circuit, order: &[u32]) -> Circuit {
        let mut sorted = order.to_vec();
        sorted.sort_unstable();
        assert_eq!(
            sorted,
            (0..c.gates.len() as u32).collect::<Vec<_>>(),
            "a permutation"
        );
        circuit(
            c.num_qubits,
            order.iter().map(|&i| c.gates[i as usize]).collect(),
        )
    }

    fn circuit(n: usize, gates: Vec<Gate>) -> Circuit {
        let mut c = Circuit::new(n, 0);
        c.extend(gates);
        c
    }

    #[test]
    fn cnots_sharing_a_control_or_a_target_share_layers() {
        // In gate order, cx(0,1) | cx(0,2), cx(3,1) | cx(3,2): cx(3,2) waits for both qubits
        // of the second layer, two-qubit depth 3 (hand-checked). cx(3,2) commutes with
        // cx(0,2) (shared target) and cx(3,1) (shared control), so it moves to the first
        // layer beside cx(0,1): depth 2, in the order cx(0,1) cx(3,2) cx(0,2) cx(3,1).
        let c = circuit(
            4,
            vec![
                Gate::Cx(0, 1),
                Gate::Cx(0, 2),
                Gate::Cx(3, 1),
                Gate::Cx(3, 2),
            ],
        );
        assert_eq!(depths(&c).0, 3);
        let s = by_commutation(&c);
        assert_eq!(
            s.gates,
            vec![
                Gate::Cx(0, 1),
                Gate::Cx(3, 2),
                Gate::Cx(0, 2),
                Gate::Cx(3, 1)
            ]
        );
        assert_eq!(depths(&s).0, 2);
        assert!(unitary_distance(&s, &c) < 1e-12);
        assert_eq!(shallower(c).gates, s.gates);
    }

    #[test]
    fn the_gate_that_starts_the_longest_chain_goes_first() {
        // cx(0,1) and cx(0,2) share a control (they commute) and cx(0,2) starts a chain of
        // three on qubits 2 and 3 (control and target alternate, so each waits for the one
        // before). In input order the chain waits a layer behind cx(0,1): two-qubit depth 5,
        // by first free layer too. Longest chain first: cx(0,2), then cx(2,3) beside cx(0,1),
        // then cx(3,2), cx(2,3): depth 4 (hand-checked).
        let c = circuit(
            4,
            vec![
                Gate::Cx(0, 1),
                Gate::Cx(0, 2),
                Gate::Cx(2, 3),
                Gate::Cx(3, 2),
                Gate::Cx(2, 3),
            ],
        );
        assert_eq!(depths(&c).0, 5);
        assert_eq!(depths(&by_commutation(&c)).0, 5);
        assert_eq!(tails(&c), [1, 4, 3, 2, 1].map(|k| k * TWO_QUBIT_WEIGHT));
        let p = by_priority(&c).expect("small");
        assert_eq!(p, vec![1, 2, 0, 3, 4]);
        let s = shallower(c.clone());
        assert_eq!(depths(&s).0, 4);
        assert!(unitary_distance(&s, &c) < 1e-12);
    }

    #[test]
    fn gates_that_do_not_commute_keep_their_order() {
        // cx(0,1) then cx(1,0): qubit 1 is X-type then Z-type, so nothing moves.
        let c = circuit(
            2,
            vec![Gate::Cx(0, 1), Gate::Cx(1, 0), Gate::H(0), Gate::Cx(0, 1)],
        );
        assert_eq!(by_commutation(&c).gates, c.gates);
    }

    fn gate() -> impl Strategy<Value = Gate> {
        (0u32..4, 0u32..4, 0usize..11, -3.0f64..3.0).prop_map(|(a, b, k, t)| {
            let b = if a == b { (b + 1) % 4 } else { b };
            match k {
                0..=2 => Gate::Cx(a, b),
                3 => Gate::Cz(a, b),
                4 => Gate::Rz(a, t),
                5 => Gate::Sx(a),
                6 => Gate::X(a),
                7 => Gate::S(a),
                8 => Gate::H(a),
                9 => Gate::Rx(a, t),
                _ => Gate::Swap(a, b),
            }
        })
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(100))]

        /// Reordering keeps the unitary to 1e-9 (compared by full unitaries, global phase included) and never
        /// lengthens what `shallower` returns.
        #[test]
        fn reordering_keeps_the_unitary(gates in prop::collection::vec(gate(), 0..60)) {
            let c = circuit(4, gates);
            let s = by_commutation(&c);
            prop_assert_eq!(s.gates.len(), c.gates.len());
            prop_assert!(unitary_distance(&s, &c) < 1e-9);
            let p = reordered(&c, &by_priority(&c).expect("small"));
            prop_assert!(unitary_distance(&p, &c) < 1e-9);
            let k = shallower(c.clone());
            prop_assert!(depths(&k) <= depths(&c));
            prop_assert!(depths(&k) <= depths(&s) && depths(&k) <= depths(&p));
            // Applied in place, it is exactly one of the three orders.
            prop_assert!(k.gates == c.gates || k.gates == s.gates || k.gates == p.gates);
        }

        /// Past the window and the forgetting of old layers: long runs of CNOTs from one
        /// control (the ancilla's pattern) between random gates keep the unitary too.
        #[test]
        fn long_runs_keep_the_unitary(
            gates in prop::collection::vec(gate(), 200..400),
            runs in prop::collection::vec((1u32..4, 100usize..300), 1..4),
        ) {
            let mut all = gates;
            for (k, (t, len)) in runs.into_iter().enumerate() {
                let at = (k * 97) % all.len();
                let run: Vec<Gate> = (0..len)
                    .map(|i| if i % 3 == 2 { Gate::Rz(t, 0.1 * i as f64) } else { Gate::Cx(0, t) })
                    .collect();
                all.splice(at..at, run);
            }
            let c = circuit(4, all);
            let s = by_commutation(&c);
            prop_assert!(unitary_distance(&s, &c) < 1e-9);
            let p = reordered(&c, &by_priority(&c).expect("small"));
            prop_assert!(unitary_distance(&p, &c) < 1e-9);
            let k = shallower(c.clone());
            prop_assert!(k.gates == c.gates || k.gates == s.gates || k.gates == p.gates);
        }
    }
}
