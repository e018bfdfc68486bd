//! Lattice generators: the coupling lists of common chip layouts.
//!
//! In: a lattice kind and its sizes, as written on a `.dev` `lattice` line (or from code). Out:
//! undirected couplings `(a, b)` with `a < b`, sorted and without duplicates. Invariants: every
//! generated graph is connected when it has at least one qubit, and [`Lattice::qubits`] is the
//! exact qubit count of [`Lattice::links`] (known before the links are built, so an oversized
//! lattice can be refused without being generated). Shapes that a kind does not define are
//! refused by [`Lattice::new`] with a [`ShapeError`], never generated half-way.
//!
//! - `line N`: `k — k+1`;
//! - `ring N`: a line plus `N−1 — 0` (for `N ≥ 3`);
//! - `grid R C`: the square lattice, qubit `r·C + c` in row `r`, column `c`; right and down
//!   neighbours;
//! - `brickwall R C`: every row is a line; rows `r` and `r+1` are joined at the columns `c` with
//!   `c + r` even, so every inner qubit has degree 3 (the brick-wall or "hexagonal-like" lattice);
//! - `bridgedhex R L`: the heavy-hexagon lattice (a hexagonal lattice with one extra qubit on every
//!   edge; Chamberland, Zhu, Yoder, Hertzberg & Cross, "Topological and subsystem codes on
//!   low-degree graphs with flag qubits", Phys. Rev. X 10, 011022 (2020)), drawn as `R` long
//!   rows of `L` qubits joined by *bridge* qubits (see below);
//! - `octagon R C`: the square-octagon (4.8.8) lattice, `R × C` four-qubit squares joined into
//!   octagons (see below);
//! - `full N`: every pair.
//!
//! ## `bridgedhex R L`
//!
//! `R ≥ 2` long rows, each a line of `L = 4m + 3` column positions (`L` = 3, 7, 11, 15, …).
//! Rows `g` and `g+1` are joined through the *gap* `g`: `b = (L + 1)/4` bridge qubits, each
//! coupled to the qubit straight above and straight below it, at the columns `0, 4, 8, …` when
//! `g` is even and `2, 6, 10, …` when `g` is odd. A row qubit therefore meets at most one bridge
//! (its two gaps have opposite parity), so every degree is at most 3 and every bridge has
//! degree 2. The first row leaves out its last column and the last row the end column that no
//! bridge reaches (the last column when `R` is even, column 0 when `R` is odd), so that the
//! outline has no dangling end qubits on a bridge-less corner.
//!
//! Numbering, row by row: the qubits of row 0 from left to right, then the bridges of gap 0
//! from left to right, then row 1, the bridges of gap 1, and so on. With `R = 7`, `L = 15`:
//! row 0 is `0–13`, bridges `14–17` (under columns 0, 4, 8, 12), row 1 is `18–32`, bridges
//! `33–36` (columns 2, 6, 10, 14), …, row 6 is `113–126` (columns 1–14).
//!
//! Counts: `N = R·L − 2 + (R − 1)·b` qubits and `E = R·(L − 1) − 2 + 2·(R − 1)·b` couplings
//! (each row of `ℓ` qubits is a line of `ℓ − 1` couplings, two rows are one qubit short, and every
//! bridge has two couplings). `bridgedhex 7 15` gives 127 qubits and 144 couplings;
//! `bridgedhex 13 27` gives 433 qubits and 504 couplings.
//!
//! ## `octagon R C`
//!
//! `R × C` squares in rows and columns, each square standing on a corner. Square `(i, j)` holds
//! the qubits `4(i·C + j) + k` with `k` = 0 top, 1 right, 2 bottom, 3 left, coupled around the
//! square (`0–1–2–3–0`). The right corner of a square is coupled to the left corner of its
//! right neighbour, and the bottom corner to the top corner of the square below; four squares
//! around a gap close an octagon. Every qubit has degree at most 3. Counts: `N = 4·R·C`,
//! `E = 4·R·C + R·(C − 1) + (R − 1)·C`.

use std::fmt;

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

/// The lattice kinds of the `.dev` language, with the sizes each one takes.
pub const KINDS: &[(&str, &str)] = &[
    ("line", "N"),
    ("ring", "N"),
    ("grid", "R C"),
    ("brickwall", "R C"),
    ("bridgedhex", "R L"),
    ("octagon", "R C"),
    ("full", "N"),
];

