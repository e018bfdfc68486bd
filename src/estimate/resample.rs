//! Binomial and multinomial draws, for the bootstrap (and for the simulated shots of tests).
//!
//! In: a seeded random-number generator, a trial count and probabilities. Out: counts whose
//! distribution is binomial / multinomial. Invariant: the counts of a multinomial draw add up
//! to `n`.
//!
//! Method: each binomial draw is `rand_distr::Binomial` (inversion for small `n·p`, the BTPE
//! rejection algorithm of Kachitvichyanukul & Schmeiser, Comm. ACM 31, 216 (1988), otherwise);
//! a multinomial draw is a chain of conditional binomials (Devroye, *Non-Uniform Random Variate
//! Generation*, 1986, §XI.1).

use rand::Rng;
use rand_distr::{Binomial, Distribution};

/// One draw from Binomial(n, p); `p` is clamped to `[0, 1]`.
pub fn binomial<R: Rng + ?Sized>(rng: &mut R, n: u64, p: f64) -> u64 {
    if n == 0 || p.is_nan() || p <= 0.0 {
        return 0;
    }
    if p >= 1.0 {
        return n;
    }
    Binomial::new(n, p)
        .expect("0 < p < 1 checked above")
        .sample(rng)
}

/// One draw from Multinomial(n, probs); `probs` need not be normalised (they are weights).
pub fn multinomial<R: Rng + ?Sized>(rng: &mut R, n: u64, weights: &[f64]) -> Vec<u64> {
    let mut out = vec![0u64; weights.len()];
    let mut rest_mass: f64 = weights.iter().sum();
    let mut rest_n = n;
    for (i, &w) in weights.iter().enumerate() {
        if rest_n == 0 {
            break;
        }
        if i + 1 == weights.len() || w >= rest_mass {
            out[i] = rest_n;
            rest_n = 0;
            break;
        }
        let x = binomial(rng, rest_n, (w / rest_mass).clamp(0.0, 1.0));
        out[i] = x;
        rest_n -= x;
        rest_mass -= w;
    }
    if rest_n > 0 {
        // Rounding left mass unassigned: give it to the heaviest weight (never reached in tests).
        let heaviest = (0..weights.len())
            .max_by(|&a, &b| weights[a].total_cmp(&weights[b]))
            .expect("non-empty");
        out[heaviest] += rest_n;
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;
    use rand_chacha::ChaCha8Rng;

    #[test]
    fn binomial_moments_match_np_and_npq() {
        let mut rng = ChaCha8Rng::seed_from_u64(7);
        for &(n, p) in &[(10u64, 0.3), (1000, 0.5), (1_000_000, 0.01), (50, 0.97)] {
            let draws = 20_000;
            let xs: Vec<f64> = (0..draws)
                .map(|_| binomial(&mut rng, n, p) as f64)
                .collect();
            let mean = xs.iter().sum::<f64>() / draws as f64;
            let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (draws - 1) as f64;
            let (m0, v0) = (n as f64 * p, n as f64 * p * (1.0 - p));
            // Mean within 5 standard errors; variance within 5% (its relative standard error
            // is ≈ √(2/20000) = 1%).
            assert!(
                (mean - m0).abs() < 5.0 * (v0 / draws as f64).sqrt(),
                "n={n} p={p}"
            );
            assert!(
                (var / v0 - 1.0).abs() < 0.05,
                "n={n} p={p}: var {var} vs {v0}"
            );
        }
    }

    #[test]
    fn small_binomial_matches_its_pmf() {
        // Binomial(4, 0.3): pmf 0.2401, 0.4116, 0.2646, 0.0756, 0.0081 (C(4,k) 0.3^k 0.7^(4-k)).
        let pmf = [0.2401, 0.4116, 0.2646, 0.0756, 0.0081];
        let mut rng = ChaCha8Rng::seed_from_u64(3);
        let mut hist = [0u64; 5];
        let draws = 200_000;
        for _ in 0..draws {
            hist[binomial(&mut rng, 4, 0.3) as usize] += 1;
        }
        for k in 0..5 {
            let f = hist[k] as f64 / draws as f64;
            let se = (pmf[k] * (1.0 - pmf[k]) / draws as f64).sqrt();
            assert!((f - pmf[k]).abs() < 5.0 * se, "k={k}: {f} vs {}", pmf[k]);
        }
    }

    #[test]
    fn multinomial_preserves_the_total() {
        let mut rng = ChaCha8Rng::seed_from_u64(11);
        let w = [0.5, 0.0, 0.25, 0.125, 0.125];
        for n in [0u64, 1, 17, 1_000_000] {
            let x = multinomial(&mut rng, n, &w);
            assert_eq!(x.iter().sum::<u64>(), n);
            assert_eq!(x[1], 0);
        }
    }
}
