#!/usr/bin/env bash
# Studies at different tilts merged by `summarise`: combined by the balance
# heuristic (each realisation weighted by p/Σ_k (n_k/n) p_θk), not refused,
# and the merged folder has the weighted tables and the deep-tail report. The
# estimator itself is checked against an exact expectation in
# tests/unit/analysis/test_mixed_tilts.cc.
# Usage: mixed_tilts.sh EXE WORKDIR CONFIG
set -uo pipefail
exe=$1 work=$2 config=$3
rm -rf "$work"; mkdir -p "$work"
fail() { echo "FAIL: $*"; exit 1; }
args=(--set "lattice/cells=30" --set study/realisations=12 --set "sampling/pilot realisations=8"
      --set "study/energies=0.05 to 0.6 by 0.05" --set "spectrum/energy cutoff=0.8" --no-progress)

"$exe" run "$config" "${args[@]}" --set sampling/method=plain --set study/seed=1 \
  --output "$work/plain" > "$work/plain.log" 2>&1 || fail "plain run: $(cat "$work/plain.log")"
"$exe" run "$config" "${args[@]}" --set sampling/tilt=0.2 --set study/seed=2 \
  --output "$work/tilted" > "$work/tilted.log" 2>&1 || fail "tilted run: $(cat "$work/tilted.log")"
"$exe" summarise "$work/plain" "$work/tilted" --output "$work/merged" > "$work/merged.log" 2>&1 \
  || fail "summarise refused: $(cat "$work/merged.log")"
grep -q "balance heuristic" "$work/merged.log" || fail "no note of the mixture: $(cat "$work/merged.log")"
for f in ids.csv tail.csv deep_tail.json report.html; do
  [ -f "$work/merged/$f" ] || fail "summarise wrote no $f"
done
echo "mixed tilts: summarise combined a plain and a tilted study"
