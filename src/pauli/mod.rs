//! Pauli strings as bit masks and real-coefficient Pauli sums.
//!
//! In: qubit indices and Pauli letters (from the parsers or from code). Out: [`PauliString`]
//! values (two [`Bits`] masks of any width up to [`MAX_QUBITS`] qubits) and [`PauliSum`], a
//! Hermitian operator `c·I + Σ_j c_j P_j` with real `c_j`, kept in a `BTreeMap` so every
//! iteration order is deterministic.
//!
//! Convention: a string with masks `(x, z)` denotes `i^{|x∧z|} X^x Z^z`, so a qubit with both
//! bits set carries `Y = i·X·Z`. With that convention every string is Hermitian and two strings
//! commute exactly when `|x₁∧z₂| + |z₁∧x₂|` is even (one popcount per 64-qubit word).

pub mod bits;
pub mod group;
pub mod hermitian;
pub mod order;

pub use bits::Bits;
use num_complex::Complex64;
use std::collections::BTreeMap;
use std::fmt;

/// Largest number of qubits a [`PauliString`] may address in phasewright's inputs. The masks
/// themselves have no width limit; this bound keeps inputs, plans and predicted memory sane.
pub const MAX_QUBITS: usize = 4096;

/// One tensor factor of a Pauli string.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Pauli {
    I,
    X,
    Y,
    Z,
}

impl Pauli {
    /// The letter used in text (`I X Y Z`).
    pub fn letter(self) -> char {
        match self {
            Pauli::I => 'I',
            Pauli::X => 'X',
            Pauli::Y => 'Y',
            Pauli::Z => 'Z',
        }
    }
}

/// A Hermitian Pauli string `i^{|x∧z|} X^x Z^z` (qubit k is member k of both masks).
///
/// Ordered by `x` then `z`, each compared as a binary number: for strings on qubits 0..64 this
/// is the order of their `u64` masks.
#[derive(Clone, Debug, PartialEq, Eq, Hash, PartialOrd, Ord, Default)]
pub struct PauliString {
    pub x: Bits,
    pub z: Bits,
}

impl PauliString {
    /// The identity string.
    pub const IDENTITY: PauliString = PauliString {
        x: Bits::new(),
        z: Bits::new(),
    };

    /// A string from two `u64` masks (qubits 0..64), for code and tests on small registers.
    pub fn from_masks(x: u64, z: u64) -> PauliString {
        PauliString {
            x: Bits::from_u64(x),
            z: Bits::from_u64(z),
        }
    }

    /// A single-qubit factor on qubit `q`.
    pub fn single(q: usize, p: Pauli) -> PauliString {
        let bit = Bits::single(q);
        match p {
            Pauli::I => PauliString::IDENTITY,
            Pauli::X => PauliString {
                x: bit,
                z: Bits::new(),
            },
            Pauli::Y => PauliString {
                x: bit.clone(),
                z: bit,
            },
            Pauli::Z => PauliString {
                x: Bits::new(),
                z: bit,
            },
        }
    }

    /// Builds a string from `(qubit, letter)` pairs; repeated qubits are multiplied out and the
    /// resulting phase is returned beside the string: `Π factors = phase · string`.
    pub fn from_factors(factors: &[(usize, Pauli)]) -> (Complex64, PauliString) {
        // Factors on distinct qubits commute and multiply to the tensor product, phase 1: set
        // the bits directly (the common case, and one allocation per mask on wide registers).
        let distinct = factors.len() <= 16
            && factors
                .iter()
                .enumerate()
                .all(|(i, a)| factors[..i].iter().all(|b| b.0 != a.0));
        if distinct {
            let top = factors.iter().map(|f| f.0).max().unwrap_or(0);
            let mut x: smallvec::SmallVec<[u64; 4]> = smallvec::smallvec![0; top / 64 + 1];
            let mut z = x.clone();
            for &(q, p) in factors {
                let bit = 1u64 << (q % 64);
                match p {
                    Pauli::I => {}
                    Pauli::X => x[q / 64] |= bit,
                    Pauli::Y => {
                        x[q / 64] |= bit;
                        z[q / 64] |= bit;
                    }
                    Pauli::Z => z[q / 64] |= bit,
                }
            }
            return (
                Complex64::new(1.0, 0.0),
                PauliString {
                    x: Bits::from_words(&x),
                    z: Bits::from_words(&z),
                },
            );
        }
        let mut phase = Complex64::new(1.0, 0.0);
        let mut acc = PauliString::IDENTITY;
        for &(q, p) in factors {
            let (ph, s) = acc.mul(&PauliString::single(q, p));
            phase *= ph;
            acc = s;
        }
        (phase, acc)
    }

