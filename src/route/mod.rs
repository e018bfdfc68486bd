//! Routing: from logical circuits to circuits a device can run.
//!
//! In: a Pauli sum (for planning), logical circuits (system qubits `0..n`, the Hadamard-test
//! ancilla `n` if any) and a [`Device`]. Out: [`Routed`] circuits on physical qubits with native
//! gates only, every two-qubit gate on a coupled pair (a [`DeviceCircuit`], which only that
//! check makes), plus the initial and final layouts; for a campaign, each circuit's OpenQASM 3
//! text directly ([`campaign`]). Circuits between routing and lowering (SWAPs inserted, any IR
//! gate) stay plain [`Circuit`]s.
//!
//! The layout and the CNOT ladders must be chosen before synthesis:
//!
//! 1. [`plan_and_route_step`] (once per campaign; [`plan_target`] is the same scored on one
//!    Strang step of length 1) picks the initial layout and, with it, how each rotation's
//!    ladder runs ([`TargetPlan::ladder`]): the root is the support qubit nearest the ancilla,
//!    so the controlled `rz` meets the ancilla without SWAPs where the layout allows, and the
//!    rest of the ladder follows nearest neighbours back from the root. Layout candidates
//!    (greedy around the centre, seeded random, each annealed; see [`layout`]) are scored by
//!    routing one Trotter step of the campaign, refined by bidirectional passes (route forward,
//!    route the reversed circuit from the final layout, start again from where it ends), with
//!    and without a preference for moving the ancilla (see [`swap`]), and, with an ancilla,
//!    with the terms in the device-aware order of [`order`] (each commuting group swept so the
//!    ancilla walks a short path, ladders rooted where the walk meets each term, or nearest the
//!    ancilla's initial site) or in the default order; the one with the fewest SWAPs wins, and
//!    its routing of the step is kept. All circuits of a campaign share that initial layout,
//!    which plan.json records once, and follow [`TargetPlan::terms`], which computes exactly
//!    what `formula::order_terms` would (a permutation inside commuting groups).
//!    With the extras of `--opt 3` (`RouteConfig::sweep`, `embed`; on steps whose first
//!    routing stays under [`EXTRAS_MAX_UNIT`]) the candidates also include exact embeddings of
//!    the interaction graph ([`embed`]) and the step in the order of [`sweep`] (any order the
//!    non-commuting pairs allow, the ancilla crossing the chip once), routed both by the
//!    lookahead router and in order with the ancilla as hub ([`hub`]); candidates are scored by
//!    the two-qubit gates of the lowered step (`RouteConfig::score_two_qubit`; each weighed
//!    by `ln(1 − e)` of its coupler when the calibration tells couplers apart, so the search
//!    minimises what the success estimate penalises: [`emitted_score`]), and the best
//!    swept and the best split step are finally compared on the whole campaign
//!    ([`plan_and_route_step`]). At level 3 the commuting runs are also synthesised on the
//!    coupling graph itself (`synth::Coupled`, [`StepForm::coupled`]): every network CNOT on a
//!    coupled pair of the candidate layout and each string carried next to the ancilla, so
//!    the step routes without a SWAP (scored past [`EXTRAS_MAX_UNIT`] too, on every layout
//!    and order of the search, since such a routing is a linear pass), or, roaming
//!    ([`StepForm::roam`], below [`EXTRAS_MAX_UNIT`] only), each string rotated where its
//!    network ends and the ancilla routed to it.
//!    With `RouteConfig::cat` (level 3) [`plan_and_route_cat_step`] also routes the step with
//!    the control spread over copies of the ancilla on spare sites ([`cat`]): layouts grown
//!    from the winner's, the runner-up's and exact embeddings, copies added where they pay, the step
//!    routed with each controlled `rz` on the copy nearest its root (the controls moved
//!    one at a time or together as a front, [`cat::Policy`]), or written by the
//!    coupled networks with every copy as a control (`synth::Coupled::copies`, also on copies
//!    grown to stand beside the most system qubits, [`cat::covering_copies`]); the pipeline
//!    keeps it only when the campaign it emits is cheaper. Where one Pauli string anticommutes with every
//!    term of a symmetric formula (level 3, below [`EXTRAS_MAX_UNIT`]), the step is also
//!    written by a sign flip ([`StepForm::flip`], `synth::flip`): every rotation uncontrolled,
//!    the ancilla controlling that string twice per step, scored like the other forms.
//! 2. The kept step is reused by every circuit ([`reuse`]: alternating with its mirror image
//!    for symmetric formulas, with the SWAPs home for Lie–Trotter), and [`campaign`] lowers it
//!    once and assembles each circuit from it, its own state preparation and its readout.
//!    [`to_device`] routes and lowers any single logical circuit from scratch (tests,
//!    benchmarks).
//!
//! **Scale.** The search above routes the step up to `trials × 2 × 3 × (2·rounds + 1)` times
//! (240 with the defaults). It is held to [`PLAN_BUDGET`] units of routing work (two-qubit
//! gates plus SWAPs per routing, measured on the first routing; about 1 µs per unit on the
//! 2-core benchmark machine, so a few seconds): when the full search would exceed it, it steps
//! down through `SEARCH_LEVELS` (fewer candidates, one refinement round, one ancilla factor,
//! then a single annealed greedy layout). Deterministic: the level depends only on the inputs.
//! On a 100-qubit, 1,000-term step on 127 qubits that means 48 routings instead of 240; at
//! 10⁴ terms and more, one. The level-3 forms repeat the search at the level chosen, outside
//! that budget. A candidate with its refinement rounds is a *chain*, independent of the others:
//! the chains of the main search, and then those of each form, run in parallel (rayon), and
//! their scores are taken in the order a sequential search meets them, ties kept by the
//! earlier one. Only the scores and the recipes are kept; the winners are built again at the
//! end, which is exact because a candidate is a function of its recipe. So the result does not
//! depend on the thread count, and memory holds one candidate per thread. On 2 cores a
//! 100-qubit, 300-term, 3-point campaign on the 127-qubit heavy hexagon took 54 s of wall
//! time before and 31 s after, with the same bytes.
//!
//! Invariant: `Routed::circuit` applied to a logical state placed by `initial_layout` equals the
//! logical circuit's result placed by `final_layout`, global phase included ([`check`] verifies
//! this by simulation); measured bits read the physical qubit that holds the measured qubit.

pub mod campaign;
pub mod cat;
pub mod check;
pub mod device_circuit;
pub mod embed;
pub mod error;
pub mod hub;
pub mod layout;
pub mod order;
pub mod reuse;
pub mod swap;
pub mod sweep;

use crate::circuit::verify::{verify_ir, IrError, Rules};
use crate::circuit::{Circuit, Qubit};
use crate::device::{Device, UNREACHABLE};
use crate::formula::{order_terms, term_groups, Order, Rotation};
use crate::lower::lower_for_output;
use crate::pauli::{PauliString, PauliSum};
use crate::synth::default_ladder;
use crate::synth::flip::BlockOrder;
pub use campaign::{DeviceCampaign, Emitted};
pub use check::{compact, routing_error};
pub use device_circuit::DeviceCircuit;
pub use error::RouteError;
pub use order::{device_order, order_for_device, DeviceOrder};
pub use reuse::RoutedStep;
// (StepForm is defined here)
use rayon::prelude::*;
use swap::{insert_swaps, reversed, SwapParams};

/// The Hadamard-test ancilla of a routing problem, as the public routing functions take it.
///
/// `Controls`: the logical circuit has one more qubit after the system qubits (`n`, last), the
/// ancilla, and it controls the step's rotations (the usual Hadamard test). `None`: no qubit
/// controls the step; where a function is also told the qubit count (`greedy_layout`), an
/// ancilla that is placed without controlling the step is an ordinary qubit there.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Ancilla {
    /// No ancilla controls the step.
    None,
    /// The ancilla (the last logical qubit) controls the step's rotations.
    Controls,
}

impl Ancilla {
    /// `Controls` when `controls` (the private search keeps the flag; the public API does not).
    pub(crate) fn when(controls: bool) -> Ancilla {
        if controls {
            Ancilla::Controls
        } else {
            Ancilla::None
        }
    }

    /// Whether the ancilla controls the step.
    pub fn controls(self) -> bool {
        self == Ancilla::Controls
    }
}

/// Knobs of layout search and SWAP insertion. Same config and inputs, same output.
///
/// The `bool` fields (`cancel`, `sweep`, `embed`, `pairs`, `cat`, …) stay `bool`s rather than
/// two-way enums because each is an independent on/off switch of one pass or candidate, and
/// the `--opt` level (`pipeline::OptLevel`) picks which are on.
#[derive(Clone, Debug)]
pub struct RouteConfig {
    pub seed: u64,
    /// Layout candidates: one greedy, the rest seeded random, each annealed.
    pub layout_trials: usize,
    /// Bidirectional refinement rounds per candidate.
    pub refine_rounds: usize,
    /// Also refine the layout per circuit in [`to_device`] (then circuits may start from
    /// different layouts; off by default; campaigns, which reuse one routed step, ignore it).
    pub refine_per_circuit: bool,
    /// Lookahead window: number of upcoming two-qubit gates scored beside the front.
    pub extended_size: usize,
    /// Weight of the window relative to the front.
    pub extended_weight: f64,
    /// Decay added to both qubits of each chosen SWAP.
    pub decay_step: f64,
    /// SWAPs after which decay is reset.
    pub decay_reset: usize,
    /// Reorder the terms inside each commuting group so the ancilla walks a short path, and
    /// root each ladder where the walk meets it ([`order`]); off: the default order and roots.
    pub device_order: bool,
    /// Steps of at least this many gates are lowered once and stitched at the junctions
    /// ([`campaign`]); smaller ones are lowered whole per circuit.
    pub stitch_min_gates: usize,
    /// Gates at each end of a lowered block that are lowered again with their neighbour.
    pub stitch_window: usize,
    /// Try both ancilla SWAP factors (`ANCILLA_SWAP_FACTORS`); off: neutral only.
    pub hub_factors: bool,
    /// Peephole cancellation of each synthesised step (off at `--opt 0`).
    pub cancel: bool,
    /// The step is the unmerged textbook expansion (`formula::textbook_evolution`, `--opt 0`).
    pub textbook: bool,
    /// Also score the sweep schedule of [`sweep`] (any order the non-commuting pairs allow).
    pub sweep: bool,
    /// Also score exact embeddings of the interaction graph ([`embed`]) as layouts.
    pub embed: bool,
    /// Also score steps whose hopping pairs are synthesised together (`synth::Pairs`), and
    /// steps whose commuting runs are synthesised as one network each (`synth::Groups`).
    pub pairs: bool,
    /// Also offer a step whose control is spread over copies of the ancilla on spare sites
    /// ([`cat`], [`plan_and_route_cat_step`]).
    pub cat: bool,
    /// Also offer the signed step (`synth::flip::Choice::Signed`, [`StepForm::flip_signed`])
    /// beside the other forms; off: only the split's flip, where one exists (tests of the
    /// forms it outscores).
    pub signed: bool,
    /// Also offer each sign-flip form with its second controlled string's parity tree
    /// gathered where the routed first half leaves the qubits ([`StepForm::flip_track`]);
    /// off: trees under the initial layout only (tests of what tracking adds).
    pub track: bool,
    /// Tests: give the cat candidate at least one copy and keep it wherever one exists, even
    /// when it costs more (off everywhere else).
    pub cat_force: bool,
    /// Score candidates by the two-qubit gates of the routed step once lowered (what is
    /// emitted, weighed by coupler error where the calibration tells couplers apart:
    /// [`emitted_score`]) rather than by SWAPs.
    pub score_two_qubit: bool,
    /// Route each candidate step a second time with commuting gates running ahead of a
    /// blocked front (`SwapParams::commute_ahead`) and keep the routing with fewer SWAPs.
    pub commute_ahead: bool,
    /// The campaign's circuits and their total number of Trotter steps, if known: the best
    /// swept and the best split step are then compared on the whole campaign
    /// ([`plan_and_route_step`]); `None`: on one step.
    pub campaign_weights: Option<(f64, f64)>,
    /// Layout searches the pipeline runs from consecutive seeds (`seed`, `seed + 1`, …),
    /// keeping the campaign that scores best (`compile --tries`); 1: one search.
    pub tries: usize,
}

