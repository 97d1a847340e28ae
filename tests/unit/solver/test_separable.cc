// Separable cell potentials q = a_i + b_j (+ c_k): H = Σ_d (−∂_d² + v_d(x_d)),
// so its eigenvalues are all sums of 1D eigenvalues, one from each direction,
// with the same boundary condition on every face (separation of variables).
// The 1D spectra are exact (tests/support/sturm_1d.h); the finite-element
// eigenvalues must match within their own Richardson error bound.
#include <alloyspec/fe/discretisation.h>
#include <alloyspec/solver/eigen_solver.h>
#include <alloyspec/solver/error_estimate.h>
#include <alloyspec/model/lattice.h>
#include <alloyspec/fe/spectral_problem.h>

#include <gtest/gtest.h>
#include <sturm_1d.h>

#include <algorithm>
#include <random>

namespace alloyspec
{
  namespace
  {
    constexpr unsigned int n_modes = 20;

    std::vector<double> random_values(std::size_t n, unsigned int seed)
    {
      // Invented test data: uniform on [-1, 2].
      std::mt19937                           rng(seed);
      std::uniform_real_distribution<double> law(-1.0, 2.0);
      std::vector<double>                    v(n);
      for (double &x : v)
        x = law(rng);
      return v;
    }

    void check_separable(const std::vector<unsigned int> &cells, const Boundary bc)
    {
      const Lattice                    lattice(cells);
      std::vector<std::vector<double>> factors, spectra;
      for (std::size_t d = 0; d < cells.size(); ++d)
        {
          factors.push_back(random_values(cells[d], 10 + d));
          spectra.push_back(testing::lowest_eigenvalues(factors[d], 1.0, bc, n_modes));
        }
      // q on cell n = i + L1 (j + L2 k) (Lattice::cell_index).
      std::vector<double> q(lattice.n_cells());
      for (std::size_t n = 0; n < q.size(); ++n)
        {
          const auto c = lattice.cell_coordinates(n);
          q[n]         = 0;
          for (std::size_t d = 0; d < cells.size(); ++d)
            q[n] += factors[d][c[d]];
        }
      // All sums of one 1D eigenvalue per direction; the lowest n_modes of them
      // use only the lowest n_modes of each factor.
      std::vector<double> sums{0.0};
      for (const auto &spectrum : spectra)
        {
          std::vector<double> next;
          for (const double s : sums)
            for (const double x : spectrum)
              next.push_back(s + x);
          sums.swap(next);
        }
      std::sort(sums.begin(), sums.end());

      const DiscretisationSettings ds{2, 2};
      auto d = Discretisation::create(lattice, ds, BoundaryConditions(cells.size(), bc));
      d->make_grid();
      d->setup_system();
      d->assemble_fixed();
      auto problem = d->make_problem();
      d->assemble_potential(q, *problem);
      EigenSolverSettings es;
      es.n_eigenvalues = n_modes;
      EigenSolver       solver(es);
      const EigenResult result = solver.solve(*problem);
      ErrorEstimator    estimator(lattice, ds, BoundaryConditions(cells.size(), bc), es,
                               ErrorEstimator::default_space());
      const auto bounds = estimator.errors(q, result.eigenvalues);
      ASSERT_GE(result.eigenvalues.size(), n_modes);
      for (std::size_t i = 0; i < n_modes; ++i)
        {
          EXPECT_LE(std::abs(result.eigenvalues[i] - sums[i]), bounds[i])
            << cells.size() << "D " << to_string(bc) << " mode " << i << ": FE "
            << result.eigenvalues[i] << ", exact sum " << sums[i];
          // Rayleigh–Ritz: the discrete eigenvalue is never below the exact one.
          EXPECT_GE(result.eigenvalues[i], sums[i] - 1e-10 * std::max(1.0, sums[i]));
        }
    }
  } // namespace

  TEST(Separable, TwoDimensionalSpectrumIsSumOf1DSpectra)
  {
    for (const Boundary bc : {Boundary::dirichlet, Boundary::neumann})
      check_separable({4, 3}, bc);
  }

  TEST(Separable, ThreeDimensionalSpectrumIsSumOf1DSpectra)
  {
    for (const Boundary bc : {Boundary::dirichlet, Boundary::neumann})
      check_separable({2, 2, 2}, bc);
  }
} // namespace alloyspec
