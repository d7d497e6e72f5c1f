//! Parameters of the tabular CUSUM (unchecked builder and checked set).

use linfa::ParamGuard;

use super::error::CusumParamsError;

/// Checked tabular-CUSUM parameters; build them with [`CusumParams`].
///
/// | Parameter            | Default | Units       | Range      | Purpose |
/// |----------------------|---------|-------------|------------|---------|
/// | `target` (mu_0)      | —       | data        | finite     | in-control mean (from the baseline) |
/// | `sigma`              | —       | data        | (0, inf)   | in-control standard deviation of x (marginal) |
/// | `drift` (k)          | 0.5     | sigma       | [0, inf)   | reference value, half the shift to detect; K = k sigma |
/// | `threshold` (h)      | 5.0     | sigma       | (0, inf)   | decision interval; H = h sigma; trades delay vs false alarms |
/// | `reset_after_alarm`  | true    | —           | bool       | restart both sums at 0 after a signal |
/// | `ar1` (phi)          | 0.0     | —           | (-1, 1)    | AR(1) coefficient; != 0 runs the residual chart |
///
/// With the defaults (k = 0.5, h = 5) the two-sided in-control ARL is about
/// 469 observations by Siegmund's approximation ([`two_sided_arl`](super::two_sided_arl)).
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct CusumValidParams {
    pub(crate) target: f64,
    pub(crate) sigma: f64,
    pub(crate) drift: f64,
    pub(crate) threshold: f64,
    pub(crate) reset_after_alarm: bool,
    pub(crate) ar1: f64,
}

impl CusumValidParams {
    /// In-control mean mu_0, data units.
    pub fn target(&self) -> f64 {
        self.target
    }
    /// In-control (marginal) sigma, data units.
    pub fn sigma(&self) -> f64 {
        self.sigma
    }
    /// Reference value k, sigma units.
    pub fn drift(&self) -> f64 {
        self.drift
    }
    /// Decision interval h, sigma units.
    pub fn threshold(&self) -> f64 {
        self.threshold
    }
    /// Whether the sums restart after a signal.
    pub fn reset_after_alarm(&self) -> bool {
        self.reset_after_alarm
    }
    /// AR(1) coefficient of the residual chart (0 = plain CUSUM).
    pub fn ar1(&self) -> f64 {
        self.ar1
    }
}

/// Unchecked tabular-CUSUM parameters (see [`CusumValidParams`] for the table).
///
/// ```
/// use linfa::ParamGuard;
/// use telltale_models::changepoint::Cusum;
/// let p = Cusum::params(10.0, 1.0).drift(0.5).threshold(5.0).check()?;
/// assert_eq!(p.threshold(), 5.0);
/// # Ok::<(), telltale_models::changepoint::CusumParamsError>(())
/// ```
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct CusumParams(pub(crate) CusumValidParams);

impl CusumParams {
    /// Parameters for in-control mean `target` and sigma `sigma` (data units), with defaults.
    pub fn new(target: f64, sigma: f64) -> Self {
        Self(CusumValidParams {
            target,
            sigma,
            drift: 0.5,
            threshold: 5.0,
            reset_after_alarm: true,
            ar1: 0.0,
        })
    }
    /// Reference value k (sigma units).
    pub fn drift(mut self, k: f64) -> Self {
        self.0.drift = k;
        self
    }
    /// Decision interval h (sigma units).
    pub fn threshold(mut self, h: f64) -> Self {
        self.0.threshold = h;
        self
    }
    /// Restart both sums after a signal (default true).
    pub fn reset_after_alarm(mut self, reset: bool) -> Self {
        self.0.reset_after_alarm = reset;
        self
    }
    /// AR(1) coefficient phi; a non-zero value charts the standardised
    /// innovations `((x_t - mu_0) - phi (x_{t-1} - mu_0)) / (sigma sqrt(1 - phi^2))`.
    pub fn ar1(mut self, phi: f64) -> Self {
        self.0.ar1 = phi;
        self
    }
}

impl ParamGuard for CusumParams {
    type Checked = CusumValidParams;
    type Error = CusumParamsError;

    fn check_ref(&self) -> Result<&Self::Checked, Self::Error> {
        let p = &self.0;
        if !p.target.is_finite() {
            return Err(CusumParamsError::Target(p.target));
        }
        if !(p.sigma.is_finite() && p.sigma > 0.0) {
            return Err(CusumParamsError::Sigma(p.sigma));
        }
        if !(p.drift.is_finite() && p.drift >= 0.0) {
            return Err(CusumParamsError::Drift(p.drift));
        }
        if !(p.threshold.is_finite() && p.threshold > 0.0) {
            return Err(CusumParamsError::Threshold(p.threshold));
        }
        if !(p.ar1.is_finite() && p.ar1.abs() < 1.0) {
            return Err(CusumParamsError::Phi(p.ar1));
        }
        Ok(p)
    }

    fn check(self) -> Result<Self::Checked, Self::Error> {
        self.check_ref()?;
        Ok(self.0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sigma_must_be_positive() {
        assert!(matches!(CusumParams::new(0.0, 0.0).check(), Err(CusumParamsError::Sigma(_))));
    }
    #[test]
    fn target_must_be_finite() {
        let r = CusumParams::new(f64::NAN, 1.0).check();
        assert!(matches!(r, Err(CusumParamsError::Target(_))));
    }
    #[test]
    fn drift_cannot_be_negative() {
        let r = CusumParams::new(0.0, 1.0).drift(-0.1).check();
        assert!(matches!(r, Err(CusumParamsError::Drift(_))));
    }
    #[test]
    fn threshold_cannot_be_zero() {
        let r = CusumParams::new(0.0, 1.0).threshold(0.0).check();
        assert!(matches!(r, Err(CusumParamsError::Threshold(_))));
    }
    #[test]
    fn phi_must_be_stationary() {
        let r = CusumParams::new(0.0, 1.0).ar1(1.0).check();
        assert!(matches!(r, Err(CusumParamsError::Phi(_))));
    }
    #[test]
    fn defaults_pass() {
        let p = CusumParams::new(3.0, 0.2).check().unwrap();
        assert_eq!((p.drift(), p.threshold(), p.reset_after_alarm()), (0.5, 5.0, true));
    }
}
