#!/usr/bin/env python3
"""Regenerate tests/golden/changepoint_vectors.json (change-point reference values).

Usage (from the repository root):
    .venv/bin/python tests/golden/make_changepoint_vectors.py > tests/golden/changepoint_vectors.json

Deterministic: every random draw uses numpy.random.default_rng(seed) with the
seed stored next to the values. Library versions and the exact calls are
recorded in the JSON ("_versions", and a "source" string in every section).
The Rust tests read the inputs (y) from this file, so they never need to
reproduce numpy's generator.

Sections
    nile          statsmodels' Nile data (100 values), CUSUM of deviations,
                  OLS-CUSUM statistic with scipy.stats.kstwobign.sf, ruptures
                  Pelt with beta = 2 sigma^2 ln n
    kstwobign     scipy.stats.kstwobign.sf / cdf on a grid
    self_starting Hawkins (1987) normal scores via scipy.stats.t / norm
    pelt_cases    ruptures.Pelt(model=..., min_size=2, jump=1) on seeded series,
                  plus a brute-force optimal-partitioning oracle (independent
                  implementation in this script) for the same penalty
"""
from __future__ import annotations

import json
import math
import sys
import warnings

import numpy as np
import ruptures as rpt
import scipy
import scipy.stats as st
import statsmodels
from statsmodels.datasets import nile
from statsmodels.robust.scale import mad


def sse(seg: np.ndarray) -> float:
    return float(seg.var() * len(seg))


def normal_cost(seg: np.ndarray) -> float:
    # ruptures 1.1.10 CostNormal(add_small_diag=True): len * log(var + 1e-6)
    return float(len(seg) * math.log(seg.var() + 1e-6))


def op_oracle(y: np.ndarray, pen: float, cost, min_size: int = 2):
    """Brute-force optimal partitioning (Jackson et al. 2005), O(n^2) segment costs.

    Objective: sum of segment costs + pen * (number of changes). Ties go to the
    smallest last-change index, as in ruptures' min() over increasing candidates.
    """
    n = len(y)
    f = [math.inf] * (n + 1)
    last = [-1] * (n + 1)
    f[0] = -pen
    for t in range(min_size, n + 1):
        best, arg = math.inf, -1
        for s in range(0, t - min_size + 1):
            if s != 0 and s < min_size:
                continue
            if not math.isfinite(f[s]):
                continue
            v = f[s] + cost(y[s:t]) + pen
            if v < best:
                best, arg = v, s
        f[t], last[t] = best, arg
    bkps, t = [], n
    while t > 0:
        bkps.append(t)
        t = last[t]
    return sorted(bkps), f[n]


def penalised_cost(y, bkps, pen, cost):
    start, total = 0, 0.0
    for b in bkps:
        total += cost(y[start:b])
        start = b
    return total + pen * (len(bkps) - 1)


