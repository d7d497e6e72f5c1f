//! Robust statistics, spike signatures and BH against the reference libraries
//! recorded in `tests/golden/reference_vectors.json` (catalogue sections 1-5
//! and 13; numpy 2.4.6, scipy 1.17.1, statsmodels 0.15.0, pandas 3.1.1) and
//! `tests/golden/robust_vectors.json` (n = 1000, made by
//! `tests/golden/make_robust_vectors.py`). Tolerance classes as in the catalogue.

use serde_json::Value;
use telltale_models::multitest::{benjamini_hochberg, benjamini_yekutieli};
use telltale_models::robust::{
    Huber, MAD_NORMAL, ParamGuard, QN_CONSTANT, QN_CONSTANT_PRINTED_1993, QuantileType,
    SN_CONSTANT, SmallSample, mad, mad_raw, median, qn_raw, qn_with, quantiles, rolling_median_mad,
    sn, sn_raw, sn_with,
};
use telltale_models::signatures::{Hampel, hampel_global, hampel_rolling};

const REF: &str = include_str!("../golden/reference_vectors.json");
const ROBUST: &str = include_str!("../golden/robust_vectors.json");

const X5: [f64; 5] = [1.0, 2.0, 3.0, 4.0, 100.0];
const X8: [f64; 8] = [1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 1000.0];
/// MASS::chem (Analytical Methods Committee 1989), catalogue §1.
const CHEM: [f64; 24] = [
    2.90, 3.10, 3.40, 3.40, 3.70, 3.70, 2.80, 2.50, 2.40, 2.40, 2.70, 2.20, 5.28, 3.37, 3.03, 3.03,
    28.95, 3.77, 3.40, 2.20, 3.50, 3.60, 3.70, 3.70,
];

fn reference() -> Value {
    serde_json::from_str(REF).expect("reference_vectors.json parses")
}

fn f(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("not a number: {v}"))
}

fn vecf(v: &Value) -> Vec<f64> {
    v.as_array().expect("array").iter().map(f).collect()
}

/// T-exact: abs ≤ 1e-12.
fn exact(got: f64, want: f64, what: &str) {
    assert!((got - want).abs() <= 1e-12, "{what}: got {got}, want {want}");
}

/// Relative tolerance class (T-arith 1e-10, T-iter 1e-6).
fn rel(got: f64, want: f64, tol: f64, what: &str) {
    assert!(
        (got - want).abs() <= tol * want.abs().max(f64::MIN_POSITIVE),
        "{what}: got {got}, want {want}"
    );
}

fn inputs() -> [(&'static str, &'static [f64]); 3] {
    [("X5", &X5), ("X8", &X8), ("CHEM", &CHEM)]
}

#[test]
fn golden_1_mad() {
    // scipy 1.17.1 median_abs_deviation, statsmodels 0.15.0 mad (json 1_mad)
    let r = &reference()["1_mad"];
    rel(MAD_NORMAL, f(&r["mad_consistency_constant_exact"]), 1e-15, "constant");
    for (name, x) in inputs() {
        let e = &r[name];
        exact(median(x).unwrap(), f(&e["median"]), name);
        exact(mad_raw(x).unwrap(), f(&e["mad_raw"]), name);
        rel(mad(x).unwrap(), f(&e["mad_normal_scipy"]), 1e-10, name);
        rel(mad(x).unwrap(), f(&e["mad_statsmodels"]), 1e-10, name);
    }
}

