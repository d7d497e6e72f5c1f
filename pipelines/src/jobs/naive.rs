//! A deliberately naive comparison detector, for benchmarking the verdict
//! engine against: a robust z-score of hourly medians against the fit
//! period, and every finding called a sensor bias.
//!
//! It is a yardstick, not a product verb: it ignores operating context,
//! peers, sites, regimes and related sensors, so every process change and
//! every equipment fault it catches is mislabelled `sensor_fault/bias`, and
//! every load swing larger than the fit period's spread is a false alarm.
//! Like everything in telltale it is decision support, not a protective or
//! safety function.
//!
//! ```text
//!  history [min(fit_from, from), to) ─► for_each_asset ─► per sensor:
//!    good readings ─► UTC hour buckets ─► hourly medians h_k
//!    fit hours [fit_from, fit_until):   M = median(h),  S = 1.4826·MAD(h)
//!    scan hours [min(from, fit_until), to):   z_k = (h_k − M) / S
//!    |z| > threshold for `min_hours` consecutive clock hours ─► episode
//!      onset    = start of the run's first hour
//!      detected = end of the hour in which the run reached `min_hours`
//!      end      = start of the first later hour with |z| ≤ threshold
//!    one Suspicion per episode detected in [from, to)
//! ```
//!
//! Hours without a usable reading break a run that has not yet become an
//! episode (the hours must be consecutive on the clock) but do not end an
//! episode: only an hour back within the threshold does. Hours between
//! `fit_until` and `from` are evaluated too, as warm-up, so that an episode
//! in progress at `from` keeps its real onset and is not reported again.
//!
//! A sensor is skipped (logged at debug level) when the fit span gives fewer
//! than [`NaiveSettings::min_fit_hours`] hourly medians or a zero spread,
//! since its z-score is undefined: constant or heavily quantised signals, and
//! signals that read exactly the same value at rest on a machine stopped in
//! more than half of the fit hours.
//!
//! Score: `1 − 2·Φ(−|z_peak|)`, the two-sided normal confidence of the peak
//! hour, with no correction for the many hours and sensors tested.
//! Magnitude: `|z_peak|`, in robust sigmas of the fit period's hourly medians.

use crate::error::{Error, Result};
use crate::io::{AssetHistory, HistoryReader, SensorSeries};
use crate::record::{Class, Evidence, Mode, Suspicion, suspicion_id};
use crate::registry::Registry;
use crate::time::{format_time, from_millis};
use rayon::prelude::*;
use std::path::PathBuf;
use std::time::Instant;
use telltale_models::dist::norm_sf;
use telltale_models::robust::median_mad_with_scratch;
use telltale_models::robust::median_with_scratch;

/// One hour in epoch milliseconds.
const HOUR_MS: i64 = 3_600_000;

/// Settings of one naive scan; build with [`NaiveSettings::new`] and set the
/// public fields.
#[derive(Debug, Clone)]
#[non_exhaustive]
pub struct NaiveSettings {
    /// History file or directory (DESIGN.md 4.1).
    pub history: PathBuf,
    /// Optional fleet registry (4.2); used only for units in the summaries.
    pub registry: Option<PathBuf>,
    /// Start of the fit span, epoch ms, inclusive.
    pub fit_from_ms: i64,
    /// End of the fit span, epoch ms, exclusive.
    pub fit_until_ms: i64,
    /// Start of the scan span, epoch ms, inclusive.
    pub from_ms: i64,
    /// End of the scan span, epoch ms, exclusive.
    pub to_ms: i64,
    /// |z| above which an hour counts as abnormal. Default 3.5, the usual
    /// cut-off for robust (modified) z-scores (common practice, no source).
    pub threshold: f64,
    /// Consecutive abnormal hours that make an episode. Default 3 (common
    /// practice, no source).
    pub min_hours: usize,
    /// Fewest hourly medians in the fit span for a sensor to be scanned.
    /// Default 24, one day (common practice, no source).
    pub min_fit_hours: usize,
    /// Threads scanning assets in parallel (`0`: the available cores).
    pub threads: usize,
    /// Skip unreadable history files instead of failing.
    pub skip_bad_files: bool,
}

