//! The `.ham` reader seen from outside: every error (message, line and column), the sample
//! files, physics checks of what the samples mean, and the writer round trip.

use phasewright::diag::Diagnostic;
use phasewright::hamiltonian::{parse_hamiltonian, HamFile};
use phasewright::lang::ham::write_hamiltonian;
use phasewright::pauli::{Pauli, PauliString, PauliSum};
use phasewright::sim::exact::spectrum;
use proptest::prelude::*;

fn errors(src: &str) -> Vec<Diagnostic> {
    match parse_hamiltonian("t.ham", src) {
        Ok(h) => panic!("expected an error, got {h:?}"),
        Err(d) => d,
    }
}

/// The single diagnostic of `src`, as (line, column, message).
fn err(src: &str) -> (usize, usize, String) {
    let d = errors(src);
    assert_eq!(d.len(), 1, "expected one diagnostic, got {d:#?}");
    assert!(d[0].hint.is_some(), "every diagnostic carries a hint");
    (d[0].line, d[0].column, d[0].message.clone())
}

fn ok(src: &str) -> HamFile {
    parse_hamiltonian("t.ham", src).unwrap_or_else(|d| panic!("{}", d[0]))
}

fn e(line: usize, column: usize, msg: &str) -> (usize, usize, String) {
    (line, column, msg.to_string())
}

// ----- lexical and term errors ------------------------------------------------------------

#[test]
fn unknown_factor_renders_with_caret_and_hint() {
    let d = errors("qubits 4\n0.25 X0 Q1\n");
    assert_eq!(
        d[0].to_string(),
        "error H103: t.ham:2:9: unknown factor `Q1`\n  |\n2 | 0.25 X0 Q1\n  |         ^^\n\
         hint: factors are X, Y, Z (Pauli) or cr, an, n (fermionic) glued to an index, e.g. `X3`, `Z{i+1}`, `cr{k}`\n"
    );
}

#[test]
fn unknown_token_at_line_start() {
    assert_eq!(
        err("qubits 4\n@ X0\n"),
        e(2, 1, "expected a term, `let` or `sum`, found `@`")
    );
}

#[test]
fn unknown_token_after_a_term() {
    assert_eq!(err("qubits 4\nX0 $\n"), e(2, 4, "unexpected `$`"));
}

#[test]
fn lowercase_pauli_letter_is_unknown() {
    assert_eq!(err("qubits 4\n0.5 x0\n"), e(2, 5, "unknown factor `x0`"));
}

#[test]
fn coefficient_after_the_factors() {
    assert_eq!(
        err("qubits 4\nX0 Z1 * 0.5\n"),
        e(2, 7, "unexpected `*` after the factors")
    );
    assert_eq!(
        err("qubits 4\nX0 2\n"),
        e(2, 4, "unexpected `2` after the factors")
    );
}

#[test]
fn two_terms_on_one_line() {
    assert_eq!(
        err("qubits 4\n0.5 X0 - 0.5 X1\n"),
        e(2, 8, "unexpected `-`: one term per line")
    );
}

#[test]
fn semicolon_at_top_level() {
    assert_eq!(
        err("qubits 4\nZ0; Z1\n"),
        e(2, 3, "`;` separates terms only inside a sum body")
    );
}

#[test]
fn unmatched_closing_brace() {
    assert_eq!(err("qubits 4\nZ0\n}\n"), e(3, 1, "unmatched `}`"));
}

#[test]
fn missing_operand() {
    assert_eq!(
        err("qubits 4\n2 *\n"),
        e(2, 4, "expected a number, a name or `(`, found end of line")
    );
}

#[test]
fn unclosed_parenthesis() {
    assert_eq!(
        err("qubits 4\n(1 + 2 Z0\n"),
        e(2, 8, "expected `)`, found `Z0`")
    );
}

#[test]
fn unclosed_index_brace() {
    assert_eq!(
        err("qubits 4\nZ{1 + 1\n"),
        e(
            2,
            8,
            "expected `}` closing the qubit index, found end of line"
        )
    );
}

