//! Reader for the OpenQASM 3 subset that [`super::write`] produces.
//!
//! One statement per `;`. Each statement is parsed by a small nom parser; on failure the
//! diagnostic points at the statement's first character and names what was expected, or, for
//! an unknown gate or an out-of-range qubit or bit, at that name or operand.

use crate::circuit::{Circuit, Gate};
use crate::diag::{Code, Diagnostic};
use crate::lang::syntax_error::Res;
use crate::qasm::Addressing;
use nom::branch::alt;
use nom::bytes::complete::tag;
use nom::character::complete::{char, digit1, multispace0};
use nom::combinator::{map, map_res, opt};
use nom::multi::separated_list1;
use nom::number::complete::double;
use nom::sequence::{delimited, pair, preceded, tuple};

/// A parsed program: the circuit, how it addressed its qubits (hardware qubits `$k` or a
/// `qubit[n] q;` register), and where each gate's statement sits in the source.
#[derive(Clone, Debug, PartialEq)]
pub struct QasmProgram {
    pub circuit: Circuit,
    /// [`Addressing::Physical`] for `$k`; [`Addressing::Logical`] for a register (and for a
    /// program that names no qubit).
    pub addressing: Addressing,
    /// `spans[i]` = (byte offset, byte length without the `;`) of the statement of
    /// `circuit.gates[i]` (measurements included), for diagnostics that point at a gate.
    pub spans: Vec<(usize, usize)>,
}

#[derive(Clone, Copy, Debug, PartialEq)]
enum Operand {
    Reg(u32),
    Hw(u32),
}

fn ws<'a, O>(p: impl FnMut(&'a str) -> Res<'a, O>) -> impl FnMut(&'a str) -> Res<'a, O> {
    delimited(multispace0, p, multispace0)
}

fn uint(i: &str) -> Res<'_, u32> {
    map_res(digit1, str::parse)(i)
}

fn ident(i: &str) -> Res<'_, &str> {
    crate::lang::ident::ident(i)
}

fn operand(i: &str) -> Res<'_, Operand> {
    ws(alt((
        map(preceded(char('$'), uint), Operand::Hw),
        map(
            preceded(pair(tag("q"), ws(char('['))), pair(uint, ws(char(']')))),
            |(k, _)| Operand::Reg(k),
        ),
    )))(i)
}

// Angle expressions: sums of products of signed atoms (numbers, pi, π, parentheses).
fn atom(i: &str) -> Res<'_, f64> {
    ws(alt((
        map(alt((tag("pi"), tag("π"))), |_| std::f64::consts::PI),
        delimited(char('('), expr, char(')')),
        map(preceded(char('-'), atom), |v| -v),
        double,
    )))(i)
}

fn term(i: &str) -> Res<'_, f64> {
    let (mut i, mut v) = atom(i)?;
    while let Ok((rest, (op, rhs))) = pair(ws(alt((char('*'), char('/')))), atom)(i) {
        v = if op == '*' { v * rhs } else { v / rhs };
        i = rest;
    }
    Ok((i, v))
}

fn expr(i: &str) -> Res<'_, f64> {
    let (mut i, mut v) = term(i)?;
    while let Ok((rest, (op, rhs))) = pair(ws(alt((char('+'), char('-')))), term)(i) {
        v = if op == '+' { v + rhs } else { v - rhs };
        i = rest;
    }
    Ok((i, v))
}

enum Stmt {
    Header,
    Include,
    QubitDecl(u32),
    BitDecl(u32),
    GPhase(f64),
    Barrier,
    Measure(u32, Operand),
    Gate(String, Vec<f64>, Vec<Operand>),
}

