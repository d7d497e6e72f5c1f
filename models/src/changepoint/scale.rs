//! Small scale helpers of the change-point code, on top of [`crate::robust`].

/// MAD scaled to be consistent for the normal sigma, 1.482602218505602 (see [`crate::robust::mad`]).
pub(crate) fn mad_normal(x: &[f64]) -> Option<f64> {
    crate::robust::mad(x)
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
}
