//! One routed Trotter step, reused for every step of every circuit of a campaign.
//!
//! In: one product-formula step `S(δ)` as logical [`StepParts`] (controlled rotations, ancilla
//! last, no measurements), the campaign's [`TargetPlan`] and the [`Device`]. Out: a
//! [`RoutedStep`], a few physical circuits (with `swap` gates, not yet lowered) whose sequence
//! ([`RoutedStep::pieces`]) implements `S(δ)^r` for any `r`, and the layouts between them;
//! [`super::campaign`] then builds each circuit of the campaign from its own prefix (state
//! preparation), those pieces and its suffix (bases, measurements). Invariant: each piece
//! starts from the layout the one before it ended on, the first from the plan's initial layout
//! `L0`, and the sequence for `r` steps implements `S(δ)^r` exactly (global phase included)
//! from `L0` to [`RoutedStep::layout_after`]`(r)`.
//!
//! ## The idea
//!
//! Routing `k·R` steps from scratch for every time point `k` repeats the same work `k` times,
//! and routing is the most expensive pass. Notation: a routed circuit `C : L0 → L1` maps a
//! logical state placed by `L0` to its image placed by `L1`.
//!
//! - **Symmetric formulas (orders 2 and 4).** Strang's and Suzuki's steps are palindromes of
//!   rotations (Suzuki, J. Math. Phys. 32, 400 (1991)), so `S(−δ)⁻¹ = S(δ)`; the program
//!   `formula::step` returns may have merged equal neighbours, but each merge moves one
//!   rotation past rotations it commutes with, which is just as valid read backwards, so the
//!   reversed program is still the same operator. Route the step once, `C : L0 → L1`, and take
//!   its [`mirror`]: the gates in reverse order, each Clifford gate inverted, each rotation kept
//!   with its angle. Every angle in `C` is an odd function of `δ` (±θ of one rotation, or a sum
//!   of them after cancellation), so the mirror is `C(−δ)⁻¹ : L1 → L0`, i.e. `S(δ)` again,
//!   SWAPs undone in reverse order. A circuit of `r` steps is `C, mirror(C), C, …`; at every
//!   junction the last rotation of one block meets its own mirror image and the peephole pass
//!   ([`crate::circuit::cancel`]) folds the pair into one controlled rotation.
//! - **The seams.** The formula itself does better at a seam: the last half-group of one Strang
//!   step and the first of the next are the same commuting group `G`, and
//!   `formula::evolution` merges them (`G/2 · G/2 = G`), while the peephole pass only folds
//!   the one rotation that meets its image. So a symmetric step is split ([`step_parts`]) as
//!   `E · M · E'`, with `E` the edge `G` at its half angle and `E'` the same reversed, and
//!   routed in one pass with barriers between the parts (`swap::insert_swaps_cut`; the
//!   lookahead still sees across them): `E : L0 → La`, `M : La → Lb`, `E' : Lb → L1`. A circuit
//!   of `r` steps is then `E · M · J_b · mirror(M) · J_a · M · … · (E' or mirror(E))`, where
//!   each seam `J` is the cheaper, in two-qubit gates after cancellation, of the mirrored pair
//!   (`E'·mirror(E')` at `Lb`, `mirror(E)·E` at `La`, which is what alternating `C` and
//!   `mirror(C)` gives) and the merged group `G` at the full angle routed afresh from the seam's
//!   layout, followed by the SWAPs back to it. Both are exactly `G`, since its factors commute.
//! - **Lie–Trotter (order 1)** is not symmetric (the mirror would apply the terms in reverse
//!   order, another operator). The second block is then the SWAPs that take `L1` back to `L0`
//!   ([`permutation_swaps`]) followed by `C` again: `C, P·C, P·C, …`.
//!
//! A circuit's state preparation may hold two-qubit gates (singlet pairs): it is routed from
//! `L0` and, if that moved qubits, followed by the SWAPs back to `L0`, so that every circuit of
//! the campaign starts from the `L0` plan.json records.
//!
//! ## Moving tokens home
//!
//! [`permutation_swaps`] realises a placement change with SWAPs along a breadth-first spanning
//! tree of the coupling graph: vertices are fixed in reverse breadth-first order (each is then
//! a leaf of the tree that remains), by bringing the qubit it should hold along the tree path,
//! or, for a vertex that should hold no logical qubit, the nearest free one. Fixed vertices are
//! never touched again, so it ends in at most `Σ` tree path lengths ≤ `V · tree diameter` SWAPs
//! (the classical leaf-by-leaf argument for token swapping on trees).
//!
//! Cost: one routing of one step per campaign (the layout search's own routing of it is kept,
//! see `route::plan_and_route_step`), one routing of the merged group per seam (two), plus the
//! SWAPs back after a routed state preparation.

use super::swap::{insert_swaps, insert_swaps_cut, Adjacency, Mark, SwapOutcome, SwapParams};
use super::TargetPlan;
use crate::circuit::cancel::cancel_inverses;
use crate::circuit::{Circuit, Gate, Qubit};
use crate::device::Device;
use crate::formula::{step, Order, Rotation};
use crate::pauli::PauliString;
use crate::synth::{pauli_rotation_along, Block, Coupled, Groups, Pairs, Strategy};

