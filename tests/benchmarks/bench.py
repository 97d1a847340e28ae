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


def run_study(exe, work, name, sets, ranks=1, cli=()):
    out = os.path.join(work, name)
    shutil.rmtree(out, ignore_errors=True)
    cmd = [exe, "run", "--no-progress", "--output", out, *cli]
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
            eig.setdefault((int(r["realisation"]), r["boundary"]), []).append(float(r["eigenvalue_reduced"]))
    seconds = [float(r["solve_seconds"]) for r in rows]
    return {"per_solve": sum(seconds) / len(seconds), "n": [int(r["n_eigenvalues"]) for r in rows],
            "solve_phase": manifest["timings_seconds"]["eigen_solves"], "wall": wall, "eigenvalues": eig,
            "dofs": manifest["degrees_of_freedom"], "memory_mib": manifest.get("memory_high_water_mib", float("nan"))}


def box(L, k, realisations, extra=()):
    return [f"lattice/cells={L},{L},{L}", f"study/realisations={realisations}", f"spectrum/eigenvalues={k}",
            "spectrum/boundary conditions=dirichlet", "study/energies=0 to 4 by 0.5", *extra]


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
    # One realisation shared by both ranks (--ranks-per-realisation 2): the
    # time to the answer of a single large solve, not throughput.
    L, k = (5, 30) if quick else (10, 100)
    alone = run_study(exe, work, "team1", box(L, k, 1))
    team = run_study(exe, work, "team2", box(L, k, 1), ranks=2, cli=["--ranks-per-realisation", "2"])
    worst = max(abs(x - y) / max(abs(x), 1) for x, y in
                zip(alone["eigenvalues"][(0, "dirichlet")], team["eigenvalues"][(0, "dirichlet")]))
    print(f"one realisation L={L}, k={k} ({alone['dofs']['dirichlet']} DoFs): 1 rank {alone['per_solve']:.2f} s, "
          f"a team of 2 ranks {team['per_solve']:.2f} s, speed-up {alone['per_solve'] / team['per_solve']:.2f}x "
          f"(largest relative eigenvalue difference {worst:.1e})")


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


def fit_power(xs, ys):
    """Least-squares line through (log x, log y): returns (slope, mean log x, mean log y)."""
    lx = [math.log(x) for x in xs]
    ly = [math.log(y) for y in ys]
    mx, my = sum(lx) / len(lx), sum(ly) / len(ly)
    slope = sum((x - mx) * (y - my) for x, y in zip(lx, ly)) / sum((x - mx) ** 2 for x in lx)
    return slope, mx, my


def observed_order(r1, r2, r3, d13, d23):
    """Order q with (r1^-q - r3^-q)/(r2^-q - r3^-q) = d13/d23, the model |lambda_r - lambda| = C r^-q;
    None if the three levels do not fit such a model."""
    def g(q):
        return (r1 ** -q - r3 ** -q) / (r2 ** -q - r3 ** -q) - d13 / d23
    lo, hi = 0.1, 40.0
    if d23 <= 0 or g(lo) * g(hi) > 0:
        return None
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if g(lo) * g(mid) > 0 else (lo, mid)
    return 0.5 * (lo + hi)


def peak_rss_mib():
    import resource
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024  # Linux reports KiB


