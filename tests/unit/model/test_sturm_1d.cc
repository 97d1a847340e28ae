// Tests of the exact 1D reference spectra in tests/support/sturm_1d.h.
#include "sturm_1d.h"

#include <gtest/gtest.h>

#include <cmath>
#include <functional>
#include <random>
#include <vector>

namespace
{
  using alloyspec::Boundary;
  using alloyspec::testing::count_below;
  using alloyspec::testing::lowest_eigenvalues;

  constexpr double pi = 3.14159265358979323846;

  // Closed-form spectra are reproduced to rounding level; 1e-12 relative leaves
  // room for the accumulated phase error over a few dozen cells.
  constexpr double kClosedFormTolerance = 1e-12;
  // Roots of the secular equation are themselves bisected in double precision
  // from a function that loses a few digits to cancellation near its root.
  constexpr double kSecularTolerance = 1e-11;

  double scale(const double lambda) { return std::max(1.0, std::abs(lambda)); }

  /** sin(√μ x)/√μ, continued through μ = 0 (x) to μ < 0 (sinh(√−μ x)/√−μ). */
  double s_fn(const double mu, const double x)
  {
    if (mu > 0.0)
      return std::sin(std::sqrt(mu) * x) / std::sqrt(mu);
    if (mu < 0.0)
      return std::sinh(std::sqrt(-mu) * x) / std::sqrt(-mu);
    return x;
  }

  /** cos(√μ x), continued to cosh(√−μ x); note d/dx c = −μ s, d/dx s = c. */
  double c_fn(const double mu, const double x)
  {
    if (mu > 0.0)
      return std::cos(std::sqrt(mu) * x);
    if (mu < 0.0)
      return std::cosh(std::sqrt(-mu) * x);
    return 1.0;
  }

  /** Bisects a sign change of f in [lo, hi] to double precision. */
  double bisect_root(const std::function<double(double)> &f, double lo, double hi)
  {
    const bool negative_at_lo = f(lo) < 0.0;
    for (int i = 0; i < 200; ++i)
      {
        const double mid = 0.5 * (lo + hi);
        if (!(mid > lo && mid < hi))
          break;
        if ((f(mid) < 0.0) == negative_at_lo)
          lo = mid;
        else
          hi = mid;
      }
    return 0.5 * (lo + hi);
  }

  /** All sign changes of f on a grid of step h in [from, to], each bisected. */
  std::vector<double> roots(const std::function<double(double)> &f, const double from,
                            const double to, const double h)
  {
    std::vector<double> found;
    double              previous = f(from);
    for (double x = from + h; x <= to; x += h)
      {
        const double value = f(x);
        if ((value < 0.0) != (previous < 0.0))
          found.push_back(bisect_root(f, x - h, x));
        previous = value;
      }
    return found;
  }
} // namespace

TEST(Sturm1d, ConstantPotentialDirichlet)
{
  // -u'' + q u = λu, u(0) = u(ℓ) = 0: λ_n = π² n²/ℓ² + q, n ≥ 1.
  for (const double q : {0.0, 1.7, -3.25})
    {
      const double              a = 0.8;
      const std::vector<double> v(7, q);
      const double              length = 7 * a;
      const auto                lambda = lowest_eigenvalues(v, a, Boundary::dirichlet, 15);
      for (std::size_t i = 0; i < lambda.size(); ++i)
        {
          const double n     = double(i + 1);
          const double exact = pi * pi * n * n / (length * length) + q;
          EXPECT_NEAR(lambda[i], exact, kClosedFormTolerance * scale(exact)) << "q=" << q << " n=" << n;
        }
    }
}

TEST(Sturm1d, ConstantPotentialNeumann)
{
  // u'(0) = u'(ℓ) = 0: λ_n = π² n²/ℓ² + q, n ≥ 0 (the constant is the ground state).
  for (const double q : {0.0, 2.5, -1.125})
    {
      const double              a = 1.3;
      const std::vector<double> v(11, q);
      const double              length = 11 * a;
      const auto                lambda = lowest_eigenvalues(v, a, Boundary::neumann, 15);
      for (std::size_t i = 0; i < lambda.size(); ++i)
        {
          const double n     = double(i);
          const double exact = pi * pi * n * n / (length * length) + q;
          EXPECT_NEAR(lambda[i], exact, kClosedFormTolerance * scale(exact)) << "q=" << q << " n=" << n;
        }
    }
}

