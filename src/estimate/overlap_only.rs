//! Ground-energy estimate from the overlaps `S_k` alone: the matrix pencil method.
//!
//! In: `S_k = ⟨ψ|e^{−iH'k·dt}|ψ⟩` for `k = 0..K`, `dt`, and the noise level of the `S_k`.
//! Out: the modes `(E'_l, b_l)` of the model `S_k ≈ Σ_l b_l e^{−iE'_l k dt}` and the lowest
//! energy among the modes with a significant weight. Invariant: energies lie in the window
//! `(−π/dt, π/dt]` that the sampling rate resolves.
//!
//! Method: Hua & Sarkar, "Matrix pencil method for estimating parameters of exponentially
//! damped/undamped sinusoids in noise", IEEE Trans. Acoust. Speech Signal Process. 38, 814
//! (1990), in its SVD ("total least squares") form:
//! 1. samples `y_m`, `m = 0..M`: here the `2K − 1` values `S_{−(K−1)}..S_{K−1}`, since
//!    `S_{−k} = conj(S_k)` for Hermitian `H'` (extending the record this way is our choice; it
//!    doubles the pencil size for free);
//! 2. Hankel matrix `Y_{ij} = y_{i+j}` of size `(M − L) × (L + 1)` with pencil parameter
//!    `L = ⌊M/2⌋` (Hua & Sarkar recommend `M/3 ≤ L ≤ M/2` for noise robustness);
//! 3. `Y = UΣV†`; keep the `r` singular values above the noise level `τ`;
//! 4. the eigenvalues of `V₂†(V₁†)⁺` (the first / last `L` columns of the kept rows of `V†`)
//!    are the poles `z_l = e^{−iE'_l dt}`; amplitudes `b_l` by least squares on all samples.
//!
//! The ground-state estimate is the lowest `E'_l` among modes with `Re b_l` above
//! [`MIN_WEIGHT`] (a noise-spawned mode carries weight of the order of the noise).
//!
//! A pole only fixes `E'` modulo the period `P = 2π/dt`. We unwrap on the circle: the
//! significant modes (weight ≥ [`MIN_WEIGHT`]) occupy an arc, and the circle is cut in the
//! middle of the largest empty gap between them; the window `[cut, cut + P)` is then moved by
//! a multiple of `P` so that it contains `center`, the mean energy `⟨ψ|H'|ψ⟩` of the reference
//! state (computed from the plan for product states, else `h_0` or `−arg(S_1)/dt`). The mean
//! is a weighted average of the mode energies, so it lies inside their arc whenever the
//! weighted spectrum is narrower than `P`, even when the whole spectrum is wider.
//! Tolerance: exact for a noiseless signal with at most `L` modes (tested to 1e-9).

use super::krylov::at;
use nalgebra::DMatrix;
use num_complex::Complex64;

/// Smallest weight `Re b_l` a mode needs to count as a ground-state candidate (a choice of
/// ours, two orders above the 10⁶-shot noise; the reference state must overlap the ground
/// state at least this much).
pub const MIN_WEIGHT: f64 = 0.02;

/// Multiplier of the noise norm in the singular-value cut (see [`rank_cut`]).
pub const NOISE_FACTOR: f64 = 3.0;

/// One mode of the signal.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Mode {
    /// `E'` (no constant), from the pole's argument.
    pub energy: f64,
    /// `|z|`: 1 for an undamped mode.
    pub modulus: f64,
    /// Complex amplitude; `Re b ≈ |⟨E|ψ⟩|²` for a resolved eigenstate.
    pub weight: Complex64,
}

/// Singular-value cut `τ = 3·σ̄·2√max(rows, cols)`, with `σ̄` the noise of one sample
/// (complex, both parts), and a floor of `1e-10·σ_max` for exact data.
///
/// Why: a random `m×n` matrix with iid entries of size `σ̄` has spectral norm
/// `≈ σ̄(√m + √n)` (Bai–Yin law; Vershynin, *High-Dimensional Probability*, 2018, §4.4), here
/// at most `2σ̄√max(m,n)`; the factor 3 leaves a margin, as for the Krylov threshold.
pub fn rank_cut(sigma_sample: f64, rows: usize, cols: usize, sigma_max: f64) -> f64 {
    (NOISE_FACTOR * sigma_sample * 2.0 * (rows.max(cols) as f64).sqrt()).max(1e-10 * sigma_max)
}

