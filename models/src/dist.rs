//! Distribution functions used across the crate: thin, documented wrappers
//! around [`statrs`] plus the Kolmogorov distribution, which `statrs` lacks.
//!
//! Every function takes plain `f64`s and returns a probability or a quantile.
//! Probabilities are unitless; quantiles are in the units of the statistic
//! (standard deviations for the normal, `sqrt(n)·D` for Kolmogorov).
//!
//! Conventions shared by all functions here:
//!
//! * a `NaN` argument gives `NaN` (never a panic), so a missing statistic flows
//!   through to a missing p-value;
//! * `sf(x) = 1 - cdf(x)` is computed directly where the library allows it, so
//!   tail probabilities such as `1e-12` keep their relative precision;
//! * accuracy is that of `statrs`: within `1e-9` relative of scipy over the
//!   golden grid in `tests/golden/trend_vectors.json` (normal tails to `x = 8`);
//! * invalid *shape* parameters (degrees of freedom `<= 0`) are a caller bug
//!   and panic, as documented on each function.
//!
//! ```
//! use telltale_models::dist::{kolmogorov_isf, norm_ppf, norm_sf};
//! assert!((norm_sf(1.959963984540054) - 0.025).abs() < 1e-10);
//! assert!((norm_ppf(0.975) - 1.959963984540054).abs() < 1e-9);
//! // Smirnov's 5 % critical constant c(0.05)
//! assert!((kolmogorov_isf(0.05) - 1.358098639).abs() < 1e-8);
//! ```

use statrs::distribution::{Beta, ChiSquared, ContinuousCDF, FisherSnedecor, Normal, StudentsT};

fn std_normal() -> Normal {
    // mean 0, sd 1 are always valid parameters
    Normal::standard()
}

/// Standard normal cumulative distribution function `Φ(x) = P(Z <= x)`.
///
/// ```text
/// Φ(x) = (1/2) · erfc(-x / √2)
/// ```
///
/// `x` is in standard deviations; the result is a probability in `[0, 1]`.
///
/// # Panics
/// Never.
///
/// # References
/// M. Abramowitz and I. A. Stegun (1964), *Handbook of Mathematical Functions*,
/// National Bureau of Standards, ch. 26 "Probability functions".
pub fn norm_cdf(x: f64) -> f64 {
    if x.is_nan() {
        return f64::NAN;
    }
    std_normal().cdf(x)
}

/// Standard normal survival function `1 - Φ(x) = P(Z > x)`, computed as
/// `erfc(x/√2)/2` so that upper tails keep full relative precision.
///
/// # Panics
/// Never.
///
/// # References
/// Abramowitz and Stegun (1964), ch. 26.
pub fn norm_sf(x: f64) -> f64 {
    if x.is_nan() {
        return f64::NAN;
    }
    std_normal().sf(x)
}

/// Standard normal quantile `Φ⁻¹(p)`, in standard deviations.
///
/// ```text
/// Φ⁻¹(p) = -√2 · erfc⁻¹(2p)
/// ```
///
/// `p = 0` gives `-inf` and `p = 1` gives `+inf`.
///
/// # Panics
/// If `p` is outside `[0, 1]` (a `NaN` `p` returns `NaN`).
///
/// # References
/// Abramowitz and Stegun (1964), ch. 26.
pub fn norm_ppf(p: f64) -> f64 {
    if p.is_nan() {
        return f64::NAN;
    }
    assert!((0.0..=1.0).contains(&p), "norm_ppf: p must be in [0, 1], got {p}");
    std_normal().inverse_cdf(p)
}

/// Upper tail `P(T > t)` of Student's t distribution with `df` degrees of freedom.
///
/// ```text
/// P(T > t) = I_{df/(df+t²)}(df/2, 1/2) / 2          for t > 0
/// ```
///
/// # Panics
/// If `df` is not `> 0`.
///
/// # References
/// Abramowitz and Stegun (1964), ch. 26.
pub fn t_sf(t: f64, df: f64) -> f64 {
    if t.is_nan() {
        return f64::NAN;
    }
    assert!(df > 0.0, "t_sf: degrees of freedom must be > 0, got {df}");
    let d = match StudentsT::new(0.0, 1.0, df) {
        Ok(d) => d,
        Err(e) => panic!("t_sf: invalid degrees of freedom {df}: {e}"),
    };
    d.sf(t)
}

