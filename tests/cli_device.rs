//! Device targets end to end: the written files (not only the IR) use only native gates, every
//! two-qubit gate sits on a coupled pair, and `verify` passes with the final permutation.

use assert_cmd::Command;
use phasewright::circuit::verify::{verify_ir, Rules};
use phasewright::lang::dev::parse_device;
use phasewright::qasm;

fn run_ok(args: &[&str]) -> String {
    let out = Command::cargo_bin("phasewright")
        .unwrap()
        .args(args)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{:?}: {}",
        args,
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout).unwrap()
}

#[test]
fn files_for_every_example_device_are_native_coupled_and_correct() {
    let tmp = tempfile::tempdir().unwrap();
    let cases = [
        (
            "examples/ising_ring8.ham",
            "0+0+0+0+",
            "examples/chip_grid12.dev",
            "overlap",
        ),
        (
            "examples/mixed_field4.ham",
            "0+1r",
            "examples/brick16.dev",
            "krylov",
        ),
        (
            "examples/heisenberg_chain6.ham",
            "010101",
            "examples/ring10_u.dev",
            "overlap",
        ),
        (
            "examples/mixed_field4.ham",
            "0+1r",
            "examples/line8.dev",
            "trace",
        ),
        (
            "examples/heisenberg_chain6.ham",
            "010101",
            "examples/hexchip127.dev",
            "krylov",
        ),
        (
            "examples/mixed_field4.ham",
            "0+1r",
            "examples/hexchip433.dev",
            "overlap",
        ),
    ];
    for (ham, state, dev_path, measure) in cases {
        let out = tmp.path().join(format!(
            "{}-{measure}",
            std::path::Path::new(dev_path)
                .file_stem()
                .unwrap()
                .to_string_lossy()
        ));
        let out_s = out.display().to_string();
        // A trace campaign draws its own states; the others start from one.
        let (start, start_value) = if measure == "trace" {
            ("--samples", "2")
        } else {
            ("--state", state)
        };
        let table = run_ok(&[
            "compile",
            ham,
            start,
            start_value,
            "--dt",
            "0.25",
            "--points",
            "3",
            "--measure",
            measure,
            "--device",
            dev_path,
            "-o",
            &out_s,
        ]);
        assert!(
            table.contains("swaps") && table.contains("success"),
            "{table}"
        );
        let dev = parse_device(dev_path, &std::fs::read_to_string(dev_path).unwrap()).unwrap();
        let plan: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(out.join("plan.json")).unwrap()).unwrap();
        assert_eq!(plan["device"]["name"], serde_json::json!(dev.name));
        for c in plan["circuits"].as_array().unwrap() {
            let text = std::fs::read_to_string(out.join(c["file"].as_str().unwrap())).unwrap();
            let prog = qasm::read("f.qasm", &text).unwrap();
            assert_eq!(
                prog.addressing,
                qasm::Addressing::Physical,
                "device files address hardware qubits"
            );
            let coupled = |a: u32, b: u32| dev.coupled(a, b);
            let rules = Rules {
                coupled: Some(&coupled),
                native: Some(&dev.native.names),
            };
            verify_ir(&prog.circuit, &rules)
                .unwrap_or_else(|e| panic!("{dev_path} {}: {e}", c["id"]));
            assert!(prog.circuit.num_qubits <= dev.num_qubits);
            assert!(c["costs"]["success_probability"].as_f64().unwrap() > 0.0);
            assert!(c["costs"]["duration_ns"].as_f64().unwrap() > 0.0);
            assert_eq!(
                c["end_placement"].as_array().unwrap().len(),
                plan["hamiltonian"]["qubit_count"].as_u64().unwrap() as usize + 1
            );
        }
        let v: serde_json::Value =
            serde_json::from_str(&run_ok(&["verify", "--json", &out_s])).unwrap();
        assert_eq!(v["ok"], true, "{dev_path}: {v}");
    }
}

