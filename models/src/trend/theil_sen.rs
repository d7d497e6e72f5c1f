//! Theil–Sen slope with Sen's (1968) distribution-free confidence interval.

use linfa::ParamGuard;

use super::kendall::{sort_count_strict_inversions, tie_groups_sorted};
use crate::dist::norm_ppf;

/// Errors from checking [`TheilSenParams`].
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum TheilSenParamsError {
    /// Confidence level outside (0, 1).
    #[error("confidence must be in (0, 1), got {0}; 0.95 is the usual choice")]
    Confidence(f64),
}

/// Errors from fitting a Theil–Sen line.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum TheilSenError {
    /// Invalid parameters.
    #[error(transparent)]
    Params(#[from] TheilSenParamsError),
    /// Time and value slices differ in length.
    #[error("time axis has {t} values but the series has {y}; pass one time stamp per value")]
    LengthMismatch {
        /// length of the time axis
        t: usize,
        /// length of the values
        y: usize,
    },
    /// Every time stamp is identical, so no slope is defined.
    #[error(
        "need at least two distinct time stamps to estimate a slope, got {n} values at one time"
    )]
    NoSlope {
        /// number of values
        n: usize,
    },
    /// A time stamp or value is NaN or infinite.
    #[error(
        "{field} at index {index} is not finite ({value}); drop or interpolate missing values first"
    )]
    NonFinite {
        /// `"time"` or `"value"`
        field: &'static str,
        /// position in the slice
        index: usize,
        /// the offending value
        value: f64,
    },
}

/// Checked parameters of the Theil–Sen estimator (see [`TheilSen`]).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct TheilSenValidParams {
    confidence: f64,
}

/// Unchecked parameters of the Theil–Sen estimator; turn them into
/// [`TheilSenValidParams`] with [`ParamGuard::check`].
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct TheilSenParams(TheilSenValidParams);

impl Default for TheilSenParams {
    fn default() -> Self {
        Self(TheilSenValidParams { confidence: 0.95 })
    }
}

impl TheilSenParams {
    /// Two-sided confidence level of the slope interval (default 0.95).
    pub fn confidence(mut self, confidence: f64) -> Self {
        self.0.confidence = confidence;
        self
    }

    /// Checks the parameters and fits (shorthand for `self.check()?.fit(t, y)`).
    ///
    /// # Errors
    /// [`TheilSenError::Params`] for invalid parameters, otherwise as
    /// [`TheilSenValidParams::fit`].
    pub fn fit(&self, t: &[f64], y: &[f64]) -> Result<TheilSen, TheilSenError> {
        self.check_ref()?.fit(t, y)
    }
}

impl TheilSenValidParams {
    /// Two-sided confidence level of the slope interval.
    pub fn confidence(&self) -> f64 {
        self.confidence
    }
}

impl ParamGuard for TheilSenParams {
    type Checked = TheilSenValidParams;
    type Error = TheilSenParamsError;

    fn check_ref(&self) -> Result<&Self::Checked, Self::Error> {
        let c = self.0.confidence;
        if !(c > 0.0 && c < 1.0) {
            return Err(TheilSenParamsError::Confidence(c));
        }
        Ok(&self.0)
    }

    fn check(self) -> Result<Self::Checked, Self::Error> {
        self.check_ref()?;
        Ok(self.0)
    }
}

