//! Noise rehearsal of H2 (STO-3G, R = 1.4 bohr, tests/data) on an invented low-error device:
//! with `--undo-loss` the final answer lies within 2 mHa of the full-CI energy; without it the
//! depolarised overlaps shrink, the unitary pencil keeps no Ritz value near the unit circle, and
//! `estimate` says that it has no final answer instead of printing a biased one.
//!
//! Reference: the exact ground energy by dense diagonalisation (reported by `estimate`), equal to
//! the full-CI value −1.1373 Ha of Szabo & Ostlund (1989) to the book's four decimals
//! (tests/fermion_h2.rs); the 2 mHa target is the issue's.

use assert_cmd::Command;

fn run(args: &[&str]) -> (String, String) {
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
    (
        String::from_utf8(out.stdout).unwrap(),
        String::from_utf8(out.stderr).unwrap(),
    )
}

#[test]
fn h2_noise_rehearsal_with_undo_loss_is_within_two_millihartree() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path().join("h2").display().to_string();
    run(&[
        "compile",
        "tests/data/h2_sto3g_r1.4.fcidump",
        "--encoding",
        "jw",
        "--state",
        "auto",
        "--dt",
        "0.8",
        "--points",
        "20",
        "--steps",
        "2",
        "--device",
        "tests/data/low6.dev",
        "-o",
        &d,
    ]);
    for seed in ["1", "2", "3"] {
        let counts = tmp
            .path()
            .join(format!("c{seed}.json"))
            .display()
            .to_string();
        run(&[
            "rehearse", &d, "--shots", "1000000", "--seed", seed, "--noise", "-o", &counts,
        ]);
        let (e, _) = run(&["estimate", &d, "--counts", &counts, "--undo-loss", "--json"]);
        let e: serde_json::Value = serde_json::from_str(&e).unwrap();
        let err = e["answer"]["energy"].as_f64().unwrap() - e["exact"].as_f64().unwrap();
        eprintln!("seed {seed}: undo-loss error {err:.2e}");
        assert!(err.abs() <= 2e-3, "seed {seed}: {err}");
        // Without the correction the damped overlaps either give no answer, or one whose
        // systematic bar dominates (and says so) and whose 2σ interval still holds the exact
        // energy: the Ritz values of these overlaps sit at |λ| ≈ 0.90, at the admission
        // threshold `MIN_UNITARY_MODULUS`, so which of the two happens depends on the gates.
        let (raw, warn) = run(&["estimate", &d, "--counts", &counts, "--json"]);
        let raw: serde_json::Value = serde_json::from_str(&raw).unwrap();
        if raw["answer"].is_null() {
            assert!(warn.contains("no final answer"), "{warn}");
        } else {
            let a = &raw["answer"];
            let err = a["energy"].as_f64().unwrap() - raw["exact"].as_f64().unwrap();
            let total = a["sigma_total"].as_f64().unwrap();
            assert!(
                err.abs() <= 2.0 * total,
                "seed {seed}: {err} against {total}"
            );
            assert!(
                a["sigma_sys"].as_f64().unwrap() > a["sigma_stat"].as_f64().unwrap(),
                "{a}"
            );
            assert!(warn.contains("more shots will not make"), "{warn}");
        }
    }
}
