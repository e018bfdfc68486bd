//! The density of states of a trace plan: per-state overlap series averaged into
//! `g_k ≈ tr U(k·dt)/2ⁿ`, turned into a broadened density with its error band.
//!
//! In: a trace plan, its read table and outcome weights, the user's [`Config`]. Out: a
//! [`DosReport`] on an energy grid, with the spread over random states (or shot noise for one
//! state), the quadrature bound of [`dos`], the Trotter band and, for small plans, the exact
//! broadened spectrum. Invariant: the density counts `2ⁿ` states and is evaluated at `E − c`
//! inside [`dos`], so `c` is added exactly once.

use super::*;

/// Bound on `|ρ_σ^eff(E) − ρ_σ(E)|` from the Trotter bound `b`: the formula's quasi-energies can
/// be matched one to one with the eigenvalues of `H`, each pair within `b` (Bhatia & Davis 1984,
/// see [`trotter`]), and the normalised Gaussian `g_σ` changes by at most
/// `b·max|g_σ'| = b/(σ²√(2πe))` per state, so the broadened density (which counts `2ⁿ` states)
/// moves by at most `2ⁿ·b/(σ²√(2πe))`.
pub fn dos_trotter_band(num_qubits: usize, bound: f64, sigma: f64) -> Option<f64> {
    bound.is_finite().then(|| {
        2f64.powi(num_qubits as i32) * bound
            / (sigma * sigma * (2.0 * std::f64::consts::PI * std::f64::consts::E).sqrt())
    })
}

pub(super) fn density(
    plan: &Plan,
    table: &ReadTable,
    weights: &[Vec<u64>],
    cfg: &Config,
) -> Result<DosReport, EstimateError> {
    let q = table.evaluate(weights);
    let n_states = plan.states.len();
    if n_states == 0 {
        return Err(EstimateError::Plan("the trace plan lists no states".into()));
    }
    let per_state: Vec<Series> = (0..n_states)
        .map(|s| expect::overlap_series(&q, s, plan.points))
        .collect::<Result<_, _>>()?;
    let dt = plan.formula.dt;
    let sigma = cfg
        .sigma
        .unwrap_or_else(|| dos::default_sigma(plan.points, dt));
    if sigma.is_nan() || sigma <= 0.0 {
        return Err(EstimateError::Option(format!(
            "the broadening must be positive, found {sigma}"
        )));
    }
    let grid = dos::DosGrid {
        num_qubits: plan.hamiltonian.num_qubits,
        dt,
        constant: plan.hamiltonian.constant,
        sigma,
    };
    let norm = plan.hamiltonian.one_norm;
    let energies = dos::energy_grid(grid.constant, norm, sigma, dt, cfg.dos_points);
    let trace = mean_series(&per_state);
    let density: Vec<f64> = energies
        .iter()
        .map(|&e| grid.density(&trace.values, e))
        .collect();
    let (std_error, band_source) = if n_states >= 2 {
        let se: Vec<f64> = energies
            .iter()
            .map(|&e| {
                let xs: Vec<f64> = per_state
                    .iter()
                    .map(|s| grid.density(&s.values, e))
                    .collect();
                std_dev(&xs).unwrap_or(0.0) / (n_states as f64).sqrt()
            })
            .collect();
        (se, "spread over the random states (includes shot noise)")
    } else {
        let se = energies
            .iter()
            .map(|&e| grid.density_std_error(&trace.std_errors, e))
            .collect();
        (
            se,
            "shot noise only (one state: trace-estimation error unknown)",
        )
    };
    let quadrature_bound = energies
        .iter()
        .map(|&e| grid.error_bound(plan.points, norm, e))
        .collect();
    let exact = small_hamiltonian(plan).map(|h| {
        let ev = crate::sim::exact::spectrum(&h).values;
        energies
            .iter()
            .map(|&e| dos::broadened_spectrum(&ev, sigma, e))
            .collect()
    });
    let mut warnings = Vec::new();
    let trotter_band = trotter::plan_bias(plan)
        .ok()
        .and_then(|t| dos_trotter_band(plan.hamiltonian.num_qubits, t.energy_bound, sigma));
    let peak = (0..density.len()).max_by(|&a, &b| density[a].total_cmp(&density[b]));
    let sampling_relative = match peak {
        Some(i) if n_states >= 2 && density[i] > 0.0 => Some(std_error[i] / density[i]),
        _ => None,
    };
    let states_for_ten_percent =
        sampling_relative.map(|r| ((n_states as f64) * (r / 0.1).powi(2)).ceil().max(1.0) as usize);
    if n_states < 2 {
        warnings.push(
            "one random state: the band holds shot noise only; the random-state sampling error \
             (often the largest) needs two or more states (compile --samples N)"
                .into(),
        );
    } else if let (Some(r), Some(n)) = (sampling_relative, states_for_ten_percent) {
        if r > 0.1 {
            warnings.push(format!(
                "the random-state sampling error at the density's maximum is {:.0}%; about {n} \
                 states would bring it to 10% (it falls like 1/√N)",
                100.0 * r
            ));
        }
    }
    if let Some(w) = sanity::gram_warning(&trace, "the state-averaged trace series") {
        warnings.push(w);
    }
    let resolution = dos::resolution_limit(plan.points, dt);
    if sigma < resolution {
        warnings.push(format!(
            "σ = {sigma:.4} is finer than the resolution limit π/(K·dt) = {resolution:.4}; \
             the quadrature bound shows the price"
        ));
    }
    if norm * dt >= std::f64::consts::PI {
        warnings.push(format!(
            "Σ|c_j|·dt = {:.3} ≥ π: the spectrum may alias (period 2π/dt); use a smaller dt",
            norm * dt
        ));
    }
    Ok(DosReport {
        dt,
        points: plan.points,
        num_qubits: plan.hamiltonian.num_qubits,
        num_states: n_states,
        sigma,
        resolution,
        trace,
        energies,
        density,
        std_error,
        quadrature_bound,
        exact,
        band_source,
        trotter_band,
        sampling_relative,
        states_for_ten_percent,
        loss_method: cfg.undo_loss.then_some(LOSS_CALIBRATED),
        warnings,
    })
}

/// Mean of several series; standard errors combine as `√(Σ se²)/N`.
pub fn mean_series(all: &[Series]) -> Series {
    let n = all.len() as f64;
    let len = all[0].len();
    let values = (0..len)
        .map(|k| all.iter().map(|s| s.values[k]).sum::<Complex64>() / n)
        .collect();
    let std_errors = (0..len)
        .map(|k| {
            let (a, b) = all.iter().fold((0.0, 0.0), |(a, b), s| {
                (a + s.std_errors[k].0.powi(2), b + s.std_errors[k].1.powi(2))
            });
            (a.sqrt() / n, b.sqrt() / n)
        })
        .collect();
    Series { values, std_errors }
}
