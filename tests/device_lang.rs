//! The `.dev` language: the example devices parse into the couplings they describe, and every
//! kind of bad input becomes a diagnostic at the right place (never a panic).

use phasewright::device::{Entangler, OneQubitBasis};
use phasewright::diag::Diagnostic;
use phasewright::lang::dev::parse_device;

fn errors(src: &str) -> Vec<Diagnostic> {
    parse_device("t.dev", src).expect_err("the input is bad")
}

/// The single diagnostic for `src`, with its (line, column) and message.
fn one_error(src: &str) -> Diagnostic {
    let e = errors(src);
    assert_eq!(e.len(), 1, "{e:#?}");
    e.into_iter().next().unwrap()
}

const GOOD_HEAD: &str = "qubits 6\nnative rz sx x cx\nlattice line 6\n";

#[test]
fn the_examples_parse_into_what_they_describe() {
    let grid = parse_device(
        "chip_grid12.dev",
        include_str!("../examples/chip_grid12.dev"),
    )
    .unwrap();
    assert_eq!(grid.name, "chip-grid12");
    assert_eq!(grid.num_qubits, 12);
    // 3 × 4 grid: 3·3 + 2·4 = 17 links, plus `link 3 9`, minus `cut 5 6`.
    assert_eq!(grid.links().len(), 17);
    assert!(grid.coupled(3, 9) && !grid.coupled(5, 6));
    assert_eq!(grid.native.one_qubit, OneQubitBasis::RzSx { x: true });

    let line = parse_device("line8.dev", include_str!("../examples/line8.dev")).unwrap();
    assert_eq!(line.links().len(), 7);
    assert_eq!(line.native.two_qubit, Entangler::Cz);
    assert_eq!(
        line.gate_error(&phasewright::circuit::Gate::Measure(7, 0)),
        0.05
    );
    assert_eq!(
        line.gate_error(&phasewright::circuit::Gate::Measure(6, 0)),
        0.02
    );

    let brick = parse_device("brick16.dev", include_str!("../examples/brick16.dev")).unwrap();
    assert_eq!(brick.num_qubits, 16);
    // 4 rows × 3 horizontal links + 3 row gaps × 2 rungs.
    assert_eq!(brick.links().len(), 12 + 6);
    assert_eq!(brick.native.one_qubit, OneQubitBasis::RzRx);

    let ring = parse_device("ring10_u.dev", include_str!("../examples/ring10_u.dev")).unwrap();
    assert_eq!(ring.native.one_qubit, OneQubitBasis::U);
    assert_eq!(ring.calibration.time_ns["cx"], 400.0);
    assert_eq!(ring.calibration.time_ns["measure"], 2000.0);
    for d in [&grid, &line, &brick, &ring] {
        assert_eq!(d.components().len(), 1, "{} is connected", d.name);
    }
}

/// Degree of every qubit of `d`.
fn degrees(d: &phasewright::device::Device) -> Vec<usize> {
    (0..d.num_qubits as u32)
        .map(|q| d.neighbours(q).len())
        .collect()
}

