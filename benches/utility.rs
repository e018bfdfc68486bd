//! Utility-scale figures, each a ratio measured in the same run (never an absolute time alone):
//!
//! 1. parse: a generated 10⁶-term `.ham` on 200 qubits, parse + write back (what `convert`
//!    does: read the file, read it into the writer's flat form, write the text, write the
//!    file; median of three) ÷ (read the file + write the same bytes; median of three), then
//!    the stages of one more run (read, scan, sort+merge, format, write) as multiples of that
//!    copy, and the time to read the same file into a `PauliSum` as the other commands do;
//! 2. compile: a 10⁵-term, 120-qubit Hamiltonian, one second-order step per point, overlap
//!    family, 5 points, all-to-all: compile + write the files (each text written as the
//!    pipeline makes it, `files::FolderWriter`) ÷ write the same bytes (read back from those
//!    files, only the writes timed); the peak resident memory of the process (VmHWM, read
//!    before the copy) printed beside the peak `pipeline::predicted_memory` predicted;
//! 3. scaling: compile time (one time point past 0: the Re and Im circuits of one Strang step)
//!    at 10³…10⁶ terms on 120 qubits, and at 64…1,024 qubits with 100 terms per qubit; the
//!    least-squares exponent of time against size is printed.
//!
//! `cargo bench --bench utility -- stages` prints the stages of section 2 at every size of
//! section 3 (nanoseconds per term), to see which stage grows faster than the term count.
//!
//! Sizes can be cut for a quick look: `PHASEWRIGHT_BENCH_QUICK=1 cargo bench --bench utility`
//! (the largest sizes are dropped). The device figures live in `benches/utility_device.rs`.

use phasewright::family::Spec;
use phasewright::formula::Order;
use phasewright::hamiltonian::{parse_hamiltonian, read_flat};
use phasewright::lang::ham::{plain, write_flat};
use phasewright::pauli::PauliSum;
use phasewright::pipeline::{compile, compile_into, predicted_memory, OptLevel, Target};
use phasewright::plan::Family;
use rand::{Rng, SeedableRng};
use std::io::Write;
use std::path::Path;
use std::time::Instant;

/// A random local Hamiltonian as `.ham` text: `m` distinct strings of weight 1–4 on `n` qubits,
/// coefficients uniform in (−1, 1).
fn random_ham_text(n: usize, m: usize, seed: u64) -> String {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    let mut seen = std::collections::HashSet::new();
    let mut out = format!("qubits {n}\n");
    while seen.len() < m {
        let w = rng.gen_range(1..=4usize).min(n);
        let mut qs: Vec<usize> = Vec::with_capacity(w);
        while qs.len() < w {
            let q = rng.gen_range(0..n);
            if !qs.contains(&q) {
                qs.push(q);
            }
        }
        qs.sort_unstable();
        let term: String = qs
            .iter()
            .map(|q| format!("{}{q}", ['X', 'Y', 'Z'][rng.gen_range(0..3)]))
            .collect::<Vec<_>>()
            .join(" ");
        if seen.insert(term.clone()) {
            out.push_str(&format!("{:.6} {term}\n", rng.gen_range(-1.0..1.0)));
        }
    }
    out
}

fn parse(text: &str) -> PauliSum {
    parse_hamiltonian("bench.ham", text)
        .unwrap_or_else(|d| panic!("generated text parses: {}", d[0].message))
        .sum
}

/// The median of three runs of `f`, in seconds (the machine is shared: single runs are noisy).
fn median3(mut f: impl FnMut()) -> f64 {
    let mut runs: Vec<f64> = (0..3)
        .map(|_| {
            let t = Instant::now();
            f();
            t.elapsed().as_secs_f64()
        })
        .collect();
    runs.sort_by(f64::total_cmp);
    runs[1]
}

