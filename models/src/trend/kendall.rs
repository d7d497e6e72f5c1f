//! Kendall score `S` in O(n log n) and its exact null distribution.
//!
//! ```text
//! S = Σ_{i<j} sign(x_j - x_i) = P - Q
//!   P = #{i<j : x_j > x_i}  (concordant with time),  Q = #{i<j : x_j < x_i}  (discordant)
//!   P + Q + T = n(n-1)/2,   T = Σ_g t_g(t_g-1)/2 over groups of tied values
//! ⇒ S = n(n-1)/2 - T - 2Q
//! ```
//!
//! `Q` is the number of strict inversions of the sequence, counted while merge
//! sorting it (Knight 1966); the sorted output then yields the tie groups.
//!
//! # References
//! W. R. Knight (1966), "A computer method for calculating Kendall's tau with
//! ungrouped data", *Journal of the American Statistical Association*
//! 61(314), 436-439.

/// Counts pairs `i < j` with `v[j] < v[i]` (strict) and sorts `v` ascending.
/// Bottom-up merge sort; `buf` must have the same length as `v`.
pub(crate) fn sort_count_strict_inversions(v: &mut Vec<f64>, buf: &mut Vec<f64>) -> u64 {
    let n = v.len();
    buf.clear();
    buf.resize(n, 0.0);
    let mut inv: u64 = 0;
    // short runs by insertion sort: cheaper than merging single elements
    const RUN: usize = 16;
    for chunk in v.chunks_mut(RUN) {
        for i in 1..chunk.len() {
            let x = chunk[i];
            let mut j = i;
            while j > 0 && chunk[j - 1] > x {
                chunk[j] = chunk[j - 1];
                j -= 1;
            }
            chunk[j] = x;
            inv += (i - j) as u64;
        }
    }
    let mut width = RUN;
    while width < n {
        let mut lo = 0;
        while lo < n {
            let mid = (lo + width).min(n);
            let hi = (lo + 2 * width).min(n);
            let (mut i, mut j, mut k) = (lo, mid, lo);
            while i < mid && j < hi {
                if v[j] < v[i] {
                    inv += (mid - i) as u64;
                    buf[k] = v[j];
                    j += 1;
                } else {
                    buf[k] = v[i];
                    i += 1;
                }
                k += 1;
            }
            buf[k..k + (mid - i)].copy_from_slice(&v[i..mid]);
            k += mid - i;
            buf[k..k + (hi - j)].copy_from_slice(&v[j..hi]);
            lo = hi;
        }
        std::mem::swap(v, buf);
        width *= 2;
    }
    inv
}

/// Sizes (> 1) of groups of equal values in an ascending slice.
pub(crate) fn tie_groups_sorted(sorted: &[f64]) -> Vec<u64> {
    let mut out = Vec::new();
    let mut i = 0;
    while i < sorted.len() {
        let mut j = i + 1;
        while j < sorted.len() && sorted[j] == sorted[i] {
            j += 1;
        }
        if j - i > 1 {
            out.push((j - i) as u64);
        }
        i = j;
    }
    out
}

/// Kendall score and tie structure of a series against its time order.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct KendallScore {
    pub(crate) s: i64,
    pub(crate) ties: Vec<u64>,
}

/// `S` in O(n log n). Inputs must be finite (checked by the callers).
pub(crate) fn kendall_score(x: &[f64]) -> KendallScore {
    let n = x.len() as u64;
    let mut v = x.to_vec();
    let mut buf = Vec::new();
    let q = sort_count_strict_inversions(&mut v, &mut buf);
    let ties = tie_groups_sorted(&v);
    let t: u64 = ties.iter().map(|g| g * (g - 1) / 2).sum();
    let pairs = n * n.saturating_sub(1) / 2;
    let s = pairs as i64 - t as i64 - 2 * q as i64;
    KendallScore { s, ties }
}

/// `S` by the O(n²) definition; the reference the fast path is tested against.
#[cfg(test)]
pub(crate) fn kendall_score_naive(x: &[f64]) -> i64 {
    let mut s = 0i64;
    for i in 0..x.len() {
        for j in i + 1..x.len() {
            s += if x[j] > x[i] {
                1
            } else if x[j] < x[i] {
                -1
            } else {
                0
            };
        }
    }
    s
}