#[test]
fn the_heavy_hexagon_examples_parse_into_what_they_describe() {
    // Counts from the hand derivation in src/device/lattice.rs (heavy-hexagon lattice of
    // Chamberland, Zhu, Yoder, Hertzberg & Cross, Phys. Rev. X 10, 011022 (2020)):
    // N = R·L − 2 + (R − 1)(L + 1)/4, E = R(L − 1) − 2 + (R − 1)(L + 1)/2.
    let d127 = parse_device("hexchip127.dev", include_str!("../examples/hexchip127.dev")).unwrap();
    assert_eq!(d127.name, "hexchip127");
    assert_eq!(d127.num_qubits, 7 * 15 - 2 + 6 * 4);
    assert_eq!(d127.num_qubits, 127);
    // 144 couplings, less `cut 62 72`.
    assert_eq!(d127.links().len(), 7 * 14 - 2 + 6 * 8 - 1);
    assert!(!d127.coupled(62, 72) && d127.coupled(72, 81) && d127.coupled(0, 14));
    assert_eq!(d127.native.one_qubit, OneQubitBasis::RzRy);
    assert_eq!(d127.native.two_qubit, Entangler::Cz);
    assert_eq!(
        d127.gate_error(&phasewright::circuit::Gate::Cz(14, 0)),
        0.021
    );
    assert_eq!(
        d127.gate_error(&phasewright::circuit::Gate::Ry(13, 0.3)),
        0.0012
    );

    let d433 = parse_device("hexchip433.dev", include_str!("../examples/hexchip433.dev")).unwrap();
    assert_eq!(d433.num_qubits, 13 * 27 - 2 + 12 * 7);
    assert_eq!(d433.num_qubits, 433);
    // 504 couplings, less `cut 210 211`.
    assert_eq!(d433.links().len(), 13 * 26 - 2 + 12 * 14 - 1);
    assert_eq!(d433.native.one_qubit, OneQubitBasis::RxRy);
    assert_eq!(d433.native.two_qubit, Entangler::Cx);
    assert_eq!(d433.calibration.time_ns["measure"], 1600.0);

    for d in [&d127, &d433] {
        assert_eq!(d.components().len(), 1, "{} is connected", d.name);
        assert!(degrees(d).iter().all(|&k| (1..=3).contains(&k)));
        let links = d.links();
        assert!(links.iter().all(|&(a, b)| a < b));
        assert!(links.windows(2).all(|w| w[0] < w[1]), "sorted, no repeats");
    }
}

#[test]
fn bridgedhex_lattices_of_several_sizes() {
    // (R, L) -> N = R·L − 2 + (R − 1)(L + 1)/4 qubits, E = R(L − 1) − 2 + (R − 1)(L + 1)/2
    // couplings (derivation in src/device/lattice.rs); the number of bridge qubits, each of
    // degree 2 and between rows, is (R − 1)(L + 1)/4.
    for (rows, len) in [
        (2u32, 3u32),
        (2, 7),
        (3, 7),
        (4, 11),
        (5, 11),
        (6, 19),
        (9, 23),
    ] {
        let src = format!("native rz sx x cx\nlattice bridgedhex {rows} {len}\n");
        let d = parse_device("hh.dev", &src).unwrap();
        let b = (len + 1) / 4;
        let n = rows * len - 2 + (rows - 1) * b;
        let e = rows * (len - 1) - 2 + 2 * (rows - 1) * b;
        assert_eq!(d.num_qubits as u32, n, "{rows} {len}");
        assert_eq!(d.links().len() as u32, e, "{rows} {len}");
        assert_eq!(d.components().len(), 1, "{rows} {len}");
        let deg = degrees(&d);
        assert!(deg.iter().all(|&k| (1..=3).contains(&k)), "{rows} {len}");
        // Euler: a connected planar graph has E − N + 1 bounded faces, one hexagonal cell
        // between consecutive bridges of each gap: (R − 1)(b − 1).
        assert_eq!(e + 1 - n, (rows - 1) * (b - 1), "{rows} {len}");
    }
}

#[test]
fn bridgedhex_sizes_that_do_not_fit_are_diagnosed() {
    // A row length that is not 4k + 3: caret under the length, nearest good lengths suggested.
    let d = one_error("native rz sx x cx\nlattice bridgedhex 7 14\n");
    assert_eq!((d.line, d.column, d.width), (2, 22, 2));
    assert!(d.message.contains("4k + 3"), "{}", d.message);
    assert!(
        d.hint.as_deref().unwrap().contains("11 or 15"),
        "{:?}",
        d.hint
    );
    let d = one_error("native rz sx x cx\nlattice bridgedhex 3 2\n");
    assert!(
        d.hint.as_deref().unwrap().starts_with("try 3;"),
        "{:?}",
        d.hint
    );
    // One row: caret under the row count.
    let d = one_error("native rz sx x cx\nlattice bridgedhex 1 15\n");
    assert_eq!((d.line, d.column, d.width), (2, 20, 1));
    assert!(d.message.contains("at least 2 rows"), "{}", d.message);
    // Arity.
    let d = one_error("native rz sx x cx\nlattice bridgedhex 7\n");
    assert!(
        d.message.contains("`bridgedhex` takes 2 sizes"),
        "{}",
        d.message
    );
    assert!(d.hint.as_deref().unwrap().contains("bridgedhex R L"));
    // Too many qubits for phasewright: 40 rows of 55 are 2744 qubits.
    let d = one_error("native rz sx x cx\nlattice bridgedhex 40 55\n");
    assert!(d.message.contains("2744-qubit lattice"), "{}", d.message);
    // More than the device declares.
    let d = one_error("qubits 100\nnative rz sx x cx\nlattice bridgedhex 7 15\n");
    assert!(
        d.message.contains("127 qubits but the device declares 100"),
        "{}",
        d.message
    );
    // Huge numbers never overflow.
    let d = one_error("native rz sx x cx\nlattice bridgedhex 4294967295 4294967295\n");
    assert_eq!(d.column, 20, "{}", d.message);
}

