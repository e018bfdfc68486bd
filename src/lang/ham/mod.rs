//! The `.ham` Hamiltonian language: a line-oriented text form of a qubit Hamiltonian.
//!
//! In: a file name and its source text. Out: an [`Evaluated`] file (the Pauli terms merged per
//! string plus the fermionic operator as written) and, once the caller has added the mapped
//! images of the fermionic terms, a [`HamFile`] (a Hermitian [`PauliSum`] plus a short
//! summary); or every [`Diagnostic`] the reader could collect. This module never maps
//! fermionic terms itself: `crate::hamiltonian` joins it with the `fermion` mapping. The grammar is in
//! //! `grammar/hamiltonian.ebnf`; worked examples are in `grammar/README.md`.
//!
//! Reading runs in two stages. The nom parser turns the text into a small syntax tree whose
//! nodes carry byte spans; it recovers at the end of each line, so one bad line does not hide
//! the next. The evaluator then expands `sum` blocks, evaluates coefficients (complex, `f64`)
//! and qubit indices (integers, `i64`, checked arithmetic), multiplies factors on the same
//! qubit out with their phases, and merges equal Pauli strings. Invariants it keeps:
//!
//! * every string in the result fits in the declared `qubits N` (N ≤ [`MAX_HAM_QUBITS`]);
//! * the merged coefficient of every string is real: its imaginary part is at most
//!   [`HERMITIAN_REL_TOL`] times the sum of the magnitudes of its contributions (a relative
//!   round-off bound; anything larger is reported at the first term that contributed);
//! * strings whose merged coefficient is exactly zero are dropped and counted;
//! * [`write_hamiltonian`] prints coefficients in shortest round-trip form, so writing and
//!   reading back gives the identical [`PauliSum`].
//!
//! Where each part lives: `syntax` (the tree), `parse` (text to tree, syntax diagnostics),
//! `eval` (tree to sum, meaning diagnostics), [`plain`] (the fast path for plain files, which
//! skips the tree), [`flat`] (merged sums in writing order, the fast path's output and the
//! writer's input), [`write`](mod@write) (sum to text). This file holds the entry points.

mod eval;
pub mod flat;
mod parse;
pub mod plain;
mod syntax;
pub mod write;

pub use flat::FlatSum;
pub use write::{format_coefficient, write_flat, write_hamiltonian};

use crate::diag::{Code, Diagnostic};
use crate::ladder::{Encoding, Product};
use crate::pauli::{PauliString, PauliSum};
use eval::Evaluator;
use num_complex::Complex64;
use parse::parse_statements;

/// Largest `qubits N` (the Pauli strings' own bound; the Hadamard-test ancilla is one more
/// circuit qubit, not a bit of the strings).
pub const MAX_HAM_QUBITS: usize = crate::pauli::MAX_QUBITS;

/// Relative bound on the imaginary part of a merged coefficient (see the module notes).
pub const HERMITIAN_REL_TOL: f64 = crate::pauli::hermitian::ROUNDOFF_REL_TOL;

/// Largest number of terms one file may expand to (sums included).
pub const MAX_TERMS: usize = 10_000_000;

/// Largest number of statements the evaluator executes (guards nested sums with empty bodies).
const MAX_STEPS: usize = 50_000_000;

/// Errors (repeats included) after which evaluation stops: a sum whose body fails on every
/// pass would otherwise build an error per pass up to [`MAX_STEPS`] (seconds of work) only to
/// report the same few positions. Every position already reported stays reported.
const MAX_EVAL_ERRORS: usize = 100_000;

/// A parsed Hamiltonian file.
#[derive(Clone, Debug, PartialEq)]
pub struct HamFile {
    /// The merged Hermitian operator.
    pub sum: PauliSum,
    /// Pauli strings written in the file whose merged coefficient is exactly zero (dropped).
    pub dropped_zero: usize,
    /// Terms read, after expanding every `sum` (a `+ h.c.` term counts once).
    pub terms_read: usize,
}

/// A parsed file together with what the reader learned about its fermionic part.
#[derive(Clone, Debug, PartialEq)]
pub struct HamRead {
    pub ham: HamFile,
    /// The encoding applied to fermionic terms (`None` when the file has none).
    pub encoding: Option<Encoding>,
    /// Fermionic terms read (after expanding sums).
    pub fermionic_terms: usize,
}

