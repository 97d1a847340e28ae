// Unit tests of exponential tilting (SingleSiteLaw::tilted(), tilted_laws.h)
// and of the log-likelihood ratio of a realisation (PotentialModel::log_weight):
// the tilted laws' sample means against closed-form tilted means, ln M(θ)
// against closed forms, log w = 0 exactly at θ = 0, and E_θ[w] = 1.
#include <alloyspec/core/errors.h>
#include <alloyspec/model/lattice.h>
#include <alloyspec/model/potential_model.h>
#include <alloyspec/model/random_stream.h>
#include <alloyspec/model/sampling.h>
#include <alloyspec/model/tilted_laws.h>
#include <alloyspec/model/tilt_choice.h>

#include <boost/math/special_functions/hypergeometric_1F1.hpp>

#include <gtest/gtest.h>

#include <cmath>
#include <functional>
#include <memory>
#include <string>
#include <vector>

namespace
{
  using namespace alloyspec;

  /**
   * The sample mean of n independent draws is asymptotically normal with
   * standard error s/√n (central limit theorem); 4 standard errors is common
   * practice for a deterministic statistical test (no source): a correct
   * sampler fails with probability ~6e-5 per check.
   */
  constexpr double allowed_standard_errors = 4.0;
  /**
   * ln M(θ) of the closed-form laws is a handful of elementary operations:
   * only rounding differs from the test-side formula.
   */
  constexpr double log_moment_tolerance = 1e-12;
  /**
   * Laws tilted by quadrature: the table is accurate to ~1e-13 relative
   * (Gauss–Kronrod agreement), the hypergeometric reference to ~1e-14 (Boost);
   * 1e-10 leaves room for the sum over ~2000 intervals.
   */
  constexpr double quadrature_tolerance = 1e-10;

  struct SampleStatistics
  {
    double mean, standard_error, mean_weight, weight_standard_error;
  };

  /** Draws @p n values of @p law.tilted(θ) with the library's stream and summarises them. */
  SampleStatistics sample(const SingleSiteLaw &law, const double theta, const std::size_t n)
  {
    const TiltedLaw tilted = law.tilted(theta);
    double          sum = 0, sum_sq = 0, w_sum = 0, w_sq = 0;
    for (std::size_t i = 0; i < n; ++i)
      {
        const double q = tilted.law->quantile(uniform_open01(17, 3, i));
        sum += q;
        sum_sq += q * q;
        // One cell's likelihood ratio p/p_θ = e^{θq} M(θ): its mean under p_θ is 1.
        const double w = std::exp(theta * q + tilted.log_moment);
        w_sum += w;
        w_sq += w * w;
      }
    const double mean   = sum / n;
    const double var    = (sum_sq - n * mean * mean) / (n - 1);
    const double w_mean = w_sum / n;
    const double w_var  = (w_sq - n * w_mean * w_mean) / (n - 1);
    return {mean, std::sqrt(var / n), w_mean, std::sqrt(std::max(w_var, 0.0) / n)};
  }

  /**
   * The weight check E_θ[w] = 1 is a Monte Carlo check only where w has a
   * modest variance: Var_θ(w) = M(θ)M(−θ) − 1, which grows like e^{|θ|·spread};
   * beyond |θ|·spread = 3 the sample standard error of w is itself unreliable
   * (heavy-tailed weights; common practice, no source).
   */
  constexpr double max_checked_tilt_spread = 3.0;

  void expect_tilted_mean(const SingleSiteLaw &law, const double theta, const double exact_mean,
                          const std::size_t n, const std::string &what, const double spread)
  {
    const SampleStatistics s = sample(law, theta, n);
    EXPECT_NEAR(s.mean, exact_mean, allowed_standard_errors * s.standard_error)
      << what << ", θ = " << theta;
    if (std::abs(theta) * spread <= max_checked_tilt_spread)
      {
        EXPECT_NEAR(s.mean_weight, 1.0, allowed_standard_errors * s.weight_standard_error)
          << what << " E_θ[w] = 1, θ = " << theta;
      }
  }

  /** Two-valued law: c_θ = c e^{−θA}/(c e^{−θA} + (1−c) e^{−θB}) (PHYSICS.md, rare-event sampling). */
  TEST(TiltedLaws, BernoulliClosedForm)
  {
    const double c = 0.3, a = 2.0, b = 0.0;
    const auto   law = make_bernoulli_law(c, a, b);
    for (const double theta : {-1.0, 0.7, 3.0})
      {
        const double ca = c * std::exp(-theta * a), cb = (1 - c) * std::exp(-theta * b);
        const double c_theta = ca / (ca + cb);
        expect_tilted_mean(*law, theta, c_theta * a + (1 - c_theta) * b, 200000, "bernoulli", a - b);
        EXPECT_NEAR(law->tilted(theta).log_moment, std::log(ca + cb), log_moment_tolerance);
      }
  }

