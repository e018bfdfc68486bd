//! Robustness: every reader of user input returns a value or diagnostics, never panics, on
//! arbitrary text built from its own tokens (the inputs most likely to reach deep code paths)
//! and on arbitrary characters.

use phasewright::hamiltonian::parse_hamiltonian;
use phasewright::lang::dev::parse_device;
use proptest::prelude::*;

fn soup(tokens: &'static [&'static str]) -> impl Strategy<Value = String> {
    proptest::collection::vec(
        prop_oneof![
            proptest::sample::select(tokens).prop_map(str::to_string),
            "[ -~\n]{0,3}",
            "\\PC{0,2}"
        ],
        0..40,
    )
    .prop_map(|v| v.join(""))
}

const HAM: &[&str] = &[
    "qubits ",
    "4",
    "63",
    "64",
    "0",
    "\n",
    " ",
    "let ",
    "J",
    " = ",
    "sum ",
    "i",
    " in ",
    "0..4",
    "4..0",
    "{",
    "}",
    "(",
    ")",
    "X",
    "Y",
    "Z",
    "{i}",
    "{i+1}",
    "%",
    "*",
    "/",
    "+",
    "-",
    "1e309",
    "1e-3",
    "0.5",
    "2.5i",
    "cr{0}",
    "an{1}",
    "n{2}",
    "+ h.c.",
    "encoding jw",
    "encoding bk",
    ";",
    "#",
    "X0",
    "Y3",
    "Z99",
    "/0",
];
const DEV: &[&str] = &[
    "qubits ",
    "12",
    "0",
    "\n",
    " ",
    "native ",
    "rz ",
    "sx ",
    "x ",
    "cx ",
    "cz ",
    "rx ",
    "ry ",
    "u ",
    "h ",
    "lattice ",
    "grid ",
    "line ",
    "ring ",
    "brickwall ",
    "bridgedhex ",
    "octagon ",
    "full ",
    "3 ",
    "4 ",
    "link ",
    "cut ",
    "error ",
    "readout ",
    "0.01",
    "-1",
    "2",
    "time ",
    "300ns",
    "1.5us",
    "3ms",
    "name ",
    "chip",
    "3-9 ",
    "#",
];
const QASM: &[&str] = &[
    "OPENQASM 3.0;",
    "include \"stdgates.inc\";",
    "\n",
    " ",
    "qubit[3] q;",
    "bit[2] c;",
    "h ",
    "cx ",
    "rz(",
    "pi",
    "/2",
    ")",
    "q[0]",
    "q[9]",
    "$4",
    ",",
    ";",
    "c[0] = measure ",
    "gphase(",
    "U(",
    "//",
    "-",
    "*",
];
const COUNTS: &[&str] = &[
    "{",
    "}",
    "\"format\"",
    ":",
    "\"phasewright-counts/1\"",
    ",",
    "\"counts\"",
    "\"k01-re\"",
    "\"0\"",
    "\"1\"",
    "\"01\"",
    "5",
    "-1",
    "0",
    "1e3",
    "\"bit_order\"",
    "\"last\"",
    "[",
    "]",
    "null",
];

proptest! {
    #![proptest_config(ProptestConfig { cases: 400, .. ProptestConfig::default() })]

    #[test]
    fn hamiltonian_reader_never_panics(src in soup(HAM)) {
        let _ = parse_hamiltonian("fuzz.ham", &src);
    }

    #[test]
    fn device_reader_never_panics(src in soup(DEV)) {
        let _ = parse_device("fuzz.dev", &src);
    }

    #[test]
    fn qasm_reader_never_panics(src in soup(QASM)) {
        let _ = phasewright::qasm::read("fuzz.qasm", &src);
    }

    #[test]
    fn counts_reader_never_panics(src in soup(COUNTS)) {
        let plan = phasewright::plan::Plan::from_json(include_str!("data/estimate/krylov_tfim3/plan.json")).unwrap();
        let _ = phasewright::estimate::counts::parse(&src, "fuzz.json", &plan, None);
    }
}