/// The fermionic operator of a file, as written, waiting for its mapping.
#[derive(Clone, Debug, PartialEq)]
pub struct Fermionic {
    /// The file's `encoding` line, or else the caller's.
    pub encoding: Encoding,
    /// Modes = the file's `qubits N`.
    pub n_modes: usize,
    /// The fermionic terms with a nonzero coefficient, in file order (sums expanded).
    pub products: Vec<Product>,
}

/// A `.ham` file evaluated: the Pauli terms merged per string, plus the fermionic operator
/// ([`Evaluated::take_fermionic`]) whose mapped images the caller adds
/// ([`Evaluated::add_mapped`]) before [`Evaluated::finish`] takes the Hermitian part. The
/// mapping is not this module's: `crate::hamiltonian` joins the two.
pub struct Evaluated<'s> {
    inner: Inner<'s>,
}

enum Inner<'s> {
    /// A plain file ([`plain`]): already read, no fermionic part.
    Plain(HamRead),
    Full {
        ev: Box<Evaluator<'s>>,
        encoding: Option<Encoding>,
    },
}

/// Reads and evaluates a `.ham` source; `file` is only used in diagnostics. `encoding` (e.g.
/// from `--encoding`) applies to fermionic terms when the file has no `encoding` line. A file
/// line and a different `encoding` argument conflict; a file that mixes Pauli and fermionic
/// terms must carry its own `encoding` line; fermionic terms without either are an error.
pub fn evaluate<'s>(
    file: &'s str,
    src: &'s str,
    encoding: Option<Encoding>,
) -> Result<Evaluated<'s>, Vec<Diagnostic>> {
    // A plain file has no brackets and at most three signs per line: the depth guard, a
    // pass over the whole text, is for the full reader only.
    if let Some(read) = plain_lines(src) {
        return Ok(Evaluated {
            inner: Inner::Plain(read),
        });
    }
    if let Some(d) = crate::diag::depth_guard(Code::HamLimit, file, src, "#") {
        return Err(vec![d]);
    }
    let stmts = parse_statements(file, src)?;
    let mut ev = Box::new(Evaluator::new(file, src));
    let encoding = ev.evaluate(&stmts, encoding)?;
    Ok(Evaluated {
        inner: Inner::Full { ev, encoding },
    })
}

impl Evaluated<'_> {
    /// Takes the fermionic operator out (once); `None` when the file has no fermionic term
    /// with a nonzero coefficient.
    pub fn take_fermionic(&mut self) -> Option<Fermionic> {
        let Inner::Full { ev, encoding } = &mut self.inner else {
            return None;
        };
        let encoding = (*encoding)?;
        let products = std::mem::take(&mut ev.fermion_terms);
        if products.is_empty() {
            return None;
        }
        Some(Fermionic {
            encoding,
            n_modes: ev.num_qubits,
            products,
        })
    }

    /// Adds one Pauli string of the image of product `index` of [`Evaluated::take_fermionic`]
    /// (a Hermiticity diagnostic on it points at that product's term).
    pub fn add_mapped(&mut self, index: usize, p: PauliString, c: Complex64) {
        if let Inner::Full { ev, .. } = &mut self.inner {
            ev.add_mapped(index, p, c);
        }
    }

    /// The Hermitian part of everything merged ([`crate::pauli::hermitian`]), or a diagnostic
    /// at the first contributing term of every string whose merged coefficient is not real.
    pub fn finish(self) -> Result<HamRead, Vec<Diagnostic>> {
        match self.inner {
            Inner::Plain(read) => Ok(read),
            Inner::Full { ev, encoding } => (*ev).finish(encoding),
        }
    }
}

/// The fast path ([`plain`]): a plain file read without a syntax tree, merged, and turned
/// into the same [`HamRead`] the full reader gives.
fn plain_lines(src: &str) -> Option<HamRead> {
    let lines = plain::scan(src)?;
    let (flat, counts) = lines.merge();
    Some(HamRead {
        ham: HamFile {
            sum: flat.to_sum(),
            dropped_zero: counts.dropped_zero,
            terms_read: lines.lines.len(),
        },
        encoding: None,
        fermionic_terms: 0,
    })
}

/// A `.ham` source read into the writer's flat form ([`FlatSum`]), for `convert`: plain files
/// go from text to the sorted, merged list without building a [`PauliSum`]; any other file
/// takes the full reader (every diagnostic included) and is then laid out flat.
#[derive(Clone, Debug, PartialEq)]
pub struct FlatRead {
    pub sum: FlatSum,
    /// Pauli strings written in the file whose merged coefficient is exactly zero (dropped).
    pub dropped_zero: usize,
    /// Terms read, after expanding every `sum` (a `+ h.c.` term counts once).
    pub terms_read: usize,
    /// The encoding applied to fermionic terms (`None` when the file has none).
    pub encoding: Option<Encoding>,
}

