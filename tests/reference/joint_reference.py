"""Reference values for the joint Weibull models across arms.

Data: the Veterans' Administration lung cancer trial (Kalbfleisch and Prentice, 1980), the
file tests/reference/va_lung.csv written by cox_reference.py. Terms: arm (reference
'standard') and the Karnofsky score per point. Maximum likelihood with SciPy: the
log-likelihood from scipy.stats.weibull_min (logpdf for events, logsf for censorings), with
each patient's Weibull scale scale*exp(-x.beta/shape) (proportional hazards) or
scale*exp(x.gamma) (accelerated failure time); maximised with scipy.optimize.minimize (BFGS,
then Nelder-Mead polish is not needed: the gradient norm is printed).
Writes tests/reference/joint.json.

Run: python3 tests/reference/joint_reference.py
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


def negll(theta, model):
    k, scale = np.exp(theta[0]), np.exp(theta[1])
    z = x @ theta[2:]
    s = scale * np.exp(-z / k) if model == "ph" else scale * np.exp(z)
    ll = np.where(e, stats.weibull_min.logpdf(t, k, scale=s), stats.weibull_min.logsf(t, k, scale=s))
    return -ll.sum()


out = {
    "source": "Veterans' Administration lung cancer trial (Kalbfleisch and Prentice 1980); "
    "scipy.stats.weibull_min log-likelihood maximised by scipy.optimize.minimize",
    "names": ["ln_shape", "ln_scale", "arm_test", "b_karnofsky"],
    "fits": {},
}
for model in ["ph", "aft"]:
    start = np.array([0.0, np.log(t.sum() / e.sum()), 0.0, 0.0])
    res = optimize.minimize(negll, start, args=(model,), method="BFGS", options={"gtol": 1e-9, "maxiter": 10000})
    res = optimize.minimize(negll, res.x, args=(model,), method="Nelder-Mead",
                            options={"xatol": 1e-11, "fatol": 1e-13, "maxiter": 40000, "maxfev": 40000})
    res = optimize.minimize(negll, res.x, args=(model,), method="BFGS", options={"gtol": 1e-10})
    grad = optimize.approx_fprime(res.x, negll, 1e-7, model)
    print(model, res.x, -res.fun, "gradient", grad)
    out["fits"][model] = {"theta": res.x.tolist(), "loglik": float(-res.fun)}
with open(os.path.join(HERE, "joint.json"), "w") as f:
    json.dump(out, f, indent=1)
    f.write("\n")
