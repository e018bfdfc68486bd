//! The tableau method of `verify`: exact equivalence proofs of written files against the
//! circuits their plan claims, their agreement with the statevector method, and mutation tests
//! (one small edit to a written file or to the plan) that must be caught at the right position.
//!
//! Positions: a mutation at a gate changes the circuit from that gate on, so the proof must
//! point at the first gate whose rotation differs ("first divergence", computed independently
//! here by comparing the rotation sequences of the original and the mutated file in time
//! order), or at the rotation just before it when the two merge and cancel.

use phasewright::check::{check_plan, COMPILE_TOLERANCE};
use phasewright::circuit::{Circuit, Gate};
use phasewright::device::Device;
use phasewright::family::Spec;
use phasewright::formula::{evolution, order_terms, Order, Rotation};
use phasewright::pauli::{Pauli, PauliString, PauliSum};
use phasewright::pipeline::{compile_for, Compiled, Target};
use phasewright::plan::{CircuitEntry, Family, Plan};
use phasewright::qasm;
use phasewright::route::RouteConfig;
use phasewright::tableau::equiv::{Claim, Verdict};
use phasewright::tableau::{canonicalise, split_angle};
use rand::{Rng, SeedableRng};

fn device(name: &str, text: &str) -> Device {
    phasewright::lang::dev::parse_device(name, text).expect("example device parses")
}

fn example_devices() -> Vec<Device> {
    vec![
        device("brick16.dev", include_str!("../examples/brick16.dev")),
        device(
            "chip_grid12.dev",
            include_str!("../examples/chip_grid12.dev"),
        ),
        device("line8.dev", include_str!("../examples/line8.dev")),
        device("ring10_u.dev", include_str!("../examples/ring10_u.dev")),
    ]
}

/// An invented 5-qubit model with X, Y and Z factors, weights 1 to 3, and both commuting and
/// anticommuting neighbours.
fn model5() -> PauliSum {
    let s = |f: &[(usize, Pauli)]| PauliString::from_factors(f).1;
    let mut h = PauliSum::new(5);
    for q in 0..4 {
        h.add(s(&[(q, Pauli::Z), (q + 1, Pauli::Z)]), 0.7 - 0.1 * q as f64);
        h.add(s(&[(q, Pauli::X), (q + 1, Pauli::Y)]), 0.25);
    }
    for q in 0..5 {
        h.add(s(&[(q, Pauli::X)]), 0.4 + 0.05 * q as f64);
    }
    h.add(s(&[(0, Pauli::Y), (2, Pauli::Z), (4, Pauli::X)]), -0.35);
    h
}

/// An invented local model on `n` qubits in a line: ZZ and XX bonds, a transverse field and a
/// few seeded random weight-2 terms a few sites apart.
fn line_model(n: usize, seed: u64) -> PauliSum {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    let s = |f: &[(usize, Pauli)]| PauliString::from_factors(f).1;
    let letters = [Pauli::X, Pauli::Y, Pauli::Z];
    let mut h = PauliSum::new(n);
    for q in 0..n {
        h.add(s(&[(q, Pauli::X)]), rng.gen_range(0.2..0.8));
        if q + 1 < n {
            h.add(
                s(&[(q, Pauli::Z), (q + 1, Pauli::Z)]),
                rng.gen_range(-1.0..1.0),
            );
        }
        if q + 3 < n && q % 4 == 0 {
            let f = [
                (q, letters[rng.gen_range(0..3)]),
                (q + 3, letters[rng.gen_range(0..3)]),
            ];
            h.add(s(&f), rng.gen_range(-0.5..0.5));
        }
    }
    h
}

fn spec(family: Family, order: Order, states: Vec<String>) -> Spec {
    Spec {
        control: phasewright::family::control::Control::Evolution,
        family,
        order,
        dt: 0.25,
        points: 3,
        steps_per_dt: 1,
        states,
    }
}

fn compile(h: &PauliSum, spec: &Spec, dev: Option<&Device>, cfg: &RouteConfig) -> Compiled {
    let target = match dev {
        None => Target::AllToAll,
        Some(d) => Target::Device {
            device: d,
            config: cfg,
        },
    };
    match compile_for(h, "test", spec, &target) {
        Ok(c) => c,
        Err(_) => panic!("the test campaign compiles"),
    }
}

