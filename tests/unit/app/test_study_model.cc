#include <alloyspec/app/study_model.h>
#include <alloyspec/core/errors.h>

#include <gtest/gtest.h>

#include <cmath>
#include <limits>

namespace alloyspec
{
  // The grid of study/energies = auto: a step of 1, 2, 2.5 or 5 times a power
  // of ten, the smallest with at most 200 intervals over the range, and the
  // multiples of it from the one at or below the lower end to the last one
  // at or below the upper end (worked by hand for each case).
  TEST(StudyModel, SpectrumGridSteps)
  {
    constexpr double rounding = 1e-12; // k * h against its decimal value; common practice, no source
    {
      // 6.529 / 200 = 0.0326: 0.01, 0.02, 0.025 are finer, 0.05 is the step.
      const auto grid = StudyModel::spectrum_grid(0.0, 6.529);
      ASSERT_EQ(grid.size(), 131u);
      EXPECT_NEAR(grid[1] - grid[0], 0.05, rounding);
      EXPECT_NEAR(grid.back(), 6.5, rounding);
    }
    {
      // 1.27 / 200 = 0.00635: 0.01, from 0.23 to 1.5.
      const auto grid = StudyModel::spectrum_grid(0.23, 1.5);
      ASSERT_EQ(grid.size(), 128u);
      EXPECT_NEAR(grid.front(), 0.23, rounding);
      EXPECT_NEAR(grid.back(), 1.5, rounding);
    }
    {
      // Negative band bottom: -3.3 to 2 is 5.3 / 200 = 0.0265, step 0.05, from -3.3.
      const auto grid = StudyModel::spectrum_grid(-3.3, 2.0);
      EXPECT_NEAR(grid.front(), -3.3, rounding);
      EXPECT_NEAR(grid[1] - grid[0], 0.05, rounding);
      EXPECT_NEAR(grid.back(), 2.0, rounding);
      EXPECT_LE(grid.size(), 201u);
    }
    {
      // 0.5 / 200 = 0.0025 exactly: the step 0.0025 itself, 201 points.
      const auto grid = StudyModel::spectrum_grid(0.0, 0.5);
      EXPECT_EQ(grid.size(), 201u);
    }
  }

  TEST(StudyModel, SpectrumGridRefusesAnEmptyRange)
  {
    EXPECT_THROW(StudyModel::spectrum_grid(1.0, 1.0), InputError);
    EXPECT_THROW(StudyModel::spectrum_grid(1.0, 0.5), InputError);
    EXPECT_THROW(StudyModel::spectrum_grid(0.0, std::numeric_limits<double>::infinity()), InputError);
  }
} // namespace alloyspec
