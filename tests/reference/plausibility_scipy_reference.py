#!/usr/bin/env python3
"""Independent values for the plausibility checks, by SciPy (tests/plausibility_reference.rs).

Written from the command-line contract (interface.md, "Parametric families", "Plausibility of
the extrapolation", "Background life table"), without tunnelcast's code:

1. Survival at landmarks and restricted means int_0^tau S(t) dt for fixed parameter sets of
   every standard family, S(t) as the contract's table writes it, integrated by
   scipy.integrate.quad (QUADPACK; epsabs 1e-13, epsrel 1e-12, well inside the 1e-10 asked),
   split at 1, 10 and 100 time units so the adaptive rule sees the early curvature. Weibull
   also by its closed form scale*Gamma(1+1/k)*P(1/k, (tau/scale)^k) with scipy.special.gammainc
   (substitute u = (t/scale)^k in the integral; P the regularised lower incomplete gamma).
   Generalized gamma (Prentice 1974; Cox, Chu, Schneider and Munoz 2007): w = (ln t - mu)/sigma,
   a = q^-2, u = a*exp(q*w); S = Q(a, u) for q > 0, P(a, u) for q < 0 (scipy.special.gammaincc,
   gammainc), cross-checked against scipy.stats.gengamma(a, c = q/sigma,
   scale = exp(mu)*(q^2)^(sigma/q)).

2. The population comparison with a small invented life table (ages 60-72, one column qx):
   hazard -ln(1 - qx) constant within each year of age (the contract's rule), the last age's
   hazard held beyond the table; population survival from a start age of 62.5 by summing the
   piecewise-constant hazard; and the first time, from the end of follow-up on, at which a
   fit's hazard (the contract's formulas: Weibull (k/s)(t/s)^(k-1), Gompertz rate*e^(shape*t),
   log-logistic (k/s)(t/s)^(k-1)/(1+(t/s)^k)) is below the population's, found year of age by
   year of age with scipy.optimize.brentq (xtol 1e-14) after a scan on a 0.001-year grid.

Run from the repository root:  python3 tests/reference/plausibility_scipy_reference.py
writes tests/reference/plausibility_scipy_reference.json. CI does not run it; the JSON is
committed. Needs: pip install scipy numpy.
"""

import json
import math
import pathlib

import numpy as np
import scipy
from scipy import integrate, optimize, special, stats

LANDMARKS = [0.5, 1.0, 2.0, 5.0, 10.0, 20.0, 40.0]
HORIZONS = [3.0, 12.0, 60.0, 240.0]

# Invented parameter sets (time in an arbitrary unit; the library is unit-free here).
CASES = [
    ("exponential", {"rate": 0.07}),
    ("weibull", {"shape": 1.35, "scale": 14.0}),
    ("weibull", {"shape": 0.62, "scale": 30.0}),
    ("gompertz", {"shape": 0.045, "rate": 0.03}),
    ("gompertz", {"shape": -0.08, "rate": 0.09}),
    ("lognormal", {"mu": 2.6, "sigma": 1.1}),
    ("loglogistic", {"shape": 1.8, "scale": 11.0}),
    ("generalized-gamma", {"mu": 2.4, "sigma": 0.9, "q": 0.6}),
    ("generalized-gamma", {"mu": 2.8, "sigma": 0.7, "q": -0.4}),
]


def survival(family, p):
    if family == "exponential":
        return lambda t: math.exp(-p["rate"] * t)
    if family == "weibull":
        return lambda t: math.exp(-((t / p["scale"]) ** p["shape"]))
    if family == "gompertz":
        return lambda t: math.exp(-(p["rate"] / p["shape"]) * math.expm1(p["shape"] * t))
    if family == "lognormal":
        return lambda t: 1.0 if t <= 0 else float(stats.norm.sf((math.log(t) - p["mu"]) / p["sigma"]))
    if family == "loglogistic":
        return lambda t: 1.0 / (1.0 + (t / p["scale"]) ** p["shape"])
    if family == "generalized-gamma":
        mu, sigma, q = p["mu"], p["sigma"], p["q"]
        a = q ** -2

        def s(t):
            if t <= 0:
                return 1.0
            w = (math.log(t) - mu) / sigma
            u = a * math.exp(q * w)
            return float(special.gammaincc(a, u) if q > 0 else special.gammainc(a, u))

        # Cross-check against SciPy's own distribution.
        d = stats.gengamma(a, q / sigma, scale=math.exp(mu) * (q * q) ** (sigma / q))
        for t in [0.3, 4.0, 17.0, 90.0]:
            assert abs(d.sf(t) - s(t)) < 1e-12, (t, d.sf(t), s(t))
        return s
    raise ValueError(family)


def restricted_mean(s, tau):
    total = 0.0
    edges = [0.0] + [e for e in (1.0, 10.0, 100.0) if e < tau] + [tau]
    for a, b in zip(edges, edges[1:]):
        value, err = integrate.quad(s, a, b, epsabs=1e-13, epsrel=1e-12, limit=500)
        assert err < 1e-10, (a, b, err)
        total += value
    return total


