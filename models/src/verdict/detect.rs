//! Causal detection of episodes on one asset's blocks.
//!
//! Blocks are visited in time order; every decision at block `b` uses only
//! blocks `≤ b` (and rows up to the end of `b`). Channels:
//!
//! | channel     | statistic | alarm | onset | end |
//! |-------------|-----------|-------|-------|-----|
//! | `level` (context sensors, and condition sensors without a regression), `resid` (condition sensors with one) | two-sided tabular CUSUM (Page 1954) on the calibrated `u`, reference `k`, interval `h` from the in-control ARL (Siegmund 1985), at least 1.25 × the held-out maximum | `C > h` | block after the chart's last in-control block | first of `close_blocks` consecutive blocks with `|u| < 1` |
//! | `texture`   | upper CUSUM on `u` of the log texture ratio | `C+ > h` | as above | as above |
//! | `spikes`    | isolated outliers in the trailing `spike_window` blocks vs the calibrated rate (Poisson tail) | `≥ 3` and tail `< 1/ARL0` | first block of the window with a spike | `spike_window` blocks without a spike |
//! | `outside`   | rows outside the instrument range | `≥ max(3, 10 %)` of a block's rows | first such block | `close_blocks` clean blocks |
//! | `silent`    | run of rows without a value while the other sensors report | run ≥ `max(min_streak_rows, 3 × held-out longest)` | first silent row | the sensor reports again |
//! | `frozen`    | run of identical readings on running rows | run ≥ `max(min_streak_rows, 3 × held-out longest)` | first repeated row | a different value |
//! | `occupancy` | time-of-day regime occupancy of the trailing window vs the fit span (total variation) | `> max(0.15, 1.5 × largest in the fit span)` | split maximising `len · distance²` | distance below half the threshold for a window |
//!
//! ARL design: the asset's charts share the false-alarm budget evenly,
//! `ARL0 = charts × 16 800 h / fa_per_100_asset_weeks` (16 800 h = 100
//! asset-weeks), converted to blocks, and never below 1.25 × the largest
//! sum the chart reached on the held-out data. A block value that cannot be judged
//! (sensor flagged outside its range, in a known silent or frozen run, or a
//! context sensor so flagged for the residual channels) is a gap for the
//! chart. A CUSUM episode's p-value is the larger of the union bound
//! `min(1, blocks / ARL0(peak))` over the blocks scanned and the held-out
//! tail ([`ChannelCal::p_value`](super::ChannelCal::p_value)); the multipliers
//! (3 ×, 1.5 ×, 10 %, 0.15) are common practice, no source.

use super::VerdictParams;
use super::calibrate::{Calibration, ChannelCal, day_bin, profile_distance};
use super::features::{Blocks, Streak, StreakKind};
use crate::ParamGuard;
use crate::baseline::{AssetBaseline, SensorRole};
use crate::changepoint::{Cusum, Side};
use crate::changepoint::{design_threshold, two_sided_arl};

/// What an episode was detected on.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub enum Channel {
    /// Block median robust z against the regime baseline (channel A).
    Level,
    /// Block median regression residual (channel B).
    Resid,
    /// Spread of first differences (channel A, texture).
    Texture,
    /// Isolated outliers.
    Spikes,
    /// Readings outside the instrument range (channel E).
    Outside,
    /// No readings while the asset reports (channel E).
    Silent,
    /// Identical readings while running.
    Frozen,
    /// Regime occupancy (channel D).
    Occupancy,
}

impl Channel {
    /// Name used in evidence.
    pub fn as_str(self) -> &'static str {
        match self {
            Channel::Level => "level_cusum",
            Channel::Resid => "residual_cusum",
            Channel::Texture => "texture_cusum",
            Channel::Spikes => "spike_count",
            Channel::Outside => "outside_range",
            Channel::Silent => "silent_run",
            Channel::Frozen => "frozen_run",
            Channel::Occupancy => "regime_occupancy",
        }
    }
    /// Whether the channel is a signature of the instrument itself.
    pub fn is_signature(self) -> bool {
        matches!(self, Channel::Spikes | Channel::Outside | Channel::Silent | Channel::Frozen)
    }
}

