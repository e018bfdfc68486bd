//! Fermionic operators as values: ladder operators, products of them with coefficients, exact
//! normal ordering, and the names of the fermion-to-qubit encodings.
//!
//! In: monomials `c · a†_{p} … a_{q} …` on `n` modes (from the `.ham` reader or from integral
//! files). Out: [`Product`]s as written and [`FermionOp`]s in normal order. Invariant: normal
//! ordering uses only the canonical anticommutation relations `{a_p, a†_q} = δ_pq`,
//! `{a_p, a_q} = {a†_p, a†_q} = 0`, so every coefficient it produces is `±c` of an input
//! coefficient: the reordering is exact in floating point.
//!
//! **Invariant:** a leaf beside [`crate::pauli`]: it imports nothing else of the crate. The
//! `.ham` reader (`lang::ham`) builds these values and `fermion` maps them to
//! Pauli strings, so neither of the two knows the other.

use num_complex::Complex64;
use std::collections::BTreeMap;
use std::fmt;

/// A fermion-to-qubit encoding (the mapping itself is [`crate::fermion::encode`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Encoding {
    JordanWigner,
    BravyiKitaev,
}

impl Encoding {
    /// The short spelling used in files and on the command line (`jw`, `bk`).
    pub fn short_name(self) -> &'static str {
        match self {
            Encoding::JordanWigner => "jw",
            Encoding::BravyiKitaev => "bk",
        }
    }

    /// The encoding spelled `jw` or `bk`; `None` for anything else.
    pub fn from_short_name(s: &str) -> Option<Encoding> {
        match s {
            "jw" => Some(Encoding::JordanWigner),
            "bk" => Some(Encoding::BravyiKitaev),
            _ => None,
        }
    }
}

impl fmt::Display for Encoding {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            Encoding::JordanWigner => "Jordan–Wigner",
            Encoding::BravyiKitaev => "Bravyi–Kitaev",
        })
    }
}

/// One product as written: `coeff · o₁ … o_k`, plus its Hermitian conjugate when `hc` (a
/// `.ham` term's `+ h.c.`). Not normal ordered: a mapping takes it as it stands.
#[derive(Clone, Debug, PartialEq)]
pub struct Product {
    pub coeff: Complex64,
    pub ops: Vec<LadderOp>,
    pub hc: bool,
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
