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

// ----- 2. safe outputs -----------------------------------------------------------------------

fn compile_points(out: &Path, points: &str, extra: &[&str]) -> (i32, String, String) {
    run(phasewright()
        .args([
            "compile",
            "examples/ising_ring8.ham",
            "--state",
            "00000000",
            "--dt",
            "0.2",
            "--points",
            points,
            "-o",
        ])
        .arg(out)
        .args(extra))
}

fn names_in(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().into_string().unwrap())
        .collect();
    v.sort();
    v
}

/// Every file plan.json lists exists and has the SHA-256 the plan records (FIPS 180-4 digest,
/// computed here with the same `sha2` crate the binary uses), and nothing else is there.
fn assert_plan_matches_folder(dir: &Path) {
    use sha2::{Digest, Sha256};
    let plan: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("plan.json")).unwrap()).unwrap();
    let mut listed = vec!["plan.json".to_string()];
    for c in plan["circuits"].as_array().unwrap() {
        let file = c["file"].as_str().unwrap();
        let bytes = std::fs::read(dir.join(file)).unwrap();
        let hex: String = Sha256::digest(&bytes)
            .iter()
            .map(|b| format!("{b:02x}"))
            .collect();
        assert_eq!(c["sha256"].as_str(), Some(hex.as_str()), "{file}");
        listed.push(file.to_string());
    }
    listed.sort();
    assert_eq!(
        names_in(dir),
        listed,
        "the folder holds exactly the plan's files"
    );
}

#[test]
fn sha256_matches_a_published_test_vector() {
    // FIPS 180-2, Appendix B.1 (one-block message "abc").
    assert_eq!(
        phasewright::plan::sha256_hex(b"abc"),
        "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
    );
}

#[test]
fn a_smaller_campaign_replaces_an_older_one_whole() {
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("c");
    assert_eq!(compile_points(&out, "5", &[]).0, 0);
    assert!(out.join("k04-re.qasm").exists());
    assert_eq!(compile_points(&out, "3", &[]).0, 0);
    assert!(!out.join("k03-re.qasm").exists(), "stale k03 survived");
    assert!(!out.join("k04-im.qasm").exists(), "stale k04 survived");
    assert_plan_matches_folder(&out);
    // No temporary sibling is left next to it.
    assert_eq!(names_in(tmp.path()), vec!["c".to_string()]);
}

#[test]
fn a_folder_with_other_files_is_refused_unless_forced() {
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("c");
    std::fs::create_dir(&out).unwrap();
    std::fs::write(out.join("notes.txt"), "mine").unwrap();
    let (code, _, err) = compile_points(&out, "3", &[]);
    assert_bad_input(code, &err, "holds `notes.txt`");
    assert!(err.contains("--force"), "{err}");
    assert_eq!(
        std::fs::read_to_string(out.join("notes.txt")).unwrap(),
        "mine"
    );
    // A campaign with an extra file is not "an older campaign" either.
    std::fs::remove_file(out.join("notes.txt")).unwrap();
    assert_eq!(compile_points(&out, "3", &[]).0, 0);
    std::fs::write(out.join("counts.json"), "{}").unwrap();
    let (code, _, err) = compile_points(&out, "4", &[]);
    assert_bad_input(code, &err, "holds `counts.json`");
    let (code, _, err) = compile_points(&out, "4", &["--force"]);
    assert_eq!(code, 0, "{err}");
    assert_plan_matches_folder(&out);
}

#[test]
fn an_existing_file_or_stdout_as_campaign_folder_is_bad_input() {
    let tmp = tempfile::tempdir().unwrap();
    let file = tmp.path().join("taken");
    std::fs::write(&file, "x").unwrap();
    let (code, _, err) = compile_points(&file, "3", &[]);
    assert_bad_input(code, &err, "exists and is not a folder");
    let (code, _, err) = compile_points(&file, "3", &["--force"]);
    assert_bad_input(code, &err, "exists and is not a folder");
    let (code, _, err) = compile_points(Path::new("-"), "3", &[]);
    assert_bad_input(code, &err, "cannot go to stdout");
}

