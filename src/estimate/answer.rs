//! One final answer: a recommended Krylov dimension and threshold, and the energy with a
//! statistical and a systematic error, `E = … ± σ_stat ± σ_sys`.
//!
//! In: the overlap series `S_k` with standard errors, bootstrap replicates of it, `dt`, the
//! shift `μ` (reference mean energy), the identity coefficient and what is known of the
//! Trotter bias ([`super::trotter`]). Out: an [`Answer`] with every part of the error named,
//! and the scan over dimensions it was chosen from. Invariant: the estimator is the unitary
//! pencil ([`krylov::unitary_ritz`]), which is exact for the compiled formula, so the only
//! formula-dependent error is the Trotter bias, which is either computed and removed or
//! bounded and counted in `σ_sys`; nothing else in the answer assumes `[H, U] = 0`.
//!
//! **Threshold from the noise of S.** The eigenvalues of the `d×d` Gram matrix move by at most
//! the spectral norm of its noise `‖δS_d‖₂` (Weyl). We estimate that norm directly: 32
//! Hermitian Toeplitz matrices with independent normal entries of the measured standard
//! errors (seeded), mean spectral norm `ν(d)`; the threshold is `ε(d) = `
//! [`THRESHOLD_FACTOR`]`·ν(d)`. For noise of equal size the norm grows like `σ̄·√(d log d)`
//! (Meckes 2007, cited from memory), slower than the `σ̄·d` of the per-row default, so fewer
//! resolved directions are discarded at large `d`. Epperly, Lin & Nakatsukasa, "A theory of
//! quantum subspace diagonalization", SIAM J. Matrix Anal. Appl. 43, 1263 (2022) show that
//! once `ε` exceeds the noise the energy error is bounded by a multiple of `ε` plus a term
//! that decays with `d`; Kirby, "Analysis of quantum Krylov algorithms with errors", Quantum 8,
//! 1457 (2024) refines this for thresholding (both cited from memory).
//!
//! **Plateau analysis.** For every `d` we compute the energy at `ε(d)` and its bootstrap error
//! `σ_d`, the *threshold sensitivity* `τ_d = max |E(d, ε) − E(d, ε(d))|` over `ε ∈ {ε/2, 2ε}`,
//! and the *unconverged part* `κ_d = max(0, E_d − min_{d' > d} E_{d'}) + κ_tail`, the drop still to come
//! at larger dimensions, where `κ_tail` extrapolates the last two drops geometrically beyond
//! the largest dimension ([`tail_remaining`]; an assumption, not a bound). The
//! recommended `d` minimises `σ_d² + τ_d² + κ_d²` (the smallest `d` on ties): it sits where
//! the energies have stopped falling and before noise takes over, the plateau of the scan.
//!
//! **σ_sys** = `√(τ² + κ² + β²)`, `β` the Trotter part: 0 when the bias was computed and
//! removed (small plans), otherwise `b/√3` for the rigorous bound `b` (the standard deviation
//! of a shift spread evenly over `[−b, b]`, our convention; the bound itself is printed).

use super::expect::Series;
use super::krylov;
use super::trotter::TrotterBias;
use nalgebra::DMatrix;
use num_complex::Complex64;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};

/// Threshold multiple of the mean noise norm `ν(d)` (a choice of ours; see the module header).
pub const THRESHOLD_FACTOR: f64 = 2.0;

/// Random noise matrices per dimension for `ν(d)`.
pub const NOISE_DRAWS: usize = 32;

/// Threshold multipliers tried for the sensitivity `τ_d`.
pub const SENSITIVITY_FACTORS: [f64; 2] = [0.5, 2.0];

/// One dimension of the scan.
#[derive(Clone, Debug, PartialEq)]
pub struct ScanRow {
    pub dimension: usize,
    pub threshold: f64,
    /// Quasi-energy (constant added, Trotter correction applied when computed).
    pub energy: Option<f64>,
    pub kept: Option<usize>,
    pub sigma_stat: Option<f64>,
    pub threshold_sensitivity: Option<f64>,
    pub unconverged: Option<f64>,
}