impl Default for RouteConfig {
    /// Window 20, weight 0.5, decay 0.001 reset every 5 SWAPs: the values of Li, Ding & Xie
    /// (ASPLOS 2019); 8 layout trials and 2 refinement rounds are our choice.
    fn default() -> RouteConfig {
        RouteConfig {
            seed: 0,
            layout_trials: 8,
            refine_rounds: 2,
            refine_per_circuit: false,
            extended_size: 20,
            extended_weight: 0.5,
            decay_step: 0.001,
            decay_reset: 5,
            device_order: true,
            stitch_min_gates: campaign::STITCH_MIN_GATES,
            stitch_window: campaign::STITCH_WINDOW,
            hub_factors: true,
            cancel: true,
            textbook: false,
            sweep: true,
            embed: true,
            pairs: true,
            cat: true,
            signed: true,
            track: true,
            cat_force: false,
            score_two_qubit: true,
            commute_ahead: true,
            campaign_weights: None,
            tries: 1,
        }
    }
}

impl RouteConfig {
    /// The campaign's Trotter steps per circuit with a step, on average (`campaign_weights`;
    /// 1 when unknown or below): how many times a circuit repeats the step the search scores.
    pub fn steps_per_circuit(&self) -> f64 {
        match self.campaign_weights {
            Some((circuits, steps)) if circuits > 0.0 => (steps / circuits).max(1.0),
            _ => 1.0,
        }
    }

    fn swap_params(&self) -> SwapParams {
        SwapParams {
            extended_size: self.extended_size,
            extended_weight: self.extended_weight,
            decay_step: self.decay_step,
            decay_reset: self.decay_reset,
            seed: self.seed,
            stall_limit: None,
            hub: None,
            hub_factor: 1.0,
            commute_ahead: 0,
        }
    }
}

/// Decided before synthesis: where each logical qubit starts and how each ladder runs.
#[derive(Clone, Debug)]
pub struct TargetPlan {
    /// `initial_layout[l]` = physical qubit of logical qubit `l` (the ancilla is the last `l`).
    pub initial_layout: Vec<u32>,
    pub num_system: usize,
    /// Logical index of the Hadamard-test ancilla, if any.
    pub ancilla: Option<u32>,
    /// Score factor for SWAPs that move the ancilla (below 1 prefers moving the ancilla to the
    /// terms over moving the terms to the ancilla); chosen by [`plan_target`].
    pub ancilla_swap_factor: f64,
    /// The router's run-ahead window for commuting gates (`SwapParams::commute_ahead`): 0, or
    /// [`swap::COMMUTE_AHEAD`] when the search found the step routes with fewer SWAPs so.
    pub commute_ahead: usize,
    /// The device-aware term order and ladder roots, if the plan uses one ([`order`]).
    pub order: Option<DeviceOrder>,
    /// Length of the first commuting group of the plan's term order, whose halves meet at the
    /// seams of reused symmetric steps ([`reuse::step_parts`]); 0: the step is not split.
    pub edge_terms: usize,
    /// Sizes of the commuting groups of the plan's term order (`formula::term_groups`), set
    /// for the sign-flip step ([`StepForm::flip`]), whose blocks they are; else empty.
    pub group_sizes: Vec<usize>,
    /// How the step's program is written ([`reuse::step_parts`]).
    pub step_form: StepForm,
    /// Control copies of the ancilla ([`cat`]): logical qubits `num_system + 1 ..` of
    /// `initial_layout`; 0 for the usual Hadamard test.
    pub copies: usize,
    /// The step was routed with the control spread ([`cat::route_step`]): it may also use
    /// free sites as temporary copies (`temporary_copies` distinct ones) and move qubits into
    /// free sites with two CNOTs, so its circuits rely on every unused qubit starting in |0⟩.
    pub spread: bool,
    pub temporary_copies: usize,
    /// The search's next best starting layouts (at most [`RUNNER_UP_LAYOUTS`], best first):
    /// the spread control also grows copies from these ([`plan_and_route_cat_step`]).
    pub runner_up_layouts: Vec<Vec<u32>>,
    /// Row-major hop distances between the initial sites of the logical qubits.
    dist: Vec<u32>,
}

impl TargetPlan {
    /// A plan with a given layout (checked: distinct sites, all in one component of `dev`).
    /// With [`Ancilla::Controls`] the layout also places the ancilla (logical qubit
    /// `num_system`, last) and the plan's `ancilla` names it.
    pub fn with_layout(
        num_system: usize,
        ancilla: Ancilla,
        dev: &Device,
        initial_layout: Vec<u32>,
    ) -> Result<TargetPlan, RouteError> {
        let n = num_system + ancilla.controls() as usize;
        if initial_layout.len() != n {
            return Err(RouteError::LayoutLength {
                placed: initial_layout.len(),
                needed: n,
            });
        }
        let mut dist = vec![0; n * n];
        for i in 0..n {
            if initial_layout[i] as usize >= dev.num_qubits {
                return Err(RouteError::NoSuchQubit {
                    qubit: initial_layout[i],
                    device: dev.name.clone(),
                });
            }
            for j in 0..n {
                let d = dev.distance(initial_layout[i], initial_layout[j]);
                if i != j && d == 0 {
                    return Err(RouteError::SharedQubit {
                        qubit: initial_layout[i],
                    });
                }
                if d == UNREACHABLE {
                    return Err(RouteError::NotConnected {
                        a: initial_layout[i],
                        b: initial_layout[j],
                        device: dev.name.clone(),
                    });
                }
                dist[i * n + j] = d;
            }
        }
        Ok(TargetPlan {
            initial_layout,
            num_system,
            ancilla: ancilla.controls().then_some(num_system as u32),
            ancilla_swap_factor: 1.0,
            commute_ahead: 0,
            order: None,
            edge_terms: 0,
            group_sizes: Vec::new(),
            step_form: StepForm::default(),
            copies: 0,
            spread: false,
            temporary_copies: 0,
            runner_up_layouts: Vec::new(),
            dist,
        })
    }

    /// A plan whose layout places the system qubits, the ancilla and `layout.len() −
    /// num_system − 1` control copies after it ([`cat`]); checked as [`TargetPlan::with_layout`].
    pub fn with_copies(
        num_system: usize,
        dev: &Device,
        layout: Vec<u32>,
    ) -> Result<TargetPlan, RouteError> {
        let copies = layout
            .len()
            .checked_sub(num_system + 1)
            .ok_or(RouteError::TooShortForCopies)?;
        let mut plan =
            TargetPlan::with_layout(num_system + copies, Ancilla::Controls, dev, layout)?;
        plan.num_system = num_system;
        plan.ancilla = Some(num_system as u32);
        plan.copies = copies;
        plan.spread = true;
        Ok(plan)
    }

    /// The same plan with the device-aware order of `h` on `dev` ([`device_order`]).
    pub fn with_device_order(mut self, h: &PauliSum, dev: &Device) -> TargetPlan {
        self.order = Some(device_order(h, &self, dev));
        self
    }

    /// The term order circuits for this plan should follow: the device-aware one if the plan
    /// has it, else `formula::order_terms(h)`. Either gives the same operator for every formula.
    pub fn terms(&self, h: &PauliSum) -> Vec<(PauliString, f64)> {
        match &self.order {
            Some(o) => o.terms.clone(),
            None => order_terms(h),
        }
    }

    fn d(&self, a: Qubit, b: Qubit) -> u32 {
        self.dist[a as usize * self.initial_layout.len() + b as usize]
    }

    /// Greedy nearest-neighbour chain through `support` starting at `root`, and its length.
    fn chain_from(&self, root: Qubit, support: &[Qubit]) -> (Vec<Qubit>, u32) {
        let mut chain = vec![root];
        let mut rest: Vec<Qubit> = support.iter().copied().filter(|&q| q != root).collect();
        let mut length = 0;
        while !rest.is_empty() {
            let cur = *chain.last().expect("non-empty");
            let (k, &next) = rest
                .iter()
                .enumerate()
                .min_by_key(|&(_, &q)| (self.d(cur, q), q))
                .expect("non-empty");
            length += self.d(cur, next);
            chain.push(next);
            rest.remove(k);
        }
        (chain, length)
    }

    /// The CNOT ladder for `r`: a permutation of its support (logical indices), root last.
    /// The root is the one the device-aware order chose for `r`'s string if the plan has one;
    /// else, with an ancilla, the support qubit nearest to it; without, the root that gives the
    /// shortest greedy chain. Ties go to the lower index.
    pub fn ladder(&self, r: &Rotation) -> Vec<Qubit> {
        let support = default_ladder(r);
        if support.len() <= 1 {
            return support;
        }
        let planned = self
            .order
            .as_ref()
            .and_then(|o| o.roots.get(&r.pauli))
            .filter(|q| support.contains(q));
        let (mut chain, _) = match (planned, self.ancilla) {
            (Some(&root), _) => self.chain_from(root, &support),
            (None, Some(a)) => {
                let root = *support
                    .iter()
                    .min_by_key(|&&q| (self.d(q, a), q))
                    .expect("non-empty");
                self.chain_from(root, &support)
            }
            (None, None) => support
                .iter()
                .map(|&root| self.chain_from(root, &support))
                .min_by_key(|(c, len)| (*len, c[0]))
                .expect("non-empty"),
        };
        chain.reverse();
        chain
    }
}

