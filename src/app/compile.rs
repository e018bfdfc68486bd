//! `phasewright compile`: Hamiltonian (+ device) → folder of OpenQASM 3 files and plan.json,
//! with a cost table on stdout.
//!
//! In: validated arguments. Out: the campaign folder (each program written to a staging
//! folder as soon as the pipeline makes it, [`FolderWriter`]; plan.json last; then the folder
//! put in place whole) and a
//! [`CompileOutcome`] (the plan written, the `--json` report and the summary for people);
//! [`compile_campaign`] is the library entry point, [`run`] renders it.

use crate::diag::Code;
use crate::error::{Error, Result};
use crate::family::control::{zero_state_check, Control, NotAnEigenstate};
use crate::family::{random_states, RefState, Spec};
use crate::formula::Order;
use crate::pipeline::{compile_into, Compiled, OptLevel, Target};
use crate::plan::{Family, Plan};
use crate::report::costs::{cost_json, cost_table};
use clap::{Args, ValueEnum};
use std::path::{Path, PathBuf};

/// Which quantities the campaign measures.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum MeasureKind {
    /// Re and Im of S_k = ⟨ψ|U(k·dt)|ψ⟩ for k = 1..K-1.
    Overlap,
    /// S_k and H_k = ⟨ψ|H U(k·dt)|ψ⟩, one circuit per (k, part, qubit-wise commuting group).
    Krylov,
    /// tr U(k·dt)/2^n from random product states (stochastic trace estimation).
    Trace,
    /// Plain time-evolution circuits without an ancilla: state preparation, U(k·dt) for
    /// k = 0..K-1, every qubit measured (bit q = qubit q, bit 0 first in bitstrings), for
    /// sampling configurations or your own analysis (`estimate` does not read them).
    Evolution,
}

/// What the Hadamard-test ancilla controls.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum ControlChoice {
    /// The ancilla controls the evolution: every rotation, or (level 3 on a device) a Pauli
    /// string that anticommutes with every term, twice per Trotter step, when that is cheaper.
    Evolution,
    /// Only the state preparation is controlled; the evolution runs uncontrolled. Needs
    /// |0…0⟩ to be an eigenstate of every factor of the product formula (number-conserving
    /// models); refused otherwise, naming the first term that breaks it.
    Prep,
    /// `prep` when the compiler can show it is exact, else `evolution`.
    Auto,
}

/// Compile a Hamiltonian into Hadamard-test circuits for real-time evolution, one OpenQASM 3
/// file per circuit plus plan.json, and print what each circuit costs.
///
/// The reference state is a string over `0 1 + - r l` (Pauli eigenstates |0⟩ |1⟩ |+⟩ |−⟩
/// |+i⟩ |−i⟩), qubit 0 first, where `ss` puts two neighbouring qubits in a singlet. Time point k (k = 0..K-1) evolves for k·dt with k·R Trotter steps
/// of the chosen order. The identity term of H is not compiled; it is recorded in plan.json and
/// added back by `estimate`.
#[derive(Args, Debug)]
#[command(
    allow_negative_numbers = true,
    after_help = "Example:\n  phasewright compile examples/ising_ring8.ham --state 00000000 --dt 0.2 --points 6 --order 2 -o out/ising\n\nCosts are estimates: they depend on the device calibration; validate results against trusted methods."
)]
pub struct CompileArgs {
    /// Hamiltonian file (.ham or FCIDUMP; `-`: stdin).
    pub hamiltonian: PathBuf,
    /// Reference state, one letter per qubit from `0 1 + - r l` (`ss`: a singlet on two
    /// neighbouring qubits), qubit 0 first; or `hf` for the
    /// Hartree–Fock determinant of an integral file under the chosen encoding; or `auto`: the
    /// Hartree–Fock determinant for integral files, else the lowest-energy product state found
    /// (the method is printed).
    #[arg(long, allow_hyphen_values = true)]
    pub state: Option<String>,
    /// Fermion-to-qubit encoding for integral files and fermionic .ham files: jw or bk.
    #[arg(long, value_parser = |s: &str| s.parse::<crate::fermion::Encoding>())]
    pub encoding: Option<crate::fermion::Encoding>,
    /// Active orbitals FIRST-LAST of an integral file (numbered from 1 as in the file).
    #[arg(long, value_parser = crate::fermion::fcidump::ActiveSpace::parse)]
    pub active: Option<crate::fermion::fcidump::ActiveSpace>,
    /// Time step between points.
    #[arg(long)]
    pub dt: f64,
    /// Number of time points K (k = 0..K-1).
    #[arg(long)]
    pub points: usize,
    /// Product-formula order: 1 (Lie–Trotter), 2 (Strang), 4 (Suzuki).
    #[arg(long, default_value_t = 2)]
    pub order: u32,
    /// Trotter steps per dt.
    #[arg(long, default_value_t = 1)]
    pub steps: usize,
    /// Which campaign to emit.
    #[arg(long, value_enum, default_value_t = MeasureKind::Overlap)]
    pub measure: MeasureKind,
    /// What the Hadamard-test ancilla controls: the whole evolution, only the state
    /// preparation (control-free evolution, for models that conserve the number of ones), or
    /// the cheaper of the two that is exact.
    #[arg(long, value_enum, default_value_t = ControlChoice::Auto)]
    pub control: ControlChoice,
    /// Number of random product states for `--measure trace` [default: 8].
    #[arg(long)]
    pub samples: Option<usize>,
    /// Seed for random states (and layout trials on devices).
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Target device (.dev; `-`: stdin). Without it, an all-to-all device with every standard
    /// gate.
    #[arg(long)]
    pub device: Option<PathBuf>,
    /// Layout searches on a device, from the seeds --seed, --seed + 1, …: the campaign that
    /// scores best is kept (the higher estimated success where the device gives gate errors,
    /// else fewer two-qubit gates). Each try costs about one compile; steps too large for the
    /// spread control (see --opt) are searched once.
    #[arg(long, default_value_t = 1, value_parser = clap::value_parser!(u32).range(1..=64))]
    pub tries: u32,
    /// Output folder. Created if missing; an older campaign there is replaced whole (no file
    /// of it survives); a folder holding anything else is refused unless --force.
    #[arg(short = 'o', long = "out")]
    pub out: PathBuf,
    /// Replace the output folder whole even if it holds files phasewright did not write.
    #[arg(long)]
    pub force: bool,
    /// Write only share I of N of the campaign (circuit j goes to share j mod N + 1), for the
    /// tasks of a job array; `phasewright merge` joins the N folders into the one campaign.
    #[arg(long, value_name = "I/N", value_parser = super::shard::parse_shard)]
    pub shard: Option<(usize, usize)>,
    /// Optimisation level: 0 the textbook pipeline (one CNOT ladder per rotation of the
    /// unmerged formula, one greedy layout, plain SWAP routing, nothing cancelled); 1 merges
    /// and cancels; 2 searches layouts and term orders; 3 also schedules the rotations by
    /// non-commutation, tries exact embeddings and uses balanced parity trees.
    #[arg(long = "opt", default_value_t = 3, value_parser = clap::value_parser!(u8).range(0..=3))]
    pub opt: u8,
    /// Drop Pauli strings whose |coefficient| is below this before compiling (integral
    /// round-off; 0 keeps all). Recorded in plan.json.
    #[arg(long, default_value_t = super::convert::DEFAULT_CUTOFF, value_parser = super::convert::parse_cutoff)]
    pub cutoff: f64,
    /// Also print where the compile spent its time, stage by stage, and the time to write the
    /// folder; with --json, under `stage_seconds`. A stage that runs on several threads at
    /// once adds up their seconds.
    #[arg(long)]
    pub stage_times: bool,
}

