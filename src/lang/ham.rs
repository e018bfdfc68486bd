//! The `.ham` Hamiltonian language: a line-oriented text form of a qubit Hamiltonian.
//!
//! In: a file name and its source text. Out: a [`HamFile`] (a Hermitian [`PauliSum`] plus a
//! short summary) or every [`Diagnostic`] the reader could collect. The grammar is in
//! `grammar/hamiltonian.ebnf`; worked examples are in `grammar/README.md`.
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

use crate::fermion::encode::{map_product, Encoding};
use crate::fermion::{adjoint_ops, Ladder, LadderOp, ROUNDOFF_REL_TOL};
use crate::lang::diag::{Code, Diagnostic};
use crate::pauli::{Pauli, PauliString, PauliSum};
use nom::character::complete::{char, digit1};
use nom::combinator::cut;
use nom::error::{context, ContextError, ErrorKind, ParseError};
use nom::{IResult, Offset};
use num_complex::Complex64;
use rayon::iter::{IntoParallelRefIterator, ParallelIterator};
use rayon::slice::{ParallelSlice, ParallelSliceMut};
use std::cell::RefCell;
use std::collections::HashSet;

/// Largest `qubits N` (the Pauli strings' own bound; the Hadamard-test ancilla is one more
/// circuit qubit, not a bit of the strings).
pub const MAX_HAM_QUBITS: usize = crate::pauli::MAX_QUBITS;

/// Relative bound on the imaginary part of a merged coefficient (see the module notes).
pub const HERMITIAN_REL_TOL: f64 = 1e-12;

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

