/** @file landscape.cc  Landscape function, effective potential W = 1/u and its Weyl-type count. */
#include <alloyspec/fe/discretisation.h>
#include <alloyspec/core/errors.h>
#include <alloyspec/solver/landscape.h>
#include "petsc_handle.h"
#include <alloyspec/core/format.h>
#include <alloyspec/fe/spectral_problem.h>
#include <alloyspec/model/weyl_law.h>

#include <deal.II/base/mpi.h>
#include <deal.II/base/parameter_handler.h>

#include <petscksp.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <map>
#include <numeric>
#include <sstream>
#include <stdexcept>

namespace alloyspec
{
  namespace
  {
    using internal::OwnedVec;
    using OwnedKsp = internal::PetscHandle<KSP, KSPDestroy>;

    constexpr double shift_fraction = 1e-2; // see default_landscape_shift()
    constexpr unsigned int max_cg_iterations = 10000;
  } // namespace

  void LandscapeSettings::declare_parameters(dealii::ParameterHandler &prm)
  {
    prm.enter_subsection("landscape");
    prm.declare_entry("shift", "auto", dealii::Patterns::Anything(),
                      "Shift sigma >= 0 (in the energy unit of the study) of the landscape "
                      "problem (H + sigma) u = 1; needs V + sigma >= 0. 'auto': max(0, -min V) "
                      "plus 1% of the spread of the cell values.");
    prm.declare_entry("tolerance", "1e-10", dealii::Patterns::Double(1e-14, 1e-3),
                      "Relative residual at which the conjugate-gradient iteration (with "
                      "algebraic multigrid) stops, in [1e-14, 1e-3].");
    prm.declare_entry("estimates", "10", dealii::Patterns::Integer(0, 1000),
                      "Number of lowest-eigenvalue estimates (from the minima of the effective "
                      "potential) written per realisation and boundary condition, 0 to 1000.");
    prm.leave_subsection();
  }

  void LandscapeSettings::parse_parameters(dealii::ParameterHandler &prm)
  {
    prm.enter_subsection("landscape");
    const std::string text = prm.get("shift");
    tolerance              = prm.get_double("tolerance");
    estimates              = prm.get_integer("estimates");
    prm.leave_subsection();
    if (text == "auto")
      shift.reset();
    else
      {
        char        *end   = nullptr;
        const double value = std::strtod(text.c_str(), &end);
        if (text.empty() || end != text.c_str() + text.size() || !(value >= 0.0) ||
            !std::isfinite(value))
          throw InputError("parameter 'landscape/shift': '" + text +
                           "' is not allowed (allowed: 'auto' or a finite number >= 0)");
        shift = value;
      }
  }

  double default_landscape_shift(const double q_min, const double q_max)
  {
    return std::max(0.0, -q_min) +
           shift_fraction * std::max({q_max - q_min, std::abs(q_max), 1.0});
  }

