//! Jordan–Wigner and Bravyi–Kitaev against the algebra they must preserve: the canonical
//! anticommutation relations, equal spectra on random fermionic Hamiltonians (dense
//! diagonalisation, 1e-10), particle-number conservation, and exact normal ordering.

use nalgebra::DMatrix;
use num_complex::Complex64;
use phasewright::fermion::encode::{ladder_image, map_operator, map_product, ComplexPauliMap};
use phasewright::fermion::{hermitian_part, normal_order, Encoding, FermionOp, Ladder};
use phasewright::pauli::PauliString;
use phasewright::sim::exact::spectrum;
use proptest::prelude::*;

const ENCODINGS: [Encoding; 2] = [Encoding::JordanWigner, Encoding::BravyiKitaev];

fn dense(terms: &[(Complex64, PauliString)], n: usize) -> DMatrix<Complex64> {
    let dim = 1usize << n;
    let mut m = DMatrix::zeros(dim, dim);
    for b in 0..dim {
        for (c, p) in terms {
            let (ph, b2) = p.apply_to_basis(b as u64);
            m[(b2 as usize, b)] += ph * c;
        }
    }
    m
}

fn dense_map(map: &ComplexPauliMap, n: usize) -> DMatrix<Complex64> {
    let v: Vec<(Complex64, PauliString)> = map
        .terms
        .iter()
        .map(|(p, (c, _))| (*c, p.clone()))
        .collect();
    dense(&v, n)
}

fn image(enc: Encoding, n: usize, j: usize, k: Ladder) -> DMatrix<Complex64> {
    dense(&ladder_image(enc, n, (j, k)), n)
}

#[test]
fn images_satisfy_the_canonical_anticommutation_relations() {
    // {a_i, a†_j} = δ_ij, {a_i, a_j} = 0 (e.g. Seeley, Richard & Love 2012, eq. 1).
    for enc in ENCODINGS {
        for n in 1..=6 {
            let dim = 1usize << n;
            let id = DMatrix::<Complex64>::identity(dim, dim);
            for i in 0..n {
                for j in 0..n {
                    let ai = image(enc, n, i, Ladder::Annihilate);
                    let aj = image(enc, n, j, Ladder::Annihilate);
                    let cj = image(enc, n, j, Ladder::Create);
                    let acomm = &ai * &cj + &cj * &ai;
                    let want = if i == j {
                        id.clone()
                    } else {
                        id.clone() * Complex64::new(0.0, 0.0)
                    };
                    assert!((acomm - want).norm() < 1e-12, "{enc} n={n} i={i} j={j}");
                    assert!((&ai * &aj + &aj * &ai).norm() < 1e-12);
                    // a† is the adjoint of a.
                    assert!((cj.adjoint() - &aj).norm() < 1e-12);
                }
            }
        }
    }
}

/// A random particle-conserving Hermitian operator on `n` modes: Σ h_pq a†_p a_q plus
/// Σ (c a†_p a†_q a_r a_s + h.c.).
fn random_hamiltonian(
    n: usize,
    seed_terms: &[(usize, usize, usize, usize, f64, f64)],
) -> FermionOp {
    let mut op = FermionOp::new(n);
    for &(p, q, r, s, re, im) in seed_terms {
        let (p, q, r, s) = (p % n, q % n, r % n, s % n);
        let c = Complex64::new(re, im);
        let one = [(p, Ladder::Create), (q, Ladder::Annihilate)];
        op.add_product(c, &one);
        op.add_product(c.conj(), &[(q, Ladder::Create), (p, Ladder::Annihilate)]);
        let two = [
            (p, Ladder::Create),
            (q, Ladder::Create),
            (r, Ladder::Annihilate),
            (s, Ladder::Annihilate),
        ];
        op.add_product(c * 0.5, &two);
        op.add_product(
            c.conj() * 0.5,
            &[
                (s, Ladder::Create),
                (r, Ladder::Create),
                (q, Ladder::Annihilate),
                (p, Ladder::Annihilate),
            ],
        );
    }
    op.add_product(Complex64::new(0.3, 0.0), &[]);
    op
}

fn number_operator(n: usize) -> FermionOp {
    let mut op = FermionOp::new(n);
    for k in 0..n {
        op.add_product(
            Complex64::new(1.0, 0.0),
            &[(k, Ladder::Create), (k, Ladder::Annihilate)],
        );
    }
    op
}

fn term_strategy() -> impl Strategy<Value = Vec<(usize, usize, usize, usize, f64, f64)>> {
    proptest::collection::vec(
        (
            0usize..8,
            0usize..8,
            0usize..8,
            0usize..8,
            -1.0f64..1.0,
            -1.0f64..1.0,
        ),
        1..12,
    )
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(24))]

    #[test]
    fn both_encodings_give_the_same_spectrum(n in 2usize..=6, terms in term_strategy()) {
        let op = random_hamiltonian(n, &terms);
        let mut spectra = Vec::new();
        for enc in ENCODINGS {
            let (h, _) = hermitian_part(&map_operator(enc, &op), n)
                .map_err(|(p, c)| TestCaseError::fail(format!("{enc}: {p} has {c}")))?;
            spectra.push(spectrum(&h).values);
        }
        for (a, b) in spectra[0].iter().zip(&spectra[1]) {
            prop_assert!((a - b).abs() < 1e-10, "{a} vs {b}");
        }
    }

    #[test]
    fn particle_number_commutes_with_both_mapped_hamiltonians(n in 2usize..=6, terms in term_strategy()) {
        let op = random_hamiltonian(n, &terms);
        for enc in ENCODINGS {
            let h = dense_map(&map_operator(enc, &op), n);
            let num = dense_map(&map_operator(enc, &number_operator(n)), n);
            let comm = &h * &num - &num * &h;
            prop_assert!(comm.norm() < 1e-10, "{enc}: |[N, H]| = {}", comm.norm());
        }
    }

    #[test]
    fn normal_ordering_preserves_the_operator_exactly(
        n in 1usize..=4,
        ops in proptest::collection::vec((0usize..4, any::<bool>()), 0..6),
        re in -2.0f64..2.0,
    ) {
        // Every coefficient normal ordering produces is ±c: the reordered sum must map to the
        // same matrix as the product mapped directly, with no round-off at all.
        let ops: Vec<(usize, Ladder)> = ops
            .into_iter()
            .map(|(m, c)| (m % n, if c { Ladder::Create } else { Ladder::Annihilate }))
            .collect();
        let c = Complex64::new(re, 0.0);
        let enc = Encoding::JordanWigner;
        let mut direct = Vec::new();
        map_product(enc, n, c, &ops, &mut |p, c| direct.push((c, p)));
        let mut ordered = Vec::new();
        for (w, cw) in normal_order(c, &ops) {
            prop_assert!(cw == c || cw == -c);
            map_product(enc, n, cw, &w, &mut |p, c| ordered.push((c, p)));
        }
        prop_assert!((dense(&direct, n) - dense(&ordered, n)).norm() < 1e-14);
    }
}
