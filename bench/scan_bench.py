"""Side-by-side scan benchmark: `telltale scan` vs pyarrow's bare decode of
the same rows of the same history file, on the same cores.

`telltale scan --from F --to T` reads the history in [F - warm-up, T) (the
warm-up is 3 days, floored to the hour block) and judges every asset in it
against its stored baseline. The pyarrow side decodes exactly those rows and
does nothing else:

    pq.read_table(history, filters=[("ts", ">=", F - 3 d), ("ts", "<", T)])

and, for reference, only the reported span [F, T). The ratio is scan wall time
over the decode time of the same rows (the scan's own row count, from its
`rows=` log line, is checked against pyarrow's).

Two fleets by default:
  - the 1,000-pump benchmark fleet (one week of 1-minute rows: fit until
    2026-05-07, scan 2026-05-07 .. 2026-05-11, so with warm-up the scan reads
    one fleet-week);
  - the 30-pump demo fleet (fit 2026-05-04 .. 2026-06-01, scan 2026-06-01 ..
    2026-07-27: eight weeks).
With --scale-sites N a third, larger benchmark fleet (N sites x 10 pumps, the
same week) is scanned too, without pyarrow (its table would need ~3 GiB per
1,000 pumps): it shows whether the scan's peak RSS grows with the fleet.
Time per fleet-week is the scan's wall time over the weeks of history it reads
(warm-up included), and over the weeks it reports.

Missing data and stores are made first (`telltale demo --generate-only`,
`telltale fit`); the fit is timed and printed on its own line, it is not part
of any scan figure.

Each tool runs in its own process so that its peak RSS is its own:
  - telltale: the release binary under /usr/bin/time -v (maximum resident set
    size, wall clock), at the default log level (its summary line carries
    rows=), suspicions written to --out;
  - pyarrow: a child Python process timing the call and reporting
    resource.getrusage(RUSAGE_SELF).ru_maxrss (the interpreter and the
    pyarrow import included).
Both are pinned to the same CPUs (--cpus, default: all of this process's CPUs,
via taskset); pyarrow gets pa.set_cpu_count / set_io_thread_count (and
OMP_NUM_THREADS, ARROW_IO_THREADS) = that count. Best of --repeat runs; the
page cache is warm for every run after the first read.

Usage:
  cargo build --release
  /work/main/.venv/bin/python bench/scan_bench.py [--repeat 2] [--cpus 0,1]
      [--fleet1000 /work/bench-data/fleet1000] [--store1000 /work/bench-data/store1000]
      [--demo30 /tmp/demo30] [--only fleet1000|demo30|fleetN] [--scale-sites N]
      [--bin target/release/telltale] [--json out.json]
"""

import argparse
import datetime as dt
import json
import os
import platform
import re
import subprocess
import sys

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
BIN = os.path.join(ROOT, "target", "release", "telltale")
WARMUP_DAYS = 3  # ScanSettings::warmup_ms default (pipelines/src/jobs/scan.rs)

CHILD = r"""
import datetime as dt, json, resource, sys, time
import pyarrow as pa, pyarrow.parquet as pq
path, lo, hi, n = sys.argv[1], sys.argv[2], sys.argv[3], int(sys.argv[4])
pa.set_cpu_count(n)
pa.set_io_thread_count(n)
def ts(s):
    return dt.datetime.fromisoformat(s).replace(tzinfo=dt.timezone.utc)
r0 = resource.getrusage(resource.RUSAGE_SELF)
t = time.perf_counter()
table = pq.read_table(path, filters=[("ts", ">=", ts(lo)), ("ts", "<", ts(hi))])
secs = time.perf_counter() - t
r1 = resource.getrusage(resource.RUSAGE_SELF)
cpu = (r1.ru_utime - r0.ru_utime) + (r1.ru_stime - r0.ru_stime)
rows = table.num_rows
print(json.dumps({"tool": f"pyarrow read_table, ts in [{lo}, {hi})", "rows": rows,
                  "seconds": secs, "cpu_seconds": cpu, "rows_per_s": rows / secs,
                  "peak_rss_mib": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024}))
"""


def day(s):
    return dt.date.fromisoformat(s)


def timed(cmd, what):
    """Runs cmd under /usr/bin/time -v; returns (process, wall s, peak RSS MiB, user + system CPU s)."""
    p = subprocess.run(["/usr/bin/time", "-v"] + cmd, capture_output=True, text=True)
    if p.returncode != 0:
        sys.exit(f"{what} failed ({p.returncode}): {' '.join(cmd)}\n{p.stdout[-2000:]}\n{p.stderr[-4000:]}")
    wall = re.search(r"Elapsed \(wall clock\) time \(h:mm:ss or m:ss\): (?:(\d+):)?(\d+):([\d.]+)", p.stderr)
    secs = int(wall.group(1) or 0) * 3600 + int(wall.group(2)) * 60 + float(wall.group(3))
    rss = int(re.search(r"Maximum resident set size \(kbytes\): (\d+)", p.stderr).group(1))
    cpu = sum(float(re.search(rf"{k} time \(seconds\): ([\d.]+)", p.stderr).group(1)) for k in ("User", "System"))
    return p, secs, rss / 1024, cpu


