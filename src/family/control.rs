//! Hadamard tests without a controlled evolution: the proof that |0…0⟩ is an eigenstate of the
//! product formula, its known phase, and the controlled state preparation.
//!
//! In: the term groups of the product formula (`formula::term_groups`, or a target's reordering
//! inside them), a rotation program, a reference state. Out: a verdict (every group keeps
//! |0…0⟩, or the first term that does not and why), the phase `φ₀` with
//! `U|0…0⟩ = e^{−iφ₀}|0…0⟩`, and the gates that prepare the reference state on the ancilla's
//! |1⟩ branch only. Invariant: a circuit built from these pieces leaves exactly the state of
//! the controlled Hadamard test (global phase aside), so every read of the plan means the same
//! in both forms.
//!
//! # The idea
//! (Lu, Bañuls & Cirac, "Algorithms for quantum simulation at finite energies", PRX Quantum 2,
//! 020321 (2021); Russo, Rudinger, Morrison & Baczewski, "Evaluating energy differences on a
//! quantum computer with robust phase estimation", PRL 126, 210501 (2021); both cited from
//! memory.) If `U|0…0⟩ = λ₀|0…0⟩` with `λ₀ = e^{−iφ₀}` known, the ancilla need not control
//! `U`. Write `W` for a controlled preparation: `W|0⟩|0…0⟩ = |0⟩|0…0⟩` and
//! `W|1⟩|χ⟩ = |1⟩V|χ⟩` with `V|0…0⟩ = |ψ⟩`. Then
//!
//! ```text
//!  h(anc)                  (|0⟩|0…0⟩ + |1⟩|0…0⟩)/√2
//!  W                       (|0⟩|0…0⟩ + |1⟩|ψ⟩)/√2
//!  U (no control)          (λ₀|0⟩|0…0⟩ + |1⟩U|ψ⟩)/√2
//!  W†                      (λ₀|0⟩|0…0⟩ + |1⟩V†U|ψ⟩)/√2      (W† fixes |0⟩|0…0⟩ too)
//!  V (no control)          (λ₀|0⟩|ψ⟩ + |1⟩U|ψ⟩)/√2
//!  rz(−φ₀)(anc)            ∝ (|0⟩|ψ⟩ + |1⟩U|ψ⟩)/√2
//! ```
//!
//! which is the state of the controlled Hadamard test (`rz(λ)` multiplies |1⟩ by `e^{iλ}`
//! relative to |0⟩). So `⟨X_anc ⊗ P⟩ = Re⟨ψ|P U|ψ⟩` and `⟨Y_anc ⊗ P⟩ = Im⟨ψ|P U|ψ⟩` hold as
//! before for every `P`: the Krylov family's group parities carry over exactly, for every
//! reference state, because the |0⟩ branch is brought back to |ψ⟩ (by the uncontrolled `V`)
//! before the measurement basis is applied. When only the ancilla is read (overlap and trace
//! families) the final `V` acts on both branches alike and changes nothing, so it is left out.
//!
//! `W` is built from gates in which the ancilla appears only as the control of `cx(anc, q)`;
//! `V` is the same list with each such `cx(anc, q)` replaced by `x(q)`, so `V` equals `W`'s
//! action on the |1⟩ branch by construction, and `W` restricted to the |0⟩ branch keeps
//! |0…0⟩ (checked by the tests below). The control of each step is the *source*: the ancilla,
//! or the last qubit a `1` letter has set, which holds 1 on the |1⟩ branch and 0 on the |0⟩
//! branch just as the ancilla does; so a basis state is a chain `cx(anc, s₁) cx(s₁, s₂) …`
//! through its set bits, and on a device the ancilla meets only the first of them. Per reference letter, `V` is the reflection
//! `n·σ` whose axis `n` bisects +z and the state's Bloch vector, so `V = R X R†` and
//! `W = R · cx(anc, q) · R†` with `R` a rotation taking x to `n`; the singlet `ss` uses a
//! controlled `h`, a controlled `z`, an uncontrolled `cx` (it acts on |00⟩ as the identity)
//! and a controlled `x`. A basis state costs one CNOT per set bit each way.
//!
//! # When |0…0⟩ is an eigenstate
//! Every factor of every formula here is `exp(−i x G)` for a group `G = Σ_{j∈G} c_j P_j` of
//! commuting terms (`formula::term_groups`; merging adjacent rotations, Strang's halves,
//! Suzuki's scalings and a target's reordering inside groups all keep that operator). If
//! `G|0…0⟩ = g|0…0⟩` then `exp(−ixG)|0…0⟩ = e^{−ixg}|0…0⟩` exactly. `P_j|0…0⟩ = i^{|Y_j|}|x_j⟩`
//! with `x_j` the flip mask of `P_j`, so the condition is: in every group, for every non-zero
//! flip mask `x`, `Σ_{j: x_j = x} c_j i^{|Y_j|} = 0` (checked to [`CANCEL_TOLERANCE`] of the
//! group's one-norm), and then `g = Σ` of the group's Z-only coefficients. Hence `φ₀` is the sum
//! of the angles of the program's Z-only rotations ([`zero_phase`]). The condition is
//! sufficient, not necessary; a Hamiltonian it misses is compiled with the controlled
//! evolution.

