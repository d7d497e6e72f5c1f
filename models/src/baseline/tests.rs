//! Seeded synthetic-asset tests of the whole fit and scoring path.
//!
//! The synthetic booster pump: speed and flow are context sensors; head
//! (∝ speed², white noise sd 0.5), power (∝ speed³), a bearing temperature
//! (linear in speed, AR(1) noise) and a vibration level (linear in speed) are
//! condition sensors. The machine runs in blocks of four hours at about 1000
//! or 1450 rpm, or stands still. Expected values follow from the generator
//! (a constructed truth), not from a reference library.

use linfa::ParamGuard;
use ndarray::Array2;
use rand::{Rng, SeedableRng};
use rand_distr::{Distribution, Normal};
use rand_xoshiro::Xoshiro256Plus;

use super::*;

const HEAD_SD: f64 = 0.5;
const HEAD: usize = 2;

struct Synth {
    ts: Vec<Vec<i64>>,
    vals: Vec<Vec<f64>>,
    good: Vec<Vec<bool>>,
    specs: Vec<SensorSpec>,
    truth: Vec<usize>,
}

impl Synth {
    fn series(&self) -> Vec<SensorSeries<'_>> {
        (0..self.specs.len())
            .map(|j| SensorSeries {
                ts_ms: &self.ts[j],
                values: &self.vals[j],
                good: &self.good[j],
                spec: self.specs[j],
            })
            .collect()
    }
}

/// `levels[b]` is the speed of block `b` (0 = stopped); each block 240 minutes.
/// `speed_offset` is added to every running speed (a context change).
fn synth(
    rng: &mut impl Rng,
    n: usize,
    pick: impl Fn(&mut dyn FnMut() -> f64) -> f64,
    speed_offset: f64,
) -> Synth {
    let nz = |rng: &mut dyn rand::RngCore, sd: f64| -> f64 {
        Normal::new(0.0, sd).map_or(0.0, |d| d.sample(rng))
    };
    let ctx =
        |hi: f64| SensorSpec { role: SensorRole::Context, range: Some([0.0, hi]), band: None };
    let cond = SensorSpec::default();
    let specs = vec![ctx(1800.0), ctx(600.0), cond, cond, cond, cond];
    let p = specs.len();
    let mut ts = vec![Vec::new(); p];
    let mut vals = vec![Vec::new(); p];
    let mut truth = Vec::with_capacity(n);
    let (mut jitter, mut temp_ar) = (0.0, 0.0);
    let mut level = 0.0;
    for i in 0..n {
        if i % 240 == 0 {
            let mut u = || rng.random::<f64>();
            level = pick(&mut u);
        }
        jitter = 0.9 * jitter + nz(rng, 15.0 * (1.0 - 0.81f64).sqrt());
        temp_ar = 0.95 * temp_ar + nz(rng, 0.8 * (1.0 - 0.9025f64).sqrt());
        let t = 1_700_000_000_000 + i as i64 * 60_000;
        let running = level > 0.0;
        truth.push(if !running {
            0
        } else if level < 1200.0 {
            1
        } else {
            2
        });
        let s = if running { level + speed_offset + jitter } else { nz(rng, 0.5).abs() };
        let row = if running {
            [
                s,
                0.3 * s + nz(rng, 3.0),
                f64::NAN, // head is sampled twice per minute below
                1e-8 * s * s * s + nz(rng, 0.3),
                40.0 + 0.01 * s + temp_ar,
                0.002 * s + nz(rng, 0.1),
            ]
        } else {
            [
                s,
                nz(rng, 0.2).abs(),
                f64::NAN,
                0.05 + nz(rng, 0.01),
                25.0 + temp_ar,
                0.05 + nz(rng, 0.01),
            ]
        };
        for j in 0..p {
            if j == HEAD {
                for half in 0..2 {
                    let h = if running { 5.0 + 2e-5 * s * s } else { 2.0 };
                    ts[j].push(t + half * 30_000);
                    vals[j].push(h + nz(rng, HEAD_SD));
                }
            } else {
                ts[j].push(t);
                vals[j].push(row[j]);
            }
        }
    }
    let good = vals.iter().map(|v| vec![true; v.len()]).collect();
    Synth { ts, vals, good, specs, truth }
}

