#include <alloyspec/solver/error_estimate.h>
#include <alloyspec/core/errors.h>
#include <alloyspec/fe/spectral_problem.h>

#include <algorithm>
#include <cmath>
#include <limits>
#include <sstream>

namespace alloyspec
{
  ErrorEstimateSettings::ErrorEstimateSettings(const DiscretisationSettings &settings)
    : method(settings.error_estimate)
    , accuracy(settings.accuracy)
  {}

  std::vector<double> eigenvalue_error_bounds(const std::vector<double> &coarse,
                                              const std::vector<double> &fine,
                                              const RicherSpace space, const unsigned int degree,
                                              const double solver_tolerance)
  {
    const double richardson =
      space == RicherSpace::mesh ? std::pow(4.0, degree) / (std::pow(4.0, degree) - 1.0) : 1.0;
    std::vector<double> bounds(coarse.size(), std::numeric_limits<double>::quiet_NaN());
    for (std::size_t i = 0; i < std::min(coarse.size(), fine.size()); ++i)
      {
        // Rounding floor: each eigenvalue is known to about the solver
        // tolerance relative to max(|λ|, 1), and not better than 1e-13.
        const double floor = 2.0 * std::max(solver_tolerance, 1e-13) *
                             std::max({std::abs(coarse[i]), std::abs(fine[i]), 1.0});
        // A negative difference beyond rounding would contradict the min-max
        // ordering; its size is then the honest uncertainty.
        const double difference = std::abs(coarse[i] - fine[i]);
        bounds[i] = std::max(safety_factor * richardson * difference, floor);
      }
    return bounds;
  }

  DiscretisationSettings richer_settings(const DiscretisationSettings &coarse,
                                         const RicherSpace              space)
  {
    DiscretisationSettings fine = coarse;
    if (space == RicherSpace::degree)
      fine.degree += 1;
    else
      fine.elements_per_cell *= 2;
    return fine;
  }

  ErrorEstimator::ErrorEstimator(const Lattice &lattice, const DiscretisationSettings &coarse,
                                 const BoundaryConditions &bcs, const EigenSolverSettings &solver,
                                 const RicherSpace space)
    : ErrorEstimator(Discretisation::create(lattice, richer_settings(coarse, space), bcs), coarse,
                     solver, space)
  {}

  ErrorEstimator::ErrorEstimator(std::unique_ptr<Discretisation> fine,
                                 const DiscretisationSettings &coarse,
                                 const EigenSolverSettings &solver, const RicherSpace space)
    : degree_(coarse.degree)
    , space_(space)
    , solver_settings_(solver)
    , discretisation_(std::move(fine))
  {
    discretisation_->make_grid();
    discretisation_->setup_system();
    discretisation_->assemble_fixed();
    problem_ = discretisation_->make_problem();
    // The fine solve asks for as many eigenvalues as the coarse one returned
    // (each fine one lies below its coarse partner), never by energy.
    solver_settings_.energy_cutoff.reset();
  }

  ErrorEstimator::~ErrorEstimator() = default;

  std::size_t ErrorEstimator::n_dofs() const { return discretisation_->n_dofs(); }

  std::vector<double> ErrorEstimator::errors(const std::vector<double> &cell_values,
                                             const std::vector<double> &coarse)
  {
    fine_.clear();
    if (coarse.empty())
      return {};
    discretisation_->assemble_potential(cell_values, *problem_);
    EigenSolverSettings settings = solver_settings_;
    settings.n_eigenvalues       = static_cast<unsigned int>(coarse.size());
    settings.max_eigenvalues     = std::max<unsigned int>(settings.max_eigenvalues,
                                                      settings.n_eigenvalues);
    EigenSolver       solver(settings);
    const EigenResult result = solver.solve(*problem_);
    // The fine list is inertia-verified and at least as long as asked for:
    // index i of both lists is the i-th eigenvalue of the same operator.
    fine_ = result.eigenvalues;
    return eigenvalue_error_bounds(coarse, fine_, space_, degree_, settings.tolerance);
  }

} // namespace alloyspec
