//! Per-sensor, per-regime robust baseline.

use ndarray::ArrayView1;

use crate::autocorr::{Ar1Estimator, ar1_coefficient_pooled, long_run_variance_factor};
use crate::robust::select::select;
use crate::robust::{MAD_NORMAL, QuantileType, median_mad_with_scratch, qn, quantile_sorted};

/// Probabilities of [`SensorBaseline::quantiles`]: 1, 5, 50, 95, 99 %.
pub const QUANTILE_PROBS: [f64; 5] = [0.01, 0.05, 0.5, 0.95, 0.99];

/// Which estimator set [`SensorBaseline::scale`].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub enum ScaleMethod {
    /// Normal-consistent MAD (Hampel 1974).
    Mad,
    /// Qn (Rousseeuw & Croux 1993), used when the MAD is 0.
    Qn,
    /// The resolution floor `resolution / √12` (or `1e-9·max(1, |median|)`
    /// without a resolution), used when the estimate is below it.
    Floor,
}

/// Robust baseline of one sensor in one regime, on the aligned grid.
///
/// | field                  | units                   | estimator |
/// |------------------------|-------------------------|-----------|
/// | `location`             | sensor units            | median |
/// | `scale`                | sensor units            | MAD (× 1.4826), Qn if MAD = 0, floored at `resolution/√12` |
/// | `quantiles`            | sensor units            | Hyndman & Fan type 7 at [`QUANTILE_PROBS`] |
/// | `resolution`           | sensor units            | [`estimate_resolution`](crate::signatures::estimate_resolution) on all good raw readings |
/// | `sampling_interval_ms` | ms                      | median Δt of good raw readings |
/// | `rate_scale`           | sensor units per step   | MAD of first differences of consecutive rows in the regime |
/// | `phi`                  | —                       | pooled bias-corrected lag-1 autocorrelation (Kendall 1954) over runs of consecutive rows |
/// | `long_run_factor`      | —                       | `(1+φ)/(1-φ)`, φ clamped to [0, 0.99] |
///
/// The floor `resolution/√12` is the standard deviation of uniform
/// quantisation error (Widrow 1956), the smallest spread a quantised sensor
/// can honestly show.
///
/// # References
/// F. R. Hampel (1974), *JASA* 69(346), 383-393; P. J. Rousseeuw and C. Croux
/// (1993), *JASA* 88(424), 1273-1283; R. J. Hyndman and Y. Fan (1996), *The
/// American Statistician* 50(4), 361-365; B. Widrow (1956), "A study of rough
/// amplitude quantization by means of Nyquist sampling theory", *IRE Trans.
/// Circuit Theory* 3(4), 266-276.
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct SensorBaseline {
    /// Grid rows of this regime with a good value.
    pub n_good: usize,
    /// Median, sensor units.
    pub location: f64,
    /// Robust scale, sensor units (> 0).
    pub scale: f64,
    /// Estimator behind `scale`.
    pub scale_method: ScaleMethod,
    /// Type-7 quantiles at [`QUANTILE_PROBS`], sensor units.
    pub quantiles: [f64; 5],
    /// Smallest step between distinct readings, sensor units.
    pub resolution: Option<f64>,
    /// Median sampling interval of the raw readings, ms.
    pub sampling_interval_ms: Option<f64>,
    /// Typical change per grid step (MAD of first differences), sensor units per step.
    pub rate_scale: Option<f64>,
    /// Lag-1 autocorrelation of the grid series in this regime.
    pub phi: Option<f64>,
    /// Long-run variance factor `(1+φ)/(1-φ)` (1 when φ is unknown).
    pub long_run_factor: f64,
}

impl SensorBaseline {
    /// Robust z of a value against this baseline: `(x - location) / scale`.
    pub fn z(&self, x: f64) -> f64 {
        (x - self.location) / self.scale
    }
}

/// Scale floor for a sensor: `resolution / √12`, else `1e-9 · max(1, |loc|)`.
pub(crate) fn scale_floor(resolution: Option<f64>, location: f64) -> f64 {
    let tiny = 1e-9 * location.abs().max(1.0);
    match resolution {
        Some(r) if r > 0.0 => (r / 12f64.sqrt()).max(tiny),
        _ => tiny,
    }
}

