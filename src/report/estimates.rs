//! The estimate report: energies (overlap and krylov plans) or the density of states (trace
//! plans), as a table for people and as JSON.
//!
//! In: an [`Analysis`] (an [`EnergyReport`] or a [`DosReport`] from [`crate::estimate::analyse`]),
//! the [`Plan`] it came from (points, energy unit) and the counts' bit order. Out: the table
//! `estimate` prints (its final-answer block on top for energies) and the
//! `phasewright-estimate/1` document `estimate --json` prints, whose schema is the documented
//! structs [`EnergyDoc`] and [`DosDoc`] (one struct per JSON object). Invariant: a function of
//! the values given alone, rows in report order, fixed number formats and JSON keys in the
//! order the structs declare them, so the report is byte-identical for the same analysis.

use crate::estimate::counts::BitOrder;
use crate::estimate::{self, Analysis, DosReport, EnergyReport, KrylovKind};
use crate::plan::Plan;
use serde::Serialize;
use serde_json::Value;
use std::fmt::Write as _;

fn fmt_opt(x: Option<f64>, prec: usize) -> String {
    match x {
        Some(v) => format!("{v:.prec$}"),
        None => "-".into(),
    }
}

/// The human-readable table for energies.
pub fn energy_table(r: &EnergyReport, plan: &Plan) -> String {
    let mut s = String::new();
    let k = plan.points;
    let _ = writeln!(
        s,
        "{} plan: K = {k} time points, dt = {}, identity coefficient c = {} added back",
        estimate::family_name(r.family),
        r.dt,
        r.constant
    );
    let _ = writeln!(
        s,
        "threshold on eigenvalues of S: {}",
        if plan.points > 0 && r.rows.iter().all(|x| x.threshold == r.rows[0].threshold) {
            format!("{:.3e} (all dimensions)", r.rows[0].threshold)
        } else {
            "σ̄·d from the shot noise of S (column `threshold`)".into()
        }
    );
    let _ = writeln!(
        s,
        "energies in {}",
        plan.energy_unit
            .as_deref()
            .unwrap_or("the units of the Hamiltonian's coefficients")
    );
    if r.bootstrap >= 2 {
        let _ = writeln!(
            s,
            "error bars: ±1σ, one bootstrap standard error from {} replicates, seed {} (the plot shows the same)",
            r.bootstrap, r.seed
        );
    } else {
        let _ = writeln!(s, "error bars: off (--bootstrap 0)");
    }
    let _ = writeln!(s);
    s.push_str(&answer_text(r));
    let _ = writeln!(s);
    let _ = writeln!(
        s,
        "{:>3}  {:>14}  {:>9}  {:>5}  {:>9}  {:>14}  {:>9}",
        "d", "krylov", "±1σ", "kept", "threshold", "pencil", "±1σ"
    );
    let mark = |x: Option<f64>, out: bool| {
        let v = fmt_opt(x, 6);
        if out {
            v + "!"
        } else {
            v
        }
    };
    for row in &r.rows {
        let _ = writeln!(
            s,
            "{:>3}  {:>14}  {:>9}  {:>5}  {:>9.2e}  {:>14}  {:>9}",
            row.dimension,
            mark(row.krylov, row.krylov_outside_bound),
            fmt_opt(row.krylov_std_error, 6),
            row.kept
                .map(|x| format!("{x}/{}", row.dimension))
                .unwrap_or_else(|| "-".into()),
            row.threshold,
            mark(row.pencil, row.pencil_outside_bound),
            fmt_opt(row.pencil_std_error, 6),
        );
    }
    let _ = writeln!(s);
    if let (Some(e), Some(src)) = (r.exact, r.exact_source) {
        let _ = writeln!(s, "exact ground energy: {e:.6} ({src})");
    }
    let method = match r.kind {
        KrylovKind::Hamiltonian => {
            "krylov: Toeplitz pencil (H, S) of the real-time Krylov basis U^k|ψ⟩ (Parrish & McMahon 2019; Stair, Huang & Evangelista 2020), S thresholded (Epperly, Lin & Nakatsukasa 2022); H elements read as (H − μ) with the same shots' ancilla bits as control variate, μ = the reference energy"
        }
        KrylovKind::Sine => {
            "krylov: pencil (sin(H'dt)/dt, S) from overlaps only, energy = arcsin(β·dt)/dt, d < K, shifted by the mean energy μ (valid while ‖H − c − μ‖·dt ≤ π/2)"
        }
    };
    let _ = writeln!(s, "{method}");
    let _ = writeln!(
        s,
        "pencil: matrix pencil method on S_-(d-1)..S_(d-1) (Hua & Sarkar 1990), lowest mode with weight ≥ {}",
        estimate::overlap_only::MIN_WEIGHT
    );
    let _ = writeln!(
        s,
        "one-norm bound: every eigenvalue of H lies in [{:.6}, {:.6}] (c ± Σ|c_j|); `!` marks \
         values outside it",
        r.bound.0, r.bound.1
    );
    let _ = writeln!(
        s,
        "Gram matrix S (K×K): smallest eigenvalue {:.3e}, noise scale {:.3e}",
        r.gram_min.0, r.gram_min.1
    );
    table_footer(&mut s, r.loss_method, r.warnings.len(), "energies");
    s
}

