//! Fewer two-qubit gates (`compile --opt`, `route::sweep`, `route::hub`, `route::embed`):
//!
//! - every level × family × random Hamiltonians × random devices (and all-to-all): each
//!   written program, read back, passes `verify_ir` with the target's rules and gives the ideal
//!   product-formula value of each read to 1e-9 (`check_plan`, what `phasewright verify`
//!   runs); the formulas are Suzuki's (J. Math. Phys. 32, 400 (1991)), and the schedules are
//!   exact because only commuting neighbours are exchanged (see `route::sweep`);
//! - level n+1 never emits more two-qubit gates than level n on the small members of the
//!   benchmark suite (`benches/fewer_gates.rs`);
//! - label-shuffled lattice models: the layout for the uncontrolled evolution couples every
//!   Hamiltonian edge when the device allows it, and routing that evolution inserts no SWAP;
//! - one Strang step of a 12-site Ising chain on a 13-qubit line, controlled by the ancilla,
//!   needs at most 162 two-qubit gates (1.05 × the 154 of a hand-written one-sweep schedule:
//!   22 ZZ half-rotations at 4 CNOTs, 12 X rotations at 2, 14 SWAPs at 3);
//! - the transverse-field Ising chain is controlled through a sign flip (`synth::flip`): 90
//!   two-qubit gates per step, counted by hand, simulated and proved by the tableau check.

use phasewright::check::{check_plan, COMPILE_TOLERANCE};
use phasewright::circuit::verify::{verify_ir, Rules};
use phasewright::device::{lattice, Calibration, Device, NativeSet};
use phasewright::family::{random_states, Spec};
use phasewright::formula::Order;
use phasewright::pauli::{Pauli, PauliString, PauliSum};
use phasewright::pipeline::{compile_at, Compiled, OptLevel, Target};
use phasewright::plan::Family;
use phasewright::qasm;
use phasewright::route::reuse::step_parts_on;
use phasewright::route::swap::insert_swaps;
use phasewright::route::{emitted_two_qubit, plan_target, RouteConfig, TargetPlan};
use proptest::prelude::*;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

mod route_support;
use route_support::{random_device, random_hamiltonian, random_state};

fn compile(h: &PauliSum, spec: &Spec, dev: Option<&Device>, level: u8) -> Compiled {
    let cfg = RouteConfig::default();
    let target = match dev {
        Some(device) => Target::Device {
            device,
            config: &cfg,
        },
        None => Target::AllToAll,
    };
    compile_at(h, "random", spec, &target, OptLevel::new(level).unwrap()).unwrap()
}

/// Reads every program back, checks the IR rules and the simulated values against the ideal
/// formula (`check_plan`, tolerance 1e-9).
fn check_compiled(compiled: &Compiled, dev: Option<&Device>, what: &str) {
    let mut read_back = Vec::new();
    for (text, entry) in compiled.programs.iter().zip(&compiled.plan.circuits) {
        let p = qasm::read("c.qasm", text).unwrap();
        if let Some(dev) = dev {
            let coupled = |a: u32, b: u32| dev.coupled(a, b);
            let rules = Rules {
                coupled: Some(&coupled),
                native: Some(&dev.native.names),
            };
            verify_ir(&p.circuit, &rules).unwrap_or_else(|e| panic!("{what} {}: {e}", entry.id));
        }
        read_back.push(p.circuit);
    }
    for c in check_plan(&compiled.plan, &read_back).unwrap() {
        assert!(
            c.compile_error <= COMPILE_TOLERANCE,
            "{what} {}: compile error {}",
            c.id,
            c.compile_error
        );
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 32, ..ProptestConfig::default() })]

    #[test]
    fn every_level_gives_the_ideal_product_formula(
        seed in any::<u64>(),
        n in 2usize..=4,
        terms in 1usize..=7,
        kind in 0u8..6,
        native in 0usize..4,
        order in prop_oneof![Just(Order::First), Just(Order::Second), Just(Order::Fourth)],
        steps_per_dt in 1usize..=2,
        family in prop_oneof![Just(Family::Overlap), Just(Family::Krylov), Just(Family::Trace)],
        level in 0u8..=3,
    ) {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let h = random_hamiltonian(n, terms, &mut rng);
        // kind 5: all-to-all.
        let dev = (kind < 5).then(|| random_device(kind, n + 1, native, &mut rng));
        let states = match family {
            Family::Trace => random_states(n, 2, seed),
            _ => vec![random_state(n, &mut rng)],
        };
        let spec = three_points(family, order, steps_per_dt, states);
        let compiled = compile(&h, &spec, dev.as_ref(), level);
        check_compiled(&compiled, dev.as_ref(), &format!("level {level}"));
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 24, ..ProptestConfig::default() })]

    /// XXZ chains with random couplings and `Z` fields: no string anticommutes with every
    /// term, but one does with the hopping (`synth::flip::flip_split`). On random devices,
    /// Strang and Suzuki steps, one or two steps per `dt`: level 3 stays the ideal product
    /// formula to 1e-9 (simulated), and where it keeps a flip, the plan's count of controlled
    /// terms is the split's and the tableau proof accepts every file.
    #[test]
    fn partially_flipped_chains_stay_exact_on_random_devices(
        seed in any::<u64>(),
        n in 3usize..=5,
        kind in 0u8..5,
        native in 0usize..4,
        order in prop_oneof![Just(Order::Second), Just(Order::Fourth)],
        steps_per_dt in 1usize..=2,
    ) {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let mut h = PauliSum::new(n);
        for i in 0..n - 1 {
            let hop = rng.gen_range(0.5..1.5);
            h.add(zz(i, i + 1, Pauli::X), hop);
            h.add(zz(i, i + 1, Pauli::Y), hop);
            h.add(zz(i, i + 1, Pauli::Z), rng.gen_range(-1.0..1.0));
        }
        if rng.gen_bool(0.5) {
            h.add(PauliString::single(rng.gen_range(0..n), Pauli::Z), rng.gen_range(-0.5..0.5));
        }
        let dev = random_device(kind, n + 1, native, &mut rng);
        let states = vec![random_state(n, &mut rng)];
        let spec = three_points(Family::Overlap, order, steps_per_dt, states);
        let compiled = compile(&h, &spec, Some(&dev), 3);
        check_compiled(&compiled, Some(&dev), "partial flip");
        let device = compiled.plan.device.as_ref().unwrap();
        if let Some(q) = &device.flip_string {
            assert_flip_record(&h, q, device.flip_controlled_terms, device.flip_signed);
            assert_every_file_proved(&compiled);
        }
    }

    /// All-to-all, random sums whose strings all anticommute with one random string (a
    /// whole flip) or XXZ chains with fields (a partial one), overlap and Krylov campaigns,
    /// Strang and Suzuki, one or two steps per `dt`: level 3 stays the ideal product formula
    /// to 1e-9 (simulated), never emits more two-qubit gates per circuit than level 2, and
    /// where circuits keep the flip the plan's record matches the split and the tableau
    /// proof accepts every file.
    #[test]
    fn flipped_all_to_all_circuits_stay_exact(
        seed in any::<u64>(),
        n in 3usize..=5,
        chain in any::<bool>(),
        family in prop_oneof![Just(Family::Overlap), Just(Family::Krylov)],
        order in prop_oneof![Just(Order::Second), Just(Order::Fourth)],
        steps_per_dt in 1usize..=2,
    ) {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let mut h = PauliSum::new(n);
        if chain {
            for i in 0..n - 1 {
                let hop = rng.gen_range(0.5..1.5);
                h.add(zz(i, i + 1, Pauli::X), hop);
                h.add(zz(i, i + 1, Pauli::Y), hop);
                h.add(zz(i, i + 1, Pauli::Z), rng.gen_range(-1.0..1.0));
            }
            h.add(PauliString::single(rng.gen_range(0..n), Pauli::Z), rng.gen_range(-0.5..0.5));
        } else {
            let top = 1u64 << n;
            let q = loop {
                let q = PauliString::from_masks(rng.gen_range(0..top), rng.gen_range(0..top));
                if !q.is_identity() {
                    break q;
                }
            };
            for _ in 0..40 {
                let p = PauliString::from_masks(rng.gen_range(0..top), rng.gen_range(0..top));
                if !p.commutes_with(&q) && h.terms.len() < 8 {
                    h.add(p, rng.gen_range(-1.0..1.0));
                }
            }
        }
        let states = vec![random_state(n, &mut rng)];
        let spec = three_points(family, order, steps_per_dt, states);
        let compiled = compile(&h, &spec, None, 3);
        check_compiled(&compiled, None, "all-to-all flip");
        let plain = compile(&h, &spec, None, 2);
        for (c, p) in compiled.plan.circuits.iter().zip(&plain.plan.circuits) {
            prop_assert!(c.costs.two_qubit <= p.costs.two_qubit, "{}", c.id);
        }
        if let Some(flip) = &compiled.plan.flip {
            assert_flip_record(&h, &flip.string, flip.controlled_terms, flip.signed);
            prop_assert!(compiled.plan.circuits.iter().any(|c| c.flipped));
            assert_every_file_proved(&compiled);
        } else {
            prop_assert!(compiled.plan.circuits.iter().all(|c| !c.flipped));
        }
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 16, ..ProptestConfig::default() })]

    /// On chips whose calibration weighs CNOTs (coupler errors of their own, coherence times,
    /// random per qubit), levels 2 and 3 still give the ideal product formula, and every
    /// recorded success estimate is a probability that `device::costs` reproduces from the
    /// written program.
    #[test]
    fn calibrated_chips_keep_the_product_formula_exact(
        seed in any::<u64>(),
        n in 2usize..=4,
        terms in 1usize..=7,
        kind in 0u8..5,
        native in 0usize..4,
        level in 2u8..=3,
    ) {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let h = random_hamiltonian(n, terms, &mut rng);
        let mut dev = random_device(kind, n + 1, native, &mut rng);
        let names = dev.native.names.clone();
        let links = dev.links();
        let cal = &mut dev.calibration;
        for name in &names {
            let two = name == "cx" || name == "cz";
            let e = if two { rng.gen_range(0.002..0.03) } else { rng.gen_range(0.0..0.002) };
            cal.error_rate.insert(name.clone(), e);
            cal.time_ns.insert(name.clone(), if two { 300.0 } else { 35.0 });
        }
        let two_name = names.iter().find(|g| *g == "cx" || *g == "cz").unwrap().clone();
        for (a, b) in links {
            if rng.gen_bool(0.3) {
                cal.link_error_rate.insert((two_name.clone(), a, b), rng.gen_range(0.002..0.05));
            }
        }
        cal.coherence_ns = Some(rng.gen_range(5_000.0..200_000.0));
        for q in 0..dev.num_qubits as u32 {
            if rng.gen_bool(0.3) {
                cal.qubit_coherence_ns.insert(q, rng.gen_range(1_000.0..100_000.0));
            }
        }
        let spec = controlled_overlap(random_state(n, &mut rng), 0.3, 3);
        let compiled = compile(&h, &spec, Some(&dev), level);
        check_compiled(&compiled, Some(&dev), &format!("level {level}"));
        for (text, entry) in compiled.programs.iter().zip(&compiled.plan.circuits) {
            let recorded = entry.costs.success_probability.unwrap();
            prop_assert!(recorded > 0.0 && recorded <= 1.0, "{}: {recorded}", entry.id);
            let p = qasm::read("c.qasm", text).unwrap();
            let again = phasewright::device::costs(&p.circuit, &dev, 0).success_probability.unwrap();
            // The pipeline multiplies piece by piece: equal up to round-off.
            prop_assert!((recorded - again).abs() <= 1e-9 * again,
                "{}: {recorded} against {again}", entry.id);
        }
    }
}

