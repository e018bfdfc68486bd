//! `phasewright estimate` end to end on small fixture campaigns in tests/data/estimate/.
//!
//! Each fixture folder is laid out exactly as `phasewright compile` writes a campaign: plan.json
//! and the `.qasm` files compiled from the `.ham` file beside it, plus
//! counts.json sampled from the ideal campaign of tests/estimate_support (exact evolution,
//! seeded multinomial shots) under the compiled ids and bit layout. They are regenerated on
//! purpose with `BLESS=1 cargo test --release --test estimate_cli fixtures_are_current`, never
//! by hand; `fixtures_are_current` fails when code and files disagree, with a line diff of each
//! stale file (`-` on disk, `+` built). tests/data/estimate/README.md gives the compile lines.

mod estimate_support;
mod fixture_support;

use assert_cmd::Command;
use estimate_support::*;
use fixture_support::{blessing, line_diff};
use phasewright::estimate::counts;
use std::path::{Path, PathBuf};

fn data_dir(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/data/estimate")
        .join(name)
}

/// One estimate fixture: the `.ham` file beside it, the `compile` options that make its plan,
/// the synthetic campaign (same Hamiltonian, states, family, formula settings) whose ideal
/// outcome distributions are sampled.
struct Spec {
    name: &'static str,
    ham: &'static str,
    h: phasewright::pauli::PauliSum,
    kind: Kind,
    dt: f64,
    points: usize,
    /// `--state` for overlap and Krylov; `None` for trace (`--samples` random states).
    state: Option<&'static str>,
    samples: usize,
    shots: u64,
    seed: u64,
}

fn specs() -> Vec<Spec> {
    vec![
        Spec {
            name: "krylov_tfim3",
            ham: "tfim3.ham",
            h: tfim(3, 1.0, 0.7, 0.2),
            kind: Kind::Krylov,
            dt: 0.35,
            points: 5,
            state: Some("+++"),
            samples: 0,
            shots: 20_000,
            seed: 7,
        },
        Spec {
            name: "overlap_heis4",
            ham: "heis4.ham",
            h: heisenberg(4, 1.0, -0.4),
            kind: Kind::Overlap,
            dt: 0.2,
            points: 6,
            state: Some("0101"),
            samples: 0,
            shots: 20_000,
            seed: 8,
        },
        Spec {
            name: "trace_tfim3",
            ham: "tfim3.ham",
            h: tfim(3, 1.0, 0.6, 0.25),
            kind: Kind::Trace,
            dt: 0.3,
            points: 16,
            state: None,
            samples: 6,
            shots: 4_000,
            seed: 9,
        },
    ]
}

/// The exact `phasewright compile` arguments of a fixture, run inside its folder (so plan.json
/// records the `.ham` file by its bare name); tests/data/estimate/README.md repeats them.
fn compile_args(s: &Spec, out: &Path) -> Vec<String> {
    let measure = match s.kind {
        Kind::Krylov => "krylov",
        Kind::Overlap => "overlap",
        Kind::Trace => "trace",
    };
    let mut a: Vec<String> = vec![
        "compile".into(),
        s.ham.into(),
        "--measure".into(),
        measure.into(),
        "--dt".into(),
        s.dt.to_string(),
        "--points".into(),
        s.points.to_string(),
        "--order".into(),
        "2".into(),
        "--steps".into(),
        "1".into(),
        "--control".into(),
        "evolution".into(),
    ];
    match s.state {
        Some(st) => a.extend(["--state".into(), st.into()]),
        None => a.extend(["--samples".into(), s.samples.to_string()]),
    }
    a.extend(["-q".into(), "-o".into(), out.display().to_string()]);
    a
}

