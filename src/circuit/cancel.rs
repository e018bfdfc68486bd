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
    let mut p = Peephole::new(c.num_qubits, c.gates.len());
    for g in c.gates.drain(..) {
        p.push(g);
    }
    c.gates = p.finish();
}

/// The pass of [`cancel_inverses`] as a stream: gates go in one at a time, and the state can
/// be cloned part way, so circuits that share their first gates (the real and imaginary
/// Hadamard tests of one time point differ only in their readout) run the shared part once.
/// Pushing `a` then `b` gives exactly what [`cancel_inverses`] gives on `a ++ b`.
#[derive(Clone)]
pub struct Peephole {
    live: Vec<Option<Gate>>,
    stacks: Vec<Vec<usize>>,
}

impl Peephole {
    /// An empty stream over `num_qubits` qubits, with room for `capacity` gates.
    pub fn new(num_qubits: usize, capacity: usize) -> Peephole {
        Peephole {
            live: Vec::with_capacity(capacity),
            stacks: vec![Vec::new(); num_qubits],
        }
    }

    /// Feeds one gate.
    pub fn push(&mut self, g: Gate) {
        let qs = g.qubits();
        let top = |q: u32| self.stacks[q as usize].last().copied();
        let first = top(qs[0]);
        let prev = first.filter(|_| qs[1..].iter().all(|&q| top(q) == first));
        if let Some(i) = prev {
            match meet(self.live[i].expect("stack holds live gates"), g) {
                Meet::Merge(m) => {
                    self.live[i] = Some(m);
                    return;
                }
                Meet::Cancel => {
                    self.live[i] = None;
                    for &q in &qs {
                        self.stacks[q as usize].pop();
                    }
                    return;
                }
                Meet::Stay => {}
            }
        }
        let idx = self.live.len();
        self.live.push(Some(g));
        for &q in &qs {
            self.stacks[q as usize].push(idx);
        }
    }

    /// The gates that survive so far, in order (what [`Peephole::finish`] would return).
    pub fn gates(&self) -> impl Iterator<Item = Gate> + '_ {
        self.live.iter().flatten().copied()
    }

    /// The gates that survive, in order.
    pub fn finish(self) -> Vec<Gate> {
        let kept = self.live.iter().filter(|g| g.is_some()).count();
        let mut out = Vec::with_capacity(kept);
        out.extend(self.live.into_iter().flatten());
        out
    }

    /// What pushing `tail` would leave, without changing or cloning this stream: an overlay
    /// that records which live gates `tail` removes or rewrites and what it appends. Its
    /// [`Tailed::gates`] are exactly `self.clone()`, `tail` pushed, then [`Peephole::finish`].
    pub fn with_tail(&self, tail: &[Gate]) -> Tailed<'_> {
        let mut t = Tailed {
            base: self,
            changed: Vec::new(),
            appended: Vec::new(),
            over: Vec::new(),
        };
        for &g in tail {
            t.push(g);
        }
        t.changed.sort_by_key(|c| c.0);
        t
    }
}

/// A [`Peephole`] stream done with pushing, that takes tails of at most `longest_tail` gates
/// ([`Peephole::settle`]): each qubit keeps only the top of its stack, which is all such a
/// tail can reach.
pub struct Settled {
    stream: Peephole,
    longest_tail: usize,
}

impl Peephole {
    /// This stream, done with pushing, for tails of at most `longest_tail` gates: each qubit's
    /// stack keeps its top `longest_tail + 1` entries and the rest (a word per gate and qubit)
    /// is freed, and the slots of cancelled gates leave the live list (the kept stack entries
    /// are renumbered by the live gates before them). Invariant: a tail's gate pops at most
    /// one entry of each stack it touches (a cancellation) and reads the entry on top, so a
    /// tail of `t` gates reads at most the top `t + 1` entries of any stack: [`Settled::
    /// with_tail`] of such a tail is exactly [`Peephole::with_tail`] of the unsettled stream.
    pub fn settle(mut self, longest_tail: usize) -> Settled {
        let keep = longest_tail + 1;
        for stack in &mut self.stacks {
            if stack.len() > keep {
                stack.drain(..stack.len() - keep);
            }
        }
        // Stacks hold live gates only, so each kept entry has a place in the compacted list.
        let mut wanted: Vec<usize> = self.stacks.iter().flatten().copied().collect();
        wanted.sort_unstable();
        wanted.dedup();
        let mut renumbered = Vec::with_capacity(wanted.len());
        let mut live_before = 0;
        for (i, g) in self.live.iter().enumerate() {
            if renumbered.len() < wanted.len() && wanted[renumbered.len()] == i {
                renumbered.push(live_before);
            }
            live_before += usize::from(g.is_some());
        }
        for stack in &mut self.stacks {
            for i in stack.iter_mut() {
                *i = renumbered[wanted.binary_search(i).expect("a kept entry")];
            }
            stack.shrink_to_fit();
        }
        self.live.retain(Option::is_some);
        self.live.shrink_to_fit();
        Settled {
            stream: self,
            longest_tail,
        }
    }
}

