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
//! [`energies`] (series → energies per dimension with bootstrap errors, for overlap and
//! Krylov plans) built on [`krylov`] (Toeplitz pencil, thresholding), [`overlap_only`] (matrix
//! pencil) and [`answer`] (one final answer with its systematic parts); [`trace`] (series →
//! density of states, for trace plans) built on [`dos`] (the quadrature); [`results`] (the two
//! reports), [`plan_facts`] (the Hamiltonian and reference energies read off a plan),
//! [`sanity`], [`trotter`], [`reference`](mod@reference) (checks and bounds), [`resample`]
//! (multinomial draws for the bootstrap), [`error`] (the layer's error). This file holds [`analyse`], which
//! picks the stages for the plan's family and looks for a swapped bit order.
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
pub mod energies;
pub mod error;
pub mod expect;
pub mod krylov;
pub mod overlap_only;
pub mod plan_facts;
pub mod reference;
pub mod resample;
pub mod results;
pub mod sanity;
pub mod trace;
pub mod trotter;

pub use energies::*;
pub use plan_facts::*;
pub use results::*;
pub use trace::*;

use crate::pauli::{Pauli, PauliSum};
use crate::plan::{Family, Plan};
use counts::CountsFile;
pub use error::EstimateError;
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

#[derive(Clone, Debug, PartialEq)]
pub enum Analysis {
    Energies(EnergyReport),
    Dos(DosReport),
}

/// Runs the estimators the plan's family calls for. Errors say what is missing or wrong (a
/// plan that lacks a needed circuit, an invalid option), all bad input.
///
/// # Example
///
/// The transverse-field Ising pair `H = Z0 Z1 + 0.5 X0 + 0.5 X1`, compiled into an overlap
/// campaign from `|01⟩`, every circuit simulated and sampled (20 000 shots, seeded), and the
/// counts turned into energies. Worked by hand: `⟨01|H|01⟩ = −1` (the `X` terms flip a bit),
/// which the one-dimensional Krylov row reproduces; the ground energy is `−√2` (on
/// `(|00⟩+|11⟩)/√2` and `(|01⟩+|10⟩)/√2`, `H` is `[[1, 1], [1, −1]]`, eigenvalues `±√2`), and
/// the final answer lies between the two, within its error bars.
///
/// ```
/// use phasewright::estimate::counts::{BitOrder, CircuitCounts, CountsFile};
/// use phasewright::estimate::{analyse, Analysis, Config};
/// use phasewright::family::{control::Control, Spec};
/// use phasewright::plan::Family;
/// use phasewright::formula::Order;
/// use phasewright::sim::{self, shots::sample_counts, State};
/// use rand::SeedableRng;
///
/// let src = "qubits 2\n1.0 Z0 Z1\n0.5 X0\n0.5 X1\n";
/// let ham = phasewright::hamiltonian::parse_hamiltonian("pair.ham", src).unwrap();
/// let spec = Spec {
///     family: Family::Overlap,
///     order: Order::Second,
///     dt: 0.2,
///     points: 4,
///     steps_per_dt: 1,
///     states: vec!["01".into()],
///     control: Control::Evolution,
/// };
/// let compiled = phasewright::pipeline::compile(&ham.sum, "pair.ham", &spec).unwrap();
/// let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(1);
/// let circuits = compiled
///     .circuits()
///     .iter()
///     .map(|c| {
///         let p = sim::measured_distribution(c, &sim::run(c, State::zero(c.num_qubits)));
///         let outcomes = sample_counts(&p, 20_000, &mut rng);
///         CircuitCounts {
///             num_bits: c.num_clbits,
///             outcomes: outcomes.into_iter().map(|(k, n)| (k as u128, n)).collect(),
///         }
///     })
///     .collect();
/// let counts = CountsFile { bit_order: BitOrder::First, circuits };
/// let Analysis::Energies(report) = analyse(&compiled.plan, &counts, &Config::default()).unwrap()
/// else {
///     panic!("an overlap plan gives energies")
/// };
/// let answer = report.answer.expect("a final answer");
/// let first = &report.rows[0];
/// assert!((first.krylov.unwrap() + 1.0).abs() <= 4.0 * first.krylov_std_error.unwrap());
/// let ground = -(2f64.sqrt());
/// let tolerance = 4.0 * answer.sigma_stat + answer.sigma_sys;
/// assert!(answer.energy < -1.0 && answer.energy >= ground - tolerance);
/// ```
pub fn analyse(plan: &Plan, counts: &CountsFile, cfg: &Config) -> Result<Analysis, EstimateError> {
    if plan.family == Family::Evolution {
        return Err(EstimateError::Evolution);
    }
    if plan.points < 1 {
        return Err(EstimateError::Plan("the plan has no time points".into()));
    }
    if plan.formula.dt.is_nan() || plan.formula.dt <= 0.0 {
        return Err(EstimateError::Plan(format!(
            "the plan's dt must be positive, found {}",
            plan.formula.dt
        )));
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
        Family::Evolution => Err(EstimateError::Evolution),
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
