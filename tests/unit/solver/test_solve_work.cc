// The factor work every eigen-solve reports (EigenResult::work), which the
// benchmark's roofline divides by the machine's bandwidth: checked against
// bounds that hold for any sparse Cholesky factor and against the structure
// of each solver path.
#include <alloyspec/fe/discretisation.h>
#include <alloyspec/fe/spectral_problem.h>
#include <alloyspec/model/lattice.h>
#include <alloyspec/solver/eigen_solver.h>

#include <gtest/gtest.h>
#include <petscmat.h>

#include <cmath>
#include <memory>
#include <string>
#include <vector>

namespace alloyspec
{
  namespace
  {
    constexpr unsigned int n_wanted = 20;

    /** An invented 3³ box with two potential levels, Q2, two elements per cell (2197 unknowns). */
    struct Box
    {
      Box()
        : lattice({3, 3, 3})
      {
        d = Discretisation::create(lattice, DiscretisationSettings{2, 2},
                                   BoundaryConditions(3, Boundary::dirichlet));
        d->make_grid();
        d->setup_system();
        d->assemble_fixed();
        problem = d->make_problem();
        std::vector<double> q(lattice.n_cells());
        for (std::size_t n = 0; n < q.size(); ++n)
          q[n] = (n % 3 == 0) ? 1.5 : 0.0;
        d->assemble_potential(q, *problem);
      }
      Lattice                          lattice;
      std::unique_ptr<Discretisation>  d;
      std::unique_ptr<SpectralProblem> problem;
    };

    /** Entries of the lower triangle of K's pattern (the diagonal included). */
    double lower_pattern_entries(Mat K, PetscInt &n)
    {
      MatInfo info;
      MatGetInfo(K, MAT_GLOBAL_SUM, &info);
      MatGetSize(K, &n, nullptr);
      // AIJ stores both triangles of the symmetric pattern.
      return 0.5 * (info.nz_used + double(n));
    }

    EigenResult solve(const Box &box, const std::string &method)
    {
      EigenSolverSettings settings;
      settings.n_eigenvalues = n_wanted;
      settings.method        = method;
      EigenSolver solver(settings);
      return solver.solve(*box.problem);
    }
  } // namespace

  TEST(SolveWork, FactorSizeLiesBetweenTheMatrixAndADenseTriangle)
  {
    const Box         box;
    const EigenResult result = solve(box, "tuned");
    PetscInt          n      = 0;
    const double      lower  = lower_pattern_entries(box.problem->K, n);
    // Elimination only adds entries: the filled graph contains the graph of
    // the matrix (George & Liu, Computer Solution of Large Sparse Positive
    // Definite Systems, 1981, ch. 5 — from memory), and a factor has at most
    // the n(n+1)/2 entries of a dense triangle.
    EXPECT_GE(double(result.work.factor_entries), lower);
    EXPECT_LE(double(result.work.factor_entries), 0.5 * double(n) * double(n + 1));
  }

  TEST(SolveWork, BlockSolverCountsItsBlocksAndTwoFactorisations)
  {
    const Box         box;
    const EigenResult result = solve(box, "tuned");
    const SolveWork  &w      = result.work;
    ASSERT_EQ(result.attempts, 1u) << "a retry changes the counts below";
    // One factorisation at the shift, one for the inertia check of the list.
    EXPECT_EQ(w.numeric_factorisations, 2u);
    EXPECT_GT(w.factorisation_flops, 0.0);
    // Every block has at least one column and at most MUMPS's block, so it
    // passes over the factor exactly once; and the basis needs more columns
    // than the pairs it returns.
    EXPECT_GE(w.rhs_block, 1u);
    EXPECT_GE(w.solved_columns, w.solve_calls);
    EXPECT_LE(w.solved_columns, w.solve_calls * std::size_t(w.rhs_block));
    EXPECT_GE(w.factor_passes, w.solve_calls);
    EXPECT_GE(w.solved_columns, std::size_t(n_wanted));
    // The timed parts lie inside the timed whole.
    EXPECT_GT(w.factor_solve_seconds, 0.0);
    EXPECT_GT(w.factorisation_seconds, 0.0);
    EXPECT_LE(w.factor_solve_seconds + w.factorisation_seconds, w.seconds);
  }

  TEST(SolveWork, SingleVectorPathCountsOneColumnPerSolve)
  {
    const Box         box;
    const EigenResult result = solve(box, "baseline");
    const SolveWork  &w      = result.work;
    ASSERT_EQ(result.attempts, 1u);
    EXPECT_EQ(w.solved_columns, w.solve_calls);
    EXPECT_EQ(w.factor_passes, w.solve_calls);
    // A Krylov space holding n_wanted converged vectors took at least that many solves.
    EXPECT_GE(w.solve_calls, std::size_t(n_wanted));
    EXPECT_EQ(w.numeric_factorisations, 2u);
    EXPECT_GT(w.factor_entries, 0u);
    // Not exposed by SLEPc: reported as missing, not as zero.
    EXPECT_TRUE(std::isnan(w.factor_solve_seconds));
  }

  // Band-edge mode: the inertia count's factor at the cutoff also drives
  // shift-and-invert, so a list below the cutoff costs one numeric
  // factorisation. Independent truth: the baseline (SLEPc's Krylov–Schur with
  // its own factorisations), which must find the same eigenvalues.
  TEST(SolveWork, BandEdgeListCostsOneFactorisation)
  {
    const Box box;
    // At the first clear gap after the 4th eigenvalue of the fixed-k list
    // (the symmetric box has degenerate levels).
    const EigenResult reference = solve(box, "baseline");
    std::size_t       below     = 4;
    while (below < reference.eigenvalues.size() &&
           reference.eigenvalues[below] - reference.eigenvalues[below - 1] < 1e-6)
      ++below;
    ASSERT_LT(below, reference.eigenvalues.size()) << "no gap in the list";
    const double cutoff = 0.5 * (reference.eigenvalues[below - 1] + reference.eigenvalues[below]);
    EigenSolverSettings settings;
    settings.energy_cutoff = cutoff;
    settings.method        = "tuned";
    EigenSolver       solver(settings);
    const EigenResult result = solver.solve(*box.problem);
    EXPECT_EQ(result.work.numeric_factorisations, 1u);
    EXPECT_EQ(result.inertia_count, below);
    ASSERT_EQ(result.eigenvalues.size(), below);
    EXPECT_EQ(result.complete_up_to, cutoff);
    // Both lists converge to 1e-12 relative; 1e-10 is the agreement the
    // solver paths are held to (common practice, no source).
    constexpr double agreement = 1e-10;
    for (std::size_t j = 0; j < below; ++j)
      {
        EXPECT_NEAR(result.eigenvalues[j], reference.eigenvalues[j],
                    agreement * std::abs(reference.eigenvalues[j]))
          << "eigenvalue " << j;
        EXPECT_LT(result.residuals[j], 1e-8) << "residual of pair " << j;
      }
  }
} // namespace alloyspec