/// Robust scale with MAD → Qn → floor fallbacks.
pub(crate) fn floored_scale(
    x: &[f64],
    resolution: Option<f64>,
    scratch: &mut Vec<f64>,
) -> Option<(f64, f64, ScaleMethod)> {
    let mm = median_mad_with_scratch(x, scratch)?;
    let floor = scale_floor(resolution, mm.median);
    let mad = MAD_NORMAL * mm.mad_raw;
    let (s, m) =
        if mad > 0.0 { (mad, ScaleMethod::Mad) } else { (qn(x).unwrap_or(0.0), ScaleMethod::Qn) };
    Some(if s >= floor { (mm.median, s, m) } else { (mm.median, floor, ScaleMethod::Floor) })
}

/// Runs of consecutive rows (indices) where `keep` holds.
pub(crate) fn runs(n: usize, keep: impl Fn(usize) -> bool) -> Vec<(usize, usize)> {
    let mut out = Vec::new();
    let mut start = None;
    for r in 0..=n {
        let k = r < n && keep(r);
        match (k, start) {
            (true, None) => start = Some(r),
            (false, Some(s)) => {
                out.push((s, r));
                start = None;
            }
            _ => {}
        }
    }
    out
}

/// Pooled AR(1) over the runs of at least 4 rows of `x`; `None` if none.
pub(crate) fn pooled_phi(x: &[f64], segments: &[(usize, usize)]) -> Option<f64> {
    let segs: Vec<&[f64]> =
        segments.iter().filter(|(s, e)| e - s >= 4).map(|&(s, e)| &x[s..e]).collect();
    if segs.is_empty() {
        return None;
    }
    ar1_coefficient_pooled(&segs, Ar1Estimator::BiasCorrected).ok().filter(|p| p.is_finite())
}

/// Puts the order statistics `ks` (ascending, distinct, absolute indices,
/// `v` starting at index `off`) at their sorted positions: select the middle
/// one, then recurse into the two sides (the `select_nth_unstable` contract
/// keeps each side's elements on its side).
fn select_many(v: &mut [f64], ks: &[usize], off: usize) {
    if ks.is_empty() || v.is_empty() {
        return;
    }
    let mid = ks.len() / 2;
    let k = ks[mid] - off;
    select(v, k);
    let (left, right) = v.split_at_mut(k);
    select_many(left, &ks[..mid], off);
    select_many(&mut right[1..], &ks[mid + 1..], off + k + 1);
}

/// Type-7 quantiles (Hyndman & Fan 1996) of `v` (finite values only),
/// reordering `v`. Only the order statistics the interpolation reads are
/// placed, by recursive selection (no sort); the values are those of
/// [`quantiles`](crate::robust::quantiles) on the same data, bit for bit.
/// `None` for an empty `v`.
pub(crate) fn type7_quantiles<const N: usize>(v: &mut [f64], probs: [f64; N]) -> Option<[f64; N]> {
    let n = v.len();
    if n == 0 {
        return None;
    }
    // 0-based rank floor((n-1)p) and its neighbours (rounding margin on both sides)
    let mut ks: Vec<usize> = Vec::with_capacity(4 * N);
    for p in probs {
        let j = ((n - 1) as f64 * p).floor().max(0.0) as usize;
        ks.extend(j.saturating_sub(1)..=(j + 2).min(n - 1));
    }
    ks.sort_unstable();
    ks.dedup();
    select_many(v, &ks, 0);
    Some(probs.map(|p| quantile_sorted(v, p, QuantileType::Type7)))
}