/// Method sentence of the final answer.
pub const ANSWER_METHOD: &str = "unitary pencil (T, S), T_jk = S_(k-j+1), on the overlaps: \
     quasi-energies of the compiled product formula itself (no commutation of H with the \
     formula assumed; Cortes & Gray 2022); threshold 2× the noise norm of S; dimension from \
     the plateau of the scan (Epperly, Lin & Nakatsukasa 2022; Kirby 2024); the Ritz value's \
     upward bias estimated from its own spread, 1 − |λ|², by Temple's inequality (Temple \
     1928), half of it removed";

/// The final-answer block of the energy table.
pub fn answer_text(r: &EnergyReport) -> String {
    let mut s = String::new();
    let Some(a) = &r.answer else {
        let _ = writeln!(s, "final answer: none (see warnings)");
        return s;
    };
    let _ = writeln!(
        s,
        "final answer: E = {:.6} ± {:.6} (stat) ± {:.6} (sys)   [d = {}, threshold {:.2e}]",
        a.energy, a.sigma_stat, a.sigma_sys, a.dimension, a.threshold
    );
    let _ = writeln!(s, "  method: {ANSWER_METHOD}");
    let _ = writeln!(
        s,
        "  σ_stat: {}",
        if r.bootstrap >= 2 {
            format!(
                "bootstrap over {} replicates (percentile width), each redoing the choice of \
                 dimension: {:.2e} at d = {} fixed, {:.2e} for the whole procedure; the larger",
                r.bootstrap, a.sigma_fixed, a.dimension, a.sigma_selection
            )
        } else {
            "off (--bootstrap 0)".to_string()
        }
    );
    let trotter = match a.trotter_correction {
        Some(c) => format!(
            "0 (shift {c:+.3e} of the compiled formula's ground quasi-energy computed by dense \
             diagonalisation and removed; commutator bound {:.2e})",
            a.trotter_bound
        ),
        None if a.trotter_bound.is_finite() => format!(
            "{:.2e} (= b/√3 for the commutator-scaling bound b = {:.2e} on the shift, Childs \
             et al. 2021)",
            a.trotter_sigma, a.trotter_bound
        ),
        None => "unknown (the commutator bound is vacuous at this dt)".to_string(),
    };
    let contamination = if a.contamination > 0.0 {
        format!(
            "{:.2e} (= β/√12: the Ritz vector's spread (1 − |λ|²)/dt² = {:.2e} over the gap \
             {} gives a bias β = {:.2e}; β/2 was subtracted)",
            a.contamination_sigma(),
            (1.0 - a.ritz_modulus * a.ritz_modulus) / (r.dt * r.dt),
            a.gap
                .map_or("(none: β = √V)".to_string(), |g| format!("{g:.3e}")),
            a.contamination
        )
    } else {
        "0 (the Ritz vector's spread 1 − |λ|² is within its shot noise)".to_string()
    };
    let _ = writeln!(
        s,
        "  σ_sys = √(threshold² + dimension² + contamination² + Trotter²): threshold \
         sensitivity {:.2e} (ε/2, 2ε), unconverged dimension {:.2e} (drops still to come), \
         contamination {contamination}, Trotter {trotter}",
        a.threshold_sensitivity, a.unconverged
    );
    if let Some(acc) = r.accuracy {
        let ok = a.sigma_total() <= acc;
        let _ = writeln!(
            s,
            "  requested accuracy {acc:.2e}: {} (total {:.2e})",
            if ok { "met" } else { "NOT met" },
            a.sigma_total()
        );
    }
    s
}

