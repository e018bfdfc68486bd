//! From counts to energies: overlaps with error bars, Krylov energies, an overlap-only
//! estimate, and the density of states.
//!
//! In: a [`Plan`] and its checked [`counts::CountsFile`] (or, for library users and tests,
//! the time series directly). Out: an [`Analysis`]: for `overlap`/`krylov` plans the lowest
//! energy for every Krylov dimension with a bootstrap standard error beside the matrix-pencil
//! estimate; for `trace` plans the broadened density of states with its band and quadrature
//! bound. Invariant: the identity coefficient `c` of `H` is never compiled, so every energy
//! here is computed for `H' = H − c` and `c` is added back exactly once, in this module.
//!
//! Submodules, in data order: [`allot`] (shots per circuit, before a run), [`counts`] (file →
//! histograms), [`expect`] (histograms → parity expectations ± binomial error → series),
//! [`krylov`] (Toeplitz pencil, thresholding), [`answer`] (one final answer with its
//! systematic parts), [`overlap_only`] (matrix pencil), [`dos`] (density of states),
//! [`resample`] (exact multinomial draws for the bootstrap).
//!
//! Stochastic trace (trace plans): `tr U/2ⁿ` is the mean of `⟨ψ_s|U|ψ_s⟩` over random states
//! whose average projector is `I/2ⁿ` (Hutchinson, Commun. Stat. Simul. Comput. 18, 1059
//! (1989); cited from memory).
//!
//! Bootstrap (Efron & Tibshirani, *An Introduction to the Bootstrap*, 1993, ch. 6): every
//! circuit's histogram is redrawn as Multinomial(shots, observed frequencies), everything is
//! recomputed with the threshold of the original data, and the error bar is the standard
//! deviation of the replicates. Replicate `b` uses ChaCha8 stream `b` of the seed, so results
//! do not depend on the thread count.

pub mod allot;
pub mod answer;
pub mod budget;
pub mod counts;
pub mod dos;
pub mod expect;
pub mod krylov;
pub mod overlap_only;
pub mod reference;
pub mod resample;
pub mod sanity;
pub mod trotter;

use crate::family::plan::{Family, Plan};
use crate::pauli::{Pauli, PauliSum};
use counts::CountsFile;
use expect::{ReadTable, Series};
use num_complex::Complex64;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;

/// Largest Hamiltonian diagonalised automatically for reference values (a 256×256 problem).
pub const EXACT_MAX_QUBITS: usize = 8;

/// Default number of bootstrap replicates (the standard error of a bootstrap standard
/// deviation from B replicates is ≈ 1/√(2B) relative: 5% at B = 200; Efron & Tibshirani 1993,
/// ch. 6 recommend 50–200 for standard errors).
pub const DEFAULT_BOOTSTRAP: usize = 200;

/// Number of energies at which the density of states is evaluated by default.
pub const DEFAULT_DOS_POINTS: usize = 401;

/// Choices the user can make; `None` means the documented default.
#[derive(Clone, Debug, PartialEq)]
pub struct Config {
    /// Eigenvalue threshold for `S` (same for every dimension); default from the shot noise.
    pub threshold: Option<f64>,
    /// DOS broadening `σ`; default [`dos::default_sigma`].
    pub sigma: Option<f64>,
    /// Bootstrap replicates (0 disables error bars on energies).
    pub bootstrap: usize,
    pub seed: u64,
    /// A trusted ground energy to show beside the estimates (overrides the automatic one).
    pub exact: Option<f64>,
    pub dos_points: usize,
    /// Divide each circuit's reads by its calibrated success probability (`--undo-loss`).
    pub undo_loss: bool,
    /// Requested accuracy of the final answer (`--accuracy`); a warning when missed.
    pub accuracy: Option<f64>,
}

impl Default for Config {
    fn default() -> Config {
        Config {
            threshold: None,
            sigma: None,
            bootstrap: DEFAULT_BOOTSTRAP,
            seed: 0,
            exact: None,
            dos_points: DEFAULT_DOS_POINTS,
            undo_loss: false,
            accuracy: None,
        }
    }
}

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

