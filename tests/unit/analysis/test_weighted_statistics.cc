// Every statistic of a tilted (importance-sampled) study against exact
// expectations: the DOS (Lorentzian and Gaussian), the bootstrap band of the
// IDS, the local trace, the level-spacing ratios and IPRs per bin and the
// box-size series. The truth is a finite sum over all 2^n configurations of a
// short Bernoulli chain, each solved by the independent test-side Sturm code
// (tests/support/sturm_1d.h: exact transfer matrices and Sturm oscillation,
// Coddington & Levinson ch. 8). Cell values and log weights come from the
// model layer, exactly as a run draws them.
#include "sturm_1d.h"

#include <alloyspec/analysis/local_trace.h>
#include <alloyspec/analysis/size_series.h>
#include <alloyspec/analysis/spectral_analysis.h>
#include <alloyspec/analysis/spectrum_statistics.h>
#include <alloyspec/analysis/tail_fits.h>
#include <alloyspec/model/lattice.h>
#include <alloyspec/model/potential_model.h>

#include <gtest/gtest.h>

#include <cmath>
#include <cstdint>
#include <filesystem>
#include <fstream>
#include <map>
#include <sstream>
#include <string>
#include <tuple>
#include <vector>

namespace
{
  using namespace alloyspec;

  // The invented binary chain of test_weighted_ids.cc: barriers of height 4
  // with probability 1/2, wells at 0, unit cells, Dirichlet ends.
  constexpr double barrier       = 4.0;
  constexpr double concentration = 0.5;
  /** Favours wells (well probability ≈ 0.65), as in test_weighted_ids.cc. */
  constexpr double tilt = 0.15;
  /** Every eigenvalue up to here is listed (the records' complete_up_to). */
  constexpr double cutoff = 1.5;
  constexpr double eta    = 0.05; ///< Lorentzian width
  constexpr double sigma  = 0.05; ///< Gaussian width
  const std::vector<double> energies{0.1, 0.15, 0.2, 0.3, 0.5};
  /** Agreement of one large-sample estimate with its exact value (common practice, no source). */
  constexpr double standard_errors = 4.0;
  /** Two-sided 95 % normal quantile Φ⁻¹(0.975) (tables of the normal law). */
  constexpr double z95 = 1.959963984540054;
  constexpr double pi  = 3.14159265358979323846;

  /** The exact data of one configuration. */
  struct Configuration
  {
    double              probability = 0;
    std::vector<double> levels;        ///< eigenvalues ≤ cutoff, ascending
    std::vector<double> ipr;           ///< invented per-level values (not physical IPRs)
    std::vector<double> central;       ///< invented per-level central-cell weights
  };

  std::vector<double> cells_of(const unsigned int bits, const unsigned int n)
  {
    std::vector<double> v(n);
    for (unsigned int k = 0; k < n; ++k)
      v[k] = (bits >> k) & 1u ? barrier : 0.0;
    return v;
  }

  unsigned int bits_of(const std::vector<double> &v)
  {
    unsigned int bits = 0;
    for (unsigned int k = 0; k < v.size(); ++k)
      if (v[k] == barrier)
        bits |= 1u << k;
    return bits;
  }

  /**
   * All 2^n configurations with their model probabilities and exact levels.
   * The per-level values stand in for IPRs and central weights: any
   * deterministic function of the configuration serves to test the weighting
   * (here they depend on the number of barriers, which the tilt changes).
   */
  std::vector<Configuration> enumerate(const unsigned int n)
  {
    std::vector<Configuration> all(1u << n);
    for (unsigned int bits = 0; bits < all.size(); ++bits)
      {
        const auto   v        = cells_of(bits, n);
        const int    barriers = __builtin_popcount(bits);
        auto        &c        = all[bits];
        c.probability = std::pow(concentration, barriers) * std::pow(1 - concentration, int(n) - barriers);
        const std::size_t k = alloyspec::testing::count_below(v, 1.0, Boundary::dirichlet, cutoff);
        c.levels            = alloyspec::testing::lowest_eigenvalues(v, 1.0, Boundary::dirichlet, k);
        for (std::size_t j = 0; j < k; ++j)
          {
            c.ipr.push_back((1.0 + barriers) / (1.0 + n) / double(j + 1));
            c.central.push_back(((bits & 1u) ? 0.02 : 0.1) / double(j + 1));
          }
      }
    return all;
  }

