//! The circuit IR: the one currency between synthesis, routing, lowering, emission and simulation.
//!
//! In: gates appended by the synthesis passes (or read back from OpenQASM 3). Out: a flat gate
//! list over `num_qubits` qubits and `num_clbits` classical bits, plus an exact `global_phase`
//! (radians) so that passes which change the phase of the whole circuit (lowering, fusion) stay
//! equal as unitaries, not merely up to phase. Invariants are checked by [`verify::verify_ir`].
//!
//! Gate semantics follow the OpenQASM 3 standard library (`stdgates.inc`, v3.0 and later):
//! `rz(φ) = exp(-iφZ/2)`, `rx`, `ry` likewise, `sx = √X` (not `rx(π/2)`, which differs by
//! `e^{-iπ/4}`), and the built-in `U(θ,φ,λ) = [[cos θ/2, −e^{iλ} sin θ/2], [e^{iφ} sin θ/2,
//! e^{i(φ+λ)} cos θ/2]]`. `cx` has its control first.

pub mod cancel;
pub mod metrics;
pub mod schedule;
pub mod verify;

use num_complex::Complex64;

/// A qubit index in a circuit (logical before routing, physical after; a routed and lowered
/// circuit is held as a [`crate::route::DeviceCircuit`]).
pub type Qubit = u32;

/// One operation of the IR.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Gate {
    H(Qubit),
    X(Qubit),
    Y(Qubit),
    Z(Qubit),
    S(Qubit),
    Sdg(Qubit),
    Sx(Qubit),
    Sxdg(Qubit),
    Rz(Qubit, f64),
    Rx(Qubit, f64),
    Ry(Qubit, f64),
    /// OpenQASM 3 built-in `U(θ, φ, λ)`.
    U(Qubit, f64, f64, f64),
    /// `cx control, target`.
    Cx(Qubit, Qubit),
    Cz(Qubit, Qubit),
    Swap(Qubit, Qubit),
    /// `bit = measure qubit` in the computational basis.
    Measure(Qubit, u32),
}

/// A 2×2 complex matrix, row-major: `m[row][col]`.
pub type Mat2 = [[Complex64; 2]; 2];

