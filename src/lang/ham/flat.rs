//! Merged Pauli sums kept flat and in writing order: the currency between the `.ham` fast
//! reader ([`super::plain`]) and the writer ([`super::write`]).
//!
//! In: terms in file order (factor codes and a coefficient per line) from the fast reader, or
//! any [`PauliSum`]. Out: a [`FlatSum`], every distinct string once with its merged
//! coefficient, in the order the writer prints them (by weight, then by the sequence of
//! (qubit, letter) pairs), or the [`PauliSum`] the rest of the compiler uses.
//!
//! Invariants: strings are canonical (qubits ascending and distinct); equal strings from the
//! reader are summed in file order starting from `0.0`, exactly as the evaluator sums them, so
//! the merged coefficients are bit-identical to the full reader's; exact zeros are dropped and
//! counted; the identity is the constant, never a term.
//!
//! Layout (the idea, and why): a 10⁶-term file on 200 qubits would cost two heap allocations
//! per term as [`PauliString`]s (their words spill past 128 qubits) and a comparison sort that
//! chases pointers. Here a string of weight `w` is `w` factor codes `4·q + l` (`l` = 1, 2, 3
//! for X, Y, Z, so codes order as (qubit, letter) pairs), and the weight with the first
//! [`HEAD`] codes is packed into one `u128` whose integer order is the writing order (weight
//! in the top 16 bits, then 14 bits per code, the first code highest). Sorting is then a sort
//! of `(u128, position)` pairs; codes past the `HEAD`-th live in a side buffer and are compared
//! only when two keys tie.

use crate::pauli::{Pauli, PauliString, PauliSum, MAX_QUBITS};
use rayon::prelude::*;

/// Factor codes packed into a sort key beside the weight.
pub const HEAD: usize = 8;
/// Bits per factor code: `4·q + l` with `q < 4096`.
const CODE_BITS: u32 = 14;
const CODE_MASK: u128 = (1 << CODE_BITS) - 1;
/// Bit position of the weight inside a key.
const WEIGHT_SHIFT: u32 = 112;

const _: () = assert!(MAX_QUBITS * 4 <= 1 << CODE_BITS);
const _: () = assert!(HEAD as u32 * CODE_BITS == WEIGHT_SHIFT);

/// The code of factor `p` on qubit `q` (`p` not the identity).
#[inline]
pub fn code(q: usize, p: Pauli) -> u16 {
    let l = match p {
        Pauli::I => 0,
        Pauli::X => 1,
        Pauli::Y => 2,
        Pauli::Z => 3,
    };
    (q as u16) << 2 | l
}

/// The qubit and letter of a code.
#[inline]
pub fn decode(c: u16) -> (usize, u8) {
    (usize::from(c >> 2), b"IXYZ"[usize::from(c & 3)])
}

/// The sort key of a canonical code sequence.
#[inline]
fn pack(codes: &[u16]) -> u128 {
    let mut key = (codes.len() as u128) << WEIGHT_SHIFT;
    for (i, &c) in codes.iter().take(HEAD).enumerate() {
        key |= u128::from(c) << (WEIGHT_SHIFT - CODE_BITS * (i as u32 + 1));
    }
    key
}

/// The weight stored in a key.
#[inline]
fn weight(key: u128) -> usize {
    (key >> WEIGHT_SHIFT) as usize
}

/// Strings with their coefficients, flat (see the module documentation): in file order as the
/// reader collects them, in writing order inside a [`FlatSum`].
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Terms {
    keys: Vec<u128>,
    coeffs: Vec<f64>,
    /// Start in `tails` of the codes past the `HEAD`-th (only read for heavier strings).
    tail_at: Vec<u32>,
    tails: Vec<u16>,
}

impl Terms {
    /// Room for about `n` strings.
    pub fn with_capacity(n: usize) -> Terms {
        Terms {
            keys: Vec::with_capacity(n),
            coeffs: Vec::with_capacity(n),
            tail_at: Vec::with_capacity(n),
            tails: Vec::new(),
        }
    }

    /// Appends a string given by its canonical codes (qubits ascending and distinct).
    #[inline]
    pub fn push(&mut self, codes: &[u16], coeff: f64) {
        self.keys.push(pack(codes));
        self.coeffs.push(coeff);
        self.tail_at.push(self.tails.len() as u32);
        if codes.len() > HEAD {
            self.tails.extend_from_slice(&codes[HEAD..]);
        }
    }

    pub fn len(&self) -> usize {
        self.keys.len()
    }

    pub fn is_empty(&self) -> bool {
        self.keys.is_empty()
    }

    /// Appends every string of `other`, in order.
    pub fn append(&mut self, other: &Terms) {
        let base = self.tails.len() as u32;
        self.keys.extend_from_slice(&other.keys);
        self.coeffs.extend_from_slice(&other.coeffs);
        self.tail_at.extend(other.tail_at.iter().map(|t| t + base));
        self.tails.extend_from_slice(&other.tails);
    }

