// Unit tests of the shaped tilt (tilt_profile.h, PotentialModel::set_tilt_shape):
// the relative tilts against cell masses of the sine mode integrated in the
// test by Simpson's rule, the log weight against the product of closed-form
// Bernoulli ratios written out cell by cell, the windows' mixture weight
// written out from its definition, the cell means against the closed-form
// tilted means, and the cross-entropy update against its defining equation.
#include <alloyspec/model/lattice.h>
#include <alloyspec/model/potential_model.h>
#include <alloyspec/model/tilt_choice.h>
#include <alloyspec/model/tilt_profile.h>

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <set>
#include <vector>

namespace
{
  using namespace alloyspec;

  /** Simpson's rule with 2000 panels on a smooth integrand: error ~1e-14 (common practice, no source). */
  constexpr double profile_tolerance = 1e-12;
  /** Only rounding differs between the library's sums and the ones written out here (common practice, no source). */
  constexpr double weight_tolerance = 1e-11;
  /** Sample means within 4 standard errors (common practice, no source; a correct sampler fails ~6e-5 per check). */
  constexpr double allowed_standard_errors = 4.0;

  const double pi = std::acos(-1.0);

  /** ∫_k^{k+1} sin²(πx/s) dx by composite Simpson, scaled by its largest value over k. */
  std::vector<double> sine_mode_masses(const unsigned int s)
  {
    std::vector<double> m(s);
    for (unsigned int k = 0; k < s; ++k)
      {
        constexpr int panels = 2000;
        const double  h      = 1.0 / panels;
        double        sum    = 0;
        for (int i = 0; i <= panels; ++i)
          {
            const double x = k + i * h, f = std::pow(std::sin(pi * x / s), 2);
            sum += f * (i == 0 || i == panels ? 1 : (i % 2 ? 4 : 2));
          }
        m[k] = sum * h / 3;
      }
    const double top = *std::max_element(m.begin(), m.end());
    for (double &x : m)
      x /= top;
    return m;
  }

  /** φ of cell n of a box (or window) of @p extent cells: the product of the 1D masses. */
  double written_out_profile(const std::vector<unsigned int> &extent, std::size_t n)
  {
    double phi = 1;
    for (const unsigned int s : extent)
      {
        phi *= sine_mode_masses(s)[n % s];
        n /= s;
      }
    return phi;
  }

  /** The same for a flat tilt: 1. */
  double written_out_profile(const std::vector<unsigned int> &extent, std::size_t n, TiltShape shape)
  {
    return shape == TiltShape::flat ? 1.0 : written_out_profile(extent, n);
  }

  // An invented binary alloy: barriers of height 2 with probability 0.3, wells at 0.
  constexpr double concentration = 0.3, barrier = 2.0;

  /** Closed form of the Bernoulli law tilted by t: P_t(barrier) = c e^{−t a}/(c e^{−t a} + 1 − c). */
  double tilted_barrier_probability(const double t)
  {
    return concentration * std::exp(-t * barrier) /
           (concentration * std::exp(-t * barrier) + 1 - concentration);
  }

  /** ln p(q)/p_t(q) of one cell value, from the closed form above. */
  double cell_log_ratio(const double q, const double t)
  {
    const double c_t = tilted_barrier_probability(t);
    return q == barrier ? std::log(concentration / c_t) : std::log((1 - concentration) / (1 - c_t));
  }
} // namespace

TEST(TiltProfile, LowestModeIsTheScaledCellMassOfTheSineMode)
{
  for (const unsigned int s : {1u, 2u, 5u, 6u, 7u, 30u})
    {
      const TiltProfile   profile({s}, TiltShape::lowest_mode);
      const auto          expected = sine_mode_masses(s);
      for (unsigned int k = 0; k < s; ++k)
        EXPECT_NEAR(profile.value(k), expected[k], profile_tolerance) << "s = " << s << ", k = " << k;
      EXPECT_EQ(profile.value((s - 1) / 2), 1.0);
    }
  // 3D: the product of the 1D masses; mirror images and exchanged directions
  // of equal extent share a level (10 for 6³: multisets of 3 of the 3 folded
  // indices), directions of other extents do not.
  for (const auto &extent : {std::vector<unsigned int>{6, 6, 6}, std::vector<unsigned int>{4, 5, 6}})
    {
      const TiltProfile profile(extent, TiltShape::lowest_mode);
      std::size_t       cells = 1;
      for (const unsigned int s : extent)
        cells *= s;
      ASSERT_EQ(profile.size(), cells);
      std::size_t total = 0;
      for (const std::size_t m : profile.multiplicities())
        total += m;
      EXPECT_EQ(total, cells);
      for (std::size_t n = 0; n < cells; ++n)
        EXPECT_NEAR(profile.value(n), written_out_profile(extent, n), profile_tolerance);
      EXPECT_EQ(profile.levels().size(), extent[0] == extent[1] ? 10u : 2u * 3u * 3u);
    }
}

