//! Facts read off a plan that several estimate stages need: its Hamiltonian (whole, or when
//! small enough to diagonalise), the mean energy of a product reference state, family names.
//!
//! In: a [`Plan`]. Out: a [`PauliSum`], numbers and names. Invariant: nothing here reads
//! counts; an unreadable term is an [`EstimateError::Plan`].

use super::*;

/// The plan's Hamiltonian as a Pauli sum, when it has at most [`EXACT_MAX_QUBITS`] qubits
/// and every term's text parses.
pub fn small_hamiltonian(plan: &Plan) -> Option<PauliSum> {
    let n = plan.hamiltonian.num_qubits;
    if n == 0 || n > EXACT_MAX_QUBITS {
        return None;
    }
    plan_hamiltonian(plan).ok()
}

/// Rebuilds `H` (constant included) from the plan's term list.
pub fn plan_hamiltonian(plan: &Plan) -> Result<PauliSum, EstimateError> {
    plan.pauli_sum().map_err(EstimateError::from)
}

/// `⟨ψ_s|H − c|ψ_s⟩` for a product reference state written with the letters `0 1 + - r l`
/// (qubit 0 first), computed exactly from the plan's terms; `None` for other state forms.
pub fn product_state_mean(plan: &Plan, state: usize) -> Option<f64> {
    let spec: Vec<char> = plan
        .states
        .get(state)?
        .chars()
        .filter(|c| !c.is_whitespace())
        .collect();
    if spec.len() != plan.hamiltonian.num_qubits || spec.iter().any(|c| !"01+-rl".contains(*c)) {
        return None;
    }
    let h = plan_hamiltonian(plan).ok()?;
    let mut mean = 0.0;
    for (p, c) in h.term_list() {
        let mut v = 1.0;
        for (q, letter) in spec.iter().enumerate() {
            v *= match (p.get(q), letter) {
                (Pauli::I, _) => 1.0,
                (Pauli::Z, '0') | (Pauli::X, '+') | (Pauli::Y, 'r') => 1.0,
                (Pauli::Z, '1') | (Pauli::X, '-') | (Pauli::Y, 'l') => -1.0,
                _ => 0.0,
            };
        }
        mean += c * v;
    }
    Some(mean)
}

/// Map from a family to its name in plan.json.
pub fn family_name(f: Family) -> &'static str {
    match f {
        Family::Overlap => "overlap",
        Family::Krylov => "krylov",
        Family::Trace => "trace",
        Family::Evolution => "evolution",
    }
}

/// Why `estimate` does not read a plain time-evolution campaign.
pub const EVOLUTION_REFUSAL: &str = "this is a plain time-evolution campaign (--measure evolution): its counts are samples of |⟨b|U(k·dt)|ψ⟩|² for your own analysis, not Hadamard-test reads, so estimate has nothing to estimate from them";
