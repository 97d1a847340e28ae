#include "petsc_handle.h"

namespace alloyspec::internal
{
  void ShiftedFactor::factorise(const Mat K, const Mat M, const double sigma)
  {
    MatFactorInfo info;
    ALLOYSPEC_CHECK(MatFactorInfoInitialize(&info));
    PetscInt64       k_id    = -1;
    PetscObjectState pattern = 0;
    ALLOYSPEC_CHECK(PetscObjectGetId(reinterpret_cast<PetscObject>(K), &k_id));
    ALLOYSPEC_CHECK(MatGetNonzeroState(K, &pattern));
    // Another matrix (or a changed pattern): the analysis must be redone.
    if (!factor_ || k_id != k_id_ || pattern != pattern_)
      {
        factor_.reset();
        shifted_.reset();
        k_id_    = k_id;
        pattern_ = pattern;
        ALLOYSPEC_CHECK(MatDuplicate(K, MAT_COPY_VALUES, &shifted_));
        ALLOYSPEC_CHECK(MatSetOption(shifted_, MAT_SYMMETRIC, PETSC_TRUE));
        ALLOYSPEC_CHECK(MatGetFactor(shifted_, MATSOLVERMUMPS, MAT_FACTOR_CHOLESKY, &factor_));
        if (inertia_ == Inertia::counted)
          {
            ALLOYSPEC_CHECK(MatMumpsSetIcntl(factor_, 13, 1));
            ALLOYSPEC_CHECK(MatMumpsSetIcntl(factor_, 24, 1));
          }
        ALLOYSPEC_CHECK(MatCholeskyFactorSymbolic(factor_, shifted_, nullptr, &info));
        ++n_symbolic_;
      }
    // Same pattern as K (and M): only values change, the analysis stays valid.
    ALLOYSPEC_CHECK(MatCopy(K, shifted_, SAME_NONZERO_PATTERN));
    ALLOYSPEC_CHECK(MatAXPY(shifted_, -sigma, M, SAME_NONZERO_PATTERN));
    ALLOYSPEC_CHECK(MatCholeskyFactorNumeric(factor_, shifted_, &info));
    ++n_numeric_;
  }

  std::size_t ShiftedFactor::negative_pivots() const
  {
    if (inertia_ != Inertia::counted || !factor_ || n_numeric_ == 0)
      throw std::logic_error("ShiftedFactor::negative_pivots: no factorisation set up for an "
                             "inertia count");
    PetscInt n_negative = 0, n_zero = 0, n_positive = 0;
    ALLOYSPEC_CHECK(MatGetInertia(factor_, &n_negative, &n_zero, &n_positive));
    return static_cast<std::size_t>(n_negative);
  }
} // namespace alloyspec::internal