/// A fitted Theil–Sen line `y ≈ intercept + slope·t`.
///
/// ```text
/// slope     = median{ (y_j - y_i)/(t_j - t_i) : t_j > t_i }                       (Theil 1950, Sen 1968)
/// intercept = median(y) - slope · median(t)                                       (scipy's "separate" rule)
/// CI (Sen 1968, eq. 2.6), N slopes sorted ascending, 0-based:
///   σ² = [ n(n-1)(2n+5) - Σ_t g(g-1)(2g+5) - Σ_y g(g-1)(2g+5) ] / 18    (ties in t and in y)
///   lower = slope[ round((N - z σ)/2) - 1 ],  upper = slope[ round((N + z σ)/2) ],  z = Φ⁻¹(1 - α/2)
/// ```
///
/// `round` is round-half-to-even and the indices are clamped to `[0, N-1]`,
/// exactly as `scipy.stats.theilslopes`. Pairs with equal time stamps give no
/// slope. The median of an even number of slopes is the mean of the middle two.
///
/// **Units:** `slope`, `slope_low`, `slope_high` are value units per time
/// unit (for example bar per day if `t` is in days); `intercept` is in value
/// units at `t = 0`.
///
/// | Parameter    | Default | Units | Range  | Purpose                                  |
/// |--------------|---------|-------|--------|------------------------------------------|
/// | `confidence` | 0.95    | –     | (0, 1) | two-sided level of the slope interval    |
///
/// **Cost:** O(n log n) expected time and O(n) memory. The k-th smallest of
/// the `N ≈ n²/2` pairwise slopes is found without listing them: for a trial
/// slope `s`, the number of slopes below `s` equals the number of inversions
/// of `u_i = y_i - s·t_i` taken in time order, counted by merge sort in
/// O(n log n). Random samples of pairs narrow an interval around the target
/// rank until it holds O(n) slopes, which are then listed as the inversions
/// between the orders of `u` at the interval's two ends (the randomized
/// strategy of Matoušek 1991 and Dillencourt, Mount & Netanyahu 1992). Small
/// inputs (n ≤ 64), and the very rare case where floating-point rounding makes
/// the counts inconsistent, use the direct O(n²) method instead, so the result
/// always equals the median of the computed pairwise slopes.
///
/// # Errors
/// [`TheilSenError::LengthMismatch`], [`TheilSenError::NonFinite`],
/// [`TheilSenError::NoSlope`] (fewer than two distinct time stamps).
///
/// # References
/// * H. Theil (1950), "A rank-invariant method of linear and polynomial
///   regression analysis, I, II, III", *Proceedings of the Koninklijke
///   Nederlandse Akademie van Wetenschappen* 53, 386-392, 521-525, 1397-1412.
/// * P. K. Sen (1968), "Estimates of the regression coefficient based on
///   Kendall's tau", *Journal of the American Statistical Association*
///   63(324), 1379-1389.
/// * J. Matoušek (1991), "Randomized optimal algorithm for slope selection",
///   *Information Processing Letters* 39(4), 183-187.
/// * M. B. Dillencourt, D. M. Mount and N. S. Netanyahu (1992), "A randomized
///   algorithm for slope selection", *International Journal of Computational
///   Geometry & Applications* 2(1), 1-27.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct TheilSen {
    /// median pairwise slope (value units per time unit)
    pub slope: f64,
    /// `median(y) - slope·median(t)` (value units)
    pub intercept: f64,
    /// lower end of the slope confidence interval
    pub slope_low: f64,
    /// upper end of the slope confidence interval
    pub slope_high: f64,
    /// number of pairwise slopes `N` (pairs with distinct time stamps)
    pub n_slopes: u64,
}

impl TheilSen {
    /// Default parameters (`confidence = 0.95`).
    pub fn params() -> TheilSenParams {
        TheilSenParams::default()
    }
}

