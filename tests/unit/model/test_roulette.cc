// Tests of the roulette's survival table against values worked by hand from
// its definition (roulette.h): quantile bins of ln w, r_b ∝ √(mean y² in b),
// scaled to a largest value of 1 and raised to the floor. The unbiasedness of
// the estimate under the roulette is checked against an exact enumeration in
// tests/unit/analysis/test_weighted_ids.cc.
#include <alloyspec/model/roulette.h>
#include <alloyspec/model/random_stream.h>

#include <gtest/gtest.h>

#include <cmath>
#include <stdexcept>
#include <vector>

namespace
{
  using alloyspec::Roulette;

  // A square root and one division: a few units of rounding.
  constexpr double kRounding = 1e-15;

  /** The table from six pilot realisations with ln w = 0, …, 5 in three bins of two, floor 0.3. */
  Roulette six_in_three_bins(const std::vector<double> &summands)
  {
    return Roulette::from_pilot({0.0, 1.0, 2.0, 3.0, 4.0, 5.0}, summands, 3, 0.3);
  }

  void expect_survivals(const Roulette &r, const std::vector<double> &expected)
  {
    ASSERT_EQ(r.survivals().size(), expected.size());
    for (std::size_t b = 0; b < expected.size(); ++b)
      EXPECT_EQ(r.survivals()[b], expected[b]) << "bin " << b;
  }

  TEST(Roulette, DefaultSolvesEveryRealisation)
  {
    const Roulette none;
    EXPECT_FALSE(none.active());
    EXPECT_EQ(none.survival(-1e300), 1.0);
    EXPECT_EQ(none.survival(1e300), 1.0);
  }

  TEST(Roulette, TwoBinsFromAPilotWorkedByHand)
  {
    // ln w = 1, 2 | 3, 4 with y = 0, 2 | 0, 4: edge halfway, 2.5;
    // √((0 + 4)/2) = √2 and √((0 + 16)/2) = 2√2, so r = 1/2 and 1.
    const Roulette r = Roulette::from_pilot({3.0, 1.0, 4.0, 2.0}, {0.0, 0.0, 4.0, 2.0}, 2, 0.2);
    ASSERT_EQ(r.inner_edges().size(), 1u);
    EXPECT_NEAR(r.inner_edges()[0], 2.5, kRounding);
    ASSERT_EQ(r.survivals().size(), 2u);
    EXPECT_NEAR(r.survivals()[0], 0.5, kRounding);
    EXPECT_EQ(r.survivals()[1], 1.0);
    EXPECT_NEAR(r.survival(2.4999), 0.5, kRounding);
    EXPECT_EQ(r.survival(2.5), 1.0); // a bin holds its lower edge
    EXPECT_NEAR(r.survival(-1e9), 0.5, kRounding);
    EXPECT_TRUE(r.solved(0.49, 0.0));
    EXPECT_FALSE(r.solved(0.5, 0.0));
  }

  TEST(Roulette, TheFloorBoundsBinsWithoutEvents)
  {
    // Three bins of two; only the last holds an event: r = 0.3 (the floor), 0.3, 1.
    const Roulette r = six_in_three_bins({0.0, 0.0, 0.0, 0.0, 0.0, 7.0});
    expect_survivals(r, {0.3, 0.3, 1.0});
    EXPECT_NEAR(r.inner_edges()[0], 1.5, kRounding);
    EXPECT_NEAR(r.inner_edges()[1], 3.5, kRounding);
  }

  TEST(Roulette, EveryBinAboveThePeakIsSolved)
  {
    // Bins {0, 1}, {2, 3}, {4, 5} with y² means 0, 49, 0: r = 0.3, 1, 0.3 before the cap,
    // and the last bin, above the peak, is solved always: 0.3, 1, 1.
    const Roulette r = six_in_three_bins({0.0, 0.0, 7.0, 7.0, 0.0, 0.0});
    expect_survivals(r, {0.3, 1.0, 1.0});
    EXPECT_EQ(r.survival(1e9), 1.0);
  }

  TEST(Roulette, TiesAtAQuantileMergeBins)
  {
    // Every ln w equal: no edge can separate them, one bin, solved always.
    const Roulette r = Roulette::from_pilot(std::vector<double>(10, -2.0),
                                            {0, 0, 1, 0, 0, 0, 2, 0, 0, 0}, 4, 0.1);
    EXPECT_TRUE(r.inner_edges().empty());
    ASSERT_EQ(r.survivals().size(), 1u);
    EXPECT_EQ(r.survival(-2.0), 1.0);
  }

  TEST(Roulette, APilotWithoutEventsOrBadTablesAreRefused)
  {
    EXPECT_THROW(Roulette::from_pilot({1.0, 2.0}, {0.0, 0.0}, 2, 0.2), std::invalid_argument);
    EXPECT_THROW(Roulette::from_pilot({1.0, 2.0}, {1.0}, 2, 0.2), std::invalid_argument);
    EXPECT_THROW(Roulette::from_pilot({1.0, 2.0}, {1.0, 1.0}, 2, 0.0), std::invalid_argument);
    EXPECT_THROW(Roulette({1.0}, {0.5}), std::invalid_argument);
    EXPECT_THROW(Roulette({2.0, 1.0}, {0.5, 0.5, 1.0}), std::invalid_argument);
    EXPECT_THROW(Roulette({1.0}, {0.0, 1.0}), std::invalid_argument);
    EXPECT_THROW(Roulette({1.0}, {0.5, 1.5}), std::invalid_argument);
  }

  TEST(Roulette, ItsUniformIsApartFromTheCellDraws)
  {
    // The decision's uniform is keyed by (seed, realisation) alone and differs
    // from cell 0's own draws (which are keyed by draw indices from 0).
    const double u = alloyspec::uniform_open01(7, 11, 0, alloyspec::roulette_draw);
    EXPECT_NE(u, alloyspec::uniform_open01(7, 11, 0, 0));
    EXPECT_NE(u, alloyspec::uniform_open01(7, 11, 0, 1));
    EXPECT_EQ(u, alloyspec::uniform_open01(7, 11, 0, alloyspec::roulette_draw));
  }
} // namespace
