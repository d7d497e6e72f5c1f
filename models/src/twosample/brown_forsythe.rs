//! Brown–Forsythe (median-centred Levene) test for a change in spread.

use linfa::ParamGuard;

use super::adjust::Adjustment;
use crate::autocorr::AutocorrError;
use crate::dist::f_sf;

/// Centre from which absolute deviations are taken.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub enum Center {
    /// group median: Brown & Forsythe (1974), robust to skewed and heavy-tailed data
    #[default]
    Median,
    /// group mean: Levene's (1960) original test
    Mean,
}

/// Errors from checking [`BrownForsytheParams`] (none at present; kept so
/// new parameters can be validated without an API break).
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum BrownForsytheParamsError {}

/// Errors from running the Brown–Forsythe test.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum BrownForsytheError {
    /// Invalid parameters.
    #[error(transparent)]
    Params(#[from] BrownForsytheParamsError),
    /// Fewer than two groups.
    #[error("need at least 2 groups to compare spread, got {0}")]
    TooFewGroups(usize),
    /// A group has fewer than two values.
    #[error("group {group} has {len} value(s); every group needs at least 2")]
    GroupTooSmall {
        /// index of the group
        group: usize,
        /// its length
        len: usize,
    },
    /// A value is NaN or infinite.
    #[error(
        "group {group} value at index {index} is not finite ({value}); drop missing values first"
    )]
    NonFinite {
        /// index of the group
        group: usize,
        /// position in the group
        index: usize,
        /// the offending value
        value: f64,
    },
    /// Every group is constant.
    #[error(
        "every group has zero spread, so the test statistic is undefined; check for stuck sensors"
    )]
    ZeroSpread,
    /// Autocorrelation leaves too little information.
    #[error(
        "after the serial-correlation adjustment the {total} values are worth only {effective:.1} independent ones, fewer than groups + 1; use longer windows"
    )]
    TooFewEffective {
        /// number of values
        total: usize,
        /// effective number
        effective: f64,
    },
    /// The serial-correlation estimate failed.
    #[error("estimating serial correlation for the adjustment failed")]
    Autocorr(#[from] AutocorrError),
}

/// Checked Brown–Forsythe parameters.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct BrownForsytheValidParams {
    center: Center,
    adjustment: Adjustment,
}

/// Unchecked Brown–Forsythe parameters; see [`BrownForsythe`] for the table.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct BrownForsytheParams(BrownForsytheValidParams);

impl Default for BrownForsytheParams {
    fn default() -> Self {
        Self(BrownForsytheValidParams { center: Center::Median, adjustment: Adjustment::default() })
    }
}

impl BrownForsytheParams {
    /// Centre of the deviations (default median).
    pub fn center(mut self, center: Center) -> Self {
        self.0.center = center;
        self
    }
    /// Serial-correlation adjustment (default effective sample size).
    pub fn adjustment(mut self, adjustment: Adjustment) -> Self {
        self.0.adjustment = adjustment;
        self
    }

    /// Checks the parameters and runs the test (shorthand for
    /// `self.check()?.test(groups)`).
    ///
    /// # Errors
    /// As [`BrownForsytheValidParams::test`].
    pub fn test(&self, groups: &[&[f64]]) -> Result<BrownForsythe, BrownForsytheError> {
        self.check_ref()?.test(groups)
    }
}

impl BrownForsytheValidParams {
    /// Centre of the deviations.
    pub fn center(&self) -> Center {
        self.center
    }
    /// Serial-correlation adjustment.
    pub fn adjustment(&self) -> Adjustment {
        self.adjustment
    }
}

impl ParamGuard for BrownForsytheParams {
    type Checked = BrownForsytheValidParams;
    type Error = BrownForsytheParamsError;

    fn check_ref(&self) -> Result<&Self::Checked, Self::Error> {
        Ok(&self.0)
    }

    fn check(self) -> Result<Self::Checked, Self::Error> {
        Ok(self.0)
    }
}

