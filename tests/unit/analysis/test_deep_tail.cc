// Deep-tail Lifshitz fits on synthetic tails with a known exponent.
#include <alloyspec/analysis/deep_tail.h>

#include <gtest/gtest.h>

#include <cmath>
#include <random>
#include <vector>

namespace
{
  using namespace alloyspec;

  constexpr double e0 = 0.0;
  /** Confidence level of the intervals tested. */
  constexpr double confidence = 0.95;
  /** The synthetic tails: ln n = −C (E − E0)^(−α) on 12 energies 0.02 … 0.13. */
  constexpr double lifshitz_constant = 2.0;
  /** Relative standard error of every synthetic point: small, so the delta method holds. */
  constexpr double relative_error = 0.05;

  std::vector<IdsAccumulator::Row> synthetic(const double alpha, const double noise_scale,
                                             std::mt19937_64 *rng)
  {
    std::normal_distribution<double> normal;
    std::vector<IdsAccumulator::Row> rows;
    for (int i = 0; i < 12; ++i)
      {
        const double e = 0.02 + 0.01 * i;
        const double n = std::exp(-lifshitz_constant * std::pow(e - e0, -alpha));
        const double se = relative_error * n;
        const double x  = rng ? n + noise_scale * se * normal(*rng) : n;
        rows.push_back({e, x, se, 1000, true, 500.0});
      }
    return rows;
  }

  /** An exact Lifshitz tail with d = 1: both forms find α = 1/2, and the window is asymptotic. */
  TEST(DeepTail, ExactLifshitzTailIsFoundAndCalledAsymptotic)
  {
    const auto fit = deep_tail_fit(synthetic(0.5, 0, nullptr), e0, 1, 1.0, 0.02, confidence);
    ASSERT_TRUE(fit.fitted) << fit.reason;
    EXPECT_EQ(fit.points, 12u);
    EXPECT_NEAR(fit.exponent_a, 0.5, 1e-10);
    // The profile scans α on a grid of step 0.002.
    EXPECT_NEAR(fit.exponent_b, 0.5, 0.002);
    EXPECT_NEAR(fit.constant_b, lifshitz_constant, 1e-10);
    EXPECT_TRUE(fit.asymptotic) << fit.not_asymptotic_because.front();
  }

  /** ln n = −C (E − E0)^(−1) is a tail of exponent 1, not d/2 = 1/2: flagged. */
  TEST(DeepTail, WrongExponentIsFlaggedNotAsymptotic)
  {
    std::mt19937_64 rng(7);
    const auto fit = deep_tail_fit(synthetic(1.0, 1.0, &rng), e0, 1, 1.0, 0.02, confidence);
    ASSERT_TRUE(fit.fitted) << fit.reason;
    EXPECT_NEAR(fit.exponent_a, 1.0, 0.05);
    EXPECT_FALSE(fit.asymptotic);
  }

  /**
   * A pre-asymptotic tail, ln n = −C (E−E0)^(−1/2) − 40 (E−E0) ln(1/(E−E0)): the local
   * exponent changes across the window and the fit must not be called asymptotic.
   */
  TEST(DeepTail, DriftingExponentIsFlagged)
  {
    auto rows = synthetic(0.5, 0, nullptr);
    for (auto &r : rows)
      r.mean *= std::exp(-40.0 * (r.energy - e0) * std::log(1.0 / (r.energy - e0)));
    for (auto &r : rows)
      r.standard_error = relative_error * r.mean;
    const auto fit = deep_tail_fit(rows, e0, 1, 1.0, 0.02, confidence);
    ASSERT_TRUE(fit.fitted) << fit.reason;
    EXPECT_FALSE(fit.asymptotic);
  }

  /** Points with too few effective realisations or above the fraction are left out. */
  TEST(DeepTail, PointsNeedEffectiveSamplesAndTheDeepTail)
  {
    auto rows      = synthetic(0.5, 0, nullptr);
    rows[0].effective_sample_size = 3;
    rows[1].complete              = false;
    const auto points = deep_tail_points(rows, e0, 1.0, 0.02);
    EXPECT_EQ(points.size(), 10u);
    const auto none = deep_tail_points(rows, e0, 1.0, 1e-30);
    EXPECT_TRUE(none.empty());
    EXPECT_FALSE(deep_tail_fit(rows, e0, 1, 1.0, 1e-30, confidence).fitted);
  }

  /**
   * Coverage: with independent Gaussian errors of the stated size, the form-A
   * interval of α (Student t, scale s² = max(1, χ²/ν), so never narrower than
   * the stated errors imply) covers the true 1/2 at least at the nominal
   * rate. Over 1000 repetitions the coverage has standard deviation 0.7 %, so
   * 93 % is 3 standard deviations below 95 %.
   */
  TEST(DeepTail, FormAIntervalCoversTheTrueExponent)
  {
    std::mt19937_64 rng(2024);
    int             covered = 0;
    constexpr int   repetitions = 1000;
    for (int k = 0; k < repetitions; ++k)
      {
        const auto fit = deep_tail_fit(synthetic(0.5, 1.0, &rng), e0, 1, 1.0, 0.02, confidence);
        ASSERT_TRUE(fit.fitted);
        covered += fit.exponent_a_low <= 0.5 && 0.5 <= fit.exponent_a_high;
      }
    const double coverage = double(covered) / repetitions;
    std::cout << "form A coverage " << coverage << std::endl;
    EXPECT_GE(coverage, 0.93);
  }
} // namespace
