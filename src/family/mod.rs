//! Circuit families: Hadamard-test overlaps, Krylov matrix elements, stochastic traces.
//!
//! In: a Pauli sum, a [`Spec`] (family, formula, time grid, states) and a ladder planner for the
//! CNOT chains. Out: [`Job`]s, one per circuit, each a *logical* circuit (system qubits `0..n`,
//! ancilla `n`) with the [`crate::plan::Read`]s that say what its counts estimate.
//!
//! The Hadamard test (Kitaev 1995; Cleve, Ekert, Macchiavello & Mosca, Proc. R. Soc. A 454, 339
//! (1998)): the ancilla in |+⟩ controls `U`, giving `(|0⟩|ψ⟩ + |1⟩U|ψ⟩)/√2`, on which
//! `⟨X_anc⟩ = Re⟨ψ|U|ψ⟩` and `⟨Y_anc⟩ = Im⟨ψ|U|ψ⟩`, and more generally
//! `⟨X_anc ⊗ P⟩ = Re⟨ψ|P U|ψ⟩`, `⟨Y_anc ⊗ P⟩ = Im⟨ψ|P U|ψ⟩`. X is read with `h`, Y with `sdg`
//! then `h` before measuring Z. Only the `rz` of each rotation is controlled (see `synth`).
//!
//! With [`control::Control::Prep`] the ancilla controls only the state preparation and the
//! evolution runs uncontrolled (see [`control`] for why the reads keep their meaning).
//!
//! A Krylov campaign reads `S_k` from the ancilla of its group circuits (the ancilla's bit
//! alone is the Hadamard test of `U`), so it compiles no separate overlap circuit.
//!
//! Invariant: every job's reads refer to classical bits the circuit measures, and the ancilla
//! is always measured into bit 0.

pub mod control;
pub mod state;

use crate::circuit::cancel::cancel_inverses;
use crate::circuit::{Circuit, Gate, Qubit};
use crate::formula::{evolution, Order, Rotation};
use crate::pauli::group::{colour_groups, Compat};
use crate::pauli::{Pauli, PauliString, PauliSum};
use crate::plan::{Family, Part, Read, Target};
use control::Control;
use rand::Rng;
use rand::SeedableRng;
pub use state::{RefState, StateError};

/// What to build.
#[derive(Clone, Debug)]
pub struct Spec {
    pub family: Family,
    pub order: Order,
    /// Time between points.
    pub dt: f64,
    /// Number of time points K (k = 0..K).
    pub points: usize,
    /// Trotter steps per `dt`.
    pub steps_per_dt: usize,
    /// Reference states (`0 1 + - r l`, qubit 0 first): one for overlap/krylov, N for trace.
    /// Kept as text, as callers type them; [`Spec::ref_states`] checks them into [`RefState`]s,
    /// which is what the builders use (`pipeline::compile_at` refuses a spec whose states do
    /// not check, before building anything).
    pub states: Vec<String>,
    /// Whether the ancilla controls the evolution or only the state preparation (the caller
    /// has checked with [`control::zero_state_check`] that `Prep` is exact).
    pub control: Control,
}

impl Spec {
    /// The states checked against `qubits` ([`RefState::parse`]), in order; the first bad one
    /// is reported with its index.
    pub fn ref_states(&self, qubits: usize) -> Result<Vec<RefState>, (usize, StateError)> {
        self.states
            .iter()
            .enumerate()
            .map(|(i, s)| RefState::parse(s, qubits).map_err(|e| (i, e)))
            .collect()
    }
}

/// One circuit to emit.
#[derive(Clone, Debug)]
pub struct Job {
    pub id: String,
    pub k: usize,
    pub time: f64,
    /// `None` for a plain evolution circuit ([`Family::Evolution`]).
    pub part: Option<Part>,
    pub state: usize,
    pub group: Option<usize>,
    pub reads: Vec<Read>,
    /// Logical circuit: qubits `0..n` system, `n` ancilla; bit 0 = ancilla.
    pub circuit: Circuit,
}

/// Gates preparing a reference state from |0…0⟩ ([`RefState::prep`]).
pub fn state_prep(state: &RefState) -> Vec<Gate> {
    state.prep()
}

