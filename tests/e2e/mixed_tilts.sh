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
# Tilt windows: two windowed studies at different θ, and a windowed with a plain
# one, are combined (each component is its study's own law); a resume with
# another window is refused.
w=(--set "lattice/cells=30" --set study/realisations=8 --set "study/energies=0.05 to 0.6 by 0.05"
   --set "spectrum/energy cutoff=0.8" --set sampling/method=tilted --set "sampling/tilt window=10"
   --set "analysis/figure formats=" --no-progress)
"$exe" run "$config" "${w[@]}" --set sampling/tilt=0.5 --set study/seed=3 --output "$work/window_a" \
  > "$work/window_a.log" 2>&1 || fail "windowed run: $(cat "$work/window_a.log")"
"$exe" run "$config" "${w[@]}" --set sampling/tilt=1.0 --set study/seed=4 --output "$work/window_b" \
  > "$work/window_b.log" 2>&1 || fail "windowed run: $(cat "$work/window_b.log")"
"$exe" summarise "$work/window_a" "$work/window_b" --output "$work/window_merged" \
  > "$work/window_merged.log" 2>&1 || fail "windowed studies not combined: $(cat "$work/window_merged.log")"
"$exe" summarise "$work/window_a" "$work/plain" --output "$work/window_plain" > "$work/wp.log" 2>&1 \
  || fail "windowed + plain not combined: $(cat "$work/wp.log")"
grep -q "balance heuristic" "$work/wp.log" || fail "no note of the mixture: $(cat "$work/wp.log")"
"$exe" run "$config" "${w[@]}" --set sampling/tilt=0.5 --set study/seed=3 --set "sampling/tilt window=12" \
  --output "$work/window_a" --resume > "$work/wr.log" 2>&1
[ $? -eq 2 ] && grep -q "tilt window" "$work/wr.log" || fail "resume with another window not refused: $(cat "$work/wr.log")"
echo "mixed tilts: summarise combined a plain and a tilted study, two windowed ones, a windowed and a plain one"
