//! The `.ham` evaluator: statements to merged Pauli terms plus a fermionic operator.
//!
//! In: the statements of [`super::parse`] and the source (for diagnostics). Out, in two steps:
//! first the Pauli terms merged per string together with the fermionic terms as written
//! ([`Product`]s, each with its span) and the encoding that applies to them (the file's or the
//! caller's); then, once the caller has added the mapped images of those products
//! ([`Evaluator::add_mapped`]; the mapping is the `fermion` module's), a [`HamRead`] (the Hermitian
//! [`crate::pauli::PauliSum`], counts, the encoding) or every diagnostic found. It expands
//! `sum` blocks, evaluates coefficients (complex, `f64`) and qubit indices (integers, `i64`,
//! checked arithmetic), multiplies factors on one qubit out with their phases, and merges equal
//! strings in file order. Invariants: see the module documentation of [`super`] (strings fit
//! `qubits N`, merged coefficients real to [`super::HERMITIAN_REL_TOL`], exact zeros dropped
//! and counted); evaluation stops after a bounded number of steps and errors.

use super::syntax::*;
use super::*;
use crate::diag::{Code, Diagnostic};
use crate::ladder::{Ladder, Product};
use crate::pauli::hermitian::{hermitian_part, Merged};
use crate::pauli::PauliString;
use num_complex::Complex64;
use std::collections::HashSet;

#[derive(Clone, Copy, Debug)]
pub(super) enum Val {
    Int(i64),
    Num(Complex64),
    /// A name whose definition failed (already reported); uses of it stay silent.
    Poison,
}

/// An evaluation error; `None` message means "already reported, stay silent".
pub(super) struct EvalErr {
    pub(super) span: Span,
    pub(super) msg: Option<(Code, String, String)>,
}

impl EvalErr {
    pub(super) fn new(
        code: Code,
        span: Span,
        msg: impl Into<String>,
        hint: impl Into<String>,
    ) -> EvalErr {
        EvalErr {
            span,
            msg: Some((code, msg.into(), hint.into())),
        }
    }
    pub(super) fn silent(span: Span) -> EvalErr {
        EvalErr { span, msg: None }
    }
}

/// Contributions merged into one Pauli string.
pub(super) struct Acc {
    pub(super) sum: Complex64,
    pub(super) magnitude: f64,
    pub(super) first: Span,
    /// Some contribution came from a Pauli term (not from a mapped fermionic term).
    pub(super) from_pauli: bool,
}

pub(super) struct Evaluator<'s> {
    pub(super) file: &'s str,
    pub(super) src: &'s str,
    pub(super) num_qubits: usize,
    pub(super) scope: Vec<(String, Val, Span)>,
    pub(super) diags: Vec<(usize, Diagnostic)>,
    pub(super) reported: HashSet<usize>,
    pub(super) acc: rustc_hash::FxHashMap<PauliString, Acc>,
    pub(super) terms_read: usize,
    pub(super) steps: usize,
    /// Errors met so far, repeats at one position included (see [`MAX_EVAL_ERRORS`]).
    pub(super) errors: usize,
    pub(super) aborted: bool,
    pub(super) flag_encoding: Option<Encoding>,
    pub(super) file_encoding: Option<(Encoding, Span)>,
    /// Fermionic terms waiting for the encoding (nonzero coefficients only), and their spans.
    pub(super) fermion_terms: Vec<Product>,
    pub(super) fermion_spans: Vec<Span>,
    pub(super) fermion_terms_read: usize,
    pub(super) first_pauli_term: Option<Span>,
}

