#include <alloyspec/fe/discretisation.h>
#include <alloyspec/solver/eigen_solver.h>
#include <alloyspec/solver/inertia_counter.h>
#include <alloyspec/solver/error_estimate.h>
#include <alloyspec/model/exact_1d.h>
#include <alloyspec/model/lattice.h>
#include <alloyspec/fe/spectral_problem.h>
#include <alloyspec/app/verify.h>
#include <alloyspec/model/weyl_law.h>

#include <Eigen/Dense>
#include <petscmat.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <functional>
#include <iomanip>
#include <ostream>
#include <random>
#include <sstream>

namespace alloyspec
{
  namespace
  {
    constexpr double pi = 3.14159265358979323846;

    // Constant shift and dense cross-check compare two floating-point
    // computations of the same matrices: the Krylov–Schur tolerance is 1e-12
    // relative, so agreement to 1e-9 (shift) and 1e-10 (dense) leaves margin.
    constexpr double shift_tolerance = 1e-9;
    constexpr double dense_tolerance = 1e-10;
    // Observed order within ±0.3 of 2p (common practice, no source).
    constexpr double order_tolerance = 0.3;

    std::string format(const char *pattern, double x)
    {
      char buffer[64];
      std::snprintf(buffer, sizeof buffer, pattern, x);
      return buffer;
    }

    struct Solved
    {
      std::unique_ptr<Discretisation>  discretisation;
      std::unique_ptr<SpectralProblem> problem;
      EigenResult                      result;
    };

    Solved solve(const Lattice &lattice, const DiscretisationSettings &ds, const Boundary bc,
                 const std::vector<double> &q, const unsigned int k)
    {
      Solved s;
      s.discretisation = Discretisation::create(lattice, ds, BoundaryConditions(lattice.dimension(), bc));
      s.discretisation->make_grid();
      s.discretisation->setup_system();
      s.discretisation->assemble_fixed();
      s.problem = s.discretisation->make_problem();
      s.discretisation->assemble_potential(q, *s.problem);
      EigenSolverSettings es;
      es.n_eigenvalues = k;
      EigenSolver solver(es);
      s.result = solver.solve(*s.problem);
      return s;
    }

    std::vector<double> bounds_for(const Lattice &lattice, const DiscretisationSettings &ds,
                                   const Boundary bc, const std::vector<double> &q,
                                   const std::vector<double> &coarse)
    {
      ErrorEstimator estimator(lattice, ds, BoundaryConditions(lattice.dimension(), bc),
                               EigenSolverSettings{}, ErrorEstimator::default_space());
      return estimator.errors(q, coarse);
    }

    /** Largest |computed − exact| / bound; +inf if an eigenvalue lies below the exact one. */
    double worst_ratio(const std::vector<double> &computed, const std::vector<double> &exact,
                       const std::vector<double> &bounds)
    {
      double worst = 0;
      for (std::size_t i = 0; i < computed.size(); ++i)
        {
          if (!(i < exact.size()) || !std::isfinite(bounds[i]) ||
              computed[i] < exact[i] - bounds[i])
            return INFINITY;
          worst = std::max(worst, std::abs(computed[i] - exact[i]) / bounds[i]);
        }
      return worst;
    }

    Eigen::MatrixXd dense(const backend::SparseMatrix &A)
    {
      const std::vector<double> values = backend::dense_row_major(A);
      const auto n = static_cast<Eigen::Index>(std::llround(std::sqrt(double(values.size()))));
      return Eigen::Map<const Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>>(
        values.data(), n, n);
    }

    std::vector<double> uniform_values(std::size_t n, double lo, double hi, unsigned int seed)
    {
      // Invented test data: i.i.d. uniform cell values from a fixed seed.
      std::mt19937                           rng(seed);
      std::uniform_real_distribution<double> law(lo, hi);
      std::vector<double>                    q(n);
      for (double &x : q)
        x = law(rng);
      return q;
    }

    // --- the checks -------------------------------------------------------

