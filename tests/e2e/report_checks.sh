#!/usr/bin/env bash
# The README's everyday tasks, run small, with assertions on what a user gets:
#   1. a box-size series of an eV alloy at three sizes, then `summarise`;
#   2. an eV study with the default (automatic) broadening widths;
#   3. a fixed potential from a file.
# check_outputs.py asserts on the folders. Usage: report_checks.sh EXE WORKDIR CONFIGS
set -euo pipefail
exe=$1 work=$2 configs=$3
rm -rf "$work"
mkdir -p "$work"
# Small but physical: Q1, one element per cell, 3 realisations. The widths go
# back to their default 'auto' (the config sets fixed ones).
small=(--set discretisation/degree=1 --set "discretisation/elements per cell=1"
       --set study/realisations=3 --set spectrum/eigenvalues=30 --no-progress
       --set "analysis/lorentzian width=auto" --set "analysis/gaussian width=auto"
       --set "analysis/bin width=auto")
for l in 3 4 5; do
  "$exe" run "$configs/alloy_physical_units.prm" --set "lattice/cells=$l,$l,$l" "${small[@]}" \
    --output "$work/alloy_L$l" > "$work/alloy_L$l.log"
done
"$exe" summarise "$work/alloy_L3" "$work/alloy_L4" "$work/alloy_L5" --output "$work/series" \
  > "$work/series.log"
"$exe" run "$configs/layer_from_file.prm" --no-progress --set spectrum/eigenvalues=12 \
  --set "discretisation/error estimate=richardson" --output "$work/file" > "$work/file.log"
# numpy comes from Debian's python3-numpy (.ci/install-deps); another python3
# first on the PATH may lack it.
py=python3
if ! python3 -c "import numpy" 2> /dev/null && [ -x /usr/bin/python3 ]; then py=/usr/bin/python3; fi
"$py" "$(dirname "$0")/check_outputs.py" "$work"
