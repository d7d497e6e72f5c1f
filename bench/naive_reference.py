"""Independent re-implementation of the naive comparison detector
(pipelines/src/jobs/naive.rs) with polars and numpy, to cross-check the Rust
example's output episode by episode.

    .venv/bin/python bench/naive_reference.py HISTORY FIT_FROM FIT_UNTIL FROM TO NAIVE.jsonl

Times are RFC 3339 or dates (midnight UTC). Prints the episode counts of both
sides and the episodes (asset, sensor, onset) found by only one of them; exits 1
if they differ. Defaults as in NaiveSettings::new: |z| > 3.5, 3 consecutive
hours, at least 24 fit hours.
"""

import json
import sys
from datetime import datetime, timezone

import numpy as np
import polars as pl

H = 3_600_000
MAD_NORMAL = 1.482602218505602  # 1 / Phi^-1(3/4), as scipy's scale='normal'
Z, MIN_HOURS, MIN_FIT_HOURS = 3.5, 3, 24


def ms(s):
    t = datetime.fromisoformat(s.replace("Z", "+00:00"))
    if t.tzinfo is None:
        t = t.replace(tzinfo=timezone.utc)
    return int(t.timestamp() * 1000)


def episodes(t, z, eval_start):
    out, run, open_ = [], None, None
    for ti, zi in zip(t, z):
        ab = abs(zi) > Z
        if open_ is not None:
            if not ab:
                out.append(open_)
                open_ = None
            continue
        if not ab:
            run = None
            continue
        run = (run[0], run[1] + 1, ti) if run and run[2] + H == ti else (ti, 1, ti)
        if run[1] >= MIN_HOURS:
            open_ = (max(run[0], eval_start), ti + H)
            run = None
    if open_ is not None:
        out.append(open_)
    return out


def main():
    history, fit_from, fit_until, frm, to, jsonl = sys.argv[1:7]
    fit_from, fit_until, frm, to = map(ms, (fit_from, fit_until, frm, to))
    eval_start = min(frm, fit_until)
    lo = min(fit_from, frm)
    df = (
        pl.scan_parquet(history)
        .with_columns(pl.col("ts").dt.epoch("ms").alias("t"))
        .filter((pl.col("t") >= lo) & (pl.col("t") < to))
        .filter(pl.col("value").is_not_null() & pl.col("value").is_not_nan())
        .with_columns((pl.col("t") // H * H).alias("h"))
    )

    def hourly(a, b):
        return (
            df.filter((pl.col("t") >= a) & (pl.col("t") < b))
            .group_by(["asset", "sensor", "h"])
            .agg(pl.col("value").median().alias("m"))
            .sort(["asset", "sensor", "h"])
            .collect()
        )

    fit = {k: g for k, g in hourly(fit_from, fit_until).group_by(["asset", "sensor"])}
    py = set()
    for (a, s), g in hourly(eval_start, to).group_by(["asset", "sensor"]):
        f = fit.get((a, s))
        if f is None or f.height < MIN_FIT_HOURS:
            continue
        fm = f["m"].to_numpy()
        m = np.median(fm)
        sd = MAD_NORMAL * np.median(np.abs(fm - m))
        if not sd > 0:
            continue
        z = (g["m"].to_numpy() - m) / sd
        for onset, detected in episodes(g["h"].to_numpy(), z, eval_start):
            if frm <= detected < to:
                py.add((str(a), str(s), int(onset)))
    with open(jsonl) as fh:
        rs = {(r["asset"], r["sensor"], ms(r["onset"])) for r in map(json.loads, fh)}
    print(f"reference {len(py)} episodes, rust {len(rs)}")
    for k in sorted(py - rs):
        print("only reference:", k)
    for k in sorted(rs - py):
        print("only rust:", k)
    sys.exit(0 if py == rs else 1)


if __name__ == "__main__":
    main()
