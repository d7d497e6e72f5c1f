//! Evaluation blocks: per-step summaries of one asset's scored rows.
//!
//! The scan judges an asset step by step (one block = one evaluation step,
//! default one hour). Each block summarises the rows in it, per sensor:
//!
//! | field     | per block and sensor | units |
//! |-----------|----------------------|-------|
//! | `level`   | median robust z of the rows with a value (each row against the baseline of its own regime) | robust σ of that baseline |
//! | `resid`   | median regression residual z of the running rows that have been in their regime for [`SETTLE_MS`] (condition sensors with a regression) | residual σ |
//! | `texture` | ln(trimmed mean of \|second differences\| in the block / the baseline's `rate_scale`): measurement noise, insensitive to a changing slope; in a regime whose noise the instrument does not resolve ([`noise_resolved`]), only the part of each second difference beyond two resolution steps ([`dither_excess`]) | — |
//! | `spikes`  | isolated outliers: rows that jump away from *both* neighbours by more than `spike_factor · rate_scale`, in the same direction | count |
//! | `outside` | rows outside the instrument range | count |
//! | `filled`  | rows with a value | count |
//!
//! and per block: rows with any value (`reporting`), rows per regime
//! (`regime_rows`), the median T² and SPE as multiples of their limits.
//!
//! A block median needs at least `min_fill · rows_per_block` rows (and at
//! least 3); otherwise the entry is NaN. Rows with a reading outside the
//! instrument range do not enter `level`, `resid` or `texture` (they are
//! counted in `outside`). Streaks (runs over rows, not blocks) are found
//! separately by [`streaks`].

use ndarray::{Array2, ArrayView2};

use crate::baseline::{AssetBaseline, RowScores, STOPPED};
use crate::robust::median_in_place;

/// How long a machine must have stayed in its regime before its residuals
/// are judged: 2 hours (common practice, no source; covers first-order
/// thermal lags of up to about 40 minutes to within 5 %).
pub const SETTLE_MS: i64 = 2 * 3_600_000;

/// Block summaries of one asset; see the [module docs](self).
#[derive(Debug, Clone, PartialEq)]
pub struct Blocks {
    /// Start of block 0, epoch ms (a multiple of `block_ms`).
    pub origin_ms: i64,
    /// Block length, ms.
    pub block_ms: i64,
    /// Grid rows per block.
    pub rows_per_block: usize,
    /// Median robust z, `blocks × sensors`.
    pub level: Array2<f64>,
    /// Median residual z, `blocks × sensors`.
    pub resid: Array2<f64>,
    /// Log texture ratio, `blocks × sensors`.
    pub texture: Array2<f64>,
    /// Isolated outliers, `blocks × sensors`.
    pub spikes: Array2<f64>,
    /// Rows outside the instrument range, `blocks × sensors`.
    pub outside: Array2<f64>,
    /// Rows with a value, `blocks × sensors`.
    pub filled: Array2<f64>,
    /// Rows with any sensor's value, per block.
    pub reporting: Vec<f64>,
    /// Rows per regime (`blocks × regimes`, 0 = stopped).
    pub regime_rows: Array2<f64>,
    /// Median T² / its limit, per block (NaN without PCA).
    pub t2_ratio: Vec<f64>,
    /// Median SPE / its limit, per block.
    pub spe_ratio: Vec<f64>,
}

impl Blocks {
    /// Number of blocks.
    pub fn len(&self) -> usize {
        self.level.nrows()
    }
    /// Whether there are no blocks.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
    /// Start of block `b`, epoch ms.
    pub fn start_ms(&self, b: usize) -> i64 {
        self.origin_ms + b as i64 * self.block_ms
    }
    /// End (exclusive) of block `b`, epoch ms.
    pub fn end_ms(&self, b: usize) -> i64 {
        self.start_ms(b) + self.block_ms
    }

    /// Frees the per-block counts (`spikes`, `outside`, `filled`,
    /// `regime_rows`) once detection is done: [`decide`](super::decide) reads
    /// only the level, residual and texture blocks and the PCA ratios.
    pub fn shed_counts(&mut self) {
        self.spikes = Array2::zeros((0, 0));
        self.outside = Array2::zeros((0, 0));
        self.filled = Array2::zeros((0, 0));
        self.regime_rows = Array2::zeros((0, 0));
    }
}

/// Whether the value of sensor `s` lies outside its instrument range.
pub(crate) fn is_outside(b: &AssetBaseline, s: usize, v: f64) -> bool {
    match b.sensors[s].range {
        Some([lo, hi]) => v.is_finite() && (v < lo || v > hi),
        None => false,
    }
}

fn block_median(buf: &mut Vec<f64>, need: usize) -> f64 {
    if buf.len() < need {
        buf.clear();
        return f64::NAN;
    }
    let m = median_in_place(buf).unwrap_or(f64::NAN);
    buf.clear();
    m
}

