/** @file spectrum_statistics.cc  Counting functions and their averages. */
#include <alloyspec/analysis/spectrum_statistics.h>
#include <alloyspec/model/effective_sample_size.h>

#include <algorithm>
#include <limits>
#include <cmath>
#include <stdexcept>
#include <utility>

namespace alloyspec
{
  std::vector<double> counting_function(const std::vector<double> &eigenvalues,
                                        const double volume, const std::vector<double> &energies)
  {
    if (!(volume > 0.0) || !std::isfinite(volume))
      throw std::invalid_argument("counting_function: volume must be positive and finite");
    std::vector<double> sorted(eigenvalues);
    std::sort(sorted.begin(), sorted.end());
    std::vector<double> counts;
    counts.reserve(energies.size());
    for (const double e : energies)
      {
        // upper_bound: eigenvalues equal to E are counted (N(E) = #{λ ≤ E}).
        const auto below = std::upper_bound(sorted.begin(), sorted.end(), e) - sorted.begin();
        counts.push_back(double(below) / volume);
      }
    return counts;
  }

  IdsAccumulator::IdsAccumulator(std::vector<double> energies, const double volume)
    : energies_(std::move(energies))
    , volume_(volume)
    , sum_(energies_.size(), 0.0)
    , sum_sq_(energies_.size(), 0.0)
    , raw_sum_(energies_.size(), 0.0)
    , raw_sum_sq_(energies_.size(), 0.0)
    , complete_(energies_.size(), true)
  {
    if (!(volume_ > 0.0) || !std::isfinite(volume_))
      throw std::invalid_argument("IdsAccumulator: volume must be positive and finite");
  }

  void IdsAccumulator::add(const std::vector<double> &eigenvalues, const double complete_up_to,
                           const double log_weight)
  {
    add_normalised(counting_function(eigenvalues, volume_, energies_), complete_up_to,
                   log_weight);
  }

  void IdsAccumulator::add_counts(const std::vector<std::size_t> &counts, const double log_weight)
  {
    if (counts.size() != energies_.size())
      throw std::invalid_argument("IdsAccumulator::add_counts: one count per energy is needed");
    std::vector<double> normalised;
    normalised.reserve(counts.size());
    for (const std::size_t c : counts)
      normalised.push_back(double(c) / volume_);
    add_normalised(normalised, std::numeric_limits<double>::infinity(), log_weight);
  }

  double IdsAccumulator::weight_effective_sample_size() const
  {
    return effective_sample_size(weight_sum_, weight_sum_sq_);
  }

  void IdsAccumulator::add_normalised(const std::vector<double> &unweighted,
                                      const double complete_up_to, const double log_weight)
  {
    // −∞ is weight 0: a realisation that the roulette left unsolved (roulette.h).
    if (std::isnan(log_weight) || log_weight == std::numeric_limits<double>::infinity())
      throw std::invalid_argument("IdsAccumulator: log weight must be finite or -infinity");
    // Plain sampling keeps the counts bit for bit (w = e^0 = 1 exactly).
    const double        w = std::exp(log_weight);
    std::vector<double> counts(unweighted);
    for (double &c : counts)
      c *= w;
    weight_sum_ += w;
    weight_sum_sq_ += w * w;
    // Sums of deviations from the first realisation (the "shifted data"
    // algorithm): the variance formula is shift-invariant, and with a shift near
    // the mean the cancellation in Σx² − (Σx)²/n no longer loses the digits that
    // the mean shares with every sample.
    if (n_ == 0)
      shift_ = counts;
    for (std::size_t i = 0; i < energies_.size(); ++i)
      {
        const double deviation = counts[i] - shift_[i];
        sum_[i] += deviation;
        sum_sq_[i] += deviation * deviation;
        raw_sum_[i] += counts[i];
        raw_sum_sq_[i] += counts[i] * counts[i];
        // Written so that a NaN bound marks every point incomplete.
        if (!(energies_[i] <= complete_up_to))
          complete_[i] = false;
      }
    ++n_;
  }

  std::vector<IdsAccumulator::Row> IdsAccumulator::rows() const
  {
    std::vector<Row> result;
    result.reserve(energies_.size());
    const double n = double(n_);
    for (std::size_t i = 0; i < energies_.size(); ++i)
      {
        Row row{energies_[i], 0.0, 0.0, n_, n_ > 0 && complete_[i]};
        if (n_ > 0)
          row.mean = shift_[i] + sum_[i] / n;
        row.effective_sample_size = effective_sample_size(raw_sum_[i], raw_sum_sq_[i]);
        if (n_ > 1)
          {
            const double variance =
              std::max(0.0, (sum_sq_[i] - sum_[i] * sum_[i] / n) / (n - 1.0));
            row.standard_error = std::sqrt(variance / n);
          }
        result.push_back(row);
      }
    return result;
  }
} // namespace alloyspec
