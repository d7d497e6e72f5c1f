//! Sensor resolution (quantisation step) and its change.

use super::param_guard;
use crate::robust::{QuantileType, quantile_sorted};

/// Share of the smallest gaps ignored by [`estimate_resolution`]: the step is
/// the 10 % (type 1) quantile of the gaps between distinct values, so a few
/// stray readings (interpolated or converted values) do not set it.
pub const RESOLUTION_GAP_QUANTILE: f64 = 0.1;

/// Estimated resolution of a sample.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct Resolution {
    /// Estimated quantisation step (units of the data).
    pub step: f64,
    /// Number of distinct values (after merging floating-point noise).
    pub distinct: usize,
    /// Number of finite values.
    pub finite: usize,
}

impl Resolution {
    /// `distinct / finite`: near 1 for a continuous-valued signal, small for a
    /// coarsely quantised one.
    pub fn distinct_fraction(&self) -> f64 {
        self.distinct as f64 / self.finite as f64
    }
}

/// Robust estimate of a sensor's resolution: a low quantile of the gaps
/// between its sorted distinct values.
///
/// ```text
/// v_1 < v_2 < … < v_m   distinct finite values (values closer than 1e-9·max|x| merged)
/// g_i = v_{i+1} - v_i   step = Q_type1(g, 0.10)
/// ```
///
/// For a quantised sensor most gaps equal the step, so the estimate is the
/// step even if up to 10 % of the gaps are stray. For a continuous-valued
/// signal it is small (about a tenth of the mean gap) and shrinks with `n`.
/// Units: those of `x`. `None` with fewer than two distinct finite values.
pub fn estimate_resolution(x: &[f64]) -> Option<Resolution> {
    let mut v: Vec<f64> = x.iter().copied().filter(|v| v.is_finite()).collect();
    let finite = v.len();
    v.sort_unstable_by(f64::total_cmp);
    let (first, last) = (*v.first()?, *v.last()?);
    let tie = 1e-9 * first.abs().max(last.abs()).max(f64::MIN_POSITIVE);
    let mut gaps = Vec::new();
    let mut prev = first;
    for &val in &v[1..] {
        if val - prev > tie {
            gaps.push(val - prev);
            prev = val;
        }
    }
    if gaps.is_empty() {
        return None;
    }
    let distinct = gaps.len() + 1;
    gaps.sort_unstable_by(f64::total_cmp);
    let step = quantile_sorted(&gaps, RESOLUTION_GAP_QUANTILE, QuantileType::Type1);
    Some(Resolution { step, distinct, finite })
}

/// Errors from checking [`ResolutionParams`].
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum ResolutionParamsError {
    /// `factor` must exceed 1.
    #[error(
        "resolution-change factor must be a finite number > 1, got {0}; 2 flags a doubled or halved step"
    )]
    Factor(f64),
    /// `min_distinct` too small.
    #[error(
        "resolution-change min_distinct must be at least 3, got {0}; fewer distinct values say nothing about the step"
    )]
    MinDistinct(usize),
    /// `max_distinct_fraction` outside (0, 1].
    #[error(
        "resolution-change max_distinct_fraction must be in (0, 1], got {0}; 0.5 is the default"
    )]
    MaxDistinctFraction(f64),
}

/// Checked resolution-change parameters.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct ResolutionValidParams {
    factor: f64,
    min_distinct: usize,
    max_distinct_fraction: f64,
}

/// Unchecked resolution-change parameters.
///
/// | Parameter               | Default | Units | Range     | Purpose                                                |
/// |-------------------------|---------|-------|-----------|--------------------------------------------------------|
/// | `factor`                | 2.0     | ratio | (1, inf)  | flag when the step grows or shrinks by this factor     |
/// | `min_distinct`          | 5       | count | [3, inf)  | window needs this many distinct values to be judged    |
/// | `max_distinct_fraction` | 0.5     | share | (0, 1]    | baseline counts as quantised below this distinct share |
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ResolutionParams(ResolutionValidParams);

/// Entry point for the resolution-change signature.
#[derive(Debug, Clone, Copy)]
pub struct ResolutionChange;

impl ResolutionChange {
    /// Default parameters.
    pub fn params() -> ResolutionParams {
        ResolutionParams(ResolutionValidParams {
            factor: 2.0,
            min_distinct: 5,
            max_distinct_fraction: 0.5,
        })
    }
}

impl ResolutionParams {
    /// Ratio that counts as a change (both directions).
    pub fn factor(mut self, v: f64) -> Self {
        self.0.factor = v;
        self
    }
    /// Distinct values the window needs.
    pub fn min_distinct(mut self, v: usize) -> Self {
        self.0.min_distinct = v;
        self
    }
    /// Largest distinct share for a baseline to count as quantised.
    pub fn max_distinct_fraction(mut self, v: f64) -> Self {
        self.0.max_distinct_fraction = v;
        self
    }
}

impl ResolutionValidParams {
    fn validate(&self) -> Result<(), ResolutionParamsError> {
        if !(self.factor.is_finite() && self.factor > 1.0) {
            return Err(ResolutionParamsError::Factor(self.factor));
        }
        if self.min_distinct < 3 {
            return Err(ResolutionParamsError::MinDistinct(self.min_distinct));
        }
        if !(self.max_distinct_fraction > 0.0 && self.max_distinct_fraction <= 1.0) {
            return Err(ResolutionParamsError::MaxDistinctFraction(self.max_distinct_fraction));
        }
        Ok(())
    }
    /// Change factor.
    pub fn factor(&self) -> f64 {
        self.factor
    }
}

