#!/usr/bin/env python3
"""Checks one finished study folder: files, headers, residuals, inertia, and the
Dirichlet-Neumann order of the counting functions.

Per realisation, N_D(E) <= N_N(E) at every E: the Dirichlet form domain is a
subspace of the Neumann one (min-max principle; Reed & Simon vol. IV, XIII.15),
and the same inclusion holds for the finite-element spaces on one mesh.
"""
import csv
import json
import os
import math
import sys

import records

# Min-max gives lambda_N,k <= lambda_D,k exactly (the Dirichlet finite-element
# space lies inside the Neumann one); computed eigenvalues carry rounding of
# the order of their residuals (~1e-14 relative). A state deep inside a long
# chain feels neither end, and its two values then differ only by that
# rounding (measured: 8e-17 apart at 0.0126). Common practice, no source.
BRACKET_ROUNDING = 1e-12

RESIDUAL_LIMIT = 1e-8  # the solver's default tolerance is 1e-12; common practice, no source


def check_weighted(folder, summary):
    """Tilted sampling: one log weight per realisation (the same for every boundary
    condition, drawn from the same cell values), and tail.csv with its columns."""
    weights = {}
    for s in summary:
        w = float(s["log_weight"])
        assert math.isfinite(w), s
        weights.setdefault(int(s["realisation"]), set()).add(w)
    assert all(len(v) == 1 for v in weights.values()), "log weights differ between boundaries"
    with open(f"{folder}/tail.csv") as f:
        tail = list(csv.DictReader(f))
    assert tail, "tail.csv is empty"
    with open(f"{folder}/ids.csv") as f:
        ids_rows = list(csv.DictReader(f))
    assert len(ids_rows) == len(tail), "tail.csv and ids.csv have different grids"
    for row, ids_row in zip(tail, ids_rows):
        for bc in ("dirichlet", "neumann"):
            if f"ids_{bc}" in row:
                ids, lo, hi = (float(row[f"{c}_{bc}"]) for c in ("ids", "lower", "upper"))
                # An incomplete entry (an under-count) is written as missing, and only then.
                if ids_row[f"complete_{bc}"] != "1":
                    assert all(math.isnan(x) for x in (ids, lo, hi)), row
                    continue
                assert 0 <= lo <= ids <= hi, row
                assert float(row[f"ess_{bc}"]) >= 0, row
    # deep_tail.json: every boundary has its fits, and "asymptotic" only with no reason against it.
    with open(f"{folder}/deep_tail.json") as f:
        deep = json.load(f)
    for bc, fit in deep["boundaries"].items():
        assert fit["asymptotic"] == (fit["fitted"] and not fit["not_asymptotic_because"]), (bc, fit)
        assert fit["fitted"] or fit["reason"], (bc, fit)
    with open(f"{folder}/run.json") as f:
        run = json.load(f)
    assert run["sampling"]["weights"], "run.json has no effective sample sizes"
    if any(w != {0.0} for w in weights.values()):
        # A tilted study has its own report: tail table, fits, effective sample sizes.
        with open(f"{folder}/report.html", encoding="utf-8") as f:
            html = f.read()
        for text in ("Tail table", "Lifshitz fits on the deep tail", "effective sample size",
                     "importance-weighted"):
            assert text in html, f"report.html of a tilted study lacks '{text}'"
        # Every statistic is weighted, so every table is written.
        for name in ("dos.csv", "ids_band.csv", "localisation.csv", "local_trace.csv", "tails.json"):
            assert os.path.exists(f"{folder}/{name}"), f"a tilted study lacks {name}"


def main(folder):
    with open(f"{folder}/run.json") as f:
        run = json.load(f)
    assert run["realisations_stored"] >= 1, "no realisation stored"
    # Only presence and sign: on a shared machine the CPU time of a phase
    # may lie anywhere below its wall time.
    assert run["cpu_seconds"] > 0, "run.json records no CPU time"
    rows = records.rows(f"{folder}/eigenvalues.csv")
    assert rows, "eigenvalues.csv is empty"
    assert list(rows[0].keys())[:5] == ["realisation", "boundary", "index", "eigenvalue", "residual"]
    spectra = {}
    for r in rows:
        assert float(r["residual"]) < RESIDUAL_LIMIT, f"residual {r['residual']} too large"
        spectra.setdefault((int(r["realisation"]), r["boundary"]), []).append(float(r["eigenvalue"]))
        # Discretisation error bound: nan when not estimated, else positive and
        # (with its safety factor) still far below the eigenvalue itself.
        if "error" in r and r["error"] != "nan":
            assert 0 < float(r["error"]) < max(abs(float(r["eigenvalue"])), 1.0), f"error {r['error']}"
    summary = records.rows(f"{folder}/realisations.csv")
    complete = {}
    for s in summary:
        key = (int(s["realisation"]), s["boundary"])
        # An enclosure-verified list had no inertia count: its count is missing.
        if s.get("verified_by", "inertia") == "enclosure":
            assert s["inertia_count"] == "nan", f"an enclosure list claims a count {key}"
        else:
            assert int(s["inertia_count"]) == len(spectra.get(key, [])), f"inertia mismatch {key}"
        complete[key] = float(s["complete_up_to"])
    for (r, bc), values in spectra.items():
        assert values == sorted(values), "eigenvalues not sorted"
        if bc == "dirichlet" and (r, "neumann") in spectra:
            neumann = spectra[(r, "neumann")]
            top = min(complete[(r, "dirichlet")], complete[(r, "neumann")])
            for e in [v for v in values + neumann if v <= top]:
                nd = sum(1 for v in values if v <= e)
                nn = sum(1 for v in neumann if v <= e + BRACKET_ROUNDING * max(abs(e), 1.0))
                assert nd <= nn, f"realisation {r}: N_D({e}) = {nd} > N_N = {nn}"
    with open(f"{folder}/ids.csv") as f:
        ids = list(csv.DictReader(f))
    assert ids, "ids.csv is empty"
    for row in ids:
        if "ids_dirichlet" in row and "ids_neumann" in row:
            if row["complete_dirichlet"] == "1" and row["complete_neumann"] == "1":
                assert float(row["ids_dirichlet"]) <= float(row["ids_neumann"]) + 1e-15, row
    if "log_weight" in summary[0]:
        check_weighted(folder, summary)
    print(f"{folder}: {len(rows)} eigenvalues, {len(summary)} solves, {len(ids)} IDS rows: ok")


if __name__ == "__main__":
    main(sys.argv[1])