/// How [`reuse::step_parts`] writes one step: which program, in which order, cancelled or not.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct StepForm {
    /// The unmerged textbook expansion (`--opt 0`) instead of `formula::step`.
    pub textbook: bool,
    /// No peephole cancellation of the synthesised step (`--opt 0`).
    pub uncancelled: bool,
    /// The program reordered by [`sweep::schedule`] (ladders rooted where the walk meets each
    /// rotation); the step is then not split at seams.
    pub sweep: bool,
    /// Hopping pairs synthesised together (`synth::Pairs`), the rest as the plan's ladders.
    /// With `flip`: the flipped step's uncontrolled halves written so.
    pub pairs: bool,
    /// One greedy Clifford network per commuting run (`synth::Groups`, distance-aware under
    /// the plan's initial layout), single rotations as the plan's ladders. With `flip`: the
    /// flipped step's uncontrolled halves written so.
    pub groups: bool,
    /// With `groups`: the networks restricted to coupled pairs of the plan's initial layout
    /// and each string reduced next to the ancilla (`synth::Coupled`), so the router inserts
    /// no SWAP inside the step.
    pub coupled: bool,
    /// With `coupled`: each string rotated where its network leaves it, the router moving the
    /// ancilla to it (`synth::Coupled::roam`).
    pub roam: bool,
    /// With `coupled`: the Clifford frame carried from run to run as a stack of networks,
    /// each undone by its mirror where a later run needs it gone (`synth::Coupled::carry`).
    pub carry: bool,
    /// The controlled step by a sign flip (`synth::flip`): every rotation uncontrolled, the
    /// ancilla controlling one Pauli string that anticommutes with all of them, twice.
    pub flip: bool,
    /// With `flip`: the order of each commuting block's rotations.
    pub flip_order: crate::synth::flip::BlockOrder,
    /// With `flip`: the string is the GF(2) system's particular solution
    /// (`synth::flip::flip_split`) rather than the one whose parity tree the layout makes
    /// cheapest (`synth::flip::nearest_flip_string`, a proxy that the routed count can
    /// overrule: both compete).
    pub flip_particular: bool,
    /// With `flip`: the signed step (`synth::flip::Choice::Signed`): the string from
    /// `synth::flip::signed_string` under the plan's layout, or none with `flip_particular`,
    /// and every term that commutes with it riding on the ancilla's sign in the first half.
    pub flip_signed: bool,
    /// With `flip`: the second controlled string of each step gathers its parity tree where
    /// the first half, routed, leaves the qubits (`synth::flip::flipped_step_parts`)
    /// rather than under the initial layout.
    pub flip_track: bool,
}

/// The most system qubits on which the carried-frame candidate (`StepForm::carry`) is tried.
/// Its frame images and depth estimates grow with the width: on 100 random qubits (300 terms,
/// weight ≤ 4) on a 127-qubit heavy-hexagon device it took a three-point campaign from 60 s to
/// 399 s of CPU and changed no count, while every case where it wins (the dense and chemistry
/// sums of `benches/fewer_gates.rs`) has at most 12.
pub const CARRY_MAX_QUBITS: usize = 32;

/// Ancilla SWAP factors tried by [`plan_target`]: neutral, and a mild preference for moving the
/// ancilla (on `benches/routing.rs`, 0.9 lowers the SWAP count in most cases and 1.0 in a few,
/// so both are scored on the skeleton).
const ANCILLA_SWAP_FACTORS: [f64; 2] = [1.0, 0.9];

/// How a plan orders the terms and roots the ladders; with `RouteConfig::device_order`,
/// [`plan_target`] scores all of these on the skeleton and keeps the best.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum OrderChoice {
    /// `formula::order_terms` and roots nearest the ancilla's initial site.
    Default,
    /// [`device_order`] with the roots where its walk meets each term.
    Walk,
    /// [`device_order`]'s terms with roots nearest the ancilla's initial site.
    WalkNearestRoots,
    /// The default terms' program in the order of [`sweep::schedule`], not split at seams.
    Sweep,
}

/// On `benches/routing.rs` the walk's roots win on most pairs and the initial-site roots on a
/// few; the default order is kept as a fallback, so the skeleton never routes worse than it.
const ORDER_CHOICES: [OrderChoice; 3] = [
    OrderChoice::Walk,
    OrderChoice::WalkNearestRoots,
    OrderChoice::Default,
];

/// Steps whose first routing costs more units (two-qubit gates plus SWAPs) than this are not
/// scored with the sweep schedule, exact embeddings or the textbook step, and candidates are
/// scored by the peephole count rather than by lowering: both cost about one more routing per candidate, which at utility scale
/// (a 1,000-term step on 127 qubits, ~40,000 units) tripled the layout search's time on the
/// `utility_device` benchmark. The swept step's gain is largest on lattice models, whose
/// steps are small.
pub const EXTRAS_MAX_UNIT: usize = 20_000;

/// A size of `program` to compare with [`EXTRAS_MAX_UNIT`] before anything is routed: 4 per
/// Pauli factor over its rotations (a rough count of the CNOTs its controlled ladders take).
pub fn step_unit(program: &[crate::formula::Rotation]) -> usize {
    program.iter().map(|r| 4 * r.pauli.weight() as usize).sum()
}

/// A circuit on the device.
#[derive(Clone, Debug)]
pub struct Routed {
    /// Physical qubits `0..dev.num_qubits`, native gates only, checked as a [`DeviceCircuit`];
    /// each measurement reads the physical qubit holding the measured logical qubit at the end.
    pub circuit: DeviceCircuit,
    /// Logical → physical at the start.
    pub initial_layout: Vec<u32>,
    /// Logical → physical at the end.
    pub final_layout: Vec<u32>,
    pub swaps: usize,
}

/// The logical circuit of one step of `order` and length `dt` over `terms`, each rotation
/// along the plan's ladder and controlled by the ancilla if any, after peephole cancellation
/// (split as [`reuse::step_parts`] says, which keeps the operator).
pub fn step_circuit(
    terms: &[(PauliString, f64)],
    plan: &TargetPlan,
    order: Order,
    dt: f64,
) -> Circuit {
    reuse::step_parts(terms, plan, order, dt).circuit
}

/// Work allowed to the layout search, in routed two-qubit gates plus inserted SWAPs summed over
/// every routing of the step (a routing costs about that many units, ~1 µs each on the 2-core
/// benchmark machine). Below it the full search runs; above it `SEARCH_LEVELS` step down.
pub const PLAN_BUDGET: usize = 4_000_000;

/// How much of the layout search runs: layout candidates, ancilla SWAP factors, term orders and
/// refinement rounds.
#[derive(Clone, Copy, Debug)]
struct Search {
    trials: usize,
    factors: &'static [f64],
    choices: &'static [OrderChoice],
    rounds: usize,
}

impl Search {
    fn routings(&self) -> usize {
        self.trials * self.factors.len() * self.choices.len() * (2 * self.rounds + 1)
    }
}

/// The search levels tried from the top (the configured one) down, the first whose routings fit
/// [`PLAN_BUDGET`] winning; deterministic, since it depends only on the first routing's size.
/// The first level is `RouteConfig`'s own; the others keep the device order with the walk's
/// roots (best on most pairs of `benches/routing.rs`) and the default order as a fallback, the
/// ancilla factor 0.9, and fewer candidates and rounds.
const SEARCH_LEVELS: [(usize, &[f64], &[OrderChoice], usize); 4] = [
    (
        4,
        &ANCILLA_SWAP_FACTORS,
        &[OrderChoice::Walk, OrderChoice::Default],
        1,
    ),
    (2, &[0.9], &[OrderChoice::Walk, OrderChoice::Default], 1),
    (1, &[0.9], &[OrderChoice::Walk], 1),
    (1, &[0.9], &[OrderChoice::Walk], 0),
];

/// Picks the initial layout and ladder plan for `h` (plus the ancilla, controlling the step,
/// with [`Ancilla::Controls`]) on `dev`,
/// scoring candidates on one Strang step. Errors ([`RouteError`]) are bad input when the device
/// is too small, or its coupling graph is split into parts none of which is large enough; a
/// candidate layout the search builds and then refuses would be a bug ([`RouteError::Search`]).
pub fn plan_target(
    h: &PauliSum,
    ancilla: Ancilla,
    dev: &Device,
    cfg: &RouteConfig,
) -> Result<TargetPlan, RouteError> {
    Ok(
        plan_on_step(h, ancilla.controls(), None, dev, cfg, Order::Second, 1.0)?
            .0
             .0,
    )
}

/// [`plan_target`] scoring on the campaign's own step (`order`, length `dt`) and returning the
/// winner's routing of it, ready for reuse ([`reuse::route_step`] builds the same from scratch).
pub fn plan_and_route_step(
    h: &PauliSum,
    dev: &Device,
    cfg: &RouteConfig,
    order: Order,
    dt: f64,
) -> Result<(TargetPlan, RoutedStep), RouteError> {
    route_with(h, true, None, dev, cfg, order, dt)
}

/// [`plan_and_route_step`] for the control-free Hadamard test (`family::control`): the layout
/// still places the ancilla (last logical qubit), tied only to `partners` (the qubits its
/// controlled state preparation touches), but the step's rotations are not controlled, so the
/// plan has no ancilla for the ladders and the SWAP router (`TargetPlan::ancilla` is `None`).
pub fn plan_and_route_free_step(
    h: &PauliSum,
    partners: &[usize],
    dev: &Device,
    cfg: &RouteConfig,
    order: Order,
    dt: f64,
) -> Result<(TargetPlan, RoutedStep), RouteError> {
    route_with(h, true, Some(partners), dev, cfg, order, dt)
}

/// [`plan_and_route_step`] for circuits without an ancilla (plain time evolution).
pub fn plan_and_route_plain_step(
    h: &PauliSum,
    dev: &Device,
    cfg: &RouteConfig,
    order: Order,
    dt: f64,
) -> Result<(TargetPlan, RoutedStep), RouteError> {
    route_with(h, false, None, dev, cfg, order, dt)
}