use crate::circuit::{Gate, Qubit};
use crate::formula::Rotation;
use crate::pauli::{i_pow, Bits, PauliString};
use num_complex::Complex64;
use std::collections::BTreeMap;

/// How the Hadamard test reaches the evolution.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Control {
    /// The ancilla controls every rotation of `U`.
    Evolution,
    /// The ancilla controls only the state preparation; `U` runs uncontrolled.
    Prep,
}

/// Largest `|Σ c_j i^{|Y_j|}|` over one flip mask, relative to the group's one-norm, that still
/// counts as a cancellation: coefficients read from text agree to the last bit when the model is
/// symmetric, so anything left is rounding; the circuit then errs by at most this much times the
/// evolution time, far below `check::COMPILE_TOLERANCE`.
pub const CANCEL_TOLERANCE: f64 = 1e-13;

/// Why |0…0⟩ is not shown to be an eigenstate: the first term (in formula order) whose flip is
/// not cancelled inside its commuting group.
#[derive(Clone, Debug, PartialEq)]
pub struct NotAnEigenstate {
    /// The term, in sparse text (`X0 X1`).
    pub term: String,
    pub reason: String,
}

impl std::fmt::Display for NotAnEigenstate {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "term `{}`: {}", self.term, self.reason)
    }
}

/// Checks that every group `G` of commuting terms maps |0…0⟩ to a multiple of itself (see the
/// module essay); `groups` in formula order.
pub fn zero_state_check(groups: &[Vec<(PauliString, f64)>]) -> Result<(), NotAnEigenstate> {
    for group in groups {
        let norm: f64 = group.iter().map(|(_, c)| c.abs()).sum();
        // Flip mask → (Σ c_j i^{|Y_j|}, first term with that mask).
        let mut flips: BTreeMap<&Bits, (Complex64, usize)> = BTreeMap::new();
        for (i, (p, c)) in group.iter().enumerate() {
            if p.x.is_empty() {
                continue;
            }
            let e = flips.entry(&p.x).or_insert((Complex64::new(0.0, 0.0), i));
            e.0 += i_pow(p.y_count() as i64) * *c;
        }
        let first_bad = flips
            .values()
            .filter(|(sum, _)| sum.norm() > CANCEL_TOLERANCE * norm)
            .map(|&(_, i)| i)
            .min();
        if let Some(i) = first_bad {
            let p = &group[i].0;
            let flipped: Vec<String> = p.x.ones().map(|q| q.to_string()).collect();
            let partners = group.iter().filter(|(q, _)| q.x == p.x && q != p).count();
            let reason = if partners == 0 {
                format!(
                    "it flips qubit{} {} of |0…0⟩ and no other term of its commuting group flips the same qubits back, so |0…0⟩ is not an eigenstate of the product formula",
                    if flipped.len() == 1 { "" } else { "s" },
                    flipped.join(" ")
                )
            } else {
                format!(
                    "it and the {partners} other term(s) of its commuting group that flip qubits {} do not cancel on |0…0⟩ (their coefficients are not those of a number-conserving pair such as c·(XX + YY)), so |0…0⟩ is not an eigenstate of the product formula",
                    flipped.join(" ")
                )
            };
            return Err(NotAnEigenstate {
                term: p.to_factor_text(),
                reason,
            });
        }
    }
    Ok(())
}