/// `h` compiled on the all-to-all target at level 2: every rotation controlled one by one,
/// the form whose gates the mutation tests' expected locations are worked out for. (Level 3
/// may keep a signed step, `synth::flip::Choice::Signed`, whose rotations about one axis sit
/// in both halves of a step; the proof then reports a mutation at the first gate of the
/// normal form's merged entry, which may come earlier: see
/// `a_signed_rotation_without_its_control_is_refused`.)
fn compile_rotation_by_rotation(h: &PauliSum, spec: &Spec) -> Compiled {
    phasewright::pipeline::compile_at(
        h,
        "test",
        spec,
        &Target::AllToAll,
        phasewright::pipeline::OptLevel::new(2).unwrap(),
    )
    .expect("the test campaign compiles")
}

fn read(text: &str) -> qasm::QasmProgram {
    qasm::read("t.qasm", text).expect("written files read back")
}

/// The tableau verdict for one written file.
fn tableau(plan: &Plan, e: &CircuitEntry, text: &str) -> Verdict {
    let claim = Claim::from_plan(plan).unwrap();
    claim.check(e, &read(text).circuit).expect("checkable")
}

/// The statevector verdict for one written file: does its compile error stay in tolerance?
fn statevector_accepts(plan: &Plan, index: usize, text: &str) -> bool {
    let mut one = plan.clone();
    one.circuits = vec![plan.circuits[index].clone()];
    let checks = check_plan(&one, &[read(text).circuit]).expect("simulates");
    checks[0].compile_error <= COMPILE_TOLERANCE
}

fn is_equivalent(v: &Verdict) -> bool {
    matches!(v, Verdict::Equivalent(_))
}

#[test]
fn both_methods_accept_every_small_campaign() {
    // Every family, order and target (all-to-all and each example device): the unmodified
    // campaign is proved by the tableau and passes the statevector check.
    let h = model5();
    let cfg = RouteConfig::default();
    let devices = example_devices();
    let targets: Vec<Option<&Device>> = std::iter::once(None)
        .chain(devices.iter().map(Some))
        .collect();
    let mut proved = 0;
    for family in [Family::Overlap, Family::Krylov, Family::Trace] {
        let states = if family == Family::Trace {
            phasewright::family::random_states(5, 2, 11)
        } else {
            vec!["0+r1-".to_string()]
        };
        for order in [Order::First, Order::Second, Order::Fourth] {
            for dev in &targets {
                let c = compile(&h, &spec(family, order, states.clone()), *dev, &cfg);
                let circuits: Vec<Circuit> = c.programs.iter().map(|t| read(t).circuit).collect();
                for chk in check_plan(&c.plan, &circuits).unwrap() {
                    assert!(chk.compile_error <= COMPILE_TOLERANCE, "{}", chk.id);
                }
                for (e, text) in c.plan.circuits.iter().zip(&c.programs) {
                    match tableau(&c.plan, e, text) {
                        Verdict::Equivalent(_) => proved += 1,
                        Verdict::Differs(r) => panic!(
                            "{family:?} {order:?} {:?} {}: {}",
                            dev.map(|d| &d.name),
                            e.id,
                            r.message
                        ),
                    }
                }
            }
        }
    }
    assert!(proved > 100, "{proved} circuits proved");
}

// ---- mutations of written files ----

/// Line-level view of a written file: its lines and the gate index of each gate's line.
struct File {
    lines: Vec<String>,
    /// `gate_line[i]` = index into `lines` of gate `i`.
    gate_line: Vec<usize>,
    circuit: Circuit,
}

impl File {
    fn new(text: &str) -> File {
        let p = read(text);
        let line_of = |off: usize| text[..off].matches('\n').count();
        File {
            lines: text.lines().map(str::to_string).collect(),
            gate_line: p.spans.iter().map(|&(o, _)| line_of(o)).collect(),
            circuit: p.circuit,
        }
    }

    fn text(&self) -> String {
        self.lines.iter().map(|l| format!("{l}\n")).collect()
    }

