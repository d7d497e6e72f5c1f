//! AR(1) working model for autocorrelated sensor data: estimation, the
//! residual (innovation) transform and the long-run variance ratio.

use super::cusum::CusumParams;

/// An invalid series for AR(1) estimation.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum Ar1Error {
    /// Too few points.
    #[error(
        "AR(1) estimation needs at least 3 observations, got {0}; use a longer in-control window"
    )]
    TooShort(usize),
    /// A NaN or infinite value.
    #[error(
        "observation {index} is not finite ({value}); drop or interpolate gaps before estimating"
    )]
    NonFinite {
        /// 0-based position.
        index: usize,
        /// The offending value.
        value: f64,
    },
    /// The window is constant.
    #[error("the window is constant (variance 0); the sensor may be stuck, pick another window")]
    Constant,
}

/// Lag-1 sample autocorrelation (the `acf` estimator: both sums over n).
///
/// ```text
/// r_1 = sum_{t=1}^{n-1} (x_t - xbar)(x_{t+1} - xbar) / sum_{t=1}^{n} (x_t - xbar)^2
/// ```
/// Returns 0 for fewer than 2 points, a constant series or non-finite values
/// (see [`crate::autocorr::autocorrelation`]).
pub(crate) fn lag1_autocorrelation(x: &[f64]) -> f64 {
    crate::autocorr::autocorrelation(x, 1).unwrap_or(0.0)
}

/// AR(1) working model `x_t - mu = phi (x_{t-1} - mu) + e_t`, fitted by Yule–Walker.
///
/// ```text
/// mu = xbar,  sigma_x^2 = (1/n) sum (x_t - xbar)^2,  phi = r_1 (lag-1 autocorrelation)
/// sigma_e = sigma_x sqrt(1 - phi^2)                     innovation sd
/// sigma_LR^2 / sigma_x^2 = (1 + phi) / (1 - phi)        long-run variance ratio
/// ```
///
/// | Field   | Units | Range |
/// |---------|-------|-------|
/// | `mean`  | data  | finite |
/// | `phi`   | —     | [-0.999, 0.999] (clamped) |
/// | `sigma` | data  | (0, inf), marginal sd |
///
/// Fit it on an in-control window (the asset baseline), not on the data
/// being monitored.
///
/// # References
/// G. E. P. Box, G. M. Jenkins, G. C. Reinsel, *Time Series Analysis: Forecasting and Control*,
/// Wiley (AR(1) moments, Yule–Walker).
/// L. C. Alwan, H. V. Roberts (1988), "Time-series modeling for statistical process control",
/// Journal of Business & Economic Statistics 6(1), 87-95.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct Ar1 {
    /// Process mean, data units.
    pub mean: f64,
    /// Lag-1 coefficient.
    pub phi: f64,
    /// Marginal standard deviation, data units.
    pub sigma: f64,
}

impl Ar1 {
    /// Fit on an in-control window.
    ///
    /// # Errors
    /// [`Ar1Error`] for fewer than 3 points, a non-finite value or a constant window.
    ///
    /// # Panics
    /// Never.
    pub fn estimate(x: &[f64]) -> Result<Self, Ar1Error> {
        if x.len() < 3 {
            return Err(Ar1Error::TooShort(x.len()));
        }
        if let Some((index, &value)) = x.iter().enumerate().find(|(_, v)| !v.is_finite()) {
            return Err(Ar1Error::NonFinite { index, value });
        }
        let n = x.len() as f64;
        let mean = x.iter().sum::<f64>() / n;
        let c0 = x.iter().map(|v| (v - mean) * (v - mean)).sum::<f64>() / n;
        if c0 <= 0.0 {
            return Err(Ar1Error::Constant);
        }
        Ok(Self { mean, phi: lag1_autocorrelation(x).clamp(-0.999, 0.999), sigma: c0.sqrt() })
    }

    /// Innovation standard deviation sigma_x sqrt(1 - phi^2), data units.
    pub fn sigma_innovation(&self) -> f64 {
        self.sigma * (1.0 - self.phi * self.phi).sqrt()
    }

    /// Long-run to marginal variance ratio (1 + phi) / (1 - phi).
    pub fn long_run_variance_ratio(&self) -> f64 {
        (1.0 + self.phi) / (1.0 - self.phi)
    }

    /// Standardised innovations (the residual chart input):
    /// `z_1 = (x_1 - mu) / sigma_x`, `z_t = ((x_t - mu) - phi (x_{t-1} - mu)) / sigma_e`.
    /// iid N(0, 1) when the model holds; NaN in, NaN out (and the next value too).
    pub fn innovations(&self, x: &[f64]) -> Vec<f64> {
        let se = self.sigma_innovation();
        let mut out = Vec::with_capacity(x.len());
        for (i, &v) in x.iter().enumerate() {
            let d = v - self.mean;
            out.push(if i == 0 {
                d / self.sigma
            } else {
                (d - self.phi * (x[i - 1] - self.mean)) / se
            });
        }
        out
    }

    /// Tabular-CUSUM parameters that chart the innovations of this model
    /// (target mu, marginal sigma, AR(1) phi; k and h at their defaults).
    pub fn cusum_params(&self) -> CusumParams {
        CusumParams::new(self.mean, self.sigma).ar1(self.phi)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn innovations_of_an_exact_ar1_are_the_shocks() {
        let m = Ar1 { mean: 2.0, phi: 0.5, sigma: 1.0 };
        let shocks = [0.3, -0.2, 0.7, 0.1];
        let mut x = vec![2.0];
        for e in shocks {
            let prev = *x.last().unwrap();
            x.push(2.0 + 0.5 * (prev - 2.0) + e * m.sigma_innovation());
        }
        let z = m.innovations(&x);
        for (g, w) in z[1..].iter().zip(shocks) {
            assert!((g - w).abs() < 1e-12);
        }
    }

    #[test]
    fn constant_window_is_an_error() {
        assert_eq!(Ar1::estimate(&[1.0; 5]), Err(Ar1Error::Constant));
        assert_eq!(Ar1::estimate(&[1.0, 2.0]), Err(Ar1Error::TooShort(2)));
    }
}