/// (folder, [(file name, text)]) for every fixture: plan.json and the `.qasm` files exactly as
/// `phasewright compile` writes them for the `.ham` file in the folder, and counts.json sampled
/// from the ideal campaign of tests/estimate_support, its bits laid out as the compiled
/// circuits' reads say (ancilla and system qubits moved to the compiled bits, unmeasured
/// qubits marginalised away) under the compiled ids.
fn fixtures() -> Vec<(&'static str, Vec<(String, String)>)> {
    specs()
        .into_iter()
        .map(|s| {
            let tmp = tempfile::tempdir().unwrap();
            let out = tmp.path().join("campaign");
            let run = Command::cargo_bin("phasewright")
                .unwrap()
                .current_dir(data_dir(s.name))
                .args(compile_args(&s, &out))
                .output()
                .unwrap();
            assert!(
                run.status.success(),
                "{}: compile failed: {}",
                s.name,
                String::from_utf8_lossy(&run.stderr)
            );
            let plan_text = std::fs::read_to_string(out.join("plan.json")).unwrap();
            let plan = phasewright::plan::Plan::from_json(&plan_text).unwrap();
            // The .ham file in the folder and the model the counts are drawn from agree.
            let terms: Vec<(String, f64)> =
                s.h.term_list()
                    .iter()
                    .map(|(p, c)| (p.to_factor_text(), *c))
                    .collect();
            let compiled: Vec<(String, f64)> = plan
                .hamiltonian
                .terms
                .iter()
                .map(|t| (t.pauli.clone(), t.coeff))
                .collect();
            assert_eq!(terms, compiled, "{}: terms", s.name);
            assert_eq!(plan.hamiltonian.constant, s.h.constant, "{}", s.name);
            let states: Vec<&str> = plan.states.iter().map(|x| x.as_str()).collect();
            let camp = campaign(&s.h, &states, s.kind, s.dt, s.points);
            let sampled = camp.sample(s.shots, s.seed);
            let n = s.h.num_qubits;
            let mut ids = Vec::new();
            let mut circuits = Vec::new();
            for (syn, counts) in camp.circuits.iter().zip(&sampled.circuits) {
                let e = &syn.entry;
                let c = plan
                    .circuits
                    .iter()
                    .find(|c| (c.k, c.part, c.state, c.group) == (e.k, e.part, e.state, e.group))
                    .unwrap_or_else(|| panic!("{}: no compiled circuit for {}", s.name, e.id));
                // Synthetic bit b (qubit b, or the ancilla for b = n) to the compiled bit:
                // the ancilla to `ancilla_bit`, system qubit q to bit q + 1 (family::hadamard_test),
                // dropped when the compiled circuit does not measure it.
                let anc = c.ancilla_bit.unwrap() as usize;
                let to = |b: usize| {
                    let nb = if b == n { anc } else { b + 1 };
                    (nb < c.num_clbits).then_some(nb)
                };
                for r in &c.reads {
                    let twin = e.reads.iter().find(|x| x.target == r.target).unwrap();
                    let mut mapped: Vec<u32> = twin
                        .bits
                        .iter()
                        .map(|&b| to(b as usize).expect("a read bit is measured") as u32)
                        .collect();
                    mapped.sort();
                    let mut got = r.bits.clone();
                    got.sort();
                    assert_eq!(mapped, got, "{}: {} reads {:?}", s.name, c.id, r.target);
                }
                assert_eq!(c.reads.len(), e.reads.len(), "{}: {}", s.name, c.id);
                let mut outcomes = std::collections::BTreeMap::new();
                for &(mask, shots) in &counts.outcomes {
                    let moved = (0..=n)
                        .filter(|&b| (mask >> b) & 1 == 1)
                        .filter_map(to)
                        .fold(0u128, |m, nb| m | (1 << nb));
                    *outcomes.entry(moved).or_insert(0u64) += shots;
                }
                ids.push(c.id.clone());
                circuits.push(counts::CircuitCounts {
                    num_bits: c.num_clbits,
                    outcomes: outcomes.into_iter().collect(),
                });
            }
            assert_eq!(ids.len(), plan.circuits.len(), "{}", s.name);
            let id_refs: Vec<&str> = ids.iter().map(|x| x.as_str()).collect();
            let mut files = vec![
                ("plan.json".to_string(), plan_text),
                (
                    "counts.json".to_string(),
                    counts::to_json(&id_refs, &circuits, Some(s.shots)),
                ),
            ];
            for c in &plan.circuits {
                files.push((
                    c.file.clone(),
                    std::fs::read_to_string(out.join(&c.file)).unwrap(),
                ));
            }
            (s.name, files)
        })
        .collect()
}

