//! phasewright: compile a qubit Hamiltonian and a device into a campaign of hardware-ready
//! real-time-evolution circuits, check every circuit by simulation, and turn measured counts
//! into energies and densities of states.
//!
//! The pipeline runs in one direction:
//!
//! 1. [`lang`] parses `.ham` (Hamiltonians) and `.dev` (devices) into Pauli terms plus a
//!    fermionic operator and a [`device::Device`], with [`diag`]nostics that point at the
//!    offending text; [`hamiltonian`] maps the fermionic part ([`fermion`]) and keeps the
//!    Hermitian [`pauli::PauliSum`];
//! 2. [`formula`] orders the terms and expands a product formula (Lie–Trotter, Strang, Suzuki
//!    fourth order) into a rotation program `Π exp(-iθ_j P_j)`;
//! 3. [`family`] wraps the program into circuit families (Hadamard tests for overlaps, Krylov
//!    matrix elements, stochastic traces) and describes them in a [`plan::Plan`];
//! 4. [`synth`] turns rotations into basis changes, CNOT ladders and `rz`; [`route`] places
//!    qubits and inserts SWAPs; [`lower`] translates to the device's native gates;
//! 5. [`qasm`] writes OpenQASM 3 and reads back the subset it writes;
//! 6. [`sim`] simulates the files and [`check`] compares them with the ideal and exact values;
//!    [`tableau`] proves them equal to the plan's circuit exactly, at any width, without
//!    amplitudes;
//! 7. [`estimate`] turns counts into overlaps, Krylov energies and densities of states, and
//!    [`report`] prints tables, JSON and SVG plots.
//!
//! Around the pipeline, [`cli`] is the command line as a library (the way in of the binary and
//! of the Python module), and [`files`] reads plans and Hamiltonians and writes campaigns as
//! the commands do. [`clock`] times the pipeline's stages when a benchmark asks.
//!
//! # Example
//!
//! A transverse-field Ising pair, compiled into an overlap campaign on the all-to-all target
//! and checked by simulation: every circuit's reads agree with the ideal product formula.
//!
//! ```
//! use phasewright::family::{control::Control, Spec};
//! use phasewright::plan::Family;
//! use phasewright::formula::Order;
//!
//! let ham = phasewright::hamiltonian::parse_hamiltonian("pair.ham", "qubits 2\n1.0 Z0 Z1\n0.5 X0\n0.5 X1\n")
//!     .expect("a valid .ham file");
//! let spec = Spec {
//!     family: Family::Overlap,
//!     order: Order::Second,
//!     dt: 0.2,
//!     points: 3,
//!     steps_per_dt: 1,
//!     states: vec!["00".into()],
//!     control: Control::Evolution,
//! };
//! let compiled = phasewright::pipeline::compile(&ham.sum, "pair.ham", &spec).unwrap();
//! assert_eq!(compiled.programs.len(), compiled.plan.circuits.len());
//! let checks = phasewright::check::check_plan(&compiled.plan, &compiled.circuits()).unwrap();
//! assert!(checks.iter().all(|c| c.compile_error <= 1e-9));
//! ```
//!
//! **Invariant:** only the command layer and `main.rs` read or write files and the standard
//! streams, and only `main.rs` ends the process. The command layer is a private module; the
//! rest of the world reaches it through two small public ones: [`cli`] (parse a command line,
//! run it, or call a command as a function) and [`files`] (the readers and the campaign writer,
//! for programs and tests). Every other module is a set of functions from values to values
//! (one exception: [`sim::available_memory_bytes`] reads `/proc/meminfo`, so `sim` and
//! `pipeline` can refuse a job larger than the machine).

mod app;
pub mod check;
pub mod circuit;
pub mod cli;
pub mod clock;
pub mod device;
pub mod diag;
pub mod error;
pub mod estimate;
pub mod family;
pub mod fermion;
pub mod files;
pub mod formula;
pub mod hamiltonian;
pub mod ladder;
pub mod lang;
pub mod lower;
pub mod pauli;
pub mod pipeline;
pub mod plan;
pub mod qasm;
pub mod report;
pub mod route;
pub mod sim;
pub mod synth;
pub mod tableau;