/// Draws `count` random product states, each qubit one of the six Pauli eigenstates, from `seed`.
///
/// Averaging `⟨φ|U|φ⟩` over such states is an unbiased estimator of `tr U / 2ⁿ`: the six
/// eigenstates form a state 2-design on one qubit, so `E[|φ⟩⟨φ|] = I/2ⁿ` (Hutchinson, "A
/// stochastic estimator of the trace of the influence matrix for Laplacian smoothing splines",
/// Commun. Stat. Simul. Comput. 19, 1990, for the estimator; any distribution with that mean works).
pub fn random_states(n: usize, count: usize, seed: u64) -> Vec<String> {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    let letters = ['0', '1', '+', '-', 'r', 'l'];
    (0..count)
        .map(|_| (0..n).map(|_| letters[rng.gen_range(0..6)]).collect())
        .collect()
}

/// Measurement-basis groups for the Krylov family: qubit-wise commuting groups of the terms
/// (indices into `h.term_list()`), by largest-first colouring.
pub fn krylov_groups(h: &PauliSum) -> Vec<Vec<usize>> {
    let strings: Vec<PauliString> = h.terms.keys().cloned().collect();
    colour_groups(&strings, Compat::QubitWise)
}

/// A Hadamard-test circuit: prepare, controlled program, ancilla basis for `part`, and the
/// measurement of the ancilla (bit 0) and, if `basis` is given, of its support qubits after
/// rotating each to Z (system qubit q into bit q+1).
pub fn hadamard_test(
    n: usize,
    prep: &[Gate],
    program: &[Rotation],
    part: Part,
    basis: Option<&PauliString>,
    ladder: &dyn Fn(&Rotation) -> Vec<Qubit>,
) -> Circuit {
    let anc = n as Qubit;
    let nbits = if basis.is_some() { n + 1 } else { 1 };
    let mut c = Circuit::new(n + 1, nbits);
    c.extend(hadamard_prefix(n, prep));
    for r in program {
        c.extend(crate::synth::pauli_rotation_along(r, Some(anc), &ladder(r)));
    }
    c.extend(hadamard_suffix(n, part, basis));
    cancel_inverses(&mut c);
    c
}

/// [`hadamard_test`] in either control form: with [`Control::Prep`] the state `state` is
/// prepared on the ancilla's |1⟩ branch, `program` runs uncontrolled and the phase
/// `zero_phase(program)` of |0…0⟩ is removed on the ancilla ([`control`]).
pub fn hadamard_test_in(
    n: usize,
    state: &RefState,
    program: &[Rotation],
    part: Part,
    basis: Option<&PauliString>,
    ladder: &dyn Fn(&Rotation) -> Vec<Qubit>,
    form: control::Form,
) -> Circuit {
    let joins = form.joins;
    if form.control == Control::Evolution {
        return hadamard_test(n, &state.prep(), program, part, basis, ladder);
    }
    let w = control::controlled_prep(state, n as Qubit, joins);
    prep_hadamard_test(n, program, part, basis, ladder, (&w, &w))
}

/// The control-free Hadamard test with its controlled preparations given: `w.0` before the
/// uncontrolled `program`, `w.1` (undone) after it; both must prepare the same reference on
/// the ancilla's |1⟩ branch (as [`control::controlled_prep`] and [`control::fanout_prep`] do).
pub fn prep_hadamard_test(
    n: usize,
    program: &[Rotation],
    part: Part,
    basis: Option<&PauliString>,
    ladder: &dyn Fn(&Rotation) -> Vec<Qubit>,
    w: (&[Gate], &[Gate]),
) -> Circuit {
    let nbits = if basis.is_some() { n + 1 } else { 1 };
    let mut c = Circuit::new(n + 1, nbits);
    let phi0 = control::zero_phase(program);
    c.extend(prep_prefix_with(n, phi0, w.0));
    for r in program {
        c.extend(crate::synth::pauli_rotation_along(r, None, &ladder(r)));
    }
    c.extend(prep_suffix_with(n, w.1, part, basis));
    cancel_inverses(&mut c);
    c
}

/// The gates of a control-free Hadamard test before the uncontrolled evolution: the ancilla
/// to |+⟩, the phase `e^{−iφ₀}` of |0…0⟩ removed from its |1⟩ branch in advance
/// (`rz(−φ₀)`, which multiplies |1⟩ by `e^{−iφ₀}` relative to |0⟩), and the controlled
/// preparation of `state` ([`control::controlled_prep`]).
pub fn prep_prefix(n: usize, state: &RefState, phi0_rad: f64, joins: control::Joins) -> Vec<Gate> {
    let w = control::controlled_prep(state, n as Qubit, joins);
    prep_prefix_with(n, phi0_rad, &w)
}