#[test]
fn octagon_lattice_counts() {
    // R × C squares: 4RC qubits, 4RC + R(C − 1) + (R − 1)C couplings (derivation in
    // src/device/lattice.rs).
    let d = parse_device("o.dev", "native rz sx x cx\nlattice octagon 2 3\n").unwrap();
    assert_eq!(d.num_qubits, 24);
    assert_eq!(d.links().len(), 24 + 2 * 2 + 3);
    assert_eq!(d.components().len(), 1);
    assert!(degrees(&d).iter().all(|&k| k == 2 || k == 3));
    let d = one_error("native rz sx x cx\nlattice octagon 3\n");
    assert!(
        d.message.contains("`octagon` takes 2 sizes"),
        "{}",
        d.message
    );
}

#[test]
fn unknown_gate_name() {
    let d = one_error("qubits 2\nnative rz sx foo cx\nlattice line 2\n");
    assert_eq!((d.line, d.column, d.width), (2, 14, 3));
    assert!(d.message.contains("unknown gate name `foo`"));
    assert!(d.hint.unwrap().contains("OpenQASM 3"));
    // Also in `error` and `time` lines.
    let d = one_error(&format!("{GOOD_HEAD}error cnot 0.01\n"));
    assert_eq!((d.line, d.column), (4, 7));
    let d = one_error(&format!("{GOOD_HEAD}time cnot 300ns\n"));
    assert_eq!((d.line, d.column), (4, 6));
}

#[test]
fn a_gate_that_is_not_native_cannot_carry_calibration() {
    let d = one_error(&format!("{GOOD_HEAD}error h 0.001\n"));
    assert!(d.message.contains("not a native gate"), "{}", d.message);
}

#[test]
fn native_set_that_is_not_universal() {
    // {rz, x} only reaches diagonal gates and bit flips.
    let d = one_error("qubits 2\nnative rz x cx\nlattice line 2\n");
    assert_eq!(d.line, 2);
    assert!(d.message.contains("universal"), "{}", d.message);
    // No entangling gate.
    let d = one_error("qubits 2\nnative rz sx\nlattice line 2\n");
    assert!(d.message.contains("entangling"), "{}", d.message);
}

#[test]
fn link_to_a_qubit_that_does_not_exist() {
    let d = one_error(&format!("{GOOD_HEAD}link 2 6\n"));
    assert_eq!((d.line, d.column), (4, 8));
    assert!(
        d.message.contains("qubit 6 does not exist"),
        "{}",
        d.message
    );
}

#[test]
fn self_link() {
    let d = one_error(&format!("{GOOD_HEAD}link 3 3\n"));
    assert_eq!((d.line, d.column, d.width), (4, 6, 3));
    assert!(d.message.contains("linked to itself"));
}

#[test]
fn cut_of_a_missing_coupling() {
    let d = one_error(&format!("{GOOD_HEAD}cut 0 2\n"));
    assert!(d.message.contains("no coupling 0-2"), "{}", d.message);
}

#[test]
fn error_rates_outside_zero_one() {
    let d = one_error(&format!("{GOOD_HEAD}error cx -0.1\n"));
    assert_eq!((d.line, d.column), (4, 10));
    assert!(d.message.contains("outside [0, 1]"));
    let d = one_error(&format!("{GOOD_HEAD}error readout 1.5\n"));
    assert_eq!((d.line, d.column), (4, 15));
    let d = one_error(&format!("{GOOD_HEAD}error cx 1-2 2\n"));
    assert!(d.message.contains("outside [0, 1]"));
}