#[derive(Clone, Debug, PartialEq)]
pub enum Analysis {
    Energies(EnergyReport),
    Dos(DosReport),
}

/// Runs the estimators the plan's family calls for. Errors are plain messages (a plan that
/// lacks a needed circuit, an invalid option).
pub fn analyse(plan: &Plan, counts: &CountsFile, cfg: &Config) -> Result<Analysis, String> {
    if plan.family == Family::Evolution {
        return Err(EVOLUTION_REFUSAL.into());
    }
    if plan.points < 1 {
        return Err("the plan has no time points".into());
    }
    if plan.formula.dt.is_nan() || plan.formula.dt <= 0.0 {
        return Err(format!(
            "the plan's dt must be positive, found {}",
            plan.formula.dt
        ));
    }
    let loss = if cfg.undo_loss {
        Some(sanity::calibrated_loss(plan)?)
    } else {
        None
    };
    let table_of = |c: &CountsFile| {
        let t = ReadTable::new(plan, &c.circuits);
        match &loss {
            Some(f) => t.undo_loss(f),
            None => t,
        }
    };
    let table = table_of(counts);
    let weights = ReadTable::weights_of(&counts.circuits);
    let mut a = match plan.family {
        Family::Overlap | Family::Krylov => {
            energies(plan, &table, &weights, cfg).map(Analysis::Energies)
        }
        Family::Trace => density(plan, &table, &weights, cfg).map(Analysis::Dos),
        Family::Evolution => Err(EVOLUTION_REFUSAL.into()),
    }?;
    // Bit order: count the violated bounds under both readings of the bitstrings.
    let given = implausibility(plan, &table, &weights, cfg);
    if !given.is_empty() {
        let rev = sanity::reversed(counts);
        let other = implausibility(plan, &table_of(&rev), &weights_of_same(&rev), cfg);
        if other.len() < given.len() {
            let shown: Vec<&str> = given.iter().take(3).map(String::as_str).collect();
            let w = format!(
                "the counts fit the other bit order better: read with bit 0 {} they violate \
                 {} bound{} that hold for any exact data ({}{}), read with bit 0 {} only {}; \
                 if the file lists classical bit 0 {}, rerun with --bit-order {}",
                order_words(counts.bit_order),
                given.len(),
                if given.len() == 1 { "" } else { "s" },
                shown.join("; "),
                if given.len() > 3 { "; …" } else { "" },
                order_words(rev.bit_order),
                other.len(),
                order_words(rev.bit_order),
                rev.bit_order.name()
            );
            match &mut a {
                Analysis::Energies(r) => r.warnings.push(w),
                Analysis::Dos(r) => r.warnings.push(w),
            }
        }
    }
    Ok(a)
}

fn weights_of_same(c: &CountsFile) -> Vec<Vec<u64>> {
    ReadTable::weights_of(&c.circuits)
}

fn order_words(o: counts::BitOrder) -> &'static str {
    match o {
        counts::BitOrder::First => "leftmost",
        counts::BitOrder::Last => "rightmost",
    }
}

