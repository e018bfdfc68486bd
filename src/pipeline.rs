//! The map of the compiler: the passes, in order, from a Pauli sum to OpenQASM 3 text.
//!
//! In: a [`PauliSum`], a [`Spec`], a target and an optimisation level ([`OptLevel`]). Out: the
//! plan, and each circuit's program text handed to a [`Sink`] as soon as it is final
//! ([`compile_into`]; the command layer's sink writes it to its file and drops it, so a
//! campaign's texts are never all held), or a [`Compiled`] campaign with every text kept in
//! plan order ([`compile_at`], through [`Collect`]). The texts do not depend on the thread
//! count, nor on the order the sink receives them. Each pass
//! is a free function over one value; a small driver ([`run_passes`]) runs a target's list in
//! order and, in tests and debug builds, calls `verify_ir` after every pass with the rules that
//! hold at that point (structure before routing; coupling after routing; coupling and native
//! names after lowering). Release builds verify the final circuits only.
//!
//! **All-to-all**, per circuit ([`all_to_all_passes`]):
//! 1. `prepare`: state preparation, ancilla to |+⟩ (`family::frames` gives the gates);
//! 2. `synthesize`: the rotation program of the time point (`formula::evolution`, or at level 0
//!    the unmerged textbook expansion) through one `synth::Strategy`: `Chain` ladders below
//!    level 3; at level 3 also balanced `Tree`s, hopping `Pairs` and commuting-run `Groups`,
//!    the emitted circuit with the fewest two-qubit gates kept. Past [`SCORE_ONCE_MIN`]
//!    two-qubit gates at the first time point with a step, the other points build only the
//!    candidates that point kept, and the chain (so a level still never emits more than the
//!    level below; at utility scale each candidate costs a whole synthesis per point), and
//!    those points share one synthesis of the repeated Trotter step per candidate
//!    ([`LaterBlocks::periodic`]: every program read as head, unit repeated, tail by
//!    `formula::periodic_form`, checked rotation for rotation), or, when the programs do not
//!    repeat one step (a string that commutes with every other), are grown from one pass over
//!    the longest ([`LaterBlocks::grown`]: a shorter program is the longest cut where two
//!    rotations do not commute, then a tail of its own), so `k` points cost about two
//!    syntheses of a step, not `k` syntheses of a point. The points are then built one at a
//!    time from those blocks (each point's candidate bodies fed, scored, written, dropped), so
//!    the peak memory holds the bodies of one point, not of the campaign;
//! 3. `readout`: ancilla basis, measurement basis, measurements;
//! 4. `cancel` (level ≥ 1): `circuit::cancel::cancel_inverses`;
//! 5. `qasm::write` with logical `q[k]`: a body's text is written once and copied into every
//!    circuit that keeps it when its readout only appends (`Body::text_with_readout`); no
//!    circuit is kept as IR beside its text ([`Compiled::circuit`] reads one back).
//!
//! **Device**, once per campaign then per circuit:
//! 1. `plan and route the step` (`route::plan_and_route_step`): layout candidates (greedy,
//!    random, annealed, and at level 3 exact embeddings of the interaction graph,
//!    `route::embed`), term orders (inside commuting groups, `route::order`, and at level 3 any
//!    order the non-commuting pairs allow, `route::sweep`), SWAP insertion with lookahead, all
//!    scored on one Trotter step of the campaign; the winner's routing of that step is kept
//!    (`route::reuse`: it and its mirror image, or the SWAPs home, repeat `k·R` times).
//!    Verified: every piece on coupled pairs;
//! 2. `lower` (`route::DeviceCampaign`): the step's pieces to native gates once (fusion and
//!    cancellation, two CNOTs on a pair that one does the work of merged by `lower::pairs`,
//!    then the commutation-aware order of `circuit::schedule` where it lowers the two-qubit
//!    depth, then a CNOT and a SWAP that order brought together on one pair written as two
//!    CNOTs by `lower::swapfold`), verified with coupling and native rules;
//! 3. `assemble`: per circuit, `family::frames` gives preparation and readout, routed and
//!    stitched around the pieces, written as text from the pieces' texts (`route::campaign`),
//!    so `costs.swaps` counts the SWAPs routing inserted (the step's once per step), before the
//!    peephole pass folds the mirror seams.
//!
//! With `Spec::control = Prep` (`family::control`: |0…0⟩ shown to be an eigenstate of every
//! factor of the formula) the evolution is synthesised without a control and the ancilla meets
//! only the controlled state preparation in each circuit's prefix and suffix; on a device
//! `route::plan_and_route_free_step` routes that uncontrolled step, and once its layouts are
//! known each basis-state preparation becomes the cheapest fan-out tree on the coupled pairs
//! of the layout it meets (`family::control::fanout_prep`; recorded per circuit in the plan,
//! `CircuitEntry::fanout`, so `verify --method tableau` rebuilds the same claim). The
//! `evolution` family has no ancilla at all (`route::plan_and_route_plain_step`).
//!
//! At level 3 the step is also synthesised with hopping pairs diagonalised together
//! (`synth::Pairs`) and with one greedy Clifford network per commuting run (`synth::Groups`)
//! on every target, each one more candidate scored by what is emitted.
//!
//! At level 3 on a device, controlled campaigns (`Control::Evolution`, Hadamard-test families)
//! also get the *spread control* candidate (`route::cat`, `route::plan_and_route_cat_step`):
//! copies of the ancilla on spare qubits (a cat state made by a fan-out after the ancilla's
//! `h`), each controlled rotation controlled by the copy beside it. Both campaigns are emitted
//! whole and the one with fewer two-qubit gates in all (then the lower summed depth) is kept,
//! so the candidate never makes a campaign worse. Its circuits add the fan-out to every prefix
//! and its undoing (at the layout where the steps end) to every suffix of a circuit with a
//! step; plan.json lists the copies' sites (`device.copy_placement`), marks that unused qubits
//! are used (`device.spare_qubits`, which `verify --method tableau` reads as "qubits outside
//! the placement start in |0⟩") and counts each circuit's copies (`costs.control_copies`).
//!
//! The levels (`compile --opt`): 0 is the textbook pipeline (one ladder per rotation of the
//! unmerged formula in term order, one greedy layout, plain SWAP routing, nothing cancelled
//! beyond what lowering to native gates must do); 1 merges the formula and cancels; 2 adds the
//! layout search and the device-aware order inside commuting groups; 3 (the default) adds
//! trees, the sweep schedule, exact embeddings and the spread control, each as one more
//! candidate scored by the
//! two-qubit gates it emits, so that on a device a level never keeps a worse candidate than
//! the level below it found. At utility scale (a first routing above 20,000 two-qubit gates
//! plus SWAPs, `route::EXTRAS_MAX_UNIT`) the extras are skipped and levels 2 and 3 coincide:
//! each would cost about one more routing per candidate.
//!
//! Nothing here reads or writes files; the command layer does (through the [`Sink`]). The one query of the machine is
//! the available memory (`sim::available_memory_bytes`), so a campaign predicted to need more
//! is refused before it is built.

use crate::circuit::cancel::{Peephole, Settled};
use crate::circuit::metrics::{counts_of, Counter, Counts};
use crate::circuit::verify::{verify_gates, verify_ir, IrError, Rules};
use crate::circuit::{Circuit, Gate};
use crate::clock::{self, stage, Stage};
use crate::device::Device;
use crate::family::control::Control;
use crate::family::{frames, frames_by, frames_with, PrepAt, RefState, Spec};
use crate::formula::{order_terms, textbook_evolution, Formula, Rotation};
use crate::pauli::PauliSum;
use crate::plan::Family;
use crate::plan::{
    CircuitEntry, Costs, DeviceInfo, FanOut, FormulaInfo, HamiltonianInfo, Plan, TermInfo,
    PLAN_FORMAT,
};
use crate::qasm::Addressing;
use crate::route::{
    plan_and_route_free_step, plan_and_route_plain_step, plan_and_route_step, DeviceCampaign,
    RouteConfig, RouteError,
};
use crate::synth::groups::RunNetworks;
use crate::synth::{Block, Chain, Groups, Pairs, Sharing, Strategy, Tree};
use rayon::prelude::*;
use std::ops::Range;
use std::time::Instant;

/// Where the circuits will run.
pub enum Target<'a> {
    /// Every pair coupled, every standard gate available: logical qubits, no routing.
    AllToAll,
    /// A device: layout, SWAPs, native gates, calibrated costs.
    Device {
        device: &'a Device,
        config: &'a RouteConfig,
    },
}

/// How much work the compiler does to lower the two-qubit count (`compile --opt`; see the
/// module header). Higher levels only add candidates or clean-ups to the level below.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub struct OptLevel(u8);

impl OptLevel {
    pub const TEXTBOOK: OptLevel = OptLevel(0);
    pub const MAX: OptLevel = OptLevel(3);

    /// Levels 0 to 3.
    pub fn new(level: u8) -> Option<OptLevel> {
        (level <= 3).then_some(OptLevel(level))
    }

    pub fn number(self) -> u8 {
        self.0
    }

    /// The SWAP-insertion and layout-search settings of this level, from a base config (its
    /// seed and stitching kept).
    pub fn route_config(self, base: &RouteConfig) -> RouteConfig {
        let mut c = base.clone();
        if self.0 <= 1 {
            c.layout_trials = 1;
            c.refine_rounds = 0;
            c.device_order = false;
            c.hub_factors = false;
            c.commute_ahead = false;
        }
        c.cancel = self.0 >= 1;
        c.textbook = self.0 == 0;
        c.score_two_qubit = true;
        c.sweep = self.0 >= 3;
        c.embed = self.0 >= 3;
        c.pairs = self.0 >= 3;
        c.cat = self.0 >= 3 && base.cat;
        c
    }
}

impl Default for OptLevel {
    fn default() -> OptLevel {
        OptLevel::MAX
    }
}

/// One pass of a target's list: its name (for the verifier's report) and what it does.
pub struct Pass<'a> {
    pub name: &'static str,
    pub run: Box<dyn Fn(&mut Circuit) + Sync + 'a>,
}

/// Runs `passes` over `c` in order; in tests and debug builds `verify_ir` checks `rules`
/// after every pass, in release builds after the last. A failure names the pass (a compiler
/// bug, reported with the offending gate).
pub fn run_passes(c: &mut Circuit, passes: &[Pass], rules: &Rules) -> Result<(), IrError> {
    let check = |c: &Circuit, name: &str| {
        verify_ir(c, rules).map_err(|e| IrError {
            message: format!("after pass `{name}`: {}", e.message),
            ..e
        })
    };
    for (i, p) in passes.iter().enumerate() {
        (p.run)(c);
        if cfg!(debug_assertions) || i + 1 == passes.len() {
            check(c, p.name)?;
        }
    }
    Ok(())
}

/// Which `synth::Strategy` writes the rotations on the all-to-all target.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Synthesis {
    /// `synth::Chain` with ascending ladders (levels 0–2).
    Chain,
    /// `synth::Tree`, balanced parity trees.
    Tree,
    /// `synth::Sharing`, chains starting on what the previous rotation shares.
    Sharing,
    /// `synth::Pairs`, hopping pairs diagonalised together, ascending ladders otherwise.
    Pairs,
    /// `synth::Groups`, one greedy Clifford network per commuting run, ascending ladders for
    /// single rotations.
    Groups,
    /// Each Trotter step by a sign flip (`synth::flip`, [`all_to_all_flip`]): not a synthesis
    /// of a rotation program but of the step itself, so the pipeline writes it from the
    /// flipped step's parts; given a program ([`synthesize_all_to_all`]), the chain.
    Flip,
}

/// The least success estimate the plain/spread choice takes the logarithm of: estimates below
/// it (which underflow to 0 when coherence times are far shorter than the circuits) count as
/// it, so two campaigns all at the floor tie and the two-qubit counts decide.
pub const SUCCESS_FLOOR: f64 = 1e-300;

/// The all-to-all pass list of one circuit: `prepare`, `synthesize` (the program through
/// `synthesis`, controlled by the ancilla `control` when there is one), `readout`, and `cancel`
/// from level 1. `networks` lets `synth::Groups` reuse the run networks other circuits of the
/// campaign found (the same gates: on this target a network depends on its strings alone).
pub fn all_to_all_passes<'a>(
    prefix: &'a [Gate],
    program: &'a [Rotation],
    control: Option<crate::circuit::Qubit>,
    suffix: &'a [Gate],
    level: OptLevel,
    synthesis: Synthesis,
    networks: Option<&'a RunNetworks>,
) -> Vec<Pass<'a>> {
    let mut passes = vec![
        Pass {
            name: "prepare",
            run: Box::new(move |c: &mut Circuit| c.extend(prefix.iter().copied())),
        },
        Pass {
            name: "synthesize",
            run: Box::new(move |c: &mut Circuit| {
                synthesize_all_to_all(program, control, synthesis, networks, &mut c.gates)
            }),
        },
        Pass {
            name: "readout",
            run: Box::new(move |c: &mut Circuit| c.extend(suffix.iter().copied())),
        },
    ];
    if level >= OptLevel(1) {
        passes.push(Pass {
            name: "cancel",
            run: Box::new(crate::circuit::cancel::cancel_inverses),
        });
    }
    passes
}