/// `φ₀` with `U|0…0⟩ = e^{−iφ₀}|0…0⟩` for a program that passed [`zero_state_check`]: the sum
/// of the angles of its rotations about Z-only strings (each has eigenvalue +1 on |0…0⟩; the
/// others cancel within their groups).
pub fn zero_phase(program: &[Rotation]) -> f64 {
    program
        .iter()
        .filter(|r| r.pauli.x.is_empty())
        .map(|r| r.theta)
        .sum()
}

/// The whole shape of a Hadamard test: what the ancilla controls and, in the control-free
/// form, how its controlled preparation is joined.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Form {
    pub control: Control,
    pub joins: Joins,
}

/// How the controlled preparation joins one set bit of a basis reference to the next.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Joins {
    /// `cx(s, s')` however far apart the two are: one CNOT per set bit (all-to-all).
    Direct,
    /// When only `0` letters lie between them, through those qubits by index: the cascade
    /// `cx(s, s+1) cx(s+1, s+2) … cx(s'−1, s')` sets them all on the |1⟩ branch, then
    /// `cx(s'−2, s'−1) … cx(s, s+1)` clears the ones in between again (each is cleared by its
    /// lower neighbour, still 1), `2g + 1` CNOTs for a gap of `g` qubits, all between index
    /// neighbours. On a device, where the models' index neighbours mostly sit side by side,
    /// this replaces a distant CNOT and the SWAPs there and back (3 CNOTs each). The |0⟩
    /// branch holds 0 on every qubit involved, so nothing happens there.
    Neighbours,
}

/// The controlled preparation `W` of `state` on ancilla `anc` (see the module essay); the
/// letters are those of [`super::state_prep`], already validated.
pub fn controlled_prep(state: &str, anc: Qubit, joins: Joins) -> Vec<Gate> {
    use std::f64::consts::FRAC_PI_4;
    let letters: Vec<char> = state.chars().collect();
    let mut out = Vec::new();
    // The source: 1 on the |1⟩ branch, 0 on the |0⟩ branch (see the module essay).
    let mut src = anc;
    // R† · cx(src, q) · R for the reflection about the axis R takes x to.
    let reflect = |src: Qubit, q: Qubit, pre: &[Gate], post: &[Gate], out: &mut Vec<Gate>| {
        out.extend_from_slice(pre);
        out.push(Gate::Cx(src, q));
        out.extend_from_slice(post);
    };
    let mut i = 0;
    while i < letters.len() {
        let q = i as Qubit;
        match letters[i] {
            // x → (x + z)/√2 by ry(−π/4): the reflection is (X + Z)/√2 = H, and H|0⟩ = |+⟩.
            '+' => reflect(
                src,
                q,
                &[Gate::Ry(q, FRAC_PI_4)],
                &[Gate::Ry(q, -FRAC_PI_4)],
                &mut out,
            ),
            // x → (z − x)/√2 by ry(−3π/4): (Z − X)/√2 |0⟩ = |−⟩.
            '-' => reflect(
                src,
                q,
                &[Gate::Ry(q, 3.0 * FRAC_PI_4)],
                &[Gate::Ry(q, -3.0 * FRAC_PI_4)],
                &mut out,
            ),
            // x → (x + z)/√2 → (y + z)/√2 (ry(−π/4), then s): (Y + Z)/√2 |0⟩ = |+i⟩.
            'r' => reflect(
                src,
                q,
                &[Gate::Sdg(q), Gate::Ry(q, FRAC_PI_4)],
                &[Gate::Ry(q, -FRAC_PI_4), Gate::S(q)],
                &mut out,
            ),
            // x → (x + z)/√2 → (z − y)/√2 (ry(−π/4), then sdg): (Z − Y)/√2 |0⟩ = |−i⟩.
            'l' => reflect(
                src,
                q,
                &[Gate::S(q), Gate::Ry(q, FRAC_PI_4)],
                &[Gate::Ry(q, -FRAC_PI_4), Gate::Sdg(q)],
                &mut out,
            ),
            '1' => {
                let gap_is_zeros = src != anc && ((src as usize + 1)..i).all(|j| letters[j] == '0');
                if joins == Joins::Neighbours && gap_is_zeros && q > src + 1 {
                    for j in src..q {
                        out.push(Gate::Cx(j, j + 1));
                    }
                    for j in (src + 1..q).rev() {
                        out.push(Gate::Cx(j - 1, j));
                    }
                } else {
                    out.push(Gate::Cx(src, q));
                }
                src = q;
            }
            's' => {
                // The singlet's h, z, cx(i, i+1), x(i+1), with h, z and x controlled.
                reflect(
                    src,
                    q,
                    &[Gate::Ry(q, FRAC_PI_4)],
                    &[Gate::Ry(q, -FRAC_PI_4)],
                    &mut out,
                );
                out.extend([Gate::H(q), Gate::Cx(src, q), Gate::H(q)]);
                out.extend([Gate::Cx(q, q + 1), Gate::Cx(src, q + 1)]);
                i += 1;
            }
            _ => {}
        }
        i += 1;
    }
    out
}

