#!/usr/bin/env python3
"""Generated cases run through the real program, in a subprocess each, so that a
crash (a signal) or a hang is seen: parameter files with values drawn from
valid, edge and invalid pools, cell-values files, Gmsh mesh files and damaged
stored folders. Every case must end in exit status 0 or 2 (never 1, another
status, a signal, or a hang), with a message on status 2; an existing folder
must be byte-for-byte untouched when the command ends with status 2, and a
refused run into a new folder must leave no folder behind.

The cases come from Python's Mersenne Twister with a fixed seed (random.seed
with an integer and randrange are stable across CPython 3 versions), so a
failure can be replayed. Usage: fuzz_runs.py EXE WORKDIR
"""
import hashlib
import os
import random
import shutil
import subprocess
import sys

exe, work = sys.argv[1], sys.argv[2]
shutil.rmtree(work, ignore_errors=True)
os.makedirs(work)
rng = random.Random(20261202)
failures = []
counts = {}
outcomes = {}
TIMEOUT = 120  # seconds; a tiny case takes well under 5 (common practice, no source)


def digest(folder):
    h = hashlib.sha256()
    for root, _, files in sorted(os.walk(folder)):
        for name in sorted(files):
            if name == "in_use.lock":
                continue
            path = os.path.join(root, name)
            h.update(path.encode("utf-8", "surrogateescape"))
            with open(path, "rb") as f:
                h.update(f.read())
    return h.hexdigest()


def run(kind, what, args, watch=None, fresh=None):
    """Runs EXE ARGS; checks the status, the message, and the folders."""
    counts[kind] = counts.get(kind, 0) + 1
    before = digest(watch) if watch else None
    try:
        p = subprocess.run([exe] + args, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                           timeout=TIMEOUT)
    except subprocess.TimeoutExpired:
        failures.append(f"{kind}: {what}: no end within {TIMEOUT} s (a hang)")
        return None
    err = p.stderr.decode("utf-8", "replace")
    outcomes[(kind, p.returncode)] = outcomes.get((kind, p.returncode), 0) + 1
    if p.returncode < 0:
        failures.append(f"{kind}: {what}: ended by signal {-p.returncode}\n{err[-600:]}")
    elif p.returncode not in (0, 2):
        failures.append(f"{kind}: {what}: exit status {p.returncode}\n{err[-600:]}")
    elif p.returncode == 2:
        if "alloyspec: error:" not in err:
            failures.append(f"{kind}: {what}: status 2 without a message: {err[-300:]}")
        if watch and digest(watch) != before:
            failures.append(f"{kind}: {what}: status 2 but the folder {watch} changed")
        if fresh and os.path.exists(fresh):
            failures.append(f"{kind}: {what}: status 2 but the new folder {fresh} was left behind")
    return p.returncode


TINY = ["--set", "study/realisations=1", "--set", "spectrum/eigenvalues=3",
        "--set", "discretisation/degree=1", "--set", "study/energies=0 to 4 by 0.5", "--no-progress"]

