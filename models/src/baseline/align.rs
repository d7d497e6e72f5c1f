//! Aligning one asset's sensors onto a common time grid.
//!
//! Each sensor arrives as its own irregular series. The fit and the scan both
//! need rows in which every sensor has (at most) one value, so readings are
//! put on a grid of fixed steps anchored at multiples of the step since the
//! Unix epoch (so a fit and a later scan with the same step share grid
//! boundaries). A grid row `r` covers `[origin + r·step, origin + (r+1)·step)`
//! in epoch milliseconds and holds, per sensor, the **last good finite
//! reading** inside that interval ([`Reduce::Last`], default) or the median of
//! the good readings in it ([`Reduce::Median`]). A row with no good reading is
//! missing: its value is NaN and its count is 0. Nothing is carried forward
//! or interpolated, so a dropout stays visible as a run of missing rows.
//!
//! ```text
//! epoch ms     0        60 000   120 000  180 000  240 000      step = 60 000 ms
//! grid rows    |--row 0--|--row 1--|--row 2--|--row 3--|
//! sensor A     a  a  a   a  a  ✗    a  a  a   a  a  a        every 20 s; ✗ = bad quality
//! (20 s)       ^ ^ ^ last good of each row is kept
//! sensor B     b              b               .        b     every 90 s, one missed
//! (90 s)
//! aligned A    a(40s)    a(80s)    a(160s)   a(220s)         count 3, 2, 3, 3
//! aligned B    b(0s)     b(90s)    NaN       b(230s)         count 1, 1, 0, 1
//! ```
//!
//! Values are in each sensor's own units; `counts` is the number of good
//! finite readings that fell in the row (before reduction).

use ndarray::Array2;

use super::error::BaselineError;
use crate::robust::median_in_place;

/// Hard cap on the grid length of one aligned frame, so a wrong step (1 ms
/// over a year) fails with a clear error instead of exhausting memory.
pub const MAX_GRID_ROWS: usize = 20_000_000;

/// What a sensor tells about the asset (DESIGN.md §4.2).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub enum SensorRole {
    /// Sets the operating point (load, speed, setpoint, ambient).
    Context,
    /// Reflects the machine's health.
    #[default]
    Condition,
}

/// Static description of one sensor of an asset, in asset order.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct SensorSpec {
    /// Context or condition.
    pub role: SensorRole,
    /// Instrument measuring range `[lo, hi]`, bounds included (sensor units).
    pub range: Option<[f64; 2]>,
    /// Normal operating band `[lo, hi]` (sensor units).
    pub band: Option<[f64; 2]>,
}

/// One sensor's raw readings, as the pipelines layer hands them over.
///
/// `ts_ms` must be strictly increasing; `values` and `good` have the same
/// length. NaN values are missing; `good = false` readings are ignored.
#[derive(Debug, Clone, Copy)]
pub struct SensorSeries<'a> {
    /// Reading times, epoch milliseconds UTC, strictly increasing.
    pub ts_ms: &'a [i64],
    /// Readings in the sensor's units; NaN = missing.
    pub values: &'a [f64],
    /// Quality flag per reading; only `true` readings are used.
    pub good: &'a [bool],
    /// Role, range and band.
    pub spec: SensorSpec,
}

impl SensorSeries<'_> {
    /// Checks lengths and ordering.
    ///
    /// # Errors
    /// [`BaselineError::LengthMismatch`] or [`BaselineError::Unsorted`],
    /// naming the sensor by its position `sensor`.
    pub fn validate(&self, sensor: usize) -> Result<(), BaselineError> {
        if self.values.len() != self.ts_ms.len() || self.good.len() != self.ts_ms.len() {
            return Err(BaselineError::LengthMismatch {
                sensor,
                ts: self.ts_ms.len(),
                values: self.values.len(),
                good: self.good.len(),
            });
        }
        if let Some(i) = self.ts_ms.windows(2).position(|w| w[1] <= w[0]) {
            return Err(BaselineError::Unsorted { sensor, index: i + 1 });
        }
        Ok(())
    }

    /// Iterator over the usable readings `(ts_ms, value)`: good and finite.
    pub fn usable(&self) -> impl Iterator<Item = (i64, f64)> + '_ {
        self.ts_ms
            .iter()
            .zip(self.values)
            .zip(self.good)
            .filter(|((_, v), g)| **g && v.is_finite())
            .map(|((t, v), _)| (*t, *v))
    }

    /// Median interval between consecutive usable readings, in milliseconds;
    /// `None` with fewer than two usable readings.
    pub fn median_interval_ms(&self) -> Option<f64> {
        let t: Vec<i64> = self.usable().map(|(t, _)| t).collect();
        let mut d: Vec<f64> = t.windows(2).map(|w| (w[1] - w[0]) as f64).collect();
        median_in_place(&mut d)
    }
}

