#!/usr/bin/env python3
"""`count` (inertia counts, no eigenvectors) against `run` (verified eigenvalues)
of the same study. Sylvester's law of inertia makes the number of negative
pivots of K - E M the number of eigenvalues below E, so wherever the run's list
is complete (E <= complete_up_to) and E is not within rounding of an
eigenvalue, the count must equal #{lambda_j <= E} exactly, and ids.csv and
tail.csv must agree there. The log-likelihood ratio of each realisation
(tilted sampling) must be the run's exactly: both draw the same cells. Usage: count_vs_run.py RUN_FOLDER COUNT_FOLDER
"""
import csv
import json
import math
import sys

import records

# An energy this close to an eigenvalue may be counted on either side by a
# rounding error in the factorisation (common practice, no source).
NEAR_EIGENVALUE = 1e-8
IDS_TOLERANCE = 1e-12  # same integers averaged in the same order; common practice, no source


def energy_column(columns):
    """The grid's column: 'energy', or 'energy_<unit>' in physical units."""
    return next(c for c in columns if c.startswith("energy") and c != "energy_reduced")


def main(run, count):
    # The stored records are in the solver's unit; the tables in the user's.
    with open(f"{run}/run.json") as f:
        to_user = json.load(f)["units"]["records_energy_unit_in_user_unit"]
    spectra, complete = {}, {}
    for r in records.rows(f"{run}/eigenvalues.csv"):
        spectra.setdefault((int(r["realisation"]), r["boundary"]), []).append(
            to_user * float(r["eigenvalue"]))
    log_weight = {}
    for r in records.rows(f"{run}/realisations.csv"):
        complete[(int(r["realisation"]), r["boundary"])] = to_user * float(r["complete_up_to"])
        log_weight[(int(r["realisation"]), r["boundary"])] = float(r["log_weight"])
    checked = skipped = largest = 0
    failures = []
    with open(f"{count}/counts.csv") as f:
        reader = csv.DictReader(f)
        column = energy_column(reader.fieldnames)
        for r in reader:
            key = (int(r["realisation"]), r["boundary"])
            e, n = float(r[column]), int(r["count"])
            # The same draw gives the same likelihood ratio, to the last bit.
            if float(r["log_weight"]) != log_weight[key]:
                failures.append(f"{key}: log_weight {r['log_weight']} in counts.csv, {log_weight[key]} in run")
            values = spectra.get(key, [])  # band-edge mode: none below the cutoff
            if e > complete[key] or any(abs(v - e) <= NEAR_EIGENVALUE * max(1.0, abs(e)) for v in values):
                skipped += 1
                continue
            expected = sum(1 for v in values if v <= e)
            checked += 1
            largest = max(largest, expected)
            if n != expected:
                failures.append(f"{key} at E={e}: count {n}, eigenvalues below: {expected}")
    assert checked >= 20, f"only {checked} energies could be checked"
    assert largest >= 5, f"at most {largest} eigenvalues lie below the grid: nothing was compared"
    with open(f"{run}/ids.csv") as f:
        ids_run = list(csv.DictReader(f))
    with open(f"{count}/ids.csv") as f:
        ids_count = list(csv.DictReader(f))
    assert list(ids_run[0].keys()) == list(ids_count[0].keys()), "ids.csv columns differ"
    for a, b in zip(ids_run, ids_count):
        flags = [c for c in a if c.startswith("complete_")]
        if not all(a[c] == "1" for c in flags):
            continue
        for column in a:
            x, y = float(a[column]), float(b[column])
            if not (x == y or abs(x - y) <= IDS_TOLERANCE * max(abs(x), abs(y))):
                failures.append(f"ids.csv at E={a[energy_column(a)]}, {column}: run {x}, count {y}")
    # tail.csv: the same weighted estimates and intervals wherever the run's row is complete.
    with open(f"{run}/tail.csv") as f:
        tail_run = list(csv.DictReader(f))
    with open(f"{count}/tail.csv") as f:
        tail_count = list(csv.DictReader(f))
    assert list(tail_run[0].keys()) == list(tail_count[0].keys()), "tail.csv columns differ"
    compared = 0
    for a, b in zip(tail_run, tail_count):
        for column in a:
            x, y = float(a[column]), float(b[column])
            if math.isnan(x):  # incomplete in the run (above its verified range), or ln 0
                continue
            compared += 1
            if not (x == y or abs(x - y) <= IDS_TOLERANCE * max(abs(x), abs(y))):
                failures.append(f"tail.csv at E={a[energy_column(a)]}, {column}: run {x}, count {y}")
    assert compared >= 20, f"only {compared} tail.csv values could be compared"
    for line in failures[:20]:
        print("MISMATCH:", line)
    if failures:
        sys.exit(1)
    print(f"count agrees with run at {checked} (realisation, boundary, energy) points; {skipped} skipped")


if __name__ == "__main__":
    main(sys.argv[1], sys.argv[2])