/// "line N, ring N, …": every kind with its sizes, for hints.
pub fn kinds_list() -> String {
    KINDS
        .iter()
        .map(|(k, s)| format!("{k} {s}"))
        .collect::<Vec<_>>()
        .join(", ")
}

/// Why a kind and sizes do not describe a lattice.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum ShapeError {
    /// The kind is not one of [`KINDS`].
    UnknownKind,
    /// The kind takes `expected` sizes.
    Arity { expected: usize },
    /// Size number `index` (0-based) is not allowed for this kind.
    Size {
        index: usize,
        message: String,
        hint: String,
    },
}

impl fmt::Display for ShapeError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ShapeError::UnknownKind => write!(f, "unknown lattice kind"),
            ShapeError::Arity { expected } => write!(f, "the lattice takes {expected} sizes"),
            ShapeError::Size { message, .. } => f.write_str(message),
        }
    }
}

/// A lattice kind with sizes that it defines.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Lattice {
    Line(u32),
    Ring(u32),
    Full(u32),
    Grid { rows: u32, cols: u32 },
    Brickwall { rows: u32, cols: u32 },
    BridgedHex(BridgedHex),
    Octagon { rows: u32, cols: u32 },
}

impl Lattice {
    /// Checks a kind name and its sizes.
    pub fn new(kind: &str, sizes: &[u32]) -> Result<Lattice, ShapeError> {
        let arity = KINDS
            .iter()
            .find(|(k, _)| *k == kind)
            .map(|(_, s)| s.split(' ').count())
            .ok_or(ShapeError::UnknownKind)?;
        if sizes.len() != arity {
            return Err(ShapeError::Arity { expected: arity });
        }
        Ok(match (kind, sizes) {
            ("line", &[n]) => Lattice::Line(n),
            ("ring", &[n]) => Lattice::Ring(n),
            ("full", &[n]) => Lattice::Full(n),
            ("grid", &[rows, cols]) => Lattice::Grid { rows, cols },
            ("brickwall", &[rows, cols]) => Lattice::Brickwall { rows, cols },
            ("bridgedhex", &[rows, row_len]) => {
                Lattice::BridgedHex(BridgedHex::new(rows, row_len)?)
            }
            ("octagon", &[rows, cols]) => Lattice::Octagon { rows, cols },
            _ => return Err(ShapeError::UnknownKind),
        })
    }

    /// The number of qubits, computed without building the links (saturating, never wraps).
    pub fn qubits(&self) -> u64 {
        let prod = |a: u32, b: u32| (a as u64).saturating_mul(b as u64);
        match *self {
            Lattice::Line(n) | Lattice::Ring(n) | Lattice::Full(n) => n as u64,
            Lattice::Grid { rows, cols } | Lattice::Brickwall { rows, cols } => prod(rows, cols),
            Lattice::BridgedHex(h) => h.qubits(),
            Lattice::Octagon { rows, cols } => prod(rows, cols).saturating_mul(4),
        }
    }

    /// The couplings, `a < b`, ascending. Call only after checking [`Lattice::qubits`] against
    /// the memory one is willing to spend (a `full N` lattice has `N(N−1)/2` links).
    pub fn links(&self) -> Vec<Link> {
        match *self {
            Lattice::Line(n) => line(n),
            Lattice::Ring(n) => ring(n),
            Lattice::Full(n) => full(n),
            Lattice::Grid { rows, cols } => grid(rows, cols),
            Lattice::Brickwall { rows, cols } => brickwall(rows, cols),
            Lattice::BridgedHex(h) => h.links(),
            Lattice::Octagon { rows, cols } => octagon(rows, cols),
        }
    }
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

/// The square-octagon lattice of `rows × cols` squares (numbering in the module docs).
/// `4·rows·cols` must fit in a `u32`.
pub fn octagon(rows: u32, cols: u32) -> Vec<Link> {
    let (top, right, bottom, left) = (0, 1, 2, 3);
    let q = |i: u32, j: u32, k: u32| 4 * (i * cols + j) + k;
    let mut v = Vec::new();
    for i in 0..rows {
        for j in 0..cols {
            for k in 0..4 {
                v.push(link(q(i, j, k), q(i, j, (k + 1) % 4)));
            }
            if j + 1 < cols {
                v.push(link(q(i, j, right), q(i, j + 1, left)));
            }
            if i + 1 < rows {
                v.push(link(q(i, j, bottom), q(i + 1, j, top)));
            }
        }
    }
    finish(v)
}

/// A heavy-hexagon layout: `rows ≥ 2` long rows of `row_len = 4m + 3` column positions
/// (numbering and counts in the module docs). Built only through [`BridgedHex::new`], so every
/// value describes a well-formed layout.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct BridgedHex {
    rows: u32,
    row_len: u32,
}

