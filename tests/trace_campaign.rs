//! A trace campaign end to end through the real binary: `compile --measure trace` →
//! `rehearse` (sampled shots) → `estimate --json`, and the density of states it prints checked
//! against a reference computed here from scratch.
//!
//! Reference: `ρ_σ(E) = Σ_j N(E; E_j, σ)`, a unit Gaussian of width `σ` on every eigenvalue
//! `E_j` of `H` (the Gaussian-broadened density of states; the Fourier pair used by
//! `src/estimate/dos.rs`, e.g. Bracewell, *The Fourier Transform and its Applications*, 3rd ed.
//! 2000, ch. 6). The eigenvalues come from a dense matrix built in this file by Kronecker
//! products of the 2×2 Pauli matrices and diagonalised with nalgebra's symmetric eigensolver
//! (the Hamiltonian is real: only X, Z and Y⊗Y factors), independent of the library's own
//! Pauli-sum code. The random-state trace estimator is unbiased, `E[⟨ψ|U|ψ⟩] = tr U/2ⁿ` for
//! random product states (Hutchinson, Commun. Stat. Simul. Comput. 18, 1059 (1989), cited from
//! memory), so the estimate may differ from the reference by its printed standard error
//! (states and shots), the quadrature bound and the Trotter band, and by nothing else.

use assert_cmd::Command;
use nalgebra::DMatrix;

/// An invented three-qubit chain: ZZ couplings, a transverse field, one Y⊗Y term and a
/// constant. `(coefficient, factors)`; factors are `(letter, qubit)`.
const TERMS: &[(f64, &[(char, usize)])] = &[
    (0.9, &[('Z', 0), ('Z', 1)]),
    (0.7, &[('Z', 1), ('Z', 2)]),
    (0.6, &[('X', 0)]),
    (0.5, &[('X', 1)]),
    (0.4, &[('X', 2)]),
    (0.3, &[('Y', 0), ('Y', 2)]),
];
const CONSTANT: f64 = 0.25;
const QUBITS: usize = 3;

fn ham_text() -> String {
    let mut s = format!("qubits {QUBITS}\n");
    for (c, factors) in TERMS {
        let f: Vec<String> = factors.iter().map(|(l, q)| format!("{l}{q}")).collect();
        s += &format!("{c} {}\n", f.join(" "));
    }
    s += &format!("{CONSTANT}\n");
    s
}

/// The real 2×2 matrix of a Pauli letter, or of `Y` up to its factor `i` (`Y = i·[[0, −1],
/// [1, 0]]`): the `i`s of a Y⊗Y term multiply to `i² = −1`, applied by the caller.
fn letter(l: char) -> DMatrix<f64> {
    match l {
        'I' => DMatrix::from_row_slice(2, 2, &[1.0, 0.0, 0.0, 1.0]),
        'X' => DMatrix::from_row_slice(2, 2, &[0.0, 1.0, 1.0, 0.0]),
        'Z' => DMatrix::from_row_slice(2, 2, &[1.0, 0.0, 0.0, -1.0]),
        'Y' => DMatrix::from_row_slice(2, 2, &[0.0, -1.0, 1.0, 0.0]),
        _ => unreachable!("only I X Y Z"),
    }
}

/// Dense `H` in the computational basis; qubit `q` is bit `q` of the index, so it is the
/// rightmost Kronecker factor for `q = 0`.
fn dense_h() -> DMatrix<f64> {
    let dim = 1 << QUBITS;
    let mut h = DMatrix::<f64>::identity(dim, dim) * CONSTANT;
    for (c, factors) in TERMS {
        let mut m = DMatrix::<f64>::identity(1, 1);
        let mut i_power = 0;
        for q in (0..QUBITS).rev() {
            let l = factors
                .iter()
                .find(|(_, fq)| *fq == q)
                .map_or('I', |(l, _)| *l);
            if l == 'Y' {
                i_power += 1;
            }
            m = m.kronecker(&letter(l));
        }
        assert_eq!(
            i_power % 2,
            0,
            "a real Hamiltonian needs Y factors in pairs"
        );
        let sign = if i_power % 4 == 2 { -1.0 } else { 1.0 };
        h += m * (sign * c);
    }
    h
}

