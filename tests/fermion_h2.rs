//! Minimal-basis H2 from a hand-written FCIDUMP, against the worked example of Szabo &
//! Ostlund, "Modern Quantum Chemistry" (1989): H2 in STO-3G at R = 1.4 bohr.
//!
//! Book values (four decimals, recalled from the book): Hartree–Fock electronic energy
//! E0 = -1.8310 hartree, so with 1/R = 0.7143 the HF total energy is -1.1167 hartree
//! (Sec. 3.5.2); the minimal-basis full-CI correlation energy is -0.0206 hartree (Sec. 4.1,
//! the 2×2 CI of eq. 4.20), so the full-CI total energy is -1.1373 hartree.

use phasewright::fermion::fcidump::parse_fcidump;
use phasewright::fermion::sector::{lowest_in_sector, sector_basis};
use phasewright::fermion::{qubit_hamiltonian_from_integrals, Encoding};
use phasewright::sim::exact::spectrum;

const SRC: &str = include_str!("data/h2_sto3g_r1.4.fcidump");

/// Rounds to the four decimals the book prints.
fn r4(x: f64) -> f64 {
    (x * 1e4).round() / 1e4
}

#[test]
fn h2_ground_and_hartree_fock_energies_match_the_book() {
    let ints = parse_fcidump("h2.fcidump", SRC).unwrap_or_else(|d| panic!("{}", d[0]));
    for enc in [Encoding::JordanWigner, Encoding::BravyiKitaev] {
        let (h, info) = qubit_hamiltonian_from_integrals(&ints, enc, 0).unwrap();
        assert_eq!(h.num_qubits, 4);
        let e_ground = spectrum(&h).values[0];
        let basis = sector_basis(enc, 4, 2, None);
        let e_sector = lowest_in_sector(&h, &basis).unwrap();
        println!(
            "{enc}: ground {e_ground:.10}, 2-electron sector {e_sector:.10}, HF {:.10}, state {}",
            info.hf_energy_ha, info.hf_state
        );
        // Full CI, -1.1373 hartree (Szabo & Ostlund 1989, Sec. 4.1 with Sec. 3.5.2).
        assert_eq!(r4(e_sector), -1.1373);
        // The 2-electron ground state is the ground state of the whole Fock space here.
        assert!((e_ground - e_sector).abs() < 1e-10);
        // Hartree–Fock, -1.1167 hartree (Szabo & Ostlund 1989, Sec. 3.5.2).
        assert_eq!(r4(info.hf_energy_ha), -1.1167);
        // Electronic HF energy E0 = 2 h11 + J11 = -1.8310 hartree (same section).
        assert_eq!(r4(info.hf_energy_ha - 1.0 / 1.4), -1.8310);
    }
}

#[test]
fn h2_hartree_fock_strings() {
    let ints = parse_fcidump("h2.fcidump", SRC).unwrap();
    let (_, jw) = qubit_hamiltonian_from_integrals(&ints, Encoding::JordanWigner, 0).unwrap();
    let (_, bk) = qubit_hamiltonian_from_integrals(&ints, Encoding::BravyiKitaev, 0).unwrap();
    // Modes 0 (1α) and 1 (1β) occupied. BK: b0 = n0, b1 = n0+n1, b2 = n2, b3 = n0+…+n3 (mod 2)
    // (Seeley, Richard & Love 2012, matrix β_4).
    assert_eq!(jw.hf_state, "1100");
    assert_eq!(bk.hf_state, "1000");
}
