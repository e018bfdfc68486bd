//! Fewer two-qubit gates: what each `--opt` level emits for one second-order Trotter step.
//!
//! An invented suite, generated here: transverse-field Ising chains of 12 and 20 sites, an XXZ
//! chain of 12, a 4×4 Heisenberg model with random fields, a 3×4 transverse-field Ising model,
//! a 2×3 Hubbard model (Jordan–Wigner, spin orbitals interleaved), a dense random 12-qubit sum
//! (200 strings of weight 1–6), and the lattice models again with their qubit labels shuffled.
//! Devices: all-to-all, a line and a ring of n+1 qubits, the smallest square-ish grid and brick
//! wall of at least n+1, and the 127-qubit heavy hexagon of `examples/hexchip127.dev`.
//!
//! For every pair and level it compiles an overlap campaign with one Strang step per point
//! (`--points 2`) and prints the real-part circuit `k01-re`: two-qubit gates (`2q`) and
//! two-qubit depth (`d2`, the longest chain of two-qubit gates); then, where the issue sets a
//! target, its reference count (`ref`), the best level's `2q / ref` (`ratio`) and the largest
//! ratio the target allows (`goal`); and `d2 / 2q` of the best level. The targets:
//! - Ising chain on a line of n+1: `2q ≤ 1.05 ×` the hand-written one-sweep schedule
//!   (154 CNOTs for 12 sites: 22 ZZ half-rotations at 4 CNOTs, 12 X at 2, 14 SWAPs);
//! - lattice models on grid, brick wall and heavy hexagon: `2q ≤ 1.2 × (uncontrolled + 2 per
//!   controlled rotation)`, the uncontrolled step routed with the same search and no ancilla;
//! - dense and chemistry-like: best level `≤ 0.6 ×` level 0 all-to-all, routed `≤ 1.8 ×` their
//!   own all-to-all count;
//! - shuffled lattice models: layout edges recovered (terms whose qubits start coupled);
//! - `d2 ≤ 0.7 × 2q` on the lattice models.
//!
//! Level 3 includes the spread control (`route::cat`, copies of the ancilla on unused qubits,
//! kept only when the campaign emits fewer two-qubit gates); `-- nocat` leaves it out, to
//! measure what it changes.
//!
//! Run with `cargo bench --bench fewer_gates` (add `-- quick` for levels 2 and 3 only;
//! `MODELS=dense12,h4` for some models only, `DEVICES=a2a,grid` for some devices).
//! `TRIES=4` runs the layout search from 4 seeds and keeps the best campaign
//! (`compile --tries`; the uncontrolled reference is searched once).
//! `COHERENCE_US=100` calibrates every device alike (`cx` error 0.01 and 300 ns, `sx` and `x`
//! 35 ns: common-practice figures of superconducting chips, from memory; the heavy hexagon
//! keeps its file's errors and times) and gives each qubit
//! that coherence time, so the search weighs idling against CNOTs (`route::emitted_score`):
//! it shows what a depth-aware objective trades. Such a run adds the best level's success
//! estimate on that device (`succ`), and the success estimate, two-qubit gates and depth of the
//! campaign the same level keeps when waiting is free (`free`, `2q`, `d2`: the device without
//! the coherence time, its program costed on the device with it).
//! Deterministic: fixed seeds throughout.

use phasewright::device::{lattice, Calibration, Device, NativeSet};
use phasewright::family::Spec;
use phasewright::formula::{order_terms, step, Order};
use phasewright::pauli::{Pauli, PauliString, PauliSum};
use phasewright::pipeline::{compile_at, OptLevel, Target};
use phasewright::plan::Family;
use phasewright::route::{plan_target, step_circuit, to_device, RouteConfig};
use rand::{Rng, SeedableRng};

fn zz(a: usize, b: usize, p: Pauli) -> PauliString {
    PauliString::from_factors(&[(a, p), (b, p)]).1
}

fn ising_chain(n: usize) -> PauliSum {
    let mut h = PauliSum::new(n);
    for q in 0..n {
        h.add(PauliString::single(q, Pauli::X), 0.7);
        if q + 1 < n {
            h.add(zz(q, q + 1, Pauli::Z), -1.0);
        }
    }
    h
}

