/** @file lobpcg.h  Locally optimal block preconditioned conjugate gradients for the lowest eigenpairs of K u = λ M u. */
#pragma once

#include <cstddef>
#include <cstdint>
#include <functional>
#include <vector>

namespace alloyspec
{
  /**
   * The pencil (K, M), K symmetric, M symmetric positive definite, and a
   * symmetric positive definite preconditioner T ≈ (K − σM)⁻¹, given by their
   * actions on blocks. Blocks are column-major arrays of @c n_local rows (this
   * process's rows) and b columns. Nothing here names a linear-algebra
   * library, so the same code runs on one process or on the rows a process
   * owns of a distributed problem (the caller supplies the global sum).
   */
  struct LobpcgOperator
  {
    std::size_t n_local    = 0; ///< rows held by this process
    std::size_t row_offset = 0; ///< global index of the first local row
    /** out = K in, for @p b columns. */
    std::function<void(const double *in, double *out, unsigned int b)> stiffness;
    /** out = M in, for @p b columns. */
    std::function<void(const double *in, double *out, unsigned int b)> mass;
    /** out = T in, for @p b columns (T symmetric positive definite). */
    std::function<void(const double *in, double *out, unsigned int b)> precondition;
    /** Sums @p count doubles in place over all processes (nothing to do on one). */
    std::function<void(double *data, std::size_t count)> sum = [](double *, std::size_t) {};
    /**
     * Local rows held at zero in every iterate (size n_local, or empty): the
     * decoupled rows of constrained DoFs, whose pushed-out eigenvalue must
     * never enter the search space.
     */
    std::vector<bool> fixed;
  };

  /** Sizes and stopping rule of one run. */
  struct LobpcgSettings
  {
    /** Columns of the block m (wanted pairs plus guard vectors). */
    unsigned int  block_size = 16;
    /**
     * The run stops once the first n_converged_needed columns have relative
     * residual @f$\|Kx-\theta Mx\|_2 / (\max(|\theta|,1)\,\|Mx\|_2)@f$ ≤ tolerance,
     * computed from freshly applied K and M.
     */
    unsigned int  n_converged_needed = 10;
    double        tolerance      = 1e-10;
    /**
     * If set, replaces the rule above: the run stops once this returns true
     * for the Ritz values and relative residuals (freshly applied K and M).
     * Columns whose residual is ≤ tolerance get no new directions either way.
     */
    std::function<bool(const std::vector<double> &theta, const std::vector<double> &residuals)> stop;
    unsigned int  max_iterations = 1000;
    /** Every this many iterations KX and MX are applied afresh (they are otherwise updated by linear combinations). */
    unsigned int  refresh_every  = 10;
    std::uint64_t seed           = 1; ///< start block, a function of (seed, global row, column) only
  };

  /** The final block: Ritz values ascending, M-orthonormal Ritz vectors and their images. */
  struct LobpcgResult
  {
    std::vector<double> theta;
    std::vector<double> vectors;   ///< X: n_local × m, column-major
    std::vector<double> stiffness; ///< K X, freshly applied
    std::vector<double> mass;      ///< M X, freshly applied
    std::vector<double> residuals; ///< relative residual per column (as in LobpcgSettings)
    unsigned int        iterations = 0;
    std::size_t         preconditioned_columns = 0; ///< columns T was applied to, in all
    bool                converged  = false;
  };

  /**
   * LOBPCG (Knyazev, SIAM J. Sci. Comput. 23 (2001) 517) with soft locking:
   * every iteration does Rayleigh–Ritz on span[X, W, P] with W = T R the
   * preconditioned residuals of the not yet converged columns and P the
   * previous step's directions of those columns; converged columns stay in X
   * (so they keep being improved by the Rayleigh–Ritz step) but get no new
   * directions. W and P are M-orthogonalised against X and each other
   * (classical Gram–Schmidt twice), and each block is M-orthonormalised by the
   * eigen-decomposition of its Gram matrix, dropping directions whose Gram
   * eigenvalue is below a relative threshold — the basis stays well
   * conditioned when directions become dependent near convergence. The
   * projected problem is solved as the generalised symmetric problem with
   * the computed Gram matrix, so a slight loss of M-orthogonality does not
   * bias the Ritz values. The images K P and M P are combined from those of
   * W and P in the Rayleigh–Ritz step, as P itself, and applied afresh only
   * with X's (every refresh_every iterations, against rounding drift). Cost
   * per iteration: m applications of T, 2m of K and M (those of W; X's now
   * and then), and dense products of O(n m²): linear in the number of rows.
   * Memory: about 15 m vectors (X, W, P, the next X and P, each with its
   * images).
   */
  LobpcgResult lobpcg(const LobpcgOperator &op, const LobpcgSettings &settings);
} // namespace alloyspec
