// Finite-element eigenvalues against closed forms, a dense reference solver
// and exact 1D spectra.
#include <alloyspec/fe/discretisation.h>
#include <alloyspec/solver/eigen_solver.h>
#include <alloyspec/solver/inertia_counter.h>
#include <alloyspec/model/lattice.h>
#include <alloyspec/fe/spectral_problem.h>
#include <alloyspec/model/weyl_law.h>

#include <Eigen/Dense>
#include <gtest/gtest.h>
#include <petscmat.h>
#include <sturm_1d.h>

#include <cmath>
#include <random>

namespace alloyspec
{
  namespace
  {
    constexpr double pi = 3.14159265358979323846;
    // Q2 with h = 1/4: the relative eigenvalue error behaves like C (λh²)^2;
    // measured here 7e-5 for λ ≈ 6.6 and below 1e-3 up to the 20th mode. The
    // bound catches a wrong multiplicity or a missing mode (gaps are ≥ 3%).
    constexpr double free_box_tolerance = 1e-3;
    constexpr double residual_tolerance = 1e-8;
    // Q4 with h = 1/8 in 1D: a priori error C (λh²)^4 with λ ≲ 15 for the
    // lowest 10 modes, i.e. ≲ 1e-8 relative for C of order 1.
    constexpr double one_d_tolerance = 1e-8;
    // Eigen's dense generalised solver and the Krylov-Schur iteration (tolerance
    // 1e-12) agree to this relative accuracy (the issue asks for 1e-10).
    constexpr double dense_agreement = 1e-10;

    struct Solved
    {
      std::unique_ptr<Discretisation>  discretisation;
      std::unique_ptr<SpectralProblem> problem;
      EigenResult                      result;
    };

    Solved solve(const Lattice &lattice, unsigned int degree, unsigned int r, Boundary bc,
                 const std::vector<double> &q, unsigned int k, double tolerance = 1e-12)
    {
      Solved                 s;
      DiscretisationSettings ds;
      ds.degree            = degree;
      ds.elements_per_cell = r;
      s.discretisation =
        Discretisation::create(lattice, ds, BoundaryConditions(lattice.dimension(), bc));
      s.discretisation->make_grid();
      s.discretisation->setup_system();
      s.discretisation->assemble_fixed();
      s.problem = s.discretisation->make_problem();
      s.discretisation->assemble_potential(q, *s.problem);
      EigenSolverSettings es;
      es.n_eigenvalues = k;
      es.tolerance     = tolerance;
      EigenSolver solver(es);
      s.result = solver.solve(*s.problem);
      return s;
    }

    Eigen::MatrixXd dense(const backend::SparseMatrix &A)
    {
      const std::vector<double> values = backend::dense_row_major(A);
      const auto n = static_cast<Eigen::Index>(std::llround(std::sqrt(double(values.size()))));
      return Eigen::Map<const Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>>(
        values.data(), n, n);
    }
  } // namespace