#[test]
fn empty_index_braces() {
    assert_eq!(
        err("qubits 4\nZ{}\n"),
        e(2, 3, "expected a qubit index, found `}`")
    );
}

// ----- qubits ------------------------------------------------------------------------------

#[test]
fn qubits_must_come_first() {
    assert_eq!(
        err("# c\nZ0\nqubits 2\n"),
        e(2, 1, "the file must start with `qubits N`")
    );
}

#[test]
fn empty_file() {
    assert_eq!(
        err("# nothing here\n"),
        e(1, 1, "empty Hamiltonian: no `qubits N` line")
    );
}

#[test]
fn qubits_limit() {
    assert_eq!(
        err("qubits 4097\n"),
        e(1, 8, "`qubits 4097` exceeds the limit of 4096 qubits")
    );
    assert_eq!(
        err("qubits 99999999999999999999999\n"),
        e(
            1,
            8,
            "`qubits 99999999999999999999999` exceeds the limit of 4096 qubits"
        )
    );
}

#[test]
fn qubits_zero() {
    assert_eq!(
        err("qubits 0\n"),
        e(1, 8, "a Hamiltonian needs at least one qubit")
    );
}

#[test]
fn qubits_needs_a_number() {
    assert_eq!(
        err("qubits x\n"),
        e(1, 8, "expected the number of qubits, found `x`")
    );
}

#[test]
fn qubits_declared_twice() {
    assert_eq!(
        err("qubits 2\nZ0\nqubits 3\n"),
        e(3, 1, "`qubits` is declared twice")
    );
}

#[test]
fn qubits_inside_a_sum() {
    assert_eq!(
        err("qubits 2\nsum i in 0..2 { qubits 3 }\n"),
        e(2, 17, "`qubits` cannot appear inside a sum")
    );
}

#[test]
fn qubit_index_out_of_range() {
    assert_eq!(
        err("qubits 4\nZ0 Z4\n"),
        e(
            2,
            5,
            "qubit index 4 in `Z4` is out of range: the file declares `qubits 4`"
        )
    );
    assert_eq!(
        err("qubits 8\nsum i in 0..8 { Z{i} Z{i+1} }\n"),
        e(
            2,
            24,
            "qubit index 8 in `Z{i+1}` is out of range: the file declares `qubits 8`"
        )
    );
}

#[test]
fn qubit_index_negative() {
    assert_eq!(
        err("qubits 4\nZ{0 - 1}\n"),
        e(
            2,
            3,
            "qubit index -1 in `Z{0 - 1}` is negative: the file declares `qubits 4`"
        )
    );
}

#[test]
fn index_must_be_an_integer() {
    assert_eq!(
        err("qubits 4\nZ{1.5}\n"),
        e(2, 3, "an index must be an integer, found `1.5`")
    );
    assert_eq!(
        err("qubits 4\nlet h = 0.7\nZ{h}\n"),
        e(3, 3, "an index must be an integer, but `h` is 0.7")
    );
}

#[test]
fn integer_valued_lets_may_index() {
    let h = ok("qubits 8\nlet L = 8\nsum i in 0..L { Z{(i + 1) % L} }\n");
    assert_eq!(h.sum.terms.len(), 8);
}

#[test]
fn division_in_an_index() {
    assert_eq!(
        err("qubits 4\nX{4 / 2}\n"),
        e(2, 5, "`/` is not allowed in an index")
    );
}

#[test]
fn remainder_in_a_coefficient() {
    assert_eq!(
        err("qubits 4\n5 % 2 X1\n"),
        e(2, 3, "`%` is only for qubit indices")
    );
}

#[test]
fn index_overflow() {
    assert_eq!(
        err("qubits 4\nZ{3000000000 * 3000000000 * 3000000000}\n"),
        e(2, 3, "index arithmetic overflows 64-bit integers")
    );
}

// ----- let ---------------------------------------------------------------------------------

