#include "petsc_handle.h"
#include <alloyspec/core/errors.h>
#include <alloyspec/solver/inertia_counter.h>
#include <alloyspec/fe/spectral_problem.h>

#include <deal.II/base/mpi.h>

#include <petscmat.h>

#include <algorithm>
#include <stdexcept>


namespace alloyspec
{
  /** The counter's one factor: ShiftedFactor set up for the inertia. */
  struct InertiaCounter::Factor
  {
    internal::ShiftedFactor shifted{internal::ShiftedFactor::Inertia::counted};
  };

  InertiaCounter::InertiaCounter()  = default;
  InertiaCounter::~InertiaCounter() = default;

  std::size_t InertiaCounter::count_below(const SpectralProblem &problem, const double energy)
  {
    const std::size_t n_negative = negative_pivots(backend::MatrixPair{problem.stiffness(), problem.mass()}, energy);
    // Above μ the constrained rows count too; every genuine eigenvalue is below μ.
    return std::min(n_negative, problem.n_genuine());
  }

  std::size_t InertiaCounter::negative_pivots(const backend::MatrixPair pencil, const double energy)
  {
    if (!factor_)
      factor_ = std::make_unique<Factor>();
    factor_->shifted.factorise(pencil.K, pencil.M, energy);
    ++n_factorisations_;
    return factor_->shifted.negative_pivots();
  }

  double InertiaCounter::last_factorisation_flops() const
  {
    return factor_ ? factor_->shifted.last_factorisation_flops() : 0.0;
  }

  double InertiaCounter::last_factorisation_seconds() const
  {
    return factor_ ? factor_->shifted.last_factorisation_seconds() : 0.0;
  }

  std::size_t InertiaCounter::fresh_count_below(const SpectralProblem &problem, const double energy)
  {
    // A new factor: its own ordering and symbolic analysis.
    InertiaCounter counter;
    return counter.count_below(problem, energy);
  }
} // namespace alloyspec
