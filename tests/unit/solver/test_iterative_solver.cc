// The iterative eigen-solver (LOBPCG with algebraic multigrid, spectrum/solver
// = iterative) against the direct shift-and-invert path, against exact
// discrete spectra of free boxes (Kronecker sums of 1D spectra), and its
// eigenvalue enclosures with and without an inertia count.
#include <alloyspec/fe/discretisation.h>
#include <alloyspec/fe/spectral_problem.h>
#include <alloyspec/model/lattice.h>
#include <alloyspec/solver/eigen_solver.h>
#include <alloyspec/solver/error_estimate.h>

#include <Eigen/Dense>
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <random>

namespace alloyspec
{
  namespace
  {
    /**
     * Iterative and direct eigenvalues agree to this, relative to max(|λ|, 1):
     * the requirement of the issue that introduced the iterative solver. Both
     * converge to relative residuals ≤ 1e-11, and an eigenvalue's error is of
     * the order of the residual squared over the gap, far below it.
     */
    constexpr double agreement = 1e-9;
    /** Residual tolerance asked of both solvers here. */
    constexpr double tolerance = 1e-11;

    struct Built
    {
      std::unique_ptr<Discretisation>  discretisation;
      std::unique_ptr<SpectralProblem> problem;
    };

    Built build(const std::vector<unsigned int> &cells, const DiscretisationSettings &ds,
                const BoundaryConditions &bcs, const std::vector<double> &q)
    {
      Built b;
      b.discretisation = Discretisation::create(Lattice(cells), ds, bcs);
      b.discretisation->make_grid();
      b.discretisation->setup_system();
      b.discretisation->assemble_fixed();
      b.problem = b.discretisation->make_problem();
      b.discretisation->assemble_potential(q, *b.problem);
      return b;
    }

    EigenResult solve(const SpectralProblem &problem, const std::string &method, unsigned int k,
                      std::size_t inertia_limit = 300000)
    {
      EigenSolverSettings es;
      es.n_eigenvalues = k;
      es.tolerance     = tolerance;
      es.method        = method;
      es.inertia_limit = inertia_limit;
      EigenSolver solver(es);
      return solver.solve(problem);
    }

    /** Invented test data: i.i.d. uniform cell values on [0, 1.5]. */
    std::vector<double> random_cells(std::size_t n, unsigned int seed)
    {
      std::mt19937                           rng(seed);
      std::uniform_real_distribution<double> law(0.0, 1.5);
      std::vector<double>                    q(n);
      for (double &x : q)
        x = law(rng);
      return q;
    }

    double relative(double a, double b) { return std::abs(a - b) / std::max(1.0, std::abs(b)); }

    void expect_enclosed(const EigenResult &r, const std::vector<double> &truth, const std::string &what)
    {
      ASSERT_EQ(r.enclosure_lower.size(), r.eigenvalues.size()) << what;
      ASSERT_EQ(r.enclosure_upper.size(), r.eigenvalues.size()) << what;
      for (std::size_t i = 0; i < std::min(truth.size(), r.eigenvalues.size()); ++i)
        {
          EXPECT_LE(r.enclosure_lower[i], truth[i]) << what << " pair " << i;
          EXPECT_GE(r.enclosure_upper[i], truth[i]) << what << " pair " << i;
        }
    }
  } // namespace

  TEST(IterativeSolver, AgreesWithDirectPathOnRandomCells)
  {
    using B = Boundary;
    const std::vector<BoundaryConditions> conditions{
      {B::dirichlet, B::dirichlet, B::dirichlet},
      {B::neumann, B::neumann, B::neumann},
      {B::periodic, B::periodic, B::dirichlet}, // a slab: periodic in x and y
      {B::neumann, B::neumann, B::periodic}};   // a wire along z with free side faces
    const unsigned int k = 12;
    for (const unsigned int L : {6u, 8u})
      for (const auto &bcs : conditions)
        {
          const Built b = build({L, L, L}, DiscretisationSettings{2, 1}, bcs,
                                random_cells(std::size_t(L) * L * L, 7 + L));
          const EigenResult direct    = solve(*b.problem, "tuned", k);
          const EigenResult iterative = solve(*b.problem, "iterative", k);
          const std::string what = "L = " + std::to_string(L) + ", faces " + to_string(bcs[0]) +
                                   "/" + to_string(bcs[2]);
          EXPECT_EQ(iterative.method, "iterative") << what;
          EXPECT_EQ(iterative.verified_by, "inertia") << what;
          EXPECT_EQ(iterative.inertia_count, iterative.eigenvalues.size()) << what;
          ASSERT_GE(iterative.eigenvalues.size(), k) << what;
          ASSERT_GE(direct.eigenvalues.size(), k) << what;
          for (std::size_t i = 0; i < k; ++i)
            {
              EXPECT_LE(relative(iterative.eigenvalues[i], direct.eigenvalues[i]), agreement)
                << what << " pair " << i << ": " << iterative.eigenvalues[i] << " vs "
                << direct.eigenvalues[i];
              EXPECT_LE(iterative.residuals[i], tolerance) << what << " pair " << i;
            }
          // The direct list is inertia-verified: the truth for the enclosures.
          expect_enclosed(iterative, direct.eigenvalues, what);
        }
  }

