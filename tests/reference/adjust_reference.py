#!/usr/bin/env python3
"""Reference values for the adjustment tests (tests/adjust_reference.rs), from SciPy.

Computes, by scipy.integrate.quad on the hazard itself (not by the integration by parts
tunnelcast uses), cumulative hazards of:
  * a waning hazard ratio, h(t) = h0(t) * X**w(t), w = 1 before START, linear to 0 at END,
    0 after, for a Weibull with an unbounded hazard at 0 and for a log-normal;
  * a hazard floored at a constant background hazard, max(h0(t), h_b), for a log-normal whose
    hazard rises through h_b and falls back below it, with the crossings found by brentq, and
    the relative rise of each quarter-year tunnel's exit probability that the floor causes.

Needs SciPy and NumPy (pip install scipy numpy). Run from the repository root:
    python3 tests/reference/adjust_reference.py
writes tests/reference/adjust.json. CI does not run this script; the JSON is committed.
"""

import json
import math

from scipy import integrate, optimize, stats

QUAD = dict(epsabs=1e-14, epsrel=1e-13, limit=500)


def weibull_hazard(shape, scale):
    return lambda t: shape / scale * (t / scale) ** (shape - 1.0)


def lognormal_hazard(mu, sigma):
    dist = stats.lognorm(s=sigma, scale=math.exp(mu))
    return lambda t: math.exp(dist.logpdf(t) - dist.logsf(t))


def waning_case(name, family, params, hazard, ratio, start, end, times):
    ln_x = math.log(ratio)

    def weight(t):
        if t <= start:
            return 1.0
        if t >= end:
            return 0.0
        return (end - t) / (end - start)

    def integrand(u):
        return hazard(u) * math.exp(ln_x * weight(u))

    values = []
    for t in times:
        points = [p for p in (start, end) if 0.0 < p < t]
        edges = [0.0] + points + [t]
        total = 0.0
        for a, b in zip(edges, edges[1:]):
            total += integrate.quad(integrand, a, b, **QUAD)[0]
        values.append(total)
    return {
        "name": name,
        "kind": "waning",
        "family": family,
        "params": params,
        "ratio": ratio,
        "start": start,
        "end": end,
        "start_age": None,
        "qx": None,
        "times": times,
        "cumulative_hazard": values,
    }


def floor_case(name, mu, sigma, qx, start_age, times):
    hazard = lognormal_hazard(mu, sigma)
    h_b = -math.log1p(-qx)  # per year; time unit years
    grid = [0.001 * 1.05**i for i in range(0, 200)]
    crossings = []
    for a, b in zip(grid, grid[1:]):
        if (hazard(a) - h_b) * (hazard(b) - h_b) < 0:
            crossings.append(optimize.brentq(lambda t: hazard(t) - h_b, a, b, xtol=1e-15))
    values = []
    for t in times:
        edges = [0.0] + [c for c in crossings if c < t] + [t]
        total = 0.0
        for a, b in zip(edges, edges[1:]):
            total += integrate.quad(lambda u: max(hazard(u), h_b), a, b, **QUAD)[0]
        values.append(total)
    # Per tunnel of quarter-year cycles (80 of them), the relative rise of p_exit that the
    # floor causes: p_exit = 1 - exp(-∫ over the cycle of the hazard), with and without the
    # floor, each integral by quad on the hazard itself (split at the crossings).
    cycle = 0.25
    rises = []
    for k in range(80):
        a, b = k * cycle, (k + 1) * cycle
        edges = [a] + [c for c in crossings if a < c < b] + [b]
        with_floor = sum(
            integrate.quad(lambda u: max(hazard(u), h_b), x, y, **QUAD)[0]
            for x, y in zip(edges, edges[1:])
        )
        alone = sum(integrate.quad(hazard, x, y, **QUAD)[0] for x, y in zip(edges, edges[1:]))
        rises.append(math.expm1(-with_floor) / math.expm1(-alone) - 1.0)
    return {
        "name": name,
        "kind": "floor",
        "family": "lognormal",
        "params": [mu, sigma],
        "ratio": None,
        "start": None,
        "end": None,
        "start_age": start_age,
        "qx": qx,
        "times": times,
        "cumulative_hazard": values,
        "crossings": crossings,
        "quarter_year_p_exit_rise": rises,
    }


def main():
    cases = [
        waning_case(
            "weibull shape 0.6 with hazard ratio 0.5 waning from 0 to 24 months",
            "weibull",
            [0.6, 20.0],
            weibull_hazard(0.6, 20.0),
            0.5,
            0.0,
            24.0,
            [0.5, 1.0, 3.0, 6.0, 12.0, 18.0, 24.0, 30.0, 48.0],
        ),
        waning_case(
            "lognormal with hazard ratio 1.6 waning from 6 to 30 months",
            "lognormal",
            [2.5, 0.8],
            lognormal_hazard(2.5, 0.8),
            1.6,
            6.0,
            30.0,
            [2.0, 6.0, 7.5, 15.0, 29.0, 30.0, 42.0, 60.0],
        ),
        floor_case(
            "lognormal floored at a constant background qx of 0.15 a year (two crossings)",
            1.0,
            1.0,
            0.15,
            50.0,
            [0.25, 0.5, 1.0, 2.0, 3.5, 5.0, 8.0, 11.5, 12.0, 15.0, 19.5],
        ),
    ]
    for case in cases:
        case.setdefault("crossings", None)
        case.setdefault("quarter_year_p_exit_rise", None)
    with open("tests/reference/adjust.json", "w") as out:
        json.dump({"generator": "tests/reference/adjust_reference.py (SciPy quad)", "cases": cases}, out, indent=1)
        out.write("\n")


if __name__ == "__main__":
    main()