#[test]
fn verify_rehearse_and_estimate_name_a_missing_or_edited_file() {
    let (_tmp, dir) = campaign();
    let counts = dir.parent().unwrap().join("counts.json");
    let (code, _, err) = run(phasewright()
        .args(["rehearse", "--shots", "100", "-o"])
        .arg(&counts)
        .arg(&dir));
    assert_eq!(code, 0, "{err}");
    let edited = dir.join("k01-im.qasm");
    let mut text = std::fs::read_to_string(&edited).unwrap();
    text.push_str("// a harmless-looking comment\n");
    std::fs::write(&edited, text).unwrap();
    std::fs::remove_file(dir.join("k02-re.qasm")).unwrap();
    let elsewhere = dir.parent().unwrap().join("elsewhere.json");
    let checks: [&[&str]; 3] = [
        &["verify"],
        &[
            "rehearse",
            "--shots",
            "10",
            "-o",
            elsewhere.to_str().unwrap(),
        ],
        &["estimate", "--counts", counts.to_str().unwrap()],
    ];
    for args in checks {
        let (code, _, err) = run(phasewright().args(args).arg(&dir));
        assert_bad_input(code, &err, "k01-im.qasm: changed since it was compiled");
        assert!(err.contains("k02-re.qasm: missing"), "{args:?}: {err}");
    }
    assert!(!elsewhere.exists());
}

#[test]
fn a_compile_killed_midway_leaves_a_consistent_folder() {
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("c");
    assert_eq!(compile_points(&out, "3", &[]).0, 0);
    // A larger campaign (order 4, 40 points), killed after a short while: whatever the moment,
    // the folder holds either the old campaign or the new one, each consistent with its plan.
    for delay_ms in [50u64, 300, 900] {
        let mut child = std::process::Command::new(assert_cmd::cargo::cargo_bin("phasewright"))
            .args([
                "compile",
                "examples/ising_ring8.ham",
                "--state",
                "00000000",
                "--dt",
                "0.1",
                "--points",
                "40",
                "--order",
                "4",
                "-q",
                "-o",
            ])
            .arg(&out)
            .spawn()
            .unwrap();
        std::thread::sleep(std::time::Duration::from_millis(delay_ms));
        let _ = child.kill();
        let _ = child.wait();
        assert_plan_matches_folder(&out);
    }
    // The next run removes what killed runs left beside the folder.
    assert_eq!(compile_points(&out, "3", &[]).0, 0);
    assert_eq!(names_in(tmp.path()), vec!["c".to_string()]);
}

// ----- 3. conventions ------------------------------------------------------------------------

/// Compiles `examples/mixed_field4.ham` (4 qubits) with extra arguments into `out`.
fn compile_mixed(out: &Path, extra: &[&str]) -> (i32, String, String) {
    run(phasewright()
        .args([
            "compile",
            "examples/mixed_field4.ham",
            "--dt",
            "0.25",
            "--points",
            "3",
        ])
        .args(extra)
        .arg("-o")
        .arg(out))
}

#[test]
fn values_that_start_with_a_hyphen_are_read_as_values() {
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("m");
    let (code, _, err) = compile_mixed(&out, &["--state", "-+-+"]);
    assert_eq!(code, 0, "{err}");
    let plan: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("plan.json")).unwrap()).unwrap();
    assert_eq!(plan["states"][0], "-+-+");
    // A negative time step reaches our own check, not the argument parser's.
    let (code, _, err) = run(phasewright().args([
        "compile",
        "examples/mixed_field4.ham",
        "--state",
        "0000",
        "--dt",
        "-0.2",
        "--points",
        "3",
        "-o",
        tmp.path().join("n").to_str().unwrap(),
    ]));
    assert_bad_input(code, &err, "--dt -0.2 must be a positive number");
    assert!(!err.contains("unexpected argument"), "{err}");
    for tol in ["--tolerance=-1", "--tolerance=nan"] {
        let (code, _, err) = run(phasewright().arg("verify").arg(&out).arg(tol));
        assert_bad_input(code, &err, "is not a non-negative number");
    }
}