impl BridgedHex {
    /// Checks the shape: at least two rows, rows of `4m + 3` qubits, at most `u32::MAX` qubits.
    pub fn new(rows: u32, row_len: u32) -> Result<BridgedHex, ShapeError> {
        if rows < 2 {
            return Err(ShapeError::Size {
                index: 0,
                message: format!("a heavy-hexagon lattice needs at least 2 rows, not {rows}"),
                hint: "rows are joined by bridge qubits; one row is `lattice line L`".into(),
            });
        }
        if row_len % 4 != 3 {
            let below = row_len.saturating_sub(row_len % 4 + 1);
            let above = row_len.saturating_add(3 - row_len % 4);
            let nearest = if below >= 3 {
                format!("{below} or {above}")
            } else {
                above.to_string()
            };
            return Err(ShapeError::Size {
                index: 1,
                message: format!(
                    "heavy-hexagon rows have 4k + 3 qubits (3, 7, 11, 15, …), not {row_len}"
                ),
                hint: format!(
                    "try {nearest}; `lattice bridgedhex 7 15` gives 127 qubits, \
                     `lattice bridgedhex 13 27` gives 433"
                ),
            });
        }
        let h = BridgedHex { rows, row_len };
        if h.qubits() > u32::MAX as u64 {
            return Err(ShapeError::Size {
                index: 0,
                message: format!("a {rows} × {row_len} heavy-hexagon lattice is too large"),
                hint: "use fewer or shorter rows".into(),
            });
        }
        Ok(h)
    }

    pub fn rows(&self) -> u32 {
        self.rows
    }

    pub fn row_len(&self) -> u32 {
        self.row_len
    }

    /// Bridge qubits per gap, `(L + 1)/4`.
    pub fn bridges_per_gap(&self) -> u32 {
        // L = 4m + 3, so (L + 1)/4 = m + 1 = ⌊L/4⌋ + 1 (which cannot overflow).
        self.row_len / 4 + 1
    }

    /// `R·L − 2 + (R − 1)·b`.
    pub fn qubits(&self) -> u64 {
        let (r, l, b) = (
            self.rows as u64,
            self.row_len as u64,
            self.bridges_per_gap() as u64,
        );
        (r * l - 2).saturating_add((r - 1) * b)
    }

    /// The first and one-past-last column present in row `r`.
    fn columns(&self, r: u32) -> (u32, u32) {
        let last = self.rows - 1;
        if r == 0 || (r == last && last % 2 == 1) {
            // The first row, and a last row below an even gap, lack column L−1.
            (0, self.row_len - 1)
        } else if r == last {
            // A last row below an odd gap lacks column 0.
            (1, self.row_len)
        } else {
            (0, self.row_len)
        }
    }

    /// Index of the first qubit of row `r < R`.
    fn row_start(&self, r: u32) -> u32 {
        // Rows 0..r hold r·L − 1 qubits (row 0 is one short, row r − 1 < R − 1 is not the
        // last), and the r gaps above row r hold r·b bridges.
        if r == 0 {
            return 0;
        }
        let (r, l, b) = (r as u64, self.row_len as u64, self.bridges_per_gap() as u64);
        // At most the qubit count, which `new` keeps within u32.
        (r * l - 1 + r * b) as u32
    }

    /// The qubit in row `r`, column `c`, if the layout has one there.
    pub fn row_qubit(&self, r: u32, c: u32) -> Option<u32> {
        if r >= self.rows {
            return None;
        }
        let (lo, hi) = self.columns(r);
        (lo..hi).contains(&c).then(|| self.row_start(r) + (c - lo))
    }

