//! Qubit sets of any width as 64-bit words: the masks inside a Pauli string.
//!
//! In: qubit indices (or whole `u64` words from code that knows its width is small). Out:
//! [`Bits`], a set of qubits stored as little-endian 64-bit words (qubit `k` is bit `k % 64` of
//! word `k / 64`), with the set operations a Pauli string needs: xor, and, or, popcounts of
//! intersections, iteration over members.
//!
//! Invariant: no trailing zero word, so equal sets have equal representations whatever width
//! they were built at, and `Eq`, `Hash` and `Ord` need no normalisation. Up to 128 qubits the
//! words live inline (no heap allocation); wider sets spill to the heap.
//!
//! Order: `Ord` compares the sets as unsigned binary numbers (qubit 0 least significant), which
//! for sets inside qubits 0..64 is exactly the order of their `u64` masks.

use smallvec::SmallVec;
use std::cmp::Ordering;

/// Words kept inline before spilling to the heap (2 words = 128 qubits).
const INLINE_WORDS: usize = 2;

/// A set of qubit indices; see the module documentation for the invariant.
#[derive(Clone, Default, PartialEq, Eq, Hash)]
pub struct Bits(SmallVec<[u64; INLINE_WORDS]>);

impl std::fmt::Debug for Bits {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_set().entries(self.ones()).finish()
    }
}

impl Bits {
    /// The empty set.
    pub const fn new() -> Bits {
        Bits(SmallVec::new_const())
    }

    /// The set whose members are the set bits of `w` (qubits 0..64).
    pub fn from_u64(w: u64) -> Bits {
        let mut b = Bits::new();
        if w != 0 {
            b.0.push(w);
        }
        b
    }

    /// The set whose members are the set bits of `words` (qubit `k` is bit `k % 64` of word
    /// `k / 64`), trailing zero words dropped.
    pub fn from_words(words: &[u64]) -> Bits {
        let mut b = Bits(SmallVec::from_slice(words));
        b.trim();
        b
    }

    /// The set `{lo, lo+1, …, hi−1}`.
    pub fn range(lo: usize, hi: usize) -> Bits {
        let mut b = Bits::new();
        if hi <= lo {
            return b;
        }
        b.0.resize(hi.div_ceil(64), 0);
        for (i, w) in b.0.iter_mut().enumerate() {
            let start = (i * 64).max(lo);
            let end = ((i + 1) * 64).min(hi);
            if start < end {
                let width = end - start;
                let ones = if width == 64 {
                    u64::MAX
                } else {
                    (1u64 << width) - 1
                };
                *w = ones << (start - i * 64);
            }
        }
        b.trim();
        b
    }

    /// The set `{q}`.
    pub fn single(q: usize) -> Bits {
        let mut b = Bits::new();
        b.insert(q);
        b
    }

    /// The words, least significant first, with no trailing zero word.
    #[inline]
    pub fn words(&self) -> &[u64] {
        &self.0
    }

    /// The first word (qubits 0..64); callers that index basis states use it.
    #[inline]
    pub fn low_u64(&self) -> u64 {
        self.0.first().copied().unwrap_or(0)
    }

    /// True when every member is below 64, so [`Bits::low_u64`] is the whole set.
    #[inline]
    pub fn fits_u64(&self) -> bool {
        self.0.len() <= 1
    }

    #[inline]
    fn trim(&mut self) {
        while self.0.last() == Some(&0) {
            self.0.pop();
        }
    }

    #[inline]
    pub fn is_empty(&self) -> bool {
        self.0.is_empty()
    }

    #[inline]
    pub fn contains(&self, q: usize) -> bool {
        self.0.get(q / 64).is_some_and(|w| (w >> (q % 64)) & 1 == 1)
    }

    pub fn insert(&mut self, q: usize) {
        let i = q / 64;
        if self.0.len() <= i {
            self.0.resize(i + 1, 0);
        }
        self.0[i] |= 1u64 << (q % 64);
    }

