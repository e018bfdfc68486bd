//! Noiseless rehearsal end to end through the real binary: compile → rehearse (10⁶ shots per
//! circuit) → estimate, on an invented 8-site transverse-field Ising chain and a 6-site
//! Heisenberg chain. The Krylov energy at K = 10 must agree with the exact ground energy
//! (dense diagonalisation, reported by `estimate`) within 1.6e-3 in the model's units — the
//! "chemical accuracy" of 1 kcal/mol ≈ 1.6 mHa, a tolerance taken from common practice — and
//! within 3 reported standard errors.
//!
//! Settings: fourth-order formula with 2 steps per dt (Trotter error of the energy ≲ 1e-4 here,
//! checked by `verify`), K = 10 points. References: |+⟩⁸ for the paramagnetic Ising chain (the
//! ground state of the field term), and three singlet pairs for the Heisenberg chain (the dimer
//! state, close to its ground state). Shot noise makes single runs scatter: each seed must be
//! within 3σ, and the median error over the seeds must be within 1.6e-3.

use assert_cmd::Command;

fn run(args: &[&str]) -> String {
    let out = Command::cargo_bin("phasewright")
        .unwrap()
        .args(args)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout).unwrap()
}

fn krylov_errors(ham: &str, state: &str, dt: &str) -> Vec<(f64, f64)> {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("c");
    let d = dir.display().to_string();
    run(&[
        "compile",
        ham,
        "--state",
        state,
        "--dt",
        dt,
        "--points",
        "10",
        "--order",
        "4",
        "--steps",
        "2",
        "--measure",
        "krylov",
        "-o",
        &d,
    ]);
    let v: serde_json::Value = serde_json::from_str(&run(&["verify", "--json", &d])).unwrap();
    assert_eq!(v["ok"], true);
    let mut out = Vec::new();
    for seed in ["1", "2", "3"] {
        let counts = dir.join(format!("counts{seed}.json")).display().to_string();
        run(&[
            "rehearse", &d, "--shots", "1000000", "--seed", seed, "-o", &counts,
        ]);
        let e: serde_json::Value =
            serde_json::from_str(&run(&["estimate", &d, "--counts", &counts, "--json"])).unwrap();
        let exact = e["exact"].as_f64().expect("small plans are diagonalised");
        let last = e["energies"].as_array().unwrap().last().unwrap().clone();
        assert_eq!(last["dimension"], 10);
        let err = last["krylov"].as_f64().unwrap() - exact;
        let sigma = last["krylov_std_error"].as_f64().unwrap();
        eprintln!("{ham} seed {seed}: error {err:.2e}, reported σ {sigma:.2e}");
        out.push((err, sigma));
    }
    out
}

fn check(results: &[(f64, f64)]) {
    for &(err, sigma) in results {
        assert!(
            err.abs() <= 3.0 * sigma,
            "error {err} outside 3 reported standard errors ({sigma})"
        );
    }
    let mut abs: Vec<f64> = results.iter().map(|r| r.0.abs()).collect();
    abs.sort_by(|a, b| a.total_cmp(b));
    assert!(
        abs[abs.len() / 2] <= 1.6e-3,
        "median error {} above 1.6e-3: {results:?}",
        abs[abs.len() / 2]
    );
}

#[test]
fn ising_chain_ground_energy_from_a_rehearsed_campaign() {
    check(&krylov_errors(
        "examples/tfim_chain8.ham",
        "++++++++",
        "0.2",
    ));
}

#[test]
fn heisenberg_chain_ground_energy_from_a_rehearsed_campaign() {
    check(&krylov_errors(
        "examples/heisenberg_chain6.ham",
        "ssssss",
        "0.3",
    ));
}
