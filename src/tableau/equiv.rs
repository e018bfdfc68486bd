//! Exact equivalence of a written circuit with the circuit its plan claims.
//!
//! In: a [`Plan`] and, per circuit entry, the circuit read back from its file. Out: a
//! [`Verdict`]: the file is equivalent to the plan's circuit (with the sizes of the proof), or
//! it differs, with the file gate to point at and the axis or angle that differs.
//!
//! The claim is rebuilt from the plan alone with the library's own builders, which are the
//! specification: the Hamiltonian (`plan.hamiltonian`), `formula::order_terms` and
//! `formula::evolution` (order, `k·steps` steps of `dt/steps`), `family::state_prep`, the
//! Krylov measurement groups of `family::krylov_groups`, and `family::hadamard_test` with the
//! default CNOT ladders — the *ideal logical* circuit, before routing and lowering. A device
//! campaign may order the terms differently inside commuting groups and root its ladders
//! elsewhere; neither changes the canonical form.
//!
//! Both circuits go through [`super::canonicalise`] and [`super::normal`] on the device's
//! physical qubits: the plan's circuit with logical qubit `l` placed on `initial_layout[l]`.
//! They are equivalent when (1) their rotation normal forms agree (axes exactly, angles to
//! [`super::normal::ANGLE_REL_TOL`]); (2) their final Cliffords agree up to the plan's final
//! permutation: the file's rows at `final_layout[l]` equal the plan circuit's rows at
//! `initial_layout[l]` for every logical `l`, and every other physical qubit's rows are a bare
//! `X_k`, `Z_k` pair (qubits that only held |0⟩ and were moved by SWAPs); (3) bit `b` measures
//! `final_layout[l]` where the plan's circuit measures `l`. Then the file's unitary is the
//! plan's, placed by the layouts, up to a global phase and the angle tolerance: a proof, not a
//! sample. Invariant: an `Equivalent` verdict is never given to a file whose unitary differs
//! from the claim's by more than the angle tolerance allows.
//!
//! What it does not give: the ideal and exact overlaps (no amplitudes are computed).
//!
//! Errors: a plan from which no claim can be rebuilt ([`Claim::from_plan`]) or an entry that
//! claims no circuit ([`Claim::logical_circuit`]) is a [`ClaimError`]. The plan is user input
//! that `Plan::validate` has already accepted, so what is left is a plan phasewright did not
//! write: every variant is bad input, reported under `P101` (exit 2) with the hint that the plan
//! does not describe a campaign phasewright wrote.

use super::normal::{self, DiffKind};
use super::{canonicalise_into, canonicalise_turning, Tableau, Tail};
use crate::circuit::{Circuit, Qubit};
use crate::family::control::Control;
use crate::family::{
    group_reads, hadamard_test_in, krylov_groups, prep_hadamard_test, RefState, StateError,
};
use crate::formula::{evolution, order_terms, Order};
use crate::pauli::PauliString;
use crate::plan::{CircuitEntry, Family, FanOut, Plan, Read, Target};
use serde::Serialize;

/// Everything the plan claims that is shared by its circuits.
#[derive(Clone, Debug)]
pub struct Claim {
    /// System qubits; the ancilla is logical qubit `n`.
    n: usize,
    family: Family,
    order: Order,
    dt: f64,
    steps_per_dt: usize,
    states: Vec<String>,
    terms: Vec<(PauliString, f64)>,
    strings: Vec<PauliString>,
    groups: Vec<Vec<usize>>,
    /// Device qubits and initial layout, for device campaigns.
    device: Option<(usize, Vec<u32>)>,
    /// With control copies (`route::cat`: the plan's `spare_qubits` or `copy_placement`):
    /// every physical qubit outside the initial layout, which starts in |0⟩ (see
    /// [`Claim::check`]); else `None`.
    zero_inputs: Option<crate::pauli::Bits>,
    control: Control,
    /// The plan's `device.flip_string`: each step is the sign-flip step of `synth::flip` over
    /// the commuting groups of sizes `group_sizes`.
    flip: Option<String>,
    /// The plan's `device.flip_controlled_terms` (0 when absent).
    flip_controlled: usize,
    /// The plan's `device.flip_order`: how the flipped steps write each block.
    flip_order: crate::synth::flip::BlockOrder,
    /// The plan's `device.flip_signed` (or the all-to-all `flip.signed`).
    flip_signed: bool,
    /// The flip is the device's (every circuit, each step routed once and reused with its
    /// mirror image alternately) rather than the all-to-all `flip` (only the circuits marked
    /// `flipped`, every step written alike).
    flip_every: bool,
    group_sizes: Vec<usize>,
}

