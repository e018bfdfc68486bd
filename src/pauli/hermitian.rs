//! The Hermitian part of a merged complex Pauli sum: the one routine that turns the merged
//! coefficients of a `.ham` file and of a mapped fermionic operator into a [`PauliSum`].
//!
//! In: Pauli strings, each with its merged complex coefficient, the sum of the magnitudes of
//! its contributions (the scale of its round-off), whether it may be dropped as round-off, and
//! a caller's tag (a source span, or nothing). Out: a [`HermitianPart`]: the real sum, the
//! counts of dropped strings, and every string whose imaginary part is beyond round-off, with
//! its tag, in the order given.
//!
//! Tolerance: a real or imaginary part at most [`ROUNDOFF_REL_TOL`] times the magnitude sum of
//! its contributions is cancellation noise (a relative round-off bound: every contribution is
//! an exact product of input coefficients and phases `±1, ±i`, so the merged sum carries at most
//! a few ulps per contribution). Strings written as Pauli terms are exact: only an exact zero
//! drops them; strings from a mapping also drop when their real part is within round-off.

use super::{PauliString, PauliSum};
use num_complex::Complex64;

/// Relative round-off bound for a merged coefficient (see the module notes).
pub const ROUNDOFF_REL_TOL: f64 = 1e-12;

/// One string's merged contributions.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Merged {
    /// Sum of the contributions.
    pub sum: Complex64,
    /// Sum of the magnitudes of the contributions.
    pub magnitude: f64,
    /// Every contribution came from a mapping (not written as a Pauli term), so a real part
    /// within round-off is cancellation noise and is dropped.
    pub mapped: bool,
}

/// What [`hermitian_part`] keeps and drops.
#[derive(Clone, Debug, PartialEq)]
pub struct HermitianPart<T> {
    pub sum: PauliSum,
    /// Strings (not the identity) written as Pauli terms whose merged coefficient is exactly 0.
    pub dropped_zero: usize,
    /// Mapped strings with a nonzero real part within round-off (dropped).
    pub dropped_roundoff: usize,
    /// Strings whose imaginary part is beyond round-off: string, merged coefficient, tag.
    pub not_hermitian: Vec<(PauliString, Complex64, T)>,
}

/// Splits merged coefficients into the Hermitian sum on `num_qubits` qubits and the strings
/// that break Hermiticity (see the module notes for the rules). The result does not depend on
/// the order of `entries`, apart from the order of `not_hermitian`.
pub fn hermitian_part<T>(
    num_qubits: usize,
    entries: impl IntoIterator<Item = (PauliString, Merged, T)>,
) -> HermitianPart<T> {
    let mut out = HermitianPart {
        sum: PauliSum::new(num_qubits),
        dropped_zero: 0,
        dropped_roundoff: 0,
        not_hermitian: Vec::new(),
    };
    let mut kept = Vec::new();
    for (p, m, tag) in entries {
        let tol = ROUNDOFF_REL_TOL * m.magnitude;
        if m.sum.im.abs() > tol {
            out.not_hermitian.push((p, m.sum, tag));
            continue;
        }
        let re = m.sum.re;
        if m.mapped && re.abs() <= tol {
            if re != 0.0 {
                out.dropped_roundoff += 1;
            }
            continue;
        }
        if re == 0.0 {
            if !p.is_identity() {
                out.dropped_zero += 1;
            }
        } else if p.is_identity() {
            out.sum.constant = re;
        } else {
            kept.push((p, re));
        }
    }
    // Keys are distinct: an unstable sort, then the map is built from sorted input.
    kept.sort_unstable_by(|a, b| a.0.cmp(&b.0));
    out.sum.terms = kept.into_iter().collect();
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::pauli::Pauli;

    fn ps(q: usize, p: Pauli) -> PauliString {
        PauliString::from_factors(&[(q, p)]).1
    }

    fn m(re: f64, im: f64, magnitude: f64, mapped: bool) -> Merged {
        Merged {
            sum: Complex64::new(re, im),
            magnitude,
            mapped,
        }
    }

    #[test]
    fn keeps_real_parts_and_reports_imaginary_ones_with_their_tags() {
        let entries = vec![
            (PauliString::IDENTITY, m(0.5, 0.0, 0.5, false), 'a'),
            (ps(0, Pauli::Z), m(-1.0, 1e-15, 3.0, true), 'b'),
            (ps(1, Pauli::X), m(2.0, 0.25, 2.0, false), 'c'),
            (ps(2, Pauli::Y), m(0.0, 0.0, 2.0, false), 'd'),
            (ps(3, Pauli::Y), m(1e-17, 0.0, 2.0, true), 'e'),
            (ps(4, Pauli::Y), m(1e-17, 0.0, 2.0, false), 'f'),
            (ps(5, Pauli::X), m(0.0, 0.0, 1.0, true), 'g'),
        ];
        let h = hermitian_part(6, entries);
        assert_eq!(h.sum.constant, 0.5);
        assert_eq!(h.sum.terms.len(), 2);
        assert_eq!(h.sum.terms[&ps(0, Pauli::Z)], -1.0);
        // A written string keeps even a tiny coefficient; a mapped one drops it as round-off.
        assert_eq!(h.sum.terms[&ps(4, Pauli::Y)], 1e-17);
        assert_eq!(h.dropped_zero, 1);
        assert_eq!(h.dropped_roundoff, 1);
        assert_eq!(
            h.not_hermitian,
            vec![(ps(1, Pauli::X), Complex64::new(2.0, 0.25), 'c')]
        );
    }
}