#[test]
fn let_needs_a_name() {
    assert_eq!(
        err("qubits 2\nlet = 2\n"),
        e(2, 5, "expected a name after `let`, found `=`")
    );
}

#[test]
fn let_needs_equals() {
    assert_eq!(
        err("qubits 2\nlet J 2\n"),
        e(2, 7, "expected `=` after the name, found `2`")
    );
}

#[test]
fn let_needs_a_value() {
    assert_eq!(
        err("qubits 2\nlet J =\n"),
        e(2, 8, "expected a value after `=`, found end of line")
    );
}

#[test]
fn let_name_is_a_keyword() {
    assert_eq!(
        err("qubits 2\nlet sum = 2\n"),
        e(2, 5, "`sum` is a keyword and cannot be used as a name")
    );
}

#[test]
fn let_name_is_spelled_like_a_factor() {
    assert_eq!(
        err("qubits 2\nlet X1 = 2\n"),
        e(
            2,
            5,
            "`X1` is spelled like a factor and cannot be used as a name"
        )
    );
}

#[test]
fn let_redefined() {
    assert_eq!(
        err("qubits 2\nlet J = 1\nlet J = 2\n"),
        e(3, 5, "`J` is already defined")
    );
    assert_eq!(
        err("qubits 2\nlet i = 1\nsum i in 0..2 { Z{i} }\n"),
        e(3, 5, "`i` is already defined")
    );
}

#[test]
fn undefined_name() {
    let d = errors("qubits 2\nlet J = 1\nK * Z0\n");
    assert_eq!(
        (d[0].line, d[0].column, d[0].message.as_str()),
        (3, 1, "undefined name `K`")
    );
    assert_eq!(
        d[0].hint.as_deref(),
        Some("define it first with `let K = ...`; names defined here: J")
    );
    assert_eq!(err("qubits 2\nZ{k}\n"), e(2, 3, "undefined name `k`"));
}

#[test]
fn undefined_name_hints_at_factor_spelling() {
    let d = errors("qubits 2\nX0Y1\n");
    assert_eq!(d[0].message, "undefined name `X0Y1`");
    assert_eq!(
        d[0].hint.as_deref(),
        Some("separate Pauli factors with spaces, e.g. `X0 Y1`")
    );
    let d = errors("qubits 2\nX\n");
    assert_eq!(
        d[0].hint.as_deref(),
        Some("a Pauli factor needs a qubit index, e.g. `X3` or `X{i}`")
    );
}

#[test]
fn a_name_used_before_its_let() {
    assert_eq!(
        err("qubits 2\nJ * Z0\nlet J = 1\n"),
        e(2, 1, "undefined name `J`")
    );
}

#[test]
fn division_by_zero_in_a_coefficient() {
    assert_eq!(
        err("qubits 2\nlet J = 0\n1 / (J * 2) Z0\n"),
        e(3, 5, "division by zero: `(J * 2)` is 0")
    );
}

#[test]
fn division_by_zero_in_an_index() {
    assert_eq!(
        err("qubits 2\nZ{1 % 0}\n"),
        e(2, 7, "division by zero: `0` is 0")
    );
}

#[test]
fn non_finite_coefficient() {
    assert_eq!(
        err("qubits 2\n1e308 * 10 Z0\n"),
        e(2, 1, "coefficient `1e308 * 10` is not a finite number")
    );
}

// ----- sum ---------------------------------------------------------------------------------

#[test]
fn sum_needs_a_loop_variable() {
    assert_eq!(
        err("qubits 2\nsum in 0..2 { Z0 }\n"),
        e(2, 5, "`in` is a keyword and cannot be used as a name")
    );
    assert_eq!(
        err("qubits 2\nsum 0..2 { Z0 }\n"),
        e(2, 5, "expected a loop variable after `sum`, found `0`")
    );
}

#[test]
fn sum_needs_in() {
    assert_eq!(
        err("qubits 2\nsum i over 0..2 { Z{i} }\n"),
        e(2, 7, "expected `in` after the loop variable, found `over`")
    );
}

