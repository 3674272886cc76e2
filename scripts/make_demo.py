#!/usr/bin/env python3
"""Writes data/demo_trial.csv: an invented two-arm trial for tunnelcast's demo.

Everything here is made up. "Veltranib" is a fictional drug and "Tessaly syndrome" a
fictional disease; no real trial, publication or course is behind these numbers.

Design (all invented): 300 patients per arm, recruited uniformly over 18 months, data cut
at 42 months after the first patient in (so administrative follow-up is 24 to 42 months),
plus random drop-out at a constant rate of 0.008 per month. Times are in months, rounded
to 0.01 month. True survival:
  - standard care: Weibull, shape 1.25, scale 16 months;
  - veltranib:     log-logistic, shape 1.7, scale 26 months.

Standard library only; the seed fixes the file byte for byte.
    python3 scripts/make_demo.py            # writes data/demo_trial.csv
"""

import math
import pathlib
import random

SEED = 20261202
PER_ARM = 300
RECRUITMENT_MONTHS = 18.0
DATA_CUT_MONTHS = 42.0
DROPOUT_RATE = 0.008  # per month


def weibull_time(u, shape, scale):
    """Inverse of S(t) = exp(-(t/scale)^shape) at S = u."""
    return scale * (-math.log(u)) ** (1.0 / shape)


def loglogistic_time(u, shape, scale):
    """Inverse of S(t) = 1 / (1 + (t/scale)^shape) at S = u."""
    return scale * ((1.0 - u) / u) ** (1.0 / shape)


def main():
    rng = random.Random(SEED)
    arms = [
        ("standard-care", lambda u: weibull_time(u, 1.25, 16.0)),
        ("veltranib", lambda u: loglogistic_time(u, 1.7, 26.0)),
    ]
    rows = []
    for arm, event_time in arms:
        for _ in range(PER_ARM):
            # 1 - random() lies in (0, 1], so logs and ratios stay finite.
            u = 1.0 - rng.random()
            t_event = event_time(u)
            entry = rng.random() * RECRUITMENT_MONTHS
            t_admin = DATA_CUT_MONTHS - entry
            t_drop = -math.log(1.0 - rng.random()) / DROPOUT_RATE
            t = min(t_event, t_admin, t_drop)
            event = 1 if t_event <= min(t_admin, t_drop) else 0
            t = max(round(t, 2), 0.01)
            rows.append(f"{t:.2f},{event},{arm}")
    out = pathlib.Path(__file__).resolve().parent.parent / "data" / "demo_trial.csv"
    out.write_text("time,event,arm\n" + "\n".join(rows) + "\n", encoding="utf-8")
    events = sum(r.split(",")[1] == "1" for r in rows)
    print(f"wrote {out} ({len(rows)} patients, {events} events)")


if __name__ == "__main__":
    main()
