/** @file count.h  The `count` command: the IDS from inertia counts alone, without eigenvectors. */
#pragma once

#include <string>

namespace alloyspec
{
  class StudyModel;

  /** How to run `alloyspec count` (command-line side). */
  struct CountOptions
  {
    std::string output_directory;
    bool        progress = false;
    /**
     * Effective parameters as JSON (copied into run.json) and in short format
     * (stored as ResultsStore::parameters_file).
     */
    std::string parameters_json;
    std::string parameters_prm;
    /** `analysis/confidence level` of the intervals in tail.csv. */
    double      confidence_level = 0.95;
  };

  /**
   * `alloyspec count`: for every realisation and boundary condition of the
   * study of @p model (its units, periodic directions or mesh file included), the counting function
   * @f$N_L(E_i) = \#\{\lambda_j \le E_i\}/|\Lambda|@f$ on the energy grid from
   * inertia counts only (no eigenvectors, so memory is that of one
   * factorisation and boxes far larger than `run` can handle fit). Writes
   * counts.csv (realisation, boundary, energy in the user's unit, count, log_weight), ids.csv
   * with the same columns as `run` (complete at every energy), tail.csv and
   * run.json with timings, the sampling block and the memory high-water mark.
   * Tilted sampling (`sampling/method = tilted` with a given θ) weights every
   * average by the realisation's likelihood ratio @f$w = e^{\ln w}@f$, the same
   * unbiased estimator as `run`: at one energy the cost of a realisation is
   * one factorisation whether or not it has states below that energy. At an energy equal to an eigenvalue the count
   * is of eigenvalues strictly below it (a zero pivot); grids rarely hit one.
   * Realisations are dealt out to MPI ranks round-robin.
   */
  void run_inertia_count(const StudyModel &model, const CountOptions &options);
} // namespace alloyspec