fn route_with(
    h: &PauliSum,
    ancilla: bool,
    free_ancilla: Option<&[usize]>,
    dev: &Device,
    cfg: &RouteConfig,
    order: Order,
    dt: f64,
) -> Result<(TargetPlan, RoutedStep), RouteError> {
    let (winner, other) = plan_on_step(h, ancilla, free_ancilla, dev, cfg, order, dt)?;
    let symmetric = reuse::Formula::of(order);
    let build = |(plan, routed): Planned| {
        let params = plan_swap_params(&plan, cfg);
        let step = match routed {
            Some((parts, fwd, marks)) => {
                reuse::route_from(&parts, fwd, marks, &plan, dev, &params, symmetric)
            }
            None => {
                let parts = reuse::step_parts(&plan.terms(h), &plan, order, dt);
                reuse::route_step(&parts, &plan, dev, &params, symmetric)
            }
        };
        (plan, step)
    };
    let first = build(winner);
    let (Some((circuits, steps)), Some(other)) = (cfg.campaign_weights, other) else {
        return Ok(first);
    };
    // One step decides the search; the campaign decides between a swept step (one sweep, no
    // merged seams) and a split one (seams merged): each circuit of r steps costs about
    // a + b·r two-qubit gates, with a and b from one and two steps as emitted.
    let second = build(other);
    let cost = |step: &RoutedStep| {
        let emitted = |r: usize| {
            let mut c = Circuit::new(dev.num_qubits, 0);
            for piece in step.pieces(r) {
                c.extend(piece.gates.iter().copied());
            }
            emitted_score(&c, dev) as f64
        };
        let (c1, c2) = (emitted(1), emitted(2));
        circuits * (2.0 * c1 - c2) + steps * (c2 - c1)
    };
    Ok(if cost(&second.1) < cost(&first.1) {
        second
    } else {
        first
    })
}

/// The cat candidate ([`cat`]): the step of `order` and length `dt` routed with control copies
/// of the ancilla on spare sites, starting from `base`'s layout (the ordinary search's winner),
/// from its runner-up's (`TargetPlan::runner_up_layouts`: the copies' own routing does not
/// run gates ahead, so the layout that wins with run-ahead may suit it less; H4 on a 4×4
/// grid, one step with copies: 2372 two-qubit gates from the winner alone, 2289 with the
/// runner-up) and from exact embeddings. Each shortlisted layout is routed ([`cat::route_step_with`], with
/// each rotation meeting its nearest control and with the controls moved as a front) and,
/// with `RouteConfig::pairs`, also written by the coupled networks with every copy as a
/// control (with and without the carried frame); so is each layout with copies grown by
/// [`cat::covering_copies`] (with `RouteConfig::pairs`). Every candidate is scored by the
/// two-qubit gates emitted for a circuit of one step, fan-out and its undoing included (with
/// `RouteConfig::campaign_weights`, for the campaign's circuits and steps as
/// [`plan_and_route_step`] compares its steps). `None` when the device has no spare site,
/// the step is past [`EXTRAS_MAX_UNIT`] or [`cat::MAX_ROTATIONS`], or no layout gets a copy.
/// The pipeline keeps it only when the whole campaign it emits is cheaper.
pub fn plan_and_route_cat_step(
    h: &PauliSum,
    dev: &Device,
    cfg: &RouteConfig,
    order: Order,
    dt: f64,
    base: &TargetPlan,
) -> Option<(TargetPlan, RoutedStep)> {
    let n = h.num_qubits;
    let comps = dev.components();
    let comp = comps.first()?;
    if n == 0 || comp.len() <= n + 1 || base.initial_layout.len() != n + 1 {
        return None;
    }
    let program = crate::formula::step(&order_terms(h), order, dt);
    let unit = step_unit(&program);
    let coupled = cfg.pairs && !cfg.textbook;
    if program.is_empty() || program.len() > cat::MAX_ROTATIONS || unit > EXTRAS_MAX_UNIT {
        return None;
    }
    let symmetric = reuse::Formula::of(order);
    let mut best: Option<(f64, TargetPlan, RoutedStep)> = None;
    let min_copies = usize::from(cfg.cat_force);
    let bases = [base.initial_layout.clone()];
    let shortlist = cat::candidate_layouts(h, &program, &bases, comp, dev, min_copies);
    let mut layouts: Vec<Vec<u32>> = shortlist.into_iter().map(|(_, l)| l).collect();
    // The runner-up's layout grown too, beside the shortlist rather than in it: the shortlist
    // ranks by a static estimate, and a base more there can push out the layout that wins
    // (the Hubbard 2×3 step on a 4×4 grid: 589 two-qubit gates a circuit, 600 so).
    for r in &base.runner_up_layouts {
        let grown = cat::choose_controls(&program, n, r, comp, dev).0;
        if !layouts.contains(&grown) {
            layouts.push(grown);
        }
    }
    // Both forms below also start from copies grown to cover the most system qubits, on the
    // winner's layout and on each layout above.
    if coupled {
        let mut covering: Vec<Vec<u32>> = Vec::new();
        for l in bases.iter().chain(layouts.iter()) {
            let c = cat::covering_copies(l, n, comp, dev);
            if c.len() > n + 1 && !covering.contains(&c) && !layouts.contains(&c) {
                covering.push(c);
            }
        }
        layouts.extend(covering);
    }
    for layout in layouts {
        if layout.len() < n + 1 + min_copies {
            continue;
        }
        let Ok(plan) = TargetPlan::with_copies(n, dev, layout.clone()) else {
            continue;
        };
        let mut offer = |plan: TargetPlan, step: RoutedStep| {
            let cost = |r: usize| {
                cat_circuit_score(&step, n, r, dev, &plan_swap_params(&plan, cfg)) as f64
            };
            let score = match cfg.campaign_weights {
                Some((circuits, steps)) => {
                    let (c1, c2) = (cost(1), cost(2));
                    circuits * (2.0 * c1 - c2) + steps * (c2 - c1)
                }
                None => cost(1),
            };
            if best.as_ref().is_none_or(|(b, _, _)| score < *b) {
                best = Some((score, plan, step));
            }
        };
        for policy in [
            cat::Policy::Nearest,
            cat::Policy::Front,
            cat::Policy::FrontMerged,
        ] {
            let hopping = cat::Hopping::when(cfg.pairs);
            let Some(routed) = cat::route_step_with(&program, n, &layout, dev, hopping, policy)
            else {
                continue;
            };
            let mut plan = plan.clone();
            plan.temporary_copies = routed.temporary_copies;
            let (start, end) = (layout.clone(), routed.final_layout);
            let step = reuse::unsplit(routed.circuit, start, end, dev, symmetric);
            offer(plan, step);
        }
        // The commuting runs synthesised on the coupling graph with every copy as a control
        // (`synth::Coupled::copies`): strings are carried to the nearest control, not to the
        // ancilla, and the step needs no SWAP.
        if coupled {
            for carry in [false, true] {
                if carry && n > CARRY_MAX_QUBITS {
                    continue;
                }
                let mut plan = plan.clone();
                plan.spread = false;
                plan.step_form = StepForm {
                    groups: true,
                    coupled: true,
                    carry,
                    ..StepForm::default()
                };
                let parts = reuse::step_parts_on(&plan.terms(h), &plan, order, dt, Some(dev));
                let params = plan_swap_params(&plan, cfg);
                let step = reuse::route_step(&parts, &plan, dev, &params, symmetric);
                offer(plan, step);
            }
        }
    }
    best.map(|(_, plan, step)| (plan, step))
}

/// The [`emitted_score`] of `r` steps of a cat `step` between its fan-out and the undoing of
/// it where the steps end (routed there if the copies have moved apart).
pub fn cat_circuit_score(
    step: &RoutedStep,
    n: usize,
    r: usize,
    dev: &Device,
    params: &SwapParams,
) -> usize {
    let start = &step.start;
    let mut c = Circuit::new(dev.num_qubits, 0);
    c.extend(
        cat::fanout(start, n, dev)
            .into_iter()
            .map(|g| g.map_qubits(|q| start[q as usize])),
    );
    for piece in step.pieces(r) {
        c.extend(piece.gates.iter().copied());
    }
    let end = step.layout_after(r);
    let mut undo = Circuit::new(end.len(), 0);
    undo.extend(cat::unfan(end, n, dev));
    c.extend(insert_swaps(&undo, end, dev, params).circuit.gates);
    emitted_score(&c, dev)
}

/// The SWAP parameters a plan routes with (its ancilla as the hub, its factor).
pub fn plan_swap_params(plan: &TargetPlan, cfg: &RouteConfig) -> SwapParams {
    let mut params = cfg.swap_params();
    params.hub = plan.ancilla;
    params.hub_factor = plan.ancilla_swap_factor;
    params.commute_ahead = plan.commute_ahead;
    params
}

/// One candidate of the layout search, enough to build it again: its starting layout, ancilla
/// SWAP factor, term order and step form.
#[derive(Clone, Debug, PartialEq)]
struct Recipe {
    layout: Vec<u32>,
    factor: f64,
    choice: OrderChoice,
    form: StepForm,
}

/// A candidate's key: its two-qubit score, then the two-qubit depth of what it emits (0 where
/// the score is not taken on the lowering), then its layout cost.
type Key = (usize, usize, f64);

/// A scored candidate and its recipe.
type Keyed = (Key, Recipe);

/// The best plan with a split (or plain) step, and the best swept one: they differ in how later
/// steps join (`reuse`), so [`plan_and_route_step`] may compare them on the campaign.
#[derive(Default)]
struct Bests {
    /// Indexed by "swept".
    slots: [Option<Keyed>; 2],
    /// The initial layout of the best split (or plain) step so far.
    plain_layout: Option<Vec<u32>>,
    /// The best [`RUNNER_UP_LAYOUTS`] + 1 distinct starting layouts of either kind, best first.
    layouts: Vec<(Key, Vec<u32>)>,
}

impl Bests {
    /// Keeps `keyed` if it scores better than the best of its kind so far (ties keep the
    /// earlier one, so the order of the calls decides them).
    fn consider(&mut self, (key, recipe): Keyed) {
        let swept = recipe.choice == OrderChoice::Sweep;
        // One entry per layout, at its best key; the list stays sorted and short.
        let seen = self.layouts.iter().position(|(_, l)| *l == recipe.layout);
        let fresh = match seen {
            Some(i) if beats(&key, &self.layouts[i].0) => {
                self.layouts.remove(i);
                true
            }
            Some(_) => false,
            None => true,
        };
        let at = self.layouts.partition_point(|(k, _)| !beats(&key, k));
        if fresh && at <= RUNNER_UP_LAYOUTS {
            self.layouts.insert(at, (key, recipe.layout.clone()));
            self.layouts.truncate(RUNNER_UP_LAYOUTS + 1);
        }
        let best = &mut self.slots[swept as usize];
        let better = best.as_ref().is_none_or(|(k, _)| beats(&key, k));
        if better {
            if !swept {
                self.plain_layout = Some(recipe.layout.clone());
            }
            *best = Some((key, recipe));
        }
    }
}