# 1. Parameter values from valid, edge and invalid pools, in tiny boxes.
pools = {
    "lattice/cells": ["1", "1,1", "1,1,1", "2", "2,1", "2,2,1", "3,3,3", "20", "0", "1,0",
                      "4096,4096", "1,1,1,1", "2,,2"],
    "lattice/cell size": ["1", "0.01", "1000", "1e-300", "1e300", "0", "-1", "nan", "0.5"],
    "potential/law": ["uniform", "bernoulli", "gaussian", "discrete", "binomial", "beta"],
    "potential/value A": ["1.5", "1000", "-1e308", "1e8", "0", "-5", "1e6"],
    "potential/value B": ["0", "1000", "-3", "1e7"],
    "potential/standard deviation": ["1", "1e300", "1e-300", "0", "5"],
    "potential/minimum": ["0", "-1", "-1e307", "2"],
    "potential/maximum": ["1", "1e307", "0.5", "3"],
    "spectrum/eigenvalues": ["1", "3", "8", "50", "0"],
    "spectrum/boundary conditions": ["dirichlet", "neumann", "periodic", "dirichlet, neumann",
                                     "dirichlet, neumann, periodic"],
    "spectrum/energy cutoff": ["", "4", "1e6", "-1", "0"],
    "discretisation/degree": ["1", "2", "3", "4", "5"],
    "discretisation/elements per cell": ["1", "2", "3"],
    "study/realisations": ["1", "2", "4294967295", "0"],
    "study/export eigenfunctions": ["", "0", "0, 1", "{0|1}", "99999"],
    "landscape/shift": ["auto", "0", "-inf", "nan", "1"],
    "study/energies": ["auto", "0 to 4 by 0.5", "0 to 1 by 1e-300", "4 to 0 by 1", "0:0.5:4", "0, 1, 2"],
}
keys = sorted(pools)
for case in range(30):
    args = []
    for key in rng.sample(keys, rng.randrange(1, 4)):
        args += ["--set", f"{key}={rng.choice(pools[key])}"]
    out = os.path.join(work, f"params_{case}")
    run("parameters", " ".join(args),
        ["run"] + TINY + ["--set", "lattice/cells=2,2,2"] + args + ["--output", out], fresh=out)

# An existing study: resumes with other values must leave it untouched on status 2.
study = os.path.join(work, "study")
if run("setup", "a small study", ["run"] + TINY + ["--set", "lattice/cells=2,2,2",
                                                     "--set", "study/realisations=3",
                                                     "--output", study]) != 0:
    failures.append("setup: the small study did not run")
for case in range(10):
    key = rng.choice(keys)
    run("existing folder", f"--resume with {key}",
        ["run"] + TINY + ["--set", "lattice/cells=2,2,2", "--set", "study/realisations=3",
                          "--set", f"{key}={rng.choice(pools[key])}", "--resume", "--output", study],
        watch=study)

# 2. Cell-values files for a 2 x 2 x 1 box: valid, then mutated.
valid_cells = ["0 0 0 1.0", "1 0 0 0.5", "0 1 0 0", "1 1 0 2.5"]
bad_lines = ["0 0 0 nan", "0 0 0 1e308", "2 0 0 1", "0 0 1", "x y z w", "0 0 0 1 2", "-1 0 0 1",
             "0 0 0 -1e7", "0 0 0 1e6"]
for case in range(15):
    lines = list(valid_cells)
    m = rng.randrange(5)
    if m == 0:
        lines[rng.randrange(4)] = rng.choice(bad_lines)
    elif m == 1:
        del lines[rng.randrange(4)]
    elif m == 2:
        lines.append(rng.choice(lines))
    elif m == 3:
        lines = ["".join(chr(rng.randrange(1, 256)) for _ in range(20))]
    text = "\n".join(lines) + "\n"
    if m == 4:
        text = text[: rng.randrange(len(text))]
    path = os.path.join(work, f"cells_{case}.txt")
    with open(path, "w", encoding="latin-1") as f:
        f.write(text)
    out = os.path.join(work, f"cells_out_{case}")
    run("cell file", f"mutation {m}: {text!r}",
        ["run"] + TINY + ["--set", "lattice/cells=2,2,1", "--set", "potential/law=file",
                          "--set", f"potential/file={path}", "--output", out], fresh=out)

# 3. Gmsh 2.2 files of a 2 x 2 square of quadrilaterals: valid, then mutated.
nodes = [(i + 1, x, y) for i, (x, y) in enumerate((x, y) for y in range(3) for x in range(3))]
quads = [(1, 2, 5, 4), (2, 3, 6, 5), (4, 5, 8, 7), (5, 6, 9, 8)]
def mesh_text(nodes, quads):
    out = ["$MeshFormat", "2.2 0 8", "$EndMeshFormat", "$Nodes", str(len(nodes))]
    out += [f"{n} {x} {y} 0" for n, x, y in nodes]
    out += ["$EndNodes", "$Elements", str(len(quads))]
    out += [f"{e + 1} 3 2 1 1 {' '.join(map(str, q))}" for e, q in enumerate(quads)]
    out += ["$EndElements"]
    return "\n".join(out) + "\n"
