//! # telltale-models
//!
//! Pure computation for telltale: robust location and scale, change-point and
//! two-sample tests, trend tests, sensor-fault signatures, multiple-testing
//! control and (later) per-asset baselines. Everything works on slices and
//! `ndarray` views; nothing here does I/O or async.
//!
//! Each method's documentation gives its formula, units, defaults and the
//! published source. Parameter sets follow the linfa convention: an unchecked
//! `XParams` builder turns into a checked `XValidParams` through
//! [`linfa::ParamGuard`].
//!
//! ```
//! use telltale_models::robust::{median, mad};
//! let x = [1.0, 2.0, 3.0, 4.0, 100.0];
//! assert_eq!(median(&x), Some(3.0));
//! // MAD scaled to be consistent for the normal standard deviation (Hampel 1974)
//! assert!((mad(&x).unwrap() - 1.482602218505602).abs() < 1e-12);
//! ```
//!
//! | module | what |
//! |---|---|
//! | [`robust`] | median, MAD, Qn, Sn, Huber, Hyndman & Fan quantiles, rolling median/MAD |
//! | [`changepoint`] | tabular and self-starting CUSUM, Page–Hinkley, PELT, OLS-CUSUM |
//! | [`trend`] | Mann–Kendall (with serial-correlation correction), Theil–Sen |
//! | [`twosample`] | Mann–Whitney U, Kolmogorov–Smirnov, Brown–Forsythe |
//! | [`signatures`] | stuck, spikes (Hampel), noise, dropout, out-of-range, resolution change |
//! | [`multitest`] | Benjamini–Hochberg and Benjamini–Yekutieli |
//! | [`autocorr`] | autocorrelation, AR(1), effective sample size, prewhitening |
//! | [`dist`] | normal, t, F, χ², beta and Kolmogorov distribution functions |
//! | [`baseline`] | per-asset baselines: aligned grid, regimes, per-regime sensor baselines, regression and PCA redundancy |

pub mod autocorr;
pub mod baseline;
pub mod changepoint;
pub mod dist;
pub mod downsample;
pub mod multitest;
pub mod robust;
pub mod signatures;
pub mod trend;
pub mod twosample;
pub mod verdict;

/// Re-exported so callers can check parameter builders without naming linfa.
pub use linfa::ParamGuard;

pub use baseline::{AssetBaseline, AssetBaselineParams, AssetBaselineValidParams};
pub use changepoint::{Cusum, CusumParams, PageHinkley, PageHinkleyParams, Pelt, PeltParams};
pub use multitest::benjamini_hochberg;
pub use robust::{Huber, HuberParams, mad, median, qn, sn};
pub use trend::{MannKendall, MannKendallParams, TheilSen, TheilSenParams};
pub use twosample::{BrownForsythe, KolmogorovSmirnov, MannWhitney};