  TEST(IterativeSolver, ListWithoutInertiaCountIsMarkedEnclosureOnly)
  {
    const unsigned int L = 6, k = 10;
    const Built        b = build({L, L, L}, DiscretisationSettings{2, 1},
                          BoundaryConditions(3, Boundary::dirichlet), random_cells(L * L * L, 3));
    const EigenResult direct    = solve(*b.problem, "tuned", 2 * k);
    const EigenResult iterative = solve(*b.problem, "iterative", k, /*inertia_limit=*/0);
    EXPECT_EQ(iterative.verified_by, "enclosure");
    EXPECT_EQ(iterative.inertia_count, 0u); // no count was made, none is claimed
    EXPECT_EQ(direct.verified_by, "inertia");
    EXPECT_TRUE(direct.enclosure_lower.empty()); // the direct path computes none
    expect_enclosed(iterative, direct.eigenvalues, "enclosure-only list");
    // The cut lies below the next direct eigenvalue: the assumption holds here.
    EXPECT_LT(iterative.complete_up_to, direct.eigenvalues[iterative.eigenvalues.size()]);
  }

  TEST(IterativeSolver, AutoPicksByNumberOfUnknowns)
  {
    const unsigned int L = 6;
    const Built        b = build({L, L, L}, DiscretisationSettings{2, 1},
                          BoundaryConditions(3, Boundary::dirichlet), random_cells(L * L * L, 5));
    EigenSolverSettings es;
    es.n_eigenvalues  = 8;
    es.method         = "auto";
    es.auto_crossover = b.problem->n_genuine() + 1;
    EXPECT_EQ(EigenSolver(es).solve(*b.problem).method, "tuned");
    es.auto_crossover = b.problem->n_genuine();
    EXPECT_EQ(EigenSolver(es).solve(*b.problem).method, "iterative");
  }

  namespace
  {
    /**
     * 1D element matrices of Q1 and Q2 on an element of length h, nodes in
     * order along the element (Q2: ends and midpoint at index 1). Standard
     * closed forms (from memory), checked in the test: the stiffness rows
     * sum to 0 and the mass entries to h.
     */
    void element_1d(unsigned int degree, double h, Eigen::MatrixXd &k, Eigen::MatrixXd &m)
    {
      if (degree == 1)
        {
          k = (Eigen::MatrixXd(2, 2) << 1, -1, -1, 1).finished() / h;
          m = (Eigen::MatrixXd(2, 2) << 2, 1, 1, 2).finished() * h / 6;
        }
      else
        {
          k = (Eigen::MatrixXd(3, 3) << 7, -8, 1, -8, 16, -8, 1, -8, 7).finished() / (3 * h);
          m = (Eigen::MatrixXd(3, 3) << 4, 2, -1, 2, 16, 2, -1, 2, 4).finished() * h / 30;
        }
    }

    /** Eigenvalues of the 1D pencil on [0, L], n elements of degree p, by a dense solver. */
    std::vector<double> spectrum_1d(unsigned int degree, unsigned int n_elements, double length,
                                    Boundary bc)
    {
      Eigen::MatrixXd ke, me;
      element_1d(degree, length / n_elements, ke, me);
      EXPECT_NEAR(ke.rowwise().sum().cwiseAbs().maxCoeff(), 0.0, 1e-12);
      EXPECT_NEAR(me.sum(), length / n_elements, 1e-12);
      const Eigen::Index n = Eigen::Index(degree * n_elements + 1);
      Eigen::MatrixXd    k = Eigen::MatrixXd::Zero(n, n), m = Eigen::MatrixXd::Zero(n, n);
      for (unsigned int e = 0; e < n_elements; ++e)
        {
          const Eigen::Index first = Eigen::Index(degree * e);
          k.block(first, first, degree + 1, degree + 1) += ke;
          m.block(first, first, degree + 1, degree + 1) += me;
        }
      // Dirichlet: the end nodes are removed (the space of functions vanishing there).
      const Eigen::Index skip = bc == Boundary::dirichlet ? 1 : 0, size = n - 2 * skip;
      Eigen::GeneralizedSelfAdjointEigenSolver<Eigen::MatrixXd> eig(
        k.block(skip, skip, size, size), m.block(skip, skip, size, size), Eigen::EigenvaluesOnly);
      return std::vector<double>(eig.eigenvalues().data(), eig.eigenvalues().data() + size);
    }