/// The recommended result.
#[derive(Clone, Debug, PartialEq)]
pub struct Answer {
    pub energy: f64,
    pub dimension: usize,
    pub threshold: f64,
    pub sigma_stat: f64,
    pub sigma_sys: f64,
    pub threshold_sensitivity: f64,
    pub unconverged: f64,
    /// Trotter part of σ_sys.
    pub trotter_sigma: f64,
    /// `ε_0 − E_0` subtracted from the energy, when computed.
    pub trotter_correction: Option<f64>,
    /// Rigorous bound on the Trotter shift (infinite when vacuous).
    pub trotter_bound: f64,
    pub scan: Vec<ScanRow>,
}

impl Answer {
    pub fn sigma_total(&self) -> f64 {
        self.sigma_stat.hypot(self.sigma_sys)
    }
}

/// Mean spectral norm of `d×d` Hermitian Toeplitz noise with the series' standard errors.
pub fn noise_norm(std_errors: &[(f64, f64)], d: usize, seed: u64) -> f64 {
    if std_errors
        .iter()
        .take(d)
        .all(|&(a, b)| a == 0.0 && b == 0.0)
    {
        return 0.0;
    }
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    rng.set_stream(d as u64);
    let mut total = 0.0;
    for _ in 0..NOISE_DRAWS {
        let e: Vec<Complex64> = std_errors
            .iter()
            .take(d)
            .enumerate()
            .map(|(k, &(sr, si))| {
                let re: f64 = StandardNormal.sample(&mut rng);
                let im: f64 = StandardNormal.sample(&mut rng);
                if k == 0 {
                    Complex64::new(re * sr, 0.0)
                } else {
                    Complex64::new(re * sr, im * si)
                }
            })
            .collect();
        let m: DMatrix<Complex64> = krylov::toeplitz(&e, d);
        let ev = m.symmetric_eigen().eigenvalues;
        total += ev.iter().fold(0.0f64, |a, x| a.max(x.abs()));
    }
    total / NOISE_DRAWS as f64
}

/// Thresholds `ε(d)` for `d = 1..=dmax`.
pub fn noise_thresholds(s: &Series, dmax: usize, seed: u64) -> Vec<f64> {
    (1..=dmax)
        .map(|d| (THRESHOLD_FACTOR * noise_norm(&s.std_errors, d, seed)).max(krylov::MIN_THRESHOLD))
        .collect()
}

/// Inputs of [`recommend`].
pub struct Inputs<'a> {
    pub s: &'a Series,
    /// Bootstrap replicates of `s` (may be empty: then `σ_stat` is 0 and says so).
    pub replicates: &'a [Series],
    pub dt: f64,
    pub shift: f64,
    pub constant: f64,
    pub trotter: &'a TrotterBias,
    pub seed: u64,
}

/// Scans `d = 1..K−1` and recommends one `(d, ε)`; `None` when no dimension gives an energy.
pub fn recommend(inp: &Inputs) -> Option<Answer> {
    let dmax = inp.s.len().saturating_sub(1);
    if dmax == 0 {
        return None;
    }
    let eps = noise_thresholds(inp.s, dmax, inp.seed);
    let correction = inp.trotter.computed.unwrap_or(0.0);
    let at = |s: &Series, d: usize, e: f64| {
        krylov::unitary_ritz(&s.values, inp.dt, d, e, inp.shift).map(|r| Ritz {
            energy: r.energy + inp.constant - correction,
            kept: r.kept,
        })
    };
    let base: Vec<Option<Ritz>> = (1..=dmax).map(|d| at(inp.s, d, eps[d - 1])).collect();
    let sigma: Vec<Option<f64>> = (1..=dmax)
        .map(|d| {
            base[d - 1]?;
            let xs: Vec<f64> = inp
                .replicates
                .iter()
                .filter_map(|r| at(r, d, eps[d - 1]).map(|x| x.energy))
                .collect();
            if inp.replicates.is_empty() {
                Some(0.0)
            } else {
                super::robust_spread(&xs)
            }
        })
        .collect();
    let sens: Vec<Option<f64>> = (1..=dmax)
        .map(|d| {
            let e0 = base[d - 1]?.energy;
            Some(
                SENSITIVITY_FACTORS
                    .iter()
                    .filter_map(|f| at(inp.s, d, eps[d - 1] * f))
                    .map(|r| (r.energy - e0).abs())
                    .fold(0.0, f64::max),
            )
        })
        .collect();
    let energies: Vec<Option<f64>> = base.iter().map(|r| r.map(|x| x.energy)).collect();
    let tail = tail_remaining(&energies);
    let conv: Vec<Option<f64>> = (0..dmax)
        .map(|i| {
            let e = energies[i]?;
            let later = energies[i + 1..]
                .iter()
                .flatten()
                .copied()
                .fold(f64::INFINITY, f64::min);
            let seen = if later.is_finite() {
                (e - later).max(0.0)
            } else {
                0.0
            };
            Some(seen + tail)
        })
        .collect();
    let scan: Vec<ScanRow> = (0..dmax)
        .map(|i| ScanRow {
            dimension: i + 1,
            threshold: eps[i],
            energy: energies[i],
            kept: base[i].map(|r| r.kept),
            sigma_stat: sigma[i],
            threshold_sensitivity: sens[i],
            unconverged: conv[i],
        })
        .collect();
    let best = scan
        .iter()
        .filter_map(|r| {
            let v =
                r.sigma_stat?.powi(2) + r.threshold_sensitivity?.powi(2) + r.unconverged?.powi(2);
            Some((r, v))
        })
        .min_by(|a, b| a.1.total_cmp(&b.1).then(a.0.dimension.cmp(&b.0.dimension)))?
        .0
        .clone();
    let trotter_sigma = match inp.trotter.computed {
        Some(_) => 0.0,
        None => inp.trotter.energy_bound / 3f64.sqrt(),
    };
    let tau = best.threshold_sensitivity.unwrap_or(0.0);
    let kappa = best.unconverged.unwrap_or(0.0);
    Some(Answer {
        energy: best.energy?,
        dimension: best.dimension,
        threshold: best.threshold,
        sigma_stat: best.sigma_stat.unwrap_or(0.0),
        sigma_sys: (tau * tau + kappa * kappa + trotter_sigma * trotter_sigma).sqrt(),
        threshold_sensitivity: tau,
        unconverged: kappa,
        trotter_sigma,
        trotter_correction: inp.trotter.computed,
        trotter_bound: inp.trotter.energy_bound,
        scan,
    })
}