/// Appends the gates of `program` (controlled by `control` when given) as `synthesis` writes
/// them on the all-to-all target: the `synthesize` pass of [`all_to_all_passes`].
pub fn synthesize_all_to_all(
    program: &[Rotation],
    control: Option<crate::circuit::Qubit>,
    synthesis: Synthesis,
    networks: Option<&RunNetworks>,
    out: &mut Vec<Gate>,
) {
    let block = Block {
        rotations: program,
        control,
        distance: None,
    };
    let ladder = |r: &Rotation| crate::synth::default_ladder(r);
    match synthesis {
        Synthesis::Tree => Tree.synthesize(&block, out),
        Synthesis::Sharing => Sharing.synthesize(&block, out),
        Synthesis::Pairs => Pairs { ladder: &ladder }.synthesize(&block, out),
        Synthesis::Groups => Groups {
            ladder: &ladder,
            shared: networks,
        }
        .synthesize(&block, out),
        Synthesis::Chain | Synthesis::Flip => Chain { ladder: &ladder }.synthesize(&block, out),
    }
}

/// Word operations of one GF(2) elimination (`synth::flip`: rows × rank × words per row)
/// past which the all-to-all target does not look for a sign flip: about a second on one
/// core (common practice for a search that may find nothing: keep it a small share of the
/// compile). A 1,000-qubit Ising chain (1,999 terms) needs 1.3 × 10⁸.
pub const FLIP_MAX_WORK: f64 = 1e9;

/// Size of a step (8 units per Pauli factor of its strings) past which [`all_to_all_flip`]
/// tries only the split's flip on one step, not the signed step nor the two-step score.
/// Chosen between the sizes it must separate: the LiH/STO-3G sum of the `fewer_gates`
/// benchmark (12 qubits, 31,104 units) keeps its signed step (4676 → 3350 two-qubit
/// gates per step), the utility benchmark's 10⁵ strings
/// of weight 1–4 (about 2 × 10⁶ units) do not. On the
/// device target the search's own bound (`route::EXTRAS_MAX_UNIT`) applies, where each
/// extra form costs routings.
pub const SIGNED_MAX_UNIT: usize = 200_000;

/// The sign-flip step (`synth::flip`) of one step of `spec` over `terms`, the formula's
/// commuting groups of sizes `group_sizes` one after another, controlled by `control` on the
/// all-to-all target: each commuting block in layers on disjoint qubits (the count is the
/// same in any order, the depth lower), and the uncontrolled halves either with the hopping
/// pairs diagonalised together (`synth::Pairs`: no coupling graph makes them cost more than
/// two ladders) or one network per commuting run (`synth::Groups`); the split's flip
/// (`synth::flip::Choice::Search`, where one exists) or the signed step with the greedy
/// string or none (`Choice::Signed`), whichever form has fewer two-qubit gates over one and
/// two steps. `None` for order 1 or past [`FLIP_MAX_WORK`].
pub fn all_to_all_flip(
    terms: &[(crate::pauli::PauliString, f64)],
    group_sizes: &[usize],
    spec: &Spec,
    control: crate::circuit::Qubit,
) -> Option<crate::synth::flip::FlippedParts> {
    let n = control as usize;
    let work = terms.len() as f64 * terms.len().min(2 * n) as f64 * (2 * n + 1).div_ceil(64) as f64;
    if work > FLIP_MAX_WORK {
        return None;
    }
    let dt = spec.dt / spec.steps_per_dt.max(1) as f64;
    let pairs = crate::synth::has_hopping_pairs(&crate::formula::step(terms, spec.order, dt));
    let ladder = |r: &Rotation| crate::synth::default_ladder(r);
    // The halves through ladders (or pairs) and through `synth::Groups`; the form with fewer
    // two-qubit gates after cancellation is kept (the Ising chain's: 90 either way; random
    // sums: the networks share the basis changes of a commuting run).
    // Beside the split's flip, the signed step (`synth::flip::Choice::Signed`) with the
    // greedy string and with none: it exists for every symmetric formula.
    // Past [`SIGNED_MAX_UNIT`] (on the step's two halves: 4 per Pauli factor each) only the
    // split's flip is tried, scored on one step: on the utility benchmark's 10⁵ strings the
    // signed candidates and the two-step score took its compile from 8 s to 13.5 s (ratio
    // 15.2 against the target 10).
    let unit: usize = terms.iter().map(|(p, _)| 8 * p.weight() as usize).sum();
    let small = unit <= SIGNED_MAX_UNIT;
    let greedy = if small {
        crate::synth::flip::signed_string(terms, n, control, None)
    } else {
        Vec::new()
    };
    let none = crate::synth::flip::FlipString::new();
    let mut choices = vec![crate::synth::flip::Choice::Search];
    if !greedy.is_empty() {
        choices.push(crate::synth::flip::Choice::Signed(&greedy));
    }
    if small {
        choices.push(crate::synth::flip::Choice::Signed(&none));
    }
    let mut best: Option<(usize, crate::synth::flip::FlippedParts)> = None;
    for (choice, groups) in choices.iter().flat_map(|&c| [false, true].map(|g| (c, g))) {
        let writing = crate::synth::flip::Writing {
            order: crate::synth::flip::BlockOrder::Layers,
            pairs: pairs && !groups,
            groups,
        };
        let Some(parts) = crate::synth::flip::flipped_step_parts(
            terms,
            group_sizes,
            spec.order,
            dt,
            writing,
            control,
            &ladder,
            None,
            choice,
            None,
        ) else {
            continue;
        };
        // Scored over one step and two (where seams merge: a split's controlled edges, a
        // signed step's halves meeting their mirror image's).
        let two: usize = [1, 2][..if small { 2 } else { 1 }]
            .iter()
            .copied()
            .map(|steps| {
                let mut c = Circuit::new(n + 1, 0);
                parts.steps_into(steps, &mut c.gates);
                crate::circuit::cancel::cancel_inverses(&mut c);
                c.gates.iter().filter(|g| g.is_two_qubit()).count()
            })
            .sum();
        if best.as_ref().is_none_or(|(b, _)| two < *b) {
            best = Some((two, parts));
        }
    }
    best.map(|(_, parts)| parts)
}

/// Why compilation stopped: routing refused the target or failed ([`RouteError`] says whether
/// the problem does not fit the device or the router has a bug), the campaign is too large for
/// this machine (bad input), or a pass broke an IR invariant (a compiler bug).
#[derive(Debug)]
pub enum CompileError {
    Route(RouteError),
    /// The predicted peak memory exceeds what the machine has (see [`predicted_memory`]).
    TooLarge(String),
    Ir(IrError),
    /// The [`Sink`] could not take a circuit's text (a write failed: disk full, say).
    Output(crate::error::Error),
    /// `spec.states[index]` (`text`) is not a reference state for the Hamiltonian (bad input).
    State {
        index: usize,
        text: String,
        error: crate::family::StateError,
    },
}

impl From<RouteError> for CompileError {
    fn from(e: RouteError) -> CompileError {
        CompileError::Route(e)
    }
}

impl From<IrError> for CompileError {
    fn from(e: IrError) -> CompileError {
        CompileError::Ir(e)
    }
}

impl From<CompileError> for crate::error::Error {
    fn from(e: CompileError) -> crate::error::Error {
        match e {
            CompileError::Route(e) => crate::error::Error::from(e),
            CompileError::TooLarge(m) => crate::error::Error::usage(
                crate::diag::Code::UsageLimit,
                m,
                Some("use fewer --points or --steps, a lower --order, or fewer terms (a cutoff on small coefficients)"),
            ),
            CompileError::Ir(e) => crate::error::Error::Ir(e),
            CompileError::Output(e) => e,
            CompileError::State { index, text, error } => crate::error::Error::usage(
                crate::diag::Code::UsageOption,
                format!("reference state {index} `{text}`: {error}"),
                Some(crate::family::state::LETTER_HINT),
            ),
        }
    }
}

const GIB: f64 = (1u64 << 30) as f64;

/// Bytes of OpenQASM text per estimated gate on the all-to-all target (`cx q[12], q[40];` is
/// 17, a rotation with its 17-digit angle about 30), and on a device (per estimated gate
/// before lowering: a gate lowered to native names is several lines). Both measured on the
/// utility benches (`benches/utility.rs`, `benches/utility_device.rs`: text written ÷ gates
/// estimated below), rounded up.
const TEXT_PER_GATE: u128 = 20;
const DEVICE_TEXT_PER_GATE: u128 = 56;
/// What the process holds whatever the campaign: the program, the Hamiltonian's term list,
/// a device's hop table, the thread stacks (measured: about 70 MB on the 10³-term device bench).
pub const BASE_BYTES: u128 = 96 << 20;
/// On a device the routed step and its lowered pieces (`route::DeviceCampaign`) are held while
/// every circuit is written from them: about this many times one step's text (measured on the
/// device benches: 4.8).
pub const DEVICE_STEP_COPIES: u128 = 6;
/// On the all-to-all target, the first time point with a step holds every level-3 candidate's
/// body at once (chain, tree, pairs, agreeing order, and the two `Groups` forms).
const FIRST_POINT_BODIES: u128 = 6;
/// The later points hold the bodies of the candidates kept (the chain and the winner).
const LATER_POINT_BODIES: u128 = 2;

/// What a campaign will cost before any of it is built: an estimate from the sizes alone of
/// the working set of [`compile_into`] (texts go to the sink as they are made).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Prediction {
    pub circuits: usize,
    /// Rotations over all circuits, before merging (merging only lowers it).
    pub rotations: u128,
    /// Gates of the longest circuit: per rotation a basis change and its undoing, a CNOT ladder
    /// and its mirror, and the controlled `rz` (at most `6w + 2` for weight `w`); on a device
    /// also 3 CNOTs per SWAP, a term needing one SWAP per hop it must close (`term_hops`), the
    /// whole doubled for native lowering.
    pub gates: u128,
    /// Bytes of the longest circuit's text.
    pub largest_text: u128,
    /// Peak bytes: [`BASE_BYTES`]; every time point's rotation program (twice at level 3: the
    /// agreeing order too), all-to-all only; then the larger of the two working sets: on the
    /// all-to-all target, per point, the candidates' bodies as IR and two texts (one held for
    /// the circuits that copy its body, one being written), the most over the points; on a
    /// device, one text per thread being written and [`DEVICE_STEP_COPIES`] step texts.
    pub bytes: u128,
}

/// The mean hop distance between the qubits of `device` (at most 512 of them, evenly spread,
/// when it is larger), 1 when it has fewer than two.
fn mean_distance(device: &Device) -> f64 {
    let n = device.num_qubits;
    let picked: Vec<u32> = (0..n.min(512))
        .map(|i| (i * n / n.min(512)) as u32)
        .collect();
    let (mut sum, mut pairs) = (0u64, 0u64);
    for &a in &picked {
        for &b in &picked {
            let d = device.distance(a, b);
            if a != b && d != crate::device::UNREACHABLE {
                sum += d as u64;
                pairs += 1;
            }
        }
    }
    if pairs == 0 {
        1.0
    } else {
        sum as f64 / pairs as f64
    }
}

/// Hops every term of `h` must close on `device`, summed: per term, from its lowest qubit to
/// each other qubit of its support, the hop distance less one, with logical qubit `q` on
/// physical qubit `q` (the layout search starts near that placement and keeps a better one,
/// so terms local in the numbering stay cheap); with [`mean_distance`] when `h` is wider
/// than the device or the placement crosses components.
fn term_hops(h: &PauliSum, device: &Device) -> f64 {
    let mean = (mean_distance(device) - 1.0).max(0.0);
    let wide = h.num_qubits > device.num_qubits;
    h.terms
        .keys()
        .map(|p| {
            let mut support = p.support_iter();
            let Some(first) = support.next() else {
                return 0.0;
            };
            support
                .map(|q| {
                    let d = device.distance(first as u32, q as u32);
                    if wide || d == crate::device::UNREACHABLE {
                        mean
                    } else {
                        d.saturating_sub(1) as f64
                    }
                })
                .sum::<f64>()
        })
        .sum()
}

