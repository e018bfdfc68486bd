//! The accuracy survey of the final answer (`estimate`'s `E ± σ_stat ± σ_sys`): eight models
//! with good references (2×3 Ising, XXZ-6, Hubbard-4, random-5, Ising-8, Heisenberg-6, H2,
//! H4), 24 seeds of 10⁶ shots per circuit, overlap campaigns of the compiled second-order
//! formula (ideal Hadamard tests, tests/estimate_support), against exact ground energies by
//! dense diagonalisation. Prints per model: the ground-state weight of the reference, the
//! coverage of the ±2σ_total interval, the median and maximum |error|, and the typical σ's.
//!
//! Targets (issue figures): coverage ≥ 0.90 for every model; median |error| ≤ 1.6e-3 (1 kcal/mol
//! ≈ 1.6 mHa, the customary chemical accuracy) for ≥ 6 of the 8. Run:
//! `cargo bench --bench trust_survey` (SEEDS=n to change the seed count, SEED0=s for the first
//! seed: the recorded survey uses seeds 0..24, development used SEED0=100 so that nothing was
//! tuned on the recorded seeds; MODELS=a,b to run some models; SCAN=1 prints every seed's
//! error and the scan it chose from).

#[path = "../tests/estimate_support/mod.rs"]
mod estimate_support;

use estimate_support::*;
use phasewright::estimate::{analyse, Analysis, Config};

fn main() {
    let seeds: u64 = std::env::var("SEEDS")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(24);
    let seed0: u64 = std::env::var("SEED0")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(0);
    let only: Option<Vec<String>> = std::env::var("MODELS")
        .ok()
        .map(|s| s.split(',').map(str::to_string).collect());
    let show_scan = std::env::var("SCAN").is_ok_and(|s| s == "1");
    let (mut met, mut covered_models, mut ran) = (0, 0, 0);
    println!(
        "{:<13} {:>6} {:>7} {:>9} {:>9} {:>9} {:>9} {:>9}",
        "model", "weight", "cover", "med|err|", "max|err|", "σ_stat", "σ_sys", "shift"
    );
    for m in survey_models() {
        if only
            .as_ref()
            .is_some_and(|o| !o.iter().any(|x| x == m.name))
        {
            continue;
        }
        let e0 = ground_energy(&m.h);
        let w = ground_weight(&m.h, &m.state);
        let camp = campaign_formula(
            &m.h,
            &[m.state.as_str()],
            Kind::Overlap,
            m.dt,
            m.points,
            Some((m.order, m.steps)),
        );
        let mut errs = Vec::new();
        let mut covered = 0;
        let (mut st, mut sy, mut shift) = (Vec::new(), Vec::new(), 0.0);
        for seed in seed0..seed0 + seeds {
            let counts = camp.sample(1_000_000, 1000 + seed);
            let cfg = Config {
                bootstrap: 100,
                seed,
                ..Config::default()
            };
            let Ok(Analysis::Energies(r)) = analyse(&camp.plan, &counts, &cfg) else {
                panic!("{}: no energies", m.name)
            };
            let a = r.answer.expect("an answer");
            let err = a.energy - e0;
            if show_scan {
                println!(
                    "  seed {seed}: err {err:+.3e}  d {} ε {:.2e}  σ_stat {:.2e} σ_sys {:.2e}",
                    a.dimension, a.threshold, a.sigma_stat, a.sigma_sys
                );
                for row in &a.scan {
                    println!(
                        "    d {:>2} ε {:.2e} kept {:>2?} err {:>+10.3e} σ {:>9.2e} τ {:>9.2e} κ {:>9.2e}",
                        row.dimension,
                        row.threshold,
                        row.kept.unwrap_or(0),
                        row.energy.map_or(f64::NAN, |e| e - e0),
                        row.sigma_stat.unwrap_or(f64::NAN),
                        row.threshold_sensitivity.unwrap_or(f64::NAN),
                        row.unconverged.unwrap_or(f64::NAN)
                    );
                }
            }
            if err.abs() <= 2.0 * a.sigma_total() {
                covered += 1;
            }
            errs.push(err.abs());
            st.push(a.sigma_stat);
            sy.push(a.sigma_sys);
            shift = a.trotter_correction.unwrap_or(0.0);
        }
        let med = |v: &mut Vec<f64>| {
            v.sort_by(|a, b| a.total_cmp(b));
            v[v.len() / 2]
        };
        let max = errs.iter().copied().fold(0.0, f64::max);
        let med_err = med(&mut errs);
        if med_err <= 1.6e-3 {
            met += 1;
        }
        ran += 1;
        if covered as f64 >= 0.9 * seeds as f64 {
            covered_models += 1;
        }
        println!(
            "{:<13} {:>6.3} {:>7.3} {:>9.2e} {:>9.2e} {:>9.2e} {:>9.2e} {:>+9.2e}",
            m.name,
            w,
            covered as f64 / seeds as f64,
            med_err,
            max,
            med(&mut st),
            med(&mut sy),
            shift
        );
    }
    println!(
        "models with median |error| ≤ 1.6e-3: {met} of {ran}; coverage ≥ 0.90: {covered_models} \
         of {ran} (seeds {seed0}..{}, 10^6 shots)",
        seed0 + seeds
    );
}
