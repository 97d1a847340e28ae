// The box on a distributed mesh (Discretisation::create_distributed) against
// the serial box: the same space and constraints (counts of DoFs, constrained
// and genuine rows), the same eigenvalues to 1e-9 (its iterative solve against
// the serial direct path, which is inertia-verified), and the same
// localisation measures. On the one rank of a unit test the mesh is a p4est
// forest all the same; 2 and 3 ranks are checked end to end
// (tests/e2e/mpi_ranks.sh).
#include <alloyspec/fe/discretisation.h>
#include <alloyspec/fe/spectral_problem.h>
#include <alloyspec/model/lattice.h>
#include <alloyspec/solver/eigen_solver.h>

#include <gtest/gtest.h>

#include <mpi.h>

#include <algorithm>
#include <cmath>
#include <random>

namespace alloyspec
{
  namespace
  {
    /**
     * Agreement of eigenvalues, relative to max(|λ|, 1): the requirement
     * for the distributed path. Both solves converge to relative residuals
     * ≤ 1e-11, and an eigenvalue's error is of the order of the residual
     * squared over the gap, far below it.
     */
    constexpr double agreement = 1e-9;
    constexpr double tolerance = 1e-11;
    /**
     * Localisation measures of the same (isolated) eigenvector from two
     * solves: a vector error of order the residual changes these quadratic
     * and quartic integrals by about as much; 1e-8 leaves room (common
     * practice, no source).
     */
    constexpr double measure_agreement = 1e-8;

    struct Built
    {
      std::unique_ptr<Discretisation>  discretisation;
      std::unique_ptr<SpectralProblem> problem;
    };

    /** Invented test data: i.i.d. uniform cell values on [0, 1.5], by cell index. */
    std::vector<double> random_cells(std::size_t n, unsigned int seed)
    {
      std::mt19937                           rng(seed);
      std::uniform_real_distribution<double> law(0.0, 1.5);
      std::vector<double>                    q(n);
      for (double &x : q)
        x = law(rng);
      return q;
    }

    Built build(const Lattice &lattice, const DiscretisationSettings &ds, const BoundaryConditions &bcs,
                const std::vector<double> &q, bool distributed)
    {
      Built b;
      b.discretisation = distributed ? Discretisation::create_distributed(lattice, ds, bcs, MPI_COMM_WORLD) :
                                       Discretisation::create(lattice, ds, bcs);
      b.discretisation->make_grid();
      b.discretisation->setup_system();
      b.discretisation->assemble_fixed();
      b.problem = b.discretisation->make_problem();
      if (distributed)
        {
          // Each rank's cells, by their global index: the serial values there.
          std::vector<double> local;
          for (const std::size_t c : b.discretisation->local_cells())
            local.push_back(q.at(c));
          b.discretisation->assemble_potential(local, *b.problem);
        }
      else
        b.discretisation->assemble_potential(q, *b.problem);
      return b;
    }

    EigenResult solve(const SpectralProblem &problem, const std::string &method, unsigned int k)
    {
      EigenSolverSettings es;
      es.n_eigenvalues = k;
      es.tolerance     = tolerance;
      es.method        = method;
      EigenSolver solver(es);
      return solver.solve(problem);
    }

    double relative(double a, double b) { return std::abs(a - b) / std::max(1.0, std::abs(b)); }
  } // namespace

