// ordering_probe: the factor of a finite-element pencil's shifted matrix under
// three fill-reducing orderings, side by side, through MUMPS's own C interface:
// MUMPS's automatic choice (ICNTL(7) = 7, what PETSc's interface leaves it
// at), PORD (ICNTL(7) = 4), and a nested dissection computed by METIS_NodeND
// and handed to MUMPS as a user permutation (ICNTL(7) = 1, PERM_IN), what the
// solver's one-process factor uses.
//
// The matrix has the sparsity of the solver's K − σM on an L³ box (Q_p
// elements, r per cell edge, every node a row as in the solver, whose
// Dirichlet rows stay in the matrix as constrained rows). Its values are
// invented: symmetric, off-diagonals from a fixed sequence, and a diagonal
// that makes it either diagonally dominant (positive definite, as K − σM
// with σ below the spectrum) or, shifted, indefinite. Fill and operation
// counts depend on the pattern and the ordering only while no pivot is
// delayed, so they are those of the real pencil; the inertia of the
// indefinite variant must be the same under both orderings (a check that the
// user permutation keeps MUMPS's negative-pivot count, INFOG(12)).
//
// Usage: ordering_probe L p r [repeats] [shift]. Prints one JSON object per ordering.
#include <dmumps_c.h>
#include <metis.h>
#include <mpi.h>

#include <algorithm>
#include <chrono>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <set>
#include <string>
#include <vector>

namespace
{
  struct Pattern
  {
    int                  n = 0;
    std::vector<int>     row, col; // upper triangle, 1-based (MUMPS)
    std::vector<double>  value;
    std::vector<idx_t>   xadj, adjncy; // full graph without the diagonal, 0-based (METIS)
  };

  /** Q_p elements, r per cell edge, on an L³ box: nodes (p r L + 1)³, couplings within an element. */
  Pattern make_pattern(int L, int p, int r, double shift)
  {
    const int e = L * r, nodes = p * e + 1;
    Pattern   pat;
    pat.n = nodes * nodes * nodes;
    std::vector<std::vector<int>> neighbours(static_cast<std::size_t>(pat.n));
    auto id = [nodes](int i, int j, int k) { return i + nodes * (j + nodes * k); };
    std::vector<int> local;
    for (int ek = 0; ek < e; ++ek)
      for (int ej = 0; ej < e; ++ej)
        for (int ei = 0; ei < e; ++ei)
          {
            local.clear();
            for (int c = 0; c <= p; ++c)
              for (int b = 0; b <= p; ++b)
                for (int a = 0; a <= p; ++a)
                  local.push_back(id(p * ei + a, p * ej + b, p * ek + c));
            for (const int x : local)
              for (const int y : local)
                if (x != y)
                  neighbours[std::size_t(x)].push_back(y);
          }
    pat.xadj.push_back(0);
    std::uint64_t state = 12345;
    for (int i = 0; i < pat.n; ++i)
      {
        auto &nb = neighbours[std::size_t(i)];
        std::sort(nb.begin(), nb.end());
        nb.erase(std::unique(nb.begin(), nb.end()), nb.end());
        double off = 0;
        for (const int j : nb)
          {
            pat.adjncy.push_back(j);
            if (j > i)
              {
                state = state * 6364136223846793005ULL + 1442695040888963407ULL;
                const double v = -0.5 - double(state >> 40) / double(1ULL << 24);
                pat.row.push_back(i + 1);
                pat.col.push_back(j + 1);
                pat.value.push_back(v);
              }
          }
        pat.xadj.push_back(idx_t(pat.adjncy.size()));
        (void)off;
      }
    // Diagonal: the absolute row sum plus 1 (dominant), minus the shift.
    std::vector<double> row_sum(static_cast<std::size_t>(pat.n), 0.0);
    for (std::size_t t = 0; t < pat.value.size(); ++t)
      {
        row_sum[std::size_t(pat.row[t] - 1)] += std::abs(pat.value[t]);
        row_sum[std::size_t(pat.col[t] - 1)] += std::abs(pat.value[t]);
      }
    for (int i = 0; i < pat.n; ++i)
      {
        pat.row.push_back(i + 1);
        pat.col.push_back(i + 1);
        pat.value.push_back(row_sum[std::size_t(i)] + 1.0 - shift);
      }
    return pat;
  }

  double seconds_since(std::chrono::steady_clock::time_point start)
  {
    return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  }

