//! Dropout signature: gaps in the readings against the sampling interval.

use super::param_guard;

/// Errors from checking [`DropoutParams`].
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum DropoutParamsError {
    /// Interval not positive.
    #[error(
        "expected sampling interval must be > 0 ms, got {0}; give the sensor's logging period (60000 for minute data)"
    )]
    Interval(i64),
    /// Factor below 1.
    #[error(
        "dropout factor must be a finite number >= 1 (sampling intervals), got {0}; 1.5 flags one missed reading"
    )]
    Factor(f64),
}

/// Errors from [`dropout`].
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum DropoutError {
    /// Invalid parameters.
    #[error(transparent)]
    Params(#[from] DropoutParamsError),
    /// Timestamps go backwards.
    #[error(
        "timestamps must be sorted ascending: row {row} has {got} ms after {previous} ms; sort the readings by time"
    )]
    Unsorted {
        /// 0-based row of the offending timestamp.
        row: usize,
        /// Timestamp of the previous row (ms).
        previous: i64,
        /// Timestamp of this row (ms).
        got: i64,
    },
    /// `values` and `ts_ms` differ in length.
    #[error("values has {values} rows but timestamps has {ts}; pass one value per timestamp")]
    LengthMismatch {
        /// Number of timestamps.
        ts: usize,
        /// Number of values.
        values: usize,
    },
    /// Window end before start.
    #[error("window end {end} ms is before its start {start} ms; swap them")]
    Window {
        /// Window start (ms).
        start: i64,
        /// Window end (ms).
        end: i64,
    },
}

/// Checked dropout parameters.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct DropoutValidParams {
    expected_interval_ms: i64,
    factor: f64,
}

/// Unchecked dropout parameters.
///
/// | Parameter              | Default  | Units              | Range     | Purpose                                  |
/// |------------------------|----------|--------------------|-----------|------------------------------------------|
/// | `expected_interval_ms` | required | ms                 | (0, inf)  | the sensor's sampling interval           |
/// | `factor`               | 1.5      | sampling intervals | [1, inf)  | gaps longer than factor × interval flag  |
///
/// 1.5 flags a single missed reading while tolerating ±25 % timestamp jitter
/// (common practice, no source).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DropoutParams(DropoutValidParams);

/// Entry point for the dropout signature.
#[derive(Debug, Clone, Copy)]
pub struct Dropout;

impl Dropout {
    /// Parameters for a sensor logged every `expected_interval_ms`.
    pub fn params(expected_interval_ms: i64) -> DropoutParams {
        DropoutParams(DropoutValidParams { expected_interval_ms, factor: 1.5 })
    }
}

impl DropoutParams {
    /// Gap factor in sampling intervals.
    pub fn factor(mut self, v: f64) -> Self {
        self.0.factor = v;
        self
    }
}

impl DropoutValidParams {
    fn validate(&self) -> Result<(), DropoutParamsError> {
        if self.expected_interval_ms <= 0 {
            return Err(DropoutParamsError::Interval(self.expected_interval_ms));
        }
        if !(self.factor.is_finite() && self.factor >= 1.0) {
            return Err(DropoutParamsError::Factor(self.factor));
        }
        Ok(())
    }
    /// Longest allowed gap (ms).
    pub fn threshold_ms(&self) -> f64 {
        self.factor * self.expected_interval_ms as f64
    }
}

param_guard!(DropoutParams, DropoutValidParams, DropoutParamsError);

/// One gap between usable readings.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct Gap {
    /// Row of the last usable reading before the gap (`None`: the window start).
    pub after_row: Option<usize>,
    /// Row of the first usable reading after the gap (`None`: the window end).
    pub before_row: Option<usize>,
    /// Gap start (ms).
    pub start_ms: i64,
    /// Gap end (ms).
    pub end_ms: i64,
    /// Estimated readings missed: `round(length / interval) − 1` (at least 1).
    pub missing: u64,
}

impl Gap {
    /// Gap length (ms).
    pub fn length_ms(&self) -> i64 {
        self.end_ms - self.start_ms
    }
}

/// Result of [`dropout`].
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct DropoutResult {
    /// Longest gap between consecutive usable readings (ms; 0 with fewer than two).
    pub statistic: i64,
    /// `factor × expected_interval_ms` (ms).
    pub threshold_ms: f64,
    /// Gaps longer than the threshold, in time order.
    pub gaps: Vec<Gap>,
}

