//! `rehearse` streams counts circuit by circuit; the file must be the very bytes serde_json's
//! pretty printer gives for the whole document (the format written before streaming), the same
//! on stdout and in a file, and the same with one thread and many.

use assert_cmd::Command;

fn rehearse(dir: &str, out: &str, threads: &str) -> Vec<u8> {
    let o = Command::cargo_bin("phasewright")
        .unwrap()
        .env("RAYON_NUM_THREADS", threads)
        .args(["rehearse", dir, "--shots", "500", "--seed", "9", "-o", out])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    o.stdout
}

#[test]
fn streamed_counts_equal_the_whole_document_printer() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("c");
    let d = dir.display().to_string();
    let o = Command::cargo_bin("phasewright")
        .unwrap()
        .args([
            "compile",
            "examples/mixed_field4.ham",
            "--state",
            "0101",
            "--dt",
            "0.2",
            "--points",
            "40",
            "--measure",
            "krylov",
            "-o",
            &d,
        ])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let f1 = dir.join("a.json").display().to_string();
    let f2 = dir.join("b.json").display().to_string();
    rehearse(&d, &f1, "1");
    rehearse(&d, &f2, "2");
    let a = std::fs::read(&f1).unwrap();
    let b = std::fs::read(&f2).unwrap();
    assert_eq!(a, b, "thread count changed the bytes");
    let stdout = rehearse(&d, "-", "2");
    assert_eq!(a, stdout, "stdout and file differ");
    // serde_json (preserve_order) re-prints the parsed document byte for byte.
    let v: serde_json::Value = serde_json::from_slice(&a).unwrap();
    let again = serde_json::to_string_pretty(&v).unwrap() + "\n";
    assert_eq!(String::from_utf8(a).unwrap(), again);
    // More circuits than one chunk, so the chunk seams are exercised.
    assert!(v["counts"].as_object().unwrap().len() > 64);
    // No temporary file is left in the folder.
    assert!(std::fs::read_dir(&dir).unwrap().all(|e| !e
        .unwrap()
        .file_name()
        .to_string_lossy()
        .ends_with(".tmp")));
}
