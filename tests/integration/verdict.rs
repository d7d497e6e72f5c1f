//! The verdict engine on seeded synthetic assets, built in memory with the
//! models crate alone: fit on the even chunks of a two-week fit span,
//! calibrate on the odd chunks (as `telltale fit` does), then evaluate and
//! decide on the week after it, clean or with one fault injected.
//!
//! The synthetic pump: one context sensor (speed) on a fixed daily duty
//! (stopped 02:00–04:00 UTC, low speed at night, high speed 06:00–22:00,
//! with a slow modulation and AR(1) jitter) and four condition sensors that
//! follow speed (head ∝ speed², a bearing temperature and a vibration level
//! linear in speed, power ∝ speed³), each plus its own AR(1) noise. The
//! faults are constructed truth; what is checked is behaviour any sane
//! setting of the engine must have (right class and mode, onset near the
//! truth, detection after the change, no look-ahead), never a tuned number.
//!
//! The thresholds of these checks (3 hours of onset error, at most one false
//! verdict per 10 clean asset-weeks) are common practice, no source.

use ndarray::Array2;
use rand::SeedableRng;
use rand_distr::{Distribution, Normal};
use rand_xoshiro::Xoshiro256PlusPlus;
use std::collections::BTreeMap;
use telltale_models::ParamGuard;
use telltale_models::baseline::{
    AssetBaseline, RowScores, STOPPED, SensorRole, SensorSeries, SensorSpec, score_rows,
};
use telltale_models::benjamini_hochberg;
use telltale_models::robust::MAD_NORMAL;
use telltale_models::verdict::{
    AssetEvaluation, Calibration, Channel, Episode, PeerSupport, Verdict, VerdictClass,
    VerdictMode, VerdictParams, block_features, calibrate, decide, evaluate_asset, peer_moved,
};

const MIN: i64 = 60_000;
const HOUR: i64 = 3_600_000;
const DAY: i64 = 86_400_000;
/// 2026-01-05T00:00:00Z, a day boundary (so a multiple of the one-hour step).
const T0: i64 = 1_767_571_200_000;
const FIT_DAYS: i64 = 14;
const SCAN_DAYS: i64 = 7;
/// Start of the scanned week (= end of the fit span).
const SCAN: i64 = T0 + FIT_DAYS * DAY;
/// End of the scanned week.
const END: i64 = SCAN + SCAN_DAYS * DAY;

const SPEED: usize = 0;
const HEAD: usize = 1;
const TEMP: usize = 2;
const VIB: usize = 3;
const POWER: usize = 4;
const NAMES: [&str; 5] = ["speed", "head", "bearing_temp", "vibration", "power"];
/// Marginal standard deviation of each sensor's AR(1) noise (sensor units):
/// the σ the injected faults are sized in.
const NOISE: [f64; 5] = [10.0, 1.0, 0.5, 0.1, 0.5];
/// Lag-one autocorrelation of each sensor's noise, per one-minute row.
const PHI: [f64; 5] = [0.9, 0.3, 0.95, 0.5, 0.5];
/// Instrument ranges, as a registry would give them.
const RANGE: [[f64; 2]; 5] =
    [[0.0, 1800.0], [0.0, 100.0], [-20.0, 150.0], [0.0, 50.0], [0.0, 200.0]];

/// One asset's readings on a one-minute grid (every sensor sampled each minute).
#[derive(Clone)]
struct Asset {
    ts: Vec<i64>,
    vals: Vec<Vec<f64>>,
    good: Vec<bool>,
    specs: Vec<SensorSpec>,
}

/// Speed set by the daily duty (UTC hour of day); 0 = stopped.
fn duty(t: i64) -> f64 {
    let h = t.rem_euclid(DAY) / HOUR;
    match h {
        2..=3 => 0.0,
        6..=21 => 1450.0,
        _ => 1000.0,
    }
}