/// Dropout: gaps between usable readings longer than the sampling interval
/// allows.
///
/// ```text
/// usable rows: ts ascending, value finite (when values are given)
/// gap_i = ts_{i+1} − ts_i  (plus window start → first and last → window end, when a window is given)
/// flag gap_i > factor · expected_interval_ms
/// ```
///
/// `ts_ms` are UTC epoch milliseconds, non-decreasing (duplicates allowed).
/// With `values`, rows whose value is NaN or ±∞ count as missing (a logger
/// writing NaN is as silent as one writing nothing). With `window_ms =
/// Some((start, end))`, the edges count as readings, so a sensor silent for
/// the whole window gives one gap `[start, end)`.
///
/// # Errors
/// [`DropoutError::Unsorted`] naming the first row that goes back in time;
/// [`DropoutError::LengthMismatch`]; [`DropoutError::Window`] for end < start.
pub fn dropout(
    ts_ms: &[i64],
    values: Option<&[f64]>,
    window_ms: Option<(i64, i64)>,
    params: &DropoutValidParams,
) -> Result<DropoutResult, DropoutError> {
    if let Some(v) = values
        && v.len() != ts_ms.len()
    {
        return Err(DropoutError::LengthMismatch { ts: ts_ms.len(), values: v.len() });
    }
    if let Some((start, end)) = window_ms
        && end < start
    {
        return Err(DropoutError::Window { start, end });
    }
    if let Some(row) = ts_ms.windows(2).position(|w| w[1] < w[0]) {
        return Err(DropoutError::Unsorted {
            row: row + 1,
            previous: ts_ms[row],
            got: ts_ms[row + 1],
        });
    }
    let threshold_ms = params.threshold_ms();
    let interval = params.expected_interval_ms;
    let usable = |i: usize| values.is_none_or(|v| v[i].is_finite());
    let mut gaps = Vec::new();
    let mut statistic = 0i64;
    let mut prev: Option<(Option<usize>, i64)> = window_ms.map(|(s, _)| (None, s));
    let mut consider = |a: (Option<usize>, i64), b: (Option<usize>, i64), gaps: &mut Vec<Gap>| {
        let len = b.1 - a.1;
        statistic = statistic.max(len);
        if len as f64 > threshold_ms {
            let missing = ((len as f64 / interval as f64).round() as u64).saturating_sub(1).max(1);
            gaps.push(Gap { after_row: a.0, before_row: b.0, start_ms: a.1, end_ms: b.1, missing });
        }
    };
    for (i, &t) in ts_ms.iter().enumerate() {
        if !usable(i) {
            continue;
        }
        if let Some(p) = prev {
            consider(p, (Some(i), t), &mut gaps);
        }
        prev = Some((Some(i), t));
    }
    if let (Some((_, end)), Some(p)) = (window_ms, prev) {
        consider(p, (None, end), &mut gaps);
    }
    Ok(DropoutResult { statistic, threshold_ms, gaps })
}

#[cfg(test)]
mod tests {
    use super::*;
    use linfa::ParamGuard;

    const MIN: i64 = 60_000;

    #[test]
    fn missing_rows_and_nan_values_make_gaps() {
        let p = Dropout::params(MIN).check().unwrap();
        let ts: Vec<i64> = [0, 1, 2, 5, 6, 7, 8].iter().map(|m| m * MIN).collect();
        let r = dropout(&ts, None, None, &p).unwrap();
        assert_eq!(r.statistic, 3 * MIN);
        assert_eq!(r.gaps.len(), 1);
        assert_eq!(r.gaps[0].missing, 2);
        assert_eq!((r.gaps[0].after_row, r.gaps[0].before_row), (Some(2), Some(3)));
        let v = [1.0, 1.0, 1.0, 1.0, f64::NAN, f64::NAN, 1.0];
        let r = dropout(&ts, Some(&v), None, &p).unwrap();
        assert_eq!(r.gaps.len(), 2);
        assert_eq!(r.gaps[1].length_ms(), 3 * MIN);
    }

    #[test]
    fn jitter_below_factor_is_not_a_gap() {
        let p = Dropout::params(MIN).check().unwrap();
        let ts = [0, 70_000, 120_000, 205_000];
        assert!(dropout(&ts, None, None, &p).unwrap().gaps.is_empty());
    }

    #[test]
    fn silent_window_is_one_gap() {
        let p = Dropout::params(MIN).check().unwrap();
        let r = dropout(&[], None, Some((0, 60 * MIN)), &p).unwrap();
        assert_eq!(r.gaps.len(), 1);
        assert_eq!(r.gaps[0].missing, 59);
    }

    #[test]
    fn unsorted_timestamps_name_the_row() {
        let p = Dropout::params(MIN).check().unwrap();
        assert_eq!(
            dropout(&[0, MIN, 30_000], None, None, &p),
            Err(DropoutError::Unsorted { row: 2, previous: MIN, got: 30_000 })
        );
    }

    #[test]
    fn length_mismatch_is_an_error() {
        let p = Dropout::params(MIN).check().unwrap();
        assert!(matches!(
            dropout(&[0, MIN], Some(&[1.0]), None, &p),
            Err(DropoutError::LengthMismatch { ts: 2, values: 1 })
        ));
    }

    #[test]
    fn interval_must_be_positive() {
        assert_eq!(Dropout::params(0).check(), Err(DropoutParamsError::Interval(0)));
    }

    #[test]
    fn factor_must_be_at_least_one() {
        assert_eq!(Dropout::params(MIN).factor(0.9).check(), Err(DropoutParamsError::Factor(0.9)));
    }
}