    /// Columns of the bridges of gap `g` (between rows `g` and `g + 1`), left to right.
    pub fn bridge_columns(&self, g: u32) -> impl Iterator<Item = u32> {
        let offset = 2 * (g % 2);
        (0..self.bridges_per_gap()).map(move |k| 4 * k + offset)
    }

    /// The bridge qubits of gap `g`, left to right.
    pub fn bridges(&self, g: u32) -> impl Iterator<Item = u32> {
        let (lo, hi) = self.columns(g);
        let first = self.row_start(g) + (hi - lo);
        first..first + self.bridges_per_gap()
    }

    /// The couplings, `a < b`, ascending.
    pub fn links(&self) -> Vec<Link> {
        let mut v = Vec::new();
        for r in 0..self.rows {
            let (lo, hi) = self.columns(r);
            let start = self.row_start(r);
            v.extend((1..hi - lo).map(|k| link(start + k - 1, start + k)));
        }
        for g in 0..self.rows - 1 {
            for (col, bridge) in self.bridge_columns(g).zip(self.bridges(g)) {
                for r in [g, g + 1] {
                    // Every bridge column is present in both rows (module docs).
                    if let Some(q) = self.row_qubit(r, col) {
                        v.push(link(q, bridge));
                    }
                }
            }
        }
        finish(v)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn degrees(n: usize, links: &[Link]) -> Vec<usize> {
        let mut deg = vec![0usize; n];
        for &(a, b) in links {
            deg[a as usize] += 1;
            deg[b as usize] += 1;
        }
        deg
    }

    /// Number of connected components, by breadth-first search.
    fn components(n: usize, links: &[Link]) -> usize {
        let mut adj = vec![Vec::new(); n];
        for &(a, b) in links {
            adj[a as usize].push(b as usize);
            adj[b as usize].push(a as usize);
        }
        let mut seen = vec![false; n];
        let mut count = 0;
        for s in 0..n {
            if seen[s] {
                continue;
            }
            count += 1;
            seen[s] = true;
            let mut stack = vec![s];
            while let Some(u) = stack.pop() {
                for &v in &adj[u] {
                    if !seen[v] {
                        seen[v] = true;
                        stack.push(v);
                    }
                }
            }
        }
        count
    }

    /// Couplings are `a < b`, strictly ascending (so sorted and without duplicates), in range.
    fn assert_canonical(n: u64, links: &[Link]) {
        assert!(links.iter().all(|&(a, b)| a < b && (b as u64) < n));
        assert!(links.windows(2).all(|w| w[0] < w[1]));
    }

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
        let deg = degrees(24, &links);
        assert!(deg.iter().all(|&d| (1..=3).contains(&d)));
    }