TEST(TiltProfile, FlatIsOneEverywhere)
{
  const TiltProfile profile({4, 3}, TiltShape::flat);
  ASSERT_EQ(profile.levels().size(), 1u);
  for (std::size_t n = 0; n < 12; ++n)
    EXPECT_EQ(profile.value(n), 1.0);
}

/** ln w of a box tilted by θ φ_n is Σ_n ln p(q_n)/p_{θφ_n}(q_n), written out with the closed form. */
TEST(ShapedTilt, BoxLogWeightIsTheSumOfCellRatios)
{
  const std::vector<unsigned int> cells{4, 5, 3};
  const Lattice                   lattice(cells);
  const double                    theta = 1.2;
  PotentialModel                  model;
  model.set_law(make_bernoulli_law(concentration, barrier, 0.0), lattice);
  model.set_tilt_shape(TiltShape::lowest_mode);
  model.set_tilt(theta);
  for (std::uint64_t r = 0; r < 30; ++r)
    {
      const auto q        = model.cell_values(7, r);
      double     expected = 0;
      for (std::size_t n = 0; n < q.size(); ++n)
        expected += cell_log_ratio(q[n], theta * written_out_profile(cells, n));
      EXPECT_NEAR(model.log_weight(q), expected, weight_tolerance);
    }
}

/**
 * Windows with a shaped tilt: w = 1/(α + (1−α)/K Σ_c Π_{j} p_{θφ_j}(q_{c+j})/p(q_{c+j})),
 * j the cell's position inside window c, written out over the corners that
 * keep the window inside the box.
 */
TEST(ShapedTilt, WindowLogWeightIsTheMixtureWrittenOut)
{
  for (const auto &cells : {std::vector<unsigned int>{12}, std::vector<unsigned int>{6, 5}})
    {
      const unsigned int edge = 4;
      const double       theta = 0.9, alpha = 0.3;
      const Lattice      lattice(cells);
      PotentialModel     model;
      model.set_law(make_bernoulli_law(concentration, barrier, 0.0), lattice);
      model.set_tilt_shape(TiltShape::lowest_mode);
      model.set_tilt_window(edge, alpha);
      model.set_tilt(theta);
      std::vector<unsigned int> extent;
      for (const unsigned int l : cells)
        extent.push_back(std::min(edge, l));
      for (std::uint64_t r = 0; r < 20; ++r)
        {
          const auto  q   = model.cell_values(11, r);
          double      sum = 0;
          std::size_t k   = 0;
          for (std::size_t c = 0; c < lattice.n_cells(); ++c)
            {
              const auto corner = lattice.cell_coordinates(c);
              bool       fits   = true;
              for (std::size_t i = 0; i < cells.size(); ++i)
                fits = fits && corner[i] + extent[i] <= cells[i];
              if (!fits)
                continue;
              ++k;
              double log_product = 0;
              for (std::size_t m = 0; m < lattice.n_cells(); ++m)
                {
                  const auto  x      = lattice.cell_coordinates(m);
                  bool        inside = true;
                  std::size_t j = 0, stride = 1;
                  for (std::size_t i = 0; i < cells.size(); ++i)
                    {
                      inside = inside && x[i] >= corner[i] && x[i] < corner[i] + extent[i];
                      j += (x[i] - corner[i]) * stride;
                      stride *= extent[i];
                    }
                  if (inside)
                    log_product -= cell_log_ratio(q[m], theta * written_out_profile(extent, j));
                }
              sum += std::exp(log_product);
            }
          const double expected = -std::log(alpha + (1 - alpha) * sum / double(k));
          EXPECT_NEAR(model.log_weight(q), expected, weight_tolerance) << cells.size() << "D";
        }
    }
}

/**
 * Cell n of a shaped box follows the Bernoulli law tilted by θ φ_n: its sample
 * mean agrees with the closed-form mean a·P_{θφ_n}(barrier) (centre and end
 * cells of a 9-cell chain), and E_q[w] = 1.
 */
