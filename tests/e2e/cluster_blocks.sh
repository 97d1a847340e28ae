#!/usr/bin/env bash
# Jobs of a cluster run disjoint blocks of realisations (study/first
# realisation) and `summarise` merges their folders into one sample. Two
# blocks on the distributed mesh of the iterative solver, one on a single
# rank and one on a team of 2 ranks, merged, give the same ids.csv as one run
# of all four realisations (every number depends on (seed, realisation, cell)
# only), and a block that overlaps another is refused with status 2.
# Usage: cluster_blocks.sh EXE WORKDIR
set -uo pipefail
exe=$1 work=$2
rm -rf "$work"; mkdir -p "$work"
fail() { echo "FAIL: $*"; exit 1; }
args=(--set "lattice/cells=4,4,4" --set spectrum/eigenvalues=10 --set spectrum/solver=iterative
      --set discretisation/degree=2 --set "discretisation/elements per cell=1"
      --set "study/energies=0 to 4 by 0.25" --no-progress)
"$exe" run "${args[@]}" --set study/realisations=4 --output "$work/all" > "$work/all.log" 2>&1 \
  || fail "one run of 4: $(cat "$work/all.log")"
"$exe" run "${args[@]}" --set study/realisations=2 --output "$work/block_0" > "$work/b0.log" 2>&1 \
  || fail "block 0: $(cat "$work/b0.log")"
timeout 300 mpirun --allow-run-as-root --oversubscribe -np 2 "$exe" run "${args[@]}" \
  --set study/realisations=2 --set "study/first realisation=2" --ranks-per-realisation 2 \
  --output "$work/block_2" > "$work/b2.log" 2>&1 || fail "block 2 on a team of 2: $(cat "$work/b2.log")"
grep -q '"mesh": "distributed"' "$work/block_2/run.json" || fail "block 2 did not use the distributed mesh"
"$exe" summarise "$work/block_0" "$work/block_2" --output "$work/merged" > "$work/merged.log" 2>&1 \
  || fail "summarise refused the blocks: $(cat "$work/merged.log")"
# The merge sums the same counts in another order: 1e-9, the tolerance of
# the iterative solver (common practice, no source).
python3 - "$work/all/ids.csv" "$work/merged/ids.csv" <<'PY' || exit 1
import csv, math, sys
a, b = (list(csv.DictReader(open(p))) for p in sys.argv[1:3])
if len(a) != len(b) or list(a[0]) != list(b[0]):
    sys.exit("FAIL: ids.csv of the merge has another shape")
for ra, rb in zip(a, b):
    for c in ra:
        x, y = float(ra[c]), float(rb[c])
        if not (x == y or (math.isnan(x) and math.isnan(y)) or abs(x - y) <= 1e-9 * max(abs(x), abs(y))):
            sys.exit(f"FAIL: ids.csv column {c}: {x} (one run) vs {y} (merged blocks)")
print(f"merged blocks agree with one run: {len(a)} rows of ids.csv")
PY
# Overlapping blocks are not a sample of distinct realisations.
"$exe" run "${args[@]}" --set study/realisations=2 --set "study/first realisation=1" \
  --output "$work/block_1" > "$work/b1.log" 2>&1 || fail "block 1: $(cat "$work/b1.log")"
"$exe" summarise "$work/block_0" "$work/block_1" --output "$work/overlap" > "$work/overlap.log" 2>&1
status=$?
[ "$status" -eq 2 ] || fail "overlapping blocks gave status $status, expected 2: $(cat "$work/overlap.log")"
