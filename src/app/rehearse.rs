//! `phasewright rehearse DIR`: rehearse a campaign on the simulator, writing a counts file in
//! the same format that hardware results are expected in (`sample` is a hidden alias kept for
//! older scripts).
//!
//! In: a validated plan and its unchanged circuit files (all of them, or one share with
//! `--shard I/N` or in a share folder of `compile --shard`). Out: one counts file (or stdout),
//! the same bytes for the same seed whatever the number of threads. Each circuit's random
//! stream derives from the seed and the circuit's index in the whole campaign, so the counts of
//! N shares joined by `merge` are byte for byte those of one run. Circuits are streamed a chunk
//! at a time (read, simulated, sampled, written in plan order), so memory does not grow with
//! the number of circuits.

use super::io::{read_plan, read_plan_circuit};
use crate::diag::Code;
use crate::error::{Error, Result};
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
/// "counts": `{"<circuit id>": {"<bitstring>": count}}}`. Bitstrings list classical bit 0 first
/// (leftmost). Each circuit gets its own random stream derived from --seed and its index in the
/// whole campaign, so the file depends neither on the number of threads nor on sharding.
///
/// --shard I/N samples only share I of N of the circuits (circuit j goes to share j mod N + 1,
/// as with `compile --shard`); the file is then marked as that share (a "shard" key) and
/// `phasewright merge` joins the N files into the one a single run writes, byte for byte.
///
/// Without --shots, a plan whose shots were shared by `phasewright allot` gets each circuit's
/// own share (the file then has no top-level "shots").
///
/// --noise applies a global depolarising channel per circuit whose fidelity is the circuit's
/// estimated success probability from the device calibration. This is a crude model: real
/// devices have coherent, correlated and readout-specific errors it does not capture.
#[derive(Args, Debug)]
#[command(
    allow_negative_numbers = true,
    after_help = "Example:\n  phasewright rehearse out/ising --shots 100000 --seed 7 -o out/ising-counts.json\n  phasewright estimate out/ising --counts out/ising-counts.json\n\nAs task $TASK of a job array of 4, then one merge:\n  phasewright rehearse out/ising --seed 7 --shard $TASK/4 -o counts-$TASK.json\n  phasewright merge counts-1.json counts-2.json counts-3.json counts-4.json -o counts.json"
)]
pub struct RehearseArgs {
    /// Folder written by `phasewright compile`.
    pub dir: PathBuf,
    /// Shots per circuit [default: each circuit's share from plan.json when `phasewright
    /// allot` wrote one, else 10000].
    #[arg(long)]
    pub shots: Option<u64>,
    /// Seed of the shot sampler.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Apply the crude global depolarising model (needs a plan compiled with --device).
    #[arg(long)]
    pub noise: bool,
    /// Counts file to write (default: DIR/counts.json; `-`: stdout).
    #[arg(short = 'o', long = "out")]
    pub out: Option<PathBuf>,
    /// Sample only share I of N of the circuits (circuit j goes to share j mod N + 1), for the
    /// tasks of a job array; `phasewright merge` joins the N counts files.
    #[arg(long, value_name = "I/N", value_parser = super::shard::parse_shard)]
    pub shard: Option<(usize, usize)>,
}

/// Fewest circuits sampled per streamed chunk.
pub const CHUNK_MIN: usize = 16;

/// One circuit's entry of the counts document as serde_json's pretty printer writes it inside
/// `"counts"` (four spaces before the id, six before each bitstring), with the separator.
pub fn circuit_text(id: &str, counts: &BTreeMap<String, u64>, first: bool) -> String {
    let key = serde_json::to_string(id).expect("a string serialises");
    let mut s = String::with_capacity(32 + 24 * counts.len());
    s.push_str(if first { "\n    " } else { ",\n    " });
    s.push_str(&key);
    if counts.is_empty() {
        s.push_str(": {}");
        return s;
    }
    s.push_str(": {");
    for (i, (b, n)) in counts.iter().enumerate() {
        s.push_str(if i == 0 { "\n      " } else { ",\n      " });
        s.push_str(&serde_json::to_string(b).expect("a string serialises"));
        s.push_str(": ");
        s.push_str(&n.to_string());
    }
    s.push_str("\n    }");
    s
}

/// Where the streamed counts go: stdout, or a temporary file renamed into place at the end
/// (so no half-written counts file is left behind).
enum Sink {
    Stdout,
    File {
        tmp: PathBuf,
        w: std::io::BufWriter<std::fs::File>,
    },
}

impl Sink {
    fn open(out: &std::path::Path, to_stdout: bool) -> Result<Sink> {
        if to_stdout {
            return Ok(Sink::Stdout);
        }
        let dir = out
            .parent()
            .filter(|p| !p.as_os_str().is_empty())
            .unwrap_or(std::path::Path::new("."));
        let name = out
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default();
        let tmp = dir.join(format!(".{name}.{}.tmp", std::process::id()));
        let f = std::fs::File::create(&tmp).map_err(|source| Error::Io {
            path: out.display().to_string(),
            source,
            reading: false,
        })?;
        Ok(Sink::File {
            tmp,
            w: std::io::BufWriter::new(f),
        })
    }