  RealisationRecord record_of(const Configuration &c, const std::uint64_t r, const double log_weight)
  {
    RealisationRecord rec;
    rec.realisation                  = r;
    rec.boundary                     = "dirichlet";
    rec.eigenvalues                  = c.levels;
    rec.inverse_participation_ratios = c.ipr;
    rec.central_weights              = c.central;
    rec.complete_up_to               = cutoff;
    rec.log_weight                   = log_weight;
    return rec;
  }

  /** @p count tilted chains of @p n cells drawn by the model layer with seed @p seed. */
  std::vector<RealisationRecord> tilted_sample(const std::vector<Configuration> &all, unsigned int n,
                                               std::uint64_t seed, std::uint64_t count,
                                               double theta = tilt)
  {
    const Lattice  lattice(std::vector<unsigned int>{n});
    PotentialModel model;
    model.set_law(make_bernoulli_law(concentration, barrier, 0.0), lattice);
    model.set_tilt(theta);
    std::vector<RealisationRecord> records;
    for (std::uint64_t r = 0; r < count; ++r)
      {
        const std::vector<double> q = model.cell_values(seed, r);
        records.push_back(record_of(all[bits_of(q)], r, model.log_weight(q)));
      }
    return records;
  }

  double lorentzian(const double t) { return (eta / pi) / (t * t + eta * eta); }
  double gaussian(const double t)
  {
    return std::exp(-0.5 * (t / sigma) * (t / sigma)) / (std::sqrt(2 * pi) * sigma);
  }

  /** E_p[f(configuration)] by enumeration. */
  template <typename F>
  double exact(const std::vector<Configuration> &all, F f)
  {
    double sum = 0;
    for (const auto &c : all)
      sum += c.probability * f(c);
    return sum;
  }

  constexpr unsigned int chain_cells = 12;
  const std::vector<Configuration> &chain()
  {
    static const std::vector<Configuration> all = enumerate(chain_cells);
    return all;
  }
} // namespace

/**
 * The DOS (both kernels) and the local trace of 20000 tilted chains, against
 * their exact expectations; the same sample without its weights is far off,
 * which shows that the check can fail.
 */
