"""Shared helpers for the reference scripts (Debian python3 + numpy/scipy)."""
import os
import sys

HERE = os.path.dirname(os.path.abspath(__file__))


def outdir():
    """Output folder: first command-line argument, else this script's folder."""
    d = sys.argv[1] if len(sys.argv) > 1 else HERE
    os.makedirs(d, exist_ok=True)
    return d


def fmt(x):
    """Full-precision text for a number (repr of a Python float or int)."""
    if isinstance(x, str):
        return x
    if isinstance(x, int):
        return str(x)
    return repr(float(x))


def write_csv(path, header, rows):
    with open(path, "w", newline="") as f:
        f.write(",".join(header) + "\n")
        for r in rows:
            f.write(",".join(fmt(v) for v in r) + "\n")


def read_csv(path):
    """Return (header, list of float columns) of a numeric CSV."""
    with open(path) as f:
        header = f.readline().strip().split(",")
        cols = [[] for _ in header]
        for line in f:
            line = line.strip()
            if not line:
                continue
            for c, v in zip(cols, line.split(",")):
                c.append(float(v))
    return header, cols
