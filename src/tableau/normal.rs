//! The layered normal form of a sequence of Pauli rotations, and the comparison of two.
//!
//! In: rotations `exp(−i·a/2·P)` in time order (from [`super::canonicalise`]). Out: a
//! [`NormalForm`]: layers of mutually commuting rotations, each layer sorted by axis, with the
//! gate indices every entry came from. Invariant: two sequences that differ only by exchanging
//! neighbouring commuting rotations, by splitting or merging rotations about one axis that may
//! be brought together that way, or by rotations whose angles cancel, have the same normal form;
//! and the product of the layers, in order, is the product of the input — times the quarter
//! turns that [`Builder::push`] hands back when a merged angle leaves `[−π/4, π/4]` (the
//! caller folds them into its Clifford, so merged entries keep the range that single rotations
//! have after the split of [`super::split_angle`]).
//!
//! ## The idea
//!
//! Rotations about commuting axes commute, and two rotations about one axis merge into one.
//! Modulo exactly these two rules a sequence has a unique layered form, its *Foata normal form*
//! (Cartier & Foata, "Problèmes combinatoires de commutation et réarrangements", Lecture Notes
//! in Mathematics 85, Springer, 1969, for sequences modulo commutation; with merging, these are
//! the reduced words of a graph product of groups, unique up to commutation — Green, "Graph
//! products of groups", PhD thesis, Leeds, 1990; both cited from memory). It is built online:
//! each rotation goes to the layer right after the last layer that holds a rotation it
//! anticommutes with (layer 0 if none); if that layer already holds a rotation about the same
//! axis the angles add. An entry about `P` in a higher layer cannot exist then, since it would
//! anticommute with the same rotations and so sit in the same layer. A merge whose angle falls
//! to [`ZERO_ANGLE_RAD`] or below removes the entry; the rotations placed above it because of it
//! may now sit too high, so the form is rebuilt from its own layers until no entry vanishes
//! (rare: the campaigns' circuits never cancel a rotation).
//!
//! What the form does not see: relations between different axes (`e^{−iaX}e^{−ibY}` as Euler
//! angles about other axes). The check built on it is sound (equal forms mean equal unitaries,
//! up to the angle tolerance and a global phase) but would call two circuits different that
//! only such identities relate; phasewright's passes never use them, since the lowering never
//! fuses two non-commuting rotations into one one-qubit run (`lower::fuse_and_cancel` splits
//! the run there, even where a cancellation brought them together).
//!
//! ## Cost
//!
//! A rotation scans the layers from the top down to the first one holding an anticommuting
//! rotation. Each layer keeps three masks (qubits where some member has a factor with an x
//! bit, a z bit, exactly one of them) so a layer with no letter that could anticommute is
//! skipped in `O(⌈n/64⌉)` word operations; otherwise its members are tested, one symplectic
//! popcount each. In a product formula a rotation meets an anticommuting one within a step, so
//! the scan is short; a term that commutes with the whole Hamiltonian merges down to layer 0
//! and scans every layer, `O(layers)` each time.

use super::{Rotation, ZERO_ANGLE_RAD};
use crate::pauli::PauliString;
use std::collections::HashMap;

/// Relative tolerance on rotation angles: `a` and `b` agree when `|a − b| ≤ 1e-12·max(|a|, |b|)
/// + ANGLE_ABS_TOL`.
pub const ANGLE_REL_TOL: f64 = 1e-12;

/// Absolute floor of the angle comparison (radians): the lowering re-derives angles from fused
/// 2×2 matrices (`lower::euler`), with rounding near 1e-15 rad whatever the angle's size, so a
/// purely relative test would fail small angles on devices. 1e-13 keeps two orders of margin.
pub const ANGLE_ABS_TOL: f64 = 1e-13;

/// True when two angles agree to the tolerance above.
pub fn angles_agree(a: f64, b: f64) -> bool {
    (a - b).abs() <= ANGLE_REL_TOL * a.abs().max(b.abs()) + ANGLE_ABS_TOL
}

/// One rotation of the normal form.
#[derive(Clone, Debug, PartialEq)]
pub struct Entry {
    pub axis: PauliString,
    /// Angle in the `rz` convention: the entry is `exp(−i·angle/2·axis)`.
    pub angle: f64,
    /// Indices of the gates whose rotations were merged into this entry, in time order.
    pub gates: Vec<u32>,
}

