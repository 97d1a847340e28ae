/** @file spectral_analysis.cc  Bootstrap intervals, broadened densities, level statistics, IPR. */
#include <alloyspec/core/errors.h>
#include <alloyspec/core/format.h>
#include <alloyspec/io/results_store.h>
#include <alloyspec/analysis/spectral_analysis.h>
#include <alloyspec/analysis/spectrum_statistics.h>
#include <alloyspec/model/effective_sample_size.h>

#include <deal.II/base/parameter_handler.h>
#include <deal.II/base/utilities.h>

#include <algorithm>
#include <cerrno>
#include <cmath>
#include <cstdlib>
#include <limits>
#include <map>
#include <set>
#include <sstream>
#include <stdexcept>

namespace alloyspec
{
  namespace
  {
    constexpr double pi = 3.14159265358979323846;
    constexpr double nan = std::numeric_limits<double>::quiet_NaN();

    constexpr double       min_width = 1e-12, max_width = 1e6;
    constexpr unsigned int min_bootstrap = 100, max_bootstrap = 1000000;
    constexpr double       min_confidence = 0.5, max_confidence = 0.999;
    constexpr double       min_fraction = 1e-12, max_fraction = 0.5;

    [[noreturn]] void bad(const std::string &entry, const std::string &value,
                          const std::string &allowed)
    {
      throw InputError("analysis/" + entry + ": '" + value + "' is not allowed (" + allowed + ")");
    }

    double parse_real(const std::string &entry, const std::string &text, double lo, double hi,
                      const std::string &allowed)
    {
      const std::string word = dealii::Utilities::trim(text);
      char             *end  = nullptr;
      errno                  = 0;
      const double value     = std::strtod(word.c_str(), &end);
      if (word.empty() || end != word.c_str() + word.size() || errno == ERANGE ||
          !std::isfinite(value) || !(value >= lo) || !(value <= hi))
        bad(entry, text, allowed);
      return value;
    }

    std::string range(double lo, double hi)
    {
      std::ostringstream s;
      s << "a number from " << lo << " to " << hi;
      return s.str();
    }

    /** "" → empty; "a, b" with a < b → {a, b}. */
    std::vector<double> parse_window(const std::string &entry, const std::string &text)
    {
      const std::string allowed =
        "empty for automatic, or two finite energies 'E_low, E_high' with E_low < E_high";
      if (dealii::Utilities::trim(text).empty())
        return {};
      const auto parts = dealii::Utilities::split_string_list(text, ',');
      if (parts.size() != 2)
        bad(entry, text, allowed);
      const double big = std::numeric_limits<double>::max();
      const double a   = parse_real(entry, parts[0], -big, big, allowed);
      const double b   = parse_real(entry, parts[1], -big, big, allowed);
      if (!(a < b))
        bad(entry, text, allowed);
      return {a, b};
    }

    /** Mean and standard error of @p sum / @p sum_sq over @p n samples. */
    void mean_and_error(double sum, double sum_sq, std::size_t n, double &mean, double &error)
    {
      mean  = n > 0 ? sum / double(n) : nan;
      error = nan;
      if (n > 1)
        {
          const double variance =
            std::max(0.0, (sum_sq - sum * sum / double(n)) / double(n - 1));
          error = std::sqrt(variance / double(n));
        }
    }

    /** Sorted eigenvalues of @p r that are trusted (≤ complete_up_to). */
    std::vector<double> trusted_levels(const RealisationRecord &r)
    {
      std::vector<double> levels;
      for (const double x : r.eigenvalues)
        if (x <= r.complete_up_to)
          levels.push_back(x);
      std::sort(levels.begin(), levels.end());
      return levels;
    }

    /** The record's likelihood ratio w = e^{log w}: exactly 1 for plain sampling. */
    double weight_of(const RealisationRecord &r)
    {
      if (!std::isfinite(r.log_weight))
        throw std::invalid_argument("analysis: a record's log weight must be finite");
      return std::exp(r.log_weight);
    }
  } // namespace