/// Summarises rows `values` (aligned on the baseline's grid, row 0 at
/// `origin_ms`, which must be a multiple of `block_ms`) and their `scores`
/// into blocks of `block_ms` (a multiple of the grid step).
///
/// # Panics
/// If `scores` does not have the shape of `values`.
pub fn block_features(
    baseline: &AssetBaseline,
    values: ArrayView2<'_, f64>,
    origin_ms: i64,
    scores: &RowScores,
    block_ms: i64,
    spike_factor: f64,
    min_fill: f64,
) -> Blocks {
    let step = baseline.step_ms;
    let rpb = (block_ms / step).max(1) as usize;
    let (n, p) = values.dim();
    let nb = n.div_ceil(rpb);
    let g = baseline.regimes.n_regimes();
    let nan = || Array2::from_elem((nb, p), f64::NAN);
    let mut out = Blocks {
        origin_ms,
        block_ms,
        rows_per_block: rpb,
        level: nan(),
        resid: nan(),
        texture: nan(),
        spikes: Array2::zeros((nb, p)),
        outside: Array2::zeros((nb, p)),
        filled: Array2::zeros((nb, p)),
        reporting: vec![0.0; nb],
        regime_rows: Array2::zeros((nb, g)),
        t2_ratio: vec![f64::NAN; nb],
        spe_ratio: vec![f64::NAN; nb],
    };
    let need = ((min_fill * rpb as f64).ceil() as usize).max(3).min(rpb.max(3));
    // rows since the regime last changed: residuals are judged only once the
    // machine has settled in its regime (thermal lags after a start)
    let settle_rows = (SETTLE_MS / step.max(1)) as usize;
    let mut settled = vec![0usize; n];
    for r in 0..n {
        settled[r] = match (r.checked_sub(1).and_then(|q| scores.regime[q]), scores.regime[r]) {
            (Some(a), Some(b)) if a == b => settled[r - 1] + 1,
            (_, Some(_)) => 1,
            _ => 0,
        };
    }
    let mut buf = Vec::with_capacity(rpb);
    let pca_limits = baseline.pca.as_ref().map(|m| (m.limits.t2_phase2, m.limits.spe_jm));
    for bl in 0..nb {
        let r0 = bl * rpb;
        let r1 = (r0 + rpb).min(n);
        for r in r0..r1 {
            if values.row(r).iter().any(|v| v.is_finite()) {
                out.reporting[bl] += 1.0;
            }
            if let Some(reg) = scores.regime[r] {
                out.regime_rows[[bl, reg]] += 1.0;
            }
        }
        // the block's most occupied regime (ties: the one seen last)
        let mut last_seen = vec![0usize; g];
        for r in r0..r1 {
            if let Some(reg) = scores.regime[r] {
                last_seen[reg] = r + 1;
            }
        }
        let reg = (0..g)
            .filter(|&k| last_seen[k] > 0)
            .max_by_key(|&k| (out.regime_rows[[bl, k]] as usize, last_seen[k]));
        for s in 0..p {
            for r in r0..r1 {
                let v = values[[r, s]];
                if v.is_finite() {
                    out.filled[[bl, s]] += 1.0;
                    if is_outside(baseline, s, v) {
                        out.outside[[bl, s]] += 1.0;
                    }
                }
            }
            let ok = |r: usize| {
                let v = values[[r, s]];
                v.is_finite() && !is_outside(baseline, s, v)
            };
            buf.extend(
                (r0..r1).filter(|&r| ok(r)).map(|r| scores.z[[r, s]]).filter(|z| z.is_finite()),
            );
            out.level[[bl, s]] = block_median(&mut buf, need);
            buf.extend(
                (r0..r1)
                    .filter(|&r| ok(r) && settled[r] >= settle_rows)
                    .map(|r| scores.residual_z[[r, s]])
                    .filter(|z| z.is_finite()),
            );
            out.resid[[bl, s]] = block_median(&mut buf, need);
            // texture and spikes need the row's regime baseline
            let mut diffs = Vec::new();
            for r in r0.max(1)..r1 {
                let (Some(ga), Some(gb)) = (scores.regime[r - 1], scores.regime[r]) else {
                    continue;
                };
                if ga != gb || !ok(r) || !ok(r - 1) {
                    continue;
                }
                if r + 1 < n && ok(r + 1) && scores.regime[r + 1] == Some(gb) {
                    let d2 = values[[r + 1, s]] - 2.0 * values[[r, s]] + values[[r - 1, s]];
                    diffs.push(match baseline.baseline_for(s, gb) {
                        Some(sb) if !noise_resolved(sb) => dither_excess(d2, sb.resolution),
                        _ => d2,
                    });
                }
                if r + 1 < n
                    && ok(r + 1)
                    && scores.regime[r + 1] == Some(gb)
                    && let Some(sb) = baseline.baseline_for(s, gb)
                    && let Some(rate) = sb.rate_scale
                {
                    let t = spike_factor * rate;
                    let a = values[[r, s]] - values[[r - 1, s]];
                    let c = values[[r, s]] - values[[r + 1, s]];
                    if a.abs() > t && c.abs() > t && a.signum() == c.signum() {
                        out.spikes[[bl, s]] += 1.0;
                    }
                }
            }
            if diffs.len() + 1 >= need {
                let rate = reg.and_then(|g| baseline.baseline_for(s, g)).and_then(|b| b.rate_scale);
                if let Some(rate) = rate
                    && rate > 0.0
                {
                    let sc = diff_scale(&mut diffs);
                    if sc > 0.0 {
                        out.texture[[bl, s]] = (sc / rate).ln();
                    }
                }
            }
        }
        if let Some((t2l, spel)) = pca_limits {
            buf.extend(
                (r0..r1)
                    .filter(|&r| scores.regime[r].is_some_and(|g| g != STOPPED))
                    .map(|r| scores.t2[r] / t2l)
                    .filter(|x| x.is_finite()),
            );
            out.t2_ratio[bl] = block_median(&mut buf, need);
            buf.extend(
                (r0..r1)
                    .filter(|&r| scores.regime[r].is_some_and(|g| g != STOPPED))
                    .map(|r| scores.spe[r] / spel)
                    .filter(|x| x.is_finite()),
            );
            out.spe_ratio[bl] = block_median(&mut buf, need);
        }
    }
    out
}

