"""Side-by-side fit benchmark: `telltale fit` vs a polars group-by aggregation
over the same fit span of the same history file, on the same cores.

The polars side is the per-(asset, sensor) summary an analyst would compute by
hand: count, median, MAD (median absolute deviation from the median), and the
5 % and 95 % quantiles (linear interpolation), over the rows with
`--from <= ts < --until`:

    pl.scan_parquet(path).filter(span)
      .group_by(["asset", "sensor"])
      .agg(pl.len(), v.median(), (v - v.median()).abs().median(),
           v.quantile(0.05, "linear"), v.quantile(0.95, "linear"))
      .collect()

`telltale fit` does far more per asset (grid alignment, regimes, per-regime
robust baselines, Huber regressions, PCA monitor, one JSON file per asset).
Both rates are rows in the fit span per second of wall time.

Each tool runs in its own process so that its peak RSS is its own:
  - telltale: the release binary under /usr/bin/time -v (maximum resident set
    size), fitting into a fresh temporary store each run;
  - polars: a child Python process timing the query and reporting
    resource.getrusage(RUSAGE_SELF).ru_maxrss.
Both are pinned to the same CPUs (--cpus, default: all of this process's CPUs,
via taskset) and polars gets POLARS_MAX_THREADS = that count. Best of
--repeat runs; the page cache is warm for every run after the first read.

Usage:
  cargo build --release
  cargo run --release -- demo --preset benchmark --out /work/bench-data/fleet1000
  /work/main/.venv/bin/python bench/fit_bench.py \
      --history /work/bench-data/fleet1000/history.parquet \
      --fleet /work/bench-data/fleet1000/fleet.toml --until 2026-05-07 \
      [--from 2026-05-04] [--bin target/release/telltale] [--repeat 3] [--cpus 0,1] [--json out.json]
"""

import argparse
import json
import os
import platform
import re
import shutil
import subprocess
import sys
import tempfile

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
BIN = os.path.join(ROOT, "target", "release", "telltale")

CHILD = r"""
import datetime as dt, json, resource, sys, time
import polars as pl
path, start, end = sys.argv[1], sys.argv[2], sys.argv[3]
def ts(s):
    return dt.datetime.fromisoformat(s).replace(tzinfo=dt.timezone.utc) if s else None
lo, hi = ts(start), ts(end)
span = pl.col("ts") < hi
if lo is not None:
    span = span & (pl.col("ts") >= lo)
v = pl.col("value")
t = time.perf_counter()
out = (
    pl.scan_parquet(path)
    .filter(span)
    .group_by(["asset", "sensor"])
    .agg(
        pl.len().alias("n"),
        v.median().alias("median"),
        (v - v.median()).abs().median().alias("mad"),
        v.quantile(0.05, "linear").alias("q05"),
        v.quantile(0.95, "linear").alias("q95"),
    )
    .collect()
)
secs = time.perf_counter() - t
rows = int(out["n"].sum())
print(json.dumps({"tool": "polars group_by(asset, sensor): count, median, MAD, q05, q95",
                  "rows": rows, "groups": out.height, "seconds": secs, "rows_per_s": rows / secs,
                  "peak_rss_mib": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024}))
"""


