//! Per-stage text fixtures for pass authors: every `tests/data/<stage>/NNNN_name.ham` is run
//! through one stage of the compiler and its output compared with `NNNN_name.expected` beside
//! it. A mismatch prints a line diff (`-` expected, `+` got); `BLESS=1 cargo test --release
//! --test stage_fixtures` rewrites the `.expected` files on purpose (review the diff in git).
//!
//! Stages (input: a `.ham` file; a line `# fixture: order=2 dt=0.25 points=2` sets the
//! parameters, these are the defaults):
//! * `formula`: the ordered terms expanded into one product-formula step, one rotation
//!   `θ P` (for `exp(-iθP)`) per line;
//! * `synth`: the same rotations synthesised into gates, written as OpenQASM 3; checked by
//!   `verify_ir` and by simulation against the rotation program to 1e-9 before comparing;
//! * `qasm`: the whole overlap campaign on the all-to-all target, the first circuit's file;
//!   checked by `check::check_plan` (compile error ≤ 1e-9) and `verify_ir` before comparing.
//!
//! The checks beside each comparison keep a blessed fixture from recording a wrong circuit:
//! the text pins the exact output, the simulation pins its meaning.

mod fixture_support;

use fixture_support::{blessing, line_diff};
use phasewright::check::{check_plan, COMPILE_TOLERANCE};
use phasewright::circuit::verify::{verify_ir, Rules};
use phasewright::circuit::Circuit;
use phasewright::family::{control::Control, Spec};
use phasewright::formula::{self, Order, Rotation};
use phasewright::hamiltonian::parse_hamiltonian;
use phasewright::pauli::PauliSum;
use phasewright::plan::Family;
use phasewright::{qasm, sim, synth};
use rand::SeedableRng;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// Parameters of one fixture, from its `# fixture:` line.
struct Params {
    order: Order,
    dt: f64,
    points: usize,
}

fn params(src: &str, file: &Path) -> Params {
    let mut p = Params {
        order: Order::Second,
        dt: 0.25,
        points: 2,
    };
    for line in src.lines() {
        let Some(rest) = line.trim().strip_prefix("# fixture:") else {
            continue;
        };
        for kv in rest.split_whitespace() {
            let (k, v) = kv
                .split_once('=')
                .unwrap_or_else(|| panic!("{}: `{kv}` is not key=value", file.display()));
            match k {
                "order" => {
                    p.order = match v {
                        "1" => Order::First,
                        "2" => Order::Second,
                        "4" => Order::Fourth,
                        _ => panic!("{}: order is 1, 2 or 4", file.display()),
                    }
                }
                "dt" => p.dt = v.parse().expect("dt is a number"),
                "points" => p.points = v.parse().expect("points is an integer"),
                _ => panic!("{}: unknown fixture key `{k}`", file.display()),
            }
        }
    }
    p
}

fn read(src: &str, file: &Path) -> PauliSum {
    parse_hamiltonian(&file.display().to_string(), src)
        .unwrap_or_else(|d| panic!("{}", d[0]))
        .sum
}

fn rotations(h: &PauliSum, p: &Params) -> Vec<Rotation> {
    formula::step(&formula::order_terms(h), p.order, p.dt)
}

fn run_formula(src: &str, file: &Path) -> String {
    let p = params(src, file);
    let mut out = String::new();
    for r in rotations(&read(src, file), &p) {
        writeln!(
            out,
            "{} {}",
            qasm::fmt_angle(r.theta),
            r.pauli.to_factor_text()
        )
        .unwrap();
    }
    out
}

