#!/usr/bin/env bash
# The same study with 1 and 2 MPI ranks must give the same eigenvalues and
# ids.csv (every number depends on (seed, realisation, cell) only), print the
# parameters once, and an error on one rank must end every rank with a message
# and exit status 2 instead of hanging. Usage: mpi_ranks.sh EXE WORKDIR
set -uo pipefail
exe=$1 work=$2
here=$(dirname "$0")
rm -rf "$work"; mkdir -p "$work"
mpi=(mpirun --allow-run-as-root --oversubscribe -np 2)
# 5 realisations: the last round leaves rank 1 idle, the case most likely to hang.
args=(--set "lattice/cells=3,3,3" --set study/realisations=5 --set spectrum/eigenvalues=15
      --set "study/energies=0 to 4 by 0.1" --no-progress)
fail() { echo "FAIL: $*"; exit 1; }

"$exe" run "${args[@]}" --output "$work/one" > "$work/one.log" 2>&1 \
  || fail "1 rank: $(cat "$work/one.log")"
timeout 300 "${mpi[@]}" "$exe" run "${args[@]}" --output "$work/two" > "$work/two.log" 2>&1 \
  || fail "2 ranks: $(cat "$work/two.log")"
grep -q "2 MPI rank" "$work/two.log" || fail "2-rank run does not report 2 ranks"
[ "$(grep -c "differ from the defaults" "$work/two.log")" -eq 1 ] \
  || fail "the parameters were printed more than once with 2 ranks"
python3 "$here/check_study.py" "$work/two" || fail "2-rank study does not pass check_study.py"
python3 "$here/compare_studies.py" "$work/one" "$work/two" || fail "1 and 2 ranks differ"

# Both ranks on each realisation (distributed factorisation and Krylov
# iteration): the same eigenvalues as one rank. A box large enough for the
# block solver (4913 unknowns) and one small enough for the single-vector path.
for cells in 4,4,4 3,3,3; do
  team=(--set "lattice/cells=$cells" --set study/realisations=2 --set spectrum/eigenvalues=30
        --set "study/energies=0 to 4 by 0.1" --no-progress)
  "$exe" run "${team[@]}" --output "$work/team_one_$cells" > "$work/team_one.log" 2>&1 \
    || fail "1 rank ($cells): $(cat "$work/team_one.log")"
  timeout 300 "${mpi[@]}" "$exe" run "${team[@]}" --ranks-per-realisation 2 \
    --output "$work/team_two_$cells" > "$work/team_two.log" 2>&1 \
    || fail "a team of 2 ranks ($cells): $(cat "$work/team_two.log")"
  grep -q '"ranks_per_realisation": 2' "$work/team_two_$cells/run.json" \
    || fail "run.json does not record the team size"
  python3 "$here/check_study.py" "$work/team_two_$cells" || fail "team study does not pass check_study.py"
  # Distributed sums change the rounding, not the converged numbers
  # (tolerance 1e-10: the solver's 1e-12 with room; common practice, no source).
  python3 "$here/compare_studies.py" "$work/team_one_$cells" "$work/team_two_$cells" 1e-10 \
    || fail "a team of 2 ranks differs from 1 rank ($cells)"