/// `V`: `w` with every `cx(anc, q)` replaced by `x(q)`, i.e. `W`'s action on the |1⟩ branch.
pub fn uncontrolled(w: &[Gate], anc: Qubit) -> Vec<Gate> {
    w.iter()
        .map(|g| match *g {
            Gate::Cx(a, q) if a == anc => Gate::X(q),
            g => g,
        })
        .collect()
}

/// `W†`: the inverse gates in reverse order.
pub fn inverse(w: &[Gate]) -> Vec<Gate> {
    w.iter()
        .rev()
        .map(|g| g.inverse().expect("a preparation has no measurement"))
        .collect()
}

/// The system qubits `W` for `state` couples to the ancilla `anc` directly (the ones the
/// ancilla must reach on a device).
pub fn ancilla_partners(state: &str, anc: Qubit) -> Vec<usize> {
    let mut out: Vec<usize> = controlled_prep(state, anc, Joins::Direct)
        .iter()
        .filter_map(|g| match *g {
            Gate::Cx(a, q) if a == anc => Some(q as usize),
            _ => None,
        })
        .collect();
    out.sort_unstable();
    out.dedup();
    out
}

/// Two-qubit gates of `W` (the same for `W†`): one per set bit of a basis state.
pub fn prep_two_qubit(state: &str) -> usize {
    controlled_prep(state, state.chars().count() as Qubit, Joins::Direct)
        .iter()
        .filter(|g| g.is_two_qubit())
        .count()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::circuit::Circuit;
    use crate::family::state_prep;
    use crate::pauli::PauliSum;
    use crate::sim::{run, State};

    /// `W` on every basis state: identity-like on |0⟩|0…0⟩, `V` (the letters' reflections or the
    /// singlet's gates) on the |1⟩ branch, and `V|0…0⟩` equal to `state_prep`'s state up to a
    /// phase.
    #[test]
    fn controlled_prep_acts_only_on_the_one_branch() {
        let states = [
            "0", "1", "+", "-", "r", "l", "ss", "1+0-rl", "0ss1", "r1ss-", "1001", "0100101",
            "10011r1",
        ];
        for (state, joins) in states
            .into_iter()
            .flat_map(|s| [(s, Joins::Direct), (s, Joins::Neighbours)])
        {
            let n = state.len();
            let anc = n as Qubit;
            let w = controlled_prep(state, anc, joins);
            let mut c = Circuit::new(n + 1, 0);
            c.extend(w.clone());
            // anc = 0: |0…0⟩ stays exactly.
            let out = run(&c, State::zero(n + 1));
            assert!(
                (out.amps[0] - Complex64::new(1.0, 0.0)).norm() < 1e-12,
                "{state}"
            );
            // anc = 1, system |0…0⟩: the reference state up to a global phase.
            let mut s = State::zero(n + 1);
            s.apply(&Gate::X(anc));
            let out = run(&c, s);
            let mut want = State::zero(n + 1);
            for g in state_prep(state).unwrap() {
                want.apply(&g);
            }
            want.apply(&Gate::X(anc));
            assert!((want.inner(&out).norm() - 1.0).abs() < 1e-12, "{state}");
            // On the |1⟩ branch W is V on every system state: compare on random basis inputs.
            let v = uncontrolled(&w, anc);
            for b in 0..1usize << n {
                let mut s = State::zero(n + 1);
                s.amps[0] = Complex64::new(0.0, 0.0);
                s.amps[b | 1 << n] = Complex64::new(1.0, 0.0);
                let got = run(&c, s.clone());
                let mut cv = Circuit::new(n + 1, 0);
                cv.extend(v.clone());
                let want = run(&cv, s);
                assert!((want.inner(&got) - Complex64::new(1.0, 0.0)).norm() < 1e-12);
            }
        }
    }

    #[test]
    fn basis_states_cost_one_cnot_per_set_bit() {
        assert_eq!(prep_two_qubit("0110100"), 3);
        assert_eq!(prep_two_qubit("0000"), 0);
        // Joined through the zero in between: 1 + 1 + (2·1 + 1) CNOTs, index neighbours only.
        let w = controlled_prep("0110100", 7, Joins::Neighbours);
        assert_eq!(w.iter().filter(|g| g.is_two_qubit()).count(), 5);
        assert!(w.iter().all(|g| match *g {
            Gate::Cx(a, b) => a == 7 || a.abs_diff(b) == 1,
            _ => true,
        }));
    }

    fn h(terms: &[(&str, f64)], n: usize) -> PauliSum {
        let mut h = PauliSum::new(n);
        for (t, c) in terms {
            h.add(PauliString::parse_factor_text(t).unwrap(), *c);
        }
        h
    }

    #[test]
    fn hopping_pairs_keep_zero_and_transverse_fields_do_not() {
        // XX + YY on one bond annihilates |00⟩ (Y|0⟩ = i|1⟩, so YY|00⟩ = −|11⟩ = −XX|00⟩).
        let g = vec![vec![
            (PauliString::parse_factor_text("X0 X1").unwrap(), 0.5),
            (PauliString::parse_factor_text("Y0 Y1").unwrap(), 0.5),
            (PauliString::parse_factor_text("Z0 Z1").unwrap(), 0.2),
        ]];
        assert_eq!(zero_state_check(&g), Ok(()));
        // XX − YY (a pairing term) does not conserve the number of ones.
        let g = vec![vec![
            (PauliString::parse_factor_text("X0 X1").unwrap(), 0.5),
            (PauliString::parse_factor_text("Y0 Y1").unwrap(), -0.5),
        ]];
        let e = zero_state_check(&g).unwrap_err();
        assert_eq!(e.term, "X0 X1");
        // A transverse field: the first X term is named.
        let tfim = h(&[("Z0 Z1", 1.0), ("X0", 0.7), ("X1", 0.7)], 2);
        let e = zero_state_check(&crate::formula::term_groups(&tfim)).unwrap_err();
        assert_eq!(e.term, "X0");
        assert!(e.reason.contains("flips qubit 0"), "{}", e.reason);
    }

    #[test]
    fn zero_phase_matches_the_simulated_eigenvalue() {
        let model = h(
            &[
                ("X0 X1", 0.5),
                ("Y0 Y1", 0.5),
                ("X1 X2", 0.3),
                ("Y1 Y2", 0.3),
                ("Z0 Z1", 0.2),
                ("Z2", -0.4),
            ],
            3,
        );
        let groups = crate::formula::term_groups(&model);
        zero_state_check(&groups).unwrap();
        let terms = groups.concat();
        for order in [
            crate::formula::Order::First,
            crate::formula::Order::Second,
            crate::formula::Order::Fourth,
        ] {
            let prog = crate::formula::evolution(&terms, order, 0.9, 3);
            let mut s = State::zero(3);
            crate::formula::apply_program(&mut s, &prog);
            let want = Complex64::from_polar(1.0, -zero_phase(&prog));
            assert!((s.amps[0] - want).norm() < 1e-12);
        }
    }
}
