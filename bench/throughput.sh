#!/usr/bin/env bash
# Throughput: tessera fit --noise ar1 against a per-region statsmodels loop
# (GLSAR(rho=1).iterative_fit) on the same study and the same designs, timed
# side by side in one run. Needs Debian's python3-statsmodels.
#
#   bench/throughput.sh [WORKDIR]     (default: a temporary folder)
#
# The study: 20 subjects x 4 runs x 400 regions x 300 volumes, TR 2 s, events.
set -euo pipefail
cd "$(dirname "$0")/.."
work="${1:-$(mktemp -d)}"
mkdir -p "$work"
go build -o "$work/tessera" ./cmd/tessera
"$work/tessera" simulate -o "$work/study" --subjects 20 --runs 4 --regions 400 --volumes 300 \
  --tr 2 --design event --seed 1 >/dev/null
rm -rf "$work/results"
t0=$(date +%s.%N)
"$work/tessera" fit "$work/study/study.csv" -o "$work/results" --noise ar1 --quiet >/dev/null 2>&1
t1=$(date +%s.%N)
tessera_s=$(awk -v a="$t0" -v b="$t1" 'BEGIN{printf "%.2f", b-a}')
echo "tessera fit --noise ar1 (all cores, reading and writing included): ${tessera_s} s"
t0=$(date +%s.%N)
/usr/bin/python3 -E -s bench/glsar_loop.py "$work/study" "$work/results"
t1=$(date +%s.%N)
loop_s=$(awk -v a="$t0" -v b="$t1" 'BEGIN{printf "%.2f", b-a}')
echo "statsmodels GLSAR loop (one core, reading included): ${loop_s} s"
echo "ratio: $(awk -v a="$loop_s" -v b="$tessera_s" 'BEGIN{printf "%.0f", a/b}')x"
echo "machine: $(lscpu | sed -n 's/^Model name: *//p'), $(nproc) cores"
