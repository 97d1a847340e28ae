// The incomplete beta function and its inverse (Boost.Math behind
// single_site_laws.h) against test-side numerical quadrature of the defining
// integral, DLMF §8.17.1–8.17.2:
//   I_x(a, b) = B_x(a, b) / B(a, b),  B_x(a, b) = ∫_0^x t^{a-1} (1 − t)^{b-1} dt,
// with the symmetry I_x(a, b) = 1 − I_{1−x}(b, a) (DLMF §8.17.4).
#include <alloyspec/model/single_site_laws.h>

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <iostream>
#include <utility>
#include <vector>

namespace
{
  constexpr double pi = 3.141592653589793238462643383279502884;

  /**
   * Tail values (the side with x ≤ 1/2, where the quadrature below has full
   * relative precision): 1e-12 relative, i.e. about 4500 units in the last
   * place. The quadrature itself is good to a few units in the last place (the
   * rounding of about 10^4 positive terms); the rest is room for the library,
   * whose documented peak errors for large shapes are some hundreds of units
   * in the last place (from memory).
   */
  constexpr double tail_relative_tolerance = 1e-12;
  /** The value itself, absolutely: a few units in the last place of 1. */
  constexpr double absolute_tolerance = 5e-15;
  /**
   * u recovered from x = beta_quantile(a, b, u) by the quadrature. A relative
   * error e in x changes I_x relatively by e·x I_x'(x)/I_x, which is about a in
   * the lower tail (I_x ≈ x^a/(a B)) and at most about 50 at the points below
   * (shapes up to 50); so 1e-10 allows a relative error of 2e-12 in x.
   */
  constexpr double quantile_round_trip_tolerance = 1e-10;

  /** Gauss–Legendre nodes and weights on [−1, 1], by Newton's method on P_n. */
  std::vector<std::pair<double, double>> gauss_legendre_rule(const unsigned int n)
  {
    std::vector<std::pair<double, double>> rule;
    for (unsigned int i = 1; i <= n; ++i)
      {
        // Start near the i-th largest zero, cos(π(i − 1/4)/(n + 1/2)).
        double x = std::cos(pi * (i - 0.25) / (n + 0.5));
        double derivative = 1;
        for (int iteration = 0; iteration < 100; ++iteration)
          {
            // Bonnet: (k + 1) P_{k+1} = (2k + 1) x P_k − k P_{k−1}.
            double p_previous = 1, p = x;
            for (unsigned int k = 1; k < n; ++k)
              {
                const double p_next = ((2.0 * k + 1) * x * p - k * p_previous) / (k + 1);
                p_previous          = p;
                p                   = p_next;
              }
            // (1 − x²) P_n' = n (P_{n−1} − x P_n).
            derivative = n * (p_previous - x * p) / (1 - x * x);
            const double step = p / derivative;
            x -= step;
            if (std::abs(step) < 1e-16)
              break;
          }
        rule.emplace_back(x, 2.0 / ((1 - x * x) * derivative * derivative));
      }
    return rule;
  }

  /**
   * ∫_0^x t^{a−1}(1 − t)^{b−1} dt for 0 < x ≤ 1/2. The endpoint t = 0 is
   * singular for a < 1 and not smooth for non-integer a, so the interval is
   * cut into panels [x 2^{−k−1}, x 2^{−k}] (on each, t^{a−1} is analytic well
   * beyond the panel, so Gauss–Legendre converges geometrically), each split
   * into equal sub-panels for the steep (1 − t)^{b−1} of large b. Below
   * δ = x 2^{−120} the integral is δ^a/a (1 + O(δ)).
   */
  double lower_integral(const double a, const double b, const double x)
  {
    static const auto  rule        = gauss_legendre_rule(20);
    constexpr int      halvings    = 120;
    constexpr int      sub_panels  = 8;
    const double       delta       = std::ldexp(x, -halvings);
    double             sum         = std::pow(delta, a) / a;
    for (int k = halvings - 1; k >= 0; --k)
      {
        const double low = std::ldexp(x, -k - 1), high = std::ldexp(x, -k);
        const double h   = (high - low) / sub_panels;
        for (int s = 0; s < sub_panels; ++s)
          {
            const double centre = low + (s + 0.5) * h, half = 0.5 * h;
            double       panel  = 0;
            for (const auto &[node, weight] : rule)
              {
                const double t = centre + half * node;
                panel += weight * std::pow(t, a - 1) * std::pow(1 - t, b - 1);
              }
            sum += half * panel;
          }
      }
    return sum;
  }

  /** I_x and 1 − I_x by quadrature, each computed on its own tail (no cancellation). */
  struct Reference
  {
    double value, complement;
  };

