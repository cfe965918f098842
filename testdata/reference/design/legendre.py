"""legendre.csv: Legendre polynomials P_1..P_4 at x_t = 2t/(n-1) - 1, n = 25,
from scipy.special.eval_legendre (python3-scipy).
Usage: python3 legendre.py [OUTDIR]"""
import csv
import os
import sys

from scipy.special import eval_legendre

out = sys.argv[1] if len(sys.argv) > 1 else os.path.dirname(os.path.abspath(__file__))
os.makedirs(out, exist_ok=True)
n = 25
with open(os.path.join(out, "legendre.csv"), "w", newline="") as f:
    w = csv.writer(f)
    w.writerow(["n", "k", "t", "value"])
    for k in range(1, 5):
        for t in range(n):
            x = 2 * t / (n - 1) - 1
            w.writerow([n, k, t, repr(float(eval_legendre(k, x)))])