impl FlatRead {
    /// A whole file's read laid out flat.
    pub fn from_read(read: &HamRead) -> FlatRead {
        FlatRead {
            sum: FlatSum::from_sum(&read.ham.sum),
            dropped_zero: read.ham.dropped_zero,
            terms_read: read.ham.terms_read,
            encoding: read.encoding,
        }
    }
}

/// A plain file ([`plain`]) read straight into [`FlatRead`]; `None` for any other file (it
/// takes [`evaluate`]).
pub fn plain_flat(src: &str) -> Option<FlatRead> {
    let lines = plain::scan(src)?;
    let (sum, counts) = lines.merge();
    Some(FlatRead {
        sum,
        dropped_zero: counts.dropped_zero,
        terms_read: lines.lines.len(),
        encoding: None,
    })
}

#[cfg(test)]
mod tests {
    //! One test per grammar rule (see `grammar/hamiltonian.ebnf`); the error messages are
    //! tested in `tests/ham_parser.rs`.
    use super::eval::*;
    use super::parse::*;
    use super::syntax::*;
    use super::*;
    use crate::pauli::{Pauli, PauliString};

    fn ps(factors: &[(usize, Pauli)]) -> PauliString {
        PauliString::from_factors(factors).1
    }

    /// A file without fermionic terms, read by this module alone (the fermionic part is
    /// mapped by `crate::hamiltonian`, tested in `tests/fermion_ham.rs`).
    fn parse_hamiltonian(file: &str, src: &str) -> Result<HamFile, Vec<Diagnostic>> {
        let mut e = evaluate(file, src, None)?;
        assert!(e.take_fermionic().is_none(), "a Pauli-only test file");
        e.finish().map(|r| r.ham)
    }

    fn read(src: &str) -> HamFile {
        parse_hamiltonian("t.ham", src).unwrap_or_else(|d| panic!("{}", d[0]))
    }

    fn coeff_of(src_expr: &str) -> f64 {
        let h = read(&format!("qubits 1\n{src_expr}\n"));
        h.sum.constant
    }

    #[test]
    fn number_literals() {
        // number = digits ["." digits] [exponent] ["i"]
        assert_eq!(number("12 X0").unwrap().1 .0, 12.0);
        assert_eq!(number("0.25").unwrap().1 .0, 0.25);
        assert_eq!(number("1.").unwrap().1 .0, 1.0);
        assert_eq!(number(".5").unwrap().1 .0, 0.5);
        assert_eq!(number("2.5E+2").unwrap().1 .0, 250.0);
        assert_eq!(number("1e-3").unwrap().1 .0, 1e-3);
        let (rest, (v, imag, integer, _)) = number("0..8").unwrap();
        assert_eq!((rest, v, imag, integer), ("..8", 0.0, false, true));
        let (rest, (v, imag, _, _)) = number("2.5i X0").unwrap();
        assert_eq!((rest, v, imag), (" X0", 2.5, true));
        // `2e` is the number 2 followed by something else; `2in` is not imaginary.
        assert_eq!(number("2e").unwrap().0, "e");
        assert_eq!(number("2in").unwrap().0, "in");
        assert!(number(".").is_err());
        assert!(number("x").is_err());
    }

    #[test]
    fn factor_spelling() {
        assert_eq!(factor_head("X3 "), Some((FactorKind::Pauli(Pauli::X), 1)));
        assert_eq!(factor_head("Y{i}"), Some((FactorKind::Pauli(Pauli::Y), 1)));
        assert_eq!(factor_head("Z12"), Some((FactorKind::Pauli(Pauli::Z), 1)));
        assert_eq!(factor_head("cr{k}"), Some((FactorKind::Create, 2)));
        assert_eq!(factor_head("an3"), Some((FactorKind::Annihilate, 2)));
        assert_eq!(factor_head("n{2*s}"), Some((FactorKind::Number, 1)));
        assert_eq!(factor_head("n"), None);
        assert_eq!(factor_head("cr"), None);
        assert_eq!(factor_head("an1x"), None);
        assert_eq!(factor_head("Z"), None);
        assert_eq!(factor_head("X1a"), None);
        assert_eq!(factor_head("Q1"), None);
        assert_eq!(factor_head("x1"), None);
    }