def accuracy_per_cost(exe, work, quick):
    section("4. accuracy per cost: FE (this code) vs do-it-yourself FD + ARPACK, lowest 50 Dirichlet eigenvalues")
    # Before NumPy is first imported: its BLAS reads these once, and the FD side must
    # run on one thread like alloyspec.
    os.environ["OPENBLAS_NUM_THREADS"] = "1"
    os.environ["OMP_NUM_THREADS"] = "1"
    try:
        import scipy  # noqa: F401
    except ImportError:
        print("SciPy is not installed (Debian: apt-get install python3-scipy); skipped")
        return
    # L = 3 in both modes: FD needs about 15 points per cell edge for 1e-2 here, i.e.
    # (15 L)^3 unknowns, and SuperLU's 3D fill makes L = 4 cost many minutes.
    L, k = 3, 50
    fe_target, fd_target = 1e-4, 1e-2
    values = fixed_cells(L)
    cells = os.path.join(work, "bench_cells.txt")
    write_cells(cells, L, values)
    # k + 10 requested so that a cluster straddling the 50th eigenvalue is complete.
    fixed = [f"lattice/cells={L},{L},{L}", "potential/law=file", f"potential/file={cells}", "study/realisations=1",
             f"spectrum/eigenvalues={k + 10}", "spectrum/boundary conditions=dirichlet", "study/energies=0 to 4 by 0.5"]

    # The binary may be rebuilt while the benchmark runs; rows from two builds are not comparable.
    exe_mtime = os.stat(exe).st_mtime
    runs = {}

    def fe(p, r):
        if (p, r) not in runs:
            res = run_study(exe, work, f"acc_q{p}_r{r}",
                            fixed + [f"discretisation/degree={p}", f"discretisation/elements per cell={r}"])
            runs[(p, r)] = (res["eigenvalues"][(0, "dirichlet")][:k], res["per_solve"], res["dofs"]["dirichlet"],
                            res["memory_mib"])
        return runs[(p, r)]

    # The reference is the finest of a series of Q4 meshes; the coarser ones show how
    # far the reference is from converged.
    ref_p = 4
    ref_levels = [1, 2] if quick else [2, 3, 4]
    for r in ref_levels:
        fe(ref_p, r)
    reference, ref_time, ref_dofs, _ = fe(ref_p, ref_levels[-1])
    print(f"reference: FE Q{ref_p}, {ref_levels[-1]} elements per cell ({ref_dofs} DoFs, {ref_time:.1f} s)")

    def rel(values_, against):
        return [abs(a - b) / abs(b) for a, b in zip(values_, against)]

    def err(values_):
        return max(rel(values_, reference))

    # Self-convergence of the reference: |lambda_r - lambda| ~ C r^-q. With three levels q
    # is measured on the eigenvalue that moves most between the two finest levels; with two
    # it is assumed to be the a-priori 2p.
    diffs = {r: rel(fe(ref_p, r)[0], reference) for r in ref_levels[:-1]}
    for r in ref_levels[:-1]:
        print(f"reference check: Q{ref_p} r={r} differs from Q{ref_p} r={ref_levels[-1]} by at most {max(diffs[r]):.2e}")
    r2, r3 = ref_levels[-2], ref_levels[-1]
    worst = max(range(k), key=lambda i: diffs[r2][i])
    q = None
    if len(ref_levels) >= 3:
        r1 = ref_levels[-3]
        q = observed_order(r1, r2, r3, diffs[r1][worst], diffs[r2][worst])
    q_label = "observed" if q is not None else "assumed a-priori 2p"
    if q is None:
        q = 2 * ref_p
    ref_error = diffs[r2][worst] * r3 ** -q / (r2 ** -q - r3 ** -q)
    print(f"reference error estimate: {ref_error:.1e} (eigenvalue {worst + 1}, order {q:.2f} {q_label}; "
          f"an estimate from the series, not a bound)")

    fe_pairs = [(2, 1), (3, 1), (2, 2), (4, 1)] if quick else [(2, 1), (3, 1), (2, 2), (3, 2), (4, 2), (3, 3)]
    fe_rows = []
    for p, r in fe_pairs:
        v, t, dofs, mem = fe(p, r)
        fe_rows.append((f"FE Q{p}, r={r}", dofs, err(v), t, mem))
    fe_rows.sort(key=lambda row: row[3])
    if os.stat(exe).st_mtime != exe_mtime:
        print(f"WARNING: {exe} was rebuilt while the FE rows ran; they may come from different builds")
    best_fe = min(row[2] for row in fe_rows)
    if ref_error > 0.1 * best_fe:
        print(f"WARNING: the reference error estimate {ref_error:.1e} is not far below the best compared row "
              f"({best_fe:.1e}); the errors of the most accurate rows are unreliable")

    # FD rows until the first one reaches the FD target; each n costs roughly 2.5 times the
    # previous in time here, and the memory guard stops before SuperLU's fill exhausts RAM.
    fd_ns = [2, 4, 6] if quick else [2, 4, 6, 8, 12, 15, 18]
    memory_limit_mib = 12 * 1024  # half the 24 GiB machine, leaving room for other work
    fd_rows = []
    for n in fd_ns:
        if len(fd_rows) >= 2:
            (_, n_a, _, _, m_a), (_, n_b, _, _, m_b) = fd_rows[-2:]
            predicted = m_b * ((L * n) ** 3 / n_b) ** (math.log(m_b / m_a) / math.log(n_b / n_a))
            if predicted > memory_limit_mib:
                print(f"FD n={n} skipped: predicted peak memory {predicted:.0f} MiB > {memory_limit_mib} MiB")
                break
        v, t, dofs = fd_eigenvalues(L, values, n, k)
        fd_rows.append((f"FD n={n}", dofs, err(v), t, peak_rss_mib()))
        if not quick and fd_rows[-1][2] <= fd_target:
            break

    print(f"{'method':<14} {'unknowns':>9} {'max rel. error':>15} {'time s':>8} {'peak MiB':>9}")
    for row in fe_rows + fd_rows:
        print(f"{row[0]:<14} {row[1]:>9} {row[2]:>15.2e} {row[3]:>8.3f} {row[4]:>9.0f}")
    print("(FE time: solve_seconds of realisations.csv; FD time: SuperLU factorisation + ARPACK; "
          "FD peak MiB is the Python process high-water mark, FE's from run.json)")

    fd_n = [int(r[0].split("=")[1]) for r in fd_rows]
    e_slope, _, _ = fit_power(fd_n[-3:], [r[2] for r in fd_rows[-3:]])
    # The fit uses the finest three FD rows only: the coarsest are pre-asymptotic.
    slope, mx, my = fit_power([r[2] for r in fd_rows[-3:]], [r[3] for r in fd_rows[-3:]])
    fit_label = "n=" + ",".join(str(n) for n in fd_n[-3:])
    print(f"FD: error ~ n^{e_slope:.2f}, time ~ error^{slope:.2f} (least squares over {fit_label})")

    def fd_time_at(e):
        inside = min(r[2] for r in fd_rows[-3:]) <= e <= max(r[2] for r in fd_rows[-3:])
        return math.exp(my + slope * (math.log(e) - mx)), "interpolated" if inside else "extrapolated"

    for name, _, e, t, _ in fe_rows:
        fd_time, how = fd_time_at(e)
        print(f"{name}: FD needs about {fd_time:.3g} s for the same error ({how}), time ratio FD/FE = {fd_time / t:.3g}")

    # The goal: FE at <= 1e-4 in <= 1/10 of the FD time for <= 1e-2.
    fe_hit = next((row for row in fe_rows if row[2] <= fe_target), None)
    fd_hit = next((row for row in fd_rows if row[2] <= fd_target), None)
    fd_exact, fd_exact_how = fd_time_at(fd_target)
    if fe_hit is None:
        print(f"GOAL not measured: no FE row reached {fe_target:g} (best {best_fe:.2e})"
              f"{' in quick mode' if quick else ''}")
    else:
        if fd_hit is not None:
            fd_time, fd_desc = fd_hit[3], f"{fd_hit[0]} reaches {fd_hit[2]:.2e} in {fd_hit[3]:.3g} s (measured)"
        else:
            fd_time = fd_exact
            fd_desc = f"FD needs about {fd_exact:.3g} s for {fd_target:g} ({fd_exact_how} with the power law)"
        ratio = fe_hit[3] / fd_time
        print(f"GOAL (FE <= {fe_target:g} in <= 1/10 of the FD time for <= {fd_target:g}): "
              f"{fe_hit[0]} reaches {fe_hit[2]:.2e} in {fe_hit[3]:.3g} s; {fd_desc}; "
              f"FE/FD time = {ratio:.3f}: {'MET' if ratio <= 0.1 else 'NOT met'}")
        if fd_hit is not None:
            print(f"  for comparison, at exactly {fd_target:g} the FD power law gives {fd_exact:.3g} s "
                  f"({fd_exact_how}), FE/FD time = {fe_hit[3] / fd_exact:.3f}")
    print("notes on fairness:\n"
          f"  - FE does more work per solve: {k + 10} eigenpairs with eigenvectors, a second factorisation for the\n"
          "    inertia check, and IPR/cell weights; FD returns 50 eigenvalues only. Mesh, DoFs and the\n"
          "    stiffness/mass assembly (once per study) are outside the FE time; the FD matrix build is outside\n"
          "    the FD time.\n"
          "  - FD uses SciPy's default route (SuperLU with its default COLAMD column ordering, an LU of a\n"
          "    symmetric matrix); a symmetric fill-reducing ordering or a sparse Cholesky would make FD faster.\n"
          "  - ARPACK runs to machine precision (tol=0), alloyspec's Krylov-Schur to 1e-12 relative.\n"
          "  - Each side's first row past its target overshoots it, so the goal ratio uses the cost of a\n"
          "    somewhat better result than required on both sides; timings are single runs.")


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
