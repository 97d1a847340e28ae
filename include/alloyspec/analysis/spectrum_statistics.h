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
      /**
       * Effective number of realisations behind the mean at this energy:
       * @f$(\sum_r y_r)^2/\sum_r y_r^2@f$ with @f$y_r = w_r N_r(E)@f$ (Kong's
       * effective sample size applied to the summands; equal to the number of
       * realisations with a non-zero count when all weights are 1 and the counts
       * equal). 0 when every summand is 0.
       */
      double      effective_sample_size = 0;
    };

    IdsAccumulator(std::vector<double> energies, double volume);

    /**
     * Adds one realisation with likelihood ratio @f$w = e^{\texttt{log\_weight}}@f$
     * (0 for plain sampling). The mean is the unbiased importance-sampling
     * estimator @f$\hat N = \frac1R\sum_r w_r N_r@f$ (@f$E_\theta[w N] = E_p[N]@f$),
     * its standard error the sample standard deviation of @f$w_r N_r@f$ over √R.
     * log_weight = −∞ is w = 0: a realisation that the roulette left unsolved
     * (roulette.h), which still counts in R.
     */
    void add(const std::vector<double> &eigenvalues, double complete_up_to,
             double log_weight = 0.0);
    /**
     * Adds one realisation given by its eigenvalue counts @f$\#\{\lambda_j \le E_i\}@f$
     * at the grid energies (from inertia counts; complete at every energy).
     */
    void add_counts(const std::vector<std::size_t> &counts, double log_weight = 0.0);

    std::size_t      n_realisations() const { return n_; }
    /**
     * Kong's effective sample size of the weights, @f$(\sum w)^2/\sum w^2@f$
     * (Kong 1992): R for plain sampling, small when a few weights dominate.
     */
    double           weight_effective_sample_size() const;
    /** Mean of the weights: 1 in expectation (E_θ[w] = 1); far from 1 signals degenerate weights. */
    double           mean_weight() const { return n_ ? weight_sum_ / double(n_) : 0.0; }
    std::vector<Row> rows() const;

  private:
    /** @p counts already divided by the volume. */
    void add_normalised(const std::vector<double> &counts, double complete_up_to,
                        double log_weight);

    std::vector<double> energies_;
    double              volume_;
    std::size_t         n_ = 0;
    /** Counts of the first realisation; sum_ and sum_sq_ accumulate deviations
     *  from them (shifted sums keep the variance free of cancellation). */
    std::vector<double> shift_;
    std::vector<double> sum_, sum_sq_;
    /** Σ w N and Σ (w N)² per energy (for the effective sample size). */
    std::vector<double> raw_sum_, raw_sum_sq_;
    double              weight_sum_ = 0, weight_sum_sq_ = 0;
    std::vector<bool>   complete_;
  };
} // namespace alloyspec
