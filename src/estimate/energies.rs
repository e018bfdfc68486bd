//! Energies from overlaps: point estimates per Krylov dimension, the bootstrap around them, and
//! the final answer's inputs (overlap and Krylov plans).
//!
//! In: a plan, its read table and per-circuit outcome weights, the user's [`Config`]. Out: an
//! [`EnergyReport`]: for every dimension `d = 1..=K` the Krylov energy (Toeplitz pencil
//! `(H, S)` or the sine pencil from overlaps alone) and the matrix-pencil energy, each with a
//! bootstrap standard error, plus the final answer, reference values and warnings. Invariant:
//! a bootstrap replicate uses the thresholds of the original data and ChaCha8 stream `b` of the
//! seed, so the error bars do not depend on the thread count; `c` is added back exactly once.

use super::*;

/// `h_k` from the shifted series `h_k − μS_k`.
pub(super) fn unshift(h: &Series, s: &Series, mu: f64) -> Series {
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
pub(super) fn energy_inputs(
    plan: &Plan,
    table: &ReadTable,
    weights: &[Vec<u64>],
) -> Result<(Series, Option<(Series, f64)>), EstimateError> {
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

pub(super) fn energies(
    plan: &Plan,
    table: &ReadTable,
    weights: &[Vec<u64>],
    cfg: &Config,
) -> Result<EnergyReport, EstimateError> {
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