/// The default routing without the signed step (`RouteConfig::signed`), for the tests of the
/// forms it now outscores on their models: the split's flip, copies of the control.
fn split_only() -> RouteConfig {
    RouteConfig {
        signed: false,
        ..RouteConfig::default()
    }
}

/// A plan's record of a sign-flip step matches the step over `h`'s formula: a signed step's
/// count is of the terms that commute with its string (any string will do); a split's is of
/// the leading groups left controlled, and its string anticommutes with every other term.
fn assert_flip_record(h: &PauliSum, string: &str, controlled: usize, signed: bool) {
    let groups = phasewright::formula::term_groups(h);
    let sizes: Vec<usize> = groups.iter().map(|g| g.len()).collect();
    let terms = groups.concat();
    let q = PauliString::parse_factor_text(string).expect("the string parses");
    if signed {
        let kept = terms.iter().filter(|(p, _)| p.commutes_with(&q)).count();
        assert_eq!(controlled, kept, "signed by `{string}`");
        return;
    }
    let (k, _) = phasewright::synth::flip::flip_split(&terms, &sizes, h.num_qubits)
        .expect("a recorded split flip has a split");
    assert_eq!(controlled, sizes[..k].iter().sum::<usize>());
    let at: usize = sizes[..k].iter().sum();
    assert!(terms[at..].iter().all(|(p, _)| !p.commutes_with(&q)));
}

fn zz(a: usize, b: usize, p: Pauli) -> PauliString {
    PauliString::from_factors(&[(a, p), (b, p)]).1
}

fn ising_chain(n: usize) -> PauliSum {
    let mut h = PauliSum::new(n);
    for q in 0..n {
        h.add(PauliString::single(q, Pauli::X), 0.7);
        if q + 1 < n {
            h.add(zz(q, q + 1, Pauli::Z), -1.0);
        }
    }
    h
}

fn lattice_edges(rows: usize, cols: usize) -> Vec<(usize, usize)> {
    let mut e = Vec::new();
    for r in 0..rows {
        for c in 0..cols {
            let q = r * cols + c;
            if c + 1 < cols {
                e.push((q, q + 1));
            }
            if r + 1 < rows {
                e.push((q, q + cols));
            }
        }
    }
    e
}

/// A rows×cols model: `ZZ` (and with `heisenberg` also `XX`, `YY`) on every edge, a field.
fn lattice_model(rows: usize, cols: usize, heisenberg: bool) -> PauliSum {
    let n = rows * cols;
    let mut h = PauliSum::new(n);
    for (a, b) in lattice_edges(rows, cols) {
        h.add(zz(a, b, Pauli::Z), -1.0);
        if heisenberg {
            h.add(zz(a, b, Pauli::X), 1.0);
            h.add(zz(a, b, Pauli::Y), 1.0);
        }
    }
    for q in 0..n {
        let p = if heisenberg { Pauli::Z } else { Pauli::X };
        h.add(PauliString::single(q, p), 0.3 + 0.1 * q as f64);
    }
    h
}

/// The same model with qubit `q` renamed `perm[q]` (a seeded shuffle).
fn shuffled(h: &PauliSum, seed: u64) -> PauliSum {
    let n = h.num_qubits;
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut perm: Vec<usize> = (0..n).collect();
    for i in (1..n).rev() {
        perm.swap(i, rng.gen_range(0..=i));
    }
    let mut out = PauliSum::new(n);
    for (p, &c) in &h.terms {
        let f: Vec<(usize, Pauli)> = p
            .support_qubits()
            .into_iter()
            .map(|q| (perm[q], p.get(q)))
            .collect();
        out.add(PauliString::from_factors(&f).1, c);
    }
    out
}

fn plain_device(name: &str, n: usize, links: &[(u32, u32)]) -> Device {
    Device::new(
        name,
        n,
        links,
        NativeSet::rz_sx_x_cx(),
        Calibration::default(),
    )
}

