#!/usr/bin/env python3
"""Compares two study folders of the same model that were computed differently
(interrupted and resumed, or with another number of MPI ranks).

Every number depends only on (seed, realisation, cell), so the eigenvalue
records, keyed by (realisation, boundary, index), and every numeric column of
ids.csv must agree to a relative tolerance; the order of the records in the
files may differ. Usage: compare_studies.py A B [relative tolerance]
"""
import csv
import math
import sys

import records

# Same arithmetic on the same inputs; only the order of summation in ids.csv
# may differ (common practice, no source).
DEFAULT_TOLERANCE = 1e-12
# Per-row columns that measure the run, not the model.
IGNORED = {"solve_seconds", "residual", "error"}


def close(a, b, tolerance):
    if math.isnan(a) and math.isnan(b):
        return True
    return abs(a - b) <= tolerance * max(abs(a), abs(b), 1e-300) or a == b


def eigenvalue_records(folder):
    rows = records.rows(f"{folder}/eigenvalues.csv")
    found = {}
    for r in rows:
        key = (int(r["realisation"]), r["boundary"], int(r["index"]))
        # A record written twice (torn, then rewritten on resume) must agree with itself.
        found[key] = float(r["eigenvalue"])
    with open(f"{folder}/realisations.csv") as f:
        stored = {(int(r["realisation"]), r["boundary"]): int(r["n_eigenvalues"])
                  for r in csv.DictReader(f)}
    # Keep the eigenvalues of complete records only (the reader's rule).
    return {k: v for k, v in found.items() if (k[0], k[1]) in stored and k[2] < stored[(k[0], k[1])]}


def main(a, b, tolerance):
    failures = []
    ea, eb = eigenvalue_records(a), eigenvalue_records(b)
    if sorted(ea) != sorted(eb):
        failures.append(f"different eigenvalue records: {len(ea)} in {a}, {len(eb)} in {b}; "
                        f"only in A: {sorted(set(ea) - set(eb))[:5]}, only in B: {sorted(set(eb) - set(ea))[:5]}")
    else:
        for k in sorted(ea):
            if not close(ea[k], eb[k], tolerance):
                failures.append(f"eigenvalue {k}: {ea[k]!r} vs {eb[k]!r}")
    with open(f"{a}/ids.csv") as f:
        ia = list(csv.DictReader(f))
    with open(f"{b}/ids.csv") as f:
        ib = list(csv.DictReader(f))
    if not ia or len(ia) != len(ib) or list(ia[0].keys()) != list(ib[0].keys()):
        failures.append("ids.csv: different shape or columns")
    else:
        for ra, rb in zip(ia, ib):
            for column in ra:
                if column in IGNORED:
                    continue
                if not close(float(ra[column]), float(rb[column]), tolerance):
                    failures.append(f"ids.csv at energy {ra['energy']}, {column}: {ra[column]} vs {rb[column]}")
    for line in failures[:20]:
        print("MISMATCH:", line)
    if failures:
        sys.exit(1)
    print(f"{len(ea)} eigenvalues and {len(ia)} rows of ids.csv agree to {tolerance:g} relative")


if __name__ == "__main__":
    main(sys.argv[1], sys.argv[2], float(sys.argv[3]) if len(sys.argv) > 3 else DEFAULT_TOLERANCE)
