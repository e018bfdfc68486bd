//! `phasewright allot DIR --shots N`: share a total shot budget among a campaign's circuits and
//! record each circuit's share in `plan.json` (`circuits[].shots`), where `rehearse` and the
//! person submitting the files find it.
//!
//! In: validated arguments, an unchanged campaign and optionally a pilot counts file. Out: the
//! same plan with `shots` set on every circuit, replaced atomically, and a table of the
//! per-shot standard deviations and shares. Invariant: only `shots` changes in the plan (the
//! circuit files and their hashes are untouched); the shares add up to `--shots` exactly.

use super::estimate::BitOrderArg;
use super::io::{read_plan, read_plan_circuit, read_text};
use crate::diag::Code;
use crate::error::{Error, Result};
use crate::estimate::allot::{self, Rule};
use crate::estimate::counts::{self, BitOrder};
use crate::plan::Family;
use crate::report::table::Table;
use crate::sim::{self, check_fits, measured_distribution, State};
use clap::{Args, ValueEnum};
use rayon::prelude::*;
use std::path::PathBuf;

/// The rule of `--shots-by`.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum ShotsBy {
    /// In proportion to each circuit's per-shot standard deviation (Neyman allocation).
    Spread,
    /// The same number for every circuit.
    Equal,
}

/// Share a total number of shots among the circuits of a campaign and write each circuit's
/// share into plan.json (`shots`); `rehearse` then draws that many per circuit.
///
/// With --shots-by spread (the default) each circuit gets shots in proportion to the per-shot
/// standard deviation of what it contributes to the estimators (Neyman allocation, J. Neyman,
/// J. R. Stat. Soc. 97, 558 (1934)), which minimises the summed variance of the measured
/// quantities at the given total; every circuit keeps at least a tenth of the equal share. The
/// deviations are measured on a pilot run (--counts) or, without one, predicted by simulating
/// every circuit (circuits that fit the simulator only).
#[derive(Args, Debug)]
#[command(
    allow_negative_numbers = true,
    after_help = "Example:\n  phasewright allot out/tfim --shots 38000000\n  phasewright rehearse out/tfim --seed 1\n  phasewright allot out/tfim --shots 38000000 --counts pilot.json   (deviations measured on a pilot run)"
)]
pub struct AllotArgs {
    /// Folder written by `phasewright compile`.
    pub dir: PathBuf,
    /// Total shots over all circuits of the campaign.
    #[arg(long, value_name = "N")]
    pub shots: u64,
    /// How the total is shared among circuits.
    #[arg(long, value_enum, default_value = "spread", value_name = "RULE")]
    pub shots_by: ShotsBy,
    /// Pilot counts (phasewright-counts/1) to measure the per-shot deviations on [default:
    /// predicted by simulating every circuit].
    #[arg(long, value_name = "FILE")]
    pub counts: Option<PathBuf>,
    /// Which end of each pilot bitstring is classical bit 0 [default: the file's, else first].
    #[arg(long, value_enum, value_name = "ORDER")]
    pub bit_order: Option<BitOrderArg>,
}

