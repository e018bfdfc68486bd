//! Checking a routed circuit against its logical original by simulation.
//!
//! In: the logical circuit and the [`Routed`] result (its circuit a
//! [`super::DeviceCircuit`]; [`placed_error`] is the same check on any circuit over the device's
//! sites, such as one routed but not yet lowered). Out: the largest amplitude error between
//! "run logically, then place by the final layout" and "place by the initial layout, then run
//! the routed circuit", over a set of input states; global phase included. The routed circuit is
//! first [`compact`]ed to the physical qubits it touches, so a 12-qubit circuit on a 100-qubit
//! device simulates on at most the touched qubits.
//!
//! Inputs: every computational basis state when the logical circuit has at most 5 qubits (so the
//! check is an exact unitary equality on the logical subspace), otherwise 8 seeded random states.

use super::{RouteError, Routed};
use crate::circuit::Circuit;
use crate::sim::{run, State};
use num_complex::Complex64;
use rand::SeedableRng;

/// Relabels a physical circuit onto the qubits it touches, ascending: returns the circuit on
/// `0..k` and `new → physical` (see [`Circuit::compacted`]).
pub fn compact(c: &Circuit) -> (Circuit, Vec<u32>) {
    c.compacted()
}

/// Largest simulated qubit count this check accepts.
pub const MAX_CHECK_QUBITS: usize = 20;

/// Places a logical state on compacted qubits: logical qubit `l` goes to `pos[l]`, others |0⟩.
fn embed(s: &State, pos: &[u32], k: usize) -> State {
    let mut out = State::zero(k);
    out.amps[0] = Complex64::new(0.0, 0.0);
    for (b, a) in s.amps.iter().enumerate() {
        let mut idx = 0usize;
        for (l, &p) in pos.iter().enumerate() {
            if (b >> l) & 1 == 1 {
                idx |= 1 << p;
            }
        }
        out.amps[idx] = *a;
    }
    out
}

/// Simulation error of a routing result (see the module header), or why it cannot be checked:
/// its measurements moved (a routing bug) or it is too wide to simulate.
pub fn routing_error(logical: &Circuit, routed: &Routed) -> Result<f64, RouteError> {
    placed_error(
        logical,
        routed.circuit.circuit(),
        &routed.initial_layout,
        &routed.final_layout,
    )
}

/// [`routing_error`] of `physical`, a circuit over device sites in any IR gates, that starts
/// from `initial_layout` and ends at `final_layout` (logical → physical).
pub fn placed_error(
    logical: &Circuit,
    physical: &Circuit,
    initial_layout: &[u32],
    final_layout: &[u32],
) -> Result<f64, RouteError> {
    let n = logical.num_qubits;
    let mut want_meas: Vec<(u32, u32)> = logical
        .measurements()
        .into_iter()
        .map(|(q, b)| (final_layout[q as usize], b))
        .collect();
    let mut got_meas = physical.measurements();
    want_meas.sort_unstable();
    got_meas.sort_unstable();
    if want_meas != got_meas {
        return Err(RouteError::MeasurementsDiffer {
            expected: want_meas,
            found: got_meas,
        });
    }
    let keep: Vec<u32> = initial_layout.iter().chain(final_layout).copied().collect();
    let (cc, new_to_phys) = physical.compacted_keeping(&keep);
    if cc.num_qubits > MAX_CHECK_QUBITS {
        return Err(RouteError::TooWideToCheck {
            qubits: cc.num_qubits,
        });
    }
    let new_of = |p: u32| new_to_phys.iter().position(|&x| x == p).expect("kept") as u32;
    let init: Vec<u32> = initial_layout.iter().map(|&p| new_of(p)).collect();
    let fin: Vec<u32> = final_layout.iter().map(|&p| new_of(p)).collect();
    let inputs: Vec<State> = if n <= 5 {
        (0..1usize << n)
            .map(|b| {
                let mut s = State::zero(n);
                s.amps[0] = Complex64::new(0.0, 0.0);
                s.amps[b] = Complex64::new(1.0, 0.0);
                s
            })
            .collect()
    } else {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(0x5eed);
        (0..8).map(|_| State::random(n, &mut rng)).collect()
    };
    let mut err: f64 = 0.0;
    for s in inputs {
        let want = embed(&run(logical, s.clone()), &fin, cc.num_qubits);
        let got = run(&cc, embed(&s, &init, cc.num_qubits));
        for (a, b) in want.amps.iter().zip(&got.amps) {
            err = err.max((a - b).norm());
        }
    }
    Ok(err)
}
