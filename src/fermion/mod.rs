//! The way from fermionic models and integral files to qubit Hamiltonians.
//!
//! In: fermionic operators ([`crate::ladder`]: products written in a `.ham` file, or the
//! [`FermionOp`] of FCIDUMP integrals) on `n` modes. Out: through [`encode`] their Pauli
//! images, and a Hermitian [`crate::pauli::PauliSum`] through the one Hermitian-part routine
//! ([`crate::pauli::hermitian`]). The operator algebra (ladder operators, exact normal
//! ordering) lives in [`crate::ladder`] and is re-exported here, so the `.ham` reader can build
//! fermionic operators without depending on this module.
//!
//! Spin-orbital convention for integral files ([`fcidump`]): spatial orbital `p` (counted from
//! 0 inside the active space) gives mode `2p` (spin α) and mode `2p + 1` (spin β).
//!
//! Errors are [`FermionError`]s, all bad input: electrons that do not fit the orbitals, an
//! integral file whose mapped Hamiltonian is not Hermitian, an active space or encoding that
//! cannot be used.

pub mod encode;
pub mod fcidump;
pub mod sector;

pub use crate::ladder::{adjoint_ops, normal_order, Encoding, FermionOp, Ladder, LadderOp};
/// Relative round-off bound for a mapped coefficient (the one bound of
/// [`crate::pauli::hermitian`], which `.ham` files also use for Hermiticity).
pub use crate::pauli::hermitian::ROUNDOFF_REL_TOL;

use crate::diag::Code;
use crate::error::{Blame, LayerError};
use crate::pauli::hermitian::{self, Merged};
use crate::pauli::{PauliString, PauliSum};
use encode::ComplexPauliMap;
use num_complex::Complex64;

/// Why an integral file or a fermionic option cannot be turned into a qubit Hamiltonian.
#[derive(Clone, Debug, PartialEq)]
pub enum FermionError {
    /// The electron count and spin do not fit the spin orbitals (or exceed
    /// [`MAX_SPIN_ORBITALS`] for a reference determinant).
    Electrons(String),
    /// More spatial orbitals than integral-file import supports.
    TooManyOrbitals { norb: usize },
    /// The mapped Hamiltonian has an imaginary part beyond round-off on this string.
    NotHermitian { pauli: String, coeff: Complex64 },
    /// An active space (`--active FIRST-LAST`) that does not parse or does not fit the file.
    ActiveSpace(String),
    /// An encoding name other than `jw` and `bk`.
    Encoding(String),
}

impl std::fmt::Display for FermionError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            FermionError::Electrons(m) | FermionError::ActiveSpace(m) => f.write_str(m),
            FermionError::TooManyOrbitals { norb } => write!(
                f,
                "{norb} spatial orbitals need {} qubits; integral files are imported up to \
                 {MAX_SPIN_ORBITALS} spin orbitals",
                2 * norb
            ),
            FermionError::NotHermitian { pauli, coeff } => write!(
                f,
                "the mapped Hamiltonian is not Hermitian: `{pauli}` has coefficient {coeff} (are \
                 the integrals symmetric?)"
            ),
            FermionError::Encoding(other) => write!(
                f,
                "unknown encoding `{other}`: use `jw` (Jordan–Wigner) or `bk` (Bravyi–Kitaev)"
            ),
        }
    }
}

impl std::error::Error for FermionError {}

impl LayerError for FermionError {
    fn blame(&self) -> Blame {
        Blame::Input(match self {
            FermionError::Electrons(_) | FermionError::NotHermitian { .. } => Code::FciValue,
            FermionError::TooManyOrbitals { .. } => Code::FciLimit,
            FermionError::ActiveSpace(_) | FermionError::Encoding(_) => Code::UsageOption,
        })
    }

    fn hint(&self) -> Option<&str> {
        match self {
            FermionError::ActiveSpace(_) => Some("--active FIRST-LAST counts orbitals from 1"),
            _ => None,
        }
    }
}

/// What an integral file said about the electrons, for reports and for `--state hf`.
#[derive(Clone, Debug, PartialEq)]
pub struct ChemInfo {
    /// Active spatial orbitals.
    pub norb: usize,
    /// Active electrons.
    pub nelec: usize,
    /// `N_α − N_β`.
    pub ms2: i64,
    /// Modes = qubits = `2·norb`.
    pub n_spin_orbitals: usize,
    pub encoding: Encoding,
    /// Orbitals frozen (doubly occupied) below the active space.
    pub frozen_orbitals: usize,
    /// Core energy including the frozen orbitals' contribution (Hartree).
    pub core_energy_ha: f64,
    /// Hartree–Fock determinant as a qubit string, qubit 0 first.
    pub hf_state: String,
    /// `⟨HF|H|HF⟩` of the mapped Hamiltonian (Hartree).
    pub hf_energy_ha: f64,
    /// Mapped strings dropped as round-off (see [`ROUNDOFF_REL_TOL`]).
    pub dropped_roundoff: usize,
}

