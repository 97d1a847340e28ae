#!/usr/bin/env bash
# Folders written by earlier versions: the stored parameter file was named
# parameters.prm, the energy grid was written "start:step:stop", and the energy
# columns of the records were named without their unit ("eigenvalue", not
# "eigenvalue_reduced"), and had no enclosure columns and no verified_by. `summarise`
# and `run --resume` must read such a folder (and give the same tables as a
# folder of this version), and a resume with other model parameters must still
# be refused, which shows the legacy file is really read.
# Usage: legacy_folder.sh EXE WORKDIR
set -uo pipefail
exe=$1 work=$2
here=$(dirname "$0")
rm -rf "$work"; mkdir -p "$work"
args=(--set "lattice/cells=2,2,2" --set spectrum/eigenvalues=8
      --set "study/energies=0 to 4 by 0.1" --no-progress)
fail() { echo "FAIL: $*"; exit 1; }

# Turns a folder of this version into one as an earlier version wrote it.
make_legacy() {
  mv "$1/as_run.prm" "$1/parameters.prm" || fail "no as_run.prm in $1"
  sed -i 's/^\( *set energies *= *\)0 to 4 by 0.1/\10:0.1:4/' "$1/parameters.prm"
  grep -q "set energies *= *0:0.1:4" "$1/parameters.prm" || fail "could not write the colon grid"
  # Earlier versions had neither the enclosure columns nor verified_by.
  cut -d, -f1-8 "$1/eigenvalues.csv" > "$1/eigenvalues.tmp" && mv "$1/eigenvalues.tmp" "$1/eigenvalues.csv"
  cut -d, -f1-10 "$1/realisations.csv" > "$1/realisations.tmp" && mv "$1/realisations.tmp" "$1/realisations.csv"
  sed -i '1s/_reduced//g' "$1/eigenvalues.csv" "$1/realisations.csv"
  head -n 1 "$1/eigenvalues.csv" | grep -q "^realisation,boundary,index,eigenvalue,residual,error," \
    || fail "could not write the earlier column names"
}

"$exe" run "${args[@]}" --set study/realisations=3 --output "$work/now" > "$work/now.log" 2>&1 \
  || fail "reference run failed: $(cat "$work/now.log")"
[ -f "$work/now/as_run.prm" ] || fail "the run did not store as_run.prm"
[ -e "$work/now/parameters.prm" ] && fail "the run stored the legacy name parameters.prm"

# summarise: a finished folder with the legacy file, tables removed.
cp -r "$work/now" "$work/old_finished"
make_legacy "$work/old_finished"
rm "$work/old_finished/ids.csv"
"$exe" summarise "$work/old_finished" > "$work/summarise.log" 2>&1 \
  || fail "summarise of a legacy folder failed: $(cat "$work/summarise.log")"
python3 "$here/compare_studies.py" "$work/now" "$work/old_finished" \
  || fail "summarise of the legacy folder gives other tables"

# --resume: an interrupted legacy folder (1 of 3 realisations stored).
"$exe" run "${args[@]}" --set study/realisations=1 --output "$work/old_partial" \
  > "$work/partial.log" 2>&1 || fail "partial run failed: $(cat "$work/partial.log")"
make_legacy "$work/old_partial"
out=$("$exe" run "${args[@]}" --set study/realisations=3 --set potential/concentration=0.3 \
        --output "$work/old_partial" --resume 2>&1 >/dev/null); status=$?
[ "$status" -eq 2 ] && grep -q "potential/concentration" <<<"$out" \
  || fail "a resume with another model was not refused (status $status): $out"
"$exe" run "${args[@]}" --set study/realisations=3 --output "$work/old_partial" --resume \
  > "$work/resume.log" 2>&1 || fail "resume of a legacy folder failed: $(cat "$work/resume.log")"
[ -f "$work/old_partial/as_run.prm" ] || fail "the resumed run did not store as_run.prm"
python3 "$here/check_study.py" "$work/old_partial" || fail "resumed legacy study does not pass check_study.py"
python3 "$here/compare_studies.py" "$work/now" "$work/old_partial" \
  || fail "the resumed legacy folder differs from the uninterrupted run"
echo "legacy folders: summarise and resume read parameters.prm with a colon grid: ok"
