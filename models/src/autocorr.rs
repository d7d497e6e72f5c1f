//! Serial correlation: sample autocorrelation, AR(1) coefficient estimates,
//! effective sample size and AR(1) prewhitening.
//!
//! Sensor series sampled every few seconds or minutes are strongly
//! autocorrelated, and every classical test in [`crate::trend`] and
//! [`crate::twosample`] assumes independent observations. Treated naively, an
//! AR(1) series with `φ = 0.9` carries roughly `n(1-φ)/(1+φ) ≈ n/19`
//! independent observations' worth of information, so a test that uses `n`
//! over-states its evidence and fires far too often. The helpers here are the
//! building blocks those tests use to adjust.
//!
//! ```
//! use telltale_models::autocorr::{effective_sample_size, long_run_variance_factor};
//! assert!((long_run_variance_factor(0.9) - 19.0).abs() < 1e-12);
//! assert!((effective_sample_size(190, 0.9) - 10.0).abs() < 1e-9);
//! ```

/// Largest AR(1) coefficient the variance-adjustment helpers accept; larger
/// estimates are clamped here so the variance factor stays finite
/// (`(1+0.99)/(1-0.99) = 199`). Common practice, no source.
pub const MAX_PHI: f64 = 0.99;

/// Errors from the autocorrelation helpers.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum AutocorrError {
    /// Too few observations for the requested estimate.
    #[error(
        "need at least {need} observations to estimate autocorrelation, got {got}; use a longer window"
    )]
    TooShort {
        /// minimum length
        need: usize,
        /// length supplied
        got: usize,
    },
    /// The series has zero variance, so its autocorrelation is undefined.
    #[error(
        "series is constant (zero variance), autocorrelation is undefined; check the sensor for a stuck value"
    )]
    Constant,
    /// A value is NaN or infinite.
    #[error(
        "value at index {index} is not finite ({value}); drop or interpolate missing values first"
    )]
    NonFinite {
        /// position in the input slice
        index: usize,
        /// the offending value
        value: f64,
    },
}

/// How to estimate the lag-1 coefficient `φ` of an AR(1) model.
///
/// | Variant         | Formula                                  | Use                                      |
/// |-----------------|------------------------------------------|------------------------------------------|
/// | `Lag1`          | `r_1` (biased sample autocorrelation)    | matches statsmodels / pymannkendall      |
/// | `BiasCorrected` | `(n·r_1 + 1)/(n - 3)` (default)          | removes the `-(1+3φ)/n` bias of `r_1`    |
/// | `Rank`          | `2·sin(π·r_s/6)`, `r_s` = lag-1 `r` of ranks | robust to spikes and heavy tails     |
///
/// # References
/// * M. G. Kendall (1954), "Note on bias in the estimation of autocorrelation",
///   *Biometrika* 41(3/4), 403-404 (bias `E[r_1] ≈ φ - (1+3φ)/n`).
/// * W. H. Kruskal (1958), "Ordinal measures of association", *Journal of the
///   American Statistical Association* 53(284), 814-861 (`ρ = 2 sin(π ρ_s/6)`
///   for the bivariate normal).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub enum Ar1Estimator {
    /// Plain lag-1 sample autocorrelation.
    Lag1,
    /// Kendall's (1954) bias-corrected lag-1 autocorrelation.
    #[default]
    BiasCorrected,
    /// Lag-1 Spearman serial correlation mapped to the Pearson scale.
    Rank,
}

fn check_finite(x: &[f64]) -> Result<(), AutocorrError> {
    match x.iter().position(|v| !v.is_finite()) {
        Some(index) => Err(AutocorrError::NonFinite { index, value: x[index] }),
        None => Ok(()),
    }
}

