//! Stuck / flat-line signature.

use super::{Span, param_guard, resolution::estimate_resolution};

/// Errors from checking [`StuckParams`].
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum StuckParamsError {
    /// `min_run` below 2.
    #[error(
        "stuck min_run must be at least 2 samples, got {0}; 60 (one hour of minute data) is the default"
    )]
    MinRun(usize),
    /// Negative or non-finite tolerance.
    #[error(
        "stuck tolerance_steps must be a finite number >= 0 (in resolution steps), got {0}; 0.5 is the default"
    )]
    ToleranceSteps(f64),
    /// Resolution not positive.
    #[error(
        "stuck resolution must be a finite number > 0 (units of the sensor), got {0}; leave it unset to estimate it"
    )]
    Resolution(f64),
}

/// Checked stuck parameters.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct StuckValidParams {
    min_run: usize,
    tolerance_steps: f64,
    resolution: Option<f64>,
}

/// Unchecked stuck parameters.
///
/// | Parameter         | Default   | Units            | Range     | Purpose                                          |
/// |-------------------|-----------|------------------|-----------|--------------------------------------------------|
/// | `min_run`         | 60        | samples          | [2, inf)  | shortest run that counts as stuck                |
/// | `tolerance_steps` | 0.5       | resolution steps | [0, inf)  | run = readings within this many steps of each other |
/// | `resolution`      | estimated | sensor units     | (0, inf)  | sensor step; give the baseline's for short windows |
///
/// `min_run = 60` (an hour of minute data) is common practice, no source;
/// calibrate it on the asset's clean history for coarsely quantised sensors.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StuckParams(StuckValidParams);

/// Entry point for the stuck signature.
#[derive(Debug, Clone, Copy)]
pub struct Stuck;

impl Stuck {
    /// Default parameters.
    pub fn params() -> StuckParams {
        StuckParams(StuckValidParams { min_run: 60, tolerance_steps: 0.5, resolution: None })
    }
}

impl StuckParams {
    /// Shortest run flagged (samples).
    pub fn min_run(mut self, v: usize) -> Self {
        self.0.min_run = v;
        self
    }
    /// Run tolerance in resolution steps.
    pub fn tolerance_steps(mut self, v: f64) -> Self {
        self.0.tolerance_steps = v;
        self
    }
    /// Known sensor resolution (e.g. from the baseline).
    pub fn resolution(mut self, v: f64) -> Self {
        self.0.resolution = Some(v);
        self
    }
}

impl StuckValidParams {
    fn validate(&self) -> Result<(), StuckParamsError> {
        if self.min_run < 2 {
            return Err(StuckParamsError::MinRun(self.min_run));
        }
        if !(self.tolerance_steps.is_finite() && self.tolerance_steps >= 0.0) {
            return Err(StuckParamsError::ToleranceSteps(self.tolerance_steps));
        }
        if let Some(r) = self.resolution
            && !(r.is_finite() && r > 0.0)
        {
            return Err(StuckParamsError::Resolution(r));
        }
        Ok(())
    }
    /// Shortest run flagged.
    pub fn min_run(&self) -> usize {
        self.min_run
    }
}

param_guard!(StuckParams, StuckValidParams, StuckParamsError);

/// Result of [`stuck`].
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct StuckResult {
    /// Longest run (samples).
    pub statistic: usize,
    /// `min_run` compared against (`statistic ≥ threshold` flags).
    pub threshold: usize,
    /// Resolution used (given or estimated; `None` if the data have fewer than two distinct values).
    pub resolution: Option<f64>,
    /// Largest range allowed inside a run (sensor units).
    pub tolerance: f64,
    /// Runs of at least `min_run` samples.
    pub flagged: Vec<Span>,
}

/// Stuck / flat-line: the longest run of consecutive readings that stay
/// within a fraction of the sensor's own resolution.
///
/// ```text
/// run [a, b):  max(x_a..x_{b-1}) - min(x_a..x_{b-1}) ≤ τ,   τ = tolerance_steps · resolution
/// statistic = longest run;  flag every run with length ≥ min_run
/// ```
///
/// The resolution is the given one or [`estimate_resolution`] of `x`; with
/// fewer than two distinct values τ = 0 (exact repeats). A non-finite reading
/// ends a run (it is a dropout, not a repeat). Units: samples.
///
/// No independence assumption: on continuous-valued data an exact repeat has
/// probability 0, so the seeded AR(1) test checks that nothing is flagged.
pub fn stuck(x: &[f64], params: &StuckValidParams) -> StuckResult {
    let resolution = params.resolution.or_else(|| estimate_resolution(x).map(|r| r.step));
    let tolerance = resolution.map_or(0.0, |r| params.tolerance_steps * r);
    let mut flagged = Vec::new();
    let mut longest = 0usize;
    let mut start = 0usize;
    let (mut lo, mut hi) = (f64::NAN, f64::NAN);
    let close = |start: usize, end: usize, longest: &mut usize, flagged: &mut Vec<Span>| {
        let len = end - start;
        *longest = (*longest).max(len);
        if len >= params.min_run {
            flagged.push(Span { start, end });
        }
    };
    for (i, &v) in x.iter().enumerate() {
        if !v.is_finite() {
            close(start, i, &mut longest, &mut flagged);
            start = i + 1;
            lo = f64::NAN;
            continue;
        }
        if lo.is_nan() {
            start = i;
            lo = v;
            hi = v;
            continue;
        }
        let (nlo, nhi) = (lo.min(v), hi.max(v));
        if nhi - nlo <= tolerance {
            lo = nlo;
            hi = nhi;
        } else {
            close(start, i, &mut longest, &mut flagged);
            start = i;
            lo = v;
            hi = v;
        }
    }
    if start < x.len() {
        close(start, x.len(), &mut longest, &mut flagged);
    }
    StuckResult { statistic: longest, threshold: params.min_run, resolution, tolerance, flagged }
}

#[cfg(test)]
mod tests {
    use super::*;
    use linfa::ParamGuard;

    #[test]
    fn flat_line_inside_varying_signal_is_found() {
        let mut x: Vec<f64> = (0..50).map(|i| 20.0 + 0.1 * f64::from(i % 7)).collect();
        x.extend(std::iter::repeat_n(20.3, 70));
        x.extend((0..50).map(|i| 20.0 + 0.1 * f64::from(i % 5)));
        let r = stuck(&x, &Stuck::params().check().unwrap());
        assert!((r.resolution.unwrap() - 0.1).abs() < 1e-9);
        assert_eq!(r.flagged, vec![Span { start: 50, end: 120 }]);
        assert_eq!(r.statistic, 70);
    }

    #[test]
    fn nan_ends_a_run() {
        let mut x = vec![1.0; 40];
        x.push(f64::NAN);
        x.extend(vec![1.0; 40]);
        let r = stuck(&x, &Stuck::params().check().unwrap());
        assert_eq!(r.statistic, 40);
        assert!(r.flagged.is_empty());
        assert_eq!(r.tolerance, 0.0);
    }

    #[test]
    fn min_run_must_be_at_least_two() {
        assert_eq!(Stuck::params().min_run(1).check(), Err(StuckParamsError::MinRun(1)));
    }

    #[test]
    fn tolerance_steps_cannot_be_negative() {
        assert_eq!(
            Stuck::params().tolerance_steps(-0.1).check(),
            Err(StuckParamsError::ToleranceSteps(-0.1))
        );
    }

    #[test]
    fn resolution_must_be_positive() {
        assert_eq!(Stuck::params().resolution(0.0).check(), Err(StuckParamsError::Resolution(0.0)));
    }
}