/// Random product states of a trace campaign without --samples.
pub const DEFAULT_SAMPLES: usize = 8;

/// Most controlled rotations one campaign may hold, summed over its circuits. A rotation costs
/// about `BYTES_PER_ROTATION` bytes of OpenQASM, so this caps a campaign near 6 GB; the
/// memory the machine has is checked separately (`pipeline::predicted_memory`).
pub const MAX_ROTATIONS: f64 = 1e8;

/// Most circuits (files) one campaign may hold.
pub const MAX_CIRCUITS: f64 = 1e5;

/// Bytes of OpenQASM per controlled rotation of [`campaign_size`], measured: the Krylov
/// campaign of `examples/tfim_chain8.ham` (K = 10, order 4, 2 steps) writes 4.7 MB for an
/// estimated 78 300 rotations.
const BYTES_PER_ROTATION: f64 = 60.0;

/// What a campaign would cost before it is built: circuits and controlled rotations, counted
/// from the product formula (`T` exponentials per Lie–Trotter step, `2T − 1` per Strang step,
/// five Strang steps per Suzuki step) before any folding of commuting groups, so an upper
/// estimate. Floating point, so absurd requests cannot overflow.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct CampaignSize {
    pub circuits: f64,
    pub rotations: f64,
}

/// [`CampaignSize`] for `terms` non-identity terms, `per_point` circuits at each k ≥ 1 and
/// `at_zero` (rotation-free) circuits at k = 0.
pub fn campaign_size(
    order: Order,
    terms: usize,
    points: usize,
    steps: usize,
    per_point: usize,
    at_zero: usize,
) -> CampaignSize {
    let t = terms as f64;
    let per_step = match order {
        Order::First => t,
        Order::Second => (2.0 * t - 1.0).max(1.0),
        Order::Fourth => 5.0 * (2.0 * t - 1.0).max(1.0),
    };
    let k = points as f64;
    // Σ_{k=1}^{K−1} k = K(K−1)/2 Trotter-step multiples of `steps`.
    let rotations = per_point as f64 * per_step * steps as f64 * k * (k - 1.0) / 2.0;
    CampaignSize {
        circuits: per_point as f64 * (k - 1.0) + at_zero as f64,
        rotations,
    }
}

/// Refuses a campaign that would not fit (exit 2), saying what it would cost.
fn check_size(size: CampaignSize, args: &CompileArgs) -> Result<()> {
    if size.circuits <= MAX_CIRCUITS && size.rotations <= MAX_ROTATIONS {
        return Ok(());
    }
    Err(Error::usage(Code::UsageLimit,
        format!(
            "--points {} --steps {} would emit {} circuits holding about {} controlled rotations (≈ {}); the limits are {} circuits and {} rotations",
            args.points,
            args.steps,
            quantity(size.circuits),
            quantity(size.rotations),
            human_bytes(size.rotations * BYTES_PER_ROTATION),
            quantity(MAX_CIRCUITS),
            quantity(MAX_ROTATIONS),
        ),
        Some("use fewer --points or --steps (a larger --dt reaches the same times with fewer points)"),
    ))
}

/// A count for a message: exact below 10¹², else in scientific notation.
fn quantity(x: f64) -> String {
    if x < 1e12 {
        format!("{x:.0}")
    } else {
        format!("{x:.2e}")
    }
}

fn human_bytes(b: f64) -> String {
    if b >= 1e12 {
        format!("{:.1e} TB of OpenQASM", b / 1e12)
    } else if b >= 1e9 {
        format!("{:.1} GB of OpenQASM", b / 1e9)
    } else {
        format!("{:.0} MB of OpenQASM", (b / 1e6).max(1.0))
    }
}

fn check_state(state: &str, n: usize) -> Result<()> {
    RefState::parse(state, n)
        .map(|_| ())
        .map_err(|e| Error::input(e.diagnostic("--state", state)))
}