/// How a routed step is repeated, which follows from the product formula's shape.
///
/// `Symmetric` (orders 2 and 4, palindromic steps): the step and its mirror alternate, so
/// every second step runs the SWAPs backwards. `OneSided` (order 1, Lie–Trotter): each step
/// after the first starts with the SWAPs home to the initial layout, then runs the step again.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Formula {
    /// Mirror alternation (orders 2, 4).
    Symmetric,
    /// The SWAPs home, then the step again (order 1).
    OneSided,
}

impl Formula {
    /// `OneSided` for Lie–Trotter ([`Order::First`]), `Symmetric` for the others.
    pub fn of(order: Order) -> Formula {
        if order == Order::First {
            Formula::OneSided
        } else {
            Formula::Symmetric
        }
    }
}

/// The mirror image of a unitary circuit: gates in reverse order, each replaced by the inverse
/// of itself with its angles negated (a Clifford gate by its inverse; `rz`, `rx`, `ry` kept
/// as they are; `U(θ, φ, λ)` by `U(θ, λ, φ)`), the global phase kept like an angle. If every
/// angle of `c` and its global phase are odd functions of a parameter `δ`,
/// `mirror(c) = c(−δ)⁻¹`. Measurements are dropped.
pub fn mirror(c: &Circuit) -> Circuit {
    Circuit {
        num_qubits: c.num_qubits,
        num_clbits: 0,
        gates: crate::circuit::mirror_gates(&c.gates),
        global_phase: c.global_phase,
    }
}

/// The exact inverse of a unitary circuit (reverse order, each gate inverted, phase negated).
pub fn inverse(c: &Circuit) -> Circuit {
    Circuit {
        num_qubits: c.num_qubits,
        num_clbits: 0,
        gates: c
            .gates
            .iter()
            .rev()
            .filter(|g| !g.is_measure())
            .map(|g| g.inverse().expect("a unitary gate has an inverse"))
            .collect(),
        global_phase: -c.global_phase,
    }
}

/// SWAPs (physical pairs, in order, each on a coupling) that move logical qubit `l` from site
/// `from[l]` to site `to[l]` for every `l`; other qubits end anywhere. Every site of `from` and
/// `to` must lie in one connected component of `dev`.
pub fn permutation_swaps(from: &[u32], to: &[u32], dev: &Device) -> Vec<(u32, u32)> {
    assert_eq!(from.len(), to.len(), "two placements of the same qubits");
    let mut swaps = Vec::new();
    if from == to || from.is_empty() {
        return swaps;
    }
    let n_phys = dev.num_qubits;
    let adj = Adjacency::new(dev);
    // Breadth-first spanning tree of the component, from the first qubit's site.
    let root = from[0];
    let mut parent = vec![u32::MAX; n_phys];
    let mut depth = vec![0u32; n_phys];
    let mut order = vec![root];
    parent[root as usize] = root;
    let mut head = 0;
    while head < order.len() {
        let u = order[head];
        head += 1;
        for &(v, _) in adj.of(u) {
            if parent[v as usize] == u32::MAX {
                parent[v as usize] = u;
                depth[v as usize] = depth[u as usize] + 1;
                order.push(v);
            }
        }
    }
    const FREE: u32 = u32::MAX;
    let mut holder = vec![FREE; n_phys]; // logical qubit on each site
    let mut site = from.to_vec(); // site of each logical qubit
    let mut wanted = vec![FREE; n_phys];
    for (l, (&f, &t)) in from.iter().zip(to).enumerate() {
        holder[f as usize] = l as u32;
        wanted[t as usize] = l as u32;
    }
    let mut fixed = vec![false; n_phys];
    let tree_path = |a: u32, b: u32| -> Vec<u32> {
        // Sites from a to b along the tree.
        let (mut x, mut y) = (a, b);
        let (mut up, mut down) = (vec![x], vec![y]);
        while x != y {
            if depth[x as usize] >= depth[y as usize] {
                x = parent[x as usize];
                up.push(x);
            } else {
                y = parent[y as usize];
                down.push(y);
            }
        }
        down.pop(); // the meeting vertex is already the last of `up`
        up.extend(down.into_iter().rev());
        up
    };
    let mut do_swap = |a: u32, b: u32, holder: &mut Vec<u32>, site: &mut Vec<u32>| {
        let (la, lb) = (holder[a as usize], holder[b as usize]);
        holder.swap(a as usize, b as usize);
        if la != FREE {
            site[la as usize] = b;
        }
        if lb != FREE {
            site[lb as usize] = a;
        }
        swaps.push((a, b));
    };
    for &v in order.iter().rev() {
        let source = match wanted[v as usize] {
            FREE if holder[v as usize] == FREE => None,
            FREE => {
                // The nearest free token among the vertices not yet fixed (one exists: the
                // remaining tree has as many free tokens as vertices that want none).
                let mut seen = vec![v];
                let mut visited = vec![false; n_phys];
                visited[v as usize] = true;
                let mut i = 0;
                let mut found = None;
                while i < seen.len() {
                    let u = seen[i];
                    i += 1;
                    if holder[u as usize] == FREE {
                        found = Some(u);
                        break;
                    }
                    for &(w, _) in adj.of(u) {
                        let tree_edge = parent[w as usize] == u || parent[u as usize] == w;
                        if tree_edge && !fixed[w as usize] && !visited[w as usize] {
                            visited[w as usize] = true;
                            seen.push(w);
                        }
                    }
                }
                Some(found.expect("the remaining tree holds a free token"))
            }
            l => Some(site[l as usize]),
        };
        if let Some(s) = source {
            let path = tree_path(s, v);
            for w in path.windows(2) {
                do_swap(w[0], w[1], &mut holder, &mut site);
            }
        }
        fixed[v as usize] = true;
    }
    debug_assert!(site == to, "every qubit reached its site");
    swaps
}

