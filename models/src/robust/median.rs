//! Sample median by linear-time selection.

use super::select::{fill_finite, median_in_place_finite};

/// Sample median of the finite values of `x`.
///
/// ```text
/// m = x_(h)                       n odd,  h = (n + 1) / 2
/// m = (x_(n/2) + x_(n/2 + 1)) / 2 n even
/// ```
///
/// where `x_(i)` is the i-th order statistic of the `n` finite values. The
/// order statistics come from `select_nth_unstable` (introselect, `O(n)`), not
/// from a sort. Units: those of `x`.
///
/// NaN and ±∞ are **ignored** (treated as missing readings), so the result is
/// the median of the remaining values; `None` when none remain.
///
/// This copies `x` once. Hot paths should call [`median_with_scratch`] with a
/// long-lived buffer, or [`median_in_place`] on data they own.
///
/// # References
/// C. A. R. Hoare (1961), "Algorithm 65: Find", Communications of the ACM
/// 4(7), 321-322 (selection); D. R. Musser (1997), "Introspective sorting and
/// selection algorithms", Software: Practice and Experience 27(8), 983-993.
pub fn median(x: &[f64]) -> Option<f64> {
    let mut scratch = Vec::with_capacity(x.len());
    median_with_scratch(x, &mut scratch)
}

/// [`median`] using a caller-owned buffer, so repeated calls do not allocate
/// once `scratch` has grown to the largest input. `scratch` is overwritten.
pub fn median_with_scratch(x: &[f64], scratch: &mut Vec<f64>) -> Option<f64> {
    fill_finite(x, scratch);
    if scratch.is_empty() {
        return None;
    }
    Some(median_in_place_finite(scratch))
}

/// [`median`] that reorders `x` itself instead of copying it.
///
/// Non-finite values are moved to the end of `x` and ignored; the finite
/// prefix is left partially ordered around the median.
pub fn median_in_place(x: &mut [f64]) -> Option<f64> {
    let n_finite = partition_finite(x);
    if n_finite == 0 {
        return None;
    }
    Some(median_in_place_finite(&mut x[..n_finite]))
}

/// Moves finite values to the front, returns how many there are.
pub(crate) fn partition_finite(x: &mut [f64]) -> usize {
    let mut w = 0;
    for r in 0..x.len() {
        if x[r].is_finite() {
            x.swap(w, r);
            w += 1;
        }
    }
    w
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;
    use proptest::prelude::*;

    // Catalogue §1 inputs (EXTERNAL-CHECKS.md).
    const X5: [f64; 5] = [1.0, 2.0, 3.0, 4.0, 100.0];
    const X8: [f64; 8] = [1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 1000.0];
    use crate::robust::testdata::CHEM;

    #[test]
    fn median_matches_numpy_on_catalogue_inputs() {
        // numpy 2.4.6 np.median, catalogue §1 (T-exact)
        assert_eq!(median(&X5), Some(3.0));
        assert_eq!(median(&X8), Some(4.5));
        assert_abs_diff_eq!(median(&CHEM).unwrap(), 3.385, epsilon = 1e-12);
    }

    #[test]
    fn median_ignores_nan_and_infinities() {
        let x = [f64::NAN, 1.0, f64::INFINITY, 2.0, 3.0, f64::NEG_INFINITY];
        assert_eq!(median(&x), Some(2.0));
        assert_eq!(median(&[f64::NAN]), None);
        assert_eq!(median(&[]), None);
    }

    #[test]
    fn median_in_place_and_scratch_agree() {
        let mut v = CHEM.to_vec();
        v.push(f64::NAN);
        let mut s = Vec::new();
        let a = median_with_scratch(&v, &mut s);
        let b = median_in_place(&mut v);
        assert_eq!(a, b);
    }

    fn naive_median(x: &[f64]) -> f64 {
        let mut v = x.to_vec();
        v.sort_by(f64::total_cmp);
        let n = v.len();
        if n % 2 == 1 { v[n / 2] } else { (v[n / 2 - 1] + v[n / 2]) / 2.0 }
    }

    proptest! {
        #[test]
        fn median_equals_sorted_definition(xs in prop::collection::vec(-1e6f64..1e6, 1..300)) {
            prop_assert_eq!(median(&xs).unwrap(), naive_median(&xs));
        }

        #[test]
        fn median_is_location_and_scale_equivariant(
            xs in prop::collection::vec(-1e3f64..1e3, 1..300), a in -1e3f64..1e3, c in -100.0f64..100.0,
        ) {
            let t: Vec<f64> = xs.iter().map(|x| a + c * x).collect();
            let m = median(&xs).unwrap();
            prop_assert!((median(&t).unwrap() - (a + c * m)).abs() <= 1e-9 * (1.0 + a.abs() + (c * m).abs()));
        }

        #[test]
        fn median_is_permutation_invariant(xs in prop::collection::vec(-1e6f64..1e6, 1..200), seed in any::<u64>()) {
            let mut p = xs.clone();
            // Fisher-Yates with a tiny LCG: the permutation only needs to vary.
            let mut s = seed | 1;
            for i in (1..p.len()).rev() {
                s = s.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
                let j = (s >> 33) as usize % (i + 1);
                p.swap(i, j);
            }
            prop_assert_eq!(median(&p), median(&xs));
        }

        #[test]
        fn median_stays_in_clean_range_under_49_percent_contamination(
            clean in prop::collection::vec(0.0f64..1.0, 51..52),
            bad in prop::collection::vec(prop_oneof![1e6f64..1e9, -1e9f64..-1e6], 49..50),
        ) {
            // 51 clean points in [0, 1), 49 wild ones: the median must stay inside the clean range.
            let lo = clean.iter().copied().fold(f64::INFINITY, f64::min);
            let hi = clean.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            let all: Vec<f64> = clean.iter().chain(bad.iter()).copied().collect();
            let m = median(&all).unwrap();
            prop_assert!(m >= lo && m <= hi, "median {m} outside clean range [{lo}, {hi}]");
        }
    }
}
