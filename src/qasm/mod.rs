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
//! `barrier`). Out: a [`Circuit`] or a [`Diagnostic`](crate::diag::Diagnostic) pointing at the first unsupported
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
    let mut out = Vec::new();
    push_angle(&mut out, a, &mut zmij::Buffer::new());
    String::from_utf8(out).expect("number text is ASCII")
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
    write_header(
        w,
        c.num_qubits,
        c.num_clbits,
        c.global_phase,
        addressing,
        comments,
    )?;
    write_gates_to(w, &c.gates, addressing)
}

/// The lines of [`write_to`] before the first gate: version, include, comments, declarations
/// and the global phase, for callers that write the gates from pieces ([`write_gate_iter`]).
pub fn write_header(
    w: &mut impl std::io::Write,
    num_qubits: usize,
    num_clbits: usize,
    global_phase: f64,
    addressing: Addressing,
    comments: &[String],
) -> std::io::Result<()> {
    w.write_all(b"OPENQASM 3.0;\ninclude \"stdgates.inc\";\n")?;
    for line in comments {
        writeln!(w, "// {line}")?;
    }
    if addressing == Addressing::Logical {
        writeln!(w, "qubit[{num_qubits}] q;")?;
    }
    if num_clbits > 0 {
        writeln!(w, "bit[{num_clbits}] c;")?;
    }
    if global_phase != 0.0 {
        let mut line = b"gphase(".to_vec();
        push_angle(&mut line, global_phase, &mut zmij::Buffer::new());
        line.extend_from_slice(b");\n");
        w.write_all(&line)?;
    }
    Ok(())
}

/// The gate lines of [`write_to`] alone (one statement per gate, measurements included), for
/// callers that assemble a program from pieces written once.
///
/// Lines are laid out in a local buffer with `itoa` integers and [`push_angle`] angles (no
/// formatting machinery) and handed to `w` in blocks of about 64 KB.
pub fn write_gates_to(
    w: &mut impl std::io::Write,
    gates: &[Gate],
    addressing: Addressing,
) -> std::io::Result<()> {
    write_gate_iter(w, gates.iter().copied(), addressing)
}

/// [`write_gates_to`] over gates as they come (a peephole stream's survivors, say), without
/// collecting them first.
pub fn write_gate_iter(
    w: &mut impl std::io::Write,
    gates: impl IntoIterator<Item = Gate>,
    addressing: Addressing,
) -> std::io::Result<()> {
    const BLOCK: usize = 1 << 16;
    let mut buf: Vec<u8> = Vec::with_capacity(BLOCK + 256);
    let mut ints = itoa::Buffer::new();
    let mut floats = zmij::Buffer::new();
    let mut q = |buf: &mut Vec<u8>, k: u32| {
        match addressing {
            Addressing::Logical => buf.extend_from_slice(b"q["),
            Addressing::Physical => buf.push(b'$'),
        }
        buf.extend_from_slice(ints.format(k).as_bytes());
        if addressing == Addressing::Logical {
            buf.push(b']');
        }
    };
    for g in gates {
        if let Gate::Measure(qb, bit) = g {
            buf.extend_from_slice(b"c[");
            buf.extend_from_slice(itoa::Buffer::new().format(bit).as_bytes());
            buf.extend_from_slice(b"] = measure ");
            q(&mut buf, qb);
            buf.extend_from_slice(b";\n");
        } else {
            buf.extend_from_slice(g.name().as_bytes());
            let params = g.params();
            if !params.is_empty() {
                buf.push(b'(');
                for (i, &a) in params.iter().enumerate() {
                    if i > 0 {
                        buf.extend_from_slice(b", ");
                    }
                    push_angle(&mut buf, a, &mut floats);
                }
                buf.push(b')');
            }
            buf.push(b' ');
            for (i, &k) in g.qubits().iter().enumerate() {
                if i > 0 {
                    buf.extend_from_slice(b", ");
                }
                q(&mut buf, k);
            }
            buf.extend_from_slice(b";\n");
        }
        if buf.len() >= BLOCK {
            w.write_all(&buf)?;
            buf.clear();
        }
    }
    w.write_all(&buf)
}

/// Appends the text `format!("{a:?}")` gives (the shortest digits that read back as the same
/// `f64`, at least one digit after the point, exponent form below 1e-4 and from 1e16), built
/// from `zmij`'s shortest digits without the formatting machinery; a property test checks it
/// byte for byte against the standard library.
pub fn push_angle(out: &mut Vec<u8>, a: f64, buf: &mut zmij::Buffer) {
    if !a.is_finite() {
        out.extend_from_slice(format!("{a:?}").as_bytes());
        return;
    }
    let abs = a.abs();
    if a.is_sign_negative() {
        out.push(b'-');
    }
    if abs == 0.0 {
        out.extend_from_slice(b"0.0");
        return;
    }
    let (digits, len, point) = crate::lang::ham::write::shortest_digits(buf.format_finite(abs));
    crate::lang::ham::write::place_digits(
        out,
        &digits[..len],
        point,
        !(1e-4..1e16).contains(&abs),
        b".0",
    );
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::lang::ham::write::tests::same_shortest_text;
    use proptest::prelude::*;

    proptest! {
        /// Byte for byte the standard library's `{:?}` text, the format the reader relies on,
        /// on random bit patterns (subnormals and extremes included) and on short decimals
        /// around every layout boundary.
        #[test]
        fn angles_print_as_the_standard_library_debug_text(
            bits in any::<u64>(),
            short in -1_000_000i64..1_000_000,
            scale in -30i32..30,
        ) {
            let x = f64::from_bits(bits);
            let (got, want) = (fmt_angle(x), format!("{x:?}"));
            prop_assert!(x.is_nan() || same_shortest_text(&got, &want, x), "{} vs {}", got, want);
            let y = short as f64 * 10f64.powi(scale);
            let (got, want) = (fmt_angle(y), format!("{y:?}"));
            prop_assert!(same_shortest_text(&got, &want, y), "{} vs {}", got, want);
        }
    }

    #[test]
    fn a_tie_between_two_shortest_texts_reads_back_either_way() {
        // 119827834267519.125 lies halfway between the 17-digit texts ….12 and ….13; both are
        // shortest and both read back as the same double (found by the property test above).
        let x = f64::from_bits(4817513383424810952);
        let got = fmt_angle(x);
        assert!(
            got == "119827834267519.12" || got == "119827834267519.13",
            "{got}"
        );
        assert_eq!(got.parse::<f64>().unwrap(), x);
        assert_eq!("119827834267519.12".parse::<f64>().unwrap(), x);
        assert_eq!("119827834267519.13".parse::<f64>().unwrap(), x);
    }

    #[test]
    fn angle_layouts_at_the_edges() {
        for x in [
            0.0,
            -0.0,
            1.0,
            -1.0,
            0.1,
            1e-4,
            9.999999999999999e-5,
            1e-5,
            1e15,
            1e16,
            9999999999999998.0,
            1.5e16,
            123456.0,
            0.30000000000000004,
            f64::MAX,
            f64::MIN_POSITIVE,
            5e-324,
            std::f64::consts::PI,
            -std::f64::consts::FRAC_PI_2,
            f64::NAN,
            f64::INFINITY,
        ] {
            assert_eq!(fmt_angle(x), format!("{x:?}"), "{x:e}");
        }
    }
}