fn xxz_chain(n: usize) -> PauliSum {
    let mut h = PauliSum::new(n);
    for q in 0..n - 1 {
        h.add(zz(q, q + 1, Pauli::X), 1.0);
        h.add(zz(q, q + 1, Pauli::Y), 1.0);
        h.add(zz(q, q + 1, Pauli::Z), 0.6);
    }
    h
}

fn lattice_edges(rows: usize, cols: usize) -> Vec<(usize, usize)> {
    let mut e = Vec::new();
    for r in 0..rows {
        for c in 0..cols {
            let q = r * cols + c;
            if c + 1 < cols {
                e.push((q, q + 1));
            }
            if r + 1 < rows {
                e.push((q, q + cols));
            }
        }
    }
    e
}

fn heisenberg_2d(rows: usize, cols: usize, seed: u64) -> PauliSum {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    let n = rows * cols;
    let mut h = PauliSum::new(n);
    for (a, b) in lattice_edges(rows, cols) {
        for p in [Pauli::X, Pauli::Y, Pauli::Z] {
            h.add(zz(a, b, p), 1.0);
        }
    }
    for q in 0..n {
        h.add(PauliString::single(q, Pauli::Z), rng.gen_range(-1.0..1.0));
    }
    h
}

fn ising_2d(rows: usize, cols: usize) -> PauliSum {
    let n = rows * cols;
    let mut h = PauliSum::new(n);
    for (a, b) in lattice_edges(rows, cols) {
        h.add(zz(a, b, Pauli::Z), -1.0);
    }
    for q in 0..n {
        h.add(PauliString::single(q, Pauli::X), 0.8);
    }
    h
}

/// Fermi–Hubbard on a rows×cols lattice, Jordan–Wigner with qubit 2s+σ for site s, spin σ:
/// hopping `−t Σ (a†_i a_j + h.c.) = −t/2 (X_i Z…Z X_j + Y_i Z…Z Y_j)` between the same spin
/// on neighbouring sites, on-site `U n↑ n↓ = U/4 (1 − Z↑ − Z↓ + Z↑Z↓)` (Jordan & Wigner 1928;
/// the standard textbook mapping).
fn hubbard(rows: usize, cols: usize, t: f64, u: f64) -> PauliSum {
    let n = 2 * rows * cols;
    let mut h = PauliSum::new(n);
    for (a, b) in lattice_edges(rows, cols) {
        for spin in 0..2 {
            let (i, j) = (2 * a + spin, 2 * b + spin);
            let (i, j) = (i.min(j), i.max(j));
            for p in [Pauli::X, Pauli::Y] {
                let mut f: Vec<(usize, Pauli)> = vec![(i, p)];
                f.extend((i + 1..j).map(|k| (k, Pauli::Z)));
                f.push((j, p));
                h.add(PauliString::from_factors(&f).1, -t / 2.0);
            }
        }
    }
    for s in 0..rows * cols {
        let (up, dn) = (2 * s, 2 * s + 1);
        h.add(PauliString::single(up, Pauli::Z), -u / 4.0);
        h.add(PauliString::single(dn, Pauli::Z), -u / 4.0);
        h.add(zz(up, dn, Pauli::Z), u / 4.0);
    }
    h
}

fn dense(n: usize, terms: usize, seed: u64) -> PauliSum {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    let mut h = PauliSum::new(n);
    while h.terms.len() < terms {
        let w = rng.gen_range(1..=6);
        let mut f = Vec::new();
        let mut qs: Vec<usize> = (0..n).collect();
        for k in 0..w {
            let j = rng.gen_range(k..n);
            qs.swap(k, j);
            let p = [Pauli::X, Pauli::Y, Pauli::Z][rng.gen_range(0..3)];
            f.push((qs[k], p));
        }
        h.add(PauliString::from_factors(&f).1, rng.gen_range(-1.0..1.0));
    }
    h
}