fn two_speeds_and_stops(u: &mut dyn FnMut() -> f64) -> f64 {
    let r = u();
    if r < 0.15 {
        0.0
    } else if r < 0.55 {
        1000.0
    } else {
        1450.0
    }
}

fn fitted(seed: u64, n: usize) -> (Synth, AssetBaseline) {
    let mut rng = Xoshiro256Plus::seed_from_u64(seed);
    let s = synth(&mut rng, n, two_speeds_and_stops, 0.0);
    let b = AssetBaseline::params().check().unwrap().fit(&s.series(), None, None).unwrap();
    (s, b)
}

fn median(x: impl Iterator<Item = f64>) -> f64 {
    let v: Vec<f64> = x.filter(|v| v.is_finite()).collect();
    crate::robust::median(&v).unwrap()
}

#[test]
fn two_running_speeds_and_stops_give_three_regimes() {
    let (s, b) = fitted(42, 10_000);
    assert_eq!(b.step_ms, 60_000);
    assert_eq!(b.regimes.n_regimes(), 3, "silhouette {:?}", b.regimes.silhouette());
    assert!(b.regimes.silhouette().unwrap() > 0.7);
    // speed and flow both drop to zero: both are rest indicators
    let rest: Vec<usize> = b.regimes.rest_rules().iter().map(|r| r.sensor).collect();
    assert_eq!(rest, vec![0, 1]);
    let frame = b.align(&s.series(), None, None).unwrap();
    let mut out = RowScores::new(frame.n_rows(), 6);
    score_rows(&b, frame.values.view(), &mut out).unwrap();
    let agree = out.regime.iter().zip(&s.truth).filter(|(g, t)| **g == Some(**t)).count();
    assert!(agree as f64 >= 0.999 * s.truth.len() as f64, "agree {agree}");
    let truth_stop = s.truth.iter().filter(|&&t| t == 0).count() as f64 / s.truth.len() as f64;
    assert!((b.regimes.occupancy()[STOPPED] - truth_stop).abs() < 0.002);
    // condition sensors have a stopped baseline of their own
    let stopped_head = b.sensor_baselines[HEAD][STOPPED].as_ref().unwrap();
    assert!((stopped_head.location - 2.0).abs() < 0.05);
    assert!((stopped_head.scale - HEAD_SD).abs() < 0.05);
    let temp = b.sensor_baselines[4][2].as_ref().unwrap();
    assert!(temp.phi.unwrap() > 0.8, "bearing temperature is AR(1) with φ = 0.95 per row");
}

#[test]
fn one_speed_gives_one_running_regime_and_no_context_gives_no_regression() {
    let mut rng = Xoshiro256Plus::seed_from_u64(7);
    let s = synth(&mut rng, 6_000, |u| if u() < 0.2 { 0.0 } else { 1450.0 }, 0.0);
    let b = AssetBaseline::params().check().unwrap().fit(&s.series(), None, None).unwrap();
    assert_eq!(b.regimes.n_running(), 1);
    assert!(b.regimes.occupancy()[STOPPED] > 0.05);
    // same data, every sensor a condition sensor: no regression, PCA still fitted
    let mut s2 = s;
    s2.specs.iter_mut().for_each(|p| p.role = SensorRole::Condition);
    let b2 = AssetBaseline::params().check().unwrap().fit(&s2.series(), None, None).unwrap();
    assert_eq!(b2.regimes.n_running(), 1);
    assert!(b2.regressions.iter().all(Option::is_none));
    assert!(b2.pca.is_some());
}