  Reference incomplete_beta_by_quadrature(const double a, const double b, const double x)
  {
    const double complete = lower_integral(a, b, 0.5) + lower_integral(b, a, 0.5);
    if (x <= 0.5)
      {
        const double value = lower_integral(a, b, x) / complete;
        return {value, 1 - value};
      }
    const double complement = lower_integral(b, a, 1 - x) / complete;
    return {1 - complement, complement};
  }

  // Shapes across the range the beta law accepts (0.1 to 1000 is the allowed
  // range; the largest here keep the quadrature cheap), with singular and
  // smooth ends, and x from the deep lower tail to near 1.
  const std::vector<std::pair<double, double>> shapes = {
    {0.3, 7.0}, {0.5, 0.5}, {2.5, 1.7}, {1.0, 3.5}, {12.0, 30.0}, {0.1, 2.0}, {4.0, 0.2}, {50.0, 50.0}};
  const std::vector<double> points = {1e-6, 0.05, 0.3, 0.5, 0.77, 0.999};
} // namespace

TEST(SpecialFunctionsQuadrature, GaussLegendreRuleIsExactForPolynomials)
{
  // A 20-point rule integrates t^k exactly for k ≤ 39: ∫_{−1}^{1} t^k = 2/(k + 1) for even k.
  const auto rule = gauss_legendre_rule(20);
  for (int k = 0; k <= 38; k += 2)
    {
      double sum = 0;
      for (const auto &[node, weight] : rule)
        sum += weight * std::pow(node, k);
      EXPECT_NEAR(sum, 2.0 / (k + 1), 1e-14) << "k = " << k;
    }
}

TEST(SpecialFunctionsQuadrature, IncompleteBetaAgainstTheIntegral)
{
  unsigned int compared = 0;
  double       worst_tail = 0;
  for (const auto &[a, b] : shapes)
    for (const double x : points)
      {
        const Reference reference = incomplete_beta_by_quadrature(a, b, x);
        const double    value     = alloyspec::incomplete_beta_ratio(a, b, x);
        EXPECT_NEAR(value, reference.value, absolute_tolerance)
          << "I_" << x << "(" << a << ", " << b << ")";
        // The tail on the side of x ≤ 1/2, relatively; for x > 1/2 through the
        // symmetry I_x(a, b) = 1 − I_{1−x}(b, a).
        const double tail = x <= 0.5 ? value : alloyspec::incomplete_beta_ratio(b, a, 1 - x);
        const double tail_reference = x <= 0.5 ? reference.value : reference.complement;
        ASSERT_GT(tail_reference, 0.0);
        const double relative = std::abs(tail / tail_reference - 1);
        worst_tail            = std::max(worst_tail, relative);
        EXPECT_LE(relative, tail_relative_tolerance)
          << "tail at x = " << x << ", a = " << a << ", b = " << b << ": " << tail << " vs "
          << tail_reference;
        ++compared;
      }
  EXPECT_GE(compared, 20u);
  std::cout << "incomplete beta: " << compared << " points, largest relative tail error "
            << worst_tail << '\n';
}

TEST(SpecialFunctionsQuadrature, BetaQuantileInvertsTheIntegral)
{
  // x = beta_quantile(a, b, u) must give back u under the quadrature of I_x.
  unsigned int compared = 0;
  double       worst    = 0;
  // Besides the shapes above, a = 1/2 with b = 2 and 3, where Boost 1.74's
  // ibeta_inv gives up below u ≈ 1e-5 (measured) and the bisection takes over.
  auto quantile_shapes = shapes;
  quantile_shapes.insert(quantile_shapes.end(), {{0.5, 2.0}, {0.5, 3.0}, {2.0, 0.5}});
  for (const auto &[a, b] : quantile_shapes)
    for (const double u : {1e-12, 1e-9, 1e-6, 0.01, 0.25, 0.5, 0.9})
      {
        const double x = alloyspec::beta_quantile(a, b, u);
        ASSERT_GT(x, 0.0);
        ASSERT_LT(x, 1.0);
        const Reference reference = incomplete_beta_by_quadrature(a, b, x);
        // Each side relative to its own tail (1 − u is exact for u ≥ 1/2).
        const double relative = u <= 0.5 ? std::abs(reference.value / u - 1)
                                         : std::abs(reference.complement / (1 - u) - 1);
        worst = std::max(worst, relative);
        EXPECT_LE(relative, quantile_round_trip_tolerance)
          << "u = " << u << ", a = " << a << ", b = " << b;
        ++compared;
      }
  EXPECT_GE(compared, 20u);
  std::cout << "beta quantile: " << compared << " points, largest relative error of u "
            << worst << '\n';
}
