//! `phasewright estimate`: read a campaign's plan and a counts file, print energies or the
//! density of states, optionally as JSON and as an SVG plot.
//!
//! In: validated arguments. Out: a table on stdout (or JSON with `--json`), an SVG file with
//! `--plot`. Invariant: every problem in the counts file is reported with its position before
//! anything is computed; no output file is left half-written.

use super::io::read_text;
use crate::diag::Code;
use crate::error::{Error, Result};
use crate::estimate::counts::{self, BitOrder};
use crate::estimate::{self, Analysis, Config, DEFAULT_BOOTSTRAP};
use crate::report::estimates::{dos_table, energy_table, to_json};
use crate::report::plot;
use clap::{Args, ValueEnum};
use serde_json::Value;
use std::path::PathBuf;

/// Which end of a bitstring holds classical bit 0.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum BitOrderArg {
    /// Leftmost character is classical bit 0 (phasewright's convention).
    First,
    /// Rightmost character is classical bit 0.
    Last,
}

/// Long help of `phasewright estimate`.
pub const ESTIMATE_HELP: &str = "\
Turn measured counts into energies (overlap and krylov plans) or a density of states (trace \
plans).

Example:
  phasewright estimate campaign/ --counts counts.json --plot energies.svg

The counts file is JSON: {\"format\": \"phasewright-counts/1\", \"counts\": {\"<circuit id>\": \
{\"<bitstring>\": count, ...}, ...}} (see docs/counts.md). A bitstring lists classical bit 0 \
first (leftmost); pass --bit-order last for files that put bit 0 rightmost. The flag wins over \
the file's own \"bit_order\" key.

For overlap and krylov plans the first lines give one final answer, E = … ± σ_stat ± σ_sys: \
the lowest quasi-energy of the compiled product formula from the unitary pencil on the \
overlaps, at a dimension and threshold recommended by a plateau analysis, with the \
systematic part split into threshold sensitivity, unconverged dimension, contamination of \
the Ritz vector (a Temple-type estimate of the bias thresholding leaves, half of which is \
removed) and Trotter bias (--accuracy E warns when the total exceeds E). The table below it gives the lowest Krylov energy for every dimension \
1..K, with ±1σ (one bootstrap standard error, as the plot's error bars), beside the \
matrix-pencil estimate from the overlaps alone. Energies are in hartree for integral-file \
input, otherwise in the units of the .ham coefficients. For trace plans it gives the Gaussian-broadened density of states with a ±2σ band and \
the quadrature error bound.

Caution: energies from noisy hardware depend on the device calibration; validate against \
trusted methods.";

/// Arguments of `phasewright estimate`.
#[derive(Args, Debug, Clone)]
#[command(allow_negative_numbers = true)]
pub struct EstimateArgs {
    /// Campaign folder holding plan.json.
    pub dir: PathBuf,
    /// Counts file (JSON, format phasewright-counts/1; `-`: stdin).
    #[arg(long, value_name = "FILE")]
    pub counts: PathBuf,
    /// Which end of each bitstring is classical bit 0 [default: the file's "bit_order", else first].
    #[arg(long, value_enum, value_name = "ORDER")]
    pub bit_order: Option<BitOrderArg>,
    /// Write an SVG plot (energy against Krylov dimension, or the density of states) to FILE,
    /// which must end in .svg (`-`: the SVG on stdout instead of the table).
    #[arg(long, value_name = "FILE")]
    pub plot: Option<PathBuf>,
    /// Keep eigenvectors of S above this eigenvalue [default: σ̄·d from the shot noise].
    #[arg(long, value_name = "EPS", value_parser = positive_f64)]
    pub threshold: Option<f64>,
    /// Broadening σ of the density of states, energy units [default: 3.5/((K−1)·dt)].
    #[arg(long, value_name = "SIGMA", value_parser = positive_f64)]
    pub sigma: Option<f64>,
    /// A trusted ground energy to show beside the estimates and in the plot.
    #[arg(long, value_name = "ENERGY", allow_negative_numbers = true, value_parser = finite_f64)]
    pub exact: Option<f64>,
    /// Bootstrap replicates for the energy error bars (0 turns them off).
    #[arg(long, value_name = "N", default_value_t = DEFAULT_BOOTSTRAP)]
    pub bootstrap: usize,
    /// Seed of the bootstrap resampling.
    #[arg(long, value_name = "SEED", default_value_t = 0)]
    pub seed: u64,
    /// Undo signal loss: divide each circuit's reads by its calibrated success probability
    /// (recorded by `compile --device`); the method is stated in the output.
    #[arg(long)]
    pub undo_loss: bool,
    /// Accuracy wanted for the final answer, energy units: a warning when the total error
    /// √(σ_stat² + σ_sys²) exceeds it.
    #[arg(long, value_name = "ENERGY", value_parser = positive_f64)]
    pub accuracy: Option<f64>,
}

fn positive_f64(s: &str) -> std::result::Result<f64, String> {
    match s.parse::<f64>() {
        Ok(x) if x.is_finite() && x > 0.0 => Ok(x),
        _ => Err(format!("`{s}` is not a positive number")),
    }
}

fn finite_f64(s: &str) -> std::result::Result<f64, String> {
    match s.parse::<f64>() {
        Ok(x) if x.is_finite() => Ok(x),
        _ => Err(format!("`{s}` is not a finite number")),
    }
}

/// What `estimate` found: the `--json` document (`phasewright-estimate/1`), the table for
/// people and the warnings (also inside the document).
#[derive(Clone, Debug)]
pub struct EstimateOutcome {
    pub json: Value,
    pub text: String,
    pub warnings: Vec<String>,
}

/// Runs `phasewright estimate`.
pub fn run(args: &EstimateArgs, g: &super::Global) -> Result<()> {
    let plot_to_stdout = args.plot.as_deref().is_some_and(super::io::is_stdio);
    if plot_to_stdout && g.json {
        return Err(Error::usage(
            Code::OutputPath,
            "--plot - and --json both want stdout",
            Some("write the plot to a .svg file, or drop --json"),
        ));
    }
    let outcome = estimate_campaign(args, None)?;
    if plot_to_stdout {
        return Ok(());
    }
    for w in &outcome.warnings {
        g.warn(w);
    }
    if g.json {
        return g.json(&outcome.json);
    }
    g.say(&outcome.text)
}

/// Reads the plan and the counts (the file `args.counts`, or `counts_text` when given, named
/// by `args.counts` in diagnostics), estimates, and writes the plot if one is asked for. The
/// library entry point of `estimate` (the command line and the Python module call it).
pub fn estimate_campaign(
    args: &EstimateArgs,
    counts_text: Option<&str>,
) -> Result<EstimateOutcome> {
    if let Some(p) = &args.plot {
        super::io::check_out_file(p, "--plot", Some("svg"), true)?;
    }
    let plan = super::io::read_plan(&args.dir)?;
    if plan.family == crate::plan::Family::Evolution {
        return Err(crate::estimate::EstimateError::Evolution.into());
    }
    super::io::check_campaign_files(&args.dir, &plan)?;
    let text = match counts_text {
        Some(t) => t.to_string(),
        None => read_text(&args.counts)?,
    };
    let order = args.bit_order.map(|b| match b {
        BitOrderArg::First => BitOrder::First,
        BitOrderArg::Last => BitOrder::Last,
    });
    let name = super::io::display_name(&args.counts);
    let counts = counts::parse(&text, &name, &plan, order).map_err(Error::Input)?;
    if args.undo_loss {
        estimate::sanity::calibrated_loss(&plan)
            .map_err(|e| Error::layer_in(&e, "--undo-loss: ", None))?;
    }
    let cfg = Config {
        threshold: args.threshold,
        sigma: args.sigma,
        bootstrap: args.bootstrap,
        seed: args.seed,
        exact: args.exact,
        undo_loss: args.undo_loss,
        accuracy: args.accuracy,
        ..Config::default()
    };
    let analysis = estimate::analyse(&plan, &counts, &cfg)?;
    if let Some(path) = &args.plot {
        let svg = match &analysis {
            Analysis::Energies(r) => plot::energy_svg(r, &plan.energy_label()),
            Analysis::Dos(r) => plot::dos_svg(r, &plan.energy_label()),
        }?;
        super::io::write_output(path, svg.as_bytes())?;
    }
    let warnings = match &analysis {
        Analysis::Energies(r) => r.warnings.clone(),
        Analysis::Dos(r) => r.warnings.clone(),
    };
    Ok(EstimateOutcome {
        json: to_json(&analysis, &plan, counts.bit_order),
        text: match &analysis {
            Analysis::Energies(r) => energy_table(r, &plan),
            Analysis::Dos(r) => dos_table(r, &plan),
        },
        warnings,
    })
}