/// One detected episode on one channel.
#[derive(Debug, Clone, PartialEq)]
pub struct Episode {
    /// Sensor position (`None` for asset-level channels).
    pub sensor: Option<usize>,
    /// Channel.
    pub channel: Channel,
    /// +1 up, -1 down, 0 no direction.
    pub side: f64,
    /// Onset block.
    pub onset_block: usize,
    /// Onset time, epoch ms (row-exact for streaks).
    pub onset_ms: i64,
    /// Block of the alarm.
    pub detected_block: usize,
    /// Last block of the episode (`None`: open at the end of the data).
    pub end_block: Option<usize>,
    /// Statistic at the alarm (CUSUM sum, count, run length, distance).
    pub statistic: f64,
    /// Threshold it crossed.
    pub threshold: f64,
    /// Largest statistic over the episode.
    pub peak: f64,
    /// p-value (see the module docs).
    pub p_value: f64,
    /// Size: largest |block value − held-out center| in the channel's own units
    /// (robust σ for level, residual σ for resid, ×-ratio for texture, rows for streaks).
    pub magnitude: f64,
}

impl Episode {
    /// Blocks `[onset, end]` inclusive, `end` = `last` when open.
    pub fn span(&self, last: usize) -> (usize, usize) {
        (self.onset_block, self.end_block.unwrap_or(last))
    }
}

/// Number of CUSUM charts an asset runs (for the ARL budget).
pub fn chart_count(baseline: &AssetBaseline, cal: &Calibration) -> usize {
    let n: usize = (0..baseline.sensors.len())
        .map(|s| {
            let c = &cal.sensors[s];
            let resid = c.resid.is_some() && baseline.regressions[s].is_some();
            usize::from(c.level.is_some() && !resid)
                + usize::from(resid)
                + usize::from(c.texture.is_some())
        })
        .sum();
    n.max(1) + 2 // spikes and occupancy share the budget too
}

/// In-control ARL per chart, in blocks.
pub fn arl0_blocks(p: &VerdictParams, charts: usize, block_ms: i64) -> f64 {
    let hours = 16_800.0 / p.fa_per_100_asset_weeks * charts as f64;
    hours * 3_600_000.0 / block_ms as f64
}

struct Chart {
    cal: ChannelCal,
    cusum: Cusum,
    open: Option<usize>, // index into episodes
    quiet: usize,
    upper_only: bool,
}

fn poisson_sf(c: f64, lambda: f64) -> f64 {
    // P(X >= c), X ~ Poisson(lambda), by summing the lower tail
    if c <= 0.0 {
        return 1.0;
    }
    let mut term = (-lambda).exp();
    let mut cdf = 0.0;
    let mut k = 0.0;
    while k < c {
        cdf += term;
        k += 1.0;
        term *= lambda / k;
    }
    (1.0 - cdf).max(term * 0.0 + f64::MIN_POSITIVE)
}