    /// A gate near the middle with a rotation angle far from a multiple of π/2, and which of
    /// its angles that is.
    fn generic_rotation(&self) -> (usize, usize) {
        let n = self.circuit.gates.len();
        (0..n)
            .map(|k| (n / 2 + k) % n)
            .find_map(|i| {
                let g = &self.circuit.gates[i];
                g.params()
                    .iter()
                    .position(|&a| split_angle(a).1.abs() > 1e-3)
                    .map(|p| (i, p))
            })
            .expect("a campaign has rotations")
    }

    /// Replaces parameter `p` of gate `i` by `f(value)`.
    fn set_param(&mut self, i: usize, p: usize, f: impl Fn(f64) -> f64) {
        let g = self.circuit.gates[i];
        let mut params = g.params();
        params[p] = f(params[p]);
        let g2 = match g {
            Gate::Rz(q, _) => Gate::Rz(q, params[0]),
            Gate::Rx(q, _) => Gate::Rx(q, params[0]),
            Gate::Ry(q, _) => Gate::Ry(q, params[0]),
            Gate::U(q, ..) => Gate::U(q, params[0], params[1], params[2]),
            _ => unreachable!("a rotation"),
        };
        self.replace_gate(i, g2);
    }

    /// Rewrites the line of gate `i` as `g`, in the file's own addressing.
    fn replace_gate(&mut self, i: usize, g: Gate) {
        let physical = self.lines.iter().all(|l| !l.starts_with("qubit["));
        let mut one = Circuit::new(self.circuit.num_qubits, 0);
        one.push(g);
        let addr = if physical {
            qasm::Addressing::Physical
        } else {
            qasm::Addressing::Logical
        };
        let text = qasm::write(&one, addr, &[]);
        let line = text.lines().last().unwrap().to_string();
        self.lines[self.gate_line[i]] = line;
    }

    fn delete_gate(&mut self, i: usize) {
        self.lines.remove(self.gate_line[i]);
    }
}

/// Rotations (axis, angle, gate) of a circuit in time order, after quarter turns.
fn rotation_sequence(c: &Circuit) -> Vec<(PauliString, f64, u32)> {
    let mut v = Vec::new();
    canonicalise(c, c.num_qubits, &mut |r| v.push((r.axis, r.angle, r.gate))).unwrap();
    v
}

/// Where a mutation first shows: the gate of the first rotation of `mutated` that differs from
/// `original`'s in time order, and the gate of the rotation before it.
fn first_divergence(original: &Circuit, mutated: &Circuit) -> Option<(u32, Option<u32>)> {
    let (a, b) = (rotation_sequence(original), rotation_sequence(mutated));
    let k = (0..b.len()).find(|&k| {
        a.get(k)
            .is_none_or(|x| x.0 != b[k].0 || (x.1 - b[k].1).abs() > 1e-12)
    })?;
    Some((b[k].2, k.checked_sub(1).map(|j| b[j].2)))
}

#[derive(Debug)]
enum Expect {
    /// The proof must point at this gate.
    Gate(usize),
    /// The proof must point at one of these gates.
    OneOf(Vec<usize>),
    /// The proof must point at the first divergence from the original (or the rotation just
    /// before it); without one, at a gate from `from` on.
    Divergence { from: usize },
}

/// Checks that the tableau refutes `mutated` and points where `expect` says; returns whether
/// the statevector method (if the circuit fits it) also rejects the file.
fn assert_caught(
    plan: &Plan,
    index: usize,
    original: &File,
    mutated_text: &str,
    expect: &Expect,
    what: &str,
    simulate: bool,
) -> Option<bool> {
    let e = &plan.circuits[index];
    let mutated = File::new(mutated_text);
    let r = match tableau(plan, e, mutated_text) {
        Verdict::Differs(r) => r,
        Verdict::Equivalent(_) => panic!("{what}: the tableau method accepted the mutated file"),
    };
    let at = r.gate;
    match *expect {
        Expect::Gate(g) => assert_eq!(at, Some(g), "{what}: {}", r.message),
        Expect::OneOf(ref gs) => assert!(
            at.is_some_and(|g| gs.contains(&g)),
            "{what}: reported {at:?}, expected one of {gs:?}: {}",
            r.message
        ),
        Expect::Divergence { from } => {
            match first_divergence(&original.circuit, &mutated.circuit) {
                Some((first, before)) => {
                    // Or, when the differing rotation merged with earlier ones (mirrored step
                    // blocks of device campaigns meet at their junctions, so a rotation's first
                    // gate may lie well before the mutation), a gate no later than the first
                    // divergence: the proof never points past where the file departs.
                    let merged = at.is_some_and(|g| g <= first as usize);
                    let ok =
                        at == Some(first as usize) || at == before.map(|b| b as usize) || merged;
                    assert!(
                        ok,
                        "{what}: reported gate {at:?}, first divergence at {first} (before it \
                         {before:?}): {}",
                        r.message
                    );
                }
                None => assert!(
                    at.is_some_and(|g| g >= from),
                    "{what}: reported gate {at:?}, mutation at {from}: {}",
                    r.message
                ),
            }
        }
    }
    simulate.then(|| !statevector_accepts(plan, index, mutated_text))
}