/// The logical circuit of one step (controlled rotations along the plan's ladders, each part
/// cancelled on its own) and where it splits for reuse.
#[derive(Clone, Debug)]
pub struct StepParts {
    /// The whole step.
    pub circuit: Circuit,
    /// Empty, or two indices into `circuit.gates`: the end of the leading edge and the start of
    /// the trailing one (see the module essay).
    pub cuts: Vec<usize>,
    /// With cuts: the first group at twice the edge's angle (both edges of a seam merged).
    pub merged_edge: Option<Circuit>,
}

/// Hop distance between the initial sites of two logical qubits of `plan` on `dev`; `None`
/// without a device.
fn layout_distance<'a>(
    plan: &'a TargetPlan,
    dev: Option<&'a Device>,
) -> Option<impl Fn(crate::circuit::Qubit, crate::circuit::Qubit) -> u32 + Sync + 'a> {
    let layout = &plan.initial_layout;
    dev.map(move |d| {
        move |a: crate::circuit::Qubit, b: crate::circuit::Qubit| {
            d.distance(layout[a as usize], layout[b as usize])
        }
    })
}

fn controlled(rotations: &[Rotation], plan: &TargetPlan, dev: Option<&Device>) -> Circuit {
    let mut c = Circuit::new(plan.initial_layout.len(), 0);
    if plan.step_form.pairs || plan.step_form.groups {
        // `synth::Pairs` or `synth::Groups`, with hop distances under the plan's initial
        // layout.
        let ladder = |r: &Rotation| plan.ladder(r);
        let distance = layout_distance(plan, dev);
        let block = Block {
            rotations,
            control: plan.ancilla,
            distance: distance.as_ref().map(|f| {
                f as &(dyn Fn(crate::circuit::Qubit, crate::circuit::Qubit) -> u32 + Sync)
            }),
        };
        if plan.step_form.groups && plan.step_form.coupled {
            // The copies of a spread control follow the ancilla (`TargetPlan::copies`).
            let copies: Vec<crate::circuit::Qubit> = plan
                .ancilla
                .map(|a| (a + 1..a + 1 + plan.copies as u32).collect())
                .unwrap_or_default();
            Coupled {
                width: plan.initial_layout.len(),
                ladder: &ladder,
                roam: plan.step_form.roam,
                carry: plan.step_form.carry,
                copies: &copies,
            }
            .synthesize(&block, &mut c.gates);
        } else if plan.step_form.groups {
            Groups {
                ladder: &ladder,
                shared: None,
            }
            .synthesize(&block, &mut c.gates);
        } else {
            Pairs { ladder: &ladder }.synthesize(&block, &mut c.gates);
        }
    } else {
        for r in rotations {
            c.extend(pauli_rotation_along(r, plan.ancilla, &plan.ladder(r)));
        }
    }
    if !plan.step_form.uncancelled {
        cancel_inverses(&mut c);
    }
    c
}

/// The step's program as [`StepForm`] asks: the textbook expansion or `formula::step`.
fn program(
    terms: &[(PauliString, f64)],
    plan: &TargetPlan,
    order: Order,
    dt: f64,
) -> Vec<Rotation> {
    if plan.step_form.textbook {
        crate::formula::textbook_evolution(terms, order, dt, 1)
    } else {
        step(terms, order, dt)
    }
}