/// [`prep_prefix`] with the controlled preparation `w` given (ancilla `n`; see
/// [`control::fanout_prep`] for one built on a coupling graph).
pub fn prep_prefix_with(n: usize, phi0_rad: f64, w: &[Gate]) -> Vec<Gate> {
    let anc = n as Qubit;
    let mut out = vec![Gate::H(anc)];
    // rz is 2π-periodic up to a global phase; keep the angle small for readable files.
    let angle =
        (-phi0_rad + std::f64::consts::PI).rem_euclid(std::f64::consts::TAU) - std::f64::consts::PI;
    if angle != 0.0 {
        out.push(Gate::Rz(anc, angle));
    }
    out.extend_from_slice(w);
    out
}

/// The gates of a control-free Hadamard test after the uncontrolled evolution: the controlled
/// preparation undone, and, when system qubits are measured, the reference prepared on both
/// branches (which brings the |0⟩ branch to |ψ⟩), then [`hadamard_suffix`].
pub fn prep_suffix(
    n: usize,
    state: &RefState,
    part: Part,
    basis: Option<&PauliString>,
    joins: control::Joins,
) -> Vec<Gate> {
    let w = control::controlled_prep(state, n as Qubit, joins);
    prep_suffix_with(n, &w, part, basis)
}

/// [`prep_suffix`] with the controlled preparation `w` given (ancilla `n`).
pub fn prep_suffix_with(
    n: usize,
    w: &[Gate],
    part: Part,
    basis: Option<&PauliString>,
) -> Vec<Gate> {
    let anc = n as Qubit;
    let mut out = control::inverse(w);
    if basis.is_some() {
        out.extend(control::uncontrolled(w, anc));
    }
    out.extend(hadamard_suffix(n, part, basis));
    out
}

/// The gates of a Hadamard test before the controlled evolution: the state preparation, then
/// the ancilla (qubit `n`) to |+⟩.
pub fn hadamard_prefix(n: usize, prep: &[Gate]) -> Vec<Gate> {
    let mut out = prep.to_vec();
    out.push(Gate::H(n as Qubit));
    out
}

/// The gates of a Hadamard test after the controlled evolution: the ancilla basis for `part`,
/// the measurement of the ancilla (bit 0) and, if `basis` is given, of its support qubits after
/// rotating each to Z (system qubit q into bit q+1).
pub fn hadamard_suffix(n: usize, part: Part, basis: Option<&PauliString>) -> Vec<Gate> {
    let anc = n as Qubit;
    let mut c = Vec::new();
    match part {
        Part::Re => c.push(Gate::H(anc)),
        Part::Im => c.extend([Gate::Sdg(anc), Gate::H(anc)]),
    }
    c.push(Gate::Measure(anc, 0));
    if let Some(b) = basis {
        for q in 0..n {
            match b.get(q) {
                Pauli::I => continue,
                Pauli::X => c.push(Gate::H(q as Qubit)),
                Pauli::Y => c.extend([Gate::Sdg(q as Qubit), Gate::H(q as Qubit)]),
                Pauli::Z => {}
            }
        }
        for q in 0..n {
            if b.get(q) != Pauli::I {
                c.push(Gate::Measure(q as Qubit, q as u32 + 1));
            }
        }
    }
    c
}

/// The bits whose parity reads term `p` in a circuit measuring with [`hadamard_test`]'s layout.
pub fn term_bits(p: &PauliString) -> Vec<u32> {
    std::iter::once(0)
        .chain(p.support_qubits().into_iter().map(|q| q as u32 + 1))
        .collect()
}

/// Every job of the campaign, in a fixed order (k, then state, then group, then part), with
/// the product formulas over `formula::order_terms(h)`.
pub fn build_jobs(
    h: &PauliSum,
    spec: &Spec,
    ladder: &(dyn Fn(&Rotation) -> Vec<Qubit> + Sync),
) -> Vec<Job> {
    build_jobs_with_terms(h, spec, &crate::formula::order_terms(h), ladder)
}

/// One circuit of the campaign with its evolution not yet synthesised: what it is and reads,
/// and the logical gates around the controlled `U(k·dt)` (see [`hadamard_prefix`] and
/// [`hadamard_suffix`]). A target that builds the evolution its own way (a device reusing one
/// routed Trotter step) starts from these.
#[derive(Clone, Debug)]
pub struct Frame {
    pub id: String,
    pub k: usize,
    pub time: f64,
    /// `None` for a plain evolution circuit ([`Family::Evolution`]).
    pub part: Option<Part>,
    pub state: usize,
    pub group: Option<usize>,
    pub reads: Vec<Read>,
    /// Qubits `0..n` system, `n` ancilla.
    pub num_qubits: usize,
    /// Bit 0 = ancilla; bit q+1 = system qubit q when the circuit reads a group of terms.
    pub num_clbits: usize,
    /// State preparation, ancilla to |+⟩ (controlled form); or ancilla to |+⟩, the phase of
    /// |0…0⟩ removed, the controlled preparation ([`prep_prefix`]).
    pub prefix: Vec<Gate>,
    /// Ancilla basis, measurement basis, measurements (after [`prep_suffix`]'s undoing of the
    /// controlled preparation in the control-free form).
    pub suffix: Vec<Gate>,
}