/// Whether a regime baseline resolves the sensor's noise: its step-to-step
/// scale (`rate_scale`) is above the floor set by the resolution alone
/// (resolution / √12, the spread of rounding). At the floor the readings
/// mostly repeat, and the second differences count how often a slow signal
/// crosses a resolution step or dithers between two (how fast the signal
/// moves, where it sits between two steps), not how noisy the instrument
/// is. In such a regime `texture` counts only [`dither_excess`], in the
/// held-out calibration and in the scan alike.
pub fn noise_resolved(b: &crate::baseline::SensorBaseline) -> bool {
    // the floor `floored_scale` gives differences (centred near 0)
    let floor = match b.resolution {
        Some(q) if q > 0.0 => (q / 12f64.sqrt()).max(1e-9),
        _ => 1e-9,
    };
    b.rate_scale.is_some_and(|rate| rate > floor * (1.0 + 1e-9))
}

/// The part of a second difference `d2` beyond what rounding alone can
/// make: readings dithering between two adjacent steps `q` apart give
/// |d2| ≤ 2q, so `max(|d2| − 2q, 0)`; with no resolution known (the
/// readings repeated exactly), all of |d2|. A reading that should repeat
/// (a stopped machine's current) and starts to scatter shows up; one that
/// only crosses or dithers between steps does not.
pub fn dither_excess(d2: f64, resolution: Option<f64>) -> f64 {
    match resolution {
        Some(q) if q > 0.0 => (d2.abs() - 2.0 * q).max(0.0),
        _ => d2.abs(),
    }
}

/// Trimmed mean of |second differences| (the largest 10 % dropped, so a few
/// spikes do not count as noise); 0 when all are 0. Unlike a median, it
/// moves smoothly on quantised sensors; unlike first differences, it does
/// not grow when a slow signal ramps (a start-up) rather than gets noisier.
fn diff_scale(d: &mut [f64]) -> f64 {
    if d.is_empty() {
        return 0.0;
    }
    let mut a: Vec<f64> = d.iter().map(|x| x.abs()).collect();
    a.sort_by(f64::total_cmp);
    let keep = (a.len() as f64 * 0.9).ceil() as usize;
    let keep = keep.clamp(1, a.len());
    a[..keep].iter().sum::<f64>() / keep as f64
}

/// What kind of row run a [`Streak`] is.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub enum StreakKind {
    /// The sensor has no value while at least half of the asset's other
    /// sensors have one.
    Silent,
    /// The sensor repeats exactly its previous value on running rows.
    Frozen,
}

/// A maximal run of rows of one kind on one sensor.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Streak {
    /// Sensor position.
    pub sensor: usize,
    /// Kind of run.
    pub kind: StreakKind,
    /// First row of the run.
    pub start: usize,
    /// Rows counted in the run (for `Frozen`: running rows with the same value).
    pub len: usize,
    /// Row at which the run ended (exclusive; `n` when still open at the end).
    pub end: usize,
    /// For `Frozen`: the rows counted in the run, in order (stopped and
    /// missing rows in between are not counted); empty for `Silent`, whose
    /// rows are `start..end`.
    pub counted: Vec<usize>,
}