TEST(WeightedStatistics, DensityOfStatesAndLocalTraceAreUnbiased)
{
  const auto &all     = chain();
  const auto  records = tilted_sample(all, chain_cells, 7, 20000);
  const double volume = chain_cells;
  const auto  lor = density_of_states(records, "dirichlet", energies, volume, Broadening::lorentzian, eta);
  const auto  gau = density_of_states(records, "dirichlet", energies, volume, Broadening::gaussian, sigma);
  bool        have = false;
  const auto  loc  = local_trace_estimate(records, "dirichlet", energies, 1.0, eta, have);
  ASSERT_TRUE(have);
  auto unweighted = records;
  for (auto &r : unweighted)
    r.log_weight = 0;
  const auto plain = density_of_states(unweighted, "dirichlet", energies, volume, Broadening::lorentzian, eta);
  std::size_t far = 0;
  for (std::size_t i = 0; i < energies.size(); ++i)
    {
      const double e        = energies[i];
      const double want_lor = exact(all, [&](const Configuration &c) {
        double s = 0;
        for (const double x : c.levels)
          s += lorentzian(e - x);
        return s / volume;
      });
      const double want_gau = exact(all, [&](const Configuration &c) {
        double s = 0;
        for (const double x : c.levels)
          s += gaussian(e - x);
        return s / volume;
      });
      const double want_ids_local = exact(all, [&](const Configuration &c) {
        double s = 0;
        for (std::size_t j = 0; j < c.levels.size(); ++j)
          if (c.levels[j] <= e)
            s += c.central[j];
        return s;
      });
      const double want_dos_local = exact(all, [&](const Configuration &c) {
        double s = 0;
        for (std::size_t j = 0; j < c.levels.size(); ++j)
          s += c.central[j] * lorentzian(e - c.levels[j]);
        return s;
      });
      EXPECT_NEAR(lor[i].mean, want_lor, standard_errors * lor[i].standard_error) << "E = " << e;
      EXPECT_NEAR(gau[i].mean, want_gau, standard_errors * gau[i].standard_error) << "E = " << e;
      EXPECT_NEAR(loc[i].ids, want_ids_local, standard_errors * loc[i].standard_error) << "E = " << e;
      EXPECT_NEAR(loc[i].dos, want_dos_local, standard_errors * loc[i].dos_standard_error) << "E = " << e;
      EXPECT_GT(lor[i].effective_sample_size, 1.0);
      if (std::abs(plain[i].mean - want_lor) > standard_errors * plain[i].standard_error)
        ++far;
    }
  // Without the weights the tilted sample over-counts the tail.
  EXPECT_GE(far, 3u);
}

/**
 * The bootstrap band of the IDS resamples realisations with their weights:
 * over 400 seeds of 500 tilted chains, the 95 % percentile band covers the
 * exact E[N_L(E)]. A correct 95 % interval covers with standard deviation
 * √(0.95·0.05/400) = 1.09 %, so 4 of them give the band 90.6–99.4 %.
 */
TEST(WeightedStatistics, BootstrapBandOfTheWeightedMeanCovers)
{
  const auto                 &all         = chain();
  constexpr unsigned int      repetitions = 400;
  constexpr double            coverage_sd = 0.0109; // √(0.95·0.05/400)
  const std::vector<double>   at{0.15, 0.2};
  std::vector<unsigned int>   covered(at.size(), 0);
  std::vector<double>         want;
  for (const double e : at)
    want.push_back(exact(all, [&](const Configuration &c) {
      double n = 0;
      for (const double x : c.levels)
        n += x <= e;
      return n / chain_cells;
    }));
  for (unsigned int seed = 1; seed <= repetitions; ++seed)
    {
      const auto records = tilted_sample(all, chain_cells, 1000 + seed, 500);
      const auto samples = counting_samples(records, "dirichlet", at, chain_cells);
      EXPECT_TRUE(samples.weighted);
      const auto band = bootstrap_mean_interval(samples, 400, 0.95, seed);
      for (std::size_t i = 0; i < at.size(); ++i)
        if (band[i].lower <= want[i] && want[i] <= band[i].upper)
          ++covered[i];
    }
  for (std::size_t i = 0; i < at.size(); ++i)
    {
      const double coverage = double(covered[i]) / repetitions;
      std::cout << "E = " << at[i] << ": exact " << want[i] << ", bootstrap coverage " << coverage
                << std::endl;
      EXPECT_NEAR(coverage, 0.95, 4 * coverage_sd);
    }
}

/**
 * Level-spacing ratios and IPRs per bin are ratios E_p[S_b]/E_p[C_b]: their
 * weighted estimate (a ratio of two unbiased means) agrees with the exact
 * ratio, and over 400 seeds its 95 % interval from the linearised standard
 * error covers it (4 standard deviations of the coverage: 90.6–99.4 %).
 */
