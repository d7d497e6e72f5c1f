//! Mann–Whitney U (Wilcoxon rank-sum) test for a shift between two samples.

use linfa::ParamGuard;

use super::adjust::Adjustment;
use crate::autocorr::{AutocorrError, average_ranks};
use crate::dist::norm_sf;

/// How the p-value is computed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub enum UMethod {
    /// exact if there are no ties, both samples have at most 20 values and
    /// the serial-correlation factor is 1; asymptotic otherwise
    #[default]
    Auto,
    /// exact permutation distribution (no ties, no adjustment)
    Exact,
    /// normal approximation with tie-corrected variance
    Asymptotic,
}

/// Errors from checking [`MannWhitneyParams`].
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum MannWhitneyParamsError {
    /// Exact method requested together with a serial-correlation adjustment.
    #[error(
        "the exact U distribution assumes independent observations; set adjustment to None or use the asymptotic method"
    )]
    ExactWithAdjustment,
}

/// Errors from running the Mann–Whitney test.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum MannWhitneyError {
    /// Invalid parameters.
    #[error(transparent)]
    Params(#[from] MannWhitneyParamsError),
    /// A sample is empty.
    #[error("sample {sample} is empty; both samples need at least one value")]
    Empty {
        /// `"x"` or `"y"`
        sample: &'static str,
    },
    /// A value is NaN or infinite.
    #[error(
        "sample {sample} value at index {index} is not finite ({value}); drop missing values first"
    )]
    NonFinite {
        /// `"x"` or `"y"`
        sample: &'static str,
        /// position in that sample
        index: usize,
        /// the offending value
        value: f64,
    },
    /// Exact method requested for tied data.
    #[error(
        "the exact U distribution assumes no ties, but the data have {0} tied values; use the asymptotic method"
    )]
    ExactWithTies(usize),
    /// All values are identical.
    #[error("all values in both samples are identical, so U carries no information")]
    AllTied,
    /// The serial-correlation estimate failed.
    #[error("estimating serial correlation for the adjustment failed")]
    Autocorr(#[from] AutocorrError),
}

/// Checked Mann–Whitney parameters.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct MannWhitneyValidParams {
    method: UMethod,
    continuity: bool,
    adjustment: Adjustment,
}

/// Unchecked Mann–Whitney parameters; see [`MannWhitney`] for the table.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct MannWhitneyParams(MannWhitneyValidParams);

impl Default for MannWhitneyParams {
    fn default() -> Self {
        Self(MannWhitneyValidParams {
            method: UMethod::Auto,
            continuity: true,
            adjustment: Adjustment::default(),
        })
    }
}

impl MannWhitneyParams {
    /// p-value method (default [`UMethod::Auto`]).
    pub fn method(mut self, method: UMethod) -> Self {
        self.0.method = method;
        self
    }
    /// Continuity correction of the normal approximation (default true).
    pub fn continuity(mut self, on: bool) -> Self {
        self.0.continuity = on;
        self
    }
    /// Serial-correlation adjustment (default effective sample size).
    pub fn adjustment(mut self, adjustment: Adjustment) -> Self {
        self.0.adjustment = adjustment;
        self
    }

    /// Checks the parameters and runs the test (shorthand for
    /// `self.check()?.test(x, y)`).
    ///
    /// # Errors
    /// [`MannWhitneyError::Params`] for invalid parameters, otherwise as
    /// [`MannWhitneyValidParams::test`].
    pub fn test(&self, x: &[f64], y: &[f64]) -> Result<MannWhitney, MannWhitneyError> {
        self.check_ref()?.test(x, y)
    }
}

impl MannWhitneyValidParams {
    /// p-value method.
    pub fn method(&self) -> UMethod {
        self.method
    }
    /// Whether the continuity correction is applied.
    pub fn continuity(&self) -> bool {
        self.continuity
    }
    /// Serial-correlation adjustment.
    pub fn adjustment(&self) -> Adjustment {
        self.adjustment
    }
}