#[test]
fn context_driven_sensor_has_residual_scale_of_its_noise() {
    let (_, b) = fitted(43, 10_000);
    let reg = b.regressions[HEAD].as_ref().unwrap();
    let rel = reg.residual_scale() / HEAD_SD;
    assert!(
        (rel - 1.0).abs() < 0.05,
        "residual scale {} vs noise sd {HEAD_SD}",
        reg.residual_scale()
    );
    assert!(reg.residual_phi().unwrap().abs() < 0.1, "white noise residuals");
    // context sensors have no regression
    assert!(b.regressions[0].is_none() && b.regressions[1].is_none());
}

#[test]
fn bias_on_one_condition_sensor_shows_in_its_residual_and_rbc() {
    let (_, b) = fitted(44, 10_000);
    let score = |bias: f64| {
        let mut rng = Xoshiro256Plus::seed_from_u64(1044);
        let mut w = synth(&mut rng, 2_000, |_| 1450.0, 0.0);
        w.vals[HEAD].iter_mut().for_each(|v| *v += bias);
        let frame = b.align(&w.series(), None, None).unwrap();
        let mut out = RowScores::new(frame.n_rows(), 6);
        score_rows(&b, frame.values.view(), &mut out).unwrap();
        out
    };
    let clean = score(0.0);
    let out = score(4.0 * HEAD_SD);
    let rz = median(out.residual_z.column(HEAD).iter().copied());
    assert!((rz - 4.0).abs() < 0.3, "median residual z of the biased sensor {rz}");
    for j in [3, 4, 5] {
        let o = median(out.residual_z.column(j).iter().copied());
        assert!(o.abs() < 1.0, "sensor {j} residual z {o}");
    }
    // contribution above each sensor's own level on the same rows without the bias
    let mean = |a: &Array2<f64>, j: usize| {
        let c = a.column(j);
        c.iter().filter(|v| v.is_finite()).sum::<f64>() / c.len() as f64
    };
    let mean_rbc: Vec<f64> =
        (0..6).map(|j| mean(&out.rbc_spe, j) - mean(&clean.rbc_spe, j)).collect();
    let arg = (0..6).max_by(|&a, &c| mean_rbc[a].total_cmp(&mean_rbc[c])).unwrap();
    assert_eq!(arg, HEAD, "excess mean RBC {mean_rbc:?}");
    let spe = |o: &RowScores| median(o.spe.iter().copied());
    assert!(spe(&out) > spe(&clean));
}

#[test]
fn context_change_leaves_residuals_small() {
    let (_, b) = fitted(45, 10_000);
    let mut rng = Xoshiro256Plus::seed_from_u64(1045);
    // speed up by 80 rpm; the condition sensors follow the physics
    let w = synth(&mut rng, 2_000, |_| 1450.0, 80.0);
    let frame = b.align(&w.series(), None, None).unwrap();
    let mut out = RowScores::new(frame.n_rows(), 6);
    score_rows(&b, frame.values.view(), &mut out).unwrap();
    assert!(out.regime.iter().all(|g| *g == Some(2)));
    let speed_z = median(out.z.column(0).iter().copied());
    assert!(speed_z > 3.0, "context moved: speed z {speed_z}");
    for j in [2, 3, 4, 5] {
        let own = median(out.z.column(j).iter().copied());
        let res = median(out.residual_z.column(j).iter().copied());
        assert!(res.abs() < 1.0, "sensor {j}: residual z {res} (own z {own})");
    }
    let head_own = median(out.z.column(HEAD).iter().copied());
    assert!(head_own > 3.0, "head level moved with speed: {head_own}");
}

