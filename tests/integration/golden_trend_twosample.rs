//! Reference-value tests for trend, two-sample, distribution and
//! autocorrelation code in telltale-models.
//!
//! Two sources: the verified check catalogue (`reference_vectors.json`, made by
//! `tests/golden/make_reference_vectors.py`; sections 9-12 of
//! EXTERNAL-CHECKS.md) and seeded library runs (`trend_vectors.json`, made by
//! `tests/golden/make_trend_vectors.py`, which records each exact call and the
//! library versions: scipy 1.17.1, statsmodels 0.15.0, pymannkendall 1.4.3).

use approx::assert_relative_eq;
use serde_json::Value;
use telltale_models::autocorr::{Ar1Estimator, acf};
use telltale_models::dist;
use telltale_models::trend::{MannKendall, SerialCorrection, TheilSen, theil_sen};
use telltale_models::twosample::{
    Adjustment, BrownForsythe, KolmogorovSmirnov, KsMethod, MannWhitney, UMethod,
};

fn catalogue() -> Value {
    serde_json::from_str(include_str!("../golden/reference_vectors.json"))
        .expect("valid catalogue JSON")
}

fn golden() -> Value {
    serde_json::from_str(include_str!("../golden/trend_vectors.json")).expect("valid golden JSON")
}

fn f(v: &Value) -> f64 {
    v.as_f64().expect("number")
}

fn vecf(v: &Value) -> Vec<f64> {
    v.as_array().expect("array").iter().map(f).collect()
}

// ---- catalogue (EXTERNAL-CHECKS §9-§12) -----------------------------------

#[test]
fn catalogue_mann_kendall_holy_cross() {
    // §9 check A: P-confirmed worked example; library values pymannkendall 1.4.3 (V-run)
    let c = &catalogue()["9_mann_kendall"]["holycross"];
    let x = [12.9, 14.8, 13.2, 15.7, 13.8, 15.6, 12.9, 11.0, 17.3, 15.9, 19.0, 18.3, 20.1, 21.7];
    let r = MannKendall::params().correction(SerialCorrection::None).test(&x).unwrap();
    assert_eq!(r.s as f64, f(&c["S"]));
    assert_relative_eq!(r.var_s, f(&c["var_s"]), max_relative = 1e-10);
    assert_relative_eq!(r.z, f(&c["z"]), max_relative = 1e-8);
    assert_relative_eq!(r.p_two_sided, f(&c["p_two_sided"]), max_relative = 1e-8);
    assert_relative_eq!(r.p_increasing, f(&c["p_one_sided"]), max_relative = 1e-8);
    assert_relative_eq!(r.tau, f(&c["tau_mk"]), max_relative = 1e-12);
    let t: Vec<f64> = (0..14).map(f64::from).collect();
    let ts = theil_sen(&t, &x).unwrap();
    let c0 = &c["theilslopes_x0"];
    assert_relative_eq!(ts.slope, f(&c0["slope"]), max_relative = 1e-12);
    assert_relative_eq!(ts.intercept, f(&c0["intercept"]), max_relative = 1e-12);
    assert_relative_eq!(ts.slope_low, f(&c0["low"]), max_relative = 1e-12);
    assert_relative_eq!(ts.slope_high, f(&c0["high"]), max_relative = 1e-12);
}

#[test]
fn catalogue_mann_kendall_exact_n4() {
    // §9 check B: P(S >= 4) = 1/6 by enumerating 24 permutations (V-run)
    let c = &catalogue()["9_mann_kendall"]["gilbert_n4"];
    let r = MannKendall::params()
        .correction(SerialCorrection::None)
        .test(&[10.0, 15.0, 14.0, 20.0])
        .unwrap();
    assert_eq!(r.s as f64, f(&c["S"]));
    assert_relative_eq!(r.p_increasing, f(&c["p_exact_upper_tail"]), max_relative = 1e-12);
}

