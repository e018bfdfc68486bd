//! OpenQASM 3: a writer for the IR, and a reader for exactly the subset the writer produces.
//!
//! In (writer): a verified [`Circuit`] and header comments. Out: program text that starts with
//! `OPENQASM 3.0;` and `include "stdgates.inc";`, uses only standard-library gates (lowercase
//! `cx`) or the built-in `U`, declares `qubit[n] q;` for logical circuits or addresses physical
//! qubits as `$k`, and writes measurements as `c[i] = measure q[j];`. Angles are printed with
//! Rust's shortest round-trip formatting, so reading a file back gives bit-identical angles.
//! A non-zero global phase is written with the built-in `gphase`.
//!
//! In (reader): text in that subset (plus `pi`/`π` arithmetic in angles, `//` comments,
//! `barrier`). Out: a [`Circuit`] or a [`Diagnostic`] pointing at the first unsupported
//! statement. Reference: OpenQASM 3 specification, "Gates" and "Built-in quantum instructions"
//! (openqasm.com, v3.0/v3.1), for the gate names and `U`/`gphase` semantics.

mod read;

pub use read::{read, QasmProgram};

use crate::circuit::{Circuit, Gate};
use std::fmt::Write;

/// How qubits are addressed in the written file.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Addressing {
    /// `qubit[n] q;` and `q[k]`.
    Logical,
    /// Hardware qubits `$k` (no declaration).
    Physical,
}

/// Formats an angle so that parsing it back gives the same `f64`.
pub fn fmt_angle(a: f64) -> String {
    format!("{a:?}")
}

/// Writes a circuit as an OpenQASM 3 program. `comments` become leading `//` lines.
pub fn write(c: &Circuit, addressing: Addressing, comments: &[String]) -> String {
    let mut s = String::with_capacity(32 * c.gates.len() + 256);
    s.push_str("OPENQASM 3.0;\ninclude \"stdgates.inc\";\n");
    for line in comments {
        let _ = writeln!(s, "// {line}");
    }
    let q = |k: u32| match addressing {
        Addressing::Logical => format!("q[{k}]"),
        Addressing::Physical => format!("${k}"),
    };
    if addressing == Addressing::Logical {
        let _ = writeln!(s, "qubit[{}] q;", c.num_qubits);
    }
    if c.num_clbits > 0 {
        let _ = writeln!(s, "bit[{}] c;", c.num_clbits);
    }
    if c.global_phase != 0.0 {
        let _ = writeln!(s, "gphase({});", fmt_angle(c.global_phase));
    }
    for g in &c.gates {
        if let Gate::Measure(qb, bit) = *g {
            let _ = writeln!(s, "c[{bit}] = measure {};", q(qb));
            continue;
        }
        s.push_str(g.name());
        let params = g.params();
        if !params.is_empty() {
            s.push('(');
            s.push_str(
                &params
                    .iter()
                    .map(|a| fmt_angle(*a))
                    .collect::<Vec<_>>()
                    .join(", "),
            );
            s.push(')');
        }
        s.push(' ');
        s.push_str(
            &g.qubits()
                .iter()
                .map(|k| q(*k))
                .collect::<Vec<_>>()
                .join(", "),
        );
        s.push_str(";\n");
    }
    s
}