#[test]
fn every_command_takes_json_and_quiet() {
    let (_tmp, dir) = campaign();
    let base = dir.parent().unwrap().to_path_buf();
    let counts = base.join("counts.json");
    let commands: Vec<Vec<String>> = vec![
        vec![
            "compile".into(),
            "examples/mixed_field4.ham".into(),
            "--state".into(),
            "0000".into(),
            "--dt".into(),
            "0.2".into(),
            "--points".into(),
            "3".into(),
            "-o".into(),
            base.join("m").display().to_string(),
        ],
        vec!["verify".into(), dir.display().to_string()],
        vec![
            "rehearse".into(),
            dir.display().to_string(),
            "--shots".into(),
            "200".into(),
            "-o".into(),
            counts.display().to_string(),
        ],
        vec![
            "estimate".into(),
            dir.display().to_string(),
            "--counts".into(),
            counts.display().to_string(),
            "--bootstrap".into(),
            "0".into(),
        ],
        vec![
            "convert".into(),
            "examples/hubbard_ring4.ham".into(),
            "-o".into(),
            base.join("h.ham").display().to_string(),
        ],
    ];
    for args in &commands {
        let (code, out, err) = run(phasewright().args(args).arg("--json"));
        assert_eq!(code, 0, "{args:?}: {err}");
        let v: Result<serde_json::Value, _> = serde_json::from_str(&out);
        assert!(v.is_ok(), "{args:?} --json printed:\n{out}");
        let (code, out, err) = run(phasewright().args(args).arg("--quiet"));
        assert_eq!(code, 0, "{args:?}: {err}");
        assert_eq!(out, "", "{args:?} --quiet printed on stdout");
    }
}

#[test]
fn out_is_the_output_option_of_every_command_that_writes_one_file() {
    let tmp = tempfile::tempdir().unwrap();
    for opt in ["-o", "--out", "--output"] {
        let target = tmp.path().join(format!("h{opt}.ham"));
        let (code, _, err) = run(phasewright()
            .args(["convert", "examples/hubbard_ring4.ham", opt])
            .arg(&target));
        assert_eq!(code, 0, "{opt}: {err}");
        assert!(target.exists(), "{opt}");
    }
}

#[test]
fn a_hyphen_is_stdin_or_stdout_where_one_stream_makes_sense() {
    let tmp = tempfile::tempdir().unwrap();
    let ham = std::fs::read_to_string("examples/mixed_field4.ham").unwrap();
    // Hamiltonian from stdin; the plan says where it came from.
    let out = tmp.path().join("m");
    let (code, _, err) = run(phasewright()
        .args([
            "compile", "-", "--state", "0000", "--dt", "0.25", "--points", "3", "-q", "-o",
        ])
        .arg(&out)
        .write_stdin(ham.clone()));
    assert_eq!(code, 0, "{err}");
    let plan = std::fs::read_to_string(out.join("plan.json")).unwrap();
    assert!(plan.contains("\"source\": \"<stdin>\""));
    // Counts to stdout, read back from stdin by estimate; the plot to stdout.
    let (code, counts, err) = run(phasewright()
        .args(["rehearse", "--shots", "500", "-o", "-"])
        .arg(&out));
    assert_eq!(code, 0, "{err}");
    assert!(counts.contains("\"format\": \"phasewright-counts/1\""));
    let (code, table, err) = run(phasewright()
        .args(["estimate", "--counts", "-", "--bootstrap", "0"])
        .arg(&out)
        .write_stdin(counts.clone()));
    assert_eq!(code, 0, "{err}");
    assert!(table.contains("krylov"), "{table}");
    let (code, svg, err) = run(phasewright()
        .args([
            "estimate",
            "--counts",
            "-",
            "--bootstrap",
            "0",
            "--plot",
            "-",
        ])
        .arg(&out)
        .write_stdin(counts));
    assert_eq!(code, 0, "{err}");
    assert!(svg.starts_with("<svg"), "{svg}");
    // convert: stdin to stdout.
    let (code, text, err) = run(phasewright()
        .args(["convert", "-", "-o", "-"])
        .write_stdin(ham));
    assert_eq!(code, 0, "{err}");
    assert!(text.contains("qubits 4"), "{text}");
    // Two inputs cannot both be stdin.
    let (code, _, err) = run(phasewright().args([
        "compile", "-", "--device", "-", "--state", "0000", "--dt", "0.2", "--points", "3", "-o",
        "x",
    ]));
    assert_bad_input(code, &err, "cannot all read stdin");
}

