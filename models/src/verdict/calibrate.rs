//! Calibration of the evaluation-step statistics on held-out clean history.
//!
//! The fit learns the baseline on part of the fit span and keeps the rest
//! as **held-out** data, scored as if it were new (the pipelines interleave
//! the two in chunks of days, so both see every duty pattern). From the
//! held-out blocks ([`Blocks`]) each sensor gets, per channel (`level`,
//! `resid`, `texture`):
//!
//! ```text
//! center = median of the held-out block values
//! scale  = max( MAD of them (Qn when 0),  (q99 - q01) / 4.653,  floor )   tails count
//!          floor = 1.2533 / sqrt(rows_per_block) for medians     standard error of a block median of white noise
//!                  0.1 for the log texture ratio
//! phi    = bias-corrected lag-1 autocorrelation of the held-out block values, clamped to [0, 0.9]
//! u      = (x - center) / scale                                    what the CUSUMs see
//! max_cusum = largest two-sided CUSUM sum (reference k) over the held-out u
//! ```
//!
//! Block values are autocorrelated (slow thermal and demand cycles), so the
//! iid ARL design alone would alarm far too often. The scan's decision
//! interval for a chart is the larger of the ARL design and `1.25 ·
//! max_cusum` (common practice, no source): what the held-out clean data
//! already reached is not evidence of change. Its p-value is the larger of
//! the iid one and the held-out one (see [`ChannelCal::p_value`]).
//!
//! so a block value `u` is in units of its own held-out variation, widened
//! for autocorrelation between blocks (the long-run variance factor of an
//! AR(1), Box, Jenkins & Reinsel). The held-out data also give each sensor
//! its longest silent and frozen runs and its spike rate, and the whole fit
//! span gives the asset's regime occupancy by time of day (for the regime
//! test), with the largest departure seen over windows of the fit span.
//!
//! 1.2533 = sqrt(π/2), the asymptotic standard error factor of a sample
//! median of normal data relative to the mean (Kenney & Keeping 1962).
//!
//! # References
//! G. E. P. Box, G. M. Jenkins and G. C. Reinsel, *Time Series Analysis*,
//! Wiley (long-run variance of an AR(1) mean, from memory); J. F. Kenney and
//! E. S. Keeping (1962), *Mathematics of Statistics*, Van Nostrand, §13.13.

use ndarray::ArrayView2;

use super::features::{StreakKind, streaks};
use crate::autocorr::{Ar1Estimator, ar1_coefficient, long_run_variance_factor};
use crate::baseline::{AssetBaseline, RowScores, STOPPED, score_rows};
use crate::robust::{MAD_NORMAL, QuantileType, median, qn, quantiles};

/// Calibrated null distribution of one block statistic of one sensor.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct ChannelCal {
    /// Median of the held-out block values.
    pub center: f64,
    /// Robust scale of the held-out block values (floored).
    pub scale: f64,
    /// Lag-1 autocorrelation between held-out blocks, in [0, 0.9].
    pub phi: f64,
    /// Held-out blocks used.
    pub n: usize,
    /// Largest two-sided CUSUM sum over the held-out `u` (reference `k`).
    #[cfg_attr(feature = "serde", serde(default))]
    pub max_cusum: f64,
}

impl ChannelCal {
    /// Standardised block value `u`; see the [module docs](self).
    pub fn u(&self, x: f64) -> f64 {
        (x - self.center) / self.scale
    }