/// An overlap campaign from `state`, one second-order step per `dt`, `points` time points,
/// the ancilla controlling the evolution.
fn controlled_overlap(state: String, dt: f64, points: usize) -> Spec {
    Spec {
        family: Family::Overlap,
        order: Order::Second,
        dt,
        points,
        steps_per_dt: 1,
        states: vec![state],
        control: phasewright::family::control::Control::Evolution,
    }
}

/// Three time points of `dt = 0.3`, the ancilla controlling the evolution.
fn three_points(family: Family, order: Order, steps_per_dt: usize, states: Vec<String>) -> Spec {
    Spec {
        family,
        order,
        dt: 0.3,
        points: 3,
        steps_per_dt,
        states,
        control: phasewright::family::control::Control::Evolution,
    }
}

/// The tableau proof (`tableau::equiv`) rebuilds every circuit the plan claims and proves
/// each file equal to it.
fn assert_every_file_proved(compiled: &Compiled) {
    let claim = phasewright::tableau::equiv::Claim::from_plan(&compiled.plan).unwrap();
    for (text, e) in compiled.programs.iter().zip(&compiled.plan.circuits) {
        let c = qasm::read("c.qasm", text).unwrap().circuit;
        let v = claim.check(e, &c).unwrap();
        assert!(
            matches!(v, phasewright::tableau::equiv::Verdict::Equivalent(_)),
            "{}: {v:?}",
            e.id
        );
    }
}

fn k01_re_two_qubit(c: &Compiled) -> usize {
    c.plan
        .circuits
        .iter()
        .find(|e| e.id == "k01-re")
        .expect("k01-re")
        .costs
        .two_qubit
}

#[test]
fn higher_levels_never_emit_more_two_qubit_gates_on_small_suite_members() {
    let mut rng = ChaCha8Rng::seed_from_u64(21);
    let mut dense = PauliSum::new(5);
    while dense.terms.len() < 24 {
        let p = PauliString::from_masks(rng.gen_range(0..32), rng.gen_range(0..32));
        if !p.is_identity() {
            dense.add(p, rng.gen_range(-1.0..1.0));
        }
    }
    let suite = [
        ("ising6", ising_chain(6)),
        ("ising2x3", lattice_model(2, 3, false)),
        ("heis2x2", lattice_model(2, 2, true)),
        ("dense5", dense),
    ];
    for (name, h) in &suite {
        let n = h.num_qubits;
        let m = (n + 1) as u32;
        let devices = [
            None,
            Some(plain_device("line", m as usize, &lattice::line(m))),
            Some(plain_device("ring", m as usize, &lattice::ring(m))),
            Some(plain_device(
                "grid",
                3 * m.div_ceil(3) as usize,
                &lattice::grid(m.div_ceil(3), 3),
            )),
        ];
        for dev in &devices {
            let spec = controlled_overlap("0".repeat(n), 0.2, 2);
            let counts: Vec<usize> = (0..=3)
                .map(|l| k01_re_two_qubit(&compile(h, &spec, dev.as_ref(), l)))
                .collect();
            for l in 0..3 {
                assert!(
                    counts[l + 1] <= counts[l],
                    "{name} on {}: levels {counts:?}",
                    dev.as_ref().map_or("all-to-all", |d| d.name.as_str())
                );
            }
        }
    }
}

/// The Jordan–Wigner qubit Hamiltonian of an integral file (`fermion::fcidump`), the constant
/// dropped.
fn from_integrals(path: &str) -> PauliSum {
    let text = std::fs::read_to_string(path).expect("integral file");
    let ints =
        phasewright::fermion::fcidump::parse_fcidump(path, &text).expect("integral file parses");
    phasewright::fermion::qubit_hamiltonian_from_integrals(
        &ints,
        phasewright::fermion::Encoding::JordanWigner,
        0,
    )
    .expect("integrals map to qubits")
    .0
}

#[test]
fn a_molecule_on_a_grid_and_a_line_stays_exact_with_coupled_networks() {
    // Linear H4 in STO-3G (8 qubits, `tests/data/h4_sto3g_r1.0.fcidump`, the benchmark's `h4`)
    // on a 3×3 grid and a line of 9: level 3 (which scores the coupled networks of
    // `synth::Coupled` among its candidates) reads back with every two-qubit gate on a
    // coupled pair and native gates only, gives the ideal Strang value (Strang, SIAM J.
    // Numer. Anal. 5, 506 (1968)) to 1e-9 (`check_plan`), and emits no more two-qubit gates
    // than level 2.
    let h = from_integrals("tests/data/h4_sto3g_r1.0.fcidump");
    let n = h.num_qubits;
    let devices = [
        plain_device("grid", 9, &lattice::grid(3, 3)),
        plain_device("line", 9, &lattice::line(9)),
    ];
    let spec = controlled_overlap("11110000".to_string(), 0.2, 2);
    assert_eq!(n, 8);
    for dev in &devices {
        let three = compile(&h, &spec, Some(dev), 3);
        check_compiled(&three, Some(dev), &format!("h4 on {}", dev.name));
        let two = compile(&h, &spec, Some(dev), 2);
        assert!(
            k01_re_two_qubit(&three) <= k01_re_two_qubit(&two),
            "h4 on {}",
            dev.name
        );
    }
}

#[test]
fn copies_of_the_control_shorten_a_molecule_s_networks_on_a_grid_with_spare_sites() {
    // H4 (8 qubits) on a 4×4 grid: 7 sites are spare. Level 3 also offers the coupled
    // networks of `synth::Coupled` with copies of the ancilla on spare sites as controls, so
    // strings are reduced beside the nearest control instead of carried to the ancilla. The
    // campaign must keep that form (copies listed, and no free site used as a temporary copy,
    // which only the ladder form with copies does), read back exact to 1e-9 against the ideal
    // Strang value (Strang, SIAM J. Numer. Anal. 5, 506 (1968)) with every two-qubit gate on a
    // coupled pair, and emit fewer two-qubit gates than the same level without copies. Both
    // are compiled without the router's run-ahead (`RouteConfig::commute_ahead`), which the
    // copies' routing does not use. With it (the default search) the winner's layout may suit
    // the copies less, though copies are also grown from the runner-up's layout
    // (`TargetPlan::runner_up_layouts`); the default campaign must read back exact and emit
    // fewer two-qubit gates than the form without copies. When written: 2202 two-qubit
    // gates with copies, 2612 without, 2367 for the default search here (no copies kept;
    // layout-trial seed 0). From the command line (`convert` then `compile --control
    // evolution`, same cutoff and state, its default `--seed 1`) the default search keeps 7
    // copies: 2289, against 2372 with copies grown from the winner's layout alone; with
    // `--seed 0` it gives this test's 2367.
    let mut h = from_integrals("tests/data/h4_sto3g_r1.0.fcidump");
    // What `convert` keeps by default (`--cutoff` 1e-10 Ha): the file's round-off strings
    // would double the step past the size where level 3 tries copies.
    h.drop_below(1e-10);
    let dev = plain_device("grid", 16, &lattice::grid(4, 4));
    let spec = controlled_overlap("11110000".to_string(), 0.2, 2);
    let best = compile(&h, &spec, Some(&dev), 3);
    check_compiled(&best, Some(&dev), "h4 on a 4×4 grid, default search");
    let no_ahead = || RouteConfig {
        commute_ahead: false,
        ..split_only()
    };
    let with = route_support::compile_level3_with(&h, "h4", &spec, &dev, no_ahead());
    check_compiled(&with, Some(&dev), "h4 on a 4×4 grid");
    let d = with.plan.device.as_ref().expect("a device campaign");
    assert!(
        !d.copy_placement.is_empty(),
        "copies of the control are kept"
    );
    assert!(
        !d.spare_qubits,
        "the coupled form uses no free site but its copies"
    );
    let without = route_support::compile_level3_with(
        &h,
        "h4",
        &spec,
        &dev,
        RouteConfig {
            cat: false,
            ..no_ahead()
        },
    );
    assert!(without
        .plan
        .device
        .as_ref()
        .unwrap()
        .copy_placement
        .is_empty());
    let (a, b) = (k01_re_two_qubit(&with), k01_re_two_qubit(&without));
    assert!(a < b, "{a} two-qubit gates with copies, {b} without");
    let c = k01_re_two_qubit(&best);
    assert!(c < b, "{c} two-qubit gates by default, {b} without copies");
}

