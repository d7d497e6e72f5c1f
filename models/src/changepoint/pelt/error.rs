//! Errors of PELT.

/// An invalid PELT parameter.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum PeltParamsError {
    /// An explicit penalty is negative or not finite.
    #[error("penalty must be >= 0 and finite (cost units), got {0}; try Penalty::Bic")]
    Penalty(f64),
    /// The minimum segment length is too small for the cost.
    #[error("min_size must be >= {min} for this cost, got {got}; a variance needs two points")]
    MinSize {
        /// Smallest allowed value.
        min: usize,
        /// The requested value.
        got: usize,
    },
    /// The variance floor of the normal cost is not positive and finite.
    #[error(
        "variance_floor must be > 0 and finite (data units squared), got {0}; ruptures uses 1e-6"
    )]
    VarianceFloor(f64),
    /// A known noise sigma is not positive and finite.
    #[error(
        "noise sigma must be > 0 and finite (data units), got {0}; leave it unset to estimate it"
    )]
    NoiseSigma(f64),
}

/// A failure while segmenting a series.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum PeltError {
    /// The parameters did not pass their check.
    #[error(transparent)]
    Params(#[from] PeltParamsError),
    /// An observation is NaN or infinite.
    #[error(
        "observation {index} is not finite ({value}); drop or interpolate gaps before segmenting"
    )]
    NonFinite {
        /// 0-based position.
        index: usize,
        /// The offending value.
        value: f64,
    },
    /// The series is shorter than one segment.
    #[error(
        "series has {n} points but one segment needs min_size = {min_size}; use a longer window"
    )]
    TooShort {
        /// Series length.
        n: usize,
        /// Minimum segment length.
        min_size: usize,
    },
    /// The noise scale estimate is zero, so BIC/MBIC would be zero.
    #[error(
        "noise sigma estimated from differences is 0 (the series is piecewise constant); give noise_sigma or an explicit Penalty::Value"
    )]
    ZeroScale,
    /// An error passed up from linfa.
    #[error(transparent)]
    Linfa(#[from] linfa::Error),
}
