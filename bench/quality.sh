#!/usr/bin/env bash
# Detection quality of telltale and of a naive detector on two demo fleets.
#
#   bash bench/quality.sh [OUT_DIR]          (default /tmp/telltale-quality)
#
# Fleet A: the demo as shipped (`telltale demo`).
# Fleet B: another seed, twice the measurement noise and a different mix of
#          assets (4 stations of 6 pumps instead of 3 of 10).
# For each fleet: generate, fit on the clean weeks, scan the rest (all by
# `telltale demo`), score with `telltale evaluate` against the ground truth,
# then run the naive detector (hourly robust z against the fit period, every
# finding a sensor bias: pipelines/examples/naive_scan.rs) on the same data
# and score it the same way. Writes OUT_DIR/quality.md and prints it.
set -euo pipefail
cd "$(dirname "$0")/.."
OUT=${1:-/tmp/telltale-quality}
mkdir -p "$OUT"
cargo build --release --quiet -p telltale --bin telltale
cargo build --release --quiet -p telltale-pipelines --example naive_scan
BIN=target/release/telltale
NAIVE=target/release/examples/naive_scan

run_fleet() {
    local name=$1
    shift
    local dir=$OUT/$name
    rm -rf "$dir"
    /usr/bin/time -f "%e s %M KB" -o "$OUT/$name.time" \
        "$BIN" -q demo --out "$dir" --top 0 "$@" >"$OUT/$name.demo.txt"
    local fit scan
    fit=$(grep '^  fit span' "$OUT/$name.demo.txt" | awk '{print $3, $5}')
    scan=$(grep '^  scan span' "$OUT/$name.demo.txt" | awk '{print $3, $5}')
    read -r f0 f1 <<<"$fit"
    read -r s0 s1 <<<"$scan"
    for det in telltale naive; do
        local sus=$dir/suspicions.jsonl
        if [ "$det" = naive ]; then
            sus=$dir/naive.jsonl
            "$NAIVE" --history "$dir/history.parquet" --fleet "$dir/fleet.toml" \
                --fit-from "$f0" --fit-until "$f1" --from "$s0" --to "$s1" --out "$sus" 2>/dev/null
        fi
        "$BIN" -q evaluate --suspicions "$sus" --events "$dir/events.csv" \
            --outages "$dir/outages.csv" --fleet "$dir/fleet.toml" --from "$s0" --to "$s1" \
            --json "$OUT/$name.$det.json" >"$OUT/$name.$det.txt"
    done
}

run_fleet fleet-a
run_fleet fleet-b --seed 7 --noise 2 --sites 4 --pumps-per-site 6

python3 - "$OUT" <<'PY'
import json, sys, os
out = sys.argv[1]
def cls(r, c):
    for x in r["by_class"]:
        if x["class"] == c:
            return x
    return {}
def pct(x):
    return "-" if x is None else f"{100 * x:.0f}%"
def num(x, f="{:.1f}"):
    return "-" if x is None else f.format(x)
rows = []
for fleet in ("fleet-a", "fleet-b"):
    for det in ("telltale", "naive"):
        r = json.load(open(os.path.join(out, f"{fleet}.{det}.json")))
        sf, pc, eq = (cls(r, c) for c in ("sensor_fault", "process_change", "equipment_fault"))
        fa = r["false_alarms"]
        lt = r["lead_time"]
        m72 = [m for m in lt["marks"] if m["hours"] == 72.0]
        rows.append([
            fleet, det, r["suspicions"]["in_span"] if isinstance(r["suspicions"], dict) and "in_span" in r["suspicions"] else "",
            pct(sf.get("recall")), pct(pc.get("recall")), pct(eq.get("recall")),
            pct(r["overall"]["class_accuracy"]), pct(r["overall"]["mode_accuracy"]),
            num(fa["per_100_asset_weeks"]), num(fa["clean_assets"]["per_100_asset_weeks"]),
            num(sf.get("delay_median_hours"), "{:.0f}"), num(pc.get("delay_median_hours"), "{:.0f}"),
            num(eq.get("delay_median_hours"), "{:.0f}"),
            f'{lt["warned"]}/{len(lt["failures"])}', num(lt.get("median_hours"), "{:.0f}"),
            f'{m72[0]["warned"]}/{len(lt["failures"])}' if m72 else "-",
        ])
head = ["fleet", "detector", "suspicions", "recall sensor", "recall process", "recall equipment",
        "class acc.", "mode acc.", "FA/100 aw", "FA/100 aw clean assets",
        "delay sensor h", "delay process h", "delay equipment h", "failures warned",
        "median lead h", "warned >= 72 h"]
lines = ["| " + " | ".join(head) + " |", "|" + "---|" * len(head)]
lines += ["| " + " | ".join(str(c) for c in r) + " |" for r in rows]
times = []
for fleet in ("fleet-a", "fleet-b"):
    t = open(os.path.join(out, f"{fleet}.time")).read().strip()
    times.append(f"{fleet}: telltale demo (generate + fit + scan) {t}")
text = "\n".join(lines) + "\n\n" + "\n".join(times) + "\n"
open(os.path.join(out, "quality.md"), "w").write(text)
print(text)
PY