/// How several good readings inside one grid step become one value.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub enum Reduce {
    /// The last good reading of the step (keeps the sensor's resolution and
    /// stuck runs intact).
    #[default]
    Last,
    /// The median of the good readings of the step (smooths fast sensors).
    Median,
}

/// One asset's sensors on a common grid.
#[derive(Debug, Clone, PartialEq)]
pub struct AlignedFrame {
    /// Start of row 0, epoch milliseconds (a multiple of `step_ms`).
    pub origin_ms: i64,
    /// Grid step, milliseconds.
    pub step_ms: i64,
    /// `rows × sensors`, sensor units; NaN = no good reading in the step.
    pub values: Array2<f64>,
    /// `rows × sensors`: good finite readings that fell in each step.
    pub counts: Array2<u32>,
}

impl AlignedFrame {
    /// Number of grid rows.
    pub fn n_rows(&self) -> usize {
        self.values.nrows()
    }

    /// Start time of row `r`, epoch milliseconds.
    pub fn row_start_ms(&self, r: usize) -> i64 {
        self.origin_ms + r as i64 * self.step_ms
    }

    /// `true` where a sensor has a value in a row (the missing-data mask).
    pub fn mask(&self) -> Array2<bool> {
        self.values.mapv(f64::is_finite)
    }
}