  // Closed form: Dirichlet eigenvalues of the box are π²Σn_i²/ℓ², n_i ≥ 1;
  // Neumann the same with n_i ≥ 0 (separation of variables; e.g. Courant &
  // Hilbert, Methods of Mathematical Physics vol. 1, ch. V).
  TEST(FreeBox, DirichletAndNeumannMatchClosedFormWithMultiplicities)
  {
    const Lattice lattice({3, 3, 3});
    for (const Boundary bc : {Boundary::dirichlet, Boundary::neumann})
      {
        const Solved s = solve(lattice, 2, 4, bc, std::vector<double>(27, 0.0), 20);
        const auto   exact = free_box_eigenvalues({3.0, 3.0, 3.0}, bc, s.result.eigenvalues.size());
        ASSERT_GE(s.result.eigenvalues.size(), 20u);
        for (std::size_t i = 0; i < s.result.eigenvalues.size(); ++i)
          {
            const double scale = std::max(exact[i], 1.0);
            EXPECT_NEAR(s.result.eigenvalues[i], exact[i], free_box_tolerance * scale)
              << to_string(bc) << " mode " << i;
            // Rayleigh–Ritz: discrete eigenvalues lie above the exact ones.
            EXPECT_GE(s.result.eigenvalues[i], exact[i] - 1e-9) << to_string(bc) << " mode " << i;
            EXPECT_LT(s.result.residuals[i], residual_tolerance);
          }
        // The list is cut between clusters and verified by inertia.
        EXPECT_EQ(s.result.inertia_count, s.result.eigenvalues.size());
        EXPECT_GT(s.result.complete_up_to, s.result.eigenvalues.back());
        if (bc == Boundary::neumann)
          EXPECT_NEAR(s.result.eigenvalues[0], 0.0, 1e-9); // the constant mode
        else
          EXPECT_NEAR(s.result.eigenvalues[0], 3 * pi * pi / 9, 1e-4); // no spurious mode below
      }
  }

  // A constant potential q shifts every eigenvalue by exactly q (H + q).
  TEST(ConstantPotential, ShiftsEveryEigenvalue)
  {
    const Lattice lattice({2, 3, 2});
    const double  q = 2.75;
    for (const Boundary bc : {Boundary::dirichlet, Boundary::neumann})
      {
        const Solved free    = solve(lattice, 2, 2, bc, std::vector<double>(12, 0.0), 15);
        const Solved shifted = solve(lattice, 2, 2, bc, std::vector<double>(12, q), 15);
        ASSERT_EQ(free.result.eigenvalues.size(), shifted.result.eigenvalues.size());
        for (std::size_t i = 0; i < free.result.eigenvalues.size(); ++i)
          EXPECT_NEAR(shifted.result.eigenvalues[i] - free.result.eigenvalues[i], q, 1e-9);
      }
  }

  // The same with a large shift on a coarse Q1 mesh (3^3 cells, one element
  // each): the genuine eigenvalues (>= 1000) then lie above half the value
  // given to the constrained rows, which the solver used to take for the
  // spurious range; every eigenvalue was dropped and the run failed with
  // "could not be confirmed". sigma(H + q) = sigma(H) + q exactly.
  TEST(ConstantPotential, LargeShiftOnCoarseMesh)
  {
    const Lattice lattice({3, 3, 3});
    const double  q = 1000;
    // Relative to q: the residual tolerance is 1e-12 relative to |lambda| ~ 1e3,
    // so an absolute 1e-9 x 1000 leaves room for rounding (common practice, no source).
    constexpr double shift_tolerance = 1e-9 * 1000;
    for (const Boundary bc : {Boundary::dirichlet, Boundary::neumann})
      {
        const Solved free    = solve(lattice, 1, 1, bc, std::vector<double>(27, 0.0), 5);
        const Solved shifted = solve(lattice, 1, 1, bc, std::vector<double>(27, q), 5);
        ASSERT_GE(shifted.result.eigenvalues.size(), 5u) << to_string(bc);
        ASSERT_EQ(free.result.eigenvalues.size(), shifted.result.eigenvalues.size());
        for (std::size_t i = 0; i < free.result.eigenvalues.size(); ++i)
          EXPECT_NEAR(shifted.result.eigenvalues[i] - free.result.eigenvalues[i], q,
                      shift_tolerance);
      }
  }