fn synth(seed: u64, days: i64) -> Asset {
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed);
    let std = Normal::new(0.0, 1.0).unwrap();
    let n = usize::try_from(days * DAY / MIN).unwrap();
    let mut ar = [0.0f64; 5];
    let mut vals: Vec<Vec<f64>> = (0..5).map(|_| Vec::with_capacity(n)).collect();
    let mut ts = Vec::with_capacity(n);
    for i in 0..n {
        let t = T0 + i as i64 * MIN;
        for s in 0..5 {
            // AR(1) with marginal sd NOISE[s]
            let innov = NOISE[s] * (1.0 - PHI[s] * PHI[s]).sqrt();
            ar[s] = PHI[s] * ar[s] + innov * std.sample(&mut rng);
        }
        let set = duty(t);
        let row = if set > 0.0 {
            let phase = (t % (6 * HOUR)) as f64 / (6 * HOUR) as f64;
            let s = set + 20.0 * (std::f64::consts::TAU * phase).sin() + ar[SPEED];
            [
                s,
                5.0 + 2e-5 * s * s + ar[HEAD],
                30.0 + 0.015 * s + ar[TEMP],
                0.5 + 0.002 * s + ar[VIB],
                1e-8 * s * s * s + ar[POWER],
            ]
        } else {
            [
                (0.5 * std.sample(&mut rng)).abs(),
                // standing: static head, cooling bearing, residual vibration and
                // auxiliary power, each at least 10 σ inside the instrument range
                10.0 + ar[HEAD],
                25.0 + ar[TEMP],
                0.2 + 0.2 * ar[VIB],
                1.0 + 0.2 * ar[POWER],
            ]
        };
        ts.push(t);
        for s in 0..5 {
            vals[s].push(row[s]);
        }
    }
    let specs = (0..5)
        .map(|s| SensorSpec {
            role: if s == SPEED { SensorRole::Context } else { SensorRole::Condition },
            range: Some(RANGE[s]),
            band: None,
        })
        .collect();
    Asset { good: vec![true; ts.len()], ts, vals, specs }
}

impl Asset {
    fn series(&self) -> Vec<SensorSeries<'_>> {
        (0..self.specs.len())
            .map(|s| SensorSeries {
                ts_ms: &self.ts,
                values: &self.vals[s],
                good: &self.good,
                spec: self.specs[s],
            })
            .collect()
    }

    /// Rows with `from <= t < to`.
    fn rows(&self, from: i64, to: i64) -> std::ops::Range<usize> {
        let a = self.ts.partition_point(|&t| t < from);
        let b = self.ts.partition_point(|&t| t < to);
        a..b
    }

    /// Replaces sensor `s`'s readings in `[from, to)` by `f(t, value)`.
    fn edit(&mut self, s: usize, from: i64, to: i64, f: impl Fn(i64, f64) -> f64) {
        for i in self.rows(from, to) {
            self.vals[s][i] = f(self.ts[i], self.vals[s][i]);
        }
    }

    /// Sensor `s` repeats its reading at `from` until `to`.
    fn freeze(&mut self, s: usize, from: i64, to: i64) {
        let r = self.rows(from, to);
        let v = self.vals[s][r.start];
        self.edit(s, from, to, |_, _| v);
    }
}

/// Baseline and calibration as `telltale fit` makes them: the span cut into
/// chunks of `clamp(span / 6, one block, 2 days)`, even chunks fitted, odd
/// chunks held out and calibrated on.
fn fit(a: &Asset, end: i64, p: &VerdictParams) -> (AssetBaseline, Calibration) {
    let span = end - T0;
    let chunk = ((span / 6).clamp(p.block_ms, 2 * DAY) / p.block_ms).max(1) * p.block_ms;
    let train_of = |t: i64| ((t - T0) / chunk) % 2 == 0;
    let keep: Vec<usize> = a.rows(T0, end).filter(|&i| train_of(a.ts[i])).collect();
    let ts: Vec<i64> = keep.iter().map(|&i| a.ts[i]).collect();
    let vals: Vec<Vec<f64>> =
        (0..a.specs.len()).map(|s| keep.iter().map(|&i| a.vals[s][i]).collect()).collect();
    let good = vec![true; ts.len()];
    let train: Vec<SensorSeries<'_>> = (0..a.specs.len())
        .map(|s| SensorSeries { ts_ms: &ts, values: &vals[s], good: &good, spec: a.specs[s] })
        .collect();
    let b = AssetBaseline::params().check().unwrap().fit(&train, Some(T0), Some(end)).unwrap();
    let frame = b.align(&a.series(), Some(b.fit_start_ms), Some(end)).unwrap();
    let held: Vec<bool> = (0..frame.n_rows()).map(|r| !train_of(frame.row_start_ms(r))).collect();
    let cal = calibrate(
        &b,
        frame.values.view(),
        frame.origin_ms,
        &held,
        p.block_ms,
        p.spike_factor,
        p.min_fill,
        p.occupancy_window,
        p.cusum_k,
    );
    (b, cal)
}