/// The Jordan–Wigner qubit Hamiltonian of an integral file, read by the library's own loader
/// (`fermion::fcidump`), the constant dropped; `None` when the file is missing.
fn from_integrals(path: &str) -> Option<PauliSum> {
    let text = std::fs::read_to_string(path).ok()?;
    let ints =
        phasewright::fermion::fcidump::parse_fcidump(path, &text).expect("integral file parses");
    let (mut h, _) = phasewright::fermion::qubit_hamiltonian_from_integrals(
        &ints,
        phasewright::fermion::Encoding::JordanWigner,
        0,
    )
    .expect("integrals map to qubits");
    // What `compile` keeps by default: strings below `--cutoff` (1e-10 Ha) are integral
    // round-off and are dropped before compiling.
    h.drop_below(1e-10);
    Some(h)
}

/// The same model with qubit `q` renamed `perm[q]`.
fn shuffled(h: &PauliSum, seed: u64) -> PauliSum {
    let n = h.num_qubits;
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    let mut perm: Vec<usize> = (0..n).collect();
    for i in (1..n).rev() {
        perm.swap(i, rng.gen_range(0..=i));
    }
    let mut out = PauliSum::new(n);
    for (p, &c) in &h.terms {
        let f: Vec<(usize, Pauli)> = p
            .support_qubits()
            .into_iter()
            .map(|q| (perm[q], p.get(q)))
            .collect();
        out.add(PauliString::from_factors(&f).1, c);
    }
    out
}

fn device(name: &str, n: usize, links: &[(u32, u32)]) -> Device {
    Device::new(
        name,
        n,
        links,
        NativeSet::rz_sx_x_cx(),
        Calibration::default(),
    )
}

fn devices(n: usize) -> Vec<Option<Device>> {
    let m = (n + 1) as u32;
    let cols = (m as f64).sqrt().ceil() as u32;
    let rows = m.div_ceil(cols);
    let hex_text = std::fs::read_to_string("examples/hexchip127.dev").expect("example device");
    let mut hex =
        phasewright::lang::dev::parse_device("hexchip127.dev", &hex_text).expect("parses");
    // The suite compares two-qubit counts: every coupler counts alike (with the example's
    // weak couplers the search weighs CNOTs by their error, `route::emitted_score`).
    hex.calibration.link_error_rate.clear();
    let coherence_us: Option<f64> = std::env::var("COHERENCE_US")
        .ok()
        .map(|t| t.parse().expect("COHERENCE_US is a number of microseconds"));
    let calibrated = |mut d: Device| {
        if let Some(t) = coherence_us {
            let cal = &mut d.calibration;
            // The heavy hexagon keeps its file's errors and times.
            if cal.time_ns.is_empty() {
                cal.error_rate.insert("cx".into(), 0.01);
                for (g, ns) in [("cx", 300.0), ("sx", 35.0), ("x", 35.0)] {
                    cal.time_ns.insert(g.into(), ns);
                }
            }
            cal.coherence_ns = Some(t * 1000.0);
        }
        d
    };
    vec![
        None,
        Some(device("line", m as usize, &lattice::line(m))),
        Some(device("ring", m as usize, &lattice::ring(m))),
        Some(device(
            "grid",
            (rows * cols) as usize,
            &lattice::grid(rows, cols),
        )),
        Some(device(
            "brick",
            (rows * cols) as usize,
            &lattice::brickwall(rows, cols),
        )),
        Some(hex),
    ]
    .into_iter()
    .map(|d| d.map(calibrated))
    .collect()
}

struct Row {
    two_qubit: usize,
    depth2: usize,
    /// The written `k01-re` program.
    text: String,
}

/// `TRIES=n`: layout searches from n seeds, the best campaign kept (`compile --tries`).
fn tries() -> usize {
    std::env::var("TRIES").map_or(1, |t| t.parse().expect("TRIES is a whole number"))
}

fn measure(h: &PauliSum, dev: Option<&Device>, level: OptLevel, cat: bool) -> Row {
    let spec = Spec {
        family: Family::Overlap,
        order: Order::Second,
        dt: 0.1,
        points: 2,
        steps_per_dt: 1,
        states: vec!["0".repeat(h.num_qubits)],
        control: phasewright::family::control::Control::Evolution,
    };
    let cfg = RouteConfig {
        cat,
        tries: tries(),
        ..RouteConfig::default()
    };
    let target = match dev {
        Some(device) => Target::Device {
            device,
            config: &cfg,
        },
        None => Target::AllToAll,
    };
    let out = compile_at(h, "suite", &spec, &target, level).expect("compiles");
    let i = out
        .plan
        .circuits
        .iter()
        .position(|c| c.id == "k01-re")
        .expect("k01-re");
    let costs = &out.plan.circuits[i].costs;
    Row {
        two_qubit: costs.two_qubit,
        depth2: costs.two_qubit_depth,
        text: out.programs[i].clone(),
    }
}

