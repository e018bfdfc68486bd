//! The control spread over copies of the Hadamard-test ancilla (`route::cat`): a cat state
//! `(|0⟩|0…0⟩ + |1⟩|1…1⟩)/√2` on the ancilla and spare device qubits after the ancilla's `h`,
//! each controlled rotation controlled by a copy beside it, the copies cleared again before the
//! readout.
//!
//! Sources: a controlled `U` only reads its control's computational-basis value, so on the cat
//! state control by any copy equals control by the ancilla (the fan-out parallelisation of
//! Moore & Nilsson, SIAM J. Comput. 31, 799 (2001), and Høyer & Špalek, Theory of Computing 1,
//! 83 (2005), both cited from memory); the Hadamard test itself is Kitaev 1995 / Cleve, Ekert,
//! Macchiavello & Mosca, Proc. R. Soc. A 454, 339 (1998). The reference for every circuit is
//! the library's ideal logical Hadamard test (`tableau::equiv::Claim::logical_circuit`, the
//! product formula controlled by the ancilla alone) simulated on its own qubits: the device
//! circuit must leave exactly that state on the system qubits and the ancilla (placed by the
//! plan's final layout), and |0⟩ on every other physical qubit, copies included, to 1e-9.

mod route_support;

use num_complex::Complex64;
use phasewright::circuit::{Circuit, Gate};
use phasewright::device::{lattice, Calibration, Device, NativeSet};
use phasewright::family::control::Control;
use phasewright::family::{random_states, Spec};
use phasewright::formula::{order_terms, step, Order};
use phasewright::pauli::{Pauli, PauliString, PauliSum};
use phasewright::pipeline::{compile_at, OptLevel, Target};
use phasewright::plan::{Family, Plan};
use phasewright::route::{cat, RouteConfig};
use phasewright::sim::{run, State};
use phasewright::tableau::equiv::{Claim, Verdict};
use proptest::prelude::*;

fn device(n: usize, links: &[(u32, u32)]) -> Device {
    Device::new(
        "d",
        n,
        links,
        NativeSet::rz_sx_x_cx(),
        Calibration::default(),
    )
}

fn two(a: usize, pa: Pauli, b: usize, pb: Pauli) -> PauliString {
    PauliString::from_factors(&[(a, pa), (b, pb)]).1
}

/// Every check of one compiled campaign: each file on coupled pairs, its state (measurements
/// left out) the ideal logical Hadamard test's with the copies and free qubits back at |0⟩, the
/// statevector check of `verify`, and the tableau proof. Returns the largest copy count met.
fn check_campaign(plan: &Plan, programs: &[String], dev: &Device) -> usize {
    let circuits: Vec<Circuit> = programs
        .iter()
        .map(|t| phasewright::qasm::read("c.qasm", t).unwrap().circuit)
        .collect();
    let claim = Claim::from_plan(plan).unwrap();
    let mut copies = 0;
    for (e, c) in plan.circuits.iter().zip(&circuits) {
        copies = copies.max(e.costs.control_copies);
        for g in &c.gates {
            if g.is_two_qubit() {
                let q = g.qubits();
                assert!(
                    dev.coupled(q[0], q[1]),
                    "{}: {g:?} on an uncoupled pair",
                    e.id
                );
            }
        }
        // The ideal logical circuit against the file, placed by the final layout.
        let (logical, _) = claim.logical_circuit(e).unwrap();
        let m = logical.num_qubits;
        let want = run(&logical, State::zero(m));
        let fin = &e.final_layout;
        // A file names only the physical qubits it touches (a `k = 0` file may leave the
        // highest placed qubit alone): simulate on at least the placed ones.
        let mut c = c.clone();
        c.num_qubits = c
            .num_qubits
            .max(fin.iter().map(|&p| p as usize + 1).max().unwrap_or(0));
        let got = run(&c, State::zero(c.num_qubits));
        assert_eq!(fin.len(), m);
        let mut overlap = Complex64::new(0.0, 0.0);
        for (b, a) in want.amps.iter().enumerate() {
            let p: usize = (0..m)
                .filter(|&l| b >> l & 1 == 1)
                .map(|l| 1 << fin[l])
                .sum();
            overlap += a.conj() * got.amps[p];
        }
        // |⟨want ⊗ 0…0|got⟩| = 1 exactly when the states agree up to a global phase (both have
        // norm 1), so any weight on a copy or free qubit left set shows here.
        assert!(
            (1.0 - overlap.norm()).abs() < 1e-9,
            "{}: overlap with the ideal state {}",
            e.id,
            overlap.norm()
        );
        match claim.check(e, &c).unwrap() {
            Verdict::Equivalent(_) => {}
            Verdict::Differs(r) => panic!("{}: tableau: {}", e.id, r.message),
        }
    }
    let checks = phasewright::check::check_plan(plan, &circuits).unwrap();
    for c in checks {
        assert!(c.compile_error <= 1e-9, "{}: {}", c.id, c.compile_error);
    }
    copies
}

