//! Statevector simulation: gate kernels, Pauli rotations, expectation values, exact evolution.
//!
//! In: circuits of the IR, Pauli strings and sums, product states. Out: statevectors
//! (`Vec<Complex64>`, qubit k is bit k of the index) and numbers computed from them. Every
//! kernel touches each amplitude once per gate; above [`PAR_MIN_QUBITS`] qubits the passes are
//! split over cores with rayon, in fixed chunks, so results do not depend on the thread count.
//! `sim` never sees source text or input files; its one read is `/proc/meminfo`
//! ([`available_memory_bytes`]), so a simulation larger than the machine's memory is refused
//! before anything is allocated.
//!
//! Tolerance: kernels are exact up to floating-point rounding (≈1e-15 per gate, growing at most
//! linearly with the gate count), far below the 1e-9 compile-error budget.

pub mod exact;
pub mod shots;

use crate::circuit::{Circuit, Gate, Mat2};
use crate::pauli::PauliString;
use num_complex::Complex64;
use rayon::prelude::*;

/// Below this many qubits the kernels stay on one thread (parallel overhead dominates).
pub const PAR_MIN_QUBITS: usize = 14;

/// A pure state on `n` qubits.
#[derive(Clone, Debug, PartialEq)]
pub struct State {
    pub n: usize,
    pub amps: Vec<Complex64>,
}

/// Bytes needed for one statevector on `n` qubits.
pub fn statevector_bytes(n: usize) -> u128 {
    16u128 << n
}

/// Memory available for new allocations, from `/proc/meminfo` (None when unknown).
pub fn available_memory_bytes() -> Option<u128> {
    let text = std::fs::read_to_string("/proc/meminfo").ok()?;
    let line = text.lines().find(|l| l.starts_with("MemAvailable:"))?;
    let kib: u128 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kib * 1024)
}

/// What to do instead when a circuit is too wide to simulate.
pub const SIM_HINT: &str =
    "`verify --method tableau` proves wide circuits equivalent without simulating them";

/// Why a simulation was refused before allocating (bad input: a request beyond this machine).
#[derive(Clone, Debug, PartialEq)]
pub enum SimError {
    /// More than 40 qubits: the statevector index would not fit the kernels' words.
    TooWide { qubits: usize },
    /// The statevectors need more memory than `/proc/meminfo` reports available.
    OutOfMemory {
        qubits: usize,
        need_bytes: u128,
        available_bytes: u128,
    },
}

impl std::fmt::Display for SimError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let gib = |b: u128| b as f64 / (1u128 << 30) as f64;
        match self {
            SimError::TooWide { qubits } => write!(
                f,
                "a {qubits}-qubit statevector cannot be simulated on this machine ({SIM_HINT})"
            ),
            SimError::OutOfMemory {
                qubits,
                need_bytes,
                available_bytes,
            } => write!(
                f,
                "simulating {qubits} qubits needs about {:.1} GiB but only {:.1} GiB is available \
                 ({SIM_HINT})",
                gib(*need_bytes),
                gib(*available_bytes)
            ),
        }
    }
}

impl std::error::Error for SimError {}

impl crate::error::LayerError for SimError {
    fn blame(&self) -> crate::error::Blame {
        crate::error::Blame::Input(crate::diag::Code::UsageLimit)
    }
}

/// Checks that `copies` statevectors on `n` qubits fit in memory; the error says how much is needed.
pub fn check_fits(n: usize, copies: u128) -> Result<(), SimError> {
    if n > 40 {
        return Err(SimError::TooWide { qubits: n });
    }
    let need = statevector_bytes(n) * copies;
    if let Some(avail) = available_memory_bytes() {
        if need > avail {
            return Err(SimError::OutOfMemory {
                qubits: n,
                need_bytes: need,
                available_bytes: avail,
            });
        }
    }
    Ok(())
}

impl State {
    /// `|0…0⟩`.
    pub fn zero(n: usize) -> State {
        let mut amps = vec![Complex64::new(0.0, 0.0); 1usize << n];
        amps[0] = Complex64::new(1.0, 0.0);
        State { n, amps }
    }

    /// A normalised state with uniformly random real and imaginary parts in [−½, ½) before
    /// normalisation, from `rng` (seeded by the caller: reproducible test inputs).
    pub fn random(n: usize, rng: &mut impl rand::Rng) -> State {
        let mut amps: Vec<Complex64> = (0..1usize << n)
            .map(|_| Complex64::new(rng.gen::<f64>() - 0.5, rng.gen::<f64>() - 0.5))
            .collect();
        let norm = amps.iter().map(|a| a.norm_sqr()).sum::<f64>().sqrt();
        amps.iter_mut().for_each(|a| *a /= norm);
        State { n, amps }
    }