/// Largest number of rows the density-of-states table prints (JSON has every point).
pub const DOS_TABLE_ROWS: usize = 41;

/// The human-readable table for the density of states.
pub fn dos_table(r: &DosReport, plan: &Plan) -> String {
    let mut s = String::new();
    let _ = writeln!(
        s,
        "trace plan: {} qubits, {} random states, K = {} time points, dt = {}",
        r.num_qubits, r.num_states, r.points, r.dt
    );
    let _ = writeln!(
        s,
        "broadening σ = {:.6}; resolution limit π/(K·dt) = {:.6}",
        r.sigma, r.resolution
    );
    let _ = writeln!(
        s,
        "quadrature: rectangle rule on t_k = k·dt, |k| ≤ K−1 (trapezoid on the infinite grid), \
         truncation + aliasing bound in column `bound`"
    );
    let _ = writeln!(
        s,
        "band: ±2σ (the plot shows the same band), σ from the {}",
        r.band_source
    );
    let _ = writeln!(
        s,
        "random-state sampling: {}",
        match (r.sampling_relative, r.states_for_ten_percent) {
            (Some(x), Some(n)) => format!(
                "{:.1}% of ρ at its maximum from the spread over {} states (inside the band); \
                 about {n} states give 10%",
                100.0 * x,
                r.num_states
            ),
            _ => "unknown with one state (use compile --samples N, N ≥ 2)".into(),
        }
    );
    let _ = writeln!(
        s,
        "Trotter: {} (not in the band; a bound from the commutator-scaling step error)",
        match r.trotter_band {
            Some(b) => format!("|ρ_formula − ρ_H| ≤ {b:.3e} at every E"),
            None => "unbounded at this dt".into(),
        }
    );
    let _ = writeln!(
        s,
        "E in {}; ρ in states per unit energy (integrates to 2^{} = {})",
        plan.energy_unit
            .as_deref()
            .unwrap_or("the units of the Hamiltonian's coefficients"),
        r.num_qubits,
        1u64 << r.num_qubits.min(63)
    );
    let _ = writeln!(s);
    let n = r.energies.len();
    let step = n.div_ceil(DOS_TABLE_ROWS).max(1);
    let _ = writeln!(
        s,
        "{:>12}  {:>12}  {:>12}  {:>12}  {:>10}  {:>12}",
        "E", "ρ", "ρ−2σ", "ρ+2σ", "bound", "exact"
    );
    let mut idx: Vec<usize> = (0..n).step_by(step).collect();
    if idx.last() != Some(&(n - 1)) {
        idx.push(n - 1);
    }
    for i in idx {
        let _ = writeln!(
            s,
            "{:>12.5}  {:>12.5}  {:>12.5}  {:>12.5}  {:>10.2e}  {:>12}",
            r.energies[i],
            r.density[i],
            r.density[i] - 2.0 * r.std_error[i],
            r.density[i] + 2.0 * r.std_error[i],
            r.quadrature_bound[i],
            r.exact
                .as_ref()
                .map(|e| format!("{:.5}", e[i]))
                .unwrap_or_else(|| "-".into()),
        );
    }
    if step > 1 {
        let _ = writeln!(s, "(every {step}th of {n} energies; --json lists all)");
    }
    if r.quadrature_bound.iter().any(|b| b.is_infinite()) {
        let _ = writeln!(
            s,
            "bound inf: there 2π/dt ≤ |E − c| + Σ|c_j|, so aliasing cannot be ruled out by the \
             norm bound alone; a smaller dt widens the guaranteed window"
        );
    }
    let _ = writeln!(
        s,
        "ρ_σ(E) = (2^n/2π) ∫ e^(−σ²t²/2) e^(iEt) tr U(t)/2^n dt, tr U/2^n estimated by averaging \
         ⟨ψ_s|U|ψ_s⟩ over random states (Hutchinson-type stochastic trace)"
    );
    table_footer(&mut s, r.loss_method, r.warnings.len(), "results");
    s
}