impl NaiveSettings {
    /// Settings with the default threshold (3.5), run length (3 h), minimum
    /// fit hours (24), no registry, threads = available cores. Times are epoch
    /// milliseconds: fit span `[fit_from_ms, fit_until_ms)`, scan span
    /// `[from_ms, to_ms)`.
    pub fn new(
        history: impl Into<PathBuf>,
        fit_from_ms: i64,
        fit_until_ms: i64,
        from_ms: i64,
        to_ms: i64,
    ) -> Self {
        NaiveSettings {
            history: history.into(),
            registry: None,
            fit_from_ms,
            fit_until_ms,
            from_ms,
            to_ms,
            threshold: 3.5,
            min_hours: 3,
            min_fit_hours: 24,
            threads: 0,
            skip_bad_files: false,
        }
    }

    fn threads(&self) -> usize {
        if self.threads > 0 {
            self.threads
        } else {
            std::thread::available_parallelism().map_or(1, usize::from)
        }
    }

    /// Start of the evaluated hours: `from`, or earlier to warm up from the fit span's end.
    fn eval_start(&self) -> i64 {
        self.from_ms.min(self.fit_until_ms)
    }

    fn check(&self) -> Result<()> {
        let bad = |m: String| Err(Error::bad_input(&self.history, m));
        let t = |ms: i64| format_time(from_millis(ms));
        if self.fit_from_ms >= self.fit_until_ms {
            return bad(format!(
                "empty fit span: fit-from {} is not before fit-until {}; --fit-from must be \
                 earlier than --fit-until",
                t(self.fit_from_ms),
                t(self.fit_until_ms)
            ));
        }
        if self.from_ms >= self.to_ms {
            return bad(format!(
                "empty scan span: from {} is not before to {}; --from must be earlier than --to",
                t(self.from_ms),
                t(self.to_ms)
            ));
        }
        if !(self.threshold.is_finite() && self.threshold > 0.0) {
            return bad(format!(
                "z threshold {} must be a positive number (default 3.5)",
                self.threshold
            ));
        }
        if self.min_hours == 0 {
            return bad("minimum run length must be at least 1 hour (default 3)".to_owned());
        }
        Ok(())
    }
}

/// The median of the usable readings of one UTC hour.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Hourly {
    /// Start of the hour, epoch ms (a multiple of one hour).
    start_ms: i64,
    /// Median of the hour's good, non-missing readings.
    median: f64,
}

/// Hourly medians of the usable readings of `s` with `from_ms <= ts < until_ms`,
/// in time order; hours without a usable reading are left out.
fn hourly_medians(
    s: &SensorSeries,
    from_ms: i64,
    until_ms: i64,
    scratch: &mut Vec<f64>,
) -> Vec<Hourly> {
    let lo = s.ts_ms.partition_point(|&t| t < from_ms);
    let hi = s.ts_ms.partition_point(|&t| t < until_ms).max(lo);
    let mut out = Vec::new();
    let mut bucket: Vec<f64> = Vec::new();
    let mut current: Option<i64> = None;
    let mut close = |hour: Option<i64>, bucket: &mut Vec<f64>, out: &mut Vec<Hourly>| {
        if let Some(h) = hour
            && let Some(m) = median_with_scratch(bucket, scratch)
        {
            out.push(Hourly { start_ms: h * HOUR_MS, median: m });
        }
        bucket.clear();
    };
    for i in lo..hi {
        let hour = s.ts_ms[i].div_euclid(HOUR_MS);
        if current != Some(hour) {
            close(current, &mut bucket, &mut out);
            current = Some(hour);
        }
        if s.is_usable(i) {
            bucket.push(s.value[i]);
        }
    }
    close(current, &mut bucket, &mut out);
    out
}

/// The reference of one sensor: median `M` and normal-consistent MAD `S` of
/// the fit span's hourly medians, and how many there were.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Reference {
    median: f64,
    sigma: f64,
    hours: usize,
}

