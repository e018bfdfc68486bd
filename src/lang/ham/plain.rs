//! The fast path for the `.ham` files that programs write (`convert`, generated sums).
//!
//! In: source text. Out: the strings of its lines as flat codes ([`Terms`], file order) and,
//! merged, a [`FlatSum`] — or `None`, and the whole file goes to the full reader.
//!
//! A plain file is `qubits N`, then lines that are each an optional plain decimal coefficient
//! and Pauli factors such as `-0.25 X0 Y1 Z3`, with `#` comments and blank lines. Such a line
//! means exactly what the grammar says it means, so it skips the syntax tree and goes straight
//! to the merge (same sums, same order of additions as the evaluator). Invariant: anything
//! else (names, sums, expressions, fermionic factors, a non-ASCII byte outside a comment, an
//! index out of range, a product on one qubit with a phase ±i, a line that would need a
//! diagnostic) declines the file, so every diagnostic stays with the full reader.
//!
//! Cost: lines are independent, so the body is scanned in pieces cut at line ends, one per
//! task, byte by byte without allocating per line; coefficients with at most 19 significant
//! digits and a small exponent are converted by one exact operation (see [`decimal`]).

use super::flat::{code, FlatSum, MergeCounts, Terms};
use super::MAX_HAM_QUBITS;
use crate::pauli::{Pauli, PauliString};
use rayon::prelude::*;

/// The lines of a plain file, read but not merged.
#[derive(Clone, Debug, PartialEq)]
pub struct PlainLines {
    pub num_qubits: usize,
    /// Every line's string and coefficient, in file order.
    pub lines: Terms,
}

impl PlainLines {
    /// The merged sum (see [`FlatSum::merge`]).
    pub fn merge(&self) -> (FlatSum, MergeCounts) {
        FlatSum::merge(self.num_qubits, &self.lines)
    }
}

/// Reads a plain file; `None` when it is not one (see the module documentation).
pub fn scan(src: &str) -> Option<PlainLines> {
    // The header: the first line with code on it must be `qubits N`.
    let mut num_qubits = 0usize;
    let mut body_start = None;
    let mut offset = 0;
    for raw in src.split_inclusive('\n') {
        offset += raw.len();
        let line = raw.split('#').next().unwrap_or("").trim();
        if line.is_empty() {
            continue;
        }
        let count = line.strip_prefix("qubits ")?.trim();
        if !count.bytes().all(|b| b.is_ascii_digit()) {
            return None;
        }
        num_qubits = count.parse().ok()?;
        if num_qubits == 0 || num_qubits > MAX_HAM_QUBITS {
            return None;
        }
        body_start = Some(offset);
        break;
    }
    let body = &src[body_start?..];
    let parts: Vec<Terms> = line_chunks(body, 1 << 18)
        .par_iter()
        .map(|chunk| scan_chunk(chunk.as_bytes(), num_qubits))
        .collect::<Option<_>>()?;
    let total: usize = parts.iter().map(Terms::len).sum();
    if total > super::MAX_TERMS {
        return None;
    }
    let mut lines = Terms::with_capacity(total);
    for part in &parts {
        lines.append(part);
    }
    Some(PlainLines { num_qubits, lines })
}

/// `text` cut into pieces of about `size` bytes, each ending at a line end (or the end of
/// `text`); the pieces concatenated give `text` back.
pub(super) fn line_chunks(text: &str, size: usize) -> Vec<&str> {
    let mut chunks = Vec::with_capacity(text.len() / size + 1);
    let mut rest = text;
    while !rest.is_empty() {
        let cut = if rest.len() <= size {
            rest.len()
        } else {
            // Bytes, not chars: a cut lands just after a `\n`, always a char boundary.
            rest.as_bytes()[size..]
                .iter()
                .position(|&b| b == b'\n')
                .map_or(rest.len(), |i| size + i + 1)
        };
        let (head, tail) = rest.split_at(cut);
        chunks.push(head);
        rest = tail;
    }
    chunks
}

/// Blank space inside a line, as the grammar's `sp` skips it.
#[inline]
fn is_blank(b: u8) -> bool {
    matches!(b, b' ' | b'\t' | b'\r')
}

/// True where a token may end: blank, line end, comment, end of text.
#[inline]
fn ends_token(b: &[u8], i: usize) -> bool {
    i == b.len() || is_blank(b[i]) || b[i] == b'\n' || b[i] == b'#'
}

