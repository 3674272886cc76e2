#!/usr/bin/env python3
"""Reference tables for the cross-path tests (tests/cross_path.rs), from mpmath.

The scenario of tests/scenario/mod.rs: a Weibull curve with shape 1.5 and scale 60 months,
monthly cycles, 36 tunnel states, and each adjustment of the curve options:
  * none;
  * hazard ratio 0.5: h(t) = 0.5 h0(t);
  * acceleration factor 1.4: h(t) = h0(t / 1.4) / 1.4;
  * waning: h(t) = h0(t) 0.5**v(t), v = 1 before 12 months, linear to 0 at 24 months, 0 after;
  * background added: h(t) = h0(t) + h_b, h_b = -ln(1 - 0.1) per year, a life table whose qx is
    0.1 at every age (so one constant per month, a month being a twelfth of a year);
  * background floor: h(t) = max(h0(t), h_b), the crossing found by mpmath.findroot.

Every cumulative hazard is mpmath.quad of the hazard itself at 40 significant digits (split at
the waning window's ends and at the floor's crossing), not the closed forms the Rust tests use,
so this script checks those closed forms too. Per tunnel k it writes p_exit = 1 - S(k)/S(k-1),
surv_end = S(k); with `add` p_exit_background = h_b * int_{k-1}^k S(u)/S(k-1) du; with `floor`
floor_share = the part of the cycle where h_b > h0.

It also writes, per adjustment, the restricted mean survival to the 10-year horizon of the
horizon tests (120 monthly cycles), in years (a month is a twelfth of a year):
  life_years = int_0^120 S(t) dt / 12 and
  discounted_life_years = int_0^120 S(t) (1 + 0.035)^(-t/12) dt / 12,
the exact integrals `horizon` and `run` put beside their within-cycle methods. S(t) is
exp(-H(t)) with H accumulated month by month from the same quadrature of the hazard; the outer
integrals are mpmath.quad on each month, split where the hazard has a kink (20 significant
digits here, for speed: about a minute per adjustment). For the unadjusted Weibull the result is
checked against its closed form scale Gamma(1 + 1/shape) P(1/shape, (T/scale)^shape), P the
regularised lower incomplete gamma function.

Needs mpmath (pip install mpmath). Run from the repository root:
    python3 tests/reference/cross_path_reference.py
writes tests/reference/cross_path.json. CI does not run this script; the JSON is committed.
"""

import json

import mpmath as mp

mp.mp.dps = 40

SHAPE = mp.mpf("1.5")
SCALE = mp.mpf(60)
COUNT = 36
QX = mp.mpf("0.1")
H_B = -mp.log(1 - QX) / 12  # per month


def h0(t):
    if t <= 0:
        return mp.mpf(0)
    return SHAPE / SCALE * (t / SCALE) ** (SHAPE - 1)


CROSSING = mp.findroot(lambda t: h0(t) - H_B, mp.mpf(7))

CASES = {
    "none": (h0, []),
    "hazard ratio": (lambda t: mp.mpf("0.5") * h0(t), []),
    "acceleration factor": (lambda t: h0(t / mp.mpf("1.4")) / mp.mpf("1.4"), []),
    "waning": (
        lambda t: h0(t)
        * mp.mpf("0.5") ** (1 if t <= 12 else 0 if t >= 24 else (24 - t) / mp.mpf(12)),
        [mp.mpf(12), mp.mpf(24)],
    ),
    "add": (lambda t: h0(t) + H_B, []),
    "floor": (lambda t: max(h0(t), H_B), [CROSSING]),
}


def cumulative(hazard, breaks, a, b):
    """int_a^b hazard, split at the breaks inside (a, b)."""
    edges = [a] + [x for x in breaks if a < x < b] + [b]
    return mp.fsum(mp.quad(hazard, [lo, hi]) for lo, hi in zip(edges, edges[1:]))


def table(name):
    hazard, breaks = CASES[name]
    rows = []
    total = mp.mpf(0)
    for k in range(1, COUNT + 1):
        a, b = mp.mpf(k - 1), mp.mpf(k)
        step = cumulative(hazard, breaks, a, b)
        row = {
            "tunnel": k,
            "surv_end": float(mp.exp(-(total + step))),
            "p_exit": float(-mp.expm1(-step)),
        }
        if name == "add":
            share = H_B * mp.quad(
                lambda u: mp.exp(-cumulative(hazard, breaks, a, u)), [a, b]
            )
            row["p_exit_background"] = float(share)
        if name == "floor":
            row["floor_share"] = float(min(max(CROSSING - a, 0), 1))
        rows.append(row)
        total += step
    return rows


HORIZON_MONTHS = 120
DISCOUNT = mp.mpf("0.035")


def restricted_means(name):
    """(life_years, discounted_life_years) to HORIZON_MONTHS, in years."""
    hazard, breaks = CASES[name]
    with mp.workdps(20):
        ln_d = mp.log(1 + DISCOUNT) / 12  # per month
        total = mp.mpf(0)
        plain = mp.mpf(0)
        discounted = mp.mpf(0)
        for k in range(HORIZON_MONTHS):
            a, b = mp.mpf(k), mp.mpf(k + 1)
            seen = {}

            def survival(t):
                if t not in seen:
                    seen[t] = mp.exp(-(total + cumulative(hazard, breaks, a, t)))
                return seen[t]

            edges = [a] + [x for x in breaks if a < x < b] + [b]
            plain += mp.quad(survival, edges)
            discounted += mp.quad(lambda t: survival(t) * mp.exp(-ln_d * t), edges)
            total += cumulative(hazard, breaks, a, b)
        if name == "none":
            closed = (
                SCALE
                * mp.gamma(1 + 1 / SHAPE)
                * mp.gammainc(1 / SHAPE, 0, (HORIZON_MONTHS / SCALE) ** SHAPE, regularized=True)
            )
            assert abs(plain - closed) < mp.mpf(10) ** -15 * closed, (plain, closed)
        return {
            "life_years": float(plain / 12),
            "discounted_life_years": float(discounted / 12),
        }


def main():
    out = {
        "generator": "tests/reference/cross_path_reference.py (mpmath %s, 40 digits)"
        % mp.__version__,
        "curve": {"family": "weibull", "shape": 1.5, "scale": 60.0, "time_unit": "months"},
        "cycle_months": 1.0,
        "floor_crossing_months": float(CROSSING),
        "tables": {name: table(name) for name in CASES},
        "restricted_mean": {
            "horizon_months": HORIZON_MONTHS,
            "discount": float(DISCOUNT),
            "life_years_unit": "years",
            "by_adjustment": {name: restricted_means(name) for name in CASES},
        },
    }
    with open("tests/reference/cross_path.json", "w") as f:
        json.dump(out, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
