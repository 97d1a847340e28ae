#!/usr/bin/env python3
"""alloyspec benchmarks (not part of ctest): measured side by side in one run.

  1. tuned vs baseline eigen-solver: time per realisation and eigenvalues/s,
     with the ratio, for two box sizes and two k;
  2. throughput with 1 and 2 MPI ranks;
  3. growth of the time per realisation with the number of unknowns
     (exponent of a least-squares power law over three sizes);
  4. accuracy per cost against a do-it-yourself route: second-order finite
     differences on a cell-centred grid of the same model, solved with SciPy's
     ARPACK shift-invert, lowest 50 Dirichlet eigenvalues of one fixed
     realisation against a high-order finite-element reference.

Usage: bench.py ALLOYSPEC_EXE [--quick] [--work DIR]
"""
import argparse
import csv
import json
import math
import os
import shutil
import subprocess
import sys
import time

MPIRUN = ["mpirun", "--allow-run-as-root", "--oversubscribe"]


def run_study(exe, work, name, sets, ranks=1):
    out = os.path.join(work, name)
    shutil.rmtree(out, ignore_errors=True)
    cmd = [exe, "run", "--no-progress", "--output", out]
    for s in sets:
        cmd += ["--set", s]
    if ranks > 1:
        cmd = MPIRUN + ["-np", str(ranks)] + cmd
    env = dict(os.environ, OPENBLAS_NUM_THREADS="1", OMP_NUM_THREADS="1")
    start = time.perf_counter()
    subprocess.run(cmd, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, env=env)
    wall = time.perf_counter() - start
    with open(os.path.join(out, "realisations.csv")) as f:
        rows = list(csv.DictReader(f))
    with open(os.path.join(out, "run.json")) as f:
        manifest = json.load(f)
    eig = {}
    with open(os.path.join(out, "eigenvalues.csv")) as f:
        for r in csv.DictReader(f):
            eig.setdefault((int(r["realisation"]), r["boundary"]), []).append(float(r["eigenvalue"]))
    seconds = [float(r["solve_seconds"]) for r in rows]
    return {"per_solve": sum(seconds) / len(seconds), "n": [int(r["n_eigenvalues"]) for r in rows],
            "solve_phase": manifest["timings_seconds"]["solve"], "wall": wall, "eigenvalues": eig,
            "dofs": manifest["degrees_of_freedom"]}


def box(L, k, realisations, extra=()):
    return [f"lattice/cells={L},{L},{L}", f"study/realisations={realisations}", f"spectrum/eigenvalues={k}",
            "spectrum/boundary conditions=dirichlet", "study/energies=0:0.5:4", *extra]


def section(title):
    print(f"\n== {title}")
    sys.stdout.flush()


def tuned_vs_baseline(exe, work, quick):
    section("1. tuned vs baseline solver (Q2, 2 elements per cell, Dirichlet, per realisation)")
    sizes = [(4, 20), (4, 50), (6, 20), (6, 50)] if quick else [(8, 50), (8, 200), (12, 50), (12, 200)]
    reps = 2 if quick else 1
    print(f"{'L':>3} {'k':>4} {'DoFs':>8} {'baseline s':>11} {'tuned s':>9} {'baseline eig/s':>15} "
          f"{'tuned eig/s':>12} {'speed-up':>9}")
    for L, k in sizes:
        res = {}
        for method in ("baseline", "tuned"):
            res[method] = run_study(exe, work, f"tvb_{L}_{k}_{method}", box(L, k, reps, [f"spectrum/solver={method}"]))
        b, t = res["baseline"], res["tuned"]
        # Both lists are inertia-verified; they must hold the same eigenvalues.
        for key in b["eigenvalues"]:
            n = min(len(b["eigenvalues"][key]), len(t["eigenvalues"][key]))
            worst = max(abs(x - y) / max(abs(x), 1) for x, y in zip(b["eigenvalues"][key][:n], t["eigenvalues"][key][:n]))
            assert worst < 1e-8, f"tuned and baseline disagree by {worst}"
        print(f"{L:>3} {k:>4} {b['dofs']['dirichlet']:>8} {b['per_solve']:>11.3f} {t['per_solve']:>9.3f} "
              f"{k / b['per_solve']:>15.1f} {k / t['per_solve']:>12.1f} {b['per_solve'] / t['per_solve']:>8.2f}x")