/// Sample autocorrelation function at lags `0..=max_lag`, the biased
/// (denominator `n`) estimator that `statsmodels.tsa.stattools.acf` returns by
/// default (`adjusted=False`).
///
/// ```text
/// r_k = Σ_{t=0}^{n-1-k} (x_t - x̄)(x_{t+k} - x̄) / Σ_{t=0}^{n-1} (x_t - x̄)²
/// ```
///
/// Lags `>= n` are returned as 0. Unitless. O(n·max_lag).
///
/// # Errors
/// [`AutocorrError::TooShort`] for fewer than 2 values,
/// [`AutocorrError::Constant`] for zero variance,
/// [`AutocorrError::NonFinite`] for NaN or infinite values.
///
/// # References
/// G. E. P. Box and G. M. Jenkins (1976), *Time Series Analysis: Forecasting
/// and Control*, revised ed., Holden-Day.
pub fn acf(x: &[f64], max_lag: usize) -> Result<Vec<f64>, AutocorrError> {
    if x.len() < 2 {
        return Err(AutocorrError::TooShort { need: 2, got: x.len() });
    }
    check_finite(x)?;
    let n = x.len();
    let mean = x.iter().sum::<f64>() / n as f64;
    let d: Vec<f64> = x.iter().map(|v| v - mean).collect();
    let c0: f64 = d.iter().map(|v| v * v).sum();
    if c0 <= 0.0 {
        return Err(AutocorrError::Constant);
    }
    Ok((0..=max_lag)
        .map(|k| {
            if k >= n {
                0.0
            } else {
                d[..n - k].iter().zip(&d[k..]).map(|(a, b)| a * b).sum::<f64>() / c0
            }
        })
        .collect())
}

/// Lag-`k` sample autocorrelation `r_k` (see [`acf`] for the formula).
///
/// # Errors
/// As [`acf`].
pub fn autocorrelation(x: &[f64], lag: usize) -> Result<f64, AutocorrError> {
    let n = x.len();
    if n < 2 {
        return Err(AutocorrError::TooShort { need: 2, got: n });
    }
    check_finite(x)?;
    let mean = x.iter().sum::<f64>() / n as f64;
    let c0: f64 = x.iter().map(|v| (v - mean) * (v - mean)).sum();
    if c0 <= 0.0 {
        return Err(AutocorrError::Constant);
    }
    if lag >= n {
        return Ok(0.0);
    }
    let ck: f64 = x[..n - lag].iter().zip(&x[lag..]).map(|(a, b)| (a - mean) * (b - mean)).sum();
    Ok(ck / c0)
}

/// Average ranks (1-based; ties get the mean of their positions), as
/// `scipy.stats.rankdata(method="average")`.
pub(crate) fn average_ranks(x: &[f64]) -> Vec<f64> {
    let n = x.len();
    let mut idx: Vec<usize> = (0..n).collect();
    idx.sort_by(|&a, &b| x[a].total_cmp(&x[b]));
    let mut ranks = vec![0.0; n];
    let mut i = 0;
    while i < n {
        let mut j = i + 1;
        while j < n && x[idx[j]] == x[idx[i]] {
            j += 1;
        }
        // positions i..j (0-based) share the rank mean((i+1)..=j)
        let r = (i + 1 + j) as f64 / 2.0;
        for &k in &idx[i..j] {
            ranks[k] = r;
        }
        i = j;
    }
    ranks
}

/// AR(1) coefficient `φ` of one series, by the chosen [`Ar1Estimator`].
/// The result is not clamped; it lies in about `[-1, 1]` (`BiasCorrected`
/// can exceed 1 slightly for near-unit-root series).
///
/// # Errors
/// [`AutocorrError::TooShort`] for fewer than 4 values (the bias correction
/// divides by `n - 3`), [`AutocorrError::Constant`], [`AutocorrError::NonFinite`].
///
/// # References
/// See [`Ar1Estimator`].
pub fn ar1_coefficient(x: &[f64], estimator: Ar1Estimator) -> Result<f64, AutocorrError> {
    ar1_coefficient_pooled(&[x], estimator)
}

