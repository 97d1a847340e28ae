/** @file tilt_mixture.cc  The balance heuristic in log form. */
#include <alloyspec/model/tilt_mixture.h>

#include <algorithm>
#include <cmath>
#include <stdexcept>

namespace alloyspec
{
  double balance_log_weight(const std::vector<double> &log_weights,
                            const std::vector<double> &shares)
  {
    if (log_weights.empty() || log_weights.size() != shares.size())
      throw std::invalid_argument("balance_log_weight: one share per tilt, at least one tilt");
    std::vector<double> terms;
    for (std::size_t k = 0; k < shares.size(); ++k)
      {
        if (!(shares[k] > 0))
          throw std::invalid_argument("balance_log_weight: shares must be positive");
        terms.push_back(std::log(shares[k]) - log_weights[k]);
      }
    const double top = *std::max_element(terms.begin(), terms.end());
    double       sum = 0;
    for (const double t : terms)
      sum += std::exp(t - top);
    return -(top + std::log(sum));
  }
} // namespace alloyspec
