#!/usr/bin/env bash
# Fit benchmarks: junco vs SciPy on the same curves, then statistical efficiency.
#   tests/bench/run_fit_bench.sh [build-dir]     (default build/default)
set -euo pipefail
top=$(cd "$(dirname "$0")/../.." && pwd)
bin=${1:-$top/build/default}/bin
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
echo "== junco (one weighted solve; full fit_forward for reference)"
"$bin/bench_fit_speed" "$tmp"
echo
echo "== SciPy least_squares on the same residual, weights and start"
/usr/bin/python3 "$top/tests/bench/fit_scipy.py" "$tmp"
echo
echo "== statistical efficiency (1000 replicas)"
"$bin/bench_fit_efficiency" 1000
