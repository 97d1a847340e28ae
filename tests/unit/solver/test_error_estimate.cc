// Honesty of the per-eigenvalue error bounds: the true error (against exact
// spectra) must lie below the bound, and the bound must not exceed it by more
// than a factor 100 (else it says nothing).
#include <alloyspec/fe/discretisation.h>
#include <alloyspec/solver/eigen_solver.h>
#include <alloyspec/solver/error_estimate.h>
#include <alloyspec/model/lattice.h>
#include <alloyspec/fe/spectral_problem.h>
#include <alloyspec/model/weyl_law.h>

#include <gtest/gtest.h>
#include <sturm_1d.h>

#include <algorithm>
#include <cmath>
#include <iostream>
#include <random>

namespace alloyspec
{
  namespace
  {
    // A bound more than this many times the true error is uninformative
    // (the acceptance criterion of the estimator; common practice, no source).
    constexpr double max_overestimate = 100.0;
    // Below this relative size both the true error and the difference of the
    // two solves are rounding (solver tolerance 1e-12 relative to max(|λ|,1)):
    // there only "true ≤ bound" is asserted.
    constexpr double rounding_level = 1e-10;

    EigenResult solve(const Lattice &lattice, const DiscretisationSettings &ds, Boundary bc,
                      const std::vector<double> &q, unsigned int k)
    {
      auto d = Discretisation::create(lattice, ds, BoundaryConditions(lattice.dimension(), bc));
      d->make_grid();
      d->setup_system();
      d->assemble_fixed();
      auto problem = d->make_problem();
      d->assemble_potential(q, *problem);
      EigenSolverSettings es;
      es.n_eigenvalues = k;
      EigenSolver solver(es);
      return solver.solve(*problem);
    }

    struct RatioRange
    {
      double low = 1e300, high = 0;
      void   add(double r)
      {
        low  = std::min(low, r);
        high = std::max(high, r);
      }
    };

    /** Checks bounds against exact values; returns true/bound ratios seen. */
    RatioRange check(const std::vector<double> &computed, const std::vector<double> &bounds,
                     const std::vector<double> &exact, const std::string &context)
    {
      RatioRange ratios;
      for (std::size_t i = 0; i < computed.size(); ++i)
        {
          EXPECT_TRUE(std::isfinite(bounds[i])) << context << " mode " << i;
          const double error = computed[i] - exact[i];
          EXPECT_LE(std::abs(error), bounds[i]) << context << " mode " << i;
          if (std::abs(error) > rounding_level * std::max(std::abs(exact[i]), 1.0))
            {
              EXPECT_LE(bounds[i], max_overestimate * std::abs(error)) << context << " mode " << i;
              ratios.add(std::abs(error) / bounds[i]);
            }
        }
      return ratios;
    }
  } // namespace

  // Exact reference: tests/support/sturm_1d.h (Prüfer angle and Sturm
  // oscillation on cell-wise explicit solutions, bisection to rounding).
  TEST(ErrorEstimate, BoundsTrueErrorOnRandom1DPotentials)
  {
    const Lattice lattice({10});
    const std::vector<DiscretisationSettings> spaces{{1, 4}, {2, 2}, {3, 1}};
    for (const RicherSpace space : {RicherSpace::degree, RicherSpace::mesh})
      {
        RatioRange all;
        for (unsigned int seed = 1; seed <= 4; ++seed)
          {
            std::mt19937                           rng(seed);
            std::uniform_real_distribution<double> law(-1.0, 4.0);
            std::vector<double>                    q(lattice.n_cells());
            for (double &x : q)
              x = law(rng);
            for (const Boundary bc : {Boundary::dirichlet, Boundary::neumann})
              for (const auto &ds : spaces)
                {
                  const EigenResult coarse = solve(lattice, ds, bc, q, 8);
                  ErrorEstimator    estimator(lattice, ds, BoundaryConditions(1, bc),
                                           EigenSolverSettings{}, space);
                  const auto bounds = estimator.errors(q, coarse.eigenvalues);
                  const auto exact =
                    testing::lowest_eigenvalues(q, 1.0, bc, coarse.eigenvalues.size());
                  const RatioRange r =
                    check(coarse.eigenvalues, bounds, exact,
                          std::string(space == RicherSpace::degree ? "p+1" : "2r") + " seed " +
                            std::to_string(seed) + " " + to_string(bc) + " p " +
                            std::to_string(ds.degree) + " r " +
                            std::to_string(ds.elements_per_cell));
                  all.add(r.low);
                  all.add(r.high);
                }
          }
        std::cout << "1D random, richer space " << (space == RicherSpace::degree ? "p+1" : "2r")
                  << ": true/bound from " << all.low << " to " << all.high << '\n';
      }
  }

  // Closed form: free box eigenvalues π²Σn_i²/ℓ_i² (Dirichlet n_i ≥ 1, Neumann
  // n_i ≥ 0), separation of variables (Courant & Hilbert vol. 1, ch. V).
  TEST(ErrorEstimate, BoundsTrueErrorOnFree3DBox)
  {
    const Lattice                 lattice({2, 2, 1});
    const DiscretisationSettings  ds{2, 2};
    const std::vector<double>     q(lattice.n_cells(), 0.0);
    RatioRange                    all;
    for (const Boundary bc : {Boundary::dirichlet, Boundary::neumann})
      {
        const EigenResult coarse = solve(lattice, ds, bc, q, 20);
        ErrorEstimator    estimator(lattice, ds, BoundaryConditions(3, bc), EigenSolverSettings{},
                                 ErrorEstimator::default_space());
        const auto bounds = estimator.errors(q, coarse.eigenvalues);
        const auto exact  = free_box_eigenvalues({2.0, 2.0, 1.0}, bc, coarse.eigenvalues.size());
        const RatioRange r = check(coarse.eigenvalues, bounds, exact, "3D " + to_string(bc));
        all.add(r.low);
        all.add(r.high);
      }
    std::cout << "3D free box: true/bound from " << all.low << " to " << all.high << '\n';
  }

  TEST(ErrorEstimate, BoundsFollowTheMinMaxOrdering)
  {
    // Equal lists: only the rounding floor remains, never zero.
    const auto b = eigenvalue_error_bounds({1.0, 2.0}, {1.0, 2.0}, RicherSpace::mesh, 2, 1e-12);
    EXPECT_GT(b[0], 0.0);
    EXPECT_LT(b[0], 1e-11);
    // Richardson with order 2p = 4 under halving: (λc−λf)·16/15, times 3.
    const auto m = eigenvalue_error_bounds({1.1}, {1.0}, RicherSpace::mesh, 2, 1e-12);
    EXPECT_NEAR(m[0], safety_factor * 0.1 * 16.0 / 15.0, 1e-12);
    // Past the common range: NaN, not a made-up number.
    const auto n = eigenvalue_error_bounds({1.0, 2.0}, {1.0}, RicherSpace::degree, 2, 1e-12);
    EXPECT_TRUE(std::isnan(n[1]));
  }
} // namespace alloyspec
