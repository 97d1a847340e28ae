// Tests of quantiles, weighted least squares, the finite-size extrapolation
// and the Lifshitz and Urbach fits, on synthetic (invented) data with known
// parameters and Gaussian noise from a seeded generator.
#include <alloyspec/analysis/spectral_analysis.h>
#include <alloyspec/analysis/tail_fits.h>

#include <gtest/gtest.h>

#include <cmath>
#include <iostream>
#include <vector>

namespace
{
  using namespace alloyspec;

  constexpr double kPi = 3.14159265358979323846;
  // Quantiles are found by bisection to ~1e-14 relative; tables give 9–10 digits.
  constexpr double kTable = 1e-8;
  // Noise-free data must be fitted to rounding.
  constexpr double kExactFit = 1e-10;

  double normal(SplitMix64 &rng)
  {
    const double u1 = 1.0 - rng.uniform(), u2 = rng.uniform();
    return std::sqrt(-2.0 * std::log(u1)) * std::cos(2.0 * kPi * u2);
  }

  /**
   * Coverage bounds for an interval with exact nominal coverage 0.95 checked
   * over @p n repetitions: ± 4 binomial standard deviations (common practice,
   * no source).
   */
  void expect_coverage(std::size_t covered, std::size_t n, const char *what)
  {
    const double p = double(covered) / double(n);
    const double sd = std::sqrt(0.95 * 0.05 / double(n));
    EXPECT_GE(p, 0.95 - 4 * sd) << what;
    EXPECT_LE(p, 0.95 + 4 * sd) << what;
    std::cout << what << " coverage of the 95% interval: " << p << '\n';
  }
} // namespace

TEST(Quantiles, MatchTables)
{
  // Normal: 1.959963984540054 (Abramowitz & Stegun table 26.5, to the digits given there).
  EXPECT_NEAR(normal_quantile(0.975), 1.959963984540054, kTable);
  EXPECT_NEAR(normal_quantile(0.5), 0.0, kTable);
  EXPECT_NEAR(normal_quantile(0.025), -1.959963984540054, kTable);
  // Student t, two-sided 95% (NIST/SEMATECH e-Handbook, table 1.3.6.7.2; closed form for ν = 1, 2:
  // tan(0.475π) and √(2/(α(2−α)))·(1−α) with α = 0.05).
  EXPECT_NEAR(student_t_quantile(0.975, 1), std::tan(0.475 * kPi), 1e-9);
  EXPECT_NEAR(student_t_quantile(0.975, 2), 4.302652729749464, kTable);
  EXPECT_NEAR(student_t_quantile(0.975, 10), 2.228138851986522, kTable);
  EXPECT_NEAR(student_t_quantile(0.975, 30), 2.042272456301238, kTable);
  EXPECT_NEAR(student_t_quantile(0.025, 5), -2.570581835636314, kTable);
  // Large ν approaches the normal quantile.
  EXPECT_NEAR(student_t_quantile(0.975, 100000), 1.96, 1e-4);
}

TEST(WeightedLeastSquares, ExactPolynomialAndErrors)
{
  std::vector<std::vector<double>> x;
  std::vector<double>              y, s;
  for (double t = -2; t <= 3; t += 0.5)
    {
      x.push_back({1.0, t, t * t});
      y.push_back(1.5 - 0.25 * t + 2.0 * t * t);
      s.push_back(0.1 + 0.01 * t * t);
    }
  const auto fit = weighted_least_squares(x, y, s);
  EXPECT_NEAR(fit.parameters[0], 1.5, kExactFit);
  EXPECT_NEAR(fit.parameters[1], -0.25, kExactFit);
  EXPECT_NEAR(fit.parameters[2], 2.0, kExactFit);
  EXPECT_NEAR(fit.chi_squared, 0.0, kExactFit);
  EXPECT_EQ(fit.dof, x.size() - 3);
  // Mean of n points with equal σ: variance σ²/n.
  const auto mean = weighted_least_squares({{1.0}, {1.0}, {1.0}, {1.0}}, {1, 2, 3, 4}, {2, 2, 2, 2});
  EXPECT_NEAR(mean.parameters[0], 2.5, kExactFit);
  EXPECT_NEAR(mean.covariance[0][0], 1.0, kExactFit);
  EXPECT_NEAR(mean.chi_squared, 5.0 / 4.0, kExactFit);
  EXPECT_THROW(weighted_least_squares({{1.0, 1.0}, {1.0, 1.0}}, {1, 2}, {1, 1}),
               std::invalid_argument);
  EXPECT_THROW(weighted_least_squares({{1.0}}, {1}, {0.0}), std::invalid_argument);
}