#[test]
fn a_column_of_copies_sweeps_a_heisenberg_lattice_on_a_grid_with_a_spare_column() {
    // A 3×3 Heisenberg model with fields on a 3×4 grid: the lattice fills three columns and
    // the ancilla and its copies the fourth. Level 3 offers the step routed with the controls
    // moved together as a front (`route::cat::Policy`); the campaign must keep copies, read
    // back exact to 1e-9 against the ideal Strang value (Strang, SIAM J. Numer. Anal. 5, 506
    // (1968)) with every two-qubit gate on a coupled pair, and emit fewer two-qubit gates
    // than the same level without copies, at a lower two-qubit depth (the controls work side
    // by side).
    let h = lattice_model(3, 3, true);
    let dev = plain_device("grid", 12, &lattice::grid(3, 4));
    let spec = controlled_overlap("010101010".to_string(), 0.2, 2);
    // Without the signed step, which outscores both here (checked last).
    let with = route_support::compile_level3_with(&h, "heis", &spec, &dev, split_only());
    check_compiled(&with, Some(&dev), "heisenberg 3×3 on a 3×4 grid");
    let d = with.plan.device.as_ref().expect("a device campaign");
    assert!(
        !d.copy_placement.is_empty(),
        "copies of the control are kept"
    );
    let without = route_support::compile_level3_with(
        &h,
        "heis",
        &spec,
        &dev,
        RouteConfig {
            cat: false,
            ..split_only()
        },
    );
    let (a, b) = (k01_re_two_qubit(&with), k01_re_two_qubit(&without));
    assert!(a < b, "{a} two-qubit gates with copies, {b} without");
    let depth = |c: &Compiled| {
        let i = c
            .plan
            .circuits
            .iter()
            .position(|c| c.id == "k01-re")
            .unwrap();
        let circuit = qasm::read("k01-re.qasm", &c.programs[i]).unwrap().circuit;
        phasewright::circuit::schedule::depths(&circuit).0
    };
    let (da, db) = (depth(&with), depth(&without));
    assert!(da < db, "two-qubit depth {da} with copies, {db} without");
    let signed = compile(&h, &spec, Some(&dev), 3);
    check_compiled(&signed, Some(&dev), "heisenberg 3×3 on a 3×4 grid, default");
    let c = k01_re_two_qubit(&signed);
    assert!(c <= a, "{c} two-qubit gates by default, {a} with copies");
}

#[test]
fn shuffled_lattice_models_recover_every_edge_and_evolve_without_swaps() {
    let cases = [
        (ising_chain(8), plain_device("line", 9, &lattice::line(9))),
        (ising_chain(8), plain_device("ring", 10, &lattice::ring(10))),
        (
            lattice_model(3, 4, false),
            plain_device("grid", 16, &lattice::grid(4, 4)),
        ),
        // A brick wall has no 4-cycles, so no grid model embeds there; a chain does.
        (
            ising_chain(7),
            plain_device("brick", 12, &lattice::brickwall(3, 4)),
        ),
        (
            lattice_model(2, 3, true),
            plain_device("grid", 12, &lattice::grid(3, 4)),
        ),
    ];
    for (seed, (h, dev)) in cases.iter().enumerate() {
        let h = shuffled(h, seed as u64 + 1);
        let cfg = RouteConfig::default();
        let plan = plan_target(&h, phasewright::route::Ancilla::None, dev, &cfg).unwrap();
        for p in h.terms.keys() {
            let s = p.support_qubits();
            if s.len() == 2 {
                assert!(
                    dev.coupled(plan.initial_layout[s[0]], plan.initial_layout[s[1]]),
                    "{}: edge {s:?} not coupled under {:?}",
                    dev.name,
                    plan.initial_layout
                );
            }
        }
        let params = phasewright::route::swap::SwapParams {
            extended_size: cfg.extended_size,
            extended_weight: cfg.extended_weight,
            decay_step: cfg.decay_step,
            decay_reset: cfg.decay_reset,
            seed: cfg.seed,
            stall_limit: None,
            hub: None,
            hub_factor: 1.0,
            commute_ahead: 0,
        };
        // On that layout the step written with one ladder per term needs no SWAP.
        let ladders = TargetPlan::with_layout(
            h.num_qubits,
            phasewright::route::Ancilla::None,
            dev,
            plan.initial_layout.clone(),
        )
        .unwrap();
        let plain = step_parts_on(&ladders.terms(&h), &ladders, Order::Second, 0.2, Some(dev));
        let plain = insert_swaps(&plain.circuit, &plan.initial_layout, dev, &params);
        assert_eq!(
            plain.swaps, 0,
            "{}: uncontrolled evolution needed SWAPs",
            dev.name
        );
        // The plan's own step form (shared networks, routed) may spend a SWAP where that
        // saves CNOTs, but never emits more than those ladders.
        let parts = step_parts_on(&plan.terms(&h), &plan, Order::Second, 0.2, Some(dev));
        let routed = insert_swaps(&parts.circuit, &plan.initial_layout, dev, &params);
        assert!(
            emitted_two_qubit(&routed.circuit, dev) <= emitted_two_qubit(&plain.circuit, dev),
            "{}: {} swaps, {} against {} two-qubit gates",
            dev.name,
            routed.swaps,
            emitted_two_qubit(&routed.circuit, dev),
            emitted_two_qubit(&plain.circuit, dev)
        );
    }
}

/// The 12-site Ising chain on a line of 13, overlap family, Strang, `points` time points,
/// compiled at level 3: the device, the spec and the campaign.
fn ising12_on_a_line(points: usize) -> (Device, Spec, Compiled) {
    let h = ising_chain(12);
    let dev = plain_device("line", 13, &lattice::line(13));
    let spec = controlled_overlap("0".repeat(12), 0.1, points);
    let best = compile(&h, &spec, Some(&dev), 3);
    (dev, spec, best)
}

#[test]
fn an_ising_chain_step_on_a_line_meets_the_one_sweep_target() {
    // Issue target: ≤ 1.05 × 154 = 161.7 two-qubit gates for k01-re, one Strang step.
    let (dev, _, best) = ising12_on_a_line(2);
    let two_qubit = k01_re_two_qubit(&best);
    assert!(two_qubit <= 162, "{two_qubit}");
    check_compiled(&best, Some(&dev), "ising12 line");
}

#[test]
fn round_off_below_the_cutoff_is_dropped_and_recorded() {
    // Two strings at 1e-12 (integral round-off) beside real terms: convert and compile drop
    // them at the default cutoff 1e-10, say so, and the plan records the cutoff; --cutoff 0
    // keeps them.
    use assert_cmd::Command;
    let tmp = tempfile::tempdir().unwrap();
    let ham = tmp.path().join("h.ham");
    std::fs::write(
        &ham,
        "qubits 3\n0.5 * Z{0} Z{1}\n0.25 * X{2}\n1e-12 * X{0} X{1}\n-3e-12 * Y{1} Y{2}\n",
    )
    .unwrap();
    let out = tmp.path().join("c.ham");
    let r = Command::cargo_bin("phasewright")
        .unwrap()
        .args(["convert"])
        .arg(&ham)
        .arg("-o")
        .arg(&out)
        .output()
        .unwrap();
    assert!(r.status.success(), "{}", String::from_utf8_lossy(&r.stderr));
    let said = String::from_utf8_lossy(&r.stdout);
    assert!(
        said.contains("2 strings with |coefficient| < 1e-10 dropped"),
        "{said}"
    );
    let text = std::fs::read_to_string(&out).unwrap();
    assert!(text.contains("coefficient cutoff"), "{text}");
    for (cutoff, strings) in [(None, 2usize), (Some("0"), 4)] {
        let dir = tmp.path().join(format!("camp{strings}"));
        let mut cmd = Command::cargo_bin("phasewright").unwrap();
        cmd.arg("compile")
            .arg(&ham)
            .args(["--state", "000", "--dt", "0.1", "--points", "2", "-o"])
            .arg(&dir);
        if let Some(c) = cutoff {
            cmd.args(["--cutoff", c]);
        }
        let r = cmd.output().unwrap();
        assert!(r.status.success(), "{}", String::from_utf8_lossy(&r.stderr));
        let plan: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(dir.join("plan.json")).unwrap()).unwrap();
        assert_eq!(
            plan["hamiltonian"]["terms"].as_array().unwrap().len(),
            strings
        );
        let want = if cutoff.is_some() { 0.0 } else { 1e-10 };
        assert_eq!(plan["coefficient_cutoff"].as_f64(), Some(want));
    }
}