#[test]
fn sum_needs_dots() {
    assert_eq!(
        err("qubits 2\nsum i in 0, 2 { Z{i} }\n"),
        e(2, 11, "expected `..` between the range bounds, found `,`")
    );
}

#[test]
fn sum_needs_range_bounds() {
    assert_eq!(
        err("qubits 2\nsum i in ..2 { Z{i} }\n"),
        e(2, 10, "expected the start of the range, found `.`")
    );
    assert_eq!(
        err("qubits 2\nsum i in 0.. { Z{i} }\n"),
        e(2, 14, "expected the end of the range, found `{`")
    );
}

#[test]
fn sum_needs_an_opening_brace() {
    assert_eq!(
        err("qubits 2\nsum i in 0..2 Z{i}\n"),
        e(2, 15, "expected `{` opening the sum body, found `Z`")
    );
}

#[test]
fn sum_body_never_closed() {
    assert_eq!(
        err("qubits 2\nsum i in 0..2 {\n  Z{i}\n\n"),
        e(2, 15, "unclosed `{`: the sum body never ends")
    );
}

#[test]
fn empty_range() {
    assert_eq!(
        err("qubits 8\nsum i in 3..3 { Z{i} }\n"),
        e(2, 10, "empty range `3..3`: 3..3 has no values")
    );
    assert_eq!(
        err("qubits 8\nlet n = 2\nsum i in n + 3..n { Z{i} }\n"),
        e(3, 10, "empty range `n + 3..n`: 5..2 has no values")
    );
}

#[test]
fn range_bound_must_be_an_integer() {
    assert_eq!(
        err("qubits 8\nsum i in 0..2.5 { Z{i} }\n"),
        e(2, 13, "an index must be an integer, found `2.5`")
    );
}

#[test]
fn too_many_terms() {
    // 10^4 × 10^4 = 10^8 terms, above the 10^7 limit.
    assert_eq!(
        err("qubits 2\nsum i in 0..10000 {\n  sum j in 0..10000 { Z0 }\n}\n"),
        e(3, 23, "the file expands to more than 10000000 terms")
    );
}

// ----- Hermiticity -------------------------------------------------------------------------

#[test]
fn non_hermitian_product() {
    // X·Y = iZ on one qubit (Nielsen & Chuang 2010, eq. 2.40 and below).
    let d = errors("qubits 1\n1.0 X0 Y0\n");
    assert_eq!(d.len(), 1);
    assert_eq!(
        (d[0].line, d[0].column, d[0].message.as_str()),
        (
            2,
            1,
            "the Hamiltonian is not Hermitian: `Z0` has merged coefficient 1i"
        )
    );
    assert_eq!(d[0].width, "1.0 X0 Y0".len() as u32);
}

#[test]
fn non_hermitian_after_merging_points_at_the_first_contribution() {
    assert_eq!(
        err("qubits 2\nZ1\n0.5 X0 Y0\n0.25 Y0 X0\n"),
        e(
            3,
            1,
            "the Hamiltonian is not Hermitian: `Z0` has merged coefficient 0.25i"
        )
    );
}

#[test]
fn non_hermitian_constant() {
    assert_eq!(
        err("qubits 1\n-1.5 + 2i\n"),
        e(
            2,
            1,
            "the Hamiltonian is not Hermitian: the constant term has merged coefficient -1.5+2i"
        )
    );
}

#[test]
fn round_off_below_the_relative_tolerance_is_accepted() {
    // 0.1i + 0.2i - 0.3i leaves ~5.6e-17i of round-off on coefficients of size ~0.6.
    let h = ok("qubits 1\n(1 + 0.1i) * Z0\n0.2i * Z0\n-0.3i * Z0\n");
    assert_eq!(h.sum.terms[&PauliString::single(0, Pauli::Z)], 1.0);
}

// ----- recovery ----------------------------------------------------------------------------