def prepare(a, c):
    """Generates the fleet and fits the store when missing; prints the fit time."""
    if not os.path.exists(c["history"]):
        cmd = [a.bin, "-q", "demo", "--generate-only", "--out", c["dir"]] + c["demo_args"]
        print(f"generating: {' '.join(cmd)}", flush=True)
        subprocess.run(cmd, check=True)
    if os.path.isdir(c["store"]) and os.listdir(c["store"]):
        print(f"{c['name']}: using the existing store {c['store']}", flush=True)
        return None
    cmd = ["taskset", "-c", a.cpus, a.bin, "-q", "fit", "--history", c["history"], "--fleet", c["fleet"],
           "--until", c["fit_until"], "--store", c["store"]]
    if c["fit_from"]:
        cmd += ["--from", c["fit_from"]]
    _, secs, rss, _ = timed(cmd, "telltale fit")
    print(f"{c['name']}: fitted {c['store']} in {secs:.2f} s (peak RSS {rss:.0f} MiB; not part of the scan figure)",
          flush=True)
    return {"seconds": secs, "peak_rss_mib": rss}


def run_scan(a, c):
    cmd = ["taskset", "-c", a.cpus, a.bin, "scan", "--history", c["history"], "--fleet", c["fleet"],
           "--store", c["store"], "--from", c["from"], "--to", c["to"], "--out", c["out"]]
    p, secs, rss, cpu = timed(cmd, "telltale scan")
    # "scan finished assets=1000 skipped=0 rows=100738801 verdicts=.. suspicions=.. seconds=.. rows_per_s=.."
    m = re.search(r"scan finished.*?assets=(\d+) skipped=(\d+) rows=(\d+) verdicts=(\d+) suspicions=(\d+)",
                  p.stderr)
    if not m:
        sys.exit(f"cannot read telltale scan's summary line:\n{p.stderr[-4000:]}")
    rows = int(m.group(3))
    return {"tool": "telltale scan", "rows": rows, "assets": int(m.group(1)), "skipped": int(m.group(2)),
            "verdicts": int(m.group(4)), "suspicions": int(m.group(5)), "seconds": secs, "cpu_seconds": cpu,
            "rows_per_s": rows / secs, "peak_rss_mib": rss}


def run_pyarrow(a, c, lo, hi):
    n = len(parse_cpus(a.cpus))
    env = dict(os.environ, OMP_NUM_THREADS=str(n), ARROW_IO_THREADS=str(n))
    cmd = ["taskset", "-c", a.cpus, sys.executable, "-c", CHILD, c["history"], lo, hi, str(n)]
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
    return min(runs, key=lambda r: r["seconds"]), runs


