// Tests of bootstrap intervals, broadened densities of states, level-spacing
// ratios, IPR binning and the `analysis` parameters. All spectra here are
// synthetic (invented for the tests), drawn from a seeded generator.
#include <alloyspec/core/errors.h>
#include <alloyspec/io/results_store.h>
#include <alloyspec/analysis/spectral_analysis.h>
#include <alloyspec/analysis/spectrum_statistics.h>

#include <deal.II/base/parameter_handler.h>

#include <Eigen/Dense>
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <string>
#include <vector>

namespace
{
  using namespace alloyspec;

  constexpr double kPi = 3.14159265358979323846;
  // Trapezoidal quadrature of the broadened density on a grid of width/20.
  constexpr double kQuadrature = 1e-3;
  // Agreement of a sample mean with its limit, in standard errors (common practice, no source).
  constexpr double kStandardErrors = 4.0;
  constexpr double kExact          = 1e-14;

  /** A standard normal deviate by Box–Muller from the project's generator. */
  double normal(SplitMix64 &rng)
  {
    const double u1 = 1.0 - rng.uniform(), u2 = rng.uniform();
    return std::sqrt(-2.0 * std::log(u1)) * std::cos(2.0 * kPi * u2);
  }

  /** Invented spectra: @p n realisations of @p levels uniform levels on [0, top]. */
  std::vector<RealisationRecord> uniform_records(std::size_t n, std::size_t levels, double top,
                                                 const std::string &boundary, std::uint64_t seed)
  {
    SplitMix64                     rng(seed);
    std::vector<RealisationRecord> records;
    for (std::size_t r = 0; r < n; ++r)
      {
        RealisationRecord rec;
        rec.realisation = r;
        rec.boundary    = boundary;
        for (std::size_t j = 0; j < levels; ++j)
          rec.eigenvalues.push_back(top * rng.uniform());
        std::sort(rec.eigenvalues.begin(), rec.eigenvalues.end());
        rec.complete_up_to = top;
        records.push_back(rec);
      }
    return records;
  }
} // namespace

TEST(SplitMix64, ReferenceOutput)
{
  // First output for seed 0 of Vigna's reference splitmix64.c (from memory).
  SplitMix64 rng(0);
  EXPECT_EQ(rng.next(), 0xe220a8397b1dcdafULL);
  SplitMix64 small(7);
  for (int i = 0; i < 1000; ++i)
    EXPECT_LT(small.below(3), 3u);
}

TEST(DensityOfStates, IntegratesBackToIdsWithinBroadeningError)
{
  // The integral of a broadened density is the counting function convolved
  // with the kernel's cumulative distribution, so at energy E it differs from
  // N(E) by at most (1/|Λ|) Σ_j P(kernel displacement > |E − λ_j|) per
  // realisation, plus the weight left below the start of the integration.
  const double volume  = 10.0;
  const auto   records = uniform_records(6, 40, 10.0, "dirichlet", 11);
  for (const Broadening kernel : {Broadening::gaussian, Broadening::lorentzian})
    {
      const double        width = 0.2, step = width / 20, start = -60.0;
      std::vector<double> grid;
      for (double e = start; e <= 9.0 + 1e-12; e += step)
        grid.push_back(e);
      const auto dos = density_of_states(records, "dirichlet", grid, volume, kernel, width);
      const auto tail = [&](double distance) {
        return kernel == Broadening::gaussian ? 0.5 * std::erfc(distance / (width * std::sqrt(2.0)))
                                              : 0.5 - std::atan(distance / width) / kPi;
      };
      IdsAccumulator ids(grid, volume);
      for (const auto &r : records)
        ids.add(r.eigenvalues, r.complete_up_to);
      const auto rows = ids.rows();

      double integral = 0;
      for (std::size_t i = 1; i < grid.size(); ++i)
        {
          integral += 0.5 * step * (dos[i].mean + dos[i - 1].mean);
          if (grid[i] < 1.0 || i % 50 != 0)
            continue;
          double bound = 0;
          for (const auto &r : records)
            for (const double x : r.eigenvalues)
              bound += tail(std::abs(grid[i] - x)) + tail(x - start);
          bound /= volume * double(records.size());
          EXPECT_NEAR(integral, rows[i].mean, bound + kQuadrature) << "E = " << grid[i];
        }
    }
}