/// The index of a two-qubit gate near the middle of the file.
fn middle_two_qubit(f: &File) -> usize {
    let n = f.circuit.gates.len();
    (0..n)
        .map(|k| (n / 2 + k) % n)
        .find(|&i| f.circuit.gates[i].is_two_qubit())
        .expect("two-qubit gates")
}

/// A pair of identical two-qubit gates `(a, r)` with only one-qubit gates on `r` between them,
/// none on `a`, and a rotation among them: the control of a controlled `rz` (see `synth`).
fn control_pair(f: &File) -> (usize, usize) {
    let gs = &f.circuit.gates;
    for i in 0..gs.len() {
        if !gs[i].is_two_qubit() || matches!(gs[i], Gate::Swap(..)) {
            continue;
        }
        let qs = gs[i].qubits();
        for j in i + 1..gs.len() {
            let qj = gs[j].qubits();
            if gs[j] == gs[i] {
                let between = &gs[i + 1..j];
                let rotated = between
                    .iter()
                    .any(|g| g.params().iter().any(|&a| split_angle(a).1.abs() > 1e-3));
                if rotated && between.iter().all(|g| !g.is_two_qubit()) {
                    return (i, j);
                }
                break;
            }
            if qj.contains(&qs[0]) || (qj.contains(&qs[1]) && gs[j].is_two_qubit()) {
                break;
            }
        }
    }
    panic!("no controlled rotation found")
}