def mpi_throughput(exe, work, quick):
    section("2. throughput with 1 and 2 MPI ranks (same study, solve phase)")
    L, k, n = (4, 20, 4) if quick else (6, 40, 8)
    one = run_study(exe, work, "mpi1", box(L, k, n))
    two = run_study(exe, work, "mpi2", box(L, k, n), ranks=2)
    r1, r2 = n / one["solve_phase"], n / two["solve_phase"]
    print(f"L={L}, k={k}, {n} realisations: 1 rank {r1:.3f} realisations/s, 2 ranks {r2:.3f} realisations/s, "
          f"ratio {r2 / r1:.2f} (ideal 2 on 2 free cores)")


def growth(exe, work, quick):
    section("3. time per realisation against the number of unknowns (Q2, r=2, k=40)")
    sizes = [3, 4, 5] if quick else [4, 6, 8]
    pts = []
    for L in sizes:
        r = run_study(exe, work, f"growth_{L}", box(L, 40, 1))
        pts.append((r["dofs"]["dirichlet"], r["per_solve"]))
        print(f"L={L}: {pts[-1][0]} DoFs, {pts[-1][1]:.3f} s")
    xs = [math.log(n) for n, _ in pts]
    ys = [math.log(t) for _, t in pts]
    mx, my = sum(xs) / len(xs), sum(ys) / len(ys)
    slope = sum((x - mx) * (y - my) for x, y in zip(xs, ys)) / sum((x - mx) ** 2 for x in xs)
    print(f"time ~ DoFs^{slope:.2f} (least squares over {len(pts)} sizes)")


# ---------------------------------------------------------------------------
# 4. Do-it-yourself finite differences against the finite elements.

def fixed_cells(L):
    """Invented binary-alloy pattern (20 % of cells at 1.5), deterministic."""
    state = 12345
    values = []
    for n in range(L ** 3):
        state = (1103515245 * state + 12345) % 2 ** 31  # an LCG: only needs to be reproducible
        values.append(1.5 if state / 2 ** 31 < 0.2 else 0.0)
    return values


def write_cells(path, L, values):
    with open(path, "w") as f:
        f.write("# invented binary-alloy pattern for the benchmark\n")
        for k in range(L):
            for j in range(L):
                for i in range(L):
                    f.write(f"{i} {j} {k} {values[i + L * (j + L * k)]}\n")


def fd_eigenvalues(L, values, n, k):
    """Cell-centred 7-point Laplacian with n points per cell edge; Dirichlet at
    the box faces by odd reflection (ghost value = -first value), second order."""
    import numpy as np
    import scipy.sparse as sp
    import scipy.sparse.linalg as sla
    m = L * n
    h = 1.0 / n
    main = np.full(m, 2.0)
    main[0] = main[-1] = 3.0  # ghost node: u_ghost = -u_first
    d1 = sp.diags([main, -np.ones(m - 1), -np.ones(m - 1)], [0, -1, 1]) / h ** 2
    eye = sp.identity(m)
    lap = (sp.kron(sp.kron(d1, eye), eye) + sp.kron(sp.kron(eye, d1), eye) + sp.kron(sp.kron(eye, eye), d1)).tocsc()
    idx = np.arange(m) // n
    v = np.array(values).reshape(L, L, L)  # [k][j][i]
    pot = v[idx[:, None, None], idx[None, :, None], idx[None, None, :]].ravel()
    A = (lap + sp.diags(pot)).tocsc()
    start = time.perf_counter()
    w = sla.eigsh(A, k=k, sigma=min(values) - 0.5, which="LM", return_eigenvectors=False)
    return sorted(w), time.perf_counter() - start, m ** 3