#[test]
fn a_transverse_field_ising_step_is_controlled_through_a_sign_flip() {
    // Every term of the transverse-field Ising chain anticommutes with Q = Y on one
    // sublattice and Z on the other, so the controlled Strang step is CQ · H⁻¹ · CQ · H_rev
    // (`synth::flip`; the anticommuting-Pauli construction of Dong, Lin & Tong, PRX Quantum 3,
    // 040305 (2022), cited from memory). Counted by hand for 12 sites on a line of 13 with the
    // ancilla at the end: each half step is 11 ZZ rotations at 2 CNOTs (the X rotations need
    // none), each controlled Q gathers the parity of 12 qubits (11 CNOTs), meets the ancilla
    // (1 cz) and undoes it (11): 2·22 + 2·23 = 90 two-qubit gates, against 162 for the issue's
    // one-sweep target and 112 for the uncontrolled step plus 2 CNOTs per controlled rotation.
    let (dev, spec, best) = ising12_on_a_line(3);
    let q = best.plan.device.as_ref().unwrap().flip_string.clone();
    let q = q.expect("the sign flip is kept for the Ising chain");
    // One letter per site, alternating between the sublattices.
    let letters: Vec<char> = q.split(' ').map(|f| f.chars().next().unwrap()).collect();
    assert_eq!(letters.len(), 12, "{q}");
    assert!(letters.windows(2).all(|w| w[0] != w[1]), "{q}");
    assert!(k01_re_two_qubit(&best) <= 90, "{}", k01_re_two_qubit(&best));
    // Each half's bonds are written in two layers of disjoint pairs, so the step's two-qubit
    // depth stays within the 0.7 × two-qubit count (in the terms' own order the
    // bonds run one after another: 72 of 90).
    let device = best.plan.device.as_ref().unwrap();
    assert_eq!(
        device.flip_order,
        phasewright::synth::flip::BlockOrder::Layers
    );
    let i = best
        .plan
        .circuits
        .iter()
        .position(|e| e.id == "k01-re")
        .unwrap();
    let c = qasm::read("k01-re.qasm", &best.programs[i])
        .unwrap()
        .circuit;
    let two = c.gates.iter().copied().filter(|g| g.is_two_qubit());
    let depth2 = phasewright::circuit::metrics::counts_of(c.num_qubits, two).depth;
    assert!(
        depth2 as f64 <= 0.7 * k01_re_two_qubit(&best) as f64,
        "two-qubit depth {depth2} of {}",
        k01_re_two_qubit(&best)
    );
    check_compiled(&best, Some(&dev), "ising12 line, sign flip");
    // The tableau proof rebuilds the flipped steps (and their mirror images) from the plan.
    assert_every_file_proved(&best);
    // A Heisenberg lattice has no such string (XX · YY ∝ ZZ): no split flips it. The signed
    // step does (any string will do), and the search keeps it.
    let heis = lattice_model(2, 3, true);
    let spec6 = Spec {
        states: vec!["0".repeat(6)],
        ..spec
    };
    let grid = plain_device("grid", 9, &lattice::grid(3, 3));
    let c = route_support::compile_level3_with(&heis, "heis", &spec6, &grid, split_only());
    assert_eq!(c.plan.device.as_ref().unwrap().flip_string, None);
    let c = compile(&heis, &spec6, Some(&grid), 3);
    let d = c.plan.device.as_ref().unwrap();
    assert!(d.flip_signed, "{d:?}");
    assert_flip_record(
        &heis,
        d.flip_string.as_deref().unwrap(),
        d.flip_controlled_terms,
        true,
    );
    check_compiled(&c, Some(&grid), "heisenberg 2x3 grid, signed");
    assert_every_file_proved(&c);
}

#[test]
fn the_all_to_all_target_flips_the_ising_chain_too() {
    // With no coupling graph the step is also written by the sign flip (`synth::flip`,
    // `pipeline::all_to_all_flip`). Counted by hand for 12 sites: each half step is 11 ZZ
    // rotations at 2 CNOTs, each controlled Q of weight 12 gathers its parity along a
    // balanced tree (11 CNOTs), meets the ancilla (1 cz) and undoes it (11): 2·22 + 2·23 =
    // 90 two-qubit gates. Level 2 controls every rotation: 112 (the suite's all-to-all row,
    // above the line's 89 before this).
    // The signed step (`synth::flip::Choice::Signed`) competes with that flip, and the search
    // keeps whichever form emits fewer two-qubit gates over one and two steps; each circuit
    // then keeps what emits fewer two-qubit gates with its readout (at k = 2, before the
    // signed step, the controlled rotations cost 150, against 90 for one flipped step).
    let h = ising_chain(12);
    let spec = controlled_overlap("0".repeat(12), 0.1, 3);
    let best = compile(&h, &spec, None, 3);
    let flip = best.plan.flip.as_ref().expect("the flip is recorded");
    assert_flip_record(&h, &flip.string, flip.controlled_terms, flip.signed);
    let level2 = compile(&h, &spec, None, 2);
    for (c, plain) in best.plan.circuits.iter().zip(&level2.plan.circuits) {
        assert!(!c.flipped || c.k > 0, "{}", c.id);
        assert!(c.costs.two_qubit <= plain.costs.two_qubit, "{}", c.id);
    }
    assert!(best.plan.circuits.iter().any(|c| c.k == 1 && c.flipped));
    let got = k01_re_two_qubit(&best);
    let every_rotation = k01_re_two_qubit(&level2);
    assert!(
        got <= 90 && got < every_rotation,
        "{got} against {every_rotation}"
    );
    check_compiled(&best, None, "ising12 all-to-all, sign flip");
    assert_every_file_proved(&best);
    // The plan written back and read again keeps the marks, and a plan that calls a flipped
    // circuit plain is caught by the tableau proof.
    let json = serde_json::to_string(&best.plan).unwrap();
    let back: phasewright::plan::Plan = serde_json::from_str(&json).unwrap();
    assert_eq!(back, best.plan);
    assert!(back.validate().is_empty());
    let mut wrong = best.plan.clone();
    let i = wrong.circuits.iter().position(|c| c.flipped).unwrap();
    wrong.circuits[i].flipped = false;
    let claim = phasewright::tableau::equiv::Claim::from_plan(&wrong).unwrap();
    let c = qasm::read("c.qasm", &best.programs[i]).unwrap().circuit;
    let v = claim.check(&wrong.circuits[i], &c).unwrap();
    assert!(
        !matches!(v, phasewright::tableau::equiv::Verdict::Equivalent(_)),
        "a flipped file was proved equal to the plain claim"
    );
    // And a mark without the plan's `flip` is refused by the plan's own checks.
    let mut unmarked = best.plan.clone();
    unmarked.flip = None;
    assert!(!unmarked.validate().is_empty());
}