  /** Finite law: p_i e^{−θv_i}/Σ p_j e^{−θv_j}, straight from the definition of the tilt. */
  TEST(TiltedLaws, DiscreteClosedForm)
  {
    const std::vector<double> v{-1.0, 0.5, 2.0, 4.0}, p{0.1, 0.2, 0.3, 0.4};
    const auto                law = make_discrete_law(v, p);
    for (const double theta : {-0.5, 1.2})
      {
        double z = 0, m = 0;
        for (std::size_t i = 0; i < v.size(); ++i)
          {
            z += p[i] * std::exp(-theta * v[i]);
            m += v[i] * p[i] * std::exp(-theta * v[i]);
          }
        expect_tilted_mean(*law, theta, m / z, 200000, "discrete", 5.0);
        EXPECT_NEAR(law->tilted(theta).log_moment, std::log(z), log_moment_tolerance);
      }
  }

  /**
   * Binomial(n, x) composition: the tilted law of K is Binomial(n, x_θ) with
   * x_θ = x e^{−θd}/(1 − x + x e^{−θd}), d = (q_A − q_B)/n, and
   * M = e^{−θq_B}(1 − x + x e^{−θd})^n (moment generating function of the
   * binomial law, e.g. Feller vol. 1 ch. XI; from memory).
   */
  TEST(TiltedLaws, BinomialClosedForm)
  {
    const unsigned int n = 12;
    const double       x = 0.4, qa = 1.5, qb = -0.5;
    const auto         law = make_binomial_alloy_law(n, x, qa, qb);
    for (const double theta : {-2.0, 1.0, 6.0})
      {
        const double d = (qa - qb) / n, e = x * std::exp(-theta * d);
        const double x_theta = e / (1 - x + e);
        expect_tilted_mean(*law, theta, qb + (qa - qb) * x_theta, 200000, "binomial", qa - qb);
        EXPECT_NEAR(law->tilted(theta).log_moment, -theta * qb + n * std::log(1 - x + e),
                    log_moment_tolerance);
      }
  }

  /**
   * Uniform on [a, b]: M = (e^{−θa} − e^{−θb})/(θΔ); the tilted mean is
   * −d ln M/dθ = a + 1/θ − Δ/(e^{θΔ} − 1) (elementary integrals).
   */
  TEST(TiltedLaws, UniformClosedForm)
  {
    const double a = -1.0, b = 3.0;
    const auto   law = make_uniform_law(a, b);
    for (const double theta : {-2.0, 0.3, 5.0})
      {
        const double delta = b - a;
        expect_tilted_mean(*law, theta, a + 1.0 / theta - delta / std::expm1(theta * delta),
                           200000, "uniform", delta);
        EXPECT_NEAR(law->tilted(theta).log_moment,
                    std::log((std::exp(-theta * a) - std::exp(-theta * b)) / (theta * delta)),
                    log_moment_tolerance);
      }
  }

  /** Normal N(μ, σ²): completing the square gives N(μ − θσ², σ²) and M = e^{−θμ + θ²σ²/2}. */
  TEST(TiltedLaws, GaussianClosedForm)
  {
    const double mu = 1.0, sigma = 0.5;
    const auto   law = make_gaussian_law(mu, sigma);
    for (const double theta : {-3.0, 2.0, 8.0})
      {
        expect_tilted_mean(*law, theta, mu - theta * sigma * sigma, 200000, "gaussian", 4 * sigma);
        EXPECT_NEAR(law->tilted(theta).log_moment,
                    -theta * mu + 0.5 * theta * theta * sigma * sigma, log_moment_tolerance);
      }
  }

  /**
   * Truncated normal on [a, b]: the tilt is the normal N(μ', σ²), μ' = μ − θσ²,
   * truncated to [a, b]; mean μ' + σ(φ(α') − φ(β'))/Z' (Johnson, Kotz &
   * Balakrishnan vol. 1, ch. 13 §10.1), M = e^{−θμ+θ²σ²/2} Z'/Z.
   */
  TEST(TiltedLaws, TruncatedGaussianClosedForm)
  {
    const double mu = 0.0, sigma = 1.0, a = -1.0, b = 2.5;
    const auto   law = make_truncated_gaussian_law(mu, sigma, a, b);
    const auto   phi = [](double x) { return std::exp(-0.5 * x * x) / std::sqrt(2 * M_PI); };
    const auto   cdf = [](double x) { return 0.5 * std::erfc(-x / std::sqrt(2.0)); };
    for (const double theta : {-1.5, 2.0})
      {
        const double shifted = mu - theta * sigma * sigma;
        const double alpha = (a - shifted) / sigma, beta = (b - shifted) / sigma;
        const double z_theta = cdf(beta) - cdf(alpha);
        const double z       = cdf((b - mu) / sigma) - cdf((a - mu) / sigma);
        expect_tilted_mean(*law, theta, shifted + sigma * (phi(alpha) - phi(beta)) / z_theta,
                           200000, "truncated gaussian", b - a);
        EXPECT_NEAR(law->tilted(theta).log_moment,
                    -theta * mu + 0.5 * theta * theta * sigma * sigma + std::log(z_theta / z),
                    log_moment_tolerance);
      }
  }