#[test]
fn error_override_on_a_link_that_does_not_exist() {
    let d = one_error(&format!("{GOOD_HEAD}error cx 0-3 0.02\n"));
    assert_eq!((d.line, d.column, d.width), (4, 10, 3));
    assert!(d.message.contains("not coupled"));
}

#[test]
fn unknown_time_unit() {
    let d = one_error(&format!("{GOOD_HEAD}time cx 3ms\n"));
    assert_eq!((d.line, d.column, d.width), (4, 10, 2));
    assert!(d.message.contains("unknown time unit `ms`"));
    assert_eq!(d.hint.as_deref(), Some("use ns or us"));
    let d = one_error(&format!("{GOOD_HEAD}time cx 300\n"));
    assert!(d.message.contains("time unit"), "{}", d.message);
}

#[test]
fn coherence_times_default_and_per_qubit() {
    // `coherence 100 us` is the default with a spaced unit; `coherence 2 80us` overrides qubit 2.
    let d = parse_device(
        "t.dev",
        &format!("{GOOD_HEAD}coherence 100 us\ncoherence 2 80us # a weaker qubit\n"),
    )
    .unwrap();
    assert_eq!(d.calibration.coherence_ns, Some(100_000.0));
    assert_eq!(d.calibration.qubit_coherence_ns.get(&2), Some(&80_000.0));
    assert_eq!(d.calibration.qubit_coherence_ns.len(), 1);
    let d = parse_device("t.dev", &format!("{GOOD_HEAD}coherence 3 250ns\n")).unwrap();
    assert_eq!(d.calibration.coherence_ns, None);
    assert_eq!(d.calibration.qubit_coherence_ns.get(&3), Some(&250.0));
}

#[test]
fn bad_coherence_lines() {
    let d = one_error(&format!("{GOOD_HEAD}coherence 0us\n"));
    assert_eq!((d.line, d.column), (4, 11));
    assert!(
        d.message.contains("must be a positive number"),
        "{}",
        d.message
    );
    let d = one_error(&format!("{GOOD_HEAD}coherence 9 50us\n"));
    assert_eq!((d.line, d.column), (4, 11));
    assert!(
        d.message.contains("qubit 9 does not exist"),
        "{}",
        d.message
    );
    // Finite as written, but not once scaled to nanoseconds.
    let d = one_error(&format!("{GOOD_HEAD}coherence 1e306us\n"));
    assert!(d.message.contains("1e306 us is too large"), "{}", d.message);
    let d = one_error(&format!("{GOOD_HEAD}coherence 1ms\n"));
    assert!(
        d.message.contains("unknown time unit `ms`"),
        "{}",
        d.message
    );
    let d = one_error(&format!("{GOOD_HEAD}coherence 100\n"));
    assert!(d.message.contains("time unit"), "{}", d.message);
    let d = one_error(&format!("{GOOD_HEAD}coherence\n"));
    assert!(d.message.contains("coherence time"), "{}", d.message);
    let d = one_error(&format!("{GOOD_HEAD}coherence 1 5us\ncoherence 1 6us\n"));
    assert_eq!(d.line, 5);
    assert!(d.message.contains("given twice"), "{}", d.message);
    let d = one_error(&format!("{GOOD_HEAD}coherance 5us\n"));
    assert!(
        d.message.contains("did you mean `coherence`"),
        "{}",
        d.message
    );
}

#[test]
fn unknown_statement_and_trailing_text() {
    let d = one_error(&format!("{GOOD_HEAD}coupler 1 2\n"));
    assert!(d.message.contains("unknown statement `coupler`"));
    let d = one_error(&format!("{GOOD_HEAD}link 1 2 3\n"));
    assert!(d.message.contains("end of the line"), "{}", d.message);
    assert_eq!((d.line, d.column), (4, 10));
}

#[test]
fn every_bad_line_is_reported_in_one_run() {
    let e = errors(
        "qubits 4\nnative rz sx x cx\nlattice line 4\nlink 0 9\nerror sx 7\ntime cx 1 parsec\n",
    );
    let lines: Vec<usize> = e.iter().map(|d| d.line).collect();
    assert_eq!(lines, vec![4, 5, 6], "{e:#?}");
}

