"""Reference values for the flexible families (generalized gamma, splines, cure, piecewise).

Regenerate with Python 3.11:  pip install scipy numpy mpmath statsmodels
                              python3 tests/reference/make_flexible_reference.py
Writes, beside this script:
  heart_transplant.csv      the Stanford heart transplant survival data (Miller, 1976) as
                            carried by the statsmodels package (statsmodels.datasets.heart):
                            time in days, event 1 = death, 0 = censored.
  flexible_reference.json   values computed here independently of tunnelcast:
    generalized_gamma_points  ln S and ln f of the generalized gamma at many points, from mpmath's
                     regularised incomplete gamma at 50 significant digits (Prentice, 1974
                     parameterisation; Cox et al., 2007, eq. 1).
    fits             censored maximum-likelihood fits on the heart data by scipy.optimize on
                     the full log-likelihood (sum of ln f over deaths plus ln S over censored);
                     the generalized gamma uses scipy.stats.gengamma's logpdf/logsf.
CI does not run this script; the Rust tests read the committed JSON.
"""

import json
import os
import warnings

import mpmath as mp
import numpy as np
import statsmodels.api as sm
from scipy import optimize, special, stats

warnings.simplefilter("ignore")  # overflow in trial points far from the optimum is expected
np.seterr(all="ignore")
HERE = os.path.dirname(os.path.abspath(__file__))
mp.mp.dps = 50


def heart():
    df = sm.datasets.heart.load_pandas().data
    t = df["survival"].to_numpy(dtype=float)
    d = df["censors"].to_numpy(dtype=float)
    with open(os.path.join(HERE, "heart_transplant.csv"), "w") as f:
        f.write("time,event\n")
        for ti, di in zip(t, d):
            f.write(f"{ti:g},{int(di)}\n")
    return t, d


def generalized_gamma_point(mu, sigma, q, t):
    """ln S, ln f of the Prentice generalized gamma by mpmath (arbitrary precision)."""
    mu, sigma, q, t = (mp.mpf(x) for x in (mu, sigma, q, t))
    w = (mp.log(t) - mu) / sigma
    if q == 0:
        s = mp.ncdf(-w)
        f = mp.npdf(w) / (sigma * t)
    else:
        a = 1 / q**2
        u = a * mp.exp(q * w)
        if q > 0:
            s = mp.gammainc(a, u, mp.inf, regularized=True)
        else:
            s = mp.gammainc(a, 0, u, regularized=True)
        logf = (mp.log(abs(q)) + a * mp.log(a) - mp.log(sigma * t) - mp.loggamma(a)
                + a * (q * w - mp.exp(q * w)))
        f = mp.exp(logf)
    return float(mp.log(s)), float(mp.log(f))


def generalized_gamma_points():
    out = []
    for mu, sigma, q in [(2.0, 0.7, 0.5), (1.0, 1.3, -0.8), (3.0, 0.4, 2.5),
                         (0.5, 0.9, 0.003), (0.5, 0.9, -0.006), (4.0, 0.6, 0.02),
                         (2.0, 0.5, -3.0), (1.5, 1.1, 0.0), (-1.0, 0.3, 8.0)]:
        for z in [-8.0, -4.0, -1.5, -0.2, 0.0, 0.6, 1.7, 3.0, 6.0, 10.0]:
            t = float(mp.exp(mu + sigma * z))
            ls, lf = generalized_gamma_point(mu, sigma, q, t)
            out.append({"mu": mu, "sigma": sigma, "q": q, "t": t,
                        "log_survival": ls, "log_density": lf})
    return out


def fit(negll, start):
    """Minimises a negative log-likelihood from `start` (Nelder–Mead, then BFGS polish)."""
    r = optimize.minimize(negll, start, method="Nelder-Mead",
                          options={"xatol": 1e-10, "fatol": 1e-12, "maxiter": 40000, "maxfev": 40000})
    r = optimize.minimize(negll, r.x, method="BFGS", options={"gtol": 1e-9})
    return r.x, -r.fun


