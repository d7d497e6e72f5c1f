"""Reference values for telltale-models' robust estimators at a larger n.

Writes tests/golden/robust_vectors.json (run from the repository root):

    .venv/bin/python tests/golden/make_robust_vectors.py > tests/golden/robust_vectors.json

The input is drawn once with numpy's seeded generator, rounded to 3 decimals
(which creates ties, as a real 0.001-resolution sensor would) and stored in the
JSON, so the Rust tests never need to reproduce numpy's generator.
"""
import json
import sys

import numpy as np
import pandas as pd
import scipy
import scipy.stats
import statsmodels
import statsmodels.robust.scale as rscale

SEED = 20240607
N = 1000


def qn_raw_naive(x):
    n = len(x)
    i, j = np.triu_indices(n, 1)
    d = np.sort(np.abs(x[i] - x[j]))
    h = n // 2 + 1
    return float(d[h * (h - 1) // 2 - 1])


def sn_raw_naive(x):
    n = len(x)
    d = np.sort(np.abs(x[:, None] - x[None, :]), axis=1)
    inner = np.sort(d[:, n // 2])  # himed over j, j = i included
    return float(inner[(n + 1) // 2 - 1])  # lomed over i


def main():
    rng = np.random.default_rng(SEED)
    x = 50.0 + 2.0 * rng.standard_normal(N)
    x[rng.choice(N, 30, replace=False)] += rng.uniform(10, 40, 30)  # 3 % spikes
    x = np.round(x, 3)
    probs = [0.01, 0.05, 0.25, 0.5, 0.75, 0.95, 0.99]
    methods = ["inverted_cdf", "averaged_inverted_cdf", "closest_observation",
               "interpolated_inverted_cdf", "hazen", "weibull", "linear",
               "median_unbiased", "normal_unbiased"]
    mu, s = rscale.Huber(c=1.5, tol=1e-12, maxiter=500)(x)
    roll = pd.Series(x).rolling(2 * 5 + 1, center=True)
    rmed = roll.median()
    rmad = roll.apply(lambda w: np.median(np.abs(w - np.median(w))), raw=True)
    out = {
        "_versions": {"python": sys.version.split()[0], "numpy": np.__version__,
                      "scipy": scipy.__version__, "statsmodels": statsmodels.__version__,
                      "pandas": pd.__version__},
        "_seed": SEED,
        "_input": f"x = round(50 + 2 * default_rng({SEED}).standard_normal({N}) with 30 spikes + U(10, 40), 3)",
        "x": x.tolist(),
        "median": {"call": "numpy.median(x)", "value": float(np.median(x))},
        "mad_normal": {"call": "scipy.stats.median_abs_deviation(x, scale='normal')",
                       "value": float(scipy.stats.median_abs_deviation(x, scale="normal"))},
        "qn_statsmodels": {"call": "statsmodels.robust.scale.qn_scale(x)",
                           "value": float(rscale.qn_scale(x))},
        "qn_raw_naive": {"call": "k-th of sorted |x_i - x_j|, i<j, k = C(n//2+1, 2) (numpy)",
                         "value": qn_raw_naive(x)},
        "sn_raw_naive": {"call": "lomed_i himed_j |x_i - x_j| (numpy, j = i included)",
                         "value": sn_raw_naive(x)},
        "huber_proposal2": {"call": "statsmodels.robust.scale.Huber(c=1.5, tol=1e-12, maxiter=500)(x)",
                            "mu": float(mu), "scale": float(s)},
        "quantiles": {"call": "numpy.quantile(x, probs, method=m)", "probs": probs,
                      "values": {m: np.quantile(x, probs, method=m).tolist() for m in methods}},
        "rolling_k5": {"call": "pandas Series(x).rolling(11, center=True).median() / .apply(raw MAD)",
                       "median": [None if np.isnan(v) else float(v) for v in rmed],
                       "mad_raw": [None if np.isnan(v) else float(v) for v in rmad]},
    }
    json.dump(out, sys.stdout, indent=1)
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
