#!/usr/bin/env bash
# No rank allocates memory of the whole problem's size: on the distributed
# mesh of the iterative solver, a team of 2 ranks holds per rank at most 0.6
# of what 1 rank holds for the same realisation (issue 11), at L = 24 (Q2, one
# element per cell, 117,649 unknowns).
#
# How it is measured: run.json's memory_per_rank.problem_mib is, for the rank
# where it is largest, VmHWM at the end of the solves minus VmHWM when the mesh
# phase began. The baseline holds what every process holds whatever the
# problem (MPI, PETSc, Trilinos and deal.II initialised, the parameters
# parsed), so the difference is the peak of what the run allocated for its
# part of the problem: mesh, DoFs, constraints, the matrices, the multigrid
# hierarchy and the eigen-solver's blocks. Taking the largest rank makes an
# uneven partition count against the test. A perfectly divided problem gives
# 0.5; the 0.1 beyond it is the issue's allowance for ghost layers and
# per-rank overheads.
#
# Kept short: one Dirichlet eigenvalue to a residual of 1e-6 (the matrices and
# the hierarchy, which dominate memory, do not depend on either), and no
# inertia count (its sparse factor is distributed by MUMPS, not by the mesh).
# Usage: distributed_memory.sh EXE WORKDIR
set -uo pipefail
exe=$1 work=$2
rm -rf "$work"; mkdir -p "$work"
fail() { echo "FAIL: $*"; exit 1; }
args=(--set "lattice/cells=24,24,24" --set study/realisations=1 --set spectrum/eigenvalues=1
      --set spectrum/solver=iterative --set "spectrum/boundary conditions=dirichlet"
      --set "spectrum/inertia check limit=0" --set spectrum/tolerance=1e-6
      --set discretisation/degree=2 --set "discretisation/elements per cell=1"
      --set "study/energies=0 to 1 by 0.5" --no-progress)
"$exe" run "${args[@]}" --output "$work/one" > "$work/one.log" 2>&1 || fail "1 rank: $(tail -5 "$work/one.log")"
timeout 300 mpirun --allow-run-as-root --oversubscribe -np 2 "$exe" run "${args[@]}" \
  --ranks-per-realisation 2 --output "$work/two" > "$work/two.log" 2>&1 \
  || fail "a team of 2 ranks: $(tail -5 "$work/two.log")"
python3 - "$work/one/run.json" "$work/two/run.json" <<'PY' || exit 1
import json, sys
one, two = (json.load(open(p)) for p in sys.argv[1:3])
limit = 0.6  # issue 11: per-rank high-water mark on 2 ranks <= 0.6 of the 1-rank figure
for run in (one, two):
    if run["mesh"] != "distributed":
        sys.exit(f"FAIL: the iterative run used the {run['mesh']} mesh")
a, b = one["memory_per_rank"]["problem_mib"], two["memory_per_rank"]["problem_mib"]
ratio = b / a
print(f"per-rank memory of the problem: 1 rank {a:.0f} MiB, team of 2 {b:.0f} MiB per rank, "
      f"ratio {ratio:.3f} (limit {limit})")
if not ratio <= limit:
    sys.exit("FAIL: a rank of the team holds more than its share")
PY
# A residual of 1e-6 leaves an eigenvalue error of order the residual squared
# over the gap (Kato-Temple), about 1e-11 here: 1e-9, as for the other teams.
python3 "$(dirname "$0")/compare_studies.py" "$work/one" "$work/two" 1e-9 \
  || fail "1 rank and a team of 2 disagree"
