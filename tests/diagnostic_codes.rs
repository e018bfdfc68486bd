//! The diagnostics catalogue through the real binary: `phasewright explain` lists every code,
//! explains each one, refuses an unknown one (exit 2, README "Commands"), and every error a
//! command prints carries a code that `explain` knows.

use assert_cmd::Command;

fn phasewright() -> Command {
    Command::cargo_bin("phasewright").unwrap()
}

fn listed_codes() -> Vec<String> {
    let out = phasewright().args(["explain", "--json"]).output().unwrap();
    assert!(out.status.success());
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    v["codes"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["code"].as_str().unwrap().to_string())
        .collect()
}

#[test]
fn every_listed_code_has_a_long_form() {
    let codes = listed_codes();
    assert!(codes.len() >= 25, "{codes:?}");
    let plain = phasewright().arg("explain").output().unwrap();
    let table = String::from_utf8(plain.stdout).unwrap();
    for c in &codes {
        assert!(table.lines().any(|l| l.starts_with(c.as_str())), "{c}");
        let out = phasewright().args(["explain", c]).output().unwrap();
        assert!(out.status.success(), "{c}");
        let text = String::from_utf8(out.stdout).unwrap();
        assert!(text.starts_with(&format!("{c}: ")), "{text}");
        assert!(text.lines().count() >= 3, "{text}");
    }
    // Case does not matter.
    let lower = phasewright()
        .args(["explain", &codes[0].to_lowercase()])
        .output()
        .unwrap();
    assert!(lower.status.success());
}

#[test]
fn an_unknown_code_is_bad_input_with_the_codes_of_its_kind() {
    let out = phasewright().args(["explain", "H999"]).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8(out.stderr).unwrap();
    assert!(err.starts_with("error U101: `H999` is not"), "{err}");
    assert!(err.contains("H101"), "{err}");
}

/// Errors from the argument parser, the readers and the command layer all start with
/// `error CODE:` and end by naming `phasewright explain CODE`, for a code in the catalogue.
#[test]
fn errors_of_every_layer_carry_a_known_code() {
    let codes = listed_codes();
    let tmp = tempfile::tempdir().unwrap();
    let bad = tmp.path().join("bad.ham");
    std::fs::write(&bad, "qubits 2\n0.5 Z0 Z7\n").unwrap();
    let good = tmp.path().join("good.ham");
    std::fs::write(&good, "qubits 2\n0.5 Z0 Z1\n0.3 X0\n").unwrap();
    let out_dir = tmp.path().join("o");
    let out_dir = out_dir.to_str().unwrap();
    let missing = tmp.path().join("none");
    let runs: Vec<(Vec<&str>, &str)> = vec![
        (vec!["compile", "--no-such-option"], "U101"),
        (
            vec![
                "compile",
                bad.to_str().unwrap(),
                "--state",
                "00",
                "--dt",
                "0.1",
                "--points",
                "2",
                "-o",
                out_dir,
            ],
            "H104",
        ),
        (
            vec![
                "compile",
                good.to_str().unwrap(),
                "--state",
                "00",
                "--dt",
                "-0.1",
                "--points",
                "2",
                "-o",
                out_dir,
            ],
            "U101",
        ),
        (
            vec![
                "compile",
                good.to_str().unwrap(),
                "--dt",
                "0.1",
                "--points",
                "2",
                "-o",
                out_dir,
            ],
            "U201",
        ),
        (vec!["verify", missing.to_str().unwrap()], "I101"),
    ];
    for (args, want) in runs {
        let out = phasewright().args(&args).output().unwrap();
        assert_eq!(out.status.code(), Some(2), "{args:?}");
        let err = String::from_utf8(out.stderr).unwrap();
        let first = err.lines().next().unwrap_or("");
        let code = first
            .strip_prefix("error ")
            .and_then(|r| r.split(':').next())
            .unwrap_or_else(|| panic!("{args:?}: {err}"));
        assert_eq!(code, want, "{args:?}: {err}");
        assert!(
            codes.iter().any(|c| c == code),
            "{code} not in the catalogue"
        );
        assert!(
            err.trim_end()
                .ends_with(&format!("(`phasewright explain {code}` says more)")),
            "{err}"
        );
    }
}