#[test]
fn fixtures_are_current() {
    let bless = blessing();
    let mut stale = Vec::new();
    for (name, files) in fixtures() {
        let dir = data_dir(name);
        let mut on_disk_qasm: Vec<String> = std::fs::read_dir(&dir)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .filter(|f| f.ends_with(".qasm"))
            .collect();
        on_disk_qasm.sort();
        let mut built_qasm: Vec<String> = files
            .iter()
            .map(|(f, _)| f.clone())
            .filter(|f| f.ends_with(".qasm"))
            .collect();
        built_qasm.sort();
        if bless {
            for f in &on_disk_qasm {
                std::fs::remove_file(dir.join(f)).unwrap();
            }
            for (file, text) in &files {
                std::fs::write(dir.join(file), text).unwrap();
            }
        } else if on_disk_qasm != built_qasm {
            stale.push(format!(
                "{name}: .qasm files on disk {on_disk_qasm:?}, compile writes {built_qasm:?}"
            ));
        }
        for (file, built) in &files {
            let on_disk = std::fs::read_to_string(dir.join(file)).unwrap_or_default();
            if on_disk != *built {
                stale.push(format!(
                    "{name}/{file} is stale:\n{}",
                    line_diff(&on_disk, built)
                ));
            }
        }
    }
    assert!(
        stale.is_empty(),
        "{}\nreview the change, then rerun with BLESS=1",
        stale.join("\n")
    );
}

fn estimate(dir: &str, extra: &[&str]) -> assert_cmd::assert::Assert {
    let d = data_dir(dir);
    Command::cargo_bin("phasewright")
        .unwrap()
        .arg("estimate")
        .arg(&d)
        .arg("--counts")
        .arg(d.join("counts.json"))
        .args(extra)
        .assert()
}

fn json_of(dir: &str, extra: &[&str]) -> serde_json::Value {
    let mut args = vec!["--json"];
    args.extend_from_slice(extra);
    let out = estimate(dir, &args).success().get_output().stdout.clone();
    serde_json::from_slice(&out).expect("--json prints JSON")
}

#[test]
fn krylov_table_lists_every_dimension_beside_the_pencil_and_the_exact_value() {
    let out = estimate("krylov_tfim3", &["--bootstrap", "50"]).success();
    let text = String::from_utf8(out.get_output().stdout.clone()).unwrap();
    assert!(text.contains("krylov plan: K = 5 time points"), "{text}");
    for d in 1..=5 {
        assert!(
            text.lines()
                .any(|l| l.trim_start().starts_with(&format!("{d}  "))),
            "row {d} missing:\n{text}"
        );
    }
    assert!(text.contains("exact ground energy"));
    assert!(text.contains("Hua & Sarkar 1990"));
    assert!(text.contains("validate against trusted methods"));
}

#[test]
fn krylov_json_is_close_to_the_exact_ground_energy() {
    let v = json_of("krylov_tfim3", &["--bootstrap", "100"]);
    assert_eq!(v["format"], "phasewright-estimate/1");
    assert_eq!(v["family"], "krylov");
    let rows = v["energies"].as_array().unwrap();
    assert_eq!(rows.len(), 5);
    let exact = v["exact"].as_f64().unwrap();
    // Reference: dense diagonalisation of H = −Σ ZZ − 0.7 Σ X + 0.2 on 3 sites.
    let want = ground_energy(&tfim(3, 1.0, 0.7, 0.2));
    assert!((exact - want).abs() < 1e-12);
    let last = &rows[4];
    let e = last["krylov"].as_f64().unwrap();
    let se = last["krylov_std_error"].as_f64().unwrap();
    // 20000 shots: the estimate lies within 4 bootstrap σ plus the noiseless Krylov bias
    // (≤ 1e-2 at K = 5 for this chain, from the exact series at the same threshold).
    assert!(se > 0.0 && se < 0.05, "σ = {se}");
    assert!((e - want).abs() < 4.0 * se + 1e-2, "{e} vs {want} ± {se}");
}