pub fn run(args: &AllotArgs, g: &super::Global) -> Result<()> {
    let plan = read_plan(&args.dir)?;
    if plan.family == Family::Evolution {
        return Err(Error::usage(
            Code::UsageInput,
            "a plain time-evolution campaign (--measure evolution) reads nothing, so there is \
             no estimator whose variance an allocation could lower",
            Some("give every circuit the same shots with `rehearse --shots N`"),
        ));
    }
    let m = plan.circuits.len() as u64;
    if args.shots < 2 * m.max(1) {
        return Err(Error::usage(
            Code::UsageOption,
            format!(
                "--shots {} is fewer than 2 per circuit for the {m} circuits of this campaign",
                args.shots
            ),
            Some("--shots is the total over the campaign, not per circuit"),
        ));
    }
    super::io::check_campaign_files(&args.dir, &plan)?;
    let (dists, source) = match &args.counts {
        Some(path) => {
            let text = read_text(path)?;
            let order = args.bit_order.map(|b| match b {
                BitOrderArg::First => BitOrder::First,
                BitOrderArg::Last => BitOrder::Last,
            });
            let name = super::io::display_name(path);
            let c = counts::parse(&text, &name, &plan, order).map_err(Error::Input)?;
            let d: Vec<Vec<(u128, f64)>> = c
                .circuits
                .iter()
                .map(|cc| cc.outcomes.iter().map(|&(o, n)| (o, n as f64)).collect())
                .collect();
            (d, format!("measured on the pilot counts {name}"))
        }
        None if args.shots_by == ShotsBy::Equal => (
            vec![Vec::new(); plan.circuits.len()],
            "not needed (equal shares)".to_string(),
        ),
        None => {
            let d: Vec<Vec<(u128, f64)>> = plan
                .circuits
                .par_iter()
                .map(|e| {
                    let c = read_plan_circuit(&args.dir, e)?;
                    let (small, _) = c.compacted();
                    check_fits(small.num_qubits, 2).map_err(|err| {
                        Error::layer_in(
                            &err,
                            &format!("{}: ", e.id),
                            Some("measure the deviations on a pilot run instead: --counts PILOT"),
                        )
                    })?;
                    let state = sim::run(&small, State::zero(small.num_qubits));
                    Ok(measured_distribution(&small, &state)
                        .into_iter()
                        .enumerate()
                        .filter(|(_, p)| *p > 0.0)
                        .map(|(o, p)| (o as u128, p))
                        .collect())
                })
                .collect::<Result<_>>()?;
            (
                d,
                "predicted from every circuit's exact output distribution (statevector \
                 simulation of the files, no noise)"
                    .to_string(),
            )
        }
    };
    let sd = match args.shots_by {
        ShotsBy::Equal => vec![1.0; plan.circuits.len()],
        ShotsBy::Spread => allot::per_shot_sd(&plan, &dists)?,
    };
    let rule = match args.shots_by {
        ShotsBy::Spread => Rule::Spread,
        ShotsBy::Equal => Rule::Equal,
    };
    let shots = allot::allocate(args.shots, &sd, rule);
    let equal = allot::allocate(args.shots, &sd, Rule::Equal);
    let mut out = plan.clone();
    for (e, &n) in out.circuits.iter_mut().zip(&shots) {
        e.shots = Some(n);
    }
    super::io::write_atomic(&args.dir.join("plan.json"), out.to_json().as_bytes())?;
    let v = allot::summed_variance(&sd, &shots);
    let v_equal = allot::summed_variance(&sd, &equal);
    let rule_name = match args.shots_by {
        ShotsBy::Spread => "spread",
        ShotsBy::Equal => "equal",
    };
    if g.json {
        return g.json(&serde_json::json!({
            "total_shots": args.shots,
            "rule": rule_name,
            "deviations": source,
            "summed_variance": (args.shots_by == ShotsBy::Spread).then_some(v),
            "summed_variance_equal": (args.shots_by == ShotsBy::Spread).then_some(v_equal),
            "circuits": out.circuits.iter().zip(&sd).map(|(e, s)| serde_json::json!({
                "id": e.id,
                "sd_per_shot": (args.shots_by == ShotsBy::Spread).then_some(*s),
                "shots": e.shots,
            })).collect::<Vec<_>>(),
        }));
    }
    let mut t = Table::new(["circuit", "sd per shot", "shots"]);
    for (e, s) in out.circuits.iter().zip(&sd) {
        t.row([
            e.id.clone(),
            if args.shots_by == ShotsBy::Spread {
                format!("{s:.4}")
            } else {
                "-".into()
            },
            e.shots.unwrap_or(0).to_string(),
        ]);
    }
    let mut text = t.render();
    text.push('\n');
    text.push_str(&format!(
        "{} shots shared among {} circuits ({rule_name}) and written to {}.\n",
        args.shots,
        m,
        args.dir.join("plan.json").display()
    ));
    if args.shots_by == ShotsBy::Spread {
        text.push_str(&format!(
            "Per-shot deviations {source}.\nSummed variance of the quantities read Σσ²/n: \
             {v:.3e}, against {v_equal:.3e} with equal shots (ratio {:.3}; Neyman allocation, \
             J. Neyman 1934).\n",
            v / v_equal
        ));
    }
    text.push_str(
        "`phasewright rehearse` now draws each circuit's share; on hardware, submit each file \
         with the shots plan.json lists for it.\n",
    );
    g.say(&text)
}