    /// The codes of string `i` past the `HEAD`-th.
    #[inline]
    fn tail(&self, i: usize) -> &[u16] {
        let w = weight(self.keys[i]);
        if w <= HEAD {
            return &[];
        }
        let at = self.tail_at[i] as usize;
        &self.tails[at..at + w - HEAD]
    }

    /// The coefficient of string `i`.
    #[inline]
    pub fn coeff(&self, i: usize) -> f64 {
        self.coeffs[i]
    }

    /// The (qubit, letter) factors of string `i`, qubits ascending.
    pub fn factors(&self, i: usize) -> impl Iterator<Item = (usize, u8)> + '_ {
        let key = self.keys[i];
        let head = weight(key).min(HEAD);
        (0..head)
            .map(move |j| ((key >> (WEIGHT_SHIFT - CODE_BITS * (j as u32 + 1))) & CODE_MASK) as u16)
            .chain(self.tail(i).iter().copied())
            .map(decode)
    }

    /// String `i` as a [`PauliString`].
    pub fn string(&self, i: usize) -> PauliString {
        let mut p = PauliString::IDENTITY;
        for (q, l) in self.factors(i) {
            if l != b'Z' {
                p.x.insert(q);
            }
            if l != b'X' {
                p.z.insert(q);
            }
        }
        p
    }

    /// Positions `0..len` in writing order; ties (equal strings) in position order.
    ///
    /// When every string fits in the head of its key, the weight, the codes (at the width
    /// the largest one needs) and the position are packed into one `u64` (or `u128`) whose
    /// integer order is exactly that order, and plain integers are sorted: for 10⁶ strings of
    /// weight ≤ 4 on 200 qubits, 3 + 4·10 + 20 = 63 bits.
    fn writing_order(&self) -> Vec<u32> {
        let n = self.len();
        let bits = |x: usize| usize::BITS - x.leading_zeros();
        // The heaviest string and the largest code in the heads.
        let (max_w, max_code) = self
            .keys
            .par_iter()
            .map(|&k| {
                let top = (0..weight(k).min(HEAD))
                    .map(|j| (k >> (WEIGHT_SHIFT - CODE_BITS * (j as u32 + 1))) & CODE_MASK)
                    .max()
                    .unwrap_or(0);
                (weight(k), top as usize)
            })
            .reduce(|| (0, 0), |a, b| (a.0.max(b.0), a.1.max(b.1)));
        let (wb, cb, ib) = (bits(max_w), bits(max_code), bits(n.saturating_sub(1)));
        let packed_bits = wb + max_w as u32 * cb + ib;
        if max_w <= HEAD && packed_bits <= 64 {
            return packed_order::<u64>(&self.keys, max_w, cb, ib);
        }
        if max_w <= HEAD && packed_bits <= 128 {
            return packed_order::<u128>(&self.keys, max_w, cb, ib);
        }
        let mut order: Vec<(u128, u32)> = self
            .keys
            .par_iter()
            .enumerate()
            .map(|(i, &k)| (k, i as u32))
            .collect();
        if self.tails.is_empty() {
            // The key is the whole string: pairs order by string, then by position.
            order.par_sort_unstable();
        } else {
            order.par_sort_unstable_by(|a, b| {
                a.0.cmp(&b.0)
                    .then_with(|| self.tail(a.1 as usize).cmp(self.tail(b.1 as usize)))
                    .then(a.1.cmp(&b.1))
            });
        }
        order.into_iter().map(|(_, i)| i).collect()
    }

    /// The strings at positions `order`, in that order.
    fn gathered(&self, order: &[u32]) -> Terms {
        let keys: Vec<u128> = order.par_iter().map(|&i| self.keys[i as usize]).collect();
        let coeffs: Vec<f64> = order.par_iter().map(|&i| self.coeffs[i as usize]).collect();
        let mut tails = Vec::with_capacity(self.tails.len());
        let tail_at: Vec<u32> = if self.tails.is_empty() {
            vec![0; order.len()]
        } else {
            order
                .iter()
                .map(|&i| {
                    let at = tails.len() as u32;
                    tails.extend_from_slice(self.tail(i as usize));
                    at
                })
                .collect()
        };
        Terms {
            keys,
            coeffs,
            tail_at,
            tails,
        }
    }

    /// True when strings `i` and `j` are equal.
    #[inline]
    fn same(&self, i: usize, j: usize) -> bool {
        self.keys[i] == self.keys[j] && self.tail(i) == self.tail(j)
    }

    /// Keeps the strings whose coefficient satisfies `keep`, in order.
    pub fn retain(&mut self, keep: impl Fn(f64) -> bool) {
        let mut out = Terms::with_capacity(self.len());
        for i in 0..self.len() {
            if keep(self.coeffs[i]) {
                out.push_from(self, i, self.coeffs[i]);
            }
        }
        *self = out;
    }

    /// Appends string `i` of `from` with coefficient `coeff`.
    #[inline]
    fn push_from(&mut self, from: &Terms, i: usize, coeff: f64) {
        self.keys.push(from.keys[i]);
        self.coeffs.push(coeff);
        self.tail_at.push(self.tails.len() as u32);
        self.tails.extend_from_slice(from.tail(i));
    }
}