/// Largest number of spin orbitals for which reference determinants (Hartree–Fock, sector
/// bases) are built: occupations are 64-bit words. Fermionic terms in `.ham` files are mapped at
/// any width; only integral-file import and `hf` states stop here.
pub const MAX_SPIN_ORBITALS: usize = 63;

/// Occupation bits of the Hartree–Fock determinant: the lowest `N_α` α modes (`2p`) and the
/// lowest `N_β` β modes (`2p + 1`), with `N_α − N_β = ms2`.
pub fn hf_occupation(nelec: usize, ms2: i64) -> u64 {
    let (na, nb) = fcidump::alpha_beta(nelec, ms2);
    let mut occ = 0u64;
    for p in 0..na {
        occ |= 1 << (2 * p);
    }
    for p in 0..nb {
        occ |= 1 << (2 * p + 1);
    }
    occ
}

/// Checks that a Hartree–Fock determinant exists for these counts.
pub fn check_hf_inputs(nelec: usize, ms2: i64, n_spin_orbitals: usize) -> Result<(), FermionError> {
    let n = nelec as i64;
    if n + ms2 < 0 || n - ms2 < 0 || (n + ms2) % 2 != 0 {
        return Err(FermionError::Electrons(format!(
            "{nelec} electrons cannot have MS2 = {ms2}"
        )));
    }
    let (na, nb) = fcidump::alpha_beta(nelec, ms2);
    let orbitals = n_spin_orbitals / 2;
    if n_spin_orbitals > MAX_SPIN_ORBITALS {
        return Err(FermionError::Electrons(format!(
            "{n_spin_orbitals} spin orbitals: reference determinants are built for at most \
             {MAX_SPIN_ORBITALS} (64-bit occupation words)"
        )));
    }
    if na > orbitals || nb > orbitals {
        return Err(FermionError::Electrons(format!(
            "{na} α and {nb} β electrons do not fit {n_spin_orbitals} spin orbitals"
        )));
    }
    Ok(())
}

/// The Hartree–Fock reference state under `encoding` as a string of `0`/`1` over
/// `n_spin_orbitals` qubits, qubit 0 first (the syntax `--state` takes).
///
/// Panics when [`check_hf_inputs`] fails; [`ChemInfo`] values always pass it.
pub fn hf_state(nelec: usize, ms2: i64, n_spin_orbitals: usize, encoding: Encoding) -> String {
    if let Err(e) = check_hf_inputs(nelec, ms2, n_spin_orbitals) {
        panic!("hf_state: {e}");
    }
    let q = encode::encode_occupation(encoding, n_spin_orbitals, hf_occupation(nelec, ms2));
    (0..n_spin_orbitals)
        .map(|k| if (q >> k) & 1 == 1 { '1' } else { '0' })
        .collect()
}

/// Turns a mapped operator into a Hermitian Pauli sum ([`hermitian::hermitian_part`], every
/// string mapped): parts within round-off are zeroed; a larger imaginary part is returned as
/// the first offending string (in string order) and its coefficient.
/// Returns the sum and the number of strings dropped as round-off.
pub fn hermitian_part(
    map: &ComplexPauliMap,
    num_qubits: usize,
) -> Result<(PauliSum, usize), (PauliString, Complex64)> {
    let entries = map.terms.iter().map(|(p, &(sum, magnitude))| {
        let merged = Merged {
            sum,
            magnitude,
            mapped: true,
        };
        (p.clone(), merged, ())
    });
    let h = hermitian::hermitian_part(num_qubits, entries);
    match h.not_hermitian.into_iter().next() {
        Some((p, c, ())) => Err((p, c)),
        None => Ok((h.sum, h.dropped_roundoff)),
    }
}

/// Builds the qubit Hamiltonian of an integral file (already reduced to its active space) and
/// the facts about its electrons.
pub fn qubit_hamiltonian_from_integrals(
    ints: &fcidump::Integrals,
    encoding: Encoding,
    frozen_orbitals: usize,
) -> Result<(PauliSum, ChemInfo), FermionError> {
    let n = 2 * ints.norb;
    if n > MAX_SPIN_ORBITALS {
        return Err(FermionError::TooManyOrbitals { norb: ints.norb });
    }
    check_hf_inputs(ints.nelec, ints.ms2, n)?;
    let op = fcidump::spin_orbital_hamiltonian(ints);
    let map = encode::map_operator(encoding, &op);
    let (h, dropped) =
        hermitian_part(&map, n).map_err(|(p, coeff)| FermionError::NotHermitian {
            pauli: p.to_string(),
            coeff,
        })?;
    let hf = hf_state(ints.nelec, ints.ms2, n, encoding);
    let hf_bits = encode::encode_occupation(encoding, n, hf_occupation(ints.nelec, ints.ms2));
    let info = ChemInfo {
        norb: ints.norb,
        nelec: ints.nelec,
        ms2: ints.ms2,
        n_spin_orbitals: n,
        encoding,
        frozen_orbitals,
        core_energy_ha: ints.core_energy,
        hf_state: hf,
        hf_energy_ha: sector::basis_energy(&h, hf_bits),
        dropped_roundoff: dropped,
    };
    Ok((h, info))
}