/// What `compile` wrote and reports: the plan (as in `DIR/plan.json`), the `--json` document
/// and the summary printed for people.
#[derive(Clone, Debug)]
pub struct CompileOutcome {
    pub plan: Plan,
    pub json: serde_json::Value,
    pub text: String,
}

/// Runs `phasewright compile`.
pub fn run(args: &CompileArgs, g: &super::Global) -> Result<()> {
    let outcome = compile_campaign(args, &|w| g.warn(w))?;
    if g.json {
        g.json(&outcome.json)
    } else {
        g.say(&outcome.text)
    }
}

/// Compiles the campaign and writes its folder; warnings go to `warn` as they arise. The
/// library entry point of `compile` (the command line and the Python module call it).
pub fn compile_campaign(args: &CompileArgs, warn: &dyn Fn(&str)) -> Result<CompileOutcome> {
    let order = Order::from_number(args.order).ok_or_else(|| {
        Error::usage(
            Code::UsageOption,
            format!("--order {} is not supported", args.order),
            Some("use 1 (Lie–Trotter), 2 (Strang) or 4 (Suzuki)"),
        )
    })?;
    if !(args.dt.is_finite() && args.dt > 0.0) {
        return Err(Error::usage(
            Code::UsageOption,
            format!("--dt {} must be a positive number", args.dt),
            None,
        ));
    }
    if args.points < 2 {
        return Err(Error::usage(
            Code::UsageOption,
            "--points must be at least 2 (k = 0 and at least one evolved point)",
            None,
        ));
    }
    if args.points > crate::plan::MAX_POINTS {
        return Err(Error::usage(Code::UsageLimit,
            format!(
                "--points {} is more than the {} time points a campaign may have",
                args.points,
                crate::plan::MAX_POINTS
            ),
            Some("a Krylov or density-of-states estimate from K points costs O(K⁴); real-time campaigns use tens to hundreds of points"),
        ));
    }
    if args.steps == 0 {
        return Err(Error::usage(
            Code::UsageOption,
            "--steps must be at least 1",
            None,
        ));
    }
    super::io::check_out_folder(&args.out, args.force)?;
    let opts = super::convert::LoadOptions {
        encoding: args.encoding,
        active: args.active,
    };
    super::io::one_stdin(&[
        ("the Hamiltonian", Some(&args.hamiltonian)),
        ("--device", args.device.as_deref()),
    ])?;
    if args.measure == MeasureKind::Trace && args.state.is_some() {
        return Err(Error::usage(Code::UsageConflict,
            "--state has no effect with --measure trace, which draws --samples random product states from --seed",
            Some("drop --state, or use --measure overlap or krylov for one reference state"),
        ));
    }
    if args.measure != MeasureKind::Trace && args.samples.is_some() {
        return Err(Error::usage(
            Code::UsageConflict,
            "--samples applies to --measure trace only",
            Some("drop --samples, or add --measure trace"),
        ));
    }
    let (mut h, chem) = super::convert::load_qubit_hamiltonian_with(&args.hamiltonian, opts)?;
    let cut = h.drop_below(args.cutoff);
    let n = h.num_qubits;
    if h.terms.is_empty() {
        return Err(Error::usage(
            Code::UsageInput,
            format!(
                "{} has no non-identity term: there is nothing to evolve",
                super::io::display_name(&args.hamiltonian)
            ),
            Some("the identity term alone only adds a phase"),
        ));
    }
    let step_angle = h.one_norm() * args.dt / args.steps as f64;
    if step_angle > 2.0 * std::f64::consts::PI {
        warn(&format!(
            "one Trotter step spans Σ|c_j|·dt/steps = {step_angle:.3} rad (more than 2π): the product formula is far from e^(-iH·dt/steps), and energies more than π/dt apart cannot be told apart; use a smaller --dt or more --steps"
        ));
    }
    let mut auto_note: Option<String> = None;
    let (family, states) = match args.measure {
        MeasureKind::Trace => {
            let samples = args.samples.unwrap_or(DEFAULT_SAMPLES);
            if samples == 0 {
                return Err(Error::usage(
                    Code::UsageOption,
                    "--samples must be at least 1",
                    None,
                ));
            }
            (Family::Trace, random_states(n, samples, args.seed))
        }
        kind => {
            let mut state = args.state.clone().ok_or_else(|| {
                Error::usage(
                    Code::UsageConflict,
                    "--state is required for this campaign",
                    Some("e.g. --state 0101 (one letter per qubit, qubit 0 first)"),
                )
            })?;
            if state == "auto" {
                let (chosen, how) = match &chem {
                    Some(c) => (
                        c.hf_state.clone(),
                        "the Hartree–Fock determinant of the integral file".to_string(),
                    ),
                    None => {
                        let a = crate::estimate::reference::auto_state(&h);
                        (a.state, a.method)
                    }
                };
                auto_note = Some(format!("--state auto chose {chosen}: {how}"));
                state = chosen;
            } else if state == "hf" {
                state = chem.as_ref().map(|c| c.hf_state.clone()).ok_or_else(|| {
                    Error::usage(Code::UsageConflict,
                        "--state hf needs an integral (FCIDUMP) input, which says how many electrons there are",
                        Some("give the determinant explicitly, e.g. --state 1100"),
                    )
                })?;
            }
            check_state(&state, n)?;
            (
                match kind {
                    MeasureKind::Krylov => Family::Krylov,
                    MeasureKind::Evolution => Family::Evolution,
                    _ => Family::Overlap,
                },
                vec![state],
            )
        }
    };
    let terms = h.terms.len();
    let size = match family {
        Family::Overlap => campaign_size(order, terms, args.points, args.steps, 2, 0),
        Family::Evolution => campaign_size(order, terms, args.points, args.steps, 1, 1),
        Family::Trace => campaign_size(order, terms, args.points, args.steps, 2 * states.len(), 0),
        Family::Krylov => {
            let groups = crate::family::krylov_groups(&h).len();
            campaign_size(order, terms, args.points, args.steps, 2 * groups, groups)
        }
    };
    check_size(size, args)?;
    let (control, why_not_prep) = if family == Family::Evolution {
        if args.control == ControlChoice::Prep {
            return Err(Error::usage(Code::UsageConflict,
                "--control prep applies to Hadamard-test campaigns; --measure evolution has no ancilla",
                Some("drop --control"),
            ));
        }
        (Control::Evolution, None)
    } else {
        choose_control(&h, args.control)?
    };
    let spec = Spec {
        control,
        family,
        order,
        dt: args.dt,
        points: args.points,
        steps_per_dt: args.steps,
        states,
    };
    let device = args
        .device
        .as_deref()
        .map(super::io::read_device)
        .transpose()?;
    let config = crate::route::RouteConfig {
        seed: args.seed,
        tries: args.tries as usize,
        ..Default::default()
    };
    let target = match &device {
        Some(d) => Target::Device {
            device: d,
            config: &config,
        },
        None => Target::AllToAll,
    };
    let source = super::io::display_name(&args.hamiltonian);
    let level = OptLevel::new(args.opt).expect("clap keeps --opt in 0..=3");
    if args.stage_times {
        crate::clock::start();
    }
    // Each circuit's file is written as soon as its text is final; plan.json last.
    super::io::check_out_folder(&args.out, args.force)?;
    let writer = FolderWriter::create(&args.out, args.shard)?;
    let plan = compile_into(&h, &source, &spec, &target, level, &writer)?;
    let mut compiled = Compiled {
        plan,
        programs: Vec::new(),
    };
    let mut stage_seconds: Vec<(&str, f64)> = if args.stage_times {
        let stages = crate::clock::stop();
        stages
            .into_iter()
            .map(|(s, secs)| (s.name(), secs))
            .collect()
    } else {
        Vec::new()
    };
    if family == Family::Trace {
        compiled.plan.seed = Some(args.seed);
    }
    compiled.plan.coefficient_cutoff = Some(args.cutoff);
    if chem.is_some() {
        // FCIDUMP integrals are in hartree by the format's convention.
        compiled.plan.energy_unit = Some("hartree".into());
    }
    if let Some((index, count)) = args.shard {
        super::shard::keep_share(&mut compiled, index, count);
    }
    let writing = std::time::Instant::now();
    writer.finish(&mut compiled.plan)?;
    if args.stage_times {
        stage_seconds.push(("write", writing.elapsed().as_secs_f64()));
    }
    let grouping = (family == Family::Krylov).then(|| grouping_summary(&compiled.plan));
    let reference = (family != Family::Trace)
        .then(|| reference_report(&h, &compiled.plan.states[0], auto_note.as_deref()));
    if let Some(r) = &reference {
        for w in &r.warnings {
            warn(w);
        }
    }
    let mut json = cost_json(&compiled.plan);
    json["control"] = serde_json::json!(control);
    if let Some(w) = &why_not_prep {
        json["control_reason"] = serde_json::json!(w.to_string());
    }
    if let Some(gs) = &grouping {
        json["grouping"] = serde_json::json!(gs);
    }
    if let Some(r) = &reference {
        json["reference"] = r.json.clone();
    }
    if args.stage_times {
        json["stage_seconds"] = stage_seconds
            .iter()
            .map(|&(name, secs)| (name.to_string(), serde_json::json!(secs)))
            .collect::<serde_json::Map<_, _>>()
            .into();
    }
    let mut text = cost_table(&compiled.plan);
    text += &tries_line(&compiled.plan, args.tries, args.seed);
    if family == Family::Evolution {
        text += &format!(
            "\n{} plain time-evolution circuits written to {} ({} qubits, no ancilla; bit q holds qubit q, bit 0 first in bitstrings). They are for sampling and your own analysis: estimate does not read them.\n",
            compiled.plan.circuits.len(),
            args.out.display(),
            n
        );
    } else {
        let flip = match (&compiled.plan.device, &compiled.plan.flip) {
            (Some(d), _) => d
                .flip_string
                .as_deref()
                .map(|q| (q, d.flip_controlled_terms, d.flip_signed)),
            (None, f) => f
                .as_ref()
                .map(|f| (f.string.as_str(), f.controlled_terms, f.signed)),
        };
        let weighed = device
            .as_ref()
            .is_some_and(crate::route::weighs_calibration);
        text += &control_line(control, why_not_prep.as_ref(), flip, weighed);
        text += &flip_share_line(&compiled.plan);
        text += &spread_line(&compiled.plan);
        text += &format!(
            "\n{} circuits written to {} ({} qubits + 1 ancilla; constant term {} kept for estimation).\n",
            compiled.plan.circuits.len(),
            args.out.display(),
            n,
            h.constant
        );
    }
    if let Some(c) = &chem {
        text += &format!(
            "Integral file: {} electrons in {} active orbitals ({} frozen), {} encoding; Hartree-Fock state {} (qubit 0 first), E_HF = {:.10} Ha.\n",
            c.nelec, c.norb, c.frozen_orbitals, c.encoding.short_name(), c.hf_state, c.hf_energy_ha
        );
    }
    if let Some(gs) = &grouping {
        text += &format!(
            "{} terms read in {} qubit-wise commuting groups: {} circuits, against {} with one term per circuit.\n",
            gs.terms, gs.groups, gs.circuits, gs.circuits_one_term_each
        );
    }
    if let Some(r) = &reference {
        text += &r.text;
    }
    if cut > 0 {
        text += &format!(
            "{cut} strings with |coefficient| < {:e} dropped before compiling (--cutoff; recorded in plan.json).\n",
            args.cutoff
        );
    }
    if args.stage_times {
        text += &stage_table(&stage_seconds);
    }
    if let Some(line) = device
        .as_ref()
        .and_then(|d| coherence_line(d, &compiled.plan))
    {
        text += &line;
    }
    text += "Costs are estimates: they depend on the device calibration; validate results against trusted methods.\n";
    Ok(CompileOutcome {
        plan: compiled.plan,
        json,
        text,
    })
}