    /// The factor on qubit `q`.
    pub fn get(&self, q: usize) -> Pauli {
        match (self.x.contains(q), self.z.contains(q)) {
            (false, false) => Pauli::I,
            (true, false) => Pauli::X,
            (true, true) => Pauli::Y,
            (false, true) => Pauli::Z,
        }
    }

    /// The qubits on which the string acts non-trivially.
    pub fn support(&self) -> Bits {
        self.x.or(&self.z)
    }

    /// True when the two strings act on the same qubits (compared word by word, nothing
    /// built).
    pub fn same_support(&self, other: &PauliString) -> bool {
        let word = |v: &[u64], i: usize| v.get(i).copied().unwrap_or(0);
        let (ax, az, bx, bz) = (
            self.x.words(),
            self.z.words(),
            other.x.words(),
            other.z.words(),
        );
        let n = ax.len().max(az.len()).max(bx.len()).max(bz.len());
        (0..n).all(|i| word(ax, i) | word(az, i) == word(bx, i) | word(bz, i))
    }

    /// The support in ascending order, without building a mask.
    pub fn support_qubits(&self) -> Vec<usize> {
        self.support_iter().collect()
    }

    /// The support in ascending order, lazily.
    pub fn support_iter(&self) -> impl Iterator<Item = usize> + '_ {
        let (xs, zs) = (self.x.words(), self.z.words());
        (0..xs.len().max(zs.len())).flat_map(move |i| {
            let mut w = xs.get(i).copied().unwrap_or(0) | zs.get(i).copied().unwrap_or(0);
            std::iter::from_fn(move || {
                (w != 0).then(|| {
                    let t = w.trailing_zeros() as usize;
                    w &= w - 1;
                    i * 64 + t
                })
            })
        })
    }

    /// Number of non-identity factors.
    pub fn weight(&self) -> u32 {
        let n = self.x.words().len().max(self.z.words().len());
        (0..n)
            .map(|i| {
                (self.x.words().get(i).copied().unwrap_or(0)
                    | self.z.words().get(i).copied().unwrap_or(0))
                .count_ones()
            })
            .sum()
    }

    pub fn is_identity(&self) -> bool {
        self.x.is_empty() && self.z.is_empty()
    }

    /// Number of `Y` factors, `|x∧z|`.
    pub fn y_count(&self) -> u32 {
        self.x.and_count(&self.z)
    }

    /// True when the two strings commute (symplectic product is even).
    #[inline]
    pub fn commutes_with(&self, other: &PauliString) -> bool {
        (self.x.and_count(&other.z) + self.z.and_count(&other.x)).is_multiple_of(2)
    }

    /// True when the two strings commute qubit by qubit (on every shared qubit the letters agree).
    pub fn qubitwise_commutes_with(&self, other: &PauliString) -> bool {
        let both = self.support().and(&other.support());
        !self.x.xor(&other.x).intersects(&both) && !self.z.xor(&other.z).intersects(&both)
    }

    /// Product `self · other = phase · result`, `phase ∈ {±1, ±i}`.
    ///
    /// With `P = i^{a} X^{x1} Z^{z1}` and `Q = i^{b} X^{x2} Z^{z2}`, moving `Z^{z1}` past `X^{x2}`
    /// gives `(-1)^{|z1∧x2|}`, and the result's own `i^{|x∧z|}` is divided out.
    pub fn mul(&self, other: &PauliString) -> (Complex64, PauliString) {
        let x = self.x.xor(&other.x);
        let z = self.z.xor(&other.z);
        let power =
            self.y_count() as i64 + other.y_count() as i64 + 2 * self.z.and_count(&other.x) as i64
                - x.and_count(&z) as i64;
        (i_pow(power), PauliString { x, z })
    }

    /// Highest qubit index touched plus one (0 for the identity).
    pub fn span(&self) -> usize {
        self.x.span().max(self.z.span())
    }

    /// Text form over `n` qubits, qubit 0 first, e.g. `XIZY`.
    pub fn to_letters(&self, n: usize) -> String {
        (0..n).map(|q| self.get(q).letter()).collect()
    }

    /// Sparse text form in the `.ham` language, e.g. `X0 Y1 Z3` (`I` for the identity).
    pub fn to_factor_text(&self) -> String {
        if self.is_identity() {
            return "I".to_string();
        }
        let mut out = String::new();
        for q in self.support_qubits() {
            if !out.is_empty() {
                out.push(' ');
            }
            out.push(self.get(q).letter());
            out.push_str(&q.to_string());
        }
        out
    }

    /// Applies the string to a computational basis state: `P|b⟩ = phase · |b'⟩`. For strings
    /// on qubits 0..64 (statevector work never goes beyond).
    #[inline]
    pub fn apply_to_basis(&self, b: u64) -> (Complex64, u64) {
        debug_assert!(self.span() <= 64, "basis states are 64-bit indices");
        let (x, z) = (self.x.low_u64(), self.z.low_u64());
        let sign_flips = (b & z).count_ones() as i64 * 2;
        (i_pow((x & z).count_ones() as i64 + sign_flips), b ^ x)
    }

    /// The string with every qubit index raised by `by`.
    pub fn shifted_up(&self, by: usize) -> PauliString {
        PauliString {
            x: self.x.shifted_up(by),
            z: self.z.shifted_up(by),
        }
    }
}