/// The strings of the lines in `chunk` (after the header), in line order; `None` when a line
/// is not plain.
fn scan_chunk(b: &[u8], num_qubits: usize) -> Option<Terms> {
    let mut terms = Terms::with_capacity(b.len() / 20 + 1);
    let mut codes: Vec<u16> = Vec::with_capacity(16);
    let mut i = 0;
    let n = b.len();
    while i < n {
        while i < n && is_blank(b[i]) {
            i += 1;
        }
        if i == n {
            break;
        }
        match b[i] {
            b'\n' => {
                i += 1;
                continue;
            }
            b'#' => {
                i = skip_comment(b, i);
                continue;
            }
            _ => {}
        }
        // The coefficient, or 1 when the line starts with a factor.
        let coeff = if b[i].is_ascii_alphabetic() {
            1.0
        } else {
            let start = i;
            if b[i] == b'-' {
                i += 1;
            }
            // Only what the grammar's number rule reads: digits, `.`, an exponent.
            if !(i < n && b[i].is_ascii_digit()) {
                return None;
            }
            while i < n && matches!(b[i], b'0'..=b'9' | b'.' | b'e' | b'E' | b'+' | b'-') {
                i += 1;
            }
            if !ends_token(b, i) {
                return None;
            }
            let v = decimal(&b[start..i])?;
            if !v.is_finite() {
                return None;
            }
            v
        };
        // Factors up to the line end.
        codes.clear();
        loop {
            while i < n && is_blank(b[i]) {
                i += 1;
            }
            if i == n {
                break;
            }
            if b[i] == b'\n' {
                i += 1;
                break;
            }
            if b[i] == b'#' {
                i = skip_comment(b, i);
                break;
            }
            let p = match b[i] {
                b'X' => Pauli::X,
                b'Y' => Pauli::Y,
                b'Z' => Pauli::Z,
                _ => return None,
            };
            i += 1;
            let start = i;
            let mut q = 0usize;
            while i < n && b[i].is_ascii_digit() {
                q = q * 10 + usize::from(b[i] - b'0');
                if q >= num_qubits {
                    return None;
                }
                i += 1;
            }
            // At least one digit, no leading zero, nothing glued on.
            if i == start || (i - start > 1 && b[start] == b'0') || !ends_token(b, i) {
                return None;
            }
            codes.push(code(q, p));
        }
        if !codes.windows(2).all(|w| (w[0] >> 2) < (w[1] >> 2)) {
            canonical(&mut codes)?;
        }
        terms.push(&codes, coeff);
        if terms.len() > super::MAX_TERMS {
            return None;
        }
    }
    Some(terms)
}

/// Index just past the line end after a `#` at `i` (or the end of the text).
#[inline]
fn skip_comment(b: &[u8], i: usize) -> usize {
    b[i..]
        .iter()
        .position(|&c| c == b'\n')
        .map_or(b.len(), |k| i + k + 1)
}

/// Puts the codes of one line in canonical order; factors on one qubit are multiplied out.
/// `None` when a product carries a phase ±i: whether the merged coefficient is then real is
/// the evaluator's to decide (with a diagnostic when it is not).
fn canonical(codes: &mut Vec<u16>) -> Option<()> {
    // Stable, by qubit only: factors on different qubits commute, but two on one qubit keep
    // the order they were written in (`Z0 X0 Z0` is `−X0`, not `X0 Z0 Z0 = X0`).
    codes.sort_by_key(|&c| c >> 2);
    if codes.windows(2).all(|w| (w[0] >> 2) < (w[1] >> 2)) {
        return Some(());
    }
    let factors: Vec<(usize, Pauli)> = codes
        .iter()
        .map(|&c| {
            let (q, l) = super::flat::decode(c);
            let p = match l {
                b'X' => Pauli::X,
                b'Y' => Pauli::Y,
                _ => Pauli::Z,
            };
            (q, p)
        })
        .collect();
    let (phase, p): (_, PauliString) = PauliString::from_factors(&factors);
    if phase != num_complex::Complex64::new(1.0, 0.0) {
        return None;
    }
    codes.clear();
    codes.extend(p.support_iter().map(|q| code(q, p.get(q))));
    Some(())
}

/// Powers of ten that `f64` holds exactly.
const EXACT_POW10: [f64; 23] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16,
    1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
];