#[test]
fn a_device_too_small_or_split_is_bad_input() {
    let tmp = tempfile::tempdir().unwrap();
    let small = tmp.path().join("small.dev");
    std::fs::write(&small, "qubits 4\nnative rz sx x cx\nlattice line 4\n").unwrap();
    let r = Command::cargo_bin("phasewright")
        .unwrap()
        .args([
            "compile",
            "examples/ising_ring8.ham",
            "--state",
            "00000000",
            "--dt",
            "0.1",
            "--points",
            "2",
            "--device",
        ])
        .arg(&small)
        .arg("-o")
        .arg(tmp.path().join("o"))
        .output()
        .unwrap();
    assert_eq!(r.status.code(), Some(2));
    assert!(
        String::from_utf8_lossy(&r.stderr).contains("has 4 qubits"),
        "{}",
        String::from_utf8_lossy(&r.stderr)
    );
    assert!(!tmp.path().join("o").exists());
}

#[test]
fn a_heavy_hexagon_row_length_that_does_not_fit_is_bad_input() {
    let tmp = tempfile::tempdir().unwrap();
    let bad = tmp.path().join("hex.dev");
    std::fs::write(&bad, "native rz sx x cx\nlattice bridgedhex 7 14\n").unwrap();
    let r = Command::cargo_bin("phasewright")
        .unwrap()
        .args([
            "compile",
            "examples/ising_ring8.ham",
            "--state",
            "00000000",
            "--dt",
            "0.1",
            "--points",
            "2",
            "--device",
        ])
        .arg(&bad)
        .arg("-o")
        .arg(tmp.path().join("o"))
        .output()
        .unwrap();
    assert_eq!(r.status.code(), Some(2));
    let err = String::from_utf8_lossy(&r.stderr);
    assert!(
        err.contains("hex.dev:2:22: heavy-hexagon rows have 4k + 3 qubits"),
        "{err}"
    );
    assert!(
        err.contains("2 | lattice bridgedhex 7 14\n  |                      ^^"),
        "{err}"
    );
    assert!(!tmp.path().join("o").exists());
}

/// The README's device command (`examples/ising_ring8.ham`, state 00000000, dt 0.2, 3 points)
/// on `device` with `extra` arguments, written to `out`.
fn compile_ring8(device: &str, extra: &[&str], out: &std::path::Path) -> std::process::Output {
    let out = out.display().to_string();
    let mut args = vec![
        "compile",
        "examples/ising_ring8.ham",
        "--state",
        "00000000",
        "--dt",
        "0.2",
        "--points",
        "3",
        "--device",
        device,
        "-o",
        &out,
    ];
    args.extend_from_slice(extra);
    Command::cargo_bin("phasewright")
        .unwrap()
        .args(&args)
        .output()
        .unwrap()
}

/// A device with a coherence time: the table says that its success estimates count waiting,
/// each recorded estimate is the gate-error product times `exp(−idle / T)` (so below the
/// product recomputed on the same chip without the `coherence` line, common practice: each
/// idle qubit an independent exponential decay), and `verify` passes.
#[test]
fn a_coherence_time_shows_in_the_estimates_and_the_files_verify() {
    let tmp = tempfile::tempdir().unwrap();
    let base = std::fs::read_to_string("examples/chip_grid12.dev").unwrap();
    // The README chip with `coherence T` appended, compiled into `out`: the printed table.
    let compile_with = |coherence: &str, out: &std::path::Path| {
        let dev_path = tmp.path().join(format!("chip_{coherence}.dev"));
        std::fs::write(&dev_path, format!("{base}coherence {coherence}\n")).unwrap();
        let run = compile_ring8(&dev_path.display().to_string(), &[], out);
        assert!(
            run.status.success(),
            "{}",
            String::from_utf8_lossy(&run.stderr)
        );
        (dev_path, String::from_utf8(run.stdout).unwrap())
    };
    let out = tmp.path().join("camp");
    let out_s = out.display().to_string();
    let (dev_path, table) = compile_with("100us", &out);
    assert!(
        table.contains("Success estimates include waiting")
            && table.contains("coherence time T 100 µs")
            && table.contains("weighed idling against CNOTs"),
        "{table}"
    );
    // Its longest circuit lasts about 20 µs: no caution at 100 µs, one at 15 µs.
    assert!(!table.contains("Caution: the longest circuit"), "{table}");
    let (_, short) = compile_with("15us", &tmp.path().join("short"));
    assert!(
        short.contains("longer than the shortest coherence time (15 µs)"),
        "{short}"
    );
    let timed = parse_device("chip_t.dev", &std::fs::read_to_string(&dev_path).unwrap()).unwrap();
    let free = parse_device("chip.dev", &base).unwrap();
    let plan: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("plan.json")).unwrap()).unwrap();
    for c in plan["circuits"].as_array().unwrap() {
        let text = std::fs::read_to_string(out.join(c["file"].as_str().unwrap())).unwrap();
        let prog = qasm::read("f.qasm", &text).unwrap();
        let recorded = c["costs"]["success_probability"].as_f64().unwrap();
        let with = phasewright::device::costs(&prog.circuit, &timed, 0);
        let without = phasewright::device::costs(&prog.circuit, &free, 0);
        assert!((recorded - with.success_probability.unwrap()).abs() < 1e-12);
        assert!(
            recorded < without.success_probability.unwrap(),
            "{}",
            c["id"]
        );
    }
    let v: serde_json::Value =
        serde_json::from_str(&run_ok(&["verify", "--json", &out_s])).unwrap();
    assert_eq!(v["ok"], true, "{v}");
}