pub(super) fn fmt_complex(c: Complex64) -> String {
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
    pub(super) fn new(file: &'s str, src: &'s str) -> Evaluator<'s> {
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
            fermion_spans: Vec::new(),
            fermion_terms_read: 0,
            first_pauli_term: None,
        }
    }

    pub(super) fn text(&self, s: Span) -> &str {
        &self.src[s.start..s.end]
    }

    pub(super) fn report(&mut self, e: EvalErr) {
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

    pub(super) fn lookup(&self, name: &str) -> Option<(Val, Span)> {
        self.scope
            .iter()
            .rev()
            .find(|(n, _, _)| n == name)
            .map(|(_, v, s)| (*v, *s))
    }

    pub(super) fn line_of(&self, s: Span) -> usize {
        self.src[..s.start].matches('\n').count() + 1
    }

    pub(super) fn undefined(&self, name: &str, span: Span) -> EvalErr {
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
    pub(super) fn coeff(&self, e: &Expr) -> Result<Complex64, EvalErr> {
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
    pub(super) fn index(&self, e: &Expr) -> Result<i64, EvalErr> {
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

    pub(super) fn run(&mut self, stmts: &[Stmt]) {
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

    pub(super) fn define(&mut self, name: &str, span: Span, val: Val) -> bool {
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

    pub(super) fn exec(&mut self, s: &Stmt) {
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

    pub(super) fn term(&mut self, t: &Term) -> Result<(), EvalErr> {
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
                self.fermion_terms.push(Product {
                    coeff: c,
                    ops: ladders,
                    hc: t.hc,
                });
                self.fermion_spans.push(t.span);
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

    /// The encoding the file or the caller chose for the queued fermionic terms (`None`, with
    /// a diagnostic, when the two conflict or neither says; `None` when there are none).
    pub(super) fn choose_encoding(&mut self) -> Option<Encoding> {
        let first = *self.fermion_spans.first()?;
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
        Some(enc)
    }

    /// Adds one mapped contribution of fermionic term `index` (its span is the term's).
    pub(super) fn add_mapped(&mut self, index: usize, p: PauliString, c: Complex64) {
        let span = self.fermion_spans[index];
        self.add(p, c, span, false);
    }

    pub(super) fn add(&mut self, p: PauliString, c: Complex64, span: Span, from_pauli: bool) {
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

    /// Runs on the statements and chooses the encoding of the fermionic part: the first step
    /// (see the module notes). Every diagnostic so far, sorted by offset, when there is one.
    pub(super) fn evaluate(
        &mut self,
        stmts: &[Stmt],
        flag_encoding: Option<Encoding>,
    ) -> Result<Option<Encoding>, Vec<Diagnostic>> {
        self.flag_encoding = flag_encoding;
        self.run(stmts);
        let encoding = if self.diags.is_empty() {
            self.choose_encoding()
        } else {
            None
        };
        if !self.diags.is_empty() {
            return Err(self.take_diagnostics());
        }
        Ok(encoding)
    }

    fn take_diagnostics(&mut self) -> Vec<Diagnostic> {
        let mut diags = std::mem::take(&mut self.diags);
        diags.sort_by_key(|(o, _)| *o);
        diags.into_iter().map(|(_, d)| d).collect()
    }

    /// The second step: the Hermitian part of the merged terms ([`hermitian_part`], the one
    /// routine), a diagnostic at the first contributing term of every string whose imaginary
    /// part is beyond round-off.
    pub(super) fn finish(mut self, encoding: Option<Encoding>) -> Result<HamRead, Vec<Diagnostic>> {
        // Hashed while reading (one probe per term); the sum sorts the kept terms once.
        // Diagnostics are ordered by their offset below, whatever the order here.
        let acc = std::mem::take(&mut self.acc);
        let entries = acc.into_iter().map(|(p, a)| {
            let merged = Merged {
                sum: a.sum,
                magnitude: a.magnitude,
                mapped: !a.from_pauli,
            };
            (p, merged, a.first)
        });
        let h = hermitian_part(self.num_qubits, entries);
        for (p, c, first) in h.not_hermitian {
            let what = if p.is_identity() {
                "the constant term".to_string()
            } else {
                format!("`{p}`")
            };
            self.report(EvalErr::new(Code::HamMeaning,
                first,
                format!(
                    "the Hamiltonian is not Hermitian: {what} has merged coefficient {}",
                    fmt_complex(c)
                ),
                "factors on one qubit multiply with a phase (X·Y = iZ); make every merged coefficient real, e.g. add `+ h.c.`",
            ));
        }
        if !self.diags.is_empty() {
            return Err(self.take_diagnostics());
        }
        Ok(HamRead {
            ham: HamFile {
                sum: h.sum,
                dropped_zero: h.dropped_zero,
                terms_read: self.terms_read,
            },
            encoding,
            fermionic_terms: self.fermion_terms_read,
        })
    }
}
