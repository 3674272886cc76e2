#!/usr/bin/env python3
"""Reference values for the payoff tests (tests/payoff_reference.rs), from mpmath.

Written from the definitions in the command-line contract ("Payoffs by time since entry"),
independently of tunnelcast's code:
  * per-tunnel payoffs: for tunnel k covering [t0, t1) = [(k-1)h, kh), with S the survival, f
    the density and R the annual discount rate,
        rate     : integral of c(u) S(u)/S(t0) (1+R)^-(u - t0) du over [t0, t1]
        at_entry : the amount in tunnel 1, 0 elsewhere
        at_exit  : amount * integral of f(u)/S(t0) (1+R)^-(u - t0) du over [t0, t1]
    a payoff's value being the sum of the parts it has, by mpmath.quad (tanh-sinh) at 30 digits, on the density itself (tunnelcast integrates the
    exit term by parts instead), split where the rate changes;
  * the horizon methods (start, end, half-cycle, trapezoid, simpson with the 3/8 rule on the
    last three cycles when N is odd, cycle-integrated), written out as the contract's sums
    (a rate by the method's rule, plus the entry amount, plus the exit amount's boundary sum);
  * the exact totals, integral over [0, N h] of c(t) S(t) (1+R)^-t dt (and of f(t)(1+R)^-t for
    at_exit) in one quadrature split at the rate changes;
  * the truncation criterion: the chain cut at K tunnels pushed cycle by cycle (the last tunnel
    repeating its probability and its payoff), against the uncut chain.

The payoff rows are the contract's example, two payoffs: `cost` (500 a month in the first year
then 50 a month, 1,500 on entry and 3,000 on exit, all one payoff) and `utility` (0.6 a year for
the first month then 0.8); plus an invented cost concentrated in the first month, `induction`
(2,000 for that month only).

Needs mpmath (pip install mpmath). Run from the repository root:
    python3 tests/reference/payoff_reference.py
writes tests/reference/payoff_reference.json. CI does not run this script; the JSON is committed.
"""

import json

import mpmath as mp

mp.mp.dps = 30

DAYS = {"day": mp.mpf(1), "week": mp.mpf(7), "month": mp.mpf("365.25") / 12,
        "year": mp.mpf("365.25")}

# payoff, kind, from, amount, per (the payoff file's columns).
ROWS = [
    ["cost", "rate", "0", "500", "1 month"],
    ["cost", "rate", "1 year", "50", "1 month"],
    ["cost", "at_entry", "", "1500", ""],
    ["cost", "at_exit", "", "3000", ""],
    ["utility", "rate", "0", "0.6", "1 year"],
    ["utility", "rate", "1 month", "0.8", "1 year"],
    ["induction", "rate", "0", "2000", "1 month"],
    ["induction", "rate", "1 month", "0", "1 month"],
]

CASES = [
    # name, family, params, curve unit, cycle, N, R
    ("exponential-monthly", "exponential", ["0.04"], "month", "1 month", 36, "0.035"),
    ("weibull-monthly", "weibull", ["1.3", "15"], "month", "1 month", 37, "0.035"),
    ("weibull-unbounded-hazard-quarterly", "weibull", ["0.8", "20"], "month", "3 months", 13,
     "0.035"),
    ("weibull-days-quarterly", "weibull", ["1.2", "500"], "day", "3 months", 12, "0.035"),
    ("piecewise-monthly", "piecewise", ["0.08", "0.03"], "month", "1 month", 30, "0.035"),
]
PIECEWISE_CUTS = [mp.mpf(6)]  # months, for the piecewise case

METHODS = ["start", "end", "half-cycle", "trapezoid", "simpson", "cycle-integrated"]


def duration(text, unit):
    """A duration 'v unit' (or 0) in `unit`."""
    text = text.strip()
    if text == "0":
        return mp.mpf(0)
    value, name = text.split()
    name = name.rstrip("s")
    return mp.mpf(value) * DAYS[name] / DAYS[unit]


