#!/usr/bin/env bash
# Calibration of the noise models: the false-positive rate of every --noise model on
# simulated null studies whose noise is an AR(1) process (coefficient 0.2-0.6 per region)
# plus white noise of the same variance, at TR 0.8 s (blocks, 500 volumes) and TR 2.0 s
# (events, 200 volumes): 100 subjects x 1 run x 40 regions = 4,000 null tests each (one
# test per region and run, the condition "ordered"). Writes docs/calibration.md.
#
#   bench/calibration.sh [WORKDIR]     (default: a temporary folder, removed afterwards)
#   SUBJECTS=500 OUT=docs/calibration-large.md bench/calibration.sh
#                                      (five times the tests: a 99% interval of 4.6%-5.4%)
#
# Needs only Go; the studies, fits and table are the same on every machine for these seeds.
set -euo pipefail
cd "$(dirname "$0")/.."
if [ $# -ge 1 ]; then
  work="$1"
  mkdir -p "$work"
else
  work="$(mktemp -d)"
  trap 'rm -rf "$work"' EXIT
fi
subjects="${SUBJECTS:-100}"
outfile="${OUT:-docs/calibration.md}"
go build -o "$work/tessera" ./cmd/tessera
tessera="$work/tessera"

# setting: TR design volumes seed
settings=("0.8 block 500 101" "2.0 event 200 102")
models=("none" "ar1" "ar:2" "ar:4" "ar:8" "arma" "auto" "auto --noise-pool" "arma --noise-pool")

# share NAME DIR: the share of p < 0.05 among the rows of contrast "ordered".
share() {
  awk -F, 'NR == 1 { for (i = 1; i <= NF; i++) col[$i] = i; next }
           $col["contrast"] == "ordered" { n++; if ($col["p_value"] + 0 < 0.05) k++ }
           END { printf "%d %d\n", k, n }' "$1/contrasts.csv"
}

declare -A rate
declare -A tests
for s in "${settings[@]}"; do
  read -r tr design volumes seed <<<"$s"
  sim="$work/sim-$tr"
  rm -rf "$sim"
  "$tessera" simulate -o "$sim" --subjects "$subjects" --runs 1 --regions 40 --volumes "$volumes" --tr "$tr" \
    --design "$design" --null-share 1 --white-share 0.5 --seed "$seed" >/dev/null
  for m in "${models[@]}"; do
    out="$work/fit-$tr-${m// /}"
    rm -rf "$out"
    # shellcheck disable=SC2086 # the model may carry --noise-pool
    "$tessera" fit "$sim/study.csv" -o "$out" --noise $m --quiet >/dev/null 2>&1
    read -r k n <<<"$(share "$out")"
    rate["$tr/$m"]=$(awk -v k="$k" -v n="$n" 'BEGIN { printf "%.2f%%", 100 * k / n }')
    tests["$tr"]=$n
    echo "TR $tr $m: ${rate["$tr/$m"]} of $n" >&2
  done
done

# outside RATE% N: 1 when RATE lies outside the binomial 99% interval around 5% for N tests.
outside() { awk -v r="${1%\%}" -v n="$2" 'BEGIN { h = 2.5758 * sqrt(0.05 * 0.95 / n); print (r / 100 < 0.05 - h || r / 100 > 0.05 + h) ? 1 : 0 }'; }

half() { awk -v n="$1" 'BEGIN { h = 2.5758 * sqrt(0.05 * 0.95 / n); printf "%.1f%%-%.1f%%", 100 * (0.05 - h), 100 * (0.05 + h) }'; }

{
  echo "# Calibration of the noise models"
  echo
  echo "False-positive rate at a nominal 5% (share of two-sided p < 0.05) on simulated null"
  echo "studies: every region has no effect; its noise is an AR(1) process (coefficient drawn per"
  echo "region from 0.2-0.6) plus white noise of the same variance (\`--white-share 0.5\`), with slow"
  echo "drift and motion that leaks into the signal (both modelled: cosine drift terms with"
  echo "\`--highpass 128\`, six motion columns). One test per region and run (the condition"
  echo "\`ordered\`): $subjects subjects × 1 run × 40 regions = ${tests[0.8]} tests per setting, so that no"
  echo "single design dominates. With the true covariance the rate would be 5% within the binomial"
  echo "99% interval, $(half "${tests[0.8]}")."
  echo
  echo "| \`--noise\` | TR 0.8 s, blocks, 500 volumes | TR 2.0 s, events, 200 volumes |"
  echo "| --- | --- | --- |"
  for m in "${models[@]}"; do
    echo "| \`$m\` | ${rate["0.8/$m"]} | ${rate["2.0/$m"]} |"
  done
  echo
  for tr in 0.8 2.0; do
    out=""
    for m in "${models[@]}"; do
      if [ "$(outside "${rate["$tr/$m"]}" "${tests[$tr]}")" = 1 ]; then out="$out, \`$m\`"; fi
    done
    [ -z "$out" ] && out=", no model"
    echo "Outside the 99% interval at TR $tr s: ${out:2}."
  done
  echo
  echo "Ordinary least squares ignores the autocorrelation; \`ar1\` under-whitens where part of the noise"
  echo "is white, most at short TR; fixed AR orders of 4 and 8 estimate more coefficients than the noise"
  echo "has, and their estimation noise inflates the rate in short runs. The estimated models' rates"
  echo "include the variability of their estimated coefficients, which the t values' degrees of"
  echo "freedom (volumes - rank of the design) do not carry; the simulated noise is exactly AR(1) plus"
  echo "white, so \`arma\` is the true model family here."
  echo
  echo "Regenerate (a couple of minutes; needs only Go; the fits do not depend on \`--jobs\`, and on"
  echo "another CPU architecture only the last digits of a few p values could differ):"
  echo
  echo '```sh'
  if [ "$subjects" = 100 ] && [ "$outfile" = docs/calibration.md ]; then
    echo "bench/calibration.sh"
  else
    echo "SUBJECTS=$subjects OUT=$outfile bench/calibration.sh"
  fi
  echo '```'
  echo
  echo "It runs, for each setting (TR, design, volumes, seed = 0.8, block, 500, 101 and 2.0,"
  echo "event, 200, 102):"
  echo
  echo '```sh'
  echo "tessera simulate -o sim --subjects $subjects --runs 1 --regions 40 --volumes VOLUMES --tr TR \\"
  echo "  --design DESIGN --null-share 1 --white-share 0.5 --seed SEED"
  echo "tessera fit sim/study.csv -o fit --noise MODEL [--noise-pool]"
  echo '```'
  echo
  echo "and counts the rows of \`fit/contrasts.csv\` with contrast \`ordered\` and \`p_value\` below 0.05."
} >"$outfile"
echo "wrote $outfile" >&2