/// The line that says the success estimates count waiting, when the device gives coherence
/// times (`coherence` lines), with a caution when the longest circuit of `plan` outlasts the
/// shortest of them; `None` otherwise.
fn coherence_line(dev: &crate::device::Device, plan: &Plan) -> Option<String> {
    let cal = &dev.calibration;
    let us = |ns: f64| format!("{} µs", ns / 1000.0);
    let given = match (cal.coherence_ns, cal.qubit_coherence_ns.len()) {
        (None, 0) => return None,
        (Some(t), 0) => us(t),
        (Some(t), k) => format!("{} ({k} qubit(s) their own)", us(t)),
        (None, k) => format!("given for {k} qubit(s), the others never decay"),
    };
    let search = if crate::route::scores_idling(dev) {
        "the layout search weighed idling against CNOTs"
    } else {
        "the layout search counted CNOTs only (no two-qubit error rate to weigh idling against)"
    };
    let mut line = format!(
        "Success estimates include waiting: a qubit idle for t between its first and last gate keeps its state with probability exp(−t/T), coherence time T {given}; {search}.\n"
    );
    let shortest = cal.shortest_coherence_ns()?;
    let longest = plan
        .circuits
        .iter()
        .filter_map(|c| c.costs.duration_ns)
        .fold(0.0, f64::max);
    if longest > shortest {
        line += &format!(
            "Caution: the longest circuit lasts {:.1} µs, longer than the shortest coherence time ({}): expect little signal from it.\n",
            longest / 1000.0,
            us(shortest)
        );
    }
    Some(line)
}