/// Result of the Brown–Forsythe test for equal spread across `k` groups.
///
/// ```text
/// Z_ij = |x_ij - median_i|                         (mean_i for Center::Mean)
/// W    = (N-k)/(k-1) · Σ_i n_i (Z̄_i - Z̄)² / Σ_i Σ_j (Z_ij - Z̄_i)²
/// p    = P(F_{k-1, N-k} > W)                                        without adjustment
/// with serial-correlation factor f (AR(1) of the Z_ij, pooled within groups):
///      W_f = W · (N - k·f) / ((N - k)·f),   p = P(F_{k-1, N/f - k} > W_f)
/// ```
///
/// The adjustment follows from `E[Σ n_i (Z̄_i - Z̄)²] ≈ f·(k-1)σ²` and
/// `E[Σ (Z_ij - Z̄_i)²] ≈ (N - k·f)σ²` for AR-type dependence within groups;
/// with `f = 1` it is the classical test. `W` and the p-value are unitless;
/// the groups may be in any (common) unit and should each be in time order.
///
/// | Parameter    | Default                             | Units | Range    | Purpose                            |
/// |--------------|-------------------------------------|-------|----------|------------------------------------|
/// | `center`     | `Median`                            | –     | see enum | Brown–Forsythe or Levene           |
/// | `adjustment` | `EffectiveSampleSize{BiasCorrected}`| –     | see enum | serial correlation within groups   |
///
/// # Errors
/// [`BrownForsytheError::TooFewGroups`], [`BrownForsytheError::GroupTooSmall`],
/// [`BrownForsytheError::NonFinite`], [`BrownForsytheError::ZeroSpread`],
/// [`BrownForsytheError::TooFewEffective`], [`BrownForsytheError::Autocorr`]
/// (a group shorter than 4 with the default adjustment).
///
/// # References
/// * M. B. Brown and A. B. Forsythe (1974), "Robust tests for the equality of
///   variances", *Journal of the American Statistical Association* 69(346), 364-367.
/// * H. Levene (1960), "Robust tests for equality of variances", in I. Olkin
///   (ed.), *Contributions to Probability and Statistics*, Stanford University
///   Press, 278-292.
/// * NIST/SEMATECH e-Handbook of Statistical Methods, §1.3.5.10 "Levene Test
///   for Equality of Variances" (GEAR.DAT example).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct BrownForsythe {
    /// statistic `W` (unadjusted)
    pub w: f64,
    /// numerator degrees of freedom `k - 1`
    pub df1: f64,
    /// denominator degrees of freedom (`N - k`, or `N/f - k` when adjusted)
    pub df2: f64,
    /// p-value (upper tail)
    pub p_value: f64,
    /// serial-correlation variance factor applied (1 = none)
    pub variance_factor: f64,
}

impl BrownForsythe {
    /// Default parameters.
    pub fn params() -> BrownForsytheParams {
        BrownForsytheParams::default()
    }
}

fn center_of(v: &[f64], c: Center) -> f64 {
    match c {
        Center::Mean => v.iter().sum::<f64>() / v.len() as f64,
        // `test` checks every group is finite with at least 2 values, so the median exists.
        Center::Median => crate::robust::median(v).unwrap_or(f64::NAN),
    }
}

impl BrownForsytheValidParams {
    /// Runs the test on `k >= 2` groups.
    ///
    /// # Errors
    /// See [`BrownForsythe`].
    pub fn test(&self, groups: &[&[f64]]) -> Result<BrownForsythe, BrownForsytheError> {
        let k = groups.len();
        if k < 2 {
            return Err(BrownForsytheError::TooFewGroups(k));
        }
        for (g, v) in groups.iter().enumerate() {
            if v.len() < 2 {
                return Err(BrownForsytheError::GroupTooSmall { group: g, len: v.len() });
            }
            if let Some(index) = v.iter().position(|x| !x.is_finite()) {
                return Err(BrownForsytheError::NonFinite { group: g, index, value: v[index] });
            }
        }
        let z: Vec<Vec<f64>> = groups
            .iter()
            .map(|v| {
                let c = center_of(v, self.center);
                v.iter().map(|x| (x - c).abs()).collect()
            })
            .collect();
        let n_total: usize = z.iter().map(Vec::len).sum();
        let nf = n_total as f64;
        let kf = k as f64;
        let means: Vec<f64> = z.iter().map(|v| v.iter().sum::<f64>() / v.len() as f64).collect();
        let grand = z.iter().flatten().sum::<f64>() / nf;
        let ssb: f64 =
            z.iter().zip(&means).map(|(v, m)| v.len() as f64 * (m - grand).powi(2)).sum();
        let ssw: f64 =
            z.iter().zip(&means).map(|(v, m)| v.iter().map(|x| (x - m).powi(2)).sum::<f64>()).sum();
        if ssw <= 0.0 {
            return Err(BrownForsytheError::ZeroSpread);
        }
        let w = (nf - kf) / (kf - 1.0) * ssb / ssw;
        let zs: Vec<&[f64]> = z.iter().map(Vec::as_slice).collect();
        let f = self.adjustment.factor(&zs)?;
        let (w_adj, df2) = if f == 1.0 {
            (w, nf - kf)
        } else {
            let effective = nf / f;
            if effective - kf < 1.0 {
                return Err(BrownForsytheError::TooFewEffective { total: n_total, effective });
            }
            (w * (nf - kf * f) / ((nf - kf) * f), effective - kf)
        };
        Ok(BrownForsythe {
            w,
            df1: kf - 1.0,
            df2,
            p_value: f_sf(w_adj.max(0.0), kf - 1.0, df2),
            variance_factor: f,
        })
    }
}

