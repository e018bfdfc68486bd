//! Initial layout: where each logical qubit starts on the device.
//!
//! In: the terms of a Pauli sum (whether a Hadamard-test ancilla joins them), one connected
//! component of the coupling graph. Out: candidate layouts `layout[l] = physical qubit`, all
//! distinct and inside the component.
//!
//! The interaction weight `W[i][j]` says how many CNOTs between `i` and `j` a Trotter step is
//! expected to need: a term on support `S` (`|S| = w ≥ 2`) gets a ladder of `w − 1` CNOTs, spread
//! as `2/w` over each of its `w(w−1)/2` pairs; with an ancilla, the term's controlled `rz` meets
//! the ancilla on one support qubit, spread as `1/w` over `S`. A layout costs
//! `Σ_{i<j} W[i][j] · d(layout[i], layout[j])` (hop distance `d`), the quadratic-assignment form
//! of the placement problem. Candidates come from a greedy placement grown around the
//! component's centre (the ancilla, or the most interacting qubit, goes there first) and from
//! seeded random placements, each improved by simulated annealing and then first-improvement
//! local search (moves: a qubit to a free site, or an exchange of two qubits).
//! `route::plan_target` then picks among them by routing.
//!
//! Cost. The weights are sparse rows ([`Weights`]): a move's change of cost sums over the
//! moved qubits' partners only, and a site→qubit index finds a site's holder at once, so a
//! move costs `O(partners)` rather than `O(n)` (the dense version spent most of a 400-qubit
//! compile on 433 sites in local search). Greedy placement keeps each qubit's tie to the placed
//! ones up to date: `O(n² + n·|sites|·partners)` in all. Local search stops after 100 sweeps or
//! [`IMPROVE_BUDGET`] partner visits; annealing runs at most 200 000 moves.

use super::Ancilla;
use crate::device::Device;
use crate::pauli::PauliSum;
use rand::seq::SliceRandom;
use rand::SeedableRng;

const NONE: u32 = u32::MAX;

/// Interaction weights `W[i][j]` as sparse symmetric rows: for each qubit, its partners with a
/// non-zero weight, ascending. The ancilla's row is dense (it meets every term); the others hold
/// a few dozen partners even for 10⁵ terms, so the passes below cost per partner, not per qubit.
#[derive(Clone, Debug, PartialEq)]
pub struct Weights {
    rows: Vec<Vec<(u32, f64)>>,
}

impl Weights {
    /// Number of qubits (system plus ancilla).
    pub fn len(&self) -> usize {
        self.rows.len()
    }

    pub fn is_empty(&self) -> bool {
        self.rows.is_empty()
    }

    /// `W[i][j]` (0 for qubits that never meet).
    pub fn get(&self, i: usize, j: usize) -> f64 {
        let row = &self.rows[i];
        match row.binary_search_by_key(&(j as u32), |&(k, _)| k) {
            Ok(at) => row[at].1,
            Err(_) => 0.0,
        }
    }

    /// The partners of `i` with their weights, ascending.
    pub fn row(&self, i: usize) -> &[(u32, f64)] {
        &self.rows[i]
    }
}

/// Interaction weights over `h.num_qubits` system qubits plus, with [`Ancilla::Controls`], the
/// ancilla (last), tied to every qubit of every term it controls. Contributions are summed per
/// pair in term order, so the weights are the same on every run.
pub fn interaction_weights(h: &PauliSum, ancilla: Ancilla) -> Weights {
    let controls = ancilla.controls();
    let n = h.num_qubits + controls as usize;
    let mut triples: Vec<(u32, u32, f64)> = Vec::new();
    for p in h.terms.keys() {
        let support = p.support_qubits();
        let k = support.len() as f64;
        for (i, &a) in support.iter().enumerate() {
            for &b in &support[i + 1..] {
                triples.push((a as u32, b as u32, 2.0 / k));
                triples.push((b as u32, a as u32, 2.0 / k));
            }
            if controls {
                let anc = (n - 1) as u32;
                triples.push((a as u32, anc, 1.0 / k));
                triples.push((anc, a as u32, 1.0 / k));
            }
        }
    }
    // Stable: equal pairs keep term order, so each sum runs in the same order every time.
    triples.sort_by_key(|&(a, b, _)| (a, b));
    let mut rows: Vec<Vec<(u32, f64)>> = vec![Vec::new(); n];
    for (a, b, v) in triples {
        let row = &mut rows[a as usize];
        match row.last_mut() {
            Some((j, w)) if *j == b => *w += v,
            _ => row.push((b, v)),
        }
    }
    Weights { rows }
}

