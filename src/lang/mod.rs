//! Input languages: `.ham` Hamiltonians and `.dev` devices, parsed with nom.
//!
//! In: source text and its file name. Out: a value (for `.ham`, the Pauli terms merged per
//! string plus the fermionic operator as written, mapped by [`crate::hamiltonian`], never
//! here; for `.dev`, a device) or a list of [`crate::diag::Diagnostic`]s (the leaf module
//! shared by every reader); parsers never panic and never print.
//! Every nom-based reader (these two and `qasm::read`) shares the identifier rule
//! ([`ident`]) and the nom error type ([`syntax_error`]).

pub mod dev;
pub mod ham;
pub mod ident;
pub mod json_span;
pub mod suggest;
pub mod syntax_error;