    /// Held-out p-value of a CUSUM peak over `blocks` scanned blocks.
    ///
    /// The largest CUSUM sum of a chart over `T` blocks has an approximately
    /// exponential upper tail, `P(max > x) ≈ T / ARL(x)` with `ARL(x) ∝
    /// exp(θ x)`, θ = 2k for independent values (Siegmund 1985) and
    /// `θ = 2k / lrf(φ)` under AR(1) dependence (lrf the long-run variance
    /// factor). When the held-out maximum is far above the independent-data
    /// expectation `M0 = ln(2 k² n) / 2k`, the tail is heavier still and θ is
    /// scaled by `M0 / max_cusum`. Anchoring the median of the held-out
    /// maximum at the observed `max_cusum` over the held-out blocks `n` gives
    ///
    /// ```text
    /// θ = min(2k / lrf(φ), 2k · M0 / max_cusum)
    /// p = min(1, (blocks / n) · 0.5 · exp(-θ (peak - max_cusum)))
    /// ```
    pub fn p_value(&self, peak: f64, blocks: usize, k: f64) -> f64 {
        if self.n == 0 {
            return 1.0;
        }
        // a chart whose held-out maximum is far above what independent values
        // give has a heavier tail than the AR(1) factor says: scale θ down
        let k2 = (2.0 * k).max(1e-6);
        let iid_max = ((self.n as f64 * k * k * 2.0).max(std::f64::consts::E).ln() / k2).max(1.0);
        let theta = (k2 / long_run_variance_factor(self.phi))
            .min(k2 * iid_max / self.max_cusum.max(iid_max));
        let p = blocks as f64 / self.n as f64 * 0.5 * (-theta * (peak - self.max_cusum)).exp();
        p.min(1.0)
    }
}

/// Calibration of one sensor.
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct SensorCal {
    /// Block median robust z.
    pub level: Option<ChannelCal>,
    /// Block median residual z.
    pub resid: Option<ChannelCal>,
    /// Block log texture ratio.
    pub texture: Option<ChannelCal>,
    /// Mean isolated outliers per block.
    pub spike_rate: f64,
    /// Longest silent run in the held-out rows.
    pub max_silent_rows: usize,
    /// Longest frozen run in the held-out rows.
    pub max_frozen_rows: usize,
}

/// Regime occupancy by time of day over the fit span.
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct OccupancyCal {
    /// Time-of-day bins (UTC) of equal length.
    pub bins: usize,
    /// Share of rows of each bin in each regime, `bins × regimes`, row-major.
    pub profile: Vec<f64>,
    /// Regimes (including stopped).
    pub regimes: usize,
    /// Window of the test, blocks.
    pub window_blocks: usize,
    /// Largest distance between a window's profile and `profile` in the fit span.
    pub max_fit_distance: f64,
}

/// Everything the scan needs beyond the baseline itself.
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct Calibration {
    /// Block length, ms.
    pub block_ms: i64,
    /// First held-out row, epoch ms.
    pub held_out_start_ms: i64,
    /// End (exclusive) of the fit span, epoch ms.
    pub held_out_end_ms: i64,
    /// Held-out blocks with data.
    pub n_blocks: usize,
    /// Per sensor, in baseline order.
    pub sensors: Vec<SensorCal>,
    /// Regime occupancy (None when the fit span is shorter than two windows).
    pub occupancy: Option<OccupancyCal>,
}

fn channel(x: impl Iterator<Item = f64> + Clone, floor: f64, k: f64) -> Option<ChannelCal> {
    let v: Vec<f64> = x.clone().filter(|v| v.is_finite()).collect();
    if v.len() < 6 {
        return None;
    }
    let center = median(&v)?;
    let dev: Vec<f64> = v.iter().map(|x| (x - center).abs()).collect();
    let mad = MAD_NORMAL * median(&dev).unwrap_or(0.0);
    let spread = if mad > 0.0 { mad } else { qn(&v).unwrap_or(0.0) };
    // heavy tails: the 1 %..99 % range of a normal is 4.65 sigma
    let tails =
        quantiles(&v, &[0.01, 0.99], QuantileType::Type7).map_or(0.0, |q| (q[1] - q[0]) / 4.653);
    let scale = spread.max(tails).max(floor);
    // lag-1 over consecutive finite pairs (gaps dropped)
    let all: Vec<f64> = x.collect();
    let mut run: Vec<f64> = Vec::new();
    let mut phis = Vec::new();
    for y in all.iter().copied().chain(std::iter::once(f64::NAN)) {
        if y.is_finite() {
            run.push(y);
        } else {
            if run.len() >= 6
                && let Ok(p) = ar1_coefficient(&run, Ar1Estimator::BiasCorrected)
                && p.is_finite()
            {
                phis.push((p, run.len()));
            }
            run.clear();
        }
    }
    let w: usize = phis.iter().map(|(_, n)| n).sum();
    let phi =
        if w > 0 { phis.iter().map(|(p, n)| p * *n as f64).sum::<f64>() / w as f64 } else { 0.0 };
    let mut cal =
        ChannelCal { center, scale, phi: phi.clamp(0.0, 0.9), n: v.len(), max_cusum: 0.0 };
    let (mut up, mut lo, mut worst) = (0.0f64, 0.0f64, 0.0f64);
    for y in all {
        let u = cal.u(y);
        if u.is_finite() {
            up = (up + u - k).max(0.0);
            lo = (lo - u - k).max(0.0);
            worst = worst.max(up).max(lo);
        }
    }
    cal.max_cusum = worst;
    Some(cal)
}