#[test]
fn errors_on_several_lines_are_all_reported() {
    let src =
        "qubits 4\nlet J = 1\nsum i in 0..4 {\n  -J * Z{i} Q{i}\n  X{i} @\n}\n3 X0 * 2\nZ0 ; X1\n";
    let d = errors(src);
    let pos: Vec<(usize, usize)> = d.iter().map(|d| (d.line, d.column)).collect();
    assert_eq!(pos, vec![(4, 13), (5, 8), (7, 6), (8, 4)]);
}

#[test]
fn evaluation_errors_are_all_reported() {
    let src = "qubits 4\nsum i in 0..4 {\n  Z{i+1}\n}\nlet K = 1 / 0\nZ{K}\nW * X0\nsum j in 2..2 { X{j} }\n";
    let d = errors(src);
    let got: Vec<(usize, usize)> = d.iter().map(|d| (d.line, d.column)).collect();
    // `Z{K}` is silent: `K` already failed and was reported once.
    assert_eq!(got, vec![(3, 5), (5, 13), (7, 1), (8, 10)]);
}

#[test]
fn an_error_line_ending_a_body_keeps_the_closing_brace() {
    let d = errors("qubits 2\nsum i in 0..2 { Z{i} @ }\nZ0 @\n");
    let got: Vec<(usize, usize)> = d.iter().map(|d| (d.line, d.column)).collect();
    assert_eq!(got, vec![(2, 22), (3, 4)]);
}

#[test]
fn not_a_text_file() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("bin.ham");
    std::fs::write(&path, [b'q', b'u', 0xff, 0xfe, b'\n']).unwrap();
    let err = phasewright::files::read_hamiltonian(&path).unwrap_err();
    assert_eq!(err.exit_code(), 2);
    match err {
        phasewright::error::Error::Input(d) => {
            assert_eq!(d[0].message, "not a text file (invalid UTF-8 at byte 2)");
        }
        other => panic!("unexpected {other:?}"),
    }
}

// ----- sample files and what they mean -----------------------------------------------------

fn lowest(h: &PauliSum) -> f64 {
    spectrum(h).values[0]
}

#[test]
fn sample_ising_ring() {
    let h = ok(include_str!("../examples/ising_ring8.ham"));
    assert_eq!(h.sum.num_qubits, 8);
    assert_eq!(h.terms_read, 18);
    assert_eq!(h.sum.terms.len(), 17);
    assert_eq!(h.sum.constant, -1.5);
    let zz70 = PauliString::from_factors(&[(7, Pauli::Z), (0, Pauli::Z)]).1;
    assert_eq!(h.sum.terms[&zz70], -1.0);
    let xyz = PauliString::from_factors(&[(0, Pauli::X), (1, Pauli::Y), (3, Pauli::Z)]).1;
    assert_eq!(h.sum.terms[&xyz], 0.25);
}

#[test]
fn transverse_field_ring_matches_the_free_fermion_solution() {
    // H = -J Σ Z_i Z_{i+1} - h Σ X_i on a ring of N sites. Its ground energy is
    // E0 = -Σ_k sqrt(J² + h² - 2 J h cos k), k = (2m+1)π/N, m = 0..N-1 (Pfeuty, Ann. Phys. 57,
    // 79 (1970); formula recalled from memory, the h = 0 limit E0 = -N J is an independent check).
    for (j, hx) in [(1.0, 0.7), (1.0, 1.0), (0.5, 1.3), (1.0, 0.0)] {
        let n = 8;
        let src = format!(
            "qubits {n}\nlet J = {j}\nlet h = {hx}\nsum i in 0..{n} {{ -J * Z{{i}} Z{{(i+1) % {n}}} }}\nsum i in 0..{n} {{ -h * X{{i}} }}\n"
        );
        let h = ok(&src);
        let exact: f64 = (0..n)
            .map(|m| {
                let k = (2 * m + 1) as f64 * std::f64::consts::PI / n as f64;
                (j * j + hx * hx - 2.0 * j * hx * k.cos()).sqrt()
            })
            .sum::<f64>();
        assert!((lowest(&h.sum) + exact).abs() < 1e-10, "J={j} h={hx}");
    }
}

