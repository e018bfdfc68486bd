//! `phasewright verify DIR`: read every circuit file back and check it against the plan, by
//! statevector simulation (compared with the ideal product formula and the exact evolution) or
//! by the exact tableau equivalence proof (`verify::tableau`, any width).
//!
//! In: a campaign folder (whole, one share folder, or with `--shard I/N` the share of a whole
//! one, the same circuits `compile --shard I/N` writes). Out: a [`VerifyReport`] (the `--json`
//! document, the table, the diagnostics of files that differ, and the failure that makes the
//! command exit 1), rendered by [`run`]; [`verify_campaign`] is the library entry point.

mod tableau;

use super::io::{check_campaign_files, read_plan, read_plan_circuits};
use crate::check::{
    check_plan_with, reference_count, trace_summary, CheckOptions, Progress, COMPILE_TOLERANCE,
};
use crate::error::{Error, Result};
use crate::plan::{Family, Plan};
use crate::report::table::{sci, Table};
use clap::{Args, ValueEnum};
use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use std::path::PathBuf;
use std::time::Duration;

/// How `verify` checks the files.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Method {
    /// Simulate each file from |0…0⟩ and compare the read values with the ideal product
    /// formula and the exact evolution (up to about 30 qubits).
    Statevector,
    /// Prove each file equal to the plan's circuit with a stabiliser tableau (any width; no
    /// overlap values).
    Tableau,
}

/// Check every circuit of a compiled campaign against its plan: by simulation, or by an exact
/// equivalence proof at any width.
///
/// Each file is read back with phasewright's OpenQASM 3 reader. `--method statevector`
/// simulates it from |0…0⟩ and prints, per circuit, the simulated ancilla (parity) expectation,
/// the ideal product-formula value, the exact value ⟨ψ|e^{-iHt}|ψ⟩, the compile error
/// |simulated − ideal| and the Trotter error |ideal − exact|; it exits with status 1 if any
/// compile error exceeds the tolerance. `--method tableau` rebuilds the circuit the plan claims
/// (Hamiltonian, formula, steps, states, measurement groups, layouts) and proves the file equal
/// to it with a stabiliser tableau, angles to 1e-12 relative; it computes no overlap values and
/// says so; a difference is reported at its file:line:column with the Pauli axis or angle, and
/// exits with status 1. Without `--method`: statevector when the circuits fit the simulator,
/// tableau above.
///
/// Example:
///   phasewright verify out/ising
#[derive(Args, Debug)]
#[command(
    after_help = "Example:\n  phasewright compile examples/ising_ring8.ham --state 00000000 --dt 0.2 --points 6 -o out/ising\n  phasewright verify out/ising\n  phasewright verify out/ising --method tableau"
)]
pub struct VerifyArgs {
    /// Folder written by `phasewright compile` (holds plan.json and the .qasm files).
    pub dir: PathBuf,
    /// How to check: statevector (simulation, small circuits) or tableau (exact proof, any
    /// width). Default: statevector when the circuits fit the simulator, tableau above.
    #[arg(long, value_enum)]
    pub method: Option<Method>,
    /// Statevector method: do not compute the exact evolution (no Trotter errors; faster).
    #[arg(long)]
    pub skip_exact: bool,
    /// Largest accepted |simulated − ideal| (statevector method; a non-negative number).
    #[arg(long, default_value_t = COMPILE_TOLERANCE, allow_negative_numbers = true, value_parser = non_negative_f64)]
    pub tolerance: f64,
    /// Check only share I of N of the circuits (circuit j goes to share j mod N + 1, as with
    /// `compile --shard`), for the tasks of a job array.
    #[arg(long, value_name = "I/N", value_parser = super::shard::parse_shard)]
    pub shard: Option<(usize, usize)>,
}

/// What `verify` found: the `--json` document, the table for people, the rendered diagnostic
/// of every file that differs (stderr), and the failure the command exits 1 with, if any.
#[derive(Debug)]
pub struct VerifyReport {
    pub json: serde_json::Value,
    pub text: String,
    pub diagnostics: Vec<String>,
    pub failure: Option<Error>,
}

