//! Grouping Pauli strings into mutually commuting sets by greedy graph colouring.
//!
//! In: a list of strings and a compatibility relation (full or qubit-wise commutation). Out: a
//! partition into groups, each a list of indices into the input, in which every pair is
//! compatible. Colouring is largest-degree-first on the conflict graph (Welsh & Powell, "An upper
//! bound for the chromatic number of a graph and its application to timetabling problems",
//! Comput. J. 1967); ties break on the input index, so the result is deterministic.
//!
//! Cost: O(m²) popcounts to build degrees plus O(m·g) checks while colouring (g groups); for
//! 10⁴ terms that is 10⁸ word operations, well under a second in a release build.

use super::PauliString;

/// Which pairs may share a group.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Compat {
    /// `[P, Q] = 0`.
    Commuting,
    /// Equal letters on every shared qubit (one basis change measures the whole group).
    QubitWise,
}

fn compatible(a: &PauliString, b: &PauliString, how: Compat) -> bool {
    match how {
        Compat::Commuting => a.commutes_with(b),
        Compat::QubitWise => a.qubitwise_commutes_with(b),
    }
}

/// Partitions `strings` into compatible groups. Groups are returned in order of their first
/// member's colouring step; members inside a group are sorted by input index.
pub fn colour_groups(strings: &[PauliString], how: Compat) -> Vec<Vec<usize>> {
    let m = strings.len();
    let mut degree = vec![0usize; m];
    for i in 0..m {
        for j in (i + 1)..m {
            if !compatible(&strings[i], &strings[j], how) {
                degree[i] += 1;
                degree[j] += 1;
            }
        }
    }
    let mut order: Vec<usize> = (0..m).collect();
    order.sort_by(|&a, &b| degree[b].cmp(&degree[a]).then(a.cmp(&b)));
    let mut groups: Vec<Vec<usize>> = Vec::new();
    for &i in &order {
        let slot = groups
            .iter()
            .position(|g| g.iter().all(|&j| compatible(&strings[i], &strings[j], how)));
        match slot {
            Some(k) => groups[k].push(i),
            None => groups.push(vec![i]),
        }
    }
    for g in &mut groups {
        g.sort_unstable();
    }
    groups
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::pauli::Pauli;

    #[test]
    fn every_group_is_pairwise_compatible_and_covers_the_input() {
        let s = |f: &[(usize, Pauli)]| PauliString::from_factors(f).1;
        let strings = vec![
            s(&[(0, Pauli::X), (1, Pauli::X)]),
            s(&[(0, Pauli::Z), (1, Pauli::Z)]),
            s(&[(0, Pauli::Y), (1, Pauli::Y)]),
            s(&[(0, Pauli::Z)]),
            s(&[(1, Pauli::X)]),
        ];
        for how in [Compat::Commuting, Compat::QubitWise] {
            let groups = colour_groups(&strings, how);
            let mut seen: Vec<usize> = groups.iter().flatten().copied().collect();
            seen.sort_unstable();
            assert_eq!(seen, vec![0, 1, 2, 3, 4]);
            for g in &groups {
                for &a in g {
                    for &b in g {
                        assert!(compatible(&strings[a], &strings[b], how));
                    }
                }
            }
        }
        // XX, YY, ZZ commute pairwise: one group under full commutation.
        let full = colour_groups(&strings[..3], Compat::Commuting);
        assert_eq!(full, vec![vec![0, 1, 2]]);
    }
}