done
# The iterative solver on the distributed mesh (each rank of a team holds its
# part of the mesh, of K and M, and draws its own cells): teams of 1, 2 and 3
# ranks give the same eigenvalues to 1e-9 relative (the tolerance the
# iterative solver is held to against the direct path), and so does the
# direct path on the serial mesh of one rank. Dirichlet and Neumann faces,
# and a periodic slab.
for geometry in box slab; do
  it=(--set "lattice/cells=4,4,4" --set study/realisations=1 --set spectrum/eigenvalues=10
      --set spectrum/solver=iterative --set discretisation/degree=2
      --set "discretisation/elements per cell=1" --set "study/energies=0 to 4 by 0.5" --no-progress)
  [ "$geometry" = slab ] && it+=(--set "lattice/cells=6,6,3" --set "spectrum/periodic directions=x,y")
  "$exe" run "${it[@]}" --output "$work/it_1" > "$work/it_1.log" 2>&1 || fail "iterative, 1 rank: $(cat "$work/it_1.log")"
  grep -q '"dirichlet": "iterative"' "$work/it_1/run.json" || fail "run.json does not record the iterative solver"
  grep -q '"mesh": "distributed"' "$work/it_1/run.json" || fail "the iterative run did not use the distributed mesh"
  "$exe" run "${it[@]}" --set spectrum/solver=tuned --output "$work/it_direct" > "$work/it_direct.log" 2>&1 \
    || fail "direct, 1 rank: $(cat "$work/it_direct.log")"
  grep -q '"mesh": "serial"' "$work/it_direct/run.json" || fail "the direct run did not use the serial mesh"
  python3 "$here/compare_studies.py" "$work/it_direct" "$work/it_1" 1e-9 \
    || fail "iterative on the distributed mesh differs from direct on the serial mesh ($geometry)"
  for n in 2 3; do
    timeout 300 mpirun --allow-run-as-root --oversubscribe -np $n "$exe" run "${it[@]}" \
      --ranks-per-realisation $n --output "$work/it_$n" > "$work/it_$n.log" 2>&1 \
      || fail "iterative, a team of $n ranks: $(cat "$work/it_$n.log")"
    grep -q '"mesh": "distributed"' "$work/it_$n/run.json" || fail "a team of $n did not use the distributed mesh"
    python3 "$here/check_study.py" "$work/it_$n" || fail "iterative team of $n does not pass check_study.py"
    python3 "$here/compare_studies.py" "$work/it_1" "$work/it_$n" 1e-9 \
      || fail "iterative: a team of $n ranks differs from 1 rank ($geometry)"
  done
  rm -rf "$work"/it_1 "$work"/it_2 "$work"/it_3 "$work"/it_direct
done
it=(--set "lattice/cells=4,4,4" --set study/realisations=1 --set spectrum/eigenvalues=10
    --set spectrum/solver=iterative --set discretisation/degree=2
    --set "discretisation/elements per cell=1" --set "study/energies=0 to 4 by 0.5" --no-progress)
# An error inside the iterative solve on a team of 3 (a cutoff needs an
# inertia count, and the limit forbids it) ends every rank with status 2.
timeout 120 mpirun --allow-run-as-root --oversubscribe -np 3 "$exe" run "${it[@]}" --ranks-per-realisation 3 \
  --set "spectrum/energy cutoff=3" --set "spectrum/inertia check limit=0" \
  --output "$work/it_error" > "$work/it_error.log" 2>&1
status=$?
[ "$status" -eq 124 ] && fail "an error in the iterative solve left ranks hanging"
[ "$status" -eq 2 ] && grep -q "more than 'spectrum/inertia check limit'" "$work/it_error.log" \
  || fail "an error in the iterative solve gave status $status: $(cat "$work/it_error.log")"

# A team size that does not divide the ranks is bad input, refused before anything is written.
timeout 120 "${mpi[@]}" "$exe" run "${args[@]}" --ranks-per-realisation 3 \
  --output "$work/bad_team" > "$work/bad_team.log" 2>&1
status=$?
[ "$status" -eq 2 ] || fail "--ranks-per-realisation 3 on 2 ranks gave status $status, expected 2"
grep -q "ranks-per-realisation" "$work/bad_team.log" || fail "no message naming the option"
[ -e "$work/bad_team" ] && fail "a refused run created its output folder"

# An input error raised inside the solve on rank 0 only (one realisation, so
# rank 1 has nothing to solve and waits for rank 0).
timeout 120 "${mpi[@]}" "$exe" run "${args[@]}" --set study/realisations=1 \
  --set "spectrum/energy cutoff=50" --set "spectrum/maximum eigenvalues=3" \
  --output "$work/error" > "$work/error.log" 2>&1
status=$?
[ "$status" -eq 124 ] && fail "an error on one rank left the other hanging"
[ "$status" -eq 2 ] || fail "an error on one rank gave status $status, expected 2: $(cat "$work/error.log")"
grep -q "maximum eigenvalues" "$work/error.log" || fail "no message naming the parameter: $(cat "$work/error.log")"

# A refusal on rank 0 before solving (resume with other parameters).
timeout 120 "${mpi[@]}" "$exe" run "${args[@]}" --set "lattice/cells=4,3,3" --resume \
  --output "$work/two" > "$work/refuse.log" 2>&1
status=$?
[ "$status" -eq 124 ] && fail "a refusal on rank 0 left rank 1 hanging"
[ "$status" -eq 2 ] || fail "resume with other parameters gave status $status, expected 2: $(cat "$work/refuse.log")"
grep -q "other parameters" "$work/refuse.log" || fail "no message: $(cat "$work/refuse.log")"
echo "1 and 2 ranks agree (also as one team of 2); errors on one rank end both with status 2"