    pub fn remove(&mut self, q: usize) {
        if let Some(w) = self.0.get_mut(q / 64) {
            *w &= !(1u64 << (q % 64));
            self.trim();
        }
    }

    /// Flips membership of `q`.
    pub fn toggle(&mut self, q: usize) {
        let i = q / 64;
        if self.0.len() <= i {
            self.0.resize(i + 1, 0);
        }
        self.0[i] ^= 1u64 << (q % 64);
        self.trim();
    }

    /// Number of members.
    #[inline]
    pub fn count(&self) -> u32 {
        self.0.iter().map(|w| w.count_ones()).sum()
    }

    /// `|self ∩ other|`, one popcount per shared word.
    #[inline]
    pub fn and_count(&self, other: &Bits) -> u32 {
        self.0
            .iter()
            .zip(other.0.iter())
            .map(|(a, b)| (a & b).count_ones())
            .sum()
    }

    /// True when the sets share a member.
    #[inline]
    pub fn intersects(&self, other: &Bits) -> bool {
        self.0.iter().zip(other.0.iter()).any(|(a, b)| a & b != 0)
    }

    /// One past the largest member (0 for the empty set).
    pub fn span(&self) -> usize {
        match self.0.last() {
            None => 0,
            Some(w) => (self.0.len() - 1) * 64 + 64 - w.leading_zeros() as usize,
        }
    }

    /// The smallest member.
    pub fn first(&self) -> Option<usize> {
        self.0
            .iter()
            .enumerate()
            .find(|(_, w)| **w != 0)
            .map(|(i, w)| i * 64 + w.trailing_zeros() as usize)
    }

    /// Members in ascending order.
    pub fn ones(&self) -> Ones<'_> {
        Ones {
            words: &self.0,
            index: 0,
            current: self.0.first().copied().unwrap_or(0),
        }
    }

    fn zip_with(&self, other: &Bits, f: impl Fn(u64, u64) -> u64) -> Bits {
        let n = self.0.len().max(other.0.len());
        let mut out: SmallVec<[u64; INLINE_WORDS]> = SmallVec::with_capacity(n);
        for i in 0..n {
            let a = self.0.get(i).copied().unwrap_or(0);
            let b = other.0.get(i).copied().unwrap_or(0);
            out.push(f(a, b));
        }
        let mut b = Bits(out);
        b.trim();
        b
    }

    pub fn xor(&self, other: &Bits) -> Bits {
        self.zip_with(other, |a, b| a ^ b)
    }

    pub fn and(&self, other: &Bits) -> Bits {
        self.zip_with(other, |a, b| a & b)
    }

    pub fn or(&self, other: &Bits) -> Bits {
        self.zip_with(other, |a, b| a | b)
    }

    /// `self ∖ other`.
    pub fn and_not(&self, other: &Bits) -> Bits {
        self.zip_with(other, |a, b| a & !b)
    }

    /// In place `self ^= other`.
    pub fn xor_assign(&mut self, other: &Bits) {
        if self.0.len() < other.0.len() {
            self.0.resize(other.0.len(), 0);
        }
        for (a, b) in self.0.iter_mut().zip(other.0.iter()) {
            *a ^= b;
        }
        self.trim();
    }

    /// In place `self |= other`.
    pub fn or_assign(&mut self, other: &Bits) {
        if self.0.len() < other.0.len() {
            self.0.resize(other.0.len(), 0);
        }
        for (a, b) in self.0.iter_mut().zip(other.0.iter()) {
            *a |= b;
        }
    }

    /// True when every member of `self` is a member of `other`.
    pub fn is_subset(&self, other: &Bits) -> bool {
        self.0
            .iter()
            .enumerate()
            .all(|(i, a)| a & !other.0.get(i).copied().unwrap_or(0) == 0)
    }

    /// The set shifted up by `by` qubits (`q ↦ q + by`).
    pub fn shifted_up(&self, by: usize) -> Bits {
        let mut out = Bits::new();
        for q in self.ones() {
            out.insert(q + by);
        }
        out
    }
}

