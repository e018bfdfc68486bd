//! Robustness of the real binary against hostile use: closed pipes, hand-edited plans,
//! requests too large to build, stale or foreign output folders, edited files, values that
//! start with `-`, exit codes, and keyword typos. Every test drives `phasewright` itself.
//!
//! Exit status convention under test (README, "Commands"): 0 success, 1 internal failure,
//! 2 bad input or usage, with a `file:line:column` diagnostic where a source exists.

use assert_cmd::Command;
use std::path::{Path, PathBuf};
use std::process::Stdio;

fn phasewright() -> Command {
    Command::cargo_bin("phasewright").unwrap()
}

/// Runs a command and returns (status code, stdout, stderr).
fn run(cmd: &mut Command) -> (i32, String, String) {
    let out = cmd.output().unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

/// Compiles the 8-qubit Ising ring example (overlap, K = 3) into `out`.
fn compile_ising(out: &Path) {
    let (code, _, err) = run(phasewright().args([
        "compile",
        "examples/ising_ring8.ham",
        "--state",
        "00000000",
        "--dt",
        "0.2",
        "--points",
        "3",
        "-o",
        out.to_str().unwrap(),
    ]));
    assert_eq!(code, 0, "{err}");
}

/// A compiled campaign in a fresh temporary folder: (guard, campaign folder).
fn campaign() -> (tempfile::TempDir, PathBuf) {
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("ising");
    compile_ising(&out);
    (tmp, out)
}

/// Rewrites `DIR/plan.json` through a JSON edit.
fn edit_plan(dir: &Path, edit: impl FnOnce(&mut serde_json::Value)) {
    let p = dir.join("plan.json");
    let mut v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&p).unwrap()).unwrap();
    edit(&mut v);
    std::fs::write(&p, serde_json::to_string_pretty(&v).unwrap()).unwrap();
}

/// Asserts a bad-input exit: status 2, no panic, and `needle` in the diagnostics.
fn assert_bad_input(code: i32, err: &str, needle: &str) {
    assert_eq!(code, 2, "expected exit 2 for {needle:?}, stderr:\n{err}");
    assert!(!err.contains("panicked"), "{err}");
    assert!(err.contains(needle), "expected {needle:?} in:\n{err}");
}

/// `file:LINE:COLUMN:` of the first diagnostic in `err` that names `file`.
fn position(err: &str, file: &str) -> Option<(usize, usize)> {
    let at = err.find(&format!("{file}:"))? + file.len() + 1;
    let mut parts = err[at..].splitn(3, ':');
    let line = parts.next()?.parse().ok()?;
    let column = parts.next()?.parse().ok()?;
    Some((line, column))
}

// ----- 1. no panics --------------------------------------------------------------------------

/// Spawns the command with stdout closed before it writes; returns (status, stderr).
fn with_closed_stdout(args: &[&str]) -> (Option<i32>, String) {
    let mut child = std::process::Command::new(assert_cmd::cargo::cargo_bin("phasewright"))
        .args(args)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    drop(child.stdout.take());
    let out = child.wait_with_output().unwrap();
    (
        out.status.code(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

#[test]
fn a_closed_pipe_is_a_quiet_exit() {
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("c");
    let out = out.to_str().unwrap();
    let compile = [
        "compile",
        "examples/ising_ring8.ham",
        "--state",
        "00000000",
        "--dt",
        "0.2",
        "--points",
        "4",
        "-o",
        out,
    ];
    for args in [
        &compile[..],
        &["verify", out][..],
        &["verify", out, "--json"][..],
        &["compile", "--help"][..],
    ] {
        let (code, err) = with_closed_stdout(args);
        assert_eq!(code, Some(0), "{args:?}: {err}");
        assert!(!err.contains("panicked"), "{args:?}: {err}");
        assert!(!err.contains("Broken pipe"), "{args:?}: {err}");
    }
}

#[test]
fn hand_edited_plans_are_diagnosed_with_positions() {
    let (_tmp, dir) = campaign();
    let plan_text = std::fs::read_to_string(dir.join("plan.json")).unwrap();
    type Edit = fn(&mut serde_json::Value);
    let cases: Vec<(&str, Edit, &str)> = vec![
        (
            "state index",
            |v| v["circuits"][0]["state"] = 3.into(),
            "state 3 but the plan lists 1 state",
        ),
        (
            "state length",
            |v| v["states"][0] = "0000000".into(),
            "has 7 letters but the Hamiltonian has 8 qubits",
        ),
        (
            "state letter",
            |v| v["states"][0] = "0000000q".into(),
            "state 0 `0000000q`",
        ),
        (
            "bit out of range",
            |v| v["circuits"][1]["reads"][0]["bits"][0] = 7.into(),
            "uses bit 7, outside its 1 classical bits",
        ),
        (
            "term index",
            |v| {
                v["circuits"][2]["reads"][0] =
                    serde_json::json!({"target": "term", "term": 99, "bits": [0]})
            },
            "names term 99 but the Hamiltonian lists 17",
        ),
        (
            "k beyond the points",
            |v| v["circuits"][0]["k"] = 9.into(),
            "k = 9 but the plan has 3 points",
        ),
        (
            "a path as file name",
            |v| v["circuits"][0]["file"] = "../elsewhere.qasm".into(),
            "is not a plain file name",
        ),
        (
            "formula order",
            |v| v["formula"]["order"] = 3.into(),
            "formula order 3 is not 1, 2 or 4",
        ),
        (
            "too many points",
            |v| v["points"] = 1_000_000_000_000u64.into(),
            "a plan has 2 to 4096",
        ),
        (
            "reordered terms",
            |v| {
                let t = v["hamiltonian"]["terms"].as_array_mut().unwrap();
                t.swap(0, 1);
            },
            "is out of order or repeated",
        ),
    ];
    assert!(plan_text.contains("\"state\": 0"));
    for (what, edit, needle) in cases {
        std::fs::write(dir.join("plan.json"), &plan_text).unwrap();
        edit_plan(&dir, edit);
        for cmd in ["verify", "estimate"] {
            let mut c = phasewright();
            c.arg(cmd).arg(&dir);
            if cmd == "estimate" {
                c.args(["--counts", "no-such-counts.json"]);
            }
            let (code, _, err) = run(&mut c);
            assert_bad_input(code, &err, needle);
            assert!(
                position(&err, "plan.json").is_some_and(|(l, c)| l > 1 && c > 0),
                "{what}: no line:column in\n{err}"
            );
        }
    }
}

#[test]
fn requests_too_large_to_build_are_refused_with_their_cost() {
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("big");
    let out = out.to_str().unwrap();
    let base = [
        "compile",
        "examples/ising_ring8.ham",
        "--state",
        "00000000",
        "--dt",
        "0.2",
    ];
    // 10^12 points: refused before anything is allocated.
    let (code, _, err) =
        run(phasewright()
            .args(base)
            .args(["--points", "1000000000000", "-o", out]));
    assert_bad_input(code, &err, "more than the 4096 time points");
    // 4000 points of the 17-term ring with Strang steps: 2·33·(4000·3999/2) ≈ 5.28e8 rotations.
    let (code, _, err) = run(phasewright()
        .args(base)
        .args(["--points", "4000", "-o", out]));
    assert_bad_input(
        code,
        &err,
        "would emit 7998 circuits holding about 527868000 controlled rotations",
    );
    let (code, _, err) =
        run(phasewright()
            .args(base)
            .args(["--points", "3", "--steps", "100000000000", "-o", out]));
    assert_bad_input(code, &err, "controlled rotations");
    assert!(
        !Path::new(out).exists(),
        "nothing is written for a refused request"
    );
}