impl Settled {
    /// The gates that survive, in order ([`Peephole::gates`]).
    pub fn gates(&self) -> impl Iterator<Item = Gate> + '_ {
        self.stream.gates()
    }

    /// [`Peephole::with_tail`] of the stream before it was settled. Panics on a tail longer
    /// than the stream was settled for (a compiler bug: the overlay could read a forgotten
    /// stack entry).
    pub fn with_tail(&self, tail: &[Gate]) -> Tailed<'_> {
        assert!(
            tail.len() <= self.longest_tail,
            "a tail of {} gates on a stream settled for {}",
            tail.len(),
            self.longest_tail
        );
        self.stream.with_tail(tail)
    }
}

/// What a gate does to the live gate just before it on all of its qubits.
enum Meet {
    /// The two become this one gate (adjacent `rz`).
    Merge(Gate),
    /// The two cancel.
    Cancel,
    /// Both stay.
    Stay,
}

fn meet(p: Gate, g: Gate) -> Meet {
    // Symmetric two-qubit gates cancel whatever the operand order.
    let same_pair = p.qubits() == g.qubits()
        || (matches!(g, Gate::Cz(..) | Gate::Swap(..)) && p.name() == g.name());
    if same_pair && !g.is_measure() {
        if let (Gate::Rz(q, a), Gate::Rz(_, b)) = (p, g) {
            return if (a + b).abs() <= ANGLE_EPS {
                Meet::Cancel
            } else {
                Meet::Merge(Gate::Rz(q, a + b))
            };
        }
        if p.inverse() == Some(g)
            || (p.name() == g.name() && matches!(g, Gate::Cz(..) | Gate::Swap(..)))
        {
            return Meet::Cancel;
        }
    }
    Meet::Stay
}

/// A [`Peephole`] stream with a few more gates pushed, held as an overlay on the shared
/// stream ([`Peephole::with_tail`]).
pub struct Tailed<'a> {
    base: &'a Peephole,
    /// Live gates of `base` the tail removed (`None`) or rewrote; sorted by index once built.
    changed: Vec<(usize, Option<Gate>)>,
    /// Gates the tail appended (indices from `base.live.len()`), `None` once removed.
    appended: Vec<Option<Gate>>,
    /// Per qubit the tail touched: how many of `base`'s stack entries it popped, and the
    /// indices it pushed above them.
    over: Vec<(u32, usize, Vec<usize>)>,
}

