//! The circuits of a device campaign, built from one routed step: lowered once, stitched at the
//! junctions, written once.
//!
//! In: a [`RoutedStep`] (see [`super::reuse`]), the [`TargetPlan`] and [`Device`] it was routed
//! for, and per circuit its logical prefix (state preparation), its number of steps and its
//! logical suffix (bases, measurements). Out: per circuit an [`Emitted`]: the OpenQASM 3 text
//! (physical qubits, native gates only), its costs and its final layout; or, for tests, the
//! same circuit as IR ([`DeviceCampaign::circuit`], a [`Routed`] whose circuit is a
//! [`DeviceCircuit`]). Invariant: the text is exactly `qasm::write` of that IR circuit, and the
//! circuit equals prefix · `S(δ)^r` · suffix under the initial and final layouts, global phase
//! included. Every lowered block and piece is a [`DeviceCircuit`] (checked by `verify_ir` with
//! coupling and native names once), and only their gates are printed as physical text; that
//! checks the whole circuit, since no piece but the last holds a measurement.
//!
//! ## Why pieces
//!
//! A campaign at utility scale repeats one step of millions of gates `k·R` times per circuit.
//! Lowering (one-qubit fusion, Euler angles, cancellation), costing and printing it again for
//! each copy made compile time grow with the output while doing the same work over and over.
//! Instead, each distinct block of the step (the step and its mirror, or the step and
//! permutation-plus-step for order 1) is lowered, verified and printed once. Only the gates near
//! a junction can merge with the neighbouring block (the mirror seam folds the last rotation
//! into its image, one-qubit runs fuse across it), so a circuit is
//!
//! `[prefix + head of block 1] · interior 1 · [tail 1 + head 2] · interior 2 · … · [tail r + suffix]`
//!
//! where the bracketed *stitches* are lowered afresh (each once per distinct pair of blocks, the
//! ends once per circuit) and the interiors are shared. A stitch window is [`STITCH_WINDOW`]
//! gates at each end of a block: the seam's cancellations that reach further back (gates of
//! qubits the last rotations never touch again) are forgone, a few hundred gates in a step of
//! millions, while exactness never depends on the window. Steps smaller than
//! [`STITCH_MIN_GATES`] are assembled and lowered as whole circuits instead (they are cheap, and
//! small campaigns keep every cancellation).
//!
//! Cost: lowering and printing once per block, plus per circuit the stitches and a copy of the
//! interiors' text; depth, duration and success probability by one pass over the gates with
//! the calibration in tables ([`crate::device::CostModel`]).

use super::reuse::{permutation_swaps, Formula, RoutedStep};
use super::swap::{insert_swaps, SwapParams};
use super::{plan_swap_params, DeviceCircuit, RouteConfig, Routed, TargetPlan};
use crate::circuit::verify::{verify_ir, IrError, Rules};
use crate::circuit::{Circuit, Gate};
use crate::device::{CostModel, Device, Tally};
use crate::lower::euler::wrap;
use crate::lower::lower_for_output;
use crate::plan::Costs;
use crate::qasm::{write, write_gates_to, Addressing};
use rayon::prelude::*;

/// Steps with fewer (unlowered) gates are assembled and lowered whole, per circuit (the
/// default of `RouteConfig::stitch_min_gates`).
pub const STITCH_MIN_GATES: usize = 1 << 16;

/// Gates at each end of a lowered block that are lowered again with the neighbouring piece
/// (the default of `RouteConfig::stitch_window`).
pub const STITCH_WINDOW: usize = 4096;

/// One circuit of the campaign, ready to write.
#[derive(Clone, Debug)]
pub struct Emitted {
    pub text: String,
    pub costs: Costs,
    pub final_layout: Vec<u32>,
}

/// A verified, lowered circuit (its gates and global phase) and its OpenQASM 3 lines.
struct Piece {
    lowered: DeviceCircuit,
    text: String,
    tally: Tally,
}

/// A lowered block: its gates, phase, where its head window ends and its tail window starts,
/// and the text of the interior in between.
struct Block {
    lowered: DeviceCircuit,
    head: usize,
    tail: usize,
    interior_text: String,
    interior_tally: Tally,
}

impl Block {
    fn interior(&self) -> &[Gate] {
        &self.lowered.circuit().gates[self.head..self.tail]
    }
}