TEST(DensityOfStates, MarksEnergiesNearTopOfComputedSpectrumIncomplete)
{
  auto records               = uniform_records(3, 20, 10.0, "neumann", 5);
  records[1].complete_up_to  = 6.0;
  const double        width  = 0.1;
  std::vector<double> grid   = {5.0, 6.0 - 6.0 * width - 1e-9, 6.0 - 5.9 * width, 7.0};
  const auto          dos    = density_of_states(records, "neumann", grid, 10.0,
                                       Broadening::gaussian, width);
  EXPECT_TRUE(dos[0].complete);
  EXPECT_TRUE(dos[1].complete);
  EXPECT_FALSE(dos[2].complete);
  EXPECT_FALSE(dos[3].complete);
  // Another boundary condition's records do not enter.
  const auto none = density_of_states(records, "dirichlet", grid, 10.0, Broadening::gaussian, width);
  EXPECT_FALSE(none[0].complete);
  EXPECT_EQ(none[0].mean, 0.0);
}

TEST(Bootstrap, PercentileIntervalCoversTheMean)
{
  // Coverage of the percentile interval for the mean of n = 40 normal samples
  // (Efron & Tibshirani 1993, ch. 13). It falls slightly short of nominal at
  // this n: the bootstrap spread of the mean is s·√((n−1)/n)/√n and the
  // quantile is normal, not Student t, so coverage ≈ P(|T₃₉| ≤ 1.96·√(39/40))
  // ≈ 0.940. Bounds: that value ± 4 binomial standard deviations of 1000
  // repetitions (±0.028), rounded outwards.
  constexpr std::size_t kRepetitions = 1000, kRealisations = 40;
  constexpr double      kLow = 0.91, kHigh = 0.97;
  const double          mu = 0.3, sd = 0.1;
  SplitMix64            rng(2024);
  std::size_t           covered = 0;
  for (std::size_t rep = 0; rep < kRepetitions; ++rep)
    {
      CountingSamples s;
      s.energies = {1.0};
      s.complete = {true};
      for (std::size_t r = 0; r < kRealisations; ++r)
        s.counts.push_back({mu + sd * normal(rng)});
      const auto row = bootstrap_mean_interval(s, 500, 0.95, rep + 1)[0];
      ASSERT_LE(row.lower, row.mean);
      ASSERT_GE(row.upper, row.mean);
      covered += row.lower <= mu && mu <= row.upper;
    }
  const double coverage = double(covered) / double(kRepetitions);
  EXPECT_GE(coverage, kLow);
  EXPECT_LE(coverage, kHigh);
  std::cout << "bootstrap 95% interval coverage: " << coverage << '\n';
}

TEST(Bootstrap, DeterministicForOneSeedAndSameResampleAtEveryEnergy)
{
  const auto records = uniform_records(30, 50, 10.0, "dirichlet", 3);
  const auto s       = counting_samples(records, "dirichlet", {2.0, 5.0, 8.0}, 10.0);
  const auto a       = bootstrap_mean_interval(s, 300, 0.9, 42);
  const auto b       = bootstrap_mean_interval(s, 300, 0.9, 42);
  for (std::size_t i = 0; i < a.size(); ++i)
    {
      EXPECT_EQ(a[i].lower, b[i].lower);
      EXPECT_EQ(a[i].upper, b[i].upper);
      EXPECT_TRUE(a[i].complete);
    }
  EXPECT_EQ(s.counts.size(), 30u);
  EXPECT_EQ(s.states_below[2], std::size_t(std::round(a[2].mean * 10.0 * 30.0)));
}

