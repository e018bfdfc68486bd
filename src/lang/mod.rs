//! Input languages: `.ham` Hamiltonians and `.dev` devices, parsed with nom, plus the
//! diagnostics shared by every reader.
//!
//! In: source text and its file name. Out: a value (Pauli sum, device) or a list of
//! [`diag::Diagnostic`]s; parsers never panic and never print.

pub mod codes;
pub mod dev;
pub mod diag;
pub mod ham;
pub mod json_span;
pub mod suggest;
