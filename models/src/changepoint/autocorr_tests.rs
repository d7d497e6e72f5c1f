//! False-alarm rates of the detectors on clean AR(1) data (phi = 0.9), with
//! and without the autocorrelation adjustment.
//!
//! Documented bounds (each is the nominal iid rate with a factor 2 of slack
//! for estimating mu, phi and sigma from a 500-point warm-up; the factor is
//! common practice, no source):
//!
//! | detector (default setting)                      | nominal                         | bound |
//! |-------------------------------------------------|---------------------------------|-------|
//! | CUSUM k = 0.5, h = 5 on AR(1) residuals         | 1000 / ARL0 = 2.13 per 1000 obs | 4.3 per 1000 |
//! | Page–Hinkley delta = 0.5, lambda = 5 on residuals | 1000 / ARL0(one-sided) = 1.07 per 1000 | 2.1 per 1000 |
//! | PELT L2, BIC, AR(1) long-run penalty            | —                               | <= 10 % of series with any change |

use linfa::ParamGuard;
use rand::SeedableRng;
use rand_distr::{Distribution, Normal};
use rand_xoshiro::Xoshiro256PlusPlus;

use super::{
    Ar1, Autocorrelation, Cost, Cusum, CusumParams, PageHinkley, Pelt, page_hinkley, siegmund_arl,
    two_sided_arl,
};

const PHI: f64 = 0.9;
const WARM_UP: usize = 500;

/// Stationary AR(1) around 50 with unit innovations.
fn ar1_series(rng: &mut impl rand::Rng, n: usize) -> Vec<f64> {
    let e = Normal::new(0.0, 1.0).unwrap();
    let mut x = Vec::with_capacity(n);
    let mut prev = e.sample(rng) / (1.0 - PHI * PHI).sqrt();
    for _ in 0..n {
        x.push(50.0 + prev);
        prev = PHI * prev + e.sample(rng);
    }
    x
}

fn count_cusum_alarms(params: &CusumParams, monitored: &[f64]) -> usize {
    let mut c = Cusum::new(params.clone().check().unwrap());
    monitored.iter().filter_map(|&x| c.update(x)).count()
}

#[test]
fn ar1_false_alarm_rates_stay_within_documented_bounds() {
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(42);
    let (reps, n) = (60, 2500);
    let (mut cusum_adj, mut cusum_naive, mut ph_adj, mut ph_naive, mut monitored) = (0, 0, 0, 0, 0);
    let ph = PageHinkley::params().check().unwrap();
    for _ in 0..reps {
        let x = ar1_series(&mut rng, n);
        let model = Ar1::estimate(&x[..WARM_UP]).unwrap();
        let watch = &x[WARM_UP..];
        monitored += watch.len();
        cusum_adj += count_cusum_alarms(&model.cusum_params(), watch);
        cusum_naive += count_cusum_alarms(&CusumParams::new(model.mean, model.sigma), watch);
        // innovations need the previous point for the lag; drop that first value
        let z = model.innovations(&x[WARM_UP - 1..]);
        ph_adj += page_hinkley(&z[1..], &ph).unwrap().alarms.len();
        let plain: Vec<f64> = watch.iter().map(|v| (v - model.mean) / model.sigma).collect();
        ph_naive += page_hinkley(&plain, &ph).unwrap().alarms.len();
    }
    let per_1000 = |a: usize| a as f64 * 1000.0 / monitored as f64;
    let cusum_bound = 2.0 * 1000.0 / two_sided_arl(0.5, 5.0, 0.0);
    let ph_bound = 2.0 * 1000.0 / siegmund_arl(0.5, 5.0, 0.0);
    let (ca, cn, pa, pn) =
        (per_1000(cusum_adj), per_1000(cusum_naive), per_1000(ph_adj), per_1000(ph_naive));
    eprintln!(
        "per 1000 obs: cusum adj {ca:.2} naive {cn:.2} (bound {cusum_bound:.2}); PH adj {pa:.2} naive {pn:.2} (bound {ph_bound:.2})"
    );
    assert!(ca <= cusum_bound, "CUSUM residual chart: {ca:.2} per 1000 > {cusum_bound:.2}");
    assert!(pa <= ph_bound, "Page-Hinkley on residuals: {pa:.2} per 1000 > {ph_bound:.2}");
    // the unadjusted detectors alarm far more often on the same data (the running
    // mean of Page-Hinkley restarts after each alarm and so adapts a little)
    assert!(cn > 5.0 * cusum_bound, "naive CUSUM only {cn:.2} per 1000");
    assert!(pn > 3.0 * ph_bound, "naive Page-Hinkley only {pn:.2} per 1000");
}

#[test]
fn ar1_pelt_default_penalty_rarely_finds_changes() {
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(7);
    let (reps, n) = (40, 1000);
    let default = Pelt::params(Cost::L2).check().unwrap();
    let naive = Pelt::params(Cost::L2).autocorrelation(Autocorrelation::Ignore).check().unwrap();
    let normal = Pelt::params(Cost::Normal).check().unwrap();
    let (mut with_change, mut naive_changes, mut normal_with_change) = (0, 0, 0);
    for _ in 0..reps {
        let x = ar1_series(&mut rng, n);
        let s = default.segment(&x).unwrap();
        with_change += usize::from(s.n_changes() > 0);
        naive_changes += naive.segment(&x).unwrap().n_changes();
        normal_with_change += usize::from(normal.segment(&x).unwrap().n_changes() > 0);
    }
    let frac = with_change as f64 / reps as f64;
    let frac_normal = normal_with_change as f64 / reps as f64;
    assert!(frac <= 0.10, "PELT L2 default: {frac:.3} of clean AR(1) series had a change");
    assert!(
        frac_normal <= 0.10,
        "PELT Normal default: {frac_normal:.3} of clean series had a change"
    );
    let mean_naive = naive_changes as f64 / reps as f64;
    eprintln!(
        "PELT: L2 default {frac:.3}, Normal default {frac_normal:.3} of series with a change; naive BIC {mean_naive:.1} changes/series"
    );
    assert!(mean_naive > 5.0, "naive BIC found only {mean_naive:.1} changes per series");
}

#[test]
fn ar1_pelt_default_still_finds_a_three_sigma_step() {
    // power sanity check for the inflated penalty: a step of 3 marginal sigma
    // (sigma_x = 1 / sqrt(1 - 0.81) = 2.29) half-way through 1000 points.
    // (At 2 sigma_x it finds about 15 of 20: the estimated phi is still
    // somewhat inflated by the step.)
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(11);
    let p = Pelt::params(Cost::L2).check().unwrap();
    let step = 3.0 / (1.0 - PHI * PHI).sqrt();
    let mut found = 0;
    for _ in 0..20 {
        let mut x = ar1_series(&mut rng, 1000);
        x[500..].iter_mut().for_each(|v| *v += step);
        let s = p.segment(&x).unwrap();
        found += usize::from(s.breakpoints.iter().any(|&b| b.abs_diff(500) <= 25));
    }
    assert!(found >= 18, "step found in only {found} of 20 series");
}
