#!/usr/bin/env bash
# Load test of `telltale serve` on loopback: throughput and latency of
# scoring one pump's one-hour window (10 sensors x 60 readings), sent as JSON
# and as an Arrow IPC stream, with wrk (Debian package `wrk`).
#
#   bash bench/serve_bench.sh [OUT_DIR] [SECONDS] [CONNECTIONS]   (default /tmp/telltale-serve, 20, 8)
#
# 1. The small demo fleet at 1-minute samples (24 pumps, 5 days), fitted on
#    its first 2 days.
# 2. A write key, and `telltale serve` (release build) on 127.0.0.1:0.
# 3. The bodies: pump ASSET's readings in [2026-05-07T00:00Z, 01:00Z) from
#    the history (services/examples/serve_window.rs): window.json, and
#    window.arrows (Arrow IPC stream; asset, from and to in the query).
# 4. wrk, once per body: 2 threads, CONNECTIONS connections, SECONDS
#    seconds, --latency. Every request scores the window and answers once
#    its row (and any suspicions) is committed to SQLite with
#    synchronous=FULL; concurrent requests share commits (group commit).
# Prints wrk's reports, checks that no request failed (non-2xx or socket
# errors make the script exit 1), and writes them to OUT_DIR/serve-bench.txt.
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
FROM=2026-05-07T00:00:00Z
TO=2026-05-07T01:00:00Z
target/release/examples/serve_window "$OUT/demo/history.parquet" "$ASSET" "$FROM" "$TO" > "$OUT/window.json"
target/release/examples/serve_window "$OUT/demo/history.parquet" "$ASSET" "$FROM" "$TO" --arrow \
    > "$OUT/window.arrows"
READINGS=$(grep -o '"sensor"' "$OUT/window.json" | wc -l)
"$BIN" -q serve --store "$OUT/store" --db "$OUT/serve.db" --listen 127.0.0.1:0 > "$OUT/serve.out" &
PID=$!
trap 'kill $PID 2>/dev/null || true' EXIT
for _ in $(seq 50); do grep -q listening "$OUT/serve.out" && break; sleep 0.1; done
URL=$(sed -n 's/^listening on //p' "$OUT/serve.out")
ARROW_MEDIA=application/vnd.apache.arrow.stream
QUERY="asset=$ASSET&from=$FROM&to=$TO"
lua() { # MEDIA FILE > script
    cat <<LUA
wrk.method = "POST"
wrk.headers["Content-Type"] = "$1"
wrk.headers["Authorization"] = "Bearer $KEY"
local f = io.open("$2", "rb")
wrk.body = f:read("*a")
f:close()
LUA
}
lua application/json "$OUT/window.json" > "$OUT/score-json.lua"
lua "$ARROW_MEDIA" "$OUT/window.arrows" > "$OUT/score-arrow.lua"
# one request of each by hand first: both must succeed, with the same suspicions
curl -sf -H "Authorization: Bearer $KEY" -H 'Content-Type: application/json' \
    --data-binary @"$OUT/window.json" "$URL/v1/windows/score" > "$OUT/answer-json.json"
curl -sf -H "Authorization: Bearer $KEY" -H "Content-Type: $ARROW_MEDIA" \
    --data-binary @"$OUT/window.arrows" "$URL/v1/windows/score?$QUERY" > "$OUT/answer-arrow.json"
same() { sed -e 's/"times_scored":[0-9]*//g' -e 's/"last_scored":"[^"]*"//g' "$1"; }
cmp -s <(same "$OUT/answer-json.json") <(same "$OUT/answer-arrow.json") \
    || { echo "the JSON and Arrow windows got different answers" >&2; exit 1; }
{
    for body in json arrow; do
        if [ $body = json ]; then path=/v1/windows/score; else path="/v1/windows/score?$QUERY"; fi
        echo "telltale serve, POST /v1/windows/score: $ASSET, $READINGS readings, $body; $(nproc) cores"
        wrk -t2 -c"$CONNS" -d"${SECS}s" --latency -s "$OUT/score-$body.lua" "$URL$path" \
            | tee "$OUT/wrk-$body.txt"
        echo
    done
    echo "windows stored: $(curl -s "$URL/metrics" | sed -n 's/^telltale_windows_scored_total //p')"
} | tee "$OUT/serve-bench.txt"
if grep -qE 'Non-2xx|Socket errors' "$OUT/serve-bench.txt"; then
    echo "some requests failed; see above" >&2
    exit 1
fi
