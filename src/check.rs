//! Self-check: simulate each emitted circuit and compare with the ideal product formula and the
//! exact evolution.
//!
//! In: a [`Plan`], the circuits read back from its files, and the Hamiltonian rebuilt from the
//! plan. Out: one [`CircuitCheck`] per circuit, each read's simulated parity expectation beside
//! the ideal product-formula value and the exact value, the compile error
//! `|simulated − ideal|` (must be ≤ [`COMPILE_TOLERANCE`]) and the Trotter error
//! `|ideal − exact|`. The simulation starts from |0…0⟩ and uses only the gates in the file, so
//! a wrong state preparation, a wrong qubit permutation or a wrong measurement wire all show up.
//! With [`CheckOptions::exact`] off the exact evolution (the slow part on wide circuits) is not
//! computed and the exact values and Trotter errors are `None`.
//!
//! Errors are [`CheckError`]s: a plan that does not describe a campaign, a circuit file that
//! does not measure what its plan entry reads, or a simulation too large for this machine — all
//! bad input (exit 2); a compile error above tolerance is not an error here but a verdict.

use crate::circuit::Circuit;
use crate::diag::Code;
use crate::error::{Blame, LayerError};
use crate::family::{RefState, StateError};
use crate::formula::{apply_program, evolution, order_terms, Order};
use crate::pauli::{PauliString, PauliSum};
use crate::plan::{CircuitEntry, Part, Plan, Target};
use crate::sim::exact::Propagator;
use crate::sim::SimError;
use crate::sim::{run, State};
use num_complex::Complex64;
use rayon::prelude::*;
use serde::Serialize;

/// Largest acceptable `|simulated − ideal|`: rounding in ~10⁵ gates stays near 1e-12, so 1e-9
/// leaves three orders of margin while any real compile bug is far larger.
pub const COMPILE_TOLERANCE: f64 = 1e-9;

/// Why a plan and its circuits cannot be checked.
#[derive(Clone, Debug, PartialEq)]
pub enum CheckError {
    /// The plan does not describe a campaign: a term that does not parse, an unknown formula
    /// order, a bad state letter, a read of a term the plan does not list. (`Plan::validate`
    /// reports these with their place first; a plan built in code can still reach them.)
    Plan(String),
    /// A read of circuit `circuit` names a classical bit its file never measures.
    UnmeasuredBit { circuit: Option<String>, bit: u32 },
    /// The simulation (of circuit `circuit`, or of the references) does not fit this machine.
    TooLarge {
        circuit: Option<String>,
        source: SimError,
    },
}

impl CheckError {
    /// The same error, said of circuit `id`.
    fn in_circuit(self, id: &str) -> CheckError {
        match self {
            CheckError::UnmeasuredBit { bit, .. } => CheckError::UnmeasuredBit {
                circuit: Some(id.to_string()),
                bit,
            },
            CheckError::TooLarge { source, .. } => CheckError::TooLarge {
                circuit: Some(id.to_string()),
                source,
            },
            CheckError::Plan(m) => CheckError::Plan(format!("{id}: {m}")),
        }
    }
}

impl std::fmt::Display for CheckError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let at = |c: &Option<String>| c.as_ref().map_or(String::new(), |id| format!("{id}: "));
        match self {
            CheckError::Plan(m) => f.write_str(m),
            CheckError::UnmeasuredBit { circuit, bit } => {
                write!(f, "{}classical bit {bit} is never measured", at(circuit))
            }
            CheckError::TooLarge { circuit, source } => write!(f, "{}{source}", at(circuit)),
        }
    }
}

impl std::error::Error for CheckError {}

impl LayerError for CheckError {
    fn blame(&self) -> Blame {
        match self {
            CheckError::Plan(_) => Blame::Input(Code::PlanInconsistent),
            CheckError::UnmeasuredBit { .. } => Blame::Input(Code::QasmPlan),
            CheckError::TooLarge { .. } => Blame::Input(Code::UsageLimit),
        }
    }
}

impl From<crate::plan::PlanError> for CheckError {
    fn from(e: crate::plan::PlanError) -> CheckError {
        CheckError::Plan(e.to_string())
    }
}

impl From<SimError> for CheckError {
    fn from(source: SimError) -> CheckError {
        CheckError::TooLarge {
            circuit: None,
            source,
        }
    }
}

/// The verdict on one read of one circuit.
#[derive(Clone, Debug, Serialize)]
pub struct ReadCheck {
    pub target: String,
    pub simulated: f64,
    pub ideal: f64,
    /// `None` when the exact evolution was skipped.
    pub exact: Option<f64>,
    pub compile_error: f64,
    pub trotter_error: Option<f64>,
}