  void run(const Pattern &pat, const char *name, int ordering, const std::vector<int> *permutation,
           int repeats)
  {
    DMUMPS_STRUC_C id{};
    id.comm_fortran = -987654; // MPI_COMM_WORLD, MUMPS's convention
    id.par = 1;
    id.sym = 2; // symmetric, not assumed definite: LDLᵀ with pivoting, as PETSc sets it
    id.job = -1;
    dmumps_c(&id);
    id.icntl[0] = id.icntl[1] = id.icntl[2] = -1; // quiet
    id.icntl[3] = 0;
    id.icntl[12] = 1; // ICNTL(13): root without ScaLAPACK (inertia), as ShiftedFactor
    id.icntl[23] = 1; // ICNTL(24): null-pivot detection, as ShiftedFactor
    std::vector<int> perm_in;
    id.icntl[6] = ordering; // ICNTL(7): 1 the user's PERM_IN, 4 PORD, 7 MUMPS's automatic choice
    if (permutation)
      {
        id.icntl[11] = 1; // ICNTL(12) = 1: the usual ordering, as the solver sets it
        perm_in      = *permutation;
        id.perm_in   = perm_in.data();
      }
    std::vector<int>    irn(pat.row), jcn(pat.col);
    std::vector<double> a(pat.value);
    id.n   = pat.n;
    id.nnz = static_cast<MUMPS_INT8>(a.size());
    id.irn = irn.data();
    id.jcn = jcn.data();
    id.a   = a.data();
    auto start = std::chrono::steady_clock::now();
    id.job = 1;
    dmumps_c(&id);
    const double analysis = seconds_since(start);
    double factor_best = 1e300, solve_best = 1e300;
    const int nrhs = 8;
    std::vector<double> rhs;
    for (int rep = 0; rep < repeats; ++rep)
      {
        start  = std::chrono::steady_clock::now();
        id.job = 2;
        dmumps_c(&id);
        factor_best = std::min(factor_best, seconds_since(start));
        rhs.assign(std::size_t(pat.n) * nrhs, 1.0);
        id.rhs  = rhs.data();
        id.nrhs = nrhs;
        id.lrhs = pat.n;
        start   = std::chrono::steady_clock::now();
        id.job  = 3;
        dmumps_c(&id);
        solve_best = std::min(solve_best, seconds_since(start));
      }
    const long long entries = id.infog[28] >= 0 ? id.infog[28] : -1000000LL * id.infog[28];
    std::printf("{\"ordering\": \"%s\", \"n\": %d, \"error\": %d, \"factor_entries\": %lld, "
                "\"factorisation_flops\": %.6g, \"negative_pivots\": %d, \"analysis_seconds\": %.4f, "
                "\"factorisation_seconds\": %.4f, \"solve_8_columns_seconds\": %.4f}\n",
                name, pat.n, id.infog[0], entries, id.rinfog[2], id.infog[11], analysis, factor_best,
                solve_best);
    std::fflush(stdout);
    id.job = -2;
    dmumps_c(&id);
  }
} // namespace

int main(int argc, char **argv)
{
  MPI_Init(&argc, &argv);
  if (argc < 4)
    {
      std::fprintf(stderr, "usage: ordering_probe L p r [repeats] [shift]\n");
      return 2;
    }
  const int    L = std::atoi(argv[1]), p = std::atoi(argv[2]), r = std::atoi(argv[3]);
  const int    repeats = argc > 4 ? std::atoi(argv[4]) : 3;
  const double shift   = argc > 5 ? std::atof(argv[5]) : 0.0;
  const Pattern pat    = make_pattern(L, p, r, shift);

  // Nested dissection by METIS on the full graph (METIS 5 manual, METIS_NodeND).
  idx_t              nvtxs = pat.n;
  std::vector<idx_t> perm(static_cast<std::size_t>(pat.n)), iperm(static_cast<std::size_t>(pat.n));
  idx_t              options[METIS_NOPTIONS];
  METIS_SetDefaultOptions(options);
  auto         start = std::chrono::steady_clock::now();
  std::vector<idx_t> xadj(pat.xadj), adjncy(pat.adjncy);
  if (METIS_NodeND(&nvtxs, xadj.data(), adjncy.data(), nullptr, options, perm.data(), iperm.data()) !=
      METIS_OK)
    {
      std::fprintf(stderr, "METIS_NodeND failed\n");
      return 1;
    }
  const double metis_seconds = seconds_since(start);
  // MUMPS's PERM_IN(i) is the position of variable i in the elimination
  // order (1-based); METIS's iperm(i) is that position (0-based).
  std::vector<int> position(static_cast<std::size_t>(pat.n));
  for (int i = 0; i < pat.n; ++i)
    position[std::size_t(i)] = int(iperm[std::size_t(i)]) + 1;
  std::printf("{\"metis_nodend_seconds\": %.4f}\n", metis_seconds);
  run(pat, "automatic", 7, nullptr, repeats);
  run(pat, "pord", 4, nullptr, repeats);
  run(pat, "metis", 1, &position, repeats);
  MPI_Finalize();
  return 0;
}
