//! Device compile at utility scale: total compile time ÷ time to write the same bytes.
//!
//! Cases (invented Hamiltonians, generated here with fixed seeds; every campaign on the
//! 127-qubit heavy-hexagon example device `examples/hexchip127.dev`, overlap family, one
//! reference state |0…0⟩, `dt` = 0.1, one Trotter step per `dt`):
//!
//! 1. 100 qubits, 1,000 random strings of weight 1–4 on random qubits (the shape of the
//!    utility-scale issue's report: support anywhere on the 100 qubits), second order, 3 points;
//! 2. the same shape with 10⁴ strings, second order, 5 points;
//! 3. 120 qubits, 10⁵ strings of weight 1–4, each supported inside a window of 8 consecutive
//!    qubits (a quasi-one-dimensional model with couplings beyond nearest neighbours), second
//!    order, 5 points. Random supports at this size would need ~40 SWAPs per term on this chip
//!    and tens of gigabytes of output; the window keeps the output in memory.
//!
//! For each case, in a child process of its own (so that the peak resident memory read from
//! `VmHWM` in `/proc/self/status` belongs to that case alone):
//! - `compile`: parse the `.ham` and `.dev` texts, `pipeline::compile_into` on the device
//!   with the writer `compile` uses (`files::FolderWriter`: each text written to its file in a
//!   staging folder as soon as it is made, plan.json last, then the folder renamed);
//! - `write`: `std::fs::write` of the same bytes (read back from those files, only the writes
//!   timed), file by file, into another fresh folder;
//! - `peak MB` (VmHWM, read before that copy) beside `pred MB`, the peak
//!   `pipeline::predicted_memory` predicted (MiB both);
//! - `ratio` = compile ÷ write (the utility-scale issue's target on a device: ≤ 30);
//! - SWAPs: those in one routed step (forward block) and the total over the campaign's circuits
//!   as plan.json records them; two-qubit gates written; output size; cores (rayon threads).
//!
//! Run: `cargo bench --bench utility_device` (all cases) or `… -- 1` (one case).

use phasewright::device::Device;
use phasewright::family::Spec;
use phasewright::formula::Order;
use phasewright::pipeline::{compile_into, predicted_memory, OptLevel, Target};
use phasewright::plan::Family;
use phasewright::route::RouteConfig;
use rand::{Rng, SeedableRng};
use std::fmt::Write as _;
use std::time::Instant;

/// Distinct random strings of weight 1–4 in the `.ham` text format, as `(qubits, strings)`.
/// With `window = Some(w)`, each string's support lies in `w` consecutive qubits.
fn hamiltonian_text(n: usize, terms: usize, window: Option<usize>, seed: u64) -> String {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    let mut seen = std::collections::HashSet::new();
    let mut out = format!("qubits {n}\n");
    while seen.len() < terms {
        let w = rng.gen_range(1..=4usize);
        let (lo, span) = match window {
            Some(win) => (rng.gen_range(0..=n - win), win),
            None => (0, n),
        };
        let mut qs: Vec<usize> = Vec::new();
        while qs.len() < w {
            let q = lo + rng.gen_range(0..span);
            if !qs.contains(&q) {
                qs.push(q);
            }
        }
        qs.sort_unstable();
        let mut line = String::new();
        for q in qs {
            let p = ['X', 'Y', 'Z'][rng.gen_range(0..3)];
            write!(line, " {p}{q}").unwrap();
        }
        if seen.insert(line.clone()) {
            writeln!(out, "{:.6}{line}", rng.gen_range(-1.0..1.0)).unwrap();
        }
    }
    out
}

struct Case {
    name: &'static str,
    qubits: usize,
    terms: usize,
    window: Option<usize>,
    order: Order,
    points: usize,
}

const CASES: [Case; 3] = [
    Case {
        name: "random supports, 10^3 terms",
        qubits: 100,
        terms: 1_000,
        window: None,
        order: Order::Second,
        points: 3,
    },
    Case {
        name: "random supports, 10^4 terms",
        qubits: 100,
        terms: 10_000,
        window: None,
        order: Order::Second,
        points: 5,
    },
    Case {
        name: "8-qubit windows, 10^5 terms",
        qubits: 120,
        terms: 100_000,
        window: Some(8),
        order: Order::Second,
        points: 5,
    },
];

fn peak_rss_mb() -> f64 {
    let status = std::fs::read_to_string("/proc/self/status").unwrap_or_default();
    status
        .lines()
        .find_map(|l| l.strip_prefix("VmHWM:"))
        .and_then(|v| v.trim().trim_end_matches("kB").trim().parse::<f64>().ok())
        .map_or(f64::NAN, |kb| kb / 1024.0)
}

