//! Sensor-fault signatures: statistics that say the *instrument* (not the
//! machine) is misbehaving.
//!
//! | signature                         | statistic                                    | default threshold           |
//! |-----------------------------------|----------------------------------------------|-----------------------------|
//! | [`stuck`]                         | longest run within ½ resolution step         | 60 samples                  |
//! | [`hampel_global`], [`hampel_rolling`] | max \|x − med\| / max(1.4826·MAD, floor) | 3 (strict `>`)              |
//! | [`noise_change`]                  | z of log Qn ratio of first differences       | z > 3                       |
//! | [`dropout`]                       | longest gap between usable readings          | 1.5 × sampling interval     |
//! | [`out_of_range`]                  | readings outside the instrument range        | any (bounds inclusive)      |
//! | [`resolution_change`]             | window step / baseline step                  | ≥ 2 or ≤ ½                  |
//!
//! Each returns a small result struct with the statistic, the threshold it
//! was compared to, and the flagged indices or [`Span`]s. Detectors with
//! parameters follow linfa's `XParams` → `XValidParams` (`check()`) pattern.
//!
//! # Autocorrelation
//!
//! Minute data from pumps are strongly autocorrelated (lag-1 ρ ≈ 0.9 is
//! typical). How each signature deals with it:
//!
//! - **stuck**: no independence assumption. On a continuous-valued signal two
//!   consecutive readings within half a resolution step are rare however
//!   smooth the process; a run of 60 does not occur (tested on AR(1), φ = 0.9).
//!   On a coarsely quantised signal a steady process does repeat values, which
//!   is why the run length is compared to a threshold instead of flagging any
//!   repeat.
//! - **Hampel**: the global identifier compares each point with the marginal
//!   median and MAD, which autocorrelation does not bias (it only makes them
//!   noisier); the rolling filter compares a point with its own neighbours, so
//!   persistence shrinks both the deviation and the local MAD. Neither is
//!   adjusted; their false-alarm rates on AR(1), φ = 0.9, are measured by a
//!   seeded test and bounded in [`hampel_global`] / [`hampel_rolling`].
//! - **noise change**: the spread is measured on first differences, which
//!   nearly whitens an AR(1) with φ near 1 (lag-1 autocorrelation of the
//!   differences is −(1 − φ)/2), and the standard error uses an effective
//!   sample size `n (1 − r²) / (1 + r²)` from the differences' lag-1
//!   autocorrelation `r` in the baseline.
//! - **dropout, out of range**: deterministic rules, nothing to adjust.
//! - **resolution change**: deterministic given the data; applies only when
//!   the baseline is visibly quantised.
//!
//! ```text
//! index:    0 1 2 3 4 5 6 7 8 9
//! flagged:      [-----)     [-)      Span { start: 2, end: 5 }, Span { start: 7, end: 8 }
//! ```

/// linfa's parameter-checking trait, re-exported for `XParams::check()`.
pub use linfa::ParamGuard;

mod dropout;
#[cfg(test)]
mod false_alarm;
mod noise;
mod range;
mod resolution;
mod spikes;
mod stuck;

pub use dropout::{
    Dropout, DropoutError, DropoutParams, DropoutParamsError, DropoutResult, DropoutValidParams,
    Gap, dropout,
};
pub use noise::{
    NoiseChange, NoiseError, NoiseParams, NoiseParamsError, NoiseResult, NoiseValidParams,
    QN_GAUSSIAN_EFFICIENCY, noise_change,
};
pub use range::{
    OutOfRange, RangeParams, RangeParamsError, RangeResult, RangeValidParams, out_of_range,
};
pub use resolution::{
    RESOLUTION_GAP_QUANTILE, Resolution, ResolutionChange, ResolutionChangeResult,
    ResolutionParams, ResolutionParamsError, ResolutionValidParams, estimate_resolution,
    resolution_change,
};
pub use spikes::{
    Hampel, HampelParams, HampelParamsError, HampelValidParams, SpikeResult, hampel_global,
    hampel_rolling,
};
pub use stuck::{Stuck, StuckParams, StuckParamsError, StuckResult, StuckValidParams, stuck};

/// A half-open range of sample indices `[start, end)`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct Span {
    /// First index in the span.
    pub start: usize,
    /// One past the last index.
    pub end: usize,
}

impl Span {
    /// Number of samples covered.
    pub fn len(&self) -> usize {
        self.end - self.start
    }

    /// `true` for an empty span.
    pub fn is_empty(&self) -> bool {
        self.end == self.start
    }
}

/// Spans of consecutive `true` values.
pub(crate) fn spans_of(flags: impl IntoIterator<Item = bool>) -> Vec<Span> {
    let mut out = Vec::new();
    let mut start = None;
    let mut i = 0;
    for f in flags {
        match (f, start) {
            (true, None) => start = Some(i),
            (false, Some(s)) => {
                out.push(Span { start: s, end: i });
                start = None;
            }
            _ => {}
        }
        i += 1;
    }
    if let Some(s) = start {
        out.push(Span { start: s, end: i });
    }
    out
}

/// Implements linfa's `ParamGuard` for a newtype `XParams(XValidParams)`
/// whose `XValidParams` has `fn validate(&self) -> Result<(), E>`.
macro_rules! param_guard {
    ($params:ident, $valid:ident, $err:ty) => {
        impl linfa::ParamGuard for $params {
            type Checked = $valid;
            type Error = $err;

            fn check_ref(&self) -> Result<&Self::Checked, Self::Error> {
                self.0.validate()?;
                Ok(&self.0)
            }

            fn check(self) -> Result<Self::Checked, Self::Error> {
                self.0.validate()?;
                Ok(self.0)
            }
        }
    };
}
pub(crate) use param_guard;

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn spans_cover_runs_of_true() {
        let f = [false, false, true, true, true, false, false, true, false, true];
        assert_eq!(
            spans_of(f),
            vec![Span { start: 2, end: 5 }, Span { start: 7, end: 8 }, Span { start: 9, end: 10 }]
        );
        assert!(spans_of([false; 3]).is_empty());
    }
}
