//! One stable sort for the whole crate.
//!
//! Each `slice::sort_by` with its own element type and comparator is a separate copy of the
//! standard library's sort (driftsort, its merges and small-sorts: 1–6 kB of wasm each), and the
//! page's core had 78 such copies (89 kB). Here every sort of values other than plain floats
//! sorts indices through one comparator behind a `dyn` reference, so the sort's code is there
//! once; only the small permutation that moves the elements is per type.
//!
//! The result is the one `slice::sort_by` gives: a stable sort's order is fixed by its comparator
//! alone (ties keep their first order), and sorting positions compares the same elements in the
//! same way.

use std::cmp::Ordering;

/// Sorts `values` stably by `compare`, as `values.sort_by(compare)` does.
pub fn sort_by<T>(values: &mut [T], compare: impl Fn(&T, &T) -> Ordering) {
    if values.len() < 2 {
        return;
    }
    let mut order: Vec<usize> = (0..values.len()).collect();
    sort_positions(&mut order, &|a, b| compare(&values[a], &values[b]));
    permute(values, &order);
}

/// Sorts floats by `f64::total_cmp` (−0 before +0, NaN at the ends by sign), as
/// `values.sort_by(f64::total_cmp)` does.
pub fn sort_floats(values: &mut [f64]) {
    values.sort_by(f64::total_cmp);
}

/// The one instantiation of the standard sort for compound values: positions ordered by the
/// elements they point at.
fn sort_positions(order: &mut [usize], compare: &dyn Fn(usize, usize) -> Ordering) {
    order.sort_by(|&a, &b| compare(a, b));
}

/// Puts `values[order[k]]` at `k`, in place, by following each cycle of the permutation.
fn permute<T>(values: &mut [T], order: &[usize]) {
    // `target[i]`: where the element now at `i` belongs.
    let mut target = vec![0; order.len()];
    for (k, &from) in order.iter().enumerate() {
        target[from] = k;
    }
    for i in 0..values.len() {
        while target[i] != i {
            let j = target[i];
            values.swap(i, j);
            target.swap(i, j);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The standard library's stable `sort_by` is the reference: equal keys keep their order.
    #[test]
    fn same_order_as_the_standard_stable_sort() {
        // A fixed pseudo-random sequence (a 64-bit LCG, Knuth's MMIX constants) with many ties.
        let mut state: u64 = 12345;
        for n in [0usize, 1, 2, 3, 7, 20, 33, 100, 257] {
            let items: Vec<(u32, u32)> = (0..n)
                .map(|k| {
                    state = state
                        .wrapping_mul(6364136223846793005)
                        .wrapping_add(1442695040888963407);
                    (((state >> 33) % 7) as u32, k as u32)
                })
                .collect();
            let mut expected = items.clone();
            expected.sort_by(|a, b| a.0.cmp(&b.0));
            let mut got = items;
            sort_by(&mut got, |a, b| a.0.cmp(&b.0));
            assert_eq!(got, expected, "n = {n}");
        }
    }

    /// IEEE 754 totalOrder (the reference `f64::total_cmp` implements): −0 before +0.
    #[test]
    fn floats_in_total_order() {
        let mut v = [3.0, 0.0, -0.0, -1.5, 2.0];
        sort_floats(&mut v);
        let bits: Vec<u64> = v.iter().map(|x| x.to_bits()).collect();
        let expected: Vec<u64> = [-1.5f64, -0.0, 0.0, 2.0, 3.0]
            .iter()
            .map(|x| x.to_bits())
            .collect();
        assert_eq!(bits, expected);
    }
}
