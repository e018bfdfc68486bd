//! Routing: from logical circuits to circuits a device can run.
//!
//! In: a Pauli sum (for planning), logical circuits (system qubits `0..n`, the Hadamard-test
//! ancilla `n` if any) and a [`Device`]. Out: [`Routed`] circuits on physical qubits with native
//! gates only, every two-qubit gate on a coupled pair, plus the initial and final layouts.
//!
//! Two steps, because the CNOT ladders must be chosen before synthesis:
//!
//! 1. [`plan_target`] (once per campaign) picks the initial layout and, with it, how each
//!    rotation's ladder runs ([`TargetPlan::ladder`]): the root is the support qubit nearest the
//!    ancilla, so the controlled `rz` meets the ancilla without SWAPs where the layout allows, and
//!    the rest of the ladder follows nearest neighbours back from the root. Layout candidates
//!    (greedy around the centre, seeded random, each annealed; see [`layout`]) are scored
//!    by routing a one-Strang-step skeleton of the campaign, refined by bidirectional passes
//!    (route forward, route the reversed circuit from the final layout, start again from where
//!    it ends), with and without a preference for moving the ancilla (see [`swap`]), and, with
//!    an ancilla, with the terms in the device-aware order of [`order`] (each commuting group
//!    swept so the ancilla walks a short path, ladders rooted where the walk meets each term,
//!    or nearest the ancilla's initial site) or in the default order; the one with the fewest
//!    SWAPs wins. All circuits of a campaign then share that initial layout, which plan.json
//!    records once, and follow [`TargetPlan::terms`], which computes exactly what
//!    `formula::order_terms` would (a permutation inside commuting groups).
//! 2. [`to_device`] (per circuit): SWAP insertion ([`swap`]), lowering to native gates with
//!    fusion and cancellation ([`crate::lower`]), `verify_ir` after each pass.
//!
//! Invariant: `Routed::circuit` applied to a logical state placed by `initial_layout` equals the
//! logical circuit's result placed by `final_layout`, global phase included ([`check`] verifies
//! this by simulation); measured bits read the physical qubit that holds the measured qubit.

pub mod check;
pub mod layout;
pub mod order;
pub mod swap;

use crate::circuit::cancel::cancel_inverses;
use crate::circuit::verify::{verify_ir, IrError, Rules};
use crate::circuit::{Circuit, Gate, Qubit};
use crate::device::{Device, UNREACHABLE};
use crate::formula::{order_terms, step, Order, Rotation};
use crate::lower::lower_to_native;
use crate::pauli::{PauliString, PauliSum};
use crate::synth::{default_ladder, pauli_rotation_along};
pub use check::{compact, routing_error};
pub use order::{device_order, order_for_device, DeviceOrder};
use swap::{insert_swaps, reversed, SwapParams};

/// Knobs of layout search and SWAP insertion. Same config and inputs, same output.
#[derive(Clone, Debug)]
pub struct RouteConfig {
    pub seed: u64,
    /// Layout candidates: one greedy, the rest seeded random, each annealed.
    pub layout_trials: usize,
    /// Bidirectional refinement rounds per candidate.
    pub refine_rounds: usize,
    /// Also refine the layout per circuit in [`to_device`] (then circuits may start from
    /// different layouts; off by default so the campaign shares one).
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
        }
    }
}

impl RouteConfig {
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
    /// The device-aware term order and ladder roots, if the plan uses one ([`order`]).
    pub order: Option<DeviceOrder>,
    /// Row-major hop distances between the initial sites of the logical qubits.
    dist: Vec<u32>,
}