TEST(WeightedStatistics, LocalisationMeasuresEstimateTheExactRatios)
{
  const auto  &all = chain();
  const double lower = 0.0, upper = cutoff, width = 0.5;
  // Exact E[S_b] and E[C_b] for the spacing ratio (middle level in the bin) and the IPR.
  std::vector<double> ratio_sum(3, 0), ratio_count(3, 0), ipr_sum(3, 0), ipr_count(3, 0);
  for (const auto &c : all)
    {
      const auto &l = c.levels;
      for (std::size_t i = 0; i + 2 < l.size(); ++i)
        {
          const double s1 = l[i + 1] - l[i], s2 = l[i + 2] - l[i + 1];
          const auto   b  = std::min<std::size_t>(2, std::size_t((l[i + 1] - lower) / width));
          ratio_sum[b] += c.probability * std::min(s1, s2) / std::max(s1, s2);
          ratio_count[b] += c.probability;
        }
      for (std::size_t j = 0; j < l.size(); ++j)
        {
          const auto b = std::min<std::size_t>(2, std::size_t((l[j] - lower) / width));
          ipr_sum[b] += c.probability * c.ipr[j];
          ipr_count[b] += c.probability;
        }
    }
  constexpr unsigned int repetitions = 400;
  constexpr double       coverage_sd = 0.0109; // √(0.95·0.05/400)
  std::vector<unsigned int> ratio_covered(3, 0), ipr_covered(3, 0);
  std::vector<unsigned int> ratio_tried(3, 0), ipr_tried(3, 0);
  for (unsigned int seed = 1; seed <= repetitions; ++seed)
    {
      const auto records = tilted_sample(all, chain_cells, 5000 + seed, seed == 1 ? 20000 : 1000);
      const auto ratios  = spacing_ratio_bins(records, "dirichlet", lower, upper, width);
      const auto ipr     = ipr_bins(records, "dirichlet", lower, upper, width);
      for (std::size_t b = 0; b < 3; ++b)
        {
          const auto check = [&](const BinRow &row, const double sum, const double count,
                                 unsigned int &covered, unsigned int &tried) {
            if (!(count > 0) || !std::isfinite(row.standard_error))
              return;
            const double want = sum / count;
            if (seed == 1) // one large sample: within 4 standard errors
              {
                EXPECT_NEAR(row.mean, want, standard_errors * row.standard_error) << "bin " << b;
              }
            ++tried;
            covered += std::abs(row.mean - want) <= z95 * row.standard_error;
          };
          check(ratios[b], ratio_sum[b], ratio_count[b], ratio_covered[b], ratio_tried[b]);
          check(ipr[b], ipr_sum[b], ipr_count[b], ipr_covered[b], ipr_tried[b]);
        }
    }
  for (std::size_t b = 0; b < 3; ++b)
    for (const auto &[name, covered, tried] :
         {std::tuple{"ratio", ratio_covered[b], ratio_tried[b]},
          std::tuple{"ipr", ipr_covered[b], ipr_tried[b]}})
      {
        if (tried < repetitions)
          continue; // a bin the chain rarely reaches
        const double coverage = double(covered) / tried;
        std::cout << name << " bin " << b << ": coverage " << coverage << std::endl;
        EXPECT_NEAR(coverage, 0.95, 4 * coverage_sd) << name << " bin " << b;
      }
}

/**
 * A box-size series of tilted studies: the mean IDS of every size in
 * ids_by_size.csv is the weighted estimate, within 4 standard errors of the
 * exact E[N_L(E)] of chains of 8, 10 and 12 cells (each enumerated).
 */