#[test]
fn bit_order_last_reads_reversed_bitstrings_identically() {
    let d = data_dir("krylov_tfim3");
    let text = std::fs::read_to_string(d.join("counts.json")).unwrap();
    let mut v: serde_json::Value = serde_json::from_str(&text).unwrap();
    let counts = v["counts"].as_object_mut().unwrap();
    for (_, per) in counts.iter_mut() {
        let m = per.as_object().unwrap().clone();
        let rev: serde_json::Map<String, serde_json::Value> = m
            .into_iter()
            .map(|(k, n)| (k.chars().rev().collect(), n))
            .collect();
        *per = serde_json::Value::Object(rev);
    }
    v.as_object_mut().unwrap().remove("bit_order");
    let tmp = tempfile::tempdir().unwrap();
    let rev_path = tmp.path().join("reversed.json");
    std::fs::write(&rev_path, serde_json::to_string(&v).unwrap()).unwrap();
    let run = |counts: &Path, extra: &[&str]| {
        let out = Command::cargo_bin("phasewright")
            .unwrap()
            .arg("estimate")
            .arg(&d)
            .arg("--counts")
            .arg(counts)
            .args(["--json", "--bootstrap", "20"])
            .args(extra)
            .assert()
            .success()
            .get_output()
            .stdout
            .clone();
        let mut j: serde_json::Value = serde_json::from_slice(&out).unwrap();
        j.as_object_mut().unwrap().remove("bit_order");
        j
    };
    let a = run(&d.join("counts.json"), &[]);
    let b = run(&rev_path, &["--bit-order", "last"]);
    assert_eq!(a, b);
    // Read with the wrong convention, the answer changes (the flag is not ignored).
    let c = run(&rev_path, &[]);
    assert_ne!(a, c);
}

#[test]
fn plot_writes_an_svg_with_energies_and_exact_line() {
    let tmp = tempfile::tempdir().unwrap();
    let svg = tmp.path().join("e.svg");
    estimate(
        "krylov_tfim3",
        &["--bootstrap", "20", "--plot", svg.to_str().unwrap()],
    )
    .success();
    let text = std::fs::read_to_string(&svg).unwrap();
    assert!(text.starts_with("<svg"), "{}", &text[..60.min(text.len())]);
    assert!(text.contains("Krylov dimension"));
    assert!(text.contains("exact"));
    assert!(text.contains("matrix pencil"));
}

#[test]
fn overlap_plan_uses_the_overlap_only_krylov_variant() {
    let v = json_of("overlap_heis4", &["--bootstrap", "30", "--exact", "-6.0"]);
    assert_eq!(v["krylov_method"], "toeplitz-sine-s");
    let rows = v["energies"].as_array().unwrap();
    assert_eq!(rows.len(), 6);
    assert!(rows[5]["krylov"].is_null(), "d = K needs S_K");
    assert!(rows[4]["krylov"].is_f64());
    assert_eq!(v["exact"].as_f64(), Some(-6.0));
    assert_eq!(v["exact_source"], "--exact");
}

