//! Fermion-to-qubit encodings: Jordan–Wigner and Bravyi–Kitaev.
//!
//! In: ladder operators on `n` modes. Out: their images as sums of two Pauli strings, and
//! monomials or whole [`FermionOp`]s mapped to complex Pauli maps. Mode `j` becomes qubit `j`
//! in both encodings (`n` modes use `n` qubits).
//!
//! Both encodings write `a†_j = ½ X_{U(j)} (X_j Z_{P(j)} − i Y_j Z_{R(j)})` and
//! `a_j = ½ X_{U(j)} (X_j Z_{P(j)} + i Y_j Z_{R(j)})` with an update set `U`, a parity set `P`
//! and a remainder set `R` (Seeley, Richard & Love, J. Chem. Phys. 137, 224109 (2012),
//! Sec. III). Jordan–Wigner: `U = ∅`, `P = R = {0, …, j−1}`. Bravyi–Kitaev: qubit `j` stores
//! the parity of modes `(j & (j+1)) … j`, the binary-tree (Fenwick) layout of that paper's
//! matrix `β_n` (for `n` not a power of two, its leading `n × n` block); `U(j)` are the qubits
//! whose range contains `j` beyond `j` itself, `P(j)` the qubits whose ranges tile `0 … j−1`,
//! the flip set `F(j)` the qubits whose ranges tile `(j & (j+1)) … j−1`, and `R = P \ F`.
//! The canonical anticommutation relations of the images are tested for both encodings.

pub use crate::ladder::Encoding;
use crate::ladder::{adjoint_ops, FermionOp, Ladder, LadderOp, Product};
use crate::pauli::{Bits, PauliString};
use num_complex::Complex64;
use std::collections::BTreeMap;
use std::str::FromStr;

/// `jw` or `bk` (the names of [`Encoding::from_short_name`]), for command-line options.
impl FromStr for Encoding {
    type Err = super::FermionError;
    fn from_str(s: &str) -> Result<Encoding, super::FermionError> {
        Encoding::from_short_name(s).ok_or_else(|| super::FermionError::Encoding(s.to_string()))
    }
}

/// The Bravyi–Kitaev update set of mode `j` on `n` modes.
fn bk_update(j: usize, n: usize) -> Bits {
    let mut m = Bits::new();
    let mut k = j | (j + 1);
    while k < n {
        m.insert(k);
        k |= k + 1;
    }
    m
}

/// Mask of the qubits whose stored ranges tile modes `lo … j−1` (a Fenwick prefix walk).
fn bk_prefix(j: usize, lo: usize) -> Bits {
    let mut m = Bits::new();
    let mut k = j as i64 - 1;
    while k >= lo as i64 {
        m.insert(k as usize);
        k = (k & (k + 1)) - 1;
    }
    m
}

/// Update, parity and remainder masks `(U, P, R)` of mode `j`.
pub fn sets(enc: Encoding, j: usize, n: usize) -> (Bits, Bits, Bits) {
    match enc {
        Encoding::JordanWigner => {
            let p = Bits::range(0, j);
            (Bits::new(), p.clone(), p)
        }
        Encoding::BravyiKitaev => {
            let p = bk_prefix(j, 0);
            let f = bk_prefix(j, j & (j + 1));
            let r = p.and_not(&f);
            (bk_update(j, n), p, r)
        }
    }
}

/// Image of one ladder operator: `[(½, X_U X_j Z_P), (∓½ i, X_U Y_j Z_R)]`.
pub fn ladder_image(enc: Encoding, n: usize, op: LadderOp) -> [(Complex64, PauliString); 2] {
    let (j, kind) = op;
    let (u, p, r) = sets(enc, j, n);
    let mut ux = u;
    ux.insert(j);
    let mut rz = r;
    rz.insert(j);
    let xs = PauliString {
        x: ux.clone(),
        z: p,
    };
    let ys = PauliString { x: ux, z: rz };
    let y_coeff = match kind {
        Ladder::Create => Complex64::new(0.0, -0.5),
        Ladder::Annihilate => Complex64::new(0.0, 0.5),
    };
    [(Complex64::new(0.5, 0.0), xs), (y_coeff, ys)]
}