/// The sizes of a successful proof.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Proof {
    pub gates: usize,
    /// Rotations met in the file (after splitting off quarter turns).
    pub rotations: usize,
    /// Entries of the normal form.
    pub canonical_rotations: usize,
    pub layers: usize,
}

/// Where and how a file departs from its claim.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Refutation {
    /// Index of the file gate to point at (`None`: the difference has no place in the file).
    pub gate: Option<usize>,
    pub message: String,
}

/// The outcome for one circuit.
#[derive(Clone, Debug, PartialEq)]
pub enum Verdict {
    Equivalent(Proof),
    Differs(Refutation),
}

/// Why a circuit could not be checked at all: the plan entry is inconsistent, or the file holds
/// something the canonical form does not take (at file gate `gate`).
#[derive(Clone, Debug, PartialEq)]
pub struct CannotCheck {
    pub gate: Option<usize>,
    pub message: String,
}

impl CannotCheck {
    fn plan(message: impl Into<String>) -> CannotCheck {
        CannotCheck {
            gate: None,
            message: message.into(),
        }
    }
}

/// Why no claim can be rebuilt from a plan, or from one of its entries; always bad input (see
/// the module header). The entry variants carry the circuit's `id`.
#[derive(Clone, Debug, PartialEq)]
pub enum ClaimError {
    /// The plan's Hamiltonian does not read back.
    Hamiltonian(crate::check::CheckError),
    /// `formula.order` is not a product formula phasewright writes.
    UnknownOrder(u32),
    /// The initial layout places `placed` qubits; the campaign has `needed`.
    LayoutLength { placed: usize, needed: usize },
    /// The initial layout names a qubit outside the device.
    LayoutQubit { qubit: u32, device_qubits: usize },
    /// The initial layout names a physical qubit twice.
    LayoutRepeats,
    /// The copy placement repeats a qubit, overlaps the start placement or leaves the device.
    CopyPlacement,
    /// `device.flip_string` is not the string a sign-flip step over this Hamiltonian and
    /// formula controls, or `device.flip_controlled_terms` not the number of terms that step
    /// leaves controlled (or no such step exists).
    FlipString(String),
    /// The entry's state index is past the plan's states.
    NoSuchState {
        id: String,
        state: usize,
        states: usize,
    },
    /// The entry's reference state has a letter the state preparation refuses.
    StateLetter {
        id: String,
        letter: char,
        index: usize,
        reason: &'static str,
    },
    /// The entry's reference state has the wrong number of letters.
    StateLength {
        id: String,
        letters: usize,
        qubits: usize,
    },
    /// The entry's Krylov measurement group is past the plan's groups.
    NoSuchGroup {
        id: String,
        group: usize,
        groups: usize,
    },
    /// A measurement group in a campaign of another family.
    GroupOutsideKrylov { id: String, family: Family },
    /// A plain evolution circuit: the tableau method proves only Hadamard tests.
    NotHadamardTest { id: String },
    /// The recorded fan-out has a CNOT outside the circuit's `qubits` qubits.
    FanOutOutside { id: String, qubits: u32 },
    /// The recorded fan-out does not prepare the reference `state` on the ancilla's |1⟩ branch.
    FanOutState { id: String, state: String },
}

impl std::fmt::Display for ClaimError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            ClaimError::Hamiltonian(e) => write!(f, "{e}"),
            ClaimError::UnknownOrder(o) => write!(f, "plan.json: unknown formula order {o}"),
            ClaimError::LayoutLength { placed, needed } => write!(
                f,
                "plan.json: the initial layout places {placed} qubits; the campaign has {needed} \
                 (system and ancilla)"
            ),
            ClaimError::LayoutQubit {
                qubit,
                device_qubits,
            } => write!(
                f,
                "plan.json: the initial layout uses physical qubit {qubit} of a \
                 {device_qubits}-qubit device"
            ),
            ClaimError::LayoutRepeats => {
                f.write_str("plan.json: the initial layout repeats a physical qubit")
            }
            ClaimError::FlipString(text) => write!(
                f,
                "plan.json: device.flip_string `{text}` (with device.flip_controlled_terms) is not \
                 the Pauli string (and count of controlled terms) of a sign-flip step over this \
                 Hamiltonian and formula"
            ),
            ClaimError::CopyPlacement => f.write_str(
                "plan.json: the copy placement repeats a physical qubit, names one of the start \
                 placement, or one the device does not have",
            ),
            ClaimError::NoSuchState { id, state, states } => write!(
                f,
                "{id}: state {state} is not among the plan's {states} states"
            ),
            ClaimError::StateLetter {
                id,
                letter,
                index,
                reason,
            } => write!(f, "{id}: bad state letter `{letter}` at {index}: {reason}"),
            ClaimError::StateLength {
                id,
                letters,
                qubits,
            } => write!(
                f,
                "{id}: the state has {letters} letters for {qubits} qubits"
            ),
            ClaimError::NoSuchGroup { id, group, groups } => write!(
                f,
                "{id}: group {group} is not among the {groups} measurement groups"
            ),
            ClaimError::GroupOutsideKrylov { id, family } => {
                write!(f, "{id}: a measurement group in a {family:?} campaign")
            }
            ClaimError::NotHadamardTest { id } => write!(
                f,
                "{id}: the tableau method proves Hadamard-test circuits; use --method \
                 statevector for plain evolution circuits"
            ),
            ClaimError::FanOutOutside { id, qubits } => write!(
                f,
                "{id}: the fan-out lists a CNOT outside the {qubits} qubits of the circuit"
            ),
            ClaimError::FanOutState { id, state } => write!(
                f,
                "{id}: the fan-out does not prepare the reference `{state}` on the ancilla's \
                 |1⟩ branch"
            ),
        }
    }
}