#[test]
fn trace_plan_prints_the_dos_with_resolution_and_quadrature() {
    let tmp = tempfile::tempdir().unwrap();
    let svg = tmp.path().join("dos.svg");
    let out = estimate("trace_tfim3", &["--plot", svg.to_str().unwrap()]).success();
    let text = String::from_utf8(out.get_output().stdout.clone()).unwrap();
    assert!(text.contains("resolution limit π/(K·dt)"), "{text}");
    assert!(text.contains("quadrature: rectangle rule"));
    assert!(text.contains("spread over the random states"));
    let svg_text = std::fs::read_to_string(&svg).unwrap();
    assert!(svg_text.contains("Density of states"));
    let v = json_of("trace_tfim3", &["--sigma", "0.5"]);
    assert_eq!(v["sigma"].as_f64(), Some(0.5));
    let dos = v["dos"].as_array().unwrap();
    assert_eq!(dos.len(), phasewright::estimate::DEFAULT_DOS_POINTS);
    // Within the band plus the quadrature bound at most energies (random states: 6 only, so
    // the band itself is a rough estimate; require 80%).
    let inside = dos
        .iter()
        .filter(|p| {
            let (r, se, b, ex) = (
                p["density"].as_f64().unwrap(),
                p["std_error"].as_f64().unwrap(),
                p["quadrature_bound"].as_f64().unwrap(),
                p["exact"].as_f64().unwrap(),
            );
            (r - ex).abs() <= 2.0 * se + b
        })
        .count();
    assert!(
        inside as f64 >= 0.8 * dos.len() as f64,
        "{inside}/{}",
        dos.len()
    );
}

fn run_with_counts(dir: &str, counts_text: &str) -> (i32, String) {
    let tmp = tempfile::tempdir().unwrap();
    let p = tmp.path().join("counts.json");
    std::fs::write(&p, counts_text).unwrap();
    let out = Command::cargo_bin("phasewright")
        .unwrap()
        .arg("estimate")
        .arg(data_dir(dir))
        .arg("--counts")
        .arg(&p)
        .output()
        .unwrap();
    (
        out.status.code().unwrap(),
        String::from_utf8(out.stderr).unwrap(),
    )
}

#[test]
fn bad_counts_exit_2_with_a_diagnostic_naming_the_circuit() {
    let good = std::fs::read_to_string(data_dir("overlap_heis4").join("counts.json")).unwrap();
    // Unknown circuit id.
    let bad = good.replacen("\"k01-im\"", "\"k01-imag\"", 1);
    let (code, err) = run_with_counts("overlap_heis4", &bad);
    assert_eq!(code, 2);
    assert!(err.contains("unknown circuit `k01-imag`"), "{err}");
    assert!(err.contains("counts.json:"), "position missing: {err}");
    assert!(err.contains("has no counts: `k01-im`"), "{err}");
    // The first bitstring of the first circuit (ids and bitstrings are written sorted).
    let v: serde_json::Value = serde_json::from_str(&good).unwrap();
    let (first_id, first) = v["counts"].as_object().unwrap().iter().next().unwrap();
    let key = first.as_object().unwrap().keys().next().unwrap().clone();
    let pat = format!("\"{key}\": ");
    // Wrong length (one bit too many: compile measures only the ancilla of an overlap circuit).
    let bad = good.replacen(&pat, &format!("\"{key}0\": "), 1);
    let (code, err) = run_with_counts("overlap_heis4", &bad);
    assert_eq!(code, 2);
    assert!(err.contains("has 2 bits, expected 1"), "{err}");
    assert!(err.contains(&format!("circuit `{first_id}`")), "{err}");
    assert!(err.contains('^'), "caret missing: {err}");
    // Non-JSON.
    let (code, err) = run_with_counts("overlap_heis4", "{\"format\": ");
    assert_eq!(code, 2);
    assert!(err.contains("not valid JSON"), "{err}");
    // Zero count.
    let bad = good.replacen(&pat, &format!("{pat}0, \"{key}x\": "), 1);
    let (code, err) = run_with_counts("overlap_heis4", &bad);
    assert_eq!(code, 2);
    assert!(err.contains("a zero count"), "{err}");
    assert!(err.contains("contains `x`"), "{err}");
}

#[test]
fn help_states_the_bit_order_an_example_and_the_caution() {
    let out = Command::cargo_bin("phasewright")
        .unwrap()
        .args(["estimate", "--help"])
        .assert()
        .success();
    let text = String::from_utf8(out.get_output().stdout.clone()).unwrap();
    assert!(text.contains("phasewright estimate campaign/ --counts counts.json"));
    assert!(text.contains("classical bit 0"));
    assert!(text.contains("validate against"));
}