impl Gate {
    /// The OpenQASM 3 name (`U` for the built-in general rotation).
    pub fn name(&self) -> &'static str {
        match self {
            Gate::H(_) => "h",
            Gate::X(_) => "x",
            Gate::Y(_) => "y",
            Gate::Z(_) => "z",
            Gate::S(_) => "s",
            Gate::Sdg(_) => "sdg",
            Gate::Sx(_) => "sx",
            Gate::Sxdg(_) => "sxdg",
            Gate::Rz(..) => "rz",
            Gate::Rx(..) => "rx",
            Gate::Ry(..) => "ry",
            Gate::U(..) => "U",
            Gate::Cx(..) => "cx",
            Gate::Cz(..) => "cz",
            Gate::Swap(..) => "swap",
            Gate::Measure(..) => "measure",
        }
    }

    /// Qubits the gate acts on (control first for `cx`).
    pub fn qubits(&self) -> smallvec::SmallVec<[Qubit; 2]> {
        match *self {
            Gate::H(q)
            | Gate::X(q)
            | Gate::Y(q)
            | Gate::Z(q)
            | Gate::S(q)
            | Gate::Sdg(q)
            | Gate::Sx(q)
            | Gate::Sxdg(q)
            | Gate::Rz(q, _)
            | Gate::Rx(q, _)
            | Gate::Ry(q, _)
            | Gate::U(q, ..)
            | Gate::Measure(q, _) => smallvec::smallvec![q],
            Gate::Cx(a, b) | Gate::Cz(a, b) | Gate::Swap(a, b) => smallvec::smallvec![a, b],
        }
    }

    /// Angle parameters in OpenQASM order.
    pub fn params(&self) -> smallvec::SmallVec<[f64; 3]> {
        match *self {
            Gate::Rz(_, a) | Gate::Rx(_, a) | Gate::Ry(_, a) => smallvec::smallvec![a],
            Gate::U(_, t, p, l) => smallvec::smallvec![t, p, l],
            _ => smallvec::SmallVec::new(),
        }
    }

    pub fn is_two_qubit(&self) -> bool {
        matches!(self, Gate::Cx(..) | Gate::Cz(..) | Gate::Swap(..))
    }

    pub fn is_measure(&self) -> bool {
        matches!(self, Gate::Measure(..))
    }

    /// The same gate with every qubit sent through `f`.
    pub fn map_qubits(&self, f: impl Fn(Qubit) -> Qubit) -> Gate {
        match *self {
            Gate::H(q) => Gate::H(f(q)),
            Gate::X(q) => Gate::X(f(q)),
            Gate::Y(q) => Gate::Y(f(q)),
            Gate::Z(q) => Gate::Z(f(q)),
            Gate::S(q) => Gate::S(f(q)),
            Gate::Sdg(q) => Gate::Sdg(f(q)),
            Gate::Sx(q) => Gate::Sx(f(q)),
            Gate::Sxdg(q) => Gate::Sxdg(f(q)),
            Gate::Rz(q, a) => Gate::Rz(f(q), a),
            Gate::Rx(q, a) => Gate::Rx(f(q), a),
            Gate::Ry(q, a) => Gate::Ry(f(q), a),
            Gate::U(q, t, p, l) => Gate::U(f(q), t, p, l),
            Gate::Cx(a, b) => Gate::Cx(f(a), f(b)),
            Gate::Cz(a, b) => Gate::Cz(f(a), f(b)),
            Gate::Swap(a, b) => Gate::Swap(f(a), f(b)),
            Gate::Measure(q, c) => Gate::Measure(f(q), c),
        }
    }

    /// The exact inverse of a unitary gate (`None` for a measurement).
    pub fn inverse(&self) -> Option<Gate> {
        Some(match *self {
            Gate::S(q) => Gate::Sdg(q),
            Gate::Sdg(q) => Gate::S(q),
            Gate::Sx(q) => Gate::Sxdg(q),
            Gate::Sxdg(q) => Gate::Sx(q),
            Gate::Rz(q, a) => Gate::Rz(q, -a),
            Gate::Rx(q, a) => Gate::Rx(q, -a),
            Gate::Ry(q, a) => Gate::Ry(q, -a),
            Gate::U(q, t, p, l) => Gate::U(q, -t, -l, -p),
            Gate::Measure(..) => return None,
            g => g, // self-inverse: h x y z cx cz swap
        })
    }

    /// The 2×2 matrix of a one-qubit gate, exactly as `stdgates.inc` defines it.
    pub fn matrix1(&self) -> Option<Mat2> {
        let c = |re: f64, im: f64| Complex64::new(re, im);
        let o = c(0.0, 0.0);
        let l = c(1.0, 0.0);
        let r = std::f64::consts::FRAC_1_SQRT_2;
        Some(match *self {
            Gate::H(_) => [[c(r, 0.0), c(r, 0.0)], [c(r, 0.0), c(-r, 0.0)]],
            Gate::X(_) => [[o, l], [l, o]],
            Gate::Y(_) => [[o, c(0.0, -1.0)], [c(0.0, 1.0), o]],
            Gate::Z(_) => [[l, o], [o, -l]],
            Gate::S(_) => [[l, o], [o, c(0.0, 1.0)]],
            Gate::Sdg(_) => [[l, o], [o, c(0.0, -1.0)]],
            Gate::Sx(_) => [[c(0.5, 0.5), c(0.5, -0.5)], [c(0.5, -0.5), c(0.5, 0.5)]],
            Gate::Sxdg(_) => [[c(0.5, -0.5), c(0.5, 0.5)], [c(0.5, 0.5), c(0.5, -0.5)]],
            Gate::Rz(_, a) => [
                [Complex64::from_polar(1.0, -a / 2.0), o],
                [o, Complex64::from_polar(1.0, a / 2.0)],
            ],
            Gate::Rx(_, a) => {
                let (s, co) = (a / 2.0).sin_cos();
                [[c(co, 0.0), c(0.0, -s)], [c(0.0, -s), c(co, 0.0)]]
            }
            Gate::Ry(_, a) => {
                let (s, co) = (a / 2.0).sin_cos();
                [[c(co, 0.0), c(-s, 0.0)], [c(s, 0.0), c(co, 0.0)]]
            }
            Gate::U(_, t, p, la) => {
                let (s, co) = (t / 2.0).sin_cos();
                [
                    [c(co, 0.0), -Complex64::from_polar(s, la)],
                    [
                        Complex64::from_polar(s, p),
                        Complex64::from_polar(co, p + la),
                    ],
                ]
            }
            _ => return None,
        })
    }
}

/// A circuit: gates in program order over `num_qubits` qubits and `num_clbits` classical bits.
#[derive(Clone, Debug, PartialEq, Default)]
pub struct Circuit {
    pub num_qubits: usize,
    pub num_clbits: usize,
    pub gates: Vec<Gate>,
    /// Global phase in radians: the circuit's unitary is `e^{i·global_phase} · Π gates`.
    pub global_phase: f64,
}

impl Circuit {
    pub fn new(num_qubits: usize, num_clbits: usize) -> Circuit {
        Circuit {
            num_qubits,
            num_clbits,
            gates: Vec::new(),
            global_phase: 0.0,
        }
    }

    pub fn push(&mut self, g: Gate) {
        self.gates.push(g);
    }

    pub fn extend(&mut self, gs: impl IntoIterator<Item = Gate>) {
        self.gates.extend(gs);
    }

    /// The unitary part (every gate but the measurements), in order.
    pub fn unitary_gates(&self) -> impl Iterator<Item = &Gate> {
        self.gates.iter().filter(|g| !g.is_measure())
    }

    /// Measurements as `(qubit, bit)` pairs, in order.
    pub fn measurements(&self) -> Vec<(Qubit, u32)> {
        self.gates
            .iter()
            .filter_map(|g| match *g {
                Gate::Measure(q, b) => Some((q, b)),
                _ => None,
            })
            .collect()
    }
}