/// `None` when fewer than `min_hours` medians or a zero/undefined spread.
fn reference(fit: &[Hourly], min_hours: usize, scratch: &mut Vec<f64>) -> Option<Reference> {
    if fit.len() < min_hours.max(1) {
        return None;
    }
    let medians: Vec<f64> = fit.iter().map(|h| h.median).collect();
    let mm = median_mad_with_scratch(&medians, scratch)?;
    let sigma = mm.mad();
    (sigma.is_finite() && sigma > 0.0).then_some(Reference {
        median: mm.median,
        sigma,
        hours: fit.len(),
    })
}

/// One run of abnormal hours that lasted at least `min_hours`.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Episode {
    /// Start of the run's first hour (not before the evaluated span's start).
    onset_ms: i64,
    /// End of the hour in which the run reached `min_hours`.
    detected_ms: i64,
    /// Signed z of the hour with the largest |z| in the episode.
    peak_z: f64,
    /// Start of that hour.
    peak_ms: i64,
    /// Abnormal hours in the episode.
    hours: usize,
    /// Start of the hour that ended it (`None`: still open at the end of the data).
    end_ms: Option<i64>,
}

/// Episodes of `|z| > threshold` over `hours` (time order); see the [module docs](self).
fn episodes(
    hours: &[Hourly],
    r: &Reference,
    threshold: f64,
    min_hours: usize,
    eval_start_ms: i64,
) -> Vec<Episode> {
    let mut out = Vec::new();
    // a run of abnormal hours: (first hour start, length, peak z, peak hour, previous hour start)
    let mut run: Option<(i64, usize, f64, i64, i64)> = None;
    let mut open: Option<Episode> = None;
    for h in hours {
        let z = (h.median - r.median) / r.sigma;
        let abnormal = z.abs() > threshold;
        if let Some(ep) = open.as_mut() {
            if abnormal {
                ep.hours += 1;
                if z.abs() > ep.peak_z.abs() {
                    ep.peak_z = z;
                    ep.peak_ms = h.start_ms;
                }
            } else {
                ep.end_ms = Some(h.start_ms);
                out.push(*ep);
                open = None;
            }
            continue;
        }
        if !abnormal {
            run = None;
            continue;
        }
        let next = match run {
            Some((first, len, peak, peak_ms, prev)) if prev + HOUR_MS == h.start_ms => {
                if z.abs() > peak.abs() {
                    (first, len + 1, z, h.start_ms, h.start_ms)
                } else {
                    (first, len + 1, peak, peak_ms, h.start_ms)
                }
            }
            // no run, or a gap in the hours: start afresh
            _ => (h.start_ms, 1, z, h.start_ms, h.start_ms),
        };
        if next.1 >= min_hours {
            open = Some(Episode {
                onset_ms: next.0.max(eval_start_ms),
                detected_ms: h.start_ms + HOUR_MS,
                peak_z: next.2,
                peak_ms: next.3,
                hours: next.1,
                end_ms: None,
            });
            run = None;
        } else {
            run = Some(next);
        }
    }
    out.extend(open);
    out
}

/// `1 − 2·Φ(−|z|)` clipped to `[0, 1]`, with `2·Φ(−|z|)` as the p-value.
fn score_of(z: f64) -> (f64, f64) {
    let p = (2.0 * norm_sf(z.abs())).clamp(0.0, 1.0);
    ((1.0 - p).clamp(0.0, 1.0), p)
}

/// Context shared by every asset of one run.
struct Ctx<'a> {
    settings: &'a NaiveSettings,
    registry: Option<&'a Registry>,
}

impl Ctx<'_> {
    fn unit(&self, asset: &str, sensor: &str) -> Option<&str> {
        let reg = self.registry?;
        let group = reg.groups.get(&reg.asset(asset)?.group)?;
        group.sensors.iter().find(|s| s.id == sensor)?.unit.as_deref()
    }
}

