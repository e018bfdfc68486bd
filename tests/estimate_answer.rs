//! The final answer (`estimate`'s recommended dimension, threshold and `± σ_stat ± σ_sys`) on
//! the survey models, against exact ground energies from dense diagonalisation.

mod estimate_support;

use estimate_support::*;
use phasewright::estimate::*;

#[test]
fn survey_prints_figures() {
    for m in survey_models() {
        let e0 = ground_energy(&m.h);
        let w = ground_weight(&m.h, &m.state);
        let camp = campaign_formula(&m.h, &[m.state.as_str()], Kind::Overlap, m.dt, m.points, Some((m.order, m.steps)));
        let mut line = format!("{:<13} w={w:.3} dt={:.3}", m.name, m.dt);
        let mut cover = 0;
        let seeds = 4;
        for seed in 0..seeds {
            let counts = camp.sample(1_000_000, seed);
            let cfg = Config { bootstrap: 60, seed, ..Config::default() };
            let Analysis::Energies(r) = analyse(&camp.plan, &counts, &cfg).unwrap() else { panic!() };
            let a = r.answer.unwrap();
            let err = a.energy - e0;
            if err.abs() <= 2.0 * a.sigma_total() { cover += 1; }
            line += &format!(" | d{} err {:+.1e} st {:.1e} sy {:.1e} (tr {:.1e} conv {:.1e} thr {:.1e} corr {:+.1e} b {:.1e})",
                a.dimension, err, a.sigma_stat, a.sigma_sys, a.trotter_sigma, a.unconverged, a.threshold_sensitivity, a.trotter_correction.unwrap_or(0.0), a.trotter_bound);
        }
        eprintln!("{line} cover {cover}/{seeds}");
    }
}

#[test]
fn diag_random5() {
    let m = survey_models().into_iter().find(|m| m.name == "random-5").unwrap();
    let e0 = ground_energy(&m.h);
    let psi = product_state(&m.state);
    let s: Vec<num_complex::Complex64> = (0..m.points).map(|k| psi.dotc(&trotter_evolve(&m.h, &psi, m.dt, k, m.order, m.steps))).collect();
    let sp = phasewright::sim::exact::spectrum(&m.h);
    eprintln!("spectrum low {:?}", &sp.values[..6]);
    let corr = phasewright::estimate::trotter::computed_shift(&{let mut h=m.h.clone(); h.constant=0.0; h}, m.order, m.steps, m.dt).unwrap();
    for eps in [1e-10, 1e-6, 1e-4, 1e-3] {
        let v: Vec<String> = (1..m.points).map(|d| krylov::unitary_ritz(&s, m.dt, d, eps, 0.0).map_or("-".into(), |r| format!("{:+.1e}", r.energy + m.h.constant - corr - e0))).collect();
        eprintln!("eps {eps:e}: {}", v.join(" "));
    }
}
