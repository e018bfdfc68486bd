//! `phasewright estimate` refuses or warns, never prints a silent number: the one-norm bound
//! on energies, positivity of the Gram matrix S, counts written in the other bit order,
//! counts from another plan. Drives the real binary on the fixtures of tests/data/estimate/
//! (ideal campaigns, see tests/estimate_cli.rs).
//!
//! Bounds checked (sources beside each test):
//! - `|E − c| ≤ Σ|c_j|` for every eigenvalue of `H = c + Σ c_j P_j` (triangle inequality with
//!   `‖P_j‖ = 1`);
//! - `S_{jk} = ⟨ψ|U^{k−j}|ψ⟩` is a Gram matrix, hence positive semidefinite, and entry errors
//!   move its eigenvalues by at most their spectral norm (Weyl's inequality, H. Weyl, Math.
//!   Ann. 71, 441 (1912); from memory).

use assert_cmd::Command;
use std::path::{Path, PathBuf};

fn data_dir(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/data/estimate")
        .join(name)
}

/// (exit status, stdout, stderr) of `estimate DIR --counts FILE extra…`.
fn estimate(dir: &Path, counts: &Path, extra: &[&str]) -> (i32, String, String) {
    let out = Command::cargo_bin("phasewright")
        .unwrap()
        .arg("estimate")
        .arg(dir)
        .arg("--counts")
        .arg(counts)
        .args(["--bootstrap", "10"])
        .args(extra)
        .output()
        .unwrap();
    (
        out.status.code().unwrap(),
        String::from_utf8(out.stdout).unwrap(),
        String::from_utf8(out.stderr).unwrap(),
    )
}

/// The fixture's counts with every bitstring reversed and no `bit_order` key: what a device
/// that prints classical bit 0 rightmost would return for the same shots.
fn reversed_counts(name: &str, tmp: &Path) -> PathBuf {
    let text = std::fs::read_to_string(data_dir(name).join("counts.json")).unwrap();
    let mut v: serde_json::Value = serde_json::from_str(&text).unwrap();
    for (_, per) in v["counts"].as_object_mut().unwrap().iter_mut() {
        let rev: serde_json::Map<String, serde_json::Value> = per
            .as_object()
            .unwrap()
            .iter()
            .map(|(k, n)| (k.chars().rev().collect(), n.clone()))
            .collect();
        *per = serde_json::Value::Object(rev);
    }
    v.as_object_mut().unwrap().remove("bit_order");
    let p = tmp.join(format!("{name}-reversed.json"));
    std::fs::write(&p, serde_json::to_string(&v).unwrap()).unwrap();
    p
}

/// The fixture's counts of an overlap plan (one bit per circuit, the ancilla) with every outcome
/// flipped: `S_k → −S_k` for `k ≥ 1`, so the Toeplitz Gram matrix becomes `2I − S`, which has a
/// negative eigenvalue as soon as the largest eigenvalue of `S` exceeds 2 (a reference state
/// near one eigenstate gives `S` close to rank one, largest eigenvalue near its dimension).
fn flipped_ancilla_counts(name: &str, tmp: &Path) -> PathBuf {
    let text = std::fs::read_to_string(data_dir(name).join("counts.json")).unwrap();
    let mut v: serde_json::Value = serde_json::from_str(&text).unwrap();
    for (_, per) in v["counts"].as_object_mut().unwrap().iter_mut() {
        let flipped: serde_json::Map<String, serde_json::Value> = per
            .as_object()
            .unwrap()
            .iter()
            .map(|(k, n)| {
                assert_eq!(k.len(), 1, "one bit per circuit");
                (if k == "0" { "1" } else { "0" }.to_string(), n.clone())
            })
            .collect();
        *per = serde_json::Value::Object(flipped);
    }
    let p = tmp.join(format!("{name}-flipped.json"));
    std::fs::write(&p, serde_json::to_string(&v).unwrap()).unwrap();
    p
}

/// `[c − Σ|c_j|, c + Σ|c_j|]` recomputed here from the plan's term list (not from the
/// `one_norm` field the binary uses).
fn one_norm_bound(name: &str) -> (f64, f64) {
    let plan: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(data_dir(name).join("plan.json")).unwrap())
            .unwrap();
    let h = &plan["hamiltonian"];
    let c = h["constant"].as_f64().unwrap();
    let n: f64 = h["terms"]
        .as_array()
        .unwrap()
        .iter()
        .map(|t| t["coeff"].as_f64().unwrap().abs())
        .sum();
    (c - n, c + n)
}

#[test]
fn reversed_bitstrings_trigger_the_bit_order_warning_and_correct_ones_do_not() {
    let tmp = tempfile::tempdir().unwrap();
    // The correct counts of every fixture raise no bit-order warning.
    for name in ["krylov_tfim3", "overlap_heis4", "trace_tfim3"] {
        let d = data_dir(name);
        let (code, _, err) = estimate(&d, &d.join("counts.json"), &[]);
        assert_eq!(code, 0, "{name}: {err}");
        assert!(!err.contains("bit order"), "{name}, correct counts: {err}");
    }
    // Reversed: only krylov_tfim3 has more than one bit per circuit (compile measures only the
    // ancilla of an overlap or trace circuit, and a one-bit string is its own reverse).
    {
        let name = "krylov_tfim3";
        let d = data_dir(name);
        let rev = reversed_counts(name, tmp.path());
        let (code, out, err) = estimate(&d, &rev, &[]);
        assert_eq!(code, 0, "{name}: a warning, not a refusal: {err}");
        assert!(
            err.contains("fit the other bit order better") && err.contains("--bit-order last"),
            "{name}, reversed counts: {err}"
        );
        assert!(out.contains("warning(s) on stderr"), "{name}: {out}");
        // Read with the flag that matches how they were written, the warning goes away.
        let (code, _, err) = estimate(&d, &rev, &["--bit-order", "last"]);
        assert_eq!(code, 0);
        assert!(
            !err.contains("bit order"),
            "{name}, --bit-order last: {err}"
        );
    }
}

