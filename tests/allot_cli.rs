//! `allot` shares a total shot budget among a campaign's circuits (Neyman allocation) and
//! writes the shares into plan.json; `rehearse` draws them. At the same total the summed
//! variance of the quantities read (every circuit's parity mean) is lower than with equal
//! shots: predicted, and measured over rehearsal seeds.
//!
//! Source of the rule: J. Neyman, "On the two different aspects of the representative
//! method", J. R. Stat. Soc. 97, 558–625 (1934): at a fixed total, `Σ σ_i²/n_i` is smallest
//! for `n_i ∝ σ_i`, where it equals `(Σ σ_i)²/N`.

use assert_cmd::Command;
use std::path::Path;

fn run(args: &[&str]) -> (i32, String, String) {
    let out = Command::cargo_bin("phasewright")
        .unwrap()
        .args(args)
        .output()
        .unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8(out.stdout).unwrap(),
        String::from_utf8(out.stderr).unwrap(),
    )
}

fn ok(args: &[&str]) -> String {
    let (code, out, err) = run(args);
    assert_eq!(code, 0, "{args:?}: {err}");
    out
}

/// Every circuit's ancilla parity mean (bit 0, leftmost) from a counts file, in plan order.
fn parity_means(counts: &Path, ids: &[String]) -> Vec<f64> {
    let v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(counts).unwrap()).unwrap();
    ids.iter()
        .map(|id| {
            let (mut s, mut n) = (0.0, 0.0);
            for (bits, c) in v["counts"][id].as_object().unwrap() {
                let c = c.as_f64().unwrap();
                s += if bits.starts_with('0') { c } else { -c };
                n += c;
            }
            s / n
        })
        .collect()
}

fn variance(xs: &[f64]) -> f64 {
    let m = xs.iter().sum::<f64>() / xs.len() as f64;
    xs.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (xs.len() - 1) as f64
}

#[test]
fn neyman_shares_lower_the_summed_variance_at_the_same_total() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("c");
    let d = dir.display().to_string();
    // An overlap campaign whose early real parts are near 1 (per-shot deviation near 0) and
    // whose imaginary parts are not: the deviations differ widely.
    ok(&[
        "compile",
        "examples/mixed_field4.ham",
        "--state",
        "0+1r",
        "--dt",
        "0.05",
        "--points",
        "8",
        "-o",
        &d,
    ]);
    let plan: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("plan.json")).unwrap()).unwrap();
    let ids: Vec<String> = plan["circuits"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["id"].as_str().unwrap().to_string())
        .collect();
    let m = ids.len() as u64;
    let per = 4000u64;
    let total = per * m;
    let a: serde_json::Value =
        serde_json::from_str(&ok(&["allot", &d, "--shots", &total.to_string(), "--json"])).unwrap();
    let shots: Vec<u64> = a["circuits"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["shots"].as_u64().unwrap())
        .collect();
    let sd: Vec<f64> = a["circuits"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["sd_per_shot"].as_f64().unwrap())
        .collect();
    assert_eq!(shots.iter().sum::<u64>(), total);
    let predicted = a["summed_variance"].as_f64().unwrap();
    let predicted_equal = a["summed_variance_equal"].as_f64().unwrap();
    eprintln!("σ per shot {sd:?}\nshots {shots:?}\npredicted {predicted:.3e} vs equal {predicted_equal:.3e}");
    assert!(
        predicted < 0.8 * predicted_equal,
        "{predicted} vs {predicted_equal}"
    );
    // The shares are in plan.json, and the plan still verifies as unchanged campaign files.
    let plan: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("plan.json")).unwrap()).unwrap();
    for (c, &n) in plan["circuits"].as_array().unwrap().iter().zip(&shots) {
        assert_eq!(c["shots"].as_u64(), Some(n));
    }
    // Rehearse both allocations over many seeds and measure Σ_i Var(mean_i).
    let seeds = 60;
    let (mut allotted, mut equal) = (vec![Vec::new(); ids.len()], vec![Vec::new(); ids.len()]);
    for seed in 0..seeds {
        let ca = tmp.path().join(format!("a{seed}.json"));
        let ce = tmp.path().join(format!("e{seed}.json"));
        let s = seed.to_string();
        let out = ok(&[
            "rehearse",
            &d,
            "--seed",
            &s,
            "-o",
            &ca.display().to_string(),
        ]);
        assert!(out.contains("shared as plan.json allots them"), "{out}");
        ok(&[
            "rehearse",
            &d,
            "--seed",
            &s,
            "--shots",
            &per.to_string(),
            "-o",
            &ce.display().to_string(),
        ]);
        // The allotted file carries each circuit's share, and no global "shots".
        let v: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(&ca).unwrap()).unwrap();
        assert!(v.get("shots").is_none());
        for (i, id) in ids.iter().enumerate() {
            let n: u64 = v["counts"][id]
                .as_object()
                .unwrap()
                .values()
                .map(|x| x.as_u64().unwrap())
                .sum();
            assert_eq!(n, shots[i], "{id}");
        }
        for (i, x) in parity_means(&ca, &ids).into_iter().enumerate() {
            allotted[i].push(x);
        }
        for (i, x) in parity_means(&ce, &ids).into_iter().enumerate() {
            equal[i].push(x);
        }
    }
    let v_allotted: f64 = allotted.iter().map(|x| variance(x)).sum();
    let v_equal: f64 = equal.iter().map(|x| variance(x)).sum();
    eprintln!("measured over {seeds} seeds: {v_allotted:.3e} allotted vs {v_equal:.3e} equal");
    assert!(v_allotted < v_equal, "{v_allotted} vs {v_equal}");
    // The measured sums agree with the prediction Σσ²/n (a sum of M = 14 sample variances
    // over 60 seeds has a relative error of about √(2/59)/√14 ≈ 5%; allow 35%).
    assert!(
        (v_allotted / predicted - 1.0).abs() < 0.35,
        "{v_allotted} vs {predicted}"
    );
    assert!(
        (v_equal / predicted_equal - 1.0).abs() < 0.35,
        "{v_equal} vs {predicted_equal}"
    );
}

