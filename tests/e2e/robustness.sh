#!/usr/bin/env bash
# Never silently wrong, never hung: two runs into one folder, a resume whose
# stored parameter file was lost, summarise on damaged folders, and a full disk
# under two MPI ranks. Each case must end in exit status 0 with correct
# results or 2 with a message naming the file (or folder, or parameter); a
# refused command leaves the folder as it was. Usage: robustness.sh EXE WORKDIR
set -uo pipefail
exe=$1 work=$2
here=$(dirname "$0")
rm -rf "$work"; mkdir -p "$work"
failures=0 cases=0
fail() { echo "FAIL: $*"; failures=$((failures + 1)); }
digest() { (cd "$1" && find . -type f ! -name in_use.lock -print0 | sort -z | xargs -0 sha256sum); }

# 4^3 cells, Q2, 10 eigenvalues, 12 realisations: each run takes a few seconds.
small=(--set "lattice/cells=4,4,4" --set discretisation/degree=2 --set "discretisation/elements per cell=1"
       --set spectrum/eigenvalues=10 --set study/realisations=12 --set "study/energies=0 to 4 by 0.25"
       --no-progress)

# 1. Two runs at once into one folder: exactly one runs, the other is refused
#    with status 2 naming the holder (or the finished study), and the folder
#    holds one consistent study.
cases=$((cases + 1))
"$exe" run "${small[@]}" --output "$work/two_at_once" --seed 7 > "$work/seed7.log" 2>&1 &
pid7=$!
"$exe" run "${small[@]}" --output "$work/two_at_once" --seed 99 > "$work/seed99.log" 2>&1 &
pid99=$!
wait $pid7; s7=$?
wait $pid99; s99=$?
if [ "$s7$s99" != "02" ] && [ "$s7$s99" != "20" ]; then
  fail "two runs into one folder exited $s7 and $s99 (expected one 0 and one 2)"
else
  refused=$work/seed7.log winner=99
  [ "$s7" -eq 0 ] && refused=$work/seed99.log winner=7
  grep -Eq "in use by process [0-9]+ on host|already holds the results" "$refused" \
    || fail "the refused run does not name the holder: $(tail -n 2 "$refused")"
  grep -Eq "^ *set seed *= *$winner\$" "$work/two_at_once/as_run.prm" \
    || fail "the stored parameters are not the winner's (seed $winner)"
  python3 "$here/check_study.py" "$work/two_at_once" > /dev/null \
    || fail "the folder of two runs at once does not pass check_study.py"
  # The winner's eigenvalues are those of a run alone with its seed.
  "$exe" run "${small[@]}" --output "$work/alone" --seed $winner > /dev/null 2>&1
  python3 "$here/compare_studies.py" "$work/alone" "$work/two_at_once" > /dev/null \
    || fail "the folder of two runs at once differs from a run of seed $winner alone"
fi
# The same while one holds the lock for certain: a run that is still solving.
cases=$((cases + 1))
"$exe" run "${small[@]}" --set study/realisations=40 --output "$work/busy" > "$work/busy.log" 2>&1 &
busy=$!
for i in $(seq 200); do [ -f "$work/busy/in_use.lock" ] && [ -s "$work/busy/in_use.lock" ] && break; sleep 0.05; done
out=$("$exe" run "${small[@]}" --output "$work/busy" --resume 2>&1 >/dev/null); status=$?
[ "$status" -eq 2 ] && grep -q "in use by process $busy on host $(hostname)" <<<"$out" \
  || fail "a resume into a folder in use gave status $status: $out"
out=$("$exe" summarise "$work/busy" 2>&1 >/dev/null); status=$?
[ "$status" -eq 2 ] && grep -q "in use by process $busy" <<<"$out" \
  || fail "summarise into a folder in use gave status $status: $out"
# A killed holder's lock is stale: the resume takes it over and finishes.
kill -KILL $busy; wait $busy 2>/dev/null
cases=$((cases + 1))
[ -f "$work/busy/in_use.lock" ] || fail "SIGKILL left no lock file (the stale case is not exercised)"
"$exe" run "${small[@]}" --set study/realisations=40 --output "$work/busy" --resume > "$work/busy2.log" 2>&1 \
  || fail "resume after a killed holder: $(tail -n 3 "$work/busy2.log")"