impl ParamGuard for MannWhitneyParams {
    type Checked = MannWhitneyValidParams;
    type Error = MannWhitneyParamsError;

    fn check_ref(&self) -> Result<&Self::Checked, Self::Error> {
        if self.0.method == UMethod::Exact && self.0.adjustment != Adjustment::None {
            return Err(MannWhitneyParamsError::ExactWithAdjustment);
        }
        Ok(&self.0)
    }

    fn check(self) -> Result<Self::Checked, Self::Error> {
        self.check_ref()?;
        Ok(self.0)
    }
}

/// Result of a two-sided Mann–Whitney U test.
///
/// ```text
/// U_x = R_x - n(n+1)/2                    R_x = sum of the (average) ranks of x in the pooled sample
/// U_y = n·m - U_x
/// exact:       p = 2 · P(U >= max(U_x, U_y)),  P from p_{i,j}(u) = i/(i+j)·p_{i-1,j}(u-j) + j/(i+j)·p_{i,j-1}(u)
/// asymptotic:  z = (max(U_x, U_y) - n·m/2 - c) / √(f · n·m/12 · [(N+1) - Σ(t³-t)/(N(N-1))]),  p = 2·(1-Φ(z))
///              c = 0.5 with continuity correction, f = serial-correlation factor (1 without adjustment)
/// ```
///
/// `U_x` counts pairs with `x_i > y_j` (ties count 1/2); it is what
/// `scipy.stats.mannwhitneyu(x, y)` reports and what R calls `W`.
///
/// | Parameter    | Default                             | Units | Range     | Purpose                                  |
/// |--------------|-------------------------------------|-------|-----------|------------------------------------------|
/// | `method`     | `Auto`                              | –     | see enum  | exact or normal p-value                  |
/// | `continuity` | true                                | –     | bool      | half-unit continuity correction          |
/// | `adjustment` | `EffectiveSampleSize{BiasCorrected}`| –     | see enum  | serial correlation within samples        |
///
/// Samples can be in any unit (the test is rank based); pass each in time
/// order so the adjustment can estimate `φ`. Permuting values *within* a
/// sample does not change `U` (it does change the estimated `φ`, by design).
///
/// # Errors
/// [`MannWhitneyError::Empty`], [`MannWhitneyError::NonFinite`],
/// [`MannWhitneyError::ExactWithTies`], [`MannWhitneyError::AllTied`],
/// [`MannWhitneyError::Autocorr`] (a sample shorter than 4 with the default
/// adjustment).
///
/// # References
/// * H. B. Mann and D. R. Whitney (1947), "On a test of whether one of two
///   random variables is stochastically larger than the other", *Annals of
///   Mathematical Statistics* 18(1), 50-60.
/// * E. L. Lehmann (1975), *Nonparametrics: Statistical Methods Based on
///   Ranks*, Holden-Day (tie-corrected variance).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct MannWhitney {
    /// `U` of the first sample
    pub u_x: f64,
    /// `U` of the second sample (`n·m - u_x`)
    pub u_y: f64,
    /// standardized statistic (asymptotic method only)
    pub z: Option<f64>,
    /// two-sided p-value
    pub p_two_sided: f64,
    /// true if the exact distribution was used
    pub exact: bool,
    /// serial-correlation variance factor applied (1 = none)
    pub variance_factor: f64,
}

impl MannWhitney {
    /// Default parameters.
    pub fn params() -> MannWhitneyParams {
        MannWhitneyParams::default()
    }
}

pub(crate) fn check_sample(
    name: &'static str,
    v: &[f64],
) -> Result<(), (&'static str, usize, f64)> {
    match v.iter().position(|x| !x.is_finite()) {
        Some(i) => Err((name, i, v[i])),
        None => Ok(()),
    }
}