/// The success estimate of a written program on `dev` (`device::costs`).
fn success_on(text: &str, dev: &Device) -> f64 {
    let p = phasewright::qasm::read("k01-re.qasm", text).expect("reads back");
    phasewright::device::costs(&p.circuit, dev, 0)
        .success_probability
        .expect("a device")
}

/// Two-qubit gates of the uncontrolled step routed with the same search, no ancilla.
fn uncontrolled(h: &PauliSum, dev: &Device) -> usize {
    let cfg = RouteConfig::default();
    let plan = plan_target(h, phasewright::route::Ancilla::None, dev, &cfg).expect("fits");
    let c = step_circuit(&plan.terms(h), &plan, Order::Second, 0.1);
    let r = to_device(&c, &plan, dev, &cfg).expect("routes");
    r.circuit
        .circuit()
        .gates
        .iter()
        .filter(|g| g.is_two_qubit())
        .count()
}

/// Terms whose two qubits start on coupled sites, of the weight-2 terms, under the layout the
/// level-3 search picks for the uncontrolled evolution.
fn edges_recovered(h: &PauliSum, dev: &Device) -> (usize, usize) {
    let plan = plan_target(
        h,
        phasewright::route::Ancilla::None,
        dev,
        &RouteConfig::default(),
    )
    .expect("fits");
    let mut hit = 0;
    let mut all = 0;
    for p in h.terms.keys() {
        let s = p.support_qubits();
        if s.len() == 2 {
            all += 1;
            hit += dev.coupled(plan.initial_layout[s[0]], plan.initial_layout[s[1]]) as usize;
        }
    }
    (hit, all)
}