    #[test]
    fn coefficient_arithmetic_and_precedence() {
        // expr = product {("+"|"-") product}; product = unary {("*"|"/") unary}
        assert_eq!(coeff_of("1 + 2 * 3"), 7.0);
        assert_eq!(coeff_of("(1 + 2) * 3"), 9.0);
        assert_eq!(coeff_of("8 / 4 / 2"), 1.0);
        assert_eq!(coeff_of("1 - 2 - 3"), -4.0);
        assert_eq!(coeff_of("-2 * -3"), 6.0);
        assert_eq!(coeff_of("+4"), 4.0);
        assert_eq!(coeff_of("1.5e1 / 3"), 5.0);
        assert_eq!(coeff_of("-1.5"), -1.5);
    }

    #[test]
    fn qubits_declaration() {
        let h = read("# comment lines may come first\n\nqubits 63\nZ62\n");
        assert_eq!(h.sum.num_qubits, 63);
        assert_eq!(h.sum.terms[&ps(&[(62, Pauli::Z)])], 1.0);
        // Indices across 64-bit word boundaries and up to the limit.
        let h = read("qubits 4096\nX63 Z64 Y127 X128\n0.5 Z4095\n");
        assert_eq!(h.sum.num_qubits, 4096);
        let wide = ps(&[
            (63, Pauli::X),
            (64, Pauli::Z),
            (127, Pauli::Y),
            (128, Pauli::X),
        ]);
        assert_eq!(h.sum.terms[&wide], 1.0);
        assert_eq!(wide.to_factor_text(), "X63 Z64 Y127 X128");
        assert_eq!(h.sum.terms[&ps(&[(4095, Pauli::Z)])], 0.5);
    }

    #[test]
    fn let_constants() {
        let h = read("qubits 2\nlet J = 2\nlet K = J * 1.5 + 1\nK * X0 X1\n");
        assert_eq!(h.sum.terms[&ps(&[(0, Pauli::X), (1, Pauli::X)])], 4.0);
    }

    #[test]
    fn term_forms() {
        // term = coefficient ["*"] {factor} | factor {factor}
        let h = read("qubits 4\n0.25 X0 Y1 Z3\n-2 * Z2\nX1 X2\n- Y0\n3\n");
        let t = &h.sum.terms;
        assert_eq!(t[&ps(&[(0, Pauli::X), (1, Pauli::Y), (3, Pauli::Z)])], 0.25);
        assert_eq!(t[&ps(&[(2, Pauli::Z)])], -2.0);
        assert_eq!(t[&ps(&[(1, Pauli::X), (2, Pauli::X)])], 1.0);
        assert_eq!(t[&ps(&[(0, Pauli::Y)])], -1.0);
        assert_eq!(h.sum.constant, 3.0);
        assert_eq!(h.terms_read, 5);
    }

    #[test]
    fn braced_index_expressions() {
        // factor = letter (digits | "{" expr "}"); indices use + - * % with Euclidean %.
        let h = read("qubits 8\nlet L = 8\nZ{(0 - 1) % L} X{2 * 3 + 1 - 7}\n");
        assert_eq!(h.sum.terms[&ps(&[(7, Pauli::Z), (0, Pauli::X)])], 1.0);
    }

    #[test]
    fn sums_repeat_over_half_open_ranges() {
        let h = read("qubits 4\nsum i in 1..3 { 0.5 * i * Z{i} }\n");
        assert_eq!(h.sum.terms.len(), 2);
        assert_eq!(h.sum.terms[&ps(&[(1, Pauli::Z)])], 0.5);
        assert_eq!(h.sum.terms[&ps(&[(2, Pauli::Z)])], 1.0);
    }

    #[test]
    fn sum_bodies_span_lines_and_take_semicolons() {
        let h = read("qubits 3\nsum i in 0..2 {\n  X{i} X{i+1}   # newline separates\n  Y{i} Y{i+1}; Z{i} Z{i+1}\n}\n");
        assert_eq!(h.sum.terms.len(), 6);
        assert_eq!(h.terms_read, 6);
    }