  TEST(DistributedBox, SameSpaceAndSpectrumAsTheSerialBox)
  {
    using B = Boundary;
    const std::vector<BoundaryConditions> conditions{
      {B::dirichlet, B::dirichlet, B::dirichlet},
      {B::neumann, B::neumann, B::neumann},
      {B::periodic, B::periodic, B::dirichlet}, // a slab: periodic in x and y
      {B::neumann, B::neumann, B::periodic}};   // a wire along z with free side faces
    const unsigned int k = 12;
    // L = 6: a coarse mesh of 3 trees per direction refined once; 5 x 6 x 4:
    // an odd edge leaves no refinement (every element a tree).
    for (const std::vector<unsigned int> &cells :
         {std::vector<unsigned int>{6, 6, 6}, std::vector<unsigned int>{5, 6, 4}})
      for (const auto &bcs : conditions)
        {
          const Lattice             lattice(cells);
          const std::vector<double> q = random_cells(lattice.n_cells(), 11 + cells[0]);
          const Built serial      = build(lattice, DiscretisationSettings{2, 1}, bcs, q, false);
          const Built distributed = build(lattice, DiscretisationSettings{2, 1}, bcs, q, true);
          const std::string what  = lattice.description() + ", faces " + to_string(bcs[0]) + "/" +
                                   to_string(bcs[2]);
          ASSERT_TRUE(distributed.discretisation->distributed());
          EXPECT_EQ(distributed.discretisation->n_dofs(), serial.discretisation->n_dofs()) << what;
          EXPECT_EQ(distributed.discretisation->n_constrained_dofs(),
                    serial.discretisation->n_constrained_dofs()) << what;
          EXPECT_EQ(distributed.discretisation->n_elements(), serial.discretisation->n_elements()) << what;
          EXPECT_EQ(distributed.problem->n_genuine(), serial.problem->n_genuine()) << what;
          EXPECT_DOUBLE_EQ(distributed.problem->spurious_eigenvalue, serial.problem->spurious_eigenvalue)
            << what;
          EXPECT_DOUBLE_EQ(distributed.problem->mass_floor, serial.problem->mass_floor) << what;

          const EigenResult direct    = solve(*serial.problem, "tuned", k);
          const EigenResult iterative = solve(*distributed.problem, "iterative", k);
          EXPECT_EQ(iterative.method, "iterative") << what;
          EXPECT_EQ(iterative.verified_by, "inertia") << what;
          ASSERT_GE(iterative.eigenvalues.size(), k) << what;
          ASSERT_GE(direct.eigenvalues.size(), k) << what;
          for (std::size_t i = 0; i < k; ++i)
            {
              EXPECT_LE(relative(iterative.eigenvalues[i], direct.eigenvalues[i]), agreement)
                << what << " pair " << i << ": " << iterative.eigenvalues[i] << " vs "
                << direct.eigenvalues[i];
              EXPECT_LE(iterative.residuals[i], tolerance) << what << " pair " << i;
              EXPECT_LE(iterative.enclosure_lower[i], direct.eigenvalues[i]) << what << " pair " << i;
              EXPECT_GE(iterative.enclosure_upper[i], direct.eigenvalues[i]) << what << " pair " << i;
            }

          // The lowest pair of random cells is simple: its vector is unique up to sign.
          ASSERT_GT(direct.eigenvalues[1] - direct.eigenvalues[0], 1e-6) << what;
          const std::size_t centre = lattice.cell_index({{cells[0] / 2, cells[1] / 2, cells[2] / 2}});
          std::vector<double> ipr_s, weight_s, ipr_d, weight_d;
          serial.discretisation->localisation_measures({direct.eigenvectors[0]}, centre, ipr_s, weight_s);
          distributed.discretisation->localisation_measures({iterative.eigenvectors[0]}, centre, ipr_d,
                                                            weight_d);
          EXPECT_NEAR(ipr_d[0], ipr_s[0], measure_agreement * ipr_s[0]) << what;
          EXPECT_NEAR(weight_d[0], weight_s[0], measure_agreement) << what;
        }
  }

  TEST(DistributedBox, LocalCellsAreEveryCellOnOneRank)
  {
    // One rank owns every element: its cells are all lattice cells, ascending.
    const Lattice lattice({4, 3, 2}, 0.5);
    auto          d = Discretisation::create_distributed(
      lattice, DiscretisationSettings{1, 2},
      {Boundary::dirichlet, Boundary::dirichlet, Boundary::dirichlet}, MPI_COMM_WORLD);
    d->make_grid();
    d->setup_system();
    const std::vector<std::size_t> cells = d->local_cells();
    ASSERT_EQ(cells.size(), lattice.n_cells());
    for (std::size_t i = 0; i < cells.size(); ++i)
      EXPECT_EQ(cells[i], i);
    // The box's measure with cell size 0.5: 4 * 3 * 2 cells of 0.125.
    EXPECT_DOUBLE_EQ(d->volume(), 24 * 0.125);
  }
} // namespace alloyspec
