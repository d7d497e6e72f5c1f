//! Out-of-range signature.

use super::{Span, param_guard, spans_of};

/// Errors from checking [`RangeParams`].
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum RangeParamsError {
    /// A bound is NaN.
    #[error(
        "instrument range bound is NaN (low {low}, high {high}); give both bounds in sensor units"
    )]
    NanBound {
        /// Lower bound.
        low: f64,
        /// Upper bound.
        high: f64,
    },
    /// `low > high`.
    #[error("instrument range low {low} is above high {high}; swap the bounds")]
    Inverted {
        /// Lower bound.
        low: f64,
        /// Upper bound.
        high: f64,
    },
}

/// Checked instrument range.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct RangeValidParams {
    low: f64,
    high: f64,
}

/// Unchecked instrument range (the fleet registry's `range = [low, high]`).
///
/// | Parameter | Default | Units        | Range          | Purpose                    |
/// |-----------|---------|--------------|----------------|----------------------------|
/// | `low`     | —       | sensor units | ≤ `high`, ±inf allowed | lowest valid reading (inclusive) |
/// | `high`    | —       | sensor units | ≥ `low`        | highest valid reading (inclusive) |
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RangeParams(RangeValidParams);

/// Entry point for the out-of-range signature.
#[derive(Debug, Clone, Copy)]
pub struct OutOfRange;

impl OutOfRange {
    /// Instrument range `[low, high]`, bounds included.
    pub fn params(low: f64, high: f64) -> RangeParams {
        RangeParams(RangeValidParams { low, high })
    }
}

impl RangeValidParams {
    fn validate(&self) -> Result<(), RangeParamsError> {
        let (low, high) = (self.low, self.high);
        if low.is_nan() || high.is_nan() {
            Err(RangeParamsError::NanBound { low, high })
        } else if low > high {
            Err(RangeParamsError::Inverted { low, high })
        } else {
            Ok(())
        }
    }
    /// Lower bound (inclusive).
    pub fn low(&self) -> f64 {
        self.low
    }
    /// Upper bound (inclusive).
    pub fn high(&self) -> f64 {
        self.high
    }
}

param_guard!(RangeParams, RangeValidParams, RangeParamsError);

/// Result of [`out_of_range`].
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct RangeResult {
    /// Number of finite readings outside `[low, high]`.
    pub statistic: usize,
    /// Readings allowed outside before flagging (always 0: any is a fault).
    pub threshold: usize,
    /// `statistic` / number of finite readings (0 when there are none).
    pub fraction: f64,
    /// Runs of consecutive out-of-range readings.
    pub flagged: Vec<Span>,
}

/// Out of range: readings outside the instrument's measuring range.
///
/// ```text
/// out_i = x_i < low  or  x_i > high        (bounds inclusive: x = low and x = high are valid)
/// ```
///
/// NaN readings are not counted (they are dropouts); ±∞ are out of range
/// unless the bound itself is infinite. Units: count of samples.
pub fn out_of_range(x: &[f64], params: &RangeValidParams) -> RangeResult {
    let out = |v: f64| v < params.low || v > params.high;
    let flagged = spans_of(x.iter().map(|&v| out(v)));
    let statistic = flagged.iter().map(Span::len).sum();
    let finite = x.iter().filter(|v| !v.is_nan()).count();
    let fraction = if finite == 0 { 0.0 } else { statistic as f64 / finite as f64 };
    RangeResult { statistic, threshold: 0, fraction, flagged }
}

#[cfg(test)]
mod tests {
    use super::*;
    use linfa::ParamGuard;

    #[test]
    fn bounds_are_inclusive() {
        // DESIGN.md 4.2: range bounds included
        let p = OutOfRange::params(-20.0, 150.0).check().unwrap();
        let r = out_of_range(&[-20.0, 150.0, 151.0, 152.0, 20.0, -20.5, f64::NAN], &p);
        assert_eq!(r.statistic, 3);
        assert_eq!(r.flagged, vec![Span { start: 2, end: 4 }, Span { start: 5, end: 6 }]);
        assert!((r.fraction - 0.5).abs() < 1e-12);
    }

    #[test]
    fn inverted_range_is_rejected() {
        assert_eq!(
            OutOfRange::params(10.0, 0.0).check(),
            Err(RangeParamsError::Inverted { low: 10.0, high: 0.0 })
        );
    }

    #[test]
    fn nan_bound_is_rejected() {
        assert!(matches!(
            OutOfRange::params(f64::NAN, 1.0).check(),
            Err(RangeParamsError::NanBound { .. })
        ));
    }
}
