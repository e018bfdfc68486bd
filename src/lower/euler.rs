//! One-qubit unitaries as native gate sequences, with the exact global phase.
//!
//! In: a 2×2 unitary `M` and a [`OneQubitBasis`]. Out: gates `g₁ … g_k` (applied in that order)
//! and a phase `α` with `M = e^{iα} · g_k ⋯ g₁` to within 1e-12 per entry (rounding only).
//!
//! Notation: `Rz(φ) Ry(θ) Rz(λ)` is the ZYZ Euler form; every unitary is `e^{iα}` times one
//! (Nielsen & Chuang, "Quantum Computation and Quantum Information", 2010, Theorem 4.1). From
//! `Rz(φ)Ry(θ)Rz(λ) = [[e^{-i(φ+λ)/2}c, −e^{-i(φ−λ)/2}s], [e^{i(φ−λ)/2}s, e^{i(φ+λ)/2}c]]`,
//! `c = cos θ/2`, `s = sin θ/2`, the angles are read off as `θ = 2·atan2(|m₁₀|, |m₀₀|)`,
//! `φ+λ = arg m₁₁ − arg m₀₀`, `φ−λ = arg m₁₀ − arg(−m₀₁)`. Other axis pairs come from
//! conjugation: `S†·Ry(θ)·S = Rx(θ)` (so ZXZ of `M` is ZYZ of `S M S†`), `H·Rz(θ)·H = Rx(θ)`
//! and `H·Ry(θ)·H = Ry(−θ)` (so XYX of `M` is ZYZ of `H M H` with the middle angle negated).
//! With `rz` and `sx`: `Rz(φ)Ry(θ)Rz(λ) ∝ Rz(φ+π)·SX·Rz(θ+π)·SX·Rz(λ)`, and when the ZXZ middle
//! angle is π/2 (or π) a single `sx` (or `x`) suffices.
//!
//! The phase is never derived by hand: after choosing the gates, `α = arg tr(P† M)` with `P` the
//! product of the emitted gates' exact matrices, so a convention slip cannot lose phase silently
//! (the tests check `‖M − e^{iα}P‖` on random unitaries for every basis).

use crate::circuit::{mat2_adjoint, mat2_mul, Gate, Mat2, Qubit};
use crate::device::OneQubitBasis;
use num_complex::Complex64;
use std::f64::consts::{FRAC_PI_2, PI};

/// Below this a sine or cosine of a half-angle counts as zero, and an angle as 0, π/2 or π.
/// The error this introduces is of the same size, far under the 1e-9 budget of `verify`.
const EPS: f64 = 1e-13;

/// ZYZ Euler angles `(θ, φ, λ)` with `M ∝ Rz(φ)·Ry(θ)·Rz(λ)` and `θ ∈ [0, π]`.
pub fn zyz_angles(m: &Mat2) -> (f64, f64, f64) {
    let c = m[0][0].norm();
    let s = m[1][0].norm();
    let theta = 2.0 * s.atan2(c);
    if s < EPS {
        (0.0, 0.0, m[1][1].arg() - m[0][0].arg())
    } else if c < EPS {
        (PI, m[1][0].arg() - (-m[0][1]).arg(), 0.0)
    } else {
        // arg m₀₀ = α − S/2, arg m₁₁ = α + S/2, arg m₁₀ = α + D/2, arg(−m₀₁) = α − D/2 with
        // S = φ+λ, D = φ−λ. Each pair fixes α only mod π; shift D by 2π when the two disagree.
        let sum = m[1][1].arg() - m[0][0].arg();
        let mut diff = m[1][0].arg() - (-m[0][1]).arg();
        let alpha_s = (m[1][1].arg() + m[0][0].arg()) / 2.0;
        let alpha_d = (m[1][0].arg() + (-m[0][1]).arg()) / 2.0;
        if wrap(alpha_s - alpha_d).abs() > FRAC_PI_2 {
            diff += 2.0 * PI;
        }
        (theta, (sum + diff) / 2.0, (sum - diff) / 2.0)
    }
}

/// Of the two Euler triples of one unitary, the one with fewer outer rotations: `(θ, φ, λ)`
/// or `(−θ, φ−π, λ−π)`, which is the same up to phase since `Rz(π)·Ry(θ)·Rz(π) = −Ry(−θ)`
/// (`Z·Ry(θ)·Z = Ry(−θ)`, `Rz(π) = −iZ`). So `Ry(−π/2)` is one gate, not `Rz(π)·Ry(π/2)·Rz(π)`.
/// Ties keep `θ ∈ [0, π]`.
fn fewest_outer(angles: (f64, f64, f64)) -> (f64, f64, f64) {
    let (t, p, l) = angles;
    let turns = |p: f64, l: f64| (!is_zero(p)) as u8 + (!is_zero(l)) as u8;
    if t.abs() >= EPS && turns(p - PI, l - PI) < turns(p, l) {
        (-t, p - PI, l - PI)
    } else {
        (t, p, l)
    }
}

