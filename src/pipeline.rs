//! The map of the compiler: the passes, in order, from a Pauli sum to OpenQASM 3 text.
//!
//! In: a [`PauliSum`], a [`Spec`] and a target. Out: a [`Compiled`] campaign: the plan and one
//! program text per circuit, in plan order. Passes (each a free function, verified after it in
//! tests and debug builds):
//!
//! 1. `formula::order_terms` + `formula::evolution`: the rotation program per time point;
//! 2. all-to-all target: `family::build_jobs`: Hadamard-test circuits (synthesis by `synth`,
//!    clean-up by `circuit::cancel`), logical qubits, ancilla last; `verify_ir`, done;
//! 3. device target: `route::plan_and_route_step` chooses the layout, the term order inside
//!    commuting groups (`TargetPlan::terms`, which leaves every formula exactly equal) and the
//!    ladders, scoring candidates on one Trotter step of the campaign, and keeps the winner's
//!    routing of that step (`route::reuse`: it and its mirror image, or the SWAPs home, repeat
//!    `k·R` times); `route::DeviceCampaign` lowers the step's pieces to the native gates once
//!    (fusion and cancellation, verified), and `family::frames` gives each circuit's
//!    preparation and readout, which it routes and stitches around the pieces;
//!
//! With `Spec::control = Prep` (`family::control`: |0…0⟩ shown to be an eigenstate of every
//! factor of the formula) the evolution is synthesised without a control and the ancilla meets
//! only the controlled state preparation in each circuit's prefix and suffix; on a device
//! `route::plan_and_route_free_step` routes that uncontrolled step. The `evolution` family has
//! no ancilla at all (`route::plan_and_route_plain_step`).
//!
//! 4. `qasm::write` (logical `q[k]` on all-to-all); on a device each piece's text is written
//!    once and every program is assembled from those texts (`route::campaign`), so `costs.swaps`
//!    there counts the SWAPs routing inserted (the step's once per step), before the peephole
//!    pass folds the mirror seams.
//!
//! Nothing here does I/O; the command layer writes the files.

use crate::circuit::metrics::counts;
use crate::circuit::verify::{verify_ir, IrError, Rules};
use crate::circuit::{Circuit, Gate};
use crate::device::Device;
use crate::family::control::Control;
use crate::family::plan::Family;
use crate::family::plan::{
    CircuitEntry, Costs, DeviceInfo, FormulaInfo, HamiltonianInfo, Plan, TermInfo, PLAN_FORMAT,
};
use crate::family::{build_jobs, frames_with, Spec};
use crate::pauli::PauliSum;
use crate::qasm::{write, Addressing};
use crate::route::{
    plan_and_route_free_step, plan_and_route_plain_step, plan_and_route_step, DeviceCampaign,
    RouteConfig,
};
use rayon::prelude::*;

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

/// Why compilation stopped: the problem does not fit the target (bad input), or a pass broke
/// an IR invariant (a compiler bug).
#[derive(Debug)]
pub enum CompileError {
    DoesNotFit(String),
    /// The predicted peak memory exceeds what the machine has (see [`predicted_memory`]).
    TooLarge(String),
    Ir(IrError),
}

impl From<IrError> for CompileError {
    fn from(e: IrError) -> CompileError {
        CompileError::Ir(e)
    }
}

impl From<CompileError> for crate::error::Error {
    fn from(e: CompileError) -> crate::error::Error {
        match e {
            CompileError::DoesNotFit(m) => crate::error::Error::usage(
                crate::lang::codes::Code::UsageInput,
                m,
                Some("choose a larger device, or one whose coupling graph is connected"),
            ),
            CompileError::TooLarge(m) => crate::error::Error::usage(
                crate::lang::codes::Code::UsageLimit,
                m,
                Some("use fewer --points or --steps, a lower --order, or fewer terms (a cutoff on small coefficients)"),
            ),
            CompileError::Ir(e) => crate::error::Error::Ir(e),
        }
    }
}

const GIB: f64 = (1u64 << 30) as f64;