fn forced() -> RouteConfig {
    RouteConfig {
        cat_force: true,
        ..RouteConfig::default()
    }
}

/// A random lattice model on `n` sites: a chain, ring or two-row ladder of bonds, each a random
/// choice of ZZ, XX, YY, XX + YY and XXZ terms, and random X and Z fields.
fn lattice_model(n: usize, shape: u8, seed: u64) -> PauliSum {
    use rand::{Rng, SeedableRng};
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    let mut bonds: Vec<(usize, usize)> = (0..n - 1).map(|q| (q, q + 1)).collect();
    match shape % 3 {
        1 if n > 2 => bonds.push((0, n - 1)),
        2 if n >= 4 => {
            let half = n / 2;
            bonds = (0..n)
                .filter(|&q| q + 1 < n && q + 1 != half)
                .map(|q| (q, q + 1))
                .collect();
            bonds.extend((0..half.min(n - half)).map(|q| (q, q + half)));
        }
        _ => {}
    }
    let mut h = PauliSum::new(n);
    for (a, b) in bonds {
        let j = rng.gen_range(0.3..1.2);
        match rng.gen_range(0..4) {
            0 => h.add(two(a, Pauli::Z, b, Pauli::Z), j),
            1 => {
                h.add(two(a, Pauli::X, b, Pauli::X), j);
                h.add(two(a, Pauli::Y, b, Pauli::Y), j);
            }
            2 => {
                for p in [Pauli::X, Pauli::Y, Pauli::Z] {
                    h.add(two(a, p, b, p), j * if p == Pauli::Z { 0.6 } else { 1.0 });
                }
            }
            _ => h.add(two(a, Pauli::X, b, Pauli::X), -j),
        }
    }
    for q in 0..n {
        if rng.gen_bool(0.7) {
            h.add(PauliString::single(q, Pauli::X), rng.gen_range(-0.9..0.9));
        }
        if rng.gen_bool(0.4) {
            h.add(PauliString::single(q, Pauli::Z), rng.gen_range(-0.9..0.9));
        }
    }
    h
}