/// The `phasewright-estimate/1` document of an overlap or krylov plan (`estimate --json`).
/// Energies are in [`EnergyDoc::energy_unit`] (the units of the Hamiltonian's coefficients when
/// absent); times in the inverse of that unit (ħ = 1).
#[derive(Serialize)]
pub struct EnergyDoc<'a> {
    /// Document format and version: `phasewright-estimate/1`.
    pub format: &'static str,
    /// Unit of every energy (from the plan), or null when the input did not say.
    pub energy_unit: Option<&'a str>,
    /// What the error bars are: one bootstrap standard error (1 σ).
    pub error_bars: &'static str,
    /// Plan family: `overlap` or `krylov`.
    pub family: &'static str,
    /// Time step between time points (inverse energy units).
    pub dt: f64,
    /// Number of time points K of the plan.
    pub points: usize,
    /// Identity coefficient c of H, added back to every energy (energy units).
    pub constant: f64,
    /// Which end of a counts bit string is classical bit 0: `first` or `last`.
    pub bit_order: &'static str,
    /// How the Krylov column was computed: `toeplitz-h-s` or `toeplitz-sine-s`.
    pub krylov_method: &'static str,
    /// Bootstrap replicates behind the error bars (0: error bars off).
    pub bootstrap: usize,
    /// Seed of the bootstrap draws.
    pub seed: u64,
    /// The recommended energy with its errors, or null when none was found.
    pub answer: Option<AnswerDoc>,
    /// `|⟨ψ|E0⟩|²` of the reference state (a probability), or null when not computable.
    pub reference_ground_weight: Option<f64>,
    /// One row per Krylov dimension, in increasing dimension.
    pub energies: Vec<EnergyRowDoc>,
    /// The one-norm interval holding every eigenvalue of H.
    pub energy_bound: BoundDoc,
    /// Smallest eigenvalue of the full K×K Gram matrix S (dimensionless).
    pub gram_min_eigenvalue: f64,
    /// Noise scale of that eigenvalue from the shot noise of S (dimensionless).
    pub gram_noise_scale: f64,
    /// Whether any energy of the table or the answer lies outside [`EnergyDoc::energy_bound`].
    pub outside_bound: bool,
    /// How signal loss was undone (a sentence), or null when it was not.
    pub signal_loss: Option<&'static str>,
    /// Exact ground energy (energy units), or null when unknown.
    pub exact: Option<f64>,
    /// Where the exact ground energy came from (a phrase), or null.
    pub exact_source: Option<&'static str>,
    /// The overlaps `S_k = ⟨ψ|U^k|ψ⟩` (dimensionless), one point per time point.
    pub overlaps: Vec<SeriesPoint>,
    /// The elements `h_k` of H in the Krylov basis (energy units; krylov plans), or null.
    pub hamiltonian_elements: Option<Vec<SeriesPoint>>,
    /// The warnings printed on stderr, in order.
    pub warnings: &'a [String],
}

/// The final answer of an energy document (energies and their errors in energy units).
#[derive(Serialize)]
pub struct AnswerDoc {
    /// The recommended ground energy.
    pub energy: f64,
    /// Statistical error σ_stat (1 σ).
    pub sigma_stat: f64,
    /// Systematic error σ_sys (1 σ).
    pub sigma_sys: f64,
    /// Bootstrap standard error at the chosen dimension and threshold.
    pub sigma_fixed_dimension: f64,
    /// Bootstrap standard error of the whole procedure, dimension choice included.
    pub sigma_selection: f64,
    /// `√(σ_stat² + σ_sys²)`.
    pub sigma_total: f64,
    /// The chosen Krylov dimension (a count).
    pub dimension: usize,
    /// The threshold applied to the eigenvalues of S (dimensionless).
    pub threshold: f64,
    /// Whether the energy lies outside the one-norm bound.
    pub outside_bound: bool,
    /// How the answer was found (a sentence, [`ANSWER_METHOD`]).
    pub method: &'static str,
    /// The parts of σ_sys.
    pub systematic: SystematicDoc,
    /// The requested accuracy (`--accuracy`), or null.
    pub accuracy: Option<f64>,
    /// Whether σ_total is within the requested accuracy, or null without one.
    pub accuracy_met: Option<bool>,
    /// One row per dimension scanned, in increasing dimension.
    pub scan: Vec<ScanRowDoc>,
}