    fn write(&mut self, text: &str) -> Result<()> {
        match self {
            Sink::Stdout => super::io::emit_bytes(text.as_bytes()),
            Sink::File { tmp, w } => {
                use std::io::Write;
                w.write_all(text.as_bytes()).map_err(|source| {
                    let _ = std::fs::remove_file(&*tmp);
                    Error::Io {
                        path: tmp.display().to_string(),
                        source,
                        reading: false,
                    }
                })
            }
        }
    }

    /// Removes the temporary file after a failure.
    fn abort(self) {
        if let Sink::File { tmp, w } = self {
            drop(w);
            let _ = std::fs::remove_file(tmp);
        }
    }

    fn finish(self, out: &std::path::Path) -> Result<()> {
        match self {
            Sink::Stdout => Ok(()),
            Sink::File { tmp, w } => {
                let werr = |source| Error::Io {
                    path: out.display().to_string(),
                    source,
                    reading: false,
                };
                let f = w.into_inner().map_err(|e| werr(e.into_error()))?;
                f.sync_all().map_err(werr)?;
                drop(f);
                std::fs::rename(&tmp, out).map_err(|source| {
                    let _ = std::fs::remove_file(&tmp);
                    werr(source)
                })
            }
        }
    }
}

/// SplitMix64 finaliser: decorrelates per-circuit seeds derived from one user seed.
fn mix(mut z: u64) -> u64 {
    z = z.wrapping_add(0x9e37_79b9_7f4a_7c15);
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^ (z >> 31)
}

/// The opening of a counts document up to `"counts": ` (with `{` or, for no circuit, `{}`), as
/// serde_json's pretty printer writes it; a share's file carries its `shard` mark.
fn counts_head(
    shots: Option<u64>,
    shard: Option<&super::shard::CountsShard>,
    empty: bool,
) -> Result<String> {
    let mut head = serde_json::json!({
        "format": crate::estimate::counts::COUNTS_FORMAT,
        "bit_order": "first",
    });
    if let Some(n) = shots {
        head["shots"] = serde_json::json!(n);
    }
    if let Some(s) = shard {
        head["shard"] = serde_json::to_value(s)
            .map_err(|e| Error::Internal(format!("cannot serialise a shard mark: {e}")))?;
    }
    let text = serde_json::to_string_pretty(&head)
        .map_err(|e| Error::Internal(format!("cannot serialise a counts header: {e}")))?;
    let open = text.strip_suffix("\n}").unwrap_or(&text);
    Ok(format!(
        "{open},\n  \"counts\": {}",
        if empty { "{}" } else { "{" }
    ))
}

/// The closing of a counts document opened by [`counts_head`].
fn counts_tail(empty: bool) -> &'static str {
    if empty {
        "\n}\n"
    } else {
        "\n  }\n}\n"
    }
}

/// A whole counts document in the layout `rehearse` streams: `entries` in order (bitstrings
/// sorted), so that `merge` writes the same bytes one run writes.
pub fn counts_document(
    shots: Option<u64>,
    bit_order: &str,
    entries: &[(String, BTreeMap<String, u64>)],
) -> Result<String> {
    let mut head = serde_json::json!({
        "format": crate::estimate::counts::COUNTS_FORMAT,
        "bit_order": bit_order,
    });
    if let Some(n) = shots {
        head["shots"] = serde_json::json!(n);
    }
    let text = serde_json::to_string_pretty(&head)
        .map_err(|e| Error::Internal(format!("cannot serialise a counts header: {e}")))?;
    let open = text.strip_suffix("\n}").unwrap_or(&text);
    let empty = entries.is_empty();
    let mut out = format!("{open},\n  \"counts\": {}", if empty { "{}" } else { "{" });
    for (i, (id, counts)) in entries.iter().enumerate() {
        out += &circuit_text(id, counts, i == 0);
    }
    out += counts_tail(empty);
    Ok(out)
}

/// Default shots per circuit without --shots or an allotment.
pub const DEFAULT_SHOTS: u64 = 10_000;

/// Runs `phasewright rehearse`.
pub fn run(args: &RehearseArgs, g: &super::Global) -> Result<()> {
    let Some(summary) = rehearse_campaign(args, g)? else {
        return Ok(());
    };
    g.json(&summary)?;
    let out = summary["out"].as_str().unwrap_or_default();
    let share = match args.shard {
        Some((i, n)) => format!(" (share {i}/{n}; `phasewright merge` joins the shares)"),
        None => String::new(),
    };
    g.say(&match summary["shots"].as_u64() {
        Some(n) => format!(
            "{} circuits x {n} shots written to {out}{share}\n",
            summary["circuits"]
        ),
        None => format!(
            "{} circuits, {} shots shared as plan.json allots them, written to {out}{share}\n",
            summary["circuits"], summary["total_shots"]
        ),
    })
}