impl std::error::Error for ClaimError {}

impl crate::error::LayerError for ClaimError {
    fn blame(&self) -> crate::error::Blame {
        crate::error::Blame::Input(crate::diag::Code::PlanSyntax)
    }

    fn hint(&self) -> Option<&str> {
        Some("plan.json does not describe a campaign phasewright wrote")
    }
}

impl Claim {
    /// Reads the shared claim from a plan. Errors name what is inconsistent.
    pub fn from_plan(plan: &Plan) -> Result<Claim, ClaimError> {
        let h = crate::check::plan_hamiltonian(plan).map_err(ClaimError::Hamiltonian)?;
        let order = Order::from_number(plan.formula.order)
            .ok_or(ClaimError::UnknownOrder(plan.formula.order))?;
        let n = h.num_qubits;
        let device = match &plan.device {
            None => None,
            Some(d) => {
                if d.initial_layout.len() != n + 1 {
                    return Err(ClaimError::LayoutLength {
                        placed: d.initial_layout.len(),
                        needed: n + 1,
                    });
                }
                if let Some(p) = d
                    .initial_layout
                    .iter()
                    .find(|&&p| p as usize >= d.num_qubits)
                {
                    return Err(ClaimError::LayoutQubit {
                        qubit: *p,
                        device_qubits: d.num_qubits,
                    });
                }
                if !is_injective(&d.initial_layout) {
                    return Err(ClaimError::LayoutRepeats);
                }
                Some((d.num_qubits, d.initial_layout.clone()))
            }
        };
        let zero_inputs = match &plan.device {
            Some(d) if d.spare_qubits || !d.copy_placement.is_empty() => {
                let mut all = d.initial_layout.clone();
                all.extend(&d.copy_placement);
                if d.copy_placement.iter().any(|&p| p as usize >= d.num_qubits)
                    || !is_injective(&all)
                {
                    return Err(ClaimError::CopyPlacement);
                }
                let mut zero = crate::pauli::Bits::default();
                for p in 0..d.num_qubits {
                    if !d.initial_layout.contains(&(p as u32)) {
                        zero.insert(p);
                    }
                }
                Some(zero)
            }
            _ => None,
        };
        Ok(Claim {
            n,
            family: plan.family,
            order,
            dt: plan.formula.dt,
            steps_per_dt: plan.formula.steps_per_dt,
            states: plan.states.clone(),
            terms: order_terms(&h),
            strings: h.terms.keys().cloned().collect(),
            groups: if plan.family == Family::Krylov {
                krylov_groups(&h)
            } else {
                Vec::new()
            },
            device,
            zero_inputs,
            control: plan.control,
            flip: match (&plan.device, &plan.flip) {
                (Some(d), _) => d.flip_string.clone(),
                (None, f) => f.as_ref().map(|f| f.string.clone()),
            },
            flip_controlled: match (&plan.device, &plan.flip) {
                (Some(d), _) => d.flip_controlled_terms,
                (None, f) => f.as_ref().map_or(0, |f| f.controlled_terms),
            },
            flip_order: match (&plan.device, &plan.flip) {
                (Some(d), _) => d.flip_order,
                (None, f) => f.as_ref().map(|f| f.order).unwrap_or_default(),
            },
            flip_signed: match (&plan.device, &plan.flip) {
                (Some(d), _) => d.flip_signed,
                (None, f) => f.as_ref().is_some_and(|f| f.signed),
            },
            flip_every: plan.device.is_some(),
            group_sizes: crate::formula::term_groups(&h)
                .iter()
                .map(|g| g.len())
                .collect(),
        })
    }

