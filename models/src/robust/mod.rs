//! Robust location and scale: median, MAD, Qn, Sn, Huber M-estimators,
//! Hyndman–Fan quantiles and sliding-window median/MAD.
//!
//! # Missing values
//!
//! Every estimator here **ignores non-finite values** (NaN and ±∞): they are
//! treated as missing readings, never as order statistics, and the estimate is
//! computed over the finite values that remain. A function returns `None`
//! (or [`HuberError::TooFewValues`]) when too few finite values are left. A
//! sensor never legitimately reports ±∞, so dropping them keeps one rule for
//! all estimators instead of special cases (`∞ − ∞` in a deviation).
//!
//! # Allocation
//!
//! [`median`], [`mad`] and [`quantile`] copy their input once. Hot paths that
//! evaluate many windows should keep one `Vec<f64>` and call
//! [`median_with_scratch`], [`median_mad_with_scratch`] or
//! [`quantile_with_scratch`], which allocate only while the buffer grows.
//! Qn and Sn allocate `O(n)` working memory per call; their `O(n log n)` work
//! dominates.
//!
//! # Constants
//!
//! | estimator | constant                         | small-sample factor                   |
//! |-----------|----------------------------------|---------------------------------------|
//! | MAD       | 1/Φ⁻¹(3/4) = 1.482602218505602   | none                                  |
//! | Qn        | 1/(√2·Φ⁻¹(5/8)) = 2.219144465985076 (not the printed 2.2219) | Croux & Rousseeuw (1992) `d_n` |
//! | Sn        | 1.1926                           | Croux & Rousseeuw (1992) `c_n`        |
//!
//! Raw order statistics are exposed ([`qn_raw`], [`sn_raw`], [`mad_raw`]) so
//! any other convention can be applied by the caller.
//!
//! ```
//! use telltale_models::robust::{mad, median, qn, quantile, QuantileType};
//! // bearing temperatures of a booster pump, one reading a glitch
//! let t = [41.2, 41.5, 41.3, 41.4, 95.0, 41.6, 41.3];
//! assert_eq!(median(&t), Some(41.4));
//! assert!(mad(&t).unwrap() < 0.5);
//! assert!(qn(&t).unwrap() < 0.5);
//! assert_eq!(quantile(&t, 0.5, QuantileType::default()), Some(41.4));
//! ```

mod huber;
mod mad;
mod median;
mod qn_sn;
mod quantile;
mod rolling;
pub(crate) mod select;

/// linfa's parameter-checking trait, re-exported so callers can `check()`
/// parameter sets without depending on linfa themselves.
pub use linfa::ParamGuard;

pub use huber::{
    Huber, HuberError, HuberEstimate, HuberParams, HuberParamsError, HuberValidParams, huber_beta,
};
pub use mad::{MAD_NORMAL, MedianMad, mad, mad_raw, median_mad_with_scratch};
pub use median::{median, median_in_place, median_with_scratch};
pub use qn_sn::{
    QN_CONSTANT, QN_CONSTANT_PRINTED_1993, SN_CONSTANT, SmallSample, qn, qn_raw,
    qn_small_sample_factor, qn_with, sn, sn_raw, sn_small_sample_factor, sn_with,
};
pub use quantile::{QuantileType, quantile, quantile_sorted, quantile_with_scratch, quantiles};
pub use rolling::{RollingMedianMad, SortedWindow, rolling_median_mad};

#[cfg(test)]
pub(crate) mod testdata {
    /// `chem`: 24 determinations of copper in wholemeal flour (ppm),
    /// Analytical Methods Committee (1989), Analyst 114, 1693; as shipped in
    /// R `MASS::chem` (catalogue §1).
    pub(crate) const CHEM: [f64; 24] = [
        2.90, 3.10, 3.40, 3.40, 3.70, 3.70, 2.80, 2.50, 2.40, 2.40, 2.70, 2.20, 5.28, 3.37, 3.03,
        3.03, 28.95, 3.77, 3.40, 2.20, 3.50, 3.60, 3.70, 3.70,
    ];
}
