"""dct.csv: orthonormal DCT-II basis vectors from scipy.fft.dct(np.eye(n), norm="ortho", axis=0).
Row k of that matrix is basis vector k; its entry t is value(n, k, t)."""
import os

import numpy as np
from scipy.fft import dct

from refcommon import outdir, write_csv

SIZES = (37, 120)
K = 10


def main():
    rows = []
    for n in SIZES:
        m = dct(np.eye(n), type=2, norm="ortho", axis=0)  # m[k, t]
        for k in range(K):
            for t in range(n):
                rows.append((n, k, t, m[k, t]))
    write_csv(os.path.join(outdir(), "dct.csv"), ["n", "k", "t", "value"], rows)


if __name__ == "__main__":
    main()