    /// The ideal logical circuit entry `e` claims (system qubits `0..n`, ancilla `n`) and the
    /// reads it should list, built exactly as `family::build_jobs_with_terms` builds them.
    pub fn logical_circuit(&self, e: &CircuitEntry) -> Result<(Circuit, Vec<Read>), ClaimError> {
        let state = self
            .states
            .get(e.state)
            .ok_or_else(|| ClaimError::NoSuchState {
                id: e.id.clone(),
                state: e.state,
                states: self.states.len(),
            })?;
        let state = RefState::parse(state, self.n).map_err(|b| match b {
            StateError::Letter {
                index,
                letter,
                reason,
                ..
            } => ClaimError::StateLetter {
                id: e.id.clone(),
                letter,
                index,
                reason,
            },
            StateError::Length { letters, qubits } => ClaimError::StateLength {
                id: e.id.clone(),
                letters,
                qubits,
            },
        })?;
        let state = &state;
        let program = evolution(
            &self.terms,
            self.order,
            e.k as f64 * self.dt,
            e.k * self.steps_per_dt,
        );
        let (basis, reads) = match (self.family, e.group) {
            (Family::Krylov, Some(g)) => {
                let members = self.groups.get(g).ok_or_else(|| ClaimError::NoSuchGroup {
                    id: e.id.clone(),
                    group: g,
                    groups: self.groups.len(),
                })?;
                let mut basis = PauliString::IDENTITY;
                for &i in members {
                    basis.x.or_assign(&self.strings[i].x);
                    basis.z.or_assign(&self.strings[i].z);
                }
                (Some(basis), group_reads(members, &self.strings, e.k))
            }
            (_, Some(_)) => {
                return Err(ClaimError::GroupOutsideKrylov {
                    id: e.id.clone(),
                    family: self.family,
                })
            }
            (_, None) => (
                None,
                vec![Read {
                    target: Target::Overlap,
                    bits: vec![0],
                }],
            ),
        };
        let ladder = |r: &crate::formula::Rotation| crate::synth::default_ladder(r);
        let part = e
            .part
            .ok_or_else(|| ClaimError::NotHadamardTest { id: e.id.clone() })?;
        let flipped = self.flip_every || e.flipped;
        if let (Control::Evolution, Some(text), true) = (self.control, &self.flip, flipped) {
            // A sign-flip step (`synth::flip`): on a device routed once and reused as the step
            // and its mirror image alternately (`route::reuse`), on the all-to-all target
            // written alike every step, but for a signed step, which alternates there too
            // (`synth::flip::FlippedParts::mirrored`).
            let n = self.n;
            let dt = self.dt / self.steps_per_dt.max(1) as f64;
            // The recorded string, checked to anticommute with every flipped term (the
            // device search picks among such strings by the layout, which the claim does not
            // know), and the split's count of controlled terms.
            let given: Option<crate::synth::flip::FlipString> =
                crate::pauli::PauliString::parse_factor_text(text)
                    .map(|p| p.support_iter().map(|q| (q as Qubit, p.get(q))).collect());
            // A signed step takes any string; its count is of the terms commuting with it.
            let counted = if self.flip_signed {
                Some(self.flip_controlled)
            } else {
                crate::synth::flip::flip_split(&self.terms, &self.group_sizes, n)
                    .map(|(k, _)| self.group_sizes[..k].iter().sum::<usize>())
            };
            let gates = given
                .as_ref()
                .filter(|_| counted == Some(self.flip_controlled))
                .and_then(|q| {
                    crate::synth::flip::flipped_step_parts(
                        &self.terms,
                        &self.group_sizes,
                        self.order,
                        dt,
                        self.flip_order.into(),
                        n as Qubit,
                        &ladder,
                        None,
                        if self.flip_signed {
                            crate::synth::flip::Choice::Signed(q)
                        } else {
                            crate::synth::flip::Choice::Given(q)
                        },
                        None,
                    )
                })
                .filter(|p| p.controlled_terms == self.flip_controlled)
                .map(|p| {
                    let mut gates = Vec::new();
                    p.steps_into(1, &mut gates);
                    gates
                })
                .ok_or_else(|| ClaimError::FlipString(text.clone()))?;
            let mut step = Circuit::new(n + 1, 0);
            step.extend(gates);
            let back = if self.flip_every || self.flip_signed {
                crate::route::reuse::mirror(&step)
            } else {
                step.clone()
            };
            let nbits = if basis.is_some() { n + 1 } else { 1 };
            let mut c = Circuit::new(n + 1, nbits);
            c.extend(crate::family::hadamard_prefix(n, &state.prep()));
            for s in 0..e.k * self.steps_per_dt {
                let block = if s % 2 == 0 { &step } else { &back };
                c.extend(block.gates.iter().copied());
            }
            c.extend(crate::family::hadamard_suffix(n, part, basis.as_ref()));
            crate::circuit::cancel::cancel_inverses(&mut c);
            return Ok((c, reads));
        }
        if let (Control::Prep, Some(f)) = (self.control, &e.fanout) {
            // Fan-out trees recorded by `compile`: the claim's preparations are those CNOTs.
            let m = self.n as u32 + 1;
            if f.before
                .iter()
                .chain(&f.after)
                .any(|&[a, b]| a >= m || b >= m || a == b)
            {
                return Err(ClaimError::FanOutOutside {
                    id: e.id.clone(),
                    qubits: m,
                });
            }
            // Each list must take |1⟩|0…0⟩ (ancilla set) to |1⟩|reference⟩: CNOTs act on bit
            // strings, so one pass over the pairs decides it (|0⟩|0…0⟩ is fixed by any CNOTs).
            for cnots in [&f.before, &f.after] {
                let mut bits = vec![false; m as usize];
                bits[self.n] = true;
                for &[a, b] in cnots {
                    bits[b as usize] ^= bits[a as usize];
                }
                let want = state.as_str().chars().map(|c| c == '1');
                if !bits[..self.n].iter().copied().eq(want)
                    || state.as_str().chars().any(|c| c != '0' && c != '1')
                {
                    return Err(ClaimError::FanOutState {
                        id: e.id.clone(),
                        state: state.to_string(),
                    });
                }
            }
            let (before, after) = (FanOut::gates(&f.before), FanOut::gates(&f.after));
            let c = prep_hadamard_test(
                self.n,
                &program,
                part,
                basis.as_ref(),
                &ladder,
                (&before, &after),
            );
            return Ok((c, reads));
        }
        let c = hadamard_test_in(
            self.n,
            state,
            &program,
            part,
            basis.as_ref(),
            &ladder,
            crate::family::control::Form {
                control: self.control,
                // As `pipeline` builds them: joined through index neighbours on a device.
                joins: if self.device.is_some() {
                    crate::family::control::Joins::Neighbours
                } else {
                    crate::family::control::Joins::Direct
                },
            },
        );
        Ok((c, reads))
    }

