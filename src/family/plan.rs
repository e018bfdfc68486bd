//! The plan: a machine-readable description of a compiled campaign (`DIR/plan.json`).
//!
//! In: what the compiler decided (Hamiltonian summary, formula, states, circuits and what each
//! one reads). Out: a serde model written as JSON and read back by `verify`, `sample` and
//! `estimate`. Invariant: the plan alone says how to recombine counts: every circuit lists its
//! [`Read`]s, each naming the quantity it estimates and the classical bits whose parity gives it.
//!
//! Schema `phasewright-plan/1` (documented in README):
//! - `family`: `overlap` | `krylov` | `trace`;
//! - `hamiltonian`: qubit count, constant (identity coefficient, never a gate), one-norm, terms;
//! - `formula`: order, Trotter steps per unit of `k`, `dt`;
//! - `states`: reference states (`0 1 + - r l`, qubit 0 first); one for overlap/krylov, N for trace;
//! - `circuits`: id, file, `k`, time, part (`re`/`im`), state index, optional group, reads, costs.
//!
//! A read's value is `⟨Π_{b ∈ bits} (−1)^{c_b}⟩` over the shots, i.e. the parity expectation of
//! the listed classical bits; for part `re` it estimates `Re q`, for part `im` it estimates `Im q`,
//! where `q` is `⟨ψ_s|U(k·dt)|ψ_s⟩` (target `overlap`) or `⟨ψ_s|P_j U(k·dt)|ψ_s⟩` (target `term`
//! j, an index into `hamiltonian.terms`).

use crate::circuit::metrics::Counts;
use serde::{Deserialize, Serialize};

/// Identifies the schema in `plan.json`.
pub const PLAN_FORMAT: &str = "phasewright-plan/1";

#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Plan {
    pub format: String,
    pub family: Family,
    pub hamiltonian: HamiltonianInfo,
    pub formula: FormulaInfo,
    pub states: Vec<String>,
    /// Seed used to draw random states (trace family), if any.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub seed: Option<u64>,
    /// Number of time points K: k runs over 0..K.
    pub points: usize,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub device: Option<DeviceInfo>,
    pub circuits: Vec<CircuitEntry>,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, PartialOrd, Ord, Hash)]
#[serde(rename_all = "lowercase")]
pub enum Family {
    Overlap,
    Krylov,
    Trace,
}

#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct HamiltonianInfo {
    pub source: String,
    pub num_qubits: usize,
    /// Coefficient of the identity: added back at estimation time, never compiled.
    pub constant: f64,
    /// `Σ |c_j|` over the non-identity terms.
    pub one_norm: f64,
    pub terms: Vec<TermInfo>,
}

#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct TermInfo {
    /// Sparse text form, e.g. `X0 Y1 Z3`.
    pub pauli: String,
    pub coeff: f64,
}

#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct FormulaInfo {
    /// 1 (Lie–Trotter), 2 (Strang), 4 (Suzuki).
    pub order: u32,
    /// Trotter steps used for one `dt`; time point k uses `k·steps` steps of `dt/steps`.
    pub steps_per_dt: usize,
    pub dt: f64,
}

#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct DeviceInfo {
    pub name: String,
    pub num_qubits: usize,
    pub native: Vec<String>,
    /// `initial_layout[l]` = physical qubit holding logical qubit l (the ancilla is the last l).
    pub initial_layout: Vec<u32>,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, PartialOrd, Ord, Hash)]
#[serde(rename_all = "lowercase")]
pub enum Part {
    Re,
    Im,
}

#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(tag = "target", rename_all = "lowercase")]
pub enum Target {
    /// `⟨ψ_s|U|ψ_s⟩`.
    Overlap,
    /// `⟨ψ_s|P_j U|ψ_s⟩` for `hamiltonian.terms[term]`.
    Term { term: usize },
}

#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Read {
    #[serde(flatten)]
    pub target: Target,
    /// Classical bits whose parity expectation estimates the target's `part`.
    pub bits: Vec<u32>,
}

#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct CircuitEntry {
    pub id: String,
    pub file: String,
    pub k: usize,
    pub time: f64,
    pub part: Part,
    /// Index into `Plan::states`.
    pub state: usize,
    /// Measurement group (krylov family), if any.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub group: Option<usize>,
    pub num_qubits: usize,
    pub num_clbits: usize,
    /// Classical bit holding the Hadamard-test ancilla.
    pub ancilla_bit: u32,
    pub reads: Vec<Read>,
    pub costs: Costs,
    /// Physical qubit measured into each classical bit, after routing (empty on all-to-all).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub final_layout: Vec<u32>,
}

/// Costs of one circuit as recorded in the plan.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, Default)]
pub struct Costs {
    pub depth: usize,
    pub two_qubit: usize,
    pub one_qubit: usize,
    pub swaps: usize,
    /// Critical-path duration in ns from the device's gate times (absent without a device).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub duration_ns: Option<f64>,
    /// `Π (1 − error)` over gates and readouts (absent without a device).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub success_probability: Option<f64>,
}

impl From<Counts> for Costs {
    fn from(c: Counts) -> Costs {
        Costs {
            depth: c.depth,
            two_qubit: c.two_qubit,
            one_qubit: c.one_qubit,
            swaps: c.swaps,
            duration_ns: None,
            success_probability: None,
        }
    }
}

impl Plan {
    /// The Hamiltonian rebuilt from `hamiltonian.terms` (sparse `X0 Y1 Z3` text) with its
    /// identity coefficient as `constant`. Errors name the term that does not read back.
    pub fn pauli_sum(&self) -> Result<crate::pauli::PauliSum, String> {
        let n = self.hamiltonian.num_qubits;
        let mut h = crate::pauli::PauliSum::new(n);
        h.constant = self.hamiltonian.constant;
        for t in &self.hamiltonian.terms {
            let p = crate::pauli::PauliString::parse_factor_text(&t.pauli)
                .filter(|p| p.span() <= n)
                .ok_or_else(|| {
                    format!("plan.json: cannot read term `{}` on {n} qubits", t.pauli)
                })?;
            h.add(p, t.coeff);
        }
        Ok(h)
    }

    pub fn to_json(&self) -> String {
        serde_json::to_string_pretty(self).expect("plan serialises") + "\n"
    }

    pub fn from_json(text: &str) -> Result<Plan, serde_json::Error> {
        serde_json::from_str(text)
    }
}