/// Bounds that the series read from `weights` violate beyond noise, and (energy plans) the
/// point estimates at the default thresholds that fall outside the one-norm bound.
fn implausibility(
    plan: &Plan,
    table: &ReadTable,
    weights: &[Vec<u64>],
    cfg: &Config,
) -> Vec<String> {
    match plan.family {
        Family::Overlap | Family::Krylov => {
            let Ok((s, h)) = energy_inputs(plan, table, weights) else {
                return vec!["a series cannot be built".into()];
            };
            let h_full = h.as_ref().map(|(h, mu)| unshift(h, &s, *mu));
            let mut v = sanity::series_violations(plan, &s, h_full.as_ref(), "ψ_0");
            let eps = thresholds(&s, cfg.threshold);
            let center = product_state_mean(plan, 0).unwrap_or(0.0);
            let bound = sanity::energy_bound(plan);
            let c = plan.hamiltonian.constant;
            let pts = point_estimates_shifted(
                &s,
                h.as_ref().map(|(h, mu)| (h, *mu)),
                plan.formula.dt,
                &eps,
                sample_noise(&s),
                center,
            );
            for (d, (kr, pe)) in pts.iter().enumerate() {
                if let Some(e) = kr
                    .map(|r| r.energy + c)
                    .filter(|&e| sanity::outside(e, bound))
                {
                    v.push(format!(
                        "krylov d = {}: {e:.4} outside the one-norm bound",
                        d + 1
                    ));
                }
                if let Some(e) = pe.map(|e| e + c).filter(|&e| sanity::outside(e, bound)) {
                    v.push(format!(
                        "pencil d = {}: {e:.4} outside the one-norm bound",
                        d + 1
                    ));
                }
            }
            v
        }
        Family::Evolution => Vec::new(),
        Family::Trace => {
            let q = table.evaluate(weights);
            (0..plan.states.len())
                .flat_map(|st| match expect::overlap_series(&q, st, plan.points) {
                    Ok(s) => sanity::series_violations(plan, &s, None, &format!("ψ_{st}")),
                    Err(_) => vec!["a series cannot be built".into()],
                })
                .collect()
        }
    }
}

/// `h_k` from the shifted series `h_k − μS_k`.
fn unshift(h: &Series, s: &Series, mu: f64) -> Series {
    Series {
        values: h
            .values
            .iter()
            .zip(&s.values)
            .map(|(a, b)| a + b * mu)
            .collect(),
        std_errors: h.std_errors.clone(),
    }
}

/// The series an energy analysis needs, from one set of histograms: `S_k`, and for Krylov
/// plans the shifted `h_k − μ S_k` with its shift `μ` (see `expect`'s module header).
fn energy_inputs(
    plan: &Plan,
    table: &ReadTable,
    weights: &[Vec<u64>],
) -> Result<(Series, Option<(Series, f64)>), String> {
    let q = table.evaluate(weights);
    let s = expect::overlap_series(&q, 0, plan.points)?;
    let h = match plan.family {
        Family::Krylov => {
            let coeffs: Vec<f64> = plan.hamiltonian.terms.iter().map(|t| t.coeff).collect();
            let anc = table.evaluate_group_ancillas(weights);
            let groups = expect::group_terms(plan);
            Some(expect::shifted_energy_series(
                &q,
                &anc,
                &coeffs,
                &groups,
                0,
                plan.points,
            )?)
        }
        _ => None,
    };
    Ok((s, h))
}

/// Krylov thresholds per dimension (`d = 1..=K`).
pub fn thresholds(overlaps: &Series, user: Option<f64>) -> Vec<f64> {
    (1..=overlaps.len())
        .map(|d| user.unwrap_or_else(|| krylov::default_threshold(&overlaps.std_errors, d)))
        .collect()
}

/// RMS standard error of one complex sample `S_k`, `k ≥ 1`.
pub fn sample_noise(overlaps: &Series) -> f64 {
    let tail = &overlaps.std_errors[1.min(overlaps.len())..];
    if tail.is_empty() {
        return 0.0;
    }
    (tail.iter().map(|(a, b)| a * a + b * b).sum::<f64>() / tail.len() as f64).sqrt()
}

/// Point estimates (no error bars) for dimensions `1..=K`: `(krylov, kept, pencil)` for `H'`
/// (constant not added). `h = None` selects the overlap-only sine pencil. `center` is the mean
/// energy `⟨ψ|H'|ψ⟩` (or an estimate): the shift of the sine pencil and the centre of the
/// matrix pencil's energy window.
pub fn point_estimates(
    s: &Series,
    h: Option<&Series>,
    dt: f64,
    thresholds: &[f64],
    pencil_noise: f64,
    center: f64,
) -> Vec<(Option<krylov::Ritz>, Option<f64>)> {
    point_estimates_shifted(s, h.map(|h| (h, 0.0)), dt, thresholds, pencil_noise, center)
}

