#!/usr/bin/env python3
"""Regularised incomplete gamma P(a, x) and Q(a, x) by SciPy, for src/families/incomplete_gamma.rs.

Reference: scipy.special.gammainc (P) and scipy.special.gammaincc (Q), SciPy (Virtanen et al.,
Nature Methods 17, 261-272, 2020), which computes them with the Cephes / Temme / DiDonato and
Morris (1986) algorithms: an implementation independent of tunnelcast's log-scale series and
continued fraction.

The grid covers small and large shapes a (1/q^2 of the generalized gamma for |q| from 0.01 to
10), both sides of the series / continued-fraction switch at x = a + 1 (just below and just
above it), and both tails as far as a double represents them (P or Q down to about 1e-290).
Each row also carries d ln F / d ln x = +-x^a e^-x / (Gamma(a) F) (scipy.special.gammaln),
the condition number that turns the rounding of x into a relative error of F, so that the
Rust test can allow for the one or two ulps by which its x = a e^y differs from this x.

Run from the repository root:  python3 tests/reference/incomplete_gamma_scipy.py
writes tests/reference/incomplete_gamma_scipy.json. CI does not run it; the JSON is committed.
Needs: pip install scipy numpy
"""

import json
import math
import pathlib

import numpy as np
import scipy
from scipy import special
from scipy.optimize import brentq

SHAPES = [0.01, 0.1, 0.37, 1.0, 2.5, 10.0, 57.3, 250.0, 1000.0, 10000.0]
# Values of P or Q to reach in each tail (x solved for with SciPy's inverse functions).
TAIL_LEVELS = [1e-5, 1e-30, 1e-100, 1e-200, 1e-290]


def log_density_ratio(a, x, value):
    """ln(x^a e^-x / Gamma(a)) - ln(value)."""
    return a * math.log(x) - x - special.gammaln(a) - math.log(value)


def solve_x(a, level, upper):
    """x with Q(a, x) = level (upper) or P(a, x) = level, by bisection on the log scale."""
    if upper:
        f = lambda lx: math.log(special.gammaincc(a, math.exp(lx)) or 1e-320) - math.log(level)
        lo, hi = math.log(a), math.log(a) + 2.0
        while f(hi) > 0:
            hi += 1.0
    else:
        f = lambda lx: math.log(special.gammainc(a, math.exp(lx)) or 1e-320) - math.log(level)
        lo, hi = math.log(a) - 2.0, math.log(a)
        while f(lo) > 0:
            lo -= 2.0
    return math.exp(brentq(f, lo, hi, xtol=1e-14, rtol=1e-15))


def main():
    rows = []
    for a in SHAPES:
        xs = set()
        # The switch of the Rust code (x < a + 1: series for P; else continued fraction for Q).
        for x in [a + 1.0, (a + 1.0) * (1 - 1e-9), (a + 1.0) * (1 + 1e-9), a, a + 0.5, a + 2.0]:
            xs.add(x)
        # The body, on the scale y = ln(x / a) used by the generalized gamma.
        for y in [-3.0, -1.0, -0.3, -0.05, 0.05, 0.3, 1.0, 2.0]:
            xs.add(a * math.exp(y))
        for level in TAIL_LEVELS:
            for upper in (True, False):
                x = solve_x(a, level, upper)
                # Subnormal x would lose its own digits before the function is applied.
                if x > 1e-300 and math.isfinite(x):
                    xs.add(x)
        for x in sorted(xs):
            p = float(special.gammainc(a, x))
            q = float(special.gammaincc(a, x))
            row = {"a": a, "x": x, "p": p, "q": q}
            # Condition numbers in ln x: d ln P / d ln x > 0, d ln Q / d ln x < 0.
            row["dlnp_dlnx"] = math.exp(log_density_ratio(a, x, p)) if p > 0 else None
            row["dlnq_dlnx"] = -math.exp(log_density_ratio(a, x, q)) if q > 0 else None
            rows.append(row)
    out = {
        "source": "scipy.special.gammainc / gammaincc (Virtanen et al., 2020)",
        "scipy": scipy.__version__,
        "numpy": np.__version__,
        "rows": rows,
    }
    path = pathlib.Path(__file__).with_name("incomplete_gamma_scipy.json")
    path.write_text(json.dumps(out, indent=1) + "\n")
    print(f"wrote {len(rows)} rows to {path}")


if __name__ == "__main__":
    main()