def accuracy_per_cost(exe, work, quick):
    section("4. accuracy per cost: FE (this code) vs do-it-yourself FD + ARPACK, lowest 50 Dirichlet eigenvalues")
    try:
        import scipy  # noqa: F401
    except ImportError:
        print("SciPy is not installed (Debian: apt-get install python3-scipy); skipped")
        return
    L, k = (3, 50) if quick else (4, 50)
    values = fixed_cells(L)
    cells = os.path.join(work, "bench_cells.txt")
    write_cells(cells, L, values)
    fixed = [f"lattice/cells={L},{L},{L}", "potential/law=file", f"potential/file={cells}", "study/realisations=1",
             f"spectrum/eigenvalues={k + 10}", "spectrum/boundary conditions=dirichlet", "study/energies=0:0.5:4"]

    def fe(p, r):
        res = run_study(exe, work, f"acc_q{p}_r{r}", fixed + [f"discretisation/degree={p}", f"discretisation/elements per cell={r}"])
        return res["eigenvalues"][(0, "dirichlet")][:k], res["per_solve"], res["dofs"]["dirichlet"]

    ref_p, ref_r = (4, 3) if quick else (4, 4)
    reference, ref_time, ref_dofs = fe(ref_p, ref_r)
    print(f"reference: FE Q{ref_p}, {ref_r} elements per cell ({ref_dofs} DoFs, {ref_time:.1f} s)")

    def err(values_):
        return max(abs(a - b) / abs(b) for a, b in zip(values_, reference))

    fe_rows = []
    for p, r in ([(2, 1), (2, 2), (3, 1)] if quick else [(2, 1), (2, 2), (3, 1), (3, 2)]):
        v, t, dofs = fe(p, r)
        fe_rows.append((f"FE Q{p}, r={r}", dofs, err(v), t))
    fd_rows = []
    for n in ([2, 4, 6] if quick else [2, 4, 6, 8]):
        v, t, dofs = fd_eigenvalues(L, values, n, k)
        fd_rows.append((f"FD n={n}", dofs, err(v), t))
    print(f"{'method':<14} {'unknowns':>9} {'max rel. error':>15} {'time s':>8}")
    for row in fe_rows + fd_rows:
        print(f"{row[0]:<14} {row[1]:>9} {row[2]:>15.2e} {row[3]:>8.3f}")
    # FD time at a given error: power law through the FD points (least squares in log-log).
    xs = [math.log(r[2]) for r in fd_rows]
    ys = [math.log(r[3]) for r in fd_rows]
    mx, my = sum(xs) / len(xs), sum(ys) / len(ys)
    slope = sum((x - mx) * (y - my) for x, y in zip(xs, ys)) / sum((x - mx) ** 2 for x in xs)
    print(f"FD: time ~ error^{slope:.2f}")
    for name, _, e, t in fe_rows:
        fd_time = math.exp(my + slope * (math.log(e) - mx))
        within = min(r[2] for r in fd_rows) <= e <= max(r[2] for r in fd_rows)
        print(f"{name}: FD needs about {fd_time:.3g} s for the same error "
              f"({'interpolated' if within else 'extrapolated'}), time ratio FD/FE = {fd_time / t:.3g}")


def main():
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("exe")
    parser.add_argument("--quick", action="store_true", help="small sizes, about a minute")
    parser.add_argument("--work", default="bench-work")
    parser.add_argument("--only", default="1234", help="which parts to run, e.g. 14")
    args = parser.parse_args()
    os.makedirs(args.work, exist_ok=True)
    start = time.perf_counter()
    print(f"alloyspec benchmark ({'quick' if args.quick else 'full'}), host {os.uname().nodename}, "
          f"{os.cpu_count()} CPUs; one BLAS thread per process")
    parts = {"1": tuned_vs_baseline, "2": mpi_throughput, "3": growth, "4": accuracy_per_cost}
    for key in args.only:
        parts[key](args.exe, args.work, args.quick)
    print(f"\nbenchmark wall time {time.perf_counter() - start:.0f} s")


if __name__ == "__main__":
    main()