/// [`interaction_weights`] without the ancilla's ties to every term, plus an ancilla (the last
/// qubit) tied with weight 1 to each of `partners` only: the control-free Hadamard test, whose
/// ancilla meets just the qubits its controlled state preparation touches.
pub fn interaction_weights_with_partners(h: &PauliSum, partners: &[usize]) -> Weights {
    let mut w = interaction_weights(h, Ancilla::None);
    let anc = h.num_qubits as u32;
    let mut row = Vec::new();
    for &q in partners {
        // The ancilla's index is the largest, so each row stays sorted.
        w.rows[q].push((anc, 1.0));
        row.push((q as u32, 1.0));
    }
    w.rows.push(row);
    w
}

/// `Σ_{i<j} W[i][j] · d(layout[i], layout[j])`.
pub fn layout_cost(w: &Weights, layout: &[u32], dev: &Device) -> f64 {
    let mut c = 0.0;
    for (i, row) in w.rows.iter().enumerate() {
        for &(j, wij) in row {
            if (j as usize) > i {
                c += wij * dev.distance(layout[i], layout[j as usize]) as f64;
            }
        }
    }
    c
}

/// The qubit of `comp` with the smallest total distance to the others (lowest index on ties).
pub fn centre(comp: &[u32], dev: &Device) -> u32 {
    *comp
        .iter()
        .min_by_key(|&&p| {
            let total: u64 = comp.iter().map(|&q| dev.distance(p, q) as u64).sum();
            (total, p)
        })
        .expect("component is not empty")
}

/// Greedy placement: the ancilla (or the most interacting qubit) at the centre, then repeatedly
/// the unplaced qubit most tied to the placed ones, on the free site that costs least. The ties
/// to the placed qubits are kept up to date as qubits are placed (`O(n)` per placement plus the
/// new qubit's partners), and a site's cost sums over the qubit's placed partners only.
/// [`Ancilla::Controls`]: the ancilla (qubit `n − 1`) controls the step and goes first, at the
/// centre; [`Ancilla::None`]: the most interacting qubit goes first (an ancilla placed without
/// controlling the step is then an ordinary qubit of `w`).
pub fn greedy_layout(
    w: &Weights,
    n: usize,
    comp: &[u32],
    dev: &Device,
    ancilla: Ancilla,
) -> Vec<u32> {
    let c = centre(comp, dev);
    let total: Vec<f64> = (0..n)
        .map(|i| w.row(i).iter().map(|&(_, v)| v).sum())
        .collect();
    let first = if ancilla.controls() {
        n - 1
    } else {
        (0..n)
            .max_by(|&a, &b| total[a].total_cmp(&total[b]).then(b.cmp(&a)))
            .unwrap_or(0)
    };
    let mut layout = vec![u32::MAX; n];
    let mut free: Vec<u32> = comp.to_vec();
    let mut tie = vec![0.0f64; n];
    let place =
        |i: usize, p: u32, layout: &mut Vec<u32>, free: &mut Vec<u32>, tie: &mut Vec<f64>| {
            layout[i] = p;
            free.retain(|&f| f != p);
            for &(j, v) in w.row(i) {
                tie[j as usize] += v;
            }
        };
    place(first, c, &mut layout, &mut free, &mut tie);
    for _ in 1..n {
        let next = (0..n)
            .filter(|&i| layout[i] == u32::MAX)
            .max_by(|&a, &b| {
                tie[a]
                    .total_cmp(&tie[b])
                    .then(total[a].total_cmp(&total[b]))
                    .then(b.cmp(&a))
            })
            .expect("an unplaced qubit remains");
        let placed: Vec<(u32, f64)> = w
            .row(next)
            .iter()
            .filter(|&&(j, _)| layout[j as usize] != u32::MAX)
            .map(|&(j, v)| (layout[j as usize], v))
            .collect();
        let site_cost = |p: u32| -> f64 {
            placed
                .iter()
                .map(|&(site, v)| v * dev.distance(p, site) as f64)
                .sum()
        };
        let site = *free
            .iter()
            .min_by(|&&a, &&b| {
                site_cost(a)
                    .total_cmp(&site_cost(b))
                    .then(dev.distance(a, c).cmp(&dev.distance(b, c)))
                    .then(a.cmp(&b))
            })
            .expect("the component is large enough");
        place(next, site, &mut layout, &mut free, &mut tie);
    }
    layout
}

