#!/usr/bin/env python3
"""Golden vectors for telltale-models' trend, two-sample, distribution and
autocorrelation code (tests/integration/golden_trend_twosample.rs).

Run with the project venv:  .venv/bin/python tests/golden/make_trend_vectors.py
It writes tests/golden/trend_vectors.json next to this script. Every entry
records the library call that produced it; inputs are stored at full
precision so the Rust side never has to reproduce numpy's generator.
"""

import json
import pathlib
import platform

import numpy as np
import pymannkendall as mk
import scipy
import scipy.stats as st
import statsmodels
from statsmodels.tsa.stattools import acf

SEED = 20240607
rng = np.random.default_rng(SEED)


def ar1(n, phi, trend=0.0):
    e = rng.standard_normal(n + 1)
    x = np.empty(n)
    prev = e[0] / np.sqrt(1 - phi * phi)
    for i in range(n):
        prev = phi * prev + e[i + 1]
        x[i] = prev
    return x + trend * np.arange(n)


def fl(v):
    return [float(a) for a in v]


out = {
    "_versions": {
        "python": platform.python_version(),
        "numpy": np.__version__,
        "scipy": scipy.__version__,
        "statsmodels": statsmodels.__version__,
        "pymannkendall": getattr(mk, "__version__", "1.4.3"),
    },
    "_seed": SEED,
    "_generator": "numpy.random.default_rng(SEED); AR(1) x_t = phi x_{t-1} + e_t started from N(0, 1/(1-phi^2)), plus trend*t",
}

# ---- distributions --------------------------------------------------------
d = {"source": "scipy.stats (norm, t, f, chi2, beta, kstwobign)"}
d["norm"] = [{"x": x, "cdf": float(st.norm.cdf(x)), "sf": float(st.norm.sf(x))} for x in [-6.0, -1.5, 0.0, 0.3, 2.5, 8.0]]
d["norm_ppf"] = [{"p": p, "ppf": float(st.norm.ppf(p))} for p in [1e-10, 0.001, 0.025, 0.5, 0.9, 0.995]]
d["t_sf"] = [{"t": t, "df": df, "sf": float(st.t.sf(t, df))} for t, df in [(-1.0, 3.0), (0.5, 1.0), (2.1, 7.0), (4.0, 30.0), (10.0, 5.5)]]
d["f_sf"] = [{"f": f, "df1": a, "df2": b, "sf": float(st.f.sf(f, a, b))} for f, a, b in [(0.5, 2.0, 10.0), (1.705917693000894, 9.0, 90.0), (3.0, 1.0, 5.0), (12.0, 4.0, 40.0)]]
d["chi2_sf"] = [{"x": x, "df": df, "sf": float(st.chi2.sf(x, df))} for x, df in [(0.5, 1.0), (3.84, 1.0), (20.785873428064864, 9.0), (100.0, 60.0)]]
d["beta_ppf"] = [{"p": p, "a": a, "b": b, "ppf": float(st.beta.ppf(p, a, b))} for p, a, b in [(0.95, 1.0, 9.0), (0.99, 1.5, 8.5), (0.5, 2.0, 2.0), (0.999, 2.5, 47.0)]]
d["kolmogorov_sf"] = [{"x": x, "sf": float(st.kstwobign.sf(x))} for x in [0.2, 0.5, 0.8, 0.99, 1.0, 1.2, 1.6, 2.5]]
d["kolmogorov_isf"] = [{"p": p, "isf": float(st.kstwobign.isf(p))} for p in [0.5, 0.2, 0.1, 0.05, 0.01, 0.001]]
out["dist"] = d

# ---- autocorrelation ------------------------------------------------------
x = ar1(400, 0.7)
out["acf"] = {
    "source": "statsmodels.tsa.stattools.acf(x, nlags=20, adjusted=False, fft=False)",
    "x": fl(x),
    "acf": fl(acf(x, nlags=20, adjusted=False, fft=False)),
}

# ---- Mann-Kendall ---------------------------------------------------------
mkout = {}
x = np.round(ar1(120, 0.6, trend=0.01), 1)  # 1-dp rounding creates ties
r = mk.original_test(x)
mkout["original_ties"] = {"source": "pymannkendall.original_test(x)", "x": fl(x), "s": float(r.s), "var_s": float(r.var_s), "z": float(r.z), "p": float(r.p), "tau": float(r.Tau)}
for name, phi, trend, n, lag in [("hr_all_lags", 0.6, 0.0, 150, None), ("hr_trend_lag3", 0.5, 0.02, 200, 3), ("hr_strong", 0.8, 0.01, 250, None)]:
    x = ar1(n, phi, trend)
    r = mk.hamed_rao_modification_test(x, alpha=0.05, lag=lag)
    mkout[name] = {
        "source": f"pymannkendall.hamed_rao_modification_test(x, alpha=0.05, lag={lag})",
        "x": fl(x), "lag": lag, "s": float(r.s), "var_s": float(r.var_s), "z": float(r.z), "p": float(r.p), "slope": float(r.slope),
    }