def payoffs(unit):
    """{name: {"rate": [(from, rate per unit)], "at_entry": amount, "at_exit": amount}} in
    `unit`, with only the parts a payoff has (rows of one name may combine kinds)."""
    out = {}
    for name, kind, start, amount, per in ROWS:
        parts = out.setdefault(name, {})
        if kind == "rate":
            rate = mp.mpf(amount) / duration(per, unit)
            parts.setdefault("rate", []).append((duration(start, unit), rate))
        else:
            assert kind not in parts, (name, kind)
            parts[kind] = mp.mpf(amount)
    return out


def curve(family, params):
    """(ln S, hazard) functions of time in the curve's unit."""
    p = [mp.mpf(x) for x in params]
    if family == "exponential":
        return (lambda t: -p[0] * t), (lambda t: p[0])
    if family == "weibull":
        k, s = p
        return (lambda t: -(t / s) ** k), (lambda t: k / s * (t / s) ** (k - 1))
    if family == "piecewise":
        cuts = PIECEWISE_CUTS

        def log_s(t):
            total, start = mp.mpf(0), mp.mpf(0)
            for i, rate in enumerate(p):
                end = cuts[i] if i < len(cuts) else mp.inf
                if t <= start:
                    break
                total += rate * (min(t, end) - start)
                start = end
            return -total

        def hazard(t):
            i = sum(1 for c in cuts if c <= t)
            return p[i]

        return log_s, hazard
    raise ValueError(family)


def rate_at(pieces, t):
    value = mp.mpf(0)
    for start, rate in pieces:
        if start <= t:
            value = rate
    return value


def split(a, b, points):
    return [a] + [x for x in sorted(points) if a < x < b] + [b]


def simpson_weights(n):
    """Composite Simpson weights for n intervals (3/8 rule on the last three when n is odd)."""
    w = [mp.mpf(0)] * (n + 1)
    if n == 1:
        w[0] = w[1] = mp.mpf(1) / 2
        return w
    even = n if n % 2 == 0 else n - 3
    for i in range(0, even, 2):
        for j, c in zip((i, i + 1, i + 2), (1, 4, 1)):
            w[j] += mp.mpf(c) / 3
    if even < n:
        for j, c in zip(range(even, even + 4), (1, 3, 3, 1)):
            w[j] += mp.mpf(3) * c / 8
    return w


