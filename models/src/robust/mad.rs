//! Median absolute deviation, raw and normal-consistent.

use super::select::{fill_finite, median_in_place_finite};

/// Consistency constant that turns the raw MAD into an estimate of the
/// standard deviation at the normal distribution: `1 / Φ⁻¹(3/4)`.
///
/// R's `mad()` and the MASS book use the rounded `1.4826`; this crate uses the
/// exact value, as scipy (`scale="normal"`) and statsmodels do.
pub const MAD_NORMAL: f64 = 1.482602218505602;

/// Median and raw MAD of one sample, computed together.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct MedianMad {
    /// Sample median (units of the data).
    pub median: f64,
    /// Raw median absolute deviation about `median` (units of the data).
    pub mad_raw: f64,
}

impl MedianMad {
    /// Normal-consistent MAD: `MAD_NORMAL * mad_raw`.
    pub fn mad(&self) -> f64 {
        MAD_NORMAL * self.mad_raw
    }
}

/// Raw median absolute deviation of the finite values of `x`.
///
/// ```text
/// MAD_raw = med_i | x_i - med_j x_j |
/// ```
///
/// Units: those of `x`. Both medians use the even-`n` midpoint rule of
/// [`median`](super::median). NaN and ±∞ are ignored; `None` when no finite
/// value remains. Two `O(n)` selections, one copy of `x`.
///
/// # References
/// F. R. Hampel (1974), "The influence curve and its role in robust
/// estimation", Journal of the American Statistical Association 69(346),
/// 383-393.
pub fn mad_raw(x: &[f64]) -> Option<f64> {
    let mut scratch = Vec::with_capacity(x.len());
    median_mad_with_scratch(x, &mut scratch).map(|m| m.mad_raw)
}

/// Normal-consistent median absolute deviation of the finite values of `x`.
///
/// ```text
/// MAD = 1 / Φ⁻¹(3/4) * med_i | x_i - med_j x_j |,   1 / Φ⁻¹(3/4) = 1.482602218505602
/// ```
///
/// Estimates the standard deviation σ when the data are normal (Gaussian
/// efficiency 37 %, breakdown point 50 %). Units: those of `x`. NaN and ±∞
/// are ignored; `None` when no finite value remains.
///
/// # References
/// F. R. Hampel (1974), "The influence curve and its role in robust
/// estimation", Journal of the American Statistical Association 69(346),
/// 383-393; P. J. Rousseeuw and C. Croux (1993), "Alternatives to the median
/// absolute deviation", Journal of the American Statistical Association
/// 88(424), 1273-1283.
pub fn mad(x: &[f64]) -> Option<f64> {
    mad_raw(x).map(|m| MAD_NORMAL * m)
}

/// Median and raw MAD using a caller-owned buffer (no allocation once
/// `scratch` has grown to the input size). `scratch` is overwritten.
pub fn median_mad_with_scratch(x: &[f64], scratch: &mut Vec<f64>) -> Option<MedianMad> {
    fill_finite(x, scratch);
    if scratch.is_empty() {
        return None;
    }
    let median = median_in_place_finite(scratch);
    for v in scratch.iter_mut() {
        *v = (*v - median).abs();
    }
    let mad_raw = median_in_place_finite(scratch);
    Some(MedianMad { median, mad_raw })
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;
    use proptest::prelude::*;

    const X5: [f64; 5] = [1.0, 2.0, 3.0, 4.0, 100.0];
    const X8: [f64; 8] = [1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 1000.0];
    use crate::robust::testdata::CHEM;

    #[test]
    fn mad_matches_scipy_on_catalogue_inputs() {
        // scipy 1.17.1 median_abs_deviation(x) and (x, scale='normal'), catalogue §1
        assert_eq!(mad_raw(&X5), Some(1.0));
        assert_eq!(mad_raw(&X8), Some(2.0));
        assert_abs_diff_eq!(mad_raw(&CHEM).unwrap(), 0.355, epsilon = 1e-12);
        assert_abs_diff_eq!(mad(&X5).unwrap(), 1.482602218505602, epsilon = 1e-12);
        assert_abs_diff_eq!(mad(&X8).unwrap(), 2.965204437011204, epsilon = 1e-12);
        assert_abs_diff_eq!(mad(&CHEM).unwrap(), 0.5263237875694886, epsilon = 1e-12);
    }

    #[test]
    fn mad_constant_is_inverse_normal_quantile() {
        // statrs inverse normal CDF at 3/4; catalogue §1 gives 0.6744897501960817
        use statrs::distribution::{ContinuousCDF, Normal};
        let z = Normal::standard().inverse_cdf(0.75);
        assert!((1.0 / z - MAD_NORMAL).abs() <= 1e-8 * MAD_NORMAL);
    }

    #[test]
    fn mad_of_empty_or_all_nan_is_none() {
        assert_eq!(mad(&[]), None);
        assert_eq!(mad(&[f64::NAN, f64::INFINITY]), None);
        assert_eq!(mad(&[7.0]), Some(0.0));
    }

    proptest! {
        #[test]
        fn mad_is_scale_equivariant(xs in prop::collection::vec(-1e6f64..1e6, 2..400), c in 0.01f64..100.0) {
            let scaled: Vec<f64> = xs.iter().map(|x| x * c).collect();
            let m = mad(&xs).unwrap();
            prop_assert!((mad(&scaled).unwrap() - c * m).abs() <= 1e-9 * (1.0 + c * m));
        }

        #[test]
        fn mad_is_location_invariant(xs in prop::collection::vec(-1e3f64..1e3, 2..400), a in -1e3f64..1e3) {
            let shifted: Vec<f64> = xs.iter().map(|x| x + a).collect();
            let m = mad(&xs).unwrap();
            prop_assert!((mad(&shifted).unwrap() - m).abs() <= 1e-9 * (1.0 + a.abs() + m));
        }

        #[test]
        fn mad_is_permutation_invariant(mut xs in prop::collection::vec(-1e6f64..1e6, 2..200)) {
            let before = mad(&xs);
            xs.reverse();
            let third = xs.len() / 3;
            xs.rotate_left(third);
            prop_assert_eq!(mad(&xs), before);
        }
    }
}
