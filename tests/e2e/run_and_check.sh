#!/usr/bin/env bash
# Runs `alloyspec run` with the given arguments into a fresh folder and checks
# the results. Usage: run_and_check.sh EXE WORKDIR NAME [run arguments...]
set -euo pipefail
exe=$1 work=$2 name=$3
shift 3
out="$work/$name"
rm -rf "$out"
"$exe" run "$@" --output "$out" --no-progress > "$work/$name.log"
python3 "$(dirname "$0")/check_study.py" "$out"
