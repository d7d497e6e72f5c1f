//! Tabular CUSUM (Page 1954, Montgomery's form), its ARL-based design
//! (Siegmund 1985) and the self-starting chart (Hawkins 1987).

mod algorithm;
mod design;
mod error;
mod params;
mod self_starting;

pub use algorithm::{Alarm, Cusum, CusumTrace, Side, cusum};
pub use design::{CusumDesign, design_for_shift, design_threshold, siegmund_arl, two_sided_arl};
pub use error::{CusumDesignError, CusumError, CusumParamsError};
pub use params::{CusumParams, CusumValidParams};
pub use self_starting::SelfStartingCusum;

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;
    use linfa::ParamGuard;
    use proptest::prelude::*;

    // Montgomery, Introduction to Statistical Quality Control, Example 9.1 (Tables 9.1/9.2);
    // data P-confirmed per EXTERNAL-CHECKS.md section 6 check A.
    const MONTGOMERY_9_1: [f64; 30] = [
        9.45, 7.99, 9.29, 11.66, 12.16, 10.18, 8.04, 11.46, 9.20, 10.34, 9.03, 11.47, 10.51, 9.40,
        10.08, 9.37, 10.62, 10.31, 8.52, 10.84, 10.90, 9.33, 12.29, 11.50, 10.60, 11.08, 10.38,
        11.62, 11.31, 10.52,
    ];
    // Published upper sums C+ for periods 1-30 (catalogue section 6 check A, 2 dp; 30 computed).
    const C_PLUS: [f64; 30] = [
        0.0, 0.0, 0.0, 1.16, 2.82, 2.50, 0.04, 1.00, 0.0, 0.0, 0.0, 0.97, 0.98, 0.0, 0.0, 0.0,
        0.12, 0.0, 0.0, 0.34, 0.74, 0.0, 1.79, 2.79, 2.89, 3.47, 3.35, 4.47, 5.28, 5.30,
    ];

    #[test]
    fn montgomery_example_9_1_sums_signal_and_shift() {
        let p = Cusum::params(10.0, 1.0).reset_after_alarm(false).check().unwrap();
        let t = cusum(&MONTGOMERY_9_1, &p).unwrap();
        for (i, (&got, &want)) in t.upper.iter().zip(C_PLUS.iter()).enumerate() {
            assert!((got - want).abs() < 1e-9, "period {}: C+ {got} vs {want}", i + 1);
        }
        let a = t.first_alarm().unwrap();
        // first signal period 29 (1-based), N+ = 7, last in-control 22, mu_hat = 11.25
        assert_eq!((a.index + 1, a.run_length, a.side), (29, 7, Side::Upper));
        assert_eq!(a.last_in_control.map(|i| i + 1), Some(22));
        assert_abs_diff_eq!(a.shift_estimate, 10.0 + 0.5 + 5.28 / 7.0, epsilon = 1e-9);
    }

    #[test]
    fn montgomery_exercise_9_1_standardised() {
        // Montgomery Exercise 9.1 (first 12 obs, catalogue section 6 check B): target 1050,
        // sigma 25, k = 0.5, h = 5; signal at observation 10 with N+ = 3.
        let x =
            [1045., 1055., 1037., 1064., 1095., 1008., 1050., 1087., 1125., 1146., 1139., 1169.];
        let want = [0.0, 0.0, 0.0, 0.06, 1.36, 0.0, 0.0, 0.98, 3.48, 6.82, 9.88, 14.14];
        let p = Cusum::params(1050.0, 25.0).reset_after_alarm(false).check().unwrap();
        let t = cusum(&x, &p).unwrap();
        for (g, w) in t.upper.iter().zip(want) {
            assert_abs_diff_eq!(*g, w, epsilon = 1e-9);
        }
        let a = t.first_alarm().unwrap();
        assert_eq!((a.index + 1, a.run_length, a.last_in_control.map(|i| i + 1)), (10, 3, Some(7)));
    }

    #[test]
    fn reset_after_alarm_restarts_sums() {
        let p = Cusum::params(10.0, 1.0).check().unwrap();
        let t = cusum(&MONTGOMERY_9_1, &p).unwrap();
        // period 29 signals with 5.28; reset, so period 30 is max(0, 10.52 - 10.5) = 0.02
        assert_abs_diff_eq!(t.upper[28], 5.28, epsilon = 1e-9);
        assert_abs_diff_eq!(t.upper[29], 0.02, epsilon = 1e-9);
        assert_eq!(t.alarms.len(), 1);
    }

    #[test]
    fn streaming_equals_batch() {
        let p = Cusum::params(10.0, 1.0).check().unwrap();
        let batch = cusum(&MONTGOMERY_9_1, &p).unwrap();
        let mut c = Cusum::new(p);
        let alarms: Vec<Alarm> = MONTGOMERY_9_1.iter().filter_map(|&x| c.update(x)).collect();
        assert_eq!(alarms, batch.alarms);
    }

    #[test]
    fn batch_rejects_nan_with_position() {
        let p = Cusum::params(0.0, 1.0).check().unwrap();
        let e = cusum(&[0.0, f64::NAN], &p).unwrap_err();
        assert!(e.to_string().contains("observation 1"), "{e}");
    }

    #[test]
    fn siegmund_arl_matches_formula_and_tables() {
        // Hand evaluation of Siegmund's formula, k = 0.5, h = 4: b = 5.166, one-sided
        // ARL0 = (e^5.166 - 5.166 - 1) / 0.5; two-sided = half of it.
        let b: f64 = 5.166;
        let one = (b.exp() - b - 1.0) / 0.5;
        assert_abs_diff_eq!(siegmund_arl(0.5, 4.0, 0.0), one, epsilon = 1e-9);
        assert_abs_diff_eq!(two_sided_arl(0.5, 4.0, 0.0), one / 2.0, epsilon = 1e-9);
        // Montgomery Table 9.3 (k = 0.5; from memory): ARL0 168 (h = 4), 465 (h = 5),
        // ARL at a 1-sigma shift 8.38 (h = 4), 10.4 (h = 5). Siegmund's approximation
        // gives 169.0 / 469.1 / 8.34 / 10.34, within 1% of the table.
        for (h, shift, table) in
            [(4.0, 0.0, 168.0), (5.0, 0.0, 465.0), (4.0, 1.0, 8.38), (5.0, 1.0, 10.4)]
        {
            let got = two_sided_arl(0.5, h, shift);
            assert!((got / table - 1.0).abs() < 0.01, "h={h} shift={shift}: {got} vs {table}");
        }
        // Delta = 0 limit is b^2
        assert_abs_diff_eq!(siegmund_arl(0.5, 4.0, 0.5), b * b, epsilon = 1e-9);
    }

    #[test]
    fn design_threshold_inverts_arl() {
        let h = design_threshold(0.5, 465.0).unwrap();
        assert_abs_diff_eq!(two_sided_arl(0.5, h, 0.0), 465.0, epsilon = 1e-6);
        assert!((h - 5.0).abs() < 0.02, "h = {h}");
        assert!(design_threshold(0.5, 1.0).is_err());
        let d = design_for_shift(1.0, 370.0).unwrap();
        assert_eq!(d.drift, 0.5);
        assert!(d.arl1 < 12.0 && d.threshold > 4.0 && d.threshold < 5.0);
    }

    #[test]
    fn residual_chart_removes_ar1_and_reports_shift_in_data_units() {
        // x_t - 5 = 0.8 (x_{t-1} - 5) exactly, then a step of +2: innovations 0 then 2 (1 - 0.8)... per step
        let phi = 0.8;
        let sigma = 1.0;
        let p = Cusum::params(5.0, sigma).ar1(phi).reset_after_alarm(false).check().unwrap();
        let mut x = vec![5.0; 10];
        x.extend(std::iter::repeat_n(7.0, 200));
        let t = cusum(&x, &p).unwrap();
        assert!(t.upper[..10].iter().all(|&c| c == 0.0));
        let a = t.first_alarm().unwrap();
        // the shift estimate of a long run converges to the new level 7 (first point adds
        // an excess), so it lies between 7 and the one-step value
        assert!(a.shift_estimate > 7.0 && a.shift_estimate < 9.0, "{a:?}");
    }

    #[test]
    fn self_starting_matches_scipy_normal_scores_on_hand_data() {
        // Hawkins (1987) transform evaluated by hand-chosen data; x = [1, 3, 2]:
        // third point: mean 2, sd sqrt(2), T = 0 -> U = 0
        let mut s = SelfStartingCusum::new(0.5, 5.0, true).unwrap();
        for x in [1.0, 3.0] {
            assert!(s.update(x).is_none());
            assert!(s.last_score().is_none());
        }
        s.update(2.0);
        assert_abs_diff_eq!(s.last_score().unwrap(), 0.0, epsilon = 1e-12);
    }

    proptest! {
        #[test]
        fn sums_never_negative_and_reset_after_alarm(
            xs in prop::collection::vec(-10.0f64..10.0, 1..300),
            k in 0.0f64..2.0, h in 0.1f64..8.0,
        ) {
            let p = Cusum::params(0.0, 1.0).drift(k).threshold(h).check().unwrap();
            let mut c = Cusum::new(p);
            for &x in &xs {
                let alarm = c.update(x);
                prop_assert!(c.upper() >= 0.0 && c.lower() >= 0.0);
                if let Some(a) = alarm {
                    prop_assert!(a.statistic > h);
                    prop_assert_eq!((c.upper(), c.lower(), c.n_upper(), c.n_lower()), (0.0, 0.0, 0, 0));
                } else {
                    prop_assert!(c.upper() <= h && c.lower() <= h);
                }
            }
        }
    }

    // Montgomery Example 9.1 signals at period 29 with N+ = 7, last in-control
    // period 22 (1-based; catalogue section 6 check A). Gaps (NaN) inserted
    // inside the signalling run must not move the onset: it stays at the
    // observation before the run began.
    #[test]
    fn gaps_inside_the_run_do_not_move_the_onset() {
        let p = Cusum::params(10.0, 1.0).drift(0.5).threshold(5.0).check().unwrap();
        let mut with_gaps: Vec<f64> = MONTGOMERY_9_1[..25].to_vec();
        with_gaps.extend([f64::NAN, f64::NAN]);
        with_gaps.extend_from_slice(&MONTGOMERY_9_1[25..]);
        let mut chart = Cusum::new(p);
        let alarm = with_gaps.iter().find_map(|&x| chart.update(x)).unwrap();
        // period 29 is now stream position 30 (0-based), the run still began at 0-based 22
        assert_eq!(alarm.index, 30);
        assert_eq!(alarm.run_length, 7);
        assert_eq!(alarm.last_in_control, Some(21));
    }

    #[test]
    fn self_starting_onset_is_a_stream_position() {
        // 30 in-control points (alternating +-1 around 0), then a gap, then a +6 shift:
        // the run begins at the first shifted point, so the onset is the gap before it.
        let mut x: Vec<f64> = (0..30).map(|i| if i % 2 == 0 { 1.0 } else { -1.0 }).collect();
        x.push(f64::NAN);
        x.extend(std::iter::repeat_n(6.0, 10));
        let mut s = SelfStartingCusum::new(0.5, 5.0, false).unwrap();
        let alarm = x.iter().find_map(|&v| s.update(v)).unwrap();
        assert!(alarm.index > 30);
        assert_eq!(alarm.last_in_control, Some(30), "{alarm:?}");
    }
}