/// Reads a `.ham` source. `file` is only used in diagnostics.
/// Fermionic terms need an encoding: from an `encoding` line or from the caller; without
/// either, they are an error.
pub fn parse_hamiltonian(file: &str, src: &str) -> Result<HamFile, Vec<Diagnostic>> {
    parse_hamiltonian_with(file, src, None).map(|r| r.ham)
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

/// Reads a `.ham` source; `encoding` (e.g. from `--encoding`) applies to fermionic terms when
/// the file has no `encoding` line. A file line and a different `encoding` argument conflict;
/// a file that mixes Pauli and fermionic terms must carry its own `encoding` line.
pub fn parse_hamiltonian_with(
    file: &str,
    src: &str,
    encoding: Option<Encoding>,
) -> Result<HamRead, Vec<Diagnostic>> {
    if let Some(d) = crate::lang::diag::depth_guard(Code::HamLimit, file, src, "#") {
        return Err(vec![d]);
    }
    if let Some(read) = plain_lines(src) {
        return Ok(read);
    }
    let stmts = parse_statements(file, src)?;
    let mut ev = Evaluator::new(file, src);
    ev.flag_encoding = encoding;
    ev.run(&stmts);
    ev.finish()
}

/// The fast path for the files that programs write (`convert`, generated sums): `qubits N`,
/// then lines that are each an optional plain decimal coefficient and Pauli factors such as
/// `-0.25 X0 Y1 Z3`, with `#` comments. Such a line means exactly what the grammar says it
/// means, so it goes straight to the evaluator's accumulator (same merging, same checks in
/// `finish`) without a syntax tree. Anything else in the file (names, sums, expressions,
/// fermionic factors, an index out of range, a line that would need a diagnostic) returns
/// `None` and the whole file takes the full reader, which also owns every diagnostic.
fn plain_lines(src: &str) -> Option<HamRead> {
    // The header: the first line with code on it must be `qubits N`.
    let mut num_qubits = 0usize;
    let mut body_start = None;
    let mut offset = 0;
    for raw in src.split_inclusive('\n') {
        offset += raw.len();
        let line = raw.split('#').next().unwrap_or("").trim();
        if line.is_empty() {
            continue;
        }
        let count = line.strip_prefix("qubits ")?.trim();
        if !count.bytes().all(|b| b.is_ascii_digit()) {
            return None;
        }
        num_qubits = count.parse().ok()?;
        if num_qubits == 0 || num_qubits > MAX_HAM_QUBITS {
            return None;
        }
        body_start = Some(offset);
        break;
    }
    let body = &src[body_start?..];
    // Lines are independent, so the body is read in pieces cut at line ends, one per task, and
    // the pieces are joined in file order: the same list as one pass would give.
    let parts: Vec<Vec<(PauliString, f64)>> = line_chunks(body, 1 << 18)
        .par_iter()
        .map(|chunk| plain_chunk(chunk, num_qubits))
        .collect::<Option<_>>()?;
    let terms_read: usize = parts.iter().map(Vec::len).sum();
    if terms_read > MAX_TERMS {
        return None;
    }
    let mut terms: Vec<(PauliString, f64)> = Vec::with_capacity(terms_read);
    for part in parts {
        terms.extend(part);
    }
    crate::pauli::order::sort_by_string(&mut terms);
    let mut sum = PauliSum::new(num_qubits);
    let mut dropped_zero = 0;
    let mut kept: Vec<(PauliString, f64)> = Vec::with_capacity(terms.len());
    let mut it = terms.into_iter().peekable();
    while let Some((p, c)) = it.next() {
        let mut total = 0.0 + c;
        while it.peek().is_some_and(|(q, _)| *q == p) {
            total += it.next().map_or(0.0, |(_, c)| c);
        }
        if total == 0.0 {
            if !p.is_identity() {
                dropped_zero += 1;
            }
        } else if p.is_identity() {
            sum.constant = total;
        } else {
            kept.push((p, total));
        }
    }
    sum.terms = kept.into_iter().collect();
    Some(HamRead {
        ham: HamFile {
            sum,
            dropped_zero,
            terms_read,
        },
        encoding: None,
        fermionic_terms: 0,
    })
}

/// `text` cut into pieces of about `size` bytes, each ending at a line end (or the end of
/// `text`); the pieces concatenated give `text` back.
fn line_chunks(text: &str, size: usize) -> Vec<&str> {
    let mut chunks = Vec::with_capacity(text.len() / size + 1);
    let mut rest = text;
    while !rest.is_empty() {
        let cut = if rest.len() <= size {
            rest.len()
        } else {
            // Bytes, not chars: a cut lands just after a `\n`, always a char boundary.
            rest.as_bytes()[size..]
                .iter()
                .position(|&b| b == b'\n')
                .map_or(rest.len(), |i| size + i + 1)
        };
        let (head, tail) = rest.split_at(cut);
        chunks.push(head);
        rest = tail;
    }
    chunks
}

/// The terms of the plain lines in `chunk` (after the header), in line order; `None` when a
/// line is not plain (see [`plain_lines`]).
fn plain_chunk(chunk: &str, num_qubits: usize) -> Option<Vec<(PauliString, f64)>> {
    let mut terms = Vec::with_capacity(chunk.len() / 16 + 1);
    let mut factors: Vec<(usize, Pauli)> = Vec::with_capacity(8);
    for raw in chunk.split('\n') {
        let code = raw.split('#').next().unwrap_or("");
        let line = code.trim();
        if line.is_empty() {
            continue;
        }
        if terms.len() > MAX_TERMS {
            return None;
        }
        let mut words = line.split_ascii_whitespace().peekable();
        let first = *words.peek()?;
        let coeff = if first.as_bytes()[0].is_ascii_alphabetic() {
            1.0
        } else {
            words.next();
            let digits = first.strip_prefix('-').unwrap_or(first);
            // Only what the grammar's number rule reads: digits, `.`, an exponent.
            if digits.is_empty()
                || !digits.as_bytes()[0].is_ascii_digit()
                || !digits
                    .bytes()
                    .all(|b| b.is_ascii_digit() || matches!(b, b'.' | b'e' | b'E' | b'+' | b'-'))
            {
                return None;
            }
            let v: f64 = first.parse().ok()?;
            if !v.is_finite() {
                return None;
            }
            v
        };
        factors.clear();
        for w in words {
            let b = w.as_bytes();
            let p = match b[0] {
                b'X' => Pauli::X,
                b'Y' => Pauli::Y,
                b'Z' => Pauli::Z,
                _ => return None,
            };
            let digits = &w[1..];
            if digits.is_empty()
                || (digits.len() > 1 && digits.starts_with('0'))
                || !digits.bytes().all(|d| d.is_ascii_digit())
            {
                return None;
            }
            let q: usize = digits.parse().ok()?;
            if q >= num_qubits {
                return None;
            }
            factors.push((q, p));
        }
        let (phase, p) = PauliString::from_factors(&factors);
        // A product on one qubit with a phase ±i: the merged coefficient may or may not be
        // real, which the evaluator decides (with a diagnostic when it is not).
        if phase != Complex64::new(1.0, 0.0) {
            return None;
        }
        terms.push((p, coeff));
    }
    Some(terms)
}

/// Writes `h` in the `.ham` language: `header_comment` as `#` lines, `qubits N`, the constant
/// as a bare number, then one line per Pauli string (by weight, then by qubits). Reading the text back gives
/// exactly `h` (coefficients use Rust's shortest round-trip formatting).
pub fn write_hamiltonian(h: &PauliSum, header_comment: &str) -> String {
    let mut out = String::new();
    for line in header_comment.lines() {
        if line.is_empty() {
            out.push_str("#\n");
        } else {
            out.push_str("# ");
            out.push_str(line);
            out.push('\n');
        }
    }
    out.push_str(&format!("qubits {}\n", h.num_qubits));
    if h.constant != 0.0 {
        out.push_str(&format_coefficient(h.constant));
        out.push('\n');
    }
    // Readable order: by weight, then by (qubit, letter) sequence. Strings are distinct, so an
    // unstable sort gives the same order.
    type Keyed = (smallvec::SmallVec<[(usize, char); 4]>, f64);
    let mut terms: Vec<Keyed> = h
        .terms
        .iter()
        .map(|(p, c)| {
            let key = p.support_iter().map(|q| (q, p.get(q).letter())).collect();
            (key, *c)
        })
        .collect();
    terms.par_sort_unstable_by(|a, b| a.0.len().cmp(&b.0.len()).then_with(|| a.0.cmp(&b.0)));
    // Lines are formatted in pieces, one per task, and joined in order: the same text as one
    // pass would write.
    let pieces: Vec<String> = terms
        .par_chunks(1 << 14)
        .map(|chunk| {
            let mut piece = String::with_capacity(chunk.len() * 24);
            let mut digits = itoa::Buffer::new();
            for (key, c) in chunk {
                push_coefficient(&mut piece, *c);
                for (q, letter) in key {
                    piece.push(' ');
                    piece.push(*letter);
                    piece.push_str(digits.format(*q));
                }
                piece.push('\n');
            }
            piece
        })
        .collect();
    out.reserve(pieces.iter().map(String::len).sum());
    for piece in &pieces {
        out.push_str(piece);
    }
    out
}

/// Appends [`format_coefficient`]'s text for `c` to `out` without an intermediate string.
fn push_coefficient(out: &mut String, c: f64) {
    use std::fmt::Write;
    let a = c.abs();
    let _ = if c != 0.0 && !(1e-4..1e15).contains(&a) {
        write!(out, "{c:e}")
    } else {
        write!(out, "{c}")
    };
}

/// Shortest round-trip text of a coefficient; scientific notation outside `[1e-4, 1e15)`.
pub fn format_coefficient(c: f64) -> String {
    let a = c.abs();
    if c != 0.0 && !(1e-4..1e15).contains(&a) {
        format!("{c:e}")
    } else {
        format!("{c}")
    }
}

// ---------------------------------------------------------------------------------------------
// Syntax tree
// ---------------------------------------------------------------------------------------------

/// Byte range `[start, end)` in the source.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
struct Span {
    start: usize,
    end: usize,
}

impl Span {
    fn len(self) -> usize {
        self.end.saturating_sub(self.start)
    }
    fn to(self, other: Span) -> Span {
        Span {
            start: self.start,
            end: other.end,
        }
    }
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Op {
    Add,
    Sub,
    Mul,
    Div,
    Rem,
}

#[derive(Clone, Debug)]
enum Expr {
    Num {
        value: f64,
        imag: bool,
        integer: bool,
        span: Span,
    },
    Name {
        name: String,
        span: Span,
    },
    Neg {
        inner: Box<Expr>,
        span: Span,
    },
    Paren {
        inner: Box<Expr>,
        span: Span,
    },
    Bin {
        op: Op,
        lhs: Box<Expr>,
        rhs: Box<Expr>,
        op_span: Span,
    },
}

impl Expr {
    fn span(&self) -> Span {
        match self {
            Expr::Num { span, .. }
            | Expr::Name { span, .. }
            | Expr::Neg { span, .. }
            | Expr::Paren { span, .. } => *span,
            Expr::Bin { lhs, rhs, .. } => lhs.span().to(rhs.span()),
        }
    }
}

/// What a factor is: a Pauli letter on a qubit, or a fermionic operator on a mode.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum FactorKind {
    Pauli(Pauli),
    /// `cr{k}`: creation `a†_k`.
    Create,
    /// `an{k}`: annihilation `a_k`.
    Annihilate,
    /// `n{k}`: number operator `a†_k a_k`.
    Number,
}

#[derive(Clone, Debug)]
struct Factor {
    kind: FactorKind,
    index: Expr,
    span: Span,
}

#[derive(Clone, Debug)]
struct Term {
    coeff: Option<Expr>,
    factors: Vec<Factor>,
    hc: bool,
    span: Span,
}

#[derive(Clone, Debug)]
enum Stmt {
    Qubits {
        count: u64,
        count_span: Span,
        span: Span,
    },
    Let {
        name: String,
        name_span: Span,
        value: Expr,
        span: Span,
    },
    Sum {
        var: String,
        var_span: Span,
        lo: Expr,
        hi: Expr,
        body: Vec<Stmt>,
        header: Span,
    },
    Encoding {
        encoding: Encoding,
        span: Span,
    },
    Term(Term),
}

impl Stmt {
    fn span(&self) -> Span {
        match self {
            Stmt::Qubits { span, .. } | Stmt::Let { span, .. } | Stmt::Encoding { span, .. } => {
                *span
            }
            Stmt::Sum { header, .. } => *header,
            Stmt::Term(t) => t.span,
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Parser errors
// ---------------------------------------------------------------------------------------------

/// A nom error that remembers where it happened, the innermost `context` label and, for errors
/// raised by hand, the exact message, hint and caret width.
#[derive(Clone, Debug)]
struct PErr<'a> {
    at: &'a str,
    expected: Option<&'static str>,
    custom: Option<(Code, String, Option<String>, usize)>,
}

impl<'a> ParseError<&'a str> for PErr<'a> {
    fn from_error_kind(input: &'a str, _kind: ErrorKind) -> Self {
        PErr {
            at: input,
            expected: None,
            custom: None,
        }
    }
    fn append(_input: &'a str, _kind: ErrorKind, other: Self) -> Self {
        other
    }
    fn or(self, other: Self) -> Self {
        // Keep the error that got further into the input.
        if other.at.len() < self.at.len() {
            other
        } else {
            self
        }
    }
}

impl<'a> ContextError<&'a str> for PErr<'a> {
    fn add_context(_input: &'a str, ctx: &'static str, mut other: Self) -> Self {
        if other.expected.is_none() && other.custom.is_none() {
            other.expected = Some(ctx);
        }
        other
    }
}

type PResult<'a, T> = IResult<&'a str, T, PErr<'a>>;

fn fail<'a, T>(
    code: Code,
    at: &'a str,
    len: usize,
    msg: impl Into<String>,
    hint: &str,
) -> PResult<'a, T> {
    Err(nom::Err::Failure(PErr {
        at,
        expected: None,
        custom: Some((code, msg.into(), Some(hint.to_string()), len)),
    }))
}

fn backtrack<T>(at: &str) -> PResult<'_, T> {
    Err(nom::Err::Error(PErr::from_error_kind(
        at,
        ErrorKind::Verify,
    )))
}