#[test]
fn missing_pieces_are_reported_for_the_whole_file() {
    let e = errors("# nothing here\n");
    assert_eq!(e.len(), 2);
    assert!(e.iter().all(|d| d.line == 0));
    let d = one_error("qubits 3\nlattice grid 2 2\nnative rz sx cx\n");
    assert!(
        d.message.contains("4 qubits but the device declares 3"),
        "{}",
        d.message
    );
}

#[test]
fn lattice_sizes_and_names() {
    let d = one_error("native rz sx cx\nlattice hex 4\n");
    assert!(d.message.contains("unknown lattice `hex`"));
    let d = one_error("native rz sx cx\nlattice grid 4\n");
    assert!(d.message.contains("takes 2 sizes"));
    // Without `qubits`, the lattice sets the size; `u` is the built-in `U`.
    let dev = parse_device("x.dev", "native u cz\nlattice ring 5\n").unwrap();
    assert_eq!(dev.num_qubits, 5);
    assert_eq!(dev.native.names, vec!["U".to_string(), "cz".to_string()]);
}

#[test]
fn arbitrary_bytes_never_panic() {
    // Not a proof, but a sweep over awkward inputs: empty, unicode, huge numbers, CRLF.
    for src in [
        "",
        "qubits 99999999999999999999\n",
        "qubits 5000\nnative rz sx cx\n",
        "qubits 0\nnative rz sx cx\n",
        "lattice full 100000\nnative rz sx cx\n",
        "lattice full 2000\nnative rz sx cx\n",
        "native rz sx cx\r\nlattice line 3\r\n",
        "nätive rz\n",
        "error\n",
        "time cx 1e400ns\n",
        "link 1-2\n",
        "#\n#\n  \t \n",
    ] {
        let _ = parse_device("fuzz.dev", src);
    }
    assert!(parse_device("crlf.dev", "native rz sx cx\r\nlattice line 3\r\n").is_ok());
    let d = one_error("lattice full 2000\nnative rz sx cx\n");
    assert!(d.message.contains("1999000 couplings"), "{}", d.message);
    let d = one_error("qubits 0\nnative rz sx cx\n");
    assert!(d.message.contains("at least one qubit"));
}

#[test]
fn the_rendered_diagnostic_matches_grammar_device_md() {
    let e = parse_device("chip.dev", &format!("{GOOD_HEAD}link 2 6\n")).unwrap_err();
    assert_eq!(
        e[0].to_string(),
        "error D104: chip.dev:4:8: qubit 6 does not exist (the device has 6 qubits)\n  |\n4 | link 2 6\n  |        ^\nhint: qubits are numbered from 0; declare more with `qubits N`\n"
    );
}

mod fuzz {
    use super::*;
    use proptest::prelude::*;

    const WORDS: &[&str] = &[
        "qubits",
        "native",
        "lattice",
        "link",
        "cut",
        "error",
        "time",
        "coherence",
        "name",
        "readout",
        "measure",
        "grid",
        "line",
        "ring",
        "brickwall",
        "bridgedhex",
        "octagon",
        "full",
        "rz",
        "sx",
        "x",
        "cx",
        "cz",
        "U",
        "u",
        "h",
        "0",
        "1",
        "3",
        "12",
        "2048",
        "15",
        "7",
        "400",
        "99999999999",
        "0.5",
        "-1",
        "1e-3",
        "2-3",
        "3-3",
        "300ns",
        "1.5us",
        "ms",
        "#",
        "-",
        ".",
        "\t",
        "é",
    ];

    proptest! {
        #[test]
        fn random_token_soup_never_panics(lines in proptest::collection::vec(
            proptest::collection::vec(0usize..WORDS.len(), 0..6), 0..8)) {
            let src: String = lines
                .iter()
                .map(|l| l.iter().map(|&i| WORDS[i]).collect::<Vec<_>>().join(" "))
                .collect::<Vec<_>>()
                .join("\n");
            match parse_device("soup.dev", &src) {
                Ok(d) => prop_assert!(d.num_qubits as u64 <= phasewright::lang::dev::MAX_DEVICE_QUBITS),
                Err(ds) => prop_assert!(!ds.is_empty()),
            }
        }
    }
}