/// The parts of the systematic error of the answer (energy units unless said otherwise).
#[derive(Serialize)]
pub struct SystematicDoc {
    /// Sensitivity of the energy to the threshold (ε/2, 2ε).
    pub threshold_sensitivity: f64,
    /// Drops of the energy still to come with more dimensions.
    pub unconverged_dimension: f64,
    /// Contamination part of σ_sys, `β/√12`.
    pub contamination: f64,
    /// Upward bias bound β of the Ritz value (β/2 was subtracted).
    pub contamination_bias: f64,
    /// `|λ|` of the chosen Ritz value (dimensionless).
    pub ritz_modulus: f64,
    /// Gap to the next admissible Ritz value, or null when there is none.
    pub gap: Option<f64>,
    /// Trotter part of σ_sys.
    pub trotter: f64,
    /// Trotter shift `ε_0 − E_0` subtracted from the energy, or null when not computed.
    pub trotter_correction: Option<f64>,
    /// Rigorous bound on the Trotter shift, or null when it is vacuous.
    pub trotter_bound: Option<f64>,
}

/// One dimension of the answer's scan (energy units; null where the dimension gave nothing).
#[derive(Serialize)]
pub struct ScanRowDoc {
    /// Krylov dimension (a count).
    pub dimension: usize,
    /// Threshold on the eigenvalues of S (dimensionless).
    pub threshold: f64,
    /// Quasi-energy after the contamination correction.
    pub energy: Option<f64>,
    /// Directions of S kept (a count).
    pub kept: Option<usize>,
    /// Bootstrap standard error at this dimension.
    pub sigma_stat: Option<f64>,
    /// Sensitivity of the energy to the threshold.
    pub threshold_sensitivity: Option<f64>,
    /// Drops of the energy still to come.
    pub unconverged: Option<f64>,
    /// The lowest Ritz quasi-energy before the contamination correction.
    pub ritz: Option<f64>,
    /// Upward bias bound β of the Ritz value.
    pub contamination_bias: Option<f64>,
    /// `|λ|` of the lowest admissible Ritz value (dimensionless).
    pub ritz_modulus: Option<f64>,
}

/// One Krylov dimension of the energy table (energy units; null where nothing was found).
#[derive(Serialize)]
pub struct EnergyRowDoc {
    /// Krylov dimension d (a count).
    pub dimension: usize,
    /// Threshold applied to the eigenvalues of S (dimensionless).
    pub threshold: f64,
    /// Lowest Krylov energy of H, constant included.
    pub krylov: Option<f64>,
    /// Its bootstrap standard error.
    pub krylov_std_error: Option<f64>,
    /// Directions of S kept (a count out of d).
    pub kept: Option<usize>,
    /// Matrix-pencil ground energy, constant included.
    pub pencil: Option<f64>,
    /// Its bootstrap standard error.
    pub pencil_std_error: Option<f64>,
    /// Whether the Krylov energy lies outside the one-norm bound.
    pub krylov_outside_bound: bool,
    /// Whether the pencil energy lies outside the one-norm bound.
    pub pencil_outside_bound: bool,
}

/// The interval `[c − Σ|c_j|, c + Σ|c_j|]` holding every eigenvalue of H (energy units).
#[derive(Serialize)]
pub struct BoundDoc {
    /// Lower end.
    pub low: f64,
    /// Upper end.
    pub high: f64,
    /// The rule it comes from (a phrase).
    pub rule: &'static str,
}

/// One time point k of a complex series with its standard errors (the series' own unit).
#[derive(Serialize)]
pub struct SeriesPoint {
    /// Time-point index k (time k·dt).
    pub k: usize,
    /// Real part.
    pub re: f64,
    /// Imaginary part.
    pub im: f64,
    /// Standard error of the real part.
    pub re_std_error: f64,
    /// Standard error of the imaginary part.
    pub im_std_error: f64,
}