fn statement(i: &str) -> Res<'_, Stmt> {
    alt((
        map(tuple((tag("OPENQASM"), ws(double))), |_| Stmt::Header),
        map(tuple((tag("include"), ws(tag("\"stdgates.inc\"")))), |_| {
            Stmt::Include
        }),
        map(
            tuple((
                tag("qubit"),
                ws(char('[')),
                uint,
                ws(char(']')),
                ws(tag("q")),
            )),
            |(_, _, n, _, _)| Stmt::QubitDecl(n),
        ),
        map(
            tuple((tag("bit"), ws(char('[')), uint, ws(char(']')), ws(tag("c")))),
            |(_, _, n, _, _)| Stmt::BitDecl(n),
        ),
        map(
            preceded(
                pair(tag("gphase"), ws(char('('))),
                pair(expr, ws(char(')'))),
            ),
            |(v, _)| Stmt::GPhase(v),
        ),
        map(
            preceded(tag("barrier"), opt(separated_list1(char(','), operand))),
            |_| Stmt::Barrier,
        ),
        map(
            tuple((
                tag("c"),
                ws(char('[')),
                uint,
                ws(char(']')),
                ws(char('=')),
                ws(tag("measure")),
                operand,
            )),
            |(_, _, b, _, _, _, q)| Stmt::Measure(b, q),
        ),
        map(
            tuple((
                ident,
                opt(delimited(
                    ws(char('(')),
                    separated_list1(char(','), expr),
                    ws(char(')')),
                )),
                separated_list1(char(','), operand),
            )),
            |(name, params, ops)| Stmt::Gate(name.to_string(), params.unwrap_or_default(), ops),
        ),
    ))(i)
}

fn make_gate(name: &str, p: &[f64], q: &[u32]) -> Result<Gate, String> {
    let want = |np: usize, nq: usize| -> Result<(), String> {
        if p.len() != np || q.len() != nq {
            Err(format!(
                "`{name}` takes {np} angle(s) and {nq} qubit(s), got {} and {}",
                p.len(),
                q.len()
            ))
        } else {
            Ok(())
        }
    };
    let g = match name {
        "h" | "x" | "y" | "z" | "s" | "sdg" | "sx" | "sxdg" => {
            want(0, 1)?;
            match name {
                "h" => Gate::H(q[0]),
                "x" => Gate::X(q[0]),
                "y" => Gate::Y(q[0]),
                "z" => Gate::Z(q[0]),
                "s" => Gate::S(q[0]),
                "sdg" => Gate::Sdg(q[0]),
                "sx" => Gate::Sx(q[0]),
                _ => Gate::Sxdg(q[0]),
            }
        }
        "rz" | "rx" | "ry" => {
            want(1, 1)?;
            match name {
                "rz" => Gate::Rz(q[0], p[0]),
                "rx" => Gate::Rx(q[0], p[0]),
                _ => Gate::Ry(q[0], p[0]),
            }
        }
        "U" => {
            want(3, 1)?;
            Gate::U(q[0], p[0], p[1], p[2])
        }
        "cx" | "cz" | "swap" => {
            want(0, 2)?;
            match name {
                "cx" => Gate::Cx(q[0], q[1]),
                "cz" => Gate::Cz(q[0], q[1]),
                _ => Gate::Swap(q[0], q[1]),
            }
        }
        _ => return Err(format!("unsupported gate `{name}`")),
    };
    Ok(g)
}

/// Strips `//` comments, keeping byte offsets intact (comment text becomes spaces).
fn blank_comments(src: &str) -> String {
    let mut out = String::with_capacity(src.len());
    for line in src.split_inclusive('\n') {
        match line.find("//") {
            Some(i) => {
                out.push_str(&line[..i]);
                for ch in line[i..].chars() {
                    if ch == '\n' {
                        out.push('\n');
                    } else {
                        out.extend(std::iter::repeat_n(' ', ch.len_utf8()));
                    }
                }
            }
            None => out.push_str(line),
        }
    }
    out
}