#[test]
fn output_paths_that_cannot_work_are_bad_input() {
    let (_tmp, dir) = campaign();
    let base = dir.parent().unwrap().to_path_buf();
    let counts = base.join("counts.json");
    let (code, _, err) = run(phasewright()
        .args(["rehearse", "--shots", "100", "-q", "-o"])
        .arg(&counts)
        .arg(&dir));
    assert_eq!(code, 0, "{err}");
    let estimate = |plot: &Path| {
        run(phasewright()
            .args(["estimate", "--bootstrap", "0", "--counts"])
            .arg(&counts)
            .arg("--plot")
            .arg(plot)
            .arg(&dir))
    };
    let (code, _, err) = estimate(&base.join("energies.png"));
    assert_bad_input(code, &err, "writes SVG files only");
    assert!(!base.join("energies.png").exists());
    let (code, _, err) = estimate(&base.join("no-such-folder/energies.svg"));
    assert_bad_input(code, &err, "does not exist");
    let (code, _, err) = estimate(&base.join("energies.SVG"));
    assert_eq!(code, 0, "{err}");
    // A folder where a counts file should go.
    let (code, _, err) = run(phasewright()
        .args(["rehearse", "--shots", "10", "-o"])
        .arg(&base)
        .arg(&dir));
    assert_bad_input(code, &err, "is a folder");
}

#[test]
fn options_that_do_not_apply_are_refused() {
    let tmp = tempfile::tempdir().unwrap();
    let (code, _, err) = compile_mixed(
        &tmp.path().join("t"),
        &["--measure", "trace", "--state", "0000"],
    );
    assert_bad_input(code, &err, "--state has no effect with --measure trace");
    let (code, _, err) = compile_mixed(
        &tmp.path().join("o"),
        &["--state", "0000", "--samples", "4"],
    );
    assert_bad_input(code, &err, "--samples applies to --measure trace only");
    let (code, _, err) = compile_mixed(
        &tmp.path().join("t2"),
        &["--measure", "trace", "--samples", "2"],
    );
    assert_eq!(code, 0, "{err}");
}

#[test]
fn a_huge_time_step_is_warned_about() {
    let tmp = tempfile::tempdir().unwrap();
    // mixed_field4: Σ|c_j| = 5.645 (plan.json `one_norm`), so dt = 50 spans 282 rad per step.
    let (code, _, err) = run(phasewright().args([
        "compile",
        "examples/mixed_field4.ham",
        "--state",
        "0000",
        "--dt",
        "50",
        "--points",
        "3",
        "-o",
        tmp.path().join("w").to_str().unwrap(),
    ]));
    assert_eq!(code, 0, "{err}");
    assert!(err.contains("warning: one Trotter step spans"), "{err}");
    assert!(err.contains("282.250 rad"), "{err}");
}

#[test]
fn keyword_typos_get_a_suggestion_and_the_other_language_is_named() {
    let tmp = tempfile::tempdir().unwrap();
    let write = |name: &str, text: &str| {
        let p = tmp.path().join(name);
        std::fs::write(&p, text).unwrap();
        p
    };
    let compile = |ham: &Path, device: Option<&Path>| {
        let mut c = phasewright();
        c.arg("compile")
            .arg(ham)
            .args(["--state", "00", "--dt", "0.2", "--points", "3", "-o"])
            .arg(tmp.path().join("out"));
        if let Some(d) = device {
            c.arg("--device").arg(d);
        }
        run(&mut c)
    };
    let ham = write("typo.ham", "qbits 2\nZ0 Z1\n");
    let (code, _, err) = compile(&ham, None);
    assert_bad_input(
        code,
        &err,
        "unknown keyword `qbits`; did you mean `qubits`?",
    );
    assert_eq!(position(&err, "typo.ham"), Some((1, 1)));
    let ham = write("let.ham", "qubits 2\nlte J = 1\nZ0 Z1\n");
    let (code, _, err) = compile(&ham, None);
    assert_bad_input(code, &err, "did you mean `let`?");
    assert_eq!(position(&err, "let.ham"), Some((2, 1)));
    let good = write("good.ham", "qubits 2\n0.5 Z0 Z1\n0.3 X0\n");
    let dev = write("typo.dev", "qubits 2\nnatve rz sx x cx\nlattice line 2\n");
    let (code, _, err) = compile(&good, Some(&dev));
    assert_bad_input(
        code,
        &err,
        "unknown statement `natve`; did you mean `native`?",
    );
    assert_eq!(position(&err, "typo.dev"), Some((2, 1)));
    assert!(!err.contains("not a native gate"), "no cascade:\n{err}");
    let dev = write(
        "lattice.dev",
        "qubits 2\nnative rz sx x cx\nlattice lnie 2\n",
    );
    let (code, _, err) = compile(&good, Some(&dev));
    assert_bad_input(code, &err, "did you mean `line`?");
    // A device file where the Hamiltonian goes, and the reverse: one diagnostic each.
    let (code, _, err) = compile(Path::new("examples/line8.dev"), None);
    assert_bad_input(
        code,
        &err,
        "this file describes a device (.dev), not a Hamiltonian",
    );
    assert_eq!(err.matches("error H103: ").count(), 1, "{err}");
    assert_eq!(
        err.lines().filter(|l| l.starts_with("error ")).count(),
        1,
        "{err}"
    );
    let (code, _, err) = compile(&good, Some(Path::new("examples/mixed_field4.ham")));
    assert_bad_input(code, &err, "holds a Hamiltonian (.ham), not a device");
    assert_eq!(err.matches("error D103: ").count(), 1, "{err}");
    assert_eq!(
        err.lines().filter(|l| l.starts_with("error ")).count(),
        1,
        "{err}"
    );
}