/// What a campaign will cost before any of it is built: an upper estimate from the sizes alone.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Prediction {
    pub circuits: usize,
    /// Rotations over all circuits, before merging (merging only lowers it).
    pub rotations: u128,
    /// Gates over all circuits: per rotation a basis change and its undoing, a CNOT ladder and
    /// its mirror, and the controlled `rz` (4 gates); on a device, three times that for SWAPs
    /// and native lowering (a bound from the routing benchmarks, common practice).
    pub gates: u128,
    /// Peak bytes: every gate held as IR and as OpenQASM text, plus every rotation.
    pub bytes: u128,
}

/// Predicts the size of the campaign `spec` makes of `h` ([`Prediction`]).
pub fn predicted_memory(h: &PauliSum, spec: &Spec, device: bool) -> Prediction {
    let m = h.terms.len() as u128;
    let weight: u128 = h.terms.keys().map(|p| p.weight() as u128).sum();
    let per_step = match spec.order {
        crate::formula::Order::First => 1,
        crate::formula::Order::Second => 2,
        crate::formula::Order::Fourth => 10,
    };
    let per_circuit = |k: u128| k * spec.steps_per_dt as u128 * per_step;
    let reads_per_point: u128 = match spec.family {
        crate::family::plan::Family::Krylov => 2 * (1 + m.min(4096)),
        _ => 2 * spec.states.len().max(1) as u128,
    };
    let points = spec.points as u128;
    let circuits = (points.saturating_sub(1) * reads_per_point) as usize;
    let steps: u128 = (1..points).map(per_circuit).sum::<u128>() * reads_per_point;
    let rotations = steps * m;
    // Basis change + undo ≤ 2·2w, ladder + mirror 2(w−1), controlled rz 4: at most 6w + 2.
    let mut gates = steps * (6 * weight + 2 * m);
    if device {
        gates *= 3;
    }
    let bytes = gates * (std::mem::size_of::<Gate>() as u128 + 24)
        + rotations * std::mem::size_of::<crate::formula::Rotation>() as u128;
    Prediction {
        circuits,
        rotations,
        gates,
        bytes,
    }
}