#[test]
fn energies_outside_the_one_norm_bound_are_flagged_and_named() {
    let tmp = tempfile::tempdir().unwrap();
    let name = "krylov_tfim3";
    let d = data_dir(name);
    let (lo, hi) = one_norm_bound(name);
    let check = |counts: &Path, expect_out: bool| {
        let (code, out, err) = estimate(&d, counts, &["--json"]);
        assert_eq!(code, 0, "{err}");
        let v: serde_json::Value = serde_json::from_str(&out).unwrap();
        assert!((v["energy_bound"]["low"].as_f64().unwrap() - lo).abs() < 1e-9);
        assert!((v["energy_bound"]["high"].as_f64().unwrap() - hi).abs() < 1e-9);
        let mut any = false;
        for row in v["energies"].as_array().unwrap() {
            for col in ["krylov", "pencil"] {
                let Some(e) = row[col].as_f64() else { continue };
                let outside = e < lo || e > hi;
                assert_eq!(
                    row[format!("{col}_outside_bound")].as_bool(),
                    Some(outside),
                    "{col} d = {}: {e} in [{lo}, {hi}]",
                    row["dimension"]
                );
                if outside {
                    any = true;
                    let d = row["dimension"].as_u64().unwrap();
                    assert!(
                        err.contains(&format!("{col} energies at d = "))
                            && err.contains(&d.to_string())
                            && err.contains(&format!("[{lo:.6}, {hi:.6}]")),
                        "warning must name the row and the bound: {err}"
                    );
                }
            }
        }
        // The final answer is checked against the same bound.
        if let Some(e) = v["answer"]["energy"].as_f64() {
            let outside = e < lo || e > hi;
            assert_eq!(v["answer"]["outside_bound"].as_bool(), Some(outside));
            assert_eq!(err.contains("the final answer"), outside, "{err}");
            any |= outside;
        }
        assert_eq!(any, expect_out, "{out}");
        assert_eq!(v["outside_bound"].as_bool(), Some(any));
        assert!(
            v["warnings"]
                .as_array()
                .unwrap()
                .iter()
                .any(|w| w.as_str().unwrap().contains("outside"))
                == any
        );
    };
    check(&d.join("counts.json"), false);
    check(&reversed_counts(name, tmp.path()), true);
    // The table marks the offending values.
    let (_, out, _) = estimate(&d, &reversed_counts(name, tmp.path()), &[]);
    assert!(out.lines().any(|l| l.contains('!')), "{out}");
    assert!(out.contains("one-norm bound: every eigenvalue of H lies in"));
}

#[test]
fn a_gram_matrix_negative_beyond_noise_is_reported() {
    let tmp = tempfile::tempdir().unwrap();
    let name = "overlap_heis4";
    let d = data_dir(name);
    let json = |counts: &Path| {
        let (code, out, err) = estimate(&d, counts, &["--json"]);
        assert_eq!(code, 0, "{err}");
        (
            serde_json::from_str::<serde_json::Value>(&out).unwrap(),
            err,
        )
    };
    let (v, err) = json(&d.join("counts.json"));
    let (min, noise) = (
        v["gram_min_eigenvalue"].as_f64().unwrap(),
        v["gram_noise_scale"].as_f64().unwrap(),
    );
    assert!(noise > 0.0);
    assert!(
        min >= -3.0 * noise,
        "correct counts: λ_min {min}, noise {noise}"
    );
    assert!(!err.contains("positive semidefinite"), "{err}");
    let (v, err) = json(&flipped_ancilla_counts(name, tmp.path()));
    let (min, noise) = (
        v["gram_min_eigenvalue"].as_f64().unwrap(),
        v["gram_noise_scale"].as_f64().unwrap(),
    );
    assert!(
        min < -3.0 * noise,
        "flipped ancilla: λ_min {min}, noise {noise}"
    );
    assert!(
        err.contains("not positive semidefinite within noise") && err.contains("Weyl"),
        "{err}"
    );
}

#[test]
fn counts_of_another_campaign_are_refused_naming_the_circuit() {
    // krylov_tfim3's counts (3 qubits + ancilla, term-group circuits) against the overlap plan
    // of a 4-qubit chain: ids unknown to the plan, the plan's ids missing.
    let (code, out, err) = estimate(
        &data_dir("overlap_heis4"),
        &data_dir("krylov_tfim3").join("counts.json"),
        &[],
    );
    assert_eq!(code, 2, "{err}");
    assert!(out.is_empty(), "nothing is estimated: {out}");
    assert!(err.contains("unknown circuit `k00-re-g00`"), "{err}");
    assert!(err.contains("have no counts: `k01-re`, `k01-im`"), "{err}");
}
