//! Golden files: the exact bytes `compile` writes for two small campaigns (all-to-all and a
//! device), kept in `tests/data/compile/NNNN_name/`. Any change to the emitted programs or the
//! plan shows up here as a diff to review. Regenerate on purpose with `BLESS=1 cargo test
//! --test golden_output`, never by hand. A mismatch prints a line diff per file (`-` golden,
//! `+` written).

mod fixture_support;

use assert_cmd::Command;
use fixture_support::{blessing, line_diff};
use std::path::Path;

fn check_case(name: &str, args: &[&str]) {
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("out");
    let mut cmd = Command::cargo_bin("phasewright").unwrap();
    let r = cmd
        .arg("compile")
        .args(args)
        .arg("-o")
        .arg(&out)
        .output()
        .unwrap();
    assert!(r.status.success(), "{}", String::from_utf8_lossy(&r.stderr));
    let golden = Path::new("tests/data/compile").join(name);
    let bless = blessing();
    if bless {
        let _ = std::fs::remove_dir_all(&golden);
        std::fs::create_dir_all(&golden).unwrap();
    }
    let mut files: Vec<String> = std::fs::read_dir(&out)
        .unwrap()
        .map(|e| e.unwrap().file_name().into_string().unwrap())
        .collect();
    files.sort();
    for f in &files {
        let got = std::fs::read_to_string(out.join(f)).unwrap();
        if bless {
            std::fs::write(golden.join(f), &got).unwrap();
            continue;
        }
        let want = std::fs::read_to_string(golden.join(f))
            .unwrap_or_else(|_| panic!("{name}/{f} has no golden file; run with BLESS=1"));
        assert!(
            got == want,
            "{name}/{f} differs from its golden file:\n{}\nreview the change and re-bless with BLESS=1",
            line_diff(&want, &got)
        );
    }
    let mut kept: Vec<String> = std::fs::read_dir(&golden)
        .unwrap()
        .map(|e| e.unwrap().file_name().into_string().unwrap())
        .collect();
    kept.sort();
    assert_eq!(kept, files, "{name}: the set of written files changed");
}

#[test]
fn all_to_all_overlap_campaign_bytes() {
    check_case(
        "0001_mixed_field4_overlap",
        &[
            "examples/mixed_field4.ham",
            "--state",
            "0+1r",
            "--dt",
            "0.25",
            "--points",
            "3",
        ],
    );
}

#[test]
fn device_krylov_campaign_bytes() {
    check_case(
        "0002_mixed_field4_krylov_line8",
        &[
            "examples/mixed_field4.ham",
            "--state",
            "0+1r",
            "--dt",
            "0.25",
            "--points",
            "2",
            "--measure",
            "krylov",
            "--device",
            "examples/line8.dev",
        ],
    );
}