    /// Proves `file` equivalent to the circuit entry `e` claims, or finds where it differs.
    pub fn check(&self, e: &CircuitEntry, file: &Circuit) -> Result<Verdict, CannotCheck> {
        let (logical, reads) = self
            .logical_circuit(e)
            .map_err(|c| CannotCheck::plan(c.to_string()))?;
        let m = self.n + 1;
        let (width, init, fin) = match &self.device {
            None => {
                if !e.final_layout.is_empty() {
                    return Err(CannotCheck::plan(format!(
                        "{}: a final layout in a campaign without a device",
                        e.id
                    )));
                }
                let id: Vec<u32> = (0..m as u32).collect();
                (m.max(file.num_qubits), id.clone(), id)
            }
            Some((dev_qubits, init)) => {
                if e.final_layout.len() != m
                    || e.final_layout.iter().any(|&p| p as usize >= *dev_qubits)
                    || !is_injective(&e.final_layout)
                {
                    return Err(CannotCheck::plan(format!(
                        "{}: the final layout {:?} is not a placement of {m} qubits on the \
                         {dev_qubits}-qubit device",
                        e.id, e.final_layout
                    )));
                }
                (
                    (*dev_qubits).max(file.num_qubits),
                    init.clone(),
                    e.final_layout.clone(),
                )
            }
        };
        if reads != e.reads {
            return Ok(Verdict::Differs(Refutation {
                gate: None,
                message: format!(
                    "plan.json lists reads {:?} for this circuit, but the plan's family builds {:?}",
                    e.reads, reads
                ),
            }));
        }
        if file.num_clbits != logical.num_clbits || e.num_clbits != logical.num_clbits {
            return Ok(Verdict::Differs(Refutation {
                gate: None,
                message: format!(
                    "the file declares {} classical bits (plan.json: {}); the plan's circuit has {}",
                    file.num_clbits, e.num_clbits, logical.num_clbits
                ),
            }));
        }
        let mut placed = Circuit::new(width, logical.num_clbits);
        placed.extend(
            logical
                .gates
                .iter()
                .map(|g| g.map_qubits(|l| init[l as usize])),
        );
        let mut fb = normal::Builder::new();
        // With control copies, qubits outside the initial layout start in |0⟩: a rotation
        // whose axis holds only Z (or nothing) there acts on them as +1, so those Z factors
        // are dropped; an X or Y there is a difference (see `zero_input_free`). The quarter
        // turns a merge hands back carry the stripped axis into the Clifford: every rotation
        // kept is diagonal on those qubits, so the |0⟩ inputs stay |0⟩ up to that point and the
        // stripped and unstripped turns agree there.
        let mut unstrippable: Option<(u32, PauliString)> = None;
        let ftail = canonicalise_turning(file, width, &mut |mut r| {
            if let Some(zero) = &self.zero_inputs {
                match zero_input_free(&r.axis, zero) {
                    Some(axis) => r.axis = axis,
                    None => {
                        if unstrippable.is_none() {
                            unstrippable = Some((r.gate, r.axis.clone()));
                        }
                        return None;
                    }
                }
            }
            fb.push(r)
        })
        .map_err(|u| CannotCheck {
            gate: Some(u.gate),
            message: u.message,
        })?;
        let mut pb = normal::Builder::new();
        let ptail = canonicalise_into(&placed, width, &mut pb)
            .map_err(|u| CannotCheck::plan(format!("the plan's own circuit: {}", u.message)))?;
        let (fnf, pnf) = (fb.finish(), pb.finish());
        let names = Names::new(&init, self.n);
        if let Some((gate, axis)) = unstrippable {
            return Ok(Verdict::Differs(Refutation {
                gate: Some(gate as usize),
                message: format!(
                    "a rotation about {} here acts with X or Y on a qubit that starts in |0⟩ \
                     outside the plan's placement (a control copy or a free qubit), so it does \
                     not reduce to a rotation of the plan's qubits",
                    names.pauli(&axis)
                ),
            }));
        }
        let diffs = normal::differences(&fnf, &pnf);
        if let Some(d) = normal::first_difference(&diffs) {
            return Ok(Verdict::Differs(Refutation {
                gate: d.gate.map(|g| g as usize),
                message: describe(d, &names, diffs.len()),
            }));
        }
        if let Some(r) = compare_cliffords(
            &ftail,
            &ptail,
            &init,
            &fin,
            &names,
            self.zero_inputs.as_ref(),
        ) {
            return Ok(Verdict::Differs(r));
        }
        if let Some(r) = compare_measurements(&ftail, &ptail, &init, &fin) {
            return Ok(Verdict::Differs(r));
        }
        Ok(Verdict::Equivalent(Proof {
            gates: file.gates.len(),
            rotations: fnf.input_rotations,
            canonical_rotations: fnf.len(),
            layers: fnf.layers.len(),
        }))
    }
}