/// Suspicions of one asset, ranks unset (0), and the number of sensors skipped.
fn scan_asset(ctx: &Ctx<'_>, h: &AssetHistory) -> (Vec<Suspicion>, usize) {
    let st = ctx.settings;
    let eval_start = st.eval_start();
    let mut scratch = Vec::new();
    let mut out = Vec::new();
    let mut skipped = 0;
    for s in &h.sensors {
        let fit = hourly_medians(s, st.fit_from_ms, st.fit_until_ms, &mut scratch);
        let Some(r) = reference(&fit, st.min_fit_hours, &mut scratch) else {
            tracing::debug!(
                asset = %h.asset,
                sensor = %s.sensor,
                fit_hours = fit.len(),
                "naive scan skips the sensor: too few fit hours or zero spread"
            );
            skipped += 1;
            continue;
        };
        let scan = hourly_medians(s, eval_start, st.to_ms, &mut scratch);
        for ep in episodes(&scan, &r, st.threshold, st.min_hours, eval_start) {
            if !(st.from_ms..st.to_ms).contains(&ep.detected_ms) {
                continue;
            }
            out.push(suspicion(ctx, &h.asset, &s.sensor, &r, &ep));
        }
    }
    (out, skipped)
}

fn suspicion(ctx: &Ctx<'_>, asset: &str, sensor: &str, r: &Reference, ep: &Episode) -> Suspicion {
    let st = ctx.settings;
    let unit = ctx.unit(asset, sensor).map(|u| format!(" {u}")).unwrap_or_default();
    let onset = from_millis(ep.onset_ms);
    let (score, p) = score_of(ep.peak_z);
    let magnitude = ep.peak_z.abs();
    let direction = if ep.peak_z > 0.0 { "above" } else { "below" };
    let lasting = match ep.end_ms {
        Some(end) => format!("until {}", format_time(from_millis(end))),
        None => "and still at the end of the data".to_owned(),
    };
    let summary = format!(
        "{sensor} on {asset} reads {magnitude:.1} robust sigma {direction} its fit-period \
         hourly median from {} ({} abnormal hours {lasting}); check the instrument for an offset.",
        format_time(onset),
        ep.hours,
    );
    let detail = format!(
        "peak hour {} of {ep_hours} hours with |z| > {thr}; z = (hourly median - M) / S against \
         the fit span {}..{}: M = {m:.6}{unit}, S = {s:.6}{unit} (normal-consistent MAD of {n} \
         hourly medians); p-value is the two-sided normal tail of the peak hour, not corrected \
         for multiple hours or sensors; naive rule: every finding is called a sensor bias",
        format_time(from_millis(ep.peak_ms)),
        format_time(from_millis(st.fit_from_ms)),
        format_time(from_millis(st.fit_until_ms)),
        ep_hours = ep.hours,
        thr = st.threshold,
        m = r.median,
        s = r.sigma,
        n = r.hours,
    );
    Suspicion {
        id: suspicion_id(asset, Some(sensor), Class::SensorFault, Mode::Bias, onset),
        rank: 0,
        asset: asset.to_owned(),
        sensor: Some(sensor.to_owned()),
        class: Class::SensorFault,
        mode: Mode::Bias,
        score,
        magnitude,
        onset,
        detected: from_millis(ep.detected_ms),
        summary,
        evidence: vec![Evidence {
            test: "hourly_robust_z".to_owned(),
            statistic: ep.peak_z,
            threshold: st.threshold,
            p_value: Some(p),
            detail,
        }],
    }
}

/// Sorts by score (descending), then asset, sensor and onset, and numbers the ranks from 1.
fn rank(items: &mut [Suspicion]) {
    items.sort_by(|a, b| {
        b.score
            .total_cmp(&a.score)
            .then_with(|| a.asset.cmp(&b.asset))
            .then_with(|| a.sensor.cmp(&b.sensor))
            .then_with(|| a.onset.cmp(&b.onset))
    });
    for (i, s) in items.iter_mut().enumerate() {
        s.rank = u32::try_from(i + 1).unwrap_or(u32::MAX);
    }
}