/// Predicts the size of the campaign `spec` makes of `h`, on `device` or all-to-all when
/// `None` ([`Prediction`]), with the threads of the current rayon pool.
pub fn predicted_memory(h: &PauliSum, spec: &Spec, device: Option<&Device>) -> Prediction {
    let m = h.terms.len() as u128;
    let weight: u128 = h.terms.keys().map(|p| p.weight() as u128).sum();
    let per_step = match spec.order {
        crate::formula::Order::First => 1,
        crate::formula::Order::Second => 2,
        crate::formula::Order::Fourth => 10,
    };
    let per_circuit = |k: u128| k * spec.steps_per_dt as u128 * per_step;
    let reads_per_point: u128 = match spec.family {
        crate::plan::Family::Krylov => 2 * (1 + m.min(4096)),
        _ => 2 * spec.states.len().max(1) as u128,
    };
    let points = spec.points as u128;
    let circuits = (points.saturating_sub(1) * reads_per_point) as usize;
    let steps: u128 = (1..points).map(per_circuit).sum::<u128>() * reads_per_point;
    let rotations = steps * m;
    let last = per_circuit(points.saturating_sub(1));
    let gate = std::mem::size_of::<Gate>() as u128;
    // Gates of one step of the formula (per_step rotations of every term).
    let a2a_step = per_step * (6 * weight + 2 * m);
    let (gates, largest_text, work) = match device {
        None => {
            let gates = last / per_step.max(1) * a2a_step;
            let text = gates * TEXT_PER_GATE;
            // Per point: its bodies and two texts; the first point with a step holds more
            // bodies, the last the longest ones.
            let point = |k: u128, bodies: u128| {
                let g = per_circuit(k) / per_step.max(1) * a2a_step;
                bodies * g * gate + 2 * g * TEXT_PER_GATE
            };
            let work = (1..points)
                .map(|k| {
                    point(
                        k,
                        if k == 1 {
                            FIRST_POINT_BODIES
                        } else {
                            LATER_POINT_BODIES
                        },
                    )
                })
                .max()
                .unwrap_or(0);
            // Every point's program, and at level 3 its agreeing order.
            let programs: u128 = (0..points).map(per_circuit).sum::<u128>()
                * m
                * 2
                * std::mem::size_of::<crate::formula::Rotation>() as u128;
            (gates, text, work + programs)
        }
        Some(d) => {
            let swaps = (3.0 * term_hops(h, d)).ceil() as u128;
            let step = 2 * (a2a_step + per_step * swaps);
            let gates = last / per_step.max(1) * step;
            let text = gates * DEVICE_TEXT_PER_GATE;
            let threads = (rayon::current_num_threads() as u128).clamp(1, circuits.max(1) as u128);
            (
                gates,
                text,
                threads * text + DEVICE_STEP_COPIES * step * DEVICE_TEXT_PER_GATE,
            )
        }
    };
    Prediction {
        circuits,
        rotations,
        gates,
        largest_text,
        bytes: BASE_BYTES + work,
    }
}

/// Where each circuit's OpenQASM 3 text goes as soon as it is final ([`compile_into`]): the
/// command layer writes it to its file and drops it (`app::compile::FolderWriter`), so a
/// campaign's texts are never all in memory; [`Collect`] keeps them for callers that want them.
pub trait Sink: Sync {
    /// Takes the text of circuit `index` (plan order), stored as `file` (the plan's
    /// `CircuitEntry::file`). Called once per circuit, from any thread, in no fixed order.
    fn put(&self, index: usize, file: &str, text: String) -> Result<(), crate::error::Error>;
}

/// A [`Sink`] that keeps every text, by plan index ([`compile_at`] returns them).
#[derive(Default)]
pub struct Collect {
    texts: std::sync::Mutex<Vec<Option<String>>>,
}

impl Collect {
    /// The texts of circuits `0..n`, in plan order; `None` if one was never put.
    pub fn into_texts(self, n: usize) -> Option<Vec<String>> {
        let mut texts = self.texts.into_inner().ok()?;
        texts.resize(n.max(texts.len()), None);
        (texts.len() == n)
            .then(|| texts.into_iter().collect::<Option<Vec<String>>>())
            .flatten()
    }
}

impl Sink for Collect {
    fn put(&self, index: usize, _file: &str, text: String) -> Result<(), crate::error::Error> {
        let mut texts = self.texts.lock().map_err(|_| {
            crate::error::Error::Internal("a thread failed while collecting".into())
        })?;
        if texts.len() <= index {
            texts.resize(index + 1, None);
        }
        texts[index] = Some(text);
        Ok(())
    }
}

/// The file of circuit `id` (the plan's `CircuitEntry::file`).
fn file_of(id: &str) -> String {
    format!("{id}.qasm")
}

/// A compiled campaign: the plan and, for every circuit in plan order, its program text.
pub struct Compiled {
    pub plan: Plan,
    pub programs: Vec<String>,
}

impl Compiled {
    /// Circuit `i` read back from its program text ([`crate::qasm::read`]), for callers that
    /// simulate without the files. No target keeps its circuits as IR beside the text: circuits
    /// that share their body are written from one text of it, and at utility scale the IR would
    /// double the memory. Angles round-trip exactly (`qasm::push_angle`).
    pub fn circuit(&self, i: usize) -> Circuit {
        crate::qasm::read(&self.plan.circuits[i].file, &self.programs[i])
            .expect("phasewright reads back every program it writes")
            .circuit
    }

    /// Every circuit read back from its text, in plan order ([`Compiled::circuit`]).
    pub fn circuits(&self) -> Vec<Circuit> {
        (0..self.programs.len()).map(|i| self.circuit(i)).collect()
    }
}

/// Summary of the Hamiltonian as recorded in the plan.
pub fn hamiltonian_info(h: &PauliSum, source: &str) -> HamiltonianInfo {
    HamiltonianInfo {
        source: source.to_string(),
        num_qubits: h.num_qubits,
        constant: h.constant,
        one_norm: h.one_norm(),
        terms: h
            .terms
            .iter()
            .map(|(p, c)| TermInfo {
                pauli: p.to_factor_text(),
                coeff: *c,
            })
            .collect(),
    }
}

/// Runs the passes for the all-to-all target (which every problem fits; a campaign may still
/// be too large for the machine's memory).
pub fn compile(h: &PauliSum, source: &str, spec: &Spec) -> Result<Compiled, CompileError> {
    compile_for(h, source, spec, &Target::AllToAll)
}

/// Runs the passes for any target at the default (best) level.
pub fn compile_for(
    h: &PauliSum,
    source: &str,
    spec: &Spec,
    target: &Target,
) -> Result<Compiled, CompileError> {
    compile_at(h, source, spec, target, OptLevel::default())
}

/// One circuit after the target-specific passes, with what the plan says about it.
struct Finished {
    id: String,
    k: usize,
    time: f64,
    part: Option<crate::plan::Part>,
    state: usize,
    group: Option<usize>,
    reads: Vec<crate::plan::Read>,
    num_qubits: usize,
    num_clbits: usize,
    costs: Costs,
    final_layout: Vec<u32>,
    fanout: Option<FanOut>,
    /// All-to-all: the steps are the campaign's sign-flip steps ([`Synthesis::Flip`]).
    flipped: bool,
}

/// A circuit's text held back from the [`Sink`] while later circuits of its time point copy
/// its body's text from it (`at`), with the circuit's plan index and file.
struct Held {
    text: String,
    at: Range<usize>,
    index: usize,
    file: String,
}

/// Which rotation program of a time point a candidate synthesises on the all-to-all target.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum ProgramOrder {
    /// The formula's own order.
    Formula,
    /// The same product reordered so that neighbours share (`route::sweep::schedule_by_agreement`).
    Agreeing,
    /// Each commuting run in layers of rotations on disjoint qubits, for depth
    /// (`route::sweep::schedule_in_layers`).
    Layered,
}

/// `f` of every program (in parallel) when `on`, else `off` for each.
fn per_program<T: Send + Clone>(
    programs: &[Vec<Rotation>],
    on: bool,
    off: T,
    f: impl Fn(&[Rotation]) -> T + Sync + Send,
) -> Vec<T> {
    if on {
        programs.par_iter().map(|p| f(p)).collect()
    } else {
        vec![off; programs.len()]
    }
}

/// The circuits of one time point on the all-to-all target, the candidates they kept, and the
/// most two-qubit gates among them.
struct PointBuilt {
    finished: Vec<Finished>,
    kept: Vec<(ProgramOrder, Synthesis)>,
    most_two_qubit: usize,
}

/// Circuits of the first time point with a step past this many two-qubit gates make the other
/// points of an all-to-all campaign try only the candidates that point kept (and the chain):
/// the same size as a device step's `route::EXTRAS_MAX_UNIT`, past which each extra candidate
/// costs about as much as everything else the point needs.
pub const SCORE_ONCE_MIN: usize = 20_000;

/// Where the body of a shorter program may leave the longest one: the largest `c` below the
/// length of their common prefix at which `big[c − 1]` and `big[c]` do not commute (so every
/// synthesis that works on commuting runs starts a new run there in both), or 0.
fn cut_point(p: &[Rotation], big: &[Rotation]) -> usize {
    let common = p
        .iter()
        .zip(big)
        .take_while(|(a, b)| a.theta.to_bits() == b.theta.to_bits() && a.pauli == b.pauli)
        .count();
    (1..common)
        .rev()
        .find(|&c| !big[c - 1].pauli.commutes_with(&big[c].pauli))
        .unwrap_or(0)
}

/// The synthesised blocks of the later time points of one campaign and one candidate, and for
/// each point the blocks its body runs, in order. Built once ([`LaterBlocks::periodic`],
/// [`LaterBlocks::grown`]); a point's peephole stream is fed from them on demand
/// ([`LaterBlocks::stream`]), so a caller holds the streams of one point at a time and the
/// blocks (about two or three steps of gates, without the peephole's stacks) meanwhile.
/// Feeding a point costs a push per gate of that point, as writing its text does.
pub struct LaterBlocks {
    blocks: Vec<Vec<Gate>>,
    /// Per point: `(block, how many times in a row)`, in order.
    recipes: Vec<Vec<(usize, usize)>>,
}

impl LaterBlocks {
    /// The blocks of the programs of `form` (time points of one campaign,
    /// [`formula::periodic_form`](crate::formula::periodic_form)): the head, the unit and the
    /// tail are synthesised once each (in parallel), and point `j` runs the head, `repeats[j]`
    /// units and the tail. So the later points of a campaign cost about two syntheses of a
    /// step in all, however many points and steps there are; only the peephole pass still
    /// sees every gate. Invariant: [`LaterBlocks::stream`] of point `j` is exactly
    /// [`Peephole`] fed `prefix`, `synthesize(head)`, `repeats[j]` copies of
    /// `synthesize(unit)` and `synthesize(tail)`: the same unitary as
    /// `synthesize(programs[j])` whenever `synthesize` is exact on every block.
    pub fn periodic(
        form: &crate::formula::Periodic,
        synthesize: &(dyn Fn(&[Rotation]) -> Vec<Gate> + Sync),
    ) -> LaterBlocks {
        let blocks: Vec<Vec<Gate>> = [form.head, form.unit, form.tail]
            .par_iter()
            .map(|b| synthesize(b))
            .collect();
        let recipes = form
            .repeats
            .iter()
            .map(|&r| vec![(0, 1), (1, r), (2, 1)])
            .collect();
        LaterBlocks { blocks, recipes }
    }