fn is_injective(v: &[u32]) -> bool {
    let mut s = v.to_vec();
    s.sort_unstable();
    s.windows(2).all(|w| w[0] != w[1])
}

/// Prints physical-frame Pauli strings with logical qubit names (`q3`, `anc`) where the
/// initial layout names them, `$k` elsewhere.
struct Names {
    logical_of: std::collections::HashMap<u32, usize>,
    n: usize,
}

impl Names {
    fn new(init: &[u32], n: usize) -> Names {
        Names {
            logical_of: init.iter().enumerate().map(|(l, &p)| (p, l)).collect(),
            n,
        }
    }

    fn qubit(&self, p: usize) -> String {
        match self.logical_of.get(&(p as u32)) {
            Some(&l) if l == self.n => "anc".to_string(),
            Some(&l) => format!("q{l}"),
            None => format!("${p}"),
        }
    }

    /// `X(q0) Z(q3) X(anc)`, ordered by logical qubit (then physical).
    fn pauli(&self, s: &PauliString) -> String {
        if s.is_identity() {
            return "I".into();
        }
        let mut qs = s.support_qubits();
        qs.sort_by_key(|&q| {
            (
                self.logical_of
                    .get(&(q as u32))
                    .copied()
                    .unwrap_or(usize::MAX),
                q,
            )
        });
        qs.into_iter()
            .map(|q| format!("{}({})", s.get(q).letter(), self.qubit(q)))
            .collect::<Vec<_>>()
            .join(" ")
    }

    fn signed(&self, (neg, s): &(bool, PauliString)) -> String {
        format!("{}{}", if *neg { "−" } else { "+" }, self.pauli(s))
    }
}