/// Fraction of the day of a time, as a bin index.
pub(crate) fn day_bin(ms: i64, bins: usize) -> usize {
    let day = 86_400_000i64;
    let t = ms.rem_euclid(day);
    ((t as i128 * bins as i128 / day as i128) as usize).min(bins - 1)
}

/// Total-variation distance between an occupancy profile (counts, `bins ×
/// regimes`) and the reference shares, averaged over the bins that have rows.
pub(crate) fn profile_distance(
    counts: &[f64],
    reference: &[f64],
    bins: usize,
    regimes: usize,
) -> f64 {
    let mut tot = 0.0;
    let mut used = 0.0;
    for b in 0..bins {
        let row = &counts[b * regimes..(b + 1) * regimes];
        let n: f64 = row.iter().sum();
        if n <= 0.0 {
            continue;
        }
        let d: f64 = row
            .iter()
            .zip(&reference[b * regimes..(b + 1) * regimes])
            .map(|(c, r)| (c / n - r).abs())
            .sum::<f64>()
            * 0.5;
        tot += d;
        used += 1.0;
    }
    if used > 0.0 { tot / used } else { f64::NAN }
}

/// Calibrates `baseline` on the held-out rows of the fit span's aligned
/// frame `values` (row 0 at `origin_ms`): the rows where `held_out` is
/// true, which the baseline was not fitted on. The other rows count as
/// missing for every block statistic (but not for the regime occupancy,
/// which uses every row).
///
/// Blocks follow [`block_features`](super::block_features) with the given
/// `spike_factor` and `min_fill`; `occupancy_window` is the regime test's
/// window in blocks (4 time-of-day bins, UTC); `cusum_k` is the scan's CUSUM
/// reference value.
///
/// # Panics
/// If `held_out` does not have one flag per row.
#[allow(clippy::too_many_arguments)]
pub fn calibrate(
    baseline: &AssetBaseline,
    values: ArrayView2<'_, f64>,
    origin_ms: i64,
    held_out: &[bool],
    block_ms: i64,
    spike_factor: f64,
    min_fill: f64,
    occupancy_window: usize,
    cusum_k: f64,
) -> Calibration {
    let step = baseline.step_ms;
    let rpb = (block_ms / step).max(1) as usize;
    let n = values.nrows();
    let p = values.ncols();
    assert_eq!(held_out.len(), n, "one held-out flag per row");
    let mut held = values.to_owned();
    for (r, &h) in held_out.iter().enumerate() {
        if !h {
            held.row_mut(r).fill(f64::NAN);
        }
    }
    let held = held.view();
    let mut scores = RowScores::new(n, p);
    let ok = score_rows(baseline, held, &mut scores).is_ok();
    let blocks = if ok {
        super::features::block_features(
            baseline,
            held,
            origin_ms,
            &scores,
            block_ms,
            spike_factor,
            min_fill,
        )
    } else {
        super::features::block_features(
            baseline,
            held.slice(ndarray::s![0..0, ..]),
            origin_ms,
            &RowScores::new(0, p),
            block_ms,
            spike_factor,
            min_fill,
        )
    };
    let st = streaks(held, &scores.regime, 1);
    let nb = (0..blocks.len()).filter(|&b| blocks.reporting[b] > 0.0).count();
    let sensors = (0..p)
        .map(|s| {
            let se = 1.2533 / (rpb as f64).sqrt();
            let col = |a: &ndarray::Array2<f64>| a.column(s).to_vec();
            let lv = col(&blocks.level);
            let rs = col(&blocks.resid);
            let tx = col(&blocks.texture);
            let max_run = |k: StreakKind| {
                st.iter().filter(|x| x.sensor == s && x.kind == k).map(|x| x.len).max().unwrap_or(0)
            };
            SensorCal {
                level: channel(lv.iter().copied(), se, cusum_k),
                resid: channel(rs.iter().copied(), se, cusum_k),
                texture: channel(tx.iter().copied(), 0.1, cusum_k),
                spike_rate: if nb > 0 { blocks.spikes.column(s).sum() / nb as f64 } else { 0.0 },
                max_silent_rows: max_run(StreakKind::Silent),
                max_frozen_rows: max_run(StreakKind::Frozen),
            }
        })
        .collect();
    let first = held_out.iter().position(|&h| h).unwrap_or(n);
    Calibration {
        block_ms,
        held_out_start_ms: origin_ms + first as i64 * step,
        held_out_end_ms: origin_ms + n as i64 * step,
        n_blocks: nb,
        sensors,
        occupancy: occupancy(baseline, values, origin_ms, rpb, block_ms, occupancy_window),
    }
}