struct Scanned {
    eval: AssetEvaluation,
    verdicts: Vec<Verdict>,
}

impl Scanned {
    /// End of the step of a block (the `detected` time of DESIGN 4.4), epoch ms.
    fn detected_ms(&self, block: usize) -> i64 {
        self.eval.blocks.end_ms(block)
    }
}

/// Evaluates `[from, to)` of the asset against its baseline, without peers.
fn scan(a: &Asset, b: &AssetBaseline, cal: &Calibration, from: i64, to: i64) -> Scanned {
    let p = VerdictParams::default();
    let frame = b.align(&a.series(), Some(from), Some(to)).unwrap();
    let eval = evaluate_asset(b, cal, frame.values.view(), frame.origin_ms, &p).unwrap();
    let names: Vec<String> = NAMES.iter().map(|s| (*s).to_owned()).collect();
    let verdicts =
        decide(b, cal, &eval.blocks, &eval.episodes, &names, |_| PeerSupport::default(), &p);
    Scanned { eval, verdicts }
}

/// A fitted clean asset and its scan week (faults are injected into the
/// week only, so the fit span stays clean).
fn fitted(seed: u64) -> (Asset, AssetBaseline, Calibration) {
    let a = synth(seed, FIT_DAYS + SCAN_DAYS);
    let (b, cal) = fit(&a, SCAN, &VerdictParams::default());
    (a, b, cal)
}

fn describe(s: &Scanned) -> String {
    s.verdicts
        .iter()
        .map(|v| {
            format!(
                "{}/{} sensor {:?} sensors {:?} onset +{:.1} h detected +{:.1} h p {:.2e} mag {:.2}",
                v.class.as_str(),
                v.mode.as_str(),
                v.sensor.map(|s| NAMES[s]),
                v.sensors,
                (v.onset_ms - SCAN) as f64 / HOUR as f64,
                (s.detected_ms(v.detected_block) - SCAN) as f64 / HOUR as f64,
                v.p_value,
                v.magnitude
            )
        })
        .collect::<Vec<_>>()
        .join("\n")
}

/// The one verdict of `class`/`mode` on `sensor`, its onset within `tol` of
/// `truth` and its detection after both the true change and its own onset.
fn one_verdict(
    s: &Scanned,
    class: VerdictClass,
    mode: VerdictMode,
    sensor: Option<usize>,
    truth: i64,
    tol: i64,
) -> &Verdict {
    let found: Vec<&Verdict> = s
        .verdicts
        .iter()
        .filter(|v| v.class == class && v.mode == mode && v.sensor == sensor)
        .collect();
    assert_eq!(
        found.len(),
        1,
        "want one {}/{} on {sensor:?}; verdicts:\n{}",
        class.as_str(),
        mode.as_str(),
        describe(s)
    );
    let v = found[0];
    let det = s.detected_ms(v.detected_block);
    assert!(
        (v.onset_ms - truth).abs() <= tol,
        "onset {:.2} h from the truth (allowed {:.1} h)",
        (v.onset_ms - truth) as f64 / HOUR as f64,
        tol as f64 / HOUR as f64
    );
    // causality: a change cannot be detected before it happened, nor before its onset
    assert!(det > truth, "detected {det} not after the true change at {truth}");
    assert!(det > v.onset_ms, "detected {det} not after the onset {}", v.onset_ms);
    v
}

#[test]
fn the_synthetic_pump_has_a_stopped_regime_and_running_ones() {
    // guards the premise of the tests below: the nightly stop is a regime of its own
    let (a, b, _) = fitted(1);
    assert!(b.regimes.n_regimes() >= 2, "regimes {}", b.regimes.n_regimes());
    let frame = b.align(&a.series(), Some(SCAN), Some(SCAN + DAY)).unwrap();
    let mut sc = RowScores::new(frame.n_rows(), 5);
    score_rows(&b, frame.values.view(), &mut sc).unwrap();
    let stopped = sc.regime.iter().filter(|g| **g == Some(STOPPED)).count();
    // 02:00-04:00 is stopped: 120 of the day's 1440 rows
    assert!((115..=125).contains(&stopped), "stopped rows {stopped}");
}