TEST(ShapedTilt, CellMeansFollowTheProfileAndWeightsAverageToOne)
{
  const unsigned int cells = 9;
  const double       theta = 1.5;
  const Lattice      lattice(std::vector<unsigned int>{cells});
  PotentialModel     model;
  model.set_law(make_bernoulli_law(concentration, barrier, 0.0), lattice);
  model.set_tilt_shape(TiltShape::lowest_mode);
  model.set_tilt(theta);
  constexpr std::size_t realisations = 40000;
  std::vector<double>   sum(cells), sum_sq(cells);
  double                w = 0, w_sq = 0;
  for (std::uint64_t r = 0; r < realisations; ++r)
    {
      const auto q = model.cell_values(5, r);
      for (unsigned int n = 0; n < cells; ++n)
        sum[n] += q[n], sum_sq[n] += q[n] * q[n];
      const double weight = std::exp(model.log_weight(q));
      w += weight, w_sq += weight * weight;
    }
  const double n = realisations;
  for (const unsigned int cell : {0u, 2u, 4u, 8u})
    {
      const double mean = sum[cell] / n, se = std::sqrt((sum_sq[cell] / n - mean * mean) / n);
      const double expected =
        barrier * tilted_barrier_probability(theta * written_out_profile({cells}, cell));
      EXPECT_NEAR(mean, expected, allowed_standard_errors * se) << "cell " << cell;
    }
  const double mw = w / n, wse = std::sqrt((w_sq / n - mw * mw) / n);
  EXPECT_NEAR(mw, 1.0, allowed_standard_errors * wse);
}

TEST(ShapedTilt, ZeroTiltIsPlainSampling)
{
  const Lattice  lattice(std::vector<unsigned int>{5, 5});
  PotentialModel plain, shaped;
  plain.set_law(make_bernoulli_law(concentration, barrier, 0.0), lattice);
  shaped.set_law(make_bernoulli_law(concentration, barrier, 0.0), lattice);
  shaped.set_tilt_shape(TiltShape::lowest_mode);
  shaped.set_tilt(0.0);
  for (std::uint64_t r = 0; r < 10; ++r)
    {
      const auto q = shaped.cell_values(3, r);
      EXPECT_EQ(q, plain.cell_values(3, r));
      EXPECT_EQ(shaped.log_weight(q), 0.0);
    }
}

/**
 * The cross-entropy update with a profile solves its defining equation
 * Σ_l c_l φ_l E_{θφ_l}[q] / Σ_l c_l φ_l = Σ_r w_r q̄_{φ,r} / Σ_r w_r, here
 * with the closed-form Bernoulli means; and a flat profile gives E_θ[q] =
 * the weighted mean.
 */
TEST(ShapedTilt, CrossEntropyUpdateSolvesItsEquation)
{
  const auto  law = make_bernoulli_law(concentration, barrier, 0.0);
  const TiltProfile profile({6, 6, 6}, TiltShape::lowest_mode);
  // Invented elite: profile means below the law's mean 0.6, unequal weights.
  const std::vector<PilotSample> elite{{0.21, -1.0}, {0.30, -0.2}, {0.12, -2.5}, {0.25, 0.0}};
  double                         sw = 0, swq = 0;
  for (const auto &s : elite)
    sw += std::exp(s.log_weight), swq += std::exp(s.log_weight) * s.mean_cell_value;
  const double wanted = swq / sw;
  const double theta  = cross_entropy_tilt(*law, elite, 1e6, &profile);
  double       sum = 0, norm = 0;
  for (std::size_t l = 0; l < profile.levels().size(); ++l)
    {
      const double weight = double(profile.multiplicities()[l]) * profile.levels()[l];
      sum += weight * barrier * tilted_barrier_probability(theta * profile.levels()[l]);
      norm += weight;
    }
  EXPECT_NEAR(sum / norm, wanted, 1e-9);
  const double flat = cross_entropy_tilt(*law, elite, 1e6);
  EXPECT_NEAR(barrier * tilted_barrier_probability(flat), wanted, 1e-9);
  // The shaped tilt must reach further in the centre than the flat one to
  // move the weighted mean as far.
  EXPECT_GT(theta, flat);
}

/**
 * The update for tilt windows maximises the cross-entropy objective of the
 * mixture, F(θ) = Σ_r w_r ln(α + (1−α)/K Σ_c e^{−ℓ_rc(θ)}) (= Σ_r w_r ln q_θ/p),
 * ℓ_rc(θ) = Σ_j [θφ_j q_{c+j} + ln M(θφ_j)], written out here with the
 * closed-form Bernoulli ln M: F must not rise on either side of the result.
 */