impl MannWhitneyValidParams {
    /// Runs the test on samples `x` and `y`.
    ///
    /// # Errors
    /// See [`MannWhitney`].
    pub fn test(&self, x: &[f64], y: &[f64]) -> Result<MannWhitney, MannWhitneyError> {
        for (name, v) in [("x", x), ("y", y)] {
            if v.is_empty() {
                return Err(MannWhitneyError::Empty { sample: name });
            }
            check_sample(name, v).map_err(|(sample, index, value)| {
                MannWhitneyError::NonFinite { sample, index, value }
            })?;
        }
        let (n, m) = (x.len(), y.len());
        let pooled: Vec<f64> = x.iter().chain(y).copied().collect();
        let ranks = average_ranks(&pooled);
        let rx: f64 = ranks[..n].iter().sum();
        let nf = n as f64;
        let mf = m as f64;
        let u_x = rx - nf * (nf + 1.0) / 2.0;
        let u_y = nf * mf - u_x;
        // tie term Σ(t³ - t)
        let mut sorted = pooled.clone();
        sorted.sort_by(f64::total_cmp);
        let groups = crate::trend::kendall::tie_groups_sorted(&sorted);
        let tied_values: u64 = groups.iter().sum();
        let tie_term: f64 = groups.iter().map(|&t| (t as f64).powi(3) - t as f64).sum();
        let total = nf + mf;
        if groups.len() == 1 && tied_values as usize == pooled.len() {
            return Err(MannWhitneyError::AllTied);
        }
        let factor = self.adjustment.factor(&[x, y])?;
        let small = n <= 20 && m <= 20;
        let exact = match self.method {
            UMethod::Exact => {
                if !groups.is_empty() {
                    return Err(MannWhitneyError::ExactWithTies(tied_values as usize));
                }
                true
            }
            UMethod::Asymptotic => false,
            UMethod::Auto => groups.is_empty() && small && factor == 1.0,
        };
        let u = u_x.max(u_y);
        if exact {
            let pmf = u_pmf(n, m);
            let k = u.round() as usize;
            let sf: f64 = pmf[k.min(pmf.len())..].iter().sum();
            return Ok(MannWhitney {
                u_x,
                u_y,
                z: None,
                p_two_sided: (2.0 * sf).min(1.0),
                exact: true,
                variance_factor: 1.0,
            });
        }
        let var = factor * nf * mf / 12.0 * ((total + 1.0) - tie_term / (total * (total - 1.0)));
        let c = if self.continuity { 0.5 } else { 0.0 };
        let z = (u - nf * mf / 2.0 - c) / var.sqrt();
        Ok(MannWhitney {
            u_x,
            u_y,
            z: Some(z),
            p_two_sided: (2.0 * norm_sf(z)).clamp(0.0, 1.0),
            exact: false,
            variance_factor: factor,
        })
    }
}

/// Null distribution of `U_x` for sample sizes `(n, m)`, no ties:
/// probabilities for `u = 0..=n·m`.
fn u_pmf(n: usize, m: usize) -> Vec<f64> {
    // row[j] = p_{i,j}; start with i = 0: p_{0,j}(0) = 1
    let mut prev: Vec<Vec<f64>> = (0..=m).map(|_| vec![1.0]).collect();
    for i in 1..=n {
        let mut cur: Vec<Vec<f64>> = Vec::with_capacity(m + 1);
        cur.push(vec![1.0]); // p_{i,0}(0) = 1
        for j in 1..=m {
            let len = i * j + 1;
            let mut p = vec![0.0; len];
            let wi = i as f64 / (i + j) as f64;
            let wj = j as f64 / (i + j) as f64;
            for (u, v) in prev[j].iter().enumerate() {
                p[u + j] += wi * v;
            }
            for (u, v) in cur[j - 1].iter().enumerate() {
                p[u] += wj * v;
            }
            cur.push(p);
        }
        prev = cur;
    }
    prev.swap_remove(m)
}