valid_mesh = mesh_text(nodes, quads)
for case in range(20):
    m = rng.randrange(7)
    if m == 0:
        text = valid_mesh[: rng.randrange(len(valid_mesh))]
    elif m == 1:
        lines = valid_mesh.split("\n")
        del lines[rng.randrange(len(lines) - 1)]
        text = "\n".join(lines)
    elif m == 2:
        q = [list(x) for x in quads]
        q[rng.randrange(4)][rng.randrange(4)] = rng.choice([0, 10, -1, 99999999])
        text = mesh_text(nodes, q)
    elif m == 3:
        n = list(nodes)
        k = rng.randrange(len(n))
        n[k] = (n[k][0], rng.choice([1e300, -1e300, float("nan"), 50.0]), n[k][2])
        text = mesh_text(n, quads)
    elif m == 4:
        text = valid_mesh.replace(str(len(nodes)), str(rng.choice([0, 3, 100])), 1)
    elif m == 5:
        text = "".join(chr(rng.randrange(1, 256)) for _ in range(200))
    else:
        text = valid_mesh  # the valid mesh itself must run
    path = os.path.join(work, f"mesh_{case}.msh")
    with open(path, "w", encoding="latin-1") as f:
        f.write(text)
    out = os.path.join(work, f"mesh_out_{case}")
    status = run("mesh file", f"mutation {m}",
                 ["run"] + TINY + ["--set", "lattice/cells=2,2", "--set", f"lattice/mesh file={path}",
                                   "--output", out], fresh=out)
    if m == 6 and status != 0:
        failures.append(f"mesh file: the valid mesh gave status {status}")

# 4. Damaged copies of the stored study: summarise must give 0 or 2, never
#    change a folder it refused, and never crash.
def mutate_text(text):
    lines = text.split("\n")
    m = rng.randrange(8)
    k = rng.randrange(max(1, len(lines) - 1))
    if m == 0:
        return text[: rng.randrange(len(text) + 1)]
    if m == 1:
        del lines[k]
    elif m == 2:
        lines.insert(k, lines[k])
    elif m == 3:
        f = lines[k].split(",")
        f[rng.randrange(len(f))] = rng.choice(["nan", "inf", "-1e300", "", "x", "1e999", "-0"])
        lines[k] = ",".join(f)
    elif m == 4:
        lines[k] = lines[k] + "\r"
    elif m == 5:
        j = rng.randrange(len(lines))
        lines[k], lines[j] = lines[j], lines[k]
    elif m == 6:
        lines[k] = "".join(chr(rng.randrange(32, 127)) for _ in range(30))
    else:
        return ""
    return "\n".join(lines)
names = ["eigenvalues.csv", "realisations.csv", "as_run.prm"]
for case in range(30):
    copy = os.path.join(work, f"stored_{case}")
    shutil.copytree(study, copy)
    name = rng.choice(names)
    path = os.path.join(copy, name)
    with open(path, encoding="latin-1") as f:
        text = f.read()
    with open(path, "w", encoding="latin-1") as f:
        f.write(mutate_text(text))
    run("stored folder", f"{name} damaged (case {case})", ["summarise", copy], watch=copy)

total = sum(counts.values())
print(f"fuzz_runs: {total} cases ({', '.join(f'{k} {v}' for k, v in counts.items())}), "
      f"{len(failures)} failures")
print("outcomes (kind, status): " +
      ", ".join(f"{k} {s}: {n}" for (k, s), n in sorted(outcomes.items())))
for f in failures:
    print("FAIL:", f)
sys.exit(1 if failures else 0)
