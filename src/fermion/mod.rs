//! Fermionic operators: products of creation and annihilation operators, exact normal
//! ordering, and the way from fermionic models and integral files to qubit Hamiltonians.
//!
//! In: monomials `c · a†_{p} … a_{q} …` on `n` modes (from `.ham` files or from FCIDUMP
//! integrals). Out: a [`FermionOp`] in normal order, and through [`encode`] a Hermitian
//! [`crate::pauli::PauliSum`]. Invariant: normal ordering uses only the canonical
//! anticommutation relations `{a_p, a†_q} = δ_pq`, `{a_p, a_q} = {a†_p, a†_q} = 0`, so every
//! coefficient it produces is `±c` of an input coefficient: the reordering is exact in floating
//! point.
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

pub use encode::Encoding;

use crate::error::{Blame, LayerError};
use crate::lang::codes::Code;
use crate::pauli::{PauliString, PauliSum};
use encode::ComplexPauliMap;
use num_complex::Complex64;
use std::collections::BTreeMap;

/// Relative round-off bound for a mapped coefficient: a real or imaginary part at most this
/// times the sum of the magnitudes of its contributions is cancellation noise (the same bound
/// as `.ham` files use for Hermiticity).
pub const ROUNDOFF_REL_TOL: f64 = 1e-12;

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

/// Turns a mapped operator into a Hermitian Pauli sum: parts within round-off are zeroed;
/// a larger imaginary part is returned as the offending string and coefficient.
/// Returns the sum and the number of strings dropped as round-off.
pub fn hermitian_part(
    map: &ComplexPauliMap,
    num_qubits: usize,
) -> Result<(PauliSum, usize), (PauliString, Complex64)> {
    let mut h = PauliSum::new(num_qubits);
    let mut dropped = 0;
    for (p, (c, mag)) in &map.terms {
        let tol = ROUNDOFF_REL_TOL * mag;
        if c.im.abs() > tol {
            return Err((p.clone(), *c));
        }
        if c.re.abs() <= tol {
            if c.re != 0.0 {
                dropped += 1;
            }
            continue;
        }
        if p.is_identity() {
            h.constant = c.re;
        } else {
            h.terms.insert(p.clone(), c.re);
        }
    }
    Ok((h, dropped))
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

/// Creation (`a†`) or annihilation (`a`).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Ladder {
    Create,
    Annihilate,
}

/// One ladder operator: mode and kind.
pub type LadderOp = (usize, Ladder);

/// A fermionic operator `Σ c · (product of ladder operators)` on `n_modes` modes, kept in
/// normal order (every `a†` left of every `a`; creations by descending mode, then
/// annihilations by descending mode). Invariant: keys are normal ordered with no repeated
/// operator; no zero coefficient.
#[derive(Clone, Debug, PartialEq)]
pub struct FermionOp {
    pub n_modes: usize,
    pub terms: BTreeMap<Vec<LadderOp>, Complex64>,
}

/// Sort key of the normal order: creations first, each kind by descending mode.
fn order_key(op: LadderOp) -> (u8, std::cmp::Reverse<usize>) {
    let kind = match op.1 {
        Ladder::Create => 0,
        Ladder::Annihilate => 1,
    };
    (kind, std::cmp::Reverse(op.0))
}

/// Rewrites `coeff · ops` (a product read left to right) as a sum of normal-ordered
/// monomials, using only the anticommutation relations. A product with a repeated creation
/// or annihilation on one mode vanishes.
pub fn normal_order(coeff: Complex64, ops: &[LadderOp]) -> Vec<(Vec<LadderOp>, Complex64)> {
    let mut out = Vec::new();
    let mut work = vec![(ops.to_vec(), coeff)];
    'outer: while let Some((mut w, mut c)) = work.pop() {
        // Bubble sort; each swap of neighbours flips the sign, and moving `a_p` past `a†_p`
        // leaves the contracted product behind: a_p a†_q = δ_pq - a†_q a_p.
        loop {
            let mut swapped = false;
            for k in 0..w.len().saturating_sub(1) {
                let (l, r) = (w[k], w[k + 1]);
                if l == r {
                    continue 'outer; // a_p a_p = a†_p a†_p = 0
                }
                if order_key(l) <= order_key(r) {
                    continue;
                }
                if l.1 == Ladder::Annihilate && r.1 == Ladder::Create && l.0 == r.0 {
                    let mut contracted = w.clone();
                    contracted.drain(k..k + 2);
                    work.push((contracted, c));
                }
                w.swap(k, k + 1);
                c = -c;
                swapped = true;
            }
            if !swapped {
                break;
            }
        }
        out.push((w, c));
    }
    out
}