    void free_box(std::vector<VerificationCheck> &out, const Boundary bc, const bool thorough)
    {
      const unsigned int     L = thorough ? 3 : 2;
      const Lattice          lattice({L, L, L});
      // Thorough: 27 cells with Q3 on one element per cell (the bound's solve has
      // two); Q2 with r = 3 would need 166k unknowns for the bound.
      const DiscretisationSettings ds{thorough ? 3u : 2u, thorough ? 1u : 2u};
      const std::vector<double>    q(lattice.n_cells(), 0.0);
      const std::vector<double>    extents(3, double(L));
      const Solved s      = solve(lattice, ds, bc, q, thorough ? 60 : 30);
      const auto  &values = s.result.eigenvalues;
      const auto   exact  = free_box_eigenvalues(extents, bc, values.size());
      const auto   bounds = bounds_for(lattice, ds, bc, q, values);
      const double ratio  = worst_ratio(values, exact, bounds);
      out.push_back({"free box " + to_string(bc) + ": " + std::to_string(values.size()) +
                       " eigenvalues, " + std::to_string(L) + "^3 cells, Q" +
                       std::to_string(ds.degree) + " r = " + std::to_string(ds.elements_per_cell),
                     "pi^2 sum n_i^2/l^2 with multiplicities (separation of variables; Courant & "
                     "Hilbert vol. 1 ch. V)",
                     "max |err|/bound = " + format("%.3g", ratio),
                     "<= 1, bound = 3 x Richardson (lambda_h - lambda_h/2) 4^p/(4^p-1), lambda_h >= exact", ratio <= 1.0});

      // Inertia counts midway between distinct exact eigenvalues, where the
      // cluster below is resolved: its error bound is under half the gap, so
      // the discrete eigenvalues stay below E and the counts must agree.
      std::size_t agree = 0, tried = 0;
      for (std::size_t i = 1; i < exact.size(); ++i)
        if (exact[i] - exact[i - 1] > 1e-9 * exact[i] &&
            bounds[i - 1] < 0.5 * (exact[i] - exact[i - 1]))
          {
            const double E = 0.5 * (exact[i] + exact[i - 1]);
            ++tried;
            if (InertiaCounter::fresh_count_below(*s.problem, E) == free_box_count(extents, bc, E))
              ++agree;
          }
      out.push_back({"free box " + to_string(bc) + ": counts #{lambda < E} by inertia",
                     "exact lattice-point count (weyl_law.h free_box_count)",
                     std::to_string(agree) + " of " + std::to_string(tried) + " energies agree",
                     "all equal (at gaps wider than twice the bound below)", agree == tried && tried > 0});
    }

    void constant_shift(std::vector<VerificationCheck> &out)
    {
      const Lattice                lattice({2, 2, 2});
      const DiscretisationSettings ds{2, 2};
      const double                 shift = 1.75;
      double                       worst = 0;
      for (const Boundary bc : {Boundary::dirichlet, Boundary::neumann})
        {
          const Solved free    = solve(lattice, ds, bc, std::vector<double>(8, 0.0), 20);
          const Solved shifted = solve(lattice, ds, bc, std::vector<double>(8, shift), 20);
          if (free.result.eigenvalues.size() != shifted.result.eigenvalues.size())
            worst = INFINITY;
          else
            for (std::size_t i = 0; i < free.result.eigenvalues.size(); ++i)
              worst = std::max(worst, std::abs(shifted.result.eigenvalues[i] -
                                               free.result.eigenvalues[i] - shift) /
                                        std::max(1.0, shifted.result.eigenvalues[i]));
        }
      out.push_back({"constant potential q = 1.75 shifts every eigenvalue (D, N)",
                     "spectrum of H + q is spectrum of H plus q (exact)",
                     "max rel. deviation = " + format("%.2e", worst),
                     format("<= %.0e", shift_tolerance), worst <= shift_tolerance});
    }

