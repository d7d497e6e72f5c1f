//! Errors of the tabular CUSUM.

/// An invalid CUSUM parameter.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum CusumParamsError {
    /// The in-control mean is not finite.
    #[error("target (in-control mean) must be finite, got {0}; take it from the asset baseline")]
    Target(f64),
    /// The in-control sigma is not positive and finite.
    #[error("sigma must be > 0 and finite, got {0}; estimate it on an in-control window")]
    Sigma(f64),
    /// The reference value k is negative or not finite.
    #[error(
        "drift k must be >= 0 and finite (in sigma), got {0}; use half the shift to detect, 0.5 is usual"
    )]
    Drift(f64),
    /// The decision interval h is not positive and finite.
    #[error(
        "threshold h must be > 0 and finite (in sigma), got {0}; 4 to 5 is a common starting point"
    )]
    Threshold(f64),
    /// The AR(1) coefficient is outside (-1, 1).
    #[error(
        "ar1 coefficient phi must lie in (-1, 1), got {0}; re-estimate it on an in-control window"
    )]
    Phi(f64),
}

/// A failure while running a CUSUM over a batch.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum CusumError {
    /// The parameters did not pass their check.
    #[error(transparent)]
    Params(#[from] CusumParamsError),
    /// An observation is NaN or infinite.
    #[error(
        "observation {index} is not finite ({value}); drop or interpolate gaps before running the chart"
    )]
    NonFinite {
        /// 0-based position in the input.
        index: usize,
        /// The offending value.
        value: f64,
    },
    /// An error passed up from linfa.
    #[error(transparent)]
    Linfa(#[from] linfa::Error),
}

/// An impossible CUSUM design request.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum CusumDesignError {
    /// The shift to detect is not positive and finite.
    #[error(
        "shift to detect must be > 0 and finite (in sigma), got {0}; 1 sigma is a common choice"
    )]
    Shift(f64),
    /// The reference value k is negative or not finite.
    #[error("drift k must be >= 0 and finite (in sigma), got {0}")]
    Drift(f64),
    /// The target in-control ARL is not achievable.
    #[error(
        "target in-control ARL must be finite and > {min}, got {got}; ask for a longer run between false alarms"
    )]
    Arl0 {
        /// Smallest achievable two-sided ARL0 (h -> 0).
        min: f64,
        /// The requested value.
        got: f64,
    },
}