param_guard!(ResolutionParams, ResolutionValidParams, ResolutionParamsError);

/// Result of [`resolution_change`].
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct ResolutionChangeResult {
    /// Baseline resolution, if it could be estimated.
    pub baseline: Option<Resolution>,
    /// Window resolution, if it could be estimated.
    pub window: Option<Resolution>,
    /// `window.step / baseline.step`; `NaN` when not applicable.
    pub statistic: f64,
    /// The factor compared against (`statistic ≥ factor` or `≤ 1/factor`).
    pub threshold: f64,
    /// Whether the test applies: baseline quantised, window has enough distinct values.
    pub applicable: bool,
    /// The step changed.
    pub flagged: bool,
}

/// Quantisation change: has the step between a sensor's readings changed
/// (lost A/D bits, a new transmitter, a changed scaling)?
///
/// ```text
/// R = step(window) / step(baseline),   flag when R ≥ f or R ≤ 1/f
/// ```
///
/// Applies only when the baseline is visibly quantised (distinct share ≤
/// `max_distinct_fraction`) and the window has at least `min_distinct`
/// distinct values; on continuous-valued data the step estimate depends on
/// the sample size, so the test is reported as not applicable and never flags.
/// A quantised baseline followed by a continuous window gives R ≪ 1 (flagged:
/// the signal path changed).
pub fn resolution_change(
    baseline: &[f64],
    window: &[f64],
    params: &ResolutionValidParams,
) -> ResolutionChangeResult {
    let b = estimate_resolution(baseline);
    let w = estimate_resolution(window);
    let applicable = matches!((b, w), (Some(b), Some(w))
        if b.distinct_fraction() <= params.max_distinct_fraction && w.distinct >= params.min_distinct);
    let statistic = match (b, w) {
        (Some(b), Some(w)) if applicable => w.step / b.step,
        _ => f64::NAN,
    };
    let flagged = applicable && (statistic >= params.factor || statistic <= 1.0 / params.factor);
    ResolutionChangeResult {
        baseline: b,
        window: w,
        statistic,
        threshold: params.factor,
        applicable,
        flagged,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use linfa::ParamGuard;

    fn grid(step: f64, ks: &[i32]) -> Vec<f64> {
        ks.iter().map(|&k| 20.0 + f64::from(k) * step).collect()
    }

    #[test]
    fn resolution_of_quantised_data_is_the_step() {
        let x = grid(0.1, &[0, 1, 1, 2, 3, 3, 3, 2, 1, 0, 5, 4, 4, 6]);
        let r = estimate_resolution(&x).unwrap();
        assert!((r.step - 0.1).abs() < 1e-9, "{r:?}");
        assert_eq!(r.distinct, 7);
    }

    #[test]
    fn resolution_ignores_floating_point_noise() {
        let x = [20.1, 20.1 + 1e-13, 20.2, 20.3, 20.3 - 2e-14];
        let r = estimate_resolution(&x).unwrap();
        assert_eq!(r.distinct, 3);
        assert!((r.step - 0.1).abs() < 1e-9);
    }

    #[test]
    fn resolution_needs_two_distinct_values() {
        assert_eq!(estimate_resolution(&[3.0, 3.0, f64::NAN]), None);
    }

    #[test]
    fn doubled_step_is_flagged_and_same_step_is_not() {
        let p = ResolutionChange::params().check().unwrap();
        let base: Vec<f64> = grid(0.1, &(0..200).map(|i| (i % 20) - 10).collect::<Vec<_>>());
        let same = grid(0.1, &[0, 1, 2, 3, 4, 3, 2, 1, 0, -1]);
        let coarse = grid(0.2, &[0, 1, 2, 3, 4, 3, 2, 1, 0, -1]);
        assert!(!resolution_change(&base, &same, &p).flagged);
        let r = resolution_change(&base, &coarse, &p);
        assert!(r.flagged && (r.statistic - 2.0).abs() < 1e-6, "{r:?}");
    }

    #[test]
    fn continuous_baseline_is_not_applicable() {
        let p = ResolutionChange::params().check().unwrap();
        let base: Vec<f64> = (0..100).map(|i| (f64::from(i) * 0.37).sin()).collect();
        let r = resolution_change(&base, &base[..20], &p);
        assert!(!r.applicable && !r.flagged && r.statistic.is_nan());
    }

    #[test]
    fn factor_must_exceed_one() {
        assert_eq!(
            ResolutionChange::params().factor(1.0).check(),
            Err(ResolutionParamsError::Factor(1.0))
        );
    }

    #[test]
    fn min_distinct_must_be_at_least_three() {
        assert_eq!(
            ResolutionChange::params().min_distinct(2).check(),
            Err(ResolutionParamsError::MinDistinct(2))
        );
    }

    #[test]
    fn max_distinct_fraction_must_be_in_unit_interval() {
        assert!(ResolutionChange::params().max_distinct_fraction(0.0).check().is_err());
        assert!(ResolutionChange::params().max_distinct_fraction(1.5).check().is_err());
    }
}