impl TheilSenValidParams {
    /// Fits the line to values `y` observed at times `t` (any order, ties allowed).
    ///
    /// # Errors
    /// See [`TheilSen`].
    pub fn fit(&self, t: &[f64], y: &[f64]) -> Result<TheilSen, TheilSenError> {
        if t.len() != y.len() {
            return Err(TheilSenError::LengthMismatch { t: t.len(), y: y.len() });
        }
        for (field, v) in [("time", t), ("value", y)] {
            if let Some(index) = v.iter().position(|x| !x.is_finite()) {
                return Err(TheilSenError::NonFinite { field, index, value: v[index] });
            }
        }
        let sel = SlopeSelector::new(t, y);
        let n_slopes = sel.n_slopes;
        if n_slopes == 0 {
            return Err(TheilSenError::NoSlope { n: t.len() });
        }
        let slope = sel.median();
        let intercept = median_of(y) - slope * median_of(t);

        // Sen (1968) eq. 2.6 as scipy.stats.theilslopes implements it
        let n = t.len() as f64;
        let tie_term = |v: &[f64]| -> f64 {
            let mut s = v.to_vec();
            s.sort_by(f64::total_cmp);
            tie_groups_sorted(&s)
                .iter()
                .map(|&g| {
                    let g = g as f64;
                    g * (g - 1.0) * (2.0 * g + 5.0)
                })
                .sum()
        };
        let sigsq = (n * (n - 1.0) * (2.0 * n + 5.0) - tie_term(t) - tie_term(y)) / 18.0;
        let z = norm_ppf((1.0 - self.confidence) / 2.0); // negative
        let (slope_low, slope_high) = if sigsq >= 0.0 {
            let sigma = sigsq.sqrt();
            let nt = n_slopes as f64;
            let last = (n_slopes - 1) as f64;
            let ru = ((nt - z * sigma) / 2.0).round_ties_even().min(last);
            let rl = (((nt + z * sigma) / 2.0).round_ties_even() - 1.0).max(0.0);
            (sel.select(rl as u64), sel.select(ru as u64))
        } else {
            (f64::NAN, f64::NAN)
        };
        Ok(TheilSen { slope, intercept, slope_low, slope_high, n_slopes })
    }
}

/// Theil–Sen fit with default parameters (95 % interval).
///
/// # Errors
/// See [`TheilSen`].
///
/// ```
/// use telltale_models::trend::theil_sen;
/// let t = [0.0, 1.0, 2.0, 3.0, 4.0];
/// let y = [1.0, 3.0, 5.0, 7.0, 100.0]; // one wild reading does not move the slope
/// let fit = theil_sen(&t, &y)?;
/// assert_eq!(fit.slope, 2.0);
/// # Ok::<(), telltale_models::trend::TheilSenError>(())
/// ```
pub fn theil_sen(t: &[f64], y: &[f64]) -> Result<TheilSen, TheilSenError> {
    TheilSenValidParams { confidence: 0.95 }.fit(t, y)
}

/// Sen's slope of an equally spaced series (time axis `0, 1, ..., n-1`), as
/// `pymannkendall.sens_slope`. Returns `None` for fewer than two values.
/// Inputs must be finite.
pub(crate) fn sen_slope_index(y: &[f64]) -> Option<f64> {
    if y.len() < 2 {
        return None;
    }
    let t: Vec<f64> = (0..y.len()).map(|i| i as f64).collect();
    Some(SlopeSelector::new(&t, y).median())
}

/// Median of the finite values of `v`; NaN when there are none.
pub(crate) fn median_of(v: &[f64]) -> f64 {
    crate::robust::median(v).unwrap_or(f64::NAN)
}

/// Tiny deterministic generator (SplitMix64) for sampling pairs; the slope
/// selection must be reproducible and `models` carries no `rand` dependency.
struct SplitMix(u64);

impl SplitMix {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    fn below(&mut self, n: usize) -> usize {
        ((u128::from(self.next()) * n as u128) >> 64) as usize
    }
}

/// Order statistics of the pairwise slopes of points sorted by time.
pub(crate) struct SlopeSelector {
    t: Vec<f64>,
    y: Vec<f64>,
    /// true if some time stamps repeat
    t_ties: bool,
    pub(crate) n_slopes: u64,
}

const NAIVE_MAX_N: usize = 64;

impl SlopeSelector {
    pub(crate) fn new(t: &[f64], y: &[f64]) -> Self {
        let mut idx: Vec<usize> = (0..t.len()).collect();
        idx.sort_by(|&a, &b| t[a].total_cmp(&t[b]));
        let ts: Vec<f64> = idx.iter().map(|&i| t[i]).collect();
        let ys: Vec<f64> = idx.iter().map(|&i| y[i]).collect();
        let groups = tie_groups_sorted(&ts);
        let n = t.len() as u64;
        let tied: u64 = groups.iter().map(|g| g * (g - 1) / 2).sum();
        Self {
            t: ts,
            y: ys,
            t_ties: !groups.is_empty(),
            n_slopes: n * n.saturating_sub(1) / 2 - tied,
        }
    }