TEST(Sturm1d, CountingRuleAtHalfIntegerPhase)
{
  // For v = 0, λ = k² with kℓ = (m + 1/2)π the Neumann shooting solution cos(kx)
  // vanishes at the right end: there are m + 1 Neumann eigenvalues below λ
  // (n = 0..m) and m Dirichlet ones (n = 1..m). A rule counting only the zeros
  // in the open interval plus [u u' < 0] would give m for Neumann.
  const double              a = 1.0;
  const std::vector<double> v(5, 0.0);
  for (unsigned int m = 0; m < 12; ++m)
    {
      const double k = (m + 0.5) * pi / 5.0;
      EXPECT_EQ(count_below(v, a, Boundary::neumann, k * k), m + 1) << "m=" << m;
      EXPECT_EQ(count_below(v, a, Boundary::dirichlet, k * k), m) << "m=" << m;
    }
  // Just below and above each eigenvalue.
  for (unsigned int n = 1; n < 12; ++n)
    {
      const double lambda = pi * pi * n * n / 25.0;
      EXPECT_EQ(count_below(v, a, Boundary::dirichlet, lambda * (1 - 1e-9)), n - 1);
      EXPECT_EQ(count_below(v, a, Boundary::dirichlet, lambda * (1 + 1e-9)), n);
      EXPECT_EQ(count_below(v, a, Boundary::neumann, lambda * (1 - 1e-9)), n);
      EXPECT_EQ(count_below(v, a, Boundary::neumann, lambda * (1 + 1e-9)), n + 1);
    }
}

TEST(Sturm1d, TwoCellsMatchSecularEquation)
{
  // Two cells of width a with values v1, v2; μ_i = λ − v_i. Solutions regular at
  // the outer ends are u_L(x) = s(μ1, x) (Dirichlet) or c(μ1, x) (Neumann) and
  // u_R(x) = s(μ2, 2a − x) or c(μ2, 2a − x). Derived from continuity of u and u'
  // at x = a: λ is an eigenvalue iff the Wronskian u_L u_R' − u_L' u_R vanishes
  // there, i.e.
  //   Dirichlet: s1 c2 + c1 s2 = 0,   Neumann: μ2 c1 s2 + μ1 s1 c2 = 0,
  // with s_i = s(μ_i, a), c_i = c(μ_i, a). Both are entire in λ with simple zeros,
  // so a sign-change scan finds every eigenvalue.
  struct Case
  {
    double v1, v2, a;
  };
  for (const Case &cs : {Case{0.0, 7.3, 1.3}, Case{-2.5, 4.0, 0.6}, Case{12.0, 1.0, 2.1}})
    {
      const std::vector<double> v{cs.v1, cs.v2};
      const double              a     = cs.a;
      const auto dirichlet = [&](const double lambda) {
        const double m1 = lambda - cs.v1, m2 = lambda - cs.v2;
        return s_fn(m1, a) * c_fn(m2, a) + c_fn(m1, a) * s_fn(m2, a);
      };
      const auto neumann = [&](const double lambda) {
        const double m1 = lambda - cs.v1, m2 = lambda - cs.v2;
        return m2 * c_fn(m1, a) * s_fn(m2, a) + m1 * s_fn(m1, a) * c_fn(m2, a);
      };
      const double from = std::min(cs.v1, cs.v2) - 0.5;
      const double to   = std::max(cs.v1, cs.v2) + 120.0;
      for (const Boundary bc : {Boundary::dirichlet, Boundary::neumann})
        {
          const auto reference =
            roots(bc == Boundary::dirichlet ? std::function<double(double)>(dirichlet)
                                            : std::function<double(double)>(neumann),
                  from, to, 1e-3);
          ASSERT_GE(reference.size(), 4u);
          EXPECT_EQ(count_below(v, a, bc, to), reference.size());
          const auto lambda = lowest_eigenvalues(v, a, bc, reference.size());
          for (std::size_t i = 0; i < reference.size(); ++i)
            EXPECT_NEAR(lambda[i], reference[i], kSecularTolerance * scale(reference[i]))
              << "v=(" << cs.v1 << "," << cs.v2 << ") a=" << a << " i=" << i
              << (bc == Boundary::dirichlet ? " Dirichlet" : " Neumann");
        }
    }
}