/// Layers of mutually commuting rotations, applied in order (layer 0 first).
#[derive(Clone, Debug, Default, PartialEq)]
pub struct NormalForm {
    /// Each layer sorted by axis.
    pub layers: Vec<Vec<Entry>>,
    /// Entries whose merged angle cancelled (with the gates that made them), in the order they
    /// vanished.
    pub vanished: Vec<Entry>,
    /// Rotations fed in.
    pub input_rotations: usize,
}

impl NormalForm {
    /// Number of entries over all layers.
    pub fn len(&self) -> usize {
        self.layers.iter().map(Vec::len).sum()
    }

    pub fn is_empty(&self) -> bool {
        self.layers.iter().all(Vec::is_empty)
    }
}

/// Quarter turns `exp(−i·turns·π/4·axis)` (`turns` in 1..4) split off a merged entry.
#[derive(Clone, Debug, PartialEq)]
pub struct QuarterTurn {
    pub axis: PauliString,
    pub turns: u8,
}

struct Slot {
    entry: Entry,
    layer: u32,
    alive: bool,
}

#[derive(Default)]
struct Layer {
    members: Vec<u32>,
    /// Qubits where a member's factor has an x bit (X or Y).
    x: Vec<u64>,
    /// Qubits where a member's factor has a z bit (Z or Y).
    z: Vec<u64>,
    /// Qubits where a member's factor is X or Z (exactly one bit).
    d: Vec<u64>,
}

fn word(w: &[u64], i: usize) -> u64 {
    w.get(i).copied().unwrap_or(0)
}

fn or_into(dst: &mut Vec<u64>, i: usize, v: u64) {
    if v != 0 {
        if dst.len() <= i {
            dst.resize(i + 1, 0);
        }
        dst[i] |= v;
    }
}

impl Layer {
    /// False when no member can anticommute with `p`: on every qubit of `p`, every member's
    /// factor is the identity or the same letter.
    fn may_conflict(&self, p: &PauliString) -> bool {
        let (px, pz) = (p.x.words(), p.z.words());
        (0..px.len().max(pz.len())).any(|i| {
            let (ax, az) = (word(px, i), word(pz, i));
            (ax & !az & word(&self.z, i))
                | (!ax & az & word(&self.x, i))
                | (ax & az & word(&self.d, i))
                != 0
        })
    }

    fn add(&mut self, idx: u32, p: &PauliString) {
        self.members.push(idx);
        let (px, pz) = (p.x.words(), p.z.words());
        for i in 0..px.len().max(pz.len()) {
            let (ax, az) = (word(px, i), word(pz, i));
            or_into(&mut self.x, i, ax);
            or_into(&mut self.z, i, az);
            or_into(&mut self.d, i, ax ^ az);
        }
    }
}

/// Builds a [`NormalForm`] online (see the module essay).
#[derive(Default)]
pub struct Builder {
    slots: Vec<Slot>,
    layers: Vec<Layer>,
    /// The live entry about each axis with the highest layer.
    latest: HashMap<PauliString, u32>,
    vanished: Vec<Entry>,
    input: usize,
    cancelled: bool,
}

impl Builder {
    pub fn new() -> Builder {
        Builder::default()
    }

    /// Adds the next rotation in time order. When it merges into an entry whose angle then
    /// leaves `(−π/4, π/4]`, the entry keeps the residual and the quarter turns are returned:
    /// they stand right after everything pushed so far (every entry above the merged one
    /// commutes with its axis, so they move to the top of the form freely), and the caller
    /// must conjugate every later rotation by them ([`super::canonicalise_into`] does, through
    /// its Clifford). Entries then keep the range single rotations have after
    /// [`super::split_angle`], whatever way a circuit split a rotation into gates.
    pub fn push(&mut self, r: Rotation) -> Option<QuarterTurn> {
        self.input += 1;
        self.place(
            Entry {
                axis: r.axis,
                angle: r.angle,
                gates: vec![r.gate],
            },
            true,
        )
    }