TEST(LevelStatistics, PoissonLevelsGiveTwoLnTwoMinusOne)
{
  // Independent uniform levels are a Poisson process: ⟨r⟩ = 2 ln 2 − 1
  // (Atas, Bogomolny, Giraud & Roux, PRL 110, 084101 (2013)).
  const auto records = uniform_records(40, 2000, 100.0, "periodic", 77);
  const auto bins    = spacing_ratio_bins(records, "periodic", 0.0, 100.0, 100.0);
  ASSERT_EQ(bins.size(), 1u);
  EXPECT_EQ(bins[0].count, 40u * 1998u);
  EXPECT_NEAR(bins[0].mean, spacing_ratio_poisson, kStandardErrors * bins[0].standard_error);
  EXPECT_NEAR(spacing_ratio_poisson, 2 * std::log(2.0) - 1, kExact);
  std::cout << "Poisson <r> = " << bins[0].mean << " +- " << bins[0].standard_error << '\n';
}

TEST(LevelStatistics, GoeMatricesGiveAtasValue)
{
  // Real symmetric Gaussian matrices (GOE); ⟨r⟩ ≈ 0.5307 in the large-N bulk
  // (Atas et al. 2013). Only the middle half of each spectrum of a 200 × 200
  // matrix is used: near the edges of the semicircle the density varies
  // across a few spacings and the finite-N statistics differ.
  constexpr int kSize = 200, kMatrices = 60;
  SplitMix64    rng(99);
  std::vector<RealisationRecord> records;
  for (int m = 0; m < kMatrices; ++m)
    {
      Eigen::MatrixXd a(kSize, kSize);
      for (int i = 0; i < kSize; ++i)
        for (int j = 0; j <= i; ++j)
          a(i, j) = a(j, i) = (i == j ? std::sqrt(2.0) : 1.0) * normal(rng);
      Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> solver(a, Eigen::EigenvaluesOnly);
      RealisationRecord                              rec;
      rec.boundary = "periodic";
      for (int k = kSize / 4; k < 3 * kSize / 4; ++k)
        rec.eigenvalues.push_back(solver.eigenvalues()(k));
      rec.complete_up_to = 1e9;
      records.push_back(rec);
    }
  const auto bins = spacing_ratio_bins(records, "periodic", -1e3, 1e3, 2e3);
  ASSERT_EQ(bins.size(), 1u);
  EXPECT_EQ(bins[0].count, std::size_t(kMatrices) * (kSize / 2 - 2));
  EXPECT_NEAR(bins[0].mean, spacing_ratio_goe, kStandardErrors * bins[0].standard_error);
  std::cout << "GOE <r> = " << bins[0].mean << " +- " << bins[0].standard_error << '\n';
}

TEST(LevelStatistics, RatiosStayWithinOneRealisationAndSkipUntrustedLevels)
{
  RealisationRecord a, b;
  a.boundary = b.boundary = "dirichlet";
  a.eigenvalues           = {0.0, 1.0, 3.0, 10.0};
  a.complete_up_to        = 5.0; // 10 is not trusted
  b.eigenvalues           = {0.5, 0.6};
  b.complete_up_to        = 5.0;
  const auto bins         = spacing_ratio_bins({a, b}, "dirichlet", 0.0, 4.0, 2.0);
  ASSERT_EQ(bins.size(), 2u);
  EXPECT_EQ(bins[0].count, 1u); // one triple (0, 1, 3), middle level 1
  EXPECT_NEAR(bins[0].mean, 0.5, kExact);
  EXPECT_EQ(bins[1].count, 0u);
  EXPECT_TRUE(std::isnan(bins[1].mean));
}

TEST(Ipr, AveragedPerEnergyBin)
{
  RealisationRecord r;
  r.boundary                     = "neumann";
  r.eigenvalues                  = {0.1, 0.3, 0.6, 1.2, 1.4};
  r.inverse_participation_ratios = {1.0, 3.0, 5.0, 7.0, 100.0};
  r.complete_up_to               = 1.3; // the last level is not trusted
  const auto bins                = ipr_bins({r}, "neumann", 0.0, 1.5, 0.5);
  ASSERT_EQ(bins.size(), 3u);
  EXPECT_EQ(bins[0].count, 2u);
  EXPECT_NEAR(bins[0].mean, 2.0, kExact);
  EXPECT_NEAR(bins[0].standard_error, 1.0, kExact); // s = √2, s/√2 = 1
  EXPECT_EQ(bins[1].count, 1u);
  EXPECT_NEAR(bins[1].mean, 5.0, kExact);
  EXPECT_TRUE(std::isnan(bins[1].standard_error));
  EXPECT_EQ(bins[2].count, 1u);
  EXPECT_NEAR(bins[2].mean, 7.0, kExact);
  EXPECT_DOUBLE_EQ(bins[2].upper, 1.5);
}

