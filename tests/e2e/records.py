"""Reading a study's stored records in the e2e checks: the energy columns are
named with their unit (`eigenvalue_reduced`, ...); folders of earlier versions
name them without it. rows() returns dicts keyed by the plain names either way.
"""
import csv

RECORD_ENERGIES = ("eigenvalue", "error", "complete_up_to", "potential_min", "potential_max")


def plain(row):
    return {(k[: -len("_reduced")] if k.endswith("_reduced") and k[: -len("_reduced")] in RECORD_ENERGIES
             else k): v for k, v in row.items()}


def rows(path):
    with open(path) as f:
        return [plain(r) for r in csv.DictReader(f)]
