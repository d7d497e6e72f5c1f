#!/usr/bin/env python3
"""Reference timings for models/benches/trend.rs.

Times pymannkendall.original_test, scipy.stats.kendalltau and
scipy.stats.theilslopes on the same deterministic series the criterion
benchmark uses (SplitMix64 seed 42, y_i = 0.0005*i + u_i, u_i uniform in
[0, 1) rounded to 3 decimals; t_i = i).

    .venv/bin/python bench/trend_reference.py [n ...]      (default n = 1000 10000)
"""

import sys
import time
import platform

import numpy as np
import pymannkendall as mk
import scipy
import scipy.stats as st

MASK = (1 << 64) - 1


def splitmix_series(n, seed):
    state = seed
    out = np.empty(n)
    for i in range(n):
        state = (state + 0x9E3779B97F4A7C15) & MASK
        z = state
        z = ((z ^ (z >> 30)) * 0xBF58476D1CE4E5B9) & MASK
        z = ((z ^ (z >> 27)) * 0x94D049BB133111EB) & MASK
        z ^= z >> 31
        u = (z >> 11) / float(1 << 53)
        out[i] = 0.0005 * i + round(u * 1000.0) / 1000.0
    return out


def best_of(fn, reps):
    times = []
    for _ in range(reps):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times), float(np.median(times))


def main():
    sizes = [int(a) for a in sys.argv[1:]] or [1000, 10000]
    print(f"python {platform.python_version()}, numpy {np.__version__}, scipy {scipy.__version__}, pymannkendall 1.4.3")
    for n in sizes:
        y = splitmix_series(n, 42)
        t = np.arange(n, dtype=float)
        reps = 5 if n <= 1000 else 3
        for name, fn in [
            ("pymannkendall.original_test(y)", lambda: mk.original_test(y)),
            ("scipy.stats.kendalltau(t, y)", lambda: st.kendalltau(t, y)),
            ("scipy.stats.theilslopes(y, t)", lambda: st.theilslopes(y, t)),
        ]:
            best, med = best_of(fn, reps)
            print(f"n={n:>6}  {name:<34} best {best * 1e3:10.3f} ms   median {med * 1e3:10.3f} ms")
        r = mk.original_test(y)
        ts = st.theilslopes(y, t)
        print(f"          check values: S={r.s:.0f} z={r.z:.6f} sen={ts.slope:.9f} y[:3]={y[:3]}")


if __name__ == "__main__":
    main()