/// Detects every episode of one asset; see the [module docs](self).
///
/// `streaks` come from [`streaks`](super::features::streaks) over the same
/// rows (row 0 = start of block 0).
#[expect(clippy::needless_range_loop, reason = "blocks and sensors index several arrays at once")]
pub fn detect(
    baseline: &AssetBaseline,
    cal: &Calibration,
    blocks: &Blocks,
    streaks: &[Streak],
    p: &VerdictParams,
) -> Vec<Episode> {
    let nb = blocks.len();
    let ns = baseline.sensors.len();
    let rpb = blocks.rows_per_block;
    let charts = chart_count(baseline, cal);
    let arl0 = arl0_blocks(p, charts, blocks.block_ms);
    let h = design_threshold(p.cusum_k, arl0).unwrap_or(10.0);
    let mut eps: Vec<Episode> = Vec::new();
    let p_of = |peak: f64| (nb as f64 / two_sided_arl(p.cusum_k, peak, 0.0)).min(1.0);

    // streak episodes and, per block, which sensors are known-bad
    let mut known_bad = vec![vec![false; ns]; nb];
    // (sensor, kind, start, end, need, row at which the first run reached need)
    let mut streak_eps: Vec<(usize, StreakKind, usize, usize, usize, usize)> = Vec::new();
    for st in streaks {
        let c = &cal.sensors[st.sensor];
        let held = match st.kind {
            StreakKind::Silent => c.max_silent_rows,
            StreakKind::Frozen => c.max_frozen_rows,
        };
        let need = p.min_streak_rows.max(3 * held);
        // merge with the previous qualifying run of the same kind when close
        if let Some(last) = streak_eps.last_mut()
            && last.0 == st.sensor
            && last.1 == st.kind
            && st.start <= last.3 + p.close_blocks * rpb
        {
            last.3 = st.end;
            continue;
        }
        let Some(cross_row) = st.row_reaching(need) else { continue };
        streak_eps.push((st.sensor, st.kind, st.start, st.end, need, cross_row));
    }
    for &(s, kind, start, end, need, cross_row) in &streak_eps {
        let det = (cross_row / rpb).min(nb.saturating_sub(1));
        let end_block = end.div_ceil(rpb).saturating_sub(1);
        for kb in known_bad.iter_mut().take((end_block + 1).min(nb)).skip(det) {
            kb[s] = true;
        }
        let len = (end - start) as f64;
        let q: f64 = 0.5; // chance a row continues the run under the null, taken generously
        let p_value = (nb as f64 * rpb as f64 * q.powf(need as f64)).min(1.0);
        eps.push(Episode {
            sensor: Some(s),
            channel: if kind == StreakKind::Silent { Channel::Silent } else { Channel::Frozen },
            side: 0.0,
            onset_block: start / rpb,
            onset_ms: blocks.origin_ms + start as i64 * baseline.step_ms,
            detected_block: det,
            end_block: (end < nb * rpb).then_some(end_block),
            statistic: need as f64,
            threshold: need as f64,
            peak: len,
            p_value,
            magnitude: len,
        });
    }

    // outside-range episodes
    for s in 0..ns {
        let mut open: Option<usize> = None;
        let mut clean = 0usize;
        for b in 0..nb {
            let out = blocks.outside[[b, s]];
            let flag = out >= 3.0f64.max(0.1 * blocks.filled[[b, s]]);
            if out > 0.0 {
                known_bad[b][s] = true;
            }
            match open {
                None if flag => {
                    open = Some(eps.len());
                    clean = 0;
                    eps.push(Episode {
                        sensor: Some(s),
                        channel: Channel::Outside,
                        side: 0.0,
                        onset_block: b,
                        onset_ms: blocks.start_ms(b),
                        detected_block: b,
                        end_block: None,
                        statistic: out,
                        threshold: 3.0f64.max(0.1 * blocks.filled[[b, s]]),
                        peak: out,
                        p_value: 0.0,
                        magnitude: out,
                    });
                }
                Some(i) => {
                    if out > 0.0 {
                        clean = 0;
                        eps[i].peak = eps[i].peak.max(out);
                        eps[i].magnitude += out;
                    } else {
                        clean += 1;
                        if clean >= p.close_blocks {
                            eps[i].end_block = Some(b + 1 - clean);
                            open = None;
                        }
                    }
                }
                None => {}
            }
        }
    }

    // context sensors flagged: residual channels cannot be trusted
    let ctx: Vec<usize> =
        (0..ns).filter(|&s| baseline.sensors[s].role == SensorRole::Context).collect();
    let ctx_bad: Vec<bool> = (0..nb).map(|b| ctx.iter().any(|&s| known_bad[b][s])).collect();

    // CUSUM charts
    let mk = |cal: ChannelCal, upper_only: bool| -> Option<Chart> {
        let hh = h.max(1.25 * cal.max_cusum);
        let params = Cusum::params(0.0, 1.0)
            .drift(p.cusum_k)
            .threshold(hh)
            .reset_after_alarm(false)
            .check()
            .ok()?;
        Some(Chart { cal, cusum: Cusum::new(params), open: None, quiet: 0, upper_only })
    };
    let mut charts_v: Vec<(usize, Channel, Chart)> = Vec::new();
    for s in 0..ns {
        let c = &cal.sensors[s];
        // a condition sensor with a context regression is judged on its
        // residual: its own level follows the operating point and the weather
        let judged_on_residual = baseline.regressions[s].is_some() && c.resid.is_some();
        if !judged_on_residual
            && let Some(cc) = c.level
            && let Some(ch) = mk(cc, false)
        {
            charts_v.push((s, Channel::Level, ch));
        }
        if baseline.regressions[s].is_some()
            && let Some(cc) = c.resid
            && let Some(ch) = mk(cc, false)
        {
            charts_v.push((s, Channel::Resid, ch));
        }
        if let Some(cc) = c.texture
            && let Some(ch) = mk(cc, true)
        {
            charts_v.push((s, Channel::Texture, ch));
        }
    }
    for b in 0..nb {
        for (s, channel, chart) in charts_v.iter_mut() {
            let s = *s;
            let x = match channel {
                Channel::Level => blocks.level[[b, s]],
                Channel::Resid => blocks.resid[[b, s]],
                _ => blocks.texture[[b, s]],
            };
            let bad = known_bad[b][s] || (*channel == Channel::Resid && ctx_bad[b]);
            let u = if bad { f64::NAN } else { chart.cal.u(x) };
            let alarm = chart.cusum.update(u);
            if let Some(i) = chart.open {
                let e = &mut eps[i];
                if u.is_finite() {
                    let stat = chart.cusum.upper().max(chart.cusum.lower());
                    e.peak = e.peak.max(stat);
                    e.magnitude = e.magnitude.max((x - chart.cal.center).abs());
                    if u.abs() < 1.0 {
                        chart.quiet += 1;
                    } else {
                        chart.quiet = 0;
                    }
                    if chart.quiet >= p.close_blocks {
                        e.end_block = Some(b + 1 - chart.quiet);
                        e.p_value = p_of(e.peak).max(chart.cal.p_value(e.peak, nb, p.cusum_k));
                        chart.open = None;
                        chart.quiet = 0;
                        chart.cusum.reset();
                    }
                }
                continue;
            }
            let Some(a) = alarm else { continue };
            if chart.upper_only && a.side == Side::Lower {
                chart.cusum.reset();
                continue;
            }
            let onset = a.last_in_control.map_or(0, |i| i + 1).min(b);
            chart.open = Some(eps.len());
            chart.quiet = 0;
            let side = if a.side == Side::Upper { 1.0 } else { -1.0 };
            let mag = (onset..=b)
                .map(|k| match channel {
                    Channel::Level => blocks.level[[k, s]],
                    Channel::Resid => blocks.resid[[k, s]],
                    _ => blocks.texture[[k, s]],
                })
                .filter(|v| v.is_finite())
                .map(|v| (v - chart.cal.center).abs())
                .fold(0.0, f64::max);
            eps.push(Episode {
                sensor: Some(s),
                channel: *channel,
                side,
                onset_block: onset,
                onset_ms: blocks.start_ms(onset),
                detected_block: b,
                end_block: None,
                statistic: a.statistic,
                threshold: chart.cusum.parameters().threshold(),
                peak: a.statistic,
                p_value: p_of(a.statistic).max(chart.cal.p_value(a.statistic, nb, p.cusum_k)),
                magnitude: mag,
            });
        }
    }
    for (_, _, chart) in &charts_v {
        if let Some(i) = chart.open {
            eps[i].p_value = p_of(eps[i].peak).max(chart.cal.p_value(eps[i].peak, nb, p.cusum_k));
        }
    }

    // spikes
    let w = p.spike_window;
    for s in 0..ns {
        let lambda = cal.sensors[s].spike_rate.max(1.0 / 168.0) * w as f64;
        let mut open: Option<usize> = None;
        let mut since = 0usize;
        for b in 0..nb {
            let lo = (b + 1).saturating_sub(w);
            let c: f64 = (lo..=b).map(|k| blocks.spikes[[k, s]]).sum();
            let tail = poisson_sf(c, lambda);
            match open {
                None => {
                    if c >= 3.0 && tail < 1.0 / arl0 {
                        let first = (lo..=b).find(|&k| blocks.spikes[[k, s]] > 0.0).unwrap_or(b);
                        open = Some(eps.len());
                        since = 0;
                        eps.push(Episode {
                            sensor: Some(s),
                            channel: Channel::Spikes,
                            side: 1.0,
                            onset_block: first,
                            onset_ms: blocks.start_ms(first),
                            detected_block: b,
                            end_block: None,
                            statistic: c,
                            threshold: 3.0,
                            peak: c,
                            p_value: (tail * nb as f64).min(1.0),
                            magnitude: c / w as f64,
                        });
                    }
                }
                Some(i) => {
                    eps[i].peak = eps[i].peak.max(c);
                    eps[i].magnitude = eps[i].magnitude.max(c / w as f64);
                    if blocks.spikes[[b, s]] > 0.0 {
                        since = 0;
                    } else {
                        since += 1;
                        if since >= w {
                            eps[i].end_block = Some(b + 1 - since);
                            open = None;
                        }
                    }
                }
            }
        }
    }

    // regime occupancy
    if let Some(oc) = &cal.occupancy {
        let g = oc.regimes.min(blocks.regime_rows.ncols());
        let bins = oc.bins;
        let win = oc.window_blocks;
        let thr = 0.15f64.max(1.5 * oc.max_fit_distance);
        let counts_of = |k: usize| -> Vec<f64> {
            let mut v = vec![0.0; bins * oc.regimes];
            let bin = day_bin(blocks.start_ms(k), bins);
            for r in 0..g {
                v[bin * oc.regimes + r] += blocks.regime_rows[[k, r]];
            }
            v
        };
        let mut open: Option<usize> = None;
        let mut calm = 0usize;
        for b in 0..nb {
            if b + 1 < win {
                continue;
            }
            let mut acc = vec![0.0; bins * oc.regimes];
            for k in b + 1 - win..=b {
                for (a, c) in acc.iter_mut().zip(counts_of(k)) {
                    *a += c;
                }
            }
            let d = profile_distance(&acc, &oc.profile, bins, oc.regimes);
            if !d.is_finite() {
                continue;
            }
            match open {
                None if d > thr => {
                    // onset: the split of the window that best explains the departure
                    let mut best = (b + 1 - win, 0.0);
                    let mut tail = vec![0.0; bins * oc.regimes];
                    for k in (b + 1 - win..=b).rev() {
                        for (a, c) in tail.iter_mut().zip(counts_of(k)) {
                            *a += c;
                        }
                        let len = (b + 1 - k) as f64;
                        let dk = profile_distance(&tail, &oc.profile, bins, oc.regimes);
                        if dk.is_finite() && len >= 6.0 && len * dk * dk > best.1 {
                            best = (k, len * dk * dk);
                        }
                    }
                    open = Some(eps.len());
                    calm = 0;
                    eps.push(Episode {
                        sensor: None,
                        channel: Channel::Occupancy,
                        side: 0.0,
                        onset_block: best.0,
                        onset_ms: blocks.start_ms(best.0),
                        detected_block: b,
                        end_block: None,
                        statistic: d,
                        threshold: thr,
                        peak: d,
                        p_value: (1.0 / arl0 * nb as f64).min(1.0) * (thr / d).powi(2),
                        magnitude: d,
                    });
                }
                Some(i) => {
                    eps[i].peak = eps[i].peak.max(d);
                    eps[i].magnitude = eps[i].peak;
                    if d < thr / 2.0 {
                        calm += 1;
                        if calm >= win {
                            eps[i].end_block = Some(b + 1 - calm);
                            open = None;
                        }
                    } else {
                        calm = 0;
                    }
                }
                None => {}
            }
        }
    }
    eps.sort_by_key(|e| (e.detected_block, e.sensor, e.channel));
    eps
}