// Context labels (the "expected ..." part of a message) and their hints.
const L_QUBITS: &str = "the number of qubits";
const L_LET_NAME: &str = "a name after `let`";
const L_EQUALS: &str = "`=` after the name";
const L_VALUE: &str = "a value after `=`";
const L_LOOP_VAR: &str = "a loop variable after `sum`";
const L_IN: &str = "`in` after the loop variable";
const L_RANGE_LO: &str = "the start of the range";
const L_DOTS: &str = "`..` between the range bounds";
const L_RANGE_HI: &str = "the end of the range";
const L_OPEN: &str = "`{` opening the sum body";
const L_OPERAND: &str = "a number, a name or `(`";
const L_CLOSE_PAREN: &str = "`)`";
const L_INDEX: &str = "a qubit index";
const L_CLOSE_INDEX: &str = "`}` closing the qubit index";
const L_STATEMENT: &str = "a term, `let` or `sum`";
const L_ENCODING: &str = "`jw` or `bk` after `encoding`";

fn hint_for(label: &str) -> &'static str {
    match label {
        L_QUBITS => "start the file with e.g. `qubits 8`",
        L_LET_NAME | L_EQUALS | L_VALUE => "a constant is written `let J = 1.0`",
        L_LOOP_VAR | L_IN | L_RANGE_LO | L_DOTS | L_RANGE_HI | L_OPEN => {
            "a sum is written `sum i in 0..8 { -J * Z{i} Z{(i+1) % 8} }`"
        }
        L_OPERAND => {
            "coefficients are arithmetic over numbers and `let` names: + - * / and parentheses"
        }
        L_CLOSE_PAREN => "every `(` needs a matching `)`",
        L_ENCODING => "`encoding jw` (Jordan–Wigner) or `encoding bk` (Bravyi–Kitaev)",
        L_INDEX | L_CLOSE_INDEX => {
            "a factor's qubit is a number (`X3`) or an index expression in braces (`Z{(i+1) % 8}`)"
        }
        _ => "a term is a coefficient followed by Pauli factors, e.g. `0.25 X0 Y1 Z3`",
    }
}

// ---------------------------------------------------------------------------------------------
// Lexical helpers
// ---------------------------------------------------------------------------------------------

/// Skips spaces, tabs and carriage returns (newlines are significant).
fn sp(i: &str) -> &str {
    i.trim_start_matches([' ', '\t', '\r'])
}

fn is_ident_start(c: char) -> bool {
    c.is_ascii_alphabetic() || c == '_'
}

fn is_ident_char(c: char) -> bool {
    c.is_ascii_alphanumeric() || c == '_'
}

/// Length in bytes of the identifier at the start of `i` (0 if none).
fn ident_len(i: &str) -> usize {
    match i.chars().next() {
        Some(c) if is_ident_start(c) => i.find(|c: char| !is_ident_char(c)).unwrap_or(i.len()),
        _ => 0,
    }
}

fn ident(i: &str) -> PResult<'_, &str> {
    let n = ident_len(i);
    if n == 0 {
        backtrack(i)
    } else {
        Ok((&i[n..], &i[..n]))
    }
}

const KEYWORDS: [&str; 5] = ["qubits", "let", "sum", "in", "encoding"];

/// If `i` starts with a factor (`X3`, `Y{...}`, `cr{k}`, `an2`, `n{k}`), its kind and the
/// length of its letters. A factor is its letters followed by `{`, or by digits that end the
/// identifier.
fn factor_head(i: &str) -> Option<(FactorKind, usize)> {
    let letters = i
        .find(|c: char| !c.is_ascii_alphabetic())
        .unwrap_or(i.len());
    let kind = match &i[..letters] {
        "X" => FactorKind::Pauli(Pauli::X),
        "Y" => FactorKind::Pauli(Pauli::Y),
        "Z" => FactorKind::Pauli(Pauli::Z),
        "cr" => FactorKind::Create,
        "an" => FactorKind::Annihilate,
        "n" => FactorKind::Number,
        _ => return None,
    };
    let rest = &i[letters..];
    if rest.starts_with('{') {
        return Some((kind, letters));
    }
    let digits = rest
        .find(|c: char| !c.is_ascii_digit())
        .unwrap_or(rest.len());
    let after = rest[digits..].chars().next();
    if digits > 0 && !after.is_some_and(is_ident_char) {
        Some((kind, letters))
    } else {
        None
    }
}

fn is_factor_start(i: &str) -> bool {
    factor_head(i).is_some()
}

/// True when `name` is spelled like a factor (`X12`) and so cannot name a constant.
fn is_factor_name(name: &str) -> bool {
    factor_head(name).is_some()
}

/// Numeric literal: `12`, `0.25`, `1.`, `.5`, `1e-3`, `2.5E+2`, optionally with an `i` suffix
/// (imaginary). A `.` directly followed by another `.` is left for the range operator.
fn number(i: &str) -> PResult<'_, (f64, bool, bool, &str)> {
    let b = i.as_bytes();
    let digits_from = |mut k: usize| {
        while k < b.len() && b[k].is_ascii_digit() {
            k += 1;
        }
        k
    };
    let mut k = digits_from(0);
    let int_digits = k;
    let mut integer = true;
    if k < b.len() && b[k] == b'.' && !(k + 1 < b.len() && b[k + 1] == b'.') {
        let m = digits_from(k + 1);
        if int_digits == 0 && m == k + 1 {
            return backtrack(i);
        }
        k = m;
        integer = false;
    }
    if k == 0 {
        return backtrack(i);
    }
    if k < b.len() && (b[k] == b'e' || b[k] == b'E') {
        let mut m = k + 1;
        if m < b.len() && (b[m] == b'+' || b[m] == b'-') {
            m += 1;
        }
        let end = digits_from(m);
        if end > m {
            k = end;
            integer = false;
        }
    }
    let value: f64 = match i[..k].parse() {
        Ok(v) => v,
        Err(_) => return backtrack(i),
    };
    let mut imag = false;
    if k < b.len() && b[k] == b'i' && !i[k + 1..].chars().next().is_some_and(is_ident_char) {
        imag = true;
        k += 1;
    }
    Ok((&i[k..], (value, imag, integer, &i[..k])))
}

/// A short description of what stands at `i`, and its width in bytes.
fn describe(i: &str) -> (String, usize) {
    let Some(c) = i.chars().next() else {
        return ("end of file".into(), 0);
    };
    if c == '\n' || c == '\r' {
        return ("end of line".into(), 0);
    }
    if c == '#' {
        return ("a comment".into(), 1);
    }
    let n = ident_len(i);
    if n > 0 {
        return (format!("`{}`", &i[..n]), n);
    }
    if let Ok((_, (_, _, _, lex))) = number(i) {
        return (format!("`{lex}`"), lex.len());
    }
    (format!("`{c}`"), c.len_utf8())
}

/// Rest of the input after the current line (the newline included).
fn skip_line(i: &str) -> &str {
    match i.find('\n') {
        Some(k) => &i[k + 1..],
        None => "",
    }
}

