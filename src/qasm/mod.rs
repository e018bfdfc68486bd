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
//! `barrier`). Out: a [`Circuit`] or a [`Diagnostic`](crate::lang::diag::Diagnostic) pointing at the first unsupported
//! statement. Reference: OpenQASM 3 specification, "Gates" and "Built-in quantum instructions"
//! (openqasm.com, v3.0/v3.1), for the gate names and `U`/`gphase` semantics.

mod read;

pub use read::{read, QasmProgram};

use crate::circuit::{Circuit, Gate};

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
    let mut out = Vec::with_capacity(24 * c.gates.len() + 256);
    write_to(&mut out, c, addressing, comments).expect("writing to memory cannot fail");
    String::from_utf8(out).expect("the writer emits UTF-8")
}

/// Streams the program of [`write()`] into `w` (a buffered file, say), gate by gate, without
/// building the text in memory first.
pub fn write_to(
    w: &mut impl std::io::Write,
    c: &Circuit,
    addressing: Addressing,
    comments: &[String],
) -> std::io::Result<()> {
    w.write_all(b"OPENQASM 3.0;\ninclude \"stdgates.inc\";\n")?;
    for line in comments {
        writeln!(w, "// {line}")?;
    }
    if addressing == Addressing::Logical {
        writeln!(w, "qubit[{}] q;", c.num_qubits)?;
    }
    if c.num_clbits > 0 {
        writeln!(w, "bit[{}] c;", c.num_clbits)?;
    }
    if c.global_phase != 0.0 {
        writeln!(w, "gphase({:?});", c.global_phase)?;
    }
    write_gates_to(w, &c.gates, addressing)
}

/// The gate lines of [`write_to`] alone (one statement per gate, measurements included), for
/// callers that assemble a program from pieces written once.
pub fn write_gates_to(
    w: &mut impl std::io::Write,
    gates: &[Gate],
    addressing: Addressing,
) -> std::io::Result<()> {
    let q = |w: &mut dyn std::io::Write, k: u32| match addressing {
        Addressing::Logical => write!(w, "q[{k}]"),
        Addressing::Physical => write!(w, "${k}"),
    };
    for g in gates {
        if let Gate::Measure(qb, bit) = *g {
            write!(w, "c[{bit}] = measure ")?;
            q(w, qb)?;
            w.write_all(b";\n")?;
            continue;
        }
        w.write_all(g.name().as_bytes())?;
        let params = g.params();
        if !params.is_empty() {
            w.write_all(b"(")?;
            for (i, a) in params.iter().enumerate() {
                if i > 0 {
                    w.write_all(b", ")?;
                }
                write!(w, "{a:?}")?;
            }
            w.write_all(b")")?;
        }
        w.write_all(b" ")?;
        for (i, k) in g.qubits().iter().enumerate() {
            if i > 0 {
                w.write_all(b", ")?;
            }
            q(w, *k)?;
        }
        w.write_all(b";\n")?;
    }
    Ok(())
}