/// Runs the mutations on circuit `index` of a compiled campaign. Returns, per mutation the
/// statevector method was asked about, whether it also rejected the file.
fn mutations(c: &Compiled, index: usize, simulate: bool) -> Vec<(&'static str, Option<bool>)> {
    let plan = &c.plan;
    let text = &c.programs[index];
    let orig = File::new(text);
    let device = plan.device.is_some();
    let mut out = Vec::new();

    // 1. Flip one angle's sign. A rotation may merge with others about the same axis in the
    // canonical form (the mirrored step blocks of device campaigns meet at their junctions), and
    // the proof then points at the first gate of the merged rotation: any gate of that axis.
    let (i, p) = orig.generic_rotation();
    let seq = rotation_sequence(&orig.circuit);
    let axis_at_i = seq.iter().find(|r| r.2 as usize == i).map(|r| r.0.clone());
    let same_axis: Vec<usize> = seq
        .iter()
        .filter(|r| Some(&r.0) == axis_at_i.as_ref())
        .map(|r| r.2 as usize)
        .chain(std::iter::once(i))
        .collect();
    let mut f = File::new(text);
    f.set_param(i, p, |a| -a);
    out.push((
        "flip sign",
        assert_caught(
            plan,
            index,
            &orig,
            &f.text(),
            &Expect::OneOf(same_axis.clone()),
            "flip sign",
            simulate,
        ),
    ));

    // 2. Scale one angle by 1 + 1e-9 (below what simulation resolves at its 1e-9 tolerance).
    let mut f = File::new(text);
    f.set_param(i, p, |a| a * (1.0 + 1e-9));
    out.push((
        "scale 1+1e-9",
        assert_caught(
            plan,
            index,
            &orig,
            &f.text(),
            &Expect::OneOf(same_axis.clone()),
            "scale",
            simulate,
        ),
    ));

    // 3. Drop one CNOT (the entangling gate nearest the middle).
    let j = middle_two_qubit(&orig);
    let mut f = File::new(text);
    f.delete_gate(j);
    out.push((
        "drop CNOT",
        assert_caught(
            plan,
            index,
            &orig,
            &f.text(),
            &Expect::Divergence { from: j },
            "drop CNOT",
            simulate,
        ),
    ));

    // 4. Retarget one two-qubit gate to a third qubit the circuit uses.
    let g = orig.circuit.gates[j];
    let qs = g.qubits();
    let used: Vec<u32> = (0..orig.circuit.num_qubits as u32)
        .filter(|q| !qs.contains(q) && orig.circuit.gates.iter().any(|g| g.qubits().contains(q)))
        .collect();
    let third = used[used.len() / 2];
    let retargeted = match g {
        Gate::Cx(a, _) => Gate::Cx(a, third),
        Gate::Cz(a, _) => Gate::Cz(a, third),
        _ => unreachable!("lowered circuits use cx or cz"),
    };
    let mut f = File::new(text);
    f.replace_gate(j, retargeted);
    out.push((
        "retarget",
        assert_caught(
            plan,
            index,
            &orig,
            &f.text(),
            &Expect::Divergence { from: j },
            "retarget",
            simulate,
        ),
    ));

    // 5. Remove the control of one controlled rz.
    let (a, b) = control_pair(&orig);
    let mut f = File::new(text);
    if device {
        // Delete both entangling gates of the pair.
        f.delete_gate(b);
        f.delete_gate(a);
        out.push((
            "remove control",
            assert_caught(
                plan,
                index,
                &orig,
                &f.text(),
                &Expect::Divergence { from: a - 1 },
                "remove control",
                simulate,
            ),
        ));
    } else {
        // rz(x) r; cx anc, r; rz(y) r; cx anc, r  →  rz(x − y) r: the uncontrolled rotation.
        let (Gate::Rz(r, x), Gate::Rz(_, y)) =
            (orig.circuit.gates[a - 1], orig.circuit.gates[a + 1])
        else {
            panic!("a controlled rz reads rz cx rz cx")
        };
        f.replace_gate(a - 1, Gate::Rz(r, x - y));
        f.delete_gate(b);
        f.delete_gate(a + 1);
        f.delete_gate(a);
        out.push((
            "remove control",
            assert_caught(
                plan,
                index,
                &orig,
                &f.text(),
                &Expect::Gate(a - 1),
                "remove control",
                simulate,
            ),
        ));
    }

    // 6. Change the final permutation: on a device, exchange two system qubits' entries of the
    // plan's final layout; all-to-all, exchange two system qubits by a SWAP before measuring.
    let n = plan.hamiltonian.num_qubits;
    if device {
        let mut bad = plan.clone();
        let fin = &mut bad.circuits[index].final_layout;
        let (l1, l2) = (1, n - 2);
        fin.swap(l1, l2);
        let phys = fin[l1] as usize;
        let last = orig
            .circuit
            .gates
            .iter()
            .rposition(|g| !g.is_measure() && g.qubits().contains(&(phys as u32)))
            .expect("a used qubit");
        out.push((
            "final permutation",
            assert_caught(
                &bad,
                index,
                &orig,
                text,
                &Expect::Gate(last),
                "permutation",
                false,
            ),
        ));
    } else {
        // After the last unitary gate, so the SWAP is the last gate on both qubits.
        let at = 1 + orig
            .circuit
            .gates
            .iter()
            .rposition(|g| !g.is_measure())
            .unwrap();
        let mut f = File::new(text);
        f.lines
            .insert(orig.gate_line[at], format!("swap q[1], q[{}];", n - 2));
        out.push((
            "final permutation",
            assert_caught(
                plan,
                index,
                &orig,
                &f.text(),
                &Expect::Gate(at),
                "permutation",
                simulate && plan.circuits[index].group.is_some(),
            ),
        ));
    }
    out
}