    /// Places `e`; with `split`, a merge beyond `±π/4` gives back its quarter turns. The
    /// rebuild in [`Builder::finish`] places without splitting (nothing could take the turns
    /// there; the form stays exact, at worst not canonical).
    fn place(&mut self, e: Entry, split: bool) -> Option<QuarterTurn> {
        if e.axis.is_identity() || e.angle.abs() <= ZERO_ANGLE_RAD {
            return None;
        }
        let mut target = 0usize;
        for l in (0..self.layers.len()).rev() {
            let layer = &self.layers[l];
            if !layer.may_conflict(&e.axis) {
                continue;
            }
            if layer
                .members
                .iter()
                .any(|&m| !self.slots[m as usize].entry.axis.commutes_with(&e.axis))
            {
                target = l + 1;
                break;
            }
        }
        if let Some(&s) = self.latest.get(&e.axis) {
            let slot = &mut self.slots[s as usize];
            if slot.layer as usize == target {
                slot.entry.angle += e.angle;
                slot.entry.gates.extend(e.gates);
                let mut turned = None;
                if split {
                    let (k, r) = super::split_angle(slot.entry.angle);
                    if k != 0 {
                        slot.entry.angle = r;
                        turned = Some(QuarterTurn {
                            axis: slot.entry.axis.clone(),
                            turns: k,
                        });
                    }
                }
                if slot.entry.angle.abs() <= ZERO_ANGLE_RAD {
                    slot.alive = false;
                    let members = &mut self.layers[target].members;
                    let at = members
                        .iter()
                        .position(|&m| m == s)
                        .expect("a live slot is in its layer");
                    members.remove(at);
                    self.latest.remove(&slot.entry.axis);
                    self.vanished.push(slot.entry.clone());
                    self.cancelled = true;
                }
                return turned;
            }
        }
        // A new entry at the boundary (`−π/4`, which the sign of its axis can give a residual
        // of `+π/4`) keeps `+π/4` and gives back a quarter turn, so that one unitary has one
        // form however its gates split the angle.
        let mut e = e;
        let mut turned = None;
        if split {
            let (k, r) = super::split_angle(e.angle);
            if k != 0 {
                e.angle = r;
                turned = Some(QuarterTurn {
                    axis: e.axis.clone(),
                    turns: k,
                });
            }
        }
        let idx = self.slots.len() as u32;
        if target == self.layers.len() {
            self.layers.push(Layer::default());
        }
        self.layers[target].add(idx, &e.axis);
        self.latest.insert(e.axis.clone(), idx);
        self.slots.push(Slot {
            entry: e,
            layer: target as u32,
            alive: true,
        });
        turned
    }

    /// The normal form of everything pushed.
    pub fn finish(mut self) -> NormalForm {
        while self.cancelled {
            // Rebuild from the surviving entries, layer by layer (a valid order of the same
            // product), so entries that sat above a vanished one come down.
            let mut slots = std::mem::take(&mut self.slots);
            let order: Vec<u32> = self
                .layers
                .iter()
                .flat_map(|l| l.members.iter().copied())
                .collect();
            let mut next = Builder {
                vanished: std::mem::take(&mut self.vanished),
                input: self.input,
                ..Builder::default()
            };
            for i in order {
                let s = &mut slots[i as usize];
                if s.alive {
                    next.place(
                        std::mem::replace(
                            &mut s.entry,
                            Entry {
                                axis: PauliString::IDENTITY,
                                angle: 0.0,
                                gates: Vec::new(),
                            },
                        ),
                        false,
                    );
                }
            }
            self = next;
        }
        let mut slots: Vec<Option<Entry>> = self.slots.into_iter().map(|s| Some(s.entry)).collect();
        let layers = self
            .layers
            .into_iter()
            .map(|l| {
                let mut v: Vec<Entry> = l
                    .members
                    .iter()
                    .map(|&m| slots[m as usize].take().expect("each slot once"))
                    .collect();
                v.sort_by(|a, b| a.axis.cmp(&b.axis));
                v
            })
            .filter(|v| !v.is_empty())
            .collect();
        NormalForm {
            layers,
            vanished: self.vanished,
            input_rotations: self.input,
        }
    }
}

/// The normal form of a whole sequence.
pub fn normal_form(rotations: impl IntoIterator<Item = Rotation>) -> NormalForm {
    let mut b = Builder::new();
    for r in rotations {
        // Without a Clifford to take quarter turns, merged angles stay whole: the product of
        // the layers is then exactly the product of the input.
        b.input += 1;
        b.place(
            Entry {
                axis: r.axis,
                angle: r.angle,
                gates: vec![r.gate],
            },
            false,
        );
    }
    b.finish()
}