impl FermionOp {
    pub fn new(n_modes: usize) -> FermionOp {
        FermionOp {
            n_modes,
            terms: BTreeMap::new(),
        }
    }

    /// Adds `coeff · ops` after normal ordering it; exact zeros are removed.
    pub fn add_product(&mut self, coeff: Complex64, ops: &[LadderOp]) {
        if coeff == Complex64::new(0.0, 0.0) {
            return;
        }
        for (w, c) in normal_order(coeff, ops) {
            let e = self
                .terms
                .entry(w.clone())
                .or_insert(Complex64::new(0.0, 0.0));
            *e += c;
            if *e == Complex64::new(0.0, 0.0) {
                self.terms.remove(&w);
            }
        }
    }

    /// The Hermitian conjugate: `(c · o₁ … o_k)† = c̄ · o_k† … o₁†`, normal ordered again.
    pub fn adjoint(&self) -> FermionOp {
        let mut out = FermionOp::new(self.n_modes);
        for (w, c) in &self.terms {
            out.add_product(c.conj(), &adjoint_ops(w));
        }
        out
    }
}

/// `(o₁ … o_k)†` as a product: reversed order, each creation ↔ annihilation.
pub fn adjoint_ops(ops: &[LadderOp]) -> Vec<LadderOp> {
    ops.iter()
        .rev()
        .map(|&(m, k)| {
            let k = match k {
                Ladder::Create => Ladder::Annihilate,
                Ladder::Annihilate => Ladder::Create,
            };
            (m, k)
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn c(re: f64) -> Complex64 {
        Complex64::new(re, 0.0)
    }
    const CR: Ladder = Ladder::Create;
    const AN: Ladder = Ladder::Annihilate;

    #[test]
    fn anticommutator_of_a_mode_with_its_adjoint_is_one() {
        // a_0 a†_0 = 1 - a†_0 a_0 (canonical anticommutation relation).
        let mut op = FermionOp::new(1);
        op.add_product(c(1.0), &[(0, AN), (0, CR)]);
        assert_eq!(op.terms[&vec![]], c(1.0));
        assert_eq!(op.terms[&vec![(0, CR), (0, AN)]], c(-1.0));
        assert_eq!(op.terms.len(), 2);
    }

    #[test]
    fn repeated_operators_vanish_and_swaps_change_sign() {
        let mut op = FermionOp::new(3);
        op.add_product(c(2.0), &[(1, CR), (1, CR)]);
        assert!(op.terms.is_empty());
        op.add_product(c(2.0), &[(0, CR), (2, CR)]);
        assert_eq!(op.terms[&vec![(2, CR), (0, CR)]], c(-2.0));
        // a_1 a†_2 = -a†_2 a_1 (different modes anticommute).
        let mut op = FermionOp::new(3);
        op.add_product(c(1.0), &[(1, AN), (2, CR)]);
        assert_eq!(op.terms[&vec![(2, CR), (1, AN)]], c(-1.0));
    }

    #[test]
    fn adjoint_reverses_and_conjugates() {
        let mut op = FermionOp::new(2);
        op.add_product(Complex64::new(1.0, 2.0), &[(1, CR), (0, AN)]);
        let adj = op.adjoint();
        assert_eq!(
            adj.terms[&vec![(0, CR), (1, AN)]],
            Complex64::new(1.0, -2.0)
        );
    }
}
