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

fn run(args: &[&str]) -> std::process::Output {
    phasewright().args(args).output().unwrap()
}

fn ok(args: &[&str]) -> std::process::Output {
    let o = run(args);
    assert!(
        o.status.success(),
        "{args:?}: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    o
}

fn p(path: &Path) -> &str {
    path.to_str().unwrap()
}

/// A campaign run as one task (compile, verify, rehearse) and as 4 (the same commands with
/// `--shard I/4`, or on the share folders of `compile --shard`), then merged, gives the same
/// plan, circuit files and counts, byte for byte (README "Commands"): the shares partition the
/// circuits and each circuit's shots come from the stream of its index in the whole campaign.
#[test]
fn a_campaign_run_as_four_shards_is_the_one_run_campaign_with_its_counts() {
    let tmp = tempfile::tempdir().unwrap();
    let t = |name: &str| tmp.path().join(name);
    let rehearse = ["--shots", "2000", "--seed", "5", "-q"];
    let one = t("one");
    compile(&one, &["--measure", "krylov"]);
    ok(&["verify", p(&one), "-q"]);
    ok(&[&["rehearse", p(&one)][..], &rehearse].concat());
    let whole_counts = std::fs::read(one.join("counts.json")).unwrap();
    let total = folder(&one).len() - 2;
    assert!(total > 8, "{total} circuits");

    // Route 1: each task compiles, verifies and rehearses its share folder; one merge.
    let mut parts = Vec::new();
    for i in 1..=4 {
        let part = t(&format!("part{i}"));
        let share = format!("{i}/4");
        compile(&part, &["--measure", "krylov", "--shard", &share]);
        ok(&["verify", p(&part), "-q"]);
        ok(&[&["rehearse", p(&part)][..], &rehearse].concat());
        parts.push(part);
    }
    let all = t("all");
    let refs: Vec<&Path> = [2, 0, 3, 1].iter().map(|&i| parts[i].as_path()).collect();
    let (code, err) = merge(&refs, &all);
    assert_eq!(code, 0, "{err}");
    assert_eq!(folder(&all), folder(&one));

    // Route 2: each task verifies and rehearses share I of the one campaign folder.
    let mut ids = Vec::new();
    let mut files = Vec::new();
    for i in 1..=4 {
        let share = format!("{i}/4");
        let v = ok(&["verify", p(&one), "--shard", &share, "--json"]);
        let v: serde_json::Value = serde_json::from_slice(&v.stdout).unwrap();
        assert_eq!(v["ok"], true);
        let mine: Vec<String> = v["circuits"]
            .as_array()
            .unwrap()
            .iter()
            .map(|c| c["id"].as_str().unwrap().to_string())
            .collect();
        assert_eq!(mine.len(), (total + 4 - i) / 4, "share {share}");
        ids.extend(mine);
        let f = t(&format!("counts{i}.json"));
        ok(&[
            &["rehearse", p(&one), "--shard", &share, "-o", p(&f)][..],
            &rehearse,
        ]
        .concat());
        files.push(f);
    }
    ids.sort();
    ids.dedup();
    assert_eq!(ids.len(), total, "the shares do not partition the circuits");
    let merged = t("merged.json");
    let mut args = vec!["merge"];
    args.extend([3, 1, 0, 2].iter().map(|&i| p(&files[i])));
    args.extend(["-o", p(&merged), "-q"]);
    ok(&args);
    assert_eq!(std::fs::read(&merged).unwrap(), whole_counts);
    // A share's counts file is marked, and the same bytes as the share folder's own.
    let part2: serde_json::Value =
        serde_json::from_slice(&std::fs::read(&files[1]).unwrap()).unwrap();
    assert_eq!(part2["shard"]["index"], 2);
    assert_eq!(part2["shard"]["count"], 4);
    assert_eq!(
        std::fs::read(&files[1]).unwrap(),
        std::fs::read(parts[1].join("counts.json")).unwrap()
    );
    // The merged counts estimate like the one run's.
    ok(&[
        "estimate",
        p(&all),
        "--counts",
        p(&merged),
        "--bootstrap",
        "0",
        "-q",
    ]);
}

#[test]
fn merge_refuses_overlapping_missing_and_mismatched_share_counts() {
    let tmp = tempfile::tempdir().unwrap();
    let t = |name: &str| tmp.path().join(name);
    let one = t("one");
    compile(&one, &[]);
    let counts = |i: usize, seed: &str| {
        let f = t(&format!("c{i}-{seed}.json"));
        ok(&[
            "rehearse",
            p(&one),
            "--shots",
            "100",
            "--seed",
            seed,
            "--shard",
            &format!("{i}/3"),
            "-o",
            p(&f),
            "-q",
        ]);
        f
    };
    let (c1, c2, c3, c3b) = (
        counts(1, "1"),
        counts(2, "1"),
        counts(3, "1"),
        counts(3, "2"),
    );
    ok(&["rehearse", p(&one), "--shots", "100", "-q"]);
    let whole = one.join("counts.json");
    let (c1, c2, c3, c3b) = (c1.as_path(), c2.as_path(), c3.as_path(), c3b.as_path());
    let cases: Vec<(Vec<&Path>, &str)> = vec![
        (vec![c1, c2], "the counts of share 3/3 are missing"),
        (vec![c1, c2, c2, c3], "are both the counts of share 2/3"),
        (vec![c1, c2, c3b], "(seed differs)"),
        (
            vec![c1, c2, whole.as_path()],
            "not a share's (no `shard` key)",
        ),
        (vec![c1, c2, one.as_path()], "both folders and files"),
    ];
    for (inputs, words) in cases {
        let (code, err) = merge(&inputs, &t("out.json"));
        assert_eq!(code, 2, "{inputs:?}: {err}");
        assert!(err.starts_with("error U301:"), "{err}");
        assert!(err.contains(words), "{inputs:?}: {err}");
        assert!(!t("out.json").exists());
    }
    // A share's counts are not the campaign's: estimate says to merge them first.
    let o = run(&["estimate", p(&one), "--counts", p(c1)]);
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.starts_with("error C301:") && err.contains("phasewright merge"),
        "{err}"
    );
    // A share folder is one task's work already: no --shard on it.
    compile(&t("s1"), &["--shard", "1/2"]);
    let o = run(&["rehearse", p(&t("s1")), "--shard", "1/2"]);
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.starts_with("error U201:") && err.contains("already holds share 1/2"),
        "{err}"
    );
    // Share folders with counts in some of them only: the missing counts are named.
    compile(&t("s2"), &["--shard", "2/2"]);
    ok(&["rehearse", p(&t("s1")), "--shots", "50", "-q"]);
    let (code, err) = merge(&[&t("s1"), &t("s2")], &t("joined"));
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("the counts of share 2/2 are missing"), "{err}");
}