/// An unsigned integer wide enough for a packed sort key ([`Terms::writing_order`]).
trait Packed: Copy + Ord + Send + Sync + From<u16> + From<u32> {
    fn shl(self, by: u32) -> Self;
    fn or(self, other: Self) -> Self;
    fn low_u32(self, bits: u32) -> u32;
}

macro_rules! packed {
    ($t:ty) => {
        impl Packed for $t {
            #[inline]
            fn shl(self, by: u32) -> Self {
                self << by
            }
            #[inline]
            fn or(self, other: Self) -> Self {
                self | other
            }
            #[inline]
            fn low_u32(self, bits: u32) -> u32 {
                (self & ((1 << bits) - 1)) as u32
            }
        }
    };
}
packed!(u64);
packed!(u128);

/// Positions in writing order by sorting packed integers: weight (`wb` bits, enough for
/// `max_w`), then `max_w` codes of `cb` bits (zeros past a lighter string's weight, which the
/// weight already separates), then the position (`ib` bits).
fn packed_order<P: Packed>(keys: &[u128], max_w: usize, cb: u32, ib: u32) -> Vec<u32> {
    let mut packed: Vec<P> = keys
        .par_iter()
        .enumerate()
        .map(|(i, &k)| {
            let w = weight(k);
            let mut p = P::from(w as u32);
            for j in 0..max_w {
                let c = if j < w {
                    ((k >> (WEIGHT_SHIFT - CODE_BITS * (j as u32 + 1))) & CODE_MASK) as u16
                } else {
                    0
                };
                p = p.shl(cb).or(P::from(c));
            }
            p.shl(ib).or(P::from(i as u32))
        })
        .collect();
    packed.par_sort_unstable();
    packed.into_par_iter().map(|p| p.low_u32(ib)).collect()
}

/// A merged Pauli sum in writing order; see the module documentation.
#[derive(Clone, Debug, PartialEq)]
pub struct FlatSum {
    pub num_qubits: usize,
    /// The coefficient of the identity.
    pub constant: f64,
    /// Distinct non-identity strings with non-zero coefficients, in writing order.
    pub terms: Terms,
}

/// What [`FlatSum::merge`] returns beside the sum.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct MergeCounts {
    /// Non-identity strings whose merged coefficient is exactly zero (dropped).
    pub dropped_zero: usize,
}

impl FlatSum {
    /// Merges strings read in file order: equal strings summed in file order from `0.0`,
    /// the identity into the constant, exact zeros dropped.
    pub fn merge(num_qubits: usize, lines: &Terms) -> (FlatSum, MergeCounts) {
        // Gathered into writing order first (independent loads, in parallel), so the merge
        // below streams through memory instead of following positions one by one.
        let sorted = lines.gathered(&lines.writing_order());
        let mut terms = Terms::with_capacity(sorted.len());
        let mut constant = 0.0;
        let mut dropped_zero = 0;
        let mut i = 0;
        while i < sorted.len() {
            let mut total = 0.0 + sorted.coeffs[i];
            let mut j = i + 1;
            while j < sorted.len() && sorted.same(j, i) {
                total += sorted.coeffs[j];
                j += 1;
            }
            if sorted.keys[i] == 0 {
                constant = total;
            } else if total == 0.0 {
                dropped_zero += 1;
            } else {
                terms.push_from(&sorted, i, total);
            }
            i = j;
        }
        (
            FlatSum {
                num_qubits,
                constant,
                terms,
            },
            MergeCounts { dropped_zero },
        )
    }

    /// The terms of `h` in writing order.
    pub fn from_sum(h: &PauliSum) -> FlatSum {
        let list: Vec<(&PauliString, &f64)> = h.terms.iter().collect();
        let parts: Vec<Terms> = list
            .par_chunks(1 << 14)
            .map(|chunk| {
                let mut part = Terms::with_capacity(chunk.len());
                let mut codes: Vec<u16> = Vec::with_capacity(16);
                for (p, c) in chunk {
                    codes.clear();
                    codes.extend(p.support_iter().map(|q| code(q, p.get(q))));
                    part.push(&codes, **c);
                }
                part
            })
            .collect();
        let mut lines = Terms::with_capacity(list.len());
        for part in &parts {
            lines.append(part);
        }
        // Distinct strings: the order is a permutation, and merging copies each string once.
        let terms = lines.gathered(&lines.writing_order());
        FlatSum {
            num_qubits: h.num_qubits,
            constant: h.constant,
            terms,
        }
    }