    #[test]
    fn sums_nest_and_lets_in_bodies_see_the_loop_variable() {
        let src = "qubits 6\nsum i in 0..2 {\n  sum j in 0..3 {\n    let c = i + 10 * j\n    c * Z{3 * i + j}\n  }\n}\n";
        let h = read(src);
        assert_eq!(h.sum.terms.len(), 5); // c = 0 for (0, 0) is dropped
        assert_eq!(h.dropped_zero, 1);
        assert_eq!(h.sum.terms[&ps(&[(5, Pauli::Z)])], 21.0);
    }

    #[test]
    fn factors_on_one_qubit_multiply_out_with_their_phase() {
        // X·Y = iZ (Nielsen & Chuang 2010, eq. 2.40 and below), so i·X0 Y0 = -Z0.
        let h = read("qubits 1\n1i X0 Y0\n");
        assert_eq!(h.sum.terms[&ps(&[(0, Pauli::Z)])], -1.0);
        let h = read("qubits 2\n2 Z1 Z1 X0\n");
        assert_eq!(h.sum.terms[&ps(&[(0, Pauli::X)])], 2.0);
    }

    #[test]
    fn complex_contributions_merge_to_a_real_coefficient() {
        // X0 Y0 = iZ0 and Y0 X0 = -iZ0: each alone is non-Hermitian, their sum is 0.
        let h = read("qubits 1\n0.5 X0 Y0\n0.5 Y0 X0\n0.5 Z0\n");
        assert_eq!(h.sum.terms[&ps(&[(0, Pauli::Z)])], 0.5);
        // (2 + 1i) Z0 plus its conjugate: `+ h.c.` adds the Hermitian conjugate.
        let h = read("qubits 1\n(2 + 1i) * Z0 + h.c.\n");
        assert_eq!(h.sum.terms[&ps(&[(0, Pauli::Z)])], 4.0);
        let h = read("qubits 1\n1i X0 Y0 + h.c.\n");
        assert_eq!(h.sum.terms[&ps(&[(0, Pauli::Z)])], -2.0);
    }

    #[test]
    fn repeated_strings_merge_and_exact_zeros_are_counted() {
        let h = read("qubits 2\nZ0 Z1\n-1 * Z1 Z0\n0 X0\n0.5 Y1\n0.25 Y1\n");
        assert_eq!(h.sum.terms.len(), 1);
        assert_eq!(h.sum.terms[&ps(&[(1, Pauli::Y)])], 0.75);
        assert_eq!(h.dropped_zero, 2);
        assert_eq!(h.terms_read, 5);
    }

    #[test]
    fn comments_blank_lines_and_crlf() {
        let h = read("# header\r\n\r\nqubits 2 # two\r\n  Z0   # spaces\r\n\t X1\r\n# end");
        assert_eq!(h.sum.terms.len(), 2);
    }

    #[test]
    fn writer_output_is_readable_and_reads_back() {
        let mut h = PauliSum::new(3);
        h.constant = -1.5;
        h.add(ps(&[(0, Pauli::X), (1, Pauli::Y)]), 0.1 + 0.2);
        h.add(ps(&[(2, Pauli::Z)]), 1e-20);
        h.add(ps(&[(0, Pauli::Z)]), -3.0);
        let text = write_hamiltonian(&h, "line one\n\nline three");
        assert_eq!(
            text,
            "# line one\n#\n# line three\nqubits 3\n-1.5\n-3 Z0\n1e-20 Z2\n0.30000000000000004 X0 Y1\n"
        );
        assert_eq!(read(&text).sum, h);
    }

    /// The full reader alone (syntax tree and evaluator), for comparing with the fast path.
    fn read_full(src: &str) -> Result<HamRead, Vec<Diagnostic>> {
        let stmts = parse_statements("t.ham", src)?;
        let mut ev = Evaluator::new("t.ham", src);
        let encoding = ev.evaluate(&stmts, None)?;
        assert!(ev.fermion_terms.is_empty(), "a Pauli-only test file");
        ev.finish(encoding)
    }

    #[test]
    fn plain_lines_take_the_fast_path_only_when_it_means_the_same() {
        // Plain: taken, and equal to the full reader.
        for src in [
            "qubits 3\n0.5 X0 Z1\n-1.5\nZ2\n# c\n  -2.5e-3 Y0 Y1 # tail\n0.5 X0 Z1\n",
            "# header\n\nqubits 2\n1 X0 X0\n0 Z1\n",
        ] {
            let fast = plain_lines(src).expect("plain file");
            assert_eq!(Ok(fast), read_full(src), "{src}");
        }
        // Not plain (or needing a diagnostic): left to the full reader.
        for src in [
            "qubits 2\nlet J = 1\nJ * Z0\n",
            "qubits 2\nsum i in 0..2 { Z{i} }\n",
            "qubits 2\n0.5 X0 Y0\n",
            "qubits 2\n0.5 Z2\n",
            "qubits 2\n+0.5 Z1\n",
            "qubits 2\n0.5i Z1\n",
            "qubits 2\n0.5 Z01\n",
            "qubits 2\n1e400 Z1\n",
            "qubits 2\n0.5 Z0; 0.5 Z1\n",
            "qubits 2\nqubits 2\n",
            "Z0\n",
        ] {
            assert!(plain_lines(src).is_none(), "{src}");
        }
    }