impl PauliString {
    /// Parses the sparse text form written by [`PauliString::to_factor_text`] (`X0 Y1 Z3`, or
    /// `I`). Repeated qubits and indices from [`MAX_QUBITS`] on are rejected (the writer never
    /// produces them).
    pub fn parse_factor_text(text: &str) -> Option<PauliString> {
        let text = text.trim();
        if text == "I" {
            return Some(PauliString::IDENTITY);
        }
        let mut out = PauliString::IDENTITY;
        for tok in text.split_whitespace() {
            let mut chars = tok.chars();
            let p = match chars.next()? {
                'X' => Pauli::X,
                'Y' => Pauli::Y,
                'Z' => Pauli::Z,
                _ => return None,
            };
            let q: usize = chars.as_str().parse().ok()?;
            if q >= MAX_QUBITS || out.get(q) != Pauli::I {
                return None;
            }
            if matches!(p, Pauli::X | Pauli::Y) {
                out.x.insert(q);
            }
            if matches!(p, Pauli::Z | Pauli::Y) {
                out.z.insert(q);
            }
        }
        Some(out)
    }
}

impl fmt::Display for PauliString {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.to_factor_text())
    }
}

/// `i^k` for any integer `k`.
#[inline]
pub fn i_pow(k: i64) -> Complex64 {
    match k.rem_euclid(4) {
        0 => Complex64::new(1.0, 0.0),
        1 => Complex64::new(0.0, 1.0),
        2 => Complex64::new(-1.0, 0.0),
        _ => Complex64::new(0.0, -1.0),
    }
}

/// A Hermitian operator `constant·I + Σ coeff·P` on `num_qubits` qubits.
///
/// Invariant: no identity key in `terms`, no zero coefficient, every key fits in `num_qubits`.
#[derive(Clone, Debug, PartialEq)]
pub struct PauliSum {
    pub num_qubits: usize,
    pub constant: f64,
    pub terms: BTreeMap<PauliString, f64>,
}

impl PauliSum {
    pub fn new(num_qubits: usize) -> PauliSum {
        PauliSum {
            num_qubits,
            constant: 0.0,
            terms: BTreeMap::new(),
        }
    }

    /// Adds `coeff · P`, merging with an existing equal string and dropping exact zeros.
    pub fn add(&mut self, p: PauliString, coeff: f64) {
        if p.is_identity() {
            self.constant += coeff;
            return;
        }
        match self.terms.entry(p) {
            std::collections::btree_map::Entry::Vacant(v) => {
                if coeff != 0.0 {
                    v.insert(coeff);
                }
            }
            std::collections::btree_map::Entry::Occupied(mut o) => {
                *o.get_mut() += coeff;
                if *o.get() == 0.0 {
                    o.remove();
                }
            }
        }
    }

    /// Terms as a vector in key order (deterministic).
    pub fn term_list(&self) -> Vec<(PauliString, f64)> {
        self.terms.iter().map(|(p, c)| (p.clone(), *c)).collect()
    }

    /// `Σ |c_j|` over the non-identity terms (the usual product-formula cost scale).
    pub fn one_norm(&self) -> f64 {
        self.terms.values().map(|c| c.abs()).sum()
    }

    /// Drops the non-identity strings with `|c| < cutoff` (the constant stays); returns how
    /// many were dropped. `convert --cutoff` and `compile` use it for integral round-off.
    pub fn drop_below(&mut self, cutoff: f64) -> usize {
        let before = self.terms.len();
        self.terms.retain(|_, c| c.abs() >= cutoff);
        before - self.terms.len()
    }

