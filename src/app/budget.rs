//! `phasewright budget HAM --accuracy A`: propose dt, formula order and steps, time points and
//! shots for a target accuracy, the total device time when a device is given, and print the
//! compile command that realises the proposal.
//!
//! In: validated arguments. Out: a summary on stdout (or JSON). Invariant: nothing is written
//! to disk; with a device the campaign is compiled in memory only to read its durations.

use crate::diag::Code;
use crate::error::{Error, Result};
use crate::estimate::budget::{self, Budget};
use crate::estimate::reference;
use crate::family::Spec;
use crate::formula::Order;
use crate::pipeline::{compile_for, Target};
use crate::plan::Family;
use clap::Args;
use std::fmt::Write as _;
use std::path::PathBuf;

/// Propose a campaign for a target accuracy: dt from the one-norm spectral bound, Trotter
/// steps from the commutator-scaling bound, time points, shots per circuit, and the device
/// time; prints the compile command.
///
/// The rules are stated in the output; the shot rule is empirical. `estimate --accuracy`
/// checks the result afterwards.
#[derive(Args, Debug)]
#[command(
    allow_negative_numbers = true,
    after_help = "Example:\n  phasewright budget examples/tfim_chain8.ham --accuracy 0.0016 --state auto"
)]
pub struct BudgetArgs {
    /// Hamiltonian file (.ham or FCIDUMP).
    pub hamiltonian: PathBuf,
    /// Target accuracy of the ground energy, in the Hamiltonian's units.
    #[arg(long, value_name = "ENERGY")]
    pub accuracy: f64,
    /// Reference state (as for compile; `auto` by default).
    #[arg(long, default_value = "auto", allow_hyphen_values = true)]
    pub state: String,
    /// Fermion-to-qubit encoding for integral files: jw or bk.
    #[arg(long, value_parser = |s: &str| s.parse::<crate::fermion::Encoding>())]
    pub encoding: Option<crate::fermion::Encoding>,
    /// Target device (.dev): the proposal is compiled in memory for its durations.
    #[arg(long)]
    pub device: Option<PathBuf>,
    /// Output folder named in the printed compile command.
    #[arg(short = 'o', long = "out", default_value = "campaign")]
    pub out: PathBuf,
}