#[test]
fn catalogue_mann_whitney() {
    // §10: scipy mannwhitneyu docstring example and the tied example (V-2lib with R)
    let c = &catalogue()["10_mann_whitney"];
    let plain = |m: UMethod, cc: bool| {
        MannWhitney::params().method(m).continuity(cc).adjustment(Adjustment::None)
    };
    let (males, females) = ([19.0, 22.0, 16.0, 29.0, 24.0], [20.0, 11.0, 17.0, 12.0]);
    let d = &c["scipy_doc_example"];
    let r = plain(UMethod::Exact, true).test(&males, &females).unwrap();
    assert_eq!(r.u_x, f(&d["U1"]));
    assert_relative_eq!(r.p_two_sided, f(&d["p_exact"]), max_relative = 1e-12);
    let r = plain(UMethod::Asymptotic, true).test(&males, &females).unwrap();
    assert_relative_eq!(r.p_two_sided, f(&d["p_asym_cc"]), max_relative = 1e-8);
    let r = plain(UMethod::Asymptotic, false).test(&males, &females).unwrap();
    assert_relative_eq!(r.p_two_sided, f(&d["p_asym_nocc"]), max_relative = 1e-8);
    let t = &c["tied_example"];
    let (a, b) = (vecf(&t["a"]), vecf(&t["b"]));
    let r = plain(UMethod::Auto, true).test(&a, &b).unwrap();
    assert_eq!(r.u_x, f(&t["U1"]));
    assert_relative_eq!(r.p_two_sided, f(&t["p_asym_cc"]), max_relative = 1e-8);
    let r = plain(UMethod::Auto, false).test(&a, &b).unwrap();
    assert_relative_eq!(r.p_two_sided, f(&t["p_asym_nocc"]), max_relative = 1e-8);
}

#[test]
fn catalogue_kolmogorov_smirnov() {
    // §11 checks A (combinatorial), B (scipy exact, V-2lib with R) and C (kstwobign.isf)
    let c = &catalogue()["11_ks"];
    let p = KolmogorovSmirnov::params().method(KsMethod::Exact).adjustment(Adjustment::None);
    let r = p.test(&[1.0, 2.0, 3.0, 4.0, 5.0], &[6.0, 7.0, 8.0, 9.0, 10.0]).unwrap();
    assert_eq!(r.d, f(&c["separated_5_5"]["D"]));
    assert_relative_eq!(r.p_two_sided, f(&c["separated_5_5"]["p_exact"]), max_relative = 1e-12);
    let s = &c["seeded_15_12"];
    let r = p.test(&vecf(&s["a"]), &vecf(&s["b"])).unwrap();
    assert_relative_eq!(r.d, f(&s["D"]), max_relative = 1e-12);
    assert_relative_eq!(r.p_two_sided, f(&s["p_exact"]), max_relative = 1e-8);
    assert_eq!(r.location, f(&s["statistic_location"]));
    assert_eq!(f64::from(r.sign), f(&s["statistic_sign"]));
    for (alpha, want) in c["kolmogorov_c_alpha"].as_object().expect("object") {
        let alpha: f64 = alpha.parse().expect("alpha key");
        assert_relative_eq!(dist::kolmogorov_isf(alpha), f(want), max_relative = 1e-8);
    }
}

#[test]
fn catalogue_brown_forsythe() {
    // §12: NIST GEAR.DAT (data as in scipy's test suite) and the two-group example
    const GEAR: [[f64; 10]; 10] = [
        [1.006, 0.996, 0.998, 1.000, 0.992, 0.993, 1.002, 0.999, 0.994, 1.000],
        [0.998, 1.006, 1.000, 1.002, 0.997, 0.998, 0.996, 1.000, 1.006, 0.988],
        [0.991, 0.987, 0.997, 0.999, 0.995, 0.994, 1.000, 0.999, 0.996, 0.996],
        [1.005, 1.002, 0.994, 1.000, 0.995, 0.994, 0.998, 0.996, 1.002, 0.996],
        [0.998, 0.998, 0.982, 0.990, 1.002, 0.984, 0.996, 0.993, 0.980, 0.996],
        [1.009, 1.013, 1.009, 0.997, 0.988, 1.002, 0.995, 0.998, 0.981, 0.996],
        [0.990, 1.004, 0.996, 1.001, 0.998, 1.000, 1.018, 1.010, 0.996, 1.002],
        [0.998, 1.000, 1.006, 1.000, 1.002, 0.996, 0.998, 0.996, 1.002, 1.006],
        [1.002, 0.998, 0.996, 0.995, 0.996, 1.004, 1.004, 0.998, 0.999, 0.991],
        [0.991, 0.995, 0.984, 0.994, 0.997, 0.997, 0.991, 0.998, 1.004, 0.997],
    ];
    let c = &catalogue()["12_levene"];
    let p = BrownForsythe::params().adjustment(Adjustment::None);
    let g: Vec<&[f64]> = GEAR.iter().map(|r| r.as_slice()).collect();
    let r = p.test(&g).unwrap();
    assert_relative_eq!(r.w, f(&c["gear"]["W_median_BF"]), max_relative = 1e-10);
    assert_relative_eq!(r.p_value, f(&c["gear"]["p_median"]), max_relative = 1e-8);
    let t = &c["two_group"];
    let r = p.test(&[&vecf(&t["before"]), &vecf(&t["after"])]).unwrap();
    assert_relative_eq!(r.w, f(&t["W_median"]), max_relative = 1e-10);
    assert_relative_eq!(r.p_value, f(&t["p_median"]), max_relative = 1e-8);
}

