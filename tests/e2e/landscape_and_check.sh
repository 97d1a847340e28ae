#!/usr/bin/env bash
# Runs `alloyspec run` and then `alloyspec landscape` into one fresh folder and
# checks both. Usage: landscape_and_check.sh EXE WORKDIR NAME CONFIG [--set ...]
set -euo pipefail
exe=$1 work=$2 name=$3 config=$4
shift 4
out="$work/$name"
rm -rf "$out"
"$exe" run "$config" "$@" --output "$out" --no-progress > "$work/$name.log"
python3 "$(dirname "$0")/check_study.py" "$out"
"$exe" landscape "$config" "$@" --output "$out" --no-progress >> "$work/$name.log"
python3 "$(dirname "$0")/check_landscape.py" "$out"