TEST(ShapedTilt, WindowUpdateMaximisesTheMixtureObjective)
{
  const unsigned int cells = 40, edge = 8;
  const double       alpha = 0.2;
  const Lattice      lattice(std::vector<unsigned int>{cells});
  const auto         law = make_bernoulli_law(concentration, barrier, 0.0);
  for (const TiltShape shape : {TiltShape::flat, TiltShape::lowest_mode})
    {
      PotentialModel model;
      model.set_law(make_bernoulli_law(concentration, barrier, 0.0), lattice);
      model.set_tilt_shape(shape);
      model.set_tilt_window(edge, alpha);
      // An invented elite: plain chains whose lowest window mean is small.
      std::vector<WindowPilotSample>   elite;
      std::vector<std::vector<double>> values;
      for (std::uint64_t r = 0; elite.size() < 12 && r < 100000; ++r)
        {
          const auto q     = model.cell_values(21, r);
          const auto means = model.window_means(q);
          if (*std::min_element(means.begin(), means.end()) < 0.05)
            elite.push_back({means, 0.0}), values.push_back(q);
        }
      ASSERT_EQ(elite.size(), 12u);
      const TiltProfile   profile({edge}, shape);
      const double        theta = cross_entropy_window_tilt(*law, elite, profile, alpha, 0.0, 1e6);
      std::vector<double> phi(edge);
      for (unsigned int j = 0; j < edge; ++j)
        phi[j] = written_out_profile({edge}, j, shape);
      const auto objective = [&](const double t) {
        double f = 0;
        for (const auto &q : values)
          {
            double sum = 0;
            for (unsigned int c = 0; c + edge <= cells; ++c)
              {
                double ell = 0;
                for (unsigned int j = 0; j < edge; ++j)
                  {
                    const double tj = t * phi[j];
                    ell += tj * q[c + j] + std::log(concentration * std::exp(-tj * barrier) +
                                                    1 - concentration);
                  }
                sum += std::exp(-ell);
              }
            f += std::log(alpha + (1 - alpha) * sum / double(cells - edge + 1));
          }
        return f;
      };
      EXPECT_GT(theta, 0.0);
      for (const double step : {1e-3, 1e-2, 1e-1})
        {
          EXPECT_GE(objective(theta), objective(theta * (1 + step)) - 1e-12) << tilt_shape_name(shape);
          EXPECT_GE(objective(theta), objective(theta * (1 - step)) - 1e-12) << tilt_shape_name(shape);
        }
    }
}

/** window_means() against the window's weighted mean written out. */
TEST(ShapedTilt, WindowMeansAreTheWeightedCellMeans)
{
  const std::vector<unsigned int> cells{7, 6};
  const Lattice                   lattice(cells);
  PotentialModel                  model;
  model.set_law(make_bernoulli_law(concentration, barrier, 0.0), lattice);
  model.set_tilt_shape(TiltShape::lowest_mode);
  model.set_tilt_window(3, 0.2);
  const auto q     = model.cell_values(2, 9);
  const auto means = model.window_means(q);
  ASSERT_EQ(means.size(), std::size_t(5 * 4));
  for (unsigned int y = 0; y < 4; ++y)
    for (unsigned int x = 0; x < 5; ++x)
      {
        double sum = 0, norm = 0;
        for (unsigned int j = 0; j < 9; ++j)
          {
            const double phi = written_out_profile({3, 3}, j);
            sum += phi * q[(x + j % 3) + 7 * (y + j / 3)];
            norm += phi;
          }
        EXPECT_NEAR(means[x + 5 * y], sum / norm, 1e-14);
      }
}

/**
 * `tilt window = auto`: the smallest s with dπ²/(s a)² ≤ E − E₀ (the lowest
 * Dirichlet level of an empty cube of edge s a is dπ²/(s a)², a closed form).
 */
TEST(ShapedTilt, AutomaticWindowIsTheSmallestEmptyCubeBelowTheTarget)
{
  const double pi = std::acos(-1.0);
  EXPECT_EQ(window_for_energy(pi * pi / 900.0, 1.0, 1), 30u);
  EXPECT_EQ(window_for_energy(pi * pi / 900.0 * 0.999, 1.0, 1), 31u);
  EXPECT_EQ(window_for_energy(0.01, 1.0, 1), 32u); // π/0.1 = 31.4
  EXPECT_EQ(window_for_energy(3 * pi * pi / 36.0, 1.0, 3), 6u);
  EXPECT_EQ(window_for_energy(1.07, 1.0, 3), 6u); // π√(3/1.07) = 5.26
  EXPECT_EQ(window_for_energy(1.07, 2.0, 3), 3u);
  EXPECT_EQ(window_for_energy(100.0, 1.0, 2), 1u);
}
