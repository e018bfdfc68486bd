//! Completion scripts and man pages come from the command-line definitions: every command is in
//! them, and the bash script is valid bash (checked by `bash -n`, the shell's own parser).

use assert_cmd::Command;

const COMMANDS: &[&str] = &[
    "allot",
    "budget",
    "compile",
    "convert",
    "estimate",
    "explain",
    "rehearse",
    "verify",
    "completions",
    "manual",
];

fn phasewright() -> Command {
    Command::cargo_bin("phasewright").unwrap()
}

#[test]
fn completion_scripts_name_every_command_and_bash_accepts_its_script() {
    for shell in ["bash", "zsh", "fish"] {
        let out = phasewright().args(["completions", shell]).output().unwrap();
        assert!(out.status.success(), "{shell}");
        let text = String::from_utf8(out.stdout).unwrap();
        for c in COMMANDS {
            assert!(text.contains(c), "{shell} script lacks `{c}`");
        }
        if shell == "bash"
            && std::process::Command::new("bash")
                .arg("--version")
                .output()
                .is_ok()
        {
            let tmp = tempfile::tempdir().unwrap();
            let f = tmp.path().join("pw.bash");
            std::fs::write(&f, &text).unwrap();
            let check = std::process::Command::new("bash")
                .arg("-n")
                .arg(&f)
                .output()
                .unwrap();
            assert!(
                check.status.success(),
                "{}",
                String::from_utf8_lossy(&check.stderr)
            );
        }
    }
    let out = phasewright()
        .args(["completions", "tcsh"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
}

#[test]
fn the_manual_has_a_page_per_command() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("man1");
    let out = phasewright()
        .args(["manual", "-q", "-o"])
        .arg(&dir)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let top = std::fs::read_to_string(dir.join("phasewright.1")).unwrap();
    assert!(
        top.starts_with(".ie") || top.contains(".TH phasewright"),
        "{}",
        &top[..200.min(top.len())]
    );
    for c in COMMANDS {
        let page = std::fs::read_to_string(dir.join(format!("phasewright-{c}.1")))
            .unwrap_or_else(|e| panic!("phasewright-{c}.1: {e}"));
        assert!(page.contains(&format!(".TH phasewright-{c}")), "{c}");
    }
    assert!(!dir.join("phasewright-help.1").exists());
    // A file where the folder should be is refused as bad input.
    let file = tmp.path().join("plain");
    std::fs::write(&file, "x").unwrap();
    let out = phasewright()
        .args(["manual", "-o"])
        .arg(&file)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
}