fn describe(d: &normal::Difference, names: &Names, count: usize) -> String {
    let axis = names.pauli(&d.axis);
    let what = match d.kind {
        DiffKind::Angle { file, plan } => format!(
            "the rotation about {axis} has angle {file:?} here; the plan's circuit has {plan:?} \
             (difference {:.3e})",
            file - plan
        ),
        DiffKind::Extra { angle } => format!(
            "a rotation about {axis} by {angle:?} here is not in the plan's circuit at this \
             point"
        ),
        DiffKind::Missing { angle } => format!(
            "the plan's rotation about {axis} by {angle:?} has no counterpart in the file at \
             this point"
        ),
        DiffKind::Cancelled => format!(
            "rotations about {axis} cancel from here on, where the plan's circuit keeps them"
        ),
    };
    format!(
        "{what} ({count} difference(s) in the canonical form; axes are Pauli strings at the \
         circuit's start, rz-convention angles exp(−i·a/2·P) modulo quarter turns)"
    )
}

/// `axis` without its Z factors on the qubits of `zero` (which start in |0⟩), or `None` when
/// it holds X or Y on one of them.
fn zero_input_free(axis: &PauliString, zero: &crate::pauli::Bits) -> Option<PauliString> {
    if axis.x.intersects(zero) {
        return None;
    }
    Some(PauliString {
        x: axis.x.clone(),
        z: axis.z.and_not(zero),
    })
}

/// Compares the final Cliffords (see the module header). With `zero` (qubits that start in
/// |0⟩, campaigns with control copies) the comparison holds on the inputs with those qubits
/// at |0⟩: a logical row may differ from the plan's by Z factors there (`+1` on such inputs),
/// and a physical qubit that ends outside the final layout must end in |0⟩ (its Z row a
/// product of Z on those qubits, sign +) rather than be a bare |0⟩ qubit moved by SWAPs.
/// Together with rotations stripped the same way this gives, on every such input, the plan's
/// state on the logical qubits (their Pauli expectations agree) and |0⟩ elsewhere.
fn compare_cliffords(
    file: &Tail,
    plan: &Tail,
    init: &[u32],
    fin: &[u32],
    names: &Names,
    zero: Option<&crate::pauli::Bits>,
) -> Option<Refutation> {
    let (fc, pc): (&Tableau, &Tableau) = (&file.clifford, &plan.clifford);
    let at_end = |p: usize| file.last_gate.get(p).copied().flatten();
    let reduce = |(sign, s): (bool, PauliString)| -> (bool, PauliString) {
        match zero.and_then(|z| zero_input_free(&s, z)) {
            Some(stripped) => (sign, stripped),
            None => (sign, s),
        }
    };
    for (l, (&i, &f)) in init.iter().zip(fin).enumerate() {
        for (label, fi, pi) in [
            ("X", reduce(fc.image_x(f as usize)), pc.image_x(i as usize)),
            ("Z", reduce(fc.image_z(f as usize)), pc.image_z(i as usize)),
        ] {
            if fi != pi {
                let who = if l == init.len() - 1 {
                    "the ancilla".to_string()
                } else {
                    format!("logical qubit {l}")
                };
                return Some(Refutation {
                    gate: at_end(f as usize),
                    message: format!(
                        "the Clifford left after the last rotation differs on {who} (physical \
                         ${f} at the end, by the plan's final layout): {label} there comes from \
                         {} at the start in the file, from {} in the plan's circuit",
                        names.signed(&fi),
                        names.signed(&pi)
                    ),
                });
            }
        }
    }
    let ends: std::collections::HashSet<u32> = fin.iter().copied().collect();
    for p in 0..fc.num_qubits() {
        if ends.contains(&(p as u32)) {
            continue;
        }
        let (sx, x) = fc.image_x(p);
        let (sz, z) = fc.image_z(p);
        let bare = !sx && !sz && x.z.is_empty() && z.x.is_empty() && x.x.count() == 1 && x.x == z.z;
        let ends_zero = zero
            .is_some_and(|zero| !sz && z.x.is_empty() && !z.z.is_empty() && z.z.is_subset(zero));
        if !bare && !ends_zero {
            return Some(Refutation {
                gate: at_end(p),
                message: format!(
                    "physical qubit ${p} holds no logical qubit at the end (plan's final \
                     layout), but it is not a |0⟩ qubit moved by SWAPs: X there comes from {} \
                     and Z from {} at the start",
                    names.signed(&(sx, x)),
                    names.signed(&(sz, z))
                ),
            });
        }
    }
    None
}

