#include "petsc_handle.h"

#include <algorithm>
#include <chrono>

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
        rhs_block_ = 0;
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
    const auto start = std::chrono::steady_clock::now();
    ALLOYSPEC_CHECK(MatCopy(K, shifted_, SAME_NONZERO_PATTERN));
    ALLOYSPEC_CHECK(MatAXPY(shifted_, -sigma, M, SAME_NONZERO_PATTERN));
    ALLOYSPEC_CHECK(MatCholeskyFactorNumeric(factor_, shifted_, &info));
    last_factorisation_seconds_ =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
    ++n_numeric_;
  }

  void ShiftedFactor::solve(const Mat rhs, const Mat solution, const unsigned int columns)
  {
    const auto start = std::chrono::steady_clock::now();
    ALLOYSPEC_CHECK(MatMatSolve(factor_, rhs, solution));
    solve_seconds_ += std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
    const unsigned int block = rhs_block();
    ++n_solve_calls_;
    n_solved_columns_ += columns;
    n_factor_passes_ += (columns + block - 1) / block;
  }

  std::size_t ShiftedFactor::factor_entries() const
  {
    if (!factor_ || n_numeric_ == 0)
      return 0;
    PetscInt entries = 0;
    ALLOYSPEC_CHECK(MatMumpsGetInfog(factor_, 29, &entries));
    // MUMPS reports a count beyond the integer range as minus the millions.
    return entries >= 0 ? static_cast<std::size_t>(entries) :
                          static_cast<std::size_t>(-entries) * std::size_t(1000000);
  }

  double ShiftedFactor::last_factorisation_flops() const
  {
    if (!factor_ || n_numeric_ == 0)
      return 0;
    PetscReal flops = 0;
    ALLOYSPEC_CHECK(MatMumpsGetRinfog(factor_, 3, &flops));
    return flops;
  }

  unsigned int ShiftedFactor::rhs_block() const
  {
    if (rhs_block_ == 0)
      {
        PetscInt block = 0;
        ALLOYSPEC_CHECK(MatMumpsGetIcntl(factor_, 27, &block));
        rhs_block_ =
          static_cast<unsigned int>(std::max<PetscInt>(1, block < 0 ? -block : block));
      }
    return rhs_block_;
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

  std::size_t ShiftedFactor::zero_pivots() const
  {
    if (inertia_ != Inertia::counted || !factor_ || n_numeric_ == 0)
      throw std::logic_error("ShiftedFactor::zero_pivots: no factorisation set up for an "
                             "inertia count");
    PetscInt n_negative = 0, n_zero = 0, n_positive = 0;
    ALLOYSPEC_CHECK(MatGetInertia(factor_, &n_negative, &n_zero, &n_positive));
    return static_cast<std::size_t>(n_zero);
  }
} // namespace alloyspec::internal