#[test]
fn the_sign_flip_on_a_brick_wall_starts_from_the_uncontrolled_layout() {
    // The 3×4 transverse-field Ising model cannot sit on a 4×4 brick wall (two sites need four
    // neighbours; the wall has at most three), so every step needs SWAPs. The flipped step runs
    // the uncontrolled rotations twice and meets the ancilla only through two controlled flip
    // strings, so its layouts include the uncontrolled step's, with the ancilla beside it.
    // The target for lattice models on a brick wall: at most 1.2 × (the uncontrolled
    // step routed by the same search + 2 CNOTs per controlled rotation). Before the flip tried
    // the uncontrolled layout, this case emitted 164 against a reference of 134 (1.22).
    let h = lattice_model(3, 4, false);
    let dev = plain_device("brick", 16, &lattice::brickwall(4, 4));
    let spec = controlled_overlap("0".repeat(12), 0.1, 2);
    let best = compile(&h, &spec, Some(&dev), 3);
    assert!(best.plan.device.as_ref().unwrap().flip_string.is_some());
    assert_within_lattice_target(&h, &dev, &best);
    check_compiled(&best, Some(&dev), "ising 3x4 brick wall, sign flip");
}

/// The target for a lattice model on a grid, brick wall or heavy hexagon: `k01-re`
/// of `best` emits at most 1.2 × (the uncontrolled step of dt = 0.1 routed by the same
/// search + 2 CNOTs per controlled rotation).
fn assert_within_lattice_target(h: &PauliSum, dev: &Device, best: &Compiled) {
    let cfg = RouteConfig::default();
    let plan = plan_target(h, phasewright::route::Ancilla::None, dev, &cfg).unwrap();
    let c = phasewright::route::step_circuit(&plan.terms(h), &plan, Order::Second, 0.1);
    let routed = phasewright::route::to_device(&c, &plan, dev, &cfg).unwrap();
    let uncontrolled = routed
        .circuit
        .circuit()
        .gates
        .iter()
        .filter(|g| g.is_two_qubit())
        .count();
    let rotations =
        phasewright::formula::step(&phasewright::formula::order_terms(h), Order::Second, 0.1).len();
    let reference = (uncontrolled + 2 * rotations) as f64;
    let got = k01_re_two_qubit(best);
    assert!(
        got as f64 <= 1.2 * reference,
        "{}: {got} two-qubit gates against a reference of {reference}",
        dev.name
    );
}

/// Plans `h` at level 3 on a 4×4 grid and checks that the search keeps the sign flip with its
/// uncontrolled halves written as the `StepForm` flag `writing` names (`pairs` or `groups`),
/// and that the same step with one ladder per flipped rotation (the flag off) has more
/// two-qubit gates before routing. Returns the grid.
fn assert_flip_halves_pay_on_a_grid(
    h: &PauliSum,
    writing: fn(&mut phasewright::route::StepForm) -> &mut bool,
) -> Device {
    let dev = plain_device("grid", 16, &lattice::grid(4, 4));
    let cfg = OptLevel::new(3)
        .unwrap()
        .route_config(&RouteConfig::default());
    let mut plan = plan_target(h, phasewright::route::Ancilla::Controls, &dev, &cfg).unwrap();
    assert!(
        plan.step_form.flip && *writing(&mut plan.step_form),
        "{:?}",
        plan.step_form
    );
    let mut ladders = plan.clone();
    *writing(&mut ladders.step_form) = false;
    let two = |p: &TargetPlan| {
        let parts = step_parts_on(&p.terms(h), p, Order::Second, 0.1, None);
        parts
            .circuit
            .gates
            .iter()
            .filter(|g| g.is_two_qubit())
            .count()
    };
    assert!(
        two(&plan) < two(&ladders),
        "{} against {}",
        two(&plan),
        two(&ladders)
    );
    dev
}

#[test]
fn an_xxz_step_flips_its_hopping_bonds_in_pairs() {
    // The XXZ chain's hopping flips inside controlled ZZ rotations (`synth::flip::flip_split`,
    // Q = Z on every other site or a product with it). The flipped halves run uncontrolled,
    // so each bond's XX and YY can share one basis change (`synth::Pairs`: 2 CNOTs where two
    // ladders need 4; van den Berg & Temme, Quantum 4, 322 (2020)). On a 4×4 grid that is
    // what the search keeps, and it brings the step within the lattice target
    // (measured: 181 two-qubit gates against a reference of 184; 200 before the pairs).
    let mut h = PauliSum::new(12);
    for q in 0..11 {
        h.add(zz(q, q + 1, Pauli::X), 1.0);
        h.add(zz(q, q + 1, Pauli::Y), 1.0);
        h.add(zz(q, q + 1, Pauli::Z), 0.6);
    }
    // Since then the signed step competes too (the 11 ZZ bonds, or every term, on the
    // control's sign in one half only); either way the halves pay in pairs.
    let dev = assert_flip_halves_pay_on_a_grid(&h, |f| &mut f.pairs);
    let spec = controlled_overlap("01".repeat(6), 0.1, 3);
    let split = route_support::compile_level3_with(&h, "xxz", &spec, &dev, split_only());
    let device = split.plan.device.as_ref().unwrap();
    assert!(device.flip_string.is_some() && !device.flip_signed);
    assert_eq!(device.flip_controlled_terms, 11);
    assert_within_lattice_target(&h, &dev, &split);
    let best = compile(&h, &spec, Some(&dev), 3);
    let device = best.plan.device.as_ref().unwrap();
    let q = device.flip_string.as_deref().expect("a flip is kept");
    assert_flip_record(&h, q, device.flip_controlled_terms, device.flip_signed);
    assert!(k01_re_two_qubit(&best) <= k01_re_two_qubit(&split));
    assert_within_lattice_target(&h, &dev, &best);
    check_compiled(&best, Some(&dev), "xxz 12 grid, flip in pairs");
    assert_every_file_proved(&best);
}

/// The success estimate `Π (1 − e)` of `compiled`'s programs, recomputed on `dev`.
fn success_on(compiled: &Compiled, dev: &Device) -> Vec<f64> {
    compiled
        .programs
        .iter()
        .map(|text| {
            let p = qasm::read("c.qasm", text).unwrap();
            phasewright::device::costs(&p.circuit, dev, 0)
                .success_probability
                .expect("a calibrated device")
        })
        .collect()
}

/// On the bundled chip with one weak coupler (`error cx 3-9 0.02`, against 0.008 elsewhere),
/// the layout search weighs each emitted CNOT by its coupler's calibrated error
/// (`route::emitted_score`). The campaign it keeps has a higher success estimate on that chip
/// than the one kept when every coupler counts alike (the same chip with the link's own error
/// removed, its programs costed on the real chip), at every time point. The estimate is the
/// usual first-order `Π (1 − error)` over gates and readouts (common practice). Measured when
/// written: 0.3741 / 0.1543 against 0.3286 / 0.1375 (k = 1 / 2).
#[test]
fn a_weak_coupler_weighs_in_the_layout_search() {
    let read = |p: &str| std::fs::read_to_string(p).unwrap();
    let dev =
        phasewright::lang::dev::parse_device("chip", &read("examples/chip_grid12.dev")).unwrap();
    let mut even = dev.clone();
    even.calibration.link_error_rate.clear();
    let h = phasewright::hamiltonian::parse_hamiltonian("ring", &read("examples/ising_ring8.ham"))
        .unwrap()
        .sum;
    let spec = controlled_overlap("00000000".into(), 0.2, 3);
    // Without the signed step: with it, both searches keep the same campaign on this chip
    // (measured: 0.5311 at k = 1 either way), so there is nothing left to weigh.
    let weighed = route_support::compile_level3_with(&h, "ring", &spec, &dev, split_only());
    check_compiled(&weighed, Some(&dev), "weighed");
    let counted = route_support::compile_level3_with(&h, "ring", &spec, &even, split_only());
    let (a, b) = (success_on(&weighed, &dev), success_on(&counted, &dev));
    assert_eq!(a.len(), b.len());
    for (i, (x, y)) in a.iter().zip(&b).enumerate() {
        assert!(x > y, "circuit {i}: weighed {x} against counted {y}");
    }
}