/// How a file's normal form departs from the plan's at one entry.
#[derive(Clone, Debug, PartialEq)]
pub enum DiffKind {
    /// The same axis in the same layer with a different angle.
    Angle { file: f64, plan: f64 },
    /// A rotation of the file that the plan's circuit does not have at this point.
    Extra { angle: f64 },
    /// A rotation of the plan's circuit that the file does not have at this point.
    Missing { angle: f64 },
    /// Rotations of the file about this axis cancel where the plan's do not.
    Cancelled,
}

/// One difference: where (layer, axis, the file's gate if it has one) and what.
#[derive(Clone, Debug, PartialEq)]
pub struct Difference {
    pub layer: usize,
    pub axis: PauliString,
    /// Index of the file gate to point at: the first gate merged into the file's entry; for a
    /// cancellation, the gate that completed it (for a missing rotation, that of a vanished
    /// file entry about the same axis, if any).
    pub gate: Option<u32>,
    pub kind: DiffKind,
}

/// Every difference between a file's normal form and the plan's (empty when they agree to the
/// angle tolerance), in layer order.
pub fn differences(file: &NormalForm, plan: &NormalForm) -> Vec<Difference> {
    let mut out = Vec::new();
    let empty = Vec::new();
    let vanished_gate = |axis: &PauliString| {
        file.vanished
            .iter()
            .find(|v| &v.axis == axis)
            .and_then(|v| v.gates.last().copied())
    };
    for l in 0..file.layers.len().max(plan.layers.len()) {
        let f = file.layers.get(l).unwrap_or(&empty);
        let p = plan.layers.get(l).unwrap_or(&empty);
        let (mut i, mut j) = (0, 0);
        while i < f.len() || j < p.len() {
            let ord = match (f.get(i), p.get(j)) {
                (Some(a), Some(b)) => a.axis.cmp(&b.axis),
                (Some(_), None) => std::cmp::Ordering::Less,
                _ => std::cmp::Ordering::Greater,
            };
            match ord {
                std::cmp::Ordering::Equal => {
                    let (a, b) = (&f[i], &p[j]);
                    if !angles_agree(a.angle, b.angle) {
                        out.push(Difference {
                            layer: l,
                            axis: a.axis.clone(),
                            gate: Some(a.gates[0]),
                            kind: DiffKind::Angle {
                                file: a.angle,
                                plan: b.angle,
                            },
                        });
                    }
                    i += 1;
                    j += 1;
                }
                std::cmp::Ordering::Less => {
                    out.push(Difference {
                        layer: l,
                        axis: f[i].axis.clone(),
                        gate: Some(f[i].gates[0]),
                        kind: DiffKind::Extra { angle: f[i].angle },
                    });
                    i += 1;
                }
                std::cmp::Ordering::Greater => {
                    out.push(Difference {
                        layer: l,
                        axis: p[j].axis.clone(),
                        gate: vanished_gate(&p[j].axis),
                        kind: DiffKind::Missing { angle: p[j].angle },
                    });
                    j += 1;
                }
            }
        }
    }
    // Cancellations in the file that the plan's circuit does not have (counted per axis).
    let mut plan_vanished: HashMap<&PauliString, usize> = HashMap::new();
    for v in &plan.vanished {
        *plan_vanished.entry(&v.axis).or_default() += 1;
    }
    for v in &file.vanished {
        match plan_vanished.get_mut(&v.axis) {
            Some(c) if *c > 0 => *c -= 1,
            _ => out.push(Difference {
                layer: usize::MAX,
                axis: v.axis.clone(),
                gate: v.gates.last().copied(),
                kind: DiffKind::Cancelled,
            }),
        }
    }
    out
}

