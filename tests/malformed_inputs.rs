//! Malformed inputs across every reader, through the real binary: `.ham` and `.dev` files,
//! FCIDUMP integral files, OpenQASM 3 circuit files, counts files and plan.json. Each case
//! states where the diagnostic must point, as the offending text itself (a snippet of the input
//! and the character of it under the caret), so the expected line and column are read off the
//! input rather than copied from a run. Every case must exit with status 2 (bad input, README
//! "Commands"), print `file:line:column` at that place (or no position, for a whole-file
//! problem), carry the expected words, and never panic (exit 101).

use assert_cmd::Command;
use std::path::{Path, PathBuf};

#[derive(Clone, Copy, Debug, PartialEq)]
enum Reader {
    Ham,
    Dev,
    Fcidump,
    Qasm,
    Counts,
    Plan,
}

/// Where the caret must be: the first occurrence of `needle` in the input, `skip` characters
/// into it; `None` for a problem about the whole file.
type At = Option<(&'static str, usize)>;

struct Case {
    reader: Reader,
    /// The whole file (Ham, Dev, Fcidump, Qasm, Counts), or for `Plan` a replacement
    /// `from => to` applied to the compiled plan text, written `from\u{0}to`.
    text: &'static str,
    at: At,
    words: &'static str,
    /// The catalogue code the diagnostic must carry (`phasewright explain`), chosen from the
    /// catalogue's description of each code.
    code: &'static str,
}

const fn case(
    reader: Reader,
    text: &'static str,
    at: At,
    words: &'static str,
    code: &'static str,
) -> Case {
    Case {
        reader,
        text,
        at,
        words,
        code,
    }
}

use Reader::*;

/// The cases. The campaign they run against is the Ising ring of `examples/ising_ring8.ham`
/// (8 qubits, 17 terms) compiled as an overlap campaign with K = 2: circuits `k01-re` and
/// `k01-im`, one classical bit each.
const CASES: &[Case] = &[
    // ----- .ham ---------------------------------------------------------------------------
    case(Ham, "qubits 2\nZ0 Q1\n", Some(("Q1", 0)), "unknown factor `Q1`", "H103"),
    case(Ham, "qubits 2\n0.5 Z0 Z5\n", Some(("Z5", 1)), "out of range", "H104"),
    case(Ham, "qubits 0\nZ0\n", Some(("0\n", 0)), "at least one qubit", "H102"),
    case(Ham, "qubits 4097\nZ0\n", Some(("4097", 0)), "limit of 4096 qubits", "H102"),
    case(Ham, "Z0 Z1\n", Some(("Z0", 0)), "must start with `qubits N`", "H102"),
    case(Ham, "qubits 2\nqubits 3\nZ0\n", Some(("qubits 3", 0)), "declared twice", "H102"),
    case(Ham, "qubits 2\nlet J = \nZ0\n", Some(("= \n", 2)), "expected a value", "H101"),
    case(Ham, "qubits 2\nlet J = 1\nlet J = 2\n", Some(("J = 2", 0)), "already defined", "H201"),
    case(Ham, "qubits 2\nK * Z0\n", Some(("K *", 0)), "undefined name `K`", "H201"),
    case(Ham, "qubits 2\nsum i in 0..3 { Z{i} }\n", Some(("i} }", 0)), "out of range", "H104"),
    case(Ham, "qubits 2\nsum i in 0..2 { Z{i}\n", Some(("{ Z", 0)), "unclosed `{`", "H101"),
    case(Ham, "qubits 2\n0.5 Z0 }\n", Some(("}", 0)), "unmatched `}`", "H101"),
    case(Ham, "qubits 2\nZ0 Z1 * 0.5\n", Some(("* 0.5", 0)), "after the factors", "H101"),
    case(Ham, "qubits 2\n2.5i Z0\n", Some(("2.5i", 0)), "not Hermitian", "H301"),
    case(Ham, "qubits 2\n1e309 Z0\n", Some(("1e309", 0)), "not a finite number", "H202"),
    case(Ham, "qubits 2\n0.5 Z0 Z1; 0.3 X0\n", Some(("; 0.3", 0)), "only inside a sum body", "H101"),
    case(Ham, "qubits 2\nencoding jx\n", Some(("jx", 0)), "unknown encoding `jx`", "H103"),
    case(Ham, "qubits 4\ncr{0} an{1}\n", Some(("cr{0}", 0)), "need an encoding", "H301"),
    case(Ham, "qubits 2\n(0.5 Z0\n", Some(("Z0", 0)), "expected `)`", "H101"),
    case(Ham, "qubits 2\nZ{1/0}\n", Some(("/0", 0)), "not allowed in an index", "H202"),
    case(Ham, "qubits 2\n0.5 Z0 @ Z1\n", Some(("@", 0)), "unexpected `@`", "H101"),
    case(Ham, "qubits 2\n0.5 X0 Z1 +\n", Some(("+\n", 0)), "one term per line", "H101"),
    case(Ham, "qubits 2\nsum i in 0..2 { qubits 3 }\n", Some(("qubits 3", 0)), "inside a sum", "H101"),
    case(Ham, "qbits 2\nZ0 Z1\n", Some(("qbits", 0)), "did you mean `qubits`?", "H103"),
    case(Ham, "qubits 2\nlte J = 1\n", Some(("lte", 0)), "did you mean `let`?", "H103"),
    case(Ham, "qubits 2\nsum i inn 0..2 { Z{i} }\n", Some(("inn", 0)), "expected `in`", "H101"),
    case(Ham, "qubits 8\nname line8\nnative rz sx x cz\nlattice line 8\n", Some(("name", 0)), "describes a device (.dev), not a Hamiltonian", "H103"),
    // ----- .dev ---------------------------------------------------------------------------
    case(Dev, "qubits 2\nnatve rz sx x cx\n", Some(("natve", 0)), "did you mean `native`?", "D103"),
    case(Dev, "qubits 2\nnative rz sx x cq\nlattice line 2\n", Some(("cq", 0)), "did you mean `cx`?", "D103"),
    case(Dev, "qubits 2\nnative rz sx x cx\nlattice hex 2\n", Some(("hex", 0)), "unknown lattice", "D103"),
    case(Dev, "qubits 2\nnative rz sx x cx\nlattice lin 2\n", Some(("lin ", 0)), "did you mean `line`?", "D103"),
    case(Dev, "qubits 2\nnative rz sx x cx\nlattice grid 2\n", Some(("grid 2", 5)), "takes 2 sizes", "D201"),
    case(Dev, "qubits 2\nnative rz sx x cx\nlink 0 5\n", Some(("5\n", 0)), "qubit 5 does not exist", "D104"),
    case(Dev, "qubits 2\nnative rz sx x cx\nlink 0 0\n", Some(("0 0", 0)), "linked to itself", "D104"),
    case(Dev, "qubits 2\nnative rz sx\nlattice line 2\n", Some(("native", 0)), "no entangling gate", "D102"),
    case(Dev, "qubits 2\nnative rz sx x cx\nlattice line 2\nerror cx 1.5\n", Some(("1.5", 0)), "outside [0, 1]", "D201"),
    case(Dev, "qubits 2\nnative rz sx x cx\nlattice line 2\ntime cx 300ms\n", Some(("ms", 0)), "unknown time unit `ms`", "D103"),
    case(Dev, "qubits 2\nnative rz sx x cx\nlattice line 2\nerror cz 0.01\n", Some(("cz 0", 0)), "not a native gate", "D103"),
    case(Dev, "qubits x4\nnative rz sx x cx\n", Some(("x4", 0)), "expected a qubit count", "D101"),
    case(Dev, "qubits 2\nnative rz sx x cx\nnative rz sx x cz\n", Some(("native rz sx x cz", 0)), "given twice", "D102"),
    case(Dev, "qubits 3000\nnative rz sx x cx\n", Some(("3000", 0)), "more than phasewright handles", "D401"),
    case(Dev, "qubits 2\nnative rz sx x cx\nlattice line 2\ncut 0 1 2\n", Some(("1 2", 2)), "expected the end of the line", "D101"),
    case(Dev, "qubits 2\nnative rz sx x cx\nlattice line 2\nerror readout 5 0.1\n", Some(("5 0.1", 0)), "qubit 5 does not exist", "D104"),
    case(Dev, "qubits 2\nnative rz sx x cx\nlattice line 2\ntime cx -3ns\n", Some(("-3", 0)), "non-negative", "D201"),
    case(Dev, "qubits 0\nnative rz sx x cx\n", Some(("0\n", 0)), "at least one qubit", "D102"),
    case(Dev, "qubits 2\nlet J = 1.0\n0.5 Z0 Z1\n", Some(("let", 0)), "holds a Hamiltonian (.ham), not a device", "D103"),
    // ----- FCIDUMP ------------------------------------------------------------------------
    case(Fcidump, " &FCI NORB=2,NELEC=2,MS2=0,\n &END\n  0.5 1 1 1 x\n", Some(("x\n", 0)), "must be an integer", "F201"),
    case(Fcidump, " &FCI NORB=2,NELEC=2,MS2=0,\n &END\n  0.5 1 1 1 3\n", Some(("3\n", 0)), "outside 0..=2", "F201"),
    case(Fcidump, " &FCI NORB=2,NELEC=2,MS2=0,\n  0.5 1 1 1 1\n", Some(("", 0)), "never ends", "F101"),
    case(Fcidump, " &FCI NORB=2,NELEC=5,MS2=0,\n &END\n  0.5 1 1 1 1\n", Some(("5,MS2", 0)), "does not fit 2 orbitals", "F201"),
    case(Fcidump, " &FCI NORB=2,NELEC=2,MS2=0,\n &END\n  abc 1 1 1 1\n", Some(("abc", 0)), "not a number", "F101"),
    case(Fcidump, " &FCI NORB=2,NELEC=2,MS2=0,\n &END\n  0.5 1 1\n", Some(("0.5 1 1", 0)), "3 of 5 fields", "F101"),
    // ----- OpenQASM 3 (k01-re.qasm, its plan hash updated so the reader is reached) --------
    case(Qasm, "OPENQASM 3.0;\ninclude \"stdgates.inc\";\nqubit[9] q;\nbit[1] c;\nccx q[0], q[1], q[2];\n", Some(("ccx", 0)), "unsupported gate `ccx`", "Q101"),
    case(Qasm, "OPENQASM 3.0;\ninclude \"stdgates.inc\";\nqubit[9] q;\nbit[1] c;\nh q[9];\n", Some(("q[9]", 0)), "outside the declared register", "Q101"),
    case(Qasm, "include \"stdgates.inc\";\nqubit[9] q;\n", Some(("include", 0)), "missing `OPENQASM 3.0;` header", "Q101"),
    case(Qasm, "OPENQASM 3.0;\ninclude \"stdgates.inc\";\nqubit[9] q;\nbit[1] c;\nh q[0]\n", Some(("h q[0]", 0)), "not terminated by `;`", "Q101"),
    case(Qasm, "OPENQASM 3.0;\ninclude \"stdgates.inc\";\nqubit[9] q;\nbit[1] c;\nc[3] = measure q[8];\n", Some(("c[3]", 0)), "bit c[3] is outside", "Q101"),
    case(Qasm, "OPENQASM 3.0;\ninclude \"stdgates.inc\";\nqubit[9] q;\nbit[1] c;\nrz(0.1) q[0], q[1];\n", Some(("rz(", 0)), "takes 1 angle(s) and 1 qubit(s)", "Q101"),
    case(Qasm, "OPENQASM 3.0;\ninclude \"stdgates.inc\";\nqubit[9] q;\nbit[1] c;\nrz(pi/) q[0];\n", Some(("rz(pi/)", 0)), "unsupported statement", "Q101"),
    case(Qasm, "OPENQASM 3.0;\ninclude \"stdgates.inc\";\nqubit[9] q;\nbit[1] c;\nh q[8];\n", None, "never measures classical bit 0", "Q301"),
    case(Qasm, "OPENQASM 3.0;\ninclude \"stdgates.inc\";\nqubit[9] q;\nbit[2] c;\nc[0] = measure q[8];\n", None, "2 classical bits", "Q301"),
    case(Qasm, "", None, "empty program", "Q101"),
    // ----- counts files -------------------------------------------------------------------
    case(Counts, "{\"format\": \"phasewright-counts/1\",\n \"counts\": {]}", Some(("]}", 0)), "not valid JSON", "C101"),
    case(Counts, "{\"format\": \"phasewright-counts/9\", \"counts\": {}}", Some(("\"phasewright-counts/9\"", 0)), "unsupported format", "C101"),
    case(Counts, "{\"format\": \"phasewright-counts/1\", \"bit_order\": \"middle\", \"counts\": {\"k01-re\": {\"0\": 1}, \"k01-im\": {\"0\": 1}}}", Some(("\"middle\"", 0)), "unknown bit order", "C101"),
    case(Counts, "{\"format\": \"phasewright-counts/1\", \"shots\": 0, \"counts\": {\"k01-re\": {\"0\": 1}, \"k01-im\": {\"0\": 1}}}", Some(("0, ", 0)), "positive integer", "C101"),
    case(Counts, "{\"format\": \"phasewright-counts/1\",\n \"counts\": {\"k01-re\": {\"0\": 1}, \"k01-im\": {\"0\": 1},\n \"k09-re\": {\"0\": 1}}}", Some(("\"k09-re\"", 0)), "unknown circuit `k09-re`", "C201"),
    case(Counts, "{\"format\": \"phasewright-counts/1\", \"counts\": {\n \"k01-re\": {\"0\": 1},\n \"k01-im\": {\"0\": 1},\n \"k01-re\": {\"1\": 1}}}", Some(("\"k01-re\": {\"1\"", 0)), "appears more than once", "C201"),
    case(Counts, "{\"format\": \"phasewright-counts/1\", \"counts\": {\"k01-re\": {\"01\": 1}, \"k01-im\": {\"0\": 1}}}", Some(("\"01\"", 0)), "has 2 bits, expected 1", "C201"),
    case(Counts, "{\"format\": \"phasewright-counts/1\", \"counts\": {\"k01-re\": {\"x\": 1}, \"k01-im\": {\"0\": 1}}}", Some(("\"x\"", 0)), "contains `x`", "C201"),
    case(Counts, "{\"format\": \"phasewright-counts/1\", \"counts\": {\"k01-re\": {\"0\": 0}, \"k01-im\": {\"0\": 1}}}", Some(("0}, \"k01-im", 0)), "a zero count", "C201"),
    case(Counts, "{\"format\": \"phasewright-counts/1\", \"counts\": {\"k01-re\": {\"0\": -4}, \"k01-im\": {\"0\": 1}}}", Some(("-4", 0)), "negative count", "C201"),
    case(Counts, "{\"format\": \"phasewright-counts/1\", \"counts\": {\"k01-re\": {\"0\": 2.5}, \"k01-im\": {\"0\": 1}}}", Some(("2.5", 0)), "not a positive integer", "C201"),
    case(Counts, "{\"format\": \"phasewright-counts/1\", \"counts\": {\"k01-re\": {\"0\": 1, \"0\": 2}, \"k01-im\": {\"0\": 1}}}", Some(("\"0\": 2", 0)), "`0` appears more than once", "C201"),
    // A repeated key is shown where it repeats: the same text twice, so the place (line 4,
    // column 2; line 3, column 2) is told apart only by the line:column the reader prints.
    case(Counts, "{\"format\": \"phasewright-counts/1\", \"counts\": {\n \"k01-re\": {\"0\": 1},\n \"k01-im\": {\"0\": 1},\n \"k01-re\": {\"0\": 1}}}", Some(("},\n \"k01-re\"", 4)), "`k01-re` appears more than once", "C201"),
    case(Counts, "{\"format\": \"phasewright-counts/1\",\n \"shots\": 1,\n \"shots\": 1,\n \"counts\": {\"k01-re\": {\"0\": 1}, \"k01-im\": {\"0\": 1}}}", Some(("1,\n \"shots\"", 4)), "duplicate field `shots`", "C101"),
    case(Counts, "{\"format\": \"phasewright-counts/1\", \"shots\": 5, \"counts\": {\"k01-re\": {\"0\": 4}, \"k01-im\": {\"0\": 5}}}", Some(("\"k01-re\"", 0)), "has 4 shots", "C201"),
    case(Counts, "{\"format\": \"phasewright-counts/1\", \"counts\": {\"k01-re\": {\"0\": 1}}}", Some(("\"counts\"", 0)), "has no counts: `k01-im`", "C301"),
    case(Counts, "{\"format\": \"phasewright-counts/1\", \"extra\": 1, \"counts\": {}}", Some(("\"extra\"", 0)), "unknown field `extra`", "C101"),
    case(Counts, "{\"k01-re\": {\"0\": 1}}", None, "no `format` key", "C101"),
    // ----- plan.json (edits of the compiled plan: `from\0to`) ------------------------------
    case(Plan, "\"state\": 0\u{0}\"state\": 7", Some(("\"state\": 7", 9)), "state 7 but the plan lists 1 state", "P301"),
    case(Plan, "\"00000000\"\u{0}\"0000000\"", Some(("\"0000000\"", 0)), "has 7 letters", "P301"),
    case(Plan, "\"00000000\"\u{0}\"0000000q\"", Some(("\"0000000q\"", 0)), "`q`", "P301"),
    case(Plan, "\"k\": 1\u{0}\"k\": 5", Some(("\"k\": 5", 5)), "k = 5 but the plan has 2 points", "P301"),
    case(Plan, "\"file\": \"k01-re.qasm\"\u{0}\"file\": \"../k01-re.qasm\"", Some(("\"../k01-re.qasm\"", 0)), "not a plain file name", "P301"),
    case(Plan, "\"order\": 2\u{0}\"order\": 3", Some(("\"order\": 3", 9)), "order 3 is not 1, 2 or 4", "P301"),
    case(Plan, "\"steps_per_dt\": 1\u{0}\"steps_per_dt\": 0", Some(("\"steps_per_dt\": 0", 16)), "at least 1", "P301"),
    case(Plan, "\"dt\": 0.2\u{0}\"dt\": -0.2", Some(("\"dt\": -0.2", 6)), "must be a positive number", "P301"),
    case(Plan, "\"points\": 2\u{0}\"points\": 1", Some(("\"points\": 1", 10)), "a plan has 2 to 4096", "P301"),
    case(Plan, "\"id\": \"k01-im\"\u{0}\"id\": \"k01-re\"", Some(("\"k01-re\",\n      \"file\": \"k01-im", 0)), "empty or repeated", "P301"),
    case(Plan, "\"bit_count\": 1\u{0}\"bit_count\": 0", Some(("\"bit_count\": 0", 13)), "0 classical bits", "P301"),
    case(Plan, "\"bit_count\": 1\u{0}\"bit_count\": 1,\n      \"shots\": 0", Some(("\"shots\": 0", 9)), "0 planned shots", "P301"),
    case(Plan, "\"ancilla_bit\": 0\u{0}\"ancilla_bit\": 4", Some(("\"ancilla_bit\": 4", 15)), "ancilla bit 4 is outside", "P301"),
    case(Plan, "\"qubit_count\": 9\u{0}\"qubit_count\": 5", Some(("\"qubit_count\": 5", 15)), "5 qubits does not fit", "P301"),
    case(Plan, "\"target\": \"overlap\"\u{0}\"target\": \"term\", \"term\": 40", Some(("\"term\": 40", 8)), "names term 40 but the Hamiltonian lists 17", "P301"),
    case(Plan, "            0\n          ]\u{0}            3\n          ]", Some(("            3\n          ]", 12)), "uses bit 3", "P301"),
    case(Plan, "\"pauli\": \"Z0 Z1\"\u{0}\"pauli\": \"Z0 Q1\"", Some(("{\n        \"pauli\": \"Z0 Q1\"", 0)), "not a Pauli string", "P301"),
    case(Plan, "\"coeff\": -1.0\u{0}\"coeff\": 0.0", Some(("{\n        \"pauli\": \"Z0 Z1\"", 0)), "must be finite and non-zero", "P301"),
    case(Plan, "\"format\": \"phasewright-plan/3\"\u{0}\"format\": \"phasewright-plan/9\"", Some(("\"phasewright-plan/9\"", 0)), "unsupported plan format", "P101"),
    case(Plan, "\"family\": \"overlap\"\u{0}\"family\": \"sideways\"", Some(("\"sideways\"", 0)), "unknown variant `sideways`", "P101"),
    case(Plan, "\"points\": 2\u{0}\"points\": 2,\n  \"points\": 3", Some(("\"points\": 3", 0)), "duplicate field `points`", "P101"),
];

fn phasewright() -> Command {
    Command::cargo_bin("phasewright").unwrap()
}

/// 1-based (line, column in characters) of byte `offset` in `text`.
fn line_col(text: &str, offset: usize) -> (usize, usize) {
    let before = &text[..offset];
    let line = before.matches('\n').count() + 1;
    let col = before[before.rfind('\n').map_or(0, |i| i + 1)..]
        .chars()
        .count()
        + 1;
    (line, col)
}

/// The expected (line, column) of a case in the text actually read.
fn expected(text: &str, at: At) -> Option<(usize, usize)> {
    let (needle, skip) = at?;
    let start = if needle.is_empty() {
        text.len()
    } else {
        text.find(needle)
            .unwrap_or_else(|| panic!("`{needle}` is not in the case's input:\n{text}"))
    };
    let offset = start
        + needle[..]
            .chars()
            .take(skip)
            .map(char::len_utf8)
            .sum::<usize>();
    Some(line_col(text, offset))
}

/// `name:LINE:COL:` of the first diagnostic naming `name`, or `None` if it has no position.
fn reported(err: &str, name: &str) -> Option<(usize, usize)> {
    let at = err.find(&format!("{name}:"))? + name.len() + 1;
    let mut parts = err[at..].splitn(3, ':');
    let line = parts.next()?.trim().parse().ok()?;
    let column = parts.next()?.parse().ok()?;
    Some((line, column))
}

struct Campaign {
    dir: PathBuf,
    plan: String,
}

fn compile_campaign(tmp: &Path) -> Campaign {
    let dir = tmp.join("camp");
    let out = phasewright()
        .args([
            "compile",
            "examples/ising_ring8.ham",
            "--state",
            "00000000",
            "--dt",
            "0.2",
            "--points",
            "2",
            "-q",
            "-o",
        ])
        .arg(&dir)
        .output()
        .unwrap();
    assert!(out.status.success());
    let plan = std::fs::read_to_string(dir.join("plan.json")).unwrap();
    Campaign { dir, plan }
}

/// Runs one case; returns (input text read, file name in diagnostics, exit code, stderr).
fn run_case(c: &Case, tmp: &Path, camp: &Campaign) -> (String, String, i32, String) {
    let good_ham = tmp.join("good.ham");
    std::fs::write(&good_ham, "qubits 2\n0.5 Z0 Z1\n0.3 X0\n").unwrap();
    let out_dir = tmp.join("out");
    let mut cmd = phasewright();
    let (text, name) = match c.reader {
        Ham | Dev | Fcidump => {
            let ext = match c.reader {
                Ham => "ham",
                Dev => "dev",
                _ => "fcidump",
            };
            let f = tmp.join(format!("case.{ext}"));
            std::fs::write(&f, c.text).unwrap();
            match c.reader {
                Ham => cmd.arg("compile").arg(&f),
                Dev => cmd.arg("compile").arg(&good_ham).arg("--device").arg(&f),
                _ => cmd.arg("convert").arg(&f).args(["--encoding", "jw"]),
            };
            if c.reader != Fcidump {
                cmd.args(["--state", "00", "--dt", "0.1", "--points", "2"]);
            }
            cmd.arg("-o").arg(&out_dir);
            (c.text.to_string(), format!("case.{ext}"))
        }
        Qasm => {
            std::fs::write(camp.dir.join("k01-re.qasm"), c.text).unwrap();
            let mut plan: serde_json::Value = serde_json::from_str(&camp.plan).unwrap();
            for e in plan["circuits"].as_array_mut().unwrap() {
                if e["file"] == "k01-re.qasm" {
                    e["sha256"] = phasewright::plan::sha256_hex(c.text.as_bytes()).into();
                }
            }
            std::fs::write(
                camp.dir.join("plan.json"),
                serde_json::to_string_pretty(&plan).unwrap(),
            )
            .unwrap();
            cmd.arg("verify").arg(&camp.dir);
            (c.text.to_string(), "k01-re.qasm".to_string())
        }
        Counts => {
            std::fs::write(camp.dir.join("plan.json"), &camp.plan).unwrap();
            let f = tmp.join("case-counts.json");
            std::fs::write(&f, c.text).unwrap();
            cmd.arg("estimate").arg(&camp.dir).arg("--counts").arg(&f);
            (c.text.to_string(), "case-counts.json".to_string())
        }
        Plan => {
            let (from, to) = c.text.split_once('\u{0}').unwrap();
            assert!(camp.plan.contains(from), "`{from}` is not in the plan");
            let edited = camp.plan.replacen(from, to, 1);
            std::fs::write(camp.dir.join("plan.json"), &edited).unwrap();
            cmd.arg("verify").arg(&camp.dir);
            (edited, "plan.json".to_string())
        }
    };
    let out = cmd.output().unwrap();
    (
        text,
        name,
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

#[test]
fn every_reader_reports_malformed_input_at_its_place() {
    assert!(CASES.len() >= 60, "the table holds {} cases", CASES.len());
    let tmp = tempfile::tempdir().unwrap();
    let camp = compile_campaign(tmp.path());
    let pristine = std::fs::read(camp.dir.join("k01-re.qasm")).unwrap();
    let mut failures = Vec::new();
    for (i, c) in CASES.iter().enumerate() {
        let (text, name, code, err) = run_case(c, tmp.path(), &camp);
        std::fs::write(camp.dir.join("k01-re.qasm"), &pristine).unwrap();
        std::fs::write(camp.dir.join("plan.json"), &camp.plan).unwrap();
        let want = expected(&text, c.at);
        let got = reported(&err, &name);
        let tagged = err.contains(&format!("error {}: ", c.code));
        let ok = code == 2
            && !err.contains("panicked")
            && err.contains(c.words)
            && got == want
            && tagged;
        if !ok {
            failures.push(format!(
                "case {i} ({:?}, expecting {:?} {} at {want:?}): exit {code}, position {got:?}\n{err}",
                c.reader, c.words, c.code
            ));
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}
