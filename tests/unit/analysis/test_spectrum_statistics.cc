// Tests of counting functions and the IDS accumulator.
#include <alloyspec/analysis/spectrum_statistics.h>

#include <gtest/gtest.h>

#include <cmath>
#include <random>
#include <string>
#include <vector>

namespace
{
  using alloyspec::counting_function;
  using alloyspec::IdsAccumulator;

  // Hand-checkable values are exact up to the rounding of one division.
  constexpr double kExact = 1e-14;
} // namespace

TEST(CountingFunction, HandChecked)
{
  // Unsorted, with a repeated value and an eigenvalue exactly on a grid point
  // (counted: N(E) = #{λ ≤ E}/|Λ|).
  const std::vector<double> eigenvalues{2.0, 0.5, 1.0, 1.0, 3.5};
  const auto counts = counting_function(eigenvalues, 4.0, {0.0, 0.5, 1.0, 1.9, 3.5, 10.0});
  const std::vector<double> expected{0.0, 0.25, 0.75, 0.75, 1.25, 1.25};
  ASSERT_EQ(counts.size(), expected.size());
  for (std::size_t i = 0; i < expected.size(); ++i)
    EXPECT_NEAR(counts[i], expected[i], kExact) << "i=" << i;
  EXPECT_THROW(counting_function(eigenvalues, 0.0, {1.0}), std::invalid_argument);
}

TEST(IdsAccumulator, HandCheckedMeanAndError)
{
  // Counts at E = 1 of three realisations on volume 2: 1/2, 1, 3/2 (one, two and
  // three eigenvalues ≤ 1). Mean 1, sample variance ((1/2)² + 0 + (1/2)²)/2 = 1/4,
  // standard error √(1/4 / 3) = 1/(2√3).
  IdsAccumulator acc({1.0, 5.0}, 2.0);
  acc.add({0.2, 4.0}, 10.0);
  acc.add({0.2, 0.9, 4.5}, 10.0);
  acc.add({0.2, 0.3, 1.0, 7.0}, 10.0);
  EXPECT_EQ(acc.n_realisations(), 3u);
  const auto rows = acc.rows();
  ASSERT_EQ(rows.size(), 2u);
  EXPECT_EQ(rows[0].energy, 1.0);
  EXPECT_NEAR(rows[0].mean, 1.0, kExact);
  EXPECT_NEAR(rows[0].standard_error, 1.0 / (2.0 * std::sqrt(3.0)), kExact);
  EXPECT_EQ(rows[0].n_realisations, 3u);
  EXPECT_TRUE(rows[0].complete);
  // At E = 5: 2/2, 3/2, 3/2 → mean 4/3, variance ((1/3)² + 2 (1/6)²)/2 = 1/12.
  EXPECT_NEAR(rows[1].mean, 4.0 / 3.0, kExact);
  EXPECT_NEAR(rows[1].standard_error, std::sqrt(1.0 / 12.0 / 3.0), kExact);
}

TEST(IdsAccumulator, SingleAndNoRealisation)
{
  IdsAccumulator acc({0.0, 1.0}, 1.0);
  for (const auto &row : acc.rows())
    {
      EXPECT_EQ(row.n_realisations, 0u);
      EXPECT_EQ(row.mean, 0.0);
      EXPECT_EQ(row.standard_error, 0.0);
      EXPECT_FALSE(row.complete);
    }
  acc.add({0.5}, 2.0);
  const auto rows = acc.rows();
  EXPECT_EQ(rows[1].mean, 1.0);
  EXPECT_EQ(rows[1].standard_error, 0.0); // n < 2
  EXPECT_TRUE(rows[1].complete);
  EXPECT_THROW(IdsAccumulator({1.0}, -1.0), std::invalid_argument);
}

TEST(IdsAccumulator, FlagsPointsAboveAnyCompletenessBound)
{
  // Realisation A is complete up to 2.5, B up to 1.5: points ≤ 1.5 are complete,
  // the point at 2 is not (B's count there is a lower bound), even though A
  // alone would cover it. The bound itself is included. The mean still uses
  // every realisation.
  IdsAccumulator acc({1.0, 1.5, 2.0, 3.0}, 1.0);
  acc.add({0.5, 1.2, 1.8}, 2.5);
  acc.add({0.7, 1.4}, 1.5);
  const auto rows = acc.rows();
  EXPECT_TRUE(rows[0].complete);
  EXPECT_TRUE(rows[1].complete);
  EXPECT_FALSE(rows[2].complete);
  EXPECT_FALSE(rows[3].complete);
  EXPECT_NEAR(rows[2].mean, 2.5, kExact);
  EXPECT_EQ(rows[2].n_realisations, 2u);

  // A NaN bound cannot vouch for any point.
  IdsAccumulator nan_bound({0.0}, 1.0);
  nan_bound.add({}, std::nan(""));
  EXPECT_FALSE(nan_bound.rows()[0].complete);
}

