#include <alloyspec/analysis/tail_table.h>

#include <gtest/gtest.h>

#include <cmath>
#include <sstream>
#include <string>
#include <vector>

namespace alloyspec
{
  namespace
  {
    std::vector<std::vector<std::string>> cells(const std::string &csv)
    {
      std::vector<std::vector<std::string>> table;
      std::istringstream                    lines(csv);
      for (std::string line; std::getline(lines, line);)
        {
          table.emplace_back();
          std::istringstream fields(line);
          for (std::string field; std::getline(fields, field, ',');)
            table.back().push_back(field);
        }
      return table;
    }
  } // namespace

  TEST(TailTable, IntervalAtTheConfidenceLevelAndIncompleteRowsMissing)
  {
    // Complete row: N = 1e-4, SE = 2e-5; at 95 % z = 1.959963984540054 (the
    // standard normal quantile, Abramowitz & Stegun 26.2, from memory to 10
    // digits), so the interval is N ± z SE. Incomplete row: an under-count,
    // every value of it written as the missing marker.
    std::vector<IdsAccumulator::Row> rows(2);
    rows[0] = {0.1, 1e-4, 2e-5, 50, true};
    rows[0].effective_sample_size = 40;
    rows[1] = {0.2, 3e-4, 1e-5, 50, false};
    rows[1].effective_sample_size = 45;
    const auto table = cells(format_tail_table({"dirichlet"}, {rows}, 0.95));
    ASSERT_EQ(table.size(), 3u);
    EXPECT_EQ(table[0], (std::vector<std::string>{"energy", "ids_dirichlet", "lower_dirichlet",
                                                  "upper_dirichlet", "ess_dirichlet",
                                                  "log_ids_dirichlet"}));
    constexpr double z         = 1.959963984540054;
    constexpr double tolerance = 1e-12; // 17-digit output read back; common practice, no source
    EXPECT_NEAR(std::stod(table[1][2]), 1e-4 - z * 2e-5, tolerance);
    EXPECT_NEAR(std::stod(table[1][3]), 1e-4 + z * 2e-5, tolerance);
    EXPECT_NEAR(std::stod(table[1][5]), std::log(1e-4), tolerance);
    for (std::size_t c = 1; c < table[2].size(); ++c)
      EXPECT_EQ(table[2][c], "nan") << "column " << table[0][c];
  }
} // namespace alloyspec