#[test]
fn clean_weeks_give_few_verdicts() {
    // False alarms on clean data: every verdict of the decision procedure
    // (before the fleet-wide step) over 30 seeded clean asset-weeks, each asset
    // fitted and calibrated on its own clean fortnight.
    // TELLTALE_CLEAN_WEEKS=N measures the rate over more weeks (same seeds first).
    let weeks: u64 =
        std::env::var("TELLTALE_CLEAN_WEEKS").ok().and_then(|v| v.parse().ok()).unwrap_or(30);
    let mut by_kind: BTreeMap<String, usize> = BTreeMap::new();
    let mut pv = Vec::new();
    let mut episodes = 0usize;
    let results: Vec<(Vec<Verdict>, usize)> = std::thread::scope(|sc| {
        let handles: Vec<_> = (0..2u64)
            .map(|w| {
                sc.spawn(move || {
                    (0..weeks)
                        .filter(|k| k % 2 == w)
                        .map(|k| {
                            let (a, b, cal) = fitted(5000 + k);
                            let s = scan(&a, &b, &cal, SCAN, END);
                            for line in describe(&s).lines() {
                                eprintln!("clean week seed {}: {line}", 5000 + k);
                            }
                            (s.verdicts, s.eval.episodes.len())
                        })
                        .collect::<Vec<_>>()
                })
            })
            .collect();
        handles.into_iter().flat_map(|h| h.join().unwrap()).collect()
    });
    for (verdicts, n_eps) in &results {
        episodes += n_eps;
        for v in verdicts {
            *by_kind.entry(format!("{}/{}", v.class.as_str(), v.mode.as_str())).or_default() += 1;
            pv.push(v.p_value);
        }
    }
    let n = pv.len();
    // the scan's fleet-wide step: Benjamini & Hochberg (1995) at fdr_q
    let after_bh = if pv.is_empty() {
        0
    } else {
        benjamini_hochberg(&pv, VerdictParams::default().fdr_q).unwrap().n_rejected
    };
    eprintln!(
        "clean synthetic data: {n} verdicts in {weeks} asset-weeks = {:.2} per 10 asset-weeks \
         ({after_bh} after Benjamini-Hochberg across them; {episodes} raw episodes) {by_kind:?}",
        n as f64 * 10.0 / weeks as f64
    );
    assert!(n as u64 * 10 <= weeks, "{n} false verdicts in {weeks} clean asset-weeks: {by_kind:?}");
}

#[test]
fn step_in_one_condition_sensor_is_a_bias_on_that_sensor() {
    // three seeds: the behaviour, not one lucky noise path
    for seed in [7, 700, 701] {
        eprintln!("seed {seed}");
        let (mut a, b, cal) = fitted(seed);
        let at = SCAN + 2 * DAY + 9 * HOUR + 30 * MIN;
        a.edit(HEAD, at, END, |_, v| v + 6.0 * NOISE[HEAD]);
        let s = scan(&a, &b, &cal, SCAN, END);
        let v =
            one_verdict(&s, VerdictClass::SensorFault, VerdictMode::Bias, Some(HEAD), at, 3 * HOUR);
        // DESIGN 4.4 magnitude: the size in robust σ of the baseline it was judged
        // against; against the context regression that is the 6 residual σ injected
        // (the peak step, so allowing ±50 %: common practice, no source)
        if v.magnitude_basis == Channel::Resid {
            assert!((4.0..=9.0).contains(&v.magnitude), "magnitude {} for a 6 σ step", v.magnitude);
        } else {
            assert!(v.magnitude > 1.0, "magnitude {} ({:?})", v.magnitude, v.magnitude_basis);
        }
        // one instrument moved: nothing may blame the machine or another sensor
        assert!(
            s.verdicts.iter().all(|v| v.sensor == Some(HEAD)),
            "verdicts beyond the biased sensor:\n{}",
            describe(&s)
        );
    }
}

