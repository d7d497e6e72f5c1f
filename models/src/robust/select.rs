//! Selection helpers shared by the estimators: order statistics without a
//! full sort, and the k-th smallest element of two sorted sequences that are
//! only available through index functions (used by Sn and the rolling MAD).

use std::cmp::Ordering;

/// Total order on the finite values this module works with.
#[inline]
pub(crate) fn cmp(a: &f64, b: &f64) -> Ordering {
    a.total_cmp(b)
}

/// Copies the finite values of `x` into `scratch` (cleared first).
#[inline]
pub(crate) fn fill_finite(x: &[f64], scratch: &mut Vec<f64>) {
    scratch.clear();
    scratch.extend(x.iter().copied().filter(|v| v.is_finite()));
}

/// Mean of two middle order statistics without overflow for huge values.
#[inline]
pub(crate) fn midpoint(a: f64, b: f64) -> f64 {
    let s = (a + b) * 0.5;
    if s.is_finite() { s } else { a * 0.5 + b * 0.5 }
}

/// The `k`-th smallest (0-based) value of `v`, reordering `v`.
///
/// After the call, `v[..k]` holds values `<=` the result and `v[k+1..]`
/// values `>=` it (the `select_nth_unstable` contract).
#[inline]
pub(crate) fn select(v: &mut [f64], k: usize) -> f64 {
    *v.select_nth_unstable_by(k, cmp).1
}

/// Median of `v` (non-empty, all finite), reordering `v`.
pub(crate) fn median_in_place_finite(v: &mut [f64]) -> f64 {
    let n = v.len();
    let hi_idx = n / 2;
    let hi = select(v, hi_idx);
    if n % 2 == 1 {
        hi
    } else {
        // The lower middle value is the largest element left of the pivot.
        let lo = v[..hi_idx].iter().copied().fold(f64::NEG_INFINITY, f64::max);
        midpoint(lo, hi)
    }
}

/// The `k`-th smallest (0-based) element of the union of two ascending
/// sequences `a(0..a_len)` and `b(0..b_len)`, in `O(log(a_len + b_len))`.
///
/// # Panics
/// Panics (debug) if `k >= a_len + b_len`.
pub(crate) fn kth_of_two<A, B>(a_len: usize, a: A, b_len: usize, b: B, k: usize) -> f64
where
    A: Fn(usize) -> f64,
    B: Fn(usize) -> f64,
{
    debug_assert!(k < a_len + b_len, "rank {k} out of range");
    // Take i elements from a and j = k + 1 - i from b.
    let need = k + 1;
    let mut lo = need.saturating_sub(b_len);
    let mut hi = need.min(a_len);
    while lo < hi {
        let i = lo + (hi - lo) / 2;
        let j = need - i;
        // Too few taken from a if a's next element is below b's last taken.
        if a(i) < b(j - 1) {
            lo = i + 1;
        } else {
            hi = i;
        }
    }
    let i = lo;
    let j = need - i;
    match (i, j) {
        (0, _) => b(j - 1),
        (_, 0) => a(i - 1),
        _ => a(i - 1).max(b(j - 1)),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    proptest! {
        #[test]
        fn kth_of_two_matches_merge(
            mut a in prop::collection::vec(-50i32..50, 0..30),
            mut b in prop::collection::vec(-50i32..50, 0..30),
        ) {
            a.sort_unstable();
            b.sort_unstable();
            let mut all: Vec<i32> = a.iter().chain(b.iter()).copied().collect();
            all.sort_unstable();
            for (k, want) in all.iter().enumerate() {
                let got = kth_of_two(a.len(), |i| f64::from(a[i]), b.len(), |i| f64::from(b[i]), k);
                prop_assert_eq!(got, f64::from(*want));
            }
        }
    }
}