/// Brown–Forsythe test with default parameters.
///
/// # Errors
/// See [`BrownForsythe`].
pub fn brown_forsythe(groups: &[&[f64]]) -> Result<BrownForsythe, BrownForsytheError> {
    BrownForsytheParams::default().check()?.test(groups)
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// NIST GEAR.DAT (10 batches × 10 gear diameters), as embedded in scipy's
    /// test suite; EXTERNAL-CHECKS §12.
    pub(crate) const GEAR: [[f64; 10]; 10] = [
        [1.006, 0.996, 0.998, 1.000, 0.992, 0.993, 1.002, 0.999, 0.994, 1.000],
        [0.998, 1.006, 1.000, 1.002, 0.997, 0.998, 0.996, 1.000, 1.006, 0.988],
        [0.991, 0.987, 0.997, 0.999, 0.995, 0.994, 1.000, 0.999, 0.996, 0.996],
        [1.005, 1.002, 0.994, 1.000, 0.995, 0.994, 0.998, 0.996, 1.002, 0.996],
        [0.998, 0.998, 0.982, 0.990, 1.002, 0.984, 0.996, 0.993, 0.980, 0.996],
        [1.009, 1.013, 1.009, 0.997, 0.988, 1.002, 0.995, 0.998, 0.981, 0.996],
        [0.990, 1.004, 0.996, 1.001, 0.998, 1.000, 1.018, 1.010, 0.996, 1.002],
        [0.998, 1.000, 1.006, 1.000, 1.002, 0.996, 0.998, 0.996, 1.002, 1.006],
        [1.002, 0.998, 0.996, 0.995, 0.996, 1.004, 1.004, 0.998, 0.999, 0.991],
        [0.991, 0.995, 0.984, 0.994, 0.997, 0.997, 0.991, 0.998, 1.004, 0.997],
    ];

    fn plain(center: Center) -> BrownForsytheValidParams {
        BrownForsythe::params().center(center).adjustment(Adjustment::None).check().unwrap()
    }

    #[test]
    fn nist_gear_data_matches_scipy_levene() {
        // scipy 1.17.1 levene(*g, center="median"/"mean"); R anova(lm(...)) agrees (V-2lib)
        let g: Vec<&[f64]> = GEAR.iter().map(|r| r.as_slice()).collect();
        let r = plain(Center::Median).test(&g).unwrap();
        assert_relative_eq!(r.w, 1.705917693000894, max_relative = 1e-10);
        assert_relative_eq!(r.p_value, 0.09908297555220481, max_relative = 1e-8);
        assert_eq!((r.df1, r.df2), (9.0, 90.0));
        let r = plain(Center::Mean).test(&g).unwrap();
        assert_relative_eq!(r.w, 2.1594598564728518, max_relative = 1e-10);
        assert_relative_eq!(r.p_value, 0.03223682655978304, max_relative = 1e-8);
    }

    #[test]
    fn two_group_sensor_example() {
        // EXTERNAL-CHECKS §12 hand-made two-group example (scipy and R agree)
        let before = [0.98, 1.01, 1.00, 0.99, 1.02, 1.00, 0.97, 1.03];
        let after = [0.90, 1.10, 1.05, 0.93, 1.12, 0.88, 1.00, 1.08];
        let r = plain(Center::Median).test(&[&before, &after]).unwrap();
        assert_relative_eq!(r.w, 16.4305555555556, max_relative = 1e-10);
        assert_relative_eq!(r.p_value, 0.0011851959939686934, max_relative = 1e-8);
        let r = plain(Center::Mean).test(&[&before, &after]).unwrap();
        assert_relative_eq!(r.w, 19.799163179916317, max_relative = 1e-10);
        assert_relative_eq!(r.p_value, 0.000549793538412258, max_relative = 1e-8);
    }

    #[test]
    fn errors_name_the_group() {
        let p = plain(Center::Median);
        assert!(matches!(p.test(&[&[1.0, 2.0]]), Err(BrownForsytheError::TooFewGroups(1))));
        assert!(matches!(
            p.test(&[&[1.0, 2.0], &[1.0]]),
            Err(BrownForsytheError::GroupTooSmall { group: 1, len: 1 })
        ));
        assert!(matches!(
            p.test(&[&[1.0, 2.0], &[1.0, f64::NAN]]),
            Err(BrownForsytheError::NonFinite { group: 1, index: 1, .. })
        ));
        assert!(matches!(p.test(&[&[1.0, 1.0], &[2.0, 2.0]]), Err(BrownForsytheError::ZeroSpread)));
    }
}
