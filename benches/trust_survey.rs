//! The accuracy survey of the final answer (`estimate`'s `E ± σ_stat ± σ_sys`): eight models
//! with good references (2×3 Ising, XXZ-6, Hubbard-4, random-5, Ising-8, Heisenberg-6, H2,
//! H4), 24 seeds of 10⁶ shots per circuit, overlap campaigns of the compiled second-order
//! formula (ideal Hadamard tests, tests/estimate_support), against exact ground energies by
//! dense diagonalisation. Prints per model: the ground-state weight of the reference, the
//! coverage of the ±2σ_total interval, the median and maximum |error|, and the typical σ's.
//!
//! Targets (issue figures): coverage ≥ 0.90 for every model; median |error| ≤ 1.6e-3 (1 kcal/mol
//! ≈ 1.6 mHa, the customary chemical accuracy) for ≥ 6 of the 8. Run:
//! `cargo bench --bench trust_survey` (SEEDS=n to change the seed count).

#[path = "../tests/estimate_support/mod.rs"]
mod estimate_support;

use estimate_support::*;
use phasewright::estimate::{analyse, Analysis, Config};

fn main() {
    let seeds: u64 = std::env::var("SEEDS")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(24);
    let mut met = 0;
    println!(
        "{:<13} {:>6} {:>7} {:>9} {:>9} {:>9} {:>9} {:>9}",
        "model", "weight", "cover", "med|err|", "max|err|", "σ_stat", "σ_sys", "shift"
    );
    for m in survey_models() {
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
        for seed in 0..seeds {
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
    println!("models with median |error| ≤ 1.6e-3: {met} of 8 ({seeds} seeds, 10^6 shots)");
}
