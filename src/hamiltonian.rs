//! Reading a `.ham` file end to end: the `.ham` evaluator ([`crate::lang::ham`]) gives the
//! Pauli terms and the fermionic operator, [`crate::fermion::encode`] maps the fermionic
//! products, and the one Hermitian-part routine ([`crate::pauli::hermitian`]) turns the merged
//! result into a [`crate::pauli::PauliSum`].
//!
//! In: a file name, its source text and an optional encoding from the command line. Out: a
//! [`HamRead`] (or [`FlatRead`] for `convert`) or every [`Diagnostic`] found, with the
//! invariants of [`crate::lang::ham`]. This module is where the language and the fermion
//! mapping meet, so that neither `lang` nor `fermion` knows the other.

pub use crate::lang::ham::{FlatRead, HamFile, HamRead};

use crate::diag::Diagnostic;
use crate::fermion::encode::map_products;
use crate::ladder::Encoding;
use crate::lang::ham::{evaluate, plain_flat};

/// Reads a `.ham` source. `file` is only used in diagnostics.
/// Fermionic terms need an encoding: from an `encoding` line or from the caller; without
/// either, they are an error.
///
/// # Example
///
/// A Heisenberg pair written with a constant; then a file with a typo, whose diagnostic points
/// at the offending factor (line 2, column 5).
///
/// ```
/// use phasewright::hamiltonian::parse_hamiltonian;
/// use phasewright::pauli::PauliString;
///
/// let src = "qubits 2\nlet J = 0.5\nJ X0 X1\nJ Y0 Y1\nJ Z0 Z1\n0.5 X0 X1\n";
/// let ham = parse_hamiltonian("pair.ham", src).unwrap();
/// let terms = ham.sum.term_list();
/// assert_eq!(terms.len(), 3, "X0 X1 written twice is merged");
/// let xx = PauliString::parse_factor_text("X0 X1").unwrap();
/// assert!(terms.contains(&(xx, 1.0)));
/// assert_eq!(ham.terms_read, 4);
///
/// let bad = parse_hamiltonian("typo.ham", "qubits 2\n0.5 Q0 Z1\n").unwrap_err();
/// assert_eq!((bad[0].line, bad[0].column), (2, 5));
/// println!("{}", phasewright::diag::render_all(&bad));
/// ```
pub fn parse_hamiltonian(file: &str, src: &str) -> Result<HamFile, Vec<Diagnostic>> {
    parse_hamiltonian_with(file, src, None).map(|r| r.ham)
}

/// Reads a `.ham` source; `encoding` (e.g. from `--encoding`) applies to fermionic terms when
/// the file has no `encoding` line. A file line and a different `encoding` argument conflict;
/// a file that mixes Pauli and fermionic terms must carry its own `encoding` line.
pub fn parse_hamiltonian_with(
    file: &str,
    src: &str,
    encoding: Option<Encoding>,
) -> Result<HamRead, Vec<Diagnostic>> {
    let mut ev = evaluate(file, src, encoding)?;
    if let Some(f) = ev.take_fermionic() {
        map_products(f.encoding, f.n_modes, &f.products, &mut |i, p, c| {
            ev.add_mapped(i, p, c)
        });
    }
    ev.finish()
}

/// Reads a `.ham` source into [`FlatRead`]; the same diagnostics as [`parse_hamiltonian_with`].
/// Plain files go from text to the sorted, merged list without building a `PauliSum`.
pub fn read_flat(
    file: &str,
    src: &str,
    encoding: Option<Encoding>,
) -> Result<FlatRead, Vec<Diagnostic>> {
    if let Some(read) = plain_flat(src) {
        return Ok(read);
    }
    parse_hamiltonian_with(file, src, encoding).map(|r| FlatRead::from_read(&r))
}
