// The tilted (importance-sampled) IDS estimate against exact expectations:
// tilted cell values and log weights from the model layer, the weighted mean
// and its standard error from IdsAccumulator, eigenvalue counts from the
// independent test-side Sturm counter (tests/support/sturm_1d.h).
#include "sturm_1d.h"

#include <alloyspec/analysis/spectrum_statistics.h>
#include <alloyspec/model/lattice.h>
#include <alloyspec/model/potential_model.h>

#include <gtest/gtest.h>

#include <cmath>
#include <cstdint>
#include <vector>

namespace
{
  using namespace alloyspec;

  // An invented binary chain: barriers of height 4 with probability 1/2,
  // wells at 0 otherwise; 12 cells of unit length, Dirichlet ends.
  constexpr unsigned int chain_cells   = 12;
  constexpr double       barrier       = 4.0;
  constexpr double       concentration = 0.5;
  /**
   * In the tail of this chain: a state below 0.2 needs a run of about 7 wells
   * (π²/k² < 0.2), so E[N_L(E)] is ~2.6e-3 per cell.
   */
  constexpr double tail_energy = 0.2;
  /**
   * Favours wells: the well probability becomes 1/(1 + e^{−4θ}) ≈ 0.65. A
   * stronger tilt makes the weights heavy-tailed and the normal interval of
   * the weighted mean under-covers (measured: 85 % at θ = 0.5, E = 0.15 with
   * 400 chains); this is what the effective sample size warns about.
   */
  constexpr double tilt = 0.15;
  /** Chains per estimate: enough for the normal interval of a weighted mean. */
  constexpr std::uint64_t chains_per_estimate = 1000;
  /**
   * Repetitions with different seeds. The coverage of a correct 95 % interval
   * over n repetitions has standard deviation √(0.95·0.05/n) = 0.49 % at
   * n = 2000, so the 93–97 % band is ±4 standard deviations wide.
   */
  constexpr unsigned int repetitions = 2000;
  /** Two-sided 95 % normal quantile Φ⁻¹(0.975) (tables of the normal law). */
  constexpr double z95 = 1.959963984540054;

  std::vector<double> configuration(const unsigned int bits)
  {
    std::vector<double> v(chain_cells);
    for (unsigned int n = 0; n < chain_cells; ++n)
      v[n] = (bits >> n) & 1u ? barrier : 0.0;
    return v;
  }

  unsigned int bits_of(const std::vector<double> &v)
  {
    unsigned int bits = 0;
    for (unsigned int n = 0; n < chain_cells; ++n)
      if (v[n] == barrier)
        bits |= 1u << n;
    return bits;
  }

  /**
   * The exactness check: E[N_L(E)] is the finite sum over all 2^12
   * configurations of p(config) · #{λ < E}/12, with each count from the
   * test-side Sturm counter (exact transfer matrices; Coddington & Levinson
   * ch. 8). Over 2000 seeds the 95 % intervals of the tilted estimate must
   * cover it 93–97 % of the time.
   */
  TEST(WeightedIds, TiltedEstimateIsUnbiasedAndItsIntervalsCover)
  {
    std::vector<std::size_t> count(1u << chain_cells);
    double                   exact = 0;
    for (unsigned int bits = 0; bits < count.size(); ++bits)
      {
        const std::vector<double> v = configuration(bits);
        count[bits] = alloyspec::testing::count_below(v, 1.0, Boundary::dirichlet, tail_energy);
        const int barriers = __builtin_popcount(bits);
        exact += std::pow(concentration, barriers) *
                 std::pow(1 - concentration, int(chain_cells) - barriers) * double(count[bits]) /
                 chain_cells;
      }
    ASSERT_GT(exact, 0.0);

    const Lattice  lattice(std::vector<unsigned int>{chain_cells});
    PotentialModel model;
    model.set_law(make_bernoulli_law(concentration, barrier, 0.0), lattice);
    model.set_tilt(tilt);

    unsigned int covered = 0;
    double       mean_of_estimates = 0;
    for (unsigned int seed = 1; seed <= repetitions; ++seed)
      {
        IdsAccumulator ids({tail_energy}, double(chain_cells));
        for (std::uint64_t r = 0; r < chains_per_estimate; ++r)
          {
            const std::vector<double> q = model.cell_values(seed, r);
            ids.add_counts({count[bits_of(q)]}, model.log_weight(q));
          }
        const auto row = ids.rows().front();
        mean_of_estimates += row.mean / repetitions;
        if (std::abs(row.mean - exact) <= z95 * row.standard_error)
          ++covered;
      }
    const double coverage = double(covered) / repetitions;
    std::cout << "exact E[N_L(" << tail_energy << ")] = " << exact << " per cell; mean of "
              << repetitions << " tilted estimates " << mean_of_estimates << "; coverage "
              << coverage << std::endl;
    EXPECT_GE(coverage, 0.93);
    EXPECT_LE(coverage, 0.97);
  }

