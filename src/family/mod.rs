//! Circuit families: Hadamard-test overlaps, Krylov matrix elements, stochastic traces.

pub mod plan;
