//! One-shot OLS-CUSUM test for a level change (p-value from the Kolmogorov distribution in [`crate::dist`]).

use crate::dist::kolmogorov_sf;

/// An invalid series for the OLS-CUSUM test.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum OlsCusumError {
    /// Too few points.
    #[error("OLS-CUSUM needs at least 2 observations, got {0}; use a longer window")]
    TooShort(usize),
    /// A NaN or infinite value.
    #[error("observation {index} is not finite ({value}); drop or interpolate gaps first")]
    NonFinite {
        /// 0-based position.
        index: usize,
        /// The offending value.
        value: f64,
    },
    /// Zero standard deviation.
    #[error("the series is constant (sd 0), so the test is undefined; check for a stuck sensor")]
    Constant,
}

/// CUSUM of deviations from the overall mean, `S_t = sum_{i<=t} (y_i - ybar)`, t = 1..n
/// (data units; `S_n` = 0 up to rounding).
pub fn deviation_cusum(y: &[f64]) -> Vec<f64> {
    if y.is_empty() {
        return Vec::new();
    }
    let mean = y.iter().sum::<f64>() / y.len() as f64;
    y.iter()
        .scan(0.0, |acc, &v| {
            *acc += v - mean;
            Some(*acc)
        })
        .collect()
}

/// Result of [`ols_cusum_test`].
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct OlsCusum {
    /// S0 = max_t |S_t| / (s sqrt(n)), dimensionless.
    pub statistic: f64,
    /// P(sup |Brownian bridge| > S0) = Kolmogorov survival function at S0.
    pub p_value: f64,
    /// 0-based index t of the largest |S_t|: the last point of the old level.
    pub argmax: usize,
    /// max_t |S_t|, data units.
    pub max_abs_cusum: f64,
}

/// OLS-CUSUM test of a constant mean against a level change at an unknown time.
///
/// ```text
/// S_t = sum_{i<=t} (y_i - ybar),  s = sd(y, ddof 1)
/// S0  = max_t |S_t| / (s sqrt(n))
/// p   = P(sup_{0<=u<=1} |B(u)| > S0) = kolmogorov_sf(S0)       (asymptotic, iid errors)
/// ```
///
/// Assumes independent errors: on autocorrelated data replace s^2 by the
/// long-run variance (see [`Ar1::long_run_variance_ratio`](crate::changepoint::Ar1::long_run_variance_ratio)).
///
/// # Errors
/// [`OlsCusumError`] for fewer than 2 points, a non-finite value or sd 0.
///
/// # Panics
/// Never.
///
/// # References
/// W. Ploberger, W. Krämer (1992), "The CUSUM test with OLS residuals", Econometrica 60(2), 271-285.
/// A. Zeileis, F. Leisch, K. Hornik, C. Kleiber (2002), "strucchange: An R package for testing for
/// structural change in linear regression models", Journal of Statistical Software 7(2), 1-38.
pub fn ols_cusum_test(y: &[f64]) -> Result<OlsCusum, OlsCusumError> {
    let n = y.len();
    if n < 2 {
        return Err(OlsCusumError::TooShort(n));
    }
    if let Some((index, &value)) = y.iter().enumerate().find(|(_, v)| !v.is_finite()) {
        return Err(OlsCusumError::NonFinite { index, value });
    }
    let mean = y.iter().sum::<f64>() / n as f64;
    let ss: f64 = y.iter().map(|v| (v - mean) * (v - mean)).sum();
    let s = (ss / (n as f64 - 1.0)).sqrt();
    if s <= 0.0 {
        return Err(OlsCusumError::Constant);
    }
    let cs = deviation_cusum(y);
    let (argmax, max_abs_cusum) =
        cs.iter().map(|v| v.abs()).enumerate().fold((0, f64::NEG_INFINITY), |(bi, bv), (i, v)| {
            if v > bv { (i, v) } else { (bi, bv) }
        });
    let statistic = max_abs_cusum / (s * (n as f64).sqrt());
    Ok(OlsCusum { statistic, p_value: kolmogorov_sf(statistic), argmax, max_abs_cusum })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn constant_series_is_an_error() {
        assert_eq!(ols_cusum_test(&[2.0; 4]), Err(OlsCusumError::Constant));
    }
}
