//! Fermionic terms in `.ham` files, FCIDUMP errors, and the `convert` command end to end.

use assert_cmd::Command;
use phasewright::fermion::fcidump::parse_fcidump;
use phasewright::fermion::sector::{lowest_in_sector, sector_basis};
use phasewright::fermion::Encoding;
use phasewright::hamiltonian::{parse_hamiltonian, parse_hamiltonian_with, HamRead};
use phasewright::pauli::{Pauli, PauliString};
use phasewright::sim::exact::spectrum;

fn read(src: &str, enc: Option<Encoding>) -> HamRead {
    parse_hamiltonian_with("f.ham", src, enc).unwrap_or_else(|d| panic!("{}", d[0]))
}

fn err(src: &str, enc: Option<Encoding>) -> (usize, usize, String) {
    let d = parse_hamiltonian_with("f.ham", src, enc).expect_err("expected an error");
    assert_eq!(d.len(), 1, "{d:#?}");
    (d[0].line, d[0].column, d[0].message.clone())
}

fn e(l: usize, c: usize, m: &str) -> (usize, usize, String) {
    (l, c, m.to_string())
}

#[test]
fn number_operator_maps_to_one_half_minus_z() {
    // Jordan–Wigner: n_k = (1 - Z_k)/2 (Jordan & Wigner 1928; Seeley, Richard & Love 2012, eq. 12).
    let r = read("qubits 2\nencoding jw\n2 * n1\n", None);
    assert_eq!(r.encoding, Some(Encoding::JordanWigner));
    assert_eq!(r.fermionic_terms, 1);
    assert_eq!(r.ham.sum.constant, 1.0);
    assert_eq!(r.ham.sum.terms[&PauliString::single(1, Pauli::Z)], -1.0);
    assert_eq!(r.ham.sum.terms.len(), 1);
}

#[test]
fn hopping_with_hermitian_conjugate() {
    // a†_0 a_1 + a†_1 a_0 = (X0 X1 + Y0 Y1)/2 under Jordan–Wigner (Seeley, Richard & Love 2012).
    let r = read(
        "qubits 2\ncr{0} an{1} + h.c.\n",
        Some(Encoding::JordanWigner),
    );
    let xx = PauliString::from_factors(&[(0, Pauli::X), (1, Pauli::X)]).1;
    let yy = PauliString::from_factors(&[(0, Pauli::Y), (1, Pauli::Y)]).1;
    assert_eq!(r.ham.sum.terms[&xx], 0.5);
    assert_eq!(r.ham.sum.terms[&yy], 0.5);
    assert_eq!(r.ham.sum.terms.len(), 2);
}

#[test]
fn complex_hopping_gives_the_antisymmetric_strings() {
    // Jordan–Wigner: a†_0 a_1 = ¼ (X0 - iY0) Z0 (X1 + iY1) = ¼ (X0 X1 + Y0 Y1 + iX0 Y1 - iY0 X1),
    // so i a†_0 a_1 + h.c. = (Y0 X1 - X0 Y1)/2.
    let r = read(
        "qubits 2\n1i * cr0 an1 + h.c.\n",
        Some(Encoding::JordanWigner),
    );
    let xy = PauliString::from_factors(&[(0, Pauli::X), (1, Pauli::Y)]).1;
    let yx = PauliString::from_factors(&[(0, Pauli::Y), (1, Pauli::X)]).1;
    assert_eq!(r.ham.sum.terms[&xy], -0.5);
    assert_eq!(r.ham.sum.terms[&yx], 0.5);
    assert_eq!(r.ham.sum.terms.len(), 2);
}

#[test]
fn mixed_file_with_encoding_line() {
    let r = read("qubits 2\nencoding bk\n0.5 Z0\nn{0}\n", None);
    assert_eq!(r.encoding, Some(Encoding::BravyiKitaev));
    // BK: n_0 = (1 - Z_0)/2 too, since qubit 0 stores mode 0 alone; merged with 0.5 Z0 → 0.
    assert!(!r
        .ham
        .sum
        .terms
        .contains_key(&PauliString::single(0, Pauli::Z)));
    assert_eq!(r.ham.sum.constant, 0.5);
}

