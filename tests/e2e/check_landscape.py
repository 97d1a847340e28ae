#!/usr/bin/env python3
"""Checks the landscape files of a folder that also holds `alloyspec run` results.

N_W(E) is the integral of a non-decreasing function of E, so each landscape
column is non-decreasing; it vanishes below the smallest cell value, since
W >= min q by the maximum principle for (H + shift) u = 1.
"""
import csv
import json
import math
import sys


def main(folder):
    with open(f"{folder}/landscape.csv") as f:
        rows = list(csv.DictReader(f))
    assert rows, "landscape.csv is empty"
    energy = [k for k in rows[0] if k.startswith("energy")][0]
    boundaries = [k[len("landscape_"):] for k in rows[0] if k.startswith("landscape_") and "stderr" not in k]
    assert boundaries, "no landscape column"
    for bc in boundaries:
        values = [float(r[f"landscape_{bc}"]) for r in rows]
        assert all(b >= a for a, b in zip(values, values[1:])), f"landscape_{bc} is not monotone"
        assert values[-1] > 0, f"landscape_{bc} is 0 on the whole grid"
        # run wrote eigenvalues of the same realisations into the folder
        assert f"exact_{bc}" in rows[0], f"no exact_{bc} column although run stored eigenvalues"
        for r in rows:
            if r[f"complete_{bc}"] == "1" and float(r[f"exact_{bc}"]) > 0:
                rel = float(r[f"relative_difference_{bc}"])
                assert math.isfinite(rel), r
    with open(f"{folder}/landscape.json") as f:
        summary = json.load(f)
    for bc in boundaries:
        assert summary["boundaries"][bc]["landscape_seconds"] > 0
    with open(f"{folder}/landscape_eigenvalues.csv") as f:
        estimates = list(csv.DictReader(f))
    assert estimates, "no eigenvalue estimates"
    print(f"{folder}: landscape for {', '.join(boundaries)} on {len(rows)} energies ({energy}): ok")


if __name__ == "__main__":
    main(sys.argv[1])
