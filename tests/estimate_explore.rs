mod estimate_support;
use estimate_support::*;
use phasewright::estimate::*;

#[test]
fn explore() {
    let models: Vec<(&str, phasewright::pauli::PauliSum, &str)> = vec![
        ("tfim8+", tfim(8, 1.0, 1.0, 0.0), "++++++++"),
        ("heis6", heisenberg(6, 1.0, 0.0), "010101"),
    ];
    for (name, h, st) in &models {
        let e0 = ground_energy(h);
        println!("{name}");
        for dt in [0.2, 0.25, 0.3] {
            let kpts = 10;
            let camp = campaign(h, &[st], Kind::Krylov, dt, kpts);
            for shots in [1_000_000u64, 10_000_000, 100_000_000] {
                let counts: Vec<_> = (0..6).map(|seed| camp.sample(shots, seed)).collect();
                for alpha in [0.1, 0.3, 1.0, 3.0] {
                    let mut errs = Vec::new();
                    for c in &counts {
                        let cfg = Config { bootstrap: 0, ..Config::default() };
                        let table = phasewright::estimate::expect::ReadTable::new(&camp.plan, &c.circuits);
                        let q = table.evaluate(&phasewright::estimate::expect::ReadTable::weights_of(&c.circuits));
                        let s = expect::overlap_series(&q, 0, kpts).unwrap();
                        let coeffs: Vec<f64> = camp.plan.hamiltonian.terms.iter().map(|t| t.coeff).collect();
                        let hs = expect::energy_series(&q, &coeffs, 0, kpts).unwrap();
                        let sig = sample_noise(&s);
                        let eps: Vec<f64> = (1..=kpts).map(|d| alpha * sig * d as f64).collect();
                        let p = point_estimates(&s, Some(&hs), dt, &eps, sig);
                        let _ = cfg;
                        let best = p.last().unwrap().0.unwrap();
                        errs.push(format!("{:+.1e}/{}", best.energy - e0, best.kept));
                    }
                    println!("  dt={dt} shots={shots:.0e} alpha={alpha}: {}", errs.join(" "));
                }
            }
        }
    }
}
