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

Also writes data/demo_payoffs.csv, an invented payoff schedule for the demo's modelled arm
(payoffs by time since entry, all amounts in an invented currency): a front-loaded treatment
cost (induction months, then maintenance, then follow-up care), a one-off work-up cost on entry,
an end-of-life cost on exit, and a utility that improves after the first months. The amounts
are drawn around invented centres from a second seeded stream and rounded, so they look like
figures a modeller would type in; they describe no real drug, price or population.

Standard library only; the seeds fix both files byte for byte.
    python3 scripts/make_demo.py            # writes data/demo_trial.csv, data/demo_payoffs.csv
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


PAYOFF_SEED = SEED + 1


def make_payoffs():
    """The invented payoff schedule (see the module docstring), from its own seeded stream."""
    rng = random.Random(PAYOFF_SEED)

    def around(centre, spread, step):
        return round(centre * (1.0 + spread * (2.0 * rng.random() - 1.0)) / step) * step

    induction = around(4200, 0.1, 50)      # a month, first 4 months
    maintenance = around(900, 0.1, 10)     # a month, to 2 years
    follow_up = around(140, 0.1, 5)        # a month, after 2 years
    work_up = around(2600, 0.1, 50)        # once, on entry
    end_of_life = around(7500, 0.1, 100)   # once, on exit
    early_utility = round(0.58 + 0.04 * (2.0 * rng.random() - 1.0), 2)   # a year, 3 months
    later_utility = round(0.78 + 0.04 * (2.0 * rng.random() - 1.0), 2)   # a year, after
    rows = [
        ("treatment_cost", "rate", "0", induction, "1 month"),
        ("treatment_cost", "rate", "4 months", maintenance, "1 month"),
        ("treatment_cost", "rate", "2 years", follow_up, "1 month"),
        ("treatment_cost", "at_entry", "", work_up, ""),
        ("treatment_cost", "at_exit", "", end_of_life, ""),
        ("utility", "rate", "0", early_utility, "1 year"),
        ("utility", "rate", "3 months", later_utility, "1 year"),
    ]
    lines = ["payoff,kind,from,amount,per"]
    for name, kind, start, amount, per in rows:
        text = f"{amount:g}" if isinstance(amount, float) else str(amount)
        lines.append(f"{name},{kind},{start},{text},{per}")
    out = pathlib.Path(__file__).resolve().parent.parent / "data" / "demo_payoffs.csv"
    out.write_text("\n".join(lines) + "\n", encoding="utf-8")
    print(f"wrote {out} ({len(rows)} pieces)")


if __name__ == "__main__":
    main()
    make_payoffs()