/// The `--stage-times` table: each stage's seconds and share of the total.
fn stage_table(stages: &[(&str, f64)]) -> String {
    let total: f64 = stages.iter().map(|s| s.1).sum();
    let mut out = format!("\n{:<16} {:>10} {:>6}\n", "stage", "seconds", "share");
    for &(name, secs) in stages {
        let share = if total > 0.0 {
            100.0 * secs / total
        } else {
            0.0
        };
        out += &format!("{name:<16} {secs:>10.3} {share:>5.1}%\n");
    }
    out += &format!("{:<16} {total:>10.3}\n", "total");
    out += "(a stage that runs on several threads at once adds up their seconds, so the total may exceed the wall time)\n";
    out
}

/// Resolves `--control`: the control form to compile and, when `auto` fell back to the
/// controlled evolution, why. `prep` where |0…0⟩ is not shown to be an eigenstate of every
/// factor of the product formula is a usage error (exit 2) naming the first offending term.
pub fn choose_control(
    h: &crate::pauli::PauliSum,
    choice: ControlChoice,
) -> Result<(Control, Option<NotAnEigenstate>)> {
    if choice == ControlChoice::Evolution {
        return Ok((Control::Evolution, None));
    }
    match zero_state_check(&crate::formula::term_groups(h)) {
        Ok(()) => Ok((Control::Prep, None)),
        Err(e) if choice == ControlChoice::Auto => Ok((Control::Evolution, Some(e))),
        Err(e) => Err(Error::usage(Code::UsageInput,
            format!("--control prep needs |0…0⟩ to be an eigenstate of every factor of the product formula; {e}"),
            Some("the control-free form applies to models that conserve the number of ones (XX + YY hopping, ZZ, Z); use --control evolution or auto"),
        )),
    }
}

/// The line of the compile summary that says which control form was chosen; `flip`: the
/// string through which a sign-flip step is controlled (`synth::flip`), if it was kept, and
/// how many leading terms the ancilla still controls one by one (a partial flip; 0: none).
/// `weighed`: the layout search weighed CNOTs by the calibration (`route::weighs_calibration`).
fn control_line(
    control: Control,
    why_not: Option<&NotAnEigenstate>,
    flip: Option<(&str, usize, bool)>,
    weighed: bool,
) -> String {
    let why = if weighed {
        "kept because that scores best on the calibration (two-qubit gates weighed by their errors, and idling where coherence times are given)"
    } else {
        "kept because that emits fewer two-qubit gates"
    };
    let how = match flip {
        Some(("I", _, true)) => format!("the ancilla controls each Trotter step by its sign: every rotation of the step's first half turns one way or the other with the ancilla, the second half runs uncontrolled, {why}"),
        Some((q, k, true)) => format!("the ancilla controls each Trotter step through the Pauli string `{q}` (two controlled copies of it per step) and its sign: the {k} terms that commute with `{q}` turn with the ancilla's sign in the step's first half, every other rotation uncontrolled, {why}"),
        Some((q, 0, false)) => format!("the ancilla controls each Trotter step through the Pauli string `{q}`, which anticommutes with every term: two controlled copies of it per step, every rotation uncontrolled, {why}"),
        Some((q, k, false)) => format!("the ancilla controls the rotations of the first {k} terms, at both ends of each Trotter step, and the rest of the step through the Pauli string `{q}`, which anticommutes with every other term: two controlled copies of it per step, those rotations uncontrolled, {why}"),
        None => "the ancilla controls every rotation".into(),
    };
    match (control, why_not) {
        (Control::Prep, _) => "Control: prep (the ancilla controls only the state preparation; the evolution runs uncontrolled and the known phase of |0…0⟩ is removed on the ancilla).\n".into(),
        (Control::Evolution, Some(e)) => format!("Control: evolution ({how}; prep does not apply: {e}).\n"),
        (Control::Evolution, None) => format!("Control: evolution ({how}).\n"),
    }
}