    fn median(&self) -> f64 {
        let n = self.n_slopes;
        if n % 2 == 1 {
            self.select(n / 2)
        } else {
            let v = self.select_range(n / 2 - 1, n / 2);
            0.5 * (v[0] + v[1])
        }
    }

    fn select(&self, k: u64) -> f64 {
        self.select_range(k, k)[0]
    }

    /// All pairwise slopes, for small inputs and as the fallback.
    fn all_slopes(&self) -> Vec<f64> {
        let n = self.t.len();
        let mut out = Vec::with_capacity(self.n_slopes as usize);
        for i in 0..n {
            for j in i + 1..n {
                if self.t[j] > self.t[i] {
                    out.push((self.y[j] - self.y[i]) / (self.t[j] - self.t[i]));
                }
            }
        }
        out
    }

    fn naive_range(&self, k1: u64, k2: u64) -> Vec<f64> {
        let mut all = self.all_slopes();
        let (k1, k2) = (k1 as usize, k2 as usize);
        let (_, _, rest) = all.select_nth_unstable_by(k1, f64::total_cmp);
        let mut out = vec![0.0; k2 - k1 + 1];
        // k1 is in place; the remaining ranks lie in `rest`, which is small here
        let mut rest = rest.to_vec();
        rest.sort_by(f64::total_cmp);
        out[0] = all[k1];
        out[1..].copy_from_slice(&rest[..k2 - k1]);
        out
    }

    /// Number of slopes `< s` (pairs with `t_i < t_j` and `u_j < u_i`, `u = y - s·t`).
    fn count_less(&self, s: f64, u: &mut Vec<f64>, buf: &mut Vec<f64>) -> u64 {
        u.clear();
        u.extend(self.t.iter().zip(&self.y).map(|(t, y)| y - s * t));
        if self.t_ties {
            // pairs with equal t have no slope: sort each tie group by u so
            // they create no strict inversion
            let mut i = 0;
            while i < self.t.len() {
                let mut j = i + 1;
                while j < self.t.len() && self.t[j] == self.t[i] {
                    j += 1;
                }
                u[i..j].sort_by(f64::total_cmp);
                i = j;
            }
        }
        sort_count_strict_inversions(u, buf)
    }

    /// Ranks `k1..=k2` (0-based, ascending) of the pairwise slopes.
    fn select_range(&self, k1: u64, k2: u64) -> Vec<f64> {
        let n = self.t.len();
        if n <= NAIVE_MAX_N {
            return self.naive_range(k1, k2);
        }
        let mut rng = SplitMix(0x5EED_0000 ^ (n as u64) ^ (k1 << 20));
        let (mut u, mut buf) = (Vec::with_capacity(n), Vec::with_capacity(n));
        let (mut lo, mut hi) = (f64::NEG_INFINITY, f64::INFINITY);
        let (mut below_lo, mut below_hi) = (0u64, self.n_slopes);
        let limit = 32 * n as u64;
        let m = n.clamp(256, 1 << 15);
        let mut sample = Vec::with_capacity(m);
        for _round in 0..12 {
            let inside = below_hi - below_lo;
            if inside <= limit {
                break;
            }
            sample.clear();
            let budget = 40 * m;
            let mut tries = 0;
            while sample.len() < m && tries < budget {
                tries += 1;
                let i = rng.below(n);
                let j = rng.below(n);
                let (a, b) = if i < j { (i, j) } else { (j, i) };
                if self.t[b] > self.t[a] {
                    let s = (self.y[b] - self.y[a]) / (self.t[b] - self.t[a]);
                    if s >= lo && s < hi {
                        sample.push(s);
                    }
                }
            }
            if sample.len() < 32 {
                break;
            }
            sample.sort_by(f64::total_cmp);
            let mm = sample.len() as f64;
            let r1 = (k1 - below_lo) as f64 / inside as f64;
            let r2 = (k2 - below_lo + 1) as f64 / inside as f64;
            let delta = 3.0 * mm.sqrt();
            let p_lo = (r1 * mm - delta).floor();
            let p_hi = (r2 * mm + delta).ceil();
            if p_lo >= 0.0 {
                let cand = sample[p_lo as usize];
                if cand > lo {
                    let c = self.count_less(cand, &mut u, &mut buf);
                    if c <= k1 {
                        lo = cand;
                        below_lo = c;
                    }
                }
            }
            if p_hi < mm {
                let cand = sample[p_hi as usize];
                if cand < hi {
                    let c = self.count_less(cand, &mut u, &mut buf);
                    if c > k2 {
                        hi = cand;
                        below_hi = c;
                    }
                }
            }
        }
        if !lo.is_finite() || !hi.is_finite() || below_hi - below_lo > 64 * n as u64 {
            return self.naive_range(k1, k2);
        }
        match self.enumerate_between(lo, hi, (below_hi - below_lo) as usize) {
            Some(mut listed) if listed.len() as u64 == below_hi - below_lo => {
                let i1 = (k1 - below_lo) as usize;
                let i2 = (k2 - below_lo) as usize;
                let (_, _, rest) = listed.select_nth_unstable_by(i1, f64::total_cmp);
                let mut rest = rest.to_vec();
                let take = i2 - i1;
                if take > 0 {
                    rest.select_nth_unstable_by(take - 1, f64::total_cmp);
                    rest[..take].sort_by(f64::total_cmp);
                }
                let mut out = vec![listed[i1]];
                out.extend_from_slice(&rest[..take]);
                out
            }
            _ => self.naive_range(k1, k2),
        }
    }

