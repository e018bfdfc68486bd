//! The map of the compiler: the passes, in order, from a Pauli sum to OpenQASM 3 text.
//!
//! In: a [`PauliSum`], a [`Spec`] and a target. Out: a [`Compiled`] campaign: the plan and one
//! program text per circuit, in plan order. Passes (each a free function, verified after it in
//! tests and debug builds):
//!
//! 1. `formula::order_terms` + `formula::evolution`: the rotation program per time point;
//! 2. `family::build_jobs`: Hadamard-test circuits (synthesis by `synth`, clean-up by
//!    `circuit::cancel`), logical qubits, ancilla last;
//! 3. all-to-all target: `verify_ir`, done;
//! 4. `qasm::write`.
//!
//! Nothing here does I/O; the command layer writes the files.

use crate::circuit::metrics::counts;
use crate::circuit::verify::{verify_ir, IrError, Rules};
use crate::circuit::Circuit;
use crate::family::plan::{
    CircuitEntry, Costs, FormulaInfo, HamiltonianInfo, Plan, TermInfo, PLAN_FORMAT,
};
use crate::family::{build_jobs, Spec};
use crate::pauli::PauliSum;
use crate::qasm::{write, Addressing};

/// A compiled campaign: the plan and, for every circuit in plan order, its program text.
pub struct Compiled {
    pub plan: Plan,
    pub programs: Vec<String>,
    /// The final circuits (for callers that want to simulate without re-reading the files).
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

/// Runs the passes for the all-to-all target.
pub fn compile(h: &PauliSum, source: &str, spec: &Spec) -> Result<Compiled, IrError> {
    let default_ladder = |r: &crate::formula::Rotation| crate::synth::default_ladder(r);
    let jobs = build_jobs(h, spec, &default_ladder);
    let mut entries = Vec::with_capacity(jobs.len());
    let mut programs = Vec::with_capacity(jobs.len());
    let mut circuits = Vec::with_capacity(jobs.len());
    for job in jobs {
        verify_ir(&job.circuit, &Rules::default())?;
        let costs: Costs = counts(&job.circuit).into();
        let comments = vec![
            format!(
                "phasewright circuit {}: {} part of the Hadamard test at k = {}, t = {}",
                job.id,
                if job.part == crate::family::plan::Part::Re {
                    "real"
                } else {
                    "imaginary"
                },
                job.k,
                job.time
            ),
            "bit 0 is the ancilla; see plan.json for what each bit reads".to_string(),
        ];
        programs.push(write(&job.circuit, Addressing::Logical, &comments));
        entries.push(CircuitEntry {
            file: format!("{}.qasm", job.id),
            id: job.id,
            k: job.k,
            time: job.time,
            part: job.part,
            state: job.state,
            group: job.group,
            num_qubits: job.circuit.num_qubits,
            num_clbits: job.circuit.num_clbits,
            ancilla_bit: 0,
            reads: job.reads,
            costs,
            final_layout: Vec::new(),
        });
        circuits.push(job.circuit);
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
        points: spec.points,
        device: None,
        circuits: entries,
    };
    Ok(Compiled {
        plan,
        programs,
        circuits,
    })
}