/// The verdict on one circuit.
#[derive(Clone, Debug, Serialize)]
pub struct CircuitCheck {
    pub id: String,
    pub reads: Vec<ReadCheck>,
    pub compile_error: f64,
    /// `None` when the exact evolution was skipped.
    pub trotter_error: Option<f64>,
}

/// What the statevector check computes besides the simulation itself.
#[derive(Clone, Copy, Debug)]
pub struct CheckOptions {
    /// Compute the exact evolution `e^{-iHt}|ψ⟩` (Trotter errors); off saves its cost.
    pub exact: bool,
}

impl Default for CheckOptions {
    fn default() -> CheckOptions {
        CheckOptions { exact: true }
    }
}

/// Callbacks for progress display, called from any thread: once per reference state pair
/// `(state, k)` computed (see [`reference_count`]), and once per circuit simulated.
pub struct Progress<'a> {
    pub reference: &'a (dyn Fn() + Sync),
    pub circuit: &'a (dyn Fn() + Sync),
}

/// The number of distinct `(state, k)` references a plan needs (one ideal and, unless skipped,
/// one exact evolution each).
pub fn reference_count(plan: &Plan) -> usize {
    let mut keys: Vec<(usize, usize)> = plan.circuits.iter().map(|e| (e.state, e.k)).collect();
    keys.sort_unstable();
    keys.dedup();
    keys.len()
}

/// The compiled Hamiltonian: the plan's terms without the constant, which is never a gate.
pub fn plan_hamiltonian(plan: &Plan) -> Result<PauliSum, CheckError> {
    let mut h = plan.pauli_sum()?;
    h.constant = 0.0;
    Ok(h)
}

/// Parity expectation `⟨Π Z⟩` over the physical qubits measured into `bits`.
pub fn parity_expectation(
    c: &Circuit,
    final_state: &State,
    bits: &[u32],
) -> Result<f64, CheckError> {
    let meas = c.measurements();
    let mut mask = 0u64;
    for b in bits {
        let (q, _) = meas
            .iter()
            .find(|(_, bit)| bit == b)
            .ok_or(CheckError::UnmeasuredBit {
                circuit: None,
                bit: *b,
            })?;
        mask |= 1u64 << q;
    }
    Ok(final_state.expect_z_mask(mask))
}

/// Ideal and exact reference states for one (state, k) pair.
struct References {
    ideal: State,
    exact: Option<State>,
    psi: State,
}

fn prepared(n: usize, state: &str) -> Result<State, CheckError> {
    let prep = match RefState::parse(state, n) {
        Ok(s) => s.prep(),
        Err(StateError::Letter {
            index,
            letter,
            reason,
            ..
        }) => {
            return Err(CheckError::Plan(format!(
                "bad state letter `{letter}` at {index}: {reason}"
            )))
        }
        Err(StateError::Length { letters, qubits }) => {
            return Err(CheckError::Plan(format!(
                "state `{state}` has {letters} letters for {qubits} qubits"
            )))
        }
    };
    let mut s = State::zero(n);
    for g in &prep {
        s.apply(g);
    }
    Ok(s)
}

/// Checks every circuit of a plan. `circuits[i]` belongs to `plan.circuits[i]`.
pub fn check_plan(plan: &Plan, circuits: &[Circuit]) -> Result<Vec<CircuitCheck>, CheckError> {
    check_plan_with_progress(plan, circuits, &|| {})
}

/// As [`check_plan`], calling `tick` once per circuit checked (from any thread).
pub fn check_plan_with_progress(
    plan: &Plan,
    circuits: &[Circuit],
    tick: &(dyn Fn() + Sync),
) -> Result<Vec<CircuitCheck>, CheckError> {
    check_plan_with(
        plan,
        circuits,
        CheckOptions::default(),
        &Progress {
            reference: &|| {},
            circuit: tick,
        },
    )
}

