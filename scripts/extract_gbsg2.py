#!/usr/bin/env python3
"""Extracts the GBSG2 breast-cancer data set for the rebuild round-trip test.

Source of the data: the German Breast Cancer Study Group 2 trial (Schumacher et al., Journal of
Clinical Oncology, 1994), 686 women, recurrence-free survival in days, as shipped in the data
files of the PyPI package `lifelines` (version pinned below). Only the data file is used, never
the package's code. Standard library plus pip: the wheel is downloaded without dependencies
and the CSV read straight out of it.

Usage: python3 scripts/extract_gbsg2.py   (writes tests/reference/gbsg2.csv: time,event,arm)
"""

import csv
import glob
import io
import os
import subprocess
import sys
import tempfile
import zipfile

VERSION = "0.30.3"


def main():
    here = os.path.dirname(os.path.abspath(__file__))
    target = os.path.join(here, "..", "tests", "reference", "gbsg2.csv")
    with tempfile.TemporaryDirectory() as tmp:
        subprocess.run(
            [sys.executable, "-m", "pip", "download", f"lifelines=={VERSION}",
             "--no-deps", "--only-binary=:all:", "-d", tmp, "-q"],
            check=True,
        )
        wheel = glob.glob(os.path.join(tmp, "lifelines-*.whl"))[0]
        raw = zipfile.ZipFile(wheel).read("lifelines/datasets/gbsg2.csv").decode("utf-8")
    rows = list(csv.DictReader(io.StringIO(raw)))
    with open(target, "w", newline="\n") as f:
        f.write("time,event,arm\n")
        for r in rows:
            # horTh: hormonal therapy yes/no, the trial's randomised comparison; cens: 1 = event.
            f.write(f"{int(r['time'])},{int(r['cens'])},{r['horTh']}\n")
    print(f"wrote {len(rows)} rows to {target}")


if __name__ == "__main__":
    main()
