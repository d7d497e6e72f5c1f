//! Serial-correlation adjustment shared by the two-sample tests.

use crate::autocorr::{self, Ar1Estimator, AutocorrError};

/// How a two-sample test accounts for serial correlation *within* each sample.
///
/// | Variant                          | Effect                                                                 |
/// |----------------------------------|------------------------------------------------------------------------|
/// | `EffectiveSampleSize` (default)  | estimate AR(1) `φ` pooled over the samples (each centred on its own mean), divide every sample size by `f = (1+φ)/(1-φ)` |
/// | `None`                           | classical test; valid only for independent observations                |
///
/// The samples are expected in time order (for example a reference window
/// and a test window of one sensor). Scaling sample sizes by `1/f` is the
/// first-order correction for any statistic that is a smooth function of
/// sample means: rank sums (Mann–Whitney), empirical distribution functions
/// (Kolmogorov–Smirnov; indicators are *less* autocorrelated than the raw
/// values, so the raw-value `φ` errs on the safe side) and mean absolute
/// deviations (Brown–Forsythe, where `φ` is estimated on the deviations).
///
/// # References
/// * H. von Storch and F. W. Zwiers (1999), *Statistical Analysis in Climate
///   Research*, Cambridge University Press (equivalent sample size).
/// * M. G. Kendall (1954), "Note on bias in the estimation of
///   autocorrelation", *Biometrika* 41(3/4), 403-404.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[non_exhaustive]
pub enum Adjustment {
    /// No adjustment.
    None,
    /// Divide sample sizes by the AR(1) long-run variance factor.
    EffectiveSampleSize {
        /// how `φ` is estimated
        estimator: Ar1Estimator,
    },
}

impl Default for Adjustment {
    fn default() -> Self {
        Adjustment::EffectiveSampleSize { estimator: Ar1Estimator::BiasCorrected }
    }
}

impl Adjustment {
    /// Variance factor `f >= 1` for these time-ordered segments (1 for `None`).
    /// A segment that is constant contributes nothing; all constant gives 1.
    pub(crate) fn factor(&self, segments: &[&[f64]]) -> Result<f64, AutocorrError> {
        match self {
            Adjustment::None => Ok(1.0),
            Adjustment::EffectiveSampleSize { estimator } => {
                match autocorr::ar1_coefficient_pooled(segments, *estimator) {
                    Ok(phi) => Ok(autocorr::long_run_variance_factor(phi)),
                    Err(AutocorrError::Constant) => Ok(1.0),
                    Err(e) => Err(e),
                }
            }
        }
    }
}