/// As [`check_plan`], with options and progress callbacks.
pub fn check_plan_with(
    plan: &Plan,
    circuits: &[Circuit],
    opts: CheckOptions,
    progress: &Progress,
) -> Result<Vec<CircuitCheck>, CheckError> {
    let h = plan_hamiltonian(plan)?;
    let n = h.num_qubits;
    // The references hold statevectors of the Hamiltonian's width (and its exact propagator):
    // refuse before allocating when they cannot fit.
    crate::sim::check_fits(n, 2)?;
    let order = Order::from_number(plan.formula.order)
        .ok_or_else(|| CheckError::Plan("plan.json: unknown formula order".into()))?;
    let terms = order_terms(&h);
    let strings: Vec<PauliString> = h.terms.keys().cloned().collect();
    // References per (state, k), computed once and shared by all circuits that need them.
    let mut keys: Vec<(usize, usize)> = plan.circuits.iter().map(|e| (e.state, e.k)).collect();
    keys.sort_unstable();
    keys.dedup();
    let psis: Vec<State> = plan
        .states
        .iter()
        .map(|s| prepared(n, s))
        .collect::<Result<_, _>>()?;
    let props: Vec<Propagator> = if opts.exact {
        psis.iter().map(|p| Propagator::new(&h, p)).collect()
    } else {
        Vec::new()
    };
    let refs: Vec<((usize, usize), References)> = keys
        .par_iter()
        .map(|&(s, k)| {
            let psi = psis[s].clone();
            let t = k as f64 * plan.formula.dt;
            let mut ideal = psi.clone();
            apply_program(
                &mut ideal,
                &evolution(&terms, order, t, k * plan.formula.steps_per_dt),
            );
            let exact = opts.exact.then(|| props[s].evolve(t));
            (progress.reference)();
            ((s, k), References { ideal, exact, psi })
        })
        .collect();
    let lookup = |s: usize, k: usize| -> &References {
        let i = refs
            .binary_search_by_key(&(s, k), |r| r.0)
            .expect("reference computed for every (state, k)");
        &refs[i].1
    };
    plan.circuits
        .par_iter()
        .zip(circuits.par_iter())
        .map(|(e, c)| {
            let r = check_circuit(e, c, lookup(e.state, e.k), &strings);
            (progress.circuit)();
            r
        })
        .collect()
}

fn check_circuit(
    e: &CircuitEntry,
    c: &Circuit,
    r: &References,
    strings: &[PauliString],
) -> Result<CircuitCheck, CheckError> {
    let (small, _) = c.compacted();
    crate::sim::check_fits(small.num_qubits, 2)
        .map_err(|m| CheckError::from(m).in_circuit(&e.id))?;
    let out = run(&small, State::zero(small.num_qubits));
    let Some(part) = e.part else {
        return Ok(check_outcomes(e, &small, &out, r));
    };
    let pick = |z: Complex64| if part == Part::Re { z.re } else { z.im };
    let mut reads = Vec::new();
    for rd in &e.reads {
        let simulated =
            parity_expectation(&small, &out, &rd.bits).map_err(|m| m.in_circuit(&e.id))?;
        let (label, ideal, exact) = match rd.target {
            Target::Overlap => (
                "overlap".to_string(),
                r.psi.inner(&r.ideal),
                r.exact.as_ref().map(|x| r.psi.inner(x)),
            ),
            Target::Term { term } => {
                let p = strings.get(term).ok_or_else(|| {
                    CheckError::Plan(format!("{}: term {term} not in the plan", e.id))
                })?;
                // ⟨ψ|P U|ψ⟩ = ⟨Pψ|Uψ⟩ (P is Hermitian).
                let ppsi = r.psi.pauli_applied(p);
                (
                    p.to_factor_text(),
                    ppsi.inner(&r.ideal),
                    r.exact.as_ref().map(|x| ppsi.inner(x)),
                )
            }
        };
        let (ideal, exact) = (pick(ideal), exact.map(pick));
        reads.push(ReadCheck {
            target: label,
            simulated,
            ideal,
            exact,
            compile_error: (simulated - ideal).abs(),
            trotter_error: exact.map(|x| (ideal - x).abs()),
        });
    }
    let compile_error = reads.iter().map(|r| r.compile_error).fold(0.0, f64::max);
    let trotter_error = reads
        .iter()
        .map(|r| r.trotter_error)
        .try_fold(0.0, |m: f64, e| e.map(|e| m.max(e)));
    Ok(CircuitCheck {
        id: e.id.clone(),
        reads,
        compile_error,
        trotter_error,
    })
}

/// The outcome distribution of a plain evolution circuit (bit q = qubit q) over its measured
/// bits, from the final state (unmeasured qubits summed over).
fn outcome_distribution(c: &Circuit, out: &State, bits: usize) -> Vec<f64> {
    let meas = c.measurements();
    let mut p = vec![0.0; 1usize << bits];
    for (i, a) in out.amps.iter().enumerate() {
        let mut b = 0usize;
        for &(q, bit) in &meas {
            if (bit as usize) < bits && (i >> q) & 1 == 1 {
                b |= 1 << bit;
            }
        }
        p[b] += a.norm_sqr();
    }
    p
}