TEST(AnalysisSettings, DefaultsAndErrorsNameTheEntry)
{
  dealii::ParameterHandler prm;
  AnalysisSettings::declare_parameters(prm);
  AnalysisSettings s;
  s.parse_parameters(prm);
  EXPECT_EQ(s.bootstrap_samples, 1000u);
  EXPECT_DOUBLE_EQ(s.confidence_level, 0.95);
  EXPECT_TRUE(s.lifshitz_window.empty());
  EXPECT_EQ(s.figure_formats, (std::vector<std::string>{"png", "svg"}));
  EXPECT_TRUE(s.lorentzian_automatic && s.gaussian_automatic && s.bin_automatic);

  prm.enter_subsection("analysis");
  prm.set("lifshitz window", "0.5, 1.5");
  prm.set("figure formats", "svg");
  prm.leave_subsection();
  s.parse_parameters(prm);
  EXPECT_EQ(s.lifshitz_window, (std::vector<double>{0.5, 1.5}));
  EXPECT_EQ(s.figure_formats, (std::vector<std::string>{"svg"}));

  for (const std::string bad : {"3, 1", "1", "a, b", "1, 2, 3"})
    {
      prm.enter_subsection("analysis");
      prm.set("urbach window", bad);
      prm.leave_subsection();
      try
        {
          s.parse_parameters(prm);
          ADD_FAILURE() << "accepted urbach window '" << bad << "'";
        }
      catch (const InputError &e)
        {
          EXPECT_NE(std::string(e.what()).find("analysis/urbach window"), std::string::npos);
          EXPECT_NE(std::string(e.what()).find("E_low < E_high"), std::string::npos);
        }
    }
}

// Automatic widths follow the spectrum: for levels spaced exactly h apart the
// mean spacing is h, h/R for the levels of R realisations pooled (arithmetic,
// no source needed), so η = h/R, σ = 2h/R and the bin width is a tenth of the
// trusted range; a width the user set is kept.
TEST(AnalysisSettings, AutomaticWidthsFollowTheLevelSpacing)
{
  constexpr double h = 0.02, bottom = 0.5;
  std::vector<RealisationRecord> records(3);
  for (std::size_t k = 0; k < records.size(); ++k)
    {
      records[k].boundary    = "dirichlet";
      records[k].realisation = k;
      for (int j = 0; j < 41; ++j)
        records[k].eigenvalues.push_back(bottom + h * j + 1e-3 * double(k));
      records[k].complete_up_to = bottom + 40 * h;
    }
  AnalysisSettings s;
  s.lorentzian_automatic = s.gaussian_automatic = s.bin_automatic = true;
  s.gaussian_automatic = false;
  s.gaussian_width     = 0.7;
  std::vector<std::string> notes;
  const AnalysisSettings   r = s.resolved_for(records, notes);
  constexpr double rounding = 1e-12; // sums of 40 spacings of size 1e-2 in doubles
  // Three realisations pool to a spacing h/3.
  EXPECT_NEAR(r.lorentzian_width, h / 3, rounding);
  EXPECT_DOUBLE_EQ(r.gaussian_width, 0.7);
  // Levels trusted up to complete_up_to = bottom + 40h; the lowest is bottom.
  EXPECT_NEAR(r.bin_width, (40 * h) / 10, rounding);
  EXPECT_EQ(notes.size(), 2u);
  EXPECT_FALSE(r.lorentzian_automatic || r.bin_automatic);
}