def main() -> None:
    warnings.simplefilter("ignore")
    out: dict = {
        "_versions": {
            "python": sys.version.split()[0],
            "numpy": np.__version__,
            "scipy": scipy.__version__,
            "statsmodels": statsmodels.__version__,
            "ruptures": rpt.__version__,
        },
        "_script": "tests/golden/make_changepoint_vectors.py",
    }

    # ---------------------------------------------------------------- Nile
    y = nile.load_pandas().data["volume"].to_numpy(dtype=float)
    years = nile.load_pandas().data["year"].to_numpy(dtype=int)
    n = len(y)
    s = np.cumsum(y - y.mean())
    k = int(np.argmax(np.abs(s)))
    sd = float(y.std(ddof=1))
    s0 = float(np.abs(s).max() / (sd * math.sqrt(n)))
    sigma = float(mad(np.diff(y)) / math.sqrt(2.0))
    pen = 2.0 * sigma**2 * math.log(n)
    bkps = rpt.Pelt(model="l2", min_size=2, jump=1).fit(y).predict(pen=pen)
    out["nile"] = {
        "source": "statsmodels.datasets.nile.load_pandas().data['volume'] "
        f"(statsmodels {statsmodels.__version__}; Cobb 1978, Biometrika 65:243); "
        "S_t = cumsum(y - y.mean()); S0 = max|S_t| / (y.std(ddof=1) * sqrt(n)); "
        "p = scipy.stats.kstwobign.sf(S0); sigma = statsmodels.robust.scale.mad(np.diff(y)) / sqrt(2); "
        "pen = 2 sigma^2 ln n; rpt.Pelt(model='l2', min_size=2, jump=1).fit(y).predict(pen=pen)",
        "y": y.tolist(),
        "first_year": int(years[0]),
        "argmax_abs_cusum_index0": k,
        "year_of_max": int(years[k]),
        "max_abs_cusum": float(np.abs(s).max()),
        "ols_cusum_s0": s0,
        "ols_cusum_p": float(st.kstwobign.sf(s0)),
        "sigma_mad_diff": sigma,
        "pen_bic_l2": pen,
        "pelt_l2_bkps": bkps,
    }

    # ----------------------------------------------------------- kstwobign
    grid = [0.2, 0.3, 0.5, 0.6, 0.8, 1.0, 1.2, 1.358, 1.6, 2.0, 2.5, 2.951766103, 3.5, 4.0]
    out["kstwobign"] = {
        "source": f"scipy {scipy.__version__} scipy.stats.kstwobign.sf(x), .cdf(x)",
        "x": grid,
        "sf": [float(st.kstwobign.sf(v)) for v in grid],
        "cdf": [float(st.kstwobign.cdf(v)) for v in grid],
    }

    # ---------------------------------------------------- self-starting CUSUM
    rng = np.random.default_rng(1987)
    x = rng.normal(50.0, 2.0, 40)
    x[25:] += 3.0
    u = []
    for i in range(2, len(x)):  # point i (0-based) uses x[0:i], n = i + 1 >= 3
        prev = x[:i]
        m = i + 1
        t = (x[i] - prev.mean()) / prev.std(ddof=1) * math.sqrt((m - 1) / m)
        # symmetric evaluation keeps precision in the upper tail
        if t > 0:
            u.append(float(-st.norm.ppf(st.t.sf(t, m - 2))))
        else:
            u.append(float(st.norm.ppf(st.t.cdf(t, m - 2))))
    out["self_starting"] = {
        "source": f"scipy {scipy.__version__}: T_n = (x_n - mean(x_1..x_(n-1))) / "
        "sd(x_1..x_(n-1), ddof=1) * sqrt((n-1)/n); U_n = norm.ppf(t.cdf(T_n, n-2)) "
        "(Hawkins 1987); seed default_rng(1987), N(50, 2) with +3 from index 25",
        "x": x.tolist(),
        "u_from_third": u,
    }

    # ------------------------------------------------------------- AR(1) fit
    from statsmodels.tsa.stattools import acf

    rng = np.random.default_rng(2012)
    e = rng.normal(0.0, 1.0, 300)
    xa = np.empty(300)
    xa[0] = e[0] / math.sqrt(1 - 0.81)
    for i in range(1, 300):
        xa[i] = 0.9 * xa[i - 1] + e[i]
    xa = xa + 40.0
    out["ar1"] = {
        "source": f"statsmodels {statsmodels.__version__} statsmodels.tsa.stattools.acf(x, nlags=1, fft=False)[1]; "
        "numpy x.mean(), x.std(ddof=0); x = 40 + AR(1) phi 0.9, default_rng(2012)",
        "x": xa.tolist(),
        "acf1": float(acf(xa, nlags=1, fft=False)[1]),
        "mean": float(xa.mean()),
        "sd_ddof0": float(xa.std(ddof=0)),
    }

    # ---------------------------------------------------------- PELT cases
    cases = []
    costs = {"l2": sse, "normal": normal_cost}
    seed = 100
    for n_pts in [50, 100, 200, 500]:
        for model in ["l2", "normal"]:
            for rep in range(2):
                seed += 1
                rng = np.random.default_rng(seed)
                n_cp = int(rng.integers(1, 5))
                cps = np.sort(rng.choice(np.arange(5, n_pts - 5), n_cp, replace=False))
                edges = [0, *cps.tolist(), n_pts]
                yv = np.empty(n_pts)
                for a, b in zip(edges[:-1], edges[1:]):
                    mu = rng.normal(0.0, 2.0)
                    sdv = rng.uniform(0.5, 2.0) if model == "normal" else 1.0
                    yv[a:b] = rng.normal(mu, sdv, b - a)
                yv = np.round(yv, 6)
                if model == "l2":
                    pens = [1.0, 2.0 * math.log(n_pts), 10.0, 40.0]
                else:
                    pens = [1.0, 3.0 * math.log(n_pts), 15.0]
                for p in pens:
                    algo = rpt.Pelt(model=model, min_size=2, jump=1).fit(yv)
                    got = algo.predict(pen=p)
                    op_b, op_f = op_oracle(yv, p, costs[model])
                    cases.append(
                        {
                            "seed": seed,
                            "n": n_pts,
                            "model": model,
                            "pen": p,
                            "y": yv.tolist(),
                            "ruptures_bkps": got,
                            "ruptures_penalised_cost": penalised_cost(yv, got, p, costs[model]),
                            "op_bkps": op_b,
                            "op_penalised_cost": op_f,
                        }
                    )
    out["pelt_cases"] = {
        "source": f"ruptures {rpt.__version__}: rpt.Pelt(model=model, min_size=2, jump=1)"
        ".fit(y).predict(pen=pen); penalised cost = sum of ruptures segment costs "
        "(l2: var*len, normal: len*log(var+1e-6)) + pen*(len(bkps)-1); op_* from the "
        "brute-force optimal partitioning in this script; y rounded to 6 dp",
        "cases": cases,
    }
    json.dump(out, sys.stdout, indent=1)
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