#[test]
fn hubbard_dimer_matches_the_two_site_formula() {
    // Two-site Hubbard model at half filling (2 electrons): E0 = (U - sqrt(U² + 16 t²)) / 2
    // (the standard dimer result, e.g. Essler et al., The One-Dimensional Hubbard Model (2005),
    // recalled from memory; common practice).
    for enc in [Encoding::JordanWigner, Encoding::BravyiKitaev] {
        for (t, u) in [(1.0f64, 4.0f64), (0.5, 1.0), (1.0, 0.0)] {
            let src = format!(
                "qubits 4\nlet t = {t}\nlet U = {u}\nsum spin in 0..2 {{ -t * cr{{spin}} an{{2 + spin}} + h.c. }}\nsum s in 0..2 {{ U * n{{2*s}} n{{2*s + 1}} }}\n"
            );
            let h = read(&src, Some(enc)).ham.sum;
            let e = lowest_in_sector(&h, &sector_basis(enc, 4, 2, None)).unwrap();
            let exact = (u - (u * u + 16.0 * t * t).sqrt()) / 2.0;
            assert!(
                (e - exact).abs() < 1e-12,
                "{enc} t={t} U={u}: {e} vs {exact}"
            );
        }
    }
}

#[test]
fn hubbard_ring_example_in_both_encodings() {
    let src = include_str!("../examples/hubbard_ring4.ham");
    let jw = read(src, None);
    assert_eq!(jw.encoding, Some(Encoding::JordanWigner));
    assert_eq!(jw.fermionic_terms, 4 * (2 * 2 + 1));
    let bk = read(&src.replace("encoding jw", "encoding bk"), None);
    let a = spectrum(&jw.ham.sum).values;
    let b = spectrum(&bk.ham.sum).values;
    for (x, y) in a.iter().zip(&b) {
        assert!((x - y).abs() < 1e-10);
    }
    // Half filling (4 electrons) is the ground sector with mu = U/2 (particle-hole symmetry):
    // the lowest eigenvalue over all sectors is reached at N = 4.
    let e4 = lowest_in_sector(
        &jw.ham.sum,
        &sector_basis(Encoding::JordanWigner, 8, 4, None),
    )
    .unwrap();
    assert!((e4 - a[0]).abs() < 1e-10);
}

// ----- errors --------------------------------------------------------------------------------

#[test]
fn fermionic_terms_need_an_encoding() {
    assert_eq!(
        err("qubits 2\n\ncr0 an1 + h.c.\n", None),
        e(3, 1, "fermionic terms need an encoding")
    );
}

#[test]
fn mixed_terms_need_the_encoding_line() {
    assert_eq!(
        err("qubits 2\nZ0\nn1\n", Some(Encoding::JordanWigner)),
        e(
            3,
            1,
            "this file mixes Pauli and fermionic terms but does not say which encoding applies"
        )
    );
}

#[test]
fn file_and_command_encodings_conflict() {
    assert_eq!(
        err("qubits 2\nencoding jw\nn1\n", Some(Encoding::BravyiKitaev)),
        e(
            2,
            1,
            "the file says `encoding jw` but the command asks for `bk`"
        )
    );
}

#[test]
fn unknown_encoding() {
    assert_eq!(
        err("qubits 2\nencoding parity\n", None),
        e(2, 10, "unknown encoding `parity`")
    );
    assert_eq!(
        err("qubits 2\nencoding\n", None),
        e(
            2,
            9,
            "expected `jw` or `bk` after `encoding`, found end of line"
        )
    );
}

#[test]
fn encoding_declared_twice_or_inside_a_sum() {
    assert_eq!(
        err("qubits 2\nencoding jw\nencoding jw\n", None),
        e(3, 1, "`encoding` is declared twice")
    );
    assert_eq!(
        err("qubits 2\nsum i in 0..2 { encoding jw }\n", None),
        e(2, 17, "`encoding` cannot appear inside a sum")
    );
}

#[test]
fn a_term_mixing_factor_kinds() {
    assert_eq!(
        err("qubits 2\nencoding jw\n0.5 Z0 n1\n", None),
        e(3, 1, "a term mixes Pauli and fermionic factors")
    );
}