TEST(Sturm1d, NearlyDegeneratePairOfWells)
{
  // Two wells of two cells each behind a barrier of height 30 and width 2: the
  // lowest pair is split by about e^{-2κ·2}-small tunnelling. By mirror symmetry
  // the even states solve the left half with u'(3) = 0 and the odd ones with
  // u(3) = 0; both half problems are shot independently with transfer matrices.
  const std::vector<double> v{0.0, 0.0, 30.0, 30.0, 0.0, 0.0};
  const double              a = 1.0;
  const auto shoot_half = [&](const double lambda) {
    // Transfer matrix of one cell: (u, u') -> (c u + s u', -μ s u + c u').
    double u = 0.0, du = 1.0;
    for (std::size_t n = 0; n < 3; ++n)
      {
        const double mu = lambda - v[n];
        const double s = s_fn(mu, a), c = c_fn(mu, a);
        const double u_next = c * u + s * du;
        du                  = -mu * s * u + c * du;
        u                   = u_next;
      }
    return std::make_pair(u, du);
  };
  const auto even = roots([&](double l) { return shoot_half(l).second; }, 0.1, 5.0, 1e-3);
  const auto odd  = roots([&](double l) { return shoot_half(l).first; }, 0.1, 5.0, 1e-3);
  ASSERT_EQ(even.size(), 1u);
  ASSERT_EQ(odd.size(), 1u);
  const double splitting = odd[0] - even[0];
  ASSERT_GT(splitting, 0.0);
  ASSERT_LT(splitting, 1e-3 * even[0]);

  const auto lambda = lowest_eigenvalues(v, a, Boundary::dirichlet, 2);
  EXPECT_NEAR(lambda[0], even[0], kSecularTolerance * scale(even[0]));
  EXPECT_NEAR(lambda[1], odd[0], kSecularTolerance * scale(odd[0]));
  EXPECT_EQ(count_below(v, a, Boundary::dirichlet, 0.5 * (even[0] + odd[0])), 1u);
}

TEST(Sturm1d, CountsAreMonotoneAndBracketed)
{
  // Random cell potential: the count is non-decreasing in λ, agrees with the
  // bisected eigenvalues on both sides of each, and Dirichlet and Neumann
  // eigenvalues interlace, λ_i^N < λ_i^D ≤ λ_{i+2}^N (min-max: the Dirichlet form
  // domain is the Neumann one with two linear constraints u(0) = u(ℓ) = 0; the
  // first inequality is strict since no nonzero solution has u = u' = 0).
  std::mt19937_64                        rng(20240611);
  std::uniform_real_distribution<double> law(-1.0, 3.0);
  std::vector<double>                    v(40);
  for (double &x : v)
    x = law(rng);
  const double a = 0.7;

  for (const Boundary bc : {Boundary::dirichlet, Boundary::neumann})
    {
      std::size_t previous = 0;
      for (double lambda = -1.5; lambda < 12.0; lambda += 1e-3)
        {
          const std::size_t n = count_below(v, a, bc, lambda);
          ASSERT_GE(n, previous) << "lambda=" << lambda;
          previous = n;
        }
      const auto eigenvalues = lowest_eigenvalues(v, a, bc, 30);
      for (std::size_t i = 0; i < eigenvalues.size(); ++i)
        {
          const double delta = 1e-9 * scale(eigenvalues[i]);
          EXPECT_EQ(count_below(v, a, bc, eigenvalues[i] - delta), i);
          EXPECT_EQ(count_below(v, a, bc, eigenvalues[i] + delta), i + 1);
        }
    }
  const auto d = lowest_eigenvalues(v, a, Boundary::dirichlet, 30);
  const auto n = lowest_eigenvalues(v, a, Boundary::neumann, 32);
  for (std::size_t i = 0; i < d.size(); ++i)
    {
      EXPECT_LT(n[i], d[i]);
      EXPECT_LE(d[i], n[i + 2]);
    }
}

TEST(Sturm1d, RejectsPeriodicAndEmpty)
{
  EXPECT_THROW(count_below({1.0}, 1.0, Boundary::periodic, 0.0), std::invalid_argument);
  EXPECT_THROW(count_below({}, 1.0, Boundary::dirichlet, 0.0), std::invalid_argument);
  EXPECT_THROW(lowest_eigenvalues({1.0}, 0.0, Boundary::neumann, 1), std::invalid_argument);
}
