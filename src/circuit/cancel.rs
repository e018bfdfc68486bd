//! Peephole clean-up: cancels adjacent inverse pairs and merges adjacent `rz` on one qubit.
//!
//! In: any circuit. Out: the same unitary (exactly, global phase included) with fewer gates.
//! "Adjacent" means no other gate touches any of the pair's qubits in between. Each qubit keeps
//! a stack of the live gates that touch it, so a cancellation exposes the gate before it and
//! chains like `h s sdg h` vanish in one pass. Cost O(gates).

use super::{Circuit, Gate};

const ANGLE_EPS: f64 = 1e-15;

/// Removes adjacent inverse pairs and merges adjacent `rz` rotations.
pub fn cancel_inverses(c: &mut Circuit) {
    let mut live: Vec<Option<Gate>> = Vec::with_capacity(c.gates.len());
    let mut stacks: Vec<Vec<usize>> = vec![Vec::new(); c.num_qubits];
    for g in c.gates.drain(..) {
        let qs = g.qubits();
        let tops: Vec<Option<usize>> = qs
            .iter()
            .map(|&q| stacks[q as usize].last().copied())
            .collect();
        let prev = tops[0].filter(|&i| tops.iter().all(|t| *t == Some(i)));
        if let Some(i) = prev {
            let p = live[i].expect("stack holds live gates");
            // Symmetric two-qubit gates cancel whatever the operand order.
            let same_pair = p.qubits() == qs
                || (matches!(g, Gate::Cz(..) | Gate::Swap(..)) && p.name() == g.name());
            if same_pair && !g.is_measure() {
                if let (Gate::Rz(q, a), Gate::Rz(_, b)) = (p, g) {
                    if (a + b).abs() <= ANGLE_EPS {
                        remove(&mut live, &mut stacks, i, &qs);
                    } else {
                        live[i] = Some(Gate::Rz(q, a + b));
                    }
                    continue;
                }
                if p.inverse() == Some(g)
                    || (p.name() == g.name() && matches!(g, Gate::Cz(..) | Gate::Swap(..)))
                {
                    remove(&mut live, &mut stacks, i, &qs);
                    continue;
                }
            }
        }
        let idx = live.len();
        live.push(Some(g));
        for &q in &qs {
            stacks[q as usize].push(idx);
        }
    }
    c.gates = live.into_iter().flatten().collect();
}

fn remove(live: &mut [Option<Gate>], stacks: &mut [Vec<usize>], i: usize, qs: &[u32]) {
    live[i] = None;
    for &q in qs {
        stacks[q as usize].pop();
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sim::unitary_distance;

    #[test]
    fn chains_of_inverses_vanish_and_the_unitary_is_kept() {
        let mut c = Circuit::new(3, 0);
        c.extend([
            Gate::H(0),
            Gate::Sdg(1),
            Gate::H(1),
            Gate::Cx(0, 1),
            Gate::Rz(1, 0.3),
            Gate::Rz(1, -0.3),
            Gate::Cx(0, 1),
            Gate::H(1),
            Gate::S(1),
            Gate::Rz(2, 0.1),
            Gate::Rz(2, 0.2),
            Gate::Cx(1, 0),
            Gate::Cx(0, 1),
        ]);
        let before = c.clone();
        cancel_inverses(&mut c);
        assert_eq!(
            c.gates,
            vec![
                Gate::H(0),
                Gate::Rz(2, 0.30000000000000004),
                Gate::Cx(1, 0),
                Gate::Cx(0, 1)
            ]
        );
        assert!(unitary_distance(&before, &c) < 1e-12);
    }
}