/// The calibrated `u` of a channel at block `b` (NaN when not available).
pub fn block_u(blocks: &Blocks, cal: &Calibration, s: usize, channel: Channel, b: usize) -> f64 {
    let c = &cal.sensors[s];
    match channel {
        Channel::Level => c.level.map_or(f64::NAN, |cc| cc.u(blocks.level[[b, s]])),
        Channel::Resid => c.resid.map_or(f64::NAN, |cc| cc.u(blocks.resid[[b, s]])),
        Channel::Texture => c.texture.map_or(f64::NAN, |cc| cc.u(blocks.texture[[b, s]])),
        _ => f64::NAN,
    }
}

/// Sustained size of an episode: the median over its blocks `[onset, end]`
/// of `side · (x − center)`, in the channel's own units (robust σ of the
/// baseline for level, residual σ for resid, log ratio for texture). NaN
/// for channels without block values.
pub fn sustained(blocks: &Blocks, cal: &Calibration, e: &Episode, last: usize) -> f64 {
    let Some(s) = e.sensor else { return f64::NAN };
    let c = &cal.sensors[s];
    let (arr, cc) = match e.channel {
        Channel::Level => (&blocks.level, c.level),
        Channel::Resid => (&blocks.resid, c.resid),
        Channel::Texture => (&blocks.texture, c.texture),
        _ => return f64::NAN,
    };
    let Some(cc) = cc else { return f64::NAN };
    let (a, b) = e.span(last);
    let mut v: Vec<f64> = (a..=b.min(blocks.len().saturating_sub(1)))
        .map(|k| e.side * (arr[[k, s]] - cc.center))
        .filter(|x| x.is_finite())
        .collect();
    crate::robust::median_in_place(&mut v).unwrap_or(f64::NAN)
}