/// Mann–Whitney U test with default parameters.
///
/// # Errors
/// See [`MannWhitney`].
pub fn mann_whitney(x: &[f64], y: &[f64]) -> Result<MannWhitney, MannWhitneyError> {
    MannWhitneyParams::default().check()?.test(x, y)
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    fn plain(method: UMethod, continuity: bool) -> MannWhitneyValidParams {
        MannWhitney::params()
            .method(method)
            .continuity(continuity)
            .adjustment(Adjustment::None)
            .check()
            .unwrap()
    }

    #[test]
    fn scipy_docstring_example() {
        // scipy 1.17.1 mannwhitneyu docstring example; EXTERNAL-CHECKS §10 check A (V-2lib with R)
        let males = [19.0, 22.0, 16.0, 29.0, 24.0];
        let females = [20.0, 11.0, 17.0, 12.0];
        let r = plain(UMethod::Auto, true).test(&males, &females).unwrap();
        assert!(r.exact);
        assert_eq!(r.u_x, 17.0);
        assert_eq!(r.u_y, 3.0);
        assert_relative_eq!(r.p_two_sided, 0.1111111111111111, max_relative = 1e-12);
        let a = plain(UMethod::Asymptotic, true).test(&males, &females).unwrap();
        assert_relative_eq!(a.p_two_sided, 0.11134688653314041, max_relative = 1e-8);
        let a = plain(UMethod::Asymptotic, false).test(&males, &females).unwrap();
        assert_relative_eq!(a.p_two_sided, 0.0864107329737, max_relative = 1e-8);
    }

    #[test]
    fn tied_example_uses_tie_corrected_variance() {
        // EXTERNAL-CHECKS §10 check B; scipy and R wilcox.test(exact=FALSE) agree
        let a = [1.2, 1.4, 1.4, 1.5, 1.7, 1.8, 1.8, 2.0];
        let b = [1.6, 1.8, 1.9, 2.1, 2.1, 2.3, 2.4];
        let r = plain(UMethod::Auto, true).test(&a, &b).unwrap();
        assert!(!r.exact);
        assert_eq!(r.u_x, 7.0);
        assert_relative_eq!(r.p_two_sided, 0.017068612702191517, max_relative = 1e-8);
        let r = plain(UMethod::Auto, false).test(&a, &b).unwrap();
        assert_relative_eq!(r.p_two_sided, 0.014549493518580441, max_relative = 1e-8);
        assert!(matches!(
            plain(UMethod::Exact, true).test(&a, &b),
            Err(MannWhitneyError::ExactWithTies(_))
        ));
    }

    #[test]
    fn exact_pmf_sums_to_one_and_matches_enumeration() {
        // C(9,4) = 126 splits; 7 have U >= 17 (catalogue enumeration)
        let p = u_pmf(5, 4);
        assert_relative_eq!(p.iter().sum::<f64>(), 1.0, max_relative = 1e-14);
        assert_relative_eq!(p[17..].iter().sum::<f64>(), 7.0 / 126.0, max_relative = 1e-14);
    }

    #[test]
    fn exact_with_adjustment_is_rejected() {
        assert_eq!(
            MannWhitney::params().method(UMethod::Exact).check(),
            Err(MannWhitneyParamsError::ExactWithAdjustment)
        );
    }

    #[test]
    fn errors_name_the_sample() {
        let p = plain(UMethod::Auto, true);
        assert!(matches!(p.test(&[], &[1.0]), Err(MannWhitneyError::Empty { sample: "x" })));
        assert!(matches!(
            p.test(&[1.0], &[2.0, f64::NAN]),
            Err(MannWhitneyError::NonFinite { sample: "y", index: 1, .. })
        ));
        assert!(matches!(p.test(&[1.0, 1.0], &[1.0]), Err(MannWhitneyError::AllTied)));
    }
}
