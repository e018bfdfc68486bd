//! `phasewright rehearse DIR`: rehearse a campaign on the simulator, writing a counts file in
//! the same format that hardware results are expected in (`sample` is a hidden alias kept for
//! older scripts).
//!
//! In: a validated plan and its unchanged circuit files. Out: one counts file (or stdout), the
//! same bytes for the same seed whatever the number of threads.

use super::io::{read_plan, read_plan_circuits};
use crate::error::{Error, Result};
use crate::lang::codes::Code;
use crate::sim::shots::{bitstring, depolarise, sample_counts};
use crate::sim::{self, check_fits, measured_distribution, State};
use clap::Args;
use rand::SeedableRng;
use rayon::prelude::*;
use std::collections::BTreeMap;
use std::path::PathBuf;

/// Rehearse a campaign: simulate every circuit and draw shots from its exact output
/// distribution, as if the files had been run.
///
/// Writes a counts file: {"format": "phasewright-counts/1", "bit_order": "first", "shots": N,
/// "counts": {"<circuit id>": {"<bitstring>": count}}}. Bitstrings list classical bit 0 first
/// (leftmost). Each circuit gets its own random stream derived from --seed, so the file does
/// not depend on the number of threads.
///
/// --noise applies a global depolarising channel per circuit whose fidelity is the circuit's
/// estimated success probability from the device calibration. This is a crude model: real
/// devices have coherent, correlated and readout-specific errors it does not capture.
#[derive(Args, Debug)]
#[command(
    allow_negative_numbers = true,
    after_help = "Example:\n  phasewright rehearse out/ising --shots 100000 --seed 7 -o out/ising-counts.json\n  phasewright estimate out/ising --counts out/ising-counts.json"
)]
pub struct RehearseArgs {
    /// Folder written by `phasewright compile`.
    pub dir: PathBuf,
    /// Shots per circuit.
    #[arg(long, default_value_t = 10_000)]
    pub shots: u64,
    /// Seed of the shot sampler.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Apply the crude global depolarising model (needs a plan compiled with --device).
    #[arg(long)]
    pub noise: bool,
    /// Counts file to write (default: DIR/counts.json; `-`: stdout).
    #[arg(short = 'o', long = "out")]
    pub out: Option<PathBuf>,
}

/// SplitMix64 finaliser: decorrelates per-circuit seeds derived from one user seed.
fn mix(mut z: u64) -> u64 {
    z = z.wrapping_add(0x9e37_79b9_7f4a_7c15);
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^ (z >> 31)
}

pub fn run(args: &RehearseArgs, g: &super::Global) -> Result<()> {
    if args.shots == 0 {
        return Err(Error::usage(
            Code::UsageOption,
            "--shots must be at least 1",
            None,
        ));
    }
    let out = args
        .out
        .clone()
        .unwrap_or_else(|| args.dir.join("counts.json"));
    let to_stdout = super::io::is_stdio(&out);
    if to_stdout && g.json {
        return Err(Error::usage(
            Code::OutputPath,
            "-o - and --json both want stdout",
            Some("write the counts to a file, or drop --json"),
        ));
    }
    super::io::check_out_file(&out, "-o", None, true)?;
    let plan = read_plan(&args.dir)?;
    if args.noise && plan.device.is_none() {
        return Err(Error::usage(
            Code::UsageConflict,
            "--noise needs calibrated costs, but this plan was compiled without --device",
            Some("compile with --device D.dev, or drop --noise"),
        ));
    }
    let circuits = read_plan_circuits(&args.dir, &plan)?;
    let bar = g.progress(
        circuits.len(),
        "sampling {bar:40} {pos}/{len} circuits ({eta})",
    );
    let results: Vec<Result<(String, BTreeMap<String, u64>)>> = plan
        .circuits
        .par_iter()
        .zip(circuits.par_iter())
        .enumerate()
        .map(|(i, (e, c))| {
            let (small, _) = c.compacted();
            check_fits(small.num_qubits, 2)
                .map_err(|m| Error::usage(Code::UsageLimit, format!("{}: {m}", e.id), None))?;
            let state = sim::run(&small, State::zero(small.num_qubits));
            let mut p = measured_distribution(&small, &state);
            if args.noise {
                p = depolarise(&p, e.costs.success_probability.unwrap_or(1.0));
            }
            let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(mix(args.seed ^ mix(i as u64)));
            let counts = sample_counts(&p, args.shots, &mut rng)
                .into_iter()
                .map(|(k, n)| (bitstring(k, small.num_clbits), n))
                .collect();
            bar.inc(1);
            Ok((e.id.clone(), counts))
        })
        .collect();
    bar.finish_and_clear();
    let mut all = serde_json::Map::new();
    for r in results {
        let (id, counts) = r?;
        all.insert(id, serde_json::to_value(counts).expect("serialisable"));
    }
    let doc = serde_json::json!({
        "format": "phasewright-counts/1",
        "bit_order": "first",
        "shots": args.shots,
        "counts": all,
    });
    super::io::write_output(
        &out,
        (serde_json::to_string_pretty(&doc).expect("serialisable") + "\n").as_bytes(),
    )?;
    if to_stdout {
        return Ok(());
    }
    g.json(&serde_json::json!({
        "circuits": plan.circuits.len(),
        "shots": args.shots,
        "seed": args.seed,
        "noise": args.noise,
        "out": out.display().to_string(),
    }))?;
    g.say(&format!(
        "{} circuits x {} shots written to {}\n",
        plan.circuits.len(),
        args.shots,
        out.display()
    ))
}