/// On the all-to-all target, where the sign flip was kept for some circuits with a Trotter
/// step but not all (each circuit keeps what emits fewer two-qubit gates with its readout),
/// the line that says how many; empty otherwise.
fn flip_share_line(plan: &Plan) -> String {
    if plan.flip.is_none() {
        return String::new();
    }
    let stepped = plan.circuits.iter().filter(|c| c.k > 0).count();
    let flipped = plan.circuits.iter().filter(|c| c.flipped).count();
    if flipped == stepped {
        return String::new();
    }
    format!("Sign flip: kept in {flipped} of the {stepped} circuits with a Trotter step; the others control every rotation.\n")
}

/// With `--tries N` (N > 1), the line that says which seed's search built the files and how
/// to rebuild them alone; empty otherwise (one search, or a step too large to search again).
fn tries_line(plan: &Plan, tries: u32, first: u64) -> String {
    let Some(kept) = plan.device.as_ref().and_then(|d| d.search_seed) else {
        return String::new();
    };
    let last = first.wrapping_add(u64::from(tries) - 1);
    // `--seed` also draws a trace campaign's random states, so there another seed changes
    // the states too.
    let rebuild = if plan.family == Family::Trace {
        String::new()
    } else {
        format!(" (`--seed {kept} --tries 1` builds the same files)")
    };
    format!(
        "Layout search: {tries} tries, seeds {first} to {last}; kept the campaign of seed {kept}{rebuild}.\n"
    )
}

/// The line that says the control is spread over copies of the ancilla (`route::cat`), when
/// it is; empty otherwise.
fn spread_line(plan: &Plan) -> String {
    let Some(d) = plan.device.as_ref().filter(|d| d.spare_qubits) else {
        return String::new();
    };
    let most = crate::report::costs::most_control_copies(plan);
    let made = &d.copy_placement;
    // The pipeline keeps the spread campaign on success only when its estimates differ from
    // the plain campaign's, floored at `pipeline::SUCCESS_FLOOR`: where every estimate is at the
    // floor (coherence times far shorter than the circuits), the counts decided.
    let calibrated = plan
        .circuits
        .iter()
        .all(|c| c.costs.success_probability.is_some())
        && plan
            .circuits
            .iter()
            .any(|c| c.costs.success_probability.is_some_and(|p| p < 1.0))
        && plan.circuits.iter().any(|c| {
            c.costs
                .success_probability
                .is_some_and(|p| p > crate::pipeline::SUCCESS_FLOOR)
        });
    let kept = if calibrated {
        "kept because the campaign's estimated success probability (from the calibrated gate errors, and coherence times where given) is higher than with the ancilla alone"
    } else {
        "kept because the campaign emits fewer two-qubit gates (or as many, less deep) than with the ancilla alone"
    };
    if most == 0 {
        return format!(
            "Spread control: rotations away from the ancilla are controlled over a bridge through a neighbouring qubit (or after moving it into an unused qubit) rather than by swapping it there; no copies needed; {kept}.\n"
        );
    }
    format!(
        "Spread control: up to {most} unused qubit(s) per circuit hold a copy of the ancilla (a cat state: {} made after the ancilla's h{}, cleared again before the readout; any others for one rotation each), so rotations meet a control beside them; {kept} (column `copies`).\n",
        made.len(),
        if made.is_empty() {
            String::new()
        } else {
            format!(" on {}", made.iter().map(|p| format!("${p}")).collect::<Vec<_>>().join(" "))
        },
    )
}

/// What `compile` says about the reference state.
struct ReferenceReport {
    text: String,
    json: serde_json::Value,
    warnings: Vec<String>,
}

fn reference_report(
    h: &crate::pauli::PauliSum,
    state: &str,
    auto: Option<&str>,
) -> ReferenceReport {
    use crate::estimate::reference;
    let mean = reference::mean_energy(h, state);
    let weight = reference::ground_weight(h, state);
    let mut text = String::new();
    let mut warnings = Vec::new();
    if let Some(a) = auto {
        text += &format!("{a}.\n");
    }
    text += &format!(
        "Reference state {state}: ⟨ψ|H|ψ⟩ = {}",
        mean.map_or("not computed (too wide with singlets)".into(), |e| format!(
            "{e:.10}"
        ))
    );
    match &weight {
        Some(w) => {
            text += &format!(
                "; ground-state weight |⟨ψ|E0⟩|² = {:.4} (E0 = {:.10}, {}).\n",
                w.weight, w.ground_energy, w.method
            );
            if w.weight < reference::LOW_WEIGHT {
                warnings.push(format!(
                    "the reference state {state} has ground-state weight {:.4} < {}: a Krylov \
                     estimate converges slowly or to an excited state; try --state auto or a \
                     state closer to the ground state",
                    w.weight,
                    reference::LOW_WEIGHT
                ));
            }
        }
        None => {
            text += &format!(
                "; ground-state weight not computed (more than {} qubits).\n",
                reference::WEIGHT_MAX_QUBITS
            )
        }
    }
    let json = serde_json::json!({
        "state": state,
        "auto": auto,
        "mean_energy": mean,
        "ground_weight": weight.as_ref().map(|w| w.weight),
        "ground_energy": weight.as_ref().map(|w| w.ground_energy),
        "weight_method": weight.as_ref().map(|w| w.method),
        "low_weight": weight.as_ref().map(|w| w.weight < reference::LOW_WEIGHT),
    });
    ReferenceReport {
        text,
        json,
        warnings,
    }
}