    /// `⟨self|other⟩`.
    pub fn inner(&self, other: &State) -> Complex64 {
        self.amps
            .iter()
            .zip(&other.amps)
            .map(|(a, b)| a.conj() * b)
            .sum()
    }

    pub fn norm_sqr(&self) -> f64 {
        self.amps.iter().map(|a| a.norm_sqr()).sum()
    }

    /// Applies a one-qubit matrix to qubit `q`.
    pub fn apply_mat2(&mut self, q: u32, m: &Mat2) {
        let stride = 1usize << q;
        let kernel = |chunk: &mut [Complex64]| {
            let (lo, hi) = chunk.split_at_mut(stride);
            for (a, b) in lo.iter_mut().zip(hi.iter_mut()) {
                let (x, y) = (*a, *b);
                *a = m[0][0] * x + m[0][1] * y;
                *b = m[1][0] * x + m[1][1] * y;
            }
        };
        if self.n >= PAR_MIN_QUBITS {
            self.amps.par_chunks_mut(2 * stride).for_each(kernel);
        } else {
            self.amps.chunks_mut(2 * stride).for_each(kernel);
        }
    }

    /// Applies any IR gate; measurements are ignored (callers read probabilities instead).
    pub fn apply(&mut self, g: &Gate) {
        match *g {
            Gate::Measure(..) => {}
            Gate::Cx(c, t) => self.permute(|b| if (b >> c) & 1 == 1 { b ^ (1 << t) } else { b }),
            Gate::Swap(a, b) => self.permute(|i| {
                let (x, y) = ((i >> a) & 1, (i >> b) & 1);
                if x != y {
                    i ^ (1 << a) ^ (1 << b)
                } else {
                    i
                }
            }),
            Gate::Cz(a, b) => {
                let mask = (1usize << a) | (1usize << b);
                self.for_each_indexed(|i, amp| {
                    if i & mask == mask {
                        *amp = -*amp;
                    }
                })
            }
            _ => {
                let m = g.matrix1().expect("one-qubit gate has a matrix");
                self.apply_mat2(g.qubits()[0], &m);
            }
        }
    }

    fn for_each_indexed(&mut self, f: impl Fn(usize, &mut Complex64) + Sync + Send) {
        if self.n >= PAR_MIN_QUBITS {
            self.amps
                .par_iter_mut()
                .enumerate()
                .for_each(|(i, a)| f(i, a));
        } else {
            self.amps.iter_mut().enumerate().for_each(|(i, a)| f(i, a));
        }
    }

    /// Applies a basis permutation that is an involution (`f(f(i)) = i`).
    fn permute(&mut self, f: impl Fn(usize) -> usize) {
        for i in 0..self.amps.len() {
            let j = f(i);
            if j > i {
                self.amps.swap(i, j);
            }
        }
    }

    /// Applies `exp(-i θ P)` in one pass: `cos θ·v − i sin θ·P v`, pairing `b` with `b ⊕ x`.
    ///
    /// With `P|b⟩ = i^{|x∧z|} (−1)^{|b∧z|} |b ⊕ x⟩`, the factor in front of the partner amplitude
    /// is `m·(−1)^{|b∧z|}` with `m = −i sin θ · i^{|x∧z|}`, so each amplitude costs one parity,
    /// one select and two complex multiply-adds.
    pub fn apply_pauli_rotation(&mut self, p: &PauliString, theta: f64) {
        let (s, c) = theta.sin_cos();
        debug_assert!(p.span() <= 64, "statevectors index qubits 0..64");
        let z = p.z.low_u64() as usize;
        let x = p.x.low_u64();
        let odd = move |b: usize| (b & z).count_ones() & 1 == 1;
        if x == 0 {
            // Diagonal: P|b⟩ = ±|b⟩, so the amplitude is multiplied by e^{∓iθ}.
            let f = [Complex64::new(c, -s), Complex64::new(c, s)];
            self.for_each_indexed(|b, a| *a *= f[odd(b) as usize]);
            return;
        }
        let m = Complex64::new(0.0, -s) * crate::pauli::i_pow(p.y_count() as i64);
        let mm = [m, -m];
        let h = 63 - x.leading_zeros();
        let half = 1usize << h;
        let xlow = (x as usize) & (half - 1);
        let kernel = |(k, chunk): (usize, &mut [Complex64])| {
            let base = k * 2 * half;
            let (lo, hi) = chunk.split_at_mut(half);
            for i in 0..half {
                let j = i ^ xlow;
                if i > j {
                    continue;
                }
                // Pairs (base+i, base+half+j) and, when j ≠ i, (base+j, base+half+i): each
                // low index b0 (bit h clear) with its partner b1 = b0 ⊕ x.
                for (li, hj) in [(i, j), (j, i)] {
                    let (b0, b1) = (base + li, base + half + hj);
                    let (v0, v1) = (lo[li], hi[hj]);
                    // (P v)[b0] = phase(b1)·v[b1], (P v)[b1] = phase(b0)·v[b0].
                    lo[li] = c * v0 + mm[odd(b1) as usize] * v1;
                    hi[hj] = c * v1 + mm[odd(b0) as usize] * v0;
                    if li == hj {
                        break;
                    }
                }
            }
        };
        if self.n >= PAR_MIN_QUBITS {
            self.amps
                .par_chunks_mut(2 * half)
                .enumerate()
                .for_each(kernel);
        } else {
            self.amps.chunks_mut(2 * half).enumerate().for_each(kernel);
        }
    }