def compute(case):
    name, family, params, unit, cycle, n, r = case
    log_s, hazard = curve(family, params)
    h = duration(cycle, unit)
    years = DAYS[unit] / DAYS["year"]
    pay = payoffs(unit)
    breaks = sorted({s for parts in pay.values() for s, _ in parts.get("rate", [])[1:]}
                    | (set(PIECEWISE_CUTS) if family == "piecewise" else set()))
    discounts = {"plain": mp.mpf(0), "discounted": mp.log(1 + mp.mpf(r)) * years}

    # Per-tunnel payoffs: each part the payoff has, summed.
    tunnels = {}
    for pname, parts in pay.items():
        tunnels[pname] = {}
        for label, delta in discounts.items():
            values = []
            for k in range(1, n + 1):
                t0, t1 = (k - 1) * h, k * h
                ls0 = log_s(t0)
                nodes = split(t0, t1, breaks)
                v = mp.mpf(0)
                if "rate" in parts:
                    pieces = parts["rate"]
                    v += sum(mp.quad(lambda u: rate_at(pieces, u) * mp.exp(log_s(u) - ls0
                                                                            - delta * (u - t0)),
                                     [a, b]) for a, b in zip(nodes, nodes[1:]))
                if "at_entry" in parts and k == 1:
                    v += parts["at_entry"]
                if "at_exit" in parts:
                    v += parts["at_exit"] * sum(
                        mp.quad(lambda u: hazard(u) * mp.exp(log_s(u) - ls0 - delta * (u - t0)),
                                [a, b]) for a, b in zip(nodes, nodes[1:]))
                values.append(v)
            tunnels[pname][label] = values

    # Horizon methods and exact totals.
    t = [j * h for j in range(n + 1)]
    m = [mp.exp(log_s(x)) for x in t]
    weights = simpson_weights(n)
    methods = {}
    for pname, parts in pay.items():
        methods[pname] = {}
        for label, delta in discounts.items():
            d = [mp.exp(-delta * x) for x in t]
            totals = {method: mp.mpf(0) for method in METHODS[:5]}
            exact = mp.mpf(0)
            nodes = split(mp.mpf(0), t[n], breaks)
            if "rate" in parts:
                pieces = parts["rate"]
                c = [rate_at(pieces, x) * h for x in t]
                totals["start"] += sum(c[j] * m[j] * d[j] for j in range(n))
                totals["end"] += sum(c[j] * m[j + 1] * d[j + 1] for j in range(n))
                totals["trapezoid"] += sum(c[j] * (m[j] * d[j] + m[j + 1] * d[j + 1]) / 2
                                           for j in range(n))
                totals["half-cycle"] += sum(c[j] * m[j] * d[j] * (mp.mpf(1) / 2 if j in (0, n)
                                                                  else 1) for j in range(n + 1))
                totals["simpson"] += sum(weights[j] * c[j] * m[j] * d[j] for j in range(n + 1))
                exact += sum(mp.quad(lambda u: rate_at(pieces, u) * mp.exp(log_s(u) - delta * u),
                                     [a, b]) for a, b in zip(nodes, nodes[1:]))
            if "at_entry" in parts:
                for method in METHODS[:5]:
                    totals[method] += parts["at_entry"]
                exact += parts["at_entry"]
            if "at_exit" in parts:
                amount = parts["at_exit"]
                boundary = amount * sum((m[j] - m[j + 1]) * d[j + 1] for j in range(n))
                for method in METHODS[:5]:
                    totals[method] += boundary
                exact += amount * sum(mp.quad(lambda u: hazard(u) * mp.exp(log_s(u) - delta * u),
                                              [a, b]) for a, b in zip(nodes, nodes[1:]))
            per_tunnel = tunnels[pname][label]
            totals["cycle-integrated"] = sum(m[j] * d[j] * per_tunnel[j] for j in range(n))
            methods[pname][label] = {"exact": exact, "totals": totals}

    # Truncation: the chain cut at K, pushed cycle by cycle, discounted.
    delta = discounts["discounted"]
    p_exit = [None] + [1 - m[k] / m[k - 1] for k in range(1, n + 1)]
    truncation = {}
    for pname in pay:
        per_tunnel = [None] + tunnels[pname]["discounted"]

        def chain_total(count):
            membership, total = mp.mpf(1), mp.mpf(0)
            for j in range(n):
                k = min(j + 1, count)
                total += membership * mp.exp(-delta * t[j]) * per_tunnel[k]
                membership *= 1 - p_exit[k]
            return total

        full = chain_total(n)
        truncation[pname] = [abs(chain_total(k) - full) / abs(full) if full != 0 else
                             abs(chain_total(k) - full) for k in range(1, n + 1)]

    f = float
    return {
        "name": name,
        "family": family,
        "params": [f(mp.mpf(x)) for x in params],
        "cuts": [f(c) for c in PIECEWISE_CUTS] if family == "piecewise" else [],
        "time_unit": unit + "s",
        "cycle": cycle,
        "cycles": n,
        "discount": f(mp.mpf(r)),
        "tunnels": {p: {lab: [f(v) for v in vals] for lab, vals in d.items()}
                    for p, d in tunnels.items()},
        "methods": {p: {lab: {"exact": f(v["exact"]),
                              "totals": {k: f(x) for k, x in v["totals"].items()}}
                        for lab, v in d.items()} for p, d in methods.items()},
        "truncation": {p: [f(v) for v in vals] for p, vals in truncation.items()},
    }


def main():
    out = {
        "generator": "tests/reference/payoff_reference.py (mpmath "
                     + mp.__version__ + ", 30 digits)",
        "rows": ROWS,
        "cases": [compute(case) for case in CASES],
    }
    with open("tests/reference/payoff_reference.json", "w") as fh:
        json.dump(out, fh, indent=1)
        fh.write("\n")


if __name__ == "__main__":
    main()
