/** @file roulette.cc  Survival table of the Russian roulette of realisations. */
#include <alloyspec/model/roulette.h>

#include <algorithm>
#include <cmath>
#include <numeric>
#include <stdexcept>

namespace alloyspec
{
  Roulette::Roulette(std::vector<double> inner_edges, std::vector<double> survival)
    : edges_(std::move(inner_edges))
    , survival_(std::move(survival))
  {
    if (survival_.size() != edges_.size() + 1)
      throw std::invalid_argument("Roulette: one survival probability per bin is needed");
    for (std::size_t b = 1; b < edges_.size(); ++b)
      if (!(edges_[b] > edges_[b - 1]))
        throw std::invalid_argument("Roulette: bin edges must increase strictly");
    for (const double r : survival_)
      if (!(r > 0.0 && r <= 1.0))
        throw std::invalid_argument("Roulette: survival probabilities must lie in (0, 1]");
    for (const double e : edges_)
      if (!std::isfinite(e))
        throw std::invalid_argument("Roulette: bin edges must be finite");
  }

  Roulette Roulette::from_pilot(const std::vector<double> &log_weights,
                                const std::vector<double> &summands, const unsigned int bins,
                                const double minimum_survival)
  {
    if (log_weights.size() != summands.size() || log_weights.empty())
      throw std::invalid_argument("Roulette: one summand per pilot log weight is needed");
    if (bins < 1 || !(minimum_survival > 0.0 && minimum_survival <= 1.0))
      throw std::invalid_argument("Roulette: at least one bin and a floor in (0, 1] are needed");
    const std::size_t        n = log_weights.size();
    std::vector<std::size_t> order(n);
    std::iota(order.begin(), order.end(), std::size_t(0));
    std::stable_sort(order.begin(), order.end(),
                     [&](std::size_t a, std::size_t b) { return log_weights[a] < log_weights[b]; });

    // Edges halfway between neighbouring sorted ratios at the quantiles k n / bins;
    // a tie at a quantile drops that edge, so no bin is empty.
    std::vector<double> edges;
    for (unsigned int k = 1; k < bins; ++k)
      {
        const std::size_t i = k * n / bins;
        if (i == 0 || i >= n)
          continue;
        const double below = log_weights[order[i - 1]], above = log_weights[order[i]];
        if (!(above > below))
          continue;
        const double edge = below + 0.5 * (above - below);
        if (edges.empty() || edge > edges.back())
          edges.push_back(edge);
      }

    std::vector<double> second_moment(edges.size() + 1, 0.0);
    std::vector<double> members(edges.size() + 1, 0.0);
    double              any = 0;
    for (std::size_t i = 0; i < n; ++i)
      {
        const std::size_t b = std::size_t(
          std::upper_bound(edges.begin(), edges.end(), log_weights[i]) - edges.begin());
        second_moment[b] += summands[i] * summands[i];
        members[b] += 1.0;
        any = std::max(any, summands[i]);
      }
    if (!(any > 0.0))
      throw std::invalid_argument("Roulette: no pilot realisation has an event");
    std::vector<double> survival(edges.size() + 1);
    for (std::size_t b = 0; b < survival.size(); ++b)
      survival[b] = std::sqrt(second_moment[b] / members[b]);
    const double largest = *std::max_element(survival.begin(), survival.end());
    for (double &r : survival)
      r = std::clamp(r / largest, minimum_survival, 1.0);
    // Above the peak every realisation is solved: see the class comment.
    const auto peak = std::max_element(survival.begin(), survival.end());
    std::fill(peak, survival.end(), 1.0);
    return Roulette(std::move(edges), std::move(survival));
  }

  double Roulette::survival(const double log_weight) const
  {
    if (survival_.empty())
      return 1.0;
    const std::size_t b =
      std::size_t(std::upper_bound(edges_.begin(), edges_.end(), log_weight) - edges_.begin());
    return survival_[b];
  }
} // namespace alloyspec
