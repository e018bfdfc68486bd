//! Lattice generators: the coupling lists of common chip layouts.
//!
//! In: sizes. Out: undirected couplings `(a, b)` with `a < b`, sorted, qubits numbered row by
//! row (`r·C + c` in an `R × C` layout). Every generated graph is connected when its size is
//! at least 1.
//!
//! - `line N`: `k — k+1`;
//! - `ring N`: a line plus `N−1 — 0` (for `N ≥ 3`);
//! - `grid R C`: the square lattice, right and down neighbours;
//! - `brickwall R C`: every row is a line; rows `r` and `r+1` are joined at the columns `c` with
//!   `c + r` even, so every inner qubit has degree 3 (the brick-wall or "hexagonal-like" lattice);
//! - `full N`: every pair.

/// A coupling between two physical qubits, smaller index first.
pub type Link = (u32, u32);

fn link(a: u32, b: u32) -> Link {
    (a.min(b), a.max(b))
}

fn finish(mut v: Vec<Link>) -> Vec<Link> {
    v.sort_unstable();
    v.dedup();
    v
}

pub fn line(n: u32) -> Vec<Link> {
    finish((1..n).map(|k| link(k - 1, k)).collect())
}

pub fn ring(n: u32) -> Vec<Link> {
    let mut v = line(n);
    if n >= 3 {
        v.push(link(n - 1, 0));
    }
    finish(v)
}

/// Row-major `rows × cols` sites with every horizontal link and the vertical links for which
/// `vertical(r, c)` holds (between site (r, c) and (r+1, c)).
fn rows_and_columns(rows: u32, cols: u32, vertical: impl Fn(u32, u32) -> bool) -> Vec<Link> {
    let mut v = Vec::new();
    for r in 0..rows {
        for c in 0..cols {
            let q = r * cols + c;
            if c + 1 < cols {
                v.push(link(q, q + 1));
            }
            if r + 1 < rows && vertical(r, c) {
                v.push(link(q, q + cols));
            }
        }
    }
    finish(v)
}

pub fn grid(rows: u32, cols: u32) -> Vec<Link> {
    rows_and_columns(rows, cols, |_, _| true)
}

pub fn brickwall(rows: u32, cols: u32) -> Vec<Link> {
    rows_and_columns(rows, cols, |r, c| (c + r) % 2 == 0)
}

pub fn full(n: u32) -> Vec<Link> {
    let mut v = Vec::new();
    for a in 0..n {
        for b in a + 1..n {
            v.push((a, b));
        }
    }
    v
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn edge_counts_match_the_closed_forms() {
        assert_eq!(line(5).len(), 4);
        assert_eq!(ring(5).len(), 5);
        assert_eq!(ring(2).len(), 1);
        // R(C−1) horizontal + (R−1)C vertical links.
        assert_eq!(grid(3, 4).len(), 3 * 3 + 2 * 4);
        assert_eq!(full(6).len(), 15);
        // Brick wall: R(C−1) horizontal links, and ⌈C/2⌉ or ⌊C/2⌋ rungs between rows.
        assert_eq!(brickwall(3, 4).len(), 3 * 3 + 2 + 2);
        assert_eq!(brickwall(2, 5).len(), 2 * 4 + 3);
    }

    #[test]
    fn brickwall_inner_degree_is_at_most_three() {
        let links = brickwall(4, 6);
        let mut deg = [0usize; 24];
        for (a, b) in links {
            deg[a as usize] += 1;
            deg[b as usize] += 1;
        }
        assert!(deg.iter().all(|&d| (1..=3).contains(&d)));
    }
}