/// Whether key `a` scores strictly better than `b`: the two-qubit score first, then, at equal
/// scores, the shallower step, then the layout cost (beyond round-off).
fn beats(a: &Key, b: &Key) -> bool {
    (a.0, a.1) < (b.0, b.1) || ((a.0, a.1) == (b.0, b.1) && a.2 < b.2 - 1e-12)
}

/// A plan and, when it was routed, its step's parts, routing and marks at the cuts.
type Planned = (
    TargetPlan,
    Option<(reuse::StepParts, swap::SwapOutcome, Vec<swap::Mark>)>,
);

/// `free_ancilla`: `Some(partners)` places the ancilla without letting it control the step
/// (see [`plan_and_route_free_step`]).
fn plan_on_step(
    h: &PauliSum,
    ancilla: bool,
    free_ancilla: Option<&[usize]>,
    dev: &Device,
    cfg: &RouteConfig,
    order: Order,
    dt: f64,
) -> Result<(Planned, Option<Planned>), RouteError> {
    let n_sys = h.num_qubits;
    let n = n_sys + ancilla as usize;
    if n > dev.num_qubits {
        return Err(RouteError::TooFewQubits {
            device: dev.name.clone(),
            has: dev.num_qubits,
            system: n_sys,
            ancilla,
        });
    }
    if n == 0 {
        let plan = TargetPlan::with_layout(0, Ancilla::None, dev, Vec::new())
            .map_err(RouteError::in_search)?;
        return Ok(((plan, None), None));
    }
    let comps = dev.components();
    let comp = match comps.first() {
        Some(c) if c.len() >= n => c.clone(),
        _ => {
            return Err(RouteError::Disconnected {
                device: dev.name.clone(),
                largest: comps.first().map_or(0, |c| c.len()),
                system: n_sys,
                ancilla,
            })
        }
    };
    // `controls`: the ancilla controls the step's rotations (the usual Hadamard test).
    let controls = ancilla && free_ancilla.is_none();
    let w = match free_ancilla {
        Some(partners) if ancilla => layout::interaction_weights_with_partners(h, partners),
        _ => layout::interaction_weights(h, Ancilla::when(ancilla)),
    };
    let groups = term_groups(h);
    let default_terms: Vec<(PauliString, f64)> = groups.concat();
    let edge_terms = if groups.len() >= 2 && order != Order::First {
        groups[0].len()
    } else {
        0
    };
    let candidate = |t: usize| -> Vec<u32> {
        let trial_seed = cfg.seed.wrapping_mul(0x9e37_79b9).wrapping_add(t as u64);
        let mut l = if t == 0 {
            layout::greedy_layout(&w, n, &comp, dev, Ancilla::when(controls))
        } else {
            layout::random_layout(n, &comp, trial_seed)
        };
        layout::anneal(&w, &mut l, &comp, dev, trial_seed);
        l
    };
    let factors: &'static [f64] = if controls && cfg.hub_factors {
        &ANCILLA_SWAP_FACTORS
    } else {
        &[1.0]
    };
    // The sweep schedule is not among these: it is scored on top of the search a level
    // below would run (`extra` below), so adding it never changes what else is tried.
    let choices: &'static [OrderChoice] = if cfg.device_order && controls {
        &ORDER_CHOICES
    } else {
        &[OrderChoice::Default]
    };
    let form = StepForm {
        textbook: cfg.textbook,
        uncancelled: !cfg.cancel,
        sweep: false,
        pairs: false,
        groups: false,
        coupled: false,
        roam: false,
        carry: false,
        flip: false,
        flip_order: BlockOrder::Given,
        flip_particular: false,
        flip_signed: false,
        flip_track: false,
    };
    let full = Search {
        trials: cfg.layout_trials.max(1),
        factors,
        choices,
        rounds: cfg.refine_rounds,
    };
    // The device order depends only on the layout: computed once per layout tried (a memo,
    // shared by the threads; what it holds never changes a result).
    let orders: std::sync::Mutex<std::collections::BTreeMap<Vec<u32>, DeviceOrder>> =
        Default::default();
    let mut base_params = cfg.swap_params();
    base_params.hub = controls.then_some(n_sys as u32);
    let params_with = |factor: f64| {
        let mut p = base_params.clone();
        p.hub_factor = factor;
        p
    };
    let weighted = score_reference(dev).is_some();
    let repeats = cfg.steps_per_circuit();
    let evaluate = |recipe: &Recipe| {
        let Recipe {
            layout: ref l,
            factor,
            choice,
            form,
        } = *recipe;
        let mut plan = TargetPlan::with_layout(n_sys, Ancilla::when(ancilla), dev, l.to_vec())
            .map_err(RouteError::in_search)?;
        if !controls {
            plan.ancilla = None;
        }
        let terms = if !matches!(choice, OrderChoice::Default | OrderChoice::Sweep) {
            let known = orders
                .lock()
                .expect("no panic holds the memo")
                .get(l)
                .cloned();
            let mut o = known.unwrap_or_else(|| {
                let o = order::device_order_in(&groups, &plan, dev);
                orders
                    .lock()
                    .expect("no panic holds the memo")
                    .insert(l.to_vec(), o.clone());
                o
            });
            if choice == OrderChoice::WalkNearestRoots {
                o.roots.clear();
            }
            let terms = o.terms.clone();
            plan.order = Some(o);
            terms
        } else {
            default_terms.clone()
        };
        plan.ancilla_swap_factor = factor;
        plan.edge_terms = if choice == OrderChoice::Sweep {
            0
        } else {
            edge_terms
        };
        plan.step_form = StepForm {
            sweep: choice == OrderChoice::Sweep,
            ..form
        };
        if form.flip {
            plan.group_sizes = groups.iter().map(|g| g.len()).collect();
        }
        let params = params_with(factor);
        let parts = reuse::step_parts_on(&terms, &plan, order, dt, Some(dev));
        // The routed step's `emitted_score_and_depth`, where a choice below already took it.
        let mut known: Option<(usize, usize)> = None;
        let (mut fwd, mut marks) =
            swap::insert_swaps_cut(&parts.circuit, l, dev, &params, &parts.cuts);
        // The same step routed with commuting gates running ahead of a blocked front, kept
        // when it needs fewer SWAPs (it does on most chemistry steps, and not on every step:
        // see `swap`'s module essay). Only the SWAPs decide: a guard that also asked for no
        // greater two-qubit depth of the routed order kept fewer of the gains and lost one
        // (the 3×4 Ising model on the heavy hexagon, 184 → 202 two-qubit gates).
        if cfg.commute_ahead
            && n_sys <= swap::COMMUTE_MAX_QUBITS
            && parts.circuit.gates.len() <= swap::COMMUTE_MAX_GATES
        {
            let ahead = SwapParams {
                commute_ahead: swap::COMMUTE_AHEAD,
                ..params.clone()
            };
            let (f, m) = swap::insert_swaps_cut(&parts.circuit, l, dev, &ahead, &parts.cuts);
            // On a chip with uneven couplers or decaying qubits, where the SWAPs land and how
            // deep the step grows matter too.
            let fewer = if weighted {
                let (a, b) = (
                    emitted_score_and_depth(&f.circuit, dev, repeats),
                    emitted_score_and_depth(&fwd.circuit, dev, repeats),
                );
                known = Some(if a.0 < b.0 { a } else { b });
                a.0 < b.0
            } else {
                f.swaps < fwd.swaps
            };
            if fewer {
                (fwd, marks) = (f, m);
                plan.commute_ahead = swap::COMMUTE_AHEAD;
            }
        }
        if choice == OrderChoice::Sweep && parts.cuts.is_empty() {
            // The swept order is the walk: the in-order hub router follows it (`hub`).
            let walked = hub::insert_swaps_in_order(&parts.circuit, l, dev, params.hub);
            let a = emitted_score_and_depth(&walked.circuit, dev, repeats);
            let b = known.unwrap_or_else(|| emitted_score_and_depth(&fwd.circuit, dev, repeats));
            known = Some(if a.0 < b.0 { a } else { b });
            if a.0 < b.0 {
                fwd = walked;
            }
        }
        Ok::<_, RouteError>((plan, parts, fwd, marks, known))
    };
    // The first routing of the full search measures the work of one routing; it is kept whole
    // (the search may be that one routing), every other candidate only by its key.
    let first_recipe = Recipe {
        layout: candidate(0),
        factor: full.factors[0],
        choice: full.choices[0],
        form,
    };
    let first_eval = evaluate(&first_recipe)?;
    let first_layout = first_recipe.layout.clone();
    let unit = first_eval
        .1
        .circuit
        .gates
        .iter()
        .filter(|g| g.is_two_qubit())
        .count()
        + first_eval.2.swaps;
    let allowed = (PLAN_BUDGET / unit.max(1)).max(1);
    let small = unit <= EXTRAS_MAX_UNIT;
    // Lowering every candidate is exact but costs about a routing; above `EXTRAS_MAX_UNIT`
    // the peephole count (SWAP = 3) stands in for it.
    let lowered_score = cfg.score_two_qubit && small;
    let key_of = |fwd: &swap::SwapOutcome, l: &[u32], known: Option<(usize, usize)>| {
        let (first, depth) = if lowered_score {
            known.unwrap_or_else(|| emitted_score_and_depth(&fwd.circuit, dev, repeats))
        } else if cfg.score_two_qubit {
            (reuse::two_qubit_cost(&fwd.circuit), 0)
        } else {
            (fwd.swaps, 0)
        };
        (first, depth, layout::layout_cost(&w, l, dev))
    };
    let search = std::iter::once(full)
        .chain(SEARCH_LEVELS.iter().map(|&(t, f, c, r)| Search {
            trials: t.min(full.trials),
            factors: if controls && cfg.hub_factors {
                f
            } else {
                &[1.0]
            },
            choices: if cfg.device_order && controls {
                c
            } else {
                &[OrderChoice::Default]
            },
            rounds: r.min(full.rounds),
        }))
        .find(|s| s.routings() <= allowed)
        .unwrap_or(Search {
            trials: 1,
            factors: if controls { &[0.9] } else { &[1.0] },
            choices: full.choices[..1].as_ref(),
            rounds: 0,
        });
    let mut candidates: Vec<Vec<u32>> = vec![first_layout.clone()];
    for t in 1..search.trials {
        let l = candidate(t);
        if !candidates.contains(&l) {
            candidates.push(l);
        }
    }
    if cfg.embed && small {
        for l in embed::embedding_layouts(h, embed::AncillaSite::when(ancilla), &comp, dev) {
            if !candidates.contains(&l) {
                candidates.push(l);
            }
        }
    }
    // One chain: a recipe evaluated, then its layout refined by `rounds` bidirectional
    // rounds (route the reversed step from the final layout, start again from where it
    // ends). Chains are independent, so they run in parallel; their keys are then taken in
    // the order a sequential search would meet them, so the winner does not depend on the
    // thread count.
    let run_chain = |(start, rounds): &(Recipe, usize)| {
        let mut recipe = start.clone();
        let mut keys = Vec::with_capacity(rounds + 1);
        for round in 0..=*rounds {
            let own;
            let (_, parts, fwd, _, known) = if recipe == first_recipe {
                &first_eval
            } else {
                own = evaluate(&recipe)?;
                &own
            };
            keys.push((key_of(fwd, &recipe.layout, *known), recipe.clone()));
            if round == *rounds {
                break;
            }
            let params = params_with(recipe.factor);
            recipe.layout =
                insert_swaps(&reversed(&parts.circuit), &fwd.final_layout, dev, &params)
                    .final_layout;
        }
        Ok::<_, RouteError>(keys)
    };
    let run_chains = |chains: &[(Recipe, usize)]| -> Result<Vec<Keyed>, RouteError> {
        let keyed: Vec<Vec<Keyed>> = chains.par_iter().map(run_chain).collect::<Result<_, _>>()?;
        Ok(keyed.into_iter().flatten().collect())
    };
    let mut bests = Bests::default();
    // The sweep schedule is scored at the search's own levels while its work stays bounded.
    let sweep_ok = cfg.sweep && controls && search.trials > 1 && small;
    let extra: &[OrderChoice] = if sweep_ok && !search.choices.contains(&OrderChoice::Sweep) {
        &[OrderChoice::Sweep]
    } else {
        &[]
    };
    let chains: Vec<(Recipe, usize)> = search
        .factors
        .iter()
        .flat_map(|f| {
            search
                .choices
                .iter()
                .chain(extra)
                .filter(move |&&c| c != OrderChoice::Sweep || sweep_ok)
                .map(move |c| (f, c))
        })
        .flat_map(|(&factor, &choice)| {
            candidates.iter().map(move |start| {
                let recipe = Recipe {
                    layout: start.clone(),
                    factor,
                    choice,
                    form,
                };
                (recipe, search.rounds)
            })
        })
        .collect();
    let measured_in_search = chains.iter().any(|(r, _)| *r == first_recipe);
    run_chains(&chains)?
        .into_iter()
        .for_each(|k| bests.consider(k));
    if !measured_in_search {
        // The measuring routing was not part of the chosen search: it still competes.
        bests.consider((
            key_of(&first_eval.2, &first_layout, first_eval.4),
            first_recipe.clone(),
        ));
    }
    if cfg.score_two_qubit && !cfg.textbook && small {
        // What the level-0 pipeline would emit (unmerged, uncancelled, first layout) competes
        // too, so a level never keeps a step that costs more than the textbook one.
        let textbook = StepForm {
            textbook: true,
            uncancelled: true,
            sweep: false,
            pairs: false,
            groups: false,
            coupled: false,
            roam: false,
            carry: false,
            flip: false,
            flip_order: BlockOrder::Given,
            flip_particular: false,
            flip_signed: false,
            flip_track: false,
        };
        let recipe = Recipe {
            layout: first_layout.clone(),
            factor: 1.0,
            choice: OrderChoice::Default,
            form: textbook,
        };
        run_chains(&[(recipe, 0)])?
            .into_iter()
            .for_each(|k| bests.consider(k));
    }
    let has_pairs = || {
        let t = &default_terms;
        (0..t.len()).any(|i| {
            t[i + 1..t.len().min(i + 1 + crate::synth::PAIR_LOOKAHEAD)]
                .iter()
                .any(|(q, _)| crate::synth::hopping_pair(&t[i].0, q).is_some())
        })
    };
    let has_runs =
        || crate::synth::groups::has_shared_runs(&crate::formula::step(&default_terms, order, dt));
    // Hopping pairs synthesised together (`synth::Pairs`) and commuting runs as one network
    // each (`synth::Groups`): the same search again per form (every starting layout, the best
    // split step's layout too, every factor and order but the sweep, with its refinement
    // rounds), each candidate scored by what is emitted.
    let mut forms = Vec::new();
    if cfg.pairs && !cfg.textbook && small {
        if has_pairs() {
            forms.push(StepForm {
                pairs: true,
                ..form
            });
        }
        if has_runs() {
            forms.push(StepForm {
                groups: true,
                ..form
            });
        }
    }
    // The coupled networks (`synth::Coupled`) route without SWAPs, so their candidates cost
    // a synthesis and a linear pass each: they are scored past `EXTRAS_MAX_UNIT` too, with
    // one factor and no refinement rounds (neither changes a step that needs no SWAP).
    if cfg.pairs && !cfg.textbook && controls {
        // Roaming steps need SWAPs (for the ancilla): only while routings are cheap.
        for roam in [false, true].into_iter().filter(|&r| !r || small) {
            // The carried frame only where candidates are scored by lowering: past
            // `EXTRAS_MAX_UNIT` the peephole count preferred it on `lih` brick wall where
            // the lowered step emitted more (17550 against 17024); and only on systems of at
            // most `CARRY_MAX_QUBITS`, where its cost stays a fraction of the search's.
            let carried = small && n_sys <= CARRY_MAX_QUBITS;
            for carry in [false, true].into_iter().filter(|&c| !c || carried) {
                forms.push(StepForm {
                    groups: true,
                    coupled: true,
                    roam,
                    carry,
                    ..form
                });
            }
        }
    }
    // The sign flip (`synth::flip`): symmetric formulas whose strings all anticommute with
    // one Pauli string; like the others, kept only where it emits fewer two-qubit gates.
    // Both block orders compete: in layers the halves' depth falls (Ising 12 on a line of 13:
    // 0.80 of the two-qubit count → 0.60), but where SWAPs are needed either order may route
    // cheaper. Layers go first, so they win ties (ties keep the earlier candidate).
    if cfg.pairs && !cfg.textbook && controls && small && flippable(&groups, h.num_qubits, order) {
        // The halves through `synth::Pairs` compete too where the terms hold hopping pairs
        // (XXZ on the brick wall: 240 two-qubit gates with ladders, 220 with pairs), and
        // through `synth::Groups` where commuting runs share qubits (one distance-aware
        // network per run: Hubbard 2×3 on a 4×4 grid 507 → 423, XXZ on the heavy hexagon
        // 226 → 214); one ladder per rotation stays (Hubbard 2×3 on a line of 13: 585 with
        // ladders, 699 with pairs, whose strings route worse).
        let mut pairings: Vec<(bool, bool)> = vec![(false, false)];
        if has_pairs() {
            pairings.push((true, false));
        }
        if has_runs() {
            pairings.push((false, true));
        }
        push_flip_forms(&mut forms, form, false, &pairings, cfg.track);
    }
    // The signed step (`synth::flip::Choice::Signed`): any symmetric formula, the terms that
    // commute with the greedy string (or every term, with none) riding on the ancilla's
    // sign in the first half only. Its halves are written with ladders or pairs, not as
    // networks: a signed half written through `synth::Groups` on a device routes exactly,
    // but after one-qubit fusion in the lowering its rotations no longer line up with the
    // claim's one by one, and the tableau proof (`tableau::equiv`) could not accept the
    // files (an XXZ chain of 3 on a line, Suzuki's step: every file refused, every file
    // simulated exact to 1e-15). Measured cost, quick run: the Hubbard 2×3 step on a 4×4
    // grid 355 → 423 two-qubit gates, 4×4 Heisenberg 338 → 345.
    if cfg.pairs && cfg.signed && !cfg.textbook && controls && small && order != Order::First {
        let mut pairings: Vec<(bool, bool)> = vec![(false, false)];
        if has_pairs() {
            pairings.push((true, false));
        }
        push_flip_forms(&mut forms, form, true, &pairings, cfg.track);
    }
    // The flipped forms' extra starting layouts, searched once for all of them.
    let mut flip_starts: Option<Vec<Vec<u32>>> = None;
    for paired in forms {
        let (factors, rounds) = if paired.coupled && !paired.roam {
            (&search.factors[..1], 0)
        } else {
            (search.factors, search.rounds)
        };
        let mut layouts = candidates.clone();
        if let Some(l) = &bests.plain_layout {
            if !layouts.contains(l) {
                layouts.push(l.clone());
            }
        }
        if paired.flip {
            if flip_starts.is_none() {
                flip_starts = Some(flip_layouts(h, &comp, dev, cfg, order, dt)?);
            }
            for l in flip_starts.iter().flatten() {
                if !layouts.contains(l) {
                    layouts.push(l.clone());
                }
            }
        }
        let mut chains = Vec::new();
        for &factor in factors {
            for &choice in search.choices.iter().filter(|&&c| c != OrderChoice::Sweep) {
                for start in &layouts {
                    let recipe = Recipe {
                        layout: start.clone(),
                        factor,
                        choice,
                        form: paired,
                    };
                    chains.push((recipe, rounds));
                }
            }
        }
        run_chains(&chains)?
            .into_iter()
            .for_each(|k| bests.consider(k));
    }
    // The winners were kept by their recipes: build them again (deterministic), except the
    // measuring routing, which is still at hand.
    let mut first_eval = Some(first_eval);
    let mut build = |(key, recipe): Keyed| -> Result<(Key, Planned), RouteError> {
        let (plan, parts, fwd, marks, _) = match first_eval.take() {
            Some(f) if recipe == first_recipe => f,
            kept => {
                first_eval = kept;
                evaluate(&recipe)?
            }
        };
        Ok((key, (plan, Some((parts, fwd, marks)))))
    };
    let runner_ups: Vec<Vec<u32>> = bests.layouts.iter().map(|(_, l)| l.clone()).collect();
    let [plain, swept] = bests.slots;
    let plain = plain.map(&mut build).transpose()?;
    let swept = swept.map(&mut build).transpose()?;
    let (mut won, mut other) = match (plain, swept) {
        (Some(a), Some(b)) if beats(&b.0, &a.0) => (b.1, Some(a.1)),
        (Some(a), b) => (a.1, b.map(|b| b.1)),
        (None, Some(b)) => (b.1, None),
        (None, None) => unreachable!("at least one candidate"),
    };
    for (plan, _) in std::iter::once(&mut won).chain(other.as_mut()) {
        plan.runner_up_layouts = runner_ups
            .iter()
            .filter(|&l| *l != plan.initial_layout)
            .take(RUNNER_UP_LAYOUTS)
            .cloned()
            .collect();
    }
    Ok((won, other))
}