/// Variance of `S` under independence with the tie correction.
///
/// ```text
/// Var(S) = [ n(n-1)(2n+5) - Σ_g t_g(t_g-1)(2t_g+5) ] / 18
/// ```
pub(crate) fn var_s(n: usize, ties: &[u64]) -> f64 {
    let nf = n as f64;
    let corr: f64 = ties
        .iter()
        .map(|&g| {
            let g = g as f64;
            g * (g - 1.0) * (2.0 * g + 5.0)
        })
        .sum();
    (nf * (nf - 1.0) * (2.0 * nf + 5.0) - corr) / 18.0
}

/// Exact null distribution of `S` for `n` distinct values: probabilities of
/// each inversion count `k = 0..=n(n-1)/2` (the Mahonian numbers divided by
/// `n!`), built by the recursion `p_m(k) = (1/m) Σ_{j=0}^{m-1} p_{m-1}(k-j)`
/// (inserting the `m`-th element creates `j` new inversions, each with
/// probability `1/m`). `S = n(n-1)/2 - 2k`.
pub(crate) fn inversion_pmf(n: usize) -> Vec<f64> {
    let mut p = vec![1.0];
    for m in 2..=n {
        let len = p.len() + m - 1;
        let mut next = vec![0.0; len];
        // sliding-window sum of width m
        let mut window = 0.0;
        for k in 0..len {
            if k < p.len() {
                window += p[k];
            }
            if k >= m && k - m < p.len() {
                window -= p[k - m];
            }
            next[k] = window / m as f64;
        }
        p = next;
    }
    p
}

/// Exact `(P(S >= s), P(S <= s))` for `n` distinct values.
pub(crate) fn exact_tails(n: usize, s: i64) -> (f64, f64) {
    let pmf = inversion_pmf(n);
    let pairs = (n * n.saturating_sub(1) / 2) as i64;
    // S >= s  ⇔  k <= (pairs - s)/2
    let mut upper = 0.0;
    let mut lower = 0.0;
    for (k, p) in pmf.iter().enumerate() {
        let sk = pairs - 2 * k as i64;
        if sk >= s {
            upper += p;
        }
        if sk <= s {
            lower += p;
        }
    }
    (upper.min(1.0), lower.min(1.0))
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    #[test]
    fn holy_cross_example_s_is_54() {
        // P-confirmed worked example, EXTERNAL-CHECKS §9 check A
        let x =
            [12.9, 14.8, 13.2, 15.7, 13.8, 15.6, 12.9, 11.0, 17.3, 15.9, 19.0, 18.3, 20.1, 21.7];
        let k = kendall_score(&x);
        assert_eq!(k.s, 54);
        assert_eq!(k.ties, vec![2]);
        assert!((var_s(14, &k.ties) - 332.6666666666667).abs() < 1e-9);
    }

    #[test]
    fn exact_upper_tail_for_n4_is_one_sixth() {
        // EXTERNAL-CHECKS §9 check B: enumeration of all 24 permutations gives 4/24
        let k = kendall_score(&[10.0, 15.0, 14.0, 20.0]);
        assert_eq!(k.s, 4);
        let (up, _) = exact_tails(4, 4);
        assert!((up - 1.0 / 6.0).abs() < 1e-15);
    }

    #[test]
    fn inversion_pmf_matches_brute_force_for_n6() {
        // count inversions over all 720 permutations directly
        fn perms(v: &mut Vec<usize>, k: usize, out: &mut Vec<usize>) {
            if k == v.len() {
                let mut inv = 0;
                for i in 0..v.len() {
                    for j in i + 1..v.len() {
                        if v[j] < v[i] {
                            inv += 1;
                        }
                    }
                }
                out.push(inv);
                return;
            }
            for i in k..v.len() {
                v.swap(k, i);
                perms(v, k + 1, out);
                v.swap(k, i);
            }
        }
        let mut counts = Vec::new();
        perms(&mut (0..6).collect(), 0, &mut counts);
        let pmf = inversion_pmf(6);
        for (k, p) in pmf.iter().enumerate() {
            let c = counts.iter().filter(|&&c| c == k).count() as f64;
            assert!((p - c / 720.0).abs() < 1e-15, "k={k}");
        }
    }

    proptest! {
        #[test]
        fn fast_s_equals_naive_s_with_ties(xs in prop::collection::vec(0u8..12, 0..300)) {
            // small integer range forces many ties
            let x: Vec<f64> = xs.iter().map(|&v| f64::from(v)).collect();
            prop_assert_eq!(kendall_score(&x).s, kendall_score_naive(&x));
        }

        #[test]
        fn fast_s_equals_naive_s_continuous(x in prop::collection::vec(-1e6f64..1e6, 0..300)) {
            prop_assert_eq!(kendall_score(&x).s, kendall_score_naive(&x));
        }
    }
}