  /**
   * Beta(α, β) on [a, b]: E[e^{−tX}] = ₁F₁(α; α+β; −t) (Kummer's function;
   * DLMF 13.4.1), and d/dz ₁F₁(α; γ; z) = (α/γ) ₁F₁(α+1; γ+1; z) (DLMF 13.3.15),
   * so the tilted mean of X is α/(α+β) · ₁F₁(α+1; α+β+1; −t)/₁F₁(α; α+β; −t),
   * t = θ(b − a). Reference values by Boost.Math's hypergeometric_1F1.
   */
  TEST(TiltedLaws, BetaAgainstKummerFunction)
  {
    const double alpha = 2.0, beta = 0.5, a = 1.0, b = 3.0;
    const auto   law = make_beta_law(alpha, beta, a, b);
    for (const double theta : {-1.0, 4.0, 20.0})
      {
        const double t  = theta * (b - a);
        const double m0 = boost::math::hypergeometric_1F1(alpha, alpha + beta, -t);
        const double m1 = boost::math::hypergeometric_1F1(alpha + 1, alpha + beta + 1, -t);
        const TiltedLaw tilted = law->tilted(theta);
        EXPECT_NEAR(tilted.log_moment, -theta * a + std::log(m0),
                    quadrature_tolerance * std::max(1.0, std::abs(tilted.log_moment)));
        const double exact_mean = a + (b - a) * alpha / (alpha + beta) * m1 / m0;
        EXPECT_NEAR(tilted.law->mean(), exact_mean, quadrature_tolerance * (b - a));
        expect_tilted_mean(*law, theta, exact_mean, 20000, "beta", b - a);
      }
  }

  /**
   * Piecewise-linear density: on each piece h(q) = c₀ + c₁q, and
   * ∫e^{−θq}dq = −e^{−θq}/θ, ∫q e^{−θq}dq = −e^{−θq}(q/θ + 1/θ²) (elementary).
   */
  TEST(TiltedLaws, TabulatedAgainstPiecewiseIntegrals)
  {
    const std::vector<double> q{0.0, 1.0, 1.5, 3.0}, h{0.2, 1.0, 0.0, 0.6};
    const auto                law = make_tabulated_law(q, h, "test density");
    for (const double theta : {-0.8, 2.5, 12.0})
      {
        const auto i0 = [&](double x) { return -std::exp(-theta * x) / theta; };
        const auto i1 = [&](double x) {
          return -std::exp(-theta * x) * (x / theta + 1 / (theta * theta));
        };
        double mass = 0, integral = 0, first = 0;
        for (std::size_t i = 0; i + 1 < q.size(); ++i)
          {
            const double slope = (h[i + 1] - h[i]) / (q[i + 1] - q[i]);
            const double c0    = h[i] - slope * q[i];
            integral += 0.5 * (h[i] + h[i + 1]) * (q[i + 1] - q[i]);
            mass += c0 * (i0(q[i + 1]) - i0(q[i])) + slope * (i1(q[i + 1]) - i1(q[i]));
            const auto i2 = [&](double x) {
              return -std::exp(-theta * x) *
                     (x * x / theta + 2 * x / (theta * theta) + 2 / (theta * theta * theta));
            };
            first += c0 * (i1(q[i + 1]) - i1(q[i])) + slope * (i2(q[i + 1]) - i2(q[i]));
          }
        const TiltedLaw tilted = law->tilted(theta);
        EXPECT_NEAR(tilted.log_moment, std::log(mass / integral),
                    quadrature_tolerance * std::max(1.0, std::abs(tilted.log_moment)));
        EXPECT_NEAR(tilted.law->mean(), first / mass, quadrature_tolerance * 3.0);
        expect_tilted_mean(*law, theta, first / mass, 20000, "tabulated", 3.0);
      }
  }