/// The controlled step by a sign flip (`synth::flip`) over the plan's commuting groups
/// (`TargetPlan::group_sizes`): two controlled Pauli strings per flipped palindrome, every
/// rotation of the flipped groups uncontrolled along the plan's ladder, the parity tree by
/// hop distance under the plan's initial layout; `None` without an ancilla or groups, for
/// order 1, or when no split flips (`synth::flip::flip_split`). A partial flip that leaves
/// the first group alone controlled is cut at its edges like [`step_parts`]' split steps
/// when the plan's `edge_terms` names that group, so that seams merge its halves.
fn flipped(
    terms: &[(PauliString, f64)],
    plan: &TargetPlan,
    order: Order,
    dt: f64,
    dev: Option<&Device>,
) -> Option<StepParts> {
    let control = plan.ancilla?;
    let distance = layout_distance(plan, dev);
    let ladder = |r: &Rotation| plan.ladder(r);
    let signed = plan
        .step_form
        .flip_signed
        .then(|| signed_string_of(terms, plan, dev))
        .flatten();
    let particular = (plan.step_form.flip_particular && !plan.step_form.flip_signed)
        .then(|| crate::synth::flip::flip_split(terms, &plan.group_sizes, control as usize))
        .flatten()
        .map(|(_, q)| q);
    let choice = match (&signed, &particular) {
        (Some(q), _) => crate::synth::flip::Choice::Signed(q),
        (None, Some(q)) => crate::synth::flip::Choice::Given(q),
        (None, None) => crate::synth::flip::Choice::Search,
    };
    let build = |second: Option<&(dyn Fn(Qubit, Qubit) -> u32 + Sync)>| {
        crate::synth::flip::flipped_step_parts(
            terms,
            &plan.group_sizes,
            order,
            dt,
            crate::synth::flip::Writing {
                order: plan.step_form.flip_order,
                pairs: plan.step_form.pairs,
                groups: plan.step_form.groups,
            },
            control,
            &ladder,
            distance
                .as_ref()
                .map(|f| f as &(dyn Fn(Qubit, Qubit) -> u32 + Sync)),
            choice,
            second,
        )
    };
    let width = plan.initial_layout.len();
    let piece = |gates: Vec<Gate>| {
        let mut c = Circuit::new(width, 0);
        c.extend(gates);
        if !plan.step_form.uncancelled {
            cancel_inverses(&mut c);
        }
        c
    };
    let mut parts = build(None)?;
    // With `StepForm::flip_track` on a device, the second controlled `Q` gathers its parity
    // tree where the first half, routed alone from the initial layout, leaves the qubits
    // (`flipped_step_parts`). That routing uses the default router settings with the
    // plan's hub, factor and run-ahead, so the step stays a function of the plan alone; the
    // whole step's routing may end the half elsewhere (it looks past the cut), and the
    // search keeps the tracked form only where it scores better.
    if let (Some(dev), Some(at), true) = (dev, parts.second_at, plan.step_form.flip_track) {
        let before = piece(parts.middle[..at].to_vec());
        let params = super::plan_swap_params(plan, &super::RouteConfig::default());
        let moved = insert_swaps(&before, &plan.initial_layout, dev, &params);
        let there = &moved.final_layout;
        let second = |a: Qubit, b: Qubit| dev.distance(there[a as usize], there[b as usize]);
        parts = build(Some(&second))?;
    }
    let cut = !parts.lead.is_empty() && plan.group_sizes.first() == Some(&plan.edge_terms);
    if !cut {
        let mut gates = parts.lead;
        gates.extend(parts.middle);
        gates.extend(parts.trail);
        return Some(StepParts {
            circuit: piece(gates),
            cuts: Vec::new(),
            merged_edge: None,
        });
    }
    let (lead, middle, trail) = (piece(parts.lead), piece(parts.middle), piece(parts.trail));
    let a = lead.gates.len();
    let b = a + middle.gates.len();
    let mut circuit = Circuit::new(width, 0);
    for p in [lead, middle, trail] {
        circuit.extend(p.gates);
    }
    Some(StepParts {
        circuit,
        cuts: vec![a, b],
        merged_edge: Some(piece(parts.merged)),
    })
}

/// The string of a signed sign-flip step of `plan` (`StepForm::flip_signed`): none with
/// `flip_particular`, else `synth::flip::signed_string` under the plan's initial layout on
/// `dev`; `None` without an ancilla.
fn signed_string_of(
    terms: &[(PauliString, f64)],
    plan: &TargetPlan,
    dev: Option<&Device>,
) -> Option<crate::synth::flip::FlipString> {
    let control = plan.ancilla?;
    if plan.step_form.flip_particular {
        return Some(Vec::new());
    }
    let distance = layout_distance(plan, dev);
    Some(crate::synth::flip::signed_string(
        terms,
        control as usize,
        control,
        distance
            .as_ref()
            .map(|f| f as &(dyn Fn(crate::circuit::Qubit, crate::circuit::Qubit) -> u32 + Sync)),
    ))
}