/// The `phasewright-estimate/1` document of a trace plan (`estimate --json`): the density of
/// states. Energies are in [`DosDoc::energy_unit`], densities in states per unit energy.
#[derive(Serialize)]
pub struct DosDoc<'a> {
    /// Document format and version: `phasewright-estimate/1`.
    pub format: &'static str,
    /// Unit of every energy (from the plan), or null when the input did not say.
    pub energy_unit: Option<&'a str>,
    /// Plan family: `trace`.
    pub family: &'static str,
    /// Time step between time points (inverse energy units).
    pub dt: f64,
    /// Number of time points K.
    pub points: usize,
    /// Number of qubits n (the density integrates to 2ⁿ).
    pub qubit_count: usize,
    /// Number of random states averaged over.
    pub state_count: usize,
    /// Which end of a counts bit string is classical bit 0: `first` or `last`.
    pub bit_order: &'static str,
    /// Gaussian broadening σ (energy units).
    pub sigma: f64,
    /// Resolution limit π/(K·dt) (energy units).
    pub resolution_limit: f64,
    /// The quadrature rule (a phrase).
    pub quadrature: &'static str,
    /// Where the error band's σ comes from (a phrase).
    pub band: &'static str,
    /// Bound on the density change from the product formula at every energy (states per unit
    /// energy), or null when the Trotter bound is vacuous.
    pub trotter_band: Option<f64>,
    /// Relative random-state sampling error at the density's maximum (a fraction), or null
    /// with one state.
    pub sampling_relative_at_peak: Option<f64>,
    /// Random states needed for a 10% sampling error at the maximum, or null with one state.
    pub states_for_ten_percent: Option<usize>,
    /// How signal loss was undone (a sentence), or null when it was not.
    pub signal_loss: Option<&'static str>,
    /// The normalised trace `tr U(k·dt)/2ⁿ` (dimensionless), one point per time point.
    pub trace: Vec<SeriesPoint>,
    /// The density at every energy of the grid, in increasing energy.
    pub dos: Vec<DosPointDoc>,
    /// The warnings printed on stderr, in order.
    pub warnings: &'a [String],
}

/// The density of states at one energy (states per unit energy unless said otherwise).
#[derive(Serialize)]
pub struct DosPointDoc {
    /// The energy (energy units).
    pub energy: f64,
    /// Estimated broadened density ρ_σ.
    pub density: f64,
    /// Its standard error.
    pub std_error: f64,
    /// Quadrature (truncation and aliasing) error bound; null where infinite.
    pub quadrature_bound: f64,
    /// Exact broadened density, or null when the plan is too large to diagonalise.
    pub exact: Option<f64>,
}

fn answer_doc(r: &EnergyReport) -> Option<AnswerDoc> {
    let a = r.answer.as_ref()?;
    Some(AnswerDoc {
        energy: a.energy,
        sigma_stat: a.sigma_stat,
        sigma_sys: a.sigma_sys,
        sigma_fixed_dimension: a.sigma_fixed,
        sigma_selection: a.sigma_selection,
        sigma_total: a.sigma_total(),
        dimension: a.dimension,
        threshold: a.threshold,
        outside_bound: estimate::sanity::outside(a.energy, r.bound),
        method: ANSWER_METHOD,
        systematic: SystematicDoc {
            threshold_sensitivity: a.threshold_sensitivity,
            unconverged_dimension: a.unconverged,
            contamination: a.contamination_sigma(),
            contamination_bias: a.contamination,
            ritz_modulus: a.ritz_modulus,
            gap: a.gap,
            trotter: a.trotter_sigma,
            trotter_correction: a.trotter_correction,
            trotter_bound: a.trotter_bound.is_finite().then_some(a.trotter_bound),
        },
        accuracy: r.accuracy,
        accuracy_met: r.accuracy.map(|acc| a.sigma_total() <= acc),
        scan: a
            .scan
            .iter()
            .map(|x| ScanRowDoc {
                dimension: x.dimension,
                threshold: x.threshold,
                energy: x.energy,
                kept: x.kept,
                sigma_stat: x.sigma_stat,
                threshold_sensitivity: x.threshold_sensitivity,
                unconverged: x.unconverged,
                ritz: x.ritz,
                contamination_bias: x.contamination,
                ritz_modulus: x.ritz_modulus,
            })
            .collect(),
    })
}

fn series_points(s: &estimate::expect::Series) -> Vec<SeriesPoint> {
    s.values
        .iter()
        .zip(&s.std_errors)
        .enumerate()
        .map(|(k, (v, &(sr, si)))| SeriesPoint {
            k,
            re: v.re,
            im: v.im,
            re_std_error: sr,
            im_std_error: si,
        })
        .collect()
}

