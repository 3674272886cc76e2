"""Reference values for the joint models across arms.

Data: the Veterans' Administration lung cancer trial (Kalbfleisch and Prentice, 1980), the
file tests/reference/va_lung.csv written by cox_reference.py. Terms: arm (reference
'standard') and the Karnofsky score per point. Each patient's curve is the one-sample family
with one parameter moved by the linear predictor z = x.coef:

- weibull ph:  scipy.stats.weibull_min(shape, scale=scale*exp(-z/shape))
- weibull aft: scipy.stats.weibull_min(shape, scale=scale*exp(z))
- exponential ph:  scipy.stats.expon(scale=1/(rate*exp(z)))
- exponential aft: scipy.stats.expon(scale=exp(z)/rate)
- gompertz ph: hazard rate*exp(z)*exp(shape*t), log-likelihood written out with numpy
  (SciPy's gompertz needs shape > 0; here the maximum has shape < 0)
- lognormal aft:   scipy.stats.lognorm(sigma, scale=exp(mu + z))
- loglogistic aft: scipy.stats.fisk(shape, scale=scale*exp(z))
- generalized-gamma aft: scipy.stats.gengamma in the Prentice (1974) form, mu + z

Log-likelihood: logpdf for events, logsf for censorings; maximised with scipy.optimize.minimize
(BFGS, a tight Nelder-Mead, BFGS again; the gradient norm is printed). The estimation scale is
tunnelcast's (ln of positive parameters). Writes tests/reference/joint.json; the `ph`/`aft`
entries (joint Weibull) keep their place, the other models are under `models`.

Run: python3 tests/reference/joint_reference.py   (pip install scipy numpy pandas)
"""

import json
import os

import numpy as np
import pandas as pd
from scipy import optimize, stats

HERE = os.path.dirname(os.path.abspath(__file__))
d = pd.read_csv(os.path.join(HERE, "va_lung.csv"))
t = d["time"].to_numpy(float)
e = d["event"].to_numpy(int) == 1
x = np.column_stack([(d["arm"] == "test").astype(float), d["karnofsky"].to_numpy(float)])


def censored_ll(dist):
    return np.where(e, dist.logpdf(t), dist.logsf(t)).sum()


def weibull(theta, model):
    k, scale = np.exp(theta[0]), np.exp(theta[1])
    z = x @ theta[2:]
    s = scale * np.exp(-z / k) if model == "ph" else scale * np.exp(z)
    return censored_ll(stats.weibull_min(k, scale=s))


def exponential(theta, model):
    z = x @ theta[1:]
    rate = np.exp(theta[0] + z) if model == "ph" else np.exp(theta[0] - z)
    return censored_ll(stats.expon(scale=1.0 / rate))


def gompertz(theta, model):
    # Optimised with the shape in units of 1e-3 per day (theta[0]), so that every coordinate
    # has a gradient of the same order; converted back before writing.
    assert model == "ph"
    shape, rate = theta[0] * 1e-3, np.exp(theta[1] + x @ theta[2:])
    cum = rate * np.expm1(shape * t) / shape
    return (np.where(e, np.log(rate) + shape * t, 0.0) - cum).sum()


def lognormal(theta, model):
    assert model == "aft"
    mu, sigma = theta[0] + x @ theta[2:], np.exp(theta[1])
    return censored_ll(stats.lognorm(sigma, scale=np.exp(mu)))


def loglogistic(theta, model):
    assert model == "aft"
    k, scale = np.exp(theta[0]), np.exp(theta[1] + x @ theta[2:])
    return censored_ll(stats.fisk(k, scale=scale))


def gengamma(theta, model):
    # Prentice (1974) form: with a = q^-2, T = exp(mu)*(G/a)^(sigma/q), G ~ gamma(a), which is
    # scipy.stats.gengamma(a, c=q/sigma, scale=exp(mu)*a^(-1/c)) for either sign of q.
    assert model == "aft"
    mu, sigma, q = theta[0] + x @ theta[3:], np.exp(theta[1]), theta[2]
    a = 1.0 / q**2
    c = q / sigma
    return censored_ll(stats.gengamma(a, c, scale=np.exp(mu) * a ** (-1.0 / c)))


def negll(theta, family, model):
    return -family(theta, model)


def maximise(family, model, start):
    args = (family, model)
    res = optimize.minimize(negll, start, args=args, method="BFGS", options={"gtol": 1e-9, "maxiter": 10000})
    res = optimize.minimize(negll, res.x, args=args, method="Nelder-Mead",
                            options={"xatol": 1e-11, "fatol": 1e-13, "maxiter": 40000, "maxfev": 40000})
    res = optimize.minimize(negll, res.x, args=args, method="BFGS", options={"gtol": 1e-10})
    grad = optimize.approx_fprime(res.x, negll, 1e-7, *args)
    print(family.__name__, model, res.x, -res.fun, "gradient", grad)
    return {"theta": res.x.tolist(), "loglik": float(-res.fun)}


mean_time = np.log(t.sum() / e.sum())
out = {
    "source": "Veterans' Administration lung cancer trial (Kalbfleisch and Prentice 1980); "
    "scipy.stats log-likelihoods (weibull_min, expon, lognorm, fisk, gengamma; Gompertz written out) "
    "maximised by scipy.optimize.minimize",
    "names": ["ln_shape", "ln_scale", "arm_test", "b_karnofsky"],
    "fits": {},
    "models": [],
}
for model in ["ph", "aft"]:
    out["fits"][model] = maximise(weibull, model, np.array([0.0, mean_time, 0.0, 0.0]))
cases = [
    ("exponential", "ph", exponential, ["ln_rate"], [-mean_time]),
    ("exponential", "aft", exponential, ["ln_rate"], [-mean_time]),
    ("gompertz", "ph", gompertz, ["shape", "ln_rate"], [-0.1, -mean_time]),
    ("lognormal", "aft", lognormal, ["mu", "ln_sigma"], [mean_time, 0.0]),
    ("loglogistic", "aft", loglogistic, ["ln_shape", "ln_scale"], [0.0, mean_time]),
    ("generalized-gamma", "aft", gengamma, ["mu", "ln_sigma", "q"], [1.86, 0.11, -0.3]),
]
for name, model, family, base, start in cases:
    fit = maximise(family, model, np.array(start + [-0.12, 0.04]))
    if name == "gompertz":
        fit["theta"][0] *= 1e-3
    fit.update({"family": name, "model": model, "names": base + ["arm_test", "b_karnofsky"]})
    out["models"].append(fit)
with open(os.path.join(HERE, "joint.json"), "w") as f:
    json.dump(out, f, indent=1)
    f.write("\n")