/// An angle in `(−π, π]`.
pub fn wrap(a: f64) -> f64 {
    let t = a.rem_euclid(2.0 * PI);
    if t > PI {
        t - 2.0 * PI
    } else {
        t
    }
}

fn is_zero(a: f64) -> bool {
    wrap(a).abs() < EPS
}

fn conj(a: &Mat2, m: &Mat2) -> Mat2 {
    // a · m · a†
    mat2_mul(&mat2_mul(a, m), &mat2_adjoint(a))
}

/// Pushes a rotation unless its angle is a multiple of 2π (the phase is recovered afterwards).
fn rot(out: &mut Vec<Gate>, g: fn(Qubit, f64) -> Gate, q: Qubit, a: f64) {
    if !is_zero(a) {
        out.push(g(q, wrap(a)));
    }
}

/// The native gates for `M` on qubit `q`, without the phase.
fn gates_for(m: &Mat2, q: Qubit, basis: OneQubitBasis) -> Vec<Gate> {
    let mut out = Vec::new();
    let one = Complex64::new(1.0, 0.0);
    let zero = Complex64::new(0.0, 0.0);
    let s_gate: Mat2 = [[one, zero], [zero, Complex64::new(0.0, 1.0)]];
    let r = std::f64::consts::FRAC_1_SQRT_2;
    let h_gate: Mat2 = [
        [Complex64::new(r, 0.0), Complex64::new(r, 0.0)],
        [Complex64::new(r, 0.0), Complex64::new(-r, 0.0)],
    ];
    match basis {
        OneQubitBasis::U => {
            let (t, p, l) = zyz_angles(m);
            if !(t.abs() < EPS && is_zero(p + l)) {
                out.push(Gate::U(q, t, wrap(p), wrap(l)));
            }
        }
        OneQubitBasis::RzRy => {
            let (t, p, l) = fewest_outer(zyz_angles(m));
            rot(&mut out, Gate::Rz, q, l);
            rot(&mut out, Gate::Ry, q, t);
            rot(&mut out, Gate::Rz, q, p);
        }
        OneQubitBasis::RzRx => {
            let (t, p, l) = fewest_outer(zyz_angles(&conj(&s_gate, m)));
            rot(&mut out, Gate::Rz, q, l);
            rot(&mut out, Gate::Rx, q, t);
            rot(&mut out, Gate::Rz, q, p);
        }
        OneQubitBasis::RxRy => {
            let (t, p, l) = fewest_outer(zyz_angles(&conj(&h_gate, m)));
            rot(&mut out, Gate::Rx, q, l);
            rot(&mut out, Gate::Ry, q, -t);
            rot(&mut out, Gate::Rx, q, p);
        }
        OneQubitBasis::RzH => {
            let (t, p, l) = zyz_angles(&conj(&s_gate, m));
            if t.abs() < EPS {
                rot(&mut out, Gate::Rz, q, p + l);
            } else {
                let (t, p, l) = fewest_outer((t, p, l));
                rot(&mut out, Gate::Rz, q, l);
                out.push(Gate::H(q));
                rot(&mut out, Gate::Rz, q, t);
                out.push(Gate::H(q));
                rot(&mut out, Gate::Rz, q, p);
            }
        }
        OneQubitBasis::RzSx { x } => {
            let (t, p, l) = zyz_angles(&conj(&s_gate, m));
            if t.abs() < EPS {
                rot(&mut out, Gate::Rz, q, p + l);
            } else if (t - FRAC_PI_2).abs() < EPS {
                rot(&mut out, Gate::Rz, q, l);
                out.push(Gate::Sx(q));
                rot(&mut out, Gate::Rz, q, p);
            } else if x && (t - PI).abs() < EPS {
                rot(&mut out, Gate::Rz, q, l);
                out.push(Gate::X(q));
                rot(&mut out, Gate::Rz, q, p);
            } else {
                let (t, p, l) = zyz_angles(m);
                rot(&mut out, Gate::Rz, q, l);
                out.push(Gate::Sx(q));
                rot(&mut out, Gate::Rz, q, t + PI);
                out.push(Gate::Sx(q));
                rot(&mut out, Gate::Rz, q, p + PI);
            }
        }
    }
    out
}

/// Product of the gates' matrices, first gate rightmost.
pub fn product(gates: &[Gate]) -> Mat2 {
    let one = Complex64::new(1.0, 0.0);
    let zero = Complex64::new(0.0, 0.0);
    let mut p: Mat2 = [[one, zero], [zero, one]];
    for g in gates {
        p = mat2_mul(&g.matrix1().expect("one-qubit gate"), &p);
    }
    p
}