/// The energy document of an overlap or krylov plan.
pub fn energy_doc<'a>(r: &'a EnergyReport, plan: &'a Plan, order: BitOrder) -> EnergyDoc<'a> {
    EnergyDoc {
        format: "phasewright-estimate/1",
        energy_unit: plan.energy_unit.as_deref(),
        error_bars: "one bootstrap standard error (1 sigma)",
        family: estimate::family_name(r.family),
        dt: r.dt,
        points: plan.points,
        constant: r.constant,
        bit_order: order.name(),
        krylov_method: match r.kind {
            KrylovKind::Hamiltonian => "toeplitz-h-s",
            KrylovKind::Sine => "toeplitz-sine-s",
        },
        bootstrap: r.bootstrap,
        seed: r.seed,
        answer: answer_doc(r),
        reference_ground_weight: r.reference_weight,
        energies: r
            .rows
            .iter()
            .map(|row| EnergyRowDoc {
                dimension: row.dimension,
                threshold: row.threshold,
                krylov: row.krylov,
                krylov_std_error: row.krylov_std_error,
                kept: row.kept,
                pencil: row.pencil,
                pencil_std_error: row.pencil_std_error,
                krylov_outside_bound: row.krylov_outside_bound,
                pencil_outside_bound: row.pencil_outside_bound,
            })
            .collect(),
        energy_bound: BoundDoc {
            low: r.bound.0,
            high: r.bound.1,
            rule: "c +- sum|c_j| (triangle inequality)",
        },
        gram_min_eigenvalue: r.gram_min.0,
        gram_noise_scale: r.gram_min.1,
        outside_bound: r
            .rows
            .iter()
            .any(|x| x.krylov_outside_bound || x.pencil_outside_bound)
            || r.answer
                .as_ref()
                .is_some_and(|a| estimate::sanity::outside(a.energy, r.bound)),
        signal_loss: r.loss_method,
        exact: r.exact,
        exact_source: r.exact_source,
        overlaps: series_points(&r.overlaps),
        hamiltonian_elements: r.hamiltonian.as_ref().map(series_points),
        warnings: &r.warnings,
    }
}

/// The density-of-states document of a trace plan.
pub fn dos_doc<'a>(r: &'a DosReport, plan: &'a Plan, order: BitOrder) -> DosDoc<'a> {
    DosDoc {
        format: "phasewright-estimate/1",
        energy_unit: plan.energy_unit.as_deref(),
        family: "trace",
        dt: r.dt,
        points: r.points,
        qubit_count: r.num_qubits,
        state_count: r.num_states,
        bit_order: order.name(),
        sigma: r.sigma,
        resolution_limit: r.resolution,
        quadrature: "rectangle rule on t_k = k*dt, |k| <= K-1",
        band: r.band_source,
        trotter_band: r.trotter_band,
        sampling_relative_at_peak: r.sampling_relative,
        states_for_ten_percent: r.states_for_ten_percent,
        signal_loss: r.loss_method,
        trace: series_points(&r.trace),
        dos: (0..r.energies.len())
            .map(|i| DosPointDoc {
                energy: r.energies[i],
                density: r.density[i],
                std_error: r.std_error[i],
                quadrature_bound: r.quadrature_bound[i],
                exact: r.exact.as_ref().map(|e| e[i]),
            })
            .collect(),
        warnings: &r.warnings,
    }
}

/// The machine-readable result (`phasewright-estimate/1`): [`energy_doc`] or [`dos_doc`] as a
/// JSON value, keys in the order the structs declare them (serde_json's `preserve_order`).
pub fn to_json(a: &Analysis, plan: &Plan, order: BitOrder) -> Value {
    // Converting to a value fails only for maps with non-string keys; these documents have none,
    // and non-finite numbers become null.
    let value = match a {
        Analysis::Energies(r) => serde_json::to_value(energy_doc(r, plan, order)),
        Analysis::Dos(r) => serde_json::to_value(dos_doc(r, plan, order)),
    };
    value.expect("an estimate document has string keys only")
}

/// The lines that close the energy and density-of-states tables: how signal loss was undone,
/// how many warnings went to stderr, and the caution about `what` (energies, results) from
/// noisy hardware.
fn table_footer(s: &mut String, loss_method: Option<&str>, warnings: usize, what: &str) {
    if let Some(m) = loss_method {
        let _ = writeln!(s, "signal loss undone: {m}");
    }
    if warnings > 0 {
        let _ = writeln!(s, "{warnings} warning(s) on stderr");
    }
    let _ = writeln!(
        s,
        "caution: {what} from noisy hardware depend on the device calibration; validate against trusted methods"
    );
}
