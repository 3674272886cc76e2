#!/usr/bin/env python3
"""Writes the invented digitised Kaplan–Meier figure bundled with tunnelcast.

Everything here is made up: a fictional trial of the invented drug Veltranib against standard
care in an invented chronic condition, times in months. The script simulates patients (seeded),
computes each arm's Kaplan–Meier curve and numbers at risk, and then imitates what a modeller
gets from digitising a published figure: most step corners clicked, survival in percent with
small reading errors (a few above 100 and a few small rises), times slightly off, rows not
quite in order. Standard library only; the same seed gives byte-identical files.

Usage: python3 scripts/make_digitised.py   (writes data/demo_digitised.csv, data/demo_at_risk.csv)
"""

import math
import os
import random

SEED = 20261202
ARMS = [
    # name, patients, Weibull shape, Weibull scale (months), dropout rate per month
    ("veltranib", 180, 1.25, 22.0, 0.006),
    ("standard", 175, 1.10, 13.0, 0.006),
]
ACCRUAL = 18.0  # months of recruitment (uniform)
CUTOFF = 42.0  # months from first patient in to data cut-off
RISK_EVERY = 6.0  # months between columns of the published risk table
CLICK = 0.85  # chance that a corner of a step is clicked
SURV_NOISE = 0.4  # reading error of survival, percentage points (uniform ±)
TIME_NOISE = 0.02  # reading error of time, months (uniform ±); clicks still follow the curve


def simulate(rng, n, shape, scale, dropout):
    """(time, event) pairs: Weibull event times, uniform entry, administrative cut-off, dropout."""
    out = []
    for _ in range(n):
        event_time = scale * (-math.log(1.0 - rng.random())) ** (1.0 / shape)
        follow = CUTOFF - ACCRUAL * rng.random()
        drop = -math.log(1.0 - rng.random()) / dropout
        censor = min(follow, drop)
        if event_time <= censor:
            out.append((round(event_time, 2) or 0.01, 1))
        else:
            out.append((round(censor, 2) or 0.01, 0))
    out.sort()
    return out


def kaplan_meier(records):
    """Steps (time, survival after) at event times, and the number at risk at any time."""
    steps = []
    at_risk = len(records)
    s = 1.0
    i = 0
    while i < len(records):
        t = records[i][0]
        d = c = 0
        while i < len(records) and records[i][0] == t:
            d += records[i][1]
            c += 1 - records[i][1]
            i += 1
        if d:
            s *= 1.0 - d / at_risk
            steps.append((t, s))
        at_risk -= d + c
    return steps


def at_risk_at(records, t):
    return sum(1 for r in records if r[0] >= t)


def digitise(rng, steps, last_time):
    """Corners of the steps, clicked with chance CLICK, read with small errors, in percent."""
    points = [(0.0, 100.0)]
    before = 1.0
    for t, after in steps:
        for s in (before, after):
            if rng.random() < CLICK:
                # Clicks follow the curve from left to right, so a reading error in time never
                # puts a corner before the one clicked earlier.
                tt = max(points[-1][0], t + rng.uniform(-TIME_NOISE, TIME_NOISE))
                ss = 100.0 * s + rng.uniform(-SURV_NOISE, SURV_NOISE)
                points.append((round(tt, 3), round(ss, 2)))
        before = after
    points.append((round(last_time, 3), round(100.0 * before, 2)))
    # Two neighbouring rows swapped here and there, as when clicks are collected out of order.
    for _ in range(3):
        k = rng.randrange(1, len(points) - 1)
        points[k], points[k + 1] = points[k + 1], points[k]
    return points


def main():
    rng = random.Random(SEED)
    here = os.path.dirname(os.path.abspath(__file__))
    data = os.path.join(here, "..", "data")
    curve_rows = ["arm,time,survival"]
    risk_rows = ["arm,time,at_risk"]
    summary = []
    for name, n, shape, scale, dropout in ARMS:
        records = simulate(rng, n, shape, scale, dropout)
        steps = kaplan_meier(records)
        last_time = records[-1][0]
        for t, s in digitise(rng, steps, last_time):
            curve_rows.append(f"{name},{t:g},{s:.2f}")
        t = 0.0
        while t <= last_time:
            risk_rows.append(f"{name},{t:g},{at_risk_at(records, t)}")
            t += RISK_EVERY
        summary.append((name, n, sum(r[1] for r in records)))
    with open(os.path.join(data, "demo_digitised.csv"), "w", newline="\n") as f:
        f.write("\n".join(curve_rows) + "\n")
    with open(os.path.join(data, "demo_at_risk.csv"), "w", newline="\n") as f:
        f.write("\n".join(risk_rows) + "\n")
    for name, n, events in summary:
        print(f"{name}: {n} patients, {events} events")


if __name__ == "__main__":
    main()
