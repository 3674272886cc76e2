#!/usr/bin/env python3
"""Independent quadrature for payoffs by time since entry, by SciPy (tests/payoff_scipy.rs).

Written from the command-line contract ("Payoffs by time since entry", "Entry at any time"),
without tunnelcast's code. Survival functions and densities come from SciPy's own distributions
where it has them (scipy.stats.lognorm, fisk = log-logistic, gengamma) and from the contract's
formula for the Gompertz; integrals by scipy.integrate.quad (QUADPACK, epsabs 0, epsrel 1e-13)
split at every rate change (and, with a life table, at every birthday):

  per tunnel k, [t0, t1) = [(k-1)h, kh):
    rate     : integral of c(u) S(u)/S(t0) (1+R)^-(u - t0) du over [t0, t1]
    at_entry : the amount in tunnel 1
    at_exit  : amount * integral of f(u)/S(t0) (1+R)^-(u - t0) du   (f the density itself)
  exact totals to T = N h: integral of c(t) S(t) (1+R)^-t dt + entry + exit * integral of
    f(t) (1+R)^-t dt; the boundary methods written out as the contract's sums.

Generalized gamma (Prentice 1974; Cox, Chu, Schneider and Munoz 2007), q > 0: with
G ~ Gamma(1/q^2), T = exp(mu) (q^2 G)^(sigma/q), i.e. scipy.stats.gengamma(a = 1/q^2,
c = q/sigma, scale = exp(mu) (q^2)^(sigma/q)).

Entry at any time: the curve's hazard plus the background hazard -ln(1 - qx) of the age reached
(constant within each year of age; data/demo_lifetable.csv, column qx_female, invented), for a
cohort entering at age A + e * cycle (years), e = 0..N-1.

The payoff schedule is invented (a stepped cost with one-offs, a stepped utility).
Run from the repository root:  python3 tests/reference/payoff_scipy_reference.py
writes tests/reference/payoff_scipy_reference.json. CI does not run it; the JSON is committed.
"""

import csv
import json
import math
import pathlib

import numpy as np
import scipy
from scipy import integrate, stats

MONTH_DAYS = 365.25 / 12
ROWS = [
    ["cost", "rate", "0", "1000", "1 month"],
    ["cost", "rate", "3 months", "300", "1 month"],
    ["cost", "rate", "2 years", "80", "1 month"],
    ["cost", "at_entry", "", "1200", ""],
    ["cost", "at_exit", "", "5000", ""],
    ["qol", "rate", "0", "0.65", "1 year"],
    ["qol", "rate", "6 months", "0.8", "1 year"],
]
# In months: (payoff, [(from, rate per month)], entry, exit).
PAYOFFS = [
    ("cost", [(0.0, 1000.0), (3.0, 300.0), (24.0, 80.0)], 1200.0, 5000.0),
    ("qol", [(0.0, 0.65 / 12), (6.0, 0.8 / 12)], None, None),
]
CHANGES = [3.0, 6.0, 24.0]


def lognormal(mu, sigma):
    d = stats.lognorm(s=sigma, scale=math.exp(mu))
    return d.sf, d.pdf


def loglogistic(shape, scale):
    d = stats.fisk(c=shape, scale=scale)
    return d.sf, d.pdf


def gompertz(shape, rate):
    def sf(t):
        return math.exp(-(rate / shape) * math.expm1(shape * t))

    def pdf(t):
        return rate * math.exp(shape * t) * sf(t)

    return sf, pdf


def gengamma(mu, sigma, q):
    d = stats.gengamma(a=1 / q**2, c=q / sigma, scale=math.exp(mu) * (q**2) ** (sigma / q))
    return d.sf, d.pdf


