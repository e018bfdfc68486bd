//! The library's file layer: the readers and the campaign writer of the command layer that
//! programs and tests call directly, with the commands' own checks and diagnostics.
//!
//! In: paths. Out: a validated [`Plan`](crate::plan::Plan) ([`read_plan`]), a parsed
//! `.ham` file ([`read_hamiltonian`]), the qubit Hamiltonian of any Hamiltonian input, `.ham`
//! or FCIDUMP ([`load_qubit_hamiltonian`], [`load_qubit_hamiltonian_with`]), or a campaign
//! folder written whole with every file's SHA-256 in its plan ([`write_campaign`]). A file
//! that is missing, unreadable or invalid is an [`Error`](crate::error::Error) carrying the
//! diagnostic the commands print (exit 2). Invariant: every item here is a re-export of the
//! private command layer, the one part of the library that touches the file system, so a test
//! reads and writes exactly as the commands do.

pub use crate::app::compile::{write_campaign, FolderWriter};
pub use crate::app::convert::{load_qubit_hamiltonian, load_qubit_hamiltonian_with, LoadOptions};
pub use crate::app::io::{read_hamiltonian, read_plan};