    /// The blocks of `programs` (time points of one campaign, the longest last), from one
    /// pass over the longest.
    ///
    /// The program of time point `k` is `k·R` Trotter steps; the formula merges factors only
    /// near the end it is building, so the program of point `j < k` agrees with that of `k` up
    /// to its last step or so. Each shorter program is cut at `cut_point`: its body is the
    /// longest program's blocks up to the cut (shared, never synthesised twice) followed by its
    /// own tail, synthesised on its own. `synthesize` is called on the segments of the longest
    /// program between cuts and on each tail (in parallel), so `k` points cost about one
    /// synthesis of the longest program instead of one per point. Invariant:
    /// [`LaterBlocks::stream`] of point `j` is exactly [`Peephole`] fed `prefix`, then
    /// `synthesize(programs[j][..c])`, then `synthesize(programs[j][c..])`: the same unitary
    /// as `synthesize(programs[j])` whenever `synthesize` is exact on every block, and the same
    /// gates whenever its gates for a block are those of its commuting runs one after another
    /// (chains, trees, `synth::Groups` without a carried frame).
    pub fn grown(
        programs: &[&[Rotation]],
        synthesize: &(dyn Fn(&[Rotation]) -> Vec<Gate> + Sync),
    ) -> LaterBlocks {
        let Some((&big, shorter)) = programs.split_last() else {
            return LaterBlocks {
                blocks: Vec::new(),
                recipes: Vec::new(),
            };
        };
        let cuts: Vec<usize> = shorter.iter().map(|p| cut_point(p, big)).collect();
        let mut bounds: Vec<usize> = cuts.clone();
        bounds.push(0);
        bounds.push(big.len());
        bounds.sort_unstable();
        bounds.dedup();
        let mut blocks: Vec<Vec<Gate>> = bounds
            .par_windows(2)
            .map(|w| synthesize(&big[w[0]..w[1]]))
            .collect();
        let segments = blocks.len();
        let tails: Vec<Vec<Gate>> = shorter
            .par_iter()
            .zip(&cuts)
            .map(|(p, &c)| synthesize(&p[c..]))
            .collect();
        blocks.extend(tails);
        // Segment `s` spans `bounds[s]..bounds[s + 1]`; a cut is a bound, so the segments
        // before it are exactly those that end at or below it.
        let bounds = &bounds;
        let upto = |cut: usize| (0..segments).filter(move |&s| bounds[s + 1] <= cut);
        let mut recipes: Vec<Vec<(usize, usize)>> = cuts
            .iter()
            .enumerate()
            .map(|(j, &c)| {
                let mut r: Vec<(usize, usize)> = upto(c).map(|s| (s, 1)).collect();
                r.push((segments + j, 1));
                r
            })
            .collect();
        recipes.push((0..segments).map(|s| (s, 1)).collect());
        LaterBlocks { blocks, recipes }
    }

    /// The blocks of sign-flip steps (`synth::flip::FlippedParts`) for points of `steps[j]`
    /// steps each: `lead` then `middle`, (`merged` then `middle`) repeated, and `trail`.
    /// Invariant: [`LaterBlocks::stream`] of point `j` is [`Peephole`] fed `prefix` and
    /// `parts.steps_into(steps[j])`.
    pub fn flipped(parts: &crate::synth::flip::FlippedParts, steps: &[usize]) -> LaterBlocks {
        if !parts.mirrored.is_empty() {
            // A signed step and its mirror image alternately: pairs of them, and one more.
            let blocks = vec![
                [&parts.middle[..], &parts.mirrored].concat(),
                parts.middle.clone(),
            ];
            let recipes = steps
                .iter()
                .map(|&r| vec![(0, r / 2), (1, r % 2)])
                .collect();
            return LaterBlocks { blocks, recipes };
        }
        let blocks = vec![
            [&parts.lead[..], &parts.middle].concat(),
            [&parts.merged[..], &parts.middle].concat(),
            parts.trail.clone(),
        ];
        let recipes = steps
            .iter()
            .map(|&r| match r {
                0 => Vec::new(),
                r => vec![(0, 1), (1, r - 1), (2, 1)],
            })
            .collect();
        LaterBlocks { blocks, recipes }
    }

    /// The peephole stream of point `j`: `prefix`, then the point's blocks in order.
    pub fn stream(&self, num_qubits: usize, prefix: &[Gate], j: usize) -> Peephole {
        let recipe = &self.recipes[j];
        let total = prefix.len()
            + recipe
                .iter()
                .map(|&(b, times)| times * self.blocks[b].len())
                .sum::<usize>();
        let mut stream = Peephole::new(num_qubits, total);
        for &g in prefix {
            stream.push(g);
        }
        for &(b, times) in recipe {
            for _ in 0..times {
                for &g in &self.blocks[b] {
                    stream.push(g);
                }
            }
        }
        stream
    }
}

/// The shared gates of the circuits of one time point (preparation and evolution) on the
/// all-to-all target: fed to the peephole stream (level ≥ 1), or as synthesised (level 0).
enum Body {
    /// The stream, settled for the readouts of its circuits, and the costs of its gates.
    Stream(Settled, Counter),
    Raw(Vec<Gate>),
}

impl Body {
    /// A body fed to the peephole stream, counted once, and settled for readouts of at most
    /// `longest_readout` gates ([`Peephole::settle`]: the stacks shrink to their tops).
    fn stream(stream: Peephole, num_qubits: usize, longest_readout: usize) -> Body {
        let mut counter = Counter::new(num_qubits);
        counter.extend(stream.gates());
        Body::Stream(stream.settle(longest_readout), counter)
    }

    /// The gates of the whole circuit: this body, then `readout`.
    fn with_readout(&self, readout: &[Gate]) -> Vec<Gate> {
        match self {
            Body::Stream(s, _) => s.with_tail(readout).to_vec(),
            Body::Raw(gates) => {
                let mut out = Vec::with_capacity(gates.len() + readout.len());
                out.extend_from_slice(gates);
                out.extend_from_slice(readout);
                out
            }
        }
    }

    /// `counts` of [`Body::with_readout`], without building it: from the body's own counts
    /// when the readout leaves the body's gates as they are (the usual case), else by one
    /// pass over the whole circuit.
    fn counts_with_readout(&self, num_qubits: usize, readout: &[Gate]) -> Counts {
        match self {
            Body::Stream(s, counted) => {
                let tailed = s.with_tail(readout);
                let counts = match tailed.appended_only() {
                    Some(tail) => {
                        let mut c = counted.clone();
                        c.extend(tail);
                        c.counts()
                    }
                    None => counts_of(num_qubits, tailed.gates()),
                };
                counts
            }
            Body::Raw(gates) => counts_of(num_qubits, gates.iter().chain(readout).copied()),
        }
    }
}

impl Body {
    /// The program text of the circuit made of this body and `readout`, on `(qubits, bits)`,
    /// and, when the readout only appends (the usual case), where the body's text lies in it.
    /// Then the body's gates are verified and written once, by the first circuit that keeps
    /// this body, and each later one is given them back as `written` (the bytes at that range
    /// of the first one's text) and copies them (the real and imaginary parts of one Hadamard
    /// test, say), so no copy of a body's text is held beside the circuits' texts. The
    /// readout's gates are verified on their own, which is the same check because a body
    /// holds no measurement (it is verified with no classical bits). A readout that changes
    /// the body's last gates verifies and writes its whole circuit.
    fn text_with_readout(
        &self,
        (num_qubits, num_clbits): (usize, usize),
        readout: &[Gate],
        comments: &[String],
        written: Option<&[u8]>,
    ) -> Result<(String, Option<Range<usize>>), IrError> {
        let rules = Rules::default();
        let logical = Addressing::Logical;
        let mut out = Vec::new();
        let mut body_at = None;
        let text = |out: &mut Vec<u8>, gates: &mut dyn Iterator<Item = Gate>| {
            crate::qasm::write_gate_iter(out, gates, logical).expect("writing to memory")
        };
        let header = |out: &mut Vec<u8>| {
            crate::qasm::write_header(out, num_qubits, num_clbits, 0.0, logical, comments)
                .expect("writing to memory")
        };
        match self {
            Body::Stream(s, _) => {
                let tailed = s.with_tail(readout);
                let appended: Option<Vec<Gate>> = tailed.appended_only().map(Iterator::collect);
                match appended {
                    Some(tail) => {
                        if written.is_none() {
                            verify_gates(num_qubits, 0, s.gates(), &rules).map_err(|e| {
                                IrError {
                                    message: format!(
                                        "{} (in the body, which holds no measurement)",
                                        e.message
                                    ),
                                    ..e
                                }
                            })?;
                        }
                        verify_gates(num_qubits, num_clbits, tail.iter().copied(), &rules)?;
                        if let Some(body) = written {
                            out.reserve(body.len() + 64 * tail.len() + 512);
                        }
                        header(&mut out);
                        let start = out.len();
                        match written {
                            Some(body) => out.extend_from_slice(body),
                            None => text(&mut out, &mut s.gates()),
                        }
                        body_at = Some(start..out.len());
                        text(&mut out, &mut tail.into_iter());
                    }
                    None => {
                        verify_gates(num_qubits, num_clbits, tailed.gates(), &rules)?;
                        header(&mut out);
                        text(&mut out, &mut tailed.gates());
                    }
                }
            }
            Body::Raw(gates) => {
                let all = || gates.iter().chain(readout).copied();
                verify_gates(num_qubits, num_clbits, all(), &rules)?;
                header(&mut out);
                text(&mut out, &mut all());
            }
        }
        let text = String::from_utf8(out).expect("the writer emits ASCII");
        Ok((text, body_at))
    }
}

/// The most gates of any readout among `frames` (what their shared body is settled for).
fn longest_suffix(frames: &[crate::family::Frame]) -> usize {
    frames.iter().map(|f| f.suffix.len()).max().unwrap_or(0)
}

/// The leading comment lines of a circuit's program.
fn header_comments(
    id: &str,
    part: Option<crate::plan::Part>,
    k: usize,
    time: f64,
    device: Option<&DeviceInfo>,
) -> Vec<String> {
    let mut comments = match part {
        Some(part) => {
            let part = if part == crate::plan::Part::Re {
                "real"
            } else {
                "imaginary"
            };
            vec![
                format!(
                    "phasewright circuit {id}: {part} part of the Hadamard test at k = {k}, t = {time}"
                ),
                "bit 0 is the ancilla; see plan.json for what each bit reads".to_string(),
            ]
        }
        None => vec![
            format!("phasewright circuit {id}: time evolution at k = {k}, t = {time}"),
            "bit q holds qubit q of the Hamiltonian (no ancilla)".to_string(),
        ],
    };
    if let Some(d) = device {
        comments.push(format!(
            "device {}: physical qubits, native gates {}",
            d.name,
            d.native.join(" ")
        ));
    }
    comments
}

/// Runs the passes for any target at optimisation level `level`, every text kept
/// ([`Collect`]).
pub fn compile_at(
    h: &PauliSum,
    source: &str,
    spec: &Spec,
    target: &Target,
    level: OptLevel,
) -> Result<Compiled, CompileError> {
    let texts = Collect::default();
    let plan = compile_into(h, source, spec, target, level, &texts)?;
    let programs = texts.into_texts(plan.circuits.len()).ok_or_else(|| {
        CompileError::Output(crate::error::Error::Internal(
            "a circuit's text never reached the sink".into(),
        ))
    })?;
    Ok(Compiled { plan, programs })
}

