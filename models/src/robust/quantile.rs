//! Sample quantiles, all nine Hyndman & Fan (1996) definitions.

use super::select::{cmp, fill_finite, select};

/// Hyndman & Fan (1996) sample-quantile definition.
///
/// The project default is [`QuantileType::Type7`] (`Default`), the default of
/// both numpy (`method="linear"`) and R `quantile()`, so thresholds agree with
/// what engineers get in either tool.
///
/// | type | numpy `method`              | rule                                    |
/// |------|-----------------------------|-----------------------------------------|
/// | 1    | `inverted_cdf`              | inverse of the empirical CDF            |
/// | 2    | `averaged_inverted_cdf`     | type 1, averaging at discontinuities    |
/// | 3    | `closest_observation`       | nearest even order statistic (SAS 2)    |
/// | 4    | `interpolated_inverted_cdf` | linear in p(k) = k / n                  |
/// | 5    | `hazen`                     | p(k) = (k − 1/2) / n                    |
/// | 6    | `weibull`                   | p(k) = k / (n + 1)                      |
/// | 7    | `linear`                    | p(k) = (k − 1) / (n − 1)                |
/// | 8    | `median_unbiased`           | p(k) = (k − 1/3) / (n + 1/3)            |
/// | 9    | `normal_unbiased`           | p(k) = (k − 3/8) / (n + 1/4)            |
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[allow(missing_docs)]
pub enum QuantileType {
    Type1,
    Type2,
    Type3,
    Type4,
    Type5,
    Type6,
    #[default]
    Type7,
    Type8,
    Type9,
}

impl QuantileType {
    /// All nine types in order.
    pub const ALL: [QuantileType; 9] = [
        Self::Type1,
        Self::Type2,
        Self::Type3,
        Self::Type4,
        Self::Type5,
        Self::Type6,
        Self::Type7,
        Self::Type8,
        Self::Type9,
    ];
}

/// R's fuzz for deciding that `n p + m` is an integer.
const FUZZ: f64 = 4.0 * f64::EPSILON;

/// Where the quantile sits between order statistics: 1-based `j` and weight
/// `g` of `x_(j+1)`, i.e. `Q = (1 - g) x_(j) + g x_(j+1)` with
/// `x_(0) = x_(1)` and `x_(n+1) = x_(n)`.
fn position(n: usize, p: f64, ty: QuantileType) -> (usize, f64) {
    use QuantileType::*;
    let nf = n as f64;
    let m = match ty {
        Type1 | Type2 | Type4 => 0.0,
        Type3 => -0.5,
        Type5 => 0.5,
        Type6 => p,
        Type7 => 1.0 - p,
        Type8 => (p + 1.0) / 3.0,
        Type9 => p / 4.0 + 3.0 / 8.0,
    };
    let nppm = nf * p + m;
    let jf = (nppm + FUZZ).floor();
    let mut g = nppm - jf;
    if g.abs() < FUZZ {
        g = 0.0;
    }
    let j = jf.clamp(0.0, nf) as usize;
    let g = match ty {
        Type1 => {
            if g > 0.0 {
                1.0
            } else {
                0.0
            }
        }
        Type2 => {
            if g > 0.0 {
                1.0
            } else {
                0.5
            }
        }
        Type3 => {
            if g == 0.0 && j.is_multiple_of(2) {
                0.0
            } else {
                1.0
            }
        }
        _ => g,
    };
    (j, g)
}

fn interpolate(lo: f64, hi: f64, g: f64) -> f64 {
    if g == 0.0 {
        lo
    } else if g == 1.0 {
        hi
    } else {
        lo + g * (hi - lo)
    }
}

/// Sample quantile at probability `p` of the finite values of `x`.
///
/// ```text
/// Q(p) = (1 - γ) x_(j) + γ x_(j+1),   j = floor(n p + m),  γ from n p + m - j
/// ```
///
/// with `m` and the rule for γ set by the type (see [`QuantileType`]),
/// `x_(0) = x_(1)`, `x_(n+1) = x_(n)`. Units: those of `x`. Uses two `O(n)`
/// selections (no sort). NaN and ±∞ are ignored; `None` when none remain.
///
/// # Panics
/// Panics if `p` is not in `[0, 1]`.
///
/// # References
/// R. J. Hyndman and Y. Fan (1996), "Sample quantiles in statistical
/// packages", The American Statistician 50(4), 361-365.
pub fn quantile(x: &[f64], p: f64, ty: QuantileType) -> Option<f64> {
    let mut scratch = Vec::with_capacity(x.len());
    quantile_with_scratch(x, p, ty, &mut scratch)
}

/// [`quantile`] using a caller-owned buffer (overwritten).
///
/// # Panics
/// Panics if `p` is not in `[0, 1]`.
pub fn quantile_with_scratch(
    x: &[f64],
    p: f64,
    ty: QuantileType,
    scratch: &mut Vec<f64>,
) -> Option<f64> {
    assert!((0.0..=1.0).contains(&p), "quantile probability must be in [0, 1], got {p}");
    fill_finite(x, scratch);
    let n = scratch.len();
    if n == 0 {
        return None;
    }
    let (j, g) = position(n, p, ty);
    let lo_idx = j.max(1) - 1; // 0-based index of x_(j), with x_(0) = x_(1)
    let lo = select(scratch, lo_idx);
    if g == 0.0 {
        return Some(lo);
    }
    // j = 0 uses x_(1) twice, j = n uses x_(n) twice
    let hi = if j >= n || j == 0 {
        lo
    } else {
        scratch[lo_idx + 1..].iter().copied().fold(f64::INFINITY, f64::min)
    };
    Some(interpolate(lo, hi, g))
}