/// Runs the naive scan; see the [module docs](self). Returns the suspicions ranked.
///
/// # Errors
/// [`Error::BadInput`] for an empty fit or scan span, a bad threshold or run
/// length, an unreadable registry or history (naming the file); read errors
/// of the history as [`HistoryReader::for_each_asset`] gives them.
pub fn run_naive(settings: &NaiveSettings) -> Result<Vec<Suspicion>> {
    let started = Instant::now();
    settings.check()?;
    let registry = settings.registry.as_ref().map(Registry::load).transpose()?;
    let ctx = Ctx { settings, registry: registry.as_ref() };
    let reader = HistoryReader::try_new(&settings.history)?
        .with_time_range(settings.fit_from_ms.min(settings.from_ms), settings.to_ms)
        .with_skip_bad_files(settings.skip_bad_files);
    let threads = settings.threads();
    let pool = if threads > 1 {
        Some(
            rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .thread_name(|i| format!("telltale-naive-{i}"))
                .build()
                .map_err(|e| Error::io(&settings.history, std::io::Error::other(e)))?,
        )
    } else {
        None
    };
    let batch_cap = 2 * threads;
    let mut batch: Vec<AssetHistory> = Vec::with_capacity(batch_cap);
    let mut found: Vec<Suspicion> = Vec::new();
    let mut skipped = 0;
    let mut flush = |batch: &mut Vec<AssetHistory>| {
        let per_asset: Vec<(Vec<Suspicion>, usize)> = match pool.as_ref() {
            Some(pool) => pool.install(|| batch.par_iter().map(|h| scan_asset(&ctx, h)).collect()),
            None => batch.iter().map(|h| scan_asset(&ctx, h)).collect(),
        };
        for (items, n) in per_asset {
            found.extend(items);
            skipped += n;
        }
        batch.clear();
    };
    let summary = reader.for_each_asset(|history| {
        batch.push(history);
        if batch.len() >= batch_cap {
            flush(&mut batch);
        }
        Ok::<(), Error>(())
    })?;
    flush(&mut batch);
    rank(&mut found);
    tracing::info!(
        assets = summary.assets.len(),
        rows = summary.rows_in_range,
        sensors_skipped = skipped,
        suspicions = found.len(),
        seconds = format!("{:.2}", started.elapsed().as_secs_f64()),
        "naive scan done"
    );
    Ok(found)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::io::{HistoryWriter, HistoryWriterOptions};

    fn assert_close(a: f64, b: f64, eps: f64) {
        assert!((a - b).abs() <= eps, "{a} differs from {b} by more than {eps}");
    }

    /// 2026-03-02T00:00:00Z, a whole UTC hour.
    const T0: i64 = 1_772_409_600_000;
    const MIN_MS: i64 = 60_000;

    fn series(ts: &[i64], v: &[f64], good: &[bool]) -> SensorSeries {
        SensorSeries {
            sensor: "x".into(),
            ts_ms: ts.to_vec(),
            value: v.to_vec(),
            good: good.to_vec(),
        }
    }

    #[test]
    fn hand_computed_reference_and_z() {
        // Hand computation. Readings of five UTC hours:
        //   h0: 9, 10, 50 -> 10    h1: 12 -> 12    h2: 11, 11 -> 11
        //   h3: 14, 16 -> 15       h4: 9, NaN (missing), 100 (bad quality) -> 9
        // M = median(10, 12, 11, 15, 9) = 11;
        // |h - M| = 1, 1, 0, 4, 2 -> median 1; S = 1.482602218505602 * 1.
        // scipy 1.17 agrees: median_abs_deviation([10,12,11,15,9], scale='normal')
        // = 1.482602218505602. A scan hour with median 14 has z = 3 / S = 2.023469250588245.
        let h = HOUR_MS;
        let ts = [
            T0,
            T0 + 10 * MIN_MS,
            T0 + 20 * MIN_MS,
            T0 + h,
            T0 + 2 * h,
            T0 + 2 * h + MIN_MS,
            T0 + 3 * h,
            T0 + 3 * h + 59 * MIN_MS,
            T0 + 4 * h,
            T0 + 4 * h + MIN_MS,
            T0 + 4 * h + 2 * MIN_MS,
        ];
        let v = [9.0, 10.0, 50.0, 12.0, 11.0, 11.0, 14.0, 16.0, 9.0, f64::NAN, 100.0];
        let mut good = [true; 11];
        good[10] = false;
        let s = series(&ts, &v, &good);
        let mut scratch = Vec::new();
        let hours = hourly_medians(&s, T0, T0 + 5 * h, &mut scratch);
        let medians: Vec<f64> = hours.iter().map(|x| x.median).collect();
        assert_eq!(medians, [10.0, 12.0, 11.0, 15.0, 9.0]);
        assert!(hours.iter().enumerate().all(|(k, x)| x.start_ms == T0 + k as i64 * h));
        let r = reference(&hours, 5, &mut scratch).unwrap();
        assert_eq!(r.median, 11.0);
        assert_close(r.sigma, 1.482602218505602, 1e-15);
        assert_eq!(r.hours, 5);
        assert_close((14.0 - r.median) / r.sigma, 2.023469250588245, 1e-12);
        // too few hours for the requested minimum, or no spread: no reference
        assert!(reference(&hours, 6, &mut scratch).is_none());
        let flat = [Hourly { start_ms: T0, median: 1.0 }; 4];
        assert!(reference(&flat, 1, &mut scratch).is_none());
    }

    #[test]
    fn score_is_the_two_sided_normal_confidence() {
        // scipy 1.17: 1 - 2*norm.sf(z) for z = 3.5, 5.0
        let (s, p) = score_of(3.5);
        assert_close(s, 0.9995347418419289, 1e-12);
        // models::dist is within 1e-9 relative of scipy
        assert_close(p, 0.00046525815807105003, 1e-9 * 0.00046525815807105003);
        assert_close(score_of(-5.0).0, 0.9999994266968563, 1e-12);
        assert_eq!(score_of(0.0).0, 0.0);
    }

    fn hours_of(z: &[Option<f64>]) -> Vec<Hourly> {
        // r = (M 0, S 1): the median is the z itself; None = an hour without readings
        z.iter()
            .enumerate()
            .filter_map(|(k, z)| z.map(|z| Hourly { start_ms: T0 + k as i64 * HOUR_MS, median: z }))
            .collect()
    }

    #[test]
    fn episodes_follow_the_run_rules() {
        let r = Reference { median: 0.0, sigma: 1.0, hours: 100 };
        let x = |k: i64| T0 + k * HOUR_MS;
        // two abnormal hours: no episode
        assert!(
            episodes(&hours_of(&[Some(0.), Some(5.), Some(5.), Some(0.)]), &r, 3.5, 3, T0)
                .is_empty()
        );
        // a missing hour breaks a run that has not yet reached three hours
        let gap = [Some(5.), Some(5.), None, Some(5.), Some(0.)];
        assert!(episodes(&hours_of(&gap), &r, 3.5, 3, T0).is_empty());
        // an episode: onset hour 1, detected at the end of hour 3, peak -9 in hour 4,
        // a missing hour inside does not end it, hour 7 does
        let z = [Some(1.), Some(4.), Some(6.), Some(5.), Some(-9.), None, Some(4.), Some(3.5)];
        let eps = episodes(&hours_of(&z), &r, 3.5, 3, T0);
        assert_eq!(
            eps,
            [Episode {
                onset_ms: x(1),
                detected_ms: x(4),
                peak_z: -9.0,
                peak_ms: x(4),
                hours: 5,
                end_ms: Some(x(7)),
            }]
        );
        // two episodes, the second still open; onset clipped to the evaluated start
        let z = [Some(4.), Some(4.), Some(4.), Some(0.), Some(4.), Some(4.), Some(4.)];
        let eps = episodes(&hours_of(&z), &r, 3.5, 3, x(0) + 1);
        assert_eq!(eps.len(), 2);
        assert_eq!(
            (eps[0].onset_ms, eps[0].detected_ms, eps[0].end_ms),
            (x(0) + 1, x(3), Some(x(3)))
        );
        assert_eq!((eps[1].onset_ms, eps[1].detected_ms, eps[1].end_ms), (x(4), x(7), None));
    }

    /// Deterministic standard-normal noise: SplitMix64 and Box-Muller (common practice, no source).
    struct Noise(u64);
    impl Noise {
        fn uniform(&mut self) -> f64 {
            self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
            let mut z = self.0;
            z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
            z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
            z ^= z >> 31;
            ((z >> 11) as f64 + 0.5) / (1u64 << 53) as f64
        }
        fn normal(&mut self) -> f64 {
            let (u1, u2) = (self.uniform(), self.uniform());
            (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos()
        }
    }

    #[test]
    fn a_step_gives_one_bias_with_its_onset_and_a_clean_sensor_none() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("h.parquet");
        // 20 days at 5-minute sampling: fit the first 10 days, scan the last 10.
        let step = 5 * MIN_MS;
        let n = (20 * 24 * HOUR_MS / step) as usize;
        let ts: Vec<i64> = (0..n as i64).map(|k| T0 + k * step).collect();
        let step_at = T0 + (13 * 24 + 7) * HOUR_MS; // day 13, 07:00 UTC
        let sigma = 0.5;
        let mut noise = Noise(7);
        let clean: Vec<f64> = ts.iter().map(|_| 60.0 + sigma * noise.normal()).collect();
        let stepped: Vec<f64> = ts
            .iter()
            .map(|&t| 40.0 + sigma * noise.normal() + if t >= step_at { 10.0 * sigma } else { 0.0 })
            .collect();
        let mut w = HistoryWriter::try_new(&path, HistoryWriterOptions::default()).unwrap();
        w.write_series("pump-a", "bearing", &ts, &stepped).unwrap();
        w.write_series("pump-a", "casing", &ts, &clean).unwrap();
        w.write_series("pump-b", "bearing", &ts, &clean).unwrap();
        w.close().unwrap();

        let fit_until = T0 + 10 * 24 * HOUR_MS;
        let end = T0 + 20 * 24 * HOUR_MS;
        let mut settings = NaiveSettings::new(&path, T0, fit_until, fit_until, end);
        settings.threads = 2;
        let found = run_naive(&settings).unwrap();
        assert_eq!(found.len(), 1, "{found:#?}");
        let s = &found[0];
        assert_eq!((s.asset.as_str(), s.sensor.as_deref()), ("pump-a", Some("bearing")));
        assert_eq!((s.class, s.mode, s.rank), (Class::SensorFault, Mode::Bias, 1));
        assert_eq!(s.onset, from_millis(step_at));
        assert_eq!(s.detected, from_millis(step_at + 3 * HOUR_MS));
        // the step is 10 reading sigmas; hourly medians of 12 readings are less noisy still
        assert!(s.magnitude > 10.0 && s.evidence[0].statistic > 10.0, "{s:#?}");
        assert!(s.score > 0.999 && s.score <= 1.0);
        assert_eq!(s.id, suspicion_id("pump-a", Some("bearing"), s.class, s.mode, s.onset));
        assert_eq!(s.evidence[0].test, "hourly_robust_z");
        assert!(s.summary.contains("above"), "{}", s.summary);

        // the same episode detected before the scan span is not reported
        let mut late = NaiveSettings::new(&path, T0, fit_until, step_at + 4 * HOUR_MS, end);
        late.threads = 1;
        assert!(run_naive(&late).unwrap().is_empty());
        // but a scan span starting just before detection still gives the true onset
        let early = NaiveSettings::new(&path, T0, fit_until, step_at + 2 * HOUR_MS, end);
        let found = run_naive(&early).unwrap();
        assert_eq!(found.len(), 1);
        assert_eq!(found[0].onset, from_millis(step_at));
    }

    #[test]
    fn empty_spans_are_bad_input() {
        let e = run_naive(&NaiveSettings::new("nowhere.parquet", 10, 10, 20, 30)).unwrap_err();
        assert!(e.is_bad_input() && e.to_string().contains("--fit-from"), "{e}");
        let e = run_naive(&NaiveSettings::new("nowhere.parquet", 0, 10, 30, 30)).unwrap_err();
        assert!(e.is_bad_input() && e.to_string().contains("--from"), "{e}");
        let mut s = NaiveSettings::new("nowhere.parquet", 0, 10, 20, 30);
        s.threshold = f64::NAN;
        assert!(run_naive(&s).unwrap_err().is_bad_input());
    }
}
