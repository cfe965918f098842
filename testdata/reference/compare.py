#!/usr/bin/env python3
"""compare.py A B: compare every CSV in folder A (subfolders included) with the file of the same
relative path in folder B.

Same header, same number of rows and cells; cells that parse as numbers in both files must agree
to 1e-9 relative or 1e-12 absolute, other cells must be equal as text. A CSV present in only one
of the folders is a difference. Prints every difference; exit 0 if none, 1 otherwise, 2 on usage.
Python standard library only.

The files in OPTIMISED hold where an iterative optimiser stopped (R's arima0 under ar.mle, arima
with method "ML", nlme's REML search). Their last digits follow the machine: glibc picks its
exp/log code by processor (with or without fused multiply-add), and the optimiser's path and its
stopping point move with them. Measured between two machines with the same Debian packages: up to
3e-7 absolute (the REML theta) and 2.3e-5 relative (on a coefficient of 8e-4), while every re-run
on one machine agrees to the last digit. They are compared at 1e-5 relative or 1e-5 absolute, still
ten to a hundred times tighter than the tolerances the Go tests apply to them (parameters 1e-3 or
1e-4, REML estimates and standard errors 1e-4 relative; fit/noise_reference_test.go).
"""
import csv
import math
import os
import sys

REL = 1e-9
ABS = 1e-12
OPTIMISED = {
    os.path.join("noise", "ar_mle.csv"),
    os.path.join("noise", "ar_ml_exact.csv"),
    os.path.join("noise", "arma_reml.csv"),
    os.path.join("noise", "arma_reml_coef.csv"),
}
REL_OPT = 1e-5
ABS_OPT = 1e-5
MAX_PRINT = 20  # per file


def as_float(s):
    try:
        return float(s)
    except ValueError:
        return None


def close(a, b, rel=REL, abs_=ABS):
    if math.isnan(a) or math.isnan(b):
        return math.isnan(a) and math.isnan(b)
    if math.isinf(a) or math.isinf(b):
        return a == b
    d = abs(a - b)
    return d <= abs_ or d <= rel * max(abs(a), abs(b))


def read(path):
    with open(path, newline="") as f:
        return list(csv.reader(f))


def compare_file(name, pa, pb):
    diffs = []
    ra, rb = read(pa), read(pb)
    if not ra or not rb:
        return [] if ra == rb else ["%s: one file is empty" % name]
    if ra[0] != rb[0]:
        return ["%s: header differs: %s vs %s" % (name, ",".join(ra[0]), ",".join(rb[0]))]
    head = ra[0]
    tol = (REL_OPT, ABS_OPT) if name in OPTIMISED else (REL, ABS)
    if len(ra) != len(rb):
        diffs.append("%s: %d data rows vs %d" % (name, len(ra) - 1, len(rb) - 1))
    for i, (x, y) in enumerate(zip(ra[1:], rb[1:]), start=1):
        if len(x) != len(y) or len(x) != len(head):
            diffs.append("%s row %d: %d vs %d cells (header has %d)" % (name, i, len(x), len(y), len(head)))
            continue
        for col, u, v in zip(head, x, y):
            fu, fv = as_float(u), as_float(v)
            if fu is not None and fv is not None:
                ok = close(fu, fv, *tol)
            else:
                ok = u == v
            if not ok:
                diffs.append("%s row %d col %s: %s vs %s" % (name, i, col, u, v))
    return diffs


def csvs(folder):
    """Every CSV under folder, subfolders included, as paths relative to it."""
    out = set()
    for root, _, files in os.walk(folder):
        for f in files:
            if f.endswith(".csv"):
                out.add(os.path.relpath(os.path.join(root, f), folder))
    return out


def main(argv):
    if len(argv) != 3:
        sys.stderr.write("usage: compare.py FOLDER_A FOLDER_B\n")
        return 2
    a, b = argv[1], argv[2]
    fa, fb = csvs(a), csvs(b)
    bad = 0
    for name in sorted(fa | fb):
        if name not in fb:
            print("%s: missing in %s" % (name, b))
            bad += 1
            continue
        if name not in fa:
            print("%s: missing in %s" % (name, a))
            bad += 1
            continue
        diffs = compare_file(name, os.path.join(a, name), os.path.join(b, name))
        for line in diffs[:MAX_PRINT]:
            print(line)
        if len(diffs) > MAX_PRINT:
            print("%s: ... %d more differences" % (name, len(diffs) - MAX_PRINT))
        bad += len(diffs)
    if bad:
        print("%d difference(s) in %d file(s) compared" % (bad, len(fa | fb)))
        return 1
    print("all %d CSV files agree" % len(fa))
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
