/**
 * @file shifted_amg.h  Algebraic multigrid for K − σM (Trilinos ML through
 * deal.II), one vector per cycle: the landscape's conjugate gradients (the
 * eigen-solver's blocks go through block_amg.h). Source-private to the solver
 * layer; its Trilinos types stay in shifted_amg.cc.
 */
#pragma once

#include <petscmat.h>

#include <cstddef>
#include <memory>

namespace alloyspec::internal
{
  /**
   * One V-cycle of smoothed-aggregation AMG (ML) for @f$K - \sigma M@f$, a
   * symmetric positive definite matrix when σ lies below the spectrum. The
   * matrix is copied from the PETSc pair into a Trilinos matrix with the same
   * row distribution (the same communicator); its pattern is kept while K
   * (PETSc's object id) and its nonzero pattern stay the same, so a new
   * realisation costs a refill of values and the AMG set-up.
   */
  class ShiftedAmg
  {
  public:
    ShiftedAmg();
    ~ShiftedAmg();
    ShiftedAmg(const ShiftedAmg &)            = delete;
    ShiftedAmg &operator=(const ShiftedAmg &) = delete;

    /** Builds the hierarchy for K − σM. */
    void setup(Mat K, Mat M, double sigma);
    /** out = AMG⁻¹ in for @p columns columns of n_local rows (column-major). */
    void apply(const double *in, double *out, unsigned int columns) const;
    /** Seconds of the last set-up (copy and hierarchy). */
    double last_setup_seconds() const;
    /** Bytes held by the Trilinos copy of the matrix (an estimate from its entries). */
    std::size_t matrix_bytes() const;

  private:
    struct Impl;
    std::unique_ptr<Impl> impl_;
  };
} // namespace alloyspec::internal