TEST(Extrapolation, RecoversLimitAndSurfaceTermWithNominalCoverage)
{
  // Synthetic N_L = N + c/L + noise, N = 0.8, c = −1.5 (invented values).
  const std::vector<double> sizes = {4, 6, 8, 12, 16, 24};
  const double              n_true = 0.8, c_true = -1.5;
  std::vector<double>       exact, errors;
  for (const double l : sizes)
    {
      exact.push_back(n_true + c_true / l);
      errors.push_back(0.002 * std::sqrt(l)); // larger boxes, fewer realisations
    }
  const auto clean = extrapolate_in_inverse_size(sizes, exact, errors);
  EXPECT_NEAR(clean.n_infinity, n_true, kExactFit);
  EXPECT_NEAR(clean.c, c_true, kExactFit);
  EXPECT_EQ(clean.dof, 4u);

  // Known σ: the interval ±1.96σ has exact 95% coverage for Gaussian noise.
  constexpr std::size_t kRepetitions = 4000;
  SplitMix64            rng(7);
  std::size_t           covered_n = 0, covered_c = 0, covered_quadratic = 0;
  double                chi2_sum = 0;
  const double          z        = normal_quantile(0.975);
  for (std::size_t rep = 0; rep < kRepetitions; ++rep)
    {
      std::vector<double> noisy, noisy_quadratic;
      for (std::size_t i = 0; i < sizes.size(); ++i)
        {
          const double e = errors[i] * normal(rng);
          noisy.push_back(exact[i] + e);
          noisy_quadratic.push_back(exact[i] + 3.0 / (sizes[i] * sizes[i]) + e);
        }
      const auto fit = extrapolate_in_inverse_size(sizes, noisy, errors);
      covered_n += std::abs(fit.n_infinity - n_true) <= z * fit.n_infinity_error;
      covered_c += std::abs(fit.c - c_true) <= z * fit.c_error;
      chi2_sum += fit.chi_squared;
      const auto q = extrapolate_in_inverse_size(sizes, noisy_quadratic, errors, true);
      covered_quadratic += std::abs(q.n_infinity - n_true) <= z * q.n_infinity_error;
    }
  expect_coverage(covered_n, kRepetitions, "N_infinity (N + c/L)");
  expect_coverage(covered_c, kRepetitions, "c (N + c/L)");
  expect_coverage(covered_quadratic, kRepetitions, "N_infinity (N + c/L + d/L^2)");
  // E[χ²] = ν = 4; the mean of 4000 has standard deviation √(2ν/4000) ≈ 0.045.
  EXPECT_NEAR(chi2_sum / kRepetitions, 4.0, 4 * 0.045);
}

TEST(Extrapolation, AgreementOfTwoLimits)
{
  Extrapolation a, b;
  a.n_infinity = 1.00, a.n_infinity_error = 0.01;
  b.n_infinity = 1.02, b.n_infinity_error = 0.01;
  EXPECT_TRUE(extrapolations_agree(a, b, 0.95)); // 0.02 ≤ 1.96·0.0141 = 0.0277
  b.n_infinity = 1.03;
  EXPECT_FALSE(extrapolations_agree(a, b, 0.95));
}

namespace
{
  /**
   * Synthetic IDS per cell with an exact Lifshitz law
   * y = ln(−ln n) = ln C + s·ln(E − E0), plus Gaussian noise of known σ_y on
   * y, given back as a standard error of n by the delta method.
   */
  std::vector<GridValue> lifshitz_data(SplitMix64 &rng, double slope, double sigma_y)
  {
    std::vector<GridValue> ids;
    const double           e0 = -1.0, log_c = 0.3;
    for (int k = 0; k <= 40; ++k)
      {
        const double e = -1.0 + 0.05 * k;
        GridValue    g{e, 0.0, 0.0, true, 0, 0};
        if (e > e0)
          {
            const double y = log_c + slope * std::log(e - e0) + sigma_y * normal(rng);
            g.mean           = std::exp(-std::exp(y));
            g.standard_error = sigma_y * g.mean * std::abs(std::log(g.mean));
            g.states_below   = 1000;
            g.realisations_with_states = 50;
          }
        ids.push_back(g);
      }
    return ids;
  }
} // namespace

