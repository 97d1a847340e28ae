// Unit tests of the localised tilt (tilt_window.h): the mixture weight against
// a test-side sum over the components written from the definition, the
// windows' cells, the component frequencies, θ = 0, and the cell values'
// mean under the mixture against its closed form.
#include <alloyspec/core/errors.h>
#include <alloyspec/model/lattice.h>
#include <alloyspec/model/potential_model.h>
#include <alloyspec/model/random_stream.h>
#include <alloyspec/model/tilt_window.h>

#include <gtest/gtest.h>

#include <cmath>
#include <vector>

namespace
{
  using namespace alloyspec;

  /** Only rounding differs between the log-sum-exp and the direct sum (common practice, no source). */
  constexpr double weight_tolerance = 1e-12;
  /** Sample means within 4 standard errors (common practice, no source; a correct sampler fails ~6e-5 per check). */
  constexpr double allowed_standard_errors = 4.0;

  /**
   * The mixture ratio straight from its definition: p/q = 1/(α + (1−α)/K Σ_c Π_{n∈B_c} r_n),
   * r_n = p_θ(q_n)/p(q_n), over every corner c whose window of min(ℓ, L_i) cells per
   * direction lies inside the box (K of them), B_c the cells of that window.
   */
  double direct_log_weight(const std::vector<unsigned int> &cells, unsigned int edge, double alpha,
                           const std::vector<double> &ratio, std::size_t &windows)
  {
    const Lattice     lattice(cells);
    const std::size_t n = lattice.n_cells();
    double            sum = 0;
    windows             = 0;
    for (std::size_t c = 0; c < n; ++c)
      {
        const auto corner = lattice.cell_coordinates(c);
        bool       fits   = true;
        for (std::size_t i = 0; i < cells.size(); ++i)
          fits = fits && corner[i] + std::min(edge, cells[i]) <= cells[i];
        if (!fits)
          continue;
        ++windows;
        double product = 1;
        for (std::size_t m = 0; m < n; ++m)
          {
            const auto x      = lattice.cell_coordinates(m);
            bool       inside = true;
            for (std::size_t i = 0; i < cells.size(); ++i)
              inside = inside && x[i] >= corner[i] && x[i] < corner[i] + std::min(edge, cells[i]);
            if (inside)
              product *= ratio[m];
          }
        sum += product;
      }
    return -std::log(alpha + (1 - alpha) * sum / double(windows));
  }
} // namespace

TEST(TiltWindow, WeightAgreesWithTheMixtureDensityWrittenOut)
{
  for (const auto &cells : {std::vector<unsigned int>{12}, std::vector<unsigned int>{4, 3},
                            std::vector<unsigned int>{3, 4, 2}})
    for (const unsigned int edge : {1u, 2u, 3u, 5u})
      {
        const Lattice lattice(cells);
        std::vector<double> t(lattice.n_cells()), ratio(t.size());
        for (std::size_t m = 0; m < t.size(); ++m)
          {
            t[m]     = 1.3 * (uniform_open01(5, edge, m) - 0.4); // invented log ratios ln p/p_θ
            ratio[m] = std::exp(-t[m]);
          }
        const TiltWindows windows(cells, edge, 0.3);
        std::size_t       count = 0;
        EXPECT_NEAR(windows.log_weight(t), direct_log_weight(cells, edge, 0.3, ratio, count),
                    weight_tolerance)
          << cells.size() << "D, edge " << edge;
        EXPECT_EQ(windows.count(), count);
        // Every window holds min(ℓ, L_i) cells per direction.
        std::size_t expected = 1;
        for (const unsigned int l : cells)
          expected *= std::min(edge, l);
        for (std::size_t c = 0; c < windows.count(); ++c)
          {
            std::size_t inside = 0;
            for (std::size_t m = 0; m < lattice.n_cells(); ++m)
              inside += windows.contains(c, m);
            EXPECT_EQ(inside, expected);
          }
      }
}

TEST(TiltWindow, WeightIsBoundedByTheUntiltedShare)
{
  const TiltWindows windows({200}, 20, 0.25);
  std::vector<double> t(200, -3.0); // every cell far likelier under the tilt
  EXPECT_LE(windows.log_weight(t), -std::log(0.25) + weight_tolerance);
  std::fill(t.begin(), t.end(), 50.0); // far less likely: the weight tends to 1/α
  EXPECT_NEAR(windows.log_weight(t), -std::log(0.25), 1e-12);
}

TEST(TiltWindow, ZeroTiltIsPlainSampling)
{
  const Lattice  lattice(std::vector<unsigned int>{30});
  PotentialModel plain, windowed;
  plain.set_law(make_bernoulli_law(0.5, 4.0, 0.0), lattice);
  windowed.set_law(make_bernoulli_law(0.5, 4.0, 0.0), lattice);
  windowed.set_tilt_window(6, 0.2);
  windowed.set_tilt(0.0);
  for (std::uint64_t r = 0; r < 20; ++r)
    {
      const auto q = windowed.cell_values(3, r);
      EXPECT_EQ(q, plain.cell_values(3, r));
      EXPECT_EQ(windowed.log_weight(q), 0.0);
    }
}

/**
 * Cell values under the mixture: E[q_n] = α μ + (1−α)[f μ_θ + (1 − f) μ], f the
 * share of the K = L − ℓ + 1 windows that contain cell n (for n = 7, ℓ = 5:
 * corners 3 to 7, so f = 5/36), with μ and μ_θ the law's and the tilted law's
 * means (closed forms of the Bernoulli law). Also E_q[w] = 1.
 */
TEST(TiltWindow, CellMeansAndWeightsMatchTheMixture)
{
  const double   c = 0.5, a = 4.0, theta = 0.5, alpha = 0.2;
  const unsigned int edge = 5, cells = 40;
  const Lattice  lattice(std::vector<unsigned int>{cells});
  PotentialModel model;
  model.set_law(make_bernoulli_law(c, a, 0.0), lattice);
  model.set_tilt_window(edge, alpha);
  model.set_tilt(theta);
  const double mu       = c * a;
  const double c_theta  = c * std::exp(-theta * a) / (c * std::exp(-theta * a) + 1 - c);
  const double mu_theta = c_theta * a;
  const double f        = 5.0 / double(cells - edge + 1);
  const double expected = alpha * mu + (1 - alpha) * (f * mu_theta + (1 - f) * mu);
  constexpr std::size_t realisations = 40000;
  double sum = 0, sum_sq = 0, w = 0, w_sq = 0;
  for (std::uint64_t r = 0; r < realisations; ++r)
    {
      const auto   q = model.cell_values(9, r);
      const double x = q[7];
      sum += x, sum_sq += x * x;
      const double weight = std::exp(model.log_weight(q));
      EXPECT_LE(weight, 1 / alpha * (1 + 1e-12));
      w += weight, w_sq += weight * weight;
    }
  const double n = realisations, mean = sum / n, se = std::sqrt((sum_sq / n - mean * mean) / n);
  EXPECT_NEAR(mean, expected, allowed_standard_errors * se);
  const double mw = w / n, wse = std::sqrt((w_sq / n - mw * mw) / n);
  EXPECT_NEAR(mw, 1.0, allowed_standard_errors * wse);
}
