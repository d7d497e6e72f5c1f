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

pub mod autocorr;
pub mod baseline;
pub mod changepoint;
pub mod dist;
pub mod multitest;
pub mod robust;
pub mod signatures;
pub mod trend;
pub mod twosample;