/// Modes of the overlap series `s` (`s[0] = S_0`) sampled every `dt`, `σ̄` the noise of one
/// sample, energies unwrapped around `center` (see the module docs). Empty when fewer than 2
/// samples are given.
pub fn matrix_pencil(s: &[Complex64], dt: f64, sigma_sample: f64, center: f64) -> Vec<Mode> {
    let k = s.len();
    if k < 2 {
        return Vec::new();
    }
    let m = 2 * k - 1;
    let y: Vec<Complex64> = (0..m).map(|i| at(s, i as i64 - (k as i64 - 1))).collect();
    let l = m / 2;
    let rows = m - l;
    let hankel = DMatrix::from_fn(rows, l + 1, |i, j| y[i + j]);
    let svd = hankel.svd(false, true);
    let vt = svd.v_t.expect("requested");
    let smax = svd.singular_values.iter().copied().fold(0.0, f64::max);
    let cut = rank_cut(sigma_sample, rows, l + 1, smax);
    let mut order: Vec<usize> = (0..svd.singular_values.len()).collect();
    order.sort_by(|&a, &b| svd.singular_values[b].total_cmp(&svd.singular_values[a]));
    let r = order
        .iter()
        .filter(|&&i| svd.singular_values[i] > cut)
        .count()
        .min(l);
    if r == 0 {
        return Vec::new();
    }
    let v1h = DMatrix::from_fn(r, l, |a, j| vt[(order[a], j)]);
    let v2h = DMatrix::from_fn(r, l, |a, j| vt[(order[a], j + 1)]);
    let Ok(pinv) = v1h.pseudo_inverse(1e-12) else {
        return Vec::new();
    };
    let pencil = v2h * pinv;
    let Some(z) = pencil.schur().eigenvalues() else {
        return Vec::new();
    };
    // Amplitudes: least squares on y_m = Σ b_l z_l^{m−(K−1)}.
    let shift = k as i32 - 1;
    let vander = DMatrix::from_fn(m, r, |i, c| z[c].powi(i as i32 - shift));
    let rhs = DMatrix::from_fn(m, 1, |i, _| y[i]);
    let b = match vander.pseudo_inverse(1e-12) {
        Ok(p) => p * rhs,
        Err(_) => return Vec::new(),
    };
    let raw: Vec<f64> = (0..r).map(|c| -z[c].arg() / dt).collect();
    let weights: Vec<Complex64> = (0..r).map(|c| b[(c, 0)]).collect();
    let energies = unwrap_energies(&raw, &weights, dt, center);
    (0..r)
        .map(|c| Mode {
            energy: energies[c],
            modulus: z[c].norm(),
            weight: weights[c],
        })
        .collect()
}

/// Places energies known modulo `P = 2π/dt` in one window of length `P`: cut the circle in the
/// middle of the largest gap between significant modes, then shift the window to contain
/// `center`.
pub fn unwrap_energies(raw: &[f64], weights: &[Complex64], dt: f64, center: f64) -> Vec<f64> {
    let period = 2.0 * std::f64::consts::PI / dt;
    let wrap = |e: f64| e.rem_euclid(period);
    let mut marks: Vec<f64> = raw
        .iter()
        .zip(weights)
        .filter(|(_, w)| w.re >= MIN_WEIGHT)
        .map(|(e, _)| wrap(*e))
        .collect();
    if marks.is_empty() {
        marks = raw.iter().map(|e| wrap(*e)).collect();
    }
    marks.sort_by(f64::total_cmp);
    // Largest circular gap: between marks[i] and marks[i+1] (and from the last around).
    let mut cut = wrap(center + period / 2.0);
    if let (Some(&first), Some(&last)) = (marks.first(), marks.last()) {
        let mut best = (first + period - last, last);
        for pair in marks.windows(2) {
            if pair[1] - pair[0] > best.0 {
                best = (pair[1] - pair[0], pair[0]);
            }
        }
        cut = wrap(best.1 + best.0 / 2.0);
    }
    // Window [cut + mP, cut + (m+1)P) holding the centre.
    let m = ((center - cut) / period).floor();
    let start = cut + m * period;
    raw.iter()
        .map(|&e| start + (e - start).rem_euclid(period))
        .collect()
}