    /// Slopes in `[lo, hi)`: the strict inversions of `b = y - hi·t` along the
    /// order of `(a = y - lo·t, t)`, kept when the earlier point is earlier in
    /// time. Returns `None` if far more pairs turn up than expected.
    fn enumerate_between(&self, lo: f64, hi: f64, expected: usize) -> Option<Vec<f64>> {
        let n = self.t.len();
        let a: Vec<f64> = self.t.iter().zip(&self.y).map(|(t, y)| y - lo * t).collect();
        let b: Vec<f64> = self.t.iter().zip(&self.y).map(|(t, y)| y - hi * t).collect();
        let mut order: Vec<usize> = (0..n).collect();
        // points are stored in t order, so the index breaks ties in a by t
        order.sort_by(|&i, &j| a[i].total_cmp(&a[j]).then(i.cmp(&j)));
        let mut cur = order;
        let mut buf = vec![0usize; n];
        let mut out = Vec::with_capacity(expected + 16);
        let cap = 2 * expected + 1024;
        let mut seen = 0usize;
        let mut width = 1;
        while width < n {
            let mut lo_i = 0;
            while lo_i < n {
                let mid = (lo_i + width).min(n);
                let hi_i = (lo_i + 2 * width).min(n);
                let (mut i, mut j, mut k) = (lo_i, mid, lo_i);
                while i < mid && j < hi_i {
                    let (l, r) = (cur[i], cur[j]);
                    if b[r] < b[l] {
                        // r is inverted with every remaining left element
                        seen += mid - i;
                        if seen > cap {
                            return None;
                        }
                        for &l in &cur[i..mid] {
                            if self.t[l] < self.t[r] {
                                out.push((self.y[r] - self.y[l]) / (self.t[r] - self.t[l]));
                            }
                        }
                        buf[k] = r;
                        j += 1;
                    } else {
                        buf[k] = l;
                        i += 1;
                    }
                    k += 1;
                }
                buf[k..k + (mid - i)].copy_from_slice(&cur[i..mid]);
                k += mid - i;
                buf[k..k + (hi_i - j)].copy_from_slice(&cur[j..hi_i]);
                lo_i = hi_i;
            }
            std::mem::swap(&mut cur, &mut buf);
            width *= 2;
        }
        Some(out)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;
    use proptest::prelude::*;

    fn naive_median(t: &[f64], y: &[f64]) -> f64 {
        let mut s = Vec::new();
        for i in 0..t.len() {
            for j in 0..t.len() {
                if t[j] > t[i] {
                    s.push((y[j] - y[i]) / (t[j] - t[i]));
                }
            }
        }
        median_of(&s)
    }

    #[test]
    fn holy_cross_example_matches_scipy() {
        // scipy 1.17.1 scipy.stats.theilslopes(x), EXTERNAL-CHECKS §9 check A
        let y =
            [12.9, 14.8, 13.2, 15.7, 13.8, 15.6, 12.9, 11.0, 17.3, 15.9, 19.0, 18.3, 20.1, 21.7];
        let t: Vec<f64> = (0..14).map(f64::from).collect();
        let f = theil_sen(&t, &y).unwrap();
        assert_relative_eq!(f.slope, 0.566666666666667, max_relative = 1e-12);
        assert_relative_eq!(f.intercept, 11.966666666666663, max_relative = 1e-12);
        assert_relative_eq!(f.slope_low, 0.3250000000000002, max_relative = 1e-12);
        assert_relative_eq!(f.slope_high, 0.8666666666666666, max_relative = 1e-12);
        // time axis 1..14 moves only the intercept (catalogue: 11.4)
        let t1: Vec<f64> = (1..15).map(f64::from).collect();
        assert_relative_eq!(
            theil_sen(&t1, &y).unwrap().intercept,
            11.399999999999995,
            max_relative = 1e-12
        );
    }

    #[test]
    fn fast_path_matches_naive_on_large_input() {
        let n = 3000;
        let mut rng = SplitMix(9);
        let t: Vec<f64> = (0..n).map(|i| i as f64 + (rng.below(1000) as f64) / 2000.0).collect();
        let y: Vec<f64> =
            t.iter().map(|&t| 0.01 * t + (rng.below(10_000) as f64) / 100.0).collect();
        let sel = SlopeSelector::new(&t, &y);
        let mut all = sel.all_slopes();
        all.sort_by(f64::total_cmp);
        for k in [0u64, 17, sel.n_slopes / 3, sel.n_slopes / 2, sel.n_slopes - 5] {
            assert_eq!(sel.select(k), all[k as usize], "rank {k}");
        }
    }

    #[test]
    fn errors_name_the_field() {
        assert!(matches!(
            theil_sen(&[0.0, 1.0], &[1.0]),
            Err(TheilSenError::LengthMismatch { t: 2, y: 1 })
        ));
        assert!(matches!(
            theil_sen(&[1.0, 1.0], &[1.0, 2.0]),
            Err(TheilSenError::NoSlope { n: 2 })
        ));
        assert!(matches!(
            theil_sen(&[0.0, 1.0], &[1.0, f64::NAN]),
            Err(TheilSenError::NonFinite { field: "value", index: 1, .. })
        ));
    }

    #[test]
    fn confidence_must_be_inside_unit_interval() {
        assert!(TheilSen::params().confidence(1.0).check().is_err());
        assert!(TheilSen::params().confidence(0.0).check().is_err());
        assert!(TheilSen::params().confidence(0.9).check().is_ok());
    }

    proptest! {
        #[test]
        fn equals_naive_median_of_pairwise_slopes(
            pts in prop::collection::vec((0u16..400, -50i32..50), 2..200),
        ) {
            // integer-valued grids force ties in both t and y
            let t: Vec<f64> = pts.iter().map(|p| f64::from(p.0)).collect();
            let y: Vec<f64> = pts.iter().map(|p| f64::from(p.1) / 4.0).collect();
            if t.iter().any(|&v| v != t[0]) {
                let f = theil_sen(&t, &y).unwrap();
                prop_assert_eq!(f.slope, naive_median(&t, &y));
            }
        }

        #[test]
        fn equals_naive_median_continuous(ys in prop::collection::vec(-1e3f64..1e3, 65..400)) {
            let t: Vec<f64> = (0..ys.len()).map(|i| (i as f64).powf(1.3)).collect();
            let f = theil_sen(&t, &ys).unwrap();
            let want = naive_median(&t, &ys);
            prop_assert!((f.slope - want).abs() <= 1e-12 * want.abs().max(1e-300), "{} vs {}", f.slope, want);
        }
    }
}