fn compare_measurements(file: &Tail, plan: &Tail, init: &[u32], fin: &[u32]) -> Option<Refutation> {
    let to_end = |p: Qubit| -> Qubit { init.iter().position(|&i| i == p).map_or(p, |l| fin[l]) };
    let mut want: Vec<(u32, Qubit)> = plan
        .measurements
        .iter()
        .map(|&(q, b, _)| (b, to_end(q)))
        .collect();
    want.sort_unstable();
    let mut got: Vec<(u32, Qubit, usize)> = file
        .measurements
        .iter()
        .map(|&(q, b, i)| (b, q, i))
        .collect();
    got.sort_unstable();
    for k in 0..want.len().max(got.len()) {
        match (want.get(k), got.get(k)) {
            (Some(&(wb, wq)), Some(&(gb, gq, i))) if wb != gb || wq != gq => {
                return Some(Refutation {
                    gate: Some(i),
                    message: if wb == gb {
                        format!(
                            "bit c[{gb}] measures ${gq}; by the plan's final layout it should \
                             measure ${wq}"
                        )
                    } else {
                        format!(
                            "bit c[{gb}] is measured here, but the plan's circuit measures bit \
                             c[{wb}] next"
                        )
                    },
                });
            }
            (Some(&(wb, wq)), None) => {
                return Some(Refutation {
                    gate: None,
                    message: format!("bit c[{wb}] is never measured (it should measure ${wq})"),
                })
            }
            (None, Some(&(gb, _, i))) => {
                return Some(Refutation {
                    gate: Some(i),
                    message: format!("bit c[{gb}] is measured, but the plan's circuit does not"),
                })
            }
            _ => {}
        }
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::family::Spec;
    use crate::pauli::{Pauli, PauliSum};

    fn small_h() -> PauliSum {
        let s = |f: &[(usize, Pauli)]| PauliString::from_factors(f).1;
        let mut h = PauliSum::new(3);
        h.add(s(&[(0, Pauli::Z), (1, Pauli::Z)]), 0.8);
        h.add(s(&[(1, Pauli::X), (2, Pauli::X)]), -0.6);
        h.add(s(&[(0, Pauli::Y)]), 0.3);
        h.add(s(&[(2, Pauli::Z)]), 0.45);
        h
    }

    #[test]
    fn the_claim_rebuilds_the_library_circuits_gate_for_gate() {
        // The claim mirrors `build_jobs_with_terms`; on an all-to-all compile the file's
        // circuit is that logical circuit itself, so they must agree exactly.
        for family in [Family::Overlap, Family::Krylov, Family::Trace] {
            let states = if family == Family::Trace {
                crate::family::random_states(3, 3, 7)
            } else {
                vec!["0+r".to_string()]
            };
            let spec = Spec {
                control: crate::family::control::Control::Evolution,
                family,
                order: Order::Second,
                dt: 0.3,
                points: 3,
                steps_per_dt: 2,
                states,
            };
            let c = crate::pipeline::compile(&small_h(), "small", &spec).unwrap();
            let claim = Claim::from_plan(&c.plan).unwrap();
            for (e, circ) in c.plan.circuits.iter().zip(&c.circuits()) {
                let (logical, reads) = claim.logical_circuit(e).unwrap();
                assert_eq!(&logical, circ, "{}", e.id);
                assert_eq!(reads, e.reads, "{}", e.id);
                match claim.check(e, circ).unwrap() {
                    Verdict::Equivalent(p) => assert!(p.rotations > 0 || e.k == 0),
                    Verdict::Differs(r) => panic!("{}: {}", e.id, r.message),
                }
            }
        }
    }

    #[test]
    fn a_flipped_angle_is_found_at_its_gate() {
        let spec = Spec {
            control: crate::family::control::Control::Evolution,
            family: Family::Overlap,
            order: Order::First,
            dt: 0.2,
            points: 2,
            steps_per_dt: 1,
            states: vec!["1+0".into()],
        };
        let c = crate::pipeline::compile(&small_h(), "small", &spec).unwrap();
        let claim = Claim::from_plan(&c.plan).unwrap();
        let e = &c.plan.circuits[0];
        let mut bad = c.circuit(0);
        let at = bad
            .gates
            .iter()
            .position(|g| matches!(g, crate::circuit::Gate::Rz(..)))
            .unwrap();
        if let crate::circuit::Gate::Rz(q, a) = bad.gates[at] {
            bad.gates[at] = crate::circuit::Gate::Rz(q, -a);
        }
        match claim.check(e, &bad).unwrap() {
            Verdict::Differs(r) => {
                assert_eq!(r.gate, Some(at), "{}", r.message);
                assert!(r.message.contains("angle"), "{}", r.message);
            }
            Verdict::Equivalent(_) => panic!("a flipped angle was not found"),
        }
    }
}
