//! Design of k and h from average run lengths (Siegmund's approximation).

use super::error::CusumDesignError;

/// Siegmund's (1985) approximation to the ARL of a one-sided (upper) CUSUM
/// with reference value `k` and decision interval `h` (both sigma units)
/// when the mean has shifted by `shift` sigma.
///
/// ```text
/// Delta = shift - k,   b = h + 1.166
/// ARL   = (exp(-2 Delta b) + 2 Delta b - 1) / (2 Delta^2)      (Delta != 0)
/// ARL   = b^2                                                  (Delta = 0, the limit)
/// in control: shift = 0, i.e. Delta = -k
/// ```
///
/// The 1.166 corrects the Brownian-motion ARL for the overshoot of the
/// discrete sums (Siegmund's corrected diffusion approximation); it is an
/// approximation for normal observations, accurate to a few percent for
/// h >= 2 and 0 <= k <= 1. Units: observations.
///
/// | Parameter | Units | Range |
/// |-----------|-------|-------|
/// | `k`       | sigma | [0, inf) |
/// | `h`       | sigma | [0, inf) |
/// | `shift`   | sigma | any real |
///
/// # Panics
/// Never; non-finite inputs give a non-finite result.
///
/// # References
/// D. Siegmund (1985), *Sequential Analysis: Tests and Confidence Intervals*, Springer, New York
/// (ch. X); the formula as quoted in D. C. Montgomery, *Introduction to Statistical Quality
/// Control*, Wiley, ch. 9 (from memory).
pub fn siegmund_arl(k: f64, h: f64, shift: f64) -> f64 {
    let delta = shift - k;
    let b = h + 1.166;
    let x = 2.0 * delta * b;
    if x.abs() < 1e-6 {
        // e^{-x} + x - 1 = x^2/2 - x^3/6 + ..., divided by 2 Delta^2 = x^2 / (2 b^2)
        return b * b * (1.0 - x / 3.0);
    }
    ((-x).exp_m1() + x) / (2.0 * delta * delta)
}

/// ARL of the two-sided chart (upper and lower sums together), combining
/// the one-sided values as `1/ARL = 1/ARL+ + 1/ARL-` (exact for the
/// two-sided tabular CUSUM when the sums cannot both be positive; the
/// usual approximation otherwise).
///
/// ```text
/// ARL+ = siegmund_arl(k, h, shift)     ARL- = siegmund_arl(k, h, -shift)
/// ```
///
/// # Panics
/// Never.
///
/// # References
/// See [`siegmund_arl`].
pub fn two_sided_arl(k: f64, h: f64, shift: f64) -> f64 {
    let up = siegmund_arl(k, h, shift);
    let down = siegmund_arl(k, h, -shift);
    1.0 / (1.0 / up + 1.0 / down)
}

/// Decision interval h (sigma units) giving the two-sided in-control ARL
/// `arl0` for reference value `k`, by bisection on [`two_sided_arl`]
/// (increasing in h) to 1e-10.
///
/// # Errors
/// [`CusumDesignError::Drift`] for a bad `k`; [`CusumDesignError::Arl0`]
/// when `arl0` is not above the h = 0 value.
///
/// # Panics
/// Never.
///
/// # References
/// See [`siegmund_arl`].
pub fn design_threshold(k: f64, arl0: f64) -> Result<f64, CusumDesignError> {
    if !(k.is_finite() && k >= 0.0) {
        return Err(CusumDesignError::Drift(k));
    }
    let min = two_sided_arl(k, 0.0, 0.0);
    if !(arl0.is_finite() && arl0 > min) {
        return Err(CusumDesignError::Arl0 { min, got: arl0 });
    }
    let (mut lo, mut hi) = (0.0_f64, 1.0_f64);
    while two_sided_arl(k, hi, 0.0) < arl0 {
        lo = hi;
        hi *= 2.0;
        if hi > 1e6 {
            return Err(CusumDesignError::Arl0 { min, got: arl0 });
        }
    }
    while hi - lo > 1e-10 {
        let mid = 0.5 * (lo + hi);
        if two_sided_arl(k, mid, 0.0) < arl0 {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    Ok(0.5 * (lo + hi))
}

/// A CUSUM design: k, h and the ARLs they give.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct CusumDesign {
    /// Reference value k = shift / 2, sigma units.
    pub drift: f64,
    /// Decision interval h, sigma units.
    pub threshold: f64,
    /// Two-sided in-control ARL (observations).
    pub arl0: f64,
    /// Two-sided ARL at the design shift (observations).
    pub arl1: f64,
}

/// Design a two-sided CUSUM to detect a mean shift of `shift` sigma with
/// in-control ARL `arl0`: k = shift / 2 (the optimal reference value for
/// that shift), h from [`design_threshold`].
///
/// | Parameter | Units        | Range | Typical |
/// |-----------|--------------|-------|---------|
/// | `shift`   | sigma        | (0, inf) | 1 |
/// | `arl0`    | observations | above the h = 0 ARL | 370 to 10 000 |
///
/// # Errors
/// [`CusumDesignError::Shift`] for a bad shift, and those of [`design_threshold`].
///
/// # Panics
/// Never.
///
/// # References
/// See [`siegmund_arl`].
///
/// ```
/// use telltale_models::changepoint::design_for_shift;
/// let d = design_for_shift(1.0, 1440.0)?; // one false alarm a day on minute data
/// assert!(d.drift == 0.5 && d.threshold > 5.0 && (d.arl0 - 1440.0).abs() < 1e-6);
/// # Ok::<(), telltale_models::changepoint::CusumDesignError>(())
/// ```
pub fn design_for_shift(shift: f64, arl0: f64) -> Result<CusumDesign, CusumDesignError> {
    if !(shift.is_finite() && shift > 0.0) {
        return Err(CusumDesignError::Shift(shift));
    }
    let k = shift / 2.0;
    let h = design_threshold(k, arl0)?;
    Ok(CusumDesign {
        drift: k,
        threshold: h,
        arl0: two_sided_arl(k, h, 0.0),
        arl1: two_sided_arl(k, h, shift),
    })
}