/// A compiled campaign: the plan and, for every circuit in plan order, its program text.
pub struct Compiled {
    pub plan: Plan,
    pub programs: Vec<String>,
    /// The final circuits on the all-to-all target (for callers that want to simulate without
    /// re-reading the files). Empty on a device: its circuits are built as text from shared
    /// pieces (`route::campaign`), and at utility scale holding them as IR too would double the
    /// memory (tens of gigabytes); read them back from `programs` with `qasm::read`.
    pub circuits: Vec<Circuit>,
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

/// One circuit after the target-specific passes, with what the plan says about it.
struct Finished {
    id: String,
    k: usize,
    time: f64,
    part: Option<crate::family::plan::Part>,
    state: usize,
    group: Option<usize>,
    reads: Vec<crate::family::plan::Read>,
    num_qubits: usize,
    num_clbits: usize,
    output: Output,
    costs: Costs,
    final_layout: Vec<u32>,
}

/// What a target hands to emission: the circuit (written here) or its finished text.
enum Output {
    Circuit(Circuit),
    Text(String),
}

/// The leading comment lines of a circuit's program.
fn header_comments(
    id: &str,
    part: Option<crate::family::plan::Part>,
    k: usize,
    time: f64,
    device: Option<&DeviceInfo>,
) -> Vec<String> {
    let mut comments = match part {
        Some(part) => {
            let part = if part == crate::family::plan::Part::Re {
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

/// Runs the passes for any target.
pub fn compile_for(
    h: &PauliSum,
    source: &str,
    spec: &Spec,
    target: &Target,
) -> Result<Compiled, CompileError> {
    let predicted = predicted_memory(h, spec, matches!(target, Target::Device { .. }));
    if let Some(avail) = crate::sim::available_memory_bytes() {
        if predicted.bytes > avail {
            return Err(CompileError::TooLarge(format!(
                "this campaign needs about {:.1} GiB ({} circuits, about {:.2e} rotations and {:.2e} gates) but only {:.1} GiB is available",
                predicted.bytes as f64 / GIB,
                predicted.circuits,
                predicted.rotations as f64,
                predicted.gates as f64,
                avail as f64 / GIB
            )));
        }
    }
    match target {
        Target::AllToAll => {
            let default_ladder = |r: &crate::formula::Rotation| crate::synth::default_ladder(r);
            let done = build_jobs(h, spec, &default_ladder)
                .into_par_iter()
                .map(|j| {
                    verify_ir(&j.circuit, &Rules::default())?;
                    Ok(Finished {
                        costs: counts(&j.circuit).into(),
                        id: j.id,
                        k: j.k,
                        time: j.time,
                        part: j.part,
                        state: j.state,
                        group: j.group,
                        reads: j.reads,
                        num_qubits: j.circuit.num_qubits,
                        num_clbits: j.circuit.num_clbits,
                        output: Output::Circuit(j.circuit),
                        final_layout: Vec::new(),
                    })
                })
                .collect::<Result<Vec<_>, IrError>>()?;
            Ok(finish(h, source, spec, done, None, Addressing::Logical))
        }
        Target::Device { device, config } => {
            // One step of length dt / R, routed once (while the layout is chosen) and reused by
            // every circuit: time point k runs k·R blocks of it (`route::reuse`).
            let step_dt = spec.dt / spec.steps_per_dt.max(1) as f64;
            let (tp, step) = match spec.control {
                // Plain evolution circuits have no ancilla at all.
                _ if spec.family == Family::Evolution => {
                    plan_and_route_plain_step(h, device, config, spec.order, step_dt)
                }
                Control::Evolution => plan_and_route_step(h, device, config, spec.order, step_dt),
                // The control-free form routes an uncontrolled step; the ancilla meets only the
                // qubits its controlled state preparation touches, at the start and the end.
                Control::Prep => {
                    let partners = prep_partners(&spec.states);
                    plan_and_route_free_step(h, &partners, device, config, spec.order, step_dt)
                }
            }
            .map_err(CompileError::DoesNotFit)?;
            let info = DeviceInfo {
                name: device.name.clone(),
                num_qubits: device.num_qubits,
                native: device.native.names.clone(),
                initial_layout: tp.initial_layout.clone(),
            };
            let campaign = DeviceCampaign::new(step, &tp, device, config)?;
            // On a device the controlled preparation joins set bits through their index
            // neighbours (`family::control::Joins`).
            let done = frames_with(h, spec, crate::family::control::Joins::Neighbours)
                .into_par_iter()
                .map(|f| {
                    let comments = header_comments(&f.id, f.part, f.k, f.time, Some(&info));
                    let e = campaign.emit(
                        &f.prefix,
                        f.k * spec.steps_per_dt,
                        &f.suffix,
                        f.num_clbits,
                        &comments,
                    )?;
                    Ok(Finished {
                        id: f.id,
                        k: f.k,
                        time: f.time,
                        part: f.part,
                        state: f.state,
                        group: f.group,
                        reads: f.reads,
                        num_qubits: device.num_qubits,
                        num_clbits: f.num_clbits,
                        output: Output::Text(e.text),
                        costs: e.costs,
                        final_layout: e.final_layout,
                    })
                })
                .collect::<Result<Vec<_>, IrError>>()?;
            Ok(finish(
                h,
                source,
                spec,
                done,
                Some(info),
                Addressing::Physical,
            ))
        }
    }
}

/// The system qubits the ancilla meets in the controlled state preparation of any of `states`
/// (`family::control::ancilla_partners`), ascending.
fn prep_partners(states: &[String]) -> Vec<usize> {
    let mut touched: Vec<usize> = states
        .iter()
        .flat_map(|s| {
            crate::family::control::ancilla_partners(s, s.chars().count() as crate::circuit::Qubit)
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
    mut done: Vec<Finished>,
    device: Option<DeviceInfo>,
    addressing: Addressing,
) -> Compiled {
    let programs: Vec<String> = done
        .par_iter_mut()
        .map(|f| match &mut f.output {
            Output::Circuit(c) => write(
                c,
                addressing,
                &header_comments(&f.id, f.part, f.k, f.time, device.as_ref()),
            ),
            Output::Text(t) => std::mem::take(t),
        })
        .collect();
    let mut entries = Vec::with_capacity(done.len());
    let mut circuits = Vec::with_capacity(done.len());
    for f in done {
        entries.push(CircuitEntry {
            file: format!("{}.qasm", f.id),
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
        });
        if let Output::Circuit(c) = f.output {
            circuits.push(c);
        }
    }
    let plan = Plan {
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
        points: spec.points,
        control: spec.control,
        device,
        shard: None,
        circuits: entries,
    };
    Compiled {
        plan,
        programs,
        circuits,
    }
}