fn broadened(eigenvalues: &[f64], sigma: f64, e: f64) -> f64 {
    let norm = 1.0 / (sigma * (2.0 * std::f64::consts::PI).sqrt());
    eigenvalues
        .iter()
        .map(|ej| norm * (-(e - ej).powi(2) / (2.0 * sigma * sigma)).exp())
        .sum()
}

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

#[test]
fn a_rehearsed_trace_campaign_gives_the_broadened_spectrum_within_its_error_bars() {
    let tmp = tempfile::tempdir().unwrap();
    let ham = tmp.path().join("chain3.ham");
    std::fs::write(&ham, ham_text()).unwrap();
    let dir = tmp.path().join("camp").display().to_string();
    let counts = tmp.path().join("counts.json").display().to_string();
    run(&[
        "compile",
        &ham.display().to_string(),
        "--measure",
        "trace",
        "--samples",
        "32",
        "--dt",
        "0.25",
        "--points",
        "24",
        "--steps",
        "2",
        "--seed",
        "5",
        "-o",
        &dir,
    ]);
    run(&[
        "rehearse", &dir, "--shots", "20000", "--seed", "9", "-o", &counts,
    ]);
    let v: serde_json::Value =
        serde_json::from_str(&run(&["estimate", &dir, "--counts", &counts, "--json"])).unwrap();
    assert_eq!(v["family"], "trace");
    assert_eq!(v["qubit_count"], QUBITS);
    assert_eq!(v["state_count"], 32);

    let eig = dense_h().symmetric_eigen().eigenvalues;
    let eigenvalues: Vec<f64> = eig.iter().copied().collect();
    let sigma = v["sigma"].as_f64().unwrap();
    let trotter_band = v["trotter_band"].as_f64().unwrap_or(f64::INFINITY);
    assert!(
        trotter_band.is_finite(),
        "two steps per dt at dt = 0.25 keep the Trotter bound finite"
    );
    let dos = v["dos"].as_array().unwrap();
    assert!(dos.len() > 100, "a grid of energies");
    let (mut worst_z, mut peak, mut integral) = (0.0f64, 0.0f64, 0.0);
    let mut prev: Option<(f64, f64)> = None;
    for row in dos {
        let e = row["energy"].as_f64().unwrap();
        let got = row["density"].as_f64().unwrap();
        let se = row["std_error"].as_f64().unwrap();
        let quad = row["quadrature_bound"].as_f64().unwrap();
        let want = broadened(&eigenvalues, sigma, e);
        peak = peak.max(want);
        // The binary diagonalises small plans itself: its exact curve must be this one.
        let its_exact = row["exact"].as_f64().expect("3 qubits are diagonalised");
        assert!(
            (its_exact - want).abs() <= 1e-9 * (1.0 + want),
            "E = {e}: the binary's exact curve {its_exact} vs the reference {want}"
        );
        // Four standard errors (states and shots) plus the two bounds.
        let allowed = 4.0 * se + quad + trotter_band;
        assert!(
            (got - want).abs() <= allowed,
            "E = {e}: density {got} vs exact {want}, allowed {allowed} (σ_E {se}, quadrature \
             {quad}, Trotter {trotter_band})"
        );
        if se > 0.0 {
            worst_z = worst_z.max((got - want).abs() / se);
        }
        if let Some((e0, g0)) = prev {
            integral += 0.5 * (got + g0) * (e - e0);
        }
        prev = Some((e, got));
    }
    eprintln!(
        "σ = {sigma:.4}, peak {peak:.3}, Trotter band {trotter_band:.2e}, worst |error|/σ_E = \
         {worst_z:.2}, ∫ρ dE = {integral:.3}"
    );
    // The check above must be able to fail: the allowed band is well below the peak height.
    let widest = dos
        .iter()
        .map(|r| {
            4.0 * r["std_error"].as_f64().unwrap()
                + r["quadrature_bound"].as_f64().unwrap()
                + trotter_band
        })
        .fold(0.0, f64::max);
    assert!(widest < 0.5 * peak, "band {widest} vs peak {peak}");
    // ρ counts 2ⁿ states; the grid spans c ± (Σ|c_j| + 3σ), so nearly all of the weight is on it.
    assert!(
        (integral - 8.0).abs() < 0.5,
        "∫ρ dE = {integral}, expected about 2³ = 8"
    );
}