/// Lowered blocks and the stitches between consecutive ones.
struct Stitched {
    blocks: [Block; 2],
    /// `(a, b)`: the stitch from block `a`'s tail into block `b`'s head.
    joins: Vec<((usize, usize), Piece)>,
}

/// SWAP gates in each piece of a [`RoutedStep`], counted once.
struct StepSwaps {
    head: usize,
    cores: [usize; 2],
    joins: [[usize; 2]; 2],
    tails: [usize; 2],
}

/// Everything a campaign's circuits share on one device.
pub struct DeviceCampaign<'a> {
    step: RoutedStep,
    dev: &'a Device,
    params: SwapParams,
    model: CostModel,
    swaps: StepSwaps,
    window: usize,
    stitched: Option<Stitched>,
}

fn count_swaps(c: &Circuit) -> usize {
    c.gates
        .iter()
        .filter(|g| matches!(g, Gate::Swap(..)))
        .count()
}

/// The gate lines of `c`'s gates `range` (checked as UTF-8 once here, so circuits assembled
/// from the pieces need no second check).
fn render(c: &DeviceCircuit, range: std::ops::Range<usize>) -> String {
    // Chunks print in parallel and join in order: the same bytes for any thread count.
    let bytes = c.circuit().gates[range]
        .par_chunks(1 << 14)
        .map(|chunk| {
            let mut out = Vec::with_capacity(24 * chunk.len());
            write_gates_to(&mut out, chunk, Addressing::Physical).expect("memory write");
            out
        })
        .collect::<Vec<_>>()
        .concat();
    String::from_utf8(bytes).expect("the writer emits UTF-8")
}