#[test]
fn serde_round_trip_scores_identically() {
    let (s, b) = fitted(46, 5_000);
    let json = serde_json::to_string(&b).unwrap();
    let back: AssetBaseline = serde_json::from_str(&json).unwrap();
    assert_eq!(back.version, BASELINE_VERSION);
    assert_eq!(back.regimes.n_regimes(), b.regimes.n_regimes());
    let frame = b.align(&s.series(), None, None).unwrap();
    let mut o1 = RowScores::new(frame.n_rows(), 6);
    let mut o2 = RowScores::new(frame.n_rows(), 6);
    score_rows(&b, frame.values.view(), &mut o1).unwrap();
    score_rows(&back, frame.values.view(), &mut o2).unwrap();
    assert_eq!(o1.regime, o2.regime);
    let close = |a: &Array2<f64>, c: &Array2<f64>| {
        a.iter()
            .zip(c)
            .all(|(x, y)| (x.is_nan() && y.is_nan()) || (x - y).abs() <= 1e-9 * (1.0 + x.abs()))
    };
    assert!(
        close(&o1.z, &o2.z)
            && close(&o1.residual_z, &o2.residual_z)
            && close(&o1.rbc_spe, &o2.rbc_spe)
    );
}

#[test]
fn baseline_is_send_and_sync() {
    fn check<T: Send + Sync>() {}
    check::<AssetBaseline>();
    check::<AssetBaselineValidParams>();
}

#[test]
fn parameter_rules() {
    assert!(AssetBaseline::params().step_ms(Some(0)).check().is_err());
    assert!(AssetBaseline::params().max_running_regimes(9).check().is_err());
    assert!(AssetBaseline::params().min_regime_share(0.5).check().is_err());
    assert!(AssetBaseline::params().min_silhouette(1.5).check().is_err());
    assert!(AssetBaseline::params().rest_fraction(0.0).check().is_err());
    assert!(AssetBaseline::params().min_stop_share(0.0).check().is_err());
    assert!(AssetBaseline::params().pca_variance_share(1.1).check().is_err());
    assert!(AssetBaseline::params().alpha(0.0).check().is_err());
    assert!(AssetBaseline::params().huber_k(f64::NAN).check().is_err());
    assert!(AssetBaseline::params().min_rows(3).check().is_err());
    assert!(AssetBaseline::params().check().is_ok());
}

#[test]
fn too_little_data_is_a_clear_error() {
    let ts = [0i64, 60_000];
    let v = [1.0, 2.0];
    let g = [true, true];
    let s = [SensorSeries { ts_ms: &ts, values: &v, good: &g, spec: SensorSpec::default() }];
    let e = AssetBaseline::params().check().unwrap().fit(&s, None, None).unwrap_err();
    assert!(matches!(e, BaselineError::TooFewRows { got: 2, need: 30 }));
    assert!(e.to_string().contains("use a longer fit period"));
}

/// Fit time of one asset, 10 sensors × 4 weeks of minute data (40 320 rows).
/// Run with `cargo test --release -p telltale-models fit_time -- --ignored --nocapture`.
#[test]
#[ignore = "timing; run in release"]
fn fit_time_ten_sensors_four_weeks() {
    let mut rng = Xoshiro256Plus::seed_from_u64(99);
    let mut s = synth(&mut rng, 40_320, two_speeds_and_stops, 0.0);
    // four more condition sensors: noisy copies of existing ones
    for k in 0..4 {
        let src = 3 + k % 3;
        let v: Vec<f64> =
            s.vals[src].iter().map(|x| x * (1.0 + 0.1 * k as f64) + rng.random::<f64>()).collect();
        s.ts.push(s.ts[src].clone());
        s.good.push(vec![true; v.len()]);
        s.vals.push(v);
        s.specs.push(SensorSpec::default());
    }
    let p = AssetBaseline::params().check().unwrap();
    let t0 = std::time::Instant::now();
    let b = p.fit(&s.series(), None, None).unwrap();
    let el = t0.elapsed();
    println!("fit of {} sensors x {} rows: {:?}", b.sensors.len(), b.n_rows, el);
    assert_eq!(b.regimes.n_regimes(), 3);
}