    /// `P|self⟩` as a new state.
    pub fn pauli_applied(&self, p: &PauliString) -> State {
        let mut out = vec![Complex64::new(0.0, 0.0); self.amps.len()];
        for (b, a) in self.amps.iter().enumerate() {
            let (ph, b2) = p.apply_to_basis(b as u64);
            out[b2 as usize] = ph * a;
        }
        State {
            n: self.n,
            amps: out,
        }
    }

    /// `⟨Π_{q ∈ mask} Z_q⟩`.
    pub fn expect_z_mask(&self, mask: u64) -> f64 {
        let f = |(b, a): (usize, &Complex64)| {
            let p = a.norm_sqr();
            if (b as u64 & mask).count_ones().is_multiple_of(2) {
                p
            } else {
                -p
            }
        };
        if self.n >= PAR_MIN_QUBITS {
            self.amps.par_iter().enumerate().map(f).sum()
        } else {
            self.amps.iter().enumerate().map(f).sum()
        }
    }

    /// Probability of every basis state.
    pub fn probabilities(&self) -> Vec<f64> {
        self.amps.iter().map(|a| a.norm_sqr()).collect()
    }
}

/// Runs the unitary part of a circuit on `init` (measurements skipped, global phase applied).
pub fn run(c: &Circuit, init: State) -> State {
    let mut s = init;
    for g in c.unitary_gates() {
        s.apply(g);
    }
    if c.global_phase != 0.0 {
        let ph = Complex64::from_polar(1.0, c.global_phase);
        s.amps.iter_mut().for_each(|a| *a *= ph);
    }
    s
}

/// Probability distribution over the measured classical bits (bit 0 of the returned index is
/// classical bit 0). Unmeasured qubits are traced out.
pub fn measured_distribution(c: &Circuit, s: &State) -> Vec<f64> {
    let meas = c.measurements();
    let mut out = vec![0.0; 1usize << c.num_clbits];
    for (b, a) in s.amps.iter().enumerate() {
        let p = a.norm_sqr();
        if p == 0.0 {
            continue;
        }
        let mut k = 0usize;
        for &(q, bit) in &meas {
            if (b >> q) & 1 == 1 {
                k |= 1 << bit;
            }
        }
        out[k] += p;
    }
    out
}

/// The unitary of a small circuit as columns `U|b⟩` (global phase included); for tests.
pub fn unitary_columns(c: &Circuit) -> Vec<State> {
    (0..1usize << c.num_qubits)
        .map(|b| {
            let mut s = State::zero(c.num_qubits);
            s.amps[0] = Complex64::new(0.0, 0.0);
            s.amps[b] = Complex64::new(1.0, 0.0);
            run(c, s)
        })
        .collect()
}