def weibull_closed_form(p, tau):
    k, scale = p["shape"], p["scale"]
    return scale * special.gamma(1.0 + 1.0 / k) * special.gammainc(1.0 / k, (tau / scale) ** k)


cases = []
for family, p in CASES:
    s = survival(family, p)
    case = {
        "family": family,
        "params": p,
        "landmarks": [[t, s(t)] for t in LANDMARKS],
        "restricted_means": [[tau, restricted_mean(s, tau)] for tau in HORIZONS],
    }
    if family == "weibull":
        case["weibull_closed_form"] = [[tau, weibull_closed_form(p, tau)] for tau in HORIZONS]
        for (tau, quad), (_, closed) in zip(case["restricted_means"], case["weibull_closed_form"]):
            assert abs(quad - closed) < 1e-9 * max(1.0, closed), (tau, quad, closed)
    cases.append(case)

# Population comparison: an invented life table (ages 60 to 72), column qx.
TABLE_AGES = list(range(60, 73))
TABLE_QX = [0.008, 0.0088, 0.0097, 0.0107, 0.0118, 0.013, 0.0144, 0.016, 0.0178, 0.0198, 0.022,
            0.0245, 0.0273]
START_AGE = 62.5
table_csv = "age,qx\n" + "".join(f"{a},{q}\n" for a, q in zip(TABLE_AGES, TABLE_QX))
rates = [-math.log1p(-q) for q in TABLE_QX]


def pop_hazard_at_age(age):
    i = int(math.floor(age)) - TABLE_AGES[0]
    return rates[min(max(i, 0), len(rates) - 1)]


def pop_survival(years):
    """exp(-cumulative hazard) from START_AGE over `years`, year of age by year of age."""
    total, age, end = 0.0, START_AGE, START_AGE + years
    while age < end:
        nxt = min(math.floor(age) + 1.0, end)
        total += pop_hazard_at_age(age) * (nxt - age)
        age = nxt
    return math.exp(-total)


def crossing(hazard, start, horizon):
    """First t in [start, horizon] (years since entry) with hazard(t) < population hazard."""
    edges = [start]
    birthday = math.floor(START_AGE + start) + 1.0
    while birthday - START_AGE < horizon:
        edges.append(birthday - START_AGE)
        birthday += 1.0
    edges.append(horizon)
    for a, b in zip(edges, edges[1:]):
        c = pop_hazard_at_age(START_AGE + 0.5 * (a + b))
        if hazard(a) < c:
            return a
        grid = np.linspace(a, b, max(2, int(math.ceil((b - a) / 0.001)) + 1))
        lo = a
        for t in grid[1:]:
            t = min(t, b - (b - a) * 1e-12)
            if hazard(t) < c:
                return optimize.brentq(lambda x: hazard(x) - c, lo, t, xtol=1e-14, rtol=1e-15)
            lo = t
    return None


POP_CASES = [
    # Time in years. Weibull with a falling hazard (crossing within a year of age, and one
    # at a birthday), a Gompertz levelling off, a log-logistic whose hazard rises then falls
    # (crossing past the table's last age, where its last hazard is held), and a Weibull
    # with a rising hazard that never crosses.
    ("weibull", {"shape": 0.5, "scale": 296.0}, 3.0, 30.0),
    ("weibull", {"shape": 0.45, "scale": 900.0}, 2.0, 30.0),
    ("gompertz", {"shape": -0.21, "rate": 0.15}, 2.0, 30.0),
    ("loglogistic", {"shape": 1.3, "scale": 20.0}, 4.0, 30.0),
    ("weibull", {"shape": 1.6, "scale": 4.0}, 3.0, 30.0),
]


def hazard(family, p):
    if family == "weibull":
        k, s = p["shape"], p["scale"]
        return lambda t: (k / s) * (t / s) ** (k - 1.0)
    if family == "gompertz":
        return lambda t: p["rate"] * math.exp(p["shape"] * t)
    if family == "loglogistic":
        k, s = p["shape"], p["scale"]
        return lambda t: (k / s) * (t / s) ** (k - 1.0) / (1.0 + (t / s) ** k)
    raise ValueError(family)


population = {
    "table_csv": table_csv,
    "start_age": START_AGE,
    "survival": [[y, pop_survival(y)] for y in [0.25, 0.5, 1.0, 2.7, 5.0, 10.5, 12.0]],
    "cases": [
        {
            "family": f,
            "params": p,
            "from_years": start,
            "horizon_years": horizon,
            "below_population_from_years": crossing(hazard(f, p), start, horizon),
        }
        for f, p, start, horizon in POP_CASES
    ],
}

out = {
    "generated_by": "tests/reference/plausibility_scipy_reference.py",
    "scipy": scipy.__version__,
    "numpy": np.__version__,
    "cases": cases,
    "population": population,
}
path = pathlib.Path(__file__).with_name("plausibility_scipy_reference.json")
path.write_text(json.dumps(out, indent=1) + "\n")
print(f"wrote {path}")