grep -q "taken over" "$work/busy2.log" || fail "the stale lock was not reported"
[ -f "$work/busy/in_use.lock" ] && fail "the lock file outlived the run"

# 2. Resume after the stored parameter file is lost: refused, nothing changed.
cases=$((cases + 1))
cp -r "$work/alone" "$work/lost"
rm "$work/lost/as_run.prm"
before=$(digest "$work/lost")
out=$("$exe" run "${small[@]}" --seed $winner --output "$work/lost" --resume \
        --set potential/concentration=0.9 2>&1 >/dev/null); status=$?
[ "$status" -eq 2 ] && grep -q "as_run.prm" <<<"$out" \
  || fail "resume without the stored parameter file gave status $status: $out"
[ "$before" = "$(digest "$work/lost")" ] || fail "a refused resume changed the folder"
# An empty stored parameter file is refused too.
cases=$((cases + 1))
cp -r "$work/alone" "$work/empty_prm"; : > "$work/empty_prm/as_run.prm"
out=$("$exe" run "${small[@]}" --seed $winner --output "$work/empty_prm" --resume 2>&1 >/dev/null); status=$?
[ "$status" -eq 2 ] && grep -q "holds no parameters" <<<"$out" \
  || fail "resume with an empty stored parameter file gave status $status: $out"

# 3. summarise on damaged folders: status 2 naming the file (and line), the
#    folder untouched; the crash remains a run can leave: status 0, a warning,
#    and the same tables as before.
damaged() { # damaged NAME "what must be in the message" command-on-$d
  local name=$1 must=$2; shift 2
  cases=$((cases + 1))
  local d=$work/damaged_$name
  rm -rf "$d"; cp -r "$work/alone" "$d"
  (cd "$d" && eval "$*")
  local before; before=$(digest "$d")
  local out status
  out=$("$exe" summarise "$d" 2>&1 >/dev/null); status=$?
  if [ "$status" -ne 2 ] || ! grep -qF -- "$must" <<<"$out"; then
    fail "summarise with $name gave status $status: $out (expected 2 and '$must')"
  fi
  [ "$before" = "$(digest "$d")" ] || fail "summarise with $name changed the folder"
}
size=$(stat -c %s "$work/alone/eigenvalues.csv")
damaged cut_at_60 "realisations.csv' line" "head -c $((size * 6 / 10)) eigenvalues.csv > e && mv e eigenvalues.csv"
damaged deleted_line "eigenvalues.csv' line 40" "sed -i 40d eigenvalues.csv"
damaged missing "eigenvalues.csv' is missing" "rm eigenvalues.csv"
damaged empty "holds only 0" ": > eigenvalues.csv"
damaged garbage "eigenvalues.csv' line 1" "head -c 4000 /dev/urandom | tr '\n' x > eigenvalues.csv; echo >> eigenvalues.csv"
damaged crlf "eigenvalues.csv' line 1" "sed -i 's/\$/\r/' eigenvalues.csv"
damaged nan "eigenvalues.csv' line 7" "awk -F, -v OFS=, 'NR==7{\$4=\"nan\"}1' eigenvalues.csv > e && mv e eigenvalues.csv"
damaged inf "eigenvalues.csv' line 8" "awk -F, -v OFS=, 'NR==8{\$4=\"inf\"}1' eigenvalues.csv > e && mv e eigenvalues.csv"
damaged minus_1e300 "eigenvalues.csv' line 2" "awk -F, -v OFS=, 'NR==2{\$4=\"-1e300\"}1' eigenvalues.csv > e && mv e eigenvalues.csv"
damaged empty_parameters "holds no parameters" ": > as_run.prm"
damaged no_parameters "as_run.prm' is missing" "rm as_run.prm"
damaged summary_count "eigenvalues.csv' line" "awk -F, -v OFS=, 'NR==3{\$3=9}1' realisations.csv > e && mv e realisations.csv"