    #[test]
    fn line_chunks_cut_only_after_line_ends() {
        // Multi-byte characters near every cut: a cut inside one would panic.
        let text: String = (0..500).map(|i| format!("{i} é ü # ß\n")).collect();
        for size in [1, 7, 64, 1000, 1 << 20] {
            let chunks = plain::line_chunks(&text, size);
            assert_eq!(chunks.concat(), text, "size {size}");
            assert!(chunks[..chunks.len() - 1].iter().all(|c| c.ends_with('\n')));
        }
        assert!(plain::line_chunks("", 8).is_empty());
    }

    #[test]
    fn the_fast_path_reads_files_of_many_pieces_like_the_full_reader() {
        // About 1 MB, so the body is read in several pieces (cut every 2^18 bytes); repeated
        // strings sit in different pieces, so their sums cross the cuts.
        let mut src = String::from("# many pieces\nqubits 150\n");
        for i in 0..60_000u64 {
            let q = (i * 7919) % 150;
            let r = (i * 104_729 + 3) % 150;
            let c = ((i % 17) as f64 - 8.0) * 0.125;
            src.push_str(&format!(
                "{c} X{q} Z{r}\n",
                r = if r == q { (r + 1) % 150 } else { r }
            ));
        }
        assert!(plain::line_chunks(&src, 1 << 18).len() >= 4);
        let fast = plain_lines(&src).expect("plain file");
        assert_eq!(Ok(fast), read_full(&src));
    }

    #[test]
    fn factors_on_one_qubit_multiply_in_the_order_written() {
        // Z X Z = −X (the Pauli relations ZX = iY and YZ = iX; Nielsen & Chuang, "Quantum
        // Computation and Quantum Information" (2000), §2.1.3, from memory): sorting the
        // factors of one qubit before multiplying would give +X.
        let src = "qubits 1\nZ0 X0 Z0\n";
        let full = read_full(src).expect("reads");
        assert_eq!(
            full.ham.sum.terms.values().copied().collect::<Vec<_>>(),
            vec![-1.0]
        );
        if let Some(fast) = plain_lines(src) {
            assert_eq!(fast, full);
        }
    }

    proptest::proptest! {
        /// Random plain files (repeats, same-qubit products, zeros, constants, comments) read
        /// the same by the fast path and the full reader, errors included.
        #[test]
        fn the_fast_path_equals_the_full_reader(
            n in 1usize..6,
            lines in proptest::collection::vec(
                (
                    proptest::option::of(-3i32..4),
                    proptest::collection::vec((0usize..8, 0usize..3), 0..4),
                    proptest::bool::ANY,
                ),
                0..12,
            ),
        ) {
            let mut src = format!("qubits {n}\n");
            for (c, fs, comment) in &lines {
                let mut line = match c {
                    Some(c) => format!("{}", f64::from(*c) * 0.25),
                    None => String::new(),
                };
                for (q, p) in fs {
                    line.push_str(&format!(" {}{q}", ['X', 'Y', 'Z'][*p]));
                }
                if *comment {
                    line.push_str(" # note");
                }
                src.push_str(line.trim_start());
                src.push('\n');
            }
            let full = read_full(&src);
            match plain_lines(&src) {
                Some(fast) => proptest::prop_assert_eq!(Ok(fast), full),
                // Declined only where a product on one qubit carries a phase ±i (left to the
                // evaluator, which decides whether the merged coefficient is real).
                None => proptest::prop_assert!(
                    full.is_err()
                        || lines.iter().any(|(_, fs, _)| {
                            fs.iter().enumerate().any(|(i, a)| {
                                fs[..i].iter().any(|b| b.0 == a.0 && b.1 != a.1)
                            })
                        }),
                    "declined a plain file that reads fine:\n{}", src
                ),
            }
        }
    }
}
