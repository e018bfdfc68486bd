//! Exact lowest energies inside a particle-number sector.
//!
//! In: a qubit Hamiltonian obtained from a fermionic one, its encoding, the number of modes and
//! the electron count (optionally the spin projection). Out: the sector's basis (encoded qubit
//! basis states) and the lowest eigenvalue of the Hamiltonian restricted to it, by dense
//! diagonalisation (nalgebra's Hermitian eigensolver, ~1e-12 relative accuracy at these sizes).
//! The restriction is exact because a particle-conserving Hamiltonian maps the sector into
//! itself; elements that leave the sector are dropped.

use super::encode::{encode_occupation, Encoding};
use crate::pauli::PauliSum;
use nalgebra::DMatrix;
use num_complex::Complex64;
use std::collections::HashMap;

/// Largest sector diagonalised densely.
pub const MAX_SECTOR_DIM: usize = 6000;

/// Encoded basis states of the sector with `nelec` electrons; with `ms2 = Some(m)`, only the
/// states with `N_α − N_β = m` under the interleaved spin-orbital order (even modes α, odd β).
pub fn sector_basis(enc: Encoding, n_modes: usize, nelec: usize, ms2: Option<i64>) -> Vec<u64> {
    let alpha_mask: u64 = (0..n_modes).step_by(2).map(|k| 1u64 << k).sum();
    let mut out = Vec::new();
    let mut occ: u64 = if nelec == 0 { 0 } else { (1u64 << nelec) - 1 };
    if nelec > n_modes {
        return out;
    }
    loop {
        let keep = match ms2 {
            None => true,
            Some(m) => {
                let na = (occ & alpha_mask).count_ones() as i64;
                let nb = (occ & !alpha_mask).count_ones() as i64;
                na - nb == m
            }
        };
        if keep {
            out.push(encode_occupation(enc, n_modes, occ));
        }
        if nelec == 0 {
            break;
        }
        // Next integer with the same number of set bits (Gosper's hack).
        let c = occ & occ.wrapping_neg();
        let r = occ + c;
        occ = (((r ^ occ) >> 2) / c) | r;
        if occ >> n_modes != 0 {
            break;
        }
    }
    out
}

/// Lowest eigenvalue of `h` restricted to the span of `basis`; `None` when the sector is empty
/// or larger than [`MAX_SECTOR_DIM`].
pub fn lowest_in_sector(h: &PauliSum, basis: &[u64]) -> Option<f64> {
    let dim = basis.len();
    if dim == 0 || dim > MAX_SECTOR_DIM {
        return None;
    }
    let index: HashMap<u64, usize> = basis.iter().enumerate().map(|(i, b)| (*b, i)).collect();
    let mut m = DMatrix::<Complex64>::zeros(dim, dim);
    for (col, &b) in basis.iter().enumerate() {
        m[(col, col)] += Complex64::new(h.constant, 0.0);
        for (p, c) in &h.terms {
            let (ph, b2) = p.apply_to_basis(b);
            if let Some(&row) = index.get(&b2) {
                m[(row, col)] += ph * *c;
            }
        }
    }
    let eig = m.symmetric_eigen();
    eig.eigenvalues.iter().copied().reduce(f64::min)
}

/// `⟨b|h|b⟩` for a computational basis state `b`.
pub fn basis_energy(h: &PauliSum, b: u64) -> f64 {
    let mut e = h.constant;
    for (p, c) in &h.terms {
        if p.x.is_empty() {
            let (ph, _) = p.apply_to_basis(b);
            e += ph.re * c;
        }
    }
    e
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sector_sizes_are_binomial() {
        assert_eq!(sector_basis(Encoding::JordanWigner, 6, 3, None).len(), 20);
        assert_eq!(sector_basis(Encoding::BravyiKitaev, 6, 0, None), vec![0]);
        assert_eq!(
            sector_basis(Encoding::JordanWigner, 8, 4, Some(0)).len(),
            36
        );
        assert_eq!(sector_basis(Encoding::JordanWigner, 4, 5, None).len(), 0);
    }
}
