//! PELT: exact penalised segmentation (Killick, Fearnhead & Eckley 2012).

mod algorithm;
mod error;
mod params;

pub use algorithm::{Pelt, Segmentation};
pub use error::{PeltError, PeltParamsError};
pub use params::{Autocorrelation, Cost, PeltParams, PeltValidParams, Penalty, Pruning};

#[cfg(test)]
mod tests {
    use super::algorithm::oracle::optimal_partitioning;
    use super::*;
    use approx::assert_relative_eq;
    use linfa::ParamGuard;
    use proptest::prelude::*;

    // EXTERNAL-CHECKS.md section 8 check A: default_rng(20240607), means 0/4/-2, sigma 1,
    // rounded to 2 dp; rpt.Pelt(model="l2", min_size=2, jump=1).predict(pen=2 ln 60).
    #[expect(clippy::approx_constant, reason = "3.14 is a data value, not pi")]
    const SYNTH: [f64; 60] = [
        -0.09, -0.43, -2.87, 3.25, 0.15, 1.31, 0.35, -0.72, 0.82, -2.12, 0.29, 0.56, -0.98, -1.0,
        0.57, 0.59, -1.14, -1.44, 2.09, 0.51, 4.03, 2.83, 3.11, 3.44, 3.44, 3.43, 6.06, 4.58, 2.58,
        4.47, 2.05, 3.14, 3.62, 4.88, 2.75, 3.9, 4.09, 2.5, 3.56, 4.88, -2.01, -2.76, -2.26, -1.72,
        -2.82, -3.78, -1.0, -2.09, -2.39, -2.36, -0.86, -1.89, -0.73, -0.15, -3.55, -1.72, -1.54,
        0.24, -1.54, -0.72,
    ];

    fn seg(y: &[f64], cost: Cost, pen: f64, pruning: Pruning) -> Segmentation {
        Pelt::params(cost)
            .penalty(Penalty::Value(pen))
            .pruning(pruning)
            .check()
            .unwrap()
            .segment(y)
            .unwrap()
    }

    #[test]
    fn check_a_three_segments_and_cost() {
        let pen = 2.0 * 60f64.ln();
        for pruning in [Pruning::Exact, Pruning::RupturesCompatible] {
            let s = seg(&SYNTH, Cost::L2, pen, pruning);
            assert_eq!(s.breakpoints, vec![20, 40, 60]);
            assert_relative_eq!(s.penalised_cost, 92.73247325, max_relative = 1e-9);
        }
        let (b, c) = optimal_partitioning(&SYNTH, Cost::L2, 2, pen);
        assert_eq!(b, vec![20, 40, 60]);
        assert_relative_eq!(c, 92.7324732488884, max_relative = 1e-10);
    }

    #[test]
    fn too_short_and_nan_are_errors() {
        let p = Pelt::params(Cost::L2).penalty(Penalty::Value(1.0)).check().unwrap();
        assert!(matches!(p.segment(&[1.0]), Err(PeltError::TooShort { n: 1, min_size: 2 })));
        let e = p.segment(&[1.0, f64::NAN, 2.0]).unwrap_err();
        assert!(e.to_string().contains("observation 1"));
        let bic = Pelt::params(Cost::L2).check().unwrap();
        assert!(matches!(bic.segment(&[3.0; 10]), Err(PeltError::ZeroScale)));
    }

    #[test]
    fn bic_uses_two_sigma_squared_ln_n() {
        let p = Pelt::params(Cost::L2).autocorrelation(Autocorrelation::Ignore).noise_sigma(2.0);
        let s = p.check().unwrap().segment(&SYNTH).unwrap();
        assert_relative_eq!(s.beta, 2.0 * 4.0 * 60f64.ln(), max_relative = 1e-12);
        let s = Pelt::params(Cost::Normal)
            .autocorrelation(Autocorrelation::Ignore)
            .check()
            .unwrap()
            .segment(&SYNTH)
            .unwrap();
        assert_relative_eq!(s.beta, 3.0 * 60f64.ln(), max_relative = 1e-12);
    }

    #[test]
    fn mbic_objective_is_reported_consistently() {
        let p = Pelt::params(Cost::L2)
            .penalty(Penalty::Mbic)
            .autocorrelation(Autocorrelation::Ignore)
            .noise_sigma(1.0);
        let s = p.check().unwrap().segment(&SYNTH).unwrap();
        assert_eq!(s.breakpoints, vec![20, 40, 60]);
        // recompute sum SSE + 3 ln n * 2 + sum ln(n_i/n) by hand
        let mut start = 0;
        let mut total = 3.0 * 60f64.ln() * 2.0;
        for &b in &s.breakpoints {
            let seg = &SYNTH[start..b];
            let mean = seg.iter().sum::<f64>() / seg.len() as f64;
            total += seg.iter().map(|v| (v - mean).powi(2)).sum::<f64>();
            total += ((b - start) as f64 / 60.0).ln();
            start = b;
        }
        assert_relative_eq!(s.penalised_cost, total, max_relative = 1e-10);
    }

    fn series() -> impl Strategy<Value = Vec<f64>> {
        // small integers make exact ties common; piecewise levels make changes real
        prop::collection::vec((0i32..4, -3i32..4), 2..60).prop_map(|v| {
            let mut level = 0.0;
            v.into_iter()
                .map(|(jump, noise)| {
                    if jump == 0 {
                        level += 3.0;
                    }
                    level + noise as f64
                })
                .collect()
        })
    }

    proptest! {
        #[test]
        fn pelt_equals_optimal_partitioning(y in series(), pen in 0.0f64..30.0, m in 1usize..5, normal in any::<bool>()) {
            let cost = if normal { Cost::Normal } else { Cost::L2 };
            let m = if normal { m.max(2) } else { m };
            prop_assume!(y.len() >= m);
            let p = Pelt::params(cost).penalty(Penalty::Value(pen)).min_size(m).check().unwrap();
            let s = p.segment(&y).unwrap();
            let (b, c) = optimal_partitioning(&y, cost, m, pen);
            prop_assert_eq!(&s.breakpoints, &b);
            prop_assert!((s.penalised_cost - c).abs() <= 1e-9 * (1.0 + c.abs()));
            prop_assert!(s.breakpoints.windows(2).all(|w| w[1] - w[0] >= m));
        }

        #[test]
        fn ruptures_mode_never_beats_the_optimum(y in series(), pen in 0.0f64..30.0) {
            let exact = seg(&y, Cost::L2, pen, Pruning::Exact);
            let rup = seg(&y, Cost::L2, pen, Pruning::RupturesCompatible);
            prop_assert!(rup.penalised_cost >= exact.penalised_cost - 1e-9 * (1.0 + exact.penalised_cost.abs()));
        }
    }
}
