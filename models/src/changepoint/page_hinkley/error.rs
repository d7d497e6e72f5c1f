//! Errors of the Page–Hinkley test.

/// An invalid Page–Hinkley parameter.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum PageHinkleyParamsError {
    /// The magnitude tolerance is negative or not finite.
    #[error(
        "delta must be >= 0 and finite (data units), got {0}; half the change to detect is usual"
    )]
    Delta(f64),
    /// The threshold is not positive and finite.
    #[error("lambda must be > 0 and finite (data units), got {0}; about 5 sigma is a common start")]
    Lambda(f64),
    /// The known reference mean is not finite.
    #[error("reference mean must be finite, got {0}; take it from the asset baseline")]
    Reference(f64),
}

/// A failure while running Page–Hinkley over a batch.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum PageHinkleyError {
    /// The parameters did not pass their check.
    #[error(transparent)]
    Params(#[from] PageHinkleyParamsError),
    /// An observation is NaN or infinite.
    #[error("observation {index} is not finite ({value}); drop or interpolate gaps first")]
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
