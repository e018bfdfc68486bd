mod estimate_support;
use estimate_support::*;
use phasewright::estimate::*;

#[test]
fn explore() {
    let models: Vec<(&str, phasewright::pauli::PauliSum, &str)> = vec![
        ("tfim8 h=0.5 |+>", tfim(8, 1.0, 0.5, 0.0), "++++++++"),
        ("tfim8 h=0.5 |0>", tfim(8, 1.0, 0.5, 0.0), "00000000"),
        ("tfim8 h=1 |+>", tfim(8, 1.0, 1.0, 0.0), "++++++++"),
        ("tfim8 h=2 |+>", tfim(8, 1.0, 2.0, 0.0), "++++++++"),
        ("heis6 neel", heisenberg(6, 1.0, 0.0), "010101"),
    ];
    for (name, h, st) in &models {
        let e0 = ground_energy(h);
        let ex = Exact::new(h);
        let psi = product_state(st);
        let c = ex.vectors.adjoint() * &psi;
        let p0: f64 = (0..c.len())
            .filter(|&i| (ex.values[i] - ex.values[0]).abs() < 1e-9)
            .map(|i| c[i].norm_sqr())
            .sum();
        println!(
            "{name}: E0 {e0:.5} p0 {p0:.3} width {:.2} one_norm {}",
            ex.values.last().unwrap() - ex.values[0],
            h.one_norm()
        );
        for dt in [0.2, 0.25, 0.3, 0.35] {
            for k in [8usize, 10] {
                let camp = campaign(h, &[st], Kind::Krylov, dt, k);
                let (s, hk) = exact_series(h, st, dt, k);
                let nl = krylov::krylov_energies(&s, &hk, 1e-10)
                    .last()
                    .unwrap()
                    .unwrap()
                    .energy
                    - e0;
                let mut errs = Vec::new();
                let mut perrs = Vec::new();
                for seed in 0..6 {
                    let counts = camp.sample(1_000_000, seed);
                    let cfg = Config {
                        bootstrap: 0,
                        ..Config::default()
                    };
                    let Analysis::Energies(r) = analyse(&camp.plan, &counts, &cfg).unwrap() else {
                        panic!()
                    };
                    errs.push(r.rows.last().unwrap().krylov.unwrap() - e0);
                    perrs.push(
                        r.rows
                            .last()
                            .unwrap()
                            .pencil
                            .map(|p| p - e0)
                            .unwrap_or(f64::NAN),
                    );
                }
                let rms =
                    |v: &Vec<f64>| (v.iter().map(|x| x * x).sum::<f64>() / v.len() as f64).sqrt();
                let mx = |v: &Vec<f64>| v.iter().map(|x| x.abs()).fold(0.0, f64::max);
                println!("  dt={dt} K={k}: noiseless {nl:+.1e}  1e6 krylov rms {:.1e} max {:.1e} | pencil rms {:.1e} max {:.1e}", rms(&errs), mx(&errs), rms(&perrs), mx(&perrs));
            }
        }
    }
}