/// The 3×4 transverse-field Ising model of the `fewer_gates` bench: `−ZZ` on the lattice
/// edges, `0.8 X` on every site.
fn ising_3x4() -> PauliSum {
    let mut h = PauliSum::new(12);
    for (a, b) in lattice_edges(3, 4) {
        h.add(zz(a, b, Pauli::Z), -1.0);
    }
    for q in 0..12 {
        h.add(PauliString::single(q, Pauli::X), 0.8);
    }
    h
}

/// On a chip whose qubits decay while they wait (`coherence 100us`, with `cx` error 0.01 and
/// 300 ns, `sx` and `x` 35 ns), the search weighs the idling of each routed step against its CNOTs
/// (`route::emitted_score`). For the 3×4 transverse-field Ising model controlled on a line of
/// 13 (the shape of the `fewer_gates` bench's row), the campaign it keeps is no deeper and has
/// a higher success estimate on that chip than the one kept when waiting is free (the same
/// chip without the coherence line, its programs costed on the real chip). The estimate
/// multiplies `Π (1 − error)` by `exp(−Σ idle / T)`, each qubit's idle time counted between
/// its first and last gate (common practice: independent exponential decay of each waiting
/// qubit). Measured when written, per circuit: 244 CNOTs at two-qubit depth 83 and success
/// 0.0205, against 206 CNOTs at depth 104 and success 0.0118. (On a ring of 13, where this
/// test ran first, the count-first search now keeps the same campaign as the weighed one:
/// both estimates 0.0243.)
#[test]
fn waiting_qubits_weigh_in_the_layout_search() {
    let h = ising_3x4();
    let text = "native rz sx x cx\nlattice line 13\nerror cx 0.01\n\
                time cx 300ns\ntime sx 35ns\ntime x 35ns\n";
    let free = phasewright::lang::dev::parse_device("line", text).unwrap();
    let decaying =
        phasewright::lang::dev::parse_device("line", &format!("{text}coherence 100us\n")).unwrap();
    let spec = controlled_overlap("0".repeat(12), 0.1, 2);
    let weighed = compile(&h, &spec, Some(&decaying), 3);
    check_compiled(&weighed, Some(&decaying), "weighed");
    let counted = compile(&h, &spec, Some(&free), 3);
    let depth = |c: &Compiled| -> Vec<usize> {
        c.plan
            .circuits
            .iter()
            .map(|e| e.costs.two_qubit_depth)
            .collect()
    };
    for (a, b) in depth(&weighed).iter().zip(depth(&counted)) {
        assert!(*a <= b, "two-qubit depth {a} against {b}");
    }
    let (a, b) = (
        success_on(&weighed, &decaying),
        success_on(&counted, &decaying),
    );
    assert_eq!(a.len(), b.len());
    for (i, (x, y)) in a.iter().zip(&b).enumerate() {
        assert!(x > y, "circuit {i}: weighed {x} against counted {y}");
    }
}

/// `RouteConfig::tries` (`compile --tries`): the layout search run from consecutive seeds,
/// the best campaign kept. On a 4×4 brick wall without gate errors the 3×4 Ising model's
/// campaign depends on the seed (measured when written: 157, 157, 150 and 165 two-qubit gates
/// for `k01-re` from seeds 0–3), so three tries from seed 1 must keep exactly what the best of
/// seeds 1, 2 and 3 emits alone (fewest two-qubit gates over the campaign, then the lower
/// summed depth: the pipeline's own rule, stated here independently), byte for byte, and it
/// must read back exact to 1e-9.
#[test]
fn tries_keep_the_best_seed() {
    let h = ising_3x4();
    let dev = Device::new(
        "brick",
        16,
        &lattice::brickwall(4, 4),
        NativeSet::rz_sx_x_cx(),
        Calibration::default(),
    );
    let spec = controlled_overlap("0".repeat(12), 0.1, 2);
    let run = |seed: u64, tries: usize| {
        let cfg = RouteConfig {
            seed,
            tries,
            ..RouteConfig::default()
        };
        let target = Target::Device {
            device: &dev,
            config: &cfg,
        };
        compile_at(&h, "ising", &spec, &target, OptLevel::new(3).unwrap()).unwrap()
    };
    let total = |c: &Compiled| -> (usize, usize) {
        c.plan
            .circuits
            .iter()
            .map(|e| (e.costs.two_qubit, e.costs.depth))
            .fold((0, 0), |a, b| (a.0 + b.0, a.1 + b.1))
    };
    let singles: Vec<Compiled> = (1..=3).map(|s| run(s, 1)).collect();
    let totals: Vec<(usize, usize)> = singles.iter().map(total).collect();
    // The seeds must disagree, or the test shows nothing.
    assert!(totals.iter().any(|t| *t != totals[0]), "{totals:?}");
    let best = (0..3).min_by_key(|&i| totals[i]).unwrap();
    let tried = run(1, 3);
    assert_eq!(total(&tried), totals[best], "{totals:?}");
    assert_eq!(tried.programs, singles[best].programs);
    check_compiled(&tried, Some(&dev), "three tries");
}

/// The 2×3 Fermi–Hubbard model under Jordan–Wigner, qubit `2s + σ` for site `s` and spin `σ`:
/// hopping `−t/2 (X_i Z…Z X_j + Y_i Z…Z Y_j)` between the same spin on neighbouring sites,
/// on-site `U/4 (−Z↑ − Z↓ + Z↑Z↓)` (the constant dropped). Jordan & Wigner, Z. Phys. 47, 631
/// (1928); the standard textbook mapping of the Hubbard model (common practice).
fn hubbard_2x3(t: f64, u: f64) -> PauliSum {
    let mut h = PauliSum::new(12);
    for (a, b) in lattice_edges(2, 3) {
        for spin in 0..2 {
            let (i, j) = (2 * a + spin, 2 * b + spin);
            for p in [Pauli::X, Pauli::Y] {
                let mut f: Vec<(usize, Pauli)> = vec![(i, p)];
                f.extend((i + 1..j).map(|k| (k, Pauli::Z)));
                f.push((j, p));
                h.add(PauliString::from_factors(&f).1, -t / 2.0);
            }
        }
    }
    for s in 0..6 {
        h.add(PauliString::single(2 * s, Pauli::Z), -u / 4.0);
        h.add(PauliString::single(2 * s + 1, Pauli::Z), -u / 4.0);
        h.add(zz(2 * s, 2 * s + 1, Pauli::Z), u / 4.0);
    }
    h
}

#[test]
fn a_hubbard_step_on_a_grid_flips_through_one_network_per_run() {
    // The flipped halves run uncontrolled, so each commuting run of hopping terms can be
    // written as one Clifford network on the coupling graph (`synth::Groups`, van den Berg &
    // Temme, Quantum 4, 322 (2020), distance-aware under the layout). On a 4×4 grid that is
    // what the search keeps for the 2×3 Hubbard model (measured: 423 two-qubit gates per
    // step against 507 with one ladder per rotation, and 1.79 × its all-to-all 236, within
    // the routed target of 1.8).
    let h = hubbard_2x3(1.0, 4.0);
    let dev = assert_flip_halves_pay_on_a_grid(&h, |f| &mut f.groups);
    // A two-point campaign: simulated exact to 1e-9 and proved file by file.
    // Since then the signed step competes too (the on-site terms on the control's sign in
    // one half only); the search keeps whichever emits fewer two-qubit gates.
    let spec = controlled_overlap("011010011010".into(), 0.1, 2);
    let split = route_support::compile_level3_with(&h, "hubbard", &spec, &dev, split_only());
    assert_eq!(
        split.plan.device.as_ref().unwrap().flip_controlled_terms,
        18
    );
    check_compiled(
        &split,
        Some(&dev),
        "hubbard 2x3 grid, flip through networks",
    );
    assert_every_file_proved(&split);
    let best = compile(&h, &spec, Some(&dev), 3);
    let device = best.plan.device.as_ref().unwrap();
    let q = device.flip_string.as_deref().unwrap();
    assert_flip_record(&h, q, device.flip_controlled_terms, device.flip_signed);
    assert!(k01_re_two_qubit(&best) <= k01_re_two_qubit(&split));
    check_compiled(&best, Some(&dev), "hubbard 2x3 grid, default");
    assert_every_file_proved(&best);
}