    void convergence(std::vector<VerificationCheck> &out, std::vector<double> &orders)
    {
      const Lattice lattice({1, 1, 1});
      const double  exact = 3 * pi * pi; // lowest Dirichlet eigenvalue of the unit cube
      for (const unsigned int p : {1u, 2u, 3u})
        {
          std::vector<double> errors;
          const unsigned int  r0 = p == 1 ? 4 : (p == 2 ? 2 : 1);
          for (const unsigned int r : {r0, 2 * r0, 4 * r0})
            errors.push_back(solve(lattice, {p, r}, Boundary::dirichlet, {0.0}, 1)
                               .result.eigenvalues[0] - exact);
          const double order = std::log2(errors[1] / errors[2]);
          orders.push_back(order);
          out.push_back({"convergence order, Q" + std::to_string(p) + ", unit cube, r = " +
                           std::to_string(2 * r0) + " -> " + std::to_string(4 * r0),
                         "lambda_h - lambda = O(h^2p) (Strang & Fix 1973 ch. 6; Babuska & Osborn "
                         "1991); exact 3 pi^2",
                         "observed order " + format("%.3f", order) + " (errors " +
                           format("%.2e", errors[0]) + ", " + format("%.2e", errors[1]) + ", " +
                           format("%.2e", errors[2]) + ")",
                         std::to_string(2 * p) + " +- " + format("%.1f", order_tolerance),
                         std::abs(order - 2.0 * p) <= order_tolerance});
        }
    }

    void weyl(std::vector<VerificationCheck> &out, const bool thorough)
    {
      // Cases of PHYSICS.md (exact 630/934 and 45436/50213 there).
      std::vector<std::pair<double, double>> cases{{8, 20}, {20, 50}};
      if (thorough)
        cases.push_back({30, 100});
      double worst = 0;
      for (const auto &[L, E] : cases)
        for (const Boundary bc : {Boundary::dirichlet, Boundary::neumann})
          {
            const std::vector<double> extents(3, L);
            const double exact = double(free_box_count(extents, bc, E));
            const double edge  = 12 * L * std::sqrt(E) / (16 * pi);
            worst = std::max(worst, std::abs(exact - weyl_count(extents, bc, E)) / edge);
          }
      std::string sizes;
      for (const auto &c : cases)
        sizes += (sizes.empty() ? "" : ", ") + format("%g", c.first) + " (E = " +
                 format("%g", c.second) + ")";
      out.push_back({"Weyl expansion with surface and edge terms, cubes L = " + sizes + ", D and N",
                     "exact lattice-point counts; expansion from Baltes & Hilf, Spectra of Finite "
                     "Systems (1976), from memory",
                     "max |N - Weyl| / edge term = " + format("%.3f", worst),
                     "< 1 (remainder below the last term kept)", worst < 1.0});
    }