#[test]
fn slow_ramp_in_one_condition_sensor_is_a_drift_on_that_sensor() {
    // three seeds: the behaviour, not one lucky noise path
    for seed in [8, 800, 801] {
        eprintln!("seed {seed}");
        let (mut a, b, cal) = fitted(seed);
        let at = SCAN + DAY + 12 * HOUR;
        // 2 σ per day, still growing at the end of the week (11 σ)
        a.edit(VIB, at, END, |t, v| v + 2.0 * NOISE[VIB] * (t - at) as f64 / DAY as f64);
        let s = scan(&a, &b, &cal, SCAN, END);
        // a ramp has no sharp start: its onset is only known to within a day or so
        let v = one_verdict(&s, VerdictClass::SensorFault, VerdictMode::Drift, Some(VIB), at, DAY);
        assert!(v.onset_ms >= at - 6 * HOUR, "onset well before the ramp began");
        assert!(
            !s.verdicts.iter().any(|v| v.class == VerdictClass::EquipmentFault),
            "one drifting instrument is not an equipment fault:\n{}",
            describe(&s)
        );
    }
}

#[test]
fn step_in_two_condition_sensors_is_an_equipment_fault() {
    // three seeds: the behaviour, not one lucky noise path
    for seed in [9, 900, 901] {
        eprintln!("seed {seed}");
        let (mut a, b, cal) = fitted(seed);
        let at = SCAN + 3 * DAY + 10 * HOUR;
        a.edit(HEAD, at, END, |_, v| v + 6.0 * NOISE[HEAD]);
        a.edit(VIB, at, END, |_, v| v + 6.0 * NOISE[VIB]);
        let s = scan(&a, &b, &cal, SCAN, END);
        let v = one_verdict(
            &s,
            VerdictClass::EquipmentFault,
            VerdictMode::StepChange,
            None,
            at,
            3 * HOUR,
        );
        assert!(v.sensors.contains(&HEAD) && v.sensors.contains(&VIB), "sensors {:?}", v.sensors);
        assert!(
            !s.verdicts.iter().any(|v| v.class == VerdictClass::SensorFault),
            "a change seen in two related sensors is not a single instrument's fault:\n{}",
            describe(&s)
        );
    }
}

#[test]
fn frozen_condition_sensor_is_stuck() {
    // three seeds: the behaviour, not one lucky noise path
    for seed in [10, 1000, 1001] {
        eprintln!("seed {seed}");
        let (mut a, b, cal) = fitted(seed);
        let at = SCAN + 3 * DAY + 10 * HOUR;
        a.freeze(TEMP, at, at + DAY);
        let s = scan(&a, &b, &cal, SCAN, END);
        // the run of repeats starts on the row after the frozen reading
        one_verdict(&s, VerdictClass::SensorFault, VerdictMode::Stuck, Some(TEMP), at, HOUR);
        assert!(
            s.verdicts
                .iter()
                .all(|v| v.class == VerdictClass::SensorFault && v.sensor == Some(TEMP)),
            "verdicts beyond the stuck sensor:\n{}",
            describe(&s)
        );
    }
}

#[test]
fn several_sensors_freezing_together_are_no_stuck_sensor() {
    // DESIGN 5 treats a whole asset going quiet as a coverage fact; by the
    // same reasoning three sensors repeating their readings from the same
    // minute are the machine or its data path standing still, not three
    // instruments failing at once (common practice, no source). A single
    // frozen sensor is still stuck (`frozen_condition_sensor_is_stuck`).
    for seed in [15, 1500] {
        eprintln!("seed {seed}");
        let (mut a, b, cal) = fitted(seed);
        let at = SCAN + 3 * DAY + 10 * HOUR;
        for s in [HEAD, TEMP, VIB] {
            a.freeze(s, at, at + DAY);
        }
        let s = scan(&a, &b, &cal, SCAN, END);
        assert!(
            s.eval.episodes.iter().filter(|e| e.channel == Channel::Frozen).count() >= 3,
            "the frozen runs were not even detected:\n{}",
            describe(&s)
        );
        assert!(
            !s.verdicts.iter().any(|v| v.mode == VerdictMode::Stuck),
            "a joint freeze was called a stuck sensor:\n{}",
            describe(&s)
        );
    }
}

#[test]
fn one_silent_sensor_is_a_dropout() {
    // three seeds: the behaviour, not one lucky noise path
    for seed in [11, 1100, 1101] {
        eprintln!("seed {seed}");
        let (mut a, b, cal) = fitted(seed);
        let at = SCAN + 3 * DAY + 8 * HOUR;
        a.edit(VIB, at, at + 6 * HOUR, |_, _| f64::NAN);
        let s = scan(&a, &b, &cal, SCAN, END);
        let v =
            one_verdict(&s, VerdictClass::SensorFault, VerdictMode::Dropout, Some(VIB), at, HOUR);
        // DESIGN 5: no usable reading for longer than the sampling allows; 6 h of rows
        assert!(v.onset_ms >= at, "dropout onset before the first missing row");
    }
}

