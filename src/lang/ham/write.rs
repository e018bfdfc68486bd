//! The `.ham` writer.
//!
//! In: a [`PauliSum`] or a [`FlatSum`] and a header comment. Out: `.ham` text — the comment
//! as `#` lines, `qubits N`, the constant as a bare number, then one line per Pauli string by
//! weight, then by the sequence of (qubit, letter) pairs. Invariant: reading the text back
//! gives exactly the same sum, because every coefficient is printed in shortest round-trip
//! form (Rust's `{}` inside `[1e-4, 1e15)`, `{:e}` outside); the bytes do not depend on the
//! number of threads.
//!
//! Cost: lines are formatted in pieces of 2¹⁴ strings, one per task, and joined in order.
//! Coefficients take the shortest digits from `zmij` (a Schubfach-family shortest-digit
//! printer) and are laid out here in the standard library's format, which a property test
//! checks bit pattern by bit pattern against `format!`.

use super::flat::FlatSum;
use crate::pauli::PauliSum;
use rayon::prelude::*;

/// Writes `h` in the `.ham` language (see the module documentation).
pub fn write_hamiltonian(h: &PauliSum, header_comment: &str) -> String {
    write_flat(&FlatSum::from_sum(h), header_comment)
}

/// Writes a flat sum in the `.ham` language: the same text as [`write_hamiltonian`] on the
/// same operator.
pub fn write_flat(h: &FlatSum, header_comment: &str) -> String {
    let mut out = String::new();
    for line in header_comment.lines() {
        if line.is_empty() {
            out.push_str("#\n");
        } else {
            out.push_str("# ");
            out.push_str(line);
            out.push('\n');
        }
    }
    out.push_str("qubits ");
    out.push_str(itoa::Buffer::new().format(h.num_qubits));
    out.push('\n');
    if h.constant != 0.0 {
        out.push_str(&format_coefficient(h.constant));
        out.push('\n');
    }
    let n = h.terms.len();
    const PIECE: usize = 1 << 14;
    let pieces: Vec<Vec<u8>> = (0..n.div_ceil(PIECE))
        .into_par_iter()
        .map(|k| {
            let range = k * PIECE..((k + 1) * PIECE).min(n);
            let mut piece = Vec::with_capacity(range.len() * 32);
            let mut digits = itoa::Buffer::new();
            let mut float = zmij::Buffer::new();
            for i in range {
                push_coefficient(&mut piece, h.terms.coeff(i), &mut float);
                for (q, letter) in h.terms.factors(i) {
                    piece.push(b' ');
                    piece.push(letter);
                    piece.extend_from_slice(digits.format(q).as_bytes());
                }
                piece.push(b'\n');
            }
            piece
        })
        .collect();
    let mut bytes = out.into_bytes();
    bytes.reserve(pieces.iter().map(Vec::len).sum());
    for piece in &pieces {
        bytes.extend_from_slice(piece);
    }
    String::from_utf8(bytes).expect("the writer writes ASCII after the UTF-8 header")
}

/// Shortest round-trip text of a coefficient; scientific notation outside `[1e-4, 1e15)`.
pub fn format_coefficient(c: f64) -> String {
    let mut s = Vec::new();
    push_coefficient(&mut s, c, &mut zmij::Buffer::new());
    String::from_utf8(s).expect("number text is ASCII")
}

/// Appends [`format_coefficient`]'s text for `c` to `out`.
fn push_coefficient(out: &mut Vec<u8>, c: f64, buf: &mut zmij::Buffer) {
    if !c.is_finite() {
        // Never in a sum (the readers refuse non-finite numbers); the standard text.
        out.extend_from_slice(format!("{c:e}").as_bytes());
        return;
    }
    let a = c.abs();
    let scientific = c != 0.0 && !(1e-4..1e15).contains(&a);
    let (digits, len, point) = shortest_digits(buf.format_finite(a));
    if c.is_sign_negative() {
        out.push(b'-');
    }
    let digits = &digits[..len];
    if len == 0 {
        // Zero: `{}` prints `0`, `{:e}` is never asked for it.
        out.push(b'0');
        return;
    }
    place_digits(out, digits, point, scientific, b"");
}