/// Section 1: `convert` of a generated file (what the command does: read the file, read it
/// into the writer's flat form, write the text, write the file) against reading and writing
/// the same bytes; then the same work stage by stage, each stage as a share of the copy.
fn parse_section(quick: bool, dir: &Path) {
    let m = if quick { 100_000 } else { 1_000_000 };
    let text = random_ham_text(200, m, 1);
    let src = dir.join("in.ham");
    std::fs::write(&src, &text).unwrap();
    let io_s = median3(|| {
        let read = std::fs::read_to_string(&src).unwrap();
        std::fs::write(dir.join("copy.ham"), &read).unwrap();
    });
    let mut out_len = 0;
    let conv_s = median3(|| {
        let read = std::fs::read_to_string(&src).unwrap();
        let flat = read_flat("bench.ham", &read, None).expect("generated text parses");
        let out = write_flat(&flat.sum, "bench");
        std::fs::write(dir.join("out.ham"), &out).unwrap();
        out_len = out.len();
    });
    println!(
        "parse   {m} terms on 200 qubits ({:.1} MB in, {:.1} MB out): convert {conv_s:.3} s, read+write {io_s:.3} s, ratio {:.1} (target <= 10)",
        text.len() as f64 / 1e6,
        out_len as f64 / 1e6,
        conv_s / io_s
    );
    // Stage by stage (one more run), each as a multiple of the plain copy.
    let t = Instant::now();
    let read = std::fs::read_to_string(&src).unwrap();
    let t_read = t.elapsed().as_secs_f64();
    let t = Instant::now();
    let lines = plain::scan(&read).expect("a plain file");
    let t_scan = t.elapsed().as_secs_f64();
    let t = Instant::now();
    let (flat, _) = lines.merge();
    let t_merge = t.elapsed().as_secs_f64();
    let t = Instant::now();
    let out = write_flat(&flat, "bench");
    let t_format = t.elapsed().as_secs_f64();
    let t = Instant::now();
    std::fs::write(dir.join("out.ham"), &out).unwrap();
    let t_write = t.elapsed().as_secs_f64();
    println!(
        "  stages / copy: read file {:.2}, scan lines {:.2}, sort+merge {:.2}, format {:.2}, write file {:.2}",
        t_read / io_s,
        t_scan / io_s,
        t_merge / io_s,
        t_format / io_s,
        t_write / io_s
    );
    drop((lines, flat, out));
    // What the other commands pay: the same file read into a `PauliSum` (a `BTreeMap`).
    let sum_s = median3(|| {
        std::hint::black_box(parse(&read));
    });
    println!(
        "  read into a PauliSum (compile, verify, …): {sum_s:.3} s, {:.1}x the copy",
        sum_s / io_s
    );
}

fn peak_rss_mb() -> f64 {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with("VmHWM:"))
                .and_then(|l| l.split_whitespace().nth(1)?.parse::<f64>().ok())
        })
        .map_or(f64::NAN, |kb| kb / 1024.0)
}

fn spec(n: usize, points: usize) -> Spec {
    Spec {
        control: phasewright::family::control::Control::Evolution,
        family: Family::Overlap,
        order: Order::Second,
        dt: 0.1,
        points,
        steps_per_dt: 1,
        states: vec!["0".repeat(n)],
    }
}

/// Seconds to write again, through a buffered writer into `to`, every file of the campaign
/// folder `from` (each read back first, untimed), and the bytes written.
fn copy_timed(from: &Path, to: &Path) -> (f64, usize) {
    std::fs::create_dir_all(to).unwrap();
    let mut files: Vec<_> = std::fs::read_dir(from)
        .unwrap()
        .map(|e| e.unwrap().path())
        .collect();
    files.sort();
    let (mut secs, mut bytes) = (0.0, 0);
    for path in files {
        let text = std::fs::read(&path).unwrap();
        let t = Instant::now();
        let f = std::fs::File::create(to.join(path.file_name().unwrap())).unwrap();
        let mut w = std::io::BufWriter::with_capacity(1 << 20, f);
        w.write_all(&text).unwrap();
        w.flush().unwrap();
        secs += t.elapsed().as_secs_f64();
        bytes += text.len();
    }
    (secs, bytes)
}

/// Seconds to compile `h` (all-to-all, [`spec`]) into the folder `dir`, as `compile` does:
/// each text written to its file as soon as it is made, plan.json last; and the bytes of the
/// programs.
fn compile_and_write(h: &PauliSum, points: usize, dir: &Path) -> (f64, usize) {
    let t = Instant::now();
    let writer = phasewright::files::FolderWriter::create(dir, None).expect("a staging folder");
    let mut plan = compile_into(
        h,
        "bench.ham",
        &spec(h.num_qubits, points),
        &Target::AllToAll,
        OptLevel::default(),
        &writer,
    )
    .expect("compiles");
    writer.finish(&mut plan).expect("writes");
    let secs = t.elapsed().as_secs_f64();
    let bytes = plan
        .circuits
        .iter()
        .map(|e| std::fs::metadata(dir.join(&e.file)).map_or(0, |m| m.len() as usize))
        .sum();
    (secs, bytes)
}

/// The all-to-all compile of [`spec`] on one thread, stage by stage as the pipeline's own
/// clock records it (`phasewright::clock`), in seconds, in pipeline order.
fn stages(h: &PauliSum, points: usize) -> Vec<(&'static str, f64)> {
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .expect("a thread pool");
    pool.install(|| {
        phasewright::clock::start();
        let compiled = compile(h, "bench.ham", &spec(h.num_qubits, points)).expect("compiles");
        let parts = phasewright::clock::stop();
        std::hint::black_box(compiled);
        parts
            .into_iter()
            .map(|(s, secs)| (s.name(), secs))
            .collect()
    })
}

/// Least-squares slope of ln(time) against ln(size).
fn exponent(points: &[(f64, f64)]) -> f64 {
    let n = points.len() as f64;
    let (lx, ly): (Vec<f64>, Vec<f64>) = points.iter().map(|(x, y)| (x.ln(), y.ln())).unzip();
    let (mx, my) = (lx.iter().sum::<f64>() / n, ly.iter().sum::<f64>() / n);
    let cov: f64 = lx.iter().zip(&ly).map(|(x, y)| (x - mx) * (y - my)).sum();
    let var: f64 = lx.iter().map(|x| (x - mx) * (x - mx)).sum();
    cov / var
}