  void AnalysisSettings::declare_parameters(dealii::ParameterHandler &prm)
  {
    using namespace dealii::Patterns;
    prm.enter_subsection("analysis");
    prm.declare_entry("lorentzian width", "auto", Anything(),
                      "Width eta > 0 of the Lorentzian broadening of the density of states, "
                      "-(1/pi) Im tr (H - E - i eta)^-1 / |Lambda|, in the energy unit. It must "
                      "exceed the mean level spacing to give a smooth curve. 'auto': the mean level "
                      "spacing of the computed spectra.");
    prm.declare_entry("gaussian width", "auto", Anything(),
                      "Standard deviation sigma > 0 of the Gaussian broadening of the density of "
                      "states, in the energy unit. Used for the Urbach fit. 'auto': twice the mean "
                      "level spacing of the computed spectra.");
    prm.declare_entry("bootstrap samples", "1000", Integer(min_bootstrap, max_bootstrap),
                      "Number of bootstrap resamples of the realisations for the percentile "
                      "confidence band of the IDS (100 to 1000000).");
    prm.declare_entry("bootstrap seed", "1", Integer(0),
                      "Seed of the splitmix64 generator that draws the bootstrap resamples "
                      "(same seed, same band).");
    prm.declare_entry("confidence level", "0.95", Double(min_confidence, max_confidence),
                      "Confidence level of every interval reported (0.5 to 0.999).");
    prm.declare_entry("lifshitz window", "", Anything(),
                      "Energy window 'E_low, E_high' of the Lifshitz fit of ln(-ln N) against "
                      "ln(E - E0). Empty: from E0 to the energy where the IDS per cell first "
                      "reaches 'lifshitz fraction'.");
    prm.declare_entry("lifshitz fraction", "0.02", Double(min_fraction, max_fraction),
                      "Upper end of the automatic Lifshitz window, as IDS per unit cell "
                      "(1e-12 to 0.5).");
    prm.declare_entry("urbach window", "", Anything(),
                      "Energy window 'E_low, E_high' of the Urbach fit ln rho = a + (E - E_high)/E_U "
                      "of the Gaussian-broadened DOS. Empty: from E0 to the mean potential (the "
                      "band bottom of the averaged potential).");
    prm.declare_entry("bin width", "auto", Anything(),
                      "Width of the energy bins in which level-spacing ratios and inverse "
                      "participation ratios are averaged, in the energy unit. 'auto': a tenth of the "
                      "range of the computed spectra.");
    prm.declare_entry("figure formats", "png, svg", List(Selection("png|svg"), 0, 2),
                      "Image formats of the figures: any of png, svg (empty: no figures). "
                      "Figures need /usr/bin/gnuplot; without it they are skipped with a warning.");
    prm.leave_subsection();
  }

  void AnalysisSettings::parse_parameters(dealii::ParameterHandler &prm)
  {
    // Read every entry first and leave the subsection before validating, so
    // that an InputError leaves the handler where the caller had it.
    const char *entries[] = {"lorentzian width",  "gaussian width",  "bootstrap samples",
                             "bootstrap seed",    "confidence level", "lifshitz window",
                             "lifshitz fraction", "urbach window",   "bin width",
                             "figure formats"};
    std::map<std::string, std::string> text;
    prm.enter_subsection("analysis");
    for (const char *entry : entries)
      text[entry] = prm.get(entry);
    prm.leave_subsection();

    const std::string width_range = range(min_width, max_width);
    const std::string width_allowed = "'auto' or " + width_range;
    const auto        width         = [&](const char *entry, double &value, bool &automatic) {
      automatic = dealii::Utilities::trim(text[entry]) == "auto";
      if (!automatic)
        value = parse_real(entry, text[entry], min_width, max_width, width_allowed);
    };
    width("lorentzian width", lorentzian_width, lorentzian_automatic);
    width("gaussian width", gaussian_width, gaussian_automatic);
    const std::string count_range = "an integer from 100 to 1000000";
    const double      samples     = parse_real("bootstrap samples", text["bootstrap samples"],
                                      min_bootstrap, max_bootstrap, count_range);
    if (samples != std::floor(samples))
      bad("bootstrap samples", text["bootstrap samples"], count_range);
    bootstrap_samples = static_cast<unsigned int>(samples);
    {
      const std::string word = dealii::Utilities::trim(text["bootstrap seed"]);
      char             *end  = nullptr;
      errno                  = 0;
      const unsigned long long seed = std::strtoull(word.c_str(), &end, 10);
      if (word.empty() || word[0] == '-' || end != word.c_str() + word.size() || errno == ERANGE)
        bad("bootstrap seed", word, "an integer from 0 to 2^64-1");
      bootstrap_seed = seed;
    }
    confidence_level  = parse_real("confidence level", text["confidence level"], min_confidence,
                                  max_confidence, range(min_confidence, max_confidence));
    lifshitz_window   = parse_window("lifshitz window", text["lifshitz window"]);
    lifshitz_fraction = parse_real("lifshitz fraction", text["lifshitz fraction"], min_fraction,
                                   max_fraction, range(min_fraction, max_fraction));
    urbach_window     = parse_window("urbach window", text["urbach window"]);
    width("bin width", bin_width, bin_automatic);
    figure_formats.clear();
    for (const auto &f : dealii::Utilities::split_string_list(text["figure formats"], ','))
      {
        if (f != "png" && f != "svg")
          bad("figure formats", text["figure formats"], "a list of png, svg, or empty");
        if (std::find(figure_formats.begin(), figure_formats.end(), f) == figure_formats.end())
          figure_formats.push_back(f);
      }
  }