/// `compile --tries N` on the README chip (whose calibration gives gate errors): the campaign
/// kept has a summed log success estimate at least that of the one try from the same seed,
/// the seed it came from is named and rebuilds the same files alone, and `verify` passes; 0
/// and 65 tries are bad input (exit 2).
#[test]
fn more_tries_keep_a_campaign_no_worse_and_the_files_verify() {
    let tmp = tempfile::tempdir().unwrap();
    let compile = |tries: &str, out: &std::path::Path| {
        compile_ring8("examples/chip_grid12.dev", &["--tries", tries], out)
    };
    let log_success = |out: &std::path::Path| -> f64 {
        let plan: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(out.join("plan.json")).unwrap()).unwrap();
        plan["circuits"]
            .as_array()
            .unwrap()
            .iter()
            .map(|c| c["costs"]["success_probability"].as_f64().unwrap().ln())
            .sum()
    };
    let (one, three) = (tmp.path().join("one"), tmp.path().join("three"));
    let single = compile("1", &one);
    assert!(single.status.success());
    assert!(!String::from_utf8_lossy(&single.stdout).contains("Layout search:"));
    let tried = compile("3", &three);
    assert!(tried.status.success());
    // The plan names the seed whose search was kept, the table says so, and that seed alone
    // builds the same files.
    let plan: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(three.join("plan.json")).unwrap()).unwrap();
    let kept = plan["device"]["search_seed"].as_u64().unwrap();
    assert!((1..=3).contains(&kept), "{kept}");
    let table = String::from_utf8(tried.stdout).unwrap();
    assert!(
        table.contains(&format!(
            "Layout search: 3 tries, seeds 1 to 3; kept the campaign of seed {kept} (`--seed {kept} --tries 1`"
        )),
        "{table}"
    );
    let alone = tmp.path().join("alone");
    let kept_s = kept.to_string();
    let again = compile_ring8("examples/chip_grid12.dev", &["--seed", &kept_s], &alone);
    assert!(again.status.success());
    for c in plan["circuits"].as_array().unwrap() {
        let f = c["file"].as_str().unwrap();
        assert_eq!(
            std::fs::read(three.join(f)).unwrap(),
            std::fs::read(alone.join(f)).unwrap(),
            "{f}"
        );
    }
    assert!(
        log_success(&three) >= log_success(&one) - 1e-12,
        "{} against {}",
        log_success(&three),
        log_success(&one)
    );
    let v: serde_json::Value =
        serde_json::from_str(&run_ok(&["verify", "--json", &three.display().to_string()])).unwrap();
    assert_eq!(v["ok"], true, "{v}");
    for bad in ["0", "65"] {
        let out = compile(bad, &tmp.path().join(format!("bad{bad}")));
        assert_eq!(out.status.code(), Some(2), "--tries {bad}");
        assert!(String::from_utf8_lossy(&out.stderr).contains("--tries"));
    }
}