// ---- seeded library runs (trend_vectors.json) -----------------------------

#[test]
fn distributions_match_scipy() {
    let d = &golden()["dist"];
    for e in d["norm"].as_array().unwrap() {
        assert_relative_eq!(dist::norm_cdf(f(&e["x"])), f(&e["cdf"]), max_relative = 1e-8);
        assert_relative_eq!(dist::norm_sf(f(&e["x"])), f(&e["sf"]), max_relative = 1e-8);
    }
    for e in d["norm_ppf"].as_array().unwrap() {
        assert_relative_eq!(dist::norm_ppf(f(&e["p"])), f(&e["ppf"]), max_relative = 1e-8);
    }
    for e in d["t_sf"].as_array().unwrap() {
        assert_relative_eq!(dist::t_sf(f(&e["t"]), f(&e["df"])), f(&e["sf"]), max_relative = 1e-8);
    }
    for e in d["f_sf"].as_array().unwrap() {
        let got = dist::f_sf(f(&e["f"]), f(&e["df1"]), f(&e["df2"]));
        assert_relative_eq!(got, f(&e["sf"]), max_relative = 1e-8);
    }
    for e in d["chi2_sf"].as_array().unwrap() {
        assert_relative_eq!(
            dist::chi2_sf(f(&e["x"]), f(&e["df"])),
            f(&e["sf"]),
            max_relative = 1e-8
        );
    }
    for e in d["beta_ppf"].as_array().unwrap() {
        let got = dist::beta_ppf(f(&e["p"]), f(&e["a"]), f(&e["b"]));
        assert_relative_eq!(got, f(&e["ppf"]), max_relative = 1e-8);
    }
    for e in d["kolmogorov_sf"].as_array().unwrap() {
        assert_relative_eq!(dist::kolmogorov_sf(f(&e["x"])), f(&e["sf"]), max_relative = 1e-8);
    }
    for e in d["kolmogorov_isf"].as_array().unwrap() {
        assert_relative_eq!(dist::kolmogorov_isf(f(&e["p"])), f(&e["isf"]), max_relative = 1e-8);
    }
}

#[test]
fn acf_matches_statsmodels() {
    let g = &golden()["acf"];
    let x = vecf(&g["x"]);
    let want = vecf(&g["acf"]);
    let got = acf(&x, want.len() - 1).unwrap();
    for (k, (a, b)) in got.iter().zip(&want).enumerate() {
        assert!((a - b).abs() <= 1e-12, "lag {k}: {a} vs {b}");
    }
}

#[test]
fn mann_kendall_with_ties_matches_pymannkendall() {
    let g = &golden()["mann_kendall"]["original_ties"];
    let r = MannKendall::params().correction(SerialCorrection::None).test(&vecf(&g["x"])).unwrap();
    assert_eq!(r.s as f64, f(&g["s"]));
    assert_relative_eq!(r.var_s, f(&g["var_s"]), max_relative = 1e-10);
    assert_relative_eq!(r.z, f(&g["z"]), max_relative = 1e-10);
    assert_relative_eq!(r.p_two_sided, f(&g["p"]), max_relative = 1e-6); // pymannkendall uses 1-cdf
    assert_relative_eq!(r.tau, f(&g["tau"]), max_relative = 1e-12);
}

#[test]
fn hamed_rao_matches_pymannkendall() {
    for case in ["hr_all_lags", "hr_trend_lag3", "hr_strong"] {
        let g = &golden()["mann_kendall"][case];
        let max_lag = g["lag"].as_u64().map(|l| l as usize);
        let r = MannKendall::params()
            .correction(SerialCorrection::HamedRao { max_lag, screening_alpha: 0.05 })
            .test(&vecf(&g["x"]))
            .unwrap();
        assert_eq!(r.s as f64, f(&g["s"]), "{case}");
        assert_relative_eq!(r.var_s, f(&g["var_s"]), max_relative = 1e-9);
        assert_relative_eq!(r.z, f(&g["z"]), max_relative = 1e-9);
        if f(&g["p"]) > 1e-12 {
            // below ~1e-12 pymannkendall's 2·(1-Φ) loses its digits to cancellation
            assert_relative_eq!(r.p_two_sided, f(&g["p"]), max_relative = 1e-6);
        }
    }
}