/// Exchanges two anticommuting rotations of the program — one near the middle and the next
/// one that does not commute with it — and rebuilds the circuit (all-to-all): the proof must
/// point into the exchanged stretch.
fn exchange_mutation(h: &PauliSum, c: &Compiled, index: usize, simulate: bool) -> Option<bool> {
    let plan = &c.plan;
    let e = &plan.circuits[index];
    let order = Order::from_number(plan.formula.order).unwrap();
    let mut program = evolution(
        &order_terms(h),
        order,
        e.k as f64 * plan.formula.dt,
        e.k * plan.formula.steps_per_dt,
    );
    let j = program.len() / 2;
    let m = (j + 1..program.len())
        .find(|&m| !program[j].pauli.commutes_with(&program[m].pauli))
        .expect("a later anticommuting rotation");
    let n = h.num_qubits;
    let prep = phasewright::family::RefState::parse(&plan.states[e.state], h.num_qubits)
        .unwrap()
        .prep();
    let ladder = |r: &Rotation| phasewright::synth::default_ladder(r);
    let part = e.part.unwrap();
    // The same program written the textbook way (one ladder per rotation) before and after the
    // exchange: the compiled file may share Clifford networks between commuting rotations and
    // order them otherwise, so only a twin built like the mutated one locates the exchange.
    let good = phasewright::family::hadamard_test(n, &prep, &program, part, None, &ladder);
    program.swap(j, m);
    let bad = phasewright::family::hadamard_test(n, &prep, &program, part, None, &ladder);
    let text = qasm::write(&bad, qasm::Addressing::Logical, &[]);
    let orig = File::new(&c.programs[index]);
    // Each controlled rotation is two rz. The sequences part at the moved rotation; the first
    // entry whose layer or axis changes lies in the exchanged stretch.
    let (a, b) = (rotation_sequence(&good), rotation_sequence(&bad));
    let k = (0..b.len())
        .find(|&k| a[k].0 != b[k].0 || a[k].1 != b[k].1)
        .unwrap();
    let pair_rz: Vec<usize> = b[k..k + 2 * (m - j + 1)]
        .iter()
        .map(|r| r.2 as usize)
        .collect();
    assert_caught(
        plan,
        index,
        &orig,
        &text,
        &Expect::OneOf(pair_rz),
        "exchange",
        simulate,
    )
}

#[test]
fn mutations_of_small_campaigns_are_caught_at_their_gate() {
    let h = model5();
    let cfg = RouteConfig::default();
    let devices = example_devices();
    for family in [Family::Overlap, Family::Krylov] {
        let s = spec(family, Order::Second, vec!["+r0-1".to_string()]);
        // All-to-all: every mutation, plus the exchange of two anticommuting rotations. On a
        // generic reference state the statevector method must see the same mutations, except
        // the 1e-9 scaling (below its tolerance) and, where nothing but the ancilla is
        // measured, the final permutation (the system qubits are never read).
        let c = compile_rotation_by_rotation(&h, &s);
        let index = c.plan.circuits.iter().position(|e| e.k == 2).unwrap();
        for (what, sv) in mutations(&c, index, true) {
            if what != "scale 1+1e-9" && what != "final permutation" {
                assert_eq!(sv, Some(true), "statevector missed `{what}` ({family:?})");
            }
        }
        // The exchange rebuilds an ancilla-only circuit: Krylov campaigns have none any more
        // (they read S_k from their group circuits), so it runs on the overlap family.
        if family == Family::Overlap {
            assert_eq!(exchange_mutation(&h, &c, index, true), Some(true));
        }
        if family == Family::Krylov {
            // A circuit that measures system qubits: there the final permutation shows too.
            let g = c
                .plan
                .circuits
                .iter()
                .position(|e| e.k == 2 && e.group.is_some())
                .unwrap();
            for (what, sv) in mutations(&c, g, true) {
                if what != "scale 1+1e-9" {
                    assert_eq!(
                        sv,
                        Some(true),
                        "statevector missed `{what}` (group circuit)"
                    );
                }
            }
        }
        // Each example device: the same mutations on the routed, lowered files.
        for dev in &devices {
            let c = compile(&h, &s, Some(dev), &cfg);
            for (what, sv) in mutations(&c, index, true) {
                // Whatever simulation catches, the tableau caught too (asserted inside).
                let _ = (what, sv);
            }
        }
    }
}

