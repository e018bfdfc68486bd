//! `phasewright verify DIR`: read every circuit file back, simulate it, and compare with the
//! ideal product formula and the exact evolution.

use super::io::{read_plan, read_plan_circuits};
use crate::check::{check_plan_with_progress, trace_summary, COMPILE_TOLERANCE};
use crate::error::{Error, Result};
use crate::family::plan::Family;
use crate::report::table::{sci, Table};
use clap::Args;
use std::path::PathBuf;

/// Simulate every circuit of a compiled campaign and compare it with the ideal product formula
/// and the exact evolution.
///
/// Each file is read back with phasewright's OpenQASM 3 reader and simulated from |0…0⟩ with a
/// statevector simulator. Per circuit it prints the simulated ancilla (parity) expectation, the
/// ideal product-formula value, the exact value ⟨ψ|e^{-iHt}|ψ⟩, the compile error
/// |simulated − ideal| and the Trotter error |ideal − exact|. Exits with status 1 if any compile
/// error exceeds the tolerance.
///
/// Example:
///   phasewright verify out/ising
#[derive(Args, Debug)]
#[command(
    after_help = "Example:\n  phasewright compile examples/ising_ring8.ham --state 00000000 --dt 0.2 --points 6 -o out/ising\n  phasewright verify out/ising"
)]
pub struct VerifyArgs {
    /// Folder written by `phasewright compile` (holds plan.json and the .qasm files).
    pub dir: PathBuf,
    /// Largest accepted |simulated − ideal| (a non-negative number).
    #[arg(long, default_value_t = COMPILE_TOLERANCE, allow_negative_numbers = true, value_parser = non_negative_f64)]
    pub tolerance: f64,
}

/// A finite number ≥ 0 (refuses `-1`, `nan`, `inf` with a message).
pub fn non_negative_f64(s: &str) -> std::result::Result<f64, String> {
    match s.parse::<f64>() {
        Ok(x) if x.is_finite() && x >= 0.0 => Ok(x),
        _ => Err(format!("`{s}` is not a non-negative number")),
    }
}

pub fn run(args: &VerifyArgs, g: &super::Global) -> Result<()> {
    let plan = read_plan(&args.dir)?;
    let circuits = read_plan_circuits(&args.dir, &plan)?;
    let bar = g.progress(
        circuits.len(),
        "simulating {bar:40} {pos}/{len} circuits ({eta})",
    );
    let checked = check_plan_with_progress(&plan, &circuits, &|| bar.inc(1));
    bar.finish_and_clear();
    let checks = checked.map_err(|m| {
        Error::usage(
            m,
            Some("the plan or a circuit file does not fit this machine or is inconsistent"),
        )
    })?;
    let worst = checks.iter().map(|c| c.compile_error).fold(0.0, f64::max);
    let worst_trotter = checks.iter().map(|c| c.trotter_error).fold(0.0, f64::max);
    let ok = worst <= args.tolerance;
    let trace = if plan.family == Family::Trace {
        trace_summary(&plan, &checks).map_err(|m| Error::usage(m, None))?
    } else {
        None
    };
    if g.json {
        let v = serde_json::json!({ "ok": ok, "tolerance": args.tolerance, "max_compile_error": worst, "max_trotter_error": worst_trotter, "circuits": checks, "trace": trace });
        g.json(&v)?;
    } else {
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
                format!("{:.9}", first.exact),
                sci(c.compile_error),
                sci(c.trotter_error),
            ]);
        }
        out += &t.render();
        out += &format!(
            "\n{} circuits checked; largest compile error {} (tolerance {}), largest Trotter error {}.\n",
            checks.len(),
            sci(worst),
            sci(args.tolerance),
            sci(worst_trotter)
        );
        out += "(for circuits with several reads the first is shown; errors are the largest over all reads)\n";
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
        g.say(&out)?;
    }
    if ok {
        Ok(())
    } else {
        Err(Error::Internal(format!("compile error {} exceeds the tolerance {}: the emitted circuits do not implement the product formula", sci(worst), sci(args.tolerance))))
    }
}