# Crash remains: a torn last line in either file is dropped with a warning and
# the tables are those of the complete records.
cases=$((cases + 1))
d=$work/torn; rm -rf "$d"; cp -r "$work/alone" "$d"
printf '12,dirichlet,0,0.5' >> "$d/eigenvalues.csv"
printf '12,dirich' >> "$d/realisations.csv"
out=$("$exe" summarise "$d" 2>&1 >/dev/null); status=$?
[ "$status" -eq 0 ] && grep -q "cut short by an interrupted write" <<<"$out" \
  || fail "summarise with torn last lines gave status $status: $out"
cmp -s "$d/ids.csv" "$work/alone/ids.csv" || fail "torn last lines changed ids.csv"

# 4. A full disk under two ranks: rank 0's failed append ends both ranks
#    with its message and status 2 (it hung before), and a resume on a
#    roomy disk completes the study.
cases=$((cases + 1))
if ! command -v mpirun > /dev/null; then
  echo "SKIP: full disk under 2 ranks: mpirun not found"
elif [ "$(id -u)" -ne 0 ]; then
  echo "SKIP: full disk under 2 ranks: mounting a 16 KiB tmpfs needs root"
else
  mnt=$work/full_disk; mkdir -p "$mnt"
  if ! mount -t tmpfs -o size=16k alloyspec-test "$mnt" 2> "$work/mount.log"; then
    echo "SKIP: full disk under 2 ranks: mount failed: $(cat "$work/mount.log")"
  else
    timeout 300 mpirun --allow-run-as-root --oversubscribe -np 2 "$exe" run "${small[@]}" \
      --output "$mnt/study" > "$work/full.log" 2>&1
    status=$?
    [ "$status" -eq 124 ] && fail "a full disk hung the 2-rank run"
    [ "$status" -eq 2 ] || fail "a full disk under 2 ranks gave status $status (expected 2)"
    grep -q "No space left on device" "$work/full.log" || fail "no message about the full disk: $(tail -n 5 "$work/full.log")"
    cp -r "$mnt/study" "$work/full_copy"
    umount "$mnt"
    "$exe" run "${small[@]}" --output "$work/full_copy" --resume > "$work/full_resume.log" 2>&1 \
      || fail "resume after the full disk: $(tail -n 3 "$work/full_resume.log")"
    "$exe" run "${small[@]}" --output "$work/alone_seed1" > /dev/null 2>&1
    python3 "$here/compare_studies.py" "$work/alone_seed1" "$work/full_copy" > /dev/null \
      || fail "the study resumed after a full disk differs from an uninterrupted one"
  fi
fi

# 5. Small and extreme cases: exit 0 with every eigenvalue there is, or 2
#    with a message naming the parameter, and a refused run leaves no folder.
tiny=(--set discretisation/degree=1 --set "discretisation/elements per cell=1" --set spectrum/eigenvalues=5
      --set study/realisations=2 --set "study/energies=0 to 4 by 0.5" --no-progress)
expect() { # expect STATUS "message part" NAME args...
  local want=$1 must=$2 name=$3; shift 3
  cases=$((cases + 1))
  local out status
  out=$("$exe" run "${tiny[@]}" "$@" --output "$work/$name" 2>&1 >/dev/null); status=$?
  if [ "$status" -ne "$want" ] || ! grep -qF -- "$must" <<<"$out"; then
    fail "$name: status $status (expected $want and '$must'): $(tail -n 3 <<<"$out")"
  fi
  if [ "$want" -eq 2 ] && [ -e "$work/$name" ]; then fail "$name: a refused run left its folder behind"; fi
}
for cells in 1,1,1 1 1,1; do
  expect 2 "has no unknowns" "one_cell_$cells" --set "lattice/cells=$cells"
  expect 0 "" "one_cell_neumann_$cells" --set "lattice/cells=$cells" --set "spectrum/boundary conditions=neumann"
done
# A chain of 20 cells, Q1: 21 unknowns with Neumann faces, all below a cutoff of 1e6.
expect 0 "" chain_cutoff --set "lattice/cells=20" --set "spectrum/boundary conditions=neumann" \
  --set "spectrum/energy cutoff=1e6"
