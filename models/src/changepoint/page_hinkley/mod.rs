//! Page–Hinkley test (Page 1954; Hinkley 1971), running-mean and known-mean variants.

mod algorithm;
mod error;
mod params;

pub use algorithm::{PageHinkley, PhAlarm, PhTrace, page_hinkley};
pub use error::{PageHinkleyError, PageHinkleyParamsError};
pub use params::{Direction, PageHinkleyParams, PageHinkleyValidParams, PhReference};

#[cfg(test)]
mod tests {
    use super::*;
    use crate::changepoint::{Cusum, cusum};
    use approx::assert_abs_diff_eq;
    use linfa::ParamGuard;

    #[test]
    fn check_a_running_mean_exact_rationals() {
        // EXTERNAL-CHECKS.md section 7 check A (exact rationals, Python fractions):
        // x = [0,0,0,0,0,5,5,5,5,5], delta = 1/2, lambda = 5, Variant A.
        let x = [0.0, 0.0, 0.0, 0.0, 0.0, 5.0, 5.0, 5.0, 5.0, 5.0];
        let p =
            PageHinkley::params().delta(0.5).lambda(5.0).reset_after_alarm(false).check().unwrap();
        let t = page_hinkley(&x, &p).unwrap();
        for i in 0..5 {
            assert_abs_diff_eq!(t.m[i], -((i + 1) as f64) / 2.0, epsilon = 1e-12);
            assert_abs_diff_eq!(t.ph[i], 0.0, epsilon = 1e-12);
        }
        assert_abs_diff_eq!(t.reference[5], 5.0 / 6.0, epsilon = 1e-12);
        assert_abs_diff_eq!(t.m[5], 7.0 / 6.0, epsilon = 1e-12);
        assert_abs_diff_eq!(t.ph[5], 11.0 / 3.0, epsilon = 1e-12);
        assert_abs_diff_eq!(t.m[6], 89.0 / 21.0, epsilon = 1e-12);
        assert_abs_diff_eq!(t.min_m[6], -2.5, epsilon = 1e-12);
        assert_abs_diff_eq!(t.ph[6], 283.0 / 42.0, epsilon = 1e-12);
        assert_abs_diff_eq!(t.ph[7], 9.363095238, epsilon = 1e-9);
        assert_abs_diff_eq!(t.ph[9], 13.64087302, epsilon = 1e-8);
        assert_eq!(t.alarms[0].index + 1, 7); // T = 7
        assert_eq!(t.alarms[0].last_in_control, Some(4)); // minimum of m at T = 5
    }

    #[test]
    fn check_b_known_mean_equals_cusum_upper_on_montgomery() {
        // EXTERNAL-CHECKS.md section 7 check B: Variant B on Montgomery Example 9.1 data
        // (mu_0 = 10, delta = 0.5, lambda = 5) is identical to C+ with K = 0.5; alarm T = 29.
        let x = [
            9.45, 7.99, 9.29, 11.66, 12.16, 10.18, 8.04, 11.46, 9.20, 10.34, 9.03, 11.47, 10.51,
            9.40, 10.08, 9.37, 10.62, 10.31, 8.52, 10.84, 10.90, 9.33, 12.29, 11.50, 10.60, 11.08,
            10.38, 11.62, 11.31, 10.52,
        ];
        let p = PageHinkley::params()
            .reference(PhReference::KnownMean(10.0))
            .reset_after_alarm(false)
            .check()
            .unwrap();
        let ph = page_hinkley(&x, &p).unwrap();
        let c =
            cusum(&x, &Cusum::params(10.0, 1.0).reset_after_alarm(false).check().unwrap()).unwrap();
        for (a, b) in ph.ph.iter().zip(&c.upper) {
            assert!((a - b).abs() <= 1e-10 * (1.0 + b.abs()), "{a} vs {b}");
        }
        assert_eq!(ph.alarms[0].index + 1, 29);
        assert_eq!(ph.alarms[0].last_in_control.map(|i| i + 1), Some(22));
    }

    #[test]
    fn decrease_is_increase_on_negated_data() {
        let x: Vec<f64> = (0..60)
            .map(|i| if i < 30 { 0.0 } else { -2.0 } + ((i * 37 % 11) as f64 - 5.0) / 10.0)
            .collect();
        let neg: Vec<f64> = x.iter().map(|v| -v).collect();
        let down = page_hinkley(
            &x,
            &PageHinkley::params().direction(Direction::Decrease).check().unwrap(),
        )
        .unwrap();
        let up = page_hinkley(&neg, &PageHinkley::params().check().unwrap()).unwrap();
        assert_eq!(down.alarms.len(), up.alarms.len());
        assert!(!down.alarms.is_empty());
        for (a, b) in down.ph.iter().zip(&up.ph) {
            assert_abs_diff_eq!(*a, *b, epsilon = 1e-12);
        }
    }

    #[test]
    fn streaming_resets_after_alarm() {
        let p = PageHinkley::params().check().unwrap();
        let mut s = PageHinkley::new(p);
        let mut fired = false;
        for x in [0.0, 0.0, 0.0, 10.0, 10.0, 10.0] {
            if s.update(x).is_some() {
                fired = true;
                assert_eq!(s.statistic(), 0.0);
                assert_eq!(s.running_mean(), 0.0);
            }
        }
        assert!(fired);
    }
}