/// Upper tail `P(F > f)` of Fisher's F distribution with `(df1, df2)` degrees
/// of freedom.
///
/// ```text
/// P(F > f) = I_{df2/(df2 + df1·f)}(df2/2, df1/2)
/// ```
///
/// # Panics
/// If either degree of freedom is not `> 0`.
///
/// # References
/// Abramowitz and Stegun (1964), ch. 26.
pub fn f_sf(f: f64, df1: f64, df2: f64) -> f64 {
    if f.is_nan() {
        return f64::NAN;
    }
    assert!(df1 > 0.0 && df2 > 0.0, "f_sf: degrees of freedom must be > 0, got ({df1}, {df2})");
    let d = match FisherSnedecor::new(df1, df2) {
        Ok(d) => d,
        Err(e) => panic!("f_sf: invalid degrees of freedom ({df1}, {df2}): {e}"),
    };
    if f <= 0.0 {
        return 1.0;
    }
    d.sf(f)
}

/// Upper tail `P(X > x)` of the χ² distribution with `df` degrees of freedom.
///
/// ```text
/// P(X > x) = Q(df/2, x/2)        (regularized upper incomplete gamma)
/// ```
///
/// # Panics
/// If `df` is not `> 0`.
///
/// # References
/// Abramowitz and Stegun (1964), ch. 26.
pub fn chi2_sf(x: f64, df: f64) -> f64 {
    if x.is_nan() {
        return f64::NAN;
    }
    assert!(df > 0.0, "chi2_sf: degrees of freedom must be > 0, got {df}");
    let d = match ChiSquared::new(df) {
        Ok(d) => d,
        Err(e) => panic!("chi2_sf: invalid degrees of freedom {df}: {e}"),
    };
    if x <= 0.0 {
        return 1.0;
    }
    d.sf(x)
}

/// Quantile of the Beta(a, b) distribution: the `x` with `I_x(a, b) = p`.
///
/// Used for Phase I limits of Hotelling's T², whose in-sample distribution is
/// a scaled Beta (Tracy, Young and Mason 1992).
///
/// # Panics
/// If `a` or `b` is not `> 0`, or `p` is outside `[0, 1]` (`NaN` gives `NaN`).
///
/// # References
/// * Abramowitz and Stegun (1964), ch. 26.
/// * N. D. Tracy, J. C. Young and R. L. Mason (1992), "Multivariate control
///   charts for individual observations", *Journal of Quality Technology*
///   24(2), 88-95.
pub fn beta_ppf(p: f64, a: f64, b: f64) -> f64 {
    if p.is_nan() {
        return f64::NAN;
    }
    assert!((0.0..=1.0).contains(&p), "beta_ppf: p must be in [0, 1], got {p}");
    let d = match Beta::new(a, b) {
        Ok(d) => d,
        Err(e) => panic!("beta_ppf: invalid shape ({a}, {b}): {e}"),
    };
    d.inverse_cdf(p)
}

/// Survival function of the Kolmogorov distribution, the law of
/// `sup_t |B(t)|` for a Brownian bridge `B` (the limit of `√n·D_n`).
///
/// ```text
/// Q(x) = P(K > x) = 2 Σ_{k>=1} (-1)^{k-1} exp(-2 k² x²)                    x >= 1
///      = 1 - (√(2π) / x) Σ_{k>=1} exp(-(2k-1)² π² / (8 x²))                 0 < x < 1
/// ```
///
/// Both series are exact; the alternating one converges fast for large `x`
/// and the theta-function form for small `x`, so each is used where it needs
/// at most a handful of terms. `x <= 0` gives 1.
///
/// # Panics
/// Never.
///
/// # References
/// * A. N. Kolmogorov (1933), "Sulla determinazione empirica di una legge di
///   distribuzione", *Giornale dell'Istituto Italiano degli Attuari* 4, 83-91.
/// * N. Smirnov (1948), "Table for estimating the goodness of fit of empirical
///   distributions", *Annals of Mathematical Statistics* 19(2), 279-281.
pub fn kolmogorov_sf(x: f64) -> f64 {
    if x.is_nan() {
        return f64::NAN;
    }
    if x <= 0.0 {
        return 1.0;
    }
    if x >= 1.0 {
        let mut sum = 0.0;
        let mut sign = 1.0;
        for k in 1..=100u32 {
            let kf = f64::from(k);
            let term = (-2.0 * kf * kf * x * x).exp();
            sum += sign * term;
            if term < 1e-300 || term < 1e-17 * sum.abs() {
                break;
            }
            sign = -sign;
        }
        (2.0 * sum).clamp(0.0, 1.0)
    } else {
        let c = std::f64::consts::PI * std::f64::consts::PI / (8.0 * x * x);
        let mut sum = 0.0;
        for k in 1..=100u32 {
            let odd = f64::from(2 * k - 1);
            let term = (-odd * odd * c).exp();
            sum += term;
            if term < 1e-17 * sum {
                break;
            }
        }
        let cdf = (2.0 * std::f64::consts::PI).sqrt() / x * sum;
        (1.0 - cdf).clamp(0.0, 1.0)
    }
}

