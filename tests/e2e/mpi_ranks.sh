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
      --set "study/energies=0:0.1:4" --no-progress)
fail() { echo "FAIL: $*"; exit 1; }

"$exe" run "${args[@]}" --output "$work/one" > "$work/one.log" 2>&1 \
  || fail "1 rank: $(cat "$work/one.log")"
timeout 300 "${mpi[@]}" "$exe" run "${args[@]}" --output "$work/two" > "$work/two.log" 2>&1 \
  || fail "2 ranks: $(cat "$work/two.log")"
grep -q "2 MPI rank" "$work/two.log" || fail "2-rank run does not report 2 ranks"
[ "$(grep -c "Effective parameters" "$work/two.log")" -eq 1 ] \
  || fail "the parameters were printed more than once with 2 ranks"
python3 "$here/check_study.py" "$work/two" || fail "2-rank study does not pass check_study.py"
python3 "$here/compare_studies.py" "$work/one" "$work/two" || fail "1 and 2 ranks differ"

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
echo "1 and 2 ranks agree; errors on one rank end both with status 2"