#[test]
fn a_repeated_counts_id_is_shown_at_its_second_occurrence() {
    let (_tmp, dir) = campaign();
    let counts = dir.parent().unwrap().join("dup.json");
    std::fs::write(
        &counts,
        "{\"format\": \"phasewright-counts/1\", \"counts\": {\n  \"k01-re\": {\"0\": 5},\n  \"k01-im\": {\"0\": 5},\n  \"k02-re\": {\"0\": 5},\n  \"k02-im\": {\"0\": 5},\n  \"k01-re\": {\"1\": 5}\n}}\n",
    )
    .unwrap();
    let (code, _, err) = run(phasewright()
        .arg("estimate")
        .arg(&dir)
        .arg("--counts")
        .arg(&counts));
    assert_bad_input(code, &err, "circuit `k01-re` appears more than once");
    assert_eq!(position(&err, "dup.json"), Some((6, 3)));
}

// ----- 4. names of our own -------------------------------------------------------------------

#[test]
fn rehearse_is_listed_and_sample_is_a_hidden_alias() {
    let (_tmp, dir) = campaign();
    let (code, help, _) = run(phasewright().arg("--help"));
    assert_eq!(code, 0);
    assert!(help.contains("rehearse"), "{help}");
    assert!(
        !help.contains("sample"),
        "the old name is not advertised:\n{help}"
    );
    let a = dir.parent().unwrap().join("a.json");
    let b = dir.parent().unwrap().join("b.json");
    for (cmd, out) in [("rehearse", &a), ("sample", &b)] {
        let (code, _, err) = run(phasewright()
            .args([cmd, "--shots", "300", "--seed", "5", "-q", "-o"])
            .arg(out)
            .arg(&dir));
        assert_eq!(code, 0, "{cmd}: {err}");
    }
    assert_eq!(std::fs::read(&a).unwrap(), std::fs::read(&b).unwrap());
}

#[test]
fn plan_keys_are_phasewrights_own() {
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("dev");
    let (code, _, err) =
        compile_mixed(&out, &["--state", "0000", "--device", "examples/line8.dev"]);
    assert_eq!(code, 0, "{err}");
    let text = std::fs::read_to_string(out.join("plan.json")).unwrap();
    for old in ["initial_layout", "final_layout", "num_clbits", "num_qubits"] {
        assert!(!text.contains(old), "plan.json still says `{old}`");
    }
    let plan: serde_json::Value = serde_json::from_str(&text).unwrap();
    assert_eq!(
        plan["device"]["start_placement"].as_array().unwrap().len(),
        5
    );
    let c = &plan["circuits"][0];
    assert_eq!(c["end_placement"].as_array().unwrap().len(), 5);
    assert_eq!(c["bit_count"], 1);
    assert_eq!(c["qubit_count"], 8, "line8.dev has 8 physical qubits");
    assert_eq!(plan["hamiltonian"]["qubit_count"], 4);
}

// ----- 5. docs -------------------------------------------------------------------------------

#[test]
fn the_counts_example_in_the_docs_answers_its_documented_campaign() {
    let doc = std::fs::read_to_string("docs/counts.md").unwrap();
    let command = doc
        .lines()
        .find(|l| l.starts_with("phasewright compile "))
        .expect("docs/counts.md shows the compile command of its example");
    let start = doc.find("```json\n").unwrap() + "```json\n".len();
    let example = &doc[start..start + doc[start..].find("```").unwrap()];
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("mixed");
    let mut args: Vec<&str> = command.split_whitespace().skip(1).collect();
    let o = args.iter().position(|a| *a == "-o").unwrap();
    args.truncate(o);
    let (code, _, err) = run(phasewright().args(&args).arg("-o").arg(&out).arg("-q"));
    assert_eq!(code, 0, "{err}");
    let counts = tmp.path().join("counts.json");
    std::fs::write(&counts, example).unwrap();
    let (code, table, err) = run(phasewright()
        .arg("estimate")
        .arg(&out)
        .arg("--counts")
        .arg(&counts));
    assert_eq!(code, 0, "the documented example is refused:\n{err}");
    assert!(table.contains("overlap plan"), "{table}");
}