/// A random connected coupling graph on `m` qubits: a random tree plus extra links.
fn random_links(m: usize, seed: u64) -> Vec<(u32, u32)> {
    use rand::{Rng, SeedableRng};
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    let mut links = Vec::new();
    for v in 1..m as u32 {
        links.push((rng.gen_range(0..v), v));
    }
    for _ in 0..m {
        let (a, b) = (rng.gen_range(0..m as u32), rng.gen_range(0..m as u32));
        if a != b
            && !links.contains(&(a.min(b), a.max(b)))
            && !links.contains(&(a.max(b), a.min(b)))
        {
            links.push((a.min(b), a.max(b)));
        }
    }
    links
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(16))]
    // Random small lattice models on random devices with spare qubits, every family and order,
    // one or two steps per dt, the cat candidate forced on: every file equals the ideal
    // controlled evolution to 1e-9 with the copies back at |0⟩, on coupled pairs, and proves
    // equivalent by the tableau method. (The pipeline runs `verify_ir` after every pass in
    // test builds.)
    #[test]
    fn forced_cat_campaigns_equal_the_ideal_test(
        n in 3usize..=5,
        spare in 2usize..=4,
        shape in 0u8..3,
        family in 0u8..3,
        order in 0u8..3,
        steps in 1usize..=2,
        seed in 0u64..10_000,
    ) {
        let h = lattice_model(n, shape, seed);
        let m = n + 1 + spare;
        let dev = device(m, &random_links(m, seed ^ 0x5eed));
        let family = [Family::Overlap, Family::Krylov, Family::Trace][family as usize];
        let order = [Order::First, Order::Second, Order::Fourth][order as usize];
        let states = if family == Family::Trace {
            random_states(n, 2, seed)
        } else {
            let letters = ['0', '1', '+', '-', 'r', 'l'];
            vec![(0..n).map(|q| letters[(seed as usize / (q + 1)) % 6]).collect()]
        };
        let spec = Spec {
            control: Control::Evolution,
            family,
            order,
            dt: 0.3,
            points: 3,
            steps_per_dt: steps,
            states,
        };
        let cfg = forced();
        let out = compile_at(
            &h,
            "random.ham",
            &spec,
            &Target::Device { device: &dev, config: &cfg },
            OptLevel::MAX,
        )
        .unwrap();
        let copies = check_campaign(&out.plan, &out.programs, &dev);
        let d = out.plan.device.as_ref().unwrap();
        // A device whose spare qubits cannot hold a copy joined to the ancilla (no two spare
        // sites coupled once the model is placed) has no cat to force: not a case.
        prop_assume!(d.spare_qubits);
        prop_assert!(!d.copy_placement.is_empty(), "forced: at least one copy");
        prop_assert!(copies >= d.copy_placement.len());
    }
}