/// AR(1) coefficient pooled over several segments of the same process, each
/// centred on its own mean (so a shift *between* segments, which is what a
/// two-sample test looks for, does not masquerade as autocorrelation).
///
/// ```text
/// r_1 = Σ_g Σ_t (x_gt - x̄_g)(x_g,t+1 - x̄_g) / Σ_g Σ_t (x_gt - x̄_g)²
/// BiasCorrected: (n̄·r_1 + 1)/(n̄ - 3),   n̄ = N / G (mean segment length)
/// ```
///
/// With `Rank`, each observation is replaced by its rank within its segment.
///
/// # Errors
/// [`AutocorrError::TooShort`] if any segment has fewer than 4 values,
/// [`AutocorrError::Constant`] if every segment is constant,
/// [`AutocorrError::NonFinite`] for NaN or infinite values.
pub fn ar1_coefficient_pooled(
    segments: &[&[f64]],
    estimator: Ar1Estimator,
) -> Result<f64, AutocorrError> {
    let mut num = 0.0;
    let mut den = 0.0;
    let mut total = 0usize;
    for seg in segments {
        if seg.len() < 4 {
            return Err(AutocorrError::TooShort { need: 4, got: seg.len() });
        }
        check_finite(seg)?;
        let owned;
        let s: &[f64] = if estimator == Ar1Estimator::Rank {
            owned = average_ranks(seg);
            &owned
        } else {
            seg
        };
        let mean = s.iter().sum::<f64>() / s.len() as f64;
        den += s.iter().map(|v| (v - mean) * (v - mean)).sum::<f64>();
        num += s.windows(2).map(|w| (w[0] - mean) * (w[1] - mean)).sum::<f64>();
        total += s.len();
    }
    if den <= 0.0 {
        return Err(AutocorrError::Constant);
    }
    let r1 = num / den;
    let nbar = total as f64 / segments.len().max(1) as f64;
    Ok(match estimator {
        Ar1Estimator::Lag1 => r1,
        Ar1Estimator::BiasCorrected => (nbar * r1 + 1.0) / (nbar - 3.0),
        Ar1Estimator::Rank => 2.0 * (std::f64::consts::PI * r1 / 6.0).sin(),
    })
}

/// Long-run variance factor of an AR(1) process: how much the variance of a
/// sample mean (or of any smooth sum statistic) is inflated relative to
/// independent data.
///
/// ```text
/// f(φ) = (1 + φ) / (1 - φ),    φ clamped to [0, MAX_PHI]
/// ```
///
/// Negative `φ` is clamped to 0 (factor 1): crediting anti-correlation with
/// *more* information than `n` would make every test anti-conservative when
/// `φ` is merely estimated near zero (common practice, no source).
///
/// # References
/// C. Chatfield (2004), *The Analysis of Time Series: An Introduction*, 6th
/// ed., Chapman & Hall/CRC (variance of the mean of an AR(1) process).
pub fn long_run_variance_factor(phi: f64) -> f64 {
    if phi.is_nan() {
        return f64::NAN;
    }
    let p = phi.clamp(0.0, MAX_PHI);
    (1.0 + p) / (1.0 - p)
}

/// Effective sample size of `n` observations from an AR(1) process.
///
/// ```text
/// n_eff = n (1 - φ) / (1 + φ) = n / f(φ),   φ clamped as in long_run_variance_factor
/// ```
///
/// # References
/// H. von Storch and F. W. Zwiers (1999), *Statistical Analysis in Climate
/// Research*, Cambridge University Press (equivalent sample size).
pub fn effective_sample_size(n: usize, phi: f64) -> f64 {
    n as f64 / long_run_variance_factor(phi)
}

