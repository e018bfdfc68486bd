mod estimate_support;
use estimate_support::*;
use phasewright::estimate::expect::ReadTable;

#[test]
fn explore() {
    let h = tfim(3, 1.0, 0.7, 0.2);
    let camp = campaign(&h, &["+++"], Kind::Krylov, 0.35, 4);
    let nc = camp.plan.circuits.len();
    let mut cov = vec![0usize; nc];
    let mut zs = vec![Vec::new(); nc];
    for seed in 0..400u64 {
        let counts = camp.sample(4000, 1000 + seed);
        let table = ReadTable::new(&camp.plan, &counts.circuits[..]);
        let _ = table;
        for (ci, c) in camp.plan.circuits.iter().enumerate() {
            let read = &c.reads[0];
            let mask = read.bits.iter().fold(0u128, |m, &b| m | 1 << b);
            let exact = camp.exact_read(ci, mask);
            let o: Vec<u128> = counts.circuits[ci].outcomes.iter().map(|x| x.0).collect();
            let w: Vec<u64> = counts.circuits[ci].outcomes.iter().map(|x| x.1).collect();
            let (m, n) = phasewright::estimate::expect::parity_expectation(&o, &w, mask);
            let se = phasewright::estimate::expect::parity_std_error(m, n);
            if (m - exact).abs() <= 2.0 * se { cov[ci] += 1; }
            zs[ci].push((m-exact)/ (1.0-exact*exact).max(1e-12).sqrt()*(4000f64).sqrt());
        }
    }
    for ci in 0..nc {
        let z = &zs[ci];
        let mean = z.iter().sum::<f64>()/z.len() as f64;
        let var = z.iter().map(|x| (x-mean).powi(2)).sum::<f64>()/z.len() as f64;
        println!("{} read0 {:?} cov {:.3} zmean {mean:.3} zvar {var:.3} probs {:?}", camp.plan.circuits[ci].id, camp.plan.circuits[ci].reads[0].target, cov[ci] as f64/400.0, camp.circuits[ci].probs.iter().map(|p| format!("{p:.3}")).collect::<Vec<_>>());
    }
}