    void semiclassical(std::vector<VerificationCheck> &out, const bool thorough)
    {
      // 2D periodic box: no boundary terms, so the count per area approaches
      // the phase-space count E_q[(E - q)_+]/(4 pi) with only the lattice-point
      // discrepancy left, O(R^{2/3}) of pi R^2 points (Sierpinski 1906, from memory).
      const unsigned int           L = thorough ? 10 : 6;
      const Lattice                lattice({L, L});
      const DiscretisationSettings ds{4, 3};
      const std::vector<double>    q = uniform_values(lattice.n_cells(), 0.0, 4.0, 2024);
      auto d = Discretisation::create(lattice, ds, BoundaryConditions(2, Boundary::periodic));
      d->make_grid();
      d->setup_system();
      d->assemble_fixed();
      auto problem = d->make_problem();
      d->assemble_potential(q, *problem);
      std::vector<double> energies{25, 100, 200};
      std::string         value = "N/N_sc at E =";
      std::vector<double> ratios;
      for (const double E : energies)
        {
          const double count = double(InertiaCounter::fresh_count_below(*problem, E));
          const double sc    = semiclassical_ids(2, q, E) * lattice.volume();
          ratios.push_back(count / sc);
          value += " " + format("%g", E) + ": " + format("%.4f", ratios.back()) + ";";
        }
      value.pop_back();
      // Tolerance shrinking with E: the lattice-point discrepancy of the free
      // periodic box, O(R^{2/3}) out of pi R^2 points with R = sqrt(E) L/(2 pi)
      // (Sierpinski 1906, from memory), taken with constant 1, i.e. R^{-4/3}:
      // 12 % at E = 25 and 3 % at E = 200 for L = 6. The finite-element count
      // errs only low (its eigenvalues lie above the exact ones) and is
      // resolved here (Q4, h = 1/3, over 5 nodes per wavelength at E = 200).
      bool        pass = true;
      std::string tolerance = "|ratio-1| <= R^(-4/3), R = sqrt(E) L/(2 pi):";
      for (std::size_t i = 0; i < energies.size(); ++i)
        {
          const double R     = std::sqrt(energies[i]) * L / (2 * pi);
          const double bound = std::pow(R, -4.0 / 3.0);
          pass               = pass && std::abs(ratios[i] - 1) <= bound;
          tolerance += " " + format("%.3f", bound);
        }
      out.push_back({"semiclassical limit, one random realisation, 2D periodic " +
                       std::to_string(L) + "x" + std::to_string(L) + ", q ~ U[0,4] (invented)",
                     "N_sc = E_q[(E-q)_+]/(4 pi) per area (Weyl's law cell by cell)", value,
                     tolerance, pass});
    }

    void one_dimension(std::vector<VerificationCheck> &out, double &ratio_low, double &ratio_high)
    {
      const Lattice                lattice({16});
      const DiscretisationSettings ds{2, 2};
      const std::vector<double>    q = uniform_values(16, -1.0, 3.0, 5);
      double                       worst = 0;
      ratio_low = INFINITY, ratio_high = 0;
      for (const Boundary bc : {Boundary::dirichlet, Boundary::neumann})
        {
          const Solved s     = solve(lattice, ds, bc, q, 12);
          const auto   exact = Exact1dSpectrum(q, 1.0, bc).lowest(s.result.eigenvalues.size());
          const auto   bounds = bounds_for(lattice, ds, bc, q, s.result.eigenvalues);
          worst = std::max(worst, worst_ratio(s.result.eigenvalues, exact, bounds));
          for (std::size_t i = 0; i < exact.size(); ++i)
            {
              ratio_low  = std::min(ratio_low, (s.result.eigenvalues[i] - exact[i]) / bounds[i]);
              ratio_high = std::max(ratio_high, (s.result.eigenvalues[i] - exact[i]) / bounds[i]);
            }
        }
      out.push_back({"1D random cell potential, 16 cells, Q2 r = 2, 12 eigenvalues (D, N)",
                     "exact Sturm-oscillation spectrum (Exact1dSpectrum; Coddington & Levinson "
                     "1955 ch. 8)",
                     "max |err|/bound = " + format("%.3f", worst) + ", true/bound in [" +
                       format("%.3f", ratio_low) + ", " + format("%.3f", ratio_high) + "]",
                     "<= 1 and true/bound >= 0.01", worst <= 1.0 && ratio_low >= 0.01});
    }