/// Samples the campaign (or its share) and writes the counts file; returns the summary that
/// `--json` prints, or `None` when the counts went to stdout. The library entry point of
/// `rehearse` (the command line and the Python module call it).
pub fn rehearse_campaign(
    args: &RehearseArgs,
    g: &super::Global,
) -> Result<Option<serde_json::Value>> {
    if args.shots == Some(0) {
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
    let mut plan = read_plan(&args.dir)?;
    super::shard::select_share(&mut plan, args.shard, &args.dir)?;
    if args.noise && plan.device.is_none() {
        return Err(Error::usage(
            Code::UsageConflict,
            "--noise needs calibrated costs, but this plan was compiled without --device",
            Some("compile with --device D.dev, or drop --noise"),
        ));
    }
    super::io::check_campaign_files(&args.dir, &plan)?;
    let mark = plan.shard.map(|s| super::shard::CountsShard {
        index: s.index,
        count: s.count,
        campaign_circuits: s.campaign_circuits,
        campaign: super::shard::campaign_id(&plan),
        seed: Some(args.seed),
        noise: Some(args.noise),
    });
    // Shots per circuit: --shots for all, else the plan's allotment, else the default.
    let allotted = plan.circuits.iter().all(|e| e.shots.is_some()) && !plan.circuits.is_empty();
    let per_circuit: Vec<u64> = plan
        .circuits
        .iter()
        .map(|e| match (args.shots, allotted) {
            (Some(n), _) => n,
            (None, true) => e.shots.unwrap_or(DEFAULT_SHOTS),
            (None, false) => DEFAULT_SHOTS,
        })
        .collect();
    let uniform = match args.shots {
        Some(n) => Some(n),
        None if allotted => None,
        None => Some(DEFAULT_SHOTS),
    };
    let bar = g.progress(
        plan.circuits.len(),
        "sampling {bar:40} {pos}/{len} circuits ({eta})",
    );
    // Streamed: circuits are read, simulated and sampled a chunk at a time (in parallel inside
    // the chunk) and their counts written in plan order before the next chunk is read, so
    // memory holds one chunk, not the campaign. The text is the same bytes serde_json's
    // pretty printer gives for the whole document (two-space indent, plan order, bitstrings
    // sorted), which the test of this module checks.
    let mut sink = Sink::open(&out, to_stdout)?;
    let empty = plan.circuits.is_empty();
    let streamed = (|| -> Result<()> {
        sink.write(&counts_head(uniform, mark.as_ref(), empty)?)?;
        let chunk = (4 * rayon::current_num_threads()).max(CHUNK_MIN);
        for (ci, entries) in plan.circuits.chunks(chunk).enumerate() {
            let texts: Vec<Result<String>> = entries
                .par_iter()
                .enumerate()
                .map(|(j, e)| {
                    let i = ci * chunk + j;
                    // The stream of a circuit depends on its place in the whole campaign, not
                    // in this share, so shares sample what one run samples.
                    let global = plan.shard.map_or(i, |s| s.global_index(i));
                    let c = read_plan_circuit(&args.dir, e)?;
                    let (small, _) = c.compacted();
                    check_fits(small.num_qubits, 2)
                        .map_err(|m| Error::layer_in(&m, &format!("{}: ", e.id), None))?;
                    let state = sim::run(&small, State::zero(small.num_qubits));
                    let mut p = measured_distribution(&small, &state);
                    if args.noise {
                        p = depolarise(&p, e.costs.success_probability.unwrap_or(1.0));
                    }
                    let mut rng =
                        rand_chacha::ChaCha8Rng::seed_from_u64(mix(args.seed ^ mix(global as u64)));
                    let counts: BTreeMap<String, u64> = sample_counts(&p, per_circuit[i], &mut rng)
                        .into_iter()
                        .map(|(k, n)| (bitstring(k, small.num_clbits), n))
                        .collect();
                    bar.inc(1);
                    Ok(circuit_text(&e.id, &counts, i == 0))
                })
                .collect();
            for t in texts {
                sink.write(&t?)?;
            }
        }
        sink.write(counts_tail(empty))
    })();
    bar.finish_and_clear();
    match streamed {
        Ok(()) => sink.finish(&out)?,
        Err(e) => {
            sink.abort();
            return Err(e);
        }
    }
    if to_stdout {
        return Ok(None);
    }
    let total: u64 = per_circuit.iter().sum();
    let mut summary = serde_json::json!({
        "circuits": plan.circuits.len(),
        "shots": uniform,
        "total_shots": total,
        "seed": args.seed,
        "noise": args.noise,
        "out": out.display().to_string(),
    });
    if let Some(m) = &mark {
        summary["shard"] = serde_json::to_value(m)
            .map_err(|e| Error::Internal(format!("cannot serialise a shard mark: {e}")))?;
    }
    Ok(Some(summary))
}