/// How much the grouped readout of the Krylov family saves.
#[derive(Clone, Debug, serde::Serialize)]
pub struct GroupingSummary {
    pub terms: usize,
    pub groups: usize,
    pub circuits: usize,
    pub circuits_one_term_each: usize,
}

/// Counts groups and circuits, and what one term per circuit would have needed: the overlap
/// circuits (2 per k ≥ 1) plus, per term, one real circuit at k = 0 and two per k ≥ 1.
pub fn grouping_summary(plan: &Plan) -> GroupingSummary {
    let groups = plan
        .circuits
        .iter()
        .filter_map(|e| e.group)
        .max()
        .map_or(0, |g| g + 1);
    let terms = plan.hamiltonian.terms.len();
    let per_read = 1 + 2 * (plan.points - 1);
    GroupingSummary {
        terms,
        groups,
        circuits: plan.circuits.len(),
        circuits_one_term_each: 2 * (plan.points - 1) + terms * per_read,
    }
}

/// Writes the campaign as the whole content of `dir`: every program, then plan.json recording
/// each program's SHA-256, through a temporary sibling folder that replaces `dir` at once (the
/// command layer's `io::replace_folder`), so no file of an older campaign survives and a
/// reader never sees a plan whose files are missing or partial. For texts already in memory;
/// `compile` itself writes each text as it is made ([`FolderWriter`]).
pub fn write_campaign(dir: &Path, c: &mut Compiled) -> Result<()> {
    let writer = FolderWriter::create(dir, None)?;
    for (index, (e, text)) in c.plan.circuits.iter().zip(&c.programs).enumerate() {
        crate::pipeline::Sink::put(&writer, index, &e.file, text.clone())?;
    }
    writer.finish(&mut c.plan)
}

/// The [`Sink`](crate::pipeline::Sink) `compile` writes through: each circuit's text goes to
/// its file in a staging folder (`io::staging_folder`) through a buffered writer as soon as
/// the pipeline makes it, its SHA-256 is kept, and the text is dropped; [`FolderWriter::finish`]
/// then writes plan.json **last** (with every digest) and puts the folder in `dir`'s place
/// (`io::swap_in_folder`), so `dir` holds either the older campaign or the whole new one. With
/// a share (`--shard I/N`) only the circuits of that share are written. A failed write is an
/// [`Error::Io`] (exit 1); a writer dropped before `finish` removes its staging folder.
pub struct FolderWriter {
    dir: PathBuf,
    tmp: PathBuf,
    share: Option<(usize, usize)>,
    digests: std::sync::Mutex<std::collections::BTreeMap<String, String>>,
    done: bool,
}

impl FolderWriter {
    /// Creates the staging folder of `dir` (call `io::check_out_folder` first).
    pub fn create(dir: &Path, share: Option<(usize, usize)>) -> Result<FolderWriter> {
        Ok(FolderWriter {
            dir: dir.to_path_buf(),
            tmp: super::io::staging_folder(dir)?,
            share,
            digests: Default::default(),
            done: false,
        })
    }

    /// Records every file's digest in `plan` (each circuit the plan lists must have been put),
    /// writes plan.json and replaces `dir` with the staging folder.
    pub fn finish(mut self, plan: &mut Plan) -> Result<()> {
        let mut digests = std::mem::take(
            &mut *self
                .digests
                .lock()
                .map_err(|_| Error::Internal("a thread failed while writing".into()))?,
        );
        for e in plan.circuits.iter_mut() {
            let digest = digests.remove(&e.file).ok_or_else(|| {
                Error::Internal(format!("the text of {} was never written", e.file))
            })?;
            e.sha256 = Some(digest);
        }
        let path = self.tmp.join("plan.json");
        std::fs::write(&path, plan.to_json().as_bytes()).map_err(|source| Error::Io {
            path: path.display().to_string(),
            source,
            reading: false,
        })?;
        self.done = true;
        super::io::swap_in_folder(&self.tmp, &self.dir)
    }
}

impl crate::pipeline::Sink for FolderWriter {
    fn put(&self, index: usize, file: &str, text: String) -> Result<()> {
        use std::io::Write;
        if let Some((i, n)) = self.share {
            if !crate::plan::ShardInfo::holds(i, n, index) {
                return Ok(());
            }
        }
        let path = self.tmp.join(file);
        let io = |source| Error::Io {
            path: path.display().to_string(),
            source,
            reading: false,
        };
        let digest = crate::plan::sha256_hex(text.as_bytes());
        let f = std::fs::File::create(&path).map_err(io)?;
        let mut w = std::io::BufWriter::with_capacity(1 << 16, f);
        w.write_all(text.as_bytes()).map_err(io)?;
        drop(text);
        w.flush().map_err(io)?;
        self.digests
            .lock()
            .map_err(|_| Error::Internal("a thread failed while writing".into()))?
            .insert(file.to_string(), digest);
        Ok(())
    }
}