#[test]
fn every_sensor_silent_is_no_dropout() {
    // three seeds: the behaviour, not one lucky noise path
    for seed in [11, 1100, 1101] {
        eprintln!("seed {seed}");
        let (mut a, b, cal) = fitted(seed);
        let at = SCAN + 3 * DAY + 8 * HOUR;
        for s in 0..5 {
            a.edit(s, at, at + 6 * HOUR, |_, _| f64::NAN);
        }
        let s = scan(&a, &b, &cal, SCAN, END);
        // DESIGN 5: an asset whose sensors all fall silent is offline, not faulty
        assert!(
            !s.verdicts.iter().any(|v| v.mode == VerdictMode::Dropout),
            "dropout on an offline asset:\n{}",
            describe(&s)
        );
        assert!(
            !s.eval.episodes.iter().any(|e| e.channel == Channel::Silent),
            "silent-run episode on an offline asset"
        );
    }
}

#[test]
fn readings_outside_the_instrument_range_are_out_of_range() {
    // three seeds: the behaviour, not one lucky noise path
    for seed in [12, 1200, 1201] {
        eprintln!("seed {seed}");
        let (mut a, b, cal) = fitted(seed);
        let at = SCAN + 2 * DAY + 12 * HOUR;
        // an open-circuit transmitter reading below its range [0, 100]
        a.edit(HEAD, at, at + 3 * HOUR, |_, _| -10.0);
        let s = scan(&a, &b, &cal, SCAN, END);
        one_verdict(&s, VerdictClass::SensorFault, VerdictMode::OutOfRange, Some(HEAD), at, HOUR);
        assert!(
            !s.verdicts.iter().any(|v| v.class == VerdictClass::EquipmentFault),
            "an impossible reading is not an equipment fault:\n{}",
            describe(&s)
        );
    }
}

type EpisodeKey = (Option<usize>, Channel, usize, i64, usize);

fn key(e: &Episode) -> EpisodeKey {
    (e.sensor, e.channel, e.onset_block, e.onset_ms, e.detected_block)
}

/// Episodes detected by `cut` (step end ≤ cut).
fn detected_by(s: &Scanned, cut: i64) -> Vec<EpisodeKey> {
    let mut v: Vec<EpisodeKey> = s
        .eval
        .episodes
        .iter()
        .filter(|e| s.detected_ms(e.detected_block) <= cut)
        .map(key)
        .collect();
    v.sort();
    v
}

#[test]
fn episodes_detected_by_a_time_do_not_depend_on_later_data() {
    // No look-ahead (DESIGN 4.4 `detected`: evidence using only data up to
    // that time): changing the data strictly after t changes no episode
    // detected by t. The base week already holds several changes before
    // every cut, so the comparison is never empty.
    let (mut a, b, cal) = fitted(13);
    a.edit(HEAD, SCAN + DAY, END, |_, v| v + 6.0 * NOISE[HEAD]);
    a.edit(VIB, SCAN + DAY + 18 * HOUR, SCAN + DAY + 24 * HOUR, |_, _| f64::NAN);
    a.edit(POWER, SCAN + 2 * DAY + 11 * HOUR, SCAN + 2 * DAY + 13 * HOUR, |_, _| 250.0);
    let base = scan(&a, &b, &cal, SCAN, END);
    let cuts = [SCAN + 2 * DAY + 14 * HOUR, SCAN + 3 * DAY + 5 * HOUR, SCAN + 4 * DAY + 12 * HOUR];
    type Perturb = fn(&mut Asset, i64);
    let perturbations: [(&str, Perturb); 5] = [
        ("+20 σ step in every condition sensor at t+48 h", |a, t| {
            for (s, sd) in NOISE.iter().enumerate().skip(1) {
                a.edit(s, t + 2 * DAY, END, |_, v| v + 20.0 * sd);
            }
        }),
        ("+10 σ step in every sensor from t", |a, t| {
            for (s, sd) in NOISE.iter().enumerate() {
                a.edit(s, t, END, |_, v| v + 10.0 * sd);
            }
        }),
        ("every sensor silent from t", |a, t| {
            for s in 0..5 {
                a.edit(s, t, END, |_, _| f64::NAN);
            }
        }),
        ("one sensor silent, another frozen from t", |a, t| {
            a.edit(TEMP, t, END, |_, _| f64::NAN);
            a.freeze(VIB, t, END);
        }),
        ("speed doubled from t (context change)", |a, t| {
            a.edit(SPEED, t, END, |_, v| 2.0 * v);
        }),
    ];
    for &cut in &cuts {
        let want = detected_by(&base, cut);
        assert!(!want.is_empty(), "no episode detected by the cut: the check would be empty");
        for (what, f) in &perturbations {
            let mut changed = a.clone();
            f(&mut changed, cut);
            let got = scan(&changed, &b, &cal, SCAN, END);
            assert_eq!(
                detected_by(&got, cut),
                want,
                "{what}, t = scan start + {} h: episodes detected by t changed",
                (cut - SCAN) / HOUR
            );
            assert_ne!(
                got.eval.episodes, base.eval.episodes,
                "{what}: the perturbation did nothing"
            );
        }
    }
}

