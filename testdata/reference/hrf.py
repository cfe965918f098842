"""hrf.csv: gamma densities (shape 6 and 16, scale 1) and the double-gamma
difference gamma6 - gamma16/6, on t = 0, 0.1, ..., 32.0, via scipy.stats.gamma.pdf."""
import os

import numpy as np
from scipy.stats import gamma

from refcommon import outdir, write_csv


def grid():
    # i/10 is the correctly rounded double nearest to the decimal i*0.1
    return np.arange(321, dtype=np.int64) / 10.0


def double_gamma(t):
    g6 = gamma.pdf(t, a=6, scale=1)
    g16 = gamma.pdf(t, a=16, scale=1)
    return g6, g16, g6 - g16 / 6.0


def main():
    t = grid()
    g6, g16, dg = double_gamma(t)
    write_csv(os.path.join(outdir(), "hrf.csv"), ["t", "gamma6", "gamma16", "double_gamma"],
              zip(t, g6, g16, dg))


if __name__ == "__main__":
    main()