    /** All sums a + b + c of three 1D spectra, lowest @p count, ascending. */
    std::vector<double> kronecker_sums(const std::vector<double> &one, std::size_t count)
    {
      std::vector<double> sums;
      const std::size_t   top = std::min<std::size_t>(one.size(), 40);
      for (std::size_t a = 0; a < top; ++a)
        for (std::size_t b = 0; b < top; ++b)
          for (std::size_t c = 0; c < top; ++c)
            sums.push_back(one[a] + one[b] + one[c]);
      std::sort(sums.begin(), sums.end());
      sums.resize(count);
      return sums;
    }

    void check_free_box(unsigned int L, unsigned int degree, Boundary bc, unsigned int k,
                        std::size_t inertia_limit)
    {
      const Built b = build({L, L, L}, DiscretisationSettings{degree, 1}, BoundaryConditions(3, bc),
                            std::vector<double>(std::size_t(L) * L * L, 0.0));
      const EigenResult r = solve(*b.problem, "iterative", k, inertia_limit);
      const std::vector<double> exact =
        kronecker_sums(spectrum_1d(degree, L, double(L), bc), r.eigenvalues.size());
      const std::string what = "free box L = " + std::to_string(L) + ", Q" +
                               std::to_string(degree) + ", " + to_string(bc) + ", verified by " +
                               r.verified_by;
      EXPECT_EQ(r.method, "iterative") << what;
      EXPECT_EQ(r.verified_by, inertia_limit > 0 ? "inertia" : "enclosure") << what;
      ASSERT_GE(r.eigenvalues.size(), k) << what;
      for (std::size_t i = 0; i < r.eigenvalues.size(); ++i)
        EXPECT_LE(relative(r.eigenvalues[i], exact[i]), agreement)
          << what << " pair " << i << ": " << r.eigenvalues[i] << " vs " << exact[i];
      expect_enclosed(r, exact, what);
    }
  } // namespace

  // K and M of a tensor mesh are Kronecker sums and products of the 1D
  // matrices, so the discrete eigenvalues of the free box are exactly the
  // sums of three 1D discrete eigenvalues (PHYSICS.md, "Free box on a tensor
  // mesh"). L = 24 with Q1 keeps the suite fast (13,824 / 15,625 unknowns);
  // the Q2 box at L = 24 (103,823 / 117,649) runs in the benchmark
  // (tests/benchmarks/bench.py, part "iterative").
  TEST(IterativeSolver, FreeBoxIsSumOf1DSpectraWithInertiaCount)
  {
    for (const Boundary bc : {Boundary::dirichlet, Boundary::neumann})
      check_free_box(24, 1, bc, 20, 300000);
  }

  TEST(IterativeSolver, FreeBoxIsSumOf1DSpectraWithEnclosuresOnly)
  {
    for (const Boundary bc : {Boundary::dirichlet, Boundary::neumann})
      check_free_box(24, 1, bc, 20, 0);
    // Q2, a smaller box: the same statement for the degree used in production.
    check_free_box(8, 2, Boundary::dirichlet, 20, 0);
  }

  TEST(IterativeSolver, FreeBoxApproachesContinuumWithinErrorBound)
  {
    // Continuum: π² (n1² + n2² + n3²) / L², n_i ≥ 1 (Dirichlet) or ≥ 0
    // (Neumann) (PHYSICS.md, free box closed forms). The discrete values
    // must lie within the project's a-posteriori error bound of them.
    const unsigned int L = 6, k = 10;
    for (const Boundary bc : {Boundary::dirichlet, Boundary::neumann})
      {
        const DiscretisationSettings ds{2, 1};
        const BoundaryConditions     bcs(3, bc);
        const std::vector<double>    q(L * L * L, 0.0);
        const Built                  b = build({L, L, L}, ds, bcs, q);
        const EigenResult            r = solve(*b.problem, "iterative", k);
        std::vector<double>          continuum;
        const int                    first = bc == Boundary::dirichlet ? 1 : 0;
        for (int a = first; a < first + 6; ++a)
          for (int c = first; c < first + 6; ++c)
            for (int d = first; d < first + 6; ++d)
              continuum.push_back(M_PI * M_PI * (a * a + c * c + d * d) / double(L * L));
        std::sort(continuum.begin(), continuum.end());
        EigenSolverSettings es;
        es.n_eigenvalues = k;
        ErrorEstimator estimator(Lattice({L, L, L}), ds, bcs, es, ErrorEstimator::default_space());
        const std::vector<double> bounds = estimator.errors(q, r.eigenvalues);
        for (std::size_t i = 0; i < k; ++i)
          EXPECT_LE(std::abs(r.eigenvalues[i] - continuum[i]), bounds[i])
            << to_string(bc) << " pair " << i << ": " << r.eigenvalues[i] << " vs "
            << continuum[i] << " (bound " << bounds[i] << ")";
      }
  }
} // namespace alloyspec
