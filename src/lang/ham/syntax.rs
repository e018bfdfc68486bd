//! The `.ham` syntax tree: what the parser ([`super::parse`]) builds and the evaluator
//! ([`super::eval`]) walks.
//!
//! In: nothing (data types only). Out: statements ([`Stmt`]) of terms, coefficient
//! expressions, `let`, `sum` and header lines. Invariant: every node carries the byte span of
//! its source text ([`Span`]), so any later diagnostic can point at it; line and column are
//! computed only when a diagnostic is rendered.

use super::Encoding;
use crate::pauli::Pauli;

/// Byte range `[start, end)` in the source.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(super) struct Span {
    pub(super) start: usize,
    pub(super) end: usize,
}

impl Span {
    pub(super) fn len(self) -> usize {
        self.end.saturating_sub(self.start)
    }
    pub(super) fn to(self, other: Span) -> Span {
        Span {
            start: self.start,
            end: other.end,
        }
    }
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(super) enum Op {
    Add,
    Sub,
    Mul,
    Div,
    Rem,
}

#[derive(Clone, Debug)]
pub(super) enum Expr {
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
    pub(super) fn span(&self) -> Span {
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
pub(super) enum FactorKind {
    Pauli(Pauli),
    /// `cr{k}`: creation `a†_k`.
    Create,
    /// `an{k}`: annihilation `a_k`.
    Annihilate,
    /// `n{k}`: number operator `a†_k a_k`.
    Number,
}

#[derive(Clone, Debug)]
pub(super) struct Factor {
    pub(super) kind: FactorKind,
    pub(super) index: Expr,
    pub(super) span: Span,
}

#[derive(Clone, Debug)]
pub(super) struct Term {
    pub(super) coeff: Option<Expr>,
    pub(super) factors: Vec<Factor>,
    pub(super) hc: bool,
    pub(super) span: Span,
}

#[derive(Clone, Debug)]
pub(super) enum Stmt {
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
    pub(super) fn span(&self) -> Span {
        match self {
            Stmt::Qubits { span, .. } | Stmt::Let { span, .. } | Stmt::Encoding { span, .. } => {
                *span
            }
            Stmt::Sum { header, .. } => *header,
            Stmt::Term(t) => t.span,
        }
    }
}