/// Largest entry-wise difference between the unitaries of two circuits on the same qubits.
pub fn unitary_distance(a: &Circuit, b: &Circuit) -> f64 {
    let ua = unitary_columns(a);
    let ub = unitary_columns(b);
    ua.iter()
        .zip(&ub)
        .flat_map(|(x, y)| x.amps.iter().zip(&y.amps).map(|(p, q)| (p - q).norm()))
        .fold(0.0, f64::max)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::pauli::{Pauli, PauliSum};

    fn random_state(n: usize, seed: u64) -> State {
        use rand::SeedableRng;
        State::random(n, &mut rand_chacha::ChaCha8Rng::seed_from_u64(seed))
    }

    #[test]
    fn pauli_rotation_matches_cos_minus_i_sin_times_p() {
        // exp(-iθP) = cos θ I − i sin θ P for any P with P² = I.
        for n in [3usize, 5] {
            for seed in 0..20u64 {
                use rand::{Rng, SeedableRng};
                let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
                let mask = (1u64 << n) - 1;
                let p = PauliString::from_masks(rng.gen::<u64>() & mask, rng.gen::<u64>() & mask);
                let theta = rng.gen::<f64>() * 3.0 - 1.5;
                let v = random_state(n, seed + 100);
                let mut h = PauliSum::new(n);
                h.add(p.clone(), 1.0);
                let pv = if p.is_identity() {
                    v.amps.clone()
                } else {
                    h.apply(&v.amps)
                };
                let want: Vec<Complex64> = v
                    .amps
                    .iter()
                    .zip(&pv)
                    .map(|(a, b)| a * theta.cos() - Complex64::new(0.0, theta.sin()) * b)
                    .collect();
                let mut got = v.clone();
                got.apply_pauli_rotation(&p, theta);
                let err = got
                    .amps
                    .iter()
                    .zip(&want)
                    .map(|(a, b)| (a - b).norm())
                    .fold(0.0, f64::max);
                assert!(err < 1e-12, "P={} θ={theta} err={err}", p.to_letters(n));
            }
        }
    }

    #[test]
    fn parallel_rotation_kernel_matches_the_formula() {
        // At PAR_MIN_QUBITS the rayon path runs; compare with cos θ v − i sin θ P v.
        let n = PAR_MIN_QUBITS;
        let v = random_state(n, 7);
        let p = PauliString::from_factors(&[(0, Pauli::Y), (5, Pauli::X), (n - 1, Pauli::Z)]).1;
        let mut got = v.clone();
        got.apply_pauli_rotation(&p, 0.37);
        let mut h = PauliSum::new(n);
        h.add(p, 1.0);
        let pv = h.apply(&v.amps);
        let err = got
            .amps
            .iter()
            .zip(v.amps.iter().zip(&pv))
            .map(|(g, (x, y))| {
                (g - (x * 0.37f64.cos() - Complex64::new(0.0, 0.37f64.sin()) * y)).norm()
            })
            .fold(0.0, f64::max);
        assert!(err < 1e-12, "err={err}");
    }

    #[test]
    fn circuits_too_large_for_memory_are_refused_with_the_size_needed() {
        assert!(check_fits(10, 2).is_ok());
        let too_many = check_fits(41, 2).unwrap_err().to_string();
        assert!(too_many.contains("41-qubit"), "{too_many}");
        // 2 × 2^38 amplitudes × 16 bytes = 8 TiB: more than any machine this runs on.
        let too_big = check_fits(38, 2).unwrap_err().to_string();
        assert!(too_big.contains("needs about 8192.0 GiB"), "{too_big}");
    }

    #[test]
    fn gate_kernels_match_dense_application() {
        let v = random_state(3, 3);
        for g in [
            Gate::H(1),
            Gate::Sx(2),
            Gate::U(0, 0.3, -0.2, 1.4),
            Gate::Cx(2, 0),
            Gate::Cz(0, 1),
            Gate::Swap(0, 2),
        ] {
            let mut s = v.clone();
            s.apply(&g);
            // Reference: build the action on basis states directly.
            let mut want = vec![Complex64::new(0.0, 0.0); 8];
            for b in 0..8usize {
                let a = v.amps[b];
                match g {
                    Gate::Cx(c, t) => want[if (b >> c) & 1 == 1 { b ^ (1 << t) } else { b }] += a,
                    Gate::Cz(x, y) => {
                        want[b] += if (b >> x) & 1 == 1 && (b >> y) & 1 == 1 {
                            -a
                        } else {
                            a
                        }
                    }
                    Gate::Swap(x, y) => {
                        let (bx, by) = ((b >> x) & 1, (b >> y) & 1);
                        let nb = (b & !(1 << x) & !(1 << y)) | (by << x) | (bx << y);
                        want[nb] += a
                    }
                    _ => {
                        let q = g.qubits()[0] as usize;
                        let m = g.matrix1().unwrap();
                        let bit = (b >> q) & 1;
                        for out in 0..2usize {
                            want[(b & !(1 << q)) | (out << q)] += m[out][bit] * a;
                        }
                    }
                }
            }
            let err = s
                .amps
                .iter()
                .zip(&want)
                .map(|(x, y)| (x - y).norm())
                .fold(0.0, f64::max);
            assert!(err < 1e-14, "{g:?}");
        }
    }
}
