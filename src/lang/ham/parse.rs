//! The `.ham` parser: nom combinators, one small parser per production, bottom-up.
//!
//! In: a file name and its source text. Out: the statements ([`Stmt`]) of the syntax tree, or
//! every syntax [`Diagnostic`] found. Invariant: the parser recovers at the end of each line
//! (and inside `sum` bodies at the next line or the closing `}`), so one bad line does not hide
//! the next; each diagnostic has a code, the place of the offending text, and a hint.

use super::syntax::*;
use super::Encoding;
use crate::diag::{Code, Diagnostic};
pub(super) use crate::lang::ident::{ident_len, is_ident_char};
pub(super) use crate::lang::syntax_error::Res;
use crate::lang::syntax_error::{SyntaxError, Wording};
use crate::pauli::Pauli;
use nom::character::complete::{char, digit1};
use nom::combinator::cut;
use nom::error::{context, ErrorKind, ParseError};
use nom::Offset;
use std::cell::RefCell;
use std::collections::HashSet;

// ---------------------------------------------------------------------------------------------
// Parser errors
// ---------------------------------------------------------------------------------------------

pub(super) fn fail<'a, T>(
    code: Code,
    at: &'a str,
    len: usize,
    msg: impl Into<String>,
    hint: &str,
) -> Res<'a, T> {
    Err(nom::Err::Failure(SyntaxError::reported(
        at,
        code,
        msg.into(),
        Some(hint.to_string()),
        len,
    )))
}

pub(super) fn backtrack<T>(at: &str) -> Res<'_, T> {
    Err(nom::Err::Error(SyntaxError::from_error_kind(
        at,
        ErrorKind::Verify,
    )))
}

// Context labels (the "expected ..." part of a message) and their hints.
pub(super) const L_QUBITS: &str = "the number of qubits";
pub(super) const L_LET_NAME: &str = "a name after `let`";
pub(super) const L_EQUALS: &str = "`=` after the name";
pub(super) const L_VALUE: &str = "a value after `=`";
pub(super) const L_LOOP_VAR: &str = "a loop variable after `sum`";
pub(super) const L_IN: &str = "`in` after the loop variable";
pub(super) const L_RANGE_LO: &str = "the start of the range";
pub(super) const L_DOTS: &str = "`..` between the range bounds";
pub(super) const L_RANGE_HI: &str = "the end of the range";
pub(super) const L_OPEN: &str = "`{` opening the sum body";
pub(super) const L_OPERAND: &str = "a number, a name or `(`";
pub(super) const L_CLOSE_PAREN: &str = "`)`";
pub(super) const L_INDEX: &str = "a qubit index";
pub(super) const L_CLOSE_INDEX: &str = "`}` closing the qubit index";
pub(super) const L_STATEMENT: &str = "a term, `let` or `sum`";
pub(super) const L_ENCODING: &str = "`jw` or `bk` after `encoding`";

pub(super) fn hint_for(label: &str) -> &'static str {
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
pub(super) fn sp(i: &str) -> &str {
    i.trim_start_matches([' ', '\t', '\r'])
}

pub(super) fn ident(i: &str) -> Res<'_, &str> {
    crate::lang::ident::ident(i)
}

pub(super) const KEYWORDS: [&str; 5] = ["qubits", "let", "sum", "in", "encoding"];