def bench(a, c):
    fit = prepare(a, c)
    read_from = (day(c["from"]) - dt.timedelta(days=WARMUP_DAYS)).isoformat()
    weeks_read = (day(c["to"]) - day(read_from)).days / 7
    weeks_span = (day(c["to"]) - day(c["from"])).days / 7
    load0 = os.getloadavg()[0]
    tt, tt_runs = best(lambda: run_scan(a, c), a.repeat)
    if not c["pyarrow"]:
        pa_all = pa_span = None
    else:
        pa_all, _ = best(lambda: run_pyarrow(a, c, read_from, c["to"]), a.repeat)
        pa_span, _ = best(lambda: run_pyarrow(a, c, c["from"], c["to"]), a.repeat)
    if pa_all and tt["rows"] != pa_all["rows"]:
        print(f"warning: telltale scan read {tt['rows']} rows, pyarrow {pa_all['rows']} in [{read_from}, {c['to']})",
              file=sys.stderr)
    print()
    print(f"{c['name']}: {c['history']} ({os.path.getsize(c['history']) / 2**20:.0f} MiB), "
          f"scan [{c['from']}, {c['to']}) reads [{read_from}, {c['to']}) with warm-up; "
          f"cpus: {a.cpus}, best of {a.repeat}; 1-min load average {load0:.1f} before, "
          f"{os.getloadavg()[0]:.1f} after (other work on these cores inflates wall time)")
    print("| tool | rows | seconds | M rows/s | scan / this (time) | CPU s (user + sys) | peak RSS MiB |")
    print("|---|---|---|---|---|---|---|")
    for r in (x for x in (tt, pa_all, pa_span) if x):
        print(f"| {r['tool']} | {r['rows']} | {r['seconds']:.2f} | {r['rows_per_s'] / 1e6:.1f} | "
              f"{tt['seconds'] / r['seconds']:.2f}x | {r['cpu_seconds']:.1f} | {r['peak_rss_mib']:.0f} |")
    per_week_read = tt["seconds"] / weeks_read
    per_week_span = tt["seconds"] / weeks_span
    print(f"{tt['assets']} assets scanned ({tt['skipped']} skipped), {tt['verdicts']} verdicts before FDR, "
          f"{tt['suspicions']} suspicions; scan runs: "
          + ", ".join(f"{r['seconds']:.2f} s / {r['peak_rss_mib']:.0f} MiB" for r in tt_runs))
    print(f"scan per fleet-week: {per_week_read:.2f} s per week read ({weeks_read:.2f} weeks incl. warm-up), "
          f"{per_week_span:.2f} s per week reported ({weeks_span:.2f} weeks); "
          f"{1e3 * tt['seconds'] / (tt['assets'] * weeks_read):.2f} ms per asset-week read")
    return {"name": c["name"], "history": c["history"], "bytes": os.path.getsize(c["history"]),
            "from": c["from"], "to": c["to"], "read_from": read_from, "fit": fit,
            "load_average_before": load0,
            "weeks_read": weeks_read, "weeks_reported": weeks_span,
            "seconds_per_fleet_week_read": per_week_read, "seconds_per_fleet_week_reported": per_week_span,
            "ratio_scan_vs_pyarrow_same_rows": tt["seconds"] / pa_all["seconds"] if pa_all else None,
            "results": [x for x in (tt, pa_all, pa_span) if x], "scan_runs": tt_runs}


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--fleet1000", default="/work/bench-data/fleet1000")
    ap.add_argument("--store1000", default="/work/bench-data/store1000")
    ap.add_argument("--demo30", default="/tmp/demo30")
    ap.add_argument("--store30", help="default: DEMO30/store")
    ap.add_argument("--only", help="run only this fleet (fleet1000, demo30, or fleetN of --scale-sites)")
    ap.add_argument("--scale-sites", type=int, metavar="N",
                    help="also scan a benchmark fleet of N sites x 10 pumps (made in the fleet1000 folder's "
                         "parent), scan only, no pyarrow run: how peak RSS grows with the fleet")
    ap.add_argument("--bin", default=BIN)
    ap.add_argument("--repeat", type=int, default=2)
    ap.add_argument("--cpus", default=",".join(map(str, sorted(os.sched_getaffinity(0)))))
    ap.add_argument("--json")
    a = ap.parse_args()
    if not os.path.exists(a.bin):
        sys.exit(f"build first: cargo build --release (no {a.bin})")
    import pyarrow

    cases = [
        {"name": "fleet1000", "dir": a.fleet1000, "demo_args": ["--preset", "benchmark"],
         "history": os.path.join(a.fleet1000, "history.parquet"), "fleet": os.path.join(a.fleet1000, "fleet.toml"),
         "store": a.store1000, "fit_from": None, "fit_until": "2026-05-07",
         "from": "2026-05-07", "to": "2026-05-11", "out": "/tmp/scan.jsonl"},
        {"name": "demo30", "dir": a.demo30, "demo_args": [],
         "history": os.path.join(a.demo30, "history.parquet"), "fleet": os.path.join(a.demo30, "fleet.toml"),
         "store": a.store30 or os.path.join(a.demo30, "store"), "fit_from": "2026-05-04", "fit_until": "2026-06-01",
         "from": "2026-06-01", "to": "2026-07-27", "out": "/tmp/scan_demo30.jsonl"},
    ]
    for c in cases:
        c["pyarrow"] = True
    if a.scale_sites:
        name = f"fleet{10 * a.scale_sites}"
        parent = os.path.dirname(os.path.abspath(a.fleet1000))
        d = os.path.join(parent, name)
        cases.append(dict(cases[0], name=name, dir=d, pyarrow=False,
                          demo_args=["--preset", "benchmark", "--sites", str(a.scale_sites)],
                          history=os.path.join(d, "history.parquet"), fleet=os.path.join(d, "fleet.toml"),
                          store=os.path.join(parent, f"store{10 * a.scale_sites}"), out=f"/tmp/scan_{name}.jsonl"))
    out = [bench(a, c) for c in cases if a.only in (None, c["name"])]
    if a.json:
        with open(a.json, "w") as f:
            json.dump({"cpus": a.cpus, "python": platform.python_version(), "pyarrow": pyarrow.__version__,
                       "repeat": a.repeat, "fleets": out}, f, indent=1)


if __name__ == "__main__":
    main()