#[test]
fn default_prewhitening_matches_pymannkendall() {
    for case in ["pw_plain", "pw_trend"] {
        let g = &golden()["mann_kendall"][case];
        assert!(f(&g["r1"]) > 0.0, "{case}: default only whitens for positive r1");
        let r = MannKendall::params().test(&vecf(&g["x"])).unwrap();
        assert_relative_eq!(r.phi.unwrap(), f(&g["r1"]), max_relative = 1e-12);
        assert_eq!(r.s as f64, f(&g["s"]), "{case}");
        assert_relative_eq!(r.var_s, f(&g["var_s"]), max_relative = 1e-10);
        assert_relative_eq!(r.z, f(&g["z"]), max_relative = 1e-10);
        assert_relative_eq!(r.p_two_sided, f(&g["p"]), max_relative = 1e-8);
    }
    // the same default with a different estimator is a different test
    let g = &golden()["mann_kendall"]["pw_plain"];
    let r = MannKendall::params()
        .correction(SerialCorrection::Prewhiten {
            estimator: Ar1Estimator::BiasCorrected,
            detrend: false,
        })
        .test(&vecf(&g["x"]))
        .unwrap();
    assert!(r.phi.unwrap() > f(&g["r1"]));
}

#[test]
fn theil_sen_matches_scipy() {
    let g = golden();
    for (case, v) in g["theil_sen"].as_object().unwrap() {
        let confidence = v.get("confidence").map_or(0.95, f);
        let r =
            TheilSen::params().confidence(confidence).fit(&vecf(&v["t"]), &vecf(&v["y"])).unwrap();
        assert_relative_eq!(r.slope, f(&v["slope"]), max_relative = 1e-12);
        assert_relative_eq!(r.intercept, f(&v["intercept"]), max_relative = 1e-10);
        // order statistics of the slopes; 1e-12 rather than exact because
        // serde_json without its `float_roundtrip` feature may parse an input
        // value 1 ulp off, which moves a slope by about as much
        assert_relative_eq!(r.slope_low, f(&v["low"]), max_relative = 1e-12);
        assert_relative_eq!(r.slope_high, f(&v["high"]), max_relative = 1e-12);
        assert!(r.slope_low <= r.slope && r.slope <= r.slope_high, "{case}");
    }
}

#[test]
fn two_sample_tests_match_scipy() {
    let g = golden();
    let two = &g["two_sample"];
    let v = &two["mw_asymptotic"];
    let r = MannWhitney::params()
        .method(UMethod::Asymptotic)
        .adjustment(Adjustment::None)
        .test(&vecf(&v["a"]), &vecf(&v["b"]))
        .unwrap();
    assert_eq!(r.u_x, f(&v["u"]));
    assert_relative_eq!(r.p_two_sided, f(&v["p"]), max_relative = 1e-8);
    let v = &two["mw_exact"];
    let r = MannWhitney::params()
        .method(UMethod::Exact)
        .adjustment(Adjustment::None)
        .test(&vecf(&v["a"]), &vecf(&v["b"]))
        .unwrap();
    assert_eq!(r.u_x, f(&v["u"]));
    assert_relative_eq!(r.p_two_sided, f(&v["p"]), max_relative = 1e-10);

    let v = &two["ks_exact"];
    let r = KolmogorovSmirnov::params()
        .method(KsMethod::Exact)
        .adjustment(Adjustment::None)
        .test(&vecf(&v["a"]), &vecf(&v["b"]))
        .unwrap();
    assert_relative_eq!(r.d, f(&v["d"]), max_relative = 1e-12);
    assert_relative_eq!(r.p_two_sided, f(&v["p"]), max_relative = 1e-8);
    assert_eq!(r.location, f(&v["location"]));
    assert_eq!(f64::from(r.sign), f(&v["sign"]));
    let v = &two["ks_asymptotic"];
    let r = KolmogorovSmirnov::params()
        .method(KsMethod::Asymptotic)
        .adjustment(Adjustment::None)
        .test(&vecf(&v["a"]), &vecf(&v["b"]))
        .unwrap();
    assert_relative_eq!(r.d, f(&v["d"]), max_relative = 1e-12);
    assert_relative_eq!(r.p_two_sided, f(&v["p_kstwobign"]), max_relative = 1e-8);

    let v = &two["bf_three_groups"];
    let groups: Vec<Vec<f64>> = v["groups"].as_array().unwrap().iter().map(vecf).collect();
    let refs: Vec<&[f64]> = groups.iter().map(Vec::as_slice).collect();
    let r = BrownForsythe::params().adjustment(Adjustment::None).test(&refs).unwrap();
    assert_relative_eq!(r.w, f(&v["w"]), max_relative = 1e-10);
    assert_relative_eq!(r.p_value, f(&v["p"]), max_relative = 1e-8);
}