/// Skips blank space, comments, newlines and, inside a sum body, `;` separators.
fn skip_separators(mut i: &str, in_body: bool) -> &str {
    loop {
        let j = sp(i);
        if let Some(r) = j.strip_prefix('\n') {
            i = r;
        } else if j.starts_with('#') {
            i = j.find('\n').map_or("", |k| &j[k..]);
        } else if in_body && j.starts_with(';') {
            i = &j[1..];
        } else {
            return j;
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Parser: one method per production, bottom-up
// ---------------------------------------------------------------------------------------------

struct Parser<'a> {
    src: &'a str,
    /// Errors recorded while recovering (sum bodies).
    errors: RefCell<Vec<PErr<'a>>>,
}

impl<'a> Parser<'a> {
    fn span(&self, from: &'a str, to: &'a str) -> Span {
        Span {
            start: self.src.offset(from),
            end: self.src.offset(to),
        }
    }

    fn span_len(&self, at: &'a str, len: usize) -> Span {
        let start = self.src.offset(at);
        Span {
            start,
            end: start + len,
        }
    }

    // expr    = product { ("+" | "-") product }
    fn expr(&self, i: &'a str) -> PResult<'a, Expr> {
        let (mut i, mut lhs) = self.product(i)?;
        loop {
            let j = sp(i);
            let op = match j.chars().next() {
                Some('+') => Op::Add,
                Some('-') => Op::Sub,
                _ => break,
            };
            let after = sp(&j[1..]);
            if op == Op::Add && after.starts_with("h.c.") {
                break;
            }
            let (rest, rhs) = context(L_OPERAND, cut(|x| self.product(x)))(after)?;
            lhs = Expr::Bin {
                op,
                lhs: Box::new(lhs),
                rhs: Box::new(rhs),
                op_span: self.span_len(j, 1),
            };
            i = rest;
        }
        Ok((i, lhs))
    }

    // product = unary { ("*" | "/" | "%") unary }   (a "*" before a factor ends the coefficient)
    fn product(&self, i: &'a str) -> PResult<'a, Expr> {
        let (mut i, mut lhs) = self.unary(i)?;
        loop {
            let j = sp(i);
            let op = match j.chars().next() {
                Some('*') => Op::Mul,
                Some('/') => Op::Div,
                Some('%') => Op::Rem,
                _ => break,
            };
            let after = sp(&j[1..]);
            if op == Op::Mul && is_factor_start(after) {
                break;
            }
            let (rest, rhs) = context(L_OPERAND, cut(|x| self.unary(x)))(after)?;
            lhs = Expr::Bin {
                op,
                lhs: Box::new(lhs),
                rhs: Box::new(rhs),
                op_span: self.span_len(j, 1),
            };
            i = rest;
        }
        Ok((i, lhs))
    }

    // unary   = ("-" | "+") unary | atom
    fn unary(&self, i: &'a str) -> PResult<'a, Expr> {
        if let Some(r) = i.strip_prefix('-') {
            if is_factor_start(sp(r)) {
                // `-X0` reads as `-1 X0`.
                let one = Expr::Num {
                    value: 1.0,
                    imag: false,
                    integer: true,
                    span: self.span_len(i, 1),
                };
                let span = self.span_len(i, 1);
                return Ok((
                    r,
                    Expr::Neg {
                        inner: Box::new(one),
                        span,
                    },
                ));
            }
            let (rest, inner) = context(L_OPERAND, cut(|x| self.unary(x)))(sp(r))?;
            let span = self.span(i, rest);
            return Ok((
                rest,
                Expr::Neg {
                    inner: Box::new(inner),
                    span,
                },
            ));
        }
        if let Some(r) = i.strip_prefix('+') {
            return context(L_OPERAND, cut(|x| self.unary(x)))(sp(r));
        }
        self.atom(i)
    }

    // atom    = number | name | "(" expr ")"
    fn atom(&self, i: &'a str) -> PResult<'a, Expr> {
        if let Some(r) = i.strip_prefix('(') {
            let (r, inner) = context(L_OPERAND, cut(|x| self.expr(x)))(sp(r))?;
            let (r, _) = context(L_CLOSE_PAREN, cut(char(')')))(sp(r))?;
            let span = self.span(i, r);
            return Ok((
                r,
                Expr::Paren {
                    inner: Box::new(inner),
                    span,
                },
            ));
        }
        if let Ok((r, (value, imag, integer, _))) = number(i) {
            let span = self.span(i, r);
            return Ok((
                r,
                Expr::Num {
                    value,
                    imag,
                    integer,
                    span,
                },
            ));
        }
        if is_factor_start(i) {
            return backtrack(i);
        }
        let (r, name) = ident(i)?;
        Ok((
            r,
            Expr::Name {
                name: name.to_string(),
                span: self.span(i, r),
            },
        ))
    }

    // factor  = ("X" | "Y" | "Z" | "cr" | "an" | "n") (digits | "{" expr "}")
    fn factor(&self, i: &'a str) -> PResult<'a, Factor> {
        let Some((kind, n)) = factor_head(i) else {
            return backtrack(i);
        };
        let after = &i[n..];
        let (rest, index) = if let Some(r) = after.strip_prefix('{') {
            let (r, e) = context(L_INDEX, cut(|x| self.expr(x)))(sp(r))?;
            let (r, _) = context(L_CLOSE_INDEX, cut(char('}')))(sp(r))?;
            (r, e)
        } else {
            let (r, d) = digit1(after)?;
            let value = d.parse::<f64>().unwrap_or(f64::INFINITY);
            let span = self.span(after, r);
            (
                r,
                Expr::Num {
                    value,
                    imag: false,
                    integer: true,
                    span,
                },
            )
        };
        Ok((
            rest,
            Factor {
                kind,
                index,
                span: self.span(i, rest),
            },
        ))
    }

    // term    = coefficient ["*"] {factor} ["+" "h.c."] | factor {factor} ["+" "h.c."]
    fn term(&self, start: &'a str) -> PResult<'a, Term> {
        let (mut i, coeff) = if is_factor_start(start) {
            (start, None)
        } else {
            match self.expr(start) {
                Ok((r, e)) => (r, Some(e)),
                Err(nom::Err::Error(_)) => (start, None),
                Err(e) => return Err(e),
            }
        };
        if coeff.is_some() {
            if let Some(r) = sp(i).strip_prefix('*') {
                // `product` leaves a `*` only when a factor follows it.
                i = sp(r);
            }
        }
        let mut factors = Vec::new();
        loop {
            let j = sp(i);
            if !is_factor_start(j) {
                break;
            }
            let (r, f) = self.factor(j)?;
            factors.push(f);
            i = r;
        }
        if coeff.is_none() && factors.is_empty() {
            return backtrack(start);
        }
        let mut hc = false;
        if let Some(r) = sp(i).strip_prefix('+') {
            if let Some(r) = sp(r).strip_prefix("h.c.") {
                hc = true;
                i = r;
            }
        }
        Ok((
            i,
            Term {
                coeff,
                factors,
                hc,
                span: self.span(start, i),
            },
        ))
    }

    /// A name for `let` or a loop variable: not a keyword, not spelled like a factor.
    fn new_name(&self, i: &'a str, label: &'static str) -> PResult<'a, (String, Span)> {
        let (r, name) = context(label, cut(ident))(i)?;
        if KEYWORDS.contains(&name) {
            return fail(
                Code::HamName,
                i,
                name.len(),
                format!("`{name}` is a keyword and cannot be used as a name"),
                "pick another name",
            );
        }
        if is_factor_name(name) {
            return fail(
                Code::HamName,
                i,
                name.len(),
                format!("`{name}` is spelled like a factor and cannot be used as a name"),
                "names may not be X, Y, Z, cr, an or n followed by digits; pick e.g. `x1`",
            );
        }
        Ok((r, (name.to_string(), self.span(i, r))))
    }

    // qubits  = "qubits" integer
    fn qubits(&self, kw: &'a str, r: &'a str) -> PResult<'a, Stmt> {
        let at = sp(r);
        let (r, d) = context(L_QUBITS, cut(digit1))(at)?;
        let count = d.parse::<u64>().unwrap_or(u64::MAX);
        Ok((
            r,
            Stmt::Qubits {
                count,
                count_span: self.span(at, r),
                span: self.span(kw, r),
            },
        ))
    }

    // encoding = "encoding" ("jw" | "bk")
    fn encoding(&self, kw: &'a str, r: &'a str) -> PResult<'a, Stmt> {
        let at = sp(r);
        let (r, word) = context(L_ENCODING, cut(ident))(at)?;
        let encoding = match word.parse::<Encoding>() {
            Ok(e) => e,
            Err(_) => {
                return fail(
                    Code::HamUnknownWord,
                    at,
                    word.len(),
                    format!("unknown encoding `{word}`"),
                    hint_for(L_ENCODING),
                )
            }
        };
        Ok((
            r,
            Stmt::Encoding {
                encoding,
                span: self.span(kw, r),
            },
        ))
    }

    // let     = "let" name "=" expr
    fn let_stmt(&self, kw: &'a str, r: &'a str) -> PResult<'a, Stmt> {
        let (r, (name, name_span)) = self.new_name(sp(r), L_LET_NAME)?;
        let (r, _) = context(L_EQUALS, cut(char('=')))(sp(r))?;
        let (r, value) = context(L_VALUE, cut(|x| self.expr(x)))(sp(r))?;
        Ok((
            r,
            Stmt::Let {
                name,
                name_span,
                value,
                span: self.span(kw, r),
            },
        ))
    }

    // sum     = "sum" name "in" expr ".." expr "{" body "}"
    fn sum(&self, kw: &'a str, r: &'a str) -> PResult<'a, Stmt> {
        let (r, (var, var_span)) = self.new_name(sp(r), L_LOOP_VAR)?;
        let at = sp(r);
        let (r, word) = context(L_IN, cut(ident))(at)?;
        if word != "in" {
            return fail(
                Code::HamSyntax,
                at,
                word.len(),
                format!("expected {L_IN}, found `{word}`"),
                hint_for(L_IN),
            );
        }
        let (r, lo) = context(L_RANGE_LO, cut(|x| self.expr(x)))(sp(r))?;
        let r = sp(r);
        let r = match r.strip_prefix("..") {
            Some(r) => r,
            None => return context(L_DOTS, cut(backtrack))(r),
        };
        let (r, hi) = context(L_RANGE_HI, cut(|x| self.expr(x)))(sp(r))?;
        let open = sp(r);
        let (body_start, _) = context(L_OPEN, cut(char('{')))(open)?;
        let header = self.span(kw, body_start);
        let (rest, body) = self.body(open, body_start)?;
        Ok((
            rest,
            Stmt::Sum {
                var,
                var_span,
                lo,
                hi,
                body,
                header,
            },
        ))
    }

    /// Items of a sum body up to the matching `}`; errors inside are recorded and skipped.
    fn body(&self, open: &'a str, mut i: &'a str) -> PResult<'a, Vec<Stmt>> {
        let mut items = Vec::new();
        loop {
            i = skip_separators(i, true);
            if i.is_empty() {
                self.errors.borrow_mut().push(PErr {
                    at: open,
                    expected: None,
                    custom: Some((
                        Code::HamSyntax,
                        "unclosed `{`: the sum body never ends".into(),
                        Some("close the sum body with `}`".into()),
                        1,
                    )),
                });
                return Ok(("", items));
            }
            if let Some(r) = i.strip_prefix('}') {
                return Ok((r, items));
            }
            match self.statement(i, false).and_then(|(r, s)| {
                let r = self.end_of_item(r, true)?;
                Ok((r, s))
            }) {
                Ok((r, s)) => {
                    items.push(s);
                    i = r;
                }
                Err(nom::Err::Error(e)) | Err(nom::Err::Failure(e)) => {
                    i = recover_in_body(e.at);
                    self.errors.borrow_mut().push(e);
                }
                Err(nom::Err::Incomplete(_)) => unreachable!("complete parsers only"),
            }
        }
    }

    // statement = qubits | let | sum | term
    fn statement(&self, i: &'a str, top: bool) -> PResult<'a, Stmt> {
        if let Ok((r, word)) = ident(i) {
            match word {
                "qubits" if top => return self.qubits(i, r),
                "qubits" => {
                    return fail(
                        Code::HamSyntax,
                        i,
                        word.len(),
                        "`qubits` cannot appear inside a sum",
                        "declare `qubits N` once, on the first line of the file",
                    )
                }
                "encoding" if top => return self.encoding(i, r),
                "encoding" => {
                    return fail(
                        Code::HamSyntax,
                        i,
                        word.len(),
                        "`encoding` cannot appear inside a sum",
                        "declare the encoding once, at the top level, e.g. `encoding jw`",
                    )
                }
                "let" => return self.let_stmt(i, r),
                "sum" => return self.sum(i, r),
                _ => {}
            }
        }
        let (r, t) = context(L_STATEMENT, cut(|x| self.term(x)))(i)?;
        Ok((r, Stmt::Term(t)))
    }

    /// After a statement: optional comment, then end of line (or `;` / `}` inside a body).
    fn end_of_item(&self, r: &'a str, in_body: bool) -> Result<&'a str, nom::Err<PErr<'a>>> {
        let j = sp(r);
        let j = if j.starts_with('#') {
            j.find('\n').map_or("", |k| &j[k..])
        } else {
            j
        };
        if j.is_empty() {
            return Ok(j);
        }
        if let Some(rest) = j.strip_prefix('\n') {
            return Ok(rest);
        }
        if in_body && (j.starts_with(';') || j.starts_with('}')) {
            return Ok(j);
        }
        let (found, len) = describe(j);
        let c = j.chars().next().unwrap_or(' ');
        let err = if c == ';' {
            fail::<()>(
                Code::HamSyntax,
                j,
                1,
                "`;` separates terms only inside a sum body",
                "put each top-level term on its own line",
            )
        } else if c == '}' {
            fail(
                Code::HamSyntax,
                j,
                1,
                "unmatched `}`",
                "a `}` closes a `sum ... {` body",
            )
        } else if c == '*' || c == '/' || number(j).is_ok() {
            fail(
                Code::HamSyntax,
                j,
                len,
                format!("unexpected {found} after the factors"),
                "the coefficient comes first: write `0.5 X0 Z1`, not `X0 Z1 * 0.5`",
            )
        } else if c == '+' || c == '-' {
            fail(
                Code::HamSyntax,
                j,
                len,
                format!("unexpected {found}: one term per line"),
                "write each term on its own line (inside a sum, `;` also separates terms)",
            )
        } else if ident_len(j) > 0 {
            fail(Code::HamUnknownWord,
                j,
                len,
                format!("unknown factor {found}"),
                "factors are X, Y, Z (Pauli) or cr, an, n (fermionic) glued to an index, e.g. `X3`, `Z{i+1}`, `cr{k}`",
            )
        } else {
            fail(
                Code::HamSyntax,
                j,
                len,
                format!("unexpected {found}"),
                "a term is a coefficient followed by Pauli factors, e.g. `0.25 X0 Y1 Z3`",
            )
        };
        Err(err.unwrap_err())
    }

    /// The whole file: statements one per line; errors are collected line by line.
    fn file(&self) -> Vec<Stmt> {
        let mut stmts = Vec::new();
        let mut i = self.src;
        loop {
            i = skip_separators(i, false);
            if i.is_empty() {
                break;
            }
            let parsed = if i.starts_with('}') || i.starts_with(';') {
                self.end_of_item(i, false).map(|r| (r, None))
            } else {
                self.statement(i, true).and_then(|(r, s)| {
                    let r = self.end_of_item(r, false)?;
                    Ok((r, Some(s)))
                })
            };
            match parsed {
                Ok((r, s)) => {
                    stmts.extend(s);
                    i = r;
                }
                Err(nom::Err::Error(e)) | Err(nom::Err::Failure(e)) => {
                    i = skip_line(e.at);
                    self.errors.borrow_mut().push(e);
                }
                Err(nom::Err::Incomplete(_)) => unreachable!("complete parsers only"),
            }
        }
        stmts
    }
}

/// Where to resume inside a sum body after an error at `at`: the next line, or the body's
/// closing `}` when it ends the current line.
fn recover_in_body(at: &str) -> &str {
    let line_end = at.find('\n').unwrap_or(at.len());
    let line = &at[..line_end];
    let code = line.split('#').next().unwrap_or("").trim_end();
    if code.ends_with('}') {
        let k = code.len() - 1;
        // Resume at the `}` only if it is not the end of a braced index (`Z{i}`).
        let opens = code.matches('{').count();
        let closes = code.matches('}').count();
        if closes > opens {
            return &at[k..];
        }
    }
    skip_line(at)
}

fn perr_to_diag(file: &str, src: &str, e: &PErr<'_>) -> Diagnostic {
    let offset = src.offset(e.at);
    match &e.custom {
        Some((code, msg, hint, len)) => {
            Diagnostic::at(*code, file, src, offset, *len, msg.clone(), hint.clone())
        }
        None => {
            let (found, len) = describe(e.at);
            match e.expected {
                Some(label) => Diagnostic::at(
                    Code::HamSyntax,
                    file,
                    src,
                    offset,
                    len,
                    format!("expected {label}, found {found}"),
                    Some(hint_for(label).to_string()),
                ),
                None => Diagnostic::at(
                    Code::HamSyntax,
                    file,
                    src,
                    offset,
                    len,
                    format!("unexpected {found}"),
                    Some(hint_for("").to_string()),
                ),
            }
        }
    }
}

fn parse_statements(file: &str, src: &str) -> Result<Vec<Stmt>, Vec<Diagnostic>> {
    let p = Parser {
        src,
        errors: RefCell::new(Vec::new()),
    };
    let stmts = p.file();
    let errors = p.errors.into_inner();
    if errors.is_empty() {
        return Ok(stmts);
    }
    let mut seen = HashSet::new();
    let mut diags: Vec<(usize, Diagnostic)> = errors
        .iter()
        .filter(|e| seen.insert(src.offset(e.at)))
        .map(|e| (src.offset(e.at), perr_to_diag(file, src, e)))
        .collect();
    diags.sort_by_key(|(o, _)| *o);
    Err(diags.into_iter().map(|(_, d)| d).collect())
}

// ---------------------------------------------------------------------------------------------
// Evaluator
// ---------------------------------------------------------------------------------------------

#[derive(Clone, Copy, Debug)]
enum Val {
    Int(i64),
    Num(Complex64),
    /// A name whose definition failed (already reported); uses of it stay silent.
    Poison,
}

/// An evaluation error; `None` message means "already reported, stay silent".
struct EvalErr {
    span: Span,
    msg: Option<(Code, String, String)>,
}

impl EvalErr {
    fn new(code: Code, span: Span, msg: impl Into<String>, hint: impl Into<String>) -> EvalErr {
        EvalErr {
            span,
            msg: Some((code, msg.into(), hint.into())),
        }
    }
    fn silent(span: Span) -> EvalErr {
        EvalErr { span, msg: None }
    }
}

/// Contributions merged into one Pauli string.
struct Acc {
    sum: Complex64,
    magnitude: f64,
    first: Span,
    /// Some contribution came from a Pauli term (not from a mapped fermionic term).
    from_pauli: bool,
}

/// A fermionic term waiting for the encoding: coefficient, ladder operators, `+ h.c.`, span.
struct FermionTerm {
    coeff: Complex64,
    ops: Vec<LadderOp>,
    hc: bool,
    span: Span,
}

struct Evaluator<'s> {
    file: &'s str,
    src: &'s str,
    num_qubits: usize,
    scope: Vec<(String, Val, Span)>,
    diags: Vec<(usize, Diagnostic)>,
    reported: HashSet<usize>,
    acc: rustc_hash::FxHashMap<PauliString, Acc>,
    terms_read: usize,
    steps: usize,
    /// Errors met so far, repeats at one position included (see [`MAX_EVAL_ERRORS`]).
    errors: usize,
    aborted: bool,
    flag_encoding: Option<Encoding>,
    file_encoding: Option<(Encoding, Span)>,
    fermion_terms: Vec<FermionTerm>,
    fermion_terms_read: usize,
    first_pauli_term: Option<Span>,
}

fn fmt_complex(c: Complex64) -> String {
    if c.im == 0.0 {
        format!("{}", c.re)
    } else if c.re == 0.0 {
        format!("{}i", c.im)
    } else if c.im < 0.0 {
        format!("{}-{}i", c.re, -c.im)
    } else {
        format!("{}+{}i", c.re, c.im)
    }
}

impl<'s> Evaluator<'s> {
    fn new(file: &'s str, src: &'s str) -> Evaluator<'s> {
        Evaluator {
            file,
            src,
            num_qubits: 0,
            scope: Vec::new(),
            diags: Vec::new(),
            reported: HashSet::new(),
            acc: rustc_hash::FxHashMap::default(),
            terms_read: 0,
            steps: 0,
            errors: 0,
            aborted: false,
            flag_encoding: None,
            file_encoding: None,
            fermion_terms: Vec::new(),
            fermion_terms_read: 0,
            first_pauli_term: None,
        }
    }

    fn text(&self, s: Span) -> &str {
        &self.src[s.start..s.end]
    }

    fn report(&mut self, e: EvalErr) {
        self.errors += 1;
        if let Some((code, msg, hint)) = e.msg {
            if self.reported.insert(e.span.start) {
                let d = Diagnostic::at(
                    code,
                    self.file,
                    self.src,
                    e.span.start,
                    e.span.len(),
                    msg,
                    Some(hint),
                );
                self.diags.push((e.span.start, d));
            }
        }
        // Stop only once something is on record, so the file can never read as valid.
        if self.errors >= MAX_EVAL_ERRORS && !self.diags.is_empty() {
            self.aborted = true;
        }
    }

    fn lookup(&self, name: &str) -> Option<(Val, Span)> {
        self.scope
            .iter()
            .rev()
            .find(|(n, _, _)| n == name)
            .map(|(_, v, s)| (*v, *s))
    }

    fn line_of(&self, s: Span) -> usize {
        self.src[..s.start].matches('\n').count() + 1
    }

    fn undefined(&self, name: &str, span: Span) -> EvalErr {
        let hint = if matches!(name, "X" | "Y" | "Z") {
            format!("a Pauli factor needs a qubit index, e.g. `{name}3` or `{name}{{i}}`")
        } else if name.len() > 1
            && matches!(name.as_bytes()[0], b'X' | b'Y' | b'Z')
            && name.as_bytes()[1].is_ascii_digit()
        {
            "separate Pauli factors with spaces, e.g. `X0 Y1`".to_string()
        } else {
            let mut names: Vec<&str> = self.scope.iter().map(|(n, _, _)| n.as_str()).collect();
            names.sort_unstable();
            names.dedup();
            if names.is_empty() {
                format!("define it first with `let {name} = ...`")
            } else {
                format!(
                    "define it first with `let {name} = ...`; names defined here: {}",
                    names.join(", ")
                )
            }
        };
        EvalErr::new(
            Code::HamName,
            span,
            format!("undefined name `{name}`"),
            hint,
        )
    }

    /// Evaluates a coefficient expression.
    fn coeff(&self, e: &Expr) -> Result<Complex64, EvalErr> {
        Ok(match e {
            Expr::Num { value, imag, .. } => {
                if *imag {
                    Complex64::new(0.0, *value)
                } else {
                    Complex64::new(*value, 0.0)
                }
            }
            Expr::Name { name, span } => match self.lookup(name) {
                Some((Val::Int(v), _)) => Complex64::new(v as f64, 0.0),
                Some((Val::Num(c), _)) => c,
                Some((Val::Poison, _)) => return Err(EvalErr::silent(*span)),
                None => return Err(self.undefined(name, *span)),
            },
            Expr::Neg { inner, .. } => -self.coeff(inner)?,
            Expr::Paren { inner, .. } => self.coeff(inner)?,
            Expr::Bin {
                op,
                lhs,
                rhs,
                op_span,
            } => {
                let a = self.coeff(lhs)?;
                let b = self.coeff(rhs)?;
                match op {
                    Op::Add => a + b,
                    Op::Sub => a - b,
                    Op::Mul => a * b,
                    Op::Div => {
                        if b == Complex64::new(0.0, 0.0) {
                            return Err(EvalErr::new(
                                Code::HamValue,
                                rhs.span(),
                                format!("division by zero: `{}` is 0", self.text(rhs.span())),
                                "check the divisor; `let` values are exact numbers",
                            ));
                        }
                        if b.im == 0.0 {
                            Complex64::new(a.re / b.re, a.im / b.re)
                        } else {
                            a / b
                        }
                    }
                    Op::Rem => {
                        return Err(EvalErr::new(
                            Code::HamValue,
                            *op_span,
                            "`%` is only for qubit indices",
                            "coefficients use + - * / and parentheses",
                        ))
                    }
                }
            }
        })
    }

    /// Evaluates an integer (qubit index or range bound) expression.
    fn index(&self, e: &Expr) -> Result<i64, EvalErr> {
        let overflow = |s: Span| {
            EvalErr::new(
                Code::HamValue,
                s,
                "index arithmetic overflows 64-bit integers",
                "qubit indices are small integers",
            )
        };
        Ok(match e {
            Expr::Num {
                value,
                imag,
                integer,
                span,
            } => {
                if *imag || !*integer {
                    return Err(EvalErr::new(
                        Code::HamValue,
                        *span,
                        format!("an index must be an integer, found `{}`", self.text(*span)),
                        "indices are integers built with + - * % and parentheses",
                    ));
                }
                if *value > 9.0e15 {
                    return Err(overflow(*span));
                }
                *value as i64
            }
            Expr::Name { name, span } => match self.lookup(name) {
                Some((Val::Int(v), _)) => v,
                Some((Val::Num(c), _)) => {
                    if c.im == 0.0 && c.re.fract() == 0.0 && c.re.abs() <= 9.0e15 {
                        c.re as i64
                    } else {
                        return Err(EvalErr::new(
                            Code::HamValue,
                            *span,
                            format!(
                                "an index must be an integer, but `{name}` is {}",
                                fmt_complex(c)
                            ),
                            "use an integer-valued `let` or a loop variable in indices",
                        ));
                    }
                }
                Some((Val::Poison, _)) => return Err(EvalErr::silent(*span)),
                None => return Err(self.undefined(name, *span)),
            },
            Expr::Neg { inner, span } => self
                .index(inner)?
                .checked_neg()
                .ok_or_else(|| overflow(*span))?,
            Expr::Paren { inner, .. } => self.index(inner)?,
            Expr::Bin {
                op,
                lhs,
                rhs,
                op_span,
            } => {
                if *op == Op::Div {
                    return Err(EvalErr::new(
                        Code::HamValue,
                        *op_span,
                        "`/` is not allowed in an index",
                        "indices are integers built with + - * % and parentheses",
                    ));
                }
                let a = self.index(lhs)?;
                let b = self.index(rhs)?;
                let span = e.span();
                match op {
                    Op::Add => a.checked_add(b).ok_or_else(|| overflow(span))?,
                    Op::Sub => a.checked_sub(b).ok_or_else(|| overflow(span))?,
                    Op::Mul => a.checked_mul(b).ok_or_else(|| overflow(span))?,
                    Op::Rem => {
                        if b == 0 {
                            return Err(EvalErr::new(
                                Code::HamValue,
                                rhs.span(),
                                format!("division by zero: `{}` is 0", self.text(rhs.span())),
                                "the right side of `%` must be a nonzero integer",
                            ));
                        }
                        // Euclidean remainder: `(i - 1) % 8` wraps -1 to 7.
                        a.checked_rem_euclid(b).ok_or_else(|| overflow(span))?
                    }
                    Op::Div => unreachable!("rejected above"),
                }
            }
        })
    }

    fn run(&mut self, stmts: &[Stmt]) {
        let Some(first) = stmts.first() else {
            self.report(EvalErr::new(
                Code::HamHeader,
                Span { start: 0, end: 0 },
                "empty Hamiltonian: no `qubits N` line",
                "start the file with e.g. `qubits 8`",
            ));
            return;
        };
        match first {
            Stmt::Qubits {
                count, count_span, ..
            } => {
                if *count == 0 || *count > MAX_HAM_QUBITS as u64 {
                    let msg = if *count == 0 {
                        "a Hamiltonian needs at least one qubit".to_string()
                    } else {
                        format!(
                            "`qubits {}` exceeds the limit of {MAX_HAM_QUBITS} qubits",
                            self.text(*count_span)
                        )
                    };
                    self.report(EvalErr::new(
                        Code::HamHeader,
                        *count_span,
                        msg,
                        format!("use 1 to {MAX_HAM_QUBITS}"),
                    ));
                    return;
                }
                self.num_qubits = *count as usize;
            }
            other => {
                self.report(EvalErr::new(
                    Code::HamHeader,
                    other.span(),
                    "the file must start with `qubits N`",
                    "declare the number of qubits before anything else, e.g. `qubits 8`",
                ));
                return;
            }
        }
        let first_span = first.span();
        for s in &stmts[1..] {
            if let Stmt::Qubits { span, .. } = s {
                let line = self.line_of(first_span);
                self.report(EvalErr::new(
                    Code::HamHeader,
                    *span,
                    "`qubits` is declared twice",
                    format!("the number of qubits is declared once, at line {line}"),
                ));
                continue;
            }
            self.exec(s);
            if self.aborted {
                return;
            }
        }
    }

    fn define(&mut self, name: &str, span: Span, val: Val) -> bool {
        if let Some((_, prev)) = self.lookup(name) {
            let line = self.line_of(prev);
            self.report(EvalErr::new(
                Code::HamName,
                span,
                format!("`{name}` is already defined"),
                format!("it was defined at line {line}; names are constants, pick another name"),
            ));
            return false;
        }
        self.scope.push((name.to_string(), val, span));
        true
    }

    fn exec(&mut self, s: &Stmt) {
        self.steps += 1;
        if self.steps > MAX_STEPS {
            self.report(EvalErr::new(
                Code::HamLimit,
                s.span(),
                format!("the file expands to more than {MAX_STEPS} statements"),
                "reduce the ranges of the sums",
            ));
            self.aborted = true;
            return;
        }
        match s {
            Stmt::Qubits { .. } => {}
            Stmt::Encoding { encoding, span } => {
                if let Some((_, prev)) = self.file_encoding {
                    let line = self.line_of(prev);
                    self.report(EvalErr::new(
                        Code::HamMeaning,
                        *span,
                        "`encoding` is declared twice",
                        format!("the encoding is declared once, at line {line}"),
                    ));
                } else {
                    self.file_encoding = Some((*encoding, *span));
                }
            }
            Stmt::Let {
                name,
                name_span,
                value,
                ..
            } => {
                let v = match self.coeff(value) {
                    Ok(c) if c.re.is_finite() && c.im.is_finite() => Val::Num(c),
                    Ok(_) => {
                        self.report(EvalErr::new(
                            Code::HamValue,
                            value.span(),
                            format!("`{name}` is not a finite number"),
                            "check for overflow in the expression",
                        ));
                        Val::Poison
                    }
                    Err(e) => {
                        self.report(e);
                        Val::Poison
                    }
                };
                self.define(name, *name_span, v);
            }
            Stmt::Sum {
                var,
                var_span,
                lo,
                hi,
                body,
                ..
            } => {
                let (a, b) = match (self.index(lo), self.index(hi)) {
                    (Ok(a), Ok(b)) => (a, b),
                    (Err(e), _) | (_, Err(e)) => {
                        self.report(e);
                        return;
                    }
                };
                let range = lo.span().to(hi.span());
                if b <= a {
                    self.report(EvalErr::new(
                        Code::HamValue,
                        range,
                        format!("empty range `{}`: {a}..{b} has no values", self.text(range)),
                        "`A..B` runs over A, A+1, ..., B-1, so B must be larger than A",
                    ));
                    return;
                }
                let mark = self.scope.len();
                if !self.define(var, *var_span, Val::Int(a)) {
                    return;
                }
                for v in a..b {
                    self.scope.truncate(mark);
                    self.scope.push((var.clone(), Val::Int(v), *var_span));
                    for item in body {
                        self.exec(item);
                        if self.aborted {
                            return;
                        }
                    }
                }
                self.scope.truncate(mark);
            }
            Stmt::Term(t) => {
                if self.terms_read >= MAX_TERMS {
                    self.report(EvalErr::new(
                        Code::HamLimit,
                        t.span,
                        format!("the file expands to more than {MAX_TERMS} terms"),
                        "reduce the ranges of the sums",
                    ));
                    self.aborted = true;
                    return;
                }
                if let Err(e) = self.term(t) {
                    self.report(e);
                }
            }
        }
    }

    fn term(&mut self, t: &Term) -> Result<(), EvalErr> {
        let c = match &t.coeff {
            Some(e) => {
                let c = self.coeff(e)?;
                if !(c.re.is_finite() && c.im.is_finite()) {
                    return Err(EvalErr::new(
                        Code::HamValue,
                        e.span(),
                        format!(
                            "coefficient `{}` is not a finite number",
                            self.text(e.span())
                        ),
                        "check for overflow in the expression",
                    ));
                }
                c
            }
            None => Complex64::new(1.0, 0.0),
        };
        let mut paulis = Vec::new();
        let mut ladders = Vec::new();
        for f in &t.factors {
            let q = self.index(&f.index)?;
            if q < 0 || q >= self.num_qubits as i64 {
                let n = self.num_qubits;
                let what = if q < 0 { "negative" } else { "out of range" };
                let unit = if matches!(f.kind, FactorKind::Pauli(_)) {
                    "qubit"
                } else {
                    "mode"
                };
                return Err(EvalErr::new(
                    Code::HamQubitRange,
                    f.index.span(),
                    format!(
                        "{unit} index {q} in `{}` is {what}: the file declares `qubits {n}`",
                        self.text(f.span)
                    ),
                    format!(
                        "{unit}s are numbered 0 to {}; use `% {n}` to wrap around a ring",
                        n - 1
                    ),
                ));
            }
            let q = q as usize;
            match f.kind {
                FactorKind::Pauli(p) => paulis.push((q, p)),
                FactorKind::Create => ladders.push((q, Ladder::Create)),
                FactorKind::Annihilate => ladders.push((q, Ladder::Annihilate)),
                FactorKind::Number => {
                    ladders.push((q, Ladder::Create));
                    ladders.push((q, Ladder::Annihilate));
                }
            }
        }
        if !paulis.is_empty() && !ladders.is_empty() {
            return Err(EvalErr::new(
                Code::HamMeaning,
                t.span,
                "a term mixes Pauli and fermionic factors",
                "write the Pauli part and the fermionic part as separate terms",
            ));
        }
        self.terms_read += 1;
        if !ladders.is_empty() {
            self.fermion_terms_read += 1;
            if c != Complex64::new(0.0, 0.0) {
                self.fermion_terms.push(FermionTerm {
                    coeff: c,
                    ops: ladders,
                    hc: t.hc,
                    span: t.span,
                });
            }
            return Ok(());
        }
        if !paulis.is_empty() && self.first_pauli_term.is_none() {
            self.first_pauli_term = Some(t.span);
        }
        let (phase, p) = PauliString::from_factors(&paulis);
        let c = c * phase;
        if t.hc {
            self.add(p.clone(), c, t.span, true);
            self.add(p, c.conj(), t.span, true);
        } else {
            self.add(p, c, t.span, true);
        }
        Ok(())
    }

    /// Maps the queued fermionic terms with the encoding the file or the caller chose.
    fn map_fermion_terms(&mut self) -> Option<Encoding> {
        let first = self.fermion_terms.first().map(|f| f.span)?;
        let enc = match (self.file_encoding, self.flag_encoding) {
            (Some((a, span)), Some(b)) if a != b => {
                self.report(EvalErr::new(
                    Code::HamMeaning,
                    span,
                    format!(
                        "the file says `encoding {}` but the command asks for `{}`",
                        a.short_name(),
                        b.short_name()
                    ),
                    "drop the command-line encoding or change the `encoding` line",
                ));
                return None;
            }
            (Some((a, _)), _) => a,
            (None, _) if self.first_pauli_term.is_some() => {
                self.report(EvalErr::new(Code::HamMeaning,
                    first,
                    "this file mixes Pauli and fermionic terms but does not say which encoding applies",
                    "the Pauli terms are written for one encoding: add `encoding jw` or `encoding bk` after `qubits`",
                ));
                return None;
            }
            (None, Some(b)) => b,
            (None, None) => {
                self.report(EvalErr::new(Code::HamMeaning,
                    first,
                    "fermionic terms need an encoding",
                    "add a line `encoding jw` (Jordan–Wigner) or `encoding bk` (Bravyi–Kitaev), or pass `--encoding jw|bk`",
                ));
                return None;
            }
        };
        let n = self.num_qubits;
        let terms = std::mem::take(&mut self.fermion_terms);
        for t in &terms {
            let mut out = Vec::new();
            map_product(enc, n, t.coeff, &t.ops, &mut |p, c| out.push((p, c)));
            if t.hc {
                map_product(enc, n, t.coeff.conj(), &adjoint_ops(&t.ops), &mut |p, c| {
                    out.push((p, c))
                });
            }
            for (p, c) in out {
                self.add(p, c, t.span, false);
            }
        }
        Some(enc)
    }

    fn add(&mut self, p: PauliString, c: Complex64, span: Span, from_pauli: bool) {
        let e = self.acc.entry(p).or_insert(Acc {
            sum: Complex64::new(0.0, 0.0),
            magnitude: 0.0,
            first: span,
            from_pauli,
        });
        e.sum += c;
        e.magnitude += c.norm();
        e.from_pauli |= from_pauli;
    }

    fn finish(mut self) -> Result<HamRead, Vec<Diagnostic>> {
        let mut sum = PauliSum::new(self.num_qubits);
        let mut dropped_zero = 0;
        let encoding = if self.diags.is_empty() {
            self.map_fermion_terms()
        } else {
            None
        };
        if self.diags.is_empty() {
            // Hashed while reading (one probe per term); the sum sorts the kept terms once.
            // Diagnostics are ordered by their offset below, whatever the order here.
            let acc = std::mem::take(&mut self.acc);
            let mut kept = Vec::with_capacity(acc.len());
            for (p, a) in acc {
                if a.sum.im.abs() > HERMITIAN_REL_TOL * a.magnitude {
                    let what = if p.is_identity() {
                        "the constant term".to_string()
                    } else {
                        format!("`{p}`")
                    };
                    self.report(EvalErr::new(Code::HamMeaning,
                        a.first,
                        format!(
                            "the Hamiltonian is not Hermitian: {what} has merged coefficient {}",
                            fmt_complex(a.sum)
                        ),
                        "factors on one qubit multiply with a phase (X·Y = iZ); make every merged coefficient real, e.g. add `+ h.c.`",
                    ));
                    continue;
                }
                let re = a.sum.re;
                if !a.from_pauli && re.abs() <= ROUNDOFF_REL_TOL * a.magnitude {
                    // Cancellation noise of mapped fermionic terms.
                    continue;
                }
                if re == 0.0 {
                    if !p.is_identity() {
                        dropped_zero += 1;
                    }
                } else if p.is_identity() {
                    sum.constant = re;
                } else {
                    kept.push((p, re));
                }
            }
            // Keys are distinct: an unstable sort, then the map is built from sorted input.
            kept.sort_unstable_by(|a, b| a.0.cmp(&b.0));
            sum.terms = kept.into_iter().collect();
        }
        if !self.diags.is_empty() {
            self.diags.sort_by_key(|(o, _)| *o);
            return Err(self.diags.into_iter().map(|(_, d)| d).collect());
        }
        Ok(HamRead {
            ham: HamFile {
                sum,
                dropped_zero,
                terms_read: self.terms_read,
            },
            encoding,
            fermionic_terms: self.fermion_terms_read,
        })
    }
}

#[cfg(test)]
mod tests {
    //! One test per grammar rule (see `grammar/hamiltonian.ebnf`); the error messages are
    //! tested in `tests/ham_parser.rs`.
    use super::*;

    fn ps(factors: &[(usize, Pauli)]) -> PauliString {
        PauliString::from_factors(factors).1
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
        ev.run(&stmts);
        ev.finish()
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
            let chunks = line_chunks(&text, size);
            assert_eq!(chunks.concat(), text, "size {size}");
            assert!(chunks[..chunks.len() - 1].iter().all(|c| c.ends_with('\n')));
        }
        assert!(line_chunks("", 8).is_empty());
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
        assert!(line_chunks(&src, 1 << 18).len() >= 4);
        let fast = plain_lines(&src).expect("plain file");
        assert_eq!(Ok(fast), read_full(&src));
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
