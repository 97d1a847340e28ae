#!/usr/bin/env python3
"""Assertions on the folders made by report_checks.sh (the README's tasks, run small).

- A three-size series gives, at every energy and boundary condition, either a
  fitted N_infinity or a stated reason in extrapolation.json.
- An eV study with the default (automatic) widths has every DOS curve: each
  Lorentzian and Gaussian column has values somewhere.
- A fixed potential from a file gets the eigenvalue table in its report, with
  the error bound said to be absolute and a Richardson-extrapolated value.
- Every CSV file loads with numpy.genfromtxt, with 'nan' the one missing
  marker (README, "Output files"): no empty field, no other text in a numeric
  column, and the same number of fields on every line.
Usage: check_outputs.py WORKDIR
"""
import glob
import json
import math
import os
import sys

import numpy

# Columns that hold words, not numbers (the boundary of a record, how its list was checked).
TEXT_COLUMNS = {"boundary", "verified_by"}


def check_csv(path):
    with open(path) as f:
        header = f.readline().strip().split(",")
        for number, line in enumerate(f, start=2):
            cells = line.rstrip("\n").split(",")
            assert len(cells) == len(header), f"{path}:{number}: {len(cells)} fields, header has {len(header)}"
            for name, cell in zip(header, cells):
                assert cell != "", f"{path}:{number}: empty field in column {name} (missing is 'nan')"
                if name in TEXT_COLUMNS:
                    continue
                try:
                    float(cell)
                except ValueError:
                    raise AssertionError(f"{path}:{number}: column {name} holds {cell!r}, not a number")
    table = numpy.genfromtxt(path, delimiter=",", names=True, dtype=float, encoding="utf-8",
                             missing_values="nan", filling_values=numpy.nan)
    assert table.size >= 1, f"{path}: no rows"
    return table


def check_series(work):
    folder = f"{work}/series"
    table = check_csv(f"{folder}/extrapolation.csv")
    with open(f"{folder}/extrapolation.json") as f:
        info = json.load(f)
    assert info["minimum_sizes_for_fit"] == 3, info["minimum_sizes_for_fit"]
    assert len(info["sizes"]) == 3, info["sizes"]
    reasons = {round(entry["energy"], 12): entry for entry in info["skipped_or_flagged"]}
    energy = table[table.dtype.names[0]]
    fitted = 0
    for i, e in enumerate(energy):
        for bc in ("dirichlet", "neumann"):
            n_inf = table[f"n_infinity_{bc}"][i]
            consistent = table[f"consistent_{bc}"][i]
            entry = reasons.get(round(float(e), 12), {})
            if math.isnan(n_inf):
                assert bc in entry and entry[bc], f"E = {e}, {bc}: no fit and no reason"
            else:
                fitted += 1
                if consistent == 0:
                    assert "inconsistent" in entry.get(bc, ""), f"E = {e}, {bc}: flagged without reason"
    assert fitted > 0, "the three-size series gave no fit at any energy"
    for name in ("ids_by_size.csv", "bracket_width.csv"):
        check_csv(f"{folder}/{name}")
    print(f"series: {fitted} fits over {len(energy)} energies, every other one with its reason")


def check_default_widths(work):
    folder = f"{work}/alloy_L5"
    table = check_csv(f"{folder}/dos.csv")
    for bc in ("dirichlet", "neumann"):
        for kernel in ("lorentzian", "gaussian"):
            column = table[f"{kernel}_{bc}"]
            assert numpy.isfinite(column).any(), f"{kernel} DOS of {bc} missing everywhere"
    with open(f"{folder}/key_numbers.json") as f:
        key = json.load(f)
    assert 3 <= len(key["summary"]) <= 6, key["summary"]
    print("eV study: every DOS curve present with the automatic widths")


def check_file_potential(work):
    folder = f"{work}/file"
    with open(f"{folder}/report.html", encoding="utf-8") as f:
        html = f.read()
    assert "Eigenvalues of the fixed potential" in html, "no eigenvalue table for a fixed potential"
    assert "error bound (absolute)" in html and "Richardson-extrapolated" in html
    assert "Lifshitz slope" not in html, "a fixed potential's report shows tail fits"
    print("file potential: eigenvalue table with absolute error bounds and extrapolated values")


def main(work):
    check_series(work)
    check_default_widths(work)
    check_file_potential(work)
    files = [p for p in glob.glob(f"{work}/**/*.csv", recursive=True)]
    for path in files:
        check_csv(path)
    print(f"{len(files)} CSV files load with numpy.genfromtxt, missing values written nan")


if __name__ == "__main__":
    main(sys.argv[1])