    void dense_reference(std::vector<VerificationCheck> &out)
    {
      const Lattice                lattice({3, 2, 2});
      const DiscretisationSettings ds{2, 2};
      const std::vector<double>    q = uniform_values(lattice.n_cells(), 0.0, 4.0, 7);
      double                       worst = 0;
      std::size_t                  inertia_bad = 0, dofs = 0;
      for (const Boundary bc : {Boundary::dirichlet, Boundary::neumann, Boundary::periodic})
        {
          const Solved          s = solve(lattice, ds, bc, q, 40);
          const Eigen::MatrixXd K = dense(s.problem->K), M = dense(s.problem->M);
          dofs                    = std::max<std::size_t>(dofs, K.rows());
          Eigen::GeneralizedSelfAdjointEigenSolver<Eigen::MatrixXd> reference(K, M,
                                                                           Eigen::EigenvaluesOnly);
          std::vector<double> genuine;
          for (Eigen::Index i = 0; i < reference.eigenvalues().size(); ++i)
            if (reference.eigenvalues()(i) < s.problem->spurious_threshold())
              genuine.push_back(reference.eigenvalues()(i));
          for (std::size_t i = 0; i < s.result.eigenvalues.size(); ++i)
            worst = i < genuine.size() ?
                      std::max(worst, std::abs(s.result.eigenvalues[i] - genuine[i]) /
                                        std::max(1.0, std::abs(genuine[i]))) :
                      INFINITY;
          for (const double E : {1.0, 5.0, 12.0, 30.0})
            if (InertiaCounter::fresh_count_below(*s.problem, E) !=
                std::size_t(std::count_if(genuine.begin(), genuine.end(),
                                          [E](double x) { return x < E; })))
              ++inertia_bad;
        }
      out.push_back({"Krylov-Schur list and inertia counts vs dense solver, " +
                       std::to_string(dofs) + " DoFs, D/N/periodic",
                     "Eigen GeneralizedSelfAdjointEigenSolver (all eigenvalues of the same pencil)",
                     "max rel. difference " + format("%.1e", worst) + ", " +
                       std::to_string(inertia_bad) + " count mismatches",
                     format("<= %.0e", dense_tolerance) + ", counts equal",
                     worst <= dense_tolerance && inertia_bad == 0});
    }
  } // namespace

  std::vector<VerificationCheck> run_verification(const bool thorough, std::ostream &log)
  {
    std::vector<VerificationCheck> checks;
    std::vector<double>            orders;
    double                         low = 0, high = 0;
    const std::vector<std::pair<std::string, std::function<void()>>> steps{
      {"free box, Dirichlet", [&] { free_box(checks, Boundary::dirichlet, thorough); }},
      {"free box, Neumann", [&] { free_box(checks, Boundary::neumann, thorough); }},
      {"constant shift", [&] { constant_shift(checks); }},
      {"convergence orders", [&] { convergence(checks, orders); }},
      {"Weyl expansion", [&] { weyl(checks, thorough); }},
      {"semiclassical limit", [&] { semiclassical(checks, thorough); }},
      {"1D exact reference", [&] { one_dimension(checks, low, high); }},
      {"dense reference", [&] { dense_reference(checks); }}};
    for (const auto &[name, step] : steps)
      {
        log << "verify: " << name << "..." << std::flush;
        const auto        start = std::chrono::steady_clock::now();
        const std::size_t before = checks.size();
        try
          {
            step();
          }
        catch (const std::exception &e)
          {
            checks.resize(before);
            checks.push_back({name, "-", std::string("failed to run: ") + e.what(), "-", false});
          }
        const double seconds =
          std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
        for (std::size_t i = before; i < checks.size(); ++i)
          checks[i].seconds = seconds / double(checks.size() - before);
        log << ' ' << format("%.1f", seconds) << " s\n";
      }
    return checks;
  }

  int print_verification(const std::vector<VerificationCheck> &checks, std::ostream &out)
  {
    bool all = true;
    out << "| check | reference (source) | value | tolerance | result |\n"
        << "|---|---|---|---|---|\n";
    for (const auto &c : checks)
      {
        out << "| " << c.name << " | " << c.reference << " | " << c.value << " | " << c.tolerance
            << " | " << (c.pass ? "pass" : "FAIL") << " |\n";
        all = all && c.pass;
      }
    std::size_t passed = std::count_if(checks.begin(), checks.end(),
                                       [](const VerificationCheck &c) { return c.pass; });
    out << "verify: " << passed << " passed, " << checks.size() - passed << " failed\n";
    return all ? 0 : 1;
  }
} // namespace alloyspec
