#!/usr/bin/env bash
# Crash safety: a study killed (SIGKILL) at several moments and resumed each
# time must end with the same results as an uninterrupted run; SIGTERM must stop
# cleanly after storing the running realisation, with exit status 143 and a
# message saying how to resume. Usage: kill_and_resume.sh EXE WORKDIR
set -uo pipefail
exe=$1 work=$2
here=$(dirname "$0")
rm -rf "$work"; mkdir -p "$work"
# Small but not instant: each realisation takes a noticeable fraction of a second,
# so the kills land inside solves as well as between them.
args=(--set "lattice/cells=3,3,3" --set study/realisations=14 --set spectrum/eigenvalues=20
      --set "study/energies=0 to 4 by 0.1" --no-progress)
fail() { echo "FAIL: $*"; exit 1; }

"$exe" run "${args[@]}" --output "$work/straight" > "$work/straight.log" 2>&1 \
  || fail "uninterrupted run failed: $(cat "$work/straight.log")"

# SIGTERM first, on a fresh study, so that it lands while realisations remain:
# finish the running realisation, store it, exit 143 with advice. (A signal
# that comes only after the tables are written finds the study complete and
# says so.)
out="$work/killed"
"$exe" run "${args[@]}" --output "$out" > "$work/term.log" 2>&1 &
pid=$!
# Signal only once the signal handlers are in place (after the parameters are echoed).
for i in $(seq 100); do grep -q "differ from the defaults" "$work/term.log" && break; sleep 0.05; done
sleep 0.3
kill -TERM "$pid" 2>/dev/null
wait "$pid"; status=$?
if [ "$status" -eq 143 ]; then
  grep -q -e "--resume" -e "nothing needs resuming" "$work/term.log" || fail "SIGTERM message does not say how to resume: $(cat "$work/term.log")"
elif [ "$status" -ne 0 ]; then
  fail "SIGTERM gave exit status $status (expected 143, or 0 if it came after the last realisation): $(cat "$work/term.log")"
fi
echo "SIGTERM: exit status $status"


# Kill moments from a fixed seed, so a failure can be replayed.
RANDOM=20240611
for kill in 1 2 3 4; do
  "$exe" run "${args[@]}" --output "$out" --resume > "$work/kill$kill.log" 2>&1 &
  pid=$!
  # Count from the end of start-up (parameters echoed), which varies with load.
  for i in $(seq 200); do grep -q "differ from the defaults" "$work/kill$kill.log" && break; sleep 0.05; done
  # Drawn outside the command substitution: a subshell would reseed RANDOM.
  whole=$((RANDOM % 2)) millis=$((RANDOM % 1000))
  delay=$(printf '%d.%03d' "$whole" "$millis")
  sleep "$delay"
  kill -KILL "$pid" 2>/dev/null
  wait "$pid" 2>/dev/null
  stored=0
  [ -f "$out/realisations.csv" ] && stored=$(($(wc -l < "$out/realisations.csv") - 1))
  echo "kill $kill after ${delay}s: $stored summary lines on disk"
done

# Resume until done (bounded).
for attempt in 1 2 3; do
  if "$exe" run "${args[@]}" --output "$out" --resume > "$work/resume$attempt.log" 2>&1; then
    break
  fi
  [ "$attempt" -eq 3 ] && fail "resume did not finish: $(cat "$work/resume$attempt.log")"
done
python3 "$here/check_study.py" "$out" || fail "resumed study does not pass check_study.py"
python3 "$here/compare_studies.py" "$work/straight" "$out" || fail "resumed study differs from the uninterrupted one"

# SIGTERM while the tables are written (every realisation stored): the tables
# are completed, and the run still ends with the signal's status 143, not 0.
# A grid this fine with this many bootstrap resamples keeps the tables busy for
# a second or more; the signal is sent once the last summary line is on disk.
tables=(--set "lattice/cells=3,3,3" --set study/realisations=3 --set spectrum/eigenvalues=10
        --set "study/energies=0 to 4 by 0.002" --set "analysis/bootstrap samples=20000" --no-progress)
caught=0
for attempt in 1 2 3; do
  dir="$work/term_tables_$attempt"
  "$exe" run "${tables[@]}" --output "$dir" > "$dir.log" 2>&1 &
  pid=$!
  for i in $(seq 400); do
    [ -f "$dir/realisations.csv" ] && [ "$(wc -l < "$dir/realisations.csv")" -ge 7 ] && break
    sleep 0.025
  done
  sleep 0.1
  kill -TERM "$pid" 2>/dev/null
  wait "$pid"; status=$?
  if [ "$status" -eq 0 ]; then
    echo "SIGTERM during the tables, attempt $attempt: the run ended before the signal"
    continue
  fi
  [ "$status" -eq 143 ] || fail "SIGTERM during the tables gave status $status: $(tail -n 3 "$dir.log")"
  grep -q "while the tables were written" "$dir.log" \
    || fail "SIGTERM during the tables: no message saying the tables were completed: $(tail -n 3 "$dir.log")"
  [ -s "$dir/ids.csv" ] && [ -s "$dir/run.json" ] \
    || fail "SIGTERM during the tables: ids.csv or run.json missing"
  caught=1
  echo "SIGTERM during the tables: exit status 143, tables complete"
  break
done
[ "$caught" -eq 1 ] || echo "SKIP: SIGTERM during the tables: the run always ended before the signal"