  // Observed order of the eigenvalue error under refinement: 2p for Q_p
  // (Strang & Fix, An Analysis of the Finite Element Method, 1973, ch. 6;
  // Babuška & Osborn, Handbook of Numerical Analysis II, 1991).
  TEST(Convergence, EigenvalueErrorFallsLikeHToThe2p)
  {
    const Lattice lattice({1, 1, 1});
    const double  exact = 3 * pi * pi; // lowest Dirichlet eigenvalue of the unit cube
    for (const unsigned int p : {1u, 2u})
      {
        std::vector<double> errors;
        for (const unsigned int r : {4u / p, 8u / p, 16u / p})
          {
            const Solved s = solve(lattice, p, r, Boundary::dirichlet, {0.0}, 1);
            errors.push_back(s.result.eigenvalues[0] - exact);
          }
        for (std::size_t i = 1; i < errors.size(); ++i)
          {
            const double order = std::log2(errors[i - 1] / errors[i]);
            EXPECT_NEAR(order, 2.0 * p, 0.3) << "p = " << p << ", step " << i;
          }
      }
  }

  // Reference library: all eigenvalues of the assembled pencil from Eigen's
  // dense GeneralizedSelfAdjointEigenSolver (LAPACK-style tridiagonalisation).
  TEST(ReferenceLibrary, KrylovSchurAgreesWithDenseSolverAndInertia)
  {
    const Lattice       lattice({3, 2, 2});
    std::mt19937        rng(7);
    std::uniform_real_distribution<double> law(0.0, 4.0);
    std::vector<double> q(lattice.n_cells());
    for (double &x : q)
      x = law(rng);
    for (const Boundary bc : {Boundary::dirichlet, Boundary::neumann, Boundary::periodic})
      {
        const Solved s = solve(lattice, 2, 2, bc, q, 40);
        const Eigen::MatrixXd K = dense(s.problem->K), M = dense(s.problem->M);
        ASSERT_LE(K.rows(), 2000);
        Eigen::GeneralizedSelfAdjointEigenSolver<Eigen::MatrixXd> reference(K, M, Eigen::EigenvaluesOnly);
        std::vector<double> genuine;
        for (Eigen::Index i = 0; i < reference.eigenvalues().size(); ++i)
          if (reference.eigenvalues()(i) < s.problem->spurious_threshold())
            genuine.push_back(reference.eigenvalues()(i));
        ASSERT_GE(genuine.size(), s.result.eigenvalues.size());
        for (std::size_t i = 0; i < s.result.eigenvalues.size(); ++i)
          EXPECT_NEAR(s.result.eigenvalues[i], genuine[i],
                      dense_agreement * std::max(1.0, std::abs(genuine[i])))
            << to_string(bc) << " mode " << i;
        // Sylvester's law of inertia: negative pivots of K − E M = #{λ < E}.
        for (const double E : {1.0, 5.0, 12.0, 30.0})
          {
            const auto below = std::count_if(genuine.begin(), genuine.end(),
                                             [E](double x) { return x < E; });
            EXPECT_EQ(InertiaCounter::fresh_count_below(*s.problem, E), static_cast<std::size_t>(below))
              << to_string(bc) << " E = " << E;
          }
      }
  }

  // Exact 1D spectra of random cell potentials (transfer matrices and Sturm
  // oscillation, tests/support/sturm_1d.h).
  TEST(OneDimension, RandomCellPotentialMatchesExactSpectrum)
  {
    const Lattice       lattice({12});
    std::mt19937        rng(11);
    std::uniform_real_distribution<double> law(-1.0, 3.0);
    std::vector<double> q(lattice.n_cells());
    for (double &x : q)
      x = law(rng);
    for (const Boundary bc : {Boundary::dirichlet, Boundary::neumann})
      {
        const Solved s     = solve(lattice, 4, 8, bc, q, 10);
        const auto   exact = testing::lowest_eigenvalues(q, 1.0, bc, s.result.eigenvalues.size());
        for (std::size_t i = 0; i < s.result.eigenvalues.size(); ++i)
          EXPECT_NEAR(s.result.eigenvalues[i], exact[i], one_d_tolerance * std::max(1.0, std::abs(exact[i])))
            << to_string(bc) << " mode " << i;
      }
  }