    /// Heavy hexagon, `R` rows of `L = 4m + 3`, `b = m + 1` bridges per gap (module docs).
    /// Hand derivation of the counts:
    /// - qubits: `R·L` row positions, less one in the first and one in the last row, plus
    ///   `(R − 1)·b` bridges: `N = R·L − 2 + (R − 1)·b`;
    /// - couplings: a row of `ℓ` qubits is a line with `ℓ − 1` couplings, so the rows give
    ///   `R·(L − 1) − 2`, and each bridge two more: `E = R·(L − 1) − 2 + 2·(R − 1)·b`;
    /// - degrees: every bridge has degree 2; a row qubit has its row neighbours (2 inside the
    ///   row, 1 at an end) plus at most one bridge. Of the `2·(R − 1)·b` bridge ends, the ones on
    ///   a row end are column 0 of row 0, both ends of every middle row, and the bridged end of
    ///   the last row: `2·(R − 1)` in all, so `2·(R − 1)·(b − 1) = 2·(R − 1)·m` qubits have
    ///   degree 3; the two unbridged corner qubits (one in the first row, one in the last) have
    ///   degree 1; the rest have degree 2;
    /// - cycles: a connected planar graph has `E − N + 1` bounded faces (Euler's formula
    ///   `V − E + F = 2`; Diestel, "Graph Theory", 5th ed. 2017, Theorem 4.2.9, from memory),
    ///   and the drawing has `m` hexagonal cells between consecutive bridges of each of the
    ///   `R − 1` gaps (Chamberland et al., Phys. Rev. X 10, 011022 (2020), Fig. 1: every cell
    ///   is a hexagon with one qubit on each edge, 12 qubits around).
    fn check_bridgedhex(rows: u32, row_len: u32) {
        let h = BridgedHex::new(rows, row_len).unwrap();
        let (r, l) = (rows as u64, row_len as u64);
        let (m, b) = ((l - 3) / 4, (l + 1) / 4);
        let n = r * l - 2 + (r - 1) * b;
        let e = r * (l - 1) - 2 + 2 * (r - 1) * b;
        let links = h.links();
        assert_eq!(h.qubits(), n, "{rows} × {row_len}");
        assert_eq!(links.len() as u64, e, "{rows} × {row_len}");
        assert_canonical(n, &links);
        assert_eq!(components(n as usize, &links), 1, "{rows} × {row_len}");
        assert_eq!(
            e + 1 - n,
            (r - 1) * m,
            "hexagonal cells of {rows} × {row_len}"
        );
        let deg = degrees(n as usize, &links);
        let count = |d: usize| deg.iter().filter(|&&x| x == d).count() as u64;
        assert_eq!(count(3), 2 * (r - 1) * m, "{rows} × {row_len}");
        assert_eq!(count(1), 2, "{rows} × {row_len}");
        assert_eq!(count(2), n - 2 - 2 * (r - 1) * m, "{rows} × {row_len}");
        assert_eq!(count(0), 0);
        // Every bridge has degree 2: the qubits straight above and below it.
        for g in 0..rows - 1 {
            for (col, q) in h.bridge_columns(g).zip(h.bridges(g)) {
                let above = h.row_qubit(g, col).unwrap();
                let below = h.row_qubit(g + 1, col).unwrap();
                assert_eq!(deg[q as usize], 2);
                assert!(links.binary_search(&link(above, q)).is_ok());
                assert!(links.binary_search(&link(q, below)).is_ok());
            }
        }
    }

    #[test]
    fn bridgedhex_counts_degrees_and_cells_match_the_hand_derivation() {
        for rows in 2..=9 {
            for row_len in [3, 7, 11, 15, 19, 27] {
                check_bridgedhex(rows, row_len);
            }
        }
    }

    #[test]
    fn bridgedhex_127_and_433() {
        // 7 rows of 15: 7·15 − 2 + 6·4 = 127 qubits, 7·14 − 2 + 2·6·4 = 144 couplings.
        let h = BridgedHex::new(7, 15).unwrap();
        assert_eq!((h.qubits(), h.links().len()), (127, 144));
        // 13 rows of 27: 13·27 − 2 + 12·7 = 433 qubits, 13·26 − 2 + 2·12·7 = 504 couplings.
        let h = BridgedHex::new(13, 27).unwrap();
        assert_eq!((h.qubits(), h.links().len()), (433, 504));
        check_bridgedhex(7, 15);
        check_bridgedhex(13, 27);
    }

    #[test]
    fn bridgedhex_numbering_follows_the_module_docs() {
        let h = BridgedHex::new(7, 15).unwrap();
        // Row 0 is 0–13, bridges 14–17 under columns 0, 4, 8, 12; row 1 starts at 18.
        assert_eq!(h.row_qubit(0, 0), Some(0));
        assert_eq!(h.row_qubit(0, 13), Some(13));
        assert_eq!(h.row_qubit(0, 14), None);
        assert_eq!(h.bridges(0).collect::<Vec<_>>(), vec![14, 15, 16, 17]);
        assert_eq!(h.bridge_columns(0).collect::<Vec<_>>(), vec![0, 4, 8, 12]);
        assert_eq!(h.row_qubit(1, 0), Some(18));
        assert_eq!(h.bridge_columns(1).collect::<Vec<_>>(), vec![2, 6, 10, 14]);
        assert_eq!(h.bridges(1).collect::<Vec<_>>(), vec![33, 34, 35, 36]);
        // The last row (R odd) lacks column 0 and holds 113–126.
        assert_eq!(h.row_qubit(6, 0), None);
        assert_eq!(h.row_qubit(6, 1), Some(113));
        assert_eq!(h.row_qubit(6, 14), Some(126));
        let links = h.links();
        for l in [
            (0, 14),
            (14, 18),
            (20, 33),
            (33, 39),
            (96, 109),
            (109, 114),
            (112, 126),
        ] {
            assert!(links.binary_search(&l).is_ok(), "{l:?}");
        }
        // With R even the last row lacks its last column instead.
        let h = BridgedHex::new(2, 7).unwrap();
        assert_eq!(h.row_qubit(1, 6), None);
        assert_eq!(h.row_qubit(1, 0), Some(8));
        assert_eq!(h.qubits(), 14);
    }