#[test]
fn golden_2_qn_sn() {
    // statsmodels 0.15.0 qn_scale, naive Python, R robustbase 0.95-0 (json 2_qn_sn)
    let r = &reference()["2_qn_sn"];
    rel(QN_CONSTANT, f(&r["qn_constant_exact"]), 1e-15, "qn constant");
    rel(QN_CONSTANT_PRINTED_1993, f(&r["qn_constant_published_1993"]), 0.0, "printed");
    rel(SN_CONSTANT, f(&r["sn_constant_published_1993"]), 0.0, "sn constant");
    for (name, x) in inputs() {
        let e = &r[name];
        exact(qn_raw(x).unwrap(), f(&e["qn_raw"]), name);
        exact(sn_raw(x).unwrap(), f(&e["sn_raw"]), name);
        let sm = qn_with(x, QN_CONSTANT, SmallSample::None).unwrap();
        rel(sm, f(&e["qn_statsmodels_default"]), 1e-10, name);
        let old = qn_with(x, QN_CONSTANT_PRINTED_1993, SmallSample::CrouxRousseeuw1992).unwrap();
        rel(old, f(&e["qn_1993_style"]), 1e-10, name);
        rel(sn_with(x, SN_CONSTANT, SmallSample::None).unwrap(), f(&e["sn_1.1926"]), 1e-10, name);
        rel(sn(x).unwrap(), f(&e["sn_1.1926_finite_corr"]), 1e-10, name);
    }
}

#[test]
fn golden_3_huber() {
    // statsmodels 0.15.0 estimate_location / Huber (json 3_huber)
    let r = &reference()["3_huber"];
    let p = Huber::params().check().unwrap();
    let loc = p.location(&CHEM).unwrap();
    let want = &r["statsmodels_estimate_location_HuberT1.5_scale_mad"];
    rel(loc.location, f(&want["mu"]), 1e-10, "huber location");
    rel(loc.scale, f(&want["scale_mad"]), 1e-10, "huber scale");
    let p2 = p.proposal2(&CHEM).unwrap();
    let want = &r["statsmodels_Huber_c1.5_tol1e-12"];
    rel(p2.location, f(&want["mu"]), 1e-6, "proposal 2 mu");
    rel(p2.scale, f(&want["scale"]), 1e-6, "proposal 2 scale");
}

#[test]
fn golden_4_quantiles() {
    // numpy 2.4.6 np.quantile(method=...) = R quantile(type=1..9) (json 4_quantiles)
    let r = &reference()["4_quantiles"];
    let probs = vecf(&r["probs"]);
    let keys = [
        "type1_inverted_cdf",
        "type2_averaged_inverted_cdf",
        "type3_closest_observation",
        "type4_interpolated_inverted_cdf",
        "type5_hazen",
        "type6_weibull",
        "type7_linear",
        "type8_median_unbiased",
        "type9_normal_unbiased",
    ];
    for (ty, key) in QuantileType::ALL.iter().zip(keys) {
        let got = quantiles(&CHEM, &probs, *ty).unwrap();
        for (g, w) in got.iter().zip(vecf(&r["chem"][key])) {
            exact(*g, w, key);
        }
    }
}

#[test]
fn golden_5_hampel() {
    // numpy/scipy global identifier and pandas rolling(7, center=True) (json 5_hampel)
    let r = &reference()["5_hampel"];
    let p = Hampel::params().check().unwrap();
    let g = hampel_global(&CHEM, &p);
    let want: Vec<usize> = r["chem_global_t3"]["flagged_indices0"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_u64().unwrap() as usize)
        .collect();
    assert_eq!(g.flagged, want);
    rel(3.0 * mad(&CHEM).unwrap(), f(&r["chem_global_t3"]["threshold"]), 1e-10, "threshold");

    let step = [
        10.0, 10.2, 9.9, 10.1, 10.0, 15.0, 10.1, 9.8, 10.2, 10.0, 10.1, 3.0, 9.9, 10.0, 10.2, 10.1,
        12.0, 12.1, 11.9, 12.0, 12.2, 12.1, 11.8, 12.0,
    ];
    let roll = &r["rolling_k3_t3"];
    let got = hampel_rolling(&step, &p);
    let want: Vec<usize> = roll["flagged_indices0"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_u64().unwrap() as usize)
        .collect();
    assert_eq!(got.flagged, want);
    let rm = rolling_median_mad(&step, 3);
    for i in 0..step.len() {
        match (roll["rolling_median"][i].as_f64(), roll["rolling_scale"][i].as_f64()) {
            (Some(m), Some(s)) => {
                exact(rm.median[i], m, "rolling median");
                rel(MAD_NORMAL * rm.mad_raw[i], s, 1e-10, "rolling scale");
            }
            _ => assert!(rm.median[i].is_nan(), "edge {i} must not be evaluated"),
        }
    }
}