/// As [`point_estimates`], with `h` given as `h_k − μ S_k` and its shift `μ`: the pencil is
/// solved for `H' − μ` and `μ` is added back to every Krylov energy.
pub fn point_estimates_shifted(
    s: &Series,
    h: Option<(&Series, f64)>,
    dt: f64,
    thresholds: &[f64],
    pencil_noise: f64,
    center: f64,
) -> Vec<(Option<krylov::Ritz>, Option<f64>)> {
    let k = s.len();
    let kry: Vec<Option<krylov::Ritz>> = (1..=k)
        .map(|d| {
            let eps = thresholds[d - 1];
            match h {
                Some((h, mu)) => krylov::lowest_ritz(
                    &krylov::toeplitz(&h.values, d),
                    &krylov::toeplitz(&s.values, d),
                    eps,
                )
                .map(|r| krylov::Ritz {
                    energy: r.energy + mu,
                    ..r
                }),
                None if d < k => krylov::sine_ritz(&s.values, dt, d, eps, center),
                None => None,
            }
        })
        .collect();
    let pencil = overlap_only::pencil_energies(&s.values, dt, pencil_noise, center);
    kry.into_iter().zip(pencil).collect()
}

fn energies(
    plan: &Plan,
    table: &ReadTable,
    weights: &[Vec<u64>],
    cfg: &Config,
) -> Result<EnergyReport, String> {
    let dt = plan.formula.dt;
    let c = plan.hamiltonian.constant;
    let (s, h) = energy_inputs(plan, table, weights)?;
    let eps = thresholds(&s, cfg.threshold);
    let noise = sample_noise(&s);
    // Mean energy of the reference state: exact from the plan for product states, else
    // h'_0 + μ (h'_0 = h_0 − μ), else the phase of S_1.
    let center = product_state_mean(plan, 0).unwrap_or_else(|| match &h {
        Some((h, mu)) => h.values[0].re + mu,
        None => overlap_only::mean_energy_from_overlap(&s.values, dt),
    });
    let point = point_estimates_shifted(
        &s,
        h.as_ref().map(|(h, mu)| (h, *mu)),
        dt,
        &eps,
        noise,
        center,
    );
    let kind = if h.is_some() {
        KrylovKind::Hamiltonian
    } else {
        KrylovKind::Sine
    };
    let mut warnings = Vec::new();
    if kind == KrylovKind::Sine && plan.hamiltonian.one_norm * dt > std::f64::consts::FRAC_PI_2 {
        warnings.push(format!(
            "the overlap-only Krylov estimate assumes ‖H − c − μ‖·dt ≤ π/2 (μ: mean energy of \
             the reference state); only the bound Σ|c_j|·dt = {:.3} is known, so check the \
             spectral width",
            plan.hamiltonian.one_norm * dt
        ));
    }
    if plan.hamiltonian.one_norm * dt > std::f64::consts::PI {
        warnings.push(format!(
            "Σ|c_j|·dt = {:.3} exceeds π: the matrix pencil resolves energies only within \
             ±π/dt of the reference state's mean energy",
            plan.hamiltonian.one_norm * dt
        ));
    }

    // Bootstrap replicates: each a vector over dimensions of (krylov, pencil), and the
    // replicate's overlap series for the final answer.
    let both: Vec<(Vec<Replicate>, Option<Series>)> = (0..cfg.bootstrap)
        .into_par_iter()
        .map(|b| {
            let mut rng = ChaCha8Rng::seed_from_u64(cfg.seed);
            rng.set_stream(b as u64);
            let w: Vec<Vec<u64>> = weights
                .iter()
                .map(|w| {
                    let n: u64 = w.iter().sum();
                    let p: Vec<f64> = w.iter().map(|&x| x as f64).collect();
                    resample::multinomial(&mut rng, n, &p)
                })
                .collect();
            match energy_inputs(plan, table, &w) {
                Ok((s2, h2)) => (
                    point_estimates_shifted(
                        &s2,
                        h2.as_ref().map(|(h, mu)| (h, *mu)),
                        dt,
                        &eps,
                        noise,
                        center,
                    )
                    .into_iter()
                    .map(|(k, p)| (k.map(|r| r.energy), p))
                    .collect(),
                    Some(s2),
                ),
                Err(_) => (Vec::new(), None),
            }
        })
        .collect();
    let (reps, rep_series): (Vec<Vec<Replicate>>, Vec<Option<Series>>) = both.into_iter().unzip();
    let rep_series: Vec<Series> = rep_series.into_iter().flatten().collect();
    let spread = |pick: &dyn Fn(&Replicate) -> Option<f64>, d: usize| {
        let xs: Vec<f64> = reps
            .iter()
            .filter_map(|r| r.get(d).and_then(pick))
            .collect();
        robust_spread(&xs)
    };
    let bound = sanity::energy_bound(plan);
    let rows: Vec<EnergyRow> = point
        .iter()
        .enumerate()
        .map(|(i, (kr, pe))| {
            let krylov = kr.map(|r| r.energy + c);
            let pencil = pe.map(|e| e + c);
            EnergyRow {
                dimension: i + 1,
                threshold: eps[i],
                krylov,
                kept: kr.map(|r| r.kept),
                krylov_std_error: kr.and_then(|_| spread(&|x| x.0, i)),
                pencil,
                pencil_std_error: pe.and_then(|_| spread(&|x| x.1, i)),
                krylov_outside_bound: krylov.is_some_and(|e| sanity::outside(e, bound)),
                pencil_outside_bound: pencil.is_some_and(|e| sanity::outside(e, bound)),
            }
        })
        .collect();
    for (col, pick) in [
        (
            "krylov",
            (|r: &EnergyRow| r.krylov_outside_bound) as fn(&EnergyRow) -> bool,
        ),
        ("pencil", |r: &EnergyRow| r.pencil_outside_bound),
    ] {
        let bad: Vec<String> = rows
            .iter()
            .filter(|r| pick(r))
            .map(|r| r.dimension.to_string())
            .collect();
        if !bad.is_empty() {
            warnings.push(format!(
                "{col} energies at d = {} lie outside [{:.6}, {:.6}], the bound c ± Σ|c_j| \
                 (|E − c| ≤ Σ|c_j| by the triangle inequality, ‖P_j‖ = 1) that every \
                 eigenvalue of H obeys; those rows are marked `!` and are not energies of H",
                bad.join(", "),
                bound.0,
                bound.1
            ));
        }
    }
    let gram_min = sanity::gram_min_eigenvalue(&s);
    if let Some(w) = sanity::gram_warning(&s, "the reference state") {
        warnings.push(w);
    }
    let (exact, exact_source) = match cfg.exact {
        Some(e) => (Some(e), Some("--exact")),
        None => match small_hamiltonian(plan) {
            Some(hs) => (
                Some(crate::sim::exact::spectrum(&hs).values[0]),
                Some("dense diagonalisation"),
            ),
            None => (None, None),
        },
    };
    // A reference without ground-state weight cannot show E0: say so rather than print a number
    // that looks like it.
    let reference_weight = plan
        .states
        .first()
        .and_then(|st| Some((st, plan_hamiltonian(plan).ok()?)))
        .and_then(|(st, h)| reference::ground_weight(&h, st));
    if let Some(w) = &reference_weight {
        if w.weight < reference::LOW_WEIGHT {
            warnings.push(format!(
                "the reference state {} has ground-state weight |⟨ψ|E0⟩|² = {:.4} < {} ({}): \
                 the energies below converge slowly or to an excited state, whatever their \
                 error bars say; recompile with a better --state (e.g. --state auto)",
                plan.states[0],
                w.weight,
                reference::LOW_WEIGHT,
                w.method
            ));
        }
    }
    // One final answer from the consistent (unitary) pencil, with its systematic parts.
    let trot = trotter::plan_bias(plan).ok();
    let ans = trot.as_ref().and_then(|tb| {
        answer::recommend(&answer::Inputs {
            s: &s,
            replicates: &rep_series,
            dt,
            shift: answer::phase_centre(center, plan.hamiltonian.one_norm, dt),
            constant: c,
            trotter: tb,
            seed: cfg.seed,
        })
    });
    match &ans {
        Some(a) if sanity::outside(a.energy, bound) => warnings.push(format!(
            "the final answer {:.6} lies outside [{:.6}, {:.6}], the bound c ± Σ|c_j| that every \
             eigenvalue of H obeys: it is not an energy of H (counts in the other bit order, \
             counts of another campaign, or a phase aliased by too large a dt)",
            a.energy, bound.0, bound.1
        )),
        Some(a) => warnings.extend(answer::warnings(a, cfg.accuracy)),
        None => warnings.push(
            "no final answer: the unitary pencil kept no Ritz value at any dimension (the \
             overlaps are too noisy or the plan has fewer than 2 time points)"
                .into(),
        ),
    }
    // Reported as an estimate of h_k itself: (h_k − μS_k) + μS_k.
    let h_reported = h.map(|(h, mu)| unshift(&h, &s, mu));
    Ok(EnergyReport {
        family: plan.family,
        kind,
        dt,
        constant: c,
        rows,
        overlaps: s,
        hamiltonian: h_reported,
        exact,
        exact_source,
        bootstrap: cfg.bootstrap,
        seed: cfg.seed,
        bound,
        gram_min,
        loss_method: cfg.undo_loss.then_some(LOSS_CALIBRATED),
        answer: ans,
        trotter: trot,
        reference_weight: reference_weight.map(|w| w.weight),
        accuracy: cfg.accuracy,
        warnings,
    })
}