impl Tailed<'_> {
    fn live(&self, i: usize) -> Option<Gate> {
        let n = self.base.live.len();
        if i >= n {
            return self.appended[i - n];
        }
        match self.changed.iter().rev().find(|c| c.0 == i) {
            Some(c) => c.1,
            None => self.base.live[i],
        }
    }

    fn set(&mut self, i: usize, g: Option<Gate>) {
        let n = self.base.live.len();
        if i >= n {
            self.appended[i - n] = g;
        } else {
            self.changed.push((i, g));
        }
    }

    fn top(&self, q: u32) -> Option<usize> {
        let base = &self.base.stacks[q as usize];
        match self.over.iter().find(|o| o.0 == q) {
            Some((_, popped, pushed)) => pushed
                .last()
                .copied()
                .or_else(|| base.len().checked_sub(popped + 1).map(|k| base[k])),
            None => base.last().copied(),
        }
    }

    fn over_mut(&mut self, q: u32) -> &mut (u32, usize, Vec<usize>) {
        let k = match self.over.iter().position(|o| o.0 == q) {
            Some(k) => k,
            None => {
                self.over.push((q, 0, Vec::new()));
                self.over.len() - 1
            }
        };
        &mut self.over[k]
    }

    fn push(&mut self, g: Gate) {
        let qs = g.qubits();
        let first = self.top(qs[0]);
        let prev = first.filter(|_| qs[1..].iter().all(|&q| self.top(q) == first));
        if let Some(i) = prev {
            match meet(self.live(i).expect("stack holds live gates"), g) {
                Meet::Merge(m) => {
                    self.set(i, Some(m));
                    return;
                }
                Meet::Cancel => {
                    self.set(i, None);
                    for &q in &qs {
                        let o = self.over_mut(q);
                        if o.2.pop().is_none() {
                            o.1 += 1;
                        }
                    }
                    return;
                }
                Meet::Stay => {}
            }
        }
        let idx = self.base.live.len() + self.appended.len();
        self.appended.push(Some(g));
        for &q in &qs {
            self.over_mut(q).2.push(idx);
        }
    }

    /// The surviving gates in order (see [`Peephole::with_tail`]).
    pub fn gates(&self) -> impl Iterator<Item = Gate> + '_ {
        let mut next = 0usize;
        self.base
            .live
            .iter()
            .enumerate()
            .filter_map(move |(i, g)| {
                let mut out = *g;
                // `changed` is sorted by index, later changes of one index last.
                while next < self.changed.len() && self.changed[next].0 == i {
                    out = self.changed[next].1;
                    next += 1;
                }
                out
            })
            .chain(self.appended.iter().flatten().copied())
    }

    /// The gates the tail appended, when it left every gate of the shared stream as it was
    /// (then [`Tailed::gates`] is the shared stream's gates followed by these).
    pub fn appended_only(&self) -> Option<impl Iterator<Item = Gate> + '_> {
        self.changed
            .is_empty()
            .then(|| self.appended.iter().flatten().copied())
    }

    /// The surviving gates as a list.
    pub fn to_vec(&self) -> Vec<Gate> {
        let mut out = Vec::with_capacity(self.base.live.len() + self.appended.len());
        out.extend(self.gates());
        out
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

    #[test]
    fn a_tail_over_a_shared_stream_equals_cancelling_the_whole_circuit() {
        // Random gate lists on 3 qubits from a small alphabet (so that much cancels), split
        // into a shared head and a tail: the overlay, a pushed clone and the whole-circuit
        // pass agree gate for gate.
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        for _ in 0..2000 {
            let len = rng.gen_range(0..24);
            let gates: Vec<Gate> = (0..len)
                .map(|_| {
                    let (a, b) = (rng.gen_range(0..3u32), rng.gen_range(1..3u32));
                    let b = (a + b) % 3;
                    match rng.gen_range(0..7) {
                        0 => Gate::H(a),
                        1 => Gate::S(a),
                        2 => Gate::Sdg(a),
                        3 => Gate::Rz(a, [0.5, -0.5, 0.25][rng.gen_range(0..3)]),
                        4 => Gate::Cx(a, b),
                        5 => Gate::Cz(a, b),
                        _ => Gate::Swap(a, b),
                    }
                })
                .collect();
            let cut = rng.gen_range(0..=len);
            let mut whole = Circuit::new(3, 0);
            whole.extend(gates.iter().copied());
            cancel_inverses(&mut whole);
            let mut head = Peephole::new(3, len);
            gates[..cut].iter().for_each(|&g| head.push(g));
            let overlay = head.with_tail(&gates[cut..]).to_vec();
            let mut pushed = head.clone();
            gates[cut..].iter().for_each(|&g| pushed.push(g));
            // Settled for exactly this tail: only the top `len − cut + 1` entries per stack.
            let settled = head.clone().settle(len - cut);
            assert_eq!(overlay, whole.gates, "{gates:?} cut at {cut}");
            assert_eq!(pushed.finish(), whole.gates, "{gates:?} cut at {cut}");
            let tailed = settled.with_tail(&gates[cut..]).to_vec();
            assert_eq!(tailed, whole.gates, "settled: {gates:?} cut at {cut}");
        }
    }
}