#[test]
fn relearning_one_sensor_absorbs_its_shift_and_keeps_the_rest() {
    let (_, b) = fitted(47, 10_000);
    // after an accepted process change the head reads 4 sd higher at every speed
    let shifted = |seed: u64, n: usize| {
        let mut rng = Xoshiro256Plus::seed_from_u64(seed);
        let mut w = synth(&mut rng, n, two_speeds_and_stops, 0.0);
        w.vals[HEAD].iter_mut().for_each(|v| *v += 4.0 * HEAD_SD);
        w
    };
    let head_residual = |base: &AssetBaseline, w: &Synth| {
        let frame = base.align(&w.series(), None, None).unwrap();
        let mut out = RowScores::new(frame.n_rows(), 6);
        score_rows(base, frame.values.view(), &mut out).unwrap();
        median(out.residual_z.column(HEAD).iter().copied())
    };
    let learn = shifted(1047, 3_000);
    let later = shifted(2047, 2_000);
    let before = head_residual(&b, &later);
    assert!(before > 3.0, "the shift shows before re-learning: {before}");
    let (start, end) = (learn.ts[0][0], *learn.ts[0].last().unwrap() + 60_000);
    let (nb, report) = b.relearn_sensor(&learn.series(), HEAD, start, end).unwrap();
    let after = head_residual(&nb, &later);
    assert!(after.abs() < 0.5, "re-learnt head residual z {after}");
    // both running speeds are re-learnt; every regime is either re-learnt or kept
    assert!(report.relearnt_regimes.ends_with(&[1, 2]), "{report:?}");
    let mut all = [report.relearnt_regimes.clone(), report.kept_regimes.clone()].concat();
    all.sort_unstable();
    assert_eq!(all, vec![0, 1, 2], "{report:?}");
    assert!(report.regression_relearnt && report.pca_relearnt);
    // the regimes and every other sensor's baselines are untouched
    assert_eq!(format!("{:?}", nb.regimes), format!("{:?}", b.regimes));
    for j in (0..6).filter(|&j| j != HEAD) {
        assert_eq!(nb.sensor_baselines[j], b.sensor_baselines[j], "sensor {j}");
        assert_eq!(format!("{:?}", nb.regressions[j]), format!("{:?}", b.regressions[j]));
    }
    // the new location is the median (its definition) of the new span's grid
    // values of the head in that regime, regimes as the old model assigns them
    let frame = b.align(&learn.series(), Some(start), Some(end)).unwrap();
    let v = frame.values.view();
    let fast: Vec<f64> = (0..v.nrows())
        .filter(|&r| b.regimes.classify(v.row(r)) == Some(2))
        .map(|r| v[[r, HEAD]])
        .filter(|x| x.is_finite())
        .collect();
    let mut sorted = fast.clone();
    sorted.sort_by(f64::total_cmp);
    let n = sorted.len();
    let med = if n % 2 == 1 { sorted[n / 2] } else { 0.5 * (sorted[n / 2 - 1] + sorted[n / 2]) };
    let loc = nb.sensor_baselines[HEAD][2].as_ref().unwrap().location;
    assert!((loc - med).abs() < 1e-12, "location {loc} vs median {med}");
}

#[test]
fn relearning_refuses_a_context_sensor_and_too_little_data() {
    let (s, b) = fitted(48, 10_000);
    let err = b.relearn_sensor(&s.series(), 0, s.ts[0][0], s.ts[0][0] + 86_400_000).unwrap_err();
    assert!(matches!(err, BaselineError::ContextSensor(0)), "{err}");
    // ten minutes of data: fewer rows than min_rows in every regime
    let t0 = s.ts[0][0];
    let err = b.relearn_sensor(&s.series(), HEAD, t0, t0 + 600_000).unwrap_err();
    assert!(matches!(err, BaselineError::TooFewRows { .. }), "{err}");
}