/// Median over sensors of each sensor's median usable sampling interval,
/// rounded to whole milliseconds (at least 1): the default grid step.
/// `None` when no sensor has two usable readings.
pub fn median_sampling_step_ms(series: &[SensorSeries<'_>]) -> Option<i64> {
    let mut per: Vec<f64> = series.iter().filter_map(SensorSeries::median_interval_ms).collect();
    median_in_place(&mut per).map(|m| (m.round() as i64).max(1))
}

/// Puts `series` on a grid of `step_ms` covering `[from_ms, to_ms)`; with
/// `None` bounds, the span of the usable readings. See the module docs for
/// the layout.
///
/// # Errors
/// [`BaselineError::Step`] for `step_ms <= 0`; [`BaselineError::NoSensors`];
/// a sensor's [`SensorSeries::validate`] error; [`BaselineError::NoReadings`]
/// when no usable reading exists and no bounds are given;
/// [`BaselineError::GridTooLong`] past [`MAX_GRID_ROWS`].
pub fn align(
    series: &[SensorSeries<'_>],
    step_ms: i64,
    from_ms: Option<i64>,
    to_ms: Option<i64>,
    reduce: Reduce,
) -> Result<AlignedFrame, BaselineError> {
    if step_ms <= 0 {
        return Err(BaselineError::Step(step_ms));
    }
    if series.is_empty() {
        return Err(BaselineError::NoSensors);
    }
    for (i, s) in series.iter().enumerate() {
        s.validate(i)?;
    }
    let first = series.iter().filter_map(|s| s.usable().next().map(|(t, _)| t)).min();
    let last = series.iter().filter_map(|s| s.usable().last().map(|(t, _)| t)).max();
    let from = match (from_ms, first) {
        (Some(f), _) => f,
        (None, Some(f)) => f,
        (None, None) => return Err(BaselineError::NoReadings),
    };
    let to = match (to_ms, last) {
        (Some(t), _) => t,
        (None, Some(l)) => l + 1,
        (None, None) => return Err(BaselineError::NoReadings),
    };
    let origin = from.div_euclid(step_ms) * step_ms;
    let span = (to - origin).max(0);
    let rows = usize::try_from((span + step_ms - 1) / step_ms).unwrap_or(usize::MAX);
    if rows > MAX_GRID_ROWS {
        return Err(BaselineError::GridTooLong { rows, max: MAX_GRID_ROWS, step_ms });
    }
    let p = series.len();
    let mut values = Array2::from_elem((rows, p), f64::NAN);
    let mut counts = Array2::<u32>::zeros((rows, p));
    let mut bucket: Vec<f64> = Vec::new();
    for (j, s) in series.iter().enumerate() {
        let mut cur: Option<usize> = None;
        bucket.clear();
        let flush = |row: usize, bucket: &mut Vec<f64>, values: &mut Array2<f64>| {
            if !bucket.is_empty() {
                values[[row, j]] = match reduce {
                    Reduce::Last => bucket[bucket.len() - 1],
                    Reduce::Median => median_in_place(bucket).unwrap_or(f64::NAN),
                };
                bucket.clear();
            }
        };
        for (t, v) in s.usable() {
            if t < from || t >= to || t < origin {
                continue;
            }
            let r = ((t - origin) / step_ms) as usize;
            if r >= rows {
                continue;
            }
            if cur != Some(r) {
                if let Some(c) = cur {
                    flush(c, &mut bucket, &mut values);
                }
                cur = Some(r);
            }
            bucket.push(v);
            counts[[r, j]] += 1;
        }
        if let Some(c) = cur {
            flush(c, &mut bucket, &mut values);
        }
    }
    Ok(AlignedFrame { origin_ms: origin, step_ms, values, counts })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn spec() -> SensorSpec {
        SensorSpec::default()
    }

    #[test]
    fn two_sensors_with_different_sampling_align_as_in_the_diagram() {
        // sensor A every 20 s, reading at 100 s has bad quality
        let ta: Vec<i64> = (0..12).map(|i| i * 20_000).collect();
        let va: Vec<f64> = (0..12).map(|i| i as f64).collect();
        let mut ga = vec![true; 12];
        ga[5] = false;
        // sensor B every 90 s (0, 90, 180 missing -> NaN, 270 is outside the span)
        let tb = [0, 90_000, 180_000, 230_000];
        let vb = [10.0, 11.0, f64::NAN, 13.0];
        let gb = [true; 4];
        let s = [
            SensorSeries { ts_ms: &ta, values: &va, good: &ga, spec: spec() },
            SensorSeries { ts_ms: &tb, values: &vb, good: &gb, spec: spec() },
        ];
        let f = align(&s, 60_000, Some(0), Some(240_000), Reduce::Last).unwrap();
        assert_eq!(f.n_rows(), 4);
        assert_eq!(f.values.column(0).to_vec(), vec![2.0, 4.0, 8.0, 11.0]);
        assert_eq!(f.counts.column(0).to_vec(), vec![3, 2, 3, 3]);
        assert_eq!(f.values[[0, 1]], 10.0);
        assert_eq!(f.values[[1, 1]], 11.0);
        assert!(f.values[[2, 1]].is_nan());
        assert_eq!(f.values[[3, 1]], 13.0);
        assert_eq!(f.counts.column(1).to_vec(), vec![1, 1, 0, 1]);
        assert!(!f.mask()[[2, 1]]);
        let m = align(&s, 60_000, Some(0), Some(240_000), Reduce::Median).unwrap();
        assert_eq!(m.values.column(0).to_vec(), vec![1.0, 3.5, 7.0, 10.0]);
    }

    #[test]
    fn grid_origin_is_a_multiple_of_the_step() {
        let t = [61_000, 125_000];
        let v = [1.0, 2.0];
        let g = [true, true];
        let s = [SensorSeries { ts_ms: &t, values: &v, good: &g, spec: spec() }];
        let f = align(&s, 60_000, None, None, Reduce::Last).unwrap();
        assert_eq!(f.origin_ms, 60_000);
        assert_eq!(f.n_rows(), 2);
        assert_eq!(f.row_start_ms(1), 120_000);
        assert_eq!(median_sampling_step_ms(&s), Some(64_000));
    }

    #[test]
    fn unsorted_and_mismatched_inputs_are_rejected() {
        let t = [2, 1];
        let v = [1.0, 2.0];
        let g = [true, true];
        let s = [SensorSeries { ts_ms: &t, values: &v, good: &g, spec: spec() }];
        assert!(matches!(
            align(&s, 1, None, None, Reduce::Last),
            Err(BaselineError::Unsorted { sensor: 0, index: 1 })
        ));
        let g1 = [true];
        let s = [SensorSeries { ts_ms: &[1, 2], values: &v, good: &g1, spec: spec() }];
        assert!(matches!(
            align(&s, 1, None, None, Reduce::Last),
            Err(BaselineError::LengthMismatch { sensor: 0, .. })
        ));
        assert!(matches!(align(&s, 0, None, None, Reduce::Last), Err(BaselineError::Step(0))));
    }
}