pub fn run(args: &BudgetArgs, g: &super::Global) -> Result<()> {
    if !(args.accuracy.is_finite() && args.accuracy > 0.0) {
        return Err(Error::usage(
            Code::UsageOption,
            format!("--accuracy {} must be a positive number", args.accuracy),
            None,
        ));
    }
    let (h, chem) = super::convert::load_qubit_hamiltonian(&args.hamiltonian, args.encoding)?;
    if h.terms.is_empty() {
        return Err(Error::usage(
            Code::UsageInput,
            "the Hamiltonian has no non-identity term: there is nothing to plan",
            None,
        ));
    }
    let (state, state_note) = match args.state.as_str() {
        "auto" => match &chem {
            Some(c) => (c.hf_state.clone(), "Hartree–Fock determinant".to_string()),
            None => {
                let a = reference::auto_state(&h);
                (a.state, a.method)
            }
        },
        "hf" => match &chem {
            Some(c) => (c.hf_state.clone(), "Hartree–Fock determinant".to_string()),
            None => {
                return Err(Error::usage(
                    Code::UsageConflict,
                    "--state hf needs an integral (FCIDUMP) input",
                    Some("use --state auto or give the letters"),
                ))
            }
        },
        s => (s.to_string(), "given".to_string()),
    };
    if crate::family::RefState::parse(&state, h.num_qubits).is_err() {
        return Err(Error::usage(
            Code::UsageOption,
            format!(
                "--state {state} is not a reference state for {} qubits",
                h.num_qubits
            ),
            Some("use 0 1 + - r l per qubit (ss: a singlet), qubit 0 first, or auto"),
        ));
    }
    let weight = reference::ground_weight(&h, &state);
    let b = budget::propose(&h, args.accuracy, weight.as_ref().map(|w| w.weight));
    let device_time = match &args.device {
        None => None,
        Some(p) => {
            // Circuit durations grow linearly in k (k repetitions of one routed step), so
            // compiling the points k = 1 and 2 in memory gives d(k) = d₁ + (k − 1)(d₂ − d₁)
            // for every k without building the whole campaign.
            let d = super::io::read_device(p)?;
            let config = crate::route::RouteConfig::default();
            let durations = compile_for(
                &h,
                &super::io::display_name(&args.hamiltonian),
                &Spec {
                    family: Family::Overlap,
                    order: Order::Second,
                    dt: b.dt,
                    points: 3,
                    steps_per_dt: b.steps,
                    states: vec![state.clone()],
                    // The form `compile` chooses by default.
                    control: super::compile::choose_control(
                        &h,
                        super::compile::ControlChoice::Auto,
                    )?
                    .0,
                },
                &Target::Device {
                    device: &d,
                    config: &config,
                },
            )?
            .plan
            .circuits
            .iter()
            .map(|e| (e.k, e.costs.duration_ns.unwrap_or(0.0)))
            .collect::<Vec<_>>();
            let at = |k: usize| {
                let v: Vec<f64> = durations.iter().filter(|x| x.0 == k).map(|x| x.1).collect();
                v.iter().sum::<f64>() / v.len().max(1) as f64
            };
            let (d1, d2) = (at(1), at(2));
            let d_k = |k: usize| d1 + (k as f64 - 1.0) * (d2 - d1);
            let total_ns: f64 = (1..b.points).map(|k| 2.0 * d_k(k)).sum();
            let shortest_coherence_ns = d.calibration.shortest_coherence_ns();
            Some(DeviceTime {
                total_s: total_ns * 1e-9 * b.shots as f64,
                longest_ns: d_k(b.points.saturating_sub(1).max(1)),
                shortest_coherence_ns,
            })
        }
    };
    // On a device with coherence times: the longest circuit against the shortest of them.
    let outlasts = device_time.as_ref().and_then(|t| {
        let c = t.shortest_coherence_ns?;
        (t.longest_ns > c).then(|| {
            format!(
                "the longest circuit (k = {}) lasts about {:.1} µs, longer than the device's shortest coherence time ({} µs): its points will carry little signal; fewer points, or a device with longer coherence, would help",
                b.points.saturating_sub(1),
                t.longest_ns / 1000.0,
                c / 1000.0
            )
        })
    });
    let device_time_s = device_time.as_ref().map(|t| t.total_s);
    let command = compile_command(args, &b, &state, chem.is_some());
    if g.json {
        return g.json(&serde_json::json!({
            "accuracy": b.accuracy,
            "one_norm": b.one_norm,
            "dt": b.dt,
            "dt_rule": "pi / (2 * sum|c_j|): spectral-range bound |E - c| <= sum|c_j|",
            "order": b.order,
            "steps": b.steps,
            "steps_rule": "smallest r with commutator-scaling Trotter bound b <= sqrt(3)*accuracy/2 (Childs et al. 2021)",
            "trotter_bound": b.trotter_bound,
            "points": b.points,
            "shots": b.shots,
            "shots_rule": "sigma_stat ~ 0.05/(w^2 dt sqrt(N)) <= accuracy/2 (empirical, fitted on the survey)",
            "predicted_sigma_stat": b.sigma_stat,
            "state": state,
            "state_method": state_note,
            "ground_weight": if b.weight_known { Some(b.weight) } else { None },
            "circuits": b.circuits,
            "total_shots": b.circuits as u64 * b.shots,
            "device_time_s": device_time_s,
            "longest_circuit_us": device_time.as_ref().map(|t| t.longest_ns / 1000.0),
            "shortest_coherence_us": device_time
                .as_ref()
                .and_then(|t| t.shortest_coherence_ns)
                .map(|c| c / 1000.0),
            "compile_command": command,
            "warnings": b.warnings.iter().chain(&outlasts).collect::<Vec<_>>(),
        }));
    }
    for w in b.warnings.iter().chain(&outlasts) {
        g.warn(w);
    }
    let mut s = String::new();
    let _ = writeln!(
        s,
        "target accuracy {:.3e}; error budget split evenly between shots and Trotter bias",
        b.accuracy
    );
    let _ = writeln!(
        s,
        "reference state {state} ({state_note}); ground-state weight {}",
        if b.weight_known {
            format!("{:.4}", b.weight)
        } else {
            format!(
                "unknown (more than {} qubits; {} assumed)",
                reference::WEIGHT_MAX_QUBITS,
                budget::UNKNOWN_WEIGHT
            )
        }
    );
    let _ = writeln!(s, "dt = {:.6}: π/(2·Σ|c_j|) with Σ|c_j| = {:.6} (spectral-range bound |E − c| ≤ Σ|c_j|, so no eigenphase wraps)", b.dt, b.one_norm);
    let _ = writeln!(s, "order 2, {} step(s) per dt: commutator-scaling Trotter bound b = {:.3e} on the ground-energy shift (Childs, Su, Tran, Wiebe & Zhu, PRX 11, 011020 (2021)), b/√3 ≤ accuracy/2", b.steps, b.trotter_bound);
    let _ = writeln!(s, "{} time points ({} circuits of an overlap campaign): the plateau of estimate's scan settles by d ≈ 19 at twice this dt on the survey models", b.points, b.circuits);
    let _ = writeln!(s, "{} shots per circuit: σ_stat ≈ {}/(w²·dt·√N) = {:.3e} ≤ accuracy/2 (an empirical rule fitted on the survey, not a bound)", b.shots, budget::STAT_CONSTANT, b.sigma_stat);
    let _ = writeln!(s, "total shots {}", b.circuits as u64 * b.shots);
    match device_time_s {
        Some(t) => {
            let _ = writeln!(s, "device time ≈ {:.1} s (Σ circuit durations from the device calibration, extrapolated linearly in k from k = 1, 2, × shots; no reset or readout overhead)", t);
        }
        None => {
            let _ = writeln!(s, "device time: not estimated (give --device D.dev)");
        }
    }
    let _ = writeln!(s, "\n  {command}");
    let _ = writeln!(
        s,
        "  phasewright estimate {} --counts COUNTS.json --accuracy {}",
        args.out.display(),
        b.accuracy
    );
    g.say(&s)
}

/// What the device says of a proposal: its total time, its longest circuit and the shortest
/// coherence time the calibration gives.
struct DeviceTime {
    total_s: f64,
    longest_ns: f64,
    shortest_coherence_ns: Option<f64>,
}

fn compile_command(args: &BudgetArgs, b: &Budget, state: &str, chem: bool) -> String {
    let mut c = format!(
        "phasewright compile {} --state {state} --dt {:.6} --points {} --order {} --steps {} --measure overlap",
        args.hamiltonian.display(),
        b.dt,
        b.points,
        b.order,
        b.steps
    );
    if chem {
        if let Some(e) = args.encoding {
            c += &format!(" --encoding {}", e.short_name());
        }
    }
    if let Some(d) = &args.device {
        c += &format!(" --device {}", d.display());
    }
    c += &format!(" -o {}", args.out.display());
    c
}
