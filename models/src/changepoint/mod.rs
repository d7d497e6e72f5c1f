//! Change-point detection on a single series: sequential detectors (tabular
//! CUSUM, self-starting CUSUM, Page–Hinkley) and an offline segmentation
//! (exact PELT), plus the one-shot OLS-CUSUM test and the AR(1) adjustment
//! that makes all of them usable on autocorrelated minute data.
//!
//! | item | kind | use it when |
//! |------|------|-------------|
//! | [`Cusum`] / [`cusum`] | streaming / batch | a per-asset baseline gives the in-control mean and sigma |
//! | [`design_for_shift`] | design | choose `k`, `h` from a shift to catch and a target in-control ARL |
//! | [`SelfStartingCusum`] | streaming | no baseline yet (new pump, after maintenance) |
//! | [`PageHinkley`] / [`page_hinkley`] | streaming / batch | drift of the running mean, no reference |
//! | [`Pelt`] | offline | where, and how many times, the level (or level and spread) changed |
//! | [`ols_cusum_test`] | offline | is there any level change at all in this window (p-value) |
//! | [`Ar1`] | adjustment | the data are autocorrelated (almost always for minute data) |
//!
//! # Autocorrelation
//!
//! All the textbook detectors assume independent observations. One-minute
//! pressure or current readings from a pump are strongly autocorrelated
//! (lag-1 correlation 0.8 to 0.99 is typical): a run of high readings is not
//! evidence of a change, yet a CUSUM standardised by the marginal sigma adds
//! it up as if it were, and alarms many times per day. The adjustments used
//! here, all under an AR(1) working model `x_t - mu = phi (x_{t-1} - mu) + e_t`:
//!
//! ```text
//! sequential (CUSUM, Page-Hinkley): run on standardised innovations
//!     z_t = ((x_t - mu) - phi (x_{t-1} - mu)) / sigma_e,   sigma_e = sigma_x sqrt(1 - phi^2)
//!     (the residual chart; iid N(0,1) in control, so the iid ARL results apply;
//!      a sustained shift d in x shows as a shift d (1 - phi) / sigma_e in z)
//! offline (PELT): keep the cost, inflate the penalty by the long-run variance ratio
//!     sigma_LR^2 / sigma_x^2 = (1 + phi) / (1 - phi)
//! ```
//!
//! [`Ar1::estimate`] fits `mu`, `phi`, `sigma_x` on an in-control window;
//! [`CusumParams::ar1`] and [`Ar1::innovations`] apply the residual chart;
//! [`PeltParams::autocorrelation`] switches the penalty inflation (on by
//! default). The residual chart follows Alwan & Roberts (1988); the
//! long-run variance of an AR(1) is a textbook identity (e.g. Box, Jenkins &
//! Reinsel, *Time Series Analysis*); using it to scale a change-point
//! penalty is common practice, no source.
//!
//! # References
//! * E. S. Page (1954), "Continuous inspection schemes", Biometrika 41(1/2), 100-115.
//! * D. C. Montgomery, *Introduction to Statistical Quality Control*, Wiley (ch. 9, tabular CUSUM).
//! * D. Siegmund (1985), *Sequential Analysis: Tests and Confidence Intervals*, Springer.
//! * D. M. Hawkins (1987), "Self-starting cusum charts for location and scale", The Statistician 36(4), 299-316.
//! * D. V. Hinkley (1971), "Inference about the change-point from cumulative sum tests", Biometrika 58(3), 509-523.
//! * R. Killick, P. Fearnhead, I. A. Eckley (2012), "Optimal detection of changepoints with a linear
//!   computational cost", Journal of the American Statistical Association 107(500), 1590-1598.
//! * N. R. Zhang, D. O. Siegmund (2007), "A modified Bayes information criterion with applications to
//!   the analysis of comparative genomic hybridization data", Biometrics 63(1), 22-32.
//! * L. C. Alwan, H. V. Roberts (1988), "Time-series modeling for statistical process control",
//!   Journal of Business & Economic Statistics 6(1), 87-95.
//!
//! ```
//! use linfa::ParamGuard;
//! use telltale_models::changepoint::{Cost, Penalty, Pelt};
//! // discharge pressure of a booster pump (bar): a step down after a valve change
//! let y: Vec<f64> = (0..200).map(|i| if i < 120 { 4.0 } else { 3.2 } + 0.05 * ((i * 7919 % 13) as f64 - 6.0) / 6.0).collect();
//! let seg = Pelt::params(Cost::L2).penalty(Penalty::Value(1.0)).check()?.segment(&y)?;
//! assert_eq!(seg.breakpoints, vec![120, 200]);
//! # Ok::<(), Box<dyn std::error::Error>>(())
//! ```

mod ar1;
#[cfg(test)]
mod autocorr_tests;
pub mod cusum;
mod ols_cusum;
pub mod page_hinkley;
pub mod pelt;
mod scale;

/// Re-exported so callers can check parameter builders without naming linfa.
pub use linfa::ParamGuard;

pub use crate::dist::kolmogorov_sf;
pub use ar1::{Ar1, Ar1Error};
pub use cusum::{
    Alarm, Cusum, CusumDesign, CusumDesignError, CusumError, CusumParams, CusumParamsError,
    CusumTrace, CusumValidParams, SelfStartingCusum, Side, cusum, design_for_shift,
    design_threshold, siegmund_arl, two_sided_arl,
};
pub use ols_cusum::{OlsCusum, OlsCusumError, deviation_cusum, ols_cusum_test};
pub use page_hinkley::{
    Direction, PageHinkley, PageHinkleyError, PageHinkleyParams, PageHinkleyParamsError,
    PageHinkleyValidParams, PhAlarm, PhReference, PhTrace, page_hinkley,
};
pub use pelt::{
    Autocorrelation, Cost, Pelt, PeltError, PeltParams, PeltParamsError, PeltValidParams, Penalty,
    Pruning, Segmentation,
};
