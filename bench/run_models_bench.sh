#!/usr/bin/env bash
# Side-by-side timings of the statistical core (issue 3): criterion benches of
# telltale-models, then the reference libraries on the same inputs, in one run.
# Usage: bash bench/run_models_bench.sh   (needs .venv, see DEVELOPERS.md)
# Writes the raw output to target/models-bench.txt.
set -euo pipefail
cd "$(dirname "$0")/.."
py=.venv/bin/python
out=target/models-bench.txt
mkdir -p target
{
  echo "== $(date -u +%FT%TZ) $(nproc) cores, load $(cut -d' ' -f1-3 /proc/loadavg)"
  echo "== criterion (telltale-models)"
  cargo bench -q -p telltale-models -- --warm-up-time 1 --measurement-time 3 2>&1 \
    | grep -E '^[a-z_]+/[0-9]+|time:' || true
  echo "== numpy median+MAD, statsmodels qn_scale"
  "$py" bench/robust_reference.py
  echo "== pymannkendall, scipy kendalltau, scipy theilslopes (n = 10000)"
  "$py" bench/trend_reference.py 10000
  echo "== ruptures Pelt(model=l2, jump=1) (n = 2000)"
  "$py" bench/changepoint_reference.py 2000
} | tee "$out"
