//! The README's transcripts are real runs: every ```text block that starts with
//! `$ phasewright …` is replayed, in README order, in a scratch folder holding the bundled
//! `examples/`, and the printed output (stdout, then stderr) must equal the block's lines. A
//! line `...` in a block stands for any number of lines. A block that opens with
//! `OPENQASM 3.0;` must be the start of the file the paragraph above it names.
//!
//! `BLESS=1 cargo test --test readme_transcripts` rewrites the blocks from the runs (keeping
//! each `...` and as many lines after it as the block had), for a change that alters output on
//! purpose; review the README diff before committing it.

use std::path::{Path, PathBuf};
use std::process::Command;

const README: &str = "README.md";

/// A fenced text block: line range of its body in the README.
struct Block {
    /// Index of the first body line (after the opening fence).
    start: usize,
    /// Index of the closing fence.
    end: usize,
}

fn text_blocks(lines: &[&str]) -> Vec<Block> {
    let mut out = Vec::new();
    let mut i = 0;
    while i < lines.len() {
        if lines[i].trim_end() == "```text" {
            let start = i + 1;
            let mut end = start;
            while end < lines.len() && lines[end].trim_end() != "```" {
                end += 1;
            }
            out.push(Block { start, end });
            i = end + 1;
        } else {
            i += 1;
        }
    }
    out
}

/// Splits a command line the way the README writes them: words separated by spaces, no quoting.
fn words(cmd: &str) -> Vec<String> {
    cmd.split_whitespace().map(str::to_string).collect()
}

fn run(scratch: &Path, cmd: &str) -> Vec<String> {
    let args = words(cmd);
    assert_eq!(args[0], "phasewright", "README command `{cmd}`");
    let out = Command::new(env!("CARGO_BIN_EXE_phasewright"))
        .args(&args[1..])
        .current_dir(scratch)
        .output()
        .unwrap();
    let mut text = String::from_utf8_lossy(&out.stdout).into_owned();
    text.push_str(&String::from_utf8_lossy(&out.stderr));
    text.lines().map(|l| l.trim_end().to_string()).collect()
}

/// Whether `got` matches `want`, where a `...` line in `want` matches any run of lines.
fn matches(want: &[String], got: &[String]) -> bool {
    match want.iter().position(|l| l == "...") {
        None => want == got,
        Some(p) => {
            let tail = &want[p + 1..];
            got.len() >= p + tail.len()
                && got[..p] == want[..p]
                && matches(tail, &got[got.len() - tail.len()..])
        }
    }
}

/// The block rewritten from `got`, keeping the shape of `want` around a `...`.
fn blessed(want: &[String], got: &[String]) -> Vec<String> {
    match want.iter().position(|l| l == "...") {
        None => got.to_vec(),
        Some(p) => {
            let tail = want.len() - p - 1;
            let head = p.min(got.len());
            let mut out = got[..head].to_vec();
            out.push("...".into());
            out.extend_from_slice(&got[got.len().saturating_sub(tail).max(head)..]);
            out
        }
    }
}

/// The `out/…qasm` path named last in the README text before line `before`.
fn named_qasm(lines: &[&str], before: usize) -> Option<String> {
    lines[..before].iter().rev().take(6).find_map(|l| {
        l.split('`')
            .find(|w| w.starts_with("out/") && w.ends_with(".qasm"))
            .map(str::to_string)
    })
}

fn scratch_with_examples() -> (tempfile::TempDir, PathBuf) {
    let tmp = tempfile::tempdir().unwrap();
    let root = tmp.path().to_path_buf();
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("examples");
    let dst = root.join("examples");
    std::fs::create_dir(&dst).unwrap();
    for e in std::fs::read_dir(&src).unwrap() {
        let e = e.unwrap();
        if e.file_type().unwrap().is_file() {
            std::fs::copy(e.path(), dst.join(e.file_name())).unwrap();
        }
    }
    (tmp, root)
}

#[test]
fn readme_transcripts_are_real_runs() {
    let bless = std::env::var_os("BLESS").is_some();
    let readme = std::fs::read_to_string(README).unwrap();
    let lines: Vec<&str> = readme.lines().collect();
    let (_tmp, scratch) = scratch_with_examples();
    let mut replaced: Vec<(usize, usize, Vec<String>)> = Vec::new();
    let mut failures = Vec::new();
    let mut commands = 0;
    for b in text_blocks(&lines) {
        let body: Vec<String> = lines[b.start..b.end]
            .iter()
            .map(|l| l.trim_end().to_string())
            .collect();
        if body
            .first()
            .is_some_and(|l| l.starts_with("$ phasewright "))
        {
            let mut new_body = Vec::new();
            let mut i = 0;
            while i < body.len() {
                let cmd = body[i].strip_prefix("$ ").expect("a command line");
                let mut j = i + 1;
                while j < body.len() && !body[j].starts_with("$ ") {
                    j += 1;
                }
                let want = &body[i + 1..j];
                let got = run(&scratch, cmd);
                commands += 1;
                if !matches(want, &got) {
                    failures.push(format!(
                        "README line {}: `{cmd}`\n--- README\n{}\n--- run\n{}",
                        b.start + i + 1,
                        want.join("\n"),
                        got.join("\n")
                    ));
                }
                new_body.push(body[i].clone());
                new_body.extend(blessed(want, &got));
                i = j;
            }
            replaced.push((b.start, b.end, new_body));
        } else if body.first().is_some_and(|l| l == "OPENQASM 3.0;") {
            let file = named_qasm(&lines, b.start).expect("the paragraph names the .qasm file");
            let text = std::fs::read_to_string(scratch.join(&file)).unwrap();
            let got: Vec<String> = text
                .lines()
                .take(body.len())
                .map(|l| l.trim_end().to_string())
                .collect();
            if got != body {
                failures.push(format!(
                    "README line {}: the start of {file}\n--- README\n{}\n--- file\n{}",
                    b.start,
                    body.join("\n"),
                    got.join("\n")
                ));
            }
            replaced.push((b.start, b.end, got));
        }
    }
    assert!(commands >= 5, "only {commands} README commands found");
    if bless {
        let mut out: Vec<String> = Vec::new();
        let mut at = 0;
        for (start, end, body) in &replaced {
            out.extend(lines[at..*start].iter().map(|l| l.to_string()));
            out.extend(body.iter().cloned());
            at = *end;
        }
        out.extend(lines[at..].iter().map(|l| l.to_string()));
        std::fs::write(README, out.join("\n") + "\n").unwrap();
        return;
    }
    assert!(
        failures.is_empty(),
        "README transcripts differ from real runs (BLESS=1 rewrites them):\n{}",
        failures.join("\n\n")
    );
}

#[test]
fn an_ellipsis_matches_any_run_of_lines() {
    let s = |v: &[&str]| v.iter().map(|x| x.to_string()).collect::<Vec<_>>();
    assert!(matches(&s(&["a", "...", "z"]), &s(&["a", "b", "c", "z"])));
    assert!(matches(&s(&["a", "...", "z"]), &s(&["a", "z"])));
    assert!(!matches(&s(&["a", "...", "z"]), &s(&["a", "b"])));
    assert!(!matches(&s(&["a", "b"]), &s(&["a", "b", "c"])));
    assert_eq!(
        blessed(&s(&["a", "...", "z"]), &s(&["A", "b", "c", "Z"])),
        s(&["A", "...", "Z"])
    );
}
