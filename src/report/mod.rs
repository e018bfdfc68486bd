//! Reports for people and machines: plain tables, JSON, and SVG plots.
//!
//! In: results of the library (estimates, costs, verification). Out: text and SVG documents as
//! strings; only the command layer writes them to files. Invariant: output depends only on the
//! values given (ordered maps, fixed number formats), so runs are byte-for-byte reproducible.

pub mod costs;
pub mod estimates;
pub mod plot;
pub mod table;