CASES = [
    # name, family, params (contract names, in order), cycle in months, N
    ("lognormal-monthly", "lognormal", {"mu": 2.8, "sigma": 1.1}, 1.0, 36),
    ("loglogistic-quarterly", "loglogistic", {"shape": 1.6, "scale": 18.0}, 3.0, 16),
    ("gompertz-monthly", "gompertz", {"shape": 0.03, "rate": 0.02}, 1.0, 40),
    ("gompertz-plateau-quarterly", "gompertz", {"shape": -0.05, "rate": 0.04}, 3.0, 20),
    ("generalized-gamma-monthly", "generalized-gamma", {"mu": 2.9, "sigma": 0.9, "q": 0.6}, 1.0,
     36),
]
MAKE = {"lognormal": lognormal, "loglogistic": loglogistic, "gompertz": gompertz,
        "generalized-gamma": gengamma}
DISCOUNT = 0.035


def quad(f, a, b, points):
    inner = sorted(p for p in set(points) if a < p < b)
    edges = [a] + inner + [b]
    return sum(integrate.quad(f, lo, hi, epsabs=0, epsrel=1e-13, limit=500)[0]
               for lo, hi in zip(edges, edges[1:]))


def rate_at(pieces, t):
    r = 0.0
    for start, value in pieces:
        if start <= t + 1e-9:
            r = value
    return r


def delta(R):
    return math.log1p(R) / 12  # per month


def tunnel_payoffs(sf, pdf, h, n, R, points):
    d = delta(R)
    out = {name: [] for name, *_ in PAYOFFS}
    for k in range(1, n + 1):
        t0, t1 = (k - 1) * h, k * h
        s0 = sf(t0)
        stay = {}
        for name, pieces, entry, exit_amount in PAYOFFS:
            value = quad(lambda u: rate_at(pieces, u) * sf(u) / s0 * math.exp(-d * (u - t0)),
                         t0, t1, points)
            if entry is not None and k == 1:
                value += entry
            if exit_amount is not None:
                value += exit_amount * quad(lambda u: pdf(u) / s0 * math.exp(-d * (u - t0)),
                                            t0, t1, points)
            out[name].append(value)
    return out


def simpson_weights(n):
    if n == 1:
        return [0.5, 0.5]
    w = [0.0] * (n + 1)
    m = n if n % 2 == 0 else n - 3
    for j in range(0, m, 2):
        w[j] += 1 / 3
        w[j + 1] += 4 / 3
        w[j + 2] += 1 / 3
    if n % 2 == 1:
        for i, c in enumerate([3 / 8, 9 / 8, 9 / 8, 3 / 8]):
            w[m + i] += c
    return w


def methods(sf, pdf, h, n, R, per_tunnel, points):
    d = delta(R)
    t = [j * h for j in range(n + 1)]
    m = [sf(x) for x in t]
    disc = [math.exp(-d * x) for x in t]
    out = {}
    for name, pieces, entry, exit_amount in PAYOFFS:
        c = [rate_at(pieces, x) * h for x in t]
        exact = quad(lambda u: rate_at(pieces, u) * sf(u) * math.exp(-d * u), 0, t[-1], points)
        exit_sum = 0.0
        if exit_amount is not None:
            exact += exit_amount * quad(lambda u: pdf(u) * math.exp(-d * u), 0, t[-1], points)
            exit_sum = exit_amount * sum((m[j] - m[j + 1]) * disc[j + 1] for j in range(n))
        one_offs = (entry or 0.0) + exit_sum
        g = [c[j] * m[j] * disc[j] for j in range(n + 1)]
        w = simpson_weights(n)
        totals = {
            "start": sum(g[j] for j in range(n)) + one_offs,
            "end": sum(c[j] * m[j + 1] * disc[j + 1] for j in range(n)) + one_offs,
            "half-cycle": sum(g) - 0.5 * (g[0] + g[n]) + one_offs,
            "trapezoid": sum(c[j] * 0.5 * (m[j] * disc[j] + m[j + 1] * disc[j + 1])
                             for j in range(n)) + one_offs,
            "simpson": sum(wj * gj for wj, gj in zip(w, g)) + one_offs,
            "cycle-integrated": sum(m[j] * disc[j] * per_tunnel[name][j] for j in range(n)),
        }
        out[name] = {"exact": exact + (entry or 0.0), "totals": totals}
    return out