fn main() {
    let quick = std::env::var_os("PHASEWRIGHT_BENCH_QUICK").is_some();
    // `cargo bench --bench utility -- parse terms` runs only those sections (parse, compile,
    // terms, qubits); cargo itself passes `--bench`, which is not a section.
    let sections: Vec<String> = std::env::args()
        .skip(1)
        .filter(|a| !a.starts_with("--"))
        .collect();
    let want = |name: &str| sections.is_empty() || sections.iter().any(|s| s == name);
    let scratch = tempfile::tempdir().expect("scratch folder");
    println!(
        "utility benchmark: {} cores, rayon threads {}",
        std::thread::available_parallelism().map_or(0, |n| n.get()),
        rayon::current_num_threads()
    );

    // 1. parse + write back vs read + write the same bytes.
    if want("parse") {
        parse_section(quick, scratch.path());
    }

    // 2. compile 10^5 terms on 120 qubits vs writing the same bytes.
    if want("compile") {
        let m_comp = if quick { 10_000 } else { 100_000 };
        let h = parse(&random_ham_text(120, m_comp, 2));
        let predicted =
            predicted_memory(&h, &spec(120, 5), None).bytes as f64 / (1u64 << 20) as f64;
        let campaign = scratch.path().join("campaign");
        let (comp_s, bytes) = compile_and_write(&h, 5, &campaign);
        let peak = peak_rss_mb();
        let (write_s, _) = copy_timed(&campaign, &scratch.path().join("copy"));
        println!(
        "compile {m_comp} terms on 120 qubits, Strang, 5 points, all-to-all: {comp_s:.2} s for {:.0} MB, writing alone {write_s:.2} s, ratio {:.1} (target <= 10), peak memory {peak:.0} MB, predicted {predicted:.0} MB ({:.2}x the peak)",
        bytes as f64 / 1e6,
        comp_s / write_s,
        predicted / peak,
    );
        // Where the time goes: the same work stage by stage on one thread (the compile above
        // runs circuits and candidates on every core), each as a multiple of the write.
        let parts = stages(&h, 5);
        let serial: f64 = parts.iter().map(|p| p.1).sum();
        let list: Vec<String> = parts
            .iter()
            .map(|(name, s)| format!("{name} {:.2}", s / write_s))
            .collect();
        println!(
            "  stages on one thread / write: {} (sum {:.1}, {serial:.2} s)",
            list.join(", "),
            serial / write_s
        );
    }

    // 3. scaling in terms (120 qubits) and in qubits (100 terms per qubit).
    let term_sizes: &[usize] = if quick {
        &[1_000, 3_000, 10_000]
    } else {
        &[1_000, 10_000, 100_000, 1_000_000]
    };
    let mut pts = Vec::new();
    for &m in term_sizes.iter().filter(|_| want("terms")) {
        let h = parse(&random_ham_text(120, m, 3));
        let (s, bytes) = compile_and_write(&h, 2, &scratch.path().join(format!("t{m}")));
        std::fs::remove_dir_all(scratch.path().join(format!("t{m}"))).ok();
        println!(
            "  terms {m:>8} on 120 qubits: {s:8.2} s ({:.0} MB)",
            bytes as f64 / 1e6
        );
        pts.push((m as f64, s));
    }
    if want("terms") {
        println!(
            "scaling in terms: exponent {:.2} (target <= 1.15)",
            exponent(&pts)
        );
    }
    // Opt-in (`-- stages`): every stage at every size of the term scaling, in nanoseconds per
    // term, to see which one grows faster than the term count.
    if sections.iter().any(|s| s == "stages") {
        for &m in term_sizes {
            let h = parse(&random_ham_text(120, m, 3));
            let list: Vec<String> = stages(&h, 2)
                .iter()
                .map(|(name, s)| format!("{name} {:.0}", s * 1e9 / m as f64))
                .collect();
            println!("  stages at {m:>8} terms, ns per term: {}", list.join(", "));
        }
    }
    let widths: &[usize] = if quick {
        &[64, 128, 256]
    } else {
        &[64, 128, 256, 1024]
    };
    let mut pts = Vec::new();
    for &n in widths.iter().filter(|_| want("qubits")) {
        let h = parse(&random_ham_text(n, 100 * n, 4));
        let (s, bytes) = compile_and_write(&h, 2, &scratch.path().join(format!("q{n}")));
        std::fs::remove_dir_all(scratch.path().join(format!("q{n}"))).ok();
        println!(
            "  qubits {n:>5}, {} terms: {s:8.2} s ({:.0} MB)",
            100 * n,
            bytes as f64 / 1e6
        );
        pts.push((n as f64, s));
    }
    if want("qubits") {
        println!(
            "scaling in qubits (100 terms per qubit): exponent {:.2} (target <= 1.3)",
            exponent(&pts)
        );
    }
}
