#!/usr/bin/env bash
# Fit benchmarks: junco vs SciPy on the same curves (interleaved rounds), then statistical efficiency.
#   tests/bench/run_fit_bench.sh [build-dir] [rounds]     (default build/default, 5 rounds)
set -euo pipefail
top=$(cd "$(dirname "$0")/../.." && pwd)
bin=${1:-$top/build/default}/bin
rounds=${2:-5}
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
echo "== junco (bench_fit_speed) and SciPy least_squares on the same curves, $rounds interleaved rounds"
/usr/bin/python3 "$top/tests/bench/fit_scipy.py" "$bin/bench_fit_speed" "$tmp" "$rounds" || status=$?
echo
echo "== statistical efficiency (1000 replicas)"
"$bin/bench_fit_efficiency" 1000
exit "${status:-0}"