#[test]
fn pilot_counts_give_the_deviations_and_bad_requests_are_refused() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("c");
    let d = dir.display().to_string();
    ok(&[
        "compile",
        "examples/mixed_field4.ham",
        "--state",
        "0+1r",
        "--dt",
        "0.1",
        "--points",
        "5",
        "--measure",
        "krylov",
        "-o",
        &d,
    ]);
    let pilot = tmp.path().join("pilot.json").display().to_string();
    ok(&[
        "rehearse", &d, "--shots", "20000", "--seed", "9", "-o", &pilot,
    ]);
    let predicted: serde_json::Value =
        serde_json::from_str(&ok(&["allot", &d, "--shots", "1000000", "--json"])).unwrap();
    let measured: serde_json::Value = serde_json::from_str(&ok(&[
        "allot", &d, "--shots", "1000000", "--counts", &pilot, "--json",
    ]))
    .unwrap();
    assert!(measured["deviations"].as_str().unwrap().contains("pilot"));
    // Per-shot deviations from 2·10⁴ pilot shots agree with the predicted ones to a few
    // standard errors (a standard deviation from n samples has relative error ≈ 1/√(2n)).
    for (p, m) in predicted["circuits"]
        .as_array()
        .unwrap()
        .iter()
        .zip(measured["circuits"].as_array().unwrap())
    {
        let (p, m) = (
            p["sd_per_shot"].as_f64().unwrap(),
            m["sd_per_shot"].as_f64().unwrap(),
        );
        assert!((p - m).abs() <= 0.05 * p.max(0.2), "{p} vs {m}");
    }
    // Equal shares need no deviations.
    let eq: serde_json::Value = serde_json::from_str(&ok(&[
        "allot",
        &d,
        "--shots",
        "1001",
        "--shots-by",
        "equal",
        "--json",
    ]))
    .unwrap();
    let n: Vec<u64> = eq["circuits"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["shots"].as_u64().unwrap())
        .collect();
    assert_eq!(n.iter().sum::<u64>(), 1001);
    assert!(n.iter().max().unwrap() - n.iter().min().unwrap() <= 1);
    // Fewer than 2 shots per circuit: refused (exit 2) with the reason.
    let (code, _, err) = run(&["allot", &d, "--shots", "3"]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("fewer than 2 per circuit"), "{err}");
    // A plain evolution campaign reads nothing: refused.
    let ev = tmp.path().join("ev").display().to_string();
    ok(&[
        "compile",
        "examples/mixed_field4.ham",
        "--state",
        "0+1r",
        "--dt",
        "0.1",
        "--points",
        "3",
        "--measure",
        "evolution",
        "-o",
        &ev,
    ]);
    let (code, _, err) = run(&["allot", &ev, "--shots", "10000"]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("reads nothing"), "{err}");
}