#[test]
fn mode_index_out_of_range() {
    assert_eq!(
        err("qubits 2\nencoding jw\ncr{2} an0 + h.c.\n", None),
        e(
            3,
            4,
            "mode index 2 in `cr{2}` is out of range: the file declares `qubits 2`"
        )
    );
}

#[test]
fn non_hermitian_fermionic_term() {
    // a†_0 a_1 alone is not Hermitian: its image has (X0 Y1 - Y0 X1) parts with imaginary weight.
    let (l, c, m) = err("qubits 2\nencoding jw\n0.5 X0\ncr0 an1\n", None);
    assert_eq!((l, c), (4, 1));
    assert!(m.starts_with("the Hamiltonian is not Hermitian: `"), "{m}");
}

#[test]
fn factor_names_are_reserved() {
    assert_eq!(
        err("qubits 2\nlet n1 = 2\n", None),
        e(
            2,
            5,
            "`n1` is spelled like a factor and cannot be used as a name"
        )
    );
    // `n` alone stays an ordinary name.
    let h = parse_hamiltonian("f.ham", "qubits 2\nlet n = 2\nn * Z0\n").unwrap();
    assert_eq!(h.sum.terms[&PauliString::single(0, Pauli::Z)], 2.0);
}

// ----- FCIDUMP errors --------------------------------------------------------------------------

fn ferr(src: &str) -> Vec<(usize, usize, String)> {
    parse_fcidump("x.fcidump", src)
        .expect_err("expected an error")
        .into_iter()
        .map(|d| (d.line, d.column, d.message))
        .collect()
}

const HEAD: &str = " &FCI NORB=2,NELEC=2,MS2=0,\n ORBSYM=1,1,\n &END\n";

#[test]
fn fcidump_reads_fortran_exponents_and_slash_terminators() {
    let src = " &FCI NORB=1,NELEC=2,\n /\n 5.0D-01 1 1 1 1\n -1.25d0 1 1 0 0\n 0.1 0 0 0 0\n";
    let ints = parse_fcidump("x.fcidump", src).unwrap();
    assert_eq!(
        (
            ints.eri(0, 0, 0, 0),
            ints.h(0, 0),
            ints.core_energy,
            ints.ms2
        ),
        (0.5, -1.25, 0.1, 0)
    );
}

#[test]
fn fcidump_eightfold_symmetry() {
    let src = format!("{HEAD} 0.25 2 1 1 1\n");
    let ints = parse_fcidump("x.fcidump", &src).unwrap();
    for (p, q, r, s) in [(1, 0, 0, 0), (0, 1, 0, 0), (0, 0, 1, 0), (0, 0, 0, 1)] {
        assert_eq!(ints.eri(p, q, r, s), 0.25);
    }
    assert_eq!(ints.eri(1, 1, 0, 0), 0.0);
}

#[test]
fn fcidump_header_never_closed() {
    assert_eq!(
        ferr(" &FCI NORB=2,NELEC=2,\n 0.5 1 1 1 1\n"),
        vec![e(3, 1, "truncated file: the `&FCI` header never ends")]
    );
}

#[test]
fn fcidump_truncated_line() {
    assert_eq!(
        ferr(&format!("{HEAD} 0.5 1 1 1 1\n 0.25 1 2")),
        vec![e(
            5,
            2,
            "truncated integral line: 3 of 5 fields (a value and four orbital indices)"
        )]
    );
}

#[test]
fn fcidump_no_integrals() {
    assert_eq!(
        ferr(HEAD),
        vec![e(4, 1, "truncated file: no integrals after the header")]
    );
}

#[test]
fn fcidump_missing_fields() {
    assert_eq!(
        ferr(" &FCI NELEC=2,\n &END\n 1 0 0 0 0\n"),
        vec![e(1, 2, "missing header field NORB")]
    );
    assert_eq!(
        ferr(" &FCI NORB=2,\n &END\n 1 0 0 0 0\n"),
        vec![e(1, 2, "missing header field NELEC")]
    );
}