/// A hand-edited share mark is a plan problem with its place (P301, exit 2), never a panic of
/// the index arithmetic that derives each circuit's global index from it.
#[test]
fn an_edited_share_mark_is_refused_with_its_place() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("s");
    compile(&dir, &["--shard", "2/3"]);
    let plan = dir.join("plan.json");
    let text = std::fs::read_to_string(&plan).unwrap();
    for (from, to, words) in [
        (
            "\"index\": 2",
            "\"index\": 0",
            "share 0 of 3 does not exist",
        ),
        (
            "\"index\": 2",
            "\"index\": 4",
            "share 4 of 3 does not exist",
        ),
        (
            "\"campaign_circuits\": 10",
            "\"campaign_circuits\": 30",
            "holds 10, but the plan lists 3",
        ),
    ] {
        assert!(text.contains(from), "{text}");
        std::fs::write(&plan, text.replace(from, to)).unwrap();
        for args in [vec!["rehearse", p(&dir)], vec!["verify", p(&dir)]] {
            let o = run(&args);
            let err = String::from_utf8_lossy(&o.stderr);
            assert_eq!(o.status.code(), Some(2), "{args:?}: {err}");
            assert!(
                err.starts_with("error P301:") && err.contains(words),
                "{err}"
            );
        }
    }
}