def loglik(logf, logs, t, d):
    return float(np.sum(np.where(d == 1, logf(t), 0.0)) + np.sum(np.where(d == 0, logs(t), 0.0)))


def generalized_gamma_fit(t, d):
    def parts(theta):
        mu, ln_sigma, q = theta
        sigma = np.exp(ln_sigma)
        # scipy.stats.gengamma(a, c, scale): pdf |c| x^(ca-1) e^(-x^c) / Γ(a) for x = t/scale;
        # Prentice's (mu, sigma, q) maps to a = q^-2, c = q/sigma, scale = e^mu · (q^2)^(sigma/q).
        a = 1.0 / q**2
        c = q / sigma
        scale = np.exp(mu + (sigma / q) * np.log(q**2))
        dist = stats.gengamma(a, c, scale=scale)
        return dist.logpdf, dist.logsf

    def negll(theta):
        if abs(theta[2]) < 1e-6:
            return 1e10
        lf, ls = parts(theta)
        v = loglik(lf, ls, t, d)
        return -v if np.isfinite(v) else 1e10

    best = None
    for q0 in [1.0, 0.5, -0.5, 1.5]:
        x, ll = fit(negll, [np.log(np.median(t)), 0.5, q0])
        if best is None or ll > best[1]:
            best = (x, ll)
    x, ll = best
    return {"family": "generalized-gamma", "params": {"mu": x[0], "sigma": float(np.exp(x[1])), "q": x[2]},
            "loglik": ll}


def cure_fit(t, d, name, base):
    """Mixture cure S = pi + (1 - pi) S_u with S_u from scipy.stats (Boag, 1949; Farewell, 1982)."""
    def dist(theta):
        a, b = theta[0], theta[1]
        if base == "weibull":  # shape = e^a, scale = e^b
            return stats.weibull_min(np.exp(a), scale=np.exp(b)), {"shape": np.exp(a), "scale": np.exp(b)}
        if base == "lognormal":  # mu = a, sigma = e^b
            return stats.lognorm(np.exp(b), scale=np.exp(a)), {"mu": a, "sigma": np.exp(b)}
        # log-logistic: scipy's fisk(c = shape, scale)
        return stats.fisk(np.exp(a), scale=np.exp(b)), {"shape": np.exp(a), "scale": np.exp(b)}

    def negll(theta):
        dd, _ = dist(theta)
        pi = special.expit(theta[2])
        lf = lambda x: np.log1p(-pi) + dd.logpdf(x)
        ls = lambda x: np.logaddexp(np.log(pi), np.log1p(-pi) + dd.logsf(x))
        v = loglik(lf, ls, t, d)
        return -v if np.isfinite(v) else 1e10

    best = None
    starts = {"weibull": [0.0, np.log(np.median(t))], "lognormal": [np.log(np.median(t)), 0.5],
              "loglogistic": [0.0, np.log(np.median(t))]}[base]
    for c0 in [-2.0, -1.0, 0.0]:
        x, ll = fit(negll, starts + [c0])
        if best is None or ll > best[1]:
            best = (x, ll)
    x, ll = best
    _, params = dist(x)
    params = {k: float(v) for k, v in params.items()}
    params["cure"] = float(special.expit(x[2]))
    return {"family": name, "params": params, "loglik": ll}


def main():
    t, d = heart()
    ref = {
        "source": "tests/reference/make_flexible_reference.py (mpmath, scipy.optimize, scipy.stats)",
        "data": "tests/reference/heart_transplant.csv (Miller, 1976; statsmodels.datasets.heart)",
        "generalized_gamma_points": generalized_gamma_points(),
        "fits": [generalized_gamma_fit(t, d),
                 cure_fit(t, d, "cure-weibull", "weibull"),
                 cure_fit(t, d, "cure-lognormal", "lognormal"),
                 cure_fit(t, d, "cure-loglogistic", "loglogistic")],
    }
    with open(os.path.join(HERE, "flexible_reference.json"), "w") as f:
        json.dump(ref, f, indent=1)
        f.write("\n")
    for r in ref["fits"]:
        print(r)


if __name__ == "__main__":
    main()
