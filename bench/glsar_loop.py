#!/usr/bin/env python3
"""The usual hand-written alternative to Tessera, for the throughput benchmark:
a per-region loop with statsmodels (Debian's python3-statsmodels), AR(1) by
GLSAR(rho=1).iterative_fit, on exactly the designs Tessera built (read from
its design/ tables) and the study's signals. Prints the seconds it took.

Usage: glsar_loop.py STUDY_DIR TESSERA_RESULTS_DIR"""
import csv
import os
import sys
import time

import numpy as np
import statsmodels.api as sm

start = time.time()
study, results = sys.argv[1], sys.argv[2]
fits = 0
with open(os.path.join(study, "study.csv")) as f:
    runs = list(csv.DictReader(f))
for r in runs:
    key = "%s_%s" % (r["subject"], r["run"])
    X = np.loadtxt(os.path.join(results, "design", key + ".csv"), delimiter=",", skiprows=1)
    Y = np.loadtxt(os.path.join(study, r["signals"]), delimiter=",", skiprows=1)
    for j in range(Y.shape[1]):
        res = sm.GLSAR(Y[:, j], X, rho=1).iterative_fit()
        _ = res.params, res.bse, res.tvalues, res.pvalues
        fits += 1
print("%.3f seconds, %d region fits" % (time.time() - start, fits))
