//! Parameters of the Page–Hinkley test.

use linfa::ParamGuard;

use super::error::PageHinkleyParamsError;

/// What the deviations are measured from.
///
/// The project default is [`PhReference::RunningMean`]: Page–Hinkley is the
/// detector we use where no baseline exists yet, and with a known reference
/// mean it is algebraically the upper tabular CUSUM (use [`Cusum`](crate::changepoint::Cusum)
/// then, which also has ARL-based design and a lower side).
#[derive(Debug, Clone, Copy, PartialEq, Default)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub enum PhReference {
    /// Variant A: the running mean of all observations so far, including the current one.
    #[default]
    RunningMean,
    /// Variant B: a known reference mean mu_0 (data units); then PH_T = C+_T with K = delta.
    KnownMean(f64),
}

/// Which direction of change is tested.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub enum Direction {
    /// An increase of the mean.
    #[default]
    Increase,
    /// A decrease of the mean (the test on -x).
    Decrease,
}

/// Checked Page–Hinkley parameters; build them with [`PageHinkleyParams`].
///
/// | Parameter           | Default       | Units | Range    | Purpose |
/// |---------------------|---------------|-------|----------|---------|
/// | `delta`             | 0.5           | data  | [0, inf) | magnitude tolerance (allowance per observation) |
/// | `lambda`            | 5.0           | data  | (0, inf) | alarm threshold on PH_T |
/// | `reference`         | `RunningMean` | —     | enum     | Variant A (running mean) or B (known mean) |
/// | `direction`         | `Increase`    | —     | enum     | which way the mean is watched |
/// | `reset_after_alarm` | true          | —     | bool     | restart all sums and the running mean after a signal |
///
/// The defaults assume a standardised input (sigma = 1), e.g. AR(1)
/// innovations from [`Ar1::innovations`](crate::changepoint::Ar1::innovations);
/// scale `delta` and `lambda` by sigma for raw data.
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct PageHinkleyValidParams {
    pub(crate) delta: f64,
    pub(crate) lambda: f64,
    pub(crate) reference: PhReference,
    pub(crate) direction: Direction,
    pub(crate) reset_after_alarm: bool,
}

impl PageHinkleyValidParams {
    /// Magnitude tolerance delta, data units.
    pub fn delta(&self) -> f64 {
        self.delta
    }
    /// Threshold lambda, data units.
    pub fn lambda(&self) -> f64 {
        self.lambda
    }
    /// The reference variant.
    pub fn reference(&self) -> PhReference {
        self.reference
    }
    /// The watched direction.
    pub fn direction(&self) -> Direction {
        self.direction
    }
    /// Whether the state restarts after a signal.
    pub fn reset_after_alarm(&self) -> bool {
        self.reset_after_alarm
    }
}

/// Unchecked Page–Hinkley parameters (see [`PageHinkleyValidParams`]).
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct PageHinkleyParams(pub(crate) PageHinkleyValidParams);

impl Default for PageHinkleyParams {
    fn default() -> Self {
        Self(PageHinkleyValidParams {
            delta: 0.5,
            lambda: 5.0,
            reference: PhReference::RunningMean,
            direction: Direction::Increase,
            reset_after_alarm: true,
        })
    }
}

impl PageHinkleyParams {
    /// Magnitude tolerance delta (data units).
    pub fn delta(mut self, delta: f64) -> Self {
        self.0.delta = delta;
        self
    }
    /// Threshold lambda (data units).
    pub fn lambda(mut self, lambda: f64) -> Self {
        self.0.lambda = lambda;
        self
    }
    /// Reference variant.
    pub fn reference(mut self, reference: PhReference) -> Self {
        self.0.reference = reference;
        self
    }
    /// Watched direction.
    pub fn direction(mut self, direction: Direction) -> Self {
        self.0.direction = direction;
        self
    }
    /// Restart after a signal (default true).
    pub fn reset_after_alarm(mut self, reset: bool) -> Self {
        self.0.reset_after_alarm = reset;
        self
    }
}

impl ParamGuard for PageHinkleyParams {
    type Checked = PageHinkleyValidParams;
    type Error = PageHinkleyParamsError;

    fn check_ref(&self) -> Result<&Self::Checked, Self::Error> {
        let p = &self.0;
        if !(p.delta.is_finite() && p.delta >= 0.0) {
            return Err(PageHinkleyParamsError::Delta(p.delta));
        }
        if !(p.lambda.is_finite() && p.lambda > 0.0) {
            return Err(PageHinkleyParamsError::Lambda(p.lambda));
        }
        if let PhReference::KnownMean(m) = p.reference
            && !m.is_finite()
        {
            return Err(PageHinkleyParamsError::Reference(m));
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
    fn delta_cannot_be_negative() {
        let r = PageHinkleyParams::default().delta(-1.0).check();
        assert!(matches!(r, Err(PageHinkleyParamsError::Delta(_))));
    }
    #[test]
    fn lambda_must_be_positive() {
        let r = PageHinkleyParams::default().lambda(0.0).check();
        assert!(matches!(r, Err(PageHinkleyParamsError::Lambda(_))));
    }
    #[test]
    fn known_mean_must_be_finite() {
        let r = PageHinkleyParams::default().reference(PhReference::KnownMean(f64::NAN)).check();
        assert!(matches!(r, Err(PageHinkleyParamsError::Reference(_))));
    }
    #[test]
    fn defaults_are_running_mean_increase() {
        let p = PageHinkleyParams::default().check().unwrap();
        assert_eq!(p.reference(), PhReference::RunningMean);
        assert_eq!(p.direction(), Direction::Increase);
    }
}