/// A uniformly random placement of `n` qubits on `comp`, from `seed`.
pub fn random_layout(n: usize, comp: &[u32], seed: u64) -> Vec<u32> {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    let mut sites = comp.to_vec();
    sites.shuffle(&mut rng);
    sites.truncate(n);
    sites
}

/// Partner visits that [`improve`] may spend (a sweep visits `|comp|` sites per qubit and each
/// qubit's partners at each); past it the layout is returned as it stands. About a second.
pub const IMPROVE_BUDGET: usize = 300_000_000;

/// The layout plus its inverse (site → logical qubit or `NONE`), and the move deltas.
struct Placement<'a> {
    w: &'a Weights,
    dev: &'a Device,
    layout: &'a mut [u32],
    holder: Vec<u32>,
}

impl Placement<'_> {
    fn new<'a>(w: &'a Weights, dev: &'a Device, layout: &'a mut [u32]) -> Placement<'a> {
        let mut holder = vec![NONE; dev.num_qubits];
        for (l, &p) in layout.iter().enumerate() {
            holder[p as usize] = l as u32;
        }
        Placement {
            w,
            dev,
            layout,
            holder,
        }
    }

    /// Cost of qubit `i` sitting at `p`, against its partners except `skip`.
    fn partial(&self, i: usize, p: u32, skip: u32) -> f64 {
        self.w
            .row(i)
            .iter()
            .filter(|&&(j, _)| j != skip)
            .map(|&(j, v)| v * self.dev.distance(p, self.layout[j as usize]) as f64)
            .sum()
    }

    /// Change of the layout cost if `i` moves to site `p` (exchanging with its holder, if any),
    /// and the holder.
    fn delta(&self, i: usize, p: u32) -> (f64, Option<usize>) {
        let from = self.layout[i];
        match self.holder[p as usize] {
            NONE => (self.partial(i, p, NONE) - self.partial(i, from, NONE), None),
            j => {
                let (iu, ju) = (i as u32, j);
                let j = j as usize;
                (
                    self.partial(i, p, ju) - self.partial(i, from, ju) + self.partial(j, from, iu)
                        - self.partial(j, p, iu),
                    Some(j),
                )
            }
        }
    }

    fn apply(&mut self, i: usize, p: u32, j: Option<usize>) {
        let from = self.layout[i];
        self.layout[i] = p;
        self.holder[p as usize] = i as u32;
        self.holder[from as usize] = NONE;
        if let Some(j) = j {
            self.layout[j] = from;
            self.holder[from as usize] = j as u32;
        }
    }

    fn visits(&self, i: usize, j: Option<usize>) -> usize {
        2 * (self.w.row(i).len() + j.map_or(0, |j| self.w.row(j).len())) + 1
    }
}

/// First-improvement local search over moves to free sites and exchanges of two qubits, up to
/// 100 sweeps and [`IMPROVE_BUDGET`] partner visits.
pub fn improve(w: &Weights, layout: &mut [u32], comp: &[u32], dev: &Device) {
    let n = layout.len();
    let mut pl = Placement::new(w, dev, layout);
    let mut spent = 0usize;
    for _sweep in 0..100 {
        let mut improved = false;
        for i in 0..n {
            for &p in comp {
                if p == pl.layout[i] {
                    continue;
                }
                let (d, j) = pl.delta(i, p);
                spent += pl.visits(i, j);
                if d < -1e-12 {
                    pl.apply(i, p, j);
                    improved = true;
                }
            }
            if spent > IMPROVE_BUDGET {
                return;
            }
        }
        if !improved {
            break;
        }
    }
}

