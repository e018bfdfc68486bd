//! phasewright: compile a qubit Hamiltonian and a device into a campaign of hardware-ready
//! real-time-evolution circuits, check every circuit by simulation, and turn measured counts
//! into energies and densities of states.
//!
//! The pipeline runs in one direction:
//!
//! 1. [`lang`] parses `.ham` (Hamiltonians) and `.dev` (devices) into a [`pauli::PauliSum`] and a
//!    [`device::Device`], with diagnostics that point at the offending text;
//! 2. [`formula`] orders the terms and expands a product formula (Lie–Trotter, Strang, Suzuki
//!    fourth order) into a rotation program `Π exp(-iθ_j P_j)`;
//! 3. [`family`] wraps the program into circuit families (Hadamard tests for overlaps, Krylov
//!    matrix elements, stochastic traces) and describes them in a [`family::plan::Plan`];
//! 4. [`synth`] turns rotations into basis changes, CNOT ladders and `rz`; [`route`] places
//!    qubits and inserts SWAPs; [`lower`] translates to the device's native gates;
//! 5. [`qasm`] writes OpenQASM 3 and reads back the subset it writes;
//! 6. [`sim`] simulates the files and compares with the ideal and exact values; [`tableau`]
//!    proves them equal to the plan's circuit exactly, at any width, without amplitudes;
//! 7. [`estimate`] turns counts into overlaps, Krylov energies and densities of states, and
//!    [`report`] prints tables, JSON and SVG plots.
//!
//! **Invariant:** only the binary (`main.rs` and [`app`]) does I/O or exits; every other module
//! is a set of functions from values to values.

pub mod app;
pub mod check;
pub mod circuit;
pub mod device;
pub mod error;
pub mod estimate;
pub mod family;
pub mod fermion;
pub mod formula;
pub mod lang;
pub mod lower;
pub mod pauli;
pub mod pipeline;
pub mod qasm;
pub mod report;
pub mod route;
pub mod sim;
pub mod synth;
pub mod tableau;