TEST(WeightedStatistics, BoxSizeSeriesUsesTheWeights)
{
  const double e = 0.3;
  std::vector<AnalysisInput> studies;
  std::map<unsigned int, double> want;
  for (const unsigned int n : {8u, 10u, 12u})
    {
      const auto all = n == chain_cells ? chain() : enumerate(n);
      want[n]        = exact(all, [&](const Configuration &c) {
        double k = 0;
        for (const double x : c.levels)
          k += x <= e;
        return k / n;
      });
      AnalysisInput in;
      in.dimension  = 1;
      in.cells      = {n};
      in.volume     = n;
      in.boundaries = {"dirichlet"};
      in.energies   = {e};
      in.records    = tilted_sample(all, n, 40 + n, 20000);
      studies.push_back(in);
    }
  const auto dir = std::filesystem::temp_directory_path() / "alloyspec_weighted_series";
  std::filesystem::remove_all(dir);
  AnalysisSettings settings;
  settings.figure_formats.clear();
  write_size_series(dir.string(), studies, settings);
  std::ifstream file(dir / "ids_by_size.csv");
  std::string   header, line;
  std::getline(file, header);
  std::getline(file, line);
  std::vector<std::string> names, values;
  for (std::stringstream h(header); std::getline(h, names.emplace_back(), ',');)
    ;
  for (std::stringstream v(line); std::getline(v, values.emplace_back(), ',');)
    ;
  for (const unsigned int n : {8u, 10u, 12u})
    {
      const std::string l = "_L" + std::to_string(n);
      double mean = NAN, error = NAN;
      for (std::size_t k = 0; k < names.size(); ++k)
        {
          if (names[k] == "ids_dirichlet" + l)
            mean = std::stod(values[k]);
          if (names[k] == "stderr_dirichlet" + l)
            error = std::stod(values[k]);
        }
      ASSERT_TRUE(std::isfinite(mean) && error > 0) << "L = " << n;
      EXPECT_NEAR(mean, want[n], standard_errors * error) << "L = " << n;
    }
  std::filesystem::remove_all(dir);
}

/**
 * With every weight 1 the weighted binning is the plain pooled mean, bit for
 * bit, and the weighted tail-fit point rule drops points with too few
 * effective realisations only from weighted data.
 */
TEST(WeightedStatistics, UnitWeightsGiveThePlainNumbers)
{
  std::vector<LevelValue>                levels;
  std::vector<std::pair<double, double>> pairs;
  SplitMix64                             rng(3);
  for (std::uint64_t r = 0; r < 50; ++r)
    for (int j = 0; j < 4; ++j)
      {
        const double e = 2 * rng.uniform(), v = rng.uniform();
        levels.push_back({e, v, 1.0, r});
        pairs.emplace_back(e, v);
      }
  const auto a = weighted_bin_means(levels, 50, 0.0, 2.0, 0.5);
  const auto b = bin_means(pairs, 0.0, 2.0, 0.5);
  ASSERT_EQ(a.size(), b.size());
  for (std::size_t k = 0; k < a.size(); ++k)
    {
      EXPECT_EQ(a[k].mean, b[k].mean);
      EXPECT_EQ(a[k].standard_error, b[k].standard_error);
      EXPECT_EQ(a[k].count, b[k].count);
    }

  const auto &all = chain();
  auto        records = tilted_sample(all, chain_cells, 9, 300);
  for (auto &r : records)
    r.log_weight = 0;
  const auto s = counting_samples(records, "dirichlet", energies, chain_cells);
  EXPECT_FALSE(s.weighted);
  for (std::size_t r = 0; r < records.size(); ++r)
    EXPECT_EQ(s.counts[r], counting_function(records[r].eigenvalues, chain_cells, energies));

  // A weighted Lifshitz point with fewer than 10 effective realisations is not fitted.
  std::vector<GridValue> ids;
  for (int k = 1; k <= 8; ++k)
    {
      const double x = 0.1 * k, n = std::exp(-1.0 / std::sqrt(x));
      ids.push_back({x, n, 0.05 * n, true, 100, 50, true, k <= 2 ? 5.0 : 50.0});
    }
  const TailFit fit = lifshitz_fit(ids, 0.0, 1, 1.0, {0.05, 0.85}, 0.5, 0.95);
  EXPECT_EQ(fit.points, 6u);
  for (auto &g : ids)
    g.weighted = false;
  EXPECT_EQ(lifshitz_fit(ids, 0.0, 1, 1.0, {0.05, 0.85}, 0.5, 0.95).points, 8u);
}
