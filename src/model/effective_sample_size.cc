#include <alloyspec/model/effective_sample_size.h>

#include <algorithm>
#include <cmath>

namespace alloyspec
{
  double effective_sample_size(const double sum, const double sum_of_squares)
  {
    return sum_of_squares > 0 ? sum * sum / sum_of_squares : 0.0;
  }

  double effective_sample_size_of_logs(const std::vector<double> &log_weights)
  {
    if (log_weights.empty())
      return 0.0;
    const double top = *std::max_element(log_weights.begin(), log_weights.end());
    double       sum = 0, sum_of_squares = 0;
    for (const double l : log_weights)
      {
        const double w = std::exp(l - top);
        sum += w;
        sum_of_squares += w * w;
      }
    return effective_sample_size(sum, sum_of_squares);
  }
} // namespace alloyspec