for name, phi, trend, n in [("pw_plain", 0.7, 0.0, 160), ("pw_trend", 0.5, 0.03, 100)]:
    x = ar1(n, phi, trend)
    r = mk.pre_whitening_modification_test(x, alpha=0.05)
    mkout[name] = {
        "source": "pymannkendall.pre_whitening_modification_test(x, alpha=0.05)",
        "x": fl(x), "r1": float(acf(x, nlags=1, fft=False)[1]), "s": float(r.s), "var_s": float(r.var_s), "z": float(r.z), "p": float(r.p),
    }
out["mann_kendall"] = mkout

# ---- Theil-Sen --------------------------------------------------------------
ts = {}
n = 300
t = np.arange(n, dtype=float)
y = 0.05 * t + rng.standard_normal(n)
r = st.theilslopes(y, t, alpha=0.95, method="separate")
ts["uniform_no_ties"] = {"t": fl(t), "y": fl(y), "slope": r.slope, "intercept": r.intercept, "low": r.low_slope, "high": r.high_slope}
t = np.round(np.cumsum(rng.exponential(2.0, n)), 0)  # rounded: repeated time stamps
y = np.round(3.0 - 0.02 * t + rng.standard_normal(n), 1)  # rounded: tied values
r = st.theilslopes(y, t, alpha=0.90, method="separate")
ts["irregular_ties_90"] = {"t": fl(t), "y": fl(y), "confidence": 0.90, "slope": r.slope, "intercept": r.intercept, "low": r.low_slope, "high": r.high_slope}
t = np.sort(rng.uniform(0.0, 50.0, 200))
y = 1.5 + 0.3 * t + rng.standard_t(3, 200)
r = st.theilslopes(y, t, alpha=0.95, method="separate")
ts["irregular_heavy_tails"] = {"t": fl(t), "y": fl(y), "slope": r.slope, "intercept": r.intercept, "low": r.low_slope, "high": r.high_slope}
for v in ts.values():
    v["source"] = f"scipy.stats.theilslopes(y, t, alpha={v.get('confidence', 0.95)}, method='separate')"
    for k in ("slope", "intercept", "low", "high"):
        v[k] = float(v[k])
out["theil_sen"] = ts

# ---- two-sample -------------------------------------------------------------
two = {}
a = rng.normal(0.0, 1.0, 60)
b = rng.normal(0.4, 1.2, 45)
r = st.mannwhitneyu(a, b, method="asymptotic", use_continuity=True)
two["mw_asymptotic"] = {"source": "scipy.stats.mannwhitneyu(a, b, method='asymptotic', use_continuity=True)", "a": fl(a), "b": fl(b), "u": float(r.statistic), "p": float(r.pvalue)}
a7 = np.round(rng.normal(0, 1, 7), 3)
b9 = np.round(rng.normal(1, 1, 9), 3)
r = st.mannwhitneyu(a7, b9, method="exact")
two["mw_exact"] = {"source": "scipy.stats.mannwhitneyu(a, b, method='exact')", "a": fl(a7), "b": fl(b9), "u": float(r.statistic), "p": float(r.pvalue)}
a = rng.normal(0.0, 1.0, 40)
b = rng.normal(0.3, 1.5, 33)
r = st.ks_2samp(a, b, method="exact")
en = len(a) * len(b) / (len(a) + len(b))
two["ks_exact"] = {"source": "scipy.stats.ks_2samp(a, b, method='exact')", "a": fl(a), "b": fl(b), "d": float(r.statistic), "p": float(r.pvalue), "location": float(r.statistic_location), "sign": int(r.statistic_sign)}
a = rng.normal(0.0, 1.0, 300)
b = rng.normal(0.1, 1.1, 250)
r = st.ks_2samp(a, b, method="asymp")
en = len(a) * len(b) / (len(a) + len(b))
two["ks_asymptotic"] = {
    "source": "D from scipy.stats.ks_2samp(a, b); p = scipy.stats.kstwobign.sf(D*sqrt(n*m/(n+m)))",
    "a": fl(a), "b": fl(b), "d": float(r.statistic), "p_kstwobign": float(st.kstwobign.sf(r.statistic * np.sqrt(en))), "p_scipy_asymp": float(r.pvalue),
}
g = [rng.normal(10, s, k) for s, k in [(1.0, 30), (1.5, 25), (0.8, 35)]]
r = st.levene(*g, center="median")
two["bf_three_groups"] = {"source": "scipy.stats.levene(*groups, center='median')", "groups": [fl(v) for v in g], "w": float(r.statistic), "p": float(r.pvalue)}
out["two_sample"] = two

path = pathlib.Path(__file__).with_name("trend_vectors.json")
path.write_text(json.dumps(out, indent=1) + "\n")
print(f"wrote {path}")