TEST(LifshitzFit, RecoversKnownSlopeWithNominalCoverage)
{
  constexpr std::size_t kRepetitions = 2000;
  const double          slope = -1.5; // the 3D value −d/2
  SplitMix64            rng(31);
  std::size_t           covered = 0;
  for (std::size_t rep = 0; rep < kRepetitions; ++rep)
    {
      const auto ids = lifshitz_data(rng, slope, 0.05);
      // Window ends padded by 1e-9 so that rounding of the grid cannot drop them.
      const auto fit = lifshitz_fit(ids, -1.0, 3, 1.0, {-0.8 - 1e-9, 1e-9}, 0.02, 0.95);
      ASSERT_TRUE(fit.resolved) << fit.reason;
      ASSERT_EQ(fit.points, 17u);
      EXPECT_DOUBLE_EQ(fit.expected_slope, -1.5);
      covered += fit.slope_low <= slope && slope <= fit.slope_high;
    }
  expect_coverage(covered, kRepetitions, "Lifshitz slope");

  // Nearly noise-free data give the slope to the noise level.
  SplitMix64 quiet(1);
  const auto ids = lifshitz_data(quiet, -1.0, 1e-9);
  const auto fit = lifshitz_fit(ids, -1.0, 2, 1.0, {-0.8, 0.5}, 0.02, 0.95);
  EXPECT_NEAR(fit.slope, -1.0, 1e-7);
  EXPECT_DOUBLE_EQ(fit.expected_slope, -1.0); // −d/2 in 2D

  // A slope far from −d/2 is resolved but reported as not consistent.
  const auto shallow = lifshitz_fit(lifshitz_data(quiet, -0.5, 0.05), -1.0, 3, 1.0, {-0.8, 0.5},
                                    0.02, 0.95);
  EXPECT_TRUE(shallow.resolved);
  EXPECT_FALSE(shallow.consistent);
  EXPECT_NE(shallow.reason.find("asymptotic"), std::string::npos);
}

TEST(LifshitzFit, SaysWhenTheDataCannotResolveTheTail)
{
  SplitMix64 rng(5);
  auto       ids = lifshitz_data(rng, -1.5, 0.05);
  for (auto &g : ids)
    g.states_below = 8; // few states in all realisations together
  const auto few_states = lifshitz_fit(ids, -1.0, 3, 1.0, {-0.8, 0.0}, 0.02, 0.95);
  EXPECT_FALSE(few_states.resolved);
  EXPECT_NE(few_states.reason.find("cannot resolve"), std::string::npos);

  const auto narrow = lifshitz_fit(ids, -1.0, 3, 1.0, {-0.8, -0.75}, 0.02, 0.95);
  EXPECT_FALSE(narrow.resolved);
  EXPECT_NE(narrow.reason.find("usable grid points"), std::string::npos);

  // Automatic window: from the first energy with states to n ≥ fraction.
  auto       clean = lifshitz_data(rng, -1.5, 0.05);
  const auto autow = lifshitz_fit(clean, -1.0, 3, 1.0, {}, 0.02, 0.95);
  EXPECT_DOUBLE_EQ(autow.window_low, -0.95);
  EXPECT_GE(autow.window_high, autow.window_low);
}

TEST(UrbachFit, RecoversUrbachEnergy)
{
  // ρ(E) = A exp((E − E_ref)/E_U) with E_U = 0.2 and 2% noise (invented values).
  const double          e_u = 0.2, e_ref = 1.0;
  constexpr std::size_t kRepetitions = 1000;
  SplitMix64            rng(17);
  std::size_t           covered = 0;
  for (std::size_t rep = 0; rep < kRepetitions; ++rep)
    {
      std::vector<GridValue> dos;
      for (double e = 0.0; e <= 1.0 + 1e-12; e += 0.05)
        {
          const double rho = 3.0 * std::exp((e - e_ref) / e_u) * (1.0 + 0.02 * normal(rng));
          dos.push_back({e, rho, 0.02 * rho, true, 100, 40});
        }
      const auto fit = urbach_fit(dos, {0.0, 1.0}, 0.02, 0.95);
      ASSERT_TRUE(fit.resolved) << fit.reason;
      covered += fit.urbach_low <= e_u && e_u <= fit.urbach_high;
    }
  // The noise is on ρ, so the delta-method σ on ln ρ is only approximately
  // right at 2%: coverage is checked with the same ±4 sd bounds.
  expect_coverage(covered, kRepetitions, "Urbach energy");

  // An edge as sharp as the broadening kernel is not reported as resolved.
  std::vector<GridValue> sharp;
  for (double e = 0.0; e <= 1.0 + 1e-12; e += 0.05)
    sharp.push_back({e, std::exp((e - 1.0) / 0.05), 1e-3 * std::exp((e - 1.0) / 0.05), true, 0, 0});
  const auto fit = urbach_fit(sharp, {0.0, 1.0}, 0.1, 0.95);
  EXPECT_NEAR(fit.urbach_energy, 0.05, 1e-9);
  EXPECT_FALSE(fit.resolved);
  EXPECT_NE(fit.reason.find("broadening"), std::string::npos);
}