/// The reads of a group circuit: each member term's parity, and at `k ≥ 1` the ancilla alone
/// for `S_k` (at k = 0, `S_0 = 1` exactly).
pub fn group_reads(members: &[usize], strings: &[PauliString], k: usize) -> Vec<Read> {
    let mut reads: Vec<Read> = members
        .iter()
        .map(|&i| Read {
            target: Target::Term { term: i },
            bits: term_bits(&strings[i]),
        })
        .collect();
    if k > 0 {
        reads.push(Read {
            target: Target::Overlap,
            bits: vec![0],
        });
    }
    reads
}

/// `φ₀` of one Trotter step of `spec` over `h` (`U(k·dt)|0…0⟩ = e^{−i k R φ₀}|0…0⟩`, the step
/// repeated `k·R` times); 0 for the controlled form, which needs none.
pub fn step_zero_phase(h: &PauliSum, spec: &Spec) -> f64 {
    if spec.control == Control::Evolution {
        return 0.0;
    }
    let r = spec.steps_per_dt.max(1);
    control::zero_phase(&crate::formula::step(
        &crate::formula::order_terms(h),
        spec.order,
        spec.dt / r as f64,
    ))
}

/// Every circuit of the campaign, in a fixed order (k, then state, then group, then part),
/// without its evolution (controlled preparations with [`control::Joins::Direct`]).
pub fn frames(h: &PauliSum, spec: &Spec) -> Vec<Frame> {
    frames_with(h, spec, control::Joins::Direct)
}

/// [`frames`] with the given joins of the controlled preparations (`Neighbours` on a device).
pub fn frames_with(h: &PauliSum, spec: &Spec, joins: control::Joins) -> Vec<Frame> {
    let anc = h.num_qubits as Qubit;
    frames_by(h, spec, &|state: &RefState, _: PrepAt| {
        control::controlled_prep(state, anc, joins)
    })
}

/// Where a controlled preparation of a control-free circuit stands: before the evolution, or
/// after `steps` Trotter steps (a device's layout may differ there).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum PrepAt {
    Start,
    End { steps: usize },
}