/// Native gates for `M` on qubit `q` and the phase `α` with `M = e^{iα}·Π gates`.
pub fn decompose(m: &Mat2, q: Qubit, basis: OneQubitBasis) -> (Vec<Gate>, f64) {
    let gates = gates_for(m, q, basis);
    let p = product(&gates);
    let mut tr = Complex64::new(0.0, 0.0);
    for i in 0..2 {
        for j in 0..2 {
            tr += p[i][j].conj() * m[i][j];
        }
    }
    (gates, tr.arg())
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{Rng, SeedableRng};

    fn random_unitary(rng: &mut impl Rng) -> Mat2 {
        let (t, p, l, a) = (
            rng.gen_range(0.0..PI),
            rng.gen_range(-PI..PI),
            rng.gen_range(-PI..PI),
            rng.gen_range(-PI..PI),
        );
        let u = Gate::U(0, t, p, l).matrix1().unwrap();
        let ph = Complex64::from_polar(1.0, a);
        [[u[0][0] * ph, u[0][1] * ph], [u[1][0] * ph, u[1][1] * ph]]
    }

    fn error(m: &Mat2, gates: &[Gate], alpha: f64) -> f64 {
        let p = product(gates);
        let ph = Complex64::from_polar(1.0, alpha);
        let mut e: f64 = 0.0;
        for i in 0..2 {
            for j in 0..2 {
                e = e.max((m[i][j] - ph * p[i][j]).norm());
            }
        }
        e
    }

    const BASES: [OneQubitBasis; 7] = [
        OneQubitBasis::U,
        OneQubitBasis::RzSx { x: true },
        OneQubitBasis::RzSx { x: false },
        OneQubitBasis::RzRx,
        OneQubitBasis::RzRy,
        OneQubitBasis::RxRy,
        OneQubitBasis::RzH,
    ];

    #[test]
    fn random_unitaries_are_reproduced_with_their_phase() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
        for _ in 0..500 {
            let m = random_unitary(&mut rng);
            for b in BASES {
                let (g, a) = decompose(&m, 0, b);
                assert!(error(&m, &g, a) < 1e-12, "{b:?} {g:?}");
            }
        }
    }

    #[test]
    fn special_gates_are_reproduced_and_short() {
        // Clifford and Pauli gates hit the degenerate branches (θ = 0, π/2, π).
        for g in [
            Gate::H(0),
            Gate::X(0),
            Gate::Y(0),
            Gate::Z(0),
            Gate::S(0),
            Gate::Sdg(0),
            Gate::Sx(0),
            Gate::Sxdg(0),
            Gate::Rz(0, 0.3),
            Gate::Rx(0, -0.7),
            Gate::Ry(0, 2.0),
        ] {
            let m = g.matrix1().unwrap();
            for b in BASES {
                let (gs, a) = decompose(&m, 0, b);
                assert!(error(&m, &gs, a) < 1e-12, "{g:?} in {b:?}: {gs:?}");
            }
        }
        // Counts that must hold exactly: a diagonal unitary is one rz; h is rz·sx·rz; x is one x.
        let sx = OneQubitBasis::RzSx { x: true };
        assert_eq!(decompose(&Gate::S(0).matrix1().unwrap(), 0, sx).0.len(), 1);
        assert_eq!(decompose(&Gate::H(0).matrix1().unwrap(), 0, sx).0.len(), 3);
        assert_eq!(
            decompose(&Gate::X(0).matrix1().unwrap(), 0, sx).0,
            vec![Gate::X(0)]
        );
        assert_eq!(
            decompose(&Gate::H(0).matrix1().unwrap(), 0, OneQubitBasis::U)
                .0
                .len(),
            1
        );
        // A negative half turn about the middle axis is that one rotation, not three: the
        // Euler triple (π/2, π, π) of Ry(−π/2) is read as (−π/2, 0, 0).
        for (b, g) in [
            (OneQubitBasis::RzRy, Gate::Ry(0, -FRAC_PI_2)),
            (OneQubitBasis::RzRx, Gate::Rx(0, -0.7)),
            (OneQubitBasis::RxRy, Gate::Ry(0, 0.4)),
            (OneQubitBasis::RxRy, Gate::Ry(0, -0.4)),
            (OneQubitBasis::RzH, Gate::Rx(0, -0.7)),
        ] {
            let (gs, a) = decompose(&g.matrix1().unwrap(), 0, b);
            let want = if b == OneQubitBasis::RzH { 3 } else { 1 };
            assert_eq!(gs.len(), want, "{g:?} in {b:?}: {gs:?}");
            assert!(error(&g.matrix1().unwrap(), &gs, a) < 1e-12);
        }
        // The identity (up to phase) becomes nothing, with its phase kept.
        let (g, a) = decompose(&Gate::Rz(0, 2.0 * PI).matrix1().unwrap(), 0, sx);
        assert!(g.is_empty());
        assert!((wrap(a) - PI).abs() < 1e-12);
    }
}