/// Drop still expected beyond the largest dimension: with the last two drops `a` (older) and
/// `b` (newer) of the energies, a geometric decay of ratio `r = b/a` (clamped to [0, 0.9])
/// leaves `b·r/(1 − r)` to come; with fewer than two drops, the last drop itself. An
/// assumption about the convergence (Krylov errors fall roughly geometrically with `d`,
/// Epperly, Lin & Nakatsukasa 2022), not a bound.
pub fn tail_remaining(energies: &[Option<f64>]) -> f64 {
    let e: Vec<f64> = energies.iter().flatten().copied().collect();
    let n = e.len();
    if n < 2 {
        return 0.0;
    }
    let b = (e[n - 2] - e[n - 1]).max(0.0);
    if n < 3 {
        return b;
    }
    let a = (e[n - 3] - e[n - 2]).max(0.0);
    if a <= 0.0 {
        return b;
    }
    let r = (b / a).clamp(0.0, 0.9);
    b * r / (1.0 - r)
}

#[derive(Clone, Copy)]
struct Ritz {
    energy: f64,
    kept: usize,
}

/// Warnings about the answer: systematic part above the statistical one, or above the
/// requested accuracy.
pub fn warnings(a: &Answer, accuracy: Option<f64>) -> Vec<String> {
    let mut out = Vec::new();
    let parts = [
        ("threshold sensitivity", a.threshold_sensitivity),
        ("unconverged dimension", a.unconverged),
        ("Trotter bias", a.trotter_sigma),
    ];
    let main = parts
        .iter()
        .max_by(|x, y| x.1.total_cmp(&y.1))
        .map(|x| x.0)
        .unwrap_or("");
    if !a.sigma_sys.is_finite() {
        out.push(
            "the Trotter bias is not bounded at this dt (the commutator bound exceeds 2 per \
             dt): σ_sys is unknown; compile with a smaller dt or more steps"
                .to_string(),
        );
    } else if a.sigma_sys > a.sigma_stat {
        out.push(format!(
            "the systematic error σ_sys = {:.2e} exceeds the statistical one σ_stat = {:.2e} \
             (largest part: {main}); more shots will not make the answer more accurate",
            a.sigma_sys, a.sigma_stat
        ));
    }
    if let Some(acc) = accuracy {
        let total = a.sigma_total();
        if total.is_nan() || total > acc {
            out.push(format!(
                "the total error √(σ_stat² + σ_sys²) = {total:.2e} exceeds the requested \
                 accuracy {acc:.2e} (largest systematic part: {main})"
            ));
        }
    }
    out
}