    /// `H|v⟩` for a statevector over `num_qubits` qubits (qubit k = bit k of the index).
    pub fn apply(&self, v: &[Complex64]) -> Vec<Complex64> {
        let mut out: Vec<Complex64> = v.iter().map(|a| a * self.constant).collect();
        for (p, c) in &self.terms {
            for (b, amp) in v.iter().enumerate() {
                let (ph, b2) = p.apply_to_basis(b as u64);
                out[b2 as usize] += ph * amp * *c;
            }
        }
        out
    }

    /// Dense matrix in the computational basis (row = output index). For small `n` only.
    pub fn to_dense(&self) -> nalgebra::DMatrix<Complex64> {
        let dim = 1usize << self.num_qubits;
        let mut m = nalgebra::DMatrix::<Complex64>::zeros(dim, dim);
        for b in 0..dim {
            m[(b, b)] += Complex64::new(self.constant, 0.0);
            for (p, c) in &self.terms {
                let (ph, b2) = p.apply_to_basis(b as u64);
                m[(b2 as usize, b)] += ph * *c;
            }
        }
        m
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn dense1(p: Pauli) -> [[Complex64; 2]; 2] {
        let o = Complex64::new(0.0, 0.0);
        let l = Complex64::new(1.0, 0.0);
        let i = Complex64::new(0.0, 1.0);
        match p {
            Pauli::I => [[l, o], [o, l]],
            Pauli::X => [[o, l], [l, o]],
            Pauli::Y => [[o, -i], [i, o]],
            Pauli::Z => [[l, o], [o, -l]],
        }
    }

    #[test]
    fn single_qubit_products_match_the_pauli_algebra() {
        // XY = iZ, YZ = iX, ZX = iY (Nielsen & Chuang 2010, eq. 2.40 and the relations below it).
        let x = PauliString::single(0, Pauli::X);
        let y = PauliString::single(0, Pauli::Y);
        let z = PauliString::single(0, Pauli::Z);
        assert_eq!(x.mul(&y), (Complex64::new(0.0, 1.0), z.clone()));
        assert_eq!(y.mul(&z), (Complex64::new(0.0, 1.0), x.clone()));
        assert_eq!(z.mul(&x), (Complex64::new(0.0, 1.0), y.clone()));
        assert_eq!(y.mul(&x), (Complex64::new(0.0, -1.0), z));
        assert_eq!(y.mul(&y), (Complex64::new(1.0, 0.0), PauliString::IDENTITY));
    }

    #[test]
    fn apply_to_basis_matches_dense_matrices() {
        for p in [Pauli::I, Pauli::X, Pauli::Y, Pauli::Z] {
            let s = PauliString::single(0, p);
            let m = dense1(p);
            for b in 0..2u64 {
                let (ph, b2) = s.apply_to_basis(b);
                assert_eq!(m[b2 as usize][b as usize], ph, "{p:?} on |{b}⟩");
            }
        }
    }

    #[test]
    fn commutation_is_the_symplectic_product() {
        let xx = PauliString::from_factors(&[(0, Pauli::X), (1, Pauli::X)]).1;
        let zz = PauliString::from_factors(&[(0, Pauli::Z), (1, Pauli::Z)]).1;
        let zi = PauliString::single(0, Pauli::Z);
        assert!(xx.commutes_with(&zz));
        assert!(!xx.qubitwise_commutes_with(&zz));
        assert!(!xx.commutes_with(&zi));
    }

    #[test]
    fn sums_merge_and_drop_exact_zeros() {
        let mut h = PauliSum::new(2);
        let z0 = PauliString::single(0, Pauli::Z);
        h.add(z0.clone(), 1.5);
        h.add(z0, -1.5);
        h.add(PauliString::IDENTITY, 2.0);
        assert!(h.terms.is_empty());
        assert_eq!(h.constant, 2.0);
    }

    proptest::proptest! {
        /// The direct construction for factors on distinct qubits equals the product of the
        /// single-qubit strings, phase included, on registers wider than the inline words.
        #[test]
        fn factors_build_the_product_of_their_single_qubit_strings(
            fs in proptest::collection::vec((0usize..300, 0usize..4), 0..10),
        ) {
            let factors: Vec<(usize, Pauli)> = fs
                .iter()
                .map(|&(q, p)| (q, [Pauli::I, Pauli::X, Pauli::Y, Pauli::Z][p]))
                .collect();
            let mut phase = Complex64::new(1.0, 0.0);
            let mut acc = PauliString::IDENTITY;
            for &(q, p) in &factors {
                let (ph, s) = acc.mul(&PauliString::single(q, p));
                phase *= ph;
                acc = s;
            }
            proptest::prop_assert_eq!(PauliString::from_factors(&factors), (phase, acc));
        }
    }
}