/// If `i` starts with a factor (`X3`, `Y{...}`, `cr{k}`, `an2`, `n{k}`), its kind and the
/// length of its letters. A factor is its letters followed by `{`, or by digits that end the
/// identifier.
pub(super) fn factor_head(i: &str) -> Option<(FactorKind, usize)> {
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

pub(super) fn is_factor_start(i: &str) -> bool {
    factor_head(i).is_some()
}

/// True when `name` is spelled like a factor (`X12`) and so cannot name a constant.
pub(super) fn is_factor_name(name: &str) -> bool {
    factor_head(name).is_some()
}

/// Numeric literal: `12`, `0.25`, `1.`, `.5`, `1e-3`, `2.5E+2`, optionally with an `i` suffix
/// (imaginary). A `.` directly followed by another `.` is left for the range operator.
pub(super) fn number(i: &str) -> Res<'_, (f64, bool, bool, &str)> {
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
pub(super) fn describe(i: &str) -> (String, usize) {
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
pub(super) fn skip_line(i: &str) -> &str {
    match i.find('\n') {
        Some(k) => &i[k + 1..],
        None => "",
    }
}

/// Skips blank space, comments, newlines and, inside a sum body, `;` separators.
pub(super) fn skip_separators(mut i: &str, in_body: bool) -> &str {
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

pub(super) struct Parser<'a> {
    pub(super) src: &'a str,
    /// Errors recorded while recovering (sum bodies).
    pub(super) errors: RefCell<Vec<SyntaxError<'a>>>,
}

impl<'a> Parser<'a> {
    pub(super) fn span(&self, from: &'a str, to: &'a str) -> Span {
        Span {
            start: self.src.offset(from),
            end: self.src.offset(to),
        }
    }

    pub(super) fn span_len(&self, at: &'a str, len: usize) -> Span {
        let start = self.src.offset(at);
        Span {
            start,
            end: start + len,
        }
    }

    // expr    = product { ("+" | "-") product }
    pub(super) fn expr(&self, i: &'a str) -> Res<'a, Expr> {
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
    pub(super) fn product(&self, i: &'a str) -> Res<'a, Expr> {
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
    pub(super) fn unary(&self, i: &'a str) -> Res<'a, Expr> {
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
    pub(super) fn atom(&self, i: &'a str) -> Res<'a, Expr> {
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
    pub(super) fn factor(&self, i: &'a str) -> Res<'a, Factor> {
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
    pub(super) fn term(&self, start: &'a str) -> Res<'a, Term> {
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
    pub(super) fn new_name(&self, i: &'a str, label: &'static str) -> Res<'a, (String, Span)> {
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
    pub(super) fn qubits(&self, kw: &'a str, r: &'a str) -> Res<'a, Stmt> {
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
    pub(super) fn encoding(&self, kw: &'a str, r: &'a str) -> Res<'a, Stmt> {
        let at = sp(r);
        let (r, word) = context(L_ENCODING, cut(ident))(at)?;
        let encoding = match Encoding::from_short_name(word) {
            Some(e) => e,
            None => {
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
    pub(super) fn let_stmt(&self, kw: &'a str, r: &'a str) -> Res<'a, Stmt> {
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
    pub(super) fn sum(&self, kw: &'a str, r: &'a str) -> Res<'a, Stmt> {
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
    pub(super) fn body(&self, open: &'a str, mut i: &'a str) -> Res<'a, Vec<Stmt>> {
        let mut items = Vec::new();
        loop {
            i = skip_separators(i, true);
            if i.is_empty() {
                self.errors.borrow_mut().push(SyntaxError::reported(
                    open,
                    Code::HamSyntax,
                    "unclosed `{`: the sum body never ends".into(),
                    Some("close the sum body with `}`".into()),
                    1,
                ));
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
    pub(super) fn statement(&self, i: &'a str, top: bool) -> Res<'a, Stmt> {
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
    pub(super) fn end_of_item(
        &self,
        r: &'a str,
        in_body: bool,
    ) -> Result<&'a str, nom::Err<SyntaxError<'a>>> {
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
    pub(super) fn file(&self) -> Vec<Stmt> {
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
pub(super) fn recover_in_body(at: &str) -> &str {
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

/// How the `.ham` reader words a syntax error no production raised by hand: `expected {label},
/// found {what}` (or `unexpected {what}`), [`describe`] naming the text, and the label's hint.
const HAM_WORDING: Wording = Wording {
    code: Code::HamSyntax,
    unlabelled: None,
    found: |at| {
        let (found, len) = describe(at);
        (Some(found), len)
    },
    hint: |label| Some(hint_for(label.unwrap_or("")).to_string()),
};

pub(super) fn parse_statements(file: &str, src: &str) -> Result<Vec<Stmt>, Vec<Diagnostic>> {
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
        .map(|e| {
            (
                src.offset(e.at),
                e.diagnostic(&HAM_WORDING, file, src, None),
            )
        })
        .collect();
    diags.sort_by_key(|(o, _)| *o);
    Err(diags.into_iter().map(|(_, d)| d).collect())
}
