// Studies at several tilts combined by the balance heuristic (model/tilt_mixture.h):
// the closed form of the weight, and the combined estimate against the exact
// expectation of a 12-cell chain (counts from the test-side Sturm counter).
#include "sturm_1d.h"

#include <alloyspec/analysis/spectrum_statistics.h>
#include <alloyspec/model/lattice.h>
#include <alloyspec/model/potential_model.h>
#include <alloyspec/model/tilt_mixture.h>

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <vector>

namespace
{
  using namespace alloyspec;

  /** w = 1/Σ c_k e^{−ℓ_k}: by hand, 1/(0.5·1 + 0.5·e^{−ln 4}) = 1/(0.5 + 0.125) = 1.6. */
  TEST(MixedTilts, BalanceWeightClosedForm)
  {
    EXPECT_NEAR(balance_log_weight({0.0, std::log(4.0)}, {0.5, 0.5}), std::log(1.6), 1e-15);
    // One tilt only: the ordinary likelihood ratio.
    EXPECT_DOUBLE_EQ(balance_log_weight({-3.25}, {1.0}), -3.25);
    // Equal components merge: two studies at one tilt are one study.
    EXPECT_NEAR(balance_log_weight({2.0, 2.0}, {0.3, 0.7}), 2.0, 1e-15);
    // Far from overflow in log form: terms of e^{±800}.
    EXPECT_NEAR(balance_log_weight({800.0, -800.0}, {0.5, 0.5}), -800.0 - std::log(0.5), 1e-12);
    EXPECT_THROW(balance_log_weight({0.0}, {0.0}), std::invalid_argument);
  }

  // The chain of test_weighted_ids.cc: barriers 4 with probability 1/2, wells 0, 12 cells.
  constexpr unsigned int chain_cells   = 12;
  constexpr double       barrier       = 4.0;
  constexpr double       concentration = 0.5;
  constexpr double       tail_energy   = 0.2;
  /** The two studies: plain and a strong tilt (alone it under-covers, README). */
  constexpr double strong_tilt = 0.5;
  constexpr std::uint64_t chains_per_study = 500;
  /** Repetitions: the coverage's standard deviation is √(0.95·0.05/1000) = 0.69 %. */
  constexpr unsigned int repetitions = 1000;
  /** Two-sided 95 % normal quantile Φ⁻¹(0.975) (tables of the normal law). */
  constexpr double z95 = 1.959963984540054;

  /**
   * The exact E[N_L(E)] (sum over all 2^12 configurations, Sturm counts;
   * Coddington & Levinson ch. 8) against 500 plain and 500 tilted chains
   * combined by the balance heuristic. The standard error is that of the
   * pooled summands w N, which includes the spread between the two studies'
   * means (each study alone is biased under its mixture weight; only their
   * combination is not), so the interval can only be conservative: its
   * coverage must reach 93 %.
   */
  void check_plain_and_tilted_combined(const unsigned int window)
  {
    const Lattice  lattice(std::vector<unsigned int>{chain_cells});
    PotentialModel plain, tilted;
    plain.set_law(make_bernoulli_law(concentration, barrier, 0.0), lattice);
    tilted.set_law(make_bernoulli_law(concentration, barrier, 0.0), lattice);
    tilted.set_tilt_window(window, 0.2);
    tilted.set_tilt(strong_tilt);

    std::vector<std::size_t> count(1u << chain_cells);
    double                   exact = 0;
    for (unsigned int bits = 0; bits < count.size(); ++bits)
      {
        std::vector<double> v(chain_cells);
        for (unsigned int n = 0; n < chain_cells; ++n)
          v[n] = (bits >> n) & 1u ? barrier : 0.0;
        count[bits] = alloyspec::testing::count_below(v, 1.0, Boundary::dirichlet, tail_energy);
        const int barriers = __builtin_popcount(bits);
        exact += std::pow(concentration, barriers) *
                 std::pow(1 - concentration, int(chain_cells) - barriers) * double(count[bits]) /
                 chain_cells;
      }
    const auto bits_of = [](const std::vector<double> &q) {
      unsigned int bits = 0;
      for (unsigned int n = 0; n < chain_cells; ++n)
        bits |= (q[n] == barrier ? 1u : 0u) << n;
      return bits;
    };

    unsigned int covered = 0;
    double       mean = 0, mean_sq = 0;
    for (unsigned int rep = 0; rep < repetitions; ++rep)
      {
        IdsAccumulator ids({tail_energy}, double(chain_cells));
        for (const PotentialModel *drawn : {&plain, &tilted})
          for (std::uint64_t r = 0; r < chains_per_study; ++r)
            {
              // Two studies with different seeds, as summarise requires.
              const std::vector<double> q = drawn->cell_values(2 * rep + (drawn == &tilted), r);
              const double w = balance_log_weight({plain.log_weight(q), tilted.log_weight(q)},
                                                  {0.5, 0.5});
              ids.add_counts({count[bits_of(q)]}, w);
            }
        const auto row = ids.rows().front();
        mean += row.mean / repetitions;
        mean_sq += row.mean * row.mean / repetitions;
        covered += std::abs(row.mean - exact) <= z95 * row.standard_error;
      }
    const double coverage = double(covered) / repetitions;
    std::cout << "exact " << exact << ", mean of mixed estimates " << mean << ", coverage "
              << coverage << std::endl;
    EXPECT_GE(coverage, 0.93);
    // Unbiased: the mean of the estimates within 4 standard errors of that
    // mean (the spread of the estimates over √repetitions).
    const double spread = std::sqrt(std::max(0.0, mean_sq - mean * mean));
    EXPECT_NEAR(mean, exact, 4 * spread / std::sqrt(double(repetitions)));
  }

  TEST(MixedTilts, BalanceHeuristicEstimateIsUnbiasedAndCovers) { check_plain_and_tilted_combined(0); }

  /**
   * The same with the tilted study drawn with tilt windows of 4 cells (an
   * untilted share of 0.2): its component of the balance heuristic is its own
   * window mixture (PotentialModel::log_weight with the window), as summarise
   * builds it (StudyModel::apply_tilt_mixture).
   */
  TEST(MixedTilts, PlainAndWindowedStudiesCombined) { check_plain_and_tilted_combined(4); }
} // namespace
