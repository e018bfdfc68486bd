//! Commutation-aware scheduling: the same gates in an order with a shorter two-qubit depth.
//!
//! In: any circuit. Out: the same gates, reordered only across gates they commute with, so
//! the unitary is exactly the same (global phase included); [`shallower`] keeps the new order
//! only when its two-qubit depth (then its depth) is lower. Invariant: two gates that share a
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

/// (two-qubit depth, depth) of `gates` on `num_qubits` qubits, in the order given.
fn depths_of<'a>(num_qubits: usize, gates: impl IntoIterator<Item = &'a Gate>) -> (usize, usize) {
    let mut two = vec![0usize; num_qubits];
    let mut all = vec![0usize; num_qubits];
    let (mut d2, mut d) = (0, 0);
    for g in gates {
        let qs = g.qubits();
        let a = qs.iter().map(|&q| all[q as usize]).max().unwrap_or(0) + 1;
        let b = qs.iter().map(|&q| two[q as usize]).max().unwrap_or(0) + g.is_two_qubit() as usize;
        for &q in &qs {
            all[q as usize] = a;
            two[q as usize] = b;
        }
        d = d.max(a);
        d2 = d2.max(b);
    }
    (d2, d)
}

/// (two-qubit depth, depth) of `c` in its gate order.
pub fn depths(c: &Circuit) -> (usize, usize) {
    depths_of(c.num_qubits, &c.gates)
}

/// `c` reordered as [`by_commutation`] does when that lowers the two-qubit depth (then the
/// depth), else `c` itself. The new order is scored before it is built and applied in place
/// (cycle by cycle), so a large block is never held twice.
pub fn shallower(mut c: Circuit) -> Circuit {
    let mut order = order(&c);
    let new = depths_of(c.num_qubits, order.iter().map(|&i| &c.gates[i as usize]));
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
            let k = shallower(c.clone());
            prop_assert!(depths(&k) <= depths(&c));
            // Applied in place, it is exactly one of the two orders.
            prop_assert!(k.gates == c.gates || k.gates == s.gates);
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
            let k = shallower(c.clone());
            prop_assert!(k.gates == c.gates || k.gates == s.gates);
        }
    }
}