/// The sign-flip forms of `form` (split's flip, or `signed`), both block orders, each
/// string choice (`flip_particular`: the split's particular string first, or for a signed
/// step the greedy string first and none second) and each `(pairs, groups)` writing; with
/// `track`, each also with its second parity tree on the routed layout
/// ([`StepForm::flip_track`]: Heisenberg 4×4 on a line of 17, quick run, 712 → 638 two-qubit
/// gates; Hubbard 2×3 on the heavy hexagon 537 → 465; neither form wins everywhere, so both
/// compete).
fn push_flip_forms(
    forms: &mut Vec<StepForm>,
    form: StepForm,
    signed: bool,
    pairings: &[(bool, bool)],
    track: bool,
) {
    let tracks: &[bool] = if track { &[false, true] } else { &[false] };
    for &flip_track in tracks {
        for flip_order in [BlockOrder::Layers, BlockOrder::Given] {
            for flip_particular in [!signed, signed] {
                for &(pairs, groups) in pairings {
                    forms.push(StepForm {
                        flip: true,
                        flip_signed: signed,
                        flip_order,
                        flip_particular,
                        flip_track,
                        pairs,
                        groups,
                        ..form
                    });
                }
            }
        }
    }
}

/// Layouts besides the winner's that the search hands on ([`TargetPlan::runner_up_layouts`]).
pub const RUNNER_UP_LAYOUTS: usize = 1;