/// Runs one case in this process and prints its row.
fn run_case(i: usize) {
    let case = &CASES[i];
    let ham_text = hamiltonian_text(case.qubits, case.terms, case.window, 9 + i as u64);
    let dev_text =
        std::fs::read_to_string("examples/hexchip127.dev").expect("run from the crate root");
    let scratch = tempfile::tempdir().expect("scratch folder");
    let t0 = Instant::now();
    let h = phasewright::hamiltonian::parse_hamiltonian("bench.ham", &ham_text)
        .expect("generated text parses")
        .sum;
    let dev: Device =
        phasewright::lang::dev::parse_device("hexchip127.dev", &dev_text).expect("example parses");
    let spec = Spec {
        control: phasewright::family::control::Control::Evolution,
        family: Family::Overlap,
        order: case.order,
        dt: 0.1,
        points: case.points,
        steps_per_dt: 1,
        states: vec!["0".repeat(case.qubits)],
    };
    let config = RouteConfig::default();
    let target = Target::Device {
        device: &dev,
        config: &config,
    };
    let predicted = predicted_memory(&h, &spec, Some(&dev)).bytes as f64 / (1u64 << 20) as f64;
    let out = scratch.path().join("campaign");
    let writer = phasewright::files::FolderWriter::create(&out, None).expect("a staging folder");
    let mut plan = compile_into(
        &h,
        "bench.ham",
        &spec,
        &target,
        OptLevel::default(),
        &writer,
    )
    .expect("compiles");
    let t_plan = t0.elapsed().as_secs_f64();
    writer.finish(&mut plan).expect("writes");
    let t_compile = t0.elapsed().as_secs_f64();
    let peak = peak_rss_mb();
    let compiled = phasewright::pipeline::Compiled {
        plan,
        programs: Vec::new(),
    };
    // The same bytes, plainly written (each file read back first, untimed).
    let plain = scratch.path().join("plain");
    std::fs::create_dir_all(&plain).unwrap();
    let mut names: Vec<String> = compiled
        .plan
        .circuits
        .iter()
        .map(|e| e.file.clone())
        .collect();
    names.push("plan.json".into());
    let (mut t_write, mut bytes) = (0.0, 0);
    for name in &names {
        let text = std::fs::read(out.join(name)).unwrap();
        let t1 = Instant::now();
        std::fs::write(plain.join(name), &text).unwrap();
        t_write += t1.elapsed().as_secs_f64();
        bytes += text.len();
    }
    let swaps: usize = compiled.plan.circuits.iter().map(|c| c.costs.swaps).sum();
    let two_qubit: usize = compiled
        .plan
        .circuits
        .iter()
        .map(|c| c.costs.two_qubit)
        .sum();
    let step_swaps = compiled
        .plan
        .circuits
        .iter()
        .find(|c| c.k == 1)
        .map_or(0, |c| c.costs.swaps);
    println!(
        "{:<30} {:>4} {:>7} {:>6} | {:>8.2} {:>8.2} {:>8.3} {:>7.1} | {:>8} {:>9} {:>10} {:>8.1} {:>8.0} {:>8.0} {:>5}",
        case.name,
        case.qubits,
        case.terms,
        case.points,
        t_plan,
        t_compile,
        t_write,
        t_compile / t_write,
        step_swaps,
        swaps,
        two_qubit,
        bytes as f64 / 1e6,
        peak,
        predicted,
        rayon::current_num_threads()
    );
}

fn main() {
    let args: Vec<String> = std::env::args()
        .skip(1)
        .filter(|a| !a.starts_with('-'))
        .collect();
    if let Some(i) = args.iter().find_map(|a| a.strip_prefix("case=")) {
        run_case(i.parse().expect("case index"));
        return;
    }
    let chosen: Vec<usize> = match args.first().and_then(|a| a.parse::<usize>().ok()) {
        Some(k) if (1..=CASES.len()).contains(&k) => vec![k - 1],
        _ => (0..CASES.len()).collect(),
    };
    println!(
        "{:<30} {:>4} {:>7} {:>6} | {:>8} {:>8} {:>8} {:>7} | {:>8} {:>9} {:>10} {:>8} {:>8} {:>8} {:>5}",
        "case",
        "n",
        "terms",
        "points",
        "plan s",
        "total s",
        "write s",
        "ratio",
        "step sw",
        "swaps",
        "2q gates",
        "MB out",
        "peak MB",
        "pred MB",
        "cores"
    );
    let me = std::env::current_exe().expect("own path");
    for i in chosen {
        let status = std::process::Command::new(&me)
            .arg(format!("case={i}"))
            .status()
            .expect("child runs");
        assert!(status.success(), "case {} failed", i + 1);
    }
}