#[test]
fn table_and_plot_show_the_same_error_bars_and_the_energy_unit() {
    let (_tmp, dir) = campaign();
    let base = dir.parent().unwrap().to_path_buf();
    let counts = base.join("counts.json");
    let plot = base.join("energies.svg");
    let (code, _, err) = run(phasewright()
        .args(["rehearse", "--shots", "2000", "-q", "-o"])
        .arg(&counts)
        .arg(&dir));
    assert_eq!(code, 0, "{err}");
    let (code, table, err) = run(phasewright()
        .arg("estimate")
        .arg(&dir)
        .arg("--counts")
        .arg(&counts)
        .arg("--plot")
        .arg(&plot));
    assert_eq!(code, 0, "{err}");
    assert!(table.contains("±1σ") && !table.contains("±2σ"), "{table}");
    let svg = std::fs::read_to_string(&plot).unwrap();
    assert!(
        svg.contains("(±1σ)") && !svg.contains("±2σ"),
        "plot bars differ from the table"
    );
    assert!(
        svg.contains("energy (units of H"),
        "no unit on the energy axis"
    );
    // Integral-file input: energies in hartree, named on the axis.
    let chem = base.join("chem");
    let (code, _, err) = run(phasewright()
        .args([
            "compile",
            "examples/toy_chain3.fcidump",
            "--encoding",
            "jw",
            "--state",
            "hf",
            "--dt",
            "0.3",
            "--points",
            "3",
            "-q",
            "-o",
        ])
        .arg(&chem));
    assert_eq!(code, 0, "{err}");
    let plan = std::fs::read_to_string(chem.join("plan.json")).unwrap();
    assert!(plan.contains("\"energy_unit\": \"hartree\""));
    let chem_counts = base.join("chem-counts.json");
    assert_eq!(
        run(phasewright()
            .args(["rehearse", "--shots", "2000", "-q", "-o"])
            .arg(&chem_counts)
            .arg(&chem))
        .0,
        0
    );
    let (code, table, err) = run(phasewright()
        .arg("estimate")
        .arg(&chem)
        .arg("--counts")
        .arg(&chem_counts)
        .arg("--plot")
        .arg(&plot));
    assert_eq!(code, 0, "{err}");
    assert!(table.contains("energies in hartree"), "{table}");
    assert!(std::fs::read_to_string(&plot)
        .unwrap()
        .contains("energy (hartree)"));
}

/// A file that differs from its plan's claim, with its SHA-256 updated in the plan so that it
/// reaches the check: `verify --method tableau` points at it and exits 1, also when stderr is
/// a closed pipe (its diagnostics are then lost, never a panic).
#[test]
fn a_differing_file_is_reported_without_a_panic_even_with_stderr_closed() {
    use sha2::{Digest, Sha256};
    let (_tmp, dir) = campaign();
    let file = dir.join("k01-re.qasm");
    let text = std::fs::read_to_string(&file).unwrap();
    let measure = "c[0] = measure q[8];";
    assert!(text.contains(measure), "{text}");
    let edited = text.replace(measure, &format!("x q[8];\n{measure}"));
    std::fs::write(&file, &edited).unwrap();
    let hash: String = Sha256::digest(edited.as_bytes())
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect();
    edit_plan(&dir, |v| {
        for c in v["circuits"].as_array_mut().unwrap() {
            if c["file"] == "k01-re.qasm" {
                c["sha256"] = serde_json::Value::String(hash.clone());
            }
        }
    });
    let verify = ["verify", "--method", "tableau"];
    let (code, _, err) = run(phasewright().args(verify).arg(&dir));
    assert_eq!(code, 1, "{err}");
    assert!(err.contains("k01-re.qasm"), "{err}");
    assert!(!err.contains("panicked"), "{err}");

    let mut child = std::process::Command::new(assert_cmd::cargo::cargo_bin("phasewright"))
        .args(verify)
        .arg(&dir)
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    drop(child.stderr.take());
    let status = child.wait().unwrap();
    assert_eq!(
        status.code(),
        Some(1),
        "a closed stderr must not turn exit 1 into a panic"
    );
}
