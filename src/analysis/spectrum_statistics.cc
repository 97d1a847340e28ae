/** @file spectrum_statistics.cc  Energy grids, counting functions and their averages. */
#include <alloyspec/core/errors.h>
#include <alloyspec/analysis/spectrum_statistics.h>

#include <algorithm>
#include <limits>
#include <cerrno>
#include <cmath>
#include <cstdlib>
#include <stdexcept>
#include <utility>

namespace alloyspec
{
  namespace
  {
    constexpr std::size_t max_grid_points = 1000000;

    std::string trim(const std::string &text)
    {
      const auto first = text.find_first_not_of(" \t\r\n");
      if (first == std::string::npos)
        return {};
      const auto last = text.find_last_not_of(" \t\r\n");
      return text.substr(first, last - first + 1);
    }

    std::vector<std::string> split(const std::string &text, const char separator)
    {
      std::vector<std::string> parts;
      std::size_t              start = 0;
      for (;;)
        {
          const auto end = text.find(separator, start);
          parts.push_back(trim(text.substr(start, end - start)));
          if (end == std::string::npos)
            return parts;
          start = end + 1;
        }
    }

    [[noreturn]] void grid_error(const std::string &parameter_name, const std::string &text,
                                 const std::string &reason)
    {
      throw InputError(parameter_name + ": cannot use '" + text + "' as an energy grid (" +
                       reason +
                       "). Allowed forms: 'start:step:stop' with step > 0 and stop >= start "
                       "(e.g. '0:0.5:20'), or an ascending comma-separated list of numbers "
                       "(e.g. '0, 0.5, 2'); at most 1000000 points.");
    }

    /** A finite decimal number occupying the whole of @p word. */
    double parse_number(const std::string &word, const std::string &parameter_name,
                        const std::string &text)
    {
      if (word.empty())
        grid_error(parameter_name, text, "empty entry");
      const char *begin = word.c_str();
      char       *end   = nullptr;
      errno             = 0;
      const double value = std::strtod(begin, &end);
      if (end != begin + word.size() || errno == ERANGE || !std::isfinite(value))
        grid_error(parameter_name, text, "'" + word + "' is not a finite number");
      return value;
    }
  } // namespace

  std::vector<double> parse_energy_grid(const std::string &text, const std::string &parameter_name)
  {
    const std::string body = trim(text);
    if (body.empty())
      grid_error(parameter_name, text, "empty");

    std::vector<double> grid;
    if (body.find(':') != std::string::npos)
      {
        const auto parts = split(body, ':');
        if (parts.size() != 3)
          grid_error(parameter_name, text, "a range needs exactly three fields");
        const double start = parse_number(parts[0], parameter_name, text);
        const double step  = parse_number(parts[1], parameter_name, text);
        const double stop  = parse_number(parts[2], parameter_name, text);
        if (!(step > 0.0))
          grid_error(parameter_name, text, "step must be positive");
        if (stop < start)
          grid_error(parameter_name, text, "stop is below start");
        // Points a + i h with a + i h ≤ b + 1e-9 h: the tolerance keeps the end
        // point that decimal steps such as 0.1 miss by a rounding error.
        const double steps = std::floor((stop - start) / step + 1e-9);
        if (!(steps < double(max_grid_points)))
          grid_error(parameter_name, text, "too many points");
        const std::size_t n = static_cast<std::size_t>(steps) + 1;
        grid.reserve(n);
        for (std::size_t i = 0; i < n; ++i)
          grid.push_back(start + double(i) * step);
        // Report the end point as written rather than with the rounding error.
        if (std::abs(grid.back() - stop) <= 1e-9 * step)
          grid.back() = stop;
        return grid;
      }

    const auto parts = split(body, ',');
    if (parts.size() > max_grid_points)
      grid_error(parameter_name, text, "too many points");
    for (const auto &word : parts)
      {
        const double value = parse_number(word, parameter_name, text);
        if (!grid.empty() && !(value > grid.back()))
          grid_error(parameter_name, text, "the list must be strictly ascending");
        grid.push_back(value);
      }
    return grid;
  }

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
    return weight_sum_sq_ > 0 ? weight_sum_ * weight_sum_ / weight_sum_sq_ : 0.0;
  }

  void IdsAccumulator::add_normalised(const std::vector<double> &unweighted,
                                      const double complete_up_to, const double log_weight)
  {
    if (!std::isfinite(log_weight))
      throw std::invalid_argument("IdsAccumulator: log weight must be finite");
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
        if (raw_sum_sq_[i] > 0)
          row.effective_sample_size = raw_sum_[i] * raw_sum_[i] / raw_sum_sq_[i];
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