/// A finite number ≥ 0 (refuses `-1`, `nan`, `inf` with a message).
pub fn non_negative_f64(s: &str) -> std::result::Result<f64, String> {
    match s.parse::<f64>() {
        Ok(x) if x.is_finite() && x >= 0.0 => Ok(x),
        _ => Err(format!("`{s}` is not a non-negative number")),
    }
}

/// A progress bar for one phase of the work that appears only once the phase has run for a
/// second (short phases stay silent), on stderr and only on a terminal; never with `--quiet`.
pub(crate) fn phase_bar(g: &super::Global, len: usize, what: &str) -> ProgressBar {
    if g.quiet {
        return ProgressBar::hidden();
    }
    let bar = ProgressBar::with_draw_target(Some(len as u64), ProgressDrawTarget::hidden());
    bar.set_style(
        ProgressStyle::with_template(&format!(
            "{what} {{bar:40}} {{pos}}/{{len}} ({{elapsed}}, {{eta}} left)"
        ))
        .expect("valid template"),
    );
    let shown = bar.clone();
    std::thread::spawn(move || {
        std::thread::sleep(Duration::from_secs(1));
        if !shown.is_finished() {
            shown.set_draw_target(ProgressDrawTarget::stderr());
            shown.enable_steady_tick(Duration::from_millis(250));
        }
    });
    bar
}

/// Does every circuit of the plan fit the statevector simulator (system qubits plus the
/// ancilla, two state copies)?
fn fits_statevector(plan: &Plan) -> bool {
    crate::sim::check_fits(plan.hamiltonian.num_qubits + 1, 2).is_ok()
}

/// Runs `phasewright verify`.
pub fn run(args: &VerifyArgs, g: &super::Global) -> Result<()> {
    let report = verify_campaign(args, g)?;
    if g.json {
        g.json(&report.json)?;
    } else {
        g.say(&report.text)?;
    }
    // `eprint!` panics when stderr is a closed pipe; a lost diagnostic must not turn the
    // verdict (exit 1) into a panic.
    let mut err = std::io::stderr().lock();
    for d in &report.diagnostics {
        let _ = std::io::Write::write_all(&mut err, d.as_bytes());
    }
    drop(err);
    match report.failure {
        None => Ok(()),
        Some(e) => Err(e),
    }
}

/// Checks the campaign (or its share) and reports; the library entry point of `verify` (the
/// command line and the Python module call it). Bad input is an `Err`; files that fail the
/// check are in the report's `failure`.
pub fn verify_campaign(args: &VerifyArgs, g: &super::Global) -> Result<VerifyReport> {
    let mut plan = read_plan(&args.dir)?;
    super::shard::select_share(&mut plan, args.shard, &args.dir)?;
    let mut report = check_plan(args, g, &plan)?;
    if let (Some(s), Some((_, _))) = (plan.shard, args.shard) {
        report.json["shard"] = serde_json::json!(s);
        report.text += &format!(
            "(share {}/{} of a campaign of {} circuits)\n",
            s.index, s.count, s.campaign_circuits
        );
    }
    Ok(report)
}