  // IPR: 1/|Λ| for a constant function (Neumann ground state of V = 0).
  TEST(Localisation, InverseParticipationRatioOfConstantIsInverseVolume)
  {
    const Lattice lattice({2, 3, 2});
    const Solved  s = solve(lattice, 2, 2, Boundary::neumann, std::vector<double>(12, 0.0), 1);
    EXPECT_NEAR(s.discretisation->inverse_participation_ratio(s.result.eigenvectors[0]),
                1.0 / lattice.volume(), 1e-9);
  }

  // Local trace: the cell weights ∫_cell|ψ|²/∫|ψ|² of a normalised function sum
  // to 1 over the lattice; for the constant (Neumann ground state of V = 0)
  // each cell holds |cell|/|Λ| (here 1/12).
  TEST(Localisation, CellWeightsOfConstantAreCellVolumeFractions)
  {
    const Lattice lattice({2, 3, 2});
    const Solved  s = solve(lattice, 2, 2, Boundary::neumann, std::vector<double>(12, 0.0), 4);
    for (std::size_t c = 0; c < lattice.n_cells(); ++c)
      EXPECT_NEAR(s.discretisation->cell_weight(s.result.eigenvectors[0], c), 1.0 / 12, 1e-12);
    double total = 0;
    for (std::size_t c = 0; c < lattice.n_cells(); ++c)
      total += s.discretisation->cell_weight(s.result.eigenvectors[3], c);
    EXPECT_NEAR(total, 1.0, 1e-12);
  }

  // The one-pass version used by the study: the same closed forms (IPR 1/|Λ|,
  // cell weights |cell|/|Λ| for the constant), and for every other mode the
  // same numbers as the separate calls, whose quadrature it shares.
  TEST(Localisation, OnePassMeasuresMatchClosedFormsAndSeparateCalls)
  {
    const Lattice lattice({2, 3, 2});
    const Solved  s = solve(lattice, 2, 2, Boundary::neumann, std::vector<double>(12, 0.0), 4);
    for (std::size_t c = 0; c < lattice.n_cells(); ++c)
      {
        std::vector<double> ipr, weight;
        s.discretisation->localisation_measures(s.result.eigenvectors, c, ipr, weight);
        ASSERT_EQ(ipr.size(), s.result.eigenvectors.size());
        EXPECT_NEAR(ipr[0], 1.0 / lattice.volume(), 1e-9);
        EXPECT_NEAR(weight[0], 1.0 / 12, 1e-12);
        for (std::size_t j = 1; j < ipr.size(); ++j)
          {
            const auto &u = s.result.eigenvectors[j];
            EXPECT_NEAR(ipr[j], s.discretisation->inverse_participation_ratio(u), 1e-12 * ipr[j]);
            EXPECT_NEAR(weight[j], s.discretisation->cell_weight(u, c), 1e-12);
          }
      }
  }

  // The energy-cutoff mode returns exactly the eigenvalues below the cutoff.
  TEST(EnergyCutoff, ReturnsAllEigenvaluesBelowCutoff)
  {
    const Lattice lattice({3, 3, 3});
    DiscretisationSettings ds;
    auto d = Discretisation::create(lattice, ds, BoundaryConditions(3, Boundary::dirichlet));
    d->make_grid();
    d->setup_system();
    d->assemble_fixed();
    auto problem = d->make_problem();
    d->assemble_potential(std::vector<double>(27, 0.0), *problem);
    EigenSolverSettings es;
    es.energy_cutoff = 6.0;
    EigenSolver solver(es);
    const EigenResult r = solver.solve(*problem);
    // Exact count of π²|n|²/9 ≤ 6 with n_i ≥ 1; the Q2 eigenvalues lie within
    // 1e-3 of them and no exact value is that close to 6.
    EXPECT_EQ(r.eigenvalues.size(), free_box_count({3.0, 3.0, 3.0}, Boundary::dirichlet, 6.0));
    EXPECT_DOUBLE_EQ(r.complete_up_to, 6.0);
  }
} // namespace alloyspec
