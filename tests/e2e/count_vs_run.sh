#!/usr/bin/env bash
# `alloyspec count` against `alloyspec run` on the same small study, also with
# 2 MPI ranks when mpirun is given. Usage: count_vs_run.sh EXE WORKDIR [MPIRUN]
set -euo pipefail
exe=$1 work=$2 mpirun=${3:-}
here=$(dirname "$0")
rm -rf "$work"; mkdir -p "$work"
args=(--set "lattice/cells=3,3,3" --set study/realisations=3 --set spectrum/eigenvalues=30
      --set "study/energies=0 to 4 by 0.13" --set "spectrum/boundary conditions=dirichlet,neumann,periodic")
"$exe" run "${args[@]}" --no-progress --output "$work/run" > "$work/run.log"
"$exe" count "${args[@]}" --no-progress --output "$work/count" > "$work/count.log"
python3 "$here/count_vs_run.py" "$work/run" "$work/count"
grep -q '"memory_high_water_mib"' "$work/count/run.json"
if [ -n "$mpirun" ]; then
  timeout 300 "$mpirun" --allow-run-as-root --oversubscribe -np 2 \
    "$exe" count "${args[@]}" --no-progress --output "$work/count2" > "$work/count2.log"
  python3 "$here/count_vs_run.py" "$work/run" "$work/count2"
fi