impl<'a> DeviceCampaign<'a> {
    /// Prepares the shared pieces (lowering, verifying and printing the blocks once when the
    /// step is large enough to stitch).
    pub fn new(
        step: RoutedStep,
        plan: &TargetPlan,
        dev: &'a Device,
        cfg: &RouteConfig,
    ) -> Result<DeviceCampaign<'a>, IrError> {
        let params = plan_swap_params(plan, cfg);
        let swaps = StepSwaps {
            head: count_swaps(&step.head),
            cores: [count_swaps(&step.cores[0]), count_swaps(&step.cores[1])],
            joins: [
                [
                    count_swaps(&step.joins[0][0]),
                    count_swaps(&step.joins[0][1]),
                ],
                [
                    count_swaps(&step.joins[1][0]),
                    count_swaps(&step.joins[1][1]),
                ],
            ],
            tails: [count_swaps(&step.tails[0]), count_swaps(&step.tails[1])],
        };
        let mut campaign = DeviceCampaign {
            step,
            dev,
            params,
            model: CostModel::new(dev),
            swaps,
            window: cfg.stitch_window,
            stitched: None,
        };
        if campaign.step.cores[0].gates.len() >= cfg.stitch_min_gates {
            campaign.stitched = Some(campaign.stitch()?);
        }
        Ok(campaign)
    }

    /// Which core of the step implements step `i` ([`RoutedStep::core_index`]).
    pub fn core_index(&self, i: usize) -> usize {
        self.step.core_index(i)
    }

    /// Lowers `c` (physical, any IR gates) and checks the result as a [`DeviceCircuit`].
    fn lowered(&self, c: &Circuit) -> Result<DeviceCircuit, IrError> {
        DeviceCircuit::checked(lower_for_output(c, &self.dev.native), self.dev)
    }

    /// Lowers `c` (physical, any IR gates), verifies it and prints its gate lines.
    fn piece(&self, c: &Circuit) -> Result<Piece, IrError> {
        let low = self.lowered(c)?;
        let text = render(&low, 0..low.circuit().gates.len());
        Ok(Piece {
            tally: self.model.tally(&low.circuit().gates),
            lowered: low,
            text,
        })
    }

    fn stitch(&self) -> Result<Stitched, IrError> {
        let (a, b) = rayon::join(
            || self.block(&self.step.cores[0]),
            || self.block(&self.step.cores[1]),
        );
        let blocks = [a?, b?];
        let pairs: &[(usize, usize)] = if self.step.formula == Formula::Symmetric {
            &[(0, 1), (1, 0)]
        } else {
            &[(0, 1), (1, 1)]
        };
        let joins = pairs
            .iter()
            .map(|&(x, y)| {
                let mut c = Circuit::new(self.dev.num_qubits, 0);
                c.extend(
                    blocks[x].lowered.circuit().gates[blocks[x].tail..]
                        .iter()
                        .copied(),
                );
                c.extend(self.step.joins[x][y].gates.iter().copied());
                c.extend(
                    blocks[y].lowered.circuit().gates[..blocks[y].head]
                        .iter()
                        .copied(),
                );
                Ok(((x, y), self.piece(&c)?))
            })
            .collect::<Result<_, IrError>>()?;
        Ok(Stitched { blocks, joins })
    }

    fn block(&self, c: &Circuit) -> Result<Block, IrError> {
        let lowered = self.lowered(c)?;
        let len = lowered.circuit().gates.len();
        let w = self.window.min(len / 2);
        let (head, tail) = (w, len - w);
        let interior_text = render(&lowered, head..tail);
        Ok(Block {
            interior_tally: self.model.tally(&lowered.circuit().gates[head..tail]),
            lowered,
            head,
            tail,
            interior_text,
        })
    }

    /// Routes a circuit's prefix and suffix around `steps` blocks: the prefix (routed from the
    /// step's start layout and brought back to it), the suffix (routed from where the blocks
    /// end, measurements included), the SWAPs inserted in all, and the final layout.
    fn ends(
        &self,
        prefix: &[Gate],
        steps: usize,
        suffix: &[Gate],
        num_clbits: usize,
    ) -> Result<(Circuit, Circuit, usize, Vec<u32>), IrError> {
        let n = self.step.start.len();
        let mut pre = Circuit::new(n, 0);
        pre.extend(prefix.iter().copied());
        let mut post = Circuit::new(n, num_clbits);
        post.extend(suffix.iter().copied());
        verify_ir(&pre, &Rules::default())?;
        verify_ir(&post, &Rules::default())?;
        let pre_r = insert_swaps(&pre, &self.step.start, self.dev, &self.params);
        let back = permutation_swaps(&pre_r.final_layout, &self.step.start, self.dev);
        let post_r = insert_swaps(&post, self.step.layout_after(steps), self.dev, &self.params);
        let mut blocks = 0;
        if steps > 0 {
            let sw = &self.swaps;
            blocks += sw.head;
            for i in 0..steps {
                let b = self.step.core_index(i);
                blocks += sw.cores[b];
                blocks += if i + 1 < steps {
                    sw.joins[b][self.step.core_index(i + 1)]
                } else {
                    sw.tails[b]
                };
            }
        }
        let swaps = pre_r.swaps + back.len() + blocks + post_r.swaps;
        let mut head = pre_r.circuit;
        head.num_clbits = 0;
        head.extend(back.into_iter().map(|(a, b)| Gate::Swap(a, b)));
        Ok((head, post_r.circuit, swaps, post_r.final_layout))
    }

    /// The pieces of one circuit, in order, with its final layout and SWAP count; `None` when
    /// the circuit is assembled whole (small steps, or no step at all).
    #[allow(clippy::type_complexity)]
    fn stitched_pieces(
        &self,
        prefix: &[Gate],
        steps: usize,
        suffix: &[Gate],
        num_clbits: usize,
    ) -> Result<Option<(Piece, Piece, usize, Vec<u32>)>, IrError> {
        let Some(st) = &self.stitched else {
            return Ok(None);
        };
        if steps == 0 {
            return Ok(None);
        }
        let (mut head, post, swaps, final_layout) = self.ends(prefix, steps, suffix, num_clbits)?;
        let (b0, bl) = (self.step.core_index(0), self.step.core_index(steps - 1));
        let (first, last) = (&st.blocks[b0], &st.blocks[bl]);
        head.extend(self.step.head.gates.iter().copied());
        head.extend(first.lowered.circuit().gates[..first.head].iter().copied());
        let mut tail = Circuit::new(self.dev.num_qubits, num_clbits);
        tail.extend(last.lowered.circuit().gates[last.tail..].iter().copied());
        tail.extend(self.step.tails[bl].gates.iter().copied());
        tail.extend(post.gates);
        Ok(Some((
            self.piece(&head)?,
            self.piece(&tail)?,
            swaps,
            final_layout,
        )))
    }

    /// Visits the gate lists of a stitched circuit in order: head piece, then per block its
    /// interior followed by the join to the next block (or the tail piece after the last).
    fn for_each_part<'s>(
        &'s self,
        steps: usize,
        head: &'s Piece,
        tail: &'s Piece,
        mut visit: impl FnMut(&'s [Gate], &'s str, f64, &'s Tally),
    ) {
        let st = self.stitched.as_ref().expect("stitched campaign");
        let parts = |p: &'s Piece| {
            let c = p.lowered.circuit();
            (&c.gates[..], &p.text[..], c.global_phase, &p.tally)
        };
        let (gates, text, phase, tally) = parts(head);
        visit(gates, text, phase, tally);
        for i in 0..steps {
            let b = self.step.core_index(i);
            let block = &st.blocks[b];
            visit(
                block.interior(),
                &block.interior_text,
                block.lowered.circuit().global_phase,
                &block.interior_tally,
            );
            if i + 1 < steps {
                let next = self.step.core_index(i + 1);
                let (_, join) = st
                    .joins
                    .iter()
                    .find(|(k, _)| *k == (b, next))
                    .expect("every consecutive pair has a join");
                let (gates, text, phase, tally) = parts(join);
                visit(gates, text, phase, tally);
            }
        }
        let (gates, text, phase, tally) = parts(tail);
        visit(gates, text, phase, tally);
    }

    /// The whole circuit as one IR circuit, lowered (small steps: the assembled circuit after
    /// junction cancellation; large: the pieces concatenated).
    fn whole(
        &self,
        prefix: &[Gate],
        steps: usize,
        suffix: &[Gate],
        num_clbits: usize,
    ) -> Result<(DeviceCircuit, usize, Vec<u32>), IrError> {
        let (head, post, swaps, final_layout) = self.ends(prefix, steps, suffix, num_clbits)?;
        let circuit = assemble(&head, steps, &post, &self.step, self.dev.num_qubits);
        let coupled = |a: u32, b: u32| self.dev.coupled(a, b);
        verify_ir(
            &circuit,
            &Rules {
                coupled: Some(&coupled),
                native: None,
            },
        )?;
        Ok((self.lowered(&circuit)?, swaps, final_layout))
    }

    /// One circuit of the campaign as IR, with its layouts and SWAP count (what [`Self::emit`]
    /// writes).
    pub fn circuit(
        &self,
        prefix: &[Gate],
        steps: usize,
        suffix: &[Gate],
        num_clbits: usize,
    ) -> Result<Routed, IrError> {
        let (circuit, swaps, final_layout) =
            match self.stitched_pieces(prefix, steps, suffix, num_clbits)? {
                None => self.whole(prefix, steps, suffix, num_clbits)?,
                Some((head, tail, swaps, final_layout)) => {
                    let mut c = Circuit::new(self.dev.num_qubits, num_clbits);
                    let mut phase = 0.0;
                    self.for_each_part(steps, &head, &tail, |gates, _, p, _| {
                        c.extend(gates.iter().copied());
                        phase += p;
                    });
                    c.global_phase = wrap(phase);
                    (DeviceCircuit::checked(c, self.dev)?, swaps, final_layout)
                }
            };
        Ok(Routed {
            circuit,
            initial_layout: self.step.start.clone(),
            final_layout,
            swaps,
        })
    }

    /// One circuit of the campaign as OpenQASM 3 text (leading `comments`), with its costs and
    /// final layout.
    pub fn emit(
        &self,
        prefix: &[Gate],
        steps: usize,
        suffix: &[Gate],
        num_clbits: usize,
        comments: &[String],
    ) -> Result<Emitted, IrError> {
        match self.stitched_pieces(prefix, steps, suffix, num_clbits)? {
            None => {
                let (c, swaps, final_layout) = self.whole(prefix, steps, suffix, num_clbits)?;
                let mut walk = self.model.walk(c.circuit().num_qubits);
                walk.add(&c.circuit().gates);
                Ok(Emitted {
                    text: write(c.circuit(), Addressing::Physical, comments),
                    costs: walk.finish(swaps),
                    final_layout,
                })
            }
            Some((head, tail, swaps, final_layout)) => {
                let mut phase = 0.0;
                let mut bytes = 0;
                let mut walk = self.model.walk(self.dev.num_qubits);
                self.for_each_part(steps, &head, &tail, |gates, text, p, tally| {
                    phase += p;
                    bytes += text.len();
                    walk.add_tallied(gates, tally);
                });
                // The header alone: no gates, so nothing to check; the gate lines that follow
                // are the texts of the checked pieces and blocks.
                let shell = Circuit {
                    num_qubits: self.dev.num_qubits,
                    num_clbits,
                    gates: Vec::new(),
                    global_phase: wrap(phase),
                };
                let mut out = write(&shell, Addressing::Physical, comments);
                out.reserve(bytes);
                self.for_each_part(steps, &head, &tail, |_, text, _, _| {
                    out.push_str(text);
                });
                Ok(Emitted {
                    text: out,
                    costs: walk.finish(swaps),
                    final_layout,
                })
            }
        }
    }
}