/// Several quantiles of the finite values of `x` (one sort).
///
/// # Panics
/// Panics if any probability is not in `[0, 1]`.
pub fn quantiles(x: &[f64], ps: &[f64], ty: QuantileType) -> Option<Vec<f64>> {
    let mut v: Vec<f64> = x.iter().copied().filter(|v| v.is_finite()).collect();
    if v.is_empty() {
        return None;
    }
    v.sort_unstable_by(cmp);
    Some(ps.iter().map(|&p| quantile_sorted(&v, p, ty)).collect())
}

/// Quantile of data already sorted ascending and free of NaN.
///
/// # Panics
/// Panics if `sorted` is empty or `p` is not in `[0, 1]`.
pub fn quantile_sorted(sorted: &[f64], p: f64, ty: QuantileType) -> f64 {
    assert!((0.0..=1.0).contains(&p), "quantile probability must be in [0, 1], got {p}");
    assert!(!sorted.is_empty(), "quantile of an empty sample");
    let n = sorted.len();
    let (j, g) = position(n, p, ty);
    let at = |k: usize| sorted[k.clamp(1, n) - 1];
    interpolate(at(j), at(j + 1), g)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::robust::testdata::CHEM;
    use proptest::prelude::*;

    const PROBS: [f64; 7] = [0.05, 0.1, 0.25, 0.5, 0.75, 0.9, 0.95];

    #[test]
    fn all_nine_types_match_numpy_on_chem() {
        // numpy 2.4.6 np.quantile(CHEM, PROBS, method=...), = R quantile(type=1..9); catalogue §4
        let want: [[f64; 7]; 9] = [
            [2.2, 2.4, 2.7, 3.37, 3.7, 3.77, 5.28],
            [2.2, 2.4, 2.75, 3.385, 3.7, 3.77, 5.28],
            [2.2, 2.2, 2.7, 3.37, 3.7, 3.77, 5.28],
            [2.2, 2.28, 2.7, 3.37, 3.7, 3.742, 4.978],
            [2.2, 2.38, 2.75, 3.385, 3.7, 3.921, 12.381],
            [2.2, 2.3, 2.725, 3.385, 3.7, 4.525, 23.0325],
            [2.23, 2.4, 2.775, 3.385, 3.7, 3.749, 5.0535],
            [2.2, 2.353333333333333, 2.741666666666667, 3.385, 3.7, 4.122333333333333, 15.9315],
            [2.2, 2.36, 2.74375, 3.385, 3.7, 4.072, 15.043875],
        ];
        for (ty, row) in QuantileType::ALL.iter().zip(want.iter()) {
            let got = quantiles(&CHEM, &PROBS, *ty).unwrap();
            for (i, (g, w)) in got.iter().zip(row.iter()).enumerate() {
                assert!((g - w).abs() <= 1e-9, "{ty:?} p={}: got {g}, want {w}", PROBS[i]);
                let single = quantile(&CHEM, PROBS[i], *ty).unwrap();
                assert!((single - g).abs() <= 1e-12, "{ty:?} selection vs sort: {single} vs {g}");
            }
        }
    }

    #[test]
    fn nist_percentile_example_type6() {
        // NIST/SEMATECH e-Handbook §7.2.6.2 (P-memory): 90th percentile 95.1981 (type 6);
        // numpy 2.4.6 weibull gives 95.19807, linear 95.19568 (catalogue §4)
        let x = [
            95.1772, 95.1567, 95.1937, 95.1959, 95.1442, 95.0610, 95.1591, 95.1195, 95.1065,
            95.0925, 95.1990, 95.1682,
        ];
        let q6 = quantile(&x, 0.9, QuantileType::Type6).unwrap();
        assert!((q6 - 95.1981).abs() <= 0.00005);
        assert!((q6 - 95.19807).abs() <= 0.000005);
        let q7 = quantile(&x, 0.9, QuantileType::default()).unwrap();
        assert!((q7 - 95.19568).abs() <= 0.000005);
    }

    #[test]
    fn extremes_are_min_and_max() {
        for ty in QuantileType::ALL {
            assert_eq!(quantile(&CHEM, 0.0, ty), Some(2.2), "{ty:?}");
            assert_eq!(quantile(&CHEM, 1.0, ty), Some(28.95), "{ty:?}");
        }
        assert_eq!(quantile(&[], 0.5, QuantileType::Type7), None);
    }

    #[test]
    #[should_panic(expected = "quantile probability must be in [0, 1]")]
    fn probability_outside_unit_interval_panics() {
        let _ = quantile(&CHEM, 1.5, QuantileType::Type7);
    }

    proptest! {
        #[test]
        fn selection_path_equals_sorted_path(
            xs in prop::collection::vec(-1e3f64..1e3, 1..100), p in 0.0f64..=1.0, t in 0usize..9,
        ) {
            let ty = QuantileType::ALL[t];
            let a = quantile(&xs, p, ty).unwrap();
            let b = quantiles(&xs, &[p], ty).unwrap()[0];
            prop_assert_eq!(a, b);
        }

        #[test]
        fn type7_median_equals_median(xs in prop::collection::vec(-1e3f64..1e3, 1..100)) {
            let q = quantile(&xs, 0.5, QuantileType::Type7).unwrap();
            let m = crate::robust::median(&xs).unwrap();
            prop_assert!((q - m).abs() <= 1e-9 * (1.0 + m.abs()));
        }
    }
}