fn run_synth(src: &str, file: &Path) -> String {
    let p = params(src, file);
    let h = read(src, file);
    let program = rotations(&h, &p);
    let mut c = Circuit::new(h.num_qubits, 0);
    for r in &program {
        for g in synth::pauli_rotation(r, None) {
            c.push(g);
        }
    }
    verify_ir(&c, &Rules::default()).unwrap_or_else(|e| panic!("{}: {e:?}", file.display()));
    // Exact, global phase included: the gates and the rotations act alike on a random state.
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
    let init = sim::State::random(h.num_qubits, &mut rng);
    let mut ideal = init.clone();
    formula::apply_program(&mut ideal, &program);
    let got = sim::run(&c, init);
    let dist = ideal
        .amps
        .iter()
        .zip(&got.amps)
        .map(|(a, b)| (a - b).norm_sqr())
        .sum::<f64>()
        .sqrt();
    assert!(
        dist <= 1e-9,
        "{}: synthesised gates off by {dist:e}",
        file.display()
    );
    qasm::write(&c, qasm::Addressing::Logical, &[])
}

fn run_qasm(src: &str, file: &Path) -> String {
    let p = params(src, file);
    let h = read(src, file);
    let spec = Spec {
        family: Family::Overlap,
        order: p.order,
        dt: p.dt,
        points: p.points,
        steps_per_dt: 1,
        states: vec!["0".repeat(h.num_qubits)],
        control: Control::Evolution,
    };
    let name = file.file_name().unwrap().to_string_lossy().into_owned();
    let compiled = phasewright::pipeline::compile(&h, &name, &spec).unwrap();
    let circuits = compiled.circuits();
    for c in &circuits {
        verify_ir(c, &Rules::default()).unwrap_or_else(|e| panic!("{}: {e:?}", file.display()));
    }
    let checks = check_plan(&compiled.plan, &circuits).unwrap();
    assert!(
        checks.iter().all(|c| c.compile_error <= COMPILE_TOLERANCE),
        "{}: a circuit differs from its ideal",
        file.display()
    );
    compiled.programs[0].clone()
}

/// Runs `stage` on every input of `tests/data/<stage>/`; all mismatches are reported together.
fn check_stage(stage: &str, run: fn(&str, &Path) -> String) {
    let dir = Path::new("tests/data").join(stage);
    let bless = blessing();
    let mut inputs: Vec<PathBuf> = std::fs::read_dir(&dir)
        .unwrap_or_else(|e| panic!("{}: {e}", dir.display()))
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|x| x == "ham"))
        .collect();
    inputs.sort();
    assert!(!inputs.is_empty(), "{} holds no fixtures", dir.display());
    let mut failures = Vec::new();
    for input in &inputs {
        let src = std::fs::read_to_string(input).unwrap();
        let got = run(&src, input);
        let expected = input.with_extension("expected");
        if bless {
            std::fs::write(&expected, &got).unwrap();
            continue;
        }
        match std::fs::read_to_string(&expected) {
            Ok(want) if want == got => {}
            Ok(want) => failures.push(format!(
                "{} differs from {}:\n{}",
                input.display(),
                expected.display(),
                line_diff(&want, &got)
            )),
            Err(_) => failures.push(format!("{} is missing", expected.display())),
        }
    }
    assert!(
        failures.is_empty(),
        "{}\nreview the change, then re-bless with BLESS=1 cargo test --release --test stage_fixtures",
        failures.join("\n")
    );
}

#[test]
fn formula_stage_fixtures() {
    check_stage("formula", run_formula);
}

#[test]
fn synth_stage_fixtures() {
    check_stage("synth", run_synth);
}

#[test]
fn qasm_stage_fixtures() {
    check_stage("qasm", run_qasm);
}

#[test]
fn the_line_diff_marks_removed_and_added_lines() {
    let d = line_diff("a\nb\nc\n", "a\nx\nc\nd\n");
    assert_eq!(d, " a\n-b\n+x\n c\n+d\n");
    let long_want: String = (0..20).map(|i| format!("{i}\n")).collect();
    let long_got = long_want.replace("10\n", "ten\n");
    let d = line_diff(&long_want, &long_got);
    assert!(
        d.starts_with("@@ 7 equal lines @@\n 7\n 8\n 9\n-10\n+ten\n 11\n"),
        "{d}"
    );
    assert!(d.ends_with("@@ 6 equal lines @@\n"), "{d}");
}
