//! `compile` reports the reference state's mean energy and ground-state weight, warns on a poor
//! reference, and `--state auto` picks a low-energy product state and says how.
//!
//! Reference values: dense diagonalisation of the same Hamiltonian (tests/estimate_support),
//! and hand-computed product-state energies (each derived beside its check).

mod estimate_support;

use assert_cmd::Command;
use estimate_support::*;

fn compile_json(ham: &str, state: &str, extra: &[&str]) -> (serde_json::Value, String) {
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("c");
    let o = Command::cargo_bin("phasewright")
        .unwrap()
        .args([
            "compile", ham, "--state", state, "--dt", "0.2", "--points", "3", "-o",
        ])
        .arg(&out)
        .arg("--json")
        .args(extra)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    (
        serde_json::from_slice(&o.stdout).unwrap(),
        String::from_utf8(o.stderr).unwrap(),
    )
}

fn load(p: &str) -> phasewright::pauli::PauliSum {
    phasewright::files::load_qubit_hamiltonian(std::path::Path::new(p), None)
        .unwrap()
        .0
}

#[test]
fn mean_energy_and_weight_match_dense_diagonalisation() {
    let h = load("examples/heisenberg_chain6.ham");
    let (v, err) = compile_json("examples/heisenberg_chain6.ham", "ssssss", &[]);
    let r = &v["reference"];
    let want_w = ground_weight(&h, "ssssss");
    let psi = product_state("ssssss");
    let want_e = psi.dotc(&(h.to_dense() * &psi)).re;
    assert!((r["mean_energy"].as_f64().unwrap() - want_e).abs() < 1e-9);
    assert!((r["ground_weight"].as_f64().unwrap() - want_w).abs() < 1e-9);
    assert!((r["ground_energy"].as_f64().unwrap() - ground_energy(&h)).abs() < 1e-9);
    assert_eq!(r["low_weight"], false);
    assert!(!err.contains("ground-state weight"), "{err}");
}

#[test]
fn a_reference_without_ground_state_weight_is_warned_about() {
    // |000000⟩ is the fully polarised state (total S_z = 3); the open Heisenberg chain's ground
    // state is a singlet (Lieb & Mattis, J. Math. Phys. 3, 749 (1962), from memory), so the
    // weight is 0 by symmetry.
    let (v, err) = compile_json("examples/heisenberg_chain6.ham", "000000", &[]);
    assert!(v["reference"]["ground_weight"].as_f64().unwrap() < 1e-12);
    assert_eq!(v["reference"]["low_weight"], true);
    assert!(err.contains("ground-state weight"), "{err}");
}

#[test]
fn auto_state_names_its_choice_and_method() {
    // The 8-site chain in examples/ has a field larger than its coupling, so |+…+⟩ (−n·h) is
    // the lowest product state among the ones the search visits; whatever it picks, the
    // mean energy printed must equal the product formula's value and not exceed |+…+⟩'s.
    let h = load("examples/tfim_chain8.ham");
    let (v, _) = compile_json("examples/tfim_chain8.ham", "auto", &[]);
    let r = &v["reference"];
    let state = r["state"].as_str().unwrap();
    assert!(r["auto"].as_str().unwrap().contains("--state auto chose"));
    let psi = product_state(state);
    let e = psi.dotc(&(h.to_dense() * &psi)).re;
    assert!((r["mean_energy"].as_f64().unwrap() - e).abs() < 1e-9);
    let plus = product_state("++++++++");
    let e_plus = plus.dotc(&(h.to_dense() * &plus)).re;
    assert!(e <= e_plus + 1e-12, "{e} > {e_plus}");
}

#[test]
fn auto_state_of_an_integral_file_is_hartree_fock() {
    let (v, _) = compile_json(
        "tests/data/h2_sto3g_r1.4.fcidump",
        "auto",
        &["--encoding", "jw"],
    );
    // Jordan–Wigner HF determinant of 2 electrons in 4 spin orbitals: modes 0 and 1 occupied.
    assert_eq!(v["reference"]["state"], "1100");
    assert!(v["reference"]["auto"].as_str().unwrap().contains("Hartree"));
}
