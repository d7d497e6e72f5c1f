"""Side-by-side read benchmark: telltale's per-asset history reader vs
pyarrow.parquet.read_table and polars.scan_parquet(...).collect().

Each tool runs in its own process so that its peak RSS is its own:
  - telltale: pipelines/examples/read_bench.rs (`read FILE`), which hands every
    asset to a callback (one asset at a time) and reports VmHWM;
  - pyarrow / polars: a child Python process timing the call and reporting
    resource.getrusage(RUSAGE_SELF).ru_maxrss.

The file is made once with `read_bench make` (HistoryWriter) unless --file is
given (e.g. the demo generator's big history). Best of --repeat runs; the page
cache is warm for every tool after the first read.

Usage:
  cargo build --release -p telltale-pipelines --example read_bench
  /work/main/.venv/bin/python bench/read_bench.py [--file F] [--assets 1000] [--sensors 6]
      [--rows-per-sensor 8640] [--repeat 3] [--json out.json]
"""

import argparse
import json
import os
import platform
import subprocess
import sys

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
EXAMPLE = os.path.join(ROOT, "target", "release", "examples", "read_bench")

CHILD = r"""
import json, resource, sys, time
tool, path = sys.argv[1], sys.argv[2]
t = time.perf_counter()
if tool == "pyarrow":
    import pyarrow.parquet as pq
    n = pq.read_table(path).num_rows
    call = "pyarrow.parquet.read_table(path)"
else:
    import polars as pl
    n = pl.scan_parquet(path).collect().height
    call = "polars.scan_parquet(path).collect()"
secs = time.perf_counter() - t
print(json.dumps({"tool": call, "rows": n, "seconds": secs, "rows_per_s": n / secs,
                  "peak_rss_mib": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024}))
"""


def run_json(cmd):
    out = subprocess.run(cmd, check=True, capture_output=True, text=True).stdout
    return json.loads(out.strip().splitlines()[-1])


def best(cmd, repeat):
    runs = [run_json(cmd) for _ in range(repeat)]
    return min(runs, key=lambda r: r["seconds"])


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--file")
    ap.add_argument("--assets", type=int, default=1000)
    ap.add_argument("--sensors", type=int, default=6)
    ap.add_argument("--rows-per-sensor", type=int, default=8640)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--json")
    a = ap.parse_args()
    if not os.path.exists(EXAMPLE):
        sys.exit("build first: cargo build --release -p telltale-pipelines --example read_bench")
    path = a.file
    if path is None:
        path = os.path.join(ROOT, "target", f"read_bench_{a.assets}x{a.sensors}x{a.rows_per_sensor}.parquet")
        if not os.path.exists(path):
            subprocess.run([EXAMPLE, "make", path, str(a.assets), str(a.sensors), str(a.rows_per_sensor)], check=True)
    import polars
    import pyarrow

    results = [
        best([EXAMPLE, "read", path], a.repeat),
        best([sys.executable, "-c", CHILD, "pyarrow", path], a.repeat),
        best([sys.executable, "-c", CHILD, "polars", path], a.repeat),
    ]
    base = results[1]["rows_per_s"]
    print(f"file: {path} ({os.path.getsize(path) / 2**20:.0f} MiB), cores: {os.cpu_count()}, best of {a.repeat}")
    print(f"| tool | rows | seconds | M rows/s | vs pyarrow | peak RSS MiB |")
    print(f"|---|---|---|---|---|---|")
    for r in results:
        print(f"| {r['tool']} | {r['rows']} | {r['seconds']:.2f} | {r['rows_per_s'] / 1e6:.1f} | "
              f"{r['rows_per_s'] / base:.2f}x | {r['peak_rss_mib']:.0f} |")
    if a.json:
        with open(a.json, "w") as f:
            json.dump({"file": path, "bytes": os.path.getsize(path), "cores": os.cpu_count(),
                       "python": platform.python_version(), "pyarrow": pyarrow.__version__,
                       "polars": polars.__version__, "repeat": a.repeat, "results": results}, f, indent=1)


if __name__ == "__main__":
    main()