/// One bootstrap replicate at one dimension: (Krylov energy, pencil energy).
type Replicate = (Option<f64>, Option<f64>);

/// Bootstrap standard error that a few wild replicates cannot inflate: half the distance
/// between the 15.87th and 84.13th percentiles, which equals σ for a normal distribution
/// (the percentile bootstrap; Efron & Tibshirani, "An Introduction to the Bootstrap", 1993,
/// ch. 13). Near an ill-conditioned dimension a handful of replicates keep a different number
/// of directions and land far away; the plain standard deviation would report them as noise of
/// the whole estimate. `None` with fewer than 2 values.
pub fn robust_spread(xs: &[f64]) -> Option<f64> {
    if xs.len() < 2 {
        return None;
    }
    let mut v = xs.to_vec();
    v.sort_by(|a, b| a.total_cmp(b));
    let q = |p: f64| {
        let x = p * (v.len() - 1) as f64;
        let (i, f) = (x.floor() as usize, x - x.floor());
        v[i] + f * (v[(i + 1).min(v.len() - 1)] - v[i])
    };
    Some(0.5 * (q(0.841_344_746) - q(0.158_655_254)))
}

/// Sample standard deviation; `None` with fewer than 2 values.
pub fn std_dev(xs: &[f64]) -> Option<f64> {
    if xs.len() < 2 {
        return None;
    }
    let m = xs.iter().sum::<f64>() / xs.len() as f64;
    Some((xs.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (xs.len() - 1) as f64).sqrt())
}

fn density(
    plan: &Plan,
    table: &ReadTable,
    weights: &[Vec<u64>],
    cfg: &Config,
) -> Result<DosReport, String> {
    let q = table.evaluate(weights);
    let n_states = plan.states.len();
    if n_states == 0 {
        return Err("the trace plan lists no states".into());
    }
    let per_state: Vec<Series> = (0..n_states)
        .map(|s| expect::overlap_series(&q, s, plan.points))
        .collect::<Result<_, _>>()?;
    let dt = plan.formula.dt;
    let sigma = cfg
        .sigma
        .unwrap_or_else(|| dos::default_sigma(plan.points, dt));
    if sigma.is_nan() || sigma <= 0.0 {
        return Err(format!("the broadening must be positive, found {sigma}"));
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
pub fn plan_hamiltonian(plan: &Plan) -> Result<PauliSum, String> {
    plan.pauli_sum()
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
