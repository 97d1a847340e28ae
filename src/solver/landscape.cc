/** @file landscape.cc  Landscape function, effective potential W = 1/u and its Weyl-type count. */
#include <alloyspec/fe/discretisation.h>
#include <alloyspec/core/errors.h>
#include <alloyspec/solver/landscape.h>
#include "petsc_handle.h"
#include "shifted_amg.h"
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

  namespace
  {
    /** PETSc's preconditioner callback: one V-cycle of the Trilinos AMG in the context. */
    PetscErrorCode apply_amg(PC pc, Vec in, Vec out)
    {
      void *context = nullptr;
      PetscCall(PCShellGetContext(pc, &context));
      const PetscScalar *x = nullptr;
      PetscScalar       *y = nullptr;
      PetscCall(VecGetArrayRead(in, &x));
      PetscCall(VecGetArray(out, &y));
      static_cast<const internal::ShiftedAmg *>(context)->apply(x, y, 1);
      PetscCall(VecRestoreArray(out, &y));
      PetscCall(VecRestoreArrayRead(in, &x));
      return 0;
    }

    /**
     * Values of @p x and of the constrained indicator @p flags at the rows
     * other ranks own that this rank's rows couple to (@p ghosts, ascending),
     * for the comparisons of the local maxima across the partition.
     */
    void fetch_ghosts(Vec x, Vec flags, const std::vector<PetscInt> &ghosts,
                      std::vector<double> &x_values, std::vector<double> &flag_values)
    {
      IS       from = nullptr;
      OwnedVec local;
      ALLOYSPEC_CHECK(ISCreateGeneral(PETSC_COMM_SELF, PetscInt(ghosts.size()), ghosts.data(),
                                      PETSC_COPY_VALUES, &from));
      ALLOYSPEC_CHECK(VecCreateSeq(PETSC_COMM_SELF, PetscInt(ghosts.size()), &local));
      VecScatter scatter = nullptr;
      ALLOYSPEC_CHECK(VecScatterCreate(x, from, local, nullptr, &scatter));
      for (auto [source, target] : {std::pair{x, &x_values}, std::pair{flags, &flag_values}})
        {
          ALLOYSPEC_CHECK(VecScatterBegin(scatter, source, local, INSERT_VALUES, SCATTER_FORWARD));
          ALLOYSPEC_CHECK(VecScatterEnd(scatter, source, local, INSERT_VALUES, SCATTER_FORWARD));
          const PetscScalar *values = nullptr;
          ALLOYSPEC_CHECK(VecGetArrayRead(local, &values));
          target->assign(values, values + ghosts.size());
          ALLOYSPEC_CHECK(VecRestoreArrayRead(local, &values));
        }
      ALLOYSPEC_CHECK(VecScatterDestroy(&scatter));
      ALLOYSPEC_CHECK(ISDestroy(&from));
    }

    /** At most this many minima per rank are gathered: `landscape/estimates` allows up to 1000. */
    constexpr std::size_t minima_per_rank = 1000;
  } // namespace

  LandscapeField solve_landscape(const Discretisation &discretisation, SpectralProblem &problem,
                                 const std::vector<double> &cell_values, const double shift,
                                 const double tolerance)
  {
    std::vector<double> shifted(cell_values);
    for (double &q : shifted)
      q += shift;
    discretisation.assemble_potential(shifted, problem);
    // A serial mesh gives whole vectors, a distributed one this rank's rows.
    const std::vector<double> load   = discretisation.load_vector();
    const Mat                 matrix = problem.stiffness();
    MPI_Comm                  comm   = MPI_COMM_NULL;
    ALLOYSPEC_CHECK(PetscObjectGetComm(reinterpret_cast<PetscObject>(matrix), &comm));
    PetscInt first = 0, last = 0;
    ALLOYSPEC_CHECK(MatGetOwnershipRange(matrix, &first, &last));
    const PetscInt n = last - first;
    AssertThrow(std::size_t(n) == load.size(),
                dealii::ExcMessage("landscape: the load vector does not match the matrix rows"));

    OwnedVec b, x, r;
    ALLOYSPEC_CHECK(MatCreateVecs(matrix, &x, &b));
    ALLOYSPEC_CHECK(VecDuplicate(b, &r));
    {
      PetscScalar *values = nullptr;
      ALLOYSPEC_CHECK(VecGetArray(b, &values));
      std::copy(load.begin(), load.end(), values);
      ALLOYSPEC_CHECK(VecRestoreArray(b, &values));
    }

    // K + σM is symmetric positive definite (V + σ ≥ 0 and > 0 somewhere, or
    // Dirichlet faces); algebraic multigrid (Trilinos ML, the eigen-solver's)
    // makes CG's iteration count nearly independent of the mesh size.
    internal::ShiftedAmg amg;
    amg.setup(matrix, problem.mass(), 0.0);
    OwnedKsp ksp;
    ALLOYSPEC_CHECK(KSPCreate(comm, &ksp));
    ALLOYSPEC_CHECK(KSPSetOperators(ksp, matrix, matrix));
    ALLOYSPEC_CHECK(KSPSetType(ksp, KSPCG));
    PC pc;
    ALLOYSPEC_CHECK(KSPGetPC(ksp, &pc));
    ALLOYSPEC_CHECK(PCSetType(pc, PCSHELL));
    ALLOYSPEC_CHECK(PCShellSetContext(pc, &amg));
    ALLOYSPEC_CHECK(PCShellSetApply(pc, apply_amg));
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
    {
      const PetscScalar *values = nullptr;
      ALLOYSPEC_CHECK(VecGetArrayRead(x, &values));
      std::copy(values, values + n, u.begin());
      ALLOYSPEC_CHECK(VecRestoreArrayRead(x, &values));
    }
    field.u = problem.distributed ? u : discretisation.complete(u);

    // Local maxima of u over the DoF couplings (the element patches) are the
    // local minima of W. Ties go to the lower index, so a plateau counts once.
    // On a distributed mesh the coupled rows of other ranks come by a scatter.
    const auto constrained = [&](PetscInt i) { return bool(problem.constrained[std::size_t(i) - problem.first_row]); };
    std::vector<PetscInt> ghosts;
    std::vector<double>   ghost_u, ghost_flag;
    if (problem.distributed)
      {
        for (PetscInt i = first; i < last; ++i)
          {
            PetscInt        ncols = 0;
            const PetscInt *cols  = nullptr;
            ALLOYSPEC_CHECK(MatGetRow(matrix, i, &ncols, &cols, nullptr));
            for (PetscInt k = 0; k < ncols; ++k)
              if (cols[k] < first || cols[k] >= last)
                ghosts.push_back(cols[k]);
            ALLOYSPEC_CHECK(MatRestoreRow(matrix, i, &ncols, &cols, nullptr));
          }
        std::sort(ghosts.begin(), ghosts.end());
        ghosts.erase(std::unique(ghosts.begin(), ghosts.end()), ghosts.end());
        OwnedVec flags;
        ALLOYSPEC_CHECK(VecDuplicate(x, &flags));
        PetscScalar *f = nullptr;
        ALLOYSPEC_CHECK(VecGetArray(flags, &f));
        for (PetscInt i = first; i < last; ++i)
          f[i - first] = constrained(i) ? 1.0 : 0.0;
        ALLOYSPEC_CHECK(VecRestoreArray(flags, &f));
        fetch_ghosts(x, flags, ghosts, ghost_u, ghost_flag);
      }
    const auto value_at = [&](PetscInt j, bool &is_constrained) {
      if (j >= first && j < last)
        {
          is_constrained = constrained(j);
          return field.u[std::size_t(problem.distributed ? j - first : j)];
        }
      const std::size_t g = std::size_t(std::lower_bound(ghosts.begin(), ghosts.end(), j) - ghosts.begin());
      is_constrained      = ghost_flag[g] != 0.0;
      return ghost_u[g];
    };
    for (PetscInt i = first; i < last; ++i)
      {
        bool         skip = false;
        const double ui   = value_at(i, skip);
        if (skip || !(ui > 0.0))
          continue;
        PetscInt        ncols = 0;
        const PetscInt *cols  = nullptr;
        ALLOYSPEC_CHECK(MatGetRow(matrix, i, &ncols, &cols, nullptr));
        bool maximum = true;
        for (PetscInt k = 0; k < ncols && maximum; ++k)
          {
            const PetscInt j = cols[k];
            bool           other_constrained = false;
            const double   uj                = value_at(j, other_constrained);
            if (j == i || other_constrained)
              continue;
            maximum = uj < ui || (uj == ui && j > i);
          }
        ALLOYSPEC_CHECK(MatRestoreRow(matrix, i, &ncols, &cols, nullptr));
        if (maximum)
          field.minima.push_back(1.0 / ui - shift);
      }
    std::sort(field.minima.begin(), field.minima.end());
    if (problem.distributed)
      {
        if (field.minima.size() > minima_per_rank)
          field.minima.resize(minima_per_rank);
        std::vector<double> all;
        for (const auto &part : dealii::Utilities::MPI::all_gather(comm, field.minima))
          all.insert(all.end(), part.begin(), part.end());
        std::sort(all.begin(), all.end());
        field.minima = std::move(all);
      }
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
    // A distributed mesh integrated over this rank's elements only.
    if (discretisation.distributed())
      dealii::Utilities::MPI::sum(counts, discretisation.communicator(), counts);
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
