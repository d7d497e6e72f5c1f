#!/usr/bin/env bash
# Report generation on the 1,000-pump benchmark fleet (one week of 1-minute
# rows): seconds, file size and peak RSS of `telltale report`.
#
#   bash bench/report_bench.sh [DATA_DIR] [THREADS]   (default /tmp/telltale-report-bench, 2)
#
# Makes the fleet and its store first if they are missing
# (`telltale demo --preset benchmark --generate-only`, `telltale fit --until
# 2026-05-07`; not timed), then times one report of 2026-05-07 .. 2026-05-11
# (the scan span of bench/scan_bench.py) in each format under /usr/bin/time.
# The report runs the scan twice (this period and the previous one of the
# same length, for new / continuing / closed) and reads the period once more
# for the charts and the per-asset figures.
set -euo pipefail
cd "$(dirname "$0")/.."
DATA=${1:-/tmp/telltale-report-bench}
J=${2:-2}
cargo build --release --quiet -p telltale --bin telltale
BIN=$PWD/target/release/telltale
mkdir -p "$DATA"
FLEET=$DATA/fleet1000
STORE=$DATA/store1000
if [ ! -f "$FLEET/history.parquet" ]; then
    "$BIN" -q demo --preset benchmark --generate-only --out "$FLEET" >/dev/null
fi
if [ ! -f "$STORE/store.json" ]; then
    "$BIN" -q fit -j"$J" --until 2026-05-07 --history "$FLEET/history.parquet" \
        --fleet "$FLEET/fleet.toml" --store "$STORE"
fi
printf '| format | panels | wall s | peak RSS MB | file MB |\n|---|---:|---:|---:|---:|\n'
for fmt in html md; do
    out=$DATA/review.$fmt
    /usr/bin/time -f "%e %M" -o "$DATA/time.$fmt" \
        "$BIN" -q report -j"$J" --history "$FLEET/history.parquet" --fleet "$FLEET/fleet.toml" \
        --store "$STORE" --from 2026-05-07 --to 2026-05-11 --format "$fmt" --out "$out"
    read -r secs kb <"$DATA/time.$fmt"
    bytes=$(stat -c %s "$out")
    panels=$(grep -o '<section class="tt-panel"' "$out" | wc -l || true)
    awk -v f="$fmt" -v p="$panels" -v s="$secs" -v k="$kb" -v b="$bytes" \
        'BEGIN { printf "| %s | %d | %.1f | %.0f | %.2f |\n", f, p, s, k / 1024, b / 1e6 }'
done
/usr/bin/time -f "%e" -o "$DATA/time.scan" \
    "$BIN" -q scan -j"$J" --history "$FLEET/history.parquet" --fleet "$FLEET/fleet.toml" \
    --store "$STORE" --from 2026-05-07 --to 2026-05-11 --out "$DATA/scan.jsonl"
echo "one scan of the same period alone: $(cat "$DATA/time.scan") s, $(wc -l <"$DATA/scan.jsonl") suspicions"
echo "(threads: $J; $(nproc) CPUs; history $(du -h "$FLEET/history.parquet" | cut -f1))"