fn check_plan(args: &VerifyArgs, g: &super::Global, plan: &Plan) -> Result<VerifyReport> {
    let method = args.method.unwrap_or(if fits_statevector(plan) {
        Method::Statevector
    } else {
        Method::Tableau
    });
    if method == Method::Tableau {
        check_campaign_files(&args.dir, plan)?;
        return tableau::check(args, g, plan);
    }
    let circuits = read_plan_circuits(&args.dir, plan)?;
    let refs = phase_bar(
        g,
        reference_count(plan),
        if args.skip_exact {
            "ideal references"
        } else {
            "ideal and exact references"
        },
    );
    let sims = phase_bar(g, circuits.len(), "simulating");
    let checked = check_plan_with(
        plan,
        &circuits,
        CheckOptions {
            exact: !args.skip_exact,
        },
        &Progress {
            reference: &|| {
                refs.inc(1);
                if refs.position() == refs.length().unwrap_or(0) {
                    refs.finish_and_clear();
                }
            },
            circuit: &|| sims.inc(1),
        },
    );
    refs.finish_and_clear();
    sims.finish_and_clear();
    let checks = checked.map_err(|e| {
        Error::layer_in(
            &e,
            "",
            Some("the plan or a circuit file does not fit this machine or is inconsistent"),
        )
    })?;
    let worst = checks.iter().map(|c| c.compile_error).fold(0.0, f64::max);
    let worst_trotter = checks
        .iter()
        .map(|c| c.trotter_error)
        .try_fold(0.0, |m: f64, e| e.map(|e| m.max(e)));
    let opt = |v: Option<f64>, f: &dyn Fn(f64) -> String| v.map_or("skipped".to_string(), f);
    let ok = worst <= args.tolerance;
    // The trace averages over every state's circuits: a share holds only some of them.
    let trace = if plan.family == Family::Trace && plan.shard.is_none() {
        trace_summary(plan, &checks)?
    } else {
        None
    };
    let json = serde_json::json!({ "method": "statevector", "ok": ok, "tolerance": args.tolerance, "max_compile_error": worst, "max_trotter_error": worst_trotter, "circuits": checks, "trace": trace });
    let mut out = String::new();
    let mut t = Table::new([
        "circuit",
        "reads",
        "simulated",
        "ideal",
        "exact",
        "compile err",
        "trotter err",
    ]);
    for c in &checks {
        let first = &c.reads[0];
        t.row([
            c.id.clone(),
            c.reads.len().to_string(),
            format!("{:.9}", first.simulated),
            format!("{:.9}", first.ideal),
            opt(first.exact, &|x| format!("{x:.9}")),
            sci(c.compile_error),
            opt(c.trotter_error, &sci),
        ]);
    }
    out += &t.render();
    out += &format!(
        "\n{} circuits checked by statevector simulation; largest compile error {} (tolerance {}), largest Trotter error {}.\n",
        checks.len(),
        sci(worst),
        sci(args.tolerance),
        opt(worst_trotter, &sci)
    );
    if args.skip_exact {
        out += "(the exact evolution was skipped: --skip-exact)\n";
    }
    out += "(for circuits with several reads the first is shown; errors are the largest over all reads)\n";
    if plan.family == Family::Trace && plan.shard.is_some() {
        out += "(the normalised trace needs every circuit of the campaign: verify the merged folder for it)\n";
    }
    if let Some(rows) = &trace {
        out += &format!("\nNormalised trace tr U/2^n: average over the {} listed states against the exact trace\n", plan.states.len());
        let mut t = Table::new([
            "k",
            "time",
            "mean re",
            "mean im",
            "std err",
            "ideal re",
            "ideal im",
            "exact re",
            "exact im",
            "|dev|/err",
        ]);
        for r in rows {
            t.row([
                r.k.to_string(),
                format!("{:.4}", r.time),
                format!("{:.6}", r.mean_re),
                format!("{:.6}", r.mean_im),
                format!("{:.6}", r.std_error),
                format!("{:.6}", r.ideal_re),
                format!("{:.6}", r.ideal_im),
                format!("{:.6}", r.exact_re),
                format!("{:.6}", r.exact_im),
                format!("{:.2}", r.z_score),
            ]);
        }
        out += &t.render();
        out += "(ideal = the product formula the circuits implement; deviations of a few standard errors are sampling spread, not compile errors)\n";
    }
    let failure = (!ok).then(|| Error::Internal(format!("compile error {} exceeds the tolerance {}: the emitted circuits do not implement the product formula", sci(worst), sci(args.tolerance))));
    Ok(VerifyReport {
        json,
        text: out,
        diagnostics: Vec::new(),
        failure,
    })
}