/// `prefix` (physical), the pieces of `steps` steps, `suffix` (physical, measurements last),
/// junctions cancelled: the unlowered circuit of the small-step path.
fn assemble(
    prefix: &Circuit,
    steps: usize,
    suffix: &Circuit,
    step: &RoutedStep,
    n_phys: usize,
) -> Circuit {
    let mut out = Circuit::new(n_phys, suffix.num_clbits);
    out.extend(prefix.gates.iter().copied());
    for piece in step.pieces(steps) {
        out.extend(piece.gates.iter().copied());
        out.global_phase += piece.global_phase;
    }
    out.extend(suffix.gates.iter().copied());
    crate::circuit::cancel::cancel_inverses(&mut out);
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::device::{lattice, Calibration, NativeSet};
    use crate::formula::Order;
    use crate::pauli::{Pauli, PauliString, PauliSum};
    use crate::route::{plan_and_route_step, routing_error, step_circuit};

    fn model() -> PauliSum {
        let s = |f: &[(usize, Pauli)]| PauliString::from_factors(f).1;
        let mut h = PauliSum::new(4);
        h.add(s(&[(0, Pauli::X), (2, Pauli::X)]), 0.7);
        h.add(s(&[(1, Pauli::Z), (3, Pauli::Z)]), -0.4);
        h.add(s(&[(0, Pauli::Y), (1, Pauli::Z), (3, Pauli::X)]), 0.3);
        h.add(s(&[(2, Pauli::Z)]), 0.5);
        h.add(s(&[(0, Pauli::Z), (3, Pauli::Y)]), 0.2);
        h
    }

    #[test]
    fn campaign_circuits_are_the_steps_repeated_phase_included_and_print_as_written() {
        // r steps of the campaign (no prefix or suffix) against the logical step circuit
        // repeated r times, by simulation with the layouts applied, global phase included
        // (`routing_error`); on both assembly paths, for every order; and the emitted text is
        // byte for byte `qasm::write` of the same circuit.
        let h = model();
        for native in [
            &["rz", "sx", "x", "cx"][..],
            &["rz", "rx", "ry", "cz"],
            &["U", "cx"],
        ] {
            let dev = Device::new(
                "grid",
                9,
                &lattice::grid(3, 3),
                NativeSet::from_names(native).unwrap(),
                Calibration::default(),
            );
            for order in [Order::First, Order::Second, Order::Fourth] {
                for stitch_min_gates in [usize::MAX, 0] {
                    let cfg = RouteConfig {
                        stitch_min_gates,
                        stitch_window: 3,
                        ..RouteConfig::default()
                    };
                    let (plan, step) = plan_and_route_step(&h, &dev, &cfg, order, 0.4).unwrap();
                    let one = step_circuit(&plan.terms(&h), &plan, order, 0.4);
                    let camp = DeviceCampaign::new(step, &plan, &dev, &cfg).unwrap();
                    assert_eq!(camp.stitched.is_some(), stitch_min_gates == 0);
                    let mut logical = Circuit::new(5, 0);
                    for r in 1..=4 {
                        logical.extend(one.gates.iter().copied());
                        let routed = camp.circuit(&[], r, &[], 0).unwrap();
                        let err = routing_error(&logical, &routed).unwrap();
                        assert!(
                            err < 1e-9,
                            "{order:?} r={r} stitched={}: {err}",
                            stitch_min_gates == 0
                        );
                        let comments = vec!["c".to_string()];
                        let e = camp.emit(&[], r, &[], 0, &comments).unwrap();
                        assert_eq!(
                            e.text,
                            write(routed.circuit.circuit(), Addressing::Physical, &comments)
                        );
                        assert_eq!(e.final_layout, routed.final_layout);
                    }
                }
            }
        }
    }
}