/// The 3-site transverse-field Ising chain `−Z0Z1 − Z1Z2 + 0.7(X0 + X1 + X2)` on a 2 × 3 grid,
/// the chain on the top row (sites 0 1 2), the ancilla below the middle (site 4) and two copies
/// below the ends (sites 3 and 5): every system qubit has a control beside it.
///
/// One Strang step (`formula::order_terms` puts the ZZ group first: `ZZ/2 · X · ZZ/2`, 2 + 3 +
/// 2 rotations), each rotation's `rz` controlled by the copy beside its root:
/// - fan-out `cx(4,3) cx(4,5)`: 2 CNOTs;
/// - 4 controlled ZZ half-rotations, `cx(b, a)` to the root `a`, `rz · cx(t, a) · rz · cx(t, a)`
///   for the control, `cx(b, a)` back: 4 CNOTs each, 16;
/// - 3 controlled X rotations, `h · rz · cx(t, q) · rz · cx(t, q) · h`: 2 CNOTs each, 6;
/// - undoing the fan-out `cx(4,5) cx(4,3)`: 2 CNOTs.
///
/// 26 CNOTs in all, no SWAP, and nothing cancels between neighbours (no two consecutive
/// CNOTs on a qubit pair are equal). The ancilla alone (the usual test, with its whole layout
/// search) once had to be swapped towards both ends, which cost more; at level 3 it now
/// reaches 26 too, the strings carried to it by CNOTs on coupled pairs (`synth::Coupled`).
#[test]
fn a_three_site_chain_with_two_copies_counted_by_hand() {
    let mut h = PauliSum::new(3);
    h.add(two(0, Pauli::Z, 1, Pauli::Z), -1.0);
    h.add(two(1, Pauli::Z, 2, Pauli::Z), -1.0);
    for q in 0..3 {
        h.add(PauliString::single(q, Pauli::X), 0.7);
    }
    let dev = device(6, &lattice::grid(2, 3));
    let program = step(&order_terms(&h), Order::Second, 0.1);
    assert_eq!(program.len(), 7, "ZZ/2, X, ZZ/2");
    let layout = [0, 1, 2, 4, 3, 5];
    let routed = cat::route_step(&program, 3, &layout, &dev, cat::Hopping::Paired).unwrap();
    assert_eq!(routed.swaps, 0);
    assert_eq!(routed.final_layout, layout);
    let cx = |g: &[Gate]| g.iter().filter(|g| g.is_two_qubit()).count();
    assert_eq!(cx(&routed.circuit.gates), 16 + 6);
    let fan = cat::fanout(&layout, 3, &dev);
    assert_eq!(
        fan,
        vec![Gate::Cx(3, 4), Gate::Cx(3, 5)],
        "logical: ancilla 3, copies 4, 5"
    );
    assert_eq!(
        cat::unfan(&layout, 3, &dev),
        vec![Gate::Cx(3, 5), Gate::Cx(3, 4)]
    );
    // The whole circuit, fan-out and its undoing around the step, on the device's native gates.
    let mut c = Circuit::new(6, 0);
    c.push(Gate::H(4));
    c.extend(fan.iter().map(|g| g.map_qubits(|q| layout[q as usize])));
    c.extend(routed.circuit.gates.iter().copied());
    c.extend(
        cat::unfan(&layout, 3, &dev)
            .iter()
            .map(|g| g.map_qubits(|q| layout[q as usize])),
    );
    let lowered = phasewright::lower::lower_to_native(&c, &dev.native);
    assert_eq!(cx(&lowered.gates), 26);
    // It is the controlled step: the ideal state on the system and ancilla, copies at |0⟩.
    let mut ideal = Circuit::new(4, 0);
    ideal.push(Gate::H(3));
    for r in &program {
        ideal.extend(phasewright::synth::pauli_rotation(r, Some(3)));
    }
    let want = run(&ideal, State::zero(4));
    let got = run(&lowered, State::zero(6));
    let mut overlap = Complex64::new(0.0, 0.0);
    for (b, a) in want.amps.iter().enumerate() {
        let p: usize = (0..4)
            .filter(|&l| b >> l & 1 == 1)
            .map(|l| 1 << layout[l])
            .sum();
        overlap += a.conj() * got.amps[p];
    }
    assert!((1.0 - overlap.norm()).abs() < 1e-12, "{}", overlap.norm());
    // Compiled at level 3 with and without the spread control: no more than the 26 above.
    let spec = Spec {
        control: Control::Evolution,
        family: Family::Overlap,
        order: Order::Second,
        dt: 0.1,
        points: 2,
        steps_per_dt: 1,
        states: vec!["000".into()],
    };
    let cfg = RouteConfig::default();
    let target = Target::Device {
        device: &dev,
        config: &cfg,
    };
    let with = compile_at(&h, "chain3", &spec, &target, OptLevel::MAX).unwrap();
    let without = route_support::compile_without_copies(&h, "chain3", &spec, &dev);
    let k1 = |p: &Plan| {
        p.circuits
            .iter()
            .find(|c| c.id == "k01-re")
            .unwrap()
            .costs
            .clone()
    };
    // The ancilla alone now beats the hand count: the commuting runs synthesised on the
    // coupling graph (`synth::Coupled`) reach 26 with no SWAP, and a routed form whose three
    // ancilla SWAPs each start with the CNOT before them (`lower::slide_through_swaps`) costs
    // 25; so level 3 need not keep the copies.
    assert!(k1(&with.plan).two_qubit <= 26, "{:?}", k1(&with.plan));
    assert!(k1(&without.plan).two_qubit <= 26, "{:?}", k1(&without.plan));
    assert_eq!(k1(&without.plan).control_copies, 0);
    check_campaign(&with.plan, &with.programs, &dev);
}