impl Circuit {
    /// The same circuit on only the qubits it touches, relabelled `0..m` in ascending order, and
    /// the map `new index → old index`. Untouched qubits stay in |0⟩ and never affect the result,
    /// so simulating the compact circuit is exact; it keeps device-sized circuits small.
    pub fn compacted(&self) -> (Circuit, Vec<Qubit>) {
        self.compacted_keeping(&[])
    }

    /// As [`Circuit::compacted`], also keeping the qubits in `keep` (touched or not).
    pub fn compacted_keeping(&self, keep: &[Qubit]) -> (Circuit, Vec<Qubit>) {
        let set: std::collections::BTreeSet<Qubit> = self
            .gates
            .iter()
            .flat_map(|g| g.qubits())
            .chain(keep.iter().copied())
            .collect();
        let old: Vec<Qubit> = set.into_iter().collect();
        let mut new_of =
            vec![Qubit::MAX; self.num_qubits.max(1 + *old.last().unwrap_or(&0) as usize)];
        for (i, &q) in old.iter().enumerate() {
            new_of[q as usize] = i as Qubit;
        }
        let gates = self
            .gates
            .iter()
            .map(|g| g.map_qubits(|q| new_of[q as usize]))
            .collect();
        (
            Circuit {
                num_qubits: old.len(),
                num_clbits: self.num_clbits,
                gates,
                global_phase: self.global_phase,
            },
            old,
        )
    }
}

/// The conjugate transpose `a†` of a 2×2 matrix.
/// The mirror image of a gate list: gates in reverse order, each replaced by the inverse of
/// itself with its angles negated (a Clifford gate by its inverse; `rz`, `rx`, `ry` kept as
/// they are; `U(θ, φ, λ)` by `U(θ, λ, φ)`); measurements dropped. If every angle of the list
/// is an odd function of a parameter `δ`, the mirror image is the list at `−δ`, inverted: a
/// symmetric Trotter step's mirror image is the same step as an operator.
pub fn mirror_gates(gates: &[Gate]) -> Vec<Gate> {
    gates
        .iter()
        .rev()
        .filter(|g| !g.is_measure())
        .map(|g| match *g {
            Gate::Rz(..) | Gate::Rx(..) | Gate::Ry(..) => *g,
            Gate::U(q, t, p, l) => Gate::U(q, t, l, p),
            _ => g.inverse().expect("a unitary gate has an inverse"),
        })
        .collect()
}

pub fn mat2_adjoint(a: &Mat2) -> Mat2 {
    [
        [a[0][0].conj(), a[1][0].conj()],
        [a[0][1].conj(), a[1][1].conj()],
    ]
}

/// Multiplies two 2×2 matrices: `a · b`.
pub fn mat2_mul(a: &Mat2, b: &Mat2) -> Mat2 {
    let mut m = [[Complex64::new(0.0, 0.0); 2]; 2];
    for (i, row) in m.iter_mut().enumerate() {
        for (j, cell) in row.iter_mut().enumerate() {
            *cell = a[i][0] * b[0][j] + a[i][1] * b[1][j];
        }
    }
    m
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(a: &Mat2, b: &Mat2) -> bool {
        (0..2).all(|i| (0..2).all(|j| (a[i][j] - b[i][j]).norm() < 1e-12))
    }

    #[test]
    fn inverses_multiply_to_identity() {
        let id: Mat2 = [
            [Complex64::new(1.0, 0.0), Complex64::new(0.0, 0.0)],
            [Complex64::new(0.0, 0.0), Complex64::new(1.0, 0.0)],
        ];
        for g in [
            Gate::H(0),
            Gate::S(0),
            Gate::Sx(0),
            Gate::Rz(0, 0.3),
            Gate::Rx(0, -1.2),
            Gate::Ry(0, 2.5),
            Gate::U(0, 0.4, 1.1, -0.7),
        ] {
            let m = g.matrix1().unwrap();
            let mi = g.inverse().unwrap().matrix1().unwrap();
            assert!(close(&mat2_mul(&m, &mi), &id), "{g:?}");
        }
    }

    #[test]
    fn sx_squared_is_x_and_rx_half_pi_differs_by_a_phase() {
        // OpenQASM 3 stdgates.inc: `sx = pow(0.5) @ x`, and rx(π/2) = e^{-iπ/4} sx.
        let sx = Gate::Sx(0).matrix1().unwrap();
        assert!(close(&mat2_mul(&sx, &sx), &Gate::X(0).matrix1().unwrap()));
        let rx = Gate::Rx(0, std::f64::consts::FRAC_PI_2).matrix1().unwrap();
        let ph = Complex64::from_polar(1.0, -std::f64::consts::FRAC_PI_4);
        let scaled = [
            [sx[0][0] * ph, sx[0][1] * ph],
            [sx[1][0] * ph, sx[1][1] * ph],
        ];
        assert!(close(&rx, &scaled));
    }
}