#[test]
fn sample_heisenberg_chain() {
    let h = ok(include_str!("../examples/heisenberg_chain6.ham"));
    assert_eq!(
        (h.sum.num_qubits, h.sum.terms.len(), h.terms_read),
        (6, 15, 15)
    );
    // Two sites: σ·σ has the triplet at +1 and the singlet at -3 (σ·σ = 2(S_tot² - 3/2) with
    // S = σ/2; any quantum mechanics text, e.g. Sakurai, Modern Quantum Mechanics, §3.8).
    let two = ok("qubits 2\nX0 X1\nY0 Y1\nZ0 Z1\n");
    let v = spectrum(&two.sum).values;
    for (got, want) in v.iter().zip([-3.0, 1.0, 1.0, 1.0]) {
        assert!((got - want).abs() < 1e-12);
    }
    // The chain conserves total S_z: Σ Z_i commutes with every term.
    let sz: PauliSum = ok("qubits 6\nsum i in 0..6 { Z{i} }\n").sum;
    for p in h.sum.terms.keys() {
        let mut anti = 0;
        for z in sz.terms.keys() {
            if !p.commutes_with(z) {
                anti += 1;
            }
        }
        assert!(anti == 0 || anti == 2, "{p}");
    }
}

#[test]
fn sample_mixed_field() {
    let h = ok(include_str!("../examples/mixed_field4.ham"));
    assert_eq!(h.sum.num_qubits, 4);
    assert_eq!(h.sum.constant, 0.75);
    assert_eq!(h.sum.terms[&PauliString::single(1, Pauli::Y)], -0.2);
    assert_eq!(h.sum.terms[&PauliString::single(2, Pauli::Y)], 0.2);
    let x30 = PauliString::from_factors(&[(3, Pauli::X), (0, Pauli::X)]).1;
    assert!((h.sum.terms[&x30] - 0.4).abs() < 1e-15);
    assert_eq!(h.terms_read, 19);
}

#[test]
fn written_samples_read_back_identically() {
    for src in [
        include_str!("../examples/ising_ring8.ham"),
        include_str!("../examples/heisenberg_chain6.ham"),
        include_str!("../examples/mixed_field4.ham"),
    ] {
        let h = ok(src).sum;
        let text = write_hamiltonian(&h, "written back");
        assert_eq!(ok(&text).sum, h);
    }
}

fn arb_sum() -> impl Strategy<Value = PauliSum> {
    (1usize..=63).prop_flat_map(|n| {
        let mask = if n == 64 { u64::MAX } else { (1u64 << n) - 1 };
        let coeff = prop_oneof![
            any::<f64>().prop_filter("finite, nonzero", |c| c.is_finite() && *c != 0.0),
            (-10.0f64..10.0).prop_filter("nonzero", |c| *c != 0.0),
        ];
        (
            Just(n),
            coeff.clone(),
            proptest::collection::vec((any::<u64>(), any::<u64>(), coeff), 0..20),
        )
            .prop_map(move |(n, constant, terms)| {
                let mut h = PauliSum::new(n);
                h.constant = constant;
                for (x, z, c) in terms {
                    let p = PauliString::from_masks(x & mask, z & mask);
                    if !p.is_identity() && !h.terms.contains_key(&p) {
                        h.terms.insert(p, c);
                    }
                }
                h
            })
    })
}

proptest! {
    #[test]
    fn write_then_read_is_the_identity(h in arb_sum()) {
        let text = write_hamiltonian(&h, "random");
        let back = parse_hamiltonian("w.ham", &text).map_err(|d| TestCaseError::fail(d[0].to_string()))?;
        prop_assert_eq!(back.sum, h);
        prop_assert_eq!(back.dropped_zero, 0);
    }
}