def run_telltale(a, cpus):
    store = tempfile.mkdtemp(prefix="fit_bench_store_")
    try:
        cmd = ["/usr/bin/time", "-v", "taskset", "-c", cpus, a.bin, "fit", "-q",
               "--history", a.history, "--until", a.until, "--store", store]
        if a.fleet:
            cmd += ["--fleet", a.fleet]
        if a.from_:
            cmd += ["--from", a.from_]
        p = subprocess.run(cmd, capture_output=True, text=True)
        if p.returncode != 0:
            sys.exit(f"telltale fit failed ({p.returncode}):\n{p.stdout}\n{p.stderr}")
        # "1000 baselines written to STORE (0 not fitted, 43200000 rows, 3.1 s)"
        m = re.search(r"baselines written to .* \((\d+) not fitted, (\d+) rows, ([\d.]+) s\)", p.stdout)
        if not m:
            sys.exit(f"cannot read telltale's summary line:\n{p.stdout}")
        wall = re.search(r"Elapsed \(wall clock\) time \(h:mm:ss or m:ss\): (?:(\d+):)?(\d+):([\d.]+)", p.stderr)
        secs = (int(wall.group(1) or 0) * 3600 + int(wall.group(2)) * 60 + float(wall.group(3)))
        rss = int(re.search(r"Maximum resident set size \(kbytes\): (\d+)", p.stderr).group(1))
        rows = int(m.group(2))
        return {"tool": "telltale fit", "rows": rows, "failed": int(m.group(1)), "seconds": secs,
                "rows_per_s": rows / secs, "peak_rss_mib": rss / 1024}
    finally:
        shutil.rmtree(store, ignore_errors=True)


def run_polars(a, cpus):
    env = dict(os.environ, POLARS_MAX_THREADS=str(len(parse_cpus(cpus))))
    cmd = ["taskset", "-c", cpus, sys.executable, "-c", CHILD, a.history, a.from_ or "", a.until]
    out = subprocess.run(cmd, check=True, capture_output=True, text=True, env=env).stdout
    return json.loads(out.strip().splitlines()[-1])


def parse_cpus(s):
    cpus = set()
    for part in s.split(","):
        lo, _, hi = part.partition("-")
        cpus.update(range(int(lo), int(hi or lo) + 1))
    return sorted(cpus)


def best(f, repeat):
    runs = [f() for _ in range(repeat)]
    return min(runs, key=lambda r: r["seconds"])


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--history", required=True)
    ap.add_argument("--fleet")
    ap.add_argument("--from", dest="from_", help="start of the fit span (date), inclusive")
    ap.add_argument("--until", required=True, help="end of the fit span (date), exclusive")
    ap.add_argument("--bin", default=BIN)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--cpus", default=",".join(map(str, sorted(os.sched_getaffinity(0)))))
    ap.add_argument("--json")
    a = ap.parse_args()
    if not os.path.exists(a.bin):
        sys.exit(f"build first: cargo build --release (no {a.bin})")
    import polars

    tt = best(lambda: run_telltale(a, a.cpus), a.repeat)
    pl_ = best(lambda: run_polars(a, a.cpus), a.repeat)
    if tt["rows"] != pl_["rows"]:
        print(f"warning: telltale read {tt['rows']} rows in the span, polars {pl_['rows']}", file=sys.stderr)
    ratio = tt["rows_per_s"] / pl_["rows_per_s"]
    print(f"file: {a.history} ({os.path.getsize(a.history) / 2**20:.0f} MiB), span [{a.from_ or 'start'}, {a.until}), "
          f"cpus: {a.cpus}, best of {a.repeat}")
    print("| tool | rows in span | seconds | M rows/s | vs polars | peak RSS MiB |")
    print("|---|---|---|---|---|---|")
    for r in (tt, pl_):
        print(f"| {r['tool']} | {r['rows']} | {r['seconds']:.2f} | {r['rows_per_s'] / 1e6:.1f} | "
              f"{r['rows_per_s'] / pl_['rows_per_s']:.2f}x | {r['peak_rss_mib']:.0f} |")
    print(f"telltale fit / polars group-by rows/s ratio: {ratio:.2f}")
    if a.json:
        with open(a.json, "w") as f:
            json.dump({"history": a.history, "bytes": os.path.getsize(a.history), "from": a.from_,
                       "until": a.until, "cpus": a.cpus, "python": platform.python_version(),
                       "polars": polars.__version__, "repeat": a.repeat, "ratio": ratio,
                       "results": [tt, pl_]}, f, indent=1)


if __name__ == "__main__":
    main()
