//! Support for the fixture tests (`stage_fixtures`, `golden_output`, the estimate fixtures of
//! `estimate_cli`): whether this run re-blesses (`BLESS=1`), and the line diff a mismatch
//! prints, so every fixture that fails shows what changed instead of two whole texts.

#![allow(dead_code)]

use std::fmt::Write as _;

/// True when the run was asked to rewrite the expected files (`BLESS=1`, nothing else).
pub fn blessing() -> bool {
    std::env::var("BLESS").is_ok_and(|v| v == "1")
}

/// A line diff (longest common subsequence): ` ` kept, `-` expected only, `+` got only; runs of
/// more than three kept lines are cut to their ends.
pub fn line_diff(want: &str, got: &str) -> String {
    let a: Vec<&str> = want.lines().collect();
    let b: Vec<&str> = got.lines().collect();
    if a.len() * b.len() > 16_000_000 {
        let k = a.iter().zip(&b).take_while(|(x, y)| x == y).count();
        return format!("first difference at line {}", k + 1);
    }
    // lcs[i][j]: longest common subsequence of a[i..] and b[j..].
    let mut lcs = vec![vec![0u32; b.len() + 1]; a.len() + 1];
    for i in (0..a.len()).rev() {
        for j in (0..b.len()).rev() {
            lcs[i][j] = if a[i] == b[j] {
                lcs[i + 1][j + 1] + 1
            } else {
                lcs[i + 1][j].max(lcs[i][j + 1])
            };
        }
    }
    let mut lines: Vec<(char, &str)> = Vec::new();
    let (mut i, mut j) = (0, 0);
    while i < a.len() || j < b.len() {
        if i < a.len() && j < b.len() && a[i] == b[j] {
            lines.push((' ', a[i]));
            i += 1;
            j += 1;
        } else if i < a.len() && (j == b.len() || lcs[i + 1][j] >= lcs[i][j + 1]) {
            lines.push(('-', a[i]));
            i += 1;
        } else {
            lines.push(('+', b[j]));
            j += 1;
        }
    }
    let mut out = String::new();
    let mut k = 0;
    while k < lines.len() {
        let run = lines[k..].iter().take_while(|l| l.0 == ' ').count();
        if run > 6 {
            let (head, tail) = (
                if k == 0 { 0 } else { 3 },
                if k + run == lines.len() { 0 } else { 3 },
            );
            for l in &lines[k..k + head] {
                writeln!(out, "{}{}", l.0, l.1).unwrap();
            }
            writeln!(out, "@@ {} equal lines @@", run - head - tail).unwrap();
            for l in &lines[k + run - tail..k + run] {
                writeln!(out, "{}{}", l.0, l.1).unwrap();
            }
            k += run;
        } else {
            let l = lines[k];
            writeln!(out, "{}{}", l.0, l.1).unwrap();
            k += 1;
        }
    }
    out
}