  AnalysisSettings AnalysisSettings::resolved_for(const std::vector<RealisationRecord> &records,
                                                  std::vector<std::string> &notes) const
  {
    AnalysisSettings out = *this;
    if (!lorentzian_automatic && !gaussian_automatic && !bin_automatic)
      return out;
    std::vector<double>        spacings;
    double                     lowest = std::numeric_limits<double>::infinity(), top = lowest;
    std::set<std::uint64_t>    realisations;
    for (const auto &r : records)
      {
        realisations.insert(r.realisation);
        const auto levels = trusted_levels(r);
        if (levels.size() >= 2)
          spacings.push_back((levels.back() - levels.front()) / double(levels.size() - 1));
        if (!levels.empty())
          lowest = std::min(lowest, levels.front());
        top = std::min(top, r.complete_up_to);
      }
    // Kept when nothing can be measured (no record with two levels): the old fixed widths.
    double spacing = 0.0;
    if (!spacings.empty())
      {
        std::nth_element(spacings.begin(), spacings.begin() + spacings.size() / 2, spacings.end());
        // The mean over R realisations is as smooth as one spectrum with R
        // times the levels: the spacing that matters is that of the pool.
        spacing = spacings[spacings.size() / 2] / double(realisations.size());
      }
    const auto choose = [&](bool automatic, double &value, double chosen, const char *entry,
                            const std::string &how) {
      if (!automatic)
        return;
      if (chosen > 0.0 && std::isfinite(chosen))
        {
          value = chosen;
          notes.push_back(std::string("analysis/") + entry + " = " + short_number(value) + " (" +
                          how + ")");
        }
      else
        notes.push_back(std::string("analysis/") + entry + " = " + short_number(value) +
                        " (the default: no spectrum to measure a level spacing from)");
    };
    const std::string of_spacing =
      " the mean level spacing " + short_number(spacing) + " of the " +
      std::to_string(realisations.size()) + " realisations' levels pooled";
    choose(lorentzian_automatic, out.lorentzian_width, spacing, "lorentzian width",
           "1 ×" + of_spacing);
    choose(gaussian_automatic, out.gaussian_width, 2 * spacing, "gaussian width",
           "2 ×" + of_spacing);
    choose(bin_automatic, out.bin_width, top > lowest ? (top - lowest) / 10 : 0.0, "bin width",
           "a tenth of the complete range " + short_number(lowest) + " to " + short_number(top));
    out.lorentzian_automatic = out.gaussian_automatic = out.bin_automatic = false;
    return out;
  }

  std::uint64_t SplitMix64::next()
  {
    std::uint64_t z = (state_ += 0x9e3779b97f4a7c15ULL);
    z               = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
    z               = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
    return z ^ (z >> 31);
  }

  std::uint64_t SplitMix64::below(const std::uint64_t n)
  {
    if (n == 0)
      throw std::invalid_argument("SplitMix64::below: n must be positive");
    // Reject the top partial block of 2^64 so that every residue is equally likely.
    const std::uint64_t limit = std::numeric_limits<std::uint64_t>::max() -
                                std::numeric_limits<std::uint64_t>::max() % n;
    for (;;)
      {
        const std::uint64_t x = next();
        if (x < limit)
          return x % n;
      }
  }

