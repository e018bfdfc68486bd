//! The two results of `estimate`: an [`EnergyReport`] (overlap and Krylov plans) and a
//! [`DosReport`] (trace plans).
//!
//! In: nothing; these are the data types the stages fill. Out: the values the tables, JSON and
//! plots of `report` and `app` print. Invariant: every energy here includes the identity
//! coefficient `c` of `H` exactly once (the stages compute for `H' = H − c` and add it back).

use super::*;

/// How the Krylov column was computed.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum KrylovKind {
    /// `(H, S)` Toeplitz pencil from term and overlap reads (`krylov` plans).
    Hamiltonian,
    /// `(sin(H'dt)/dt, S)` pencil from overlaps alone (`overlap` plans).
    Sine,
}

/// One Krylov dimension.
#[derive(Clone, Debug, PartialEq)]
pub struct EnergyRow {
    pub dimension: usize,
    /// Threshold applied to the eigenvalues of `S`.
    pub threshold: f64,
    /// Lowest Krylov energy of `H` (constant included) and the directions kept.
    pub krylov: Option<f64>,
    pub kept: Option<usize>,
    pub krylov_std_error: Option<f64>,
    /// Matrix-pencil ground energy from `S_0..S_{d−1}` (constant included).
    pub pencil: Option<f64>,
    pub pencil_std_error: Option<f64>,
    /// The Krylov / pencil energy lies outside the one-norm bound [`EnergyReport::bound`].
    pub krylov_outside_bound: bool,
    pub pencil_outside_bound: bool,
}

/// Result for `overlap` and `krylov` plans.
#[derive(Clone, Debug, PartialEq)]
pub struct EnergyReport {
    pub family: Family,
    pub kind: KrylovKind,
    pub dt: f64,
    pub constant: f64,
    pub rows: Vec<EnergyRow>,
    /// `S_k` and (krylov plans) `h_k`, with standard errors.
    pub overlaps: Series,
    pub hamiltonian: Option<Series>,
    /// Exact ground energy (`--exact`, or diagonalised when the plan is small).
    pub exact: Option<f64>,
    pub exact_source: Option<&'static str>,
    pub bootstrap: usize,
    pub seed: u64,
    /// `[c − Σ|c_j|, c + Σ|c_j|]`, where every eigenvalue of `H` lies ([`sanity::energy_bound`]).
    pub bound: (f64, f64),
    /// Smallest eigenvalue of the full `K×K` Gram matrix `S` and its noise scale
    /// ([`sanity::gram_min_eigenvalue`]).
    pub gram_min: (f64, f64),
    /// How signal loss was undone, when it was.
    pub loss_method: Option<&'static str>,
    /// The recommended dimension, threshold and energy with σ_stat and σ_sys.
    pub answer: Option<answer::Answer>,
    /// Trotter bias of the ground energy: bound, and the computed shift for small plans.
    pub trotter: Option<trotter::TrotterBias>,
    /// `|⟨ψ|E0⟩|²` of the reference state, when computable (≤ 14 qubits).
    pub reference_weight: Option<f64>,
    pub accuracy: Option<f64>,
    pub warnings: Vec<String>,
}

/// Method sentence for `--undo-loss` with calibrated factors.
pub const LOSS_CALIBRATED: &str = "each circuit's reads divided by its calibrated success \
     probability Π(1 − error) from plan.json (exact for a global depolarising channel, which \
     scales every parity by that factor; errors grow by the same factor)";

/// Result for `trace` plans.
#[derive(Clone, Debug, PartialEq)]
pub struct DosReport {
    pub dt: f64,
    pub points: usize,
    pub num_qubits: usize,
    pub num_states: usize,
    pub sigma: f64,
    pub resolution: f64,
    /// `g_k = mean over states of ⟨ψ_s|U(k·dt)|ψ_s⟩ ≈ tr U/2ⁿ`.
    pub trace: Series,
    pub energies: Vec<f64>,
    pub density: Vec<f64>,
    /// Standard error of the density (spread over states, or shot noise for one state).
    pub std_error: Vec<f64>,
    /// Quadrature error bound at each energy.
    pub quadrature_bound: Vec<f64>,
    /// Exact broadened spectrum when the plan is small enough to diagonalise.
    pub exact: Option<Vec<f64>>,
    pub band_source: &'static str,
    /// Bound on the density change from the product formula at every energy (see
    /// [`dos_trotter_band`]); `None` when the Trotter bound is vacuous.
    pub trotter_band: Option<f64>,
    /// Relative random-state sampling error at the density's maximum (spread over states /
    /// √N over the density), with two or more states.
    pub sampling_relative: Option<f64>,
    /// Random states needed for a 10% sampling error at the maximum (`N·(r/0.1)²`).
    pub states_for_ten_percent: Option<usize>,
    /// How signal loss was undone, when it was.
    pub loss_method: Option<&'static str>,
    pub warnings: Vec<String>,
}