/// What a plan records of the sign-flip step of `plan` over `terms`: how many terms stay
/// controlled (a split's leading groups, or a signed step's terms that commute with `Q`) and
/// the string (`synth::flip::flip_split_near`, `Q` chosen under the plan's initial layout on
/// `dev`; or the signed step's string, `synth::flip::signed_string`), as [`step_parts`] writes them.
pub fn flip_split_of(
    terms: &[(PauliString, f64)],
    plan: &TargetPlan,
    dev: Option<&Device>,
) -> Option<(usize, crate::synth::flip::FlipString)> {
    let control = plan.ancilla?;
    if plan.step_form.flip_signed {
        let q = signed_string_of(terms, plan, dev)?;
        let (_, string) =
            PauliString::from_factors(&q.iter().map(|&(k, p)| (k as usize, p)).collect::<Vec<_>>());
        let kept = terms
            .iter()
            .filter(|(p, c)| *c != 0.0 && p.commutes_with(&string))
            .count();
        return Some((kept, q));
    }
    let count =
        |(k, q): (usize, crate::synth::flip::FlipString)| (plan.group_sizes[..k].iter().sum(), q);
    if plan.step_form.flip_particular {
        return crate::synth::flip::flip_split(terms, &plan.group_sizes, control as usize)
            .map(count);
    }
    let distance = layout_distance(plan, dev);
    crate::synth::flip::flip_split_near(
        terms,
        &plan.group_sizes,
        control as usize,
        control,
        distance
            .as_ref()
            .map(|f| f as &(dyn Fn(crate::circuit::Qubit, crate::circuit::Qubit) -> u32 + Sync)),
    )
    .map(count)
}

/// The step in the order of [`super::sweep::schedule`], each ladder a nearest-neighbour chain
/// ending at the scheduled root; `None` when the schedule's work bound is exceeded.
fn swept(rotations: &[Rotation], plan: &TargetPlan, dev: &Device) -> Option<Circuit> {
    let s = super::sweep::schedule(rotations, plan, dev)?;
    let mut c = Circuit::new(plan.initial_layout.len(), 0);
    for (r, &root) in s.rotations.iter().zip(&s.roots) {
        let support: Vec<u32> = crate::synth::default_ladder(r);
        let (mut chain, _) = plan.chain_from(root, &support);
        chain.reverse();
        c.extend(pauli_rotation_along(r, plan.ancilla, &chain));
    }
    if !plan.step_form.uncancelled {
        cancel_inverses(&mut c);
    }
    Some(c)
}

/// The first `plan.edge_terms` terms (a commuting group, the first of the order) with each
/// coefficient times `factor`: one edge of a symmetric step.
fn edge(terms: &[(PauliString, f64)], factor: f64) -> Vec<Rotation> {
    terms
        .iter()
        .map(|(p, c)| Rotation {
            pauli: p.clone(),
            theta: c * factor,
        })
        .collect()
}

/// One step of `order` and length `dt` over `terms` as [`StepParts`]. For a symmetric order and
/// a plan whose `edge_terms` names a first commuting group `G` short of all the terms, the step
/// is written `E · M · E'`: order 2, `E = G(δ/2)` and `M = S₂` over the other terms; order 4,
/// `E = G(pδ/2)` and `M = K(p) G(2p) K(p) G(1−3p) K(1−4p) G(1−3p) K(p) G(2p) K(p)` with
/// `K(x) = S₂(xδ)` over the other terms and `G(x)` the group at `xδ/2` (the Suzuki product
/// `S₂(pδ)² S₂((1−4p)δ) S₂(pδ)²` with the group's halves that meet merged, which is exact since
/// they commute); `E'` is `E` reversed. Otherwise one part, `formula::step`.
///
/// With `StepForm::sweep` (and a device to measure the walk on) the program of one part is
/// reordered by [`super::sweep::schedule`] and never split.
pub fn step_parts(
    terms: &[(PauliString, f64)],
    plan: &TargetPlan,
    order: Order,
    dt: f64,
) -> StepParts {
    step_parts_on(terms, plan, order, dt, None)
}

/// [`step_parts`] with the device a sweep schedule walks on.
pub fn step_parts_on(
    terms: &[(PauliString, f64)],
    plan: &TargetPlan,
    order: Order,
    dt: f64,
    dev: Option<&Device>,
) -> StepParts {
    let e = plan.edge_terms;
    if plan.step_form.flip {
        if let Some(parts) = flipped(terms, plan, order, dt, dev) {
            return parts;
        }
    }
    if let (true, Some(dev)) = (plan.step_form.sweep, dev) {
        let rotations = program(terms, plan, order, dt);
        if let Some(circuit) = swept(&rotations, plan, dev) {
            return StepParts {
                circuit,
                cuts: Vec::new(),
                merged_edge: None,
            };
        }
    }
    if order == Order::First || e == 0 || e >= terms.len() || plan.step_form.textbook {
        return StepParts {
            circuit: controlled(&program(terms, plan, order, dt), plan, dev),
            cuts: Vec::new(),
            merged_edge: None,
        };
    }
    let (group, rest) = terms.split_at(e);
    let (lead, middle, merged) = match order {
        Order::Second => (
            edge(group, dt / 2.0),
            step(rest, Order::Second, dt),
            edge(group, dt),
        ),
        _ => {
            let p = 1.0 / (4.0 - 4f64.powf(1.0 / 3.0));
            let k = |x: f64| step(rest, Order::Second, x * dt);
            let g = |x: f64| edge(group, x * dt / 2.0);
            let middle = [
                k(p),
                g(2.0 * p),
                k(p),
                g(1.0 - 3.0 * p),
                k(1.0 - 4.0 * p),
                g(1.0 - 3.0 * p),
                k(p),
                g(2.0 * p),
                k(p),
            ]
            .concat();
            (g(p), middle, g(2.0 * p))
        }
    };
    let mut trail = lead.clone();
    trail.reverse();
    let parts = [
        controlled(&lead, plan, dev),
        controlled(&middle, plan, dev),
        controlled(&trail, plan, dev),
    ];
    let a = parts[0].gates.len();
    let b = a + parts[1].gates.len();
    let mut circuit = Circuit::new(plan.initial_layout.len(), 0);
    for part in parts {
        circuit.extend(part.gates);
    }
    StepParts {
        circuit,
        cuts: vec![a, b],
        merged_edge: Some(controlled(&merged, plan, dev)),
    }
}