#[test]
fn golden_13_bh() {
    // statsmodels 0.15.0 multipletests fdr_bh / fdr_by (json 13_bh)
    let r = &reference()["13_bh"];
    let p95 = [
        0.0001, 0.0004, 0.0019, 0.0095, 0.0201, 0.0278, 0.0298, 0.0344, 0.0459, 0.3240, 0.4262,
        0.5719, 0.6528, 0.7590, 1.000,
    ];
    let bh = benjamini_hochberg(&p95, 0.05).unwrap();
    assert_eq!(bh.n_rejected as u64, r["bh95"]["n_reject"].as_u64().unwrap());
    for (g, w) in bh.adjusted.iter().zip(vecf(&r["bh95"]["p_adj_statsmodels"])) {
        rel(*g, w, 1e-10, "bh adjusted");
    }
    let u = &r["unsorted6"];
    let res = benjamini_hochberg(&vecf(&u["p"]), 0.05).unwrap();
    for (g, w) in res.adjusted.iter().zip(vecf(&u["p_adj"])) {
        rel(*g, w, 1e-10, "unsorted adjusted");
    }
    let rej: Vec<bool> =
        u["reject"].as_array().unwrap().iter().map(|v| v.as_bool().unwrap()).collect();
    assert_eq!(res.rejected, rej);
    let by = benjamini_yekutieli(&p95, 0.05).unwrap();
    assert_eq!(by.n_rejected as u64, r["bh95_by"]["n_reject"].as_u64().unwrap());
    for (g, w) in by.adjusted.iter().zip(vecf(&r["bh95_by"]["p_adj"])) {
        rel(*g, w, 1e-10, "by adjusted");
    }
}

#[test]
fn golden_robust_n1000() {
    // tests/golden/robust_vectors.json: numpy / scipy / statsmodels / pandas at n = 1000
    let r: Value = serde_json::from_str(ROBUST).expect("robust_vectors.json parses");
    let x = vecf(&r["x"]);
    exact(median(&x).unwrap(), f(&r["median"]["value"]), "median");
    rel(mad(&x).unwrap(), f(&r["mad_normal"]["value"]), 1e-10, "mad");
    exact(qn_raw(&x).unwrap(), f(&r["qn_raw_naive"]["value"]), "qn raw");
    rel(
        qn_with(&x, QN_CONSTANT, SmallSample::None).unwrap(),
        f(&r["qn_statsmodels"]["value"]),
        1e-10,
        "qn statsmodels",
    );
    exact(sn_raw(&x).unwrap(), f(&r["sn_raw_naive"]["value"]), "sn raw");
    let h = Huber::params().check().unwrap().proposal2(&x).unwrap();
    rel(h.location, f(&r["huber_proposal2"]["mu"]), 1e-6, "huber mu");
    rel(h.scale, f(&r["huber_proposal2"]["scale"]), 1e-6, "huber scale");
    let probs = vecf(&r["quantiles"]["probs"]);
    let methods = [
        "inverted_cdf",
        "averaged_inverted_cdf",
        "closest_observation",
        "interpolated_inverted_cdf",
        "hazen",
        "weibull",
        "linear",
        "median_unbiased",
        "normal_unbiased",
    ];
    for (ty, m) in QuantileType::ALL.iter().zip(methods) {
        let got = quantiles(&x, &probs, *ty).unwrap();
        for (g, w) in got.iter().zip(vecf(&r["quantiles"]["values"][m])) {
            assert!((g - w).abs() <= 1e-10, "{m}: got {g}, want {w}");
        }
    }
    let rm = rolling_median_mad(&x, 5);
    for i in 0..x.len() {
        match (r["rolling_k5"]["median"][i].as_f64(), r["rolling_k5"]["mad_raw"][i].as_f64()) {
            (Some(m), Some(d)) => {
                exact(rm.median[i], m, "rolling median");
                exact(rm.mad_raw[i], d, "rolling mad");
            }
            _ => assert!(rm.median[i].is_nan()),
        }
    }
}
