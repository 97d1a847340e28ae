// Tests of the energy-grid parser: ranges in words, lists, and the colon form of
// earlier versions, which is refused with the same grid shown in words.
#include <alloyspec/core/errors.h>
#include <alloyspec/model/energy_grid.h>

#include <gtest/gtest.h>

#include <string>
#include <vector>

namespace
{
  using alloyspec::energy_grid_in_words;
  using alloyspec::InputError;
  using alloyspec::parse_energy_grid;

  // Hand-checkable values are exact up to the rounding of one multiplication.
  constexpr double kExact = 1e-14;

  /** The message of the InputError thrown for @p text, or "" if none is thrown. */
  std::string grid_error(const std::string &text, const std::string &name = "study/energies")
  {
    try
      {
        parse_energy_grid(text, name);
      }
    catch (const InputError &e)
      {
        return e.what();
      }
    return {};
  }
} // namespace

TEST(EnergyGrid, Ranges)
{
  EXPECT_EQ(parse_energy_grid("0 to 2 by 0.5"), (std::vector<double>{0.0, 0.5, 1.0, 1.5, 2.0}));
  EXPECT_EQ(parse_energy_grid("  1 to 1 by 1 "), (std::vector<double>{1.0}));
  EXPECT_EQ(parse_energy_grid("0\tto\t1  by 1"), (std::vector<double>{0.0, 1.0}));
  // The stop is not on the grid: the grid ends below it.
  EXPECT_EQ(parse_energy_grid("-1 to 1 by 0.75"), (std::vector<double>{-1.0, -0.25, 0.5}));

  // 0.1 is not representable; 0 + 30·0.1 must still reach 3 and end exactly there.
  const auto decimal = parse_energy_grid("0 to 3 by 0.1");
  ASSERT_EQ(decimal.size(), 31u);
  EXPECT_EQ(decimal.back(), 3.0);
  EXPECT_NEAR(decimal[7], 0.7, kExact);

  EXPECT_EQ(parse_energy_grid("0 to 999999 by 1").size(), 1000000u);
  EXPECT_EQ(parse_energy_grid("-6 to 1 by 0.05").size(), 141u);
}

TEST(EnergyGrid, Lists)
{
  EXPECT_EQ(parse_energy_grid("0, 0.5, 2"), (std::vector<double>{0.0, 0.5, 2.0}));
  EXPECT_EQ(parse_energy_grid("3.25"), (std::vector<double>{3.25}));
  EXPECT_EQ(parse_energy_grid("-2,1e1"), (std::vector<double>{-2.0, 10.0}));
}

TEST(EnergyGrid, ErrorsNameParameterAndForm)
{
  for (const std::string bad :
       {"", "  ", "0 to 1", "0 to 1 by 0", "0 to 2 by -1", "2 to 1 by 1", "0 to 1 by 2 by 3",
        "a to 2 by 1", "0 from 1 by 1", "0 to 1 step 1", "0 TO 1 BY 1", "to 1 by 1", "1, 2, 2",
        "3, 1", "1,,2", "1, x", "nan", "inf, 5", "1e400", "0 to 1000000 by 1",
        "0 to 1 by 1e-7", "1 2", "0 to 1 by nan", "0 to inf by 1", "0, 1 to 2 by 1"})
    {
      const std::string message = grid_error(bad, "study/energies");
      ASSERT_FALSE(message.empty()) << "accepted '" << bad << "'";
      EXPECT_NE(message.find("study/energies"), std::string::npos) << message;
      EXPECT_NE(message.find("start to stop by step"), std::string::npos) << message;
      EXPECT_NE(message.find("comma-separated"), std::string::npos) << message;
    }
  EXPECT_NE(grid_error("0 to 1 by -1", "output/energies").find("output/energies"),
            std::string::npos);
}

TEST(EnergyGrid, ColonFormIsRefusedWithTheSameGridInWords)
{
  // The user's own numbers, as written, in the order start, stop, step.
  const std::string message = grid_error("0:0.05:3");
  ASSERT_FALSE(message.empty());
  EXPECT_NE(message.find("study/energies"), std::string::npos) << message;
  EXPECT_NE(message.find("'0 to 3 by 0.05'"), std::string::npos) << message;

  EXPECT_NE(grid_error(" -6 : 0.05 : 1 ").find("'-6 to 1 by 0.05'"), std::string::npos);
  // Malformed colon forms are refused too, with the general form.
  for (const std::string bad : {"0:1", ":", "::", "0:1:2:3", "a:b:c", "0:0.1:3, 4"})
    {
      const std::string text = grid_error(bad);
      ASSERT_FALSE(text.empty()) << "accepted '" << bad << "'";
      EXPECT_NE(text.find("start to stop by step"), std::string::npos) << text;
    }
}

TEST(EnergyGrid, WordsFormOfTheColonForm)
{
  EXPECT_EQ(energy_grid_in_words("0:0.05:3"), std::optional<std::string>("0 to 3 by 0.05"));
  EXPECT_EQ(energy_grid_in_words(" 0.2 : 0.01 : 1.5 "),
            std::optional<std::string>("0.2 to 1.5 by 0.01"));
  // The words form reads back as the grid the colon form meant in earlier versions.
  const auto grid = parse_energy_grid(*energy_grid_in_words("0:0.25:10"));
  ASSERT_EQ(grid.size(), 41u);
  EXPECT_EQ(grid.back(), 10.0);
  for (const std::string other : {"0, 1", "0:1", "0 to 1 by 1", "0::1", "0:1:2:3", "0 :1 2: 3"})
    EXPECT_FALSE(energy_grid_in_words(other).has_value()) << other;
}