#[test]
fn fcidump_bad_header_values() {
    assert_eq!(
        ferr(" &FCI NORB=two,NELEC=2,\n &END\n"),
        vec![e(1, 12, "NORB must be an integer, found `two`")]
    );
    assert_eq!(
        ferr(" &FCI NORB=2,NELEC=5,\n &END\n 1 0 0 0 0\n"),
        vec![e(1, 20, "NELEC = 5 with MS2 = 0 does not fit 2 orbitals")]
    );
    assert_eq!(
        ferr(" &FCI NORB=2,NELEC=2,ORBSYM=1,\n &END\n 1 0 0 0 0\n"),
        vec![e(1, 22, "ORBSYM lists 1 orbitals but NORB = 2")]
    );
    assert_eq!(
        ferr(" &FCI NORB=2,NELEC=2,IUHF=1,\n &END\n 1 0 0 0 0\n"),
        vec![e(
            1,
            22,
            "unrestricted (spin-separated) integral files are not supported"
        )]
    );
}

#[test]
fn fcidump_index_beyond_norb() {
    assert_eq!(
        ferr(&format!("{HEAD} 0.5 1 3 1 1\n")),
        vec![e(4, 8, "orbital index 3 is outside 0..=2 (NORB = 2)")]
    );
}

#[test]
fn fcidump_non_numeric_value() {
    assert_eq!(
        ferr(&format!("{HEAD} 0.5x 1 1 1 1\n")),
        vec![e(4, 2, "not a number: `0.5x`")]
    );
    assert_eq!(
        ferr(&format!("{HEAD} 0.5 1 a 1 1\n")),
        vec![e(4, 8, "orbital index must be an integer, found `a`")]
    );
}

#[test]
fn fcidump_bad_index_pattern() {
    assert_eq!(
        ferr(&format!("{HEAD} 0.5 1 0 1 0\n")),
        vec![e(4, 6, "index pattern `1 0 1 0` is not an FCIDUMP entry")]
    );
}

#[test]
fn fcidump_all_line_errors_are_reported() {
    let got = ferr(&format!("{HEAD} x 1 1 1 1\n 0.5 1 1\n 0.5 9 1 1 1\n"));
    let pos: Vec<(usize, usize)> = got.iter().map(|(l, c, _)| (*l, *c)).collect();
    assert_eq!(pos, vec![(4, 2), (5, 2), (6, 6)]);
}

// ----- the command -------------------------------------------------------------------------------

#[test]
fn convert_writes_a_file_that_reads_back() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("h2.ham");
    let data = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/data/h2_sto3g_r1.4.fcidump"
    );
    let assert = Command::cargo_bin("phasewright")
        .unwrap()
        .args(["convert", data, "--encoding", "jw", "-o"])
        .arg(&out)
        .assert()
        .success();
    let stdout = String::from_utf8(assert.get_output().stdout.clone()).unwrap();
    assert!(
        stdout.contains("Hartree-Fock state (qubit 0 first): 1100"),
        "{stdout}"
    );
    let text = std::fs::read_to_string(&out).unwrap();
    let h = parse_hamiltonian("h2.ham", &text).unwrap().sum;
    // Same operator as the library builds: the lowest eigenvalue is the full-CI energy
    // (-1.1373 hartree, Szabo & Ostlund 1989).
    assert_eq!((spectrum(&h).values[0] * 1e4).round() / 1e4, -1.1373);
}

#[test]
fn convert_refuses_bad_input_and_writes_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out.ham");
    let data = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/data/h2_sto3g_r1.4.fcidump"
    );
    Command::cargo_bin("phasewright")
        .unwrap()
        .args(["convert", data, "-o"])
        .arg(&out)
        .assert()
        .code(2);
    let bad = dir.path().join("bad.ham");
    std::fs::write(&bad, "qubits 2\ncr0 an5 + h.c.\n").unwrap();
    let assert = Command::cargo_bin("phasewright")
        .unwrap()
        .args(["convert", "--encoding", "bk", "-o"])
        .arg(&out)
        .arg(&bad)
        .assert()
        .code(2);
    let stderr = String::from_utf8(assert.get_output().stderr.clone()).unwrap();
    assert!(
        stderr.contains("bad.ham:2:7: mode index 5 in `an5` is out of range"),
        "{stderr}"
    );
    assert!(!out.exists());
    assert_eq!(
        std::fs::read_dir(dir.path()).unwrap().count(),
        1,
        "no temporary files left"
    );
}
