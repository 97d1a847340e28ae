#!/usr/bin/env bash
# A `count` example of configs/ at reduced size: it must finish, write its
# tables, and (with the roulette) record a table whose solved and unsolved
# realisations add up to the study's, with every unsolved row empty in
# counts.csv. Usage: count_and_check.sh EXE WORKDIR NAME CONFIG [--set ...]
set -euo pipefail
exe=$1 work=$2 name=$3 config=$4
shift 4
out="$work/$name"
rm -rf "$out"
"$exe" count "$config" --no-progress "$@" --output "$out" > "$out.log" 2>&1
for f in counts.csv ids.csv tail.csv run.json as_run.prm; do
  [ -s "$out/$f" ] || { echo "missing $out/$f"; exit 1; }
done
python3 - "$out" <<'PY'
import csv, json, sys
out = sys.argv[1]
with open(f"{out}/run.json") as f:
    manifest = json.load(f)
table = manifest["sampling"]["roulette"]
with open(f"{out}/counts.csv") as f:
    rows = list(csv.DictReader(f))
failures = []
if table != "off":
    if table["solved"] + table["not_solved"] != manifest["realisations"]:
        failures.append(f"solved + not solved != realisations: {table}")
    unsolved = {r["realisation"] for r in rows if r["count"] == ""}
    if len(unsolved) != table["not_solved"]:
        failures.append(f"{len(unsolved)} realisations without a count, run.json says {table['not_solved']}")
    for r in rows:
        s = float(r["survival"])
        if not 0 < s <= 1 or (int(r["realisation"]) < table["pilot_realisations"] and (s != 1 or r["count"] == "")):
            failures.append(f"row {r}: survival or pilot count wrong"); break
with open(f"{out}/ids.csv") as f:
    ids = list(csv.DictReader(f))
if not ids or any(float(r["ids_dirichlet"]) < 0 for r in ids):
    failures.append("ids.csv empty or negative")
print(f"{out}: roulette {table if table == 'off' else {k: table[k] for k in ('solved', 'not_solved', 'survival')}}")
if failures:
    print("\n".join(failures)); sys.exit(1)
PY
