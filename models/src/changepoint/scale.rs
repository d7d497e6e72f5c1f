//! Small private scale helpers (kept local so the change-point code does not
//! depend on the robust module's evolving API).

use statrs::distribution::{ContinuousCDF, Normal};

/// Median of finite values; `None` for an empty slice. Sorts a copy.
pub(crate) fn median(x: &[f64]) -> Option<f64> {
    if x.is_empty() {
        return None;
    }
    let mut v = x.to_vec();
    v.sort_by(f64::total_cmp);
    let n = v.len();
    Some(if n % 2 == 1 { v[n / 2] } else { 0.5 * (v[n / 2 - 1] + v[n / 2]) })
}

/// MAD scaled to be consistent for the normal sigma: `median|x - median(x)| / Phi^-1(3/4)`
/// (the `scale='normal'` convention of scipy and statsmodels, 1.482602218505602).
pub(crate) fn mad_normal(x: &[f64]) -> Option<f64> {
    let m = median(x)?;
    let dev: Vec<f64> = x.iter().map(|v| (v - m).abs()).collect();
    let q75 = Normal::standard().inverse_cdf(0.75);
    median(&dev).map(|d| d / q75)
}

/// `MAD(diff(y)) / sqrt(2)`: a noise sigma that ignores level shifts
/// (each shift spoils one difference only).
pub(crate) fn sigma_from_differences(y: &[f64]) -> Option<f64> {
    if y.len() < 2 {
        return None;
    }
    let d: Vec<f64> = y.windows(2).map(|w| w[1] - w[0]).collect();
    mad_normal(&d).map(|s| s / std::f64::consts::SQRT_2)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn mad_constant_matches_scipy() {
        // scipy.stats.median_abs_deviation([1,2,3,4,100], scale='normal') = 1.482602218505602
        // (reference_vectors.json 1_mad, scipy 1.17.1)
        let got = mad_normal(&[1.0, 2.0, 3.0, 4.0, 100.0]).unwrap();
        assert!((got - 1.482602218505602).abs() < 1e-12);
    }

    #[test]
    fn median_even_and_empty() {
        assert_eq!(median(&[3.0, 1.0, 2.0, 10.0]), Some(2.5));
        assert_eq!(median(&[]), None);
    }
}