  double SplitMix64::uniform() { return double(next() >> 11) * 0x1.0p-53; }

  CountingSamples counting_samples(const std::vector<RealisationRecord> &records,
                                   const std::string &boundary, const std::vector<double> &energies,
                                   const double volume)
  {
    CountingSamples s;
    s.energies = energies;
    s.complete.assign(energies.size(), true);
    s.realisations_with_states.assign(energies.size(), 0);
    s.states_below.assign(energies.size(), 0);
    std::vector<double> sum(energies.size(), 0.0), sum_sq(energies.size(), 0.0);
    for (const auto &r : records)
      {
        if (r.boundary != boundary)
          continue;
        const auto   levels = trusted_levels(r);
        const double w      = weight_of(r);
        s.counts.push_back(counting_function(levels, volume, energies));
        // w = 1 exactly for plain sampling: the counts stay bit for bit.
        for (double &c : s.counts.back())
          c *= w;
        s.weights.push_back(w);
        s.weighted = s.weighted || w != 1.0;
        for (std::size_t i = 0; i < energies.size(); ++i)
          {
            sum[i] += s.counts.back()[i];
            sum_sq[i] += s.counts.back()[i] * s.counts.back()[i];
          }
        for (std::size_t i = 0; i < energies.size(); ++i)
          {
            const auto below =
              std::upper_bound(levels.begin(), levels.end(), energies[i]) - levels.begin();
            s.states_below[i] += std::size_t(below);
            if (below > 0)
              ++s.realisations_with_states[i];
            if (!(energies[i] <= r.complete_up_to))
              s.complete[i] = false;
          }
      }
    if (s.counts.empty())
      s.complete.assign(energies.size(), false);
    for (std::size_t i = 0; i < energies.size(); ++i)
      s.effective_sample_size.push_back(effective_sample_size(sum[i], sum_sq[i]));
    return s;
  }

  std::vector<IntervalRow> bootstrap_mean_interval(const CountingSamples &samples,
                                                   const unsigned int samples_count,
                                                   const double confidence, const std::uint64_t seed)
  {
    if (!(confidence > 0.0 && confidence < 1.0) || samples_count == 0)
      throw std::invalid_argument("bootstrap_mean_interval: bad confidence or sample count");
    const std::size_t n_e = samples.energies.size();
    const std::size_t n   = samples.counts.size();
    std::vector<IntervalRow> rows(n_e);
    for (std::size_t i = 0; i < n_e; ++i)
      {
        double sum = 0, sum_sq = 0;
        // Deviations from the first sample keep the variance free of cancellation.
        const double shift = n > 0 ? samples.counts[0][i] : 0.0;
        for (std::size_t r = 0; r < n; ++r)
          {
            const double d = samples.counts[r][i] - shift;
            sum += d;
            sum_sq += d * d;
          }
        double mean, error;
        mean_and_error(sum, sum_sq, n, mean, error);
        rows[i] = {samples.energies[i], shift + mean, error, nan, nan,
                   i < samples.complete.size() && bool(samples.complete[i]),
                   i < samples.effective_sample_size.size() ? samples.effective_sample_size[i] : 0.0};
      }
    if (n < 2)
      return rows;

    // Percentile end points by linear interpolation between order statistics.
    const auto quantile = [](std::vector<double> &v, const double q) {
      std::sort(v.begin(), v.end());
      const double      pos = q * double(v.size() - 1);
      const std::size_t k   = std::size_t(std::floor(pos));
      const double      f   = pos - double(k);
      return k + 1 < v.size() ? v[k] * (1 - f) + v[k + 1] * f : v[k];
    };
    const double        alpha = 1.0 - confidence;
    std::vector<double> means(samples_count);
    for (std::size_t i = 0; i < n_e; ++i)
      {
        // Restarting the generator at every energy replays the same resamples
        // (one band for the whole curve) without storing them.
        SplitMix64 rng(seed);
        for (unsigned int b = 0; b < samples_count; ++b)
          {
            double sum = 0;
            for (std::size_t k = 0; k < n; ++k)
              sum += samples.counts[std::size_t(rng.below(n))][i];
            means[b] = sum / double(n);
          }
        rows[i].lower = quantile(means, alpha / 2);
        rows[i].upper = quantile(means, 1 - alpha / 2);
      }
    return rows;
  }