/// The value of a decimal token (`-`? digits, `.`, exponent), correctly rounded; `None` when
/// the standard library's parser rejects it.
///
/// When the significant digits form an integer `m ≤ 2⁵³` and the decimal exponent `e` has
/// `|e| ≤ 22`, both `m` and `10^|e|` are exact doubles and one multiplication or division
/// rounds the exact quotient once, so the result is the correctly rounded value (Clinger,
/// "How to read floating point numbers accurately", PLDI 1990, the fast path of section 5).
/// Every other token goes to `str::parse`, which is correctly rounded everywhere.
pub fn decimal(tok: &[u8]) -> Option<f64> {
    let slow = || std::str::from_utf8(tok).ok()?.parse::<f64>().ok();
    let (neg, digits) = match tok.split_first() {
        Some((b'-', rest)) => (true, rest),
        _ => (false, tok),
    };
    let mut m: u64 = 0;
    let mut sig = 0u32;
    let mut exp: i32 = 0;
    let mut i = 0;
    let mut seen_digit = false;
    while i < digits.len() && digits[i].is_ascii_digit() {
        if m != 0 || digits[i] != b'0' {
            sig += 1;
        }
        m = m.wrapping_mul(10).wrapping_add(u64::from(digits[i] - b'0'));
        seen_digit = true;
        i += 1;
    }
    if i < digits.len() && digits[i] == b'.' {
        i += 1;
        while i < digits.len() && digits[i].is_ascii_digit() {
            if m != 0 || digits[i] != b'0' {
                sig += 1;
            }
            m = m.wrapping_mul(10).wrapping_add(u64::from(digits[i] - b'0'));
            exp -= 1;
            seen_digit = true;
            i += 1;
        }
    }
    if i < digits.len() && (digits[i] == b'e' || digits[i] == b'E') {
        i += 1;
        let mut eneg = false;
        if i < digits.len() && (digits[i] == b'+' || digits[i] == b'-') {
            eneg = digits[i] == b'-';
            i += 1;
        }
        let start = i;
        let mut e: i32 = 0;
        while i < digits.len() && digits[i].is_ascii_digit() {
            if e > 10_000 {
                return slow();
            }
            e = e * 10 + i32::from(digits[i] - b'0');
            i += 1;
        }
        if i == start {
            return slow();
        }
        exp += if eneg { -e } else { e };
    }
    if !seen_digit || i != digits.len() || sig > 19 || m > 1 << 53 || exp.abs() > 22 {
        return slow();
    }
    let v = m as f64;
    let v = if exp < 0 {
        v / EXACT_POW10[(-exp) as usize]
    } else {
        v * EXACT_POW10[exp as usize]
    };
    Some(if neg { -v } else { v })
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    proptest! {
        /// Against the standard library's correctly rounded parser (the reference), on tokens
        /// built from random digits, points and exponents, fast path and fallback alike.
        #[test]
        fn decimal_equals_the_standard_parser(
            neg in any::<bool>(),
            int in "[0-9]{0,21}",
            frac in proptest::option::of("[0-9]{0,21}"),
            exp in proptest::option::of((prop_oneof![Just(""), Just("+"), Just("-")], 0i32..40)),
            upper in any::<bool>(),
        ) {
            let mut tok = String::new();
            if neg {
                tok.push('-');
            }
            tok.push_str(&int);
            if let Some(f) = &frac {
                tok.push('.');
                tok.push_str(f);
            }
            if let Some((s, e)) = &exp {
                tok.push(if upper { 'E' } else { 'e' });
                tok.push_str(s);
                tok.push_str(&e.to_string());
            }
            let expected = tok.parse::<f64>().ok();
            let got = decimal(tok.as_bytes());
            prop_assert_eq!(got.map(f64::to_bits), expected.map(f64::to_bits), "{}", tok);
        }

        /// Round trip of any finite double through its shortest text.
        #[test]
        fn decimal_reads_shortest_texts_back(bits in any::<u64>()) {
            let x = f64::from_bits(bits);
            prop_assume!(x.is_finite());
            for text in [format!("{x}"), format!("{x:e}")] {
                prop_assert_eq!(decimal(text.as_bytes()).map(f64::to_bits), Some(bits), "{}", text);
            }
        }
    }

    #[test]
    fn decimal_hand_cases() {
        // Values by hand; `0.1` is the double nearest 1/10 (IEEE 754-2008, round to nearest).
        assert_eq!(decimal(b"0.25"), Some(0.25));
        assert_eq!(decimal(b"-2.5e-3"), Some(-0.0025));
        assert_eq!(decimal(b"1."), Some(1.0));
        assert_eq!(decimal(b"0.1"), Some(0.1));
        assert_eq!(decimal(b"-0").map(f64::to_bits), Some((-0.0f64).to_bits()));
        assert_eq!(decimal(b"1e400"), Some(f64::INFINITY));
        assert_eq!(decimal(b"1e"), None);
        assert_eq!(decimal(b"1.2.3"), None);
        assert_eq!(decimal(b"."), None);
    }
}