fn main() {
    let quick = std::env::args().any(|a| a == "quick");
    let cat = !std::env::args().any(|a| a == "nocat");
    let levels: Vec<u8> = if quick { vec![2, 3] } else { vec![0, 1, 2, 3] };
    let lattice_models = ["ising12", "ising20", "xxz12", "heis4x4", "ising3x4"];
    let mut suite: Vec<(&str, PauliSum)> = vec![
        ("ising12", ising_chain(12)),
        ("ising20", ising_chain(20)),
        ("xxz12", xxz_chain(12)),
        ("heis4x4", heisenberg_2d(4, 4, 11)),
        ("ising3x4", ising_2d(3, 4)),
        ("hubbard2x3", hubbard(2, 3, 1.0, 4.0)),
        ("dense12", dense(12, 200, 5)),
        ("ising12~", shuffled(&ising_chain(12), 3)),
        ("heis4x4~", shuffled(&heisenberg_2d(4, 4, 11), 4)),
        ("ising3x4~", shuffled(&ising_2d(3, 4), 5)),
    ];
    // Chemistry from integral files: H4 (STO-3G, 8 qubits) and LiH (STO-3G, 12 qubits,
    // written by `tests/data/make_lih.py` with PySCF).
    for (name, path) in [
        ("h4", "tests/data/h4_sto3g_r1.0.fcidump"),
        ("lih", "tests/data/lih_sto3g_r1.6.fcidump"),
    ] {
        match from_integrals(path) {
            Some(h) => suite.insert(7, (name, h)),
            None => println!("{name}: {path} is missing"),
        }
    }
    let dev_names = ["a2a", "line", "ring", "grid", "brick", "hex127"];
    print!("{:<11}{:<7}", "model", "device");
    for l in &levels {
        print!("{:>8}{:>6}", format!("L{l} 2q"), "d2");
    }
    print!("{:>8}{:>8}{:>7}{:>8}", "ref", "ratio", "goal", "d2/2q");
    let coherence_run = std::env::var("COHERENCE_US").is_ok();
    if coherence_run {
        print!("{:>10}{:>10}{:>7}{:>6}", "succ", "free", "2q", "d2");
    }
    println!();
    // `MODELS=dense12,hubbard2x3` runs some models only.
    let only: Option<Vec<String>> = std::env::var("MODELS")
        .ok()
        .map(|m| m.split(',').map(str::to_string).collect());
    for (name, h) in &suite {
        if only.as_ref().is_some_and(|o| !o.iter().any(|m| m == name)) {
            continue;
        }
        let base = name.trim_end_matches('~');
        let is_lattice = lattice_models.contains(&base);
        let rotations = step(&order_terms(h), Order::Second, 0.1).len();
        let mut a2a_best = 0usize;
        let mut a2a_l0 = 0usize;
        for (dname, dev) in dev_names.iter().zip(devices(h.num_qubits)) {
            if std::env::var("DEVICES").is_ok_and(|d| !d.split(',').any(|x| x == *dname)) {
                continue;
            }
            if dev.as_ref().is_some_and(|d| d.num_qubits <= h.num_qubits) {
                continue;
            }
            print!("{name:<11}{dname:<7}");
            let mut last = Row {
                two_qubit: 0,
                depth2: 0,
                text: String::new(),
            };
            for &l in &levels {
                let r = measure(h, dev.as_ref(), OptLevel::new(l).expect("level"), cat);
                print!("{:>8}{:>6}", r.two_qubit, r.depth2);
                if dev.is_none() && l == 0 {
                    a2a_l0 = r.two_qubit;
                }
                last = r;
            }
            if dev.is_none() {
                a2a_best = last.two_qubit;
                // The quick run skips level 0 in the table but still needs its count as the
                // reference of the chemistry and dense rows.
                if !levels.contains(&0) {
                    a2a_l0 = measure(h, None, OptLevel::TEXTBOOK, cat).two_qubit;
                }
            }
            // The reference count for this pair and the largest ratio it allows.
            let target: Option<(f64, f64)> = match (&dev, base) {
                (Some(d), "ising12" | "ising20") if d.name == "line" => {
                    // Hand one-sweep schedule: 2(n−1) ZZ halves × 4 + n X × 2 + (n+2) SWAPs × 3.
                    let n = h.num_qubits as f64;
                    Some((8.0 * (n - 1.0) + 2.0 * n + 3.0 * (n + 2.0), 1.05))
                }
                (Some(d), _)
                    if is_lattice && ["grid", "brick", "hexchip127"].contains(&d.name.as_str()) =>
                {
                    Some(((uncontrolled(h, d) + 2 * rotations) as f64, 1.2))
                }
                (Some(_), "hubbard2x3" | "dense12" | "h4" | "lih") => Some((a2a_best as f64, 1.8)),
                (None, "hubbard2x3" | "dense12" | "h4" | "lih") => Some((a2a_l0 as f64, 0.6)),
                _ => None,
            };
            match target {
                Some((reference, goal)) => print!(
                    "{:>8.0}{:>8.2}{:>7.2}",
                    reference,
                    last.two_qubit as f64 / reference,
                    goal
                ),
                None => print!("{:>8}{:>8}{:>7}", "-", "-", "-"),
            }
            print!("{:>8.2}", last.depth2 as f64 / last.two_qubit.max(1) as f64);
            // With coherence times: the best level's success estimate against that of the
            // campaign kept when waiting is free (the same device without them), both costed on
            // the device with them.
            match dev
                .as_ref()
                .filter(|d| d.calibration.coherence_ns.is_some())
            {
                Some(d) => {
                    let mut free = d.clone();
                    free.calibration.coherence_ns = None;
                    let level = OptLevel::new(*levels.last().expect("a level")).expect("level");
                    let counted = measure(h, Some(&free), level, cat);
                    print!(
                        "{:>10.2e}{:>10.2e}{:>7}{:>6}",
                        success_on(&last.text, d),
                        success_on(&counted.text, d),
                        counted.two_qubit,
                        counted.depth2
                    );
                }
                None if coherence_run => print!("{:>10}{:>10}{:>7}{:>6}", "-", "-", "-", "-"),
                None => {}
            }
            println!();
            if let (Some(d), true) = (&dev, name.ends_with('~')) {
                let (hit, all) = edges_recovered(h, d);
                println!(
                    "{:<18}edges recovered (uncontrolled layout): {hit}/{all}",
                    ""
                );
            }
        }
    }
}