/// Spare sites tried for the ancilla beside the uncontrolled layout ([`flip_layouts`]).
const FLIP_ANCILLA_SITES: usize = 3;

/// Starting layouts for the sign-flip step: the layout the search picks for the uncontrolled
/// step, with the ancilla on each of the [`FLIP_ANCILLA_SITES`] spare sites beside it that lie
/// nearest the rest (by total hop distance; ties to the lower site).
///
/// The flipped step runs every rotation uncontrolled, twice; the ancilla meets only the two
/// controlled copies of the flip string, through a parity tree gathered next to it. So the
/// layout that suits it is the uncontrolled one, not the controlled search's, which pulls the
/// system around a central ancilla (the 3×4 transverse-field Ising step on a 4×4 brick wall:
/// 164 two-qubit gates from the controlled search's layouts, 158 with these).
fn flip_layouts(
    h: &PauliSum,
    comp: &[u32],
    dev: &Device,
    cfg: &RouteConfig,
    order: Order,
    dt: f64,
) -> Result<Vec<Vec<u32>>, RouteError> {
    let ((plain, _), _) = plan_on_step(h, false, None, dev, cfg, order, dt)?;
    let base = &plain.initial_layout[..h.num_qubits.min(plain.initial_layout.len())];
    let mut spare: Vec<(u64, u32)> = comp
        .iter()
        .copied()
        .filter(|s| !base.contains(s) && base.iter().any(|&b| dev.coupled(b, *s)))
        .map(|s| (base.iter().map(|&b| dev.distance(b, s) as u64).sum(), s))
        .collect();
    spare.sort_unstable();
    Ok(spare
        .into_iter()
        .take(FLIP_ANCILLA_SITES)
        .map(|(_, s)| {
            let mut l = base.to_vec();
            l.push(s);
            l
        })
        .collect())
}

/// Whether the sign-flip step (`synth::flip`) applies to the formula over `groups` (the
/// commuting groups of `formula::term_groups`, on `n` qubits): a symmetric formula
/// and a Pauli string that anticommutes with every term, or with every term of its inner
/// groups (`synth::flip::flip_split`).
fn flippable(groups: &[Vec<(PauliString, f64)>], n: usize, order: Order) -> bool {
    let sizes: Vec<usize> = groups.iter().map(|g| g.len()).collect();
    order != Order::First && crate::synth::flip::flip_split(&groups.concat(), &sizes, n).is_some()
}

/// Two-qubit gates a routed (physical, unlowered) step costs once lowered to `dev`'s native
/// gates with fusion and cancellation: what the campaign will emit for it.
pub fn emitted_two_qubit(c: &Circuit, dev: &Device) -> usize {
    lower_for_output(c, &dev.native)
        .gates
        .iter()
        .filter(|g| g.is_two_qubit())
        .count()
}

/// Units of [`emitted_score`] per two-qubit gate on the device's best coupler.
pub const SCORE_UNIT: f64 = 1000.0;

/// What the search minimises for a routed step: [`emitted_two_qubit`], or, on a device whose
/// calibration gives some coupler its own two-qubit error (`error cx a-b …`) or gives
/// coherence times (`coherence …`), `−ln` of the part of the success estimate that the
/// routing moves, in [`SCORE_UNIT`]s of one two-qubit gate on the best coupler:
/// - each emitted two-qubit gate weighs `ln(1 − e) / ln(1 − e_best)`, with `e` its coupler's
///   error and `e_best` the lowest positive two-qubit error the calibration names;
/// - each one-qubit gate likewise weighs `ln(1 − e) / ln(1 − e_best)` of its own error (a
///   fraction of a unit; summed, then rounded);
/// - with coherence times, the idling adds `idle / −ln(1 − e_best)`, where `idle` is
///   `device::CostWalk::idle_decay` of `c` as a whole circuit (each qubit's wait between its
///   first and last gate, from the gate times of the lowered circuit), so a deeper circuit
///   pays for the qubits that wait through it.
///
/// The sum is `−ln` of the gate and idle parts of the success estimate (`report::costs`)
/// up to one factor, so the search prefers the step that the estimate prefers: a chip with a
/// weak coupler is routed around it when that costs few gates, and on a chip whose qubits
/// decay while they wait a shallower step may win over one with a few fewer CNOTs (counts
/// alone would call a CNOT on the weak coupler as cheap as any other, and waiting free).
/// With uniform errors and no coherence times, or no two-qubit error to scale by, the weights
/// are all one and the score is the count.
pub fn emitted_score(c: &Circuit, dev: &Device) -> usize {
    emitted_score_and_depth(c, dev, 1.0).0
}

/// [`emitted_score`] and the two-qubit depth of what is written, from one lowering, for a
/// circuit `c` that stands for one of `repeats` (≥ 1) repetitions in a row: a Trotter step
/// of a campaign whose circuits run `repeats` steps on average. Its idle term is then the
/// circuit's share of the whole run's: the first and last repetitions wait as the whole
/// circuit does (`CostWalk::idle_decay`), each one between waits the whole repetition through
/// (`CostWalk::open_idle_decay`, every qubit it touches alive on both sides), so the share is
/// `(idle + (repeats − 1) · open) / repeats`. With `repeats` 1 it is [`emitted_score`].
fn emitted_score_and_depth(c: &Circuit, dev: &Device, repeats: f64) -> (usize, usize) {
    let lowered = lower_for_output(c, &dev.native);
    let k = crate::circuit::metrics::counts(&lowered);
    let Some(best) = score_reference(dev) else {
        return (k.two_qubit, k.two_qubit_depth);
    };
    // Units per unit of `−ln`: `ln(1 − e)` and this are both negative.
    let per_unit = SCORE_UNIT / (-best).ln_1p();
    let mut cache: std::collections::HashMap<(u32, u32, bool), usize> = Default::default();
    let gates: usize = lowered
        .gates
        .iter()
        .filter(|g| g.is_two_qubit())
        .map(|g| {
            let qs = g.qubits();
            let key = (
                qs[0].min(qs[1]),
                qs[0].max(qs[1]),
                matches!(g, crate::circuit::Gate::Cz(..)),
            );
            *cache
                .entry(key)
                .or_insert_with(|| ((-dev.gate_error(g)).ln_1p() * per_unit).round() as usize)
        })
        .sum();
    // One-qubit gates weigh `ln(1 − e)` of their own error too, summed before rounding (each
    // is a small fraction of a unit): the forms the search compares differ in them (a flipped
    // step writes each rotation twice), and the estimate counts them.
    let model = crate::device::CostModel::new(dev);
    let one_qubit: f64 = lowered
        .gates
        .iter()
        .filter(|g| !g.is_two_qubit() && !matches!(g, crate::circuit::Gate::Measure(..)))
        .map(|g| (-model.error(g)).ln_1p())
        .sum();
    let gates = gates.saturating_add((one_qubit * per_unit).round() as usize);
    if !has_coherence(dev) {
        return (gates, k.two_qubit_depth);
    }
    let mut walk = model.walk(lowered.num_qubits);
    // Only the schedule is walked: the gate errors are in `gates` already.
    let untallied = crate::device::Tally {
        two_qubit: 0,
        one_qubit: 0,
        success: 1.0,
    };
    walk.add_tallied(&lowered.gates, &untallied);
    // `as` saturates (a coherence time of a femtosecond gives an idle decay past usize).
    let repeats = repeats.max(1.0);
    let decay = (walk.idle_decay() + (repeats - 1.0) * walk.open_idle_decay()) / repeats;
    let idle = (decay * -per_unit).round() as usize;
    (gates.saturating_add(idle), k.two_qubit_depth)
}

/// Whether [`emitted_score`] weighs CNOTs by `dev`'s calibration (coupler errors of their
/// own, or coherence times) rather than counting them.
pub fn weighs_calibration(dev: &Device) -> bool {
    score_reference(dev).is_some()
}

/// Whether [`emitted_score`] weighs a step's idling on `dev`: coherence times and a
/// two-qubit error to scale them by.
pub fn scores_idling(dev: &Device) -> bool {
    has_coherence(dev) && score_reference(dev).is_some()
}

/// Whether `dev`'s calibration gives any coherence time.
fn has_coherence(dev: &Device) -> bool {
    dev.calibration.shortest_coherence_ns().is_some()
}

/// The lowest positive two-qubit error of `dev`'s calibration, when some coupler has its own
/// or coherence times are given: the reference of [`emitted_score`]'s weights (`None`: the
/// score is the plain count).
fn score_reference(dev: &Device) -> Option<f64> {
    let cal = &dev.calibration;
    if cal.link_error_rate.is_empty() && !has_coherence(dev) {
        return None;
    }
    cal.link_error_rate
        .values()
        .chain(["cx", "cz"].iter().filter_map(|k| cal.error_rate.get(*k)))
        .copied()
        .filter(|&e| e > 0.0 && e < 1.0)
        .min_by(f64::total_cmp)
}