/// [`frames`] with the controlled preparation `W` of each state given by `controlled` (ancilla
/// qubit `n`, gates of the kind [`control::controlled_prep`] makes: the ancilla only as the
/// control of `cx(anc, q)`, `W|0⟩|0…0⟩ = |0⟩|0…0⟩`).
pub fn frames_by(
    h: &PauliSum,
    spec: &Spec,
    controlled: &(dyn Fn(&RefState, PrepAt) -> Vec<Gate> + Sync),
) -> Vec<Frame> {
    use rayon::prelude::*;
    let n = h.num_qubits;
    let states = spec
        .ref_states(n)
        .expect("states are checked before building (pipeline::compile_at)");
    if spec.family == Family::Evolution {
        return evolution_frames(n, spec, &states);
    }
    let phi_step = step_zero_phase(h, spec);
    let strings: Vec<PauliString> = h.terms.keys().cloned().collect();
    let groups = if spec.family == Family::Krylov {
        krylov_groups(h)
    } else {
        Vec::new()
    };
    // Describe every circuit first (cheap), then fill in the gates in parallel, keeping order.
    struct Desc {
        id: String,
        k: usize,
        part: Part,
        state: usize,
        group: Option<usize>,
    }
    let mut descs = Vec::new();
    for k in 0..spec.points {
        for s in 0..spec.states.len() {
            for part in [Part::Re, Part::Im] {
                let state_tag = if spec.family == Family::Trace {
                    format!("s{s:03}-")
                } else {
                    String::new()
                };
                let ptag = if part == Part::Re { "re" } else { "im" };
                if k > 0 && spec.family != Family::Krylov {
                    descs.push(Desc {
                        id: format!("{state_tag}k{k:02}-{ptag}"),
                        k,
                        part,
                        state: s,
                        group: None,
                    });
                }
                if spec.family == Family::Krylov && (k > 0 || part == Part::Re) {
                    for g in 0..groups.len() {
                        descs.push(Desc {
                            id: format!("k{k:02}-{ptag}-g{g:02}"),
                            k,
                            part,
                            state: s,
                            group: Some(g),
                        });
                    }
                }
            }
        }
    }
    descs
        .into_par_iter()
        .map(|d| {
            let state = &states[d.state];
            let prep = state.prep();
            let (basis, reads) = match d.group {
                None => (
                    None,
                    vec![Read {
                        target: Target::Overlap,
                        bits: vec![0],
                    }],
                ),
                Some(g) => {
                    let members = &groups[g];
                    let mut basis = PauliString::IDENTITY;
                    for &i in members {
                        basis.x.or_assign(&strings[i].x);
                        basis.z.or_assign(&strings[i].z);
                    }
                    (Some(basis), group_reads(members, &strings, d.k))
                }
            };
            let (prefix, suffix) = match spec.control {
                Control::Evolution => (
                    hadamard_prefix(n, &prep),
                    hadamard_suffix(n, d.part, basis.as_ref()),
                ),
                Control::Prep => {
                    let steps = d.k * spec.steps_per_dt.max(1);
                    (
                        prep_prefix_with(
                            n,
                            phi_step * steps as f64,
                            &controlled(state, PrepAt::Start),
                        ),
                        prep_suffix_with(
                            n,
                            &controlled(state, PrepAt::End { steps }),
                            d.part,
                            basis.as_ref(),
                        ),
                    )
                }
            };
            Frame {
                id: d.id,
                k: d.k,
                time: d.k as f64 * spec.dt,
                part: Some(d.part),
                state: d.state,
                group: d.group,
                reads,
                num_qubits: n + 1,
                num_clbits: if basis.is_some() { n + 1 } else { 1 },
                prefix,
                suffix,
            }
        })
        .collect()
}

/// Plain time-evolution circuits ([`Family::Evolution`]): for every k = 0..K and state, the
/// state preparation, `U(k·dt)` (uncontrolled; filled in by the target) and a measurement of
/// every system qubit q into bit q. No ancilla.
fn evolution_frames(n: usize, spec: &Spec, states: &[RefState]) -> Vec<Frame> {
    let mut out = Vec::new();
    for k in 0..spec.points {
        for (s, state) in states.iter().enumerate() {
            let tag = if spec.states.len() > 1 {
                format!("s{s:03}-")
            } else {
                String::new()
            };
            out.push(Frame {
                id: format!("{tag}k{k:02}-ev"),
                k,
                time: k as f64 * spec.dt,
                part: None,
                state: s,
                group: None,
                reads: Vec::new(),
                num_qubits: n,
                num_clbits: n,
                prefix: state.prep(),
                suffix: (0..n)
                    .map(|q| Gate::Measure(q as Qubit, q as u32))
                    .collect(),
            });
        }
    }
    out
}

/// [`build_jobs`] with the product formulas over `terms`, a reordering of
/// `formula::order_terms(h)` inside its commuting groups (e.g. `route::order_for_device`), so
/// that every circuit computes exactly what `build_jobs` would.
pub fn build_jobs_with_terms(
    h: &PauliSum,
    spec: &Spec,
    terms: &[(PauliString, f64)],
    ladder: &(dyn Fn(&Rotation) -> Vec<Qubit> + Sync),
) -> Vec<Job> {
    use rayon::prelude::*;
    let anc = (spec.control == Control::Evolution && spec.family != Family::Evolution)
        .then_some(h.num_qubits as Qubit);
    // One rotation program per time point, shared by every circuit at that point.
    let programs: Vec<Vec<Rotation>> = (0..spec.points)
        .into_par_iter()
        .map(|k| evolution(terms, spec.order, k as f64 * spec.dt, k * spec.steps_per_dt))
        .collect();
    frames(h, spec)
        .into_par_iter()
        .map(|f| {
            let mut circuit = Circuit::new(f.num_qubits, f.num_clbits);
            circuit.extend(f.prefix);
            for r in &programs[f.k] {
                circuit.extend(crate::synth::pauli_rotation_along(r, anc, &ladder(r)));
            }
            circuit.extend(f.suffix);
            cancel_inverses(&mut circuit);
            Job {
                id: f.id,
                k: f.k,
                time: f.time,
                part: f.part,
                state: f.state,
                group: f.group,
                reads: f.reads,
                circuit,
            }
        })
        .collect()
}