/// AR(1) prewhitening: removes the lag-1 dependence so the residual series is
/// approximately independent.
///
/// ```text
/// w_t = x_t - φ · x_{t-1},    t = 1..n-1      (output has n - 1 values)
/// ```
///
/// An empty or one-element input gives an empty output.
///
/// # References
/// H. von Storch (1995), "Misuses of statistical analysis in climate
/// research", in H. von Storch and A. Navarra (eds.), *Analysis of Climate
/// Variability: Applications of Statistical Techniques*, Springer, 11-26.
pub fn prewhiten_ar1(x: &[f64], phi: f64) -> Vec<f64> {
    x.windows(2).map(|w| w[1] - phi * w[0]).collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;
    use rand::SeedableRng;
    use rand_distr::{Distribution, StandardNormal};
    use rand_xoshiro::Xoshiro256Plus;

    fn ar1(n: usize, phi: f64, seed: u64) -> Vec<f64> {
        let mut rng = Xoshiro256Plus::seed_from_u64(seed);
        let mut x = Vec::with_capacity(n);
        let mut prev: f64 = StandardNormal.sample(&mut rng);
        prev /= (1.0 - phi * phi).sqrt();
        for _ in 0..n {
            let e: f64 = StandardNormal.sample(&mut rng);
            prev = phi * prev + e;
            x.push(prev);
        }
        x
    }

    #[test]
    fn acf_lag0_is_one_and_matches_single_lag() {
        let x = ar1(300, 0.5, 1);
        let r = acf(&x, 5).unwrap();
        assert_relative_eq!(r[0], 1.0, max_relative = 1e-15);
        for (k, rk) in r.iter().enumerate() {
            assert_relative_eq!(*rk, autocorrelation(&x, k).unwrap(), max_relative = 1e-12);
        }
    }

    #[test]
    fn bias_corrected_estimate_is_closer_on_average() {
        // Monte-Carlo sanity bound (T-mc): over 200 series of n=50, phi=0.9,
        // Kendall's correction must reduce the mean bias.
        let (mut b_raw, mut b_cor) = (0.0, 0.0);
        for s in 0..200 {
            let x = ar1(50, 0.9, 100 + s);
            b_raw += ar1_coefficient(&x, Ar1Estimator::Lag1).unwrap() - 0.9;
            b_cor += ar1_coefficient(&x, Ar1Estimator::BiasCorrected).unwrap() - 0.9;
        }
        assert!(b_cor.abs() < b_raw.abs(), "raw {b_raw} corrected {b_cor}");
    }

    #[test]
    fn rank_estimate_shrugs_off_a_spike() {
        let mut x = ar1(400, 0.7, 7);
        let clean = ar1_coefficient(&x, Ar1Estimator::Rank).unwrap();
        x[200] = 1e6;
        let spiked_rank = ar1_coefficient(&x, Ar1Estimator::Rank).unwrap();
        let spiked_lag1 = ar1_coefficient(&x, Ar1Estimator::Lag1).unwrap();
        assert!((spiked_rank - clean).abs() < 0.02);
        assert!(spiked_lag1.abs() < 0.1, "one spike destroys r_1: {spiked_lag1}");
    }

    #[test]
    fn negative_phi_is_not_credited() {
        assert_eq!(long_run_variance_factor(-0.5), 1.0);
        assert_eq!(effective_sample_size(100, -0.5), 100.0);
    }

    #[test]
    fn errors_name_the_problem() {
        assert_eq!(acf(&[1.0], 1), Err(AutocorrError::TooShort { need: 2, got: 1 }));
        assert_eq!(acf(&[2.0, 2.0, 2.0], 1), Err(AutocorrError::Constant));
        assert!(matches!(
            ar1_coefficient(&[1.0, f64::NAN, 2.0, 3.0], Ar1Estimator::Lag1),
            Err(AutocorrError::NonFinite { index: 1, .. })
        ));
    }

    #[test]
    fn prewhitening_removes_known_ar1() {
        let x = [1.0, 2.0, 4.0, 8.0];
        assert_eq!(prewhiten_ar1(&x, 2.0), vec![0.0, 0.0, 0.0]);
    }
}
