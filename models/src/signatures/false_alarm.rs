//! False-alarm rates of the signatures at their defaults on clean, strongly
//! autocorrelated data: AR(1), φ = 0.9, unit innovation variance (stationary
//! sd 2.29), seeded Xoshiro256Plus. One series = one day of minute data.
//!
//! The bounds are the documented ones in each detector's docs; the measured
//! rates (printed with `--nocapture`) sit well inside them.

use linfa::ParamGuard;
use rand::SeedableRng;
use rand_distr::{Distribution, Normal};
use rand_xoshiro::Xoshiro256Plus;

use super::*;

const PHI: f64 = 0.9;
const DAY: usize = 1440;
const SERIES: usize = 60;

fn ar1(rng: &mut Xoshiro256Plus, n: usize) -> Vec<f64> {
    let e = Normal::new(0.0, 1.0).expect("valid normal");
    // start from the stationary distribution, so no burn-in is needed
    let mut x = e.sample(rng) / (1.0 - PHI * PHI).sqrt();
    (0..n)
        .map(|_| {
            x = PHI * x + e.sample(rng);
            50.0 + x
        })
        .collect()
}

#[test]
fn hampel_global_false_alarm_rate_on_ar1_is_below_1_percent() {
    let mut rng = Xoshiro256Plus::seed_from_u64(42);
    let p = Hampel::params().check().unwrap();
    let flagged: usize =
        (0..SERIES).map(|_| hampel_global(&ar1(&mut rng, DAY), &p).flagged.len()).sum();
    let rate = flagged as f64 / (SERIES * DAY) as f64;
    eprintln!("hampel_global AR(1) rate {rate:.4}");
    assert!(rate <= 0.01, "rate {rate}");
}

#[test]
fn hampel_rolling_false_alarm_rate_on_ar1_is_below_3_percent() {
    let mut rng = Xoshiro256Plus::seed_from_u64(43);
    let p = Hampel::params().check().unwrap();
    let flagged: usize =
        (0..SERIES).map(|_| hampel_rolling(&ar1(&mut rng, DAY), &p).flagged.len()).sum();
    let rate = flagged as f64 / (SERIES * (DAY - 6)) as f64;
    eprintln!("hampel_rolling AR(1) rate {rate:.4}");
    assert!(rate <= 0.03, "rate {rate}");
}

#[test]
fn stuck_never_fires_on_continuous_ar1() {
    let mut rng = Xoshiro256Plus::seed_from_u64(44);
    let p = Stuck::params().check().unwrap();
    let mut longest = 0;
    for _ in 0..SERIES {
        let r = stuck(&ar1(&mut rng, DAY), &p);
        assert!(r.flagged.is_empty());
        longest = longest.max(r.statistic);
    }
    eprintln!("stuck AR(1) longest run {longest}");
    assert!(longest <= 3, "longest run {longest}");
}

#[test]
fn stuck_never_fires_on_ar1_quantised_to_0_1() {
    let mut rng = Xoshiro256Plus::seed_from_u64(45);
    let p = Stuck::params().check().unwrap();
    for _ in 0..SERIES {
        let x: Vec<f64> = ar1(&mut rng, DAY).iter().map(|v| (v * 10.0).round() / 10.0).collect();
        let r = stuck(&x, &p);
        assert!((r.resolution.unwrap() - 0.1).abs() < 1e-6);
        assert!(r.flagged.is_empty(), "run of {}", r.statistic);
    }
}

#[test]
fn noise_change_false_alarm_rate_on_ar1_is_below_2_percent() {
    let mut rng = Xoshiro256Plus::seed_from_u64(46);
    let p = NoiseChange::params().check().unwrap();
    let (mut alarms, mut windows) = (0usize, 0usize);
    for _ in 0..SERIES {
        let x = ar1(&mut rng, 2 * DAY);
        let (base, rest) = x.split_at(DAY);
        for w in rest.chunks_exact(60) {
            alarms += usize::from(noise_change(base, w, &p).unwrap().flagged);
            windows += 1;
        }
    }
    let rate = alarms as f64 / windows as f64;
    eprintln!("noise_change AR(1) rate {rate:.4} over {windows} windows");
    assert!(rate <= 0.02, "rate {rate}");
}

#[test]
fn noise_change_without_differencing_would_be_biased_by_autocorrelation() {
    // Why differencing: on AR(1), φ = 0.9, a 60-point window's level spread is
    // ~25 % below the marginal spread, while the spread of its differences is not.
    let mut rng = Xoshiro256Plus::seed_from_u64(47);
    let (mut level, mut diff) = (0.0, 0.0);
    for _ in 0..SERIES {
        let x = ar1(&mut rng, 2 * DAY);
        let (base, rest) = x.split_at(DAY);
        let w = &rest[..60];
        level += crate::robust::qn(w).unwrap() / crate::robust::qn(base).unwrap();
        let d = |s: &[f64]| s.windows(2).map(|p| p[1] - p[0]).collect::<Vec<_>>();
        diff += crate::robust::qn(&d(w)).unwrap() / crate::robust::qn(&d(base)).unwrap();
    }
    let (level, diff) = (level / SERIES as f64, diff / SERIES as f64);
    eprintln!("mean Qn ratio: level {level:.3}, differences {diff:.3}");
    assert!(level < 0.9 && (diff - 1.0).abs() < 0.1);
}

#[test]
fn resolution_change_false_alarm_rate_on_quantised_ar1_is_below_1_percent() {
    let mut rng = Xoshiro256Plus::seed_from_u64(48);
    let p = ResolutionChange::params().check().unwrap();
    let (mut alarms, mut windows) = (0usize, 0usize);
    for _ in 0..SERIES {
        let x: Vec<f64> = ar1(&mut rng, 2 * DAY).iter().map(|v| (v * 2.0).round() / 2.0).collect();
        let (base, rest) = x.split_at(DAY);
        for w in rest.chunks_exact(60) {
            let r = resolution_change(base, w, &p);
            alarms += usize::from(r.flagged);
            windows += usize::from(r.applicable);
        }
    }
    let rate = alarms as f64 / windows.max(1) as f64;
    eprintln!("resolution_change quantised AR(1) rate {rate:.4} over {windows} windows");
    assert!(windows > 0 && rate <= 0.01, "rate {rate}");
}

#[test]
fn resolution_change_never_applies_to_continuous_ar1() {
    let mut rng = Xoshiro256Plus::seed_from_u64(49);
    let p = ResolutionChange::params().check().unwrap();
    for _ in 0..SERIES {
        let x = ar1(&mut rng, 2 * DAY);
        let r = resolution_change(&x[..DAY], &x[DAY..DAY + 60], &p);
        assert!(!r.applicable && !r.flagged);
    }
}