/// Runs the passes for any target at optimisation level `level`; each circuit's text goes to
/// `sink` as soon as it is final (on the all-to-all target a text whose body later circuits of
/// its point copy is held until the last of them is written), and the plan is returned last,
/// without the texts' digests.
pub fn compile_into(
    h: &PauliSum,
    source: &str,
    spec: &Spec,
    target: &Target,
    level: OptLevel,
    sink: &dyn Sink,
) -> Result<Plan, CompileError> {
    spec.ref_states(h.num_qubits)
        .map_err(|(index, error)| CompileError::State {
            index,
            text: spec.states[index].clone(),
            error,
        })?;
    let predicted = predicted_memory(
        h,
        spec,
        match target {
            Target::AllToAll => None,
            Target::Device { device, .. } => Some(device),
        },
    );
    if let Some(avail) = crate::sim::available_memory_bytes() {
        if predicted.bytes > avail {
            return Err(CompileError::TooLarge(format!(
                "this campaign needs about {:.1} GiB of memory while it is compiled ({} circuits, about {:.2e} rotations; its longest circuit about {:.2e} gates, {:.1} GiB of text) but only {:.1} GiB is available",
                predicted.bytes as f64 / GIB,
                predicted.circuits,
                predicted.rotations as f64,
                predicted.gates as f64,
                predicted.largest_text as f64 / GIB,
                avail as f64 / GIB
            )));
        }
    }
    match target {
        Target::AllToAll => {
            // The formula's term order (`formula::order_terms`: its commuting groups one
            // after another) and the sizes of those groups.
            let (terms, group_sizes) = stage(Stage::Order, || {
                let groups = crate::formula::term_groups(h);
                let sizes: Vec<usize> = groups.iter().map(Vec::len).collect();
                (groups.concat(), sizes)
            });
            let n = h.num_qubits;
            // The ancilla controls the rotations only in the textbook Hadamard test.
            let control = (spec.control == Control::Evolution && spec.family != Family::Evolution)
                .then_some(n as crate::circuit::Qubit);
            // Level 3 also writes each step by a sign flip where one exists (`synth::flip`):
            // every point repeats the same step, so it is built once.
            let flip = control.filter(|_| level >= OptLevel(3)).and_then(|c| {
                stage(Stage::Formula, || {
                    all_to_all_flip(&terms, &group_sizes, spec, c)
                })
            });
            // One rotation program per time point, shared by every circuit at that point; the
            // string ids and commuting runs of the term list are found once for all points.
            let programs: Vec<Vec<Rotation>> = stage(Stage::Formula, || {
                let formula = (level != OptLevel::TEXTBOOK).then(|| Formula::new(&terms));
                let step_dt = spec.dt / spec.steps_per_dt.max(1) as f64;
                (0..spec.points)
                    .into_par_iter()
                    .map(|k| {
                        let (t, r) = (k as f64 * spec.dt, k * spec.steps_per_dt);
                        match &formula {
                            None => textbook_evolution(&terms, spec.order, t, r),
                            // Every point repeats one step of dt / R with the same angles, so
                            // the later points can share its synthesis (`periodic_form`).
                            Some(f) => f.evolution_by_step(spec.order, step_dt, r),
                        }
                    })
                    .collect()
            });
            // Level 3 also tries each program in the order that lets neighbours share
            // (`route::sweep::schedule_by_agreement`: the same product exactly).
            let scans = Instant::now();
            let level3 = level >= OptLevel(3);
            let agreeing = per_program(&programs, level3, None, |p| {
                crate::route::sweep::schedule_by_agreement(p)
            });
            // And in layers of rotations on disjoint qubits, for depth
            // (`route::sweep::schedule_in_layers`; kept where no other candidate emits fewer
            // two-qubit gates or as many, less deep).
            let layered = per_program(&programs, level3, None, |p| {
                crate::route::sweep::schedule_in_layers(p)
            });
            // Programs with hopping pairs also try `synth::Pairs` at level 3.
            let paired = per_program(&programs, level3, false, |p| {
                crate::synth::has_hopping_pairs(p)
            });
            // Programs whose commuting runs share qubits also try `synth::Groups` at level 3.
            let grouped = per_program(&programs, level3, false, |p| {
                crate::synth::groups::has_shared_runs(p)
            });
            clock::add(Stage::Scans, scans);
            // The circuits of one time point with the same preparation (the real and the
            // imaginary part of one Hadamard test, say) run the same gates up to their readout:
            // each candidate synthesis of that shared body is built, verified and fed to the
            // peephole stream once, and only the readouts are run per circuit
            // (`circuit::cancel::Peephole`: the stream cloned before the readout gives exactly
            // what cancelling the whole circuit gives).
            let mut shared: Vec<Vec<crate::family::Frame>> = Vec::new();
            let started = Instant::now();
            for f in frames(h, spec) {
                match shared.last_mut() {
                    Some(g)
                        if g[0].k == f.k
                            && g[0].prefix == f.prefix
                            && g[0].num_qubits == f.num_qubits =>
                    {
                        g.push(f)
                    }
                    _ => shared.push(vec![f]),
                }
            }
            clock::add(Stage::Frames, started);
            // The run networks of `synth::Groups`, found once for every candidate and point.
            let networks = RunNetworks::default();
            // Candidates of time point k in the order they are compared (ties keep the
            // earlier): which program (the formula's order or the agreeing one) through which
            // synthesis. Trees are shallower but may cancel less between neighbouring
            // rotations, and the agreeing order cancels more but may be deeper: the emitted
            // circuit with fewer two-qubit gates (then the lower depth) is kept, so level 3
            // never emits more than level 2.
            let candidates = |k: usize| -> Vec<(ProgramOrder, Synthesis)> {
                let mut c = vec![(ProgramOrder::Formula, Synthesis::Chain)];
                if level >= OptLevel(3) {
                    c.push((ProgramOrder::Formula, Synthesis::Tree));
                    if paired[k] {
                        c.push((ProgramOrder::Formula, Synthesis::Pairs));
                    }
                    if agreeing[k].is_some() {
                        c.push((ProgramOrder::Agreeing, Synthesis::Sharing));
                    }
                    if layered[k].is_some() {
                        c.push((ProgramOrder::Layered, Synthesis::Chain));
                    }
                    if grouped[k] {
                        c.push((ProgramOrder::Formula, Synthesis::Groups));
                        if agreeing[k].is_some() {
                            c.push((ProgramOrder::Agreeing, Synthesis::Groups));
                        }
                    }
                    if flip.is_some() && k > 0 && spec.steps_per_dt > 0 {
                        c.push((ProgramOrder::Formula, Synthesis::Flip));
                    }
                }
                c
            };
            let program_of = |order: ProgramOrder, k: usize| -> &[Rotation] {
                match order {
                    ProgramOrder::Formula => &programs[k],
                    ProgramOrder::Agreeing => agreeing[k].as_deref().unwrap_or_default(),
                    ProgramOrder::Layered => layered[k].as_deref().unwrap_or_default(),
                }
            };
            // The candidates of time point k, only those in `only` when given (the chain always
            // among them).
            let candidates_in = |k: usize, only: Option<&[(ProgramOrder, Synthesis)]>| {
                let mut cands = candidates(k);
                if let Some(only) = only {
                    cands.retain(|c| c.1 == Synthesis::Chain || only.contains(c));
                }
                cands
            };
            // The circuits of one time point from the bodies of its candidates `cands`: per
            // circuit, the candidate whose body with that circuit's readout has the fewest
            // two-qubit gates (then the lowest depth). Every circuit is scored first; a body no
            // circuit keeps is dropped before any text is written, and a kept one as soon as
            // its last circuit is written (at utility scale each is a time point's gates).
            // Circuit `p` of the point goes to the sink as plan index `base + p`.
            let pick = |frames_k: Vec<crate::family::Frame>,
                        base: usize,
                        cands: &[(ProgramOrder, Synthesis)],
                        bodies: Vec<Body>|
             -> Result<PointBuilt, CompileError> {
                let mut built = PointBuilt {
                    finished: Vec::with_capacity(frames_k.len()),
                    kept: Vec::new(),
                    most_two_qubit: 0,
                };
                let mut chosen: Vec<(usize, Counts)> = Vec::with_capacity(frames_k.len());
                for f in &frames_k {
                    // Each candidate's readout is counted on an overlay of its shared body
                    // (nothing copied; the body itself was counted once); the first with the
                    // fewest two-qubit gates, then the lowest depth, is built.
                    let mut best: Option<(usize, Counts)> = None;
                    let counting = Instant::now();
                    for (i, body) in bodies.iter().enumerate() {
                        let n = body.counts_with_readout(f.num_qubits, &f.suffix);
                        if cfg!(debug_assertions) {
                            let mut c = Circuit::new(f.num_qubits, f.num_clbits);
                            c.gates = body.with_readout(&f.suffix);
                            verify_ir(&c, &Rules::default()).map_err(|e| IrError {
                                message: format!(
                                    "after passes `readout` and `cancel`: {}",
                                    e.message
                                ),
                                ..e
                            })?;
                        }
                        let better = best
                            .as_ref()
                            .is_none_or(|b| (n.two_qubit, n.depth) < (b.1.two_qubit, b.1.depth));
                        if better {
                            best = Some((i, n));
                        }
                    }
                    let (i, n) = best.expect("at least the chain candidate");
                    if cfg!(debug_assertions) {
                        let mut circuit = Circuit::new(f.num_qubits, f.num_clbits);
                        circuit.gates = bodies[i].with_readout(&f.suffix);
                        debug_assert_eq!(n, crate::circuit::metrics::counts(&circuit));
                    }
                    clock::add(Stage::Readout, counting);
                    chosen.push((i, n));
                }
                // How many circuits still to write keep each body: at zero it is dropped.
                let mut uses: Vec<usize> = vec![0; bodies.len()];
                for &(i, _) in &chosen {
                    uses[i] += 1;
                }
                let mut bodies: Vec<Option<Body>> = bodies
                    .into_iter()
                    .zip(&uses)
                    .map(|(b, &u)| (u > 0).then_some(b))
                    .collect();
                // Per body, the text of the circuit that first held the body's text, where
                // it sits in it, and that circuit's plan index and file: later circuits copy
                // it from there, and it goes to the sink after the last of them.
                let mut texts: Vec<Option<Held>> = bodies.iter().map(|_| None).collect();
                for (f, (i, n)) in frames_k.into_iter().zip(chosen) {
                    let comments = header_comments(&f.id, f.part, f.k, f.time, None);
                    let body = bodies[i].as_ref().expect("a body some circuit keeps");
                    let written = texts[i]
                        .as_ref()
                        .map(|held| &held.text.as_bytes()[held.at.clone()]);
                    let (text, body_at) = stage(Stage::Format, || {
                        body.text_with_readout(
                            (f.num_qubits, f.num_clbits),
                            &f.suffix,
                            &comments,
                            written,
                        )
                    })
                    .map_err(|e| IrError {
                        message: format!("after pass `cancel`: {}", e.message),
                        ..e
                    })?;
                    uses[i] -= 1;
                    let (index, file) = (base + built.finished.len(), file_of(&f.id));
                    match body_at {
                        Some(at) if texts[i].is_none() && uses[i] > 0 => {
                            texts[i] = Some(Held {
                                text,
                                at,
                                index,
                                file,
                            })
                        }
                        _ => sink.put(index, &file, text).map_err(CompileError::Output)?,
                    }
                    if uses[i] == 0 {
                        bodies[i] = None;
                        if let Some(held) = texts[i].take() {
                            sink.put(held.index, &held.file, held.text)
                                .map_err(CompileError::Output)?;
                        }
                    }
                    if !built.kept.contains(&cands[i]) {
                        built.kept.push(cands[i]);
                    }
                    built.most_two_qubit = built.most_two_qubit.max(n.two_qubit);
                    built.finished.push(Finished {
                        fanout: None,
                        flipped: cands[i].1 == Synthesis::Flip,
                        costs: n.into(),
                        id: f.id,
                        k: f.k,
                        time: f.time,
                        part: f.part,
                        state: f.state,
                        group: f.group,
                        reads: f.reads,
                        num_qubits: f.num_qubits,
                        num_clbits: f.num_clbits,
                        final_layout: Vec::new(),
                    });
                }
                Ok(built)
            };
            // Builds the circuits of one time point that share their body, from the candidates
            // in `only` when given, else from all; returns them with the candidates kept and
            // the most two-qubit gates of one circuit.
            let build = |frames_k: Vec<crate::family::Frame>,
                         base: usize,
                         only: Option<&[(ProgramOrder, Synthesis)]>|
             -> Result<PointBuilt, CompileError> {
                let first = &frames_k[0];
                let k = first.k;
                let cands = candidates_in(k, only);
                let longest_readout = longest_suffix(&frames_k);
                let bodies: Vec<Body> = cands
                    .par_iter()
                    .map(|&(order, synthesis)| {
                        let program = program_of(order, k);
                        let mut body = Circuit::new(first.num_qubits, first.num_clbits);
                        let mut passes = all_to_all_passes(
                            &first.prefix,
                            program,
                            control,
                            &[],
                            level,
                            synthesis,
                            Some(&networks),
                        );
                        if let (Synthesis::Flip, Some(parts)) = (synthesis, &flip) {
                            let steps = k * spec.steps_per_dt;
                            passes[1] = Pass {
                                name: "flip",
                                run: Box::new(move |c: &mut Circuit| {
                                    parts.steps_into(steps, &mut c.gates)
                                }),
                            };
                        }
                        // `prepare` and `synthesize`; the readout and `cancel` follow per
                        // circuit below.
                        stage(Stage::Synthesis, || {
                            run_passes(&mut body, &passes[..2], &Rules::default())
                        })?;
                        Ok(if level >= OptLevel(1) {
                            let stream = stage(Stage::Peephole, || {
                                let mut stream = Peephole::new(body.num_qubits, body.gates.len());
                                for g in body.gates.drain(..) {
                                    stream.push(g);
                                }
                                stream
                            });
                            stage(Stage::Readout, || {
                                Body::stream(stream, first.num_qubits, longest_readout)
                            })
                        } else {
                            Body::Raw(body.gates)
                        })
                    })
                    .collect::<Result<Vec<_>, IrError>>()?;
                pick(frames_k, base, &cands, bodies)
            };
            // The first time point with a step is built from every candidate; when its
            // circuits are past `SCORE_ONCE_MIN` two-qubit gates, the other points try only
            // the candidates it kept (and the chain, so a level still never emits more than the
            // level below): at utility scale each extra candidate costs a whole synthesis and
            // peephole pass per point, and which one wins is decided by the step, not by k.
            let mut done: Vec<Option<Vec<Finished>>> = (0..shared.len()).map(|_| None).collect();
            // The plan index of the first circuit of each group.
            let bases: Vec<usize> = shared
                .iter()
                .scan(0, |next, g| {
                    let base = *next;
                    *next += g.len();
                    Some(base)
                })
                .collect();
            let mut only: Option<Vec<(ProgramOrder, Synthesis)>> = None;
            let mut first_k = None;
            if let Some(s) = shared.iter().position(|g| g[0].k > 0) {
                first_k = Some(shared[s][0].k);
                let built = build(std::mem::take(&mut shared[s]), bases[s], None)?;
                if built.most_two_qubit > SCORE_ONCE_MIN {
                    only = Some(built.kept);
                }
                done[s] = Some(built.finished);
            }
            // Past that size the points with a step that share their preparation are built
            // from one synthesis per candidate ([`LaterBlocks`]): of the repeated step, or of
            // one pass over the longest program (the program of point k holds that of every
            // earlier point up to its last step, so their bodies are the longest body cut
            // short plus a tail of their own).
            if let (Some(only), true) = (&only, level >= OptLevel(1)) {
                let mut classes: Vec<Vec<usize>> = Vec::new();
                for i in (0..shared.len()).filter(|&i| shared[i].first().is_some_and(|f| f.k > 0)) {
                    let f = &shared[i][0];
                    let same = |c: &&mut Vec<usize>| {
                        let g = &shared[c[0]][0];
                        g.prefix == f.prefix && g.num_qubits == f.num_qubits
                    };
                    match classes.iter_mut().find(same) {
                        Some(c) => c.push(i),
                        None => classes.push(vec![i]),
                    }
                }
                for mut class in classes {
                    class.sort_by_key(|&i| shared[i][0].k);
                    let ks: Vec<usize> = class.iter().map(|&i| shared[i][0].k).collect();
                    let cands: Vec<Vec<(ProgramOrder, Synthesis)>> =
                        ks.iter().map(|&k| candidates_in(k, Some(only))).collect();
                    let mut union: Vec<(ProgramOrder, Synthesis)> = Vec::new();
                    for c in cands.iter().flatten() {
                        if !union.contains(c) {
                            union.push(*c);
                        }
                    }
                    let (num_qubits, prefix) = (
                        shared[class[0]][0].num_qubits,
                        shared[class[0]][0].prefix.clone(),
                    );
                    let mut blocks: Vec<Option<(Vec<usize>, LaterBlocks)>> = union
                        .par_iter()
                        .map(|&(order, synthesis)| {
                            let members: Vec<usize> = (0..class.len())
                                .filter(|&j| cands[j].contains(&(order, synthesis)))
                                .collect();
                            if let (Synthesis::Flip, Some(parts)) = (synthesis, &flip) {
                                let steps: Vec<usize> =
                                    members.iter().map(|&j| ks[j] * spec.steps_per_dt).collect();
                                return Some((members, LaterBlocks::flipped(parts, &steps)));
                            }
                            let progs: Vec<&[Rotation]> =
                                members.iter().map(|&j| program_of(order, ks[j])).collect();
                            let synthesize = |p: &[Rotation]| {
                                let mut out = Vec::new();
                                synthesize_all_to_all(
                                    p,
                                    control,
                                    synthesis,
                                    Some(&networks),
                                    &mut out,
                                );
                                out
                            };
                            // The points repeat one step: its synthesis is shared
                            // (`LaterBlocks::periodic`); else they are grown from the longest.
                            // The first point's program joins the reading when it is shorter,
                            // so head and tail are one step long, not two.
                            let mut steps: Vec<usize> =
                                members.iter().map(|&j| ks[j] * spec.steps_per_dt).collect();
                            let mut read: Vec<&[Rotation]> = progs.clone();
                            let first = first_k.filter(|&k| k * spec.steps_per_dt < steps[0]);
                            if let Some(k) = first {
                                steps.insert(0, k * spec.steps_per_dt);
                                read.insert(0, program_of(order, k));
                            }
                            let form = crate::formula::periodic_form(&steps, &read).map(|mut f| {
                                if first.is_some() {
                                    f.repeats.remove(0);
                                }
                                f
                            });
                            let blocks = stage(Stage::LaterPoints, || match form {
                                Some(form) => LaterBlocks::periodic(&form, &synthesize),
                                None => LaterBlocks::grown(&progs, &synthesize),
                            });
                            Some((members, blocks))
                        })
                        .collect();
                    // One point at a time, and one candidate at a time within it: each
                    // stream is fed from its blocks and settled (`Body::stream`) before the
                    // next is fed, a candidate's blocks are dropped once its last point is fed,
                    // and the point is scored, written and dropped before the next point's
                    // streams are fed. So one unsettled stream is alive at once, beside the
                    // settled bodies of its point, not the streams of the class.
                    for (j, &i) in class.iter().enumerate() {
                        let frames_k = std::mem::take(&mut shared[i]);
                        let longest_readout = longest_suffix(&frames_k);
                        let mut bodies: Vec<Body> = Vec::with_capacity(cands[j].len());
                        for c in &cands[j] {
                            let u = union.iter().position(|x| x == c).expect("in the union");
                            let (members, point_blocks) =
                                blocks[u].as_ref().expect("a candidate with points to feed");
                            let at = members.iter().position(|&m| m == j).expect("a member");
                            let stream = stage(Stage::LaterPoints, || {
                                point_blocks.stream(num_qubits, &prefix, at)
                            });
                            if at + 1 == members.len() {
                                blocks[u] = None;
                            }
                            bodies.push(stage(Stage::Readout, || {
                                Body::stream(stream, num_qubits, longest_readout)
                            }));
                        }
                        done[i] = Some(pick(frames_k, bases[i], &cands[j], bodies)?.finished);
                    }
                }
            }
            let rest: Vec<(usize, Vec<Finished>)> = shared
                .into_par_iter()
                .enumerate()
                .filter(|(_, g)| !g.is_empty())
                .map(|(i, g)| Ok((i, build(g, bases[i], only.as_deref())?.finished)))
                .collect::<Result<Vec<_>, CompileError>>()?;
            for (i, f) in rest {
                done[i] = Some(f);
            }
            let done: Vec<Finished> = done.into_iter().flatten().flatten().collect();
            // The flip is recorded when some circuit kept it.
            let flip =
                flip.filter(|_| done.iter().any(|f| f.flipped))
                    .map(|p| crate::plan::FlipInfo {
                        string: crate::synth::flip::flip_text(&p.q),
                        controlled_terms: p.controlled_terms,
                        order: crate::synth::flip::BlockOrder::Layers,
                        signed: p.signed,
                    });
            let mut plan = stage(Stage::Finish, || finish(h, source, spec, done, None));
            plan.flip = flip;
            Ok(plan)
        }
        Target::Device { device, config } => {
            let mut config = level.route_config(config);
            // On a device the controlled preparation joins set bits through their index
            // neighbours (`family::control::Joins`).
            let all_frames = frames_with(h, spec, crate::family::control::Joins::Neighbours);
            config.campaign_weights = Some((
                all_frames.iter().filter(|f| f.k > 0).count() as f64,
                all_frames
                    .iter()
                    .map(|f| (f.k * spec.steps_per_dt) as f64)
                    .sum(),
            ));
            let config = &config;
            // One step of length dt / R, routed once (while the layout is chosen) and reused by
            // every circuit: time point k runs k·R blocks of it (`route::reuse`).
            let step_dt = spec.dt / spec.steps_per_dt.max(1) as f64;
            // One search from `config`'s seed and the campaign it builds, its texts put to
            // `sink`.
            let attempt = |config: &RouteConfig,
                           sink: &dyn Sink|
             -> Result<(DeviceInfo, Vec<Finished>), CompileError> {
                let searching = Instant::now();
                let (tp, step) = match spec.control {
                    // Plain evolution circuits have no ancilla at all.
                    _ if spec.family == Family::Evolution => {
                        plan_and_route_plain_step(h, device, config, spec.order, step_dt)
                    }
                    Control::Evolution => {
                        plan_and_route_step(h, device, config, spec.order, step_dt)
                    }
                    // The control-free form routes an uncontrolled step; the ancilla meets only the
                    // qubits its controlled state preparation touches, at the start and the end.
                    Control::Prep => {
                        let partners = prep_partners(&checked_states(spec, h.num_qubits));
                        plan_and_route_free_step(h, &partners, device, config, spec.order, step_dt)
                    }
                }?;
                // Level 3 also offers the step with the control spread over copies of the ancilla
                // on spare sites (`route::cat`); it is kept below only if the campaign it emits
                // has a higher estimated success probability (calibrated gate errors) or, without
                // gate errors, fewer two-qubit gates (then a lower depth).
                let cat = (config.cat
                    && spec.control == Control::Evolution
                    && spec.family != Family::Evolution)
                    .then(|| {
                        crate::route::plan_and_route_cat_step(
                            h, device, config, spec.order, step_dt, &tp,
                        )
                    })
                    .flatten();
                clock::add(Stage::Layout, searching);
                let assembling = Instant::now();
                let (info, done) = match cat {
                    None => device_circuits(
                        h,
                        spec,
                        (device, config),
                        (&tp, step),
                        all_frames.clone(),
                        sink,
                    )?,
                    Some((cat_tp, cat_step)) => {
                        // Both campaigns are held until one is kept (the spread control is tried
                        // only below `route::EXTRAS_MAX_UNIT`, so these texts are small).
                        let (plain_texts, spread_texts) = (Collect::default(), Collect::default());
                        let plain = device_circuits(
                            h,
                            spec,
                            (device, config),
                            (&tp, step),
                            all_frames.clone(),
                            &plain_texts,
                        )?;
                        let spread = device_circuits(
                            h,
                            spec,
                            (device, config),
                            (&cat_tp, cat_step),
                            all_frames.clone(),
                            &spread_texts,
                        )?;
                        // Where the calibration gives gate errors, the campaign with the higher
                        // estimated success probability: the spread control trades CNOTs on weak
                        // couplers and a serial ancilla for a few more CNOTs elsewhere, which
                        // counts alone cannot weigh.
                        let spread_pays = campaign_beats(&spread.1, &plain.1);
                        let (kept, texts) = if config.cat_force || spread_pays {
                            (spread, spread_texts)
                        } else {
                            (plain, plain_texts)
                        };
                        put_collected(&kept.1, texts, sink)?;
                        kept
                    }
                };
                clock::add(Stage::DeviceCircuits, assembling);
                Ok((info, done))
            };
            // `RouteConfig::tries` searches from consecutive seeds, each campaign held until
            // the best is known (`campaign_beats`), on steps small enough that the spread
            // control is tried too (`route::EXTRAS_MAX_UNIT`): the layout search is a
            // randomised heuristic whose one-step score does not rank whole campaigns exactly,
            // so restarts find better campaigns (a restart portfolio; common practice for
            // randomised search).
            let program = crate::formula::step(&order_terms(h), spec.order, step_dt);
            let tries = if crate::route::step_unit(&program) <= crate::route::EXTRAS_MAX_UNIT {
                config.tries.max(1)
            } else {
                1
            };
            let (info, done) = if tries == 1 {
                attempt(config, sink)?
            } else {
                let mut best: Option<((DeviceInfo, Vec<Finished>), Collect)> = None;
                for t in 0..tries {
                    let seed = config.seed.wrapping_add(t as u64);
                    let seeded = RouteConfig {
                        seed,
                        ..config.clone()
                    };
                    let texts = Collect::default();
                    let mut got = attempt(&seeded, &texts)?;
                    got.0.search_seed = Some(seed);
                    if best
                        .as_ref()
                        .is_none_or(|(b, _)| campaign_beats(&got.1, &b.1))
                    {
                        best = Some((got, texts));
                    }
                }
                let ((info, done), texts) = best.expect("at least one try");
                put_collected(&done, texts, sink)?;
                (info, done)
            };
            Ok(stage(Stage::Finish, || {
                finish(h, source, spec, done, Some(info))
            }))
        }
    }
}