    /// The same operator as a [`PauliSum`].
    pub fn to_sum(&self) -> PauliSum {
        let mut list: Vec<(PauliString, f64)> = (0..self.terms.len())
            .into_par_iter()
            .map(|i| (self.terms.string(i), self.terms.coeffs[i]))
            .collect();
        // Sorted by flat keys first: collecting a sorted list builds the map in one pass.
        crate::pauli::order::sort_by_string(&mut list);
        let mut sum = PauliSum::new(self.num_qubits);
        sum.constant = self.constant;
        sum.terms = list.into_iter().collect();
        sum
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn random_sum(n: usize, raw: &[(Vec<(usize, usize)>, i32)]) -> PauliSum {
        let mut h = PauliSum::new(n);
        for (fs, c) in raw {
            let factors: Vec<(usize, Pauli)> = fs
                .iter()
                .map(|&(q, p)| (q % n, [Pauli::X, Pauli::Y, Pauli::Z][p]))
                .collect();
            let (_, p) = PauliString::from_factors(&factors);
            h.add(p, f64::from(*c) * 0.5);
        }
        h
    }

    proptest! {
        /// A sum written flat and read back is the same sum, for strings of every weight up to
        /// past the packed head (12 factors) on registers past the inline words (300 qubits).
        #[test]
        fn a_sum_survives_the_flat_form(
            n in prop_oneof![Just(3usize), Just(70), Just(300), Just(4096)],
            raw in proptest::collection::vec(
                (proptest::collection::vec((0usize..5000, 0usize..3), 0..12), -4i32..5),
                0..40,
            ),
            constant in -2i32..3,
        ) {
            let mut h = random_sum(n, &raw);
            h.constant = f64::from(constant);
            let flat = FlatSum::from_sum(&h);
            prop_assert_eq!(flat.terms.len(), h.terms.len());
            prop_assert_eq!(flat.to_sum(), h.clone());
            // Writing order: by weight, then by the (qubit, letter) sequence.
            let seqs: Vec<(usize, Vec<(usize, u8)>)> = (0..flat.terms.len())
                .map(|i| {
                    let f: Vec<(usize, u8)> = flat.terms.factors(i).collect();
                    (f.len(), f)
                })
                .collect();
            prop_assert!(seqs.windows(2).all(|w| w[0] < w[1]));
        }

        /// Merging equals adding the strings one by one into a `PauliSum` (which sums equal
        /// strings in order from the first) on lists with many repeats.
        #[test]
        fn merging_equals_adding_in_order(
            raw in proptest::collection::vec(
                (proptest::collection::vec((0usize..12, 0usize..3), 0..10), -4i32..5),
                0..60,
            ),
        ) {
            let n = 12;
            let mut lines = Terms::default();
            let mut expected = PauliSum::new(n);
            let mut zero = std::collections::BTreeSet::new();
            for (fs, c) in &raw {
                let factors: Vec<(usize, Pauli)> = fs
                    .iter()
                    .map(|&(q, p)| (q, [Pauli::X, Pauli::Y, Pauli::Z][p]))
                    .collect();
                let (_, p) = PauliString::from_factors(&factors);
                let codes: Vec<u16> = p.support_iter().map(|q| code(q, p.get(q))).collect();
                let c = f64::from(*c) * 0.25;
                lines.push(&codes, c);
                expected.add(p.clone(), c);
                zero.insert(p);
            }
            let (flat, counts) = FlatSum::merge(n, &lines);
            prop_assert_eq!(flat.to_sum(), expected.clone());
            let distinct = zero.iter().filter(|p| !p.is_identity()).count();
            prop_assert_eq!(counts.dropped_zero, distinct - expected.terms.len());
        }
    }

    #[test]
    fn codes_order_as_qubit_letter_pairs() {
        // (q, X) < (q, Y) < (q, Z) < (q + 1, X): the writer's order on letters is `X < Y < Z`.
        let c = |q, p| code(q, p);
        assert!(c(3, Pauli::X) < c(3, Pauli::Y));
        assert!(c(3, Pauli::Y) < c(3, Pauli::Z));
        assert!(c(3, Pauli::Z) < c(4, Pauli::X));
        assert_eq!(decode(c(4095, Pauli::Z)), (4095, b'Z'));
        // Weight first: a heavy string on low qubits sorts after a light one on high qubits.
        assert!(pack(&[c(0, Pauli::X), c(1, Pauli::X)]) > pack(&[c(4095, Pauli::Z)]));
    }
}