impl Ord for Bits {
    fn cmp(&self, other: &Bits) -> Ordering {
        // No trailing zero words: a longer word list is a larger number.
        self.0
            .len()
            .cmp(&other.0.len())
            .then_with(|| self.0.iter().rev().cmp(other.0.iter().rev()))
    }
}

impl PartialOrd for Bits {
    fn partial_cmp(&self, other: &Bits) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}

impl FromIterator<usize> for Bits {
    fn from_iter<I: IntoIterator<Item = usize>>(iter: I) -> Bits {
        let mut b = Bits::new();
        for q in iter {
            b.insert(q);
        }
        b
    }
}

/// Iterator over the members of a [`Bits`], ascending.
pub struct Ones<'a> {
    words: &'a [u64],
    index: usize,
    current: u64,
}

impl Iterator for Ones<'_> {
    type Item = usize;

    #[inline]
    fn next(&mut self) -> Option<usize> {
        loop {
            if self.current != 0 {
                let t = self.current.trailing_zeros() as usize;
                self.current &= self.current - 1;
                return Some(self.index * 64 + t);
            }
            self.index += 1;
            self.current = *self.words.get(self.index)?;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn model(b: &Bits) -> std::collections::BTreeSet<usize> {
        b.ones().collect()
    }

    proptest! {
        /// Set operations agree with `BTreeSet` (a reference implementation from the standard
        /// library) on members up to 300, across word boundaries.
        #[test]
        fn operations_agree_with_a_set_model(
            a in proptest::collection::btree_set(0usize..300, 0..40),
            b in proptest::collection::btree_set(0usize..300, 0..40),
        ) {
            let ba: Bits = a.iter().copied().collect();
            let bb: Bits = b.iter().copied().collect();
            prop_assert_eq!(model(&ba), a.clone());
            prop_assert_eq!(model(&ba.xor(&bb)), a.symmetric_difference(&b).copied().collect());
            prop_assert_eq!(model(&ba.and(&bb)), a.intersection(&b).copied().collect());
            prop_assert_eq!(model(&ba.or(&bb)), a.union(&b).copied().collect());
            prop_assert_eq!(model(&ba.and_not(&bb)), a.difference(&b).copied().collect());
            prop_assert_eq!(ba.and_count(&bb) as usize, a.intersection(&b).count());
            prop_assert_eq!(ba.intersects(&bb), a.intersection(&b).next().is_some());
            prop_assert_eq!(ba.is_subset(&bb), a.is_subset(&b));
            prop_assert_eq!(ba.count() as usize, a.len());
            prop_assert_eq!(ba.span(), a.iter().max().map_or(0, |m| m + 1));
            prop_assert_eq!(ba.first(), a.iter().next().copied());
            let mut x = ba.clone();
            x.xor_assign(&bb);
            prop_assert_eq!(&x, &ba.xor(&bb));
            // Trimming: the xor of a set with itself is the canonical empty set.
            prop_assert_eq!(ba.xor(&ba), Bits::new());
        }

        /// Inside one word the order is the order of the `u64` masks.
        #[test]
        fn order_matches_u64_order_inside_one_word(a in any::<u64>(), b in any::<u64>()) {
            prop_assert_eq!(Bits::from_u64(a).cmp(&Bits::from_u64(b)), a.cmp(&b));
        }
    }

    #[test]
    fn ranges_cover_word_boundaries() {
        let r = Bits::range(60, 130);
        assert_eq!(r.count(), 70);
        assert_eq!(r.first(), Some(60));
        assert_eq!(r.span(), 130);
        assert!(Bits::range(5, 5).is_empty());
        assert_eq!(Bits::range(0, 64).words(), &[u64::MAX]);
    }

    #[test]
    fn a_high_member_sorts_above_every_low_set() {
        assert!(Bits::single(64) > Bits::from_u64(u64::MAX));
        let mut b = Bits::single(200);
        b.remove(200);
        assert_eq!(b, Bits::new());
        assert!(b.words().is_empty());
    }
}