/// Checks a plain evolution circuit by its whole output distribution: `compile_error` is the
/// largest `|p_file(b) − p_ideal(b)|` over all outcomes b, `trotter_error` the largest
/// `|p_ideal(b) − p_exact(b)|`; the read shown is the ideal formula's most likely outcome.
fn check_outcomes(e: &CircuitEntry, c: &Circuit, out: &State, r: &References) -> CircuitCheck {
    let n = r.ideal.n;
    let sim = outcome_distribution(c, out, n);
    let ideal: Vec<f64> = r.ideal.amps.iter().map(|a| a.norm_sqr()).collect();
    let exact: Option<Vec<f64>> = r
        .exact
        .as_ref()
        .map(|x| x.amps.iter().map(|a| a.norm_sqr()).collect());
    let worst = |a: &[f64], b: &[f64]| {
        a.iter()
            .zip(b)
            .map(|(x, y)| (x - y).abs())
            .fold(0.0, f64::max)
    };
    let compile_error = worst(&sim, &ideal);
    let trotter_error = exact.as_ref().map(|x| worst(&ideal, x));
    let top = (0..ideal.len())
        .max_by(|&a, &b| ideal[a].total_cmp(&ideal[b]).then(b.cmp(&a)))
        .unwrap_or(0);
    let label: String = (0..n)
        .map(|q| if top >> q & 1 == 1 { '1' } else { '0' })
        .collect();
    CircuitCheck {
        id: e.id.clone(),
        reads: vec![ReadCheck {
            target: format!("P({label}) of all outcomes"),
            simulated: sim[top],
            ideal: ideal[top],
            exact: exact.as_ref().map(|x| x[top]),
            compile_error,
            trotter_error,
        }],
        compile_error,
        trotter_error,
    }
}

/// Trace-campaign summary at one time point: the average of the listed states' simulated values
/// (`Re` and `Im` parts), its standard error over the states, and the exact normalised traces
/// of the ideal product formula and of `e^{-iHt}`.
#[derive(Clone, Debug, Serialize)]
pub struct TraceRow {
    pub k: usize,
    pub time: f64,
    pub mean_re: f64,
    pub mean_im: f64,
    /// Standard error of the mean, `|·|` of the complex spread over the states.
    pub std_error: f64,
    pub ideal_re: f64,
    pub ideal_im: f64,
    pub exact_re: f64,
    pub exact_im: f64,
    /// `|mean − ideal| / std_error` (0 when the spread is 0).
    pub z_score: f64,
}

/// Largest qubit count for which the exact trace is summed over all basis states.
pub const TRACE_EXACT_MAX_QUBITS: usize = 10;

/// For a trace plan: compares the average over the listed states with the exact normalised trace
/// (`None` when the system is too large to sum over every basis state).
pub fn trace_summary(
    plan: &Plan,
    checks: &[CircuitCheck],
) -> Result<Option<Vec<TraceRow>>, CheckError> {
    let h = plan_hamiltonian(plan)?;
    let n = h.num_qubits;
    if n > TRACE_EXACT_MAX_QUBITS {
        return Ok(None);
    }
    let order = Order::from_number(plan.formula.order)
        .ok_or_else(|| CheckError::Plan("plan.json: unknown formula order".into()))?;
    let terms = order_terms(&h);
    let spectrum = crate::sim::exact::spectrum(&h);
    let dim = 1usize << n;
    let mut rows = Vec::new();
    for k in 1..plan.points {
        let t = k as f64 * plan.formula.dt;
        let program = evolution(&terms, order, t, k * plan.formula.steps_per_dt);
        let ideal: Complex64 = (0..dim)
            .into_par_iter()
            .map(|b| {
                let mut v = State::zero(n);
                v.amps[0] = Complex64::new(0.0, 0.0);
                v.amps[b] = Complex64::new(1.0, 0.0);
                apply_program(&mut v, &program);
                v.amps[b]
            })
            .sum::<Complex64>()
            / dim as f64;
        let exact: Complex64 = spectrum
            .values
            .iter()
            .map(|e| Complex64::from_polar(1.0, -e * t))
            .sum::<Complex64>()
            / dim as f64;
        let mut per_state = vec![Complex64::new(0.0, 0.0); plan.states.len()];
        for (e, c) in plan.circuits.iter().zip(checks) {
            if e.k == k {
                let v = c.reads[0].simulated;
                per_state[e.state] += if e.part == Some(Part::Re) {
                    Complex64::new(v, 0.0)
                } else {
                    Complex64::new(0.0, v)
                };
            }
        }
        let m = per_state.len() as f64;
        let mean = per_state.iter().sum::<Complex64>() / m;
        let var = if m > 1.0 {
            per_state.iter().map(|z| (z - mean).norm_sqr()).sum::<f64>() / (m - 1.0)
        } else {
            0.0
        };
        let std_error = (var / m).sqrt();
        let z_score = if std_error > 0.0 {
            (mean - ideal).norm() / std_error
        } else {
            0.0
        };
        rows.push(TraceRow {
            k,
            time: t,
            mean_re: mean.re,
            mean_im: mean.im,
            std_error,
            ideal_re: ideal.re,
            ideal_im: ideal.im,
            exact_re: exact.re,
            exact_im: exact.im,
            z_score,
        });
    }
    Ok(Some(rows))
}
