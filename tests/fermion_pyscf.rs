//! Cross-check against PySCF (Sun et al., WIREs Comput. Mol. Sci. 8, e1340 (2018)), a
//! general-purpose quantum-chemistry library: `tests/pyscf_fci.py` writes an FCIDUMP for LiH
//! (STO-3G, 1.6 Å) and prints PySCF's Hartree–Fock, full-CI and frozen-core CASCI energies.
//! phasewright reads the file, maps it with both encodings, and its lowest eigenvalue in the
//! Hartree–Fock particle-number sector must equal the full-CI energy to 1e-8 hartree.
//!
//! When PySCF is not importable the test prints a notice and passes, except under CI
//! (`CI=true`), where it fails: CI installs `tests/requirements.txt`.

use phasewright::fermion::fcidump::ActiveSpace;
use phasewright::fermion::sector::{basis_energy, lowest_in_sector, sector_basis};
use phasewright::fermion::Encoding;
use phasewright::files::{load_qubit_hamiltonian, load_qubit_hamiltonian_with, LoadOptions};
use std::process::Command;

fn reference(dir: &std::path::Path) -> Option<serde_json::Value> {
    let python = std::env::var("PYTHON").unwrap_or_else(|_| "python3".into());
    let script = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/pyscf_fci.py");
    let out = Command::new(&python).arg(script).arg(dir).output();
    let ci = std::env::var("CI").is_ok_and(|v| v == "true");
    let missing = |why: String| {
        if ci {
            panic!("PySCF reference unavailable under CI: {why}");
        }
        eprintln!("notice: skipping the PySCF cross-check ({why}); install tests/requirements.txt to run it");
        None
    };
    let out = match out {
        Ok(o) => o,
        Err(e) => return missing(format!("cannot run {python}: {e}")),
    };
    if out.status.code() == Some(3) {
        return missing(String::from_utf8_lossy(&out.stderr).trim().to_string());
    }
    assert!(
        out.status.success(),
        "pyscf_fci.py failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    Some(serde_json::from_slice(&out.stdout).expect("pyscf_fci.py prints one JSON object"))
}

#[test]
fn lih_full_ci_and_frozen_core_casci_match_pyscf() {
    let dir = tempfile::tempdir().unwrap();
    let Some(r) = reference(dir.path()) else {
        return;
    };
    let path = std::path::PathBuf::from(r["fcidump"].as_str().unwrap());
    let e_fci = r["e_fci"].as_f64().unwrap();
    let e_hf = r["e_hf"].as_f64().unwrap();
    let e_cas = r["e_casci_2_6"].as_f64().unwrap();
    for enc in [Encoding::JordanWigner, Encoding::BravyiKitaev] {
        let (h, info) = load_qubit_hamiltonian(&path, Some(enc)).unwrap();
        let info = info.expect("an FCIDUMP gives electron facts");
        assert_eq!((h.num_qubits, info.nelec, info.ms2), (12, 4, 0));
        let basis = sector_basis(enc, 12, info.nelec, None);
        let e = lowest_in_sector(&h, &basis).unwrap();
        println!(
            "{enc}: full CI {e:.10} (PySCF {e_fci:.10}), HF {:.10} (PySCF {e_hf:.10})",
            info.hf_energy_ha
        );
        assert!((e - e_fci).abs() < 1e-8, "{enc}: {e} vs {e_fci}");
        assert!((info.hf_energy_ha - e_hf).abs() < 1e-8);
        // The HF string is a basis state of the sector with the same energy.
        let bits = info
            .hf_state
            .chars()
            .enumerate()
            .filter(|(_, c)| *c == '1')
            .fold(0u64, |m, (k, _)| m | 1 << k);
        assert!(basis.contains(&bits));
        assert!((basis_energy(&h, bits) - info.hf_energy_ha).abs() < 1e-12);

        let opts = LoadOptions {
            encoding: Some(enc),
            active: Some(ActiveSpace::parse("2-6").unwrap()),
        };
        let (ha, ia) = load_qubit_hamiltonian_with(&path, opts).unwrap();
        let ia = ia.unwrap();
        assert_eq!((ha.num_qubits, ia.nelec, ia.frozen_orbitals), (10, 2, 1));
        let ea = lowest_in_sector(&ha, &sector_basis(enc, 10, 2, None)).unwrap();
        println!("{enc}: CASCI(2-6) {ea:.10} (PySCF {e_cas:.10})");
        assert!((ea - e_cas).abs() < 1e-8, "{enc}: {ea} vs {e_cas}");
        // Freezing the core leaves the HF determinant's energy unchanged.
        assert!((ia.hf_energy_ha - e_hf).abs() < 1e-8);
    }
}

/// Noiseless rehearsal of a chemistry campaign through the real binary: PySCF's H2 FCIDUMP
/// (STO-3G, 0.74 Å) → `compile --state hf --measure krylov` (both encodings) → `rehearse` with
/// 10⁶ shots per circuit → `estimate`. The Krylov energy at K = 6 must reach PySCF's full-CI
/// energy within 1.6 mHa ("chemical accuracy", 1 kcal/mol, common practice).
#[test]
fn h2_campaign_rehearsal_reaches_full_ci_within_chemical_accuracy() {
    let dir = tempfile::tempdir().unwrap();
    let Some(r) = reference(dir.path()) else {
        return;
    };
    let fcidump = r["h2_fcidump"].as_str().unwrap().to_string();
    let e_fci = r["h2_e_fci"].as_f64().unwrap();
    let bin = env!("CARGO_BIN_EXE_phasewright");
    let run = |args: &[&str]| {
        let out = Command::new(bin).args(args).output().unwrap();
        assert!(
            out.status.success(),
            "{args:?}: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        String::from_utf8(out.stdout).unwrap()
    };
    for enc in ["jw", "bk"] {
        let camp = dir.path().join(format!("h2-{enc}")).display().to_string();
        run(&[
            "compile",
            &fcidump,
            "--encoding",
            enc,
            "--state",
            "hf",
            "--dt",
            "0.5",
            "--points",
            "6",
            "--order",
            "4",
            "--steps",
            "2",
            "--measure",
            "krylov",
            "-o",
            &camp,
        ]);
        for seed in ["1", "2"] {
            let counts = format!("{camp}/counts{seed}.json");
            run(&[
                "rehearse", &camp, "--shots", "1000000", "--seed", seed, "-o", &counts,
            ]);
            let v: serde_json::Value =
                serde_json::from_str(&run(&["estimate", &camp, "--counts", &counts, "--json"]))
                    .unwrap();
            let e = v["energies"].as_array().unwrap().last().unwrap()["krylov"]
                .as_f64()
                .unwrap();
            println!("{enc} seed {seed}: Krylov {e:.6} Ha, PySCF full CI {e_fci:.6} Ha");
            assert!(
                (e - e_fci).abs() < 1.6e-3,
                "{enc} seed {seed}: {e} vs {e_fci}"
            );
        }
    }
}
