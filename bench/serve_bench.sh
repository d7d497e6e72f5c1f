#!/usr/bin/env bash
# Load test of `telltale serve` on loopback: throughput and latency of
# scoring one pump's one-hour window (10 sensors x 60 readings, JSON), with
# wrk (Debian package `wrk`).
#
#   bash bench/serve_bench.sh [OUT_DIR] [SECONDS] [CONNECTIONS]   (default /tmp/telltale-serve, 20, 8)
#
# 1. The small demo fleet at 1-minute samples (24 pumps, 5 days), fitted on
#    its first 2 days.
# 2. A write key, and `telltale serve` (release build) on 127.0.0.1:0.
# 3. The body: pump ASSET's readings in [2026-05-07T00:00Z, 01:00Z) from the
#    history (services/examples/serve_window.rs).
# 4. wrk: 2 threads, CONNECTIONS connections, SECONDS seconds, --latency.
#    Every request scores the window and commits its row (and any
#    suspicions) to SQLite with synchronous=FULL before answering.
# Prints wrk's report and writes it to OUT_DIR/serve-bench.txt.
set -euo pipefail
cd "$(dirname "$0")/.."
OUT=${1:-/tmp/telltale-serve}
SECS=${2:-20}
CONNS=${3:-8}
ASSET=${ASSET:-northgate-b1}
command -v wrk >/dev/null || { echo "needs wrk: apt-get install wrk" >&2; exit 2; }
mkdir -p "$OUT"
cargo build --release --quiet -p telltale --bin telltale --example serve_window
BIN=target/release/telltale
rm -rf "$OUT/demo" "$OUT/store" "$OUT/serve.db"*
"$BIN" -q demo --preset small --sample-interval-s 60 --generate-only --out "$OUT/demo" >/dev/null
"$BIN" -q fit --history "$OUT/demo/history.parquet" --fleet "$OUT/demo/fleet.toml" \
    --until 2026-05-06 --store "$OUT/store" >/dev/null
KEY=$("$BIN" keys add --db "$OUT/serve.db" --scope write --name bench 2>/dev/null)
target/release/examples/serve_window "$OUT/demo/history.parquet" "$ASSET" \
    2026-05-07T00:00:00Z 2026-05-07T01:00:00Z > "$OUT/window.json"
READINGS=$(grep -o '"sensor"' "$OUT/window.json" | wc -l)
"$BIN" -q serve --store "$OUT/store" --db "$OUT/serve.db" --listen 127.0.0.1:0 > "$OUT/serve.out" &
PID=$!
trap 'kill $PID 2>/dev/null || true' EXIT
for _ in $(seq 50); do grep -q listening "$OUT/serve.out" && break; sleep 0.1; done
URL=$(sed -n 's/^listening on //p' "$OUT/serve.out")
cat > "$OUT/score.lua" <<LUA
wrk.method = "POST"
wrk.headers["Content-Type"] = "application/json"
wrk.headers["Authorization"] = "Bearer $KEY"
local f = io.open("$OUT/window.json", "r")
wrk.body = f:read("*a")
f:close()
LUA
# one request by hand first: it must succeed
curl -sf -o /dev/null -H "Authorization: Bearer $KEY" -H 'Content-Type: application/json' \
    --data-binary @"$OUT/window.json" "$URL/v1/windows/score"
{
    echo "telltale serve, POST /v1/windows/score: $ASSET, $READINGS readings, JSON; $(nproc) cores"
    wrk -t2 -c"$CONNS" -d"${SECS}s" --latency -s "$OUT/score.lua" "$URL/v1/windows/score"
    echo "windows stored: $(curl -s "$URL/metrics" | sed -n 's/^telltale_windows_scored_total //p')"
} | tee "$OUT/serve-bench.txt"
