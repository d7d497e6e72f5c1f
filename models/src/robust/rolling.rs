//! Sliding-window median and MAD without re-sorting each window.

use super::select::{cmp, kth_of_two, midpoint};

/// A multiset of finite values kept sorted, for sliding windows.
///
/// Insert and remove locate the position by binary search (`O(log w)`) and
/// shift the tail (`O(w)` `memmove`, fast for the window sizes used here).
/// The median is then `O(1)` and the MAD `O(log w)`: the distances to the
/// median form two sorted runs (left of it, read backwards, and right of it),
/// and the middle of their union is found by a two-sequence selection.
///
/// ```text
/// sorted window:   s_0 ≤ … ≤ s_{c-1} ≤ med < s_c ≤ … ≤ s_{w-1}
/// left  run:       med - s_{c-1}, med - s_{c-2}, …   (ascending)
/// right run:       s_c - med,     s_{c+1} - med, …   (ascending)
/// ```
#[derive(Debug, Clone, Default)]
pub struct SortedWindow {
    values: Vec<f64>,
}

impl SortedWindow {
    /// An empty window with room for `capacity` values.
    pub fn with_capacity(capacity: usize) -> Self {
        Self { values: Vec::with_capacity(capacity) }
    }

    /// Number of values held.
    pub fn len(&self) -> usize {
        self.values.len()
    }

    /// `true` when the window holds no value.
    pub fn is_empty(&self) -> bool {
        self.values.is_empty()
    }

    /// Removes every value, keeping the allocation.
    pub fn clear(&mut self) {
        self.values.clear();
    }

    /// The values in ascending order.
    pub fn as_sorted(&self) -> &[f64] {
        &self.values
    }

    /// Adds `v`; non-finite values are ignored (returns `false`).
    pub fn insert(&mut self, v: f64) -> bool {
        if !v.is_finite() {
            return false;
        }
        let at = self.values.partition_point(|x| cmp(x, &v).is_lt());
        self.values.insert(at, v);
        true
    }

    /// Removes one copy of `v`; returns `false` if it is not held (always for
    /// non-finite `v`, which [`insert`](Self::insert) never stores).
    pub fn remove(&mut self, v: f64) -> bool {
        if !v.is_finite() {
            return false;
        }
        let at = self.values.partition_point(|x| cmp(x, &v).is_lt());
        if at < self.values.len() && self.values[at] == v {
            self.values.remove(at);
            true
        } else {
            false
        }
    }

    /// Median of the window (`None` when empty).
    pub fn median(&self) -> Option<f64> {
        let s = &self.values;
        let n = s.len();
        match n {
            0 => None,
            _ if n % 2 == 1 => Some(s[n / 2]),
            _ => Some(midpoint(s[n / 2 - 1], s[n / 2])),
        }
    }

    /// Raw MAD about the window median (`None` when empty).
    pub fn mad_raw(&self) -> Option<f64> {
        let med = self.median()?;
        let s = &self.values;
        let n = s.len();
        let c = s.partition_point(|&x| x <= med);
        let left = |t: usize| med - s[c - 1 - t];
        let right = |t: usize| s[c + t] - med;
        let hi = kth_of_two(c, left, n - c, right, n / 2);
        if n % 2 == 1 {
            Some(hi)
        } else {
            let lo = kth_of_two(c, left, n - c, right, n / 2 - 1);
            Some(midpoint(lo, hi))
        }
    }
}

/// Centred rolling median and raw MAD; `NaN` where not evaluated.
#[derive(Debug, Clone, PartialEq)]
pub struct RollingMedianMad {
    /// Window half-width `k` (window `2k + 1` points).
    pub half_width: usize,
    /// Median of `x[i-k ..= i+k]` (units of `x`); `NaN` for the first and last
    /// `k` points and for windows without a finite value.
    pub median: Vec<f64>,
    /// Raw MAD of the same window (units of `x`); multiply by
    /// [`MAD_NORMAL`](super::MAD_NORMAL) for the normal-consistent scale.
    pub mad_raw: Vec<f64>,
}

/// Centred rolling median and raw MAD over windows `x[i-k ..= i+k]`.
///
/// ```text
/// med_i = med{ x_{i-k}, …, x_{i+k} },   MAD_i = med{ |x_j - med_i| : |j - i| ≤ k },   k ≤ i < n - k
/// ```
///
/// Windows are positional (by index, not time). The first and last `k` points
/// are not evaluated (`NaN`), matching pandas `rolling(2k + 1, center=True)`.
/// Non-finite values are left out of their windows, so a window's median is
/// over its finite values only. Cost: `O(n·(log k + k))` with a small constant
/// for the shift, no per-window sort or allocation.
///
/// # References
/// R. K. Pearson (2002), "Outliers in process modeling and identification",
/// IEEE Transactions on Control Systems Technology 10(1), 55-63.
pub fn rolling_median_mad(x: &[f64], half_width: usize) -> RollingMedianMad {
    let n = x.len();
    let mut median = vec![f64::NAN; n];
    let mut mad_raw = vec![f64::NAN; n];
    let w = 2 * half_width + 1;
    if n >= w {
        let mut win = SortedWindow::with_capacity(w);
        for &v in &x[..w - 1] {
            win.insert(v);
        }
        for i in half_width..n - half_width {
            win.insert(x[i + half_width]);
            if let (Some(m), Some(d)) = (win.median(), win.mad_raw()) {
                median[i] = m;
                mad_raw[i] = d;
            }
            win.remove(x[i - half_width]);
        }
    }
    RollingMedianMad { half_width, median, mad_raw }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::robust::{mad_raw, median};
    use proptest::prelude::*;

    #[test]
    fn window_tracks_inserts_and_removes() {
        let mut w = SortedWindow::default();
        for v in [5.0, 1.0, f64::NAN, 3.0, 3.0] {
            w.insert(v);
        }
        assert_eq!(w.as_sorted(), &[1.0, 3.0, 3.0, 5.0]);
        assert!(w.remove(3.0));
        assert!(!w.remove(4.0));
        assert_eq!(w.median(), Some(3.0));
        assert_eq!(w.mad_raw(), Some(2.0));
    }

    proptest! {
        #[test]
        fn rolling_equals_naive_per_window(
            xs in prop::collection::vec(prop_oneof![9 => -100.0f64..100.0, 1 => Just(f64::NAN), 1 => Just(1.5)], 0..120),
            k in 0usize..8,
        ) {
            let r = rolling_median_mad(&xs, k);
            for i in 0..xs.len() {
                if i < k || i + k >= xs.len() {
                    prop_assert!(r.median[i].is_nan());
                    continue;
                }
                let win = &xs[i - k..=i + k];
                match (median(win), mad_raw(win)) {
                    (Some(m), Some(d)) => {
                        prop_assert_eq!(r.median[i], m);
                        prop_assert_eq!(r.mad_raw[i], d);
                    }
                    _ => prop_assert!(r.median[i].is_nan()),
                }
            }
        }
    }
}
