/** @file effective_sample_size.h  Kong's effective sample size of importance weights. */
#pragma once

#include <vector>

namespace alloyspec
{
  /**
   * Kong's effective sample size @f$(\sum_r w_r)^2 / \sum_r w_r^2@f$ from the
   * two sums (Kong, "A note on importance sampling using standardized
   * weights", Univ. Chicago Dept. of Statistics Tech. Rep. 348, 1992; recalled
   * from memory): R for R equal weights, near 1 when one weight dominates.
   * 0 when @p sum_of_squares is not positive (no weight yet).
   */
  double effective_sample_size(double sum, double sum_of_squares);

  /**
   * The same from log weights @f$\ell_r = \log w_r@f$, scaled by
   * @f$e^{-\max_r \ell_r}@f$ first (the ratio does not change), so that log
   * weights far outside the range of exp() do not overflow. 0 for no weights.
   */
  double effective_sample_size_of_logs(const std::vector<double> &log_weights);
} // namespace alloyspec