/// A routed step, cut into the pieces a circuit of `r` steps is made of (see the module essay):
/// `head · core₀ · join₀₁ · core₁ · join₁₀ · core₀ · … · core_b · tail_b`, with `core_b` the
/// core of the last step. All physical (`dev.num_qubits` qubits), `swap` gates kept, not
/// lowered; unused pieces are empty.
#[derive(Clone, Debug)]
pub struct RoutedStep {
    /// Layout before the first step.
    pub start: Vec<u32>,
    /// Before the first core.
    pub head: Circuit,
    /// `cores[0]` implements the first step's core, `cores[1]` each later one in turn.
    pub cores: [Circuit; 2],
    /// `joins[a][b]`: between `cores[a]` and `cores[b]`.
    pub joins: [[Circuit; 2]; 2],
    /// `tails[b]`: after the last core when it is `cores[b]`.
    pub tails: [Circuit; 2],
    /// `ends[b]`: the layout after `tails[b]`.
    pub ends: [Vec<u32>; 2],
    /// Mirror alternation ([`Formula::Symmetric`], orders 2, 4) or the SWAPs home
    /// ([`Formula::OneSided`], order 1).
    pub formula: Formula,
}

impl RoutedStep {
    /// Which core implements step `i` (counting from 0).
    pub fn core_index(&self, i: usize) -> usize {
        if i == 0 || (self.formula == Formula::Symmetric && i.is_multiple_of(2)) {
            0
        } else {
            1
        }
    }

    /// The layout after `steps` steps.
    pub fn layout_after(&self, steps: usize) -> &[u32] {
        if steps == 0 {
            &self.start
        } else {
            &self.ends[self.core_index(steps - 1)]
        }
    }

    /// The unlowered pieces of `steps` steps, in order (none for zero steps).
    pub fn pieces(&self, steps: usize) -> Vec<&Circuit> {
        let mut out = Vec::new();
        if steps == 0 {
            return out;
        }
        out.push(&self.head);
        for i in 0..steps {
            let b = self.core_index(i);
            out.push(&self.cores[b]);
            if i + 1 < steps {
                out.push(&self.joins[b][self.core_index(i + 1)]);
            } else {
                out.push(&self.tails[b]);
            }
        }
        out
    }
}

/// Two-qubit gates a physical circuit costs after peephole cancellation (a SWAP counts 3).
pub(crate) fn two_qubit_cost(c: &Circuit) -> usize {
    let mut c = c.clone();
    cancel_inverses(&mut c);
    c.gates
        .iter()
        .map(|g| match g {
            Gate::Swap(..) => 3,
            g if g.is_two_qubit() => 1,
            _ => 0,
        })
        .sum()
}

fn physical(n_phys: usize, gates: &[Gate]) -> Circuit {
    let mut c = Circuit::new(n_phys, 0);
    c.extend(gates.iter().copied());
    c
}

/// The two ways to implement a seam at layout `at` (both from `at` back to `at`): the mirrored
/// pair of edges as given, and the merged group `merged` (logical) routed from `at` followed by
/// the SWAPs home.
pub(crate) fn seam_options(
    pair: Circuit,
    merged: &Circuit,
    at: &[u32],
    dev: &Device,
    params: &SwapParams,
) -> [Circuit; 2] {
    let fresh = insert_swaps(merged, at, dev, params);
    let mut alt = fresh.circuit;
    alt.extend(
        permutation_swaps(&fresh.final_layout, at, dev)
            .into_iter()
            .map(|(a, b)| Gate::Swap(a, b)),
    );
    [pair, alt]
}

/// Routes the step's parts once from the plan's initial layout (see [`route_from`]).
pub fn route_step(
    parts: &StepParts,
    plan: &TargetPlan,
    dev: &Device,
    params: &SwapParams,
    formula: Formula,
) -> RoutedStep {
    let start = &plan.initial_layout[..parts.circuit.num_qubits];
    let (fwd, marks) = insert_swaps_cut(&parts.circuit, start, dev, params, &parts.cuts);
    route_from(parts, fwd, marks, plan, dev, params, formula)
}