TEST(IdsAccumulator, LargeCommonOffsetKeepsVariance)
{
  // Alternating realisations with 1000 and 1001 eigenvalues below E on volume
  // 10⁻³: counts 10⁶ and 10⁶ + 10³. The sample variance of n alternating values
  // (n even) is exactly d² n/(4(n−1)) with d = 10³. Plain Σx² − (Σx)²/n would
  // carry rounding errors of order 1e-16 · 10¹² per term, i.e. a relative error
  // near 1e-10 here; the shifted sums reproduce it to rounding of d itself.
  constexpr double      kOffsetTolerance = 1e-12;
  const std::size_t     n                = 200;
  const double          volume           = 1e-3;
  IdsAccumulator        acc({0.5}, volume);
  std::vector<double>   low(1000, 0.25), high(1001, 0.25);
  for (std::size_t i = 0; i < n; ++i)
    acc.add(i % 2 ? high : low, 1.0);
  const auto   row      = acc.rows()[0];
  const double d        = 1001.0 / volume - 1000.0 / volume;
  const double expected = std::sqrt(d * d * double(n) / (4.0 * double(n - 1)) / double(n));
  EXPECT_NEAR(row.mean, 1000.5 / volume, kOffsetTolerance * row.mean);
  EXPECT_NEAR(row.standard_error, expected, kOffsetTolerance * expected);
}

TEST(IdsAccumulator, StandardErrorMatchesSpreadOfMeans)
{
  // Simulation: each realisation has M eigenvalues uniform in [0, 1] on unit
  // volume, so its count at E is Binomial(M, E). Over many batches of n
  // realisations, the spread of the batch means must equal the typical reported
  // standard error, and both the binomial value √(M E (1−E)/n).
  constexpr std::size_t M = 40, n = 25, batches = 2000;
  // The sample standard deviation of 2000 batch means is known to ≈ 1/√(2·2000)
  // = 1.6 %; 6 % is almost 4 σ.
  constexpr double kStatisticalTolerance = 0.06;

  const std::vector<double>              energies{0.1, 0.5, 0.8};
  std::mt19937_64                        rng(12345);
  std::uniform_real_distribution<double> uniform(0.0, 1.0);
  std::vector<double> sum_mean(energies.size()), sum_mean_sq(energies.size()),
    sum_se_sq(energies.size());
  for (std::size_t b = 0; b < batches; ++b)
    {
      IdsAccumulator acc(energies, 1.0);
      for (std::size_t r = 0; r < n; ++r)
        {
          std::vector<double> eigenvalues(M);
          for (double &x : eigenvalues)
            x = uniform(rng);
          acc.add(eigenvalues, 1.0);
        }
      const auto rows = acc.rows();
      for (std::size_t i = 0; i < energies.size(); ++i)
        {
          sum_mean[i] += rows[i].mean;
          sum_mean_sq[i] += rows[i].mean * rows[i].mean;
          sum_se_sq[i] += rows[i].standard_error * rows[i].standard_error;
        }
    }
  for (std::size_t i = 0; i < energies.size(); ++i)
    {
      const double e         = energies[i];
      const double mean      = sum_mean[i] / batches;
      const double spread    = std::sqrt((sum_mean_sq[i] - batches * mean * mean) / (batches - 1));
      const double typical   = std::sqrt(sum_se_sq[i] / batches);
      const double binomial  = std::sqrt(M * e * (1 - e) / n);
      EXPECT_NEAR(mean, M * e, 4.0 * binomial / std::sqrt(double(batches))) << "E=" << e;
      EXPECT_NEAR(spread / typical, 1.0, kStatisticalTolerance) << "E=" << e;
      EXPECT_NEAR(typical / binomial, 1.0, kStatisticalTolerance) << "E=" << e;
    }
}