[ "$(awk -F, 'NR>1{print $3}' "$work/chain_cutoff/realisations.csv" | sort -u)" = 21 ] \
  || fail "the chain of 20 cells did not return all 21 eigenvalues"
expect 0 "" constant_1000 --set "lattice/cells=3,3,3" --set "potential/value A=1000" --set "potential/value B=1000"
expect 2 "lattice/cell size" cell_tiny --set "lattice/cells=3,3,3" --set "lattice/cell size=1e-300"
expect 2 "lattice/cell size" cell_huge --set "lattice/cells=3,3,3" --set "lattice/cell size=1e300"
expect 2 "subsection 'potential'" value_huge --set "lattice/cells=3,3,3" --set "potential/value A=-1e308"
expect 2 "subsection 'potential'" value_1e8 --set "lattice/cells=3,3,3" --set "potential/value A=1e8"
expect 2 "subsection 'potential'" spread_huge --set "lattice/cells=3,3,3" --set potential/law=gaussian \
  --set "potential/standard deviation=1e300"
# In a file: deal.II reads a brace there as a loop over values and skips the check.
printf 'subsection study\n  set export eigenfunctions = {0|1}\nend\n' > "$work/braces.prm"
expect 2 "braces" braces "$work/braces.prm" --set "lattice/cells=3,3,3"
expect 2 "landscape/shift" landscape_shift --set "lattice/cells=3,3,3" --set "landscape/shift=-inf"
expect 2 "study/seed" empty_seed --set "lattice/cells=3,3,3" --seed ''
expect 2 "of memory" many_realisations --set "lattice/cells=3,3,3" --set study/realisations=4294967295
expect 2 "of memory" huge_box --set "lattice/cells=4096,4096"
# Tilted with the automatic tilt: a refusal after the tilt search leaves no tilt.txt (no folder).
expect 2 "maximum eigenvalues" tilted_cutoff_over_maximum --set "lattice/cells=20" \
  --set sampling/method=tilted --set sampling/tilt=auto --set "sampling/target energy=0.5" \
  --set "spectrum/energy cutoff=50" --set "spectrum/maximum eigenvalues=3"
expect 2 "maximum eigenvalues" cutoff_over_maximum --set "lattice/cells=3,3,3" \
  --set "spectrum/energy cutoff=50" --set "spectrum/maximum eigenvalues=3"
printf '$MeshFormat\n2.2 0 8\n$EndMeshFormat\n$Nodes\n3\n1 0 0 0\n' > "$work/bad.msh"
expect 2 "bad.msh" bad_mesh --set "lattice/cells=2,2" --set "lattice/mesh file=$work/bad.msh"
printf 'include %s\n' "$work/self.prm" > "$work/self.prm"
cases=$((cases + 1))
out=$("$exe" run "$work/self.prm" --output "$work/self" 2>&1 >/dev/null); status=$?
[ "$status" -eq 2 ] && grep -q "includes itself" <<<"$out" || fail "a file that includes itself: status $status: $out"

# 6. --resume on a study made read-only: status 2, nothing changed.
cases=$((cases + 1))
if [ "$(id -u)" -ne 0 ]; then
  chmod -R a-w "$work/alone"
  out=$("$exe" run "${small[@]}" --seed $winner --output "$work/alone" --resume 2>&1 >/dev/null); status=$?
  chmod -R u+w "$work/alone"
  [ "$status" -eq 2 ] || fail "--resume on a read-only study gave status $status: $out"
else
  ro=$work/read_only; mkdir -p "$ro"
  if mount -t tmpfs -o size=4m alloyspec-ro "$ro" 2>/dev/null; then
    cp -r "$work/alone" "$ro/study"
    mount -o remount,ro "$ro"
    out=$("$exe" run "${small[@]}" --seed $winner --output "$ro/study" --resume 2>&1 >/dev/null); status=$?
    [ "$status" -eq 2 ] && grep -q "Read-only" <<<"$out" \
      || fail "--resume on a read-only study gave status $status: $out"
    umount "$ro"
  else
    echo "SKIP: --resume on a read-only study: mounting a tmpfs failed"
  fi
fi

echo "robustness: $cases cases, $failures failures"
[ "$failures" -eq 0 ]
