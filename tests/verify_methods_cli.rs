//! `phasewright verify` with `--method tableau` and `--method statevector`, run as the real
//! binary: verdicts, exit statuses, positions in tampered files, the default choice of method
//! by width, and `--skip-exact`.

use assert_cmd::Command;
use std::path::Path;

fn phasewright() -> Command {
    Command::cargo_bin("phasewright").unwrap()
}

fn run_ok(args: &[&str]) -> String {
    let out = phasewright().args(args).output().unwrap();
    assert!(
        out.status.success(),
        "{args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout).unwrap()
}

/// Records `file`'s current SHA-256 in the plan, as if the edited file had been compiled so:
/// the checks below then meet the edit itself rather than the hash mismatch that `verify`
/// reports first for a file changed since compilation.
fn rehash(out: &Path, file: &str) {
    use sha2::Digest;
    let bytes = std::fs::read(out.join(file)).unwrap();
    let hex: String = sha2::Sha256::digest(&bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect();
    let plan_path = out.join("plan.json");
    let mut plan: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&plan_path).unwrap()).unwrap();
    for c in plan["circuits"].as_array_mut().unwrap() {
        if c["file"] == file {
            c["sha256"] = serde_json::Value::String(hex.clone());
        }
    }
    std::fs::write(&plan_path, serde_json::to_string_pretty(&plan).unwrap()).unwrap();
}

fn compile(ham: &str, state: &str, extra: &[&str], out: &Path) {
    let out_s = out.display().to_string();
    let mut args = vec![
        "compile", ham, "--state", state, "--dt", "0.2", "--points", "3", "-o", &out_s,
    ];
    args.extend_from_slice(extra);
    run_ok(&args);
}

#[test]
fn the_tableau_method_proves_a_campaign_and_says_it_computes_no_overlaps() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("ising");
    compile(
        "examples/ising_ring8.ham",
        "0+0+0+0+",
        &["--measure", "krylov"],
        &out,
    );
    let d = out.display().to_string();
    let text = run_ok(&["verify", &d, "--method", "tableau"]);
    assert!(text.contains("proved equivalent"), "{text}");
    assert!(text.contains("proves equivalence only"), "{text}");
    let v: serde_json::Value =
        serde_json::from_str(&run_ok(&["verify", &d, "--method", "tableau", "--json"])).unwrap();
    assert_eq!(v["method"], "tableau");
    assert_eq!(v["ok"], true);
    let circuits = v["circuits"].as_array().unwrap();
    assert!(!circuits.is_empty());
    assert!(circuits.iter().all(|c| c["verdict"] == "equivalent"));
}

#[test]
fn the_tableau_method_points_at_a_tampered_angle() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("mixed");
    compile("examples/mixed_field4.ham", "0+1r", &[], &out);
    let f = out.join("k02-re.qasm");
    let text = std::fs::read_to_string(&f).unwrap();
    let lines: Vec<&str> = text.lines().collect();
    // The rz nearest the middle of the file: negate its angle.
    let mid = lines.len() / 2;
    let at = (mid..lines.len())
        .find(|&i| lines[i].starts_with("rz("))
        .expect("an rz line");
    let bad: String = lines
        .iter()
        .enumerate()
        .map(|(i, l)| {
            if i == at {
                format!("rz(-{}\n", &l[3..])
            } else {
                format!("{l}\n")
            }
        })
        .collect();
    std::fs::write(&f, bad).unwrap();
    rehash(&out, "k02-re.qasm");
    let d = out.display().to_string();
    let r = phasewright()
        .args(["verify", &d, "--method", "tableau"])
        .output()
        .unwrap();
    assert_eq!(r.status.code(), Some(1));
    let err = String::from_utf8_lossy(&r.stderr);
    assert!(
        err.contains(&format!("k02-re.qasm:{}:1:", at + 1)),
        "expected line {}: {err}",
        at + 1
    );
    assert!(err.contains("angle"), "{err}");
    // The statevector method sees the same file as wrong.
    let r = phasewright()
        .args(["verify", &d, "--method", "statevector"])
        .output()
        .unwrap();
    assert_eq!(r.status.code(), Some(1));
}

#[test]
fn a_gate_after_a_measurement_is_bad_input_with_its_position() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("mixed");
    compile("examples/mixed_field4.ham", "0000", &[], &out);
    let f = out.join("k01-re.qasm");
    let mut text = std::fs::read_to_string(&f).unwrap();
    let n = text.lines().count();
    text.push_str("h q[4];\n");
    std::fs::write(&f, text).unwrap();
    rehash(&out, "k01-re.qasm");
    let r = phasewright()
        .args(["verify", &out.display().to_string(), "--method", "tableau"])
        .output()
        .unwrap();
    assert_eq!(r.status.code(), Some(2));
    let err = String::from_utf8_lossy(&r.stderr);
    assert!(err.contains(&format!("k01-re.qasm:{}:1:", n + 1)), "{err}");
}