#[test]
fn frozen_run_across_a_stop_is_not_detected_before_it_is_long_enough() {
    // A frozen run counts running rows only (stopped rows neither extend nor
    // break it). Freeze the vibration at 01:40 on day 3 of the scan: 19
    // repeated running rows before the 02:00 stop, then 2 h stopped, then the
    // run reaches its required length only some minutes after the 04:00
    // restart. If the sensor recovers during the stop (data after t = 03:00
    // only), no run ever reaches that length. Either way an episode dated by
    // 03:00 cannot be justified from the data up to 03:00.
    let (mut a, b, cal) = fitted(14);
    let day3 = SCAN + 3 * DAY;
    let from = day3 + HOUR + 40 * MIN;
    let cut = day3 + 3 * HOUR;
    let mut stays = a.clone();
    stays.freeze(VIB, from, day3 + 6 * HOUR);
    a.freeze(VIB, from, cut);
    let s_stays = scan(&stays, &b, &cal, SCAN, END);
    let s_recovers = scan(&a, &b, &cal, SCAN, END);
    let frozen = |s: &Scanned| -> Vec<(usize, i64)> {
        s.eval
            .episodes
            .iter()
            .filter(|e| e.channel == Channel::Frozen && e.sensor == Some(VIB))
            .map(|e| (e.detected_block, s.detected_ms(e.detected_block)))
            .collect()
    };
    let stays_eps = frozen(&s_stays);
    assert_eq!(stays_eps.len(), 1, "the run that continues after the restart is an episode");
    assert_eq!(
        detected_by(&s_recovers, cut),
        detected_by(&s_stays, cut),
        "episodes detected by 03:00 differ with the data after 03:00 (frozen run detected at \
         {:02}:{:02} if the freeze lasts, {:?} if the sensor recovers during the stop)",
        (stays_eps[0].1 - day3) / HOUR,
        (stays_eps[0].1 - day3) % HOUR / MIN,
        frozen(&s_recovers)
    );
    assert!(
        stays_eps[0].1 > day3 + 4 * HOUR,
        "frozen run detected at +{} min after 00:00, before its running rows were long enough",
        (stays_eps[0].1 - day3) / MIN
    );
}

/// Block values the calibration saw: the held-out rows of the fit span,
/// scored and summarised exactly as for a scan.
fn held_out_blocks(
    a: &Asset,
    b: &AssetBaseline,
    p: &VerdictParams,
) -> telltale_models::verdict::Blocks {
    let span = SCAN - T0;
    let chunk = ((span / 6).clamp(p.block_ms, 2 * DAY) / p.block_ms).max(1) * p.block_ms;
    let frame = b.align(&a.series(), Some(b.fit_start_ms), Some(SCAN)).unwrap();
    let mut held: Array2<f64> = frame.values.clone();
    for r in 0..frame.n_rows() {
        if ((frame.row_start_ms(r) - T0) / chunk) % 2 == 0 {
            held.row_mut(r).fill(f64::NAN);
        }
    }
    let mut sc = RowScores::new(held.nrows(), held.ncols());
    score_rows(b, held.view(), &mut sc).unwrap();
    block_features(b, held.view(), frame.origin_ms, &sc, p.block_ms, p.spike_factor, p.min_fill)
}

