"""jb.csv: Jarque-Bera test (statsmodels.stats.stattools.jarque_bera) on the residuals of
statsmodels OLS of y on x_intercept, x_trend, x_a, x_b from ols_input.csv."""
import os

import numpy as np
import statsmodels.api as sm
from statsmodels.stats.stattools import jarque_bera

from refcommon import HERE, outdir, read_csv, write_csv


def main():
    header, cols = read_csv(os.path.join(HERE, "ols_input.csv"))
    y = np.array(cols[0])
    X = np.column_stack(cols[1:])
    res = sm.OLS(y, X).fit()
    stat, p, _skew, _kurt = jarque_bera(res.resid)
    write_csv(os.path.join(outdir(), "jb.csv"), ["statistic", "p_value"], [(stat, p)])


if __name__ == "__main__":
    main()
