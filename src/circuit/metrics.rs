//! Circuit costs: depth, gate counts, critical-path duration and estimated success probability.
//!
//! In: a [`Circuit`] and, for the calibrated figures, per-gate durations and error rates (the
//! device layer supplies them as closures so this module knows nothing of devices). Out: plain
//! numbers. Depth is the ASAP layer count where every gate, measurements included, occupies one
//! layer on each of its qubits; duration is the same longest path weighted by gate time.

use super::{Circuit, Gate};
use serde::Serialize;

/// Structural costs of one circuit.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize)]
pub struct Counts {
    pub depth: usize,
    /// Layers of two-qubit gates alone: the longest chain of two-qubit gates (one-qubit gates
    /// and measurements weigh nothing).
    pub two_qubit_depth: usize,
    pub two_qubit: usize,
    pub one_qubit: usize,
    pub measurements: usize,
    pub swaps: usize,
}

/// Counts gates and computes the depth.
pub fn counts(c: &Circuit) -> Counts {
    counts_of(c.num_qubits, c.gates.iter().copied())
}

/// [`counts`] of the circuit over `num_qubits` qubits whose gates `gates` yields, in one pass
/// (the depth is [`critical_path`] with every gate lasting 1, counted in integers).
pub fn counts_of(num_qubits: usize, gates: impl IntoIterator<Item = Gate>) -> Counts {
    let mut c = Counter::new(num_qubits);
    c.extend(gates);
    c.counts()
}

/// [`counts_of`] as a stream: gates go in one at a time and the state can be cloned part way,
/// so circuits that share their first gates count the shared part once.
#[derive(Clone, Debug)]
pub struct Counter {
    counts: Counts,
    /// Per qubit, the layer its last gate ends on.
    ready: Vec<usize>,
    /// Per qubit, the two-qubit layer its last two-qubit gate ends on.
    ready2: Vec<usize>,
}

impl Counter {
    /// Nothing counted yet, on `num_qubits` qubits.
    pub fn new(num_qubits: usize) -> Counter {
        Counter {
            counts: Counts::default(),
            ready: vec![0; num_qubits],
            ready2: vec![0; num_qubits],
        }
    }

    /// Counts `g`.
    pub fn push(&mut self, g: Gate) {
        let (out, ready, ready2) = (&mut self.counts, &mut self.ready, &mut self.ready2);
        match g {
            Gate::Measure(..) => out.measurements += 1,
            Gate::Swap(..) => {
                out.two_qubit += 1;
                out.swaps += 1
            }
            g if g.is_two_qubit() => out.two_qubit += 1,
            _ => out.one_qubit += 1,
        }
        let end = match g {
            Gate::Cx(a, b) | Gate::Cz(a, b) | Gate::Swap(a, b) => {
                let end = ready[a as usize].max(ready[b as usize]) + 1;
                ready[a as usize] = end;
                ready[b as usize] = end;
                let end2 = ready2[a as usize].max(ready2[b as usize]) + 1;
                ready2[a as usize] = end2;
                ready2[b as usize] = end2;
                out.two_qubit_depth = out.two_qubit_depth.max(end2);
                end
            }
            _ => {
                let q = g.qubits()[0] as usize;
                ready[q] += 1;
                ready[q]
            }
        };
        out.depth = out.depth.max(end);
    }

    /// Counts every gate of `gates`.
    pub fn extend(&mut self, gates: impl IntoIterator<Item = Gate>) {
        for g in gates {
            self.push(g);
        }
    }

    /// The costs of the gates counted so far.
    pub fn counts(&self) -> Counts {
        self.counts
    }
}

/// Length of the longest dependency chain with each gate weighted by `duration(gate)`.
pub fn critical_path(c: &Circuit, duration: impl Fn(&Gate) -> f64) -> f64 {
    let mut ready = vec![0.0f64; c.num_qubits];
    let mut longest = 0.0f64;
    for g in &c.gates {
        let qs = g.qubits();
        let start = qs.iter().map(|&q| ready[q as usize]).fold(0.0, f64::max);
        let end = start + duration(g);
        for &q in &qs {
            ready[q as usize] = end;
        }
        longest = longest.max(end);
    }
    longest
}

/// `Π (1 − error(gate))` over every gate, measurements included: the usual first-order estimate
/// of the probability that no error occurs (common practice; it ignores crosstalk and idling).
pub fn success_probability(c: &Circuit, error: impl Fn(&Gate) -> f64) -> f64 {
    c.gates.iter().map(|g| 1.0 - error(g)).product()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn depth_counts_parallel_gates_once() {
        let mut c = Circuit::new(3, 1);
        c.extend([
            Gate::H(0),
            Gate::H(1),
            Gate::H(2),
            Gate::Cx(0, 1),
            Gate::X(2),
            Gate::Cx(1, 2),
            Gate::Measure(2, 0),
        ]);
        let k = counts(&c);
        assert_eq!(k.depth, 4);
        assert_eq!(k.two_qubit, 2);
        assert_eq!(k.one_qubit, 4);
        assert_eq!(k.measurements, 1);
        let t = critical_path(&c, |g| if g.is_two_qubit() { 300.0 } else { 35.0 });
        assert_eq!(t, 35.0 + 300.0 + 300.0 + 35.0);
        let p = success_probability(&c, |g| if g.is_two_qubit() { 0.01 } else { 0.0 });
        assert!((p - 0.99f64 * 0.99).abs() < 1e-15);
        // cx(0,1) then cx(1,2) share qubit 1: two layers of two-qubit gates.
        assert_eq!(k.two_qubit_depth, 2);
    }

    #[test]
    fn two_qubit_depth_skips_one_qubit_layers() {
        // cx(0,1) | cx(2,3) run side by side; the three one-qubit gates on 1 add to the depth
        // but not to the two-qubit depth; the swap is a two-qubit gate: layers 1, 2, 3 on
        // qubits 1 and 2 (hand-checked: depth 1 + 3 + 1 + 1 = 6, two-qubit depth 3).
        let mut c = Circuit::new(4, 0);
        c.extend([
            Gate::Cx(0, 1),
            Gate::Cx(2, 3),
            Gate::H(1),
            Gate::S(1),
            Gate::H(1),
            Gate::Cz(1, 2),
            Gate::Swap(2, 3),
        ]);
        let k = counts(&c);
        assert_eq!((k.depth, k.two_qubit_depth, k.two_qubit), (6, 3, 4));
    }
}
