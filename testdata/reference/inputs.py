"""Writes the regression inputs ols_input.csv and gls_input.csv.

Design (T = 150 volumes, TR = 2 s), columns x_intercept, x_trend, x_a, x_b:
  x_intercept  1
  x_trend      linear trend centred and scaled to [-1, 1]: 2n/(T-1) - 1
  x_a, x_b     boxcars of the trial types "pumps_demean" (x_a) and "control_pumps_demean" (x_b)
               of the copied BIDS events file, on a 0.1 s grid (sample i at i*0.1 s is on when
               onset <= i*0.1 < onset + duration), convolved with the double-gamma of hrf.py
               sampled at 0.1 s on 0..32 s (discrete convolution times 0.1 s), sampled at
               (n + 0.5)*TR, then divided by their maximum (peak 1).
Responses: y = 100 + 2*x_a + 0.5*x_b + e, innovations numpy.random.default_rng(seed).standard_normal
with 200 burn-in samples dropped:
  ols_input.csv  seed 20261101, AR(1)  e_t = 0.4 e_{t-1} + u_t
  gls_input.csv  seed 20261102, AR(2)  e_t = 0.5 e_{t-1} - 0.2 e_{t-2} + u_t
"""
import csv
import os

import numpy as np

from hrf import double_gamma, grid
from refcommon import HERE, outdir, write_csv

EVENTS = "sub-01_task-balloonanalogrisktask_run-01_events.tsv"
T = 150
TR = 2.0
DT = 0.1
STEPS_PER_TR = 20  # TR / DT
BURN = 200


def events():
    out = {}
    with open(os.path.join(HERE, EVENTS)) as f:
        for r in csv.DictReader(f, delimiter="\t"):
            out.setdefault(r["trial_type"], []).append((float(r["onset"]), float(r["duration"])))
    return out


def regressor(evs):
    nfine = T * STEPS_PER_TR
    tf = np.arange(nfine, dtype=np.int64) / 10.0
    box = np.zeros(nfine)
    for onset, dur in evs:
        box[(tf >= onset) & (tf < onset + dur)] = 1.0
    _, _, h = double_gamma(grid())
    conv = np.convolve(box, h)[:nfine] * DT
    x = conv[np.arange(T) * STEPS_PER_TR + STEPS_PER_TR // 2]
    return x / x.max()


def design():
    ev = events()
    n = np.arange(T, dtype=float)
    return {
        "x_intercept": np.ones(T),
        "x_trend": 2.0 * n / (T - 1) - 1.0,
        "x_a": regressor(ev["pumps_demean"]),
        "x_b": regressor(ev["control_pumps_demean"]),
    }


def ar_noise(seed, coefs):
    u = np.random.default_rng(seed).standard_normal(BURN + T)
    e = np.zeros(BURN + T)
    for i in range(BURN + T):
        v = u[i]
        for j, a in enumerate(coefs, start=1):
            if i - j >= 0:
                v += a * e[i - j]
        e[i] = v
    return e[BURN:]


def write(path, x, seed, coefs):
    y = 100.0 + 2.0 * x["x_a"] + 0.5 * x["x_b"] + ar_noise(seed, coefs)
    names = ["x_intercept", "x_trend", "x_a", "x_b"]
    write_csv(path, ["y"] + names, zip(y, *(x[k] for k in names)))


def main():
    d = outdir()
    x = design()
    write(os.path.join(d, "ols_input.csv"), x, 20261101, [0.4])
    write(os.path.join(d, "gls_input.csv"), x, 20261102, [0.5, -0.2])


if __name__ == "__main__":
    main()