fn med(v: &[f64]) -> f64 {
    telltale_models::median(v).unwrap()
}

#[test]
fn calibration_standardises_the_held_out_block_values() {
    let p = VerdictParams::default();
    let (a, b, cal) = fitted(21);
    // 14 days in 2-day chunks: chunks 1, 3 and 5 are held out, 144 hourly blocks
    assert_eq!(cal.n_blocks, 144);
    let blocks = held_out_blocks(&a, &b, &p);
    let mut checked = 0;
    for (s, sc) in cal.sensors.iter().enumerate() {
        for (name, arr, cc) in [
            ("level", &blocks.level, sc.level),
            ("resid", &blocks.resid, sc.resid),
            ("texture", &blocks.texture, sc.texture),
        ] {
            let Some(cc) = cc else { continue };
            let col: Vec<f64> = arr.column(s).to_vec();
            let u: Vec<f64> = col.iter().map(|&x| cc.u(x)).filter(|x| x.is_finite()).collect();
            assert_eq!(u.len(), cc.n, "{} {name}: blocks used", NAMES[s]);
            // definition: u = (x - median) / scale with scale >= the MAD
            // (Hampel 1974; normal-consistent factor 1.4826), so u has median 0
            // and a MAD of at most 1
            let m = med(&u);
            let dev: Vec<f64> = u.iter().map(|x| (x - m).abs()).collect();
            let mad = MAD_NORMAL * med(&dev);
            assert!(m.abs() < 1e-9, "{} {name}: median of u {m}", NAMES[s]);
            assert!(mad <= 1.0 + 1e-9 && mad > 0.0, "{} {name}: MAD of u {mad}", NAMES[s]);
            assert!((0.0..=0.9).contains(&cc.phi), "{} {name}: phi {}", NAMES[s], cc.phi);
            // the held-out maximum of the two-sided tabular CUSUM (Page 1954),
            // recomputed here: C+ = max(0, C+ + u - k), C- = max(0, C- - u - k)
            let (mut up, mut lo, mut worst) = (0.0f64, 0.0f64, 0.0f64);
            for &x in &col {
                let u = cc.u(x);
                if u.is_finite() {
                    up = (up + u - p.cusum_k).max(0.0);
                    lo = (lo - u - p.cusum_k).max(0.0);
                    worst = worst.max(up).max(lo);
                }
            }
            assert!(
                (worst - cc.max_cusum).abs() <= 1e-9 * worst.max(1.0),
                "{} {name}: max CUSUM {worst} vs {}",
                NAMES[s],
                cc.max_cusum
            );
            checked += 1;
        }
    }
    // level for every sensor, residual for the four condition sensors, texture for most
    assert!(checked >= 9, "only {checked} channels calibrated");
}

#[test]
fn peer_moved_compares_the_median_block_level_with_the_threshold() {
    // hand-made vectors; the rule is the median of side · u against peer_u, strict
    assert_eq!(peer_moved(&[2.0, 2.0, 2.0], 1.0, 1.0), Some(true));
    assert_eq!(peer_moved(&[2.0, 2.0, 2.0], -1.0, 1.0), Some(false), "moved the other way");
    assert_eq!(peer_moved(&[-2.0, -3.0, -1.5], -1.0, 1.0), Some(true), "moved down with us");
    assert_eq!(peer_moved(&[0.5, 3.0, 3.0], 1.0, 1.0), Some(true), "median 3");
    assert_eq!(peer_moved(&[9.0, 0.0, 0.0], 1.0, 1.0), Some(false), "one wild block is not a move");
    assert_eq!(peer_moved(&[1.0, 1.0, 1.0], 1.0, 1.0), Some(false), "at the threshold: not beyond");
    assert_eq!(peer_moved(&[0.0, 0.0, 2.0, 2.0], 1.0, 1.0), Some(false), "even count: median 1");
    assert_eq!(peer_moved(&[0.0, 2.0, 2.0, 2.0], 1.0, 1.0), Some(true));
    assert_eq!(peer_moved(&[2.0, f64::NAN, 2.0], 1.0, 1.0), None, "fewer than 3 blocks with data");
    assert_eq!(peer_moved(&[2.0, f64::NAN, 2.0, f64::INFINITY, 2.0], 1.0, 1.0), Some(true));
    assert_eq!(peer_moved(&[], 1.0, 1.0), None);
}