/// The difference to report first: the one at the earliest file gate (the file agrees with the
/// plan before it), then the lowest layer; differences without a file gate come last.
pub fn first_difference(diffs: &[Difference]) -> Option<&Difference> {
    diffs
        .iter()
        .min_by_key(|d| (d.gate.is_none(), d.gate.unwrap_or(u32::MAX), d.layer))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::pauli::Pauli;

    fn rot(f: &[(usize, Pauli)], angle: f64, gate: u32) -> Rotation {
        Rotation {
            axis: PauliString::from_factors(f).1,
            angle,
            gate,
        }
    }

    const X0: &[(usize, Pauli)] = &[(0, Pauli::X)];
    const Z0: &[(usize, Pauli)] = &[(0, Pauli::Z)];
    const Z1: &[(usize, Pauli)] = &[(1, Pauli::Z)];
    const X1: &[(usize, Pauli)] = &[(1, Pauli::X)];

    #[test]
    fn commuting_neighbours_reorder_to_one_form() {
        // Z0 and Z1 commute; X0 anticommutes with Z0 only. Both orders give layers
        // {Z0, Z1} then {X0} — the Foata form of the trace (Cartier & Foata 1969).
        let a = normal_form([rot(Z0, 0.1, 0), rot(Z1, 0.2, 1), rot(X0, 0.3, 2)]);
        let b = normal_form([rot(Z1, 0.2, 0), rot(Z0, 0.1, 1), rot(X0, 0.3, 2)]);
        assert_eq!(a.layers.len(), 2);
        assert!(differences(&a, &b).is_empty());
        // X0 before Z1: X0 still only waits for Z0.
        let c = normal_form([rot(Z0, 0.1, 0), rot(X0, 0.3, 1), rot(Z1, 0.2, 2)]);
        assert!(differences(&a, &c).is_empty());
        // Exchanging the anticommuting Z0 and X0 is a different product.
        let d = normal_form([rot(X0, 0.3, 0), rot(Z0, 0.1, 1), rot(Z1, 0.2, 2)]);
        let diffs = differences(&d, &a);
        assert!(!diffs.is_empty());
        assert_eq!(first_difference(&diffs).unwrap().gate, Some(0));
    }

    #[test]
    fn equal_axes_merge_across_commuting_rotations_only() {
        // Z0 · Z1 · Z0 = Z0(a+b) · Z1; Z0 · X0 · Z0 stays three rotations.
        let f = normal_form([rot(Z0, 0.1, 0), rot(Z1, 0.2, 1), rot(Z0, 0.3, 2)]);
        assert_eq!(f.len(), 2);
        let z0 = f.layers[0]
            .iter()
            .find(|e| e.axis.get(0) == Pauli::Z)
            .unwrap();
        assert!((z0.angle - 0.4).abs() < 1e-15);
        assert_eq!(z0.gates, vec![0, 2]);
        let g = normal_form([rot(Z0, 0.1, 0), rot(X0, 0.2, 1), rot(Z0, 0.3, 2)]);
        assert_eq!(g.layers.len(), 3);
    }

    #[test]
    fn cancelled_rotations_leave_no_trace_in_the_layers() {
        // Z0(a) X1 Z0(−a) X0: the Z0 pair cancels, so X0 belongs in layer 0 beside X1.
        let f = normal_form([
            rot(Z0, 0.5, 0),
            rot(X1, 0.2, 1),
            rot(Z0, -0.5, 2),
            rot(X0, 0.3, 3),
        ]);
        let g = normal_form([rot(X0, 0.3, 0), rot(X1, 0.2, 1)]);
        let shape = |n: &NormalForm| -> Vec<Vec<(PauliString, f64)>> {
            n.layers
                .iter()
                .map(|l| l.iter().map(|e| (e.axis.clone(), e.angle)).collect())
                .collect()
        };
        assert_eq!(shape(&f), shape(&g));
        assert_eq!(f.layers.len(), 1);
        assert_eq!(f.vanished.len(), 1);
        // Against a plan without the cancelled pair, the pair is reported where it cancelled.
        let diffs = differences(&f, &g);
        assert_eq!(diffs.len(), 1);
        assert_eq!(diffs[0].kind, DiffKind::Cancelled);
        assert_eq!(diffs[0].gate, Some(2));
    }

    #[test]
    fn angles_compare_relatively_with_a_small_floor() {
        assert!(angles_agree(0.3, 0.3 * (1.0 + 1e-13)));
        assert!(!angles_agree(0.3, 0.3 * (1.0 + 1e-9)));
        assert!(angles_agree(1e-6, 1e-6 + 5e-14));
        assert!(!angles_agree(1e-6, 1e-6 * (1.0 + 1e-6)));
    }
}