/// Whether campaign `a` is better than `b`: where the calibration gives every circuit a
/// success estimate below 1, the higher product of estimates (each floored at
/// [`SUCCESS_FLOOR`]); otherwise, or where those tie, fewer two-qubit gates over the
/// campaign, then a lower summed depth.
fn campaign_beats(a: &[Finished], b: &[Finished]) -> bool {
    let total = |d: &[Finished]| -> (usize, usize) {
        d.iter()
            .map(|f| (f.costs.two_qubit, f.costs.depth))
            .fold((0, 0), |a, b| (a.0 + b.0, a.1 + b.1))
    };
    let log_success = |d: &[Finished]| -> Option<f64> {
        let sum = d
            .iter()
            .map(|f| {
                f.costs
                    .success_probability
                    .map(|p| p.max(SUCCESS_FLOOR).ln())
            })
            .sum::<Option<f64>>()?;
        (sum < 0.0).then_some(sum)
    };
    match (log_success(a), log_success(b)) {
        (Some(x), Some(y)) if (x - y).abs() > 1e-12 => x > y,
        _ => total(a) < total(b),
    }
}

/// Puts the texts `texts` collected for the campaign `kept` to `sink`, in plan order.
fn put_collected(kept: &[Finished], texts: Collect, sink: &dyn Sink) -> Result<(), CompileError> {
    let texts = texts.into_texts(kept.len()).ok_or_else(|| {
        CompileError::Output(crate::error::Error::Internal(
            "a circuit's text never reached the sink".into(),
        ))
    })?;
    for (index, (f, text)) in kept.iter().zip(texts).enumerate() {
        sink.put(index, &file_of(&f.id), text)
            .map_err(CompileError::Output)?;
    }
    Ok(())
}

