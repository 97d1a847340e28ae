#!/usr/bin/env bash
# Bad input must give a clear message naming the parameter (or file) and exit
# status 2, and must never touch an earlier study's results.
# Usage: bad_input.sh EXE WORKDIR CONFIGDIR
set -uo pipefail
exe=$1 work=$2 configs=$3
rm -rf "$work"; mkdir -p "$work"
failures=0 cases=0

expect_error() { # expect_error "what the message must contain" args...
  local must=$1; shift
  cases=$((cases + 1))
  local out status
  out=$("$exe" "$@" 2>&1 >/dev/null); status=$?
  if [ "$status" -ne 2 ] || ! grep -qF -- "$must" <<<"$out"; then
    echo "FAIL: '$*' gave status $status, message: $out (expected status 2 and '$must')"
    failures=$((failures + 1))
  fi
}

tiny=(--set "lattice/cells=2,2,2" --set study/realisations=1 --set spectrum/eigenvalues=5 --no-progress)
expect_error "lattice/cells"      run "${tiny[@]}" --set "lattice/cells=0,2,2" --output "$work/a"
expect_error "lattice/cells"      run "${tiny[@]}" --set "lattice/cells=2,2,2,2" --output "$work/a"
expect_error "cell size"          run "${tiny[@]}" --set "lattice/cell size=-1" --output "$work/a"
expect_error "potential/law"      run "${tiny[@]}" --set "potential/law=lognormal" --output "$work/a"
expect_error "concentration"      run "${tiny[@]}" --set "potential/concentration=1.5" --output "$work/a"
expect_error "potential/maximum"  run "${tiny[@]}" --set "potential/law=uniform" --set "potential/maximum=-3" --output "$work/a"
expect_error "probabilities"      run "${tiny[@]}" --set "potential/law=discrete" --set "potential/values=0,1" --set "potential/probabilities=0.5,0.6" --output "$work/a"
expect_error "degree"             run "${tiny[@]}" --set "discretisation/degree=7" --output "$work/a"
expect_error "energy cutoff"      run "${tiny[@]}" --set "spectrum/energy cutoff=abc" --output "$work/a"
expect_error "tuned|baseline|iterative|auto" run "${tiny[@]}" --set "spectrum/solver=fast" --output "$work/a"
expect_error "spectrum/solver"    run "${tiny[@]}" --set "spectrum/solver=Iterative" --output "$work/a"
expect_error "inertia check limit" run "${tiny[@]}" --set "spectrum/inertia check limit=-5" --output "$work/a"
expect_error "boundary conditions" run "${tiny[@]}" --set "spectrum/boundary conditions=robin" --output "$work/a"
expect_error "study/realisations" run "${tiny[@]}" --set "study/realisations=0" --output "$work/a"
expect_error "study/energies"     run "${tiny[@]}" --set "study/energies=3 to 1 by 0.1" --output "$work/a"
# The colon form of earlier versions: refused, with the same grid in words.
printf 'subsection study\n  set energies = 0:0.05:3\nend\n' > "$work/colon_grid.prm"
expect_error "'0 to 3 by 0.05'"   run "$work/colon_grid.prm" "${tiny[@]}" --output "$work/a"
expect_error "'-1 to 2 by 0.5'"   run "${tiny[@]}" --set "study/energies=-1:0.5:2" --output "$work/a"
expect_error "study/seed"         run "${tiny[@]}" --seed=-4 --output "$work/a"
expect_error "'--memory-budget'"  run "${tiny[@]}" --memory-budget 0 --output "$work/a"
# A target the budget cannot hold is refused with the estimate, before anything is solved for good.
expect_error "finer than any candidate" run "${tiny[@]}" --set "lattice/cells=16" --set spectrum/eigenvalues=50 --set "discretisation/accuracy=1e-7" --output "$work/a"
expect_error "(--memory-budget)"  run "${tiny[@]}" --set "discretisation/accuracy=1e-11" --memory-budget 0.3 --output "$work/a"
expect_error "sampling/tilt window" run "${tiny[@]}" --set sampling/method=tilted --set sampling/tilt=0.3 --set "sampling/tilt window=2.5" --output "$work/a"
expect_error "sampling/target energy" run "${tiny[@]}" --set sampling/method=tilted --set sampling/tilt=0.3 --set "sampling/tilt window=auto" --output "$work/a"
expect_error "untilted share"     run "${tiny[@]}" --set sampling/method=tilted --set sampling/tilt=0.3 --set "sampling/tilt window=2" --set "sampling/untilted share=1" --output "$work/a"
expect_error "sampling/tilt shape" run "${tiny[@]}" --set sampling/method=tilted --set sampling/tilt=0.3 --set "sampling/tilt shape=round" --output "$work/a"
expect_error "sampling/roulette"  run "${tiny[@]}" --set sampling/roulette=auto --output "$work/a"
expect_error "sampling/roulette"  run "${tiny[@]}" --set sampling/method=tilted --set sampling/tilt=0.3 --set sampling/roulette=auto --output "$work/a"
expect_error "sampling/roulette pilot" count "${tiny[@]}" --set sampling/method=tilted --set sampling/tilt=0.3 --set sampling/roulette=auto --set study/energies=1 --output "$work/a"
expect_error "sampling/target energy" count "${tiny[@]}" --set sampling/method=tilted --set sampling/tilt=0.3 --set sampling/roulette=auto --set study/realisations=30 --set "sampling/roulette pilot=20" --set "study/energies=1, 2" --output "$work/a"
expect_error "roulette floor"     count "${tiny[@]}" --set sampling/method=tilted --set sampling/tilt=0.3 --set sampling/roulette=auto --set "sampling/roulette floor=0" --output "$work/a"
expect_error "no such entry 'colour'"      run "${tiny[@]}" --set "lattice/colour=red" --output "$work/a"
expect_error "section/entry=value" run "${tiny[@]}" --set "lattice" --output "$work/a"
expect_error "does not exist"     run "$work/missing.prm" --output "$work/a"
printf 'subsection lattice\n  set cels = 2\nend\n' > "$work/typo.prm"
expect_error "cels"               run "$work/typo.prm" --output "$work/a"
printf '0 0 0 1\n1 0 0 1\n0 0 0 2\n' > "$work/dup.cells"
expect_error "line 3"             run "${tiny[@]}" --set "lattice/cells=2,1,1" --set "potential/law=file" --set "potential/file=$work/dup.cells" --output "$work/a"
printf '0 0 0 1\n1 0 0 1\n' > "$work/short.cells"
expect_error "missing"            run "${tiny[@]}" --set "potential/law=file" --set "potential/file=$work/short.cells" --output "$work/a"
expect_error "cannot"             run "${tiny[@]}" --set "potential/law=file" --set "potential/file=$work/nothing.cells" --output "$work/a"

# An earlier study is never overwritten: same folder again is refused, files unchanged.
"$exe" run "${tiny[@]}" --output "$work/earlier" > /dev/null || { echo "FAIL: tiny study did not run"; exit 1; }
before=$(cd "$work/earlier" && sha256sum eigenvalues.csv realisations.csv ids.csv run.json)
expect_error "earlier study" run "${tiny[@]}" --output "$work/earlier"
after=$(cd "$work/earlier" && sha256sum eigenvalues.csv realisations.csv ids.csv run.json)
cases=$((cases + 1))
if [ "$before" != "$after" ]; then echo "FAIL: an earlier study's files changed"; failures=$((failures + 1)); fi
[ -d "$work/a" ] && [ -n "$(ls -A "$work/a")" ] && { echo "FAIL: a refused run left files in $work/a"; failures=$((failures + 1)); }

echo "bad input: $cases cases, $failures failures"
[ "$failures" -eq 0 ]
