/**
 * @file block_amg.h  Algebraic multigrid for K − σM that cycles a whole block
 * of columns at once (Trilinos MueLu on Tpetra); source-private to the solver
 * layer. Its Trilinos types stay in block_amg.cc.
 */
#pragma once

#include <petscmat.h>

#include <cstddef>
#include <memory>

namespace alloyspec::internal
{
  /**
   * One V-cycle of smoothed-aggregation AMG (MueLu) for @f$K - \sigma M@f$,
   * symmetric positive definite when σ lies below the spectrum, applied to a
   * block of b columns in one pass: every sparse product and smoother sweep of
   * the cycle reads its level's matrix once for the whole block, where a
   * column-at-a-time cycle reads it b times. The matrix's graph is kept while
   * K (PETSc's object id) and its nonzero pattern stay the same, so a new
   * realisation costs a refill of values and the hierarchy's set-up.
   *
   * Every cycle runs 8 columns, a block of another width in chunks of 8,
   * the last padded with zero columns: Ifpack2's Chebyshev smoother in
   * Trilinos 13.2 keeps a residual block of the width of its first call and
   * fails on any other. Measured at L = 24 (Q2, k = 20, a block of 25, 54
   * iterations at every width), seconds of the eigen-solve: width 4: 33.3,
   * 8: 31.3, 13: 31.1, 25: 33.6; at L = 48 (912,673 unknowns) width 8 took
   * 351.4 s and 7760 MiB at its high-water mark, 13 took 363.7 and 368.1 s
   * and 8011 MiB (the cycle's work blocks scale with the width). The prolongator is smoothed with the
   * dropped (filtered) matrix: unfiltered took 30.5 and 30.0 s against 28.8
   * and 28.4 s.
   *
   * Made for blocks: one column at a time (the landscape's conjugate
   * gradients) ML's ShiftedAmg is faster. Landscape at L = 24, two elements
   * per cell, two realisations: ML 17 CG iterations, 27.3 and 23.8 s; MueLu
   * one column per cycle, the prolongator smoothed unfiltered, 22–23
   * iterations, 38.4 and 34.3 s. (Filtered, CG on 2 ranks at L = 6 stalled at
   * a relative residual of 2.3e-11 against a tolerance of 1e-12.)
   */
  class BlockAmg
  {
  public:
    BlockAmg();
    ~BlockAmg();
    BlockAmg(const BlockAmg &)            = delete;
    BlockAmg &operator=(const BlockAmg &) = delete;

    /** Builds the hierarchy for K − σM. */
    void setup(Mat K, Mat M, double sigma);
    /** out = AMG⁻¹ in for @p columns columns of n_local rows (column-major). */
    void apply(const double *in, double *out, unsigned int columns) const;
    /** Seconds of the last set-up (copy and hierarchy). */
    double last_setup_seconds() const;

  private:
    struct Impl;
    std::unique_ptr<Impl> impl_;
  };
} // namespace alloyspec::internal