  double incomplete_margin(const Broadening kernel)
  {
    return kernel == Broadening::gaussian ? 6.0 : 30.0;
  }

  std::vector<IntervalRow> density_of_states(const std::vector<RealisationRecord> &records,
                                             const std::string &boundary,
                                             const std::vector<double> &energies,
                                             const double volume, const Broadening kernel,
                                             const double width)
  {
    if (!(width > 0.0) || !(volume > 0.0))
      throw std::invalid_argument("density_of_states: width and volume must be positive");
    const std::size_t   n_e = energies.size();
    std::vector<double> sum(n_e, 0.0), sum_sq(n_e, 0.0);
    std::vector<double> raw(n_e, 0.0), raw_sq(n_e, 0.0); // Σ wρ, Σ (wρ)² for the effective size
    std::size_t         n      = 0;
    double              lowest = std::numeric_limits<double>::infinity();
    const double        gauss_norm = 1.0 / (std::sqrt(2 * pi) * width);
    for (const auto &r : records)
      {
        if (r.boundary != boundary)
          continue;
        ++n;
        lowest = std::min(lowest, r.complete_up_to);
        const auto   levels = trusted_levels(r);
        const double w      = weight_of(r);
        for (std::size_t i = 0; i < n_e; ++i)
          {
            double rho = 0;
            for (const double x : levels)
              {
                const double t = energies[i] - x;
                rho += kernel == Broadening::lorentzian
                         ? (width / pi) / (t * t + width * width)
                         : gauss_norm * std::exp(-0.5 * (t / width) * (t / width));
              }
            rho /= volume;
            rho *= w; // the importance-sampling summand; exact for w = 1
            sum[i] += rho;
            sum_sq[i] += rho * rho;
            raw[i] += rho;
            raw_sq[i] += rho * rho;
          }
      }
    const double             limit = lowest - incomplete_margin(kernel) * width;
    std::vector<IntervalRow> rows;
    rows.reserve(n_e);
    for (std::size_t i = 0; i < n_e; ++i)
      {
        double mean, error;
        mean_and_error(sum[i], sum_sq[i], n, mean, error);
        rows.push_back({energies[i], n > 0 ? mean : 0.0, error, nan, nan,
                        n > 0 && energies[i] <= limit, effective_sample_size(raw[i], raw_sq[i])});
      }
    return rows;
  }

  std::vector<BinRow> bin_means(const std::vector<std::pair<double, double>> &samples,
                                const double lower, const double upper, const double bin_width)
  {
    if (!(bin_width > 0.0) || !(upper > lower))
      throw std::invalid_argument("bin_means: need bin_width > 0 and upper > lower");
    const std::size_t   n_bins = std::size_t(std::ceil((upper - lower) / bin_width - 1e-9));
    std::vector<double> sum(n_bins, 0.0), sum_sq(n_bins, 0.0);
    std::vector<std::size_t> count(n_bins, 0);
    for (const auto &[energy, value] : samples)
      {
        if (!(energy >= lower) || !(energy < upper) || !std::isfinite(value))
          continue;
        const std::size_t b = std::min(n_bins - 1, std::size_t((energy - lower) / bin_width));
        sum[b] += value;
        sum_sq[b] += value * value;
        ++count[b];
      }
    std::vector<BinRow> rows;
    for (std::size_t b = 0; b < n_bins; ++b)
      {
        BinRow row{lower + double(b) * bin_width,
                   std::min(upper, lower + double(b + 1) * bin_width), nan, nan, count[b]};
        mean_and_error(sum[b], sum_sq[b], count[b], row.mean, row.standard_error);
        rows.push_back(row);
      }
    return rows;
  }