#[test]
fn a_hubbard_step_flips_its_hopping_inside_controlled_on_site_terms() {
    // No Pauli string anticommutes with Z↑, Z↓ and Z↑Z↓ together, so the whole step cannot
    // be flipped. But the formula's first commuting group holds exactly the 18 on-site terms,
    // and Z on the modes of one sublattice anticommutes with every hopping term (each hops
    // between the sublattices: one end's X or Y meets a Z, the Z string between them meets
    // Z's): level 3 controls the on-site rotations one by one at both ends of the step and
    // flips the hopping (`synth::flip::flip_split`).
    // (Compiled without the signed step, which the search prefers now: see
    // `a_signed_step_brings_the_heisenberg_square_lattice_within_the_lattice_target`.)
    let h = hubbard_2x3(1.0, 4.0);
    let dev = plain_device("ring", 13, &lattice::ring(13));
    let spec = controlled_overlap("0".repeat(12), 0.1, 3);
    let best = route_support::compile_level3_with(&h, "hubbard", &spec, &dev, split_only());
    let device = best.plan.device.as_ref().unwrap();
    let q = device.flip_string.clone().expect("the hopping flips");
    assert_eq!(device.flip_controlled_terms, 18);
    let groups = phasewright::formula::term_groups(&h);
    assert_eq!(groups[0].len(), 18);
    assert!(
        groups[0].iter().all(|(p, _)| p.x.is_empty()),
        "{:?}",
        groups[0]
    );
    let q = PauliString::parse_factor_text(&q).expect("factor text");
    for (p, _) in groups[1..].iter().flatten() {
        assert!(
            !p.commutes_with(&q),
            "{} commutes with Q",
            p.to_factor_text()
        );
    }
    // Fewer two-qubit gates than every rotation controlled (level 2), as measured: 580
    // against 694 at k = 1 (`cargo bench --bench fewer_gates -- quick`, ring row).
    let all_controlled = compile(&h, &spec, Some(&dev), 2);
    let (flipped, controlled) = (k01_re_two_qubit(&best), k01_re_two_qubit(&all_controlled));
    assert!(flipped < controlled, "{flipped} against {controlled}");
    check_compiled(&best, Some(&dev), "hubbard 2x3 ring, partial flip");
    // The tableau proof rebuilds the partially flipped steps from the plan, and refuses a
    // plan whose count of controlled terms disagrees with the split.
    assert_every_file_proved(&best);
    let mut wrong = best.plan.clone();
    wrong.device.as_mut().unwrap().flip_controlled_terms = 0;
    let claim = phasewright::tableau::equiv::Claim::from_plan(&wrong).unwrap();
    let e = &wrong.circuits[0];
    let c = qasm::read("c.qasm", &best.programs[0]).unwrap().circuit;
    assert!(claim.check(e, &c).is_err(), "a wrong count was accepted");
}

#[test]
fn a_signed_step_brings_the_heisenberg_square_lattice_within_the_lattice_target() {
    // No string anticommutes with a Heisenberg bond's XX, YY and ZZ (their product is the
    // identity up to phase), so no split flips the 3×3 Heisenberg model with fields. The
    // signed step (`synth::flip::Choice::Signed`) needs none: with `Q` = Y on one sublattice
    // and X on the other, every XX, YY and field flips and only the 12 ZZ bonds ride on the
    // control's sign, in one half of each step; with no `Q`, every rotation of one half
    // does. On a 3×4 grid the search keeps a signed step, which must meet the issue's
    // lattice target (1.2 × the uncontrolled step routed alike + 2 per controlled rotation;
    // without it the copies of the control gave the best campaign, above the target),
    // simulate exact to 1e-9 against the ideal Strang value (Strang, SIAM J. Numer. Anal. 5,
    // 506 (1968)) and be proved file by file; a plan with a wrong count of signed terms is
    // refused by the proof.
    let h = lattice_model(3, 3, true);
    let dev = plain_device("grid", 12, &lattice::grid(3, 4));
    let spec = controlled_overlap("010101010".to_string(), 0.2, 3);
    let best = compile(&h, &spec, Some(&dev), 3);
    let device = best.plan.device.as_ref().unwrap();
    assert!(device.flip_signed, "{device:?}");
    let q = device.flip_string.clone().unwrap();
    assert_flip_record(&h, &q, device.flip_controlled_terms, true);
    assert_within_lattice_target(&h, &dev, &best);
    let copies = route_support::compile_level3_with(&h, "heis", &spec, &dev, split_only());
    assert!(k01_re_two_qubit(&best) < k01_re_two_qubit(&copies));
    check_compiled(&best, Some(&dev), "heisenberg 3x3 grid, signed");
    assert_every_file_proved(&best);
    let mut wrong = best.plan.clone();
    wrong.device.as_mut().unwrap().flip_controlled_terms += 1;
    let claim = phasewright::tableau::equiv::Claim::from_plan(&wrong).unwrap();
    let i = wrong.circuits.iter().position(|c| c.k > 0).unwrap();
    let c = qasm::read("c.qasm", &best.programs[i]).unwrap().circuit;
    assert!(
        claim.check(&wrong.circuits[i], &c).is_err(),
        "a wrong count was accepted"
    );
    // A signed mark without its string is refused by the plan's own checks.
    assert!(best.plan.validate().is_empty());
    let mut stringless = best.plan.clone();
    stringless.device.as_mut().unwrap().flip_string = None;
    assert!(!stringless.validate().is_empty());
    // The same model on the all-to-all target keeps a signed step too, and no circuit there
    // emits more two-qubit gates than with every rotation controlled (level 2).
    let a2a = compile(&h, &spec, None, 3);
    let flip = a2a
        .plan
        .flip
        .as_ref()
        .expect("a flip on the all-to-all target");
    assert!(flip.signed);
    assert_flip_record(&h, &flip.string, flip.controlled_terms, true);
    let level2 = compile(&h, &spec, None, 2);
    for (c, plain) in a2a.plan.circuits.iter().zip(&level2.plan.circuits) {
        assert!(c.costs.two_qubit <= plain.costs.two_qubit, "{}", c.id);
    }
    check_compiled(&a2a, None, "heisenberg 3x3 all-to-all, signed");
    assert_every_file_proved(&a2a);
}

#[test]
fn the_second_parity_tree_follows_the_routed_layout() {
    // A sign-flip step's first half moves qubits with SWAPs; with `RouteConfig::track` the
    // search also offers each flip form with its second controlled string's parity tree
    // gathered where the routed first half leaves them (the `second` distance of
    // `synth::flip::flipped_step_parts`). The 3×3 Heisenberg model with fields on a line of
    // 10: with tracking the kept campaign emits fewer two-qubit gates at k = 1 than without
    // (measured when written: 271 against 292), simulates exact to 1e-9 and is proved file by
    // file (the tree changes the CNOTs, not the claimed operator).
    let h = lattice_model(3, 3, true);
    let dev = plain_device("line", 10, &lattice::line(10));
    let spec = controlled_overlap("010101010".to_string(), 0.2, 3);
    let best = compile(&h, &spec, Some(&dev), 3);
    let untracked = route_support::compile_level3_with(
        &h,
        "heis",
        &spec,
        &dev,
        RouteConfig {
            track: false,
            ..RouteConfig::default()
        },
    );
    let (a, b) = (k01_re_two_qubit(&best), k01_re_two_qubit(&untracked));
    assert!(a < b, "{a} against {b}");
    check_compiled(&best, Some(&dev), "heisenberg 3x3 line, tracked");
    assert_every_file_proved(&best);
}