/// The [`RoutedStep`] of a step routed whole, `circuit : start → end` (physical): the step and
/// its mirror in turn (symmetric formulas), or the SWAPs home and the step again (order 1).
pub fn unsplit(
    circuit: Circuit,
    start: Vec<u32>,
    end: Vec<u32>,
    dev: &Device,
    formula: Formula,
) -> RoutedStep {
    let symmetric = formula == Formula::Symmetric;
    let n_phys = dev.num_qubits;
    let empty = || Circuit::new(n_phys, 0);
    let back = if symmetric {
        mirror(&circuit)
    } else {
        let mut c = physical(n_phys, &[]);
        c.extend(
            permutation_swaps(&end, &start, dev)
                .into_iter()
                .map(|(a, b)| Gate::Swap(a, b)),
        );
        c.extend(circuit.gates.iter().copied());
        c
    };
    let ends = if symmetric {
        [end, start.clone()]
    } else {
        [end.clone(), end]
    };
    RoutedStep {
        start,
        head: empty(),
        cores: [circuit, back],
        joins: [[empty(), empty()], [empty(), empty()]],
        tails: [empty(), empty()],
        ends,
        formula,
    }
}

/// The [`RoutedStep`] of a routing of `parts` (with its marks at the cuts) made from the plan's
/// initial layout: without cuts, `C` and its mirror (or the SWAPs home and `C` again, order 1);
/// with cuts `E|M|E'`, the head `E`, the cores `M` and `mirror(M)`, the tails `E'` and
/// `mirror(E)`, and at each seam the cheaper (in two-qubit gates after cancellation) of the
/// mirrored edge pair and the merged group routed afresh followed by the SWAPs home.
pub fn route_from(
    parts: &StepParts,
    fwd: SwapOutcome,
    marks: Vec<Mark>,
    plan: &TargetPlan,
    dev: &Device,
    params: &SwapParams,
    formula: Formula,
) -> RoutedStep {
    let n_phys = dev.num_qubits;
    let start = plan.initial_layout[..fwd.final_layout.len()].to_vec();
    let empty = || Circuit::new(n_phys, 0);
    let Some(merged) = parts.merged_edge.as_ref().filter(|_| marks.len() == 2) else {
        return unsplit(fwd.circuit, start, fwd.final_layout, dev, formula);
    };
    let g = &fwd.circuit.gates;
    let lead = physical(n_phys, &g[..marks[0].at]);
    let middle = physical(n_phys, &g[marks[0].at..marks[1].at]);
    let trail = physical(n_phys, &g[marks[1].at..]);
    // A seam at layout `at`: the mirrored pair of edges, or the merged group and the way back.
    let seam = |pair: Circuit, at: &[u32]| -> Circuit {
        let [pair, alt] = seam_options(pair, merged, at, dev, params);
        if two_qubit_cost(&alt) < two_qubit_cost(&pair) {
            alt
        } else {
            pair
        }
    };
    let mut pair_b = trail.clone();
    pair_b.extend(mirror(&trail).gates);
    let mut pair_a = mirror(&lead);
    pair_a.extend(lead.gates.iter().copied());
    let join_b = seam(pair_b, &marks[1].layout);
    let join_a = seam(pair_a, &marks[0].layout);
    RoutedStep {
        head: lead.clone(),
        cores: [middle.clone(), mirror(&middle)],
        joins: [[empty(), join_b], [join_a, empty()]],
        tails: [trail, mirror(&lead)],
        ends: [fwd.final_layout, start.clone()],
        start,
        formula,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::device::{lattice, Calibration, NativeSet};
    use crate::sim::unitary_distance;
    use rand::{Rng, SeedableRng};

    #[test]
    fn permutation_swaps_reach_every_target_on_coupled_pairs() {
        // Random placements of 9 qubits on a 4×4 grid and on a heavy hexagon, both ways round.
        let hex = lattice::BridgedHex::new(3, 7).unwrap();
        for (links, n) in [
            (lattice::grid(4, 4), 16usize),
            (hex.links(), hex.qubits() as usize),
        ] {
            let dev = Device::new(
                "d",
                n,
                &links,
                NativeSet::rz_sx_x_cx(),
                Calibration::default(),
            );
            let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
            for _ in 0..20 {
                let mut sites: Vec<u32> = (0..n as u32).collect();
                let k = 9;
                for i in 0..n {
                    sites.swap(i, rng.gen_range(i..n));
                }
                let from = sites[..k].to_vec();
                for i in 0..n {
                    sites.swap(i, rng.gen_range(i..n));
                }
                let to = sites[..k].to_vec();
                let swaps = permutation_swaps(&from, &to, &dev);
                let mut at = from.clone();
                for &(a, b) in &swaps {
                    assert!(dev.coupled(a, b), "{a}-{b}");
                    for p in at.iter_mut() {
                        if *p == a {
                            *p = b;
                        } else if *p == b {
                            *p = a;
                        }
                    }
                }
                assert_eq!(at, to);
            }
        }
    }

    /// A 4-qubit Heisenberg chain with fields (XX, YY and ZZ groups, so the step splits) on a
    /// 3×3 grid, its plan with the ancilla, and its split Strang step.
    fn split_case() -> (Device, TargetPlan, StepParts, SwapParams) {
        use crate::pauli::{Pauli, PauliSum};
        let mut h = PauliSum::new(4);
        for q in 0..4 {
            h.add(PauliString::single(q, Pauli::Z), 0.3 + 0.1 * q as f64);
            if q < 3 {
                for p in [Pauli::X, Pauli::Y, Pauli::Z] {
                    h.add(PauliString::from_factors(&[(q, p), (q + 1, p)]).1, 0.8);
                }
            }
        }
        let dev = Device::new(
            "grid",
            9,
            &lattice::grid(3, 3),
            NativeSet::rz_sx_x_cx(),
            Calibration::default(),
        );
        let mut plan = TargetPlan::with_layout(
            4,
            crate::route::Ancilla::Controls,
            &dev,
            vec![0, 4, 8, 2, 6],
        )
        .unwrap();
        let groups = crate::formula::term_groups(&h);
        assert!(groups.len() >= 2);
        plan.edge_terms = groups[0].len();
        let parts = step_parts(&groups.concat(), &plan, Order::Second, 0.35);
        let params = SwapParams {
            extended_size: 20,
            extended_weight: 0.5,
            decay_step: 0.001,
            decay_reset: 5,
            seed: 1,
            stall_limit: None,
            hub: plan.ancilla,
            hub_factor: 0.9,
            commute_ahead: 0,
        };
        (dev, plan, parts, params)
    }

    #[test]
    fn cut_routing_splits_into_segments_that_each_implement_their_part() {
        let (dev, plan, parts, params) = split_case();
        assert_eq!(parts.cuts.len(), 2);
        let (fwd, marks) = insert_swaps_cut(
            &parts.circuit,
            &plan.initial_layout,
            &dev,
            &params,
            &parts.cuts,
        );
        let bounds = [0, parts.cuts[0], parts.cuts[1], parts.circuit.gates.len()];
        let outs = [0, marks[0].at, marks[1].at, fwd.circuit.gates.len()];
        let layouts = [
            plan.initial_layout.clone(),
            marks[0].layout.clone(),
            marks[1].layout.clone(),
            fwd.final_layout.clone(),
        ];
        for i in 0..3 {
            let mut logical = Circuit::new(5, 0);
            logical.extend(
                parts.circuit.gates[bounds[i]..bounds[i + 1]]
                    .iter()
                    .copied(),
            );
            let seg = physical(9, &fwd.circuit.gates[outs[i]..outs[i + 1]]);
            let err =
                crate::route::check::placed_error(&logical, &seg, &layouts[i], &layouts[i + 1])
                    .unwrap();
            assert!(err < 1e-9, "segment {i}: {err}");
        }
    }

    #[test]
    fn both_seam_options_are_the_merged_group() {
        // At each seam the mirrored edge pair and the freshly routed merged group (plus the
        // SWAPs home) must both equal the first group at the full angle, layouts applied.
        let (dev, plan, parts, params) = split_case();
        let (fwd, marks) = insert_swaps_cut(
            &parts.circuit,
            &plan.initial_layout,
            &dev,
            &params,
            &parts.cuts,
        );
        let merged = parts.merged_edge.clone().unwrap();
        let g = &fwd.circuit.gates;
        let lead = physical(9, &g[..marks[0].at]);
        let trail = physical(9, &g[marks[1].at..]);
        let mut pair_b = trail.clone();
        pair_b.extend(mirror(&trail).gates);
        let mut pair_a = mirror(&lead);
        pair_a.extend(lead.gates.iter().copied());
        for (pair, at) in [(pair_b, &marks[1].layout), (pair_a, &marks[0].layout)] {
            for option in seam_options(pair, &merged, at, &dev, &params) {
                let err = crate::route::check::placed_error(&merged, &option, at, at).unwrap();
                assert!(err < 1e-9, "{err}");
            }
        }
    }

    #[test]
    fn the_mirror_of_a_symmetric_product_is_the_same_operator() {
        // exp(-iθ ZZ) exp(-iφ X) exp(-iθ ZZ) as gates: a palindrome of rotations, so its
        // mirror (reverse order, Cliffords inverted, rz kept) is the same unitary.
        let mut c = Circuit::new(2, 0);
        let zz = |t: f64| [Gate::Cx(0, 1), Gate::Rz(1, t), Gate::Cx(0, 1)];
        c.extend(zz(0.3));
        c.extend([Gate::H(0), Gate::Rz(0, 0.7), Gate::H(0)]);
        c.extend([Gate::S(1), Gate::Swap(0, 1), Gate::Swap(0, 1), Gate::Sdg(1)]);
        c.extend(zz(0.3));
        assert!(unitary_distance(&c, &mirror(&c)) < 1e-12);
        // Not symmetric: the mirror is another operator, the inverse is the inverse.
        let mut d = Circuit::new(2, 0);
        d.extend(zz(0.3));
        d.extend([Gate::H(0), Gate::Rz(0, 0.7), Gate::H(0), Gate::S(1)]);
        assert!(unitary_distance(&d, &mirror(&d)) > 1e-3);
        let mut both = d.clone();
        both.extend(inverse(&d).gates);
        assert!(unitary_distance(&both, &Circuit::new(2, 0)) < 1e-12);
    }
}