/// Appends the decimal text of the nonzero number `0.d₁d₂…dₙ × 10^point` (`digits` = d₁…dₙ,
/// no trailing zeros): `d₁.d₂…dₙe(point − 1)` when `scientific`, else plain positional text,
/// with `whole_suffix` after a number without fractional digits (`.0` for Rust's `{:?}`
/// style, nothing for `{}`). The sign is the caller's.
pub(crate) fn place_digits(
    out: &mut Vec<u8>,
    digits: &[u8],
    point: i32,
    scientific: bool,
    whole_suffix: &[u8],
) {
    let len = digits.len();
    if scientific {
        // d₁.d₂…dₙ e(point − 1)
        out.push(digits[0]);
        if len > 1 {
            out.push(b'.');
            out.extend_from_slice(&digits[1..]);
        }
        out.push(b'e');
        out.extend_from_slice(itoa::Buffer::new().format(point - 1).as_bytes());
    } else if point <= 0 {
        out.extend_from_slice(b"0.");
        out.resize(out.len() + (-point) as usize, b'0');
        out.extend_from_slice(digits);
    } else if len as i32 <= point {
        out.extend_from_slice(digits);
        out.resize(out.len() + (point - len as i32) as usize, b'0');
        out.extend_from_slice(whole_suffix);
    } else {
        out.extend_from_slice(&digits[..point as usize]);
        out.push(b'.');
        out.extend_from_slice(&digits[point as usize..]);
    }
}

/// The significant digits of a non-negative number printed by `zmij` (any of its layouts:
/// `123.45`, `0.00012`, `1.5e-7`, `1e20`), without leading or trailing zeros, their count, and
/// the position of the decimal point: the value is `0.d₁d₂…dₙ × 10^point`.
pub(crate) fn shortest_digits(s: &str) -> ([u8; 24], usize, i32) {
    let mut digits = [0u8; 24];
    let mut len = 0usize;
    let mut point: i32 = 0;
    let mut seen_point = false;
    let mut exp: i32 = 0;
    let b = s.as_bytes();
    let mut i = 0;
    while i < b.len() {
        match b[i] {
            b'0'..=b'9' => {
                if len == 0 && b[i] == b'0' {
                    // A leading zero: after the point it moves the point left.
                    if seen_point {
                        point -= 1;
                    }
                } else {
                    if len < digits.len() {
                        digits[len] = b[i];
                        len += 1;
                    }
                    if !seen_point {
                        point += 1;
                    }
                }
            }
            b'.' => seen_point = true,
            b'e' | b'E' => {
                let rest = &s[i + 1..];
                exp = rest.strip_prefix('+').unwrap_or(rest).parse().unwrap_or(0);
                break;
            }
            _ => {}
        }
        i += 1;
    }
    while len > 0 && digits[len - 1] == b'0' {
        len -= 1;
    }
    (digits, len, point + exp)
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use proptest::prelude::*;

    /// The standard library's text, the reference the writer's format is defined by.
    fn std_text(c: f64) -> String {
        let a = c.abs();
        if c != 0.0 && !(1e-4..1e15).contains(&a) {
            format!("{c:e}")
        } else {
            format!("{c}")
        }
    }

    /// `got` is the standard library's text `want` for `x`, or the other of two equally short
    /// digit strings that both read back as `x`: when the double lies exactly halfway between
    /// them (e.g. 119827834267519.125, a multiple of its 1/64 spacing) the shortest-digits
    /// routines may round the tie either way (Steele & White 1990 and Adams, "Ryū", PLDI 2018,
    /// leave the tie rule to the implementation; from memory). Both texts round-trip, which is
    /// what the readers rely on.
    pub(crate) fn same_shortest_text(got: &str, want: &str, x: f64) -> bool {
        got == want
            || (got.len() == want.len()
                && got.parse::<f64>().is_ok_and(|g| g == x)
                && want.parse::<f64>().is_ok_and(|w| w == x))
    }

    proptest! {
        /// Byte for byte the standard library's shortest round-trip text, on every kind of
        /// double: random bit patterns (subnormals and extremes included), and short decimals.
        #[test]
        fn coefficients_print_as_the_standard_library_prints_them(
            bits in any::<u64>(),
            short in -1_000_000i64..1_000_000,
            scale in -30i32..30,
        ) {
            let x = f64::from_bits(bits);
            prop_assume!(x.is_finite());
            let got = format_coefficient(x);
            prop_assert!(same_shortest_text(&got, &std_text(x), x), "{} vs {}", got, std_text(x));
            let y = short as f64 * 10f64.powi(scale);
            let got = format_coefficient(y);
            prop_assert!(same_shortest_text(&got, &std_text(y), y), "{} vs {}", got, std_text(y));
        }
    }

    #[test]
    fn coefficient_layouts_at_the_edges() {
        for c in [
            0.0,
            -0.0,
            1.0,
            -1.0,
            0.5,
            1e-4,
            9.999e-5,
            1e15,
            999999999999999.9,
            1e16,
            123.456,
            0.1 + 0.2,
            1e-20,
            5e-324,
            f64::MAX,
            f64::MIN_POSITIVE,
            100.0,
            1e22,
            1e21,
            12345678.9,
        ] {
            assert_eq!(format_coefficient(c), std_text(c), "{c:?}");
        }
    }
}
