//! Shot sampling: draw measurement outcomes from a circuit's exact output distribution.
//!
//! In: a probability vector over classical-bit patterns (index bit i = classical bit i), a shot
//! count and a seeded RNG. Out: counts per pattern. Sampling is exact multinomial, by the
//! conditional-binomial method: outcome i gets `Binomial(remaining shots, p_i / remaining mass)`
//! (e.g. Devroye, "Non-Uniform Random Variate Generation", 1986, §XI.1), which costs one
//! binomial draw per outcome instead of one draw per shot.

use rand::Rng;
use rand_distr::{Binomial, Distribution};

/// Mixes a distribution with the uniform one: `F·p + (1 − F)/2^m`, the outcome statistics of a
/// global depolarising channel of fidelity `F` applied before measurement (a crude model).
pub fn depolarise(p: &[f64], fidelity: f64) -> Vec<f64> {
    let u = 1.0 / p.len() as f64;
    p.iter()
        .map(|x| fidelity * x + (1.0 - fidelity) * u)
        .collect()
}

/// Draws `shots` outcomes; returns `(pattern, count)` for every pattern with a positive count,
/// in ascending pattern order.
pub fn sample_counts(p: &[f64], shots: u64, rng: &mut impl Rng) -> Vec<(usize, u64)> {
    let total: f64 = p.iter().sum();
    let mut remaining_mass = total;
    let mut remaining = shots;
    let mut out = Vec::new();
    for (i, &pi) in p.iter().enumerate() {
        if remaining == 0 {
            break;
        }
        if pi <= 0.0 {
            continue;
        }
        let q = (pi / remaining_mass).clamp(0.0, 1.0);
        let k = if q >= 1.0 {
            remaining
        } else {
            Binomial::new(remaining, q)
                .expect("probability in [0, 1]")
                .sample(rng)
        };
        remaining_mass -= pi;
        remaining -= k;
        if k > 0 {
            out.push((i, k));
        }
    }
    if remaining > 0 {
        // Rounding left some mass unassigned: give it to the most likely pattern.
        let best = p
            .iter()
            .enumerate()
            .max_by(|a, b| a.1.total_cmp(b.1))
            .map_or(0, |(i, _)| i);
        match out.iter_mut().find(|(i, _)| *i == best) {
            Some(e) => e.1 += remaining,
            None => {
                out.push((best, remaining));
                out.sort_unstable();
            }
        }
    }
    out
}

/// The bitstring of a pattern over `m` bits, classical bit 0 first (leftmost).
pub fn bitstring(pattern: usize, m: usize) -> String {
    (0..m)
        .map(|b| if (pattern >> b) & 1 == 1 { '1' } else { '0' })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;

    #[test]
    fn counts_sum_to_the_shots_and_follow_the_distribution() {
        let p = [0.1, 0.0, 0.6, 0.3];
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(5);
        let shots = 1_000_000u64;
        let c = sample_counts(&p, shots, &mut rng);
        assert_eq!(c.iter().map(|x| x.1).sum::<u64>(), shots);
        assert!(c.iter().all(|&(i, _)| i != 1));
        for &(i, k) in &c {
            // Binomial standard deviation √(N p (1 − p)); 5σ bound.
            let sd = (shots as f64 * p[i] * (1.0 - p[i])).sqrt();
            assert!(
                (k as f64 - shots as f64 * p[i]).abs() < 5.0 * sd,
                "pattern {i}: {k}"
            );
        }
        assert_eq!(bitstring(0b01, 3), "100");
    }

    #[test]
    fn depolarising_keeps_normalisation() {
        let q = depolarise(&[1.0, 0.0, 0.0, 0.0], 0.9);
        assert!((q.iter().sum::<f64>() - 1.0).abs() < 1e-15);
        assert!((q[0] - (0.9 + 0.1 / 4.0)).abs() < 1e-15);
    }
}