/// The circuits of a device campaign from its routed step (`route::DeviceCampaign`): each
/// frame's preparation and readout routed and stitched around the step's pieces; with control
/// copies (`tp.copies > 0`, `route::cat`) the fan-out follows the ancilla's `h` and its undoing
/// (at the layout where the steps end) precedes the readout, in every circuit with a step.
fn device_circuits(
    h: &PauliSum,
    spec: &Spec,
    (device, config): (&Device, &RouteConfig),
    (tp, step): (&crate::route::TargetPlan, crate::route::RoutedStep),
    all_frames: Vec<crate::family::Frame>,
    sink: &dyn Sink,
) -> Result<(DeviceInfo, Vec<Finished>), CompileError> {
    let n = h.num_qubits;
    if cfg!(debug_assertions) {
        // Pass `plan and route the step`: every piece on coupled pairs (pieces of two
        // and three steps between them hold every distinct piece).
        let coupled = |a: u32, b: u32| device.coupled(a, b);
        let rules = Rules {
            coupled: Some(&coupled),
            native: None,
        };
        for piece in step.pieces(2).into_iter().chain(step.pieces(3)) {
            verify_ir(piece, &rules).map_err(|e| IrError {
                message: format!("after pass `plan and route the step`: {}", e.message),
                ..e
            })?;
        }
    }
    // The plan places the system qubits and the ancilla; the copies it lists apart.
    let placed = tp.initial_layout.len() - tp.copies;
    // A sign-flip step's string and how many leading terms it leaves controlled.
    let flip = tp
        .step_form
        .flip
        .then(|| crate::route::reuse::flip_split_of(&tp.terms(h), tp, Some(device)))
        .flatten();
    let info = DeviceInfo {
        name: device.name.clone(),
        num_qubits: device.num_qubits,
        native: device.native.names.clone(),
        initial_layout: tp.initial_layout[..placed].to_vec(),
        copy_placement: tp.initial_layout[placed..].to_vec(),
        spare_qubits: tp.spread,
        flip_string: flip.as_ref().map(|(_, q)| crate::synth::flip::flip_text(q)),
        flip_controlled_terms: flip.as_ref().map_or(0, |&(k, _)| k),
        flip_signed: flip.is_some() && tp.step_form.flip_signed,
        flip_order: if tp.step_form.flip {
            tp.step_form.flip_order
        } else {
            Default::default()
        },
        search_seed: None,
    };
    let states = checked_states(spec, h.num_qubits);
    // The control-free form's controlled preparations, rebuilt as fan-out trees on
    // the layouts they meet (`family::control::fanout_prep`), when that is cheaper.
    let preps = (spec.control == Control::Prep && spec.family != Family::Evolution)
        .then(|| FanOuts::new(&states, h.num_qubits, &step, device));
    let all_frames = match &preps {
        Some(p) => frames_by(h, spec, &|state: &RefState, at: PrepAt| p.get(state, at)),
        None => all_frames,
    };
    // What the plan records of them: the CNOTs, when they are not the chain the
    // plan's form implies (`tableau::equiv` rebuilds the claim from them).
    let fanout_of = |state: &RefState, k: usize| -> Option<FanOut> {
        let p = preps.as_ref()?;
        let chain = crate::family::control::controlled_prep(
            state,
            h.num_qubits as crate::circuit::Qubit,
            crate::family::control::Joins::Neighbours,
        );
        let before = p.get(state, PrepAt::Start);
        let after = p.get(
            state,
            PrepAt::End {
                steps: k * spec.steps_per_dt.max(1),
            },
        );
        if before == chain && after == chain {
            return None;
        }
        FanOut::of(&before, &after)
    };
    let copies = tp.copies;
    // The cat's fan-out and its undoing where the steps end, after core 0 or core 1 (logical
    // qubits: copies follow the ancilla); neither needs a SWAP while the copies stand on a
    // connected set of sites.
    let (fan_in, unfans) = if copies > 0 {
        (
            crate::route::cat::fanout(&step.start, n, device),
            [0, 1].map(|b| crate::route::cat::unfan(&step.ends[b], n, device)),
        )
    } else {
        (Vec::new(), [Vec::new(), Vec::new()])
    };
    let cat_ends = |steps: usize, last_core: usize| -> (Vec<Gate>, Vec<Gate>) {
        if copies == 0 || steps == 0 {
            return (Vec::new(), Vec::new());
        }
        (fan_in.clone(), unfans[last_core].clone())
    };
    let campaign = DeviceCampaign::new(step, tp, device, config)?;
    let done = all_frames
        .into_par_iter()
        .enumerate()
        .map(|(index, f)| {
            let comments = header_comments(&f.id, f.part, f.k, f.time, Some(&info));
            let steps = f.k * spec.steps_per_dt;
            let (fan, unfan) = cat_ends(steps, campaign.core_index(steps.saturating_sub(1)));
            let mut prefix = f.prefix;
            prefix.extend(fan);
            let suffix: Vec<Gate> = unfan.into_iter().chain(f.suffix).collect();
            let e = campaign.emit(&prefix, steps, &suffix, f.num_clbits, &comments)?;
            let mut costs = e.costs;
            if steps > 0 {
                costs.control_copies = copies + tp.temporary_copies;
            }
            let mut final_layout = e.final_layout;
            final_layout.truncate(placed);
            sink.put(index, &file_of(&f.id), e.text)
                .map_err(CompileError::Output)?;
            Ok(Finished {
                fanout: fanout_of(&states[f.state], f.k),
                id: f.id,
                k: f.k,
                time: f.time,
                part: f.part,
                state: f.state,
                group: f.group,
                reads: f.reads,
                num_qubits: device.num_qubits,
                num_clbits: f.num_clbits,
                costs,
                final_layout,
                flipped: false,
            })
        })
        .collect::<Result<Vec<_>, CompileError>>()?;
    Ok((info, done))
}

/// The controlled preparations of a control-free campaign on a device, per state and per
/// layout a preparation meets (the step's start, and its end after the first or the second
/// core, [`crate::route::RoutedStep::layout_after`]): a fan-out tree on the coupled pairs of
/// that layout (`family::control::fanout_prep`) when it emits fewer CNOTs than the
/// index-neighbour chain, or the chain is not on coupled pairs (it would need SWAPs); the
/// chain otherwise.
struct FanOuts {
    /// `(state, layout index) → W`; layout 0 is the start, 1 + b the end after core b.
    preps: std::collections::BTreeMap<(RefState, usize), Vec<Gate>>,
    step_formula: crate::route::reuse::Formula,
}

impl FanOuts {
    fn new(
        states: &[RefState],
        n: usize,
        step: &crate::route::RoutedStep,
        device: &Device,
    ) -> FanOuts {
        use crate::family::control::{controlled_prep, fanout_prep, Joins};
        let anc = n as crate::circuit::Qubit;
        let layouts = [&step.start, &step.ends[0], &step.ends[1]];
        let mut preps = std::collections::BTreeMap::new();
        for state in states {
            for (i, layout) in layouts.iter().enumerate() {
                let chain = controlled_prep(state, anc, Joins::Neighbours);
                let w = if layout.len() == n + 1 {
                    let adjacent = |a: crate::circuit::Qubit, b: crate::circuit::Qubit| {
                        device.coupled(layout[a as usize], layout[b as usize])
                    };
                    let two = |g: &[Gate]| g.iter().filter(|g| g.is_two_qubit()).count();
                    let chain_coupled = chain.iter().all(|g| match *g {
                        Gate::Cx(a, b) => adjacent(a, b),
                        _ => true,
                    });
                    match fanout_prep(state, anc, &adjacent) {
                        Some(tree) if !chain_coupled || two(&tree) < two(&chain) => tree,
                        _ => chain,
                    }
                } else {
                    chain
                };
                preps.insert((state.clone(), i), w);
            }
        }
        FanOuts {
            preps,
            step_formula: step.formula,
        }
    }

    fn get(&self, state: &RefState, at: PrepAt) -> Vec<Gate> {
        let i = match at {
            PrepAt::Start | PrepAt::End { steps: 0 } => 0,
            // `RoutedStep::core_index(steps − 1)`.
            PrepAt::End { steps } => {
                let last = steps - 1;
                let mirrored = self.step_formula == crate::route::reuse::Formula::Symmetric;
                1 + usize::from(last != 0 && !(mirrored && last.is_multiple_of(2)))
            }
        };
        self.preps[&(state.clone(), i)].clone()
    }
}

/// The spec's states as [`RefState`]s; [`compile_into`] has refused a spec whose states do not
/// check before any caller of this runs.
fn checked_states(spec: &Spec, n: usize) -> Vec<RefState> {
    spec.ref_states(n)
        .expect("compile_into checks the states first")
}

/// The system qubits the ancilla meets in the controlled state preparation of any of `states`
/// (`family::control::ancilla_partners`), ascending.
fn prep_partners(states: &[RefState]) -> Vec<usize> {
    let mut touched: Vec<usize> = states
        .iter()
        .flat_map(|s| {
            crate::family::control::ancilla_partners(s, s.num_qubits() as crate::circuit::Qubit)
        })
        .collect();
    touched.sort_unstable();
    touched.dedup();
    touched
}

