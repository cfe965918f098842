#!/usr/bin/env python3
"""compare.py A B: compare every CSV in folder A (subfolders included) with the file of the same
relative path in folder B.

Same header, same number of rows and cells; cells that parse as numbers in both files must agree
to 1e-9 relative or 1e-12 absolute, other cells must be equal as text. A CSV present in only one
of the folders is a difference. Prints every difference; exit 0 if none, 1 otherwise, 2 on usage.
Python standard library only.
"""
import csv
import math
import os
import sys

REL = 1e-9
ABS = 1e-12
MAX_PRINT = 20  # per file


def as_float(s):
    try:
        return float(s)
    except ValueError:
        return None


def close(a, b):
    if math.isnan(a) or math.isnan(b):
        return math.isnan(a) and math.isnan(b)
    if math.isinf(a) or math.isinf(b):
        return a == b
    d = abs(a - b)
    return d <= ABS or d <= REL * max(abs(a), abs(b))


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
    if len(ra) != len(rb):
        diffs.append("%s: %d data rows vs %d" % (name, len(ra) - 1, len(rb) - 1))
    for i, (x, y) in enumerate(zip(ra[1:], rb[1:]), start=1):
        if len(x) != len(y) or len(x) != len(head):
            diffs.append("%s row %d: %d vs %d cells (header has %d)" % (name, i, len(x), len(y), len(head)))
            continue
        for col, u, v in zip(head, x, y):
            fu, fv = as_float(u), as_float(v)
            if fu is not None and fv is not None:
                ok = close(fu, fv)
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
