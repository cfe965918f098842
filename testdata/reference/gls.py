"""gls_ar1.csv, gls_ar2.csv, gls_params.csv: statsmodels GLS with the exact stationary AR
covariance for fixed coefficients (e_t = a1 e_{t-1} + a2 e_{t-2} + u_t, var(u) = 1):
V = toeplitz(arma_acovf(ar=[1, -a1, -a2], ma=[1], nobs=T)); sm.GLS(y, X, sigma=V).fit()."""
import os

import numpy as np
import statsmodels.api as sm
from scipy.linalg import toeplitz
from statsmodels.tsa.arima_process import arma_acovf

from refcommon import HERE, outdir, read_csv, write_csv

MODELS = (("ar1", 0.4, 0.0), ("ar2", 0.5, -0.2))


def main():
    d = outdir()
    header, cols = read_csv(os.path.join(HERE, "gls_input.csv"))
    y = np.array(cols[0])
    X = np.column_stack(cols[1:])
    terms = header[1:]
    for name, a1, a2 in MODELS:
        ar = np.array([1.0, -a1, -a2]) if a2 != 0.0 else np.array([1.0, -a1])
        acov = arma_acovf(ar, np.array([1.0]), nobs=len(y), sigma2=1.0)
        V = toeplitz(acov)
        res = sm.GLS(y, X, sigma=V).fit()
        write_csv(os.path.join(d, "gls_%s.csv" % name), ["term", "estimate", "std_error"],
                  zip(terms, res.params, res.bse))
    write_csv(os.path.join(d, "gls_params.csv"), ["model", "a1", "a2"], MODELS)


if __name__ == "__main__":
    main()