#[test]
fn mutations_of_hundred_qubit_campaigns_are_caught_at_their_gate() {
    // 100 system qubits + ancilla: far beyond simulation; all-to-all and a 104-qubit brick wall.
    let h = line_model(100, 5);
    let s = Spec {
        control: phasewright::family::control::Control::Evolution,
        family: Family::Overlap,
        order: Order::Second,
        dt: 0.2,
        points: 2,
        steps_per_dt: 2,
        states: vec!["0+".repeat(50)],
    };
    let cfg = RouteConfig {
        layout_trials: 2,
        refine_rounds: 1,
        ..RouteConfig::default()
    };
    let brick = device(
        "brick104.dev",
        "name brick104\nnative rz sx x cx\nlattice brickwall 8 13\n",
    );
    for dev in [None, Some(&brick)] {
        let c = match dev {
            None => compile_rotation_by_rotation(&h, &s),
            Some(_) => compile(&h, &s, dev, &cfg),
        };
        for (e, text) in c.plan.circuits.iter().zip(&c.programs) {
            assert!(is_equivalent(&tableau(&c.plan, e, text)), "{}", e.id);
        }
        for index in 0..c.plan.circuits.len() {
            mutations(&c, index, false);
        }
        if dev.is_none() {
            exchange_mutation(&h, &c, 0, false);
        }
    }
}

#[test]
fn a_gate_after_a_measurement_cannot_be_checked_and_says_where() {
    let h = model5();
    let c = compile(
        &h,
        &spec(Family::Overlap, Order::First, vec!["00000".into()]),
        None,
        &RouteConfig::default(),
    );
    let text = format!("{}h q[5];\n", c.programs[0]);
    let claim = Claim::from_plan(&c.plan).unwrap();
    let prog = read(&text);
    let err = claim.check(&c.plan.circuits[0], &prog.circuit).unwrap_err();
    assert_eq!(err.gate, Some(prog.circuit.gates.len() - 1));
    assert!(
        err.message.contains("after it was measured"),
        "{}",
        err.message
    );
}

#[test]
fn a_signed_rotation_without_its_control_is_refused() {
    // Level 3 on the all-to-all target keeps a signed step for `model5`: the rotations of
    // one half of each step turn by the ancilla's sign, so the ancilla meets them through
    // two-qubit gates of its own. Deleting one of those (the middle one of the circuit)
    // leaves a rotation the control no longer steers: the tableau proof must refuse the
    // file, and so must the statevector method, while the file as written is proved.
    let h = model5();
    let s = spec(Family::Overlap, Order::Second, vec!["+r0-1".to_string()]);
    let c = compile(&h, &s, None, &RouteConfig::default());
    let flip = c
        .plan
        .flip
        .as_ref()
        .expect("level 3 keeps a sign-flip step");
    assert!(flip.signed, "{flip:?}");
    let index = c
        .plan
        .circuits
        .iter()
        .position(|e| e.k == 2 && e.flipped)
        .expect("a flipped circuit");
    let text = &c.programs[index];
    assert!(is_equivalent(&tableau(
        &c.plan,
        &c.plan.circuits[index],
        text
    )));
    let anc = h.num_qubits as u32;
    let orig = File::new(text);
    let on_ancilla: Vec<usize> = orig
        .circuit
        .gates
        .iter()
        .enumerate()
        .filter(|(_, g)| g.is_two_qubit() && g.qubits().contains(&anc))
        .map(|(i, _)| i)
        .collect();
    assert!(on_ancilla.len() > 4, "{on_ancilla:?}");
    let mut f = File::new(text);
    f.delete_gate(on_ancilla[on_ancilla.len() / 2]);
    let mutated = read(&f.text()).circuit;
    let claim = phasewright::tableau::equiv::Claim::from_plan(&c.plan).unwrap();
    let verdict = claim.check(&c.plan.circuits[index], &mutated).unwrap();
    assert!(!is_equivalent(&verdict), "{verdict:?}");
    let mut programs: Vec<Circuit> = c.programs.iter().map(|t| read(t).circuit).collect();
    programs[index] = mutated;
    let errors = check_plan(&c.plan, &programs).unwrap();
    assert!(errors[index].compile_error > COMPILE_TOLERANCE);
}