#[test]
fn small_campaigns_default_to_simulation_and_can_skip_the_exact_evolution() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("mixed");
    compile("examples/mixed_field4.ham", "0+1r", &[], &out);
    let d = out.display().to_string();
    let text = run_ok(&["verify", &d]);
    assert!(text.contains("statevector simulation"), "{text}");
    let v: serde_json::Value =
        serde_json::from_str(&run_ok(&["verify", &d, "--skip-exact", "--json"])).unwrap();
    assert_eq!(v["method"], "statevector");
    assert_eq!(v["ok"], true);
    assert!(v["max_trotter_error"].is_null(), "{v}");
    assert!(v["circuits"][0]["reads"][0]["exact"].is_null(), "{v}");
    assert!(v["max_compile_error"].as_f64().unwrap() <= 1e-9);
    let text = run_ok(&["verify", &d, "--skip-exact"]);
    assert!(text.contains("skipped"), "{text}");
}

#[test]
fn wide_campaigns_default_to_the_tableau_method() {
    // 60 qubits: beyond the simulator (it refuses above 40), so `verify` proves by tableau.
    let dir = tempfile::tempdir().unwrap();
    let ham = dir.path().join("chain60.ham");
    std::fs::write(
        &ham,
        "# invented: a 60-site open chain in a transverse field\nqubits 60\n\
         sum i in 0..59 { -1.0 * Z{i} Z{i+1} }\nsum i in 0..60 { -0.6 * X{i} }\n",
    )
    .unwrap();
    let out = dir.path().join("chain");
    compile(
        &ham.display().to_string(),
        &"0".repeat(60),
        &["--steps", "2"],
        &out,
    );
    let text = run_ok(&["verify", &out.display().to_string()]);
    assert!(text.contains("tableau method"), "{text}");
    assert!(text.contains("4 of 4 circuits proved equivalent"), "{text}");
}

#[test]
fn a_sign_flip_campaign_on_an_rz_ry_heavy_hexagon_is_proved() {
    // The 3×4 transverse-field Ising model on the 127-qubit heavy hexagon (native rz, ry, cz),
    // controlled through a sign flip: commutation-aware cancellation removes the CNOTs between
    // fields and ladders, so one-qubit runs meet that hold rotations about different axes.
    // Lowering keeps such runs apart, so the tableau method (which reads rotations, not Euler
    // identities between axes) proves every file; with the runs fused it reported all four
    // as different at an `rz` whose angle had moved by 5e-4.
    let dir = tempfile::tempdir().unwrap();
    let ham = dir.path().join("ising3x4.ham");
    std::fs::write(
        &ham,
        "# an invented 3x4 transverse-field Ising model\nqubits 12\n\
         sum r in 0..3 { sum c in 0..3 { -1.0 * Z{4*r+c} Z{4*r+c+1} } }\n\
         sum r in 0..2 { sum c in 0..4 { -1.0 * Z{4*r+c} Z{4*r+c+4} } }\n\
         sum i in 0..12 { -1.0 * X{i} }\n",
    )
    .unwrap();
    let out = dir.path().join("flip");
    let out_s = out.display().to_string();
    run_ok(&[
        "compile",
        &ham.display().to_string(),
        "--state",
        "0+0+0+0+0+0+",
        "--dt",
        "0.1",
        "--points",
        "3",
        "--control",
        "evolution",
        "--device",
        "examples/hexchip127.dev",
        "-o",
        &out_s,
        "-q",
    ]);
    let plan: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("plan.json")).unwrap()).unwrap();
    assert!(
        plan["device"]["flip_string"].is_string(),
        "{}",
        plan["device"]
    );
    let text = run_ok(&["verify", &out_s, "--method", "tableau"]);
    assert!(text.contains("4 of 4 circuits proved equivalent"), "{text}");
}

#[test]
fn both_methods_prove_a_routed_campaign_whose_lowering_writes_eighth_turns() {
    // The Heisenberg chain from all-`+` states on the 8-qubit line: the lowering fuses a
    // state's basis change into `sx · rz(−3π/4) · sx`-shaped runs, whose eighth turns sit on
    // the boundary of the tableau method's angle split. Both methods must prove every
    // circuit (the tableau method once refused such campaigns that the statevector check
    // proved).
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("heis");
    compile(
        "examples/heisenberg_chain6.ham",
        "++++++",
        &["--device", "examples/line8.dev"],
        &out,
    );
    let d = out.display().to_string();
    let written: String = std::fs::read_dir(&out)
        .unwrap()
        .filter_map(|e| {
            let p = e.unwrap().path();
            (p.extension().is_some_and(|x| x == "qasm"))
                .then(|| std::fs::read_to_string(p).unwrap())
        })
        .collect();
    assert!(
        written.contains("rz(-2.356194490192345)"),
        "no eighth turn written"
    );
    for method in ["tableau", "statevector"] {
        let v: serde_json::Value =
            serde_json::from_str(&run_ok(&["verify", &d, "--method", method, "--json"])).unwrap();
        assert_eq!(v["ok"], true, "{method}: {v}");
        let circuits = v["circuits"].as_array().unwrap();
        assert_eq!(circuits.len(), 4, "{method}");
        if method == "tableau" {
            assert!(circuits.iter().all(|c| c["verdict"] == "equivalent"), "{v}");
        } else {
            assert!(
                circuits
                    .iter()
                    .all(|c| c["compile_error"].as_f64().unwrap() < 1e-9),
                "{v}"
            );
        }
    }
}
