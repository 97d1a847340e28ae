#include "petsc_check.h"
#include <alloyspec/core/errors.h>
#include <alloyspec/solver/inertia_counter.h>
#include <alloyspec/fe/spectral_problem.h>

#include <deal.II/base/mpi.h>

#include <petscmat.h>

#include <algorithm>
#include <stdexcept>


namespace alloyspec
{
  struct InertiaCounter::Factor
  {
    Mat         shifted = nullptr;
    Mat         factor  = nullptr;
    /** PETSc's unique id of the K it was built for, and that K's nonzero state. */
    PetscInt64       k_id    = -1;
    PetscObjectState pattern = 0;
    ~Factor()
    {
      if (factor)
        MatDestroy(&factor);
      if (shifted)
        MatDestroy(&shifted);
    }
  };

  InertiaCounter::InertiaCounter()  = default;
  InertiaCounter::~InertiaCounter() = default;

  std::size_t InertiaCounter::count_below(const SpectralProblem &problem, const double energy)
  {
    const std::size_t n_negative = negative_pivots(backend::MatrixPair{problem.K, problem.M}, energy);
    // Above μ the constrained rows count too; every genuine eigenvalue is below μ.
    return std::min(n_negative, problem.n_genuine());
  }

  std::size_t InertiaCounter::negative_pivots(const backend::MatrixPair pencil, const double energy)
  {
    const Mat K = pencil.K;
    const Mat M = pencil.M;
    MatFactorInfo info;
    ALLOYSPEC_CHECK(MatFactorInfoInitialize(&info));
    PetscInt64       k_id    = -1;
    PetscObjectState pattern = 0;
    ALLOYSPEC_CHECK(PetscObjectGetId(reinterpret_cast<PetscObject>(K), &k_id));
    ALLOYSPEC_CHECK(MatGetNonzeroState(K, &pattern));
    // Another matrix (or a changed pattern): the analysis must be redone.
    if (factor_ && (factor_->k_id != k_id || factor_->pattern != pattern))
      factor_.reset();
    if (!factor_)
      {
        factor_ = std::make_unique<Factor>();
        factor_->k_id    = k_id;
        factor_->pattern = pattern;
        ALLOYSPEC_CHECK(MatDuplicate(K, MAT_COPY_VALUES, &factor_->shifted));
        ALLOYSPEC_CHECK(MatSetOption(factor_->shifted, MAT_SYMMETRIC, PETSC_TRUE));
        ALLOYSPEC_CHECK(MatGetFactor(factor_->shifted, MATSOLVERMUMPS, MAT_FACTOR_CHOLESKY,
                                     &factor_->factor));
        // MUMPS reports the inertia only with null-pivot detection on and the
        // root node factorised without ScaLAPACK (ICNTL(24) = 1, ICNTL(13) = 1).
        ALLOYSPEC_CHECK(MatMumpsSetIcntl(factor_->factor, 13, 1));
        ALLOYSPEC_CHECK(MatMumpsSetIcntl(factor_->factor, 24, 1));
        ALLOYSPEC_CHECK(MatCholeskyFactorSymbolic(factor_->factor, factor_->shifted, nullptr, &info));
      }
    // Same pattern as K (and M): only values change, the analysis stays valid.
    ALLOYSPEC_CHECK(MatCopy(K, factor_->shifted, SAME_NONZERO_PATTERN));
    ALLOYSPEC_CHECK(MatAXPY(factor_->shifted, -energy, M, SAME_NONZERO_PATTERN));
    ALLOYSPEC_CHECK(MatCholeskyFactorNumeric(factor_->factor, factor_->shifted, &info));
    ++n_factorisations_;
    PetscInt n_negative = 0, n_zero = 0, n_positive = 0;
    ALLOYSPEC_CHECK(MatGetInertia(factor_->factor, &n_negative, &n_zero, &n_positive));
    return static_cast<std::size_t>(n_negative);
  }
} // namespace alloyspec