  LandscapeField solve_landscape(const Discretisation &discretisation, SpectralProblem &problem,
                                 const std::vector<double> &cell_values, const double shift,
                                 const double tolerance)
  {
    std::vector<double> shifted(cell_values);
    for (double &q : shifted)
      q += shift;
    discretisation.assemble_potential(shifted, problem);
    const std::vector<double> load = discretisation.load_vector();
    const PetscInt            n    = static_cast<PetscInt>(load.size());

    OwnedVec b, x, r;
    ALLOYSPEC_CHECK(VecCreateSeq(PETSC_COMM_SELF, n, &b));
    ALLOYSPEC_CHECK(VecDuplicate(b, &x));
    ALLOYSPEC_CHECK(VecDuplicate(b, &r));
    std::vector<PetscInt> rows(load.size());
    std::iota(rows.begin(), rows.end(), PetscInt(0));
    ALLOYSPEC_CHECK(VecSetValues(b, n, rows.data(), load.data(), INSERT_VALUES));
    ALLOYSPEC_CHECK(VecAssemblyBegin(b));
    ALLOYSPEC_CHECK(VecAssemblyEnd(b));

    // K + σM is symmetric positive definite (V + σ ≥ 0 and > 0 somewhere, or
    // Dirichlet faces); algebraic multigrid makes CG's iteration count nearly
    // independent of the mesh size.
    const Mat matrix = problem.K;
    OwnedKsp  ksp;
    ALLOYSPEC_CHECK(KSPCreate(PETSC_COMM_SELF, &ksp));
    ALLOYSPEC_CHECK(KSPSetOperators(ksp, matrix, matrix));
    ALLOYSPEC_CHECK(KSPSetType(ksp, KSPCG));
    PC pc;
    ALLOYSPEC_CHECK(KSPGetPC(ksp, &pc));
    ALLOYSPEC_CHECK(PCSetType(pc, PCGAMG));
    ALLOYSPEC_CHECK(KSPSetNormType(ksp, KSP_NORM_UNPRECONDITIONED));
    ALLOYSPEC_CHECK(KSPSetTolerances(ksp, tolerance, 0.0, PETSC_DEFAULT, max_cg_iterations));
    ALLOYSPEC_CHECK(KSPSolve(ksp, b, x));
    KSPConvergedReason reason;
    ALLOYSPEC_CHECK(KSPGetConvergedReason(ksp, &reason));
    PetscInt iterations = 0;
    ALLOYSPEC_CHECK(KSPGetIterationNumber(ksp, &iterations));

    // The true residual, not the iteration's estimate.
    PetscReal b_norm = 0, r_norm = 0;
    ALLOYSPEC_CHECK(MatMult(matrix, x, r));
    ALLOYSPEC_CHECK(VecAYPX(r, -1.0, b));
    ALLOYSPEC_CHECK(VecNorm(r, NORM_2, &r_norm));
    ALLOYSPEC_CHECK(VecNorm(b, NORM_2, &b_norm));

    LandscapeField field;
    field.shift             = shift;
    field.iterations        = static_cast<unsigned int>(iterations);
    field.relative_residual = b_norm > 0 ? r_norm / b_norm : 0.0;
    if (reason < 0 && !(field.relative_residual <= 10 * tolerance))
      throw std::runtime_error("landscape solve: conjugate gradients stopped (PETSc reason " +
                               std::to_string(int(reason)) + ") at relative residual " +
                               short_number(field.relative_residual) + " after " +
                               std::to_string(iterations) + " iterations");
    std::vector<double> u(load.size());
    const PetscScalar  *values = nullptr;
    ALLOYSPEC_CHECK(VecGetArrayRead(x, &values));
    std::copy(values, values + n, u.begin());
    ALLOYSPEC_CHECK(VecRestoreArrayRead(x, &values));
    field.u = discretisation.complete(u);

    // Local maxima of u over the DoF couplings (the element patches) are the
    // local minima of W. Ties go to the lower index, so a plateau counts once.
    for (PetscInt i = 0; i < n; ++i)
      {
        if (problem.constrained[i] || !(field.u[i] > 0.0))
          continue;
        PetscInt        ncols = 0;
        const PetscInt *cols  = nullptr;
        ALLOYSPEC_CHECK(MatGetRow(matrix, i, &ncols, &cols, nullptr));
        bool maximum = true;
        for (PetscInt k = 0; k < ncols && maximum; ++k)
          {
            const PetscInt j = cols[k];
            if (j == i || problem.constrained[j])
              continue;
            maximum = field.u[j] < field.u[i] || (field.u[j] == field.u[i] && j > i);
          }
        ALLOYSPEC_CHECK(MatRestoreRow(matrix, i, &ncols, &cols, nullptr));
        if (maximum)
          field.minima.push_back(1.0 / field.u[i] - shift);
      }
    std::sort(field.minima.begin(), field.minima.end());
    return field;
  }

  std::vector<double> landscape_counts(const Discretisation &discretisation,
                                       const unsigned int dimension, const LandscapeField &field,
                                       const std::vector<double> &energies)
  {
    std::vector<double> values, weights;
    discretisation.quadrature_values(field.u, values, weights);
    std::vector<double> counts(energies.size(), 0.0);
    for (std::size_t k = 0; k < values.size(); ++k)
      {
        if (!(values[k] > 0.0))
          continue; // W = +∞: no phase space
        const double w = 1.0 / values[k] - field.shift;
        for (std::size_t i = 0; i < energies.size(); ++i)
          if (energies[i] > w)
            counts[i] += weights[k] * free_ids_density(dimension, energies[i] - w);
      }
    return counts;
  }

  std::vector<double> landscape_eigenvalue_estimates(const unsigned int    dimension,
                                                     const LandscapeField &field,
                                                     const std::size_t     count)
  {
    std::vector<double> estimates;
    const double        factor = 1.0 + dimension / 4.0;
    for (std::size_t k = 0; k < field.minima.size() && k < count; ++k)
      estimates.push_back(factor * (field.minima[k] + field.shift) - field.shift);
    return estimates;
  }
} // namespace alloyspec
