//! Stable sorting of lists keyed by Pauli strings, at the sizes a utility-scale `.ham` file
//! brings (10⁶ strings on hundreds of qubits).
//!
//! In: a `Vec<(PauliString, T)>`. Out: the same items in the order of [`PauliString`]'s `Ord`,
//! equal strings kept in their input order (a stable sort), so that sums accumulated along the
//! result see equal strings in file order. Strings wider than 128 qubits keep their words on
//! the heap, and a comparison sort that follows two pointers per comparison spends its time in
//! cache misses; here every string is first written as one fixed-size key
//! `[len x, x words top-down…, len z, z words top-down…]` (zero-padded to the widest string),
//! whose lexicographic order is exactly the strings' order (a longer word list is the larger
//! number, and equal lengths compare from the top word down), and the keys with their positions
//! are sorted in parallel; the position breaks ties, which makes the unstable key sort stable.
//! Widths above [`FLAT_KEY_WORDS`] words fall back to the comparison sort.

use super::PauliString;
use rayon::prelude::*;

/// The widest string (in 64-bit words) sorted by flat keys: 1,024 qubits.
pub const FLAT_KEY_WORDS: usize = 16;

/// Sorts `items` by string, stably (see the module documentation).
pub fn sort_by_string<T: Send + Sync>(items: &mut Vec<(PauliString, T)>) {
    let words = items
        .par_iter()
        .map(|(p, _)| p.x.words().len().max(p.z.words().len()))
        .max()
        .unwrap_or(0);
    if items.len() > u32::MAX as usize {
        items.par_sort_by(|a, b| a.0.cmp(&b.0));
        return;
    }
    macro_rules! by_width {
        ($($w:literal),*) => {
            match words {
                $($w => sort_flat::<T, { 2 * $w + 2 }>(items, $w),)*
                _ => items.par_sort_by(|a, b| a.0.cmp(&b.0)),
            }
        };
    }
    by_width!(0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15, 16);
}

/// The flat-key sort for strings of at most `w` words; `K = 2w + 2`.
fn sort_flat<T: Send + Sync, const K: usize>(items: &mut Vec<(PauliString, T)>, w: usize) {
    debug_assert_eq!(K, 2 * w + 2);
    let mut keys: Vec<([u64; K], u32)> = items
        .par_iter()
        .enumerate()
        .map(|(i, (p, _))| {
            let mut key = [0u64; K];
            let (x, z) = (p.x.words(), p.z.words());
            key[0] = x.len() as u64;
            for (j, word) in x.iter().enumerate() {
                key[w - j] = *word;
            }
            key[w + 1] = z.len() as u64;
            for (j, word) in z.iter().enumerate() {
                key[2 * w + 1 - j] = *word;
            }
            (key, i as u32)
        })
        .collect();
    keys.par_sort_unstable();
    let mut slots: Vec<Option<(PauliString, T)>> = items.drain(..).map(Some).collect();
    items.extend(keys.iter().map(|&(_, i)| {
        slots[i as usize]
            .take()
            .expect("every position appears once among the keys")
    }));
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::pauli::Bits;
    use proptest::prelude::*;

    fn string(x: &[usize], z: &[usize]) -> PauliString {
        PauliString {
            x: x.iter().copied().collect::<Bits>(),
            z: z.iter().copied().collect::<Bits>(),
        }
    }

    proptest! {
        /// Against the standard library's stable sort by the strings' own `Ord`, on strings of
        /// 0–1,100 qubits (flat keys up to 16 words, the fallback above), with repeats.
        #[test]
        fn equals_the_stable_comparison_sort(
            width in prop_oneof![Just(1usize), Just(64), Just(130), Just(300), Just(1100)],
            raw in proptest::collection::vec(
                (proptest::collection::vec(0usize..2000, 0..4),
                 proptest::collection::vec(0usize..2000, 0..4)),
                0..60,
            ),
            repeats in proptest::collection::vec(0usize..60, 0..20),
        ) {
            let mut items: Vec<(PauliString, usize)> = raw
                .iter()
                .map(|(x, z)| {
                    let fit = |v: &Vec<usize>| v.iter().map(|q| q % width).collect::<Vec<_>>();
                    string(&fit(x), &fit(z))
                })
                .enumerate()
                .map(|(i, p)| (p, i))
                .collect();
            for r in repeats {
                if let Some((p, _)) = items.get(r).cloned() {
                    let n = items.len();
                    items.push((p, n));
                }
            }
            let mut expected = items.clone();
            expected.sort_by(|a, b| a.0.cmp(&b.0));
            sort_by_string(&mut items);
            prop_assert_eq!(items, expected);
        }
    }

    #[test]
    fn a_longer_word_list_sorts_after_a_shorter_one() {
        // Bits as binary numbers: {64} = 2^64 > {0, 1, …, 63}.
        let low: Vec<usize> = (0..64).collect();
        let mut items = vec![(string(&[64], &[]), 0), (string(&low, &[]), 1)];
        sort_by_string(&mut items);
        assert_eq!(
            items.iter().map(|(_, i)| *i).collect::<Vec<_>>(),
            vec![1, 0]
        );
    }
}
