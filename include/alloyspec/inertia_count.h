/** @file inertia_count.h  The IDS from inertia counts alone, without eigenvectors. */
#pragma once

#include <alloyspec/backend.h>

#include <cstddef>
#include <memory>
#include <string>

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

    /** Numeric factorisations done so far (symbolic ones: at most 1). */
    std::size_t n_factorisations() const { return n_factorisations_; }

  private:
    struct Factor;
    std::unique_ptr<Factor> factor_;
    std::size_t             n_factorisations_ = 0;
  };

  /** How to run `alloyspec count` (command-line side). */
  struct CountOptions
  {
    std::string output_directory;
    bool        progress = false;
    /** Effective parameters as JSON (copied into run.json) and in short format (parameters.prm). */
    std::string parameters_json;
    std::string parameters_prm;
  };

  /**
   * `alloyspec count`: for every realisation and boundary condition of the
   * study in @p prm, the counting function
   * @f$N_L(E_i) = \#\{\lambda_j \le E_i\}/|\Lambda|@f$ on the energy grid from
   * inertia counts only (no eigenvectors, so memory is that of one
   * factorisation and boxes far larger than `run` can handle fit). Writes
   * counts.csv (realisation, boundary, energy, count), ids.csv with the same
   * columns as `run` (complete at every energy) and run.json with timings and
   * the memory high-water mark. At an energy equal to an eigenvalue the count
   * is of eigenvalues strictly below it (a zero pivot); grids rarely hit one.
   * Realisations are dealt out to MPI ranks round-robin.
   */
  void run_inertia_count(dealii::ParameterHandler &prm, const CountOptions &options);
} // namespace alloyspec
