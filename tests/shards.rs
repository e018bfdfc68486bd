//! A campaign compiled as N shares of a job array and merged is the campaign one `compile`
//! writes, byte for byte (all-to-all and on a device); `merge` refuses a missing share, a share
//! given twice, shares of different campaigns and an edited circuit file (exit 2, README
//! "Commands").

use assert_cmd::Command;
use std::path::Path;

fn phasewright() -> Command {
    Command::cargo_bin("phasewright").unwrap()
}

fn compile(out: &Path, extra: &[&str]) {
    let o = phasewright()
        .args([
            "compile",
            "examples/ising_ring8.ham",
            "--state",
            "00000000",
            "--dt",
            "0.2",
            "--points",
            "6",
            "-q",
            "-o",
        ])
        .arg(out)
        .args(extra)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
}

fn folder(dir: &Path) -> Vec<(String, Vec<u8>)> {
    let mut v: Vec<(String, Vec<u8>)> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| {
            let e = e.unwrap();
            (
                e.file_name().to_string_lossy().into_owned(),
                std::fs::read(e.path()).unwrap(),
            )
        })
        .collect();
    v.sort();
    v
}

fn merge(parts: &[&Path], out: &Path) -> (i32, String) {
    let o = phasewright()
        .arg("merge")
        .args(parts)
        .arg("-o")
        .arg(out)
        .arg("-q")
        .output()
        .unwrap();
    (
        o.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&o.stderr).into_owned(),
    )
}

#[test]
fn four_shares_merge_into_the_one_run_campaign() {
    let tmp = tempfile::tempdir().unwrap();
    for extra in [
        vec![],
        vec!["--device", "examples/chip_grid12.dev"],
        vec!["--measure", "krylov"],
    ] {
        let one = tmp.path().join("one");
        compile(&one, &extra);
        let mut parts = Vec::new();
        for i in 1..=4 {
            let p = tmp.path().join(format!("part{i}"));
            let mut args = extra.clone();
            let share = format!("{i}/4");
            args.extend(["--shard", share.as_str()]);
            compile(&p, &args);
            parts.push(p);
        }
        // Every circuit is in exactly one share.
        let listed: usize = parts.iter().map(|p| folder(p).len() - 1).sum();
        assert_eq!(listed, folder(&one).len() - 1, "{extra:?}");
        let all = tmp.path().join("all");
        let refs: Vec<&Path> = [3, 0, 2, 1].iter().map(|&i| parts[i].as_path()).collect();
        let (code, err) = merge(&refs, &all);
        assert_eq!(code, 0, "{err}");
        assert_eq!(folder(&all), folder(&one), "{extra:?}");
        for d in [&one, &all] {
            std::fs::remove_dir_all(d).unwrap();
        }
        for p in &parts {
            std::fs::remove_dir_all(p).unwrap();
        }
    }
}

#[test]
fn merge_refuses_incomplete_repeated_foreign_and_edited_shares() {
    let tmp = tempfile::tempdir().unwrap();
    let p = |name: &str| tmp.path().join(name);
    compile(&p("a1"), &["--shard", "1/2"]);
    compile(&p("a2"), &["--shard", "2/2"]);
    compile(&p("b2"), &["--shard", "2/2", "--steps", "2"]);
    compile(&p("whole"), &[]);
    let cases: Vec<(Vec<&str>, &str)> = vec![
        (vec!["a1"], "share 2/2 is missing"),
        (vec!["a1", "a1"], "are both share 1/2"),
        (vec!["a1", "b2"], "shares of different campaigns"),
        (vec!["a1", "whole"], "is not a share"),
    ];
    for (names, words) in cases {
        let dirs: Vec<std::path::PathBuf> = names.iter().map(|n| p(n)).collect();
        let refs: Vec<&Path> = dirs.iter().map(|d| d.as_path()).collect();
        let (code, err) = merge(&refs, &p("out"));
        assert_eq!(code, 2, "{names:?}: {err}");
        assert!(err.contains(words), "{names:?}: {err}");
        assert!(err.starts_with("error U301:"), "{err}");
    }
    // An edited circuit file is named.
    let f = p("a2").join("k01-im.qasm");
    let mut text = std::fs::read_to_string(&f).unwrap();
    text.push_str("// edited\n");
    std::fs::write(&f, text).unwrap();
    let (code, err) = merge(&[&p("a1"), &p("a2")], &p("out"));
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("k01-im.qasm") && err.starts_with("error P302:"),
        "{err}"
    );
    // A bad share spec is refused by the option parser.
    let o = phasewright()
        .args([
            "compile",
            "examples/ising_ring8.ham",
            "--state",
            "00000000",
            "--dt",
            "0.2",
            "--points",
            "3",
            "--shard",
            "3/2",
            "-o",
        ])
        .arg(p("x"))
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(2));
}