impl TargetPlan {
    /// A plan with a given layout (checked: distinct sites, all in one component of `dev`).
    pub fn with_layout(
        num_system: usize,
        ancilla: bool,
        dev: &Device,
        initial_layout: Vec<u32>,
    ) -> Result<TargetPlan, String> {
        let n = num_system + ancilla as usize;
        if initial_layout.len() != n {
            return Err(format!(
                "the layout places {} qubits; the problem has {n}",
                initial_layout.len()
            ));
        }
        let mut dist = vec![0; n * n];
        for i in 0..n {
            if initial_layout[i] as usize >= dev.num_qubits {
                return Err(format!(
                    "physical qubit {} does not exist on `{}`",
                    initial_layout[i], dev.name
                ));
            }
            for j in 0..n {
                let d = dev.distance(initial_layout[i], initial_layout[j]);
                if i != j && d == 0 {
                    return Err(format!(
                        "physical qubit {} holds two logical qubits",
                        initial_layout[i]
                    ));
                }
                if d == UNREACHABLE {
                    return Err(format!(
                        "physical qubits {} and {} are not connected on `{}`",
                        initial_layout[i], initial_layout[j], dev.name
                    ));
                }
                dist[i * n + j] = d;
            }
        }
        Ok(TargetPlan {
            initial_layout,
            num_system,
            ancilla: ancilla.then_some(num_system as u32),
            ancilla_swap_factor: 1.0,
            order: None,
            dist,
        })
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
}

/// On `benches/routing.rs` the walk's roots win on most pairs and the initial-site roots on a
/// few; the default order is kept as a fallback, so the skeleton never routes worse than it.
const ORDER_CHOICES: [OrderChoice; 3] = [
    OrderChoice::Walk,
    OrderChoice::WalkNearestRoots,
    OrderChoice::Default,
];

/// A circuit on the device.
#[derive(Clone, Debug)]
pub struct Routed {
    /// Physical qubits `0..dev.num_qubits`, native gates only; each measurement reads the
    /// physical qubit holding the measured logical qubit at the end.
    pub circuit: Circuit,
    /// Logical → physical at the start.
    pub initial_layout: Vec<u32>,
    /// Logical → physical at the end.
    pub final_layout: Vec<u32>,
    pub swaps: usize,
}

/// One Strang step of the campaign's rotations, controlled by the ancilla if any: the circuit
/// layout candidates are scored on.
fn skeleton(h: &PauliSum, plan: &TargetPlan) -> Circuit {
    let n = plan.initial_layout.len();
    let rotations = step(&plan.terms(h), Order::Second, 1.0);
    let mut c = Circuit::new(n, 0);
    if let Some(a) = plan.ancilla {
        c.push(Gate::H(a));
    }
    for r in &rotations {
        c.extend(pauli_rotation_along(r, plan.ancilla, &plan.ladder(r)));
    }
    cancel_inverses(&mut c);
    c
}

/// Picks the initial layout and ladder plan for `h` (plus the ancilla if `ancilla`) on `dev`.
/// Errors are user-facing: the device is too small, or its coupling graph is split into parts
/// none of which is large enough.
pub fn plan_target(
    h: &PauliSum,
    ancilla: bool,
    dev: &Device,
    cfg: &RouteConfig,
) -> Result<TargetPlan, String> {
    let n_sys = h.num_qubits;
    let n = n_sys + ancilla as usize;
    let with_anc = if ancilla {
        format!("{n_sys} qubits of the Hamiltonian plus the Hadamard-test ancilla")
    } else {
        format!("{n_sys} qubits of the Hamiltonian")
    };
    if n > dev.num_qubits {
        return Err(format!(
            "device `{}` has {} qubits; the problem needs {n} ({with_anc})",
            dev.name, dev.num_qubits
        ));
    }
    if n == 0 {
        return TargetPlan::with_layout(0, false, dev, Vec::new());
    }
    let comps = dev.components();
    let comp = match comps.first() {
        Some(c) if c.len() >= n => c.clone(),
        _ => {
            return Err(format!(
                "the coupling graph of `{}` is disconnected and its largest connected part has {} \
                 qubits; the problem needs {n} connected qubits ({with_anc})",
                dev.name,
                comps.first().map_or(0, |c| c.len())
            ))
        }
    };
    let w = layout::interaction_weights(h, ancilla);
    let mut candidates: Vec<Vec<u32>> = Vec::new();
    for t in 0..cfg.layout_trials.max(1) {
        let trial_seed = cfg.seed.wrapping_mul(0x9e37_79b9).wrapping_add(t as u64);
        let mut l = if t == 0 {
            layout::greedy_layout(&w, n, &comp, dev, ancilla)
        } else {
            layout::random_layout(n, &comp, trial_seed)
        };
        layout::anneal(&w, &mut l, &comp, dev, trial_seed);
        if !candidates.contains(&l) {
            candidates.push(l);
        }
    }
    let mut params = cfg.swap_params();
    params.hub = ancilla.then_some(n_sys as u32);
    let factors: &[f64] = if ancilla {
        &ANCILLA_SWAP_FACTORS
    } else {
        &[1.0]
    };
    let choices: &[OrderChoice] = if cfg.device_order && ancilla {
        &ORDER_CHOICES
    } else {
        &[OrderChoice::Default]
    };
    // The device order depends only on the layout: computed once per layout tried.
    let mut orders: std::collections::BTreeMap<Vec<u32>, DeviceOrder> = Default::default();
    let mut best: Option<((usize, f64), TargetPlan)> = None;
    for (&factor, &choice) in factors
        .iter()
        .flat_map(|f| choices.iter().map(move |c| (f, c)))
    {
        params.hub_factor = factor;
        for start in &candidates {
            let mut l = start.clone();
            for round in 0..=cfg.refine_rounds {
                let mut plan = TargetPlan::with_layout(n_sys, ancilla, dev, l.clone())?;
                if choice != OrderChoice::Default {
                    let mut o = orders
                        .entry(l.clone())
                        .or_insert_with(|| device_order(h, &plan, dev))
                        .clone();
                    if choice == OrderChoice::WalkNearestRoots {
                        o.roots.clear();
                    }
                    plan.order = Some(o);
                }
                plan.ancilla_swap_factor = factor;
                let sk = skeleton(h, &plan);
                let fwd = insert_swaps(&sk, &l, dev, &params);
                let key = (fwd.swaps, layout::layout_cost(&w, &l, dev));
                let better = best
                    .as_ref()
                    .is_none_or(|(k, _)| key.0 < k.0 || (key.0 == k.0 && key.1 < k.1 - 1e-12));
                if better {
                    best = Some((key, plan));
                }
                if round == cfg.refine_rounds {
                    break;
                }
                l = insert_swaps(&reversed(&sk), &fwd.final_layout, dev, &params).final_layout;
            }
        }
    }
    Ok(best.expect("at least one candidate").1)
}

/// SWAP insertion, lowering, fusion and cancellation of one logical circuit; `verify_ir` after
/// each pass (coupling after routing; coupling and native names after lowering). An error here
/// is a compiler bug.
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
    let lowered = lower_to_native(&routed.circuit, &dev.native);
    verify_ir(
        &lowered,
        &Rules {
            coupled: Some(&coupled),
            native: Some(&dev.native.names),
        },
    )?;
    Ok(Routed {
        circuit: lowered,
        initial_layout: initial,
        final_layout: routed.final_layout,
        swaps: routed.swaps,
    })
}
