// Tests of Kong's effective sample size against values worked by hand from its
// definition (Σw)²/Σw² (Kong 1992, Univ. Chicago Tech. Rep. 348; recalled from memory).
#include <alloyspec/model/effective_sample_size.h>

#include <gtest/gtest.h>

#include <cmath>
#include <vector>

namespace
{
  using alloyspec::effective_sample_size;
  using alloyspec::effective_sample_size_of_logs;

  // A handful of additions and one division: a few units of rounding.
  constexpr double kRounding = 1e-13;

  TEST(EffectiveSampleSize, EqualWeightsGiveTheirNumber)
  {
    EXPECT_NEAR(effective_sample_size(7 * 0.3, 7 * 0.09), 7.0, kRounding);
    EXPECT_NEAR(effective_sample_size_of_logs(std::vector<double>(12, -3.5)), 12.0, kRounding);
  }

  TEST(EffectiveSampleSize, TwoWeightsMatchTheClosedForm)
  {
    // w = 1 and 3: (1 + 3)² / (1 + 9) = 1.6.
    EXPECT_NEAR(effective_sample_size(4.0, 10.0), 1.6, kRounding);
    EXPECT_NEAR(effective_sample_size_of_logs({0.0, std::log(3.0)}), 1.6, kRounding);
  }

  TEST(EffectiveSampleSize, LogWeightsBeyondTheRangeOfExpDoNotOverflow)
  {
    // e^±800 overflows or underflows a double; the ratio depends only on differences.
    EXPECT_NEAR(effective_sample_size_of_logs({800.0, 800.0 + std::log(3.0)}), 1.6, kRounding);
    EXPECT_NEAR(effective_sample_size_of_logs({-800.0, -800.0 + std::log(3.0)}), 1.6, kRounding);
    // One weight e^50 times the others dominates: the size is 1 to rounding.
    EXPECT_NEAR(effective_sample_size_of_logs({50.0, 0.0, 0.0, 0.0}), 1.0, 1e-20 + 1e-12);
  }

  TEST(EffectiveSampleSize, NoWeightsGiveZero)
  {
    EXPECT_EQ(effective_sample_size(0.0, 0.0), 0.0);
    EXPECT_EQ(effective_sample_size_of_logs({}), 0.0);
  }
} // namespace