/// Inverse survival function of the Kolmogorov distribution: the `x` with
/// `P(K > x) = p`. For example `kolmogorov_isf(0.05) = 1.3580986...`, the
/// constant `c(α)` in the two-sample critical value
/// `D_crit = c(α)·√((n+m)/(n·m))`.
///
/// Solved by bisection on `[0, 40]` to machine precision (the survival
/// function is continuous and strictly decreasing there). `p >= 1` gives 0
/// and `p <= 0` gives `+inf`.
///
/// # Panics
/// Never (`NaN` gives `NaN`).
///
/// # References
/// Smirnov (1948), see [`kolmogorov_sf`].
pub fn kolmogorov_isf(p: f64) -> f64 {
    if p.is_nan() {
        return f64::NAN;
    }
    if p >= 1.0 {
        return 0.0;
    }
    if p <= 0.0 {
        return f64::INFINITY;
    }
    let (mut lo, mut hi) = (0.0_f64, 40.0_f64);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if mid <= lo || mid >= hi {
            break;
        }
        if kolmogorov_sf(mid) > p {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn kolmogorov_series_agree_at_switch_point() {
        // both closed forms are exact, so they must agree where they meet
        let x = 1.0_f64;
        let alt: f64 = 2.0
            * (1..50)
                .map(|k| {
                    let k = f64::from(k);
                    (-1f64).powf(k - 1.0) * (-2.0 * k * k * x * x).exp()
                })
                .sum::<f64>();
        let c = std::f64::consts::PI.powi(2) / 8.0;
        let theta: f64 = 1.0
            - (2.0 * std::f64::consts::PI).sqrt()
                * (1..50).map(|k| (-(f64::from(2 * k - 1)).powi(2) * c).exp()).sum::<f64>();
        assert_relative_eq!(alt, theta, max_relative = 1e-13);
        assert_relative_eq!(kolmogorov_sf(x), alt, max_relative = 1e-13);
    }

    #[test]
    fn kolmogorov_isf_inverts_sf() {
        for p in [0.5, 0.1, 0.05, 0.01, 1e-6] {
            assert_relative_eq!(kolmogorov_sf(kolmogorov_isf(p)), p, max_relative = 1e-10);
        }
    }

    #[test]
    fn kolmogorov_constants_match_scipy_kstwobign() {
        // scipy 1.17.1 scipy.stats.kstwobign.isf; EXTERNAL-CHECKS §11 check C
        assert_relative_eq!(kolmogorov_isf(0.10), 1.2238478702170823, max_relative = 1e-8);
        assert_relative_eq!(kolmogorov_isf(0.05), 1.3580986393225507, max_relative = 1e-8);
        assert_relative_eq!(kolmogorov_isf(0.01), 1.6276236115189504, max_relative = 1e-8);
    }

    #[test]
    fn normal_tails_are_complementary() {
        for x in [-3.0, -0.5, 0.0, 1.0, 4.0] {
            assert_relative_eq!(norm_cdf(x) + norm_sf(x), 1.0, max_relative = 1e-15);
        }
        assert!(norm_sf(f64::NAN).is_nan());
    }

    #[test]
    #[should_panic(expected = "degrees of freedom")]
    fn t_sf_rejects_zero_df() {
        let _ = t_sf(1.0, 0.0);
    }
}
