#!/usr/bin/env bash
# Regenerates every reference output into OUTDIR (default: this script's folder).
# Inputs are always read from this script's folder.
# Needs Debian packages: r-base-core r-cran-nlme r-cran-lmtest r-cran-metafor python3-scipy
# python3-statsmodels python3-numpy python3-pandas.
set -euo pipefail
here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
out="${1:-$here}"
mkdir -p "$out"
out="$(cd "$out" && pwd)"
PY="/usr/bin/python3 -E -s -B"  # Debian python, ignoring PYTHON* env and user site
RS=/usr/bin/Rscript
cd "$here"
$PY hrf.py "$out"
$PY dct.py "$out"
$PY inputs.py "$out"
$PY jb.py "$out"
$PY gls.py "$out"
"$RS" ols.R "$out"
"$RS" pt.R "$out"
"$RS" bh.R "$out"
# design/: VIF (car::vif), nested-model F tests (anova), Legendre polynomials (scipy)
"$RS" design/design.R "$out/design"
$PY design/legendre.py "$out/design"
# group/: t.test, lm, p.adjust, metafor::rma (REML, Knapp-Hartung), power.t.test, pt, qt
"$RS" group/group.R "$out/group"
# noise/: ar.yw, ar.mle, arima (ML), ar(aic = TRUE), nlme::gls corARMA(1,1) REML
"$RS" noise/noise.R "$out/noise"
echo "reference outputs written to $out"