    #[test]
    fn bridgedhex_shapes_that_are_not_defined_are_refused() {
        let size_index = |r, l| match BridgedHex::new(r, l) {
            Err(ShapeError::Size { index, .. }) => Some(index),
            _ => None,
        };
        assert_eq!(size_index(1, 15), Some(0));
        assert_eq!(size_index(0, 15), Some(0));
        for l in [0, 1, 2, 4, 5, 6, 8, 14, 16] {
            assert_eq!(size_index(7, l), Some(1), "row length {l}");
        }
        assert_eq!(size_index(u32::MAX, u32::MAX - 1), Some(1));
        assert_eq!(size_index(u32::MAX, u32::MAX), Some(0));
        assert_eq!(size_index(u32::MAX, 4_000_000_003), Some(0));
        assert!(BridgedHex::new(2, 3).is_ok());
    }

    /// Square-octagon lattice of `R × C` squares. Hand derivation: `4·R·C` qubits; 4 couplings
    /// around each square, `C − 1` joints along each of the `R` rows of squares and `C` between
    /// each of the `R − 1` pairs of neighbouring rows. Bounded faces (Euler's formula, as above):
    /// the `R·C` squares and the `(R − 1)·(C − 1)` octagons between four squares.
    #[test]
    fn octagon_counts_degrees_and_faces_match_the_hand_derivation() {
        for rows in 1..=5u64 {
            for cols in 1..=5u64 {
                let links = octagon(rows as u32, cols as u32);
                let n = 4 * rows * cols;
                let e = 4 * rows * cols + rows * (cols - 1) + (rows - 1) * cols;
                assert_eq!(links.len() as u64, e);
                let lat = Lattice::new("octagon", &[rows as u32, cols as u32]).unwrap();
                assert_eq!(lat.qubits(), n);
                assert_canonical(n, &links);
                assert_eq!(components(n as usize, &links), 1);
                assert_eq!(e + 1 - n, rows * cols + (rows - 1) * (cols - 1));
                let deg = degrees(n as usize, &links);
                assert!(deg.iter().all(|&d| d == 2 || d == 3));
            }
        }
        // Square (0, 0) is 0–1–2–3; its right corner 1 meets the left corner 7 of square (0, 1)
        // and its bottom corner 2 the top corner of the square below (4·C + 0).
        let links = octagon(2, 2);
        for l in [(0, 1), (1, 2), (2, 3), (0, 3), (1, 7), (2, 8)] {
            assert!(links.binary_search(&l).is_ok(), "{l:?}");
        }
    }

    #[test]
    fn every_kind_reports_its_qubit_count_before_building() {
        for (kind, sizes) in [
            ("line", vec![6]),
            ("ring", vec![6]),
            ("full", vec![6]),
            ("grid", vec![3, 4]),
            ("brickwall", vec![3, 4]),
            ("bridgedhex", vec![3, 7]),
            ("octagon", vec![2, 3]),
        ] {
            let lat = Lattice::new(kind, &sizes).unwrap();
            let links = lat.links();
            let used = links.iter().map(|&(_, b)| b as u64 + 1).max().unwrap();
            assert_eq!(lat.qubits(), used, "{kind}");
            assert_canonical(lat.qubits(), &links);
            assert_eq!(components(used as usize, &links), 1, "{kind}");
        }
        assert_eq!(
            Lattice::new("grid", &[3]),
            Err(ShapeError::Arity { expected: 2 })
        );
        assert_eq!(Lattice::new("hex", &[3]), Err(ShapeError::UnknownKind));
        assert_eq!(
            Lattice::new("octagon", &[u32::MAX, u32::MAX])
                .unwrap()
                .qubits(),
            u64::MAX
        );
    }
}