/// Calls `out(string, coefficient)` for every Pauli string of the image of `coeff · ops`
/// (the product read left to right). Strings may repeat; the caller merges them.
pub fn map_product(
    enc: Encoding,
    n: usize,
    coeff: Complex64,
    ops: &[LadderOp],
    out: &mut impl FnMut(PauliString, Complex64),
) {
    let mut acc: Vec<(Complex64, PauliString)> = vec![(coeff, PauliString::IDENTITY)];
    for &op in ops {
        let img = ladder_image(enc, n, op);
        let mut next = Vec::with_capacity(acc.len() * 2);
        for (c, s) in &acc {
            for (ci, si) in &img {
                let (ph, p) = s.mul(si);
                next.push((c * ci * ph, p));
            }
        }
        acc = next;
    }
    for (c, s) in acc {
        out(s, c);
    }
}

/// Maps products as written (a `.ham` file's fermionic terms), in order: calls
/// `out(index, string, coefficient)` for every string of the image of `products[index]`, its
/// Hermitian conjugate included when the product carries `+ h.c.` (mapped product by product,
/// before any normal ordering, so each contribution is the image of one written term).
pub fn map_products(
    enc: Encoding,
    n: usize,
    products: &[Product],
    out: &mut impl FnMut(usize, PauliString, Complex64),
) {
    for (i, t) in products.iter().enumerate() {
        map_product(enc, n, t.coeff, &t.ops, &mut |p, c| out(i, p, c));
        if t.hc {
            map_product(enc, n, t.coeff.conj(), &adjoint_ops(&t.ops), &mut |p, c| {
                out(i, p, c)
            });
        }
    }
}

/// A Pauli sum with complex coefficients (before the Hermiticity check), plus, per string, the
/// sum of the magnitudes of its contributions (the scale of its round-off).
#[derive(Clone, Debug, Default)]
pub struct ComplexPauliMap {
    pub terms: BTreeMap<PauliString, (Complex64, f64)>,
}

impl ComplexPauliMap {
    pub fn add(&mut self, p: PauliString, c: Complex64) {
        let e = self
            .terms
            .entry(p)
            .or_insert((Complex64::new(0.0, 0.0), 0.0));
        e.0 += c;
        e.1 += c.norm();
    }
}

/// Maps a whole fermionic operator.
pub fn map_operator(enc: Encoding, op: &FermionOp) -> ComplexPauliMap {
    let mut m = ComplexPauliMap::default();
    for (w, c) in &op.terms {
        map_product(enc, op.n_modes, *c, w, &mut |p, c| m.add(p, c));
    }
    m
}

/// Qubit basis state (bit k = qubit k) that encodes the occupation number state `occ`
/// (bit j = mode j occupied).
pub fn encode_occupation(enc: Encoding, n: usize, occ: u64) -> u64 {
    match enc {
        Encoding::JordanWigner => occ,
        Encoding::BravyiKitaev => {
            let mut q = 0;
            for j in 0..n {
                let lo = j & (j + 1);
                let range = ((1u64 << (j + 1)) - 1) & !((1u64 << lo) - 1);
                if (occ & range).count_ones() % 2 == 1 {
                    q |= 1 << j;
                }
            }
            q
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bravyi_kitaev_sets_for_eight_modes() {
        // The n = 8 update, parity and flip sets tabulated by Seeley, Richard & Love (2012),
        // Sec. III (recalled from memory; the anticommutation tests check the sets
        // independently): U(0) = {1, 3, 7}, U(4) = {5, 7}, P(6) = {3, 5} with F(6) = ∅,
        // P(7) = F(7) = {3, 5, 6}.
        let n = 8;
        let masks = |j| {
            let (u, p, r) = sets(Encoding::BravyiKitaev, j, n);
            (u.low_u64(), p.low_u64(), r.low_u64())
        };
        assert_eq!(masks(4), (0b1010_0000, 0b0000_1000, 0b0000_1000));
        assert_eq!(masks(6), (0b1000_0000, 0b0010_1000, 0b0010_1000));
        assert_eq!(masks(7), (0, 0b0110_1000, 0));
        assert_eq!(masks(0), (0b1000_1010, 0, 0));
    }

    #[test]
    fn bravyi_kitaev_occupation_matches_the_beta_matrix() {
        // β_4 rows (Seeley, Richard & Love 2012, eq. 23): b0 = n0, b1 = n0+n1, b2 = n2,
        // b3 = n0+n1+n2+n3 (mod 2).
        assert_eq!(encode_occupation(Encoding::BravyiKitaev, 4, 0b0001), 0b1011);
        assert_eq!(encode_occupation(Encoding::BravyiKitaev, 4, 0b0011), 0b0001);
        assert_eq!(encode_occupation(Encoding::BravyiKitaev, 4, 0b0100), 0b1100);
    }
}