/// A file whose copies are not cleared (the undoing of the fan-out left out) is refused by the
/// tableau method: the copy ends entangled with the ancilla.
#[test]
fn the_tableau_method_refuses_a_copy_left_set() {
    let mut h = PauliSum::new(3);
    h.add(two(0, Pauli::Z, 1, Pauli::Z), -1.0);
    h.add(two(1, Pauli::Z, 2, Pauli::Z), -1.0);
    for q in 0..3 {
        h.add(PauliString::single(q, Pauli::X), 0.7);
    }
    let dev = device(6, &lattice::grid(2, 3));
    let spec = Spec {
        control: Control::Evolution,
        family: Family::Overlap,
        order: Order::Second,
        dt: 0.1,
        points: 2,
        steps_per_dt: 1,
        states: vec!["000".into()],
    };
    let cfg = forced();
    let out = compile_at(
        &h,
        "chain3",
        &spec,
        &Target::Device {
            device: &dev,
            config: &cfg,
        },
        OptLevel::MAX,
    )
    .unwrap();
    let claim = Claim::from_plan(&out.plan).unwrap();
    let e = &out.plan.circuits[0];
    let mut c = phasewright::qasm::read("c.qasm", &out.programs[0])
        .unwrap()
        .circuit;
    // The last CNOT before the ancilla's readout basis is the last of the undoing.
    let last = c
        .gates
        .iter()
        .rposition(|g| matches!(g, Gate::Cx(..)))
        .unwrap();
    c.gates.remove(last);
    match claim.check(e, &c).unwrap() {
        Verdict::Differs(_) => {}
        Verdict::Equivalent(_) => panic!("a copy left set was not found"),
    }
}

/// The cost table says where the control is spread: a `copies` column (each circuit's
/// `costs.control_copies`, at least the fan-out's copies in every circuit with a Trotter step,
/// none at k = 0) and the most in the total row; the CNOTs of the fan-out and its undoing are
/// in the `2q gates` count (checked against the file's own two-qubit gates). With the ancilla
/// alone there is no such column. (The table's layout is the project's own, README "plan.json"
/// and cost table; nothing outside the project defines it.)
#[test]
fn the_cost_table_reports_the_copies() {
    let mut h = PauliSum::new(3);
    h.add(two(0, Pauli::Z, 1, Pauli::Z), -1.0);
    h.add(two(1, Pauli::Z, 2, Pauli::Z), -1.0);
    for q in 0..3 {
        h.add(PauliString::single(q, Pauli::X), 0.7);
    }
    let dev = device(6, &lattice::grid(2, 3));
    let spec = Spec {
        control: Control::Evolution,
        family: Family::Overlap,
        order: Order::Second,
        dt: 0.1,
        points: 2,
        steps_per_dt: 1,
        states: vec!["000".into()],
    };
    let compile = |cfg: &RouteConfig| {
        compile_at(
            &h,
            "chain3",
            &spec,
            &Target::Device {
                device: &dev,
                config: cfg,
            },
            OptLevel::MAX,
        )
        .unwrap()
    };
    let out = compile(&forced());
    let made = out.plan.device.as_ref().unwrap().copy_placement.len();
    assert!(made >= 1, "forced: at least one copy");
    let table = phasewright::report::costs::cost_table(&out.plan);
    let mut lines = table.lines();
    let head: Vec<&str> = lines.next().unwrap().split_whitespace().collect();
    assert_eq!(head.last(), Some(&"copies"), "{table}");
    for (e, text) in out.plan.circuits.iter().zip(&out.programs) {
        if e.k == 0 {
            assert_eq!(e.costs.control_copies, 0, "{}", e.id);
        } else {
            assert!(e.costs.control_copies >= made, "{}", e.id);
        }
        let row = table
            .lines()
            .find(|l| l.split_whitespace().next() == Some(e.id.as_str()))
            .unwrap();
        assert_eq!(
            row.split_whitespace().last(),
            Some(e.costs.control_copies.to_string().as_str()),
            "{row}"
        );
        let c = phasewright::qasm::read("c.qasm", text).unwrap().circuit;
        let cx = c.gates.iter().filter(|g| g.is_two_qubit()).count();
        assert_eq!(cx, e.costs.two_qubit, "{}", e.id);
    }
    let most = out
        .plan
        .circuits
        .iter()
        .map(|e| e.costs.control_copies)
        .max();
    let total = table.lines().find(|l| l.starts_with("total")).unwrap();
    assert!(
        total.ends_with(&format!("max {}", most.unwrap())),
        "{total}"
    );
    let plain = compile(&RouteConfig {
        cat: false,
        ..RouteConfig::default()
    });
    let table = phasewright::report::costs::cost_table(&plain.plan);
    assert!(!table.lines().next().unwrap().contains("copies"), "{table}");
    assert!(plain
        .plan
        .device
        .as_ref()
        .unwrap()
        .copy_placement
        .is_empty());
}