/// Parses a program in the writer's subset.
pub fn read(file: &str, src: &str) -> Result<QasmProgram, Diagnostic> {
    if let Some(d) = crate::diag::depth_guard(Code::QasmSyntax, file, src, "//") {
        return Err(d);
    }
    let text = blank_comments(src);
    let mut c = Circuit::new(0, 0);
    let mut physical = None::<bool>;
    let mut declared_qubits = None::<u32>;
    let mut max_hw = 0u32;
    let mut seen_header = false;
    let mut spans = Vec::new();
    let mut offset = 0usize;
    for piece in text.split_inclusive(';') {
        let start = offset + (piece.len() - piece.trim_start().len());
        offset += piece.len();
        let stmt_text = piece.trim();
        if stmt_text.is_empty() {
            continue;
        }
        let err = |msg: String, hint: &str| {
            Diagnostic::at(
                Code::QasmSyntax,
                file,
                src,
                start,
                stmt_text.len().min(40),
                msg,
                Some(hint.to_string()),
            )
        };
        // A diagnostic under `needle` where it first appears in the statement (else the
        // statement's start).
        let err_at = |needle: &str, msg: String, hint: &str| match stmt_text.find(needle) {
            Some(i) => Diagnostic::at(
                Code::QasmSyntax,
                file,
                src,
                start + i,
                needle.len(),
                msg,
                Some(hint.into()),
            ),
            None => err(msg, hint),
        };
        if !stmt_text.ends_with(';') {
            return Err(err(
                "statement is not terminated by `;`".into(),
                "every OpenQASM 3 statement ends with a semicolon",
            ));
        }
        let body = stmt_text[..stmt_text.len() - 1].trim();
        let parsed = statement(body);
        let stmt = match parsed {
            Ok((rest, s)) if rest.trim().is_empty() => s,
            _ => {
                return Err(err(
                    format!(
                        "unsupported statement `{}`",
                        body.chars().take(40).collect::<String>()
                    ),
                    "phasewright reads the OpenQASM 3 subset that it writes",
                ))
            }
        };
        if !seen_header && !matches!(stmt, Stmt::Header) {
            return Err(err(
                "missing `OPENQASM 3.0;` header".into(),
                "the first statement must be the version declaration",
            ));
        }
        let mut resolve = |ops: &[Operand]| -> Result<Vec<u32>, Diagnostic> {
            let mut qs = Vec::new();
            for op in ops {
                let (is_hw, k) = match *op {
                    Operand::Reg(k) => (false, k),
                    Operand::Hw(k) => (true, k),
                };
                if *physical.get_or_insert(is_hw) != is_hw {
                    return Err(err(
                        "mixes `$k` hardware qubits with a qubit register".into(),
                        "use one addressing mode per file",
                    ));
                }
                if is_hw {
                    max_hw = max_hw.max(k + 1);
                } else if declared_qubits.is_none_or(|n| k >= n) {
                    return Err(err_at(
                        &format!("q[{k}]"),
                        format!("qubit q[{k}] is outside the declared register"),
                        "declare `qubit[n] q;` before use, with n larger than every index",
                    ));
                }
                qs.push(k);
            }
            Ok(qs)
        };
        match stmt {
            Stmt::Header => seen_header = true,
            Stmt::Include | Stmt::Barrier => {}
            Stmt::QubitDecl(n) => declared_qubits = Some(n),
            Stmt::BitDecl(n) => c.num_clbits = n as usize,
            Stmt::GPhase(v) => c.global_phase += v,
            Stmt::Measure(b, q) => {
                let q = resolve(&[q])?[0];
                if b as usize >= c.num_clbits {
                    return Err(err_at(
                        &format!("c[{b}]"),
                        format!("bit c[{b}] is outside the declared register"),
                        "declare `bit[m] c;` with m larger than every bit index",
                    ));
                }
                c.push(Gate::Measure(q, b));
                spans.push((start, stmt_text.len() - 1));
            }
            Stmt::Gate(name, params, ops) => {
                let qs = resolve(&ops)?;
                let g = make_gate(&name, &params, &qs).map_err(|m| {
                    err_at(&name, m, "gates come from stdgates.inc (or the built-in U)")
                })?;
                c.push(g);
                spans.push((start, stmt_text.len() - 1));
            }
        }
    }
    if !seen_header {
        return Err(Diagnostic::whole_file(
            Code::QasmSyntax,
            file,
            "empty program: missing `OPENQASM 3.0;`",
            None,
        ));
    }
    let addressing = if physical.unwrap_or(false) {
        Addressing::Physical
    } else {
        Addressing::Logical
    };
    c.num_qubits = if addressing == Addressing::Physical {
        max_hw as usize
    } else {
        declared_qubits.unwrap_or(0) as usize
    };
    Ok(QasmProgram {
        circuit: c,
        addressing,
        spans,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::qasm::write;

    #[test]
    fn write_then_read_is_the_identity() {
        let mut c = Circuit::new(3, 2);
        c.extend([
            Gate::H(0),
            Gate::Rz(1, -1.234567890123e-7),
            Gate::U(2, 0.1, 2.0, -3.0),
            Gate::Cx(0, 2),
            Gate::Cz(1, 2),
            Gate::Sxdg(1),
            Gate::Measure(0, 1),
            Gate::Measure(2, 0),
        ]);
        c.global_phase = 0.25;
        for a in [Addressing::Logical, Addressing::Physical] {
            let text = write(&c, a, &["a comment".into()]);
            let back = read("t.qasm", &text).unwrap();
            assert_eq!(back.circuit, c);
            assert_eq!(back.addressing, a);
            // Every gate has the span of its own statement.
            assert_eq!(back.spans.len(), c.gates.len());
            for ((off, len), g) in back.spans.iter().zip(&c.gates) {
                let stmt = &text[*off..off + len];
                let head = if g.is_measure() { "c[" } else { g.name() };
                assert!(stmt.starts_with(head), "{stmt:?} for {g:?}");
            }
        }
    }

    #[test]
    fn angle_expressions_with_pi() {
        let p = read("t.qasm", "OPENQASM 3.0;\ninclude \"stdgates.inc\";\nqubit[1] q;\nrz(-pi/2) q[0];\nrx(2*π - pi/4) q[0];\n").unwrap();
        assert_eq!(
            p.circuit.gates[0],
            Gate::Rz(0, -std::f64::consts::FRAC_PI_2)
        );
        assert_eq!(
            p.circuit.gates[1],
            Gate::Rx(0, 2.0 * std::f64::consts::PI - std::f64::consts::FRAC_PI_4)
        );
    }

    #[test]
    fn errors_point_at_the_statement() {
        let src = "OPENQASM 3.0;\nqubit[2] q;\nccx q[0], q[1];\n";
        let d = read("t.qasm", src).unwrap_err();
        assert_eq!((d.line, d.column), (3, 1));
        assert!(d.message.contains("`ccx`"), "{}", d.message);
        let d = read("t.qasm", "OPENQASM 3.0;\nqubit[2] q;\nh q[2];\n").unwrap_err();
        assert!(d.message.contains("outside the declared register"));
        assert_eq!((d.line, d.column, d.width), (3, 3, 4), "caret under `q[2]`");
        let d = read(
            "t.qasm",
            "OPENQASM 3.0;\nqubit[2] q;\nbit[1] c;\nc[1] = measure q[0];\n",
        )
        .unwrap_err();
        assert_eq!((d.line, d.column, d.width), (4, 1, 4), "caret under `c[1]`");
        let d = read("t.qasm", "qubit[2] q;\n").unwrap_err();
        assert!(d.message.contains("header"));
        let d = read("t.qasm", "OPENQASM 3.0;\nqubit[2] q;\nh q[0]").unwrap_err();
        assert!(d.message.contains("terminated"));
    }
}