/// Lowest mode energy with weight above [`MIN_WEIGHT`]; `None` if no mode qualifies.
pub fn ground_energy(modes: &[Mode]) -> Option<f64> {
    modes
        .iter()
        .filter(|m| m.weight.re >= MIN_WEIGHT)
        .map(|m| m.energy)
        .min_by(f64::total_cmp)
}

/// Ground-energy estimates using the first `d` samples, for `d = 1..=K` (`None` for `d = 1`).
pub fn pencil_energies(
    s: &[Complex64],
    dt: f64,
    sigma_sample: f64,
    center: f64,
) -> Vec<Option<f64>> {
    (1..=s.len())
        .map(|d| ground_energy(&matrix_pencil(&s[..d], dt, sigma_sample, center)))
        .collect()
}

/// `−arg(S_1)/dt`: the mean energy of the reference state to first order in `dt` (0 without
/// `S_1`).
pub fn mean_energy_from_overlap(s: &[Complex64], dt: f64) -> f64 {
    match s.get(1) {
        Some(z) if z.norm() > 0.0 => -z.arg() / dt,
        _ => 0.0,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// `S_k = Σ w e^{−iEk·dt}` for `k = 0..len`.
    fn series(modes: &[(f64, f64)], dt: f64, len: usize) -> Vec<Complex64> {
        (0..len)
            .map(|k| {
                modes
                    .iter()
                    .map(|&(e, w)| Complex64::from_polar(w, -e * k as f64 * dt))
                    .sum()
            })
            .collect()
    }

    #[test]
    fn recovers_three_modes_exactly() {
        let dt = 0.3;
        let modes = [(-1.3, 0.5), (0.4, 0.3), (2.0, 0.2)];
        let s = series(&modes, dt, 6);
        let found = matrix_pencil(&s, dt, 0.0, 0.0);
        assert_eq!(found.len(), 3);
        for &(e, w) in &modes {
            let f = found
                .iter()
                .find(|m| (m.energy - e).abs() < 1e-9)
                .unwrap_or_else(|| panic!("mode {e} not found in {found:?}"));
            assert!((f.weight - Complex64::new(w, 0.0)).norm() < 1e-9);
            assert!((f.modulus - 1.0).abs() < 1e-9);
        }
        assert!((ground_energy(&found).unwrap() + 1.3).abs() < 1e-9);
    }

    #[test]
    fn energies_outside_the_nyquist_window_are_placed_around_the_center() {
        // Levels −11 and −8 (equal weights) with dt = 0.3: π/dt = 10.47, so a window centred at
        // 0 would alias −11 to +9.94; unwrapped around the mean energy −9.5 (recovered exactly
        // from arg S_1 for equal weights) both levels are found.
        let dt = 0.3;
        let modes = [(-11.0, 0.5), (-8.0, 0.5)];
        let s = series(&modes, dt, 5);
        let center = mean_energy_from_overlap(&s, dt);
        assert!((center + 9.5).abs() < 1e-12, "center {center}");
        let found = matrix_pencil(&s, dt, 0.0, center);
        assert!((ground_energy(&found).unwrap() + 11.0).abs() < 1e-9);
        // A centre off by a few units still selects the same window (the cut sits in the gap).
        let found = matrix_pencil(&s, dt, 0.0, -5.0);
        assert!((ground_energy(&found).unwrap() + 11.0).abs() < 1e-9);
        // With h_0 known (krylov plans) the centre may lie outside (−π/dt, π/dt].
        let far: Vec<Complex64> = s
            .iter()
            .enumerate()
            .map(|(k, x)| x * Complex64::from_polar(1.0, 6.0 * k as f64 * dt))
            .collect();
        let found = matrix_pencil(&far, dt, 0.0, -15.5);
        assert!((ground_energy(&found).unwrap() + 17.0).abs() < 1e-9);
    }

    #[test]
    fn ignores_modes_below_the_weight_floor() {
        let modes = [
            Mode {
                energy: -5.0,
                modulus: 1.0,
                weight: Complex64::new(0.001, 0.0),
            },
            Mode {
                energy: -1.0,
                modulus: 1.0,
                weight: Complex64::new(0.6, 0.0),
            },
        ];
        assert_eq!(ground_energy(&modes), Some(-1.0));
    }
}