  /** The check: a realisation drawn at θ = 0 has log w exactly 0 and the plain values. */
  TEST(TiltedLaws, ZeroTiltIsPlainSamplingWithZeroLogWeight)
  {
    const Lattice lattice({6, 6, 6});
    std::vector<std::unique_ptr<SingleSiteLaw>> laws;
    laws.push_back(make_uniform_law(0, 2));
    laws.push_back(make_bernoulli_law(0.2, 1.5, 0));
    laws.push_back(make_discrete_law({0, 1, 3}, {0.5, 0.25, 0.25}));
    laws.push_back(make_gaussian_law(0, 1));
    laws.push_back(make_truncated_gaussian_law(0, 1, -1, 1));
    laws.push_back(make_beta_law(2, 3, 0, 1));
    laws.push_back(make_tabulated_law({0, 1, 2}, {1, 2, 0}, "test"));
    laws.push_back(make_binomial_alloy_law(10, 0.3, 1, 0));
    for (auto &law : laws)
      {
        const std::string what = law->description();
        PotentialModel    plain, tilted;
        plain.set_law(law->tilted(0.0).law, lattice);
        tilted.set_law(std::move(law), lattice);
        tilted.set_tilt(0.0);
        for (std::uint64_t r = 0; r < 3; ++r)
          {
            const std::vector<double> q = tilted.cell_values(5, r);
            EXPECT_EQ(tilted.log_weight(q), 0.0) << what;
            EXPECT_EQ(q, plain.cell_values(5, r)) << what;
          }
      }
  }

  /**
   * log w of a realisation equals Σ_n ln(p(q_n)/p_θ(q_n)) computed cell by
   * cell from the two laws' probabilities (bernoulli: ln(c/c_θ) or
   * ln((1−c)/(1−c_θ))), and cell values are a pure function of (seed,
   * realisation, cell, tilt).
   */
  TEST(TiltedLaws, RealisationLogWeightAgainstCellByCellRatio)
  {
    const Lattice  lattice({8, 8});
    const double   c = 0.25, a = 1.0, b = 0.0, theta = 1.7;
    PotentialModel model;
    model.set_law(make_bernoulli_law(c, a, b), lattice);
    model.set_tilt(theta);
    const double ca = c * std::exp(-theta * a), cb = (1 - c) * std::exp(-theta * b);
    const double c_theta = ca / (ca + cb);
    for (std::uint64_t r = 0; r < 4; ++r)
      {
        const std::vector<double> q = model.cell_values(9, r);
        double                    expected = 0;
        for (const double value : q)
          expected += value == a ? std::log(c / c_theta) : std::log((1 - c) / (1 - c_theta));
        EXPECT_NEAR(model.log_weight(q), expected, 1e-12 * q.size());
        EXPECT_EQ(q, model.cell_values(9, r));
      }
    PotentialModel other;
    other.set_law(make_bernoulli_law(c, a, b), lattice);
    other.set_tilt(0.5);
    EXPECT_NE(model.cell_values(9, 0), other.cell_values(9, 0));
  }

  TEST(TiltedLaws, FixedValuesRefuseTilting)
  {
    const Lattice  lattice({2, 2});
    PotentialModel model;
    model.set_fixed_values({0, 1, 2, 3}, lattice);
    EXPECT_THROW(model.set_tilt(1.0), InputError);
  }

  /**
   * Cross-entropy update for a two-valued law: moment matching
   * A c_θ + B(1 − c_θ) = m* inverts to θ = ln(c(1 − c_θ)/((1 − c)c_θ))/(A − B)
   * with c_θ = (m* − B)/(A − B) (from the tilted probability in PHYSICS.md).
   */
  TEST(TiltedLaws, CrossEntropyTiltMatchesTheEliteMean)
  {
    const double c = 0.5, a = 4.0, b = 0.0;
    const auto   law = make_bernoulli_law(c, a, b);
    // Elite means 0.8 and 1.2 with weights e^{-1} and e^{-2}: m* = (0.8 e^{-1} + 1.2 e^{-2})/(e^{-1} + e^{-2}).
    const std::vector<PilotSample> elite{{0.8, -1.0}, {1.2, -2.0}};
    const double wanted = (0.8 * std::exp(-1.0) + 1.2 * std::exp(-2.0)) /
                          (std::exp(-1.0) + std::exp(-2.0));
    const double c_theta = (wanted - b) / (a - b);
    const double exact   = std::log(c * (1 - c_theta) / ((1 - c) * c_theta)) / (a - b);
    EXPECT_NEAR(cross_entropy_tilt(*law, elite, max_tilt), exact, 1e-9);
  }

  TEST(TiltedLaws, TooStrongTiltIsRefused)
  {
    EXPECT_THROW(make_truncated_gaussian_law(0, 1, -1, 1)->tilted(50.0), InputError);
  }
} // namespace