def lifetable():
    path = pathlib.Path(__file__).resolve().parents[2] / "data" / "demo_lifetable.csv"
    rows = [r for r in csv.DictReader(line for line in path.open() if not line.startswith("#"))]
    return {int(r["age"]): float(r["qx_female"]) for r in rows}


def with_background(sf, pdf, table, start_age):
    """S_total = S * exp(-background cumulative hazard), f_total = (h + mu) S_total; t in months."""
    def mu(t):
        age = start_age + t / 12
        return -math.log1p(-table[int(math.floor(age))]) / 12  # per month

    def cumulative(t):
        total, a = 0.0, 0.0
        age0 = start_age
        while a < t:
            age = age0 + a / 12
            nxt = min(t, (math.floor(age) + 1 - age0) * 12)
            total += mu(a) * (nxt - a)
            a = nxt
        return total

    def sf_total(t):
        return sf(t) * math.exp(-cumulative(t))

    def pdf_total(t):
        s = sf(t)
        return (pdf(t) + mu(t) * s) * math.exp(-cumulative(t))

    return sf_total, pdf_total


def birthdays(start_age, until):
    first = (math.floor(start_age) + 1 - start_age) * 12
    return list(np.arange(first, until, 12.0))


def main():
    cases = []
    for name, family, params, h, n in CASES:
        sf, pdf = MAKE[family](*params.values())
        plain = tunnel_payoffs(sf, pdf, h, n, 0.0, CHANGES)
        discounted = tunnel_payoffs(sf, pdf, h, n, DISCOUNT, CHANGES)
        cases.append({
            "name": name, "family": family, "params": params, "cycle_months": h, "cycles": n,
            "discount": DISCOUNT,
            "p_exit": [1 - sf(k * h) / sf((k - 1) * h) for k in range(1, n + 1)],
            "tunnels": {p: {"plain": plain[p], "discounted": discounted[p]} for p in plain},
            "methods": {
                p: {"plain": methods(sf, pdf, h, n, 0.0, plain, CHANGES)[p],
                    "discounted": methods(sf, pdf, h, n, DISCOUNT, discounted, CHANGES)[p]}
                for p in plain
            },
        })
    # Entry at any time: log-normal, monthly cycles, 24 tunnels, entry at cycles 0..5 of
    # 3 months each, from age 62.7, background added.
    table = lifetable()
    entry = {"family": "lognormal", "params": {"mu": 2.8, "sigma": 1.1}, "cycle_months": 3.0,
             "count": 8, "entry_cycles": 6, "start_age": 62.7, "discount": DISCOUNT, "rows": []}
    sf0, pdf0 = lognormal(2.8, 1.1)
    for e in range(entry["entry_cycles"]):
        age = entry["start_age"] + e * entry["cycle_months"] / 12
        sf, pdf = with_background(sf0, pdf0, table, age)
        h, n = entry["cycle_months"], entry["count"]
        points = CHANGES + birthdays(age, n * h)
        pay = tunnel_payoffs(sf, pdf, h, n, DISCOUNT, points)
        for k in range(1, n + 1):
            entry["rows"].append({
                "entry_cycle": e, "entry_age": age, "tunnel": k,
                "p_exit": 1 - sf(k * h) / sf((k - 1) * h),
                "payoff_cost": pay["cost"][k - 1], "payoff_qol": pay["qol"][k - 1],
            })
    out = {
        "generator": f"tests/reference/payoff_scipy_reference.py (SciPy {scipy.__version__})",
        "rows": ROWS,
        "cases": cases,
        "entry": entry,
    }
    path = pathlib.Path(__file__).resolve().parent / "payoff_scipy_reference.json"
    path.write_text(json.dumps(out, indent=1) + "\n")
    print(f"wrote {path}")


if __name__ == "__main__":
    main()