fn finish(
    h: &PauliSum,
    source: &str,
    spec: &Spec,
    done: Vec<Finished>,
    device: Option<DeviceInfo>,
) -> Plan {
    let mut entries = Vec::with_capacity(done.len());
    for f in done {
        entries.push(CircuitEntry {
            file: file_of(&f.id),
            id: f.id,
            k: f.k,
            time: f.time,
            part: f.part,
            state: f.state,
            group: f.group,
            num_qubits: f.num_qubits,
            num_clbits: f.num_clbits,
            ancilla_bit: f.part.map(|_| 0),
            reads: f.reads,
            costs: f.costs,
            final_layout: f.final_layout,
            sha256: None,
            shots: None,
            fanout: f.fanout,
            flipped: f.flipped,
        });
    }
    Plan {
        format: PLAN_FORMAT.to_string(),
        family: spec.family,
        hamiltonian: hamiltonian_info(h, source),
        formula: FormulaInfo {
            order: spec.order.number(),
            steps_per_dt: spec.steps_per_dt,
            dt: spec.dt,
        },
        states: spec.states.clone(),
        seed: None,
        energy_unit: None,
        coefficient_cutoff: None,
        points: spec.points,
        control: spec.control,
        device,
        flip: None,
        shard: None,
        circuits: entries,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::formula::Order;
    use crate::pauli::PauliString;
    use proptest::prelude::*;

    #[test]
    fn flipped_later_points_stream_the_steps_of_the_flip() {
        // An XXZ chain of 6 sites: its ZZ group stays controlled and its hopping flips
        // (`synth::flip::flip_split`), so the flipped steps have edges that merge at seams.
        let mut h = PauliSum::new(6);
        for q in 0..5 {
            for (p, c) in [("X", 1.0), ("Y", 1.0), ("Z", 0.6)] {
                let text = format!("{p}{q} {p}{}", q + 1);
                h.add(PauliString::parse_factor_text(&text).unwrap(), c);
            }
        }
        let groups = crate::formula::term_groups(&h);
        let sizes: Vec<usize> = groups.iter().map(Vec::len).collect();
        let terms = groups.concat();
        let spec = Spec {
            family: Family::Overlap,
            order: Order::Second,
            dt: 0.3,
            points: 4,
            steps_per_dt: 2,
            states: vec!["010101".into()],
            control: Control::Evolution,
        };
        // The split's flip, and the form the all-to-all target keeps: the signed step, whose
        // 5 ZZ bonds commute with `Q` and ride on the control's sign, alternating with its
        // mirror image.
        let split = crate::synth::flip::flipped_step_parts(
            &terms,
            &sizes,
            Order::Second,
            0.15,
            crate::synth::flip::BlockOrder::Layers.into(),
            6,
            &crate::synth::default_ladder,
            None,
            crate::synth::flip::Choice::Search,
            None,
        )
        .expect("the hopping flips");
        assert_eq!(split.controlled_terms, 5);
        assert!(!split.merged.is_empty() && !split.signed);
        let kept = all_to_all_flip(&terms, &sizes, &spec, 6).expect("a symmetric step signs");
        assert!(kept.signed && !kept.mirrored.is_empty());
        assert_eq!(kept.controlled_terms, 5);
        let steps = [2, 4, 6, 1, 3];
        let prefix = [Gate::H(6), Gate::X(1)];
        let formula = Formula::new(&terms);
        for parts in [&split, &kept] {
            check_flipped_stream(parts, &steps, &prefix, &formula);
        }
    }

    /// [`LaterBlocks::flipped`] streams exactly the peephole of `prefix` and
    /// `parts.steps_into(r)`, and that is the prefix then the controlled product formula of
    /// `r` Strang steps of 0.15 over `formula`'s terms on 6 qubits (control 6), to 1e-9.
    fn check_flipped_stream(
        parts: &crate::synth::flip::FlippedParts,
        steps: &[usize],
        prefix: &[Gate],
        formula: &Formula,
    ) {
        let blocks = LaterBlocks::flipped(parts, steps);
        for (j, &r) in steps.iter().enumerate() {
            // The stream of point j is the peephole fed the prefix and r flipped steps.
            let mut gates = prefix.to_vec();
            parts.steps_into(r, &mut gates);
            let mut direct = Peephole::new(7, gates.len());
            for &g in &gates {
                direct.push(g);
            }
            let streamed: Vec<Gate> = blocks.stream(7, prefix, j).gates().collect();
            assert_eq!(streamed, direct.gates().collect::<Vec<_>>());
            // And it is the prefix then the controlled product formula of r steps.
            let mut want = Circuit::new(7, 0);
            want.extend(prefix.iter().copied());
            for rot in formula.evolution_by_step(Order::Second, 0.15, r) {
                let ladder = crate::synth::default_ladder(&rot);
                want.extend(crate::synth::pauli_rotation_along(&rot, Some(6), &ladder));
            }
            let mut got = Circuit::new(7, 0);
            got.gates = streamed;
            let d = crate::sim::unitary_distance(&want, &got);
            assert!(d < 1e-9, "{r} steps: {d:e}");
        }
    }

    /// `prefix` then `program` through `synthesis`, cancelled: a body built the direct way.
    fn direct(
        n: usize,
        prefix: &[Gate],
        program: &[Rotation],
        control: Option<crate::circuit::Qubit>,
        synthesis: Synthesis,
    ) -> Vec<Gate> {
        let mut gates = prefix.to_vec();
        synthesize_all_to_all(program, control, synthesis, None, &mut gates);
        let mut c = Circuit::new(n, 0);
        c.gates = gates;
        crate::circuit::cancel::cancel_inverses(&mut c);
        c.gates
    }

    /// A random dense sum on 5 qubits from `(x mask, z mask, coefficient)` draws (identity
    /// strings dropped).
    fn sum_on_five(raw: &[(u64, u64, f64)]) -> PauliSum {
        let mut h = PauliSum::new(5);
        for &(x, z, c) in raw {
            let p = PauliString::from_masks(x & 31, z & 31);
            if !p.is_identity() {
                h.add(p, c);
            }
        }
        h
    }

    /// The prediction's parts cover what a compile makes: its longest circuit's gates and text
    /// (read back from `Compiled::programs`) stay under `gates` and `largest_text`, the peak
    /// covers that text twice over (one held while the circuits that copy its body are
    /// written, one being written), and it counts the circuits the campaign emits (two per
    /// point past k = 0 for one reference state). On a device the SWAPs come on top: a bigger
    /// prediction for the same sum.
    #[test]
    fn predicted_memory_covers_the_texts_held() {
        let h = sum_on_five(&[
            (0b00011, 0b00100, 0.5),
            (0b10100, 0b01001, -0.3),
            (0, 31, 0.7),
        ]);
        for order in [Order::First, Order::Second, Order::Fourth] {
            let spec = Spec {
                control: Control::Evolution,
                family: Family::Overlap,
                order,
                dt: 0.2,
                points: 4,
                steps_per_dt: 2,
                states: vec!["0+0+0".to_string()],
            };
            let predicted = predicted_memory(&h, &spec, None);
            let compiled = compile(&h, "five.ham", &spec).unwrap();
            assert_eq!(predicted.circuits, compiled.programs.len());
            let longest = compiled.programs.iter().map(String::len).max().unwrap();
            assert!(
                predicted.largest_text >= longest as u128,
                "{order:?}: {predicted:?} < {longest}"
            );
            assert!(predicted.bytes >= 2 * longest as u128, "{order:?}");
            let most_gates = compiled
                .circuits()
                .iter()
                .map(|c| c.gates.len())
                .max()
                .unwrap();
            assert!(
                predicted.gates >= most_gates as u128,
                "{order:?}: {predicted:?} < {most_gates} gates"
            );
            // A 5-qubit line: the mean hop distance is 2 (20 ordered pairs, 40 hops in all);
            // every pair coupled: 1, no SWAP, only the lowering doubles the gates.
            let line = Device::new(
                "line5",
                5,
                &[(0, 1), (1, 2), (2, 3), (3, 4)],
                crate::device::NativeSet::rz_sx_x_cx(),
                Default::default(),
            );
            assert_eq!(mean_distance(&line), 2.0);
            // Hops from each term's lowest qubit, less one each, counted by hand on the line:
            // {0,1,2}: 0 + 1; {0,2,3,4}: 1 + 2 + 3; {0,…,4}: 0 + 1 + 2 + 3.
            assert_eq!(term_hops(&h, &line), 13.0);
            let full = Device::all_to_all(5);
            assert_eq!(mean_distance(&full), 1.0);
            let on_full = predicted_memory(&h, &spec, Some(&full));
            assert_eq!(on_full.gates, 2 * predicted.gates, "{order:?}");
            let on_line = predicted_memory(&h, &spec, Some(&line));
            assert!(on_line.gates > on_full.gates, "{order:?}");
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig { cases: 48, .. ProptestConfig::default() })]

        /// The later points of a campaign from one synthesis of the repeated step
        /// (`LaterBlocks::periodic`): the same unitary as each point built alone, to 1e-9, and the
        /// text written from the shared body is byte for byte the writer's text of the whole
        /// circuit.
        #[test]
        fn periodic_points_equal_points_built_alone(
            raw in proptest::collection::vec((any::<u64>(), any::<u64>(), -1.0f64..1.0), 1..12),
            order in prop_oneof![Just(Order::First), Just(Order::Second), Just(Order::Fourth)],
            steps in 1usize..3,
            ctl in any::<bool>(),
        ) {
            let n = 5;
            let h = sum_on_five(&raw);
            prop_assume!(!h.terms.is_empty());
            let formula_terms = order_terms(&h);
            let formula = Formula::new(&formula_terms);
            let ks = [2usize, 3, 5];
            let programs: Vec<Vec<Rotation>> = ks
                .iter()
                .map(|&k| formula.evolution_by_step(order, 0.3, k * steps))
                .collect();
            let refs: Vec<&[Rotation]> = programs.iter().map(Vec::as_slice).collect();
            let counts: Vec<usize> = ks.iter().map(|&k| k * steps).collect();
            // Sums with a string that commutes with every other have no reading (its angle
            // grows with the steps; `formula::periodic_form`): the campaign grows them instead.
            let Some(form) = crate::formula::periodic_form(&counts, &refs) else {
                let terms = &formula_terms;
                prop_assert!(terms.iter().any(|(p, _)| terms.iter().all(|(q, _)| p.commutes_with(q))));
                return Ok(());
            };
            let control = ctl.then_some(n as crate::circuit::Qubit);
            let width = n + 1;
            let prefix = [Gate::H(n as u32), Gate::X(2), Gate::H(1)];
            for synthesis in [Synthesis::Chain, Synthesis::Groups] {
                let synthesize = |p: &[Rotation]| {
                    let mut out = Vec::new();
                    synthesize_all_to_all(p, control, synthesis, None, &mut out);
                    out
                };
                let blocks = LaterBlocks::periodic(&form, &synthesize);
                prop_assert_eq!(blocks.recipes.len(), programs.len());
                for (j, program) in programs.iter().enumerate() {
                    let stream = blocks.stream(width, &prefix, j);
                    let body = Body::stream(stream.clone(), width, 2);
                    // A measurement alone only appends (the body's text is shared); an `h`
                    // first may cancel the body's last gate (the whole circuit is written).
                    let comments = ["a".to_string()];
                    for readout in [
                        vec![Gate::Measure(n as u32, 0)],
                        vec![Gate::H(n as u32), Gate::Measure(n as u32, 0)],
                    ] {
                        let (text, body_at) = body
                            .text_with_readout((width, 1), &readout, &comments, None)
                            .unwrap();
                        let mut whole = Circuit::new(width, 1);
                        whole.gates = body.with_readout(&readout);
                        let want = crate::qasm::write(&whole, Addressing::Logical, &comments);
                        prop_assert_eq!(&text, &want);
                        prop_assert!(readout.len() > 1 || body_at.is_some());
                        // A later circuit given the body's text back writes the same bytes.
                        if let Some(at) = body_at {
                            let written = &text.as_bytes()[at];
                            let (again, _) = body
                                .text_with_readout((width, 1), &readout, &comments, Some(written))
                                .unwrap();
                            prop_assert_eq!(&again, &want);
                        }
                    }
                    let alone = direct(width, &prefix, program, control, synthesis);
                    let (mut a, mut b) = (Circuit::new(width, 0), Circuit::new(width, 0));
                    a.gates = stream.finish();
                    b.gates = alone;
                    crate::circuit::verify::verify_ir(&a, &Rules::default()).unwrap();
                    prop_assert!(crate::sim::unitary_distance(&a, &b) < 1e-9);
                }
            }
        }

        // Time points 1–4 of random dense sums on 5 qubits, every order, grown from one pass
        // over the longest program: with ladders the very gates of building each point on its
        // own (the cut falls between commuting runs and a ladder depends on its rotation
        // alone); with `synth::Groups` (which carries its frame on a block this narrow, so
        // a cut changes its gates) the same unitary to 1e-9, simulated.
        #[test]
        fn grown_points_equal_points_built_alone(
            raw in proptest::collection::vec((any::<u64>(), any::<u64>(), -1.0f64..1.0), 1..12),
            order in prop_oneof![Just(Order::First), Just(Order::Second), Just(Order::Fourth)],
            steps in 1usize..3,
            ctl in any::<bool>(),
        ) {
            let n = 5;
            let h = sum_on_five(&raw);
            prop_assume!(!h.terms.is_empty());
            let formula_terms = order_terms(&h);
            let formula = Formula::new(&formula_terms);
            let programs: Vec<Vec<Rotation>> =
                (1..=4).map(|k| formula.evolution(order, 0.3 * k as f64, k * steps)).collect();
            let refs: Vec<&[Rotation]> = programs.iter().map(Vec::as_slice).collect();
            let control = ctl.then_some(n as crate::circuit::Qubit);
            let width = n + 1;
            let prefix = [Gate::H(n as u32), Gate::X(2), Gate::H(1)];
            for synthesis in [Synthesis::Chain, Synthesis::Groups] {
                let synthesize = |p: &[Rotation]| {
                    let mut out = Vec::new();
                    synthesize_all_to_all(p, control, synthesis, None, &mut out);
                    out
                };
                let grown = LaterBlocks::grown(&refs, &synthesize);
                prop_assert_eq!(grown.recipes.len(), programs.len());
                for (j, program) in programs.iter().enumerate() {
                    let stream = grown.stream(width, &prefix, j);
                    // The body's counts, carried over the readout, are those of the whole
                    // circuit: a readout that only appends, and one whose first gate undoes
                    // the body's last (so the overlay changes the body).
                    let body = Body::stream(stream.clone(), width, 2);
                    let last = stream.gates().last().expect("a gate");
                    let undo = last.inverse().unwrap_or(last);
                    for readout in [vec![Gate::H(n as u32)], vec![undo, Gate::H(0)]] {
                        prop_assert_eq!(
                            body.counts_with_readout(width, &readout),
                            counts_of(width, body.with_readout(&readout))
                        );
                    }
                    let alone = direct(width, &prefix, program, control, synthesis);
                    let got = stream.finish();
                    if synthesis == Synthesis::Chain {
                        prop_assert_eq!(&got, &alone);
                    }
                    let (mut a, mut b) = (Circuit::new(width, 0), Circuit::new(width, 0));
                    a.gates = got;
                    b.gates = alone;
                    crate::circuit::verify::verify_ir(&a, &Rules::default()).unwrap();
                    prop_assert!(crate::sim::unitary_distance(&a, &b) < 1e-9);
                }
            }
        }
    }
}