  /**
   * The same exactness check for the localised tilt (tilt_window.h): windows
   * of 4 cells tilted by θ = 0.5 (well probability 0.88 inside), an untilted
   * share of 0.2. E_q[w N] = E_p[N] holds for the mixture as for the uniform
   * tilt; over 2000 seeds the 95 % intervals must cover 93–97 %.
   */
  TEST(WeightedIds, WindowedTiltIsUnbiasedAndItsIntervalsCover)
  {
    std::vector<std::size_t> count(1u << chain_cells);
    double                   exact = 0;
    for (unsigned int bits = 0; bits < count.size(); ++bits)
      {
        const std::vector<double> v = configuration(bits);
        count[bits] = alloyspec::testing::count_below(v, 1.0, Boundary::dirichlet, tail_energy);
        const int barriers = __builtin_popcount(bits);
        exact += std::pow(concentration, barriers) *
                 std::pow(1 - concentration, int(chain_cells) - barriers) * double(count[bits]) /
                 chain_cells;
      }
    const Lattice  lattice(std::vector<unsigned int>{chain_cells});
    PotentialModel model;
    model.set_law(make_bernoulli_law(concentration, barrier, 0.0), lattice);
    model.set_tilt_window(4, 0.2);
    model.set_tilt(0.5);
    unsigned int covered = 0;
    double       mean_of_estimates = 0;
    for (unsigned int seed = 1; seed <= repetitions; ++seed)
      {
        IdsAccumulator ids({tail_energy}, double(chain_cells));
        for (std::uint64_t r = 0; r < chains_per_estimate; ++r)
          {
            const std::vector<double> q = model.cell_values(seed, r);
            ids.add_counts({count[bits_of(q)]}, model.log_weight(q));
          }
        const auto row = ids.rows().front();
        mean_of_estimates += row.mean / repetitions;
        if (std::abs(row.mean - exact) <= z95 * row.standard_error)
          ++covered;
      }
    const double coverage = double(covered) / repetitions;
    std::cout << "windowed tilt: exact E[N_L(" << tail_energy << ")] = " << exact
              << " per cell; mean of " << repetitions << " estimates " << mean_of_estimates
              << "; coverage " << coverage << std::endl;
    EXPECT_GE(coverage, 0.93);
    EXPECT_LE(coverage, 0.97);
  }

  /** Plain sampling gives weight exactly 1: the weighted accumulator reproduces the plain mean. */
  TEST(WeightedIds, ZeroLogWeightsGiveThePlainMean)
  {
    IdsAccumulator plain({0.5, 1.0}, 2.0), weighted({0.5, 1.0}, 2.0);
    plain.add_counts({1, 3});
    plain.add_counts({0, 2});
    weighted.add_counts({1, 3}, 0.0);
    weighted.add_counts({0, 2}, 0.0);
    for (std::size_t i = 0; i < 2; ++i)
      {
        EXPECT_EQ(plain.rows()[i].mean, weighted.rows()[i].mean);
        EXPECT_EQ(plain.rows()[i].standard_error, weighted.rows()[i].standard_error);
      }
    EXPECT_DOUBLE_EQ(weighted.weight_effective_sample_size(), 2.0);
    // Summands 1/2 and 0: one realisation carries the estimate at E = 0.5.
    EXPECT_DOUBLE_EQ(weighted.rows()[0].effective_sample_size, 1.0);
  }
} // namespace
