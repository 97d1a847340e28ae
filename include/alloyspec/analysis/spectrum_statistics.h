/** @file spectrum_statistics.h  Counting functions and their average over realisations. */
#pragma once

#include <cstddef>
#include <string>
#include <vector>

namespace alloyspec
{
  /**
   * Finite-volume counting function @f$N_L(E) = \#\{\lambda_j \le E\}/|\Lambda|@f$
   * of one realisation, on @p energies. @p eigenvalues need not be sorted.
   */
  std::vector<double> counting_function(const std::vector<double> &eigenvalues, double volume,
                                        const std::vector<double> &energies);

  /**
   * Average of the counting function over realisations, with the standard
   * error of the mean @f$s/\sqrt{n}@f$ (s the sample standard deviation with
   * n-1 in the denominator; 0 when n < 2).
   *
   * Each realisation comes with the energy up to which its eigenvalue list is
   * known to be complete (verified by an inertia count). At an energy above
   * that bound the realisation's count is a lower bound only, so the grid point
   * is flagged incomplete (the mean there is still the mean of the available
   * counts, but must not be read as the IDS). With no realisation added, rows()
   * reports mean 0, standard error 0 and complete = false.
   */
  class IdsAccumulator
  {
  public:
    struct Row
    {
      double      energy;
      double      mean;
      double      standard_error;
      std::size_t n_realisations;
      bool        complete;
    };

    IdsAccumulator(std::vector<double> energies, double volume);

    /** Adds one realisation. */
    void add(const std::vector<double> &eigenvalues, double complete_up_to);
    /**
     * Adds one realisation given by its eigenvalue counts @f$\#\{\lambda_j \le E_i\}@f$
     * at the grid energies (from inertia counts; complete at every energy).
     */
    void add_counts(const std::vector<std::size_t> &counts);

    std::size_t      n_realisations() const { return n_; }
    std::vector<Row> rows() const;

  private:
    /** @p counts already divided by the volume. */
    void add_normalised(const std::vector<double> &counts, double complete_up_to);

    std::vector<double> energies_;
    double              volume_;
    std::size_t         n_ = 0;
    /** Counts of the first realisation; sum_ and sum_sq_ accumulate deviations
     *  from them (shifted sums keep the variance free of cancellation). */
    std::vector<double> shift_;
    std::vector<double> sum_, sum_sq_;
    std::vector<bool>   complete_;
  };
} // namespace alloyspec