pub(crate) fn fit_sensor_regime(
    col: ArrayView1<'_, f64>,
    labels: &[Option<usize>],
    regime: usize,
    resolution: Option<f64>,
    sampling_interval_ms: Option<f64>,
    min_rows: usize,
) -> Option<SensorBaseline> {
    let n = col.len();
    let in_regime = |r: usize, v: f64| labels[r] == Some(regime) && v.is_finite();
    let n_good = col.iter().enumerate().filter(|&(r, &v)| in_regime(r, v)).count();
    if n_good < min_rows {
        return None;
    }
    // one contiguous copy of the (strided) column, only for a regime that is fitted
    let owned;
    let colv: &[f64] = match col.as_slice() {
        Some(s) => s,
        None => {
            owned = col.to_vec();
            &owned
        }
    };
    let inside = |r: usize| in_regime(r, colv[r]);
    let mut x: Vec<f64> = Vec::with_capacity(n_good);
    x.extend(colv.iter().enumerate().filter(|&(r, &v)| in_regime(r, v)).map(|(_, &v)| v));
    let mut scratch = Vec::with_capacity(n_good);
    let (location, scale, scale_method) = floored_scale(&x, resolution, &mut scratch)?;
    let q = type7_quantiles(&mut x, QUANTILE_PROBS)?;
    let segments = runs(n, inside);
    scratch.clear();
    scratch.extend(segments.iter().flat_map(|&(s, e)| colv[s..e].windows(2).map(|w| w[1] - w[0])));
    let diffs = std::mem::take(&mut scratch);
    let rate_scale = if diffs.is_empty() {
        None
    } else {
        floored_scale(&diffs, resolution, &mut scratch).map(|(_, s, _)| s)
    };
    let phi = pooled_phi(colv, &segments);
    Some(SensorBaseline {
        n_good,
        location,
        scale,
        scale_method,
        quantiles: q,
        resolution,
        sampling_interval_ms,
        rate_scale,
        phi,
        long_run_factor: phi.map_or(1.0, long_run_variance_factor),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;
    use ndarray::Array1;

    #[test]
    fn baseline_of_a_known_sample() {
        // 1..=100 in regime 1, interleaved with missing rows and another regime
        let mut v = Vec::new();
        let mut l = Vec::new();
        for i in 1..=100 {
            v.push(i as f64);
            l.push(Some(1));
            v.push(f64::NAN);
            l.push(Some(1));
            v.push(1000.0);
            l.push(Some(2));
        }
        let col = Array1::from(v);
        let b = fit_sensor_regime(col.view(), &l, 1, Some(1.0), Some(60_000.0), 30).unwrap();
        assert_eq!(b.n_good, 100);
        // median of 1..=100 = 50.5, raw MAD = 25 (hand computation)
        assert_eq!(b.location, 50.5);
        assert_relative_eq!(b.scale, 25.0 * MAD_NORMAL, max_relative = 1e-12);
        assert_eq!(b.scale_method, ScaleMethod::Mad);
        // type 7 at 1 %: 1 + 0.99 = 1.99 (numpy "linear")
        assert_relative_eq!(b.quantiles[0], 1.99, max_relative = 1e-12);
        assert_relative_eq!(b.quantiles[4], 99.01, max_relative = 1e-12);
        // no two consecutive rows in regime 1 with values: no rate or phi
        assert!(b.rate_scale.is_none() && b.phi.is_none());
        assert_eq!(b.long_run_factor, 1.0);
        assert!(fit_sensor_regime(col.view(), &l, 3, None, None, 30).is_none());
    }

    #[test]
    fn constant_sensor_gets_the_resolution_floor() {
        let col = Array1::from(vec![5.0; 50]);
        let l = vec![Some(1); 50];
        let b = fit_sensor_regime(col.view(), &l, 1, Some(0.5), None, 30).unwrap();
        assert_eq!(b.scale_method, ScaleMethod::Floor);
        assert_relative_eq!(b.scale, 0.5 / 12f64.sqrt(), max_relative = 1e-12);
        assert_eq!(b.rate_scale, Some(0.5 / 12f64.sqrt()));
    }

    #[test]
    fn selected_quantiles_equal_sorted_ones_bit_for_bit() {
        // against crate::robust::quantiles (sort + type 7, itself checked against numpy)
        let mut state = 7u64;
        for n in [1usize, 2, 3, 5, 10, 99, 100, 101, 1000, 4321] {
            let x: Vec<f64> = (0..n)
                .map(|_| {
                    state =
                        state.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
                    ((state >> 33) % 97) as f64 * 0.25 // many ties
                })
                .collect();
            let want = crate::robust::quantiles(&x, &QUANTILE_PROBS, QuantileType::Type7).unwrap();
            let mut v = x.clone();
            let got = type7_quantiles(&mut v, QUANTILE_PROBS).unwrap();
            assert_eq!(got.to_vec(), want, "n = {n}");
            let mut v = x.clone();
            let two = type7_quantiles(&mut v, [0.001, 0.999]).unwrap();
            let want = crate::robust::quantiles(&x, &[0.001, 0.999], QuantileType::Type7).unwrap();
            assert_eq!(two.to_vec(), want, "n = {n}");
        }
        assert!(type7_quantiles(&mut [], [0.5]).is_none());
    }

    #[test]
    fn runs_split_at_gaps() {
        let r = runs(7, |i| i != 2 && i != 3);
        assert_eq!(r, vec![(0, 2), (4, 7)]);
    }
}
