//! Monotonic trend tests and robust slopes for slowly drifting sensors.
//!
//! * [`MannKendall`]: is there a monotonic trend? Kendall's score `S` in
//!   O(n log n), tie-corrected variance, exact p-values for small tie-free
//!   samples, and a serial-correlation correction on by default
//!   ([`SerialCorrection`]).
//! * [`TheilSen`]: how fast? The median pairwise slope with Sen's (1968)
//!   confidence interval, O(n log n) expected time, any (non-uniform) time axis.
//!
//! ```text
//!  value ▲                  ·  ·
//!        │            ·  ·  ·     ·      slope   = median of all (y_j - y_i)/(t_j - t_i)
//!        │     ·  ·     ·                S       = #rising pairs - #falling pairs
//!        │  ·     ·                      p-value: is S larger than chance allows?
//!        └──────────────────────────▶ t
//! ```
//!
//! # Serial correlation
//!
//! Both classical tests assume independent observations. Condition-monitoring
//! series are strongly autocorrelated, and on an AR(1) series with `φ = 0.9`
//! the uncorrected Mann–Kendall test at `α = 0.01` rejects a true "no trend"
//! hypothesis in roughly two runs out of three (measured in the seeded test
//! `tests::ar1_false_alarm_rates`). The default correction brings this back
//! near the nominal level. The Theil–Sen *point* estimate stays unbiased under
//! autocorrelation; only its interval (which assumes independence) is too
//! narrow, so read `slope_low..slope_high` as a lower bound on the uncertainty
//! for autocorrelated data (or compute it on block means).

mod kendall;
mod mann_kendall;
mod theil_sen;

pub use mann_kendall::{
    MannKendall, MannKendallError, MannKendallParams, MannKendallParamsError,
    MannKendallValidParams, PValueMethod, SerialCorrection, mann_kendall,
};
pub use theil_sen::{
    TheilSen, TheilSenError, TheilSenParams, TheilSenParamsError, TheilSenValidParams, theil_sen,
};
