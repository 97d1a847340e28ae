#!/usr/bin/env bash
# The landscape on the distributed mesh: 1 and 2 ranks (each realisation
# solved by both, each holding its part of the mesh) give the same
# landscape.csv and landscape_eigenvalues.csv. Usage: landscape_ranks.sh EXE CONFIG WORKDIR
set -uo pipefail
exe=$1 config=$2 work=$3
rm -rf "$work"; mkdir -p "$work"
fail() { echo "FAIL: $*"; exit 1; }
args=(--set "lattice/cells=6,6,6" --set study/realisations=2 --set "discretisation/elements per cell=1"
      --set landscape/tolerance=1e-12 --no-progress)
"$exe" landscape "$config" "${args[@]}" --output "$work/one" > "$work/one.log" 2>&1 \
  || fail "1 rank: $(cat "$work/one.log")"
timeout 300 mpirun --allow-run-as-root --oversubscribe -np 2 "$exe" landscape "$config" "${args[@]}" \
  --output "$work/two" > "$work/two.log" 2>&1 || fail "2 ranks: $(cat "$work/two.log")"
# Two CG solves to 1e-12 differ by about the condition number (~1e3) times
# that: 1e-8 relative (common practice, no source).
python3 - "$work/one" "$work/two" <<'PY' || exit 1
import csv, math, sys
for name in ("landscape.csv", "landscape_eigenvalues.csv"):
    a, b = (list(csv.DictReader(open(f"{d}/{name}"))) for d in sys.argv[1:3])
    if len(a) != len(b) or not a or list(a[0]) != list(b[0]):
        sys.exit(f"FAIL: {name} differs in shape: {len(a)} against {len(b)} rows")
    for ra, rb in zip(a, b):
        for c in ra:
            try:
                x, y = float(ra[c]), float(rb[c])
            except ValueError:
                if ra[c] != rb[c]:
                    sys.exit(f"FAIL: {name} column {c}: {ra[c]} against {rb[c]}")
                continue
            if not (x == y or (math.isnan(x) and math.isnan(y)) or abs(x - y) <= 1e-8 * max(abs(x), abs(y), 1e-300)):
                sys.exit(f"FAIL: {name} column {c}: {x} (1 rank) against {y} (2 ranks)")
    print(f"{name}: {len(a)} rows agree")
PY
