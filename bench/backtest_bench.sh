#!/usr/bin/env bash
# Backtest of the demo fleet, and its runtime as a multiple of one fit plus one
# scan over the same span.
#
#   bash bench/backtest_bench.sh [OUT_DIR]          (default /tmp/telltale-backtest)
#
# 1. `telltale demo --generate-only` writes the demo fleet (30 pumps, 12 weeks).
# 2. `telltale backtest` replays it with the default settings (weekly re-fits
#    on the trailing 28 days, daily review steps) and scores it against
#    events.csv; its stdout goes to OUT_DIR/backtest.txt.
# 3. One `telltale fit` on the 28 days before the replay start and one
#    `telltale scan` over the whole replay span, the work a single pass does.
# Each step is timed by /usr/bin/time (wall seconds, peak RSS); the script
# prints the figures and the multiple, and writes them to OUT_DIR/backtest-bench.md.
set -euo pipefail
cd "$(dirname "$0")/.."
OUT=${1:-/tmp/telltale-backtest}
mkdir -p "$OUT"
cargo build --release --quiet -p telltale --bin telltale
BIN=target/release/telltale
FLEET=$OUT/fleet
rm -rf "$FLEET" "$OUT/bt" "$OUT/store-once"
"$BIN" -q demo --out "$FLEET" --generate-only >/dev/null

timed() { # name, command...
    local name=$1
    shift
    /usr/bin/time -f "%e %M" -o "$OUT/$name.time" "$@"
}

timed backtest "$BIN" -q backtest --history "$FLEET/history.parquet" --fleet "$FLEET/fleet.toml" \
    --events "$FLEET/events.csv" --outages "$FLEET/outages.csv" --out "$OUT/bt" >"$OUT/backtest.txt"

read -r FROM TO FITDAYS < <(python3 - "$OUT/bt/summary.json" <<'PY'
import json, sys
s = json.load(open(sys.argv[1]))["settings"]
print(s["from"], s["to"], s["fit_window_days"])
PY
)
FIT_FROM=$(python3 -c "
import datetime as d, sys
t = d.datetime.fromisoformat('$FROM'.replace('Z', '+00:00'))
print((t - d.timedelta(days=$FITDAYS)).strftime('%Y-%m-%dT%H:%M:%SZ'))")

timed fit "$BIN" -q fit --history "$FLEET/history.parquet" --fleet "$FLEET/fleet.toml" \
    --from "$FIT_FROM" --until "$FROM" --store "$OUT/store-once" >/dev/null
timed scan "$BIN" -q scan --history "$FLEET/history.parquet" --fleet "$FLEET/fleet.toml" \
    --store "$OUT/store-once" --from "$FROM" --to "$TO" --out "$OUT/scan-once.jsonl"

python3 - "$OUT" "$FROM" "$TO" <<'PY'
import json, sys
out, fr, to = sys.argv[1:4]
t = {n: open(f"{out}/{n}.time").read().split() for n in ("backtest", "fit", "scan")}
sec = {n: float(v[0]) for n, v in t.items()}
rss = {n: int(v[1]) / 1024 for n, v in t.items()}
s = json.load(open(f"{out}/bt/summary.json"))
once = sec["fit"] + sec["scan"]
lines = [
    f"replay {fr} .. {to}, {s['assets']} assets, {len(open(f'{out}/bt/folds.csv').readlines()) - 1} folds",
    "",
    "| step | seconds | peak RSS MiB |",
    "|---|---|---|",
    f"| telltale backtest (every fold's fit and every daily scan, scoring) | {sec['backtest']:.1f} | {rss['backtest']:.0f} |",
    f"| one telltale fit (28 days before the replay) | {sec['fit']:.1f} | {rss['fit']:.0f} |",
    f"| one telltale scan (the whole replay span) | {sec['scan']:.1f} | {rss['scan']:.0f} |",
    "",
    f"backtest / (fit + scan) = {sec['backtest']:.1f} / {once:.1f} = {sec['backtest'] / once:.1f}x",
]
open(f"{out}/backtest-bench.md", "w").write("\n".join(lines) + "\n")
print("\n".join(lines))
PY
echo
cat "$OUT/backtest.txt"