impl Streak {
    /// The row at which the run reached `need` counted rows, if it did.
    pub fn row_reaching(&self, need: usize) -> Option<usize> {
        if need == 0 || need > self.len {
            return None;
        }
        match self.kind {
            StreakKind::Silent => Some(self.start + need - 1),
            StreakKind::Frozen => self.counted.get(need - 1).copied(),
        }
    }
}

fn frozen(sensor: usize, counted: Vec<usize>, end: usize) -> Streak {
    Streak { sensor, kind: StreakKind::Frozen, start: counted[0], len: counted.len(), end, counted }
}

/// Finds every silent and frozen run of at least `min_len` rows.
///
/// *Silent*: rows where the sensor has no value while at least half of the
/// other sensors report (an asset whose sensors are all silent is offline,
/// not faulty). *Frozen*: consecutive readings exactly equal to the previous
/// reading on running rows; stopped rows and missing rows neither extend nor
/// break the run, a different value ends it.
pub fn streaks(
    values: ArrayView2<'_, f64>,
    regime: &[Option<usize>],
    min_len: usize,
) -> Vec<Streak> {
    let (n, p) = values.dim();
    let mut out = Vec::new();
    let others: Vec<usize> =
        (0..n).map(|r| values.row(r).iter().filter(|v| v.is_finite()).count()).collect();
    for s in 0..p {
        // silent
        let mut start = None;
        for r in 0..=n {
            let silent = r < n && !values[[r, s]].is_finite() && p > 1 && 2 * others[r] >= p - 1;
            match (silent, start) {
                (true, None) => start = Some(r),
                (false, Some(st)) => {
                    if r - st >= min_len {
                        out.push(Streak {
                            sensor: s,
                            kind: StreakKind::Silent,
                            start: st,
                            len: r - st,
                            end: r,
                            counted: Vec::new(),
                        });
                    }
                    start = None;
                }
                _ => {}
            }
        }
        // frozen
        let mut prev: Option<f64> = None;
        let mut counted: Vec<usize> = Vec::new();
        for r in 0..n {
            let v = values[[r, s]];
            if !v.is_finite() || regime[r].is_none_or(|g| g == STOPPED) {
                continue;
            }
            if prev == Some(v) {
                counted.push(r);
            } else {
                if counted.len() >= min_len {
                    out.push(frozen(s, std::mem::take(&mut counted), r));
                }
                counted.clear();
            }
            prev = Some(v);
        }
        if counted.len() >= min_len {
            out.push(frozen(s, counted, n));
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::baseline::{ScaleMethod, SensorBaseline};

    fn sb(rate_scale: Option<f64>, resolution: Option<f64>) -> SensorBaseline {
        SensorBaseline {
            n_good: 100,
            location: 17.5,
            scale: 3.7,
            scale_method: ScaleMethod::Mad,
            quantiles: [10.0, 15.0, 17.5, 20.0, 25.0],
            resolution,
            sampling_interval_ms: Some(60_000.0),
            rate_scale,
            phi: Some(0.99),
            long_run_factor: 199.0,
        }
    }

    #[test]
    fn noise_is_resolved_only_above_the_rounding_floor() {
        // rounding to a step q spreads readings uniformly over ±q/2: standard
        // deviation q/√12 (Widrow 1956); a rate scale at that floor means the
        // differences were mostly 0 (the fit fell back to the floor)
        let q = 0.5;
        let floor = q / 12f64.sqrt();
        assert!(!noise_resolved(&sb(Some(floor), Some(q))));
        assert!(!noise_resolved(&sb(Some(floor * (1.0 + 1e-12)), Some(q))));
        assert!(noise_resolved(&sb(Some(floor * 1.01), Some(q))));
        assert!(noise_resolved(&sb(Some(0.74), Some(q))));
        // no resolution known: only the tiny numerical floor
        assert!(!noise_resolved(&sb(Some(1e-9), None)));
        assert!(noise_resolved(&sb(Some(1e-3), None)));
        // no differences at all in the regime
        assert!(!noise_resolved(&sb(None, Some(q))));
    }

    #[test]
    fn dithering_between_two_steps_leaves_no_excess() {
        // readings rounded to 0.5 alternating 17.5, 18.0, 17.5: d2 = -1.0 = -2q,
        // the most rounding alone can give (hand computation)
        let q = Some(0.5);
        assert_eq!(dither_excess(17.5 - 2.0 * 18.0 + 17.5, q), 0.0);
        assert_eq!(dither_excess(18.0 - 2.0 * 17.5 + 17.5, q), 0.0);
        // a scatter of 2.5 units: |d2| = 2.5, excess 2.5 - 1.0 = 1.5
        assert_eq!(dither_excess(1.0 - 2.0 * (-0.5) + 0.5, q), 1.5);
        // no resolution known: every change counts
        assert_eq!(dither_excess(-0.25, None), 0.25);
    }
}