const DAY_BINS: usize = 4;

fn occupancy(
    baseline: &AssetBaseline,
    values: ArrayView2<'_, f64>,
    origin_ms: i64,
    rpb: usize,
    block_ms: i64,
    window: usize,
) -> Option<OccupancyCal> {
    let n = values.nrows();
    let nb = n / rpb;
    if window == 0 || nb < 2 * window {
        return None;
    }
    let g = baseline.regimes.n_regimes();
    let bins = DAY_BINS;
    // per block counts bins × regimes
    let mut per_block = vec![vec![0.0; bins * g]; nb];
    let mut total = vec![0.0; bins * g];
    for (b, counts) in per_block.iter_mut().enumerate() {
        let bin = day_bin(origin_ms + b as i64 * block_ms, bins);
        for r in b * rpb..(b + 1) * rpb {
            let row = values.row(r);
            if row.iter().all(|v| !v.is_finite()) {
                continue;
            }
            if let Some(reg) = baseline.regimes.classify(row) {
                counts[bin * g + reg] += 1.0;
                total[bin * g + reg] += 1.0;
            }
        }
    }
    let mut profile = vec![0.0; bins * g];
    for b in 0..bins {
        let s: f64 = total[b * g..(b + 1) * g].iter().sum();
        for k in 0..g {
            profile[b * g + k] = if s > 0.0 { total[b * g + k] / s } else { 0.0 };
        }
    }
    let mut worst: f64 = 0.0;
    let mut acc = vec![0.0; bins * g];
    for b in 0..nb {
        for (a, c) in acc.iter_mut().zip(&per_block[b]) {
            *a += c;
        }
        if b >= window {
            for (a, c) in acc.iter_mut().zip(&per_block[b - window]) {
                *a -= c;
            }
        }
        if b + 1 >= window {
            let d = profile_distance(&acc, &profile, bins, g);
            if d.is_finite() {
                worst = worst.max(d);
            }
        }
    }
    // a stopped-only asset has nothing to compare
    if profile.iter().enumerate().all(|(i, &v)| i % g == STOPPED || v == 0.0) {
        return None;
    }
    Some(OccupancyCal { bins, profile, regimes: g, window_blocks: window, max_fit_distance: worst })
}