impl Drop for FolderWriter {
    fn drop(&mut self) {
        if !self.done {
            let _ = std::fs::remove_dir_all(&self.tmp);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::pipeline::Sink;

    #[test]
    fn the_control_line_says_what_the_search_weighed() {
        let flip = Some(("Y0 Z1", 0, false));
        let counted = control_line(Control::Evolution, None, flip, false);
        assert!(
            counted.contains("anticommutes with every term"),
            "{counted}"
        );
        // A partial flip names the terms still controlled one by one.
        let partial = control_line(Control::Evolution, None, Some(("Z0 Z2", 3, false)), false);
        assert!(
            partial.contains("first 3 terms") && partial.contains("every other term"),
            "{partial}"
        );
        // A signed step names the terms on the ancilla's sign, or the whole first half.
        let signed = control_line(Control::Evolution, None, Some(("Z0 Z2", 4, true)), false);
        assert!(
            signed.contains("the 4 terms that commute with `Z0 Z2`")
                && signed.contains("first half"),
            "{signed}"
        );
        let halved = control_line(Control::Evolution, None, Some(("I", 9, true)), false);
        assert!(
            halved.contains("every rotation of the step's first half") && !halved.contains("`I`"),
            "{halved}"
        );
        assert!(counted.contains("emits fewer two-qubit gates"), "{counted}");
        let weighed = control_line(Control::Evolution, None, flip, true);
        assert!(
            weighed.contains("scores best on the calibration"),
            "{weighed}"
        );
        assert!(!weighed.contains("emits fewer"), "{weighed}");
        // A device with coherence times and a two-qubit error is weighed; one without is not.
        let dev = |extra: &str| {
            let text = format!("native rz sx x cx\nlattice line 3\nerror cx 0.01\n{extra}");
            crate::lang::dev::parse_device("l.dev", &text).unwrap()
        };
        assert!(!crate::route::weighs_calibration(&dev("")));
        assert!(crate::route::weighs_calibration(&dev("coherence 80us\n")));
        assert!(crate::route::weighs_calibration(&dev(
            "error cx 0-1 0.02\n"
        )));
        assert!(crate::route::scores_idling(&dev("coherence 80us\n")));
        assert!(!crate::route::scores_idling(&dev("error cx 0-1 0.02\n")));
    }

    /// The spread line names success as the reason only where the estimates could have
    /// decided: estimates all at `pipeline::SUCCESS_FLOOR` (coherence times far shorter than
    /// the circuits) tie, and then the counts did.
    #[test]
    fn the_spread_line_names_the_reason_the_pipeline_used() {
        let mut plan = small().plan;
        plan.device = Some(crate::plan::DeviceInfo {
            name: "chip".into(),
            num_qubits: 6,
            native: vec!["rz".into(), "sx".into(), "x".into(), "cx".into()],
            initial_layout: vec![0, 1, 2, 3],
            copy_placement: vec![4],
            spare_qubits: true,
            flip_string: None,
            flip_controlled_terms: 0,
            flip_order: crate::synth::flip::BlockOrder::Given,
            flip_signed: false,
            search_seed: None,
        });
        let with = |p: f64| {
            let mut plan = plan.clone();
            for c in &mut plan.circuits {
                c.costs.success_probability = Some(p);
            }
            spread_line(&plan)
        };
        let live = with(0.2);
        assert!(live.contains("estimated success probability"), "{live}");
        for p in [0.0, 1e-320] {
            let dead = with(p);
            assert!(dead.contains("emits fewer two-qubit gates"), "{dead}");
            assert!(!dead.contains("success"), "{dead}");
        }
        plan.device.as_mut().unwrap().spare_qubits = false;
        assert_eq!(spread_line(&plan), "");
    }

    /// A small campaign compiled with every text kept (`pipeline::compile`).
    fn small() -> Compiled {
        let h = crate::hamiltonian::parse_hamiltonian(
            "chain.ham",
            "qubits 3\n1.0 Z0 Z1\n0.5 X1\n-0.25 Y0 Y2\n",
        )
        .unwrap()
        .sum;
        let spec = Spec {
            control: Control::Evolution,
            family: Family::Overlap,
            order: Order::Second,
            dt: 0.3,
            points: 3,
            steps_per_dt: 1,
            states: vec!["0+0".to_string()],
        };
        crate::pipeline::compile(&h, "chain.ham", &spec).unwrap()
    }

    /// Each file the writer leaves holds exactly the text the pipeline made, and the plan
    /// records its SHA-256 (checked against the standard's digest of "abc": FIPS 180-2,
    /// Appendix B.1, from memory).
    #[test]
    fn folder_writer_writes_each_text_and_its_digest() {
        assert_eq!(
            crate::plan::sha256_hex(b"abc"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
        let mut c = small();
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("campaign");
        write_campaign(&out, &mut c).unwrap();
        assert_eq!(c.plan.circuits.len(), c.programs.len());
        for (e, text) in c.plan.circuits.iter().zip(&c.programs) {
            let bytes = std::fs::read(out.join(&e.file)).unwrap();
            assert_eq!(bytes, text.as_bytes(), "{}", e.file);
            assert_eq!(
                e.sha256.as_deref(),
                Some(crate::plan::sha256_hex(text.as_bytes()).as_str())
            );
        }
        let plan = std::fs::read_to_string(out.join("plan.json")).unwrap();
        assert_eq!(plan, c.plan.to_json());
    }

    /// A write that fails (here: the staging folder is gone) is an `Error::Io` with exit 1, not
    /// a panic; a plan that lists a circuit never put is refused; a writer dropped unfinished
    /// removes its staging folder and leaves no campaign.
    #[test]
    fn folder_writer_reports_failures() {
        let c = small();
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("campaign");
        let w = FolderWriter::create(&out, None).unwrap();
        let tmp = w.tmp.clone();
        std::fs::remove_dir_all(&tmp).unwrap();
        let e = w
            .put(0, &c.plan.circuits[0].file, c.programs[0].clone())
            .unwrap_err();
        assert!(matches!(e, Error::Io { reading: false, .. }), "{e:?}");
        assert_eq!(e.exit_code(), 1);
        drop(w);

        let w = FolderWriter::create(&out, None).unwrap();
        let tmp = w.tmp.clone();
        w.put(0, &c.plan.circuits[0].file, c.programs[0].clone())
            .unwrap();
        let mut plan = c.plan.clone();
        let e = w.finish(&mut plan).unwrap_err();
        assert!(matches!(e, Error::Internal(_)), "{e:?}");
        assert!(!tmp.exists() && !out.exists());
    }
}
