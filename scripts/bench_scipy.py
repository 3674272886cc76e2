#!/usr/bin/env python3
"""SciPy side of the fitting benchmark (benches/fit_million.rs runs it on the same file).

Requirements: Python 3.11, `pip install scipy numpy`. Usage:
    python3 scripts/bench_scipy.py DATA.csv [--families exponential,weibull,...]

Reads the `time,event` CSV with numpy, then fits each family with SciPy's own censored
maximum-likelihood fit, `dist.fit(scipy.stats.CensoredData(...), floc=0)` with its default
optimiser: expon (exponential), weibull_min (Weibull), lognorm (log-normal), fisk
(log-logistic), gompertz (Gompertz, positive shape only). Prints one JSON object: read time,
and per family the wall time, the parameters in tunnelcast's parameterisation and the full
censored log-likelihood (sum of logpdf over events plus logsf over censorings).
"""

import argparse
import json
import time

import numpy as np
import scipy
from scipy import stats


def loglik(dist, args, t, e):
    return float(np.sum(dist.logpdf(t[e == 1], *args)) + np.sum(dist.logsf(t[e == 0], *args)))


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("data")
    ap.add_argument("--families", default="exponential,weibull,lognormal,loglogistic,gompertz")
    args = ap.parse_args()
    start = time.perf_counter()
    raw = np.loadtxt(args.data, delimiter=",", skiprows=1)
    t, e = raw[:, 0], raw[:, 1].astype(int)
    data = stats.CensoredData(uncensored=t[e == 1], right=t[e == 0])
    out = {"scipy": scipy.__version__, "numpy": np.__version__,
           "read_seconds": time.perf_counter() - start, "fits": {}}
    for family in args.families.split(","):
        start = time.perf_counter()
        if family == "exponential":
            _, scale = stats.expon.fit(data, floc=0)
            params, ll = {"rate": 1 / scale}, loglik(stats.expon, (0, scale), t, e)
        elif family == "weibull":
            c, _, scale = stats.weibull_min.fit(data, floc=0)
            params, ll = {"shape": c, "scale": scale}, loglik(stats.weibull_min, (c, 0, scale), t, e)
        elif family == "lognormal":
            s, _, scale = stats.lognorm.fit(data, floc=0)
            params, ll = {"mu": np.log(scale), "sigma": s}, loglik(stats.lognorm, (s, 0, scale), t, e)
        elif family == "loglogistic":
            c, _, scale = stats.fisk.fit(data, floc=0)
            params, ll = {"shape": c, "scale": scale}, loglik(stats.fisk, (c, 0, scale), t, e)
        elif family == "gompertz":
            # scipy's gompertz: S = exp(-c (e^(t/scale) - 1)), so shape = 1/scale, rate = c/scale.
            c, _, scale = stats.gompertz.fit(data, floc=0)
            params, ll = {"shape": 1 / scale, "rate": c / scale}, loglik(stats.gompertz, (c, 0, scale), t, e)
        else:
            raise SystemExit(f"unknown family {family}")
        seconds = time.perf_counter() - start
        out["fits"][family] = {"seconds": seconds, "loglik": ll,
                               "params": {k: float(v) for k, v in params.items()}}
    print(json.dumps(out))


if __name__ == "__main__":
    main()