/// SWAP insertion, lowering, fusion and cancellation of one logical circuit; `verify_ir` after
/// each pass (coupling after routing; coupling and native names after lowering, which is
/// [`DeviceCircuit::checked`]). An error here is a compiler bug.
pub fn to_device(
    logical: &Circuit,
    plan: &TargetPlan,
    dev: &Device,
    cfg: &RouteConfig,
) -> Result<Routed, IrError> {
    let n = logical.num_qubits;
    if n > plan.initial_layout.len() {
        return Err(IrError {
            index: 0,
            gate: None,
            message: format!(
                "the circuit has {n} qubits but the plan places {}",
                plan.initial_layout.len()
            ),
        });
    }
    verify_ir(logical, &Rules::default())?;
    let mut params = cfg.swap_params();
    params.hub = plan.ancilla.filter(|&a| (a as usize) < n);
    params.hub_factor = plan.ancilla_swap_factor;
    params.commute_ahead = plan.commute_ahead;
    let mut initial = plan.initial_layout[..n].to_vec();
    let mut routed = insert_swaps(logical, &initial, dev, &params);
    if cfg.refine_per_circuit {
        let back = reversed(logical);
        let mut from = routed.final_layout.clone();
        for _ in 0..cfg.refine_rounds {
            let start = insert_swaps(&back, &from, dev, &params).final_layout;
            let again = insert_swaps(logical, &start, dev, &params);
            from = again.final_layout.clone();
            if again.swaps < routed.swaps {
                routed = again;
                initial = start;
            }
        }
    }
    let coupled = |a: u32, b: u32| dev.coupled(a, b);
    verify_ir(
        &routed.circuit,
        &Rules {
            coupled: Some(&coupled),
            native: None,
        },
    )?;
    let lowered = DeviceCircuit::checked(lower_for_output(&routed.circuit, &dev.native), dev)?;
    Ok(Routed {
        circuit: lowered,
        initial_layout: initial,
        final_layout: routed.final_layout,
        swaps: routed.swaps,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::circuit::Gate;
    use crate::device::{lattice, Calibration, NativeSet};
    use crate::pauli::Pauli;

    /// An invented 6-qubit sum: a Heisenberg ring with fields and two longer strings, so every
    /// level-3 form (pairs, runs, coupled networks) has something to do.
    fn model() -> PauliSum {
        let s = |f: &[(usize, Pauli)]| PauliString::from_factors(f).1;
        let mut h = PauliSum::new(6);
        for q in 0..6 {
            let r = (q + 1) % 6;
            for p in [Pauli::X, Pauli::Y, Pauli::Z] {
                h.add(s(&[(q, p), (r, p)]), 0.5 + 0.1 * q as f64);
            }
            h.add(s(&[(q, Pauli::Z)]), 0.3 - 0.05 * q as f64);
        }
        h.add(s(&[(0, Pauli::X), (2, Pauli::Z), (4, Pauli::Y)]), 0.25);
        h.add(s(&[(1, Pauli::Y), (3, Pauli::X), (5, Pauli::Z)]), -0.15);
        h
    }

    #[test]
    fn the_search_keeps_the_best_distinct_layouts_in_order() {
        // Keys arrive as the search meets them; the list holds each layout once at its best
        // key, best first, ties to the earlier, at most RUNNER_UP_LAYOUTS + 1 of them; the
        // slots keep the best plain and the best swept recipe.
        let recipe = |l: u32, choice: OrderChoice| Recipe {
            layout: vec![l, l + 1],
            factor: 1.0,
            choice,
            form: StepForm::default(),
        };
        let mut b = Bests::default();
        for (key, l, choice) in [
            ((50, 0, 0.0), 0, OrderChoice::Default),
            ((40, 5, 1.0), 2, OrderChoice::Default),
            ((40, 5, 1.0), 4, OrderChoice::Default),
            ((45, 0, 0.0), 0, OrderChoice::Walk),
            ((40, 5, 0.5), 6, OrderChoice::Sweep),
            ((60, 0, 0.0), 8, OrderChoice::Default),
            ((38, 0, 0.0), 2, OrderChoice::Walk),
            ((70, 0, 0.0), 6, OrderChoice::Default),
        ] {
            b.consider((key, recipe(l, choice)));
        }
        let layouts: Vec<(usize, u32)> = b.layouts.iter().map(|(k, l)| (k.0, l[0])).collect();
        assert_eq!(RUNNER_UP_LAYOUTS, 1);
        assert_eq!(layouts, vec![(38, 2), (40, 6)]);
        let [plain, swept] = &b.slots;
        assert_eq!(plain.as_ref().unwrap().0, (38, 0, 0.0));
        assert_eq!(plain.as_ref().unwrap().1.layout, vec![2, 3]);
        assert_eq!(swept.as_ref().unwrap().1.layout, vec![6, 7]);
        assert_eq!(b.plain_layout, Some(vec![2, 3]));
        // The score first, then the shallower step, then the layout cost; equal keys tie.
        assert!(beats(&(39, 9, 9.0), &(40, 0, 0.0)));
        assert!(beats(&(40, 4, 2.0), &(40, 5, 1.0)));
        assert!(beats(&(40, 5, 0.0), &(40, 5, 0.5)));
        assert!(!beats(&(40, 5, 0.5), &(40, 5, 0.5)));
    }

    #[test]
    fn a_cnot_on_a_weak_coupler_scores_by_its_error() {
        // A line of three with `cx` error 0.01, and 0.02 on the coupler 0–1: a CNOT there
        // weighs ln(0.98) / ln(0.99) = 2.0101 CNOTs on 1–2 (computed by hand), so the score of
        // one of each is 1000 + 2010 units. Without the coupler's own error, the count.
        let mut cal = Calibration::default();
        cal.error_rate.insert("cx".into(), 0.01);
        let even = Device::new("line", 3, &[(0, 1), (1, 2)], NativeSet::rz_sx_x_cx(), cal);
        let mut weak = even.clone();
        weak.calibration
            .link_error_rate
            .insert(("cx".into(), 0, 1), 0.02);
        let mut c = Circuit::new(3, 0);
        c.extend([Gate::Cx(0, 1), Gate::H(1), Gate::Cx(2, 1)]);
        assert_eq!(emitted_score(&c, &even), 2);
        assert_eq!(emitted_score(&c, &weak), 1000 + 2010);
        // A SWAP on the weak coupler is lowered to three CNOTs there.
        let mut s = Circuit::new(3, 0);
        s.push(Gate::Swap(1, 0));
        assert_eq!(emitted_score(&s, &weak), 3 * 2010);
        // With `sx` error 0.001, the `h` (lowered to `rz sx rz`, `rz` virtual and free) adds
        // ln(0.999) / ln(0.99) = 0.09955 of a CNOT (computed by hand): 100 units. Where CNOTs
        // are only counted, one-qubit gates are not.
        let mut noisy = weak.clone();
        noisy.calibration.error_rate.insert("sx".into(), 0.001);
        assert_eq!(emitted_score(&c, &noisy), 1000 + 2010 + 100);
        let mut even_noisy = even.clone();
        even_noisy.calibration.error_rate.insert("sx".into(), 0.001);
        assert_eq!(emitted_score(&c, &even_noisy), 2);
    }

    #[test]
    fn a_waiting_qubit_scores_by_its_coherence_time() {
        // A line of four, `cx` error 0.01 and 300 ns, coherence 100 µs. `cx 0 1; cx 1 2; cx 0 1`
        // lasts 900 ns. As a whole circuit only qubit 0 waits between its gates, 300 ns: an
        // idle decay of 0.003, which weighs 0.003 / −ln(0.99) = 0.29850 CNOTs (computed by
        // hand), 298 units beside the 3000 of the three CNOTs. Repeated in a row (the middle
        // repetitions of a step), qubit 0 waits 300 ns and qubit 2 600 ns of each: 0.009, 0.89549
        // CNOTs; over 3 repetitions the share is (0.003 + 2 · 0.009) / 3 = 0.007, 0.69649 CNOTs,
        // 696 units. Side by side (`cx 0 1; cx 2 3`) nobody waits: 2000. Without the coherence
        // time they are the counts.
        let mut cal = Calibration::default();
        cal.error_rate.insert("cx".into(), 0.01);
        cal.time_ns.insert("cx".into(), 300.0);
        let timeless = Device::new("line", 4, &lattice::line(4), NativeSet::rz_sx_x_cx(), cal);
        let mut dev = timeless.clone();
        dev.calibration.coherence_ns = Some(100_000.0);
        let mut serial = Circuit::new(4, 0);
        serial.extend([Gate::Cx(0, 1), Gate::Cx(1, 2), Gate::Cx(0, 1)]);
        let mut side = Circuit::new(4, 0);
        side.extend([Gate::Cx(0, 1), Gate::Cx(2, 3)]);
        assert_eq!(emitted_score(&serial, &dev), 3000 + 298);
        assert_eq!(emitted_score_and_depth(&serial, &dev, 3.0).0, 3000 + 696);
        assert_eq!(emitted_score(&side, &dev), 2000);
        assert_eq!(emitted_score_and_depth(&side, &dev, 3.0).0, 2000);
        assert_eq!(emitted_score(&serial, &timeless), 3);
        assert_eq!(emitted_score(&side, &timeless), 2);
    }

    #[test]
    fn the_layout_search_does_not_depend_on_the_thread_count() {
        // The search's chains run in parallel and are then taken in a fixed order: the chosen
        // plan and its routed step must be the same for one, two and three threads, with
        // every candidate form of the highest level and the full search.
        let h = model();
        let dev = Device::new(
            "grid",
            12,
            &lattice::grid(3, 4),
            NativeSet::from_names(&["rz", "sx", "x", "cx"]).unwrap(),
            Calibration::default(),
        );
        let cfg = crate::pipeline::OptLevel::MAX.route_config(&RouteConfig::default());
        let run = |threads: usize| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap()
                .install(|| {
                    let (plan, step) =
                        plan_and_route_step(&h, &dev, &cfg, Order::Second, 0.2).unwrap();
                    let pieces: Vec<Circuit> = step.pieces(3).into_iter().cloned().collect();
                    (format!("{plan:?}"), pieces)
                })
        };
        let one = run(1);
        assert!(one.1.iter().any(|c| !c.gates.is_empty()));
        for threads in [2, 3] {
            let other = run(threads);
            assert_eq!(one.0, other.0, "the plan differs with {threads} threads");
            assert!(
                one.1 == other.1,
                "the routed step differs with {threads} threads"
            );
        }
    }
}
