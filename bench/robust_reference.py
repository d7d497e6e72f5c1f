"""Python-side timings for the robust benchmarks (compare with
`cargo bench -p telltale-models --bench robust`).

numpy median + MAD on 1 000 000 points and statsmodels qn_scale on 10 000,
on seeded normal data (50 +- 2, the same distribution as the Rust bench; the
generators differ, the estimators' cost does not depend on the draw).
Prints one JSON object.
"""
import json
import sys
import timeit

import numpy as np
import statsmodels
import statsmodels.robust.scale as rscale


def best(fn, number, repeat=5):
    return min(timeit.repeat(fn, number=number, repeat=repeat)) / number


def main():
    rng = np.random.default_rng(42)
    out = {"python": sys.version.split()[0], "numpy": np.__version__,
           "statsmodels": statsmodels.__version__}
    for n in (10_000, 1_000_000):
        x = 50.0 + 2.0 * rng.standard_normal(n)

        def med():
            return np.median(x)

        def med_mad():
            m = np.median(x)
            return m, np.median(np.abs(x - m))

        out[f"numpy_median/{n}_s"] = best(med, 20 if n == 10_000 else 3)
        out[f"numpy_median_mad/{n}_s"] = best(med_mad, 20 if n == 10_000 else 3)
    x = 50.0 + 2.0 * rng.standard_normal(10_000)
    out["statsmodels_qn_scale/10000_s"] = best(lambda: rscale.qn_scale(x), 3, repeat=3)
    print(json.dumps(out, indent=1))


if __name__ == "__main__":
    main()
