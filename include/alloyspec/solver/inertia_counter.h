/** @file inertia_counter.h  Eigenvalue counts below an energy from the inertia of an LDLᵀ factor. */
#pragma once

#include <alloyspec/fe/backend.h>

#include <cstddef>
#include <memory>

namespace dealii
{
  class ParameterHandler;
}

namespace alloyspec
{
  struct SpectralProblem;

  /**
   * Counts eigenvalues of @f$K u = \lambda M u@f$ below an energy E by
   * Sylvester's law of inertia: for M positive definite, the number of
   * eigenvalues @f$< E@f$ equals the number of negative pivots of an
   * @f$LDL^T@f$ factorisation of @f$K - E M@f$ (Parlett, The Symmetric
   * Eigenvalue Problem, 1998, §3.3 — from memory).
   *
   * One shifted matrix and one MUMPS factor are kept: K and M have one fixed
   * sparsity pattern, so the ordering and symbolic analysis are done once and
   * only the numeric factorisation is repeated for every energy and every
   * realisation of the same discretisation. Memory: the factor of one matrix.
   */
  class InertiaCounter
  {
  public:
    InertiaCounter();
    ~InertiaCounter();
    InertiaCounter(const InertiaCounter &)            = delete;
    InertiaCounter &operator=(const InertiaCounter &) = delete;

    /**
     * Number of eigenvalues of the pencil of @p problem strictly below
     * @p energy, not counting the pushed-out eigenvalue of the constrained
     * rows (all genuine eigenvalues lie below it). The symbolic analysis is
     * redone only when the matrix K (or its sparsity pattern) changes.
     */
    std::size_t count_below(const SpectralProblem &problem, double energy);
    /**
     * Negative pivots of @f$K - E M@f$ for a pencil given by its matrices
     * (serial, or distributed over a team), constrained rows included.
     */
    std::size_t negative_pivots(backend::MatrixPair pencil, double energy);

    /**
     * count_below() from a counter of its own: ordering and symbolic analysis
     * included (verification, and the baseline solver's fresh objects).
     */
    static std::size_t fresh_count_below(const SpectralProblem &problem, double energy);

    /** Floating-point operations of the last numeric factorisation (MUMPS RINFOG(3)); 0 before any. */
    double last_factorisation_flops() const;
    /** Seconds of the last numeric factorisation; 0 before any. */
    double last_factorisation_seconds() const;

    /** Numeric factorisations done so far (symbolic ones: at most 1). */
    std::size_t n_factorisations() const { return n_factorisations_; }

  private:
    struct Factor;
    std::unique_ptr<Factor> factor_;
    std::size_t             n_factorisations_ = 0;
  };
} // namespace alloyspec