  std::vector<BinRow> weighted_bin_means(const std::vector<LevelValue> &samples,
                                         const std::size_t realisations, const double lower,
                                         const double upper, const double bin_width)
  {
    if (std::all_of(samples.begin(), samples.end(), [](const LevelValue &v) { return v.weight == 1.0; }))
      {
        // Plain sampling: the pooled mean as it always was, bit for bit.
        std::vector<std::pair<double, double>> pairs;
        pairs.reserve(samples.size());
        for (const auto &v : samples)
          pairs.emplace_back(v.energy, v.value);
        return bin_means(pairs, lower, upper, bin_width);
      }
    if (!(bin_width > 0.0) || !(upper > lower))
      throw std::invalid_argument("weighted_bin_means: need bin_width > 0 and upper > lower");
    const std::size_t n_bins = std::size_t(std::ceil((upper - lower) / bin_width - 1e-9));
    // Per bin and realisation: w_r, S_{b,r} and C_{b,r}.
    struct Cluster
    {
      double w = 0, sum = 0, count = 0;
    };
    std::vector<std::map<std::uint64_t, Cluster>> clusters(n_bins);
    std::vector<std::size_t>                      count(n_bins, 0);
    for (const auto &v : samples)
      {
        if (!(v.energy >= lower) || !(v.energy < upper) || !std::isfinite(v.value))
          continue;
        if (!(v.weight >= 0.0) || !std::isfinite(v.weight))
          throw std::invalid_argument("weighted_bin_means: weights must be finite and non-negative");
        const std::size_t b = std::min(n_bins - 1, std::size_t((v.energy - lower) / bin_width));
        Cluster &c = clusters[b][v.realisation];
        c.w        = v.weight;
        c.sum += v.value;
        c.count += 1;
        ++count[b];
      }
    std::vector<BinRow> rows;
    const double        r_total = double(realisations);
    for (std::size_t b = 0; b < n_bins; ++b)
      {
        BinRow row{lower + double(b) * bin_width,
                   std::min(upper, lower + double(b + 1) * bin_width), nan, nan, count[b]};
        double numerator = 0, denominator = 0;
        for (const auto &[r, c] : clusters[b])
          numerator += c.w * c.sum, denominator += c.w * c.count;
        if (denominator > 0)
          {
            row.mean = numerator / denominator;
            if (realisations > 1 && count[b] > 1)
              {
                // Realisations without a level in the bin add zero residuals.
                double residual = 0;
                for (const auto &[r, c] : clusters[b])
                  {
                    const double e = c.w * (c.sum - row.mean * c.count);
                    residual += e * e;
                  }
                row.standard_error =
                  std::sqrt(r_total / (r_total - 1.0) * residual) / denominator;
              }
          }
        rows.push_back(row);
      }
    return rows;
  }

  std::vector<BinRow> spacing_ratio_bins(const std::vector<RealisationRecord> &records,
                                         const std::string &boundary, const double lower,
                                         const double upper, const double bin_width)
  {
    std::vector<LevelValue> ratios;
    std::size_t             realisations = 0;
    for (const auto &r : records)
      {
        if (r.boundary != boundary)
          continue;
        const double w      = weight_of(r);
        const auto   levels = trusted_levels(r);
        for (std::size_t i = 0; i + 2 < levels.size(); ++i)
          {
            const double s1 = levels[i + 1] - levels[i], s2 = levels[i + 2] - levels[i + 1];
            const double hi = std::max(s1, s2);
            if (hi > 0.0)
              ratios.push_back({levels[i + 1], std::min(s1, s2) / hi, w, realisations});
          }
        ++realisations;
      }
    return weighted_bin_means(ratios, realisations, lower, upper, bin_width);
  }

  std::vector<BinRow> ipr_bins(const std::vector<RealisationRecord> &records,
                               const std::string &boundary, const double lower, const double upper,
                               const double bin_width)
  {
    std::vector<LevelValue> values;
    std::size_t             realisations = 0;
    for (const auto &r : records)
      {
        if (r.boundary != boundary)
          continue;
        const double      w = weight_of(r);
        const std::size_t n = std::min(r.eigenvalues.size(), r.inverse_participation_ratios.size());
        for (std::size_t j = 0; j < n; ++j)
          if (r.eigenvalues[j] <= r.complete_up_to)
            values.push_back({r.eigenvalues[j], r.inverse_participation_ratios[j], w, realisations});
        ++realisations;
      }
    return weighted_bin_means(values, realisations, lower, upper, bin_width);
  }
} // namespace alloyspec