/// Simulated annealing over the same moves as [`improve`] (Kirkpatrick, Gelatt & Vecchi,
/// "Optimization by simulated annealing", Science 220, 671 (1983)), seeded, then a final
/// [`improve`]. Geometric cooling from the mean uphill step of a random sample down to 1% of
/// it; about `200 · n · |comp|` moves, capped at 200 000. Keeps the best layout seen.
pub fn anneal(w: &Weights, layout: &mut [u32], comp: &[u32], dev: &Device, seed: u64) {
    use rand::Rng;
    let n = layout.len();
    if n < 2 || comp.len() < 2 {
        return;
    }
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    let mut cost = layout_cost(w, layout, dev);
    let best_layout = {
        let mut pl = Placement::new(w, dev, layout);
        let mut uphill = 0.0;
        let mut count = 0usize;
        for _ in 0..100 {
            let i = rng.gen_range(0..n);
            let p = comp[rng.gen_range(0..comp.len())];
            if p != pl.layout[i] {
                let (d, _) = pl.delta(i, p);
                if d > 0.0 {
                    uphill += d;
                    count += 1;
                }
            }
        }
        if count == 0 {
            None
        } else {
            let t0 = uphill / count as f64;
            let steps = (200 * n * comp.len()).min(200_000);
            let cooling = (0.01f64).powf(1.0 / steps as f64);
            let mut t = t0;
            let mut best = (cost, pl.layout.to_vec());
            for _ in 0..steps {
                let i = rng.gen_range(0..n);
                let p = comp[rng.gen_range(0..comp.len())];
                if p != pl.layout[i] {
                    let (d, j) = pl.delta(i, p);
                    if d <= 0.0 || rng.gen::<f64>() < (-d / t).exp() {
                        pl.apply(i, p, j);
                        cost += d;
                        if cost < best.0 - 1e-9 {
                            best = (cost, pl.layout.to_vec());
                        }
                    }
                }
                t *= cooling;
            }
            Some(best.1)
        }
    };
    if let Some(b) = best_layout {
        layout.copy_from_slice(&b);
    }
    improve(w, layout, comp, dev);
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::device::{lattice, Calibration, NativeSet};
    use crate::pauli::{Pauli, PauliString};

    fn chain(n: usize) -> PauliSum {
        let mut h = PauliSum::new(n);
        for q in 0..n - 1 {
            h.add(
                PauliString::from_factors(&[(q, Pauli::Z), (q + 1, Pauli::Z)]).1,
                1.0,
            );
        }
        h
    }

    #[test]
    fn a_chain_on_a_line_is_placed_with_every_pair_adjacent() {
        let dev = Device::new(
            "l",
            8,
            &lattice::line(8),
            NativeSet::rz_sx_x_cx(),
            Calibration::default(),
        );
        let h = chain(6);
        let w = interaction_weights(&h, Ancilla::None);
        let comp: Vec<u32> = (0..8).collect();
        let mut l = greedy_layout(&w, 6, &comp, &dev, Ancilla::None);
        anneal(&w, &mut l, &comp, &dev, 1);
        // Optimal cost: five unit-weight pairs at distance 1.
        assert_eq!(layout_cost(&w, &l, &dev), 5.0);
        for q in 0..5 {
            assert!(dev.coupled(l[q], l[q + 1]), "{l:?}");
        }
    }

    #[test]
    fn weights_sum_to_the_ladder_lengths() {
        let mut h = PauliSum::new(4);
        h.add(
            PauliString::from_factors(&[(0, Pauli::X), (1, Pauli::Y), (3, Pauli::Z)]).1,
            0.5,
        );
        let w = interaction_weights(&h, Ancilla::Controls);
        assert_eq!(w.len(), 5);
        let pairs: f64 = (0..4)
            .flat_map(|i| (i + 1..4).map(move |j| (i, j)))
            .map(|(i, j)| w.get(i, j))
            .sum();
        assert!((pairs - 2.0).abs() < 1e-12); // w − 1 = 2 CNOTs
        for i in 0..5 {
            for j in 0..5 {
                assert_eq!(w.get(i, j), w.get(j, i), "symmetric");
            }
        }
        let anc: f64 = (0..4).map(|i| w.get(i, 4)).sum();
        assert!((anc - 1.0).abs() < 1e-12); // one controlled rz
    }
}
