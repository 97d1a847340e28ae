// The tilted (importance-sampled) IDS estimate against exact expectations:
// tilted cell values and log weights from the model layer, the weighted mean
// and its standard error from IdsAccumulator, eigenvalue counts from the
// independent test-side Sturm counter (tests/support/sturm_1d.h).
#include "sturm_1d.h"

#include <alloyspec/analysis/spectrum_statistics.h>
#include <alloyspec/model/lattice.h>
#include <alloyspec/model/potential_model.h>
#include <alloyspec/model/random_stream.h>
#include <alloyspec/model/roulette.h>

#include <gtest/gtest.h>

#include <cmath>
#include <cstdint>
#include <iostream>
#include <limits>
#include <string>
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

  /** E[N_L(E)] per cell and the count of every configuration. */
  struct ExactTail
  {
    std::vector<std::size_t> count;
    double                   mean = 0;
  };

  /**
   * E[N_L(E)] is the finite sum over all 2^12 configurations of p(config) ·
   * #{λ < E}/12, with each count from the test-side Sturm counter (exact
   * transfer matrices; Coddington & Levinson ch. 8).
   */
  ExactTail exact_tail()
  {
    ExactTail tail;
    tail.count.resize(1u << chain_cells);
    for (unsigned int bits = 0; bits < tail.count.size(); ++bits)
      {
        const std::vector<double> v = configuration(bits);
        tail.count[bits] = alloyspec::testing::count_below(v, 1.0, Boundary::dirichlet, tail_energy);
        const int barriers = __builtin_popcount(bits);
        tail.mean += std::pow(concentration, barriers) *
                     std::pow(1 - concentration, int(chain_cells) - barriers) *
                     double(tail.count[bits]) / chain_cells;
      }
    return tail;
  }

  /**
   * The exactness check for one sampling law: over 2000 seeds, the
   * share of 95 % intervals of the weighted estimate (IdsAccumulator) that
   * contain the exact E[N_L(E)].
   */
  double coverage_of(const PotentialModel &model, const std::string &label)
  {
    const ExactTail tail = exact_tail();
    EXPECT_GT(tail.mean, 0.0);
    unsigned int covered           = 0;
    double       mean_of_estimates = 0;
    for (unsigned int seed = 1; seed <= repetitions; ++seed)
      {
        IdsAccumulator ids({tail_energy}, double(chain_cells));
        for (std::uint64_t r = 0; r < chains_per_estimate; ++r)
          {
            const std::vector<double> q = model.cell_values(seed, r);
            ids.add_counts({tail.count[bits_of(q)]}, model.log_weight(q));
          }
        const auto row = ids.rows().front();
        mean_of_estimates += row.mean / repetitions;
        if (std::abs(row.mean - tail.mean) <= z95 * row.standard_error)
          ++covered;
      }
    const double coverage = double(covered) / repetitions;
    std::cout << label << ": exact E[N_L(" << tail_energy << ")] = " << tail.mean
              << " per cell; mean of " << repetitions << " estimates " << mean_of_estimates
              << "; coverage " << coverage << std::endl;
    return coverage;
  }

  PotentialModel chain_model()
  {
    const Lattice  lattice(std::vector<unsigned int>{chain_cells});
    PotentialModel model;
    model.set_law(make_bernoulli_law(concentration, barrier, 0.0), lattice);
    return model;
  }

  /** The tilt of every cell by θ = 0.15. */
  TEST(WeightedIds, TiltedEstimateIsUnbiasedAndItsIntervalsCover)
  {
    PotentialModel model = chain_model();
    model.set_tilt(tilt);
    const double coverage = coverage_of(model, "tilted");
    EXPECT_GE(coverage, 0.93);
    EXPECT_LE(coverage, 0.97);
  }

  /**
   * The localised tilt (tilt_window.h): windows of 4 cells tilted by θ = 0.5
   * (well probability 0.88 inside), an untilted share of 0.2. E_q[w N] =
   * E_p[N] holds for the mixture as for the uniform tilt.
   */
  TEST(WeightedIds, WindowedTiltIsUnbiasedAndItsIntervalsCover)
  {
    PotentialModel model = chain_model();
    model.set_tilt_window(4, 0.2);
    model.set_tilt(0.5);
    const double coverage = coverage_of(model, "windowed tilt");
    EXPECT_GE(coverage, 0.93);
    EXPECT_LE(coverage, 0.97);
  }

  /**
   * The shaped tilt (tilt_profile.h), of the box and of windows of 6 cells:
   * cell j tilted by θ φ_j, φ the lowest sine mode (well probability up to
   * 0.69 in the centre at θ = 0.2, 0.88 at θ = 0.5). As for the flat tilt, a
   * stronger tilt of the box makes the weights heavy-tailed and the normal
   * interval under-covers (measured: 93.7 % at θ = 0.3).
   */
  TEST(WeightedIds, ShapedTiltIsUnbiasedAndItsIntervalsCover)
  {
    PotentialModel box = chain_model();
    box.set_tilt_shape(TiltShape::lowest_mode);
    box.set_tilt(0.2);
    const double box_coverage = coverage_of(box, "shaped tilt of the box");
    EXPECT_GE(box_coverage, 0.93);
    EXPECT_LE(box_coverage, 0.97);
    PotentialModel windows = chain_model();
    windows.set_tilt_shape(TiltShape::lowest_mode);
    windows.set_tilt_window(6, 0.2);
    windows.set_tilt(0.5);
    const double window_coverage = coverage_of(windows, "shaped windows");
    EXPECT_GE(window_coverage, 0.93);
    EXPECT_LE(window_coverage, 0.97);
  }

  /** Coverage of the estimate under Russian roulette, and the share of chains solved. */
  struct RouletteCoverage
  {
    double coverage = 0;
    double solved   = 0;
  };

  /**
   * The roulette (roulette.h) as `count` runs it: with @p pilot > 0 the first
   * @p pilot chains of each estimate are all solved and set the table (5 bins
   * of ln w, floor 0.2); otherwise @p fixed serves throughout. A chain is
   * solved when its own uniform lies below r(ln w), and then weighs w / r,
   * or it weighs 0. A table from the estimate's own pilot keeps it unbiased:
   * given the pilot, every later summand has mean E_p[N].
   */
  RouletteCoverage roulette_coverage(const PotentialModel &model, const std::uint64_t pilot,
                                     const Roulette &fixed, const std::string &label)
  {
    const ExactTail tail    = exact_tail();
    unsigned int    covered = 0;
    std::size_t     solved = 0, drawn = 0;
    double          mean_of_estimates = 0;
    for (unsigned int seed = 1; seed <= repetitions; ++seed)
      {
        IdsAccumulator      ids({tail_energy}, double(chain_cells));
        std::vector<double> pilot_logs, pilot_summands;
        Roulette            table = pilot > 0 ? Roulette() : fixed;
        for (std::uint64_t r = 0; r < chains_per_estimate; ++r)
          {
            if (pilot > 0 && r == pilot)
              table = Roulette::from_pilot(pilot_logs, pilot_summands, 5, 0.2);
            const std::vector<double> q     = model.cell_values(seed, r);
            const double              log_w = model.log_weight(q);
            const std::size_t         n     = tail.count[bits_of(q)];
            if (r < pilot)
              {
                pilot_logs.push_back(log_w);
                pilot_summands.push_back(std::exp(log_w) * double(n));
              }
            ++drawn;
            if (table.solved(uniform_open01(seed, r, 0, roulette_draw), log_w))
              {
                ++solved;
                ids.add_counts({n}, log_w - std::log(table.survival(log_w)));
              }
            else
              ids.add_counts({0}, -std::numeric_limits<double>::infinity());
          }
        const auto row = ids.rows().front();
        EXPECT_EQ(row.n_realisations, chains_per_estimate);
        mean_of_estimates += row.mean / repetitions;
        if (std::abs(row.mean - tail.mean) <= z95 * row.standard_error)
          ++covered;
      }
    RouletteCoverage result{double(covered) / repetitions, double(solved) / double(drawn)};
    std::cout << label << ": exact E[N_L(" << tail_energy << ")] = " << tail.mean
              << " per cell; mean of " << repetitions << " estimates " << mean_of_estimates
              << "; coverage " << result.coverage << "; solved " << result.solved
              << " of the chains" << std::endl;
    return result;
  }

  /**
   * Russian roulette on the windowed tilt with its table from each
   * estimate's own pilot of 300 chains, as `count` does. On this short chain
   * the pilots put the largest r in the lowest bin of ln w, so the cap above
   * the peak solves every chain (measured: all of them): this part checks
   * the path through the pilot, not the thinning. The thinning is checked
   * next, on the tilt of
   * every cell by θ = 0.15 with a fixed table that leaves many chains with
   * events unsolved: r = 0.3 for ln w < −0.5, i.e. 4 barriers or fewer
   * (ln w = 0.6 k + 12 ln((1 + e^{−0.6})/2) = 0.6 k − 3.07 for k barriers),
   * and 1 above.
   */
  TEST(WeightedIds, RouletteKeepsTheEstimateUnbiasedAndItsIntervalsCover)
  {
    PotentialModel windows = chain_model();
    windows.set_tilt_window(4, 0.2);
    windows.set_tilt(0.5);
    const RouletteCoverage adaptive = roulette_coverage(windows, 300, Roulette(), "roulette from a pilot");
    EXPECT_GE(adaptive.coverage, 0.93);
    EXPECT_LE(adaptive.coverage, 0.97);

    PotentialModel flat = chain_model();
    flat.set_tilt(tilt);
    const RouletteCoverage fixed =
      roulette_coverage(flat, 0, Roulette({-0.5}, {0.3, 1.0}), "roulette with a fixed table");
    EXPECT_GE(fixed.coverage, 0.93);
    EXPECT_LE(fixed.coverage, 0.97);
    // The roulette must actually leave chains unsolved, or this checks nothing.
    EXPECT_LT(fixed.solved, 0.8);
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
